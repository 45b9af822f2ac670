//! Charts for the relation pages and the place page: pure functions from plain data to SVG strings.
//!
//! Two charts exist: [`relation_svg`] (log₁₀ M_BH against log₁₀ of a host property, with the fitted
//! line, the band of the mean relation and the ±1ε and ±2ε scatter bands) and [`residual_svg`]
//! (residuals in dex against any property, with a zero line and a ±1ε band).
//!
//! How a chart is built, and why in two layers:
//!
//! 1. plotters draws the frame, the axes with their ticks and labels, the bands and the line.
//! 2. The galaxies themselves (markers, error bars, upper-limit arrows), the legend and the empty
//!    message are appended as raw SVG before `</svg>`, placed with the same coordinate mapping
//!    plotters used. plotters cannot emit `<a>` or `<title>`, and each point must name its galaxy on
//!    hover and open the galaxy's page on a click, with no script in the browser.
//!
//! A large sample (more than [`DENSITY_THRESHOLD`] points) is drawn as a density: shaded cells of
//! a pixel grid, a few shades whose counts the legend gives with the number of objects shaded, and
//! on it, one by one, only the points that matter (marked with [`ChartPoint::emphasis`], few upper
//! limits, small groups, the highlighted object). A chart of 100,000 objects then weighs 120–130 KB
//! instead of about 50 MB. Below the threshold every point is drawn, as before.
//!
//! Every piece of caller text is XML-escaped (plotters escapes what it draws; this module escapes
//! what it appends), links must be site-relative paths, and every number is checked to be finite
//! before anything is drawn, so the output never contains `NaN`. The SVG uses presentation
//! attributes only: no `<style>` element (it would leak into the page it is inlined in), no
//! script, no external resource.
//!
//! The data are plain Rust values: the caller converts from its unit types, taking log₁₀ first;
//! both axes of the relation chart are log₁₀ values in dex.

mod density;
mod draw;
mod geometry;
mod kinematics;
mod markup;
pub mod planning;
mod style;
#[cfg(test)]
mod tests;

pub use kinematics::{DiskChart, DiskChartPoint, DiskCurve, kinematics_svg};

/// Default chart width in pixels (fits a laptop-width page column).
pub const DEFAULT_WIDTH: u32 = 720;
/// Default chart height in pixels.
pub const DEFAULT_HEIGHT: u32 = 480;
/// Smallest accepted chart width in pixels; below it the legend column squeezes the plot away.
pub const MIN_WIDTH: u32 = 480;
/// Smallest accepted chart height in pixels.
pub const MIN_HEIGHT: u32 = 320;
/// Largest accepted chart width or height in pixels.
pub const MAX_SIZE: u32 = 4000;
/// The message an empty chart shows in its frame.
pub const EMPTY_MESSAGE: &str = "No object matches this selection";
/// The second line of the empty chart's message: what to change.
pub const EMPTY_HINT: &str = "Widen or clear the filters above to include objects.";

/// Above this many points a chart draws the sample as a density (shaded cells of a grid over the
/// plot) and only the points that matter one by one. Each individually drawn point costs about
/// 450 bytes (link, hover name, error bars, marker), so 2,000 points already make a chart of about
/// 1 MB, and on a plot of about 440 × 370 pixels that many markers of 10 pixels overlap so much that
/// single points can no longer be told apart anyway.
pub const DENSITY_THRESHOLD: usize = 2_000;
/// In a density chart, at most this many points marked with [`ChartPoint::emphasis`] are drawn one
/// by one (the first ones in the caller's order); the rest join the density, and the legend says
/// so. An outlier drawn on its own costs about 800 bytes (link, hover name, error bars, marker,
/// ring, and the slash of an unresolved sphere of influence): 200 of them keep a relation chart
/// near 200 KB, and its page, with two residual charts of [`MAX_EMPHASISED`] / 2 each, near
/// 400 KB (470 KB with 300 on the plane's page of 100,000 invented galaxies).
pub const MAX_EMPHASISED: usize = 200;
/// In a density chart, upper limits are drawn one by one as arrows only when there are at most
/// this many of them (besides the emphasised ones); otherwise they all join the density at their
/// limit value, and the legend says so.
pub const MAX_LIMITS_DRAWN: usize = 300;
/// In a density chart, a group with at most this many points is drawn one by one, so a small
/// subsample stays visible beside a large one.
pub const SMALL_GROUP: usize = 50;
/// In a density chart, at most this many points are drawn one by one in all (emphasised points,
/// upper limits and small groups together; the highlighted object comes on top). With a sample
/// spread over every cell and long names, 400 points keep a chart under 300 KB; 500 did not.
pub const MAX_INDIVIDUAL: usize = 400;

/// One galaxy on a chart.
///
/// Build one with struct update syntax from [`ChartPoint::default`] when only some fields matter.
///
/// `x` and `y` are in the units of the chart's axes: log₁₀ values in dex on a relation chart; on a
/// residual chart `y` is the residual in dex and `x` is whatever property the caller names. Errors
/// are 1σ half-widths in the same units and must be zero or positive.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ChartPoint {
    /// Name shown on hover (any text; escaped on output).
    pub name: String,
    /// Site-relative link opened by a click, e.g. `/galaxies/12`; `None` draws the point unlinked.
    pub href: Option<String>,
    /// Horizontal position, in the x axis's units.
    pub x: f64,
    /// 1σ error of `x`, same units; drawn as a horizontal bar when positive.
    pub x_err: f64,
    /// Vertical position, in the y axis's units; for an upper limit, the limit itself.
    pub y: f64,
    /// Lower 1σ error of `y` (distance below `y`), same units.
    pub y_err_minus: f64,
    /// Upper 1σ error of `y` (distance above `y`), same units.
    pub y_err_plus: f64,
    /// `true` when `y` is an upper limit: drawn as a downward arrow, without a vertical error bar.
    pub upper_limit: bool,
    /// Index into the chart's `groups`; chooses the marker's shape, fill and colour.
    pub group: usize,
    /// `true` when the caller wants this point drawn one by one even when the chart draws its
    /// sample as a density (above [`DENSITY_THRESHOLD`] points), e.g. an object off the relation.
    /// It changes nothing on a chart with fewer points, where every point is drawn.
    pub emphasis: bool,
    /// `true` when the object is an outlier from the fitted relation (the page lists it): the
    /// chart rings its marker and names the ring in the legend.
    pub outlier: bool,
    /// `true` when the object's sphere of influence is known to be unresolved (θ_infl over the
    /// resolution below the threshold; `relations::place`): the chart draws an indigo slash
    /// through its marker and names it in the legend. On a density chart these points are drawn
    /// one by one after the emphasised ones, sharing [`MAX_EMPHASISED`].
    pub unresolved: bool,
}

/// A group of points sharing one marker style, named in the legend (e.g. a morphology).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Group {
    /// Legend text for the group.
    pub label: String,
}

/// A fitted relation, as the chart draws it.
///
/// # Model
///
/// ```text
/// y(x) = α + β (x − x₀) + β₂ (x − x₀)²
/// ```
///
/// where x = log₁₀ X and y = log₁₀ (M_BH / M☉), both in dex; x₀ is the pivot (dex); α is
/// log₁₀ M_BH at the pivot (dex); β the slope (dimensionless); β₂ the optional log-quadratic
/// curvature (dex⁻¹; zero for the power law); ε the intrinsic scatter in log₁₀ M_BH (dex), drawn
/// as the bands y(x) ± ε and y(x) ± 2ε.
///
/// # References
///
/// The power law with a pivot near the sample mean: Tremaine et al. 2002, ApJ 574, 740 (from
/// memory; section not re-read). The log-quadratic term β₂ [log₁₀(σ/200 km s⁻¹)]²: Wyithe 2006, MNRAS 365, 1082.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineSpec {
    /// Zero point α: y at the pivot, in dex.
    pub alpha: f64,
    /// Slope β (dimensionless).
    pub beta: f64,
    /// Log-quadratic curvature β₂ in dex⁻¹, if the fit has one.
    pub beta2: Option<f64>,
    /// Pivot x₀ on the x axis, in dex.
    pub pivot: f64,
    /// Intrinsic scatter ε in dex; zero draws no scatter bands.
    pub scatter_dex: f64,
}

impl LineSpec {
    /// The relation's y at `x` (both in dex): `α + β (x − x₀) + β₂ (x − x₀)²`, see [`LineSpec`].
    #[must_use]
    pub fn y_at(&self, x: f64) -> f64 {
        let dx = x - self.pivot;
        self.alpha + self.beta * dx + self.beta2.unwrap_or(0.0) * dx * dx
    }
}

/// One sample of the band of the mean relation: at `x`, the mean relation lies between `lower` and
/// `upper` (all in dex) at the confidence level the caller chose.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BandPoint {
    /// Position on the x axis, in dex.
    pub x: f64,
    /// Lower edge of the band at `x`, in dex.
    pub lower: f64,
    /// Upper edge of the band at `x`, in dex.
    pub upper: f64,
}

/// Everything a scaling-relation chart shows.
///
/// Build it with struct update syntax from [`RelationChart::default`], which has the default size
/// and nothing to draw.
#[derive(Debug, Clone, PartialEq)]
pub struct RelationChart {
    /// Name of the chart: its accessible name, and drawn above the chart when `show_title` is
    /// set; empty for none.
    pub title: String,
    /// `true` draws `title` above the chart, for a file that must stand alone (a download); a
    /// page chart leaves it off, as the page heading already names the chart.
    pub show_title: bool,
    /// x-axis label with its unit, e.g. [`sigma_axis_label`].
    pub x_label: String,
    /// y-axis label with its unit, e.g. [`black_hole_mass_axis_label`].
    pub y_label: String,
    /// The galaxies.
    pub points: Vec<ChartPoint>,
    /// Marker groups; every point's `group` indexes into this list.
    pub groups: Vec<Group>,
    /// The fitted relation, if any; drawn across the whole x range.
    pub line: Option<LineSpec>,
    /// Band of the mean relation (any order of `x`); empty for none, otherwise at least two samples.
    pub mean_band: Vec<BandPoint>,
    /// The object being placed or reviewed, drawn as a star with its own legend entry (its
    /// `group` is ignored; its `name` is the legend text).
    pub highlight: Option<ChartPoint>,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
}

impl Default for RelationChart {
    fn default() -> Self {
        Self {
            title: String::new(),
            show_title: false,
            x_label: String::new(),
            y_label: black_hole_mass_axis_label(),
            points: Vec::new(),
            groups: Vec::new(),
            line: None,
            mean_band: Vec::new(),
            highlight: None,
            width: DEFAULT_WIDTH,
            height: DEFAULT_HEIGHT,
        }
    }
}

/// Everything a residual chart shows: residuals (observed minus relation, in dex) against a
/// property the caller names, with a zero line and a ±1ε band.
#[derive(Debug, Clone, PartialEq)]
pub struct ResidualChart {
    /// Name of the chart: its accessible name, and drawn above the chart when `show_title` is
    /// set; empty for none.
    pub title: String,
    /// `true` draws `title` above the chart, for a file that must stand alone (a download); a
    /// page chart leaves it off, as the page heading already names the chart.
    pub show_title: bool,
    /// x-axis label with its unit (the relation's x, or a second property).
    pub x_label: String,
    /// y-axis label with its unit, e.g. [`residual_axis_label`].
    pub y_label: String,
    /// The galaxies, with `y` the residual in dex and its errors in dex.
    pub points: Vec<ChartPoint>,
    /// Marker groups; every point's `group` indexes into this list.
    pub groups: Vec<Group>,
    /// Intrinsic scatter ε in dex, drawn as a band of ±ε around zero; zero draws no band.
    pub scatter_dex: f64,
    /// The object being placed or reviewed, drawn as a star (its `group` is ignored).
    pub highlight: Option<ChartPoint>,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
}

impl Default for ResidualChart {
    fn default() -> Self {
        Self {
            title: String::new(),
            show_title: false,
            x_label: String::new(),
            y_label: residual_axis_label(),
            points: Vec::new(),
            groups: Vec::new(),
            scatter_dex: 0.0,
            highlight: None,
            width: DEFAULT_WIDTH,
            height: DEFAULT_HEIGHT,
        }
    }
}

/// Why a chart could not be drawn.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ChartError {
    /// A number is NaN or infinite.
    #[error("The {field} of {item} is not a finite number.")]
    NonFinite {
        /// What the number belongs to, e.g. `point "A-1"`.
        item: String,
        /// Which number, e.g. `y error`.
        field: &'static str,
    },
    /// An error bar or the scatter is negative.
    #[error("The {field} of {item} is negative.")]
    Negative {
        /// What the number belongs to.
        item: String,
        /// Which number.
        field: &'static str,
    },
    /// A point names a group that does not exist.
    #[error("The {item} belongs to group {group}, but only {groups} groups are defined.")]
    UnknownGroup {
        /// The point.
        item: String,
        /// Its group index.
        group: usize,
        /// How many groups the chart has.
        groups: usize,
    },
    /// A link is not a site-relative path; such a point is refused rather than drawn unlinked.
    #[error("The link of {item} is not a site-relative path starting with a single '/'.")]
    UnsafeHref {
        /// The point.
        item: String,
    },
    /// The mean-relation band has a single sample.
    #[error("The mean-relation band has {len} sample, and a band needs at least two.")]
    BandTooShort {
        /// Number of samples given.
        len: usize,
    },
    /// A band sample has its lower edge above its upper edge.
    #[error("Sample {index} of the mean-relation band has its lower edge above its upper edge.")]
    BandInverted {
        /// Index of the sample in the caller's list.
        index: usize,
    },
    /// The requested size is too small or too large.
    #[error(
        "A chart of {width}×{height} pixels is outside the supported size of {MIN_WIDTH}–{MAX_SIZE} by {MIN_HEIGHT}–{MAX_SIZE} pixels."
    )]
    BadSize {
        /// Requested width in pixels.
        width: u32,
        /// Requested height in pixels.
        height: u32,
    },
    /// plotters reported a failure while drawing.
    #[error("The chart could not be drawn: {0}.")]
    Drawing(String),
}

/// Draws a scaling-relation chart: every galaxy with its error bars (upper limits as downward
/// arrows), markers by group, the fitted line, the band of the mean relation, the ±1ε and ±2ε
/// scatter bands and the highlighted object, with a legend. Each point is wrapped in a link to its
/// page and carries a `<title>` naming it. Above [`DENSITY_THRESHOLD`] points the sample is drawn as
/// a density and only the points that matter one by one (see the module's documentation).
///
/// With no points the chart is a frame with the axis labels and [`EMPTY_MESSAGE`]. A single point
/// or a zero range is padded to a readable range.
///
/// # Errors
///
/// [`ChartError`] when a number is not finite (the error names the point), an error bar or the
/// scatter is negative, a point's group does not exist, a link is not a site-relative path, the
/// band is malformed, or the size is out of range.
pub fn relation_svg(chart: &RelationChart) -> Result<String, ChartError> {
    draw::relation(chart)
}

/// Draws `chart` as [`relation_svg`] does, with `points` in place of `chart.points` (which
/// are not read): several charts of one sample (a galaxy page's placement against a
/// survey-sized relation, one per galaxy) share one list of points instead of copying it.
///
/// # Errors
///
/// As [`relation_svg`].
pub fn relation_svg_of(chart: &RelationChart, points: &[ChartPoint]) -> Result<String, ChartError> {
    draw::relation_of(chart, points)
}

/// Draws a residual chart: residuals in dex against the property in `x`, with a zero line, the
/// ±1ε band, error bars, upper limits as downward arrows, markers by group and the highlighted
/// object; points are linked and titled as in [`relation_svg`].
///
/// # Errors
///
/// As [`relation_svg`].
pub fn residual_svg(chart: &ResidualChart) -> Result<String, ChartError> {
    draw::residual(chart)
}

/// Draws the virial-factor calibration chart (docs/methods.md §4.3): log₁₀ σ against
/// log₁₀ M_BH with the quiescent galaxies (group 0, `quiescent_label`), the quiescent fit
/// `line`, and the AGN at log₁₀ VP + log₁₀ ⟨f⟩ (group 1, `agn_label`: its own marker shape and
/// legend entry). `title` is the chart's accessible name. Every text is escaped by
/// [`relation_svg`], which draws it; the points' own `group` fields are overwritten.
///
/// # Errors
///
/// As [`relation_svg`].
pub fn virial_calibration_svg(
    title: &str,
    quiescent: (&str, Vec<ChartPoint>),
    agn: (&str, Vec<ChartPoint>),
    line: Option<LineSpec>,
) -> Result<String, ChartError> {
    let points = quiescent
        .1
        .into_iter()
        .map(|p| ChartPoint { group: 0, ..p })
        .chain(agn.1.into_iter().map(|p| ChartPoint { group: 1, ..p }))
        .collect();
    relation_svg(&RelationChart {
        title: title.to_owned(),
        x_label: sigma_axis_label(),
        points,
        groups: vec![
            Group {
                label: quiescent.0.to_owned(),
            },
            Group {
                label: agn.0.to_owned(),
            },
        ],
        line,
        ..RelationChart::default()
    })
}

/// Width of the PNG chart in pixels: 3.5 inches at [`PNG_DPI`], a single journal column
/// (common practice: single columns are about 3.3–3.5 inches wide).
pub const PNG_WIDTH: u32 = 1050;
/// Height of the PNG chart in pixels (the SVG chart's 3:2 proportions).
pub const PNG_HEIGHT: u32 = 700;
/// Resolution written into the PNG, in dots per inch (common practice for print figures).
pub const PNG_DPI: u32 = 300;

/// Draws the relation chart as a PNG of [`PNG_WIDTH`] × [`PNG_HEIGHT`] pixels marked with
/// [`PNG_DPI`], for print: as [`relation_svg`], with every point drawn one by one, without
/// links, and text in the embedded DejaVu Sans.
///
/// # Errors
///
/// As [`relation_svg`].
pub fn relation_png(chart: &RelationChart) -> Result<Vec<u8>, ChartError> {
    draw::relation_png(chart)
}

/// x-axis label for the M_BH–σ relation: `log₁₀ σ [km/s]`.
#[must_use]
pub fn sigma_axis_label() -> String {
    "log₁₀ σ [km/s]".to_owned()
}

/// x-axis label for the M_BH–M_bulge relation: `log₁₀ M_bulge [M☉]`.
#[must_use]
pub fn bulge_mass_axis_label() -> String {
    "log₁₀ M_bulge [M☉]".to_owned()
}

/// x-axis label for the M_BH–L relation in a photometric band, e.g. `log₁₀ L_K [L☉,K]` for "K".
#[must_use]
pub fn luminosity_axis_label(band: &str) -> String {
    format!("log₁₀ L_{band} [L☉,{band}]")
}

/// y-axis label for the black-hole mass: `log₁₀ M_BH [M☉]`.
#[must_use]
pub fn black_hole_mass_axis_label() -> String {
    "log₁₀ M_BH [M☉]".to_owned()
}

/// y-axis label for residuals from a relation: `Δ log₁₀ M_BH [dex]`.
#[must_use]
pub fn residual_axis_label() -> String {
    "Δ log₁₀ M_BH [dex]".to_owned()
}
