//! The map store: content-addressed FITS files under one directory, and an index by (s, q).
//!
//! A folder is a store when it holds the marker `causeway-store.toml` (with the store's format
//! version). [`Store::create`] makes one (the call for anything that builds maps);
//! [`Store::open`] opens an existing one and refuses a missing or unmarked folder (the call for
//! anything that only reads or tidies a store).
//!
//! A map lives at `<store>/<hash>.fits`, the hash taken over the canonical text of its
//! [`MapKey`] (SHA-256, stable across versions and platforms). `<store>/index.csv` lists every
//! map with its parameters and build statistics; it is rewritten atomically under an exclusive
//! lock on `<store>/.lock`, so builders sharing a store (threads, processes, cluster tasks on a
//! shared file system that honours `flock`) never lose each other's entries. Map files are
//! written to a temporary name (`.<hash>.fits.<pid>.<n>.tmp`) and renamed, so a file named
//! `<hash>.fits` is always complete; a build killed at any moment leaves at most a temporary
//! that [`Store::prune`] removes. Builders sharing a store claim each map before building it
//! ([`claim`]), so that no map is built twice. The store's upkeep touches only files with the
//! store's own names (see [`is_map_name`], [`is_claim_name`] and [`is_temporary_name`]), never
//! anything else in the folder.
//!
//! The default store is `./maps`, overridden by `--store DIR` or `CAUSEWAY_STORE`.

mod builder;
pub mod claim;
mod index;
pub mod jobs;
mod key;
mod layout;
pub mod library;
mod upkeep;

pub use index::{header as index_header, Entry};
pub use key::{MapKey, KEY_FORMAT};
pub use layout::{is_claim_name, is_map_name, is_temporary_name, MARKER, STORE_FORMAT};
pub use upkeep::{Problem, PruneReport, Verification};

use crate::error::{Error, Result};
use crate::map::fits::{read_refined, write_fits, write_refined};
use crate::map::tiles::RefinedMap;
use crate::map::MagnificationMap;
use std::fs::File;
use std::path::{Path, PathBuf};

/// Environment variable naming the store directory.
pub const STORE_ENV: &str = "CAUSEWAY_STORE";

/// A directory of maps with its index.
///
/// ```
/// use causeway::engine::{Engine, RayShooting};
/// use causeway::{lens::LensSystem, map::Window, store::{MapKey, Store}};
/// let dir = std::env::temp_dir().join(format!("causeway-doc-store-{}", std::process::id()));
/// let store = Store::create(&dir).unwrap();
/// assert!(dir.join(causeway::store::MARKER).exists());
/// let lens = LensSystem::binary(1.0, 0.1).unwrap();
/// let window = Window::new((0.0, 0.0), 1.0, 16).unwrap();
/// let key = MapKey::new(lens.clone(), window, "rays", 10.0);
/// assert!(store.get(&key).unwrap().is_none());
/// let map = RayShooting::new(10.0).build(&lens, &window).unwrap();
/// store.put(&map).unwrap();
/// assert_eq!(store.get(&key).unwrap().unwrap().data, map.data);
/// assert_eq!(store.find(1.0, 0.1).unwrap().len(), 1);
/// std::fs::remove_dir_all(&dir).unwrap();
/// ```
#[derive(Debug, Clone)]
pub struct Store {
    root: PathBuf,
}

/// Relative tolerance of the exact lookups by (s, q) ([`Store::find`]): stored values such as
/// 0.0010000000000000002 from a log-spaced grid match 1e-3.
pub const MATCH_TOLERANCE: f64 = 1e-9;

impl Store {
    /// The store directory from `--store`, else `$CAUSEWAY_STORE`, else `./maps`.
    pub fn location(option: Option<&Path>) -> PathBuf {
        option
            .map(Path::to_path_buf)
            .or_else(|| std::env::var_os(STORE_ENV).map(PathBuf::from))
            .unwrap_or_else(|| PathBuf::from("maps"))
    }

    /// Opens the existing store at `root`: a missing folder, a folder without the store's
    /// marker and a store of a newer format are errors naming the folder. Creates nothing.
    ///
    /// ```
    /// use causeway::store::Store;
    /// let err = Store::open("/no/such/store".as_ref()).unwrap_err();
    /// assert_eq!(err.to_string(), "store /no/such/store: no such folder");
    /// ```
    pub fn open(root: &Path) -> Result<Store> {
        layout::check_marked(root)?;
        Ok(Store {
            root: root.to_path_buf(),
        })
    }

    /// Opens the store at `root` for building maps into it: creates and marks a missing
    /// folder; marks (adopts) an unmarked folder that holds a valid index of ours or only
    /// files the store writes (an empty folder among them), and refuses any other unmarked
    /// folder. Complete maps that the index does not list yet are adopted (indexed).
    pub fn create(root: &Path) -> Result<Store> {
        layout::prepare(root)?;
        let store = Store {
            root: root.to_path_buf(),
        };
        store.adopt()?;
        Ok(store)
    }

    /// The store directory.
    pub fn root(&self) -> &Path {
        &self.root
    }

    /// Where the map of `key` lives (whether or not it exists).
    pub fn path_of(&self, key: &MapKey) -> PathBuf {
        self.root.join(key.file_name())
    }

    fn index_path(&self) -> PathBuf {
        self.root.join(layout::INDEX)
    }

    /// Reads the map of `key` if present; a present file that fails its checksums or whose
    /// header does not match the key is an error naming it.
    pub fn get(&self, key: &MapKey) -> Result<Option<MagnificationMap>> {
        Ok(self.get_refined(key)?.map(|m| m.base))
    }

    /// [`Store::get`] with the map's tiles, if the key has a refinement.
    pub fn get_refined(&self, key: &MapKey) -> Result<Option<RefinedMap>> {
        let path = self.path_of(key);
        if !path.exists() {
            return Ok(None);
        }
        read_checked(&path).map(Some)
    }

    /// True when the map of `key` is present and verifies.
    pub fn has_verified(&self, key: &MapKey) -> bool {
        matches!(self.get(key), Ok(Some(_)))
    }

    /// Writes a map under its key (atomically) and records it in the index.
    pub fn put(&self, map: &MagnificationMap) -> Result<PathBuf> {
        let key = MapKey::of_map(map);
        let path = self.path_of(&key);
        write_fits(map, &path)?;
        self.record(Entry::of_map(map, &key.file_name()))?;
        Ok(path)
    }

    /// Writes a map with its tiles under its key (atomically) and records it in the index.
    pub fn put_refined(&self, map: &RefinedMap) -> Result<PathBuf> {
        let key = MapKey::of_refined(map);
        let path = self.path_of(&key);
        write_refined(map, &path)?;
        self.record(Entry::of_map(&map.base, &key.file_name()))?;
        Ok(path)
    }

    /// Adds or replaces an index entry, under the store lock.
    pub fn record(&self, entry: Entry) -> Result<()> {
        self.with_lock(|| {
            let mut entries = self.entries()?;
            entries.retain(|e| e.file != entry.file);
            entries.push(entry);
            entries.sort_by(|a, b| a.file.cmp(&b.file));
            index::write(&self.index_path(), &entries)
        })
    }

    /// Every index entry, sorted by file name.
    pub fn entries(&self) -> Result<Vec<Entry>> {
        index::read(&self.index_path())
    }

    /// Entries of binaries with this (s, q), to a relative [`MATCH_TOLERANCE`]; s and q must
    /// be finite and > 0.
    pub fn find(&self, s: f64, q: f64) -> Result<Vec<Entry>> {
        check_point(s, q)?;
        let close = |a: f64, b: f64| (a - b).abs() <= MATCH_TOLERANCE * a.abs().max(b.abs());
        Ok(self
            .entries()?
            .into_iter()
            .filter(|e| e.s.is_some_and(|es| close(es, s)) && e.q.is_some_and(|eq| close(eq, q)))
            .collect())
    }

    /// Binary entries ordered by distance from (s, q) in (log s, log q), nearest first, at most
    /// `count` distinct (s, q) grid points (all maps of each).
    pub fn nearest(&self, s: f64, q: f64, count: usize) -> Result<Vec<Entry>> {
        check_point(s, q)?;
        let mut binaries: Vec<(f64, Entry)> = self
            .entries()?
            .into_iter()
            .filter_map(|e| {
                let (es, eq) = (e.s?, e.q?);
                let d = (es / s).ln().powi(2) + (eq / q).ln().powi(2);
                Some((d, e))
            })
            .collect();
        binaries.sort_by(|a, b| a.0.total_cmp(&b.0).then_with(|| a.1.file.cmp(&b.1.file)));
        let mut points: Vec<(f64, f64)> = Vec::new();
        let mut out = Vec::new();
        for (_, e) in binaries {
            let point = (e.s.unwrap(), e.q.unwrap());
            if !points.contains(&point) {
                if points.len() == count {
                    break;
                }
                points.push(point);
            }
            out.push(e);
        }
        Ok(out)
    }

    /// Runs `f` holding the store's exclusive lock.
    fn with_lock<T>(&self, f: impl FnOnce() -> Result<T>) -> Result<T> {
        let lock_path = self.root.join(layout::LOCK);
        let lock = File::options()
            .create(true)
            .truncate(false)
            .write(true)
            .open(&lock_path)
            .map_err(|e| Error::io(&lock_path, e))?;
        lock.lock().map_err(|e| Error::io(&lock_path, e))?;
        let result = f();
        let _ = lock.unlock();
        result
    }
}

/// Refuses a lookup point that is not a finite, positive (s, q).
fn check_point(s: f64, q: f64) -> Result<()> {
    if s.is_finite() && s > 0.0 && q.is_finite() && q > 0.0 {
        Ok(())
    } else {
        Err(Error::input(format!(
            "lookup: s and q must be finite and > 0, got s = {s}, q = {q}"
        )))
    }
}

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Reads the map (with its tiles) at `path` and checks that it carries the key its file name
/// says.
fn read_checked(path: &Path) -> Result<RefinedMap> {
    let map = read_refined(path)?;
    let expected = MapKey::of_refined(&map).file_name();
    if file_name(path) != expected {
        return Err(Error::input(format!(
            "{}: header describes a different map (its key hashes to {expected})",
            path.display()
        )));
    }
    Ok(map)
}
