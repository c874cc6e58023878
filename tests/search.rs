//! Injection and recovery: events simulated from known binary models (magnifications by contour
//! integration) are searched over small map libraries and refined.

mod common;

use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::refine::{refine, Refined};
use causeway::fit::search::{local_minima, maps_of_spec, search, GridRule, Seed};
use causeway::source::LimbDarkening;
use causeway::store::library::{self, LibrarySpec};
use causeway::store::Store;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

/// Synthetic flux photometry of `model` with Gaussian errors of `sigma` (flux units), fs = 1,
/// fb = 0.2.
fn simulate(model: &BinaryModel, times: &[f64], sigma: f64, seed: u64) -> DataSet {
    let a = model
        .magnifications(times, LimbDarkening::Uniform, 1e-6)
        .unwrap();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let noise = Normal::new(0.0, sigma).unwrap();
    let mut text = String::from("t,flux,flux_err\n");
    for (t, a) in times.iter().zip(a) {
        text += &format!("{t},{},{sigma}\n", a + 0.2 + noise.sample(&mut rng));
    }
    DataSet::parse(&text, "simulated.csv", 22.0).unwrap()
}

#[test]
fn a_planetary_caustic_crossing_is_recovered() {
    let alpha = 2.0 * std::f64::consts::PI - 0.287;
    let truth = BinaryModel {
        s: 1.3,
        q: 3e-3,
        rho: 3e-3,
        trajectory: Trajectory::straight(0.0, 0.15, 25.0, alpha).unwrap(),
    };
    let times: Vec<f64> = (0..600).map(|k| -60.0 + 0.2 * k as f64).collect();
    let data = vec![simulate(&truth, &times, 0.01, 11)];
    let dir = common::scratch("search-planetary");
    let store = Store::open(&dir).unwrap();
    let spec = LibrarySpec::parse(
        "s = {log = [1.15, 1.45, 5]}\nq = {log = [1e-3, 1e-2, 5]}\npixels = 500\nrays = 1\n\
         engine = \"polygon\"\n[window]\nrule = \"planetary\"\n",
        "lib.toml",
    )
    .unwrap();
    let t = std::time::Instant::now();
    library::build(&store, &spec.points().unwrap(), |_, _| {}).unwrap();
    eprintln!("library {:?}", t.elapsed());
    let maps = maps_of_spec(&store, &spec).unwrap();
    let seed = Seed {
        t0: 0.3,
        u0: 0.16,
        te: 24.0,
    };
    let rule = GridRule {
        rhos: vec![1.5e-3, 3e-3, 6e-3],
        ..GridRule::default()
    };
    let t = std::time::Instant::now();
    let outcomes = search(&data, &seed, &maps, &rule, &|| {}).unwrap();
    let traj: u64 = outcomes.iter().map(|o| o.trajectories).sum();
    let pts: u64 = outcomes.iter().map(|o| o.points).sum();
    eprintln!(
        "search {:?}: {traj} trajectories, {pts} points",
        t.elapsed()
    );
    let minima = local_minima(&outcomes);
    for &i in &minima {
        let o = &outcomes[i];
        let c = o.candidates[0];
        eprintln!(
            "min s={} q={} chi2={} alpha={} u0={} rho={}",
            o.s,
            o.q,
            c.chi2,
            c.model.trajectory.line().alpha,
            c.model.trajectory.line().u0,
            c.model.rho
        );
    }
    let t = std::time::Instant::now();
    let best = outcomes[minima[0]].candidates[0];
    let r: Refined = refine(&data, &best.model, 1e-4, 400).unwrap();
    eprintln!(
        "refine {:?}: {:?} evals {}",
        t.elapsed(),
        r.model,
        r.evaluations
    );
    eprintln!("sigma {:?} chi2 {}", r.sigma, r.chi2);
    assert!((r.model.s / truth.s).ln().abs() < 0.06);
}
