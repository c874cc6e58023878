//! Reading a map under a finite source: exact overlap weights (direct) and bilinear point reads.
//!
//! The map is taken as what it is, piecewise constant: pixel `(ix, iy)` holds the mean
//! magnification over its square. A uniform disk then sees
//! `A = sum_pixels area(disk ∩ pixel) A_pixel / (pi rho^2)`, with the areas in closed form
//! ([`crate::source::disk_rect_overlap`]); a limb-darkened source is a weighted sum of uniform
//! disks ([`SourceProfile::as_uniform_disks`]), each read the same way.
//!
//! # Limb-darkening quadrature and its tolerance
//! The disk radii are Gauss–Legendre nodes in `s = sqrt(mu)` ([`ld_nodes`] of them: 32 plus
//! one per pixel of radius, at most 128). A uniform-disk read `A(r)` of the piecewise-constant
//! map is smooth in `r` except where the circle passes a pixel corner or becomes tangent to a
//! pixel edge, so the quadrature converges only as about `nodes^-2.5` (measured: 8 nodes give
//! 2e-3, 16 give 7e-4, 32 give 1e-4 on a caustic crossing with `u = 1`). Stated tolerance:
//! relative error below `1e-4` against the same profile integrated with four times as many
//! nodes (tests/integration/curve.rs measures it on a caustic crossing, for the steepest laws).
//!
//! # Point-source reads: the smoothing of bilinear interpolation
//! For `rho = 0` the map is read by bilinear interpolation between pixel centres. Pixel values
//! are already box averages of side `d` (the pixel size), so at a centre the read is
//! `A + (d^2/24) Laplacian(A) + O(d^4)` for a smooth `A`; between centres the interpolation
//! adds up to `(d^2/8) (|A_xx| + |A_yy|)`. The read is therefore the magnification smoothed over
//! about one pixel (box of side `d` convolved with a tent of half-width `d`), never the point
//! value: a caustic's `1/sqrt` divergence is cut to its mean over a pixel.

use crate::map::MagnificationMap;
use crate::source::SourceProfile;

/// Number of uniform disks (Gauss–Legendre nodes) used for a limb-darkened source of radius
/// `rho_px` pixels: 32 plus one per pixel of radius, at most 128.
///
/// ```
/// assert_eq!(causeway::curve::ld_nodes(3.0), 35);
/// assert_eq!(causeway::curve::ld_nodes(200.0), 128);
/// ```
pub fn ld_nodes(rho_px: f64) -> usize {
    (32 + rho_px.ceil() as usize).min(128)
}

/// The profile as `(radius in pixels, weight)` uniform disks for a map with pixel size `pixel`.
pub(crate) fn disks_in_pixels(profile: &SourceProfile, pixel: f64) -> Vec<(f64, f64)> {
    let rho_px = profile.rho / pixel;
    profile
        .as_uniform_disks(ld_nodes(rho_px))
        .into_iter()
        .map(|(r, w)| (r / pixel, w))
        .collect()
}

/// Mean of the map over the uniform disk of radius `r` (pixels) centred at `(u, v)` (pixel
/// coordinates: the lower-left corner of the map at (0, 0), pixel `(ix, iy)` spanning
/// `[ix, ix + 1] x [iy, iy + 1]`). `None` when the disk is not entirely inside the map.
pub(crate) fn disk_mean(data: &[f32], n: usize, u: f64, v: f64, r: f64) -> Option<f64> {
    let (ix0, ix1) = ((u - r).floor(), (u + r).floor());
    let (iy0, iy1) = ((v - r).floor(), (v + r).floor());
    let last = n as f64 - 1.0;
    if !(ix0 >= 0.0 && iy0 >= 0.0 && ix1 <= last && iy1 <= last) {
        return None;
    }
    if r == 0.0 {
        return Some(data[iy0 as usize * n + ix0 as usize] as f64);
    }
    let r2 = r * r;
    let mut sum = 0.0f64;
    for iy in iy0 as usize..=iy1 as usize {
        let (y0, y1) = (iy as f64 - v, iy as f64 + 1.0 - v);
        let row = &data[iy * n..(iy + 1) * n];
        // Half-chords: pixels within `full` of u (in x) lie wholly inside the disk; pixels
        // beyond `touch` miss it.
        let far = y0.abs().max(y1.abs());
        let near = if y0 <= 0.0 && y1 >= 0.0 {
            0.0
        } else {
            y0.abs().min(y1.abs())
        };
        let full = if far < r {
            (r2 - far * far).sqrt()
        } else {
            -1.0
        };
        let touch = (r2 - near * near).max(0.0).sqrt();
        let (jx0, jx1) = (
            ((u - touch).floor().max(0.0)) as usize,
            ((u + touch).floor().min(last)) as usize,
        );
        let mut inner = 0.0f64;
        let strips = RowStrips::new(y0, y1, r);
        // Strip area at the left edge of the next rim pixel, when already computed.
        let mut left: Option<(usize, f64)> = None;
        for (ix, &val) in row.iter().enumerate().take(jx1 + 1).skip(jx0) {
            let (x0, x1) = (ix as f64 - u, ix as f64 + 1.0 - u);
            if full > 0.0 && x0 >= -full && x1 <= full {
                inner += val as f64;
                continue;
            }
            let g0 = match left {
                Some((k, g)) if k == ix => g,
                _ => strips.area(x0),
            };
            let g1 = strips.area(x1);
            sum += (g1 - g0) * val as f64;
            left = Some((ix + 1, g1));
        }
        sum += inner;
    }
    Some(sum / (std::f64::consts::PI * r2))
}

/// [`crate::source::disk_strip_area`] for one row `[y0, y1]` of a disk of radius `r` about the origin, with
/// everything that depends only on the row computed once: each call then costs one `asin` and
/// one square root (the circle-segment primitive at `x`), shared by both row edges.
struct RowStrips {
    r: f64,
    r2: f64,
    /// Per row edge (y0, y1): |y| clipped to r, its sign, the half-chord there and the
    /// primitive at the half-chord.
    ay: [f64; 2],
    sign: [f64; 2],
    chord: [f64; 2],
    prim_chord: [f64; 2],
}

impl RowStrips {
    fn new(y0: f64, y1: f64, r: f64) -> Self {
        let r2 = r * r;
        let mut s = RowStrips {
            r,
            r2,
            ay: [0.0; 2],
            sign: [0.0; 2],
            chord: [0.0; 2],
            prim_chord: [0.0; 2],
        };
        for (k, y) in [y0, y1].into_iter().enumerate() {
            s.ay[k] = y.abs().min(r);
            s.sign[k] = if y < 0.0 { -1.0 } else { 1.0 };
            s.chord[k] = (r2 - s.ay[k] * s.ay[k]).max(0.0).sqrt();
            s.prim_chord[k] = s.prim(s.chord[k]);
        }
        s
    }

    /// `∫_0^t sqrt(r^2 - X^2) dX`.
    fn prim(&self, t: f64) -> f64 {
        0.5 * (t * (self.r2 - t * t).max(0.0).sqrt() + self.r2 * (t / self.r).min(1.0).asin())
    }

    /// Signed area of the disk within `[0, x] x [y0, y1]`.
    fn area(&self, x: f64) -> f64 {
        let ax = x.abs().min(self.r);
        let sx = if x < 0.0 { -1.0 } else { 1.0 };
        let mut prim_x = None;
        let mut quadrant = |k: usize| {
            let ay = self.ay[k];
            if ax * ax + ay * ay <= self.r2 {
                ax * ay
            } else {
                let p = *prim_x.get_or_insert_with(|| self.prim(ax));
                ay * self.chord[k] + p - self.prim_chord[k]
            }
        };
        let (q0, q1) = (quadrant(0), quadrant(1));
        sx * (self.sign[1] * q1 - self.sign[0] * q0)
    }
}

/// Finite-source reads of one map by exact overlap weights.
///
/// ```
/// use causeway::curve::DirectReader;
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// use causeway::source::SourceProfile;
/// let window = Window::new((0.0, 0.0), 0.4, 40).unwrap();
/// let map = RayShooting::new(400.0).build(&LensSystem::single(), &window).unwrap();
/// let reader = DirectReader::new(&map, &SourceProfile::uniform(0.05).unwrap());
/// // A uniform disk centred on a point lens: sqrt(1 + 4/rho^2) (Witt & Mao 1994).
/// let a = reader.read(0.0, 0.0).unwrap();
/// assert!((a / (1.0f64 + 4.0 / 0.0025).sqrt() - 1.0).abs() < 0.01);
/// assert!(reader.read(0.19, 0.0).is_none()); // the disk sticks out of the map
/// ```
#[derive(Debug, Clone)]
pub struct DirectReader<'a> {
    map: &'a MagnificationMap,
    disks: Vec<(f64, f64)>,
}

impl<'a> DirectReader<'a> {
    /// A reader of `map` for the source `profile` (`rho > 0`).
    pub fn new(map: &'a MagnificationMap, profile: &SourceProfile) -> Self {
        DirectReader {
            map,
            disks: disks_in_pixels(profile, map.window.pixel_size()),
        }
    }

    /// A reader using `nodes` uniform disks for a limb-darkened profile instead of
    /// [`ld_nodes`] (to measure the quadrature error).
    pub fn with_nodes(map: &'a MagnificationMap, profile: &SourceProfile, nodes: usize) -> Self {
        let d = map.window.pixel_size();
        DirectReader {
            map,
            disks: profile
                .as_uniform_disks(nodes)
                .into_iter()
                .map(|(r, w)| (r / d, w))
                .collect(),
        }
    }

    /// The uniform disks making up the profile, in pixels: `(radius, weight)`.
    pub fn disks(&self) -> &[(f64, f64)] {
        &self.disks
    }

    /// Magnification of the source centred at `(x, y)`; `None` if the source is not entirely
    /// inside the map.
    pub fn read(&self, x: f64, y: f64) -> Option<f64> {
        let w = &self.map.window;
        let (x0, y0) = w.origin();
        let d = w.pixel_size();
        let (u, v) = ((x - x0) / d, (y - y0) / d);
        let data = self
            .map
            .data
            .as_slice()
            .expect("map data are contiguous in standard order");
        let mut total = 0.0;
        for &(r, weight) in &self.disks {
            total += weight * disk_mean(data, w.pixels, u, v, r)?;
        }
        Some(total)
    }
}

/// Bilinear interpolation between grid values at pixel centres, in pixel coordinates `(u, v)`
/// (centre `(i, j)` at `(i + 1/2, j + 1/2)`), using only centres with indices in `[lo, hi]`
/// along both axes; `at(i, j)` gives the value at centre `(i, j)`. `None` outside that square.
pub(crate) fn bilinear(
    at: impl Fn(usize, usize) -> f64,
    lo: usize,
    hi: usize,
    u: f64,
    v: f64,
) -> Option<f64> {
    let (lof, hif) = (lo as f64, hi as f64);
    // Points on the outer centres, give or take round-off in the coordinates, still read.
    let snap = |f: f64| {
        if (f - lof).abs() < 1e-9 {
            lof
        } else if (f - hif).abs() < 1e-9 {
            hif
        } else {
            f
        }
    };
    let (fu, fv) = (snap(u - 0.5), snap(v - 0.5));
    if !(fu >= lof && fv >= lof && fu <= hif && fv <= hif) {
        return None;
    }
    if lo == hi {
        return Some(at(lo, lo));
    }
    // The cell's lower-left centre, clamped so the last row and column of centres still read
    // (fu, fv >= 0 here: truncation is the floor, without a call to libm).
    let i = (fu as usize).min(hi - 1);
    let j = (fv as usize).min(hi - 1);
    let (tx, ty) = (fu - i as f64, fv - j as f64);
    Some(
        (1.0 - ty) * ((1.0 - tx) * at(i, j) + tx * at(i + 1, j))
            + ty * ((1.0 - tx) * at(i, j + 1) + tx * at(i + 1, j + 1)),
    )
}

/// Point-source read of a map by bilinear interpolation between pixel centres (see the module
/// documentation for the smoothing this implies). `None` outside the square of pixel centres.
///
/// ```
/// use causeway::curve::point_read;
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// let window = Window::new((1.0, 0.0), 0.2, 20).unwrap();
/// let map = RayShooting::new(2500.0).build(&LensSystem::single(), &window).unwrap();
/// let a = point_read(&map, 1.0, 0.0).unwrap();
/// assert!((a - 3.0 / 5f64.sqrt()).abs() < 0.01); // Paczynski 1986: A(1) = 3/sqrt(5)
/// ```
pub fn point_read(map: &MagnificationMap, x: f64, y: f64) -> Option<f64> {
    let w = &map.window;
    let (x0, y0) = w.origin();
    let d = w.pixel_size();
    let at = |i: usize, j: usize| map.data[[j, i]] as f64;
    bilinear(at, 0, w.pixels - 1, (x - x0) / d, (y - y0) / d)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::disk_strip_area;

    #[test]
    fn row_strips_match_the_reference_strip_area() {
        // Same closed form, reorganised: must agree to round-off with source::disk_strip_area.
        let r = 3.7;
        for (y0, y1) in [
            (-4.0, -3.0),
            (-1.2, -0.2),
            (-0.5, 0.5),
            (2.9, 3.9),
            (3.5, 4.5),
        ] {
            let strips = RowStrips::new(y0, y1, r);
            for k in -50..=50 {
                let x = k as f64 * 0.1;
                let (a, b) = (strips.area(x), disk_strip_area(x, y0, y1, r));
                assert!((a - b).abs() < 1e-13, "x {x} row ({y0}, {y1}): {a} vs {b}");
            }
        }
    }
}
