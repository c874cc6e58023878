//! Time-to-accuracy study of the map engines: error against build time for both engines on
//! three binaries (central caustic, planetary caustic, resonant).
//!
//! Pixels away from caustics are compared with the pixel mean of the exact point-source
//! magnification (8 x 8 Gauss-Legendre quadrature over the pixel through the image solver;
//! a pixel counts as away from caustics when the 4 x 4 and 8 x 8 rules agree to 1e-7).
//!
//! Finite-source light curves are compared too: along a straight trajectory across the
//! caustic in each window, a uniform source of radius 5 pixels read from each map by the
//! `Sampler` against contour integration to relative tolerance 1e-6 (columns
//! `curve_median_error`, `curve_p99_error`).
//!
//! Writes `docs/engine-study.csv` and `docs/engine-study.png`:
//! `cargo run --release --example engine_study` (`-- --plot-only` redraws the PNG from the CSV;
//! `-- --quick` runs one setting per engine on fewer pixels and prints the CSV instead of writing)

use causeway::contour;
use causeway::curve::Sampler;
use causeway::engine::{by_name, Engine};
use causeway::lens::LensSystem;
use causeway::map::reference::{sample_pixels, smooth_pixel_mean};
use causeway::map::Window;
use causeway::plot::{Axis, Chart, Series, Style};
use causeway::solve::ImageSolver;
use causeway::source::SourceProfile;
use num_complex::Complex64;
use rayon::prelude::*;
use std::fmt::Write as _;
use std::path::Path;

struct Case {
    name: &'static str,
    s: f64,
    q: f64,
    center: (f64, f64),
    width: f64,
}

const PIXELS: usize = 500;
const SAMPLES: usize = 1500;
/// Source radius of the light curves, in pixels.
const RHO_PIXELS: f64 = 5.0;
/// Points per light curve.
const CURVE_POINTS: usize = 200;
/// Relative tolerance of the contour-integration reference curves.
const CURVE_TOL: f64 = 1e-6;

/// Median and 99th percentile (order statistics at ranks n/2 and 99n/100) of `errors`.
fn median_p99(mut errors: Vec<f64>) -> (f64, f64) {
    errors.sort_by(f64::total_cmp);
    (errors[errors.len() / 2], errors[errors.len() * 99 / 100])
}

/// A straight trajectory across the window: through a point a twentieth of the width off its
/// centre, at 30 degrees to the x axis, over 80% of the width (the source stays on the map).
fn trajectory(window: &Window) -> Vec<(f64, f64)> {
    let (sin, cos) = 30f64.to_radians().sin_cos();
    let (w, (cx, cy)) = (window.width, window.center);
    let (ox, oy) = (cx - 0.05 * w * sin, cy + 0.05 * w * cos);
    (0..CURVE_POINTS)
        .map(|k| {
            let tau = w * (-0.4 + 0.8 * k as f64 / (CURVE_POINTS - 1) as f64);
            (ox + tau * cos, oy + tau * sin)
        })
        .collect()
}

/// Median error against build time, one line per case and engine.
fn plot(csv: &str) {
    let mut chart = Chart::new(
        "map engines: median pixel error against build time (500 x 500 px, 2 cores)",
        Axis::log("build time (s)"),
        Axis::log("median relative pixel error"),
    );
    for case in ["central", "planetary", "resonant"] {
        for engine in ["rays", "polygon"] {
            let points: Vec<(f64, f64)> = csv
                .lines()
                .skip(1)
                .map(|l| l.split(',').collect::<Vec<_>>())
                .filter(|f| f[0] == case && f[1] == engine)
                .map(|f| (f[4].parse().unwrap(), f[6].parse().unwrap()))
                .collect();
            chart.add(Series::line(&format!("{case} {engine}"), points).styled(Style::LineMarkers));
        }
    }
    chart.write_png(Path::new("docs/engine-study.png")).unwrap();
    eprintln!("wrote docs/engine-study.png");
}

fn main() {
    if std::env::args().any(|a| a == "--plot-only") {
        let csv = std::fs::read_to_string("docs/engine-study.csv").expect("docs/engine-study.csv");
        return plot(&csv);
    }
    let quick = std::env::args().any(|a| a == "--quick");
    let cases = [
        Case {
            name: "central",
            s: 0.9,
            q: 1e-3,
            center: (-0.9e-3 / 1.001, 0.0),
            width: 0.2,
        },
        Case {
            name: "planetary",
            s: 1.3,
            q: 1e-3,
            center: (1.3 - 1.0 / 1.3 - 1.3e-3 / 1.001, 0.0),
            width: 0.2,
        },
        Case {
            name: "resonant",
            s: 1.0,
            q: 0.1,
            center: (0.0, 0.0),
            width: 1.5,
        },
    ];
    let (rays, polygon, samples): (&[f64], &[f64], usize) = if quick {
        (&[30.0], &[1.0], 100)
    } else {
        (
            &[30.0, 100.0, 300.0, 1000.0, 3000.0],
            &[0.25, 1.0, 4.0, 16.0],
            SAMPLES,
        )
    };
    let settings: Vec<(&str, f64)> = rays
        .iter()
        .map(|&r| ("rays", r))
        .chain(polygon.iter().map(|&c| ("polygon", c)))
        .collect();
    let mut csv = String::from(
        "case,engine,density,pixel_size,build_seconds,pixels_checked,median_error,p99_error,\
         curve_median_error,curve_p99_error\n",
    );
    for case in &cases {
        let lens = LensSystem::binary(case.s, case.q).unwrap();
        let window = Window::new(case.center, case.width, PIXELS).unwrap();
        let picks = sample_pixels(&window, samples, 12345);
        let solver = ImageSolver::new(&lens).unwrap();
        let reference: Vec<Option<f64>> = picks
            .par_iter()
            .map_with(solver, |solver, &(ix, iy)| {
                smooth_pixel_mean(solver, &window, ix, iy).unwrap()
            })
            .collect();
        let checked = reference.iter().flatten().count();
        let profile = SourceProfile::uniform(RHO_PIXELS * window.pixel_size()).unwrap();
        let points = trajectory(&window);
        let centers: Vec<Complex64> = points.iter().map(|&(x, y)| Complex64::new(x, y)).collect();
        let exact = contour::magnifications(&lens, &centers, &profile, CURVE_TOL).unwrap();
        for &(engine, density) in &settings {
            let engine: Box<dyn Engine> = by_name(engine, density).unwrap();
            let map = engine.build(&lens, &window).unwrap();
            let errors: Vec<f64> = picks
                .iter()
                .zip(&reference)
                .filter_map(|(&(ix, iy), r)| r.map(|r| (map.data[[iy, ix]] as f64 / r - 1.0).abs()))
                .collect();
            let (median, p99) = median_p99(errors);
            let curve = Sampler::new(profile).map(&map).sample(&points).unwrap();
            let (curve_median, curve_p99) = median_p99(
                curve
                    .samples
                    .iter()
                    .zip(&exact)
                    .map(|(s, e)| (s.magnification / e.magnification - 1.0).abs())
                    .collect(),
            );
            let secs = map.provenance.build_seconds;
            eprintln!(
                "{:>9} {:>7} {:>7}: {secs:8.3} s  median {median:.2e}  p99 {p99:.2e}  ({checked} px)  \
                 curve median {curve_median:.2e}  p99 {curve_p99:.2e}",
                case.name,
                engine.name(),
                density
            );
            writeln!(
                csv,
                "{},{},{},{},{},{},{},{},{},{}",
                case.name,
                engine.name(),
                density,
                window.pixel_size(),
                secs,
                checked,
                median,
                p99,
                curve_median,
                curve_p99
            )
            .unwrap();
        }
    }
    if quick {
        print!("{csv}");
        return;
    }
    std::fs::create_dir_all("docs").unwrap();
    plot(&csv);
    causeway::fsutil::write_atomic(Path::new("docs/engine-study.csv"), csv.as_bytes()).unwrap();
    eprintln!("wrote docs/engine-study.csv");
}
