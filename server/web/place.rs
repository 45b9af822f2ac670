//! `/place`: where one object falls against every relation it has values for.
//!
//! Everything is read from the query string (a GET form), so a link reproduces the page;
//! nothing is stored. The placing itself is `relations::place`; this module reads the form,
//! and shows each placement as a table row ([`PlaceRow`]) and a chart with the object
//! highlighted ([`PlaceChart`]). The galaxy page and the submission pages show their
//! placements the same way (`templates/partials/placements.html` and `placement_charts.html`).

use askama::Template;
use askama_web::WebTemplate;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};

use super::display::{
    Badge, Uncertain, fixed, probability, signed, significant, soi_badge, verdict_badge,
    with_errors,
};
use super::relations::{Grouping, chart_y, relation_chart, relation_chart_frame, shared_points};
use crate::charts::{ChartPoint, DENSITY_THRESHOLD, RelationChart, relation_svg, relation_svg_of};
use crate::error::{AppError, AppResult, FieldError};
use crate::fit::Point;
use crate::relations::bulge_ratio::{self, RatioMasses};
use crate::relations::place::{
    OBJECT_FIELDS, ObjectTexts, ObjectValues, Placement, place_everywhere, read_object,
};
use crate::relations::{FitCache, Relation};
use crate::state::AppState;
use crate::units::Entry;

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

/// One relation's answer, formatted.
pub(crate) struct PlaceRow {
    pub(crate) label: String,
    pub(crate) slug: String,
    pub(crate) input: String,
    pub(crate) predicted: String,
    pub(crate) interval68: String,
    pub(crate) interval95: String,
    pub(crate) residual: Option<String>,
    pub(crate) z: Option<String>,
    pub(crate) verdict: Option<Badge>,
    pub(crate) prob_below: Option<String>,
    pub(crate) refit: Option<String>,
    pub(crate) problem: Option<String>,
}

/// A relation chart with the object highlighted.
pub(crate) struct PlaceChart {
    pub(crate) label: String,
    pub(crate) slug: String,
    pub(crate) svg: String,
}

/// The sphere-of-influence check.
pub(crate) struct SoiView {
    radius_pc: String,
    theta_arcsec: String,
    ratio: String,
    verdict: Badge,
}

/// The Eddington quantities as every page shows them (`templates/partials/eddington.html`,
/// from `relations::agn::eddington`): each number with its unit, and the full-precision
/// number beside it for scripts (`data-value`).
pub(crate) struct EddingtonView {
    pub(crate) mass: String,
    pub(crate) l5100: String,
    pub(crate) correction: String,
    pub(crate) l_bol: (String, String),
    pub(crate) l_edd: (String, String),
    pub(crate) ratio: (String, String),
    pub(crate) efficiency: String,
    pub(crate) accretion: (String, String, String),
    /// Which mass and luminosity were used, in words (empty when the page says it).
    pub(crate) basis: String,
}

/// M_BH/M_bulge as every page shows it (`templates/partials/bulge_ratio.html`, from
/// `relations::bulge_ratio`): the ratio, the usual range and the relation's prediction, each
/// verdict with its colour, mark and words.
pub(crate) struct BulgeRatioView {
    /// "0.20 ± 0.05" or "< 0.020" (per cent).
    pub(crate) percent: String,
    /// The fraction at full precision, for scripts (`data-value`).
    pub(crate) fraction_raw: String,
    /// log10 of the ratio with its errors, dex.
    pub(crate) log_ratio: String,
    /// Which masses were used, in words.
    pub(crate) basis: String,
    /// "0.1–0.5 %".
    pub(crate) range: String,
    /// The verdict against the usual range.
    pub(crate) range_badge: Badge,
    /// The relation's prediction and its 68 % interval, when there is one (apart, so that a
    /// narrow screen can break the line between them).
    pub(crate) predicted: Option<(String, String)>,
    /// The verdict against the relation, when there is one.
    pub(crate) relation_badge: Option<Badge>,
    /// The fit's identifier and whether it was refitted without the galaxy.
    pub(crate) fit_id: Option<(String, bool)>,
    /// The comparison in one sentence.
    pub(crate) sentence: String,
}

/// The badge of a verdict against the usual range: inside (or a limit that does not test it)
/// in the consistent style, outside in the tension style; never the outlier style, since the
/// range is a rule of thumb.
pub(crate) fn range_badge(r: &crate::relations::bulge_ratio::BulgeRatio) -> Badge {
    let (class, mark) = if r.outside_usual_range {
        ("v-tension", "▲")
    } else {
        ("v-consistent", "✓")
    };
    Badge {
        class,
        mark,
        text: r.range_verdict,
    }
}

impl BulgeRatioView {
    /// The block for `r`; `at` says where the masses stand ("at the adopted distance" or "as
    /// typed").
    pub(crate) fn of(r: &crate::relations::bulge_ratio::BulgeRatio, at: &str) -> Self {
        let m = &r.masses;
        let log = |v: f64, e: (f64, f64), limit: bool| {
            with_errors(Uncertain::asymmetric(v, e.0, e.1, limit), 2)
        };
        BulgeRatioView {
            percent: r.percent_text(),
            fraction_raw: format!("{:e}", r.fraction),
            log_ratio: log(r.log_ratio, r.log_ratio_err_dex, r.upper_limit),
            basis: format!(
                "log M_BH = {} and log M_bulge = {} [M☉], {at}",
                log(m.log_mbh, m.mbh_err_dex, m.upper_limit),
                log(m.log_mbulge, m.mbulge_err_dex, false)
            ),
            range: format!(
                "{}–{} %",
                significant(r.usual_range_percent.0, 1),
                significant(r.usual_range_percent.1, 1)
            ),
            range_badge: range_badge(r),
            predicted: r
                .relation
                .as_ref()
                .map(|rel| (rel.percent_text(), rel.interval_text())),
            relation_badge: r
                .relation
                .as_ref()
                .and_then(|rel| rel.verdict)
                .map(verdict_badge),
            fit_id: r
                .relation
                .as_ref()
                .map(|rel| (rel.fit_id.clone(), rel.without_this_galaxy)),
            sentence: r.sentence.clone(),
        }
    }
}

/// `value` as "1.257 × 10⁴⁶" (four significant digits).
pub(crate) fn scientific(value: f64) -> String {
    if !value.is_finite() || value <= 0.0 {
        return significant(value, 4);
    }
    let mut exponent = value.log10().floor() as i32;
    let mut mantissa = value / 10f64.powi(exponent);
    if format!("{mantissa:.3}").starts_with("10") {
        mantissa /= 10.0;
        exponent += 1;
    }
    if (-2..=3).contains(&exponent) {
        return significant(value, 4);
    }
    let digits: String = exponent
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect();
    format!("{mantissa:.3} × 10{digits}")
}

impl EddingtonView {
    /// The block for `e`, with `basis` saying which mass and luminosity were used.
    pub(crate) fn of(e: &crate::relations::agn::Eddington, basis: String) -> Self {
        let raw = |v: f64| format!("{v:e}");
        EddingtonView {
            mass: format!("log M = {} [M☉]", fixed(e.log_mass_msun, 2)),
            l5100: format!("log λL(5100 Å) = {} [erg/s]", fixed(e.log_l5100_erg_s, 2)),
            correction: significant(e.bolometric_correction, 3),
            l_bol: (scientific(e.l_bol_erg_s), raw(e.l_bol_erg_s)),
            l_edd: (scientific(e.l_edd_erg_s), raw(e.l_edd_erg_s)),
            ratio: (significant(e.eddington_ratio, 3), raw(e.eddington_ratio)),
            efficiency: format!(
                "η = {}–{} (spin {}–{})",
                fixed(e.efficiency.0, 3),
                fixed(e.efficiency.1, 3),
                crate::relations::agn::SPIN_RANGE.0,
                crate::relations::agn::SPIN_RANGE.1
            ),
            accretion: (
                significant(e.accretion_msun_yr.0, 3),
                significant(e.accretion_msun_yr.1, 3),
                format!("{:e} {:e}", e.accretion_msun_yr.0, e.accretion_msun_yr.1),
            ),
            basis,
        }
    }
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
    /// The activity classes for the select: (value, label, selected).
    activity_options: Vec<(&'static str, &'static str, bool)>,
    /// The Eddington quantities, when a mass and λL(5100 Å) were given.
    eddington: Option<EddingtonView>,
    /// Why there are none although λL(5100 Å) was given.
    eddington_note: Option<String>,
    /// M_BH/M_bulge, when a mass and a bulge mass were given.
    bulge_ratio: Option<BulgeRatioView>,
    /// The catalog version named in the address, if any.
    version_note: Option<super::display::VersionNote>,
}

/// Show the place form and, when values were given, where the object falls.
pub(crate) async fn show_place(
    State(state): State<AppState>,
    nav: super::Nav,
    query: Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> AppResult<PlacePage> {
    let (catalog, pinned, ask, pairs) = super::relations::versioned(&state, query).await?;
    let (texts, unknown) = ObjectTexts::from_pairs(&pairs);
    if !unknown.is_empty() {
        // Each unknown name once, at most a hundred of them: a long address of bare
        // parameters does not make a long page.
        let (names, more) = crate::error::distinct_capped(unknown, crate::error::MAX_PROBLEMS);
        let more = if more > 0 {
            format!(" and {more} more")
        } else {
            String::new()
        };
        let verb = if names.len() == 1 && more.is_empty() {
            "is not a parameter"
        } else {
            "are not parameters"
        };
        return Err(AppError::bad_request(format!(
            "'{}'{more} {verb} of this page (it accepts {}, version, release).",
            names.join("', '"),
            OBJECT_FIELDS.join(", ")
        )));
    }
    let bands: Vec<String> = catalog
        .bands()
        .await?
        .into_iter()
        .filter(|b| Relation::valid_band(b))
        .collect();
    let made_at = crate::catalog::history::made_at(&state.pool, pinned.version).await?;
    let version_note =
        super::display::VersionNote::of(&pinned, &ask, made_at.as_deref(), "/place".to_owned());
    let (values, faults) = read_object(&texts, &bands);
    let asked = !texts.is_empty();
    let masses = RatioMasses::of_object(&values);
    let placed = if asked {
        let relations = Relation::all(&bands);
        let fits = state.fits.clone();
        place_everywhere(&catalog, relations, &values, "this object", move |p| {
            // M_BH/M_bulge against the placement of the same masses on M_BH–M_bulge.
            let ratio = masses
                .filter(|_| p.relation == Relation::MBulge)
                .map(|m| bulge_ratio::of_placement(&m, Some(&p)));
            (row(&p), chart(&fits, &p), ratio)
        })
        .await?
    } else {
        Vec::new()
    };
    let mut ratio = None;
    let (mut rows, mut charts) = (Vec::new(), Vec::new());
    for (r, c, b) in placed {
        rows.push(r);
        charts.extend(c);
        ratio = ratio.or(b);
    }
    let ratio = ratio.or_else(|| masses.map(|m| bulge_ratio::of_placement(&m, None)));
    if let Some(r) = &ratio {
        bulge_ratio::record_fit(&catalog, r).await;
    }
    let (soi, soi_note) = soi_view(&values, state.settings.soi_threshold);
    let (eddington, eddington_note) = match values.eddington() {
        None => (None, None),
        Some(Ok(e)) => {
            let basis = values
                .activity
                .map(|a| format!("a nucleus classed {}", a.label()))
                .unwrap_or_default();
            (Some(EddingtonView::of(&e, basis)), None)
        }
        Some(Err(note)) => (None, Some(note)),
    };
    let activity_options = crate::catalog::model::Activity::pairs()
        .into_iter()
        .map(|(v, l)| (v, l, values.activity.map(|a| a.as_str()) == Some(v)))
        .collect();
    let fault = |name: &str| {
        faults
            .iter()
            .find(|f| f.field == name)
            .map(|f| f.message.clone())
    };
    Ok(PlacePage {
        nav,
        fields: field_views(&texts, &values, &faults),
        band_options: bands
            .iter()
            .map(|b| BandOption {
                value: b.clone(),
                selected: values.band.as_ref() == Some(b),
            })
            .collect(),
        band_error: fault("band"),
        asked,
        nothing_usable: asked && rows.is_empty(),
        rows,
        soi,
        soi_note: if asked { soi_note } else { None },
        soi_threshold: significant(state.settings.soi_threshold, 2),
        charts,
        version_note,
        activity_options,
        eddington,
        eddington_note,
        bulge_ratio: ratio.map(|r| BulgeRatioView::of(&r, "as typed")),
    })
}

/// The form's fields with what was typed, the error or how the value was read.
fn field_views(
    texts: &ObjectTexts,
    values: &ObjectValues,
    faults: &[FieldError],
) -> Vec<FieldView> {
    let log = |e: &Option<Entry>, unit: &str| {
        e.as_ref().map(|e| {
            let shown = with_errors(
                Uncertain::asymmetric(e.log_value, e.err_minus_dex, e.err_plus_dex, e.upper_limit),
                2,
            );
            format!("{shown} {unit}")
        })
    };
    let fields: [(
        &'static str,
        &'static str,
        &'static str,
        &String,
        Option<String>,
    ); 8] = [
        (
            "sigma",
            "Velocity dispersion σ_e",
            "km/s, e.g. 210 ± 10",
            &texts.sigma,
            log(&values.sigma, "log10 km/s"),
        ),
        (
            "bulge_mass",
            "Bulge mass",
            "M☉, e.g. 2e11 ± 10%",
            &texts.bulge_mass,
            log(&values.bulge_mass, "log10 M☉"),
        ),
        (
            "luminosity",
            "Bulge luminosity",
            "L☉ of the band, e.g. 5e10 ± 1e10",
            &texts.luminosity,
            log(&values.luminosity, "log10 L☉"),
        ),
        (
            "mass",
            "Black-hole mass or upper limit",
            "M☉, e.g. 3.2e8 +0.5e8/-0.3e8 or <2e7",
            &texts.mass,
            log(&values.mass, "log10 M☉"),
        ),
        (
            "distance",
            "Distance",
            "Mpc, e.g. 16.5 ± 0.8",
            &texts.distance,
            values.distance.as_ref().map(|e| {
                format!(
                    "{} Mpc",
                    with_errors(Uncertain::symmetric(e.value, e.err), 1)
                )
            }),
        ),
        (
            "resolution",
            "Spatial resolution",
            "arcsec, e.g. 0.1",
            &texts.resolution,
            values
                .resolution
                .as_ref()
                .map(|e| format!("{}″", significant(e.value, 3))),
        ),
        (
            "log_l5100_erg_s",
            "λL(5100 Å), for the Eddington quantities",
            "log10 erg/s, e.g. 44.2",
            &texts.log_l5100_erg_s,
            None,
        ),
        (
            "activity",
            "Activity class of the nucleus",
            "optional",
            &texts.activity,
            None,
        ),
    ];
    fields
        .into_iter()
        .map(|(name, label, hint, text, read_as)| {
            let error = faults
                .iter()
                .find(|f| f.field == name)
                .map(|f| f.message.clone());
            FieldView {
                name,
                label,
                hint,
                value: text.clone(),
                read_as: if error.is_some() { None } else { read_as },
                error,
            }
        })
        .collect()
}

/// The sphere-of-influence check as shown, or the note saying why there is none.
fn soi_view(values: &ObjectValues, threshold: f64) -> (Option<SoiView>, Option<String>) {
    match values.sphere_of_influence(threshold) {
        None => (None, None),
        Some(Err(note)) => (None, Some(note)),
        Some(Ok(sp)) => (
            Some(SoiView {
                radius_pc: significant(sp.radius_pc, 3),
                theta_arcsec: significant(sp.theta_arcsec, 3),
                ratio: sp.ratio.map_or("—".into(), |r| significant(r, 2)),
                verdict: soi_badge(sp.resolved, "unknown (no resolution given)"),
            }),
            None,
        ),
    }
}

/// Rows and charts of placements, the placed object highlighted on each chart. The charts
/// (about a millisecond each) are drawn side by side on the blocking pool, in the placements'
/// order.
///
/// # Errors
/// When a drawing task fails.
pub(crate) async fn views(
    fits: &FitCache,
    placements: &[Placement],
) -> AppResult<(Vec<PlaceRow>, Vec<PlaceChart>)> {
    let rows = placements.iter().map(row).collect();
    let tasks: Vec<_> = placements
        .iter()
        .cloned()
        .map(|p| {
            let fits = fits.clone();
            tokio::task::spawn_blocking(move || chart(&fits, &p))
        })
        .collect();
    let mut charts = Vec::with_capacity(tasks.len());
    for task in tasks {
        charts.extend(task.await.map_err(anyhow::Error::from)?);
    }
    Ok((rows, charts))
}

fn interval(bounds: (f64, f64)) -> String {
    format!("{} to {}", fixed(bounds.0, 2), fixed(bounds.1, 2))
}

/// One placement as a table row.
pub(crate) fn row(p: &Placement) -> PlaceRow {
    let subject = &p.subject;
    let mut row = PlaceRow {
        label: p.relation.label(),
        slug: p.relation.slug(),
        input: subject.input.clone(),
        predicted: "—".into(),
        interval68: "—".into(),
        interval95: "—".into(),
        residual: None,
        z: None,
        verdict: None,
        prob_below: None,
        refit: None,
        problem: None,
    };
    if let (Some(v), Ok(_)) = (p.computing, &p.numbers) {
        row.problem = Some(format!(
            "Computing: the fit of catalog version {v} is under way; placed meanwhile against the fit of version {}.",
            p.outcome.key.catalog_version
        ));
    }
    let numbers = match &p.numbers {
        Ok(n) => n,
        Err(problem) => {
            row.problem = Some(problem.clone());
            return row;
        }
    };
    let prediction = &numbers.prediction;
    row.predicted = with_errors(
        Uncertain::symmetric(prediction.log_mbh, prediction.sd_dex),
        2,
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
        row.verdict = numbers.verdict.map(verdict_badge);
        row.prob_below = numbers.prob_below_limit.map(probability);
    }
    row.refit = p
        .refit
        .as_ref()
        .zip(p.fit())
        .map(|(refit, fit)| match refit {
            Ok(new) => format!(
                "α {} → {} ({}), β {} → {} ({}), ε {} → {} ({}){}",
                fixed(fit.params.alpha, 3),
                fixed(new.params.alpha, 3),
                signed(new.params.alpha - fit.params.alpha, 3),
                fixed(fit.params.beta, 2),
                fixed(new.params.beta, 2),
                signed(new.params.beta - fit.params.beta, 2),
                fixed(fit.params.eps, 3),
                fixed(new.params.eps, 3),
                signed(new.params.eps - fit.params.eps, 3),
                if p.refit_exact {
                    ""
                } else {
                    " (one-step estimate, docs/methods.md §6.1)"
                },
            ),
            Err(why) => why.clone(),
        });
    row
}

/// The relation chart with the placed object highlighted (for the plane, the chart's y is
/// log M_BH − γ (x2 − x02), as on the relation page). Above the density threshold the
/// sample's points come from the fit cache ([`shared_points`]), built once per fit rather
/// than once per page.
fn chart(fits: &FitCache, p: &Placement) -> Option<PlaceChart> {
    let (fit, Ok(numbers)) = (p.fit()?, &p.numbers) else {
        return None;
    };
    let subject = &p.subject;
    let prediction = &numbers.prediction;
    let (x, x_err) = subject.x;
    let mut at = Point::new(
        x,
        x_err,
        subject.mass.map_or(prediction.log_mbh, |m| m.log_mbh),
        0.0,
    );
    if let Some((b, b_err)) = subject.x2 {
        at = at.with_x2(b, b_err);
    }
    let shared = (p.outcome.sample.points.len() > DENSITY_THRESHOLD)
        .then(|| shared_points(fits, &p.outcome.key, Grouping::Morphology))
        .flatten();
    let mut drawn = match &shared {
        Some(s) => RelationChart {
            groups: s.groups.clone(),
            ..relation_chart_frame(&p.relation, &p.outcome, s.x_range)
        },
        None => relation_chart(&p.relation, &p.outcome, Grouping::Morphology),
    };
    drawn.highlight = Some(ChartPoint {
        name: subject.name.clone(),
        href: subject.href.clone(),
        x,
        x_err,
        y: chart_y(Some(fit), &at),
        y_err_minus: subject.mass.map_or(prediction.sd_dex, |m| m.err_minus_dex),
        y_err_plus: subject.mass.map_or(prediction.sd_dex, |m| m.err_plus_dex),
        upper_limit: subject.mass.is_some_and(|m| m.upper_limit),
        group: 0,
        // The highlighted object is always drawn one by one, as a star.
        emphasis: true,
        outlier: false,
        // The star stands alone; the placement table beside the chart gives its sphere of
        // influence.
        unresolved: false,
    });
    let svg = match &shared {
        Some(s) => relation_svg_of(&drawn, &s.points),
        None => relation_svg(&drawn),
    };
    svg.ok().map(|svg| PlaceChart {
        label: p.relation.label(),
        slug: p.relation.slug(),
        svg,
    })
}
