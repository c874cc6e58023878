//! File-system helpers: writes that never leave a half-written file behind.

use crate::error::{Error, Result};
use std::fs::{self, File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Writes `bytes` to `path` atomically: into a temporary file in the same directory, flushed to
/// disk, then renamed over `path`.
///
/// Readers see either the old file or the complete new one, never a part. On failure the
/// temporary file is removed and `path` is left as it was.
///
/// ```
/// let dir = std::env::temp_dir().join(format!("causeway-doc-atomic-{}", std::process::id()));
/// std::fs::create_dir_all(&dir).unwrap();
/// let path = dir.join("hello.txt");
/// causeway::fsutil::write_atomic(&path, b"hello").unwrap();
/// assert_eq!(std::fs::read(&path).unwrap(), b"hello");
/// // A missing directory is an error naming the file, and nothing is written.
/// assert!(causeway::fsutil::write_atomic(&dir.join("no/such/dir.txt"), b"x").is_err());
/// std::fs::remove_dir_all(&dir).unwrap();
/// ```
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let temp = temp_path(path)?;
    let result = write_synced(&temp, bytes).and_then(|()| fs::rename(&temp, path));
    if let Err(e) = result {
        // The temporary may not exist (creation failed); nothing else to clean up then.
        let _ = fs::remove_file(&temp);
        return Err(Error::io(path, e));
    }
    sync_parent(path);
    Ok(())
}

/// Encodes an RGB picture as PNG and writes it atomically (see [`write_atomic`]).
pub fn write_png(path: &Path, image: &image::RgbImage) -> Result<()> {
    use image::ImageEncoder;
    let mut png = Vec::new();
    image::codecs::png::PngEncoder::new(&mut png)
        .write_image(
            image.as_raw(),
            image.width(),
            image.height(),
            image::ExtendedColorType::Rgb8,
        )
        .map_err(|e| Error::Numerical(format!("{}: PNG encoding: {e}", path.display())))?;
    write_atomic(path, &png)
}

/// A fresh name `.<file name>.<pid>.<counter>.tmp` beside `path`.
fn temp_path(path: &Path) -> Result<PathBuf> {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let name = path
        .file_name()
        .ok_or_else(|| Error::input(format!("{}: not a file name to write to", path.display())))?;
    let unique = COUNTER.fetch_add(1, Ordering::Relaxed);
    let mut temp_name = std::ffi::OsString::from(".");
    temp_name.push(name);
    temp_name.push(format!(".{}.{unique}.tmp", std::process::id()));
    Ok(path.with_file_name(temp_name))
}

/// Creates `temp` (it must not exist), writes and fsyncs it.
fn write_synced(temp: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let mut file: File = OpenOptions::new().write(true).create_new(true).open(temp)?;
    file.write_all(bytes)?;
    file.sync_all()
}

/// Makes the rename durable where the platform allows syncing a directory. Best effort: the file
/// itself is already complete and in place, so a failure here loses nothing but durability
/// across a power cut.
fn sync_parent(path: &Path) {
    #[cfg(unix)]
    {
        let parent = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        if let Ok(dir) = File::open(parent) {
            let _ = dir.sync_all();
        }
    }
    #[cfg(not(unix))]
    let _ = path;
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let dir =
            std::env::temp_dir().join(format!("causeway-fsutil-{name}-{}", std::process::id()));
        let _ = fs::remove_dir_all(&dir);
        fs::create_dir_all(&dir).unwrap();
        dir
    }

    fn entries(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    #[test]
    fn replaces_existing_file_and_leaves_no_temporary() {
        let dir = scratch("replace");
        let path = dir.join("out.bin");
        fs::write(&path, b"old content, longer than the new").unwrap();
        write_atomic(&path, b"new").unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"new");
        assert_eq!(entries(&dir), vec!["out.bin".to_string()]);
        fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn failure_names_the_file_and_leaves_the_old_one() {
        let dir = scratch("fail");
        // Renaming a file over a non-empty directory fails: the old "file" stays untouched.
        let path = dir.join("taken");
        fs::create_dir(&path).unwrap();
        fs::write(path.join("inside"), b"keep").unwrap();
        let err = write_atomic(&path, b"new").unwrap_err();
        assert!(err.to_string().contains("taken"), "{err}");
        assert_eq!(err.exit_code(), 2);
        assert_eq!(entries(&dir), vec!["taken".to_string()]);
        assert_eq!(fs::read(path.join("inside")).unwrap(), b"keep");
        fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn relative_path_in_current_directory_gets_a_sibling_temporary() {
        let temp = temp_path(Path::new("map.fits")).unwrap();
        let name = temp.to_string_lossy().into_owned();
        assert!(
            name.starts_with(".map.fits.") && name.ends_with(".tmp"),
            "{name}"
        );
        assert_eq!(temp.parent(), Some(Path::new("")));
        assert!(temp_path(Path::new("/")).is_err());
    }
}

/// One file a command will write: `what` names it in messages (the option that gave it), and
/// `extension` is the one it must have (`None`: any).
#[derive(Debug, Clone, Copy)]
pub struct Output<'a> {
    /// The name of the output in messages, e.g. the option that gave the path.
    pub what: &'a str,
    /// Where it goes.
    pub path: &'a Path,
    /// The extension the file must have, without the dot.
    pub extension: Option<&'a str>,
}

impl<'a> Output<'a> {
    /// A PNG picture, named `what` in messages.
    pub fn png(what: &'a str, path: &'a Path) -> Output<'a> {
        Output {
            what,
            path,
            extension: Some("png"),
        }
    }
}

/// Checks every output of a command before any work, so that a bad path fails at once and no
/// output is written when another one could not be: each path must have its extension, name
/// no existing folder, and lie in a folder that exists; no two outputs may be the same file.
///
/// ```
/// use causeway::fsutil::{check_outputs, Output};
/// use std::path::Path;
/// let dir = std::env::temp_dir();
/// let ok = dir.join("causeway-doc-check.csv");
/// assert!(check_outputs(&[Output { what: "table", path: &ok, extension: Some("csv") }]).is_ok());
/// let err = check_outputs(&[Output { what: "picture", path: &dir, extension: None }]).unwrap_err();
/// assert!(err.to_string().starts_with("picture: "));
/// let missing = Path::new("no/such/folder/x.csv");
/// assert!(check_outputs(&[Output { what: "table", path: missing, extension: Some("csv") }])
///     .is_err());
/// ```
pub fn check_outputs(outputs: &[Output]) -> Result<()> {
    for (i, out) in outputs.iter().enumerate() {
        let (what, path) = (out.what, out.path);
        let shown = || crate::error::one_line(&path.display().to_string());
        if let Some(ext) = out.extension {
            if path.extension().and_then(|e| e.to_str()) != Some(ext) {
                return Err(Error::input(format!(
                    "{what}: expected a .{ext} file name, got '{}'",
                    shown()
                )));
            }
        }
        if path.is_dir() {
            return Err(Error::input(format!(
                "{what}: '{}' is a folder, expected a file name",
                shown()
            )));
        }
        if path.file_name().is_none() {
            return Err(Error::input(format!(
                "{what}: '{}' is not a file name",
                shown()
            )));
        }
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            if !dir.is_dir() {
                return Err(Error::input(format!(
                    "{what}: the folder '{}' does not exist",
                    crate::error::one_line(&dir.display().to_string())
                )));
            }
        }
        if let Some(other) = outputs[..i].iter().find(|o| o.path == path) {
            return Err(Error::input(format!(
                "{what}: '{}' is also the file of {}",
                shown(),
                other.what
            )));
        }
    }
    Ok(())
}
