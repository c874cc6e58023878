//! The off-map curve of one line, shared by all its timings.
//!
//! The grid tries every line `(alpha, u0)` at several timings `(t0, tE)`; off the map the
//! point-source magnification along the line depends on the position `tau` along it alone, not
//! on the timing. So the grid samples the line once, in `tau`, and every timing reads it there:
//! the ratio of the binary's magnification to the host's alone is sampled in cells of
//! [`CELL`] Einstein radii (cell `k` covers `[k CELL, (k + 1) CELL]`), each cell halved until
//! every interval passes the tests of the per-timing curve (its midpoint agrees with the linear
//! interpolation to the rule's tolerance, and it is no longer than [`CLEARANCE_REACH`] times
//! the source's clearance at either end), or lies wholly on the map (both ends readable: the
//! readable part of a window is convex), where no timing needs it, or is shorter than
//! [`MIN_STEP`] or too near a caustic or lens for any interval that long to pass: the timings
//! solve their points there one by one, as the per-timing curve does within one data
//! spacing of them. A cell is built when a
//! timing first needs a point in it, and depends on the line alone, so the values read are
//! the same whatever the order in which the timings (or threads) come.

use super::evaluate::CLEARANCE_REACH;
use super::readers::Readers;
use crate::curve::Preconvolved;
use crate::error::Result;
use crate::solve::ImageSolver;
use num_complex::Complex64;

/// Length of a profile's cell along the line (Einstein radii).
pub const CELL: f64 = 1.0;
/// Shortest interval sampled (Einstein radii): an interval that still fails a test when its
/// halves would be shorter (at a caustic or lens, within the caustic points' spacing of one) is
/// left to the timings, which solve their points there one by one.
const MIN_STEP: f64 = CELL / 4096.0;

/// One sample of the line.
#[derive(Debug, Clone, Copy)]
struct Node {
    tau: f64,
    /// Binary over host magnification; NaN where not solved (both ends of its intervals on
    /// the map).
    ratio: f64,
    /// Distance from the lenses and caustics (see [`Readers::clearance`]).
    clearance: f64,
    /// Whether the map reader reads the source here.
    readable: bool,
    /// Whether the interval from here to the next node is left unsampled: wholly on the map,
    /// or too near a caustic or lens (see [`MIN_STEP`]).
    unsampled_after: bool,
}

/// The sampled off-map curve of one line, for one map reader (see the module documentation).
#[derive(Debug, Default)]
pub(super) struct LineProfile {
    /// `(alpha, u0)` bits of the line sampled.
    line: Option<(u64, u64)>,
    /// Nodes of cells `first, first + 1, ...`, each in increasing `tau` with the cell's ends
    /// included; empty for a cell not built yet.
    cells: Vec<Vec<Node>>,
    /// Index of the cell `cells[0]`.
    first: i64,
    /// The cell last read and the index of the node that ended the interval read: reads come
    /// in increasing `tau`, mostly in the same cell.
    cursor: Option<(i64, usize)>,
}

/// What sampling a line needs besides the line.
pub(super) struct LineContext<'a> {
    pub(super) solver: &'a mut ImageSolver,
    pub(super) readers: &'a Readers,
    /// The reader whose readable area decides what is on the map (`None`: nothing is).
    pub(super) reader: Option<&'a Preconvolved>,
    /// Relative tolerance of the linear interpolation.
    pub(super) tol: f64,
    /// The line's impact parameter and direction `(u0, sin alpha, cos alpha)`.
    pub(super) geometry: (f64, f64, f64),
}

impl LineContext<'_> {
    fn position(&self, tau: f64) -> Complex64 {
        let (u0, sn, cs) = self.geometry;
        Complex64::new(tau * cs - u0 * sn, tau * sn + u0 * cs)
    }

    fn node(&self, tau: f64) -> Node {
        let z = self.position(tau);
        Node {
            tau,
            ratio: f64::NAN,
            clearance: self.readers.clearance(z),
            readable: self.reader.is_some_and(|r| r.read(z.re, z.im).is_some()),
            unsampled_after: false,
        }
    }

    /// Solves `node`'s ratio, binary over host magnification.
    fn solve(&mut self, node: &mut Node) -> Result<f64> {
        let z = self.position(node.tau);
        node.ratio = self.solver.magnification(z)? / self.readers.host_alone(z);
        Ok(node.ratio)
    }
}

impl LineProfile {
    /// Forgets the samples unless they are of the line `(alpha, u0)`.
    pub(super) fn select(&mut self, alpha: f64, u0: f64) {
        let key = (alpha.to_bits(), u0.to_bits());
        if self.line != Some(key) {
            self.line = Some(key);
            self.cells.clear();
        }
        self.cursor = None;
    }

    /// The ratio of the binary's magnification to the host's at `tau` on the selected line,
    /// interpolated from the samples (building the cell that holds `tau` if needed); `None`
    /// where the samples leave it out (the caller then solves the point itself).
    pub(super) fn ratio_at(&mut self, tau: f64, context: &mut LineContext) -> Result<Option<f64>> {
        let k = match self.cursor {
            Some((k, _)) if (k as f64 * CELL..(k + 1) as f64 * CELL).contains(&tau) => k,
            _ => (tau / CELL).floor() as i64,
        };
        let cursor = self.cursor;
        let nodes = self.cell(k, context)?;
        let last = nodes.len() - 1;
        let j = match cursor {
            // Walk on from the last read while it is close behind.
            Some((kc, mut j)) if kc == k && nodes[j - 1].tau <= tau => {
                while j < last && nodes[j].tau <= tau {
                    j += 1;
                }
                j
            }
            _ => nodes.partition_point(|n| n.tau <= tau).clamp(1, last),
        };
        let (a, b) = (nodes[j - 1], nodes[j]);
        self.cursor = Some((k, j));
        if a.unsampled_after {
            return Ok(None);
        }
        let f = (tau - a.tau) / (b.tau - a.tau);
        Ok(Some(a.ratio + f * (b.ratio - a.ratio)))
    }

    /// The nodes of cell `k`, built if needed.
    fn cell(&mut self, k: i64, context: &mut LineContext) -> Result<&[Node]> {
        if self.cells.is_empty() {
            self.first = k;
        } else if k < self.first {
            let before = (self.first - k) as usize;
            self.cells
                .splice(0..0, std::iter::repeat_with(Vec::new).take(before));
            self.first = k;
        }
        let i = (k - self.first) as usize;
        if i >= self.cells.len() {
            self.cells.resize_with(i + 1, Vec::new);
        }
        if self.cells[i].is_empty() {
            self.cells[i] = build_cell(k, context)?;
        }
        Ok(&self.cells[i])
    }
}

/// The nodes of cell `k`: its ends, and the midpoints of every interval that failed a test.
fn build_cell(k: i64, context: &mut LineContext) -> Result<Vec<Node>> {
    let mut a = context.node(k as f64 * CELL);
    let mut b = context.node((k + 1) as f64 * CELL);
    if !(a.readable && b.readable) {
        context.solve(&mut a)?;
        context.solve(&mut b)?;
    }
    let mut nodes = Vec::new();
    split(a, b, context, &mut nodes)?;
    nodes.push(b);
    Ok(nodes)
}

/// Pushes `a` and the nodes strictly between `a` and `b` that the tests call for.
fn split(mut a: Node, b: Node, context: &mut LineContext, nodes: &mut Vec<Node>) -> Result<()> {
    if a.readable && b.readable {
        a.unsampled_after = true;
        nodes.push(a);
        return Ok(());
    }
    // Both ratios are known here: the cell's ends are solved by `build_cell`, and every
    // midpoint before it is passed on.
    let (ra, rb) = (a.ratio, b.ratio);
    let mut m = context.node(0.5 * (a.tau + b.tau));
    let rm = context.solve(&mut m)?;
    let linear = (rm - 0.5 * (ra + rb)).abs() <= context.tol * rm;
    let reach = CLEARANCE_REACH * a.clearance.min(b.clearance);
    if b.tau - a.tau <= reach && linear {
        nodes.push(a);
        nodes.push(m);
        return Ok(());
    }
    if m.tau - a.tau < MIN_STEP {
        a.unsampled_after = true;
        nodes.push(a);
        return Ok(());
    }
    split(a, m, context, nodes)?;
    split(m, b, context, nodes)
}
