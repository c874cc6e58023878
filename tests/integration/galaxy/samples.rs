//! The lens estimate from the fit's posterior samples (src/galaxy/samples.rs): against a direct
//! numpy Monte Carlo that weights the prior by the samples' known density
//! (tests/reference/galaxy_samples.py), the Gould 2000 collapse, the Gaussian input it
//! generalises, and `causeway nature --posterior`.

use super::{close, field, m, quantiles, quantities};
use crate::common::{self, run_cli, Scratch};
use causeway::fit::scales::kappa;
use causeway::galaxy::report::Quantity;
use causeway::galaxy::{
    infer, infer_samples, EventData, FitSamples, LensOptions, Measured, SourceDistance,
};
use causeway::progress::Silent;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

fn reference_samples() -> FitSamples {
    FitSamples::read(&common::root().join("tests/reference/galaxy_samples.csv")).unwrap()
}

/// `n` Gaussian draws of (value, sd), seeded.
fn gaussian(n: usize, value: f64, sd: f64, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let g = Normal::new(value, sd).unwrap();
    (0..n).map(|_| g.sample(&mut rng)).collect()
}

#[test]
fn posterior_samples_match_a_direct_numpy_monte_carlo() {
    // galaxy_samples.py: 4000 rows of an invented fit's posterior with rho and tE
    // anti-correlated; numpy weights 1.5 million events drawn from the prior by that posterior's
    // known density at (tE, theta_* / theta_E), averaged over theta_* = 0.6 +- 0.03 uas. Rust
    // sees only the rows. Tolerances: the Monte Carlo noise of both sides (12,000 effective
    // numpy events, 4000 rows) and of the quantiles in the tails, 2 to 4 per cent.
    let r = quantities("galaxy_samples_mc.csv");
    let options = LensOptions {
        samples: 400_000,
        source: SourceDistance::Given { kpc: 8.0, err: 0.0 },
        ..LensOptions::new(field())
    };
    let theta_star = Measured::new("theta_*", 0.6, 0.03).ok();
    let post = infer_samples(
        &reference_samples(),
        theta_star,
        &EventData::default(),
        &options,
        &Silent,
    )
    .unwrap();
    let checks: [(&str, Quantity, [f64; 3]); 4] = [
        ("mass", |s| s.host_mass, [0.04, 0.03, 0.03]),
        ("dl", |s| s.dl, [0.02, 0.01, 0.01]),
        ("theta_e", |s| s.theta_e, [0.02, 0.01, 0.02]),
        ("te", |s| s.te, [0.01, 0.01, 0.01]),
    ];
    for (name, f, tol) in checks {
        let got = quantiles(&post, f);
        for (k, q) in ["16", "50", "84"].iter().enumerate() {
            let want = r[&format!("{name}_q{q}")];
            assert!(
                close(got[k], want, tol[k]),
                "{name} q{q}: {} against numpy {want}",
                got[k]
            );
        }
    }
    let p = post.class_probabilities(false);
    for (k, c) in ["ms", "bd", "wd", "ns", "bh"].iter().enumerate() {
        let want = r[&format!("p_{c}")];
        assert!(
            (p[k] - want).abs() < 0.015,
            "P({c}) = {} against numpy {want}",
            p[k]
        );
    }
}

#[test]
fn precise_samples_collapse_onto_gould_2000() {
    // Gould 2000 (ApJ 542, 785): M = theta_E / (kappa pi_E), pi_rel = theta_E pi_E, here with
    // theta_E = theta_* / rho = 0.5 mas and pi_E = (0.12, 0.16) from 0.1%-wide samples.
    let n = 2000;
    let pi_e: Vec<[f64; 2]> = gaussian(n, 0.12, 1.2e-4, 3)
        .into_iter()
        .zip(gaussian(n, 0.16, 1.6e-4, 4))
        .map(|(a, b)| [a, b])
        .collect();
    let samples = FitSamples::new(
        gaussian(n, 25.0, 1.0, 1),
        Some(gaussian(n, 1.2e-3, 1.2e-6, 2)),
        Some(pi_e),
        Some(vec![1.1; n]),
        Some(gaussian(n, 2e-3, 1e-5, 5)),
    )
    .unwrap();
    let options = LensOptions {
        samples: 40_000,
        ..LensOptions::new(field())
    };
    let theta_star = Measured::new("theta_*", 0.6, 6e-4).ok();
    let post = infer_samples(
        &samples,
        theta_star,
        &EventData::default(),
        &options,
        &Silent,
    )
    .unwrap();
    let (theta, pie) = (0.5, 0.2);
    let total = post.quantiles(|s| s.mass, false, &[0.5])[0];
    let expected = theta / (kappa() * pie);
    assert!(close(total, expected, 0.003), "{total} against {expected}");
    let pi_rel = post.quantiles(|s| s.pi_rel, false, &[0.5])[0];
    assert!(close(pi_rel, theta * pie, 0.003), "{pi_rel}");
    // The rows' s and q reach the companion: a = s theta_E D_L, m_p = q M / (1 + q).
    let planet = post.quantiles(|s| s.planet_mjup / s.host_mass, false, &[0.5])[0];
    let per_sun = causeway::fit::scales::GM_SUN / causeway::fit::scales::GM_JUPITER;
    assert!(close(planet, 2e-3 * per_sun, 0.01), "{planet}");
    let a = post.quantiles(|s| s.separation_au / (s.theta_e * s.dl), false, &[0.5])[0];
    assert!(close(a, 1.1, 1e-12), "{a}");
}

#[test]
fn gaussian_samples_give_the_gaussian_estimate() {
    // Samples drawn from the Gaussians that `infer` takes describe the same measurements:
    // the two estimates agree within their Monte Carlo noise. tE = 28 +- 1.5 d with a parallax
    // vector (0.1, 0.15) +- 0.03 and no theta_E: the samples' |pi_E| likelihood is the kernel
    // density of the sampled sizes.
    let n = 20_000;
    let pi_e: Vec<[f64; 2]> = gaussian(n, 0.1, 0.03, 7)
        .into_iter()
        .zip(gaussian(n, 0.15, 0.03, 8))
        .map(|(a, b)| [a, b])
        .collect();
    let samples = FitSamples::new(gaussian(n, 28.0, 1.5, 6), None, Some(pi_e), None, None).unwrap();
    let options = LensOptions {
        samples: 200_000,
        source: SourceDistance::Given { kpc: 8.0, err: 0.0 },
        ..LensOptions::new(field())
    };
    let from_samples =
        infer_samples(&samples, None, &EventData::default(), &options, &Silent).unwrap();
    let v = [0.1, 0.03, 0.15, 0.03];
    let data = EventData {
        te: Some(m(28.0, 1.5)),
        pi_e: Some(causeway::galaxy::input::pi_e_size(v).unwrap()),
        pi_e_angle: Some(causeway::galaxy::input::pi_e_angle(v)),
        ..Default::default()
    };
    let gauss = infer(&data, &options, &Silent).unwrap();
    for (name, f) in [
        (
            "mass",
            (|s| s.host_mass) as fn(&causeway::galaxy::LensSample) -> f64,
        ),
        ("dl", |s| s.dl),
    ] {
        let (a, b) = (quantiles(&from_samples, f), quantiles(&gauss, f));
        for k in 0..3 {
            assert!(close(a[k], b[k], 0.05), "{name}: {a:?} against {b:?}");
        }
    }
}

#[test]
fn cli_reads_posterior_samples() {
    let dir = Scratch::new("nature-posterior");
    std::fs::copy(
        common::root().join("tests/reference/galaxy_samples.csv"),
        dir.join("chain.csv"),
    )
    .unwrap();
    let args = [
        "--posterior",
        "chain.csv",
        "--theta-star",
        "0.6,0.03",
        "--galactic",
        "1,-3",
        "--ds",
        "8,0",
        "--samples",
        "20000",
        "--out",
        "lens.csv",
    ];
    let (code, _, err) = run_cli(&dir, "nature", &args);
    assert_eq!(code, 0, "{err}");
    // The same as the library call with the same seed, bit for bit.
    let options = LensOptions {
        samples: 20_000,
        source: SourceDistance::Given { kpc: 8.0, err: 0.0 },
        ..LensOptions::new(field())
    };
    let post = infer_samples(
        &reference_samples(),
        Measured::new("theta_*", 0.6, 0.03).ok(),
        &EventData::default(),
        &options,
        &Silent,
    )
    .unwrap();
    let csv = std::fs::read_to_string(dir.join("lens.csv")).unwrap();
    assert_eq!(csv, causeway::galaxy::report::samples_csv(&post));
    // A bad row is named by file and line; --theta-star needs a rho column; --posterior
    // excludes value,error options. Nothing is written.
    let bad = Scratch::new("nature-posterior-bad");
    std::fs::write(bad.join("chain.csv"), "tE,rho\n30,0.001\n31,-0.001\n").unwrap();
    std::fs::write(bad.join("te.csv"), "tE\n30\n31\n").unwrap();
    for (args, culprit) in [
        (vec!["--posterior", "chain.csv"], "chain.csv:3: rho"),
        (
            vec!["--posterior", "te.csv", "--theta-star", "0.6,0.03"],
            "--theta-star",
        ),
        (vec!["--posterior", "te.csv", "--te", "30,1"], "--te"),
        (vec!["--posterior", "none.csv"], "none.csv"),
    ] {
        let mut all = args.clone();
        all.extend(["--galactic", "1,-3", "--out", "x.csv"]);
        let (code, _, err) = run_cli(&bad, "nature", &all);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(
            err.contains(culprit) && err.lines().count() == 1,
            "{args:?}: {err}"
        );
    }
    assert_eq!(common::listing(&bad), ["chain.csv", "te.csv"]);
}
