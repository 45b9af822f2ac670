//! `massline virial-factor [--width-definition W] [--bulge-kind K] [--version N] [--adopt
//! --note TEXT]`: print the calibration of the mean virial factor ⟨f⟩ on the local database
//! (`relations::virial::calibration`), and with `--adopt` adopt it (a new catalog version; the
//! audit log records no account, as for every command-line change).

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use crate::catalog::{self, history};
use crate::config::{DEFAULT_DB_PATH, DEFAULT_SOI_THRESHOLD};
use crate::relations::virial::{CalibrationAsk, adopt_calibration, calibration};
use crate::relations::{Catalog, FitCache};

/// Arguments of `massline virial-factor`.
#[derive(Args, Debug, Clone)]
pub struct VirialArgs {
    /// SQLite database file.
    #[arg(long = "db", env = "MASSLINE_DB", default_value = DEFAULT_DB_PATH)]
    pub db_path: PathBuf,
    /// The broad-line width measure: sigma_line or fwhm.
    #[arg(long, default_value = "sigma_line")]
    pub width_definition: String,
    /// The bulge-kind subsample: any, classical or pseudo.
    #[arg(long, default_value = "any")]
    pub bulge_kind: String,
    /// How the slope is set: held (at the quiescent fit) or joint.
    #[arg(long, default_value = "held")]
    pub slope: String,
    /// A past catalog version to calibrate on (default: the current one; only the current
    /// one can be adopted).
    #[arg(long)]
    pub version: Option<i64>,
    /// Adopt the calibration: a new catalog version rescales the AGN masses of the width
    /// measure.
    #[arg(long)]
    pub adopt: bool,
    /// A note recorded with the adoption.
    #[arg(long, default_value = "")]
    pub note: String,
}

/// Prints the calibration (and adopts it with `--adopt`) on `out`.
///
/// # Errors
/// When the database cannot be opened, a choice or version is refused, or the adoption is
/// refused (one sentence).
pub fn run(args: &VirialArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let pairs = vec![
        ("width_definition".to_owned(), args.width_definition.clone()),
        ("bulge_kind".to_owned(), args.bulge_kind.clone()),
        ("slope".to_owned(), args.slope.clone()),
    ];
    let ask = CalibrationAsk::read(&pairs, false).map_err(|faults| {
        anyhow::anyhow!(
            faults
                .into_iter()
                .map(|(_, e)| e)
                .collect::<Vec<_>>()
                .join(" ")
        )
    })?;
    let runtime = tokio::runtime::Runtime::new()?;
    runtime.block_on(async {
        let pool = catalog::connect(&args.db_path).await?;
        let current = history::current_version(&pool).await?;
        if args.adopt && args.version.is_some_and(|v| v != current) {
            anyhow::bail!(
                "Only a calibration of the current catalog (version {current}) can be adopted; leave --version out."
            );
        }
        let pinned = match args.version {
            Some(v) => Some(
                history::resolve(&pool, &history::VersionAsk::Number(v))
                    .await?
                    .version,
            ),
            None => None,
        };
        let catalog = Catalog {
            pool: pool.clone(),
            fits: FitCache::default(),
            soi_threshold: DEFAULT_SOI_THRESHOLD,
            pinned,
        };
        let view = calibration(&catalog, ask)
            .await
            .map_err(|e| anyhow::anyhow!("{e}"))?;
        writeln!(
            out,
            "Catalog version {}: {}, slope {}; {} AGN against {} quiescent galaxies.",
            view.version,
            ask.words(),
            ask.slope.label(),
            view.agn.len(),
            view.quiescent.len()
        )?;
        writeln!(
            out,
            "Adopted now: log <f> = {:.3} ± {:.3} dex.",
            view.adopted.0, view.adopted.1
        )?;
        match &view.outcome {
            Ok(c) => {
                writeln!(
                    out,
                    "Calibrated: log <f> = {:.3} ± {:.3} dex (AGN {:.3}, relation {:.3}); <f> = {:.2} ({:.2}–{:.2}); AGN scatter {:.2} dex.",
                    c.log_f.0,
                    c.log_f.1,
                    c.log_f_err_agn,
                    c.log_f_err_relation,
                    c.f,
                    c.f_interval.0,
                    c.f_interval.1,
                    c.eps_agn
                )?;
            }
            Err(why) => writeln!(out, "{why}")?,
        }
        if args.adopt {
            let adopted = adopt_calibration(&catalog, None, ask, Some(view.version), &args.note)
                .await
                .map_err(|e| anyhow::anyhow!("{e}"))?;
            writeln!(
                out,
                "Adopted: catalog version {} uses log <f> = {:.3} for the {} (was {:.3}).",
                adopted.version,
                adopted.log_f_after,
                adopted.width.label(),
                adopted.log_f_before
            )?;
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_empty_catalog_says_how_many_agn_it_lacks_and_adopts_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let db = dir.path().join("catalog.db");
        let args = VirialArgs {
            db_path: db,
            width_definition: "sigma_line".to_owned(),
            bulge_kind: "any".to_owned(),
            slope: "held".to_owned(),
            version: None,
            adopt: true,
            note: String::new(),
        };
        let mut out = Vec::new();
        let err = run(&args, &mut out).unwrap_err();
        let said = String::from_utf8(out).unwrap();
        assert!(said.contains("has 0 reverberation AGN"), "{said}");
        assert!(err.to_string().contains("at least 5"), "{err}");
        let bad = VirialArgs {
            bulge_kind: "spiral".to_owned(),
            ..args
        };
        assert!(run(&bad, &mut Vec::new()).is_err());
    }
}
