//! The catalog table (`/galaxies`) and one galaxy's page (`/galaxies/{slug}`).

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Extension, Path, Query, State};

use super::display::{
    Badge, Uncertain, VersionNote, fixed, quantity_unit, significant, soi_badge, with_errors,
    with_errors_column,
};
use crate::auth::Principal;
use crate::catalog::model::{BulgeKind, MassMethod, Morphology};
use crate::error::{AppError, AppResult};
use crate::relations::galaxy::{MeasurementAt, galaxy_record_at, place_left_out};
use crate::relations::table::{LimitFilter, SoiFilter, SortKey, TableQuery, TableRow, table_page};
use crate::state::AppState;
use crate::units::Quantity;

/// One displayed row.
pub(crate) struct RowView {
    name: String,
    slug: String,
    morphology: String,
    bulge_kind: String,
    log_mbh: String,
    mbh_method: String,
    sigma: String,
    log_mbulge: String,
    distance: String,
    soi: &'static str,
}

/// A sortable column header.
pub(crate) struct HeaderView {
    label: &'static str,
    unit: &'static str,
    href: String,
    /// "ascending", "descending" or "none" (for aria-sort).
    aria_sort: &'static str,
}

/// A select's option.
pub(crate) struct OptionView {
    value: &'static str,
    label: &'static str,
    selected: bool,
}

/// `/galaxies`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/galaxies_list.html")]
pub(crate) struct GalaxiesListPage {
    nav: super::Nav,
    headers: Vec<HeaderView>,
    rows: Vec<RowView>,
    total: usize,
    first_shown: usize,
    last_shown: usize,
    page: usize,
    pages: usize,
    prev_href: Option<String>,
    next_href: Option<String>,
    filters: Filters,
    /// The name search as typed (`q`), empty for none.
    search: String,
    sort: &'static str,
    dir: &'static str,
    soi_threshold: String,
    /// The catalog version named in the address, if any.
    version_note: Option<VersionNote>,
    /// `?version=N` for links of a named version, else empty.
    gq: String,
}

/// Show the catalog table.
pub(crate) async fn list_galaxies(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<GalaxiesListPage> {
    let (catalog, pinned, ask, pairs) = super::relations::versioned(&state, query).await?;
    let q = TableQuery::parse(&pairs).map_err(AppError::bad_request)?;
    let threshold = state.settings.soi_threshold;
    let (page_rows, total) = table_page(&catalog, &q).await?;
    let made_at = crate::catalog::history::made_at(&state.pool, pinned.version).await?;
    let version_note = VersionNote::of(
        &pinned,
        &ask,
        made_at.as_deref(),
        format!("/galaxies?{}", q.to_query_string()),
    );
    let gq = VersionNote::suffix(version_note.as_ref(), '?');
    let vq = VersionNote::suffix(version_note.as_ref(), '&');
    let pages = total.div_ceil(q.per_page).max(1);
    if q.page > pages {
        return Err(AppError::bad_request(format!(
            "Parameter 'page': there are only {pages} page(s) for this selection."
        )));
    }
    let rows = row_views(&page_rows);
    let first_shown = if total == 0 {
        0
    } else {
        (q.page - 1) * q.per_page + 1
    };
    Ok(GalaxiesListPage {
        nav,
        headers: headers(&q, &vq),
        rows,
        total,
        first_shown,
        last_shown: (first_shown + page_rows.len()).saturating_sub(1),
        page: q.page,
        pages,
        prev_href: (q.page > 1).then(|| link(&q, &vq, |n| n.page -= 1)),
        next_href: (q.page < pages).then(|| link(&q, &vq, |n| n.page += 1)),
        filters: Filters::of(&q),
        search: q.name.clone().unwrap_or_default(),
        sort: q.sort.as_str(),
        dir: if q.descending { "desc" } else { "asc" },
        soi_threshold: significant(threshold, 2),
        version_note,
        gq,
    })
}

/// The table's address for `q` changed by `change`, with `vq` (`&version=N` or empty).
fn link(q: &TableQuery, vq: &str, change: impl FnOnce(&mut TableQuery)) -> String {
    let mut next = q.clone();
    change(&mut next);
    format!("/galaxies?{}{vq}", next.to_query_string())
}

/// The column headers, each a link that sorts by it (again: the other way).
fn headers(q: &TableQuery, vq: &str) -> Vec<HeaderView> {
    let header = |label, unit, key: SortKey| {
        let active = q.sort == key;
        HeaderView {
            label,
            unit,
            href: link(q, vq, |n| {
                n.sort = key;
                n.descending = active && !q.descending;
                n.page = 1;
            }),
            aria_sort: match (active, q.descending) {
                (false, _) => "none",
                (true, false) => "ascending",
                (true, true) => "descending",
            },
        }
    };
    vec![
        header("Galaxy", "", SortKey::Name),
        header("Morphology", "", SortKey::Morphology),
        header("log M_BH", "M☉, at adopted D", SortKey::LogMbh),
        header("Method", "", SortKey::Method),
        header("σ", "km/s", SortKey::Sigma),
        header("log M_bulge", "M☉, at adopted D", SortKey::LogMbulge),
        header("Distance", "Mpc", SortKey::Distance),
    ]
}

/// The filter form's menus.
pub(crate) struct Filters {
    morphology_options: Vec<OptionView>,
    bulge_options: Vec<OptionView>,
    method_options: Vec<OptionView>,
    limit_options: Vec<OptionView>,
    soi_options: Vec<OptionView>,
}

impl Filters {
    fn of(q: &TableQuery) -> Self {
        Filters {
            morphology_options: options(
                Morphology::pairs().into_iter(),
                q.morphology.map(Morphology::as_str),
            ),
            bulge_options: options(
                BulgeKind::pairs().into_iter(),
                q.bulge_kind.map(BulgeKind::as_str),
            ),
            method_options: options(
                MassMethod::pairs().into_iter(),
                q.method.map(MassMethod::as_str),
            ),
            limit_options: options(
                [
                    ("detections", "detections only"),
                    ("limits", "upper limits only"),
                ]
                .into_iter(),
                match q.limits {
                    LimitFilter::All => None,
                    LimitFilter::Detections => Some("detections"),
                    LimitFilter::Limits => Some("limits"),
                },
            ),
            soi_options: options(
                [("resolved", "resolved"), ("unresolved", "not resolved")].into_iter(),
                match q.soi {
                    SoiFilter::All => None,
                    SoiFilter::Resolved => Some("resolved"),
                    SoiFilter::Unresolved => Some("unresolved"),
                },
            ),
        }
    }
}

fn options(
    items: impl Iterator<Item = (&'static str, &'static str)>,
    selected: Option<&'static str>,
) -> Vec<OptionView> {
    items
        .map(|(value, label)| OptionView {
            value,
            label,
            selected: selected == Some(value),
        })
        .collect()
}

/// A missing value: shown as "—".
const MISSING: Uncertain = Uncertain {
    value: f64::NAN,
    err_minus: 0.0,
    err_plus: 0.0,
    upper_limit: false,
};

/// The table's four columns of values with errors (log M_BH, σ, log M_bulge, distance) for one
/// row, in their units.
fn value_cells(t: &TableRow) -> [Uncertain; 4] {
    let r = &t.row;
    let log_mbh = match (t.log_mbh_adopted_d, r.mbh_upper_limit) {
        (Some(v), Some(limit)) => Uncertain::asymmetric(
            v,
            r.mbh_err_minus_dex.unwrap_or(0.0),
            r.mbh_err_plus_dex.unwrap_or(0.0),
            limit,
        ),
        _ => MISSING,
    };
    let sigma = match (r.log_sigma, r.sigma_err_dex) {
        (Some(ls), Some(e)) => {
            let s = 10f64.powf(ls);
            // A dex error e maps to the linear half-width s·(10^e − 10^−e)/2.
            Uncertain::symmetric(s, s * (10f64.powf(e) - 10f64.powf(-e)) / 2.0)
        }
        _ => MISSING,
    };
    let log_mbulge = match (t.log_mbulge_adopted_d, r.mbulge_err_dex) {
        (Some(v), Some(e)) => Uncertain::symmetric(v, e),
        _ => MISSING,
    };
    [
        log_mbh,
        sigma,
        log_mbulge,
        Uncertain::symmetric(r.distance_mpc, r.distance_err_mpc),
    ]
}

/// The rows of one page of the table, each column's numbers written alike
/// ([`with_errors_column`]).
fn row_views(rows: &[TableRow]) -> Vec<RowView> {
    let cells: Vec<[Uncertain; 4]> = rows.iter().map(value_cells).collect();
    // Bare values: logs to 0.01 dex, σ to 1 km/s, distances to 0.1 Mpc.
    let mut columns = [(0, 2), (1, 0), (2, 2), (3, 1)].map(|(k, bare)| {
        let items: Vec<Uncertain> = cells.iter().map(|c| c[k]).collect();
        with_errors_column(&items, bare).into_iter()
    });
    rows.iter()
        .map(|t| {
            let mut next = |k: usize| columns[k].next().unwrap_or_default();
            let shown = [next(0), next(1), next(2), next(3)];
            row_view(t, shown)
        })
        .collect()
}

fn row_view(t: &TableRow, shown: [String; 4]) -> RowView {
    let r = &t.row;
    let [log_mbh, sigma, log_mbulge, distance] = shown;
    RowView {
        name: r.name.clone(),
        slug: r.slug.clone(),
        morphology: r
            .morphology
            .parse::<Morphology>()
            .map_or("—", Morphology::label)
            .to_string(),
        bulge_kind: r
            .bulge_kind
            .parse::<BulgeKind>()
            .map_or("—", BulgeKind::label)
            .to_string(),
        log_mbh,
        mbh_method: r
            .mbh_method
            .as_deref()
            .and_then(|m| m.parse::<MassMethod>().ok())
            .map_or("—", MassMethod::label)
            .to_string(),
        sigma,
        log_mbulge,
        distance,
        soi: match t.resolved {
            Some(true) => "resolved",
            Some(false) => "not resolved",
            None => "—",
        },
    }
}

/// One measurement on the galaxy page.
pub(crate) struct MeasurementView {
    quantity: &'static str,
    value_text: String,
    canonical: String,
    unit: String,
    at_adopted_distance: String,
    method: String,
    detail: String,
    reference: String,
    source_distance: String,
    state: String,
    adopted: bool,
    note: String,
    soi: Option<SoiView>,
    virial: Option<VirialView>,
}

/// What lies behind a reverberation or single-epoch mass on the galaxy page.
pub(crate) struct VirialView {
    line: String,
    lag: Option<String>,
    width: Option<String>,
    l5100: Option<String>,
    product: Option<String>,
    assumed: String,
    applied: String,
    shown: String,
    sentence: String,
    single_epoch: Option<String>,
}

impl VirialView {
    /// Everything in one line, for the submission and review pages' measurement tables.
    pub(crate) fn summary(d: &crate::relations::agn::VirialDetail) -> String {
        let v = Self::of(d);
        let mut parts = vec![v.line];
        parts.extend(v.lag.map(|l| format!("lag {l}")));
        parts.extend(v.width);
        parts.extend(v.l5100.map(|l| format!("log λL(5100 Å) = {l} [erg/s]")));
        parts.extend(v.product.map(|p| format!("log VP = {p} [M☉]")));
        parts.push(format!("log M shown = {} [M☉]: {}", v.shown, v.sentence));
        parts.extend(v.single_epoch);
        parts.join("; ")
    }

    fn of(d: &crate::relations::agn::VirialDetail) -> Self {
        let log_f = |v: Option<f64>, none: &str| {
            v.map_or(none.to_owned(), |l| {
                format!(
                    "f = {} (log f = {})",
                    significant(10f64.powf(l), 3),
                    fixed(l, 2)
                )
            })
        };
        VirialView {
            line: d.line.clone(),
            lag: d.lag_days.map(|(l, minus, plus)| {
                let e = if minus == 0.0 && plus == 0.0 {
                    String::new()
                } else if minus.to_bits() == plus.to_bits() {
                    format!(" ± {}", significant(minus, 2))
                } else {
                    format!(" +{}/−{}", significant(plus, 2), significant(minus, 2))
                };
                format!("{}{e} d (rest frame)", significant(l, 3))
            }),
            width: d.width_km_s.map(|(w, e)| {
                let e = if e > 0.0 {
                    format!(" ± {}", significant(e, 2))
                } else {
                    String::new()
                };
                format!(
                    "{} {}{e} km/s, {}",
                    d.width_definition.label(),
                    fixed(w, 0),
                    d.width_spectrum.label()
                )
            }),
            l5100: d.log_l5100_erg_s.map(|l| fixed(l, 2)),
            product: d.log_virial_product.map(|p| fixed(p, 2)),
            assumed: log_f(d.assumed_log_f, "not recorded"),
            applied: log_f(d.applied_log_f, "none (not rescaled)"),
            shown: fixed(d.log_mass_shown, 2),
            sentence: d.factor_sentence(),
            single_epoch: d.single_epoch_flag(),
        }
    }
}

/// The sphere-of-influence check of one black-hole mass.
pub(crate) struct SoiView {
    radius_pc: String,
    theta_arcsec: String,
    resolution_arcsec: String,
    ratio: String,
    verdict: Badge,
}

/// `/galaxies/{slug}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/galaxy_show.html")]
pub(crate) struct GalaxyShowPage {
    nav: super::Nav,
    /// The catalog version named in the address, if any.
    version_note: Option<VersionNote>,
    /// Said while a fit without the galaxy is still being computed.
    computing: Option<String>,
    /// Said when a fit without the galaxy is the one-step approximation.
    approximate: Option<String>,
    outside_default: Option<String>,
    name: String,
    morphology: &'static str,
    bulge_kind: &'static str,
    centre_kind: &'static str,
    distance: String,
    distance_method: &'static str,
    /// The nucleus' activity class, in words.
    activity: &'static str,
    /// The Eddington quantities, when the galaxy has a mass and a λL(5100 Å).
    eddington: Option<super::place::EddingtonView>,
    /// M_BH/M_bulge, when the galaxy has both masses.
    bulge_ratio: Option<super::place::BulgeRatioView>,
    /// The activity form, for reviewers and admins.
    activity_form: Option<ActivityForm>,
    measurements: Vec<MeasurementView>,
    soi_threshold: String,
    /// The galaxy against each relation it has values for, fitted without it.
    rows: Vec<super::place::PlaceRow>,
    /// The relation charts with the galaxy highlighted.
    charts: Vec<super::place::PlaceChart>,
    /// Why no relation applies, when none does.
    no_relation: Option<String>,
    /// Reviewers' decisions on submissions that measured it, newest first (reviewer names
    /// stay off this page, which may be public).
    reviews: Vec<ReviewView>,
    /// The galaxy's URL form.
    slug: String,
    /// The distance form, for reviewers and admins.
    distance_form: Option<DistanceForm>,
    /// Said to the person who just changed the distance.
    flash: Option<String>,
}

/// The distance form as shown: what was typed, the methods, and what is wrong with each field.
#[derive(Default)]
pub(crate) struct DistanceForm {
    csrf: String,
    distance_mpc: String,
    distance_err_mpc: String,
    /// (value, label, selected).
    methods: Vec<(&'static str, &'static str, bool)>,
    note: String,
    /// (field, sentence).
    errors: Vec<(String, String)>,
}

impl DistanceForm {
    /// The error of `field`, if any.
    fn error(&self, field: &str) -> Option<&str> {
        self.errors
            .iter()
            .find(|(f, _)| f == field)
            .map(|(_, m)| m.as_str())
    }

    /// A form for `method` selected (the stored word).
    fn with_method(mut self, method: &str) -> Self {
        self.methods = crate::catalog::model::DistanceMethod::pairs()
            .into_iter()
            .map(|(value, label)| (value, label, value == method))
            .collect();
        self
    }
}

/// The activity form as shown: the classes with the stored one selected.
pub(crate) struct ActivityForm {
    csrf: String,
    /// (value, label, selected).
    classes: Vec<(&'static str, &'static str, bool)>,
    error: Option<String>,
}

impl ActivityForm {
    fn new(csrf: &str, selected: &str, error: Option<String>) -> Self {
        ActivityForm {
            csrf: csrf.to_owned(),
            classes: crate::catalog::model::Activity::pairs()
                .into_iter()
                .map(|(value, label)| (value, label, value == selected))
                .collect(),
            error,
        }
    }
}

/// The activity form's fields.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct ActivityFields {
    #[serde(default)]
    activity: String,
    #[serde(default)]
    note: String,
}

/// Change a galaxy's activity class (reviewers and admins): a new catalog version, then back to
/// the galaxy's page. The class already stored changes nothing (no version). A word that is not
/// a class, or a note over 500 characters, is named beside the form (400).
pub(crate) async fn change_activity(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    Path(slug): Path<String>,
    axum::Form(fields): axum::Form<ActivityFields>,
) -> AppResult<axum::response::Response> {
    use axum::response::IntoResponse;
    let me = super::account::session_of(&principal)?;
    let galaxy = galaxy_to_change(&state, &slug).await?;
    let read = fields
        .activity
        .trim()
        .parse::<crate::catalog::model::Activity>()
        .map_err(|e| format!("Activity class: {e}"));
    let read = read.and_then(|a| note_problem(&fields.note).map_or(Ok(a), Err));
    match read {
        Ok(a) if a.as_str() == galaxy.activity => {
            Ok(axum::response::Redirect::to(&format!("/galaxies/{slug}#activity")).into_response())
        }
        Ok(a) => {
            let version = crate::catalog::galaxies::change_activity(
                &state.pool,
                Some(me.account_id),
                galaxy.galaxy_id,
                a,
                &fields.note,
            )
            .await?
            .ok_or_else(|| AppError::not_found(format!("The galaxy '{slug}'")))?;
            Ok(axum::response::Redirect::to(&format!(
                "/galaxies/{slug}?activity_changed={version}#activity"
            ))
            .into_response())
        }
        Err(message) => {
            let form = ActivityForm::new(&me.csrf_token, fields.activity.trim(), Some(message));
            let mut page =
                galaxy_page(&state, &principal, nav, &slug, Vec::new(), None, None).await?;
            page.activity_form = Some(form);
            Ok((axum::http::StatusCode::BAD_REQUEST, page).into_response())
        }
    }
}

/// The galaxy a reviewer's change form (distance, activity class) names.
async fn galaxy_to_change(
    state: &AppState,
    slug: &str,
) -> AppResult<crate::catalog::model::Galaxy> {
    crate::catalog::galaxies::find_by_slug(&state.pool, slug)
        .await?
        .ok_or_else(|| AppError::not_found(format!("The galaxy '{slug}'")))
}

/// What is wrong with the note of a change form, if anything: at most
/// [`DISTANCE_NOTE_MAX`] characters.
fn note_problem(note: &str) -> Option<String> {
    let chars = note.trim().chars().count();
    (chars > DISTANCE_NOTE_MAX)
        .then(|| format!("Note: at most {DISTANCE_NOTE_MAX} characters; this one has {chars}."))
}

/// Longest note of a distance or activity change (the audit sentence keeps 500 characters).
const DISTANCE_NOTE_MAX: usize = 500;

/// The distance form's fields.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct DistanceFields {
    #[serde(default)]
    distance_mpc: String,
    #[serde(default)]
    distance_err_mpc: String,
    #[serde(default)]
    distance_method: String,
    #[serde(default)]
    note: String,
}

/// Adopt a new distance for a galaxy (reviewers and admins): a new catalog version, then back
/// to the galaxy's page, which names it. A field at fault is named beside it (400).
pub(crate) async fn change_distance(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    Path(slug): Path<String>,
    axum::Form(fields): axum::Form<DistanceFields>,
) -> AppResult<axum::response::Response> {
    use axum::response::IntoResponse;
    let me = super::account::session_of(&principal)?;
    let galaxy = galaxy_to_change(&state, &slug).await?;
    let cell = |c: &'static str| match c {
        "distance_mpc" => fields.distance_mpc.as_str(),
        "distance_err_mpc" => fields.distance_err_mpc.as_str(),
        "distance_method" => fields.distance_method.as_str(),
        _ => "",
    };
    let read = crate::catalog::intake::distance_from_cells(&cell);
    let mut errors: Vec<(String, String)> = match &read {
        Ok(_) => Vec::new(),
        Err(faults) => faults
            .iter()
            .map(|f| {
                (
                    f.column.to_owned(),
                    crate::catalog::intake::sentence(&format!(
                        "{}: {}",
                        field_label(f.column),
                        f.message
                    )),
                )
            })
            .collect(),
    };
    // The same numbers as stored, bit for bit: a change nobody could see is refused.
    if let Ok(new) = &read
        && new.distance_mpc.to_bits() == galaxy.distance_mpc.to_bits()
        && new.distance_err_mpc.to_bits() == galaxy.distance_err_mpc.to_bits()
        && new.distance_method == galaxy.distance_method
    {
        errors.push((
            "distance_mpc".into(),
            "Distance: this is the distance already adopted; change the distance, its error or its method.".into(),
        ));
    }
    if let Some(problem) = note_problem(&fields.note) {
        errors.push(("note".into(), problem));
    }
    match read {
        Ok(new) if errors.is_empty() => {
            let version = crate::catalog::galaxies::change_distance(
                &state.pool,
                Some(me.account_id),
                galaxy.galaxy_id,
                &new,
                &fields.note,
            )
            .await?
            .ok_or_else(|| AppError::not_found(format!("The galaxy '{slug}'")))?;
            Ok(axum::response::Redirect::to(&format!(
                "/galaxies/{slug}?distance_changed={version}#distance"
            ))
            .into_response())
        }
        _ => {
            let form = DistanceForm {
                csrf: me.csrf_token.clone(),
                distance_mpc: fields.distance_mpc.clone(),
                distance_err_mpc: fields.distance_err_mpc.clone(),
                note: fields.note.clone(),
                errors,
                ..DistanceForm::default()
            }
            .with_method(fields.distance_method.trim());
            let page =
                galaxy_page(&state, &principal, nav, &slug, Vec::new(), Some(form), None).await?;
            Ok((axum::http::StatusCode::BAD_REQUEST, page).into_response())
        }
    }
}

/// The distance form's field names in words.
fn field_label(column: &str) -> &'static str {
    match column {
        "distance_mpc" => "Distance",
        "distance_err_mpc" => "Distance error",
        "distance_method" => "Distance method",
        _ => "Note",
    }
}

/// A review decision on the galaxy page: its time as stored (for `<time datetime>`) and as read.
pub(crate) struct ReviewView {
    submission_id: i64,
    decision: String,
    note: String,
    created_iso: String,
    created_text: String,
}

/// Show one galaxy with every measurement, and where it falls against each relation fitted
/// without it.
pub(crate) async fn show_galaxy(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: super::Nav,
    Path(slug): Path<String>,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<GalaxyShowPage> {
    let (changed, pairs): (Vec<_>, Vec<_>) = crate::router::query_pairs(query)?
        .into_iter()
        .partition(|(k, _)| k == "distance_changed" || k == "activity_changed");
    // The confirmation is worded from the audit log, and only for the person who made the
    // change, so an address cannot make the page claim something.
    let changed_at = changed
        .first()
        .and_then(|(k, v)| Some((k.as_str(), v.trim().parse::<i64>().ok()?)));
    let flash = match (changed_at, &principal) {
        (Some((what, version)), Principal::Session(s)) => {
            match crate::catalog::galaxies::find_by_slug(&state.pool, &slug).await? {
                Some(g)
                    if what == "distance_changed"
                        && crate::catalog::changes::distance_changed_by(
                            &state.pool,
                            g.galaxy_id,
                            version,
                            s.account_id,
                        )
                        .await? =>
                {
                    Some(format!(
                        "New distance adopted: catalog version {version}. See what changed on /changes?to={version}."
                    ))
                }
                Some(g)
                    if what == "activity_changed"
                        && crate::catalog::galaxies::activity_changed_by(
                            &state.pool,
                            g.galaxy_id,
                            version,
                            s.account_id,
                        )
                        .await? =>
                {
                    Some(format!(
                        "New activity class adopted: catalog version {version}."
                    ))
                }
                _ => None,
            }
        }
        _ => None,
    };
    galaxy_page(&state, &principal, nav, &slug, pairs, None, flash).await
}

/// The galaxy page at the version `pairs` ask for, with the distance form (for reviewers and
/// admins on the current version: as given, or filled with the adopted distance) and a
/// confirmation.
async fn galaxy_page(
    state: &AppState,
    principal: &Principal,
    nav: super::Nav,
    slug: &str,
    pairs: Vec<(String, String)>,
    form: Option<DistanceForm>,
    flash: Option<String>,
) -> AppResult<GalaxyShowPage> {
    use crate::catalog::model::{CentreKind, DistanceMethod};
    let (catalog, pinned, ask, rest) = super::relations::versioned_pairs(state, pairs).await?;
    if let Some((key, _)) = rest.first() {
        return Err(AppError::bad_request(format!(
            "'{}' is not a parameter of this page (it accepts version, release).",
            key.chars().take(40).collect::<String>()
        )));
    }
    let version = pinned.asked.then_some(pinned.version);
    let threshold = state.settings.soi_threshold;
    let record = galaxy_record_at(
        &state.pool,
        threshold,
        slug,
        principal.unreviewed_shown(),
        version,
    )
    .await?
    .ok_or_else(|| match version {
        None => AppError::not_found(format!("The galaxy '{slug}'")),
        Some(v) => AppError::not_found_saying(format!(
            "The galaxy '{slug}' was not in catalog version {v}."
        )),
    })?;
    let galaxy = &record.galaxy;
    let agn = crate::relations::agn::galaxy_agn(&state.pool, &record).await?;
    let activity_form = match principal {
        Principal::Session(s)
            if version.is_none() && s.role.includes(crate::auth::Role::Reviewer) =>
        {
            Some(ActivityForm::new(&s.csrf_token, &galaxy.activity, None))
        }
        _ => None,
    };
    let distance_form = match principal {
        Principal::Session(s)
            if version.is_none() && s.role.includes(crate::auth::Role::Reviewer) =>
        {
            Some(form.unwrap_or_else(|| {
                DistanceForm {
                    csrf: s.csrf_token.clone(),
                    distance_mpc: galaxy.distance_mpc.to_string(),
                    distance_err_mpc: galaxy.distance_err_mpc.to_string(),
                    ..DistanceForm::default()
                }
                .with_method(&galaxy.distance_method)
            }))
        }
        _ => None,
    };
    let left_out = place_left_out(&catalog, galaxy.galaxy_id, Some(super::PAGE_WAIT)).await?;
    let bulge_ratio = crate::relations::bulge_ratio::of_galaxy(&left_out);
    if let Some(r) = &bulge_ratio {
        crate::relations::bulge_ratio::record_fit(&catalog, r).await;
    }
    let made_at = crate::catalog::history::made_at(&state.pool, pinned.version).await?;
    let version_note = VersionNote::of(
        &pinned,
        &ask,
        made_at.as_deref(),
        format!("/galaxies/{}", galaxy.slug),
    );
    // A past version's page is the catalog's record of that version: its adopted values, not
    // the decisions made since.
    let reviews = if version.is_some() {
        Vec::new()
    } else {
        crate::catalog::submissions::reviews_of_galaxy(&state.pool, galaxy.galaxy_id).await?
    };
    let reviews = reviews
        .into_iter()
        .map(|r| ReviewView {
            submission_id: r.submission_id,
            created_text: super::display::readable_utc(&r.created_at),
            created_iso: r.created_at,
            decision: r.decision,
            note: r.note,
        })
        .collect();
    let (rows, charts) = super::place::views(&state.fits, &left_out.placements).await?;
    Ok(GalaxyShowPage {
        nav,
        name: galaxy.name.clone(),
        morphology: galaxy
            .morphology
            .parse::<Morphology>()
            .map_or("unknown", Morphology::label),
        bulge_kind: galaxy
            .bulge_kind
            .parse::<BulgeKind>()
            .map_or("unknown", BulgeKind::label),
        centre_kind: galaxy
            .centre_kind
            .parse::<CentreKind>()
            .map_or("unknown", CentreKind::label),
        distance: with_errors(
            Uncertain::symmetric(galaxy.distance_mpc, galaxy.distance_err_mpc),
            1,
        ),
        distance_method: galaxy
            .distance_method
            .parse::<DistanceMethod>()
            .map_or("other", DistanceMethod::label),
        activity: agn.activity.label(),
        eddington: agn
            .eddington
            .as_ref()
            .map(|e| super::place::EddingtonView::of(e, agn.eddington_basis.clone())),
        bulge_ratio: bulge_ratio.map(|r| {
            super::place::BulgeRatioView::of(&r, "at the adopted distance, as the fits read them")
        }),
        activity_form,
        measurements: record
            .measurements
            .iter()
            .map(|at| {
                let detail = agn
                    .virial
                    .iter()
                    .find(|d| d.measurement_id == at.measurement.measurement_id);
                MeasurementView::of(at, detail)
            })
            .collect(),
        soi_threshold: significant(threshold, 2),
        rows,
        charts,
        no_relation: left_out.none_because,
        computing: (!left_out.computing.is_empty()).then(|| {
            format!(
                "Computing: the fits of {} without this galaxy are under way; this page reloads itself.",
                left_out.computing.join(", ")
            )
        }),
        outside_default: (!left_out.outside_default.is_empty()).then(|| {
            format!(
                "Its black-hole mass is a reverberation or single-epoch mass, which the default fits of {} leave out (a virial mass rests on a virial factor calibrated on the quiescent relation): it is placed against the fit of the dynamical masses, with its mass at the adopted ⟨f⟩.",
                left_out.outside_default.join(", ")
            )
        }),
        approximate: (!left_out.approximate.is_empty()).then(|| {
            format!(
                "For {} (samples of more than {} objects) the fit without this galaxy is the whole sample's fit moved by the galaxy's one-step leave-one-out change, not a refit (docs/methods.md §6).",
                left_out.approximate.join(", "),
                crate::relations::galaxy::LEFT_OUT_REFIT_MAX
            )
        }),
        reviews,
        slug: galaxy.slug.clone(),
        distance_form,
        flash,
        version_note,
    })
}

impl MeasurementView {
    /// One measurement as the galaxy page shows it.
    fn of(at: &MeasurementAt, virial: Option<&crate::relations::agn::VirialDetail>) -> Self {
        let m = &at.measurement;
        let rescaled = at.log_value_at_adopted_distance;
        let soi = at.sphere_of_influence.as_ref().map(|s| SoiView {
            radius_pc: significant(s.radius_pc, 3),
            theta_arcsec: significant(s.theta_arcsec, 3),
            resolution_arcsec: s
                .resolution_arcsec
                .map_or("not recorded".into(), |r| format!("{}″", significant(r, 2))),
            ratio: s.ratio.map_or("—".into(), |r| significant(r, 2)),
            verdict: soi_badge(s.resolved, "unknown (no resolution recorded)"),
        });
        let at_adopted = if (rescaled - m.log_value).abs() > 5e-4 {
            with_errors(
                Uncertain::asymmetric(rescaled, m.err_minus_dex, m.err_plus_dex, m.upper_limit),
                2,
            )
        } else {
            "same".into()
        };
        let detail = match m.quantity {
            Quantity::VelocityDispersion => {
                let def = m
                    .sigma_definition
                    .parse::<crate::catalog::model::SigmaDefinition>()
                    .map_or("", |d| d.label());
                if m.aperture.is_empty() {
                    def.to_string()
                } else {
                    format!("{def}, aperture {}", m.aperture)
                }
            }
            Quantity::BulgeLuminosity => format!("band {}", m.band),
            _ => String::new(),
        };
        MeasurementView {
            quantity: m.quantity.label(),
            value_text: m.value_text.clone(),
            canonical: with_errors(
                Uncertain::asymmetric(m.log_value, m.err_minus_dex, m.err_plus_dex, m.upper_limit),
                2,
            ),
            unit: quantity_unit(m.quantity, &m.band),
            at_adopted_distance: at_adopted,
            method: method_label(m.quantity, &m.method),
            detail,
            reference: m.reference.clone(),
            source_distance: m.source_distance_mpc.map_or("—".into(), |d| fixed(d, 2)),
            state: m.state.clone(),
            adopted: m.adopted,
            note: m.note.clone(),
            soi,
            virial: virial.map(VirialView::of),
        }
    }
}

fn method_label(quantity: Quantity, method: &str) -> String {
    use crate::catalog::model::BulgeMassMethod;
    match quantity {
        Quantity::BlackHoleMass => method
            .parse::<MassMethod>()
            .map_or_else(|_| method.to_string(), |m| m.label().to_string()),
        Quantity::BulgeMass => method
            .parse::<BulgeMassMethod>()
            .map_or_else(|_| method.to_string(), |m| m.label().to_string()),
        _ => "—".to_string(),
    }
}
