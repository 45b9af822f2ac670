//! `GET /api/v1/galaxies` (the catalog table: the same filters, sorting and pages as
//! `/galaxies`) and `GET /api/v1/galaxies/{slug}` (one galaxy with every measurement and its
//! adopted values). Masses and bulge masses are given as stored and at the adopted distance;
//! the table's rows, filters and sort are the page's own (`web::galaxies`).

use axum::Json;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};
use axum::response::IntoResponse;
use serde::{Deserialize, Serialize};
use utoipa::{IntoParams, ToSchema};

use super::problem::Problem;
use super::relations::{BulgeKindWord, MassMethodWord, MorphologyWord};
use super::{ApiResult, query_pairs};
use crate::auth::Principal;
use crate::error::{AppError, FieldError};
use crate::relations::galaxy::{MeasurementAt, galaxy_record_at};
use crate::relations::table::{MAX_PER_PAGE, TableQuery, TableRow, table_page};
use crate::state::AppState;

/// Highest page number accepted (far beyond any catalog; keeps page × per_page small).
const MAX_PAGE: usize = 1_000_000;

/// Detections, limits or both (`limits`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum LimitChoice {
    /// Every galaxy (default).
    All,
    /// Only detected masses.
    Detections,
    /// Only upper limits.
    Limits,
}

/// Sphere of influence resolved or not (`soi`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum SoiChoiceWord {
    /// Every galaxy (default).
    All,
    /// Resolved.
    Resolved,
    /// Not resolved.
    Unresolved,
}

/// Sort column (`sort`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum SortWord {
    /// Name (default).
    Name,
    /// Black-hole mass at the adopted distance.
    LogMbh,
    /// σ.
    Sigma,
    /// Bulge mass at the adopted distance.
    LogMbulge,
    /// Distance.
    Distance,
    /// Morphology.
    Morphology,
    /// Mass method.
    Method,
}

/// Sort direction (`dir`).
#[derive(Debug, Clone, Copy, Serialize, Deserialize, ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum DirWord {
    /// Ascending (default).
    Asc,
    /// Descending.
    Desc,
}

/// The catalog table's query parameters (those of `/galaxies`).
#[derive(Debug, Deserialize, IntoParams)]
#[into_params(parameter_in = Query)]
pub struct GalaxyQuery {
    /// Only this morphology.
    pub morphology: Option<MorphologyWord>,
    /// Only this bulge kind.
    pub bulge_kind: Option<BulgeKindWord>,
    /// Only masses measured this way.
    pub method: Option<MassMethodWord>,
    /// Detections, limits or all.
    pub limits: Option<LimitChoice>,
    /// Sphere of influence resolved, unresolved or all.
    pub soi: Option<SoiChoiceWord>,
    /// Sort column (name breaks ties).
    pub sort: Option<SortWord>,
    /// Sort direction.
    pub dir: Option<DirWord>,
    /// Page, from 1 to 1,000,000 (a page past the end is empty).
    #[param(minimum = 1, maximum = 1_000_000)]
    pub page: Option<u32>,
    /// Rows per page, 1 to 500 (default 50).
    #[param(minimum = 1, maximum = 500)]
    pub per_page: Option<u32>,
}

/// One galaxy of the catalog table.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct GalaxyRow {
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// Morphology word.
    pub morphology: String,
    /// Bulge kind word.
    pub bulge_kind: String,
    /// Centre kind word.
    pub centre_kind: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Adopted black-hole mass (or upper limit) at the adopted distance, log10 M☉.
    pub log_mbh: Option<f64>,
    /// Its lower 1σ error, dex.
    pub log_mbh_err_minus_dex: Option<f64>,
    /// Its upper 1σ error, dex.
    pub log_mbh_err_plus_dex: Option<f64>,
    /// Whether the mass is an upper limit.
    pub mbh_upper_limit: Option<bool>,
    /// How the mass was measured.
    pub mbh_method: Option<String>,
    /// Adopted velocity dispersion, km/s.
    pub sigma_km_s: Option<f64>,
    /// Adopted σ, log10 km/s.
    pub log_sigma: Option<f64>,
    /// Its error, dex.
    pub sigma_err_dex: Option<f64>,
    /// `sigma_e` or `sigma_c`.
    pub sigma_definition: Option<String>,
    /// Adopted bulge mass at the adopted distance, log10 M☉.
    pub log_mbulge: Option<f64>,
    /// Its error, dex.
    pub mbulge_err_dex: Option<f64>,
    /// Sphere of influence resolved (θ_infl / resolution ≥ the threshold); null when unknown.
    pub soi_resolved: Option<bool>,
    /// The nucleus' activity class word (`quiescent`, `seyfert1`, `seyfert2`, `liner`,
    /// `quasar`, `radio_galaxy`, `unknown`).
    pub activity: String,
    /// For a reverberation or single-epoch mass: log10 ⟨f⟩ adopted at this version and applied
    /// to `log_mbh`; null otherwise, or when the source's factor is not known.
    pub mbh_log_f: Option<f64>,
    /// The galaxy's API address.
    pub url: String,
}

/// One page of the catalog table.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct GalaxyPage {
    /// The catalog version the table was read at.
    pub catalog_version: i64,
    /// Galaxies matching the filters.
    pub total: usize,
    /// This page, from 1.
    pub page: usize,
    /// Rows per page.
    pub per_page: usize,
    /// Pages in all (at least 1).
    pub pages: usize,
    /// The rows of this page.
    pub galaxies: Vec<GalaxyRow>,
}

fn row_of(t: &TableRow) -> GalaxyRow {
    let r = &t.row;
    GalaxyRow {
        name: r.name.clone(),
        slug: r.slug.clone(),
        morphology: r.morphology.clone(),
        bulge_kind: r.bulge_kind.clone(),
        centre_kind: r.centre_kind.clone(),
        distance_mpc: r.distance_mpc,
        distance_err_mpc: r.distance_err_mpc,
        log_mbh: t.log_mbh_adopted_d,
        log_mbh_err_minus_dex: r.mbh_err_minus_dex,
        log_mbh_err_plus_dex: r.mbh_err_plus_dex,
        mbh_upper_limit: r.mbh_upper_limit,
        mbh_method: r.mbh_method.clone(),
        sigma_km_s: r.log_sigma.map(|s| 10f64.powf(s)),
        log_sigma: r.log_sigma,
        sigma_err_dex: r.sigma_err_dex,
        sigma_definition: r.sigma_definition.clone(),
        log_mbulge: t.log_mbulge_adopted_d,
        mbulge_err_dex: r.mbulge_err_dex,
        soi_resolved: t.resolved,
        activity: r.activity.clone(),
        mbh_log_f: r.mbh_log_f,
        url: format!("/api/v1/galaxies/{}", r.slug),
    }
}

/// The catalog table, filtered, sorted and paged as on `/galaxies`.
#[utoipa::path(
    get,
    path = "/api/v1/galaxies",
    tag = "galaxies",
    operation_id = "list_galaxies",
    params(GalaxyQuery, super::VersionQuery),
    responses(
        (status = 200, description = "One page of galaxies", body = GalaxyPage),
        (status = 404, description = "No such catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 400, description = "The query could not be decoded", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn list_galaxies(
    State(state): State<AppState>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<axum::response::Response> {
    let (pinned, pairs) = super::asked_version(&state, query_pairs(query)?).await?;
    // The page's parser, one parameter at a time, so each one at fault is named. An empty
    // value, which a page's form sends for "any", is refused here: leave the parameter out.
    let errors: Vec<FieldError> = pairs
        .iter()
        .filter_map(|pair| {
            let name = pair.0.chars().take(40).collect::<String>();
            if pair.1.trim().is_empty() {
                return Some(FieldError::new(name, super::EMPTY_VALUE));
            }
            TableQuery::parse(std::slice::from_ref(pair))
                .err()
                .map(|e| FieldError::new(name, e))
        })
        .collect();
    if !errors.is_empty() {
        return Err(AppError::invalid(errors));
    }
    if let Some((_, page)) = pairs.iter().rfind(|(k, _)| k == "page")
        && page.trim().parse::<usize>().is_ok_and(|p| p > MAX_PAGE)
    {
        return Err(AppError::invalid(vec![FieldError::new(
            "page",
            format!("The page must be a whole number from 1 to {MAX_PAGE}."),
        )]));
    }
    let q = TableQuery::parse(&pairs).map_err(AppError::invalid_saying)?;
    let catalog = pinned
        .as_ref()
        .map_or_else(|| state.catalog(), |(c, _)| c.clone());
    let catalog_version = catalog.rows().await?.version;
    let (page_rows, total) = table_page(&catalog, &q).await?;
    debug_assert!(q.per_page <= MAX_PER_PAGE);
    let answer = Json(GalaxyPage {
        catalog_version,
        total,
        page: q.page,
        per_page: q.per_page,
        pages: total.div_ceil(q.per_page).max(1),
        galaxies: page_rows.iter().map(row_of).collect(),
    })
    .into_response();
    Ok(match &pinned {
        Some((_, p)) => super::immutable_if_past(p, answer),
        None => answer,
    })
}

/// One measurement of a galaxy.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct MeasurementAnswer {
    /// Key.
    pub measurement_id: i64,
    /// The submission it came with.
    pub submission_id: i64,
    /// `bh_mass`, `sigma`, `bulge_mass` or `bulge_luminosity`.
    pub quantity: String,
    /// The value exactly as typed.
    pub value_text: String,
    /// Canonical value, log10 in the quantity's unit (M☉, km/s, L☉ of the band), at the
    /// source's distance.
    pub log_value: f64,
    /// The same at the galaxy's adopted distance.
    pub log_value_at_adopted_distance: f64,
    /// Lower 1σ error, dex.
    pub err_minus_dex: f64,
    /// Upper 1σ error, dex.
    pub err_plus_dex: f64,
    /// Symmetric error the fits use, dex.
    pub err_dex: f64,
    /// Whether the value is an upper limit.
    pub upper_limit: bool,
    /// Confidence of an upper limit, σ.
    pub limit_confidence_sigma: Option<f64>,
    /// Measurement method (masses), empty otherwise.
    pub method: String,
    /// `sigma_e` or `sigma_c` for σ, empty otherwise.
    pub sigma_definition: String,
    /// Aperture of σ as published.
    pub aperture: String,
    /// Band of a luminosity.
    pub band: String,
    /// Distance the source assumed, Mpc.
    pub source_distance_mpc: Option<f64>,
    /// Spatial resolution, arcsec.
    pub resolution_arcsec: Option<f64>,
    /// Reference.
    pub reference: String,
    /// Note.
    pub note: String,
    /// State of its submission: pending, accepted, rejected, withdrawn.
    pub state: String,
    /// Whether it is the adopted value of its quantity (and band).
    pub adopted: bool,
    /// When it was recorded, RFC 3339 UTC.
    #[schema(format = DateTime)]
    pub created_at: String,
    /// For a reverberation or single-epoch black-hole mass: what lies behind it.
    pub virial: Option<VirialAnswer>,
}

/// What lies behind a reverberation or single-epoch mass (docs/methods.md §4.1–§4.3), and
/// the mass moved to the adopted mean virial factor.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct VirialAnswer {
    /// The broad line, e.g. `Hbeta`.
    pub line: String,
    /// Width measure: `sigma_line` or `fwhm`.
    pub width_definition: String,
    /// Spectrum the width was measured on: `rms`, `mean` or `single`.
    pub width_spectrum: String,
    /// Rest-frame lag, days.
    pub lag_days: Option<f64>,
    /// Its lower 1σ error, days.
    pub lag_err_minus_days: Option<f64>,
    /// Its upper 1σ error, days.
    pub lag_err_plus_days: Option<f64>,
    /// Line width, km/s.
    pub width_km_s: Option<f64>,
    /// Its 1σ error, km/s.
    pub width_err_km_s: Option<f64>,
    /// log10 λL(5100 Å), erg/s, at the source's distance.
    pub log_l5100_erg_s: Option<f64>,
    /// log10 of the virial product c τ Δv²/G, M☉, when the lag and the width are known.
    pub log_virial_product: Option<f64>,
    /// log10 of the factor the stored mass assumed (0: the stored mass is the virial product;
    /// null: not known, never rescaled).
    pub assumed_log_f: Option<f64>,
    /// log10 ⟨f⟩ adopted at the version read and applied (null when not rescaled).
    pub applied_log_f: Option<f64>,
    /// Single-epoch calibration: `vp06` or `r_l_bentz13`; null for reverberation.
    pub calibration: Option<String>,
    /// The mass at the adopted ⟨f⟩ and the adopted distance, log10 M☉ (as fitted).
    pub log_mass_at_adopted_f: f64,
    /// How the mass follows from the stored one, in a sentence.
    pub factor_note: String,
    /// For a single-epoch mass: its calibration scatter, and that no default fit takes it.
    pub single_epoch_note: Option<String>,
}

impl From<&crate::relations::agn::VirialDetail> for VirialAnswer {
    fn from(d: &crate::relations::agn::VirialDetail) -> Self {
        Self {
            line: d.line.clone(),
            width_definition: d.width_definition.as_str().to_owned(),
            width_spectrum: d.width_spectrum.as_str().to_owned(),
            lag_days: d.lag_days.map(|l| l.0),
            lag_err_minus_days: d.lag_days.map(|l| l.1),
            lag_err_plus_days: d.lag_days.map(|l| l.2),
            width_km_s: d.width_km_s.map(|w| w.0),
            width_err_km_s: d.width_km_s.map(|w| w.1),
            log_l5100_erg_s: d.log_l5100_erg_s,
            log_virial_product: d.log_virial_product,
            assumed_log_f: d.assumed_log_f,
            applied_log_f: d.applied_log_f,
            calibration: d.calibration.map(|c| c.as_str().to_owned()),
            log_mass_at_adopted_f: d.log_mass_shown,
            factor_note: d.factor_sentence(),
            single_epoch_note: d.single_epoch_flag(),
        }
    }
}

/// An adopted value.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct AdoptedValue {
    /// Quantity.
    pub quantity: String,
    /// Band of a luminosity (empty otherwise).
    pub band: String,
    /// The measurement adopted.
    pub measurement_id: i64,
    /// Its value at the adopted distance, log10 in the quantity's unit; a reverberation or
    /// single-epoch mass also at the adopted mean virial factor (as fitted).
    pub log_value: f64,
    /// Its symmetric error, dex.
    pub err_dex: f64,
    /// Whether it is an upper limit.
    pub upper_limit: bool,
}

/// One galaxy with every measurement.
#[derive(Debug, Clone, Serialize, ToSchema)]
pub struct GalaxyAnswer {
    /// The catalog version the galaxy was read at (its properties and adopted values then;
    /// at a past version, `measurements` are the ones adopted then).
    pub catalog_version: i64,
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// Morphology word.
    pub morphology: String,
    /// Bulge kind word.
    pub bulge_kind: String,
    /// Centre kind word.
    pub centre_kind: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub distance_err_mpc: f64,
    /// How the distance was measured.
    pub distance_method: String,
    /// The nucleus' activity class word.
    pub activity: String,
    /// The Eddington quantities of the adopted black-hole mass, when the galaxy has a
    /// λL(5100 Å) from a broad-line measurement (docs/methods.md §4.4, §4.5).
    pub eddington: Option<super::place::EddingtonAnswer>,
    /// M_BH/M_bulge of the adopted masses at the adopted distance (as the fits read them)
    /// against the usual 0.1–0.5 % (common practice) and the default M_BH–M_bulge fit made
    /// without this galaxy, as on the galaxy page; null without both masses.
    pub bulge_ratio: Option<super::place::BulgeRatioAnswer>,
    /// The adopted value of each quantity (and band).
    pub adopted: Vec<AdoptedValue>,
    /// The sphere-of-influence check of the adopted mass, when it can be made.
    pub sphere_of_influence: Option<super::place::SoiAnswer>,
    /// Every measurement the caller may see, adopted first within a quantity: accepted and
    /// rejected ones; pending or withdrawn ones only the caller's own, or every one for a
    /// reviewer or admin.
    pub measurements: Vec<MeasurementAnswer>,
}

/// One galaxy with its measurements and adopted values.
#[utoipa::path(
    get,
    path = "/api/v1/galaxies/{slug}",
    tag = "galaxies",
    operation_id = "show_galaxy",
    params(("slug" = String, Path, description = "The galaxy's slug (from the list)"), super::VersionQuery),
    responses(
        (status = 200, description = "The galaxy", body = GalaxyAnswer),
        (status = 410, description = "A catalog version from before the history began", body = Problem, content_type = "application/problem+json"),
        (status = 422, description = "A parameter is invalid", body = Problem, content_type = "application/problem+json"),
        (status = 401, description = "No valid token or session", body = Problem, content_type = "application/problem+json"),
        (status = 403, description = "The token lacks the read scope", body = Problem, content_type = "application/problem+json"),
        (status = 404, description = "No such galaxy (at that version), catalog version or release", body = Problem, content_type = "application/problem+json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    ),
    security(("bearer" = []))
)]
pub async fn show_galaxy(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> ApiResult<axum::response::Response> {
    let (pinned, rest) = super::asked_version(&state, query_pairs(query)?).await?;
    if let Some((key, _)) = rest.first() {
        let name = key.chars().take(40).collect::<String>();
        return Err(AppError::invalid(vec![FieldError::new(
            name.as_str(),
            format!("'{name}' is not a parameter of this endpoint (it accepts version, release)."),
        )]));
    }
    let version = pinned.as_ref().map(|(_, p)| p.version);
    let catalog_version = match version {
        Some(v) => v,
        None => crate::catalog::history::current_version(&state.pool).await?,
    };
    let record = galaxy_record_at(
        &state.pool,
        state.settings.soi_threshold,
        &slug,
        principal.unreviewed_shown(),
        version,
    )
    .await?
    .ok_or_else(|| {
        AppError::not_found_saying(format!(
            "There is no galaxy '{}'{}.",
            slug.chars().take(80).collect::<String>(),
            version.map_or(String::new(), |v| format!(" in catalog version {v}"))
        ))
    })?;
    let agn = crate::relations::agn::galaxy_agn(&state.pool, &record).await?;
    let virial_of = |id: i64| agn.virial.iter().find(|d| d.measurement_id == id);
    let adopted = record
        .adopted()
        .map(|m| AdoptedValue {
            quantity: m.measurement.quantity.as_str().to_owned(),
            band: m.measurement.band.clone(),
            measurement_id: m.measurement.measurement_id,
            log_value: virial_of(m.measurement.measurement_id)
                .map_or(m.log_value_at_adopted_distance, |d| d.log_mass_shown),
            err_dex: m.measurement.err_dex,
            upper_limit: m.measurement.upper_limit,
        })
        .collect();
    let soi = record
        .adopted_sphere_of_influence()
        .map(super::place::SoiAnswer::from);
    let measurements = record
        .measurements
        .iter()
        .map(|at| {
            let mut answer = MeasurementAnswer::of(at);
            answer.virial = virial_of(at.measurement.measurement_id).map(VirialAnswer::from);
            answer
        })
        .collect();
    let bulge_ratio = galaxy_bulge_ratio(&state, pinned.as_ref().map(|(c, _)| c), &record).await?;
    let g = record.galaxy;
    let answer = Json(GalaxyAnswer {
        catalog_version,
        name: g.name,
        slug: g.slug,
        morphology: g.morphology,
        bulge_kind: g.bulge_kind,
        centre_kind: g.centre_kind,
        distance_mpc: g.distance_mpc,
        distance_err_mpc: g.distance_err_mpc,
        distance_method: g.distance_method,
        activity: g.activity,
        eddington: agn
            .eddington
            .as_ref()
            .map(super::place::EddingtonAnswer::from),
        bulge_ratio,
        adopted,
        sphere_of_influence: soi,
        measurements,
    })
    .into_response();
    Ok(match &pinned {
        Some((_, p)) => super::immutable_if_past(p, answer),
        None => answer,
    })
}

/// The galaxy's M_BH/M_bulge as its page shows it (`relations::bulge_ratio::of_galaxy`), placed
/// against the M_BH–M_bulge fit without it alone; at a named version the fit is waited for, so
/// an answer that never changes never says "computing".
async fn galaxy_bulge_ratio(
    state: &AppState,
    pinned: Option<&crate::relations::Catalog>,
    record: &crate::relations::galaxy::GalaxyRecord,
) -> ApiResult<Option<super::place::BulgeRatioAnswer>> {
    use crate::relations::Relation;
    use crate::units::Quantity;
    let has = |q: Quantity| record.adopted().any(|m| m.measurement.quantity == q);
    if !(has(Quantity::BlackHoleMass) && has(Quantity::BulgeMass)) {
        return Ok(None);
    }
    let (catalog, wait) = match pinned {
        Some(c) => (c.clone(), None),
        None => (state.catalog(), Some(crate::relations::REQUEST_WAIT)),
    };
    let left_out = crate::relations::galaxy::place_left_out_among(
        &catalog,
        record.galaxy.galaxy_id,
        wait,
        |r| *r == Relation::MBulge,
    )
    .await?;
    let ratio = crate::relations::bulge_ratio::of_galaxy(&left_out);
    if let Some(r) = &ratio {
        crate::relations::bulge_ratio::record_fit(&catalog, r).await;
    }
    Ok(ratio.as_ref().map(super::place::BulgeRatioAnswer::from))
}

impl MeasurementAnswer {
    fn of(at: &MeasurementAt) -> Self {
        let m = &at.measurement;
        MeasurementAnswer {
            measurement_id: m.measurement_id,
            submission_id: m.submission_id,
            quantity: m.quantity.as_str().to_owned(),
            value_text: m.value_text.clone(),
            log_value: m.log_value,
            log_value_at_adopted_distance: at.log_value_at_adopted_distance,
            err_minus_dex: m.err_minus_dex,
            err_plus_dex: m.err_plus_dex,
            err_dex: m.err_dex,
            upper_limit: m.upper_limit,
            limit_confidence_sigma: m.limit_confidence_sigma,
            method: m.method.clone(),
            sigma_definition: m.sigma_definition.clone(),
            aperture: m.aperture.clone(),
            band: m.band.clone(),
            source_distance_mpc: m.source_distance_mpc,
            resolution_arcsec: m.resolution_arcsec,
            reference: m.reference.clone(),
            note: m.note.clone(),
            state: m.state.clone(),
            adopted: m.adopted,
            created_at: m.created_at.clone(),
            virial: None,
        }
    }
}
