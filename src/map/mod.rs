//! Magnification maps: the window geometry, the pixel data and how the map was made.
//!
//! A pixel holds the **mean** magnification over its area. Data are stored as an
//! `ndarray::Array2<f32>` indexed `[[iy, ix]]`: the first index runs along y, the second along x,
//! and `[[0, 0]]` is the lower-left pixel (smallest x and y), the order FITS uses.

pub mod certificate;
pub mod fits;
pub mod reference;
pub mod render;
pub mod tiles;

pub use fits::{read_fits, read_refined, write_fits, write_refined};
pub use render::{render_png, Overlay};
pub use tiles::{RefinedMap, Refinement};

use crate::error::{Error, Result};
use crate::lens::LensSystem;
use ndarray::Array2;

/// A square source-plane window: centre, side length and pixels per side.
///
/// ```
/// use causeway::map::Window;
/// let w = Window::new((0.0, 0.0), 2.0, 4).unwrap();
/// assert_eq!(w.pixel_size(), 0.5);
/// assert_eq!(w.pixel_center(0, 0), (-0.75, -0.75));
/// assert_eq!(w.pixel_of(0.9, -0.1), Some((3, 1)));
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Window {
    /// Centre (x, y) in Einstein radii.
    pub center: (f64, f64),
    /// Side length in Einstein radii.
    pub width: f64,
    /// Pixels along each side.
    pub pixels: usize,
}

/// How far from the origin a window may reach, in Einstein radii: past it the lenses are a
/// point and the map is flat to far below any noise.
pub const MAX_REACH: f64 = 1e6;

/// The smallest pixel side relative to the window's reach: below it neighbouring pixels'
/// coordinates differ by only a few units of the last place of an `f64`.
pub const MIN_PIXEL: f64 = 1e-12;

impl Window {
    /// Checks and builds a window.
    pub fn new(center: (f64, f64), width: f64, pixels: usize) -> Result<Self> {
        if !(center.0.is_finite() && center.1.is_finite()) {
            return Err(Error::input(format!(
                "--center: must be finite, got {},{}",
                center.0, center.1
            )));
        }
        if !width.is_finite() || width <= 0.0 {
            return Err(Error::input(format!(
                "--width: must be finite and > 0, got {width}"
            )));
        }
        if pixels == 0 {
            return Err(Error::input("--pixels: must be at least 1"));
        }
        let reach = center.0.abs().max(center.1.abs());
        if reach > MAX_REACH || width > MAX_REACH {
            return Err(Error::input(format!(
                "--center {:e},{:e} --width {width:e}: the window must lie within {MAX_REACH:e} \
                 Einstein radii of the origin",
                center.0, center.1
            )));
        }
        if width / (pixels as f64) < MIN_PIXEL * reach.max(width).max(1.0) {
            return Err(Error::input(format!(
                "--width {width:e} --pixels {pixels}: pixels of {:e} Einstein radii are below \
                 the resolution of the coordinates (at least {MIN_PIXEL:e} of the window's reach)",
                width / pixels as f64
            )));
        }
        Ok(Window {
            center,
            width,
            pixels,
        })
    }

    /// Side of one pixel.
    pub fn pixel_size(&self) -> f64 {
        self.width / self.pixels as f64
    }

    /// Lower-left corner (smallest x and y).
    pub fn origin(&self) -> (f64, f64) {
        (
            self.center.0 - 0.5 * self.width,
            self.center.1 - 0.5 * self.width,
        )
    }

    /// Centre of pixel (ix, iy).
    pub fn pixel_center(&self, ix: usize, iy: usize) -> (f64, f64) {
        let (x0, y0) = self.origin();
        let d = self.pixel_size();
        (x0 + (ix as f64 + 0.5) * d, y0 + (iy as f64 + 0.5) * d)
    }

    /// The pixel (ix, iy) containing the point, if inside the window.
    pub fn pixel_of(&self, x: f64, y: f64) -> Option<(usize, usize)> {
        let (x0, y0) = self.origin();
        let n = self.pixels as f64;
        let fx = (x - x0) / self.pixel_size();
        let fy = (y - y0) / self.pixel_size();
        (fx >= 0.0 && fx < n && fy >= 0.0 && fy < n).then_some((fx as usize, fy as usize))
    }

    /// Whether the point lies in the window (closed on the lower edges, open on the upper).
    pub fn contains(&self, x: f64, y: f64) -> bool {
        self.pixel_of(x, y).is_some()
    }

    /// Number of pixels.
    pub fn pixel_count(&self) -> usize {
        self.pixels * self.pixels
    }
}

/// How a map was made: everything needed to make it again, and what it cost.
#[derive(Debug, Clone, PartialEq)]
pub struct Provenance {
    /// The lens configuration.
    pub lens: LensSystem,
    /// Engine name (`rays`, ...).
    pub engine: String,
    /// Engine density: rays (or cells) per unlensed pixel area.
    pub density: f64,
    /// Rays shot in total.
    pub rays_shot: u64,
    /// Rays that landed in the window.
    pub rays_landed: u64,
    /// Version of causeway that built the map.
    pub version: String,
    /// Build time, UTC, ISO 8601 (`YYYY-MM-DDThh:mm:ss`).
    pub build_time: String,
    /// Wall-clock build duration in seconds.
    pub build_seconds: f64,
    /// The measured accuracy ([`certificate`]); `None` for maps made without one.
    pub certificate: Option<certificate::Certificate>,
}

/// A magnification map: window, pixel data and provenance.
#[derive(Debug, Clone, PartialEq)]
pub struct MagnificationMap {
    /// Source-plane geometry.
    pub window: Window,
    /// Mean magnification per pixel, `[[iy, ix]]`, lower-left first.
    pub data: Array2<f32>,
    /// How it was made.
    pub provenance: Provenance,
}

impl MagnificationMap {
    /// Mean of all pixels (the mean magnification over the window), summed in f64.
    pub fn mean(&self) -> f64 {
        self.data.iter().map(|&v| v as f64).sum::<f64>() / self.data.len() as f64
    }
}

/// The current UTC time as `YYYY-MM-DDThh:mm:ss`.
///
/// ```
/// let t = causeway::map::utc_now();
/// assert_eq!(t.len(), 19);
/// assert_eq!(&t[10..11], "T");
/// ```
pub fn utc_now() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs() as i64)
        .unwrap_or(0);
    let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    // Civil date from days since 1970-01-01 (H. Hinnant's algorithm, from memory).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}",
        rem / 3600,
        (rem / 60) % 60,
        rem % 60
    )
}
