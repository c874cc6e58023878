//! The map readers of one search: the map pre-convolved for each limb-darkening law of the data
//! and each trial rho, and the landmarks (lenses, caustic points) that bound the off-map
//! interpolation.

use crate::curve::{MapSpectrum, Preconvolved};
use crate::error::Result;
use crate::fit::photometry::DataSet;
use crate::lens::{LensSystem, PointLens};
use crate::map::MagnificationMap;
use crate::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;

/// Caustic points kept per curve for the clearance.
const CLEARANCE_POINTS: usize = 256;

/// Pre-convolved maps for each distinct limb-darkening law of the data and each trial rho.
pub(super) struct Readers {
    /// The heavier lens (m1), whose own magnification the off-map curve is scaled by.
    pub(super) host: PointLens,
    /// Lens positions and caustic points, and the longest gap between kept caustic points.
    pub(super) landmarks: (Vec<Complex64>, f64),
    /// `convolved[law][rho]`: `None` where the map cannot hold that source.
    pub(super) convolved: Vec<Vec<Option<Preconvolved>>>,
    /// The law index of each data set.
    pub(super) set_law: Vec<usize>,
    /// For each law, the rho whose map has the widest margin (the fewest valid centres).
    pub(super) widest: Vec<Option<usize>>,
    /// The source radii of the readers: the trial radii, then the grid's smoothing radius when
    /// it is larger than all of them.
    pub(super) rhos: Vec<f64>,
}

impl Readers {
    pub(super) fn new(
        map: &MagnificationMap,
        data: &[DataSet],
        rhos: &[f64],
        notes: &mut Vec<String>,
    ) -> Result<Readers> {
        let mut laws: Vec<LimbDarkening> = Vec::new();
        let set_law = data
            .iter()
            .map(|d| match laws.iter().position(|l| *l == d.limb_darkening) {
                Some(i) => i,
                None => {
                    laws.push(d.limb_darkening);
                    laws.len() - 1
                }
            })
            .collect();
        let pixel = map.window.pixel_size();
        // One transform of the map serves every (law, rho).
        let spectrum = MapSpectrum::new(map);
        let mut convolved = Vec::new();
        for &law in &laws {
            let mut row = Vec::new();
            for &rho in rhos {
                let fits = rho >= pixel && 4.0 * rho < map.window.width;
                if !fits {
                    notes.push(format!(
                        "rho {rho} skipped on the map of s = {:.4}, q = {:.3e}: it needs one \
                         pixel ({:.3e}) <= rho < a quarter of the map's width ({:.3e})",
                        map_s(map),
                        map_q(map),
                        pixel,
                        0.25 * map.window.width
                    ));
                }
                row.push(if fits {
                    Some(Preconvolved::from_spectrum(
                        &spectrum,
                        &SourceProfile::new(rho, law)?,
                    )?)
                } else {
                    None
                });
            }
            convolved.push(row);
        }
        let widest = convolved
            .iter()
            .map(|row: &Vec<Option<Preconvolved>>| {
                (0..row.len())
                    .filter(|&r| row[r].is_some())
                    .max_by_key(|&r| row[r].as_ref().map(Preconvolved::margin))
            })
            .collect();
        Ok(Readers {
            host: map.provenance.lens.lenses()[0],
            landmarks: landmarks(&map.provenance.lens)?,
            convolved,
            set_law,
            widest,
            rhos: rhos.to_vec(),
        })
    }
}

/// The lens positions and up to [`CLEARANCE_POINTS`] points of each caustic of `lens`, with
/// the longest gap between consecutive kept caustic points.
pub(super) fn landmarks(lens: &LensSystem) -> Result<(Vec<Complex64>, f64)> {
    let mut points: Vec<Complex64> = lens.lenses().iter().map(|l| l.position).collect();
    let mut gap = 0.0f64;
    for curve in crate::caustics::caustic_curves(lens)? {
        let every = curve.len().div_ceil(CLEARANCE_POINTS).max(1);
        let kept: Vec<Complex64> = curve
            .iter()
            .step_by(every)
            .chain(curve.last())
            .map(|&(x, y)| Complex64::new(x, y))
            .collect();
        for w in kept.windows(2) {
            gap = gap.max((w[1] - w[0]).norm());
        }
        points.extend(kept);
    }
    Ok((points, gap))
}

impl Readers {
    /// The source's clearance at `z`: its distance from the nearest landmark less their gap
    /// (a lower bound on the distance from the lenses and caustics).
    pub(super) fn clearance(&self, z: Complex64) -> f64 {
        let (points, gap) = &self.landmarks;
        let d2 = points
            .iter()
            .map(|p| (z - p).norm_sqr())
            .fold(f64::INFINITY, f64::min);
        (d2.sqrt() - gap).max(0.0)
    }
}

pub(super) fn map_s(map: &MagnificationMap) -> f64 {
    map.provenance
        .lens
        .binary_parameters()
        .map_or(f64::NAN, |b| b.0)
}

pub(super) fn map_q(map: &MagnificationMap) -> f64 {
    map.provenance
        .lens
        .binary_parameters()
        .map_or(f64::NAN, |b| b.1)
}
