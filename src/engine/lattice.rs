//! What the lattice engines share: the image-plane lattice over the shooting region, the
//! conservative skipping of blocks that cannot reach the window, the lens-equation kernel laid
//! out for SIMD, and the worker pool with order-independent integer accumulation.
//!
//! # Shooting region
//! Let `R_L = max_i |z_i|` and `Z = max |zeta|` over the window (its farthest corner from the
//! origin). For an image z of a source zeta with `|z| > R_L`, the lens equation gives
//! `|z - zeta| = |sum_i m_i / conj(z - z_i)| <= sum_i m_i / (|z| - R_L) = 1 / (|z| - R_L)`,
//! so with `x = |z| - R_L`: `x <= (Z - R_L) + 1/x`, i.e. `x^2 - (Z - R_L) x - 1 <= 0` and
//! ```text
//! |z| <= R_L + ((Z - R_L) + sqrt((Z - R_L)^2 + 4)) / 2.
//! ```
//! Every image of every source in the window lies in that disk; the lattice covers the square
//! that holds it.
//!
//! # Skipping blocks that cannot reach the window
//! The region is covered by square blocks of lattice cells `[i h, (i + side) h] x [j h, ...]`,
//! refined as a quadtree. For a block of half-side `b` about `z_b` (every point within
//! `d = b sqrt 2` of `z_b`), and each lens with `w_0 = z_b - z_i`, `|w_0| > d`:
//! `|1/conj(w) - 1/conj(w_0)| = |w - w_0| / (|w| |w_0|) <= d / ((|w_0| - d) |w_0|)`.
//! Summed with the masses this bounds the change `D` of the deflection over the block, so every
//! point of the block lands within the square of half-side `b + D` about `zeta(z_b)`. A block
//! whose square misses the window (and, for a lens symmetric about the x axis, whose mirror
//! square misses it too) is skipped; a block holding a lens cannot be bounded and is refined
//! down to the leaves, which are kept. The cost of a small window is therefore proportional to
//! its pre-image.
//!
//! # Mirror symmetry
//! When every lens lies on the x axis, `zeta(conj z) = conj(zeta(z))`: only the upper half plane
//! (`y > 0`) is covered and each contribution is also counted at its mirror image.
//!
//! # Determinism
//! Workers (one per thread) pull leaves from a shared counter and accumulate into private
//! integer histograms, summed at the end. Integer sums do not depend on order, so the pixel
//! data are bit-identical for any thread count.

use crate::lens::LensSystem;
use crate::map::Window;
use rayon::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Rays (or cells) per side of a leaf block.
pub(crate) const LEAF: i64 = 64;

/// Radius of the disk about the origin holding every image of every source in the window (see
/// the module documentation for the derivation).
///
/// ```
/// use causeway::{engine::shooting_radius, lens::LensSystem, map::Window};
/// // Single lens, window up to |zeta| = sqrt(2): images within (sqrt2 + sqrt(2 + 4)) / 2.
/// let w = Window::new((0.0, 0.0), 2.0, 10).unwrap();
/// let r = shooting_radius(&LensSystem::single(), &w);
/// assert!((r - (2f64.sqrt() + 6f64.sqrt()) / 2.0).abs() < 1e-12);
/// ```
pub fn shooting_radius(lens: &LensSystem, window: &Window) -> f64 {
    let (x0, y0) = window.origin();
    let (x1, y1) = (x0 + window.width, y0 + window.width);
    let z_max = x0.abs().max(x1.abs()).hypot(y0.abs().max(y1.abs()));
    let r_l = lens.radius();
    let a = z_max - r_l;
    r_l + 0.5 * (a + (a * a + 4.0).sqrt())
}

/// A square block of lattice cells: lower-left cell indices and side (in cells).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Block {
    pub i0: i64,
    pub j0: i64,
    pub side: i64,
}

/// The lattice of one build: lens data laid out for the kernel, spacing and window geometry.
pub(crate) struct Lattice {
    x: Vec<f64>,
    y: Vec<f64>,
    m: Vec<f64>,
    /// Cell side (ray spacing) in the image plane.
    pub spacing: f64,
    /// Window lower-left corner.
    pub x0: f64,
    pub y0: f64,
    /// Inverse pixel size.
    pub inv_pixel: f64,
    /// Pixels per side.
    pub n: usize,
    /// Whether the upper half plane stands for the whole (lenses on the x axis).
    pub mirror: bool,
    window: Window,
    radius: f64,
}

impl Lattice {
    pub fn new(lens: &LensSystem, window: &Window, spacing: f64) -> Self {
        let (x0, y0) = window.origin();
        Lattice {
            x: lens.lenses().iter().map(|l| l.position.re).collect(),
            y: lens.lenses().iter().map(|l| l.position.im).collect(),
            m: lens.lenses().iter().map(|l| l.mass).collect(),
            spacing,
            x0,
            y0,
            inv_pixel: 1.0 / window.pixel_size(),
            n: window.pixels,
            mirror: lens.symmetric_about_x_axis(),
            window: *window,
            radius: shooting_radius(lens, window),
        }
    }

    /// Cells in the whole shooting square (halved with the mirror symmetry).
    pub fn region_cells(&self) -> f64 {
        let side = 2.0 * self.radius / self.spacing;
        side * side / if self.mirror { 2.0 } else { 1.0 }
    }

    /// Lens positions and masses.
    pub fn lenses(&self) -> impl Iterator<Item = (f64, f64, f64)> + '_ {
        (0..self.m.len()).map(|k| (self.x[k], self.y[k], self.m[k]))
    }

    /// Source positions of a row of image-plane points `(xs[c], y)`, written to `sx`, `sy`.
    /// A structure-of-arrays loop that compilers vectorise.
    #[inline(always)]
    pub fn source_row(&self, xs: &[f64], y: f64, sx: &mut [f64], sy: &mut [f64]) {
        let len = xs.len().min(sx.len()).min(sy.len());
        let (xs, sx, sy) = (&xs[..len], &mut sx[..len], &mut sy[..len]);
        sx.copy_from_slice(xs);
        sy.fill(y);
        for k in 0..self.m.len() {
            let (lx, ly, m) = (self.x[k], self.y[k], self.m[k]);
            let dy = y - ly;
            let dy2 = dy * dy;
            for c in 0..len {
                let dx = xs[c] - lx;
                let inv = m / (dx * dx + dy2);
                sx[c] -= dx * inv;
                sy[c] -= dy * inv;
            }
        }
    }

    /// Pixel coordinates (continuous, pixel units from the lower-left corner) of a source point.
    #[inline(always)]
    pub fn to_pixels(&self, sx: f64, sy: f64) -> (f64, f64) {
        (
            (sx - self.x0) * self.inv_pixel,
            (sy - self.y0) * self.inv_pixel,
        )
    }

    /// Can any point of the block land in the window? `None` when a lens may lie inside
    /// (no bound); `Some(false)` only when provably not.
    fn may_reach(&self, block: &Block) -> Option<bool> {
        let h = self.spacing;
        let b = 0.5 * block.side as f64 * h;
        let zx = (block.i0 as f64 + 0.5 * block.side as f64) * h;
        let zy = (block.j0 as f64 + 0.5 * block.side as f64) * h;
        let d = b * std::f64::consts::SQRT_2;
        let (mut sx, mut sy, mut spread) = (zx, zy, 0.0);
        for (lx, ly, m) in self.lenses() {
            let (wx, wy) = (zx - lx, zy - ly);
            let r2 = wx * wx + wy * wy;
            let r = r2.sqrt();
            if r <= d * (1.0 + 1e-9) {
                return None;
            }
            let inv = m / r2;
            sx -= wx * inv;
            sy -= wy * inv;
            spread += m * d / ((r - d) * r);
        }
        let reach = (b + spread) * (1.0 + 1e-9) + 1e-12 * (1.0 + sx.abs() + sy.abs());
        let half = 0.5 * self.window.width;
        let (cx, cy) = self.window.center;
        let hits = |y: f64| (sx - cx).abs() <= half + reach && (y - cy).abs() <= half + reach;
        Some(hits(sy) || (self.mirror && hits(-sy)))
    }

    /// Passes the leaves of `block` that may reach the window to `keep`.
    fn refine(&self, block: Block, keep: &mut impl FnMut(Block)) {
        if self.may_reach(&block) == Some(false) {
            return;
        }
        if block.side <= LEAF {
            keep(block);
            return;
        }
        let half = block.side / 2;
        for (di, dj) in [(0, 0), (half, 0), (0, half), (half, half)] {
            let child = Block {
                i0: block.i0 + di,
                j0: block.j0 + dj,
                side: half,
            };
            self.refine(child, keep);
        }
    }

    /// The leaves that may reach the window, in a fixed order.
    pub fn leaves(&self) -> Vec<Block> {
        self.tops()
            .par_iter()
            .flat_map_iter(|&b| {
                let mut leaves = Vec::new();
                self.refine(b, &mut |leaf| leaves.push(leaf));
                leaves
            })
            .collect()
    }

    /// How many leaves [`Lattice::leaves`] returns, without holding them: the bytes of the
    /// leaf list an engine's memory estimate needs (a small window's pre-image holds a tiny
    /// fraction of the shooting region's leaves).
    pub fn leaf_count(&self) -> u64 {
        self.tops()
            .par_iter()
            .map(|&b| {
                let mut count = 0u64;
                self.refine(b, &mut |_| count += 1);
                count
            })
            .sum()
    }

    /// Peak bytes of the leaf list: the list, and the per-block lists it is gathered from.
    pub fn leaf_bytes(&self) -> u64 {
        2 * self.leaf_count() * std::mem::size_of::<Block>() as u64
    }

    /// The top-level blocks covering the shooting region.
    fn tops(&self) -> Vec<Block> {
        let half_cells = (self.radius / self.spacing).ceil() as i64 + 1;
        // Top-level blocks: a power-of-two multiple of the leaf, at most ~64 across the region.
        let mut top = LEAF;
        while top * 64 < 2 * half_cells {
            top *= 2;
        }
        let lo = (-half_cells).div_euclid(top) * top;
        let j_lo = if self.mirror { 0 } else { lo };
        let mut tops = Vec::new();
        for j in (j_lo..half_cells).step_by(top as usize) {
            for i in (lo..half_cells).step_by(top as usize) {
                tops.push(Block {
                    i0: i,
                    j0: j,
                    side: top,
                });
            }
        }
        tops
    }
}

/// Runs `work` over all leaves on one worker per thread, each with a private accumulator made
/// by `init`; returns the accumulators (merge them with an order-independent operation), or
/// [`crate::Error::Interrupted`] when `progress` asked to stop (checked every 16 leaves).
pub(crate) fn for_each_leaf<A: Send>(
    leaves: &[Block],
    init: impl Fn() -> A + Sync,
    work: impl Fn(&Block, &mut A) + Sync,
    progress: &dyn super::Progress,
) -> crate::error::Result<Vec<A>> {
    const CHUNK: usize = 16;
    let next = AtomicUsize::new(0);
    let workers = rayon::current_num_threads().max(1);
    let accumulated = (0..workers)
        .into_par_iter()
        .map(|_| {
            let mut acc = init();
            loop {
                let start = next.fetch_add(CHUNK, Ordering::Relaxed);
                if start >= leaves.len() || progress.cancelled() {
                    break;
                }
                let end = (start + CHUNK).min(leaves.len());
                for leaf in &leaves[start..end] {
                    work(leaf, &mut acc);
                }
                progress.advance((end - start) as u64);
            }
            acc
        })
        .collect::<Vec<A>>();
    if progress.cancelled() {
        return Err(crate::Error::Interrupted);
    }
    Ok(accumulated)
}

/// True when the CPU has AVX2 (x86_64 only).
pub(crate) fn has_avx2() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::is_x86_feature_detected!("avx2")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// One worker's integer histogram (per pixel) and how many contributions it counted.
pub(crate) struct Tally<T> {
    pub hist: Vec<T>,
    pub count: u64,
}

impl<T: Copy + Default> Tally<T> {
    pub fn new(npix: usize) -> Self {
        Tally {
            hist: vec![T::default(); npix],
            count: 0,
        }
    }
}

/// Sums the workers' tallies (integers: the order does not matter) and scales the totals into
/// an `n x n` map; returns the data and the summed count.
pub(crate) fn merge<T: Copy + Into<u64>>(
    tallies: Vec<Tally<T>>,
    n: usize,
    scale: f64,
) -> crate::error::Result<(ndarray::Array2<f32>, u64)> {
    let mut total = vec![0u64; n * n];
    let mut count = 0;
    for t in &tallies {
        count += t.count;
        for (sum, &v) in total.iter_mut().zip(&t.hist) {
            *sum += v.into();
        }
    }
    drop(tallies);
    let values = total.iter().map(|&v| (v as f64 * scale) as f32).collect();
    let data = ndarray::Array2::from_shape_vec((n, n), values)
        .map_err(|e| crate::error::Error::Numerical(format!("map shape: {e}")))?;
    Ok((data, count))
}

/// Rays (or cells) in a list of leaves.
pub(crate) fn leaf_cells(leaves: &[Block]) -> u64 {
    leaves.len() as u64 * (LEAF * LEAF) as u64
}
