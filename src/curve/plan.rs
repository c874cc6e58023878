//! The map a curve needs: the window over the part of the path the off-map continuation cannot
//! serve (near caustics), at a resolution set by the source size.

use super::{small_source, PointMagnification, MIN_RHO_PIXELS};
use crate::engine::accuracy::engine_for;
use crate::engine::Engine;
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::Window;
use crate::source::SourceProfile;
use rayon::prelude::*;

/// Pixels across a point-source (`rho = 0`) map.
pub const POINT_SOURCE_PIXELS: usize = 1000;

/// The square window holding every point of `points` where the small-source expansion is not
/// accurate to `tol` (or cannot be computed), with room for the source and the pre-convolution
/// margin, at `pixels_per_rho` pixels per source radius; `None` when no point needs a map.
///
/// ```
/// use causeway::curve::plan_window;
/// use causeway::{lens::LensSystem, source::SourceProfile};
/// let src = SourceProfile::uniform(0.01).unwrap();
/// let points: Vec<(f64, f64)> = (0..=100).map(|k| (-1.0 + 0.02 * k as f64, 0.0)).collect();
/// let w = plan_window(&LensSystem::single(), &src, &points, 1e-4, 10.0).unwrap().unwrap();
/// // Only the points within a few rho of the lens need the map.
/// assert!(w.width < 0.2 && w.center.0.abs() < 0.05);
/// assert!((w.pixel_size() - 0.001).abs() < 1e-4);
/// ```
pub fn plan_window(
    lens: &dyn PointMagnification,
    profile: &SourceProfile,
    points: &[(f64, f64)],
    tol: f64,
    pixels_per_rho: f64,
) -> Result<Option<Window>> {
    if !(pixels_per_rho.is_finite() && pixels_per_rho >= MIN_RHO_PIXELS) {
        return Err(Error::input(format!(
            "--pixels-per-rho: must be at least {MIN_RHO_PIXELS}, got {pixels_per_rho}"
        )));
    }
    let needs: Vec<bool> = points
        .par_iter()
        .map(|&(x, y)| match small_source(lens, profile, x, y) {
            Ok(e) => !e.accurate(tol),
            Err(_) => true,
        })
        .collect();
    let chosen: Vec<(f64, f64)> = points
        .iter()
        .zip(&needs)
        .filter(|(_, &n)| n)
        .map(|(&p, _)| p)
        .collect();
    if chosen.is_empty() {
        return Ok(None);
    }
    let (mut x0, mut x1, mut y0, mut y1) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for &(x, y) in &chosen {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let extent = (x1 - x0).max(y1 - y0);
    let (pixel, pixels) = if profile.rho > 0.0 {
        let pixel = profile.rho / pixels_per_rho;
        // The source, the convolution margin and one pixel of slack on each side.
        let side = extent + 2.0 * (profile.rho + 3.0 * pixel);
        (pixel, (side / pixel).ceil() as usize)
    } else {
        let side = extent.max(1e-3) * 1.02;
        (side / POINT_SOURCE_PIXELS as f64, POINT_SOURCE_PIXELS)
    };
    let window = Window::new(
        (0.5 * (x0 + x1), 0.5 * (y0 + y1)),
        pixel * pixels as f64,
        pixels,
    )?;
    Ok(Some(window))
}

/// The engine of the map a curve builds for itself: ray shooting at `rays` per pixel when
/// given, else the engine and density [`crate::engine::accuracy::engine_for`] picks for a
/// median pixel error of `target` (the finest polygon density where that is out of reach).
///
/// ```
/// use causeway::{curve::map_engine, lens::LensSystem, map::Window};
/// let lens = LensSystem::binary(1.25, 2e-3).unwrap();
/// let window = Window::new((0.45, 0.0), 0.05, 500).unwrap();
/// assert_eq!(map_engine(&lens, &window, None, 1e-3).unwrap().name(), "polygon");
/// assert_eq!(map_engine(&lens, &window, Some(400.0), 1e-3).unwrap().name(), "rays");
/// ```
pub fn map_engine(
    lens: &LensSystem,
    window: &Window,
    rays: Option<f64>,
    target: f64,
) -> Result<Box<dyn Engine>> {
    let (engine, _) = engine_for(None, rays, lens, window, target, false)?;
    Ok(engine)
}
