//! `causeway contour`: finite-source magnifications by contour integration at listed points.

use super::{parse_pair, LensArgs, ThreadArgs};
use crate::contour::{self, DEFAULT_TOLERANCE};
use crate::error::Result;
use crate::source::{LimbDarkening, SourceProfile};
use crate::table::fmt_f64;
use clap::Args;
use num_complex::Complex64;
use std::io::Write;
use std::path::PathBuf;

/// Options of `causeway contour`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Prints CSV x,y,magnification,error,method (error: estimated absolute error of the \
        magnification; method: point (rho = 0), far-point (far from the caustics: the point source \
        stands in), quadrupole (nearer: the point source and its quadrupole term), small-source or \
        contour).\n\nExamples:\n  \
        causeway contour --s 1.2 --q 1e-3 --points sources.csv --rho 0.01\n  \
        causeway contour --s 1 --q 1 --points sources.csv --rho 0.05 --ld 0.6 --tol 1e-6"
)]
pub struct ContourArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    /// CSV file with header x,y: the source centres.
    #[arg(long, value_name = "FILE")]
    pub points: PathBuf,
    /// Source radius in Einstein radii (0: point source).
    #[arg(long, value_name = "RHO", allow_hyphen_values = true)]
    pub rho: f64,
    /// Linear limb-darkening coefficient u in [0, 1].
    #[arg(
        long,
        value_name = "U",
        allow_hyphen_values = true,
        conflicts_with = "ld_sqrt"
    )]
    pub ld: Option<f64>,
    /// Square-root limb-darkening coefficients c,d in [0, 1].
    #[arg(long, value_name = "C,D", value_parser = parse_pair, allow_hyphen_values = true)]
    pub ld_sqrt: Option<(f64, f64)>,
    /// Relative tolerance on each magnification.
    #[arg(long, value_name = "T", default_value_t = DEFAULT_TOLERANCE, allow_hyphen_values = true)]
    pub tol: f64,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Runs `causeway contour`.
pub fn run(args: ContourArgs) -> Result<()> {
    let law = match (args.ld, args.ld_sqrt) {
        (Some(u), _) => LimbDarkening::Linear { u },
        (None, Some((c, d))) => LimbDarkening::SquareRoot { c, d },
        (None, None) => LimbDarkening::Uniform,
    };
    super::curve::check_rho(args.rho)?;
    let source = SourceProfile::new(args.rho, law)?;
    let lens = args.lens.lens_system()?;
    // Checks the tolerance and the lens before reading anything else.
    contour::ContourSolver::new(&lens, args.tol)?;
    let table = super::read_points(&args.points)?;
    args.threads.install()?;
    let centers: Vec<Complex64> = table
        .rows
        .iter()
        .map(|r| Complex64::new(r[0], r[1]))
        .collect();
    let estimates = contour::magnifications(&lens, &centers, &source, args.tol)?;
    let mut out = String::from("x,y,magnification,error,method\n");
    for (row, est) in table.rows.iter().zip(&estimates) {
        let method = match est.method {
            contour::Method::PointSource => "point",
            contour::Method::FarPoint => "far-point",
            contour::Method::SmallSource => "small-source",
            contour::Method::Quadrupole => "quadrupole",
            contour::Method::Contour => "contour",
        };
        out.push_str(&format!(
            "{},{},{},{},{method}\n",
            fmt_f64(row[0]),
            fmt_f64(row[1]),
            fmt_f64(est.magnification),
            fmt_f64(est.error)
        ));
    }
    std::io::stdout()
        .lock()
        .write_all(out.as_bytes())
        .map_err(|e| crate::error::Error::io(std::path::Path::new("<stdout>"), e))
}
