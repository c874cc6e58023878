//! The recovery benchmark: the sixteen invented events of `fit::simulate::events`, observed as
//! real data are (three survey sites with nightly gaps, lost nights, error bars too small and
//! outliers, a follow-up site over the anomaly; times near 9000), each fitted the way a user
//! who does not know the answer would: the broad library (`BROAD_LIBRARY`: s 0.5..2 x 13, q
//! 1e-4..0.3 x 11, a map on every caustic, 500^2 pixels) and default options.
//!
//! An event is recovered when a reported minimum has (s, q) within one grid step of the truth
//! (or of its close/wide partner, s -> 1/s) and the best chi^2 is at most the truth's on the
//! same data plus max(25, 0.002 dof), over the data as given or over the data the fit minimised
//! (outliers clipped, error bars scaled); a single lens is recovered when
//! the best binary improves on the single lens by less than 100. A fit longer than 15 minutes
//! counts as a failure.
//!
//! ```sh
//! cargo run --release --example recovery                     # all sixteen, broad library
//! cargo run --release --example recovery -- wide-1 stellar-1 # some of them
//! cargo run --release --example recovery -- --near wide-1    # 3 x 3 of the broad grid around the truth
//! cargo run --release --example recovery -- --variant 2       # each event observed another way
//! ```
//!
//! `--drawn K` fits draw K of `fit::simulate::drawn::drawn_events` instead: eight events, one of
//! each kind, with (s, q) and the path drawn afresh (named `wide`, `close`, `central`,
//! `resonant`, `stellar`, `cusp`, `lowq`, `single`).
//!
//! `--point-cap CHI2` sets the search's point cap (`search --point-cap`); `--search-points N`
//! the most points the search reads (`search --search-points`, 0 for every point).
//!
//! `--variant K` fits variant K of each event instead (`BenchEvent::variant`: the same lens and
//! path, another tE, rho, blending, timing within the night and noise): events the fit was
//! not tuned on.
//!
//! The library is built once into `target/recovery-store` (its build time is reported
//! separately) and reused. The table goes to stdout as CSV, with one line per event on stderr
//! as it finishes.

use causeway::cli::progress::Reporter;
use causeway::fit::event::{fit_event, FitOptions};
use causeway::fit::search::{maps_of_spec, LibraryMap, MapSource};
use causeway::fit::simulate::drawn::drawn_events;
use causeway::fit::simulate::events::{log_steps, recovery_events, BenchEvent, BROAD_LIBRARY};
use causeway::store::library::{self, LibrarySpec};
use causeway::store::Store;
use std::time::Instant;

/// Longest fit that counts (seconds).
const LIMIT: f64 = 900.0;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let near = args.iter().any(|a| a == "--near");
    let variant: u64 = args.iter().position(|a| a == "--variant").map_or(0, |i| {
        args[i + 1].parse().expect("--variant takes a number")
    });
    let mut options = FitOptions::default();
    if let Some(i) = args.iter().position(|a| a == "--point-cap") {
        options.rule.point_cap = args[i + 1].parse().expect("--point-cap takes a number");
    }
    if let Some(i) = args.iter().position(|a| a == "--search-points") {
        let n: usize = args[i + 1].parse().expect("--search-points takes a number");
        options.search_points = (n > 0).then_some(n);
    }
    let names: Vec<&String> = args
        .iter()
        .filter(|a| !a.starts_with("--") && a.parse::<f64>().is_err())
        .collect();
    let drawn: Option<u64> = args
        .iter()
        .position(|a| a == "--drawn")
        .map(|i| args[i + 1].parse().expect("--drawn takes a number"));
    let catalogue = match drawn {
        Some(k) => drawn_events(k).unwrap(),
        None => recovery_events().unwrap(),
    };
    let events: Vec<BenchEvent> = catalogue
        .into_iter()
        .filter(|e| names.is_empty() || names.iter().any(|n| *n == e.name))
        .map(|e| e.variant(variant).unwrap())
        .collect();
    let broad = LibrarySpec::parse(BROAD_LIBRARY, "broad library").unwrap();
    let store = Store::create(std::path::Path::new("target/recovery-store")).unwrap();
    let steps = log_steps(&broad);
    println!(
        "event,kind,s,q,u0,tE,rho,blend,best_s,best_q,best_u0,best_tE,best_rho,chi2,chi2_true,dof,\
         chi2_fit,chi2_fit_true,delta_chi2_single,recovered,fit_seconds"
    );
    let mut recovered = 0;
    for event in &events {
        let spec = if near {
            event.near_library(&broad)
        } else {
            broad.clone()
        };
        let maps = build(&store, &spec);
        let data = event.data().unwrap();
        let started = Instant::now();
        let fit = fit_event(
            &data,
            MapSource::Files(&maps),
            &options,
            &Reporter::with_terminal(false),
        )
        .unwrap();
        let seconds = started.elapsed().as_secs_f64();
        let verdict = event.judge(&data, &fit, steps).unwrap();
        let ok = verdict.recovered && seconds <= LIMIT;
        let (truth, best) = (&event.truth, &fit.minima[0]);
        let (chi2, chi2_true, dof, improvement) = (
            verdict.chi2,
            verdict.chi2_true,
            verdict.dof,
            verdict.improvement,
        );
        recovered += usize::from(ok);
        let l = truth.trajectory.line();
        let b = best.refined.model;
        let bl = b.trajectory.line();
        println!(
            "{},{},{},{},{},{},{},{},{:.5},{:.4e},{:.5},{:.3},{:.3e},{:.1},{:.1},{dof},{:.1},{:.1},{:.1},{ok},{:.0}",
            event.name,
            event.kind.name(),
            truth.s,
            truth.q,
            l.u0,
            l.te,
            truth.rho,
            event.blend,
            b.s,
            b.q,
            bl.u0,
            bl.te,
            b.rho,
            chi2,
            chi2_true,
            verdict.chi2_fit.0,
            verdict.chi2_fit.1,
            improvement,
            seconds
        );
        eprintln!(
            "== {}: best s {:.4} q {:.3e}, chi2 {chi2:.1} (truth {chi2_true:.1}, {dof} dof), \
             fitted data {:.1} (truth {:.1}), {seconds:.0} s: {}",
            event.name,
            b.s,
            b.q,
            verdict.chi2_fit.0,
            verdict.chi2_fit.1,
            if ok { "recovered" } else { "NOT recovered" }
        );
    }
    eprintln!("recovered {recovered} of {}", events.len());
}

/// The maps of `spec`, built into `store` where missing (build time on stderr).
fn build(store: &Store, spec: &LibrarySpec) -> Vec<LibraryMap> {
    let points = spec.points().unwrap();
    let started = Instant::now();
    let summary = library::build(store, &points, |_, _| {}).unwrap();
    if summary.built > 0 {
        eprintln!(
            "library: built {} maps ({} present) in {:.0} s",
            summary.built,
            summary.skipped,
            started.elapsed().as_secs_f64()
        );
    }
    maps_of_spec(store, spec).unwrap()
}
