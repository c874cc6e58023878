//! `causeway demo`: the built-in demo on an invented planetary event.
//!
//! Two parts. First the maps: a giant planet (q = 2e-3) just outside the Einstein ring of its
//! host (s = 1.25), a map spanning the central and the planetary caustic, its picture with the
//! caustics drawn, and the light curve of a limb-darkened source crossing the planetary caustic.
//! Then the whole fitting job on another invented event: its photometry is simulated (a planet
//! of q = 3e-3 at s = 1.3, a uniform source crossing its planetary caustic), a small library of maps
//! around it is built, searched and refined, and the recovered model is printed and drawn.

use super::curve::format_csv;
use super::map::{build_reported, default_memory_limit, write_outputs};
use super::progress::Reporter;
use super::search::Outputs;
use crate::curve::{plot_png, time_range, Sampler, StraightLine};
use crate::engine::RayShooting;
use crate::error::{Error, Result};
use crate::fit::event::{fit_event, FitOptions};
use crate::fit::minima::RefineOptions;
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::photometry::{DataSet, DEFAULT_ZERO_POINT};
use crate::fit::search::{maps_of_spec, GridRule, MapSource};
use crate::fit::simulate::Simulation;
use crate::lens::LensSystem;
use crate::map::{MagnificationMap, Window};
use crate::progress::Progress;
use crate::source::{LimbDarkening, SourceProfile};
use crate::store::library::{self, LibrarySpec};
use crate::store::Store;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `causeway demo`.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  causeway demo --out demo-output")]
pub struct DemoArgs {
    /// Directory for the demo's files (created if missing).
    #[arg(long, default_value = "demo-output", value_name = "DIR")]
    pub out: PathBuf,
    /// Pixels per side of the demo map.
    #[arg(long, default_value_t = 1000, value_name = "N")]
    pub pixels: usize,
    /// Only the maps part (skip the simulated event's search).
    #[arg(long)]
    pub maps_only: bool,
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
    light_curve(&map, out)?;
    if args.maps_only {
        return Ok(());
    }
    fitting_job(out)?;
    lens_nature(out)
}

/// The invented event of the fitting part: s = 1.3, q = 3e-3, rho = 0.003 (uniform), t0 = 0,
/// u0 = 0.15, tE = 25 d, alpha = 343.56 degrees; 600 points over 120 days with 0.01 mag errors,
/// a blend of 20% of the source flux.
pub fn demo_event() -> Result<Simulation> {
    let model = BinaryModel {
        s: 1.3,
        q: 3e-3,
        rho: 0.003,
        trajectory: Trajectory::straight(0.0, 0.15, 25.0, 343.56f64.to_radians())?,
    };
    Ok(Simulation {
        fb: 0.2,
        ..Simulation::new(model, LimbDarkening::Uniform)
    })
}

/// The library of the fitting part: 3 x 3 maps around the event's (s, q), windows on the
/// planetary caustic.
const DEMO_LIBRARY: &str =
    "# The demo's library: maps framing the planetary caustic of each binary.\n\
    s = { log = [1.2, 1.4, 3] }\n\
    q = { log = [1.5e-3, 6e-3, 3] }\n\
    pixels = 600\n\
    rays = 1\n\
    engine = \"polygon\"\n\
    [window]\n\
    rule = \"planetary\"\n";

/// Simulates the demo event, writes its library spec, builds the library and fits the event
/// with it, writing what `causeway search` writes.
fn fitting_job(out: &Path) -> Result<()> {
    eprintln!("demo: simulating an invented planetary event (s = 1.3, q = 3e-3)");
    let synthetic = demo_event()?.synthesize(&time_range(-60.0, 60.0, 600)?)?;
    let event_file = out.join("event.csv");
    let csv = synthetic.to_csv();
    crate::fsutil::write_atomic(&event_file, csv.as_bytes())?;
    eprintln!("wrote {}", event_file.display());
    let data = vec![DataSet::parse(
        &csv,
        &event_file.display().to_string(),
        DEFAULT_ZERO_POINT,
    )?];
    crate::fsutil::write_atomic(&out.join("library.toml"), DEMO_LIBRARY.as_bytes())?;
    eprintln!("demo: building and searching a 3 x 3 library of 600^2 maps for it");
    let store = Store::create(&out.join("maps"))?;
    let spec = LibrarySpec::parse(DEMO_LIBRARY, "library.toml")?;
    let reporter = Reporter::new();
    let points = spec.points()?;
    reporter.start("library", points.len() as u64);
    library::build(&store, &points, |_, _| reporter.advance(1))?;
    reporter.finish(&format!(
        "library: {} maps in {}",
        points.len(),
        store.root().display()
    ));
    let maps = maps_of_spec(&store, &spec)?;
    let options = FitOptions {
        rule: GridRule {
            rhos: vec![0.0015, 0.003, 0.006],
            ..GridRule::default()
        },
        refine: RefineOptions {
            candidates: 2,
            max_iters: 400,
            ..RefineOptions::default()
        },
        ..FitOptions::default()
    };
    let fit = fit_event(&data, MapSource::Files(&maps), &options, &reporter)?;
    drop(reporter);
    let outputs = Outputs {
        table: Some(out.join("minima.csv")),
        clipped: None,
        chi2_map: Some(out.join("chi2-map.png")),
        plot: Some(out.join("best-model.png")),
    };
    outputs.write(&data, &fit, None, options.refine.tol)
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

/// The last part: who is the lens of the fitted event? Its invented measurements (tE = 25 +- 0.5
/// d, rho = 0.003 +- 0.0002, a subgiant source of theta_* = 1.5 +- 0.1 microarcseconds, so
/// theta_E = 0.5 mas; s = 1.3, q = 3e-3) toward (l, b) = (1.5, -2.5), and an invented follow-up
/// image in K (extinction 0.25 to the source) that sees no light beyond the source's down to
/// K = 21.5, where a main-sequence host of the likely mass would have shown. Writes
/// `lens-mass-distance.png` and `lens-marginals.png` and prints the verdict (`causeway nature
/// --out` would write the samples, some 30 MB here).
fn lens_nature(out: &Path) -> Result<()> {
    use crate::galaxy::{figure, input, report, EventData, Measured};
    use crate::galaxy::{infer, Band, Imaging, LensLight, LensOptions, Sightline};
    eprintln!("demo: who is the lens? (a Galactic model, and a follow-up image that sees nothing)");
    let theta_star = Measured::new("theta_*", 1.5, 0.1)?;
    let data = EventData {
        te: Some(Measured::new("tE", 25.0, 0.5)?),
        theta_e: Some(input::theta_e(theta_star, 0.003, 0.0002, 1)?),
        s: Some(1.3),
        q: Some(3e-3),
        ..Default::default()
    };
    let light = LensLight::new(Band::K, 0.25, Imaging::Fainter { mag: 21.5 })?;
    let options = LensOptions {
        light: Some(light),
        samples: 200_000,
        ..LensOptions::new(Sightline::new(1.5, -2.5)?)
    };
    let post = infer(&data, &options, &crate::progress::Silent)?;
    eprint!("{}", report::summary(&post));
    let png = out.join("lens-mass-distance.png");
    figure::mass_distance_png(&post, Some(&light), options.sightline.b_deg, &png)?;
    let marginals = out.join("lens-marginals.png");
    figure::marginals_png(&post, &marginals)?;
    for f in [&png, &marginals] {
        eprintln!("wrote {}", f.display());
    }
    Ok(())
}
