//! Pictures of the lens posterior: host mass against lens distance (a weighted density on a log
//! colour scale down to 1e-3 of its peak, with a
//! colour bar, the lens-light limit drawn), and the marginal histograms.

use super::light::LensLight;
use super::posterior::{LensPosterior, LensSample};
use super::report::Quantity;
use crate::error::{Error, Result};
use crate::fsutil::write_png;
use crate::plot::axes::{Frame, Scale, INK, PAD};
use crate::plot::colourbar::ColourBar;
use crate::plot::draw::{fill, segment, Rect};
use crate::plot::text::{self, Anchor};
use crate::plot::{write_stacked_png, Axis, Chart, Series, PALETTE, TEXT};
use image::{Rgb, RgbImage};
use std::path::Path;

const SIZE: (i64, i64) = (1000, 760);
const PAPER: Rgb<u8> = Rgb([255, 255, 255]);
/// Colour of the lens-light limit.
const LIMIT: Rgb<u8> = Rgb([213, 94, 0]);
/// Lowest density drawn, relative to the peak (the colour scale is logarithmic down to it).
const DENSITY_FLOOR: f64 = 1e-3;
/// Cells of the density across each axis.
const CELLS: usize = 60;

fn density_colour(t: f64) -> Rgb<u8> {
    let c = colorous::VIRIDIS.eval_continuous(1.0 - t.clamp(0.0, 1.0));
    Rgb([c.r, c.g, c.b])
}

/// Weighted 2-D histogram of `(D_L, log10 host mass)` over the given ranges, normalised to
/// its peak.
fn density(post: &LensPosterior, dl: (f64, f64), lm: (f64, f64)) -> Vec<f64> {
    let mut h = vec![0.0; CELLS * CELLS];
    for s in post.samples.iter().filter(|s| s.weight > 0.0) {
        let i = ((s.dl - dl.0) / (dl.1 - dl.0) * CELLS as f64).floor();
        let j = ((s.host_mass.log10() - lm.0) / (lm.1 - lm.0) * CELLS as f64).floor();
        if (0.0..CELLS as f64).contains(&i) && (0.0..CELLS as f64).contains(&j) {
            h[j as usize * CELLS + i as usize] += s.weight;
        }
    }
    let peak = h.iter().copied().fold(0.0, f64::max);
    if peak > 0.0 {
        h.iter_mut().for_each(|v| *v /= peak);
    }
    h
}

/// Draws host mass against lens distance (without the imaging) and, when given, the host mass
/// at which a main-sequence host would have the imaging's magnitude (`b_deg`: the latitude).
fn mass_distance(post: &LensPosterior, light: Option<&LensLight>, b_deg: f64) -> Result<RgbImage> {
    let q = |f: fn(&LensSample) -> f64, p: &[f64]| post.quantiles(f, false, p);
    let d = q(|s| s.dl, &[0.005, 0.995]);
    let m = q(|s| s.host_mass.log10(), &[0.005, 0.995]);
    let ds_max = q(|s| s.ds, &[0.99])[0];
    if !(d[0].is_finite() && m[0].is_finite()) {
        return Err(Error::Numerical("lens picture: no weighted sample".into()));
    }
    let dl = (0.0, (d[1] * 1.05).max(ds_max).max(0.5).ceil());
    let lm = ((m[0] - 0.2).floor(), (m[1] + 0.2).ceil());
    let h = density(post, dl, lm);
    let bar = ColourBar {
        label: "posterior density / peak",
        colour: &density_colour,
        ticks: ["0.001", "0.01", "0.1", "1"]
            .iter()
            .enumerate()
            .map(|(k, t)| (k as f64 / 3.0, t.to_string()))
            .collect(),
    };
    let th = text::height(TEXT);
    let title_y = PAD * TEXT;
    let legend_y = title_y + th + 4 * TEXT;
    let mut img = RgbImage::from_pixel(SIZE.0 as u32, SIZE.1 as u32, PAPER);
    let (x, y) = (Scale::linear(dl.0, dl.1), Scale::log(lm.0, lm.1));
    let left = Frame::fitted(x, y, SIZE, 0, TEXT).area.left;
    let frame = Frame::fitted_with(x, y, SIZE, legend_y + th + 6 * TEXT, bar.width(TEXT), TEXT);
    let area = frame.area;
    for (k, v) in h.iter().enumerate().filter(|(_, v)| **v >= DENSITY_FLOOR) {
        let (i, j) = ((k % CELLS) as f64, (k / CELLS) as f64);
        let cx = |i: f64| dl.0 + (dl.1 - dl.0) * i / CELLS as f64;
        let cy = |j: f64| lm.0 + (lm.1 - lm.0) * j / CELLS as f64;
        let (x0, y0) = frame.to_px((cx(i), cy(j + 1.0)));
        let (x1, y1) = frame.to_px((cx(i + 1.0), cy(j)));
        let cell = Rect {
            left: x0.round() as i64,
            top: y0.round() as i64,
            width: (x1.round() - x0.round()) as i64,
            height: (y1.round() - y0.round()) as i64,
        };
        fill(&mut img, cell, density_colour(1.0 + v.log10() / 3.0));
    }
    let legend = match light {
        Some(light) => {
            let ds = q(|s| s.ds, &[0.5])[0];
            let mut prev: Option<(f64, f64)> = None;
            for k in 1..=400 {
                let d = dl.0 + (dl.1 - dl.0) * k as f64 / 400.0;
                let p = light
                    .boundary_mass(d, ds, b_deg)
                    .filter(|_| d < ds)
                    .map(|mass| frame.to_px((d, mass.log10())));
                if let (Some(a), Some(b)) = (prev, p) {
                    segment(&mut img, a, b, 3, LIMIT, area);
                }
                prev = p;
            }
            format!(
                "main-sequence host at {} = {} (brighter above)",
                light.band.name(),
                match light.imaging {
                    super::Imaging::Excess { mag, .. } | super::Imaging::Fainter { mag } => mag,
                }
            )
        }
        None => "no imaging constraint".into(),
    };
    let all = Rect::of(&img);
    segment(
        &mut img,
        (left as f64, (legend_y + th / 2) as f64),
        ((left + 12 * TEXT) as f64, (legend_y + th / 2) as f64),
        3,
        LIMIT,
        all,
    );
    let legend = text::fitted(&legend, TEXT, SIZE.0 - left - 16 * TEXT - PAD * TEXT);
    text::draw(
        &mut img,
        (left + 15 * TEXT, legend_y),
        &legend,
        TEXT,
        INK,
        Anchor::Left,
    );
    bar.finish(
        &mut img,
        &frame,
        (
            "host mass against lens distance (without the imaging)",
            title_y,
        ),
        ("lens distance (kpc)", "host mass (M_sun)"),
        TEXT,
    );
    Ok(img)
}

/// Writes the mass-distance picture (module docs) to `path`.
pub fn mass_distance_png(
    post: &LensPosterior,
    light: Option<&LensLight>,
    b_deg: f64,
    path: &Path,
) -> Result<()> {
    write_png(path, &mass_distance(post, light, b_deg)?)
}

/// A step-line histogram of `value` over `bins` cells between the 0.5 and 99.5 percentiles
/// (log10 when `log`), normalised to unit peak.
fn histogram(
    post: &LensPosterior,
    value: fn(&LensSample) -> f64,
    light: bool,
    (lo, hi): (f64, f64),
    log: bool,
) -> Vec<(f64, f64)> {
    let bins = 50;
    let t = |v: f64| if log { v.log10() } else { v };
    let (a, b) = (t(lo), t(hi));
    let mut h = vec![0.0; bins];
    for s in &post.samples {
        let w = if light { s.weight_light } else { s.weight };
        let k = ((t(value(s)) - a) / (b - a) * bins as f64).floor();
        if w > 0.0 && (0.0..bins as f64).contains(&k) {
            h[k as usize] += w;
        }
    }
    let peak = h.iter().copied().fold(0.0, f64::max).max(f64::MIN_POSITIVE);
    let back = |u: f64| if log { 10f64.powf(u) } else { u };
    let mut pts = Vec::with_capacity(2 * bins);
    for (k, v) in h.iter().enumerate() {
        let x0 = a + (b - a) * k as f64 / bins as f64;
        let x1 = a + (b - a) * (k + 1) as f64 / bins as f64;
        pts.push((back(x0), v / peak));
        pts.push((back(x1), v / peak));
    }
    pts
}

/// Marginal histograms (host mass, lens distance, and the companion's mass and projected
/// separation when known), without and with the imaging, one chart above the other.
pub fn marginals(post: &LensPosterior) -> Vec<Chart> {
    let panels: [(&str, Quantity, bool); 4] = [
        ("host mass (M_sun)", |s| s.host_mass, true),
        ("lens distance (kpc)", |s| s.dl, false),
        ("companion mass (M_jup)", |s| s.planet_mjup, true),
        ("projected separation (au)", |s| s.separation_au, false),
    ];
    let mut charts = Vec::new();
    for (label, f, log) in panels {
        let r = post.quantiles(f, false, &[0.005, 0.995]);
        if !(r[0].is_finite() && r[1] > r[0]) {
            continue;
        }
        let mut chart = Chart::new(
            &format!(
                "posterior of the {}",
                label.split(" (").next().unwrap_or(label)
            ),
            if log {
                Axis::log(label)
            } else {
                Axis::linear(label)
            },
            Axis::linear("density / peak"),
        );
        chart.add(
            Series::line(
                "without the imaging",
                histogram(post, f, false, (r[0], r[1]), log),
            )
            .coloured(PALETTE[0]),
        );
        if post.has_light {
            chart.add(
                Series::line(
                    "with the imaging",
                    histogram(post, f, true, (r[0], r[1]), log),
                )
                .coloured(PALETTE[1]),
            );
        }
        charts.push(chart);
    }
    charts
}

/// Writes the marginal histograms ([`marginals`]) to `path`.
pub fn marginals_png(post: &LensPosterior, path: &Path) -> Result<()> {
    write_stacked_png(&marginals(post), path)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::galaxy::{infer, Band, EventData, Imaging, LensOptions, Measured, Sightline};
    use crate::plot::check::{blank_border, framed, inked};

    fn posterior(light: Option<LensLight>) -> LensPosterior {
        let data = EventData {
            te: Some(Measured::new("tE", 30.0, 2.0).unwrap()),
            q: Some(1e-3),
            s: Some(1.1),
            ..Default::default()
        };
        let options = LensOptions {
            samples: 20_000,
            light,
            ..LensOptions::new(Sightline::new(1.0, -3.0).unwrap())
        };
        infer(&data, &options, &crate::progress::Silent).unwrap()
    }

    #[test]
    fn mass_distance_fills_cells_draws_the_limit_and_labels_everything() {
        let light = LensLight::new(Band::K, 0.3, Imaging::Fainter { mag: 19.0 }).unwrap();
        let post = posterior(Some(light));
        let img = mass_distance(&post, Some(&light), -3.0).unwrap();
        assert!(blank_border(&img, PAPER));
        let count = |c: Rgb<u8>| img.pixels().filter(|p| **p == c).count();
        assert!(count(LIMIT) > 300, "limit line: {}", count(LIMIT));
        let coloured = img
            .pixels()
            .filter(|p| **p != PAPER && **p != INK && **p != LIMIT)
            .count();
        assert!(coloured > 20_000, "density cells: {coloured}");
        let (w, h) = (SIZE.0, SIZE.1);
        let strip = |left, top, width, height| Rect {
            left,
            top,
            width,
            height,
        };
        assert!(inked(&img, strip(0, 100, 60, h - 200)), "mass axis");
        assert!(
            inked(&img, strip(100, h - 50, w - 300, 48)),
            "distance axis"
        );
        assert!(inked(&img, strip(w - 120, 100, 118, h - 200)), "colour bar");
        assert!(inked(&img, strip(0, 0, w, 70)), "title and legend");
    }

    #[test]
    fn marginals_show_both_weightings() {
        let light = LensLight::new(Band::K, 0.3, Imaging::Fainter { mag: 19.0 }).unwrap();
        let charts = marginals(&posterior(Some(light)));
        assert_eq!(charts.len(), 4);
        for c in &charts {
            assert_eq!(c.series.len(), 2);
            let img = c.render().unwrap();
            framed(&img, 80, PAPER);
        }
    }
}
