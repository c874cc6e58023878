//! `causeway caustics`: critical curves and caustics as CSV, and a picture.

use super::LensArgs;
use crate::caustics::{self, CausticOptions, Curve};
use crate::error::{Error, Result};
use crate::fsutil::{check_outputs, write_atomic, Output};
use crate::lens::LensSystem;
use crate::plot::{Axis, Chart, Series, Style};
use crate::table::fmt_f64;
use clap::Args;
use std::fmt::Write as _;
use std::path::PathBuf;

/// Options of `causeway caustics`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Output CSV columns: curve,x,y,kind - curve numbers the closed curves from 1 \
        (critical curve k maps onto caustic k), kind is 'caustic' (source plane) or 'critical' \
        (lens plane); the points of each curve in order, the last repeating the first. For a \
        binary the topology (close, intermediate, wide) is printed on stderr.\n\n\
        The PNG shows the caustics (red) and critical curves (blue) on the same equal-scale \
        axes, lenses as black markers.\n\n\
        Examples:\n  \
        causeway caustics --s 1.0 --q 1 --out c.csv --png c.png\n  \
        causeway caustics --lenses triple.csv --out triple-caustics.csv"
)]
pub struct CausticsArgs {
    #[command(flatten)]
    pub lens: LensArgs,
    /// Output CSV file (curve,x,y,kind).
    #[arg(long, value_name = "FILE.csv")]
    pub out: PathBuf,
    /// Also draw a PNG picture.
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<PathBuf>,
    /// Longest chord between samples, as a fraction of its curve's size.
    #[arg(long, default_value_t = 0.01, value_name = "F")]
    pub max_chord: f64,
}

/// Runs `causeway caustics`.
pub fn run(args: CausticsArgs) -> Result<()> {
    let mut outputs = vec![Output {
        what: "--out",
        path: &args.out,
        extension: None,
    }];
    outputs.extend(args.png.as_deref().map(|p| Output::png("--png", p)));
    check_outputs(&outputs)?;
    let lens = args.lens.lens_system()?;
    if !(args.max_chord > 0.0 && args.max_chord <= 0.5) {
        return Err(Error::input(format!(
            "--max-chord: must be in (0, 0.5], got {}",
            args.max_chord
        )));
    }
    let opts = CausticOptions {
        max_chord: args.max_chord,
        ..CausticOptions::default()
    };
    let curves = caustics::critical_curves(&lens, &opts)?;
    let points: usize = curves.iter().map(|c| c.caustic.len()).sum();
    let mut summary = format!("{} closed curves, {points} points each kind", curves.len());
    if lens.len() == 2 {
        if let Ok(t) = caustics::topology_of(&curves) {
            summary.push_str(&format!("; topology: {t}"));
        }
    }
    eprintln!("{lens}: {summary}");
    write_atomic(&args.out, csv_text(&curves).as_bytes())?;
    eprintln!("wrote {}", args.out.display());
    if let Some(path) = &args.png {
        picture(&lens, &curves).write_png(path)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

/// The CSV text: caustic points, then critical points, curve by curve.
pub fn csv_text(curves: &[Curve]) -> String {
    let mut s = String::from("curve,x,y,kind\n");
    for (k, c) in curves.iter().enumerate() {
        for (kind, pts) in [("caustic", &c.caustic), ("critical", &c.critical)] {
            for z in pts {
                let _ = writeln!(s, "{},{},{},{kind}", k + 1, fmt_f64(z.re), fmt_f64(z.im));
            }
        }
    }
    s
}

/// Caustics (sea green) and critical curves (amber) on common, equal-scale axes, lenses as black
/// markers, through the shared chart module.
pub fn picture(lens: &LensSystem, curves: &[Curve]) -> Chart {
    // One series per kind: curves joined with a non-finite point between them (a line break).
    let joined = |pick: fn(&Curve) -> &Vec<num_complex::Complex64>| -> Vec<(f64, f64)> {
        let mut pts = Vec::new();
        for c in curves {
            if !pts.is_empty() {
                pts.push((f64::NAN, f64::NAN));
            }
            pts.extend(pick(c).iter().map(|z| (z.re, z.im)));
        }
        pts
    };
    let mut chart = Chart::new(
        &format!("{lens}: caustics and critical curves"),
        Axis::linear("x (Einstein radii)"),
        Axis::linear("y (Einstein radii)"),
    );
    chart.equal_aspect = true;
    chart
        .add(Series::line("critical curves", joined(|c| &c.critical)).coloured(CRITICAL))
        .add(Series::line("caustics", joined(|c| &c.caustic)).coloured(CAUSTIC))
        .add(
            Series::line(
                "lenses",
                lens.lenses()
                    .iter()
                    .map(|l| (l.position.re, l.position.im))
                    .collect(),
            )
            .styled(Style::Markers)
            .coloured(INK),
        );
    chart
}

const CAUSTIC: [u8; 3] = [0, 150, 130];
const CRITICAL: [u8; 3] = [215, 125, 0];
const INK: [u8; 3] = [0, 0, 0];
