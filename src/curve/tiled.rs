//! Reads of a refined map ([`crate::map::tiles`]): a source centred in a refined block is read
//! from the block's tile when the disk, with a margin of [`TILE_MARGIN`] fine pixels, lies
//! inside the tile; the error estimate is then the tile's own (its binned copies and pixels).

use super::estimate::{Coarse, CoarseReaders};
use super::sample::{point_read, DirectReader};
use crate::error::Result;
use crate::map::tiles::RefinedMap;
use crate::source::SourceProfile;

/// Fine pixels kept between a source's rim and its tile's edge: the binned copies that the
/// estimate reads lose up to one binned pixel at the edges.
pub const TILE_MARGIN: f64 = 2.0;

/// The binned copies of every tile, made once per curve.
pub(super) fn coarse_tiles(map: &RefinedMap) -> Vec<Option<Coarse>> {
    map.tiles.iter().map(|t| Coarse::new(&t.map)).collect()
}

/// The readers of every tile of a map for one profile.
pub(super) struct TileReaders<'a> {
    map: &'a RefinedMap,
    profile: SourceProfile,
    readers: Vec<(DirectReader<'a>, Option<CoarseReaders<'a>>)>,
}

impl<'a> TileReaders<'a> {
    /// Readers of the tiles of `map` (`coarse` from [`coarse_tiles`]) for `profile`.
    pub(super) fn new(
        map: &'a RefinedMap,
        coarse: &'a [Option<Coarse>],
        profile: &SourceProfile,
    ) -> Result<Self> {
        let readers = map
            .tiles
            .iter()
            .zip(coarse)
            .map(|(t, c)| {
                let estimate = c.as_ref().map(|c| CoarseReaders::new(&t.map, c, profile));
                (DirectReader::new(&t.map, profile), estimate)
            })
            .collect();
        Ok(TileReaders {
            map,
            profile: *profile,
            readers,
        })
    }

    /// The value at `(x, y)` read from a tile and its error estimate (direct reads, bilinear
    /// for a point source), if the source and its margin lie inside the tile of its block.
    pub(super) fn read(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let k = self.map.tile_index_at(x, y)?;
        let tile = &self.map.tiles[k].map;
        let w = &tile.window;
        let (x0, y0) = w.origin();
        let reach = self.profile.rho + TILE_MARGIN * w.pixel_size();
        let inside = |v: f64, lo: f64| v - reach >= lo && v + reach <= lo + w.width;
        if !(inside(x, x0) && inside(y, y0)) {
            return None;
        }
        let (direct, coarse) = &self.readers[k];
        let (a, e) = if self.profile.rho == 0.0 {
            let a = point_read(tile, x, y)?;
            (a, coarse.as_ref()?.point(a, x, y))
        } else {
            let a = direct.read(x, y)?;
            (a, coarse.as_ref()?.direct(a, x, y))
        };
        e.is_finite().then_some((a, e))
    }
}
