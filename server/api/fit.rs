//! `POST /api/v1/fit`: fit a sample the caller posts (up to [`MAX_POINTS`] objects) with any
//! estimator `massline fit` offers, optionally with a bootstrap or a posterior, as the command
//! line does (both call `relations::fit_own_sample`: the same pivot rule, `x_quantity` as
//! `--x-quantity`, the same pivot warning in `warnings`, and the same sampler settings; the API
//! runs no automatic small-sample bootstrap).
//!
//! ```text
//! log10 M_BH = α + β (x − x0),  intrinsic scatter ε (dex)
//! x, y: log10 values (x in the host property's unit, y in M☉); errors in dex
//! ```
//! Fits run on the blocking pool, at most [`CONCURRENT_FITS`] at a time, so posted samples
//! cannot crowd the pages off the cores. Bootstrap and posterior runs are limited to samples
//! of up to [`MAX_POINTS_RESAMPLED`] objects so that a request ends well within the 30 s
//! request timeout.

use axum::Json;
use axum::extract::State;
use serde::{Deserialize, Serialize};
use tokio::sync::Semaphore;
use utoipa::ToSchema;

use super::problem::Problem;
use super::relations::{EstimatorName, FitParameters};
use super::{ApiJson, ApiResult};
use crate::error::{AppError, FieldError};
use crate::fit::ensemble::ParamSummary;
use crate::fit::{FitError, Method, Point};
use crate::relations::{
    OwnSampleError, OwnSampleSettings, PivotRule, PivotSettingNames, XQuantity, fit_own_sample,
};
use crate::state::AppState;

/// Most objects one request may fit.
pub const MAX_POINTS: usize = 100_000;
/// Body limit of a fit request: 100,000 objects of up to about 160 bytes.
pub const FIT_LIMIT_BYTES: usize = 16 * 1024 * 1024;
/// Most objects a bootstrap or posterior run may resample.
pub const MAX_POINTS_RESAMPLED: usize = 5_000;
/// Bootstrap replicates allowed.
pub const BOOTSTRAP_RANGE: (u32, u32) = (100, 5_000);
/// Posterior steps per walker allowed (32 walkers; burn-in 1,000 or half the steps).
pub const STEPS_RANGE: (u32, u32) = (200, 20_000);
/// Fits running at once (the machine's cores; more would only queue on the blocking pool).
pub const CONCURRENT_FITS: usize = 2;

static FIT_SLOTS: Semaphore = Semaphore::const_new(CONCURRENT_FITS);

/// One object of the sample.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct FitPoint {
    /// Host property, log10 in its unit (e.g. log10 σ/km s⁻¹).
    pub x: f64,
    /// Its 1σ error, dex (≥ 0).
    #[schema(minimum = 0.0)]
    pub x_err: f64,
    /// log10 M_BH/M☉ (the limit, for an upper limit).
    pub y: f64,
    /// Its 1σ error, dex (≥ 0; ignored for a limit).
    #[schema(minimum = 0.0)]
    pub y_err: f64,
    /// Whether `y` is an upper limit (default false).
    #[serde(default)]
    pub upper_limit: bool,
    /// Covariance of the x and y errors, dex² (default 0).
    #[serde(default)]
    pub xy_cov: f64,
    /// A label (optional).
    pub name: Option<String>,
}

/// A sample to fit.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct FitRequest {
    /// The objects (1 to 100,000).
    #[schema(min_items = 1, max_items = 100_000)]
    pub points: Vec<FitPoint>,
    /// Estimator (default `structural`).
    pub method: Option<EstimatorName>,
    /// Pivot x0 in the log10 units of x (default: the convention of `x_quantity`, else
    /// log10 200 when the median of x lies in 1.3–2.8, else that median rounded to 0.5, with a
    /// warning).
    #[schema(minimum = -50.0, maximum = 50.0)]
    pub pivot: Option<f64>,
    /// What x is, for the pivot: `sigma`, `mass`, `luminosity` or `other` (the schema gives
    /// each word's pivot); `pivot` wins.
    #[schema(schema_with = x_quantity_schema)]
    pub x_quantity: Option<String>,
    /// Bootstrap replicates (100 to 5,000; samples of up to 5,000 objects).
    #[schema(minimum = 100, maximum = 5000)]
    pub bootstrap: Option<u32>,
    /// Posterior steps per walker (200 to 20,000; 32 walkers; structural and conditional;
    /// samples of up to 5,000 objects).
    #[schema(minimum = 200, maximum = 20000)]
    pub posterior_steps: Option<u32>,
    /// Seed of the bootstrap and the posterior (default 1; the same seed gives the same
    /// numbers).
    pub seed: Option<u64>,
}

/// The OpenAPI schema of `x_quantity`: one of the words of [`XQuantity`], each with its
/// conventional pivot.
fn x_quantity_schema() -> utoipa::openapi::Object {
    utoipa::openapi::ObjectBuilder::new()
        .schema_type(utoipa::openapi::schema::Type::String)
        .enum_values(Some(XQuantity::ALL.map(XQuantity::as_str)))
        .description(Some(
            "What x is, for the pivot: sigma (log10 σ in km/s; x0 = log10 200 = 2.30103), mass \
             (log10 M☉ of a bulge or stellar mass; x0 = 11), luminosity (log10 L☉ of the band; \
             x0 = 11) or other (x0 = the median of x rounded to 0.5, with a warning). Without \
             it the median of x decides, with a warning; `pivot` wins over it.",
        ))
        .build()
}

/// How the API names the pivot settings in the pivot warning.
const PIVOT_SETTINGS: PivotSettingNames = PivotSettingNames {
    x_quantity: |word| format!("\"x_quantity\": \"{word}\""),
    pivot: "\"pivot\": x0",
};

/// The request's `x_quantity`, read.
fn x_quantity_of(req: &FitRequest) -> Result<Option<XQuantity>, FieldError> {
    req.x_quantity
        .as_deref()
        .map(str::parse::<XQuantity>)
        .transpose()
        .map_err(|e| FieldError::new("x_quantity", e.to_string()))
}

/// A parameter's summary over bootstrap replicates or posterior samples.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct ParamSummaryAnswer {
    /// Parameter: alpha, beta, eps (the intrinsic scatter), …
    pub name: String,
    /// Median.
    pub median: f64,
    /// 16th percentile.
    pub p16: f64,
    /// 84th percentile.
    pub p84: f64,
    /// 2.5th percentile.
    pub p2_5: f64,
    /// 97.5th percentile.
    pub p97_5: f64,
    /// Mean.
    pub mean: f64,
    /// Standard deviation.
    pub sd: f64,
}

fn summaries(params: &[ParamSummary]) -> Vec<ParamSummaryAnswer> {
    params
        .iter()
        .map(|s| ParamSummaryAnswer {
            name: s.name.to_owned(),
            median: s.median,
            p16: s.p16,
            p84: s.p84,
            p2_5: s.p2_5,
            p97_5: s.p97_5,
            mean: s.mean,
            sd: s.sd,
        })
        .collect()
}

/// A bootstrap's summary.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct BootstrapAnswer {
    /// Replicates asked for.
    pub n_boot: usize,
    /// Replicates whose refit failed (left out of the summaries).
    pub n_failed: usize,
    /// Seed.
    pub seed: u64,
    /// Per parameter.
    pub params: Vec<ParamSummaryAnswer>,
}

/// A posterior run's summary.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct PosteriorAnswer {
    /// Walkers.
    pub walkers: usize,
    /// Steps per walker, burn-in included.
    pub steps: usize,
    /// Burn-in steps.
    pub burn_in: usize,
    /// Seed.
    pub seed: u64,
    /// Mean acceptance fraction.
    pub acceptance_fraction: f64,
    /// Integrated autocorrelation time per parameter, steps.
    pub autocorr_time: Vec<f64>,
    /// A warning when the chain is shorter than 50 autocorrelation times.
    pub warning: Option<String>,
    /// Per parameter.
    pub params: Vec<ParamSummaryAnswer>,
}

/// The fit of a posted sample.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct FitAnswer {
    /// Estimator.
    pub estimator: String,
    /// Pivot used, log10 units of x.
    pub pivot: f64,
    /// How the pivot was chosen.
    pub pivot_rule: String,
    /// Warnings about the fit, each one sentence saying what to send instead: the pivot's
    /// when it was inferred from the median of x or is that median rounded to 0.5.
    pub warnings: Vec<String>,
    /// The fitted parameters.
    pub fit: FitParameters,
    /// Bootstrap summary, when asked.
    pub bootstrap: Option<BootstrapAnswer>,
    /// Posterior summary, when asked.
    pub posterior: Option<PosteriorAnswer>,
}

fn method_of(name: EstimatorName) -> Method {
    let word = match name {
        EstimatorName::Structural => "structural",
        EstimatorName::Conditional => "conditional",
        EstimatorName::Fitexy => "fitexy",
        EstimatorName::BcesYx => "bces-yx",
        EstimatorName::BcesXy => "bces-xy",
        EstimatorName::BcesBisector => "bces-bisector",
        EstimatorName::BcesOrthogonal => "bces-orthogonal",
    };
    word.parse().unwrap_or(Method::Structural)
}

/// A fit error as a 422 problem, naming the point and column when it has them.
fn fit_problem(e: &FitError) -> AppError {
    let field = match e {
        FitError::NonFiniteInput { row, column } | FitError::NegativeError { row, column } => {
            format!("points[{row}].{column}")
        }
        FitError::InvalidSetting { setting, .. } => (*setting).to_owned(),
        _ => "points".to_owned(),
    };
    AppError::invalid(vec![FieldError::new(field, e.to_string())])
}

/// Checks the request's sizes and settings; every setting at fault is one field error.
fn check(req: &FitRequest) -> Result<(), AppError> {
    if req.points.len() > MAX_POINTS {
        return Err(AppError::too_large(format!(
            "The sample has {} points; at most {MAX_POINTS} are fitted per request.",
            req.points.len()
        ))
        .titled("Too many points"));
    }
    let mut errors = Vec::new();
    if req.points.is_empty() {
        errors.push(FieldError::new("points", "The sample has no points."));
    }
    if let Some(p) = req.pivot
        && !(p.is_finite() && (-50.0..=50.0).contains(&p))
    {
        errors.push(FieldError::new(
            "pivot",
            "The pivot must be a log10 value from −50 to 50.",
        ));
    }
    if let Err(e) = x_quantity_of(req) {
        errors.push(e);
    }
    let resampled = req.bootstrap.is_some() || req.posterior_steps.is_some();
    if resampled && req.points.len() > MAX_POINTS_RESAMPLED {
        errors.push(FieldError::new(
            if req.bootstrap.is_some() {
                "bootstrap"
            } else {
                "posterior_steps"
            },
            format!(
                "Bootstrap and posterior runs take samples of up to {MAX_POINTS_RESAMPLED} points; this one has {}.",
                req.points.len()
            ),
        ));
    }
    if let Some(n) = req.bootstrap
        && !(BOOTSTRAP_RANGE.0..=BOOTSTRAP_RANGE.1).contains(&n)
    {
        errors.push(FieldError::new(
            "bootstrap",
            format!(
                "The bootstrap takes {} to {} replicates.",
                BOOTSTRAP_RANGE.0, BOOTSTRAP_RANGE.1
            ),
        ));
    }
    if let Some(n) = req.posterior_steps
        && !(STEPS_RANGE.0..=STEPS_RANGE.1).contains(&n)
    {
        errors.push(FieldError::new(
            "posterior_steps",
            format!(
                "The posterior takes {} to {} steps per walker.",
                STEPS_RANGE.0, STEPS_RANGE.1
            ),
        ));
    }
    for (i, p) in req.points.iter().enumerate() {
        if p.name.as_ref().is_some_and(|n| n.chars().count() > 200) {
            errors.push(FieldError::new(
                format!("points[{i}].name"),
                "The name is longer than 200 characters.",
            ));
        }
    }
    if errors.is_empty() {
        Ok(())
    } else {
        Err(AppError::invalid(errors))
    }
}

/// The whole computation, synchronous (it runs on the blocking pool).
fn run(req: FitRequest) -> Result<FitAnswer, AppError> {
    let points: Vec<Point> = req
        .points
        .iter()
        .map(|p| {
            let mut point = if p.upper_limit {
                Point::limit(p.x, p.x_err, p.y)
            } else {
                Point::new(p.x, p.x_err, p.y, p.y_err)
            };
            if p.xy_cov != 0.0 {
                point = point.with_xy_cov(p.xy_cov);
            }
            match &p.name {
                Some(n) => point.named(n),
                None => point,
            }
        })
        .collect();
    let method = req.method.map_or(Method::Structural, method_of);
    let x_quantity = x_quantity_of(&req).map_err(|e| AppError::invalid(vec![e]))?;
    let settings = OwnSampleSettings {
        method,
        pivot: req.pivot,
        x_quantity,
        bootstrap: req.bootstrap.map(|n| n as usize),
        posterior_steps: req.posterior_steps.map(|n| n as usize),
        seed: req.seed.unwrap_or(1),
    };
    let own = fit_own_sample(&points, &settings).map_err(|e| match e {
        OwnSampleError::Fit(e) => fit_problem(&e),
        OwnSampleError::Bootstrap(e) => {
            AppError::invalid(vec![FieldError::new("bootstrap", e.to_string())])
        }
        OwnSampleError::Posterior(e) => {
            AppError::invalid(vec![FieldError::new("posterior_steps", e.to_string())])
        }
    })?;
    let pivot_rule = match own.pivot_rule {
        PivotRule::Given => "given".to_owned(),
        rule => rule.label(),
    };
    let warnings = own.pivot_rule.warning(own.pivot, &PIVOT_SETTINGS);
    Ok(FitAnswer {
        estimator: method.as_str().to_owned(),
        pivot: own.pivot,
        pivot_rule,
        warnings: warnings.into_iter().collect(),
        fit: FitParameters::of(&own.fit),
        bootstrap: own.bootstrap.map(|b| BootstrapAnswer {
            n_boot: b.n_boot,
            n_failed: b.n_failed,
            seed: b.seed,
            params: summaries(&b.params),
        }),
        posterior: own.posterior.map(|p| PosteriorAnswer {
            walkers: p.config.walkers,
            steps: p.config.steps,
            burn_in: p.config.burn_in,
            seed: p.config.seed,
            acceptance_fraction: p.acceptance_fraction,
            autocorr_time: p
                .autocorr_time
                .iter()
                .map(|t| if t.is_finite() { *t } else { -1.0 })
                .collect(),
            warning: p.warning,
            params: summaries(&p.params),
        }),
    })
}

/// Fit a posted sample with any estimator, optionally with a bootstrap or posterior.
#[utoipa::path(
    post,
    path = "/api/v1/fit",
    tag = "fit",
    operation_id = "fit_sample",
    request_body(content = FitRequest, description = "The sample (up to 100,000 points; body up to 16 MB) and the settings", content_type = "application/json"),
    responses(
        (status = 200, description = "The fit", body = FitAnswer),
        (status = 400, description = "The body is not JSON", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope, or a session sent no anti-forgery token", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "More than 100,000 points, or a body over 16 MB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not sent as application/json", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "The sample or a setting cannot be fitted (the field at fault is named)", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn fit_sample(
    State(_state): State<AppState>,
    ApiJson(req): ApiJson<FitRequest>,
) -> ApiResult<Json<FitAnswer>> {
    check(&req)?;
    let _slot = FIT_SLOTS
        .acquire()
        .await
        .map_err(|e| anyhow::anyhow!("the fit queue is closed: {e}"))?;
    let answer = tokio::task::spawn_blocking(move || run(req))
        .await
        .map_err(anyhow::Error::from)??;
    Ok(Json(answer))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(x: f64, y: f64) -> FitPoint {
        FitPoint {
            x,
            x_err: 0.02,
            y,
            y_err: 0.1,
            upper_limit: false,
            xy_cov: 0.0,
            name: None,
        }
    }

    #[test]
    fn an_exact_line_is_recovered_and_the_sigma_pivot_is_chosen() {
        // y = 8.3 + 4.5 (x − log10 200) exactly (values invented for the test), without x
        // errors: both estimators reduce to weighted least squares and must give back α = 8.3
        // and β = 4.5.
        let x0 = crate::relations::SIGMA_PIVOT_LOG;
        let points: Vec<FitPoint> = (0..20)
            .map(|i| {
                let x = 2.0 + 0.03 * f64::from(i);
                FitPoint {
                    x_err: 0.0,
                    ..point(x, 8.3 + 4.5 * (x - x0))
                }
            })
            .collect();
        for method in [EstimatorName::Conditional, EstimatorName::BcesYx] {
            let answer = run(FitRequest {
                points: points.clone(),
                method: Some(method),
                pivot: None,
                x_quantity: None,
                bootstrap: None,
                posterior_steps: None,
                seed: None,
            })
            .unwrap();
            assert!((answer.pivot - x0).abs() < 1e-12);
            // Inferred from the median of x (2.285), so the answer says what to send.
            assert_eq!(answer.warnings.len(), 1, "{answer:?}");
            assert!(
                answer.warnings[0].contains(r#"give "x_quantity": "sigma" to make it explicit"#),
                "{answer:?}"
            );
            assert!((answer.fit.alpha_log_mbh - 8.3).abs() < 1e-3, "{answer:?}");
            assert!((answer.fit.beta - 4.5).abs() < 1e-2, "{answer:?}");
        }
    }

    #[test]
    fn sizes_and_settings_are_checked_before_fitting() {
        let req = |n: usize, bootstrap: Option<u32>| FitRequest {
            points: (0..n).map(|i| point(2.0 + 1e-5 * i as f64, 8.0)).collect(),
            method: None,
            pivot: Some(f64::INFINITY),
            x_quantity: Some("speed".to_owned()),
            bootstrap,
            posterior_steps: Some(5),
            seed: None,
        };
        let p = check(&req(0, Some(10))).unwrap_err();
        assert_eq!(p.status(), 422);
        let fields: Vec<&str> = p.fields().iter().map(|e| e.field.as_str()).collect();
        assert_eq!(
            fields,
            [
                "points",
                "pivot",
                "x_quantity",
                "bootstrap",
                "posterior_steps"
            ]
        );
        assert_eq!(check(&req(MAX_POINTS + 1, None)).unwrap_err().status(), 413);
        // A negative error is named by point and column.
        let mut bad = req(5, None);
        bad.pivot = None;
        bad.x_quantity = None;
        bad.posterior_steps = None;
        bad.points[3].y_err = -1.0;
        let p = run(bad).unwrap_err();
        assert_eq!(p.fields()[0].field, "points[3].y_err");
    }
}
