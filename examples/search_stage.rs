//! The fit's search stage alone on the recovery events, for speed work on the search: every
//! `K`-th map of the broad library (`--every K`, default 1: the whole library), each event's
//! seed as `fit_event` makes it (or only the maps at `--at S,Q`, repeatable; their best
//! trajectories then go to stderr as well), the refinement cut to one start and one iteration
//! and no zoom.
//!
//! stdout lists what the search found on each map, one line per map (`s q trajectories |
//! candidates' chi^2 | the plain chi^2's`, nine digits), so that two builds of the search can be
//! compared exactly (`cmp`); stderr gives each event's search time (`FitResult::seconds`) and
//! trajectory count.
//!
//! ```sh
//! cargo build --release --example search_stage
//! cp target/release/examples/search_stage /tmp/before        # then change the search, build again
//! RAYON_NUM_THREADS=2 /tmp/before --variant 3 --every 4 stellar-2 > before.txt
//! RAYON_NUM_THREADS=2 target/release/examples/search_stage --variant 3 --every 4 stellar-2 > after.txt
//! cmp before.txt after.txt                                    # the same outcomes?
//! ```
//!
//! The maps come from `target/recovery-store` (`cargo run --release --example recovery` builds
//! it); a map missing there is an error.

use causeway::fit::event::{fit_event, FitOptions};
use causeway::fit::search::{maps_of_spec, MapSource};
use causeway::fit::simulate::events::{recovery_events, BROAD_LIBRARY};
use causeway::progress::Silent;
use causeway::store::library::LibrarySpec;
use causeway::store::Store;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let value = |flag: &str| -> Option<u64> {
        let i = args.iter().position(|a| a == flag)?;
        Some(
            args[i + 1]
                .parse()
                .expect("--variant and --every take a number"),
        )
    };
    let variant = value("--variant").unwrap_or(0);
    let every = value("--every").unwrap_or(1).max(1) as usize;
    let names: Vec<&String> = args
        .iter()
        .filter(|a| !a.starts_with("--") && a.parse::<f64>().is_err() && !a.contains(','))
        .collect();
    let broad = LibrarySpec::parse(BROAD_LIBRARY, "broad library").unwrap();
    let store = Store::open(std::path::Path::new("target/recovery-store")).unwrap();
    // `--at S,Q` (repeatable): only the maps within 1% of those (s, q).
    let at: Vec<(f64, f64)> = args
        .windows(2)
        .filter(|w| w[0] == "--at")
        .map(|w| {
            let (s, q) = w[1].split_once(',').expect("--at takes S,Q");
            (s.parse().expect("--at: s"), q.parse().expect("--at: q"))
        })
        .collect();
    let near = |m: &causeway::fit::search::LibraryMap| {
        at.is_empty()
            || at
                .iter()
                .any(|&(s, q)| (m.s / s).ln().abs() < 0.01 && (m.q / q).ln().abs() < 0.01)
    };
    let maps: Vec<_> = maps_of_spec(&store, &broad)
        .unwrap()
        .into_iter()
        .filter(near)
        .step_by(every)
        .collect();
    let mut options = FitOptions {
        zoom: None,
        rescale_errors: false,
        ..FitOptions::default()
    };
    options.refine.candidates = 1;
    options.refine.max_iters = 1;
    options.refine.hops = 0;
    for event in recovery_events().unwrap() {
        if !(names.is_empty() || names.iter().any(|n| **n == event.name)) {
            continue;
        }
        let event = event.variant(variant).unwrap();
        let data = event.data().unwrap();
        let fit = fit_event(&data, MapSource::Files(&maps), &options, &Silent).unwrap();
        let trajectories: u64 = fit.outcomes.iter().map(|o| o.trajectories).sum();
        eprintln!(
            "{}: {} maps, {trajectories} trajectories, search {:.1} s",
            event.name,
            maps.len(),
            fit.seconds.0
        );
        let chi2s = |c: &[causeway::fit::search::Candidate]| {
            c.iter()
                .map(|c| format!("{:.9e}", c.chi2))
                .collect::<Vec<_>>()
                .join(" ")
        };
        for o in &fit.outcomes {
            if let Some(c) = o.candidates.first().filter(|_| !at.is_empty()) {
                let l = c.model.trajectory.line();
                eprintln!(
                    "s {:.4} q {:.4e}: best alpha {:.4} u0 {:.4} t0 {:.4} tE {:.3} rho {:.2e}",
                    o.s, o.q, l.alpha, l.u0, l.t0, l.te, c.model.rho
                );
            }
            println!(
                "{} {} {} {} | {} | {}",
                event.name,
                o.s,
                o.q,
                o.trajectories,
                chi2s(&o.candidates),
                chi2s(&o.plain)
            );
        }
    }
}
