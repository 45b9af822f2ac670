//! Turning the catalog's adopted values into a fit sample.
//!
//! # Values, errors and covariances (docs/methods.md §3.2)
//!
//! ```text
//! y      = log M_BH + p_y log10(D / D_src)                 rescaled to the adopted distance D
//! x      = log X    + p_x log10(D / D_src)                 (X = σ, M_bulge or L)
//! σ_logD = σ_D / (D ln 10)
//! σ_y    = √(σ_y,meas² + (p_y σ_logD)²)
//! σ_x    = √(σ_x,meas² + (p_x σ_logD)²)
//! σ_xy   = p_y p_x σ_logD²                                  shared distance error
//! plane (x2 = log M_bulge, its distance error in quadrature like σ_x):
//! σ_x2y  = p_y p_x2 σ_logD²,   σ_xx2 = p_x p_x2 σ_logD²
//! ```
//!
//! p is the distance exponent of each quantity (quantity ∝ D^p): 1 for dynamical black-hole
//! masses and dynamical bulge masses, 2 for luminosities and photometric bulge masses, 0 for σ
//! and reverberation masses. D, D_src, σ_D in Mpc; logs and errors in dex, σ_xy in dex².
//! An upper limit enters at its rescaled value with no error and no covariance (the fits take
//! the limit itself as exact). For the plane the bulge mass is the second property x2; it
//! shares the galaxy's distance with M_BH, so it carries σ_x2y as the line carries σ_xy (a
//! limit none), and σ_xx2 when x depends on distance too (σ does not: 0).

use crate::astro::{
    DistanceScaling, SphereOfInfluence, distance_covariance_dex2, log_distance_error_dex,
    rescale_log,
};
use crate::catalog::relation_rows::{LuminosityRow, RelationRow};
use crate::fit::Point;
use crate::units::Quantity;

use super::{LimitsChoice, Relation, SampleFilter, SoiChoice};

/// How a stored measurement scales with distance (docs/methods.md §3.2): dynamical masses ∝ D,
/// luminosities and photometric bulge masses ∝ D², dispersions and reverberation masses not at
/// all.
pub fn distance_scaling(quantity: Quantity, method: &str) -> DistanceScaling {
    match (quantity, method) {
        (Quantity::BlackHoleMass, "reverberation") => DistanceScaling::ReverberationMass,
        // A single-epoch mass goes as L^b with L ∝ D²: D^1 for the vp06 calibration (b = 0.5),
        // D^1.07 for the Bentz et al. 2013 slope, taken as D^1 (docs/methods.md §4.2).
        (Quantity::BlackHoleMass, _) => DistanceScaling::DynamicalMass,
        (Quantity::BulgeMass, "photometric") => DistanceScaling::PhotometricBulgeMass,
        (Quantity::BulgeMass, _) => DistanceScaling::DynamicalBulgeMass,
        (Quantity::BulgeLuminosity, _) => DistanceScaling::Luminosity,
        _ => DistanceScaling::VelocityDispersion,
    }
}

/// The stored log value moved from the distance its source assumed to the adopted distance.
/// Unchanged when the source distance is unknown or the quantity does not depend on distance.
///
/// ```text
/// log Q_D = log Q_src + p log10(D / D_src)      (docs/methods.md §3.2)
/// ```
pub fn at_adopted_distance(
    log_value: f64,
    quantity: Quantity,
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

/// The sphere-of-influence check for a black-hole mass (log10 M☉ at `distance_mpc`), or None
/// when it cannot be computed (no σ) or does not apply (reverberation masses).
pub fn sphere_of_influence(
    log_mbh: f64,
    method: &str,
    log_sigma: Option<f64>,
    distance_mpc: f64,
    resolution_arcsec: Option<f64>,
    threshold: f64,
) -> Option<SphereOfInfluence> {
    if crate::catalog::model::is_virial_method(method) {
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

/// One galaxy of a sample, with what pages show and group by.
#[derive(Debug, Clone, PartialEq)]
pub struct Member {
    /// Galaxy key.
    pub galaxy_id: i64,
    /// Galaxy name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// Stored morphology word.
    pub morphology: String,
    /// Stored bulge kind word.
    pub bulge_kind: String,
    /// Stored centre kind word.
    pub centre_kind: String,
    /// Stored black-hole mass method word.
    pub mass_method: String,
    /// Stored activity class word.
    pub activity: String,
    /// For a virial mass: its width measure word (`sigma_line`, `fwhm`); empty otherwise.
    pub mbh_width_definition: String,
    /// For a virial mass moved to the adopted factor: log10 ⟨f⟩ applied (None otherwise).
    pub mbh_log_f: Option<f64>,
    /// Whether the sphere of influence is resolved (None when it cannot be said).
    pub resolved: Option<bool>,
    /// log10 of the adopted distance (Mpc).
    pub log_distance: f64,
    /// Adopted log σ (km/s), whatever its definition, if any.
    pub log_sigma: Option<f64>,
    /// Adopted log M_bulge at the adopted distance (M☉), if any.
    pub log_mbulge: Option<f64>,
    /// The black-hole mass's lower and upper errors as fitted (dex): the published errors, kept
    /// apart where they are asymmetric, each with the adopted distance's error in quadrature
    /// (the fit itself uses their mean's, `Point::y_err`; docs/methods.md §2.5, §3.2). Zero for
    /// an upper limit.
    pub mbh_err_dex: (f64, f64),
    /// Where the adopted black-hole mass was published ("" when not recorded).
    pub mbh_reference: String,
}

/// A fit sample: points and the galaxies they come from, in the same order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sample {
    /// The points handed to the fit.
    pub points: Vec<Point>,
    /// The galaxy of each point.
    pub members: Vec<Member>,
    /// Galaxies that matched the filter and had every value but were left out because their
    /// adopted σ has the other definition.
    pub left_out_sigma_definition: usize,
    /// Galaxies that matched the filter but lack a value the relation needs.
    pub left_out_missing: usize,
    /// Reverberation and single-epoch masses that matched the rest of the filter but were left
    /// out by the choice of mass kinds (dynamical only by default, docs/methods.md §4.7).
    pub left_out_virial: usize,
    /// Upper limits that matched the filter and had every value but were left out
    /// ([`LimitsChoice::Exclude`], asked or made so for an estimator that cannot use them:
    /// `SampleFilter::for_method`).
    pub left_out_limits: usize,
}

impl Sample {
    /// Number of detections.
    pub fn n_detections(&self) -> usize {
        self.points.iter().filter(|p| !p.upper_limit).count()
    }

    /// Number of upper limits.
    pub fn n_limits(&self) -> usize {
        self.points.iter().filter(|p| p.upper_limit).count()
    }
}

/// Builds the sample of `relation` from the catalog's adopted values.
///
/// See the module documentation for the equations. Galaxies are taken in the rows' order.
/// `soi_threshold` is the θ_infl / resolution ratio above which a sphere of influence counts
/// as resolved.
pub fn build_sample(
    rows: &[RelationRow],
    luminosities: &[LuminosityRow],
    relation: &Relation,
    filter: &SampleFilter,
    soi_threshold: f64,
) -> Sample {
    let mut sample = Sample::default();
    for row in rows {
        let method = row.mbh_method.as_deref().unwrap_or("");
        let log_mbh = row.log_mbh.map(|v| {
            at_adopted_distance(
                v,
                Quantity::BlackHoleMass,
                method,
                row.mbh_source_distance_mpc,
                row.distance_mpc,
            )
        });
        let resolved = log_mbh
            .and_then(|m| {
                sphere_of_influence(
                    m,
                    method,
                    row.log_sigma,
                    row.distance_mpc,
                    row.mbh_resolution_arcsec,
                    soi_threshold,
                )
            })
            .and_then(|s| s.resolved);
        let tags_match = filter
            .morphology
            .is_none_or(|m| row.morphology == m.as_str())
            && filter
                .bulge_kind
                .is_none_or(|b| row.bulge_kind == b.as_str())
            && filter
                .centre_kind
                .is_none_or(|c| row.centre_kind == c.as_str())
            && filter.activity.is_none_or(|a| row.activity == a.as_str())
            && (filter.soi == SoiChoice::All || resolved == Some(true));
        if !tags_match {
            continue;
        }
        // A virial mass the choice of mass kinds leaves out is counted only if it would have
        // entered otherwise; any other reason to leave it out is not counted.
        let virial_out = !filter.admits_method(method);
        if virial_out
            && (filter.mass_method.is_some() || !crate::catalog::model::is_virial_method(method))
        {
            continue;
        }
        let mbulge_method = row.mbulge_method.as_deref().unwrap_or("");
        let log_mbulge = row.log_mbulge.map(|v| {
            at_adopted_distance(
                v,
                Quantity::BulgeMass,
                mbulge_method,
                row.mbulge_source_distance_mpc,
                row.distance_mpc,
            )
        });
        let Some(y) = log_mbh else {
            sample.left_out_missing += usize::from(!virial_out);
            continue;
        };
        let upper_limit = row.mbh_upper_limit.unwrap_or(false);
        let sigma_log_d =
            log_distance_error_dex(row.distance_mpc, row.distance_err_mpc).unwrap_or(0.0);
        let kind_y = distance_scaling(Quantity::BlackHoleMass, method);
        let with_distance =
            |err: f64, kind: DistanceScaling| err.hypot(f64::from(kind.exponent()) * sigma_log_d);
        let y_err = with_distance(row.mbh_err_dex.unwrap_or(0.0), kind_y);
        let covariance = |kind_x: DistanceScaling| {
            distance_covariance_dex2(kind_y, kind_x, row.distance_mpc, row.distance_err_mpc)
                .unwrap_or(0.0)
        };
        // (x, σ_x, kind of x), and the second property for the plane.
        let sigma_value = row.log_sigma.zip(row.sigma_err_dex);
        let mbulge_value = log_mbulge.zip(row.mbulge_err_dex).map(|(v, e)| {
            let kind = distance_scaling(Quantity::BulgeMass, mbulge_method);
            (v, with_distance(e, kind), kind)
        });
        let first: Option<(f64, f64, DistanceScaling)> = match relation {
            Relation::MSigma | Relation::SigmaBulgePlane => {
                sigma_value.map(|(v, e)| (v, e, DistanceScaling::VelocityDispersion))
            }
            Relation::MBulge => mbulge_value,
            Relation::Luminosity(band) => luminosities
                .iter()
                .find(|l| l.galaxy_id == row.galaxy_id && &l.band == band)
                .map(|l| {
                    let v = at_adopted_distance(
                        l.log_value,
                        Quantity::BulgeLuminosity,
                        "",
                        l.source_distance_mpc,
                        row.distance_mpc,
                    );
                    (
                        v,
                        with_distance(l.err_dex, DistanceScaling::Luminosity),
                        DistanceScaling::Luminosity,
                    )
                }),
        };
        let second = match relation {
            Relation::SigmaBulgePlane => match mbulge_value {
                Some(v) => Some(v),
                None => {
                    sample.left_out_missing += usize::from(!virial_out);
                    continue;
                }
            },
            _ => None,
        };
        let Some((x, x_err, kind_x)) = first else {
            sample.left_out_missing += usize::from(!virial_out);
            continue;
        };
        if relation.uses_sigma()
            && row.sigma_definition.as_deref() != Some(filter.sigma.definition().as_str())
        {
            sample.left_out_sigma_definition += usize::from(!virial_out);
            continue;
        }
        if upper_limit && filter.limits == LimitsChoice::Exclude {
            sample.left_out_limits += usize::from(!virial_out);
            continue;
        }
        let mut point = if upper_limit {
            Point::limit(x, x_err, y)
        } else {
            Point::new(x, x_err, y, y_err).with_xy_cov(covariance(kind_x))
        };
        point = point.named(&row.name);
        if let Some((x2, x2_err, kind_x2)) = second {
            let x_x2_cov =
                distance_covariance_dex2(kind_x, kind_x2, row.distance_mpc, row.distance_err_mpc)
                    .unwrap_or(0.0);
            let x2_y_cov = if upper_limit {
                0.0
            } else {
                covariance(kind_x2)
            };
            point = point
                .with_x2(x2, x2_err)
                .with_x2_covariances(x2_y_cov, x_x2_cov);
        }
        if virial_out {
            sample.left_out_virial += 1;
            continue;
        }
        sample.points.push(point);
        sample.members.push(Member {
            galaxy_id: row.galaxy_id,
            name: row.name.clone(),
            slug: row.slug.clone(),
            morphology: row.morphology.clone(),
            bulge_kind: row.bulge_kind.clone(),
            centre_kind: row.centre_kind.clone(),
            mass_method: method.to_owned(),
            activity: row.activity.clone(),
            mbh_width_definition: row.mbh_width_definition.clone().unwrap_or_default(),
            mbh_log_f: row.mbh_log_f,
            resolved,
            log_distance: row.distance_mpc.log10(),
            log_sigma: row.log_sigma,
            log_mbulge,
            mbh_err_dex: if upper_limit {
                (0.0, 0.0)
            } else {
                (
                    with_distance(
                        row.mbh_err_minus_dex.or(row.mbh_err_dex).unwrap_or(0.0),
                        kind_y,
                    ),
                    with_distance(
                        row.mbh_err_plus_dex.or(row.mbh_err_dex).unwrap_or(0.0),
                        kind_y,
                    ),
                )
            },
            mbh_reference: row.mbh_reference.clone().unwrap_or_default(),
        });
    }
    sample
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every mass method: these tests check how values and errors are built, whatever the
    /// default sample admits.
    fn every_mass() -> SampleFilter {
        SampleFilter {
            masses: super::super::MassesChoice::All,
            ..SampleFilter::default()
        }
    }
    use crate::catalog::model::{MassMethod, Morphology};
    use crate::fit::tolerance::close;
    use crate::relations::SigmaChoice;
    use std::f64::consts::LN_10;

    /// An invented catalog row: adopted 18 ± 1.8 Mpc, masses published at 16.5 Mpc.
    fn row(name: &str) -> RelationRow {
        RelationRow {
            galaxy_id: 1,
            name: name.to_owned(),
            slug: name.to_lowercase(),
            morphology: "elliptical".to_owned(),
            bulge_kind: "classical".to_owned(),
            centre_kind: "core".to_owned(),
            distance_mpc: 18.0,
            distance_err_mpc: 1.8,
            log_mbh: Some(8.0),
            mbh_err_dex: Some(0.1),
            mbh_err_minus_dex: Some(0.1),
            mbh_err_plus_dex: Some(0.1),
            mbh_upper_limit: Some(false),
            mbh_method: Some("stellar_dynamics".to_owned()),
            mbh_source_distance_mpc: Some(16.5),
            mbh_resolution_arcsec: Some(0.1),
            mbh_reference: Some("Invented et al. 2020".to_owned()),
            log_sigma: Some(200f64.log10()),
            sigma_err_dex: Some(0.02),
            sigma_definition: Some("sigma_e".to_owned()),
            log_mbulge: Some(11.0),
            mbulge_err_dex: Some(0.15),
            mbulge_method: Some("photometric".to_owned()),
            mbulge_source_distance_mpc: Some(16.5),
            activity: "unknown".to_owned(),
            mbh_log_f: None,
            mbh_width_definition: None,
        }
    }

    /// Asserts |a − b| ≤ `tol` (an absolute tolerance, by the shared comparison rule).
    #[track_caller]
    fn assert_close(a: f64, b: f64, tol: f64) {
        assert!(close(a, b, tol, 0.0), "{a} vs {b}");
    }

    #[test]
    fn masses_are_rescaled_and_carry_the_distance_error() {
        let s = build_sample(
            &[row("Alpha 1")],
            &[],
            &Relation::MSigma,
            &every_mass(),
            1.0,
        );
        assert_eq!(s.points.len(), 1);
        let p = &s.points[0];
        // docs/methods.md §3.2 / §7 row 30: 16.5 → 18 Mpc multiplies a dynamical mass by
        // 1.090909 (computed from M ∝ D).
        assert_close(10f64.powf(p.y - 8.0), 1.090_909, 1e-6);
        // σ_logD = 1.8 / (18 ln 10); σ_y = √(0.1² + σ_logD²) (docs/methods.md §3.2, computed).
        let sld = 1.8 / (18.0 * LN_10);
        assert_close(p.y_err, (0.01 + sld * sld).sqrt(), 1e-12);
        // σ does not depend on distance: its error is as measured and the covariance is zero.
        assert_close(p.x_err, 0.02, 1e-12);
        assert_close(p.xy_cov, 0.0, 1e-15);
        assert_eq!(p.name, "Alpha 1");
    }

    #[test]
    fn bulge_masses_and_luminosities_share_the_distance_error() {
        let r = row("Alpha 1");
        let sld = 1.8 / (18.0 * LN_10);
        // Photometric bulge mass ∝ D², dynamical M_BH ∝ D: cov = 1·2·σ_logD² (docs/methods.md
        // §3.2, computed).
        let s = build_sample(
            std::slice::from_ref(&r),
            &[],
            &Relation::MBulge,
            &every_mass(),
            1.0,
        );
        let p = &s.points[0];
        assert_close(p.xy_cov, 2.0 * sld * sld, 1e-15);
        assert_close(p.x_err, 0.15f64.hypot(2.0 * sld), 1e-12);
        // 16.5 → 18 Mpc: photometric mass × 1.190083 (∝ D², §7 row 30, computed).
        assert_close(10f64.powf(p.x - 11.0), 1.190_083, 1e-6);
        // A dynamical bulge mass ∝ D: cov = σ_logD².
        let mut dynamical = r.clone();
        dynamical.mbulge_method = Some("dynamical".to_owned());
        let s = build_sample(&[dynamical], &[], &Relation::MBulge, &every_mass(), 1.0);
        assert_close(s.points[0].xy_cov, sld * sld, 1e-15);
        // A reverberation mass does not depend on D: no covariance, no distance error in y.
        let mut reverb = r.clone();
        reverb.mbh_method = Some("reverberation".to_owned());
        let s = build_sample(&[reverb], &[], &Relation::MBulge, &every_mass(), 1.0);
        assert_close(s.points[0].xy_cov, 0.0, 1e-15);
        assert_close(s.points[0].y_err, 0.1, 1e-12);
        assert_close(s.points[0].y, 8.0, 1e-12);
        // Luminosity ∝ D²: cov = 2 σ_logD², σ_x = √(0.07² + (2σ_logD)²).
        let lum = LuminosityRow {
            galaxy_id: 1,
            band: "K".to_owned(),
            log_value: 10.5,
            err_dex: 0.07,
            source_distance_mpc: Some(18.0),
        };
        let s = build_sample(
            &[r],
            &[lum],
            &Relation::Luminosity("K".to_owned()),
            &every_mass(),
            1.0,
        );
        let p = &s.points[0];
        assert_close(p.x, 10.5, 1e-12);
        assert_close(p.xy_cov, 2.0 * sld * sld, 1e-15);
        assert_close(p.x_err, (0.0049 + 4.0 * sld * sld).sqrt(), 1e-12);
    }

    #[test]
    fn plane_points_carry_the_bulge_mass_distance_covariance() {
        // x = log σ (no distance dependence), x2 = log M_bulge, y = log M_BH share D = 18 ± 1.8
        // Mpc: σ_x2y = p_y p_x2 σ_logD², σ_xx2 = 0 (docs/methods.md §3.2, computed).
        let sld = 1.8 / (18.0 * LN_10);
        let plane = |r: RelationRow| {
            build_sample(&[r], &[], &Relation::SigmaBulgePlane, &every_mass(), 1.0)
                .points
                .remove(0)
        };
        // Dynamical M_BH (p = 1) and photometric M_bulge (p = 2): 2 σ_logD².
        let p = plane(row("Alpha 1"));
        assert_close(p.x2_y_cov, 2.0 * sld * sld, 1e-15);
        assert_close(p.x_x2_cov, 0.0, 1e-15);
        assert_close(p.x2_err, 0.15f64.hypot(2.0 * sld), 1e-12);
        // The same galaxy in the line keeps its x–y covariance as before.
        assert_close(p.xy_cov, 0.0, 1e-15);
        // A dynamical bulge mass (p = 1): σ_logD².
        let mut dynamical = row("Alpha 1");
        dynamical.mbulge_method = Some("dynamical".to_owned());
        assert_close(plane(dynamical).x2_y_cov, sld * sld, 1e-15);
        // A reverberation mass does not depend on D, and a limit carries no error: no
        // covariance with y in either case.
        let mut reverb = row("Alpha 1");
        reverb.mbh_method = Some("reverberation".to_owned());
        assert_close(plane(reverb).x2_y_cov, 0.0, 1e-15);
        let mut limit = row("Alpha 1");
        limit.mbh_upper_limit = Some(true);
        let p = plane(limit);
        assert!(p.upper_limit);
        assert_close(p.x2_y_cov, 0.0, 1e-15);
        // Without a distance error there is nothing shared.
        let mut exact = row("Alpha 1");
        exact.distance_err_mpc = 0.0;
        assert_close(plane(exact).x2_y_cov, 0.0, 1e-15);
    }

    #[test]
    fn limits_are_flagged_without_errors() {
        let mut r = row("Limit 1");
        r.mbh_upper_limit = Some(true);
        r.mbh_err_dex = Some(0.0);
        let s = build_sample(&[r], &[], &Relation::MBulge, &SampleFilter::default(), 1.0);
        let p = &s.points[0];
        assert!(p.upper_limit);
        assert_close(p.y_err, 0.0, 1e-15);
        assert_close(p.xy_cov, 0.0, 1e-15);
        assert_eq!((s.n_detections(), s.n_limits()), (0, 1));
        let mut r = row("Limit 1");
        r.mbh_upper_limit = Some(true);
        let detections_only = SampleFilter {
            limits: LimitsChoice::Exclude,
            ..SampleFilter::default()
        };
        let s = build_sample(
            &[r, row("Alpha 1")],
            &[],
            &Relation::MBulge,
            &detections_only,
            1.0,
        );
        assert_eq!((s.n_detections(), s.n_limits()), (1, 0));
        assert_eq!(s.left_out_limits, 1);
    }

    /// Invented rows on M–σ: ten detections at σ = 150…285 km/s near log M = 8.3 + 4 (x − 2.3),
    /// and two upper limits.
    fn rows_with_limits() -> Vec<RelationRow> {
        let mut rows: Vec<RelationRow> = (0..12)
            .map(|i| {
                let mut r = row(&format!("Object {i}"));
                r.galaxy_id = i;
                let x = (150.0 + 15.0 * i as f64).log10();
                r.log_sigma = Some(x);
                let wiggle = if i % 2 == 0 { 0.15 } else { -0.15 };
                r.log_mbh = Some(8.3 + 4.0 * (x - 2.3) + wiggle);
                r
            })
            .collect();
        rows[3].mbh_upper_limit = Some(true);
        rows[8].mbh_upper_limit = Some(true);
        rows
    }

    #[test]
    fn estimators_without_limits_leave_them_out_by_default_and_fit_the_rest() {
        use crate::fit::{FitSpec, Method};
        let rows = rows_with_limits();
        let chosen = SampleFilter::default();
        assert_eq!(chosen.limits, LimitsChoice::Auto);
        for method in [
            Method::Fitexy,
            Method::Bces(crate::fit::BcesLine::YOnX),
            Method::Bces(crate::fit::BcesLine::Orthogonal),
        ] {
            let filter = chosen.for_method(method);
            assert_eq!(filter.limits, LimitsChoice::Exclude);
            let s = build_sample(&rows, &[], &Relation::MSigma, &filter, 1.0);
            assert_eq!(s.left_out_limits, 2, "{method:?}");
            assert_eq!((s.n_detections(), s.n_limits()), (10, 0));
            let fit = crate::fit::fit(&s.points, &FitSpec::new(method, 2.3));
            assert!(fit.is_ok(), "{method:?}: {fit:?}");
            let choice = crate::relations::FitChoice {
                method,
                ..Default::default()
            };
            let told = choice.limits_left_out(&s).expect("a notice");
            assert!(told.automatic && told.count == 2);
            assert!(
                told.sentence.starts_with("2 upper limits left out"),
                "{}",
                told.sentence
            );
        }
        // The likelihood estimators keep them; asking for them with FITEXY keeps them too, and
        // the estimator then refuses the sample.
        for method in [Method::Structural, Method::Conditional] {
            let s = build_sample(
                &rows,
                &[],
                &Relation::MSigma,
                &chosen.for_method(method),
                1.0,
            );
            assert_eq!((s.n_limits(), s.left_out_limits), (2, 0));
        }
        let asked = SampleFilter {
            limits: LimitsChoice::Include,
            ..SampleFilter::default()
        };
        let s = build_sample(
            &rows,
            &[],
            &Relation::MSigma,
            &asked.for_method(Method::Fitexy),
            1.0,
        );
        assert_eq!(s.n_limits(), 2);
        assert!(crate::fit::fit(&s.points, &FitSpec::new(Method::Fitexy, 2.3)).is_err());
    }

    #[test]
    fn sigma_definitions_are_never_mixed() {
        let mut central = row("Central 1");
        central.sigma_definition = Some("sigma_c".to_owned());
        let rows = [row("Eff 1"), central, row("Eff 2")];
        let s = build_sample(&rows, &[], &Relation::MSigma, &SampleFilter::default(), 1.0);
        assert_eq!(s.points.len(), 2);
        assert_eq!(s.left_out_sigma_definition, 1);
        let only_c = SampleFilter {
            sigma: SigmaChoice::Central,
            ..SampleFilter::default()
        };
        let s = build_sample(&rows, &[], &Relation::MSigma, &only_c, 1.0);
        assert_eq!(s.points.len(), 1);
        assert_eq!(s.left_out_sigma_definition, 2);
        // M_BH–M_bulge does not use σ: nothing is left out for its definition.
        let s = build_sample(&rows, &[], &Relation::MBulge, &SampleFilter::default(), 1.0);
        assert_eq!((s.points.len(), s.left_out_sigma_definition), (3, 0));
    }

    #[test]
    fn filters_select_by_tags_and_sphere_of_influence() {
        let mut spiral = row("Spiral 1");
        spiral.morphology = "spiral".to_owned();
        spiral.mbh_method = Some("maser".to_owned());
        let mut unresolved = row("Blur 1");
        // M = 1e8 at 16.5 Mpc rescaled, σ = 200 km/s, D = 18 Mpc: θ ≈ 0.13″ (computed from
        // r_infl = G M/σ², docs/methods.md §3.1); a 0.8″ resolution does not resolve it.
        unresolved.mbh_resolution_arcsec = Some(0.8);
        let mut no_mass = row("Empty 1");
        no_mass.log_mbh = None;
        let rows = [row("Alpha 1"), spiral, unresolved, no_mass];
        let all = build_sample(&rows, &[], &Relation::MSigma, &SampleFilter::default(), 1.0);
        assert_eq!((all.points.len(), all.left_out_missing), (3, 1));
        let ellipticals = SampleFilter {
            morphology: Some(Morphology::Elliptical),
            ..SampleFilter::default()
        };
        assert_eq!(
            build_sample(&rows, &[], &Relation::MSigma, &ellipticals, 1.0)
                .points
                .len(),
            2
        );
        let masers = SampleFilter {
            mass_method: Some(MassMethod::Maser),
            ..SampleFilter::default()
        };
        let s = build_sample(&rows, &[], &Relation::MSigma, &masers, 1.0);
        assert_eq!(s.members[0].name, "Spiral 1");
        let resolved = SampleFilter {
            soi: SoiChoice::Resolved,
            ..SampleFilter::default()
        };
        let s = build_sample(&rows, &[], &Relation::MSigma, &resolved, 1.0);
        let names: Vec<&str> = s.members.iter().map(|m| m.name.as_str()).collect();
        assert_eq!(names, ["Alpha 1", "Spiral 1"]);
        // The plane needs both σ and a bulge mass.
        let mut no_bulge = row("Thin 1");
        no_bulge.log_mbulge = None;
        let s = build_sample(
            &[row("Alpha 1"), no_bulge],
            &[],
            &Relation::SigmaBulgePlane,
            &every_mass(),
            1.0,
        );
        assert_eq!((s.points.len(), s.left_out_missing), (1, 1));
        assert!(s.points[0].x2.is_some());
    }

    #[test]
    fn rescaling_follows_the_quantity_kind() {
        // Distance rescale 16.5 → 18 Mpc: M × 1.090909, L × 1.190083 (docs/methods.md §7 row 30,
        // computed from the scaling laws of §3.2).
        let m = at_adopted_distance(
            8.0,
            Quantity::BlackHoleMass,
            "stellar_dynamics",
            Some(16.5),
            18.0,
        );
        assert!((10f64.powf(m - 8.0) - 1.090_909).abs() < 1e-6);
        let l = at_adopted_distance(10.0, Quantity::BulgeLuminosity, "", Some(16.5), 18.0);
        assert!((10f64.powf(l - 10.0) - 1.190_083).abs() < 1e-6);
        let rm = at_adopted_distance(
            7.0,
            Quantity::BlackHoleMass,
            "reverberation",
            Some(16.5),
            18.0,
        );
        assert!((rm - 7.0).abs() < 1e-12);
        assert!(
            (at_adopted_distance(7.0, Quantity::BlackHoleMass, "maser", None, 18.0) - 7.0).abs()
                < 1e-12
        );
    }

    #[test]
    fn sphere_of_influence_is_skipped_for_reverberation_and_missing_sigma() {
        assert!(sphere_of_influence(8.0, "reverberation", Some(2.3), 10.0, None, 1.0).is_none());
        assert!(sphere_of_influence(8.0, "gas_dynamics", None, 10.0, Some(0.1), 1.0).is_none());
        // M = 1e8 M☉, σ = 200 km/s, D = 10 Mpc → θ = 0.22178″ (docs/methods.md §7 row 23,
        // computed).
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
