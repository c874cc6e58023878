//! Pre-convolved maps: the whole map convolved once with the source profile by FFT, then read
//! by bilinear interpolation.
//!
//! # What is computed
//! The kernel holds, for each pixel offset `(kx, ky)`, the weight the direct reader gives that
//! pixel when the source is centred on a pixel centre: the exact disk/pixel overlaps of
//! [`crate::source::disk_rect_overlap`], summed over the profile's uniform disks. The
//! convolution at pixel centre `(i, j)` is therefore the direct read there (to FFT round-off,
//! about `1e-15` relative times `log2` of the size). It is valid at centres whose kernel fits
//! inside the map: `margin <= i, j <= n - 1 - margin`.
//!
//! # Interpolation error (derived)
//! Between centres the pre-convolved grid is read bilinearly. For a function `f` with bounded
//! second derivatives on a cell of side `d`, linear interpolation along x errs by at most
//! `(d^2/8) max|f_xx|` on each cell edge, and the tensor product
//! `f - P_x P_y f = (f - P_x f) + P_x (f - P_y f)` errs by at most
//! `(d^2/8) (max|f_xx| + max|f_yy|)` inside the cell (no mixed term: `P_x` does not increase a
//! maximum). With `d^2 f_xx` estimated by the second differences of the grid at the cell's four
//! centres, [`Preconvolved::interpolation_bound`] returns
//! `(1/8) (max|D_xx| + max|D_yy|)`. The finite-source read is only piecewise smooth (its second
//! derivative has integrable peaks where the source rim is tangent to a pixel edge or crosses a
//! caustic), so the bound is an estimate; tests/curve.rs measures how it holds on a caustic
//! crossing.

use super::sample::{bilinear, disks_in_pixels};
use crate::error::{Error, Result};
use crate::map::{MagnificationMap, Window};
use crate::source::{disk_rect_overlap, SourceProfile};
use num_complex::Complex64;
use rayon::prelude::*;
use rustfft::FftPlanner;

/// A map convolved with a source profile.
///
/// ```
/// use causeway::curve::{DirectReader, Preconvolved};
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// use causeway::source::SourceProfile;
/// let window = Window::new((0.3, 0.0), 0.4, 40).unwrap();
/// let map = RayShooting::new(100.0).build(&LensSystem::single(), &window).unwrap();
/// let src = SourceProfile::uniform(0.03).unwrap();
/// let conv = Preconvolved::new(&map, &src).unwrap();
/// let (x, y) = window.pixel_center(20, 20);
/// let direct = DirectReader::new(&map, &src).read(x, y).unwrap();
/// assert!((conv.read(x, y).unwrap() - direct).abs() < 1e-12);
/// ```
#[derive(Debug, Clone)]
pub struct Preconvolved {
    window: Window,
    grid: Vec<f64>,
    margin: usize,
}

impl Preconvolved {
    /// Convolves `map` with `profile` (`rho > 0`).
    pub fn new(map: &MagnificationMap, profile: &SourceProfile) -> Result<Self> {
        let window = map.window;
        let n = window.pixels;
        let disks = disks_in_pixels(profile, window.pixel_size());
        let margin = kernel_margin(&disks);
        if 2 * margin + 1 > n {
            return Err(Error::input(format!(
                "--rho {}: the source is wider than the map ({} pixels)",
                profile.rho, n
            )));
        }
        let l = fft_size(n);
        let mut image = vec![Complex64::new(0.0, 0.0); l * l];
        for (iy, row) in map.data.outer_iter().enumerate() {
            for (ix, &v) in row.iter().enumerate() {
                image[iy * l + ix].re = v as f64;
            }
        }
        let mut kernel = vec![Complex64::new(0.0, 0.0); l * l];
        let quadrant = kernel_quadrant(&disks, margin);
        let w = margin + 1;
        for ky in 0..=margin {
            for kx in 0..=margin {
                let val = quadrant[ky * w + kx];
                for (sx, sy) in [(kx, ky), (l - kx, ky), (kx, l - ky), (l - kx, l - ky)] {
                    kernel[(sy % l) * l + sx % l].re = val;
                }
            }
        }
        let mut planner = FftPlanner::<f64>::new();
        let forward = planner.plan_fft_forward(l);
        let inverse = planner.plan_fft_inverse(l);
        let fft2 = |buf: &mut Vec<Complex64>, fft: &std::sync::Arc<dyn rustfft::Fft<f64>>| {
            buf.par_chunks_mut(l).for_each(|row| fft.process(row));
            *buf = transpose(buf, l);
            buf.par_chunks_mut(l).for_each(|row| fft.process(row));
        };
        fft2(&mut image, &forward);
        fft2(&mut kernel, &forward);
        // Both spectra are transposed alike; the product is transposed back by the inverse.
        image
            .par_iter_mut()
            .zip(kernel.par_iter())
            .for_each(|(a, b)| *a *= *b);
        drop(kernel);
        fft2(&mut image, &inverse);
        let scale = 1.0 / (l * l) as f64;
        let mut grid = vec![f64::NAN; n * n];
        for iy in margin..n - margin {
            for ix in margin..n - margin {
                grid[iy * n + ix] = image[iy * l + ix].re * scale;
            }
        }
        Ok(Preconvolved {
            window,
            grid,
            margin,
        })
    }

    /// Working memory needed to convolve a map of `pixels` per side, in bytes.
    pub fn memory_bytes(pixels: usize) -> u64 {
        let l = fft_size(pixels) as u64;
        3 * 16 * l * l + 8 * (pixels as u64).pow(2)
    }

    /// Pixels lost at each edge: centres closer to the edge than this have no value.
    pub fn margin(&self) -> usize {
        self.margin
    }

    /// The convolved value at pixel centre `(ix, iy)`, if valid.
    pub fn at_center(&self, ix: usize, iy: usize) -> Option<f64> {
        let n = self.window.pixels;
        let ok = |i: usize| i >= self.margin && i + self.margin < n;
        (ok(ix) && ok(iy)).then(|| self.grid[iy * n + ix])
    }

    fn coords(&self, x: f64, y: f64) -> (f64, f64) {
        let (x0, y0) = self.window.origin();
        let d = self.window.pixel_size();
        ((x - x0) / d, (y - y0) / d)
    }

    /// Magnification of the source centred at `(x, y)` by bilinear interpolation; `None`
    /// outside the square of valid centres.
    pub fn read(&self, x: f64, y: f64) -> Option<f64> {
        let n = self.window.pixels;
        let (u, v) = self.coords(x, y);
        let at = |i: usize, j: usize| self.grid[j * n + i];
        bilinear(at, self.margin, n - 1 - self.margin, u, v)
    }

    /// Estimated bound on the interpolation error of [`Preconvolved::read`] at `(x, y)` (see
    /// the module documentation); `None` where the cell's neighbours are not all valid.
    pub fn interpolation_bound(&self, x: f64, y: f64) -> Option<f64> {
        let n = self.window.pixels;
        let (u, v) = self.coords(x, y);
        let (i, j) = ((u - 0.5).floor(), (v - 0.5).floor());
        let (lo, hi) = (self.margin as f64 + 2.0, (n - 1 - self.margin) as f64 - 3.0);
        if !(i >= lo && j >= lo && i <= hi && j <= hi) {
            return None;
        }
        let (i, j) = (i as usize, j as usize);
        let g = |a: usize, b: usize| self.grid[b * n + a];
        let (mut dxx, mut dyy) = (0.0f64, 0.0f64);
        for b in j - 1..=j + 2 {
            for a in i - 1..=i + 2 {
                dxx = dxx.max((g(a + 1, b) - 2.0 * g(a, b) + g(a - 1, b)).abs());
                dyy = dyy.max((g(a, b + 1) - 2.0 * g(a, b) + g(a, b - 1)).abs());
            }
        }
        Some((dxx + dyy) / 8.0)
    }
}

/// Half-width of the kernel in pixels: offsets `|k| <= margin` can touch the largest disk.
fn kernel_margin(disks: &[(f64, f64)]) -> usize {
    let r = disks.iter().map(|d| d.0).fold(0.0, f64::max);
    (r + 0.5).ceil() as usize
}

/// Kernel weights for offsets `0 <= kx, ky <= margin` (row-major, `margin + 1` wide); the
/// kernel is symmetric under `kx -> -kx` and `ky -> -ky`.
fn kernel_quadrant(disks: &[(f64, f64)], margin: usize) -> Vec<f64> {
    let w = margin + 1;
    let mut out = vec![0.0; w * w];
    for ky in 0..w {
        for kx in 0..w {
            let (x0, y0) = (kx as f64 - 0.5, ky as f64 - 0.5);
            out[ky * w + kx] = disks
                .iter()
                .map(|&(r, wt)| {
                    wt * disk_rect_overlap(0.0, 0.0, r, x0, x0 + 1.0, y0, y0 + 1.0)
                        / (std::f64::consts::PI * r * r)
                })
                .sum();
        }
    }
    out
}

/// The smallest size `>= n` whose prime factors are 2, 3, 5 or 7 (fast FFT sizes).
fn fft_size(n: usize) -> usize {
    (n.max(1)..)
        .find(|&m| {
            let mut k = m;
            for p in [2, 3, 5, 7] {
                while k % p == 0 {
                    k /= p;
                }
            }
            k == 1
        })
        .expect("a smooth size exists")
}

/// Out-of-place transpose of an `l x l` array, in tiles.
fn transpose(a: &[Complex64], l: usize) -> Vec<Complex64> {
    const T: usize = 32;
    let mut out = vec![Complex64::new(0.0, 0.0); l * l];
    out.par_chunks_mut(l * T)
        .enumerate()
        .for_each(|(tile_row, chunk)| {
            let c0 = tile_row * T;
            let rows = chunk.len() / l;
            for r0 in (0..l).step_by(T) {
                for c in c0..c0 + rows {
                    for r in r0..(r0 + T).min(l) {
                        chunk[(c - c0) * l + r] = a[r * l + c];
                    }
                }
            }
        });
    out
}
