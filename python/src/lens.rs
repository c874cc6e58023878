//! Lenses, point-source images and magnifications, critical curves, caustics and topology.

use crate::convert::{bad, chunked, ok, pair, shaped, values, Array, Floats};
use causeway::lens::LensSystem;
use causeway::solve;
use num_complex::Complex64;
use numpy::PyArray1;
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// A system of point lenses (positions in Einstein radii of the total mass, masses normalised
/// to sum 1).
///
///     lens = causeway.Lens.binary(1.25, 2e-3)          # s, q = m2/m1
///     lens = causeway.Lens([-0.5, 0.5], [0, 0], [1, 1])  # x, y, mass (relative)
///     lens.x, lens.y, lens.mass                          # float64 arrays, shape (N,)
#[pyclass(name = "Lens", module = "causeway", frozen)]
#[derive(Clone)]
pub struct Lens {
    pub inner: LensSystem,
}

#[pymethods]
impl Lens {
    /// Lens(x, y, mass): point masses at (x[i], y[i]) with relative masses mass[i] > 0.
    #[new]
    fn new(x: Floats, y: Floats, mass: Floats) -> PyResult<Self> {
        let (xs, ys, shape) = pair(&x, &y, ("x", "y"))?;
        let (ms, m_shape) = values(&mass);
        if shape.len() != 1 || m_shape != shape {
            return Err(bad(
                "mass",
                format!("x, y and mass must be 1-D of one length, got {shape:?}, {m_shape:?}"),
            ));
        }
        for (name, v) in [("x", &xs), ("y", &ys), ("mass", &ms)] {
            let positive = name == "mass";
            if let Some(i) = v
                .iter()
                .position(|a| !a.is_finite() || (positive && *a <= 0.0))
            {
                let need = if positive { "finite and > 0" } else { "finite" };
                return Err(bad(name, format!("[{i}] must be {need}, got {}", v[i])));
            }
        }
        let lenses: Vec<(f64, f64, f64)> = (0..xs.len()).map(|i| (xs[i], ys[i], ms[i])).collect();
        let inner = LensSystem::new(&lenses).map_err(|e| bad("x, y", e))?;
        Ok(Lens { inner })
    }

    /// Lens.binary(s, q): m1 = 1/(1+q) at (-s q/(1+q), 0), m2 = q/(1+q) at (s/(1+q), 0).
    #[staticmethod]
    fn binary(s: f64, q: f64) -> PyResult<Self> {
        check_binary(s, q)?;
        Ok(Lens {
            inner: ok(LensSystem::binary(s, q))?,
        })
    }

    /// Lens.single(): one unit mass at the origin.
    #[staticmethod]
    fn single() -> Self {
        Lens {
            inner: LensSystem::single(),
        }
    }

    /// Lens.read_csv(path): a lens file with header `x,y,mass`.
    #[staticmethod]
    fn read_csv(path: std::path::PathBuf) -> PyResult<Self> {
        Ok(Lens {
            inner: ok(LensSystem::read_csv(&path))?,
        })
    }

    /// Lens x positions, shape (N,).
    #[getter]
    fn x<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_iter(py, self.inner.lenses().iter().map(|l| l.position.re))
    }

    /// Lens y positions, shape (N,).
    #[getter]
    fn y<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_iter(py, self.inner.lenses().iter().map(|l| l.position.im))
    }

    /// Normalised masses, shape (N,).
    #[getter]
    fn mass<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_iter(py, self.inner.lenses().iter().map(|l| l.mass))
    }

    /// (s, q) of a binary made by `Lens.binary`, else None.
    #[getter]
    fn binary_parameters(&self) -> Option<(f64, f64)> {
        self.inner.binary_parameters()
    }

    fn __len__(&self) -> usize {
        self.inner.len()
    }

    fn __repr__(&self) -> String {
        match self.inner.binary_parameters() {
            Some((s, q)) => format!("Lens.binary({s}, {q})"),
            None => format!("Lens(<{} point masses>)", self.inner.len()),
        }
    }

    /// source_position(x, y) -> (xs, ys): the lens equation at image-plane points (any shape).
    fn source_position<'py>(
        &self,
        py: Python<'py>,
        x: Floats,
        y: Floats,
    ) -> PyResult<(Array<'py, f64>, Array<'py, f64>)> {
        let (xs, ys, shape) = pair(&x, &y, ("x", "y"))?;
        let zeta: Vec<Complex64> = xs
            .iter()
            .zip(&ys)
            .map(|(&a, &b)| self.inner.source_position(Complex64::new(a, b)))
            .collect();
        Ok((
            shaped(py, zeta.iter().map(|z| z.re).collect(), &shape)?,
            shaped(py, zeta.iter().map(|z| z.im).collect(), &shape)?,
        ))
    }
}

/// `ValueError` naming `s` or `q` unless both are finite and > 0.
pub fn check_binary(s: f64, q: f64) -> PyResult<()> {
    for (name, v) in [("s", s), ("q", q)] {
        if !(v.is_finite() && v > 0.0) {
            return Err(bad(name, format!("must be finite and > 0, got {v}")));
        }
    }
    Ok(())
}

/// Source positions of two array-likes of one shape, as complex numbers.
pub fn sources(x: &Floats, y: &Floats) -> PyResult<(Vec<Complex64>, Vec<usize>)> {
    let (xs, ys, shape) = pair(x, y, ("x", "y"))?;
    Ok((
        xs.iter()
            .zip(&ys)
            .map(|(&a, &b)| Complex64::new(a, b))
            .collect(),
        shape,
    ))
}

/// Point-source magnifications of many sources (the library's batch call).
pub fn point_magnifications(lens: &LensSystem, zeta: &[Complex64]) -> causeway::Result<Vec<f64>> {
    solve::magnifications(lens, zeta)
}

/// magnification(lens, x, y, threads=None) -> A: point-source magnification at source
/// positions (x, y) in Einstein radii (arrays of one shape; A has that shape, float64). Exact
/// images of the lens-equation polynomial (up to 4 lenses).
#[pyfunction]
#[pyo3(signature = (lens, x, y, threads=None))]
pub fn magnification<'py>(
    py: Python<'py>,
    lens: &Lens,
    x: Floats,
    y: Floats,
    threads: Option<usize>,
) -> PyResult<Array<'py, f64>> {
    let (zeta, shape) = sources(&x, &y)?;
    let out = chunked(py, zeta.len(), threads, |r| {
        point_magnifications(&lens.inner, &zeta[r])
    })?;
    shaped(py, out, &shape)
}

/// images(lens, x, y, threads=None) -> dict: the point-source images of each source.
///
/// Keys: "magnification" (float64, shape of x), "count" (int32, shape of x), and one row per
/// image in flat arrays "point" (int64 index into the flattened x), "image_x", "image_y"
/// (float64, lens plane), "parity" (int8, +1 or -1) and "image_magnification" (float64).
#[pyfunction]
#[pyo3(signature = (lens, x, y, threads=None))]
pub fn images<'py>(
    py: Python<'py>,
    lens: &Lens,
    x: Floats,
    y: Floats,
    threads: Option<usize>,
) -> PyResult<Bound<'py, PyDict>> {
    let (zeta, shape) = sources(&x, &y)?;
    let found = chunked(py, zeta.len(), threads, |r| {
        solve::images_batch(&lens.inner, &zeta[r])
    })?;
    let total: Vec<f64> = found
        .iter()
        .map(|imgs| imgs.iter().map(|i| i.magnification).sum())
        .collect();
    let count: Vec<i32> = found.iter().map(|imgs| imgs.len() as i32).collect();
    let rows = || {
        found
            .iter()
            .enumerate()
            .flat_map(|(k, v)| v.iter().map(move |i| (k, i)))
    };
    let d = PyDict::new(py);
    d.set_item("magnification", shaped(py, total, &shape)?)?;
    d.set_item("count", shaped(py, count, &shape)?)?;
    d.set_item(
        "point",
        PyArray1::from_iter(py, rows().map(|(k, _)| k as i64)),
    )?;
    d.set_item(
        "image_x",
        PyArray1::from_iter(py, rows().map(|(_, i)| i.position.re)),
    )?;
    d.set_item(
        "image_y",
        PyArray1::from_iter(py, rows().map(|(_, i)| i.position.im)),
    )?;
    d.set_item(
        "parity",
        PyArray1::from_iter(py, rows().map(|(_, i)| i.parity)),
    )?;
    d.set_item(
        "image_magnification",
        PyArray1::from_iter(py, rows().map(|(_, i)| i.magnification)),
    )?;
    Ok(d)
}

/// caustics(lens, critical=False) -> list of (n, 2) float64 arrays: each caustic (or, with
/// critical=True, each critical curve) as a closed polyline of (x, y) points in Einstein radii.
#[pyfunction]
#[pyo3(signature = (lens, critical=false))]
pub fn caustics<'py>(
    py: Python<'py>,
    lens: &Lens,
    critical: bool,
) -> PyResult<Vec<Array<'py, f64>>> {
    let curves = py.detach(|| causeway::caustics::curves(&lens.inner));
    ok(curves)?
        .iter()
        .map(|c| {
            let pts = if critical { &c.critical } else { &c.caustic };
            let flat: Vec<f64> = pts.iter().flat_map(|z| [z.re, z.im]).collect();
            shaped(py, flat, &[pts.len(), 2])
        })
        .collect()
}

/// topology(lens) -> "close" | "intermediate" | "wide": the caustic topology of a binary.
#[pyfunction]
pub fn topology(py: Python<'_>, lens: &Lens) -> PyResult<String> {
    let t = py.detach(|| causeway::caustics::topology(&lens.inner));
    Ok(ok(t)?.to_string())
}
