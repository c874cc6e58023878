//! The fast subset of the recovery benchmark (`examples/recovery.rs`): events of the catalogue
//! in `fit::simulate::events`, observed by three survey sites and a follow-up site (nightly
//! gaps, lost nights, error bars too small, outliers; times near 9000), fitted by
//! `fit::event::fit_event` with default options over the 3 x 3 part of the broad library
//! around the truth, and judged by the benchmark's rule (`BenchEvent::judge`: (s, q) within
//! one grid step of the truth, chi2 at most the truth's plus max(25, 0.002 dof)).
//!
//! Each takes one to three minutes on two cores, so they are `#[ignore]`d in the edit loop;
//! the README's test command runs them (`scripts/test`: `cargo test --release --test
//! integration -- --ignored`).

use crate::common;

use causeway::fit::event::{fit_event, FitOptions};
use causeway::fit::search::{maps_of_spec, MapSource};
use causeway::fit::simulate::events::{log_steps, recovery_events, BROAD_LIBRARY};
use causeway::progress::Silent;
use causeway::store::library::{self, LibrarySpec};
use causeway::store::Store;

/// Fits the catalogue's event `name` over the broad library's 3 x 3 around its truth and
/// asserts that it is recovered.
fn recovers(name: &str) {
    let event = recovery_events()
        .unwrap()
        .into_iter()
        .find(|e| e.name == name)
        .unwrap();
    let broad = LibrarySpec::parse(BROAD_LIBRARY, "broad").unwrap();
    let spec = event.near_library(&broad);
    let dir = common::Scratch::new(&format!("recovery-{name}"));
    let store = Store::create(&dir).unwrap();
    library::build(&store, &spec.points().unwrap(), |_, _| {}).unwrap();
    let maps = maps_of_spec(&store, &spec).unwrap();
    let data = event.data().unwrap();
    let fit = fit_event(
        &data,
        MapSource::Files(&maps),
        &FitOptions::default(),
        &Silent,
    )
    .unwrap();
    let verdict = event.judge(&data, &fit, log_steps(&broad)).unwrap();
    let best = &fit.minima[0].refined.model;
    assert!(
        verdict.recovered,
        "{name}: best s {} q {} rho {}, {verdict:?}",
        best.s, best.q, best.rho
    );
}

#[test]
#[ignore = "slow: run by scripts/test"]
fn a_wide_planet_crossing_its_caustic_off_the_peak() {
    recovers("wide-1");
}

#[test]
#[ignore = "slow: run by scripts/test"]
fn a_resonant_caustic_over_the_peak() {
    recovers("resonant-1");
}

#[test]
#[ignore = "slow: run by scripts/test"]
fn a_stellar_binary_whose_refinement_needs_the_hops() {
    recovers("stellar-2");
}
