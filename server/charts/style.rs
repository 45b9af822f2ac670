//! The charts' visual language: colours, marker shapes, sizes and fonts.
//!
//! Groups are told apart by three channels at once (colour, shape, filled or open), so a reader
//! who cannot separate two colours still separates the groups. The eight group colours were
//! chosen for this project: each has at least 3.4:1 contrast against white (the 3:1 floor for
//! graphical objects is WCAG 2.1 success criterion 1.4.11, from memory), and the first four, used
//! by most groupings, stay at least 15 CIELAB ΔE76 apart under simulated protanopia,
//! deuteranopia and tritanopia (severity 1 matrices of Machado, Oliveira & Fernandes 2009, IEEE
//! TVCG 15, 1291, from memory; computed with a short script when the palette was chosen).

use std::fmt::Write as _;

use super::markup::num;

/// An opaque sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Rgb(pub(super) u8, pub(super) u8, pub(super) u8);

impl Rgb {
    /// `#RRGGBB`, the form plotters writes too.
    pub(super) fn hex(self) -> String {
        format!("#{:02X}{:02X}{:02X}", self.0, self.1, self.2)
    }

    /// The same colour as plotters' type.
    pub(super) fn plotters(self) -> plotters::style::RGBColor {
        plotters::style::RGBColor(self.0, self.1, self.2)
    }
}

/// A translucent fill: colour and opacity (0–1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Tint {
    pub(super) colour: Rgb,
    pub(super) opacity: f64,
}

/// Group colours, in the order groups receive them.
pub(super) const GROUP_COLOURS: [Rgb; 8] = [
    Rgb(0x1F, 0x5F, 0xA8), // blue
    Rgb(0xD0, 0x70, 0x1A), // orange
    Rgb(0x3B, 0x2A, 0x20), // dark umber
    Rgb(0x94, 0x46, 0xD8), // violet
    Rgb(0xE0, 0x43, 0x7A), // rose
    Rgb(0x2E, 0x9B, 0x88), // teal
    Rgb(0x8A, 0x74, 0x14), // olive
    Rgb(0x6B, 0x7B, 0x8C), // slate
];

/// Text, axes and tick marks.
pub(super) const INK: Rgb = Rgb(0x22, 0x26, 0x2B);
/// Grid lines: light enough to sit behind everything.
pub(super) const GRID: Rgb = Rgb(0xE4, 0xE7, 0xEB);
/// The fitted line and the residual chart's zero line.
pub(super) const LINE: Rgb = Rgb(0x1B, 0x26, 0x33);
/// Line width of the fitted line in pixels.
pub(super) const LINE_WIDTH: u32 = 2;
/// ±2ε scatter band; the ±1ε band is drawn over it, so the inner band reads darker.
pub(super) const SCATTER_2: Tint = Tint {
    colour: Rgb(0x8F, 0xA3, 0xBA),
    opacity: 0.16,
};
/// ±1ε scatter band.
pub(super) const SCATTER_1: Tint = Tint {
    colour: Rgb(0x8F, 0xA3, 0xBA),
    opacity: 0.3,
};
/// Band of the mean relation: narrower and darker than the scatter bands.
pub(super) const MEAN_BAND: Tint = Tint {
    colour: Rgb(0x3E, 0x55, 0x70),
    opacity: 0.38,
};
/// Fill of the highlighted object's star.
pub(super) const HIGHLIGHT_FILL: Rgb = Rgb(0xF2, 0xB7, 0x05);
/// Outline of the highlighted object's star, dark so it reads against any band or marker.
pub(super) const HIGHLIGHT_STROKE: Rgb = Rgb(0x11, 0x11, 0x11);

/// The ring around an outlier's marker: a dark red that is not one of the group colours, and a
/// shape of its own (a ring), so it reads without colour too (7.3:1 against white).
pub(super) const OUTLIER_RING: Rgb = Rgb(0xA1, 0x1D, 0x2B);
/// Radius of the outlier ring in pixels: clear of every marker shape.
pub(super) const RING_RADIUS: f64 = 9.5;
/// The marker drawn inside the legend's ring: a neutral open circle.
pub(super) const RING_SAMPLE: MarkerStyle = MarkerStyle {
    colour: Rgb(0x6B, 0x7B, 0x8C),
    shape: Shape::Circle,
    filled: false,
};

/// The slash through the marker of an object whose sphere of influence is not resolved: an indigo
/// far from the outlier ring's dark red under every simulated colour-vision deficiency (blue
/// against red-brown), 10:1 against white, and a shape of its own (a diagonal stroke, which no
/// marker, error bar or ring has), so it reads without colour and beside a ring.
pub(super) const UNRESOLVED_MARK: Rgb = Rgb(0x3A, 0x2D, 0x8F);
/// Half the slash's extent along each axis, in pixels: past every marker shape, inside the
/// outlier ring (so the two read together), short enough not to crowd a dense sample.
pub(super) const UNRESOLVED_HALF: f64 = 6.5;

/// Marker size: circle radius in pixels; the other shapes are scaled to a similar area.
pub(super) const MARKER_RADIUS: f64 = 5.0;
/// Outer radius of the highlight star in pixels.
pub(super) const HIGHLIGHT_RADIUS: f64 = 11.0;
/// Length of an upper-limit arrow in pixels.
pub(super) const ARROW_PX: i32 = 26;
/// Shortest arrow drawn when the frame leaves less room.
pub(super) const ARROW_MIN_PX: i32 = 12;

/// Font family for all text; the browser picks its own sans-serif, nothing is downloaded.
pub(super) const FONT_FAMILY: &str = "sans-serif";
/// plotters writes `font-size = size / 1.24` into SVG (plotters-svg 0.3.7, `draw_text`), so these
/// sizes give 12.9 px tick labels, 14.5 px axis labels and 16.9 px titles.
pub(super) const TICK_FONT: f64 = 16.0;
/// Axis-label font size in plotters units.
pub(super) const AXIS_FONT: f64 = 18.0;
/// Title font size in plotters units.
pub(super) const TITLE_FONT: f64 = 21.0;
/// Legend and message font size in SVG pixels (written by this module, no plotters scaling).
pub(super) const LEGEND_FONT_PX: f64 = 13.0;
/// Mean glyph advance of a sans-serif face as a fraction of the font size, used only to shorten
/// legend labels that would overflow (common practice: about 0.5–0.6 em).
pub(super) const GLYPH_EM: f64 = 0.52;

/// Marker outline.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Shape {
    Circle,
    Square,
    TriangleUp,
    Diamond,
    TriangleDown,
    Cross,
}

const SHAPES: [Shape; 6] = [
    Shape::Circle,
    Shape::Square,
    Shape::TriangleUp,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::Cross,
];

/// How one group's markers look.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct MarkerStyle {
    pub(super) colour: Rgb,
    pub(super) shape: Shape,
    pub(super) filled: bool,
}

/// The style of group `index`. The first 16 groups all differ in at least one of colour, shape
/// and fill; later groups repeat the cycle.
pub(super) fn group_style(index: usize) -> MarkerStyle {
    let round = (index / GROUP_COLOURS.len()) % 2;
    // The second round of eight shifts the shape and flips the fill, so group 8 is not group 0.
    let shift = index + round * 3;
    MarkerStyle {
        colour: GROUP_COLOURS[index % GROUP_COLOURS.len()],
        shape: SHAPES[shift % SHAPES.len()],
        filled: (index + round).is_multiple_of(2),
    }
}

/// Paint attributes for a marker: filled markers take the colour inside and out, open markers a
/// white inside (which also hides error bars behind them) and a thicker coloured outline.
fn paint(style: MarkerStyle) -> String {
    let colour = style.colour.hex();
    if style.filled {
        format!(r#"fill="{colour}" stroke="{colour}" stroke-width="1""#)
    } else {
        format!(r##"fill="#FFFFFF" stroke="{colour}" stroke-width="1.8""##)
    }
}

/// `points` attribute of a polygon from (dx, dy) offsets around a centre.
fn polygon_points(cx: f64, cy: f64, offsets: &[(f64, f64)]) -> String {
    let mut out = String::new();
    for (i, (dx, dy)) in offsets.iter().enumerate() {
        if i > 0 {
            out.push(' ');
        }
        let _ = write!(out, "{},{}", num(cx + dx), num(cy + dy));
    }
    out
}

/// One SVG element drawing a group marker centred at (cx, cy) pixels, with `class="mk"`.
pub(super) fn marker_element(cx: f64, cy: f64, style: MarkerStyle) -> String {
    let paint = paint(style);
    let Some(offsets) = marker_offsets(style.shape, MARKER_RADIUS) else {
        return format!(
            r#"<circle class="mk" cx="{}" cy="{}" r="{}" {paint}/>"#,
            num(cx),
            num(cy),
            num(MARKER_RADIUS)
        );
    };
    format!(
        r#"<polygon class="mk" points="{}" {paint}/>"#,
        polygon_points(cx, cy, &offsets)
    )
}

/// The outline of a marker of radius `r` as offsets around its centre; `None` for the circle.
pub(super) fn marker_offsets(shape: Shape, r: f64) -> Option<Vec<(f64, f64)>> {
    // Shapes other than the circle are sized to roughly the circle's area so no group looks
    // heavier than another: a square of side √π r, triangles of circumradius 1.35 r, etc.
    let offsets: Vec<(f64, f64)> = match shape {
        Shape::Circle => return None,
        Shape::Square => {
            let h = 0.886 * r;
            vec![(-h, -h), (h, -h), (h, h), (-h, h)]
        }
        Shape::TriangleUp | Shape::TriangleDown => {
            let big = 1.35 * r;
            let sign = if shape == Shape::TriangleUp {
                1.0
            } else {
                -1.0
            };
            // Equilateral: the apex at distance R, the base at R/2 on the other side.
            let half_base = big * 0.866;
            vec![
                (0.0, -sign * big),
                (half_base, sign * big * 0.5),
                (-half_base, sign * big * 0.5),
            ]
        }
        Shape::Diamond => {
            let h = 1.25 * r;
            vec![(0.0, -h), (h, 0.0), (0.0, h), (-h, 0.0)]
        }
        Shape::Cross => {
            let a = 1.3 * r;
            let w = 0.42 * r;
            vec![
                (-w, -a),
                (w, -a),
                (w, -w),
                (a, -w),
                (a, w),
                (w, w),
                (w, a),
                (-w, a),
                (-w, w),
                (-a, w),
                (-a, -w),
                (-w, -w),
            ]
        }
    };
    Some(offsets)
}

/// A five-pointed star centred at (cx, cy) with outer radius `r` pixels, for the highlighted
/// object, with `class="mk star"`.
pub(super) fn star_element(cx: f64, cy: f64, r: f64) -> String {
    let offsets = star_offsets(r);
    format!(
        r#"<polygon class="mk star" points="{}" fill="{}" stroke="{}" stroke-width="1.5" stroke-linejoin="round"/>"#,
        polygon_points(cx, cy, &offsets),
        HIGHLIGHT_FILL.hex(),
        HIGHLIGHT_STROKE.hex()
    )
}

/// The outline of a five-pointed star of outer radius `r`, as offsets around its centre.
pub(super) fn star_offsets(r: f64) -> Vec<(f64, f64)> {
    let inner = 0.45 * r;
    (0..10)
        .map(|k| {
            let radius = if k % 2 == 0 { r } else { inner };
            // Start at the top (−90°) and step 36° between outer and inner vertices.
            let angle = (f64::from(k) * 36.0 - 90.0).to_radians();
            (radius * angle.cos(), radius * angle.sin())
        })
        .collect()
}

/// A downward arrow from (x, y) pixels, `length` pixels long, as one open path with
/// `class="limit-arrow"`: the shaft and a chevron head.
pub(super) fn arrow_element(x: f64, y: f64, length: f64, colour: Rgb) -> String {
    let tip = y + length;
    let head_w = 4.5;
    let head_h = 6.0;
    format!(
        r#"<path class="limit-arrow" d="M{x} {y}V{tip}M{l} {h}L{x} {tip}L{r} {h}" fill="none" stroke="{c}" stroke-width="1.6" stroke-linecap="round" stroke-linejoin="round"/>"#,
        x = num(x),
        y = num(y),
        tip = num(tip),
        l = num(x - head_w),
        r = num(x + head_w),
        h = num(tip - head_h),
        c = colour.hex()
    )
}

/// The ring around an outlier's marker, centred at (cx, cy) pixels, with `class="outlier-ring"`.
pub(super) fn ring_element(cx: f64, cy: f64) -> String {
    format!(
        r#"<circle class="outlier-ring" cx="{}" cy="{}" r="{}" fill="none" stroke="{}" stroke-width="2"/>"#,
        num(cx),
        num(cy),
        num(RING_RADIUS),
        OUTLIER_RING.hex()
    )
}

/// The slash through the marker of an object whose sphere of influence is not resolved, from
/// lower left to upper right about (cx, cy) pixels, with `class="unresolved-mark"`.
pub(super) fn unresolved_element(cx: f64, cy: f64) -> String {
    format!(
        r#"<path class="unresolved-mark" d="M{} {}L{} {}" fill="none" stroke="{}" stroke-width="2" stroke-linecap="round"/>"#,
        num(cx - UNRESOLVED_HALF),
        num(cy + UNRESOLVED_HALF),
        num(cx + UNRESOLVED_HALF),
        num(cy - UNRESOLVED_HALF),
        UNRESOLVED_MARK.hex(),
    )
}

/// DejaVu Sans, embedded so text measures and renders the same on every machine (its licence is
/// in `fonts/DejaVuSans-LICENSE.txt`).
static FONT_BYTES: &[u8] = include_bytes!("fonts/DejaVuSans.ttf");

/// Registers the embedded font as [`FONT_FAMILY`] for plotters, once per process. plotters
/// measures text with it for the SVG (which the browser renders with its own sans-serif) and
/// draws text with it on the PNG.
pub(super) fn register_font() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        // The embedded file is a valid font; were it not, plotters would report each text.
        let _ = plotters::style::register_font(
            FONT_FAMILY,
            plotters::style::FontStyle::Normal,
            FONT_BYTES,
        );
    });
}
