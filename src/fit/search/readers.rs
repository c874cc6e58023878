//! The map readers of one search: the map pre-convolved for each limb-darkening law of the data
//! and each trial rho, and the landmarks (lenses, caustic points) that bound the off-map
//! interpolation.

use crate::curve::{Cell, MapSpectrum, Preconvolved};
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
    /// Groups of landmarks: the lens positions (gap 0), then the kept points of each caustic.
    pub(super) landmarks: Vec<Landmarks>,
    /// `convolved[law][rho]`: `None` where the map cannot hold that source.
    pub(super) convolved: Vec<Vec<Option<Preconvolved>>>,
    /// The law index of each data set.
    pub(super) set_law: Vec<usize>,
    /// For each law, the rho whose map has the widest margin (the fewest valid centres).
    pub(super) widest: Vec<Option<usize>>,
    /// The source radii of the readers: the trial radii, then the grid's smoothing radius when
    /// it is larger than all of them.
    pub(super) rhos: Vec<f64>,
    /// For each law, its readers' values side by side (see [`Stacked`]).
    pub(super) stacked: Vec<Stacked>,
}

/// The values of the readers of one law interleaved pixel by pixel, so that one point's read
/// at every radius touches the few cache lines around its cell rather than a few per reader.
pub(super) struct Stacked {
    /// The reader (rho) index of each slot.
    pub(super) readers: Vec<usize>,
    /// `values[pixel * readers.len() + k]`: reader `readers[k]` at `pixel`.
    values: Vec<f64>,
    /// Pixels per side.
    n: usize,
}

impl Stacked {
    fn new(row: &[Option<Preconvolved>], n: usize) -> Stacked {
        let readers: Vec<usize> = (0..row.len()).filter(|&r| row[r].is_some()).collect();
        let grids: Vec<&[f64]> = readers
            .iter()
            .filter_map(|&r| row[r].as_ref().map(Preconvolved::grid))
            .collect();
        let mut values = Vec::with_capacity(n * n * grids.len());
        for p in 0..n * n {
            values.extend(grids.iter().map(|g| g[p]));
        }
        Stacked { readers, values, n }
    }

    /// Every reader's value at a point of cell `c` (of a reader of this window whose margin is
    /// the widest) into `out`, in the order of `readers`: what [`Preconvolved::read_cell`]
    /// gives, bit for bit.
    #[inline]
    pub(super) fn read(&self, c: &Cell, out: &mut [f64]) {
        let (index, tx, ty) = c.parts();
        let k = self.readers.len();
        let v = &self.values;
        let (a, b, d, e) = (
            index * k,
            (index + 1) * k,
            (index + self.n) * k,
            (index + self.n + 1) * k,
        );
        for (m, o) in out.iter_mut().enumerate().take(k) {
            *o = (1.0 - ty) * ((1.0 - tx) * v[a + m] + tx * v[b + m])
                + ty * ((1.0 - tx) * v[d + m] + tx * v[e + m]);
        }
    }
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
        let stacked = convolved
            .iter()
            .map(|row| Stacked::new(row, map.window.pixels))
            .collect();
        Ok(Readers {
            stacked,
            host: map.provenance.lens.lenses()[0],
            landmarks: landmarks(&map.provenance.lens)?,
            convolved,
            set_law,
            widest,
            rhos: rhos.to_vec(),
        })
    }
}

/// Landmark points per bounding box in [`Landmarks`].
const CHUNK: usize = 16;

/// One group of landmarks: its points, the longest gap between consecutive points, and the
/// bounding box of each chunk of [`CHUNK`] points (so that a distance skips the chunks that
/// cannot hold the nearest point).
#[derive(Debug, Clone)]
pub(super) struct Landmarks {
    points: Vec<Complex64>,
    gap: f64,
    /// Per chunk: (min corner, max corner).
    boxes: Vec<(Complex64, Complex64)>,
}

impl Landmarks {
    fn new(points: Vec<Complex64>, gap: f64) -> Landmarks {
        let boxes = points
            .chunks(CHUNK)
            .map(|c| {
                c.iter().fold((c[0], c[0]), |(lo, hi), p| {
                    (
                        Complex64::new(lo.re.min(p.re), lo.im.min(p.im)),
                        Complex64::new(hi.re.max(p.re), hi.im.max(p.im)),
                    )
                })
            })
            .collect();
        Landmarks { points, gap, boxes }
    }

    /// The squared distance from `z` to the box of chunk `k`: at most the squared distance to
    /// any of its points (each coordinate difference is one of theirs or zero).
    fn to_box(&self, k: usize, z: Complex64) -> f64 {
        let (lo, hi) = self.boxes[k];
        let dx = (lo.re - z.re).max(z.re - hi.re).max(0.0);
        let dy = (lo.im - z.im).max(z.im - hi.im).max(0.0);
        dx * dx + dy * dy
    }

    /// The least of `best` and the clearance from this group: the distance from `z` to its
    /// nearest point less the gap, at least 0. Chunks and the whole group are skipped when
    /// their boxes show they cannot lower `best`; the value is that of the plain minimum.
    fn clearance(&self, z: Complex64, best: f64) -> f64 {
        // Beyond this a point's clearance exceeds `best` (with room for round-off).
        let reach = best + self.gap;
        let reach2 = reach * reach * (1.0 + 1e-12);
        let mut d2 = f64::INFINITY;
        for k in 0..self.boxes.len() {
            let b = self.to_box(k, z);
            if b >= d2 || b > reach2 {
                continue;
            }
            for p in &self.points[k * CHUNK..((k + 1) * CHUNK).min(self.points.len())] {
                let d = (z - p).norm_sqr();
                if d < d2 {
                    d2 = d;
                }
            }
        }
        best.min((d2.sqrt() - self.gap).max(0.0))
    }
}

/// The lens positions (exact, gap 0), then up to [`CLEARANCE_POINTS`] points of each caustic of
/// `lens` with the longest gap between its consecutive kept points: a small caustic near a
/// lens is not blurred by the spacing of a large one.
pub(super) fn landmarks(lens: &LensSystem) -> Result<Vec<Landmarks>> {
    let mut groups = vec![Landmarks::new(
        lens.lenses().iter().map(|l| l.position).collect(),
        0.0,
    )];
    for curve in crate::caustics::caustic_curves(lens)? {
        let every = curve.len().div_ceil(CLEARANCE_POINTS).max(1);
        let kept: Vec<Complex64> = curve
            .iter()
            .step_by(every)
            .chain(curve.last())
            .map(|&(x, y)| Complex64::new(x, y))
            .collect();
        let gap = kept
            .windows(2)
            .map(|w| (w[1] - w[0]).norm())
            .fold(0.0, f64::max);
        groups.push(Landmarks::new(kept, gap));
    }
    Ok(groups)
}

impl Readers {
    /// The host's own magnification at `z` (Paczynski's formula in u^2, without the square
    /// root of u).
    pub(super) fn host_alone(&self, z: Complex64) -> f64 {
        let host = &self.host;
        let u2 = ((z - host.position).norm_sqr() / host.mass).max(1e-24);
        (u2 + 2.0) / (u2 * (u2 + 4.0)).sqrt()
    }

    /// The source's clearance at `z`: for each group of landmarks, its distance from the
    /// nearest less the group's gap; the least of these (a lower bound on the distance from
    /// the lenses and caustics).
    pub(super) fn clearance(&self, z: Complex64) -> f64 {
        self.landmarks
            .iter()
            .fold(f64::INFINITY, |best, group| group.clearance(z, best))
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Engine, PolygonMapping};
    use crate::map::Window;

    /// A point's values at every radius from the interleaved readers are those of each
    /// reader's own read of its cell (`Preconvolved::read_cell`, itself checked against the
    /// full bilinear read in curve::convolve), bit for bit.
    #[test]
    fn interleaved_reads_equal_each_readers_own() {
        let lens = LensSystem::binary(1.1, 0.01).unwrap();
        let map = PolygonMapping::new(1.0)
            .build(&lens, &Window::new((0.05, 0.0), 0.3, 64).unwrap())
            .unwrap();
        let set = DataSet::parse(
            "t,flux,flux_err\n0,1,0.01\n1,1,0.01\n2,1,0.01\n",
            "a.csv",
            22.0,
        )
        .unwrap();
        let rhos = [0.006, 0.012, 0.03];
        let readers = Readers::new(&map, &[set], &rhos, &mut Vec::new()).unwrap();
        let (row, stacked) = (&readers.convolved[0], &readers.stacked[0]);
        let widest = row[readers.widest[0].unwrap()].as_ref().unwrap();
        let mut out = vec![0.0; stacked.readers.len()];
        let mut read = 0;
        for k in 0..2000 {
            let (a, b) = (
                (k as f64 * 0.754_877_666).fract(),
                (k as f64 * 0.569_840_29).fract(),
            );
            let Some(c) = widest.cell(-0.1 + 0.3 * a, -0.15 + 0.3 * b) else {
                continue;
            };
            read += 1;
            stacked.read(&c, &mut out);
            for (v, &r) in out.iter().zip(&stacked.readers) {
                let own = row[r].as_ref().unwrap().read_cell(&c);
                assert_eq!(v.to_bits(), own.to_bits());
            }
        }
        assert!(read > 500 && stacked.readers.len() == 3, "{read}");
    }

    /// The clearance with its chunks and groups skipped by their boxes equals the plain
    /// minimum over every landmark of each group (its definition in `Readers::clearance`),
    /// bit for bit, near and far from the caustics of a planetary and a resonant binary.
    #[test]
    fn skipping_by_boxes_keeps_the_plain_minimum() {
        for (s, q) in [(1.3, 3e-3), (1.0, 0.3)] {
            let groups = landmarks(&LensSystem::binary(s, q).unwrap()).unwrap();
            let plain = |z: Complex64| {
                groups
                    .iter()
                    .map(|g| {
                        let d2 = g
                            .points
                            .iter()
                            .map(|p| (z - p).norm_sqr())
                            .fold(f64::INFINITY, f64::min);
                        (d2.sqrt() - g.gap).max(0.0)
                    })
                    .fold(f64::INFINITY, f64::min)
            };
            for k in 0..3000 {
                let (a, b) = (
                    (k as f64 * 0.754_877_666).fract(),
                    (k as f64 * 0.569_840_29).fract(),
                );
                let z = Complex64::new(-2.0 + 4.0 * a, -1.0 + 2.0 * b);
                let fast = groups.iter().fold(f64::INFINITY, |m, g| g.clearance(z, m));
                assert_eq!(fast.to_bits(), plain(z).to_bits(), "at {z}");
            }
        }
    }
}
