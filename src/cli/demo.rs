//! `causeway demo`: the built-in demo on an invented planetary event.
//!
//! A giant planet (q = 2e-3) just outside the Einstein ring of its host (s = 1.25): a map
//! spanning the central and the planetary caustic, its picture with the caustics drawn, and the
//! light curve of a limb-darkened source crossing the planetary caustic.

use super::curve::format_csv;
use super::map::{build_reported, default_memory_limit, write_outputs};
use crate::curve::{plot_png, time_range, Sampler, StraightLine};
use crate::engine::RayShooting;
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::{MagnificationMap, Window};
use crate::source::{LimbDarkening, SourceProfile};
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `causeway demo`.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  causeway demo --out demo-output")]
pub struct DemoArgs {
    /// Directory for the demo's files (created if missing).
    #[arg(long, default_value = "demo-output")]
    pub out: PathBuf,
    /// Pixels per side of the demo map.
    #[arg(long, default_value_t = 1000)]
    pub pixels: usize,
}

/// Runs the demo.
pub fn run(args: DemoArgs) -> Result<()> {
    let out = &args.out;
    std::fs::create_dir_all(out).map_err(|e| Error::io(out, e))?;
    let lens = LensSystem::binary(1.25, 2e-3)?;
    let window = Window::new((0.23, 0.0), 0.64, args.pixels)?;
    eprintln!("demo: binary s = 1.25, q = 2e-3; window 0.64 wide centred on (0.23, 0)");
    let engine = RayShooting::try_new(200.0)?;
    let map = build_reported(&engine, &lens, &window, default_memory_limit())?;
    write_outputs(
        &map,
        &out.join("demo-map.fits"),
        Some(&out.join("demo-map.png")),
    )?;
    light_curve(&map, out)
}

/// The demo's light curve: a limb-darkened source (rho = 0.003, u = 0.5) crossing the
/// planetary caustic of the demo map at 60 degrees (t0 = 0, u0 = -0.388, tE = 30 days), eight
/// days around the crossing; writes `demo-curve.csv` and `demo-curve.png` into `out`.
fn light_curve(map: &MagnificationMap, out: &Path) -> Result<()> {
    let line = StraightLine::new(0.0, -0.388, 30.0, 60f64.to_radians())?;
    let times = time_range(2.72, 10.72, 801)?;
    let path = line.path(&times);
    let profile = SourceProfile::new(0.003, LimbDarkening::Linear { u: 0.5 })?;
    let lens = map.provenance.lens.clone();
    let curve = Sampler::new(profile)
        .map(map)
        .lens(&lens)
        .sample(&path.points)?;
    let csv = format_csv(Some(&times), &curve.samples, None)?;
    let file = out.join("demo-curve.csv");
    crate::fsutil::write_atomic(&file, csv.as_bytes())?;
    eprintln!("wrote {}", file.display());
    let png = out.join("demo-curve.png");
    plot_png(&curve.samples, &times, "t (days)", &png)?;
    eprintln!("wrote {}", png.display());
    Ok(())
}
