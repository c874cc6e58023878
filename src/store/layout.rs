//! What a store folder holds: the marker that makes a folder a store, and the names of the
//! files the store writes (the only files its upkeep may ever remove).
//!
//! A store folder holds `causeway-store.toml` (the marker, with the store's format version),
//! `index.csv`, the lock `.lock`, maps named `<32 hex digits>.fits`, while a map is being built
//! its claim `<32 hex digits>.claim` (see [`super::claim`]) and, while they are being written,
//! temporaries named `.<one of those names>.<pid>.<counter>.tmp` (a stale claim is renamed to
//! one such name before it is removed). Anything else in the folder belongs to someone else and
//! is left alone.

use super::index;
use crate::error::{Error, Result};
use crate::fsutil::write_atomic;
use serde::Deserialize;
use std::fs;
use std::path::Path;

/// File name of the marker that makes a folder a map store.
pub const MARKER: &str = "causeway-store.toml";

/// Version of the store's layout written into the marker. Bump it when the layout changes
/// meaning; a store of a newer version is refused rather than misread.
pub const STORE_FORMAT: u32 = 1;

/// The index file's name.
pub(super) const INDEX: &str = "index.csv";

/// The lock file's name.
pub(super) const LOCK: &str = ".lock";

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Marker {
    format: u32,
}

fn marker_text() -> String {
    format!(
        "# A causeway map store: maps named by the hash of their key, listed in {INDEX}.\n\
         format = {STORE_FORMAT}\n"
    )
}

/// True for the name of a map file: 32 lower-case hex digits and `.fits`.
///
/// ```
/// use causeway::store::is_map_name;
/// assert!(is_map_name("0123456789abcdef0123456789abcdef.fits"));
/// assert!(!is_map_name("zoom.fits"));
/// assert!(!is_map_name("../0123456789abcdef0123456789abcdef.fits"));
/// ```
pub fn is_map_name(name: &str) -> bool {
    name.strip_suffix(".fits").is_some_and(|stem| {
        stem.len() == 32
            && stem
                .bytes()
                .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
    })
}

/// True for the name of a builder's claim on a map: 32 lower-case hex digits and `.claim`.
///
/// ```
/// use causeway::store::is_claim_name;
/// assert!(is_claim_name("0123456789abcdef0123456789abcdef.claim"));
/// assert!(!is_claim_name("0123456789abcdef0123456789abcdef.fits"));
/// ```
pub fn is_claim_name(name: &str) -> bool {
    name.strip_suffix(".claim")
        .is_some_and(|stem| is_map_name(&format!("{stem}.fits")))
}

/// The claim's name for the map file `map_name`; anything but a map name is refused.
pub(super) fn claim_name(map_name: &str) -> Result<String> {
    match map_name.strip_suffix(".fits") {
        Some(stem) if is_map_name(map_name) => Ok(format!("{stem}.claim")),
        _ => Err(Error::input(format!(
            "claim: '{}' is not the name of a map of the store",
            crate::error::shown(map_name)
        ))),
    }
}

/// True for the name of a temporary the store writes:
/// `.<map, claim, index or marker name>.<pid>.<n>.tmp`.
///
/// ```
/// use causeway::store::is_temporary_name;
/// assert!(is_temporary_name(".index.csv.123.0.tmp"));
/// assert!(is_temporary_name(".0123456789abcdef0123456789abcdef.fits.77.3.tmp"));
/// assert!(is_temporary_name(".0123456789abcdef0123456789abcdef.claim.77.3.tmp"));
/// assert!(!is_temporary_name(".notes.txt.1.2.tmp"));
/// assert!(!is_temporary_name("index.csv.1.2.tmp"));
/// ```
pub fn is_temporary_name(name: &str) -> bool {
    let Some(inner) = name.strip_prefix('.').and_then(|n| n.strip_suffix(".tmp")) else {
        return false;
    };
    let mut parts = inner.rsplitn(3, '.');
    let (Some(counter), Some(pid), Some(target)) = (parts.next(), parts.next(), parts.next())
    else {
        return false;
    };
    let number = |t: &str| !t.is_empty() && t.bytes().all(|b| b.is_ascii_digit());
    number(counter)
        && number(pid)
        && (target == INDEX || target == MARKER || is_map_name(target) || is_claim_name(target))
}

/// True for any name the store itself writes.
fn is_own_name(name: &str) -> bool {
    name == MARKER
        || name == INDEX
        || name == LOCK
        || is_map_name(name)
        || is_claim_name(name)
        || is_temporary_name(name)
}

/// Checks that `root` is an existing, marked store of a format this version reads.
pub(super) fn check_marked(root: &Path) -> Result<()> {
    match fs::metadata(root) {
        Ok(m) if m.is_dir() => {}
        Ok(_) => {
            return Err(Error::input(format!(
                "store {}: not a folder",
                root.display()
            )))
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(Error::input(format!(
                "store {}: no such folder",
                root.display()
            )))
        }
        Err(e) => return Err(Error::io(root, e)),
    }
    let marker = root.join(MARKER);
    let text = match fs::read_to_string(&marker) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            let hint = if root.join(INDEX).exists() {
                "; a build adopts it if its index is valid"
            } else {
                ""
            };
            return Err(Error::input(format!(
                "{}: not a map store (no {MARKER}){hint}",
                root.display()
            )));
        }
        Err(e) => return Err(Error::io(&marker, e)),
    };
    let format = toml::from_str::<Marker>(&text)
        .map_err(|_| {
            Error::input(format!(
                "{}: not a store marker (expected format = {STORE_FORMAT})",
                marker.display()
            ))
        })?
        .format;
    if format > STORE_FORMAT {
        return Err(Error::input(format!(
            "{}: store format {format} is newer than this version reads ({STORE_FORMAT})",
            marker.display()
        )));
    }
    Ok(())
}

/// Makes `root` a store if it is not one: creates a missing folder and marks it, and marks an
/// existing unmarked folder that holds a valid index of ours or only files the store writes
/// (an empty folder among them). Any other unmarked folder is refused.
pub(super) fn prepare(root: &Path) -> Result<()> {
    if !root.exists() {
        fs::create_dir_all(root).map_err(|e| Error::io(root, e))?;
        return write_atomic(&root.join(MARKER), marker_text().as_bytes());
    }
    if root.join(MARKER).exists() || !root.is_dir() {
        return check_marked(root);
    }
    let index_path = root.join(INDEX);
    let adoptable = if index_path.exists() {
        index::read(&index_path).map_err(|e| {
            Error::input(format!(
                "{e} (the folder has no {MARKER}: not adopted as a store)"
            ))
        })?;
        true
    } else {
        only_own_names(root)?
    };
    if !adoptable {
        return Err(Error::input(format!(
            "{}: not a map store (no {MARKER}) and it holds other files; choose a new or empty folder",
            root.display()
        )));
    }
    write_atomic(&root.join(MARKER), marker_text().as_bytes())
}

/// True when every entry of `root` has a name the store writes.
fn only_own_names(root: &Path) -> Result<bool> {
    for entry in fs::read_dir(root).map_err(|e| Error::io(root, e))? {
        let entry = entry.map_err(|e| Error::io(root, e))?;
        if !is_own_name(&entry.file_name().to_string_lossy()) {
            return Ok(false);
        }
    }
    Ok(true)
}
