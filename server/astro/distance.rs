//! Distance bookkeeping: rescaling published values to an adopted distance, and the errors a
//! distance uncertainty induces in log space.
//!
//! A published black-hole mass, luminosity or bulge mass was derived at the authors' distance;
//! combining measurements needs them all at the catalogue's adopted distance. Each kind of
//! quantity scales as a power of the distance, D^p, with the exponent p given by
//! [`DistanceScaling::exponent`]:
//!
//! | kind | p | why |
//! |---|---|---|
//! | dynamical `M_BH` (stars, gas, masers) | 1 | M = v² r / G with r = θ D |
//! | dynamical bulge mass | 1 | M = k `R_e` σ² / G, `R_e` ∝ D |
//! | luminosity (any band) | 2 | L = 4π D² F |
//! | photometric bulge mass | 2 | M = (M/L) × L |
//! | physical size (`R_e`, `r_infl`) | 1 | r = θ D |
//! | velocity dispersion | 0 | a speed, independent of D |
//! | reverberation mass | 0 | M = f c τ Δv² / G, no distance |
//!
//! A shared distance error moves log `M_BH` and log L together, so their errors are correlated;
//! [`distance_covariance_dex2`] gives the covariance to use as the x–y error covariance in the
//! fits.

use std::f64::consts::LN_10;
use std::fmt;
use std::str::FromStr;

use super::AstroError;
use super::validate::{finite, finite_result, non_negative, positive, positive_result};

/// How a quantity scales with the adopted distance D.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum DistanceScaling {
    /// Dynamical black-hole mass from stellar, gas or maser kinematics, ∝ D.
    DynamicalMass,
    /// Dynamical (virial or Jeans-model) bulge mass, ∝ D.
    DynamicalBulgeMass,
    /// Luminosity in any band, ∝ D².
    Luminosity,
    /// Bulge mass from a luminosity and a mass-to-light ratio, ∝ D².
    PhotometricBulgeMass,
    /// Physical length from an angle, such as an effective radius in kpc, ∝ D.
    PhysicalSize,
    /// Velocity dispersion, independent of D.
    VelocityDispersion,
    /// Reverberation-mapping (virial) black-hole mass, independent of D.
    ReverberationMass,
}

impl DistanceScaling {
    /// Every kind, in a fixed order.
    pub const ALL: [Self; 7] = [
        Self::DynamicalMass,
        Self::DynamicalBulgeMass,
        Self::Luminosity,
        Self::PhotometricBulgeMass,
        Self::PhysicalSize,
        Self::VelocityDispersion,
        Self::ReverberationMass,
    ];

    /// The exponent p in quantity ∝ D^p.
    ///
    /// # References
    /// docs/methods.md §3.2 (physics of each measurement).
    pub const fn exponent(self) -> i32 {
        match self {
            Self::DynamicalMass | Self::DynamicalBulgeMass | Self::PhysicalSize => 1,
            Self::Luminosity | Self::PhotometricBulgeMass => 2,
            Self::VelocityDispersion | Self::ReverberationMass => 0,
        }
    }

    /// The stable `snake_case` name, for storage and forms; [`Self::parse`] reads it back.
    pub const fn as_str(self) -> &'static str {
        match self {
            Self::DynamicalMass => "dynamical_mass",
            Self::DynamicalBulgeMass => "dynamical_bulge_mass",
            Self::Luminosity => "luminosity",
            Self::PhotometricBulgeMass => "photometric_bulge_mass",
            Self::PhysicalSize => "physical_size",
            Self::VelocityDispersion => "velocity_dispersion",
            Self::ReverberationMass => "reverberation_mass",
        }
    }

    /// The kind named by a stable name from [`Self::as_str`] (exact match).
    ///
    /// # Errors
    /// [`AstroError::UnknownDistanceScaling`] if the name is not one of the stable names.
    pub fn parse(name: &str) -> Result<Self, AstroError> {
        Self::ALL
            .into_iter()
            .find(|kind| kind.as_str() == name)
            .ok_or_else(|| AstroError::UnknownDistanceScaling {
                name: name.to_owned(),
            })
    }
}

impl fmt::Display for DistanceScaling {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for DistanceScaling {
    type Err = AstroError;

    fn from_str(name: &str) -> Result<Self, Self::Err> {
        Self::parse(name)
    }
}

/// The factor by which a linear quantity of this kind changes when the distance changes.
///
/// ```text
/// factor = (D_to / D_from)^p
/// ```
///
/// where `D_from` is the distance the value was published at and `D_to` the adopted distance (both
/// Mpc), and p = `kind.exponent()`.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if a distance is not a finite number
/// greater than zero; [`AstroError::Unrepresentable`] if the factor overflows or underflows.
pub fn scale_factor(kind: DistanceScaling, from_mpc: f64, to_mpc: f64) -> Result<f64, AstroError> {
    let from_mpc = positive("from_mpc", from_mpc)?;
    let to_mpc = positive("to_mpc", to_mpc)?;
    positive_result("scale_factor", (to_mpc / from_mpc).powi(kind.exponent()))
}

/// Rescales a log₁₀ value published at one distance to another distance.
///
/// ```text
/// log Q_to = log Q_from + p · log₁₀(D_to / D_from)
/// ```
///
/// where Q is the quantity in any fixed unit (e.g. log `M_BH` in dex of M☉), `D_from` and `D_to` are
/// in Mpc and p = `kind.exponent()`. For example, 16.5 → 18 Mpc multiplies a dynamical mass by
/// 1.0909 and a luminosity by 1.1901.
///
/// # Errors
/// [`AstroError::NotFinite`] if `log_value` is not finite; [`AstroError::NotFinite`] or
/// [`AstroError::NotPositive`] if a distance is not a finite number greater than zero.
///
/// # References
/// docs/methods.md §3.2 (distance dependence of each quantity).
pub fn rescale_log(
    log_value: f64,
    kind: DistanceScaling,
    from_mpc: f64,
    to_mpc: f64,
) -> Result<f64, AstroError> {
    let log_value = finite("log_value", log_value)?;
    let from_mpc = positive("from_mpc", from_mpc)?;
    let to_mpc = positive("to_mpc", to_mpc)?;
    let shift_dex = f64::from(kind.exponent()) * (to_mpc.log10() - from_mpc.log10());
    finite_result("log_value", log_value + shift_dex)
}

/// Error in log₁₀ D, in dex, from a distance error in Mpc (first-order propagation).
///
/// ```text
/// σ_logD = σ_D / (D ln 10)
/// ```
///
/// where D is the distance and `σ_D` its one-standard-deviation error, both in Mpc.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `distance_mpc` is not a finite
/// number greater than zero; [`AstroError::NotFinite`] or [`AstroError::Negative`] if
/// `distance_err_mpc` is not a finite number of zero or more.
pub fn log_distance_error_dex(distance_mpc: f64, distance_err_mpc: f64) -> Result<f64, AstroError> {
    let distance_mpc = positive("distance_mpc", distance_mpc)?;
    let distance_err_mpc = non_negative("distance_err_mpc", distance_err_mpc)?;
    finite_result("err_dex", distance_err_mpc / distance_mpc / LN_10)
}

/// Error in log₁₀ of a quantity of this kind, in dex, from the distance error alone.
///
/// ```text
/// σ_logQ,D = |p| σ_D / (D ln 10)
/// ```
///
/// where p = `kind.exponent()` and D, `σ_D` are in Mpc.
///
/// # Errors
/// As [`log_distance_error_dex`].
pub fn distance_error_dex(
    kind: DistanceScaling,
    distance_mpc: f64,
    distance_err_mpc: f64,
) -> Result<f64, AstroError> {
    let sigma_log_d = log_distance_error_dex(distance_mpc, distance_err_mpc)?;
    finite_result("err_dex", f64::from(kind.exponent().abs()) * sigma_log_d)
}

/// Total error in log₁₀ of a quantity of this kind, in dex: the measurement error and the
/// distance error added in quadrature.
///
/// ```text
/// σ_logQ,tot = sqrt( σ_logQ,meas² + (p σ_logD)² ),   σ_logD = σ_D / (D ln 10)
/// ```
///
/// where `err_dex` is `σ_logQ,meas` (dex), p = `kind.exponent()` and D, `σ_D` are in Mpc.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::Negative`] if `err_dex` is not a finite number of
/// zero or more; otherwise as [`log_distance_error_dex`].
///
/// # References
/// docs/methods.md §3.2 (error propagation in dex).
pub fn total_error_dex(
    err_dex: f64,
    kind: DistanceScaling,
    distance_mpc: f64,
    distance_err_mpc: f64,
) -> Result<f64, AstroError> {
    let err_dex = non_negative("err_dex", err_dex)?;
    let distance_part_dex = distance_error_dex(kind, distance_mpc, distance_err_mpc)?;
    finite_result("err_dex", err_dex.hypot(distance_part_dex))
}

/// Covariance, in dex², between the log errors of two quantities that share one distance.
///
/// ```text
/// cov(log Q_y, log Q_x) = p_y p_x σ_logD²,   σ_logD = σ_D / (D ln 10)
/// ```
///
/// where `p_y`, `p_x` are the two kinds' exponents and D, `σ_D` are in Mpc. For a dynamical `M_BH`
/// (p = 1) against a luminosity (p = 2) this is `2 σ_logD²`; use it as the x–y error covariance
/// (`σ_xy`, V12) of that object in the fits. With `kind_y == kind_x` it is that quantity's own
/// distance variance.
///
/// # Errors
/// As [`log_distance_error_dex`].
///
/// # References
/// docs/methods.md §3.2; Akritas & Bershady 1996, ApJ 470, 706 (V12 in BCES).
pub fn distance_covariance_dex2(
    kind_y: DistanceScaling,
    kind_x: DistanceScaling,
    distance_mpc: f64,
    distance_err_mpc: f64,
) -> Result<f64, AstroError> {
    let sigma_log_d = log_distance_error_dex(distance_mpc, distance_err_mpc)?;
    let exponents = f64::from(kind_y.exponent() * kind_x.exponent());
    finite_result("covariance_dex2", exponents * sigma_log_d * sigma_log_d)
}

#[cfg(test)]
mod tests {
    use super::super::test_support::{assert_abs, assert_rel};
    use super::*;

    #[test]
    fn exponents_follow_the_physics() {
        // docs/methods.md §3.2 table: M_dyn ∝ D, M_bulge,dyn ∝ D, L ∝ D², M_bulge,phot ∝ D²,
        // R_e ∝ D, σ and reverberation masses independent of D.
        use DistanceScaling::*;
        assert_eq!(DynamicalMass.exponent(), 1);
        assert_eq!(DynamicalBulgeMass.exponent(), 1);
        assert_eq!(Luminosity.exponent(), 2);
        assert_eq!(PhotometricBulgeMass.exponent(), 2);
        assert_eq!(PhysicalSize.exponent(), 1);
        assert_eq!(VelocityDispersion.exponent(), 0);
        assert_eq!(ReverberationMass.exponent(), 0);
    }

    #[test]
    fn names_are_stable_and_round_trip() {
        let expected = [
            "dynamical_mass",
            "dynamical_bulge_mass",
            "luminosity",
            "photometric_bulge_mass",
            "physical_size",
            "velocity_dispersion",
            "reverberation_mass",
        ];
        for (kind, name) in DistanceScaling::ALL.into_iter().zip(expected) {
            assert_eq!(kind.as_str(), name);
            assert_eq!(kind.to_string(), name);
            assert_eq!(DistanceScaling::parse(name), Ok(kind));
            assert_eq!(name.parse::<DistanceScaling>(), Ok(kind));
        }
        assert_eq!(
            DistanceScaling::parse("Luminosity"),
            Err(AstroError::UnknownDistanceScaling {
                name: "Luminosity".to_owned()
            })
        );
    }

    #[test]
    fn rescale_from_16_5_to_18_mpc() {
        // docs/methods.md §3.2 / §7 row 30: 16.5 → 18 Mpc gives M × 1.090909 and L × 1.190083
        // (Δlog L = +0.0756), computed from M ∝ D, L ∝ D².
        let mass = scale_factor(DistanceScaling::DynamicalMass, 16.5, 18.0).unwrap();
        let lum = scale_factor(DistanceScaling::Luminosity, 16.5, 18.0).unwrap();
        assert_rel(mass, 1.090_909, 5e-7);
        assert_rel(lum, 1.190_083, 5e-7);

        let log_m = rescale_log(8.0, DistanceScaling::DynamicalMass, 16.5, 18.0).unwrap();
        assert_abs(10f64.powf(log_m - 8.0), 1.090_909, 5e-7);
        let log_l = rescale_log(10.5, DistanceScaling::Luminosity, 16.5, 18.0).unwrap();
        assert_abs(log_l - 10.5, 0.0756, 5e-5);
        let log_mbul =
            rescale_log(10.5, DistanceScaling::PhotometricBulgeMass, 16.5, 18.0).unwrap();
        assert_abs(log_mbul, log_l, 1e-14);
    }

    #[test]
    fn distance_free_kinds_do_not_move() {
        // docs/methods.md §3.2 table: σ and reverberation masses scale as D⁰; the inputs are
        // invented.
        for kind in [
            DistanceScaling::VelocityDispersion,
            DistanceScaling::ReverberationMass,
        ] {
            assert_abs(rescale_log(7.4, kind, 16.5, 80.0).unwrap(), 7.4, 0.0);
            assert_abs(scale_factor(kind, 16.5, 80.0).unwrap(), 1.0, 0.0);
            assert_abs(distance_error_dex(kind, 16.5, 2.0).unwrap(), 0.0, 0.0);
        }
    }

    #[test]
    fn rescaling_there_and_back_is_the_identity() {
        for kind in DistanceScaling::ALL {
            let there = rescale_log(8.7, kind, 7.3, 31.0).unwrap();
            assert_abs(rescale_log(there, kind, 31.0, 7.3).unwrap(), 8.7, 1e-14);
        }
    }

    #[test]
    fn distance_error_in_dex() {
        // σ_logD = σ_D/(D ln 10) (docs/methods.md §3.2, first-order propagation): a 10 % distance
        // error is 0.1/ln 10 = 0.0434294 dex.
        let sigma_log_d = log_distance_error_dex(20.0, 2.0).unwrap();
        assert_rel(sigma_log_d, 0.043_429_448, 1e-8);
        assert_rel(
            distance_error_dex(DistanceScaling::DynamicalMass, 20.0, 2.0).unwrap(),
            sigma_log_d,
            1e-15,
        );
        assert_rel(
            distance_error_dex(DistanceScaling::Luminosity, 20.0, 2.0).unwrap(),
            2.0 * sigma_log_d,
            1e-15,
        );
        // Quadrature: σ_tot² = σ_meas² + (p σ_logD)² (docs/methods.md §3.2).
        let total = total_error_dex(0.1, DistanceScaling::Luminosity, 20.0, 2.0).unwrap();
        assert_rel(total * total, 0.01 + 4.0 * sigma_log_d * sigma_log_d, 1e-14);
        // No distance error: the measurement error is returned unchanged.
        assert_abs(
            total_error_dex(0.1, DistanceScaling::Luminosity, 20.0, 0.0).unwrap(),
            0.1,
            0.0,
        );
    }

    #[test]
    fn shared_distance_correlates_mass_and_luminosity() {
        // docs/methods.md §3.2: cov(log M, log L) = 2 σ_logD² for M ∝ D, L ∝ D² (computed).
        use DistanceScaling::*;
        let sigma_log_d = log_distance_error_dex(20.0, 2.0).unwrap();
        let var = sigma_log_d * sigma_log_d;
        assert_rel(
            distance_covariance_dex2(DynamicalMass, Luminosity, 20.0, 2.0).unwrap(),
            2.0 * var,
            1e-14,
        );
        assert_rel(
            distance_covariance_dex2(DynamicalMass, PhotometricBulgeMass, 20.0, 2.0).unwrap(),
            2.0 * var,
            1e-14,
        );
        assert_rel(
            distance_covariance_dex2(DynamicalMass, DynamicalBulgeMass, 20.0, 2.0).unwrap(),
            var,
            1e-14,
        );
        assert_abs(
            distance_covariance_dex2(DynamicalMass, VelocityDispersion, 20.0, 2.0).unwrap(),
            0.0,
            0.0,
        );
        assert_abs(
            distance_covariance_dex2(ReverberationMass, Luminosity, 20.0, 2.0).unwrap(),
            0.0,
            0.0,
        );
        // The covariance of a kind with itself is the square of its own distance error.
        let own = distance_error_dex(Luminosity, 20.0, 2.0).unwrap();
        assert_rel(
            distance_covariance_dex2(Luminosity, Luminosity, 20.0, 2.0).unwrap(),
            own * own,
            1e-14,
        );
    }

    #[test]
    fn refuses_invalid_input() {
        use DistanceScaling::*;
        assert!(matches!(
            rescale_log(8.0, DynamicalMass, 0.0, 18.0),
            Err(AstroError::NotPositive {
                quantity: "from_mpc",
                ..
            })
        ));
        assert!(matches!(
            rescale_log(8.0, DynamicalMass, 16.5, -18.0),
            Err(AstroError::NotPositive {
                quantity: "to_mpc",
                ..
            })
        ));
        assert!(matches!(
            rescale_log(f64::NAN, DynamicalMass, 16.5, 18.0),
            Err(AstroError::NotFinite {
                quantity: "log_value",
                ..
            })
        ));
        assert!(matches!(
            scale_factor(Luminosity, f64::INFINITY, 18.0),
            Err(AstroError::NotFinite {
                quantity: "from_mpc",
                ..
            })
        ));
        assert!(matches!(
            log_distance_error_dex(20.0, -1.0),
            Err(AstroError::Negative {
                quantity: "distance_err_mpc",
                ..
            })
        ));
        assert!(matches!(
            log_distance_error_dex(0.0, 1.0),
            Err(AstroError::NotPositive {
                quantity: "distance_mpc",
                ..
            })
        ));
        assert!(matches!(
            total_error_dex(-0.1, Luminosity, 20.0, 2.0),
            Err(AstroError::Negative {
                quantity: "err_dex",
                ..
            })
        ));
        assert!(matches!(
            distance_covariance_dex2(DynamicalMass, Luminosity, 20.0, f64::NAN),
            Err(AstroError::NotFinite {
                quantity: "distance_err_mpc",
                ..
            })
        ));
        assert!(matches!(
            scale_factor(Luminosity, 1e-300, 1e300),
            Err(AstroError::Unrepresentable {
                quantity: "scale_factor"
            })
        ));
    }
}
