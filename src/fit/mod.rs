//! Fitting photometry: data sets, the single-lens baseline, the grid search over a map library,
//! and the refinement of its best candidates.
//!
//! - `photometry`: data-set files (magnitudes or fluxes), per-set limb darkening and error scale;
//! - `fluxes`: source and blend fluxes by linear least squares, chi^2;
//! - `model`: the event model (binary lens, source, trajectory) and its exact magnifications;
//! - `motion`: the parallax and lens orbital-motion stage after the static fit;
//! - `optimize`: local minimisation and curvature uncertainties;
//! - `single`: the single-lens point-source fit that seeds the search;
//! - `simulate`: synthetic photometry of a model;
//! - `scales`: physical scales (theta_E, proper motion, masses, separation);
//! - `bins`: long data merged into fewer points for the search;
//! - `search`: the grid search over the maps of a library;
//! - `zoom`: finer maps around the search's best (s, q) before the refinement;
//! - `refine`: local refinement with exact magnifications;
//! - `chords`: other paths through the data's caustic crossings, as refinement starts;
//! - `hop`: seeded perturbed restarts that leave a nearby false minimum;
//! - `minima`: from search outcomes to distinct refined minima, close/wide pairs;
//! - `noise`: outliers clipped and error bars scaled at a fitted model;
//! - `report`: the ranked table of minima (CSV) and its summary;
//! - `plots`: the chi^2 map over (s, q) and the best model over the data (PNG);
//! - `event`: the whole fit of an event as one call (baseline, search, refinement, noise).

pub mod bins;
pub mod chords;
pub mod event;
pub mod fluxes;
pub mod hop;
pub mod minima;
pub mod model;
pub mod motion;
pub mod noise;
pub mod optimize;
pub mod photometry;
pub mod plots;
pub mod refine;
pub mod report;
pub mod scales;
pub mod search;
pub mod simulate;
pub mod single;
pub mod zoom;
