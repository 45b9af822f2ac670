//! Validation, scene assembly and rendering of both charts.
//!
//! Each public chart is turned into a [`Scene`]: checked data, the visible data rectangle, the
//! fills and lines plotters should draw (already clipped), and the legend. [`render`] then lets
//! plotters draw the frame and underlay, keeps its coordinate mapping, and appends the points,
//! legend and messages as raw SVG placed with that same mapping.

use std::fmt::Write as _;

use plotters::coord::CoordTranslate as _;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::{Cartesian2d, ChartBuilder, IntoDrawingArea as _, PathElement, SVGBackend};
use plotters::style::colors::{TRANSPARENT, WHITE};
use plotters::style::{Color as _, IntoFont as _};

use super::density::{
    self, Area, Grid, Thinning, polygon_element, polyline_path, shades_for, thinning,
};
use super::geometry::{
    Bounds, Extent, Xy, band_outline, clip_polygon, clip_polyline, extend_band, padded,
    sample_line, tick_decimals,
};
use super::markup::{clean, dex, escape, is_site_relative, minus_sign, num, truncate};
use super::style::{
    self, ARROW_MIN_PX, ARROW_PX, AXIS_FONT, FONT_FAMILY, GLYPH_EM, GRID, HIGHLIGHT_RADIUS,
    HIGHLIGHT_STROKE, INK, LEGEND_FONT_PX, LINE, LINE_WIDTH, MEAN_BAND, MarkerStyle, Rgb,
    SCATTER_1, SCATTER_2, TICK_FONT, TITLE_FONT, Tint,
};
use super::{
    ChartError, ChartPoint, EMPTY_HINT, EMPTY_MESSAGE, Group, LineSpec, MAX_SIZE, MIN_HEIGHT,
    MIN_WIDTH, RelationChart, ResidualChart,
};

/// plotters' mapping from data to pixels for both charts.
pub(super) type Spec = Cartesian2d<RangedCoordf64, RangedCoordf64>;

/// Space around the plot inside its area, in pixels.
const MARGIN: u32 = 10;
/// Height below the plot for tick labels and the x-axis label, in pixels.
const X_LABEL_AREA: u32 = 54;
/// Width left of the plot for tick labels and the y-axis label, in pixels.
const Y_LABEL_AREA: u32 = 70;
/// Space kept between the outermost data and the frame, in pixels: half the outlier ring's
/// width plus its stroke, and a little air.
const MARK_PAD_PX: f64 = 14.0;
/// Approximate height plotters gives a title, in pixels (used only to leave room for arrows).
const TITLE_AREA: u32 = 36;
/// Vertical distance between legend rows, in pixels.
const LEGEND_ROW: i32 = 22;
/// Vertical distance between legend rows on a density chart, whose legend has up to seven more
/// rows, in pixels (still half a line between rows of 13-pixel text).
const LEGEND_ROW_DENSE: i32 = 20;
/// Extra height of each wrapped line of a legend label, in pixels.
const LEGEND_LINE: i32 = 15;

/// A translucent area drawn under the grid.
struct Fill {
    outline: Vec<Xy>,
    tint: Tint,
}

/// A line drawn over the grid, possibly in several visible runs.
struct Stroke {
    runs: Vec<Vec<Xy>>,
    colour: Rgb,
    width: u32,
}

/// What a legend row shows before its text.
enum Symbol {
    Marker(MarkerStyle),
    Star,
    Arrow,
    /// The ring drawn around an outlier's marker.
    Ring,
    /// The slash drawn through the marker of an object whose sphere of influence is not
    /// resolved.
    Unresolved,
    Line(Rgb, u32),
    /// Translucent layers stacked as they stack on the chart.
    Swatch(Vec<Tint>),
    /// A density shade.
    Shade(Rgb),
    /// No symbol: a heading or a note in the legend (the density's count, what it includes).
    Blank,
}

struct LegendEntry {
    symbol: Symbol,
    label: String,
}

/// A checked chart, ready to draw.
struct Scene<'a> {
    title: &'a str,
    show_title: bool,
    /// One or two sentences summing the chart up for a screen reader: what it shows, how many
    /// objects, the fitted line, the outliers.
    summary: String,
    x_label: &'a str,
    y_label: &'a str,
    width: u32,
    height: u32,
    points: &'a [ChartPoint],
    groups: &'a [Group],
    highlight: Option<&'a ChartPoint>,
    /// Which points are drawn one by one; the others form the density.
    thinning: Thinning,
    bounds: Bounds,
    fills: Vec<Fill>,
    strokes: Vec<Stroke>,
    legend: Vec<LegendEntry>,
    /// Where the density's rows go in the legend (after the groups and the highlighted object).
    density_slot: usize,
}

impl Scene<'_> {
    fn is_empty(&self) -> bool {
        self.points.is_empty()
    }

    /// Nothing at all to draw: no object and no highlighted object. Such a chart shows no axes
    /// (they would have no range to show) but a message saying what to change.
    fn is_blank(&self) -> bool {
        self.points.is_empty() && self.highlight.is_none()
    }
}

/// An SVG document and the mapping it was drawn with (tests map data back through it).
pub(super) struct Rendered {
    pub(super) svg: String,
    #[cfg_attr(not(test), expect(dead_code, reason = "read by the tests"))]
    pub(super) spec: Spec,
}

/// The plot rectangle in pixels.
#[derive(Debug, Clone, Copy)]
struct PixelRect {
    left: i32,
    right: i32,
    top: i32,
    bottom: i32,
}

/// The data-to-pixel mapping plotters uses, without its rounding to whole pixels: the raw layer
/// places everything with sub-pixel precision, so a line is smooth rather than a staircase.
#[derive(Debug, Clone, Copy)]
struct Mapping {
    bounds: Bounds,
    /// Pixel x of `x_min` and of `x_max`.
    px: (f64, f64),
    /// Pixel y of `y_min` and of `y_max`.
    py: (f64, f64),
}

impl Mapping {
    fn new(spec: &Spec, bounds: Bounds) -> Self {
        let (x0, y0) = spec.translate(&(bounds.x_min, bounds.y_min));
        let (x1, y1) = spec.translate(&(bounds.x_max, bounds.y_max));
        Self {
            bounds,
            px: (f64::from(x0), f64::from(x1)),
            py: (f64::from(y0), f64::from(y1)),
        }
    }

    fn to_px(self, x: f64, y: f64) -> (f64, f64) {
        let b = self.bounds;
        let tx = (x - b.x_min) / (b.x_max - b.x_min);
        let ty = (y - b.y_min) / (b.y_max - b.y_min);
        (
            self.px.0 + tx * (self.px.1 - self.px.0),
            self.py.0 + ty * (self.py.1 - self.py.0),
        )
    }
}

/// What the raw layer needs from the plotters pass.
struct Frame {
    spec: Spec,
    map: Mapping,
    plot: PixelRect,
    legend_left: i32,
}

pub(super) fn relation(chart: &RelationChart) -> Result<String, ChartError> {
    relation_rendered(chart).map(|r| r.svg)
}

pub(super) fn residual(chart: &ResidualChart) -> Result<String, ChartError> {
    residual_rendered(chart).map(|r| r.svg)
}

pub(super) fn relation_rendered(chart: &RelationChart) -> Result<Rendered, ChartError> {
    render(&relation_scene(chart, &chart.points)?)
}

/// The relation chart with `points` in place of its own (see [`super::relation_svg_of`]).
pub(super) fn relation_of(
    chart: &RelationChart,
    points: &[ChartPoint],
) -> Result<String, ChartError> {
    render(&relation_scene(chart, points)?).map(|r| r.svg)
}

/// The relation chart as a PNG at print resolution (see [`super::relation_png`]).
pub(super) fn relation_png(chart: &RelationChart) -> Result<Vec<u8>, ChartError> {
    render_png(&relation_scene(chart, &chart.points)?)
}

/// The scene of `chart` with the objects `points` (the chart's own, or a shared list).
fn relation_scene<'a>(
    chart: &'a RelationChart,
    points: &'a [ChartPoint],
) -> Result<Scene<'a>, ChartError> {
    check_size(chart.width, chart.height)?;
    check_points(points, chart.groups.len())?;
    if let Some(h) = &chart.highlight {
        check_point(h, &highlight_item(h), None)?;
    }
    if let Some(line) = &chart.line {
        check_line(line)?;
    }
    check_band(&chart.mean_band)?;

    let highlight = chart.highlight.as_ref();
    let drawn = || points.iter().chain(highlight);
    let empty = points.is_empty();

    // Without any object the frame still needs a range: around the line's pivot if there is one.
    let fallback = chart.line.map_or(((0.0, 1.0), (0.0, 1.0)), |l| {
        (padded(l.pivot, l.pivot), padded(l.alpha, l.alpha))
    });
    let bounds = data_bounds(
        drawn(),
        fallback,
        &[],
        (chart.width, chart.height),
        chart.show_title && !chart.title.trim().is_empty(),
    );

    let mut fills = Vec::new();
    let mut strokes = Vec::new();
    let thin = thinning(points, chart.groups.len());
    let mut legend = group_legend(&chart.groups, empty, highlight, points, &thin);
    let density_slot = legend_slot(&legend);
    if !empty {
        let samples = chart
            .line
            .map(|l| sample_line(&l, bounds.x_min, bounds.x_max));
        let scatter = chart.line.map_or(0.0, |l| l.scatter_dex);
        if let Some(samples) = &samples
            && scatter > 0.0
        {
            for (k, tint) in [(2.0, SCATTER_2), (1.0, SCATTER_1)] {
                let upper: Vec<Xy> = samples.iter().map(|&(x, y)| (x, y + k * scatter)).collect();
                let lower: Vec<Xy> = samples.iter().map(|&(x, y)| (x, y - k * scatter)).collect();
                push_fill(&mut fills, &band_outline(&upper, &lower), tint, bounds);
            }
        }
        if !chart.mean_band.is_empty() {
            let band = extend_band(
                &chart.mean_band,
                chart.line.as_ref(),
                bounds.x_min,
                bounds.x_max,
            );
            let upper: Vec<Xy> = band.iter().map(|s| (s.x, s.upper)).collect();
            let lower: Vec<Xy> = band.iter().map(|s| (s.x, s.lower)).collect();
            push_fill(&mut fills, &band_outline(&upper, &lower), MEAN_BAND, bounds);
        }
        if let Some(samples) = &samples {
            strokes.push(Stroke {
                runs: clip_polyline(samples, bounds),
                colour: LINE,
                width: LINE_WIDTH,
            });
            legend.push(LegendEntry {
                symbol: Symbol::Line(LINE, LINE_WIDTH),
                label: "Fitted relation".to_owned(),
            });
        }
        // The legend swatches stack the same layers the chart stacks where the bands overlap.
        let under: Vec<Tint> = if scatter > 0.0 {
            vec![SCATTER_2, SCATTER_1]
        } else {
            Vec::new()
        };
        if !chart.mean_band.is_empty() {
            let mut layers = under.clone();
            layers.push(MEAN_BAND);
            legend.push(LegendEntry {
                symbol: Symbol::Swatch(layers),
                label: "Mean-relation band".to_owned(),
            });
        }
        if scatter > 0.0 {
            legend.push(LegendEntry {
                symbol: Symbol::Swatch(under),
                label: format!("±1ε = {} dex", dex(scatter)),
            });
            legend.push(LegendEntry {
                symbol: Symbol::Swatch(vec![SCATTER_2]),
                label: format!("±2ε = {} dex", dex(2.0 * scatter)),
            });
        }
    }

    let line_text = chart.line.map(|l| {
        let mut text = format!(
            "Fitted line: y = {} + {} (x − {})",
            dex(l.alpha),
            dex(l.beta),
            dex(l.pivot)
        );
        if let Some(b2) = l.beta2 {
            let _ = write!(text, " + {} (x − {})²", dex(b2), dex(l.pivot));
        }
        if l.scatter_dex > 0.0 {
            let _ = write!(text, ", intrinsic scatter {} dex", dex(l.scatter_dex));
        }
        text.push('.');
        text
    });
    Ok(Scene {
        title: &chart.title,
        show_title: chart.show_title,
        summary: summary(
            &chart.title,
            &chart.x_label,
            &chart.y_label,
            points,
            highlight,
            line_text,
        ),
        x_label: &chart.x_label,
        y_label: &chart.y_label,
        width: chart.width,
        height: chart.height,
        points,
        groups: &chart.groups,
        highlight,
        thinning: thin,
        bounds,
        fills,
        strokes,
        legend,
        density_slot,
    })
}

/// The legend row of the points whose sphere of influence is not resolved.
const UNRESOLVED_LABEL: &str = "Sphere of influence not resolved";

/// Most outliers a chart's text summary names; the rest are counted.
const SUMMARY_NAMES: usize = 10;

/// The text summary of a chart (its accessible description): what it shows, how many objects
/// and upper limits, the reference line, the outliers by name, the highlighted object.
fn summary(
    title: &str,
    x_label: &str,
    y_label: &str,
    points: &[ChartPoint],
    highlight: Option<&ChartPoint>,
    reference: Option<String>,
) -> String {
    let what = if title.trim().is_empty() {
        format!("{y_label} against {x_label}")
    } else {
        format!("{title}: {y_label} against {x_label}")
    };
    if points.is_empty() {
        let mut text = format!("{what}. {EMPTY_MESSAGE}.");
        if let Some(h) = highlight {
            let _ = write!(text, " Highlighted: {}.", h.name);
        }
        return text;
    }
    let n = points.len();
    let limits = points.iter().filter(|p| p.upper_limit).count();
    let mut text = format!(
        "{what}, {} object{}",
        density::grouped(n as u64),
        if n == 1 { "" } else { "s" }
    );
    if limits > 0 {
        let _ = write!(
            text,
            " ({} upper limit{})",
            density::grouped(limits as u64),
            if limits == 1 { "" } else { "s" }
        );
    }
    text.push('.');
    if let Some(reference) = reference {
        text.push(' ');
        text.push_str(&reference);
    }
    let outliers: Vec<&str> = points
        .iter()
        .filter(|p| p.outlier)
        .map(|p| p.name.as_str())
        .collect();
    match outliers.len() {
        0 => text.push_str(" No outlier marked."),
        k => {
            let shown = outliers[..k.min(SUMMARY_NAMES)].join(", ");
            let _ = write!(
                text,
                " {} outlier{} ringed: {shown}",
                k,
                if k == 1 { "" } else { "s" }
            );
            if k > SUMMARY_NAMES {
                let _ = write!(text, " and {} more", k - SUMMARY_NAMES);
            }
            text.push('.');
        }
    }
    let unresolved = points.iter().filter(|p| p.unresolved).count();
    if unresolved > 0 {
        let _ = write!(
            text,
            " {} object{} with the sphere of influence not resolved (slashed).",
            density::grouped(unresolved as u64),
            if unresolved == 1 { "" } else { "s" }
        );
    }
    if let Some(h) = highlight {
        let _ = write!(text, " Highlighted: {}.", h.name);
    }
    text
}

pub(super) fn residual_rendered(chart: &ResidualChart) -> Result<Rendered, ChartError> {
    check_size(chart.width, chart.height)?;
    check_points(&chart.points, chart.groups.len())?;
    if let Some(h) = &chart.highlight {
        check_point(h, &highlight_item(h), None)?;
    }
    let scatter = chart.scatter_dex;
    check_number("the residual chart", "scatter ε", scatter)?;
    if scatter < 0.0 {
        return Err(ChartError::Negative {
            item: "the residual chart".to_owned(),
            field: "scatter ε",
        });
    }

    let highlight = chart.highlight.as_ref();
    let drawn = || chart.points.iter().chain(highlight);
    let empty = chart.points.is_empty();
    // Zero and the band are the reference every residual is read against: always in view.
    let bounds = data_bounds(
        drawn(),
        ((0.0, 1.0), padded(-scatter, scatter)),
        &[0.0, -scatter, scatter],
        (chart.width, chart.height),
        chart.show_title && !chart.title.trim().is_empty(),
    );

    let mut fills = Vec::new();
    let mut strokes = Vec::new();
    let thin = thinning(&chart.points, chart.groups.len());
    let mut legend = group_legend(&chart.groups, empty, highlight, &chart.points, &thin);
    let density_slot = legend_slot(&legend);
    if !empty {
        let (x0, x1) = (bounds.x_min, bounds.x_max);
        if scatter > 0.0 {
            let rect = [(x0, -scatter), (x1, -scatter), (x1, scatter), (x0, scatter)];
            push_fill(&mut fills, &rect, SCATTER_1, bounds);
        }
        strokes.push(Stroke {
            runs: clip_polyline(&[(x0, 0.0), (x1, 0.0)], bounds),
            colour: LINE,
            width: 1,
        });
        legend.push(LegendEntry {
            symbol: Symbol::Line(LINE, 1),
            label: "Zero residual".to_owned(),
        });
        if scatter > 0.0 {
            legend.push(LegendEntry {
                symbol: Symbol::Swatch(vec![SCATTER_1]),
                label: format!("±1ε = {} dex", dex(scatter)),
            });
        }
    }

    let reference = (scatter > 0.0).then(|| {
        format!(
            "Zero residual line, intrinsic scatter {} dex.",
            dex(scatter)
        )
    });
    render(&Scene {
        title: &chart.title,
        show_title: chart.show_title,
        summary: summary(
            &chart.title,
            &chart.x_label,
            &chart.y_label,
            &chart.points,
            highlight,
            reference,
        ),
        x_label: &chart.x_label,
        y_label: &chart.y_label,
        width: chart.width,
        height: chart.height,
        points: &chart.points,
        groups: &chart.groups,
        highlight,
        thinning: thin,
        bounds,
        fills,
        strokes,
        legend,
        density_slot,
    })
}

// ---------------------------------------------------------------------------------------------
// Checks

fn check_size(width: u32, height: u32) -> Result<(), ChartError> {
    if (MIN_WIDTH..=MAX_SIZE).contains(&width) && (MIN_HEIGHT..=MAX_SIZE).contains(&height) {
        Ok(())
    } else {
        Err(ChartError::BadSize { width, height })
    }
}

fn point_item(index: usize, p: &ChartPoint) -> String {
    if p.name.trim().is_empty() {
        format!("point {index}")
    } else {
        format!("point \"{}\"", p.name)
    }
}

fn highlight_item(p: &ChartPoint) -> String {
    format!("the highlighted object \"{}\"", p.name)
}

fn check_number(item: &str, field: &'static str, v: f64) -> Result<(), ChartError> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(ChartError::NonFinite {
            item: item.to_owned(),
            field,
        })
    }
}

fn check_points(points: &[ChartPoint], groups: usize) -> Result<(), ChartError> {
    for (i, p) in points.iter().enumerate() {
        check_point(p, &point_item(i, p), Some(groups))?;
    }
    Ok(())
}

/// Checks one point; `groups` is `None` for the highlight, whose group is not used.
fn check_point(p: &ChartPoint, item: &str, groups: Option<usize>) -> Result<(), ChartError> {
    check_number(item, "x value", p.x)?;
    check_number(item, "y value", p.y)?;
    for (field, err) in [
        ("x error", p.x_err),
        ("lower y error", p.y_err_minus),
        ("upper y error", p.y_err_plus),
    ] {
        check_number(item, field, err)?;
        if err < 0.0 {
            return Err(ChartError::Negative {
                item: item.to_owned(),
                field,
            });
        }
    }
    if let Some(groups) = groups
        && p.group >= groups
    {
        return Err(ChartError::UnknownGroup {
            item: item.to_owned(),
            group: p.group,
            groups,
        });
    }
    if let Some(href) = &p.href
        && !is_site_relative(href)
    {
        return Err(ChartError::UnsafeHref {
            item: item.to_owned(),
        });
    }
    Ok(())
}

fn check_line(line: &LineSpec) -> Result<(), ChartError> {
    let item = "the fitted line";
    check_number(item, "zero point α", line.alpha)?;
    check_number(item, "slope β", line.beta)?;
    check_number(item, "curvature β₂", line.beta2.unwrap_or(0.0))?;
    check_number(item, "pivot", line.pivot)?;
    check_number(item, "scatter ε", line.scatter_dex)?;
    if line.scatter_dex < 0.0 {
        return Err(ChartError::Negative {
            item: item.to_owned(),
            field: "scatter ε",
        });
    }
    Ok(())
}

fn check_band(band: &[super::BandPoint]) -> Result<(), ChartError> {
    if band.len() == 1 {
        return Err(ChartError::BandTooShort { len: 1 });
    }
    for (index, s) in band.iter().enumerate() {
        let item = format!("mean-band sample {index}");
        check_number(&item, "x value", s.x)?;
        check_number(&item, "lower edge", s.lower)?;
        check_number(&item, "upper edge", s.upper)?;
        if s.lower > s.upper {
            return Err(ChartError::BandInverted { index });
        }
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Scene assembly

/// The visible data rectangle: every drawn point with its error bars, the `always` y values,
/// padded; `fallback` when there is nothing to show. The y range is then lowered, if needed, so
/// the lowest upper-limit arrow fits inside the frame.
fn data_bounds<'p>(
    points: impl Iterator<Item = &'p ChartPoint> + Clone,
    fallback: ((f64, f64), (f64, f64)),
    always: &[f64],
    (width, height): (u32, u32),
    titled: bool,
) -> Bounds {
    let mut xs = Extent::default();
    let mut ys = Extent::default();
    let mut lowest_limit: Option<f64> = None;
    for p in points.clone() {
        xs.add(p.x - p.x_err);
        xs.add(p.x + p.x_err);
        if p.upper_limit {
            ys.add(p.y);
            lowest_limit = Some(lowest_limit.map_or(p.y, |l: f64| l.min(p.y)));
        } else {
            ys.add(p.y - p.y_err_minus);
            ys.add(p.y + p.y_err_plus);
        }
    }
    let have_points = ys.range().is_some();
    for &v in always {
        ys.add(v);
    }
    let plot_w = f64::from(width) - f64::from(legend_width(width) + Y_LABEL_AREA + 2 * MARGIN);
    let plot_h = f64::from(height)
        - f64::from(X_LABEL_AREA + 2 * MARGIN)
        - if titled { f64::from(TITLE_AREA) } else { 0.0 };
    let (mut x_min, mut x_max) = xs.range().map_or(fallback.0, |(lo, hi)| padded(lo, hi));
    let (mut y_min, mut y_max) = if have_points || !always.is_empty() {
        ys.range().map_or(fallback.1, |(lo, hi)| padded(lo, hi))
    } else {
        fallback.1
    };
    // Markers, rings and the star must stay whole inside the frame: at least MARK_PAD_PX pixels
    // between the outermost data and the frame on every side, whatever the data span.
    let kx = (MARK_PAD_PX / plot_w.max(1.0)).min(0.25);
    let ky = (MARK_PAD_PX / plot_h.max(1.0)).min(0.25);
    if let Some((lo, hi)) = xs.range() {
        for _ in 0..2 {
            let need = kx * (x_max - x_min);
            x_min = x_min.min(lo - need);
            x_max = x_max.max(hi + need);
        }
    }
    if have_points && let Some((lo, hi)) = ys.range() {
        for _ in 0..2 {
            let need = ky * (y_max - y_min);
            y_min = y_min.min(lo - need);
            y_max = y_max.max(hi + need);
        }
    }
    if let Some(limit) = lowest_limit {
        // Want (limit − y_min) ≥ f (y_max − y_min), f = room for the arrow and its head over the
        // plot height, so y_min ≤ (limit − f y_max) / (1 − f).
        let f = (f64::from(ARROW_PX + 8) / plot_h.max(1.0)).min(0.5);
        y_min = y_min.min((limit - f * y_max) / (1.0 - f));
    }
    Bounds {
        x_min,
        x_max,
        y_min,
        y_max,
    }
}

fn push_fill(fills: &mut Vec<Fill>, outline: &[Xy], tint: Tint, bounds: Bounds) {
    let outline = clip_polygon(outline, bounds);
    if !outline.is_empty() {
        fills.push(Fill { outline, tint });
    }
}

/// Legend rows common to both charts: the groups (unless the chart is empty; on a density chart
/// only the groups with a point drawn one by one), the highlighted object, and the upper-limit
/// arrow when one is drawn.
fn group_legend(
    groups: &[Group],
    empty: bool,
    highlight: Option<&ChartPoint>,
    points: &[ChartPoint],
    thin: &Thinning,
) -> Vec<LegendEntry> {
    let mut legend = Vec::new();
    let drawn = || {
        points
            .iter()
            .zip(&thin.individual)
            .filter(|(_, one)| **one)
            .map(|(p, _)| p)
    };
    let any_limit = drawn().any(|p| p.upper_limit) || highlight.is_some_and(|h| h.upper_limit);
    if !empty {
        legend.extend(
            groups
                .iter()
                .enumerate()
                .filter(|(i, _)| !thin.dense || drawn().any(|p| p.group == *i))
                .map(|(i, g)| LegendEntry {
                    symbol: Symbol::Marker(style::group_style(i)),
                    label: g.label.clone(),
                }),
        );
    }
    if let Some(h) = highlight {
        legend.push(LegendEntry {
            symbol: Symbol::Star,
            label: h.name.clone(),
        });
    }
    if !empty && drawn().any(|p| p.outlier) {
        legend.push(LegendEntry {
            symbol: Symbol::Ring,
            label: "Outlier (ringed)".to_owned(),
        });
    }
    if !empty && drawn().any(|p| p.unresolved) {
        legend.push(LegendEntry {
            symbol: Symbol::Unresolved,
            label: UNRESOLVED_LABEL.to_owned(),
        });
    }
    if any_limit && (!empty || highlight.is_some_and(|h| h.upper_limit)) {
        legend.push(LegendEntry {
            symbol: Symbol::Arrow,
            label: "Upper limit".to_owned(),
        });
    }
    legend
}

/// The legend index after the group rows and the highlighted object's row.
fn legend_slot(legend: &[LegendEntry]) -> usize {
    legend
        .iter()
        .take_while(|e| matches!(e.symbol, Symbol::Marker(_) | Symbol::Star))
        .count()
}

/// The density's legend rows: how many objects it holds, its shade levels, and which kinds of
/// point it took in.
fn density_legend(grid: &Grid, thin: &Thinning) -> Vec<LegendEntry> {
    let bounds = density::level_bounds(grid.max());
    let shades = shades_for(bounds.len());
    let objects = thin.in_density as u64;
    let mut rows = vec![LegendEntry {
        symbol: Symbol::Blank,
        // Short enough for one line of the narrowest legend.
        label: format!("{} as density:", density::grouped(objects)),
    }];
    // Fullest first, as the darkest shade reads as "most".
    for k in (0..bounds.len()).rev() {
        rows.push(LegendEntry {
            symbol: Symbol::Shade(shades[k]),
            label: density::level_label(&bounds, k),
        });
    }
    if thin.limits_in_density > 0 {
        rows.push(LegendEntry {
            symbol: Symbol::Blank,
            label: format!(
                "incl. {} limits",
                density::grouped(thin.limits_in_density as u64)
            ),
        });
    }
    if thin.emphasised_in_density > 0 {
        rows.push(LegendEntry {
            symbol: Symbol::Blank,
            label: format!(
                "incl. {} marked",
                density::grouped(thin.emphasised_in_density as u64)
            ),
        });
    }
    rows
}

// ---------------------------------------------------------------------------------------------
// Rendering

/// A plotters failure as the charts' error.
pub(super) fn drawing_error(e: impl std::fmt::Display) -> ChartError {
    ChartError::Drawing(e.to_string())
}

/// The frame every chart shares, drawn by plotters: the axis labels, `ticks` (x, y) ticks
/// labelled by the formatters, the grid at the major ticks only, the axes in ink. `font_scale`
/// multiplies the fonts and `line_px` is the width of the grid and axis lines (1 and 1 for SVG;
/// the bitmap scales both).
pub(super) fn draw_axes<DB: plotters::prelude::DrawingBackend>(
    chart: &mut plotters::prelude::ChartContext<
        '_,
        DB,
        Cartesian2d<RangedCoordf64, RangedCoordf64>,
    >,
    axis_labels: (&str, &str),
    ticks: (usize, usize),
    x_fmt: &dyn Fn(&f64) -> String,
    y_fmt: &dyn Fn(&f64) -> String,
    font_scale: f64,
    line_px: u32,
) -> Result<(), ChartError> {
    let ink = INK.plotters();
    chart
        .configure_mesh()
        .x_desc(clean(axis_labels.0))
        .y_desc(clean(axis_labels.1))
        .x_labels(ticks.0)
        .y_labels(ticks.1)
        .x_label_formatter(x_fmt)
        .y_label_formatter(y_fmt)
        .label_style(
            (FONT_FAMILY, TICK_FONT * font_scale)
                .into_font()
                .color(&ink),
        )
        .axis_desc_style(
            (FONT_FAMILY, AXIS_FONT * font_scale)
                .into_font()
                .color(&ink),
        )
        .bold_line_style(GRID.plotters().stroke_width(line_px))
        .light_line_style(TRANSPARENT)
        .axis_style(ink.stroke_width(line_px))
        .draw()
        .map_err(drawing_error)
}

/// Width of the legend column, in pixels.
fn legend_width(width: u32) -> u32 {
    (width * 26 / 100).clamp(150, 220)
}

/// A tick label with `decimals` decimals and a true minus sign.
fn tick_label(v: f64, decimals: usize) -> String {
    // Ticks that land a rounding error off zero must not print as "−0.0".
    let v = if v.abs() < 1e-9 { 0.0 } else { v };
    minus_sign(&format!("{v:.decimals$}"))
}

fn render(scene: &Scene<'_>) -> Result<Rendered, ChartError> {
    let mut svg = String::new();
    let frame = draw_frame(&mut svg, scene)?;

    // plotters opens with `<svg width=… height=… viewBox=… xmlns=…>` and ends with `</svg>`. The
    // root is one image to assistive technology, named by the text summary (also in `<desc>` for
    // a file opened on its own); the raw layer goes before the closing tag.
    let body = svg
        .strip_prefix("<svg ")
        .and_then(|rest| rest.trim_end().strip_suffix("</svg>"))
        .ok_or_else(|| drawing_error("plotters wrote an unexpected document frame"))?;
    let (open, content) = body
        .split_once('>')
        .ok_or_else(|| drawing_error("plotters wrote an unexpected document frame"))?;
    let mut out = String::with_capacity(body.len() + 4096 + 600 * scene.points.len());
    let summary = escape(&scene.summary);
    let _ = write!(
        out,
        r#"<svg class="chart" role="img" aria-label="{summary}" {open}>"#
    );
    let _ = write!(out, "\n<desc>{summary}</desc>");
    out.push_str(content);
    overlay(&mut out, scene, &frame);
    out.push_str("</svg>\n");
    Ok(Rendered {
        svg: out,
        spec: frame.spec,
    })
}

/// The plotters pass: background, title, underlay fills, grid, axes with labels, lines.
fn draw_frame(buf: &mut String, scene: &Scene<'_>) -> Result<Frame, ChartError> {
    style::register_font();
    let b = scene.bounds;
    let root = SVGBackend::with_string(buf, (scene.width, scene.height)).into_drawing_area();
    root.fill(&WHITE).map_err(drawing_error)?;
    let area = if !scene.show_title || scene.title.trim().is_empty() {
        root.clone()
    } else {
        let font = (FONT_FAMILY, TITLE_FONT).into_font().color(&INK.plotters());
        root.titled(&clean(scene.title), font)
            .map_err(drawing_error)?
    };
    let (plot_area, legend_area) = area.split_horizontally(scene.width - legend_width(scene.width));
    let mut chart = ChartBuilder::on(&plot_area)
        .margin(MARGIN)
        .x_label_area_size(X_LABEL_AREA)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(b.x_min..b.x_max, b.y_min..b.y_max)
        .map_err(drawing_error)?;

    // The bands and lines are drawn in the raw layer (see `overlay`), with sub-pixel precision:
    // plotters rounds every coordinate to a whole pixel, which turns a slanted line into steps.
    let (px, py) = chart.plotting_area().get_pixel_range();
    let spec = chart.as_coord_spec().clone();
    let frame = Frame {
        map: Mapping::new(&spec, b),
        spec,
        plot: PixelRect {
            left: px.start,
            right: px.end,
            top: py.start,
            bottom: py.end,
        },
        legend_left: legend_area.get_base_pixel().0,
    };
    if scene.is_blank() {
        // No axes without a range to show: the raw layer writes the message in an empty frame.
        root.present().map_err(drawing_error)?;
        return Ok(frame);
    }
    // About one tick per 80 pixels, labelled with the fewest decimals that tell them apart.
    let x_ticks = usize::try_from((px.end - px.start) / 80)
        .unwrap_or(5)
        .clamp(3, 10);
    let y_ticks = usize::try_from((py.end - py.start) / 60)
        .unwrap_or(5)
        .clamp(3, 10);
    let x_decimals = tick_decimals(b.x_min, b.x_max, x_ticks);
    let y_decimals = tick_decimals(b.y_min, b.y_max, y_ticks);
    let x_fmt = |v: &f64| tick_label(*v, x_decimals);
    let y_fmt = |v: &f64| tick_label(*v, y_decimals);
    draw_axes(
        &mut chart,
        (scene.x_label, scene.y_label),
        (x_ticks, y_ticks),
        &x_fmt,
        &y_fmt,
        1.0,
        1,
    )?;

    // Close the frame on the top and right, where plotters draws no axis.
    let corners = vec![(b.x_min, b.y_max), (b.x_max, b.y_max), (b.x_max, b.y_min)];
    chart
        .draw_series(std::iter::once(PathElement::new(
            corners,
            GRID.plotters().stroke_width(1),
        )))
        .map_err(drawing_error)?;

    root.present().map_err(drawing_error)?;
    Ok(frame)
}

/// The raw layer: the density (with the lines redrawn over it), points, highlight, legend, and the
/// empty message.
fn overlay(out: &mut String, scene: &Scene<'_>, frame: &Frame) {
    let mut density_rows = Vec::new();
    if scene.thinning.dense {
        let plot = frame.plot;
        let mut grid = Grid::new(Area {
            left: plot.left,
            right: plot.right,
            top: plot.top,
            bottom: plot.bottom,
        });
        for (p, _) in scene
            .points
            .iter()
            .zip(&scene.thinning.individual)
            .filter(|(_, one)| !**one)
        {
            let (x, y) = frame.map.to_px(p.x, p.y);
            grid.add(x, y);
        }
        debug_assert_eq!(grid.total(), scene.thinning.in_density as u64);
        density::density_markup(out, &grid, scene.thinning.in_density);
        density_rows = density_legend(&grid, &scene.thinning);
    }
    // The translucent bands go on the grid (and on the shading of a density), the lines on top.
    for fill in &scene.fills {
        let px: Vec<(f64, f64)> = fill
            .outline
            .iter()
            .map(|&(x, y)| frame.map.to_px(x, y))
            .collect();
        out.push_str(&polygon_element(&px, fill.tint));
        out.push('\n');
    }
    for stroke in &scene.strokes {
        for run in &stroke.runs {
            let px: Vec<(f64, f64)> = run.iter().map(|&(x, y)| frame.map.to_px(x, y)).collect();
            out.push_str(&polyline_path(&px, stroke.colour, stroke.width));
            out.push('\n');
        }
    }
    out.push_str("<g class=\"points\">\n");
    for (p, _) in scene
        .points
        .iter()
        .zip(&scene.thinning.individual)
        .filter(|(_, one)| **one)
    {
        let group = scene.groups.get(p.group).map(|g| g.label.as_str());
        point_markup(
            out,
            p,
            Some(style::group_style(p.group)),
            group,
            scene,
            frame,
        );
    }
    out.push_str("</g>\n");
    if let Some(h) = scene.highlight {
        out.push_str("<g class=\"highlight\">\n");
        point_markup(out, h, None, None, scene, frame);
        out.push_str("</g>\n");
    }
    let mut legend: Vec<&LegendEntry> = scene.legend.iter().collect();
    let at = scene.density_slot.min(legend.len());
    legend.splice(at..at, density_rows.iter());
    legend_markup(out, &legend, scene, frame);
    if scene.is_empty() {
        // Near the top of the frame, on a white backing, clear of a highlighted object that sits
        // in the middle of its padded range; in a blank chart, in the middle of an empty frame
        // with what to change and what the chart would show.
        let cx = f64::from(frame.plot.left + frame.plot.right) / 2.0;
        let blank = scene.is_blank();
        let cy = if blank {
            f64::from(frame.plot.top + frame.plot.bottom) / 2.0 - 20.0
        } else {
            f64::from(frame.plot.top) + 30.0
        };
        let lines = if blank {
            vec![
                EMPTY_MESSAGE.to_owned(),
                EMPTY_HINT.to_owned(),
                format!(
                    "The chart shows {} against {}.",
                    scene.y_label, scene.x_label
                ),
            ]
        } else {
            vec![EMPTY_MESSAGE.to_owned()]
        };
        let longest = lines.iter().map(|l| l.chars().count()).max().unwrap_or(0);
        let room = f64::from(frame.plot.right - frame.plot.left) / 2.0 - 4.0;
        let half_w = (0.5 * 15.0 * GLYPH_EM * longest as f64 + 10.0).min(room);
        let height = 26.0 + 20.0 * (lines.len() as f64 - 1.0);
        if blank {
            let _ = writeln!(
                out,
                r#"<rect x="{}" y="{}" width="{}" height="{}" fill="none" stroke="{}"/>"#,
                frame.plot.left,
                frame.plot.top,
                frame.plot.right - frame.plot.left,
                frame.plot.bottom - frame.plot.top,
                GRID.hex()
            );
        }
        let _ = write!(
            out,
            r##"<g class="empty-message"><rect x="{}" y="{}" width="{}" height="{}" rx="4" fill="#FFFFFF" stroke="{}"/><text x="{}" y="{}" dy="0.35em" text-anchor="middle" font-family="{FONT_FAMILY}" font-size="15" fill="{}">{}"##,
            num(cx - half_w),
            num(cy - 13.0),
            num(2.0 * half_w),
            num(height),
            GRID.hex(),
            num(cx),
            num(cy),
            INK.hex(),
            escape(&lines[0])
        );
        for line in &lines[1..] {
            let _ = write!(
                out,
                r#"<tspan x="{}" dy="20" font-size="13">{}</tspan>"#,
                num(cx),
                escape(line)
            );
        }
        out.push_str("</text></g>\n");
    }
}

/// The hover text of a point, e.g. `A-1: log₁₀ M_BH [M☉] = 8.12 ± 0.10; log₁₀ σ [km/s] =
/// 2.30 ± 0.02 (Elliptical)`.
fn hover_text(p: &ChartPoint, scene: &Scene<'_>, group: Option<&str>) -> String {
    let y = if p.upper_limit {
        format!("{} < {}", scene.y_label, dex(p.y))
    } else if (p.y_err_minus - p.y_err_plus).abs() < 0.005 {
        if p.y_err_plus > 0.0 {
            format!("{} = {} ± {}", scene.y_label, dex(p.y), dex(p.y_err_plus))
        } else {
            format!("{} = {}", scene.y_label, dex(p.y))
        }
    } else {
        format!(
            "{} = {} +{}/−{}",
            scene.y_label,
            dex(p.y),
            dex(p.y_err_plus),
            dex(p.y_err_minus)
        )
    };
    let x = if p.x_err > 0.0 {
        format!("{} = {} ± {}", scene.x_label, dex(p.x), dex(p.x_err))
    } else {
        format!("{} = {}", scene.x_label, dex(p.x))
    };
    match group {
        Some(g) => format!("{}: {y}; {x} ({g})", p.name),
        None => format!("{}: {y}; {x}", p.name),
    }
}

/// One point: an optional link around a group with its title, error bars or arrow, and marker.
/// `style` is `None` for the highlighted object, drawn as a star.
fn point_markup(
    out: &mut String,
    p: &ChartPoint,
    style: Option<MarkerStyle>,
    group: Option<&str>,
    scene: &Scene<'_>,
    frame: &Frame,
) {
    let map = &frame.map;
    let (cx, cy) = map.to_px(p.x, p.y);
    let colour = style.map_or(HIGHLIGHT_STROKE, |s| s.colour);
    if let Some(href) = &p.href {
        // A click opens the object's page, but the points are no tab stops: hundreds of them
        // would bury the page's controls, and the tables under the charts carry the same links.
        let _ = write!(out, r#"<a href="{}" tabindex="-1">"#, escape(href));
    }
    match style {
        Some(_) => {
            let _ = write!(out, r#"<g class="pt" data-group="{}">"#, p.group);
        }
        None => out.push_str(r#"<g class="pt highlight">"#),
    }
    let _ = write!(
        out,
        "<title>{}</title>",
        escape(&hover_text(p, scene, group))
    );
    // The error bars of an ordinary point go under its marker. The highlighted object's star is
    // large enough to hide its own bars, so they go over it, on a white halo that keeps them
    // visible on the star and on anything else.
    let mut bars = String::new();
    let bar = format!(
        r#"fill="none" stroke="{}" stroke-width="1.2" opacity="0.75""#,
        colour.hex()
    );
    let mut bar_paths: Vec<(&str, String)> = Vec::new();
    if p.x_err > 0.0 {
        let (left, _) = map.to_px(p.x - p.x_err, p.y);
        let (right, _) = map.to_px(p.x + p.x_err, p.y);
        bar_paths.push((
            "err-x",
            format!("M{} {}H{}", num(left), num(cy), num(right)),
        ));
    }
    if p.upper_limit {
        // Shorten the arrow rather than let it cross the x axis.
        let room = f64::from(frame.plot.bottom - 2) - cy;
        let length = f64::from(ARROW_PX).min(room).max(f64::from(ARROW_MIN_PX));
        bars.push_str(&style::arrow_element(cx, cy, length, colour));
    } else if p.y_err_minus > 0.0 || p.y_err_plus > 0.0 {
        let (_, low) = map.to_px(p.x, p.y - p.y_err_minus);
        let (_, high) = map.to_px(p.x, p.y + p.y_err_plus);
        bar_paths.push(("err-y", format!("M{} {}V{}", num(cx), num(low), num(high))));
    }
    for (class, d) in &bar_paths {
        if style.is_none() {
            let _ = write!(
                bars,
                r##"<path class="halo" d="{d}" fill="none" stroke="#FFFFFF" stroke-width="3.6"/>"##
            );
        }
        let _ = write!(bars, r#"<path class="{class}" d="{d}" {bar}/>"#);
    }
    match style {
        Some(s) => {
            out.push_str(&bars);
            out.push_str(&style::marker_element(cx, cy, s));
        }
        None => {
            out.push_str(&style::star_element(cx, cy, HIGHLIGHT_RADIUS));
            out.push_str(&bars);
        }
    }
    if p.outlier && style.is_some() {
        out.push_str(&style::ring_element(cx, cy));
    }
    if p.unresolved && style.is_some() {
        out.push_str(&style::unresolved_element(cx, cy));
    }
    out.push_str("</g>");
    if p.href.is_some() {
        out.push_str("</a>");
    }
    out.push('\n');
}

/// The legend column to the right of the plot, one row per entry (a long label wraps onto a
/// second line); rows that do not fit are summarised in a last "+ n more" row.
fn legend_markup(out: &mut String, legend: &[&LegendEntry], scene: &Scene<'_>, frame: &Frame) {
    if legend.is_empty() {
        return;
    }
    let symbol_x = f64::from(frame.legend_left + 22);
    let text_x = frame.legend_left + 40;
    let max_chars = {
        let room = f64::from(i32::try_from(scene.width).unwrap_or(i32::MAX) - text_x - 6);
        // Truncation towards zero is the intent: a partial glyph does not fit.
        #[expect(
            clippy::cast_possible_truncation,
            clippy::cast_sign_loss,
            reason = "the value is floored and at least 4"
        )]
        let chars = (room / (LEGEND_FONT_PX * GLYPH_EM)).floor().max(4.0) as usize;
        chars
    };
    let _ = writeln!(
        out,
        r#"<g class="legend" font-family="{FONT_FAMILY}" font-size="{}" fill="{}">"#,
        num(LEGEND_FONT_PX),
        INK.hex()
    );
    let last_row = frame.plot.bottom - 10;
    let row = if scene.thinning.dense {
        LEGEND_ROW_DENSE
    } else {
        LEGEND_ROW
    };
    let mut cy = frame.plot.top + 12;
    for (index, entry) in legend.iter().enumerate() {
        let lines = wrap_label(&entry.label, max_chars);
        let extra = LEGEND_LINE * i32::try_from(lines.len() - 1).unwrap_or(0);
        // Keep one row free for the "+ n more" line unless this is the last entry.
        let reserve = if index + 1 < legend.len() { row } else { 0 };
        if cy + extra + reserve > last_row {
            let _ = writeln!(
                out,
                r#"<text class="legend-more" x="{text_x}" y="{cy}" dy="0.35em">+ {} more</text>"#,
                legend.len() - index
            );
            break;
        }
        let y = f64::from(cy);
        out.push_str(r#"<g class="legend-entry">"#);
        match &entry.symbol {
            Symbol::Marker(s) => out.push_str(&style::marker_element(symbol_x, y, *s)),
            Symbol::Star => out.push_str(&style::star_element(symbol_x, y, 8.0)),
            Symbol::Arrow => out.push_str(&style::arrow_element(symbol_x, y - 9.0, 18.0, INK)),
            Symbol::Ring => {
                out.push_str(&style::marker_element(symbol_x, y, style::RING_SAMPLE));
                out.push_str(&style::ring_element(symbol_x, y));
            }
            Symbol::Unresolved => {
                out.push_str(&style::marker_element(symbol_x, y, style::RING_SAMPLE));
                out.push_str(&style::unresolved_element(symbol_x, y));
            }
            Symbol::Line(colour, width) => {
                let _ = write!(
                    out,
                    r#"<path d="M{} {}H{}" fill="none" stroke="{}" stroke-width="{width}"/>"#,
                    num(symbol_x - 12.0),
                    num(y),
                    num(symbol_x + 12.0),
                    colour.hex()
                );
            }
            Symbol::Shade(colour) => {
                let _ = write!(
                    out,
                    r#"<rect x="{}" y="{}" width="24" height="12" fill="{}" opacity="{}"/>"#,
                    num(symbol_x - 12.0),
                    num(y - 6.0),
                    colour.hex(),
                    density::SHADE_OPACITY
                );
            }
            Symbol::Blank => {}
            Symbol::Swatch(layers) => {
                for tint in layers {
                    let _ = write!(
                        out,
                        r#"<rect x="{}" y="{}" width="24" height="12" fill="{}" opacity="{}"/>"#,
                        num(symbol_x - 12.0),
                        num(y - 6.0),
                        tint.colour.hex(),
                        tint.opacity
                    );
                }
            }
        }
        let _ = write!(
            out,
            r#"<text x="{text_x}" y="{cy}" dy="0.35em">{}"#,
            escape(&lines[0])
        );
        for line in &lines[1..] {
            let _ = write!(
                out,
                r#"<tspan x="{text_x}" dy="{LEGEND_LINE}">{}</tspan>"#,
                escape(line)
            );
        }
        out.push_str("</text></g>\n");
        cy += row + extra;
    }
    out.push_str("</g>\n");
}

/// A legend label in at most two lines of `max_chars` characters: broken at the last space that
/// fits, the remainder shortened with "…" if it is still too long.
fn wrap_label(label: &str, max_chars: usize) -> Vec<String> {
    if label.chars().count() <= max_chars {
        return vec![label.to_owned()];
    }
    let cut = label
        .char_indices()
        .take(max_chars + 1)
        .filter(|&(_, c)| c == ' ')
        .map(|(i, _)| i)
        .last();
    match cut {
        Some(i) if i > 0 => vec![
            label[..i].to_owned(),
            truncate(label[i + 1..].trim_start(), max_chars),
        ],
        _ => vec![truncate(label, max_chars)],
    }
}

// ---------------------------------------------------------------------------------------------
// PNG

/// Draws a scene on a bitmap of [`super::PNG_WIDTH`] × [`super::PNG_HEIGHT`] pixels, every size
/// scaled from the chart's own, and encodes it as PNG marked with [`super::PNG_DPI`]. Every point
/// is drawn one by one (a bitmap's weight does not grow with them), with its error bars, limit
/// arrow, marker and outlier ring, and the legend without the density's rows.
fn render_png(scene: &Scene<'_>) -> Result<Vec<u8>, ChartError> {
    use plotters::prelude::{BitMapBackend, Circle, Polygon, Text};
    use plotters::style::text_anchor::{HPos, Pos, VPos};

    style::register_font();
    let (w, h) = (super::PNG_WIDTH, super::PNG_HEIGHT);
    let k = f64::from(w) / f64::from(scene.width);
    let px = |v: f64| -> i32 {
        #[expect(clippy::cast_possible_truncation, reason = "pixel sizes are small")]
        let p = (v * k).round() as i32;
        p
    };
    let upx = |v: u32| u32::try_from(px(f64::from(v))).unwrap_or(1).max(1);
    let b = scene.bounds;
    let ink = INK.plotters();
    let mut buf = vec![255u8; (w as usize) * (h as usize) * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(drawing_error)?;
        let area = if !scene.show_title || scene.title.trim().is_empty() {
            root.clone()
        } else {
            let font = (FONT_FAMILY, TITLE_FONT * k).into_font().color(&ink);
            root.titled(&clean(scene.title), font)
                .map_err(drawing_error)?
        };
        let (plot_area, legend_area) = area.split_horizontally(w - upx(legend_width(scene.width)));
        let mut chart = ChartBuilder::on(&plot_area)
            .margin(upx(MARGIN))
            .x_label_area_size(upx(X_LABEL_AREA))
            .y_label_area_size(upx(Y_LABEL_AREA))
            .build_cartesian_2d(b.x_min..b.x_max, b.y_min..b.y_max)
            .map_err(drawing_error)?;
        let (prx, pry) = chart.plotting_area().get_pixel_range();
        if !scene.is_blank() {
            let x_ticks = usize::try_from((prx.end - prx.start) / px(80.0).max(1))
                .unwrap_or(5)
                .clamp(3, 10);
            let y_ticks = usize::try_from((pry.end - pry.start) / px(60.0).max(1))
                .unwrap_or(5)
                .clamp(3, 10);
            let x_decimals = tick_decimals(b.x_min, b.x_max, x_ticks);
            let y_decimals = tick_decimals(b.y_min, b.y_max, y_ticks);
            let x_fmt = |v: &f64| tick_label(*v, x_decimals);
            let y_fmt = |v: &f64| tick_label(*v, y_decimals);
            draw_axes(
                &mut chart,
                (scene.x_label, scene.y_label),
                (x_ticks, y_ticks),
                &x_fmt,
                &y_fmt,
                k,
                upx(1),
            )?;
            for fill in &scene.fills {
                let style = fill.tint.colour.plotters().mix(fill.tint.opacity).filled();
                chart
                    .draw_series(std::iter::once(Polygon::new(fill.outline.clone(), style)))
                    .map_err(drawing_error)?;
            }
            for stroke in &scene.strokes {
                let style = stroke.colour.plotters().stroke_width(upx(stroke.width));
                chart
                    .draw_series(
                        stroke
                            .runs
                            .iter()
                            .map(|run| PathElement::new(run.clone(), style)),
                    )
                    .map_err(drawing_error)?;
            }
        }
        let at = |x: f64, y: f64| chart.backend_coord(&(x, y));
        let offset = |c: (i32, i32), pts: &[(f64, f64)]| -> Vec<(i32, i32)> {
            pts.iter()
                .map(|&(dx, dy)| (c.0 + px(dx), c.1 + px(dy)))
                .collect()
        };
        let marker = |c: (i32, i32), m: MarkerStyle| -> Result<(), ChartError> {
            let colour = m.colour.plotters();
            let fill = if m.filled {
                colour.filled()
            } else {
                WHITE.filled()
            };
            let edge = colour.stroke_width(upx(if m.filled { 1 } else { 2 }));
            match style::marker_offsets(m.shape, style::MARKER_RADIUS) {
                None => {
                    let r = px(style::MARKER_RADIUS);
                    root.draw(&Circle::new(c, r, fill)).map_err(drawing_error)?;
                    root.draw(&Circle::new(c, r, edge)).map_err(drawing_error)?;
                }
                Some(o) => {
                    let mut outline = offset(c, &o);
                    root.draw(&Polygon::new(outline.clone(), fill))
                        .map_err(drawing_error)?;
                    outline.push(outline[0]);
                    root.draw(&PathElement::new(outline, edge))
                        .map_err(drawing_error)?;
                }
            }
            Ok(())
        };
        let ring = |c: (i32, i32)| {
            root.draw(&Circle::new(
                c,
                px(style::RING_RADIUS),
                style::OUTLIER_RING.plotters().stroke_width(upx(2)),
            ))
            .map_err(drawing_error)
        };
        let slash = |c: (i32, i32)| {
            let h = px(style::UNRESOLVED_HALF);
            root.draw(&PathElement::new(
                vec![(c.0 - h, c.1 + h), (c.0 + h, c.1 - h)],
                style::UNRESOLVED_MARK.plotters().stroke_width(upx(2)),
            ))
            .map_err(drawing_error)
        };
        let arrow = |c: (i32, i32), length: f64, colour: Rgb| {
            let tip = (c.0, c.1 + px(length));
            let stroke = colour.plotters().stroke_width(upx(2));
            root.draw(&PathElement::new(vec![c, tip], stroke))
                .map_err(drawing_error)?;
            root.draw(&PathElement::new(
                vec![
                    (tip.0 - px(4.5), tip.1 - px(6.0)),
                    tip,
                    (tip.0 + px(4.5), tip.1 - px(6.0)),
                ],
                stroke,
            ))
            .map_err(drawing_error)
        };
        let bars = |p: &ChartPoint, colour: Rgb| -> Result<(), ChartError> {
            let c = at(p.x, p.y);
            let stroke = colour.plotters().mix(0.75).stroke_width(upx(1));
            if p.x_err > 0.0 {
                root.draw(&PathElement::new(
                    vec![at(p.x - p.x_err, p.y), at(p.x + p.x_err, p.y)],
                    stroke,
                ))
                .map_err(drawing_error)?;
            }
            if p.upper_limit {
                let room = f64::from(pry.end - 2 - c.1) / k;
                let length = f64::from(ARROW_PX).min(room).max(f64::from(ARROW_MIN_PX));
                arrow(c, length, colour)?;
            } else if p.y_err_minus > 0.0 || p.y_err_plus > 0.0 {
                root.draw(&PathElement::new(
                    vec![at(p.x, p.y - p.y_err_minus), at(p.x, p.y + p.y_err_plus)],
                    stroke,
                ))
                .map_err(drawing_error)?;
            }
            Ok(())
        };
        if !scene.is_empty() {
            for p in scene.points {
                let m = style::group_style(p.group);
                bars(p, m.colour)?;
                marker(at(p.x, p.y), m)?;
                if p.outlier {
                    ring(at(p.x, p.y))?;
                }
                if p.unresolved {
                    slash(at(p.x, p.y))?;
                }
            }
        }
        if let Some(hl) = scene.highlight {
            let c = at(hl.x, hl.y);
            let star = offset(c, &style::star_offsets(HIGHLIGHT_RADIUS));
            root.draw(&Polygon::new(
                star.clone(),
                style::HIGHLIGHT_FILL.plotters().filled(),
            ))
            .map_err(drawing_error)?;
            let mut edge = star;
            edge.push(edge[0]);
            root.draw(&PathElement::new(
                edge,
                HIGHLIGHT_STROKE.plotters().stroke_width(upx(2)),
            ))
            .map_err(drawing_error)?;
            bars(hl, HIGHLIGHT_STROKE)?;
        }

        // The legend: one row per entry, the label on one line (shortened if needed).
        let left = legend_area.get_base_pixel().0;
        let sx = left + px(22.0);
        let tx = left + px(40.0);
        let font = (FONT_FAMILY, LEGEND_FONT_PX * k * 1.24)
            .into_font()
            .color(&ink)
            .pos(Pos::new(HPos::Left, VPos::Center));
        let room = f64::from(i32::try_from(w).unwrap_or(i32::MAX) - tx) / k - 6.0;
        #[expect(
            clippy::cast_possible_truncation,
            clippy::cast_sign_loss,
            reason = "the value is floored and at least 4"
        )]
        let max_chars = (room / (LEGEND_FONT_PX * GLYPH_EM)).floor().max(4.0) as usize;
        let mut y = pry.start + px(12.0);
        for entry in &scene.legend {
            if y > pry.end - px(10.0) {
                break;
            }
            let c = (sx, y);
            match &entry.symbol {
                Symbol::Marker(m) => marker(c, *m)?,
                Symbol::Star => {
                    let star = offset(c, &style::star_offsets(8.0));
                    root.draw(&Polygon::new(
                        star,
                        style::HIGHLIGHT_FILL.plotters().filled(),
                    ))
                    .map_err(drawing_error)?;
                }
                Symbol::Arrow => arrow((sx, y - px(9.0)), 18.0, INK)?,
                Symbol::Ring => {
                    marker(c, style::RING_SAMPLE)?;
                    ring(c)?;
                }
                Symbol::Unresolved => {
                    marker(c, style::RING_SAMPLE)?;
                    slash(c)?;
                }
                Symbol::Line(colour, width) => {
                    root.draw(&PathElement::new(
                        vec![(sx - px(12.0), y), (sx + px(12.0), y)],
                        colour.plotters().stroke_width(upx(*width)),
                    ))
                    .map_err(drawing_error)?;
                }
                Symbol::Swatch(layers) => {
                    for tint in layers {
                        root.draw(&plotters::element::Rectangle::new(
                            [(sx - px(12.0), y - px(6.0)), (sx + px(12.0), y + px(6.0))],
                            tint.colour.plotters().mix(tint.opacity).filled(),
                        ))
                        .map_err(drawing_error)?;
                    }
                }
                Symbol::Shade(_) | Symbol::Blank => {}
            }
            root.draw(&Text::new(
                truncate(&clean(&entry.label), max_chars),
                (tx, y),
                font.clone(),
            ))
            .map_err(drawing_error)?;
            y += px(f64::from(LEGEND_ROW));
        }
        if scene.is_empty() {
            let centre = Pos::new(HPos::Center, VPos::Center);
            let cx = (prx.start + prx.end) / 2;
            let cy = (pry.start + pry.end) / 2;
            for (i, line) in [EMPTY_MESSAGE, EMPTY_HINT].iter().enumerate() {
                root.draw(&Text::new(
                    (*line).to_owned(),
                    (cx, cy + px(22.0) * i32::try_from(i).unwrap_or(0)),
                    (FONT_FAMILY, 15.0 * k * 1.24)
                        .into_font()
                        .color(&ink)
                        .pos(centre),
                ))
                .map_err(drawing_error)?;
            }
        }
        root.present().map_err(drawing_error)?;
    }
    let mut out = Vec::new();
    {
        let mut encoder = png::Encoder::new(&mut out, w, h);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        // Pixels per metre: dpi / 0.0254 m.
        let ppm = (f64::from(super::PNG_DPI) / 0.0254).round();
        #[expect(
            clippy::cast_possible_truncation,
            clippy::cast_sign_loss,
            reason = "a few thousand pixels per metre"
        )]
        let ppm = ppm as u32;
        encoder.set_pixel_dims(Some(png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }));
        let mut writer = encoder.write_header().map_err(drawing_error)?;
        writer.write_image_data(&buf).map_err(drawing_error)?;
    }
    Ok(out)
}
