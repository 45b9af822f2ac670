//! Input and output types shared by every estimator.
//!
//! Conventions: every `x`, `x2` and `y` is a base-10 logarithm (`y` = log10(M_BH/M☉), `x` =
//! log10 of the host property in its natural unit, *not* pivoted); every error is a standard
//! deviation in dex; covariances are in dex². The pivot x0 is subtracted inside the estimators.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::FitError;
use super::intervals::{IntervalKind, Intervals};

/// One object of a sample.
///
/// `x` and `y` are log10 values (x unpivoted: log10(σ/km s⁻¹), log10(M_bulge/M☉) or
/// log10(L/L☉)); errors are in dex. For an upper limit, `y` is the limit's value and `y_err`
/// its own uncertainty (often 0).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Point {
    /// Label of the object; may be empty.
    pub name: String,
    /// log10 of the host property (unpivoted).
    pub x: f64,
    /// Measurement error of `x`, dex.
    pub x_err: f64,
    /// log10(M_BH/M☉), or the log10 of the upper limit when `upper_limit` is set.
    pub y: f64,
    /// Measurement error of `y`, dex.
    pub y_err: f64,
    /// Covariance of the x and y measurement errors, dex²; 0 if unknown.
    pub xy_cov: f64,
    /// The mass is an upper limit at `y`.
    pub upper_limit: bool,
    /// Second host property for planar fits (log10, unpivoted).
    pub x2: Option<f64>,
    /// Measurement error of `x2`, dex.
    pub x2_err: f64,
    /// Covariance of the x2 and y measurement errors, dex²; 0 if unknown (planar fits only).
    #[serde(default)]
    pub x2_y_cov: f64,
    /// Covariance of the x and x2 measurement errors, dex²; 0 if unknown (planar fits only).
    #[serde(default)]
    pub x_x2_cov: f64,
}

impl Point {
    /// A detection with independent errors on x and y (dex).
    ///
    /// # Model
    /// ```text
    /// x, y log10 units (unpivoted), σ_x = x_err, σ_y = y_err in dex, σ_xy = 0
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None (a constructor).
    pub fn new(x: f64, x_err: f64, y: f64, y_err: f64) -> Point {
        Point {
            name: String::new(),
            x,
            x_err,
            y,
            y_err,
            xy_cov: 0.0,
            upper_limit: false,
            x2: None,
            x2_err: 0.0,
            x2_y_cov: 0.0,
            x_x2_cov: 0.0,
        }
    }

    /// An upper limit `y_limit` on log10 M_BH at host property `x ± x_err` (dex); the limit
    /// itself carries no error.
    ///
    /// # Model
    /// ```text
    /// y = y_limit is an upper limit on log10 M_BH; σ_y = 0; x, σ_x as in Point::new
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// Gültekin et al. 2009, ApJ 698, 198 (upper limits in M–σ fits).
    pub fn limit(x: f64, x_err: f64, y_limit: f64) -> Point {
        Point {
            upper_limit: true,
            ..Point::new(x, x_err, y_limit, 0.0)
        }
    }

    /// The same point with a name.
    ///
    /// # Model
    /// ```text
    /// no equation: sets the label
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None (a builder).
    pub fn named(mut self, name: &str) -> Point {
        self.name = name.to_owned();
        self
    }

    /// The same point with an x–y error covariance (dex²).
    ///
    /// # Model
    /// ```text
    /// σ_xy = xy_cov, dex² (|σ_xy| ≤ σ_x σ_y)
    /// ```
    ///
    /// # Errors
    /// None here; fits refuse |σ_xy| > σ_x σ_y with FitError::InvalidSetting.
    ///
    /// # References
    /// docs/methods.md §3.2 (shared distance errors correlate log M and log L).
    pub fn with_xy_cov(mut self, xy_cov: f64) -> Point {
        self.xy_cov = xy_cov;
        self
    }

    /// The same point with a second host property `x2 ± x2_err` (log10, dex) for planar fits.
    ///
    /// # Model
    /// ```text
    /// x2 log10 units (unpivoted), σ_x2 = x2_err in dex
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// docs/methods.md §2.7 (planar fits).
    pub fn with_x2(mut self, x2: f64, x2_err: f64) -> Point {
        self.x2 = Some(x2);
        self.x2_err = x2_err;
        self
    }

    /// The same point with the error covariances of the second host property (dex²): with y
    /// (`x2_y_cov`) and with x (`x_x2_cov`), for planar fits.
    ///
    /// # Model
    /// ```text
    /// measurement covariance of (x, x2, y):
    ///   [[σ_x²,    σ_x,x2,  σ_xy   ],
    ///    [σ_x,x2,  σ_x2²,   σ_x2,y ],
    ///    [σ_xy,    σ_x2,y,  σ_y²   ]]
    /// σ_x2,y = x2_y_cov, σ_x,x2 = x_x2_cov, dex² (|σ_x2,y| ≤ σ_x2 σ_y, |σ_x,x2| ≤ σ_x σ_x2)
    /// ```
    ///
    /// # Errors
    /// None here; planar fits refuse a covariance larger than its two errors allow with
    /// FitError::InvalidSetting.
    ///
    /// # References
    /// docs/methods.md §3.2 (a shared distance error correlates every distance-dependent
    /// quantity of a galaxy).
    pub fn with_x2_covariances(mut self, x2_y_cov: f64, x_x2_cov: f64) -> Point {
        self.x2_y_cov = x2_y_cov;
        self.x_x2_cov = x_x2_cov;
        self
    }
}

/// The four BCES lines of Akritas & Bershady (1996).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum BcesLine {
    /// Y on X (the forward regression; use it for prediction).
    YOnX,
    /// X on Y, expressed as dY/dX.
    XOnY,
    /// Bisector of the Y|X and X|Y lines.
    Bisector,
    /// Orthogonal regression.
    Orthogonal,
}

/// Estimator used for a fit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Method {
    /// Structural maximum likelihood (Kelly 2007 measurement-error model): the default.
    Structural,
    /// Maximum likelihood conditional on the observed x (dilutes slopes when x errors matter).
    Conditional,
    /// Modified FITEXY (Tremaine et al. 2002).
    Fitexy,
    /// BCES (Akritas & Bershady 1996).
    Bces(BcesLine),
}

impl Method {
    /// Stable lower-case name: "structural", "conditional", "fitexy", "bces-yx", "bces-xy",
    /// "bces-bisector", "bces-orthogonal".
    ///
    /// # Model
    /// ```text
    /// no equation: a stable name
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None.
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Structural => "structural",
            Method::Conditional => "conditional",
            Method::Fitexy => "fitexy",
            Method::Bces(BcesLine::YOnX) => "bces-yx",
            Method::Bces(BcesLine::XOnY) => "bces-xy",
            Method::Bces(BcesLine::Bisector) => "bces-bisector",
            Method::Bces(BcesLine::Orthogonal) => "bces-orthogonal",
        }
    }

    /// Every method, in the order of [`Method::as_str`]'s list.
    pub const ALL: [Method; 7] = [
        Method::Structural,
        Method::Conditional,
        Method::Fitexy,
        Method::Bces(BcesLine::YOnX),
        Method::Bces(BcesLine::XOnY),
        Method::Bces(BcesLine::Bisector),
        Method::Bces(BcesLine::Orthogonal),
    ];
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Method {
    type Err = FitError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Method::ALL
            .into_iter()
            .find(|m| m.as_str() == s)
            .ok_or_else(|| FitError::InvalidSetting {
                setting: "method",
                reason: format!(
                    "'{s}' is not one of structural, conditional, fitexy, bces-yx, bces-xy, bces-bisector, bces-orthogonal."
                ),
            })
    }
}

/// Functional form of the relation.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Shape {
    /// y = α + β (x − x0).
    Line,
    /// y = α + β (x − x0) + β2 (x − x0)².
    Quadratic,
    /// y = α + β (x − x0) + γ (x2 − x02).
    Plane,
}

impl Shape {
    /// Stable lower-case name: "line", "quadratic", "plane".
    ///
    /// # Model
    /// ```text
    /// no equation: a stable name
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// None.
    pub fn as_str(self) -> &'static str {
        match self {
            Shape::Line => "line",
            Shape::Quadratic => "quadratic",
            Shape::Plane => "plane",
        }
    }
}

impl FromStr for Shape {
    type Err = FitError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "line" => Ok(Shape::Line),
            "quadratic" => Ok(Shape::Quadratic),
            "plane" => Ok(Shape::Plane),
            _ => Err(FitError::InvalidSetting {
                setting: "shape",
                reason: format!("'{s}' is not one of line, quadratic, plane."),
            }),
        }
    }
}

/// What to fit. Build with [`FitSpec::new`] and the `with_*` setters.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FitSpec {
    /// Estimator.
    pub method: Method,
    /// Functional form.
    pub shape: Shape,
    /// Pivot x0 (log10 units of x).
    pub pivot: f64,
    /// Pivot x02 of the second host property (Plane only; log10 units).
    pub pivot2: f64,
    /// Structural only: number of Gaussian components of the true-x distribution, 1..=3.
    pub components: usize,
}

impl FitSpec {
    /// A straight-line fit with `method` about `pivot` (log10 units), one x-model component.
    ///
    /// # Model
    /// ```text
    /// y = α + β (x − x0), x0 = pivot in log10 units
    /// ```
    ///
    /// # Errors
    /// None.
    ///
    /// # References
    /// Tremaine et al. 2002, ApJ 574, 740 (choice of pivot).
    pub fn new(method: Method, pivot: f64) -> FitSpec {
        FitSpec {
            method,
            shape: Shape::Line,
            pivot,
            pivot2: 0.0,
            components: 1,
        }
    }

    /// The same spec with another functional form.
    ///
    /// # Errors
    /// None at present: every shape is accepted here; estimators that cannot fit a shape
    /// return [`FitError::Unsupported`] when fitting.
    ///
    /// # Model
    /// ```text
    /// Line: α + β d; Quadratic: α + β d + β2 d²; Plane: α + β d + γ d2 (d = x − x0, d2 = x2 − x02)
    /// ```
    ///
    /// # References
    /// Wyithe 2006, MNRAS 365, 1082 (quadratic); docs/methods.md §2.7 (plane).
    pub fn with_shape(mut self, shape: Shape) -> Result<FitSpec, FitError> {
        self.shape = shape;
        Ok(self)
    }

    /// The same spec with the second pivot x02 (Plane).
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] if `pivot2` is not finite.
    ///
    /// # Model
    /// ```text
    /// d2 = x2 − x02, x02 = pivot2 in log10 units
    /// ```
    ///
    /// # References
    /// docs/methods.md §2.7.
    pub fn with_pivot2(mut self, pivot2: f64) -> Result<FitSpec, FitError> {
        if !pivot2.is_finite() {
            return Err(FitError::InvalidSetting {
                setting: "pivot2",
                reason: "The second pivot must be a finite number.".to_owned(),
            });
        }
        self.pivot2 = pivot2;
        Ok(self)
    }

    /// The same spec with another pivot x0.
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] if `pivot` is not finite.
    ///
    /// # Model
    /// ```text
    /// d = x − x0, x0 = pivot in log10 units
    /// ```
    ///
    /// # References
    /// Tremaine et al. 2002, ApJ 574, 740.
    pub fn with_pivot(mut self, pivot: f64) -> Result<FitSpec, FitError> {
        if !pivot.is_finite() {
            return Err(FitError::InvalidSetting {
                setting: "pivot",
                reason: "The pivot must be a finite number.".to_owned(),
            });
        }
        self.pivot = pivot;
        Ok(self)
    }

    /// The same spec with `components` Gaussians in the true-x model (structural only).
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] unless 1 ≤ `components` ≤ 3.
    ///
    /// # Model
    /// ```text
    /// ξ ~ Σ_{k=1..K} π_k N(μ_k, τ_k²), K = components
    /// ```
    ///
    /// # References
    /// Kelly 2007, ApJ 665, 1489, §4.
    pub fn with_components(mut self, components: usize) -> Result<FitSpec, FitError> {
        if !(1..=3).contains(&components) {
            return Err(FitError::InvalidSetting {
                setting: "components",
                reason: format!(
                    "The true-x model takes 1 to 3 Gaussian components, not {components}."
                ),
            });
        }
        self.components = components;
        Ok(self)
    }
}

/// Model parameters on their natural scale; unused ones are `None`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Params {
    /// Zero point α: log10 M_BH at the pivot, dex.
    pub alpha: f64,
    /// Slope β, dex per dex.
    pub beta: f64,
    /// Quadratic coefficient β2 (Quadratic), dex per dex².
    pub beta2: Option<f64>,
    /// Slope γ of the second host property (Plane), dex per dex.
    pub gamma: Option<f64>,
    /// Intrinsic scatter ε in log10 M_BH at fixed host property, dex.
    pub eps: f64,
}

impl Params {
    /// Names of the parameters present, in reporting order: alpha, beta, [beta2], [gamma], eps.
    pub fn names(&self) -> Vec<&'static str> {
        let mut v = vec!["alpha", "beta"];
        if self.beta2.is_some() {
            v.push("beta2");
        }
        if self.gamma.is_some() {
            v.push("gamma");
        }
        v.push("eps");
        v
    }

    /// Values of the parameters present, in the order of [`Params::names`].
    pub fn values(&self) -> Vec<f64> {
        let mut v = vec![self.alpha, self.beta];
        v.extend(self.beta2);
        v.extend(self.gamma);
        v.push(self.eps);
        v
    }

    /// Parameters of a straight line (no β2, no γ).
    pub fn line(alpha: f64, beta: f64, eps: f64) -> Self {
        Self {
            alpha,
            beta,
            beta2: None,
            gamma: None,
            eps,
        }
    }
}

/// How the optimiser ended.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Termination {
    /// One or more plain sentences (e.g. "converged", notes on boundaries and dropped rows).
    pub reason: String,
    /// Optimiser iterations.
    pub iterations: u64,
    /// Objective evaluations.
    pub evaluations: u64,
}

/// One Gaussian of the structural true-x model; means are reported unpivoted, in the log10
/// units of x.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MixtureComponent {
    /// Mixture weight π_k (weights sum to 1).
    pub weight: f64,
    /// Mean μ_k of the true x, log10 units (unpivoted).
    pub mean: f64,
    /// Standard deviation τ_k of the true x, dex.
    pub sd: f64,
    /// Plane only: mean of the true x2 (unpivoted).
    pub mean2: Option<f64>,
    /// Plane only: sd of the true x2, dex.
    pub sd2: Option<f64>,
    /// Plane only: correlation of the true x and x2.
    pub corr: Option<f64>,
}

/// The result of one fit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Fit {
    /// What was fitted.
    pub spec: FitSpec,
    /// Best-fitting parameters.
    pub params: Params,
    /// 1-σ errors in the same layout (the ε error may be 0 at the ε = 0 boundary; see
    /// `termination.reason`).
    pub errors: Params,
    /// Names of the rows/columns of `cov`, e.g. `["alpha", "beta", "eps"]`.
    pub cov_names: Vec<&'static str>,
    /// Covariance matrix of the parameters in `cov_names` order.
    pub cov: Vec<Vec<f64>>,
    /// Number of objects used (detections plus limits).
    pub n: usize,
    /// Number of upper limits among them.
    pub n_upper: usize,
    /// −2 ln L at the optimum (likelihood estimators only; structural: the full joint
    /// likelihood including the x model).
    pub neg2_log_l: Option<f64>,
    /// Akaike information criterion −2 ln L + 2k (likelihood estimators only).
    pub aic: Option<f64>,
    /// Bayesian information criterion −2 ln L + k ln n (likelihood estimators only).
    pub bic: Option<f64>,
    /// χ² at the optimum (FITEXY only; at the tuned or fixed ε0).
    pub chi2: Option<f64>,
    /// Number k of free parameters counted in AIC/BIC (including x-model nuisance parameters).
    pub n_params: usize,
    /// How the optimiser ended, with notes.
    pub termination: Termination,
    /// Structural fits: the fitted true-x distribution.
    pub x_model: Option<Vec<MixtureComponent>>,
    /// The reported value and 68 % / 95 % intervals of every relation parameter, and how they
    /// were computed (`fit::intervals`). For the restricted kind ε's value differs from
    /// `params.eps` (the maximum-likelihood ε, biased low at small N).
    pub intervals: Intervals,
}

impl Fit {
    /// The same fit with α, β and ε moved by the given amounts (dex, dex per dex, dex), and the
    /// quoted values and intervals moved with them; errors and covariance kept. How a page shows
    /// the fit without one object from the one-step leave-one-out change (docs/methods.md §6):
    /// at the sample sizes where it is used the errors change by about 1/(2N).
    #[must_use]
    pub fn shifted(&self, d_alpha: f64, d_beta: f64, d_eps: f64) -> Fit {
        let mut out = self.clone();
        out.params.alpha += d_alpha;
        out.params.beta += d_beta;
        out.params.eps = (out.params.eps + d_eps).max(0.0);
        for iv in &mut out.intervals.params {
            let d = match iv.name {
                "alpha" => d_alpha,
                "beta" => d_beta,
                "eps" => d_eps,
                _ => continue,
            };
            iv.estimate += d;
            iv.p16 += d;
            iv.p84 += d;
            iv.p2_5 += d;
            iv.p97_5 += d;
        }
        out
    }

    /// A straight-line relation given from outside (a published fit, or a test's fixture): α, β,
    /// ε with the covariance of (α, β, ε) in that order, no sample behind it (n = 0, no
    /// likelihood). Errors are the square roots of the covariance's diagonal.
    pub fn given_line(spec: FitSpec, params: Params, cov: [[f64; 3]; 3]) -> Self {
        let sd = |i: usize| cov[i][i].max(0.0).sqrt();
        let intervals = Intervals::from_errors(
            IntervalKind::Estimator,
            &params,
            &Params::line(sd(0), sd(1), sd(2)),
        );
        Self {
            spec,
            params,
            errors: Params::line(sd(0), sd(1), sd(2)),
            cov_names: vec!["alpha", "beta", "eps"],
            cov: cov.iter().map(|row| row.to_vec()).collect(),
            n: 0,
            n_upper: 0,
            neg2_log_l: None,
            aic: None,
            bic: None,
            chi2: None,
            n_params: 3,
            termination: Termination {
                reason: "given, not fitted".to_string(),
                iterations: 0,
                evaluations: 0,
            },
            x_model: None,
            intervals,
        }
    }

    /// The intrinsic scatter to quote and to predict with (dex): ε from `intervals` (the
    /// restricted-likelihood ε where it was computed, docs/methods.md §2.8), else the fitted ε.
    #[must_use]
    pub fn quoted_eps(&self) -> f64 {
        self.intervals
            .get("eps")
            .map_or(self.params.eps, |iv| iv.estimate)
    }

    /// Covariance of two named parameters (`"alpha"`, `"beta"`, `"beta2"`, `"gamma"`, `"eps"`),
    /// or `None` if either is not in `cov_names`.
    ///
    /// # Model
    /// ```text
    /// C_ab = cov[a][b] for the named parameters (units: products of the parameters' units)
    /// ```
    ///
    /// # Errors
    /// None: returns None for an unknown name.
    ///
    /// # References
    /// None (bookkeeping).
    pub fn covariance(&self, a: &str, b: &str) -> Option<f64> {
        let i = self.cov_names.iter().position(|n| *n == a)?;
        let j = self.cov_names.iter().position(|n| *n == b)?;
        self.cov.get(i).and_then(|row| row.get(j)).copied()
    }
}

/// Validated, pivoted sample in structure-of-arrays form, shared by the estimators.
#[derive(Clone, Debug)]
pub(crate) struct Data {
    /// x − x0.
    pub(crate) d: Vec<f64>,
    /// σ_x².
    pub(crate) vx: Vec<f64>,
    /// y (log10 M_BH or its limit).
    pub(crate) y: Vec<f64>,
    /// σ_y².
    pub(crate) vy: Vec<f64>,
    /// σ_xy.
    pub(crate) cxy: Vec<f64>,
    /// Upper-limit flags.
    pub(crate) lim: Vec<bool>,
    /// x2 − x02 (0 unless Plane).
    pub(crate) d2: Vec<f64>,
    /// σ_x2² (0 unless Plane).
    pub(crate) vx2: Vec<f64>,
    /// σ_x2,y, the x2–y error covariance (0 unless Plane).
    pub(crate) cx2y: Vec<f64>,
    /// σ_x,x2, the x–x2 error covariance (0 unless Plane).
    pub(crate) cxx2: Vec<f64>,
    /// Number of upper limits.
    pub(crate) n_upper: usize,
}

impl Data {
    /// Number of objects.
    pub(crate) fn n(&self) -> usize {
        self.y.len()
    }
}

/// Checks every row and builds the pivoted arrays.
///
/// Order of checks: non-finite values (first row, first column), negative errors, an x–y error
/// covariance the errors cannot carry (for a plane also an x2–y or x–x2 one), a missing x2 in
/// a planar fit, all limits, too few detections (`min`), no spread in x (or x2) among the
/// detections.
pub(crate) fn prepare(points: &[Point], spec: &FitSpec, min: usize) -> Result<Data, FitError> {
    let data = prepare_rows(points, spec)?;
    let n = points.len();
    if n > 0 && data.n_upper == n {
        return Err(FitError::AllUpperLimits);
    }
    let n_det = n - data.n_upper;
    if n_det < min {
        return Err(FitError::TooFewPoints {
            n: n_det,
            min,
            method: spec.method.as_str(),
        });
    }
    let spread = |v: &[f64]| {
        let mut it = v
            .iter()
            .zip(&data.lim)
            .filter(|(_, l)| !**l)
            .map(|(x, _)| *x);
        let first = it.next().unwrap_or(0.0);
        it.any(|x| (x - first).abs() > 0.0)
    };
    if !spread(&data.d) || (spec.shape == Shape::Plane && !spread(&data.d2)) {
        return Err(FitError::NoSpreadInX);
    }
    Ok(data)
}

/// The row checks of [`prepare`] (the first four) and the pivoted arrays, without the checks
/// of the sample as a whole: for rows evaluated against another sample's fit (an object
/// added to it).
pub(crate) fn prepare_rows(points: &[Point], spec: &FitSpec) -> Result<Data, FitError> {
    let plane = spec.shape == Shape::Plane;
    let n = points.len();
    let mut data = Data {
        d: Vec::with_capacity(n),
        vx: Vec::with_capacity(n),
        y: Vec::with_capacity(n),
        vy: Vec::with_capacity(n),
        cxy: Vec::with_capacity(n),
        lim: Vec::with_capacity(n),
        d2: Vec::with_capacity(n),
        vx2: Vec::with_capacity(n),
        cx2y: Vec::with_capacity(n),
        cxx2: Vec::with_capacity(n),
        n_upper: 0,
    };
    if !spec.pivot.is_finite() || !spec.pivot2.is_finite() {
        return Err(FitError::InvalidSetting {
            setting: "pivot",
            reason: "The pivot must be a finite number.".to_owned(),
        });
    }
    for (row, p) in points.iter().enumerate() {
        let x2 = if plane {
            match p.x2 {
                Some(v) => v,
                None => {
                    return Err(FitError::InvalidSetting {
                        setting: "x2",
                        reason: format!(
                            "Row {row} has no second host property, which a planar fit needs."
                        ),
                    });
                }
            }
        } else {
            0.0
        };
        // The x2 covariances only enter a planar fit; other shapes ignore them.
        let (x2_err, x2_y_cov, x_x2_cov) = if plane {
            (p.x2_err, p.x2_y_cov, p.x_x2_cov)
        } else {
            (0.0, 0.0, 0.0)
        };
        let cols: [(&'static str, f64); 9] = [
            ("x", p.x),
            ("x_err", p.x_err),
            ("y", p.y),
            ("y_err", p.y_err),
            ("xy_cov", p.xy_cov),
            ("x2", x2),
            ("x2_err", x2_err),
            ("x2_y_cov", x2_y_cov),
            ("x_x2_cov", x_x2_cov),
        ];
        if let Some((column, _)) = cols.iter().find(|(_, v)| !v.is_finite()) {
            return Err(FitError::NonFiniteInput { row, column });
        }
        for (column, v) in [("x_err", p.x_err), ("y_err", p.y_err), ("x2_err", x2_err)] {
            if v < 0.0 {
                return Err(FitError::NegativeError { row, column });
            }
        }
        if p.xy_cov.abs() > p.x_err * p.y_err * (1.0 + 1e-12) {
            return Err(FitError::InvalidSetting {
                setting: "xy_cov",
                reason: format!(
                    "Row {row} has an x–y error covariance larger than x_err × y_err allows."
                ),
            });
        }
        for (setting, cov, a, b, pair) in [
            ("x2_y_cov", x2_y_cov, x2_err, p.y_err, "x2–y"),
            ("x_x2_cov", x_x2_cov, p.x_err, x2_err, "x–x2"),
        ] {
            if cov.abs() > a * b * (1.0 + 1e-12) {
                let (ea, eb) = if setting == "x2_y_cov" {
                    ("x2_err", "y_err")
                } else {
                    ("x_err", "x2_err")
                };
                return Err(FitError::InvalidSetting {
                    setting,
                    reason: format!(
                        "Row {row} has an {pair} error covariance larger than {ea} × {eb} allows."
                    ),
                });
            }
        }
        data.d.push(p.x - spec.pivot);
        data.vx.push(p.x_err * p.x_err);
        data.y.push(p.y);
        data.vy.push(p.y_err * p.y_err);
        data.cxy.push(p.xy_cov);
        data.lim.push(p.upper_limit);
        data.d2.push(if plane { x2 - spec.pivot2 } else { 0.0 });
        data.vx2.push(x2_err * x2_err);
        data.cx2y.push(x2_y_cov);
        data.cxx2.push(x_x2_cov);
        if p.upper_limit {
            data.n_upper += 1;
        }
    }
    Ok(data)
}

/// Published worked examples shared by the unit tests.
#[cfg(test)]
pub(crate) mod test_data {
    use super::Point;

    /// Seeded M–σ-like sample (invented): x = log σ around 2.3, β = 4.5, ε = 0.35, pivot
    /// log10(200); the first `n_limits` objects become upper limits 0.3 dex above their mass.
    pub(crate) fn msigma_sample(n: usize, n_limits: usize, seed: u64) -> Vec<Point> {
        use rand::rngs::StdRng;
        use rand::{RngExt, SeedableRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(seed);
        let xi = Normal::new(2.3, 0.12).unwrap();
        let unit = Normal::new(0.0, 1.0).unwrap();
        (0..n)
            .map(|i| {
                let x_true = xi.sample(&mut rng);
                let x_err = rng.random_range(0.01..0.035);
                let y_err = rng.random_range(0.05..0.3);
                let y_true = 8.3 + 4.5 * (x_true - 2.30103) + 0.35 * unit.sample(&mut rng);
                let x = x_true + x_err * unit.sample(&mut rng);
                let y = y_true + y_err * unit.sample(&mut rng);
                if i < n_limits {
                    Point::limit(x, x_err, y + 0.3)
                } else {
                    Point::new(x, x_err, y, y_err)
                }
            })
            .collect()
    }

    /// Hogg, Bovy & Lang 2010, arXiv:1008.4686, Table 1: id, x, y, σ_y, σ_x, ρ_xy.
    pub(crate) const HOGG: [(u32, f64, f64, f64, f64, f64); 20] = [
        (1, 201.0, 592.0, 61.0, 9.0, -0.84),
        (2, 244.0, 401.0, 25.0, 4.0, 0.31),
        (3, 47.0, 583.0, 38.0, 11.0, 0.64),
        (4, 287.0, 402.0, 15.0, 7.0, -0.27),
        (5, 203.0, 495.0, 21.0, 5.0, -0.33),
        (6, 58.0, 173.0, 15.0, 9.0, 0.67),
        (7, 210.0, 479.0, 27.0, 4.0, -0.02),
        (8, 202.0, 504.0, 14.0, 4.0, -0.05),
        (9, 198.0, 510.0, 30.0, 11.0, -0.84),
        (10, 158.0, 416.0, 16.0, 7.0, -0.69),
        (11, 165.0, 393.0, 14.0, 5.0, 0.30),
        (12, 201.0, 442.0, 25.0, 5.0, -0.46),
        (13, 157.0, 317.0, 52.0, 5.0, -0.03),
        (14, 131.0, 311.0, 16.0, 6.0, 0.50),
        (15, 166.0, 400.0, 34.0, 6.0, 0.73),
        (16, 160.0, 337.0, 31.0, 5.0, -0.52),
        (17, 186.0, 423.0, 42.0, 9.0, 0.90),
        (18, 125.0, 334.0, 26.0, 8.0, 0.40),
        (19, 218.0, 533.0, 16.0, 6.0, -0.78),
        (20, 146.0, 344.0, 22.0, 5.0, -0.56),
    ];

    /// Hogg et al. 2010 Table 1 rows `from..=20` (1-based) with σ_x and σ_y, ρ ignored.
    pub(crate) fn hogg(from: u32) -> Vec<Point> {
        HOGG.iter()
            .filter(|r| r.0 >= from)
            .map(|r| Point::new(r.1, r.4, r.2, r.3))
            .collect()
    }

    /// The same rows with σ_xy = ρ σ_x σ_y.
    pub(crate) fn hogg_with_cov(from: u32) -> Vec<Point> {
        HOGG.iter()
            .filter(|r| r.0 >= from)
            .map(|r| Point::new(r.1, r.4, r.2, r.3).with_xy_cov(r.5 * r.4 * r.3))
            .collect()
    }

    /// Hogg et al. 2010 rows with σ_y only (x errors zero): their exercises 1 and 2.
    pub(crate) fn hogg_y_only(from: u32) -> Vec<Point> {
        HOGG.iter()
            .filter(|r| r.0 >= from)
            .map(|r| Point::new(r.1, 0.0, r.2, r.3))
            .collect()
    }

    /// Pearson (1901) data with York's (1966, Can. J. Phys. 44, 1079) weights, σ = 1/√w.
    pub(crate) fn pearson_york() -> Vec<Point> {
        let x = [0.0, 0.9, 1.8, 2.6, 3.3, 4.4, 5.2, 6.1, 6.5, 7.4];
        let y = [5.9, 5.4, 4.4, 4.6, 3.5, 3.7, 2.8, 2.8, 2.4, 1.5];
        let wx = [
            1000.0, 1000.0, 500.0, 800.0, 200.0, 80.0, 60.0, 20.0, 1.8, 1.0,
        ];
        let wy = [1.0, 1.8, 4.0, 8.0, 20.0, 20.0, 70.0, 70.0, 100.0, 500.0];
        (0..10)
            .map(|i| Point::new(x[i], 1.0 / f64::sqrt(wx[i]), y[i], 1.0 / f64::sqrt(wy[i])))
            .collect()
    }

    /// Settings of a simulated sample with known truth.
    #[derive(Clone, Debug)]
    pub(crate) struct Sim {
        pub(crate) n: usize,
        pub(crate) alpha: f64,
        pub(crate) beta: f64,
        pub(crate) beta2: f64,
        pub(crate) eps: f64,
        pub(crate) pivot: f64,
        pub(crate) x_mean: f64,
        pub(crate) x_sd: f64,
        pub(crate) x_err: f64,
        pub(crate) y_err: f64,
        /// Objects whose drawn y exceeds this become upper limits at y_lim_at (None: no limits).
        pub(crate) limit_fraction: f64,
        pub(crate) seed: u64,
    }

    impl Default for Sim {
        fn default() -> Sim {
            // An invented M–σ-like sample: σ around 200 km/s (log 2.3 ± 0.12), errors of the
            // size used by the simulation of docs/methods.md §2.6 (σ errors 0.01–0.035 dex
            // there, 0.03 dex here).
            Sim {
                n: 300,
                alpha: 8.3,
                beta: 5.0,
                beta2: 0.0,
                eps: 0.3,
                pivot: 2.301_03,
                x_mean: 2.3,
                x_sd: 0.12,
                x_err: 0.03,
                y_err: 0.1,
                limit_fraction: 0.0,
                seed: 1,
            }
        }
    }

    /// Draws a sample from the structural model; a random `limit_fraction` of the objects is
    /// turned into upper limits placed 0.1–0.6 dex above their true mass.
    pub(crate) fn simulate(s: &Sim) -> Vec<Point> {
        use rand::rngs::StdRng;
        use rand::{RngExt, SeedableRng};
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = StdRng::seed_from_u64(s.seed);
        let g = move |rng: &mut StdRng| -> f64 { StandardNormal.sample(rng) };
        (0..s.n)
            .map(|_| {
                let xi = s.x_mean + s.x_sd * g(&mut rng);
                let d = xi - s.pivot;
                let eta = s.alpha + s.beta * d + s.beta2 * d * d + s.eps * g(&mut rng);
                let x = xi + s.x_err * g(&mut rng);
                if rng.random_range(0.0..1.0) < s.limit_fraction {
                    Point::limit(x, s.x_err, eta + rng.random_range(0.1..0.6))
                } else {
                    Point::new(x, s.x_err, eta + s.y_err * g(&mut rng), s.y_err)
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plane_spec() -> FitSpec {
        FitSpec::new(Method::Conditional, 2.3)
            .with_shape(Shape::Plane)
            .and_then(|s| s.with_pivot2(11.0))
            .expect("spec")
    }

    /// Five invented plane points (x = log σ, x2 = log M_bulge) with errors of 0.02, 0.1 and
    /// 0.2 dex on x, x2 and y.
    fn plane_points() -> Vec<Point> {
        (0..5)
            .map(|i| {
                let d = f64::from(i) * 0.05;
                Point::new(2.2 + d, 0.02, 8.0 + 4.0 * d, 0.2).with_x2(10.8 + 2.0 * d * d, 0.1)
            })
            .collect()
    }

    #[test]
    fn points_written_before_the_x2_covariances_read_with_none() {
        // A point serialized without the two fields reads as one without covariances, and a
        // point with them survives a round trip.
        let old = r#"{"name":"X 214","x":2.3,"x_err":0.02,"y":8.1,"y_err":0.1,"xy_cov":0.0,
            "upper_limit":false,"x2":11.0,"x2_err":0.1}"#;
        let p: Point = serde_json::from_str(old).expect("an older point reads");
        assert_eq!(
            p,
            Point::new(2.3, 0.02, 8.1, 0.1)
                .named("X 214")
                .with_x2(11.0, 0.1)
        );
        assert_eq!((p.x2_y_cov, p.x_x2_cov), (0.0, 0.0));
        let q = p.with_x2_covariances(0.004, -0.001);
        let back: Point =
            serde_json::from_str(&serde_json::to_string(&q).expect("json")).expect("reads");
        assert_eq!(back, q);
    }

    #[test]
    fn plane_covariances_larger_than_their_errors_are_refused() {
        let spec = plane_spec();
        let mut pts = plane_points();
        // |σ_x2y| ≤ σ_x2 σ_y = 0.1 × 0.2 = 0.02 dex² is accepted, more is not.
        pts[3] = pts[3].clone().with_x2_covariances(0.02, 0.0);
        assert!(prepare(&pts, &spec, 4).is_ok());
        pts[3] = pts[3].clone().with_x2_covariances(0.021, 0.0);
        let e = prepare(&pts, &spec, 4).expect_err("too large");
        assert!(
            matches!(&e, FitError::InvalidSetting { setting: "x2_y_cov", reason } if reason.contains("Row 3")),
            "{e}"
        );
        // |σ_xx2| ≤ σ_x σ_x2 = 0.002 dex².
        pts[3] = pts[3].clone().with_x2_covariances(0.0, -0.0021);
        let e = prepare(&pts, &spec, 4).expect_err("too large");
        assert!(
            matches!(
                e,
                FitError::InvalidSetting {
                    setting: "x_x2_cov",
                    ..
                }
            ),
            "{e}"
        );
        // A line ignores the plane's covariances (it has no x2).
        let line = FitSpec::new(Method::Conditional, 2.3);
        assert!(prepare(&pts, &line, 4).is_ok());
    }
}
