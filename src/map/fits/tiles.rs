//! The tiles of a refined map ([`crate::map::tiles`]) in its FITS file.
//!
//! The primary header announces them:
//!
//! | keyword | type | meaning |
//! | --- | --- | --- |
//! | `REFINE` | integer | fine pixels per base pixel along each side |
//! | `TILEBLK`, `TILEHALO` | integer | base pixels per side of a block; of halo around it |
//! | `TILES` | integer | number of tile extensions that follow |
//!
//! Each tile is an image extension (FITS Standard 4.0 sec. 7.1), after the certificate's table
//! when there is one, `EXTNAME = 'TILE'` and `EXTVER` 1, 2, ... in (`TILE_BY`, `TILE_BX`)
//! order, float32 like the primary, with the primary's WCS and `WIN_*` cards for its own
//! window, `TILE_BX`/`TILE_BY` (the block, from 0 along x and y), the build cards (`ENGINE` to
//! `BUILDSEC`) and its own `DATASUM`/`CHECKSUM`.

use super::{
    build_cards, check_shape, hdu_bytes, image_bytes, padded, read_build, read_window,
    verify_checksums, window_cards, Decoded, Header, Keywords,
};
use crate::error::Result;
use crate::map::tiles::{RefinedMap, Refinement, Tile, MAX_FACTOR};
use crate::map::MagnificationMap;
use fitsrs::{Pixels, HDU};
use ndarray::Array2;

/// The extension name of every tile.
const EXTNAME: &str = "TILE";

/// The refinement's cards in the primary header.
pub(super) fn refinement_cards(h: &mut Header, r: &Refinement, tiles: usize) {
    h.comment("Refined tiles near the caustics follow as image extensions TILE.");
    h.integer(
        "REFINE",
        r.factor as i64,
        "fine pixels per base pixel, each side",
    );
    h.integer("TILEBLK", r.block as i64, "base pixels per side of a block");
    h.integer(
        "TILEHALO",
        r.halo as i64,
        "base pixels of halo around a block",
    );
    h.integer("TILES", tiles as i64, "tile extensions");
}

/// The refinement and tile count of a primary header, if it has `REFINE`.
pub(super) fn refinement(h: &Keywords) -> std::result::Result<Option<(Refinement, usize)>, String> {
    if h.0.get("REFINE").is_none() {
        return Ok(None);
    }
    let factor = h.count("REFINE")?;
    let (block, halo) = (h.count("TILEBLK")?, h.count("TILEHALO")?);
    if !(2..=MAX_FACTOR).contains(&factor) || block == 0 {
        return Err(format!(
            "REFINE = {factor}, TILEBLK = {block}: need 2 ..= {MAX_FACTOR} and a block >= 1"
        ));
    }
    let r = Refinement {
        factor,
        block,
        halo,
    };
    Ok(Some((r, h.count("TILES")?)))
}

/// The tile extensions, each a whole HDU.
pub(super) fn encode(base: &MagnificationMap, r: &Refinement, tiles: &[Tile]) -> Result<Vec<u8>> {
    let mut bytes = Vec::new();
    for (k, t) in tiles.iter().enumerate() {
        check_shape(&t.map)?;
        let n = t.map.window.pixels as i64;
        let mut h = Header::default();
        h.string("XTENSION", "IMAGE", "image extension")?;
        h.integer("BITPIX", -32, "IEEE 754 float32, big-endian");
        h.integer("NAXIS", 2, "two-dimensional image");
        h.integer("NAXIS1", n, "pixels along x");
        h.integer("NAXIS2", n, "pixels along y");
        h.integer("PCOUNT", 0, "no heap");
        h.integer("GCOUNT", 1, "one group");
        h.string("EXTNAME", EXTNAME, "a refined tile")?;
        h.integer("EXTVER", k as i64 + 1, "tile number");
        h.comment("Mean magnification per pixel of a tile refined near the caustics.");
        window_cards(&mut h, &t.map.window)?;
        debug_assert_eq!(
            r.tile_window(&base.window, t.block).ok(),
            Some(t.map.window)
        );
        h.integer("TILE_BX", t.block.0 as i64, "block along x, from 0");
        h.integer("TILE_BY", t.block.1 as i64, "block along y, from 0");
        build_cards(&mut h, &t.map.provenance)?;
        bytes.extend(hdu_bytes(h, &image_bytes(&t.map))?);
    }
    Ok(bytes)
}

/// The map and its tiles from a decoded primary HDU and the file's `bytes`.
pub(super) fn decode(mut d: Decoded, bytes: &[u8]) -> std::result::Result<RefinedMap, String> {
    let Some((r, count)) = d.refinement else {
        return Ok(RefinedMap::plain(d.map));
    };
    let blocks = r.blocks(d.map.window.pixels);
    let mut tiles: Vec<Tile> = Vec::with_capacity(count.min(blocks * blocks));
    let mut start = d.end;
    for k in 1..=count {
        let what = format!("tile {k} of {count}");
        let hdu = match d.fits.next() {
            Some(Ok(HDU::XImage(hdu))) => hdu,
            Some(Err(e)) => return Err(format!("{what}: not readable: {e}")),
            _ => return Err(format!("TILES = {count} but {what} is missing")),
        };
        let h = Keywords(hdu.get_header());
        let (name, version) = (h.string("EXTNAME")?, h.integer("EXTVER")?);
        if name != EXTNAME || version != k as i64 {
            return Err(format!(
                "{what}: EXTNAME = '{name}', EXTVER = {version}: expected '{EXTNAME}', {k}"
            ));
        }
        if h.integer("BITPIX")? != -32 || h.integer("NAXIS")? != 2 {
            return Err(format!("{what}: not a 2-D float32 image"));
        }
        let n = h.count("WIN_PIX")?;
        if h.count("NAXIS1")? != n || h.count("NAXIS2")? != n || n == 0 {
            return Err(format!("{what}: NAXIS1/NAXIS2 disagree with WIN_PIX = {n}"));
        }
        let window = read_window(&h, n).map_err(|e| format!("{what}: {e}"))?;
        let block = (h.count("TILE_BX")?, h.count("TILE_BY")?);
        let after = tiles
            .last()
            .is_none_or(|t| (t.block.1, t.block.0) < (block.1, block.0));
        if block.0 >= blocks || block.1 >= blocks || !after {
            return Err(format!(
                "{what}: block {block:?} is not a new block of the {blocks} x {blocks} in order"
            ));
        }
        if r.tile_window(&d.map.window, block).ok() != Some(window) {
            return Err(format!(
                "{what}: its window disagrees with block {block:?} of the base and REFINE"
            ));
        }
        let data_start = hdu.get_data_unit_byte_offset() as usize;
        let end = data_start + padded(4 * n * n);
        if end > bytes.len() {
            return Err(format!("{what}: truncated"));
        }
        verify_checksums(&h, &bytes[start..end], data_start - start)
            .map_err(|e| format!("{what}: {e}"))?;
        let provenance = read_build(&h, d.map.provenance.lens.clone())?;
        let pixels: Vec<f32> = match d.fits.get_data(&hdu).pixels() {
            Pixels::F32(it) => it.collect(),
            _ => return Err(format!("{what}: data are not float32")),
        };
        if pixels.len() != n * n || pixels.iter().any(|v| !(v.is_finite() && *v >= 0.0)) {
            return Err(format!(
                "{what}: pixels are not {n} x {n} magnifications (finite and >= 0)"
            ));
        }
        let data = Array2::from_shape_vec((n, n), pixels).map_err(|e| e.to_string())?;
        tiles.push(Tile {
            block,
            map: MagnificationMap {
                window,
                data,
                provenance,
            },
        });
        start = end;
    }
    Ok(RefinedMap {
        base: d.map,
        refinement: Some(r),
        tiles,
    })
}
