//! The black hole's sphere of influence and how well an observation resolves it.
//!
//! Reviewers compare the angular radius of the sphere of influence with the spatial resolution
//! of the data the mass came from; a ratio `θ_infl/θ_res` ≳ 1 is the usual sign that the
//! measurement resolved the region the black hole dominates. The result is a flag for
//! reviewers, never a cut: Gültekin et al. (2009, ApJ 698, 198) show that culling a sample on
//! resolution biases the fitted relation, so every measurement stays in the fits.
//!
//! Distances are converted with the small-angle approximation θ = r / D, which is exact to
//! better than 1e-12 at the sizes and distances that occur here.

use super::AstroError;
use super::constants::{ARCSEC_PER_RADIAN, G_PC_KM2_S2_PER_MSUN};
use super::validate::{mass_from_log, positive, positive_result};

/// Default ratio `θ_infl` / `θ_res` at or above which a sphere of influence counts as resolved.
///
/// One resolution element across the radius of influence is the usual criterion (common
/// practice; e.g. Ferrarese & Merritt 2000, ApJ 539, L9, argued that masses from data with a
/// smaller ratio were less secure).
pub const DEFAULT_RESOLVED_THRESHOLD: f64 = 1.0;

/// Radius of the sphere of influence, in pc.
///
/// ```text
/// r_infl = G M / σ²
/// ```
///
/// where M is the black-hole mass (M☉), σ the host's stellar velocity dispersion (km/s) and
/// G = 4.300 917 27e-3 pc M☉⁻¹ (km/s)², taken from GM☉ (see
/// [`G_PC_KM2_S2_PER_MSUN`]). In round numbers `r_infl` ≈ 0.43 pc (M/10⁶ M☉)(σ/100 km/s)⁻².
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `mass_msun` or `sigma_km_s` is
/// not a finite number greater than zero; [`AstroError::Unrepresentable`] if the radius
/// overflows or underflows.
///
/// # References
/// Peebles 1972, ApJ 178, 371 (definition; citation from memory); de Zeeuw 2001, in *Black
/// Holes in Binaries and Galactic Nuclei* (the ≈ 0.4 pc scaling).
pub fn influence_radius_pc(mass_msun: f64, sigma_km_s: f64) -> Result<f64, AstroError> {
    let mass_msun = positive("mass_msun", mass_msun)?;
    let sigma_km_s = positive("sigma_km_s", sigma_km_s)?;
    // Divide before multiplying so that extreme but finite inputs overflow less readily.
    let radius_pc = G_PC_KM2_S2_PER_MSUN * (mass_msun / sigma_km_s) / sigma_km_s;
    positive_result("radius_pc", radius_pc)
}

/// Angular size, in arcsec, of a physical length seen at a distance (small-angle).
///
/// ```text
/// θ = 206 264.806″ × r / D
/// ```
///
/// where r is the length (pc) and D the distance (Mpc, converted to pc).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `radius_pc` or `distance_mpc` is
/// not a finite number greater than zero; [`AstroError::Unrepresentable`] if the result
/// overflows or underflows.
pub fn angular_size_arcsec(radius_pc: f64, distance_mpc: f64) -> Result<f64, AstroError> {
    let radius_pc = positive("radius_pc", radius_pc)?;
    let distance_mpc = positive("distance_mpc", distance_mpc)?;
    let theta_arcsec = ARCSEC_PER_RADIAN * (radius_pc / distance_mpc) / 1.0e6;
    positive_result("theta_arcsec", theta_arcsec)
}

/// Projected physical length, in pc, of an angle seen at a distance (small-angle); the inverse
/// of [`angular_size_arcsec`].
///
/// ```text
/// r = θ D / 206 264.806″
/// ```
///
/// where θ is in arcsec and D in Mpc (converted to pc).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `theta_arcsec` or `distance_mpc`
/// is not a finite number greater than zero; [`AstroError::Unrepresentable`] if the result
/// overflows or underflows.
pub fn projected_radius_pc(theta_arcsec: f64, distance_mpc: f64) -> Result<f64, AstroError> {
    let theta_arcsec = positive("theta_arcsec", theta_arcsec)?;
    let distance_mpc = positive("distance_mpc", distance_mpc)?;
    let radius_pc = theta_arcsec / ARCSEC_PER_RADIAN * distance_mpc * 1.0e6;
    positive_result("radius_pc", radius_pc)
}

/// Ratio of the sphere of influence's angular radius to the observation's spatial resolution.
///
/// ```text
/// ratio = θ_infl / θ_res
/// ```
///
/// both in arcsec. `θ_res` is whatever the measurement quotes as its resolution (for example
/// FWHM/2 of the point-spread function, or the slit width or pixel scale; common practice).
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if either angle is not a finite
/// number greater than zero; [`AstroError::Unrepresentable`] if the ratio overflows or
/// underflows.
pub fn resolution_ratio(theta_arcsec: f64, resolution_arcsec: f64) -> Result<f64, AstroError> {
    let theta_arcsec = positive("theta_arcsec", theta_arcsec)?;
    let resolution_arcsec = positive("resolution_arcsec", resolution_arcsec)?;
    positive_result("ratio", theta_arcsec / resolution_arcsec)
}

/// The sphere of influence of one black-hole mass measurement, ready for display.
///
/// ```text
/// r_infl = G M / σ²,   θ_infl = r_infl / D,   ratio = θ_infl / θ_res,   resolved = ratio ≥ threshold
/// ```
///
/// `resolution_arcsec`, `ratio` and `resolved` are `None` when the measurement has no recorded
/// resolution. `resolved` is a flag for reviewers, never a reason to drop a measurement from a
/// fit (Gültekin et al. 2009, ApJ 698, 198).
///
/// Because a dynamical mass scales as M ∝ D, `θ_infl = G M / (σ² D)` does not depend on the
/// adopted distance; the flag does not change when distances are revised.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SphereOfInfluence {
    /// Radius of influence `r_infl = G M / σ²`, in pc.
    pub radius_pc: f64,
    /// Angular radius of influence `θ_infl` at the given distance, in arcsec.
    pub theta_arcsec: f64,
    /// Spatial resolution of the observation, in arcsec, if recorded.
    pub resolution_arcsec: Option<f64>,
    /// `θ_infl` / `θ_res` (dimensionless), if the resolution is recorded.
    pub ratio: Option<f64>,
    /// Whether `ratio` ≥ `threshold`, if the resolution is recorded.
    pub resolved: Option<bool>,
    /// The threshold on `ratio` used for `resolved` (dimensionless).
    pub threshold: f64,
}

impl SphereOfInfluence {
    /// Computes the sphere of influence from a linear mass.
    ///
    /// `mass_msun` in M☉, `sigma_km_s` in km/s, `distance_mpc` in Mpc, `resolution_arcsec` in
    /// arcsec, `threshold` dimensionless (pass [`DEFAULT_RESOLVED_THRESHOLD`] unless a reviewer
    /// asks for another). See the type's documentation for the equations.
    ///
    /// # Errors
    /// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if any input (including a
    /// given resolution, and the threshold) is not a finite number greater than zero;
    /// [`AstroError::Unrepresentable`] if a result overflows or underflows.
    ///
    /// # References
    /// Peebles 1972, ApJ 178, 371 (`r_infl`); Gültekin et al. 2009, ApJ 698, 198 (keep every
    /// measurement rather than cut on resolution).
    pub fn new(
        mass_msun: f64,
        sigma_km_s: f64,
        distance_mpc: f64,
        resolution_arcsec: Option<f64>,
        threshold: f64,
    ) -> Result<Self, AstroError> {
        let threshold = positive("threshold", threshold)?;
        let radius_pc = influence_radius_pc(mass_msun, sigma_km_s)?;
        let theta_arcsec = angular_size_arcsec(radius_pc, distance_mpc)?;
        let ratio = resolution_arcsec
            .map(|resolution_arcsec| resolution_ratio(theta_arcsec, resolution_arcsec))
            .transpose()?;
        Ok(Self {
            radius_pc,
            theta_arcsec,
            resolution_arcsec,
            ratio,
            resolved: ratio.map(|ratio| ratio >= threshold),
            threshold,
        })
    }

    /// Computes the sphere of influence from log₁₀(M/M☉); otherwise as [`Self::new`].
    ///
    /// # Errors
    /// As [`Self::new`], and [`AstroError::OutOfRange`] if `log_mbh` lies outside \[−10, 20\]
    /// (which catches a linear mass passed where a log is expected).
    pub fn from_log_mbh(
        log_mbh: f64,
        sigma_km_s: f64,
        distance_mpc: f64,
        resolution_arcsec: Option<f64>,
        threshold: f64,
    ) -> Result<Self, AstroError> {
        Self::new(
            mass_from_log(log_mbh)?,
            sigma_km_s,
            distance_mpc,
            resolution_arcsec,
            threshold,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::super::distance::{DistanceScaling, rescale_log};
    use super::super::test_support::{assert_abs, assert_rel};
    use super::*;

    #[test]
    fn radius_and_angle_for_1e8_msun_at_200_km_s() {
        // docs/methods.md §3.1 / §7 row 23: M = 1e8 M☉, σ = 200 km/s → r_infl = 10.7523 pc and
        // θ = 0.22178″ at 10 Mpc, computed from r_infl = G M/σ² (Peebles 1972).
        let radius_pc = influence_radius_pc(1.0e8, 200.0).unwrap();
        assert_rel(radius_pc, 10.7523, 5e-6);
        assert_rel(angular_size_arcsec(radius_pc, 10.0).unwrap(), 0.22178, 2e-5);
    }

    #[test]
    fn radius_and_angle_for_1e6_msun_at_100_km_s() {
        // docs/methods.md §3.1: M = 1e6, σ = 100 km/s, D = 1 Mpc → 0.4301 pc, 0.08871″, computed
        // from r_infl = G M/σ²; de Zeeuw 2001 quotes "~0.4 pc" for this scaling.
        let soi =
            SphereOfInfluence::new(1.0e6, 100.0, 1.0, None, DEFAULT_RESOLVED_THRESHOLD).unwrap();
        assert_rel(soi.radius_pc, 0.4301, 1e-4);
        assert_rel(soi.theta_arcsec, 0.08871, 1e-4);
        assert_eq!(soi.resolution_arcsec, None);
        assert_eq!(soi.ratio, None);
        assert_eq!(soi.resolved, None);
    }

    #[test]
    fn projected_radius_inverts_angular_size() {
        let theta_arcsec = angular_size_arcsec(10.7523, 10.0).unwrap();
        assert_rel(
            projected_radius_pc(theta_arcsec, 10.0).unwrap(),
            10.7523,
            1e-14,
        );
        // 1″ at 1 Mpc is 1e6 pc / 206 264.806 = 4.848137 pc (definition of the arcsecond).
        assert_rel(projected_radius_pc(1.0, 1.0).unwrap(), 4.848_137, 1e-6);
    }

    #[test]
    fn resolution_flag_follows_the_threshold() {
        // θ_infl = 0.22178″ (docs/methods.md §7 row 23): resolved by 0.1″ data, not by 0.5″ data.
        // Ratios computed as θ_infl/θ_res: 0.22178/0.1 = 2.2178 and 0.22178/0.5 = 0.44356.
        let sharp = SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.1), 1.0).unwrap();
        assert_rel(sharp.ratio.unwrap(), 2.2178, 2e-5);
        assert_eq!(sharp.resolved, Some(true));
        assert_eq!(sharp.resolution_arcsec, Some(0.1));

        let blurred = SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.5), 1.0).unwrap();
        assert_rel(blurred.ratio.unwrap(), 0.44356, 2e-5);
        assert_eq!(blurred.resolved, Some(false));

        // A stricter reviewer threshold turns the first one off.
        let strict = SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.1), 3.0).unwrap();
        assert_eq!(strict.resolved, Some(false));
        assert_abs(strict.threshold, 3.0, 0.0);
    }

    #[test]
    fn flag_is_inclusive_at_the_threshold() {
        let soi = SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.1), 1.0).unwrap();
        let at_threshold =
            SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.1), soi.ratio.unwrap()).unwrap();
        assert_eq!(at_threshold.resolved, Some(true));
    }

    #[test]
    fn log_and_linear_mass_agree() {
        let linear = SphereOfInfluence::new(1.0e8, 200.0, 10.0, Some(0.1), 1.0).unwrap();
        let log = SphereOfInfluence::from_log_mbh(8.0, 200.0, 10.0, Some(0.1), 1.0).unwrap();
        assert_rel(log.radius_pc, linear.radius_pc, 1e-14);
        assert_rel(log.theta_arcsec, linear.theta_arcsec, 1e-14);
        assert_eq!(log.resolved, linear.resolved);
    }

    #[test]
    fn angular_size_does_not_depend_on_distance_for_dynamical_masses() {
        // docs/methods.md §3.2: θ_infl = G M/(σ² D) with M ∝ D is independent of D
        // (physics; rescaling the distance does not change resolvedness).
        let before = SphereOfInfluence::from_log_mbh(8.3, 180.0, 16.5, Some(0.1), 1.0).unwrap();
        for new_distance_mpc in [0.8, 5.0, 18.0, 40.0, 250.0] {
            let log_mbh =
                rescale_log(8.3, DistanceScaling::DynamicalMass, 16.5, new_distance_mpc).unwrap();
            let after =
                SphereOfInfluence::from_log_mbh(log_mbh, 180.0, new_distance_mpc, Some(0.1), 1.0)
                    .unwrap();
            assert_rel(after.theta_arcsec, before.theta_arcsec, 1e-12);
            assert_rel(after.ratio.unwrap(), before.ratio.unwrap(), 1e-12);
            assert_eq!(after.resolved, before.resolved);
            // The physical radius does scale with D.
            assert_rel(
                after.radius_pc / before.radius_pc,
                new_distance_mpc / 16.5,
                1e-12,
            );
        }
    }

    #[test]
    fn refuses_invalid_input() {
        assert!(matches!(
            influence_radius_pc(0.0, 200.0),
            Err(AstroError::NotPositive {
                quantity: "mass_msun",
                ..
            })
        ));
        assert!(matches!(
            influence_radius_pc(1e8, -200.0),
            Err(AstroError::NotPositive {
                quantity: "sigma_km_s",
                ..
            })
        ));
        assert!(matches!(
            influence_radius_pc(f64::NAN, 200.0),
            Err(AstroError::NotFinite {
                quantity: "mass_msun",
                ..
            })
        ));
        assert!(matches!(
            influence_radius_pc(1e8, f64::INFINITY),
            Err(AstroError::NotFinite {
                quantity: "sigma_km_s",
                ..
            })
        ));
        assert!(matches!(
            angular_size_arcsec(10.0, 0.0),
            Err(AstroError::NotPositive {
                quantity: "distance_mpc",
                ..
            })
        ));
        assert!(matches!(
            angular_size_arcsec(-1.0, 10.0),
            Err(AstroError::NotPositive {
                quantity: "radius_pc",
                ..
            })
        ));
        assert!(matches!(
            projected_radius_pc(0.1, f64::NEG_INFINITY),
            Err(AstroError::NotFinite {
                quantity: "distance_mpc",
                ..
            })
        ));
        assert!(matches!(
            resolution_ratio(0.2, 0.0),
            Err(AstroError::NotPositive {
                quantity: "resolution_arcsec",
                ..
            })
        ));
        assert!(matches!(
            SphereOfInfluence::new(1e8, 200.0, 10.0, Some(-0.1), 1.0),
            Err(AstroError::NotPositive {
                quantity: "resolution_arcsec",
                ..
            })
        ));
        assert!(matches!(
            SphereOfInfluence::new(1e8, 200.0, 10.0, None, 0.0),
            Err(AstroError::NotPositive {
                quantity: "threshold",
                ..
            })
        ));
        assert!(matches!(
            SphereOfInfluence::new(1e8, 200.0, 10.0, None, f64::NAN),
            Err(AstroError::NotFinite {
                quantity: "threshold",
                ..
            })
        ));
        // A linear mass where a log is expected is refused, not overflowed.
        assert!(matches!(
            SphereOfInfluence::from_log_mbh(1e8, 200.0, 10.0, None, 1.0),
            Err(AstroError::OutOfRange {
                quantity: "log_mbh",
                ..
            })
        ));
        // Finite but absurd inputs overflow: refused rather than returning infinity.
        assert!(matches!(
            influence_radius_pc(1e300, 1e-300),
            Err(AstroError::Unrepresentable {
                quantity: "radius_pc"
            })
        ));
    }

    #[test]
    fn error_messages_are_one_sentence_naming_the_quantity() {
        let message = angular_size_arcsec(10.0, -3.0).unwrap_err().to_string();
        assert_eq!(message, "distance_mpc must be greater than zero, got -3.");
        let message = SphereOfInfluence::from_log_mbh(1e8, 200.0, 10.0, None, 1.0)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "log_mbh must lie between -10 and 20, got 100000000."
        );
    }
}
