//! Data-space geometry: axis ranges, sampling the relation, clipping to the frame, tick precision.
//!
//! plotters does not clip what it draws to the plotting area, so the line and the bands are
//! clipped here, in data units, before they are handed to it.

use plotters::coord::ranged1d::Ranged as _;
use plotters::coord::types::RangedCoordf64;

use super::LineSpec;

/// A point in data units (x, y).
pub(super) type Xy = (f64, f64);

/// The visible data rectangle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Bounds {
    pub(super) x_min: f64,
    pub(super) x_max: f64,
    pub(super) y_min: f64,
    pub(super) y_max: f64,
}

/// Smallest axis span shown, in axis units (dex on log axes): ticks then stay at least 0.02 apart,
/// which two decimals can label.
pub(super) const MIN_SPAN: f64 = 0.2;
/// Half-width of the range around a single value (a lone point, or a zero range), in axis units.
pub(super) const DEGENERATE_HALF_WIDTH: f64 = 0.5;
/// Space left on each side of the data, as a fraction of the data span.
pub(super) const PAD_FRACTION: f64 = 0.06;
/// Samples of the relation across the x range (a curved relation needs more than two).
pub(super) const CURVE_SAMPLES: usize = 120;

/// Running minimum and maximum of the values an axis must show.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Extent {
    range: Option<(f64, f64)>,
}

impl Extent {
    pub(super) fn add(&mut self, v: f64) {
        self.range = Some(match self.range {
            None => (v, v),
            Some((lo, hi)) => (lo.min(v), hi.max(v)),
        });
    }

    pub(super) fn range(self) -> Option<(f64, f64)> {
        self.range
    }
}

/// The axis range for data spanning `lo..=hi`: padded by [`PAD_FRACTION`] on each side, a zero
/// span widened to ±[`DEGENERATE_HALF_WIDTH`], and never narrower than [`MIN_SPAN`].
pub(super) fn padded(lo: f64, hi: f64) -> (f64, f64) {
    let span = hi - lo;
    let (lo, hi) = if span <= 1e-9 * lo.abs().max(1.0) {
        (lo - DEGENERATE_HALF_WIDTH, hi + DEGENERATE_HALF_WIDTH)
    } else {
        (lo - PAD_FRACTION * span, hi + PAD_FRACTION * span)
    };
    if hi - lo < MIN_SPAN {
        let mid = 0.5 * (lo + hi);
        (mid - 0.5 * MIN_SPAN, mid + 0.5 * MIN_SPAN)
    } else {
        (lo, hi)
    }
}

/// The relation sampled at [`CURVE_SAMPLES`] evenly spaced x across `x_min..=x_max`, plus the
/// pivot itself when it lies inside, so the drawn line passes exactly through (x₀, α).
pub(super) fn sample_line(line: &LineSpec, x_min: f64, x_max: f64) -> Vec<Xy> {
    let steps = CURVE_SAMPLES - 1;
    let mut xs: Vec<f64> = (0..=steps)
        .map(|i| {
            // Exact end points (no accumulated rounding at x_max).
            let t = i as f64 / steps as f64;
            x_min + t * (x_max - x_min)
        })
        .collect();
    if line.pivot > x_min && line.pivot < x_max {
        let at = xs.partition_point(|&x| x < line.pivot);
        xs.insert(at, line.pivot);
    }
    xs.into_iter().map(|x| (x, line.y_at(x))).collect()
}

/// The closed outline of a band between two edges sampled at the same increasing x: the upper
/// edge left to right, then the lower edge right to left.
pub(super) fn band_outline(upper: &[Xy], lower: &[Xy]) -> Vec<Xy> {
    upper.iter().chain(lower.iter().rev()).copied().collect()
}

/// One side of the frame, as the line it lies on.
#[derive(Clone, Copy)]
enum Edge {
    Left(f64),
    Right(f64),
    Bottom(f64),
    Top(f64),
}

impl Edge {
    fn inside(self, p: Xy) -> bool {
        match self {
            Self::Left(x) => p.0 >= x,
            Self::Right(x) => p.0 <= x,
            Self::Bottom(y) => p.1 >= y,
            Self::Top(y) => p.1 <= y,
        }
    }

    /// Where segment p→q meets the edge's line (the caller knows it crosses).
    fn cross(self, p: Xy, q: Xy) -> Xy {
        match self {
            Self::Left(x) | Self::Right(x) => {
                let t = (x - p.0) / (q.0 - p.0);
                (x, p.1 + t * (q.1 - p.1))
            }
            Self::Bottom(y) | Self::Top(y) => {
                let t = (y - p.1) / (q.1 - p.1);
                (p.0 + t * (q.0 - p.0), y)
            }
        }
    }
}

/// Clips a polygon to `b` (Sutherland–Hodgman: Sutherland & Hodgman 1974, Commun. ACM 17, 32,
/// from memory). A non-convex polygon clipped to a rectangle may keep zero-width slivers along
/// the frame; filled, they draw nothing. Returns an empty outline when nothing is inside.
pub(super) fn clip_polygon(polygon: &[Xy], b: Bounds) -> Vec<Xy> {
    let mut out: Vec<Xy> = polygon.to_vec();
    for edge in [
        Edge::Left(b.x_min),
        Edge::Right(b.x_max),
        Edge::Bottom(b.y_min),
        Edge::Top(b.y_max),
    ] {
        let Some(&last) = out.last() else {
            break;
        };
        let input = std::mem::take(&mut out);
        let mut prev = last;
        for &cur in &input {
            match (edge.inside(prev), edge.inside(cur)) {
                (true, true) => out.push(cur),
                (true, false) => out.push(edge.cross(prev, cur)),
                (false, true) => {
                    out.push(edge.cross(prev, cur));
                    out.push(cur);
                }
                (false, false) => {}
            }
            prev = cur;
        }
    }
    if out.len() < 3 { Vec::new() } else { out }
}

/// Clips one segment to `b` (Liang–Barsky: Liang & Barsky 1984, ACM TOG 3, 1, from memory).
/// Returns the parameters t₀ ≤ t₁ in 0..=1 of the visible part, or `None`.
fn clip_segment(p: Xy, q: Xy, b: Bounds) -> Option<(f64, f64)> {
    let dx = q.0 - p.0;
    let dy = q.1 - p.1;
    let mut t0: f64 = 0.0;
    let mut t1: f64 = 1.0;
    for (pk, qk) in [
        (-dx, p.0 - b.x_min),
        (dx, b.x_max - p.0),
        (-dy, p.1 - b.y_min),
        (dy, b.y_max - p.1),
    ] {
        if pk.abs() < f64::MIN_POSITIVE {
            // Parallel to this edge: visible only if on the inner side.
            if qk < 0.0 {
                return None;
            }
        } else {
            let r = qk / pk;
            if pk < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    (t0 <= t1).then_some((t0, t1))
}

/// Clips a polyline to `b`, returning the visible runs (a curve may leave and re-enter).
pub(super) fn clip_polyline(points: &[Xy], b: Bounds) -> Vec<Vec<Xy>> {
    let mut runs: Vec<Vec<Xy>> = Vec::new();
    let mut open = false;
    for pair in points.windows(2) {
        let (p, q) = (pair[0], pair[1]);
        let Some((t0, t1)) = clip_segment(p, q, b) else {
            open = false;
            continue;
        };
        let lerp = |t: f64| (p.0 + t * (q.0 - p.0), p.1 + t * (q.1 - p.1));
        // A segment that starts unclipped continues the run the previous segment ended.
        if !(open && t0 <= 0.0) {
            runs.push(vec![lerp(t0)]);
        }
        if let Some(run) = runs.last_mut() {
            run.push(lerp(t1));
        }
        open = t1 >= 1.0;
    }
    runs
}

/// Decimals for tick labels on an axis over `lo..hi` with at most `max_ticks` ticks: one when
/// plotters spaces its ticks 0.1 or more apart, else two (ticks come as 1, 2 or 5 × 10ᵏ).
pub(super) fn tick_decimals(lo: f64, hi: f64, max_ticks: usize) -> usize {
    let axis = RangedCoordf64::from(lo..hi);
    let ticks = axis.key_points(max_ticks);
    match ticks.as_slice() {
        [a, b, ..] if (b - a).abs() < 0.0999 => 2,
        _ => 1,
    }
}

/// The band of the mean relation, sorted by x, carried on to `x_min` and `x_max` when its samples
/// stop short of them, so the band ends at the frame with the line instead of in vertical cuts at
/// the data's extremes.
///
/// For a straight-line fit the band's half-width is √(σ²_α + 2 cov(α, β) Δx + σ²_β Δx²), so its
/// square is a quadratic in x (the variance of a linear combination of the parameters; any
/// regression text, e.g. Press et al., Numerical Recipes, §15.2, from memory). The square of the
/// half-width is therefore interpolated through the first, middle and last samples and evaluated
/// at the frame's edges (never narrower than the narrowest sample). The centre follows `line`
/// when there is one, otherwise the straight continuation of the two end samples. With fewer than
/// three samples the band is returned as it is.
pub(super) fn extend_band(
    band: &[super::BandPoint],
    line: Option<&LineSpec>,
    x_min: f64,
    x_max: f64,
) -> Vec<super::BandPoint> {
    let mut out: Vec<super::BandPoint> = band.to_vec();
    out.sort_by(|a, b| a.x.total_cmp(&b.x));
    let n = out.len();
    if n < 3 {
        return out;
    }
    let half = |s: &super::BandPoint| 0.5 * (s.upper - s.lower);
    let centre = |s: &super::BandPoint| 0.5 * (s.upper + s.lower);
    let (a, m, z) = (out[0], out[n / 2], out[n - 1]);
    let (x0, x1, x2) = (a.x, m.x, z.x);
    if !(x0 < x1 && x1 < x2) {
        return out;
    }
    let (w0, w1, w2) = (half(&a).powi(2), half(&m).powi(2), half(&z).powi(2));
    let floor = out.iter().map(half).fold(f64::INFINITY, f64::min).max(0.0);
    // Lagrange interpolation of w² through the three samples.
    let width_at = |x: f64| {
        let sq = w0 * (x - x1) * (x - x2) / ((x0 - x1) * (x0 - x2))
            + w1 * (x - x0) * (x - x2) / ((x1 - x0) * (x1 - x2))
            + w2 * (x - x0) * (x - x1) / ((x2 - x0) * (x2 - x1));
        sq.max(0.0).sqrt().max(floor)
    };
    let centre_at = |x: f64, near: &super::BandPoint, next: &super::BandPoint| match line {
        Some(l) => l.y_at(x),
        None => {
            let slope = (centre(next) - centre(near)) / (next.x - near.x);
            centre(near) + slope * (x - near.x)
        }
    };
    let sample = |x: f64, near: &super::BandPoint, next: &super::BandPoint| {
        let (c, w) = (centre_at(x, near, next), width_at(x));
        super::BandPoint {
            x,
            lower: c - w,
            upper: c + w,
        }
    };
    if x_min < x0 {
        let s = sample(x_min, &out[0], &out[1]);
        out.insert(0, s);
    }
    if x_max > x2 {
        let last = out.len() - 1;
        let s = sample(x_max, &out[last], &out[last - 1]);
        out.push(s);
    }
    out
}
