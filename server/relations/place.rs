//! Placing an object against the relations: where it falls, how many standard deviations off,
//! what mass the relations predict, whether its sphere of influence was resolved, and how a
//! refit with it would move the relation. The place page, the API's place endpoints, the
//! galaxy page and the review of submissions all place through here.
//!
//! ```text
//! ŷ = α + β (x − x0) [+ γ (x2 − x02)]
//! s_pred² = ε² + gᵀ C g + β² σ_x² [+ γ² σ_x2²]                (fit::predict)
//! r = y − ŷ,  z = r / √(s_pred² + σ_y² − 2 β σ_xy)            (σ_xy = 0 for typed values)
//! limit: P(true log M_BH < y_lim) = Φ((y_lim − ŷ) / s_pred)
//! verdict: |z| < 2 consistent, 2 ≤ |z| < 3 in tension, |z| ≥ 3 outlier
//! ```
//! dex throughout; the verdict thresholds are common practice (docs/methods.md §6).

use std::sync::Arc;

use super::{Catalog, FitKey, FitOutcome, REQUEST_WAIT, Relation, SampleFilter};
use crate::astro::SphereOfInfluence;
use crate::catalog::model::Activity;
use crate::error::{AppResult, FieldError};
use crate::fit::{self, Fit, FitError, Method, Point, Prediction, Shape};
use crate::units::{Entry, LinearEntry, Quantity, Scale, parse_entry, parse_linear};

/// |z| from which an object is "in tension" with a relation (common practice, docs/methods.md §6).
pub const TENSION_Z: f64 = 2.0;
/// |z| from which an object is an outlier (common practice, docs/methods.md §6).
pub const OUTLIER_Z: f64 = 3.0;

/// The verdict for a z-score (thresholds [`TENSION_Z`], [`OUTLIER_Z`]). A limit above the
/// prediction says nothing against the relation, so limits are judged on the low side only.
pub fn verdict(z: f64, upper_limit: bool) -> &'static str {
    if upper_limit {
        if z <= -OUTLIER_Z {
            "outlier (limit far below)"
        } else if z <= -TENSION_Z {
            "in tension (limit below)"
        } else {
            "consistent"
        }
    } else if z.abs() >= OUTLIER_Z {
        "outlier"
    } else if z.abs() >= TENSION_Z {
        "in tension"
    } else {
        "consistent"
    }
}

/// Whether a z-score is at least "in tension" (the relation page lists such objects).
pub fn is_flagged(z: f64, upper_limit: bool) -> bool {
    verdict(z, upper_limit) != "consistent"
}

/// The fields of an object to place, in the order they are shown.
pub const OBJECT_FIELDS: [&str; 9] = [
    "sigma",
    "bulge_mass",
    "luminosity",
    "band",
    "mass",
    "distance",
    "resolution",
    "log_l5100_erg_s",
    "activity",
];

/// An object's values as typed (trimmed; empty when not given).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ObjectTexts {
    /// Velocity dispersion σ_e, km/s.
    pub sigma: String,
    /// Bulge mass, M☉.
    pub bulge_mass: String,
    /// Bulge luminosity, L☉ of `band`.
    pub luminosity: String,
    /// The luminosity's band.
    pub band: String,
    /// Black-hole mass or upper limit, M☉.
    pub mass: String,
    /// Distance, Mpc.
    pub distance: String,
    /// Spatial resolution of the mass measurement, arcsec.
    pub resolution: String,
    /// log10 λL_λ(5100 Å), erg/s (for the Eddington quantities).
    pub log_l5100_erg_s: String,
    /// The nucleus' activity class word.
    pub activity: String,
}

impl ObjectTexts {
    /// Every field with its name, in the order of [`OBJECT_FIELDS`].
    pub fn fields_mut(&mut self) -> [(&'static str, &mut String); 9] {
        [
            ("sigma", &mut self.sigma),
            ("bulge_mass", &mut self.bulge_mass),
            ("luminosity", &mut self.luminosity),
            ("band", &mut self.band),
            ("mass", &mut self.mass),
            ("distance", &mut self.distance),
            ("resolution", &mut self.resolution),
            ("log_l5100_erg_s", &mut self.log_l5100_erg_s),
            ("activity", &mut self.activity),
        ]
    }

    /// The field named `name` (one of [`OBJECT_FIELDS`]).
    pub fn slot(&mut self, name: &str) -> Option<&mut String> {
        self.fields_mut()
            .into_iter()
            .find(|(field, _)| *field == name)
            .map(|(_, slot)| slot)
    }

    /// Reads (name, text) pairs; returns the object and the names that are not fields
    /// (cut to 40 characters).
    pub fn from_pairs(pairs: &[(String, String)]) -> (Self, Vec<String>) {
        let mut texts = Self::default();
        let mut unknown = Vec::new();
        for (key, value) in pairs {
            match texts.slot(key) {
                Some(slot) => value.trim().clone_into(slot),
                None => unknown.push(key.chars().take(40).collect()),
            }
        }
        (texts, unknown)
    }

    /// Whether nothing but (perhaps) the band was given.
    pub fn is_empty(&self) -> bool {
        [
            &self.sigma,
            &self.bulge_mass,
            &self.luminosity,
            &self.mass,
            &self.distance,
            &self.resolution,
            &self.log_l5100_erg_s,
            &self.activity,
        ]
        .iter()
        .all(|s| s.is_empty())
    }
}

/// An object's values as read; a field that was left empty or could not be read is None.
#[derive(Debug, Clone, Default)]
pub struct ObjectValues {
    /// log10 σ/(km/s).
    pub sigma: Option<Entry>,
    /// log10 M_bulge/M☉.
    pub bulge_mass: Option<Entry>,
    /// log10 L/L☉ in `band`.
    pub luminosity: Option<Entry>,
    /// A band the catalog has luminosities in.
    pub band: Option<String>,
    /// log10 M_BH/M☉ (or an upper limit).
    pub mass: Option<Entry>,
    /// Distance, Mpc.
    pub distance: Option<LinearEntry>,
    /// Resolution, arcsec.
    pub resolution: Option<LinearEntry>,
    /// log10 λL_λ(5100 Å), erg/s.
    pub log_l5100_erg_s: Option<f64>,
    /// The nucleus' activity class.
    pub activity: Option<Activity>,
}

/// The range of log10 λL(5100 Å) accepted, erg/s (the catalog's, migration 9).
pub const LOG_L5100_RANGE: (f64, f64) = (38.0, 49.0);

/// Reads log10 λL(5100 Å) in erg/s; empty text is None.
///
/// # Errors
/// One sentence saying what to type instead.
pub fn read_log_l5100(text: &str) -> Result<Option<f64>, String> {
    if text.is_empty() {
        return Ok(None);
    }
    match text.trim().parse::<f64>() {
        Ok(v) if (LOG_L5100_RANGE.0..=LOG_L5100_RANGE.1).contains(&v) => Ok(Some(v)),
        _ => Err(format!(
            "Type log10 of λL(5100 Å) in erg/s, a number from {} to {}, such as 44.2.",
            LOG_L5100_RANGE.0, LOG_L5100_RANGE.1
        )),
    }
}

/// Reads a log-canonical entry; empty text is None. Only the black-hole mass may be an upper
/// limit.
///
/// # Errors
/// One sentence saying why the text cannot be read.
pub fn read_entry(text: &str, quantity: Quantity) -> Result<Option<Entry>, String> {
    if text.is_empty() {
        return Ok(None);
    }
    let entry = parse_entry(text, quantity, Scale::Auto).map_err(|e| e.to_string())?;
    if entry.upper_limit && quantity != Quantity::BlackHoleMass {
        return Err(format!(
            "The {quantity} cannot be an upper limit here; only the black-hole mass can."
        ));
    }
    Ok(Some(entry))
}

/// Reads a linear entry (distance, resolution); empty text is None.
///
/// # Errors
/// One sentence saying why the text cannot be read.
pub fn read_linear(text: &str, quantity: Quantity) -> Result<Option<LinearEntry>, String> {
    if text.is_empty() {
        return Ok(None);
    }
    parse_linear(text, quantity)
        .map(Some)
        .map_err(|e| e.to_string())
}

/// Reads every field of `texts`; `bands` are the bands the catalog has luminosities in. Every
/// field that cannot be read is a [`FieldError`] named as in [`OBJECT_FIELDS`]; the others are
/// read regardless.
pub fn read_object(texts: &ObjectTexts, bands: &[String]) -> (ObjectValues, Vec<FieldError>) {
    let mut values = ObjectValues::default();
    let mut faults = Vec::new();
    let mut keep = |name: &str, fault: Option<String>| {
        if let Some(message) = fault {
            faults.push(FieldError::new(name, message));
        }
    };
    let log = |text: &str, q| read_entry(text, q);
    let r = log(&texts.sigma, Quantity::VelocityDispersion);
    keep("sigma", r.as_ref().err().cloned());
    values.sigma = r.ok().flatten();
    let r = log(&texts.bulge_mass, Quantity::BulgeMass);
    keep("bulge_mass", r.as_ref().err().cloned());
    values.bulge_mass = r.ok().flatten();
    let r = log(&texts.luminosity, Quantity::BulgeLuminosity);
    keep("luminosity", r.as_ref().err().cloned());
    values.luminosity = r.ok().flatten();
    let r = log(&texts.mass, Quantity::BlackHoleMass);
    keep("mass", r.as_ref().err().cloned());
    values.mass = r.ok().flatten();
    let r = read_linear(&texts.distance, Quantity::Distance);
    keep("distance", r.as_ref().err().cloned());
    values.distance = r.ok().flatten();
    let r = read_linear(&texts.resolution, Quantity::Resolution);
    keep("resolution", r.as_ref().err().cloned());
    values.resolution = r.ok().flatten();
    let r = read_log_l5100(&texts.log_l5100_erg_s);
    keep("log_l5100_erg_s", r.as_ref().err().cloned());
    values.log_l5100_erg_s = r.ok().flatten();
    if !texts.activity.is_empty() {
        match texts.activity.parse::<Activity>() {
            Ok(a) => values.activity = Some(a),
            Err(e) => keep("activity", Some(format!("Activity class: {e}"))),
        }
    }
    if texts.band.is_empty() {
        if !texts.luminosity.is_empty() {
            keep("band", Some("Give the band of the luminosity.".to_owned()));
        }
    } else {
        match bands.iter().find(|b| b.eq_ignore_ascii_case(&texts.band)) {
            Some(b) => values.band = Some(b.clone()),
            None => keep(
                "band",
                Some(if bands.is_empty() {
                    "The catalog has no bulge luminosities, so no band can be used.".to_owned()
                } else {
                    format!("The catalog has luminosities in {} only.", bands.join(", "))
                }),
            ),
        }
    }
    (values, faults)
}

impl ObjectValues {
    /// The host values `relation` uses, if the object has them: x, and x2 for the plane
    /// (a luminosity only for the relation of its own band).
    pub fn host_values(&self, relation: &Relation) -> Option<(&Entry, Option<&Entry>)> {
        match relation {
            Relation::MSigma => self.sigma.as_ref().map(|x| (x, None)),
            Relation::MBulge => self.bulge_mass.as_ref().map(|x| (x, None)),
            Relation::Luminosity(b) => self
                .luminosity
                .as_ref()
                .filter(|_| self.band.as_ref() == Some(b))
                .map(|x| (x, None)),
            Relation::SigmaBulgePlane => match (&self.sigma, &self.bulge_mass) {
                (Some(s), Some(b)) => Some((s, Some(b))),
                _ => None,
            },
        }
    }

    /// The object as a [`Subject`] of `relation`, named `name`, when it has the host values the
    /// relation needs.
    pub fn subject(&self, relation: &Relation, name: &str) -> Option<Subject> {
        let (x, x2) = self.host_values(relation)?;
        let x2_text = x2.map(Entry::display_log);
        Some(Subject {
            name: name.to_owned(),
            input: input_text(relation, &x.display_log(), x2_text.as_deref()),
            ..self.bare_subject(relation)?
        })
    }

    /// [`ObjectValues::subject`] without its name and the text of its host values, for answers
    /// that show neither (the API places batches of thousands).
    pub fn bare_subject(&self, relation: &Relation) -> Option<Subject> {
        let (x, x2) = self.host_values(relation)?;
        Some(Subject {
            name: String::new(),
            href: None,
            x: (x.log_value, x.err_dex),
            x2: x2.map(|b| (b.log_value, b.err_dex)),
            mass: self.mass.as_ref().map(SubjectMass::from_entry),
            input: String::new(),
        })
    }

    /// The Eddington quantities of the object (`relations::agn::eddington`, the galaxy page's
    /// computation): None without a λL(5100 Å); a sentence when there is no mass or it is an
    /// upper limit.
    pub fn eddington(&self) -> Option<Result<super::agn::Eddington, String>> {
        let log_l = self.log_l5100_erg_s?;
        let Some(m) = self.mass.as_ref() else {
            return Some(Err(
                "The Eddington quantities need the black-hole mass as well.".to_owned(),
            ));
        };
        if m.upper_limit {
            return Some(Err(
                "The Eddington quantities need a measured black-hole mass, not an upper limit."
                    .to_owned(),
            ));
        }
        Some(super::agn::eddington(m.log_value, log_l).ok_or_else(|| {
            "The Eddington quantities cannot be computed from these values.".to_owned()
        }))
    }

    /// The sphere-of-influence check of the object: None without a mass; a sentence when it
    /// cannot be made (σ or the distance missing, or a value out of range).
    pub fn sphere_of_influence(
        &self,
        soi_threshold: f64,
    ) -> Option<Result<SphereOfInfluence, String>> {
        let m = self.mass.as_ref()?;
        let (Some(s), Some(d)) = (&self.sigma, &self.distance) else {
            return Some(Err(
                "The sphere-of-influence check needs the velocity dispersion and the distance as well."
                    .to_owned(),
            ));
        };
        Some(
            SphereOfInfluence::from_log_mbh(
                m.log_value,
                10f64.powf(s.log_value),
                d.value,
                self.resolution.as_ref().map(|r| r.value),
                soi_threshold,
            )
            .map_err(|e| e.to_string()),
        )
    }
}

/// The object being placed, in the fit's units (log10 values, errors in dex).
#[derive(Debug, Clone, PartialEq)]
pub struct Subject {
    /// Legend text of the highlighted marker, e.g. "this object" or the galaxy's name.
    pub name: String,
    /// Its page, if it has one.
    pub href: Option<String>,
    /// The relation's host property x and its 1σ error.
    pub x: (f64, f64),
    /// The second host property (bulge mass, for the plane) and its error.
    pub x2: Option<(f64, f64)>,
    /// The black-hole mass, if known.
    pub mass: Option<SubjectMass>,
    /// What the row shows as the host value used.
    pub input: String,
}

/// A black-hole mass (or upper limit) of the object being placed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SubjectMass {
    /// log10 M☉ (for a limit, the limit).
    pub log_mbh: f64,
    /// Lower 1σ error for the chart, dex.
    pub err_minus_dex: f64,
    /// Upper 1σ error, dex.
    pub err_plus_dex: f64,
    /// Symmetric error used in z, dex.
    pub err_dex: f64,
    /// Covariance of the mass's and x's errors (a shared distance), dex².
    pub xy_cov: f64,
    /// Covariance of the mass's and x2's errors (a plane's second property), dex².
    pub x2_y_cov: f64,
    /// Whether the mass is an upper limit.
    pub upper_limit: bool,
}

impl SubjectMass {
    /// The mass of a typed entry (no shared-distance covariance: typed values are independent).
    pub fn from_entry(m: &Entry) -> SubjectMass {
        SubjectMass {
            log_mbh: m.log_value,
            err_minus_dex: m.err_minus_dex,
            err_plus_dex: m.err_plus_dex,
            err_dex: m.err_dex,
            xy_cov: 0.0,
            x2_y_cov: 0.0,
            upper_limit: m.upper_limit,
        }
    }
}

/// The host values a row says it used: x, or σ and M_bulge for the plane.
pub fn input_text(relation: &Relation, x: &str, x2: Option<&str>) -> String {
    match x2 {
        Some(b) => format!("σ: {x} log10 km/s; M_bulge: {b} log10 M☉"),
        None => format!("{x} {}", relation.x_unit()),
    }
}

/// The numbers of one placement, before they are formatted.
#[derive(Debug, Clone, PartialEq)]
pub struct PlacementNumbers {
    /// Predicted log10 M_BH with its predictive spread and 68/95 % intervals.
    pub prediction: Prediction,
    /// Observed (or limit) minus predicted log10 M_BH, dex, when the object has a mass.
    pub residual_dex: Option<f64>,
    /// The residual in units of its standard deviation, when the object has a mass.
    pub z: Option<f64>,
    /// The verdict for `z` ([`verdict`]).
    pub verdict: Option<&'static str>,
    /// For an upper limit: P(true log10 M_BH < limit).
    pub prob_below_limit: Option<f64>,
}

/// Where `subject` falls against `fit`, in numbers: the prediction at its x (`fit::predict`,
/// or `fit::predict_plane`), and with a mass its residual, z and P(below a limit)
/// (`fit::locate`, which counts a shared distance error's covariance; docs/methods.md §3.2)
/// and the verdict (common practice, docs/methods.md §6).
///
/// # Errors
/// The prediction's [`FitError`] (non-finite or negative input, a plane without x2).
pub fn placement_numbers(fit: &Fit, subject: &Subject) -> Result<PlacementNumbers, FitError> {
    let (x, x_err) = subject.x;
    let prediction = match (fit.spec.shape, subject.x2) {
        (Shape::Plane, Some((b, b_err))) => fit::predict_plane(fit, x, x_err, b, b_err),
        _ => fit::predict(fit, x, x_err),
    }?;
    let Some(m) = subject.mass else {
        return Ok(PlacementNumbers {
            prediction,
            residual_dex: None,
            z: None,
            verdict: None,
            prob_below_limit: None,
        });
    };
    let placed = fit::locate(
        fit,
        prediction,
        x,
        m.log_mbh,
        m.err_dex,
        (m.xy_cov, m.x2_y_cov),
        m.upper_limit,
    );
    Ok(PlacementNumbers {
        prediction: placed.prediction,
        residual_dex: Some(placed.residual_dex),
        z: Some(placed.z),
        verdict: Some(verdict(placed.z, m.upper_limit)),
        prob_below_limit: placed.prob_below_limit,
    })
}

/// One relation's answer for an object.
#[derive(Debug, Clone)]
pub struct Placement {
    /// The relation.
    pub relation: Relation,
    /// The object placed.
    pub subject: Subject,
    /// The fit the object was placed against (its chart is drawn from it).
    pub outcome: Arc<FitOutcome>,
    /// The numbers, or why the object could not be placed (no fit, a value out of range).
    pub numbers: Result<PlacementNumbers, String>,
    /// With a mass and when asked for: the fit with the object included (α, β, ε moved; the
    /// errors are the fit's own), or why it failed.
    pub refit: Option<Result<Fit, String>>,
    /// Whether `refit` is a real refit (false: the one-step change of a large sample).
    pub refit_exact: bool,
    /// The catalog version whose fit is still being computed, when `outcome` is an older one.
    pub computing: Option<i64>,
}

impl Placement {
    /// The fit placed against, when there is one.
    pub fn fit(&self) -> Option<&Fit> {
        self.outcome.fit.as_ref().ok()
    }
}

/// `subject` against a given fit outcome (no refit).
pub fn place_against(
    relation: &Relation,
    outcome: Arc<FitOutcome>,
    subject: &Subject,
) -> Placement {
    let numbers = match &outcome.fit {
        Ok(fit) => placement_numbers(fit, subject).map_err(|e| e.to_string()),
        Err(e) => Err(format!("No fit of this relation: {e}")),
    };
    Placement {
        relation: relation.clone(),
        subject: subject.clone(),
        outcome,
        numbers,
        refit: None,
        refit_exact: false,
        computing: None,
    }
}

/// A placement that could not be made yet: the fit it needs is still being computed.
fn computing_placement(relation: &Relation, subject: &Subject, key: FitKey) -> Placement {
    let version = key.catalog_version;
    let numbers = Err(format!(
        "Computing: the fit of catalog version {version} is under way; ask again in a few seconds."
    ));
    Placement {
        relation: relation.clone(),
        subject: subject.clone(),
        outcome: Arc::new(FitOutcome {
            key,
            sample: Arc::default(),
            fit: Err(FitError::Unsupported {
                what: format!("The fit of catalog version {version} is being computed."),
            }),
            spec: Err(FitError::Unsupported {
                what: "No fit yet.".to_owned(),
            }),
            fitted_at: String::new(),
        }),
        numbers,
        refit: None,
        refit_exact: false,
        computing: Some(version),
    }
}

/// `subject` against one relation (the structural fit of the whole catalog, from the cache),
/// and, when it has a mass and `refit` is set, the fit with it included: how accepting it would
/// move α, β and ε. The review queue orders every pending submission by |z| without refits and
/// refits only the page it shows.
///
/// # Errors
/// When the catalog cannot be read or a fitting task fails.
pub async fn place(
    catalog: &Catalog,
    relation: &Relation,
    subject: &Subject,
    refit: bool,
) -> AppResult<Placement> {
    place_within(catalog, relation, subject, refit, REQUEST_WAIT).await
}

/// The fit cache's name for a fit's [`fit::AddingBase`] (what adding one object to the sample
/// needs from the sample, made once per fit).
pub const ADDING_BASE: &str = "adding one object";

/// As [`place`], waiting at most `wait` for a fit being computed.
///
/// # Errors
/// As [`place`].
pub async fn place_within(
    catalog: &Catalog,
    relation: &Relation,
    subject: &Subject,
    refit: bool,
    wait: std::time::Duration,
) -> AppResult<Placement> {
    let pivots = (relation.default_pivot(), relation.default_pivot2());
    let choice = (
        relation,
        Method::Structural,
        &SampleFilter::default(),
        pivots,
    );
    let (outcome, computing) = match catalog.fitted_within(choice, Some(wait)).await? {
        Ok(outcome) => (outcome, None),
        // Being computed: the newest earlier fit (its catalog version goes with it), or a
        // placement that says so.
        Err(key) => match catalog.fits.latest(&key) {
            Some(older) => (older, Some(key.catalog_version)),
            None => return Ok(computing_placement(relation, subject, key)),
        },
    };
    let mut placement = place_against(relation, outcome, subject);
    placement.computing = computing;
    let (Some(m), Some(fit), true) = (subject.mass, placement.fit(), refit) else {
        return Ok(placement);
    };
    let (x, x_err) = subject.x;
    let mut point = if m.upper_limit {
        Point::limit(x, x_err, m.log_mbh)
    } else {
        Point::new(x, x_err, m.log_mbh, m.err_dex)
    };
    if let Some((b, b_err)) = subject.x2 {
        point = point.with_x2(b, b_err);
    }
    // How the fit moves with the object in: an exact refit of a small sample, the one-step
    // change above `fit::influence::EXACT_MAX_N` objects (docs/methods.md §6.1) from the
    // sample's derivatives at the maximum, kept once per fit in the cache, so placing an
    // object costs the same against 100 or 100,000 catalog objects.
    let n = placement.outcome.sample.points.len();
    if n > fit::influence::EXACT_MAX_N && !fit::influence::has_one_step(&fit.spec) {
        // No one-step change for this model, and a refit of a survey-sized sample is too
        // dear for a request.
        placement.refit = Some(Err(format!(
            "Not computed: this relation's fit of {n} objects has no one-step estimate, and a refit per request would take too long."
        )));
        return Ok(placement);
    }
    let (outcome, fit) = (placement.outcome.clone(), fit.clone());
    let new = point.named("new object");
    let fits = catalog.fits.clone();
    let moved = tokio::task::spawn_blocking(move || {
        let points = &outcome.sample.points;
        let base = fits.made_from(&outcome.key, ADDING_BASE, || {
            fit::AddingBase::new(points, &fit.spec, &fit)
        });
        let shift = match base.as_ref() {
            Ok(base) => base.shift(points, &new),
            Err(e) => Err(e.clone()),
        };
        shift.map(|shift| {
            (
                fit.shifted(
                    shift.d_alpha,
                    shift.d_beta,
                    shift.d_beta2.or(shift.d_gamma),
                    shift.d_eps,
                ),
                shift.exact,
            )
        })
    })
    .await
    .map_err(anyhow::Error::from)?;
    placement.refit_exact = moved.as_ref().is_ok_and(|(_, exact)| *exact);
    placement.refit = Some(
        moved
            .map(|(f, _)| f)
            .map_err(|e| format!("The refit failed: {e}")),
    );
    Ok(placement)
}

/// The object against every relation it has values for, side by side on the cores (each
/// relation's refit on its own task), in the relations' order; `then` runs on each placement in
/// its task (the place page draws the relation's chart there, so the charts are drawn side by
/// side too).
///
/// # Errors
/// As [`place`].
pub async fn place_everywhere<T, F>(
    catalog: &Catalog,
    relations: Vec<Relation>,
    values: &ObjectValues,
    name: &str,
    then: F,
) -> AppResult<Vec<T>>
where
    T: Send + 'static,
    F: Fn(Placement) -> T + Clone + Send + 'static,
{
    let mut tasks = tokio::task::JoinSet::new();
    for (index, relation) in relations.into_iter().enumerate() {
        let Some(subject) = values.subject(&relation, name) else {
            continue;
        };
        let (catalog, then) = (catalog.clone(), then.clone());
        tasks.spawn(async move {
            let placed = place(&catalog, &relation, &subject, true).await;
            (index, placed.map(then))
        });
    }
    let mut done = Vec::new();
    while let Some(joined) = tasks.join_next().await {
        let (index, placed) = joined.map_err(anyhow::Error::from)?;
        done.push((index, placed?));
    }
    done.sort_by_key(|(index, _)| *index);
    Ok(done.into_iter().map(|(_, p)| p).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdicts_follow_the_stated_thresholds() {
        // Common practice (docs/methods.md §6): |z| < 2 consistent, 2–3 tension, ≥ 3 outlier.
        assert_eq!(verdict(1.99, false), "consistent");
        assert_eq!(verdict(-2.0, false), "in tension");
        assert_eq!(verdict(3.0, false), "outlier");
        assert_eq!(verdict(5.0, true), "consistent");
        assert_eq!(verdict(-2.5, true), "in tension (limit below)");
        assert!(is_flagged(-2.0, false) && !is_flagged(1.99, false));
        assert!(!is_flagged(5.0, true) && is_flagged(-2.0, true));
    }

    #[test]
    fn an_object_keeps_what_was_typed_and_names_unknown_fields_and_bad_values() {
        let pairs = vec![
            ("sigma".to_owned(), " 200 ± 10 ".to_owned()),
            ("mass".to_owned(), "<2e7".to_owned()),
            ("colour".to_owned(), "red".to_owned()),
        ];
        let (texts, unknown) = ObjectTexts::from_pairs(&pairs);
        assert_eq!(texts.sigma, "200 ± 10");
        assert_eq!(unknown, vec!["colour".to_owned()]);
        assert!(!texts.is_empty());
        let (values, faults) = read_object(&texts, &[]);
        assert!(faults.is_empty(), "{faults:?}");
        let mass = values.mass.unwrap();
        assert!(mass.upper_limit);
        assert_eq!(
            crate::units::format_log_with_errors(
                mass.log_value,
                mass.err_minus_dex,
                mass.err_plus_dex,
                mass.upper_limit
            ),
            "< 7.30"
        );
        assert!(read_entry("<200", Quantity::VelocityDispersion).is_err());
        assert!(
            read_entry("", Quantity::VelocityDispersion)
                .unwrap()
                .is_none()
        );
        let bad = ObjectTexts {
            luminosity: "5e10".to_owned(),
            band: "Q".to_owned(),
            ..ObjectTexts::default()
        };
        let (_, faults) = read_object(&bad, &["K".to_owned()]);
        assert_eq!(faults.len(), 1);
        assert_eq!(faults[0].field, "band");
        assert_eq!(faults[0].message, "The catalog has luminosities in K only.");
    }
}
