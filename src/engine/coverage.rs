//! Exact-area scan conversion of polygons into an `n x n` pixel grid, in integers.
//!
//! A polygon's coverage of a point is its winding number: the number of edges crossing the
//! horizontal line through the point to its left, each counted +1 going down and -1 going up
//! (for a counter-clockwise polygon). The coverage of a pixel is that function integrated over
//! the pixel, and each edge contributes independently. Within one pixel row, an edge piece
//! descending by `dy` adds `dy` to every pixel wholly to its right and, to a pixel it passes
//! through, `dy (1 - f)` where `f` is the piece's mean x within that pixel (the trapezoid to
//! the right of the piece). Storing, per row, the difference between neighbouring pixels turns
//! this into two additions per pixel the edge passes ("area" and "carry"); a running sum along
//! each row at the end restores the coverage. The result is the exact overlap area of the
//! polygon with every pixel (the technique of exact-coverage font rasterisers), at a cost per
//! edge crossing rather than per pixel covered.
//!
//! # Integers and determinism
//! Amounts are fixed-point integers computed from one polygon alone, so sums of any number of
//! polygons, in any order, are exact and identical. Per row, each edge's amounts add up to
//! `Q(y_a) - Q(y_b)`, where `Q(y) = trunc(scale (clamp(y) - j))` is the same function of a
//! vertex for both edges meeting there; round the polygon they telescope to exactly zero, so a
//! polygon adds nothing to the pixels right of it, and its total is its exact area to within a
//! few units per row it spans.
//!
//! # Window edges
//! Rows outside the grid are skipped. Columns left of the grid act as one column `-1` whose
//! amounts all carry into pixel 0; columns right of it are dropped. Both are exact for the
//! pixels of the grid.

/// A point in pixel coordinates (x, y), continuous, from the grid's lower-left corner.
pub(crate) type Point = (f64, f64);

/// Largest amount per unit area: row amounts stay exact integers in f64, and far from `i64`
/// overflow.
const MAX_SCALE: f64 = (1u64 << 52) as f64;

/// One worker's accumulation buffer: per row, `n + 1` differences between neighbouring pixels.
pub(crate) struct Coverage {
    n: usize,
    delta: Vec<i64>,
    /// Polygons (and points) that added something inside the grid.
    pub deposits: u64,
}

/// Column of `x`, clamped to `-1..=n` (`-1` and `n` stand for everything beyond the grid).
#[inline(always)]
fn column(x: f64, nf: f64) -> i64 {
    // Truncation of a non-negative value is its floor.
    (x.clamp(-1.0, nf) + 1.0) as i64 - 1
}

impl Coverage {
    /// An empty buffer for an `n x n` grid.
    pub fn new(n: usize) -> Self {
        Coverage {
            n,
            delta: vec![0; n * (n + 1)],
            deposits: 0,
        }
    }

    /// Adds `units` to the pixel holding `p`, if inside the grid.
    #[inline]
    pub fn point(&mut self, p: Point, units: i64) {
        let nf = self.n as f64;
        if p.0 >= 0.0 && p.0 < nf && p.1 >= 0.0 && p.1 < nf {
            self.add_pixel(p.0 as usize, p.1 as usize, units);
        }
    }

    #[inline(always)]
    fn add_pixel(&mut self, c: usize, r: usize, units: i64) {
        let k = r * (self.n + 1) + c;
        self.delta[k] += units;
        self.delta[k + 1] -= units;
        self.deposits += 1;
    }

    /// Shares `units` among the pixels the quadrilateral `quad` overlaps, in proportion to the
    /// exact overlap areas; parts outside the grid are lost. Either orientation; the
    /// quadrilateral must not cross itself. A degenerate one (no area, or less than
    /// `2 units / 2^52`) adds `units` at its first corner.
    pub fn quad(&mut self, quad: &[Point; 4], units: i64) {
        let nf = self.n as f64;
        let (mut xmin, mut xmax, mut ymin, mut ymax) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
        for p in quad {
            xmin = xmin.min(p.0);
            xmax = xmax.max(p.0);
            ymin = ymin.min(p.1);
            ymax = ymax.max(p.1);
        }
        if xmax < 0.0 || ymax < 0.0 || xmin >= nf || ymin >= nf {
            return;
        }
        let (c0, r0) = (column(xmin, nf), column(ymin, nf));
        if c0 >= 0 && r0 >= 0 && c0 == column(xmax, nf) && r0 == column(ymax, nf) {
            // Entirely within one pixel of the grid.
            return self.add_pixel(c0 as usize, r0 as usize, units);
        }
        // Amount per unit of covered area (signed: negative for clockwise polygons, whose
        // winding numbers are -1 inside).
        let scale = 2.0 * units as f64 / twice_area(quad);
        if scale.is_nan() || scale.abs() > MAX_SCALE {
            // No area, or so little that amounts would leave exact f64 integers.
            return self.point(quad[0], units);
        }
        for k in 0..4 {
            self.edge(quad[k], quad[(k + 1) % 4], scale);
        }
        self.deposits += 1;
    }

    /// Adds the amounts of the directed edge `a -> b`.
    #[inline(always)]
    fn edge(&mut self, a: Point, b: Point, scale: f64) {
        if a.1 == b.1 {
            return;
        }
        let nf = self.n as f64;
        let (lo, hi) = (a.1.min(b.1), a.1.max(b.1));
        if hi <= 0.0 || lo >= nf {
            return;
        }
        let dxdy = (b.0 - a.0) / (b.1 - a.1);
        let dydx = (b.1 - a.1) / (b.0 - a.0);
        let x_at = |y: f64| {
            if y == a.1 {
                a.0
            } else if y == b.1 {
                b.0
            } else {
                a.0 + (y - a.1) * dxdy
            }
        };
        let n = self.n;
        let (j0, j1) = (column(lo, nf).max(0), column(hi, nf).min(n as i64 - 1));
        for j in j0..=j1 {
            let jf = j as f64;
            // The piece of the edge in row j, in the edge's direction.
            let ya = a.1.clamp(jf, jf + 1.0);
            let yb = b.1.clamp(jf, jf + 1.0);
            if ya == yb {
                continue;
            }
            let q = |y: f64| (scale * (y - jf)) as i64;
            let row = &mut self.delta[j as usize * (n + 1)..][..n + 1];
            let (pa, pb) = ((x_at(ya), ya, q(ya)), (x_at(yb), yb, q(yb)));
            row_piece(row, pa, pb, &q, dydx);
        }
    }
}

/// Adds one edge piece within a row (`n + 1` differences), from `(x, y, Q(y))` at `a` to `b`,
/// walking across the columns it passes; `dydx` is the edge's slope.
#[inline(always)]
fn row_piece(
    row: &mut [i64],
    a: (f64, f64, i64),
    b: (f64, f64, i64),
    q: &impl Fn(f64) -> i64,
    dydx: f64,
) {
    let nf = (row.len() - 1) as f64;
    let (ca, cb) = (column(a.0, nf), column(b.0, nf));
    if ca == cb {
        return deposit(row, ca, a.2 - b.2, 0.5 * (a.0 + b.0));
    }
    let step = if cb > ca { 1 } else { -1 };
    let (y_lo, y_hi) = (a.1.min(b.1), a.1.max(b.1));
    let (mut x, mut qy) = (a.0, a.2);
    let mut c = ca;
    while c != cb {
        // Leave column c through its boundary towards b.
        let boundary = if step > 0 { c + 1 } else { c } as f64;
        let y = (a.1 + (boundary - a.0) * dydx).clamp(y_lo, y_hi);
        let qn = q(y);
        deposit(row, c, qy - qn, 0.5 * (x + boundary));
        (x, qy) = (boundary, qn);
        c += step;
    }
    deposit(row, cb, qy - b.2, 0.5 * (x + b.0));
}

/// Adds `amount` for a piece in column `c` of a row whose mean x is `mid`: the part right of
/// the piece to pixel `c`, the rest carried to `c + 1` and beyond (column -1 carries it all;
/// columns past the last pixel add nothing).
#[inline(always)]
fn deposit(row: &mut [i64], c: i64, amount: i64, mid: f64) {
    if c < 0 {
        row[0] += amount;
    } else if (c as usize) + 1 < row.len() {
        let f = (mid - c as f64).clamp(0.0, 1.0);
        let carry = (amount as f64 * f) as i64;
        row[c as usize] += amount - carry;
        row[c as usize + 1] += carry;
    }
}

/// Twice the signed area of a polygon (shoelace; positive counter-clockwise).
fn twice_area(poly: &[Point]) -> f64 {
    let mut a = 0.0;
    for k in 0..poly.len() {
        let (x1, y1) = poly[k];
        let (x2, y2) = poly[(k + 1) % poly.len()];
        a += x1 * y2 - x2 * y1;
    }
    a
}

/// Sums the workers' buffers (integers: the order does not matter), runs along each row and
/// scales the totals into an `n x n` map (rows in parallel); with `fold`, row `r` also receives
/// row `n - 1 - r` (mirror images). Returns the data and the summed deposits. Totals a rounding
/// unit or two below zero are written as zero.
pub(crate) fn merge(
    buffers: Vec<Coverage>,
    n: usize,
    scale: f64,
    fold: bool,
) -> crate::error::Result<(ndarray::Array2<f32>, u64)> {
    use rayon::prelude::*;
    let deposits = buffers.iter().map(|b| b.deposits).sum();
    let mut values = vec![0f32; n * n];
    let column_delta =
        |r: usize, c: usize| -> i64 { buffers.iter().map(|b| b.delta[r * (n + 1) + c]).sum() };
    values.par_chunks_mut(n).enumerate().for_each(|(r, out)| {
        let (mut run, mut mirror) = (0i64, 0i64);
        for (c, v) in out.iter_mut().enumerate() {
            run += column_delta(r, c);
            if fold {
                mirror += column_delta(n - 1 - r, c);
            }
            *v = ((run + mirror).max(0) as f64 * scale) as f32;
        }
    });
    drop(buffers);
    let data = ndarray::Array2::from_shape_vec((n, n), values)
        .map_err(|e| crate::error::Error::Numerical(format!("map shape: {e}")))?;
    Ok((data, deposits))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Pixel totals of a buffer, row by row.
    fn totals(cov: &Coverage) -> Vec<i64> {
        let n = cov.n;
        let mut out = Vec::new();
        for r in 0..n {
            let mut run = 0;
            for c in 0..n {
                run += cov.delta[r * (n + 1) + c];
                out.push(run);
            }
        }
        out
    }

    #[test]
    fn a_square_on_a_pixel_corner_covers_four_quarters() {
        // Pure geometry: a square of side 2 centred on a pixel corner covers four pixels by 1.
        let mut cov = Coverage::new(2);
        cov.quad(&[(0.0, 0.0), (2.0, 0.0), (2.0, 2.0), (0.0, 2.0)], 4000);
        assert_eq!(totals(&cov), vec![1000, 1000, 1000, 1000]);
    }

    #[test]
    fn a_diamond_covers_its_centre_pixel_and_four_triangles() {
        // Pure geometry: |x - 1.5| + |y - 1.5| <= 1 has area 2; it holds the centre pixel
        // (area 1) and a right triangle of area 1/4 in each edge neighbour, none of the
        // corner pixels. Both orientations give the same shares.
        let ccw = [(1.5, 0.5), (2.5, 1.5), (1.5, 2.5), (0.5, 1.5)];
        let cw = [ccw[3], ccw[2], ccw[1], ccw[0]];
        for quad in [ccw, cw] {
            let mut cov = Coverage::new(3);
            cov.quad(&quad, 8_000_000);
            let t = totals(&cov);
            let expected = [0, 1, 0, 1, 4, 1, 0, 1, 0].map(|k| k * 1_000_000);
            for (got, want) in t.iter().zip(expected) {
                assert!((got - want).abs() <= 4, "{t:?}");
            }
        }
    }

    #[test]
    fn parts_outside_the_grid_are_lost_exactly() {
        // A unit square centred on the grid's lower-left corner: a quarter of it is inside.
        let mut cov = Coverage::new(1);
        cov.quad(&[(-0.5, -0.5), (0.5, -0.5), (0.5, 0.5), (-0.5, 0.5)], 4000);
        assert_eq!(totals(&cov), vec![1000]);
        // A square of area 4 reaching past the right and top edges of a 2 x 2 grid: only
        // [1, 2] x [1, 2], a quarter, is inside.
        let mut cov = Coverage::new(2);
        cov.quad(&[(1.0, 1.0), (3.0, 1.0), (3.0, 3.0), (1.0, 3.0)], 4000);
        assert_eq!(totals(&cov), vec![0, 0, 0, 1000]);
    }

    /// Area of the convex polygon `poly` within the pixel `[c, c + 1] x [r, r + 1]`, by
    /// clipping it to the pixel's four half planes (Sutherland and Hodgman 1974, Comm. ACM 17,
    /// 32) and the shoelace formula: an independent route to the same areas.
    fn clipped_area(poly: &[Point], c: f64, r: f64) -> f64 {
        let mut cur = poly.to_vec();
        // (x or y, bound, +1 to keep above or -1 to keep below)
        let planes = [
            (true, c, 1.0),
            (true, c + 1.0, -1.0),
            (false, r, 1.0),
            (false, r + 1.0, -1.0),
        ];
        for (on_x, bound, side) in planes {
            let coord = |p: &Point| if on_x { p.0 } else { p.1 };
            let inside = |p: &Point| (coord(p) - bound) * side >= 0.0;
            let mut next = Vec::new();
            for k in 0..cur.len() {
                let (a, b) = (cur[k], cur[(k + 1) % cur.len()]);
                if inside(&a) {
                    next.push(a);
                }
                if inside(&a) != inside(&b) {
                    let t = (bound - coord(&a)) / (coord(&b) - coord(&a));
                    next.push((a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)));
                }
            }
            cur = next;
        }
        if cur.len() < 3 {
            0.0
        } else {
            0.5 * twice_area(&cur).abs()
        }
    }

    #[test]
    fn shares_match_polygon_clipping_for_random_quadrilaterals() {
        // Random convex quadrilaterals (corners at random angles on an ellipse, some reaching
        // past the grid) on a 6 x 6 grid: every pixel's share against the clipped area.
        let mut seed = 0x2545_f491_4f6c_dd1du64;
        let mut uniform = || {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let units = 1i64 << 40;
        for _ in 0..200 {
            let (cx, cy) = (7.0 * uniform() - 0.5, 7.0 * uniform() - 0.5);
            let (ax, ay, tilt) = (3.0 * uniform() + 0.01, 3.0 * uniform() + 0.01, uniform());
            let mut angles: Vec<f64> = (0..4).map(|_| std::f64::consts::TAU * uniform()).collect();
            angles.sort_by(f64::total_cmp);
            let quad: [Point; 4] = std::array::from_fn(|k| {
                let (x, y) = (ax * angles[k].cos(), ay * angles[k].sin());
                let (s, c) = (3.0 * tilt).sin_cos();
                (cx + c * x - s * y, cy + s * x + c * y)
            });
            let area = 0.5 * twice_area(&quad).abs();
            let mut cov = Coverage::new(6);
            cov.quad(&quad, units);
            for (k, &got) in totals(&cov).iter().enumerate() {
                let exact = clipped_area(&quad, (k % 6) as f64, (k / 6) as f64) / area;
                let got = got as f64 / units as f64;
                assert!(
                    (got - exact).abs() < 1e-9,
                    "{quad:?} pixel {k}: {got} vs {exact}"
                );
            }
        }
    }

    #[test]
    fn a_quadrilateral_without_area_counts_as_a_point() {
        // Four collinear corners across three pixels: all units at the first corner's pixel.
        let mut cov = Coverage::new(3);
        cov.quad(&[(0.5, 0.5), (1.5, 1.5), (2.5, 2.5), (1.5, 1.5)], 1000);
        assert_eq!(totals(&cov), vec![1000, 0, 0, 0, 0, 0, 0, 0, 0]);
        assert_eq!(cov.deposits, 1);
    }

    #[test]
    fn a_sliver_conserves_its_total_and_leaves_no_trace_to_its_right() {
        // Total area is conserved within the grid to a few units per row; pixels right of the
        // polygon in its rows get exactly nothing.
        let mut cov = Coverage::new(6);
        let q = [(0.2, 0.3), (2.7, 0.9), (2.1, 2.8), (0.4, 1.9)];
        cov.quad(&q, 1 << 30);
        let t = totals(&cov);
        let sum: i64 = t.iter().sum();
        assert!((sum - (1i64 << 30)).abs() <= 24, "{sum}");
        for r in 0..3 {
            assert!(t[r * 6 + 3..r * 6 + 6].iter().all(|&v| v == 0), "{t:?}");
        }
        assert!(t.iter().all(|&v| v >= -4));
    }
}
