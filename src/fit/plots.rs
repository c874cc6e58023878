//! Pictures of a search: the chi^2 map over (s, q), and the best model over the data.

use super::minima::Minimum;
use super::photometry::DataSet;
use super::search::{grid_axes, MapOutcome};
use super::single::SingleLensFit;
use crate::error::{Error, Result};
use crate::fsutil::write_png;
use crate::lens::paczynski;
use crate::plot::axes::{Frame, Scale, INK, PAD};
use crate::plot::colourbar::ColourBar;
use crate::plot::draw::{dot, fill, Rect};
use crate::plot::text::{self, Anchor};
use crate::plot::{write_stacked_png, Axis, Chart, Series, Style, PALETTE, TEXT};
use image::{Rgb, RgbImage};
use std::path::Path;

/// Size of the chi^2 map picture.
const CHI2_SIZE: (i64, i64) = (1000, 760);
/// Cells of maps whose search evaluated no trajectory.
const EMPTY: Rgb<u8> = Rgb([200, 200, 205]);
const PAPER: Rgb<u8> = Rgb([255, 255, 255]);

/// Draws the chi^2 map over (s, q) into a PNG at `path` (written atomically): each library
/// map a filled cell coloured by its best search chi^2 less the best map's (on a log10(1 +
/// delta) scale), both axes logarithmic, the refined minima marked with their rank, the legend
/// above the plot.
pub fn chi2_map_png(outcomes: &[MapOutcome], minima: &[Minimum], path: &Path) -> Result<()> {
    write_png(path, &chi2_map(outcomes, minima)?)
}

/// Colour of a position on the chi^2 scale: reversed viridis, the best maps brightest.
fn chi2_colour(t: f64) -> Rgb<u8> {
    let c = colorous::VIRIDIS.eval_continuous(1.0 - t.clamp(0.0, 1.0));
    Rgb([c.r, c.g, c.b])
}

/// Cell edges (log10) around sorted distinct values: midpoints between neighbours, half a
/// step beyond the ends (a tenth of a decade around a single value).
fn cell_edges(values: &[f64]) -> Vec<f64> {
    let logs: Vec<f64> = values.iter().map(|v| v.log10()).collect();
    if logs.len() == 1 {
        return vec![logs[0] - 0.1, logs[0] + 0.1];
    }
    let mut edges = vec![logs[0] - 0.5 * (logs[1] - logs[0])];
    edges.extend(logs.windows(2).map(|w| 0.5 * (w[0] + w[1])));
    let n = logs.len();
    edges.push(logs[n - 1] + 0.5 * (logs[n - 1] - logs[n - 2]));
    edges
}

fn chi2_map(outcomes: &[MapOutcome], minima: &[Minimum]) -> Result<RgbImage> {
    let best = outcomes
        .iter()
        .map(MapOutcome::best_chi2)
        .fold(f64::INFINITY, f64::min);
    if !best.is_finite() {
        return Err(Error::Numerical(
            "chi2 map: no map has a finite chi^2".into(),
        ));
    }
    let worst = outcomes
        .iter()
        .map(MapOutcome::best_chi2)
        .filter(|c| c.is_finite())
        .fold(best, f64::max);
    let top_log = (1.0 + worst - best).log10().max(1.0);
    let position = |chi2: f64| (1.0 + chi2 - best).log10() / top_log;
    let (ss, qs) = grid_axes(outcomes);
    let (xe, ye) = (cell_edges(&ss), cell_edges(&qs));
    let mut ticks: Vec<(f64, String)> = vec![(0.0, "0".into())];
    for (t, label) in Scale::log(0.0, top_log).ticks() {
        let p = (1.0 + 10f64.powf(t)).log10() / top_log;
        if p - ticks[ticks.len() - 1].0 > 0.05 && p <= 1.0 {
            ticks.push((p, label));
        }
    }
    let bar = ColourBar {
        label: "chi2 - chi2 of the best map",
        colour: &chi2_colour,
        ticks,
    };
    let th = text::height(TEXT);
    let title_y = PAD * TEXT;
    let legend_y = title_y + th + 4 * TEXT;
    let mut img = RgbImage::from_pixel(CHI2_SIZE.0 as u32, CHI2_SIZE.1 as u32, PAPER);
    let x = Scale::log(xe[0], xe[xe.len() - 1]);
    let y = Scale::log(ye[0], ye[ye.len() - 1]);
    let left = Frame::fitted(x, y, CHI2_SIZE, 0, TEXT).area.left;
    let empty_cells = outcomes.iter().any(|o| !o.best_chi2().is_finite());
    let top = legend_y + legend(&mut img, (left, legend_y), empty_cells) + 6 * TEXT;
    let frame = Frame::fitted_with(x, y, CHI2_SIZE, top, bar.width(TEXT), TEXT);
    let area = frame.area;
    for o in outcomes {
        let i = ss.iter().position(|&v| v == o.s).unwrap_or(0);
        let j = qs.iter().position(|&v| v == o.q).unwrap_or(0);
        let (x0, y0) = frame.to_px((xe[i], ye[j + 1]));
        let (x1, y1) = frame.to_px((xe[i + 1], ye[j]));
        let cell = Rect {
            left: x0.round() as i64,
            top: y0.round() as i64,
            width: (x1.round() - x0.round()) as i64,
            height: (y1.round() - y0.round()) as i64,
        };
        let chi2 = o.best_chi2();
        let c = if chi2.is_finite() {
            chi2_colour(position(chi2))
        } else {
            EMPTY
        };
        fill(&mut img, cell, c);
    }
    for (rank, m) in minima.iter().enumerate() {
        let p = frame.to_px((m.refined.model.s.log10(), m.refined.model.q.log10()));
        if area.contains(p.0 as i64, p.1 as i64) {
            mark(&mut img, p, area);
            let label = format!("{}", rank + 1);
            let at = (p.0 as i64 + 8, p.1 as i64 - th - 4);
            let w = text::width(&label, TEXT);
            let r = Rect {
                left: at.0 - 2,
                top: at.1 - 2,
                width: w + 4,
                height: th + 4,
            };
            fill(
                &mut img,
                Rect {
                    width: r.width.min(area.left + area.width - r.left),
                    ..r
                },
                PAPER,
            );
            text::draw(&mut img, at, &label, TEXT, INK, Anchor::Left);
        }
    }
    bar.finish(
        &mut img,
        &frame,
        ("best search chi2 of each map over (s, q)", title_y),
        ("separation s", "mass ratio q"),
        TEXT,
    );
    Ok(img)
}

/// A refined minimum: a white square edged in black.
fn mark(img: &mut RgbImage, p: (f64, f64), clip: Rect) {
    dot(img, p, 13, INK, clip);
    dot(img, p, 9, PAPER, clip);
}

/// The legend above the plot: the minimum's mark, and the empty cell when there is one (on a
/// second row when the first is full); returns the height it takes.
fn legend(img: &mut RgbImage, (x, y): (i64, i64), empty_cells: bool) -> i64 {
    let th = text::height(TEXT);
    let all = Rect::of(img);
    mark(img, ((x + 7) as f64, (y + th / 2) as f64), all);
    let first = "refined minimum and its rank";
    text::draw(img, (x + 20, y), first, TEXT, INK, Anchor::Left);
    if !empty_cells {
        return th;
    }
    let second = "map where no trajectory was evaluated";
    let mut at = (x + 20 + text::width(first, TEXT) + 30, y);
    if at.0 + th + 6 + text::width(second, TEXT) > img.width() as i64 - PAD * TEXT {
        at = (x, y + th + 3 * TEXT);
    }
    fill(
        img,
        Rect {
            left: at.0,
            top: at.1,
            width: th,
            height: th,
        },
        EMPTY,
    );
    text::draw(img, (at.0 + th + 6, at.1), second, TEXT, INK, Anchor::Left);
    at.1 + th - y
}

/// Draws the data of every set as magnification, `(F - fb) / fs` with that set's fluxes at the
/// best model, over the best model's curve and the single-lens curve: the whole span, a zoom
/// on the anomaly (where the two models differ most), and the residuals in units of each
/// point's error. The single lens keeps the source and blend fluxes of its own fit: its curve
/// is `(fs' A + fb' - fb) / fs` with its fluxes `fs', fb'` and the binary's `fs, fb` of the
/// data set with the most points.
///
/// `curve` holds the best model's magnification at `curve_times` (dense, increasing), and
/// `at_data` its exact magnification at every point of each data set (for the residuals).
pub fn model_png(
    data: &[DataSet],
    single: &SingleLensFit,
    best: &Minimum,
    (curve_times, curve): (&[f64], &[f64]),
    at_data: &[Vec<f64>],
    path: &Path,
) -> Result<()> {
    let r = &best.refined;
    if single.fluxes.len() != data.len() || r.fluxes.len() != data.len() {
        return Err(Error::Numerical(
            "model plot: fluxes of every data set are needed".into(),
        ));
    }
    // The frame of the largest set: its binary fluxes, and the single lens's own.
    let frame_set = (0..data.len()).max_by_key(|&k| data[k].len()).unwrap_or(0);
    let (own, binary) = (&single.fluxes[frame_set], &r.fluxes[frame_set]);
    let single_a = |t: f64| {
        let tau = (t - single.t0) / single.te;
        let a = paczynski(tau.hypot(single.u0).max(1e-12));
        (own.fs * a + own.fb - binary.fb) / binary.fs
    };
    let model: Vec<(f64, f64)> = curve_times
        .iter()
        .copied()
        .zip(curve.iter().copied())
        .collect();
    let baseline: Vec<(f64, f64)> = curve_times.iter().map(|&t| (t, single_a(t))).collect();
    // The anomaly: where the two curves differ most, framed by the binary's source-crossing
    // scale (at least a tenth of tE).
    let (t_peak, _) = model
        .iter()
        .zip(&baseline)
        .filter(|(m, b)| m.1 > 0.0 && b.1 > 0.0)
        .map(|(m, b)| (m.0, (m.1 / b.1).ln().abs()))
        .fold((curve_times[0], -1.0), |a, b| if b.1 > a.1 { b } else { a });
    let te = r.model.trajectory.line().te;
    let span = (0.1 * te).min(0.5 * (curve_times[curve_times.len() - 1] - curve_times[0]));
    let zoom = (t_peak - span, t_peak + span);
    let mut full = Chart::new(
        "best model over the data",
        Axis::linear("t (days)"),
        Axis::log("magnification"),
    );
    let mut near = Chart::new(
        "the anomaly",
        Axis::linear("t (days)"),
        Axis::log("magnification"),
    );
    near.x.range = Some(zoom);
    let mut residuals = Chart::new(
        "residuals of the best model",
        Axis::linear("t (days)"),
        Axis::linear("(data - model) / error"),
    );
    for (k, (set, f)) in data.iter().zip(&r.fluxes).enumerate() {
        let observed: Vec<(f64, f64)> = set
            .times
            .iter()
            .zip(&set.flux)
            .map(|(&t, &fl)| (t, (fl - f.fb) / f.fs))
            .collect();
        let inside: Vec<(f64, f64)> = observed
            .iter()
            .copied()
            .filter(|p| p.0 >= zoom.0 && p.0 <= zoom.1)
            .collect();
        let resid: Vec<(f64, f64)> = set
            .times
            .iter()
            .zip(&at_data[k])
            .enumerate()
            .map(|(i, (&t, &a))| (t, (set.flux[i] - f.fs * a - f.fb) / set.sigma(i)))
            .collect();
        let name: String = set.name.chars().take(28).collect();
        let colour = PALETTE[(k + 2) % PALETTE.len()];
        for (chart, points) in [
            (&mut full, observed),
            (&mut near, inside),
            (&mut residuals, resid),
        ] {
            chart.add(
                Series::line(&name, points)
                    .styled(Style::Markers)
                    .coloured(colour)
                    .marker_size(1),
            );
        }
    }
    let zoomed = |c: &[(f64, f64)]| -> Vec<(f64, f64)> {
        c.iter()
            .copied()
            .filter(|p| p.0 >= zoom.0 && p.0 <= zoom.1)
            .collect()
    };
    for (chart, pick) in [(&mut full, false), (&mut near, true)] {
        let (m, b) = if pick {
            (zoomed(&model), zoomed(&baseline))
        } else {
            (model.clone(), baseline.clone())
        };
        chart.add(Series::line("binary model", m).coloured(PALETTE[0]));
        chart.add(Series::line("single lens (its own fluxes)", b).coloured(PALETTE[1]));
    }
    write_stacked_png(&[full, near, residuals], path)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fluxes::FluxFit;
    use crate::fit::model::{BinaryModel, Trajectory};
    use crate::fit::photometry::Measured;
    use crate::fit::refine::Refined;
    use crate::fit::search::Candidate;
    use crate::plot::check::{blank_border, framed, inked};
    use crate::source::LimbDarkening;
    use image::GenericImageView;

    fn model(s: f64, q: f64) -> BinaryModel {
        BinaryModel {
            s,
            q,
            rho: 1e-3,
            trajectory: Trajectory::straight(0.0, 0.1, 20.0, 0.5).unwrap(),
        }
    }

    fn minimum(s: f64, q: f64, fluxes: Vec<FluxFit>) -> Minimum {
        Minimum {
            refined: Refined {
                model: model(s, q),
                sigma: [f64::NAN; 7],
                chi2: 100.0,
                fluxes,
                evaluations: 0,
            },
            search_chi2: 100.0,
            partner: None,
            chi2_as_given: 100.0,
        }
    }

    /// A 6 x 5 grid over (s, q), chi^2 smallest at (1, 1e-3), one map without a trajectory.
    fn grid() -> Vec<MapOutcome> {
        let mut out = Vec::new();
        for i in 0..6 {
            for j in 0..5 {
                let (s, q) = (0.5 * 1.32f64.powi(i), 1e-5 * 10f64.powi(j));
                let d = (s.log10() / 0.1).powi(2) + ((q.log10() + 3.0) / 0.5).powi(2);
                let candidates = if (i, j) == (5, 0) {
                    vec![]
                } else {
                    vec![Candidate {
                        model: model(s, q),
                        chi2: 500.0 + 300.0 * d * d,
                    }]
                };
                out.push(MapOutcome {
                    s,
                    q,
                    candidates,
                    plain: vec![],
                    trajectories: 1,
                    points: 1,
                    notes: vec![],
                });
            }
        }
        out
    }

    #[test]
    fn chi2_map_fills_the_grid_and_labels_its_axes_bar_and_minima() {
        let minima = vec![
            minimum(1.0, 1e-3, vec![]),
            minimum(0.5 * 1.32f64.powi(4), 1e-2, vec![]),
        ];
        let img = chi2_map(&grid(), &minima).unwrap();
        assert_eq!(img.dimensions(), (CHI2_SIZE.0 as u32, CHI2_SIZE.1 as u32));
        assert!(blank_border(&img, PAPER));
        // The plot area: the first column and row that are neither paper nor ink at mid-height.
        let mid = CHI2_SIZE.1 as u32 - 100;
        let left = (0..img.width())
            .find(|&x| img.get_pixel(x, mid) == &INK)
            .unwrap() as i64;
        let right = (left as u32 + 10..img.width())
            .find(|&x| img.get_pixel(x, mid) == &INK)
            .unwrap() as i64;
        let cells = |c: Rgb<u8>| img.pixels().filter(|p| **p == c).count();
        // The best map's cell in the brightest colour, the map without a trajectory grey.
        assert!(cells(chi2_colour(0.0)) > 1000);
        assert!(cells(EMPTY) > 1000);
        let (h, w) = (CHI2_SIZE.1, CHI2_SIZE.0);
        let left_margin = Rect {
            left: 0,
            top: 100,
            width: left - 2,
            height: h - 200,
        };
        let below = Rect {
            left,
            top: h - 60,
            width: right - left,
            height: 58,
        };
        let bar = Rect {
            left: right + 2,
            top: 100,
            width: w - right - 2,
            height: h - 200,
        };
        let above = Rect {
            left,
            top: 0,
            width: right - left,
            height: 60,
        };
        for (r, what) in [
            (left_margin, "q axis"),
            (below, "s axis"),
            (bar, "colour bar"),
            (above, "title, legend"),
        ] {
            assert!(inked(&img, r), "{what}");
        }
        // Both minima marked: white squares edged in ink inside the plot area.
        let marks = img
            .enumerate_pixels()
            .filter(|(x, y, p)| {
                **p == INK
                    && (*x as i64) > left
                    && (*x as i64) < right
                    && *y > 80
                    && *y < h as u32 - 70
            })
            .count();
        assert!(marks > 2 * 40, "{marks}");
        assert!(chi2_map(&[], &minima).is_err());
    }

    #[test]
    fn the_single_lens_is_drawn_with_its_own_fluxes() {
        let times: Vec<f64> = (0..200).map(|i| -40.0 + 0.4 * i as f64).collect();
        let single = SingleLensFit {
            t0: 0.0,
            u0: 0.2,
            te: 20.0,
            sigma: [f64::NAN; 3],
            fluxes: vec![FluxFit {
                fs: 2.0,
                fb: 1.0,
                chi2: 0.0,
            }],
            chi2: 0.0,
            points: times.len(),
            bounds: vec![],
        };
        let a: Vec<f64> = times
            .iter()
            .map(|t| paczynski((t / 20.0).hypot(0.2)))
            .collect();
        let flux: Vec<f64> = a.iter().map(|a| 2.0 * a + 1.0).collect();
        let data = vec![DataSet {
            name: "survey.csv".into(),
            times: times.clone(),
            flux,
            flux_err: vec![0.01; times.len()],
            lines: (2..times.len() + 2).collect(),
            measured: Measured::Flux,
            limb_darkening: LimbDarkening::Uniform,
            error_scale: 1.0,
        }];
        // The binary's fluxes differ: its frame scales the data by another fs and fb.
        let best = minimum(
            1.0,
            1e-3,
            vec![FluxFit {
                fs: 4.0,
                fb: -1.0,
                chi2: 0.0,
            }],
        );
        let path =
            std::env::temp_dir().join(format!("causeway-unit-model-{}.png", std::process::id()));
        model_png(
            &data,
            &single,
            &best,
            (&times, &a),
            std::slice::from_ref(&a),
            &path,
        )
        .unwrap();
        let img = image::open(&path).unwrap().to_rgb8();
        std::fs::remove_file(&path).unwrap();
        assert_eq!(
            img.dimensions(),
            (crate::plot::WIDTH, 3 * crate::plot::HEIGHT)
        );
        // In the binary's frame the data are (2 A + 2) / 4; the single-lens curve, with its own
        // fluxes, runs through them: most data markers touch the curve's colour.
        let curve = Rgb(PALETTE[1]);
        let data_colour = Rgb(PALETTE[2]);
        let top = img
            .view(0, 0, crate::plot::WIDTH, crate::plot::HEIGHT)
            .to_image();
        let near_curve = top
            .enumerate_pixels()
            .filter(|(_, _, p)| **p == data_colour)
            .filter(|(x, y, _)| {
                (-4i64..=4).any(|d| {
                    let yy = *y as i64 + d;
                    yy >= 0 && yy < top.height() as i64 && top.get_pixel(*x, yy as u32) == &curve
                })
            })
            .count();
        let all = top.pixels().filter(|p| **p == data_colour).count();
        assert!(near_curve * 2 > all, "{near_curve} of {all}");
        for part in 0..3 {
            let chart = img
                .view(
                    0,
                    part * crate::plot::HEIGHT,
                    crate::plot::WIDTH,
                    crate::plot::HEIGHT,
                )
                .to_image();
            framed(&chart, 80, PAPER);
        }
    }
}
