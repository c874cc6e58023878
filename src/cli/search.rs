//! `causeway search`: fit photometry with binary-lens models from a map library.

use super::library::StoreArgs;
use super::map::progress_bar;
use super::physical::PhysicalArgs;
use super::ThreadArgs;
use crate::error::{Error, Result};
use crate::fit::minima::{error_scales, refine_minima, RefineOptions};
use crate::fit::photometry::{DataSet, DEFAULT_ZERO_POINT};
use crate::fit::plots::{chi2_map_png, model_png};
use crate::fit::report::Report;
use crate::fit::search::{maps_of_spec, maps_of_store, search, GridRule, LibraryMap, Seed};
use crate::fit::single::fit_single_lens;
use crate::fsutil::write_atomic;
use crate::source::LimbDarkening;
use crate::store::library::{self, LibrarySpec};
use crate::store::Store;
use clap::Args;
use std::path::{Path, PathBuf};

/// Options of `causeway search`.
#[derive(Debug, Args)]
#[command(
    after_help = "Fits every data set (CSV t,mag,mag_err or t,flux,flux_err) with a \
    single lens first, then searches each map of the library over trajectories around that \
    seed (the grid rule is in the documentation of causeway::fit::search), refines the best \
    (s, q) local minima with exact magnifications, and prints the distinct minima as CSV \
    (ranked by chi2). --library takes a spec (TOML; its missing maps are built into the store \
    first) or a store directory (all its binary maps).\n\nExamples:\n  \
    causeway search site-a.csv site-b.csv --library planets.toml --ld 0.55,0.62 --out minima.csv --chi2-map chi2.png --plot best.png\n  \
    causeway search event.csv --library /shared/maps --rho 0.001,0.002 --refine 6 --rescale\n  \
    causeway search event.csv --library planets.toml --theta-star 0.6 --dl 4 --ds 8"
)]
pub struct SearchArgs {
    /// Data-set files (CSV), one per observatory or band.
    #[arg(required = true, value_name = "DATA")]
    pub data: Vec<PathBuf>,
    /// Library spec (TOML) or store directory.
    #[arg(long, value_name = "SPEC|STORE")]
    pub library: PathBuf,
    #[command(flatten)]
    pub store: StoreArgs,
    /// Linear limb-darkening coefficient: one for all data sets, or one per set in order.
    #[arg(
        long,
        value_name = "U[,U...]",
        value_delimiter = ',',
        allow_hyphen_values = true
    )]
    pub ld: Vec<f64>,
    /// Magnitude of unit flux in the data files.
    #[arg(long, value_name = "ZP", default_value_t = DEFAULT_ZERO_POINT, allow_hyphen_values = true)]
    pub zero_point: f64,
    /// Apply each set's error-bar scale (chi2/dof = 1 at the best model) to the chi2 reported.
    #[arg(long)]
    pub rescale: bool,
    /// Trial source radii.
    #[arg(long, value_name = "RHO[,RHO...]", value_delimiter = ',', allow_hyphen_values = true, default_values_t = GridRule::default().rhos)]
    pub rho: Vec<f64>,
    /// Half-range of u0 around the single-lens value, relative to it.
    #[arg(long, value_name = "F", default_value_t = GridRule::default().u0_span)]
    pub u0_span: f64,
    /// Least half-range of u0 (absolute).
    #[arg(long, value_name = "U", default_value_t = GridRule::default().u0_floor)]
    pub u0_floor: f64,
    /// Widen u0 to where the single lens's valley (its best fit at fixed u0) rises by this
    /// fraction of its misfit (chi2 - dof; what it leaves unexplained).
    #[arg(long, value_name = "F", default_value_t = GridRule::default().u0_misfit)]
    pub u0_misfit: f64,
    /// Factors on the single-lens tE.
    #[arg(long, value_name = "F[,F...]", value_delimiter = ',', allow_hyphen_values = true, default_values_t = GridRule::default().te_factors)]
    pub te_factors: Vec<f64>,
    /// Shifts of t0 from the single-lens value, in units of its tE.
    #[arg(long, value_name = "K[,K...]", value_delimiter = ',', allow_hyphen_values = true, default_values_t = GridRule::default().t0_shifts)]
    pub t0_shifts: Vec<f64>,
    /// Also try every line timed so that its strongest map feature falls at the data's largest
    /// departure from the single lens (up to about four times the lines).
    #[arg(long)]
    pub timed: bool,
    /// Distinct trajectories kept per map.
    #[arg(long, value_name = "N", default_value_t = GridRule::default().keep)]
    pub keep: usize,
    /// Local minima of the (s, q) grid to refine.
    #[arg(long, value_name = "N", default_value_t = RefineOptions::default().candidates)]
    pub refine: usize,
    /// Relative tolerance of the exact magnifications in the refinement.
    #[arg(long, value_name = "T", default_value_t = RefineOptions::default().tol)]
    pub tol: f64,
    /// Iteration limit of each refinement.
    #[arg(long, value_name = "N", default_value_t = RefineOptions::default().max_iters)]
    pub max_iters: u64,
    /// Write the table of minima here instead of stdout.
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Draw the chi2 map over (s, q).
    #[arg(long, value_name = "FILE.png")]
    pub chi2_map: Option<PathBuf>,
    /// Draw the best model over the data, with residuals.
    #[arg(long, value_name = "FILE.png")]
    pub plot: Option<PathBuf>,
    #[command(flatten)]
    pub physical: PhysicalArgs,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

impl SearchArgs {
    /// The data sets, each with its limb darkening.
    pub fn data_sets(&self) -> Result<Vec<DataSet>> {
        let n = self.data.len();
        if !(self.ld.is_empty() || self.ld.len() == 1 || self.ld.len() == n) {
            return Err(Error::input(format!(
                "--ld: give one coefficient or one per data set ({n}), got {}",
                self.ld.len()
            )));
        }
        if !self.zero_point.is_finite() {
            return Err(Error::input("--zero-point: must be finite"));
        }
        self.data
            .iter()
            .enumerate()
            .map(|(k, path)| {
                let mut set = DataSet::read(path, self.zero_point)?;
                if let Some(&u) = self.ld.get(k).or(self.ld.first()) {
                    if !(0.0..=1.0).contains(&u) {
                        return Err(Error::input(format!("--ld: u must be in [0, 1], got {u}")));
                    }
                    set.limb_darkening = LimbDarkening::Linear { u };
                }
                Ok(set)
            })
            .collect()
    }

    fn rule(&self) -> Result<GridRule> {
        let rule = GridRule {
            rhos: self.rho.clone(),
            u0_span: self.u0_span,
            u0_floor: self.u0_floor,
            u0_misfit: self.u0_misfit,
            te_factors: self.te_factors.clone(),
            t0_shifts: self.t0_shifts.clone(),
            keep: self.keep,
            timed: self.timed,
            ..GridRule::default()
        };
        rule.validate()?;
        Ok(rule)
    }

    fn check_outputs(&self) -> Result<()> {
        for (name, path, ext) in [
            ("--out", &self.out, "csv"),
            ("--chi2-map", &self.chi2_map, "png"),
            ("--plot", &self.plot, "png"),
        ] {
            if let Some(p) = path {
                if p.extension().and_then(|e| e.to_str()) != Some(ext) {
                    return Err(Error::input(format!(
                        "{name}: expected a .{ext} file name, got '{}'",
                        p.display()
                    )));
                }
            }
        }
        if self.refine == 0 {
            return Err(Error::input("--refine: must be at least 1"));
        }
        if !(self.tol.is_finite() && self.tol > 0.0 && self.tol <= 0.1) {
            return Err(Error::input(format!(
                "--tol: must be in (0, 0.1], got {}",
                self.tol
            )));
        }
        Ok(())
    }
}

/// The maps of `--library`: a store directory, or a spec whose missing maps are built first.
fn library_maps(library_path: &Path, store: &StoreArgs) -> Result<Vec<LibraryMap>> {
    if library_path.is_dir() {
        return maps_of_store(&Store::open(library_path)?);
    }
    let spec = LibrarySpec::read(library_path)?;
    let store = store.open()?;
    let points = spec.points()?;
    let bar = progress_bar("library");
    bar.set_length(points.len() as u64);
    let summary = library::build(&store, &points, |_, _| bar.inc(1))?;
    bar.finish_and_clear();
    if summary.built > 0 {
        eprintln!(
            "library: built {} maps, {} already in {}",
            summary.built,
            summary.skipped,
            store.root().display()
        );
    }
    maps_of_spec(&store, &spec)
}

/// Runs `causeway search`.
pub fn run(args: SearchArgs) -> Result<()> {
    args.threads.install()?;
    args.check_outputs()?;
    let rule = args.rule()?;
    let physical = args
        .physical
        .any()
        .then(|| args.physical.input())
        .transpose()?;
    let data = args.data_sets()?;
    let single = fit_single_lens(&data)?;
    eprintln!(
        "single lens: t0 = {:.4}, u0 = {:.5}, tE = {:.3} d, chi2 = {:.1} for {} points",
        single.t0, single.u0, single.te, single.chi2, single.points
    );
    let maps = library_maps(&args.library, &args.store)?;
    let seed = Seed::of_data(&single, &data);
    if let Some(t) = seed.anomaly {
        eprintln!(
            "largest departure from the single lens at t = {t:.3}; without it: t0 = {:.4}, \
             u0 = {:.5}, tE = {:.3} d (the search's seed)",
            seed.t0, seed.u0, seed.te
        );
    }
    let (lo, hi) = seed.u0_range(rule.u0_misfit);
    eprintln!(
        "u0 the single lens cannot rule out (its valley within {} of its misfit {:.1}): {lo:.5} to {hi:.5}",
        rule.u0_misfit, seed.misfit
    );
    let bar = progress_bar("search");
    bar.set_length(maps.len() as u64);
    let started = std::time::Instant::now();
    let outcomes = search(&data, &seed, &maps, &rule, &|| bar.inc(1))?;
    bar.finish_and_clear();
    let seconds = started.elapsed().as_secs_f64();
    let trajectories: u64 = outcomes.iter().map(|o| o.trajectories).sum();
    let points: u64 = outcomes.iter().map(|o| o.points).sum();
    let mut notes: Vec<&String> = outcomes.iter().flat_map(|o| &o.notes).collect();
    notes.dedup();
    for note in notes.iter().take(5) {
        eprintln!("note: {note}");
    }
    eprintln!(
        "search: {} maps, {trajectories} trajectories, {points} light-curve points in {seconds:.1} s \
         ({:.0} trajectories/s, {:.2e} points/s)",
        maps.len(),
        trajectories as f64 / seconds,
        points as f64 / seconds
    );
    let options = RefineOptions {
        candidates: args.refine,
        tol: args.tol,
        max_iters: args.max_iters,
    };
    let bar = progress_bar("refine");
    bar.set_length(options.candidates.min(maps.len()) as u64);
    let minima = refine_minima(&data, &outcomes, &options, &|| bar.inc(1))?;
    bar.finish_and_clear();
    let best = &minima[0];
    let report = Report {
        data: &data,
        single: &single,
        minima: &minima,
        error_scales: error_scales(&data, &best.refined.fluxes),
        rescaled: args.rescale,
        physical,
    };
    let csv = report.csv()?;
    // Everything is computed before anything is written.
    let curve = match &args.plot {
        Some(_) => {
            let (t0, t1) = data.iter().fold((f64::MAX, f64::MIN), |a, d| {
                (a.0.min(d.times[0]), a.1.max(d.times[d.len() - 1]))
            });
            let n = 3000;
            let times: Vec<f64> = (0..n)
                .map(|k| t0 + (t1 - t0) * k as f64 / (n - 1) as f64)
                .collect();
            let model = &best.refined.model;
            let a = model.magnifications(&times, data[0].limb_darkening, args.tol)?;
            let at_data = data
                .iter()
                .map(|d| model.magnifications(&d.times, d.limb_darkening, args.tol))
                .collect::<Result<Vec<_>>>()?;
            Some((times, a, at_data))
        }
        None => None,
    };
    if let Some(png) = &args.chi2_map {
        chi2_map_png(&outcomes, &minima, png)?;
        eprintln!("wrote {}", png.display());
    }
    if let (Some(png), Some((times, a, at_data))) = (&args.plot, &curve) {
        model_png(&data, &single, best, (times, a), at_data, png)?;
        eprintln!("wrote {}", png.display());
    }
    eprint!("{}", report.summary());
    match &args.out {
        Some(path) => {
            write_atomic(path, csv.as_bytes())?;
            eprintln!("wrote {}", path.display());
        }
        None => print!("{csv}"),
    }
    Ok(())
}
