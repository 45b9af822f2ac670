//! Comparison helpers for the astro unit tests: assertions with a readable failure message,
//! judged by the shared comparison rule [`crate::fit::tolerance::close`].

use crate::fit::tolerance::close;

/// Asserts `|actual − expected| ≤ rel_tol · max(|actual|, |expected|)`.
#[track_caller]
pub(super) fn assert_rel(actual: f64, expected: f64, rel_tol: f64) {
    let diff = (actual - expected).abs();
    assert!(
        close(actual, expected, 0.0, rel_tol),
        "got {actual}, expected {expected} within a relative {rel_tol} (off by {:e} relative)",
        diff / expected.abs()
    );
}

/// Asserts `|actual − expected| ≤ abs_tol`.
#[track_caller]
pub(super) fn assert_abs(actual: f64, expected: f64, abs_tol: f64) {
    let diff = (actual - expected).abs();
    assert!(
        close(actual, expected, abs_tol, 0.0),
        "got {actual}, expected {expected} within {abs_tol} (off by {diff:e})"
    );
}
