//! Inverse polygon mapping (`polygon`; Mediavilla et al. 2006, ApJ 653, 942; 2011, ApJ 741, 42).
//!
//! The image plane is cut into the square cells of [`super::lattice`] (side
//! `h = pixel / sqrt(C)` for `C` cells per unlensed pixel area). Each cell's four corners are
//! mapped to the source plane; the cell's area `h^2` is shared among the pixels its image
//! quadrilateral covers, in proportion to the exact overlap area (scan-converted edge by edge in
//! [`super::coverage`]). A pixel's value is the area it received divided by its own area: the mean
//! magnification over the pixel, without the counting noise of rays.
//!
//! The quadrilateral stands for the cell's true image up to the curvature of its edges. A cell is
//! split into four (recursively, up to [`MAX_DEPTH`] times) when
//! - its image is folded or not convex (the corner cross products differ in sign: a critical
//!   curve crosses the cell), or a corner is not finite (a lens sits on it), or
//! - the image of its centre lies more than [`CENTRE_TOLERANCE`] pixels from the mean of the
//!   corner images (a second-order test on the mapping's curvature).
//!
//! A cell still failing at the deepest level deposits its whole area at the pixel of its centre's
//! image, as one ray would.
//!
//! With a lens symmetric about the x axis only the upper half plane is mapped
//! ([`super::lattice`]); each cell's mirror image is deposited too, or, when the window is
//! centred on the axis as well, added at the end by summing every pixel row with its mirror row
//! (the mirror image covers row `n - 1 - r` exactly as the cell covers row `r`), which halves
//! the scan conversion and makes the map exactly symmetric.
//!
//! Areas are accumulated in fixed point (2^32 units per cell) in per-worker `i64` buffers of
//! row differences, so sums are exact integers and the map is bit-identical for any thread
//! count. Counts: `rays_shot` is the lattice cells mapped, `rays_landed` the cells and split
//! cells that added area inside the window. Peak memory: `8 n (n + 1)` bytes per thread plus
//! `4 n^2` for the output, plus 48 bytes per surviving leaf (the list and the lists it is gathered from).

use super::coverage::{merge, Coverage, Point};
use super::lattice::{for_each_leaf, leaf_cells, Block, Lattice, LEAF};
use super::{Engine, Progress, Traced};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::Window;

/// Deepest recursive split of a cell (cells down to `h / 2^MAX_DEPTH`).
pub const MAX_DEPTH: u32 = 6;
/// Largest distance, in pixels, between the image of a cell's centre and the mean of its corner
/// images before the cell is split.
pub const CENTRE_TOLERANCE: f64 = 0.005;
/// Fixed-point units of one whole cell's area.
const FULL: i64 = 1 << 32;

/// The polygon-mapping engine.
///
/// ```
/// use causeway::engine::{Engine, PolygonMapping};
/// use causeway::{lens::LensSystem, map::Window};
/// let window = Window::new((0.0, 0.0), 4.0, 16).unwrap();
/// let map = PolygonMapping::new(4.0).build(&LensSystem::single(), &window).unwrap();
/// // Mean of Paczynski's A over the square of half-side 2: 1.33482 (tests/reference).
/// assert!((map.mean() - 1.33482).abs() < 1e-3);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PolygonMapping {
    cells_per_pixel: f64,
}

impl PolygonMapping {
    /// An engine with `cells_per_pixel` image-plane cells per unlensed pixel area.
    ///
    /// # Panics
    /// If the density is not finite and positive; use [`PolygonMapping::try_new`] for user
    /// input.
    pub fn new(cells_per_pixel: f64) -> Self {
        Self::try_new(cells_per_pixel).expect("invalid cell density")
    }

    /// Checked constructor.
    pub fn try_new(cells_per_pixel: f64) -> Result<Self> {
        if !cells_per_pixel.is_finite() || cells_per_pixel <= 0.0 || cells_per_pixel > 1e6 {
            return Err(Error::input(format!(
                "--rays: cells per pixel for the polygon engine must be > 0 and at most 1e6, got \
                 {cells_per_pixel}"
            )));
        }
        Ok(PolygonMapping { cells_per_pixel })
    }

    /// Cell side in the image plane for a window.
    pub fn spacing(&self, window: &Window) -> f64 {
        window.pixel_size() / self.cells_per_pixel.sqrt()
    }
}

/// Is the quadrilateral convex with one orientation, and are its corners finite?
fn well_formed(q: &[Point; 4]) -> bool {
    let mut sign = 0.0f64;
    for k in 0..4 {
        let (a, b, c) = (q[k], q[(k + 1) % 4], q[(k + 2) % 4]);
        if !(a.0.is_finite() && a.1.is_finite()) {
            return false;
        }
        let cross = (b.0 - a.0) * (c.1 - b.1) - (b.1 - a.1) * (c.0 - b.0);
        if cross * sign < 0.0 {
            return false;
        }
        if cross != 0.0 {
            sign = cross;
        }
    }
    true
}

/// An image-plane cell: lower-left corner, side, and how many splits made it.
#[derive(Debug, Clone, Copy)]
struct Square {
    x: f64,
    y: f64,
    size: f64,
    depth: u32,
}

struct Mapper<'a> {
    lattice: &'a Lattice,
    /// Mirror images are added by folding the rows at the merge, not mapped (see
    /// [`folds`]).
    fold: bool,
}

/// True when the lens is symmetric about the x axis and so is the window: pixel row `r` is then
/// the mirror image of row `n - 1 - r`, and the mirror image of a cell covers row `n - 1 - r`
/// exactly as the cell covers row `r`. Rasterising each cell once and adding every row to its
/// mirror row at the end gives the mirror contributions without mapping them.
fn folds(lattice: &Lattice, window: &Window) -> bool {
    lattice.mirror && window.center.1 == 0.0
}

impl Mapper<'_> {
    /// Image-plane point to source-plane pixel coordinates.
    fn map(&self, x: f64, y: f64) -> Point {
        let (mut sx, mut sy) = (x, y);
        for (lx, ly, m) in self.lattice.lenses() {
            let (dx, dy) = (x - lx, y - ly);
            let inv = m / (dx * dx + dy * dy);
            sx -= dx * inv;
            sy -= dy * inv;
        }
        self.lattice.to_pixels(sx, sy)
    }

    fn mirror(&self, q: &[Point; 4]) -> [Point; 4] {
        let flip = |p: Point| {
            let sy = p.1 / self.lattice.inv_pixel + self.lattice.y0;
            (p.0, (-sy - self.lattice.y0) * self.lattice.inv_pixel)
        };
        [flip(q[0]), flip(q[1]), flip(q[2]), flip(q[3])]
    }

    /// True when the cell's image lies far outside the window (and so does its mirror image):
    /// beyond the corners' bounding box grown by its own size and four times the centre
    /// deviation on every side.
    fn out_of_reach(&self, q: &[Point; 4], dev: f64) -> bool {
        let nf = self.lattice.n as f64;
        let outside = |ys: [f64; 4]| {
            let (mut xmin, mut xmax, mut ymin, mut ymax) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
            for (p, &y) in q.iter().zip(&ys) {
                xmin = xmin.min(p.0);
                xmax = xmax.max(p.0);
                ymin = ymin.min(y);
                ymax = ymax.max(y);
            }
            let grow = (xmax - xmin).max(ymax - ymin) + 4.0 * dev;
            // NaN comparisons are false: a non-finite corner is never out of reach.
            xmax + grow < 0.0 || ymax + grow < 0.0 || xmin - grow > nf || ymin - grow > nf
        };
        let direct = outside([q[0].1, q[1].1, q[2].1, q[3].1]);
        if !self.lattice.mirror || !direct {
            return direct;
        }
        let m = self.mirror(q);
        outside([m[0].1, m[1].1, m[2].1, m[3].1])
    }

    /// Deposits one cell: lower-left image-plane corner (x, y), side `size`, corner images
    /// `q` (counter-clockwise from lower left), centre image `centre`.
    fn cell(&self, square: Square, q: [Point; 4], centre: Point, acc: &mut Coverage) {
        let Square { x, y, size, depth } = square;
        let units = FULL >> (2 * depth);
        let mean = (
            0.25 * (q[0].0 + q[1].0 + q[2].0 + q[3].0),
            0.25 * (q[0].1 + q[1].1 + q[2].1 + q[3].1),
        );
        let (ex, ey) = (centre.0 - mean.0, centre.1 - mean.1);
        let dev = (ex * ex + ey * ey).sqrt();
        if self.out_of_reach(&q, dev) {
            return;
        }
        let good = well_formed(&q) && dev <= CENTRE_TOLERANCE;
        if good || depth == MAX_DEPTH {
            if good {
                acc.quad(&q, units);
            } else {
                acc.point(centre, units);
            }
            if self.lattice.mirror && !self.fold {
                if good {
                    acc.quad(&self.mirror(&q), units);
                } else {
                    let m = self.mirror(&[centre, centre, centre, centre]);
                    acc.point(m[0], units);
                }
            }
            return;
        }
        // Split into four: edge midpoints and quarter centres.
        let hs = 0.5 * size;
        let bottom = self.map(x + hs, y);
        let right = self.map(x + size, y + hs);
        let top = self.map(x + hs, y + size);
        let left = self.map(x, y + hs);
        let quarter = 0.5 * hs;
        let subs = [
            (x, y, [q[0], bottom, centre, left]),
            (x + hs, y, [bottom, q[1], right, centre]),
            (x + hs, y + hs, [centre, right, q[2], top]),
            (x, y + hs, [left, centre, top, q[3]]),
        ];
        for (sx, sy, sq) in subs {
            let c = self.map(sx + quarter, sy + quarter);
            let sub = Square {
                x: sx,
                y: sy,
                size: hs,
                depth: depth + 1,
            };
            self.cell(sub, sq, c, acc);
        }
    }

    /// Maps one leaf of cells row by row.
    fn leaf(&self, leaf: &Block, acc: &mut Coverage) {
        const L: usize = LEAF as usize;
        let lat = self.lattice;
        let h = lat.spacing;
        let mut corner_x = [0.0f64; L + 1];
        for (k, x) in corner_x.iter_mut().enumerate() {
            *x = (leaf.i0 as f64 + k as f64) * h;
        }
        let mut centre_x = [0.0f64; L];
        for (k, x) in centre_x.iter_mut().enumerate() {
            *x = (leaf.i0 as f64 + k as f64 + 0.5) * h;
        }
        let to_pixels = |sx: &[f64], sy: &[f64], out: &mut Vec<Point>| {
            out.clear();
            out.extend(sx.iter().zip(sy).map(|(&a, &b)| lat.to_pixels(a, b)));
        };
        let (mut sx, mut sy) = ([0.0f64; L + 1], [0.0f64; L + 1]);
        let (mut below, mut above, mut centres) = (Vec::new(), Vec::new(), Vec::new());
        lat.source_row(&corner_x, leaf.j0 as f64 * h, &mut sx, &mut sy);
        to_pixels(&sx, &sy, &mut below);
        for row in 0..leaf.side {
            let y = (leaf.j0 + row) as f64 * h;
            lat.source_row(&corner_x, y + h, &mut sx, &mut sy);
            to_pixels(&sx, &sy, &mut above);
            lat.source_row(&centre_x, y + 0.5 * h, &mut sx[..L], &mut sy[..L]);
            to_pixels(&sx[..L], &sy[..L], &mut centres);
            for c in 0..L {
                let q = [below[c], below[c + 1], above[c + 1], above[c]];
                let square = Square {
                    x: corner_x[c],
                    y,
                    size: h,
                    depth: 0,
                };
                self.cell(square, q, centres[c], acc);
            }
            std::mem::swap(&mut below, &mut above);
        }
    }
}

impl Engine for PolygonMapping {
    fn name(&self) -> &'static str {
        "polygon"
    }

    fn density(&self) -> f64 {
        self.cells_per_pixel
    }

    fn memory_bytes(&self, lens: &LensSystem, window: &Window) -> u64 {
        let npix = window.pixel_count() as u64;
        let threads = rayon::current_num_threads() as u64;
        let lattice = Lattice::new(lens, window, self.spacing(window));
        npix * (8 * threads + 4) + 8 * window.pixels as u64 * threads + lattice.leaf_bytes()
    }

    fn trace(&self, lens: &LensSystem, window: &Window, progress: &dyn Progress) -> Result<Traced> {
        self.trace_folding(lens, window, progress, true)
    }
}

impl PolygonMapping {
    /// [`Engine::trace`], folding mirror images into mirror rows where [`folds`] allows and
    /// `may_fold` is set, else mapping them.
    fn trace_folding(
        &self,
        lens: &LensSystem,
        window: &Window,
        progress: &dyn Progress,
        may_fold: bool,
    ) -> Result<Traced> {
        let lattice = Lattice::new(lens, window, self.spacing(window));
        let leaves = lattice.leaves();
        progress.start(leaves.len() as u64);
        let fold = may_fold && folds(&lattice, window);
        let mapper = Mapper {
            lattice: &lattice,
            fold,
        };
        let buffers = for_each_leaf(
            &leaves,
            || Coverage::new(window.pixels),
            |leaf, acc| mapper.leaf(leaf, acc),
            progress,
        )?;
        let scale = 1.0 / (FULL as f64 * self.cells_per_pixel);
        let (data, deposits) = merge(buffers, window.pixels, scale, fold)?;
        Ok(Traced {
            data,
            rays_shot: leaf_cells(&leaves),
            // A folded cell lands in the window exactly when its mirror image does.
            rays_landed: if fold { 2 * deposits } else { deposits },
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folding_rows_matches_mapping_the_mirror_images() {
        // Internal consistency: a binary on the x axis, window centred on the axis. Folding
        // rows gives the mirror images' areas by symmetry; mapping the mirror quadrilaterals
        // computes them directly. The two agree to the f32 rounding of the pixel values, and
        // only the folded map is exactly symmetric.
        let lens = LensSystem::binary(1.0, 0.1).unwrap();
        let window = Window::new((0.1, 0.0), 1.5, 64).unwrap();
        let engine = PolygonMapping::new(2.0);
        let folded = engine.trace_folding(&lens, &window, &(), true).unwrap();
        let mapped = engine.trace_folding(&lens, &window, &(), false).unwrap();
        assert_eq!(folded.rays_landed, mapped.rays_landed);
        for ((r, c), &v) in folded.data.indexed_iter() {
            let w = mapped.data[[r, c]];
            assert!((v / w - 1.0).abs() < 1e-6, "pixel ({r}, {c}): {v} vs {w}");
            assert_eq!(v, folded.data[[63 - r, c]]);
        }
    }
}
