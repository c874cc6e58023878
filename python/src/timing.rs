//! Timing entry points for the bench script: the same batch as the public calls, run and timed
//! inside Rust (no Python objects touched), so that the binding's overhead can be measured.

use crate::convert::{pair, with_threads, Floats};
use crate::lens::{point_magnifications, sources, Lens};
use crate::light::{evaluation, profile, sample_map};
use crate::map::Map;
use pyo3::prelude::*;
use std::time::Instant;

/// _time_magnification(lens, x, y, threads=None) -> seconds: the library's batch of
/// point-source magnifications at (x, y), timed inside Rust (the inputs prepared beforehand).
#[pyfunction]
#[pyo3(signature = (lens, x, y, threads=None))]
pub fn _time_magnification(
    py: Python<'_>,
    lens: &Lens,
    x: Floats,
    y: Floats,
    threads: Option<usize>,
) -> PyResult<f64> {
    let (zeta, _) = sources(&x, &y)?;
    py.detach(|| {
        with_threads(threads, || {
            let start = Instant::now();
            let a = point_magnifications(&lens.inner, &zeta)?;
            std::hint::black_box(a);
            Ok(start.elapsed().as_secs_f64())
        })
    })
}

/// _time_map_magnification(map, x, y, rho, ld=None, evaluation="auto", threads=None)
/// -> seconds: the finite-source reads of `map_magnification`, timed inside Rust.
#[pyfunction]
#[pyo3(signature = (map, x, y, rho, ld=None, evaluation="auto", threads=None))]
#[allow(clippy::too_many_arguments)]
pub fn _time_map_magnification(
    py: Python<'_>,
    map: &Map,
    x: Floats,
    y: Floats,
    rho: f64,
    ld: Option<f64>,
    evaluation: &str,
    threads: Option<usize>,
) -> PyResult<f64> {
    let profile = profile(rho, ld, None)?;
    let evaluation = self::evaluation(evaluation)?;
    let (xs, ys, _) = pair(&x, &y, ("x", "y"))?;
    let points: Vec<(f64, f64)> = xs.into_iter().zip(ys).collect();
    py.detach(|| {
        with_threads(threads, || {
            let start = Instant::now();
            let out = sample_map(&map.inner, profile, &points, 1e-3, evaluation, false)?;
            std::hint::black_box(out);
            Ok(start.elapsed().as_secs_f64())
        })
    })
}
