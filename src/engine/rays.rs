//! Inverse ray shooting on a regular image-plane lattice.
//!
//! # Lattice
//! Rays sit at `((i + 1/2) h, (j + 1/2) h)` for all integers `i, j`, with spacing
//! `h = pixel / sqrt(R)` for `R` rays per unlensed pixel area. The lattice is anchored at the
//! origin, so it is symmetric about the x axis and independent of how work is split.
//! A pixel's value is `hits / R`: hits times the area `h^2` a ray stands for, divided by the
//! pixel area — the mean magnification over the pixel.
//!
//! # Shooting region
//! Let `R_L = max_i |z_i|` and `Z = max |zeta|` over the window (its farthest corner from the
//! origin). For an image z of a source zeta with `|z| > R_L`, the lens equation gives
//! `|z - zeta| = |sum_i m_i / conj(z - z_i)| <= sum_i m_i / (|z| - R_L) = 1 / (|z| - R_L)`,
//! so with `x = |z| - R_L`: `x <= (Z - R_L) + 1/x`, i.e. `x^2 - (Z - R_L) x - 1 <= 0` and
//! ```text
//! |z| <= R_L + ((Z - R_L) + sqrt((Z - R_L)^2 + 4)) / 2.
//! ```
//! Every image of every source in the window lies in that disk; the lattice is shot over the
//! square that holds it.
//!
//! # Skipping blocks that cannot reach the window
//! The region is covered by square blocks of lattice points, refined as a quadtree. For a block
//! of half-side `b` about `z_b` (all points within `d = b sqrt 2` of `z_b`), and each lens with
//! `w_0 = z_b - z_i`, `|w_0| > d`:
//! `|1/conj(w) - 1/conj(w_0)| = |w - w_0| / (|w| |w_0|) <= d / ((|w_0| - d) |w_0|)`.
//! Summed with the masses this bounds the change `D` of the deflection over the block, so every
//! ray of the block lands within the square of half-side `b + D` about `zeta(z_b)`. A block whose
//! square misses the window (and, for a lens symmetric about the x axis, whose mirror square
//! misses it too) is skipped; a block holding a lens cannot be bounded and is refined down to the
//! leaves, which are shot. The cost of a small window is therefore proportional to its pre-image.
//!
//! # Mirror symmetry
//! When every lens lies on the x axis, `zeta(conj z) = conj(zeta(z))`: only the lattice rows with
//! `y > 0` are traced and each ray is counted at `zeta` and at `conj(zeta)`.
//!
//! # Work and memory
//! Leaves of 64 x 64 rays are traced in rows of 64 (a structure-of-arrays loop that compilers
//! vectorise; an AVX2 build of the same loop is chosen at run time where the CPU has it). Workers
//! (one per thread) pull leaves from a shared counter and count hits in a private `u32` histogram;
//! histograms are summed at the end. Integer sums do not depend on order, so the pixel data are
//! bit-identical for any thread count. Peak memory: `4 n^2` bytes per thread plus `12 n^2` for
//! the merge and output, plus 16 bytes per surviving leaf.

use super::{Engine, Progress, Traced};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::Window;
use ndarray::Array2;
use rayon::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Rays per side of a leaf block.
const LEAF: i64 = 64;
/// Largest accepted density (keeps per-pixel `u32` counts far from overflow).
const MAX_DENSITY: f64 = 1e8;

/// The inverse-ray-shooting engine (`rays`).
///
/// ```
/// use causeway::engine::{Engine, RayShooting};
/// use causeway::{lens::LensSystem, map::Window};
/// let window = Window::new((0.0, 0.0), 4.0, 16).unwrap();
/// let map = RayShooting::new(400.0).build(&LensSystem::single(), &window).unwrap();
/// // Mean magnification of a point lens over a square of half-side 2 (flux conservation):
/// // 1.33482 (the integral of Paczynski's A over the square, divided by its area; see
/// // tests/reference/single_lens_maps.py).
/// assert!((map.mean() - 1.33482).abs() < 0.01);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RayShooting {
    rays_per_pixel: f64,
}

impl RayShooting {
    /// An engine shooting `rays_per_pixel` rays per unlensed pixel area.
    ///
    /// # Panics
    /// If the density is not finite and positive; use [`RayShooting::try_new`] for user input.
    pub fn new(rays_per_pixel: f64) -> Self {
        Self::try_new(rays_per_pixel).expect("invalid ray density")
    }

    /// Checked constructor.
    pub fn try_new(rays_per_pixel: f64) -> Result<Self> {
        if !rays_per_pixel.is_finite() || rays_per_pixel <= 0.0 || rays_per_pixel > MAX_DENSITY {
            return Err(Error::input(format!(
                "--rays: must be > 0 and at most {MAX_DENSITY:e}, got {rays_per_pixel}"
            )));
        }
        Ok(RayShooting { rays_per_pixel })
    }

    /// Ray spacing in the image plane for a window.
    pub fn spacing(&self, window: &Window) -> f64 {
        window.pixel_size() / self.rays_per_pixel.sqrt()
    }
}

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

/// A square block of lattice points: lower-left indices and side (in rays).
#[derive(Debug, Clone, Copy)]
struct Block {
    i0: i64,
    j0: i64,
    side: i64,
}

/// Lens data laid out for the kernel.
struct Kernel {
    x: Vec<f64>,
    y: Vec<f64>,
    m: Vec<f64>,
    spacing: f64,
    /// Window lower-left corner and inverse pixel size.
    x0: f64,
    y0: f64,
    inv_pixel: f64,
    n: usize,
    mirror: bool,
}

impl Kernel {
    /// Can any ray of the block land in the window? Conservative: false only when provably not.
    fn may_reach(&self, block: &Block, window: &Window) -> Option<bool> {
        let h = self.spacing;
        let b = 0.5 * block.side as f64 * h;
        let zx = (block.i0 as f64 + 0.5 * block.side as f64) * h;
        let zy = (block.j0 as f64 + 0.5 * block.side as f64) * h;
        let d = b * std::f64::consts::SQRT_2;
        let (mut sx, mut sy, mut spread) = (zx, zy, 0.0);
        for k in 0..self.m.len() {
            let (wx, wy) = (zx - self.x[k], zy - self.y[k]);
            let r2 = wx * wx + wy * wy;
            let r = r2.sqrt();
            if r <= d * (1.0 + 1e-9) {
                return None; // a lens may be inside: no bound
            }
            let inv = self.m[k] / r2;
            sx -= wx * inv;
            sy -= wy * inv;
            spread += self.m[k] * d / ((r - d) * r);
        }
        let reach = (b + spread) * (1.0 + 1e-9) + 1e-12 * (1.0 + sx.abs() + sy.abs());
        let half = 0.5 * window.width;
        let (cx, cy) = window.center;
        let hits = |y: f64| (sx - cx).abs() <= half + reach && (y - cy).abs() <= half + reach;
        Some(hits(sy) || (self.mirror && hits(-sy)))
    }

    /// Collects the leaves of `block` that may reach the window.
    fn refine(&self, block: Block, window: &Window, leaves: &mut Vec<Block>) {
        if self.may_reach(&block, window) == Some(false) {
            return;
        }
        if block.side <= LEAF {
            leaves.push(block);
            return;
        }
        let half = block.side / 2;
        for (di, dj) in [(0, 0), (half, 0), (0, half), (half, half)] {
            let child = Block {
                i0: block.i0 + di,
                j0: block.j0 + dj,
                side: half,
            };
            self.refine(child, window, leaves);
        }
    }

    /// Traces one leaf, adding hits to `hist`; returns the hits counted.
    #[inline(always)]
    fn trace_leaf_body(&self, leaf: &Block, hist: &mut [u32]) -> u64 {
        const L: usize = LEAF as usize;
        let h = self.spacing;
        let n = self.n;
        let nf = n as f64;
        let mut xs = [0.0f64; L];
        for (k, x) in xs.iter_mut().enumerate() {
            *x = (leaf.i0 as f64 + k as f64 + 0.5) * h;
        }
        let mut sx = [0.0f64; L];
        let mut sy = [0.0f64; L];
        let mut landed = 0u64;
        for row in 0..leaf.side {
            let y = (leaf.j0 as f64 + row as f64 + 0.5) * h;
            sx.copy_from_slice(&xs);
            sy.fill(y);
            for k in 0..self.m.len() {
                let (lx, ly, m) = (self.x[k], self.y[k], self.m[k]);
                let dy = y - ly;
                let dy2 = dy * dy;
                for c in 0..L {
                    let dx = xs[c] - lx;
                    let inv = m / (dx * dx + dy2);
                    sx[c] -= dx * inv;
                    sy[c] -= dy * inv;
                }
            }
            for c in 0..L {
                let fx = (sx[c] - self.x0) * self.inv_pixel;
                if !(fx >= 0.0 && fx < nf) {
                    continue;
                }
                let ix = fx as usize;
                let fy = (sy[c] - self.y0) * self.inv_pixel;
                if fy >= 0.0 && fy < nf {
                    hist[fy as usize * n + ix] += 1;
                    landed += 1;
                }
                if self.mirror {
                    let fy = (-sy[c] - self.y0) * self.inv_pixel;
                    if fy >= 0.0 && fy < nf {
                        hist[fy as usize * n + ix] += 1;
                        landed += 1;
                    }
                }
            }
        }
        landed
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn trace_leaf_avx2(&self, leaf: &Block, hist: &mut [u32]) -> u64 {
        self.trace_leaf_body(leaf, hist)
    }

    fn trace_leaf_portable(&self, leaf: &Block, hist: &mut [u32]) -> u64 {
        self.trace_leaf_body(leaf, hist)
    }

    /// Traces one leaf with the best instruction set this CPU offers. Both builds perform the
    /// same IEEE operations in the same order (no fused multiply-add), so results agree bit for
    /// bit.
    fn trace_leaf(&self, leaf: &Block, hist: &mut [u32], avx2: bool) -> u64 {
        #[cfg(target_arch = "x86_64")]
        if avx2 {
            // SAFETY: only called when the CPU reports AVX2.
            return unsafe { self.trace_leaf_avx2(leaf, hist) };
        }
        let _ = avx2;
        self.trace_leaf_portable(leaf, hist)
    }
}

fn has_avx2() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::is_x86_feature_detected!("avx2")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

impl RayShooting {
    fn kernel(&self, lens: &LensSystem, window: &Window) -> Kernel {
        let (x0, y0) = window.origin();
        Kernel {
            x: lens.lenses().iter().map(|l| l.position.re).collect(),
            y: lens.lenses().iter().map(|l| l.position.im).collect(),
            m: lens.lenses().iter().map(|l| l.mass).collect(),
            spacing: self.spacing(window),
            x0,
            y0,
            inv_pixel: 1.0 / window.pixel_size(),
            n: window.pixels,
            mirror: lens.symmetric_about_x_axis(),
        }
    }

    /// The surviving leaves, in a fixed order.
    fn leaves(&self, kernel: &Kernel, lens: &LensSystem, window: &Window) -> Vec<Block> {
        let h = kernel.spacing;
        let radius = shooting_radius(lens, window);
        let half_rays = (radius / h).ceil() as i64 + 1;
        // Top-level blocks: a power-of-two multiple of the leaf, at most ~64 across the region.
        let mut top = LEAF;
        while top * 64 < 2 * half_rays {
            top *= 2;
        }
        let lo = (-half_rays).div_euclid(top) * top;
        let hi = half_rays;
        let j_lo = if kernel.mirror { 0 } else { lo };
        let mut tops = Vec::new();
        let mut j = j_lo;
        while j < hi {
            let mut i = lo;
            while i < hi {
                tops.push(Block {
                    i0: i,
                    j0: j,
                    side: top,
                });
                i += top;
            }
            j += top;
        }
        tops.par_iter()
            .flat_map_iter(|&b| {
                let mut leaves = Vec::new();
                kernel.refine(b, window, &mut leaves);
                leaves
            })
            .collect()
    }
}

impl Engine for RayShooting {
    fn name(&self) -> &'static str {
        "rays"
    }

    fn density(&self) -> f64 {
        self.rays_per_pixel
    }

    fn memory_bytes(&self, lens: &LensSystem, window: &Window) -> u64 {
        let npix = window.pixel_count() as u64;
        let threads = rayon::current_num_threads() as u64;
        // Surviving leaves: at most the whole region, far fewer for a zoom; count the region.
        let h = self.spacing(window);
        let side = 2.0 * shooting_radius(lens, window) / h;
        let leaves = (side / LEAF as f64).powi(2).min(1e12) as u64;
        npix * (4 * threads + 12) + 16 * leaves
    }

    fn trace(&self, lens: &LensSystem, window: &Window, progress: &dyn Progress) -> Result<Traced> {
        let kernel = self.kernel(lens, window);
        let leaves = self.leaves(&kernel, lens, window);
        progress.start(leaves.len() as u64);
        let npix = window.pixel_count();
        let next = AtomicUsize::new(0);
        let avx2 = has_avx2();
        const CHUNK: usize = 16;
        let workers = rayon::current_num_threads().max(1);
        let partials: Vec<(Vec<u32>, u64)> = (0..workers)
            .into_par_iter()
            .map(|_| {
                let mut hist = vec![0u32; npix];
                let mut landed = 0u64;
                loop {
                    let start = next.fetch_add(CHUNK, Ordering::Relaxed);
                    if start >= leaves.len() {
                        break;
                    }
                    let end = (start + CHUNK).min(leaves.len());
                    for leaf in &leaves[start..end] {
                        landed += kernel.trace_leaf(leaf, &mut hist, avx2);
                    }
                    progress.advance((end - start) as u64);
                }
                (hist, landed)
            })
            .collect();
        let mut total = vec![0u64; npix];
        let mut landed = 0u64;
        for (hist, l) in &partials {
            landed += l;
            for (t, &h) in total.iter_mut().zip(hist) {
                *t += h as u64;
            }
        }
        drop(partials);
        let scale = 1.0 / self.rays_per_pixel;
        let n = window.pixels;
        let data = Array2::from_shape_vec(
            (n, n),
            total.iter().map(|&c| (c as f64 * scale) as f32).collect(),
        )
        .map_err(|e| Error::Numerical(format!("map shape: {e}")))?;
        Ok(Traced {
            data,
            rays_shot: leaves.len() as u64 * (LEAF * LEAF) as u64,
            rays_landed: landed,
        })
    }
}

/// Rays the engine would trace for a window after skipping blocks, and the rays of the whole
/// shooting region at the same spacing, without tracing any.
///
/// ```
/// use causeway::{engine::{ray_budget, RayShooting}, lens::LensSystem, map::Window};
/// let lens = LensSystem::binary(1.2, 1e-3).unwrap();
/// let zoom = Window::new((0.37, 0.0), 0.05, 100).unwrap();
/// let (traced, region) = ray_budget(&RayShooting::new(100.0), &lens, &zoom);
/// assert!(traced * 100 < region);
/// ```
pub fn ray_budget(engine: &RayShooting, lens: &LensSystem, window: &Window) -> (u64, u64) {
    let kernel = engine.kernel(lens, window);
    let traced = engine.leaves(&kernel, lens, window).len() as u64 * (LEAF * LEAF) as u64;
    let side = 2.0 * shooting_radius(lens, window) / kernel.spacing;
    let region = side * side / if kernel.mirror { 2.0 } else { 1.0 };
    (traced, region as u64)
}
