//! Unit tests of the charts: well-formed SVG, one linked and titled element per point, arrows for
//! limits, the line through (x₀, α), bands, escaping, refusals and empty states.
//!
//! All objects here are invented (names like "A-1"); no real galaxy or measurement is used.

use plotters::coord::CoordTranslate as _;

use super::density;
use super::draw::{Spec, relation_rendered, residual_rendered};
use super::geometry::{Bounds, clip_polygon, clip_polyline, extend_band, padded, tick_decimals};
use super::markup::{escape, is_site_relative};
use super::style::{self, LINE, MEAN_BAND, SCATTER_1, SCATTER_2};
use super::*;

// ---------------------------------------------------------------------------------------------
// Helpers

/// A tiny XML well-formedness checker: balanced and properly nested tags, one root element,
/// quoted attributes without `<` and without repeats, and only the five predefined entities or
/// numeric character references after `&`. Enough for SVG written by plotters and this module.
fn check_well_formed(doc: &str) -> Result<(), String> {
    let bytes = doc.as_bytes();
    let mut stack: Vec<String> = Vec::new();
    let mut roots = 0;
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] != b'<' {
            let end = doc[i..].find('<').map_or(doc.len(), |k| i + k);
            let text = &doc[i..end];
            if stack.is_empty() && !text.trim().is_empty() {
                return Err(format!("text outside the root element: {text:?}"));
            }
            check_entities(text)?;
            i = end;
            continue;
        }
        let rest = &doc[i..];
        if rest.starts_with("<?") {
            i += rest.find("?>").ok_or("unclosed <?")? + 2;
            continue;
        }
        if rest.starts_with("<!--") {
            i += rest.find("-->").ok_or("unclosed comment")? + 3;
            continue;
        }
        if let Some(close) = rest.strip_prefix("</") {
            let end = close.find('>').ok_or("unclosed end tag")?;
            let name = close[..end].trim();
            match stack.pop() {
                Some(open) if open == name => {}
                other => return Err(format!("</{name}> closes {other:?}")),
            }
            i += 2 + end + 1;
            continue;
        }
        // Start tag or empty-element tag.
        let mut j = i + 1;
        let name_start = j;
        while j < bytes.len() && !matches!(bytes[j], b' ' | b'\n' | b'\t' | b'\r' | b'/' | b'>') {
            j += 1;
        }
        let name = &doc[name_start..j];
        if name.is_empty() || !name.chars().next().is_some_and(|c| c.is_ascii_alphabetic()) {
            return Err(format!("bad tag name at byte {i}"));
        }
        let mut seen: Vec<&str> = Vec::new();
        loop {
            while j < bytes.len() && bytes[j].is_ascii_whitespace() {
                j += 1;
            }
            if j >= bytes.len() {
                return Err(format!("unclosed start tag <{name}"));
            }
            if doc[j..].starts_with("/>") {
                if stack.is_empty() {
                    roots += 1;
                }
                j += 2;
                break;
            }
            if bytes[j] == b'>' {
                if stack.is_empty() {
                    roots += 1;
                }
                stack.push(name.to_owned());
                j += 1;
                break;
            }
            let attr_start = j;
            while j < bytes.len()
                && (bytes[j].is_ascii_alphanumeric()
                    || matches!(bytes[j], b'-' | b'_' | b':' | b'.'))
            {
                j += 1;
            }
            let attr = &doc[attr_start..j];
            if attr.is_empty() || bytes.get(j) != Some(&b'=') {
                return Err(format!("bad attribute in <{name}> at byte {attr_start}"));
            }
            if seen.contains(&attr) {
                return Err(format!("repeated attribute {attr} in <{name}>"));
            }
            seen.push(attr);
            j += 1;
            let quote = *bytes.get(j).ok_or("attribute without value")?;
            if quote != b'"' && quote != b'\'' {
                return Err(format!("unquoted attribute {attr} in <{name}>"));
            }
            let value_end = doc[j + 1..]
                .find(char::from(quote))
                .ok_or("unclosed attribute value")?
                + j
                + 1;
            let value = &doc[j + 1..value_end];
            if value.contains('<') {
                return Err(format!("'<' in attribute {attr} of <{name}>"));
            }
            check_entities(value)?;
            j = value_end + 1;
        }
        i = j;
    }
    if !stack.is_empty() {
        return Err(format!("unclosed elements: {stack:?}"));
    }
    if roots != 1 {
        return Err(format!("{roots} root elements"));
    }
    Ok(())
}

/// Every `&` starts a predefined entity or a numeric character reference.
fn check_entities(text: &str) -> Result<(), String> {
    for (k, _) in text.match_indices('&') {
        let rest = &text[k + 1..];
        let end = rest
            .find(';')
            .ok_or_else(|| format!("bare & in {text:?}"))?;
        let entity = &rest[..end];
        let ok = matches!(entity, "lt" | "gt" | "amp" | "quot" | "apos")
            || entity
                .strip_prefix("#x")
                .is_some_and(|h| !h.is_empty() && h.chars().all(|c| c.is_ascii_hexdigit()))
            || entity
                .strip_prefix('#')
                .is_some_and(|d| !d.is_empty() && d.chars().all(|c| c.is_ascii_digit()));
        if !ok {
            return Err(format!("bad entity &{entity}; in {text:?}"));
        }
    }
    Ok(())
}

fn count(haystack: &str, needle: &str) -> usize {
    haystack.matches(needle).count()
}

/// The markup of each point (`<g class="pt"…>…</g>`), in drawing order.
fn point_chunks(svg: &str) -> Vec<&str> {
    svg.match_indices("<g class=\"pt")
        .map(|(k, _)| {
            let end = svg[k..].find("</g>").expect("point group is closed");
            &svg[k..k + end]
        })
        .collect()
}

/// The texts of all `<title>` elements.
fn titles(svg: &str) -> Vec<&str> {
    svg.match_indices("<title>")
        .map(|(k, _)| {
            let start = k + "<title>".len();
            let end = svg[start..].find("</title>").expect("title is closed");
            &svg[start..start + end]
        })
        .collect()
}

/// The trimmed content of every `<text>` element (a wrapped legend label keeps its `<tspan>`).
fn texts(svg: &str) -> Vec<&str> {
    svg.match_indices("<text")
        .map(|(k, _)| {
            let start = k + svg[k..].find('>').expect("start tag closed") + 1;
            let end = svg[start..].find("</text>").expect("text closed");
            svg[start..start + end].trim()
        })
        .collect()
}

/// The value of attribute `name` in the first element of `element`.
fn attr<'a>(element: &'a str, name: &str) -> Option<&'a str> {
    let key = format!(" {name}=\"");
    let start = element.find(&key)? + key.len();
    let end = element[start..].find('"')?;
    Some(&element[start..start + end])
}

/// Vertices of every line path (`<path class="line" d="M x yL x y…">`) with the given stroke
/// colour and width, one Vec per element.
fn polylines(svg: &str, stroke: &str, width: &str) -> Vec<Vec<(f64, f64)>> {
    svg.match_indices("<path class=\"line\"")
        .map(|(k, _)| &svg[k..k + svg[k..].find("/>").expect("path is closed")])
        .filter(|el| attr(el, "stroke") == Some(stroke) && attr(el, "stroke-width") == Some(width))
        .map(|el| {
            attr(el, "d")
                .expect("path has data")
                .split(['M', 'L'])
                .filter(|pair| !pair.is_empty())
                .map(|pair| {
                    let (x, y) = pair.split_once(' ').expect("x y pair");
                    (x.parse().expect("number x"), y.parse().expect("number y"))
                })
                .collect()
        })
        .collect()
}

/// The pixel position of a data point without plotters' rounding (the affine map through the
/// frame's corners, as the charts place their raw layer).
fn exact_px(spec: &Spec, x: f64, y: f64) -> (f64, f64) {
    let xr = spec.get_x_range();
    let yr = spec.get_y_range();
    let (x0, y0) = spec.translate(&(xr.start, yr.start));
    let (x1, y1) = spec.translate(&(xr.end, yr.end));
    let tx = (x - xr.start) / (xr.end - xr.start);
    let ty = (y - yr.start) / (yr.end - yr.start);
    (
        f64::from(x0) + tx * f64::from(x1 - x0),
        f64::from(y0) + ty * f64::from(y1 - y0),
    )
}

/// The data point at a pixel position, inverting [`exact_px`].
fn exact_data(spec: &Spec, px: f64, py: f64) -> (f64, f64) {
    let xr = spec.get_x_range();
    let yr = spec.get_y_range();
    let (x0, y0) = spec.translate(&(xr.start, yr.start));
    let (x1, y1) = spec.translate(&(xr.end, yr.end));
    (
        xr.start + (px - f64::from(x0)) / f64::from(x1 - x0) * (xr.end - xr.start),
        yr.start + (py - f64::from(y0)) / f64::from(y1 - y0) * (yr.end - yr.start),
    )
}

/// Number of `<polygon>` elements filled with `tint` (plotters writes opacity and fill).
fn band_polygons(svg: &str, tint: style::Tint) -> usize {
    count(
        svg,
        &format!(
            "<polygon opacity=\"{}\" fill=\"{}\"",
            tint.opacity,
            tint.colour.hex()
        ),
    )
}

fn point(name: &str, x: f64, y: f64, group: usize) -> ChartPoint {
    ChartPoint {
        name: name.to_owned(),
        href: Some(format!("/galaxies/{}", name.to_lowercase())),
        x,
        x_err: 0.03,
        y,
        y_err_minus: 0.12,
        y_err_plus: 0.1,
        upper_limit: false,
        group,
        emphasis: false,
        outlier: false,
        unresolved: false,
    }
}

/// The fixed small chart: six invented objects in two groups, one of them an upper limit, around
/// an M–σ-like line with pivot log₁₀ 200 = 2.30103.
fn small_chart() -> RelationChart {
    let mut limit = point("A-6", 2.05, 7.2, 1);
    limit.upper_limit = true;
    let line = LineSpec {
        alpha: 8.3,
        beta: 5.0,
        beta2: None,
        pivot: 2.30103,
        scatter_dex: 0.4,
    };
    RelationChart {
        title: "M_BH–σ".to_owned(),
        x_label: sigma_axis_label(),
        y_label: black_hole_mass_axis_label(),
        points: vec![
            point("A-1", 2.1, 7.4, 0),
            point("A-2", 2.2, 7.9, 0),
            point("A-3", 2.3, 8.2, 1),
            point("A-4", 2.4, 8.9, 0),
            point("A-5", 2.45, 9.1, 1),
            limit,
        ],
        groups: vec![
            Group {
                label: "Early type".to_owned(),
            },
            Group {
                label: "Late type".to_owned(),
            },
        ],
        line: Some(line),
        mean_band: (0..=10)
            .map(|k| {
                let x = 2.0 + 0.05 * f64::from(k);
                BandPoint {
                    x,
                    lower: line.y_at(x) - 0.08,
                    upper: line.y_at(x) + 0.08,
                }
            })
            .collect(),
        highlight: None,
        ..RelationChart::default()
    }
}

fn small_residuals() -> ResidualChart {
    let chart = small_chart();
    let line = chart.line.expect("small chart has a line");
    ResidualChart {
        title: "Residuals".to_owned(),
        x_label: sigma_axis_label(),
        points: chart
            .points
            .iter()
            .map(|p| ChartPoint {
                y: p.y - line.y_at(p.x),
                ..p.clone()
            })
            .collect(),
        groups: chart.groups,
        scatter_dex: 0.4,
        ..ResidualChart::default()
    }
}

fn assert_clean(svg: &str) {
    if let Err(e) = check_well_formed(svg) {
        panic!("SVG is not well-formed: {e}");
    }
    assert!(!svg.contains("NaN"), "NaN in the SVG");
    assert!(!svg.contains("inf"), "infinity in the SVG");
    assert!(!svg.contains("<script"), "script element in the SVG");
    assert!(!svg.contains("<style"), "style element in the SVG");
    assert!(
        !svg.contains("http://") || count(svg, "http://") == 1,
        "external reference"
    );
}

// ---------------------------------------------------------------------------------------------
// The checker itself must be able to fail.

#[test]
fn well_formedness_checker_rejects_broken_documents() {
    assert!(check_well_formed("<svg><g></svg>").is_err());
    assert!(check_well_formed("<svg><title>a < b</title></svg>").is_err());
    assert!(check_well_formed("<svg><title>a & b</title></svg>").is_err());
    assert!(check_well_formed(r#"<svg a="1" a="2"/>"#).is_err());
    assert!(check_well_formed(r#"<svg a="x<y"/>"#).is_err());
    assert!(check_well_formed("<svg/><svg/>").is_err());
    assert!(check_well_formed(r#"<svg a="&lt;&#38;&#x26;">t&amp;t</svg>"#).is_ok());
}

// ---------------------------------------------------------------------------------------------
// Relation chart

#[test]
fn relation_chart_is_well_formed_svg() {
    let svg = relation_svg(&small_chart()).expect("chart draws");
    assert!(svg.starts_with("<svg "));
    assert!(svg.trim_end().ends_with("</svg>"));
    assert_clean(&svg);
}

#[test]
fn every_point_gets_one_title_and_one_link_naming_it() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    let titles = titles(&svg);
    assert_eq!(titles.len(), chart.points.len());
    assert_eq!(count(&svg, "<a href="), chart.points.len());
    for p in &chart.points {
        assert_eq!(
            titles
                .iter()
                .filter(|t| t.starts_with(&format!("{}:", p.name)))
                .count(),
            1,
            "one title for {}",
            p.name
        );
        let href = p.href.as_deref().expect("fixture points are linked");
        assert_eq!(
            count(&svg, &format!("<a href=\"{href}\" tabindex=\"-1\">")),
            1
        );
    }
    assert_eq!(point_chunks(&svg).len(), chart.points.len());
}

#[test]
fn point_titles_carry_values_and_units() {
    let svg = relation_svg(&small_chart()).expect("chart draws");
    let titles = titles(&svg);
    let a1 = titles
        .iter()
        .find(|t| t.starts_with("A-1:"))
        .expect("A-1 titled");
    assert!(a1.contains("log₁₀ M_BH [M☉] = 7.40 +0.10/−0.12"), "{a1}");
    assert!(a1.contains("log₁₀ σ [km/s] = 2.10 ± 0.03"), "{a1}");
    assert!(a1.ends_with("(Early type)"), "{a1}");
    let a6 = titles
        .iter()
        .find(|t| t.starts_with("A-6:"))
        .expect("A-6 titled");
    assert!(a6.contains("[M☉] &lt; 7.20"), "limit title says '<': {a6}");
}

#[test]
fn an_upper_limit_is_an_arrow_without_a_vertical_error_bar() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    let chunks = point_chunks(&svg);
    assert_eq!(
        count(&svg, "class=\"limit-arrow\""),
        1 + 1,
        "one on the chart, one in the legend"
    );
    for (p, chunk) in chart.points.iter().zip(&chunks) {
        assert!(
            chunk.contains(&format!("{}:", p.name)),
            "chunks follow point order"
        );
        if p.upper_limit {
            assert_eq!(count(chunk, "class=\"limit-arrow\""), 1, "{chunk}");
            assert_eq!(count(chunk, "class=\"err-y\""), 0, "{chunk}");
            assert_eq!(
                count(chunk, "class=\"err-x\""),
                1,
                "x error still drawn: {chunk}"
            );
        } else {
            assert_eq!(count(chunk, "class=\"limit-arrow\""), 0, "{chunk}");
            assert_eq!(count(chunk, "class=\"err-y\""), 1, "{chunk}");
        }
    }
}

#[test]
fn limit_arrows_point_down_from_the_limit() {
    let chart = small_chart();
    let rendered = relation_rendered(&chart).expect("chart draws");
    let limit = chart
        .points
        .iter()
        .find(|p| p.upper_limit)
        .expect("fixture has a limit");
    let (px, py) = exact_px(&rendered.spec, limit.x, limit.y);
    let chunk = point_chunks(&rendered.svg)
        .into_iter()
        .find(|c| c.contains("A-6:"))
        .expect("limit drawn");
    let arrow = &chunk[chunk.find("class=\"limit-arrow\"").expect("arrow")..];
    let d = attr(arrow, "d").expect("arrow path");
    // "M{x} {y}V{tip}…": starts at the limit and goes down (SVG y grows downwards).
    let (start, tail) = d[1..].split_once('V').expect("vertical shaft");
    let tip: f64 = tail
        .split('M')
        .next()
        .expect("tip")
        .parse()
        .expect("tip number");
    let (sx, sy) = start.split_once(' ').expect("x y");
    assert!((sx.parse::<f64>().expect("x") - px).abs() <= 0.05);
    assert!((sy.parse::<f64>().expect("y") - py).abs() <= 0.05);
    assert!(tip > py + 10.0, "arrow points down: tip {tip}, start {py}");
}

#[test]
fn legend_lists_each_group_and_the_line_and_bands() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    // Groups, upper limit, fitted relation, mean band, ±1ε, ±2ε.
    assert_eq!(
        count(&svg, "class=\"legend-entry\""),
        chart.groups.len() + 5
    );
    let texts = texts(&svg);
    for label in [
        "Early type",
        "Late type",
        "Upper limit",
        "Fitted relation",
        "Mean-relation band",
        "±1ε = 0.40 dex",
        "±2ε = 0.80 dex",
    ] {
        assert!(texts.contains(&label), "legend shows {label}");
    }

    let mut more = chart.clone();
    more.groups.push(Group {
        label: "Third".to_owned(),
    });
    more.line = None;
    more.mean_band.clear();
    let svg = relation_svg(&more).expect("chart draws");
    assert_eq!(
        count(&svg, "class=\"legend-entry\""),
        3 + 1,
        "three groups and the limit"
    );
}

#[test]
fn the_line_passes_through_the_pivot_at_alpha() {
    let chart = small_chart();
    let line = chart.line.expect("line");
    let rendered = relation_rendered(&chart).expect("chart draws");
    let runs = polylines(&rendered.svg, &LINE.hex(), "2");
    assert_eq!(runs.len(), 1, "one visible run of the fitted line");
    let target = exact_px(&rendered.spec, line.pivot, line.alpha);
    let nearest = runs[0]
        .iter()
        .map(|&(x, y)| (x - target.0).abs() + (y - target.1).abs())
        .fold(f64::INFINITY, f64::min);
    assert!(
        nearest <= 0.1,
        "a vertex within 0.1 px of (x₀, α), nearest {nearest} px"
    );
}

#[test]
fn every_vertex_of_a_curved_line_lies_on_the_relation() {
    // Log-quadratic relation (β₂ as in Wyithe 2006, MNRAS 365, 1082: β = 4.2, β₂ = 1.6 on the
    // pivot-200 km/s scale, abstract; docs/methods.md §1.1); α = 8.3 and ε = 0.3 invented.
    let mut chart = small_chart();
    let line = LineSpec {
        alpha: 8.3,
        beta: 4.2,
        beta2: Some(1.6),
        pivot: 2.30103,
        scatter_dex: 0.3,
    };
    chart.line = Some(line);
    let rendered = relation_rendered(&chart).expect("chart draws");
    let runs = polylines(&rendered.svg, &LINE.hex(), "2");
    assert!(!runs.is_empty());
    let (y_lo, y_hi) = {
        let r = rendered.spec.get_y_range();
        (r.start, r.end)
    };
    // Coordinates carry one decimal: allow 0.1 px of the y axis in data units, plus the slope
    // times 0.1 px of the x axis (whole pixels would need 1.5 px and draw a staircase).
    let px_range = rendered.spec.get_x_axis_pixel_range();
    let py_range = rendered.spec.get_y_axis_pixel_range();
    let x_range = rendered.spec.get_x_range();
    let dex_per_px_y = (y_hi - y_lo) / f64::from(py_range.end - py_range.start).abs();
    let dex_per_px_x =
        (x_range.end - x_range.start) / f64::from(px_range.end - px_range.start).abs();
    let mut checked = 0;
    for &(px, py) in runs.iter().flatten() {
        let (x, y) = exact_data(&rendered.spec, px, py);
        let dx = x - line.pivot;
        let slope = (line.beta + 2.0 * 1.6 * dx).abs();
        let tolerance = 0.1 * dex_per_px_y + 0.1 * slope * dex_per_px_x;
        assert!(
            (y - line.y_at(x)).abs() <= tolerance,
            "vertex ({px},{py}) → ({x:.4},{y:.4}) is off the curve by {:.4}",
            y - line.y_at(x)
        );
        checked += 1;
    }
    assert!(
        checked > 50,
        "the curve is sampled densely ({checked} vertices)"
    );
}

#[test]
fn scatter_bands_are_drawn_only_when_epsilon_is_positive() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(band_polygons(&svg, SCATTER_2), 1);
    assert_eq!(band_polygons(&svg, SCATTER_1), 1);
    assert_eq!(band_polygons(&svg, MEAN_BAND), 1);

    let mut no_scatter = chart.clone();
    if let Some(line) = &mut no_scatter.line {
        line.scatter_dex = 0.0;
    }
    let svg = relation_svg(&no_scatter).expect("chart draws");
    assert_eq!(band_polygons(&svg, SCATTER_2), 0);
    assert_eq!(band_polygons(&svg, SCATTER_1), 0);
    assert_eq!(
        band_polygons(&svg, MEAN_BAND),
        1,
        "the mean band does not depend on ε"
    );
    assert!(!svg.contains("±1ε"));

    let mut no_band = chart;
    no_band.mean_band.clear();
    let svg = relation_svg(&no_band).expect("chart draws");
    assert_eq!(band_polygons(&svg, MEAN_BAND), 0);
    assert!(!svg.contains("Mean-relation band"));
}

#[test]
fn two_epsilon_band_is_lighter_and_wider_than_one_epsilon() {
    const { assert!(SCATTER_2.opacity < SCATTER_1.opacity) };
    let rendered = relation_rendered(&small_chart()).expect("chart draws");
    let height = |tint: style::Tint| {
        let key = format!(
            "<polygon opacity=\"{}\" fill=\"{}\"",
            tint.opacity,
            tint.colour.hex()
        );
        let k = rendered.svg.find(&key).expect("band drawn");
        let el = &rendered.svg[k..k + rendered.svg[k..].find("/>").expect("closed")];
        let ys: Vec<f64> = attr(el, "points")
            .expect("points")
            .split_whitespace()
            .map(|p| p.split_once(',').expect("pair").1.parse().expect("y"))
            .collect();
        let hi = ys.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let lo = ys.iter().copied().fold(f64::INFINITY, f64::min);
        hi - lo
    };
    assert!(height(SCATTER_2) >= height(SCATTER_1));
}

#[test]
fn highlighted_object_is_a_star_with_its_own_legend_entry() {
    let mut chart = small_chart();
    chart.highlight = Some(ChartPoint {
        name: "Placed object".to_owned(),
        href: None,
        ..point("x", 2.25, 8.6, 0)
    });
    let svg = relation_svg(&chart).expect("chart draws");
    assert_clean(&svg);
    assert_eq!(count(&svg, "class=\"pt highlight\""), 1);
    assert_eq!(
        count(&svg, "class=\"mk star\""),
        2,
        "on the chart and in the legend"
    );
    assert!(svg.contains(">Placed object</text>"));
    assert_eq!(titles(&svg).len(), chart.points.len() + 1);
    assert_eq!(
        count(&svg, "<a href="),
        chart.points.len(),
        "unlinked highlight"
    );
    // Drawn after all the points, so it is on top.
    assert!(svg.find("class=\"pt highlight\"") > svg.rfind("class=\"pt\""));
}

#[test]
fn hostile_text_comes_out_escaped() {
    let hostile = r#"<script>alert("x")</script> & 'q'"#;
    let mut chart = small_chart();
    chart.title = hostile.to_owned();
    chart.show_title = true;
    chart.x_label = format!("{hostile} x");
    chart.groups[0].label = hostile.to_owned();
    chart.points[0].name = hostile.to_owned();
    chart.points[1].name = "ctrl\u{1}char\u{FFFF}".to_owned();
    chart.points[2].href = Some("/galaxies/3?a=1&b=\"2\"".to_owned());
    let svg = relation_svg(&chart).expect("chart draws");
    assert_clean(&svg);
    assert!(!svg.contains("<script>"));
    assert!(!svg.contains("\u{1}"));
    assert!(!svg.contains("\u{FFFF}"));
    let escaped = "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &apos;q&apos;";
    assert!(
        titles(&svg)
            .iter()
            .any(|t| t.starts_with(&format!("{escaped}:")))
    );
    assert!(
        texts(&svg).contains(&escaped),
        "title drawn by plotters is escaped"
    );
    assert!(
        texts(&svg)
            .iter()
            .any(|t| t.starts_with("&lt;script&gt;alert(&quot;x&quot;)")),
        "legend label is escaped"
    );
    assert!(svg.contains(r#"<a href="/galaxies/3?a=1&amp;b=&quot;2&quot;" tabindex="-1">"#));
    assert!(svg.contains(&format!("aria-label=\"{escaped}: ")));
}

#[test]
fn links_must_be_site_relative_paths() {
    for bad in [
        "javascript:alert(1)",
        "https://example.org/x",
        "//example.org/x",
        "/\\example.org",
        " /galaxies/1",
        "/galaxies/1 x",
        "galaxies/1",
        "",
    ] {
        let mut chart = small_chart();
        chart.points[2].href = Some(bad.to_owned());
        let err = relation_svg(&chart).expect_err(bad);
        assert_eq!(
            err,
            ChartError::UnsafeHref {
                item: "point \"A-3\"".to_owned()
            },
            "{bad}"
        );
    }
    assert!(is_site_relative("/galaxies/12"));
    assert!(is_site_relative("/"));
    assert!(is_site_relative(
        "/relations/m-sigma?estimator=mle&sample=all"
    ));
}

#[test]
fn unlinked_points_still_get_a_title() {
    let mut chart = small_chart();
    for p in &mut chart.points {
        p.href = None;
    }
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&svg, "<a "), 0);
    assert_eq!(titles(&svg).len(), chart.points.len());
    assert_clean(&svg);
}

#[test]
fn non_finite_values_are_refused_naming_the_point() {
    type Spoil = fn(&mut ChartPoint);
    let cases: [(Spoil, &str); 5] = [
        (|p| p.x = f64::NAN, "x value"),
        (|p| p.y = f64::INFINITY, "y value"),
        (|p| p.x_err = f64::NAN, "x error"),
        (|p| p.y_err_minus = f64::NEG_INFINITY, "lower y error"),
        (|p| p.y_err_plus = f64::NAN, "upper y error"),
    ];
    for (spoil, field) in cases {
        let mut chart = small_chart();
        spoil(&mut chart.points[3]);
        let err = relation_svg(&chart).expect_err(field);
        assert_eq!(
            err,
            ChartError::NonFinite {
                item: "point \"A-4\"".to_owned(),
                field
            }
        );
        assert_eq!(
            err.to_string(),
            format!("The {field} of point \"A-4\" is not a finite number.")
        );

        let mut residuals = small_residuals();
        spoil(&mut residuals.points[3]);
        assert!(matches!(
            residual_svg(&residuals),
            Err(ChartError::NonFinite { .. })
        ));
    }

    let mut chart = small_chart();
    if let Some(line) = &mut chart.line {
        line.beta2 = Some(f64::NAN);
    }
    assert_eq!(
        relation_svg(&chart).expect_err("NaN curvature").to_string(),
        "The curvature β₂ of the fitted line is not a finite number."
    );

    let mut chart = small_chart();
    chart.mean_band[4].upper = f64::NAN;
    assert!(matches!(
        relation_svg(&chart),
        Err(ChartError::NonFinite {
            field: "upper edge",
            ..
        })
    ));

    let mut chart = small_chart();
    chart.highlight = Some(ChartPoint {
        y: f64::NAN,
        ..point("Probe", 2.2, 8.0, 0)
    });
    assert!(
        relation_svg(&chart)
            .expect_err("NaN highlight")
            .to_string()
            .contains("\"Probe\"")
    );

    let mut residuals = small_residuals();
    residuals.scatter_dex = f64::NAN;
    assert!(matches!(
        residual_svg(&residuals),
        Err(ChartError::NonFinite {
            field: "scatter ε",
            ..
        })
    ));
}

#[test]
fn other_bad_input_is_refused_with_a_sentence() {
    let mut chart = small_chart();
    chart.points[0].y_err_minus = -0.1;
    let negative = relation_svg(&chart).expect_err("negative error");
    assert_eq!(
        negative.to_string(),
        "The lower y error of point \"A-1\" is negative."
    );

    let mut chart = small_chart();
    chart.points[0].group = 5;
    let unknown = relation_svg(&chart).expect_err("unknown group");
    assert_eq!(
        unknown.to_string(),
        "The point \"A-1\" belongs to group 5, but only 2 groups are defined."
    );

    let mut chart = small_chart();
    chart.mean_band.truncate(1);
    let short = relation_svg(&chart).expect_err("one-sample band");
    assert_eq!(short, ChartError::BandTooShort { len: 1 });

    let mut chart = small_chart();
    chart.mean_band[2].lower = chart.mean_band[2].upper + 0.1;
    assert_eq!(
        relation_svg(&chart).expect_err("inverted band"),
        ChartError::BandInverted { index: 2 }
    );

    let mut chart = small_chart();
    chart.width = 100;
    let size = relation_svg(&chart).expect_err("too small");
    assert!(matches!(size, ChartError::BadSize { width: 100, .. }));

    let mut chart = small_chart();
    if let Some(line) = &mut chart.line {
        line.scatter_dex = -0.2;
    }
    assert!(matches!(
        relation_svg(&chart),
        Err(ChartError::Negative { .. })
    ));

    for err in [negative, unknown, short, size] {
        let text = err.to_string();
        assert!(
            text.ends_with('.') && !text.contains('\n'),
            "one sentence: {text}"
        );
        assert_eq!(text.matches(". ").count(), 0, "one sentence: {text}");
    }
}

#[test]
fn empty_chart_is_a_frame_with_a_message() {
    let chart = RelationChart {
        points: Vec::new(),
        ..small_chart()
    };
    let svg = relation_svg(&chart).expect("empty chart draws");
    assert_clean(&svg);
    assert!(svg.contains(&format!(">{EMPTY_MESSAGE}<tspan")));
    assert!(svg.contains(EMPTY_HINT), "the message says what to change");
    // No 0–1 axes: no tick label at all.
    assert!(
        !texts(&svg).iter().any(|t| t.parse::<f64>().is_ok()),
        "no tick labels in a blank chart"
    );
    assert_eq!(count(&svg, "class=\"empty-message\""), 1);
    assert_eq!(point_chunks(&svg).len(), 0);
    assert_eq!(count(&svg, "class=\"legend-entry\""), 0);
    assert_eq!(band_polygons(&svg, SCATTER_1), 0);
    // Axis labels still say what the chart would show.
    assert!(svg.contains("log₁₀ σ [km/s]"));
    assert!(svg.contains("log₁₀ M_BH [M☉]"));

    let residuals = ResidualChart {
        points: Vec::new(),
        ..small_residuals()
    };
    let svg = residual_svg(&residuals).expect("empty residual chart draws");
    assert_clean(&svg);
    assert!(svg.contains(EMPTY_MESSAGE));

    let bare = residual_svg(&ResidualChart::default()).expect("default chart draws");
    assert_clean(&bare);
    assert!(bare.contains(EMPTY_MESSAGE));
    let bare = relation_svg(&RelationChart::default()).expect("default chart draws");
    assert_clean(&bare);
    assert!(bare.contains(EMPTY_MESSAGE));
}

#[test]
fn data_charts_show_no_empty_message() {
    let svg = relation_svg(&small_chart()).expect("chart draws");
    assert!(!svg.contains(EMPTY_MESSAGE));
}

#[test]
fn a_single_point_gets_a_padded_range() {
    let only = ChartPoint {
        x_err: 0.0,
        y_err_minus: 0.0,
        y_err_plus: 0.0,
        ..point("Solo", 2.3, 8.0, 0)
    };
    let chart = RelationChart {
        points: vec![only],
        line: None,
        mean_band: Vec::new(),
        ..small_chart()
    };
    let rendered = relation_rendered(&chart).expect("chart draws");
    assert_clean(&rendered.svg);
    let x = rendered.spec.get_x_range();
    let y = rendered.spec.get_y_range();
    assert!((x.end - x.start - 1.0).abs() < 1e-12, "x range {x:?}");
    assert!((y.end - y.start - 1.0).abs() < 1e-12, "y range {y:?}");
    assert!(x.start < 2.3 && 2.3 < x.end && y.start < 8.0 && 8.0 < y.end);

    // Several points at one x: the x range is padded, the points land inside the frame.
    let mut same_x = small_chart();
    for p in &mut same_x.points {
        p.x = 2.2;
        p.x_err = 0.0;
    }
    let rendered = relation_rendered(&same_x).expect("chart draws");
    let x = rendered.spec.get_x_range();
    assert!(x.start < 2.2 && 2.2 < x.end && x.end - x.start > 0.5);
    assert_clean(&rendered.svg);
}

#[test]
fn padding_rules() {
    // Zero span: ±0.5 around the value.
    let (lo, hi) = padded(8.0, 8.0);
    assert!((lo - 7.5).abs() < 1e-12 && (hi - 8.5).abs() < 1e-12);
    // Normal span: 6 % each side.
    let (lo, hi) = padded(1.0, 2.0);
    assert!((lo - 0.94).abs() < 1e-12 && (hi - 2.06).abs() < 1e-12);
    // Tiny span: widened to the minimum.
    let (lo, hi) = padded(2.0, 2.01);
    assert!((hi - lo - 0.2).abs() < 1e-12);
}

#[test]
fn tick_labels_have_one_or_two_decimals() {
    assert_eq!(tick_decimals(1.8, 2.6, 8), 1);
    assert_eq!(tick_decimals(2.25, 2.45, 8), 2);
    let svg = relation_svg(&small_chart()).expect("chart draws");
    let numeric: Vec<&str> = svg
        .split("</text>")
        .filter_map(|chunk| chunk.rsplit('>').next())
        .map(str::trim)
        .filter(|t| {
            !t.is_empty()
                && t.chars()
                    .all(|c| c.is_ascii_digit() || c == '.' || c == '−')
        })
        .collect();
    assert!(numeric.len() >= 6, "ticks labelled: {numeric:?}");
    for label in numeric {
        let decimals = label.split_once('.').map_or(0, |(_, d)| d.len());
        assert!((1..=2).contains(&decimals), "tick label {label}");
    }
}

#[test]
fn all_text_is_at_least_twelve_pixels() {
    for svg in [
        relation_svg(&small_chart()).expect("chart draws"),
        residual_svg(&small_residuals()).expect("chart draws"),
    ] {
        let sizes: Vec<f64> = svg
            .match_indices("font-size=\"")
            .map(|(k, m)| {
                let rest = &svg[k + m.len()..];
                rest[..rest.find('"').expect("closed")]
                    .parse()
                    .expect("number")
            })
            .collect();
        assert!(sizes.len() >= 5);
        assert!(sizes.iter().all(|&s| s >= 12.0), "font sizes {sizes:?}");
    }
}

#[test]
fn size_is_the_callers() {
    let chart = RelationChart {
        width: 900,
        height: 600,
        ..small_chart()
    };
    let svg = relation_svg(&chart).expect("chart draws");
    assert!(svg.contains(r#"width="900" height="600" viewBox="0 0 900 600""#));
    let default = relation_svg(&small_chart()).expect("chart draws");
    assert!(default.contains(r#"width="720" height="480""#));
}

#[test]
fn many_groups_get_distinct_styles_and_the_legend_fits() {
    let styles: Vec<_> = (0..16).map(style::group_style).collect();
    for (i, a) in styles.iter().enumerate() {
        for b in &styles[i + 1..] {
            assert_ne!(a, b);
        }
    }
    let mut chart = small_chart();
    chart.groups = (0..30)
        .map(|i| Group {
            label: format!("Group number {i} with a rather long descriptive label"),
        })
        .collect();
    let svg = relation_svg(&chart).expect("chart draws");
    assert_clean(&svg);
    assert_eq!(
        count(&svg, "class=\"legend-more\""),
        1,
        "overflow summarised"
    );
    assert!(count(&svg, "class=\"legend-entry\"") < 30);
}

#[test]
fn relation_snapshot_structure() {
    // Structural facts of the fixed small chart (not the whole string, which depends on
    // plotters' layout details).
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    let n = chart.points.len();
    let limits = chart.points.iter().filter(|p| p.upper_limit).count();
    assert_eq!(count(&svg, "<svg"), 1);
    assert_eq!(count(&svg, "class=\"pt\""), n);
    assert_eq!(count(&svg, "<a href=\"/galaxies/"), n);
    assert_eq!(count(&svg, "<title>"), n);
    assert_eq!(count(&svg, "class=\"err-x\""), n);
    assert_eq!(count(&svg, "class=\"err-y\""), n - limits);
    assert_eq!(count(&svg, "class=\"limit-arrow\""), limits + 1);
    // Markers: one per point plus one per group in the legend.
    assert_eq!(count(&svg, "class=\"mk\""), n + chart.groups.len());
    assert_eq!(count(&svg, "data-group=\"0\""), 3);
    assert_eq!(count(&svg, "data-group=\"1\""), 3);
    assert_eq!(count(&svg, "class=\"legend-entry\""), 7);
    assert_eq!(band_polygons(&svg, SCATTER_2), 1);
    assert_eq!(band_polygons(&svg, SCATTER_1), 1);
    assert_eq!(band_polygons(&svg, MEAN_BAND), 1);
    assert_eq!(polylines(&svg, &LINE.hex(), "2").len(), 1);
    let texts = texts(&svg);
    assert!(texts.contains(&"log₁₀ σ [km/s]"), "x label with unit");
    assert!(texts.contains(&"log₁₀ M_BH [M☉]"), "y label with unit");
    assert!(!texts.contains(&"M_BH–σ"), "no drawn title on a page chart");
    // Group 0 filled circles, group 1 open squares.
    assert!(svg.contains("<circle class=\"mk\""));
    assert!(svg.contains("fill=\"#FFFFFF\" stroke=\"#D0701A\""));
    // Comfortably under the project's page budget (300 KB per page with its chart).
    assert!(svg.len() < 40_000, "{} bytes", svg.len());
}

// ---------------------------------------------------------------------------------------------
// Residual chart

#[test]
fn residual_chart_has_zero_line_band_points_and_links() {
    let chart = small_residuals();
    let rendered = residual_rendered(&chart).expect("chart draws");
    let svg = &rendered.svg;
    assert_clean(svg);
    let n = chart.points.len();
    assert_eq!(point_chunks(svg).len(), n);
    assert_eq!(titles(svg).len(), n);
    assert_eq!(count(svg, "<a href="), n);
    assert_eq!(
        count(svg, "class=\"limit-arrow\""),
        2,
        "one limit plus the legend"
    );
    assert_eq!(count(svg, "class=\"err-y\""), n - 1);
    assert_eq!(band_polygons(svg, SCATTER_1), 1);
    assert!(svg.contains(">±1ε = 0.40 dex</text>"));
    assert!(
        texts(svg).contains(&"Δ log₁₀ M_BH [dex]"),
        "y label with unit"
    );
    // Groups, upper limit, zero line, ±1ε.
    assert_eq!(count(svg, "class=\"legend-entry\""), chart.groups.len() + 3);

    let zero = polylines(svg, &LINE.hex(), "1");
    assert_eq!(zero.len(), 1, "one zero line");
    let (_, y0) = exact_px(&rendered.spec, 2.3, 0.0);
    assert!(
        zero[0].iter().all(|&(_, y)| (y - y0).abs() <= 0.05),
        "zero line at y = 0"
    );
    // The band spans ±ε around zero.
    let (_, top) = exact_px(&rendered.spec, 2.3, 0.4);
    let (_, bottom) = exact_px(&rendered.spec, 2.3, -0.4);
    let k = svg.find("<polygon opacity=").expect("band");
    let band = &svg[k..k + svg[k..].find("/>").expect("closed")];
    let ys: Vec<f64> = attr(band, "points")
        .expect("points")
        .split_whitespace()
        .map(|p| p.split_once(',').expect("pair").1.parse().expect("y"))
        .collect();
    let lo = ys.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = ys.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    assert!((lo - top).abs() <= 0.05, "band top {lo} at {top}");
    assert!((hi - bottom).abs() <= 0.05, "band bottom {hi} at {bottom}");
}

#[test]
fn residual_titles_use_the_callers_labels() {
    let mut chart = small_residuals();
    chart.x_label = "log₁₀ D [Mpc]".to_owned();
    let svg = residual_svg(&chart).expect("chart draws");
    let t = titles(&svg);
    assert!(
        t.iter()
            .all(|t| t.contains("Δ log₁₀ M_BH [dex]") && t.contains("log₁₀ D [Mpc] ="))
    );
}

#[test]
fn residual_band_is_absent_when_epsilon_is_zero() {
    let chart = ResidualChart {
        scatter_dex: 0.0,
        ..small_residuals()
    };
    let svg = residual_svg(&chart).expect("chart draws");
    assert_eq!(band_polygons(&svg, SCATTER_1), 0);
    assert!(!svg.contains("±1ε"));
    assert_eq!(
        polylines(&svg, &LINE.hex(), "1").len(),
        1,
        "zero line stays"
    );
}

#[test]
fn residual_range_always_shows_zero_and_the_band() {
    let mut chart = small_residuals();
    for p in &mut chart.points {
        p.y += 3.0;
    }
    let rendered = residual_rendered(&chart).expect("chart draws");
    let y = rendered.spec.get_y_range();
    assert!(y.start < -0.4 && y.end > 3.0, "{y:?}");
}

// ---------------------------------------------------------------------------------------------
// Pieces

#[test]
fn relation_formula_matches_the_power_law() {
    // y = α + β (x − x₀): with MM13's M–σ fit (α = 8.32, β = 5.64, pivot 200 km/s; McConnell &
    // Ma 2013, ApJ 764, 184, docs/methods.md §7 row 7), at σ = 200 × 10^0.1 km/s the
    // relation gives 8.32 + 0.564 = 8.884 (computed from the formula).
    let line = LineSpec {
        alpha: 8.32,
        beta: 5.64,
        beta2: None,
        pivot: 200f64.log10(),
        scatter_dex: 0.38,
    };
    assert!((line.y_at(200f64.log10() + 0.1) - 8.884).abs() < 1e-12);
    assert!((line.y_at(line.pivot) - 8.32).abs() < 1e-12);
    // Log-quadratic term adds β₂ (x − x₀)² (Wyithe 2006 form, β₂ = 1.6): 1.6 × 0.01 = 0.016 at
    // Δx = 0.1, so 8.884 + 0.016 = 8.9 (computed).
    let curved = LineSpec {
        beta2: Some(1.6),
        ..line
    };
    assert!((curved.y_at(line.pivot + 0.1) - 8.9).abs() < 1e-12);
}

#[test]
fn polygons_and_lines_are_clipped_to_the_frame() {
    let b = Bounds {
        x_min: 0.0,
        x_max: 1.0,
        y_min: 0.0,
        y_max: 1.0,
    };
    let big = [(-1.0, -1.0), (2.0, -1.0), (2.0, 2.0), (-1.0, 2.0)];
    let clipped = clip_polygon(&big, b);
    assert!(!clipped.is_empty());
    assert!(
        clipped
            .iter()
            .all(|&(x, y)| (0.0..=1.0).contains(&x) && (0.0..=1.0).contains(&y))
    );
    let outside = [(2.0, 2.0), (3.0, 2.0), (3.0, 3.0)];
    assert!(clip_polygon(&outside, b).is_empty());

    // A polyline that leaves through the top and comes back: two runs, all inside.
    let zigzag = [(0.0, 0.5), (0.4, 1.5), (0.6, 1.5), (1.0, 0.5)];
    let runs = clip_polyline(&zigzag, b);
    assert_eq!(runs.len(), 2);
    assert!(runs.iter().flatten().all(|&(_, y)| y <= 1.0 + 1e-12));
    assert!((runs[0][1].0 - 0.2).abs() < 1e-12, "leaves at x = 0.2");
    // Entirely inside: one run with all vertices.
    let inside = [(0.1, 0.1), (0.5, 0.5), (0.9, 0.2)];
    assert_eq!(clip_polyline(&inside, b), vec![inside.to_vec()]);
}

#[test]
fn escape_covers_markup_and_forbidden_characters() {
    assert_eq!(escape("a<b>&\"'"), "a&lt;b&gt;&amp;&quot;&apos;");
    assert_eq!(escape("x\u{0}y\u{1B}z"), "x\u{FFFD}y\u{FFFD}z");
    assert_eq!(escape("tab\tok"), "tab\tok");
}

#[test]
fn axis_label_helpers_carry_units() {
    assert_eq!(sigma_axis_label(), "log₁₀ σ [km/s]");
    assert_eq!(bulge_mass_axis_label(), "log₁₀ M_bulge [M☉]");
    assert_eq!(luminosity_axis_label("K"), "log₁₀ L_K [L☉,K]");
    assert_eq!(black_hole_mass_axis_label(), "log₁₀ M_BH [M☉]");
    assert_eq!(residual_axis_label(), "Δ log₁₀ M_BH [dex]");
}

// ---------------------------------------------------------------------------------------------
// Large samples: density

/// A catalog-sized sample of `n` invented objects ("X 1", "X 2", …) scattered about the small
/// chart's line by a fixed pseudo-random sequence; every tenth is an upper limit, the objects
/// whose index is a multiple of `n / emphasised` are marked, all in two groups.
fn large_points(n: usize, emphasised: usize, line: LineSpec) -> Vec<ChartPoint> {
    // A 64-bit linear congruential sequence (Knuth's MMIX constants), mapped to 0..1.
    let mut state: u64 = 0x2545_F491_4F6C_DD1D;
    let mut uniform = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1_u64 << 53) as f64
    };
    let every = n / emphasised.max(1);
    (0..n)
        .map(|i| {
            let x = 1.9 + 0.7 * uniform();
            // Sum of three uniforms: a bell-shaped scatter of about 0.4 dex.
            let scatter = 0.8 * (uniform() + uniform() + uniform() - 1.5);
            ChartPoint {
                name: format!("X {}", i + 1),
                href: Some(format!("/galaxies/x-{}", i + 1)),
                x,
                x_err: 0.02,
                y: line.y_at(x) + scatter,
                y_err_minus: 0.1,
                y_err_plus: 0.1,
                upper_limit: i % 10 == 3,
                group: i % 2,
                emphasis: emphasised > 0 && i % every == 0,
                outlier: false,
                unresolved: false,
            }
        })
        .collect()
}

fn large_chart(n: usize, emphasised: usize) -> RelationChart {
    let chart = small_chart();
    let line = chart.line.expect("small chart has a line");
    RelationChart {
        points: large_points(n, emphasised, line),
        highlight: Some(ChartPoint {
            name: "Placed <object> & co".to_owned(),
            href: Some("/galaxies/placed".to_owned()),
            ..point("Placed", 2.2, 7.8, 0)
        }),
        ..chart
    }
}

fn large_residuals(chart: &RelationChart) -> ResidualChart {
    let line = chart.line.expect("large chart has a line");
    ResidualChart {
        title: "Residuals".to_owned(),
        x_label: sigma_axis_label(),
        points: chart
            .points
            .iter()
            .map(|p| ChartPoint {
                y: p.y - line.y_at(p.x),
                ..p.clone()
            })
            .collect(),
        groups: chart.groups.clone(),
        scatter_dex: 0.4,
        highlight: chart.highlight.clone().map(|h| ChartPoint {
            y: h.y - line.y_at(h.x),
            ..h
        }),
        ..ResidualChart::default()
    }
}

/// The number in `data-objects` of the density group, if the chart has one.
fn density_objects(svg: &str) -> Option<usize> {
    let k = svg.find("<g class=\"density\"")?;
    let element = &svg[k..k + svg[k..].find('>').expect("closed")];
    Some(
        attr(element, "data-objects")
            .expect("density counts its objects")
            .parse()
            .expect("a whole number"),
    )
}

/// Whether some `<title>` starts with `name` followed by the colon of the hover text.
fn has_hover(svg: &str, name: &str) -> bool {
    let key = format!("{}:", escape(name));
    titles(svg).iter().any(|t| t.starts_with(&key))
}

#[test]
fn charts_of_a_hundred_thousand_objects_stay_light() {
    let chart = large_chart(100_000, 200);
    let relation = relation_svg(&chart).expect("chart draws");
    let residual = residual_svg(&large_residuals(&chart)).expect("chart draws");
    for svg in [&relation, &residual] {
        assert_clean(svg);
        assert!(
            svg.len() <= 300_000,
            "a chart of 100,000 objects weighs {} bytes",
            svg.len()
        );
        assert!(density_objects(svg).is_some(), "drawn as a density");
    }
}

#[test]
fn the_density_legend_counts_the_objects_it_shades() {
    let chart = large_chart(20_000, 200);
    for svg in [
        relation_svg(&chart).expect("chart draws"),
        residual_svg(&large_residuals(&chart)).expect("chart draws"),
    ] {
        // The highlighted object has its own group, outside the points.
        let one_by_one = count(&svg, "<g class=\"pt\"");
        let shaded = density_objects(&svg).expect("drawn as a density");
        assert_eq!(shaded + one_by_one, chart.points.len());
        // 2,000 of the 20,000 are limits: too many to draw, so they are shaded too.
        let label = format!("{} as density:", density::grouped(shaded as u64));
        assert!(
            plain_texts(&svg).contains(&label),
            "legend names {shaded} objects: {:?}",
            plain_texts(&svg)
        );
        let limits = chart
            .points
            .iter()
            .filter(|p| p.upper_limit && !p.emphasis)
            .count();
        let note = format!("incl. {} limits", density::grouped(limits as u64));
        assert!(
            plain_texts(&svg).contains(&note),
            "legend says the limits are shaded"
        );
        assert_eq!(
            count(&svg, "class=\"limit-arrow\""),
            count_limit_arrows(&chart)
        );
    }
}

/// Arrows a large chart draws: its emphasised limits, and one in the legend if there are any.
fn count_limit_arrows(chart: &RelationChart) -> usize {
    let drawn = chart
        .points
        .iter()
        .filter(|p| p.upper_limit && p.emphasis)
        .count();
    drawn + usize::from(drawn > 0)
}

/// The legend's and the axes' texts with wrapped lines joined by a space.
fn plain_texts(svg: &str) -> Vec<String> {
    texts(svg)
        .iter()
        .map(|t| {
            let mut out = String::new();
            let mut rest = *t;
            while let Some(k) = rest.find('<') {
                out.push_str(&rest[..k]);
                let end = rest[k..].find('>').expect("tag closed");
                if rest[k..].starts_with("<tspan") {
                    out.push(' ');
                }
                rest = &rest[k + end + 1..];
            }
            out.push_str(rest);
            out
        })
        .collect()
}

#[test]
fn marked_and_highlighted_objects_are_drawn_one_by_one_in_a_density() {
    let chart = large_chart(20_000, 200);
    let svg = relation_svg(&chart).expect("chart draws");
    let marked: Vec<&ChartPoint> = chart.points.iter().filter(|p| p.emphasis).collect();
    assert_eq!(marked.len(), 200);
    for p in &marked {
        assert!(has_hover(&svg, &p.name), "{} is drawn one by one", p.name);
    }
    assert!(has_hover(&svg, "Placed <object> & co"));
    assert!(svg.contains("Placed &lt;object&gt; &amp; co"));
    assert_eq!(count(&svg, "class=\"pt highlight\""), 1);
    // Unmarked objects of the large groups are only shaded.
    let unmarked = chart
        .points
        .iter()
        .filter(|p| !p.emphasis)
        .take(50)
        .filter(|p| has_hover(&svg, &p.name))
        .count();
    assert_eq!(unmarked, 0);
    assert_eq!(count(&svg, "<g class=\"pt\""), 200);
}

#[test]
fn marks_beyond_the_cap_join_the_density_and_the_legend_says_so() {
    let mut chart = large_chart(20_000, 0);
    for p in &mut chart.points {
        p.upper_limit = false;
    }
    for p in chart.points.iter_mut().take(MAX_EMPHASISED + 40) {
        p.emphasis = true;
    }
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&svg, "<g class=\"pt\""), MAX_EMPHASISED);
    assert!(has_hover(&svg, &chart.points[MAX_EMPHASISED - 1].name));
    assert!(!has_hover(&svg, &chart.points[MAX_EMPHASISED].name));
    assert!(
        plain_texts(&svg).contains(&"incl. 40 marked".to_owned()),
        "{:?}",
        plain_texts(&svg)
    );
}

#[test]
fn few_upper_limits_and_small_groups_stay_visible_in_a_density() {
    let mut chart = large_chart(10_000, 0);
    chart.highlight = None;
    chart.groups.push(Group {
        label: "Rare type".to_owned(),
    });
    for (i, p) in chart.points.iter_mut().enumerate() {
        p.upper_limit = i % 100 == 7;
        if i % 400 == 5 {
            p.group = 2;
        }
    }
    let limits = chart.points.iter().filter(|p| p.upper_limit).count();
    let rare: Vec<&ChartPoint> = chart.points.iter().filter(|p| p.group == 2).collect();
    assert!(limits <= MAX_LIMITS_DRAWN && rare.len() <= SMALL_GROUP);
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&svg, "<g class=\"pt\""), limits + rare.len());
    for p in rare {
        assert!(has_hover(&svg, &p.name));
    }
    // One arrow per limit and one in the legend; the rare group has its legend row, the shaded
    // groups do not.
    assert_eq!(count(&svg, "class=\"limit-arrow\""), limits + 1);
    let legend = texts(&svg);
    assert!(legend.contains(&"Rare type"));
    assert!(!legend.iter().any(|t| t.contains("limits")));
    assert_eq!(
        density_objects(&svg),
        Some(chart.points.len() - limits - 25)
    );
}

#[test]
fn at_the_threshold_every_object_is_drawn_with_its_name() {
    let chart = RelationChart {
        highlight: None,
        ..large_chart(DENSITY_THRESHOLD, 20)
    };
    let svg = relation_svg(&chart).expect("chart draws");
    assert!(density_objects(&svg).is_none());
    assert_eq!(count(&svg, "<g class=\"pt\""), DENSITY_THRESHOLD);
    for p in &chart.points {
        assert!(has_hover(&svg, &p.name), "{} is drawn", p.name);
    }
    // One more object turns the chart into a density.
    let over = RelationChart {
        highlight: None,
        ..large_chart(DENSITY_THRESHOLD + 1, 20)
    };
    let svg = relation_svg(&over).expect("chart draws");
    assert!(density_objects(&svg).is_some());
}

#[test]
fn the_density_is_drawn_under_the_line_in_a_few_compact_paths() {
    let chart = large_chart(100_000, 200);
    let svg = relation_svg(&chart).expect("chart draws");
    let density = svg.find("<g class=\"density\"").expect("a density");
    let line = svg[density..]
        .find(&format!("stroke=\"{}\" stroke-width=\"2\"", LINE.hex()))
        .expect("the fitted line is redrawn over the shading");
    assert!(line > 0);
    // The bands lie on the shading, the three of them once each.
    for tint in [SCATTER_2, SCATTER_1, MEAN_BAND] {
        assert_eq!(band_polygons(&svg[density..], tint), 1);
        assert_eq!(band_polygons(&svg, tint), 1);
    }
    let block = &svg[density..density + svg[density..].find("</g>").expect("closed")];
    let paths = count(block, "<path ");
    assert!((1..=density::LEVELS).contains(&paths), "{paths} paths");
    // Rectangles with whole-pixel corners only.
    for d in block.match_indices(" d=\"").map(|(k, m)| {
        let rest = &block[k + m.len()..];
        &rest[..rest.find('"').expect("closed")]
    }) {
        assert!(
            d.chars()
                .all(|c| c.is_ascii_digit() || "Mhvz -".contains(c)),
            "{d}"
        );
    }
}

#[test]
fn text_on_a_density_chart_is_readable() {
    let chart = large_chart(50_000, 100);
    for svg in [
        relation_svg(&chart).expect("chart draws"),
        residual_svg(&large_residuals(&chart)).expect("chart draws"),
    ] {
        let sizes: Vec<f64> = svg
            .match_indices("font-size=\"")
            .map(|(k, m)| {
                let rest = &svg[k + m.len()..];
                rest[..rest.find('"').expect("closed")]
                    .parse()
                    .expect("number")
            })
            .collect();
        assert!(sizes.iter().all(|&s| s >= 10.0), "font sizes {sizes:?}");
    }
}

#[test]
fn shade_levels_are_round_increasing_and_end_at_the_fullest_cell() {
    for max in [1, 2, 3, 7, 40, 125, 999, 2_000, 65_000] {
        let bounds = density::level_bounds(max);
        assert_eq!(bounds.last(), Some(&max));
        assert!(bounds.len() <= density::LEVELS);
        assert!(bounds.windows(2).all(|w| w[0] < w[1]), "{bounds:?}");
        for &b in &bounds[..bounds.len() - 1] {
            let mut m = b;
            while m % 10 == 0 {
                m /= 10;
            }
            assert!(matches!(m, 1 | 2 | 5), "{b} is not round");
        }
    }
    assert_eq!(density::level_bounds(125), vec![5, 10, 50, 125]);
    assert_eq!(density::level_label(&[5, 10, 50, 125], 0), "1–5 per cell");
    assert_eq!(density::level_label(&[1, 2], 1), "2 per cell");
    assert_eq!(density::grouped(20_000), "20,000");
    assert_eq!(density::grouped(999), "999");
    assert_eq!(density::grouped(1_234_567), "1,234,567");
}

#[test]
fn the_fullest_density_chart_stays_under_the_bound() {
    // The most a density chart draws: a sample spread over the whole plot (every cell shaded),
    // the most marked objects, then as many limits as fit in the budget of single points, long
    // names and links.
    let mut chart = large_chart(100_000, MAX_EMPHASISED);
    let limits = MAX_INDIVIDUAL - MAX_EMPHASISED;
    let mut state: u64 = 7;
    let mut uniform = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1_u64 << 53) as f64
    };
    let mut limits_left = limits;
    for p in &mut chart.points {
        p.x = 1.9 + 0.7 * uniform();
        p.y = 6.0 + 4.5 * uniform();
        p.name = format!("{} of the long-named survey field", p.name);
        p.upper_limit = !p.emphasis && limits_left > 0 && {
            limits_left -= 1;
            true
        };
    }
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&svg, "<g class=\"pt\""), MAX_INDIVIDUAL);
    assert!(svg.len() <= 300_000, "{} bytes", svg.len());
    let residual = residual_svg(&large_residuals(&chart)).expect("chart draws");
    assert!(residual.len() <= 300_000, "{} bytes", residual.len());
}

#[test]
fn a_density_legend_with_five_groups_fits_beside_the_default_chart() {
    let mut chart = large_chart(20_000, 200);
    chart.groups = ["Type A", "Type B", "Type C", "Type D", "Type E"]
        .iter()
        .map(|l| Group {
            label: (*l).to_owned(),
        })
        .collect();
    for (i, p) in chart.points.iter_mut().enumerate() {
        // Four large groups and a small fifth one, which has limits of its own drawn as arrows.
        p.group = if i % 997 == 0 { 4 } else { (i / 7) % 4 };
    }
    let svg = relation_svg(&chart).expect("chart draws");
    let legend = plain_texts(&svg);
    assert!(!svg.contains("legend-more"), "legend overflows: {legend:?}");
    for label in ["Type E", "Upper limit", "±2ε = 0.80 dex"] {
        assert!(legend.contains(&label.to_owned()), "{label} in {legend:?}");
    }
}

// ---------------------------------------------------------------------------------------------
// Publication finish: sub-pixel geometry, whole marks, outliers, title, keyboard, summary

#[test]
fn the_fitted_line_has_sub_pixel_coordinates() {
    let svg = relation_svg(&small_chart()).expect("chart draws");
    let runs = polylines(&svg, &LINE.hex(), "2");
    assert_eq!(runs.len(), 1);
    let fractional = runs[0]
        .iter()
        .filter(|(x, y)| x.fract() != 0.0 || y.fract() != 0.0)
        .count();
    assert!(
        fractional * 2 > runs[0].len(),
        "most vertices off the whole-pixel grid: {fractional} of {}",
        runs[0].len()
    );
}

#[test]
fn marks_and_limit_arrows_stay_inside_the_plot_area() {
    // A limit far below the rest and points at the extremes of x, as on a luminosity chart.
    let mut chart = small_chart();
    chart.points[5].y = 5.0;
    chart.points[0].x = 1.5;
    chart.points[0].x_err = 0.0;
    let rendered = relation_rendered(&chart).expect("chart draws");
    let xr = rendered.spec.get_x_range();
    let yr = rendered.spec.get_y_range();
    let (left, bottom) = exact_px(&rendered.spec, xr.start, yr.start);
    let (right, top) = exact_px(&rendered.spec, xr.end, yr.end);
    for p in &chart.points {
        let (px, py) = exact_px(&rendered.spec, p.x, p.y);
        assert!(px - 9.5 > left && px + 9.5 < right, "{} whole in x", p.name);
        assert!(py - 9.5 > top && py + 9.5 < bottom, "{} whole in y", p.name);
    }
    let chunk = point_chunks(&rendered.svg)
        .into_iter()
        .find(|c| c.contains("A-6:"))
        .expect("limit drawn");
    let arrow = &chunk[chunk.find("class=\"limit-arrow\"").expect("arrow")..];
    let d = attr(arrow, "d").expect("arrow path");
    let tip: f64 = d[1..]
        .split_once('V')
        .expect("shaft")
        .1
        .split('M')
        .next()
        .expect("tip")
        .parse()
        .expect("number");
    let (_, start) = exact_px(&rendered.spec, 2.05, 5.0);
    assert!(
        (tip - start - f64::from(style::ARROW_PX)).abs() < 0.1,
        "full arrow"
    );
    assert!(tip < bottom, "arrow tip {tip} above the axis at {bottom}");
}

#[test]
fn the_mean_band_reaches_the_frame() {
    let chart = small_chart();
    let rendered = relation_rendered(&chart).expect("chart draws");
    let xr = rendered.spec.get_x_range();
    // The fixture's band samples stop at x = 2.0 and 2.5, inside the frame.
    assert!(xr.start < 2.0 && xr.end > 2.5);
    let band = extend_band(&chart.mean_band, chart.line.as_ref(), xr.start, xr.end);
    assert!((band[0].x - xr.start).abs() < 1e-12);
    assert!((band[band.len() - 1].x - xr.end).abs() < 1e-12);
    // A band of constant width stays that width, centred on the line.
    let line = chart.line.expect("line");
    for s in [band[0], band[band.len() - 1]] {
        assert!((s.upper - s.lower - 0.16).abs() < 1e-9);
        assert!((0.5 * (s.upper + s.lower) - line.y_at(s.x)).abs() < 1e-9);
    }
    // A band of a straight-line fit, w² = a + b (x − c)², is continued exactly.
    let hyperbolic: Vec<BandPoint> = (0..=10)
        .map(|k| {
            let x = 2.0 + 0.05 * f64::from(k);
            let w = (0.01 + 0.5 * (x - 2.3f64).powi(2)).sqrt();
            BandPoint {
                x,
                lower: line.y_at(x) - w,
                upper: line.y_at(x) + w,
            }
        })
        .collect();
    let out = extend_band(&hyperbolic, Some(&line), 1.8, 2.7);
    let w = |x: f64| (0.01 + 0.5 * (x - 2.3f64).powi(2)).sqrt();
    assert!((0.5 * (out[0].upper - out[0].lower) - w(1.8)).abs() < 1e-9);
    assert!((0.5 * (out[out.len() - 1].upper - out[out.len() - 1].lower) - w(2.7)).abs() < 1e-9);
}

#[test]
fn outliers_are_ringed_with_a_legend_entry() {
    let mut chart = small_chart();
    let plain = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&plain, "class=\"outlier-ring\""), 0);
    assert!(!texts(&plain).contains(&"Outlier (ringed)"));
    chart.points[1].outlier = true;
    chart.points[4].outlier = true;
    let svg = relation_svg(&chart).expect("chart draws");
    let ringed: Vec<&str> = point_chunks(&svg)
        .into_iter()
        .filter(|c| c.contains("class=\"outlier-ring\""))
        .collect();
    assert_eq!(ringed.len(), 2);
    assert!(ringed.iter().any(|c| c.contains("A-2:")));
    assert!(ringed.iter().any(|c| c.contains("A-5:")));
    // Points and the legend's sample.
    assert_eq!(count(&svg, "class=\"outlier-ring\""), 3);
    assert!(texts(&svg).contains(&"Outlier (ringed)"));
    // The text summary names them.
    assert!(svg.contains("2 outliers ringed: A-2, A-5."));
}

/// Every text of a chart, wrapped lines joined, tags dropped and spaces collapsed.
fn legend_words(svg: &str) -> String {
    let mut plain = String::new();
    let mut inside_tag = false;
    for c in texts(svg).join(" ").chars() {
        match c {
            '<' => inside_tag = true,
            '>' => {
                inside_tag = false;
                plain.push(' ');
            }
            _ if !inside_tag => plain.push(c),
            _ => {}
        }
    }
    plain.split_whitespace().collect::<Vec<_>>().join(" ")
}

#[test]
fn unresolved_spheres_of_influence_get_a_square_and_a_legend_entry_only_when_present() {
    let mut chart = small_chart();
    let plain = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&plain, "class=\"unresolved-mark\""), 0);
    assert!(!legend_words(&plain).contains("Sphere of influence"));
    assert!(!plain.contains("not resolved (slashed)"));
    chart.points[2].unresolved = true;
    chart.points[4].outlier = true;
    chart.points[4].unresolved = true;
    let svg = relation_svg(&chart).expect("chart draws");
    let squared: Vec<&str> = point_chunks(&svg)
        .into_iter()
        .filter(|c| c.contains("class=\"unresolved-mark\""))
        .collect();
    assert_eq!(squared.len(), 2);
    assert!(squared.iter().any(|c| c.contains("A-3:")));
    // The square is a mark of its own beside the outlier ring, not the ring.
    let both = squared.iter().find(|c| c.contains("A-5:")).expect("A-5");
    assert!(both.contains("class=\"outlier-ring\""));
    // Points and the legend's sample.
    assert_eq!(count(&svg, "class=\"unresolved-mark\""), 3);
    assert!(legend_words(&svg).contains("Sphere of influence not resolved"));
    assert!(svg.contains("2 objects with the sphere of influence not resolved (slashed)."));
    // On a density chart they are drawn one by one, like the emphasised points.
    let mut large = large_chart(3_000, 0);
    large.points[7].unresolved = true;
    let svg = relation_svg(&large).expect("chart draws");
    let squared = point_chunks(&svg)
        .into_iter()
        .filter(|c| c.contains("class=\"unresolved-mark\""))
        .count();
    assert_eq!(squared, 1);
    assert!(legend_words(&svg).contains("Sphere of influence not resolved"));
    // The print version draws too.
    assert!(relation_png(&chart).is_ok());
}

#[test]
fn page_charts_carry_no_drawn_title_but_downloads_can() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    assert!(!texts(&svg).contains(&"M_BH–σ"));
    // The name stays for assistive technology.
    assert!(svg.contains("role=\"img\" aria-label=\"M_BH–σ: "));
    let standalone = RelationChart {
        show_title: true,
        ..chart
    };
    let svg = relation_svg(&standalone).expect("chart draws");
    assert!(texts(&svg).contains(&"M_BH–σ"));
}

#[test]
fn points_are_no_tab_stops_and_the_chart_has_a_text_summary() {
    let chart = small_chart();
    let svg = relation_svg(&chart).expect("chart draws");
    assert_eq!(count(&svg, "<a href="), chart.points.len());
    assert_eq!(count(&svg, "tabindex=\"-1\""), chart.points.len());
    let k = svg.find("<desc>").expect("description");
    let desc = &svg[k + 6..k + svg[k..].find("</desc>").expect("closed")];
    assert!(desc.contains("6 objects (1 upper limit)"), "{desc}");
    assert!(
        desc.contains("Fitted line: y = 8.30 + 5.00 (x − 2.30)"),
        "{desc}"
    );
    assert!(desc.contains("intrinsic scatter 0.40 dex"), "{desc}");
    assert!(desc.contains("No outlier marked."), "{desc}");
}

#[test]
fn the_highlighted_objects_error_bars_are_drawn_over_its_star() {
    let mut chart = small_chart();
    chart.highlight = Some(ChartPoint {
        name: "Placed".to_owned(),
        ..point("Placed", 2.25, 8.0, 0)
    });
    let svg = relation_svg(&chart).expect("chart draws");
    let k = svg.find("<g class=\"pt highlight\">").expect("highlight");
    let chunk = &svg[k..k + svg[k..].find("</g>").expect("closed")];
    let star = chunk.find("class=\"mk star\"").expect("star");
    let bar = chunk.find("class=\"err-y\"").expect("bar");
    let halo = chunk.find("class=\"halo\"").expect("halo");
    assert!(star < halo && halo < bar, "star, then halo, then bar");
}

#[test]
fn the_png_is_a_png_of_the_print_size_with_its_resolution() {
    let chart = RelationChart {
        show_title: true,
        ..small_chart()
    };
    let mut chart = chart;
    chart.points[1].outlier = true;
    chart.highlight = Some(point("Placed", 2.25, 8.0, 0));
    let png = relation_png(&chart).expect("chart draws");
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "PNG signature");
    let decoder = ::png::Decoder::new(std::io::Cursor::new(png.as_slice()));
    let reader = decoder.read_info().expect("a readable PNG");
    let info = reader.info();
    assert_eq!((info.width, info.height), (PNG_WIDTH, PNG_HEIGHT));
    let dims = info.pixel_dims.expect("resolution recorded");
    // 300 dpi = 11,811 pixels per metre (300 / 0.0254, rounded).
    assert_eq!((dims.xppu, dims.yppu), (11_811, 11_811));
    // Not a blank page: the points, line and text put many dark pixels on it.
    let mut reader = reader;
    let mut pixels = vec![0; reader.output_buffer_size()];
    reader.next_frame(&mut pixels).expect("pixels");
    let dark = pixels
        .chunks(3)
        .filter(|p| p.iter().all(|&c| c < 100))
        .count();
    assert!(dark > 2_000, "{dark} dark pixels");
    // A blank selection draws too.
    let empty = relation_png(&RelationChart::default()).expect("empty chart draws");
    assert_eq!(&empty[..8], b"\x89PNG\r\n\x1a\n");
}

#[test]
fn the_calibration_chart_draws_the_agn_with_their_own_shape_and_legend_entry() {
    let quiescent: Vec<ChartPoint> = (0..4)
        .map(|i| point(&format!("Q{i}"), 2.1 + 0.1 * f64::from(i), 8.0, 7))
        .collect();
    let agn = vec![point("A<1>", 2.0, 7.2, 9)];
    let line = LineSpec {
        alpha: 8.3,
        beta: 5.0,
        beta2: None,
        pivot: 2.30103,
        scatter_dex: 0.0,
    };
    let svg = virial_calibration_svg(
        "Calibration & check",
        ("Quiescent galaxies", quiescent),
        ("AGN, shifted", agn),
        Some(line),
    )
    .expect("chart draws");
    let texts = texts(&svg);
    assert!(texts.contains(&"Quiescent galaxies"), "{texts:?}");
    assert!(texts.contains(&"AGN, shifted"), "{texts:?}");
    // Group 0 is drawn as circles and group 1 as another shape (a polygon).
    assert!(
        count(&svg, "<circle class=\"mk\"") >= 4,
        "the four quiescent points"
    );
    assert!(
        count(&svg, "<polygon class=\"mk\"") >= 1,
        "the AGN's own shape"
    );
    assert!(svg.contains("A&lt;1&gt;"), "names are escaped");
    assert!(!svg.contains("A<1>"));
}
