//! Point-source images: the complex lens-equation polynomial of degree N^2 + 1, its roots,
//! false-root rejection, and the magnification.
//!
//! - [`polynomial`]: small fixed-size complex polynomials; the lens-equation polynomial (Witt
//!   1990), general and binary, and the parts of the critical-curve polynomial;
//! - [`roots`]: the Aberth-Ehrlich simultaneous root finder;
//! - [`derivatives`]: the magnification's Laplacian over the source plane, in closed form from
//!   the images;
//! - [`images`]: [`ImageSolver`], which turns roots into images (polishing on the lens equation,
//!   residual check, counting and parity rules).
//!
//! The free functions here are the convenient entry points; a hot loop should keep an
//! [`ImageSolver`] and call it repeatedly (it reuses its workspace and warm-starts from the
//! previous roots).
//!
//! ```
//! use causeway::lens::LensSystem;
//! use causeway::solve;
//! use num_complex::Complex64;
//! // Point lens: Paczynski 1986, A(1) = 3/sqrt(5).
//! let a = solve::magnification(&LensSystem::single(), Complex64::new(1.0, 0.0)).unwrap();
//! assert!((a - 3.0 / 5f64.sqrt()).abs() < 1e-15);
//! let lens = LensSystem::binary(1.2, 1e-3).unwrap();
//! let sources = [Complex64::new(0.1, 0.2), Complex64::new(-0.5, 0.05)];
//! let many = solve::magnifications(&lens, &sources).unwrap();
//! assert_eq!(many[1], solve::magnification(&lens, sources[1]).unwrap());
//! ```

pub mod derivatives;
pub mod images;
pub mod polynomial;
pub mod roots;

pub use images::{Image, ImageSolver, WarmStart, LOOSE_TOLERANCE, MAX_LENSES, RESIDUAL_TOLERANCE};

use crate::error::Result;
use crate::lens::LensSystem;
use num_complex::Complex64;
use rayon::prelude::*;

/// Sources per parallel work item in the batch functions. Each item starts from fresh initial
/// guesses and then warm-starts along its sources, so results do not depend on the thread count.
pub const BATCH_CHUNK: usize = 256;

/// The images of a point source at `zeta` (sorted by x then y).
pub fn images(lens: &LensSystem, zeta: Complex64) -> Result<Vec<Image>> {
    Ok(ImageSolver::new(lens)?.images(zeta)?.to_vec())
}

/// Point-source magnification at `zeta`.
pub fn magnification(lens: &LensSystem, zeta: Complex64) -> Result<f64> {
    ImageSolver::new(lens)?.magnification(zeta)
}

/// Point-source magnifications of many sources, in parallel (rayon's global pool), in input
/// order. Bit-identical whatever the number of threads.
pub fn magnifications(lens: &LensSystem, sources: &[Complex64]) -> Result<Vec<f64>> {
    let solver = ImageSolver::new(lens)?;
    let mut out = vec![0.0; sources.len()];
    out.par_chunks_mut(BATCH_CHUNK)
        .zip(sources.par_chunks(BATCH_CHUNK))
        .try_for_each(|(out, sources)| {
            let mut s = solver.clone();
            for (o, &z) in out.iter_mut().zip(sources) {
                *o = s.magnification(z)?;
            }
            Ok(())
        })?;
    Ok(out)
}

/// The images of many sources, in parallel, in input order (as [`magnifications`]).
pub fn images_batch(lens: &LensSystem, sources: &[Complex64]) -> Result<Vec<Vec<Image>>> {
    let solver = ImageSolver::new(lens)?;
    sources
        .par_chunks(BATCH_CHUNK)
        .map(|chunk| {
            let mut s = solver.clone();
            chunk
                .iter()
                .map(|&z| s.images(z).map(|i| i.to_vec()))
                .collect::<Result<Vec<_>>>()
        })
        .collect::<Result<Vec<_>>>()
        .map(|v| v.into_iter().flatten().collect())
}
