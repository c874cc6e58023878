//! Magnification maps as FITS files (FITS Standard 4.0): one primary image HDU, float32.
//!
//! The image has `NAXIS1` pixels along x and `NAXIS2` along y, the first pixel at the lower left
//! (smallest x and y); pixel `[[iy, ix]]` of [`MagnificationMap::data`] is FITS pixel
//! (`ix + 1`, `iy + 1`). A linear WCS gives source-plane coordinates in Einstein radii, and the
//! header records everything needed to make the map again. Floats are written with 17
//! significant digits, so they read back to the same double.
//!
//! | keyword | type | meaning |
//! | --- | --- | --- |
//! | `SIMPLE`, `BITPIX`, `NAXIS`, `NAXIS1`, `NAXIS2` | standard | `T`, `-32` (IEEE float32, big-endian), `2`, pixels along x, pixels along y |
//! | `WCSAXES`, `CTYPE1`, `CTYPE2` | standard | `2`, `'LINEAR'`, `'LINEAR'`: a linear world coordinate per axis |
//! | `CRPIX1`, `CRPIX2` | standard | `1.0`: the reference point is the centre of the first pixel |
//! | `CRVAL1`, `CRVAL2` | standard | x and y of the centre of the first (lower-left) pixel, Einstein radii |
//! | `CDELT1`, `CDELT2` | standard | pixel side, Einstein radii |
//! | `WIN_XC`, `WIN_YC` | float | window centre x, y (Einstein radii) |
//! | `WIN_SIDE` | float | window side length (Einstein radii) |
//! | `WIN_PIX` | integer | pixels per side (equals `NAXIS1` and `NAXIS2`) |
//! | `LENS_N` | integer | number of point lenses, at most 999 |
//! | `LENSnX`, `LENSnY`, `LENSnM` | float | lens n = 1 .. `LENS_N`: position x, y (Einstein radii of the total mass) and mass (fraction of the total) |
//! | `BIN_S`, `BIN_Q` | float | binary separation s and mass ratio q = m2/m1, present only for a binary given by (s, q) |
//! | `ENGINE` | string | name of the engine that built the map |
//! | `DENSITY` | float | rays (or cells) per unlensed pixel area |
//! | `RAYSHOT` | integer | rays shot in total |
//! | `RAYSLAND` | integer | rays that landed in the window |
//! | `CW_VERS` | string | version of causeway that built the map |
//! | `DATE` | string | build time, UTC, `YYYY-MM-DDThh:mm:ss` (FITS `DATE` convention) |
//! | `BUILDSEC` | float | wall-clock build duration, seconds |
//! | `DATASUM`, `CHECKSUM` | standard | FITS checksum convention: data sum as a decimal string, and the encoded HDU checksum |
//! | `EXTEND`, `ERR*` | | a certified map: the accuracy certificate's cards, and its sample as a table extension (`fits/table.rs`) |
//! | `EXTEND`, `REFINE`, `TILE*` | | a refined map ([`crate::map::tiles`]): the refinement's cards, and each tile as an image extension with its own WCS (`fits/tiles.rs`) |
//!
//! Writing is deterministic: two maps that differ only in build time and duration give files
//! that differ only in `DATE`, `BUILDSEC`, `ERRSEC` and the `CHECKSUM`s.

mod checksum;
mod header;
mod table;
mod tiles;

use super::tiles::RefinedMap;
use super::{MagnificationMap, Provenance, Window};
use crate::error::{Error, Result};
use crate::fsutil::write_atomic;
use crate::lens::LensSystem;
use fitsrs::card::Value;
use fitsrs::{Fits, Pixels, HDU};
use header::{string_card, Header};
use ndarray::Array2;
use std::io::Cursor;
use std::path::Path;

/// FITS block size in bytes.
const BLOCK: usize = 2880;
/// FITS header card size in bytes.
const CARD: usize = 80;
/// The most lenses the `LENSnX` keyword scheme can name in 8 characters.
pub const MAX_LENSES: usize = 999;

/// Writes a map as a FITS file, atomically (see [`write_atomic`]).
///
/// ```
/// use causeway::lens::LensSystem;
/// use causeway::map::fits::{read_fits, write_fits};
/// use causeway::map::{MagnificationMap, Provenance, Window};
/// let provenance = Provenance {
///     lens: LensSystem::binary(1.2, 0.5).unwrap(),
///     engine: "rays".into(),
///     density: 100.0,
///     rays_shot: 4000,
///     rays_landed: 1600,
///     version: "0.1.0".into(),
///     build_time: "2026-01-02T03:04:05".into(),
///     build_seconds: 0.25,
///     certificate: None,
/// };
/// let window = Window::new((0.1, -0.2), 0.5, 4).unwrap();
/// let data = ndarray::Array2::from_shape_fn((4, 4), |(iy, ix)| 1.0 + (ix + 4 * iy) as f32);
/// let map = MagnificationMap { window, data, provenance };
/// let path = std::env::temp_dir().join(format!("causeway-doc-{}.fits", std::process::id()));
/// write_fits(&map, &path).unwrap();
/// assert_eq!(read_fits(&path).unwrap(), map);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn write_fits(map: &MagnificationMap, path: &Path) -> Result<()> {
    write_atomic(path, &encode(map, None)?)
}

/// Writes a map and its tiles as one FITS file, atomically: the base as the primary image (as
/// [`write_fits`] writes it, with the refinement's cards), then each tile as an image
/// extension `TILE` (`EXTVER` 1, 2, ...) with its own WCS and checksums.
///
/// ```
/// use causeway::engine::by_name;
/// use causeway::lens::LensSystem;
/// use causeway::map::fits::{read_refined, write_refined};
/// use causeway::map::tiles::{RefinedMap, Refinement};
/// use causeway::map::Window;
/// let lens = LensSystem::binary(1.0, 0.1).unwrap();
/// let window = Window::new((0.0, 0.0), 1.0, 48).unwrap();
/// let refine = Some(Refinement::new(2).unwrap());
/// let map = RefinedMap::build(by_name("rays", 2.0).unwrap().as_ref(), &lens, &window, refine,
///                             &(), false).unwrap();
/// let path = std::env::temp_dir().join(format!("causeway-doc-tiles-{}.fits", std::process::id()));
/// write_refined(&map, &path).unwrap();
/// assert_eq!(read_refined(&path).unwrap(), map);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn write_refined(map: &RefinedMap, path: &Path) -> Result<()> {
    write_atomic(path, &encode(&map.base, Some(map))?)
}

/// Reads a map written by [`write_fits`]: pixels through `fitsrs`, the window and provenance from
/// the header. The checksums are verified when present.
///
/// Errors name the file and the missing or bad keyword.
pub fn read_fits(path: &Path) -> Result<MagnificationMap> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    decode(&bytes)
        .map(|d| d.map)
        .map_err(|msg| Error::input(format!("{}: {msg}", path.display())))
}

/// Reads a map file with its tiles, if any ([`write_refined`]); a file of a plain map reads as
/// [`RefinedMap::plain`]. Every HDU's checksums are verified, and each tile's window against
/// the base and the refinement.
pub fn read_refined(path: &Path) -> Result<RefinedMap> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    decode(&bytes)
        .and_then(|d| tiles::decode(d, &bytes))
        .map_err(|msg| Error::input(format!("{}: {msg}", path.display())))
}

/// The whole file: the primary HDU (header, then data, each padded to whole blocks, then the
/// checksums), for a certified map the table of its sample, and the tiles of a refined map.
fn encode(map: &MagnificationMap, refined: Option<&RefinedMap>) -> Result<Vec<u8>> {
    let refinement = refined.and_then(|r| r.refinement.map(|f| (f, r.tiles.as_slice())));
    let mut header = map_header(map, refinement.is_some())?;
    if let Some((r, t)) = refinement {
        tiles::refinement_cards(&mut header, &r, t.len());
    }
    let mut bytes = hdu_bytes(header, &image_bytes(map))?;
    if let Some(c) = &map.provenance.certificate {
        let (header, rows) = table::encode(c)?;
        bytes.extend(hdu_bytes(header, &rows)?);
    }
    if let Some((r, t)) = refinement {
        bytes.extend(tiles::encode(map, &r, t)?);
    }
    Ok(bytes)
}

/// The pixels as big-endian float32, `[[iy, ix]]` in order.
fn image_bytes(map: &MagnificationMap) -> Vec<u8> {
    let mut data = Vec::with_capacity(4 * map.data.len());
    for v in map.data.iter() {
        data.extend_from_slice(&v.to_be_bytes());
    }
    data
}

/// One HDU: `h` with the checksum cards and END, then `data` padded to whole blocks.
fn hdu_bytes(mut h: Header, data: &[u8]) -> Result<Vec<u8>> {
    let datasum_at = h.placeholder();
    let checksum_at = h.placeholder();
    let mut bytes = h.finish();

    let data_start = bytes.len();
    bytes.extend_from_slice(data);
    bytes.resize(data_start + padded(data.len()), 0);

    // The checksum convention: DATASUM first, then CHECKSUM over the whole HDU with
    // CHECKSUM = '0000000000000000', finally replaced by the encoded complement.
    let datasum = checksum::ones_sum(&bytes[data_start..]);
    let card = string_card("DATASUM", &datasum.to_string(), "data unit checksum")?;
    bytes[datasum_at..datasum_at + CARD].copy_from_slice(&card);
    let card = string_card("CHECKSUM", "0000000000000000", "HDU checksum")?;
    bytes[checksum_at..checksum_at + CARD].copy_from_slice(&card);
    let code = checksum::encode_complement(checksum::ones_sum(&bytes));
    bytes[checksum_at + 11..checksum_at + 27].copy_from_slice(&code);
    Ok(bytes)
}

/// Every card but the checksums and END, after checking that the map can be written;
/// `extended` when image extensions (tiles) follow.
fn map_header(map: &MagnificationMap, extended: bool) -> Result<Header> {
    let w = &map.window;
    let p = &map.provenance;
    let n = w.pixels;
    check_shape(map)?;
    let lenses = p.lens.lenses();
    if lenses.len() > MAX_LENSES {
        return Err(Error::input(format!(
            "{} lenses: a FITS map header holds at most {MAX_LENSES}",
            lenses.len()
        )));
    }
    let mut h = Header::default();
    h.logical("SIMPLE", true, "conforms to FITS Standard 4.0");
    h.integer("BITPIX", -32, "IEEE 754 float32, big-endian");
    h.integer("NAXIS", 2, "two-dimensional image");
    h.integer("NAXIS1", n as i64, "pixels along x");
    h.integer("NAXIS2", n as i64, "pixels along y");
    if extended {
        h.logical("EXTEND", true, "refined tiles follow as image extensions");
    } else if p.certificate.is_some() {
        h.logical("EXTEND", true, "the sample of the certificate follows");
    }
    h.comment("Mean magnification per pixel; lengths in Einstein radii of the total mass.");
    window_cards(&mut h, w)?;

    h.integer("LENS_N", lenses.len() as i64, "number of point lenses");
    for (i, l) in lenses.iter().enumerate() {
        let k = i + 1;
        h.float(&format!("LENS{k}X"), l.position.re, "lens position x")?;
        h.float(&format!("LENS{k}Y"), l.position.im, "lens position y")?;
        h.float(
            &format!("LENS{k}M"),
            l.mass,
            "lens mass, fraction of the total",
        )?;
    }
    if let Some((s, q)) = p.lens.binary_parameters() {
        h.float("BIN_S", s, "binary separation s")?;
        h.float("BIN_Q", q, "binary mass ratio q = m2/m1")?;
    }
    build_cards(&mut h, p)?;
    if let Some(c) = &p.certificate {
        table::certificate_cards(&mut h, c)?;
    }
    Ok(h)
}

/// The data must be the window's square of pixels.
fn check_shape(map: &MagnificationMap) -> Result<()> {
    let n = map.window.pixels;
    if map.data.dim() != (n, n) {
        return Err(Error::input(format!(
            "map data are {:?} pixels but the window has {n} x {n}",
            map.data.dim()
        )));
    }
    Ok(())
}

/// The linear WCS of `w` (the centre of the first pixel as the reference) and the `WIN_*` cards.
fn window_cards(h: &mut Header, w: &Window) -> Result<()> {
    let (x0, y0) = w.pixel_center(0, 0);
    let n = w.pixels;
    h.integer("WCSAXES", 2, "two world coordinates: source-plane x and y");
    h.string("CTYPE1", "LINEAR", "source-plane x, Einstein radii")?;
    h.string("CTYPE2", "LINEAR", "source-plane y, Einstein radii")?;
    h.float("CRPIX1", 1.0, "reference: centre of the first pixel")?;
    h.float("CRPIX2", 1.0, "reference: centre of the first pixel")?;
    h.float("CRVAL1", x0, "x at the reference pixel")?;
    h.float("CRVAL2", y0, "y at the reference pixel")?;
    h.float("CDELT1", w.pixel_size(), "pixel side along x")?;
    h.float("CDELT2", w.pixel_size(), "pixel side along y")?;
    h.float("WIN_XC", w.center.0, "window centre x")?;
    h.float("WIN_YC", w.center.1, "window centre y")?;
    h.float("WIN_SIDE", w.width, "window side length")?;
    h.integer("WIN_PIX", n as i64, "pixels per side");
    Ok(())
}

/// How the image was made: engine, density, counts, version, time.
fn build_cards(h: &mut Header, p: &Provenance) -> Result<()> {
    h.string("ENGINE", &p.engine, "map engine")?;
    h.float("DENSITY", p.density, "rays per unlensed pixel area")?;
    h.integer("RAYSHOT", count(p.rays_shot, "rays shot")?, "rays shot");
    h.integer(
        "RAYSLAND",
        count(p.rays_landed, "rays landed")?,
        "rays landed in the window",
    );
    h.string("CW_VERS", &p.version, "causeway version")?;
    h.string("DATE", &p.build_time, "build time, UTC")?;
    h.float("BUILDSEC", p.build_seconds, "build duration, seconds")?;
    Ok(())
}

/// A count as a FITS integer.
fn count(v: u64, what: &str) -> Result<i64> {
    i64::try_from(v).map_err(|_| Error::input(format!("{what}: {v} exceeds a FITS integer")))
}

/// `len` rounded up to whole blocks.
fn padded(len: usize) -> usize {
    len.div_ceil(BLOCK) * BLOCK
}

/// The primary HDU (and the certificate's table) of a file, and where the rest begins.
struct Decoded<'a> {
    map: MagnificationMap,
    /// The refinement and the number of tiles the primary header announces.
    refinement: Option<(super::tiles::Refinement, usize)>,
    /// The reader, positioned after the HDUs read.
    fits: Fits<Cursor<&'a [u8]>>,
    /// Byte offset of the end of the HDUs read.
    end: usize,
}

/// Parses the primary HDU and the certificate's table; the error message lacks only the file
/// name.
fn decode(bytes: &[u8]) -> std::result::Result<Decoded<'_>, String> {
    let mut fits = Fits::from_reader(Cursor::new(bytes));
    let hdu = match fits.next() {
        Some(Ok(HDU::Primary(hdu))) => hdu,
        Some(Ok(_)) | None => return Err("no primary HDU".into()),
        Some(Err(e)) => return Err(format!("not a readable FITS file: {e}")),
    };
    let header = Keywords(hdu.get_header());
    let bitpix = header.integer("BITPIX")?;
    if bitpix != -32 {
        return Err(format!(
            "BITPIX = {bitpix}: causeway maps are float32 (-32)"
        ));
    }
    let naxis = header.integer("NAXIS")?;
    if naxis != 2 {
        return Err(format!("NAXIS = {naxis}: a map is a 2-D image"));
    }
    let n = header.count("WIN_PIX")?;
    for key in ["NAXIS1", "NAXIS2"] {
        let len = header.count(key)?;
        if len != n {
            return Err(format!("{key} = {len} disagrees with WIN_PIX = {n}"));
        }
    }
    if n == 0 {
        return Err("WIN_PIX must be at least 1".into());
    }
    let window = read_window(&header, n)?;

    let data_start = hdu.get_data_unit_byte_offset() as usize;
    let data_end = n
        .checked_mul(n)
        .and_then(|pixels| pixels.checked_mul(4))
        .filter(|&len| len <= bytes.len())
        .map(|len| data_start + padded(len))
        .filter(|&end| end <= bytes.len());
    let Some(data_end) = data_end else {
        return Err(format!(
            "truncated: {} bytes, too few for {n} x {n} float32 pixels",
            bytes.len()
        ));
    };
    verify_checksums(&header, &bytes[..data_end], data_start)?;
    let mut provenance = read_provenance(&header)?;

    let pixels: Vec<f32> = match fits.get_data(&hdu).pixels() {
        Pixels::F32(it) => it.collect(),
        _ => return Err("data are not float32".into()),
    };
    if pixels.len() != n * n {
        return Err(format!("{} pixels read, {} expected", pixels.len(), n * n));
    }
    // A magnification is finite and not negative; a checksum proves only that the bytes are
    // the ones written, not that the writer was sound.
    if let Some(k) = pixels.iter().position(|v| !(v.is_finite() && *v >= 0.0)) {
        return Err(format!(
            "pixel ({}, {}) holds {}, not a magnification (finite and >= 0)",
            k % n + 1,
            k / n + 1,
            pixels[k]
        ));
    }
    let data = Array2::from_shape_vec((n, n), pixels).map_err(|e| e.to_string())?;
    let mut end = data_end;
    if header.0.get("ERRSEED").is_some() {
        let (certificate, table_end) = table::decode(&header, &mut fits, bytes, data_end, n)?;
        if !certificate.reproduces(&data) {
            return Err("ERRMED_*/ERR99_* disagree with the table ERRSAMPL and the image".into());
        }
        provenance.certificate = Some(certificate);
        end = table_end;
    }
    let refinement = tiles::refinement(&header)?;
    Ok(Decoded {
        map: MagnificationMap {
            window,
            data,
            provenance,
        },
        refinement,
        fits,
        end,
    })
}

/// The window from `WIN_*`, checked against the WCS keywords.
fn read_window(h: &Keywords, n: usize) -> std::result::Result<Window, String> {
    let center = (h.float("WIN_XC")?, h.float("WIN_YC")?);
    let width = h.float("WIN_SIDE")?;
    if width <= 0.0 {
        return Err(format!("WIN_SIDE must be > 0, got {width}"));
    }
    let window = Window::new(center, width, n).map_err(|e| e.to_string())?;
    let (x0, y0) = window.pixel_center(0, 0);
    let d = window.pixel_size();
    let expected = [
        ("CRPIX1", 1.0),
        ("CRPIX2", 1.0),
        ("CRVAL1", x0),
        ("CRVAL2", y0),
        ("CDELT1", d),
        ("CDELT2", d),
    ];
    let scale = width + center.0.abs() + center.1.abs();
    for (key, want) in expected {
        let got = h.float(key)?;
        if (got - want).abs() > 1e-12 * scale.max(1.0) {
            return Err(format!(
                "{key} = {got} disagrees with the window (expected {want})"
            ));
        }
    }
    Ok(window)
}

/// Provenance from the lens and build keywords.
fn read_provenance(h: &Keywords) -> std::result::Result<Provenance, String> {
    let n = h.count("LENS_N")?;
    if n == 0 || n > MAX_LENSES {
        return Err(format!("LENS_N = {n}: must be 1 ..= {MAX_LENSES}"));
    }
    let lenses = (1..=n)
        .map(|k| {
            Ok((
                h.float(&format!("LENS{k}X"))?,
                h.float(&format!("LENS{k}Y"))?,
                h.float(&format!("LENS{k}M"))?,
            ))
        })
        .collect::<std::result::Result<Vec<_>, String>>()?;
    let lens = match (h.optional_float("BIN_S")?, h.optional_float("BIN_Q")?) {
        (Some(s), Some(q)) => binary_lens(s, q, &lenses)?,
        (None, None) => LensSystem::new(&lenses).map_err(|e| format!("LENSn keywords: {e}"))?,
        _ => return Err("BIN_S and BIN_Q must come together".into()),
    };
    read_build(h, lens)
}

/// The provenance of `lens` from the cards of [`build_cards`] (no certificate).
fn read_build(h: &Keywords, lens: LensSystem) -> std::result::Result<Provenance, String> {
    Ok(Provenance {
        lens,
        engine: h.string("ENGINE")?,
        density: h.float("DENSITY")?,
        rays_shot: h.count("RAYSHOT")? as u64,
        rays_landed: h.count("RAYSLAND")? as u64,
        version: h.string("CW_VERS")?,
        build_time: h.string("DATE")?,
        build_seconds: h.float("BUILDSEC")?,
        certificate: None,
    })
}

/// The binary of (s, q), which must agree with the lens keywords.
fn binary_lens(
    s: f64,
    q: f64,
    lenses: &[(f64, f64, f64)],
) -> std::result::Result<LensSystem, String> {
    let lens = LensSystem::binary(s, q).map_err(|e| format!("BIN_S/BIN_Q: {e}"))?;
    if lenses.len() != 2 {
        return Err(format!("BIN_S/BIN_Q given but LENS_N = {}", lenses.len()));
    }
    for (k, (l, &(x, y, m))) in lens.lenses().iter().zip(lenses).enumerate() {
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * (1.0 + b.abs());
        if !(close(x, l.position.re) && close(y, l.position.im) && close(m, l.mass)) {
            return Err(format!(
                "LENS{}X/Y/M disagree with BIN_S = {s}, BIN_Q = {q}",
                k + 1
            ));
        }
    }
    Ok(lens)
}

/// Verifies `DATASUM` and `CHECKSUM` when present; `hdu` is the whole HDU, data from `data_start`.
fn verify_checksums(
    h: &Keywords,
    hdu: &[u8],
    data_start: usize,
) -> std::result::Result<(), String> {
    if h.0.get("DATASUM").is_some() {
        let stated = h.string("DATASUM")?;
        let actual = checksum::ones_sum(&hdu[data_start..]);
        if stated.trim().parse::<u32>() != Ok(actual) {
            return Err(format!(
                "DATASUM = '{stated}' but the data sum to {actual}: the data are corrupted"
            ));
        }
    }
    if h.0.get("CHECKSUM").is_some() && checksum::ones_sum(hdu) != checksum::NEGATIVE_ZERO {
        return Err("CHECKSUM does not verify: the file is corrupted".into());
    }
    Ok(())
}

/// Typed access to header values, with errors naming the keyword.
struct Keywords<'a>(&'a fitsrs::hdu::header::ValueMap);

impl Keywords<'_> {
    fn value(&self, key: &str) -> std::result::Result<&Value, String> {
        self.0
            .get(key)
            .ok_or_else(|| format!("missing keyword {key}"))
    }

    fn float(&self, key: &str) -> std::result::Result<f64, String> {
        self.optional_float(key)?
            .ok_or_else(|| format!("missing keyword {key}"))
    }

    fn optional_float(&self, key: &str) -> std::result::Result<Option<f64>, String> {
        let v = match self.0.get(key) {
            None => return Ok(None),
            Some(Value::Float { value, .. }) => *value,
            Some(Value::Integer { value, .. }) => *value as f64,
            Some(other) => return Err(format!("keyword {key}: expected a number, got {other:?}")),
        };
        if v.is_finite() {
            Ok(Some(v))
        } else {
            Err(format!("keyword {key}: expected a finite number, got {v}"))
        }
    }

    fn integer(&self, key: &str) -> std::result::Result<i64, String> {
        match self.value(key)? {
            Value::Integer { value, .. } => Ok(*value),
            other => Err(format!("keyword {key}: expected an integer, got {other:?}")),
        }
    }

    /// A non-negative integer.
    fn count(&self, key: &str) -> std::result::Result<usize, String> {
        let v = self.integer(key)?;
        usize::try_from(v).map_err(|_| format!("keyword {key}: expected a count >= 0, got {v}"))
    }

    fn string(&self, key: &str) -> std::result::Result<String, String> {
        match self.value(key)? {
            // Trailing blanks are not significant in FITS strings (FITS 4.0 sec. 4.2.1.1).
            Value::String { value, .. } => Ok(value.trim_end().to_string()),
            other => Err(format!("keyword {key}: expected a string, got {other:?}")),
        }
    }
}
