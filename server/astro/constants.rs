//! Physical constants and unit conversions, pinned to one edition of the standards.
//!
//! The edition is stated once, in [`CONSTANTS_EDITION`]; fits and stored results should record
//! it so that every published number can be recomputed. Exact constants are exact by
//! definition; CODATA values carry their standard uncertainty in the doc comment.
//!
//! Solar masses enter through the nominal solar mass parameter [`GM_SUN_M3_S2`], never through
//! G × M☉ in kilograms: the IAU fixes GM☉ precisely because it is known about five orders of
//! magnitude better than G. [`SOLAR_MASS_KG`] exists only for the few conversions that need a
//! mass in kilograms (an accretion rate from a luminosity) and carries G's uncertainty.

use std::f64::consts::PI;

/// The standards the constants in this module follow.
pub const CONSTANTS_EDITION: &str = "IAU 2015 Resolution B3 (nominal GM_sun), IAU 2012 Resolution B2 (au), IAU 2015 Resolution B2 (parsec = 648000/pi au), Julian year (365.25 d), CODATA 2018 (G, m_p, sigma_T; c exact)";

/// Nominal solar mass parameter (GM)☉ᴺ, in m³ s⁻², exact by definition.
///
/// # References
/// IAU 2015 Resolution B3 (Prša et al. 2016, AJ 152, 41).
pub const GM_SUN_M3_S2: f64 = 1.327_124_4e20;

/// Astronomical unit, in metres, exact by definition.
///
/// # References
/// IAU 2012 Resolution B2.
pub const AU_M: f64 = 149_597_870_700.0;

/// Parsec, in metres.
///
/// ```text
/// 1 pc = (648 000 / π) au
/// ```
///
/// # References
/// IAU 2015 Resolution B2 (definition), with the au of IAU 2012 Resolution B2.
pub const PARSEC_M: f64 = 648_000.0 / PI * AU_M;

/// Megaparsec, in metres.
pub const MEGAPARSEC_M: f64 = 1.0e6 * PARSEC_M;

/// Speed of light in vacuum c, in m s⁻¹, exact by definition of the metre.
///
/// # References
/// SI; CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// Speed of light in vacuum c, in km s⁻¹.
pub const SPEED_OF_LIGHT_KM_S: f64 = SPEED_OF_LIGHT_M_S / 1.0e3;

/// Seconds in a day, exact.
pub const SECONDS_PER_DAY: f64 = 86_400.0;

/// Julian year (365.25 d), in seconds, exact.
pub const JULIAN_YEAR_S: f64 = 365.25 * SECONDS_PER_DAY;

/// Light-year, in metres: the distance light travels in one Julian year.
///
/// ```text
/// 1 ly = c × 365.25 × 86 400 s = 9 460 730 472 580 800 m
/// ```
///
/// # References
/// IAU (Julian-year light-year); c from the SI.
pub const LIGHT_YEAR_M: f64 = SPEED_OF_LIGHT_M_S * JULIAN_YEAR_S;

/// Light-day, in metres (c × 86 400 s), the unit of broad-line-region radii.
pub const LIGHT_DAY_M: f64 = SPEED_OF_LIGHT_M_S * SECONDS_PER_DAY;

/// Light-years per parsec (≈ 3.261564).
pub const LIGHT_YEARS_PER_PARSEC: f64 = PARSEC_M / LIGHT_YEAR_M;

/// Arcseconds per radian, 648 000 / π (≈ 206 264.806).
pub const ARCSEC_PER_RADIAN: f64 = 648_000.0 / PI;

/// Newtonian constant of gravitation G, in m³ kg⁻¹ s⁻², standard uncertainty 0.000 15e-11.
///
/// # References
/// CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
pub const G_SI: f64 = 6.674_30e-11;

/// Proton mass `m_p`, in kg, standard uncertainty 0.000 000 000 51e-27.
///
/// # References
/// CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
pub const PROTON_MASS_KG: f64 = 1.672_621_923_69e-27;

/// Thomson cross-section `σ_T`, in m², standard uncertainty 0.000 000 0060e-29.
///
/// # References
/// CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
pub const THOMSON_CROSS_SECTION_M2: f64 = 6.652_458_732_1e-29;

/// Solar mass in kilograms, derived as GM☉ / G (≈ 1.988 41e30 kg).
///
/// Carries G's relative uncertainty of 2.2e-5; use [`GM_SUN_M3_S2`] wherever a mass in solar
/// units can be reached without kilograms.
pub const SOLAR_MASS_KG: f64 = GM_SUN_M3_S2 / G_SI;

/// G in astronomers' units, pc M☉⁻¹ (km/s)², from GM☉ and the parsec (≈ 4.300 917 27e-3).
///
/// ```text
/// G = GM☉ / (1 pc in m) / (10⁶ m² s⁻² per (km/s)²)
/// ```
///
/// Exact given the IAU definitions, so it carries none of G's uncertainty.
pub const G_PC_KM2_S2_PER_MSUN: f64 = GM_SUN_M3_S2 / PARSEC_M / 1.0e6;

/// Ergs per joule, exact.
pub const ERG_PER_JOULE: f64 = 1.0e7;

#[cfg(test)]
mod tests {
    use super::super::test_support::{assert_abs, assert_rel};
    use super::*;

    #[test]
    fn parsec_is_648000_over_pi_au() {
        // docs/methods.md §7 row 24: 3.0856775814913673e16 m, computed from the IAU 2012 au
        // (IAU 2012 Resolution B2) and the IAU 2015 Resolution B2 definition.
        assert_rel(PARSEC_M, 3.085_677_581_491_367e16, 1e-15);
    }

    #[test]
    fn light_year_is_julian_year_of_light_travel() {
        // docs/methods.md §7 row 25: 9 460 730 472 580 800 m, computed from c × 365.25 × 86 400 s
        // (IAU Julian-year rule, from memory).
        assert_rel(LIGHT_YEAR_M, 9_460_730_472_580_800.0, 1e-16);
    }

    #[test]
    fn parsec_is_about_3_26_light_years() {
        // docs/methods.md §7 row 24: 1 pc = 3.261564 ly, computed from the two definitions above.
        assert_rel(LIGHT_YEARS_PER_PARSEC, 3.261_564, 2e-7);
    }

    #[test]
    fn gravitational_constant_in_parsec_units() {
        // docs/methods.md §5 / §7 row 26: G = 4.30091727e-3 pc M☉⁻¹ (km/s)², computed from IAU GM☉
        // and the parsec; commonly quoted as 4.3009172706e-3 (from memory, docs/methods.md §5).
        assert_rel(G_PC_KM2_S2_PER_MSUN, 4.300_917_27e-3, 1e-9);
    }

    #[test]
    fn derived_solar_mass_matches_codata_g() {
        // docs/methods.md §5: derived M☉ = GM☉/G = 1.988410e30 kg, computed from IAU 2015 B3 and
        // CODATA 2018 G.
        assert_rel(SOLAR_MASS_KG, 1.988_410e30, 1e-6);
    }

    #[test]
    fn arcsec_per_radian() {
        // docs/methods.md §3.1: θ[arcsec] = 206264.806 · r/D, computed from 648000/π.
        assert_abs(ARCSEC_PER_RADIAN, 206_264.806, 5e-4);
    }

    #[test]
    fn edition_names_every_standard_used() {
        for standard in ["IAU 2015", "IAU 2012", "CODATA 2018", "Julian"] {
            assert!(
                CONSTANTS_EDITION.contains(standard),
                "CONSTANTS_EDITION does not name {standard}"
            );
        }
    }
}
