//! Units of measure, and the reading of values as people type them.
//!
//! # Canonical values
//!
//! Black-hole masses, bulge masses, bulge luminosities and velocity dispersions are stored as
//! base-10 logarithms, because the scaling relations are straight lines in log space and their
//! scatter is Gaussian there:
//!
//! ```text
//! log_mbh    = log10(M_BH / M☉)        log_mbulge = log10(M_bulge / M☉)
//! log_lbulge = log10(L / L☉)           log_sigma  = log10(σ / (km s⁻¹))
//! ```
//!
//! Distance (Mpc) and spatial resolution (arcsec) stay linear: they enter the formulas
//! linearly (θ = r / D) and are quoted that way.
//!
//! # Errors in dex
//!
//! An error in dex is a half-width in log10: a value of 8.30 ± 0.10 dex spans 10^8.20 to
//! 10^8.40. Values on the log scale carry their errors in dex already. A linear value
//! M +δ₊ −δ₋ (the way masses are usually published) becomes two dex errors, and their mean is
//! the one symmetric error that fits use:
//!
//! ```text
//! u = log10((M + δ₊) / M)        upper error, dex
//! l = log10(M / (M − δ₋))        lower error, dex (refused when δ₋ ≥ M)
//! err_dex = (u + l) / 2
//! ```
//!
//! where M, δ₊ and δ₋ are in the quantity's linear unit (M☉, L☉ or km/s). This is option 1 of
//! docs/methods.md §2.5 (common practice). Averaging is used because the estimators of the
//! service (the maximum-likelihood fit with intrinsic scatter, FITEXY, BCES) take one Gaussian
//! error per point; u and l are kept as well, so a split-normal likelihood (§2.5 option 2) can
//! use them later and nothing is lost. When δ₋ ≥ M the lower end of the error bar reaches zero:
//! the value is not a detection and is refused with the advice to enter an upper limit.
//!
//! # What can be typed
//!
//! Case does not matter, nor do spaces between the parts of an entry (a number itself is
//! written without spaces: `3.2e9`, not `3.2 e9`). In the table, `3.2e9` stands for any number.
//!
//! | form | examples | meaning |
//! |---|---|---|
//! | decimal | `3200000000`, `0.1`, `.5`, `210` | linear value |
//! | exponent | `3.2e9`, `3.2E9`, `3.2e+9`, `3.2e-3` | linear value |
//! | times ten to the power | `3.2x10^9`, `3.2×10^9`, `3.2*10^9`, `3.2·10^9`, `3.2 x 10^9`, `3.2x10**9`, `3.2x10^{9}`, `3.2×10⁹` | linear value |
//! | power of ten | `10^9.51`, `10^{9.51}`, `10⁹` | linear value 10^9.51 (its log10 is kept exactly) |
//! | log word | `log 9.51`, `log10 9.51`, `log10=9.51`, `log9.51` | log10 value |
//! | symmetric error | `± 0.4e9`, `+/- 0.4e9`, `+-0.4e9` | same unit as the value |
//! | asymmetric error | `+0.5e9/-0.3e9`, `+0.5e9 -0.3e9`, `+0.5e9, -0.3e9`, `(+0.5e9, -0.3e9)`, `-0.3e9 +0.5e9`, `^{+0.5e9}_{-0.3e9}` | plus, then minus (or the reverse; the signs decide) |
//! | errors in dex | `3.2e9 ± 0.15 dex`, `3.2e9 +0.1/-0.2 dex` | a trailing `dex` applies to both errors |
//! | percent errors | `3.2e9 ± 10%`, `3.2e9 +10%/-5%` | fraction of the linear value |
//! | upper limit | `<2e7`, `< 2e7`, `<=2e7`, `≤2e7`, `< log 7.3`, `log < 7.3` | upper limit, no error bars |
//! | unit | `3.2e9 Msun`, `210 ± 10 km/s`, `16.5 Mpc`, `0.1"` | the quantity's own unit, optional, after the value and/or at the end: `Msun`, `M_sun`, `M☉`, `Msol` (masses); `Lsun`, `L_sun`, `L☉`, `Lsol`; `km/s`, `kms`; `Mpc`; `arcsec`, `"`, `″` |
//!
//! The minus sign may be `-`, `−` (U+2212) or `–` (U+2013). On the log scale (the `log` word or
//! [`Scale::Log10`]) errors are in dex whether or not `dex` is written.
//!
//! # What is refused, each with a one-sentence reason
//!
//! - commas inside numbers (`1,200`, `3,2e9`): a comma separates thousands in some countries
//!   and decimals in others, so it is refused with the two readings spelled out;
//! - non-finite numbers (`inf`, `nan`, `1e400`), zero and negative linear values;
//! - a bare number such as `9.51` for a mass, luminosity or dispersion when it is implausible
//!   as a linear value but plausible as a log10: the entry is refused with the advice to choose
//!   the log scale or type `log 9.51` ([`Scale::Auto`]), or to set the scale to `log10`
//!   ([`Scale::Linear`], the default of files and the API), rather than guessed;
//! - a log scale together with a linear notation (`log 3.2e9`, `10^9.51` with
//!   [`Scale::Log10`]), and the word `log` together with [`Scale::Linear`];
//! - values outside the plausible range of the quantity (see the `*_MIN`/`*_MAX` constants,
//!   each with its reason) and errors above [`MAX_ERR_DEX`];
//! - a lower error reaching zero (advice: enter an upper limit), an upper limit with error
//!   bars, lower limits (`>`, `>=`, `≥`), signed error sizes (`± -0.1`), percent errors on the
//!   log scale, errors mixing `dex` and `%`, and a unit that is not the quantity's;
//! - anything else, with the part that could not be read quoted: for instance spaces or
//!   apostrophes between digit groups (`3 200 000`, `1'200`), `log(M) = 9.51`, `log10(9.51)`,
//!   words such as `upper limit 2e7`, `3.2 e9` (the exponent must follow the digits), ranges
//!   such as `1e7–3e7`, and units written as `km s^-1`.
//!
//! Whatever is accepted, the text as typed (trimmed) is kept beside the canonical value.
//!
//! # Units in names
//!
//! Values are plain `f64`s whose names carry their unit: `log_mbh`, `log_sigma` and
//! `log_value` are log10 of the quantity's linear unit (M☉, km/s, L☉); `err_dex`,
//! `err_minus_dex` and `err_plus_dex` are in dex; `sigma_km_s`, `distance_mpc`,
//! `resolution_arcsec` and `theta_arcsec` are linear in the unit they end with. The fits and
//! formulas work on slices and expressions of such numbers, where a wrapper type per unit would
//! add a conversion at every step without catching the slips that matter here (a linear value
//! typed as a log10, a missing exponent digit, a value in the wrong unit). Those are caught
//! once, where values enter, by the parser and the plausible ranges of this module; from there
//! on the name says what a number is.
//!
//! # Layout
//!
//! - `quantity`: [`Quantity`] (what a value measures, its stored word and label) and
//!   [`Scale`];
//! - `ranges`: the plausible range of each quantity, each bound with its reason;
//! - `grammar`: reading typed text ([`parse_entry`], [`parse_linear`]) into [`Entry`] and
//!   [`LinearEntry`], with its lexer and parser;
//! - `errors`: [`EntryError`], the one-sentence reason for each refusal, and
//!   [`UnknownNameError`];
//! - `format`: values for pages: the one rounding rule of values with errors
//!   ([`with_errors_column`], [`with_errors`], [`format_log_with_errors`]).

mod errors;
mod format;
mod grammar;
mod quantity;
mod ranges;

pub use errors::EntryError;
pub use format::{
    Rounded, Uncertain, format_log_with_errors, rounded_column, with_errors, with_errors_column,
};
pub use grammar::{Entry, LinearEntry, parse_entry, parse_linear};
pub use quantity::{Quantity, Scale, UnknownNameError};
pub use ranges::{
    DISTANCE_MAX_MPC, DISTANCE_MIN_MPC, LOG_LBULGE_MAX, LOG_LBULGE_MIN, LOG_MBH_MAX, LOG_MBH_MIN,
    LOG_MBULGE_MAX, LOG_MBULGE_MIN, MAX_ENTRY_CHARS, MAX_ERR_DEX, RESOLUTION_MAX_ARCSEC,
    RESOLUTION_MIN_ARCSEC, SIGMA_MAX_KM_S, SIGMA_MIN_KM_S,
};
