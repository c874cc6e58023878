//! Samples of the source boundary and their images, and the linking of the images of two
//! neighbouring samples into pieces of the image contours.
//!
//! A point `zeta(theta) = c + rho e^{i theta}` of the boundary has images `z_j` that move with
//! `dz/dtheta = (zeta' - kappa conj(zeta')) / det J` (from `d zeta = dz + kappa conj(dz)`,
//! `kappa = sum_i m_i / conj(z - z_i)^2`). Images of positive parity run round their contours
//! counter-clockwise as theta grows, those of negative parity clockwise (Gould & Gaucherel 1997;
//! Dominik 1998). Between two samples, each image is linked to the image of the same parity at
//! the other sample that its motion predicts; when the number of images differs by two, the
//! boundary crossed a caustic and a pair of opposite parity appeared (or vanished) at a critical
//! curve: the pair is joined across it (Bozza 2010). A link whose motion does not match the
//! prediction, or a change of more than one pair, means the samples are too far apart: the
//! caller then bisects.

use super::segment::{cross, join, track, Piece};
use crate::error::Result;
use crate::lens::LensSystem;
use crate::solve::{ImageSolver, WarmStart};
use num_complex::Complex64;

/// Most images of a point source the solver can return (5 (N - 1) for N = 4 lenses is 15).
pub(crate) const MAX_IMAGES: usize = 16;

/// A link is accepted when the midpoint predicted from each end agrees to this fraction of the
/// distance the image moves (`(|dz_a| + |dz_b|) h / 2`), ...
const LINK_AGREEMENT: f64 = 0.3;

/// ... or when its disagreement is below this fraction of that of any other pairing of either
/// of its ends (an image moving fast next to a critical curve, but with no rival).
const UNAMBIGUOUS: f64 = 0.1;

/// Least fraction of chord times speed counted as the unresolved area of an appearing pair.
const SWEPT_FLOOR: f64 = 0.05;

/// One image of a boundary sample.
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct ImagePoint {
    pub z: Complex64,
    /// dz / dtheta.
    pub dz: Complex64,
    /// |dz / dtheta|.
    pub speed: f64,
    pub parity: i8,
}

/// A boundary sample at angle `theta` and its images.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Node {
    pub theta: f64,
    pub len: usize,
    pub pts: [ImagePoint; MAX_IMAGES],
    /// The solver's roots for this sample, to seed the solves of samples next to it.
    pub warm: WarmStart,
}

impl Node {
    /// Solves the images of `center + rho e^{i theta}`, warm-started from the solver's last
    /// call.
    pub fn solve(
        solver: &mut ImageSolver,
        lens: &LensSystem,
        center: Complex64,
        rho: f64,
        theta: f64,
    ) -> Result<Node> {
        let dir = Complex64::from_polar(1.0, theta);
        let dzeta = Complex64::new(0.0, rho) * dir;
        let images = solver.images(center + dir * rho)?;
        let mut node = Node {
            theta,
            len: images.len().min(MAX_IMAGES),
            pts: [ImagePoint::default(); MAX_IMAGES],
            warm: WarmStart::default(),
        };
        for (p, im) in node.pts.iter_mut().zip(images) {
            let kappa = lens.shear(im.position);
            let dz = (dzeta - kappa * dzeta.conj()) / im.jacobian;
            *p = ImagePoint {
                z: im.position,
                dz,
                speed: dz.norm_sqr().sqrt(),
                parity: im.parity,
            };
        }
        node.warm = solver.warm_start();
        Ok(node)
    }

    fn images(&self) -> &[ImagePoint] {
        &self.pts[..self.len]
    }
}

/// Disagreement of every link a -> b: the distance between the midpoints predicted from each
/// end, relative to the distance moved.
type Costs = [[f64; MAX_IMAGES]; MAX_IMAGES];

fn costs(a: &Node, b: &Node, h: f64) -> Costs {
    let mut c = [[f64::INFINITY; MAX_IMAGES]; MAX_IMAGES];
    for (row, p) in c.iter_mut().zip(a.images()) {
        let mid_a = p.z + p.dz * (0.5 * h);
        let tiny = 1e-14 * (1.0 + p.z.norm_sqr().sqrt());
        for (cell, q) in row.iter_mut().zip(b.images()) {
            if q.parity == p.parity {
                let mid_b = q.z - q.dz * (0.5 * h);
                let scale = (p.speed + q.speed) * 0.5 * h;
                *cell = (mid_a - mid_b).norm_sqr().sqrt() / (scale + tiny);
            }
        }
    }
    c
}

/// A pairing of the images of `a` with those of `b`, skipping one image pair on one side.
struct Matching {
    /// to[i] = index in b of the partner of a's image i (usize::MAX for a skipped image).
    to: [usize; MAX_IMAGES],
    /// Largest disagreement of a link, relative to the distance moved (or scaled so that an
    /// unambiguous link counts as [`LINK_AGREEMENT`] at most).
    worst: f64,
    /// Sum of the relative disagreements.
    total: f64,
}

/// Greedy pairing by predicted-midpoint disagreement, same parity only. `skip_a`/`skip_b` are
/// images (a pair) left out. None when the parities do not balance.
fn pair_up(
    a: &Node,
    b: &Node,
    cost: &Costs,
    skip_a: Option<(usize, usize)>,
    skip_b: Option<(usize, usize)>,
) -> Option<Matching> {
    let skipped = |s: Option<(usize, usize)>, i: usize| s.is_some_and(|(p, q)| i == p || i == q);
    let mut used_b = [false; MAX_IMAGES];
    let mut to = [usize::MAX; MAX_IMAGES];
    let mut pending = [false; MAX_IMAGES];
    let mut left = 0;
    for (i, p) in pending.iter_mut().enumerate().take(a.len) {
        *p = !skipped(skip_a, i);
        left += *p as usize;
    }
    for (j, u) in used_b.iter_mut().enumerate().take(b.len) {
        *u = skipped(skip_b, j);
    }
    let (ia, ib) = (a.images(), b.images());
    let rel = |i: usize, j: usize| cost[i][j];
    let (mut worst, mut total) = (0.0f64, 0.0);
    while left > 0 {
        let mut best = (f64::INFINITY, usize::MAX, usize::MAX);
        for i in (0..a.len).filter(|&i| pending[i]) {
            for j in (0..b.len).filter(|&j| !used_b[j] && ib[j].parity == ia[i].parity) {
                let c = rel(i, j);
                if c < best.0 {
                    best = (c, i, j);
                }
            }
        }
        if best.1 == usize::MAX {
            return None;
        }
        let (c, i, j) = best;
        pending[i] = false;
        used_b[j] = true;
        to[i] = j;
        // The nearest alternative for either end of the link.
        let mut second = f64::INFINITY;
        for jj in
            (0..b.len).filter(|&k| k != j && !skipped(skip_b, k) && ib[k].parity == ia[i].parity)
        {
            second = second.min(rel(i, jj));
        }
        for ii in
            (0..a.len).filter(|&k| k != i && !skipped(skip_a, k) && ia[k].parity == ib[j].parity)
        {
            second = second.min(rel(ii, j));
        }
        worst = worst.max(c.min(LINK_AGREEMENT * c / (UNAMBIGUOUS * second)));
        total += c;
        left -= 1;
    }
    Some(Matching { to, worst, total })
}

/// The pairing of [`pair_up`] without skipped images, found directly when every image of `a`
/// has a different nearest partner in `b` (the usual case away from critical curves): the greedy
/// pairing then links each image to that partner, whatever the order of its picks. Returns the
/// partners and [`Matching::worst`]; None when two images share a nearest partner or one has
/// none (then [`pair_up`] decides).
fn pair_nearest(a: &Node, b: &Node, cost: &Costs) -> Option<([usize; MAX_IMAGES], f64)> {
    let (ia, ib) = (a.images(), b.images());
    let mut to = [usize::MAX; MAX_IMAGES];
    let mut taken = [false; MAX_IMAGES];
    for (i, p) in ia.iter().enumerate() {
        // The first strict minimum, as the greedy scan finds it.
        let mut best = (f64::INFINITY, usize::MAX);
        for (j, q) in ib.iter().enumerate() {
            if q.parity == p.parity && cost[i][j] < best.0 {
                best = (cost[i][j], j);
            }
        }
        let j = best.1;
        if j == usize::MAX || taken[j] {
            return None;
        }
        taken[j] = true;
        to[i] = j;
    }
    let mut worst = 0.0f64;
    for (i, p) in ia.iter().enumerate() {
        let j = to[i];
        let c = cost[i][j];
        let mut second = f64::INFINITY;
        for (jj, q) in ib.iter().enumerate() {
            if jj != j && q.parity == p.parity {
                second = second.min(cost[i][jj]);
            }
        }
        for (ii, r) in ia.iter().enumerate() {
            if ii != i && r.parity == ib[j].parity {
                second = second.min(cost[ii][j]);
            }
        }
        worst = worst.max(c.min(LINK_AGREEMENT * c / (UNAMBIGUOUS * second)));
    }
    Some((to, worst))
}

/// The best choice of an appearing (or vanishing) pair among the images of `side`: one image of
/// each parity, the rest matched with the other side.
fn best_pair(
    a: &Node,
    b: &Node,
    cost: &Costs,
    pair_in_b: bool,
) -> Option<((usize, usize), Matching)> {
    let side = if pair_in_b { b } else { a };
    let imgs = side.images();
    let mut best: Option<((usize, usize), Matching)> = None;
    for ip in (0..imgs.len()).filter(|&i| imgs[i].parity > 0) {
        for im in (0..imgs.len()).filter(|&i| imgs[i].parity < 0) {
            let skip = Some((ip, im));
            let m = if pair_in_b {
                pair_up(a, b, cost, None, skip)
            } else {
                pair_up(a, b, cost, skip, None)
            };
            if let Some(m) = m {
                if best.as_ref().is_none_or(|(_, bm)| m.total < bm.total) {
                    best = Some(((ip, im), m));
                }
            }
        }
    }
    best
}

/// Intervals narrower than this (radians) are linked by the best pairing even when its motion
/// disagrees with the prediction: there the image positions of a pair about to appear are only
/// known to about the square root of the working precision, which can exceed the distance
/// moved, and the interval's area is negligible anyway.
pub(crate) const FORCE_LINK: f64 = 1e-8;

/// The pieces of the image contours between samples `a` and `b` (b.theta > a.theta): their
/// summed area and error about the origin `o`. None when the samples are too far apart to link
/// with confidence (see [`FORCE_LINK`]).
pub(crate) fn link(a: &Node, b: &Node, o: Complex64) -> Option<Piece> {
    let h = b.theta - a.theta;
    let cost = costs(a, b, h);
    let (pair, (to, worst)) = match b.len as isize - a.len as isize {
        0 => (
            None,
            pair_nearest(a, b, &cost)
                .or_else(|| pair_up(a, b, &cost, None, None).map(|m| (m.to, m.worst)))?,
        ),
        2 => {
            let (p, m) = best_pair(a, b, &cost, true)?;
            (Some((p, true)), (m.to, m.worst))
        }
        -2 => {
            let (p, m) = best_pair(a, b, &cost, false)?;
            (Some((p, false)), (m.to, m.worst))
        }
        _ => return None,
    };
    if worst > LINK_AGREEMENT && h >= FORCE_LINK {
        return None;
    }
    let mut piece = Piece::default();
    for (i, p) in a.images().iter().enumerate() {
        let j = to[i];
        if j == usize::MAX {
            continue;
        }
        let q = b.pts[j];
        piece += if p.parity > 0 {
            track(o, p.z, p.dz * h, q.z, q.dz * h)
        } else {
            track(o, q.z, -q.dz * h, p.z, -p.dz * h)
        };
    }
    // The pair is joined at the sample where it exists, but it appeared (or vanished) somewhere
    // inside the interval: the stretch of its two tracks between that sample and the critical
    // curve is missing. Its area is about the area the chord between the two images sweeps over
    // the interval: the chord times the motion across it, of the pair's midpoint and of the two
    // images relative to each other (motion along the chord sweeps nothing; the chord shrinks as
    // the square root of the distance to the critical curve while the speed grows as its
    // inverse). At least SWEPT_FLOOR of chord times speed is counted, in case the motion turns
    // across the chord later in the interval.
    let swept = |p: &ImagePoint, q: &ImagePoint| {
        let d = p.z - q.z;
        let across = cross(d, p.dz + q.dz).abs() + cross(d, p.dz - q.dz).abs();
        (0.5 * across).max(SWEPT_FLOOR * d.norm_sqr().sqrt() * (p.speed + q.speed)) * h
    };
    match pair {
        // Appeared: the contour comes back along the negative-parity image and turns onto the
        // positive one.
        Some(((ip, im), true)) => {
            let (p, q) = (b.pts[ip], b.pts[im]);
            piece += join(o, q.z, -q.dz, p.z, p.dz);
            piece.error += swept(&p, &q);
        }
        // Vanished: the positive-parity image turns back onto the negative one.
        Some(((ip, im), false)) => {
            let (p, q) = (a.pts[ip], a.pts[im]);
            piece += join(o, p.z, p.dz, q.z, -q.dz);
            piece.error += swept(&p, &q);
        }
        None => {}
    }
    Some(piece)
}
