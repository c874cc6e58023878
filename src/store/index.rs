//! The store's index: one CSV row per map, rewritten atomically.

use super::layout::is_map_name;
use crate::error::{Error, Result};
use crate::fsutil::write_atomic;
use crate::map::MagnificationMap;
use crate::table::fmt_f64;
use std::path::Path;

const HEADER: &str = "file,s,q,lenses,center_x,center_y,width,pixels,engine,density,rays_shot,rays_landed,build_seconds,build_time";

/// One map in the index: what it is and what it cost.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// File name within the store.
    pub file: String,
    /// Binary separation, when the lens is a binary given by (s, q).
    pub s: Option<f64>,
    /// Binary mass ratio, likewise.
    pub q: Option<f64>,
    /// Number of point lenses.
    pub lenses: usize,
    /// Window centre.
    pub center: (f64, f64),
    /// Window side.
    pub width: f64,
    /// Pixels per side.
    pub pixels: usize,
    /// Engine name.
    pub engine: String,
    /// Engine density.
    pub density: f64,
    /// Rays shot.
    pub rays_shot: u64,
    /// Rays landed.
    pub rays_landed: u64,
    /// Build duration, seconds.
    pub build_seconds: f64,
    /// Build time, UTC.
    pub build_time: String,
}

impl Entry {
    /// The entry of a map stored as `file`.
    pub fn of_map(map: &MagnificationMap, file: &str) -> Self {
        let p = &map.provenance;
        let binary = p.lens.binary_parameters();
        Entry {
            file: file.to_string(),
            s: binary.map(|b| b.0),
            q: binary.map(|b| b.1),
            lenses: p.lens.len(),
            center: map.window.center,
            width: map.window.width,
            pixels: map.window.pixels,
            engine: p.engine.clone(),
            density: p.density,
            rays_shot: p.rays_shot,
            rays_landed: p.rays_landed,
            build_seconds: p.build_seconds,
            build_time: p.build_time.clone(),
        }
    }

    /// The CSV row.
    pub fn row(&self) -> String {
        let opt = |v: Option<f64>| v.map(fmt_f64).unwrap_or_default();
        format!(
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            self.file,
            opt(self.s),
            opt(self.q),
            self.lenses,
            fmt_f64(self.center.0),
            fmt_f64(self.center.1),
            fmt_f64(self.width),
            self.pixels,
            self.engine,
            fmt_f64(self.density),
            self.rays_shot,
            self.rays_landed,
            fmt_f64(self.build_seconds),
            self.build_time
        )
    }
}

/// The index header row.
pub fn header() -> &'static str {
    HEADER
}

/// Reads the index; a missing file is an empty index. A header other than ours, a file field
/// that is not a map name of the store (so never a path out of it) and a number that is not
/// finite are errors naming the line.
pub fn read(path: &Path) -> Result<Vec<Entry>> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(Error::io(path, e)),
    };
    if text.lines().next().map(str::trim_end) != Some(HEADER) {
        return Err(Error::input(format!(
            "{}:1: not a map index (its header is not the store's)",
            path.display()
        )));
    }
    let mut entries = Vec::new();
    for (no, line) in text.lines().enumerate().skip(1) {
        if line.trim().is_empty() {
            continue;
        }
        let bad = |what: &str| Error::input(format!("{}:{}: {what}", path.display(), no + 1));
        let f: Vec<&str> = line.split(',').collect();
        if f.len() != 14 {
            return Err(bad("expected 14 fields"));
        }
        if !is_map_name(f[0]) {
            let shown: String = f[0].chars().take(40).collect();
            return Err(bad(&format!(
                "file '{}' is not the name of a map in the store",
                shown.escape_debug()
            )));
        }
        let num = |i: usize| {
            f[i].parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad("bad number"))
        };
        let int = |i: usize| f[i].parse::<u64>().map_err(|_| bad("bad integer"));
        let opt = |i: usize| -> Result<Option<f64>> {
            if f[i].is_empty() {
                Ok(None)
            } else {
                num(i).map(Some)
            }
        };
        entries.push(Entry {
            file: f[0].to_string(),
            s: opt(1)?,
            q: opt(2)?,
            lenses: int(3)? as usize,
            center: (num(4)?, num(5)?),
            width: num(6)?,
            pixels: int(7)? as usize,
            engine: f[8].to_string(),
            density: num(9)?,
            rays_shot: int(10)?,
            rays_landed: int(11)?,
            build_seconds: num(12)?,
            build_time: f[13].to_string(),
        });
    }
    Ok(entries)
}

/// Writes the index atomically.
pub fn write(path: &Path, entries: &[Entry]) -> Result<()> {
    let mut text = String::from(HEADER);
    text.push('\n');
    for e in entries {
        text += &e.row();
        text.push('\n');
    }
    write_atomic(path, text.as_bytes())
}
