//! Who is the lens (src/galaxy, `causeway nature`): the Galactic model against an independent
//! numpy/scipy implementation of the same published formulas (tests/reference/galaxy.py), the
//! limits that follow from the formulas (Gould 2000), the mass-luminosity relations against
//! their published forms, the lens-light test, and the command.

mod samples;

use crate::common::{self, run_cli, with_threads, Scratch};
use causeway::fit::scales::kappa;
use causeway::galaxy::light::{
    absolute_magnitude, mann_abs_k, mann_mass, sequence_abs_mag, DWARF_SEQUENCE,
};
use causeway::galaxy::{
    infer, Band, EventData, GalacticModel, Imaging, LensLight, LensOptions, LineOfSight, Measured,
    Population, Sightline, SourceDistance,
};
use causeway::progress::Silent;

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs()
}

fn m(value: f64, err: f64) -> Measured {
    Measured::new("test", value, err).unwrap()
}

/// The bulge field of the reference Monte Carlo.
fn field() -> Sightline {
    Sightline::new(1.0, -3.0).unwrap()
}

#[test]
fn densities_match_numpy() {
    // galaxy.py: Han & Gould 2003 disk and the G2 bar of Han & Gould 1995, evaluated by numpy.
    let t = common::reference(
        "galaxy_density.csv",
        &["l", "b", "d", "rho_disk", "rho_bulge"],
    );
    let model = GalacticModel::default();
    assert!(t.rows.len() >= 20);
    for r in &t.rows {
        let los = Sightline::new(r[0], r[1]).unwrap();
        let disk = model.density(Population::Disk, &los, r[2]);
        let bulge = model.density(Population::Bulge, &los, r[2]);
        assert!(close(disk, r[3], 1e-12), "disk {r:?}: {disk}");
        assert!(close(bulge, r[4], 1e-12), "bulge {r:?}: {bulge}");
    }
}

#[test]
fn equatorial_coordinates_match_astropy() {
    // galaxy.py: astropy's ICRS to Galactic transformation. The pole and node constants in
    // Sightline::from_equatorial are the IAU values (from memory): agreement to 1e-4 degrees.
    let t = common::reference("galaxy_coords.csv", &["ra", "dec", "l", "b", "north_pa"]);
    for r in &t.rows {
        let s = Sightline::from_equatorial(r[0], r[1]).unwrap();
        let (ra, dec) = s.equatorial();
        let dra = (ra - r[0] + 180.0).rem_euclid(360.0) - 180.0;
        assert!(
            dra.abs() < 1e-8 && (dec - r[1]).abs() < 1e-8,
            "{r:?}: {ra}, {dec}"
        );
        if r[3].abs() < 80.0 {
            // astropy's position angle of increasing b
            let da = (s.galactic_north_angle() - r[4] + 3.0 * std::f64::consts::PI)
                .rem_euclid(std::f64::consts::TAU)
                - std::f64::consts::PI;
            assert!(da.abs() < 1e-5, "{r:?}: {}", s.galactic_north_angle());
        }
        let dl = (s.l_deg - r[2] + 180.0).rem_euclid(360.0) - 180.0;
        let tol = 1e-4 / r[3].to_radians().cos().max(1e-3);
        assert!(
            dl.abs() < tol && (s.b_deg - r[3]).abs() < 1e-4,
            "{r:?}: {s:?}"
        );
    }
}

#[test]
fn velocity_moments_match_numpy_and_the_draws() {
    // galaxy.py projects the 3-D dispersion tensors with a matrix product (independent route).
    let cols = [
        "population",
        "l",
        "b",
        "d",
        "mu_l",
        "mu_b",
        "cov_ll",
        "cov_lb",
        "cov_bb",
    ];
    let t = common::reference("galaxy_motion.csv", &cols);
    let model = GalacticModel::default();
    for r in &t.rows {
        let pop = Population::ALL[r[0] as usize];
        let mm = model.motion_moments(pop, &Sightline::new(r[1], r[2]).unwrap(), r[3]);
        let got = [
            mm.mean[0],
            mm.mean[1],
            mm.cov[0][0],
            mm.cov[0][1],
            mm.cov[1][1],
        ];
        let scale = r[6].abs().max(r[8].abs());
        for (k, g) in got.iter().enumerate() {
            let want = r[4 + k];
            assert!(
                (g - want).abs() <= 1e-10 * want.abs().max(scale),
                "{r:?}: {g} against {want}"
            );
        }
    }
    // Draws reproduce the moments: 40,000 draws, mean within 4 standard errors.
    let mm = model.motion_moments(Population::Disk, &Sightline::new(10.0, 1.0).unwrap(), 4.0);
    let n = 40_000;
    let mut s = [0.0; 2];
    let mut rng = 12345u64;
    let mut normal = || {
        // Box-Muller on a small linear congruential generator (test only).
        let mut u = || {
            rng = rng
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((rng >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        let (a, b) = (u(), u());
        (-2.0 * a.ln()).sqrt() * (2.0 * std::f64::consts::PI * b).cos()
    };
    let mut ss = [0.0; 3];
    for _ in 0..n {
        let v = mm.draw([normal(), normal()]);
        let d = [v[0] - mm.mean[0], v[1] - mm.mean[1]];
        s[0] += d[0];
        s[1] += d[1];
        ss[0] += d[0] * d[0];
        ss[1] += d[0] * d[1];
        ss[2] += d[1] * d[1];
    }
    let nf = n as f64;
    assert!((s[0] / nf).abs() < 4.0 * (mm.cov[0][0] / nf).sqrt());
    assert!((s[1] / nf).abs() < 4.0 * (mm.cov[1][1] / nf).sqrt());
    assert!(close(ss[0] / nf, mm.cov[0][0], 0.03) && close(ss[2] / nf, mm.cov[1][1], 0.03));
}

#[test]
fn event_rate_weight_and_mean_masses_match_scipy() {
    // galaxy.py: scipy.integrate.quad of D^2 n(D), and of the present-day mass function.
    let t = common::reference(
        "galaxy_rate.csv",
        &["l", "b", "d", "cumulative", "mean_mass_bulge"],
    );
    let model = GalacticModel::default();
    let first = &t.rows[0];
    let los = LineOfSight::new(model, field(), 1.0);
    assert!(
        close(los.mean_mass[0], first[3], 1e-6),
        "disk mean mass {}",
        los.mean_mass[0]
    );
    assert!(
        close(los.mean_mass[1], first[4], 1e-6),
        "bulge mean mass {}",
        los.mean_mass[1]
    );
    for r in &t.rows[1..] {
        let los = LineOfSight::new(model, Sightline::new(r[0], r[1]).unwrap(), 1.0);
        let got = los.lens_cumulative(r[2]);
        assert!(close(got, r[3], 2e-5), "{r:?}: {got}");
    }
}

/// A reference table of `quantity,value` rows (tests/reference/NAME) by quantity.
fn quantities(name: &str) -> std::collections::HashMap<String, f64> {
    let text = std::fs::read_to_string(common::root().join("tests/reference").join(name)).unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let (k, v) = l.split_once(',').unwrap();
            (k.to_string(), v.parse().unwrap())
        })
        .collect()
}

fn quantiles(
    post: &causeway::galaxy::LensPosterior,
    f: fn(&causeway::galaxy::LensSample) -> f64,
) -> Vec<f64> {
    post.quantiles(f, false, &[0.16, 0.5, 0.84])
}

#[test]
fn prior_and_te_posterior_match_a_direct_numpy_monte_carlo() {
    // galaxy.py draws 1.5 million events directly (lens distances uniform and weighted by
    // D^2 n, 3-D velocities, masses from the IMF with remnants) and weights them by the event
    // rate; the tE-only posterior is that prior reweighted by the tE likelihood (25 +- 2 d).
    // Rust draws tE from its measurement instead (another sampler of the same posterior).
    // Tolerances: 1 to 3 per cent, the Monte Carlo noise of both sides (measured: 0.3%, 0.6%
    // and 0.1% at the medians of tE, mass and D_L).
    let r = quantities("galaxy_mc.csv");
    let options = LensOptions {
        samples: 300_000,
        source: SourceDistance::Given { kpc: 8.0, err: 0.0 },
        ..LensOptions::new(field())
    };
    let prior = infer(&EventData::default(), &options, &Silent).unwrap();
    let te = quantiles(&prior, |s| s.te);
    for (k, name) in ["prior_tE_q16", "prior_tE_q50", "prior_tE_q84"]
        .iter()
        .enumerate()
    {
        assert!(
            close(te[k], r[*name], 0.02),
            "{name}: {} against numpy {}",
            te[k],
            r[*name]
        );
    }
    let data = EventData {
        te: Some(m(25.0, 2.0)),
        ..Default::default()
    };
    let post = infer(&data, &options, &Silent).unwrap();
    let mass = quantiles(&post, |s| s.host_mass);
    let dl = quantiles(&post, |s| s.dl);
    for k in 0..3 {
        let q = ["16", "50", "84"][k];
        let (wm, wd) = (r[&format!("post_mass_q{q}")], r[&format!("post_dl_q{q}")]);
        assert!(
            close(mass[k], wm, 0.03),
            "mass q{q}: {} against numpy {wm}",
            mass[k]
        );
        assert!(
            close(dl[k], wd, 0.01),
            "D_L q{q}: {} against numpy {wd}",
            dl[k]
        );
    }
    for (post, prefix) in [(&prior, "prior"), (&post, "post")] {
        let p = post.class_probabilities(false);
        for (k, c) in ["ms", "bd", "wd", "ns", "bh"].iter().enumerate() {
            let want = r[&format!("{prefix}_p_{c}")];
            assert!(
                (p[k] - want).abs() < 0.01,
                "{prefix} P({c}) = {} against numpy {want}",
                p[k]
            );
        }
    }
    // The posterior differs from the prior: the tE likelihood moved it.
    assert!(mass[1] > 1.3 * quantiles(&prior, |s| s.host_mass)[1]);
}

#[test]
fn event_rate_weighted_te_median_toward_the_bulge_is_15_to_30_days() {
    // Common practice, from memory: bulge events have tE of days to a few hundred days, with
    // a median of roughly 15 to 30 days. This model gives 17.5 days at (l, b) = (1, -3)
    // with sources drawn along the line of sight (16.8 with sources at 8 kpc).
    let options = LensOptions {
        samples: 100_000,
        ..LensOptions::new(field())
    };
    let prior = infer(&EventData::default(), &options, &Silent).unwrap();
    let median = prior.quantiles(|s| s.te, false, &[0.5])[0];
    assert!((15.0..30.0).contains(&median), "median tE {median} d");
}

#[test]
fn precise_theta_e_and_pi_e_collapse_onto_gould_2000() {
    // Gould 2000 (ApJ 542, 785): M = theta_E / (kappa pi_E), pi_rel = theta_E pi_E.
    let (theta, pie) = (0.5, 0.2);
    let data = EventData {
        te: Some(m(25.0, 2.0)),
        theta_e: Some(m(theta, 0.001 * theta)),
        pi_e: Some(m(pie, 0.001 * pie)),
        q: Some(1e-3),
        ..Default::default()
    };
    let options = LensOptions {
        samples: 50_000,
        ..LensOptions::new(field())
    };
    let post = infer(&data, &options, &Silent).unwrap();
    let total = post.quantiles(|s| s.mass, false, &[0.5])[0];
    let pi_rel = post.quantiles(|s| s.pi_rel, false, &[0.5])[0];
    let expected = theta / (kappa() * pie);
    assert!(close(total, expected, 0.003), "{total} against {expected}");
    assert!(close(pi_rel, theta * pie, 0.003), "{pi_rel}");
    let spread = post.quantiles(|s| s.mass, false, &[0.16, 0.84]);
    assert!(spread[1] - spread[0] < 0.01 * expected);
}

#[test]
fn the_direction_of_pi_e_favours_disk_lenses_along_rotation() {
    // Toward the bulge a disk lens moves with the Sun while a bulge source drifts towards -l
    // (Han & Gould 1995): mu_rel of disk lenses points towards +l. A parallax vector (the
    // direction of mu_rel) towards +l makes a disk lens likelier than one towards -l.
    let los = field();
    let a = los.galactic_north_angle();
    let disk_share = |sign: f64| {
        // +l is the position angle a + 90 degrees (east of Galactic north)
        let angle = a + sign * std::f64::consts::FRAC_PI_2;
        let data = EventData {
            te: Some(m(40.0, 1.0)),
            theta_e: Some(m(0.6, 0.03)),
            pi_e: Some(m(0.15, 0.02)),
            pi_e_angle: Some((angle, 0.05)),
            ..Default::default()
        };
        let options = LensOptions {
            samples: 60_000,
            ..LensOptions::new(los)
        };
        let post = infer(&data, &options, &Silent).unwrap();
        let total: f64 = post.samples.iter().map(|s| s.weight).sum();
        let disk: f64 = post
            .samples
            .iter()
            .filter(|s| s.population == Population::Disk)
            .map(|s| s.weight)
            .sum();
        disk / total
    };
    let (along, against) = (disk_share(1.0), disk_share(-1.0));
    assert!(
        along > against + 0.1,
        "disk share {along} along +l, {against} along -l"
    );
}

#[test]
fn earth_velocity_turns_geocentric_into_heliocentric_proper_motion() {
    // Gould 2004 (ApJ 606, 319; from memory): mu_hel = mu_geo + v_earth pi_rel / au, with
    // v_earth the Earth's velocity projected on the sky. 30 km/s is 6.33 au/yr.
    let (angle, v) = (0.4f64, [27.6, 11.7]); // 30 km/s along the motion
    let data = EventData {
        te: Some(m(30.0, 0.01)),
        theta_e: Some(m(0.5, 0.0005)),
        pi_e: Some(m(0.3, 0.0003)),
        pi_e_angle: Some((angle, 1e-6)),
        earth_velocity: Some(v),
        ..Default::default()
    };
    let options = LensOptions {
        samples: 4096,
        ..LensOptions::new(field())
    };
    let post = infer(&data, &options, &Silent).unwrap();
    let au_per_year = 4.740_470_463_533_348; // km/s (IAU au, Julian year)
    for s in post.samples.iter().take(200) {
        let mu_geo = s.theta_e / s.te * 365.25;
        let shift = s.pi_rel / au_per_year;
        let n = mu_geo * angle.cos() + v[0] * shift;
        let e = mu_geo * angle.sin() + v[1] * shift;
        assert!(
            close(s.mu_rel, n.hypot(e), 1e-3),
            "{} against {}",
            s.mu_rel,
            n.hypot(e)
        );
    }
    // and it matters: 0.3 x 0.5 mas of pi_rel at 30 km/s shifts mu by about 1 mas/yr
    let shifted = post
        .samples
        .iter()
        .filter(|s| !close(s.mu_rel, s.theta_e / s.te * 365.25, 0.02))
        .count();
    assert!(shifted > post.samples.len() / 2, "{shifted}");
}

#[test]
fn mass_luminosity_relations_reproduce_their_published_forms() {
    // Mann et al. 2019 (ApJ 871, 63), from memory: at the zero point M_K = 7.5 the mass is
    // 10^-0.642 = 0.228 M_sun; the inversion returns the magnitude it was given.
    assert!(close(mann_mass(7.5), 0.228, 0.002));
    for mk in [4.5, 6.0, 7.5, 9.0, 10.5] {
        let back = mann_abs_k(mann_mass(mk)).unwrap();
        assert!((back - mk).abs() < 1e-9, "{mk}: {back}");
    }
    // Against the independent relation of Delfosse et al. 2000 (A&A 364, 217; from memory),
    // log M = 1e-3 (1.8 + 6.12 M_K + 13.205 M_K^2 - 6.2315 M_K^3 + 0.37529 M_K^4), valid
    // 4.5 < M_K < 9.5: the two agree within 10% in mass.
    for k in 0..=8 {
        let mk = 5.0 + 0.5 * k as f64;
        let delfosse = 10f64.powf(
            1e-3 * (1.8 + 6.12 * mk + 13.205 * mk.powi(2) - 6.2315 * mk.powi(3)
                + 0.37529 * mk.powi(4)),
        );
        assert!(
            close(mann_mass(mk), delfosse, 0.10),
            "M_K {mk}: {} against {delfosse}",
            mann_mass(mk)
        );
    }
    // The dwarf sequence (Pecaut & Mamajek 2013, values from memory) at its own rows.
    for r in DWARF_SEQUENCE {
        assert!((sequence_abs_mag(r[0], Band::V) - r[1]).abs() < 1e-12);
        assert!((sequence_abs_mag(r[0], Band::I) - (r[1] - r[2])).abs() < 1e-12);
        assert!((sequence_abs_mag(r[0], Band::K) - (r[1] - r[3])).abs() < 1e-12);
    }
    // The Sun (M_V = 4.83, V - K = 1.56; from memory) and the two K relations within 0.35
    // mag where both hold.
    assert!((absolute_magnitude(1.0, Band::V).unwrap() - 4.83).abs() < 1e-9);
    for mass in [0.1, 0.16, 0.23, 0.37, 0.44, 0.5, 0.57, 0.63] {
        let (mann, table) = (mann_abs_k(mass).unwrap(), sequence_abs_mag(mass, Band::K));
        assert!(
            (mann - table).abs() < 0.35,
            "{mass}: Mann {mann}, sequence {table}"
        );
    }
    // Fainter with falling mass in every band; dark below the hydrogen-burning limit.
    for band in [Band::V, Band::I, Band::K] {
        let mags: Vec<f64> = [1.5, 1.0, 0.7, 0.5, 0.3, 0.15, 0.09]
            .iter()
            .map(|&m| absolute_magnitude(m, band).unwrap())
            .collect();
        assert!(mags.windows(2).all(|w| w[1] > w[0]), "{band:?}: {mags:?}");
        assert!(absolute_magnitude(0.07, band).is_none());
    }
}

fn planet_event() -> EventData {
    EventData {
        te: Some(m(28.0, 1.0)),
        theta_e: Some(m(0.5, 0.05)),
        q: Some(2e-3),
        s: Some(1.2),
        ..Default::default()
    }
}

#[test]
fn remnant_probability_rises_as_the_imaging_limit_deepens() {
    let base = LensOptions {
        samples: 60_000,
        ..LensOptions::new(field())
    };
    let remnant = |limit: Option<f64>| {
        let light =
            limit.map(|mag| LensLight::new(Band::K, 0.3, Imaging::Fainter { mag }).unwrap());
        let post = infer(&planet_event(), &LensOptions { light, ..base }, &Silent).unwrap();
        let p = post.class_probabilities(true);
        p[2] + p[3] + p[4]
    };
    let ps: Vec<f64> = [None, Some(16.0), Some(18.0), Some(20.0), Some(22.0)]
        .into_iter()
        .map(remnant)
        .collect();
    assert!(ps.windows(2).all(|w| w[1] >= w[0]), "{ps:?}");
    assert!(ps[4] > 0.5 && ps[4] > 2.0 * ps[0], "{ps:?}");
}

#[test]
fn a_bright_host_that_is_seen_is_a_main_sequence_star() {
    // The excess a 0.6 M_sun host at 6 kpc would give (source at 8 kpc), measured to 0.05 mag.
    let light = LensLight::new(Band::K, 0.3, Imaging::Fainter { mag: 0.0 }).unwrap();
    let mag = light.apparent(0.6, 6.0, 8.0, -3.0).unwrap();
    let light = LensLight::new(Band::K, 0.3, Imaging::Excess { mag, err: 0.05 }).unwrap();
    let options = LensOptions {
        samples: 60_000,
        source: SourceDistance::Given { kpc: 8.0, err: 0.3 },
        light: Some(light),
        ..LensOptions::new(field())
    };
    let post = infer(&planet_event(), &options, &Silent).unwrap();
    let p = post.class_probabilities(true);
    assert!(p[0] > 0.99, "{p:?}");
    let host = post.quantiles(|s| s.host_mass, true, &[0.5])[0];
    assert!((0.45..0.8).contains(&host), "{host}");
}

#[test]
fn samples_do_not_depend_on_the_thread_count() {
    let options = LensOptions {
        samples: 20_000,
        ..LensOptions::new(field())
    };
    let runs: Vec<_> = [1, 3]
        .iter()
        .map(|&t| with_threads(t, || infer(&planet_event(), &options, &Silent).unwrap()))
        .collect();
    assert_eq!(runs[0].samples.len(), runs[1].samples.len());
    assert!(
        runs[0]
            .samples
            .iter()
            .zip(&runs[1].samples)
            .all(|(a, b)| a.weight.to_bits() == b.weight.to_bits()
                && a.dl.to_bits() == b.dl.to_bits())
    );
    let other = infer(
        &planet_event(),
        &LensOptions { seed: 2, ..options },
        &Silent,
    )
    .unwrap();
    assert_ne!(other.samples[0].dl, runs[0].samples[0].dl);
}

#[test]
fn cli_reads_the_fit_table_and_writes_its_outputs() {
    let dir = Scratch::new("nature");
    std::fs::write(
        dir.join("minima.csv"),
        "rank,s,s_err,q,q_err,tE,tE_err,rho,rho_err,chi2\n\
         1,1.25,0.01,0.002,0.0001,28,0.8,0.0012,0.0001,600\n\
         2,0.8,0.01,0.002,0.0001,27,0.8,NaN,NaN,640\n",
    )
    .unwrap();
    let args = [
        "--minima",
        "minima.csv",
        "--theta-star",
        "0.6,0.05",
        "--galactic",
        "1.2,-2.8",
        "--extinction",
        "0.25",
        "--fainter-than",
        "21.5",
        "--samples",
        "20000",
        "--out",
        "lens.csv",
        "--png",
        "lens.png",
        "--marginals",
        "marginals.png",
    ];
    let (code, _, err) = run_cli(&dir, "nature", &args);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("P(white dwarf)") && err.contains("most probable"),
        "{err}"
    );
    assert_eq!(
        common::listing(&dir),
        ["lens.csv", "lens.png", "marginals.png", "minima.csv"]
    );
    let csv = std::fs::read_to_string(dir.join("lens.csv")).unwrap();
    assert!(csv.starts_with("weight,weight_imaging,population,dl_kpc"));
    assert!(csv.lines().count() > 1000);
    // The second minimum has no rho: theta_* cannot give theta_E, and nothing is written.
    let bad = Scratch::new("nature-bad");
    std::fs::copy(dir.join("minima.csv"), bad.join("minima.csv")).unwrap();
    let (code, _, err) = run_cli(
        &bad,
        "nature",
        &[
            "--minima",
            "minima.csv",
            "--rank",
            "2",
            "--theta-star",
            "0.6,0.05",
            "--galactic",
            "1,-3",
            "--out",
            "x.csv",
        ],
    );
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("rho of rank 2") && err.lines().count() == 1,
        "{err}"
    );
    for (args, culprit) in [
        (
            vec!["--te", "30,0", "--galactic", "1,-3", "--out", "x.csv"],
            "--te",
        ),
        (
            vec!["--te", "30,1", "--galactic", "1,-95", "--out", "x.csv"],
            "--galactic",
        ),
        (
            vec![
                "--te",
                "30,1",
                "--galactic",
                "1,-3",
                "--band",
                "H",
                "--out",
                "x.csv",
            ],
            "--band",
        ),
        (
            vec!["--te", "30,1", "--galactic", "1,-3", "--out", "x.txt"],
            "--out",
        ),
        (
            vec![
                "--te",
                "30,1",
                "--galactic",
                "1,-3",
                "--ds",
                "20,1",
                "--out",
                "x.csv",
            ],
            "--ds",
        ),
    ] {
        let (code, _, err) = run_cli(&bad, "nature", &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains(culprit), "{args:?}: {err}");
    }
    assert_eq!(common::listing(&bad), ["minima.csv"]);
}
