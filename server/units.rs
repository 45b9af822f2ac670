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
//! - a bare number such as `9.51` for a mass, luminosity or dispersion with [`Scale::Auto`]
//!   when it is implausible as a linear value but plausible as a log10: the entry is refused
//!   with the advice to choose the log scale or type `log 9.51`, rather than guessed;
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

use std::f64::consts::LN_10;
use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize, Serializer};

// ---------------------------------------------------------------------------------------------
// Plausible ranges
// ---------------------------------------------------------------------------------------------

/// Smallest accepted black-hole mass, log10(M_BH / M☉).
///
/// The lightest dynamically measured nuclear black holes are around 10^4–10^5 M☉ (from
/// memory); the range reaches a further dex down so that intermediate-mass candidates can be
/// entered.
pub const LOG_MBH_MIN: f64 = 3.0;

/// Largest accepted black-hole mass, log10(M_BH / M☉).
///
/// The heaviest measured black holes are around 10^10.5 M☉ (from memory); one dex of margin
/// leaves room for the heaviest candidates without admitting typing slips such as a missing
/// exponent digit.
pub const LOG_MBH_MAX: f64 = 11.5;

/// Smallest accepted velocity dispersion, km/s: the nuclei of dwarf galaxies, around
/// 20–30 km/s (from memory).
pub const SIGMA_MIN_KM_S: f64 = 20.0;

/// Largest accepted velocity dispersion, km/s: the brightest cluster galaxies reach about
/// 400–450 km/s (from memory); 600 km/s leaves margin without admitting a slip by a factor of
/// ten.
pub const SIGMA_MAX_KM_S: f64 = 600.0;

/// Smallest accepted bulge mass, log10(M_bulge / M☉): below the smallest bulges and nuclear
/// star clusters with measured black holes (around 10^7–10^8 M☉, from memory) by a wide margin.
pub const LOG_MBULGE_MIN: f64 = 6.0;

/// Largest accepted bulge mass, log10(M_bulge / M☉): the most massive spheroids are around
/// 10^12.5 M☉ (from memory); one dex of margin.
pub const LOG_MBULGE_MAX: f64 = 13.5;

/// Smallest accepted bulge luminosity, log10(L / L☉), in any band: the same reasoning as
/// [`LOG_MBULGE_MIN`] with mass-to-light ratios of order one.
pub const LOG_LBULGE_MIN: f64 = 6.0;

/// Largest accepted bulge luminosity, log10(L / L☉): the same reasoning as
/// [`LOG_MBULGE_MAX`].
pub const LOG_LBULGE_MAX: f64 = 13.5;

/// Smallest accepted distance, Mpc: 5 kpc, so that the centre of our own Galaxy (about 8 kpc
/// away, from memory) can be entered; everything else lies at 0.7 Mpc or more.
pub const DISTANCE_MIN_MPC: f64 = 0.005;

/// Largest accepted distance, Mpc: about redshift 0.4, beyond which the sphere of influence of
/// even the heaviest black hole cannot be resolved and dynamical masses cannot be measured.
pub const DISTANCE_MAX_MPC: f64 = 2000.0;

/// Smallest accepted spatial resolution, arcsec: 10 µas, the scale of event-horizon VLBI
/// (about 20 µas, from memory); water-maser disks are mapped at about 10⁻⁴–10⁻³ arcsec
/// (from memory).
pub const RESOLUTION_MIN_ARCSEC: f64 = 1e-5;

/// Largest accepted spatial resolution, arcsec: seeing-limited long-slit spectra are about
/// 1 arcsec; 10 arcsec could not resolve any sphere of influence.
pub const RESOLUTION_MAX_ARCSEC: f64 = 10.0;

/// Largest accepted error, dex: an error of more than two dex (a factor of 100 either way)
/// says nothing about the value, and such a number is far more often a slip (a linear error
/// typed on the log scale) than a measurement; common practice.
pub const MAX_ERR_DEX: f64 = 2.0;

/// Longest accepted entry, in characters (after trimming). Real entries are under 40.
pub const MAX_ENTRY_CHARS: usize = 120;

/// Tolerance, in dex, when comparing a log value with the ends of its range: only absorbs
/// rounding, so that `600` km/s typed as `6x10^2` is not refused by one unit in the last place.
const RANGE_EPS_DEX: f64 = 1e-9;

/// Largest |log10| the unit newtypes hold: 10^±300 is within what an `f64` represents
/// (about 10^±308), so conversions between log and linear never overflow.
const LOG10_LIMIT: f64 = 300.0;

// ---------------------------------------------------------------------------------------------
// Quantity and scale
// ---------------------------------------------------------------------------------------------

/// What a typed value measures; decides its canonical unit and plausible range.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum Quantity {
    /// Black-hole mass, canonical log10(M_BH / M☉).
    #[serde(rename = "bh_mass")]
    BlackHoleMass,
    /// Stellar velocity dispersion, canonical log10(σ / (km/s)).
    #[serde(rename = "sigma")]
    VelocityDispersion,
    /// Bulge (spheroid) stellar mass, canonical log10(M_bulge / M☉).
    #[serde(rename = "bulge_mass")]
    BulgeMass,
    /// Bulge luminosity in a named band, canonical log10(L / L☉).
    #[serde(rename = "bulge_luminosity")]
    BulgeLuminosity,
    /// Distance to the galaxy, linear, Mpc.
    #[serde(rename = "distance")]
    Distance,
    /// Spatial resolution of the observation, linear, arcsec.
    #[serde(rename = "resolution")]
    Resolution,
}

impl Quantity {
    /// Every quantity, in a fixed order.
    pub const ALL: [Quantity; 6] = [
        Quantity::BlackHoleMass,
        Quantity::VelocityDispersion,
        Quantity::BulgeMass,
        Quantity::BulgeLuminosity,
        Quantity::Distance,
        Quantity::Resolution,
    ];

    /// Stable snake_case name, used in forms, the API and the database.
    pub fn as_str(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "bh_mass",
            Quantity::VelocityDispersion => "sigma",
            Quantity::BulgeMass => "bulge_mass",
            Quantity::BulgeLuminosity => "bulge_luminosity",
            Quantity::Distance => "distance",
            Quantity::Resolution => "resolution",
        }
    }

    /// Plain name for messages, such as "black-hole mass".
    pub fn name(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "black-hole mass",
            Quantity::VelocityDispersion => "velocity dispersion",
            Quantity::BulgeMass => "bulge mass",
            Quantity::BulgeLuminosity => "bulge luminosity",
            Quantity::Distance => "distance",
            Quantity::Resolution => "spatial resolution",
        }
    }

    /// Unit of the linear value, for labels: "M☉", "km/s", "M☉", "L☉", "Mpc", "arcsec".
    pub fn unit_label(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass | Quantity::BulgeMass => "M☉",
            Quantity::VelocityDispersion => "km/s",
            Quantity::BulgeLuminosity => "L☉",
            Quantity::Distance => "Mpc",
            Quantity::Resolution => "arcsec",
        }
    }

    /// Unit of the stored value: "log10 M_sun", "log10 km/s", "log10 M_sun", "log10 L_sun",
    /// "Mpc", "arcsec".
    pub fn canonical_unit(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass | Quantity::BulgeMass => "log10 M_sun",
            Quantity::VelocityDispersion => "log10 km/s",
            Quantity::BulgeLuminosity => "log10 L_sun",
            Quantity::Distance => "Mpc",
            Quantity::Resolution => "arcsec",
        }
    }

    /// Whether the canonical value is a log10 (masses, luminosity, dispersion) rather than a
    /// linear value (distance, resolution).
    pub fn is_log_canonical(self) -> bool {
        !matches!(self, Quantity::Distance | Quantity::Resolution)
    }

    /// Accepted range `(min, max)` in the canonical unit: log10 for masses, luminosity and
    /// dispersion, linear for distance (Mpc) and resolution (arcsec). Both ends are included.
    pub fn accepted_range(self) -> (f64, f64) {
        match self {
            Quantity::BlackHoleMass => (LOG_MBH_MIN, LOG_MBH_MAX),
            Quantity::VelocityDispersion => (SIGMA_MIN_KM_S.log10(), SIGMA_MAX_KM_S.log10()),
            Quantity::BulgeMass => (LOG_MBULGE_MIN, LOG_MBULGE_MAX),
            Quantity::BulgeLuminosity => (LOG_LBULGE_MIN, LOG_LBULGE_MAX),
            Quantity::Distance => (DISTANCE_MIN_MPC, DISTANCE_MAX_MPC),
            Quantity::Resolution => (RESOLUTION_MIN_ARCSEC, RESOLUTION_MAX_ARCSEC),
        }
    }

    /// The accepted range in words, with its unit, such as "10^3 to 10^11.5 M☉".
    pub fn range_text(self) -> String {
        let unit = self.unit_label();
        match self {
            Quantity::BlackHoleMass => format!("10^{LOG_MBH_MIN} to 10^{LOG_MBH_MAX} {unit}"),
            Quantity::BulgeMass => format!("10^{LOG_MBULGE_MIN} to 10^{LOG_MBULGE_MAX} {unit}"),
            Quantity::BulgeLuminosity => {
                format!("10^{LOG_LBULGE_MIN} to 10^{LOG_LBULGE_MAX} {unit}")
            }
            Quantity::VelocityDispersion => format!("{SIGMA_MIN_KM_S} to {SIGMA_MAX_KM_S} {unit}"),
            Quantity::Distance => format!("{DISTANCE_MIN_MPC} to {DISTANCE_MAX_MPC} {unit}"),
            Quantity::Resolution => {
                format!("{RESOLUTION_MIN_ARCSEC} to {RESOLUTION_MAX_ARCSEC} {unit}")
            }
        }
    }

    /// The range in log10 of the linear unit, used to check every value the same way.
    fn log_range(self) -> (f64, f64) {
        let (min, max) = self.accepted_range();
        if self.is_log_canonical() {
            (min, max)
        } else {
            (min.log10(), max.log10())
        }
    }

    /// Examples of accepted entries, quoted for messages.
    fn examples(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "`3.2e9`, `3.2x10^9 +0.5e9/-0.3e9` or `log 9.51 ± 0.1`",
            Quantity::BulgeMass => "`2e11`, `2x10^11 ± 10%` or `log 11.3 ± 0.1`",
            Quantity::BulgeLuminosity => "`5e10`, `5x10^10 ± 1e10` or `log 10.7 ± 0.1`",
            Quantity::VelocityDispersion => "`210`, `210 ± 10` or `210 km/s`",
            Quantity::Distance => "`16.5` or `16.5 ± 0.8`",
            Quantity::Resolution => "`0.1` or `0.05\"`",
        }
    }

    /// An example of an entry with a symmetric error, quoted for messages.
    fn error_example(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "`3.2e9 ± 0.4e9` or `3.2e9 +0.5e9/-0.3e9`",
            Quantity::BulgeMass => "`2e11 ± 0.3e11`",
            Quantity::BulgeLuminosity => "`5e10 ± 1e10`",
            Quantity::VelocityDispersion => "`210 ± 10`",
            Quantity::Distance => "`16.5 ± 0.8`",
            Quantity::Resolution => "`0.1 ± 0.01`",
        }
    }

    /// Unit words accepted after the value or at the end of the entry (lower case).
    fn unit_words(self) -> &'static [&'static str] {
        match self {
            Quantity::BlackHoleMass | Quantity::BulgeMass => &["msun", "m_sun", "m☉", "m⊙", "msol"],
            Quantity::BulgeLuminosity => &["lsun", "l_sun", "l☉", "l⊙", "lsol"],
            Quantity::VelocityDispersion => &["km/s", "kms"],
            Quantity::Distance => &["mpc"],
            Quantity::Resolution => &["arcsec", "\""],
        }
    }

    /// Advice appended when a non-positive value is typed: only black-hole masses have a
    /// meaningful alternative (an upper limit).
    fn non_positive_advice(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => {
                "; for an undetected black hole, enter an upper limit such as `<2e7`"
            }
            _ => "",
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Quantity {
    type Err = UnknownNameError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Quantity::ALL
            .into_iter()
            .find(|q| q.as_str() == s)
            .ok_or_else(|| UnknownNameError {
                kind: "quantity",
                name: s.to_owned(),
                expected: "bh_mass, sigma, bulge_mass, bulge_luminosity, distance or resolution",
            })
    }
}

/// How to read a bare number: the person says whether they typed a linear value or its log10.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Scale {
    /// Linear unless the text says `log`; a bare number that only makes sense as a log10 is
    /// refused with advice rather than guessed.
    #[default]
    Auto,
    /// The number is the linear value (M☉, L☉, km/s, Mpc, arcsec).
    Linear,
    /// The number is log10 of the value in the linear unit; errors are in dex.
    Log10,
}

impl Scale {
    /// Stable name: "auto", "linear" or "log10".
    pub fn as_str(self) -> &'static str {
        match self {
            Scale::Auto => "auto",
            Scale::Linear => "linear",
            Scale::Log10 => "log10",
        }
    }
}

impl fmt::Display for Scale {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Scale {
    type Err = UnknownNameError;

    /// Reads "auto", "linear" or "log10" (also "log"); an empty string means [`Scale::Auto`],
    /// as sent by a form whose scale field was left alone.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "auto" | "" => Ok(Scale::Auto),
            "linear" => Ok(Scale::Linear),
            "log10" | "log" => Ok(Scale::Log10),
            _ => Err(UnknownNameError {
                kind: "scale",
                name: s.to_owned(),
                expected: "auto, linear or log10",
            }),
        }
    }
}

/// A stable name (of a [`Quantity`] or [`Scale`]) that is not known.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("The name `{name}` is not a known {kind}; expected one of {expected}.")]
pub struct UnknownNameError {
    /// What was being named: "quantity" or "scale".
    pub kind: &'static str,
    /// The name given.
    pub name: String,
    /// The accepted names, in words.
    pub expected: &'static str,
}

// ---------------------------------------------------------------------------------------------
// Parsed entries
// ---------------------------------------------------------------------------------------------

/// A value as typed, read into its canonical log10 form with errors in dex.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Entry {
    /// What the value measures.
    pub quantity: Quantity,
    /// The text exactly as typed, trimmed of surrounding white space.
    pub text: String,
    /// Canonical log10 value: log10 M☉ for masses, log10 L☉ for luminosity, log10 km/s for
    /// dispersion (log10 Mpc and log10 arcsec if a distance or resolution is read this way).
    /// For an upper limit, the limit.
    pub log_value: f64,
    /// Lower error, dex, ≥ 0 (0 for an upper limit or when no error was typed).
    pub err_minus_dex: f64,
    /// Upper error, dex, ≥ 0 (0 for an upper limit or when no error was typed).
    pub err_plus_dex: f64,
    /// Symmetric error, dex: the mean of the two (docs/methods.md §2.5 option 1, common
    /// practice).
    pub err_dex: f64,
    /// Whether the text gave an error at all (an error of `± 0` is given; no error is not).
    pub errors_given: bool,
    /// Whether the value is an upper limit (typed with `<`, `<=` or `≤`).
    pub upper_limit: bool,
    /// How the number was read: [`Scale::Linear`] or [`Scale::Log10`], never `Auto`.
    pub scale_used: Scale,
}

impl Entry {
    /// The value with its errors for display, as [`format_log_with_errors`] writes it.
    pub fn display_log(&self) -> String {
        format_log_with_errors(
            self.log_value,
            self.err_minus_dex,
            self.err_plus_dex,
            self.upper_limit,
        )
    }
}

/// A linear value as typed (distance in Mpc, resolution in arcsec) with a symmetric error.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinearEntry {
    /// What the value measures.
    pub quantity: Quantity,
    /// The text exactly as typed, trimmed of surrounding white space.
    pub text: String,
    /// The value in the quantity's unit ([`Quantity::unit_label`]: Mpc for a distance, arcsec
    /// for a resolution).
    pub value: f64,
    /// Symmetric error in the same unit, ≥ 0 and smaller than the value (0 when none typed).
    pub err: f64,
    /// Whether the text gave an error at all.
    pub errors_given: bool,
}

/// Why a typed value was refused. Every message is one sentence that names the quantity and
/// says what to type instead.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum EntryError {
    /// Nothing was typed.
    #[error("Enter a value for the {quantity}, such as {}.", quantity.examples())]
    Empty {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The entry is longer than [`MAX_ENTRY_CHARS`].
    #[error(
        "The {quantity} entry is {chars} characters long, but at most {max} are accepted.",
        max = MAX_ENTRY_CHARS
    )]
    TooLong {
        /// What the value measures.
        quantity: Quantity,
        /// Length of the trimmed entry, in characters.
        chars: usize,
    },
    /// Part of the entry could not be read.
    #[error(
        "The {quantity} entry could not be read from “{fragment}” onwards; type a number in {} such as {}.",
        quantity.unit_label(),
        quantity.examples()
    )]
    NotUnderstood {
        /// What the value measures.
        quantity: Quantity,
        /// The text from the first token that could not be read to the end.
        fragment: String,
    },
    /// The entry stops where something more was expected (`3.2e9 ±`, `log`).
    #[error(
        "The {quantity} entry `{text}` stops too early; type a number in {} such as {}.",
        quantity.unit_label(),
        quantity.examples()
    )]
    Incomplete {
        /// What the value measures.
        quantity: Quantity,
        /// The whole entry.
        text: String,
    },
    /// A number contains a comma, which is a thousands separator in some countries and a
    /// decimal mark in others.
    #[error(
        "The {quantity} entry `{fragment}` contains a comma, which separates thousands in some countries and decimals in others, so type {suggestion} instead, with no separators and a point for decimals."
    )]
    CommaInNumber {
        /// What the value measures.
        quantity: Quantity,
        /// The number with its comma, as typed.
        fragment: String,
        /// The readings of the number without a comma, quoted (such as "`1200` or `1.200`").
        suggestion: String,
    },
    /// A number is infinite, not a number, or too large to be represented.
    #[error("The {quantity} entry `{fragment}` is not a finite number (or is too large to store).")]
    NonFinite {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// A linear value is zero or negative (or so small it rounds to zero).
    #[error(
        "The {quantity} must be greater than zero, but `{fragment}` was entered{}.",
        quantity.non_positive_advice()
    )]
    NonPositive {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// With [`Scale::Auto`], a bare number is implausible as a linear value but plausible as a
    /// log10, so it is refused rather than guessed.
    #[error(
        "The {quantity} `{fragment}` reads as {fragment} {}, which is implausible, so if you meant log10 = {fragment}, choose the log scale or type `log {fragment}`.",
        quantity.unit_label()
    )]
    AmbiguousScale {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// The log scale was chosen (or `log` typed) but the number is written in a linear
    /// notation (`3.2e9`, `3.2x10^9`, `10^9.51`).
    #[error(
        "The {quantity} is on the log scale, but `{fragment}` is written as a linear value, so either enter the linear value alone with the linear or automatic scale, or enter its log10 as a plain number such as `9.51`."
    )]
    LogScaleLinearNotation {
        /// What the value measures.
        quantity: Quantity,
        /// The number as typed.
        fragment: String,
    },
    /// The linear scale was chosen but the text says `log`.
    #[error(
        "The linear scale was chosen for the {quantity}, but the entry says `log`, so choose the log scale or remove the word `log`."
    )]
    LinearScaleLogText {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The value lies outside the accepted range of the quantity.
    #[error("The {quantity} {shown} is outside the accepted range {}.", quantity.range_text())]
    OutOfRange {
        /// What the value measures.
        quantity: Quantity,
        /// The value as understood, with its unit (such as "10^12.30 M☉" or "2500 Mpc").
        shown: String,
    },
    /// A linear lower error reaches zero or below: the value is not a detection.
    #[error(
        "The lower error reaches zero or below, so the {quantity} is not a detection; enter it as an upper limit instead, such as `<{suggestion}` (the top of the error bar)."
    )]
    LowerErrorReachesZero {
        /// What the value measures.
        quantity: Quantity,
        /// The top of the error bar, M + δ₊, written compactly (such as "3e7").
        suggestion: String,
    },
    /// An upper limit was typed with error bars.
    #[error(
        "An upper limit on the {quantity} takes no error bars, so enter either the limit alone (such as `<2e7`) or a measured value with its errors."
    )]
    LimitWithErrors {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A lower limit (`>`, `>=`, `≥`) was typed.
    #[error(
        "Lower limits (`>`) on the {quantity} are not supported; enter a measured value, or an upper limit with `<`."
    )]
    LowerLimit {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A limit was typed for a quantity that cannot be a limit (distance, resolution).
    #[error("The {quantity} cannot be a limit; enter a value such as {}.", quantity.examples())]
    LimitNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// An error size carries a sign (`± -0.1`).
    #[error(
        "Errors on the {quantity} are sizes and take no sign of their own; write them as {}.",
        quantity.error_example()
    )]
    SignedError {
        /// What the value measures.
        quantity: Quantity,
    },
    /// An error, converted to dex, exceeds [`MAX_ERR_DEX`].
    #[error(
        "An error of {shown} dex on the {quantity} is implausibly large (the limit is {max} dex), so check the error, or enter an upper limit.",
        max = MAX_ERR_DEX
    )]
    ErrorTooLarge {
        /// What the value measures.
        quantity: Quantity,
        /// The error in dex, formatted.
        shown: String,
    },
    /// A percentage error was given for a log10 value.
    #[error(
        "A percentage error cannot apply to a log10 value of the {quantity}; give the error in dex, such as `log 9.51 ± 0.1`."
    )]
    PercentOnLogScale {
        /// What the value measures.
        quantity: Quantity,
    },
    /// The two errors mix `dex` and `%`.
    #[error("The errors on the {quantity} mix `dex` and `%`; give both in the same unit.")]
    MixedErrorUnits {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A word after the number is not the quantity's unit.
    #[error(
        "The word `{found}` is not the unit of the {quantity}; enter the value in {} (the unit may be left out).",
        quantity.unit_label()
    )]
    WrongUnit {
        /// What the value measures.
        quantity: Quantity,
        /// The word as typed.
        found: String,
    },
    /// A linear-only entry ([`parse_linear`]) was given on a log scale or with dex errors.
    #[error(
        "The {quantity} is entered as a linear value in {unit} with any error in {unit} or as a percentage, not on a log scale, such as {}.",
        quantity.error_example(),
        unit = quantity.unit_label()
    )]
    LogNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A linear-only entry ([`parse_linear`]) was given with asymmetric errors.
    #[error(
        "The {quantity} takes one symmetric error, such as {}, so enter the larger of the two.",
        quantity.error_example()
    )]
    AsymmetricNotAccepted {
        /// What the value measures.
        quantity: Quantity,
    },
    /// A linear-only entry ([`parse_linear`]) has an error as large as the value.
    #[error("The error on the {quantity} is as large as the value itself; check the entry.")]
    ErrorExceedsValue {
        /// What the value measures.
        quantity: Quantity,
    },
}

/// Reads a value as typed into its canonical log10 form with errors in dex.
///
/// See the module documentation for the accepted forms. The conversion of linear errors is
///
/// ```text
/// log_value = log10(M)
/// u = log10((M + δ₊) / M),   l = log10(M / (M − δ₋)),   err_dex = (u + l) / 2
/// ```
///
/// where M, δ₊, δ₋ are in the quantity's linear unit ([`Quantity::unit_label`]) and u, l,
/// err_dex in dex. Percent errors are δ = p/100 · M. Values on the log scale keep their
/// errors, which are already in dex.
///
/// Distance and resolution can be read this way too (giving log10 Mpc or log10 arcsec), but
/// they are normally read with [`parse_linear`]; upper limits on them are refused.
///
/// # Errors
///
/// An [`EntryError`] whose message says, in one sentence, what is wrong and what to type.
///
/// # References
///
/// docs/methods.md §2.5 option 1 (convert to dex and average; common practice).
pub fn parse_entry(text: &str, quantity: Quantity, scale: Scale) -> Result<Entry, EntryError> {
    let text = checked_text(text, quantity)?;
    let syntax = parse_syntax(text, quantity)?;
    if syntax.upper_limit && syntax.errors.is_some() {
        return Err(EntryError::LimitWithErrors { quantity });
    }
    if syntax.upper_limit && !quantity.is_log_canonical() {
        return Err(EntryError::LimitNotAccepted { quantity });
    }
    let log_scale = match (scale, syntax.log_word) {
        (Scale::Log10, _) => true,
        (Scale::Linear, true) => return Err(EntryError::LinearScaleLogText { quantity }),
        (Scale::Linear, false) => false,
        (Scale::Auto, said_log) => said_log,
    };
    let value = &syntax.value;
    let log_value = if log_scale {
        if value.form != Form::Plain {
            return Err(EntryError::LogScaleLinearNotation {
                quantity,
                fragment: value.text(text).to_owned(),
            });
        }
        if !value.linear.is_finite() {
            return Err(non_finite(quantity, value, text));
        }
        if value.negative {
            -value.linear
        } else {
            value.linear
        }
    } else {
        let log_value = magnitude_log10(value, text, quantity)?;
        // A bare number that only makes sense as a log10 (a "mass" of 9.51 M☉) is refused
        // rather than guessed: the two readings differ by ten orders of magnitude.
        if scale == Scale::Auto
            && value.form == Form::Plain
            && quantity.is_log_canonical()
            && !in_log_range(quantity, log_value)
            && in_log_range(quantity, value.linear)
        {
            return Err(EntryError::AmbiguousScale {
                quantity,
                fragment: value.text(text).to_owned(),
            });
        }
        log_value
    };
    if !in_log_range(quantity, log_value) {
        return Err(EntryError::OutOfRange {
            quantity,
            shown: show_log_value(quantity, log_value),
        });
    }

    let (err_minus_dex, err_plus_dex) = match &syntax.errors {
        None => (0.0, 0.0),
        Some(errors) => dex_errors(errors, log_value, log_scale, text, quantity)?,
    };
    Ok(Entry {
        quantity,
        text: text.to_owned(),
        log_value,
        err_minus_dex,
        err_plus_dex,
        err_dex: 0.5 * (err_minus_dex + err_plus_dex),
        errors_given: syntax.errors.is_some(),
        upper_limit: syntax.upper_limit,
        scale_used: if log_scale {
            Scale::Log10
        } else {
            Scale::Linear
        },
    })
}

/// Reads a linear value with an optional symmetric error: the galaxy's adopted distance
/// (`16.5 ± 0.8`, `16.5`), the distance a source assumed, a spatial resolution (`0.1`).
///
/// The same number forms as [`parse_entry`] are accepted (`1.65e1`, `16.5 Mpc`), and the error
/// may be in the value's unit or a percentage (`16.5 ± 5%`). Any quantity may be read this way;
/// the value is checked against the quantity's range converted to its linear unit.
///
/// # Errors
///
/// As [`parse_entry`], and also for limits ([`EntryError::LimitNotAccepted`]), the log scale
/// or dex errors ([`EntryError::LogNotAccepted`]), asymmetric errors
/// ([`EntryError::AsymmetricNotAccepted`]) and errors as large as the value
/// ([`EntryError::ErrorExceedsValue`]).
pub fn parse_linear(text: &str, quantity: Quantity) -> Result<LinearEntry, EntryError> {
    let text = checked_text(text, quantity)?;
    let syntax = parse_syntax(text, quantity)?;
    if syntax.upper_limit {
        return Err(EntryError::LimitNotAccepted { quantity });
    }
    if syntax.log_word {
        return Err(EntryError::LogNotAccepted { quantity });
    }
    let value_mag = &syntax.value;
    let log_value = magnitude_log10(value_mag, text, quantity)?;
    if !in_log_range(quantity, log_value) {
        return Err(EntryError::OutOfRange {
            quantity,
            shown: show_log_value(quantity, log_value),
        });
    }
    // In range, so finite and positive: the exactly typed linear number is preferred over
    // 10^log_value, which could differ in the last place.
    let value = if value_mag.linear.is_finite() && value_mag.linear > 0.0 {
        value_mag.linear
    } else {
        10f64.powf(log_value)
    };
    let err = match &syntax.errors {
        None => 0.0,
        Some(ErrorSyntax::Asymmetric { .. }) => {
            return Err(EntryError::AsymmetricNotAccepted { quantity });
        }
        Some(ErrorSyntax::Symmetric(size)) => {
            let typed = error_size(size, text, quantity)?;
            match size.unit {
                ErrorUnit::Dex => return Err(EntryError::LogNotAccepted { quantity }),
                ErrorUnit::Percent => typed / 100.0 * value,
                ErrorUnit::Same => typed,
            }
        }
    };
    if !err.is_finite() {
        return Err(EntryError::ErrorTooLarge {
            quantity,
            shown: format_compact(err),
        });
    }
    if err >= value {
        return Err(EntryError::ErrorExceedsValue { quantity });
    }
    Ok(LinearEntry {
        quantity,
        text: text.to_owned(),
        value,
        err,
        errors_given: syntax.errors.is_some(),
    })
}

/// Trims the entry and refuses empty and overlong ones.
fn checked_text(text: &str, quantity: Quantity) -> Result<&str, EntryError> {
    let text = text.trim();
    if text.is_empty() {
        return Err(EntryError::Empty { quantity });
    }
    let chars = text.chars().count();
    if chars > MAX_ENTRY_CHARS {
        return Err(EntryError::TooLong { quantity, chars });
    }
    Ok(text)
}

/// Whether a log10 value lies inside the quantity's accepted range (ends included, up to
/// rounding).
fn in_log_range(quantity: Quantity, log_value: f64) -> bool {
    let (min, max) = quantity.log_range();
    log_value.is_finite() && log_value >= min - RANGE_EPS_DEX && log_value <= max + RANGE_EPS_DEX
}

/// log10 of a number read on the linear scale, refusing non-positive and non-finite ones.
fn magnitude_log10(value: &Magnitude, text: &str, quantity: Quantity) -> Result<f64, EntryError> {
    let refuse_non_positive = || EntryError::NonPositive {
        quantity,
        fragment: value.text(text).to_owned(),
    };
    if value.negative || value.mantissa_zero {
        return Err(refuse_non_positive());
    }
    if let Some(log_value) = value.log10_exact {
        return if log_value.is_finite() {
            Ok(log_value)
        } else {
            Err(non_finite(quantity, value, text))
        };
    }
    if !value.linear.is_finite() {
        return Err(non_finite(quantity, value, text));
    }
    if value.linear <= 0.0 {
        // Zero, or so small that it rounded to zero.
        return Err(refuse_non_positive());
    }
    Ok(value.linear.log10())
}

fn non_finite(quantity: Quantity, value: &Magnitude, text: &str) -> EntryError {
    EntryError::NonFinite {
        quantity,
        fragment: value.text(text).to_owned(),
    }
}

/// Converts the typed errors to (lower, upper) errors in dex.
///
/// ```text
/// linear:  u = log10(1 + δ₊/M) = ln_1p(δ₊/M) / ln 10
///          l = log10(M / (M − δ₋)) = −ln_1p(−δ₋/M) / ln 10,   refused when δ₋ ≥ M
/// percent: δ = p/100 · M, then as linear
/// dex:     u = δ₊, l = δ₋
/// ```
///
/// `ln_1p` keeps small fractional errors accurate (δ/M of 10⁻⁶ would lose half its digits
/// in log10(1 + δ/M)).
fn dex_errors(
    errors: &ErrorSyntax,
    log_value: f64,
    log_scale: bool,
    text: &str,
    quantity: Quantity,
) -> Result<(f64, f64), EntryError> {
    let (plus, minus) = match errors {
        ErrorSyntax::Symmetric(size) => (size, size),
        ErrorSyntax::Asymmetric { plus, minus } => (plus, minus),
    };
    let units = [plus.unit, minus.unit];
    let any_dex = units.contains(&ErrorUnit::Dex);
    let any_percent = units.contains(&ErrorUnit::Percent);
    if any_dex && any_percent {
        return Err(EntryError::MixedErrorUnits { quantity });
    }
    if log_scale && any_percent {
        return Err(EntryError::PercentOnLogScale { quantity });
    }
    // A `dex` written once (after the last error) applies to both; on the log scale every
    // error is in dex.
    let in_dex = log_scale || any_dex;
    let delta_plus = error_size(plus, text, quantity)?;
    let delta_minus = error_size(minus, text, quantity)?;

    let (err_minus_dex, err_plus_dex) = if in_dex {
        (delta_minus, delta_plus)
    } else {
        // In range, so M is finite and positive.
        let m = 10f64.powf(log_value);
        let to_linear = |delta: f64, unit: ErrorUnit| match unit {
            ErrorUnit::Percent => delta / 100.0 * m,
            ErrorUnit::Same | ErrorUnit::Dex => delta,
        };
        let delta_plus = to_linear(delta_plus, plus.unit);
        let delta_minus = to_linear(delta_minus, minus.unit);
        if delta_minus >= m {
            return Err(EntryError::LowerErrorReachesZero {
                quantity,
                suggestion: format_compact(m + delta_plus),
            });
        }
        let upper = (delta_plus / m).ln_1p() / LN_10;
        let lower = -(-delta_minus / m).ln_1p() / LN_10;
        (lower, upper)
    };
    for err in [err_minus_dex, err_plus_dex] {
        if !err.is_finite() || err > MAX_ERR_DEX {
            return Err(EntryError::ErrorTooLarge {
                quantity,
                shown: format_compact(err),
            });
        }
    }
    Ok((err_minus_dex, err_plus_dex))
}

/// The size of one typed error, as a finite non-negative number in the unit it was typed in.
fn error_size(size: &ErrorSize, text: &str, quantity: Quantity) -> Result<f64, EntryError> {
    let value = &size.magnitude;
    if value.linear.is_finite() {
        Ok(value.linear)
    } else {
        Err(non_finite(quantity, value, text))
    }
}

/// A log10 value as understood, with its unit, for messages: "10^12.30 M☉" for masses and
/// luminosities, the linear value for dispersion, distance and resolution ("700 km/s").
fn show_log_value(quantity: Quantity, log_value: f64) -> String {
    let unit = quantity.unit_label();
    let linear = 10f64.powf(log_value);
    match quantity {
        Quantity::BlackHoleMass | Quantity::BulgeMass | Quantity::BulgeLuminosity => {
            format!("10^{log_value:.2} {unit}")
        }
        _ if linear.is_finite() && linear > 0.0 => format!("{} {unit}", format_compact(linear)),
        _ => format!("10^{log_value:.2} {unit}"),
    }
}

/// A number written with at most three significant digits, in exponent form when very large
/// or small ("3e7", "3.7e9", "0.005", "16.5"), for messages.
fn format_compact(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if a == 0.0 {
        return "0".to_owned();
    }
    if (1e-3..1e6).contains(&a) {
        // Three significant digits: the last one at 10^(floor(log10 a) − 2).
        let decimals = (2.0 - a.log10().floor()).max(0.0) as usize;
        return trim_fraction_zeros(&format!("{x:.decimals$}"));
    }
    let s = format!("{x:.2e}");
    match s.split_once('e') {
        Some((mantissa, exponent)) => format!("{}e{exponent}", trim_fraction_zeros(mantissa)),
        None => s,
    }
}

/// "3.200" → "3.2", "3.000" → "3", "120" → "120".
fn trim_fraction_zeros(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        s.to_owned()
    }
}

// ---------------------------------------------------------------------------------------------
// Display helpers
// ---------------------------------------------------------------------------------------------

/// A log10 value with its errors, to two decimals, for pages.
///
/// "8.32 +0.10/−0.12" for different errors, "8.32 ± 0.11" when both round to the same two
/// decimals, "8.32" when both round to zero, "< 7.30" for an upper limit (errors ignored).
/// Errors are taken as magnitudes (their sign is ignored) and a non-finite error is treated as
/// absent; a non-finite value is shown as "—". The minus sign is U+2212.
pub fn format_log_with_errors(
    log_value: f64,
    err_minus_dex: f64,
    err_plus_dex: f64,
    upper_limit: bool,
) -> String {
    if !log_value.is_finite() {
        return "—".to_owned();
    }
    let value = two_decimals(log_value);
    if upper_limit {
        return format!("< {value}");
    }
    let shown_err = |err: f64| {
        if err.is_finite() {
            two_decimals(err.abs())
        } else {
            two_decimals(0.0)
        }
    };
    let minus = shown_err(err_minus_dex);
    let plus = shown_err(err_plus_dex);
    let zero = two_decimals(0.0);
    if minus == zero && plus == zero {
        value
    } else if minus == plus {
        format!("{value} ± {plus}")
    } else {
        format!("{value} +{plus}/\u{2212}{minus}")
    }
}

/// Two decimals, without a negative zero ("-0.00" would suggest a sign that is not there).
fn two_decimals(x: f64) -> String {
    let s = format!("{x:.2}");
    if s == "-0.00" { "0.00".to_owned() } else { s }
}

/// A value and its error, the error rounded to two significant digits and the value to the
/// same decimal place (common practice), as "8.32 ± 0.12", "123500 ± 1200" or "0.10 ± 0.10".
///
/// ```text
/// k = floor(log10 err) − 1          place of the last kept digit, 10^k
/// err′ = round(err / 10^k) · 10^k   (if err′ reaches 100 · 10^k, k grows by one)
/// value′ = round(value / 10^k) · 10^k
/// ```
///
/// A non-finite value is shown as "—"; with an error that is zero, negative or not finite, the
/// value alone is shown in Rust's shortest round-trip form.
pub fn round_to_uncertainty(value: f64, err: f64) -> String {
    if !value.is_finite() {
        return "—".to_owned();
    }
    if !(err.is_finite() && err > 0.0) {
        return format!("{value}");
    }
    let mut place = err.log10().floor() as i32 - 1;
    // Rounding can carry into a new leading digit (0.0996 → 0.100): keep two digits, not three.
    if scale_round(err, place) >= 100.0 {
        place += 1;
    }
    if place >= 0 {
        let step = 10f64.powi(place);
        let value = scale_round(value, place) * step;
        let err = scale_round(err, place) * step;
        format!("{} ± {}", two_decimals_free(value), two_decimals_free(err))
    } else {
        let decimals = (-place) as usize;
        format!("{value:.decimals$} ± {err:.decimals$}")
    }
}

/// x / 10^place, rounded to an integer (multiplying by 10^−place when place < 0, which is
/// exact for the small powers involved more often than dividing by an inexact 10^place).
fn scale_round(x: f64, place: i32) -> f64 {
    if place >= 0 {
        (x / 10f64.powi(place)).round()
    } else {
        (x * 10f64.powi(-place)).round()
    }
}

/// A whole number without decimals or a negative zero.
fn two_decimals_free(x: f64) -> String {
    let s = format!("{x:.0}");
    if s == "-0" { "0".to_owned() } else { s }
}

// ---------------------------------------------------------------------------------------------
// Unit newtypes
// ---------------------------------------------------------------------------------------------

/// Why a number cannot be held by a unit newtype.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum UnitError {
    /// The number is NaN or infinite.
    #[error("A value in {unit} must be a finite number, got {value}.")]
    NotFinite {
        /// The unit of the newtype.
        unit: &'static str,
        /// The value given.
        value: f64,
    },
    /// A linear value is zero or negative.
    #[error("A value in {unit} must be greater than zero, got {value}.")]
    NotPositive {
        /// The unit of the newtype.
        unit: &'static str,
        /// The value given.
        value: f64,
    },
    /// An error or scatter in dex is negative.
    #[error("A value in {unit} must be zero or greater, got {value}.")]
    Negative {
        /// The unit of the newtype.
        unit: &'static str,
        /// The value given.
        value: f64,
    },
    /// The value lies beyond 10^±300, where log and linear forms can no longer be converted
    /// into each other within a 64-bit float.
    #[error(
        "A value in {unit} must lie between 10^-300 and 10^300 (a log10 between -300 and 300), got {value}."
    )]
    Unrepresentable {
        /// The unit of the newtype.
        unit: &'static str,
        /// The value given.
        value: f64,
    },
}

fn check_log10(unit: &'static str, value: f64) -> Result<f64, UnitError> {
    if !value.is_finite() {
        Err(UnitError::NotFinite { unit, value })
    } else if value.abs() > LOG10_LIMIT {
        Err(UnitError::Unrepresentable { unit, value })
    } else {
        Ok(value)
    }
}

fn check_linear(unit: &'static str, value: f64) -> Result<f64, UnitError> {
    if !value.is_finite() {
        Err(UnitError::NotFinite { unit, value })
    } else if value <= 0.0 {
        Err(UnitError::NotPositive { unit, value })
    } else if value.log10().abs() > LOG10_LIMIT + RANGE_EPS_DEX {
        // The small tolerance admits 10^±300 computed by `to_linear`, which may be one unit in
        // the last place beyond.
        Err(UnitError::Unrepresentable { unit, value })
    } else {
        Ok(value)
    }
}

fn check_dex(unit: &'static str, value: f64) -> Result<f64, UnitError> {
    if !value.is_finite() {
        Err(UnitError::NotFinite { unit, value })
    } else if value < 0.0 {
        Err(UnitError::Negative { unit, value })
    } else {
        Ok(value)
    }
}

macro_rules! unit_newtype {
    ($(#[$doc:meta])* $name:ident, $unit:literal, $check:ident) => {
        $(#[$doc])*
        ///
        /// Serialised as a bare number; deserialising validates it like [`Self::new`].
        #[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Deserialize)]
        #[serde(try_from = "f64")]
        pub struct $name(f64);

        impl $name {
            #[doc = concat!("The unit, for labels and messages: \"", $unit, "\".")]
            pub const UNIT: &'static str = $unit;

            #[doc = concat!("Wraps a number in ", $unit, ".")]
            ///
            /// # Errors
            ///
            /// [`UnitError`] if the number is not finite, or outside what the type holds (see
            /// the type's documentation).
            pub fn new(value: f64) -> Result<Self, UnitError> {
                $check($unit, value).map(Self)
            }

            #[doc = concat!("The bare number, in ", $unit, ".")]
            pub fn get(self) -> f64 {
                self.0
            }
        }

        impl TryFrom<f64> for $name {
            type Error = UnitError;

            fn try_from(value: f64) -> Result<Self, Self::Error> {
                Self::new(value)
            }
        }

        impl Serialize for $name {
            fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
                serializer.serialize_f64(self.0)
            }
        }
    };
}

unit_newtype!(
    /// A mass as log10(M / M☉), in dex; any finite value within ±300.
    Log10Msun,
    "log10 M☉",
    check_log10
);
unit_newtype!(
    /// A mass in solar masses (linear); positive, between 10^-300 and 10^300.
    Msun,
    "M☉",
    check_linear
);
unit_newtype!(
    /// A luminosity as log10(L / L☉), in dex; any finite value within ±300.
    Log10Lsun,
    "log10 L☉",
    check_log10
);
unit_newtype!(
    /// A luminosity in solar luminosities (linear); positive, between 10^-300 and 10^300.
    Lsun,
    "L☉",
    check_linear
);
unit_newtype!(
    /// A velocity dispersion as log10(σ / (km/s)); any finite value within ±300.
    Log10KmPerS,
    "log10 km/s",
    check_log10
);
unit_newtype!(
    /// A velocity in km/s (linear); positive, between 10^-300 and 10^300.
    KmPerS,
    "km/s",
    check_linear
);
unit_newtype!(
    /// A difference or half-width in log10 space (an error bar, an intrinsic scatter), in dex;
    /// finite and zero or greater.
    Dex,
    "dex",
    check_dex
);
unit_newtype!(
    /// A distance in megaparsecs; positive, between 10^-300 and 10^300.
    Mpc,
    "Mpc",
    check_linear
);
unit_newtype!(
    /// An angle in arcseconds; positive, between 10^-300 and 10^300.
    Arcsec,
    "arcsec",
    check_linear
);

/// 10^x for |x| ≤ 300; the clamp only guards against an infinity or a zero, which cannot
/// arise for such x.
fn pow10_bounded(log_value: f64) -> f64 {
    10f64.powf(log_value).clamp(f64::MIN_POSITIVE, f64::MAX)
}

/// log10(x) for a linear newtype's value, kept within the log newtypes' bounds.
fn log10_bounded(value: f64) -> f64 {
    value.log10().clamp(-LOG10_LIMIT, LOG10_LIMIT)
}

macro_rules! log_linear_pair {
    ($log:ident, $linear:ident) => {
        impl $log {
            /// The linear value, 10^x.
            pub fn to_linear(self) -> $linear {
                $linear(pow10_bounded(self.0))
            }
        }

        impl $linear {
            /// The log10 of the value.
            pub fn to_log10(self) -> $log {
                $log(log10_bounded(self.0))
            }
        }
    };
}

log_linear_pair!(Log10Msun, Msun);
log_linear_pair!(Log10Lsun, Lsun);
log_linear_pair!(Log10KmPerS, KmPerS);

// ---------------------------------------------------------------------------------------------
// Lexer
// ---------------------------------------------------------------------------------------------

#[derive(Debug, Clone, PartialEq)]
enum Tok {
    /// ASCII digits with at most one point and an optional `e` exponent, as typed.
    Num(String),
    /// A run of superscript digits and signs, converted to ASCII (`⁻⁹` → `-9`).
    Sup(String),
    /// A lower-case word (`log`, `log10`, `dex`, `msun`, `km/s`, `"`).
    Word(String),
    Lt,
    Le,
    Gt,
    Ge,
    Pm,
    Plus,
    Minus,
    Slash,
    Times,
    Caret,
    LParen,
    RParen,
    LBrace,
    RBrace,
    Underscore,
    Eq,
    Comma,
    Percent,
    Other,
}

#[derive(Debug, Clone)]
struct Token {
    tok: Tok,
    /// Byte offsets in the trimmed text.
    start: usize,
    end: usize,
}

fn superscript_ascii(c: char) -> Option<char> {
    Some(match c {
        '⁰' => '0',
        '¹' => '1',
        '²' => '2',
        '³' => '3',
        '⁴' => '4',
        '⁵' => '5',
        '⁶' => '6',
        '⁷' => '7',
        '⁸' => '8',
        '⁹' => '9',
        '⁻' => '-',
        '⁺' => '+',
        _ => return None,
    })
}

fn is_word_char(c: char) -> bool {
    c.is_alphabetic() || c == '☉' || c == '⊙'
}

fn is_minus(c: char) -> bool {
    matches!(c, '-' | '\u{2212}' | '\u{2013}')
}

fn lex(text: &str, quantity: Quantity) -> Result<Vec<Token>, EntryError> {
    let chars: Vec<(usize, char)> = text.char_indices().collect();
    let offset = |i: usize| chars.get(i).map_or(text.len(), |&(b, _)| b);
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    let mut tokens = Vec::new();
    let mut i = 0;
    while let Some(c) = char_at(i) {
        let next = char_at(i + 1);
        let start = i;
        let (tok, len) = if c.is_whitespace() {
            i += 1;
            continue;
        } else if c.is_ascii_digit() || (c == '.' && next.is_some_and(|n| n.is_ascii_digit())) {
            let (number, len) = lex_number(&chars[i..], text, quantity)?;
            (Tok::Num(number), len)
        } else if superscript_ascii(c).is_some() {
            let mut s = String::new();
            let mut j = i;
            while let Some(ascii) = char_at(j).and_then(superscript_ascii) {
                s.push(ascii);
                j += 1;
            }
            (Tok::Sup(s), j - i)
        } else if is_word_char(c) {
            let mut word = String::new();
            let mut j = i;
            while let Some(w) = char_at(j) {
                let joins_word = matches!(w, '_' | '/') && char_at(j + 1).is_some_and(is_word_char);
                if is_word_char(w) || (joins_word && !word.is_empty()) {
                    word.extend(w.to_lowercase());
                    j += 1;
                } else {
                    break;
                }
            }
            // `log10` is one word unless the digits go on (`log10.5`, `log100` read as `log`).
            if word == "log"
                && char_at(j) == Some('1')
                && char_at(j + 1) == Some('0')
                && !char_at(j + 2).is_some_and(|d| d.is_ascii_digit() || d == '.')
            {
                word.push_str("10");
                j += 2;
            }
            let tok = if word == "x" {
                Tok::Times
            } else {
                Tok::Word(word)
            };
            (tok, j - i)
        } else {
            match (c, next) {
                ('<', Some('=')) => (Tok::Le, 2),
                ('>', Some('=')) => (Tok::Ge, 2),
                ('*', Some('*')) => (Tok::Caret, 2),
                ('<', _) => (Tok::Lt, 1),
                ('≤' | '⩽', _) => (Tok::Le, 1),
                ('>', _) => (Tok::Gt, 1),
                ('≥' | '⩾', _) => (Tok::Ge, 1),
                ('±', _) => (Tok::Pm, 1),
                ('+', _) => (Tok::Plus, 1),
                (m, _) if is_minus(m) => (Tok::Minus, 1),
                ('/', _) => (Tok::Slash, 1),
                ('×' | '*' | '·' | '⋅', _) => (Tok::Times, 1),
                ('^', _) => (Tok::Caret, 1),
                ('(', _) => (Tok::LParen, 1),
                (')', _) => (Tok::RParen, 1),
                ('{', _) => (Tok::LBrace, 1),
                ('}', _) => (Tok::RBrace, 1),
                ('_', _) => (Tok::Underscore, 1),
                ('=', _) => (Tok::Eq, 1),
                (',', _) => (Tok::Comma, 1),
                ('%', _) => (Tok::Percent, 1),
                ('"' | '″', _) => (Tok::Word("\"".to_owned()), 1),
                _ => (Tok::Other, 1),
            }
        };
        i += len;
        tokens.push(Token {
            tok,
            start: offset(start),
            end: offset(i),
        });
    }
    Ok(tokens)
}

/// Reads digits, at most one point and an optional exponent (`3.2e9`, `.5`, `3.2E-3`); returns
/// the number as ASCII and how many characters it used. A comma between digits is refused.
fn lex_number(
    chars: &[(usize, char)],
    text: &str,
    quantity: Quantity,
) -> Result<(String, usize), EntryError> {
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    let mut number = String::new();
    let mut j = 0;
    let mut seen_point = false;
    while let Some(c) = char_at(j) {
        if c.is_ascii_digit() || (c == '.' && !seen_point) {
            seen_point |= c == '.';
            number.push(c);
            j += 1;
        } else if c == ',' && char_at(j + 1).is_some_and(|d| d.is_ascii_digit()) {
            // Take the whole run of digits, commas and points, and an exponent, for the message.
            let mut k = j;
            while char_at(k).is_some_and(|d| d.is_ascii_digit() || d == ',' || d == '.') {
                k += 1;
            }
            k += exponent_len(&chars[k..]);
            let start = chars[0].0;
            let end = chars.get(k).map_or(text.len(), |&(b, _)| b);
            return Err(comma_error(quantity, &text[start..end]));
        } else {
            break;
        }
    }
    let len = exponent_len(&chars[j..]);
    for &(_, c) in &chars[j..j + len] {
        match c {
            'E' | 'e' => number.push('e'),
            '+' => {}
            m if is_minus(m) => number.push('-'),
            d => number.push(d),
        }
    }
    Ok((number, j + len))
}

/// Length of an `e` exponent (`e9`, `E+9`, `e-3`) at the start of `chars`, or 0.
fn exponent_len(chars: &[(usize, char)]) -> usize {
    let char_at = |i: usize| chars.get(i).map(|&(_, c)| c);
    if !matches!(char_at(0), Some('e' | 'E')) {
        return 0;
    }
    let mut k = 1;
    if char_at(k).is_some_and(|s| s == '+' || is_minus(s)) {
        k += 1;
    }
    if !char_at(k).is_some_and(|d| d.is_ascii_digit()) {
        return 0;
    }
    while char_at(k).is_some_and(|d| d.is_ascii_digit()) {
        k += 1;
    }
    k
}

fn comma_error(quantity: Quantity, fragment: &str) -> EntryError {
    let without = fragment.replace(',', "");
    let suggestion = if fragment.matches(',').count() == 1 && !fragment.contains('.') {
        format!("`{without}` or `{}`", fragment.replace(',', "."))
    } else {
        format!("`{without}`")
    };
    EntryError::CommaInNumber {
        quantity,
        fragment: fragment.to_owned(),
        suggestion,
    }
}

// ---------------------------------------------------------------------------------------------
// Parser
// ---------------------------------------------------------------------------------------------

/// How a number was written; decides whether it may stand on the log scale.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Form {
    /// `9.51`, `3200000000`
    Plain,
    /// `3.2e9`
    ENotation,
    /// `3.2x10^9`
    TimesTen,
    /// `10^9.51`
    PowerOfTen,
}

/// A number as read, before its scale is decided.
#[derive(Debug, Clone)]
struct Magnitude {
    form: Form,
    /// A minus sign was typed before it.
    negative: bool,
    /// Whether a `x10^` mantissa was zero (its log10 does not exist).
    mantissa_zero: bool,
    /// The value as a linear number (infinite if it overflowed, zero if it underflowed).
    linear: f64,
    /// log10 of the value when the notation gives it exactly (`10^9.51`, `3.2x10^9`), which
    /// also survives values whose linear form would overflow.
    log10_exact: Option<f64>,
    start: usize,
    end: usize,
}

impl Magnitude {
    fn text<'t>(&self, text: &'t str) -> &'t str {
        &text[self.start..self.end]
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum ErrorUnit {
    /// The unit of the value (linear unit, or dex on the log scale).
    Same,
    Dex,
    Percent,
}

#[derive(Debug, Clone)]
struct ErrorSize {
    magnitude: Magnitude,
    unit: ErrorUnit,
}

#[derive(Debug, Clone)]
enum ErrorSyntax {
    Symmetric(ErrorSize),
    Asymmetric { plus: ErrorSize, minus: ErrorSize },
}

#[derive(Debug, Clone)]
struct Syntax {
    upper_limit: bool,
    log_word: bool,
    value: Magnitude,
    errors: Option<ErrorSyntax>,
}

struct Parser<'a> {
    tokens: Vec<Token>,
    pos: usize,
    text: &'a str,
    quantity: Quantity,
}

fn parse_syntax(text: &str, quantity: Quantity) -> Result<Syntax, EntryError> {
    let tokens = lex(text, quantity)?;
    let mut p = Parser {
        tokens,
        pos: 0,
        text,
        quantity,
    };
    let mut upper_limit = false;
    let mut log_word = false;
    loop {
        match p.peek() {
            Some(Tok::Lt | Tok::Le) if !upper_limit => {
                upper_limit = true;
                p.bump();
            }
            Some(Tok::Gt | Tok::Ge) => return Err(EntryError::LowerLimit { quantity }),
            Some(Tok::Word(w)) if (w == "log" || w == "log10") && !log_word => {
                log_word = true;
                p.bump();
                if p.peek() == Some(&Tok::Eq) {
                    p.bump();
                }
            }
            _ => break,
        }
    }
    let value = p.number(true)?;
    p.unit()?;
    let errors = p.errors()?;
    p.unit()?;
    if p.peek().is_some() {
        return Err(p.not_understood());
    }
    Ok(Syntax {
        upper_limit,
        log_word,
        value,
        errors,
    })
}

impl Parser<'_> {
    fn peek(&self) -> Option<&Tok> {
        self.tokens.get(self.pos).map(|t| &t.tok)
    }

    fn peek_at(&self, ahead: usize) -> Option<&Tok> {
        self.tokens.get(self.pos + ahead).map(|t| &t.tok)
    }

    fn bump(&mut self) {
        self.pos += 1;
    }

    /// Byte offset where the next token starts (the end of the text when none is left).
    fn here(&self) -> usize {
        self.tokens
            .get(self.pos)
            .map_or(self.text.len(), |t| t.start)
    }

    /// Byte offset where the last consumed token ends.
    fn last_end(&self) -> usize {
        self.pos
            .checked_sub(1)
            .and_then(|i| self.tokens.get(i))
            .map_or(0, |t| t.end)
    }

    fn not_understood(&self) -> EntryError {
        if self.pos >= self.tokens.len() {
            EntryError::Incomplete {
                quantity: self.quantity,
                text: self.text.to_owned(),
            }
        } else {
            EntryError::NotUnderstood {
                quantity: self.quantity,
                fragment: self.text[self.here()..].to_owned(),
            }
        }
    }

    fn expect(&mut self, tok: &Tok) -> Result<(), EntryError> {
        if self.peek() == Some(tok) {
            self.bump();
            Ok(())
        } else {
            Err(self.not_understood())
        }
    }

    /// A number in any of its notations, with a leading minus sign when `signed`.
    fn number(&mut self, signed: bool) -> Result<Magnitude, EntryError> {
        let start = self.here();
        let negative = signed && self.peek() == Some(&Tok::Minus);
        if negative {
            self.bump();
        }
        let digits = match self.peek() {
            Some(Tok::Num(digits)) => digits.clone(),
            Some(Tok::Word(w)) if matches!(w.as_str(), "inf" | "infinity" | "nan") => {
                return Err(self.non_finite_here(start));
            }
            Some(Tok::Other) if self.text[self.here()..].starts_with('∞') => {
                return Err(self.non_finite_here(start));
            }
            _ => return Err(self.not_understood()),
        };
        self.bump();
        let mut magnitude = Magnitude {
            form: Form::Plain,
            negative,
            mantissa_zero: false,
            linear: f64::NAN,
            log10_exact: None,
            start,
            end: start,
        };
        if self.peek() == Some(&Tok::Times) {
            // 3.2 × 10^9: the mantissa is a plain decimal.
            if digits.contains('e') {
                return Err(self.not_understood());
            }
            self.bump();
            if self.peek() != Some(&Tok::Num("10".to_owned())) {
                return Err(self.not_understood());
            }
            self.bump();
            let (exponent_text, exponent) = self.exponent()?;
            let mantissa: f64 = self.parse_f64(&digits)?;
            magnitude.form = Form::TimesTen;
            magnitude.mantissa_zero = mantissa <= 0.0;
            magnitude.linear = if exponent_text.contains('.') {
                mantissa * 10f64.powf(exponent)
            } else {
                // Correctly rounded, unlike mantissa × 10^k in floating point.
                self.parse_f64(&format!("{digits}e{exponent_text}"))?
            };
            magnitude.log10_exact = (mantissa > 0.0).then(|| mantissa.log10() + exponent);
        } else if digits == "10" && matches!(self.peek(), Some(Tok::Caret | Tok::Sup(_))) {
            let (exponent_text, exponent) = self.exponent()?;
            magnitude.form = Form::PowerOfTen;
            magnitude.linear = if exponent_text.contains('.') {
                10f64.powf(exponent)
            } else {
                self.parse_f64(&format!("1e{exponent_text}"))?
            };
            magnitude.log10_exact = Some(exponent);
        } else {
            magnitude.form = if digits.contains('e') {
                Form::ENotation
            } else {
                Form::Plain
            };
            magnitude.linear = self.parse_f64(&digits)?;
        }
        magnitude.end = self.last_end();
        Ok(magnitude)
    }

    fn non_finite_here(&self, start: usize) -> EntryError {
        let end = self.tokens.get(self.pos).map_or(self.text.len(), |t| t.end);
        EntryError::NonFinite {
            quantity: self.quantity,
            fragment: self.text[start..end].to_owned(),
        }
    }

    fn parse_f64(&self, digits: &str) -> Result<f64, EntryError> {
        digits.parse().map_err(|_| self.not_understood())
    }

    /// The exponent after `10`: `^9`, `^-9`, `^9.51`, `^{9.51}`, `**9`, or superscripts `⁹`.
    /// Returns it as ASCII text and as a number.
    fn exponent(&mut self) -> Result<(String, f64), EntryError> {
        let text = match self.peek() {
            Some(Tok::Sup(s)) => {
                let s = s.replace('+', "");
                self.bump();
                s
            }
            Some(Tok::Caret) => {
                self.bump();
                let braced = self.peek() == Some(&Tok::LBrace);
                if braced {
                    self.bump();
                }
                let negative = self.peek() == Some(&Tok::Minus);
                if matches!(self.peek(), Some(Tok::Minus | Tok::Plus)) {
                    self.bump();
                }
                let digits = match self.peek() {
                    Some(Tok::Num(d)) if !d.contains('e') => d.clone(),
                    _ => return Err(self.not_understood()),
                };
                self.bump();
                if braced {
                    self.expect(&Tok::RBrace)?;
                }
                if negative {
                    format!("-{digits}")
                } else {
                    digits
                }
            }
            _ => return Err(self.not_understood()),
        };
        let value = self.parse_f64(&text)?;
        Ok((text, value))
    }

    /// An optional unit word; a word that is not the quantity's unit is refused.
    fn unit(&mut self) -> Result<(), EntryError> {
        let Some(Tok::Word(word)) = self.peek() else {
            return Ok(());
        };
        if self.quantity.unit_words().contains(&word.as_str()) {
            self.bump();
            return Ok(());
        }
        if matches!(
            word.as_str(),
            "dex" | "log" | "log10" | "inf" | "infinity" | "nan" | "e"
        ) {
            return Err(self.not_understood());
        }
        let token = &self.tokens[self.pos];
        Err(EntryError::WrongUnit {
            quantity: self.quantity,
            found: self.text[token.start..token.end].to_owned(),
        })
    }

    /// One error size: a number without sign, then optionally `%` or `dex`.
    fn error_size(&mut self) -> Result<ErrorSize, EntryError> {
        if matches!(self.peek(), Some(Tok::Minus | Tok::Plus | Tok::Pm)) {
            return Err(EntryError::SignedError {
                quantity: self.quantity,
            });
        }
        let magnitude = self.number(false)?;
        let unit = match self.peek() {
            Some(Tok::Percent) => {
                self.bump();
                ErrorUnit::Percent
            }
            Some(Tok::Word(w)) if w == "dex" => {
                self.bump();
                ErrorUnit::Dex
            }
            _ => ErrorUnit::Same,
        };
        Ok(ErrorSize { magnitude, unit })
    }

    /// The error part, if any.
    fn errors(&mut self) -> Result<Option<ErrorSyntax>, EntryError> {
        let errors = match self.peek() {
            Some(Tok::Pm) => {
                self.bump();
                ErrorSyntax::Symmetric(self.error_size()?)
            }
            Some(Tok::Plus) => match self.peek_at(1) {
                // `+/-`
                Some(Tok::Slash) => {
                    if self.peek_at(2) != Some(&Tok::Minus) {
                        self.bump();
                        return Err(self.not_understood());
                    }
                    self.pos += 3;
                    ErrorSyntax::Symmetric(self.error_size()?)
                }
                // `+-`
                Some(Tok::Minus) => {
                    self.pos += 2;
                    ErrorSyntax::Symmetric(self.error_size()?)
                }
                _ => {
                    self.bump();
                    let plus = self.error_size()?;
                    self.separator();
                    self.expect(&Tok::Minus)?;
                    let minus = self.error_size()?;
                    ErrorSyntax::Asymmetric { plus, minus }
                }
            },
            Some(Tok::Minus) => {
                self.bump();
                let minus = self.error_size()?;
                self.separator();
                self.expect(&Tok::Plus)?;
                let plus = self.error_size()?;
                ErrorSyntax::Asymmetric { plus, minus }
            }
            Some(Tok::LParen) => {
                self.bump();
                let Some(inner) = self.errors()? else {
                    return Err(self.not_understood());
                };
                self.expect(&Tok::RParen)?;
                inner
            }
            Some(Tok::Caret | Tok::Underscore) => {
                let start = self.here();
                let (first_plus, first) = self.latex_error()?;
                if !matches!(self.peek(), Some(Tok::Caret | Tok::Underscore)) {
                    return Err(self.not_understood());
                }
                let (second_plus, second) = self.latex_error()?;
                match (first_plus, second_plus) {
                    (true, false) => ErrorSyntax::Asymmetric {
                        plus: first,
                        minus: second,
                    },
                    (false, true) => ErrorSyntax::Asymmetric {
                        plus: second,
                        minus: first,
                    },
                    // Two upper or two lower errors.
                    _ => {
                        return Err(EntryError::NotUnderstood {
                            quantity: self.quantity,
                            fragment: self.text[start..].to_owned(),
                        });
                    }
                }
            }
            _ => return Ok(None),
        };
        Ok(Some(errors))
    }

    /// `^{+0.5}` or `_{-0.3}`: returns whether the sign was plus, and the size.
    fn latex_error(&mut self) -> Result<(bool, ErrorSize), EntryError> {
        self.bump();
        self.expect(&Tok::LBrace)?;
        let plus = match self.peek() {
            Some(Tok::Plus) => true,
            Some(Tok::Minus) => false,
            _ => return Err(self.not_understood()),
        };
        self.bump();
        let size = self.error_size()?;
        self.expect(&Tok::RBrace)?;
        Ok((plus, size))
    }

    /// An optional `/` or `,` between the two errors of an asymmetric pair.
    fn separator(&mut self) {
        if matches!(self.peek(), Some(Tok::Slash | Tok::Comma)) {
            self.bump();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Tolerance for values computed from the same formula in a different way (rounding only).
    const TOL: f64 = 1e-12;

    /// log10(3.2e9), computed with Python's math.log10.
    const LOG_3_2E9: f64 = 9.505_149_978_319_906;

    #[track_caller]
    fn accept(text: &str, quantity: Quantity, scale: Scale) -> Entry {
        parse_entry(text, quantity, scale)
            .unwrap_or_else(|e| panic!("`{text}` ({quantity}, {scale}) was refused: {e}"))
    }

    #[track_caller]
    fn assert_close(actual: f64, expected: f64, what: &str) {
        assert!(
            (actual - expected).abs() <= TOL,
            "{what}: got {actual}, expected {expected}"
        );
    }

    /// A refusal message is one sentence: a capital letter first, one full stop at the end,
    /// no sentence break or line break inside.
    #[track_caller]
    fn assert_one_sentence(message: &str) {
        assert!(
            message.chars().next().is_some_and(char::is_uppercase),
            "message does not start with a capital letter: {message}"
        );
        assert!(
            message.ends_with('.'),
            "message does not end with a full stop: {message}"
        );
        assert!(
            !message.contains(". ") && !message.contains('\n'),
            "message has more than one sentence: {message}"
        );
    }

    #[test]
    fn every_number_notation_reads_the_same_mass() {
        let forms = [
            "3.2e9",
            "3.2E9",
            "3.2e+9",
            "3.2x10^9",
            "3.2X10^9",
            "3.2×10^9",
            "3.2*10^9",
            "3.2·10^9",
            "3.2 x 10^9",
            "3.2 × 10 ^ 9",
            "3.2x10**9",
            "3.2x10^{9}",
            "3.2×10⁹",
            "3.2×10⁺⁹",
            "3200000000",
            "3200000000.0",
            "32e8",
            "0.32e10",
            "  3.2e9  ",
            "3.2e9 Msun",
            "3.2e9 M☉",
            "3.2e9 m_sun",
            "3.2e9 MSOL",
        ];
        for form in forms {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert_close(entry.log_value, LOG_3_2E9, form);
            assert_eq!(entry.text, form.trim());
            assert_eq!(entry.scale_used, Scale::Linear, "{form}");
            assert!(!entry.upper_limit && !entry.errors_given, "{form}");
            assert_eq!((entry.err_minus_dex, entry.err_plus_dex), (0.0, 0.0));
        }
        // The explicit linear scale reads the same.
        let entry = accept("3.2e9", Quantity::BlackHoleMass, Scale::Linear);
        assert_close(entry.log_value, LOG_3_2E9, "linear scale");
    }

    #[test]
    fn a_power_of_ten_keeps_its_exponent_exactly() {
        for (form, expected) in [
            ("10^9.51", 9.51),
            ("10^{9.51}", 9.51),
            ("10 ^ 9.51", 9.51),
            ("10**9.51", 9.51),
            ("10⁹", 9.0),
            ("10^9", 9.0),
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert!(
                (entry.log_value - expected).abs() <= f64::EPSILON * 16.0,
                "{form}: {}",
                entry.log_value
            );
            assert_eq!(entry.scale_used, Scale::Linear);
        }
        // A negative exponent, for a resolution read on the log path.
        let entry = accept("10^-1", Quantity::Resolution, Scale::Auto);
        assert_close(entry.log_value, -1.0, "10^-1 arcsec");
    }

    #[test]
    fn log_values_are_read_from_the_word_or_the_chosen_scale() {
        let cases = [
            ("log 9.51", Scale::Auto),
            ("log10 9.51", Scale::Auto),
            ("LOG10 9.51", Scale::Auto),
            ("Log10=9.51", Scale::Auto),
            ("log = 9.51", Scale::Auto),
            ("log9.51", Scale::Auto),
            ("9.51", Scale::Log10),
            ("log 9.51", Scale::Log10),
            ("log 9.51 Msun", Scale::Auto),
        ];
        for (form, scale) in cases {
            let entry = accept(form, Quantity::BlackHoleMass, scale);
            assert_close(entry.log_value, 9.51, form);
            assert_eq!(entry.scale_used, Scale::Log10, "{form}");
        }
        // `log10.5` is log 10.5, not log10 of 5.
        let entry = accept("log10.5", Quantity::BlackHoleMass, Scale::Auto);
        assert_close(entry.log_value, 10.5, "log10.5");
        let entry = accept("log 10.7", Quantity::BulgeLuminosity, Scale::Auto);
        assert_close(entry.log_value, 10.7, "luminosity");
        let entry = accept("2.3", Quantity::VelocityDispersion, Scale::Log10);
        assert_close(entry.log_value, 2.3, "sigma on the log scale");
    }

    #[test]
    fn errors_convert_to_dex_as_science_md_section_2_5_option_1() {
        // Expected values computed with Python's math.log10 from docs/methods.md §2.5 option 1:
        // u = log10((M + δ₊)/M), l = log10(M/(M − δ₋)). For 3.2e9 +0.5e9 −0.3e9:
        // u = log10(3.7/3.2), l = log10(3.2/2.9).
        let u_32 = 0.063_051_745_747_089_02;
        let l_32 = 0.042_751_980_420_949_88;
        // 1e8 ± 10 %: u = log10(1.1), l = log10(1/0.9).
        let u_10pc = 0.041_392_685_158_225_07;
        let l_10pc = 0.045_757_490_560_675_14;
        // 1e8 +10 % −5 %: l = log10(1/0.95) = 0.022276394711152253 (Python math.log10).
        let l_5pc = 0.022_276_394_711_152_253;
        // 210 ± 10 km/s: u = log10(220/210), l = log10(210/200).
        let u_sigma = 0.020_203_386_088_286_99;
        let l_sigma = 0.021_189_299_069_938_092;
        // 1e7 +2e7 −0.5e7: u = log10(3) = 0.47712125471966244 (Python math.log10),
        // l = log10(2).
        let (u_3, l_2) = (0.477_121_254_719_662_44, std::f64::consts::LOG10_2);

        let bh = Quantity::BlackHoleMass;
        let cases: &[(&str, Quantity, Scale, f64, f64)] = &[
            ("3.2e9 +0.5e9/-0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9 -0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9, -0.3e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 (+0.5e9, -0.3e9)", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 (+0.5e9/-0.3e9) Msun", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 -0.3e9 +0.5e9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9^{+0.5e9}_{-0.3e9}", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 _{-0.3e9}^{+0.5e9}", bh, Scale::Auto, l_32, u_32),
            ("3.2x10^9 +0.5x10^9/−0.3x10^9", bh, Scale::Auto, l_32, u_32),
            ("3.2e9 +0.5e9/–0.3e9", bh, Scale::Linear, l_32, u_32),
            ("3.2E9+0.5E9-0.3E9", bh, Scale::Auto, l_32, u_32),
            ("1e8 ± 10%", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 ± 1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +/- 1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +-1e7", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 ± 0.1e8", bh, Scale::Auto, l_10pc, u_10pc),
            ("1e8 +10%/-5%", bh, Scale::Auto, l_5pc, u_10pc),
            ("1e7 +2e7/-0.5e7", bh, Scale::Auto, l_2, u_3),
            (
                "2e11 ± 10%",
                Quantity::BulgeMass,
                Scale::Auto,
                l_10pc,
                u_10pc,
            ),
            (
                "210 ± 10 km/s",
                Quantity::VelocityDispersion,
                Scale::Auto,
                l_sigma,
                u_sigma,
            ),
            (
                "210 km/s ± 10",
                Quantity::VelocityDispersion,
                Scale::Auto,
                l_sigma,
                u_sigma,
            ),
            // Errors in dex, written or implied by the log scale.
            ("3.2e9 ± 0.15 dex", bh, Scale::Auto, 0.15, 0.15),
            ("3.2e9 +0.1/-0.2 dex", bh, Scale::Auto, 0.2, 0.1),
            ("3.2e9 +0.1 dex/-0.2 dex", bh, Scale::Auto, 0.2, 0.1),
            ("log 9.51 ± 0.1", bh, Scale::Auto, 0.1, 0.1),
            ("log 9.51 ± 0.1 dex", bh, Scale::Auto, 0.1, 0.1),
            ("log 9.51 +0.1/-0.2", bh, Scale::Auto, 0.2, 0.1),
            ("9.51 ± 0.1", bh, Scale::Log10, 0.1, 0.1),
            ("9.51 ± 0", bh, Scale::Log10, 0.0, 0.0),
        ];
        for &(text, quantity, scale, minus, plus) in cases {
            let entry = accept(text, quantity, scale);
            assert_close(entry.err_minus_dex, minus, text);
            assert_close(entry.err_plus_dex, plus, text);
            assert_close(entry.err_dex, 0.5 * (minus + plus), text);
            assert!(entry.errors_given, "{text}");
        }
        // The symmetric error of the worked example, (u + l)/2 = 0.05290186308401945
        // (Python, docs/methods.md §2.5 option 1).
        let entry = accept("3.2e9 +0.5e9/-0.3e9", bh, Scale::Auto);
        assert_close(entry.err_dex, 0.052_901_863_084_019_45, "mean of u and l");
        assert_eq!(entry.display_log(), "9.51 +0.06/\u{2212}0.04");
    }

    #[test]
    fn upper_limits_are_read_on_both_scales_without_errors() {
        // log10(2e7) = 7.301029995663981 (Python math.log10).
        let log_2e7 = 7.301_029_995_663_981;
        for form in [
            "<2e7",
            "< 2e7",
            "<=2e7",
            "<= 2e7",
            "≤2e7",
            "⩽ 2e7",
            "< 2x10^7",
            "<2e7 Msun",
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, Scale::Auto);
            assert!(entry.upper_limit, "{form}");
            assert_close(entry.log_value, log_2e7, form);
            assert_eq!(
                (entry.err_minus_dex, entry.err_plus_dex, entry.err_dex),
                (0.0, 0.0, 0.0)
            );
        }
        for (form, scale) in [
            ("< log 7.3", Scale::Auto),
            ("<log10 7.3", Scale::Auto),
            ("log < 7.3", Scale::Auto),
            ("log10 <= 7.3", Scale::Auto),
            ("<7.3", Scale::Log10),
        ] {
            let entry = accept(form, Quantity::BlackHoleMass, scale);
            assert!(entry.upper_limit, "{form}");
            assert_eq!(entry.scale_used, Scale::Log10);
            assert_close(entry.log_value, 7.3, form);
            assert_eq!(entry.display_log(), "< 7.30");
        }
    }

    #[test]
    fn refused_entries_get_the_right_reason_in_one_sentence() {
        use EntryError as E;
        let bh = Quantity::BlackHoleMass;
        let auto = Scale::Auto;
        type Check = fn(&EntryError) -> bool;
        let cases: &[(&str, Quantity, Scale, Check)] = &[
            ("", bh, auto, |e| matches!(e, E::Empty { .. })),
            ("   ", bh, auto, |e| matches!(e, E::Empty { .. })),
            (
                "1,200",
                Quantity::VelocityDispersion,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "`1200` or `1.200`"),
            ),
            (
                "3,2e9",
                bh,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "`32e9` or `3.2e9`"),
            ),
            (
                "1,200,000,000",
                bh,
                auto,
                |e| matches!(e, E::CommaInNumber { suggestion, .. } if suggestion == "`1200000000`"),
            ),
            ("inf", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("NaN", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("∞", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("-inf", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("1e400", bh, auto, |e| matches!(e, E::NonFinite { .. })),
            ("log 1e400", bh, auto, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("10^400", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("-5", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("−3e9", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("0", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("0x10^5", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("1e-400", bh, auto, |e| matches!(e, E::NonPositive { .. })),
            ("9.51", bh, auto, |e| matches!(e, E::AmbiguousScale { .. })),
            ("9.51 ± 0.1", bh, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("<7.3", bh, auto, |e| matches!(e, E::AmbiguousScale { .. })),
            ("11.3", Quantity::BulgeMass, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("10.7", Quantity::BulgeLuminosity, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("2.32", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::AmbiguousScale { .. })
            }),
            ("9.51", bh, Scale::Linear, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            ("9.51e0", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log 3.2e9", bh, auto, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("3.2e9", bh, Scale::Log10, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("10^9.51", bh, Scale::Log10, |e| {
                matches!(e, E::LogScaleLinearNotation { .. })
            }),
            ("log 9.51", bh, Scale::Linear, |e| {
                matches!(e, E::LinearScaleLogText { .. })
            }),
            ("2e12", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("500", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log 12", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("log -1", bh, auto, |e| matches!(e, E::OutOfRange { .. })),
            ("700", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            ("15", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::OutOfRange { .. })
            }),
            (
                "1e7 +2e7/-1e7",
                bh,
                auto,
                |e| matches!(e, E::LowerErrorReachesZero { suggestion, .. } if suggestion == "3e7"),
            ),
            ("1e7 ± 100%", bh, auto, |e| {
                matches!(e, E::LowerErrorReachesZero { .. })
            }),
            ("1e7 ± 2e7", bh, auto, |e| {
                matches!(e, E::LowerErrorReachesZero { .. })
            }),
            ("<2e7 ± 1e6", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            ("< 2e7 +1e6/-1e6", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            ("<log 7.3 ± 0.1", bh, auto, |e| {
                matches!(e, E::LimitWithErrors { .. })
            }),
            (">2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            (">=2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("≥2e7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("log > 7", bh, auto, |e| matches!(e, E::LowerLimit { .. })),
            ("<16", Quantity::Distance, auto, |e| {
                matches!(e, E::LimitNotAccepted { .. })
            }),
            ("3.2e9 ± -0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("3.2e9 +/- -0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("3.2e9 ± +0.4e9", bh, auto, |e| {
                matches!(e, E::SignedError { .. })
            }),
            ("log 9.51 ± 0.4e9", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 ± 3 dex", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 +1e11/-1e7", bh, auto, |e| {
                matches!(e, E::ErrorTooLarge { .. })
            }),
            ("1e8 ± 1e400", bh, auto, |e| {
                matches!(e, E::NonFinite { .. })
            }),
            ("log 9.51 ± 10%", bh, auto, |e| {
                matches!(e, E::PercentOnLogScale { .. })
            }),
            ("1e8 +0.1 dex/-10%", bh, auto, |e| {
                matches!(e, E::MixedErrorUnits { .. })
            }),
            (
                "3.2e9 kpc",
                bh,
                auto,
                |e| matches!(e, E::WrongUnit { found, .. } if found == "kpc"),
            ),
            ("210 Msun", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("5e10 Msun", Quantity::BulgeLuminosity, auto, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("3.2e9 ±", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("log", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("<", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("3.2x10^", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("upper limit 2e7", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 3", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3 200 000 000", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2 x 5", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9x10^9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("1.2.3e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("9.51 dex", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2 e9", bh, auto, |e| matches!(e, E::NotUnderstood { .. })),
            ("1e7–3e7", bh, auto, |e| matches!(e, E::Incomplete { .. })),
            ("1'200", Quantity::VelocityDispersion, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("log log 9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("<<2e7", bh, auto, |e| matches!(e, E::NotUnderstood { .. })),
            ("3.2e9 ^{+0.5e9}^{+0.3e9}", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 +0.5e9 +0.3e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
            ("3.2e9 ± 0.4e9 ± 0.1e9", bh, auto, |e| {
                matches!(e, E::NotUnderstood { .. })
            }),
        ];
        for &(text, quantity, scale, check) in cases {
            let error = match parse_entry(text, quantity, scale) {
                Ok(entry) => panic!("`{text}` ({quantity}) was accepted as {entry:?}"),
                Err(error) => error,
            };
            assert!(
                check(&error),
                "`{text}` ({quantity}) refused for the wrong reason: {error:?}"
            );
            assert_one_sentence(&error.to_string());
        }
        let long = "1".repeat(MAX_ENTRY_CHARS + 1);
        let error = parse_entry(&long, bh, auto).unwrap_err();
        assert!(matches!(error, E::TooLong { chars, .. } if chars == MAX_ENTRY_CHARS + 1));
        assert_one_sentence(&error.to_string());
    }

    #[test]
    fn messages_name_the_quantity_the_value_and_the_range() {
        let message = parse_entry("2e12", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The black-hole mass 10^12.30 M☉ is outside the accepted range 10^3 to 10^11.5 M☉."
        );
        let message = parse_entry("700", Quantity::VelocityDispersion, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The velocity dispersion 700 km/s is outside the accepted range 20 to 600 km/s."
        );
        let message = parse_linear("2500", Quantity::Distance)
            .unwrap_err()
            .to_string();
        assert_eq!(
            message,
            "The distance 2500 Mpc is outside the accepted range 0.005 to 2000 Mpc."
        );
        let message = parse_entry("9.51", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("log10 = 9.51"), "{message}");
        assert!(message.contains("`log 9.51`"), "{message}");
        assert!(message.contains("9.51 M☉"), "{message}");
        let message = parse_entry("1e7 +2e7/-1e7", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(message.contains("upper limit"), "{message}");
        assert!(message.contains("`<3e7`"), "{message}");
        let message = parse_entry("1,200", Quantity::VelocityDispersion, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("`1,200`") && message.contains("`1200`"),
            "{message}"
        );
        let message = parse_entry("-5", Quantity::BlackHoleMass, Scale::Auto)
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("`-5`") && message.contains("`<2e7`"),
            "{message}"
        );
    }

    #[test]
    fn range_ends_are_accepted_and_just_beyond_refused() {
        use Quantity as Q;
        let inside: &[(&str, Quantity, Scale)] = &[
            ("log 3", Q::BlackHoleMass, Scale::Auto),
            ("1e3", Q::BlackHoleMass, Scale::Auto),
            ("log 11.5", Q::BlackHoleMass, Scale::Auto),
            ("20", Q::VelocityDispersion, Scale::Auto),
            ("600", Q::VelocityDispersion, Scale::Auto),
            ("6x10^2", Q::VelocityDispersion, Scale::Auto),
            ("log 6", Q::BulgeMass, Scale::Auto),
            ("log 13.5", Q::BulgeMass, Scale::Auto),
            ("1e6", Q::BulgeLuminosity, Scale::Auto),
            ("log 13.5", Q::BulgeLuminosity, Scale::Auto),
            ("0.005", Q::Distance, Scale::Auto),
            ("2000", Q::Distance, Scale::Auto),
            ("0.00001", Q::Resolution, Scale::Auto),
            ("10", Q::Resolution, Scale::Auto),
        ];
        for &(text, quantity, scale) in inside {
            accept(text, quantity, scale);
        }
        let outside: &[(&str, Quantity, Scale)] = &[
            ("log 2.99", Q::BlackHoleMass, Scale::Auto),
            ("9.9e2", Q::BlackHoleMass, Scale::Auto),
            ("log 11.51", Q::BlackHoleMass, Scale::Auto),
            ("19.9", Q::VelocityDispersion, Scale::Linear),
            ("600.1", Q::VelocityDispersion, Scale::Auto),
            ("log 5.99", Q::BulgeMass, Scale::Auto),
            ("log 13.51", Q::BulgeMass, Scale::Auto),
            ("9e5", Q::BulgeLuminosity, Scale::Auto),
            ("log 13.51", Q::BulgeLuminosity, Scale::Auto),
            ("0.0049", Q::Distance, Scale::Auto),
            ("2000.1", Q::Distance, Scale::Auto),
            ("0.0000099", Q::Resolution, Scale::Auto),
            ("10.01", Q::Resolution, Scale::Auto),
        ];
        for &(text, quantity, scale) in outside {
            let result = parse_entry(text, quantity, scale);
            assert!(
                matches!(result, Err(EntryError::OutOfRange { .. })),
                "`{text}` ({quantity}): {result:?}"
            );
        }
        // The same ends through the linear reader.
        for (text, quantity, ok) in [
            ("0.005", Q::Distance, true),
            ("2000", Q::Distance, true),
            ("0.004", Q::Distance, false),
            ("1e-5", Q::Resolution, true),
            ("10", Q::Resolution, true),
            ("11", Q::Resolution, false),
        ] {
            assert_eq!(
                parse_linear(text, quantity).is_ok(),
                ok,
                "{text} ({quantity})"
            );
        }
    }

    #[test]
    fn linear_entries_read_distances_and_resolutions() {
        use Quantity as Q;
        let cases: &[(&str, Quantity, f64, f64)] = &[
            ("16.5", Q::Distance, 16.5, 0.0),
            ("16.5 ± 0.8", Q::Distance, 16.5, 0.8),
            ("16.5 +/- 0.8 Mpc", Q::Distance, 16.5, 0.8),
            ("16.5 Mpc ± 0.8", Q::Distance, 16.5, 0.8),
            ("16.5 +-0.8", Q::Distance, 16.5, 0.8),
            ("16.5 ± 5%", Q::Distance, 16.5, 0.825),
            ("1.65e1", Q::Distance, 16.5, 0.0),
            ("0.008", Q::Distance, 0.008, 0.0),
            ("0.1", Q::Resolution, 0.1, 0.0),
            ("0.05\"", Q::Resolution, 0.05, 0.0),
            ("0.05″", Q::Resolution, 0.05, 0.0),
            ("0.1 arcsec ± 0.01", Q::Resolution, 0.1, 0.01),
            ("210 ± 10 km/s", Q::VelocityDispersion, 210.0, 10.0),
        ];
        for &(text, quantity, value, err) in cases {
            let entry = parse_linear(text, quantity)
                .unwrap_or_else(|e| panic!("`{text}` was refused: {e}"));
            assert_close(entry.value, value, text);
            assert_close(entry.err, err, text);
            assert_eq!(
                entry.errors_given,
                text.contains('±') || text.contains("+"),
                "{text}"
            );
            assert_eq!(entry.text, text);
        }
        use EntryError as E;
        type Check = fn(&EntryError) -> bool;
        let refused: &[(&str, Quantity, Check)] = &[
            ("", Q::Distance, |e| matches!(e, E::Empty { .. })),
            ("<16", Q::Distance, |e| {
                matches!(e, E::LimitNotAccepted { .. })
            }),
            (">16", Q::Distance, |e| matches!(e, E::LowerLimit { .. })),
            ("log 1.2", Q::Distance, |e| {
                matches!(e, E::LogNotAccepted { .. })
            }),
            ("16.5 ± 0.1 dex", Q::Distance, |e| {
                matches!(e, E::LogNotAccepted { .. })
            }),
            ("16.5 +1/-0.5", Q::Distance, |e| {
                matches!(e, E::AsymmetricNotAccepted { .. })
            }),
            ("16.5 ± 20", Q::Distance, |e| {
                matches!(e, E::ErrorExceedsValue { .. })
            }),
            ("16.5 ± 100%", Q::Distance, |e| {
                matches!(e, E::ErrorExceedsValue { .. })
            }),
            ("16.5 ± 1e400", Q::Distance, |e| {
                matches!(e, E::NonFinite { .. })
            }),
            ("2500", Q::Distance, |e| matches!(e, E::OutOfRange { .. })),
            ("20", Q::Resolution, |e| matches!(e, E::OutOfRange { .. })),
            ("16,5", Q::Distance, |e| {
                matches!(e, E::CommaInNumber { .. })
            }),
            ("-3", Q::Distance, |e| matches!(e, E::NonPositive { .. })),
            ("1e400", Q::Distance, |e| matches!(e, E::NonFinite { .. })),
            ("16.5 kpc", Q::Distance, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
            ("0.1 mas", Q::Resolution, |e| {
                matches!(e, E::WrongUnit { .. })
            }),
        ];
        for &(text, quantity, check) in refused {
            let error = match parse_linear(text, quantity) {
                Ok(entry) => panic!("`{text}` was accepted as {entry:?}"),
                Err(error) => error,
            };
            assert!(
                check(&error),
                "`{text}` refused for the wrong reason: {error:?}"
            );
            assert_one_sentence(&error.to_string());
        }
    }

    /// A small linear congruential generator (Knuth's MMIX constants), so the property tests
    /// need no extra crate and always see the same inputs.
    struct Lcg(u64);

    impl Lcg {
        fn next(&mut self) -> u64 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            self.0 >> 33
        }

        fn below(&mut self, n: usize) -> usize {
            (self.next() % n as u64) as usize
        }
    }

    /// The invariants every accepted entry must satisfy.
    #[track_caller]
    fn assert_entry_is_sound(entry: &Entry, text: &str) {
        let what = format!("`{text}` ({}) gave {entry:?}", entry.quantity);
        assert!(entry.log_value.is_finite(), "{what}");
        let (min, max) = entry.quantity.log_range();
        assert!(
            entry.log_value >= min - RANGE_EPS_DEX && entry.log_value <= max + RANGE_EPS_DEX,
            "{what}"
        );
        for err in [entry.err_minus_dex, entry.err_plus_dex, entry.err_dex] {
            assert!(
                err.is_finite() && (0.0..=MAX_ERR_DEX).contains(&err),
                "{what}"
            );
        }
        assert!(
            (entry.err_dex - 0.5 * (entry.err_minus_dex + entry.err_plus_dex)).abs() <= TOL,
            "{what}"
        );
        if entry.upper_limit {
            assert_eq!(
                (entry.err_minus_dex, entry.err_plus_dex),
                (0.0, 0.0),
                "{what}"
            );
        }
        assert_ne!(entry.scale_used, Scale::Auto, "{what}");
        assert_eq!(entry.text, text.trim(), "{what}");
    }

    #[test]
    fn the_parsers_never_panic_and_accepted_values_are_sound() {
        // Pieces of real entries, so that many random strings are accepted and the deep paths
        // are reached, mixed with single characters of every kind.
        const PIECES: &[&str] = &[
            "3.2", "9.51", "0.4", "210", "16.5", "1e7", "e9", "E-3", "10", "^", "**", "x", "×",
            "*", "·", "10^", "⁹", "⁻", "±", "+/-", "+-", "+", "-", "−", "–", "/", ",", "(", ")",
            "{", "}", "_", "^{", "_{", "<", "<=", "≤", ">", "≥", "=", "%", "dex", "log", "log10",
            "msun", "km/s", "mpc", "\"", " ", " ", "  ", ".", "0", "00", "9", "inf", "nan", "∞",
            "1,2", "'", "é", "☉", "\u{a0}", "\t", "e", "E", "1e400", "1e-400",
        ];
        const PREFIXES: &[&str] = &["", "", "<", "< ", "log ", "log10 ", "<log ", "log <", "≤"];
        // Values that fit each quantity (in `Quantity::ALL` order), some only on one scale.
        const VALUES: [&[&str]; 6] = [
            &["3.2e9", "9.51", "2e7", "3.2x10^9", "10^8.5", "1e3"],
            &["210", "2.3", "600", "20", "1.5e2"],
            &["2e11", "11.3", "10^10.5", "6"],
            &["5e10", "10.7", "1e6", "13.5"],
            &["16.5", "0.005", "2000", "1.2"],
            &["0.1", "1.2e-4", "10", "0.05"],
        ];
        const ERRORS: &[&str] = &[
            "",
            "",
            " ± 0.4e9",
            " +/- 10",
            " +-0.1",
            " +0.5e9/-0.3e9",
            " (+0.5, -0.3)",
            " ± 0.15 dex",
            " +0.1/-0.2 dex",
            " ± 10%",
            " +10%/-5%",
            "^{+0.2}_{-0.1}",
            " ± 0.8",
            " -0.3 +0.5",
            " ± 1e7",
        ];

        let alphabet: Vec<char> =
            "0123456789.eE+-−±/<>=≤≥xX×*^(){}_,% ldgxmsunkpcarn\"'∞⁹⁻é☉\u{a0}\u{0}~#;"
                .chars()
                .collect();
        let mut rng = Lcg(0x6d61_7373_6c69_6e65);
        let mut accepted = 0usize;
        let mut accepted_linear = 0usize;
        let scales = [Scale::Auto, Scale::Linear, Scale::Log10];
        for round in 0..40_000 {
            let q = rng.below(Quantity::ALL.len());
            let quantity = Quantity::ALL[q];
            let mut text = String::new();
            match round % 3 {
                0 => {
                    for _ in 0..rng.below(12) {
                        text.push(alphabet[rng.below(alphabet.len())]);
                    }
                }
                1 => {
                    for _ in 0..rng.below(9) {
                        text.push_str(PIECES[rng.below(PIECES.len())]);
                    }
                }
                _ => {
                    // A well-formed entry, then up to two random edits.
                    for part in [PREFIXES, VALUES[q], ERRORS] {
                        text.push_str(part[rng.below(part.len())]);
                    }
                    if rng.below(3) == 0 {
                        let units = quantity.unit_words();
                        text.push(' ');
                        text.push_str(units[rng.below(units.len())]);
                    }
                    for _ in 0..rng.below(3) {
                        let chars: Vec<char> = text.chars().collect();
                        let at = rng.below(chars.len() + 1);
                        let mut edited: String = chars[..at].iter().collect();
                        if rng.below(2) == 0 {
                            edited.push(alphabet[rng.below(alphabet.len())]);
                            edited.extend(&chars[at..]);
                        } else {
                            edited.extend(chars.iter().skip(at + 1));
                        }
                        text = edited;
                    }
                }
            }
            let scale = scales[rng.below(scales.len())];
            match parse_entry(&text, quantity, scale) {
                Ok(entry) => {
                    accepted += 1;
                    assert_entry_is_sound(&entry, &text);
                }
                Err(error) => {
                    let message = error.to_string();
                    assert!(message.ends_with('.'), "`{text}`: {message}");
                }
            }
            match parse_linear(&text, quantity) {
                Ok(entry) => {
                    accepted_linear += 1;
                    let (min, max) = quantity.log_range();
                    let log_value = entry.value.log10();
                    assert!(
                        entry.value.is_finite()
                            && log_value >= min - RANGE_EPS_DEX
                            && log_value <= max + RANGE_EPS_DEX,
                        "`{text}` gave {entry:?}"
                    );
                    assert!(entry.err.is_finite() && entry.err >= 0.0 && entry.err < entry.value);
                }
                Err(error) => assert!(error.to_string().ends_with('.')),
            }
        }
        // The test means something only if many inputs got through to the end.
        assert!(
            accepted > 1000,
            "only {accepted} random entries were accepted"
        );
        assert!(
            accepted_linear > 400,
            "only {accepted_linear} linear entries were accepted"
        );
    }

    #[test]
    fn every_valid_value_on_a_grid_is_accepted_and_sound() {
        // Values across each range, typed in several notations, with several error forms.
        for quantity in Quantity::ALL {
            let (min, max) = quantity.log_range();
            for step in 0..=20 {
                let log_value = min + (max - min) * f64::from(step) / 20.0;
                let linear = 10f64.powf(log_value);
                let texts = [
                    format!("{linear:e}"),
                    format!("10^{log_value}"),
                    format!("{linear:e} ± 5%"),
                    format!("{linear:e} +0.1/-0.2 dex"),
                    format!("{linear:e} +{:e}/-{:e}", linear * 0.3, linear * 0.2),
                ];
                for text in &texts {
                    let entry = accept(text, quantity, Scale::Auto);
                    assert_entry_is_sound(&entry, text);
                    assert!((entry.log_value - log_value).abs() < 1e-9, "{text}");
                }
                let text = format!("log {log_value}");
                let entry = accept(&text, quantity, Scale::Auto);
                assert_entry_is_sound(&entry, &text);
            }
        }
    }

    #[test]
    fn quantity_and_scale_names_are_stable() {
        for quantity in Quantity::ALL {
            assert_eq!(quantity.as_str().parse::<Quantity>(), Ok(quantity));
            let json = serde_json::to_string(&quantity).unwrap();
            assert_eq!(json, format!("\"{}\"", quantity.as_str()));
            assert!(!quantity.range_text().is_empty());
            let (min, max) = quantity.accepted_range();
            assert!(min < max, "{quantity}");
        }
        assert_eq!(Quantity::BlackHoleMass.as_str(), "bh_mass");
        assert_eq!(Quantity::VelocityDispersion.as_str(), "sigma");
        assert_eq!(Quantity::BulgeLuminosity.unit_label(), "L☉");
        assert_eq!(Quantity::VelocityDispersion.canonical_unit(), "log10 km/s");
        let error = "mass".parse::<Quantity>().unwrap_err();
        assert_one_sentence(&error.to_string());
        for scale in [Scale::Auto, Scale::Linear, Scale::Log10] {
            assert_eq!(scale.as_str().parse::<Scale>(), Ok(scale));
            let json = serde_json::to_string(&scale).unwrap();
            assert_eq!(json, format!("\"{}\"", scale.as_str()));
        }
        assert_eq!("".parse::<Scale>(), Ok(Scale::Auto));
        assert!("ln".parse::<Scale>().is_err());
    }

    #[test]
    fn newtypes_validate_and_convert_explicitly() {
        assert!(Log10Msun::new(f64::NAN).is_err());
        assert!(Log10Msun::new(f64::INFINITY).is_err());
        assert!(Log10Msun::new(301.0).is_err());
        assert_eq!(Log10Msun::new(8.5).map(Log10Msun::get), Ok(8.5));
        assert!(matches!(Msun::new(0.0), Err(UnitError::NotPositive { .. })));
        assert!(matches!(Mpc::new(-1.0), Err(UnitError::NotPositive { .. })));
        assert!(matches!(
            Arcsec::new(f64::NAN),
            Err(UnitError::NotFinite { .. })
        ));
        assert!(matches!(
            KmPerS::new(1e301),
            Err(UnitError::Unrepresentable { .. })
        ));
        assert!(matches!(Dex::new(-0.1), Err(UnitError::Negative { .. })));
        assert_eq!(Dex::new(0.0).map(Dex::get), Ok(0.0));
        assert_one_sentence(&Mpc::new(-1.0).unwrap_err().to_string());

        // 10^8.5 = 316227766.01683795 (Python 10**8.5).
        let mass = Log10Msun::new(8.5).unwrap().to_linear();
        assert!((mass.get() / 316_227_766.016_837_95 - 1.0).abs() < 1e-15);
        assert!((mass.to_log10().get() - 8.5).abs() < 1e-14);
        let sigma = KmPerS::new(200.0).unwrap().to_log10();
        assert!((sigma.to_linear().get() - 200.0).abs() < 1e-12);
        let luminosity = Lsun::new(1e11).unwrap().to_log10();
        assert!((luminosity.get() - 11.0).abs() < 1e-15);
        // The extremes convert without leaving the other type's bounds.
        for log_value in [-300.0, 300.0] {
            let linear = Log10Msun::new(log_value).unwrap().to_linear();
            assert!(Msun::new(linear.get()).is_ok(), "{log_value}");
            assert!(
                Log10Msun::new(linear.to_log10().get()).is_ok(),
                "{log_value}"
            );
        }

        assert_eq!(
            serde_json::to_string(&Mpc::new(16.5).unwrap()).unwrap(),
            "16.5"
        );
        assert_eq!(
            serde_json::from_str::<Dex>("0.3").map(Dex::get).ok(),
            Some(0.3)
        );
        assert!(serde_json::from_str::<Mpc>("-1").is_err());
        assert!(serde_json::from_str::<Log10Msun>("400").is_err());
    }

    #[test]
    fn log_values_with_errors_are_formatted_for_pages() {
        let minus = '\u{2212}';
        assert_eq!(
            format_log_with_errors(8.32, 0.12, 0.10, false),
            format!("8.32 +0.10/{minus}0.12")
        );
        assert_eq!(
            format_log_with_errors(8.32, 0.11, 0.114, false),
            "8.32 ± 0.11"
        );
        assert_eq!(format_log_with_errors(8.324, 0.0, 0.0, false), "8.32");
        assert_eq!(format_log_with_errors(7.3, 0.2, 0.1, true), "< 7.30");
        assert_eq!(format_log_with_errors(8.3, -0.1, 0.1, false), "8.30 ± 0.10");
        assert_eq!(
            format_log_with_errors(8.3, f64::NAN, 0.1, false),
            format!("8.30 +0.10/{minus}0.00")
        );
        assert_eq!(format_log_with_errors(-0.001, 0.0, 0.0, false), "0.00");
        assert_eq!(format_log_with_errors(f64::NAN, 0.1, 0.1, false), "—");
    }

    #[test]
    fn values_are_rounded_to_two_significant_digits_of_their_error() {
        // Common practice: two significant digits in the error, the value to the same place.
        let cases: &[(f64, f64, &str)] = &[
            (8.3214, 0.1234, "8.32 ± 0.12"),
            (8.3214, 0.0996, "8.32 ± 0.10"),
            (0.5, 0.99, "0.50 ± 0.99"),
            (0.5, 0.996, "0.5 ± 1.0"),
            (1.234_56, 0.001_23, "1.2346 ± 0.0012"),
            (123_456.0, 1234.0, "123500 ± 1200"),
            (1234.4, 96.0, "1234 ± 96"),
            (5.0, 15.0, "5 ± 15"),
            (-2.345, 0.05, "-2.345 ± 0.050"),
            (2.0, 0.0, "2"),
            (2.5, f64::NAN, "2.5"),
            (f64::INFINITY, 0.1, "—"),
        ];
        for &(value, err, expected) in cases {
            assert_eq!(
                round_to_uncertainty(value, err),
                expected,
                "{value} ± {err}"
            );
        }
    }
}
