//! `/place`: where one object falls against every relation it has values for.
//!
//! Everything is read from the query string (a GET form), so a link reproduces the page;
//! nothing is stored. For each usable relation (structural fit of the whole catalog, from the
//! fit cache) the page gives the predicted log M_BH with 68 % and 95 % predictive intervals,
//! and, with a mass, its residual, z-score and verdict, and how a refit with the object would
//! move α, β and ε; and each relation's chart with the object highlighted (the plane drawn as
//! log M_BH − γ (x2 − x02) against σ, as on its relation page). [`place_against`] is shared
//! with the galaxy page, which places a catalog galaxy against fits made without it.
//!
//! ```text
//! ŷ = α + β (x − x0) [+ γ (x2 − x02)]
//! s_pred² = ε² + gᵀ C g + β² σ_x² [+ γ² σ_x2²]                (fit::predict)
//! r = y − ŷ,  z = r / √(s_pred² + σ_y² − 2 β σ_xy)            (σ_xy = 0 for typed values)
//! limit: P(true log M_BH < y_lim) = Φ((y_lim − ŷ) / s_pred)
//! verdict: |z| < 2 consistent, 2 ≤ |z| < 3 in tension, |z| ≥ 3 outlier (common practice,
//! docs/methods.md §6)
//! ```

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};

use super::display::{fixed, significant};
use crate::astro::SphereOfInfluence;
use crate::catalog::relation_rows;
use crate::charts::{ChartPoint, relation_svg};
use crate::error::{AppError, AppResult};
use crate::fit::{self, Method, Point, Prediction, Shape};
use crate::relations::{FitOutcome, Relation, SampleFilter, fitted};
use crate::startup::AppState;
use crate::units::{Entry, LinearEntry, Quantity, Scale, parse_entry, parse_linear};

/// |z| from which an object is "in tension" with a relation (common practice, docs/methods.md §6).
pub(crate) const TENSION_Z: f64 = 2.0;
/// |z| from which an object is an outlier (common practice, docs/methods.md §6).
pub(crate) const OUTLIER_Z: f64 = 3.0;

const PLACE_PARAMS: &str = "sigma, bulge_mass, luminosity, band, mass, distance, resolution";

/// The form as typed (text kept for redisplay).
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct PlaceForm {
    sigma: String,
    bulge_mass: String,
    luminosity: String,
    band: String,
    mass: String,
    distance: String,
    resolution: String,
}

impl PlaceForm {
    fn parse(pairs: &[(String, String)]) -> Result<PlaceForm, String> {
        let mut form = PlaceForm::default();
        let mut unknown = Vec::new();
        for (key, value) in pairs {
            let slot = match key.as_str() {
                "sigma" => &mut form.sigma,
                "bulge_mass" => &mut form.bulge_mass,
                "luminosity" => &mut form.luminosity,
                "band" => &mut form.band,
                "mass" => &mut form.mass,
                "distance" => &mut form.distance,
                "resolution" => &mut form.resolution,
                other => {
                    unknown.push(other.chars().take(40).collect::<String>());
                    continue;
                }
            };
            value.trim().clone_into(slot);
        }
        if unknown.is_empty() {
            Ok(form)
        } else {
            Err(format!(
                "'{}' is not a parameter of this page (it accepts {PLACE_PARAMS}).",
                unknown.join("', '")
            ))
        }
    }

    fn is_empty(&self) -> bool {
        [
            &self.sigma,
            &self.bulge_mass,
            &self.luminosity,
            &self.mass,
            &self.distance,
            &self.resolution,
        ]
        .iter()
        .all(|s| s.is_empty())
    }
}

/// The values read from the form; a field that failed or was left empty is None.
#[derive(Debug, Clone, Default)]
pub(crate) struct Inputs {
    pub(crate) sigma: Option<Entry>,
    pub(crate) bulge_mass: Option<Entry>,
    pub(crate) luminosity: Option<Entry>,
    pub(crate) band: Option<String>,
    pub(crate) mass: Option<Entry>,
    pub(crate) distance: Option<LinearEntry>,
    pub(crate) resolution: Option<LinearEntry>,
}

impl Inputs {
    /// The host values `relation` uses, if the object has them: x, and x2 for the plane
    /// (a luminosity only for the relation of its own band).
    pub(crate) fn host_values(&self, relation: &Relation) -> Option<(&Entry, Option<&Entry>)> {
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
}

/// Reads a log-canonical entry; limits only for the black-hole mass.
pub(crate) fn read_entry(text: &str, quantity: Quantity) -> Result<Option<Entry>, String> {
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
pub(crate) fn read_linear(text: &str, quantity: Quantity) -> Result<Option<LinearEntry>, String> {
    if text.is_empty() {
        return Ok(None);
    }
    parse_linear(text, quantity)
        .map(Some)
        .map_err(|e| e.to_string())
}

/// One field of the form.
pub(crate) struct FieldView {
    name: &'static str,
    label: &'static str,
    hint: &'static str,
    value: String,
    error: Option<String>,
    read_as: Option<String>,
}

/// A band option.
pub(crate) struct BandOption {
    value: String,
    selected: bool,
}

/// One relation's answer.
pub(crate) struct PlaceRow {
    pub(crate) label: String,
    pub(crate) slug: String,
    pub(crate) input: String,
    pub(crate) predicted: String,
    pub(crate) interval68: String,
    pub(crate) interval95: String,
    pub(crate) residual: Option<String>,
    pub(crate) z: Option<String>,
    /// |z| as a number, for ordering (the review queue).
    pub(crate) z_abs: Option<f64>,
    pub(crate) verdict: Option<&'static str>,
    pub(crate) prob_below: Option<String>,
    pub(crate) refit: Option<String>,
    pub(crate) problem: Option<String>,
}

/// The sphere-of-influence check.
pub(crate) struct SoiView {
    radius_pc: String,
    theta_arcsec: String,
    ratio: String,
    verdict: &'static str,
}

/// `/place`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/place.html")]
pub(crate) struct PlacePage {
    nav: super::Nav,
    fields: Vec<FieldView>,
    band_options: Vec<BandOption>,
    band_error: Option<String>,
    asked: bool,
    rows: Vec<PlaceRow>,
    soi: Option<SoiView>,
    soi_note: Option<String>,
    soi_threshold: String,
    charts: Vec<PlaceChart>,
    nothing_usable: bool,
}

/// A verdict for a z-score (thresholds: common practice, docs/methods.md §6).
pub(crate) fn verdict(z: f64, upper_limit: bool) -> &'static str {
    if upper_limit {
        // A limit above the prediction says nothing against the relation.
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

fn interval(bounds: (f64, f64)) -> String {
    format!("{} to {}", fixed(bounds.0, 2), fixed(bounds.1, 2))
}

fn signed(value: f64, decimals: usize) -> String {
    let text = fixed(value, decimals);
    if value >= 0.0 && !text.starts_with('−') {
        format!("+{text}")
    } else {
        text
    }
}

/// Show the place form and, when values were given, where the object falls.
pub(crate) async fn show_place(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<PlacePage> {
    let Query(pairs) = query.map_err(|e| {
        AppError::bad_request(format!("The address's parameters could not be read: {e}."))
    })?;
    let form = PlaceForm::parse(&pairs).map_err(AppError::bad_request)?;
    let bands: Vec<String> = relation_rows::luminosity_bands(&state.pool)
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();

    let mut inputs = Inputs::default();
    let mut fields = Vec::new();
    let mut field = |name, label, hint, text: &str, result: Result<Option<String>, String>| {
        let (error, read_as) = match result {
            Ok(read) => (None, read),
            Err(e) => (Some(e), None),
        };
        fields.push(FieldView {
            name,
            label,
            hint,
            value: text.to_owned(),
            error,
            read_as,
        });
    };
    let shown = |e: &Entry, unit: &str| format!("{} {unit}", e.display_log());
    let r = read_entry(&form.sigma, Quantity::VelocityDispersion);
    field(
        "sigma",
        "Velocity dispersion σ_e",
        "km/s, e.g. 210 ± 10",
        &form.sigma,
        r.clone().map(|o| o.map(|e| shown(&e, "log10 km/s"))),
    );
    inputs.sigma = r.ok().flatten();
    let r = read_entry(&form.bulge_mass, Quantity::BulgeMass);
    field(
        "bulge_mass",
        "Bulge mass",
        "M☉, e.g. 2e11 ± 10%",
        &form.bulge_mass,
        r.clone().map(|o| o.map(|e| shown(&e, "log10 M☉"))),
    );
    inputs.bulge_mass = r.ok().flatten();
    let r = read_entry(&form.luminosity, Quantity::BulgeLuminosity);
    field(
        "luminosity",
        "Bulge luminosity",
        "L☉ of the band, e.g. 5e10 ± 1e10",
        &form.luminosity,
        r.clone().map(|o| o.map(|e| shown(&e, "log10 L☉"))),
    );
    inputs.luminosity = r.ok().flatten();
    let r = read_entry(&form.mass, Quantity::BlackHoleMass);
    field(
        "mass",
        "Black-hole mass or upper limit",
        "M☉, e.g. 3.2e8 +0.5e8/-0.3e8 or <2e7",
        &form.mass,
        r.clone().map(|o| o.map(|e| shown(&e, "log10 M☉"))),
    );
    inputs.mass = r.ok().flatten();
    let r = read_linear(&form.distance, Quantity::Distance);
    field(
        "distance",
        "Distance",
        "Mpc, e.g. 16.5 ± 0.8",
        &form.distance,
        r.clone().map(|o| {
            o.map(|e| format!("{} Mpc", crate::units::round_to_uncertainty(e.value, e.err)))
        }),
    );
    inputs.distance = r.ok().flatten();
    let r = read_linear(&form.resolution, Quantity::Resolution);
    field(
        "resolution",
        "Spatial resolution",
        "arcsec, e.g. 0.1",
        &form.resolution,
        r.clone()
            .map(|o| o.map(|e| format!("{}″", significant(e.value, 3)))),
    );
    inputs.resolution = r.ok().flatten();

    let mut band_error = None;
    if !form.band.is_empty() {
        match bands.iter().find(|b| b.eq_ignore_ascii_case(&form.band)) {
            Some(b) => inputs.band = Some(b.clone()),
            None => {
                band_error = Some(if bands.is_empty() {
                    "The catalog has no bulge luminosities, so no band can be used.".to_owned()
                } else {
                    format!("The catalog has luminosities in {} only.", bands.join(", "))
                });
            }
        }
    }
    if inputs.luminosity.is_some() && inputs.band.is_none() && band_error.is_none() {
        band_error = Some("Choose the band of the luminosity.".to_owned());
    }

    let asked = !form.is_empty();
    let mut rows = Vec::new();
    let mut charts = Vec::new();
    let mut placements = tokio::task::JoinSet::new();
    if asked {
        for (index, relation) in Relation::all(&bands).into_iter().enumerate() {
            let Some((x, x2)) = inputs.host_values(&relation) else {
                continue;
            };
            // Each relation (its refit with the object, its chart) on its own task, so the
            // relations are placed side by side on the cores; shown in the relations' order.
            let state = state.clone();
            let (x, x2, mass) = (x.clone(), x2.cloned(), inputs.mass.clone());
            placements.spawn(async move {
                let placed = place_on(&state, &relation, &x, x2.as_ref(), mass.as_ref()).await;
                (index, placed)
            });
        }
    }
    let mut done = Vec::new();
    while let Some(joined) = placements.join_next().await {
        let (index, placed) = joined.map_err(anyhow::Error::from)?;
        done.push((index, placed?));
    }
    done.sort_by_key(|(index, _)| *index);
    for (_, placed) in done {
        rows.push(placed.row);
        charts.extend(placed.chart);
    }

    // Sphere of influence: needs the mass, σ and the distance; the ratio needs the resolution.
    let mut soi = None;
    let mut soi_note = None;
    if let (Some(m), Some(s), Some(d)) = (&inputs.mass, &inputs.sigma, &inputs.distance) {
        match SphereOfInfluence::from_log_mbh(
            m.log_value,
            10f64.powf(s.log_value),
            d.value,
            inputs.resolution.as_ref().map(|r| r.value),
            state.settings.soi_threshold,
        ) {
            Ok(sp) => {
                soi = Some(SoiView {
                    radius_pc: significant(sp.radius_pc, 3),
                    theta_arcsec: significant(sp.theta_arcsec, 3),
                    ratio: sp.ratio.map_or("—".into(), |r| significant(r, 2)),
                    verdict: match sp.resolved {
                        Some(true) => "resolved",
                        Some(false) => "not resolved",
                        None => "unknown (no resolution given)",
                    },
                });
            }
            Err(e) => soi_note = Some(e.to_string()),
        }
    } else if asked && inputs.mass.is_some() {
        soi_note = Some(
            "The sphere-of-influence check needs the velocity dispersion and the distance as well."
                .to_owned(),
        );
    }

    let nothing_usable = asked && rows.is_empty();
    Ok(PlacePage {
        nav,
        fields,
        band_options: bands
            .iter()
            .map(|b| BandOption {
                value: b.clone(),
                selected: inputs.band.as_ref() == Some(b),
            })
            .collect(),
        band_error,
        asked,
        rows,
        soi,
        soi_note,
        soi_threshold: significant(state.settings.soi_threshold, 2),
        charts,
        nothing_usable,
    })
}

/// The object being placed, in the fit's units (log10 values, errors in dex).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Subject {
    /// Legend text of the highlighted marker, e.g. "this object" or the galaxy's name.
    pub(crate) name: String,
    /// Its page, if it has one.
    pub(crate) href: Option<String>,
    /// The relation's host property x and its 1σ error.
    pub(crate) x: (f64, f64),
    /// The second host property (bulge mass, for the plane) and its error.
    pub(crate) x2: Option<(f64, f64)>,
    /// The black-hole mass, if known.
    pub(crate) mass: Option<SubjectMass>,
    /// What the row shows as the host value used.
    pub(crate) input: String,
}

/// A black-hole mass (or upper limit) of the object being placed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct SubjectMass {
    /// log10 M☉ (for a limit, the limit).
    pub(crate) log_mbh: f64,
    /// Lower and upper 1σ errors for the chart, dex.
    pub(crate) err_minus_dex: f64,
    /// Upper 1σ error, dex.
    pub(crate) err_plus_dex: f64,
    /// Symmetric error used in z, dex.
    pub(crate) err_dex: f64,
    /// Covariance of the mass's and x's errors (a shared distance), dex².
    pub(crate) xy_cov: f64,
    /// Whether the mass is an upper limit.
    pub(crate) upper_limit: bool,
}

impl SubjectMass {
    /// The mass of a typed entry (no shared-distance covariance: typed values are independent).
    pub(crate) fn from_entry(m: &Entry) -> SubjectMass {
        SubjectMass {
            log_mbh: m.log_value,
            err_minus_dex: m.err_minus_dex,
            err_plus_dex: m.err_plus_dex,
            err_dex: m.err_dex,
            xy_cov: 0.0,
            upper_limit: m.upper_limit,
        }
    }
}

/// The host values a row says it used: x, or σ and M_bulge for the plane.
pub(crate) fn input_text(relation: &Relation, x: &str, x2: Option<&str>) -> String {
    match x2 {
        Some(b) => format!("σ: {x} log10 km/s; M_bulge: {b} log10 M☉"),
        None => format!("{x} {}", relation.x_unit()),
    }
}

/// A relation chart with the object highlighted.
pub(crate) struct PlaceChart {
    pub(crate) label: String,
    pub(crate) slug: String,
    pub(crate) svg: String,
}

/// One relation's answer for an object, and its chart.
pub(crate) struct Placed {
    /// The table row.
    pub(crate) row: PlaceRow,
    /// The relation chart with the object highlighted, when it could be drawn.
    pub(crate) chart: Option<PlaceChart>,
}

/// The numbers of one placement, before they are formatted: what the place page shows and the
/// JSON API answers.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct PlacementNumbers {
    /// Predicted log10 M_BH with its predictive spread and 68/95 % intervals.
    pub(crate) prediction: Prediction,
    /// Observed (or limit) minus predicted log10 M_BH, dex, when the object has a mass.
    pub(crate) residual_dex: Option<f64>,
    /// The residual in units of its standard deviation, when the object has a mass.
    pub(crate) z: Option<f64>,
    /// The verdict for `z` ([`verdict`]).
    pub(crate) verdict: Option<&'static str>,
    /// For an upper limit: P(true log10 M_BH < limit).
    pub(crate) prob_below_limit: Option<f64>,
}

/// Where `subject` falls against `fit`, in numbers.
///
/// ```text
/// ŷ, s_pred                      fit::predict / fit::predict_plane
/// r = y − ŷ
/// z = r / √(s_pred² + σ_y² − 2 β σ_xy)     σ_xy: a shared distance error (docs/methods.md §3.2)
/// limit: P(true log M_BH < y_lim) = Φ(r / s_pred)
/// ```
/// dex throughout; verdict thresholds in [`verdict`] (common practice, docs/methods.md §6).
///
/// # Errors
/// The prediction's [`fit::FitError`] (non-finite or negative input, a plane without x2).
pub(crate) fn placement_numbers(
    fit: &fit::Fit,
    subject: &Subject,
) -> Result<PlacementNumbers, fit::FitError> {
    let (x, x_err) = subject.x;
    let prediction = match (fit.spec.shape, subject.x2) {
        (Shape::Plane, Some((b, b_err))) => fit::predict_plane(fit, x, x_err, b, b_err),
        _ => fit::predict(fit, x, x_err),
    }?;
    let mut numbers = PlacementNumbers {
        prediction,
        residual_dex: None,
        z: None,
        verdict: None,
        prob_below_limit: None,
    };
    if let Some(m) = subject.mass {
        let prediction = &numbers.prediction;
        let r = m.log_mbh - prediction.log_mbh;
        let var = prediction.sd_dex.powi(2) + m.err_dex.powi(2) - 2.0 * fit.params.beta * m.xy_cov;
        let z = if var > 0.0 { r / var.sqrt() } else { 0.0 };
        if m.upper_limit && prediction.sd_dex > 0.0 {
            // P(true < y_lim) = Φ(r / s_pred).
            numbers.prob_below_limit = Some(
                0.5 * statrs::function::erf::erfc(
                    -r / (prediction.sd_dex * std::f64::consts::SQRT_2),
                ),
            );
        }
        numbers.residual_dex = Some(r);
        numbers.z = Some(z);
        numbers.verdict = Some(verdict(z, m.upper_limit));
    }
    Ok(numbers)
}

/// Where `subject` falls against the fit in `outcome`: prediction, residual, z, verdict,
/// P(below a limit), and the relation chart with the subject highlighted (for the plane, the
/// chart's y is log M_BH − γ (x2 − x02), as on the relation page).
///
/// ```text
/// ŷ, s_pred                      fit::predict / fit::predict_plane
/// r = y − ŷ
/// z = r / √(s_pred² + σ_y² − 2 β σ_xy)     σ_xy: a shared distance error (docs/methods.md §3.2)
/// limit: P(true log M_BH < y_lim) = Φ(r / s_pred)
/// ```
/// dex throughout; verdict thresholds in [`verdict`].
pub(crate) fn place_against(
    relation: &Relation,
    outcome: &FitOutcome,
    subject: &Subject,
) -> Placed {
    let mut row = PlaceRow {
        label: relation.label(),
        slug: relation.slug(),
        input: subject.input.clone(),
        predicted: "—".into(),
        interval68: "—".into(),
        interval95: "—".into(),
        residual: None,
        z: None,
        z_abs: None,
        verdict: None,
        prob_below: None,
        refit: None,
        problem: None,
    };
    let fit = match &outcome.fit {
        Ok(f) => f,
        Err(e) => {
            row.problem = Some(format!("No fit of this relation: {e}"));
            return Placed { row, chart: None };
        }
    };
    let (x, x_err) = subject.x;
    let numbers = match placement_numbers(fit, subject) {
        Ok(n) => n,
        Err(e) => {
            row.problem = Some(e.to_string());
            return Placed { row, chart: None };
        }
    };
    let prediction = &numbers.prediction;
    row.predicted = format!(
        "{} ± {}",
        fixed(prediction.log_mbh, 2),
        fixed(prediction.sd_dex, 2)
    );
    row.interval68 = interval(prediction.interval68);
    row.interval95 = interval(prediction.interval95);

    if let (Some(m), Some(r), Some(z)) = (subject.mass, numbers.residual_dex, numbers.z) {
        row.residual = Some(if m.upper_limit {
            format!("< {}", signed(r, 2))
        } else {
            signed(r, 2)
        });
        row.z = Some(signed(z, 1));
        row.z_abs = Some(z.abs());
        row.verdict = numbers.verdict;
        if let Some(p) = numbers.prob_below_limit {
            row.prob_below = Some(format!("{}%", significant(100.0 * p, 2)));
        }
    }

    let mut chart =
        super::relations::relation_chart(relation, outcome, super::relations::Grouping::Morphology);
    let mut at = Point::new(
        x,
        x_err,
        subject.mass.map_or(prediction.log_mbh, |m| m.log_mbh),
        0.0,
    );
    if let Some((b, b_err)) = subject.x2 {
        at = at.with_x2(b, b_err);
    }
    chart.highlight = Some(ChartPoint {
        name: subject.name.clone(),
        href: subject.href.clone(),
        x,
        x_err,
        y: super::relations::chart_y(Some(fit), &at),
        y_err_minus: subject.mass.map_or(prediction.sd_dex, |m| m.err_minus_dex),
        y_err_plus: subject.mass.map_or(prediction.sd_dex, |m| m.err_plus_dex),
        upper_limit: subject.mass.is_some_and(|m| m.upper_limit),
        group: 0,
    });
    let chart = relation_svg(&chart).ok().map(|svg| PlaceChart {
        label: relation.label(),
        slug: relation.slug(),
        svg,
    });
    Placed { row, chart }
}

/// The object against one relation (the structural fit of the whole catalog), with how a
/// refit with the object would move the relation.
async fn place_on(
    state: &AppState,
    relation: &Relation,
    x: &Entry,
    x2: Option<&Entry>,
    mass: Option<&Entry>,
) -> AppResult<Placed> {
    let x2_text = x2.map(Entry::display_log);
    let subject = Subject {
        name: "this object".to_owned(),
        href: None,
        x: (x.log_value, x.err_dex),
        x2: x2.map(|b| (b.log_value, b.err_dex)),
        mass: mass.map(SubjectMass::from_entry),
        input: input_text(relation, &x.display_log(), x2_text.as_deref()),
    };
    place_with_refit(state, relation, &subject).await
}

/// `subject` against one relation (the structural fit of the whole catalog, from the cache),
/// and, when it has a mass, how a refit with it included would move α, β and ε: the place
/// page and the review of submissions both use it.
pub(crate) async fn place_with_refit(
    state: &AppState,
    relation: &Relation,
    subject: &Subject,
) -> AppResult<Placed> {
    place_on_relation(state, relation, subject, true).await
}

/// [`place_with_refit`], with the refit only when `refit` is set (the review queue orders every
/// pending submission by |z| first, and refits only the page it shows).
pub(crate) async fn place_on_relation(
    state: &AppState,
    relation: &Relation,
    subject: &Subject,
    refit: bool,
) -> AppResult<Placed> {
    let filter = SampleFilter::default();
    let pivots = (relation.default_pivot(), relation.default_pivot2());
    let outcome = fitted(
        &state.pool,
        &state.fits,
        state.settings.soi_threshold,
        relation,
        Method::Structural,
        &filter,
        pivots,
    )
    .await?;
    let mut placed = place_against(relation, &outcome, subject);
    let (Some(m), Ok(fit), true) = (subject.mass, &outcome.fit, refit) else {
        return Ok(placed);
    };
    let (x, x_err) = subject.x;
    // The refit with the object included: how accepting it would move the relation.
    let mut point = if m.upper_limit {
        Point::limit(x, x_err, m.log_mbh)
    } else {
        Point::new(x, x_err, m.log_mbh, m.err_dex)
    };
    if let Some((b, b_err)) = subject.x2 {
        point = point.with_x2(b, b_err);
    }
    let mut points = outcome.sample.points.clone();
    points.push(point.named("new object"));
    let spec = fit.spec.clone();
    let refit = tokio::task::spawn_blocking(move || fit::fit(&points, &spec))
        .await
        .map_err(anyhow::Error::from)?;
    placed.row.refit = Some(match refit {
        Ok(new) => format!(
            "α {} → {} ({}), β {} → {} ({}), ε {} → {} ({})",
            fixed(fit.params.alpha, 3),
            fixed(new.params.alpha, 3),
            signed(new.params.alpha - fit.params.alpha, 3),
            fixed(fit.params.beta, 2),
            fixed(new.params.beta, 2),
            signed(new.params.beta - fit.params.beta, 2),
            fixed(fit.params.eps, 3),
            fixed(new.params.eps, 3),
            signed(new.params.eps - fit.params.eps, 3),
        ),
        Err(e) => format!("The refit failed: {e}"),
    });
    Ok(placed)
}

/// The form value of a log entry for display, e.g. "8.30 ± 0.10" (used in tests).
#[cfg(test)]
fn shown_log(e: &Entry) -> String {
    crate::units::format_log_with_errors(
        e.log_value,
        e.err_minus_dex,
        e.err_plus_dex,
        e.upper_limit,
    )
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
    }

    #[test]
    fn the_form_keeps_what_was_typed_and_refuses_unknown_parameters() {
        let pairs = vec![
            ("sigma".to_owned(), " 200 ± 10 ".to_owned()),
            ("mass".to_owned(), "<2e7".to_owned()),
        ];
        let form = PlaceForm::parse(&pairs).unwrap();
        assert_eq!(form.sigma, "200 ± 10");
        assert!(!form.is_empty());
        assert!(PlaceForm::parse(&[("colour".to_owned(), "red".to_owned())]).is_err());
        let e = read_entry("<2e7", Quantity::BlackHoleMass)
            .unwrap()
            .unwrap();
        assert_eq!(shown_log(&e), "< 7.30");
        assert!(read_entry("<200", Quantity::VelocityDispersion).is_err());
        assert!(
            read_entry("", Quantity::VelocityDispersion)
                .unwrap()
                .is_none()
        );
    }
}
