//! Who is the lens: the Bayesian estimate of the lens (src/galaxy) from explicit values or the
//! fit's posterior samples, samples out as numpy arrays with the class probabilities.

use crate::convert::{bad, ok, values, with_threads, Floats, Forward};
use causeway::galaxy::input::{pi_e_angle, pi_e_size, theta_e as theta_e_of, FitRow};
use causeway::galaxy::report::{summary, CSV_WEIGHT_FLOOR};
use causeway::galaxy::{
    infer, infer_samples, Band, EventData, FitSamples, Imaging, LensClass, LensLight, LensOptions,
    LensPosterior, LensSample, Measured, Sightline, SourceDistance,
};
use numpy::{PyArray1, PyArray2};
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// The floor below which `nature --out` leaves samples out of its CSV (relative weight).
pub const WEIGHT_FLOOR: f64 = CSV_WEIGHT_FLOOR;

/// A `(value, error)` pair as a measurement; the error names the argument.
fn measured(name: &str, v: Option<(f64, f64)>) -> PyResult<Option<Measured>> {
    v.map(|(x, e)| Measured::new(name, x, e))
        .transpose()
        .map_err(|e| bad(name, e.to_string().trim_start_matches(&format!("{name}: "))))
}

fn positive(name: &str, v: Option<f64>) -> PyResult<Option<f64>> {
    match v {
        Some(x) if !(x.is_finite() && x > 0.0) => {
            Err(bad(name, format!("must be finite and > 0, got {x}")))
        }
        _ => Ok(v),
    }
}

/// A 1-D column of the posterior samples.
fn column(name: &str, a: &Bound<'_, PyAny>) -> PyResult<Vec<f64>> {
    let a: Floats = a
        .extract()
        .map_err(|_| bad("posterior", format!("{name:?} must be an array of floats")))?;
    let (v, shape) = values(&a);
    if shape.len() != 1 {
        return Err(bad(
            "posterior",
            format!("{name:?} must be 1-D, got shape {shape:?}"),
        ));
    }
    Ok(v)
}

/// The posterior samples from a dict of arrays (keys "te" or "tE", "rho", "pi_en" and "pi_ee",
/// "s", "q") or a CSV path.
fn posterior_samples(p: &Bound<'_, PyAny>) -> PyResult<FitSamples> {
    if let Ok(d) = p.cast::<PyDict>() {
        let get = |keys: &[&str]| -> PyResult<Option<Vec<f64>>> {
            for k in keys {
                if let Some(v) = d.get_item(k)? {
                    return column(k, &v).map(Some);
                }
            }
            Ok(None)
        };
        let te = get(&["te", "tE"])?.ok_or_else(|| bad("posterior", "needs a \"te\" column"))?;
        let pi_e = match (get(&["pi_en", "pi_EN"])?, get(&["pi_ee", "pi_EE"])?) {
            (Some(n), Some(e)) if n.len() == e.len() => {
                Some(n.into_iter().zip(e).map(|(n, e)| [n, e]).collect())
            }
            (None, None) => None,
            _ => {
                return Err(bad(
                    "posterior",
                    "give \"pi_en\" and \"pi_ee\" together, of one length",
                ))
            }
        };
        let s = FitSamples::new(te, get(&["rho"])?, pi_e, get(&["s"])?, get(&["q"])?);
        return s.map_err(|e| bad("posterior", e));
    }
    let path: std::path::PathBuf = p
        .extract()
        .map_err(|_| bad("posterior", "must be a dict of arrays or a CSV path"))?;
    ok(FitSamples::read(&path))
}

/// The lens-light constraint of the arguments.
fn lens_light(
    band: &str,
    extinction: f64,
    excess: Option<(f64, f64)>,
    fainter_than: Option<f64>,
) -> PyResult<Option<LensLight>> {
    let band = Band::parse(band).map_err(|e| bad("band", e))?;
    let imaging = match (excess, fainter_than) {
        (Some((mag, err)), None) => Imaging::Excess { mag, err },
        (None, Some(mag)) => Imaging::Fainter { mag },
        (None, None) => return Ok(None),
        _ => return Err(bad("excess", "give excess or fainter_than, not both")),
    };
    LensLight::new(band, extinction, imaging)
        .map(Some)
        .map_err(|e| {
            bad(
                if excess.is_some() {
                    "excess"
                } else {
                    "fainter_than"
                },
                e,
            )
        })
}

fn column_of<'py>(
    py: Python<'py>,
    post: &LensPosterior,
    f: impl Fn(&LensSample) -> f64,
) -> Bound<'py, PyArray1<f64>> {
    PyArray1::from_vec(py, post.samples.iter().map(f).collect())
}

fn classes<'py>(py: Python<'py>, p: [f64; 5]) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    for (name, p) in class_names().into_iter().zip(p) {
        d.set_item(name, p)?;
    }
    Ok(d)
}

/// The posterior as a dict of arrays and summaries.
fn posterior_dict<'py>(py: Python<'py>, post: &LensPosterior) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("weight", column_of(py, post, |s| s.weight))?;
    d.set_item("weight_imaging", column_of(py, post, |s| s.weight_light))?;
    let pop: Vec<u8> = post.samples.iter().map(|s| s.population as u8).collect();
    d.set_item("population", PyArray1::from_vec(py, pop))?;
    d.set_item("dl", column_of(py, post, |s| s.dl))?;
    d.set_item("ds", column_of(py, post, |s| s.ds))?;
    d.set_item("mass", column_of(py, post, |s| s.mass))?;
    d.set_item("host_mass", column_of(py, post, |s| s.host_mass))?;
    d.set_item("planet_mjup", column_of(py, post, |s| s.planet_mjup))?;
    d.set_item("separation_au", column_of(py, post, |s| s.separation_au))?;
    d.set_item("theta_e", column_of(py, post, |s| s.theta_e))?;
    d.set_item("mu_rel", column_of(py, post, |s| s.mu_rel))?;
    d.set_item("pi_rel", column_of(py, post, |s| s.pi_rel))?;
    d.set_item("te", column_of(py, post, |s| s.te))?;
    d.set_item("host_mag", column_of(py, post, |s| s.host_mag))?;
    let class: Vec<Vec<f64>> = post.samples.iter().map(|s| s.class.to_vec()).collect();
    d.set_item("class_p", PyArray2::from_vec2(py, &class)?)?;
    d.set_item("classes", classes(py, post.class_probabilities(false))?)?;
    d.set_item(
        "classes_imaging",
        classes(py, post.class_probabilities(post.has_light))?,
    )?;
    d.set_item(
        "effective",
        (
            post.effective_samples(false),
            post.effective_samples(post.has_light),
        ),
    )?;
    d.set_item("summary", summary(post))?;
    Ok(d)
}

/// lens_nature(l=None, b=None, ra=None, dec=None, minimum=None, te=None, theta_e=None, theta_star=None,
/// rho=None, pi_e=None, pi_en=None, pi_ee=None, earth_velocity=None, s=None, q=None,
/// posterior=None, ds=None, band="K", extinction=0.0, excess=None, fainter_than=None,
/// samples=200000, seed=1, source_beta=1.0, progress=None, threads=None) -> dict
///
/// Who the lens is: weighted Monte Carlo samples of its mass, distance and class from the
/// Galactic model and the event's measurements (Dominik 2006), as `causeway nature` draws them
/// (the same seed gives the same samples). `minimum`: a minimum of the fit (a dict of
/// `fit_event`'s "minima" or "motion", or of `refine_with_motion`) gives tE, rho (theta_E with
/// `theta_star`), s, q and pi_E with their errors, as `causeway nature --minima` reads the
/// table; explicit values win. Measurements are (value, error) pairs: `te` (days),
/// `theta_e` (mas) or `theta_star` (microarcseconds) with `rho` (theta_E = theta_* / rho),
/// `pi_e` (size only) or `pi_en` and `pi_ee` (size and direction), `earth_velocity` (north,
/// east; km/s) to make them heliocentric; `s`, `q` of the companion. Or `posterior`: the fit's
/// posterior samples, a dict of 1-D arrays ("te", and "rho", "pi_en" with "pi_ee", "s", "q"
/// when sampled) or a CSV path, each lens sample taking one row (then `te`, `rho`, `pi_e`,
/// `pi_en`, `pi_ee` are not given; `theta_star` divides the sampled rho).
/// Line of sight: Galactic (`l`, `b`) or J2000 (`ra`, `dec`), degrees. `ds` (kpc, error):
/// the source distance, else drawn along the line of sight. Imaging in `band` ("V", "I", "K")
/// with the extinction to the source (mag): `excess` (mag, error) seen, or nothing brighter
/// than `fainter_than`.
///
///     r = causeway.lens_nature(l=1.0, b=-3.0, te=(28, 1), theta_e=(0.5, 0.05), q=2e-3,
///                              fainter_than=21.5, extinction=0.3, samples=50_000)
///     r["host_mass"], r["dl"], r["weight"]      # float64 (n,): M_sun, kpc, weights
///     r["classes"], r["classes_imaging"]        # {"ms": P, "bd": ..., "wd", "ns", "bh"}
///
/// Returns float64 arrays of shape (n,) ("weight", "weight_imaging", "dl", "ds" kpc, "mass",
/// "host_mass" M_sun, "planet_mjup" Jupiter masses, "separation_au", "theta_e" mas, "mu_rel"
/// mas/yr heliocentric, "pi_rel" mas, "te" days, "host_mag" the main-sequence host's apparent
/// magnitude), "population" (uint8: 0 disk, 1 bulge), "class_p" (n, 5) per-sample class
/// probabilities, "classes" and "classes_imaging" (dicts), "effective" (Kish's effective
/// samples without and with imaging) and "summary" (the command's text).
#[pyfunction]
#[pyo3(signature = (l=None, b=None, ra=None, dec=None, minimum=None, te=None, theta_e=None, theta_star=None, rho=None, pi_e=None, pi_en=None, pi_ee=None, earth_velocity=None, s=None, q=None, posterior=None, ds=None, band="K", extinction=0.0, excess=None, fainter_than=None, samples=200_000, seed=1, source_beta=1.0, progress=None, threads=None))]
#[allow(clippy::too_many_arguments)]
pub fn lens_nature<'py>(
    py: Python<'py>,
    l: Option<f64>,
    b: Option<f64>,
    ra: Option<f64>,
    dec: Option<f64>,
    minimum: Option<Bound<'py, PyAny>>,
    te: Option<(f64, f64)>,
    theta_e: Option<(f64, f64)>,
    theta_star: Option<(f64, f64)>,
    rho: Option<(f64, f64)>,
    pi_e: Option<(f64, f64)>,
    pi_en: Option<(f64, f64)>,
    pi_ee: Option<(f64, f64)>,
    earth_velocity: Option<(f64, f64)>,
    s: Option<f64>,
    q: Option<f64>,
    posterior: Option<Bound<'py, PyAny>>,
    ds: Option<(f64, f64)>,
    band: &str,
    extinction: f64,
    excess: Option<(f64, f64)>,
    fainter_than: Option<f64>,
    samples: usize,
    seed: u64,
    source_beta: f64,
    progress: Option<Py<PyAny>>,
    threads: Option<usize>,
) -> PyResult<Bound<'py, PyDict>> {
    let sightline = match (l, b, ra, dec) {
        (Some(l), Some(b), None, None) => Sightline::new(l, b).map_err(|e| bad("b", e)),
        (None, None, Some(ra), Some(dec)) => {
            Sightline::from_equatorial(ra, dec).map_err(|e| bad("dec", e))
        }
        _ => Err(bad("l", "give the line of sight as l and b, or ra and dec")),
    }?;
    let source = match ds {
        Some((kpc, err)) if kpc.is_finite() && kpc > 0.0 && kpc < 16.0 && err >= 0.0 => {
            SourceDistance::Given { kpc, err }
        }
        Some((kpc, err)) => {
            return Err(bad(
                "ds",
                format!("need 0 < D_S < 16 kpc and an error >= 0, got ({kpc}, {err})"),
            ))
        }
        None => SourceDistance::Model,
    };
    if !(1..=5_000_000).contains(&samples) {
        return Err(bad(
            "samples",
            format!("must be 1 to 5000000, got {samples}"),
        ));
    }
    if !(source_beta.is_finite() && (0.0..=2.0).contains(&source_beta)) {
        return Err(bad("source_beta", "must be in [0, 2]"));
    }
    let options = LensOptions {
        source,
        source_beta,
        samples,
        seed,
        light: lens_light(band, extinction, excess, fainter_than)?,
        ..LensOptions::new(sightline)
    };
    let theta_star = measured("theta_star", theta_star)?;
    let data = EventData {
        theta_e: measured("theta_e", theta_e)?,
        earth_velocity: earth_velocity.map(|(n, e)| [n, e]),
        s: positive("s", s)?,
        q: positive("q", q)?,
        ..EventData::default()
    };
    if theta_star.is_some() && data.theta_e.is_some() {
        return Err(bad(
            "theta_star",
            "give theta_star (with rho) or theta_e, not both",
        ));
    }
    let forward = Forward(progress);
    let post = match posterior {
        Some(p) => {
            for (name, given) in [
                ("minimum", minimum.is_some()),
                ("te", te.is_some()),
                ("rho", rho.is_some()),
                ("pi_e", pi_e.is_some()),
                ("pi_en", pi_en.is_some() || pi_ee.is_some()),
            ] {
                if given {
                    return Err(bad(name, "the posterior samples give it; leave it out"));
                }
            }
            let rows = posterior_samples(&p)?;
            if theta_star.is_some() && rows.rho.is_none() {
                return Err(bad(
                    "theta_star",
                    "the posterior samples have no rho (give theta_e)",
                ));
            }
            py.detach(|| {
                with_threads(threads, || {
                    infer_samples(&rows, theta_star, &data, &options, &forward)
                })
            })?
        }
        None => {
            let data = measurements(data, minimum, theta_star, te, rho, pi_e, pi_en, pi_ee)?;
            py.detach(|| with_threads(threads, || infer(&data, &options, &forward)))?
        }
    };
    posterior_dict(py, &post)
}

/// A minimum of the fit (a dict of `fit_event`'s "minima" or "motion", or of
/// `refine_with_motion`) as the lens estimate reads it.
fn fit_row(m: &Bound<'_, PyAny>) -> PyResult<FitRow> {
    let number = |d: &Bound<'_, PyAny>, k: &str| -> PyResult<Option<f64>> {
        match d.get_item(k) {
            Ok(v) if v.is_none() => Ok(None),
            Ok(v) => v
                .extract()
                .map(Some)
                .map_err(|_| bad("minimum", format!("\"{k}\" must be a number"))),
            Err(_) => Ok(None),
        }
    };
    let need = |d: &Bound<'_, PyAny>, k: &str| {
        number(d, k)?.ok_or_else(|| bad("minimum", format!("needs \"{k}\"")))
    };
    let sigma = m
        .get_item("sigma")
        .map_err(|_| bad("minimum", "needs \"sigma\" (the errors)"))?;
    let rho = match (number(m, "rho")?, number(&sigma, "rho")?) {
        (Some(r), Some(e)) if r.is_finite() && e.is_finite() => Some((r, e)),
        _ => None,
    };
    let pi_e = match (number(m, "pi_e_n")?, number(m, "pi_e_e")?) {
        (Some(n), Some(e)) => Some([n, need(&sigma, "pi_e_n")?, e, need(&sigma, "pi_e_e")?]),
        _ => None,
    };
    Ok(FitRow {
        rank: 1,
        te: (need(m, "te")?, need(&sigma, "te")?),
        rho,
        s: need(m, "s")?,
        q: need(m, "q")?,
        pi_e,
    })
}

/// The measurements of value +- error arguments, over those of the fit's `minimum` when
/// given (as `causeway nature --minima` takes explicit values over the table's).
#[allow(clippy::too_many_arguments)]
fn measurements(
    given: EventData,
    minimum: Option<Bound<'_, PyAny>>,
    theta_star: Option<Measured>,
    te: Option<(f64, f64)>,
    rho: Option<(f64, f64)>,
    pi_e: Option<(f64, f64)>,
    pi_en: Option<(f64, f64)>,
    pi_ee: Option<(f64, f64)>,
) -> PyResult<EventData> {
    let row = minimum.map(|m| fit_row(&m)).transpose()?;
    let mut data = match &row {
        Some(r) if rho.is_none() && given.theta_e.is_none() => r.event_data(theta_star),
        Some(r) => r.event_data(None),
        None => Ok(EventData::default()),
    }
    .map_err(|e| bad("minimum", e))?;
    data.theta_e = given.theta_e.or(data.theta_e);
    data.s = given.s.or(data.s);
    data.q = given.q.or(data.q);
    data.earth_velocity = given.earth_velocity;
    data.te = measured("te", te)?.or(data.te);
    if data.te.is_none() {
        return Err(bad(
            "te",
            "give tE and its error (or minimum, or posterior)",
        ));
    }
    match (rho, theta_star) {
        (Some((r, e)), Some(ts)) => {
            data.theta_e = Some(theta_e_of(ts, r, e, 1).map_err(|e| bad("rho", e))?)
        }
        (Some(_), None) => return Err(bad("rho", "needs theta_star")),
        (None, Some(_)) if row.is_none() => return Err(bad("theta_star", "needs rho")),
        _ => {}
    }
    match (pi_e, pi_en, pi_ee) {
        (Some(p), None, None) => {
            data.pi_e = measured("pi_e", Some(p))?;
            data.pi_e_angle = None;
        }
        (None, Some((n, ne)), Some((e, ee))) => {
            let v = [n, ne, e, ee];
            data.pi_e = Some(pi_e_size(v).map_err(|e| bad("pi_en", e))?);
            data.pi_e_angle = Some(pi_e_angle(v));
        }
        (None, None, None) => {}
        _ => return Err(bad("pi_en", "give pi_e alone, or pi_en and pi_ee together")),
    }
    Ok(data)
}

/// The class names of `classes`, in the order of the columns of "class_p".
pub fn class_names() -> Vec<&'static str> {
    LensClass::ALL.iter().map(|c| c.name()).collect()
}
