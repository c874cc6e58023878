//! `causeway simulate`: synthetic photometry of a binary-lens model, written as one data-set
//! file, or as one file per site of an observing plan.

use super::curve::{SourceArgs, TrajectoryArgs};
use super::motion::MotionArgs;
use super::{LensArgs, ThreadArgs};
use crate::error::{Error, Result};
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::photometry::DEFAULT_ZERO_POINT;
use crate::fit::simulate::plan::{truth_csv, ObservingPlan, EXAMPLE_PLAN};
use crate::fit::simulate::{Noise, Simulation};
use crate::fsutil::{check_outputs, write_atomic, Output};
use crate::parallax::Observer;
use crate::source::SourceProfile;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `causeway simulate`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    // The shared lens and trajectory groups also offer a lens file and a path; a simulated event
    // is a binary on a straight line.
    mut_arg("lenses", |a| a.hide(true)),
    mut_arg("path", |a| a.hide(true)),
    after_help = "One data set (--out): CSV t,mag,mag_err (or t,flux,flux_err with --flux) at the \
        given times, the model flux fs A + fb with Gaussian noise of one constant error.\n\n\
        An observing plan (--plan, TOML; --example-plan prints a commented one): one \
        <site>.csv per site in --out-dir, with nightly windows, lost nights, follow-up windows, \
        errors growing as the source fades, a true error scale, outliers and a time offset; \
        plan times and --t0 are days in the plan's system. --truth writes every point's model \
        value and its follow-up and outlier flags.\n\n\
        Parallax and orbital motion: --ra/--dec place the event on the sky; --pi-e-n/--pi-e-e \
        give pi_E (geocentric, about --t0-par; times below 2400000 are JD - 2450000, above full \
        JD); --ds-dt (per year) and --dalpha-dt (radians per year) move the lens about --t0-kep; \
        --ephemeris sees the data from an observatory's positions (CSV t,x,y,z in au, \
        heliocentric, equatorial; or t,north,east, its offsets from the Earth projected on the \
        sky, au) instead of the Earth; in a plan, a site in space names its own (ephemeris = \
        \"FILE.csv\").\n\n\
        A is exact (contour integration near caustics). The noise comes from --seed: the same \
        inputs give the same files, whatever the thread count.\n\nExamples:\n  \
        causeway simulate --s 1.1 --q 2e-3 --t0 0 --u0 0.05 --te 30 --alpha 40 --rho 0.002 --ld 0.6 --time-range -30,30,2000 --out event.csv\n  \
        causeway simulate --s 0.8 --q 1e-2 --t0 100 --u0 -0.1 --te 25 --alpha 200 --times times.csv --fs 3 --fb 1 --flux --sigma-flux 0.05 --seed 7 --out site-b.csv\n  \
        causeway simulate --s 1.2 --q 4e-3 --t0 8300 --u0 0.1 --te 60 --alpha 30 --rho 0.002 --ra 17:55:00 --dec -29:30:00 --pi-e-n 0.3 --pi-e-e -0.1 --dalpha-dt 0.5 --time-range 8200,8400,800 --out event.csv\n  \
        causeway simulate --example-plan > plan.toml\n  \
        causeway simulate --s 1.3 --q 3e-3 --t0 9009.6 --u0 0.12 --te 25 --alpha 30 --rho 0.002 --plan plan.toml --out-dir data --truth data/truth.csv"
)]
pub struct SimulateArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    #[command(flatten)]
    pub trajectory: TrajectoryArgs,
    #[command(flatten)]
    pub source: SourceArgs,
    #[command(flatten)]
    pub motion: MotionArgs,
    /// Source flux (flux 1 is magnitude --zero-point).
    #[arg(long, value_name = "FS", default_value_t = 1.0)]
    pub fs: f64,
    /// Blend flux (same units as --fs).
    #[arg(long, value_name = "FB", default_value_t = 0.0)]
    pub fb: f64,
    /// Error of every point in magnitudes (magnitude output).
    #[arg(long, value_name = "MAG", default_value_t = Simulation::DEFAULT_SIGMA_MAG, conflicts_with = "flux")]
    pub sigma_mag: f64,
    /// Write fluxes (t,flux,flux_err) with Gaussian flux errors instead of magnitudes.
    #[arg(long, requires = "sigma_flux")]
    pub flux: bool,
    /// Error of every point in flux (with --flux; units of --fs).
    #[arg(long, value_name = "FLUX", requires = "flux")]
    pub sigma_flux: Option<f64>,
    /// Seed of the noise (and of a plan's nights).
    #[arg(long, value_name = "N", default_value_t = Simulation::DEFAULT_SEED)]
    pub seed: u64,
    /// Magnitude of unit flux (mag).
    #[arg(long, value_name = "ZP", default_value_t = DEFAULT_ZERO_POINT)]
    pub zero_point: f64,
    /// Relative tolerance of the magnifications.
    #[arg(long, value_name = "T", default_value_t = Simulation::DEFAULT_TOL)]
    pub tol: f64,
    /// Output data-set file (CSV), for one data set.
    #[arg(long, value_name = "FILE.csv", required_unless_present_any = ["plan", "example_plan"])]
    pub out: Option<PathBuf>,
    /// Observing plan (TOML): sites, nights, cadences, errors; see --example-plan.
    #[arg(
        long,
        value_name = "FILE.toml",
        requires = "out_dir",
        conflicts_with_all = ["times", "time_range", "fs", "fb", "sigma_mag", "flux", "zero_point", "out"]
    )]
    pub plan: Option<PathBuf>,
    /// Existing directory for the plan's files (one NAME.csv per site).
    #[arg(long, value_name = "DIR", requires = "plan")]
    pub out_dir: Option<PathBuf>,
    /// With --plan: also write every point's truth (CSV
    /// site,t,magnification,model,value,error,followup,outlier).
    #[arg(long, value_name = "FILE.csv", requires = "plan")]
    pub truth: Option<PathBuf>,
    /// Print a commented example plan to stdout and exit.
    #[arg(long, exclusive = true)]
    pub example_plan: bool,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Runs `causeway simulate`.
pub fn run(args: SimulateArgs) -> Result<()> {
    if args.example_plan {
        print!("{EXAMPLE_PLAN}");
        return Ok(());
    }
    if args.plan.is_none() {
        let out = args.out.as_deref().map(|path| Output {
            what: "--out",
            path,
            extension: None,
        });
        check_outputs(out.as_slice())?;
    }
    let (Some(s), Some(q)) = (args.lens.s, args.lens.q) else {
        return Err(Error::input(
            "simulate models a binary lens: give --s S --q Q (not --lenses)",
        ));
    };
    if args.trajectory.path.is_some() {
        return Err(Error::input(
            "--path: simulate needs a straight trajectory (--t0 --u0 --te --alpha)",
        ));
    }
    let profile = args.source.profile()?;
    match (&args.plan, &args.out) {
        (Some(plan), _) => run_plan(&args, plan, s, q, profile),
        (None, Some(out)) => run_single(&args, out, s, q, profile),
        (None, None) => Err(Error::input(
            "give --out FILE.csv (one data set) or --plan FILE.toml --out-dir DIR",
        )),
    }
}

/// One data set at `--times` / `--time-range`, written to `out`.
fn run_single(
    args: &SimulateArgs,
    out: &Path,
    s: f64,
    q: f64,
    profile: SourceProfile,
) -> Result<()> {
    let (line, times) = args.trajectory.straight()?;
    if times.len() < 3 {
        let origin = args
            .trajectory
            .times
            .as_ref()
            .map_or("--time-range".to_string(), |f| f.display().to_string());
        return Err(Error::input(format!(
            "{origin}: a data set needs at least 3 times, got {}",
            times.len()
        )));
    }
    let model = BinaryModel {
        s,
        q,
        rho: profile.rho,
        trajectory: args
            .motion
            .apply(Trajectory::straight(line.t0, line.u0, line.te, line.alpha)?)?,
    };
    model.lens()?;
    let ephemeris = args.motion.ephemeris()?;
    let observer = ephemeris.as_ref().map_or(Observer::Earth, Observer::At);
    let noise = match args.sigma_flux {
        Some(sigma) => Noise::Flux { sigma },
        None => Noise::Magnitude {
            sigma: args.sigma_mag,
        },
    };
    let simulation = Simulation {
        model,
        law: profile.law,
        fs: args.fs,
        fb: args.fb,
        noise,
        seed: args.seed,
        zero_point: args.zero_point,
        tol: args.tol,
    };
    args.threads.install()?;
    let points = simulation.synthesize_seen(&times, &observer)?;
    write_atomic(out, points.to_csv().as_bytes())?;
    let peak = points
        .magnifications
        .iter()
        .copied()
        .fold(f64::MIN, f64::max);
    eprintln!(
        "wrote {}: {} points from t = {} to {}, peak magnification {peak:.4}, seed {}",
        out.display(),
        points.times.len(),
        points.times[0],
        points.times[points.times.len() - 1],
        args.seed
    );
    Ok(())
}

/// The sites of the plan at `path`, one file each in `--out-dir`.
fn run_plan(
    args: &SimulateArgs,
    path: &Path,
    s: f64,
    q: f64,
    profile: SourceProfile,
) -> Result<()> {
    let t = &args.trajectory;
    let (Some(t0), Some(u0), Some(te), Some(alpha)) = (t.t0, t.u0, t.te, t.alpha) else {
        return Err(Error::input(
            "--plan: give the trajectory as --t0 --u0 --te --alpha (the times come from the plan)",
        ));
    };
    let model = BinaryModel {
        s,
        q,
        rho: profile.rho,
        trajectory: args
            .motion
            .apply(Trajectory::straight(t0, u0, te, alpha.to_radians())?)?,
    };
    model.lens()?;
    if args.motion.ephemeris.is_some() {
        return Err(Error::input(
            "--ephemeris: a plan gives each site in space its own (the site's ephemeris key)",
        ));
    }
    let plan = ObservingPlan::read(path)?;
    let dir = args
        .out_dir
        .as_deref()
        .expect("clap: --plan requires --out-dir");
    if !dir.is_dir() {
        return Err(Error::input(format!(
            "--out-dir: '{}' is not an existing directory",
            dir.display()
        )));
    }
    let files: Vec<PathBuf> = plan
        .sites
        .iter()
        .map(|site| dir.join(format!("{}.csv", site.name)))
        .collect();
    let truth = args.truth.as_deref();
    for file in files.iter().map(PathBuf::as_path).chain(truth) {
        if file.is_dir() {
            return Err(Error::input(format!(
                "{}: is a directory, not a file to write",
                file.display()
            )));
        }
    }
    if let Some(truth) = truth {
        let parent = truth.parent().filter(|p| !p.as_os_str().is_empty());
        if parent.is_some_and(|p| !p.is_dir()) || files.iter().any(|f| f == truth) {
            return Err(Error::input(format!(
                "--truth: '{}' must be a new file name in an existing directory, not a site's file",
                truth.display()
            )));
        }
    }
    args.threads.install()?;
    let sites = plan.observe(&model, profile.law, args.seed, args.tol)?;
    for (site, file) in sites.iter().zip(&files) {
        write_atomic(file, site.data.to_csv().as_bytes())?;
    }
    if let Some(truth) = truth {
        write_atomic(truth, truth_csv(&sites).as_bytes())?;
    }
    for site in &sites {
        eprintln!("{}", site.summary());
    }
    eprintln!("seed {}, files in {}", args.seed, dir.display());
    Ok(())
}
