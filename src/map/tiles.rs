//! Multi-resolution maps: a base map plus finer tiles where the caustics run.
//!
//! The base window is cut into square blocks of [`Refinement::block`] base pixels. A block is
//! refined when a traced caustic ([`crate::caustics`]) passes within [`Refinement::halo`] base
//! pixels of it; its tile then covers the block and a halo of that many base pixels on every
//! side (tiles of neighbouring blocks overlap there), at [`Refinement::factor`] times the base
//! resolution, built by the same engine at the same density per pixel. A tile's pixels
//! subdivide base pixels exactly: tile pixel `(i, j)` of block `(bx, by)` is pixel
//! `((bx B - H) f + i, (by B - H) f + j)` of a uniform map of the base window at the fine
//! resolution (B block, H halo, f factor).
//!
//! A source disk centred in a refined block that lies, with a margin, inside the block's tile
//! is read from the tile (`crate::curve`): any disk of radius up to about `H` base pixels whose
//! centre is within that of a caustic.
//!
//! ```
//! use causeway::engine::{by_name, Progress};
//! use causeway::lens::LensSystem;
//! use causeway::map::tiles::{RefinedMap, Refinement};
//! use causeway::map::Window;
//! let lens = LensSystem::binary(1.0, 0.1).unwrap();
//! let window = Window::new((0.0, 0.0), 1.0, 48).unwrap();
//! let engine = by_name("rays", 4.0).unwrap();
//! let map = RefinedMap::build(engine.as_ref(), &lens, &window, Some(Refinement::new(2).unwrap()),
//!                             &(), false).unwrap();
//! assert!(!map.tiles.is_empty());
//! let tile = &map.tiles[0];
//! assert_eq!(tile.map.window.pixels, 2 * (48 + 2 * 4));
//! assert!(map.covered_fraction() > 0.0 && map.covered_fraction() <= 1.0);
//! ```

use super::{MagnificationMap, Window};
use crate::caustics::caustic_curves;
use crate::engine::{Engine, Progress};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use std::collections::BTreeSet;

/// Base pixels per side of a block (the core of a tile). Each tile is a build of its own, and
/// a build traces the lattice over the whole pre-image of its window in leaves of 64 x 64
/// cells, wider than the pre-image of a small tile near a caustic: fewer, larger tiles cost
/// less. Measured (benches/tiles.rs and blocks of 16 to 64 tried on central and planetary
/// caustics, factor 4): 48 was the fastest in every case, within 20% of the fewest pixels.
pub const BLOCK: usize = 48;
/// Base pixels a tile reaches beyond its block on every side; also how near a caustic must pass
/// for a block to be refined.
pub const HALO: usize = 4;
/// The largest refinement factor.
pub const MAX_FACTOR: usize = 64;

/// How a map is refined: the factor and the tiling.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Refinement {
    /// Fine pixels per base pixel along each side.
    pub factor: usize,
    /// Base pixels per side of a block.
    pub block: usize,
    /// Base pixels of halo around each block.
    pub halo: usize,
}

impl Refinement {
    /// Refinement by `factor` (2 ..= [`MAX_FACTOR`]) with the default tiling ([`BLOCK`],
    /// [`HALO`]).
    ///
    /// ```
    /// use causeway::map::tiles::Refinement;
    /// assert_eq!(Refinement::new(4).unwrap().factor, 4);
    /// assert!(Refinement::new(1).is_err());
    /// ```
    pub fn new(factor: usize) -> Result<Self> {
        if !(2..=MAX_FACTOR).contains(&factor) {
            return Err(Error::input(format!(
                "refine: the factor must be 2 ..= {MAX_FACTOR}, got {factor}"
            )));
        }
        Ok(Refinement {
            factor,
            block: BLOCK,
            halo: HALO,
        })
    }

    /// Blocks per side of a base window of `pixels` per side.
    pub fn blocks(&self, pixels: usize) -> usize {
        pixels.div_ceil(self.block)
    }

    /// The window of the tile of block `(bx, by)` of `base`.
    pub fn tile_window(&self, base: &Window, (bx, by): (usize, usize)) -> Result<Window> {
        let d = base.pixel_size();
        let (x0, y0) = base.origin();
        let centre = |b: usize| (b * self.block) as f64 + 0.5 * self.block as f64;
        let side = self.block + 2 * self.halo;
        Window::new(
            (x0 + centre(bx) * d, y0 + centre(by) * d),
            side as f64 * d,
            side * self.factor,
        )
    }

    /// The blocks of `base` that a caustic of `lens` passes within the halo of, in (by, bx)
    /// order.
    pub fn refined_blocks(&self, lens: &LensSystem, base: &Window) -> Result<Vec<(usize, usize)>> {
        let d = base.pixel_size();
        let (x0, y0) = base.origin();
        let blocks = self.blocks(base.pixels);
        let reach = self.halo as f64;
        // Caustic points in base-pixel coordinates, segments sampled every half pixel.
        let mut marked = BTreeSet::new();
        let n = base.pixels as f64;
        let mut mark = |u: f64, v: f64| {
            let range = |w: f64| {
                let lo = ((w - reach) / self.block as f64).floor().max(0.0);
                let hi = ((w + reach) / self.block as f64)
                    .floor()
                    .min(blocks as f64 - 1.0);
                lo as usize..=hi as usize
            };
            if u + reach < 0.0 || v + reach < 0.0 {
                return;
            }
            for by in range(v) {
                for bx in range(u) {
                    marked.insert((by, bx));
                }
            }
        };
        for curve in caustic_curves(lens)? {
            for pair in curve.windows(2) {
                let (a, b) = (pair[0], pair[1]);
                let (ua, va) = ((a.0 - x0) / d, (a.1 - y0) / d);
                let (ub, vb) = ((b.0 - x0) / d, (b.1 - y0) / d);
                let outside = |lo: f64, hi: f64| hi < -reach || lo > n + reach;
                if outside(ua.min(ub), ua.max(ub)) || outside(va.min(vb), va.max(vb)) {
                    continue;
                }
                let steps = ((ub - ua).hypot(vb - va) / 0.5).ceil().max(1.0) as usize;
                for k in 0..=steps {
                    let t = k as f64 / steps as f64;
                    mark(ua + t * (ub - ua), va + t * (vb - va));
                }
            }
        }
        Ok(marked.into_iter().map(|(by, bx)| (bx, by)).collect())
    }
}

/// One refined tile: its block of the base map and the fine map over the block and its halo.
#[derive(Debug, Clone, PartialEq)]
pub struct Tile {
    /// Block indices `(bx, by)` along x and y.
    pub block: (usize, usize),
    /// The fine map.
    pub map: MagnificationMap,
}

/// A base map and, when refined, its tiles (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct RefinedMap {
    /// The base map over the whole window.
    pub base: MagnificationMap,
    /// The refinement, `None` for a plain map (then there are no tiles).
    pub refinement: Option<Refinement>,
    /// The tiles, in (by, bx) order.
    pub tiles: Vec<Tile>,
}

impl RefinedMap {
    /// A plain map: no refinement, no tiles.
    pub fn plain(base: MagnificationMap) -> Self {
        RefinedMap {
            base,
            refinement: None,
            tiles: Vec::new(),
        }
    }

    /// Builds the base map (with its certificate when `certify`) and, with `refinement`, its
    /// tiles ([`RefinedMap::refine`]), by `engine` at its density.
    pub fn build(
        engine: &dyn Engine,
        lens: &LensSystem,
        window: &Window,
        refinement: Option<Refinement>,
        progress: &dyn Progress,
        certify: bool,
    ) -> Result<RefinedMap> {
        let base = engine.build_certified(lens, window, progress, certify)?;
        match refinement {
            Some(r) => RefinedMap::refine(base, engine, r, &()),
            None => Ok(RefinedMap::plain(base)),
        }
    }

    /// `base` with a tile for each block a caustic passes near, built by `engine` (which
    /// should be the base's, at its density) without a certificate; `progress` hears of one
    /// unit a tile.
    pub fn refine(
        base: MagnificationMap,
        engine: &dyn Engine,
        refinement: Refinement,
        progress: &dyn Progress,
    ) -> Result<RefinedMap> {
        let (lens, window) = (&base.provenance.lens, &base.window);
        let blocks = refinement.refined_blocks(lens, window)?;
        progress.start(blocks.len() as u64);
        let mut tiles = Vec::with_capacity(blocks.len());
        for block in blocks {
            if progress.cancelled() {
                return Err(Error::Interrupted);
            }
            let w = refinement.tile_window(window, block)?;
            let map = engine.build_certified(lens, &w, &(), false)?;
            tiles.push(Tile { block, map });
            progress.advance(1);
        }
        Ok(RefinedMap {
            base,
            refinement: Some(refinement),
            tiles,
        })
    }

    /// Fraction of the base window's area that the tiles' blocks cover.
    pub fn covered_fraction(&self) -> f64 {
        let Some(r) = self.refinement else {
            return 0.0;
        };
        let n = self.base.window.pixels;
        let cover = |b: usize| (((b + 1) * r.block).min(n) - b * r.block) as f64;
        let area: f64 = self
            .tiles
            .iter()
            .map(|t| cover(t.block.0) * cover(t.block.1))
            .sum();
        area / (n * n) as f64
    }

    /// Bytes of pixel data held: the base and every tile (4 bytes a pixel).
    pub fn pixel_bytes(&self) -> usize {
        4 * (self.base.data.len() + self.tiles.iter().map(|t| t.map.data.len()).sum::<usize>())
    }

    /// The index in [`RefinedMap::tiles`] of the tile whose block holds `(x, y)`, if that
    /// block is refined.
    pub fn tile_index_at(&self, x: f64, y: f64) -> Option<usize> {
        let r = self.refinement?;
        let (ix, iy) = self.base.window.pixel_of(x, y)?;
        let (bx, by) = (ix / r.block, iy / r.block);
        self.tiles
            .binary_search_by(|t| (t.block.1, t.block.0).cmp(&(by, bx)))
            .ok()
    }
}
