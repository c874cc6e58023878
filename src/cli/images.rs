//! `causeway images`: point-source images and magnifications of listed source positions.

use super::{LensArgs, ThreadArgs};
use crate::error::{Error, Result};
use crate::solve::{self, ImageSolver};
use crate::table::fmt_f64;
use clap::Args;
use num_complex::Complex64;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Options of `causeway images`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Output (stdout, CSV):\n  \
        default: x,y,magnification,images - one row per source, in input order;\n  \
        --all:   point,x,y,image_x,image_y,parity,magnification - one row per image, where \
        point is the source's 1-based row number, parity is +1 or -1 (sign of det J) and \
        magnification is that image's 1/|det J|.\n\n\
        Exact point-source solution for up to 4 point lenses (polynomial of degree N^2+1); an \
        image is kept when the lens equation holds to 1e-10 (1 + |zeta|).\n\n\
        Examples:\n  \
        causeway images --s 1.2 --q 1e-3 --points sources.csv\n  \
        causeway images --lenses triple.csv --points sources.csv --all"
)]
pub struct ImagesArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    /// Source positions: CSV with header x,y (Einstein radii).
    #[arg(long, value_name = "FILE")]
    pub points: PathBuf,
    /// List every image (position, parity, magnification) instead of one row per source.
    #[arg(long)]
    pub all: bool,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

/// Runs `causeway images`.
pub fn run(args: ImagesArgs) -> Result<()> {
    let lens = args.lens.lens_system()?;
    // Refuses more than four lenses before reading anything else.
    ImageSolver::new(&lens)?;
    let table = super::read_points(&args.points)?;
    args.threads.install()?;
    let sources: Vec<Complex64> = table
        .rows
        .iter()
        .map(|r| Complex64::new(r[0], r[1]))
        .collect();
    let images = solve::images_batch(&lens, &sources)?;
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    write_table(&mut out, &sources, &images, args.all)
        .and_then(|()| out.flush())
        .map_err(|e| Error::io(Path::new("<stdout>"), e))
}

/// The CSV text of `causeway images` (see its help for the columns).
pub fn write_table(
    out: &mut impl Write,
    sources: &[Complex64],
    images: &[Vec<solve::Image>],
    all: bool,
) -> std::io::Result<()> {
    if all {
        writeln!(out, "point,x,y,image_x,image_y,parity,magnification")?;
        for (k, (z, imgs)) in sources.iter().zip(images).enumerate() {
            for im in imgs {
                writeln!(
                    out,
                    "{},{},{},{},{},{},{}",
                    k + 1,
                    fmt_f64(z.re),
                    fmt_f64(z.im),
                    fmt_f64(im.position.re),
                    fmt_f64(im.position.im),
                    im.parity,
                    fmt_f64(im.magnification)
                )?;
            }
        }
    } else {
        writeln!(out, "x,y,magnification,images")?;
        for (z, imgs) in sources.iter().zip(images) {
            let a: f64 = imgs.iter().map(|i| i.magnification).sum();
            writeln!(
                out,
                "{},{},{},{}",
                fmt_f64(z.re),
                fmt_f64(z.im),
                fmt_f64(a),
                imgs.len()
            )?;
        }
    }
    Ok(())
}
