//! The catalog table (`/galaxies`) and one galaxy's page (`/galaxies/{slug}`).

use std::cmp::Ordering;

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, State};

use super::display::{at_adopted_distance, fixed, quantity_unit, significant, sphere_of_influence};
use crate::catalog::galaxies as store;
use crate::catalog::model::{BulgeKind, MassMethod, Morphology, Quantity};
use crate::catalog::relation_rows::{RelationRow, relation_rows};
use crate::error::{AppError, AppResult};
use crate::startup::AppState;
use crate::units::{
    format_log_with_errors as log_with_errors, round_to_uncertainty as linear_with_error,
};

/// Rows per page of the catalog table unless the reader asks for another count.
pub(crate) const DEFAULT_PER_PAGE: usize = 50;
/// Largest page the table will show.
pub(crate) const MAX_PER_PAGE: usize = 500;

/// Columns the catalog table can be sorted by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum SortKey {
    Name,
    LogMbh,
    Sigma,
    LogMbulge,
    Distance,
    Morphology,
    Method,
}

impl SortKey {
    const ALL: [(SortKey, &'static str); 7] = [
        (SortKey::Name, "name"),
        (SortKey::LogMbh, "log_mbh"),
        (SortKey::Sigma, "sigma"),
        (SortKey::LogMbulge, "log_mbulge"),
        (SortKey::Distance, "distance"),
        (SortKey::Morphology, "morphology"),
        (SortKey::Method, "method"),
    ];

    fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(k, _)| *k == self)
            .map_or("name", |(_, s)| s)
    }
}

/// Which black-hole masses to show.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum LimitFilter {
    All,
    Detections,
    Limits,
}

/// Sphere-of-influence filter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum SoiFilter {
    All,
    Resolved,
    Unresolved,
}

/// The catalog table's query, validated.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TableQuery {
    pub(crate) morphology: Option<Morphology>,
    pub(crate) bulge_kind: Option<BulgeKind>,
    pub(crate) method: Option<MassMethod>,
    pub(crate) limits: LimitFilter,
    pub(crate) soi: SoiFilter,
    pub(crate) sort: SortKey,
    pub(crate) descending: bool,
    pub(crate) page: usize,
    pub(crate) per_page: usize,
}

impl Default for TableQuery {
    fn default() -> Self {
        Self {
            morphology: None,
            bulge_kind: None,
            method: None,
            limits: LimitFilter::All,
            soi: SoiFilter::All,
            sort: SortKey::Name,
            descending: false,
            page: 1,
            per_page: DEFAULT_PER_PAGE,
        }
    }
}

const TABLE_PARAMS: &str = "morphology, bulge_kind, method, limits, soi, sort, dir, page, per_page";

impl TableQuery {
    /// Read the query parameters; every problem becomes one sentence naming the parameter.
    pub(crate) fn parse(pairs: &[(String, String)]) -> Result<Self, String> {
        let mut q = Self::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            let value = value.trim();
            if value.is_empty() {
                continue; // an empty select means "any"
            }
            let result: Result<(), String> = match key.as_str() {
                "morphology" => value.parse().map(|v| q.morphology = Some(v)),
                "bulge_kind" => value.parse().map(|v| q.bulge_kind = Some(v)),
                "method" => value.parse().map(|v| q.method = Some(v)),
                "limits" => choice(
                    value,
                    &[
                        ("all", LimitFilter::All),
                        ("detections", LimitFilter::Detections),
                        ("limits", LimitFilter::Limits),
                    ],
                )
                .map(|v| q.limits = v),
                "soi" => choice(
                    value,
                    &[
                        ("all", SoiFilter::All),
                        ("resolved", SoiFilter::Resolved),
                        ("unresolved", SoiFilter::Unresolved),
                    ],
                )
                .map(|v| q.soi = v),
                "sort" => choice(value, &SortKey::ALL.map(|(k, s)| (s, k))).map(|v| q.sort = v),
                "dir" => choice(value, &[("asc", false), ("desc", true)]).map(|v| q.descending = v),
                "page" => match value.parse::<usize>() {
                    Ok(p) if p >= 1 => {
                        q.page = p;
                        Ok(())
                    }
                    _ => Err(format!("'{value}' is not a page number (1, 2, 3, …)")),
                },
                "per_page" => match value.parse::<usize>() {
                    Ok(n) if (1..=MAX_PER_PAGE).contains(&n) => {
                        q.per_page = n;
                        Ok(())
                    }
                    _ => Err(format!(
                        "'{value}' is not a whole number from 1 to {MAX_PER_PAGE}"
                    )),
                },
                other => {
                    problems.push(format!(
                        "'{other}' is not a parameter of this page (it accepts {TABLE_PARAMS})."
                    ));
                    continue;
                }
            };
            if let Err(e) = result {
                problems.push(format!("Parameter '{key}': {e}."));
            }
        }
        if problems.is_empty() {
            Ok(q)
        } else {
            Err(problems.join(" "))
        }
    }

    /// The query string for this query with some changes (used by links), without the '?'.
    fn to_query_string(&self) -> String {
        let mut parts = Vec::new();
        if let Some(m) = self.morphology {
            parts.push(format!("morphology={}", m.as_str()));
        }
        if let Some(b) = self.bulge_kind {
            parts.push(format!("bulge_kind={}", b.as_str()));
        }
        if let Some(m) = self.method {
            parts.push(format!("method={}", m.as_str()));
        }
        match self.limits {
            LimitFilter::All => {}
            LimitFilter::Detections => parts.push("limits=detections".into()),
            LimitFilter::Limits => parts.push("limits=limits".into()),
        }
        match self.soi {
            SoiFilter::All => {}
            SoiFilter::Resolved => parts.push("soi=resolved".into()),
            SoiFilter::Unresolved => parts.push("soi=unresolved".into()),
        }
        parts.push(format!("sort={}", self.sort.as_str()));
        parts.push(format!(
            "dir={}",
            if self.descending { "desc" } else { "asc" }
        ));
        if self.per_page != DEFAULT_PER_PAGE {
            parts.push(format!("per_page={}", self.per_page));
        }
        parts.push(format!("page={}", self.page));
        parts.join("&")
    }
}

/// One of a closed set of words, or a sentence listing them.
fn choice<T: Copy>(value: &str, options: &[(&str, T)]) -> Result<T, String> {
    options
        .iter()
        .find(|(word, _)| *word == value)
        .map(|(_, v)| *v)
        .ok_or_else(|| {
            let words: Vec<&str> = options.iter().map(|(w, _)| *w).collect();
            format!("'{value}' is not one of: {}", words.join(", "))
        })
}

/// A catalog row with the values the table shows, computed once.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TableRow {
    pub(crate) row: RelationRow,
    /// Adopted log M_BH rescaled to the adopted distance.
    pub(crate) log_mbh_adopted_d: Option<f64>,
    /// Adopted log M_bulge rescaled to the adopted distance.
    pub(crate) log_mbulge_adopted_d: Option<f64>,
    /// θ_infl / resolution ≥ threshold, when it can be computed.
    pub(crate) resolved: Option<bool>,
}

impl TableRow {
    pub(crate) fn new(row: RelationRow, soi_threshold: f64) -> Self {
        let log_mbh_adopted_d = row.log_mbh.map(|v| {
            at_adopted_distance(
                v,
                Quantity::BlackHoleMass,
                row.mbh_method.as_deref().unwrap_or(""),
                row.mbh_source_distance_mpc,
                row.distance_mpc,
            )
        });
        let log_mbulge_adopted_d = row.log_mbulge.map(|v| {
            at_adopted_distance(
                v,
                Quantity::BulgeMass,
                row.mbulge_method.as_deref().unwrap_or(""),
                row.mbulge_source_distance_mpc,
                row.distance_mpc,
            )
        });
        let resolved = log_mbh_adopted_d
            .and_then(|log_mbh| {
                sphere_of_influence(
                    log_mbh,
                    row.mbh_method.as_deref().unwrap_or(""),
                    row.log_sigma,
                    row.distance_mpc,
                    row.mbh_resolution_arcsec,
                    soi_threshold,
                )
            })
            .and_then(|s| s.resolved);
        Self {
            row,
            log_mbh_adopted_d,
            log_mbulge_adopted_d,
            resolved,
        }
    }

    fn matches(&self, q: &TableQuery) -> bool {
        let r = &self.row;
        q.morphology.is_none_or(|m| r.morphology == m.as_str())
            && q.bulge_kind.is_none_or(|b| r.bulge_kind == b.as_str())
            && q.method
                .is_none_or(|m| r.mbh_method.as_deref() == Some(m.as_str()))
            && match q.limits {
                LimitFilter::All => true,
                LimitFilter::Detections => r.mbh_upper_limit == Some(false),
                LimitFilter::Limits => r.mbh_upper_limit == Some(true),
            }
            && match q.soi {
                SoiFilter::All => true,
                SoiFilter::Resolved => self.resolved == Some(true),
                SoiFilter::Unresolved => self.resolved == Some(false),
            }
    }

    fn compare(&self, other: &Self, key: SortKey) -> Ordering {
        let (a, b) = (&self.row, &other.row);
        match key {
            SortKey::Name => a.name.to_lowercase().cmp(&b.name.to_lowercase()),
            SortKey::LogMbh => cmp_opt(self.log_mbh_adopted_d, other.log_mbh_adopted_d),
            SortKey::Sigma => cmp_opt(a.log_sigma, b.log_sigma),
            SortKey::LogMbulge => cmp_opt(self.log_mbulge_adopted_d, other.log_mbulge_adopted_d),
            SortKey::Distance => a.distance_mpc.total_cmp(&b.distance_mpc),
            SortKey::Morphology => a.morphology.cmp(&b.morphology),
            SortKey::Method => a.mbh_method.cmp(&b.mbh_method),
        }
    }
}

/// Missing values sort last in either direction is not possible with a plain reverse; they sort
/// as smallest, which puts them first ascending and last descending, like most spreadsheets.
fn cmp_opt(a: Option<f64>, b: Option<f64>) -> Ordering {
    match (a, b) {
        (Some(x), Some(y)) => x.total_cmp(&y),
        (None, Some(_)) => Ordering::Less,
        (Some(_), None) => Ordering::Greater,
        (None, None) => Ordering::Equal,
    }
}

/// Filter, sort (name breaks ties) and cut one page. Returns the page and the number of matches.
pub(crate) fn select_page(rows: Vec<TableRow>, q: &TableQuery) -> (Vec<TableRow>, usize) {
    let mut matching: Vec<TableRow> = rows.into_iter().filter(|r| r.matches(q)).collect();
    matching.sort_by(|a, b| {
        let primary = a.compare(b, q.sort);
        let primary = if q.descending {
            primary.reverse()
        } else {
            primary
        };
        primary.then_with(|| a.compare(b, SortKey::Name))
    });
    let total = matching.len();
    let start = (q.page - 1).saturating_mul(q.per_page);
    let page = matching.into_iter().skip(start).take(q.per_page).collect();
    (page, total)
}

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
    morphology_options: Vec<OptionView>,
    bulge_options: Vec<OptionView>,
    method_options: Vec<OptionView>,
    limit_options: Vec<OptionView>,
    soi_options: Vec<OptionView>,
    sort: &'static str,
    dir: &'static str,
    soi_threshold: String,
}

/// Show the catalog table.
pub(crate) async fn list_galaxies(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<GalaxiesListPage> {
    let Query(pairs) = query.map_err(|e| {
        AppError::bad_request(format!("The address's parameters could not be read: {e}."))
    })?;
    let q = TableQuery::parse(&pairs).map_err(AppError::bad_request)?;
    let threshold = state.settings.soi_threshold;
    let rows = relation_rows(&state.pool)
        .await?
        .into_iter()
        .map(|r| TableRow::new(r, threshold))
        .collect();
    let (page_rows, total) = select_page(rows, &q);
    let pages = total.div_ceil(q.per_page).max(1);
    if q.page > pages {
        return Err(AppError::bad_request(format!(
            "Parameter 'page': there are only {pages} page(s) for this selection."
        )));
    }
    let link = |change: &dyn Fn(&mut TableQuery)| {
        let mut next = q.clone();
        change(&mut next);
        format!("/galaxies?{}", next.to_query_string())
    };
    let header = |label, unit, key: SortKey| {
        let active = q.sort == key;
        HeaderView {
            label,
            unit,
            href: link(&|n: &mut TableQuery| {
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
    let headers = vec![
        header("Galaxy", "", SortKey::Name),
        header("Morphology", "", SortKey::Morphology),
        header("log M_BH", "M☉, at adopted D", SortKey::LogMbh),
        header("Method", "", SortKey::Method),
        header("σ", "km/s", SortKey::Sigma),
        header("log M_bulge", "M☉, at adopted D", SortKey::LogMbulge),
        header("Distance", "Mpc", SortKey::Distance),
    ];
    let rows = page_rows.iter().map(row_view).collect();
    let first_shown = if total == 0 {
        0
    } else {
        (q.page - 1) * q.per_page + 1
    };
    Ok(GalaxiesListPage {
        nav,
        headers,
        rows,
        total,
        first_shown,
        last_shown: (first_shown + page_rows.len()).saturating_sub(1),
        page: q.page,
        pages,
        prev_href: (q.page > 1).then(|| link(&|n: &mut TableQuery| n.page -= 1)),
        next_href: (q.page < pages).then(|| link(&|n: &mut TableQuery| n.page += 1)),
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
        sort: q.sort.as_str(),
        dir: if q.descending { "desc" } else { "asc" },
        soi_threshold: significant(threshold, 2),
    })
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

fn row_view(t: &TableRow) -> RowView {
    let r = &t.row;
    let log_mbh = match (t.log_mbh_adopted_d, r.mbh_upper_limit) {
        (Some(v), Some(limit)) => log_with_errors(
            v,
            r.mbh_err_minus_dex.unwrap_or(0.0),
            r.mbh_err_plus_dex.unwrap_or(0.0),
            limit,
        ),
        _ => "—".into(),
    };
    let sigma = match (r.log_sigma, r.sigma_err_dex) {
        (Some(ls), Some(e)) => {
            let s = 10f64.powf(ls);
            // A dex error e maps to the linear half-width s·(10^e − 10^−e)/2.
            linear_with_error(s, s * (10f64.powf(e) - 10f64.powf(-e)) / 2.0)
        }
        _ => "—".into(),
    };
    let log_mbulge = match (t.log_mbulge_adopted_d, r.mbulge_err_dex) {
        (Some(v), Some(e)) => log_with_errors(v, e, e, false),
        _ => "—".into(),
    };
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
        distance: linear_with_error(r.distance_mpc, r.distance_err_mpc),
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
}

/// The sphere-of-influence check of one black-hole mass.
pub(crate) struct SoiView {
    radius_pc: String,
    theta_arcsec: String,
    resolution_arcsec: String,
    ratio: String,
    verdict: &'static str,
}

/// `/galaxies/{slug}`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/galaxy_show.html")]
pub(crate) struct GalaxyShowPage {
    nav: super::Nav,
    name: String,
    morphology: &'static str,
    bulge_kind: &'static str,
    centre_kind: &'static str,
    distance: String,
    distance_method: &'static str,
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
    reviews: Vec<crate::catalog::submissions::ReviewNote>,
}

/// Show one galaxy with every measurement.
pub(crate) async fn show_galaxy(
    State(state): State<AppState>,
    nav: super::Nav,
    Path(slug): Path<String>,
) -> AppResult<GalaxyShowPage> {
    use crate::catalog::model::{CentreKind, DistanceMethod};
    let galaxy = store::find_by_slug(&state.pool, &slug)
        .await?
        .ok_or_else(|| AppError::not_found(format!("The galaxy '{slug}'")))?;
    let measurements = store::measurements_of(&state.pool, galaxy.galaxy_id).await?;
    let left_out = placements_left_out(&state, galaxy.galaxy_id).await?;
    let mut reviews =
        crate::catalog::submissions::reviews_of_galaxy(&state.pool, galaxy.galaxy_id).await?;
    for r in &mut reviews {
        r.created_at = r
            .created_at
            .get(..16)
            .unwrap_or(&r.created_at)
            .replace('T', " ");
    }
    // The adopted σ is what the sphere-of-influence check uses.
    let adopted_log_sigma = measurements
        .iter()
        .find(|m| m.quantity == Quantity::VelocityDispersion && m.adopted)
        .map(|m| m.log_value);
    let threshold = state.settings.soi_threshold;
    let views = measurements
        .iter()
        .map(|m| {
            let rescaled = at_adopted_distance(
                m.log_value,
                m.quantity,
                &m.method,
                m.source_distance_mpc,
                galaxy.distance_mpc,
            );
            let soi = (m.quantity == Quantity::BlackHoleMass)
                .then(|| {
                    sphere_of_influence(
                        rescaled,
                        &m.method,
                        adopted_log_sigma,
                        galaxy.distance_mpc,
                        m.resolution_arcsec,
                        threshold,
                    )
                })
                .flatten()
                .map(|s| SoiView {
                    radius_pc: significant(s.radius_pc, 3),
                    theta_arcsec: significant(s.theta_arcsec, 3),
                    resolution_arcsec: s
                        .resolution_arcsec
                        .map_or("not recorded".into(), |r| format!("{}″", significant(r, 2))),
                    ratio: s.ratio.map_or("—".into(), |r| significant(r, 2)),
                    verdict: match s.resolved {
                        Some(true) => "resolved",
                        Some(false) => "not resolved",
                        None => "unknown (no resolution recorded)",
                    },
                });
            let canonical =
                log_with_errors(m.log_value, m.err_minus_dex, m.err_plus_dex, m.upper_limit);
            let at_adopted = if (rescaled - m.log_value).abs() > 5e-4 {
                log_with_errors(rescaled, m.err_minus_dex, m.err_plus_dex, m.upper_limit)
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
                canonical,
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
            }
        })
        .collect();
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
        distance: linear_with_error(galaxy.distance_mpc, galaxy.distance_err_mpc),
        distance_method: galaxy
            .distance_method
            .parse::<DistanceMethod>()
            .map_or("other", DistanceMethod::label),
        measurements: views,
        soi_threshold: significant(threshold, 2),
        rows: left_out.rows,
        charts: left_out.charts,
        no_relation: left_out.no_relation,
        reviews,
    })
}

/// The galaxy page's placement section.
struct LeftOut {
    rows: Vec<super::place::PlaceRow>,
    charts: Vec<super::place::PlaceChart>,
    no_relation: Option<String>,
}

/// The galaxy against every relation it has values for, each fitted (structural, default
/// sample and pivots, as on `/relations`) without the galaxy, so its own point cannot pull
/// the relation towards itself. The left-out fits are cached per catalog version.
async fn placements_left_out(state: &AppState, galaxy_id: i64) -> AppResult<LeftOut> {
    use super::place::{Subject, SubjectMass, input_text, place_against};
    use crate::catalog::relation_rows;
    use crate::fit::Method;
    use crate::relations::{FitKey, Relation, SampleFilter, build_sample, fitted_leaving_out};

    let version = crate::catalog::history::current_version(&state.pool).await?;
    let rows = relation_rows::relation_rows(&state.pool).await?;
    let lums = relation_rows::luminosity_rows(&state.pool).await?;
    let bands: Vec<String> = relation_rows::luminosity_bands(&state.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let filter = SampleFilter::default();
    let method = Method::Structural;
    let mut out = LeftOut {
        rows: Vec::new(),
        charts: Vec::new(),
        no_relation: None,
    };
    for relation in Relation::all(&bands) {
        let pivots = (relation.default_pivot(), relation.default_pivot2());
        let sample = build_sample(
            &rows,
            &lums,
            &relation,
            &filter,
            state.settings.soi_threshold,
        );
        let full_key = FitKey::new(version, &relation, method, &filter, pivots.0, pivots.1);
        let Some((outcome, index)) = fitted_leaving_out(
            &state.fits,
            &full_key,
            &relation,
            method,
            &sample,
            galaxy_id,
        )
        .await?
        else {
            continue;
        };
        let (p, m) = (&sample.points[index], &sample.members[index]);
        let shown = |v: f64, e: f64| log_with_errors(v, e, e, false);
        let x2_text = p.x2.map(|b| shown(b, p.x2_err));
        let subject = Subject {
            name: m.name.clone(),
            href: Some(format!("/galaxies/{}", m.slug)),
            x: (p.x, p.x_err),
            x2: p.x2.map(|b| (b, p.x2_err)),
            mass: Some(SubjectMass {
                log_mbh: p.y,
                err_minus_dex: p.y_err,
                err_plus_dex: p.y_err,
                err_dex: p.y_err,
                xy_cov: p.xy_cov,
                upper_limit: p.upper_limit,
            }),
            input: input_text(&relation, &shown(p.x, p.x_err), x2_text.as_deref()),
        };
        let placed = place_against(&relation, &outcome, &subject);
        out.rows.push(placed.row);
        out.charts.extend(placed.chart);
    }
    if out.rows.is_empty() {
        let row = rows.iter().find(|r| r.galaxy_id == galaxy_id);
        let why = match row {
            Some(r) if r.log_mbh.is_none() => {
                "it has no adopted black-hole mass or upper limit".to_owned()
            }
            Some(r) if r.sigma_definition.as_deref() == Some("sigma_c") => {
                "its adopted σ is a central σ_c, which the default fits (σ_e) leave out, and it has no bulge mass or luminosity".to_owned()
            }
            _ => "it has no adopted σ_e, bulge mass or bulge luminosity".to_owned(),
        };
        out.no_relation = Some(format!(
            "No relation applies to this galaxy: {why}. The relations need a black-hole mass (or upper limit) with a velocity dispersion σ_e, a bulge mass, or a bulge luminosity."
        ));
    }
    Ok(out)
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

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(items: &[(&str, &str)]) -> Vec<(String, String)> {
        items
            .iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect()
    }

    #[test]
    fn table_query_reads_every_parameter() {
        let q = TableQuery::parse(&pairs(&[
            ("morphology", "spiral"),
            ("bulge_kind", "pseudo"),
            ("method", "maser"),
            ("limits", "detections"),
            ("soi", "unresolved"),
            ("sort", "sigma"),
            ("dir", "desc"),
            ("page", "2"),
            ("per_page", "10"),
        ]))
        .unwrap();
        assert_eq!(q.morphology, Some(Morphology::Spiral));
        assert_eq!(q.bulge_kind, Some(BulgeKind::Pseudo));
        assert_eq!(q.method, Some(MassMethod::Maser));
        assert_eq!(
            (q.limits, q.soi),
            (LimitFilter::Detections, SoiFilter::Unresolved)
        );
        assert_eq!(
            (q.sort, q.descending, q.page, q.per_page),
            (SortKey::Sigma, true, 2, 10)
        );
        // The query string round-trips.
        let again = TableQuery::parse(
            &q.to_query_string()
                .split('&')
                .map(|kv| {
                    let (k, v) = kv.split_once('=').unwrap();
                    (k.to_string(), v.to_string())
                })
                .collect::<Vec<_>>(),
        )
        .unwrap();
        assert_eq!(again, q);
    }

    #[test]
    fn table_query_names_each_bad_parameter() {
        let err = TableQuery::parse(&pairs(&[("sort", "colour"), ("page", "0"), ("fish", "1")]))
            .unwrap_err();
        assert!(
            err.contains("Parameter 'sort': 'colour' is not one of"),
            "{err}"
        );
        assert!(err.contains("Parameter 'page'"), "{err}");
        assert!(err.contains("'fish' is not a parameter"), "{err}");
        assert!(TableQuery::parse(&pairs(&[("per_page", "100000")])).is_err());
        // Empty values mean "any".
        assert_eq!(
            TableQuery::parse(&pairs(&[("morphology", "")])).unwrap(),
            TableQuery::default()
        );
    }
}
