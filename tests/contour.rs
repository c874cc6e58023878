//! Contour-integration magnifications against outside references.

mod common;

use causeway::contour::{self, ContourSolver, Method};
use causeway::lens::LensSystem;
use causeway::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;

fn profile(rho: f64, ld: f64) -> SourceProfile {
    let law = if ld == 0.0 {
        LimbDarkening::Uniform
    } else {
        LimbDarkening::Linear { u: ld }
    };
    SourceProfile::new(rho, law).unwrap()
}

/// Single lens: uniform disks against the closed form of Witt & Mao 1994 (scipy.special elliptic
/// integrals, cross-checked by a scipy.integrate quadrature), limb-darkened disks against a
/// two-dimensional scipy.integrate quadrature; tests/reference/contour_single.py. Contours
/// only (no shortcut), at tolerance 1e-5: within 1e-4 relative, and the reported error bounds
/// the true one within a factor of ten.
#[test]
fn single_lens_against_witt_mao_and_quadrature() {
    let table = common::reference("contour_single.csv", &["u", "rho", "ld", "magnification"]);
    let lens = LensSystem::single();
    let mut solver = ContourSolver::new(&lens, 1e-5).unwrap().with_shortcut(false);
    let mut worst = 0.0f64;
    for (row, line) in table.rows.iter().zip(&table.lines) {
        let (u, rho, ld, want) = (row[0], row[1], row[2], row[3]);
        let est = solver
            .magnification(Complex64::new(u, 0.0), &profile(rho, ld))
            .unwrap();
        let rel = (est.magnification / want - 1.0).abs();
        worst = worst.max(rel);
        println!("line {line}: u={u} rho={rho} ld={ld}: {} vs {want}: rel {rel:.2e}, est {:.2e}", est.magnification, est.error / want);
        assert!(rel < 1e-4, "line {line}: u={u} rho={rho} ld={ld}: {} vs {want}", est.magnification);
        assert!(
            (est.magnification - want).abs() <= 10.0 * est.error + 1e-12 * want,
            "line {line}: error estimate {} but off by {}",
            est.error,
            est.magnification - want
        );
    }
    println!("worst relative error {worst:.2e}");
}
