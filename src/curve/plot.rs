//! PNG light-curve plots through the shared chart module ([`crate::plot`]): magnification
//! against time, or against distance along the path; points made off the map are marked.

use super::{Method, Sample};
use crate::error::{Error, Result};
use crate::plot::{Axis, Chart, Series, Style};
use std::path::Path;

/// Draws the curve `samples` against `abscissa` (one value per sample, labelled `x_label`) into
/// a PNG at `path` (written atomically).
///
/// ```
/// use causeway::curve::{plot_png, Method, Sample};
/// let samples: Vec<Sample> = (0..50).map(|k| Sample {
///     x: k as f64 * 0.01, y: 0.0, magnification: 1.0 + 1.0 / (1.0 + k as f64), error: 1e-4,
///     method: if k < 40 { Method::Direct } else { Method::Expansion },
/// }).collect();
/// let t: Vec<f64> = (0..50).map(|k| k as f64).collect();
/// let path = std::env::temp_dir().join(format!("causeway-doc-plot-{}.png", std::process::id()));
/// plot_png(&samples, &t, "t (days)", &path).unwrap();
/// assert!(path.exists());
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn plot_png(samples: &[Sample], abscissa: &[f64], x_label: &str, path: &Path) -> Result<()> {
    chart(samples, abscissa, x_label)?.write_png(path)
}

/// The chart [`plot_png`] draws.
fn chart(samples: &[Sample], abscissa: &[f64], x_label: &str) -> Result<Chart> {
    if samples.is_empty() || samples.len() != abscissa.len() {
        return Err(Error::input("--png: nothing to plot"));
    }
    let all: Vec<(f64, f64)> = abscissa
        .iter()
        .zip(samples)
        .map(|(&t, s)| (t, s.magnification))
        .collect();
    let off_map: Vec<(f64, f64)> = abscissa
        .iter()
        .zip(samples)
        .filter(|(_, s)| matches!(s.method, Method::Expansion | Method::Point))
        .map(|(&t, s)| (t, s.magnification))
        .collect();
    let mut chart = Chart::new(
        "light curve",
        Axis::linear(x_label),
        Axis::linear("magnification"),
    );
    chart.add(Series::line("magnification", all));
    if !off_map.is_empty() {
        chart.add(
            Series::line("made off the map (point source + expansion)", off_map)
                .styled(Style::Markers),
        );
    }
    Ok(chart)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::check::framed;
    use crate::plot::{HEIGHT, WIDTH};
    use image::Rgb;

    #[test]
    fn the_light_curve_has_its_axes_labelled_and_nothing_cut() {
        let samples: Vec<Sample> = (0..400)
            .map(|k| Sample {
                x: k as f64 * 0.01,
                y: 0.0,
                magnification: 1.0 + 30.0 / (1.0 + (k as f64 - 200.0).abs()),
                error: 1e-4,
                method: if k < 350 {
                    Method::Direct
                } else {
                    Method::Expansion
                },
            })
            .collect();
        let t: Vec<f64> = (0..400).map(|k| 2_460_000.0 + 0.1 * k as f64).collect();
        let img = chart(&samples, &t, "t (days)").unwrap().render().unwrap();
        assert_eq!(img.dimensions(), (WIDTH, HEIGHT));
        // The plot area starts right of the widest magnification label ("30"), by the margins.
        framed(&img, 80, Rgb([255, 255, 255]));
        assert!(chart(&samples[..2], &t, "t").is_err());
    }
}
