//! The planning chart (docs/methods.md §4.9): each candidate's predicted angular radius of the
//! sphere of influence, log₁₀ θ_infl, against log₁₀ of its distance, with the 68 % interval of
//! θ_infl as a vertical bar, and one horizontal line per instrument resolution at
//! threshold × θ_res, labelled. A candidate above a line is predicted to be resolved by that
//! instrument.
//!
//! Built as the relation charts are (module documentation of `charts`): plotters draws the
//! frame, grid, ticks and axis labels; the lines, points, their labels and the legend are raw
//! SVG placed with plotters' own mapping, unrounded. The root is `role="img"` named by a text
//! summary (`aria-label` and `<desc>`); each point carries a `<title>` with the candidate's
//! name and values; no links (candidates are not catalog galaxies).

use std::fmt::Write as _;

use plotters::coord::CoordTranslate as _;
use plotters::prelude::{ChartBuilder, IntoDrawingArea as _, PathElement, SVGBackend};
use plotters::style::Color as _;
use plotters::style::colors::WHITE;

use super::draw::{draw_axes, drawing_error as drawing};
use super::geometry::{Extent, padded, tick_decimals};
use super::markup::{escape, minus_sign, num, truncate};
use super::style::{self, FONT_FAMILY, GRID, GROUP_COLOURS, INK, LEGEND_FONT_PX};
use super::{ChartError, DEFAULT_HEIGHT, DEFAULT_WIDTH};

/// One candidate on the chart: log₁₀ values, the distance in Mpc and θ_infl in arcsec.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanningPoint {
    /// The candidate's name (the hover text and the summary).
    pub name: String,
    /// log₁₀ of the distance [Mpc].
    pub log_distance_mpc: f64,
    /// log₁₀ of the predicted θ_infl [arcsec].
    pub log_theta_arcsec: f64,
    /// The 68 % interval of log₁₀ θ_infl [arcsec]: (lower, upper).
    pub log_theta_68: (f64, f64),
}

/// One resolution's line: log₁₀(threshold × θ_res) [arcsec].
#[derive(Debug, Clone, PartialEq)]
pub struct ResolutionLine {
    /// The resolution's label, e.g. "AO K band".
    pub label: String,
    /// log₁₀ of threshold × the resolution [arcsec].
    pub log_theta_arcsec: f64,
}

/// What the planning chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanningChart {
    /// The accessible name's first words, e.g. "Predicted sphere of influence against distance".
    pub title: String,
    /// The candidates with a predicted θ_infl.
    pub points: Vec<PlanningPoint>,
    /// The resolutions (already multiplied by the threshold).
    pub lines: Vec<ResolutionLine>,
    /// The threshold, for the legend and summary ("1", "2").
    pub threshold_text: String,
}

/// x-axis label of the planning chart.
const X_LABEL: &str = "log₁₀ distance [Mpc]";
/// y-axis label of the planning chart.
const Y_LABEL: &str = "log₁₀ θ_infl [arcsec]";
/// Dash patterns of the resolution lines, so lines differ by more than colour.
const DASHES: [&str; 4] = ["8 4", "2 3", "12 3 2 3", "4 4"];
/// Candidates' marker colour (the first group colour of the relation charts).
const POINT: usize = 0;

/// Draws the planning chart as an SVG string of [`DEFAULT_WIDTH`] × [`DEFAULT_HEIGHT`]
/// pixels.
///
/// # Errors
/// [`ChartError::Drawing`] when a number is not finite (naming the candidate or line) or when
/// plotters fails.
pub fn planning_svg(chart: &PlanningChart) -> Result<String, ChartError> {
    let bad = |what: String| ChartError::Drawing(format!("{what} is not a finite number"));
    let mut xs = Extent::default();
    let mut ys = Extent::default();
    for p in &chart.points {
        for v in [
            p.log_distance_mpc,
            p.log_theta_arcsec,
            p.log_theta_68.0,
            p.log_theta_68.1,
        ] {
            if !v.is_finite() {
                return Err(bad(format!("a value of the candidate {}", p.name)));
            }
        }
        xs.add(p.log_distance_mpc);
        ys.add(p.log_theta_68.0);
        ys.add(p.log_theta_68.1);
        ys.add(p.log_theta_arcsec);
    }
    for l in &chart.lines {
        if !l.log_theta_arcsec.is_finite() {
            return Err(bad(format!("the resolution {}", l.label)));
        }
        ys.add(l.log_theta_arcsec);
    }
    let (x_min, x_max) = xs.range().map_or((0.0, 2.0), |(a, b)| padded(a, b));
    let (y_min, y_max) = ys.range().map_or((-2.0, 0.0), |(a, b)| padded(a, b));
    let (width, height) = (DEFAULT_WIDTH, DEFAULT_HEIGHT);
    let legend_w = 200;

    style::register_font();
    let mut buf = String::new();
    let (map, plot) = {
        let root = SVGBackend::with_string(&mut buf, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(drawing)?;
        let (plot_area, _) = root.split_horizontally(width - legend_w);
        let mut c = ChartBuilder::on(&plot_area)
            .margin(10)
            .x_label_area_size(54)
            .y_label_area_size(70)
            .build_cartesian_2d(x_min..x_max, y_min..y_max)
            .map_err(drawing)?;
        let (px, py) = c.plotting_area().get_pixel_range();
        let x_ticks = usize::try_from((px.end - px.start) / 80)
            .unwrap_or(5)
            .clamp(3, 10);
        let y_ticks = usize::try_from((py.end - py.start) / 60)
            .unwrap_or(5)
            .clamp(3, 10);
        let xd = tick_decimals(x_min, x_max, x_ticks);
        let yd = tick_decimals(y_min, y_max, y_ticks);
        let x_fmt = |v: &f64| tick(*v, xd);
        let y_fmt = |v: &f64| tick(*v, yd);
        draw_axes(
            &mut c,
            (X_LABEL, Y_LABEL),
            (x_ticks, y_ticks),
            &x_fmt,
            &y_fmt,
            1.0,
            1,
        )?;
        c.draw_series(std::iter::once(PathElement::new(
            vec![(x_min, y_max), (x_max, y_max), (x_max, y_min)],
            GRID.plotters().stroke_width(1),
        )))
        .map_err(drawing)?;
        let spec = c.as_coord_spec().clone();
        let (ax, ay) = spec.translate(&(x_min, y_min));
        let (bx, by) = spec.translate(&(x_max, y_max));
        root.present().map_err(drawing)?;
        let to_px = move |x: f64, y: f64| {
            (
                f64::from(ax) + (x - x_min) / (x_max - x_min) * f64::from(bx - ax),
                f64::from(ay) + (y - y_min) / (y_max - y_min) * f64::from(by - ay),
            )
        };
        (to_px, (px.start, px.end))
    };

    let body = buf
        .strip_prefix("<svg ")
        .and_then(|rest| rest.trim_end().strip_suffix("</svg>"))
        .ok_or_else(|| drawing("plotters wrote an unexpected document frame"))?;
    let (open, content) = body
        .split_once('>')
        .ok_or_else(|| drawing("plotters wrote an unexpected document frame"))?;
    let summary = escape(&summary(chart));
    let mut out = String::with_capacity(body.len() + 4096 + 500 * chart.points.len());
    let _ = write!(
        out,
        r#"<svg class="chart" role="img" aria-label="{summary}" {open}>"#
    );
    let _ = write!(out, "\n<desc>{summary}</desc>");
    out.push_str(content);

    // The resolution lines across the plot, each labelled at its right end.
    out.push_str("<g class=\"resolutions\">\n");
    for (i, l) in chart.lines.iter().enumerate() {
        let colour = GROUP_COLOURS[(i + 1) % GROUP_COLOURS.len()].hex();
        let dash = DASHES[i % DASHES.len()];
        let (_, y) = map(x_min, l.log_theta_arcsec);
        let _ = write!(
            out,
            r#"<g class="resolution"><title>{}</title><path d="M{} {}H{}" fill="none" stroke="{colour}" stroke-width="2" stroke-dasharray="{dash}"/><text x="{}" y="{}" text-anchor="end" font-family="{FONT_FAMILY}" font-size="{LEGEND_FONT_PX}" fill="{}">{}</text></g>"#,
            escape(&line_text(l, &chart.threshold_text)),
            num(f64::from(plot.0)),
            num(y),
            num(f64::from(plot.1)),
            num(f64::from(plot.1) - 4.0),
            num(y - 4.0),
            INK.hex(),
            escape(&truncate(&l.label, 28)),
        );
        out.push('\n');
    }
    out.push_str("</g>\n<g class=\"points\">\n");
    let marker = style::group_style(POINT);
    for p in &chart.points {
        let (cx, cy) = map(p.log_distance_mpc, p.log_theta_arcsec);
        let (_, low) = map(p.log_distance_mpc, p.log_theta_68.0);
        let (_, high) = map(p.log_distance_mpc, p.log_theta_68.1);
        let _ = write!(
            out,
            r#"<g class="pt"><title>{}</title><path class="err-y" d="M{} {}V{}" fill="none" stroke="{}" stroke-width="1.2" opacity="0.75"/>{}</g>"#,
            escape(&point_text(p)),
            num(cx),
            num(low),
            num(high),
            marker.colour.hex(),
            style::marker_element(cx, cy, marker),
        );
        out.push('\n');
    }
    out.push_str("</g>\n");
    legend(&mut out, chart, width - legend_w);
    out.push_str("</svg>\n");
    Ok(out)
}

/// The legend column: the candidates' marker, then each line with its dash and label.
fn legend(out: &mut String, chart: &PlanningChart, left: u32) {
    let x = f64::from(left) + 8.0;
    let mut y = 30.0;
    let ink = INK.hex();
    let text = |out: &mut String, y: f64, words: &str| {
        let _ = write!(
            out,
            r#"<text x="{}" y="{}" font-family="{FONT_FAMILY}" font-size="{LEGEND_FONT_PX}" fill="{ink}">{}</text>"#,
            num(x + 30.0),
            num(y + 4.0),
            escape(&truncate(words, 24)),
        );
    };
    out.push_str("<g class=\"legend\">");
    out.push_str(&style::marker_element(
        x + 12.0,
        y,
        style::group_style(POINT),
    ));
    text(out, y, "candidate, 68 % bar");
    for (i, l) in chart.lines.iter().enumerate() {
        y += 22.0;
        let colour = GROUP_COLOURS[(i + 1) % GROUP_COLOURS.len()].hex();
        let _ = write!(
            out,
            r#"<path d="M{} {}H{}" fill="none" stroke="{colour}" stroke-width="2" stroke-dasharray="{}"/>"#,
            num(x),
            num(y),
            num(x + 24.0),
            DASHES[i % DASHES.len()]
        );
        text(out, y, &format!("{} × {}", chart.threshold_text, l.label));
    }
    out.push_str("</g>\n");
}

/// A line's hover text: its label and the angle it stands for.
fn line_text(l: &ResolutionLine, threshold: &str) -> String {
    format!(
        "{threshold} × the resolution {}: θ = {}″",
        l.label,
        arcsec(l.log_theta_arcsec)
    )
}

/// A candidate's hover text: name, distance and θ_infl with its 68 % interval.
fn point_text(p: &PlanningPoint) -> String {
    format!(
        "{}: D = {} Mpc, θ_infl = {}″ (68 %: {}–{}″)",
        p.name,
        three(10f64.powf(p.log_distance_mpc)),
        arcsec(p.log_theta_arcsec),
        arcsec(p.log_theta_68.0),
        arcsec(p.log_theta_68.1)
    )
}

/// The text summary: what the chart shows, how many candidates, and which lie above each line.
fn summary(chart: &PlanningChart) -> String {
    let mut s = format!(
        "{}: predicted θ_infl of {} against distance, log axes, with 68 % bars",
        chart.title,
        match chart.points.len() {
            1 => "1 candidate".to_owned(),
            n => format!("{n} candidates"),
        }
    );
    for l in &chart.lines {
        let above = chart
            .points
            .iter()
            .filter(|p| p.log_theta_arcsec >= l.log_theta_arcsec)
            .count();
        let _ = write!(
            s,
            "; {} × {} at {}″: {above} predicted above",
            chart.threshold_text,
            l.label,
            arcsec(l.log_theta_arcsec)
        );
    }
    s.push('.');
    s
}

/// 10^`log` to three significant digits.
fn arcsec(log: f64) -> String {
    three(10f64.powf(log))
}

/// A positive number to three significant digits, with a true minus sign in an exponent.
fn three(v: f64) -> String {
    if !(1e-3..1e5).contains(&v) {
        return minus_sign(&format!("{v:.2e}"));
    }
    let digits = (2 - v.log10().floor() as i32).max(0) as usize;
    format!("{v:.digits$}")
}

fn tick(v: f64, decimals: usize) -> String {
    let v = if v.abs() < 1e-9 { 0.0 } else { v };
    minus_sign(&format!("{v:.decimals$}"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chart() -> PlanningChart {
        PlanningChart {
            title: "Predicted sphere of influence".to_owned(),
            points: vec![
                PlanningPoint {
                    name: "Near <one>".to_owned(),
                    log_distance_mpc: 1.0,
                    log_theta_arcsec: -0.5,
                    log_theta_68: (-0.8, -0.2),
                },
                PlanningPoint {
                    name: "Far two".to_owned(),
                    log_distance_mpc: 1.8,
                    log_theta_arcsec: -1.6,
                    log_theta_68: (-1.9, -1.3),
                },
            ],
            lines: vec![
                ResolutionLine {
                    label: "adaptive optics".to_owned(),
                    log_theta_arcsec: -1.0,
                },
                ResolutionLine {
                    label: "seeing".to_owned(),
                    log_theta_arcsec: -0.2,
                },
            ],
            threshold_text: "1".to_owned(),
        }
    }

    #[test]
    fn the_chart_names_itself_draws_each_candidate_and_labels_each_line() {
        let svg = planning_svg(&chart()).unwrap();
        assert!(svg.starts_with("<svg class=\"chart\" role=\"img\" aria-label=\""));
        assert!(svg.contains("<desc>"));
        assert_eq!(svg.matches("<g class=\"pt\">").count(), 2);
        assert_eq!(svg.matches("<g class=\"resolution\">").count(), 2);
        assert!(svg.contains("Near &lt;one&gt;"), "names are escaped");
        assert!(svg.contains(">adaptive optics</text>"));
        // One candidate lies above the adaptive-optics line (θ = 0.1″), none above seeing.
        assert!(svg.contains("adaptive optics at 0.100″: 1 predicted above"));
        assert!(svg.contains("seeing at 0.631″: 0 predicted above"));
        assert!(!svg.contains("NaN"));
    }

    #[test]
    fn a_higher_line_is_drawn_higher_on_the_page_and_a_bar_spans_its_interval() {
        let svg = planning_svg(&chart()).unwrap();
        let line_y = |label: &str| -> f64 {
            let at = svg.find(&format!(">{label}</text>")).unwrap();
            let path = svg[..at].rfind("<path d=\"M").unwrap();
            let rest = &svg[path + 10..];
            rest.split(['H', ' ']).nth(1).unwrap().parse().unwrap()
        };
        // Pixel y grows downwards: the seeing line (larger θ) is above the other.
        assert!(line_y("seeing") < line_y("adaptive optics"));
    }

    #[test]
    fn a_value_that_is_not_finite_is_refused_by_name() {
        let mut c = chart();
        c.points[1].log_theta_arcsec = f64::NAN;
        let e = planning_svg(&c).unwrap_err().to_string();
        assert!(e.contains("Far two"), "{e}");
    }

    #[test]
    fn an_empty_chart_still_draws_its_frame_and_lines() {
        let mut c = chart();
        c.points.clear();
        let svg = planning_svg(&c).unwrap();
        assert!(svg.contains("0 candidates"));
        assert_eq!(svg.matches("<g class=\"resolution\">").count(), 2);
    }
}
