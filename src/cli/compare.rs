//! `causeway compare`: a light curve read from a map against contour integration at the same
//! points, with error statistics and an optional picture.

use super::curve::{distances, recomputed, sample_reported, SourceArgs, TrajectoryArgs};
use super::map::default_memory_limit;
use super::progress::Reporter;
use super::ThreadArgs;
use crate::contour::{self, Estimate};
use crate::curve::{Sample, Sampler};
use crate::error::{Error, Result};
use crate::fsutil::{check_outputs, Output};
use crate::map::read_refined;
use crate::plot::{write_stacked_png, Axis, Chart, Series, Style};
use crate::progress::Progress;
use crate::table::fmt_f64;
use clap::Args;
use num_complex::Complex64;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Default relative tolerance of the contour integration: ten times tighter than the `contour`
/// command's, so that the contour column is the reference.
pub const DEFAULT_COMPARE_TOL: f64 = 1e-5;

/// Options of `causeway compare`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Examples:\n  \
        causeway compare --map planet.fits --t0 0 --u0 0.05 --te 30 --alpha 40 --time-range -20,20,401 --rho 0.002\n  \
        causeway compare --map planet.fits --path path.csv --rho 0.003 --ld 0.6 --png check.png\n\n\
        The lens is the one recorded in the map's header. The CSV on stdout has t (when times \
        exist), x, y, map (the curve read from the map, as `causeway curve` makes it, to \
        --curve-tol), error (its estimated absolute error), contour (contour integration to \
        --tol), contour_error (its estimated absolute error), relative_error = |map/contour - 1| \
        and method (how the map value was made, as in `curve`). One summary line on stderr \
        gives the median, 99th percentile (linear interpolation between order statistics) and \
        largest relative error, where the largest is, how many map values were recomputed by \
        contour integration and how many lie outside their stated error (|map - contour| > \
        error + contour_error). --png draws one image of two stacked charts: both curves on \
        top, map/contour - 1 below."
)]
pub struct CompareArgs {
    /// Magnification map (FITS) to read; the lens comes from its header.
    #[arg(long, value_name = "FILE.fits")]
    pub map: PathBuf,
    #[command(flatten)]
    pub trajectory: TrajectoryArgs,
    #[command(flatten)]
    pub source: SourceArgs,
    /// Relative tolerance of the contour integration.
    #[arg(long, default_value_t = DEFAULT_COMPARE_TOL, value_name = "T")]
    pub tol: f64,
    /// Relative tolerance of the map curve (`curve`'s --tol): values whose error estimate
    /// exceeds it are recomputed by contour integration (method contour).
    #[arg(long, default_value_t = Sampler::DEFAULT_TOL, value_name = "T")]
    pub curve_tol: f64,
    /// Also draw both curves and their residual (one PNG, two charts stacked).
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<PathBuf>,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// One point of a comparison.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pair {
    /// The map-based sample.
    pub map: Sample,
    /// The contour-integration estimate at the same centre.
    pub contour: Estimate,
}

impl Pair {
    /// `|map / contour - 1|`.
    ///
    /// ```
    /// use causeway::cli::compare::Pair;
    /// use causeway::contour::{Estimate, Method};
    /// use causeway::curve::{self, Sample};
    /// let pair = Pair {
    ///     map: Sample {
    ///         x: 0.1, y: 0.0, magnification: 10.1, error: 0.2, method: curve::Method::Direct,
    ///     },
    ///     contour: Estimate { magnification: 10.0, error: 1e-5, method: Method::Contour },
    /// };
    /// assert!((pair.relative_error() - 0.01).abs() < 1e-12);
    /// ```
    pub fn relative_error(&self) -> f64 {
        (self.map.magnification / self.contour.magnification - 1.0).abs()
    }

    /// Whether the map value lies outside its stated error: `|map - contour|` beyond the sum
    /// of both estimates.
    pub fn outside(&self) -> bool {
        (self.map.magnification - self.contour.magnification).abs()
            > self.map.error + self.contour.error
    }
}

/// Order statistics of the relative errors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Summary {
    /// Median.
    pub median: f64,
    /// 99th percentile.
    pub p99: f64,
    /// Largest.
    pub max: f64,
    /// Index (from 0) of the largest (the first, on ties).
    pub argmax: usize,
}

impl Summary {
    /// Statistics of `errors` (not empty, no NaN); percentiles interpolate linearly between
    /// order statistics at rank `p (n - 1)` (numpy's default rule).
    ///
    /// ```
    /// use causeway::cli::compare::Summary;
    /// let s = Summary::of(&[0.3, 0.1, 0.2, 0.4]).unwrap();
    /// assert_eq!((s.median, s.max, s.argmax), (0.25, 0.4, 3));
    /// assert!((s.p99 - 0.397).abs() < 1e-12);
    /// ```
    pub fn of(errors: &[f64]) -> Result<Self> {
        if errors.is_empty() || errors.iter().any(|e| e.is_nan()) {
            return Err(Error::Numerical(
                "compare: no relative errors to summarise (empty or NaN)".into(),
            ));
        }
        let mut sorted = errors.to_vec();
        sorted.sort_by(f64::total_cmp);
        let quantile = |p: f64| {
            let rank = p * (sorted.len() - 1) as f64;
            let (lo, frac) = (rank.floor() as usize, rank.fract());
            let hi = (lo + 1).min(sorted.len() - 1);
            sorted[lo] + frac * (sorted[hi] - sorted[lo])
        };
        let argmax = errors
            .iter()
            .enumerate()
            .fold(0, |best, (k, &e)| if e > errors[best] { k } else { best });
        Ok(Summary {
            median: quantile(0.5),
            p99: quantile(0.99),
            max: errors[argmax],
            argmax,
        })
    }

    /// The one-line report: statistics, where the largest error is (`t` when there are
    /// times, else the point's index from 1), how many map values were recomputed by contour
    /// integration and how many lie outside their stated error (see [`Pair::outside`]).
    pub fn line(&self, times: Option<&[f64]>, pairs: &[Pair]) -> String {
        let at = &pairs[self.argmax].map;
        let place = match times {
            Some(t) => format!("t = {}", fmt_f64(t[self.argmax])),
            None => format!("point {}", self.argmax + 1),
        };
        let samples: Vec<Sample> = pairs.iter().map(|p| p.map).collect();
        format!(
            "relative error map vs contour: median {:.3e}, 99th percentile {:.3e}, largest \
             {:.3e} at {place} (x = {}, y = {}); {} of {} recomputed by contour integration, \
             {} outside their stated error",
            self.median,
            self.p99,
            self.max,
            fmt_f64(at.x),
            fmt_f64(at.y),
            recomputed(&samples),
            pairs.len(),
            pairs.iter().filter(|p| p.outside()).count()
        )
    }
}

/// Runs `causeway compare`.
pub fn run(args: CompareArgs) -> Result<()> {
    let png = args.png.as_deref().map(|p| Output::png("--png", p));
    check_outputs(png.as_slice())?;
    args.threads.install()?;
    let profile = args.source.profile()?;
    let path = args.trajectory.path()?;
    let map = read_refined(&args.map)?;
    let lens = map.base.provenance.lens.clone();
    // Checks the tolerances and the lens before the long work.
    contour::ContourSolver::new(&lens, args.tol)?;
    if !(args.curve_tol > 0.0 && args.curve_tol <= 0.1) {
        return Err(Error::input(format!(
            "--curve-tol: must be a relative tolerance in (0, 0.1], got {}",
            args.curve_tol
        )));
    }
    let sampler = Sampler::new(profile)
        .tol(args.curve_tol)
        .memory_limit(default_memory_limit());
    let curve = sample_reported(sampler, Some(&map), &lens, &path.points)?;
    let centers: Vec<Complex64> = path
        .points
        .iter()
        .map(|&(x, y)| Complex64::new(x, y))
        .collect();
    let estimates = contour_reported(&lens, &centers, &profile, args.tol)?;
    let pairs: Vec<Pair> = curve
        .samples
        .iter()
        .zip(&estimates)
        .map(|(&map, &contour)| Pair { map, contour })
        .collect();
    let errors: Vec<f64> = pairs.iter().map(Pair::relative_error).collect();
    let summary = Summary::of(&errors)?;
    let times = path.times.as_deref();
    let csv = format_csv(times, &pairs);
    if let Some(png) = &args.png {
        let (abscissa, label) = match times {
            Some(t) => (t.to_vec(), "t (days)"),
            None => (
                distances(&path.points),
                "distance along the path (Einstein radii)",
            ),
        };
        plot_png(&pairs, &abscissa, label, png)?;
        eprintln!("wrote {}", png.display());
    }
    eprintln!("{}", summary.line(times, &pairs));
    print!("{csv}");
    Ok(())
}

/// Contour magnifications of every centre, in blocks whose progress the reporter shows. The
/// block is a multiple of the solver's own parallel chunk (16), so the results are the same
/// bits as one call.
fn contour_reported(
    lens: &crate::lens::LensSystem,
    centers: &[Complex64],
    profile: &crate::source::SourceProfile,
    tol: f64,
) -> Result<Vec<Estimate>> {
    const BLOCK: usize = 1024;
    let reporter = Reporter::new().without_start_lines();
    reporter.start("contour", centers.len() as u64);
    let mut out = Vec::with_capacity(centers.len());
    for block in centers.chunks(BLOCK) {
        out.extend(contour::magnifications(lens, block, profile, tol)?);
        reporter.advance(block.len() as u64);
    }
    reporter.finish(""); // the command's closing line is its error summary
    Ok(out)
}

/// The output table: `t` when there are times, then
/// `x,y,map,error,contour,contour_error,relative_error,method`.
///
/// ```
/// use causeway::cli::compare::{format_csv, Pair};
/// use causeway::contour::{Estimate, Method};
/// use causeway::curve::{self, Sample};
/// let pair = Pair {
///     map: Sample { x: 0.5, y: 0.0, magnification: 2.5, error: 0.5, method: curve::Method::Direct },
///     contour: Estimate { magnification: 2.0, error: 0.001, method: Method::Contour },
/// };
/// assert_eq!(
///     format_csv(Some(&[3.0]), &[pair]),
///     "t,x,y,map,error,contour,contour_error,relative_error,method\n\
///      3,0.5,0,2.5,0.5,2,0.001,0.25,direct\n"
/// );
/// ```
pub fn format_csv(times: Option<&[f64]>, pairs: &[Pair]) -> String {
    let mut out = String::new();
    if times.is_some() {
        out.push_str("t,");
    }
    out.push_str("x,y,map,error,contour,contour_error,relative_error,method\n");
    for (k, p) in pairs.iter().enumerate() {
        if let Some(t) = times {
            let _ = write!(out, "{},", fmt_f64(t[k]));
        }
        let _ = writeln!(
            out,
            "{},{},{},{},{},{},{},{}",
            fmt_f64(p.map.x),
            fmt_f64(p.map.y),
            fmt_f64(p.map.magnification),
            fmt_f64(p.map.error),
            fmt_f64(p.contour.magnification),
            fmt_f64(p.contour.error),
            fmt_f64(p.relative_error()),
            p.map.method.name()
        );
    }
    out
}

/// Draws both curves against `abscissa` (top chart) and `map/contour - 1` (bottom chart) into
/// one PNG at `path`, written atomically.
pub fn plot_png(pairs: &[Pair], abscissa: &[f64], x_label: &str, path: &Path) -> Result<()> {
    if pairs.is_empty() || pairs.len() != abscissa.len() {
        return Err(Error::input("--png: nothing to plot"));
    }
    let along = |f: &dyn Fn(&Pair) -> f64| -> Vec<(f64, f64)> {
        abscissa
            .iter()
            .zip(pairs)
            .map(|(&t, p)| (t, f(p)))
            .collect()
    };
    let mut curves = Chart::new(
        "map against contour integration",
        Axis::linear(x_label),
        Axis::linear("magnification"),
    );
    curves.add(Series::line(
        "contour integration",
        along(&|p| p.contour.magnification),
    ));
    curves.add(Series::line("map", along(&|p| p.map.magnification)).styled(Style::Markers));
    let mut residual = Chart::new(
        "residual",
        Axis::linear(x_label),
        Axis::linear("map / contour - 1"),
    );
    residual.add(
        Series::line(
            "map / contour - 1",
            along(&|p| p.map.magnification / p.contour.magnification - 1.0),
        )
        .styled(Style::LineMarkers),
    );
    write_stacked_png(&[curves, residual], path)
}
