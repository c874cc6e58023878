//! `causeway caustics`: critical curves and caustics as CSV, and a picture.

use super::LensArgs;
use crate::caustics::{self, CausticOptions, Curve};
use crate::error::{Error, Result};
use crate::fsutil::write_atomic;
use crate::lens::LensSystem;
use crate::map::render;
use crate::table::fmt_f64;
use clap::Args;
use image::{Rgb, RgbImage};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Options of `causeway caustics`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "Output CSV columns: curve,x,y,kind - curve numbers the closed curves from 1 \
        (critical curve k maps onto caustic k), kind is 'caustic' (source plane) or 'critical' \
        (lens plane); the points of each curve in order, the last repeating the first. For a \
        binary the topology (close, intermediate, wide) is printed on stderr.\n\n\
        The PNG shows the caustics (red) and critical curves (blue) on the same axes, lenses \
        as black crosses, on a frame with labelled ticks (Einstein radii).\n\n\
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
    let lens = args.lens.lens_system()?;
    if !(args.max_chord > 0.0 && args.max_chord <= 0.5) {
        return Err(Error::input(format!(
            "--max-chord: must be in (0, 0.5], got {}",
            args.max_chord
        )));
    }
    for path in std::iter::once(&args.out).chain(args.png.as_ref()) {
        check_parent(path)?;
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
    let png = args.png.as_ref().map(|_| picture(&lens, &curves));
    write_atomic(&args.out, csv_text(&curves).as_bytes())?;
    eprintln!("wrote {}", args.out.display());
    if let (Some(path), Some(img)) = (&args.png, png) {
        let mut bytes = Vec::new();
        img.write_to(
            &mut std::io::Cursor::new(&mut bytes),
            image::ImageFormat::Png,
        )
        .map_err(|e| Error::Numerical(format!("{}: PNG encoding: {e}", path.display())))?;
        write_atomic(path, &bytes)?;
        eprintln!("wrote {}", path.display());
    }
    Ok(())
}

/// An output path must be a file name in a directory that exists.
fn check_parent(path: &Path) -> Result<()> {
    let parent = path.parent().filter(|p| !p.as_os_str().is_empty());
    if let Some(dir) = parent {
        if !dir.is_dir() {
            return Err(Error::input(format!(
                "{}: directory {} does not exist",
                path.display(),
                dir.display()
            )));
        }
    }
    if path.file_name().is_none() {
        return Err(Error::input(format!("{}: not a file name", path.display())));
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

const SIZE: u32 = 800;
const MARGIN: f64 = 60.0;
const CAUSTIC: Rgb<u8> = Rgb([200, 20, 20]);
const CRITICAL: Rgb<u8> = Rgb([60, 90, 220]);
const INK: Rgb<u8> = Rgb([0, 0, 0]);

/// Caustics and critical curves on common, equal-scale axes, white background, framed with
/// tick marks at round steps, every other one longer and labelled (x below, y to the left).
pub fn picture(lens: &LensSystem, curves: &[Curve]) -> RgbImage {
    let mut img = RgbImage::from_pixel(SIZE, SIZE, Rgb([255, 255, 255]));
    let all = curves
        .iter()
        .flat_map(|c| c.caustic.iter().chain(&c.critical))
        .map(|z| (z.re, z.im))
        .chain(lens.lenses().iter().map(|l| (l.position.re, l.position.im)));
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for (x, y) in all {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    let span = (x1 - x0).max(y1 - y0).max(1e-12) * 1.08;
    let (cx, cy) = (0.5 * (x0 + x1), 0.5 * (y0 + y1));
    let scale = (SIZE as f64 - 2.0 * MARGIN) / span;
    let to_px = |x: f64, y: f64| {
        (
            SIZE as f64 / 2.0 + (x - cx) * scale,
            SIZE as f64 / 2.0 - (y - cy) * scale,
        )
    };
    for c in curves {
        for (pts, colour) in [(&c.critical, CRITICAL), (&c.caustic, CAUSTIC)] {
            for w in pts.windows(2) {
                line(
                    &mut img,
                    to_px(w[0].re, w[0].im),
                    to_px(w[1].re, w[1].im),
                    colour,
                );
            }
        }
    }
    for l in lens.lenses() {
        let (px, py) = to_px(l.position.re, l.position.im);
        line(&mut img, (px - 5.0, py), (px + 5.0, py), INK);
        line(&mut img, (px, py - 5.0), (px, py + 5.0), INK);
    }
    // Frame and ticks.
    let (lo, hi) = (MARGIN, SIZE as f64 - MARGIN);
    for (a, b) in [
        ((lo, lo), (hi, lo)),
        ((hi, lo), (hi, hi)),
        ((hi, hi), (lo, hi)),
        ((lo, hi), (lo, lo)),
    ] {
        line(&mut img, a, b, INK);
    }
    // The frame spans the drawing area; ticks every `step`, labelled every other one.
    let half = (SIZE as f64 / 2.0 - MARGIN) / scale;
    let step = nice_step(span / 8.0);
    let decimals = (-(step.log10().floor()) as i64).max(0) as usize;
    let label = |v: f64| {
        let s = format!("{:.*}", decimals, v);
        if s.trim_start_matches('-')
            .chars()
            .all(|c| c == '0' || c == '.')
        {
            "0".to_string()
        } else {
            s
        }
    };
    for (centre, horizontal) in [(cx, true), (cy, false)] {
        let first = ((centre - half) / step).ceil() as i64;
        let last = ((centre + half) / step).floor() as i64;
        for k in first..=last {
            let v = k as f64 * step;
            let len = if k % 2 == 0 { 10.0 } else { 5.0 };
            let text = label(v);
            let chars = text.chars().count() as f64;
            if horizontal {
                let (px, _) = to_px(v, cy);
                line(&mut img, (px, hi), (px, hi - len), INK);
                line(&mut img, (px, lo), (px, lo + len), INK);
                let x = px - 4.0 * chars;
                if k % 2 == 0 && x >= 0.0 && x + 8.0 * chars < SIZE as f64 {
                    render::text(&mut img, x as usize, (hi + 8.0) as usize, 2, &text);
                }
            } else {
                let (_, py) = to_px(cx, v);
                line(&mut img, (lo, py), (lo + len, py), INK);
                line(&mut img, (hi, py), (hi - len, py), INK);
                let x = lo - 6.0 - 8.0 * chars;
                if k % 2 == 0 && x >= 0.0 && py >= 5.0 {
                    render::text(&mut img, x as usize, (py - 5.0) as usize, 2, &text);
                }
            }
        }
    }
    img
}

/// 1, 2 or 5 times a power of ten, near `raw`.
fn nice_step(raw: f64) -> f64 {
    let p = 10f64.powf(raw.log10().floor());
    let m = raw / p;
    p * if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    }
}

/// A one-pixel line, sampled every half pixel; points outside the image are skipped.
fn line(img: &mut RgbImage, a: (f64, f64), b: (f64, f64), colour: Rgb<u8>) {
    let len = (b.0 - a.0).hypot(b.1 - a.1);
    if !len.is_finite() {
        return;
    }
    let steps = (2.0 * len).ceil().max(1.0) as usize;
    for i in 0..=steps {
        let t = i as f64 / steps as f64;
        let (x, y) = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
        if x >= 0.0 && y >= 0.0 && x < img.width() as f64 && y < img.height() as f64 {
            img.put_pixel(x as u32, y as u32, colour);
        }
    }
}
