//! Magnification maps: building, the pixel data as a numpy view, window, provenance, FITS.

use crate::convert::{bad, finite, interruptible, ok, with_threads};
use crate::lens::Lens;
use causeway::engine;
use causeway::map::certificate::ErrorSummary;
use causeway::map::{read_fits, write_fits, MagnificationMap, Window};
use numpy::PyArray2;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use std::path::PathBuf;

/// A magnification map: the mean magnification of each pixel of a square source-plane window.
///
///     m = causeway.build_map(causeway.Lens.binary(1.25, 2e-3), (0.45, 0.0), 0.1, 500)
///     m.data            # float32 view, shape (pixels, pixels), m.data[iy, ix], lower-left first
///     m.extent          # (x0, x1, y0, y1) in Einstein radii, for imshow(origin="lower")
///     m.save("zoom.fits"); causeway.Map.load("zoom.fits")
#[pyclass(name = "Map", module = "causeway", frozen)]
pub struct Map {
    pub inner: MagnificationMap,
}

#[pymethods]
impl Map {
    /// Map.load(path) -> Map: reads a FITS map written by causeway (OSError for an unreadable
    /// file, ValueError for a malformed one).
    #[staticmethod]
    fn load(py: Python<'_>, path: PathBuf) -> PyResult<Self> {
        let map = py.detach(|| read_fits(&path));
        Ok(Map { inner: ok(map)? })
    }

    /// save(path): writes the map as FITS (float32 primary image, WCS, provenance, CHECKSUM
    /// and DATASUM), atomically.
    fn save(&self, py: Python<'_>, path: PathBuf) -> PyResult<()> {
        let done = py.detach(|| write_fits(&self.inner, &path));
        ok(done)
    }

    /// The pixel data, a read-only float32 view of shape (pixels, pixels) indexed [iy, ix],
    /// row 0 at the smallest y (as FITS stores it): imshow(m.data, origin="lower").
    #[getter]
    fn data<'py>(slf: Bound<'py, Self>) -> PyResult<Bound<'py, PyArray2<f32>>> {
        let data = &slf.get().inner.data;
        // SAFETY: the map is frozen and its data never reallocated while `slf` lives; the view
        // keeps `slf` alive.
        let view = unsafe { PyArray2::borrow_from_array(data, slf.clone().into_any()) };
        let kwargs = PyDict::new(slf.py());
        kwargs.set_item("write", false)?;
        view.call_method("setflags", (), Some(&kwargs))?;
        Ok(view)
    }

    /// Window centre (x, y), Einstein radii.
    #[getter]
    fn center(&self) -> (f64, f64) {
        self.inner.window.center
    }

    /// Window side, Einstein radii.
    #[getter]
    fn width(&self) -> f64 {
        self.inner.window.width
    }

    /// Pixels per side.
    #[getter]
    fn pixels(&self) -> usize {
        self.inner.window.pixels
    }

    /// Pixel side, Einstein radii.
    #[getter]
    fn pixel_size(&self) -> f64 {
        self.inner.window.pixel_size()
    }

    /// (x0, x1, y0, y1): the window's edges, Einstein radii.
    #[getter]
    fn extent(&self) -> (f64, f64, f64, f64) {
        let (x0, y0) = self.inner.window.origin();
        let w = self.inner.window.width;
        (x0, x0 + w, y0, y0 + w)
    }

    /// The lens the map was built for.
    #[getter]
    fn lens(&self) -> Lens {
        Lens {
            inner: self.inner.provenance.lens.clone(),
        }
    }

    /// How the map was made: dict with "engine", "density", "rays_shot", "rays_landed",
    /// "version", "build_time" (UTC), "build_seconds", and "certificate": the measured
    /// relative pixel errors (dict with "seed", "away" and "near": each (count, median, 99th
    /// percentile) or None when no pixel of the kind was measured, "skipped", "seconds"; None for a map
    /// built before certificates).
    #[getter]
    fn provenance<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
        let p = &self.inner.provenance;
        let d = PyDict::new(py);
        d.set_item("engine", &p.engine)?;
        d.set_item("density", p.density)?;
        d.set_item("rays_shot", p.rays_shot)?;
        d.set_item("rays_landed", p.rays_landed)?;
        d.set_item("version", &p.version)?;
        d.set_item("build_time", &p.build_time)?;
        d.set_item("build_seconds", p.build_seconds)?;
        let certificate = match &p.certificate {
            Some(c) => {
                let cd = PyDict::new(py);
                cd.set_item("seed", c.seed)?;
                let summary = |e: &Option<ErrorSummary>| e.map(|e| (e.count, e.median, e.p99));
                cd.set_item("away", summary(&c.away))?;
                cd.set_item("near", summary(&c.near))?;
                cd.set_item("skipped", c.skipped)?;
                cd.set_item("seconds", c.seconds)?;
                Some(cd)
            }
            None => None,
        };
        d.set_item("certificate", certificate)?;
        Ok(d)
    }

    /// mean() -> float: the mean magnification over the window.
    fn mean(&self) -> f64 {
        self.inner.mean()
    }

    fn __repr__(&self) -> String {
        let w = &self.inner.window;
        format!(
            "<causeway.Map {0}x{0} centre ({1}, {2}) width {3} engine {4}>",
            w.pixels, w.center.0, w.center.1, w.width, self.inner.provenance.engine
        )
    }
}

/// build_map(lens, center, width, pixels, rays=None, engine=None, accuracy=None,
/// threads=None, max_memory=None) -> Map
///
/// Builds a map of the square window of side `width` (Einstein radii) centred on `center`
/// (x, y), `pixels` per side, as `causeway map` does: without `rays`, the engine ("polygon"
/// unless `engine="rays"`) and its density are chosen for `accuracy`, a median relative pixel
/// error (default 1e-3); `rays` sets the density itself (rays, or image-plane cells for
/// engine="polygon", per unlensed pixel area; engine "rays" unless named). `max_memory` in
/// bytes (default half the machine's memory). The pixel data are the same whatever the thread
/// count; Ctrl-C stops the build within a fraction of a second (KeyboardInterrupt).
#[pyfunction]
#[pyo3(signature = (lens, center, width, pixels, rays=None, engine=None, accuracy=None, threads=None, max_memory=None))]
#[allow(clippy::too_many_arguments)]
pub fn build_map(
    py: Python<'_>,
    lens: &Lens,
    center: (f64, f64),
    width: f64,
    pixels: usize,
    rays: Option<f64>,
    engine: Option<&str>,
    accuracy: Option<f64>,
    threads: Option<usize>,
    max_memory: Option<u64>,
) -> PyResult<Map> {
    finite("center", center.0)?;
    finite("center", center.1)?;
    if !(width.is_finite() && width > 0.0) {
        return Err(bad("width", format!("must be finite and > 0, got {width}")));
    }
    if pixels == 0 {
        return Err(bad("pixels", "must be at least 1"));
    }
    if let Some(rays) = rays.filter(|r| !(r.is_finite() && *r > 0.0)) {
        return Err(bad("rays", format!("must be finite and > 0, got {rays}")));
    }
    if rays.is_some() && accuracy.is_some() {
        return Err(bad("accuracy", "give rays or accuracy, not both"));
    }
    let window = ok(Window::new(center, width, pixels))?;
    let target = accuracy.unwrap_or(engine::accuracy::DEFAULT_ACCURACY);
    if !(target.is_finite() && target > 0.0) {
        return Err(bad(
            "accuracy",
            format!("must be finite and > 0, got {target}"),
        ));
    }
    if let Some(name) = engine.filter(|n| !engine::ENGINE_NAMES.contains(n)) {
        return Err(bad(
            "engine",
            format!("must be one of {:?}, got {name:?}", engine::ENGINE_NAMES),
        ));
    }
    let (engine, _) = ok(engine::accuracy::engine_for(
        engine,
        rays,
        &lens.inner,
        &window,
        target,
        accuracy.is_some(),
    ))?;
    let limit = max_memory.unwrap_or_else(engine::default_memory_limit);
    engine::check_memory(engine.as_ref(), &lens.inner, &window, limit).map_err(|need| {
        bad(
            "pixels",
            format!(
                "{pixels}: the build needs about {}, more than the allowed {} (max_memory)",
                engine::gib(need),
                engine::gib(limit)
            ),
        )
    })?;
    let map = interruptible(py, |stop| {
        with_threads(threads, || {
            engine.build_with_progress(&lens.inner, &window, stop)
        })
    })?;
    Ok(Map { inner: map })
}
