//! The map store and libraries: open, create, list, nearest lookups, grid builds with progress.

use crate::convert::{bad, ok, with_threads};
use crate::map::Map;
use causeway::store::library::{self, LibrarySpec};
use causeway::store::{Entry, MapKey};
use pyo3::exceptions::PyFileNotFoundError;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use std::path::PathBuf;

/// A folder of maps keyed by their content, with an index by (s, q).
///
///     store = causeway.Store.open("maps")        # an existing store (FileNotFoundError if none)
///     store = causeway.Store.create("maps")      # for building into; created when missing
///     store.entries(); store.nearest(1.3, 3e-3, count=4); store.load(entry["file"])
#[pyclass(name = "Store", module = "causeway", frozen)]
pub struct Store {
    pub inner: causeway::store::Store,
}

/// One index row as a dict: "file", "s", "q" (None unless a binary), "lenses", "center",
/// "width", "pixels", "engine", "density", "rays_shot", "rays_landed", "build_seconds",
/// "build_time".
fn entry<'py>(py: Python<'py>, e: &Entry) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("file", &e.file)?;
    d.set_item("s", e.s)?;
    d.set_item("q", e.q)?;
    d.set_item("lenses", e.lenses)?;
    d.set_item("center", e.center)?;
    d.set_item("width", e.width)?;
    d.set_item("pixels", e.pixels)?;
    d.set_item("engine", &e.engine)?;
    d.set_item("density", e.density)?;
    d.set_item("rays_shot", e.rays_shot)?;
    d.set_item("rays_landed", e.rays_landed)?;
    d.set_item("build_seconds", e.build_seconds)?;
    d.set_item("build_time", &e.build_time)?;
    Ok(d)
}

fn entries<'py>(py: Python<'py>, list: &[Entry]) -> PyResult<Vec<Bound<'py, PyDict>>> {
    list.iter().map(|e| entry(py, e)).collect()
}

#[pymethods]
impl Store {
    /// Store.open(path): an existing store, for reading.
    #[staticmethod]
    fn open(path: PathBuf) -> PyResult<Self> {
        if !path.exists() {
            return Err(PyFileNotFoundError::new_err(format!(
                "store {}: no such folder",
                path.display()
            )));
        }
        Ok(Store {
            inner: ok(causeway::store::Store::open(&path))?,
        })
    }

    /// Store.create(path): a store to build into (creates and marks a missing folder).
    #[staticmethod]
    fn create(path: PathBuf) -> PyResult<Self> {
        Ok(Store {
            inner: ok(causeway::store::Store::create(&path))?,
        })
    }

    /// The store's folder.
    #[getter]
    fn root(&self) -> PathBuf {
        self.inner.root().to_path_buf()
    }

    /// entries() -> list of dict: every map of the index.
    fn entries<'py>(&self, py: Python<'py>) -> PyResult<Vec<Bound<'py, PyDict>>> {
        entries(py, &ok(self.inner.entries())?)
    }

    /// find(s, q) -> list of dict: the maps of binaries with this (s, q) (relative 1e-9).
    fn find<'py>(&self, py: Python<'py>, s: f64, q: f64) -> PyResult<Vec<Bound<'py, PyDict>>> {
        crate::lens::check_binary(s, q)?;
        entries(py, &ok(self.inner.find(s, q))?)
    }

    /// nearest(s, q, count=1) -> list of dict: all maps of the `count` grid points nearest to
    /// (s, q) in (log s, log q), nearest first.
    #[pyo3(signature = (s, q, count=1))]
    fn nearest<'py>(
        &self,
        py: Python<'py>,
        s: f64,
        q: f64,
        count: usize,
    ) -> PyResult<Vec<Bound<'py, PyDict>>> {
        crate::lens::check_binary(s, q)?;
        entries(py, &ok(self.inner.nearest(s, q, count))?)
    }

    /// load(file) -> Map: the map stored under `file` (an entry's "file").
    fn load(&self, py: Python<'_>, file: &str) -> PyResult<Map> {
        if !causeway::store::is_map_name(file) {
            return Err(bad(
                "file",
                format!("{file:?} is not a map name of the store"),
            ));
        }
        let path = self.inner.root().join(file);
        let map = py.detach(|| causeway::map::read_fits(&path));
        Ok(Map { inner: ok(map)? })
    }

    /// put(map) -> path: stores a map under its key (an existing equal key is replaced).
    fn put(&self, py: Python<'_>, map: &Map) -> PyResult<PathBuf> {
        let done = py.detach(|| self.inner.put(&map.inner));
        ok(done)
    }

    /// key_file(map) -> str: the file name a map has in any store (SHA-256 of its key).
    #[staticmethod]
    fn key_file(map: &Map) -> String {
        MapKey::of_map(&map.inner).file_name()
    }

    fn __repr__(&self) -> String {
        format!("<causeway.Store {}>", self.inner.root().display())
    }
}

/// The library spec given as a path to a TOML file or as TOML text.
fn spec_of(spec: &str) -> PyResult<LibrarySpec> {
    if spec.contains('\n') || spec.contains('=') {
        ok(LibrarySpec::parse(spec, "spec"))
    } else {
        ok(LibrarySpec::read(std::path::Path::new(spec)))
    }
}

/// build_library(spec, store, progress=None, threads=None) -> dict
///
/// Builds the maps of a library spec (a TOML file path, or TOML text) missing from `store`
/// (a Store opened with Store.create, or a folder). `progress(done, total, s, q, built)` is
/// called after each grid point. Ctrl-C stops between maps (each map is written whole or not
/// at all). Returns (built, skipped): maps made, and maps present and verified.
#[pyfunction]
#[pyo3(signature = (spec, store, progress=None, threads=None))]
pub fn build_library(
    py: Python<'_>,
    spec: &str,
    store: &Bound<'_, PyAny>,
    progress: Option<Py<PyAny>>,
    threads: Option<usize>,
) -> PyResult<(usize, usize)> {
    let spec = spec_of(spec)?;
    let store = match store.cast::<Store>() {
        Ok(s) => s.get().inner.clone(),
        Err(_) => ok(causeway::store::Store::create(&store.extract::<PathBuf>()?))?,
    };
    let points = ok(spec.points())?;
    let (mut built, mut skipped) = (0, 0);
    for (k, p) in points.iter().enumerate() {
        let one = std::slice::from_ref(p);
        let summary =
            py.detach(|| with_threads(threads, || library::build(&store, one, |_, _| {})))?;
        built += summary.built;
        skipped += summary.skipped;
        if let Some(cb) = &progress {
            cb.call1(py, (k + 1, points.len(), p.s, p.q, summary.built == 1))?;
        }
        py.check_signals()?;
    }
    Ok((built, skipped))
}
