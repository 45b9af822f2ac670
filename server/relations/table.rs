//! The catalog table: every galaxy with its adopted values at the adopted distance and its
//! sphere-of-influence flag, filtered, sorted and cut into pages. The pages' `/galaxies` and the
//! API's `/api/v1/galaxies` read the same query ([`TableQuery`]) and the same rows.
//!
//! Filtering happens here rather than in SQL because some filters are derived quantities (the
//! sphere-of-influence ratio, masses at the adopted distance) that portable SQL cannot compute;
//! a group's catalog of a few thousand galaxies is read in milliseconds.

use std::cmp::Ordering;

use super::{at_adopted_distance, sphere_of_influence};
use crate::catalog::model::{BulgeKind, MassMethod, Morphology};
use crate::catalog::relation_rows::RelationRow;
use crate::units::Quantity;

/// Rows per page of the catalog table unless the reader asks for another count.
pub const DEFAULT_PER_PAGE: usize = 50;
/// Largest page the table will show.
pub const MAX_PER_PAGE: usize = 500;

/// Columns the catalog table can be sorted by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SortKey {
    /// Galaxy name (case-insensitive).
    Name,
    /// Black-hole mass at the adopted distance.
    LogMbh,
    /// Velocity dispersion.
    Sigma,
    /// Bulge mass at the adopted distance.
    LogMbulge,
    /// Adopted distance.
    Distance,
    /// Morphology word.
    Morphology,
    /// Mass method word.
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

    /// The query word of this column.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(k, _)| *k == self)
            .map_or("name", |(_, s)| s)
    }
}

/// Which black-hole masses to show.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LimitFilter {
    /// Detections and upper limits.
    All,
    /// Detections only.
    Detections,
    /// Upper limits only.
    Limits,
}

/// Sphere-of-influence filter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SoiFilter {
    /// Every galaxy.
    All,
    /// Sphere of influence resolved.
    Resolved,
    /// Sphere of influence not resolved.
    Unresolved,
}

/// The catalog table's query, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct TableQuery {
    /// Only this morphology.
    pub morphology: Option<Morphology>,
    /// Only this bulge kind.
    pub bulge_kind: Option<BulgeKind>,
    /// Only black-hole masses by this method.
    pub method: Option<MassMethod>,
    /// Detections, limits or both.
    pub limits: LimitFilter,
    /// Sphere-of-influence filter.
    pub soi: SoiFilter,
    /// Sort column.
    pub sort: SortKey,
    /// Sort descending.
    pub descending: bool,
    /// Name search (`q`, trimmed): rows whose name contains this text, ignoring case; `None` for
    /// all. The catalog has no alternative names, so the name is all there is to search.
    pub name: Option<String>,
    /// Page number, from 1.
    pub page: usize,
    /// Rows per page.
    pub per_page: usize,
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
            name: None,
            page: 1,
            per_page: DEFAULT_PER_PAGE,
        }
    }
}

const TABLE_PARAMS: &str =
    "q, morphology, bulge_kind, method, limits, soi, sort, dir, page, per_page";

/// Longest name search accepted, in characters: a search costs one substring test per catalog
/// row, so its length bounds the work of a request.
pub const MAX_SEARCH_CHARS: usize = 100;

impl TableQuery {
    /// Read the query parameters; every problem becomes one sentence naming the parameter.
    pub fn parse(pairs: &[(String, String)]) -> Result<Self, String> {
        let mut q = Self::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            let value = value.trim();
            if value.is_empty() {
                continue; // an empty select means "any"
            }
            let result: Result<(), String> = match key.as_str() {
                "q" => {
                    if value.chars().count() > MAX_SEARCH_CHARS {
                        Err(format!(
                            "a name search is at most {MAX_SEARCH_CHARS} characters long"
                        ))
                    } else {
                        q.name = Some(value.to_owned());
                        Ok(())
                    }
                }
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
            Err(crate::error::join_problems(problems))
        }
    }

    /// The query string for this query with some changes (used by links), without the '?'.
    pub fn to_query_string(&self) -> String {
        let mut parts = Vec::new();
        if let Some(name) = &self.name {
            parts.push(serde_urlencoded::to_string([("q", name)]).unwrap_or_default());
        }
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
pub struct TableRow {
    /// The catalog row.
    pub row: RelationRow,
    /// Adopted log M_BH rescaled to the adopted distance.
    pub log_mbh_adopted_d: Option<f64>,
    /// Adopted log M_bulge rescaled to the adopted distance.
    pub log_mbulge_adopted_d: Option<f64>,
    /// θ_infl / resolution ≥ threshold, when it can be computed.
    pub resolved: Option<bool>,
}

impl TableRow {
    /// The row's values at the adopted distance and its sphere-of-influence flag.
    pub fn new(row: RelationRow, soi_threshold: f64) -> Self {
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

    /// Whether the row passes the query's filters.
    pub fn matches(&self, q: &TableQuery) -> bool {
        let r = &self.row;
        q.name
            .as_deref()
            .is_none_or(|needle| r.name.to_lowercase().contains(&needle.to_lowercase()))
            && q.morphology.is_none_or(|m| r.morphology == m.as_str())
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
            SortKey::Name => natural_cmp(&a.name, &b.name),
            SortKey::LogMbh => cmp_opt(self.log_mbh_adopted_d, other.log_mbh_adopted_d),
            SortKey::Sigma => cmp_opt(a.log_sigma, b.log_sigma),
            SortKey::LogMbulge => cmp_opt(self.log_mbulge_adopted_d, other.log_mbulge_adopted_d),
            SortKey::Distance => a.distance_mpc.total_cmp(&b.distance_mpc),
            SortKey::Morphology => a.morphology.cmp(&b.morphology),
            SortKey::Method => a.mbh_method.cmp(&b.mbh_method),
        }
    }
}

/// Compares names as a reader expects: ignoring case, and with runs of digits compared as
/// numbers, so "X 4" comes before "X 359". Leading zeros do not change a number's value; a tie
/// falls back to the plain comparison, so the order is total and stable.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (la, lb) = (a.to_lowercase(), b.to_lowercase());
    let (mut x, mut y) = (la.as_str(), lb.as_str());
    loop {
        match (x.chars().next(), y.chars().next()) {
            (None, None) => return a.cmp(b),
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some(c), Some(d)) if c.is_ascii_digit() && d.is_ascii_digit() => {
                let end_x = x.find(|ch: char| !ch.is_ascii_digit()).unwrap_or(x.len());
                let end_y = y.find(|ch: char| !ch.is_ascii_digit()).unwrap_or(y.len());
                let nx = x[..end_x].trim_start_matches('0');
                let ny = y[..end_y].trim_start_matches('0');
                // Without leading zeros, the longer run is the larger number; equal lengths
                // compare digit by digit. No overflow, however long the run.
                let order = nx.len().cmp(&ny.len()).then_with(|| nx.cmp(ny));
                if order != Ordering::Equal {
                    return order;
                }
                x = &x[end_x..];
                y = &y[end_y..];
            }
            (Some(c), Some(d)) => {
                if c != d {
                    return c.cmp(&d);
                }
                x = &x[c.len_utf8()..];
                y = &y[d.len_utf8()..];
            }
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
pub fn select_page(rows: Vec<TableRow>, q: &TableQuery) -> (Vec<TableRow>, usize) {
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

/// One page of the catalog table for `q`, and the number of galaxies matching it.
///
/// # Errors
/// When the database fails.
pub async fn table_page(
    catalog: &super::Catalog,
    q: &TableQuery,
) -> sqlx::Result<(Vec<TableRow>, usize)> {
    // The adopted rows of the current version, read once per version and shared with the fits.
    let snapshot = catalog.rows().await?;
    let rows = snapshot
        .rows
        .iter()
        .cloned()
        .map(|r| TableRow::new(r, catalog.soi_threshold))
        .collect();
    Ok(select_page(rows, q))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::test_pairs as pairs;

    #[test]
    fn names_sort_naturally() {
        let mut names = vec!["X 359", "x 4", "X 40", "Y 1", "X 004a", "X 4b", "X"];
        names.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(
            names,
            ["X", "x 4", "X 004a", "X 4b", "X 40", "X 359", "Y 1"]
        );
        assert_eq!(natural_cmp("A 10", "A 9"), Ordering::Greater);
        assert_eq!(
            natural_cmp("B 99999999999999999999999", "B 100000000000000000000000"),
            Ordering::Less
        );
        assert_eq!(natural_cmp("C 2", "c 2"), "C 2".cmp("c 2"));
    }

    #[test]
    fn name_search_is_parsed_bounded_and_kept_in_links() {
        let q = TableQuery::parse(&pairs(&[("q", "  Ab C ")])).expect("parses");
        assert_eq!(q.name.as_deref(), Some("Ab C"));
        assert!(q.to_query_string().starts_with("q=Ab+C&"));
        let long = "x".repeat(MAX_SEARCH_CHARS + 1);
        let err = TableQuery::parse(&pairs(&[("q", long.as_str())])).expect_err("too long");
        assert!(err.contains("Parameter 'q'"), "{err}");
        let empty = TableQuery::parse(&pairs(&[("q", " ")])).expect("parses");
        assert_eq!(empty.name, None);
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
