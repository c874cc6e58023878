//! The build loop of libraries: each missing map is claimed ([`super::claim`]), built, stored
//! and released, so that any number of builders sharing a store build every map once.
//!
//! A builder walks its grid points in order. A map present and verified is skipped; a map
//! claimed by a live builder is left to it; any other map is claimed and built. A build that
//! waits ([`BuildOptions::wait`], the default) then watches the maps it left until each is
//! stored by its builder, or its claim goes stale and is taken over, so that it returns with
//! all its points in the store. A worker (`wait = false`) returns as soon as every map is
//! stored or claimed by someone: the builders of a job array balance themselves that way.

use super::claim::{Attempt, ClaimPolicy};
use super::library::GridPoint;
use super::{Entry, Store};
use crate::engine::{self, Engine};
use crate::error::Result;
use crate::map::tiles::RefinedMap;
use std::collections::HashSet;
use std::time::Duration;

/// What became of one grid point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// This builder built it.
    Built,
    /// It was in the store already.
    Present,
    /// Another builder built it while this one waited, or (without waiting) holds it.
    Elsewhere,
}

/// How a build shares its store with other builders.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BuildOptions {
    /// Wait for maps other builders hold until they are stored (or taken over), rather than
    /// return without them.
    pub wait: bool,
    /// Read and verify each map already present before skipping it, so that a damaged one is
    /// rebuilt; `false` trusts a map that the index lists and whose file is there (a worker of
    /// a large job array would otherwise read the whole store; `verify` finds damage).
    pub read_present: bool,
    /// Refresh period and staleness of claims.
    pub policy: ClaimPolicy,
}

impl Default for BuildOptions {
    fn default() -> Self {
        BuildOptions {
            wait: true,
            read_present: true,
            policy: ClaimPolicy::default(),
        }
    }
}

/// What a library build did.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct BuildSummary {
    /// Maps built now.
    pub built: usize,
    /// Maps already present and verified.
    pub skipped: usize,
    /// Maps other builders built meanwhile (or, without waiting, still hold).
    pub elsewhere: usize,
}

/// Builds the missing maps of `points` into the store with the default [`BuildOptions`]
/// (waiting for maps other builders hold), reporting each finished point to `progress`, with
/// `true` when this build made it. Maps present and verified are skipped (and re-entered into
/// the index, in case a build was killed between writing a map and recording it).
pub fn build(
    store: &Store,
    points: &[GridPoint],
    mut progress: impl FnMut(&GridPoint, bool),
) -> Result<BuildSummary> {
    build_with(store, points, BuildOptions::default(), |p, outcome| {
        progress(p, outcome == Outcome::Built)
    })
}

/// [`build`] with explicit options, reporting what became of each point.
///
/// ```
/// use causeway::store::{library::{build_with, BuildOptions, LibrarySpec, Outcome}, Store};
/// let spec = LibrarySpec::parse("s = [0.8, 1.2]\nq = [1e-2]\npixels = 16\nrays = 5\n\
///     [window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n", "lib.toml").unwrap();
/// let dir = std::env::temp_dir().join(format!("causeway-doc-build-{}", std::process::id()));
/// let store = Store::create(&dir).unwrap();
/// let worker = BuildOptions { wait: false, read_present: false, ..BuildOptions::default() };
/// let mut built = 0;
/// let summary = build_with(&store, &spec.points().unwrap(), worker, |_, o| {
///     built += usize::from(o == Outcome::Built)
/// })
/// .unwrap();
/// assert_eq!((summary.built, built), (2, 2));
/// std::fs::remove_dir_all(&dir).unwrap();
/// ```
pub fn build_with(
    store: &Store,
    points: &[GridPoint],
    options: BuildOptions,
    mut progress: impl FnMut(&GridPoint, Outcome),
) -> Result<BuildSummary> {
    let mut summary = BuildSummary::default();
    let mut report = |p: &GridPoint, outcome: Outcome| {
        match outcome {
            Outcome::Built => summary.built += 1,
            Outcome::Present => summary.skipped += 1,
            Outcome::Elsewhere => summary.elsewhere += 1,
        }
        progress(p, outcome);
    };
    // Read the index once; an entry another builder adds meanwhile is only recorded again.
    let indexed: HashSet<String> = store.entries()?.into_iter().map(|e| e.file).collect();
    let mut left = Vec::new();
    for p in points {
        let name = p.key.file_name();
        if !options.read_present && indexed.contains(&name) && store.path_of(&p.key).exists() {
            report(p, Outcome::Present);
        } else if let Some(map) = store.get(&p.key).ok().flatten() {
            if !indexed.contains(&name) {
                store.record(Entry::of_map(&map, &name))?;
            }
            report(p, Outcome::Present);
        } else if try_build(store, p, options.policy)? {
            report(p, Outcome::Built);
        } else {
            left.push(p);
        }
    }
    if !options.wait {
        for p in left {
            report(p, Outcome::Elsewhere);
        }
        return Ok(summary);
    }
    let poll = options.policy.refresh.min(Duration::from_secs(1));
    while !left.is_empty() {
        std::thread::sleep(poll);
        let mut still = Vec::new();
        for p in left {
            if store.has_verified(&p.key)
                && store
                    .claim_on(&p.key.file_name(), options.policy)?
                    .is_none()
            {
                report(p, Outcome::Elsewhere);
            } else if try_build(store, p, options.policy)? {
                report(p, Outcome::Built);
            } else {
                still.push(p);
            }
        }
        left = still;
    }
    Ok(summary)
}

/// Claims and builds the map of `p`: true when this builder built it, or found it complete
/// once it held the claim (then another builder finished it just before: not built again,
/// and reported as built only if this one made it); false when a live builder holds it.
fn try_build(store: &Store, p: &GridPoint, policy: ClaimPolicy) -> Result<bool> {
    let name = p.key.file_name();
    let Attempt::Taken(claim) = store.claim(&name, policy)? else {
        return Ok(false);
    };
    if store.has_verified(&p.key) {
        // Another builder stored it between our look and our claim.
        claim.release()?;
        return Ok(false);
    }
    let engine: Box<dyn Engine> = engine::by_name(&p.key.engine, p.key.density)?;
    let key = &p.key;
    let map = RefinedMap::build(
        engine.as_ref(),
        &key.lens,
        &key.window,
        key.refine,
        &(),
        true,
    )?;
    store.put_refined(&map)?;
    claim.release()?;
    Ok(true)
}

/// Where a grid point stands in a store.
#[derive(Debug, Clone, PartialEq)]
pub enum PointState {
    /// Its map file is in the store (`library verify` checks its contents).
    Built,
    /// A builder holds its claim.
    Claimed(super::claim::ClaimInfo),
    /// Neither.
    Missing,
}

/// The state of every point in the store, without reading any map (a map file is there or
/// not; `Store::verify` reads them).
pub fn status(store: &Store, points: &[GridPoint], policy: ClaimPolicy) -> Result<Vec<PointState>> {
    points
        .iter()
        .map(|p| {
            let name = p.key.file_name();
            if store.root().join(&name).exists() {
                return Ok(PointState::Built);
            }
            Ok(match store.claim_on(&name, policy)? {
                Some(info) => PointState::Claimed(info),
                None => PointState::Missing,
            })
        })
        .collect()
}
