//! Pictures of a search: the chi^2 map over (s, q), and the best model over the data.

use super::minima::Minimum;
use super::photometry::DataSet;
use super::search::{grid_axes, MapOutcome};
use super::single::SingleLensFit;
use crate::error::{Error, Result};
use crate::lens::paczynski;
use crate::plot::{plot_size, write_stacked_png, Axis, Chart, Series, Style};
use std::path::Path;

/// Upper edges of the delta chi^2 classes of the chi^2 map (the last class is open).
const CLASSES: [f64; 5] = [10.0, 100.0, 1e3, 1e4, 1e5];

/// Draws the best search chi^2 of every map over (s, q), both axes logarithmic, in classes of
/// delta chi^2 from the best map, with the refined minima marked.
pub fn chi2_map_png(outcomes: &[MapOutcome], minima: &[Minimum], path: &Path) -> Result<()> {
    let best = outcomes
        .iter()
        .map(MapOutcome::best_chi2)
        .fold(f64::INFINITY, f64::min);
    if !best.is_finite() {
        return Err(Error::Numerical(
            "chi2 map: no map has a finite chi^2".into(),
        ));
    }
    let (ss, qs) = grid_axes(outcomes);
    let (w, h) = plot_size();
    let half = (w / ss.len().max(1) as i64).min(h / qs.len().max(1) as i64) / 2 - 2;
    let mut chart = Chart::new(
        "best search chi2 per map (delta from the best map)",
        Axis::log("s"),
        Axis::log("q"),
    );
    let gradient = colorous::MAGMA;
    for k in 0..=CLASSES.len() {
        let (lo, hi) = (
            if k == 0 { 0.0 } else { CLASSES[k - 1] },
            CLASSES.get(k).copied().unwrap_or(f64::INFINITY),
        );
        let points: Vec<(f64, f64)> = outcomes
            .iter()
            .filter(|o| {
                let d = o.best_chi2() - best;
                d >= lo && d < hi
            })
            .map(|o| (o.s, o.q))
            .collect();
        let name = if hi.is_finite() {
            format!("dchi2 < {hi:.0e}")
        } else {
            format!("dchi2 >= {lo:.0e}")
        };
        let c = gradient.eval_rational(k, CLASSES.len() + 2);
        chart.add(
            Series::line(&name, points)
                .styled(Style::Markers)
                .coloured([c.r, c.g, c.b])
                .marker_size(half.max(2)),
        );
    }
    let refined: Vec<(f64, f64)> = minima
        .iter()
        .map(|m| (m.refined.model.s, m.refined.model.q))
        .collect();
    chart.add(
        Series::line("refined minima", refined)
            .styled(Style::Markers)
            .coloured([0, 200, 255])
            .marker_size(3),
    );
    chart.write_png(path)
}

/// Draws the data of every set as magnification, `(F - fb) / fs` with that set's fluxes at the
/// best model, over the best model's curve and the single-lens curve: the whole span, a zoom
/// on the anomaly (where the two models differ most), and the residuals in units of each
/// point's error.
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
    let single_a = |t: f64| {
        let tau = (t - single.t0) / single.te;
        paczynski(tau.hypot(single.u0).max(1e-12))
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
        let name = format!("data set {}", k + 1);
        let colour = crate::plot::PALETTE[(k + 2) % crate::plot::PALETTE.len()];
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
        chart.add(Series::line("binary model", m).coloured(crate::plot::PALETTE[0]));
        chart.add(Series::line("single lens", b).coloured(crate::plot::PALETTE[1]));
    }
    write_stacked_png(&[full, near, residuals], path)
}
