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
//! `--build S,Q` (repeatable) searches maps built in memory at those (s, q) instead, with the
//! library's recipe. With `--at` or `--build`, stderr also gives the search chi^2 of the
//! event's true path on each map (at each trial rho).
//!
//! `--full` refines as `fit_event` does by default (still without the zoom) and lists the
//! minima on stderr beside the true model's chi^2 on the same data.
//!
//! `--max-trajectories N`, `--divisions D` and `--beam N` set the grid rule's
//! `max_trajectories`, `coarse_divisions` and `beam`.
//!
//! `--drawn K` takes the events of draw K (`fit::simulate::drawn::drawn_events`) instead of the
//! sixteen catalogued ones.
//!
//! The maps come from `target/recovery-store` (`cargo run --release --example recovery` builds
//! it); a map missing there is an error.

use causeway::fit::event::{fit_event, FitOptions};
use causeway::fit::refine::exact_chi2;
use causeway::fit::search::{maps_of_spec, trajectory_chi2_on_map, MapSource};
use causeway::fit::simulate::drawn::drawn_events;
use causeway::fit::simulate::events::{recovery_events, BROAD_LIBRARY};
use causeway::fit::zoom::MapRecipe;
use causeway::map::fits::read_fits;
use causeway::map::MagnificationMap;
use causeway::progress::Silent;
use causeway::store::library::LibrarySpec;
use causeway::store::Store;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let value = |flag: &str| -> Option<u64> {
        let i = args.iter().position(|a| a == flag)?;
        Some(args[i + 1].parse().expect(
            "--variant, --every, --drawn, --max-trajectories, --beam and --divisions take a number",
        ))
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
    let pairs = |flag: &str| -> Vec<(f64, f64)> {
        args.windows(2)
            .filter(|w| w[0] == flag)
            .map(|w| {
                let (s, q) = w[1].split_once(',').expect("--at and --build take S,Q");
                (s.parse().expect("s"), q.parse().expect("q"))
            })
            .collect()
    };
    let at = pairs("--at");
    let build = pairs("--build");
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
    let all = maps_of_spec(&store, &broad).unwrap();
    let built: Vec<MagnificationMap> = build
        .iter()
        .flat_map(|&(s, q)| {
            let first = read_fits(&all[0].path).unwrap();
            MapRecipe::of_map(&first).build(s, q).unwrap()
        })
        .collect();
    let loaded: Vec<MagnificationMap> = if build.is_empty() && !at.is_empty() {
        maps.iter().map(|m| read_fits(&m.path).unwrap()).collect()
    } else {
        built.clone()
    };
    let source = if built.is_empty() {
        MapSource::Files(&maps)
    } else {
        MapSource::Loaded(&built)
    };
    let mut options = FitOptions {
        zoom: None,
        rescale_errors: false,
        ..FitOptions::default()
    };
    if let Some(n) = value("--max-trajectories") {
        options.rule.max_trajectories = n as usize;
    }
    if let Some(n) = value("--beam") {
        options.rule.beam = n as usize;
    }
    if let Some(n) = value("--divisions") {
        options.rule.coarse_divisions = n as f64;
    }
    let full = args.iter().any(|a| a == "--full");
    if !full {
        options.refine.candidates = 1;
        options.refine.max_iters = 1;
        options.refine.hops = 0;
    }
    let catalogue = match value("--drawn") {
        Some(k) => drawn_events(k).unwrap(),
        None => recovery_events().unwrap(),
    };
    for event in catalogue {
        if !(names.is_empty() || names.iter().any(|n| **n == event.name)) {
            continue;
        }
        let event = event.variant(variant).unwrap();
        let data = event.data().unwrap();
        let fit = fit_event(&data, source, &options, &Silent).unwrap();
        let trajectories: u64 = fit.outcomes.iter().map(|o| o.trajectories).sum();
        eprintln!(
            "{}: {} maps, {trajectories} trajectories, search {:.1} s",
            event.name,
            source.len(),
            fit.seconds.0
        );
        if full {
            let truth = exact_chi2(&fit.data, &event.truth, 1e-4).unwrap().0;
            for n in &fit.notes {
                eprintln!("note: {n}");
            }
            eprintln!("true model: chi2 {truth:.1}");
            for m in &fit.minima {
                let b = &m.refined.model;
                let l = b.trajectory.line();
                eprintln!(
                    "minimum s {:.4} q {:.4e} alpha {:.4} u0 {:.4} t0 {:.4} tE {:.3} rho {:.2e}: \
                     chi2 {:.1} (search {:.1})",
                    b.s, b.q, l.alpha, l.u0, l.t0, l.te, b.rho, m.refined.chi2, m.search_chi2
                );
            }
        }
        for map in &loaded {
            let chi2 = trajectory_chi2_on_map(
                &fit.data,
                &fit.seed,
                map,
                &fit.rule,
                &event.truth.trajectory,
            );
            let (s, q) = map.provenance.lens.binary_parameters().unwrap();
            eprintln!(
                "true path on the map of s {s:.4} q {q:.4e} at {:?}: (rho, chi2) {:.1?}",
                map.window.center,
                chi2.unwrap_or_default()
            );
        }
        let chi2s = |c: &[causeway::fit::search::Candidate]| {
            c.iter()
                .map(|c| format!("{:.9e}", c.chi2))
                .collect::<Vec<_>>()
                .join(" ")
        };
        for o in &fit.outcomes {
            if let Some(c) = o
                .candidates
                .first()
                .filter(|_| !(at.is_empty() && build.is_empty()))
            {
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
