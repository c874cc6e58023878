//! Injection and recovery: events simulated from known binary models (magnifications by contour
//! integration) are searched over small map libraries from the fitted single-lens seed, and
//! refined: a planetary caustic crossing, a central caustic with its close/wide partner, and a
//! resonant caustic.
//!
//! The planetary and the central caustic take about a minute each on two cores (map libraries
//! and refinements): like the recovery tests they are `#[ignore]`d in the edit loop and run by
//! `scripts/test`.

use crate::common;

use causeway::curve::time_range;
use causeway::fit::minima::{refine_minima, refine_models, Minimum, RefineOptions};
use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::refine::{close_wide, refine, Refined};
use causeway::fit::search::{maps_of_spec, search, GridRule, MapOutcome, Seed};
use causeway::fit::simulate::{Noise, Simulation};
use causeway::fit::single::{fit_baseline, fit_single_lens, Baseline, BaselineOptions};
use causeway::source::LimbDarkening;
use causeway::store::library::{self, LibrarySpec};
use causeway::store::Store;

/// Synthetic photometry of `model` at `times` (fs = 1, fb = 0.2, exact magnifications), with
/// the project's simulator.
fn simulate(model: &BinaryModel, times: &[f64], noise: Noise, seed: u64) -> Vec<DataSet> {
    let sim = Simulation {
        fb: 0.2,
        noise,
        seed,
        ..Simulation::new(*model, LimbDarkening::Uniform)
    };
    vec![sim.run(times).unwrap()]
}

/// A bright event's photometry: 600 points over +-40 days with 0.01 mag errors.
fn bright_event(model: &BinaryModel, seed: u64) -> Vec<DataSet> {
    let times = time_range(-40.0, 40.0, 600).unwrap();
    simulate(model, &times, Noise::Magnitude { sigma: 0.01 }, seed)
}

/// The search's point cap, which the refinement's capped start follows (the default rule's).
const CAP: f64 = 25.0;

/// A library of polygon maps over `s` and `q` (each `[first, last, count]`, log spaced) with
/// `pixels` per side, windows by `rule` ("planetary" or "central").
struct Library {
    s: &'static str,
    q: &'static str,
    pixels: usize,
    rule: &'static str,
}

/// Builds `library` in a scratch store and searches it for `data` at the trial radii `rhos`
/// (the rest of the default rule), from the seed of its single-lens fit (made again without
/// the anomaly).
fn search_library(name: &str, library: Library, rhos: &[f64], data: &[DataSet]) -> Vec<MapOutcome> {
    let Library { s, q, pixels, rule } = library;
    let spec = format!(
        "s = {{log = {s}}}\nq = {{log = {q}}}\npixels = {pixels}\nrays = 1\n\
         engine = \"polygon\"\n[window]\nrule = \"{rule}\"\n"
    );
    // Lines also anchored on the anomaly, as fit::event::fit_event runs them.
    let rule = GridRule {
        rhos: rhos.to_vec(),
        timed: true,
        point_cap: CAP,
        ..GridRule::default()
    };
    let dir = common::Scratch::new(name);
    let store = Store::create(&dir).unwrap();
    let spec = LibrarySpec::parse(&spec, "lib.toml").unwrap();
    library::build(&store, &spec.points().unwrap(), |_, _| {}).unwrap();
    let maps = maps_of_spec(&store, &spec).unwrap();
    let seed = Seed::of_baseline(&baseline(data), data);
    search(data, &seed, &maps, &rule, &|| {}).unwrap()
}

/// The bounded baseline of `data`, the anomaly left out.
fn baseline(data: &[DataSet]) -> Baseline {
    fit_baseline(data, &BaselineOptions::default()).unwrap()
}

/// chi^2 within the central 99.9% of the chi-square distribution with 600 - 7 - 2 = 591 degrees
/// of freedom: 484.38 to 710.72 (scipy.stats.chi2.ppf(0.0005, 591), chi2.ppf(0.9995, 591)).
fn chi2_as_expected(chi2: f64) -> bool {
    (484.38..710.72).contains(&chi2)
}

/// Every parameter of `r` within 4 of its uncertainties of `truth`'s.
fn assert_within_4_sigma(r: &Refined, truth: &BinaryModel) {
    let l = r.model.trajectory.line();
    let t = truth.trajectory.line();
    let checks = [
        ("s", r.model.s, truth.s, r.sigma[0]),
        ("q", r.model.q, truth.q, r.sigma[1]),
        ("alpha", l.alpha, t.alpha, r.sigma[2]),
        ("u0", l.u0, t.u0, r.sigma[3]),
        ("t0", l.t0, t.t0, r.sigma[4]),
        ("tE", l.te, t.te, r.sigma[5]),
        ("rho", r.model.rho, truth.rho, r.sigma[6]),
    ];
    for (name, got, want, sigma) in checks {
        // With a crossing sampled every 0.2 d (about its duration), chi^2 can be too flat in
        // rho for its curvature: refine then leaves rho's sigma unknown (documented), and rho
        // must still be within 20% of the truth.
        if name == "rho" && sigma.is_nan() {
            assert!(
                (got / want - 1.0).abs() < 0.2,
                "rho {got} vs {want}, sigma unknown"
            );
            continue;
        }
        assert!(
            sigma.is_finite() && sigma > 0.0,
            "{name}: sigma {sigma} in {r:?}"
        );
        assert!(
            (got - want).abs() < 4.0 * sigma,
            "{name}: {got} vs {want} +- {sigma}"
        );
    }
}

/// A wide planet whose source crosses the planetary caustic 11 days after the peak: the model
/// and 600 points over -60..60 days, 0.01 flux errors, noise seeded by `seed`.
fn planetary_crossing(seed: u64) -> (BinaryModel, Vec<DataSet>) {
    let alpha = 2.0 * std::f64::consts::PI - 0.287;
    let truth = BinaryModel {
        s: 1.3,
        q: 3e-3,
        rho: 3e-3,
        trajectory: Trajectory::straight(0.0, 0.15, 25.0, alpha).unwrap(),
    };
    let times: Vec<f64> = (0..600).map(|k| -60.0 + 0.2 * k as f64).collect();
    let data = simulate(&truth, &times, Noise::Flux { sigma: 0.01 }, seed);
    (truth, data)
}

#[test]
#[ignore = "slow (about a minute on two cores): run by scripts/test"]
fn a_planetary_caustic_crossing_is_recovered() {
    let (truth, data) = planetary_crossing(11);
    // The seed: a single-lens fit, made again without the anomaly. Without the anomaly it is
    // within 10% of the truth in tE and u0; the full fit is far longer in tE (the anomaly and
    // the blend pull it).
    let single = fit_single_lens(&data).unwrap();
    let seed = Seed::of_baseline(&baseline(&data), &data);
    let near = |v: f64, truth: f64| (v / truth - 1.0).abs() < 0.1;
    assert!(near(seed.te, 25.0) && near(seed.u0, 0.15), "{seed:?}");
    assert!(single.te > 1.5 * 25.0, "{single:?}");
    let library = Library {
        s: "[1.15, 1.45, 5]",
        q: "[1e-3, 1e-2, 5]",
        pixels: 500,
        rule: "planetary",
    };
    let outcomes = search_library("search-planetary", library, &[1.5e-3, 3e-3, 6e-3], &data);
    // The best (s, q) local minima refined, as fit::event::fit_event refines them: the best
    // within one grid step of the truth (steps: 6% in s, a factor 1.78 in q).
    let minima = refine_minima(&data, &outcomes, &RefineOptions::default(), CAP, &|| {}).unwrap();
    let best = &minima[0].refined.model;
    assert!((best.s / truth.s).ln().abs() < 0.06, "{best:?}");
    assert!((best.q / truth.q).ln().abs() < 0.58, "{best:?}");
    let r: Refined = refine(&data, best, 1e-5, 400).unwrap();
    assert!(chi2_as_expected(r.chi2), "chi2 {}", r.chi2);
    assert_within_4_sigma(&r, &truth);
}

/// A high-magnification event whose source crosses the central caustic of a close planet: the
/// wide planet at about 1/s makes a central caustic of nearly the same shape (Griest & Safizadeh
/// 1998; Dominik 1999; from memory), so both must be reported, as partners.
#[test]
#[ignore = "slow (about a minute on two cores): run by scripts/test"]
fn a_central_caustic_and_its_close_wide_partner_are_recovered() {
    let truth = BinaryModel {
        s: 0.8,
        q: 2e-3,
        rho: 1.5e-3,
        trajectory: Trajectory::straight(0.0, 0.008, 20.0, 60f64.to_radians()).unwrap(),
    };
    let data = bright_event(&truth, 5);
    let library = Library {
        s: "[0.7, 1.43, 7]",
        q: "[1e-3, 4e-3, 3]",
        pixels: 400,
        rule: "central",
    };
    let outcomes = search_library("search-central", library, &GridRule::default().rhos, &data);
    let minima: Vec<Minimum> =
        refine_minima(&data, &outcomes, &RefineOptions::default(), CAP, &|| {}).unwrap();
    // The true (close) model among the minima, within one grid step in s (12.6%) and q (a
    // factor 2), its chi^2 as the noise gives.
    let close = minima
        .iter()
        .position(|m| {
            let r = &m.refined;
            (r.model.s / truth.s).ln().abs() < 0.126 && (r.model.q / truth.q).ln().abs() < 2f64.ln()
        })
        .unwrap_or_else(|| panic!("no minimum near the truth: {minima:#?}"));
    let r = &minima[close].refined;
    assert!(chi2_as_expected(r.chi2), "chi2 {}", r.chi2);
    // Its wide partner: a separate minimum on the other side of s = 1, marked as its partner
    // both ways, and fitting the data as well (that is the degeneracy).
    let wide = minima[close]
        .partner
        .unwrap_or_else(|| panic!("no partner marked: {minima:#?}"))
        - 1;
    let w = &minima[wide].refined;
    assert!(w.model.s > 1.0 && close_wide((r.model.s, r.model.q), (w.model.s, w.model.q)));
    assert_eq!(minima[wide].partner, Some(close + 1));
    assert!(chi2_as_expected(w.chi2), "partner chi2 {}", w.chi2);
}

/// A source crossing the resonant caustic (one closed curve from the host towards the planet)
/// of s = 1.2, q = 0.01, away from the peak.
fn resonant_crossing() -> BinaryModel {
    BinaryModel {
        s: 1.2,
        q: 1e-2,
        rho: 4e-3,
        trajectory: Trajectory::straight(0.0, 0.2, 20.0, 328.3f64.to_radians()).unwrap(),
    }
}

/// The crossing of [`resonant_crossing`] is recovered from a small library.
#[test]
fn a_resonant_caustic_crossing_is_recovered() {
    let truth = resonant_crossing();
    let data = bright_event(&truth, 7);
    let library = Library {
        s: "[1.1, 1.3, 3]",
        q: "[5e-3, 2e-2, 3]",
        pixels: 600,
        rule: "central",
    };
    let outcomes = search_library("search-resonant", library, &[2e-3, 4e-3, 8e-3], &data);
    let options = RefineOptions {
        candidates: 2,
        ..RefineOptions::default()
    };
    let minima = refine_minima(&data, &outcomes, &options, CAP, &|| {}).unwrap();
    let r = &minima[0].refined;
    // The best minimum within one grid step of the truth (8.7% in s, a factor 2 in q), its
    // chi^2 as the noise gives, every parameter within 4 sigma.
    assert!((r.model.s / truth.s).ln().abs() < 0.087, "{r:?}");
    assert!((r.model.q / truth.q).ln().abs() < 2f64.ln(), "{r:?}");
    assert!(chi2_as_expected(r.chi2), "chi2 {}", r.chi2);
    assert_within_4_sigma(r, &truth);
}

/// The zoom around the best grid point of a coarse library (two maps in s, 21% apart, the
/// truth between them): finer maps built in memory move the best search candidate to within
/// a quarter step of the truth's s, and its chi^2 falls below both grid points'.
#[test]
fn the_zoom_finds_a_separation_between_grid_points() {
    use causeway::fit::search::{local_minima, merge_grid_points, trajectory_chi2_on_map};
    use causeway::fit::zoom::{MapRecipe, Zoomer};
    use causeway::map::read_fits;
    let (truth, data) = planetary_crossing(12);
    let spec = "s = [1.18, 1.43]\nq = [3e-3]\npixels = 300\nrays = 1\nengine = \"polygon\"\n\
                [window]\nrule = \"planetary\"\n";
    let dir = common::Scratch::new("search-zoom");
    let store = Store::create(&dir).unwrap();
    let spec = LibrarySpec::parse(spec, "lib.toml").unwrap();
    library::build(&store, &spec.points().unwrap(), |_, _| {}).unwrap();
    let maps = maps_of_spec(&store, &spec).unwrap();
    let seed = Seed::of_baseline(&baseline(&data), &data);
    let rule = GridRule {
        rhos: vec![2e-3, 3e-3, 4.5e-3],
        timed: true,
        ..GridRule::default()
    };
    let outcomes = merge_grid_points(search(&data, &seed, &maps, &rule, &|| {}).unwrap(), 3);
    // Each map also keeps its best line by the plain search chi^2: what the search reads for
    // that line with the cap off.
    let plain_rule = GridRule {
        point_cap: f64::INFINITY,
        ..rule.clone()
    };
    for o in &outcomes {
        assert_eq!(o.plain.len(), 1, "{o:?}");
        let c = o.plain[0];
        let read: Vec<f64> = maps
            .iter()
            .filter(|m| (m.s, m.q) == (o.s, o.q))
            .map(|m| {
                let map = read_fits(&m.path).unwrap();
                let chi2 =
                    trajectory_chi2_on_map(&data, &seed, &map, &plain_rule, &c.model.trajectory);
                let at = chi2
                    .unwrap()
                    .into_iter()
                    .find(|&(rho, _)| rho == c.model.rho);
                at.unwrap().1
            })
            .collect();
        assert!(
            read.iter().any(|&r| (r / c.chi2 - 1.0).abs() < 1e-9),
            "{read:?} vs {}",
            c.chi2
        );
    }
    let start = local_minima(&outcomes)[0];
    let zoomer = Zoomer {
        data: &data,
        seed: &seed,
        rule: &rule,
        recipe: MapRecipe::of_map(&read_fits(&maps[0].path).unwrap()),
    };
    let walks = zoomer.zoom(&outcomes, start, 2, &|| {}).unwrap();
    // A quarter of the library's step ln(1.43 / 1.18) = 0.192 is 0.048; both walks (by the
    // capped and by the plain search chi^2) end there on these clean data.
    for end in [&walks.capped, &walks.plain] {
        assert!(
            (end.s / truth.s).ln().abs() < 0.05,
            "zoomed to s = {}",
            end.s
        );
        assert_eq!(end.q, 3e-3);
    }
    let zoomed = walks.capped;
    let grid_best = outcomes
        .iter()
        .map(|o| o.best_chi2())
        .fold(f64::INFINITY, f64::min);
    assert!(
        zoomed.best_chi2() < grid_best,
        "{} vs {grid_best}",
        zoomed.best_chi2()
    );
}

/// A follow-up set that covers only the anomaly says nothing of the single lens: the seed's
/// valley is made without it (as the baseline is), so the anomaly cannot pull the valley's
/// chi^2 (and with it the u0 range the grid searches) away from the single lens's.
#[test]
fn a_follow_up_set_over_the_anomaly_stays_out_of_the_valley() {
    use causeway::fit::model::paczynski;
    // Survey: t0 = 0, u0 = 0.6, tE = 30 (Paczynski 1986), exact fluxes, every 0.5 d; a bump of
    // 30% from t = 14 to 16 that no single lens makes, seen by the survey and by a follow-up
    // site observing only then.
    let flux = |t: f64| {
        let u = (0.36 + (t / 30.0f64).powi(2)).sqrt();
        paczynski(u) * if (14.0..=16.0).contains(&t) { 1.3 } else { 1.0 }
    };
    let table = |times: &mut dyn Iterator<Item = f64>| {
        let mut text = String::from("t,flux,flux_err\n");
        for t in times {
            text += &format!("{t},{},0.002\n", flux(t));
        }
        text
    };
    let survey = table(&mut (0..240).map(|k| -60.0 + 0.5 * k as f64));
    let follow_up = table(&mut (0..100).map(|k| 14.0 + 0.02 * k as f64));
    let data = vec![
        DataSet::parse(&survey, "survey.csv", 22.0).unwrap(),
        DataSet::parse(&follow_up, "followup.csv", 22.0).unwrap(),
    ];
    let seed = Seed::of_baseline(&baseline(&data), &data);
    let best = seed
        .valley
        .iter()
        .map(|v| v.chi2)
        .fold(f64::INFINITY, f64::min);
    // Exact fluxes: the valley's best is the truth's chi^2 outside the anomaly, about 0.
    assert!(best < 1.0, "valley chi2 {best}");
    assert!((seed.u0 - 0.6).abs() < 0.01, "{seed:?}");
}

/// A start that the first Levenberg-Marquardt passes leave far from the data (its peak 300 days
/// after the event's, where the gradient vanishes) is given up before the simplex stages; the
/// start at the truth is refined. With `within` infinite both are refined.
#[test]
fn a_start_far_from_the_data_is_given_up_after_the_first_pass() {
    let truth = resonant_crossing();
    let data = bright_event(&truth, 7);
    let far = BinaryModel {
        trajectory: Trajectory::straight(300.0, 0.2, 5.0, 328.3f64.to_radians()).unwrap(),
        ..truth
    };
    let starts = [(truth, 600.0), (far, 900.0)];
    let options = RefineOptions {
        max_iters: 200,
        ..RefineOptions::default()
    };
    let pass = refine_models(&data, &starts, &options, CAP, &|| {}).unwrap();
    assert_eq!(pass.given_up.len(), 1, "{pass:?}");
    assert!(
        pass.given_up[0] > options.within * pass.best_first,
        "{pass:?}"
    );
    assert_eq!(pass.minima.len(), 1);
    // The 600 points' chi^2 as the noise gives (chi2_as_expected).
    assert!(chi2_as_expected(pass.minima[0].refined.chi2), "{pass:?}");
    // (Fewer iterations: only the count matters here.)
    let all = RefineOptions {
        within: f64::INFINITY,
        max_iters: 10,
        ..options
    };
    let pass = refine_models(&data, &starts, &all, CAP, &|| {}).unwrap();
    assert!(pass.given_up.is_empty());
    assert_eq!(pass.minima.len(), 2, "{pass:?}");
}
