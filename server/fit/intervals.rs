//! The intervals a fit reports for its parameters, and which kind they are.
//!
//! ```text
//! restricted:  ε̂_R = argmax L_R(ε);  ε interval {ε : −2 ln L_R(ε) − min ≤ 1 (68.27 %), 3.841 (95 %)}
//!              α, β, …: the maximum of L at ε̂_R ± z × the inverse-Hessian error there (z = 1, 1.96)
//! curvature:   the ML values ± z × the inverse-Hessian errors (z = 1, 1.96)
//! estimator:   the values ± z × the estimator's own errors (FITEXY Δχ² = 1, BCES moments)
//! ```
//!
//! L_R is the restricted (Laplace-marginal) likelihood of ε (`optimize::analytic::restricted`,
//! docs/methods.md §2.8). The restricted kind is the default wherever it can be computed (the
//! straight line with analytic derivatives: the structural fit with one Gaussian x component and
//! every conditional fit): in simulations of 25 and 60 objects with 15 % upper limits
//! (tests/fit_simulation.rs) its ε is nearly unbiased and its intervals hold their nominal
//! coverage, where the ML ε is biased low by about half its error at 25 objects and the
//! bootstrap percentile interval of ε covers far too little.

use serde::Serialize;

use super::types::Params;

/// Which construction a fit's intervals come from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IntervalKind {
    /// ε and its interval from the restricted likelihood; the other parameters at their
    /// maximum for that ε, with curvature errors there.
    Restricted,
    /// The maximum-likelihood values with the errors from the likelihood's curvature.
    Curvature,
    /// The estimator's own errors (FITEXY's Δχ² = 1, BCES's moment variances, or a relation
    /// given from outside).
    Estimator,
}

impl IntervalKind {
    /// Code used in JSON and CSV.
    #[must_use]
    pub fn as_str(self) -> &'static str {
        match self {
            IntervalKind::Restricted => "restricted",
            IntervalKind::Curvature => "curvature",
            IntervalKind::Estimator => "estimator",
        }
    }

    /// What a reader is told the intervals are.
    #[must_use]
    pub fn label(self) -> &'static str {
        match self {
            IntervalKind::Restricted => {
                "restricted likelihood (ε corrected for the fitted line's degrees of freedom)"
            }
            IntervalKind::Curvature => "likelihood curvature (inverse Hessian)",
            IntervalKind::Estimator => "the estimator's own errors",
        }
    }
}

/// One parameter's reported value and intervals.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ParamInterval {
    /// Parameter name (`alpha`, `beta`, `beta2`, `gamma`, `delta`, `eps`).
    pub name: &'static str,
    /// The reported value.
    pub estimate: f64,
    /// A one-number error: half the width of the 68 % interval.
    pub error: f64,
    /// 68.27 % interval, lower end.
    pub p16: f64,
    /// 68.27 % interval, upper end.
    pub p84: f64,
    /// 95 % interval, lower end.
    pub p2_5: f64,
    /// 95 % interval, upper end.
    pub p97_5: f64,
}

/// Above this many objects fits quote the curvature intervals: the restricted correction is
/// negligible there and costs a few dozen inner maximisations. The ML ε² is low by about
/// p/N of the residual variance (REML against ML for p mean parameters), so for p = 2 and
/// N = 5,000 ε is low by about 0.02 % to 0.04 % (σ_y ≤ ε), some 3 % of its standard error
/// ε/√(2N) ≈ 1 % of ε (computed from those two formulas).
pub const RESTRICTED_MAX_N: usize = 5_000;

/// z of a two-sided 95 % normal interval, Φ⁻¹(0.975) = 1.959964 (computed).
pub const Z95: f64 = 1.959_963_984_540_054;

/// The quantile of Student's t with `nu` degrees of freedom at the probability where the
/// standard normal quantile is `z`, by the Cornish–Fisher expansion
///
/// ```text
/// t ≈ z + g1/ν + g2/ν² + g3/ν³ + g4/ν⁴
/// g1 = (z³ + z)/4,  g2 = (5z⁵ + 16z³ + 3z)/96,  g3 = (3z⁷ + 19z⁵ + 17z³ − 15z)/384
/// g4 = (79z⁹ + 776z⁷ + 1482z⁵ − 1920z³ − 945z)/92160
/// ```
///
/// (Abramowitz & Stegun 1964, 26.7.5). Against scipy.stats.t.ppf: 1.052563 and 2.228139 at
/// ν = 10, 2.068658 at ν = 23 (computed); the expansion agrees to 10⁻⁴ from ν = 5. `nu` = ∞
/// gives `z`.
#[must_use]
pub fn student_t_quantile(z: f64, nu: f64) -> f64 {
    let (z2, v) = (z * z, 1.0 / nu);
    let g1 = (z2 + 1.0) * z / 4.0;
    let g2 = ((5.0 * z2 + 16.0) * z2 + 3.0) * z / 96.0;
    let g3 = (((3.0 * z2 + 19.0) * z2 + 17.0) * z2 - 15.0) * z / 384.0;
    let g4 = ((((79.0 * z2 + 776.0) * z2 + 1482.0) * z2 - 1920.0) * z2 - 945.0) * z / 92_160.0;
    z + v * (g1 + v * (g2 + v * (g3 + v * g4)))
}

impl ParamInterval {
    /// value ± error (68.27 %) and ± 1.96 error (95 %); ε's lower ends are cut at 0.
    #[must_use]
    pub fn symmetric(name: &'static str, estimate: f64, error: f64) -> ParamInterval {
        ParamInterval::student(name, estimate, error, f64::INFINITY)
    }

    /// value ± t₁ error (68.27 %) and ± t₂ error (95 %) with the quantiles t of Student's t
    /// with `nu` degrees of freedom ([`student_t_quantile`]; ν = ∞ is the normal interval);
    /// ε's lower ends are cut at 0. `error` stays the one-number error.
    #[must_use]
    pub fn student(name: &'static str, estimate: f64, error: f64, nu: f64) -> ParamInterval {
        let floor = |v: f64| if name == "eps" { v.max(0.0) } else { v };
        let (t68, t95) = (student_t_quantile(1.0, nu), student_t_quantile(Z95, nu));
        ParamInterval {
            name,
            estimate,
            error,
            p16: floor(estimate - t68 * error),
            p84: estimate + t68 * error,
            p2_5: floor(estimate - t95 * error),
            p97_5: estimate + t95 * error,
        }
    }

    /// Whether `v` lies in the 68 % interval.
    #[must_use]
    pub fn covers68(&self, v: f64) -> bool {
        self.p16 <= v && v <= self.p84
    }

    /// Whether `v` lies in the 95 % interval.
    #[must_use]
    pub fn covers95(&self, v: f64) -> bool {
        self.p2_5 <= v && v <= self.p97_5
    }
}

/// The intervals a fit reports, one per relation parameter.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Intervals {
    /// How they were computed.
    pub kind: IntervalKind,
    /// In the order of the fit's parameters.
    pub params: Vec<ParamInterval>,
}

impl Intervals {
    /// value ± error intervals for every named parameter.
    #[must_use]
    pub fn symmetric(
        kind: IntervalKind,
        names: &[&'static str],
        values: &[f64],
        errors: &[f64],
    ) -> Intervals {
        Intervals {
            kind,
            params: names
                .iter()
                .zip(values.iter().zip(errors))
                .map(|(&n, (&v, &e))| ParamInterval::symmetric(n, v, e))
                .collect(),
        }
    }

    /// value ± error intervals of the relation parameters of a fit's `params` and `errors`.
    #[must_use]
    pub fn from_errors(kind: IntervalKind, params: &Params, errors: &Params) -> Intervals {
        Intervals::symmetric(kind, &params.names(), &params.values(), &errors.values())
    }

    /// The interval of one parameter.
    #[must_use]
    pub fn get(&self, name: &str) -> Option<&ParamInterval> {
        self.params.iter().find(|p| p.name == name)
    }
}

use super::optimize::analytic::{self, A, Analytic, B, C, D, E, NS};

/// The restricted intervals of a model with analytic derivatives, from its maximum `p_ml`
/// (slots, E holding ε²), for the relation parameters `names`, of a sample of `n` objects;
/// `None` when they cannot be computed (the caller keeps the curvature intervals).
///
/// The mean parameters' intervals use Student's t with ν = n − p degrees of freedom (p mean
/// parameters), as for a least-squares line whose variance is estimated from its residuals:
/// at 25 objects this widens the 95 % interval by 5.5 % (t = 2.069 against 1.960) and lifts
/// its simulated coverage of α and β from about 93 % towards 95 % (tests/fit_simulation.rs).
pub(crate) fn restricted<O: Analytic>(
    model: &O,
    names: &[&'static str],
    p_ml: &[f64; NS],
    n: usize,
) -> Option<Intervals> {
    let r = analytic::restricted(model, p_ml)?;
    let cov = r.cov.as_ref()?;
    let slots = model.slots();
    let p_mean = slots
        .iter()
        .filter(|s| matches!(**s, A | B | C | D))
        .count();
    let nu = n.saturating_sub(p_mean).max(1) as f64;
    let params = names
        .iter()
        .map(|&name| {
            let slot = match name {
                "alpha" => A,
                "beta" => B,
                "beta2" | "gamma" => C,
                "delta" => D,
                _ => E,
            };
            if slot == E {
                let eps = r.p[E].max(0.0).sqrt();
                return Some(ParamInterval {
                    name,
                    estimate: eps,
                    error: 0.5 * (r.eps_68.1 - r.eps_68.0),
                    p16: r.eps_68.0,
                    p84: r.eps_68.1,
                    p2_5: r.eps_95.0,
                    p97_5: r.eps_95.1,
                });
            }
            let i = slots.iter().position(|&s| s == slot)?;
            let var = cov[(i, i)];
            (var.is_finite() && var >= 0.0)
                .then(|| ParamInterval::student(name, r.p[slot], var.sqrt(), nu))
        })
        .collect::<Option<Vec<_>>>()?;
    Some(Intervals {
        kind: IntervalKind::Restricted,
        params,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn student_t_quantiles_match_scipy() {
        // scipy.stats.t.ppf(Φ(1), ν) and t.ppf(0.975, ν), scipy 1.x (computed).
        for (nu, t68, t95) in [
            (10.0, 1.052_562_415_257_336, 2.228_138_851_986_274),
            (23.0, 1.022_216_843_943_057, 2.068_657_610_419_049),
            (58.0, 1.008_695_325_838_209, 2.001_717_484_145_236),
        ] {
            assert!((student_t_quantile(1.0, nu) - t68).abs() < 1e-4, "{nu}");
            assert!((student_t_quantile(Z95, nu) - t95).abs() < 1e-4, "{nu}");
        }
        assert!((student_t_quantile(Z95, f64::INFINITY) - Z95).abs() < 1e-15);
    }

    #[test]
    fn restricted_eps_is_reml_for_a_homoscedastic_line() {
        // No x errors, equal y errors s, no limits: the conditional likelihood is a linear
        // Gaussian model with variance s² + ε² for every object, where ML gives
        // s² + ε² = RSS/N and REML s² + ε² = RSS/(N − 2) (Patterson & Thompson 1971), RSS the
        // least-squares residual sum of squares. Invented points on a line with ±0.4 dex
        // offsets.
        use crate::fit::{FitSpec, Method, Point, fit};
        let s = 0.1;
        let pts: Vec<Point> = (0..14)
            .map(|i| {
                let x = 2.0 + 0.04 * f64::from(i);
                let off = [0.4, -0.3, 0.1, -0.5, 0.2, 0.35, -0.15][i as usize % 7];
                Point::new(x, 0.0, 8.0 + 4.0 * (x - 2.3) + off, s)
            })
            .collect();
        let n = pts.len() as f64;
        let (mx, my) = (
            pts.iter().map(|p| p.x).sum::<f64>() / n,
            pts.iter().map(|p| p.y).sum::<f64>() / n,
        );
        let sxx: f64 = pts.iter().map(|p| (p.x - mx).powi(2)).sum();
        let b = pts.iter().map(|p| (p.x - mx) * (p.y - my)).sum::<f64>() / sxx;
        let rss: f64 = pts
            .iter()
            .map(|p| (p.y - my - b * (p.x - mx)).powi(2))
            .sum();
        let f = fit(&pts, &FitSpec::new(Method::Conditional, 2.3)).unwrap();
        assert_eq!(f.intervals.kind, IntervalKind::Restricted);
        let eps_ml = (rss / n - s * s).sqrt();
        let eps_reml = (rss / (n - 2.0) - s * s).sqrt();
        assert!(
            (f.params.eps - eps_ml).abs() < 1e-7,
            "{} vs {eps_ml}",
            f.params.eps
        );
        let e = f.intervals.get("eps").unwrap();
        assert!(
            (e.estimate - eps_reml).abs() < 1e-6,
            "{} vs {eps_reml}",
            e.estimate
        );
        // The slope at the REML variance is the least-squares slope, with error
        // √((s² + ε_R²)/Sxx) and Student-t intervals on N − 2 degrees of freedom.
        let beta = f.intervals.get("beta").unwrap();
        let se = (rss / (n - 2.0) / sxx).sqrt();
        assert!((beta.estimate - b).abs() < 1e-7 && (beta.error - se).abs() < 1e-6 * se);
        let t95 = student_t_quantile(Z95, n - 2.0);
        assert!((beta.p97_5 - (b + t95 * se)).abs() < 1e-6 * se);
        // ε's interval is the likelihood-ratio one: asymmetric about the estimate.
        assert!(
            e.p16 < e.estimate && e.estimate < e.p84 && e.p84 - e.estimate > e.estimate - e.p16
        );
    }

    #[test]
    fn symmetric_intervals_cut_eps_at_zero() {
        let iv = ParamInterval::symmetric("eps", 0.1, 0.2);
        assert_eq!((iv.p16, iv.p2_5), (0.0, 0.0));
        assert!((iv.p84 - 0.3).abs() < 1e-15 && (iv.p97_5 - (0.1 + Z95 * 0.2)).abs() < 1e-15);
        let a = ParamInterval::symmetric("alpha", 8.0, 0.1);
        assert!((a.p16 - 7.9).abs() < 1e-12 && a.covers68(8.05) && !a.covers68(8.2));
        assert!(a.covers95(8.19) && !a.covers95(8.2));
    }
}
