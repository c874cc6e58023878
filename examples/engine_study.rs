//! Time-to-accuracy study of the map engines: error against build time for both engines on
//! three binaries (central caustic, planetary caustic, resonant).
//!
//! Pixels away from caustics are compared with the pixel mean of the exact point-source
//! magnification (8 x 8 Gauss-Legendre quadrature over the pixel through the image solver;
//! a pixel counts as away from caustics when the 4 x 4 and 8 x 8 rules agree to 1e-7).
//!
//! Writes `docs/engine-study.csv` and `docs/engine-study.png`:
//! `cargo run --release --example engine_study` (`-- --plot-only` redraws the PNG from the CSV)

use causeway::engine::{by_name, Engine};
use causeway::lens::LensSystem;
use causeway::map::Window;
use causeway::plot::{Axis, Chart, Series, Style};
use causeway::solve::ImageSolver;
use causeway::source::gauss_legendre;
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

/// Pixel mean of the point-source magnification by a k x k Gauss-Legendre rule.
fn pixel_mean(solver: &mut ImageSolver, window: &Window, ix: usize, iy: usize, k: usize) -> f64 {
    let (cx, cy) = window.pixel_center(ix, iy);
    let half = 0.5 * window.pixel_size();
    let rule = gauss_legendre(k);
    let mut sum = 0.0;
    for &(xa, wa) in &rule {
        for &(ya, wb) in &rule {
            let z = Complex64::new(cx + half * xa, cy + half * ya);
            sum += wa * wb * solver.magnification(z).expect("solver");
        }
    }
    sum / 4.0
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
    let settings: Vec<(&str, f64)> = [30.0, 100.0, 300.0, 1000.0, 3000.0]
        .iter()
        .map(|&r| ("rays", r))
        .chain([0.25, 1.0, 4.0, 16.0].iter().map(|&c| ("polygon", c)))
        .collect();
    let mut csv = String::from(
        "case,engine,density,pixel_size,build_seconds,pixels_checked,median_error,p99_error\n",
    );
    for case in &cases {
        let lens = LensSystem::binary(case.s, case.q).unwrap();
        let window = Window::new(case.center, case.width, PIXELS).unwrap();
        // Seeded pixel sample (64-bit LCG, Knuth's MMIX constants).
        let mut state = 12345u64;
        let picks: Vec<(usize, usize)> = (0..SAMPLES)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let v = (state >> 20) as usize;
                (v % PIXELS, (v / PIXELS) % PIXELS)
            })
            .collect();
        let solver = ImageSolver::new(&lens).unwrap();
        let reference: Vec<Option<f64>> = picks
            .par_iter()
            .map_with(solver, |solver, &(ix, iy)| {
                let fine = pixel_mean(solver, &window, ix, iy, 8);
                let coarse = pixel_mean(solver, &window, ix, iy, 4);
                ((fine - coarse).abs() < 1e-7 * fine).then_some(fine)
            })
            .collect();
        let checked = reference.iter().flatten().count();
        for &(engine, density) in &settings {
            let engine: Box<dyn Engine> = by_name(engine, density).unwrap();
            let map = engine.build(&lens, &window).unwrap();
            let mut errors: Vec<f64> = picks
                .iter()
                .zip(&reference)
                .filter_map(|(&(ix, iy), r)| r.map(|r| (map.data[[iy, ix]] as f64 / r - 1.0).abs()))
                .collect();
            errors.sort_by(f64::total_cmp);
            let median = errors[errors.len() / 2];
            let p99 = errors[errors.len() * 99 / 100];
            let secs = map.provenance.build_seconds;
            eprintln!(
                "{:>9} {:>7} {:>7}: {secs:8.3} s  median {median:.2e}  p99 {p99:.2e}  ({checked} px)",
                case.name,
                engine.name(),
                density
            );
            writeln!(
                csv,
                "{},{},{},{},{},{},{},{}",
                case.name,
                engine.name(),
                density,
                window.pixel_size(),
                secs,
                checked,
                median,
                p99
            )
            .unwrap();
        }
    }
    std::fs::create_dir_all("docs").unwrap();
    plot(&csv);
    causeway::fsutil::write_atomic(Path::new("docs/engine-study.csv"), csv.as_bytes()).unwrap();
    eprintln!("wrote docs/engine-study.csv");
}
