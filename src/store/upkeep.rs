//! The store's upkeep: verification, adoption of complete maps the index lacks, and pruning.
//!
//! Everything here looks only at files with the store's own names inside the store folder
//! ([`is_map_name`], [`is_temporary_name`]); the index can name nothing else (its reader
//! refuses other file names), so no index row leads out of the folder.

use super::claim::{ClaimInfo, ClaimPolicy};
use super::layout::{is_claim_name, is_map_name, is_temporary_name};
use super::{file_name, index, read_checked, Entry, Store};
use crate::error::{Error, Result};
use crate::map::certificate::Certificate;
use crate::map::MagnificationMap;
use std::collections::HashSet;
use std::fs;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// A problem found by [`Store::verify`].
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// The file concerned.
    pub path: PathBuf,
    /// What is wrong with it.
    pub reason: String,
}

/// What [`Store::verify`] found.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Verification {
    /// Number of index entries.
    pub indexed: usize,
    /// Missing or damaged maps (listed or not).
    pub problems: Vec<Problem>,
    /// Complete, verified maps the index does not list yet (a build killed between writing a
    /// map and recording it leaves one); the next build or prune adopts them.
    pub unindexed: Vec<Entry>,
    /// Claims of builders on maps (live ones while builds run; stale ones a killed build
    /// left, which the next build takes over and prune removes).
    pub claims: Vec<ClaimInfo>,
    /// The accuracy certificate of every complete indexed map (`None`: built without one).
    pub certificates: Vec<(PathBuf, Option<Certificate>)>,
}

/// What [`Store::prune`] removed, adopted and unlisted (or, on a dry run, would have).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PruneReport {
    /// Files removed: damaged maps, temporaries and stale claims, at least the minimum age old.
    pub removed: Vec<PathBuf>,
    /// Complete maps entered into the index.
    pub adopted: Vec<PathBuf>,
    /// Index entries dropped (their file is missing or was removed).
    pub unlisted: Vec<String>,
    /// Damaged maps, temporaries and stale claims kept because they are younger than the
    /// minimum age.
    pub young: Vec<PathBuf>,
}

/// The state of one map file.
enum Found {
    Missing,
    Damaged(String),
    Complete(Box<MagnificationMap>),
}

impl Store {
    /// Checks every indexed map (present, checksums, header matching its key and its file
    /// name) and every map file the index does not list; collects the indexed maps'
    /// accuracy certificates.
    ///
    /// ```
    /// # use causeway::engine::{Engine, RayShooting};
    /// # use causeway::{lens::LensSystem, map::Window, store::Store};
    /// let dir = std::env::temp_dir().join(format!("causeway-doc-verify-{}", std::process::id()));
    /// let store = Store::create(&dir).unwrap();
    /// let lens = LensSystem::binary(1.0, 0.1).unwrap();
    /// let map = RayShooting::new(5.0).build(&lens, &Window::new((0.0, 0.0), 1.0, 8).unwrap()).unwrap();
    /// store.put(&map).unwrap();
    /// let report = store.verify().unwrap();
    /// assert_eq!((report.indexed, report.problems.len(), report.unindexed.len()), (1, 0, 0));
    /// std::fs::remove_dir_all(&dir).unwrap();
    /// ```
    pub fn verify(&self) -> Result<Verification> {
        let entries = self.entries()?;
        let mut report = Verification {
            indexed: entries.len(),
            ..Verification::default()
        };
        for e in &entries {
            let path = self.root.join(&e.file);
            match found(&path) {
                Found::Missing => report.problems.push(Problem {
                    path,
                    reason: "listed in the index but missing".into(),
                }),
                Found::Damaged(reason) => report.problems.push(Problem { path, reason }),
                Found::Complete(map) => {
                    report.certificates.push((path, map.provenance.certificate))
                }
            }
        }
        self.check_unlisted(&entries, &mut report)?;
        report.claims = self.claims(ClaimPolicy::default())?;
        Ok(report)
    }

    /// Enters every complete map the index does not list into it; returns their paths.
    pub fn adopt(&self) -> Result<Vec<PathBuf>> {
        if self.unlisted(&self.entries()?)?.is_empty() {
            return Ok(Vec::new()); // the usual case, without taking the lock
        }
        self.with_lock(|| {
            let mut report = Verification::default();
            self.check_unlisted(&self.entries()?, &mut report)?;
            self.rewrite_index(&[], report.unindexed)
        })
    }

    /// Map files the index does not list, sorted.
    fn unlisted(&self, entries: &[Entry]) -> Result<Vec<String>> {
        let listed: HashSet<&str> = entries.iter().map(|e| e.file.as_str()).collect();
        let mut names = self.own_files(is_map_name)?;
        names.retain(|n| !listed.contains(n.as_str()));
        Ok(names)
    }

    /// Checks the map files that `entries` do not list into `report`.
    fn check_unlisted(&self, entries: &[Entry], report: &mut Verification) -> Result<()> {
        for name in self.unlisted(entries)? {
            let path = self.root.join(&name);
            match found(&path) {
                Found::Missing => {} // removed meanwhile
                Found::Damaged(reason) => report.problems.push(Problem {
                    path,
                    reason: format!("not in the index, and {reason}"),
                }),
                Found::Complete(map) => report.unindexed.push(Entry::of_map(&map, &name)),
            }
        }
        Ok(())
    }

    /// Tidies the store: adopts complete maps the index does not list, drops index entries
    /// whose file is missing, and removes damaged maps (dropping their entries), stale
    /// temporaries and stale claims ([`super::claim`]), but only those at least `min_age` old
    /// (younger ones may belong to a build still running; a live claim is never removed). Removes nothing but files with the store's own names in its folder.
    /// With `dry_run`, changes nothing and reports what it would do.
    pub fn prune(&self, min_age: Duration, dry_run: bool) -> Result<PruneReport> {
        let plan = || -> Result<(PruneReport, Vec<Entry>)> {
            let verification = self.verify()?;
            let mut report = PruneReport::default();
            for p in verification.problems {
                let name = file_name(&p.path);
                if !p.path.exists() {
                    report.unlisted.push(name);
                } else if old(&p.path, min_age) {
                    report.unlisted.push(name);
                    report.removed.push(p.path);
                } else {
                    report.young.push(p.path);
                }
            }
            for name in self.own_files(is_temporary_name)? {
                let path = self.root.join(name);
                if old(&path, min_age) {
                    report.removed.push(path);
                } else {
                    report.young.push(path);
                }
            }
            for claim in verification.claims.into_iter().filter(|c| c.stale) {
                if claim.age >= min_age {
                    report.removed.push(claim.path);
                } else {
                    report.young.push(claim.path);
                }
            }
            report.adopted = verification
                .unindexed
                .iter()
                .map(|e| self.root.join(&e.file))
                .collect();
            Ok((report, verification.unindexed))
        };
        if dry_run {
            return plan().map(|(report, _)| report);
        }
        self.with_lock(|| {
            let (report, adopt) = plan()?;
            for path in &report.removed {
                self.remove_own(path)?;
            }
            self.rewrite_index(&report.unlisted, adopt)?;
            Ok(report)
        })
    }

    /// Rewrites the index without the entries of `drop` and with `add`; returns the paths
    /// of the added maps. Call under the lock.
    fn rewrite_index(&self, drop: &[String], add: Vec<Entry>) -> Result<Vec<PathBuf>> {
        if drop.is_empty() && add.is_empty() {
            return Ok(Vec::new());
        }
        let added = add.iter().map(|e| self.root.join(&e.file)).collect();
        let mut entries = self.entries()?;
        entries.retain(|e| !drop.contains(&e.file) && !add.iter().any(|a| a.file == e.file));
        entries.extend(add);
        entries.sort_by(|a, b| a.file.cmp(&b.file));
        index::write(&self.index_path(), &entries)?;
        Ok(added)
    }

    /// Removes a file of the store; refuses anything that is not one of its own names
    /// directly inside its folder.
    fn remove_own(&self, path: &Path) -> Result<()> {
        let name = file_name(path);
        let own = is_map_name(&name) || is_claim_name(&name) || is_temporary_name(&name);
        if !own || path != self.root.join(&name) {
            return Err(Error::input(format!(
                "{}: not a file of the store {}; left alone",
                path.display(),
                self.root.display()
            )));
        }
        match fs::remove_file(path) {
            Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(Error::io(path, e)),
            _ => Ok(()),
        }
    }

    /// Names of the regular files in the store folder that pass `own`, sorted.
    pub(super) fn own_files(&self, own: fn(&str) -> bool) -> Result<Vec<String>> {
        let mut names = Vec::new();
        for entry in fs::read_dir(&self.root).map_err(|e| Error::io(&self.root, e))? {
            let entry = entry.map_err(|e| Error::io(&self.root, e))?;
            let name = entry.file_name().to_string_lossy().into_owned();
            let is_file = entry.file_type().is_ok_and(|t| t.is_file());
            if is_file && own(&name) {
                names.push(name);
            }
        }
        names.sort();
        Ok(names)
    }
}

/// Whether the map file at `path` is there, and complete with the key its name says.
fn found(path: &Path) -> Found {
    if !path.exists() {
        return Found::Missing;
    }
    match read_checked(path) {
        Ok(map) => Found::Complete(Box::new(map.base)),
        Err(err) => {
            let text = err.to_string();
            let prefix = format!("{}: ", path.display());
            Found::Damaged(text.strip_prefix(&prefix).unwrap_or(&text).to_string())
        }
    }
}

/// True when the file at `path` was last modified at least `min_age` ago.
fn old(path: &Path, min_age: Duration) -> bool {
    fs::symlink_metadata(path)
        .and_then(|m| m.modified())
        .ok()
        .and_then(|t| t.elapsed().ok())
        .is_some_and(|age| age >= min_age)
}
