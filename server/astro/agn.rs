//! Active-nucleus quantities: virial masses, the broad-line-region radius–luminosity relation,
//! Eddington luminosity and ratio, accretion rate, and radiative efficiency from spin.
//!
//! Reverberation and single-epoch masses are kept in two steps, the virial product
//! VP = c τ Δv² / G (a measurement) and M = f · VP (a calibration), so that every mass can be
//! recomputed when the adopted virial factor ⟨f⟩ changes.

use super::AstroError;
use super::constants::{
    ERG_PER_JOULE, GM_SUN_M3_S2, JULIAN_YEAR_S, PROTON_MASS_KG, SECONDS_PER_DAY, SOLAR_MASS_KG,
    SPEED_OF_LIGHT_M_S, THOMSON_CROSS_SECTION_M2,
};
use super::validate::{finite, positive, positive_result};

/// Virial product, in M☉: the black-hole mass for a virial factor of one.
///
/// ```text
/// VP = c τ Δv² / G
/// ```
///
/// where τ is the rest-frame lag (days), Δv the line width (km/s; `σ_line` from the rms spectrum
/// or the FWHM, and the virial factor must match the choice), c the speed of light and G taken
/// through GM☉, so that VP in M☉ carries none of G's uncertainty.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `lag_days` or `line_width_km_s`
/// is not a finite number greater than zero; [`AstroError::Unrepresentable`] if the product
/// overflows or underflows.
///
/// # References
/// Peterson et al. 2004, ApJ 613, 682 (virial product; citation from memory); docs/methods.md §4.1.
pub fn virial_product_msun(lag_days: f64, line_width_km_s: f64) -> Result<f64, AstroError> {
    let lag_days = positive("lag_days", lag_days)?;
    let line_width_km_s = positive("line_width_km_s", line_width_km_s)?;
    let radius_m = SPEED_OF_LIGHT_M_S * (lag_days * SECONDS_PER_DAY);
    let width_m_s = line_width_km_s * 1.0e3;
    positive_result(
        "virial_product_msun",
        radius_m * (width_m_s / GM_SUN_M3_S2) * width_m_s,
    )
}

/// Virial black-hole mass, in M☉, from a virial product and a virial factor.
///
/// ```text
/// M = f · VP
/// ```
///
/// where VP is the virial product (M☉, from [`virial_product_msun`]) and f the dimensionless
/// virial factor matching the line-width measure (e.g. ⟨f⟩ = 4.31 ± 1.05 for `σ_line`, Grier et
/// al. 2013, ApJ 773, 90, from memory).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if either input is not a finite
/// number greater than zero; [`AstroError::Unrepresentable`] if the mass overflows or
/// underflows.
pub fn virial_mass_msun(virial_product_msun: f64, virial_factor: f64) -> Result<f64, AstroError> {
    let virial_product_msun = positive("virial_product_msun", virial_product_msun)?;
    let virial_factor = positive("virial_factor", virial_factor)?;
    positive_result("mass_msun", virial_factor * virial_product_msun)
}

/// Luminosity at which the radius–luminosity relation is normalised: `λL_λ(5100 Å) = 10⁴⁴ erg/s`.
pub const R_L_PIVOT_ERG_S: f64 = 1.0e44;

/// A broad-line-region radius–luminosity relation.
///
/// ```text
/// log₁₀(R_BLR / lt-day) = K + α log₁₀( λL_λ(5100 Å) / 10⁴⁴ erg s⁻¹ )
/// ```
///
/// The luminosity must have the host galaxy's starlight removed. The default is
/// [`BENTZ_2013`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RadiusLuminosity {
    /// K: log₁₀ of the radius in light-days at the pivot luminosity (dex).
    pub intercept_dex: f64,
    /// α: the slope, dimensionless.
    pub slope: f64,
}

/// The Hβ radius–luminosity relation of Bentz et al. 2013: K = 1.527, α = 0.533.
///
/// # References
/// Bentz et al. 2013, ApJ 767, 149: α = 0.533 (+0.035/−0.033) from the abstract; K = 1.527 ±
/// 0.031 from memory (verify against the paper's table before relying on the third decimal).
pub const BENTZ_2013: RadiusLuminosity = RadiusLuminosity {
    intercept_dex: 1.527,
    slope: 0.533,
};

impl Default for RadiusLuminosity {
    fn default() -> Self {
        BENTZ_2013
    }
}

impl RadiusLuminosity {
    /// Broad-line-region radius, in light-days, at a 5100 Å luminosity `λL_λ` (erg/s).
    ///
    /// ```text
    /// R_BLR = 10^( K + α log₁₀(λL_λ(5100 Å) / 10⁴⁴ erg s⁻¹) ) lt-day
    /// ```
    ///
    /// # Errors
    /// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `luminosity_5100_erg_s` is
    /// not a finite number greater than zero; [`AstroError::NotFinite`] if K or α is not
    /// finite; [`AstroError::Unrepresentable`] if the radius overflows or underflows.
    ///
    /// # References
    /// Bentz et al. 2013, ApJ 767, 149 (form of the relation).
    pub fn radius_lt_days(self, luminosity_5100_erg_s: f64) -> Result<f64, AstroError> {
        let luminosity_5100_erg_s = positive("luminosity_5100_erg_s", luminosity_5100_erg_s)?;
        let intercept_dex = finite("intercept_dex", self.intercept_dex)?;
        let slope = finite("slope", self.slope)?;
        let log_radius = intercept_dex + slope * (luminosity_5100_erg_s / R_L_PIVOT_ERG_S).log10();
        positive_result("radius_lt_days", 10f64.powf(log_radius))
    }
}

/// A single-epoch Hβ mass calibration of the form
///
/// ```text
/// log₁₀(M / M☉) = a + log₁₀[ (FWHM(Hβ) / 1000 km s⁻¹)² (λL_λ(5100 Å) / 10⁴⁴ erg s⁻¹)^b ]
/// ```
///
/// with its scatter about reverberation masses, which a single-epoch mass carries as an error
/// floor. The default is [`VESTERGAARD_PETERSON_2006`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SingleEpoch {
    /// a: the zero point, dex.
    pub zero_point_dex: f64,
    /// b: the luminosity exponent, dimensionless.
    pub luminosity_exponent: f64,
    /// Scatter of the calibration about reverberation masses, dex.
    pub scatter_dex: f64,
}

/// The Hβ single-epoch calibration of Vestergaard & Peterson 2006: a = 6.91, b = 0.50,
/// scatter 0.43 dex.
///
/// # References
/// Vestergaard & Peterson 2006, ApJ 641, 689: zero point 6.91 ± 0.02, exponent 0.50, scatter
/// 0.43 dex (from memory; docs/methods.md §4.2).
pub const VESTERGAARD_PETERSON_2006: SingleEpoch = SingleEpoch {
    zero_point_dex: 6.91,
    luminosity_exponent: 0.50,
    scatter_dex: 0.43,
};

impl SingleEpoch {
    /// log₁₀ of the single-epoch mass (M☉) from FWHM(Hβ) (km/s) and λL_λ(5100 Å) (erg/s), by the
    /// formula of [`SingleEpoch`].
    ///
    /// # Errors
    /// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] for an input that is not a
    /// finite number greater than zero.
    pub fn log_mass_msun(
        self,
        fwhm_km_s: f64,
        luminosity_5100_erg_s: f64,
    ) -> Result<f64, AstroError> {
        let fwhm_km_s = positive("fwhm_km_s", fwhm_km_s)?;
        let luminosity_5100_erg_s = positive("luminosity_5100_erg_s", luminosity_5100_erg_s)?;
        Ok(self.zero_point_dex
            + 2.0 * (fwhm_km_s / 1000.0).log10()
            + self.luminosity_exponent * (luminosity_5100_erg_s / R_L_PIVOT_ERG_S).log10())
    }
}

/// The error floor of a single-epoch mass made through the radius–luminosity relation and
/// ⟨f⟩, dex: √(0.19² + 0.40²) = 0.443 (computed), the scatter of the Bentz et al. 2013
/// relation (0.19 dex, abstract) with a scatter of the AGN's virial factors about ⟨f⟩ of
/// 0.40 dex (Woo et al. 2010 found 0.43 ± 0.08 for the AGN's scatter about M–σ, abstract).
/// docs/methods.md §4.2.
pub const R_L_ROUTE_SCATTER_DEX: f64 = 0.443;

/// The bolometric correction at 5100 Å that massline states with every Eddington ratio:
/// L_bol = 9.26 λL_λ(5100 Å) (Richards et al. 2006, ApJS 166, 470; from memory;
/// docs/methods.md §4.7).
pub const BOLOMETRIC_CORRECTION_5100: f64 = 9.26;

/// A single-epoch mass through a radius–luminosity relation and a virial factor, in M☉:
///
/// ```text
/// τ = R_BLR(λL_λ(5100 Å)) / c      (the relation gives R in light-days, i.e. τ in days)
/// M = f · c τ Δv² / G
/// ```
///
/// # Errors
/// As [`RadiusLuminosity::radius_lt_days`], [`virial_product_msun`] and [`virial_mass_msun`].
pub fn single_epoch_mass_msun(
    relation: RadiusLuminosity,
    luminosity_5100_erg_s: f64,
    line_width_km_s: f64,
    virial_factor: f64,
) -> Result<f64, AstroError> {
    let lag_days = relation.radius_lt_days(luminosity_5100_erg_s)?;
    virial_mass_msun(
        virial_product_msun(lag_days, line_width_km_s)?,
        virial_factor,
    )
}

/// Eddington luminosity, in erg/s, of a black hole of mass M (M☉).
///
/// ```text
/// L_Edd = 4π G M m_p c / σ_T = 4π (GM☉) (M/M☉) m_p c / σ_T
/// ```
///
/// where `m_p` is the proton mass, c the speed of light and `σ_T` the Thomson cross-section
/// (CODATA 2018), and GM☉ the IAU nominal solar mass parameter; about 1.257e38 erg/s per M☉.
/// Assumes pure hydrogen and electron scattering; for hydrogen mass fraction X multiply by
/// 2/(1 + X).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `mass_msun` is not a finite
/// number greater than zero; [`AstroError::Unrepresentable`] if the result overflows or
/// underflows.
///
/// # References
/// Eddington limit for electron scattering (e.g. Frank, King & Raine 2002, *Accretion Power in
/// Astrophysics*, 3rd ed., §1.2; from memory); docs/methods.md §4.4.
pub fn eddington_luminosity_erg_s(mass_msun: f64) -> Result<f64, AstroError> {
    let mass_msun = positive("mass_msun", mass_msun)?;
    let per_msun_w =
        4.0 * std::f64::consts::PI * GM_SUN_M3_S2 * PROTON_MASS_KG * SPEED_OF_LIGHT_M_S
            / THOMSON_CROSS_SECTION_M2;
    positive_result(
        "eddington_luminosity_erg_s",
        per_msun_w * ERG_PER_JOULE * mass_msun,
    )
}

/// Eddington ratio `λ = L_bol / L_Edd` (dimensionless).
///
/// ```text
/// λ = L_bol / L_Edd(M)
/// ```
///
/// where `L_bol` is the bolometric luminosity (erg/s) and `L_Edd` from
/// [`eddington_luminosity_erg_s`] for the mass M (M☉).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if either input is not a finite
/// number greater than zero; [`AstroError::Unrepresentable`] if the ratio overflows or
/// underflows.
pub fn eddington_ratio(luminosity_bol_erg_s: f64, mass_msun: f64) -> Result<f64, AstroError> {
    let luminosity_bol_erg_s = positive("luminosity_bol_erg_s", luminosity_bol_erg_s)?;
    let eddington_erg_s = eddington_luminosity_erg_s(mass_msun)?;
    positive_result("eddington_ratio", luminosity_bol_erg_s / eddington_erg_s)
}

/// Mass accretion rate, in M☉ per Julian year, that powers a bolometric luminosity.
///
/// ```text
/// Ṁ = L_bol / (η c²)
/// ```
///
/// where `L_bol` is in erg/s, η is the radiative efficiency (dimensionless, 0 < η < 1) and c the
/// speed of light. Converting kg/s to M☉/yr needs M☉ in kilograms, GM☉/G, so this result
/// carries G's relative uncertainty of 2.2e-5 (CODATA 2018).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `luminosity_bol_erg_s` is not a
/// finite number greater than zero; [`AstroError::NotFinite`] or
/// [`AstroError::EfficiencyOutOfRange`] if `efficiency` is not strictly between 0 and 1;
/// [`AstroError::Unrepresentable`] if the rate overflows or underflows.
pub fn accretion_rate_msun_yr(
    luminosity_bol_erg_s: f64,
    efficiency: f64,
) -> Result<f64, AstroError> {
    let luminosity_bol_erg_s = positive("luminosity_bol_erg_s", luminosity_bol_erg_s)?;
    let efficiency = finite("efficiency", efficiency)?;
    if !(efficiency > 0.0 && efficiency < 1.0) {
        return Err(AstroError::EfficiencyOutOfRange { value: efficiency });
    }
    let luminosity_w = luminosity_bol_erg_s / ERG_PER_JOULE;
    let rate_kg_s = luminosity_w / (efficiency * SPEED_OF_LIGHT_M_S * SPEED_OF_LIGHT_M_S);
    positive_result(
        "accretion_rate_msun_yr",
        rate_kg_s * (JULIAN_YEAR_S / SOLAR_MASS_KG),
    )
}

/// The spin, if finite and within \[−1, 1\].
fn checked_spin(spin: f64) -> Result<f64, AstroError> {
    let spin = finite("spin", spin)?;
    if (-1.0..=1.0).contains(&spin) {
        Ok(spin)
    } else {
        Err(AstroError::SpinOutOfRange { value: spin })
    }
}

/// Radius of the innermost stable circular orbit of a Kerr black hole, in units of GM/c².
///
/// ```text
/// Z₁ = 1 + (1 − a²)^(1/3) [ (1 + a)^(1/3) + (1 − a)^(1/3) ]
/// Z₂ = sqrt(3a² + Z₁²)
/// r_isco = 3 + Z₂ ∓ sqrt( (3 − Z₁)(3 + Z₁ + 2 Z₂) )
/// ```
///
/// `spin` is the signed dimensionless spin a = cJ/(GM²) in \[−1, 1\]: a ≥ 0 for a disk
/// orbiting with the hole (prograde, upper sign), a < 0 for a disk orbiting against it
/// (retrograde, lower sign). `r_isco` runs from 9 (a = −1) through 6 (a = 0) to 1 (a = 1).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::SpinOutOfRange`] if `spin` is not a finite number
/// between −1 and 1 inclusive.
///
/// # References
/// Bardeen, Press & Teukolsky 1972, ApJ 178, 347, eq. 2.21 (equation number from memory).
pub fn isco_radius_gravitational(spin: f64) -> Result<f64, AstroError> {
    let spin = checked_spin(spin)?;
    // Z₁ and Z₂ are even in a; the sign of a picks the prograde or retrograde root.
    let magnitude = spin.abs();
    let z1 = 1.0
        + (1.0 - magnitude * magnitude).cbrt()
            * ((1.0 + magnitude).cbrt() + (1.0 - magnitude).cbrt());
    let z2 = (3.0 * magnitude * magnitude + z1 * z1).sqrt();
    // Z₁ ≤ 3 exactly; rounding near a = 0 must not push 3 − Z₁ below zero.
    let root = ((3.0 - z1).max(0.0) * (3.0 + z1 + 2.0 * z2)).sqrt();
    let radius = if spin >= 0.0 {
        3.0 + z2 - root
    } else {
        3.0 + z2 + root
    };
    positive_result("isco_radius", radius)
}

/// Radiative efficiency of a thin disk ending at the innermost stable circular orbit.
///
/// ```text
/// η = 1 − E_isco = 1 − sqrt( 1 − 2 / (3 r_isco) )
/// ```
///
/// where `E_isco` is the specific energy (units of c²) of the innermost stable circular orbit
/// and `r_isco` its radius (GM/c², from [`isco_radius_gravitational`]). `spin` is signed as
/// there: η = 0.0572 at a = 0, 0.3210 at a = 0.998, 1 − 1/√3 = 0.4226 at a = 1 and
/// 1 − sqrt(25/27) = 0.0377 at a = −1.
///
/// # Errors
/// As [`isco_radius_gravitational`].
///
/// # References
/// Bardeen, Press & Teukolsky 1972, ApJ 178, 347 (formula from memory); Thorne 1974, ApJ 191,
/// 507 (the a = 0.998 limit; from memory).
pub fn radiative_efficiency(spin: f64) -> Result<f64, AstroError> {
    let radius = isco_radius_gravitational(spin)?;
    // r_isco ≥ 1, so the argument of the square root is at least 1/3.
    positive_result("efficiency", 1.0 - (1.0 - 2.0 / (3.0 * radius)).sqrt())
}

#[cfg(test)]
mod tests {
    use super::super::test_support::{assert_abs, assert_rel};
    use super::*;

    #[test]
    fn eddington_luminosity_per_solar_mass() {
        // docs/methods.md §4.4 / §7 row 21: L_Edd/M = 1.257065e38 erg/s per M☉, computed from IAU
        // 2015 GM☉ and CODATA 2018 m_p, c, σ_T.
        assert_rel(eddington_luminosity_erg_s(1.0).unwrap(), 1.257_065e38, 5e-7);
        assert_rel(
            eddington_luminosity_erg_s(1.0e8).unwrap(),
            1.257_065e46,
            5e-7,
        );
    }

    #[test]
    fn eddington_ratio_is_one_at_the_eddington_luminosity() {
        // λ = L_bol/L_Edd (docs/methods.md §4.4), with L_Edd of 1e7 M☉ = 1.257065e45 erg/s (computed).
        assert_rel(eddington_ratio(1.257_065e45, 1.0e7).unwrap(), 1.0, 5e-7);
        assert_rel(eddington_ratio(1.257_065e44, 1.0e7).unwrap(), 0.1, 5e-7);
    }

    #[test]
    fn virial_product_and_mass_for_a_10_day_lag() {
        // docs/methods.md §4.1 / §7 row 27: τ = 10 d, σ_line = 2000 km/s → VP = 7.80698e6 M☉; with
        // ⟨f⟩ = 4.31 (Grier et al. 2013, ApJ 773, 90, from memory) → 3.365e7 M☉ (log 7.527),
        // computed from VP = c τ Δv²/G.
        let vp = virial_product_msun(10.0, 2000.0).unwrap();
        assert_rel(vp, 7.806_98e6, 1e-6);
        let mass = virial_mass_msun(vp, 4.31).unwrap();
        assert_rel(mass, 3.365e7, 2e-4);
        assert_abs(mass.log10(), 7.527, 5e-4);
    }

    #[test]
    fn the_virial_product_of_one_day_and_1000_km_s() {
        // VP = c τ Δv²/G for τ = 1 d, Δv = 1000 km/s: 2.99792458e8 m/s × 86400 s × (1e6 m/s)² /
        // 1.3271244e20 m³/s² = 1.95174e5 M☉ (computed from CODATA c and the IAU nominal GM☉).
        assert_rel(virial_product_msun(1.0, 1000.0).unwrap(), 1.951_744e5, 1e-6);
    }

    #[test]
    fn single_epoch_masses_by_calibration_and_by_radius_luminosity() {
        // Vestergaard & Peterson 2006 (from memory): FWHM 4000 km/s at 10⁴⁴ erg/s →
        // 6.91 + 2 log 4 = 8.114 (computed); ten times the luminosity adds 0.5 dex.
        let vp06 = VESTERGAARD_PETERSON_2006;
        assert_abs(vp06.log_mass_msun(4000.0, 1.0e44).unwrap(), 8.114_12, 1e-5);
        assert_abs(
            vp06.log_mass_msun(4000.0, 1.0e45).unwrap()
                - vp06.log_mass_msun(4000.0, 1.0e44).unwrap(),
            0.5,
            1e-12,
        );
        assert!(vp06.log_mass_msun(0.0, 1.0e44).is_err());
        // Through Bentz et al. 2013 at 10⁴⁴ erg/s: τ = 33.65 d; with σ_line 2000 km/s and
        // f = 4.31: 10^1.527 × 1.95174e5 × 4 × 4.31 = 1.1323e8 M☉ (computed).
        let m = single_epoch_mass_msun(BENTZ_2013, 1.0e44, 2000.0, 4.31).unwrap();
        assert_rel(m, 1.1323e8, 5e-4);
    }

    #[test]
    fn virial_mass_follows_a_changed_factor() {
        // Recomputing with a new ⟨f⟩ only rescales the stored product (docs/methods.md §6).
        let vp = virial_product_msun(10.0, 2000.0).unwrap();
        let old = virial_mass_msun(vp, 4.31).unwrap();
        let new = virial_mass_msun(vp, 5.1).unwrap();
        assert_rel(new / old, 5.1 / 4.31, 1e-14);
    }

    #[test]
    fn bentz_radius_luminosity_relation() {
        // Bentz et al. 2013, ApJ 767, 149: K = 1.527 (from memory), α = 0.533 (abstract).
        // docs/methods.md §4.2 / §7 row 28 examples, computed from the relation:
        // 1e43 → 9.86 lt-d, 1e44 → 33.65 lt-d, 1e45 → 114.8 lt-d.
        let relation = RadiusLuminosity::default();
        assert_eq!(relation, BENTZ_2013);
        assert_rel(relation.radius_lt_days(1.0e44).unwrap(), 33.65, 2e-4);
        assert_rel(relation.radius_lt_days(1.0e43).unwrap(), 9.86, 5e-4);
        assert_rel(relation.radius_lt_days(1.0e45).unwrap(), 114.8, 5e-4);
    }

    #[test]
    fn radius_luminosity_parameters_can_be_replaced() {
        // Kaspi et al. 2005-like slope 0.67 (docs/methods.md §4.2, abstract value) with the same
        // intercept: one decade in L moves R by 10^0.67.
        let steeper = RadiusLuminosity {
            intercept_dex: 1.527,
            slope: 0.67,
        };
        let ratio =
            steeper.radius_lt_days(1.0e45).unwrap() / steeper.radius_lt_days(1.0e44).unwrap();
        assert_rel(ratio, 10f64.powf(0.67), 1e-12);
    }

    #[test]
    fn accretion_rate_for_a_bright_quasar() {
        // Common practice: accreting 1 M☉/yr at η = 0.1 yields η Ṁ c² ≈ 5.7e45 erg/s, i.e.
        // L = 1e46 erg/s needs ≈ 1.77 M☉/yr. Computed from Ṁ = L/(η c²) with the Julian year and
        // M☉ = GM☉/G (IAU 2015 B3, CODATA 2018): 1.765862 M☉/yr.
        let rate = accretion_rate_msun_yr(1.0e46, 0.1).unwrap();
        assert_rel(rate, 1.765_862, 1e-6);
        assert_rel(1.0e46 / rate, 5.7e45, 0.01);
        // Ṁ ∝ 1/η.
        assert_rel(
            accretion_rate_msun_yr(1.0e46, 0.05).unwrap(),
            2.0 * rate,
            1e-14,
        );
    }

    #[test]
    fn isco_radius_and_efficiency_table() {
        // docs/methods.md §4.5 table, computed from the Bardeen, Press & Teukolsky 1972 (ApJ 178, 347)
        // formulae; a < 0 is retrograde.
        let table = [
            (0.0, 6.0, 0.057_191),
            (0.5, 4.233_003, 0.082_118),
            (0.9, 2.320_883, 0.155_753),
            (0.998, 1.236_971, 0.320_994),
            (1.0, 1.0, 0.422_650),
            (-0.9, 8.717_352, 0.038_998),
            (-1.0, 9.0, 0.037_750),
        ];
        for (spin, r_isco, efficiency) in table {
            assert_abs(isco_radius_gravitational(spin).unwrap(), r_isco, 5e-7);
            assert_abs(radiative_efficiency(spin).unwrap(), efficiency, 5e-7);
        }
    }

    #[test]
    fn extreme_spin_efficiencies_have_closed_forms() {
        // a = 1 prograde: r_isco = 1, η = 1 − 1/√3; a = 1 retrograde: r_isco = 9,
        // η = 1 − sqrt(25/27) (docs/methods.md §4.5, from the BPT72 formulae).
        assert_abs(
            radiative_efficiency(1.0).unwrap(),
            1.0 - 1.0 / 3f64.sqrt(),
            1e-15,
        );
        assert_abs(
            radiative_efficiency(-1.0).unwrap(),
            1.0 - (25.0f64 / 27.0).sqrt(),
            1e-15,
        );
        // a = 0: r_isco = 6, η = 1 − sqrt(8/9).
        assert_abs(
            radiative_efficiency(0.0).unwrap(),
            1.0 - (8.0f64 / 9.0).sqrt(),
            1e-15,
        );
    }

    #[test]
    fn efficiency_rises_with_prograde_spin() {
        let mut previous = 0.0;
        for step in 0..=200 {
            let spin = -1.0 + f64::from(step) * 0.01;
            let efficiency = radiative_efficiency(spin).unwrap();
            assert!(
                efficiency > previous,
                "efficiency did not rise at spin {spin}: {efficiency} after {previous}"
            );
            previous = efficiency;
        }
    }

    #[test]
    fn refuses_invalid_input() {
        for spin in [1.000_001, -1.5, 2.0] {
            assert!(matches!(
                radiative_efficiency(spin),
                Err(AstroError::SpinOutOfRange { .. })
            ));
        }
        assert!(matches!(
            isco_radius_gravitational(f64::NAN),
            Err(AstroError::NotFinite {
                quantity: "spin",
                ..
            })
        ));
        for efficiency in [0.0, 1.0, -0.1, 1.5] {
            assert!(matches!(
                accretion_rate_msun_yr(1e45, efficiency),
                Err(AstroError::EfficiencyOutOfRange { .. })
            ));
        }
        assert!(matches!(
            accretion_rate_msun_yr(1e45, f64::NAN),
            Err(AstroError::NotFinite {
                quantity: "efficiency",
                ..
            })
        ));
        assert!(matches!(
            accretion_rate_msun_yr(0.0, 0.1),
            Err(AstroError::NotPositive {
                quantity: "luminosity_bol_erg_s",
                ..
            })
        ));
        assert!(matches!(
            virial_product_msun(0.0, 2000.0),
            Err(AstroError::NotPositive {
                quantity: "lag_days",
                ..
            })
        ));
        assert!(matches!(
            virial_product_msun(10.0, -2000.0),
            Err(AstroError::NotPositive {
                quantity: "line_width_km_s",
                ..
            })
        ));
        assert!(matches!(
            virial_mass_msun(7.8e6, 0.0),
            Err(AstroError::NotPositive {
                quantity: "virial_factor",
                ..
            })
        ));
        assert!(matches!(
            eddington_luminosity_erg_s(-1e8),
            Err(AstroError::NotPositive {
                quantity: "mass_msun",
                ..
            })
        ));
        assert!(matches!(
            eddington_ratio(1e45, f64::INFINITY),
            Err(AstroError::NotFinite {
                quantity: "mass_msun",
                ..
            })
        ));
        assert!(matches!(
            BENTZ_2013.radius_lt_days(-1e44),
            Err(AstroError::NotPositive {
                quantity: "luminosity_5100_erg_s",
                ..
            })
        ));
        let broken = RadiusLuminosity {
            intercept_dex: f64::NAN,
            slope: 0.533,
        };
        assert!(matches!(
            broken.radius_lt_days(1e44),
            Err(AstroError::NotFinite {
                quantity: "intercept_dex",
                ..
            })
        ));
        let message = radiative_efficiency(1.5).unwrap_err().to_string();
        assert_eq!(
            message,
            "spin must lie between -1 and 1 inclusive, got 1.5."
        );
    }
}
