//! Limb-darkened sources as weighted sums of uniform disks (concentric annuli), with the number
//! of disks doubled until the sum settles to the tolerance.
//!
//! A radial profile `I(r)` is `I(rho)` over the whole disk plus, for each `r' < rho`, a disk of
//! radius `r'` with brightness `-dI/dr' dr'`; its magnification is the flux-weighted sum of the
//! uniform-disk magnifications (the weights and
//! Gauss–Legendre nodes come from [`SourceProfile::as_uniform_disks`]). Each disk is computed to
//! half the tolerance; the node count starts at [`FIRST_NODES`] and doubles until two
//! successive sums differ by less than half the tolerance. The error reported is that
//! difference plus the weighted disk errors.

use crate::error::Result;
use crate::source::SourceProfile;

/// Gauss–Legendre nodes of the first annulus sum.
pub const FIRST_NODES: usize = 4;

/// Most nodes tried.
const MAX_NODES: usize = 256;

/// Magnification and error of a limb-darkened `source`, given a uniform-disk routine
/// `disk(radius, tol) -> (magnification, error)`.
pub(crate) fn limb_darkened(
    source: &SourceProfile,
    tol: f64,
    mut disk: impl FnMut(f64, f64) -> Result<(f64, f64)>,
) -> Result<(f64, f64)> {
    let mut sum = |nodes: usize| -> Result<(f64, f64)> {
        let mut a = 0.0;
        let mut e = 0.0;
        for (r, w) in source.as_uniform_disks(nodes) {
            let (ar, er) = disk(r, 0.5 * tol)?;
            a += w * ar;
            e += w * er;
        }
        Ok((a, e))
    };
    let mut nodes = FIRST_NODES;
    let mut prev = sum(nodes)?;
    loop {
        nodes *= 2;
        let next = sum(nodes)?;
        let change = (next.0 - prev.0).abs();
        if change <= 0.5 * tol * next.0.abs() || nodes >= MAX_NODES {
            return Ok((next.0, next.1 + change));
        }
        prev = next;
    }
}
