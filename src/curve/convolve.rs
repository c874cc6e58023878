//! Pre-convolved maps: the whole map convolved once with the source profile, then read by
//! bilinear interpolation.
//!
//! # What is computed
//! The kernel holds, for each pixel offset `(kx, ky)`, the weight the direct reader gives that
//! pixel when the source is centred on a pixel centre: the exact disk/pixel overlaps of
//! [`crate::source::disk_rect_overlap`], summed over the profile's uniform disks. The
//! convolution at pixel centre `(i, j)` is therefore the direct read there (to FFT round-off,
//! about `1e-15` relative times `log2` of the size). It is valid at centres whose kernel fits
//! inside the map: `margin <= i, j <= n - 1 - margin`.
//!
//! # How it is computed
//! A kernel of half-width [`DIRECT_MARGIN`] pixels or less is summed directly (the kernel is
//! even in x and in y, so each weight multiplies the sum of four pixels). A wider one goes
//! through the discrete Fourier transform, using that both map and kernel are real:
//! - the map's transform is kept in half ([`MapSpectrum`]): rows are transformed two at a time
//!   as the real and imaginary parts of one complex row and separated by Hermitian symmetry,
//!   then only the `L/2 + 1` columns of non-negative x frequency are transformed;
//! - the kernel is even, so its transform is real: two kernel rows (then two columns) are
//!   transformed in one complex transform and read off as its real and imaginary parts, and
//!   only its `margin + 1` non-zero rows are transformed along x;
//! - the product goes back the same way: `L/2 + 1` columns, then the valid output rows two at a
//!   time as one complex row.
//!
//! One [`MapSpectrum`] serves every profile convolved with the same map, so `k` profiles cost
//! one half-size forward transform plus `k` half-size inverse ones.
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
//! caustic), so the bound is an estimate; tests/integration/curve.rs measures how it holds on a caustic
//! crossing.

mod fourier;
use fourier::{convolve_fourier, fft_size, forward, transpose};

use super::sample::{bilinear, disks_in_pixels};
use crate::error::{Error, Result};
use crate::map::{MagnificationMap, Window};
use crate::source::{disk_rect_overlap, SourceProfile};
use num_complex::Complex64;
use rayon::prelude::*;
use rustfft::{Fft, FftPlanner};
use std::sync::{Arc, Mutex, OnceLock};

/// Kernels of half-width up to this many pixels are summed directly instead of through the
/// FFT (measured in benches/curve.rs, group `preconvolve_route_1000px`).
pub const DIRECT_MARGIN: usize = 2;

const ZERO: Complex64 = Complex64::new(0.0, 0.0);

/// A map made ready for convolution with several source profiles: its discrete Fourier
/// transform, taken on first need and shared by every [`Preconvolved::from_spectrum`].
///
/// ```
/// use causeway::curve::{MapSpectrum, Preconvolved};
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// use causeway::source::SourceProfile;
/// let map = RayShooting::new(100.0)
///     .build(&LensSystem::single(), &Window::new((0.3, 0.0), 0.4, 40).unwrap()).unwrap();
/// let spectrum = MapSpectrum::new(&map);
/// for rho in [0.02, 0.03, 0.05] {
///     let src = SourceProfile::uniform(rho).unwrap();
///     let shared = Preconvolved::from_spectrum(&spectrum, &src).unwrap();
///     let alone = Preconvolved::new(&map, &src).unwrap();
///     let (a, b) = (shared.at_center(20, 20).unwrap(), alone.at_center(20, 20).unwrap());
///     assert!((a - b).abs() < 1e-12 * a);
/// }
/// ```
#[derive(Debug)]
pub struct MapSpectrum<'a> {
    map: &'a MagnificationMap,
    /// FFT size per side, `L >= n`.
    size: usize,
    /// Columns `u = 0..=L/2` of the 2-D transform, column-major: `[u * L + v]`.
    half: OnceLock<Vec<Complex64>>,
    /// A product buffer of the same size kept between convolutions (fewer fresh pages).
    spare: Mutex<Vec<Complex64>>,
}

impl<'a> MapSpectrum<'a> {
    /// Prepares `map`; the transform itself is taken when a profile first needs it.
    pub fn new(map: &'a MagnificationMap) -> Self {
        MapSpectrum {
            map,
            size: fft_size(map.window.pixels),
            half: OnceLock::new(),
            spare: Mutex::new(Vec::new()),
        }
    }

    /// The map this spectrum is of.
    pub fn map(&self) -> &'a MagnificationMap {
        self.map
    }

    fn half(&self) -> &[Complex64] {
        self.half.get_or_init(|| forward(self.map, self.size))
    }

    fn lock_spare(&self) -> std::sync::MutexGuard<'_, Vec<Complex64>> {
        // A panic elsewhere cannot leave the buffer inconsistent: it is only ever replaced.
        self.spare.lock().unwrap_or_else(|e| e.into_inner())
    }
}

/// How [`Preconvolved::with_route`] convolves (for benches and tests).
#[doc(hidden)]
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Route {
    /// The rule: direct for half-widths up to [`DIRECT_MARGIN`], else Fourier.
    Auto,
    /// Kernel summed over the map directly.
    Direct,
    /// Through the shared half spectrum.
    Fourier,
}

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
    /// Convolves `map` with `profile` (`rho > 0`). To convolve one map with several profiles,
    /// share a [`MapSpectrum`] through [`Preconvolved::from_spectrum`] instead.
    pub fn new(map: &MagnificationMap, profile: &SourceProfile) -> Result<Self> {
        Self::from_spectrum(&MapSpectrum::new(map), profile)
    }

    /// Convolves the map of `spectrum` with `profile` (`rho > 0`), transforming the map only if
    /// no earlier call on `spectrum` has.
    pub fn from_spectrum(spectrum: &MapSpectrum, profile: &SourceProfile) -> Result<Self> {
        Self::with_route(spectrum, profile, Route::Auto)
    }

    /// [`Preconvolved::from_spectrum`] by a chosen route (for benches and tests).
    #[doc(hidden)]
    pub fn with_route(
        spectrum: &MapSpectrum,
        profile: &SourceProfile,
        route: Route,
    ) -> Result<Self> {
        let kernel = Kernel::new(profile, spectrum.map.window.pixel_size());
        Self::with_kernel(spectrum, profile, &kernel, route)
    }

    /// [`Preconvolved::with_route`] with the profile's kernel already made (for every map of
    /// one pixel size: a curve's crops).
    pub(crate) fn with_kernel(
        spectrum: &MapSpectrum,
        profile: &SourceProfile,
        kernel: &Kernel,
        route: Route,
    ) -> Result<Self> {
        let window = spectrum.map.window;
        kernel.fits(window.pixels, profile)?;
        let (quadrant, margin) = (&kernel.quadrant, kernel.margin);
        let direct = match route {
            Route::Auto => margin <= DIRECT_MARGIN,
            Route::Direct => true,
            Route::Fourier => false,
        };
        let grid = if direct {
            convolve_direct(spectrum.map, quadrant, margin)
        } else {
            convolve_fourier(spectrum, quadrant, margin)
        };
        Ok(Preconvolved {
            window,
            grid,
            margin,
        })
    }

    /// The convolution as it was done before [`MapSpectrum`]: three full complex 2-D FFTs (map,
    /// kernel, product) for one profile. Kept as the baseline of benches/curve.rs.
    #[doc(hidden)]
    pub fn full_complex_baseline(map: &MagnificationMap, profile: &SourceProfile) -> Result<Self> {
        let window = map.window;
        let kernel = Kernel::new(profile, window.pixel_size());
        kernel.fits(window.pixels, profile)?;
        let (quadrant, margin) = (&kernel.quadrant, kernel.margin);
        let n = window.pixels;
        let l = fft_size(n);
        let mut image = vec![ZERO; l * l];
        for (iy, row) in map.data.outer_iter().enumerate() {
            for (ix, &v) in row.iter().enumerate() {
                image[iy * l + ix].re = v as f64;
            }
        }
        let mut kernel = vec![ZERO; l * l];
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
        let fft2 = |buf: &mut Vec<Complex64>, fft: &Arc<dyn Fft<f64>>| {
            buf.par_chunks_mut(l).for_each(|row| fft.process(row));
            *buf = transpose(buf, l);
            buf.par_chunks_mut(l).for_each(|row| fft.process(row));
        };
        fft2(&mut image, &forward);
        fft2(&mut kernel, &forward);
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

    /// Working memory needed to convolve a map of `pixels` per side, in bytes: the map's half
    /// spectrum and a product of its size (or, while the map is transformed, its row pass),
    /// and the result.
    pub fn memory_bytes(pixels: usize) -> u64 {
        let l = fft_size(pixels) as u64;
        2 * 16 * l * (l / 2 + 1) + 8 * (pixels as u64).pow(2)
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

    /// Where `(x, y)` falls among the pixel centres, for [`Preconvolved::read_cell`]: `None`
    /// unless it lies strictly inside the square of valid centres, off its edges by more than
    /// the round-off [`Preconvolved::read`] snaps to them. A cell of one reader serves every
    /// reader of the same window whose margin is not larger.
    pub(crate) fn cell(&self, x: f64, y: f64) -> Option<Cell> {
        let n = self.window.pixels;
        let (u, v) = self.coords(x, y);
        let (fu, fv) = (u - 0.5, v - 0.5);
        let lo = self.margin as f64 + 1e-9;
        let hi = (n - 1 - self.margin) as f64 - 1e-9;
        if !(fu > lo && fv > lo && fu < hi && fv < hi) {
            return None;
        }
        // fu, fv > 0 here: truncation is the floor.
        let (i, j) = (fu as usize, fv as usize);
        Some(Cell {
            index: j * n + i,
            tx: fu - i as f64,
            ty: fv - j as f64,
        })
    }

    /// The convolved values at the pixel centres, row by row from the lower left (NaN within
    /// the margin).
    pub(crate) fn grid(&self) -> &[f64] {
        &self.grid
    }

    /// [`Preconvolved::read`] at a point whose [`Cell`] is known (from this reader or one of
    /// the same window with a margin at least as wide): the same value, bit for bit.
    #[inline]
    pub(crate) fn read_cell(&self, c: &Cell) -> f64 {
        let n = self.window.pixels;
        let g = &self.grid;
        let (tx, ty) = (c.tx, c.ty);
        (1.0 - ty) * ((1.0 - tx) * g[c.index] + tx * g[c.index + 1])
            + ty * ((1.0 - tx) * g[c.index + n] + tx * g[c.index + n + 1])
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

/// The cell of a point between four valid pixel centres and its place in it (see
/// [`Preconvolved::cell`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Cell {
    /// Index of the cell's lower-left centre in the grid.
    index: usize,
    /// Fractions of the way to the next centre along x and y.
    tx: f64,
    ty: f64,
}

impl Cell {
    /// The grid index of the cell's lower-left centre and the fractions `(tx, ty)`.
    pub(crate) fn parts(&self) -> (usize, f64, f64) {
        (self.index, self.tx, self.ty)
    }
}

/// A profile's kernel on pixels of one size: the weights of offsets `0 <= kx, ky <= margin`.
#[derive(Debug, Clone)]
pub(crate) struct Kernel {
    margin: usize,
    quadrant: Vec<f64>,
}

impl Kernel {
    /// The kernel of `profile` (`rho > 0`) on pixels of side `pixel`.
    pub(crate) fn new(profile: &SourceProfile, pixel: f64) -> Self {
        let disks = disks_in_pixels(profile, pixel);
        // Offsets `|k| <= margin` can touch the largest disk.
        let r = disks.iter().map(|d| d.0).fold(0.0, f64::max);
        let margin = (r + 0.5).ceil() as usize;
        Kernel {
            margin,
            quadrant: kernel_quadrant(&disks, margin),
        }
    }

    /// An error if the kernel does not fit on a map of `pixels` per side.
    fn fits(&self, pixels: usize, profile: &SourceProfile) -> Result<()> {
        if 2 * self.margin + 1 > pixels {
            return Err(Error::input(format!(
                "--rho {}: the source is wider than the map ({pixels} pixels)",
                profile.rho
            )));
        }
        Ok(())
    }
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

/// The kernel summed over the map at every valid centre; `NaN` elsewhere.
fn convolve_direct(map: &MagnificationMap, quadrant: &[f64], margin: usize) -> Vec<f64> {
    let n = map.window.pixels;
    let w = margin + 1;
    let data = map
        .data
        .as_slice()
        .expect("map data are contiguous in standard order");
    let row = |iy: usize| &data[iy * n..(iy + 1) * n];
    let (lo, hi) = (margin, n - margin);
    let mut grid = vec![f64::NAN; n * n];
    grid.par_chunks_mut(n)
        .enumerate()
        .skip(lo)
        .take(hi - lo)
        .for_each_init(
            || vec![0.0f64; n],
            |pair, (iy, out)| {
                out[lo..hi].fill(0.0);
                for ky in 0..w {
                    // Rows iy - ky and iy + ky carry the same weights.
                    if ky == 0 {
                        pair.iter_mut()
                            .zip(row(iy))
                            .for_each(|(p, &a)| *p = a as f64);
                    } else {
                        let (a, b) = (row(iy - ky), row(iy + ky));
                        for ((p, &a), &b) in pair.iter_mut().zip(a).zip(b) {
                            *p = a as f64 + b as f64;
                        }
                    }
                    for kx in 0..w {
                        let wt = quadrant[ky * w + kx];
                        let acc = &mut out[lo..hi];
                        if kx == 0 {
                            acc.iter_mut()
                                .zip(&pair[lo..hi])
                                .for_each(|(o, &p)| *o += wt * p);
                        } else {
                            let (left, right) = (&pair[lo - kx..hi - kx], &pair[lo + kx..hi + kx]);
                            for ((o, &a), &b) in acc.iter_mut().zip(left).zip(right) {
                                *o += wt * (a + b);
                            }
                        }
                    }
                }
            },
        );
    grid
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Engine, PolygonMapping};
    use crate::lens::LensSystem;

    /// A point's cell on the reader with the wider margin reads, on it and on a reader with a
    /// narrower margin, exactly what the full bilinear read gives (`Preconvolved::read`, checked
    /// against direct reads in its doc-test); only points within round-off of the valid
    /// square's edge, or off it, go without a cell.
    #[test]
    fn a_cell_reads_what_the_full_read_does() {
        let lens = LensSystem::binary(1.1, 0.01).unwrap();
        let window = Window::new((0.05, 0.0), 0.3, 64).unwrap();
        let map = PolygonMapping::new(1.0).build(&lens, &window).unwrap();
        let spectrum = MapSpectrum::new(&map);
        let reader = |rho: f64| {
            Preconvolved::from_spectrum(&spectrum, &SourceProfile::uniform(rho).unwrap()).unwrap()
        };
        let (wide, narrow) = (reader(0.03), reader(0.006));
        assert!(wide.margin() > narrow.margin());
        let (mut with_cell, mut read) = (0, 0);
        for k in 0..4000 {
            // A seeded scatter over the window and a little beyond (Weyl sequence).
            let (a, b) = (
                (k as f64 * 0.754_877_666).fract(),
                (k as f64 * 0.569_840_29).fract(),
            );
            let (x, y) = (-0.12 + 0.34 * a, -0.17 + 0.34 * b);
            let full = wide.read(x, y);
            read += usize::from(full.is_some());
            if let Some(c) = wide.cell(x, y) {
                with_cell += 1;
                assert_eq!(wide.read_cell(&c).to_bits(), full.unwrap().to_bits());
                let other = narrow.read(x, y).unwrap();
                assert_eq!(narrow.read_cell(&c).to_bits(), other.to_bits());
            }
        }
        assert!(
            with_cell > 1000 && with_cell == read,
            "{with_cell} of {read}"
        );
    }
}
