//! Pre-convolution of only the parts of a map that a curve's sources reach.
//!
//! A curve of a few thousand points crosses a band of the map a few source radii wide, so
//! convolving the whole map (and its four binned copies) spends most of the transforms on
//! pixels no read looks at. The points are therefore cut, in order, into runs whose pixel
//! extent stays within [`run_extent`], and each run gets a square crop of the map reaching
//! [`crop_margin`] pixels beyond its points: the source's kernel, the bilinear read, the
//! stencil of [`Preconvolved::interpolation_bound`], the binned copies' kernels and the noise
//! term's rim samples all fall inside it. A crop starts on an even pixel, so its binned copies
//! are the map's own, bin for bin: a read of a crop and its estimate are those of the whole map,
//! to the transforms' round-off. A square of side `s + 2M` serves a stretch of `s` pixels of
//! path, so its cost per pixel of path is least at `s = 2M`; a run closes when its extent would
//! pass that. Crops that together hold more pixels than the map give way to the whole map.

use super::convolve::{Kernel, MapSpectrum, Preconvolved, Route};
use super::estimate::Coarse;
use super::sample::disks_in_pixels;
use crate::error::Result;
use crate::map::{MagnificationMap, Window};
use crate::source::SourceProfile;
use rayon::prelude::*;

/// Pixels a crop reaches beyond its points for a source of largest disk radius `r` pixels
/// whose map errors are correlated over `step` pixels: the kernel's half-width
/// `ceil(r + 1/2)`, the interpolation stencil (3), a binned pixel and its offset (3), and the
/// noise term's neighbours (`step`).
pub(super) fn crop_margin(r: f64, step: usize) -> usize {
    (r + 0.5).ceil() as usize + 6 + step
}

/// The largest extent, in pixels, of the points of one run: twice the crop margin.
fn run_extent(margin: usize) -> f64 {
    2.0 * margin as f64
}

/// One crop: its lower-left pixel on the map and its side, in pixels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Crop {
    ix: usize,
    iy: usize,
    side: usize,
}

impl Crop {
    /// Side in pixels.
    pub(super) fn side(&self) -> usize {
        self.side
    }

    /// The crop as a map of its own.
    pub(super) fn cut(&self, map: &MagnificationMap) -> MagnificationMap {
        let w = &map.window;
        let d = w.pixel_size();
        let (x0, y0) = w.origin();
        let half = 0.5 * self.side as f64;
        let window = Window::new(
            (
                x0 + (self.ix as f64 + half) * d,
                y0 + (self.iy as f64 + half) * d,
            ),
            self.side as f64 * d,
            self.side,
        )
        .expect("a crop lies inside its map");
        let data = map
            .data
            .slice(ndarray::s![
                self.iy..self.iy + self.side,
                self.ix..self.ix + self.side
            ])
            .to_owned();
        MagnificationMap {
            window,
            data,
            provenance: map.provenance.clone(),
        }
    }
}

/// The crops of a curve and the crop of each point (`None` off the map).
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Plan {
    pub(super) crops: Vec<Crop>,
    pub(super) of_point: Vec<Option<usize>>,
}

impl Plan {
    /// Cuts `points` into runs and gives each a crop of `map` for `profile` (`step` as in
    /// [`crop_margin`]).
    pub(super) fn new(
        map: &MagnificationMap,
        profile: &SourceProfile,
        step: usize,
        points: &[(f64, f64)],
    ) -> Self {
        let w = &map.window;
        let (n, d) = (w.pixels, w.pixel_size());
        let (x0, y0) = w.origin();
        let r = disks_in_pixels(profile, d)
            .iter()
            .map(|&(r, _)| r)
            .fold(0.0, f64::max);
        let margin = crop_margin(r, step);
        let limit = run_extent(margin);
        let mut crops = Vec::new();
        let mut of_point = Vec::with_capacity(points.len());
        // The open run's box in pixel coordinates: (u_min, u_max, v_min, v_max).
        let mut run: Option<[f64; 4]> = None;
        let close = |b: [f64; 4], crops: &mut Vec<Crop>| crops.push(square(b, margin, n));
        for &(x, y) in points {
            let (u, v) = ((x - x0) / d, (y - y0) / d);
            if !(u >= 0.0 && v >= 0.0 && u <= n as f64 && v <= n as f64) {
                if let Some(b) = run.take() {
                    close(b, &mut crops);
                }
                of_point.push(None);
                continue;
            }
            let grown = match run {
                Some([a, b, c, e]) => [a.min(u), b.max(u), c.min(v), e.max(v)],
                None => [u, u, v, v],
            };
            if (grown[1] - grown[0]).max(grown[3] - grown[2]) > limit {
                close(run.expect("a run this wide holds a point"), &mut crops);
                run = Some([u, u, v, v]);
            } else {
                run = Some(grown);
            }
            of_point.push(Some(crops.len()));
        }
        if let Some(b) = run {
            close(b, &mut crops);
        }
        // Crops that cover more than the map, together, cost more than the map.
        if crops.iter().map(|c| c.side * c.side).sum::<usize>() >= n * n {
            let whole = Crop {
                ix: 0,
                iy: 0,
                side: n,
            };
            return Plan {
                crops: vec![whole],
                of_point: of_point.iter().map(|k| k.map(|_| 0)).collect(),
            };
        }
        Plan { crops, of_point }
    }
}

/// The square crop reaching `margin` pixels beyond the box `[u0, u1] x [v0, v1]`, starting on
/// an even pixel, moved inside a map of `n` pixels (the whole map if it does not fit).
fn square([u0, u1, v0, v1]: [f64; 4], margin: usize, n: usize) -> Crop {
    let lo = |t: f64| t.floor() as isize - margin as isize;
    let hi = |t: f64| t.floor() as isize + margin as isize;
    let (ax, bx, ay, by) = (lo(u0), hi(u1), lo(v0), hi(v1));
    // Even start and even side (two pixels to spare for both), the shorter extent centred.
    let mut side = ((bx - ax).max(by - ay) + 4) as usize;
    side += side % 2;
    if side >= n {
        return Crop {
            ix: 0,
            iy: 0,
            side: n,
        };
    }
    let place = |a: isize, b: isize| {
        let start = (a + b + 1 - side as isize) / 2;
        let start = start - start.rem_euclid(2);
        start.clamp(0, (n - side) as isize) as usize
    };
    Crop {
        ix: place(ax, bx),
        iy: place(ay, by),
        side,
    }
}

/// A crop's convolution with the profile and its binned copies' (for the estimate).
pub(super) struct Convolved {
    pub(super) fine: Preconvolved,
    pub(super) coarse: Vec<Preconvolved>,
}

/// The crops of `plan` convolved with `profile`, each with its binned copies (the two kernels
/// made once for all crops).
pub(super) fn convolve(
    map: &MagnificationMap,
    plan: &Plan,
    profile: &SourceProfile,
) -> Result<Vec<Convolved>> {
    let d = map.window.pixel_size();
    let (fine_kernel, coarse_kernel) = (Kernel::new(profile, d), Kernel::new(profile, 2.0 * d));
    let convolve = |m: &MagnificationMap, kernel: &Kernel| {
        Preconvolved::with_kernel(&MapSpectrum::new(m), profile, kernel, Route::Auto)
    };
    plan.crops
        .par_iter()
        .map(|c| {
            let crop = c.cut(map);
            let coarse = Coarse::new(&crop)
                .map(|c| {
                    c.maps()
                        .iter()
                        .filter_map(|m| convolve(m, &coarse_kernel).ok())
                        .collect()
                })
                .unwrap_or_default();
            Ok(Convolved {
                fine: convolve(&crop, &fine_kernel)?,
                coarse,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn single_lens_map(pixels: usize) -> MagnificationMap {
        use crate::engine::{Engine, RayShooting};
        let window = Window::new((0.0, 0.0), 1.0, pixels).unwrap();
        RayShooting::new(1.0)
            .build(&crate::lens::LensSystem::single(), &window)
            .unwrap()
    }

    #[test]
    fn runs_are_cut_along_a_path_and_a_crowded_plan_takes_the_whole_map() {
        let map = single_lens_map(400);
        let profile = SourceProfile::uniform(0.01).unwrap(); // 4 pixels: margin 5 + 6 + 1
        let line: Vec<(f64, f64)> = (0..200).map(|k| (-0.45 + 0.0045 * k as f64, 0.1)).collect();
        let plan = Plan::new(&map, &profile, 1, &line);
        // 360 pixels of path in runs of at most 24: 14 or more crops, each of side 24 + 24 + 4
        // at most, in order along the path.
        assert!(plan.crops.len() >= 14, "{:?}", plan.crops);
        assert!(plan.crops.iter().all(|c| c.side <= 52));
        assert!(plan.of_point.windows(2).all(|w| w[0] <= w[1]));
        // Every point lies a margin inside its crop.
        for (&(x, y), k) in line.iter().zip(&plan.of_point) {
            let c = plan.crops[k.unwrap()];
            let (u, v) = ((x + 0.5) * 400.0, (y + 0.5) * 400.0);
            assert!(u - c.ix as f64 >= 12.0 && (c.ix + c.side) as f64 - u >= 12.0);
            assert!(v - c.iy as f64 >= 12.0 && (c.iy + c.side) as f64 - v >= 12.0);
        }
        // Back and forth over the map: the crops would hold more than the map.
        let zigzag: Vec<(f64, f64)> = (0..2000)
            .map(|k| {
                (
                    -0.45 + 0.0045 * (k % 200) as f64,
                    -0.45 + 0.00045 * k as f64,
                )
            })
            .collect();
        let plan = Plan::new(&map, &profile, 1, &zigzag);
        assert_eq!(
            plan.crops,
            vec![Crop {
                ix: 0,
                iy: 0,
                side: 400
            }]
        );
        // Off the map: no crop.
        let plan = Plan::new(&map, &profile, 1, &[(2.0, 0.0)]);
        assert_eq!(plan.of_point, vec![None]);
    }

    #[test]
    fn squares_start_even_and_stay_inside() {
        for (b, n) in [
            ([10.2, 40.7, 3.1, 9.9], 100),
            ([0.0, 0.0, 99.9, 99.9], 100),
            ([5.5, 90.0, 5.5, 6.0], 80),
        ] {
            let c = square(b, 12, n);
            assert_eq!(c.ix % 2, 0);
            assert_eq!(c.iy % 2, 0);
            assert!(c.ix + c.side <= n && c.iy + c.side <= n, "{c:?}");
            if c.side < n {
                // Every point of the box lies `margin` pixels inside the crop.
                assert!(c.ix as f64 <= b[0].floor() - 12.0 || c.ix == 0);
                assert!((c.ix + c.side) as f64 >= b[1].floor() + 13.0 || c.ix + c.side == n);
                assert!(c.iy as f64 <= b[2].floor() - 12.0 || c.iy == 0);
                assert!((c.iy + c.side) as f64 >= b[3].floor() + 13.0 || c.iy + c.side == n);
            }
        }
    }
}
