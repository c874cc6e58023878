//! What the lens posterior says, as text and as a CSV of samples.

use super::mass::LensClass;
use super::posterior::{LensPosterior, LensSample};
use crate::table::fmt_f64;
use std::fmt::Write as _;

/// A quantity read from a sample.
pub type Quantity = fn(&LensSample) -> f64;

/// The quantities summarised, with their labels and units.
pub const QUANTITIES: [(&str, Quantity); 7] = [
    ("host mass (M_sun)", |s| s.host_mass),
    ("lens distance (kpc)", |s| s.dl),
    ("source distance (kpc)", |s| s.ds),
    ("companion mass (M_jup)", |s| s.planet_mjup),
    ("projected separation (au)", |s| s.separation_au),
    ("theta_E (mas)", |s| s.theta_e),
    ("mu_rel, heliocentric (mas/yr)", |s| s.mu_rel),
];

/// Samples lighter than this fraction of the heaviest are left out of the CSV.
pub const CSV_WEIGHT_FLOOR: f64 = 1e-6;

/// Long names of the classes, in the order of [`LensClass::ALL`].
pub const CLASS_NAMES: [&str; 5] = [
    "main-sequence star",
    "brown dwarf",
    "white dwarf",
    "neutron star",
    "black hole",
];

/// Median and 68% interval of `value`.
pub fn interval(post: &LensPosterior, value: impl Fn(&LensSample) -> f64, light: bool) -> [f64; 3] {
    let q = post.quantiles(value, light, &[0.5, 0.158_655_25, 0.841_344_75]);
    [q[0], q[1], q[2]]
}

fn fmt_interval([m, lo, hi]: [f64; 3]) -> String {
    if m.is_nan() {
        return "-".into();
    }
    format!("{m:.3} [{lo:.3}, {hi:.3}]")
}

/// The most probable class and its probability.
///
/// ```
/// use causeway::galaxy::{report::verdict, LensClass};
/// assert_eq!(verdict(&[0.1, 0.0, 0.8, 0.1, 0.0]), (LensClass::WhiteDwarf, 0.8));
/// ```
pub fn verdict(p: &[f64; 5]) -> (LensClass, f64) {
    let k = (0..5).fold(0, |best, k| if p[k] > p[best] { k } else { best });
    (LensClass::ALL[k], p[k])
}

/// A table for the terminal: medians and 68% intervals, class probabilities, without and with
/// the imaging, and the verdict.
///
/// ```
/// use causeway::galaxy::{infer, report::summary, EventData, LensOptions, Measured, Sightline};
/// let data = EventData { te: Some(Measured::new("tE", 20.0, 2.0).unwrap()), ..Default::default() };
/// let options = LensOptions { samples: 4096, ..LensOptions::new(Sightline::new(1.0, -3.0).unwrap()) };
/// let text = summary(&infer(&data, &options, &causeway::progress::Silent).unwrap());
/// assert!(text.contains("host mass") && text.contains("most probable"));
/// ```
pub fn summary(post: &LensPosterior) -> String {
    let light = post.has_light;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} samples, {:.0} effective{}",
        post.samples.len(),
        post.effective_samples(false),
        if light {
            format!(" ({:.0} with the imaging)", post.effective_samples(true))
        } else {
            String::new()
        }
    );
    let header = if light { "with imaging" } else { "" };
    let _ = writeln!(
        out,
        "{:<31} {:<30} {header}",
        "median [68% interval]", "without imaging"
    );
    for (name, f) in QUANTITIES {
        let _ = write!(
            out,
            "{name:<31} {:<30}",
            fmt_interval(interval(post, f, false))
        );
        if light {
            let _ = write!(out, " {}", fmt_interval(interval(post, f, true)));
        }
        out.push('\n');
    }
    let (p0, p1) = (
        post.class_probabilities(false),
        post.class_probabilities(true),
    );
    for (k, name) in CLASS_NAMES.iter().enumerate() {
        let _ = write!(out, "{:<31} {:<30.4}", format!("P({name})"), p0[k]);
        if light {
            let _ = write!(out, " {:.4}", p1[k]);
        }
        out.push('\n');
    }
    let (class, p) = verdict(if light { &p1 } else { &p0 });
    let k = LensClass::ALL.iter().position(|&c| c == class).unwrap_or(0);
    let _ = writeln!(
        out,
        "most probable: a {} (P = {p:.3}{})",
        CLASS_NAMES[k],
        if light { ", with the imaging" } else { "" }
    );
    out
}

/// CSV of the samples that carry weight: those whose weight, with or without the imaging, is
/// above [`CSV_WEIGHT_FLOOR`] times the largest (the rest together carry at most that fraction
/// times their number of the total; a few 1e-6 in practice). Columns:
/// `weight,weight_imaging,population,dl_kpc,ds_kpc,mass_total_msun,mass_host_msun,
/// mass_companion_mjup,separation_au,theta_E_mas,mu_rel_mas_per_yr,pi_rel_mas,tE_days,
/// p_ms,p_bd,p_wd,p_ns,p_bh,host_mag`; empty where undefined (no q, no s, a dark host).
pub fn samples_csv(post: &LensPosterior) -> String {
    let mut out = String::from(
        "weight,weight_imaging,population,dl_kpc,ds_kpc,mass_total_msun,mass_host_msun,\
         mass_companion_mjup,separation_au,theta_E_mas,mu_rel_mas_per_yr,pi_rel_mas,tE_days",
    );
    for c in LensClass::ALL {
        let _ = write!(out, ",p_{}", c.name());
    }
    out.push_str(",host_mag\n");
    let num = |v: f64| {
        if v.is_finite() {
            fmt_f64(v)
        } else {
            String::new()
        }
    };
    let max = |f: fn(&LensSample) -> f64| post.samples.iter().map(f).fold(0.0, f64::max);
    let (w0, w1) = (
        CSV_WEIGHT_FLOOR * max(|s| s.weight),
        CSV_WEIGHT_FLOOR * max(|s| s.weight_light),
    );
    for s in post
        .samples
        .iter()
        .filter(|s| s.weight > w0 || s.weight_light > w1)
    {
        let _ = write!(
            out,
            "{},{},{}",
            num(s.weight),
            num(s.weight_light),
            s.population.name()
        );
        for v in [
            s.dl,
            s.ds,
            s.mass,
            s.host_mass,
            s.planet_mjup,
            s.separation_au,
            s.theta_e,
            s.mu_rel,
            s.pi_rel,
            s.te,
        ]
        .into_iter()
        .chain(s.class)
        {
            let _ = write!(out, ",{}", num(v));
        }
        let _ = writeln!(out, ",{}", num(s.host_mag));
    }
    out
}
