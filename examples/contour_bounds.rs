//! Does contour integration's error estimate bound its actual error? A seeded sweep of source
//! disks near the caustics of several lenses, each estimate (default solver, shortcuts allowed)
//! against contour integration at tolerance 1e-7 without shortcuts.
//!
//! Points: lens chosen in turn from [`LENSES`]; rho log-uniform in [1e-3, 0.05]; the centre a
//! point of the traced caustics (half the time uniform in arc length, half a uniform pick of the
//! trace's vertices, which crowd at cusps) moved by up to 2.5 rho in a random direction; 98%
//! uniform disks, 2% linear limb darkening u in [0.3, 0.8] (their references cost a hundred
//! times more); tolerance 1e-2, 1e-3 or 1e-4 (1 : 2 : 2). An estimate exceeds its bound when `|A - A_ref| > error + error_ref`.
//!
//! Points where either computation fails are counted and their errors listed. Prints a
//! summary per tolerance (points, bounds exceeded, worst actual/estimate, median
//! estimate/actual over the points whose actual error is above ten times the reference's
//! estimate) and then, as CSV, the `LIST` points with the largest actual/estimate.
//!
//! Run: `cargo run --release --example contour_bounds -- [POINTS (100000)] [SEED (15)] [LIST (40)]`

use causeway::contour::{ContourSolver, Estimate};
use causeway::lens::LensSystem;
use causeway::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering};

/// (s, q) of the binaries swept: resonant, planetary wide and close, a small central caustic,
/// stellar close and wide.
const LENSES: [(f64, f64); 7] = [
    (1.0, 1.0),
    (1.35, 3e-3),
    (0.75, 3e-3),
    (0.9, 1e-4),
    (1.25, 2e-3),
    (0.9, 0.3),
    (2.5, 0.5),
];

const TOLERANCES: [f64; 3] = [1e-2, 1e-3, 1e-4];

const REFERENCE_TOL: f64 = 1e-7;

struct Case {
    lens: usize,
    center: Complex64,
    rho: f64,
    ld: f64,
    tol: usize,
}

struct Outcome {
    case: Case,
    est: Estimate,
    reference: Estimate,
}

impl Outcome {
    fn actual(&self) -> f64 {
        (self.est.magnification - self.reference.magnification).abs()
    }
    /// Actual error over the bound (above 1: exceeded).
    fn excess(&self) -> f64 {
        self.actual() / (self.est.error + self.reference.error)
    }
}

fn draw(index: usize, seed: u64, caustics: &[Vec<Vec<Complex64>>]) -> Case {
    let mut rng =
        ChaCha8Rng::seed_from_u64(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ index as u64);
    let lens = index % LENSES.len();
    let curves = &caustics[lens];
    let on = if rng.random::<bool>() {
        let vertices: usize = curves.iter().map(Vec::len).sum();
        let mut k = rng.random_range(0..vertices);
        let mut point = curves[0][0];
        for c in curves {
            if k < c.len() {
                point = c[k];
                break;
            }
            k -= c.len();
        }
        point
    } else {
        // Uniform in arc length along the polylines.
        let chords = || curves.iter().flat_map(|c| c.windows(2));
        let total: f64 = chords().map(|w| (w[1] - w[0]).norm()).sum();
        let mut at = rng.random::<f64>() * total;
        let mut point = curves[0][0];
        for w in chords() {
            let l = (w[1] - w[0]).norm();
            if at <= l {
                point = w[0] + (w[1] - w[0]) * (at / l.max(f64::MIN_POSITIVE));
                break;
            }
            at -= l;
        }
        point
    };
    let rho = 1e-3 * 50f64.powf(rng.random::<f64>());
    let offset = Complex64::from_polar(
        2.5 * rho * rng.random::<f64>(),
        std::f64::consts::TAU * rng.random::<f64>(),
    );
    let ld = if rng.random::<f64>() < 0.02 {
        rng.random_range(0.3..0.8)
    } else {
        0.0
    };
    let tol = [0, 1, 1, 2, 2][rng.random_range(0..5)];
    Case {
        lens,
        center: on + offset,
        rho,
        ld,
        tol,
    }
}

fn profile(rho: f64, ld: f64) -> SourceProfile {
    SourceProfile::new(rho, LimbDarkening::linear(ld)).unwrap()
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let points: usize = args.first().map_or(100_000, |a| a.parse().unwrap());
    let seed: u64 = args.get(1).map_or(15, |a| a.parse().unwrap());
    let list: usize = args.get(2).map_or(40, |a| a.parse().unwrap());
    let lenses: Vec<LensSystem> = LENSES
        .iter()
        .map(|&(s, q)| LensSystem::binary(s, q).unwrap())
        .collect();
    let caustics: Vec<Vec<Vec<Complex64>>> = lenses
        .iter()
        .map(|l| {
            causeway::caustics::curves(l)
                .unwrap()
                .into_iter()
                .map(|c| c.caustic.into_iter().filter(|z| z.is_finite()).collect())
                .collect()
        })
        .collect();
    let solvers: Vec<Vec<ContourSolver>> = lenses
        .iter()
        .map(|l| {
            TOLERANCES
                .iter()
                .map(|&t| ContourSolver::new(l, t).unwrap())
                .collect()
        })
        .collect();
    let references: Vec<ContourSolver> = lenses
        .iter()
        .map(|l| {
            ContourSolver::new(l, REFERENCE_TOL)
                .unwrap()
                .with_shortcut(false)
        })
        .collect();
    let done = AtomicUsize::new(0);
    let outcomes: Vec<Result<Outcome, String>> = (0..points)
        .into_par_iter()
        .map(|i| {
            let case = draw(i, seed, &caustics);
            let source = profile(case.rho, case.ld);
            let est = solvers[case.lens][case.tol]
                .clone()
                .magnification(case.center, &source);
            let reference = references[case.lens]
                .clone()
                .magnification(case.center, &source);
            let n = done.fetch_add(1, Ordering::Relaxed) + 1;
            if n.is_multiple_of((points / 20).max(1)) {
                eprintln!("{n} of {points}");
            }
            match (est, reference) {
                (Ok(est), Ok(reference)) => Ok(Outcome {
                    case,
                    est,
                    reference,
                }),
                (Err(e), _) | (_, Err(e)) => Err(e.to_string()),
            }
        })
        .collect();
    let failed: Vec<&String> = outcomes.iter().filter_map(|o| o.as_ref().err()).collect();
    println!("{} points failed", failed.len());
    for e in &failed {
        println!("  {e}");
    }
    let outcomes: Vec<Outcome> = outcomes.into_iter().filter_map(Result::ok).collect();
    for (t, tol) in TOLERANCES.iter().enumerate() {
        let set: Vec<&Outcome> = outcomes.iter().filter(|o| o.case.tol == t).collect();
        let exceeded = set.iter().filter(|o| o.excess() > 1.0).count();
        let worst = set.iter().map(|o| o.excess()).fold(0.0, f64::max);
        let mut ratios: Vec<f64> = set
            .iter()
            .filter(|o| o.actual() > 10.0 * o.reference.error)
            .map(|o| o.est.error / o.actual())
            .collect();
        ratios.sort_by(f64::total_cmp);
        let median = ratios.get(ratios.len() / 2).copied().unwrap_or(f64::NAN);
        println!(
            "tol {tol:e}: {} points, bound exceeded at {exceeded} ({:.4}%), worst actual/estimate \
             {worst:.3}, median estimate/actual {median:.2} (over {} points resolved by the reference)",
            set.len(),
            100.0 * exceeded as f64 / set.len().max(1) as f64,
            ratios.len()
        );
    }
    let mut order: Vec<&Outcome> = outcomes.iter().collect();
    order.sort_by(|a, b| b.excess().total_cmp(&a.excess()));
    println!("s,q,x,y,rho,ld,tol,magnification,error,method,reference,reference_error,excess");
    for o in order.iter().take(list) {
        let (s, q) = LENSES[o.case.lens];
        println!(
            "{s},{q},{:.17e},{:.17e},{:.17e},{},{:e},{:.12e},{:.3e},{:?},{:.12e},{:.3e},{:.3}",
            o.case.center.re,
            o.case.center.im,
            o.case.rho,
            o.case.ld,
            TOLERANCES[o.case.tol],
            o.est.magnification,
            o.est.error,
            o.est.method,
            o.reference.magnification,
            o.reference.error,
            o.excess()
        );
    }
}
