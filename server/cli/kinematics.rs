//! `massline kinematics --input FILE.csv --distance D --distance-err E --inclination I
//! --inclination-err E [...] [--json]`: a black-hole mass from a velocity table of a rotating
//! disk, the same answer as the page `/kinematics` and `POST /api/v1/kinematics`
//! (`relations::kinematics::fit_table`). Reads no database and stores nothing.

use std::io::Write;
use std::path::PathBuf;

use clap::Args;

use crate::config::DEFAULT_SOI_THRESHOLD;
use crate::relations::kinematics::{KinematicsFault, KinematicsResult, fit_table};

/// Arguments of `massline kinematics`.
#[derive(Args, Debug, Clone, Default)]
pub struct KinematicsArgs {
    /// The velocity table (CSV: offset_arcsec|offset_mas|offset_pc|offset, v_km_s,
    /// v_err_km_s, optional acceleration_km_s_yr, acceleration_err_km_s_yr).
    #[arg(long)]
    pub input: PathBuf,
    /// Distance, Mpc.
    #[arg(long)]
    pub distance: String,
    /// Its 1σ error, Mpc.
    #[arg(long)]
    pub distance_err: String,
    /// Inclination in degrees (90 edge-on), or "unknown" (the mass is then M sin² i).
    #[arg(long)]
    pub inclination: String,
    /// Its 1σ error, degrees.
    #[arg(long)]
    pub inclination_err: Option<String>,
    /// The unit of a plain "offset" column: arcsec, mas or pc.
    #[arg(long)]
    pub offset_unit: Option<String>,
    /// The host's velocity dispersion σ, km/s (for the sphere of influence).
    #[arg(long)]
    pub sigma: Option<String>,
    /// The data's resolution, arcsec.
    #[arg(long)]
    pub resolution: Option<String>,
    /// The sphere-of-influence threshold θ_infl / resolution (default 1).
    #[arg(long)]
    pub soi_threshold: Option<String>,
    /// Stars as a Plummer sphere: total luminosity (L☉) and scale radius (pc), "L,a".
    #[arg(long)]
    pub plummer: Option<String>,
    /// Stars as a power law of the enclosed light: "L_ref,r_ref,slope" (L☉, pc).
    #[arg(long)]
    pub power_law: Option<String>,
    /// A fixed mass-to-light ratio Υ (M☉/L☉); left out, Υ is fitted.
    #[arg(long)]
    pub upsilon: Option<String>,
    /// A dark cluster's radius r_c, pc.
    #[arg(long)]
    pub cluster_r_c: Option<String>,
    /// Print the whole result as JSON (the API's answer).
    #[arg(long)]
    pub json: bool,
}

impl KinematicsArgs {
    /// The settings as the domain reads them.
    fn pairs(&self) -> anyhow::Result<Vec<(String, String)>> {
        let mut pairs = vec![
            ("distance_mpc".to_owned(), self.distance.clone()),
            ("distance_err_mpc".to_owned(), self.distance_err.clone()),
            ("inclination_deg".to_owned(), self.inclination.clone()),
        ];
        let mut put = |k: &str, v: &Option<String>| {
            if let Some(v) = v {
                pairs.push((k.to_owned(), v.clone()));
            }
        };
        put("inclination_err_deg", &self.inclination_err);
        put("offset_unit", &self.offset_unit);
        put("sigma_km_s", &self.sigma);
        put("resolution_arcsec", &self.resolution);
        put("soi_threshold", &self.soi_threshold);
        put("upsilon", &self.upsilon);
        put("cluster_r_c_pc", &self.cluster_r_c);
        if let Some(p) = &self.plummer {
            let Some((l, a)) = p.split_once(',') else {
                anyhow::bail!(
                    "--plummer takes the luminosity and the scale radius as L,a (L☉, pc), such as 1e9,40."
                );
            };
            pairs.push(("plummer_l_lsun".to_owned(), l.to_owned()));
            pairs.push(("plummer_a_pc".to_owned(), a.to_owned()));
        }
        if let Some(p) = &self.power_law {
            let parts: Vec<&str> = p.split(',').collect();
            let [l, r, s] = parts.as_slice() else {
                anyhow::bail!(
                    "--power-law takes L_ref,r_ref,slope (L☉, pc, slope of L(<r)), such as 5e8,50,1.2."
                );
            };
            pairs.push(("power_l_ref_lsun".to_owned(), (*l).to_owned()));
            pairs.push(("power_r_ref_pc".to_owned(), (*r).to_owned()));
            pairs.push(("power_slope".to_owned(), (*s).to_owned()));
        }
        Ok(pairs)
    }
}

/// The option a setting is typed with.
fn option_of(field: &str) -> String {
    match field {
        "distance_mpc" => "--distance".to_owned(),
        "distance_err_mpc" => "--distance-err".to_owned(),
        "inclination_deg" => "--inclination".to_owned(),
        "inclination_err_deg" => "--inclination-err".to_owned(),
        "sigma_km_s" => "--sigma".to_owned(),
        "resolution_arcsec" => "--resolution".to_owned(),
        "cluster_r_c_pc" => "--cluster-r-c".to_owned(),
        f if f.starts_with("plummer") => "--plummer".to_owned(),
        f if f.starts_with("power") => "--power-law".to_owned(),
        f => format!("--{}", f.replace('_', "-")),
    }
}

/// Fits the table and prints the result on `out` (text, or JSON with `--json`).
///
/// # Errors
/// When the file cannot be read, or the table or a setting is at fault (every faulty row and
/// setting listed), or the fit refuses the data.
pub fn run(args: &KinematicsArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let text = std::fs::read_to_string(&args.input)
        .map_err(|e| anyhow::anyhow!("{} cannot be read: {e}", args.input.display()))?;
    let threshold = DEFAULT_SOI_THRESHOLD;
    let outcome = fit_table(&text, &args.pairs()?, threshold);
    let result = match outcome {
        Ok(o) => o.result,
        Err(fault) => {
            let lines: Vec<String> = match &fault {
                KinematicsFault::Settings(fields) => fields
                    .iter()
                    .map(|f| format!("{}: {}", option_of(&f.field), f.message))
                    .collect(),
                other => other.fields().into_iter().map(|f| f.message).collect(),
            };
            anyhow::bail!("{}\n  {}", fault.summary(), lines.join("\n  "));
        }
    };
    if args.json {
        serde_json::to_writer_pretty(&mut *out, &result)?;
        writeln!(out)?;
    } else {
        write_text(&result, out)?;
    }
    Ok(())
}

/// The result in a few lines for people.
fn write_text(r: &KinematicsResult, out: &mut dyn Write) -> anyhow::Result<()> {
    let what = if r.mass_is_m_sin2i {
        "log (M_BH sin² i)"
    } else {
        "log M_BH"
    };
    writeln!(
        out,
        "{what} = {:.3} ± {:.3} dex [log10 M☉] ({} model; statistical {:.2e}, inclination {:.2e}, distance {:.2e}).",
        r.log_mbh,
        r.log_mbh_err_total_dex,
        r.adopted_model,
        r.log_mbh_err_stat_dex,
        r.log_mbh_err_inclination_dex,
        r.log_mbh_err_distance_dex
    )?;
    writeln!(
        out,
        "{} rotation-curve points, {} systemic features; innermost radius {:.4} pc ({:.4} arcsec); least mean density inside it {:.3e} M☉/pc³.",
        r.n_points,
        r.n_systemic,
        r.innermost_radius_pc,
        r.innermost_radius_arcsec,
        r.minimum_density_msun_pc3
    )?;
    for m in std::iter::once(&r.point_mass).chain(r.extended.as_ref()) {
        writeln!(
            out,
            "  {}: log M_BH = {:.3} ± {:.2e}, ln L = {:.2}, k = {}, AIC = {:.2}, BIC = {:.2}.",
            m.model,
            m.log_mbh,
            m.log_mbh_err_stat_dex,
            m.max_log_likelihood,
            m.n_params,
            m.aic,
            m.bic
        )?;
    }
    if let Some(c) = &r.comparison {
        writeln!(out, "{}", c.words)?;
    }
    match (&r.slope, &r.slope_note) {
        (Some(s), _) => writeln!(out, "{}", s.words)?,
        (None, Some(n)) => writeln!(out, "No slope: {n}")?,
        _ => {}
    }
    match (&r.posterior, &r.posterior_note) {
        (Some(p), _) => writeln!(
            out,
            "Posterior (flat priors, without the distance error): median {:.3}, 68 % interval {:.3} to {:.3}.",
            p.median_log_mbh, p.low_log_mbh, p.high_log_mbh
        )?,
        (None, Some(n)) => writeln!(out, "No posterior interval: {n}")?,
        _ => {}
    }
    if let Some(i) = &r.influence {
        writeln!(
            out,
            "Sphere of influence: r_infl = {:.4} pc, θ_infl = {:.4} arcsec: {} ({}).",
            i.r_infl_pc,
            i.theta_infl_arcsec,
            if i.resolved {
                "resolved"
            } else {
                "not resolved"
            },
            i.basis
        )?;
    }
    if let Some(m) = &r.maser_distance {
        writeln!(out, "{}", m.words)?;
    }
    if let Some(n) = &r.maser_note {
        writeln!(out, "No maser distance: {n}")?;
    }
    writeln!(
        out,
        "To submit: method {}, value “{}”, at {} Mpc{}.",
        r.prefill.method,
        r.prefill.value,
        r.prefill.distance_mpc,
        r.prefill
            .resolution_arcsec
            .map_or_else(String::new, |x| format!(", resolution {x} arcsec"))
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_faulty_setting_is_named_by_its_option() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("disk.csv");
        std::fs::write(&input, "offset_pc,v_km_s,v_err_km_s\n0.1,300,5\n").unwrap();
        let args = KinematicsArgs {
            input,
            distance: "ten".to_owned(),
            distance_err: "1".to_owned(),
            inclination: "80".to_owned(),
            inclination_err: Some("3".to_owned()),
            ..KinematicsArgs::default()
        };
        let err = run(&args, &mut Vec::new()).unwrap_err().to_string();
        assert!(err.contains("--distance: "), "{err}");
    }
}
