//! Exact references for map pixels: the pixel mean of the point-source magnification by
//! Gauss-Legendre quadrature through the image solver.

use super::Window;
use crate::error::Result;
use crate::solve::ImageSolver;
use crate::source::gauss_legendre;
use num_complex::Complex64;

/// Mean point-source magnification over pixel (ix, iy) by a k x k Gauss-Legendre rule.
///
/// ```
/// use causeway::{lens::LensSystem, map::{reference::pixel_mean, Window}, solve::ImageSolver};
/// let mut solver = ImageSolver::new(&LensSystem::single()).unwrap();
/// let w = Window::new((1.0, 0.0), 0.01, 1).unwrap();
/// // A tiny pixel at u = 1: close to Paczynski's A(1) = 3/sqrt(5).
/// assert!((pixel_mean(&mut solver, &w, 0, 0, 4).unwrap() - 3.0 / 5f64.sqrt()).abs() < 1e-4);
/// ```
pub fn pixel_mean(
    solver: &mut ImageSolver,
    window: &Window,
    ix: usize,
    iy: usize,
    k: usize,
) -> Result<f64> {
    let (cx, cy) = window.pixel_center(ix, iy);
    let half = 0.5 * window.pixel_size();
    let rule = gauss_legendre(k);
    let mut sum = 0.0;
    for &(a, wa) in &rule {
        for &(b, wb) in &rule {
            sum += wa * wb * solver.magnification(Complex64::new(cx + half * a, cy + half * b))?;
        }
    }
    Ok(sum / 4.0)
}

/// The 8 x 8 pixel mean where the magnification is smooth over the pixel (the 4 x 4 and 8 x 8
/// rules agree to 1e-7 relative: no caustic nearby), else `None`.
pub fn smooth_pixel_mean(
    solver: &mut ImageSolver,
    window: &Window,
    ix: usize,
    iy: usize,
) -> Result<Option<f64>> {
    let fine = pixel_mean(solver, window, ix, iy, 8)?;
    let coarse = pixel_mean(solver, window, ix, iy, 4)?;
    Ok(((fine - coarse).abs() < 1e-7 * fine).then_some(fine))
}

/// `count` pixels of a window drawn by a seeded 64-bit LCG (Knuth's MMIX constants), for
/// spot checks that must be the same on every run.
///
/// ```
/// let w = causeway::map::Window::new((0.0, 0.0), 1.0, 100).unwrap();
/// let a = causeway::map::reference::sample_pixels(&w, 5, 1);
/// assert_eq!(a, causeway::map::reference::sample_pixels(&w, 5, 1));
/// assert!(a.iter().all(|&(x, y)| x < 100 && y < 100));
/// ```
pub fn sample_pixels(window: &Window, count: usize, seed: u64) -> Vec<(usize, usize)> {
    let n = window.pixels;
    let mut state = seed;
    (0..count)
        .map(|_| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let v = (state >> 20) as usize;
            (v % n, (v / n) % n)
        })
        .collect()
}
