//! Astrophysical quantities around a black-hole mass measurement.
//!
//! Everything here is a pure function of plain `f64` values whose names carry their units
//! (`mass_msun`, `log_mbh`, `sigma_km_s`, `distance_mpc`, `radius_pc`, `theta_arcsec`,
//! `lag_days`, `luminosity_erg_s`). Nothing reads files, the clock or the database.
//!
//! - [`constants`]: physical constants pinned to one edition of the standards
//!   ([`constants::CONSTANTS_EDITION`]), and unit conversions derived from them.
//! - [`influence`]: the black hole's sphere of influence, its angular size and how well an
//!   observation resolves it (a flag for reviewers, never a cut).
//! - [`kepler`]: enclosed mass from a rotation speed.
//! - [`distance`]: rescaling published values to an adopted distance, and the errors and
//!   error covariance a distance uncertainty induces in log space.
//! - [`agn`]: virial products and masses, the broad-line-region radius–luminosity relation,
//!   Eddington luminosity and ratio, accretion rate, and radiative efficiency from spin.
//! - [`lognormal`]: the factor between the median and the mean of a lognormal scatter.
//!
//! Invalid input (non-finite numbers, non-positive masses, distances, radii or dispersions,
//! spins outside \[−1, 1\], and so on) is refused with an [`AstroError`]; no function returns
//! NaN or an infinity.
//!
//! Solar masses always enter through the IAU nominal solar mass parameter GM☉ rather than
//! through G times a mass in kilograms, because GM☉ is known about five orders of magnitude
//! better than G (IAU 2015 Resolution B3).

pub mod agn;
pub mod constants;
pub mod distance;
pub mod influence;
pub mod kepler;
pub mod lognormal;

mod validate;

#[cfg(test)]
mod test_support;

pub use agn::{
    BENTZ_2013, RadiusLuminosity, accretion_rate_msun_yr, eddington_luminosity_erg_s,
    eddington_ratio, isco_radius_gravitational, radiative_efficiency, virial_mass_msun,
    virial_product_msun,
};
pub use constants::CONSTANTS_EDITION;
pub use distance::{
    DistanceScaling, distance_covariance_dex2, distance_error_dex, log_distance_error_dex,
    rescale_log, scale_factor, total_error_dex,
};
pub use influence::{
    DEFAULT_RESOLVED_THRESHOLD, SphereOfInfluence, angular_size_arcsec, influence_radius_pc,
    projected_radius_pc, resolution_ratio,
};
pub use kepler::{
    circular_speed_km_s, enclosed_mass_at_angle_msun, enclosed_mass_msun, keplerian_mass_msun,
};
pub use lognormal::{lognormal_mean_factor, lognormal_mean_offset_dex};

/// Why an astrophysical quantity could not be computed.
///
/// Every message is one sentence naming the quantity and the accepted range.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum AstroError {
    /// An input was NaN or infinite.
    #[error("{quantity} must be a finite number, got {value}.")]
    NotFinite {
        /// Name of the input, with its unit (e.g. `distance_mpc`).
        quantity: &'static str,
        /// The value given.
        value: f64,
    },
    /// An input that must be strictly positive (mass, distance, radius, dispersion, lag, …)
    /// was zero or negative.
    #[error("{quantity} must be greater than zero, got {value}.")]
    NotPositive {
        /// Name of the input, with its unit.
        quantity: &'static str,
        /// The value given.
        value: f64,
    },
    /// An input that may be zero but not negative (an error bar, a scatter) was negative.
    #[error("{quantity} must be zero or greater, got {value}.")]
    Negative {
        /// Name of the input, with its unit.
        quantity: &'static str,
        /// The value given.
        value: f64,
    },
    /// A dimensionless spin lay outside \[−1, 1\].
    #[error("spin must lie between -1 and 1 inclusive, got {value}.")]
    SpinOutOfRange {
        /// The spin given.
        value: f64,
    },
    /// An inclination lay outside the open interval (0°, 180°), where sin i > 0.
    #[error(
        "inclination_deg must lie strictly between 0 and 180 degrees (edge-on is 90), got {value}."
    )]
    InclinationOutOfRange {
        /// The inclination given, in degrees.
        value: f64,
    },
    /// A radiative efficiency lay outside the open interval (0, 1).
    #[error("efficiency must lie strictly between 0 and 1, got {value}.")]
    EfficiencyOutOfRange {
        /// The efficiency given.
        value: f64,
    },
    /// A logarithmic input lay outside the range this module accepts.
    #[error("{quantity} must lie between {min} and {max}, got {value}.")]
    OutOfRange {
        /// Name of the input, with its unit.
        quantity: &'static str,
        /// The value given.
        value: f64,
        /// Smallest accepted value.
        min: f64,
        /// Largest accepted value.
        max: f64,
    },
    /// Finite, valid-looking inputs produced a result that a 64-bit float cannot hold
    /// (overflow to infinity or underflow to zero), which only happens far outside any
    /// physical range.
    #[error(
        "{quantity} overflows or underflows a 64-bit float for these inputs, which lie far outside any physical range."
    )]
    Unrepresentable {
        /// Name of the result, with its unit.
        quantity: &'static str,
    },
    /// A distance-scaling name was not one of the stable names of [`DistanceScaling`].
    #[error(
        "distance scaling must be one of dynamical_mass, dynamical_bulge_mass, luminosity, photometric_bulge_mass, physical_size, velocity_dispersion or reverberation_mass, got \"{name}\"."
    )]
    UnknownDistanceScaling {
        /// The name given.
        name: String,
    },
}

#[cfg(test)]
mod tests {
    //! Property-style checks over deterministic grids: valid input never gives NaN or infinity,
    //! and extreme input gives either a finite value or an error.

    use super::*;

    /// `count` values spaced evenly in log₁₀ from `low` to `high` inclusive.
    fn log_grid(low: f64, high: f64, count: u32) -> Vec<f64> {
        let (log_low, log_high) = (low.log10(), high.log10());
        (0..count)
            .map(|step| {
                let fraction = f64::from(step) / f64::from(count - 1);
                10f64.powf(log_low + fraction * (log_high - log_low))
            })
            .collect()
    }

    /// `count` values spaced evenly from `low` to `high` inclusive.
    fn linear_grid(low: f64, high: f64, count: u32) -> Vec<f64> {
        (0..count)
            .map(|step| low + (high - low) * f64::from(step) / f64::from(count - 1))
            .collect()
    }

    #[track_caller]
    fn assert_finite(value: f64, what: &str) {
        assert!(value.is_finite(), "{what} gave {value}");
    }

    #[track_caller]
    fn ok_finite(result: Result<f64, AstroError>, what: &str) -> f64 {
        match result {
            Ok(value) => {
                assert_finite(value, what);
                value
            }
            Err(error) => panic!("{what} refused valid input: {error}"),
        }
    }

    #[test]
    fn valid_input_gives_finite_results() {
        let masses = log_grid(1.0e3, 1.0e11, 9);
        let sigmas = log_grid(20.0, 500.0, 7);
        let distances = log_grid(0.1, 1000.0, 6);
        let resolutions = log_grid(0.005, 2.0, 4);
        let mut checked = 0_u32;
        for &mass_msun in &masses {
            ok_finite(
                eddington_luminosity_erg_s(mass_msun),
                "eddington_luminosity_erg_s",
            );
            ok_finite(eddington_ratio(1.0e44, mass_msun), "eddington_ratio");
            for &sigma_km_s in &sigmas {
                let radius_pc = ok_finite(
                    influence_radius_pc(mass_msun, sigma_km_s),
                    "influence_radius_pc",
                );
                ok_finite(
                    keplerian_mass_msun(sigma_km_s, radius_pc),
                    "keplerian_mass_msun",
                );
                for &distance_mpc in &distances {
                    for &resolution_arcsec in &resolutions {
                        let soi = SphereOfInfluence::from_log_mbh(
                            mass_msun.log10(),
                            sigma_km_s,
                            distance_mpc,
                            Some(resolution_arcsec),
                            DEFAULT_RESOLVED_THRESHOLD,
                        )
                        .unwrap();
                        assert_finite(soi.radius_pc, "radius_pc");
                        assert_finite(soi.theta_arcsec, "theta_arcsec");
                        assert_finite(soi.ratio.unwrap(), "ratio");
                        assert!(soi.resolved.is_some());
                        ok_finite(
                            enclosed_mass_at_angle_msun(
                                sigma_km_s,
                                45.0,
                                resolution_arcsec,
                                distance_mpc,
                            ),
                            "enclosed_mass_at_angle_msun",
                        );
                        checked += 1;
                    }
                }
            }
        }
        assert_eq!(checked, 9 * 7 * 6 * 4);

        for inclination_deg in linear_grid(0.5, 179.5, 50) {
            ok_finite(
                enclosed_mass_msun(200.0, inclination_deg, 10.0),
                "enclosed_mass_msun",
            );
        }
        for spin in linear_grid(-1.0, 1.0, 401) {
            ok_finite(isco_radius_gravitational(spin), "isco_radius_gravitational");
            ok_finite(radiative_efficiency(spin), "radiative_efficiency");
        }
        for lag_days in log_grid(0.1, 1000.0, 9) {
            for line_width_km_s in log_grid(100.0, 20_000.0, 9) {
                let vp = ok_finite(
                    virial_product_msun(lag_days, line_width_km_s),
                    "virial_product_msun",
                );
                ok_finite(virial_mass_msun(vp, 4.31), "virial_mass_msun");
            }
        }
        for luminosity_erg_s in log_grid(1.0e38, 1.0e48, 21) {
            ok_finite(
                BENTZ_2013.radius_lt_days(luminosity_erg_s),
                "radius_lt_days",
            );
            for efficiency in linear_grid(0.01, 0.99, 9) {
                ok_finite(
                    accretion_rate_msun_yr(luminosity_erg_s, efficiency),
                    "accretion_rate_msun_yr",
                );
            }
        }
        for kind in DistanceScaling::ALL {
            for &from_mpc in &distances {
                for &to_mpc in &distances {
                    ok_finite(rescale_log(8.0, kind, from_mpc, to_mpc), "rescale_log");
                    ok_finite(scale_factor(kind, from_mpc, to_mpc), "scale_factor");
                }
                for distance_err_mpc in [0.0, 0.01 * from_mpc, 0.5 * from_mpc, 3.0 * from_mpc] {
                    ok_finite(
                        total_error_dex(0.1, kind, from_mpc, distance_err_mpc),
                        "total_error_dex",
                    );
                    ok_finite(
                        distance_covariance_dex2(
                            kind,
                            DistanceScaling::Luminosity,
                            from_mpc,
                            distance_err_mpc,
                        ),
                        "distance_covariance_dex2",
                    );
                }
            }
        }
        for scatter_dex in linear_grid(0.0, 2.0, 41) {
            ok_finite(lognormal_mean_factor(scatter_dex), "lognormal_mean_factor");
        }
    }

    #[test]
    fn extreme_input_gives_a_finite_value_or_an_error() {
        // Positive values from far below to far above anything physical, plus the edges of
        // the f64 range; the only acceptable outcomes are a finite number or a refusal.
        let mut extremes = log_grid(1.0e-300, 1.0e300, 25);
        extremes.extend([f64::MIN_POSITIVE, 5e-324, f64::MAX, 0.0, -1.0, f64::NAN]);
        let never_nan = |result: Result<f64, AstroError>, what: &str| {
            if let Ok(value) = result {
                assert_finite(value, what);
            }
        };
        for &a in &extremes {
            never_nan(eddington_luminosity_erg_s(a), "eddington_luminosity_erg_s");
            never_nan(lognormal_mean_factor(a), "lognormal_mean_factor");
            never_nan(BENTZ_2013.radius_lt_days(a), "radius_lt_days");
            never_nan(isco_radius_gravitational(a), "isco_radius_gravitational");
            never_nan(radiative_efficiency(-a), "radiative_efficiency");
            for &b in &extremes {
                never_nan(influence_radius_pc(a, b), "influence_radius_pc");
                never_nan(angular_size_arcsec(a, b), "angular_size_arcsec");
                never_nan(projected_radius_pc(a, b), "projected_radius_pc");
                never_nan(resolution_ratio(a, b), "resolution_ratio");
                never_nan(keplerian_mass_msun(a, b), "keplerian_mass_msun");
                never_nan(virial_product_msun(a, b), "virial_product_msun");
                never_nan(virial_mass_msun(a, b), "virial_mass_msun");
                never_nan(eddington_ratio(a, b), "eddington_ratio");
                never_nan(
                    accretion_rate_msun_yr(a, b.min(0.5)),
                    "accretion_rate_msun_yr",
                );
                never_nan(log_distance_error_dex(a, b), "log_distance_error_dex");
                for kind in DistanceScaling::ALL {
                    never_nan(scale_factor(kind, a, b), "scale_factor");
                    never_nan(rescale_log(1.0e300, kind, a, b), "rescale_log");
                    never_nan(total_error_dex(a, kind, b, a), "total_error_dex");
                    never_nan(
                        distance_covariance_dex2(kind, kind, a, b),
                        "distance_covariance_dex2",
                    );
                }
                if let Ok(soi) = SphereOfInfluence::new(a, b, a, Some(b), 1.0) {
                    assert_finite(soi.radius_pc, "radius_pc");
                    assert_finite(soi.theta_arcsec, "theta_arcsec");
                    assert_finite(soi.ratio.unwrap(), "ratio");
                }
            }
        }
    }
}
