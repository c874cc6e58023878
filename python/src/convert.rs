//! What every binding shares: errors to exceptions, arrays in and out, thread pools, chunks
//! between which Ctrl-C is honoured, progress forwarded to a Python callable.

use causeway::Error;
use ndarray::{ArrayD, IxDyn};
use numpy::{AllowTypeChange, IntoPyArray, PyArrayDyn, PyArrayLikeDyn};
use pyo3::exceptions::{PyKeyboardInterrupt, PyRuntimeError, PyValueError};
use pyo3::prelude::*;
use std::sync::atomic::{AtomicBool, Ordering};

/// Any array-like of floats (lists, scalars, other dtypes are converted).
pub type Floats<'py> = PyArrayLikeDyn<'py, f64, AllowTypeChange>;

/// A numpy array returned to Python.
pub type Array<'py, T> = Bound<'py, PyArrayDyn<T>>;

/// Points per chunk of a long vectorised call: Ctrl-C is checked between chunks. A multiple of
/// the library's batch sizes, so chunking never changes a result.
pub const CHUNK: usize = 1 << 18;

/// The library's error as a Python exception: `ValueError` for bad input (option names of the
/// command line become argument names), `OSError` (or its subclass for the case) for files,
/// `RuntimeError` for a failed computation.
pub fn to_py(e: Error) -> PyErr {
    match e {
        Error::Input(m) => PyValueError::new_err(argument_names(&m)),
        Error::Io { path, source } => PyErr::from(std::io::Error::new(
            source.kind(),
            format!("{}: {source}", path.display()),
        )),
        Error::Numerical(m) => PyRuntimeError::new_err(m),
        Error::Interrupted => PyKeyboardInterrupt::new_err("interrupted"),
    }
}

/// Shorthand for mapping a library result.
pub fn ok<T>(r: causeway::Result<T>) -> PyResult<T> {
    r.map_err(to_py)
}

/// `--some-option` in a library message becomes `some_option`, the argument's Python name.
pub fn argument_names(message: &str) -> String {
    let mut out = String::with_capacity(message.len());
    let mut rest = message;
    while let Some(k) = rest.find("--") {
        out.push_str(&rest[..k]);
        let tail = &rest[k + 2..];
        let end = tail
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '-'))
            .unwrap_or(tail.len());
        if end == 0 {
            out.push_str("--");
        } else {
            out.push_str(&tail[..end].replace('-', "_"));
        }
        rest = &tail[end..];
    }
    out.push_str(rest);
    out
}

/// A `ValueError` naming the argument.
pub fn bad(argument: &str, message: impl std::fmt::Display) -> PyErr {
    PyValueError::new_err(format!("{argument}: {message}"))
}

/// `Err(ValueError)` unless `value` is finite.
pub fn finite(argument: &str, value: f64) -> PyResult<f64> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(bad(argument, format!("must be finite, got {value}")))
    }
}

/// The values of an array-like (any shape, flattened in C order) and its shape.
pub fn values(a: &Floats) -> (Vec<f64>, Vec<usize>) {
    let view = a.as_array();
    let shape = view.shape().to_vec();
    match view.as_slice() {
        Some(s) => (s.to_vec(), shape),
        None => (view.iter().copied().collect(), shape),
    }
}

/// Two array-likes of one shape (`y` is named when it differs), flattened.
pub fn pair(
    x: &Floats,
    y: &Floats,
    names: (&str, &str),
) -> PyResult<(Vec<f64>, Vec<f64>, Vec<usize>)> {
    let (xs, shape) = values(x);
    let (ys, y_shape) = values(y);
    if y_shape != shape {
        return Err(bad(
            names.1,
            format!(
                "must have the shape of {} {shape:?}, got {y_shape:?}",
                names.0
            ),
        ));
    }
    Ok((xs, ys, shape))
}

/// `v` as a numpy array of `shape`.
pub fn shaped<'py, T: numpy::Element>(
    py: Python<'py>,
    v: Vec<T>,
    shape: &[usize],
) -> PyResult<Array<'py, T>> {
    let a = ArrayD::from_shape_vec(IxDyn(shape), v)
        .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
    Ok(a.into_pyarray(py))
}

/// A listener for a build run by [`interruptible`]: asks the engine to stop after Ctrl-C.
pub struct Stop(AtomicBool);

impl causeway::engine::Progress for Stop {
    fn cancelled(&self) -> bool {
        self.0.load(Ordering::Relaxed)
    }
}

/// Runs `f` without the GIL on a thread of its own while this thread checks for Ctrl-C every
/// 50 ms; on Ctrl-C the listener handed to `f` asks it to stop, and the KeyboardInterrupt is
/// raised once it has.
pub fn interruptible<T: Send>(
    py: Python<'_>,
    f: impl FnOnce(&Stop) -> PyResult<T> + Send,
) -> PyResult<T> {
    let stop = Stop(AtomicBool::new(false));
    let mut signal: Option<PyErr> = None;
    let result = py.detach(|| {
        std::thread::scope(|scope| {
            let worker = scope.spawn(|| f(&stop));
            while !worker.is_finished() {
                std::thread::sleep(std::time::Duration::from_millis(50));
                if signal.is_none() {
                    if let Err(e) = Python::attach(|py| py.check_signals()) {
                        signal = Some(e);
                        stop.0.store(true, Ordering::Relaxed);
                    }
                }
            }
            worker
                .join()
                .unwrap_or_else(|panic| std::panic::resume_unwind(panic))
        })
    });
    match signal {
        Some(e) => Err(e),
        None => result,
    }
}

/// Runs `f` in a pool of `threads` workers (rayon's global pool when `None`).
pub fn with_threads<T: Send>(
    threads: Option<usize>,
    f: impl FnOnce() -> causeway::Result<T> + Send,
) -> PyResult<T> {
    match threads {
        None => ok(f()),
        Some(n) => {
            let most = 4 * std::thread::available_parallelism().map_or(1, |n| n.get());
            if n == 0 || n > most {
                return Err(bad("threads", format!("must be 1 to {most}, got {n}")));
            }
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .map_err(|e| PyRuntimeError::new_err(e.to_string()))?;
            ok(pool.install(f))
        }
    }
}

/// Runs `f` over `0..n` in chunks of [`CHUNK`] without the GIL, checking for Ctrl-C between
/// chunks, and joins the results in order.
pub fn chunked<T: Send>(
    py: Python<'_>,
    n: usize,
    threads: Option<usize>,
    f: impl Fn(std::ops::Range<usize>) -> causeway::Result<Vec<T>> + Sync,
) -> PyResult<Vec<T>> {
    let mut out = Vec::with_capacity(n);
    let mut start = 0;
    loop {
        let end = (start + CHUNK).min(n);
        out.extend(py.detach(|| with_threads(threads, || f(start..end)))?);
        py.check_signals()?;
        start = end;
        if start >= n {
            break;
        }
    }
    Ok(out)
}

/// Progress of long library calls, forwarded to a Python callable `progress(event, text)`
/// (event one of "start", "finish", "note"); nothing when there is none.
pub struct Forward(pub Option<Py<PyAny>>);

impl Forward {
    fn send(&self, event: &str, text: &str) {
        if let Some(cb) = &self.0 {
            Python::attach(|py| {
                if let Err(e) = cb.call1(py, (event, text)) {
                    e.write_unraisable(py, None);
                }
            });
        }
    }
}

impl causeway::progress::Progress for Forward {
    fn start(&self, stage: &str, _total: u64) {
        self.send("start", stage);
    }
    fn finish(&self, summary: &str) {
        self.send("finish", summary);
    }
    fn note(&self, message: &str) {
        self.send("note", message);
    }
}
