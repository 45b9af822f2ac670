//! The catalog's vocabulary: closed sets of words stored as text, and the row types.
//!
//! Each enum maps one-to-one to the values a `check` constraint in `migrations/` allows, so a
//! value that parses here is one the database accepts.

use std::fmt;

// What a measurement measures: one type with the entry parser's, whose `Quantity::MEASURED`
// words are the ones the schema allows.
pub use crate::units::Quantity;

/// Define an enum stored as text, with `as_str`, `label`, `ALL` and `FromStr`.
macro_rules! text_enum {
    ($(#[$meta:meta])* $name:ident { $($(#[$vmeta:meta])* $variant:ident => $text:literal, $label:literal;)+ }) => {
        $(#[$meta])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
        pub enum $name {
            $($(#[$vmeta])* #[serde(rename = $text)] $variant,)+
        }

        impl $name {
            /// Every value, in display order.
            pub const ALL: &'static [$name] = &[$($name::$variant),+];

            /// The stored (and URL) form.
            pub fn as_str(self) -> &'static str {
                match self { $($name::$variant => $text),+ }
            }

            /// The form shown to people.
            pub fn label(self) -> &'static str {
                match self { $($name::$variant => $label),+ }
            }

            /// (stored form, label) of every value, in display order, for select menus.
            pub fn pairs() -> Vec<(&'static str, &'static str)> {
                Self::ALL.iter().map(|v| (v.as_str(), v.label())).collect()
            }

            /// The stored forms, comma-separated, for error messages.
            pub fn accepted() -> String {
                Self::ALL.iter().map(|v| v.as_str()).collect::<Vec<_>>().join(", ")
            }
        }

        impl std::str::FromStr for $name {
            type Err = String;
            fn from_str(s: &str) -> Result<Self, Self::Err> {
                match s.trim() {
                    $($text => Ok($name::$variant),)+
                    other => Err(format!("'{}' is not one of: {}", other, Self::accepted())),
                }
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(self.label())
            }
        }
    };
}

text_enum!(
    /// Coarse Hubble type of the host.
    Morphology {
        /// E
        Elliptical => "elliptical", "elliptical";
        /// S0
        Lenticular => "lenticular", "lenticular";
        /// S
        Spiral => "spiral", "spiral";
        /// Irr
        Irregular => "irregular", "irregular";
        /// Not known
        Unknown => "unknown", "unknown";
    }
);

text_enum!(
    /// Kind of bulge: classical bulges (and ellipticals) or disc-like pseudo bulges.
    BulgeKind {
        /// Classical bulge or elliptical.
        Classical => "classical", "classical";
        /// Pseudo bulge.
        Pseudo => "pseudo", "pseudo";
        /// Not known.
        Unknown => "unknown", "unknown";
    }
);

text_enum!(
    /// Inner surface-brightness profile.
    CentreKind {
        /// Flattened core.
        Core => "core", "core";
        /// Power-law cusp.
        PowerLaw => "power_law", "power law";
        /// Not known.
        Unknown => "unknown", "unknown";
    }
);

text_enum!(
    /// How a galaxy's distance was measured.
    DistanceMethod {
        /// Surface-brightness fluctuations.
        Sbf => "sbf", "SBF";
        /// Cepheid period–luminosity.
        Cepheid => "cepheid", "Cepheids";
        /// Tip of the red-giant branch.
        Trgb => "trgb", "TRGB";
        /// Recession velocity and a Hubble constant.
        HubbleFlow => "hubble_flow", "Hubble flow";
        /// Maser geometry.
        Maser => "maser", "maser";
        /// Tully–Fisher relation.
        TullyFisher => "tully_fisher", "Tully–Fisher";
        /// Anything else.
        Other => "other", "other";
    }
);

text_enum!(
    /// How a black-hole mass was measured.
    MassMethod {
        /// Stellar dynamics.
        StellarDynamics => "stellar_dynamics", "stellar dynamics";
        /// Gas dynamics.
        GasDynamics => "gas_dynamics", "gas dynamics";
        /// Water masers.
        Maser => "maser", "maser";
        /// Reverberation mapping: a lag and a line width, times the adopted virial factor.
        Reverberation => "reverberation", "reverberation mapping";
        /// One spectrum: a radius–luminosity relation or a published calibration
        /// (docs/methods.md §4.2); flagged, and in no default relation sample.
        SingleEpoch => "single_epoch", "single-epoch spectrum";
    }
);

impl MassMethod {
    /// Whether a mass by this method is dynamical (stellar or gas dynamics, masers): the
    /// default relation sample holds these only (docs/methods.md §4.7).
    pub fn is_dynamical(self) -> bool {
        matches!(
            self,
            MassMethod::StellarDynamics | MassMethod::GasDynamics | MassMethod::Maser
        )
    }

    /// Whether a mass by this method is a virial (broad-line) mass, f · VP: it carries a
    /// virial factor and has no sphere of influence to resolve.
    pub fn is_virial(self) -> bool {
        matches!(self, MassMethod::Reverberation | MassMethod::SingleEpoch)
    }
}

/// Whether a stored mass-method word names a virial (broad-line) mass.
pub fn is_virial_method(method: &str) -> bool {
    method
        .parse::<MassMethod>()
        .is_ok_and(MassMethod::is_virial)
}

text_enum!(
    /// What the galaxy's nucleus is: quiescent, a kind of active nucleus, or not known.
    Activity {
        /// No active nucleus.
        Quiescent => "quiescent", "quiescent";
        /// Seyfert 1 (broad lines seen).
        Seyfert1 => "seyfert1", "Seyfert 1";
        /// Seyfert 2 (narrow lines only).
        Seyfert2 => "seyfert2", "Seyfert 2";
        /// Low-ionisation nuclear emission-line region.
        Liner => "liner", "LINER";
        /// Quasar.
        Quasar => "quasar", "quasar";
        /// Radio galaxy.
        RadioGalaxy => "radio_galaxy", "radio galaxy";
        /// Not known.
        Unknown => "unknown", "unknown";
    }
);

impl Activity {
    /// Whether the nucleus is active (any class but quiescent and unknown).
    pub fn is_active(self) -> bool {
        !matches!(self, Activity::Quiescent | Activity::Unknown)
    }
}

text_enum!(
    /// The broad-line width measure a virial mass uses; each has its own virial factor.
    WidthDefinition {
        /// Line dispersion (second moment), σ_line.
        SigmaLine => "sigma_line", "line dispersion σ_line";
        /// Full width at half maximum.
        Fwhm => "fwhm", "FWHM";
    }
);

text_enum!(
    /// The spectrum a broad-line width was measured on.
    WidthSpectrum {
        /// The rms (variable) spectrum of a reverberation campaign.
        Rms => "rms", "rms spectrum";
        /// The mean spectrum of a campaign.
        Mean => "mean", "mean spectrum";
        /// A single spectrum.
        Single => "single", "single spectrum";
    }
);

text_enum!(
    /// How a single-epoch mass was made (docs/methods.md §4.2).
    SingleEpochCalibration {
        /// Vestergaard & Peterson 2006 Hβ calibration: its own virial factor, never rescaled.
        Vp06 => "vp06", "Vestergaard & Peterson 2006 (Hβ, FWHM)";
        /// Bentz et al. 2013 radius–luminosity relation and the adopted ⟨f⟩.
        RlBentz13 => "r_l_bentz13", "Bentz et al. 2013 radius–luminosity and ⟨f⟩";
    }
);

/// What lies behind a reverberation or single-epoch mass, as measured (table
/// `virial_measurement`, migration 9). The stored mass is for the virial factor
/// `assumed_log_f`; what is shown and fitted is rescaled to the adopted ⟨f⟩ of
/// `width_definition` (docs/methods.md §4.1).
#[derive(Debug, Clone, PartialEq)]
pub struct VirialEntry {
    /// The broad line, e.g. "Hbeta".
    pub line: String,
    /// The width measure.
    pub width_definition: WidthDefinition,
    /// The spectrum the width was measured on.
    pub width_spectrum: WidthSpectrum,
    /// Rest-frame lag, days, with its lower and upper errors (days).
    pub lag_days: Option<(f64, f64, f64)>,
    /// Line width, km/s, with its error (km/s).
    pub width_km_s: Option<(f64, f64)>,
    /// log10 λL_λ(5100 Å), erg/s, with its error (dex).
    pub log_l5100_erg_s: Option<(f64, f64)>,
    /// log10 of the virial factor the stored mass assumed (0 for a virial product; None when
    /// the source's factor is not known: never rescaled).
    pub assumed_log_f: Option<f64>,
    /// How a single-epoch mass was made; None for reverberation.
    pub calibration: Option<SingleEpochCalibration>,
}

text_enum!(
    /// How a bulge mass was obtained.
    BulgeMassMethod {
        /// Dynamical (virial or Jeans) mass: scales with distance.
        Dynamical => "dynamical", "dynamical";
        /// Luminosity times a mass-to-light ratio: scales with distance squared.
        Photometric => "photometric", "photometric";
    }
);

text_enum!(
    /// Which velocity dispersion: relations must never mix them silently.
    SigmaDefinition {
        /// Luminosity-weighted within the effective radius.
        Effective => "sigma_e", "σ_e (within r_e)";
        /// Central, within a small aperture.
        Central => "sigma_c", "σ_c (central)";
    }
);

text_enum!(
    /// Review state of a submission (and of its measurements).
    SubmissionState {
        /// Waiting for a reviewer.
        Pending => "pending", "pending";
        /// Accepted into the catalog.
        Accepted => "accepted", "accepted";
        /// Rejected by a reviewer.
        Rejected => "rejected", "rejected";
        /// Withdrawn by the submitter.
        Withdrawn => "withdrawn", "withdrawn";
    }
);

/// A galaxy as stored.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct Galaxy {
    /// Key.
    pub galaxy_id: i64,
    /// Name.
    pub name: String,
    /// URL form of the name.
    pub slug: String,
    /// Stored form of [`Morphology`].
    pub morphology: String,
    /// Stored form of [`BulgeKind`].
    pub bulge_kind: String,
    /// Stored form of [`CentreKind`].
    pub centre_kind: String,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1-σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Stored form of [`DistanceMethod`].
    pub distance_method: String,
    /// Stored form of [`Activity`].
    pub activity: String,
}

/// A new galaxy, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct NewGalaxy {
    /// Name as the group writes it.
    pub name: String,
    /// Morphology.
    pub morphology: Morphology,
    /// Bulge kind.
    pub bulge_kind: BulgeKind,
    /// Centre kind.
    pub centre_kind: CentreKind,
    /// Adopted distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1-σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Distance method.
    pub distance_method: DistanceMethod,
    /// The nucleus' activity class.
    pub activity: Activity,
}

/// A measurement as stored, with its submission's state and whether it is adopted.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct Measurement {
    /// Key.
    pub measurement_id: i64,
    /// Galaxy.
    pub galaxy_id: i64,
    /// Submission it came with.
    pub submission_id: i64,
    /// What was measured (stored as [`Quantity::as_str`]).
    #[sqlx(try_from = "String")]
    pub quantity: Quantity,
    /// Canonical log10 value.
    pub log_value: f64,
    /// Lower error, dex.
    pub err_minus_dex: f64,
    /// Upper error, dex.
    pub err_plus_dex: f64,
    /// Symmetric error, dex.
    pub err_dex: f64,
    /// Upper limit?
    pub upper_limit: bool,
    /// Confidence of a limit, Gaussian σ.
    pub limit_confidence_sigma: Option<f64>,
    /// Method (see the schema).
    pub method: String,
    /// σ definition for dispersions.
    pub sigma_definition: String,
    /// Aperture for dispersions.
    pub aperture: String,
    /// Band for luminosities.
    pub band: String,
    /// Distance the source assumed, Mpc.
    pub source_distance_mpc: Option<f64>,
    /// Spatial resolution, arcsec.
    pub resolution_arcsec: Option<f64>,
    /// Reference.
    pub reference: String,
    /// Note.
    pub note: String,
    /// Value as entered.
    pub value_text: String,
    /// 'linear' or 'log10'.
    pub value_scale: String,
    /// Submission state (pending, accepted, ...).
    pub state: String,
    /// For a virial mass: log10 of the virial factor the stored value assumed (None when
    /// not known, or not a virial mass).
    pub assumed_log_f: Option<f64>,
    /// For a virial mass: its width measure word ('sigma_line' or 'fwhm').
    pub virial_width: Option<String>,
    /// Whether this is the adopted value for its galaxy, quantity and band.
    pub adopted: bool,
    /// When it was stored (RFC 3339 UTC).
    pub created_at: String,
}

/// A new measurement, validated and in canonical units.
#[derive(Debug, Clone, PartialEq)]
pub struct NewMeasurement {
    /// What was measured.
    pub quantity: Quantity,
    /// Canonical log10 value.
    pub log_value: f64,
    /// Lower error, dex.
    pub err_minus_dex: f64,
    /// Upper error, dex.
    pub err_plus_dex: f64,
    /// Symmetric error, dex.
    pub err_dex: f64,
    /// Upper limit?
    pub upper_limit: bool,
    /// Confidence of a limit in Gaussian σ (1, 2, 3); None for detections.
    pub limit_confidence_sigma: Option<f64>,
    /// Stored method word ('' when the quantity has none).
    pub method: String,
    /// Stored σ definition ('' unless sigma).
    pub sigma_definition: String,
    /// Aperture text.
    pub aperture: String,
    /// Band ('' unless luminosity).
    pub band: String,
    /// Distance the source assumed, Mpc.
    pub source_distance_mpc: Option<f64>,
    /// Resolution, arcsec.
    pub resolution_arcsec: Option<f64>,
    /// Reference.
    pub reference: String,
    /// Note.
    pub note: String,
    /// The value exactly as entered.
    pub value_text: String,
    /// 'linear' or 'log10'.
    pub value_scale: String,
    /// For a virial mass (reverberation, single epoch): the lag, width and factor behind it.
    pub virial: Option<VirialEntry>,
}

impl Measurement {
    /// log10 of the stored value moved to the adopted virial factor of `factors` (for a
    /// virial mass whose assumed factor is known; any other value unchanged): the stored value
    /// plus log⟨f⟩ − log f_assumed (docs/methods.md §4.7).
    pub fn log_at_factor(&self, factors: &crate::catalog::virial::Factors) -> f64 {
        let width = self
            .virial_width
            .as_deref()
            .and_then(|w| w.parse::<WidthDefinition>().ok());
        match (self.assumed_log_f, width) {
            (Some(assumed), Some(width)) => self.log_value + factors.of(width).0 - assumed,
            _ => self.log_value,
        }
    }
}

impl NewMeasurement {
    /// The measurement as it would be stored, pending, for galaxy `galaxy_id` (no key, no
    /// submission yet): what a submission is assessed with before it is stored.
    pub fn unstored(&self, galaxy_id: i64) -> Measurement {
        Measurement {
            measurement_id: 0,
            galaxy_id,
            submission_id: 0,
            quantity: self.quantity,
            log_value: self.log_value,
            err_minus_dex: self.err_minus_dex,
            err_plus_dex: self.err_plus_dex,
            err_dex: self.err_dex,
            upper_limit: self.upper_limit,
            limit_confidence_sigma: self.limit_confidence_sigma,
            method: self.method.clone(),
            sigma_definition: self.sigma_definition.clone(),
            aperture: self.aperture.clone(),
            band: self.band.clone(),
            source_distance_mpc: self.source_distance_mpc,
            resolution_arcsec: self.resolution_arcsec,
            reference: self.reference.clone(),
            note: self.note.clone(),
            value_text: self.value_text.clone(),
            value_scale: self.value_scale.clone(),
            state: "pending".to_owned(),
            assumed_log_f: self.virial.as_ref().and_then(|v| v.assumed_log_f),
            virial_width: self
                .virial
                .as_ref()
                .map(|v| v.width_definition.as_str().to_owned()),
            adopted: false,
            created_at: String::new(),
        }
    }
}

/// Lowercase ASCII slug of a name: letters and digits kept, common accented Latin letters
/// folded to their base letter, everything else a single hyphen.
pub fn slugify(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for c in name.chars().flat_map(char::to_lowercase) {
        let folded = match c {
            'à' | 'á' | 'â' | 'ã' | 'ä' | 'å' => 'a',
            'ç' => 'c',
            'è' | 'é' | 'ê' | 'ë' => 'e',
            'ì' | 'í' | 'î' | 'ï' => 'i',
            'ñ' => 'n',
            'ò' | 'ó' | 'ô' | 'õ' | 'ö' | 'ø' => 'o',
            'ù' | 'ú' | 'û' | 'ü' => 'u',
            'ý' | 'ÿ' => 'y',
            other => other,
        };
        if folded.is_ascii_alphanumeric() {
            out.push(folded);
        } else if !out.ends_with('-') && !out.is_empty() {
            out.push('-');
        }
    }
    while out.ends_with('-') {
        out.pop();
    }
    if out.is_empty() {
        out.push_str("galaxy");
    }
    out
}

/// The words for a stored code (a method, a σ definition, a morphology, a distance method, a
/// submission state, a fit parameter): "stellar_dynamics" → "stellar dynamics", "sigma_e" →
/// "σ_e (within r_e)", "tau_1" → "τ₁". A code this does not know is shown with its underscores
/// as spaces, never as a code.
pub fn code_label(code: &str) -> String {
    let known = MassMethod::pairs()
        .into_iter()
        .chain(BulgeMassMethod::pairs())
        .chain(SigmaDefinition::pairs())
        .chain(Morphology::pairs())
        .chain(BulgeKind::pairs())
        .chain(CentreKind::pairs())
        .chain(DistanceMethod::pairs())
        .chain(Activity::pairs())
        .chain(WidthDefinition::pairs())
        .find(|(word, _)| *word == code)
        .map(|(_, label)| label.to_owned());
    if let Some(label) = known {
        return label;
    }
    let greek = [
        ("alpha", "α"),
        ("beta", "β"),
        ("gamma", "γ"),
        ("delta", "δ"),
        ("eps", "ε"),
        ("mu", "μ"),
        ("tau", "τ"),
        ("w", "w"),
    ];
    // "tau_1" and "beta2" alike: a letter's name, then its index.
    let split = code.split_once('_').or_else(|| {
        let digits = code.find(|c: char| c.is_ascii_digit())?;
        Some(code.split_at(digits))
    });
    if let Some((name, index)) = split
        && let Some((_, letter)) = greek.iter().find(|(g, _)| *g == name)
        && !index.is_empty()
        && index.bytes().all(|b| b.is_ascii_digit())
    {
        let sub: String = index
            .chars()
            .map(|c| char::from_u32(0x2080 + c.to_digit(10).unwrap_or(0)).unwrap_or(c))
            .collect();
        return format!("{letter}{sub}");
    }
    if let Some((_, letter)) = greek.iter().find(|(g, _)| *g == code) {
        return (*letter).to_owned();
    }
    code.replace('_', " ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slugs_are_url_safe_and_fold_accents() {
        assert_eq!(slugify("Corvane 17"), "corvane-17");
        assert_eq!(slugify("  Élan–Brek  (north) "), "elan-brek-north");
        assert_eq!(slugify("***"), "galaxy");
    }

    #[test]
    fn text_enums_round_trip_and_refuse_unknown_words() {
        for m in Morphology::ALL {
            assert_eq!(m.as_str().parse::<Morphology>().unwrap(), *m);
        }
        let err = "blob".parse::<BulgeKind>().unwrap_err();
        assert!(err.contains("classical, pseudo, unknown"), "{err}");
    }
}
