//! `causeway map`: build one magnification map and write its FITS file (and PNG).

use super::progress::{EngineStage, Reporter};
use super::{parse_pair, LensArgs, ThreadArgs};
use crate::caustics::caustic_curves;
use crate::engine::accuracy::{engine_for, DEFAULT_ACCURACY};
use crate::engine::{self, Engine};
use crate::error::{shown, Error, Result};
use crate::fsutil::{check_outputs, Output};
use crate::lens::LensSystem;
use crate::map::certificate::{Certificate, ErrorSummary};
use crate::map::fits::{write_fits, write_refined};
use crate::map::render::{render_png, Overlay};
use crate::map::tiles::{RefinedMap, Refinement};
use crate::map::{MagnificationMap, Window};
use crate::progress::Progress;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `causeway map`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Examples:\n  \
        causeway map --s 1.25 --q 2e-3 --center 0.447,0 --width 0.05 --pixels 500 --out zoom.fits --png zoom.png\n  \
        causeway map --s 0.9 --q 1e-4 --center 0,0 --width 0.01 --pixels 1000 --accuracy 1e-4 --out central.fits\n  \
        causeway map --s 1.25 --q 2e-3 --center 0.447,0 --width 0.05 --pixels 250 --refine 4 --out refined.fits\n  \
        causeway map --lenses triple.csv --center 0,0 --width 3 --pixels 1000 --engine rays --rays 400 --out triple.fits"
)]
pub struct MapArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    /// Window centre X,Y in Einstein radii (for example -0.3,0.1).
    #[arg(long, value_parser = parse_pair, allow_hyphen_values = true, value_name = "X,Y")]
    pub center: (f64, f64),
    /// Window side length in Einstein radii.
    #[arg(long, value_name = "W", allow_hyphen_values = true)]
    pub width: f64,
    /// Pixels per side.
    #[arg(long, value_name = "N")]
    pub pixels: usize,
    /// Output FITS file.
    #[arg(long, value_name = "FILE.fits")]
    pub out: PathBuf,
    /// Also draw a PNG picture.
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<PathBuf>,
    /// Rays per unlensed pixel area (image-plane cells per pixel area with --engine polygon);
    /// without it the density comes from --accuracy.
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub rays: Option<f64>,
    /// Map engine: rays (inverse ray shooting) or polygon (inverse polygon mapping); default
    /// polygon, or rays when --rays is given.
    #[arg(long, value_name = "ENGINE")]
    pub engine: Option<String>,
    /// Median relative pixel error to aim for when --rays is not given: sets the engine's
    /// density by the rule fitted to the engine study (src/engine/accuracy.rs). The map's
    /// header then certifies the error actually measured. [default: 1e-3]
    #[arg(
        long,
        value_name = "ERR",
        conflicts_with = "rays",
        allow_hyphen_values = true
    )]
    pub accuracy: Option<f64>,
    /// Also hold tiles FACTOR times finer (2 to 64) where the caustics run: blocks of 48 x 48
    /// pixels that a caustic passes within 4 pixels of, each tile reaching 4 pixels beyond
    /// its block, built by the same engine at the same density per (fine) pixel (from --rays
    /// or --accuracy for the base pixels: cells no larger than a fine pixel keep the reads'
    /// error estimates sound) and written
    /// as image extensions of the same file. Sources of a few pixels then read accurately near
    /// the caustics without a finer map everywhere (--refine 4 with 250 pixels reads there as
    /// a 1000-pixel map would).
    #[arg(long, value_name = "FACTOR")]
    pub refine: Option<usize>,
    /// Largest working memory allowed, e.g. 4G, 512M or a byte count (default: half the RAM).
    #[arg(long, value_name = "SIZE", value_parser = parse_size)]
    pub max_memory: Option<u64>,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Parses a memory size such as `4G`, `512M`, `64k` or `1000000`.
pub fn parse_size(s: &str) -> std::result::Result<u64, String> {
    let t = s.trim();
    let (num, mult) = match t.char_indices().last() {
        Some((i, c)) if c.is_ascii_alphabetic() => {
            let mult = match c.to_ascii_uppercase() {
                'K' => 1u64 << 10,
                'M' => 1 << 20,
                'G' => 1 << 30,
                'T' => 1 << 40,
                _ => {
                    return Err(format!(
                        "unknown size suffix in '{}' (use K, M, G or T)",
                        shown(s)
                    ))
                }
            };
            (&t[..i], mult)
        }
        _ => (t, 1),
    };
    let v: f64 = num
        .parse()
        .map_err(|_| format!("'{}' is not a size (e.g. 4G, 512M)", shown(s)))?;
    if !v.is_finite() || v <= 0.0 {
        return Err(format!("'{}' must be a positive size", shown(s)));
    }
    Ok((v * mult as f64) as u64)
}

pub use crate::engine::default_memory_limit;

/// Runs `causeway map`.
pub fn run(args: MapArgs) -> Result<()> {
    let mut outputs = vec![Output {
        what: "--out",
        path: &args.out,
        extension: Some("fits"),
    }];
    outputs.extend(args.png.as_deref().map(|p| Output::png("--png", p)));
    check_outputs(&outputs)?;
    args.threads.install()?;
    let lens = args.lens.lens_system()?;
    let window = Window::new(args.center, args.width, args.pixels)?;
    let refinement = args.refine.map(Refinement::new).transpose()?;
    let target = args.accuracy.unwrap_or(DEFAULT_ACCURACY);
    let (engine, reach) = engine_for(
        args.engine.as_deref(),
        args.rays,
        &lens,
        &window,
        target,
        args.accuracy.is_some(),
    )?;
    let limit = args.max_memory.unwrap_or_else(default_memory_limit);
    if let Some(r) = refinement {
        let tile = r.tile_window(&window, (0, 0))?;
        engine::check_memory(engine.as_ref(), &lens, &tile, limit).map_err(|need| {
            Error::input(format!(
                "--refine {}: each tile needs about {}, more than the allowed {} \
                 (--max-memory); use a smaller factor",
                r.factor,
                engine::gib(need),
                engine::gib(limit)
            ))
        })?;
    }
    let base = build_reported(engine.as_ref(), &lens, &window, limit)?;
    let map = match refinement {
        Some(r) => refine_reported(base, engine.as_ref(), r)?,
        None => RefinedMap::plain(base),
    };
    // Said after the build, so that a refused build says one line.
    if args.rays.is_none() {
        eprintln!(
            "--accuracy {target:e}: engine {}, density {:.4}",
            engine.name(),
            engine.density()
        );
    }
    if let Some(reach) = reach {
        eprintln!(
            "warning: --accuracy {target:e} is out of reach at this pixel size; the finest \
             density aims at about {reach:.1e} (use more --pixels for less)"
        );
    }
    write_refined(&map, &args.out)?;
    eprintln!("wrote {}", args.out.display());
    write_png(&map.base, args.png.as_deref())
}

/// Builds the tiles of `base` with progress, and says how many and what they cover.
fn refine_reported(
    base: MagnificationMap,
    engine: &dyn Engine,
    refinement: Refinement,
) -> Result<RefinedMap> {
    let reporter = Reporter::new().without_start_lines();
    let map = RefinedMap::refine(
        base,
        engine,
        refinement,
        &EngineStage::new(&reporter, "tiles"),
    )?;
    reporter.finish(&tiles_line(&map));
    Ok(map)
}

/// The tiles in one line: how many, their size, the share of the window their blocks cover,
/// their build time and the pixels held against a uniform map at the fine resolution.
pub fn tiles_line(map: &RefinedMap) -> String {
    let Some(r) = map.refinement else {
        return "no refined tiles".into();
    };
    let seconds: f64 = map
        .tiles
        .iter()
        .map(|t| t.map.provenance.build_seconds)
        .sum();
    let side = (r.block + 2 * r.halo) * r.factor;
    let fine = (map.base.window.pixels * r.factor).pow(2) as f64;
    let held = map.pixel_bytes() as f64 / 4.0;
    format!(
        "tiles: {} of {side} x {side} pixels at {} times the resolution{}, over {:.1}% of the \
         window, {seconds:.2} s; {:.1}% of the pixels of a uniform {}-pixel map",
        map.tiles.len(),
        r.factor,
        map.tiles.first().map_or(String::new(), |t| format!(
            " (density {:.4})",
            t.map.provenance.density
        )),
        100.0 * map.covered_fraction(),
        100.0 * held / fine,
        map.base.window.pixels * r.factor
    )
}

/// What a build did, in one line: rays (or image-plane cells) traced through the lens equation,
/// those counted in the window, the time and the rate of tracing; with a lens symmetric about
/// the x axis, only the upper half plane is traced and each ray counted at its mirror image too.
pub fn closing_line(map: &MagnificationMap) -> String {
    let p = &map.provenance;
    let what = if p.engine == "polygon" {
        "image-plane cells"
    } else {
        "rays"
    };
    let mirror = if p.lens.symmetric_about_x_axis() {
        " (upper half plane only: the lens is symmetric about the x axis, so each is counted at \
         its mirror image too)"
    } else {
        ""
    };
    format!(
        "{what} traced {}{mirror}, counted in the window {}, {:.2} s, {:.3e} {what} traced/s",
        p.rays_shot,
        p.rays_landed,
        p.build_seconds,
        p.rays_shot as f64 / p.build_seconds.max(1e-9)
    )
}

/// Builds a map with progress (a bar, or lines in a batch log) and a closing line on stderr.
pub fn build_reported(
    engine: &dyn Engine,
    lens: &LensSystem,
    window: &Window,
    memory_limit: u64,
) -> Result<MagnificationMap> {
    engine::check_memory(engine, lens, window, memory_limit).map_err(|need| {
        let instead = match engine::fitting_pixels(engine, lens, window, memory_limit) {
            Some(p) => format!("--pixels {p} would fit, or raise --max-memory"),
            None => "raise --max-memory".into(),
        };
        Error::input(format!(
            "--pixels {}: the build needs about {}, more than the allowed {} (--max-memory); \
             {instead}",
            window.pixels,
            engine::gib(need),
            engine::gib(memory_limit)
        ))
    })?;
    let reporter = Reporter::new().without_start_lines();
    let map = engine.build_with_progress(lens, window, &EngineStage::new(&reporter, "tracing"))?;
    reporter.finish(&closing_line(&map));
    if let Some(c) = &map.provenance.certificate {
        eprintln!("{}", certificate_line(c));
    }
    Ok(map)
}

/// The certificate in one line: the errors of both classes, the skipped pixels, its time.
pub fn certificate_line(c: &Certificate) -> String {
    let class = |s: &Option<ErrorSummary>, place: &str| match s {
        Some(s) => format!(
            "median {:.2e}, 99th percentile {:.2e} over {} pixels {place} caustics",
            s.median, s.p99, s.count
        ),
        None => format!("no pixel {place} caustics"),
    };
    format!(
        "certificate: relative pixel error {}; {}; {} crossed by a caustic left out ({:.2} s)",
        class(&c.away, "away from"),
        class(&c.near, "near"),
        c.skipped,
        c.seconds
    )
}

/// Writes the FITS file and the optional PNG.
pub fn write_outputs(map: &MagnificationMap, out: &Path, png: Option<&Path>) -> Result<()> {
    write_fits(map, out)?;
    eprintln!("wrote {}", out.display());
    write_png(map, png)
}

/// Draws the optional PNG of `map`, with its caustics.
fn write_png(map: &MagnificationMap, png: Option<&Path>) -> Result<()> {
    if let Some(png) = png {
        let lens = &map.provenance.lens;
        let mut overlay = Overlay::from_lens(lens);
        match caustic_curves(lens) {
            Ok(curves) => overlay.curves = curves,
            Err(e) => eprintln!("warning: caustics not drawn: {e}"),
        }
        render_png(map, &overlay, png)?;
        eprintln!("wrote {}", png.display());
    }
    Ok(())
}
