//! The accuracy certificate in a map file: summary cards in the primary header and the sample
//! as a binary-table extension (FITS Standard 4.0 sec. 7.3) named `ERRSAMPL`.
//!
//! | keyword | type | meaning |
//! | --- | --- | --- |
//! | `ERRSEED` | integer | seed of the sampled pixels; its presence marks a certified map |
//! | `ERRN_A`, `ERRN_C` | integer | pixels with a reference away from / near caustics |
//! | `ERRMED_A`, `ERRMED_C` | float | their median relative pixel error (absent for none) |
//! | `ERR99_A`, `ERR99_C` | float | their 99th percentile (numpy's linear rule) |
//! | `ERRSKIP` | integer | sampled pixels left out: a caustic crosses them |
//! | `ERRSEC` | float | time taken by the certificate, seconds |
//!
//! The table has one row per sampled pixel with a reference, in sample order: `IX`, `IY`
//! (`J`: 0-based column and row), `NEAR` (`B`: 1 when the reference needed the sub-pixel
//! quadrature) and `REF` (`D`: the reference pixel mean). See [`crate::map::certificate`].

use super::{padded, verify_checksums, Header, Keywords};
use crate::error::Result;
use crate::map::certificate::{Certificate, CertifiedPixel, ErrorSummary};
use fitsrs::{Fits, HDU};
use std::io::Cursor;

/// Name of the table extension.
const EXTNAME: &str = "ERRSAMPL";
/// Bytes per row: two int32, one byte, one float64.
const ROW: usize = 17;
/// Columns: name, format, comment.
const COLUMNS: [(&str, &str, &str); 4] = [
    ("IX", "J", "pixel column, from 0"),
    ("IY", "J", "pixel row, from 0"),
    ("NEAR", "B", "1: near a caustic"),
    ("REF", "D", "reference pixel mean"),
];

/// The certificate's cards in the primary header.
pub(super) fn certificate_cards(h: &mut Header, c: &Certificate) -> Result<()> {
    h.comment("Accuracy certificate: relative pixel errors against exact pixel means of the");
    h.comment("point-source magnification on a seeded sample of pixels (table ERRSAMPL).");
    h.integer("ERRSEED", c.seed as i64, "seed of the sampled pixels");
    for (tag, summary, place) in [("A", &c.away, "away from"), ("C", &c.near, "near")] {
        let count = summary.map_or(0, |s| s.count);
        h.integer(
            &format!("ERRN_{tag}"),
            count as i64,
            &format!("pixels {place} caustics"),
        );
        if let Some(s) = summary {
            h.float(&format!("ERRMED_{tag}"), s.median, "median relative error")?;
            h.float(&format!("ERR99_{tag}"), s.p99, "99th percentile")?;
        }
    }
    h.integer(
        "ERRSKIP",
        c.skipped as i64,
        "sampled pixels a caustic crosses",
    );
    h.float("ERRSEC", c.seconds, "certificate time, seconds")?;
    Ok(())
}

/// The table extension's header (without checksums and END) and its rows.
pub(super) fn encode(c: &Certificate) -> Result<(Header, Vec<u8>)> {
    let mut h = Header::default();
    h.string("XTENSION", "BINTABLE", "binary table extension")?;
    h.integer("BITPIX", 8, "bytes");
    h.integer("NAXIS", 2, "a table of rows");
    h.integer("NAXIS1", ROW as i64, "bytes per row");
    h.integer("NAXIS2", c.pixels.len() as i64, "rows: sampled pixels");
    h.integer("PCOUNT", 0, "no heap");
    h.integer("GCOUNT", 1, "one group");
    h.integer("TFIELDS", COLUMNS.len() as i64, "columns");
    for (k, (name, form, comment)) in COLUMNS.iter().enumerate() {
        h.string(&format!("TTYPE{}", k + 1), name, comment)?;
        h.string(&format!("TFORM{}", k + 1), form, "")?;
    }
    h.string("EXTNAME", EXTNAME, "the certificate's sample")?;
    let mut rows = Vec::with_capacity(ROW * c.pixels.len());
    for p in &c.pixels {
        rows.extend_from_slice(&(p.ix as i32).to_be_bytes());
        rows.extend_from_slice(&(p.iy as i32).to_be_bytes());
        rows.push(u8::from(p.near));
        rows.extend_from_slice(&p.reference.to_be_bytes());
    }
    Ok((h, rows))
}

/// The certificate of a file whose primary header `primary` holds `ERRSEED`, reading the table
/// from `fits` (positioned after the primary HDU, which ends at byte `start` of `bytes`), and
/// the byte offset where the table ends; `n` is the map's pixels per side.
pub(super) fn decode(
    primary: &Keywords,
    fits: &mut Fits<Cursor<&[u8]>>,
    bytes: &[u8],
    start: usize,
    n: usize,
) -> std::result::Result<(Certificate, usize), String> {
    let hdu = match fits.next() {
        Some(Ok(HDU::XBinaryTable(hdu))) => hdu,
        Some(Err(e)) => return Err(format!("table {EXTNAME}: not readable: {e}")),
        _ => return Err(format!("ERRSEED is set but the table {EXTNAME} is missing")),
    };
    let k = Keywords(hdu.get_header());
    let name = k.string("EXTNAME")?;
    if name != EXTNAME {
        return Err(format!("EXTNAME = '{name}': expected '{EXTNAME}'"));
    }
    for (i, (col, form, _)) in COLUMNS.iter().enumerate() {
        let (t, f) = (
            k.string(&format!("TTYPE{}", i + 1))?,
            k.string(&format!("TFORM{}", i + 1))?,
        );
        if t != *col || f != *form {
            return Err(format!(
                "table {EXTNAME}: column {} is {t} ({f}), expected {col} ({form})",
                i + 1
            ));
        }
    }
    if k.count("NAXIS1")? != ROW {
        return Err(format!("table {EXTNAME}: NAXIS1 must be {ROW}"));
    }
    let rows = k.count("NAXIS2")?;
    let data_start = hdu.get_data_unit_byte_offset() as usize;
    let end = rows
        .checked_mul(ROW)
        .map(|len| data_start + padded(len))
        .filter(|&end| end <= bytes.len())
        .ok_or_else(|| format!("table {EXTNAME}: truncated"))?;
    verify_checksums(&k, &bytes[start..end], data_start - start)
        .map_err(|e| format!("table {EXTNAME}: {e}"))?;
    let int = |at: usize| i32::from_be_bytes(bytes[at..at + 4].try_into().expect("4 bytes"));
    let pixels = (0..rows)
        .map(|r| {
            let at = data_start + r * ROW;
            let (ix, iy, near) = (int(at), int(at + 4), bytes[at + 8]);
            let reference = f64::from_be_bytes(bytes[at + 9..at + 17].try_into().expect("8 bytes"));
            let index = |v: i32| usize::try_from(v).ok().filter(|&v| v < n);
            match (index(ix), index(iy), near) {
                (Some(ix), Some(iy), 0 | 1) if reference.is_finite() && reference > 0.0 => {
                    Ok(CertifiedPixel {
                        ix,
                        iy,
                        near: near == 1,
                        reference,
                    })
                }
                _ => Err(format!(
                    "table {EXTNAME}: row {} is not a pixel of the map",
                    r + 1
                )),
            }
        })
        .collect::<std::result::Result<Vec<_>, String>>()?;
    let summary = |tag: &str| -> std::result::Result<Option<ErrorSummary>, String> {
        match primary.count(&format!("ERRN_{tag}"))? {
            0 => Ok(None),
            count => Ok(Some(ErrorSummary {
                count,
                median: primary.float(&format!("ERRMED_{tag}"))?,
                p99: primary.float(&format!("ERR99_{tag}"))?,
            })),
        }
    };
    let (away, near) = (summary("A")?, summary("C")?);
    let near_rows = pixels.iter().filter(|p| p.near).count();
    if away.map_or(0, |s| s.count) + near_rows != rows || near.map_or(0, |s| s.count) != near_rows {
        return Err(format!(
            "ERRN_A and ERRN_C disagree with the {rows} rows of table {EXTNAME}"
        ));
    }
    let certificate = Certificate {
        seed: primary.count("ERRSEED")? as u64,
        away,
        near,
        skipped: primary.count("ERRSKIP")?,
        seconds: primary.float("ERRSEC")?,
        pixels,
    };
    Ok((certificate, end))
}
