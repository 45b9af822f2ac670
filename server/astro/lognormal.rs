//! The mean of a quantity with lognormal scatter about a relation.
//!
//! A scaling relation fitted in log space predicts the median black-hole mass at given x; with
//! Gaussian intrinsic scatter ε (dex) in log M, the mean mass is larger by a fixed factor. Mass
//! functions and mass densities need the mean, so they must include it.

use std::f64::consts::LN_10;

use super::AstroError;
use super::validate::{finite_result, non_negative, positive_result};

/// Ratio of the mean to the median of a lognormal quantity with scatter ε in dex.
///
/// ```text
/// ⟨M⟩ / M_median = exp( (ε ln 10)² / 2 )
/// ```
///
/// where ε is the standard deviation of log₁₀ M (dex). ε = 0.3 gives ×1.269, ε = 0.44 gives
/// ×1.671.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::Negative`] if `scatter_dex` is not a finite number
/// of zero or more; [`AstroError::Unrepresentable`] if the factor overflows (ε above about 18
/// dex).
///
/// # References
/// Mean of the lognormal distribution (textbook statistics); docs/methods.md §6 (black-hole mass
/// function).
pub fn lognormal_mean_factor(scatter_dex: f64) -> Result<f64, AstroError> {
    let offset_dex = lognormal_mean_offset_dex(scatter_dex)?;
    positive_result("mean_factor", (offset_dex * LN_10).exp())
}

/// The same ratio in dex: log₁₀⟨M⟩ − log₁₀ `M_median`.
///
/// ```text
/// Δ = ε² ln 10 / 2
/// ```
///
/// where ε is the scatter in dex; Δ is in dex.
///
/// # Errors
/// [`AstroError::NotFinite`] or [`AstroError::Negative`] if `scatter_dex` is not a finite number
/// of zero or more; [`AstroError::Unrepresentable`] if the offset overflows.
pub fn lognormal_mean_offset_dex(scatter_dex: f64) -> Result<f64, AstroError> {
    let scatter_dex = non_negative("scatter_dex", scatter_dex)?;
    finite_result("offset_dex", scatter_dex * scatter_dex * LN_10 / 2.0)
}

#[cfg(test)]
mod tests {
    use super::super::test_support::{assert_abs, assert_rel};
    use super::*;

    #[test]
    fn factors_for_published_scatters() {
        // docs/methods.md §6: ⟨M⟩ = 10^(α+βx) exp(½(ε ln 10)²) → ×1.269 for ε = 0.3 and ×1.671 for
        // ε = 0.44 (Gültekin et al. 2009, ApJ 698, 198, all-galaxy scatter), computed.
        assert_rel(lognormal_mean_factor(0.3).unwrap(), 1.269, 5e-4);
        assert_rel(lognormal_mean_factor(0.44).unwrap(), 1.671, 5e-4);
    }

    #[test]
    fn offset_in_dex_is_the_log_of_the_factor() {
        for scatter_dex in [0.0, 0.1, 0.3, 0.44, 1.0] {
            assert_abs(
                lognormal_mean_offset_dex(scatter_dex).unwrap(),
                lognormal_mean_factor(scatter_dex).unwrap().log10(),
                1e-14,
            );
        }
    }

    #[test]
    fn no_scatter_means_no_correction() {
        assert_abs(lognormal_mean_factor(0.0).unwrap(), 1.0, 0.0);
    }

    #[test]
    fn refuses_invalid_input() {
        assert!(matches!(
            lognormal_mean_factor(-0.1),
            Err(AstroError::Negative {
                quantity: "scatter_dex",
                ..
            })
        ));
        assert!(matches!(
            lognormal_mean_factor(f64::NAN),
            Err(AstroError::NotFinite {
                quantity: "scatter_dex",
                ..
            })
        ));
        assert!(matches!(
            lognormal_mean_factor(100.0),
            Err(AstroError::Unrepresentable {
                quantity: "mean_factor"
            })
        ));
        assert!(matches!(
            lognormal_mean_offset_dex(1e200),
            Err(AstroError::Unrepresentable {
                quantity: "offset_dex"
            })
        ));
    }
}
