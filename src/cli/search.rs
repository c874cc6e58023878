//! `causeway search`: fit photometry with binary-lens models from a map library.

use super::library::StoreArgs;
use super::motion::FitMotionArgs;
use super::physical::PhysicalArgs;
use super::progress::Reporter;
use super::{NumberList, ThreadArgs};
use crate::error::{Error, Result};
use crate::fit::bins::SEARCH_POINTS;
use crate::fit::event::{fit_event, FitOptions, FitResult, DEFAULT_CLIP_SIGMA, DEFAULT_TIME_LIMIT};
use crate::fit::minima::RefineOptions;
use crate::fit::noise::Clipped;
use crate::fit::photometry::{DataSet, DEFAULT_ZERO_POINT};
use crate::fit::plots::{chi2_map_png, model_png};
use crate::fit::report::Report;
use crate::fit::scales::PhysicalInput;
use crate::fit::search::{maps_of_spec, maps_of_store, GridRule, LibraryMap, MapSource};
use crate::fit::zoom::ZoomOptions;
use crate::fsutil::{check_outputs, write_atomic, Output};
use crate::progress::Progress;
use crate::source::LimbDarkening;
use crate::store::library::{self, LibrarySpec};
use crate::store::Store;
use crate::table::fmt_f64;
use clap::Args;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Options of `causeway search`.
#[derive(Debug, Args)]
#[command(
    after_help = "Fits every data set (CSV t,mag,mag_err or t,flux,flux_err; times in days, any \
    epoch such as JD - 2450000) with a single lens first (bounded, the anomaly found and left \
    out), then searches each map of the library over trajectories timed (t0 and tE taken) from that baseline and \
    from the anomaly (the grid rule is in the documentation of causeway::fit::search), refines \
    the best (s, q) local minima with exact magnifications, clips isolated outliers and rescales \
    each set's error bars, refines again, and prints the distinct minima as CSV (ranked by the \
    fit's chi2). --library takes a spec (TOML; its missing maps are built into the store first) \
    or a store directory (all its binary maps). Progress goes to stderr: bars on a terminal, a \
    plain line every 5 s in a batch log. The refinement's passes stop --time-limit seconds \
    after the start (default 780: with the search and zoom of a broad library, a fit ends \
    within a quarter of an hour on two cores) and report where they stood.\n\nExamples:\n  \
    causeway search site-a.csv site-b.csv --library planets.toml --ld 0.55,0.62 --out minima.csv --chi2-map chi2.png --plot best.png\n  \
    causeway search event.csv --library /shared/maps --rho 0.001,0.002 --refine 6 --exclude 8205.1,8206.3\n  \
    causeway search event.csv --library planets.toml --baseline 8210.5,0.12,31 --budget 120\n  \
    causeway search event.csv --library broad.toml --time-limit 0   # refine for as long as it takes\n  \
    causeway search event.csv --library planets.toml --theta-star 0.6 --dl 4 --ds 8\n  \
    causeway search ground.csv space.csv --library planets.toml --ra 17:55:00 --dec -29:30:00 --ephemeris 2=space-orbit.csv\n\n\
    With --ra/--dec each of the best static minima is refined again with parallax (both signs \
    of u0: the ecliptic pair) and then with lens orbital motion; each is a row of the table \
    (model parallax or parallax+orbit) with its pi_E, rates and delta_chi2_static."
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
    /// Magnitude of unit flux in the data files (mag).
    #[arg(long, value_name = "ZP", default_value_t = DEFAULT_ZERO_POINT, allow_hyphen_values = true)]
    pub zero_point: f64,
    /// Hide the times START to END (days) from the single-lens baseline; repeatable.
    #[arg(long, value_name = "START,END", value_parser = super::parse_pair, allow_hyphen_values = true)]
    pub exclude: Vec<(f64, f64)>,
    /// Use this single-lens baseline (t0 in days, u0, tE in days) instead of fitting one.
    #[arg(
        long,
        value_name = "T0,U0,TE",
        value_delimiter = ',',
        num_args = 1,
        allow_hyphen_values = true
    )]
    pub baseline: Vec<f64>,
    /// Clip isolated points beyond this many robust standard deviations at the best model
    /// (0: keep every point).
    #[arg(long, value_name = "SIGMA", default_value_t = DEFAULT_CLIP_SIGMA, allow_hyphen_values = true)]
    pub clip: f64,
    /// Keep the error bars as given (by default each set's are scaled to chi2/dof = 1 at the
    /// best model and the minima refined again).
    #[arg(long)]
    pub fixed_errors: bool,
    /// Trial source radii (Einstein radii).
    #[arg(long, value_name = "RHO[,RHO...]", value_parser = NumberList::parse, allow_hyphen_values = true, default_value_t = NumberList(GridRule::default().rhos))]
    pub rho: NumberList,
    /// Half-range of u0 around the baseline's value, relative to it.
    #[arg(long, value_name = "F", default_value_t = GridRule::default().u0_span, allow_hyphen_values = true)]
    pub u0_span: f64,
    /// Least half-range of u0 (Einstein radii).
    #[arg(long, value_name = "U", default_value_t = GridRule::default().u0_floor, allow_hyphen_values = true)]
    pub u0_floor: f64,
    /// Widen u0 to where the single lens's valley (its best fit at fixed u0) rises by this
    /// fraction of its misfit (chi2 - dof; what it leaves unexplained).
    #[arg(long, value_name = "F", default_value_t = GridRule::default().u0_misfit, allow_hyphen_values = true)]
    pub u0_misfit: f64,
    /// Factors on the baseline's tE (default 1, or 0.5 to 2 when the baseline is not trusted).
    #[arg(long, value_name = "F[,F...]", value_parser = NumberList::parse, allow_hyphen_values = true, default_value_t = NumberList(GridRule::default().te_factors))]
    pub te_factors: NumberList,
    /// Shifts of t0 from the baseline's value, in units of tE (default 0, or -0.2 to 0.2 when
    /// the baseline is not trusted).
    #[arg(long, value_name = "K[,K...]", value_parser = NumberList::parse, allow_hyphen_values = true, default_value_t = NumberList(GridRule::default().t0_shifts))]
    pub t0_shifts: NumberList,
    /// Keep the timings as given: no anchoring on the anomaly or on the data's caustic
    /// crossings, no widening when the baseline is not trusted.
    #[arg(long)]
    pub fixed_timing: bool,
    /// Most trajectories tried on one map (the lines are spaced more widely beyond it).
    #[arg(long, value_name = "N", default_value_t = GridRule::default().max_trajectories, allow_hyphen_values = true)]
    pub max_trajectories: usize,
    /// Where the lines are spaced for a source larger than every --rho (wide windows, or the
    /// budget above), the best N lines of each finer level (spread over the window) are
    /// surrounded by lines at half its spacing, down to 2.5 times the smallest --rho (0: no
    /// finer levels).
    #[arg(long, value_name = "N", default_value_t = GridRule::default().beam)]
    pub beam: usize,
    /// The search's model error, a fraction of each point's flux above its set's tenth
    /// percentile added to its error bar in quadrature (0 = none; the refinement never uses it).
    #[arg(long, value_name = "FRACTION", default_value_t = GridRule::default().model_floor, allow_hyphen_values = true)]
    pub model_floor: f64,
    /// Where one point's share of the search's chi2 turns from its squared residual r^2 to
    /// cap (1 + ln(r^2 / cap)), in chi2 units (25 is five sigma; inf: never); with a cap the
    /// refinement also starts from the end of a pass on the same capped chi2.
    #[arg(long, value_name = "CHI2", default_value_t = GridRule::default().point_cap, allow_hyphen_values = true)]
    pub point_cap: f64,
    /// Distinct trajectories kept per map.
    #[arg(long, value_name = "N", default_value_t = GridRule::default().keep, allow_hyphen_values = true)]
    pub keep: usize,
    /// Halvings of the library's (s, q) step in the zoom around the best grid points (finer
    /// maps built in memory and searched before the refinement; 0: no zoom).
    #[arg(long, value_name = "N", default_value_t = ZoomOptions::default().levels, allow_hyphen_values = true)]
    pub zoom: usize,
    /// Grid points zoomed (the best local minima of the search).
    #[arg(long, value_name = "N", default_value_t = ZoomOptions::default().centres, allow_hyphen_values = true)]
    pub zoom_points: usize,
    /// Zoom only the local minima, not also the best grid point that is none when it ranks
    /// above the last of them.
    #[arg(long)]
    pub no_slope_zoom: bool,
    /// Local minima of the (s, q) grid to refine.
    #[arg(long, value_name = "N", default_value_t = RefineOptions::default().candidates, allow_hyphen_values = true)]
    pub refine: usize,
    /// Refine only the grid minima whose search chi2 is at most FACTOR times the best's, and
    /// carry on past the first Levenberg-Marquardt passes only those whose chi2 is then at most
    /// FACTOR times the best's (inf: all of them).
    #[arg(long, value_name = "FACTOR", default_value_t = RefineOptions::default().within, allow_hyphen_values = true)]
    pub refine_within: f64,
    /// Restarts per round from random perturbations of the best minimum once it converged, kept
    /// when one ends lower (up to 3 rounds; 0: none).
    #[arg(long, value_name = "N", default_value_t = RefineOptions::default().hops, allow_hyphen_values = true)]
    pub hops: usize,
    /// Relative tolerance of the exact magnifications in the refinement.
    #[arg(long, value_name = "T", default_value_t = RefineOptions::default().tol, allow_hyphen_values = true)]
    pub tol: f64,
    /// Iteration limit of each minimisation in the refinement.
    #[arg(long, value_name = "N", default_value_t = RefineOptions::default().max_iters, allow_hyphen_values = true)]
    pub max_iters: u64,
    /// Wall time allowed to each pass of refinements, seconds (0: no limit).
    #[arg(
        long,
        value_name = "SECONDS",
        default_value_t = 600.0,
        allow_hyphen_values = true
    )]
    pub budget: f64,
    /// Wall time from the start after which every refinement pass stops and returns what it
    /// has, seconds (0: no limit; the search and zoom are not cut).
    #[arg(
        long,
        value_name = "SECONDS",
        default_value_t = DEFAULT_TIME_LIMIT.as_secs_f64(),
        allow_hyphen_values = true
    )]
    pub time_limit: f64,
    /// The most points the search and zoom read: longer data are merged for them, flat
    /// stretches first (the refinement fits every point; 0: read every point).
    #[arg(long, value_name = "N", default_value_t = SEARCH_POINTS)]
    pub search_points: usize,
    /// Write the table of minima here instead of stdout.
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Write the clipped points here (CSV set,file,line,t,residual).
    #[arg(long, value_name = "FILE.csv")]
    pub clipped: Option<PathBuf>,
    /// Draw the chi2 map over (s, q).
    #[arg(long, value_name = "FILE.png")]
    pub chi2_map: Option<PathBuf>,
    /// Draw the best model over the data, with residuals.
    #[arg(long, value_name = "FILE.png")]
    pub plot: Option<PathBuf>,
    #[command(flatten)]
    pub physical: PhysicalArgs,
    #[command(flatten)]
    pub motion: FitMotionArgs,
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

    /// The options of the whole fit of `sets` data sets.
    pub fn options(&self, sets: usize) -> Result<FitOptions> {
        let rule = GridRule {
            rhos: self.rho.0.clone(),
            u0_span: self.u0_span,
            u0_floor: self.u0_floor,
            u0_misfit: self.u0_misfit,
            te_factors: self.te_factors.0.clone(),
            t0_shifts: self.t0_shifts.0.clone(),
            keep: self.keep,
            max_trajectories: self.max_trajectories,
            beam: self.beam,
            model_floor: self.model_floor,
            point_cap: self.point_cap,
            ..GridRule::default()
        };
        rule.validate()?;
        for (name, seconds) in [("--budget", self.budget), ("--time-limit", self.time_limit)] {
            if !(seconds.is_finite() && seconds >= 0.0) {
                return Err(Error::input(format!(
                    "{name}: must be >= 0 seconds, got {seconds}"
                )));
            }
        }
        if !(self.clip == 0.0 || (self.clip.is_finite() && self.clip >= 2.0)) {
            return Err(Error::input(format!(
                "--clip: must be 0 (off) or at least 2 sigma, got {}",
                self.clip
            )));
        }
        for &(a, b) in &self.exclude {
            if !(a.is_finite() && b.is_finite() && a < b) {
                return Err(Error::input(format!(
                    "--exclude: need START < END, both finite, got {a},{b}"
                )));
            }
        }
        let baseline = match self.baseline[..] {
            [] => None,
            [t0, u0, te]
                if t0.is_finite() && u0 > 0.0 && u0.is_finite() && te > 0.0 && te.is_finite() =>
            {
                Some((t0, u0, te))
            }
            _ => {
                return Err(Error::input(format!(
                    "--baseline: need T0,U0,TE with u0 > 0 and tE > 0, got {:?}",
                    self.baseline
                )))
            }
        };
        Ok(FitOptions {
            exclude: self.exclude.clone(),
            baseline,
            rule,
            adaptive_timing: !self.fixed_timing,
            zoom: Some(ZoomOptions {
                centres: self.zoom_points,
                levels: self.zoom,
                runner_up: !self.no_slope_zoom,
            }),
            refine: RefineOptions {
                candidates: self.refine,
                tol: self.tol,
                max_iters: self.max_iters,
                budget: (self.budget > 0.0).then(|| Duration::from_secs_f64(self.budget)),
                within: self.refine_within,
                hops: self.hops,
                ..RefineOptions::default()
            },
            clip_sigma: (self.clip > 0.0).then_some(self.clip),
            rescale_errors: !self.fixed_errors,
            motion: self.motion.options(sets, self.tol)?,
            time_limit: (self.time_limit > 0.0).then(|| Duration::from_secs_f64(self.time_limit)),
            search_points: (self.search_points > 0).then_some(self.search_points),
        })
    }

    /// Where the results go.
    pub fn outputs(&self) -> Outputs {
        Outputs {
            table: self.out.clone(),
            clipped: self.clipped.clone(),
            chi2_map: self.chi2_map.clone(),
            plot: self.plot.clone(),
        }
    }

    fn check(&self) -> Result<()> {
        self.outputs().check()?;
        RefineOptions {
            candidates: self.refine,
            within: self.refine_within,
            ..RefineOptions::default()
        }
        .validate()?;
        if !(self.tol.is_finite() && self.tol > 0.0 && self.tol <= 0.1) {
            return Err(Error::input(format!(
                "--tol: must be in (0, 0.1], got {}",
                self.tol
            )));
        }
        Ok(())
    }
}

/// The files a fit writes (each optional; the table goes to stdout without one).
#[derive(Debug, Clone, Default)]
pub struct Outputs {
    /// The table of minima (CSV).
    pub table: Option<PathBuf>,
    /// The clipped points (CSV).
    pub clipped: Option<PathBuf>,
    /// The chi2 map over (s, q) (PNG).
    pub chi2_map: Option<PathBuf>,
    /// The best model over the data (PNG).
    pub plot: Option<PathBuf>,
}

impl Outputs {
    /// Checks every output path before any work: its extension, and that its folder exists.
    pub fn check(&self) -> Result<()> {
        let outputs: Vec<Output> = [
            ("--out", &self.table, "csv"),
            ("--clipped", &self.clipped, "csv"),
            ("--chi2-map", &self.chi2_map, "png"),
            ("--plot", &self.plot, "png"),
        ]
        .into_iter()
        .filter_map(|(what, path, ext)| {
            Some(Output {
                what,
                path: path.as_deref()?,
                extension: Some(ext),
            })
        })
        .collect();
        check_outputs(&outputs)
    }

    /// Writes the results of a fit of `data` (as given), the parallax stage's models as rows
    /// of the table: everything is computed before the first file is written.
    pub fn write(
        &self,
        data: &[DataSet],
        fit: &FitResult,
        physical: Option<PhysicalInput>,
        tol: f64,
    ) -> Result<()> {
        let report = Report {
            motion: &fit.motion,
            data,
            single: &fit.single,
            minima: &fit.minima,
            error_scales: &fit.error_scales,
            clipped: (0..data.len())
                .map(|k| fit.clipped.iter().filter(|c| c.set == k).count())
                .collect(),
            physical,
        };
        let csv = report.csv()?;
        let clipped_csv = clipped_table(data, &fit.clipped);
        let best = &fit.minima[0];
        let curve = match &self.plot {
            Some(_) => {
                let (t0, t1) = data.iter().fold((f64::MAX, f64::MIN), |a, d| {
                    (a.0.min(d.times[0]), a.1.max(d.times[d.len() - 1]))
                });
                let times = crate::curve::time_range(t0, t1, 3000)?;
                let model = &best.refined.model;
                let a = model.magnifications(&times, fit.data[0].limb_darkening, tol)?;
                let at_data = fit
                    .data
                    .iter()
                    .map(|d| model.magnifications(&d.times, d.limb_darkening, tol))
                    .collect::<Result<Vec<_>>>()?;
                Some((times, a, at_data))
            }
            None => None,
        };
        if let Some(png) = &self.chi2_map {
            chi2_map_png(&fit.outcomes, &fit.minima, png)?;
            eprintln!("wrote {}", png.display());
        }
        if let (Some(png), Some((times, a, at_data))) = (&self.plot, &curve) {
            model_png(&fit.data, &fit.single, best, (times, a), at_data, png)?;
            eprintln!("wrote {}", png.display());
        }
        if let Some(path) = &self.clipped {
            write_atomic(path, clipped_csv.as_bytes())?;
            eprintln!("wrote {}", path.display());
        }
        eprint!("{}", report.summary());
        match &self.table {
            Some(path) => {
                write_atomic(path, csv.as_bytes())?;
                eprintln!("wrote {}", path.display());
            }
            None => print!("{csv}"),
        }
        Ok(())
    }
}

/// The clipped points as CSV `set,file,line,t,residual`; the first ten also go to stderr.
fn clipped_table(data: &[DataSet], clipped: &[Clipped]) -> String {
    let mut out = String::from("set,file,line,t,residual\n");
    for (i, c) in clipped.iter().enumerate() {
        let name = &data[c.set].name;
        if i < 10 {
            eprintln!(
                "clipped: {name}:{} (t = {}, {:+.1} sigma)",
                c.line, c.time, c.residual
            );
        } else if i == 10 {
            eprintln!("clipped: and {} more", clipped.len() - 10);
        }
        out += &format!(
            "{},{name},{},{},{}\n",
            c.set + 1,
            c.line,
            fmt_f64(c.time),
            fmt_f64(c.residual)
        );
    }
    out
}

/// The maps of `--library`: a store directory, or a spec whose missing maps are built first.
fn library_maps(
    library_path: &Path,
    store: &StoreArgs,
    progress: &dyn Progress,
) -> Result<Vec<LibraryMap>> {
    if library_path.is_dir() {
        return maps_of_store(&Store::open(library_path)?);
    }
    let spec = LibrarySpec::read(library_path)?;
    let store = store.create()?;
    let points = spec.points()?;
    progress.start("library", points.len() as u64);
    let summary = library::build(&store, &points, |_, _| progress.advance(1))?;
    progress.finish(&format!(
        "library: built {} maps, {} already in {}",
        summary.built,
        summary.skipped,
        store.root().display()
    ));
    maps_of_spec(&store, &spec)
}

/// Runs `causeway search`.
pub fn run(args: SearchArgs) -> Result<()> {
    args.threads.install()?;
    args.check()?;
    let physical = args
        .physical
        .any()
        .then(|| args.physical.input())
        .transpose()?;
    let data = args.data_sets()?;
    let options = args.options(data.len())?;
    let reporter = Reporter::new();
    let maps = library_maps(&args.library, &args.store, &reporter)?;
    let fit = fit_event(&data, MapSource::Files(&maps), &options, &reporter)?;
    drop(reporter);
    args.outputs()
        .write(&data, &fit, physical, options.refine.tol)
}
