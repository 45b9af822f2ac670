//! The black hole's share of its bulge's mass, M_BH/M_bulge, against the M_BH–M_bulge relation
//! and against the rule of thumb that a black hole holds about 0.1–0.5 % of its bulge's mass
//! (common practice; docs/methods.md §3.4). The galaxy page, the place check and the API show it
//! through here.
//!
//! ```text
//! log r = log M_BH − log M_bulge              both at the adopted distance (docs/methods.md §3.2)
//! σ_r,− = √(σ_BH,−² + σ_bulge,+² − 2 σ_xy)    dex; the lower error of the ratio
//! σ_r,+ = √(σ_BH,+² + σ_bulge,−² − 2 σ_xy)    σ_xy: the covariance a shared distance induces
//! r ∝ D^(p_BH − p_bulge)                      dynamical M_BH over photometric M_bulge: r ∝ 1/D
//! predicted: log r̂ = ŷ(x) − x,  68 %: [ŷ − s_pred − x, ŷ + s_pred − x]     x = log M_bulge
//! ```
//!
//! An upper limit on the black-hole mass is an upper limit on the ratio. The prediction is the
//! placement of the same masses against the relation's fit (`relations::place`), so the ratio's
//! verdict against the relation is the placement's verdict: at fixed bulge mass the residual in
//! log M_BH is the residual in log r.

use serde::Serialize;

use super::place::{ObjectValues, Placement, PlacementNumbers};
use super::{Catalog, FitKey, Relation, Sample};
use crate::units::{Entry, Uncertain, with_errors};

/// The usual range of M_BH/M_bulge as a fraction: 0.1 % to 0.5 % (common practice; the published
/// ratios of docs/methods.md §1.2 lie within it: 0.14 % at 5 × 10¹⁰ M☉ in Häring & Rix 2004,
/// 0.29 % at 10¹¹ M☉ from McConnell & Ma 2013).
pub const USUAL_RANGE: (f64, f64) = (0.001, 0.005);

/// The verdict words against the usual range.
pub const WITHIN: &str = "within the usual range";
/// The ratio lies above 0.5 %.
pub const ABOVE: &str = "above the usual range";
/// The ratio (or its upper limit) lies below 0.1 %.
pub const BELOW: &str = "below the usual range";
/// An upper limit inside the range: the ratio is in it or below it.
pub const WITHIN_OR_BELOW: &str = "within or below the usual range";
/// An upper limit above the range: it tells nothing against the range.
pub const LIMIT_ABOVE: &str = "no test: the limit lies above the usual range";

/// The two masses the ratio is made of, at the adopted distance, in the fits' units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RatioMasses {
    /// log10 M_BH/M☉ (for a limit, the limit).
    pub log_mbh: f64,
    /// Its lower and upper 1σ errors, dex (zero for a limit).
    pub mbh_err_dex: (f64, f64),
    /// Whether the black-hole mass is an upper limit.
    pub upper_limit: bool,
    /// log10 M_bulge/M☉.
    pub log_mbulge: f64,
    /// Its lower and upper 1σ errors, dex.
    pub mbulge_err_dex: (f64, f64),
    /// Covariance of the two masses' errors (a shared distance error), dex².
    pub cov_dex2: f64,
}

impl RatioMasses {
    /// The masses as typed (typed values are independent: no covariance).
    pub fn from_entries(mass: &Entry, bulge: &Entry) -> RatioMasses {
        RatioMasses {
            log_mbh: mass.log_value,
            mbh_err_dex: if mass.upper_limit {
                (0.0, 0.0)
            } else {
                (mass.err_minus_dex, mass.err_plus_dex)
            },
            upper_limit: mass.upper_limit,
            log_mbulge: bulge.log_value,
            mbulge_err_dex: (bulge.err_minus_dex, bulge.err_plus_dex),
            cov_dex2: 0.0,
        }
    }

    /// The masses of galaxy `index` of an M_BH–M_bulge sample, as the fits read them: both
    /// rescaled to the adopted distance, the distance error in quadrature in each, the
    /// black-hole mass's published errors kept apart where they are asymmetric, and the
    /// covariance of the shared distance (docs/methods.md §3.2; `relations::sample`).
    pub fn of_sample(sample: &Sample, index: usize) -> Option<RatioMasses> {
        let (p, m) = (sample.points.get(index)?, sample.members.get(index)?);
        Some(RatioMasses {
            log_mbh: p.y,
            mbh_err_dex: if p.upper_limit {
                (0.0, 0.0)
            } else {
                m.mbh_err_dex
            },
            upper_limit: p.upper_limit,
            log_mbulge: p.x,
            mbulge_err_dex: (p.x_err, p.x_err),
            cov_dex2: if p.upper_limit { 0.0 } else { p.xy_cov },
        })
    }

    /// The typed black-hole and bulge masses of an object, when both were given.
    pub fn of_object(values: &ObjectValues) -> Option<RatioMasses> {
        Some(Self::from_entries(
            values.mass.as_ref()?,
            values.bulge_mass.as_ref()?,
        ))
    }
}

/// What the fitted M_BH–M_bulge relation predicts for the ratio at the object's bulge mass.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RelationRatio {
    /// The relation's slug (`m_mbulge`).
    pub relation: String,
    /// The fit's identifier (`relations::citation::fit_id`): the default fit; for a galaxy of
    /// the catalog it was refitted without the galaxy (`without_this_galaxy`).
    pub fit_id: String,
    /// The catalog version of the fit.
    pub catalog_version: i64,
    /// Whether the fit left the galaxy out (the galaxy page's placement).
    pub without_this_galaxy: bool,
    /// Predicted log10 of the ratio: ŷ(x) − x.
    pub log_ratio: f64,
    /// Predicted ratio as a fraction.
    pub fraction: f64,
    /// Predicted ratio in per cent.
    pub percent: f64,
    /// The 68 % predictive interval of the ratio, fractions (low, high).
    pub interval68_fraction: (f64, f64),
    /// The same in per cent.
    pub interval68_percent: (f64, f64),
    /// The placement's z: (log r − log r̂) over its standard deviation.
    pub z: Option<f64>,
    /// The placement's verdict (`relations::place::verdict`).
    pub verdict: Option<&'static str>,
    /// The key of the fit (to record its identifier: [`record_fit`]).
    #[serde(skip)]
    pub key: FitKey,
}

/// M_BH/M_bulge of one object with what it is compared with.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BulgeRatio {
    /// The masses used.
    pub masses: RatioMasses,
    /// log10 M_BH/M_bulge (for a limit, the limit).
    pub log_ratio: f64,
    /// Its lower and upper 1σ errors, dex (zero for a limit).
    pub log_ratio_err_dex: (f64, f64),
    /// The ratio as a fraction.
    pub fraction: f64,
    /// The ratio in per cent.
    pub percent: f64,
    /// The ratio's 1σ range in per cent (low, high): 10^(log r ∓ σ) (for a limit, both the limit).
    pub percent_1sigma: (f64, f64),
    /// Whether the ratio is an upper limit (the black-hole mass is one).
    pub upper_limit: bool,
    /// The usual range in per cent (common practice).
    pub usual_range_percent: (f64, f64),
    /// The verdict against the usual range, in words ([`WITHIN`], [`ABOVE`], [`BELOW`],
    /// [`WITHIN_OR_BELOW`], [`LIMIT_ABOVE`]).
    pub range_verdict: &'static str,
    /// Whether the ratio lies outside the usual range (above it, or below it for sure).
    pub outside_usual_range: bool,
    /// What the relation predicts, when the object could be placed against it.
    pub relation: Option<RelationRatio>,
    /// Why there is no prediction, when there is none.
    pub relation_note: Option<String>,
    /// The whole comparison in one sentence.
    pub sentence: String,
}

/// `value` with two significant digits ("0.15", "0.012", "1.5", "12").
fn two_significant(value: f64) -> String {
    if !value.is_finite() || value <= 0.0 {
        return format!("{value}");
    }
    let mut decimals = 1 - value.log10().floor() as i32;
    // A carry into a third digit ("0.100", "10.0") gives up one decimal.
    let shown = format!("{value:.*}", decimals.max(0) as usize);
    if decimals > 0 && shown.parse::<f64>().unwrap_or(0.0) >= 10f64.powi(2 - decimals) {
        decimals -= 1;
    }
    format!("{value:.*}", decimals.max(0) as usize)
}

/// The verdict of a ratio (a fraction) against [`USUAL_RANGE`], and whether it lies outside.
pub fn range_verdict(fraction: f64, upper_limit: bool) -> (&'static str, bool) {
    let (low, high) = USUAL_RANGE;
    match (upper_limit, fraction) {
        (_, f) if f < low => (BELOW, true),
        (false, f) if f > high => (ABOVE, true),
        (false, _) => (WITHIN, false),
        (true, f) if f > high => (LIMIT_ABOVE, false),
        (true, _) => (WITHIN_OR_BELOW, false),
    }
}

/// The placement of the object against the M_BH–M_bulge relation, when it has one.
pub struct RelationBasis<'a> {
    /// The placement's numbers.
    pub numbers: &'a PlacementNumbers,
    /// The key of the fit placed against.
    pub key: &'a FitKey,
}

/// The ratio of `masses`, compared with the usual range and with what the relation predicts
/// (`basis`: the placement of the same masses against the M_BH–M_bulge fit, or why there is
/// none). See the module documentation for the equations.
pub fn bulge_ratio(masses: &RatioMasses, basis: Result<RelationBasis<'_>, String>) -> BulgeRatio {
    let log_ratio = masses.log_mbh - masses.log_mbulge;
    let combine = |a: f64, b: f64| (a * a + b * b - 2.0 * masses.cov_dex2).max(0.0).sqrt();
    let err = if masses.upper_limit {
        (0.0, 0.0)
    } else {
        (
            combine(masses.mbh_err_dex.0, masses.mbulge_err_dex.1),
            combine(masses.mbh_err_dex.1, masses.mbulge_err_dex.0),
        )
    };
    let fraction = 10f64.powf(log_ratio);
    let percent_1sigma = (
        100.0 * 10f64.powf(log_ratio - err.0),
        100.0 * 10f64.powf(log_ratio + err.1),
    );
    let (verdict, outside) = range_verdict(fraction, masses.upper_limit);
    let (relation, relation_note) = match basis {
        Ok(b) => {
            let p = &b.numbers.prediction;
            let x = masses.log_mbulge;
            let lo = 10f64.powf(p.interval68.0 - x);
            let hi = 10f64.powf(p.interval68.1 - x);
            let predicted = 10f64.powf(p.log_mbh - x);
            (
                Some(RelationRatio {
                    relation: Relation::MBulge.slug(),
                    fit_id: super::citation::fit_id(b.key),
                    catalog_version: b.key.catalog_version,
                    without_this_galaxy: b.key.left_out.is_some(),
                    log_ratio: p.log_mbh - x,
                    fraction: predicted,
                    percent: 100.0 * predicted,
                    interval68_fraction: (lo, hi),
                    interval68_percent: (100.0 * lo, 100.0 * hi),
                    z: b.numbers.z,
                    verdict: b.numbers.verdict,
                    key: b.key.clone(),
                }),
                None,
            )
        }
        Err(note) => (None, Some(note)),
    };
    let percent = 100.0 * fraction;
    let mut ratio = BulgeRatio {
        masses: *masses,
        log_ratio,
        log_ratio_err_dex: err,
        fraction,
        percent,
        percent_1sigma: if masses.upper_limit {
            (percent, percent)
        } else {
            percent_1sigma
        },
        upper_limit: masses.upper_limit,
        usual_range_percent: (100.0 * USUAL_RANGE.0, 100.0 * USUAL_RANGE.1),
        range_verdict: verdict,
        outside_usual_range: outside,
        relation,
        relation_note,
        sentence: String::new(),
    };
    ratio.sentence = sentence(&ratio);
    ratio
}

impl BulgeRatio {
    /// The ratio in per cent as a page shows it: "0.20 ± 0.05", "0.20 +0.06/−0.04", "< 0.012".
    pub fn percent_text(&self) -> String {
        if self.upper_limit {
            return format!("< {}", two_significant(self.percent));
        }
        with_errors(
            Uncertain::asymmetric(
                self.percent,
                self.percent - self.percent_1sigma.0,
                self.percent_1sigma.1 - self.percent,
                false,
            ),
            2,
        )
    }
}

impl RelationRatio {
    /// The prediction in per cent with its 68 % interval: "0.19 % (68 %: 0.10–0.37 %)".
    pub fn text(&self) -> String {
        format!("{} (68 %: {})", self.percent_text(), self.interval_text())
    }

    /// The prediction in per cent: "0.19 %".
    pub fn percent_text(&self) -> String {
        format!("{} %", two_significant(self.percent))
    }

    /// Its 68 % interval in per cent: "0.10–0.37 %".
    pub fn interval_text(&self) -> String {
        format!(
            "{}–{} %",
            two_significant(self.interval68_percent.0),
            two_significant(self.interval68_percent.1)
        )
    }
}

/// The comparison in one sentence (see [`BulgeRatio::sentence`]).
fn sentence(r: &BulgeRatio) -> String {
    let (lo, hi) = r.usual_range_percent;
    let what = if r.upper_limit {
        "The upper limit M_BH/M_bulge"
    } else {
        "M_BH/M_bulge"
    };
    let first = format!(
        "{what} = {} % is {} of {lo}–{hi} % (common practice).",
        r.percent_text(),
        r.range_verdict,
    );
    let second = match (&r.relation, &r.relation_note) {
        (Some(rel), _) => {
            let fit = if rel.without_this_galaxy {
                format!(
                    "the default fit {}, refitted without this galaxy",
                    rel.fit_id
                )
            } else {
                format!("the default fit {}", rel.fit_id)
            };
            let against = match rel.verdict {
                Some(v) if v.starts_with("outlier") => "an outlier from it",
                Some(v) if v.starts_with("in tension") => "in tension with it",
                _ => "consistent with it",
            };
            let z = rel.z.map_or(String::new(), |z| {
                let sign = if z < 0.0 { "−" } else { "+" };
                format!(" (z = {sign}{:.1})", z.abs())
            });
            let limit = if r.upper_limit && !against.starts_with("consistent") {
                ": the limit lies below the prediction"
            } else if r.upper_limit {
                ": the limit does not lie below the prediction"
            } else {
                ""
            };
            format!(
                " The M_BH–M_bulge relation ({fit}) predicts {} at this bulge mass; the ratio is {against}{z}{limit}.",
                rel.text()
            )
        }
        (None, Some(note)) => format!(" No prediction from the M_BH–M_bulge relation: {note}"),
        (None, None) => String::new(),
    };
    format!("{first}{second}")
}

/// The ratio of `masses` with `placement` (the placement of the same masses against the
/// M_BH–M_bulge relation, if any) as the prediction.
pub fn of_placement(masses: &RatioMasses, placement: Option<&Placement>) -> BulgeRatio {
    let basis = match placement {
        None => Err("the object could not be placed against it.".to_owned()),
        Some(p) => match &p.numbers {
            Ok(numbers) => Ok(RelationBasis {
                numbers,
                key: &p.outcome.key,
            }),
            Err(why) => Err(why.clone()),
        },
    };
    bulge_ratio(masses, basis)
}

/// A galaxy's ratio on its page and in the API: its masses as the M_BH–M_bulge fit reads them,
/// and the prediction of the fit without it (`relations::galaxy::place_left_out`). None when the
/// galaxy lacks either mass.
pub fn of_galaxy(left_out: &super::galaxy::LeftOutPlacements) -> Option<BulgeRatio> {
    let masses = left_out.bulge_masses.as_ref()?;
    let placement = left_out
        .placements
        .iter()
        .find(|p| p.relation == Relation::MBulge);
    if placement.is_none() && left_out.computing.contains(&Relation::MBulge.label()) {
        return Some(bulge_ratio(
            masses,
            Err(
                "computing: the fit without this galaxy is under way; ask again in a few seconds."
                    .to_owned(),
            ),
        ));
    }
    Some(of_placement(masses, placement))
}

/// Records the whole-sample fit a ratio names (`relations::citation::cite`), so that its
/// identifier can be looked up on `/fits/{id}`; for a fit without a galaxy, the default fit it
/// was made from, when it is at hand.
pub async fn record_fit(catalog: &Catalog, ratio: &BulgeRatio) {
    let Some(rel) = &ratio.relation else {
        return;
    };
    let whole = FitKey {
        left_out: None,
        ..rel.key.clone()
    };
    if let Some(outcome) = catalog.fits.get(&whole) {
        super::citation::cite(catalog, &outcome).await;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalog::relation_rows::RelationRow;
    use crate::fit::Prediction;
    use crate::fit::tolerance::close;
    use crate::relations::{SampleFilter, build_sample};
    use crate::units::{Quantity, Scale, parse_entry};

    fn entry(text: &str, q: Quantity) -> Entry {
        parse_entry(text, q, Scale::Auto).unwrap()
    }

    fn key(left_out: Option<i64>) -> FitKey {
        FitKey {
            left_out,
            ..FitKey::new(
                3,
                &Relation::MBulge,
                crate::fit::Method::Structural,
                &SampleFilter::default(),
                11.0,
                0.0,
            )
        }
    }

    /// Placement numbers predicting `log_mbh` ± `sd` with the given z and verdict.
    fn numbers(log_mbh: f64, sd: f64, z: f64, verdict: &'static str) -> PlacementNumbers {
        PlacementNumbers {
            prediction: Prediction {
                log_mbh,
                sd_dex: sd,
                interval68: (log_mbh - sd, log_mbh + sd),
                interval95: (log_mbh - 1.959964 * sd, log_mbh + 1.959964 * sd),
            },
            residual_dex: Some(0.0),
            z: Some(z),
            verdict: Some(verdict),
            prob_below_limit: None,
        }
    }

    #[test]
    fn a_hundred_million_suns_in_fifty_billion_is_two_tenths_of_a_per_cent() {
        // Computed: 10⁸ / (5 × 10¹⁰) = 0.002 = 0.2 %; log = 8 − 10.69897 = −2.69897.
        let masses = RatioMasses::from_entries(
            &entry("1e8 ± 0.1 dex", Quantity::BlackHoleMass),
            &entry("5e10 ± 0.2 dex", Quantity::BulgeMass),
        );
        let r = bulge_ratio(&masses, Err("none here.".to_owned()));
        assert!(close(r.fraction, 0.002, 1e-12, 1e-9), "{}", r.fraction);
        assert!(close(r.percent, 0.2, 1e-12, 1e-9), "{}", r.percent);
        assert!(
            close(r.log_ratio, -2.698_970_004, 1e-9, 0.0),
            "{}",
            r.log_ratio
        );
        // Quadrature, computed: √(0.1² + 0.2²) = 0.2236068 dex on each side.
        assert!(close(r.log_ratio_err_dex.0, 0.223_606_8, 1e-7, 0.0));
        assert!(close(r.log_ratio_err_dex.1, 0.223_606_8, 1e-7, 0.0));
        // 0.2 % × 10^∓0.2236068 = 0.119515 % and 0.334685 % (computed).
        assert!(
            close(r.percent_1sigma.0, 0.119_515, 1e-6, 0.0),
            "{:?}",
            r.percent_1sigma
        );
        assert!(
            close(r.percent_1sigma.1, 0.334_685, 1e-6, 0.0),
            "{:?}",
            r.percent_1sigma
        );
        assert_eq!(r.range_verdict, WITHIN);
        assert!(!r.outside_usual_range && !r.upper_limit);
        assert!(r.relation.is_none());
        assert!(r.sentence.contains("common practice"), "{}", r.sentence);
        assert!(
            r.sentence
                .contains("is within the usual range of 0.1–0.5 % (common practice)."),
            "{}",
            r.sentence
        );
        assert!(r.sentence.contains("none here."), "{}", r.sentence);
    }

    #[test]
    fn asymmetric_errors_pair_the_mass_below_with_the_bulge_above() {
        // log r falls when M_BH falls or M_bulge rises: σ_r,− = √(0.1² + 0.3²) = 0.3162278,
        // σ_r,+ = √(0.2² + 0.05²) = 0.2061553 (computed).
        let masses = RatioMasses {
            log_mbh: 8.0,
            mbh_err_dex: (0.1, 0.2),
            upper_limit: false,
            log_mbulge: 11.0,
            mbulge_err_dex: (0.05, 0.3),
            cov_dex2: 0.0,
        };
        let r = bulge_ratio(&masses, Err(String::new()));
        assert!(close(r.log_ratio_err_dex.0, 0.316_227_8, 1e-7, 0.0));
        assert!(close(r.log_ratio_err_dex.1, 0.206_155_3, 1e-7, 0.0));
        assert!(r.percent_text().contains('/'), "{}", r.percent_text());
        // A shared distance error cancels in part: −2 σ_xy under each root.
        let shared = bulge_ratio(
            &RatioMasses {
                cov_dex2: 0.004,
                ..masses
            },
            Err(String::new()),
        );
        assert!(close(
            shared.log_ratio_err_dex.0,
            (0.1f64.powi(2) + 0.3f64.powi(2) - 0.008).sqrt(),
            1e-12,
            0.0
        ));
    }

    #[test]
    fn the_usual_range_is_judged_on_both_sides_and_limits_on_one() {
        assert_eq!(range_verdict(0.0009, false), (BELOW, true));
        assert_eq!(range_verdict(0.001, false), (WITHIN, false));
        assert_eq!(range_verdict(0.005, false), (WITHIN, false));
        assert_eq!(range_verdict(0.0051, false), (ABOVE, true));
        assert_eq!(range_verdict(0.0009, true), (BELOW, true));
        assert_eq!(range_verdict(0.003, true), (WITHIN_OR_BELOW, false));
        assert_eq!(range_verdict(0.02, true), (LIMIT_ABOVE, false));
    }

    #[test]
    fn an_upper_limit_on_the_mass_is_an_upper_limit_on_the_ratio() {
        let masses = RatioMasses::from_entries(
            &entry("<2e7", Quantity::BlackHoleMass),
            &entry("1e11 ± 0.1 dex", Quantity::BulgeMass),
        );
        let r = bulge_ratio(
            &masses,
            Ok(RelationBasis {
                numbers: &numbers(8.3, 0.3, -3.5, "outlier (limit far below)"),
                key: &key(None),
            }),
        );
        assert!(r.upper_limit);
        assert!(
            r.log_ratio_err_dex.0.abs() < f64::EPSILON
                && r.log_ratio_err_dex.1.abs() < f64::EPSILON
        );
        // Computed: 2 × 10⁷ / 10¹¹ = 0.02 %.
        assert!(close(r.percent, 0.02, 1e-12, 1e-9));
        assert_eq!(r.percent_text(), "< 0.020");
        assert_eq!(r.range_verdict, BELOW);
        assert!(r.sentence.starts_with("The upper limit"), "{}", r.sentence);
        assert!(r.sentence.contains("an outlier from it"), "{}", r.sentence);
        assert!(r.sentence.contains("limit lies below"), "{}", r.sentence);
    }

    #[test]
    fn the_relation_predicts_the_ratio_at_the_bulge_mass_with_its_68_per_cent_interval() {
        // ŷ = 8.3 ± 0.3 at log M_bulge = 11: r̂ = 10^−2.7 = 0.19953 %, 68 %: 10^−3.0 = 0.1 % to
        // 10^−2.4 = 0.39811 % (computed).
        let masses = RatioMasses::from_entries(
            &entry("3e8 ± 0.1 dex", Quantity::BlackHoleMass),
            &entry("1e11 ± 0.1 dex", Quantity::BulgeMass),
        );
        let k = key(Some(42));
        let r = bulge_ratio(
            &masses,
            Ok(RelationBasis {
                numbers: &numbers(8.3, 0.3, 0.5, "consistent"),
                key: &k,
            }),
        );
        let rel = r.relation.as_ref().unwrap();
        assert!(
            close(rel.percent, 0.199_526_2, 1e-7, 0.0),
            "{}",
            rel.percent
        );
        assert!(close(rel.interval68_percent.0, 0.1, 1e-9, 0.0));
        assert!(close(rel.interval68_percent.1, 0.398_107_2, 1e-7, 0.0));
        assert!(close(rel.log_ratio, -2.7, 1e-12, 0.0));
        assert_eq!(rel.text(), "0.20 % (68 %: 0.10–0.40 %)");
        // The identifier names the default fit; the page says it was refitted without the galaxy.
        assert_eq!(rel.fit_id, crate::relations::citation::fit_id(&key(None)));
        assert!(rel.without_this_galaxy);
        assert!(
            r.sentence.contains("refitted without this galaxy"),
            "{}",
            r.sentence
        );
        assert!(
            r.sentence.contains("consistent with it (z = +0.5)"),
            "{}",
            r.sentence
        );
        // Computed: 3 × 10⁸ / 10¹¹ = 0.3 %.
        assert!(close(r.percent, 0.3, 1e-12, 1e-9));
        let tense = bulge_ratio(
            &masses,
            Ok(RelationBasis {
                numbers: &numbers(8.3, 0.3, -2.4, "in tension"),
                key: &k,
            }),
        );
        assert!(
            tense.sentence.contains("in tension with it (z = −2.4)"),
            "{}",
            tense.sentence
        );
    }

    /// An invented catalog row: a dynamical mass and a bulge mass published at 10 Mpc, the
    /// galaxy adopted at `distance_mpc`.
    fn row(distance_mpc: f64, bulge_method: &str) -> RelationRow {
        RelationRow {
            galaxy_id: 7,
            name: "Invented 7".to_owned(),
            slug: "invented-7".to_owned(),
            morphology: "elliptical".to_owned(),
            bulge_kind: "classical".to_owned(),
            centre_kind: "core".to_owned(),
            activity: "unknown".to_owned(),
            distance_mpc,
            distance_err_mpc: 0.1 * distance_mpc,
            log_mbh: Some(8.0),
            mbh_log_f: None,
            mbh_width_definition: None,
            mbh_err_dex: Some(0.1),
            mbh_err_minus_dex: Some(0.08),
            mbh_err_plus_dex: Some(0.12),
            mbh_upper_limit: Some(false),
            mbh_method: Some("stellar_dynamics".to_owned()),
            mbh_source_distance_mpc: Some(10.0),
            mbh_resolution_arcsec: None,
            mbh_reference: None,
            log_sigma: None,
            sigma_err_dex: None,
            sigma_definition: None,
            log_mbulge: Some(50e9f64.log10()),
            mbulge_err_dex: Some(0.1),
            mbulge_method: Some(bulge_method.to_owned()),
            mbulge_source_distance_mpc: Some(10.0),
        }
    }

    fn ratio_at(distance_mpc: f64, bulge_method: &str) -> BulgeRatio {
        let sample = build_sample(
            &[row(distance_mpc, bulge_method)],
            &[],
            &Relation::MBulge,
            &SampleFilter::default(),
            2.0,
        );
        let masses = RatioMasses::of_sample(&sample, 0).expect("the row is in the sample");
        bulge_ratio(&masses, Err(String::new()))
    }

    #[test]
    fn doubling_the_distance_halves_the_ratio_of_a_dynamical_mass_to_a_photometric_bulge_mass() {
        // docs/methods.md §3.2: M_BH ∝ D, photometric M_bulge ∝ D², so r ∝ 1/D. At the source
        // distance the ratio is 10⁸ / (5 × 10¹⁰) = 0.2 % (computed).
        let at_source = ratio_at(10.0, "photometric");
        let doubled = ratio_at(20.0, "photometric");
        assert!(
            close(at_source.percent, 0.2, 1e-12, 1e-9),
            "{}",
            at_source.percent
        );
        assert!(
            close(doubled.percent, 0.1, 1e-12, 1e-9),
            "{}",
            doubled.percent
        );
        // A dynamical bulge mass ∝ D too: the ratio does not move.
        let dynamical = ratio_at(20.0, "dynamical");
        assert!(
            close(dynamical.percent, 0.2, 1e-12, 1e-9),
            "{}",
            dynamical.percent
        );
    }

    #[test]
    fn the_ratio_of_a_catalog_galaxy_carries_the_shared_distance_once() {
        // D = 20 ± 2 Mpc: σ_logD = 0.1/ln 10 = 0.0434294 dex (computed). M_BH ∝ D, M_bulge ∝ D²:
        // the ratio ∝ 1/D, so its error is the published errors and (2 − 1) σ_logD in
        // quadrature. Below: √(0.08² + 0.1² + 0.0434294²) = 0.1352262 dex (computed).
        let r = ratio_at(20.0, "photometric");
        let s = 0.1 / std::f64::consts::LN_10;
        let expect_minus = (0.08f64.powi(2) + 0.1f64.powi(2) + s * s).sqrt();
        let expect_plus = (0.12f64.powi(2) + 0.1f64.powi(2) + s * s).sqrt();
        assert!(
            close(expect_minus, 0.135_226_2, 1e-7, 0.0),
            "{expect_minus}"
        );
        assert!(close(r.log_ratio_err_dex.0, expect_minus, 1e-12, 0.0));
        assert!(close(r.log_ratio_err_dex.1, expect_plus, 1e-12, 0.0));
        // The same masses of a dynamical bulge mass: the distance cancels, published errors only.
        let d = ratio_at(20.0, "dynamical");
        let published = 0.08f64.hypot(0.1);
        assert!(close(d.log_ratio_err_dex.0, published, 1e-12, 0.0));
    }
}
