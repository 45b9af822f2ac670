//! Which galaxies enter a fit ([`SampleFilter`]) and how they are fitted ([`FitChoice`]: the
//! estimator and the pivots), read from query parameters. The relation pages and the API's
//! relation endpoint read the same parameters here.

use super::{Relation, Sample};
use crate::catalog::model::{
    Activity, BulgeKind, CentreKind, MassMethod, Morphology, SigmaDefinition,
};
use crate::fit::Method;
use crate::units::{Quantity, Scale, parse_entry};

/// Sphere-of-influence selection.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum SoiChoice {
    /// Every black-hole mass (the sphere of influence is a flag for reviewers, not a cut:
    /// Gültekin et al. 2009, ApJ 698, 198).
    #[default]
    All,
    /// Only masses whose sphere of influence is resolved (θ_infl / resolution ≥ threshold);
    /// reverberation masses and masses without a recorded resolution are left out.
    Resolved,
}

/// Which velocity dispersion a relation using σ takes. Definitions are never mixed: objects
/// whose adopted σ has the other definition are left out and counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum SigmaChoice {
    /// σ_e, within the effective radius (the default).
    #[default]
    Effective,
    /// σ_c, central.
    Central,
}

impl SigmaChoice {
    /// The stored σ definition this choice keeps.
    pub fn definition(self) -> SigmaDefinition {
        match self {
            SigmaChoice::Effective => SigmaDefinition::Effective,
            SigmaChoice::Central => SigmaDefinition::Central,
        }
    }
}

/// Which kinds of black-hole mass enter a fit (docs/methods.md §4.7). A mass method chosen
/// with `mass_method` overrides this: choosing one method is itself a visible choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum MassesChoice {
    /// Dynamical masses only (stellar and gas dynamics, masers): the default, because a
    /// virial mass is calibrated on the relation it would be fitted to.
    #[default]
    Dynamical,
    /// Dynamical and reverberation masses.
    WithReverberation,
    /// Every mass, single-epoch masses included.
    All,
}

impl MassesChoice {
    /// Every choice, in display order.
    pub const ALL: [MassesChoice; 3] = [
        MassesChoice::Dynamical,
        MassesChoice::WithReverberation,
        MassesChoice::All,
    ];

    /// The query word: `dynamical`, `with_reverberation` or `all`.
    pub fn as_str(self) -> &'static str {
        match self {
            MassesChoice::Dynamical => "dynamical",
            MassesChoice::WithReverberation => "with_reverberation",
            MassesChoice::All => "all",
        }
    }

    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            MassesChoice::Dynamical => "dynamical masses only (stellar, gas, maser)",
            MassesChoice::WithReverberation => "dynamical and reverberation masses",
            MassesChoice::All => "every mass, single-epoch included",
        }
    }

    /// Whether a mass measured by the stored method word enters.
    pub fn admits(self, method: &str) -> bool {
        let Ok(method) = method.parse::<MassMethod>() else {
            return false;
        };
        match self {
            MassesChoice::Dynamical => method.is_dynamical(),
            MassesChoice::WithReverberation => method != MassMethod::SingleEpoch,
            MassesChoice::All => true,
        }
    }
}

/// Whether upper limits on the black-hole mass enter a fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub enum LimitsChoice {
    /// As the estimator allows (the default): included for the likelihood estimators, left
    /// out, and counted, for FITEXY and BCES, which take no censored points
    /// (docs/methods.md §2.2).
    #[default]
    Auto,
    /// Included whatever the estimator: FITEXY and BCES then refuse the sample.
    Include,
    /// Left out whatever the estimator.
    Exclude,
}

impl LimitsChoice {
    /// The query word: `auto`, `include` or `exclude`.
    pub fn as_str(self) -> &'static str {
        match self {
            LimitsChoice::Auto => "auto",
            LimitsChoice::Include => "include",
            LimitsChoice::Exclude => "exclude",
        }
    }
}

/// Whether an estimator can use upper limits: the likelihood estimators can (a limit enters as
/// the probability of lying below it); FITEXY (Press et al. 1992; Tremaine et al. 2002) and BCES
/// (Akritas & Bershady 1996) are built on detected values only (docs/methods.md §2.2).
pub fn takes_limits(method: Method) -> bool {
    matches!(method, Method::Structural | Method::Conditional)
}

/// A selection of galaxies for a fit. `None` means any.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub struct SampleFilter {
    /// Host morphology.
    pub morphology: Option<Morphology>,
    /// Bulge kind.
    pub bulge_kind: Option<BulgeKind>,
    /// Centre kind.
    pub centre_kind: Option<CentreKind>,
    /// How the black-hole mass was measured (overrides `masses` when set).
    pub mass_method: Option<MassMethod>,
    /// Which kinds of mass enter (dynamical only by default).
    pub masses: MassesChoice,
    /// The nucleus' activity class.
    pub activity: Option<Activity>,
    /// Sphere of influence resolved, or all.
    pub soi: SoiChoice,
    /// σ definition (relations using σ only).
    pub sigma: SigmaChoice,
    /// Whether upper limits on the black-hole mass enter (FITEXY and BCES cannot use them).
    pub limits: LimitsChoice,
}

/// The query parameters [`SampleFilter::set`] reads.
pub const FILTER_PARAMS: [&str; 9] = [
    "morphology",
    "bulge_kind",
    "centre_kind",
    "mass_method",
    "masses",
    "activity",
    "soi",
    "sigma_definition",
    "limits",
];

impl SampleFilter {
    /// Reads one query parameter into the filter. Returns `Ok(false)` when `key` is not a
    /// filter parameter (the caller handles it), `Ok(true)` when it was read. An empty value
    /// means "any" (a form's select left alone).
    ///
    /// # Errors
    /// One sentence naming the parameter and the accepted values.
    pub fn set(&mut self, key: &str, value: &str) -> Result<bool, String> {
        let value = value.trim();
        let named = |e: String| format!("Parameter '{key}': {e}.");
        match key {
            "morphology" => {
                self.morphology = optional(value).map_err(named)?;
            }
            "bulge_kind" => {
                self.bulge_kind = optional(value).map_err(named)?;
            }
            "centre_kind" => {
                self.centre_kind = optional(value).map_err(named)?;
            }
            "mass_method" => {
                self.mass_method = optional(value).map_err(named)?;
            }
            "masses" => {
                self.masses = match value {
                    "" => MassesChoice::default(),
                    v => MassesChoice::ALL
                        .into_iter()
                        .find(|c| c.as_str() == v)
                        .ok_or_else(|| {
                            named(format!(
                                "'{v}' is not one of: dynamical, with_reverberation, all"
                            ))
                        })?,
                };
            }
            "activity" => {
                self.activity = optional(value).map_err(named)?;
            }
            "soi" => {
                self.soi = match value {
                    "" | "all" => SoiChoice::All,
                    "resolved" => SoiChoice::Resolved,
                    other => {
                        return Err(named(format!("'{other}' is not one of: all, resolved")));
                    }
                };
            }
            "sigma_definition" => {
                self.sigma = match value {
                    "" | "sigma_e" => SigmaChoice::Effective,
                    "sigma_c" => SigmaChoice::Central,
                    other => {
                        return Err(named(format!("'{other}' is not one of: sigma_e, sigma_c")));
                    }
                };
            }
            "limits" => {
                self.limits = match value {
                    "" | "auto" => LimitsChoice::Auto,
                    "include" => LimitsChoice::Include,
                    "exclude" => LimitsChoice::Exclude,
                    other => {
                        return Err(named(format!(
                            "'{other}' is not one of: auto, include, exclude"
                        )));
                    }
                };
            }
            _ => return Ok(false),
        }
        Ok(true)
    }

    /// Reads a whole query; every parameter must be a filter parameter.
    ///
    /// # Errors
    /// The problems, one sentence each, joined by spaces.
    pub fn parse(pairs: &[(String, String)]) -> Result<SampleFilter, String> {
        let mut filter = SampleFilter::default();
        let mut problems = Vec::new();
        for (key, value) in pairs {
            match filter.set(key, value) {
                Ok(true) => {}
                Ok(false) => problems.push(format!(
                    "'{}' is not a sample filter (they are {}).",
                    key.chars().take(40).collect::<String>(),
                    FILTER_PARAMS.join(", ")
                )),
                Err(e) => problems.push(e),
            }
        }
        if problems.is_empty() {
            Ok(filter)
        } else {
            Err(crate::error::join_problems(problems))
        }
    }

    /// A canonical text for cache keys and stored fits: every field in a fixed order, "any"
    /// for unset ones, e.g. `morphology=any;bulge_kind=pseudo;…;limits=include`.
    pub fn canonical(&self) -> String {
        format!(
            "morphology={};bulge_kind={};centre_kind={};mass_method={};masses={};activity={};soi={};sigma_definition={};limits={}",
            self.morphology.map_or("any", Morphology::as_str),
            self.bulge_kind.map_or("any", BulgeKind::as_str),
            self.centre_kind.map_or("any", CentreKind::as_str),
            self.mass_method.map_or("any", MassMethod::as_str),
            self.masses.as_str(),
            self.activity.map_or("any", Activity::as_str),
            match self.soi {
                SoiChoice::All => "all",
                SoiChoice::Resolved => "resolved",
            },
            self.sigma.definition().as_str(),
            self.limits.as_str(),
        )
    }

    /// Whether a black-hole mass measured by the stored method word enters: the chosen method
    /// when one is chosen, else the kinds `masses` admits.
    pub fn admits_method(&self, method: &str) -> bool {
        match self.mass_method {
            Some(m) => method == m.as_str(),
            None => self.masses.admits(method),
        }
    }

    /// Whether upper limits are left out of a fit by `method`: when asked, or automatically
    /// when the estimator cannot use them ([`takes_limits`]).
    pub fn excludes_limits(&self, method: Method) -> bool {
        match self.limits {
            LimitsChoice::Include => false,
            LimitsChoice::Exclude => true,
            LimitsChoice::Auto => !takes_limits(method),
        }
    }

    /// The filter a fit by `method` uses: [`LimitsChoice::Auto`] made definite (include or
    /// exclude), so that the automatic exclusion and an explicit one share one fit and one key.
    #[must_use]
    pub fn for_method(&self, method: Method) -> SampleFilter {
        SampleFilter {
            limits: if self.excludes_limits(method) {
                LimitsChoice::Exclude
            } else {
                LimitsChoice::Include
            },
            ..*self
        }
    }

    /// The non-default parameters as (key, value) pairs, for links.
    pub fn query_pairs(&self) -> Vec<(&'static str, &'static str)> {
        let mut out = Vec::new();
        if let Some(m) = self.morphology {
            out.push(("morphology", m.as_str()));
        }
        if let Some(b) = self.bulge_kind {
            out.push(("bulge_kind", b.as_str()));
        }
        if let Some(c) = self.centre_kind {
            out.push(("centre_kind", c.as_str()));
        }
        if let Some(m) = self.mass_method {
            out.push(("mass_method", m.as_str()));
        }
        if self.masses != MassesChoice::default() {
            out.push(("masses", self.masses.as_str()));
        }
        if let Some(a) = self.activity {
            out.push(("activity", a.as_str()));
        }
        if self.soi == SoiChoice::Resolved {
            out.push(("soi", "resolved"));
        }
        if self.sigma == SigmaChoice::Central {
            out.push(("sigma_definition", "sigma_c"));
        }
        if self.limits != LimitsChoice::Auto {
            out.push(("limits", self.limits.as_str()));
        }
        out
    }
}

fn optional<T: std::str::FromStr<Err = String>>(value: &str) -> Result<Option<T>, String> {
    if value.is_empty() || value == "any" {
        Ok(None)
    } else {
        value.parse().map(Some)
    }
}

/// A fit as chosen: the estimator, the galaxies, and the pivots (None: the relation's default).
#[derive(Debug, Clone, PartialEq)]
pub struct FitChoice {
    /// Estimator.
    pub method: Method,
    /// Which galaxies enter.
    pub filter: SampleFilter,
    /// Pivot x0, log10 in the relation's x unit, if given.
    pub pivot: Option<f64>,
    /// Second pivot (the plane's bulge mass), log10 M☉, if given.
    pub pivot2: Option<f64>,
}

impl Default for FitChoice {
    fn default() -> Self {
        Self {
            method: Method::Structural,
            filter: SampleFilter::default(),
            pivot: None,
            pivot2: None,
        }
    }
}

/// The query parameters [`FitChoice::set`] reads besides the filter's.
pub const FIT_PARAMS: [&str; 3] = ["method", "pivot", "pivot2"];

/// A pivot as typed: a log10 value from 0 to 20 in the relation's x unit.
///
/// # Errors
/// One sentence (without a full stop) giving the accepted range and two examples.
pub fn read_pivot(value: &str) -> Result<f64, String> {
    match value.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && (0.0..=20.0).contains(&v) => Ok(v),
        _ => Err(format!(
            "'{}' is not a log10 value from 0 to 20, such as 2.301 (σ = 200 km/s) or 11 (10^11 M☉)",
            value.chars().take(40).collect::<String>()
        )),
    }
}

/// Upper limits left out of a fit, and why ([`FitChoice::limits_left_out`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LimitsLeftOut {
    /// How many upper limits of the selection were left out.
    pub count: usize,
    /// Whether they were left out because the estimator cannot use them (rather than asked).
    pub automatic: bool,
    /// One sentence saying how many and why, for every door.
    pub sentence: String,
}

/// "1 upper limit", "2 upper limits".
fn upper_limits(n: usize) -> String {
    if n == 1 {
        "1 upper limit".to_owned()
    } else {
        format!("{n} upper limits")
    }
}

/// A pivot read from what was typed: its log10 value and, when it was typed in the linear unit,
/// how it was read.
#[derive(Debug, Clone, PartialEq)]
pub struct TypedPivot {
    /// log10 in the quantity's unit.
    pub log_value: f64,
    /// "200 km/s, log10 = 2.3010" when typed in the linear unit (or with `log`); None for a
    /// bare log10 number.
    pub read_as: Option<String>,
}

/// Reads a pivot as a person types it for `quantity` (σ in km/s, masses in M☉, luminosities in
/// L☉): a bare number inside the quantity's plausible log10 range (`Quantity::accepted_range`,
/// e.g. 1.30–2.78 for σ) is a log10 value, as links and the API write it; anything else goes
/// through the unit grammar (`units::parse_entry` on the automatic scale), so `200`,
/// `200 km/s`, `1e11 Msun` and `log 2.3` are read, and echoed as read.
///
/// # Errors
/// One sentence (without a full stop) giving both accepted forms with an example.
pub fn read_pivot_typed(value: &str, quantity: Quantity) -> Result<TypedPivot, String> {
    let text = value.trim();
    let (lo, hi) = quantity.accepted_range();
    if let Ok(v) = text.parse::<f64>()
        && v.is_finite()
        && (lo..=hi).contains(&v)
    {
        return Ok(TypedPivot {
            log_value: v,
            read_as: None,
        });
    }
    let unit = quantity.unit_label();
    let example = match quantity {
        Quantity::VelocityDispersion => "200 km/s",
        Quantity::BulgeLuminosity => "1e10 Lsun",
        _ => "1e11 Msun",
    };
    let refused = |why: String| {
        format!(
            "'{}' is neither a log10 value from {lo:.2} to {hi:.2} nor a value in {unit} such as '{example}' ({why})",
            text.chars().take(40).collect::<String>(),
        )
    };
    let entry = parse_entry(text, quantity, Scale::Auto)
        .map_err(|e| refused(e.to_string().trim_end_matches('.').to_owned()))?;
    if entry.upper_limit || entry.errors_given {
        return Err(refused("a pivot takes no limit and no error".to_owned()));
    }
    Ok(TypedPivot {
        log_value: entry.log_value,
        read_as: Some(format!(
            "{} {unit}, log10 = {:.4}",
            linear_text(entry.log_value),
            entry.log_value
        )),
    })
}

/// 10^log_value for an echo: "200", "1.5×10^11" (four significant digits at most).
fn linear_text(log_value: f64) -> String {
    let exponent = log_value.floor();
    let mantissa = 10f64.powf(log_value - exponent);
    let mantissa = (mantissa * 1_000.0).round() / 1_000.0;
    if (0.0..4.0).contains(&exponent) {
        let value = (10f64.powf(log_value) * 10.0).round() / 10.0;
        format!("{value}")
    } else {
        format!("{mantissa}×10^{exponent}")
    }
}

impl FitChoice {
    /// The upper limits this choice leaves out of `sample` (built with
    /// [`SampleFilter::for_method`]), with the sentence every door shows; None when none were.
    pub fn limits_left_out(&self, sample: &Sample) -> Option<LimitsLeftOut> {
        let count = sample.left_out_limits;
        if count == 0 {
            return None;
        }
        let automatic = self.filter.limits == LimitsChoice::Auto;
        let sentence = if automatic {
            let (name, source) = match self.method {
                Method::Fitexy => ("modified FITEXY", "Press et al. 1992; Tremaine et al. 2002"),
                _ => ("BCES", "Akritas & Bershady 1996"),
            };
            format!(
                "{} left out: {name} takes no upper limits ({source}). Choose the structural or conditional estimator to fit them.",
                upper_limits(count)
            )
        } else {
            format!("{} left out, as asked.", upper_limits(count))
        };
        Some(LimitsLeftOut {
            count,
            automatic,
            sentence,
        })
    }

    /// Reads one query parameter: a filter parameter, `method`, `pivot` or `pivot2`. Returns
    /// `Ok(false)` when `key` is none of them, `Ok(true)` when it was read; an empty value keeps
    /// the default.
    ///
    /// # Errors
    /// One sentence naming the parameter and what it accepts.
    pub fn set(&mut self, key: &str, value: &str) -> Result<bool, String> {
        if self.filter.set(key, value)? {
            return Ok(true);
        }
        let value = value.trim();
        let named = |e: String| format!("Parameter '{key}': {e}.");
        match key {
            "method" if !value.is_empty() => {
                self.method = value.parse::<Method>().map_err(|_| {
                    named(format!(
                        "'{}' is not one of: {}",
                        value.chars().take(40).collect::<String>(),
                        Method::ALL
                            .iter()
                            .map(|m| m.as_str())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ))
                })?;
            }
            "pivot" if !value.is_empty() => self.pivot = Some(read_pivot(value).map_err(named)?),
            "pivot2" if !value.is_empty() => self.pivot2 = Some(read_pivot(value).map_err(named)?),
            "method" | "pivot" | "pivot2" => {}
            _ => return Ok(false),
        }
        Ok(true)
    }

    /// The pivots for `relation`: as given, or the relation's defaults.
    pub fn pivots(&self, relation: &Relation) -> (f64, f64) {
        (
            self.pivot.unwrap_or_else(|| relation.default_pivot()),
            self.pivot2.unwrap_or_else(|| relation.default_pivot2()),
        )
    }

    /// A canonical text of the choice for `relation` (cache keys, entity tags).
    pub fn canonical(&self, relation: &Relation) -> String {
        let (p, p2) = self.pivots(relation);
        format!(
            "relation={};method={};{};pivots={:x},{:x}",
            relation.slug(),
            self.method.as_str(),
            self.filter.canonical(),
            p.to_bits(),
            p2.to_bits()
        )
    }

    /// The (key, value) pairs that reproduce this choice; none for the defaults.
    pub fn query_pairs(&self) -> Vec<(&'static str, String)> {
        let mut pairs = Vec::new();
        if self.method != Method::Structural {
            pairs.push(("method", self.method.as_str().to_owned()));
        }
        for (k, v) in self.filter.query_pairs() {
            pairs.push((k, v.to_owned()));
        }
        if let Some(p) = self.pivot {
            pairs.push(("pivot", format!("{p}")));
        }
        if let Some(p) = self.pivot2 {
            pairs.push(("pivot2", format!("{p}")));
        }
        pairs
    }
}

/// Query pairs from string literals (tests of the query readers).
#[cfg(test)]
pub(crate) fn pairs(items: &[(&str, &str)]) -> Vec<(String, String)> {
    items
        .iter()
        .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_sample_holds_dynamical_masses_and_a_chosen_method_overrides_it() {
        let default = SampleFilter::default();
        for (method, admitted) in [
            ("stellar_dynamics", true),
            ("gas_dynamics", true),
            ("maser", true),
            ("reverberation", false),
            ("single_epoch", false),
            ("", false),
        ] {
            assert_eq!(default.admits_method(method), admitted, "{method}");
        }
        let with_rm = SampleFilter {
            masses: MassesChoice::WithReverberation,
            ..SampleFilter::default()
        };
        assert!(with_rm.admits_method("reverberation"));
        assert!(!with_rm.admits_method("single_epoch"));
        let all = SampleFilter {
            masses: MassesChoice::All,
            ..SampleFilter::default()
        };
        assert!(all.admits_method("single_epoch"));
        let chosen = SampleFilter {
            mass_method: Some(MassMethod::Reverberation),
            ..SampleFilter::default()
        };
        assert!(chosen.admits_method("reverberation"));
        assert!(!chosen.admits_method("maser"));
        let err = SampleFilter::parse(&pairs(&[("masses", "agn")])).unwrap_err();
        assert!(err.contains("dynamical, with_reverberation, all"), "{err}");
    }

    #[test]
    fn every_parameter_is_read_and_the_canonical_form_is_fixed() {
        let f = SampleFilter::parse(&pairs(&[
            ("morphology", "spiral"),
            ("bulge_kind", "pseudo"),
            ("centre_kind", "power_law"),
            ("mass_method", "maser"),
            ("masses", "with_reverberation"),
            ("activity", "seyfert1"),
            ("soi", "resolved"),
            ("sigma_definition", "sigma_c"),
            ("limits", "exclude"),
        ]))
        .unwrap();
        assert_eq!(f.morphology, Some(Morphology::Spiral));
        assert_eq!(f.sigma, SigmaChoice::Central);
        assert_eq!(f.masses, MassesChoice::WithReverberation);
        assert_eq!(f.activity, Some(Activity::Seyfert1));
        assert_eq!(
            f.canonical(),
            "morphology=spiral;bulge_kind=pseudo;centre_kind=power_law;mass_method=maser;masses=with_reverberation;activity=seyfert1;soi=resolved;sigma_definition=sigma_c;limits=exclude"
        );
        // The link pairs read back to the same filter.
        let back: Vec<(String, String)> = f
            .query_pairs()
            .into_iter()
            .map(|(k, v)| (k.to_owned(), v.to_owned()))
            .collect();
        assert_eq!(SampleFilter::parse(&back).unwrap(), f);
        assert_eq!(
            SampleFilter::default().canonical(),
            "morphology=any;bulge_kind=any;centre_kind=any;mass_method=any;masses=dynamical;activity=any;soi=all;sigma_definition=sigma_e;limits=auto"
        );
    }

    #[test]
    fn bad_values_get_one_sentence_each() {
        let err =
            SampleFilter::parse(&pairs(&[("morphology", "blob"), ("soi", "maybe")])).unwrap_err();
        assert!(
            err.contains("Parameter 'morphology': 'blob' is not one of"),
            "{err}"
        );
        assert!(
            err.contains("Parameter 'soi': 'maybe' is not one of: all, resolved."),
            "{err}"
        );
        let err = SampleFilter::parse(&pairs(&[("colour", "red")])).unwrap_err();
        assert!(err.contains("'colour' is not a sample filter"), "{err}");
        assert_eq!(
            SampleFilter::parse(&pairs(&[("morphology", ""), ("soi", "")])).unwrap(),
            SampleFilter::default()
        );
    }
}
