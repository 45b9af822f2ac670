//! The disk-fit chart (docs/methods.md §4.8): line-of-sight velocity against position along
//! the major axis with error bars, the point-mass and the extended-mass model curves, the
//! fitted centre and systemic velocity; below it, a panel of the residuals from the quoted
//! model.
//!
//! As the relation charts: plotters draws the two frames, grids, ticks and axis labels; the
//! points, error bars, curves, markers of the centre and v_sys, and the legend are raw SVG
//! placed with the same mapping (one decimal). The root is `role="img"` named by a text
//! summary (also its `<desc>`); every caller text is escaped.

use std::fmt::Write as _;

use plotters::prelude::{ChartBuilder, IntoDrawingArea as _, SVGBackend};
use plotters::style::colors::WHITE;

use super::ChartError;
use super::draw::{draw_axes, drawing_error};
use super::markup::{escape, minus_sign, num};
use super::style::{self, FONT_FAMILY, INK, LEGEND_FONT_PX};

/// Width of the chart, pixels.
const WIDTH: u32 = 720;
/// Height of the legend strip above the velocity panel, pixels.
const LEGEND_H: u32 = 56;
/// Height of the velocity panel, pixels.
const TOP_H: u32 = 380;
/// Height of the residual panel, pixels.
const BOTTOM_H: u32 = 210;
/// The point-mass curve's colour (dark blue, 9.6:1 on white).
const POINT_MASS: &str = "#1B4F8A";
/// The extended-mass curve's colour (dark orange-brown, 5.9:1 on white), drawn dashed.
const EXTENDED: &str = "#9A4A00";
/// Points and error bars.
const POINTS: &str = "#22262B";
/// The centre and v_sys guides (grey, 4.6:1 on white).
const GUIDE: &str = "#6B7077";

/// One measured point.
#[derive(Debug, Clone, PartialEq)]
pub struct DiskChartPoint {
    /// Position along the major axis, pc.
    pub x_pc: f64,
    /// Line-of-sight velocity, km/s.
    pub v_km_s: f64,
    /// Its 1σ error, km/s.
    pub err_km_s: f64,
    /// v − v_model of the quoted model, km/s.
    pub residual_km_s: f64,
}

/// A model curve sampled along the axis.
#[derive(Debug, Clone, PartialEq)]
pub struct DiskCurve {
    /// The model in words, for the legend.
    pub label: String,
    /// (position pc, velocity km/s) samples, in order; a sample that is not finite breaks the
    /// curve (the centre, where a point mass's speed diverges).
    pub samples: Vec<(f64, f64)>,
    /// Drawn dashed (the extended model), else solid.
    pub dashed: bool,
}

/// The chart's data.
#[derive(Debug, Clone, PartialEq)]
pub struct DiskChart {
    /// The accessible name's first sentence.
    pub title: String,
    /// The measured points.
    pub points: Vec<DiskChartPoint>,
    /// The model curves (point mass first).
    pub curves: Vec<DiskCurve>,
    /// The fitted centre, pc.
    pub centre_pc: f64,
    /// The fitted systemic velocity, km/s.
    pub v_sys_km_s: f64,
    /// Which model the residuals are from, in words.
    pub residual_model: String,
}

/// A linear map from data to pixels inside one plot.
struct Map {
    x: (f64, f64),
    y: (f64, f64),
    px: (f64, f64),
    py: (f64, f64),
}

impl Map {
    fn at(&self, x: f64, y: f64) -> (f64, f64) {
        (
            self.px.0 + (x - self.x.0) / (self.x.1 - self.x.0) * (self.px.1 - self.px.0),
            self.py.1 - (y - self.y.0) / (self.y.1 - self.y.0) * (self.py.1 - self.py.0),
        )
    }

    fn inside(&self, x: f64, y: f64) -> bool {
        x >= self.x.0 && x <= self.x.1 && y >= self.y.0 && y <= self.y.1
    }
}

/// `(lo, hi)` widened by 8 % each side (a zero range by one unit).
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    let span = hi - lo;
    if span <= 0.0 {
        return (lo - 1.0, hi + 1.0);
    }
    (lo - 0.08 * span, hi + 0.08 * span)
}

fn check(v: f64, item: &str, field: &'static str) -> Result<(), ChartError> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(ChartError::NonFinite {
            item: item.to_owned(),
            field,
        })
    }
}

/// Draws a frame with its grid, ticks and axis labels; the map of its plot.
fn frame(
    area: &plotters::drawing::DrawingArea<SVGBackend<'_>, plotters::coord::Shift>,
    x: (f64, f64),
    y: (f64, f64),
    x_label: &str,
    y_label: &str,
) -> Result<Map, ChartError> {
    let mut chart = ChartBuilder::on(area)
        .margin(10)
        .x_label_area_size(48)
        .y_label_area_size(70)
        .build_cartesian_2d(x.0..x.1, y.0..y.1)
        .map_err(drawing_error)?;
    let fmt = |v: &f64| minus_sign(&format!("{}", (v * 1000.0).round() / 1000.0));
    draw_axes(&mut chart, (x_label, y_label), (7, 6), &fmt, &fmt, 1.0, 1)?;
    let (px, py) = chart.plotting_area().get_pixel_range();
    Ok(Map {
        x,
        y,
        px: (f64::from(px.start), f64::from(px.end)),
        py: (f64::from(py.start), f64::from(py.end)),
    })
}

/// A polyline through the samples inside the map, broken where a sample is outside or not
/// finite.
fn curve_path(map: &Map, samples: &[(f64, f64)]) -> String {
    let mut d = String::new();
    let mut open = false;
    for &(x, y) in samples {
        if x.is_finite() && y.is_finite() && map.inside(x, y) {
            let (px, py) = map.at(x, y);
            let _ = write!(
                d,
                "{}{},{} ",
                if open { "L" } else { "M" },
                num(px),
                num(py)
            );
            open = true;
        } else {
            open = false;
        }
    }
    d
}

/// Draws the disk-fit chart as SVG.
///
/// # Errors
/// [`ChartError::NonFinite`] when a point's number is not finite (naming the point), and
/// [`ChartError::Drawing`] when plotters fails.
pub fn kinematics_svg(chart: &DiskChart) -> Result<String, ChartError> {
    for (i, p) in chart.points.iter().enumerate() {
        let item = format!("point {}", i + 1);
        check(p.x_pc, &item, "position")?;
        check(p.v_km_s, &item, "velocity")?;
        check(p.err_km_s, &item, "velocity error")?;
        check(p.residual_km_s, &item, "residual")?;
        if p.err_km_s < 0.0 {
            return Err(ChartError::Negative {
                item,
                field: "velocity error",
            });
        }
    }
    check(chart.centre_pc, "the centre", "position")?;
    check(chart.v_sys_km_s, "the systemic velocity", "velocity")?;
    let fold = |f: &dyn Fn(&DiskChartPoint) -> f64, g: &dyn Fn(&DiskChartPoint) -> f64| {
        chart
            .points
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                (lo.min(f(p)), hi.max(g(p)))
            })
    };
    let (x_lo, x_hi) = fold(&|p| p.x_pc, &|p| p.x_pc);
    let (v_lo, v_hi) = fold(&|p| p.v_km_s - p.err_km_s, &|p| p.v_km_s + p.err_km_s);
    let (r_lo, r_hi) = fold(&|p| p.residual_km_s - p.err_km_s, &|p| {
        p.residual_km_s + p.err_km_s
    });
    let empty = chart.points.is_empty();
    let x = if empty {
        (-1.0, 1.0)
    } else {
        padded(x_lo.min(chart.centre_pc), x_hi.max(chart.centre_pc))
    };
    let v = if empty {
        (chart.v_sys_km_s - 100.0, chart.v_sys_km_s + 100.0)
    } else {
        padded(v_lo.min(chart.v_sys_km_s), v_hi.max(chart.v_sys_km_s))
    };
    let r_abs = if empty {
        1.0
    } else {
        r_lo.abs().max(r_hi.abs())
    };
    let r = padded(-r_abs, r_abs);

    style::register_font();
    let height = LEGEND_H + TOP_H + BOTTOM_H;
    let mut svg = String::new();
    let (top_map, bottom_map) = {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        root.fill(&WHITE)
            .map_err(|e| ChartError::Drawing(e.to_string()))?;
        let (_, plots) = root.split_vertically(LEGEND_H);
        let (top, bottom) = plots.split_vertically(TOP_H);
        let top_map = frame(
            &top,
            x,
            v,
            "Position along the major axis [pc]",
            "Line-of-sight velocity [km/s]",
        )?;
        let bottom_map = frame(
            &bottom,
            x,
            r,
            "Position along the major axis [pc]",
            "Residual [km/s]",
        )?;
        root.present()
            .map_err(|e| ChartError::Drawing(e.to_string()))?;
        (top_map, bottom_map)
    };
    let body = svg
        .strip_prefix("<svg ")
        .and_then(|rest| rest.trim_end().strip_suffix("</svg>"))
        .ok_or_else(|| {
            ChartError::Drawing("plotters wrote an unexpected document frame".to_owned())
        })?;
    let (open, content) = body.split_once('>').ok_or_else(|| {
        ChartError::Drawing("plotters wrote an unexpected document frame".to_owned())
    })?;

    let summary = format!(
        "{} {} points; {}; centre at {} pc, systemic velocity {} km/s; residuals below are from the {} model.",
        chart.title.trim_end_matches('.'),
        chart.points.len(),
        if chart.curves.is_empty() {
            "no model curve".to_owned()
        } else {
            format!(
                "model curves: {}",
                chart
                    .curves
                    .iter()
                    .map(|c| c.label.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        },
        minus_sign(&format!("{:.3}", chart.centre_pc)),
        minus_sign(&format!("{:.1}", chart.v_sys_km_s)),
        chart.residual_model
    );
    let summary = escape(&summary);
    let mut out = String::with_capacity(body.len() + 4096 + 300 * chart.points.len());
    let _ = write!(
        out,
        r#"<svg class="chart" role="img" aria-label="{summary}" {open}>"#
    );
    let _ = write!(out, "\n<desc>{summary}</desc>");
    out.push_str(content);

    // Guides: the centre in both panels, v_sys in the top one, zero in the residuals.
    for map in [&top_map, &bottom_map] {
        let (cx, _) = map.at(chart.centre_pc, map.y.0);
        let _ = write!(
            out,
            r#"<line x1="{x}" y1="{t}" x2="{x}" y2="{b}" stroke="{GUIDE}" stroke-width="1" stroke-dasharray="2 3"/>"#,
            x = num(cx),
            t = num(map.py.0),
            b = num(map.py.1)
        );
    }
    let (_, vy) = top_map.at(x.0, chart.v_sys_km_s);
    let _ = write!(
        out,
        r#"<line x1="{l}" y1="{y}" x2="{r}" y2="{y}" stroke="{GUIDE}" stroke-width="1" stroke-dasharray="2 3"/>"#,
        l = num(top_map.px.0),
        r = num(top_map.px.1),
        y = num(vy)
    );
    let (_, zy) = bottom_map.at(x.0, 0.0);
    let _ = write!(
        out,
        r#"<line x1="{l}" y1="{y}" x2="{r}" y2="{y}" stroke="{GUIDE}" stroke-width="1"/>"#,
        l = num(bottom_map.px.0),
        r = num(bottom_map.px.1),
        y = num(zy)
    );
    // Curves.
    for c in &chart.curves {
        let (colour, dash) = if c.dashed {
            (EXTENDED, r#" stroke-dasharray="8 5""#)
        } else {
            (POINT_MASS, "")
        };
        let d = curve_path(&top_map, &c.samples);
        if !d.is_empty() {
            let _ = write!(
                out,
                r#"<path class="model-curve" d="{}" fill="none" stroke="{colour}" stroke-width="2"{dash}><title>{}</title></path>"#,
                d.trim_end(),
                escape(&c.label)
            );
        }
    }
    // Points with error bars, in both panels.
    for (map, value) in [
        (
            &top_map,
            (|p: &DiskChartPoint| p.v_km_s) as fn(&DiskChartPoint) -> f64,
        ),
        (&bottom_map, |p: &DiskChartPoint| p.residual_km_s),
    ] {
        for p in &chart.points {
            let y = value(p);
            let (px, py) = map.at(p.x_pc, y);
            let (_, lo) = map.at(p.x_pc, (y - p.err_km_s).max(map.y.0));
            let (_, hi) = map.at(p.x_pc, (y + p.err_km_s).min(map.y.1));
            let _ = write!(
                out,
                r#"<g class="disk-point"><title>{} pc: {} ± {} km/s</title><line x1="{x}" y1="{lo}" x2="{x}" y2="{hi}" stroke="{POINTS}" stroke-width="1"/><circle cx="{x}" cy="{y}" r="3.5" fill="{POINTS}"/></g>"#,
                minus_sign(&format!("{:.3}", p.x_pc)),
                minus_sign(&format!("{y:.1}")),
                format_args!("{:.1}", p.err_km_s),
                x = num(px),
                y = num(py),
                lo = num(lo),
                hi = num(hi)
            );
        }
    }
    // Legend, one row above the velocity panel.
    let font = LEGEND_FONT_PX;
    let mut lx = 80.0;
    let ly = 22.0;
    let _ = write!(
        out,
        r#"<circle cx="{}" cy="{}" r="3.5" fill="{POINTS}"/><text x="{}" y="{}" font-family="{FONT_FAMILY}" font-size="{font}" fill="{ink}">measured ± 1σ</text>"#,
        num(lx),
        num(ly),
        num(lx + 10.0),
        num(ly + 4.0),
        ink = INK.hex()
    );
    lx += 120.0;
    for c in &chart.curves {
        let (colour, dash) = if c.dashed {
            (EXTENDED, r#" stroke-dasharray="8 5""#)
        } else {
            (POINT_MASS, "")
        };
        let _ = write!(
            out,
            r#"<line x1="{}" y1="{y}" x2="{}" y2="{y}" stroke="{colour}" stroke-width="2"{dash}/><text x="{}" y="{}" font-family="{FONT_FAMILY}" font-size="{font}" fill="{ink}">{}</text>"#,
            num(lx),
            num(lx + 26.0),
            num(lx + 32.0),
            num(ly + 4.0),
            escape(&c.label),
            y = num(ly),
            ink = INK.hex()
        );
        lx += 40.0 + 7.0 * c.label.chars().count() as f64;
    }
    let _ = write!(
        out,
        r#"<text x="80" y="{}" font-family="{FONT_FAMILY}" font-size="{font}" fill="{ink}">dotted: fitted centre and systemic velocity; lower panel: residuals from the {}</text>"#,
        num(ly + 24.0),
        escape(&chart.residual_model),
        ink = INK.hex()
    );
    out.push_str("</svg>\n");
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chart() -> DiskChart {
        DiskChart {
            title: "Rotation of <disk> & co".to_owned(),
            points: vec![
                DiskChartPoint {
                    x_pc: -0.2,
                    v_km_s: 400.0,
                    err_km_s: 5.0,
                    residual_km_s: 1.0,
                },
                DiskChartPoint {
                    x_pc: 0.3,
                    v_km_s: 2100.0,
                    err_km_s: 4.0,
                    residual_km_s: -2.0,
                },
            ],
            curves: vec![DiskCurve {
                label: "point mass".to_owned(),
                samples: vec![(-0.2, 400.0), (0.0, f64::NAN), (0.3, 2100.0)],
                dashed: false,
            }],
            centre_pc: 0.0,
            v_sys_km_s: 1400.0,
            residual_model: "point mass".to_owned(),
        }
    }

    #[test]
    fn the_chart_is_a_named_image_with_its_points_and_escaped_text() {
        let svg = kinematics_svg(&chart()).unwrap();
        assert!(svg.starts_with("<svg class=\"chart\" role=\"img\" aria-label=\""));
        assert!(svg.contains("<desc>Rotation of &lt;disk&gt; &amp; co 2 points"));
        assert_eq!(svg.matches("class=\"disk-point\"").count(), 4, "two panels");
        assert_eq!(svg.matches("class=\"model-curve\"").count(), 1);
        assert!(!svg.contains("NaN"));
        assert!(!svg.contains("<disk>"));
    }

    #[test]
    fn a_point_that_is_not_finite_is_refused_by_name() {
        let mut c = chart();
        c.points[1].v_km_s = f64::INFINITY;
        let err = kinematics_svg(&c).unwrap_err().to_string();
        assert!(err.contains("point 2"), "{err}");
    }
}
