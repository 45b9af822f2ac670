//! A paragraph a paper's methods section can start from ([`methods_paragraph`]): what was
//! fitted, to which galaxies, by which estimator (with the published method it follows, as
//! docs/methods.md §2 cites it), how distances and errors were treated (docs/methods.md §2.5,
//! §3.2), and the catalog version. Plain text, the same for the same fit.

use super::{count, filter_words, method_of, pivots_of};
use crate::fit::{Method, Shape};
use crate::relations::{FitOutcome, Relation};
use crate::units::Quantity;

/// What an estimator does, with the published method it follows (docs/methods.md §2.1–§2.6).
fn estimator_sentence(method: Method) -> String {
    let text = match method {
        Method::Structural => {
            "We used the structural maximum-likelihood estimator of Kelly (2007, ApJ 665, 1489), which models the distribution of the true host property, takes measurement errors on both axes, an intrinsic scatter ε in log M_BH at fixed host property, and upper limits on M_BH as censored terms."
        }
        Method::Conditional => {
            "We maximised the likelihood of log M_BH given the observed host property, with measurement errors on both axes carried through the slope, an intrinsic scatter ε in log M_BH and upper limits on M_BH as censored terms (the likelihood behind Gültekin et al. 2009, ApJ 698, 198)."
        }
        Method::Fitexy => {
            "We used the modified FITEXY estimator (Press et al. 1992; Tremaine et al. 2002, ApJ 574, 740), which minimises χ² with errors on both axes and sets the intrinsic scatter ε so that the reduced χ² is one; it takes no upper limits."
        }
        Method::Bces(_) => {
            return format!(
                "We used the {} line of the BCES moment estimators (Akritas & Bershady 1996, ApJ 470, 706), which allow for errors on both axes, their covariance and intrinsic scatter; they take no upper limits.",
                super::method_short_name(method)
            );
        }
    };
    text.to_owned()
}

/// The line (or plane) fitted, with its pivots in their units.
fn equation(relation: &Relation, outcome: &FitOutcome) -> String {
    let (pivot, pivot2) = pivots_of(outcome);
    let term = |quantity: Quantity, log_pivot: f64| -> String {
        match quantity {
            Quantity::VelocityDispersion => format!("log10(σ / {:.0} km/s)", 10f64.powf(log_pivot)),
            Quantity::BulgeLuminosity => {
                let band = match relation {
                    Relation::Luminosity(b) => b.as_str(),
                    _ => "",
                };
                format!("log10(L_{band} / 10^{log_pivot:.2} L☉)")
            }
            _ => format!("log10(M_bulge / 10^{log_pivot:.2} M☉)"),
        }
    };
    let first = term(relation.x_quantity(), pivot);
    if relation.shape() == Shape::Plane {
        format!(
            "log10(M_BH / M☉) = α + β {first} + γ {}",
            term(Quantity::BulgeMass, pivot2)
        )
    } else {
        format!("log10(M_BH / M☉) = α + β {first}")
    }
}

/// A paragraph describing the fit for a paper's methods section: the relation and its pivot,
/// the sample (its cuts in words, the numbers of galaxies and upper limits, what was left out),
/// the estimator and the published method, how distances and errors were treated, how the
/// quoted uncertainties were made, and the catalog version. Deterministic: the same fit gives
/// the same text.
pub fn methods_paragraph(outcome: &FitOutcome, relation: &Relation) -> String {
    let sample = &outcome.sample;
    let mut parts = vec![format!(
        "We fitted the {} relation, {}, with Gaussian intrinsic scatter in log M_BH, to {} ({} and {}) from version {} of the massline catalog.",
        relation.label(),
        equation(relation, outcome),
        count(sample.members.len(), "galaxy", "galaxies"),
        count(
            sample.n_detections(),
            "black-hole mass measurement",
            "black-hole mass measurements"
        ),
        count(sample.n_limits(), "upper limit", "upper limits"),
        outcome.key.catalog_version,
    )];
    parts.push(format!(
        "The sample was selected as follows: {}.",
        filter_words(&outcome.key.filter)
    ));
    let mut left_out = Vec::new();
    if sample.left_out_sigma_definition > 0 {
        left_out.push(format!(
            "{} whose adopted σ has the other definition (σ definitions are not mixed in one fit)",
            count(sample.left_out_sigma_definition, "galaxy", "galaxies")
        ));
    }
    if sample.left_out_missing > 0 {
        left_out.push(format!(
            "{} lacking a value the relation needs",
            count(sample.left_out_missing, "galaxy", "galaxies")
        ));
    }
    if sample.left_out_virial > 0 {
        left_out.push(format!(
            "{} (a virial mass rests on a virial factor calibrated on the quiescent relation, so fitting it is circular)",
            count(
                sample.left_out_virial,
                "reverberation or single-epoch mass",
                "reverberation or single-epoch masses"
            )
        ));
    }
    if sample.left_out_limits > 0 {
        left_out.push(count(sample.left_out_limits, "upper limit", "upper limits"));
    }
    if !left_out.is_empty() {
        parts.push(format!(
            "Left out of the fit were {}.",
            left_out.join(", and ")
        ));
    }
    if let Some(method) = method_of(outcome) {
        parts.push(estimator_sentence(method));
    }
    parts.push(
        "Every black-hole mass, bulge mass and luminosity was rescaled from the distance its source assumed to the galaxy's adopted distance (dynamical masses in proportion to D, luminosities and photometric bulge masses to D², velocity dispersions and reverberation masses not at all, single-epoch masses as D), the adopted distance's error was added in quadrature to each distance-dependent value, and the covariance that the shared distance induces between the errors of the host property and of log M_BH was included in the fit."
            .to_owned(),
    );
    parts.push(if sample.n_limits() > 0 {
        "Published asymmetric errors were turned into dex and their mean used as one symmetric error; an upper limit enters at its value without an error."
    } else {
        "Published asymmetric errors were turned into dex and their mean used as one symmetric error."
    }
    .to_owned());
    match &outcome.fit {
        Ok(fit) => parts.push(format!(
            "The quoted uncertainties are 68 % intervals ({}).",
            fit.intervals.kind.label()
        )),
        Err(e) => parts.push(format!("No fit could be made: {e}")),
    }
    parts.join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::export::sample::tests::small_outcome;

    #[test]
    fn the_paragraph_names_sample_estimator_distances_and_version() {
        let outcome = small_outcome();
        let text = methods_paragraph(&outcome, &Relation::MSigma);
        assert!(
            text.contains("to 3 galaxies (2 black-hole mass measurements and 1 upper limit)"),
            "{text}"
        );
        assert!(text.contains("version 7 of the massline catalog"), "{text}");
        assert!(text.contains("log10(σ / 200 km/s)"), "{text}");
        assert!(text.contains("Kelly (2007, ApJ 665, 1489)"), "{text}");
        assert!(text.contains("added in quadrature"), "{text}");
        assert!(text.contains(&filter_words(&outcome.key.filter)), "{text}");
        assert!(!text.contains('\n'));
        assert_eq!(text, methods_paragraph(&outcome, &Relation::MSigma));
    }
}
