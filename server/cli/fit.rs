//! The `massline fit` command: fits a scaling relation to a CSV file of objects. This file
//! reads the file and renders the result; the fit itself is `relations::fit_own_sample`, as
//! for `POST /api/v1/fit`.
//!
//! ```text
//! massline fit --input FILE.csv [--method structural|conditional|fitexy|bces-yx|bces-xy|
//!              bces-bisector|bces-orthogonal] [--posterior] [--bootstrap N] [--pivot X0]
//!              [--x-quantity sigma|mass|luminosity|other] [--steps N] [--seed N]
//!              [--format json|table]
//! ```
//!
//! # Input
//!
//! A CSV file with a header row naming at least the columns `x`, `x_err`, `y`, `y_err` and
//! `upper_limit`, in any order: x and y are log10 values (x = log10 of the host property in its
//! natural unit, e.g. log10(σ / km s⁻¹); y = log10(M_BH / M☉)), the errors are in dex and
//! `upper_limit` is 0 for a detection or 1 when y is an upper limit. Optional columns: `name`
//! (a label) and `xy_cov` (covariance of the x and y errors, dex²). Other columns are ignored;
//! lines starting with `#` are comments and blank lines are skipped (a quoted field may not span
//! lines). A bad file is refused with the line number (as an
//! editor counts lines, the header being line 1) and the column at fault.
//!
//! # Pivot
//!
//! `--pivot X0` sets x0. Otherwise `--x-quantity` names what x is and x0 is its convention:
//! `sigma` log10(200) = 2.30103 (σ in km s⁻¹; Tremaine et al. 2002 used σ0 = 200 km s⁻¹),
//! `mass` 11.0 (10¹¹ M☉), `luminosity` 11.0 (10¹¹ L☉ of the band), `other` the median of x
//! rounded to 0.5. Without either, the median of x decides (`relations::default_pivot`):
//! log10(200) when it lies in 1.3–2.8, else the median rounded to 0.5, and a warning says so
//! and what to type. The pivot used is always printed.
//!
//! # Output
//!
//! `--format table` (default): aligned plain text with units. `--format json`: one object with
//! `alpha`, `beta`, `eps`, `alpha_err`, `beta_err`, `eps_err`, `cov`, `cov_names`, `pivot`,
//! `pivot_rule`, `n`, `n_upper`, `method`, `neg2_log_l`, `aic`, `bic`, `termination`, `seed`,
//! `x_model`, and with `--posterior` / `--bootstrap` a `posterior` / `bootstrap` block.

use std::io::Write;
use std::path::PathBuf;

use anyhow::Context;
use serde_json::{Value, json};

use crate::fit::bootstrap::Bootstrap;
use crate::fit::ensemble::ParamSummary;
use crate::fit::posterior::Posterior;
use crate::fit::{Fit, IntervalKind, Method, Point};
use crate::relations::{
    OwnSampleError, OwnSampleSettings, POSTERIOR_STEPS, PivotRule, PivotSettingNames, SMALL_SAMPLE,
    UnknownXQuantity, XQuantity, fit_own_sample,
};

/// Columns every input file must have.
const REQUIRED: [&str; 5] = ["x", "x_err", "y", "y_err", "upper_limit"];

/// Arguments of `massline fit`.
#[derive(clap::Args, Debug)]
pub struct FitArgs {
    /// CSV file with columns x, x_err, y, y_err, upper_limit (log10 values, errors in dex,
    /// upper_limit 0 or 1); optional name and xy_cov; other columns are ignored.
    #[arg(long, value_name = "FILE.csv")]
    pub input: PathBuf,
    /// Estimator.
    #[arg(long, default_value = "structural", value_parser = parse_method)]
    pub method: Method,
    /// Also sample the posterior (flat priors; structural and conditional only).
    #[arg(long)]
    pub posterior: bool,
    /// Steps per walker of the posterior sampler (32 walkers; the first 1,000 steps, or half
    /// the steps if fewer, are burn-in).
    #[arg(long, value_name = "N", default_value_t = POSTERIOR_STEPS)]
    pub steps: usize,
    /// Also bootstrap the fit with N resamples of the objects.
    #[arg(long, value_name = "N")]
    pub bootstrap: Option<usize>,
    /// Pivot x0 in the log10 units of x (default: the convention of --x-quantity, else
    /// log10(200) when the median of x lies in 1.3–2.8, else that median rounded to 0.5).
    #[arg(long, value_name = "X0")]
    pub pivot: Option<f64>,
    /// What x is, for the pivot: sigma (log10 σ in km/s: x0 = log10 200), mass (log10 M☉ of a
    /// bulge or stellar mass: x0 = 11), luminosity (log10 L☉ of the band: x0 = 11) or other
    /// (x0 = the median of x rounded to 0.5); --pivot wins.
    #[arg(long, value_name = "QUANTITY", value_parser = parse_x_quantity)]
    pub x_quantity: Option<XQuantity>,
    /// Seed of the posterior sampler and the bootstrap.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = OutputFormat::Table)]
    pub format: OutputFormat,
}

/// Output format of `massline fit`.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum OutputFormat {
    /// Aligned plain text with units.
    Table,
    /// One JSON object.
    Json,
}

/// Parses the quantity of x for clap.
fn parse_x_quantity(s: &str) -> Result<XQuantity, UnknownXQuantity> {
    s.parse()
}

/// How the command line names the pivot settings in the pivot warning.
const PIVOT_SETTINGS: PivotSettingNames = PivotSettingNames {
    x_quantity: |word| format!("--x-quantity {word}"),
    pivot: "--pivot X0",
};

/// Parses a method name for clap.
fn parse_method(s: &str) -> Result<Method, crate::fit::FitError> {
    s.parse()
}

/// Why an input file was refused; every message is one sentence naming the line and column.
#[non_exhaustive]
#[derive(thiserror::Error, Debug, Clone, PartialEq, Eq)]
pub enum InputError {
    /// The file has no header row.
    #[error(
        "The file is empty: it needs a header row naming the columns x, x_err, y, y_err and upper_limit."
    )]
    Empty,
    /// A required column is missing from the header.
    #[error(
        "The header has no column named {column}; the file needs x, x_err, y, y_err and upper_limit."
    )]
    MissingColumn {
        /// The missing column.
        column: &'static str,
    },
    /// A column name appears twice in the header.
    #[error("The header names the column {column} twice.")]
    DuplicateColumn {
        /// The repeated column.
        column: String,
    },
    /// The header is followed by no data.
    #[error("The file has a header but no data rows.")]
    NoRows,
    /// The CSV itself is malformed (e.g. a row with a different number of fields).
    #[error("Line {line} is not valid CSV: {reason}.")]
    Malformed {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// What the CSV reader found.
        reason: String,
    },
    /// A required value is empty.
    #[error("Line {line} has no value in column {column}.")]
    MissingValue {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// The column.
        column: &'static str,
    },
    /// A value is not a number.
    #[error("Line {line}, column {column}: '{value}' is not a number.")]
    NotANumber {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// The column.
        column: &'static str,
        /// The text found.
        value: String,
    },
    /// A value is NaN or infinite.
    #[error("Line {line}, column {column}: the value must be finite, not '{value}'.")]
    NotFinite {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// The column.
        column: &'static str,
        /// The text found.
        value: String,
    },
    /// An error is negative.
    #[error("Line {line}, column {column}: an error cannot be negative ({value}).")]
    NegativeError {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// The column.
        column: &'static str,
        /// The value found.
        value: String,
    },
    /// The upper-limit flag is neither 0 nor 1.
    #[error("Line {line}, column upper_limit: '{value}' must be 0 (detection) or 1 (upper limit).")]
    BadFlag {
        /// Line number in the file (the header is line 1).
        line: u64,
        /// The text found.
        value: String,
    },
}

/// Reads objects from CSV text (see the module documentation for the columns).
///
/// # Errors
///
/// An [`InputError`] naming the line (the header is line 1) and column at fault.
pub fn read_points(csv_text: &str) -> Result<Vec<Point>, InputError> {
    // The CSV reader counts neither comment nor blank lines, so both are dropped here and
    // the file's own line number of every kept line is remembered for the messages.
    let mut file_line: Vec<u64> = Vec::new();
    let mut kept = String::with_capacity(csv_text.len());
    for (i, l) in csv_text.lines().enumerate() {
        let t = l.trim();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        file_line.push(i as u64 + 1);
        kept.push_str(l);
        kept.push('\n');
    }
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(false)
        .from_reader(kept.as_bytes());
    let line_at = |pos: Option<&csv::Position>| -> u64 {
        let k = pos.map_or(1, csv::Position::line).max(1);
        let idx = usize::try_from(k - 1).unwrap_or(usize::MAX);
        file_line.get(idx).copied().unwrap_or(k)
    };
    let malformed = |e: &csv::Error| InputError::Malformed {
        line: line_at(e.position()),
        reason: match e.kind() {
            csv::ErrorKind::UnequalLengths {
                expected_len, len, ..
            } => format!("it has {len} fields where the header has {expected_len}"),
            csv::ErrorKind::Utf8 { .. } => "it is not UTF-8 text".to_owned(),
            _ => e.to_string(),
        },
    };
    let header = reader.headers().map_err(|e| malformed(&e))?.clone();
    if header.is_empty() || header.iter().all(str::is_empty) {
        return Err(InputError::Empty);
    }
    for (i, name) in header.iter().enumerate() {
        if header.iter().skip(i + 1).any(|other| other == name) {
            return Err(InputError::DuplicateColumn {
                column: name.to_owned(),
            });
        }
    }
    let index = |column: &str| header.iter().position(|h| h == column);
    let mut cols = [0_usize; 5];
    for (slot, column) in cols.iter_mut().zip(REQUIRED) {
        *slot = index(column).ok_or(InputError::MissingColumn { column })?;
    }
    let [ix, ixe, iy, iye, iul] = cols;
    let iname = index("name");
    let icov = index("xy_cov");

    let mut points = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|e| malformed(&e))?;
        let line = line_at(record.position());
        let number = |i: usize, column: &'static str| -> Result<f64, InputError> {
            let text = record.get(i).unwrap_or("");
            if text.is_empty() {
                return Err(InputError::MissingValue { line, column });
            }
            let v: f64 = text.parse().map_err(|_| InputError::NotANumber {
                line,
                column,
                value: text.to_owned(),
            })?;
            if !v.is_finite() {
                return Err(InputError::NotFinite {
                    line,
                    column,
                    value: text.to_owned(),
                });
            }
            Ok(v)
        };
        let error = |i: usize, column: &'static str| -> Result<f64, InputError> {
            let v = number(i, column)?;
            if v < 0.0 {
                return Err(InputError::NegativeError {
                    line,
                    column,
                    value: record.get(i).unwrap_or("").to_owned(),
                });
            }
            Ok(v)
        };
        let x = number(ix, "x")?;
        let x_err = error(ixe, "x_err")?;
        let y = number(iy, "y")?;
        let y_err = error(iye, "y_err")?;
        let upper_limit = match record.get(iul).unwrap_or("") {
            "0" => false,
            "1" => true,
            "" => {
                return Err(InputError::MissingValue {
                    line,
                    column: "upper_limit",
                });
            }
            other => {
                return Err(InputError::BadFlag {
                    line,
                    value: other.to_owned(),
                });
            }
        };
        let xy_cov = match icov {
            Some(i) if !record.get(i).unwrap_or("").is_empty() => number(i, "xy_cov")?,
            _ => 0.0,
        };
        let name = iname.and_then(|i| record.get(i)).unwrap_or("");
        let mut p = Point::new(x, x_err, y, y_err)
            .named(name)
            .with_xy_cov(xy_cov);
        p.upper_limit = upper_limit;
        points.push(p);
    }
    if points.is_empty() {
        return Err(InputError::NoRows);
    }
    Ok(points)
}

/// Runs `massline fit` and writes the result to `out`.
///
/// # Errors
///
/// The file cannot be read, its content is refused by [`read_points`], the fit, posterior or
/// bootstrap fails (the estimator's one-sentence reason), or writing to `out` fails.
pub fn run(args: &FitArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let text = std::fs::read_to_string(&args.input)
        .with_context(|| format!("Could not read the input file {}", args.input.display()))?;
    let points = read_points(&text)
        .with_context(|| format!("The input file {} was refused", args.input.display()))?;
    let settings = OwnSampleSettings {
        method: args.method,
        pivot: args.pivot,
        x_quantity: args.x_quantity,
        bootstrap: args.bootstrap,
        posterior_steps: args.posterior.then_some(args.steps),
        seed: args.seed,
    };
    let own = fit_own_sample(&points, &settings).map_err(OwnSampleError::into_fit_error)?;
    let pivot_rule = match own.pivot_rule {
        PivotRule::Given => "given with --pivot".to_owned(),
        rule => rule.label(),
    };
    let pivot_warning = own.pivot_rule.warning(own.pivot, &PIVOT_SETTINGS);
    let (fit, post, boot) = (own.fit, own.posterior, own.bootstrap);
    let mut warnings: Vec<String> = pivot_warning.into_iter().collect();
    warnings.extend(small_sample_warning(&fit));
    match args.format {
        OutputFormat::Json => {
            let mut v = to_json(&fit, &pivot_rule, args.seed, post.as_ref(), boot.as_ref());
            v["warnings"] = json!(warnings);
            serde_json::to_writer_pretty(&mut *out, &v)?;
            writeln!(out)?;
        }
        OutputFormat::Table => {
            write_table(out, &fit, &pivot_rule, post.as_ref(), boot.as_ref())?;
            for w in &warnings {
                writeln!(out, "\nNote: {w}")?;
            }
        }
    }
    Ok(())
}

/// The warning a small sample gets when its intervals come from the likelihood's curvature
/// alone: those are too small below [`SMALL_SAMPLE`] objects, while the restricted intervals
/// hold their coverage down to about 12 objects (tests/fit_simulation.rs).
fn small_sample_warning(fit: &Fit) -> Option<String> {
    (fit.n < SMALL_SAMPLE && fit.intervals.kind == IntervalKind::Curvature).then(|| {
        format!(
            "With only {} objects the intervals from the likelihood's curvature tend to be too \
             small (in simulations of 12 objects the 68% slope interval held the truth in about \
             63% of samples and the ε interval in 57%); add --posterior for the posterior \
             interval.",
            fit.n
        )
    })
}

/// One parameter summary as a JSON object.
fn summary_json(s: &ParamSummary) -> Value {
    json!({
        "median": s.median, "p16": s.p16, "p84": s.p84, "p2_5": s.p2_5, "p97_5": s.p97_5,
        "mean": s.mean, "sd": s.sd,
    })
}

/// The JSON document of a fit.
fn to_json(
    fit: &Fit,
    pivot_rule: &str,
    seed: u64,
    post: Option<&Posterior>,
    boot: Option<&Bootstrap>,
) -> Value {
    let mut v = json!({
        "method": fit.spec.method.as_str(),
        "alpha": fit.params.alpha,
        "beta": fit.params.beta,
        "eps": fit.params.eps,
        "alpha_err": fit.errors.alpha,
        "beta_err": fit.errors.beta,
        "eps_err": fit.errors.eps,
        "cov_names": fit.cov_names,
        "cov": fit.cov,
        "pivot": fit.spec.pivot,
        "pivot_rule": pivot_rule,
        "n": fit.n,
        "n_upper": fit.n_upper,
        "neg2_log_l": fit.neg2_log_l,
        "aic": fit.aic,
        "bic": fit.bic,
        "termination": fit.termination,
        "seed": seed,
        "x_model": fit.x_model,
        "intervals": {
            "kind": fit.intervals.kind.as_str(),
            "label": fit.intervals.kind.label(),
            "params": fit.intervals.params,
        },
    });
    if let Some(p) = post {
        let params: serde_json::Map<String, Value> = p
            .params
            .iter()
            .map(|s| (s.name.to_owned(), summary_json(s)))
            .collect();
        let tau: serde_json::Map<String, Value> = p
            .params
            .iter()
            .zip(&p.autocorr_time)
            .map(|(s, t)| (s.name.to_owned(), json!(t)))
            .collect();
        v["posterior"] = json!({
            "walkers": p.config.walkers,
            "steps": p.config.steps,
            "burn_in": p.config.burn_in,
            "seed": p.config.seed,
            "n_samples": p.n_samples,
            "acceptance_fraction": p.acceptance_fraction,
            "autocorr_time": tau,
            "warning": p.warning,
            "priors": p.priors,
            "params": params,
        });
    }
    if let Some(b) = boot {
        let params: serde_json::Map<String, Value> = b
            .params
            .iter()
            .map(|s| (s.name.to_owned(), summary_json(s)))
            .collect();
        v["bootstrap"] = json!({
            "n_boot": b.n_boot,
            "n_failed": b.n_failed,
            "seed": b.seed,
            "failures": b.failures,
            "params": params,
        });
    }
    v
}

/// Unit of a parameter for the table.
fn unit(name: &str) -> &'static str {
    match name {
        "beta" | "gamma" => "dex/dex",
        "beta2" => "dex/dex²",
        n if n.starts_with("w_") || n.starts_with("rho") => "",
        _ => "dex",
    }
}

/// Writes the plain-text table of a fit.
fn write_table(
    out: &mut dyn Write,
    fit: &Fit,
    pivot_rule: &str,
    post: Option<&Posterior>,
    boot: Option<&Bootstrap>,
) -> std::io::Result<()> {
    writeln!(
        out,
        "Fit of {} objects ({} of them upper limits) with the {} estimator",
        fit.n,
        fit.n_upper,
        fit.spec.method.as_str()
    )?;
    writeln!(
        out,
        "Model: y = alpha + beta (x - x0), intrinsic scatter eps in y; pivot x0 = {:.5} ({pivot_rule})",
        fit.spec.pivot
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "{:<12} {:>12} {:>12}  unit",
        "parameter", "value", "error"
    )?;
    let rows = [
        ("alpha", fit.params.alpha, fit.errors.alpha),
        ("beta", fit.params.beta, fit.errors.beta),
        ("eps", fit.params.eps, fit.errors.eps),
    ];
    for (name, v, e) in rows {
        writeln!(out, "{name:<12} {v:>12.5} {e:>12.5}  {}", unit(name))?;
    }
    if let Some(c) = fit.covariance("alpha", "beta") {
        writeln!(out, "{:<12} {c:>12.3e} {:>12}  dex²/dex", "cov(a,b)", "")?;
    }
    writeln!(out)?;
    writeln!(out, "Quote: {}", fit.intervals.kind.label())?;
    writeln!(
        out,
        "{:<12} {:>10} {:>10} {:>10} {:>10} {:>10}  unit",
        "parameter", "value", "16%", "84%", "2.5%", "97.5%"
    )?;
    for p in &fit.intervals.params {
        writeln!(
            out,
            "{:<12} {:>10.5} {:>10.5} {:>10.5} {:>10.5} {:>10.5}  {}",
            p.name,
            p.estimate,
            p.p16,
            p.p84,
            p.p2_5,
            p.p97_5,
            unit(p.name)
        )?;
    }
    writeln!(out)?;
    if let Some(m) = &fit.x_model {
        for (k, c) in m.iter().enumerate() {
            writeln!(
                out,
                "x model {}: weight {:.3}, mean {:.4}, sd {:.4} dex",
                k + 1,
                c.weight,
                c.mean,
                c.sd
            )?;
        }
    }
    if let (Some(l), Some(a), Some(b)) = (fit.neg2_log_l, fit.aic, fit.bic) {
        writeln!(out, "-2 ln L = {l:.4}, AIC = {a:.4}, BIC = {b:.4}")?;
    }
    writeln!(
        out,
        "Optimiser: {} ({} iterations, {} evaluations)",
        fit.termination.reason, fit.termination.iterations, fit.termination.evaluations
    )?;
    let header = |out: &mut dyn Write, last: &str| {
        writeln!(
            out,
            "{:<12} {:>10} {:>10} {:>10} {:>10} {:>10} {:>10}  unit",
            "parameter", "median", "16%", "84%", "2.5%", "97.5%", last
        )
    };
    let row = |out: &mut dyn Write, s: &ParamSummary, last: f64| {
        writeln!(
            out,
            "{:<12} {:>10.5} {:>10.5} {:>10.5} {:>10.5} {:>10.5} {last:>10.3}  {}",
            s.name,
            s.median,
            s.p16,
            s.p84,
            s.p2_5,
            s.p97_5,
            unit(s.name)
        )
    };
    if let Some(p) = post {
        writeln!(out)?;
        writeln!(
            out,
            "Posterior (flat priors): {} walkers x {} steps, burn-in {}, seed {}; acceptance {:.3}",
            p.config.walkers,
            p.config.steps,
            p.config.burn_in,
            p.config.seed,
            p.acceptance_fraction
        )?;
        header(out, "tau steps")?;
        for (s, t) in p.params.iter().zip(&p.autocorr_time) {
            row(out, s, *t)?;
        }
        if let Some(w) = &p.warning {
            writeln!(out, "Warning: {w}")?;
        }
    }
    if let Some(b) = boot {
        writeln!(out)?;
        writeln!(
            out,
            "Bootstrap: {} resamples, {} failed, seed {}",
            b.n_boot, b.n_failed, b.seed
        )?;
        header(out, "sd")?;
        for s in &b.params {
            row(out, s, s.sd)?;
        }
        for f in &b.failures {
            writeln!(out, "  {} failed: {}", f.count, f.reason)?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::relations::SIGMA_PIVOT_LOG;

    const GOOD: &str = "\
name,x,x_err,y,y_err,upper_limit,notes
a,2.10,0.02,7.40,0.10,0,first
b,2.20,0.02,7.90,0.20,0,
c,2.30,0.03,8.30,0.10,0,
d,2.40,0.01,8.70,0.15,0,
e,2.50,0.02,9.30,0.20,0,
f,2.35,0.02,8.00,0.00,1,limit
";

    #[test]
    fn reads_a_good_file_with_extra_columns() {
        let p = read_points(GOOD).unwrap();
        assert_eq!(p.len(), 6);
        assert_eq!(p[0].name, "a");
        assert!((p[0].x - 2.10).abs() < 1e-15 && (p[3].y_err - 0.15).abs() < 1e-15);
        assert!(p[5].upper_limit && !p[4].upper_limit);
    }

    #[test]
    fn column_order_is_free_and_name_and_covariance_are_optional() {
        let text = "upper_limit, y_err ,y,x_err,x,xy_cov\n0,0.1,8.0,0.02,2.3,0.001\n# comment\n1,0,7.5,0.02,2.2,\n";
        let p = read_points(text).unwrap();
        assert_eq!(p.len(), 2);
        assert!((p[0].x - 2.3).abs() < 1e-15 && (p[0].y - 8.0).abs() < 1e-15);
        assert!((p[0].xy_cov - 0.001).abs() < 1e-18);
        assert!(p[1].upper_limit && p[1].xy_cov.abs() < 1e-18 && p[1].name.is_empty());
    }

    #[test]
    fn every_refusal_names_the_line_and_column() {
        let head = "x,x_err,y,y_err,upper_limit\n";
        let ok = "2.3,0.02,8.0,0.1,0\n";
        let cases: Vec<(String, InputError)> = vec![
            (String::new(), InputError::Empty),
            (
                "x,x_err,y,upper_limit\n2.3,0.02,8.0,0\n".into(),
                InputError::MissingColumn { column: "y_err" },
            ),
            (
                "x,x_err,y,y_err,upper_limit,x\n2.3,0.02,8,0.1,0,1\n".into(),
                InputError::DuplicateColumn { column: "x".into() },
            ),
            (head.into(), InputError::NoRows),
            (
                format!("{head}{ok}2.3,0.02,8.0\n"),
                InputError::Malformed {
                    line: 3,
                    reason: "it has 3 fields where the header has 5".into(),
                },
            ),
            (
                format!("{head}{ok}{ok}2.3,,8.0,0.1,0\n"),
                InputError::MissingValue {
                    line: 4,
                    column: "x_err",
                },
            ),
            (
                format!("{head}2.3,0.02,eight,0.1,0\n"),
                InputError::NotANumber {
                    line: 2,
                    column: "y",
                    value: "eight".into(),
                },
            ),
            (
                format!("{head}NaN,0.02,8.0,0.1,0\n"),
                InputError::NotFinite {
                    line: 2,
                    column: "x",
                    value: "NaN".into(),
                },
            ),
            (
                format!("{head}2.3,0.02,inf,0.1,0\n"),
                InputError::NotFinite {
                    line: 2,
                    column: "y",
                    value: "inf".into(),
                },
            ),
            (
                format!("{head}{ok}2.3,0.02,8.0,-0.1,0\n"),
                InputError::NegativeError {
                    line: 3,
                    column: "y_err",
                    value: "-0.1".into(),
                },
            ),
            (
                format!("{head}2.3,-0.02,8.0,0.1,0\n"),
                InputError::NegativeError {
                    line: 2,
                    column: "x_err",
                    value: "-0.02".into(),
                },
            ),
            (
                format!("{head}2.3,0.02,8.0,0.1,yes\n"),
                InputError::BadFlag {
                    line: 2,
                    value: "yes".into(),
                },
            ),
            (
                format!("{head}2.3,0.02,8.0,0.1,\n"),
                InputError::MissingValue {
                    line: 2,
                    column: "upper_limit",
                },
            ),
            (
                "x,x_err,y,y_err,upper_limit,xy_cov\n2.3,0.02,8.0,0.1,0,big\n".into(),
                InputError::NotANumber {
                    line: 2,
                    column: "xy_cov",
                    value: "big".into(),
                },
            ),
        ];
        for (text, expected) in cases {
            let got = read_points(&text).unwrap_err();
            assert_eq!(got, expected, "input:\n{text}");
            let msg = got.to_string();
            // One sentence: ends with a full stop and has no line break.
            assert!(msg.ends_with('.') && !msg.contains('\n'), "{msg}");
        }
        // A comment line still counts as a line of the file.
        let err = read_points(&format!("{head}# note\n2.3,0.02,8.0,0.1,2\n")).unwrap_err();
        assert_eq!(
            err,
            InputError::BadFlag {
                line: 3,
                value: "2".into()
            }
        );
        assert!(err.to_string().starts_with("Line 3, column upper_limit"));
    }

    /// Writes `text` to a fresh file and returns its directory guard and path.
    fn temp_csv(text: &str) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("sample.csv");
        std::fs::write(&path, text).unwrap();
        (dir, path)
    }

    fn small_csv() -> String {
        // Invented M–σ-like points on log M = 8.3 + 4.5 (x − 2.30103) with ±0.3 dex offsets.
        let mut s = String::from("x,x_err,y,y_err,upper_limit\n");
        let xs = [
            2.05, 2.12, 2.18, 2.22, 2.27, 2.31, 2.35, 2.40, 2.44, 2.50, 2.55, 2.28,
        ];
        for (i, x) in xs.iter().enumerate() {
            let off = [
                0.3, -0.25, 0.1, -0.35, 0.2, -0.1, 0.3, -0.2, 0.05, -0.3, 0.25, 0.6,
            ][i];
            let y = 8.3 + 4.5 * (x - SIGMA_PIVOT_LOG) + off;
            let lim = u8::from(i == xs.len() - 1);
            s.push_str(&format!("{x},0.02,{y:.3},0.1,{lim}\n"));
        }
        s
    }

    fn args(path: PathBuf, method: Method, format: OutputFormat) -> FitArgs {
        FitArgs {
            input: path,
            method,
            posterior: false,
            steps: 600,
            bootstrap: None,
            pivot: None,
            // The invented samples are log σ: named, so that only the small-sample note warns.
            x_quantity: Some(XQuantity::Sigma),
            seed: 3,
            format,
        }
    }

    #[test]
    fn a_small_sample_quotes_restricted_intervals_without_resampling_unasked() {
        let (_dir, path) = temp_csv(&small_csv());
        let mut out = Vec::new();
        run(
            &args(path.clone(), Method::Conditional, OutputFormat::Json),
            &mut out,
        )
        .unwrap();
        let v: Value = serde_json::from_slice(&out).unwrap();
        // The restricted intervals are quoted: no warning, no automatic bootstrap.
        assert!(v["warnings"].as_array().unwrap().is_empty(), "{v}");
        assert!(v.get("bootstrap").is_none());
        assert_eq!(v["intervals"]["kind"], "restricted");
        let eps = v["intervals"]["params"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["name"] == "eps")
            .unwrap()
            .clone();
        let ml = v["eps"].as_f64().unwrap();
        assert!(eps["estimate"].as_f64().unwrap() > ml, "{eps} vs {ml}");
        assert!(eps["p16"].as_f64().unwrap() < eps["p84"].as_f64().unwrap());
        // The table says what to quote and how it was computed.
        let mut out = Vec::new();
        run(
            &args(path.clone(), Method::Conditional, OutputFormat::Table),
            &mut out,
        )
        .unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(text.contains("Quote: restricted likelihood"), "{text}");
        assert!(
            !text.contains("Bootstrap:") && !text.contains("Note:"),
            "{text}"
        );
        // Curvature-only intervals at small N would get the warning.
        let points = read_points(&small_csv()).unwrap();
        let mut f =
            crate::fit::fit(&points, &crate::fit::FitSpec::new(Method::Conditional, 2.3)).unwrap();
        assert!(small_sample_warning(&f).is_none());
        f.intervals.kind = IntervalKind::Curvature;
        let w = small_sample_warning(&f).unwrap();
        assert!(
            w.contains("With only 12 objects") && w.contains("--posterior"),
            "{w}"
        );
    }

    #[test]
    fn a_large_sample_gets_no_small_sample_note() {
        let mut csv = String::from("x,x_err,y,y_err,upper_limit\n");
        for i in 0..40 {
            let x = 2.0 + 0.012 * f64::from(i);
            let off = if i % 2 == 0 { 0.25 } else { -0.25 };
            let y = 8.3 + 4.5 * (x - SIGMA_PIVOT_LOG) + off;
            csv.push_str(&format!("{x},0.02,{y:.3},0.1,0\n"));
        }
        let (_dir, path) = temp_csv(&csv);
        let mut out = Vec::new();
        run(
            &args(path, Method::Conditional, OutputFormat::Json),
            &mut out,
        )
        .unwrap();
        let v: Value = serde_json::from_slice(&out).unwrap();
        assert!(v["warnings"].as_array().unwrap().is_empty());
        assert!(v.get("bootstrap").is_none());
    }

    #[test]
    fn json_output_has_every_documented_key() {
        let (_dir, path) = temp_csv(&small_csv());
        let mut a = args(path, Method::Conditional, OutputFormat::Json);
        a.bootstrap = Some(50);
        a.posterior = true;
        let mut out = Vec::new();
        run(&a, &mut out).unwrap();
        let v: Value = serde_json::from_slice(&out).unwrap();
        for key in [
            "alpha",
            "beta",
            "eps",
            "alpha_err",
            "beta_err",
            "eps_err",
            "cov",
            "cov_names",
            "pivot",
            "n",
            "n_upper",
            "method",
            "neg2_log_l",
            "aic",
            "bic",
            "termination",
            "seed",
            "posterior",
            "bootstrap",
        ] {
            assert!(v.get(key).is_some(), "missing key {key} in {v}");
        }
        assert_eq!(v["n"], 12);
        assert_eq!(v["n_upper"], 1);
        assert_eq!(v["method"], "conditional");
        assert!((v["pivot"].as_f64().unwrap() - SIGMA_PIVOT_LOG).abs() < 1e-12);
        // The invented sample's slope is 4.5 (small_csv); 3–6 is the project's margin.
        assert!((3.0..6.0).contains(&v["beta"].as_f64().unwrap()), "{v}");
        assert_eq!(v["bootstrap"]["n_boot"], 50);
        assert!(v["posterior"]["params"]["beta"]["median"].is_f64());
        assert!(v["bootstrap"]["params"]["beta"]["p84"].is_f64());
    }

    #[test]
    fn table_output_prints_units_and_the_pivot() {
        let (_dir, path) = temp_csv(&small_csv());
        let mut a = args(path, Method::Structural, OutputFormat::Table);
        a.pivot = Some(2.3);
        let mut out = Vec::new();
        run(&a, &mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(
            text.contains("pivot x0 = 2.30000 (given with --pivot)"),
            "{text}"
        );
        assert!(
            text.contains("dex/dex") && text.contains("structural"),
            "{text}"
        );
        let beta_line = text.lines().find(|l| l.starts_with("beta ")).unwrap();
        assert_eq!(beta_line.split_whitespace().count(), 4, "{beta_line}");
    }

    /// 40 invented σ-like objects (log σ 2.0–2.47, median 2.234) on log M = 8.3 + 4.5 (x −
    /// log10 200) with ±0.25 dex offsets: enough objects for no small-sample note.
    fn sigma_csv() -> String {
        let mut csv = String::from("x,x_err,y,y_err,upper_limit\n");
        for i in 0..40 {
            let x = 2.0 + 0.012 * f64::from(i);
            let off = if i % 2 == 0 { 0.25 } else { -0.25 };
            let y = 8.3 + 4.5 * (x - SIGMA_PIVOT_LOG) + off;
            csv.push_str(&format!("{x},0.02,{y:.3},0.1,0\n"));
        }
        csv
    }

    /// The JSON output of `massline fit` on `path` with these pivot settings.
    fn pivot_run(
        path: &std::path::Path,
        x_quantity: Option<XQuantity>,
        pivot: Option<f64>,
    ) -> Value {
        let mut a = args(path.to_owned(), Method::Conditional, OutputFormat::Json);
        a.x_quantity = x_quantity;
        a.pivot = pivot;
        let mut out = Vec::new();
        run(&a, &mut out).unwrap();
        serde_json::from_slice(&out).unwrap()
    }

    /// The warnings about the pivot.
    fn pivot_warnings(v: &Value) -> Vec<String> {
        v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(Value::as_str)
            .filter(|w| w.contains("pivot"))
            .map(str::to_owned)
            .collect()
    }

    #[test]
    fn x_quantity_gives_its_convention_and_only_an_inferred_or_median_pivot_warns() {
        let (_dir, path) = temp_csv(&sigma_csv());
        // Conventions: log10 200 km/s (Tremaine et al. 2002), 10^11 M☉, 10^11 L☉.
        for (q, x0) in [
            (XQuantity::Sigma, SIGMA_PIVOT_LOG),
            (XQuantity::Mass, 11.0),
            (XQuantity::Luminosity, 11.0),
        ] {
            let v = pivot_run(&path, Some(q), None);
            assert!(
                (v["pivot"].as_f64().unwrap() - x0).abs() < 1e-12,
                "{q:?}: {v}"
            );
            assert!(pivot_warnings(&v).is_empty(), "{q:?}: {v}");
        }
        // other: the median 2.234 rounded to 0.5 is 2.0 (computed), with a warning.
        let v = pivot_run(&path, Some(XQuantity::Other), None);
        assert!((v["pivot"].as_f64().unwrap() - 2.0).abs() < 1e-12, "{v}");
        let w = pivot_warnings(&v);
        assert_eq!(w.len(), 1, "{v}");
        assert!(
            w[0].contains("--x-quantity other") && w[0].contains("--pivot X0"),
            "{w:?}"
        );
        // Unnamed: the median lies in 1.3–2.8, so log10 200, with a warning saying so.
        let v = pivot_run(&path, None, None);
        assert!(
            (v["pivot"].as_f64().unwrap() - SIGMA_PIVOT_LOG).abs() < 1e-12,
            "{v}"
        );
        let w = pivot_warnings(&v);
        assert_eq!(w.len(), 1, "{v}");
        for part in [
            "x0 = 2.30103",
            "median x = 2.23",
            "--x-quantity sigma",
            "--pivot X0",
        ] {
            assert!(w[0].contains(part), "{part}: {w:?}");
        }
        assert!(
            v["pivot_rule"].as_str().unwrap().contains("inferred"),
            "{v}"
        );
        // --pivot wins over --x-quantity, with no warning.
        let v = pivot_run(&path, Some(XQuantity::Mass), Some(2.2));
        assert!((v["pivot"].as_f64().unwrap() - 2.2).abs() < 1e-12, "{v}");
        assert_eq!(v["pivot_rule"], "given with --pivot");
        assert!(pivot_warnings(&v).is_empty(), "{v}");
    }

    #[test]
    fn the_table_prints_the_inferred_pivot_and_its_warning() {
        let (_dir, path) = temp_csv(&sigma_csv());
        let mut a = args(path, Method::Conditional, OutputFormat::Table);
        a.x_quantity = None;
        let mut out = Vec::new();
        run(&a, &mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(
            text.contains("pivot x0 = 2.30103 (log10 of 200 km/s"),
            "{text}"
        );
        assert!(
            text.contains("Note: The pivot x0 = 2.30103") && text.contains("--x-quantity sigma"),
            "{text}"
        );
    }

    #[test]
    fn an_unknown_x_quantity_is_refused_with_the_accepted_words() {
        #[derive(clap::Parser, Debug)]
        struct Command {
            #[command(flatten)]
            fit: FitArgs,
        }
        use clap::Parser as _;
        let parse =
            |word: &str| Command::try_parse_from(["fit", "--input", "s.csv", "--x-quantity", word]);
        for q in XQuantity::ALL {
            assert_eq!(parse(q.as_str()).unwrap().fit.x_quantity, Some(q));
        }
        let e = parse("velocity").unwrap_err().to_string();
        assert!(
            e.contains("'velocity' is not a quantity of x; type sigma (log10 σ in km/s), mass"),
            "{e}"
        );
        assert!(e.contains("luminosity") && e.contains("or other."), "{e}");
    }

    #[test]
    fn a_refused_file_reports_the_reason() {
        let (_dir, path) = temp_csv("x,x_err,y,y_err,upper_limit\n2.3,0.02,8,0.1,maybe\n");
        let err = run(
            &args(path, Method::Conditional, OutputFormat::Json),
            &mut Vec::new(),
        )
        .unwrap_err();
        let chain = format!("{err:#}");
        assert!(chain.contains("Line 2, column upper_limit"), "{chain}");
        let missing = args(
            "/nonexistent/file.csv".into(),
            Method::Conditional,
            OutputFormat::Json,
        );
        assert!(run(&missing, &mut Vec::new()).is_err());
    }
}
