//! Adaptive sampling of a uniform disk's boundary until the estimated error of the enclosed
//! image area meets the tolerance.
//!
//! The image area is a sum over intervals `[theta_a, theta_b]` of the boundary, each depending
//! only on the images at its two ends (see [`super::boundary::link`]). The interval with the
//! largest error estimate is bisected (one more image solve) until the summed estimate is below
//! `tol` times the area, as in Dominik 2007 and Bozza 2010; intervals whose ends cannot be
//! linked with confidence are bisected first, whatever their error. The first samples include
//! the angles where the boundary crosses the caustics (see `crossings`).

use super::boundary::{link, Node};
use super::crossings::CausticTrace;
use super::segment::Piece;
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::solve::ImageSolver;
use num_complex::Complex64;
use std::cmp::Ordering;
use std::collections::BinaryHeap;
use std::f64::consts::{PI, TAU};

/// Boundary samples to start from.
const INITIAL_SAMPLES: usize = 16;

/// Most boundary samples per disk; past this the estimate is returned with the error reached.
pub const MAX_SAMPLES: usize = 1 << 16;

/// Intervals narrower than this (radians) are not bisected further.
const MIN_INTERVAL: f64 = 1e-11;

/// An interval of the boundary with its contribution.
#[derive(Debug, Clone, Copy)]
struct Interval {
    a: usize,
    b: usize,
    piece: Piece,
}

impl PartialEq for Interval {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Interval {}
impl PartialOrd for Interval {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Interval {
    fn cmp(&self, other: &Self) -> Ordering {
        self.piece
            .error
            .total_cmp(&other.piece.error)
            .then(other.a.cmp(&self.a))
    }
}

/// The buffers of one disk's sampling, kept by a [`super::ContourSolver`] from disk to disk so
/// that a point allocates nothing once they have grown. A clone starts empty.
#[derive(Debug, Default)]
pub(crate) struct Workspace {
    nodes: Vec<Node>,
    cuts: Vec<f64>,
    angles: Vec<f64>,
    fresh: Vec<Interval>,
    frozen: Vec<Interval>,
    /// The heap's storage between disks.
    queue: Vec<Interval>,
    stack: Vec<(usize, usize)>,
}

impl Clone for Workspace {
    fn clone(&self) -> Self {
        Workspace::default()
    }
}

/// The sampled boundary of one disk.
struct Boundary<'a> {
    solver: &'a mut ImageSolver,
    lens: &'a LensSystem,
    center: Complex64,
    rho: f64,
    nodes: &'a mut Vec<Node>,
    stack: &'a mut Vec<(usize, usize)>,
}

impl Boundary<'_> {
    /// Solves a new sample at `theta`, its solve seeded by the roots of sample `near` (a
    /// neighbour) when given, else by the last solve.
    fn add(&mut self, theta: f64, near: Option<usize>) -> Result<usize> {
        if let Some(k) = near {
            self.solver.resume(&self.nodes[k].warm);
        }
        let node = Node::solve(self.solver, self.lens, self.center, self.rho, theta)?;
        self.nodes.push(node);
        Ok(self.nodes.len() - 1)
    }

    /// Links samples a and b, bisecting until every sub-interval links; pushes the results.
    fn settle(&mut self, a: usize, b: usize, out: &mut Vec<Interval>) -> Result<()> {
        self.stack.clear();
        self.stack.push((a, b));
        while let Some((a, b)) = self.stack.pop() {
            if let Some(piece) = link(&self.nodes[a], &self.nodes[b], self.center) {
                out.push(Interval { a, b, piece });
                continue;
            }
            let (ta, tb) = (self.nodes[a].theta, self.nodes[b].theta);
            if tb - ta < MIN_INTERVAL {
                return Err(Error::Numerical(format!(
                    "contour: cannot link the images of the boundary of the source at ({}, {}) \
                     with rho {} near angle {ta} (images {} and {})",
                    self.center.re, self.center.im, self.rho, self.nodes[a].len, self.nodes[b].len
                )));
            }
            let m = self.add(0.5 * (ta + tb), Some(a))?;
            self.stack.push((m, b));
            self.stack.push((a, m));
        }
        Ok(())
    }
}

/// Relative change of radius used when a boundary passes through a point where the images
/// cannot be followed (exactly through a single lens's point caustic, or a cusp).
const NUDGE: f64 = 1e-9;

/// Magnification of a uniform disk of radius `rho > 0` about `center` and its estimated error,
/// refined until the error is at most `tol` times the magnification.
///
/// A boundary that runs exactly through a point where the images jump (a single lens's point
/// caustic, the tip of a cusp) cannot be linked there; the disk is then computed with radii
/// `rho (1 +- 1e-9)` instead, and their mean returned with half their difference added to the
/// error.
pub(crate) fn uniform_disk(
    disk: &mut Sampling,
    center: Complex64,
    rho: f64,
    tol: f64,
) -> Result<(f64, f64)> {
    match sampled_disk(disk, center, rho, tol) {
        Err(Error::Numerical(_)) => {
            let (a1, e1) = sampled_disk(disk, center, rho * (1.0 + NUDGE), tol)?;
            let (a2, e2) = sampled_disk(disk, center, rho * (1.0 - NUDGE), tol)?;
            Ok((0.5 * (a1 + a2), e1.max(e2) + 0.5 * (a1 - a2).abs()))
        }
        other => other,
    }
}

/// What the sampling of a disk works with: the lens's image solver, the lens, its traced
/// caustics and the reused buffers.
pub(crate) struct Sampling<'a> {
    pub solver: &'a mut ImageSolver,
    pub lens: &'a LensSystem,
    pub trace: &'a CausticTrace,
    pub work: &'a mut Workspace,
}

fn sampled_disk(disk: &mut Sampling, center: Complex64, rho: f64, tol: f64) -> Result<(f64, f64)> {
    disk.solver.reset();
    let Workspace {
        nodes,
        cuts,
        angles,
        fresh,
        frozen,
        queue,
        stack,
    } = &mut *disk.work;
    nodes.clear();
    let mut boundary = Boundary {
        solver: disk.solver,
        lens: disk.lens,
        center,
        rho,
        nodes,
        stack,
    };
    // Start from evenly spaced angles, the caustic crossings and the midpoints between
    // successive crossings (see `crossings`).
    disk.trace.crossings(center, rho, cuts);
    angles.clear();
    angles.extend((0..INITIAL_SAMPLES).map(|k| TAU * k as f64 / INITIAL_SAMPLES as f64));
    for (k, &a) in cuts.iter().enumerate() {
        let next = cuts.get(k + 1).copied().unwrap_or(cuts[0] + TAU);
        let mid = 0.5 * (a + next);
        angles.push(a);
        angles.push(if mid >= TAU { mid - TAU } else { mid });
    }
    angles.sort_by(f64::total_cmp);
    angles.dedup_by(|b, a| *b - *a < 1e-9);
    for &a in angles.iter() {
        boundary.add(a, None)?;
    }
    // The last sample closes the loop: the images of theta = 0 again, at theta = 2 pi.
    let mut last = boundary.nodes[0];
    last.theta = TAU;
    boundary.nodes.push(last);
    fresh.clear();
    for k in 0..angles.len() {
        boundary.settle(k, k + 1, fresh)?;
    }
    queue.clear();
    queue.append(fresh);
    let mut heap = BinaryHeap::from(std::mem::take(queue));
    let sum = |heap: &BinaryHeap<Interval>| {
        heap.iter().fold(Piece::default(), |mut acc, i| {
            acc += i.piece;
            acc
        })
    };
    let mut total = sum(&heap);
    frozen.clear();
    loop {
        if total.error <= tol * total.area.abs() {
            // Re-add from scratch: the running sums drift.
            total = sum(&heap);
            frozen.iter().for_each(|i: &Interval| total += i.piece);
            if total.error <= tol * total.area.abs() {
                break;
            }
        }
        if boundary.nodes.len() >= MAX_SAMPLES {
            break;
        }
        let Some(worst) = heap.pop() else { break };
        let (ta, tb) = (boundary.nodes[worst.a].theta, boundary.nodes[worst.b].theta);
        if tb - ta < MIN_INTERVAL {
            frozen.push(worst);
            continue;
        }
        let m = boundary.add(0.5 * (ta + tb), Some(worst.a))?;
        boundary.settle(worst.a, m, fresh)?;
        boundary.settle(m, worst.b, fresh)?;
        total.area -= worst.piece.area;
        total.error -= worst.piece.error;
        for i in fresh.drain(..) {
            total += i.piece;
            heap.push(i);
        }
    }
    let mut total = sum(&heap);
    frozen.iter().for_each(|i| total += i.piece);
    *queue = heap.into_vec();
    let unlensed = PI * rho * rho;
    Ok((total.area / unlensed, total.error / unlensed))
}
