//! The defaults every door shares (pages, the JSON API, the command line), each defined once:
//! the pivots, the rule that picks a pivot for a caller's own sample, the sampler and bootstrap
//! settings of a caller's own sample ([`super::fit_own_sample`]) and of the pages' background
//! runs ([`super::RunRegistry`]).

use crate::fit::Point;

/// log10 of the default σ pivot, 200 km/s (Tremaine et al. 2002, ApJ 574, 740): the
/// conventional M–σ pivot, σ0 = 200 km s⁻¹, so x0 = log10(200) = 2.30103.
pub const SIGMA_PIVOT_LOG: f64 = 2.301_029_995_663_981;
/// log10 of the default bulge-mass pivot, 10^11 M☉ (near the sample mean; common practice).
pub const MBULGE_PIVOT_LOG: f64 = 11.0;
/// log10 of the default luminosity pivot, 10^11 L☉ of the band (common practice).
pub const LUMINOSITY_PIVOT_LOG: f64 = 11.0;

/// What the x values are, as the caller names them: a quantity with a conventional pivot, or
/// `Other` (no convention: the median rule of [`default_pivot`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum XQuantity {
    /// log10 of the velocity dispersion σ in km/s: x0 = [`SIGMA_PIVOT_LOG`].
    Sigma,
    /// log10 of a bulge or stellar mass in M☉: x0 = [`MBULGE_PIVOT_LOG`].
    Mass,
    /// log10 of a luminosity in L☉ of its band: x0 = [`LUMINOSITY_PIVOT_LOG`].
    Luminosity,
    /// Anything else: x0 is the median of x rounded to 0.5.
    Other,
}

impl XQuantity {
    /// Every quantity, in the order the words are listed.
    pub const ALL: [XQuantity; 4] = [
        XQuantity::Sigma,
        XQuantity::Mass,
        XQuantity::Luminosity,
        XQuantity::Other,
    ];

    /// The word a caller types.
    #[must_use]
    pub fn as_str(self) -> &'static str {
        match self {
            XQuantity::Sigma => "sigma",
            XQuantity::Mass => "mass",
            XQuantity::Luminosity => "luminosity",
            XQuantity::Other => "other",
        }
    }

    /// The conventional pivot (log10 units of x) and how to say it, or `None` for `Other`.
    #[must_use]
    pub fn convention(self) -> Option<(f64, &'static str)> {
        match self {
            XQuantity::Sigma => Some((SIGMA_PIVOT_LOG, "log10 of 200 km/s, the σ convention")),
            XQuantity::Mass => Some((MBULGE_PIVOT_LOG, "log10 of 10^11 M☉, the mass convention")),
            XQuantity::Luminosity => Some((
                LUMINOSITY_PIVOT_LOG,
                "log10 of 10^11 L☉ of the band, the luminosity convention",
            )),
            XQuantity::Other => None,
        }
    }
}

/// A word that names no [`XQuantity`].
#[derive(thiserror::Error, Debug, Clone, PartialEq, Eq)]
#[error(
    "'{word}' is not a quantity of x; type sigma (log10 σ in km/s), mass (log10 M☉), luminosity (log10 L☉) or other."
)]
pub struct UnknownXQuantity {
    /// The word given.
    pub word: String,
}

impl std::str::FromStr for XQuantity {
    type Err = UnknownXQuantity;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        XQuantity::ALL
            .into_iter()
            .find(|q| q.as_str() == s.trim())
            .ok_or_else(|| UnknownXQuantity { word: s.to_owned() })
    }
}

/// How the pivot was chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PivotRule {
    /// The caller gave x0.
    Given,
    /// The convention of the quantity the caller named (not `Other`).
    Convention(XQuantity),
    /// The σ convention, inferred because the median of x lies in [`SIGMA_LIKE_MEDIAN`].
    InferredSigma {
        /// Median of x, log10 units of x.
        median_x: f64,
    },
    /// The median of x rounded to 0.5: no convention is known for x.
    Median {
        /// Median of x, log10 units of x.
        median_x: f64,
        /// Whether the caller said so (`other`) rather than left x unnamed.
        named_other: bool,
    },
}

/// How a door spells the pivot settings in the sentences of [`PivotRule::warning`].
#[derive(Debug, Clone, Copy)]
pub struct PivotSettingNames {
    /// The setting naming x's quantity set to a word, e.g. `--x-quantity sigma`.
    pub x_quantity: fn(&str) -> String,
    /// The pivot setting, e.g. `--pivot X0`.
    pub pivot: &'static str,
}

impl PivotRule {
    /// A short label of the rule, for the `pivot_rule` field and the table.
    #[must_use]
    pub fn label(&self) -> String {
        match self {
            PivotRule::Given => "given".to_owned(),
            PivotRule::Convention(q) => q
                .convention()
                .map_or_else(String::new, |(_, say)| say.to_owned()),
            PivotRule::InferredSigma { median_x } => format!(
                "log10 of 200 km/s, the σ convention, inferred from the median x = {median_x:.2}"
            ),
            PivotRule::Median { median_x, .. } => {
                format!("the median x = {median_x:.2} rounded to 0.5")
            }
        }
    }

    /// The warning a pivot gets when it is not the convention of a quantity the caller named:
    /// one sentence with the pivot, the reason and what to type, in the door's `names`.
    #[must_use]
    pub fn warning(&self, pivot: f64, names: &PivotSettingNames) -> Option<String> {
        let set = names.x_quantity;
        match *self {
            PivotRule::Given | PivotRule::Convention(_) => None,
            PivotRule::InferredSigma { median_x } => Some(format!(
                "The pivot x0 = {pivot:.5} (log10 of 200 km/s, the σ convention) was inferred \
                 from the median x = {median_x:.2}, which lies in {lo}–{hi} as log10 σ in km/s \
                 does; give {} to make it explicit or {} to choose another.",
                set("sigma"),
                names.pivot,
                lo = SIGMA_LIKE_MEDIAN.0,
                hi = SIGMA_LIKE_MEDIAN.1,
            )),
            PivotRule::Median {
                median_x,
                named_other: true,
            } => Some(format!(
                "No pivot convention is known for x ({}); the pivot is the median x = \
                 {median_x:.2} rounded to 0.5, x0 = {pivot:.1} in the log10 units of x; give {} \
                 to choose another.",
                set("other"),
                names.pivot,
            )),
            PivotRule::Median {
                median_x,
                named_other: false,
            } => Some(format!(
                "No pivot convention is known for x with median {median_x:.2}; the pivot is the \
                 median rounded to 0.5, x0 = {pivot:.1} in the log10 units of x; give {}, {} or \
                 {} for that quantity's convention or {} to choose another.",
                set("sigma"),
                set("mass"),
                set("luminosity"),
                names.pivot,
            )),
        }
    }
}

/// The medians of x, log10 units, that look like log10 σ in km/s (20 to 630 km/s).
pub const SIGMA_LIKE_MEDIAN: (f64, f64) = (1.3, 2.8);

/// The pivot for `points` when the caller gives none: the convention of `quantity` when it has
/// one, otherwise the rule below. It reads the median of x only, never the smallest or largest
/// x, so that no single outlying point can flip it: moving one point anywhere moves the median
/// at most to the neighbouring ordered x, and only a sample whose median itself lies at 1.3 or
/// 2.8 can change rule.
///
/// ```text
/// m  = median(x)                       (log10 units of x; 0 for no points)
/// x0 = log10(200) = 2.30103            if quantity = sigma, or quantity unnamed and m ∈ [1.3, 2.8]
///                                      (x then looks like log10 σ/km s⁻¹; Tremaine et al. 2002,
///                                      ApJ 574, 740: σ0 = 200 km s⁻¹)
/// x0 = 11.0                            if quantity = mass (10^11 M☉) or luminosity (10^11 L☉)
/// x0 = round(2 m) / 2                  otherwise (the median rounded to 0.5)
/// ```
#[must_use]
pub fn default_pivot(points: &[Point], quantity: Option<XQuantity>) -> (f64, PivotRule) {
    if let Some(q) = quantity
        && let Some((x0, _)) = q.convention()
    {
        return (x0, PivotRule::Convention(q));
    }
    let mut xs: Vec<f64> = points.iter().map(|p| p.x).collect();
    xs.sort_by(f64::total_cmp);
    let median_x = match xs.len() {
        0 => 0.0,
        n if n % 2 == 1 => xs[n / 2],
        n => 0.5 * (xs[n / 2 - 1] + xs[n / 2]),
    };
    let named_other = quantity == Some(XQuantity::Other);
    if !named_other && (SIGMA_LIKE_MEDIAN.0..=SIGMA_LIKE_MEDIAN.1).contains(&median_x) {
        return (SIGMA_PIVOT_LOG, PivotRule::InferredSigma { median_x });
    }
    (
        (median_x * 2.0).round() / 2.0,
        PivotRule::Median {
            median_x,
            named_other,
        },
    )
}

/// Walkers of every posterior run: a caller's own sample (`massline fit --posterior`,
/// `POST /api/v1/fit`) and the pages' runs.
pub const POSTERIOR_WALKERS: usize = 32;
/// Default steps per walker of the posterior of a caller's own sample (burn-in included;
/// `massline fit --steps`).
pub const POSTERIOR_STEPS: usize = 5_000;
/// Burn-in steps of the posterior of a caller's own sample (at most half the steps).
pub const POSTERIOR_BURN_IN: usize = 1_000;
/// Initial ball of the posterior walkers of a caller's own sample, in units of the ML errors.
pub const POSTERIOR_INIT_SCATTER: f64 = 0.1;

/// Below this many objects a fit whose intervals come from the likelihood's curvature alone
/// (not the restricted likelihood) gets a warning in `massline fit`: they are too small there
/// (tests/fit_simulation.rs measures it).
pub const SMALL_SAMPLE: usize = 30;

/// Default bootstrap replicates of a run started from the pages.
pub const DEFAULT_REPLICATES: usize = 1000;
/// Default posterior steps per walker of a run started from the pages (burn-in is a fifth of
/// them).
pub const DEFAULT_STEPS: usize = 5000;
/// The seed of every run started from the pages (stored with the run).
pub const RUN_SEED: u64 = 1;
/// Accepted bootstrap replicates of a run started from the pages.
pub const REPLICATES_RANGE: (usize, usize) = (20, 10_000);
/// Accepted posterior steps of a run started from the pages.
pub const STEPS_RANGE: (usize, usize) = (200, 50_000);

#[cfg(test)]
mod tests {
    use super::*;

    /// Invented points at the given x (y and errors do not enter the pivot rule).
    fn at(xs: &[f64]) -> Vec<Point> {
        xs.iter().map(|&x| Point::new(x, 0.02, 8.0, 0.1)).collect()
    }

    #[test]
    fn default_pivot_follows_the_documented_rule() {
        // Invented x values. σ-like median: x0 = log10 200 = 2.30103 (Tremaine et al. 2002
        // pivot); otherwise the median rounded to 0.5 (the rule above): median 10.9 → 11.0
        // (computed).
        let (p, rule) = default_pivot(&at(&[1.9, 2.6]), None);
        assert!((p - 2.301_03).abs() < 1e-5, "{p}");
        assert_eq!(rule, PivotRule::InferredSigma { median_x: 2.25 });
        let (p, rule) = default_pivot(&at(&[10.2, 10.9, 11.3]), None);
        assert!((p - 11.0).abs() < 1e-12, "{p}");
        assert_eq!(
            rule,
            PivotRule::Median {
                median_x: 10.9,
                named_other: false
            }
        );
    }

    #[test]
    fn extreme_points_do_not_move_the_pivot_only_the_median_does() {
        // Invented σ-like x with one point beyond 2.8 and one below 1.3 (log10 of 631 and
        // 18 km/s): the median, 2.2, lies in 1.3–2.8, so x0 = log10 200 (the rule above).
        let (p, rule) = default_pivot(&at(&[1.25, 2.0, 2.2, 2.4, 2.81]), None);
        assert!((p - SIGMA_PIVOT_LOG).abs() < 1e-12, "{p}");
        assert_eq!(rule, PivotRule::InferredSigma { median_x: 2.2 });
        // A median beyond 2.8 is no longer σ-like: 2.9 rounds to 3.0 (computed).
        let (p, _) = default_pivot(&at(&[2.0, 2.9, 3.1]), None);
        assert!((p - 3.0).abs() < 1e-12, "{p}");
    }

    #[test]
    fn a_named_quantity_gives_its_convention_whatever_the_points() {
        // x that look like log σ: a named quantity still wins, and `other` takes the median
        // rounded to 0.5 (median 2.2 → 2.0, computed). Conventions: 200 km/s (Tremaine et al.
        // 2002), 10^11 M☉ and 10^11 L☉ (the constants above).
        let points = at(&[2.1, 2.2, 2.4]);
        for (q, expected) in [
            (XQuantity::Sigma, SIGMA_PIVOT_LOG),
            (XQuantity::Mass, MBULGE_PIVOT_LOG),
            (XQuantity::Luminosity, LUMINOSITY_PIVOT_LOG),
        ] {
            let (p, rule) = default_pivot(&points, Some(q));
            assert!((p - expected).abs() < 1e-12, "{q:?}: {p}");
            assert_eq!(rule, PivotRule::Convention(q));
        }
        assert!((10f64.powf(SIGMA_PIVOT_LOG) - 200.0).abs() < 1e-9);
        let (p, rule) = default_pivot(&points, Some(XQuantity::Other));
        assert!((p - 2.0).abs() < 1e-12, "{p}");
        assert_eq!(
            rule,
            PivotRule::Median {
                median_x: 2.2,
                named_other: true
            }
        );
    }

    #[test]
    fn the_words_are_read_and_an_unknown_one_is_refused_with_the_list() {
        for q in XQuantity::ALL {
            assert_eq!(q.as_str().parse::<XQuantity>(), Ok(q));
        }
        let e = "speed".parse::<XQuantity>().unwrap_err();
        let msg = e.to_string();
        assert!(msg.starts_with("'speed' is not"), "{msg}");
        for q in XQuantity::ALL {
            assert!(msg.contains(q.as_str()), "{msg}");
        }
        assert!(msg.ends_with('.') && !msg.contains('\n'), "{msg}");
    }

    #[test]
    fn only_a_pivot_no_caller_chose_gets_a_warning_naming_what_to_type() {
        let names = PivotSettingNames {
            x_quantity: |w| format!("--x-quantity {w}"),
            pivot: "--pivot X0",
        };
        assert_eq!(PivotRule::Given.warning(2.3, &names), None);
        for q in [XQuantity::Sigma, XQuantity::Mass, XQuantity::Luminosity] {
            assert_eq!(PivotRule::Convention(q).warning(11.0, &names), None);
        }
        let inferred = PivotRule::InferredSigma { median_x: 2.31 }
            .warning(SIGMA_PIVOT_LOG, &names)
            .unwrap();
        for part in [
            "x0 = 2.30103",
            "200 km/s",
            "median x = 2.31",
            "--x-quantity sigma",
            "--pivot X0",
        ] {
            assert!(inferred.contains(part), "{part}: {inferred}");
        }
        let median = PivotRule::Median {
            median_x: 10.93,
            named_other: false,
        }
        .warning(11.0, &names)
        .unwrap();
        for part in [
            "median 10.93",
            "x0 = 11.0",
            "--x-quantity mass",
            "--pivot X0",
        ] {
            assert!(median.contains(part), "{part}: {median}");
        }
        let other = PivotRule::Median {
            median_x: 10.93,
            named_other: true,
        }
        .warning(11.0, &names)
        .unwrap();
        assert!(
            other.contains("--x-quantity other") && other.contains("x0 = 11.0"),
            "{other}"
        );
        for w in [inferred, median, other] {
            assert!(w.ends_with('.') && !w.contains('\n'), "{w}");
        }
    }
}
