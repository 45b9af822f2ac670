//! Comparison helpers for the astro unit tests.

/// Asserts `|actual − expected| ≤ rel_tol · |expected|`.
#[track_caller]
pub(super) fn assert_rel(actual: f64, expected: f64, rel_tol: f64) {
    let diff = (actual - expected).abs();
    assert!(
        diff <= rel_tol * expected.abs(),
        "got {actual}, expected {expected} within a relative {rel_tol} (off by {:e} relative)",
        diff / expected.abs()
    );
}

/// Asserts `|actual − expected| ≤ abs_tol`.
#[track_caller]
pub(super) fn assert_abs(actual: f64, expected: f64, abs_tol: f64) {
    let diff = (actual - expected).abs();
    assert!(
        diff <= abs_tol,
        "got {actual}, expected {expected} within {abs_tol} (off by {diff:e})"
    );
}
