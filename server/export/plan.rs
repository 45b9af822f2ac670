//! A ranked plan (`relations::planning::Plan`, docs/methods.md §4.9) as a table every door
//! writes the same way: [`PlanTable`] is the JSON answer of `POST /api/v1/planning`, the JSON
//! download of `/planning` and `massline plan --format json`; [`plan_csv`] is the CSV download
//! and `massline plan --format csv`. The numbers are the domain's, unrounded, so the three
//! doors agree to the last digit. Nothing here is stored.

use serde::Serialize;

use crate::catalog::csv_io::guard_text_cell;
use crate::relations::planning::{Plan, PlanRow};

/// A log10 prediction with its 68.27 % and 95 % intervals.
#[derive(Debug, Clone, PartialEq, Serialize, utoipa::ToSchema)]
pub struct PredictedLog {
    /// Median of the log10 quantity.
    pub median: f64,
    /// Predictive standard deviation, dex.
    pub sd_dex: f64,
    /// 68.27 % interval: [lower, upper].
    pub interval68: [f64; 2],
    /// 95 % interval: [lower, upper].
    pub interval95: [f64; 2],
}

impl PredictedLog {
    fn of(p: &crate::fit::plan::LogPrediction) -> Self {
        Self {
            median: p.median,
            sd_dex: p.sd_dex,
            interval68: [p.interval68.0, p.interval68.1],
            interval95: [p.interval95.0, p.interval95.1],
        }
    }
}

/// One resolution of the plan.
#[derive(Debug, Clone, PartialEq, Serialize, utoipa::ToSchema)]
pub struct ResolutionAnswer {
    /// Its label.
    pub label: String,
    /// θ_res, arcsec.
    pub arcsec: f64,
}

/// One default relation as the plan used it.
#[derive(Debug, Clone, PartialEq, Serialize, utoipa::ToSchema)]
pub struct PlanFitAnswer {
    /// The relation's slug (`m_sigma`, `m_mbulge`, `m_l_k`, …).
    pub relation: String,
    /// Its fit identifier (cite it), when there is a fit.
    pub fit_id: Option<String>,
    /// The catalog version the fit was made at.
    pub catalog_version: Option<i64>,
    /// Objects in the fit.
    pub n: usize,
    /// Why the relation could not be used, one sentence.
    pub problem: Option<String>,
}

/// One candidate of the ranked plan.
#[derive(Debug, Clone, PartialEq, Serialize, utoipa::ToSchema)]
pub struct PlanRowAnswer {
    /// Rank from 1 (by P(resolved) at the first resolution, highest first; ties by name).
    pub rank: usize,
    /// The candidate's name.
    pub name: String,
    /// The slug of the relation used (the one with the smallest spread of log θ_infl among
    /// those its values allow); null when none could be used.
    pub relation: Option<String>,
    /// Predicted log10 M_BH [M☉].
    pub log_mbh: Option<PredictedLog>,
    /// Predicted log10 r_infl [pc], r_infl = G M/σ².
    pub log_r_infl_pc: Option<PredictedLog>,
    /// Predicted log10 θ_infl [arcsec].
    pub log_theta_arcsec: Option<PredictedLog>,
    /// P(θ_infl/θ_res ≥ threshold) at each resolution, in the plan's order; null without a
    /// predicted θ_infl.
    pub p_resolved: Vec<Option<f64>>,
    /// Why something is missing, one sentence.
    pub note: Option<String>,
}

/// A ranked plan: what was asked, the fits used and the candidates in rank order.
#[derive(Debug, Clone, PartialEq, Serialize, utoipa::ToSchema)]
pub struct PlanTable {
    /// The catalog version read.
    pub catalog_version: i64,
    /// θ_infl/θ_res at or above which a sphere counts as resolved.
    pub threshold: f64,
    /// The resolutions in the order given; P at the first ranks the rows.
    pub resolutions: Vec<ResolutionAnswer>,
    /// The default relations and their fits.
    pub fits: Vec<PlanFitAnswer>,
    /// The candidates, ranked.
    pub rows: Vec<PlanRowAnswer>,
    /// A catalog version whose fits are still being computed (older fits were used).
    pub computing: Option<i64>,
}

impl PlanTable {
    /// The table of `plan`.
    #[must_use]
    pub fn of(plan: &Plan) -> Self {
        Self {
            catalog_version: plan.catalog_version,
            threshold: plan.threshold,
            resolutions: plan
                .resolutions
                .iter()
                .map(|r| ResolutionAnswer {
                    label: r.label.clone(),
                    arcsec: r.arcsec,
                })
                .collect(),
            fits: plan
                .fits
                .iter()
                .map(|f| PlanFitAnswer {
                    relation: f.relation.slug(),
                    fit_id: f.fit_id.clone(),
                    catalog_version: f.catalog_version,
                    n: f.n,
                    problem: f.problem.clone(),
                })
                .collect(),
            rows: plan.rows.iter().map(row).collect(),
            computing: plan.computing,
        }
    }
}

fn row(r: &PlanRow) -> PlanRowAnswer {
    let prediction = r.prediction.as_ref();
    PlanRowAnswer {
        rank: r.rank,
        name: r.candidate.name.clone(),
        relation: r.relation.as_ref().map(crate::relations::Relation::slug),
        log_mbh: prediction
            .map(|p| &p.log_mbh)
            .or(r.mass.as_ref())
            .map(PredictedLog::of),
        log_r_infl_pc: prediction.map(|p| PredictedLog::of(&p.log_r_infl_pc)),
        log_theta_arcsec: prediction.map(|p| PredictedLog::of(&p.log_theta_arcsec)),
        p_resolved: r.p_resolved.clone(),
        note: r.note.clone(),
    }
}

/// The CSV header of a plan with these resolution labels: fixed columns, then one
/// `p_resolved_<n>` column per resolution (the labels are in the `resolutions` comment line
/// that no spreadsheet reads as data; they are free text).
fn header(resolutions: usize) -> Vec<String> {
    let mut h: Vec<String> = [
        "rank",
        "name",
        "relation",
        "log_mbh",
        "log_mbh_sd_dex",
        "log_mbh_68_lo",
        "log_mbh_68_hi",
        "log_mbh_95_lo",
        "log_mbh_95_hi",
        "log_r_infl_pc",
        "log_r_infl_pc_68_lo",
        "log_r_infl_pc_68_hi",
        "log_theta_arcsec",
        "log_theta_arcsec_sd_dex",
        "log_theta_arcsec_68_lo",
        "log_theta_arcsec_68_hi",
        "log_theta_arcsec_95_lo",
        "log_theta_arcsec_95_hi",
    ]
    .map(str::to_owned)
    .to_vec();
    h.extend((1..=resolutions).map(|i| format!("p_resolved_{i}")));
    h.push("note".to_owned());
    h
}

/// The ranked plan as CSV: one row per candidate in rank order, numbers unrounded (log10
/// values, errors in dex, probabilities from 0 to 1), empty cells where there is no value.
/// Text cells pass `csv_io::guard_text_cell`. Above the header, `#` lines give the catalog
/// version, the threshold and each resolution's column with its label and arcsec.
#[must_use]
pub fn plan_csv(table: &PlanTable) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "# massline plan: catalog version {}, threshold {}\n",
        table.catalog_version, table.threshold
    ));
    for (i, r) in table.resolutions.iter().enumerate() {
        out.push_str(&format!(
            "# p_resolved_{} = P(theta_infl / {} arcsec >= {}) for {}\n",
            i + 1,
            r.arcsec,
            table.threshold,
            guard_text_cell(&r.label.replace(['\n', '\r'], " "))
        ));
    }
    let mut writer = csv::Writer::from_writer(Vec::new());
    let _ = writer.write_record(header(table.resolutions.len()));
    let num = |v: Option<f64>| v.map(|v| v.to_string()).unwrap_or_default();
    for r in &table.rows {
        let m = r.log_mbh.as_ref();
        let rr = r.log_r_infl_pc.as_ref();
        let t = r.log_theta_arcsec.as_ref();
        let mut cells = vec![
            r.rank.to_string(),
            guard_text_cell(&r.name).into_owned(),
            r.relation.clone().unwrap_or_default(),
            num(m.map(|p| p.median)),
            num(m.map(|p| p.sd_dex)),
            num(m.map(|p| p.interval68[0])),
            num(m.map(|p| p.interval68[1])),
            num(m.map(|p| p.interval95[0])),
            num(m.map(|p| p.interval95[1])),
            num(rr.map(|p| p.median)),
            num(rr.map(|p| p.interval68[0])),
            num(rr.map(|p| p.interval68[1])),
            num(t.map(|p| p.median)),
            num(t.map(|p| p.sd_dex)),
            num(t.map(|p| p.interval68[0])),
            num(t.map(|p| p.interval68[1])),
            num(t.map(|p| p.interval95[0])),
            num(t.map(|p| p.interval95[1])),
        ];
        cells.extend(r.p_resolved.iter().map(|p| num(*p)));
        cells.push(guard_text_cell(r.note.as_deref().unwrap_or_default()).into_owned());
        let _ = writer.write_record(cells);
    }
    out.push_str(&String::from_utf8(writer.into_inner().unwrap_or_default()).unwrap_or_default());
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table() -> PlanTable {
        let p = PredictedLog {
            median: -1.0,
            sd_dex: 0.3,
            interval68: [-1.3, -0.7],
            interval95: [-1.588, -0.412],
        };
        PlanTable {
            catalog_version: 3,
            threshold: 1.0,
            resolutions: vec![
                ResolutionAnswer {
                    label: "=AO".to_owned(),
                    arcsec: 0.1,
                },
                ResolutionAnswer {
                    label: "seeing".to_owned(),
                    arcsec: 0.8,
                },
            ],
            fits: Vec::new(),
            rows: vec![
                PlanRowAnswer {
                    rank: 1,
                    name: "=cmd".to_owned(),
                    relation: Some("m_sigma".to_owned()),
                    log_mbh: Some(p.clone()),
                    log_r_infl_pc: Some(p.clone()),
                    log_theta_arcsec: Some(p),
                    p_resolved: vec![Some(0.5), Some(0.01)],
                    note: None,
                },
                PlanRowAnswer {
                    rank: 2,
                    name: "Without sigma".to_owned(),
                    relation: None,
                    log_mbh: None,
                    log_r_infl_pc: None,
                    log_theta_arcsec: None,
                    p_resolved: vec![None, None],
                    note: Some("σ is needed.".to_owned()),
                },
            ],
            computing: None,
        }
    }

    #[test]
    fn the_csv_has_one_row_per_candidate_in_rank_order_with_a_column_per_resolution() {
        let text = plan_csv(&table());
        let data: Vec<&str> = text.lines().filter(|l| !l.starts_with('#')).collect();
        assert_eq!(data.len(), 3, "{text}");
        assert!(data[0].ends_with("p_resolved_1,p_resolved_2,note"));
        assert!(
            data[1].starts_with("1,'=cmd,m_sigma,-1,0.3,-1.3,-0.7"),
            "{text}"
        );
        assert!(data[1].contains(",0.5,0.01,"), "{text}");
        assert!(data[2].starts_with("2,Without sigma,,,"), "{text}");
        assert!(text.contains("# p_resolved_1 = P(theta_infl / 0.1 arcsec >= 1) for '=AO"));
        let header_cells = data[0].split(',').count();
        for line in &data[1..] {
            let mut reader = csv::ReaderBuilder::new()
                .has_headers(false)
                .from_reader(line.as_bytes());
            let record = reader.records().next().unwrap().unwrap();
            assert_eq!(record.len(), header_cells);
        }
    }
}
