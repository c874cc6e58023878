//! `causeway simulate`: synthetic photometry of a binary-lens model, written as a data-set file.

use super::curve::{SourceArgs, TrajectoryArgs};
use super::{LensArgs, ThreadArgs};
use crate::error::{Error, Result};
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::photometry::DEFAULT_ZERO_POINT;
use crate::fit::simulate::{Noise, Simulation};
use crate::fsutil::write_atomic;
use clap::Args;
use std::path::PathBuf;

/// Options of `causeway simulate`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    // The shared lens and trajectory groups also offer a lens file and a path; a simulated event
    // is a binary on a straight line.
    mut_arg("lenses", |a| a.hide(true)),
    mut_arg("path", |a| a.hide(true)),
    after_help = "Writes CSV t,mag,mag_err (or t,flux,flux_err with --flux): the model flux \
        fs A + fb, A exact (contour integration near caustics), with Gaussian noise of the given \
        constant error, drawn from a stream seeded by --seed (the same seed gives the same file, \
        whatever the thread count).\n\nExamples:\n  \
        causeway simulate --s 1.1 --q 2e-3 --t0 0 --u0 0.05 --te 30 --alpha 40 --rho 0.002 --ld 0.6 --time-range -30,30,2000 --out event.csv\n  \
        causeway simulate --s 0.8 --q 1e-2 --t0 100 --u0 -0.1 --te 25 --alpha 200 --times times.csv --fs 3 --fb 1 --flux --sigma-flux 0.05 --seed 7 --out site-b.csv"
)]
pub struct SimulateArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    #[command(flatten)]
    pub trajectory: TrajectoryArgs,
    #[command(flatten)]
    pub source: SourceArgs,
    /// Source flux.
    #[arg(long, value_name = "FS", default_value_t = 1.0)]
    pub fs: f64,
    /// Blend flux.
    #[arg(long, value_name = "FB", default_value_t = 0.0)]
    pub fb: f64,
    /// Error of every point in magnitudes (magnitude output).
    #[arg(long, value_name = "MAG", default_value_t = Simulation::DEFAULT_SIGMA_MAG, conflicts_with = "flux")]
    pub sigma_mag: f64,
    /// Write fluxes (t,flux,flux_err) with Gaussian flux errors instead of magnitudes.
    #[arg(long, requires = "sigma_flux")]
    pub flux: bool,
    /// Error of every point in flux (with --flux).
    #[arg(long, value_name = "X", requires = "flux")]
    pub sigma_flux: Option<f64>,
    /// Seed of the noise.
    #[arg(long, value_name = "N", default_value_t = Simulation::DEFAULT_SEED)]
    pub seed: u64,
    /// Magnitude of unit flux.
    #[arg(long, value_name = "ZP", default_value_t = DEFAULT_ZERO_POINT)]
    pub zero_point: f64,
    /// Relative tolerance of the magnifications.
    #[arg(long, value_name = "T", default_value_t = Simulation::DEFAULT_TOL)]
    pub tol: f64,
    /// Output data-set file (CSV).
    #[arg(long, value_name = "FILE.csv")]
    pub out: PathBuf,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Runs `causeway simulate`.
pub fn run(args: SimulateArgs) -> Result<()> {
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
    let (line, times) = args.trajectory.straight()?;
    let profile = args.source.profile()?;
    let model = BinaryModel {
        s,
        q,
        rho: profile.rho,
        trajectory: Trajectory::straight(line.t0, line.u0, line.te, line.alpha)?,
    };
    model.lens()?;
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
    let points = simulation.synthesize(&times)?;
    write_atomic(&args.out, points.to_csv().as_bytes())?;
    let peak = points
        .magnifications
        .iter()
        .copied()
        .fold(f64::MIN, f64::max);
    eprintln!(
        "wrote {}: {} points from t = {} to {}, peak magnification {peak:.4}, seed {}",
        args.out.display(),
        points.times.len(),
        points.times[0],
        points.times[points.times.len() - 1],
        args.seed
    );
    Ok(())
}
