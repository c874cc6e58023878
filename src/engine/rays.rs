//! Inverse ray shooting on a regular image-plane lattice (`rays`).
//!
//! Rays sit at the cell centres `((i + 1/2) h, (j + 1/2) h)` of the lattice of
//! [`super::lattice`] (shooting region, block skipping, mirror symmetry, determinism), with
//! spacing `h = pixel / sqrt(R)` for `R` rays per unlensed pixel area. The lattice is anchored at
//! the origin, so it is symmetric about the x axis and independent of how work is split. A
//! pixel's value is `hits / R`: hits times the area `h^2` a ray stands for, divided by the pixel
//! area — the mean magnification over the pixel.
//!
//! Leaves of 64 x 64 rays are traced in rows of 64 (a structure-of-arrays loop; an AVX2 build of
//! the same loop is chosen at run time where the CPU has it). Hits go to a private `u32`
//! histogram per worker. Peak memory: `4 n^2` bytes per thread plus `12 n^2` for the merge and
//! output, plus 48 bytes per surviving leaf (the list and the lists it is gathered from).

use super::lattice::{for_each_leaf, has_avx2, leaf_cells, merge, Block, Lattice, Tally, LEAF};
use super::{Engine, Progress, Traced};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::Window;

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

/// Traces one leaf, adding hits to `hist`; returns the hits counted.
#[inline(always)]
fn trace_leaf_body(lattice: &Lattice, leaf: &Block, hist: &mut [u32]) -> u64 {
    const L: usize = LEAF as usize;
    let h = lattice.spacing;
    let n = lattice.n;
    let nf = n as f64;
    let mut xs = [0.0f64; L];
    for (k, x) in xs.iter_mut().enumerate() {
        *x = (leaf.i0 as f64 + k as f64 + 0.5) * h;
    }
    let (mut sx, mut sy) = ([0.0f64; L], [0.0f64; L]);
    let mut landed = 0u64;
    for row in 0..leaf.side {
        let y = (leaf.j0 as f64 + row as f64 + 0.5) * h;
        lattice.source_row(&xs, y, &mut sx, &mut sy);
        for c in 0..L {
            let (fx, fy) = lattice.to_pixels(sx[c], sy[c]);
            if !(fx >= 0.0 && fx < nf) {
                continue;
            }
            let ix = fx as usize;
            if fy >= 0.0 && fy < nf {
                hist[fy as usize * n + ix] += 1;
                landed += 1;
            }
            if lattice.mirror {
                let fy = lattice.to_pixels(sx[c], -sy[c]).1;
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
unsafe fn trace_leaf_avx2(lattice: &Lattice, leaf: &Block, hist: &mut [u32]) -> u64 {
    trace_leaf_body(lattice, leaf, hist)
}

/// Traces one leaf with the best instruction set this CPU offers. Both builds perform the same
/// IEEE operations in the same order (no fused multiply-add), so results agree bit for bit.
fn trace_leaf(lattice: &Lattice, leaf: &Block, hist: &mut [u32], avx2: bool) -> u64 {
    #[cfg(target_arch = "x86_64")]
    if avx2 {
        // SAFETY: only called when the CPU reports AVX2.
        return unsafe { trace_leaf_avx2(lattice, leaf, hist) };
    }
    let _ = avx2;
    trace_leaf_body(lattice, leaf, hist)
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
        let lattice = Lattice::new(lens, window, self.spacing(window));
        npix * (4 * threads + 12) + lattice.leaf_bytes()
    }

    fn trace(&self, lens: &LensSystem, window: &Window, progress: &dyn Progress) -> Result<Traced> {
        let lattice = Lattice::new(lens, window, self.spacing(window));
        let leaves = lattice.leaves();
        progress.start(leaves.len() as u64);
        let npix = window.pixel_count();
        let avx2 = has_avx2();
        let tallies = for_each_leaf(
            &leaves,
            || Tally::<u32>::new(npix),
            |leaf, t| t.count += trace_leaf(&lattice, leaf, &mut t.hist, avx2),
            progress,
        )?;
        let (data, landed) = merge(tallies, window.pixels, 1.0 / self.rays_per_pixel)?;
        Ok(Traced {
            data,
            rays_shot: leaf_cells(&leaves),
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
    let lattice = Lattice::new(lens, window, engine.spacing(window));
    let traced = leaf_cells(&lattice.leaves());
    (traced, lattice.region_cells() as u64)
}
