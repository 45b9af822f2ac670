//! Enclosed mass from the rotation speed of gas or masers on circular orbits.
//!
//! A thin disk inclined at i to the sky (i = 90° edge-on) shows line-of-sight speeds
//! `v_obs` = `v_c` sin i; the mass inside radius r follows from Kepler's third law. The radius is
//! given either in pc or as an angle at a distance.

use super::AstroError;
use super::constants::G_PC_KM2_S2_PER_MSUN;
use super::influence::projected_radius_pc;
use super::validate::{finite, positive, positive_result};

/// Circular speed, in km/s, from an observed (projected) rotation speed and the inclination.
///
/// ```text
/// v_c = v_obs / sin i
/// ```
///
/// where `v_obs` is the line-of-sight rotation amplitude (km/s) and i the inclination of the
/// disk (degrees; 90° is edge-on). i and 180° − i give the same speed.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `v_obs_km_s` is not a finite
/// number greater than zero; [`AstroError::NotFinite`] or
/// [`AstroError::InclinationOutOfRange`] if `inclination_deg` is not strictly between 0° and
/// 180° (a face-on disk, sin i = 0, shows no rotation to deproject);
/// [`AstroError::Unrepresentable`] if the result overflows.
pub fn circular_speed_km_s(v_obs_km_s: f64, inclination_deg: f64) -> Result<f64, AstroError> {
    let v_obs_km_s = positive("v_obs_km_s", v_obs_km_s)?;
    let inclination_deg = finite("inclination_deg", inclination_deg)?;
    if !(inclination_deg > 0.0 && inclination_deg < 180.0) {
        return Err(AstroError::InclinationOutOfRange {
            value: inclination_deg,
        });
    }
    positive_result("v_c_km_s", v_obs_km_s / inclination_deg.to_radians().sin())
}

/// Keplerian mass, in M☉, enclosed within radius r by a circular orbit of speed `v_c`.
///
/// ```text
/// M(<r) = v_c² r / G
/// ```
///
/// where `v_c` is the circular speed (km/s, already deprojected), r the orbital radius (pc) and
/// G = 4.300 917 27e-3 pc M☉⁻¹ (km/s)², taken from GM☉ so that the mass in M☉ carries none of
/// G's uncertainty.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::NotPositive`] if `v_c_km_s` or `radius_pc` is
/// not a finite number greater than zero; [`AstroError::Unrepresentable`] if the mass
/// overflows or underflows.
///
/// # References
/// Newtonian circular orbit, `v_c² = G M(<r) / r` (textbook physics; docs/methods.md §4.6).
pub fn keplerian_mass_msun(v_c_km_s: f64, radius_pc: f64) -> Result<f64, AstroError> {
    let v_c_km_s = positive("v_c_km_s", v_c_km_s)?;
    let radius_pc = positive("radius_pc", radius_pc)?;
    positive_result(
        "mass_msun",
        v_c_km_s * (v_c_km_s / G_PC_KM2_S2_PER_MSUN) * radius_pc,
    )
}

/// Mass, in M☉, enclosed within radius r (pc) by a disk with observed rotation speed `v_obs`
/// (km/s) at inclination i (degrees).
///
/// ```text
/// M(<r) = (v_obs / sin i)² r / G
/// ```
///
/// See [`circular_speed_km_s`] and [`keplerian_mass_msun`].
///
/// # Errors
/// As [`circular_speed_km_s`] and [`keplerian_mass_msun`].
pub fn enclosed_mass_msun(
    v_obs_km_s: f64,
    inclination_deg: f64,
    radius_pc: f64,
) -> Result<f64, AstroError> {
    keplerian_mass_msun(circular_speed_km_s(v_obs_km_s, inclination_deg)?, radius_pc)
}

/// Mass, in M☉, enclosed within an angular radius (arcsec) at a distance (Mpc), for a disk
/// with observed rotation speed `v_obs` (km/s) at inclination i (degrees).
///
/// ```text
/// M(<r) = (v_obs / sin i)² r / G,   r = θ D / 206 264.806″
/// ```
///
/// The mass scales as M ∝ D (see [`super::distance::DistanceScaling::DynamicalMass`]).
///
/// # Errors
/// As [`enclosed_mass_msun`], and as [`projected_radius_pc`] for `radius_arcsec` and
/// `distance_mpc`.
pub fn enclosed_mass_at_angle_msun(
    v_obs_km_s: f64,
    inclination_deg: f64,
    radius_arcsec: f64,
    distance_mpc: f64,
) -> Result<f64, AstroError> {
    let v_c_km_s = circular_speed_km_s(v_obs_km_s, inclination_deg)?;
    let radius_arcsec = positive("radius_arcsec", radius_arcsec)?;
    let radius_pc = projected_radius_pc(radius_arcsec, distance_mpc)?;
    keplerian_mass_msun(v_c_km_s, radius_pc)
}

#[cfg(test)]
mod tests {
    use super::super::constants::LIGHT_YEARS_PER_PARSEC;
    use super::super::test_support::assert_rel;
    use super::*;

    #[test]
    fn mass_inside_10_pc_at_100_km_s() {
        // docs/methods.md §4.6: v_c = 100 km/s at r = 10 pc → 2.325085e7 M☉, computed from
        // M = v_c² r / G.
        assert_rel(keplerian_mass_msun(100.0, 10.0).unwrap(), 2.325_085e7, 5e-7);
        assert_rel(
            enclosed_mass_msun(100.0, 90.0, 10.0).unwrap(),
            2.325_085e7,
            5e-7,
        );
    }

    #[test]
    fn inclination_deprojects_the_speed() {
        // v_obs = 50 km/s at i = 30° is v_c = 100 km/s (sin 30° = 1/2), so the same mass as above
        // (docs/methods.md §4.6, computed).
        assert_rel(circular_speed_km_s(50.0, 30.0).unwrap(), 100.0, 1e-14);
        assert_rel(
            enclosed_mass_msun(50.0, 30.0, 10.0).unwrap(),
            2.325_085e7,
            5e-7,
        );
        // i and 180° − i are the same geometry.
        assert_rel(
            enclosed_mass_msun(50.0, 150.0, 10.0).unwrap(),
            enclosed_mass_msun(50.0, 30.0, 10.0).unwrap(),
            1e-14,
        );
    }

    #[test]
    fn angular_radius_at_a_distance_matches_the_physical_radius() {
        // 10 pc at 10 Mpc subtends 10 / 1e7 × 206 264.806″ = 0.206 264 806″.
        let theta_arcsec = 0.206_264_806;
        assert_rel(
            enclosed_mass_at_angle_msun(100.0, 90.0, theta_arcsec, 10.0).unwrap(),
            2.325_085e7,
            5e-7,
        );
        // M ∝ D at fixed angle and speed.
        assert_rel(
            enclosed_mass_at_angle_msun(100.0, 90.0, theta_arcsec, 20.0).unwrap(),
            2.0 * 2.325_085e7,
            5e-7,
        );
    }

    #[test]
    fn gas_at_800_km_s_at_60_light_years_encloses_about_3e9_msun() {
        // Common practice: gas orbiting at about 800 km/s some 60 light-years from a nucleus
        // implies an enclosed mass of about 3e9 M☉ (rule of thumb; checked within 20 %).
        let radius_pc = 60.0 / LIGHT_YEARS_PER_PARSEC;
        let mass_msun = keplerian_mass_msun(800.0, radius_pc).unwrap();
        assert_rel(mass_msun, 3.0e9, 0.2);
    }

    #[test]
    fn refuses_invalid_input() {
        for inclination_deg in [0.0, 180.0, -10.0, 181.0, 360.0] {
            assert!(
                matches!(
                    circular_speed_km_s(100.0, inclination_deg),
                    Err(AstroError::InclinationOutOfRange { .. })
                ),
                "inclination {inclination_deg} was accepted"
            );
        }
        assert!(matches!(
            enclosed_mass_msun(100.0, f64::NAN, 10.0),
            Err(AstroError::NotFinite {
                quantity: "inclination_deg",
                ..
            })
        ));
        assert!(matches!(
            enclosed_mass_msun(0.0, 90.0, 10.0),
            Err(AstroError::NotPositive {
                quantity: "v_obs_km_s",
                ..
            })
        ));
        assert!(matches!(
            enclosed_mass_msun(100.0, 90.0, -10.0),
            Err(AstroError::NotPositive {
                quantity: "radius_pc",
                ..
            })
        ));
        assert!(matches!(
            keplerian_mass_msun(f64::INFINITY, 10.0),
            Err(AstroError::NotFinite {
                quantity: "v_c_km_s",
                ..
            })
        ));
        assert!(matches!(
            enclosed_mass_at_angle_msun(100.0, 90.0, 0.0, 10.0),
            Err(AstroError::NotPositive {
                quantity: "radius_arcsec",
                ..
            })
        ));
        assert!(matches!(
            enclosed_mass_at_angle_msun(100.0, 90.0, 0.1, 0.0),
            Err(AstroError::NotPositive {
                quantity: "distance_mpc",
                ..
            })
        ));
        assert!(matches!(
            keplerian_mass_msun(1e200, 1e200),
            Err(AstroError::Unrepresentable {
                quantity: "mass_msun"
            })
        ));
        let message = circular_speed_km_s(100.0, 0.0).unwrap_err().to_string();
        assert_eq!(
            message,
            "inclination_deg must lie strictly between 0 and 180 degrees (edge-on is 90), got 0."
        );
    }
}
