//! Hops out of nearby false minima (`causeway::fit::hop`): from minima where the refinement of
//! two recovery-benchmark events stopped (recorded from earlier fits; the data are the
//! project's own invented events, simulated with exact magnifications), the hops reach the
//! minimum next to the simulated truth; and the hops do not depend on the thread count.

use crate::common;

use causeway::fit::hop::{hop, HopPlan, Hopped};
use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::noise::clean;
use causeway::fit::photometry::DataSet;
use causeway::fit::refine::{refine_until, Refined};
use causeway::fit::simulate::events::recovery_events;
use causeway::fit::simulate::{Noise, Simulation};
use causeway::source::LimbDarkening;

/// A model from (s, q, alpha, u0, t0, tE, rho).
fn model([s, q, alpha, u0, t0, te, rho]: [f64; 7]) -> BinaryModel {
    BinaryModel {
        s,
        q,
        rho,
        trajectory: Trajectory::straight(t0, u0, te, alpha).unwrap(),
    }
}

/// Levenberg-Marquardt alone from `start`: the nearest minimum.
fn lm(data: &[DataSet], start: &BinaryModel) -> Refined {
    refine_until(data, start, 1e-4, 600, false, None).unwrap()
}

/// The benchmark event `name`, cleaned (outliers clipped, error bars scaled) at `at` as the fit
/// cleans its data, and the minimum next to its truth there.
fn event_near(name: &str, at: &BinaryModel) -> (Vec<DataSet>, Refined) {
    let event = recovery_events()
        .unwrap()
        .into_iter()
        .find(|e| e.name == name)
        .unwrap();
    let (data, _, _) = clean(&event.data().unwrap(), at, Some(5.0), true, 1e-4).unwrap();
    let truth = lm(&data, &event.truth);
    (data, truth)
}

/// The recovery rule's margin (`BenchEvent::judge`): within 25 of the truth's chi^2 at about
/// 3,300 points.
const MARGIN: f64 = 25.0;

/// Hops (8 per round, `seed`) from the minimum next to `stopped` on the benchmark event `name`
/// (cleaned there), with `neighbours`; asserts that the start is more than [`MARGIN`] above the
/// minimum next to the truth and the hops end within it.
fn hops_below_truth(
    name: &str,
    stopped: &BinaryModel,
    neighbours: &[BinaryModel],
    seed: u64,
) -> Hopped {
    let (data, truth) = event_near(name, stopped);
    let start = lm(&data, stopped);
    assert!(
        start.chi2 > truth.chi2 + MARGIN,
        "{} vs {}",
        start.chi2,
        truth.chi2
    );
    let plan = HopPlan {
        hops: 8,
        seed,
        deadline: None,
    };
    let hopped = hop(&data, &start, neighbours, 1e-4, &plan, &|| {}).unwrap();
    assert!(
        hopped.refined.chi2 < truth.chi2 + MARGIN,
        "hopped to {} (truth's minimum {})",
        hopped.refined.chi2,
        truth.chi2
    );
    hopped
}

#[test]
#[ignore = "slow (one to two minutes on two cores): run by scripts/test"]
fn a_bridge_between_two_minima_finds_the_deeper_one_between_them() {
    // wide-2: the refinement stopped at s 1.6225 and at s 1.5706, either side of the truth.
    let stopped = model([
        1.6225, 1.1419e-3, 3.4046, 0.25931, 9003.9857, 33.907, 2.044e-3,
    ]);
    let other = model([
        1.57055, 8.4474e-4, 3.4043, 0.24024, 9004.009, 36.564, 1.925e-3,
    ]);
    let hopped = hops_below_truth("wide-2", &stopped, &[other], 1);
    assert!(hopped.kept >= 1);
    assert!((hopped.refined.model.s / 1.6 - 1.0).abs() < 0.01);
}

#[test]
#[ignore = "slow (one to two minutes on two cores): run by scripts/test"]
fn random_hops_leave_a_stellar_binarys_false_minimum() {
    // stellar-2: the refinement stopped 35 above the truth, t0 0.17 d late.
    let stopped = model([
        1.19464, 1.9751e-1, 2.2629, 0.14911, 9003.1724, 59.751, 1.021e-3,
    ]);
    hops_below_truth("stellar-2", &stopped, &[], 0x686f_7073);
}

#[test]
fn hops_are_the_same_whatever_the_thread_count() {
    // A small wide-planet event; the hops start from a point near its truth.
    let truth = model([1.6, 1e-3, 3.4034, 0.25, 0.0, 35.0, 2e-3]);
    let times: Vec<f64> = (0..300).map(|k| -30.0 + 0.2 * k as f64).collect();
    let sim = Simulation {
        fb: 0.3,
        noise: Noise::Flux { sigma: 0.005 },
        seed: 5,
        ..Simulation::new(truth, LimbDarkening::Uniform)
    };
    let data = vec![sim.run(&times).unwrap()];
    let start = lm(
        &data,
        &model([1.601, 1.01e-3, 3.4034, 0.2501, 0.0, 35.0, 2e-3]),
    );
    let runs: Vec<_> = [1, 2]
        .iter()
        .map(|&t| {
            common::with_threads(t, || {
                hop(
                    &data,
                    &start,
                    &[],
                    1e-4,
                    &HopPlan {
                        hops: 4,
                        seed: 3,
                        deadline: None,
                    },
                    &|| {},
                )
                .unwrap()
            })
        })
        .collect();
    // (The uncertainties are NaN, which compare unequal: the rest bit for bit.)
    let (a, b) = (&runs[0], &runs[1]);
    assert_eq!((a.kept, a.rounds), (b.kept, b.rounds));
    assert_eq!(a.refined.model, b.refined.model);
    assert_eq!(a.refined.chi2.to_bits(), b.refined.chi2.to_bits());
    assert!(runs[0].refined.chi2 <= start.chi2);
}
