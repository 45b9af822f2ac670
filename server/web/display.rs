//! Turning stored values into what a page shows: rounding, units, distance rescaling and the
//! sphere-of-influence check. Pages hold only strings made here.

use crate::astro::{DistanceScaling, SphereOfInfluence, rescale_log};
use crate::catalog::model::Quantity;

/// How a stored measurement scales with distance (science.md §3.2): dynamical masses ∝ D,
/// luminosities and photometric bulge masses ∝ D², dispersions and reverberation masses not at all.
pub(crate) fn distance_scaling(quantity: &str, method: &str) -> DistanceScaling {
    match (quantity, method) {
        ("bh_mass", "reverberation") => DistanceScaling::ReverberationMass,
        ("bh_mass", _) => DistanceScaling::DynamicalMass,
        ("bulge_mass", "photometric") => DistanceScaling::PhotometricBulgeMass,
        ("bulge_mass", _) => DistanceScaling::DynamicalBulgeMass,
        ("bulge_luminosity", _) => DistanceScaling::Luminosity,
        _ => DistanceScaling::VelocityDispersion,
    }
}

/// The stored log value moved from the distance its source assumed to the adopted distance.
/// Unchanged when the source distance is unknown or the quantity does not depend on distance.
pub(crate) fn at_adopted_distance(
    log_value: f64,
    quantity: &str,
    method: &str,
    source_distance_mpc: Option<f64>,
    adopted_distance_mpc: f64,
) -> f64 {
    match source_distance_mpc {
        Some(from) => rescale_log(
            log_value,
            distance_scaling(quantity, method),
            from,
            adopted_distance_mpc,
        )
        // Both distances passed the schema's range check, so this cannot fail; fall back to
        // the published value rather than hide the row if it ever does.
        .unwrap_or(log_value),
        None => log_value,
    }
}

/// The sphere-of-influence check for a black-hole mass (log10 M_sun at `distance_mpc`), or None
/// when it cannot be computed (no σ) or does not apply (reverberation masses).
pub(crate) fn sphere_of_influence(
    log_mbh: f64,
    method: &str,
    log_sigma: Option<f64>,
    distance_mpc: f64,
    resolution_arcsec: Option<f64>,
    threshold: f64,
) -> Option<SphereOfInfluence> {
    if method == "reverberation" {
        return None;
    }
    let sigma_km_s = 10f64.powf(log_sigma?);
    SphereOfInfluence::from_log_mbh(
        log_mbh,
        sigma_km_s,
        distance_mpc,
        resolution_arcsec,
        threshold,
    )
    .ok()
}

/// A number with a fixed count of decimals, using a true minus sign.
pub(crate) fn fixed(value: f64, decimals: usize) -> String {
    let text = format!("{value:.decimals$}");
    match text.strip_prefix('-') {
        Some(rest) if rest.chars().any(|c| c.is_ascii_digit() && c != '0') => format!("−{rest}"),
        Some(rest) => rest.to_string(),
        None => text,
    }
}

/// A value with `digits` significant digits, no exponent for everyday magnitudes.
pub(crate) fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 || !value.is_finite() {
        return fixed(value, 0);
    }
    let magnitude = value.abs().log10().floor();
    let decimals = (digits as f64 - 1.0 - magnitude).clamp(0.0, 12.0) as usize;
    fixed(value, decimals)
}

/// The label of a stored quantity word.
pub(crate) fn quantity_label(word: &str) -> &'static str {
    word.parse::<Quantity>()
        .map_or("unknown quantity", Quantity::label)
}

/// The unit of a stored quantity's canonical log value.
pub(crate) fn quantity_unit(word: &str, band: &str) -> String {
    match word {
        "bh_mass" | "bulge_mass" => "log10 M☉".to_string(),
        "sigma" => "log10 km/s".to_string(),
        "bulge_luminosity" => format!("log10 L☉,{band}"),
        _ => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_use_a_true_minus_and_significant_digits() {
        assert_eq!(fixed(-0.004, 2), "0.00");
        assert_eq!(fixed(-1.5, 1), "−1.5");
        assert_eq!(significant(0.22178, 3), "0.222");
        assert_eq!(significant(10.7523, 3), "10.8");
        assert_eq!(significant(1234.0, 2), "1234");
    }

    #[test]
    fn rescaling_follows_the_quantity_kind() {
        // Distance rescale 16.5 → 18 Mpc: M × 1.090909, L × 1.190083 (science.md §7 row 30,
        // computed from the scaling laws of §3.2).
        let m = at_adopted_distance(8.0, "bh_mass", "stellar_dynamics", Some(16.5), 18.0);
        assert!((10f64.powf(m - 8.0) - 1.090_909).abs() < 1e-6);
        let l = at_adopted_distance(10.0, "bulge_luminosity", "", Some(16.5), 18.0);
        assert!((10f64.powf(l - 10.0) - 1.190_083).abs() < 1e-6);
        let rm = at_adopted_distance(7.0, "bh_mass", "reverberation", Some(16.5), 18.0);
        assert!((rm - 7.0).abs() < 1e-12);
        assert!((at_adopted_distance(7.0, "bh_mass", "maser", None, 18.0) - 7.0).abs() < 1e-12);
    }

    #[test]
    fn sphere_of_influence_is_skipped_for_reverberation_and_missing_sigma() {
        assert!(sphere_of_influence(8.0, "reverberation", Some(2.3), 10.0, None, 1.0).is_none());
        assert!(sphere_of_influence(8.0, "gas_dynamics", None, 10.0, Some(0.1), 1.0).is_none());
        // M = 1e8 M☉, σ = 200 km/s, D = 10 Mpc → θ = 0.22178″ (science.md §7 row 23, computed).
        let soi = sphere_of_influence(
            8.0,
            "stellar_dynamics",
            Some(200f64.log10()),
            10.0,
            Some(0.1),
            1.0,
        )
        .unwrap();
        assert!((soi.theta_arcsec - 0.22178).abs() < 1e-4);
        assert_eq!(soi.resolved, Some(true));
    }
}
