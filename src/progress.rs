//! Progress of long library calls: the library says what it is doing through [`Progress`]; the
//! command line (or a notebook, or nothing) decides how to show it.
//!
//! No library code prints. A call that takes long takes a `&dyn Progress` and reports its
//! stages (each with a count of work units), advances within a stage, and remarks meant for the
//! user.

/// A listener for the progress of a long call. Every method has a silent default, and every
/// implementation must be callable from many threads at once.
///
/// ```
/// use causeway::progress::{Progress, Silent};
/// use std::sync::atomic::{AtomicU64, Ordering};
/// struct Count(AtomicU64);
/// impl Progress for Count {
///     fn advance(&self, n: u64) {
///         self.0.fetch_add(n, Ordering::Relaxed);
///     }
/// }
/// let c = Count(AtomicU64::new(0));
/// c.start("search", 10);
/// c.advance(3);
/// assert_eq!(c.0.load(Ordering::Relaxed), 3);
/// Silent.note("nothing shown");
/// ```
pub trait Progress: Sync {
    /// A stage begins, with `total` units of work (0 when unknown).
    fn start(&self, _stage: &str, _total: u64) {}
    /// `n` more units of the current stage are done.
    fn advance(&self, _n: u64) {}
    /// The current stage ends; `summary` says what it did, in one line (nothing when empty).
    fn finish(&self, _summary: &str) {}
    /// A remark for the user, in one line.
    fn note(&self, _message: &str) {}
    /// One unit of work finished that a batch log should name (a map built, say), in one line;
    /// a terminal display may leave it to its bar.
    fn item(&self, _message: &str) {}
}

/// Shows nothing.
#[derive(Debug, Clone, Copy, Default)]
pub struct Silent;

impl Progress for Silent {}
