//! `causeway simulate` and `fit::simulate`: the files it writes, the model fluxes against
//! outside references, the noise statistics, determinism, and bad input; observing plans in
//! `simulate/plan.rs`.

use crate::common;
mod plan;

use causeway::fit::model::{paczynski, BinaryModel, Trajectory};
use causeway::fit::photometry::{flux_to_mag, DataSet, Measured, DEFAULT_ZERO_POINT};
use causeway::fit::simulate::{Noise, Simulation};
use causeway::source::LimbDarkening;
use common::{reference, run_cli, Scratch};

/// A planetary event whose source crosses a caustic (so contour integration runs).
const PLANETARY: &str =
    "--s 1.1 --q 2e-3 --t0 0 --u0 0.02 --te 30 --alpha 40 --rho 0.003 --time-range -3,3,200";

/// Words of a command line.
fn words(s: &str) -> Vec<&str> {
    s.split_whitespace().collect()
}

#[test]
fn writes_a_data_set_file() {
    let dir = Scratch::new("simulate-file");
    let mut args = words(PLANETARY);
    args.extend(["--fs", "2", "--fb", "0.5", "--out", "event.csv"]);
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("200 points"), "{err}");
    let data = DataSet::read(&dir.join("event.csv"), DEFAULT_ZERO_POINT).unwrap();
    assert_eq!(data.len(), 200);
    assert_eq!(data.measured, Measured::Magnitude);
    // The file holds what the library's simulation gives.
    let sim = Simulation {
        fs: 2.0,
        fb: 0.5,
        ..Simulation::new(planetary(), LimbDarkening::Uniform)
    };
    let times = causeway::curve::time_range(-3.0, 3.0, 200).unwrap();
    assert_eq!(sim.run(&times).unwrap().flux, data.flux);
    // The data set carries the source's limb darkening.
    let law = LimbDarkening::Linear { u: 0.6 };
    let far = Simulation::new(
        BinaryModel {
            rho: 1e-3,
            ..planetary()
        },
        law,
    );
    assert_eq!(far.run(&[-30.0, -29.0, -28.0]).unwrap().limb_darkening, law);
    // Flux output.
    args.extend(["--flux", "--sigma-flux", "0.02"]);
    let i = args.iter().position(|a| *a == "event.csv").unwrap();
    args[i] = "flux.csv";
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 0, "{err}");
    let data = DataSet::read(&dir.join("flux.csv"), DEFAULT_ZERO_POINT).unwrap();
    assert_eq!(data.measured, Measured::Flux);
    assert!(data.flux_err.iter().all(|&e| e == 0.02));
}

fn planetary() -> BinaryModel {
    BinaryModel {
        s: 1.1,
        q: 2e-3,
        rho: 0.003,
        trajectory: Trajectory::straight(0.0, 0.02, 30.0, 40f64.to_radians()).unwrap(),
    }
}

#[test]
fn noiseless_point_source_is_paczynski() {
    // A companion of 1e-9 of the mass, far out: a single lens to about 1e-9. The fluxes must be
    // fs A + fb with Paczynski's A (Paczynski 1986), computed here from the formula.
    let (t0, u0, te) = (50.0, 0.15, 20.0);
    let model = BinaryModel {
        s: 5.0,
        q: 1e-9,
        rho: 0.0,
        trajectory: Trajectory::straight(t0, u0, te, 1.0).unwrap(),
    };
    let sim = Simulation {
        fs: 2.0,
        fb: 0.5,
        noise: Noise::Flux { sigma: 1e-12 },
        ..Simulation::new(model, LimbDarkening::Uniform)
    };
    let times: Vec<f64> = (0..200).map(|k| 10.0 + 0.4 * k as f64).collect();
    let data = sim.run(&times).unwrap();
    // Distances from the host, which sits s q / (1 + q) from the centre of mass (DESIGN.md).
    let u = |t: f64| {
        let (x, y) = model.trajectory.position(t);
        (x + 5.0 * 1e-9 / (1.0 + 1e-9)).hypot(y)
    };
    for (i, &t) in data.times.iter().enumerate() {
        let expected = 2.0 * paczynski(u(t)) + 0.5;
        assert!(
            (data.flux[i] - expected).abs() < 1e-8 * expected,
            "t = {t}: flux {} against {expected}",
            data.flux[i]
        );
    }
    // In magnitudes: m = zp - 2.5 log10(fs A + fb) (DESIGN.md's flux model).
    let mags = Simulation {
        noise: Noise::Magnitude { sigma: 1e-12 },
        ..sim
    }
    .synthesize(&times)
    .unwrap();
    for (i, &t) in mags.times.iter().enumerate() {
        let m = flux_to_mag(2.0 * paczynski(u(t)) + 0.5, 22.0);
        assert!((mags.values[i] - m).abs() < 1e-8);
    }
}

#[test]
fn noiseless_finite_sources_match_the_single_lens_references() {
    // Single-lens magnifications of tests/reference/finite_source.csv: uniform disks (the closed
    // form of Witt & Mao 1994, checked there by scipy quadrature) and linearly limb-darkened
    // ones (the annulus integral of Lee et al. 2009 by scipy quadrature); the source at distance
    // u from the lens at t = t0.
    let table = reference(
        "finite_source.csv",
        &["law", "ld_a", "ld_b", "u", "rho", "magnification"],
    );
    let rows: Vec<&Vec<f64>> = table.rows.iter().filter(|r| r[0] <= 1.0).collect();
    assert!(rows.len() >= 16);
    for r in rows {
        let (u, rho, expected) = (r[3], r[4], r[5]);
        let law = if r[0] == 0.0 {
            LimbDarkening::Uniform
        } else {
            LimbDarkening::Linear { u: r[1] }
        };
        let model = BinaryModel {
            s: 5.0,
            q: 1e-9,
            rho,
            trajectory: Trajectory::straight(0.0, u, 1000.0, 0.3).unwrap(),
        };
        let sim = Simulation {
            noise: Noise::Flux { sigma: 1e-12 },
            tol: 1e-7,
            ..Simulation::new(model, law)
        };
        let out = sim.synthesize(&[0.0, 1.0, 2.0]).unwrap();
        let a = out.values[0]; // fs = 1, fb = 0
        assert!(
            (a - expected).abs() < 1e-5 * expected,
            "{law:?}, u = {u}, rho = {rho}: {a} against {expected}"
        );
    }
}

#[test]
fn noise_has_the_stated_distribution() {
    // chi^2 of the true model over 2000 points within the central 99.9% of the chi-square
    // distribution, and the mean normalised residual within its 99.9% normal range
    // (tests/reference/simulate_noise.csv, from scipy.stats.chi2.ppf and scipy.stats.norm.ppf).
    let r = &reference(
        "simulate_noise.csv",
        &["points", "chi2_low", "chi2_high", "mean_bound"],
    )
    .rows[0];
    let n = r[0] as usize;
    let times = causeway::curve::time_range(-30.0, 30.0, n).unwrap();
    let model = BinaryModel {
        s: 1.1,
        q: 2e-3,
        rho: 0.003,
        trajectory: Trajectory::straight(0.0, 0.1, 30.0, 40f64.to_radians()).unwrap(),
    };
    let law = LimbDarkening::Uniform;
    let a = model.magnifications(&times, law, 1e-5).unwrap();
    for (noise, seed) in [
        (Noise::Magnitude { sigma: 0.01 }, 3),
        (Noise::Flux { sigma: 0.05 }, 4),
    ] {
        let sim = Simulation {
            fs: 1.5,
            fb: 0.3,
            noise,
            seed,
            ..Simulation::new(model, law)
        };
        let out = sim.synthesize(&times).unwrap();
        let z: Vec<f64> = (0..n)
            .map(|i| {
                let flux = 1.5 * a[i] + 0.3;
                let truth = match noise {
                    Noise::Magnitude { .. } => flux_to_mag(flux, 22.0),
                    Noise::Flux { .. } => flux,
                };
                (out.values[i] - truth) / out.errors[i]
            })
            .collect();
        let chi2: f64 = z.iter().map(|v| v * v).sum();
        let mean = z.iter().sum::<f64>() / n as f64;
        assert!(chi2 > r[1] && chi2 < r[2], "{noise:?}: chi2 {chi2}");
        assert!(mean.abs() < r[3], "{noise:?}: mean residual {mean}");
    }
}

#[test]
fn same_seed_same_bytes_whatever_the_threads() {
    let dir = Scratch::new("simulate-bytes");
    let run = |out: &str, extra: &[&str]| {
        let mut args = words(PLANETARY);
        args.extend(["--out", out]);
        args.extend(extra);
        let (code, _, err) = run_cli(&dir, "simulate", &args);
        assert_eq!(code, 0, "{err}");
        std::fs::read(dir.join(out)).unwrap()
    };
    let one = run("a.csv", &["--threads", "1", "--seed", "5"]);
    assert_eq!(run("b.csv", &["--threads", "2", "--seed", "5"]), one);
    assert_eq!(run("c.csv", &["--threads", "4", "--seed", "5"]), one);
    assert_ne!(run("d.csv", &["--threads", "2", "--seed", "6"]), one);
    // The default seed is fixed too.
    assert_eq!(run("e.csv", &[]), run("f.csv", &[]));
}

#[test]
fn bad_input_is_one_line_exit_2_and_no_file() {
    let dir = Scratch::new("simulate-bad");
    std::fs::write(dir.join("dup.csv"), "t\n1\n2\n1\n").unwrap();
    let base = "--t0 0 --u0 0.1 --te 20 --alpha 30 --out x.csv";
    let binary = "--s 1 --q 1 --time-range -5,5,10";
    let cases = [
        ("--s 1 --q 0 --time-range -5,5,10".to_string(), "q"),
        ("--lenses l.csv --time-range -5,5,10".to_string(), "--s"),
        (format!("{binary} --sigma-mag 0"), "sigma (mag)"),
        (format!("{binary} --rho -1"), "rho"),
        (format!("{binary} --ld 2"), "u"),
        ("--s 1 --q 1 --times dup.csv".to_string(), "twice"),
        (format!("{binary} --fb -5"), "fs/fb"),
        (format!("{binary} --fs NaN"), "fs: must be finite"),
    ];
    for (extra, culprit) in cases {
        let mut args = words(base);
        args.extend(words(&extra));
        let (code, _, err) = run_cli(&dir, "simulate", &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{args:?}: {err}");
        assert!(err.contains(culprit), "{args:?}: {err}");
        assert!(!dir.join("x.csv").exists(), "{args:?} wrote a file");
    }
}
