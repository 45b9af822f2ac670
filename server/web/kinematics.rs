//! `/kinematics`: a black-hole mass from a velocity table of a rotating gas or maser disk
//! (`relations::kinematics`). GET shows the form (`?example=maser|gas` fills it with a demo
//! table and its settings); POST fits the pasted or uploaded table and shows the result, the
//! chart, the residuals and a link to the submission form filled with the mass. Nothing is
//! stored.

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{FromRequest, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};

use super::display::{Badge, fixed, probability, significant, soi_badge};
use super::login::FormToken;
use super::place::scientific;
use crate::charts::{DiskChart, DiskChartPoint, DiskCurve, kinematics_svg};
use crate::error::{AppError, AppResult};
use crate::relations::kinematics::{
    EXAMPLES, KinematicsFault, KinematicsOutcome, KinematicsResult, OffsetUnit, SETTING_NAMES,
    example, fit_table_queued,
};
use crate::state::AppState;

/// The largest form (table and settings) the page takes: 2 MiB, about 50,000 rows.
pub(crate) const FORM_LIMIT_BYTES: usize = 2 * 1024 * 1024;

/// One text field of the settings.
pub(crate) struct SettingField {
    name: &'static str,
    label: &'static str,
    unit: &'static str,
    value: String,
    error: Option<String>,
}

/// One model's row in the models table.
pub(crate) struct ModelRow {
    model: String,
    log_mbh: String,
    err_stat: String,
    upsilon: String,
    scatter: String,
    log_l: String,
    k: usize,
    aic: String,
    bic: String,
}

/// One residual row.
pub(crate) struct ResidualRow {
    line: u64,
    offset_pc: String,
    v: String,
    err: String,
    point: String,
    extended: String,
}

/// The result, display-ready.
pub(crate) struct ResultView {
    mass_words: &'static str,
    log_mbh: String,
    err_stat: String,
    err_inclination: String,
    err_distance: String,
    err_total: String,
    mass_linear: String,
    adopted_model: String,
    posterior: Option<String>,
    posterior_note: Option<String>,
    models: Vec<ModelRow>,
    comparison: Option<String>,
    comparison_numbers: Option<String>,
    slope: String,
    n_points: usize,
    n_systemic: usize,
    v_sys: String,
    centre: String,
    innermost_pc: String,
    innermost_arcsec: String,
    density: String,
    soi: Option<(String, String, Badge, String)>,
    soi_note: &'static str,
    maser: Option<String>,
    maser_note: Option<String>,
    residuals: Vec<ResidualRow>,
    has_extended: bool,
    chart: String,
    submit_href: String,
}

/// `/kinematics`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/kinematics.html")]
pub(crate) struct KinematicsPage {
    nav: super::Nav,
    table: String,
    units: Vec<(&'static str, &'static str, bool)>,
    fields: Vec<SettingField>,
    examples: Vec<(&'static str, &'static str)>,
    example_note: Option<&'static str>,
    summary: Option<String>,
    row_faults: Vec<String>,
    result: Option<ResultView>,
}

/// The settings fields with their labels and units.
const FIELDS: [(&str, &str, &str); 14] = [
    ("distance_mpc", "Distance", "Mpc"),
    ("distance_err_mpc", "Distance error", "Mpc, 1σ"),
    (
        "inclination_deg",
        "Inclination",
        "degrees, 90 edge-on; or “unknown”",
    ),
    ("inclination_err_deg", "Inclination error", "degrees, 1σ"),
    ("plummer_l_lsun", "Stars, Plummer: total luminosity", "L☉"),
    ("plummer_a_pc", "Stars, Plummer: scale radius a", "pc"),
    (
        "power_l_ref_lsun",
        "Stars, power law: light inside r_ref",
        "L☉",
    ),
    ("power_r_ref_pc", "Stars, power law: r_ref", "pc"),
    ("power_slope", "Stars, power law: slope of L(<r)", "0–3"),
    (
        "upsilon",
        "Mass-to-light ratio Υ",
        "M☉/L☉; “free” to fit it",
    ),
    ("cluster_r_c_pc", "Dark cluster: radius r_c", "pc"),
    ("sigma_km_s", "Velocity dispersion σ", "km/s"),
    ("resolution_arcsec", "Resolution of the data", "arcsec"),
    (
        "soi_threshold",
        "Sphere-of-influence threshold θ_infl / resolution",
        "default 1",
    ),
];

fn page(
    nav: super::Nav,
    table: String,
    pairs: &[(String, String)],
    fault: Option<&KinematicsFault>,
) -> KinematicsPage {
    let get = |name: &str| {
        pairs
            .iter()
            .rev()
            .find(|(k, _)| k == name)
            .map(|(_, v)| v.clone())
            .unwrap_or_default()
    };
    let errors = match fault {
        Some(KinematicsFault::Settings(f)) => f.clone(),
        _ => Vec::new(),
    };
    let unit = get("offset_unit");
    KinematicsPage {
        nav,
        table,
        units: std::iter::once(("", "named in the header"))
            .chain(OffsetUnit::ALL.iter().map(|u| (u.as_str(), u.label())))
            .map(|(v, l)| (v, l, v == unit))
            .collect(),
        fields: FIELDS
            .iter()
            .map(|(name, label, unit)| SettingField {
                name,
                label,
                unit,
                value: get(name),
                error: errors
                    .iter()
                    .find(|e| e.field == *name)
                    .map(|e| e.message.clone()),
            })
            .collect(),
        examples: EXAMPLES.iter().map(|e| (e.slug, e.label)).collect(),
        example_note: None,
        summary: fault.map(KinematicsFault::summary),
        row_faults: match fault {
            Some(f @ KinematicsFault::Table(_)) => {
                f.fields().into_iter().map(|e| e.message).collect()
            }
            Some(KinematicsFault::Fit(why)) => vec![why.clone()],
            _ => Vec::new(),
        },
        result: None,
    }
}

/// Show the form, empty or filled with a demo table (`?example=maser` or `gas`).
pub(crate) async fn show_kinematics(
    token: FormToken,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<Response> {
    let mut nav = nav;
    nav.csrf.clone_from(&token.csrf);
    Ok(token.respond(form_page(nav, query)?.into_response()))
}

/// The form, empty or filled with the example the address asks for.
fn form_page(
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<KinematicsPage> {
    let Query(pairs) = query.map_err(|e| AppError::bad_request(e.body_text()))?;
    let asked = pairs.iter().find(|(k, _)| k == "example").map(|(_, v)| v);
    if let Some((k, _)) = pairs.iter().find(|(k, _)| k != "example") {
        return Err(AppError::bad_request(format!(
            "“{}” is not a parameter of this page; it takes example=maser or example=gas.",
            k.chars().take(40).collect::<String>()
        )));
    }
    let Some(slug) = asked else {
        return Ok(page(nav, String::new(), &[], None));
    };
    let e = example(slug).ok_or_else(|| {
        AppError::bad_request("The example is maser or gas (example=maser or example=gas).")
    })?;
    let mut p = page(nav, e.table.to_owned(), &e.pairs(), None);
    p.example_note = Some(e.label);
    Ok(p)
}

/// The form's fields and the table (the uploaded file when one was chosen, else the pasted
/// text), from `multipart/form-data` or a URL-encoded body.
async fn read_form(
    state: &AppState,
    request: axum::extract::Request,
) -> AppResult<(String, Vec<(String, String)>)> {
    use axum::extract::Multipart;
    let multipart = request
        .headers()
        .get(axum::http::header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.to_ascii_lowercase().starts_with("multipart/form-data"));
    let too_large = |status: StatusCode, what: String| {
        if status == StatusCode::PAYLOAD_TOO_LARGE {
            AppError::BodyTooLarge { limit_bytes: None }
        } else {
            AppError::bad_request(what)
        }
    };
    let mut pairs = Vec::new();
    let mut file = None;
    if multipart {
        let mut parts = Multipart::from_request(request, state)
            .await
            .map_err(|e| AppError::bad_request(format!("The form could not be read: {e}.")))?;
        while let Some(field) = parts
            .next_field()
            .await
            .map_err(|e| too_large(e.status(), format!("The form could not be read: {e}.")))?
        {
            let name = field.name().unwrap_or_default().to_owned();
            let bytes = field
                .bytes()
                .await
                .map_err(|e| too_large(e.status(), format!("The form could not be read: {e}.")))?;
            let text = String::from_utf8(bytes.to_vec()).map_err(|_| {
                AppError::bad_request(
                    "The file is not UTF-8 text; save the table as UTF-8 CSV and upload it again.",
                )
            })?;
            if name == "file" {
                if !text.trim().is_empty() {
                    file = Some(text);
                }
            } else {
                pairs.push((name, text));
            }
        }
    } else {
        let axum::Form(form) = axum::Form::<Vec<(String, String)>>::from_request(request, state)
            .await
            .map_err(|e| too_large(e.status(), format!("The form could not be read: {e}.")))?;
        pairs = form;
    }
    let pasted = pairs
        .iter()
        .find(|(k, _)| k == "table")
        .map(|(_, v)| v.clone())
        .unwrap_or_default();
    pairs.retain(|(k, _)| SETTING_NAMES.contains(&k.as_str()));
    Ok((file.unwrap_or(pasted), pairs))
}

/// Fit the table sent and show the result, or the form again with every fault named (400).
pub(crate) async fn fit_kinematics(
    State(state): State<AppState>,
    token: FormToken,
    nav: super::Nav,
    request: axum::extract::Request,
) -> AppResult<Response> {
    // A visitor without a session on a `--public-read` server posts with the login form's
    // token, as on /planning; the page it gets back carries it again.
    let mut nav = nav;
    nav.csrf.clone_from(&token.csrf);
    let response = fit_and_show(&state, nav, request).await?;
    Ok(token.respond(response))
}

/// Fits the posted table and draws the page (see [`fit_kinematics`]).
async fn fit_and_show(
    state: &AppState,
    nav: super::Nav,
    request: axum::extract::Request,
) -> AppResult<Response> {
    let (table, pairs) = read_form(state, request).await?;
    let threshold = state.settings.soi_threshold;
    let (text, asked) = (table.clone(), pairs.clone());
    let outcome = fit_table_queued(text, asked, threshold).await?;
    match outcome {
        Ok(o) => {
            let mut p = page(nav, table, &pairs, None);
            p.result = Some(ResultView::of(&o)?);
            Ok(p.into_response())
        }
        Err(fault) => Ok((
            StatusCode::BAD_REQUEST,
            page(nav, table, &pairs, Some(&fault)),
        )
            .into_response()),
    }
}

/// The address of the submission form filled with the mass.
fn submit_href(r: &KinematicsResult) -> String {
    let p = &r.prefill;
    let mut query = vec![
        ("m0_quantity", "bh_mass".to_owned()),
        ("m0_value", p.value.clone()),
        ("m0_method_bh", p.method.clone()),
        ("m0_source_distance_mpc", format!("{}", p.distance_mpc)),
        ("m0_note", p.note.clone()),
    ];
    if let Some(res) = p.resolution_arcsec {
        query.push(("m0_resolution_arcsec", format!("{res}")));
    }
    let encoded = serde_urlencoded::to_string(&query).unwrap_or_default();
    format!("/submissions/new?{encoded}")
}

/// A value in dex with three decimals.
fn dex(v: f64) -> String {
    fixed(v, 3)
}

/// An error in dex to two significant digits (a maser's statistical error can be 0.0004).
fn err_dex(v: f64) -> String {
    significant(v, 2)
}

impl ResultView {
    fn of(o: &KinematicsOutcome) -> AppResult<Self> {
        let r = &o.result;
        let model_row = |m: &crate::relations::kinematics::ModelFit| ModelRow {
            model: m.model.clone(),
            log_mbh: dex(m.log_mbh),
            err_stat: err_dex(m.log_mbh_err_stat_dex),
            upsilon: m.upsilon.map_or_else(
                || "—".to_owned(),
                |(u, e)| format!("{} ± {}", significant(u, 3), significant(e, 2)),
            ),
            scatter: format!(
                "{} ± {}",
                fixed(m.scatter_km_s.0, 1),
                fixed(m.scatter_km_s.1, 1)
            ),
            log_l: fixed(m.max_log_likelihood, 2),
            k: m.n_params,
            aic: fixed(m.aic, 2),
            bic: fixed(m.bic, 2),
        };
        let mut models = vec![model_row(&r.point_mass)];
        models.extend(r.extended.as_ref().map(model_row));
        let residuals = r
            .points
            .iter()
            .enumerate()
            .map(|(i, p)| ResidualRow {
                line: p.line,
                offset_pc: significant(p.offset_pc, 4),
                v: fixed(p.v_km_s, 1),
                err: fixed(p.v_err_km_s, 1),
                point: r
                    .point_mass
                    .residuals_km_s
                    .get(i)
                    .map_or_else(String::new, |v| fixed(*v, 1)),
                extended: r
                    .extended
                    .as_ref()
                    .and_then(|e| e.residuals_km_s.get(i))
                    .map_or_else(String::new, |v| fixed(*v, 1)),
            })
            .collect();
        let adopted = r.extended.as_ref().filter(|e| e.model == r.adopted_model);
        let quoted = adopted.unwrap_or(&r.point_mass);
        Ok(ResultView {
            mass_words: if r.mass_is_m_sin2i {
                "log (M_BH sin² i)"
            } else {
                "log M_BH"
            },
            log_mbh: dex(r.log_mbh),
            err_stat: err_dex(r.log_mbh_err_stat_dex),
            err_inclination: err_dex(r.log_mbh_err_inclination_dex),
            err_distance: err_dex(r.log_mbh_err_distance_dex),
            err_total: err_dex(r.log_mbh_err_total_dex),
            mass_linear: scientific(10f64.powf(r.log_mbh)),
            adopted_model: r.adopted_model.clone(),
            posterior: r.posterior.as_ref().map(|p| {
                format!(
                    "median {}, 68 % interval {} to {}{}",
                    dex(p.median_log_mbh),
                    dex(p.low_log_mbh),
                    dex(p.high_log_mbh),
                    p.warning
                        .as_ref()
                        .map_or_else(String::new, |w| format!(" ({w})"))
                )
            }),
            posterior_note: r.posterior_note.clone(),
            models,
            comparison: r.comparison.as_ref().map(|c| c.words.clone()),
            comparison_numbers: r.comparison.as_ref().map(|c| {
                format!(
                    "ΔAIC = {}, ΔBIC = {} (extended − point mass; negative favours the extended mass); likelihood ratio {} on {} extra parameter(s){}",
                    fixed(c.delta_aic, 1),
                    fixed(c.delta_bic, 1),
                    fixed(c.lrt_statistic, 2),
                    c.lrt_df,
                    c.lrt_p
                        .map_or_else(String::new, |p| format!(", p = {}", probability(p)))
                )
            }),
            slope: r.slope.as_ref().map_or_else(
                || r.slope_note.clone().unwrap_or_default(),
                |s| s.words.clone(),
            ),
            n_points: r.n_points,
            n_systemic: r.n_systemic,
            v_sys: format!(
                "{} ± {}",
                fixed(quoted.v_sys_km_s.0, 1),
                fixed(quoted.v_sys_km_s.1, 1)
            ),
            centre: format!(
                "{} ± {}",
                significant(quoted.centre_pc.0, 3),
                significant(quoted.centre_pc.1, 2)
            ),
            innermost_pc: significant(r.innermost_radius_pc, 3),
            innermost_arcsec: significant(r.innermost_radius_arcsec, 3),
            density: scientific(r.minimum_density_msun_pc3),
            soi: r.influence.as_ref().map(|i| {
                (
                    significant(i.r_infl_pc, 3),
                    significant(i.theta_infl_arcsec, 3),
                    soi_badge(Some(i.resolved), ""),
                    i.basis.clone(),
                )
            }),
            soi_note: "Give σ to check the sphere of influence.",
            maser: r.maser_distance.as_ref().map(|m| m.words.clone()),
            maser_note: r.maser_note.clone(),
            residuals,
            has_extended: r.extended.is_some(),
            chart: chart(o)?,
            submit_href: submit_href(r),
        })
    }
}

/// The chart of a fit: points, both model curves, centre, v_sys and residuals of the quoted
/// model.
fn chart(o: &KinematicsOutcome) -> AppResult<String> {
    let r = &o.result;
    let (lo, hi) = r
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
            (lo.min(p.offset_pc), hi.max(p.offset_pc))
        });
    let xs: Vec<f64> = (0..=400)
        .map(|k| lo + (hi - lo) * f64::from(k) / 400.0)
        .collect();
    let (point, extended) = o.curves(&xs);
    let mut curves = vec![DiskCurve {
        label: r.point_mass.model.clone(),
        samples: xs.iter().copied().zip(point).collect(),
        dashed: false,
    }];
    if let (Some(e), Some(m)) = (extended, &r.extended) {
        curves.push(DiskCurve {
            label: m.model.clone(),
            samples: xs.iter().copied().zip(e).collect(),
            dashed: true,
        });
    }
    let quoted = r
        .extended
        .as_ref()
        .filter(|e| e.model == r.adopted_model)
        .unwrap_or(&r.point_mass);
    let points = r
        .points
        .iter()
        .zip(&quoted.residuals_km_s)
        .map(|(p, res)| DiskChartPoint {
            x_pc: p.offset_pc,
            v_km_s: p.v_km_s,
            err_km_s: p.v_err_km_s,
            residual_km_s: *res,
        })
        .collect();
    kinematics_svg(&DiskChart {
        title: "Line-of-sight velocity along the disk's major axis with the fitted models."
            .to_owned(),
        points,
        curves,
        centre_pc: quoted.centre_pc.0,
        v_sys_km_s: quoted.v_sys_km_s.0,
        residual_model: quoted.model.clone(),
    })
    .map_err(|e| AppError::Internal(anyhow::anyhow!("disk chart: {e}")))
}
