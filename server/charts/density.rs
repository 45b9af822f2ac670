//! Large samples: which points a chart draws one by one, and the density the others are drawn as.
//!
//! Above [`DENSITY_THRESHOLD`] points a chart would weigh megabytes and its markers would cover
//! one another, so it draws the sample as shaded cells of a pixel grid over the plot (only the
//! cells that hold objects, one `<path>` per shade) and draws one by one only the points that
//! matter: those the caller marks (up to [`MAX_EMPHASISED`]), the upper limits when they are few
//! ([`MAX_LIMITS_DRAWN`]), the groups that are small ([`SMALL_GROUP`]), never more than
//! [`MAX_INDIVIDUAL`] in all. The highlighted object is drawn by the chart itself, always.

use std::fmt::Write as _;

use super::markup::num;
use super::style::{Rgb, Tint};
use super::{
    ChartPoint, DENSITY_THRESHOLD, MAX_EMPHASISED, MAX_INDIVIDUAL, MAX_LIMITS_DRAWN, SMALL_GROUP,
};

/// Smallest side of a density cell in pixels: about one marker across, so a cell reads as "objects
/// about here" at the size a single object is drawn.
pub(super) const MIN_CELL_PX: i32 = 8;
/// Largest number of cells along the longer side of the plot: bounds the markup of a large chart
/// (at most 60 × 60 cells of about 20 bytes each, 72 KB, for a plot filled edge to edge).
pub(super) const MAX_CELLS_PER_SIDE: i32 = 60;
/// Number of shade levels; fewer when the fullest cell holds only a few objects.
pub(super) const LEVELS: usize = 4;
/// Shades from the emptiest level to the fullest: one warm grey, so the shading is not mistaken
/// for the blue-grey bands drawn over it, light enough that every group colour and the highlight
/// star stay readable on the darkest.
pub(super) const SHADES: [Rgb; LEVELS] = [
    Rgb(0xEC, 0xE6, 0xDC),
    Rgb(0xD6, 0xCC, 0xBB),
    Rgb(0xB8, 0xA9, 0x92),
    Rgb(0x94, 0x82, 0x68),
];
/// Opacity of the shading: the grid shows faintly through it.
pub(super) const SHADE_OPACITY: f64 = 0.9;

/// Which points a chart draws one by one.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct Thinning {
    /// `true` when the chart draws its sample as a density.
    pub(super) dense: bool,
    /// For each point, in the caller's order: drawn one by one.
    pub(super) individual: Vec<bool>,
    /// Points drawn as density.
    pub(super) in_density: usize,
    /// Upper limits drawn as density.
    pub(super) limits_in_density: usize,
    /// Emphasised or unresolved points drawn as density (those beyond [`MAX_EMPHASISED`]).
    pub(super) emphasised_in_density: usize,
}

/// Chooses the points drawn one by one: all of them up to [`DENSITY_THRESHOLD`]; above it, first
/// the emphasised points (in the caller's order, at most [`MAX_EMPHASISED`]), then the points
/// with an unresolved sphere of influence (within the same [`MAX_EMPHASISED`]), then every upper
/// limit if there are at most [`MAX_LIMITS_DRAWN`] of them, then each group of at most
/// [`SMALL_GROUP`] points, whole, in group order, while the total stays within [`MAX_INDIVIDUAL`].
pub(super) fn thinning(points: &[ChartPoint], groups: usize) -> Thinning {
    let n = points.len();
    if n <= DENSITY_THRESHOLD {
        return Thinning {
            dense: false,
            individual: vec![true; n],
            in_density: 0,
            limits_in_density: 0,
            emphasised_in_density: 0,
        };
    }
    let mut individual = vec![false; n];
    let mut drawn = 0;
    let mut emphasised_in_density = 0;
    for (i, p) in points.iter().enumerate() {
        if p.emphasis {
            if drawn < MAX_EMPHASISED {
                individual[i] = true;
                drawn += 1;
            } else {
                emphasised_in_density += 1;
            }
        }
    }
    // Points with an unresolved sphere of influence carry a mark of their own: drawn one by one
    // after the emphasised points, within the same cap.
    for (i, p) in points.iter().enumerate() {
        if p.unresolved && !individual[i] {
            if drawn < MAX_EMPHASISED {
                individual[i] = true;
                drawn += 1;
            } else {
                emphasised_in_density += 1;
            }
        }
    }
    let limits: Vec<usize> = (0..n)
        .filter(|&i| points[i].upper_limit && !individual[i])
        .collect();
    if limits.len() <= MAX_LIMITS_DRAWN && drawn + limits.len() <= MAX_INDIVIDUAL {
        for &i in &limits {
            individual[i] = true;
        }
        drawn += limits.len();
    }
    let mut size = vec![0_usize; groups];
    let mut left = vec![0_usize; groups];
    for (i, p) in points.iter().enumerate() {
        if let Some(s) = size.get_mut(p.group) {
            *s += 1;
            if !individual[i] {
                left[p.group] += 1;
            }
        }
    }
    for g in 0..groups {
        if left[g] > 0 && size[g] <= SMALL_GROUP && drawn + left[g] <= MAX_INDIVIDUAL {
            for (i, p) in points.iter().enumerate() {
                if p.group == g {
                    individual[i] = true;
                }
            }
            drawn += left[g];
        }
    }
    let limits_in_density = (0..n)
        .filter(|&i| points[i].upper_limit && !individual[i])
        .count();
    Thinning {
        dense: true,
        in_density: n - drawn,
        individual,
        limits_in_density,
        emphasised_in_density,
    }
}

/// The plot rectangle in pixels the grid covers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Area {
    pub(super) left: i32,
    pub(super) right: i32,
    pub(super) top: i32,
    pub(super) bottom: i32,
}

/// The points drawn as density, counted in the cells of a square pixel grid.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Grid {
    area: Area,
    /// Side of a cell in pixels.
    pub(super) cell: i32,
    cols: usize,
    counts: Vec<u32>,
}

impl Grid {
    /// The grid over `area`: cells of at least [`MIN_CELL_PX`] pixels, at most
    /// [`MAX_CELLS_PER_SIDE`] along the longer side.
    pub(super) fn new(area: Area) -> Self {
        let w = (area.right - area.left).max(1);
        let h = (area.bottom - area.top).max(1);
        let cell = MIN_CELL_PX.max((w.max(h) + MAX_CELLS_PER_SIDE - 1) / MAX_CELLS_PER_SIDE);
        let cols = usize::try_from((w + cell - 1) / cell).unwrap_or(1);
        let rows = usize::try_from((h + cell - 1) / cell).unwrap_or(1);
        Self {
            area,
            cell,
            cols,
            counts: vec![0; cols * rows],
        }
    }

    /// Counts one object at pixel (x, y); a position outside the area counts in the nearest cell.
    pub(super) fn add(&mut self, x: f64, y: f64) {
        let rows = self.counts.len() / self.cols;
        let index = |v: f64, start: i32, len: usize| -> usize {
            let k = ((v - f64::from(start)) / f64::from(self.cell)).floor();
            // Truncation is the intent: k is floored and clamped into 0..len.
            #[expect(
                clippy::cast_possible_truncation,
                clippy::cast_sign_loss,
                reason = "the value is floored and clamped to the grid"
            )]
            let k = k.clamp(0.0, (len - 1) as f64) as usize;
            k
        };
        let col = index(x, self.area.left, self.cols);
        let row = index(y, self.area.top, rows);
        self.counts[row * self.cols + col] += 1;
    }

    /// The fullest cell's count.
    pub(super) fn max(&self) -> u32 {
        self.counts.iter().copied().max().unwrap_or(0)
    }

    /// Total count over all cells.
    pub(super) fn total(&self) -> u64 {
        self.counts.iter().map(|&c| u64::from(c)).sum()
    }

    /// One path per level: every non-empty cell whose count is at most `bounds[k]` and above
    /// `bounds[k − 1]`, as closed rectangles with integer corners, clipped to the area.
    pub(super) fn paths(&self, bounds: &[u32]) -> Vec<String> {
        let mut paths = vec![String::new(); bounds.len()];
        for (i, &c) in self.counts.iter().enumerate() {
            if c == 0 {
                continue;
            }
            let level = bounds.partition_point(|&b| b < c).min(bounds.len() - 1);
            let x = self.area.left + self.cell * i32::try_from(i % self.cols).unwrap_or(0);
            let y = self.area.top + self.cell * i32::try_from(i / self.cols).unwrap_or(0);
            let w = self.cell.min(self.area.right - x);
            let h = self.cell.min(self.area.bottom - y);
            if w <= 0 || h <= 0 {
                continue;
            }
            let _ = write!(paths[level], "M{x} {y}h{w}v{h}h-{w}z");
        }
        paths
    }
}

/// Upper bounds of the shade levels for cells holding 1 to `max` objects: round numbers (1, 2 or
/// 5 × 10ᵏ) nearest, on a log scale, to `max^(k/LEVELS)`, increasing, the last one `max` itself.
/// Levels spaced evenly in log count show both the sparse edges and the crowded core of a sample.
pub(super) fn level_bounds(max: u32) -> Vec<u32> {
    if max == 0 {
        return Vec::new();
    }
    let mut bounds: Vec<u32> = Vec::new();
    for k in 1..LEVELS {
        let target = f64::from(max).powf(k as f64 / LEVELS as f64);
        let b = nearest_round(target);
        if b < max && bounds.last().is_none_or(|&last| b > last) {
            bounds.push(b);
        }
    }
    bounds.push(max);
    bounds
}

/// The number of the form 1, 2 or 5 × 10ᵏ nearest to `v` ≥ 1 on a log scale.
fn nearest_round(v: f64) -> u32 {
    let mut best = 1_u32;
    let mut candidate = 1_u32;
    let mut step = 0;
    while f64::from(candidate) <= 10.0 * v && candidate < u32::MAX / 10 {
        if (f64::from(candidate) / v).ln().abs() < (f64::from(best) / v).ln().abs() {
            best = candidate;
        }
        // 1, 2, 5, 10, 20, 50, …
        candidate = match step % 3 {
            0 | 2 => candidate * 2,
            _ => candidate / 2 * 5,
        };
        step += 1;
    }
    best
}

/// The legend text of level `k` of `bounds`, e.g. `6–50 per cell` or `1 per cell`.
pub(super) fn level_label(bounds: &[u32], k: usize) -> String {
    let lo = if k == 0 { 1 } else { bounds[k - 1] + 1 };
    let hi = bounds[k];
    if lo == hi {
        format!("{} per cell", grouped(u64::from(hi)))
    } else {
        format!(
            "{}–{} per cell",
            grouped(u64::from(lo)),
            grouped(u64::from(hi))
        )
    }
}

/// A count with thousands separated by commas, e.g. `20,000`.
pub(super) fn grouped(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// One `<path>` per non-empty level, with its count range as the hover text.
pub(super) fn density_markup(out: &mut String, grid: &Grid, objects: usize) {
    let bounds = level_bounds(grid.max());
    let shades = shades_for(bounds.len());
    let _ = writeln!(
        out,
        r#"<g class="density" data-objects="{objects}" data-cell-px="{}" opacity="{SHADE_OPACITY}">"#,
        grid.cell
    );
    for (k, d) in grid.paths(&bounds).iter().enumerate() {
        if d.is_empty() {
            continue;
        }
        let _ = writeln!(
            out,
            r#"<path d="{d}" fill="{}"><title>{}</title></path>"#,
            shades[k].hex(),
            level_label(&bounds, k)
        );
    }
    out.push_str("</g>\n");
}

/// The shades of `levels` levels: the darkest ones when there are fewer than [`LEVELS`], so the
/// fullest cell is always drawn darkest.
pub(super) fn shades_for(levels: usize) -> &'static [Rgb] {
    &SHADES[LEVELS - levels.min(LEVELS)..]
}

/// A translucent band through pixel points, written as plotters writes its bands.
pub(super) fn polygon_element(points: &[(f64, f64)], tint: Tint) -> String {
    let mut list = String::new();
    for (i, &(x, y)) in points.iter().enumerate() {
        if i > 0 {
            list.push(' ');
        }
        let _ = write!(list, "{},{}", num(x), num(y));
    }
    format!(
        r#"<polygon opacity="{}" fill="{}" points="{list}"/>"#,
        tint.opacity,
        tint.colour.hex()
    )
}

/// A line through pixel points, as one open path (the fitted line redrawn over the
/// density).
pub(super) fn polyline_path(points: &[(f64, f64)], colour: Rgb, width: u32) -> String {
    let mut d = String::new();
    for (i, &(x, y)) in points.iter().enumerate() {
        let _ = write!(d, "{}{} {}", if i == 0 { 'M' } else { 'L' }, num(x), num(y));
    }
    format!(
        r#"<path class="line" d="{d}" fill="none" stroke="{}" stroke-width="{width}"/>"#,
        colour.hex()
    )
}
