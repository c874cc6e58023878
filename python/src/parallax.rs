//! Parallax and lens orbital motion: event coordinates, the Earth's orbit and the projected
//! offsets (src/parallax), the model's trajectory with parallax and orbital motion (the keyword
//! arguments of `trajectory`, `model_magnification` and `simulate`), the motion stage of the fit
//! on its minima (src/fit/motion.rs), and the lens from (theta_E, pi_E) (src/fit/scales.rs).

use crate::convert::{bad, ok, shaped, values, with_threads, Array, Floats, Forward};
use crate::fit::{data_sets, fluxes, model_dict, DataSet};
use crate::light::model;
use causeway::fit::model::{BinaryModel, LensOrbit, Parallax, Trajectory};
use causeway::fit::motion::{refine_with_motion as refine_motion, MotionMinimum, MotionOptions};
use causeway::fit::scales::{ParallaxMeasure, LENS_NAMES};
use causeway::parallax::{self, jd_origin, Ephemeris, Geometry, Observer, SkyPosition};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use std::fmt::Write as _;

/// A coordinate given as a number (degrees) or a string (sexagesimal or degrees).
fn coordinate(name: &str, v: &Bound<'_, PyAny>) -> PyResult<String> {
    if let Ok(x) = v.extract::<f64>() {
        return Ok(format!("{x:?}"));
    }
    v.extract::<String>()
        .map_err(|_| bad(name, "must be degrees (a number) or a sexagesimal string"))
}

/// The event's position from `ra`, `dec` (either given as numbers or strings).
pub fn sky(ra: &Bound<'_, PyAny>, dec: &Bound<'_, PyAny>) -> PyResult<SkyPosition> {
    let (r, d) = (coordinate("ra", ra)?, coordinate("dec", dec)?);
    // The library's messages start with the parameter's name, "ra" or "dec".
    ok(SkyPosition::parse(&r, &d))
}

/// An ephemeris from a CSV path, an (n, 4) array of rows (t, x, y, z: heliocentric equatorial
/// positions) or an (n, 3) array (t, north, east: offsets from the Earth's centre projected on
/// the sky), au.
pub fn ephemeris(e: &Bound<'_, PyAny>) -> PyResult<Ephemeris> {
    if let Ok(path) = e.extract::<std::path::PathBuf>() {
        return ok(Ephemeris::read(&path));
    }
    let a: Floats = e.extract().map_err(|_| {
        bad(
            "ephemeris",
            "must be a CSV path, an (n, 4) array t, x, y, z or an (n, 3) array t, north, east",
        )
    })?;
    let (v, shape) = values(&a);
    let header = match shape[..] {
        [_, 4] => "t,x,y,z",
        [_, 3] => "t,north,east",
        _ => {
            return Err(bad(
                "ephemeris",
                format!(
                    "must have shape (n, 4) (t, x, y, z) or (n, 3) (t, north, east), got {shape:?}"
                ),
            ))
        }
    };
    // Shortest round-trip text: parsing gives back the same doubles and the library's checks.
    let mut text = format!("{header}\n");
    for r in v.chunks(shape[1]) {
        let row: Vec<String> = r.iter().map(|x| format!("{x:?}")).collect();
        writeln!(text, "{}", row.join(",")).unwrap();
    }
    ok(Ephemeris::parse(&text, "ephemeris"))
}

/// The parallax and orbital-motion keyword arguments of a model (every one `None`: off).
pub struct Motion<'py> {
    pub ra: Option<Bound<'py, PyAny>>,
    pub dec: Option<Bound<'py, PyAny>>,
    pub pi_e_n: Option<f64>,
    pub pi_e_e: Option<f64>,
    pub t0_par: Option<f64>,
    pub ds_dt: Option<f64>,
    pub dalpha_dt: Option<f64>,
    pub t0_kep: Option<f64>,
    pub ephemeris: Option<Bound<'py, PyAny>>,
}

impl<'py> Motion<'py> {
    /// From the keyword arguments: `[ra, dec, ephemeris]`, `[pi_e_n, pi_e_e, t0_par, ds_dt,
    /// dalpha_dt, t0_kep]`.
    pub fn new(
        [ra, dec, ephemeris]: [Option<Bound<'py, PyAny>>; 3],
        [pi_e_n, pi_e_e, t0_par, ds_dt, dalpha_dt, t0_kep]: [Option<f64>; 6],
    ) -> Self {
        Motion {
            ra,
            dec,
            pi_e_n,
            pi_e_e,
            t0_par,
            ds_dt,
            dalpha_dt,
            t0_kep,
            ephemeris,
        }
    }

    /// `tr` with the parallax and orbital motion asked for: `t0_par` defaults to t0 rounded to
    /// a day, `t0_kep` to t0, as on the command line.
    pub fn apply(&self, tr: Trajectory) -> PyResult<Trajectory> {
        let t0 = tr.line().t0;
        let position = match (&self.ra, &self.dec) {
            (Some(r), Some(d)) => Some(sky(r, d)?),
            (None, None) => None,
            (None, Some(_)) => return Err(bad("ra", "give ra with dec")),
            (Some(_), None) => return Err(bad("dec", "give dec with ra")),
        };
        let parallax = match (self.pi_e_n, self.pi_e_e) {
            (None, None) => None,
            (n, e) => {
                let sky = position.ok_or_else(|| bad("ra", "parallax needs ra and dec"))?;
                let t0_par = self.t0_par.unwrap_or(t0.round());
                for (name, v) in [("pi_e_n", n), ("pi_e_e", e)] {
                    if let Some(v) = v.filter(|v| !v.is_finite()) {
                        return Err(bad(name, format!("must be finite, got {v}")));
                    }
                }
                Some(Parallax {
                    pi_en: n.unwrap_or(0.0),
                    pi_ee: e.unwrap_or(0.0),
                    geometry: ok(Geometry::new(sky, t0_par, jd_origin(t0_par)))?,
                })
            }
        };
        if parallax.is_none() && (self.t0_par.is_some() || self.ephemeris.is_some()) {
            let name = if self.t0_par.is_some() {
                "t0_par"
            } else {
                "ephemeris"
            };
            return Err(bad(name, "needs pi_e_n or pi_e_e"));
        }
        let orbit = match (self.ds_dt, self.dalpha_dt) {
            (None, None) if self.t0_kep.is_some() => {
                return Err(bad("t0_kep", "needs ds_dt or dalpha_dt"))
            }
            (None, None) => None,
            (ds, da) => Some(LensOrbit {
                ds_dt: ds.unwrap_or(0.0),
                dalpha_dt: da.unwrap_or(0.0),
                t0_kep: self.t0_kep.unwrap_or(t0),
            }),
        };
        ok(tr.with_parallax(parallax).and_then(|t| t.with_orbit(orbit)))
    }

    /// The observer of the model's data: the Earth, or the ephemeris given.
    pub fn ephemeris(&self) -> PyResult<Option<Ephemeris>> {
        self.ephemeris.as_ref().map(ephemeris).transpose()
    }
}

/// The observer of an optional ephemeris.
pub fn observer(e: &Option<Ephemeris>) -> Observer<'_> {
    e.as_ref().map_or(Observer::Earth, Observer::At)
}

/// A binary model with the motion keyword arguments applied.
#[allow(clippy::too_many_arguments)]
pub fn moving_model(
    s: f64,
    q: f64,
    t0: f64,
    u0: f64,
    te: f64,
    alpha: f64,
    rho: f64,
    motion: &Motion,
) -> PyResult<BinaryModel> {
    let m = model(s, q, t0, u0, te, alpha, rho)?;
    Ok(BinaryModel {
        trajectory: motion.apply(m.trajectory)?,
        ..m
    })
}

/// sky_position(ra, dec) -> (ra_deg, dec_deg): an event's J2000 position from degrees (numbers
/// or strings) or sexagesimal strings ("17:55:30.2", "-29:33:10").
///
///     causeway.sky_position("18:00:00", "-30:00:00")   # (270.0, -30.0)
#[pyfunction]
pub fn sky_position(ra: &Bound<'_, PyAny>, dec: &Bound<'_, PyAny>) -> PyResult<(f64, f64)> {
    let p = sky(ra, dec)?;
    Ok((p.ra_deg, p.dec_deg))
}

/// sky_basis(ra, dec) -> dict: the unit vectors "toward" the event, "north" (increasing Dec)
/// and "east" (increasing RA), float64 arrays of shape (3,) in the equatorial frame (defined
/// at the poles too).
///
///     b = causeway.sky_basis(270.0, -30.0); b["north"] @ b["east"]   # 0
#[pyfunction]
pub fn sky_basis<'py>(
    py: Python<'py>,
    ra: &Bound<'py, PyAny>,
    dec: &Bound<'py, PyAny>,
) -> PyResult<Bound<'py, PyDict>> {
    let b = sky(ra, dec)?.basis();
    let d = PyDict::new(py);
    d.set_item("toward", shaped(py, b.toward.to_vec(), &[3])?)?;
    d.set_item("north", shaped(py, b.north.to_vec(), &[3])?)?;
    d.set_item("east", shaped(py, b.east.to_vec(), &[3])?)?;
    Ok(d)
}

/// earth_position(jd) -> array (..., 3): the Earth's (Earth-Moon barycentre's) heliocentric
/// position in au, equatorial J2000, at Julian dates `jd` (any shape; full JD, or JD - 2450000
/// below 2,400,000), from Standish's Keplerian mean elements (good to about 1.4e-4 au over
/// 2000-2040).
///
///     causeway.earth_position([2451545.0, 2460000.5]).shape   # (2, 3)
#[pyfunction]
pub fn earth_position<'py>(py: Python<'py>, jd: Floats) -> PyResult<Array<'py, f64>> {
    let (t, mut shape) = values(&jd);
    if let Some(k) = t.iter().position(|x| !x.is_finite()) {
        return Err(bad("jd", format!("[{k}] must be finite, got {}", t[k])));
    }
    let v: Vec<f64> = t
        .iter()
        .flat_map(|&t| parallax::earth_position(t + jd_origin(t)))
        .collect();
    shape.push(3);
    shaped(py, v, &shape)
}

/// parallax_offsets(ra, dec, times, t0_par, ephemeris=None) -> array (..., 2): the Sun's
/// projected motion left after its position and velocity at t0_par are taken out (Gould 2004,
/// the "Delta s" of the parallax module's documentation), (north, east) in au, at `times`
/// (days, any shape; JD - 2450000 below 2,400,000), seen from the Earth or from an observatory
/// (`ephemeris`: a CSV path, an (n, 4) array t, x, y, z heliocentric equatorial or an (n, 3)
/// array t, north, east projected offsets from the Earth; au).
/// tau = (t - t0)/tE + pi_E . Delta s, beta = u0 + pi_E x Delta s.
///
///     d = causeway.parallax_offsets(270.0, -30.0, np.linspace(8250, 8350, 50), 8300.0)
#[pyfunction]
#[pyo3(signature = (ra, dec, times, t0_par, ephemeris=None))]
pub fn parallax_offsets<'py>(
    py: Python<'py>,
    ra: &Bound<'py, PyAny>,
    dec: &Bound<'py, PyAny>,
    times: Floats,
    t0_par: f64,
    ephemeris: Option<Bound<'py, PyAny>>,
) -> PyResult<Array<'py, f64>> {
    let g = ok(Geometry::new(sky(ra, dec)?, t0_par, jd_origin(t0_par)))?;
    let e = ephemeris.as_ref().map(self::ephemeris).transpose()?;
    let (t, mut shape) = values(&times);
    let d = py.detach(|| g.offsets(&t, &observer(&e)));
    let v: Vec<f64> = ok(d)?.into_iter().flat_map(|(n, e)| [n, e]).collect();
    shape.push(2);
    shaped(py, v, &shape)
}

/// earth_velocity(ra, dec, t0_par) -> (north, east): the Earth's heliocentric velocity at
/// t0_par (days; JD - 2450000 below 2,400,000) projected on the sky at (ra, dec), au per Julian
/// year: the `earth_velocity` of `lens_from_parallax` and `lens_nature` (times 4.74047 for
/// km/s).
///
///     causeway.earth_velocity(270.0, -30.0, 8300.0)
#[pyfunction]
pub fn earth_velocity(
    ra: &Bound<'_, PyAny>,
    dec: &Bound<'_, PyAny>,
    t0_par: f64,
) -> PyResult<(f64, f64)> {
    let g = ok(Geometry::new(sky(ra, dec)?, t0_par, jd_origin(t0_par)))?;
    Ok(g.earth_velocity())
}

/// The lens values of a measure as a dict (with "<name>_err" when errors are known).
fn lens_dict<'py>(
    py: Python<'py>,
    measure: &ParallaxMeasure,
    cov: Option<&[Vec<f64>]>,
) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    let (values, errors) = match cov {
        Some(c) => {
            let (v, e) = measure.lens_with_errors(c);
            (v, Some(e))
        }
        None => (measure.lens(), None),
    };
    for (k, name) in LENS_NAMES.iter().enumerate() {
        d.set_item(*name, values[k])?;
        if let Some(e) = errors {
            d.set_item(format!("{name}_err"), e[k])?;
        }
    }
    Ok(d)
}

/// lens_from_parallax(theta_e, te, pi_e_n, pi_e_e, s=1.0, q=0.0, ds=None,
/// earth_velocity=(0.0, 0.0), ds_dt=None, dalpha_dt=None, covariance=None) -> dict
///
/// The lens from theta_E (mas) and pi_E (Gould 2000): "lens_mass_msun" = theta_E/(kappa pi_E),
/// "lens_host_msun", "lens_companion_mjup", "lens_pi_rel_mas" = theta_E pi_E, with the source
/// distance `ds` (kpc) "lens_dl_kpc" = au/(pi_rel + pi_S) and "lens_separation_au" = s theta_E
/// D_L; the heliocentric proper motion "mu_hel_n_mas_per_yr", "mu_hel_e_mas_per_yr" and
/// "tE_hel_days" from the geocentric tE (days) and the Earth's projected velocity at t0,par
/// (`earth_velocity`, north and east, au per year); "mu_geo_mas_per_yr"; with the rates
/// (`ds_dt` per year, `dalpha_dt` radians per year) the projected kinetic to potential energy
/// ratio "energy_ratio" (below 1 for a bound orbit). NaN where unknown. `covariance` of
/// (theta_E, tE, pi_E,N, pi_E,E, s, q[, ds_dt, dalpha_dt]) adds "<name>_err" (first order).
///
///     causeway.lens_from_parallax(0.5, 40.0, 0.3, 0.4, ds=8.0)["lens_mass_msun"]   # 0.1228
#[pyfunction]
#[pyo3(signature = (theta_e, te, pi_e_n, pi_e_e, s=1.0, q=0.0, ds=None, earth_velocity=(0.0, 0.0), ds_dt=None, dalpha_dt=None, covariance=None))]
#[allow(clippy::too_many_arguments)]
pub fn lens_from_parallax<'py>(
    py: Python<'py>,
    theta_e: f64,
    te: f64,
    pi_e_n: f64,
    pi_e_e: f64,
    s: f64,
    q: f64,
    ds: Option<f64>,
    earth_velocity: (f64, f64),
    ds_dt: Option<f64>,
    dalpha_dt: Option<f64>,
    covariance: Option<Floats>,
) -> PyResult<Bound<'py, PyDict>> {
    let positive = |name: &str, v: f64| {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(bad(name, format!("must be finite and > 0, got {v}")))
        }
    };
    positive("theta_e", theta_e)?;
    positive("te", te)?;
    positive("s", s)?;
    if !(q.is_finite() && q >= 0.0) {
        return Err(bad("q", format!("must be finite and >= 0, got {q}")));
    }
    if let Some(d) = ds {
        positive("ds", d)?;
    }
    if !(pi_e_n.is_finite() && pi_e_e.is_finite() && pi_e_n.hypot(pi_e_e) > 0.0) {
        return Err(bad("pi_e_n", "pi_E must be finite and not zero"));
    }
    let rates = match (ds_dt, dalpha_dt) {
        (None, None) => None,
        (a, b) => Some((a.unwrap_or(0.0), b.unwrap_or(0.0))),
    };
    let measure = ParallaxMeasure {
        theta_e_mas: theta_e,
        te_days: te,
        pi_e: (pi_e_n, pi_e_e),
        s,
        q,
        ds_kpc: ds,
        earth_velocity,
        rates,
    };
    let cov = match covariance {
        None => None,
        Some(c) => {
            let (v, shape) = values(&c);
            let n = if rates.is_some() { 8 } else { 6 };
            if shape != [n, n] {
                return Err(bad(
                    "covariance",
                    format!("must have shape ({n}, {n}), got {shape:?}"),
                ));
            }
            Some(v.chunks(n).map(<[f64]>::to_vec).collect::<Vec<_>>())
        }
    };
    lens_dict(py, &measure, cov.as_deref())
}

/// A minimum of the fit (a dict with "s", "q", "alpha" degrees, "u0", "t0", "te", "rho") as a
/// static model.
fn static_model(d: &Bound<'_, PyAny>) -> PyResult<BinaryModel> {
    let get = |k: &str| -> PyResult<f64> {
        d.get_item(k)
            .and_then(|v| v.extract())
            .map_err(|_| bad("minima", format!("each minimum needs a number \"{k}\"")))
    };
    model(
        get("s")?,
        get("q")?,
        get("t0")?,
        get("u0")?,
        get("te")?,
        get("alpha")?,
        get("rho")?,
    )
}

/// One row of the motion stage as a dict.
pub fn motion_dict<'py>(
    py: Python<'py>,
    m: &MotionMinimum,
    theta_star: Option<f64>,
    ds: Option<f64>,
) -> PyResult<Bound<'py, PyDict>> {
    let d = model_dict(py, &m.model)?;
    let tr = &m.model.trajectory;
    if let Some(p) = tr.parallax() {
        d.set_item("pi_e_n", p.pi_en)?;
        d.set_item("pi_e_e", p.pi_ee)?;
        d.set_item("t0_par", p.geometry.t0_par)?;
    }
    d.set_item("ds_dt", tr.orbit().map(|o| o.ds_dt))?;
    d.set_item("dalpha_dt", tr.orbit().map(|o| o.dalpha_dt))?;
    d.set_item("t0_kep", tr.orbit().map(|o| o.t0_kep))?;
    d.set_item("model", m.model.kind())?;
    let sigma = PyDict::new(py);
    for (name, s) in causeway::fit::motion::PARAMETERS.iter().zip(&m.sigma) {
        let (key, s) = match *name {
            "alpha" => ("alpha", s.to_degrees()),
            "tE" => ("te", *s),
            "pi_EN" => ("pi_e_n", *s),
            "pi_EE" => ("pi_e_e", *s),
            other => (other, *s),
        };
        sigma.set_item(key, s)?;
    }
    d.set_item("sigma", sigma)?;
    d.set_item("chi2", m.chi2)?;
    d.set_item("chi2_as_given", m.chi2_as_given)?;
    d.set_item("delta_chi2_static", m.delta_chi2)?;
    d.set_item("from", m.from)?;
    d.set_item("fluxes", fluxes(py, &m.fluxes)?)?;
    let lens = match theta_star.and_then(|t| m.lens_measure(t, ds)) {
        Some((measure, cov)) => Some(lens_dict(py, &measure, cov.as_deref())?),
        None => None,
    };
    d.set_item("lens", lens)?;
    Ok(d)
}

/// The motion stage's options from the arguments of `refine_with_motion` and `fit_event`.
pub fn motion_options(
    ra: &Bound<'_, PyAny>,
    dec: &Bound<'_, PyAny>,
    t0_par: Option<f64>,
    orbit: bool,
    ephemerides: Option<Vec<Option<Bound<'_, PyAny>>>>,
    parallax_minima: usize,
    tol: f64,
) -> PyResult<MotionOptions> {
    let ephemerides = ephemerides
        .unwrap_or_default()
        .iter()
        .map(|e| e.as_ref().map(ephemeris).transpose())
        .collect::<PyResult<Vec<_>>>()?;
    Ok(MotionOptions {
        t0_par,
        orbit,
        ephemerides,
        minima: parallax_minima,
        tol,
        ..MotionOptions::new(sky(ra, dec)?)
    })
}

/// refine_with_motion(data, minima, ra, dec, t0_par=None, orbit=True, ephemerides=None,
/// parallax_minima=2, tol=1e-4, max_iters=40, theta_star=None, ds=None, progress=None, threads=None)
/// -> list of dict
///
/// The fit's parallax stage on static minima (the "minima" of `fit_event`, best first, or any
/// dicts with "s", "q", "alpha" degrees, "u0", "t0", "te", "rho"): the best `parallax_minima` are each
/// refined with parallax from both members of the ecliptic pair (u0, alpha, pi_E,N) and
/// (-u0, -alpha, -pi_E,N), then (with `orbit`) with linear orbital motion, by exact
/// magnifications on `data` (a list of DataSet; `ephemerides` one per set, None for the Earth,
/// each as `trajectory` takes it). `t0_par` defaults to the best minimum's t0
/// rounded to a day. Rows: the model ("s", "q", "alpha", "u0", "t0", "te", "rho", "pi_e_n",
/// "pi_e_e", "t0_par", "ds_dt", "dalpha_dt", "t0_kep" or None), "model" (its kind), "sigma",
/// "chi2", "chi2_as_given", "delta_chi2_static" (static chi2 less this one's), "from" (index of
/// the static minimum), "fluxes", and "lens" (with `theta_star` in microarcseconds and the
/// source distance `ds` in kpc: what `lens_from_parallax` gives, with errors; else None).
///
///     rows = causeway.refine_with_motion(sets, fit["minima"], "17:55:00", "-29:30:00",
///                                        orbit=False, theta_star=0.6, ds=8.0)
#[pyfunction]
#[pyo3(signature = (data, minima, ra, dec, t0_par=None, orbit=true, ephemerides=None, parallax_minima=2, tol=1e-4, max_iters=40, theta_star=None, ds=None, progress=None, threads=None))]
#[allow(clippy::too_many_arguments)]
pub fn refine_with_motion<'py>(
    py: Python<'py>,
    data: Vec<PyRef<DataSet>>,
    minima: Vec<Bound<'py, PyAny>>,
    ra: &Bound<'py, PyAny>,
    dec: &Bound<'py, PyAny>,
    t0_par: Option<f64>,
    orbit: bool,
    ephemerides: Option<Vec<Option<Bound<'py, PyAny>>>>,
    parallax_minima: usize,
    tol: f64,
    max_iters: u64,
    theta_star: Option<f64>,
    ds: Option<f64>,
    progress: Option<Py<PyAny>>,
    threads: Option<usize>,
) -> PyResult<Vec<Bound<'py, PyDict>>> {
    if data.is_empty() {
        return Err(bad("data", "give at least one DataSet"));
    }
    if minima.is_empty() {
        return Err(bad("minima", "give at least one minimum"));
    }
    for (name, v) in [("theta_star", theta_star), ("ds", ds)] {
        if v.is_some_and(|v| !(v.is_finite() && v > 0.0)) {
            return Err(bad(name, "must be finite and > 0"));
        }
    }
    let sets = data_sets(data);
    let statics = minima
        .iter()
        .map(static_model)
        .collect::<PyResult<Vec<_>>>()?;
    let options = MotionOptions {
        max_iters,
        ..motion_options(ra, dec, t0_par, orbit, ephemerides, parallax_minima, tol)?
    };
    ok(options.validate(sets.len()))?;
    let default_t0_par = statics[0].trajectory.line().t0.round();
    let forward = Forward(progress);
    let rows = py.detach(|| {
        with_threads(threads, || {
            refine_motion(&sets, &sets, &statics, default_t0_par, &options, &forward)
        })
    })?;
    rows.iter()
        .map(|m| motion_dict(py, m, theta_star, ds))
        .collect()
}
