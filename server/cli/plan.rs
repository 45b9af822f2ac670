//! `massline plan --input candidates.csv --resolution "label=0.1" [--resolution ...]
//! [--threshold 1] [--format table|csv|json] [--db PATH]`: rank candidate galaxies by the
//! probability that each resolution resolves their sphere of influence, against the default
//! fits of the local catalog (`relations::planning::plan`, docs/methods.md §4.9). The CSV and
//! JSON are the page's downloads and the API's answer (`export::plan`). Nothing is stored.

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context as _;
use clap::Args;

use crate::catalog;
use crate::config::{DEFAULT_DB_PATH, DEFAULT_SOI_THRESHOLD};
use crate::export::plan::{PlanTable, plan_csv};
use crate::relations::planning::{Plan, Resolution, plan_within, read_candidates};
use crate::relations::{Catalog, FitCache};

/// Output format of `massline plan`.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum PlanFormat {
    /// Aligned plain text with units.
    Table,
    /// The ranked table as CSV (as the page's download).
    Csv,
    /// The ranked table as JSON (as the API's answer).
    Json,
}

/// Arguments of `massline plan`.
#[derive(Args, Debug, Clone)]
pub struct PlanArgs {
    /// The candidate file: CSV with a header (README, "Planning observations").
    #[arg(long)]
    pub input: PathBuf,
    /// A resolution as LABEL=ARCSEC, e.g. "AO K band=0.1"; repeat for more (P at the first
    /// ranks the candidates).
    #[arg(long = "resolution", required = true)]
    pub resolutions: Vec<String>,
    /// θ_infl/θ_res at or above which a sphere counts as resolved.
    #[arg(long, default_value_t = DEFAULT_SOI_THRESHOLD)]
    pub threshold: f64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = PlanFormat::Table)]
    pub format: PlanFormat,
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
}

/// Reads "LABEL=ARCSEC" (the last `=` splits, so a label may hold one).
fn read_resolution(text: &str) -> anyhow::Result<Resolution> {
    let (label, arcsec) = text.rsplit_once('=').with_context(|| {
        format!("--resolution “{text}” is not LABEL=ARCSEC; write it as “AO K band=0.1”.")
    })?;
    Resolution::read(label, arcsec).map_err(|e| anyhow::anyhow!("--resolution “{text}”: {e}"))
}

/// Prints the ranked plan on `out`.
///
/// # Errors
/// When the file cannot be read or has faulty rows (every one listed), a resolution or the
/// threshold is refused, or the database cannot be opened.
pub fn run(args: &PlanArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let text = std::fs::read_to_string(&args.input)
        .with_context(|| format!("Could not read the candidate file {}", args.input.display()))?;
    let candidates = read_candidates(&text).map_err(|rows| {
        let lines: Vec<String> = rows.iter().map(ToString::to_string).collect();
        anyhow::anyhow!(
            "The candidate file {} has {} to correct; nothing was planned:\n{}",
            args.input.display(),
            if rows.len() == 1 {
                "1 problem".to_owned()
            } else {
                format!("{} problems", rows.len())
            },
            lines.join("\n")
        )
    })?;
    let resolutions = args
        .resolutions
        .iter()
        .map(|r| read_resolution(r))
        .collect::<anyhow::Result<Vec<_>>>()?;
    let runtime = tokio::runtime::Runtime::new()?;
    let planned = runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        let catalog = Catalog {
            pool,
            fits: FitCache::default(),
            soi_threshold: args.threshold,
            pinned: None,
        };
        // A command waits for the default fits as long as they take.
        plan_within(&catalog, &candidates, &resolutions, args.threshold, None)
            .await
            .map_err(|e| anyhow::anyhow!("{e}"))
    })?;
    let table = PlanTable::of(&planned);
    match args.format {
        PlanFormat::Json => {
            serde_json::to_writer_pretty(&mut *out, &table)?;
            writeln!(out)?;
        }
        PlanFormat::Csv => write!(out, "{}", plan_csv(&table))?,
        PlanFormat::Table => write_table(out, &planned, &table)?,
    }
    Ok(())
}

/// The plan as aligned text: one line per candidate with the relation used, log M_BH ± sd,
/// θ_infl with its 68 % interval, and P(resolved) per resolution.
fn write_table(out: &mut dyn Write, planned: &Plan, table: &PlanTable) -> anyhow::Result<()> {
    writeln!(
        out,
        "Catalog version {}; threshold theta_infl/theta_res >= {}.",
        table.catalog_version, table.threshold
    )?;
    for f in &table.fits {
        if let Some(id) = &f.fit_id {
            writeln!(out, "Fit {}: {id} ({} objects).", f.relation, f.n)?;
        }
    }
    for (i, r) in table.resolutions.iter().enumerate() {
        writeln!(out, "P{}: {} ({} arcsec)", i + 1, r.label, r.arcsec)?;
    }
    let width = table
        .rows
        .iter()
        .map(|r| r.name.chars().count())
        .max()
        .unwrap_or(4)
        .max(4);
    let mut head = format!(
        "{:>4}  {:<width$}  {:<10}  {:>14}  {:>24}",
        "rank", "name", "relation", "log M [M_sun]", "theta_infl [arcsec] (68%)"
    );
    for i in 1..=table.resolutions.len() {
        head.push_str(&format!("  {:>8}", format!("P{i}")));
    }
    writeln!(out, "{head}")?;
    for (row, r) in table.rows.iter().zip(&planned.rows) {
        let mass = row.log_mbh.as_ref().map_or_else(
            || "-".to_owned(),
            |m| format!("{:.2} ± {:.2}", m.median, m.sd_dex),
        );
        let theta = row.log_theta_arcsec.as_ref().map_or_else(
            || "-".to_owned(),
            |t| {
                format!(
                    "{:.3} ({:.3}-{:.3})",
                    10f64.powf(t.median),
                    10f64.powf(t.interval68[0]),
                    10f64.powf(t.interval68[1])
                )
            },
        );
        let mut line = format!(
            "{:>4}  {:<width$}  {:<10}  {:>14}  {:>24}",
            row.rank,
            row.name,
            row.relation.as_deref().unwrap_or("-"),
            mass,
            theta
        );
        for p in &row.p_resolved {
            line.push_str(&format!(
                "  {:>8}",
                p.map_or_else(|| "-".to_owned(), |p| format!("{p:.3}"))
            ));
        }
        if let Some(note) = &r.note {
            line.push_str(&format!("  {note}"));
        }
        writeln!(out, "{line}")?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_resolution_is_read_as_label_equals_arcsec_and_a_bad_one_says_what_to_type() {
        let r = read_resolution("AO K=band=0.1").unwrap();
        assert_eq!(r.label, "AO K=band");
        assert!((r.arcsec - 0.1).abs() < 1e-12);
        let e = read_resolution("no value").unwrap_err().to_string();
        assert!(e.contains("LABEL=ARCSEC"), "{e}");
        assert!(read_resolution("wide=200").is_err());
    }

    #[test]
    fn a_faulty_candidate_file_is_refused_with_its_rows_and_nothing_opened() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("c.csv");
        std::fs::write(&input, "name,distance_mpc\nOne,abc\nTwo,-3\n").unwrap();
        let args = PlanArgs {
            input,
            resolutions: vec!["AO=0.1".to_owned()],
            threshold: 1.0,
            format: PlanFormat::Csv,
            db_path: dir.path().join("never.db"),
        };
        let e = run(&args, &mut Vec::new()).unwrap_err().to_string();
        assert!(e.contains("Line 2") && e.contains("Line 3"), "{e}");
        assert!(!dir.path().join("never.db").exists());
    }
}
