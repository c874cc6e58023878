//! The map store: content-addressed FITS files under one directory, and an index by (s, q).
//!
//! A map lives at `<store>/<hash>.fits`, the hash taken over the canonical text of its
//! [`MapKey`] (SHA-256, stable across versions and platforms). `<store>/index.csv` lists every
//! map with its parameters and build statistics; it is rewritten atomically under an exclusive
//! lock on `<store>/.lock`, so builders sharing a store (threads, processes, cluster tasks on a
//! shared file system that honours `flock`) never lose each other's entries. Map files are
//! written to a temporary name (`.<hash>.fits.<pid>.<n>.tmp`) and renamed, so a file named
//! `<hash>.fits` is always complete; a build killed at any moment leaves at most a temporary
//! that [`Store::prune`] removes.
//!
//! The default store is `./maps`, overridden by `--store DIR` or `CAUSEWAY_STORE`.

mod index;
mod key;
pub mod library;

pub use index::{header as index_header, Entry};
pub use key::{MapKey, KEY_FORMAT};

use crate::error::{Error, Result};
use crate::map::fits::{read_fits, write_fits};
use crate::map::MagnificationMap;
use std::fs::{self, File};
use std::path::{Path, PathBuf};

/// Environment variable naming the store directory.
pub const STORE_ENV: &str = "CAUSEWAY_STORE";

/// A directory of maps with its index.
///
/// ```
/// use causeway::engine::{Engine, RayShooting};
/// use causeway::{lens::LensSystem, map::Window, store::{MapKey, Store}};
/// let dir = std::env::temp_dir().join(format!("causeway-doc-store-{}", std::process::id()));
/// let store = Store::open(&dir).unwrap();
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

/// A problem found by [`Store::verify`].
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// The file concerned.
    pub path: PathBuf,
    /// What is wrong with it.
    pub reason: String,
}

impl Store {
    /// The store directory from `--store`, else `$CAUSEWAY_STORE`, else `./maps`.
    pub fn location(option: Option<&Path>) -> PathBuf {
        option
            .map(Path::to_path_buf)
            .or_else(|| std::env::var_os(STORE_ENV).map(PathBuf::from))
            .unwrap_or_else(|| PathBuf::from("maps"))
    }

    /// Opens (creating if needed) the store at `root`.
    pub fn open(root: &Path) -> Result<Store> {
        fs::create_dir_all(root).map_err(|e| Error::io(root, e))?;
        Ok(Store {
            root: root.to_path_buf(),
        })
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
        self.root.join("index.csv")
    }

    /// Reads the map of `key` if present; a present file that fails its checksums or whose
    /// header does not match the key is an error naming it.
    pub fn get(&self, key: &MapKey) -> Result<Option<MagnificationMap>> {
        let path = self.path_of(key);
        if !path.exists() {
            return Ok(None);
        }
        let map = read_fits(&path)?;
        check_key(&map, &path)?;
        Ok(Some(map))
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

    /// Entries of binaries with exactly this (s, q).
    pub fn find(&self, s: f64, q: f64) -> Result<Vec<Entry>> {
        Ok(self
            .entries()?
            .into_iter()
            .filter(|e| e.s == Some(s) && e.q == Some(q))
            .collect())
    }

    /// Binary entries ordered by distance from (s, q) in (log s, log q), nearest first, at most
    /// `count` distinct (s, q) grid points (all maps of each).
    pub fn nearest(&self, s: f64, q: f64, count: usize) -> Result<Vec<Entry>> {
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

    /// Checks every indexed map (present, checksums, header matching its key and its file
    /// name) and every map file the index does not name; returns each problem found.
    pub fn verify(&self) -> Result<Vec<Problem>> {
        let entries = self.entries()?;
        let mut problems = Vec::new();
        for e in &entries {
            let path = self.root.join(&e.file);
            if !path.exists() {
                problems.push(Problem {
                    path,
                    reason: "listed in the index but missing".into(),
                });
                continue;
            }
            if let Err(err) = read_fits(&path).and_then(|m| check_key(&m, &path)) {
                let text = err.to_string();
                let prefix = format!("{}: ", path.display());
                let reason = text.strip_prefix(&prefix).unwrap_or(&text).to_string();
                problems.push(Problem { path, reason });
            }
        }
        for path in self.map_files()? {
            let name = file_name(&path);
            if !entries.iter().any(|e| e.file == name) {
                problems.push(Problem {
                    path,
                    reason: "not in the index".into(),
                });
            }
        }
        Ok(problems)
    }

    /// Removes map files that fail verification or that the index does not name, index entries
    /// whose file is missing or bad, and temporary files older than `min_age` (a build killed
    /// mid-write leaves one). Do not prune while a build writes to the store with a `min_age`
    /// shorter than a map's write. Returns the files removed.
    pub fn prune(&self, min_age: std::time::Duration) -> Result<Vec<PathBuf>> {
        self.with_lock(|| {
            let mut removed = Vec::new();
            let problems = self.verify()?;
            for p in &problems {
                if p.path.exists() {
                    fs::remove_file(&p.path).map_err(|e| Error::io(&p.path, e))?;
                    removed.push(p.path.clone());
                }
            }
            let bad: Vec<String> = problems.iter().map(|p| file_name(&p.path)).collect();
            let mut entries = self.entries()?;
            entries.retain(|e| !bad.contains(&e.file));
            index::write(&self.index_path(), &entries)?;
            for entry in fs::read_dir(&self.root).map_err(|e| Error::io(&self.root, e))? {
                let path = entry.map_err(|e| Error::io(&self.root, e))?.path();
                let name = file_name(&path);
                let old = fs::metadata(&path)
                    .and_then(|m| m.modified())
                    .ok()
                    .and_then(|t| t.elapsed().ok())
                    .is_some_and(|age| age >= min_age);
                if name.starts_with('.') && name.ends_with(".tmp") && old {
                    fs::remove_file(&path).map_err(|e| Error::io(&path, e))?;
                    removed.push(path);
                }
            }
            Ok(removed)
        })
    }

    /// Map files (`*.fits`) in the store directory, sorted.
    fn map_files(&self) -> Result<Vec<PathBuf>> {
        let mut files = Vec::new();
        for entry in fs::read_dir(&self.root).map_err(|e| Error::io(&self.root, e))? {
            let path = entry.map_err(|e| Error::io(&self.root, e))?.path();
            let name = file_name(&path);
            if name.ends_with(".fits") && !name.starts_with('.') {
                files.push(path);
            }
        }
        files.sort();
        Ok(files)
    }

    /// Runs `f` holding the store's exclusive lock.
    fn with_lock<T>(&self, f: impl FnOnce() -> Result<T>) -> Result<T> {
        let lock_path = self.root.join(".lock");
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

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Checks that a map read from `path` carries the key its file name says.
fn check_key(map: &MagnificationMap, path: &Path) -> Result<()> {
    let expected = MapKey::of_map(map).file_name();
    if file_name(path) != expected {
        return Err(Error::input(format!(
            "{}: header describes a different map (its key hashes to {expected})",
            path.display()
        )));
    }
    Ok(())
}
