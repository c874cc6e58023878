//! `causeway curve`: the light curve of a finite source along a path or a straight trajectory.

use super::library::StoreArgs;
use super::map::{build_reported, default_memory_limit, parse_size};
use super::progress::Reporter;
use super::{parse_pair, LensArgs, ThreadArgs};
use crate::curve::{
    map_engine, plan_window, plot_png, read_times, time_range, Evaluation, Method,
    PointMagnification, Sampler, SourcePath, StraightLine,
};
use crate::engine::RayShooting;
use crate::error::{Error, Result};
use crate::fit::photometry::DEFAULT_ZERO_POINT;
use crate::fsutil::{check_outputs, Output};
use crate::map::{read_refined, MagnificationMap, RefinedMap};
use crate::solve::ImageSolver;
use crate::source::{LimbDarkening, SourceProfile};
use crate::store::MapKey;
use crate::table::fmt_f64;
use clap::{Args, ValueEnum};
use std::fmt::Write as _;
use std::path::PathBuf;

/// Options of `causeway curve`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Examples:\n  \
        causeway curve --map planet.fits --t0 0 --u0 0.05 --te 30 --alpha 40 --time-range -20,20,2001 --rho 0.002 --ld 0.6\n  \
        causeway curve --s 1.25 --q 2e-3 --path path.csv --rho 0.003 --png curve.png\n\n\
        The CSV on stdout has t (when times exist), x, y, magnification, error (estimated \
        absolute error of the magnification) and method: direct or convolved (map read under \
        the source), bilinear (point source on the map), expansion (off the map: point source \
        plus hexadecapole correction), point (off the map, rho = 0) or contour (recomputed by \
        contour integration because the estimate of the others exceeded --tol times the \
        magnification); with --fs also flux = fs A + fb and magnitude = zp - 2.5 log10(flux), \
        zp 22 by default."
)]
pub struct CurveArgs {
    /// Magnification map (FITS) to read.
    #[arg(long, value_name = "FILE.fits", conflicts_with_all = ["s", "q", "lenses"])]
    pub map: Option<PathBuf>,
    #[command(flatten)]
    pub lens: LensArgs,
    #[command(flatten)]
    pub trajectory: TrajectoryArgs,
    #[command(flatten)]
    pub source: SourceArgs,
    /// Relative tolerance of every value, map reads and the off-map continuation alike: a
    /// value whose error estimate exceeds T times the magnification is recomputed by contour
    /// integration (method contour).
    #[arg(long, default_value_t = Sampler::DEFAULT_TOL, value_name = "T")]
    pub tol: f64,
    /// How map reads under the source are made.
    #[arg(long, value_enum, default_value_t = EvaluationArg::Auto, value_name = "HOW")]
    pub evaluation: EvaluationArg,
    /// Source flux (flux 1 is magnitude --zero-point): adds the columns flux = fs A + fb and
    /// magnitude.
    #[arg(long, value_name = "FS")]
    pub fs: Option<f64>,
    /// Blend flux (with --fs; same units).
    #[arg(long, value_name = "FB", requires = "fs", default_value_t = 0.0)]
    pub fb: f64,
    /// Magnitude of unit flux (mag).
    #[arg(long, value_name = "ZP", default_value_t = DEFAULT_ZERO_POINT)]
    pub zero_point: f64,
    /// Also plot the curve (magnification against time, or against distance along the path).
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<PathBuf>,
    /// With a lens: map pixels per source radius.
    #[arg(
        long,
        default_value_t = 10.0,
        value_name = "P",
        allow_hyphen_values = true
    )]
    pub pixels_per_rho: f64,
    /// With a lens: rays per unlensed pixel area of the map built (ray shooting); without it
    /// the engine and density aim at a median pixel error of --tol (src/engine/accuracy.rs).
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub rays: Option<f64>,
    /// Largest working memory allowed, e.g. 4G (default: half the RAM).
    #[arg(long, value_name = "SIZE", value_parser = parse_size)]
    pub max_memory: Option<u64>,
    #[command(flatten)]
    pub store: StoreArgs,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Where the source goes: a path file, or a straight trajectory at listed or evenly spaced
/// times (shared by `curve` and `compare`).
#[derive(Debug, Clone, Args)]
pub struct TrajectoryArgs {
    /// Source positions: CSV with header x,y or t,x,y.
    #[arg(long, value_name = "FILE", conflicts_with_all = ["t0", "u0", "te", "alpha", "times", "time_range"])]
    pub path: Option<PathBuf>,
    /// Time of closest approach to the origin (days).
    #[arg(long, value_name = "T0", allow_hyphen_values = true)]
    pub t0: Option<f64>,
    /// Signed impact parameter (Einstein radii): at t0 the source is at (-u0 sin alpha,
    /// u0 cos alpha), to the left of its motion for u0 > 0.
    #[arg(long, value_name = "U0", allow_hyphen_values = true)]
    pub u0: Option<f64>,
    /// Einstein timescale (days).
    #[arg(long, value_name = "TE", allow_hyphen_values = true)]
    pub te: Option<f64>,
    /// Direction of motion, degrees counter-clockwise from the x axis (the binary axis, host at
    /// negative x, companion at positive x).
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub alpha: Option<f64>,
    /// Times: CSV with header t.
    #[arg(long, value_name = "FILE", conflicts_with = "time_range")]
    pub times: Option<PathBuf>,
    /// Times: START,END,COUNT evenly spaced, ends included (COUNT at most 10,000,000).
    #[arg(long, value_name = "START,END,COUNT", allow_hyphen_values = true)]
    pub time_range: Option<String>,
}

/// The source: radius and limb darkening (shared by `curve` and `compare`).
#[derive(Debug, Clone, Args)]
pub struct SourceArgs {
    /// Source radius (Einstein radii); 0 for a point source.
    #[arg(
        long,
        default_value_t = 0.0,
        value_name = "RHO",
        allow_hyphen_values = true
    )]
    pub rho: f64,
    /// Linear limb-darkening coefficient u in [0, 1].
    #[arg(
        long,
        value_name = "U",
        conflicts_with = "ld_sqrt",
        allow_hyphen_values = true
    )]
    pub ld: Option<f64>,
    /// Square-root limb-darkening coefficients c,d in [0, 1].
    #[arg(long, value_name = "C,D", value_parser = parse_pair, allow_hyphen_values = true)]
    pub ld_sqrt: Option<(f64, f64)>,
}

/// `--evaluation` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum EvaluationArg {
    /// Pre-convolve when there are enough points to pay for it.
    Auto,
    /// Exact overlap weights at every point.
    Direct,
    /// Convolve the map once, then interpolate.
    Convolved,
}

impl SourceArgs {
    /// The source profile these options describe (checked).
    pub fn profile(&self) -> Result<SourceProfile> {
        let law = match (self.ld, self.ld_sqrt) {
            (Some(u), None) => LimbDarkening::Linear { u },
            (None, Some((c, d))) => LimbDarkening::SquareRoot { c, d },
            _ => LimbDarkening::Uniform,
        };
        check_rho(self.rho)?;
        SourceProfile::new(self.rho, law)
    }
}

impl TrajectoryArgs {
    /// The source path these options describe: read from `--path`, or the straight line at the
    /// `--times` / `--time-range` times.
    pub fn path(&self) -> Result<SourcePath> {
        if let Some(p) = &self.path {
            let path = SourcePath::read(p)?;
            // Also refuses, naming the line, a position beyond any window.
            super::read_points(p)?;
            return Ok(path);
        }
        let (line, times) = self.straight()?;
        Ok(line.path(&times))
    }

    /// The straight line of `--t0 --u0 --te --alpha` and its `--times` / `--time-range` times.
    pub fn straight(&self) -> Result<(StraightLine, Vec<f64>)> {
        let (Some(t0), Some(u0), Some(te), Some(alpha)) = (self.t0, self.u0, self.te, self.alpha)
        else {
            return Err(Error::input(
                "give the source path as --path FILE, or --t0 --u0 --te --alpha with --times \
                 FILE or --time-range START,END,COUNT",
            ));
        };
        let line = StraightLine::new(t0, u0, te, alpha.to_radians())?;
        let times = match (&self.times, &self.time_range) {
            (Some(f), None) => {
                let times = read_times(f)?;
                if times.is_empty() {
                    return Err(Error::input(format!("{}: no times listed", f.display())));
                }
                times
            }
            (None, Some(r)) => parse_range(r)?,
            _ => {
                return Err(Error::input(
                    "a straight trajectory needs --times FILE or --time-range START,END,COUNT",
                ))
            }
        };
        far_source(&line, &times, (u0, te))?;
        Ok((line, times))
    }
}

/// The largest source radius taken, in Einstein radii.
pub const MAX_RHO: f64 = 1e3;

/// Refuses a source radius past [`MAX_RHO`] (the profile checks the rest).
pub fn check_rho(rho: f64) -> Result<()> {
    if rho > MAX_RHO {
        return Err(Error::input(format!(
            "--rho {rho:e}: a source wider than {MAX_RHO} Einstein radii is not a lensing \
             source (give rho in Einstein radii)"
        )));
    }
    Ok(())
}

/// How far from the lens a source may pass, in Einstein radii ([`crate::map::MAX_REACH`]).
const MAX_DISTANCE: f64 = crate::map::MAX_REACH;

/// Refuses a straight line that puts the source absurdly far from the lens, naming the option
/// to blame: `--u0` when the closest approach is already too far, else `--te` (with the times).
fn far_source(line: &StraightLine, times: &[f64], (u0, te): (f64, f64)) -> Result<()> {
    if u0.abs() > MAX_DISTANCE {
        return Err(Error::input(format!(
            "--u0 {u0:e}: the source never comes within {MAX_DISTANCE:e} Einstein radii of \
             the lens (give u0 in Einstein radii)"
        )));
    }
    for &t in times {
        let (x, y) = line.position(t);
        let d = x.hypot(y);
        if d.is_nan() || d > MAX_DISTANCE {
            return Err(Error::input(format!(
                "--te {te:e}: puts the source {d:.3e} Einstein radii from the lens at t = \
                 {t} (at most {MAX_DISTANCE:e}; check --te, --t0 and the times)"
            )));
        }
    }
    Ok(())
}

/// Decimal places of a number as typed (`"2.72"` has 2, `"1e-3"` has 3, `"10"` has 0).
fn decimals(typed: &str) -> i32 {
    let lower = typed.to_ascii_lowercase();
    let (mantissa, exponent) = match lower.split_once('e') {
        Some((m, e)) => (m, e.parse::<i32>().unwrap_or(0)),
        None => (lower.as_str(), 0),
    };
    let places = mantissa.split_once('.').map_or(0, |(_, f)| f.len() as i32);
    (places - exponent).max(0)
}

/// Rounds each time to the precision of the typed start and end and of the step (at most 12
/// decimals), so that `2.72,10.72,801` gives 2.76 rather than 2.7600000000000002.
fn round_times(times: &mut [f64], start: &str, end: &str) {
    let step = match times {
        [a, b, ..] => *b - *a,
        _ => return,
    };
    let step_typed = format!("{:.12e}", step);
    let step_places = {
        let (m, e) = step_typed.split_once('e').unwrap_or((&step_typed, "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.');
        decimals(&format!("{m}e{e}"))
    };
    let places = decimals(start).max(decimals(end)).max(step_places);
    if places > 12 {
        return;
    }
    let scale = 10f64.powi(places);
    for t in times.iter_mut() {
        let r = (*t * scale).round() / scale;
        if r.is_finite() {
            *t = r;
        }
    }
}

/// Parses `START,END,COUNT`.
fn parse_range(s: &str) -> Result<Vec<f64>> {
    let bad = || {
        Error::input(format!(
            "--time-range: expected START,END,COUNT, got '{}'",
            crate::error::shown(s)
        ))
    };
    let parts: Vec<&str> = s.split(',').map(str::trim).collect();
    let [a, b, n] = parts.as_slice() else {
        return Err(bad());
    };
    let (x, y): (f64, f64) = (a.parse().map_err(|_| bad())?, b.parse().map_err(|_| bad())?);
    let mut times = time_range(x, y, n.parse().map_err(|_| bad())?)?;
    round_times(&mut times, a, b);
    Ok(times)
}

/// Runs `causeway curve`.
pub fn run(args: CurveArgs) -> Result<()> {
    let png = args.png.as_deref().map(|p| Output::png("--png", p));
    check_outputs(png.as_slice())?;
    // Checked whether or not a map is built, so that a slip is never silently ignored.
    if let Some(rays) = args.rays {
        RayShooting::try_new(rays)?;
    }
    if !(args.pixels_per_rho > 0.0 && args.pixels_per_rho <= 1e4) {
        return Err(Error::input(format!(
            "--pixels-per-rho: must be > 0 and at most 1e4, got {}",
            args.pixels_per_rho
        )));
    }
    args.threads.install()?;
    let profile = args.source.profile()?;
    let path = args.trajectory.path()?;
    for (name, v) in [
        ("--fs", args.fs.unwrap_or(1.0)),
        ("--fb", args.fb),
        ("--zero-point", args.zero_point),
    ] {
        if !v.is_finite() {
            return Err(Error::input(format!("{name}: must be finite, got {v}")));
        }
    }
    let limit = args.max_memory.unwrap_or_else(default_memory_limit);
    let (map, lens) = match &args.map {
        Some(file) => {
            let map = read_refined(file)?;
            let lens = map.base.provenance.lens.clone();
            (Some(map), lens)
        }
        None => {
            let lens = args.lens.lens_system()?;
            let map = needed_map(&args, &lens, &profile, &path.points, limit)?;
            (map.map(RefinedMap::plain), lens)
        }
    };
    let evaluation = match args.evaluation {
        EvaluationArg::Auto => Evaluation::Auto,
        EvaluationArg::Direct => Evaluation::Direct,
        EvaluationArg::Convolved => Evaluation::Convolved,
    };
    let sampler = Sampler::new(profile)
        .tol(args.tol)
        .evaluation(evaluation)
        .memory_limit(limit);
    let curve = sample_reported(sampler, map.as_ref(), &lens, &path.points)?;
    let recomputed = recomputed(&curve.samples);
    if recomputed > 0 {
        eprintln!(
            "{recomputed} of {} values recomputed by contour integration (their map or \
             expansion error estimate exceeded --tol)",
            curve.samples.len()
        );
    }
    let flux = args.fs.map(|fs| (fs, args.fb, args.zero_point));
    let csv = format_csv(path.times.as_deref(), &curve.samples, flux)?;
    if let Some(png) = &args.png {
        let abscissa = path
            .times
            .clone()
            .unwrap_or_else(|| distances(&path.points));
        let label = if path.times.is_some() {
            "t (days)"
        } else {
            "distance along the path (Einstein radii)"
        };
        plot_png(&curve.samples, &abscissa, label, png)?;
        eprintln!("wrote {}", png.display());
    }
    print!("{csv}");
    Ok(())
}

/// Samples `points` with `sampler` on `map` (when there is one), the off-map continuation
/// using `lens` and contour integration recomputing every value not within the sampler's
/// tolerance; shows progress and prints the sampler's warnings on stderr.
pub(super) fn sample_reported(
    sampler: Sampler,
    map: Option<&RefinedMap>,
    lens: &crate::lens::LensSystem,
    points: &[(f64, f64)],
) -> Result<crate::curve::Curve> {
    let solver = solver_for(lens);
    let point: &dyn PointMagnification = match &solver {
        Some(s) => s,
        None => lens,
    };
    let reporter = Reporter::new().without_start_lines();
    let mut sampler = sampler.lens(point).fallback(lens).progress(&reporter);
    if let Some(m) = map {
        sampler = sampler.refined(m);
    }
    let curve = sampler.sample(points)?;
    for w in &curve.warnings {
        eprintln!("{w}");
    }
    Ok(curve)
}

/// How many samples contour integration recomputed.
pub(super) fn recomputed(samples: &[crate::curve::Sample]) -> usize {
    samples
        .iter()
        .filter(|s| s.method == Method::Contour)
        .count()
}

/// The off-map continuation's point source: a solver built once for two to four lenses; `None`
/// for one lens (closed form) or more than four (the lens system then reports, when a point
/// needs it, that the solver does not take that many).
fn solver_for(lens: &crate::lens::LensSystem) -> Option<ImageSolver> {
    (lens.len() > 1)
        .then(|| ImageSolver::new(lens).ok())
        .flatten()
}

/// Cumulative distance along a path, from 0.
pub(super) fn distances(points: &[(f64, f64)]) -> Vec<f64> {
    let mut d = 0.0;
    let mut out = Vec::with_capacity(points.len());
    for (k, p) in points.iter().enumerate() {
        if k > 0 {
            d += (p.0 - points[k - 1].0).hypot(p.1 - points[k - 1].1);
        }
        out.push(d);
    }
    out
}

/// The map the path needs (none when the continuation serves it all), from the store when it
/// is there, else built and stored.
fn needed_map(
    args: &CurveArgs,
    lens: &crate::lens::LensSystem,
    profile: &SourceProfile,
    points: &[(f64, f64)],
    limit: u64,
) -> Result<Option<MagnificationMap>> {
    let solver = solver_for(lens);
    let point: &dyn PointMagnification = match &solver {
        Some(s) => s,
        None => lens,
    };
    let Some(window) = plan_window(point, profile, points, args.tol, args.pixels_per_rho)? else {
        return Ok(None);
    };
    let engine = map_engine(lens, &window, args.rays, args.tol)?;
    let store = args.store.create()?;
    let key = MapKey::new(lens.clone(), window, engine.name(), engine.density());
    if let Some(map) = store.get(&key)? {
        eprintln!("using stored map {}", store.path_of(&key).display());
        return Ok(Some(map));
    }
    eprintln!(
        "building a map: {0} x {0} pixels over {1} centred on ({2}, {3})",
        window.pixels, window.width, window.center.0, window.center.1
    );
    let map = build_reported(engine.as_ref(), lens, &window, limit)?;
    let file = store.put(&map)?;
    eprintln!("stored {}", file.display());
    Ok(Some(map))
}

/// The output table: `t` when there are times, the samples, and with `flux = (fs, fb, zero
/// point)` the flux and magnitude columns.
pub fn format_csv(
    times: Option<&[f64]>,
    samples: &[crate::curve::Sample],
    flux: Option<(f64, f64, f64)>,
) -> Result<String> {
    let mut out = String::new();
    if times.is_some() {
        out.push_str("t,");
    }
    out.push_str("x,y,magnification,error,method");
    if flux.is_some() {
        out.push_str(",flux,magnitude");
    }
    out.push('\n');
    for (k, s) in samples.iter().enumerate() {
        if let Some(t) = times {
            let _ = write!(out, "{},", fmt_f64(t[k]));
        }
        let _ = write!(
            out,
            "{},{},{},{},{}",
            fmt_f64(s.x),
            fmt_f64(s.y),
            fmt_f64(s.magnification),
            fmt_f64(s.error),
            s.method.name()
        );
        if let Some((fs, fb, zero_point)) = flux {
            let flux = fs * s.magnification + fb;
            if flux <= 0.0 {
                return Err(Error::input(format!(
                    "--fs/--fb: flux {flux} at point {} is not positive (no magnitude)",
                    k + 1
                )));
            }
            let mag = zero_point - 2.5 * flux.log10();
            let _ = write!(out, ",{},{}", fmt_f64(flux), fmt_f64(mag));
        }
        out.push('\n');
    }
    Ok(out)
}
