//! Calibrating the mean virial factor ⟨f⟩ of reverberation-mapped AGN on the catalog, and
//! adopting it (docs/methods.md §4.3).
//!
//! The quiescent sample is the default M–σ sample of the relation pages (dynamical masses
//! only, σ_e, the structural estimator's limits rule), optionally cut to one bulge kind. The
//! AGN are the galaxies whose adopted black-hole mass is a reverberation mass of the chosen
//! width measure with a known assumed factor, and an adopted σ_e (the same bulge kind). Each
//! gives its virial product
//!
//! ```text
//! log VP = stored log M − assumed log f = log M (rows) − log ⟨f⟩ applied     (dex, M☉)
//! ```
//!
//! (the rows carry the mass already moved to the factor in force, `mbh_log_f`; §4.1). The
//! calibration is `fit::virial::calibrate_with`: the slope held at the quiescent structural fit,
//! or fitted jointly with the AGN (`SlopeChoice`). The
//! page `/virial-factor`, the API's `/api/v1/virial-factor` and `massline virial-factor` all
//! answer from [`calibration`]; [`adopt_calibration`] adopts one.

use std::fmt;

use super::{Catalog, FitChoice, Relation, build_sample};
use crate::catalog::model::{BulgeKind, WidthDefinition};
use crate::catalog::virial as stored;
use crate::error::{AppError, AppResult};
use crate::fit::virial::{AgnPoint, MIN_AGN, SlopeMode, calibrate_with};

/// How the slope of the relation the AGN are held against is set (`fit::virial::SlopeMode`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SlopeChoice {
    /// α and β from the quiescent structural fit, their errors carried (the default).
    #[default]
    Held,
    /// α and β fitted with both samples in one likelihood, each with its own true-σ model and
    /// scatter.
    Joint,
}

impl SlopeChoice {
    /// Every choice, in display order.
    pub const ALL: [SlopeChoice; 2] = [SlopeChoice::Held, SlopeChoice::Joint];

    /// The query word.
    pub fn as_str(self) -> &'static str {
        self.mode().as_str()
    }

    /// The words shown to people.
    pub fn label(self) -> &'static str {
        match self {
            SlopeChoice::Held => "held at the quiescent fit",
            SlopeChoice::Joint => "fitted jointly with the AGN",
        }
    }

    /// The fit's mode.
    pub fn mode(self) -> SlopeMode {
        match self {
            SlopeChoice::Held => SlopeMode::Held,
            SlopeChoice::Joint => SlopeMode::Joint,
        }
    }
}

impl std::str::FromStr for SlopeChoice {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        SlopeChoice::ALL
            .into_iter()
            .find(|c| c.as_str() == s.trim())
            .ok_or_else(|| format!("'{}' is not one of: held, joint", s.trim()))
    }
}

impl fmt::Display for SlopeChoice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.label())
    }
}

/// What a calibration is asked for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CalibrationAsk {
    /// The broad-line width measure (each has its own ⟨f⟩).
    pub width: WidthDefinition,
    /// The bulge-kind subsample, or every galaxy.
    pub bulge_kind: Option<BulgeKind>,
    /// How the slope is set.
    pub slope: SlopeChoice,
}

impl Default for CalibrationAsk {
    fn default() -> Self {
        Self {
            width: WidthDefinition::SigmaLine,
            bulge_kind: None,
            slope: SlopeChoice::Held,
        }
    }
}

/// The query parameters [`CalibrationAsk::read`] takes (besides `version`/`release`).
pub const CALIBRATION_PARAMS: [&str; 3] = ["width_definition", "bulge_kind", "slope"];

impl CalibrationAsk {
    /// Reads the choices from query pairs (`version`/`release` taken out already). An empty
    /// value means the default when `empty_is_default` (a page's form), and is refused
    /// otherwise (the API).
    ///
    /// # Errors
    /// One (parameter, sentence) per value at fault, and for any other parameter.
    pub fn read(
        pairs: &[(String, String)],
        empty_is_default: bool,
    ) -> Result<Self, Vec<(String, String)>> {
        let mut ask = Self::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            let value = value.trim();
            if value.is_empty() {
                if !empty_is_default && CALIBRATION_PARAMS.contains(&key.as_str()) {
                    problems.push((
                        key.clone(),
                        "The value is empty; leave the parameter out to mean the default."
                            .to_owned(),
                    ));
                }
                continue;
            }
            let result = match key.as_str() {
                "width_definition" => value.parse().map(|w| ask.width = w),
                "bulge_kind" if value == "any" => {
                    ask.bulge_kind = None;
                    Ok(())
                }
                "bulge_kind" => value
                    .parse::<BulgeKind>()
                    .map_err(|_| format!("'{value}' is not one of: any, classical, pseudo"))
                    .and_then(|b| match b {
                        BulgeKind::Unknown => {
                            Err("'unknown' is not one of: any, classical, pseudo".to_owned())
                        }
                        b => {
                            ask.bulge_kind = Some(b);
                            Ok(())
                        }
                    }),
                "slope" => value.parse().map(|s| ask.slope = s),
                other => {
                    let name: String = other.chars().take(40).collect();
                    problems.push((
                        name.clone(),
                        format!(
                            "'{name}' is not a parameter here; give width_definition, bulge_kind, slope, version or release."
                        ),
                    ));
                    continue;
                }
            };
            if let Err(e) = result {
                let e: String = e.chars().take(200).collect();
                problems.push((key.clone(), format!("Parameter '{key}': {e}.")));
            }
        }
        if problems.is_empty() {
            Ok(ask)
        } else {
            Err(problems)
        }
    }

    /// The bulge kind's query word ("any" for every galaxy).
    pub fn bulge_word(&self) -> &'static str {
        self.bulge_kind.map_or("any", BulgeKind::as_str)
    }

    /// `width_definition=…&bulge_kind=…&slope=…`, for links.
    pub fn query(&self) -> String {
        format!(
            "width_definition={}&bulge_kind={}&slope={}",
            self.width.as_str(),
            self.bulge_word(),
            self.slope.as_str()
        )
    }

    /// The sample in words, e.g. "line dispersion σ_line widths, classical bulges".
    pub fn words(&self) -> String {
        format!(
            "{} widths, {}",
            self.width.label(),
            match self.bulge_kind {
                None => "every bulge kind".to_owned(),
                Some(b) => format!("{} bulges only", b.label()),
            }
        )
    }
}

/// One galaxy of the quiescent M–σ sample, for the chart.
#[derive(Debug, Clone, PartialEq)]
pub struct QuiescentPoint {
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// log10 σ_e, km/s, with its error (dex).
    pub log_sigma: (f64, f64),
    /// log10 M_BH at the adopted distance, M☉, with its error (dex; 0 for a limit).
    pub log_mbh: (f64, f64),
    /// Whether the mass is an upper limit.
    pub upper_limit: bool,
}

/// One AGN of the calibration.
#[derive(Debug, Clone, PartialEq)]
pub struct AgnMember {
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// log10 σ_e, km/s.
    pub log_sigma: f64,
    /// Its error, dex.
    pub log_sigma_err: f64,
    /// log10 of the virial product c τ Δv² / G, M☉.
    pub log_vp: f64,
    /// Its error, dex.
    pub log_vp_err: f64,
}

/// Reverberation AGN of the chosen width measure and bulge kind that could not enter, by why.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct AgnLeftOut {
    /// The factor their source assumed is not known (never rescaled).
    pub unknown_factor: usize,
    /// No adopted σ, or σ with no error.
    pub no_sigma: usize,
    /// An adopted σ of the other definition (σ_c).
    pub other_sigma: usize,
    /// The mass is an upper limit.
    pub limits: usize,
}

impl AgnLeftOut {
    /// The reasons in words, e.g. "2 with no known assumed factor, 1 without an adopted σ";
    /// empty when none was left out.
    pub fn words(&self) -> String {
        [
            (self.unknown_factor, "with no known assumed factor"),
            (self.no_sigma, "without an adopted σ with its error"),
            (self.other_sigma, "with σ_c instead of σ_e"),
            (self.limits, "with an upper limit"),
        ]
        .iter()
        .filter(|(n, _)| *n > 0)
        .map(|(n, why)| format!("{n} {why}"))
        .collect::<Vec<_>>()
        .join(", ")
    }

    /// How many were left out.
    pub fn total(&self) -> usize {
        self.unknown_factor + self.no_sigma + self.other_sigma + self.limits
    }
}

/// A parameter with its 1-σ error.
pub type WithError = (f64, f64);

/// A calibration that could be computed.
#[derive(Debug, Clone, PartialEq)]
pub struct Calibrated {
    /// log10 ⟨f⟩ with its 1-σ error (AGN and relation parts combined), dex.
    pub log_f: WithError,
    /// The part of the error from the AGN alone, dex.
    pub log_f_err_agn: f64,
    /// The part from the quiescent relation's α and β, dex.
    pub log_f_err_relation: f64,
    /// ⟨f⟩ = 10^log ⟨f⟩ (dimensionless).
    pub f: f64,
    /// Its 68 % interval, 10^(log ⟨f⟩ ∓ error).
    pub f_interval: (f64, f64),
    /// The AGN's scatter about the shifted relation ε_A, dex.
    pub eps_agn: f64,
    /// The relation's α (log10 M☉ at the pivot), β (dex per dex) and ε (dex): the quiescent
    /// structural fit's (held), or the joint fit's (joint).
    pub alpha: WithError,
    /// β.
    pub beta: WithError,
    /// ε.
    pub eps: WithError,
}

/// A calibration on one catalog version, or why there is none, with what it was made from.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationView {
    /// The catalog version read.
    pub version: i64,
    /// What was asked.
    pub ask: CalibrationAsk,
    /// The pivot of σ, log10 km/s.
    pub pivot_log_sigma: f64,
    /// log10 ⟨f⟩ and its error adopted for the width measure at `version`, dex.
    pub adopted: WithError,
    /// The quiescent sample.
    pub quiescent: Vec<QuiescentPoint>,
    /// The AGN used.
    pub agn: Vec<AgnMember>,
    /// The AGN left out.
    pub left_out: AgnLeftOut,
    /// The calibration, or one sentence saying why there is none.
    pub outcome: Result<Calibrated, String>,
}

impl CalibrationView {
    /// The log ⟨f⟩ the chart adds to each AGN's log VP: the calibrated one, or the adopted one
    /// when there is no calibration.
    pub fn chart_log_f(&self) -> f64 {
        self.outcome.as_ref().map_or(self.adopted.0, |c| c.log_f.0)
    }
}

/// Calibrates log ⟨f⟩ on the catalog version `catalog` reads, for `ask`.
///
/// # Errors
/// When the catalog cannot be read or the fitting task fails; a calibration that cannot be
/// made (too few AGN, a fit that fails, the joint choice) is `outcome`'s sentence instead.
pub async fn calibration(catalog: &Catalog, ask: CalibrationAsk) -> AppResult<CalibrationView> {
    let snapshot = catalog.rows().await?;
    let factors = stored::factors_at(&catalog.pool, snapshot.version).await?;
    let relation = Relation::MSigma;
    // The quiescent sample exactly as the default M–σ page builds it, cut to a bulge kind.
    let choice = FitChoice::default();
    let mut filter = choice.filter;
    filter.bulge_kind = ask.bulge_kind;
    let filter = filter.for_method(choice.method);
    let pivot = choice.pivots(&relation).0;
    let sample = build_sample(
        &snapshot.rows,
        &snapshot.luminosities,
        &relation,
        &filter,
        catalog.soi_threshold,
    );
    let quiescent: Vec<QuiescentPoint> = sample
        .points
        .iter()
        .zip(&sample.members)
        .map(|(p, m)| QuiescentPoint {
            name: m.name.clone(),
            slug: m.slug.clone(),
            log_sigma: (p.x, p.x_err),
            log_mbh: (p.y, p.y_err),
            upper_limit: p.upper_limit,
        })
        .collect();
    let sigma_word = filter.sigma.definition().as_str();
    let mut agn = Vec::new();
    let mut left_out = AgnLeftOut::default();
    for row in &snapshot.rows {
        let reverberation = row.mbh_method.as_deref() == Some("reverberation")
            && row.mbh_width_definition.as_deref() == Some(ask.width.as_str())
            && ask.bulge_kind.is_none_or(|b| row.bulge_kind == b.as_str());
        if !reverberation {
            continue;
        }
        let (Some(log_mbh), Some(applied)) = (row.log_mbh, row.mbh_log_f) else {
            left_out.unknown_factor += 1;
            continue;
        };
        if row.mbh_upper_limit.unwrap_or(false) {
            left_out.limits += 1;
            continue;
        }
        let (Some(log_sigma), Some(sigma_err)) = (row.log_sigma, row.sigma_err_dex) else {
            left_out.no_sigma += 1;
            continue;
        };
        if row.sigma_definition.as_deref() != Some(sigma_word) {
            left_out.other_sigma += 1;
            continue;
        }
        agn.push(AgnMember {
            name: row.name.clone(),
            slug: row.slug.clone(),
            log_sigma,
            log_sigma_err: sigma_err,
            log_vp: log_mbh - applied,
            log_vp_err: row.mbh_err_dex.unwrap_or(0.0),
        });
    }
    let outcome = if agn.len() < MIN_AGN {
        Err(too_few_sentence(
            &ask,
            snapshot.version,
            agn.len(),
            &left_out,
        ))
    } else {
        let points: Vec<AgnPoint> = agn
            .iter()
            .map(|a| AgnPoint {
                log_sigma: a.log_sigma,
                log_sigma_err: a.log_sigma_err,
                log_vp: a.log_vp,
                log_vp_err: a.log_vp_err,
            })
            .collect();
        let q = sample.points.clone();
        let mode = ask.slope.mode();
        let fitted = tokio::task::spawn_blocking(move || calibrate_with(mode, &q, &points, pivot))
            .await
            .map_err(|e| AppError::Internal(anyhow::anyhow!("calibration task: {e}")))?;
        fitted
            .map(|c| {
                let iv = |name: &str, fallback: (f64, f64)| {
                    c.quiescent
                        .intervals
                        .get(name)
                        .map_or(fallback, |iv| (iv.estimate, iv.error))
                };
                let q = &c.quiescent;
                Calibrated {
                    log_f: (c.log_f, c.log_f_err),
                    log_f_err_agn: c.log_f_err_agn,
                    log_f_err_relation: c.log_f_err_relation,
                    f: 10f64.powf(c.log_f),
                    f_interval: (
                        10f64.powf(c.log_f - c.log_f_err),
                        10f64.powf(c.log_f + c.log_f_err),
                    ),
                    eps_agn: c.eps_agn,
                    alpha: iv("alpha", (q.params.alpha, q.errors.alpha)),
                    beta: iv("beta", (q.params.beta, q.errors.beta)),
                    eps: iv("eps", (q.params.eps, q.errors.eps)),
                }
            })
            .map_err(|e| format!("The calibration could not be made: {e}"))
    };
    Ok(CalibrationView {
        version: snapshot.version,
        ask,
        pivot_log_sigma: pivot,
        adopted: factors.of(ask.width),
        quiescent,
        agn,
        left_out,
        outcome,
    })
}

/// The sentence for fewer than [`MIN_AGN`] AGN: how many there are and what is missing.
fn too_few_sentence(ask: &CalibrationAsk, version: i64, n: usize, left: &AgnLeftOut) -> String {
    let mut s = format!(
        "Catalog version {version} has {n} reverberation AGN with {} and an adopted σ_e; a calibration needs at least {MIN_AGN}.",
        ask.words()
    );
    if left.total() > 0 {
        s.push_str(&format!(
            " Left out: {}. Add the missing values (the lag and width cells, or the factor the source assumed, and σ_e) to bring them in.",
            left.words()
        ));
    } else {
        s.push_str(
            " Submit reverberation masses with their lag and line width, and σ_e for their hosts.",
        );
    }
    s
}

/// A published calibration, for comparison (docs/methods.md §4.3).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Published {
    /// The paper.
    pub paper: &'static str,
    /// The sample, in words.
    pub sample: &'static str,
    /// The width measure.
    pub width: WidthDefinition,
    /// log10 ⟨f⟩ (dex).
    pub log_f: f64,
    /// ⟨f⟩ as the paper quotes it, in words.
    pub quoted: &'static str,
    /// Where the number comes from (docs/methods.md §4.3's provenance column).
    pub provenance: &'static str,
}

/// The published calibrations the page compares with (docs/methods.md §4.3; log ⟨f⟩ is
/// log10 of the quoted ⟨f⟩ where the paper quotes f).
pub const PUBLISHED: [Published; 6] = [
    Published {
        paper: "Onken et al. 2004",
        sample: "16 AGN",
        width: WidthDefinition::SigmaLine,
        log_f: 0.740_362_689_494_244, // log10 5.5
        quoted: "⟨f⟩ = 5.5 ± 1.8",
        provenance: "N abstract; f from memory",
    },
    Published {
        paper: "Woo et al. 2010",
        sample: "24 AGN",
        width: WidthDefinition::SigmaLine,
        log_f: 0.72,
        quoted: "log ⟨f⟩ = 0.72 (+0.09/−0.10)",
        provenance: "from memory",
    },
    Published {
        paper: "Grier et al. 2013",
        sample: "25 AGN",
        width: WidthDefinition::SigmaLine,
        log_f: 0.64,
        quoted: "⟨log f⟩ = 0.64 ± 0.11",
        provenance: "from memory",
    },
    Published {
        paper: "Ho & Kim 2014",
        sample: "classical bulges and ellipticals",
        width: WidthDefinition::SigmaLine,
        log_f: 0.799_340_549_453_581_7, // log10 6.3
        quoted: "⟨f⟩ = 6.3 ± 1.5",
        provenance: "abstract",
    },
    Published {
        paper: "Ho & Kim 2014",
        sample: "pseudobulges",
        width: WidthDefinition::SigmaLine,
        log_f: 0.505_149_978_319_906, // log10 3.2
        quoted: "⟨f⟩ = 3.2 ± 0.7",
        provenance: "abstract",
    },
    Published {
        paper: "Woo et al. 2015",
        sample: "93 narrow-line Seyfert 1 and reverberation AGN",
        width: WidthDefinition::Fwhm,
        log_f: 0.05,
        quoted: "log ⟨f⟩ = 0.05 ± 0.12",
        provenance: "abstract",
    },
];

/// The sentence recorded as the source of an adopted calibration.
pub fn source_sentence(view: &CalibrationView, c: &Calibrated, note: &str) -> String {
    let mut s = format!(
        "Calibrated on catalog version {}: {}, slope {}, {} reverberation AGN against {} quiescent galaxies (M–σ, σ_e, dynamical masses); log ⟨f⟩ = {:.3} ± {:.3}, ε_A = {:.2} dex.",
        view.version,
        view.ask.words(),
        view.ask.slope.label(),
        view.agn.len(),
        view.quiescent.len(),
        c.log_f.0,
        c.log_f.1,
        c.eps_agn,
    );
    let note = note.trim();
    if !note.is_empty() {
        s.push_str(" Note: ");
        s.extend(note.chars().take(MAX_NOTE_CHARS));
    }
    s
}

/// The longest note kept with an adoption (the source sentence stays within the schema's
/// 1000 characters).
pub const MAX_NOTE_CHARS: usize = 400;

/// An adoption made.
#[derive(Debug, Clone, PartialEq)]
pub struct Adopted {
    /// The catalog version it made.
    pub version: i64,
    /// The width measure.
    pub width: WidthDefinition,
    /// log10 ⟨f⟩ before and after, dex.
    pub log_f_before: f64,
    /// After.
    pub log_f_after: f64,
}

/// Adopts the calibration `ask` on the current catalog: computes it at the current version,
/// refuses when `calibrated_on` (the version the caller saw) is not the current one or when
/// there is no calibration, and records it with [`stored::adopt`] (a new catalog version).
///
/// # Errors
/// 409 for a calibration computed on a past version; 422 when no calibration can be made or
/// the note is too long; a database failure.
pub async fn adopt_calibration(
    catalog: &Catalog,
    account_id: Option<i64>,
    ask: CalibrationAsk,
    calibrated_on: Option<i64>,
    note: &str,
) -> AppResult<Adopted> {
    if note.chars().count() > MAX_NOTE_CHARS {
        return Err(AppError::invalid(vec![crate::error::FieldError::new(
            "note",
            format!("The note is longer than {MAX_NOTE_CHARS} characters; shorten it."),
        )]));
    }
    let current = catalog.at(None);
    let view = calibration(&current, ask).await?;
    if let Some(v) = calibrated_on
        && v != view.version
    {
        return Err(AppError::conflict(
            format!(
                "This calibration was computed on catalog version {v}, but the catalog is now at version {}: its masses or sample may differ. Open the current version's calibration, check it, and adopt that one.",
                view.version
            ),
            Vec::new(),
        ));
    }
    let c = match &view.outcome {
        Ok(c) => c.clone(),
        Err(why) => return Err(AppError::invalid_saying(why.clone())),
    };
    let source = source_sentence(&view, &c, note);
    let version = stored::adopt(
        &catalog.pool,
        account_id,
        ask.width,
        c.log_f.0,
        c.log_f.1,
        &source,
    )
    .await?;
    Ok(Adopted {
        version,
        width: ask.width,
        log_f_before: view.adopted.0,
        log_f_after: c.log_f.0,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(p: &[(&str, &str)]) -> Vec<(String, String)> {
        p.iter()
            .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
            .collect()
    }

    #[test]
    fn the_choices_read_from_a_query_and_name_every_fault() {
        let ask = CalibrationAsk::read(
            &pairs(&[
                ("width_definition", "fwhm"),
                ("bulge_kind", "pseudo"),
                ("slope", "held"),
            ]),
            false,
        )
        .unwrap();
        assert_eq!(ask.width, WidthDefinition::Fwhm);
        assert_eq!(ask.bulge_kind, Some(BulgeKind::Pseudo));
        assert_eq!(
            ask.query(),
            "width_definition=fwhm&bulge_kind=pseudo&slope=held"
        );
        let page = CalibrationAsk::read(&pairs(&[("bulge_kind", "")]), true).unwrap();
        assert_eq!(page, CalibrationAsk::default());
        let faults = CalibrationAsk::read(
            &pairs(&[("bulge_kind", "unknown"), ("slope", ""), ("colour", "red")]),
            false,
        )
        .unwrap_err();
        let keys: Vec<&str> = faults.iter().map(|(k, _)| k.as_str()).collect();
        assert_eq!(keys, ["bulge_kind", "slope", "colour"]);
    }

    #[test]
    fn the_published_values_agree_with_what_they_quote() {
        for p in PUBLISHED {
            if let Some(f) = p.quoted.strip_prefix("⟨f⟩ = ") {
                let f: f64 = f.split(' ').next().unwrap().parse().unwrap();
                assert!((p.log_f - f.log10()).abs() < 1e-12, "{}", p.paper);
            }
        }
    }
}
