//! Observing plans: nightly windows, follow-up cadence, lost nights, the error model, the true
//! error scale, outliers, the time offset, determinism and bad plans.

use super::{planetary, words};
use crate::common::{listing, reference, root, run_cli, Scratch};
use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::simulate::plan::{ErrorModel, Observed, ObservingPlan, Site, EXAMPLE_PLAN};
use causeway::fit::simulate::{Synthetic, OUTLIER_SIGMAS};
use causeway::source::LimbDarkening;
use std::sync::OnceLock;

/// Two survey sites (the first in magnitudes with a follow-up window, the second in flux with a
/// larger true error scale) and a follow-up site, over 400 nights.
const PLAN: &str = r#"
[[site]]
name = "a"
fs = 5.0
fb = 1.0
season = [0.0, 400.0]
night_hours = 8.0
night_middle = 0.2
interval_minutes = 30.0
lost_nights = 0.3
followup = [[199.0, 202.0]]
followup_minutes = 5.0
errors = { floor = 0.005, photon = 0.01, reference_mag = 19.0 }
outliers = 0.01

[[site]]
name = "b"
output = "flux"
fs = 3.0
season = [0.0, 400.0]
night_hours = 6.0
night_middle = 0.6
interval_minutes = 40.0
lost_nights = 0.1
errors = { floor = 0.008, photon = 0.02, reference_mag = 19.0 }
error_scale = 1.5
outliers = 0.02

[[site]]
name = "c"
season = [190.0, 210.0]
night_hours = 10.0
night_middle = 0.9
followup = [[199.0, 202.0]]
followup_minutes = 2.0
errors = { floor = 0.004, photon = 0.006, reference_mag = 19.0 }
"#;

/// The plan's event: the planetary model crossing its caustic near t = 200.
fn plan_model() -> BinaryModel {
    BinaryModel {
        trajectory: Trajectory::straight(200.0, 0.02, 30.0, 40f64.to_radians()).unwrap(),
        ..planetary()
    }
}

fn plan() -> ObservingPlan {
    ObservingPlan::parse(PLAN, "plan.toml").unwrap()
}

/// The plan observed once with seed 11 (shared by the tests).
fn observed() -> &'static [Observed] {
    static SITES: OnceLock<Vec<Observed>> = OnceLock::new();
    SITES.get_or_init(|| {
        plan()
            .observe(&plan_model(), LimbDarkening::Uniform, 11, 1e-5)
            .unwrap()
    })
}

/// Distance (days) of `t` from the middle of its nearest night.
fn from_night_middle(t: f64, site: &Site) -> f64 {
    let x = t - site.night_middle;
    x - x.round()
}

#[test]
fn points_lie_in_the_nights_with_daily_gaps() {
    for (site, obs) in plan().sites.iter().zip(observed()) {
        let t = &obs.data.times;
        let half = site.night_hours / 48.0;
        let step = site.interval_minutes.unwrap_or(f64::INFINITY) / 1440.0;
        for (i, &ti) in t.iter().enumerate() {
            assert!(
                from_night_middle(ti, site).abs() <= half + 1e-9,
                "{}: {ti}",
                site.name
            );
            assert!(ti >= site.season.0 && ti < site.season.1);
            if i > 0 {
                // A step within the night, or a jump over the day's gap.
                let gap = ti - t[i - 1];
                let day = (24.0 - site.night_hours) / 24.0;
                assert!(
                    gap <= step + 1e-9 || gap >= day - 1e-9,
                    "{}: gap {gap} at {ti}",
                    site.name
                );
            }
        }
        // One daily gap between each two nights with data.
        let mut nights: Vec<f64> = t
            .iter()
            .map(|&ti| (ti - site.night_middle).round())
            .collect();
        nights.dedup();
        let gaps = t.windows(2).filter(|w| w[1] - w[0] > 0.5).count();
        assert_eq!(gaps + 1, nights.len(), "{}", site.name);
        assert!(nights.len() > 2);
    }
}

#[test]
fn followup_windows_are_observed_at_their_cadence() {
    let plan = plan();
    let in_window = |t: f64| (199.0..202.0).contains(&t);
    let median = |mut v: Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2] * 1440.0
    };
    for (site, obs) in plan.sites.iter().zip(observed()) {
        let d = &obs.data;
        let flags: Vec<bool> = d.times.iter().map(|&t| in_window(t)).collect();
        if site.followup.is_empty() {
            assert_eq!(d.followup_count(), 0);
            continue;
        }
        assert_eq!(d.followup, flags, "{}", site.name);
        // Spacing of successive points in the same night, inside and outside the window.
        let spacing = |inside: bool| {
            let w = d.times.windows(2).filter(|w| w[1] - w[0] < 0.2);
            median(
                w.filter(|w| in_window(w[0]) == inside)
                    .map(|w| w[1] - w[0])
                    .collect(),
            )
        };
        assert!(
            (spacing(true) - site.followup_minutes).abs() < 1e-6,
            "{}",
            site.name
        );
        match site.interval_minutes {
            Some(m) => assert!((spacing(false) - m).abs() < 1e-6, "{}", site.name),
            None => assert!(flags.iter().all(|&f| f), "{} observed outside", site.name),
        }
    }
    // Site a: nights 199 to 201 lie inside the window and hold 6 times the points of the others
    // (30 against 5 minutes).
    let (site, a) = (&plan.sites[0], &observed()[0].data);
    let mut per_night = std::collections::BTreeMap::new();
    for &t in &a.times {
        *per_night
            .entry((t - site.night_middle).round() as i64)
            .or_insert(0) += 1;
    }
    let (window, others): (Vec<_>, Vec<_>) =
        per_night.iter().partition(|(k, _)| (199..202).contains(*k));
    assert!(!window.is_empty());
    assert!(others.iter().all(|(_, &n)| n == 16), "{others:?}");
    assert!(window.iter().all(|(_, &n)| n == 96), "{window:?}");
}

#[test]
fn lost_nights_follow_the_binomial() {
    // Nights lost ~ Binomial(N, p); within 4 standard deviations of N p (normal approximation,
    // common practice; two-sided probability about 6e-5).
    for (site, obs) in plan().sites.iter().zip(observed()).take(2) {
        let half = site.night_hours / 48.0;
        let (start, end) = site.season;
        // Nights whose window meets the season, counted here from the definition.
        let nights = (-5..(end as i64 + 5))
            .filter(|&k| {
                let m = k as f64 + site.night_middle;
                (m - half).max(start) < (m + half).min(end)
            })
            .count();
        let mut seen: Vec<i64> = obs
            .data
            .times
            .iter()
            .map(|&t| (t - site.night_middle).round() as i64)
            .collect();
        seen.dedup();
        let lost = nights - seen.len();
        let (n, p) = (nights as f64, site.lost_nights);
        let bound = 4.0 * (n * p * (1.0 - p)).sqrt();
        assert!(
            (lost as f64 - n * p).abs() < bound,
            "{}: {lost} of {nights} lost",
            site.name
        );
        assert_eq!((obs.nights, obs.nights_lost), (nights, lost));
    }
}

#[test]
fn reported_errors_follow_the_error_model() {
    // Hand computation (Python's math module) of sqrt(floor^2 + (photon 10^(0.2 (m - 19)))^2)
    // with floor 0.005, photon 0.01.
    let e = ErrorModel {
        floor: 0.005,
        photon: 0.01,
        reference_mag: 19.0,
    };
    for (m, sigma) in [
        (19.0, 0.011180339887498949),
        (21.0, 0.025611664227070313),
        (16.5, 0.005916079783099617),
    ] {
        assert!((e.sigma_mag(m) - sigma).abs() < 1e-15, "m = {m}");
    }
    // The flux form: sigma_F^2 = (0.4 ln 10)^2 (floor^2 F^2 + photon^2 F_ref F), F_ref the flux of
    // magnitude 19 at zero point 22.
    let f_ref = 10f64.powf(1.2);
    for f in [0.5, 15.0, 300.0] {
        let k = 0.4 * 10f64.ln();
        let expected = k * (0.005f64.powi(2) * f * f + 0.01f64.powi(2) * f_ref * f).sqrt();
        assert!((e.sigma_flux(f, 22.0) - expected).abs() < 1e-12 * expected);
    }
    // The files' errors at every point, from the true magnifications: site a in magnitudes
    // (fs 5, fb 1), site b in flux (fs 3, fb 0).
    let (a, b) = (&observed()[0].data, &observed()[1].data);
    for i in 0..a.times.len() {
        let m = 22.0 - 2.5 * (5.0 * a.magnifications[i] + 1.0).log10();
        let expected = (0.005f64.powi(2) + (0.01 * 10f64.powf(0.2 * (m - 19.0))).powi(2)).sqrt();
        assert!(
            (a.errors[i] - expected).abs() < 1e-12,
            "a, t = {}",
            a.times[i]
        );
    }
    let b_errors = ErrorModel {
        floor: 0.008,
        photon: 0.02,
        reference_mag: 19.0,
    };
    for i in 0..b.times.len() {
        let f = 3.0 * b.magnifications[i];
        assert!((b.errors[i] - b_errors.sigma_flux(f, 22.0)).abs() < 1e-12 * b.errors[i]);
    }
    // The source brightens at the peak: the errors fall there.
    let peak =
        (0..a.times.len()).max_by(|&i, &j| a.magnifications[i].total_cmp(&a.magnifications[j]));
    assert!(a.errors[peak.unwrap()] < 0.5 * a.errors[0]);
}

/// Normalised residuals `(value - model) / error` of the first 2000 points that are not outliers.
fn residuals(d: &Synthetic) -> Vec<f64> {
    (0..d.times.len())
        .filter(|&i| !d.outliers[i])
        .map(|i| (d.values[i] - d.model[i]) / d.errors[i])
        .take(2000)
        .collect()
}

#[test]
fn true_error_scale_sets_the_scatter() {
    // sum z^2 / scale^2 of 2000 residuals must lie in the central 99.9% of the chi-square
    // distribution with 2000 degrees of freedom (tests/reference/simulate_noise.csv, from
    // scipy.stats.chi2.ppf); the standard deviation of the residuals is sqrt(chi2 / 2000).
    let r = &reference("simulate_noise.csv", &["points", "chi2_low", "chi2_high"]).rows[0];
    assert_eq!(r[0], 2000.0);
    let inside = |chi2: f64| chi2 > r[1] && chi2 < r[2];
    for (site, obs) in plan().sites.iter().zip(observed()).take(2) {
        let z = residuals(&obs.data);
        assert_eq!(z.len(), 2000);
        let chi2: f64 = z.iter().map(|v| v * v).sum();
        let scale = site.error_scale;
        assert!(
            inside(chi2 / (scale * scale)),
            "{}: chi2 {chi2}, scale {scale}",
            site.name
        );
        if scale != 1.0 {
            // Taking the reported errors at face value fails the same test.
            assert!(!inside(chi2), "{}: chi2 {chi2}", site.name);
        }
    }
}

#[test]
fn outliers_are_flagged_and_as_frequent_as_stated() {
    // Outlier counts ~ Binomial(n, fraction): within 4 standard deviations (normal approximation,
    // common practice).
    let (lo, hi) = OUTLIER_SIGMAS;
    for (site, obs) in plan().sites.iter().zip(observed()) {
        let d = &obs.data;
        let (n, p) = (d.times.len() as f64, site.outliers);
        let k = d.outlier_count() as f64;
        assert!(
            (k - n * p).abs() <= 4.0 * (n * p * (1.0 - p)).sqrt(),
            "{}: {k} outliers",
            site.name
        );
        for i in 0..d.times.len() {
            let z = ((d.values[i] - d.model[i]) / d.errors[i]).abs();
            let noise = 6.0 * site.error_scale; // |z| > 6: probability 2e-9 per point
            if d.outliers[i] {
                assert!(
                    z > lo - noise && z < hi + noise,
                    "{}: outlier at {z} sigma",
                    site.name
                );
            } else {
                assert!(z < noise, "{}: unflagged point at {z} sigma", site.name);
            }
        }
    }
    let a = &observed()[0].data;
    let mut far: Vec<f64> = (0..a.times.len())
        .filter(|&i| a.outliers[i])
        .map(|i| ((a.values[i] - a.model[i]) / a.errors[i]).abs())
        .collect();
    far.sort_by(f64::total_cmp);
    // Log-uniform in [5, 20]: median 10.
    assert!(
        far[far.len() / 2] > 7.0 && far[far.len() / 2] < 14.0,
        "{far:?}"
    );
}

#[test]
fn time_offset_moves_only_the_written_times() {
    let model = plan_model();
    let run = |plan: &ObservingPlan| {
        plan.observe(&model, LimbDarkening::Uniform, 11, 1e-5)
            .unwrap()
    };
    let shifted = ObservingPlan {
        time_offset: 2450000.0,
        ..plan()
    };
    let mut own = shifted.clone();
    own.sites[1].time_offset = Some(-100.0);
    for (offset_plan, offsets) in [
        (shifted, [2450000.0; 3]),
        (own, [2450000.0, -100.0, 2450000.0]),
    ] {
        for ((a, b), offset) in observed().iter().zip(run(&offset_plan)).zip(offsets) {
            assert_eq!(b.data.values, a.data.values);
            let moved: Vec<f64> = a.data.times.iter().map(|t| t + offset).collect();
            assert_eq!(b.data.times, moved);
        }
    }
    // A site's data do not depend on the sites after it.
    let mut first = plan();
    first.sites.truncate(1);
    assert_eq!(run(&first)[0], observed()[0]);
}

#[test]
fn plan_files_are_the_same_whatever_the_threads() {
    let dir = Scratch::new("simulate-plan");
    std::fs::write(dir.join("plan.toml"), PLAN).unwrap();
    let run = |out: &str, extra: &[&str]| {
        std::fs::create_dir_all(dir.join(out)).unwrap();
        let truth = format!("{out}/truth.csv");
        let mut args = words("--s 1.1 --q 2e-3 --t0 200 --u0 0.02 --te 30 --alpha 40 --rho 0.003");
        args.extend(["--plan", "plan.toml", "--out-dir", out, "--truth", &truth]);
        args.extend(extra);
        let (code, _, err) = run_cli(&dir, "simulate", &args);
        assert_eq!(code, 0, "{err}");
        assert_eq!(err.lines().count(), 4, "{err}"); // one line per site, then the seed
        listing(&dir.join(out))
            .iter()
            .map(|f| std::fs::read(dir.join(out).join(f)).unwrap())
            .collect::<Vec<_>>()
    };
    let one = run("one", &["--threads", "1", "--seed", "11"]);
    assert_eq!(
        listing(&dir.join("one")),
        ["a.csv", "b.csv", "c.csv", "truth.csv"]
    );
    assert_eq!(run("two", &["--threads", "2", "--seed", "11"]), one);
    assert_ne!(run("other", &["--threads", "2", "--seed", "12"])[0], one[0]);
    // The files hold the library's data; the truth table flags the outliers.
    let a = DataSet::read(&dir.join("one/a.csv"), 22.0).unwrap();
    assert_eq!(a, observed()[0].data_set().unwrap());
    let truth = String::from_utf8(one[3].clone()).unwrap();
    let flagged = truth
        .lines()
        .filter(|l| l.starts_with("a,") && l.ends_with(",1"))
        .count();
    assert_eq!(flagged, observed()[0].data.outlier_count());
}

#[test]
fn bad_plans_are_one_line_exit_2_and_no_file() {
    let dir = Scratch::new("simulate-plan-bad");
    std::fs::create_dir_all(dir.join("out")).unwrap();
    let model = "--s 1.1 --q 2e-3 --t0 200 --u0 0.02 --te 30 --alpha 40";
    let edits = [
        (
            "floor = 0.005,",
            "flor = 0.005,",
            "plan.toml:13: unknown field `flor`",
        ),
        (
            "lost_nights = 0.3",
            "lost_nights = 1.5",
            "site 'a': lost_nights",
        ),
        ("name = \"b\"", "name = \"a\"", "site 'a': name used twice"),
        (
            "season = [0.0, 400.0]",
            "season = [400.0, 0.0]",
            "site 'a': season",
        ),
        (
            "interval_minutes = 40.0\n",
            "",
            "site 'b': interval_minutes or followup",
        ),
        (
            "output = \"flux\"",
            "output = \"counts\"",
            "plan.toml:18: output: unknown 'counts'",
        ),
        ("name = \"c\"", "name = \"../c\"", "site '../c': name"),
        ("fs = 5.0", "fs = \"5\"", "plan.toml:4: invalid type"),
        ("fb = 1.0", "fb = -6.0", "site 'a': fs + fb"),
        (
            "night_hours = 6.0",
            "night_hours = 30.0",
            "site 'b': night_hours",
        ),
        (
            "season = [190.0, 210.0]",
            "season = [190.0, 190.001]",
            "site 'c': the plan gives 0",
        ),
    ];
    let mut cases: Vec<(String, Vec<&str>, &str)> = edits
        .iter()
        .map(|&(from, to, culprit)| {
            assert!(PLAN.contains(from), "{from}");
            (
                PLAN.replacen(from, to, 1),
                vec!["--out-dir", "out"],
                culprit,
            )
        })
        .collect();
    cases.push((PLAN.into(), vec!["--out-dir", "missing"], "--out-dir"));
    cases.push((
        PLAN.into(),
        vec!["--out-dir", "out", "--out", "x.csv"],
        "--out",
    ));
    cases.push((
        PLAN.into(),
        vec!["--out-dir", "out", "--truth", "out/a.csv"],
        "--truth",
    ));
    for (text, extra, culprit) in cases {
        std::fs::write(dir.join("plan.toml"), text).unwrap();
        let mut args = words(model);
        args.extend(["--plan", "plan.toml"]);
        args.extend(extra);
        let (code, _, err) = run_cli(&dir, "simulate", &args);
        assert_eq!(code, 2, "{culprit}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{culprit}: {err}");
        assert!(err.contains(culprit), "{culprit}: {err}");
        if !culprit.starts_with("--") {
            assert!(err.contains("plan.toml"), "{err}");
        }
        assert!(
            listing(&dir.join("out")).is_empty(),
            "{culprit}: wrote a file"
        );
    }
    let (code, _, err) = run_cli(
        &dir,
        "simulate",
        &[
            "--plan",
            "nowhere.toml",
            "--out-dir",
            "out",
            "--s",
            "1",
            "--q",
            "1",
            "--t0",
            "0",
            "--u0",
            "0.1",
            "--te",
            "9",
            "--alpha",
            "0",
        ],
    );
    assert!(code == 2 && err.contains("nowhere.toml"), "{err}");
}

#[test]
fn example_plan_is_the_readme_example_and_runs() {
    // The README shows the example plan that `--example-plan` prints.
    let readme = std::fs::read_to_string(root().join("README.md")).unwrap();
    let section = readme.split("## Synthetic photometry").nth(1).unwrap();
    let block = section
        .split("```toml\n")
        .nth(1)
        .unwrap()
        .split("```")
        .next()
        .unwrap();
    assert_eq!(block, EXAMPLE_PLAN);
    let dir = Scratch::new("simulate-example");
    let (code, out, _) = run_cli(&dir, "simulate", &["--example-plan"]);
    assert_eq!((code, out.as_str()), (0, EXAMPLE_PLAN));
    let plan = ObservingPlan::parse(EXAMPLE_PLAN, "example").unwrap();
    let model = BinaryModel {
        trajectory: Trajectory::straight(9009.6, 0.12, 25.0, 0.5).unwrap(),
        ..planetary()
    };
    let sites = plan
        .observe(&model, LimbDarkening::Uniform, 1, 1e-4)
        .unwrap();
    assert!(sites.iter().all(|s| s.data.times[0] > 2450000.0 + 8880.0));
}

#[test]
fn ready_made_plan_has_its_sites() {
    let plan = ObservingPlan::survey_with_followup((150.0, 250.0), &[(199.0, 202.0)], 2.0);
    let sites = plan
        .observe(&plan_model(), LimbDarkening::Uniform, 3, 1e-5)
        .unwrap();
    let names: Vec<&str> = sites.iter().map(|s| s.site.as_str()).collect();
    assert_eq!(names, ["survey-a", "survey-b", "survey-c", "followup"]);
    for (site, obs) in plan.sites.iter().zip(&sites) {
        assert_eq!(site.fb, 2.0 * site.fs);
        let data = obs.data_set().unwrap();
        assert_eq!(data.len(), obs.data.times.len());
        let hours: Vec<f64> = obs
            .data
            .times
            .iter()
            .map(|&t| (t - site.night_middle).rem_euclid(1.0))
            .collect();
        assert!(hours
            .iter()
            .all(|&h| h.min(1.0 - h) <= site.night_hours / 48.0 + 1e-9));
    }
    let follow = &sites[3].data;
    assert!(follow.times.iter().all(|t| (199.0..202.0).contains(t)));
    assert_eq!(follow.followup_count(), follow.times.len());
}
