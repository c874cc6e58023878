//! The whole fit as one library call (`fit::event::fit_event`): maps in memory, times on a
//! JD scale, outliers and error bars that are too small.

use causeway::curve::time_range;
use causeway::engine::{Engine, PolygonMapping};
use causeway::fit::event::{fit_event, FitOptions, FitResult};
use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::refine::{exact_chi2, Refined};
use causeway::fit::search::MapSource;
use causeway::fit::simulate::{Noise, Simulation};
use causeway::map::MagnificationMap;
use causeway::progress::Silent;
use causeway::source::LimbDarkening;
use causeway::store::library::WindowRule;

/// A wide planet whose source crosses the planetary caustic 11 days after the peak.
fn truth(t0: f64) -> BinaryModel {
    BinaryModel {
        s: 1.3,
        q: 3e-3,
        rho: 3e-3,
        trajectory: Trajectory::straight(t0, 0.15, 25.0, (360.0f64 - 16.44).to_radians()).unwrap(),
    }
}

/// The planetary-caustic map of the truth's binary, 400^2 pixels.
fn map() -> MagnificationMap {
    let lens = truth(0.0).lens().unwrap();
    let window = WindowRule::Planetary {
        margin: 1.5,
        pixels: 400,
    }
    .window(&lens)
    .unwrap();
    PolygonMapping::new(1.0).build(&lens, &window).unwrap()
}

/// 500 points over +-50 days of the truth at `t0`, 0.01 flux errors, blend 0.2; every point's
/// scatter `scale` times its error bar, and points `outliers` moved by 30 errors.
fn data(t0: f64, scale: f64, outliers: &[usize]) -> Vec<DataSet> {
    let times: Vec<f64> = time_range(-50.0, 50.0, 500)
        .unwrap()
        .into_iter()
        .map(|t| t + t0)
        .collect();
    let sim = Simulation {
        fb: 0.2,
        noise: Noise::Flux {
            sigma: 0.01 * scale,
        },
        seed: 5,
        ..Simulation::new(truth(t0), LimbDarkening::Uniform)
    };
    let mut s = sim.synthesize(&times).unwrap();
    for e in &mut s.errors {
        *e = 0.01;
    }
    for &i in outliers {
        s.values[i] += 0.3;
    }
    vec![DataSet::parse(&s.to_csv(), "site.csv", 22.0).unwrap()]
}

/// Asserts that `b` is the minimum `a`: s and q within `part` of `a`'s uncertainties, chi^2
/// within `chi2`.
fn assert_same_minimum(a: &Refined, b: &Refined, part: f64, chi2: f64) {
    assert!(
        (a.model.s - b.model.s).abs() < part * a.sigma[0],
        "{a:?}\n{b:?}"
    );
    assert!(
        (a.model.q - b.model.q).abs() < part * a.sigma[1],
        "{a:?}\n{b:?}"
    );
    assert!((a.chi2 - b.chi2).abs() < chi2, "{a:?}\n{b:?}");
}

fn fit(data: &[DataSet], map: &MagnificationMap) -> FitResult {
    fit_with(data, map, FitOptions::default())
}

/// `options` with the trial radii of these events.
fn fit_with(data: &[DataSet], map: &MagnificationMap, options: FitOptions) -> FitResult {
    let options = FitOptions {
        rule: causeway::fit::search::GridRule {
            rhos: vec![2e-3, 3e-3, 4.5e-3],
            ..Default::default()
        },
        ..options
    };
    fit_event(
        data,
        MapSource::Loaded(std::slice::from_ref(map)),
        &options,
        &Silent,
    )
    .unwrap()
}

/// A fit whose time limit has passed before its refinement began still ends: every pass
/// returns what it has at once, the minima carry their uncertainties' stage, and a note says
/// the limit was reached; the unlimited fit of the same data gains on it (its refinement ran)
/// and carries no such note.
#[test]
fn a_fit_past_its_time_limit_reports_where_it_stood() {
    let map = map();
    let data = data(0.0, 1.0, &[]);
    let limited = fit_with(
        &data,
        &map,
        FitOptions {
            time_limit: Some(std::time::Duration::from_millis(1)),
            ..FitOptions::default()
        },
    );
    assert!(!limited.minima.is_empty());
    assert!(
        limited.notes.iter().any(|n| n.starts_with("time limit:")),
        "{:?}",
        limited.notes
    );
    let full = fit(&data, &map);
    assert!(!full.notes.iter().any(|n| n.starts_with("time limit:")));
    let (cut, whole) = (limited.minima[0].refined.chi2, full.minima[0].refined.chi2);
    assert!(whole < cut, "limited {cut}, unlimited {whole}");
}

#[test]
fn times_on_a_jd_scale_give_the_same_minimum() {
    let map = map();
    let near = fit(&data(0.0, 1.0, &[]), &map);
    let far = fit(&data(2_459_000.0, 1.0, &[]), &map);
    let (a, b) = (&near.minima[0].refined, &far.minima[0].refined);
    let (la, lb) = (a.model.trajectory.line(), b.model.trajectory.line());
    // The requirement: the same t0 to 1e-6 d once the offset is taken away.
    assert!(
        (lb.t0 - 2_459_000.0 - la.t0).abs() < 1e-6,
        "{} vs {}",
        la.t0,
        lb.t0
    );
    // The rest the same to a hundredth of their uncertainties: the times' rounding (2e-10 d
    // at 2.46e6) moves where each minimiser stops within its own tolerance.
    assert_same_minimum(a, b, 0.01, 1e-3);
    // And it is the truth: within one percent in s and 10% in q (the map is the truth's).
    assert!((a.model.s / 1.3 - 1.0).abs() < 0.01, "{:?}", a.model);
    assert!((a.model.q / 3e-3 - 1.0).abs() < 0.1, "{:?}", a.model);
}

#[test]
fn outliers_are_clipped_and_error_bars_rescaled() {
    let map = map();
    let outliers = [40, 260, 455];
    let data = data(0.0, 1.5, &outliers);
    let result = fit(&data, &map);
    let clipped: Vec<usize> = result
        .clipped
        .iter()
        .map(|c| data[0].times.iter().position(|&t| t == c.time).unwrap())
        .collect();
    assert_eq!(clipped, outliers);
    // The scatter is 1.5 times the error bars: the robust spread of 497 Gaussian residuals
    // has a relative standard error of about 1.17 / sqrt(2 N) = 4% (the median absolute
    // deviation's efficiency, common practice), so 1.5 within 12% is a 3-sigma check.
    let k = result.error_scales[0];
    assert!((k / 1.5 - 1.0).abs() < 0.12, "error scale {k}");
    // The fit on the cleaned data is as good as the truth there.
    let truth_chi2 = exact_chi2(&result.data, &truth(0.0), 1e-4).unwrap().0;
    assert!(
        result.minima[0].refined.chi2 <= truth_chi2 + 1.0,
        "{} vs truth {truth_chi2}",
        result.minima[0].refined.chi2
    );
}

/// A model that misses much of the data (tE a fifth too short) leaves large residuals at most
/// points; the error scale must still be the noise's (twice the stated errors, by construction),
/// not the miss's: the point-to-point scatter caps it.
#[test]
fn error_scales_are_not_inflated_by_a_wrong_model() {
    use causeway::fit::noise::{clean, robust_scale, scatter_scale};
    let data = data(0.0, 2.0, &[]);
    let model = truth(0.0);
    let l = model.trajectory.line();
    let wrong = BinaryModel {
        trajectory: Trajectory::straight(l.t0, l.u0, 0.8 * l.te, l.alpha).unwrap(),
        ..model
    };
    let a = wrong
        .magnifications(&data[0].times, LimbDarkening::Uniform, 1e-4)
        .unwrap();
    let f = causeway::fit::fluxes::fit_fluxes(&data[0], &a);
    let r: Vec<f64> = (0..data[0].len())
        .map(|i| (data[0].flux[i] - f.fs * a[i] - f.fb) / data[0].sigma(i))
        .collect();
    // The residuals alone would say otherwise.
    assert!(robust_scale(&r) > 5.0, "{}", robust_scale(&r));
    let scatter = scatter_scale(&data[0]).unwrap();
    let (_, _, scales) = clean(&data, &wrong, None, true, 1e-4).unwrap();
    // The scatter of 499 neighbouring differences: about 5% relative standard error (the
    // median absolute deviation's, common practice) plus the curve's own change, so 2 within
    // 25% is a safe bound; the scale is capped at 1.25 times the scatter.
    assert!((scales[0] / 2.0 - 1.0).abs() < 0.25, "scale {}", scales[0]);
    assert!(scales[0] <= 1.25 * scatter + 1e-12);
}

#[test]
fn parallax_options_are_checked_before_any_work() {
    // One data set but ephemerides for three: refused at once (no baseline, no search), the
    // message naming the parameter.
    let sky = causeway::parallax::SkyPosition::new(268.0, -29.0).unwrap();
    let options = FitOptions {
        motion: Some(causeway::fit::motion::MotionOptions {
            ephemerides: vec![None; 3],
            ..causeway::fit::motion::MotionOptions::new(sky)
        }),
        ..FitOptions::default()
    };
    let tiny = PolygonMapping::new(1.0)
        .build(
            &truth(0.0).lens().unwrap(),
            &causeway::map::Window::new((0.0, 0.0), 1.0, 4).unwrap(),
        )
        .unwrap();
    let err = fit_event(
        &data(0.0, 1.0, &[]),
        MapSource::Loaded(std::slice::from_ref(&tiny)),
        &options,
        &Silent,
    )
    .unwrap_err()
    .to_string();
    assert!(err.starts_with("ephemerides: 3 for 1 data sets"), "{err}");
}

/// A plain single lens (the companion 1e-7 of the host, far from the line) with one point
/// moved by 30 errors, searched with the planet's map: a caustic passed at the point's time
/// would gain about 900 (30^2) by explaining it alone. The point is left out before the search,
/// listed, and the best binary gains no more than noise over the single lens.
#[test]
fn a_lone_outlier_is_not_explained_by_a_binary() {
    let model = BinaryModel {
        q: 1e-7,
        ..truth(0.0)
    };
    let times = time_range(-50.0, 50.0, 500).unwrap();
    let sim = Simulation {
        fb: 0.2,
        noise: Noise::Flux { sigma: 0.01 },
        seed: 9,
        ..Simulation::new(model, LimbDarkening::Uniform)
    };
    let mut s = sim.synthesize(&times).unwrap();
    // On the bright side of the peak (t = 5.1 d), where a search line can put a caustic.
    s.values[275] += 0.3;
    let data = vec![DataSet::parse(&s.to_csv(), "site.csv", 22.0).unwrap()];
    let result = fit(&data, &map());
    assert!(
        result.clipped.iter().any(|c| c.time == times[275]),
        "{:?}",
        result.clipped
    );
    let gain = result.single.chi2 - result.minima[0].chi2_as_given;
    // A binary has four parameters more than the single lens: a gain of 25 is beyond noise.
    assert!(
        gain < 25.0,
        "gain {gain}: {:?}",
        result.minima[0].refined.model
    );
}

/// Data merged for the search (500 points asked down to 200, `fit::bins`; 230 where the
/// merges stop at their cost) lead to the minimum that every
/// point does: the search only starts the refinement, which fits every point, and the merges
/// take the flat stretches, not the caustic crossing. Within a tenth of the uncertainties in
/// s and q and 0.1 in chi^2 (the minimiser's tolerance; the same data at the minimum), and
/// the truth's (s, q) as in the test above.
#[test]
fn data_merged_for_the_search_reach_the_same_minimum() {
    let map = map();
    let data = data(0.0, 1.0, &[]);
    let every = fit(&data, &map);
    let merged = fit_with(
        &data,
        &map,
        FitOptions {
            search_points: Some(200),
            ..FitOptions::default()
        },
    );
    assert!(
        merged
            .notes
            .iter()
            .any(|n| n.contains("500 points merged into")),
        "{:?}",
        merged.notes
    );
    assert!(!every.notes.iter().any(|n| n.contains("merged into")));
    let (a, b) = (&every.minima[0].refined, &merged.minima[0].refined);
    let points = |f: &FitResult| f.data.iter().map(DataSet::len).sum::<usize>();
    assert_eq!(points(&merged), points(&every));
    assert_same_minimum(a, b, 0.1, 0.1);
    assert!((b.model.s / 1.3 - 1.0).abs() < 0.01, "{:?}", b.model);
}
