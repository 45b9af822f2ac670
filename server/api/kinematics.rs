//! `POST /api/v1/kinematics`: a black-hole mass from a velocity table of a rotating disk, the
//! same answer as the page `/kinematics` and `massline kinematics`
//! (`relations::kinematics::fit_table`). Nothing is stored.

use axum::Json;
use axum::extract::State;
use serde::Deserialize;
use utoipa::ToSchema;

use super::problem::Problem;
use super::{ApiJson, ApiResult};
use crate::error::{AppError, FieldError};
use crate::relations::kinematics::{KinematicsResult, fit_table_queued};
use crate::state::AppState;

/// The largest body taken: 2 MiB (about 50,000 rows).
pub const KINEMATICS_LIMIT_BYTES: usize = 2 * 1024 * 1024;

/// How positions along the major axis are given.
#[derive(Debug, Clone, Copy, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum OffsetUnitWord {
    /// Arcseconds.
    Arcsec,
    /// Milliarcseconds.
    Mas,
    /// Parsecs at the distance given.
    Pc,
}

impl OffsetUnitWord {
    fn as_str(self) -> &'static str {
        match self {
            OffsetUnitWord::Arcsec => "arcsec",
            OffsetUnitWord::Mas => "mas",
            OffsetUnitWord::Pc => "pc",
        }
    }
}

/// One velocity measurement.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct DiskPointJson {
    /// Signed position along the major axis, in `offset_unit`.
    pub offset: f64,
    /// Line-of-sight velocity, km/s.
    pub v_km_s: f64,
    /// Its 1σ error, km/s (above 0).
    pub v_err_km_s: f64,
    /// A maser systemic feature's line-of-sight acceleration, km/s/yr (with its error); such
    /// a point is kept out of the rotation curve and gives the geometric distance.
    #[serde(default)]
    pub acceleration_km_s_yr: Option<f64>,
    /// Its 1σ error, km/s/yr.
    #[serde(default)]
    pub acceleration_err_km_s_yr: Option<f64>,
}

/// A Plummer star cluster.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct PlummerJson {
    /// Total luminosity, L☉.
    pub l_total_lsun: f64,
    /// Scale radius a, pc.
    pub a_pc: f64,
}

/// Stars whose enclosed light is a power law, L(<r) = L_ref (r / r_ref)^slope.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct PowerLawJson {
    /// Light inside r_ref, L☉.
    pub l_ref_lsun: f64,
    /// r_ref, pc.
    pub r_ref_pc: f64,
    /// Slope of L(<r), above 0 and at most 3.
    pub slope: f64,
}

/// The table and the settings.
#[derive(Debug, Clone, Deserialize, ToSchema)]
#[serde(deny_unknown_fields)]
pub struct KinematicsRequest {
    /// The table as CSV text, in the page's format (header `offset_arcsec`, `offset_mas`,
    /// `offset_pc` or `offset`, `v_km_s`, `v_err_km_s`, optional `acceleration_km_s_yr`,
    /// `acceleration_err_km_s_yr`). Give this or `points`.
    #[serde(default)]
    pub csv: Option<String>,
    /// The table as points (then `offset_unit` is required). Give this or `csv`.
    #[serde(default)]
    pub points: Option<Vec<DiskPointJson>>,
    /// The unit of the points' offsets, or of a CSV column named plain `offset`.
    #[serde(default)]
    pub offset_unit: Option<OffsetUnitWord>,
    /// Distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Inclination, degrees (90 edge-on); leave out with `inclination_unknown: true`, and the
    /// mass is M sin² i.
    #[serde(default)]
    pub inclination_deg: Option<f64>,
    /// Its 1σ error, degrees.
    #[serde(default)]
    pub inclination_err_deg: Option<f64>,
    /// The inclination is not known.
    #[serde(default)]
    pub inclination_unknown: bool,
    /// Stars as a Plummer sphere (fitted beside the point mass).
    #[serde(default)]
    pub plummer: Option<PlummerJson>,
    /// Stars as a power law of the enclosed light.
    #[serde(default)]
    pub power_law: Option<PowerLawJson>,
    /// A fixed mass-to-light ratio Υ, M☉/L☉; left out, Υ is fitted.
    #[serde(default)]
    pub upsilon: Option<f64>,
    /// A dark cluster's radius r_c, pc (its mass and slope are fitted).
    #[serde(default)]
    pub cluster_r_c_pc: Option<f64>,
    /// The host's velocity dispersion σ, km/s, for the sphere of influence.
    #[serde(default)]
    pub sigma_km_s: Option<f64>,
    /// The data's resolution, arcsec.
    #[serde(default)]
    pub resolution_arcsec: Option<f64>,
    /// The sphere-of-influence threshold θ_infl / resolution (the server's default, 1, when
    /// left out).
    #[serde(default)]
    pub soi_threshold: Option<f64>,
}

impl KinematicsRequest {
    /// The table's text and the settings as the domain reads them.
    fn translate(self) -> Result<(String, Vec<(String, String)>), AppError> {
        let mut pairs: Vec<(String, String)> = Vec::new();
        let mut put = |k: &str, v: Option<String>| {
            if let Some(v) = v {
                pairs.push((k.to_owned(), v));
            }
        };
        let n = |v: Option<f64>| v.map(|v| v.to_string());
        put(
            "offset_unit",
            self.offset_unit.map(|u| u.as_str().to_owned()),
        );
        put("distance_mpc", Some(self.distance_mpc.to_string()));
        put("distance_err_mpc", Some(self.distance_err_mpc.to_string()));
        if self.inclination_unknown {
            put("inclination_deg", Some("unknown".to_owned()));
        } else {
            put("inclination_deg", n(self.inclination_deg));
            put("inclination_err_deg", n(self.inclination_err_deg));
        }
        if let Some(p) = &self.plummer {
            put("plummer_l_lsun", Some(p.l_total_lsun.to_string()));
            put("plummer_a_pc", Some(p.a_pc.to_string()));
        }
        if let Some(p) = &self.power_law {
            put("power_l_ref_lsun", Some(p.l_ref_lsun.to_string()));
            put("power_r_ref_pc", Some(p.r_ref_pc.to_string()));
            put("power_slope", Some(p.slope.to_string()));
        }
        put("upsilon", n(self.upsilon));
        put("cluster_r_c_pc", n(self.cluster_r_c_pc));
        put("sigma_km_s", n(self.sigma_km_s));
        put("resolution_arcsec", n(self.resolution_arcsec));
        put("soi_threshold", n(self.soi_threshold));
        let text = match (self.csv, self.points) {
            (Some(csv), None) => csv,
            (None, Some(points)) => {
                let Some(unit) = self.offset_unit else {
                    return Err(AppError::invalid(vec![FieldError::new(
                        "offset_unit",
                        "Points need their unit: give offset_unit arcsec, mas or pc.",
                    )]));
                };
                let mut text = format!(
                    "offset_{},v_km_s,v_err_km_s,acceleration_km_s_yr,acceleration_err_km_s_yr\n",
                    unit.as_str()
                );
                let cell = |v: Option<f64>| v.map_or_else(String::new, |v| v.to_string());
                for p in points {
                    text.push_str(&format!(
                        "{},{},{},{},{}\n",
                        p.offset,
                        p.v_km_s,
                        p.v_err_km_s,
                        cell(p.acceleration_km_s_yr),
                        cell(p.acceleration_err_km_s_yr)
                    ));
                }
                text
            }
            _ => {
                return Err(AppError::invalid(vec![FieldError::new(
                    "csv",
                    "Give the table either as csv (text) or as points, one of the two.",
                )]));
            }
        };
        Ok((text, pairs))
    }
}

/// Fit a rotating disk's velocities: both models (point mass; point mass with the extended
/// mass asked), their comparison, the slope against a point mass's −1/2, the mass with its
/// statistical, inclination and distance errors, the posterior interval, the sphere of
/// influence, the maser distance, and what to submit. Nothing is stored.
#[utoipa::path(
    post,
    path = "/api/v1/kinematics",
    tag = "fit",
    operation_id = "fit_disk",
    request_body(content = KinematicsRequest, description = "The table (CSV text or points; body up to 2 MiB) and the settings", content_type = "application/json"),
    responses(
        (status = 200, description = "The fit", body = KinematicsResult),
        (status = 400, description = "The body is not JSON", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope, or a session sent no anti-forgery token", body = Problem, content_type = "application/problem+json"),
        (status = 413, description = "A body over 2 MiB", body = Problem, content_type = "application/problem+json"),
        (status = 415, description = "The body is not sent as application/json", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "Every faulty row (rows[LINE].COLUMN) and setting is named, or the fit refused the data", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn fit_disk(
    State(state): State<AppState>,
    ApiJson(req): ApiJson<KinematicsRequest>,
) -> ApiResult<Json<KinematicsResult>> {
    let (text, pairs) = req.translate()?;
    let threshold = state.settings.soi_threshold;
    let outcome = fit_table_queued(text, pairs, threshold).await?;
    Ok(Json(outcome?.result))
}
