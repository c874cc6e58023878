//! Parallax geometry and parallax models against astropy (tests/reference/parallax.py: the
//! built-in ephemeris of astropy for the Earth, its SkyCoord for north and east, Gould 2004's
//! geocentric offsets written out independently in numpy).

use crate::common;
mod recovery;

use causeway::fit::model::{BinaryModel, LensOrbit, Parallax, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::simulate::{Noise, Simulation};
use causeway::parallax::{
    earth_position, Ephemeris, Geometry, Observer, SkyPosition, SHORT_JD_ORIGIN,
};
use causeway::source::LimbDarkening;
use common::{run_cli, Scratch};

const OFFSET_COLUMNS: [&str; 12] = [
    "ra_deg", "dec_deg", "t0_par", "t", "pi_EN", "pi_EE", "ds_N", "ds_E", "sun_N", "sun_E", "dtau",
    "dbeta",
];

fn geometry(r: &[f64]) -> Geometry {
    let sky = SkyPosition::new(r[0], r[1]).unwrap();
    let origin = causeway::parallax::jd_origin(r[2]);
    Geometry::new(sky, r[2], origin).unwrap()
}

#[test]
fn earth_orbit_matches_astropy_to_3e_4_au_over_2000_2040() {
    let t = common::reference("parallax_earth.csv", &["jd", "x", "y", "z"]);
    assert!(t.rows.len() > 150);
    let mut worst: f64 = 0.0;
    for r in &t.rows {
        let p = earth_position(r[0]);
        let d = (0..3)
            .map(|k| (p[k] - r[1 + k]).powi(2))
            .sum::<f64>()
            .sqrt();
        worst = worst.max(d);
    }
    // The bound for a Keplerian orbit of the Earth-Moon barycentre.
    assert!(
        worst < 3e-4,
        "largest distance from astropy's Earth: {worst} au"
    );
}

#[test]
fn projected_offsets_match_astropy_at_the_bulge_and_the_poles() {
    let t = common::reference("parallax_offsets.csv", &OFFSET_COLUMNS);
    assert!(t.rows.len() >= 60);
    let (mut worst_ds, mut worst_sun): (f64, f64) = (0.0, 0.0);
    for r in &t.rows {
        let g = geometry(r);
        let d = g.offsets(&[r[3]], &Observer::Earth).unwrap()[0];
        // The Earth's velocity at t0,par includes the Moon's pull in astropy's ephemeris and not
        // in the barycentre's orbit: up to 12.6 m/s = 7.3e-6 au/d (1.02 km/s / 81.3, from
        // memory), a term linear in time that (t0, u0, tE) absorb.
        let allowed = 3e-4 + 7.5e-6 * (r[3] - r[2]).abs();
        worst_ds = worst_ds.max(((d.0 - r[6]).abs()).max((d.1 - r[7]).abs()) / allowed);
        let s = g.sun(r[3]);
        worst_sun = worst_sun.max((s.0 - r[8]).abs()).max((s.1 - r[9]).abs());
    }
    assert!(
        worst_sun < 3e-4,
        "Sun's projected position off by {worst_sun} au"
    );
    assert!(worst_ds < 1.0, "offsets off by {worst_ds} of the allowed");
    // A short time and the same full Julian date give the same offsets.
    let sky = SkyPosition::new(268.5, -29.2).unwrap();
    let short = Geometry::new(sky, 8300.0, SHORT_JD_ORIGIN).unwrap();
    let full = Geometry::new(sky, 2_458_300.0, 0.0).unwrap();
    let a = short.offsets(&[8250.0], &Observer::Earth).unwrap();
    let b = full.offsets(&[2_458_250.0], &Observer::Earth).unwrap();
    assert!((a[0].0 - b[0].0).abs() < 1e-12 && (a[0].1 - b[0].1).abs() < 1e-12);
}

fn straight(t0: f64, u0: f64, te: f64, alpha: f64) -> Trajectory {
    Trajectory::straight(t0, u0, te, alpha).unwrap()
}

#[test]
fn parallax_shifts_of_tau_and_beta_match_the_reference() {
    let t = common::reference("parallax_offsets.csv", &OFFSET_COLUMNS);
    let mut worst: f64 = 0.0;
    for r in &t.rows {
        let g = geometry(r);
        // alpha = 0 and u0 = 0: the lens frame's (x, y) is (tau, beta) itself.
        let te = 50.0;
        let tr = straight(r[2], 0.0, te, 0.0)
            .with_parallax(Some(Parallax {
                pi_en: r[4],
                pi_ee: r[5],
                geometry: g,
            }))
            .unwrap();
        let (x, y) = tr.positions_seen(&[r[3]], &Observer::Earth).unwrap()[0];
        let allowed = 3e-4 + 7.5e-6 * (r[3] - r[2]).abs(); // as for the offsets, per unit pi_E
        let pi = r[4].hypot(r[5]);
        let dtau = x - (r[3] - r[2]) / te;
        worst = worst
            .max((dtau - r[10]).abs() / (pi * allowed))
            .max((y - r[11]).abs() / (pi * allowed));
    }
    assert!(
        worst < 1.0,
        "(tau, beta) shifts off by {worst} of the allowed"
    );
}

/// A planetary binary and a source crossing near its caustic, seen over 60 days.
fn planetary(trajectory: Trajectory) -> BinaryModel {
    BinaryModel {
        s: 1.1,
        q: 5e-3,
        rho: 2e-3,
        trajectory,
    }
}

#[test]
fn orbital_motion_is_the_static_lens_of_each_time() {
    let t0k = 8300.0;
    let orbit = LensOrbit {
        ds_dt: 0.4,
        dalpha_dt: -0.9,
        t0_kep: t0k,
    };
    let base = straight(8300.0, 0.05, 30.0, 0.6);
    let moving = planetary(base.with_orbit(Some(orbit)).unwrap());
    assert_eq!(moving.kind(), "orbit");
    let times: Vec<f64> = (0..41).map(|k| 8290.0 + 0.5 * k as f64).collect();
    let a = moving
        .magnifications(&times, LimbDarkening::Uniform, 1e-4)
        .unwrap();
    let mut changed = 0;
    for (&t, &got) in times.iter().zip(&a) {
        // The same time through a static model whose s and alpha are this time's.
        let years = (t - t0k) / 365.25;
        let l = base.line();
        let frozen = BinaryModel {
            s: 1.1 + 0.4 * years,
            trajectory: straight(l.t0, l.u0, l.te, l.alpha - 0.9 * years),
            ..planetary(base)
        };
        let want = frozen
            .magnifications(&[t], LimbDarkening::Uniform, 1e-4)
            .unwrap()[0];
        assert!(
            (got - want).abs() <= 1e-12 * want,
            "t = {t}: {got} against {want}"
        );
        let still = planetary(base)
            .magnifications(&[t], LimbDarkening::Uniform, 1e-4)
            .unwrap()[0];
        if (still - got).abs() > 1e-3 * got {
            changed += 1;
        }
    }
    assert!(changed > 5, "orbital motion changed only {changed} points");
}

#[test]
fn the_ecliptic_pair_gives_nearly_the_same_curve_on_the_ecliptic() {
    // RA 18 h, Dec -23.44: on the ecliptic, where the Sun's offset lies along east alone.
    let ecliptic = SkyPosition::new(270.0, -23.4393).unwrap();
    let off = SkyPosition::new(270.0, 66.5607).unwrap(); // the north ecliptic pole
    let times: Vec<f64> = (0..121).map(|k| 8240.0 + k as f64).collect();
    let gap = |sky: SkyPosition| {
        let g = Geometry::new(sky, 8300.0, SHORT_JD_ORIGIN).unwrap();
        let p = Parallax {
            pi_en: 0.4,
            pi_ee: 0.15,
            geometry: g,
        };
        let tr = straight(8300.0, 0.08, 60.0, 0.4)
            .with_parallax(Some(p))
            .unwrap();
        let m = planetary(tr);
        let twin = planetary(tr.mirrored());
        assert_eq!(twin.trajectory.parallax().unwrap().pi_en, -0.4);
        let still = planetary(straight(8300.0, 0.08, 60.0, 0.4));
        let law = LimbDarkening::Uniform;
        let a = m.magnifications(&times, law, 1e-4).unwrap();
        let b = twin.magnifications(&times, law, 1e-4).unwrap();
        let c = still.magnifications(&times, law, 1e-4).unwrap();
        let rms = |x: &[f64], y: &[f64]| {
            (x.iter()
                .zip(y)
                .map(|(p, q)| (p / q - 1.0).powi(2))
                .sum::<f64>()
                / x.len() as f64)
                .sqrt()
        };
        (rms(&a, &b), rms(&a, &c))
    };
    let (pair, effect) = gap(ecliptic);
    assert!(effect > 0.01, "parallax changes the curve by {effect}");
    assert!(
        pair < 0.02 * effect,
        "pair {pair} against the effect {effect}"
    );
    // Off the ecliptic the pair is told apart.
    let (pair, effect) = gap(off);
    assert!(
        pair > 0.1 * effect,
        "pair {pair} against the effect {effect}"
    );
}

/// A long event toward the bulge with parallax and orbital motion, on the command line.
const MOVING: &str = "--s 1.2 --q 4e-3 --t0 8300 --u0 0.1 --te 60 --alpha 30 --rho 0.002 \
     --ra 17:55:00 --dec -29:30:00 --pi-e-n 0.3 --pi-e-e -0.1 --dalpha-dt 0.5 --ds-dt 0.1 \
     --time-range 8200,8400,300 --sigma-mag 0.001 --seed 3";

fn moving_model() -> BinaryModel {
    let sky = SkyPosition::parse("17:55:00", "-29:30:00").unwrap();
    let g = Geometry::new(sky, 8300.0, SHORT_JD_ORIGIN).unwrap();
    let tr = straight(8300.0, 0.1, 60.0, 30f64.to_radians())
        .with_parallax(Some(Parallax {
            pi_en: 0.3,
            pi_ee: -0.1,
            geometry: g,
        }))
        .unwrap()
        .with_orbit(Some(LensOrbit {
            ds_dt: 0.1,
            dalpha_dt: 0.5,
            t0_kep: 8300.0,
        }))
        .unwrap();
    BinaryModel {
        s: 1.2,
        q: 4e-3,
        rho: 2e-3,
        trajectory: tr,
    }
}

#[test]
fn simulate_writes_the_library_model_with_parallax_and_orbital_motion() {
    let dir = Scratch::new("parallax-simulate");
    let mut args: Vec<&str> = MOVING.split_whitespace().collect();
    args.extend(["--out", "event.csv"]);
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 0, "{err}");
    let file = DataSet::read(&dir.join("event.csv"), 22.0).unwrap();
    let sim = Simulation {
        seed: 3,
        noise: Noise::Magnitude { sigma: 0.001 },
        ..Simulation::new(moving_model(), LimbDarkening::Uniform)
    };
    let lib = sim.run(&file.times).unwrap();
    assert_eq!(file.flux, lib.flux);
    assert_eq!(moving_model().kind(), "parallax+orbit");
    // Without the options the curve is another one.
    let still = Simulation {
        model: BinaryModel {
            trajectory: straight(8300.0, 0.1, 60.0, 30f64.to_radians()),
            ..moving_model()
        },
        ..sim
    };
    assert_ne!(still.run(&file.times).unwrap().flux, lib.flux);
}

#[test]
fn a_projected_offset_ephemeris_gives_the_heliocentric_ones_curve() {
    // The satellite of the test below (the Earth plus 1 au along the celestial pole) written
    // as its offset from the Earth projected on the sky: (north . z, east . z), constant. The
    // curves agree to the linear interpolation of the daily heliocentric rows (4e-5 au).
    let sky = SkyPosition::parse("17:55:00", "-29:30:00").unwrap();
    let basis = sky.basis();
    let (mut heliocentric, mut projected) =
        (String::from("t,x,y,z\n"), String::from("t,north,east\n"));
    for k in 0..=220 {
        let t = 8190.0 + k as f64;
        let r = earth_position(t + SHORT_JD_ORIGIN);
        heliocentric.push_str(&format!("{t},{},{},{}\n", r[0], r[1], r[2] + 1.0));
        projected.push_str(&format!("{t},{},{}\n", basis.north[2], basis.east[2]));
    }
    let a = Ephemeris::parse(&heliocentric, "sat.csv").unwrap();
    let b = Ephemeris::parse(&projected, "sat-projected.csv").unwrap();
    assert!(!a.projected && b.projected);
    let times: Vec<f64> = (0..200).map(|k| 8200.0 + k as f64).collect();
    let m = moving_model();
    let seen = |e: &Ephemeris| {
        m.magnifications_seen(&times, &Observer::At(e), LimbDarkening::Uniform, 1e-6)
            .unwrap()
    };
    let (ma, mb) = (seen(&a), seen(&b));
    let worst = ma
        .iter()
        .zip(&mb)
        .map(|(x, y)| (x / y - 1.0).abs())
        .fold(0.0, f64::max);
    assert!(worst < 1e-3, "{worst}");
    // And the offsets from the Earth's own curve are real (the test below: > 20% at the peak).
    let ground = m
        .magnifications(&times, LimbDarkening::Uniform, 1e-6)
        .unwrap();
    assert!(mb
        .iter()
        .zip(&ground)
        .any(|(x, y)| (x / y - 1.0).abs() > 0.1));
}

#[test]
fn a_plan_site_in_space_is_seen_from_its_ephemeris() {
    // A plan of a ground site and a satellite (24-hour nights, 1 au north of the Earth, as
    // projected offsets): the satellite's file follows the curve seen from its positions, the
    // ground's the Earth's (noise 0.001 mag).
    let dir = Scratch::new("parallax-plan-satellite");
    let basis = SkyPosition::parse("17:55:00", "-29:30:00").unwrap().basis();
    let mut eph = String::from("t,north,east\n");
    for k in 0..=220 {
        eph.push_str(&format!(
            "{},{},{}\n",
            8190 + k,
            basis.north[2],
            basis.east[2]
        ));
    }
    std::fs::write(dir.join("sat.csv"), &eph).unwrap();
    let site = |name: &str, hours: f64, extra: &str| {
        format!(
            "[[site]]\nname = \"{name}\"\nseason = [8250.0, 8350.0]\nnight_hours = {hours}\n\
             night_middle = 0.5\ninterval_minutes = 240.0\n\
             errors = {{ floor = 0.001, photon = 0.0, reference_mag = 19.0 }}\n{extra}\n"
        )
    };
    let plan = site("ground", 8.0, "") + &site("space", 24.0, "ephemeris = \"sat.csv\"");
    std::fs::write(dir.join("plan.toml"), plan).unwrap();
    std::fs::create_dir(dir.join("data")).unwrap();
    let model: String = MOVING.split("--time-range").next().unwrap().to_string();
    let mut args: Vec<&str> = model.split_whitespace().collect();
    args.extend(["--plan", "plan.toml", "--out-dir", "data", "--seed", "4"]);
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 0, "{err}");
    let m = moving_model();
    let ephemeris = Ephemeris::parse(&eph, "sat.csv").unwrap();
    for (file, observer) in [
        ("data/ground.csv", Observer::Earth),
        ("data/space.csv", Observer::At(&ephemeris)),
    ] {
        let set = DataSet::read(&dir.join(file), 22.0).unwrap();
        let a = m
            .magnifications_seen(&set.times, &observer, LimbDarkening::Uniform, 1e-5)
            .unwrap();
        let worst = a
            .iter()
            .zip(&set.flux)
            .map(|(a, f)| (2.5 * (a / f).log10()).abs())
            .fold(0.0, f64::max);
        assert!(worst < 0.006, "{file}: {worst} mag from its curve");
    }
}

#[test]
fn a_satellite_one_au_away_sees_another_curve() {
    // A heliocentric ephemeris: the Earth's position plus 1 au along the celestial north
    // (nearly across the bulge's line of sight: Dec -29.5).
    let dir = Scratch::new("parallax-satellite");
    let mut text = String::from("t,x,y,z\n");
    for k in 0..=220 {
        let t = 8190.0 + k as f64;
        let r = earth_position(t + SHORT_JD_ORIGIN);
        text.push_str(&format!("{t},{},{},{}\n", r[0], r[1], r[2] + 1.0));
    }
    std::fs::write(dir.join("sat.csv"), &text).unwrap();
    let mut args: Vec<&str> = MOVING.split_whitespace().collect();
    args.extend(["--ephemeris", "sat.csv", "--out", "sat-event.csv"]);
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 0, "{err}");
    let sat = DataSet::read(&dir.join("sat-event.csv"), 22.0).unwrap();
    let eph = Ephemeris::parse(&text, "sat.csv").unwrap();
    let m = moving_model();
    let seen = m
        .magnifications_seen(
            &sat.times,
            &Observer::At(&eph),
            LimbDarkening::Uniform,
            1e-4,
        )
        .unwrap();
    let ground = m
        .magnifications(&sat.times, LimbDarkening::Uniform, 1e-4)
        .unwrap();
    // The file follows the satellite's curve (noise 0.001 mag), not the ground's.
    let mags: Vec<f64> = seen.iter().map(|a| 22.0 - 2.5 * a.log10()).collect();
    let file_mags: Vec<f64> = sat.flux.iter().map(|f| 22.0 - 2.5 * f.log10()).collect();
    let worst = mags
        .iter()
        .zip(&file_mags)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    assert!(worst < 0.006, "{worst} mag from the satellite's curve");
    // 1 au at pi_E = 0.32 moves the source by about 0.3 Einstein radii: a peak of another
    // height (at u0 = 0.1, A is about 1/u).
    let peak = |a: &[f64]| a.iter().copied().fold(0.0, f64::max);
    assert!((peak(&seen) / peak(&ground) - 1.0).abs() > 0.2);
    // The ephemeris must cover the data.
    let late = MOVING.replace("8200,8400,300", "8300,8500,10");
    let mut args: Vec<&str> = late.split_whitespace().collect();
    args.extend(["--ephemeris", "sat.csv", "--out", "late.csv"]);
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 2, "{err}");
    assert!(!dir.join("late.csv").exists());
    assert!(err.contains("sat.csv: no position"), "{err}");
}

#[test]
fn parallax_options_need_coordinates() {
    let dir = Scratch::new("parallax-options");
    let args = [
        "--s",
        "1.2",
        "--q",
        "4e-3",
        "--t0",
        "8300",
        "--u0",
        "0.1",
        "--te",
        "60",
        "--alpha",
        "30",
        "--time-range",
        "8200,8400,30",
        "--pi-e-n",
        "0.3",
        "--out",
        "e.csv",
    ];
    let (code, _, err) = run_cli(&dir, "simulate", &args);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--ra"), "{err}");
    let mut bad = args.to_vec();
    bad.extend(["--ra", "25:00:00", "--dec", "-29"]);
    let (code, _, err) = run_cli(&dir, "simulate", &bad);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--ra: hours"), "{err}");
    assert!(!dir.join("e.csv").exists());
}

#[test]
#[ignore = "slow: a library of 4 maps, the static fit and the parallax stage (about half a minute)"]
fn search_with_coordinates_adds_the_parallax_rows() {
    let dir = Scratch::new("parallax-search");
    let sim = [
        "--s",
        "1.3",
        "--q",
        "3e-3",
        "--rho",
        "0.01",
        "--t0",
        "8300",
        "--u0",
        "0.15",
        "--te",
        "25",
        "--alpha",
        "343.56",
        "--time-range",
        "8250,8350,200",
        "--ra",
        "18:00:00",
        "--dec",
        "-29:00:00",
        "--pi-e-n",
        "0.5",
        "--pi-e-e",
        "0.2",
        "--out",
        "event.csv",
    ];
    let (code, _, err) = run_cli(&dir, "simulate", &sim);
    assert_eq!(code, 0, "{err}");
    std::fs::write(
        dir.join("lib.toml"),
        "s = [1.25, 1.35]\nq = [2e-3, 4e-3]\npixels = 200\nrays = 1\n\
         engine = \"polygon\"\n[window]\nrule = \"planetary\"\n",
    )
    .unwrap();
    let search = [
        "event.csv",
        "--rho",
        "0.01",
        "--refine",
        "1",
        "--max-iters",
        "40",
        "--library",
        "lib.toml",
        "--store",
        "maps",
        "--ra",
        "270",
        "--dec",
        "-29",
        "--no-orbit",
        "--parallax-minima",
        "1",
        "--theta-star",
        "0.6",
        "--ds",
        "8",
    ];
    let (code, csv, err) = run_cli(&dir, "search", &search);
    assert_eq!(code, 0, "{err}");
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    let col = |row: &[&str], name: &str| {
        let k = header.iter().position(|h| *h == name);
        row[k.unwrap_or_else(|| panic!("no column {name} in {csv}"))].to_string()
    };
    let models: Vec<String> = rows.iter().map(|r| col(r, "model")).collect();
    assert_eq!(
        models.iter().filter(|m| *m == "parallax").count(),
        2,
        "{csv}"
    );
    assert_eq!(models[0], "static");
    let first = rows
        .iter()
        .position(|r| col(r, "model") == "parallax")
        .unwrap();
    let p = &rows[first];
    assert_eq!(col(p, "static_rank"), "1");
    let pn: f64 = col(p, "pi_EN").parse().unwrap();
    let pe: f64 = col(p, "pi_EE").parse().unwrap();
    let (sn, se): (f64, f64) = (
        col(p, "pi_EN_err").parse().unwrap(),
        col(p, "pi_EE_err").parse().unwrap(),
    );
    assert!(
        (pn - 0.5).abs() < 3.0 * sn && (pe - 0.2).abs() < 3.0 * se,
        "{csv}"
    );
    let gain: f64 = col(p, "delta_chi2_static").parse().unwrap();
    // 25 days of a 0.5 parallax over 100 days: a weak signal, but above 3 sigma.
    assert!(gain > 9.0, "{csv}");
    let alpha: f64 = col(&rows[first + 1], "alpha_deg").parse().unwrap();
    assert!((0.0..360.0).contains(&alpha), "{csv}");
    assert_eq!(col(&rows[0], "pi_EN"), "");
    assert!(err.contains("parallax:"), "{err}");
    // The lens from theta_E = theta_* / rho and pi_E (Gould 2000), D_L from --ds alone.
    let num = |name: &str| -> f64 { col(p, name).parse().unwrap() };
    let mass = num("theta_E_mas") / (causeway::fit::scales::kappa() * pn.hypot(pe));
    assert!((num("lens_mass_msun") / mass - 1.0).abs() < 1e-9, "{csv}");
    let dl = 1.0 / (num("theta_E_mas") * pn.hypot(pe) + 1.0 / 8.0);
    assert!((num("lens_dl_kpc") / dl - 1.0).abs() < 1e-9, "{csv}");
    assert!(num("lens_mass_msun_err") > 0.0, "{csv}");
    assert_eq!(col(&rows[0], "lens_mass_msun"), "");
    assert_eq!(col(&rows[0], "mass_total_msun"), ""); // no --dl: no static masses
}

#[test]
fn the_lens_from_theta_e_and_pi_e_matches_astropy() {
    use causeway::fit::scales::{ParallaxMeasure, LENS_NAMES};
    let inputs = [
        "ra_deg",
        "dec_deg",
        "t0_par",
        "theta_E_mas",
        "tE_days",
        "pi_EN",
        "pi_EE",
        "s",
        "q",
        "ds_kpc",
        "ds_dt",
        "dalpha_dt",
    ];
    let columns: Vec<&str> = inputs.iter().chain(LENS_NAMES.iter()).copied().collect();
    let t = common::reference("parallax_lens.csv", &columns);
    let mut unbound = 0;
    for r in &t.rows {
        let g = geometry(r);
        let m = ParallaxMeasure {
            theta_e_mas: r[3],
            te_days: r[4],
            pi_e: (r[5], r[6]),
            s: r[7],
            q: r[8],
            ds_kpc: Some(r[9]),
            earth_velocity: g.earth_velocity(),
            rates: Some((r[10], r[11])),
        };
        let v = m.lens();
        for (k, name) in LENS_NAMES.iter().enumerate() {
            let want = r[12 + k];
            // The heliocentric motion uses our Earth's velocity (the barycentre's orbit, without
            // the Moon's 12.6 m/s of 30 km/s); everything else is exact arithmetic.
            let tol = if name.starts_with("mu_hel") || *name == "tE_hel_days" {
                2e-3 * r[21].max(want.abs())
            } else {
                1e-12 * want.abs()
            };
            assert!(
                (v[k] - want).abs() <= tol,
                "{name}: {} against astropy {want}",
                v[k]
            );
        }
        if v[10] >= 1.0 {
            unbound += 1;
        }
    }
    assert_eq!(unbound, 1, "one invented orbit is not bound");
}

#[test]
fn lens_uncertainties_follow_the_covariance() {
    use causeway::fit::scales::ParallaxMeasure;
    let m = ParallaxMeasure {
        theta_e_mas: 0.5,
        te_days: 40.0,
        pi_e: (0.3, -0.4),
        s: 1.1,
        q: 1e-3,
        ds_kpc: Some(8.0),
        earth_velocity: (1.0, 5.0),
        rates: None,
    };
    // theta_E known to 2% alone: M = theta_E / (kappa pi_E) to 2%, pi_rel to 2%.
    let mut cov = vec![vec![0.0; 6]; 6];
    cov[0][0] = (0.02 * 0.5f64).powi(2);
    let (v, e) = m.lens_with_errors(&cov);
    assert!((e[0] / v[0] - 0.02).abs() < 1e-6, "{}", e[0] / v[0]);
    assert!((e[3] / v[3] - 0.02).abs() < 1e-6);
    // pi_E,N and pi_E,E fully anticorrelated along |pi_E|: sigma(|pi_E|) = 0.01 gives M to 2%
    // (|pi_E| = 0.5, its gradient (0.6, -0.8)).
    let mut cov = vec![vec![0.0; 6]; 6];
    let g = [0.6, -0.8];
    for i in 0..2 {
        for j in 0..2 {
            cov[2 + i][2 + j] = 1e-4 * g[i] * g[j];
        }
    }
    let (v, e) = m.lens_with_errors(&cov);
    assert!((e[0] / v[0] - 0.02).abs() < 1e-5, "{}", e[0] / v[0]);
    // Without orbital motion the energy ratio is unknown.
    assert!(v[10].is_nan() && e[10].is_nan());
}
