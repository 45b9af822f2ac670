//! Files for papers and for other astronomy software, written from a fit or from the adopted
//! catalog. Pure functions: the doors (`web`, `cli`) read the catalog or the fit and hand it
//! here.
//!
//! * [`sample`]: the fitted sample's columns, once, for every format (`sample.csv`, the VOTable,
//!   the LaTeX table).
//! * [`votable`]: IVOA VOTable 1.4 documents (TABLEDATA) of the fitted sample and of the adopted
//!   catalog, with units in VOUnit and UCD1+ words.
//! * [`latex`]: one row of a table of fitted relations, and the fitted sample as an AASTeX
//!   `deluxetable`.
//! * [`methods`]: a plain-text paragraph a methods section can start from.
//! * [`plan`]: a ranked observing plan as the JSON table and the CSV every door writes.
//!
//! This module also holds what the pages share with these files: a sample filter in words
//! ([`filter_words`]) and why an estimator gives a parameter without an interval
//! ([`no_interval_note`]).

pub mod latex;
pub mod methods;
pub mod plan;
pub mod sample;
pub mod votable;

pub use latex::{fit_table_row, latex_escape, sample_table};
pub use methods::methods_paragraph;
pub use sample::{sample_columns, sample_csv};
pub use votable::{catalog_votable, sample_votable, xml_text};

use crate::catalog::model::code_label;
use crate::fit::{BcesLine, Method};
use crate::relations::FitOutcome;

/// A fit's canonical sample text (`SampleFilter::canonical`: "morphology=any;bulge_kind=pseudo;…")
/// in words: "morphology any; bulge pseudo; …". A part it cannot read is shown as it is.
pub fn filter_words(canonical: &str) -> String {
    canonical
        .split(';')
        .map(|part| {
            let Some((key, value)) = part.split_once('=') else {
                return code_label(part);
            };
            let name = match key {
                "bulge_kind" => "bulge",
                "centre_kind" => "centre",
                "mass_method" => "mass method",
                "soi" => "sphere of influence",
                "sigma_definition" => "σ definition",
                "limits" => "upper limits",
                "masses" => "black-hole masses",
                "activity" => "nucleus",
                other => other,
            };
            let value = match (key, value) {
                ("soi", "resolved") => "resolved only".to_owned(),
                ("limits", "include") => "included".to_owned(),
                ("limits", "exclude") => "left out".to_owned(),
                ("limits", "auto") => "as the estimator allows".to_owned(),
                ("masses", "dynamical") => "dynamical only (stellar, gas, maser)".to_owned(),
                ("masses", "with_reverberation") => "dynamical and reverberation".to_owned(),
                ("masses", "all") => "every method, single-epoch included".to_owned(),
                (_, v) => code_label(v),
            };
            format!("{name} {value}")
        })
        .collect::<Vec<_>>()
        .join("; ")
}

/// Why a parameter has no interval, for the estimators that give a value without an error: FITEXY
/// sets ε so that χ²/dof = 1 (Tremaine et al. 2002); BCES takes it from the residual variance
/// less the measurement variance (docs/methods.md §2.3, §2.4). `None` when it has an error.
pub fn no_interval_note(method: Method, error: f64) -> Option<&'static str> {
    if error.is_finite() && error > 0.0 {
        return None;
    }
    Some(match method {
        Method::Fitexy => "set so that χ²/dof = 1; no interval",
        Method::Bces(_) => "residual variance less the measurement variance; no interval",
        _ => "no interval reported",
    })
}

/// The estimator of a fit (from its specification, else from its key's name).
pub fn method_of(outcome: &FitOutcome) -> Option<Method> {
    match &outcome.spec {
        Ok(spec) => Some(spec.method),
        Err(_) => outcome.key.method.parse().ok(),
    }
}

/// The pivots of a fit, log10 units of x and of the second property.
pub fn pivots_of(outcome: &FitOutcome) -> (f64, f64) {
    (
        f64::from_bits(outcome.key.pivots.0),
        f64::from_bits(outcome.key.pivots.1),
    )
}

/// "1 galaxy", "3 galaxies".
fn count(n: usize, one: &str, many: &str) -> String {
    if n == 1 {
        format!("1 {one}")
    } else {
        format!("{n} {many}")
    }
}

/// A fitted parameter's symbol: "α", "β", "γ", "ε" (the name itself for any other).
pub fn param_symbol(name: &str) -> &str {
    match name {
        "alpha" => "α",
        "beta" => "β",
        "beta2" => "β₂",
        "gamma" => "γ",
        "eps" => "ε",
        other => other,
    }
}

/// A short name of an estimator for a table column: "structural", "BCES bisector".
pub fn method_short_name(method: Method) -> &'static str {
    match method {
        Method::Structural => "structural",
        Method::Conditional => "conditional",
        Method::Fitexy => "FITEXY",
        Method::Bces(BcesLine::YOnX) => "BCES Y|X",
        Method::Bces(BcesLine::XOnY) => "BCES X|Y",
        Method::Bces(BcesLine::Bisector) => "BCES bisector",
        Method::Bces(BcesLine::Orthogonal) => "BCES orthogonal",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_sample_is_described_in_words_not_codes() {
        let words = filter_words(
            "morphology=any;bulge_kind=pseudo;centre_kind=power_law;mass_method=stellar_dynamics;soi=resolved;sigma_definition=sigma_e;limits=exclude",
        );
        assert_eq!(
            words,
            "morphology any; bulge pseudo; centre power law; mass method stellar dynamics; sphere of influence resolved only; σ definition σ_e (within r_e); upper limits left out"
        );
    }

    #[test]
    fn only_estimators_without_an_error_get_a_note() {
        assert_eq!(no_interval_note(Method::Structural, 0.05), None);
        assert!(
            no_interval_note(Method::Fitexy, 0.0)
                .unwrap()
                .contains("χ²/dof = 1")
        );
        assert!(
            no_interval_note(Method::Bces(BcesLine::Bisector), f64::NAN)
                .unwrap()
                .contains("residual variance")
        );
    }
}
