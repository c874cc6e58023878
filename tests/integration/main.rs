//! The integration tests, one module per topic, built as one test binary so that an edit costs
//! one link: `cargo test --release --test integration` runs them all, and a filter runs one
//! module (`cargo test --release --test integration -- curve::`; the filter is a substring of
//! the test's path, so `search::` also runs `cli_search::`).
//!
//! Slow checks are `#[ignore]`d: the edit loop skips them and `scripts/test` runs them
//! (`-- --ignored`). Scaffolding shared by the modules lives in `tests/common`.

#[path = "../common/mod.rs"]
mod common;

mod bad_input;
mod campaign;
mod caustics;
mod claims;
mod cli_map;
mod cli_search;
mod cli_solve;
mod compare;
mod contour;
mod curve;
mod edge_values;
mod engine;
mod fit_event;
mod fit_scales;
mod fit_single;
mod fits;
mod galaxy;
mod hop;
mod optimize;
mod parallax;
mod polygon;
mod recovery;
mod search;
mod simulate;
mod slurm;
mod solve;
mod store;
mod tiles;
