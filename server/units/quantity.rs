//! What a typed value measures ([`Quantity`]) and how to read a bare number ([`Scale`]).

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::ranges::{
    DISTANCE_MAX_MPC, DISTANCE_MIN_MPC, LOG_LBULGE_MAX, LOG_LBULGE_MIN, LOG_MBH_MAX, LOG_MBH_MIN,
    LOG_MBULGE_MAX, LOG_MBULGE_MIN, RESOLUTION_MAX_ARCSEC, RESOLUTION_MIN_ARCSEC, SIGMA_MAX_KM_S,
    SIGMA_MIN_KM_S,
};

/// A stable name (of a [`Quantity`] or [`Scale`]) that is not known.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("The name “{name}” is not a known {kind}; expected one of {expected}.")]
pub struct UnknownNameError {
    /// What was being named: "quantity" or "scale".
    pub kind: &'static str,
    /// The name given.
    pub name: String,
    /// The accepted names, in words.
    pub expected: &'static str,
}

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

    /// The quantities a catalog measurement can hold, in display order. Distance and
    /// resolution are not among them: a distance belongs to the galaxy, a resolution to the
    /// observation behind a measurement.
    pub const MEASURED: [Quantity; 4] = [
        Quantity::BlackHoleMass,
        Quantity::VelocityDispersion,
        Quantity::BulgeMass,
        Quantity::BulgeLuminosity,
    ];

    /// Stable snake_case name, used in forms, the API and the database: the catalog's stored
    /// (and URL) form.
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

    /// Plain name for messages, such as "black-hole mass": the form shown to people.
    pub fn label(self) -> &'static str {
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
    pub(super) fn log_range(self) -> (f64, f64) {
        let (min, max) = self.accepted_range();
        if self.is_log_canonical() {
            (min, max)
        } else {
            (min.log10(), max.log10())
        }
    }

    /// Examples of accepted entries, quoted for messages.
    pub(super) fn examples(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "“3.2e9”, “3.2x10^9 +0.5e9/-0.3e9” or “log 9.51 ± 0.1”",
            Quantity::BulgeMass => "“2e11”, “2x10^11 ± 10%” or “log 11.3 ± 0.1”",
            Quantity::BulgeLuminosity => "“5e10”, “5x10^10 ± 1e10” or “log 10.7 ± 0.1”",
            Quantity::VelocityDispersion => "“210”, “210 ± 10” or “210 km/s”",
            Quantity::Distance => "“16.5” or “16.5 ± 0.8”",
            Quantity::Resolution => "“0.1” or “0.05\"”",
        }
    }

    /// An example of an entry with a symmetric error, quoted for messages.
    pub(super) fn error_example(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => "“3.2e9 ± 0.4e9” or “3.2e9 +0.5e9/-0.3e9”",
            Quantity::BulgeMass => "“2e11 ± 0.3e11”",
            Quantity::BulgeLuminosity => "“5e10 ± 1e10”",
            Quantity::VelocityDispersion => "“210 ± 10”",
            Quantity::Distance => "“16.5 ± 0.8”",
            Quantity::Resolution => "“0.1 ± 0.01”",
        }
    }

    /// Unit words accepted after the value or at the end of the entry (lower case).
    pub(super) fn unit_words(self) -> &'static [&'static str] {
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
    pub(super) fn non_positive_advice(self) -> &'static str {
        match self {
            Quantity::BlackHoleMass => {
                "; for an undetected black hole, enter an upper limit such as “<2e7”"
            }
            _ => "",
        }
    }

    /// (stored form, label) of every measured quantity ([`Quantity::MEASURED`]), in display
    /// order, for select menus.
    pub fn pairs() -> Vec<(&'static str, &'static str)> {
        Self::MEASURED
            .iter()
            .map(|q| (q.as_str(), q.label()))
            .collect()
    }

    /// The stored forms of the measured quantities, comma-separated, for error messages.
    pub fn accepted() -> String {
        Self::MEASURED
            .iter()
            .map(|q| q.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// Reads the stored form of a measured quantity ([`Quantity::MEASURED`]), as catalog files,
    /// forms and the API name it; surrounding white space is ignored.
    ///
    /// # Errors
    ///
    /// A message naming the word and the accepted ones, such as "'mass' is not one of: bh_mass,
    /// sigma, bulge_mass, bulge_luminosity"; `distance` and `resolution` are refused too, since
    /// no measurement holds them.
    pub fn parse_measured(word: &str) -> Result<Quantity, String> {
        let word = word.trim();
        Self::MEASURED
            .into_iter()
            .find(|q| q.as_str() == word)
            .ok_or_else(|| format!("'{word}' is not one of: {}", Self::accepted()))
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.label())
    }
}

impl FromStr for Quantity {
    type Err = UnknownNameError;

    /// Reads the stable name of any quantity ([`Quantity::as_str`]); surrounding white space is
    /// ignored, as stored and submitted words may carry it.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let word = s.trim();
        Quantity::ALL
            .into_iter()
            .find(|q| q.as_str() == word)
            .ok_or_else(|| UnknownNameError {
                kind: "quantity",
                name: s.to_owned(),
                expected: "bh_mass, sigma, bulge_mass, bulge_luminosity, distance or resolution",
            })
    }
}

impl TryFrom<String> for Quantity {
    type Error = UnknownNameError;

    /// Reads a stored word as [`FromStr`] does, so that database rows decode their `quantity`
    /// column straight into a [`Quantity`].
    fn try_from(word: String) -> Result<Self, Self::Error> {
        word.parse()
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

#[cfg(test)]
mod tests {
    use super::super::errors::tests::assert_one_sentence;
    use super::*;

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
    fn measured_quantities_keep_the_catalog_words_labels_and_order() {
        let words: Vec<_> = Quantity::MEASURED.iter().map(|q| q.as_str()).collect();
        assert_eq!(
            words,
            ["bh_mass", "sigma", "bulge_mass", "bulge_luminosity"]
        );
        assert_eq!(
            Quantity::pairs(),
            [
                ("bh_mass", "black-hole mass"),
                ("sigma", "velocity dispersion"),
                ("bulge_mass", "bulge mass"),
                ("bulge_luminosity", "bulge luminosity"),
            ]
        );
        assert_eq!(
            Quantity::accepted(),
            "bh_mass, sigma, bulge_mass, bulge_luminosity"
        );
        assert_eq!(Quantity::Distance.label(), "distance");
        assert_eq!(Quantity::Resolution.label(), "spatial resolution");
        assert_eq!(Quantity::BulgeMass.to_string(), "bulge mass");
        for quantity in Quantity::MEASURED {
            assert_eq!(Quantity::parse_measured(quantity.as_str()), Ok(quantity));
            assert_eq!(
                Quantity::parse_measured(&format!(" {} ", quantity.as_str())),
                Ok(quantity)
            );
        }
        // Stored words, as every catalog row holds them, parse and decode the same way.
        for quantity in Quantity::ALL {
            assert_eq!(
                Quantity::try_from(quantity.as_str().to_owned()),
                Ok(quantity)
            );
        }
        assert_eq!(
            " sigma ".parse::<Quantity>(),
            Ok(Quantity::VelocityDispersion)
        );
        assert_eq!(
            Quantity::parse_measured("mass"),
            Err("'mass' is not one of: bh_mass, sigma, bulge_mass, bulge_luminosity".to_owned())
        );
        assert_eq!(
            Quantity::parse_measured(" distance"),
            Err(
                "'distance' is not one of: bh_mass, sigma, bulge_mass, bulge_luminosity".to_owned()
            )
        );
    }
}
