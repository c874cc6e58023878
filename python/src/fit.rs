//! Photometry from arrays, the single-lens fit, the whole fit over a library, `simulate`.

use crate::convert::{bad, ok, values, with_threads, Floats, Forward};
use crate::light::{law, model};
use crate::map::Map;
use crate::parallax::{motion_dict, motion_options, moving_model, observer, Motion};
use crate::store::Store;
use causeway::fit::bins::SEARCH_POINTS;
use causeway::fit::event::{
    fit_event as fit_whole, FitOptions, DEFAULT_CLIP_SIGMA, DEFAULT_TIME_LIMIT,
};
use causeway::fit::fluxes::FluxFit;
use causeway::fit::hop::HOPS;
use causeway::fit::model::BinaryModel;
use causeway::fit::photometry::{DataSet as Set, Measured, DEFAULT_ZERO_POINT};
use causeway::fit::refine::PARAMETERS;
use causeway::fit::search::{maps_of_store, GridRule, MapSource};
use causeway::fit::simulate::plan::ObservingPlan;
use causeway::fit::simulate::{Noise, Simulation, Synthetic};
use causeway::fit::single::fit_single_lens as fit_single;
use causeway::fit::zoom::ZoomOptions;
use causeway::map::MagnificationMap;
use numpy::PyArray1;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use std::fmt::Write as _;
use std::time::Duration;

/// One data set: times (days), fluxes and errors, sorted by time.
///
///     d = causeway.DataSet(t, mag=m, mag_err=e, name="north", ld=0.6)   # magnitudes (zp 22)
///     d = causeway.DataSet(t, flux=f, flux_err=e)                        # or fluxes
///     d.t, d.flux, d.flux_err                                            # float64, shape (n,)
#[pyclass(name = "DataSet", module = "causeway", frozen)]
#[derive(Clone)]
pub struct DataSet {
    pub inner: Set,
}

/// Checks one column against the times: 1-D, the same length, finite (errors > 0).
fn column(name: &str, a: &Floats, n: usize, positive: bool) -> PyResult<Vec<f64>> {
    let (v, shape) = values(a);
    if shape.len() != 1 || v.len() != n {
        return Err(bad(
            name,
            format!("must be 1-D of the length of t ({n}), got {shape:?}"),
        ));
    }
    if let Some(i) = v
        .iter()
        .position(|x| !x.is_finite() || (positive && *x <= 0.0))
    {
        let need = if positive { "finite and > 0" } else { "finite" };
        return Err(bad(name, format!("[{i}] must be {need}, got {}", v[i])));
    }
    Ok(v)
}

#[pymethods]
impl DataSet {
    /// DataSet(t, mag=None, mag_err=None, flux=None, flux_err=None, name="data",
    /// zero_point=22.0, ld=None): give mag and mag_err, or flux and flux_err; at least 3
    /// distinct times; `ld` the linear limb-darkening coefficient of the band.
    #[new]
    #[pyo3(signature = (t, mag=None, mag_err=None, flux=None, flux_err=None, name="data", zero_point=DEFAULT_ZERO_POINT, ld=None))]
    #[allow(clippy::too_many_arguments)]
    fn new(
        t: Floats,
        mag: Option<Floats>,
        mag_err: Option<Floats>,
        flux: Option<Floats>,
        flux_err: Option<Floats>,
        name: &str,
        zero_point: f64,
        ld: Option<f64>,
    ) -> PyResult<Self> {
        crate::convert::finite("zero_point", zero_point)?;
        let (times, shape) = values(&t);
        if shape.len() != 1 || times.len() < 3 {
            return Err(bad(
                "t",
                format!("must be 1-D with at least 3 times, got {shape:?}"),
            ));
        }
        let n = times.len();
        column("t", &t, n, false)?;
        let (head, v, e) = match (mag, mag_err, flux, flux_err) {
            (Some(m), Some(me), None, None) => (
                "mag,mag_err",
                column("mag", &m, n, false)?,
                column("mag_err", &me, n, true)?,
            ),
            (None, None, Some(f), Some(fe)) => (
                "flux,flux_err",
                column("flux", &f, n, false)?,
                column("flux_err", &fe, n, true)?,
            ),
            _ => return Err(bad("mag", "give mag and mag_err, or flux and flux_err")),
        };
        let mut sorted = times.clone();
        sorted.sort_by(f64::total_cmp);
        if let Some(w) = sorted.windows(2).find(|w| w[0] == w[1]) {
            return Err(bad("t", format!("time {} appears twice", w[0])));
        }
        // Shortest round-trip text: parsing gives back the same doubles.
        let mut text = format!("t,{head}\n");
        for i in 0..n {
            writeln!(text, "{:?},{:?},{:?}", times[i], v[i], e[i]).unwrap();
        }
        let mut set = ok(Set::parse(&text, name, zero_point))?;
        set.limb_darkening = crate::light::profile(0.0, ld, None)?.law;
        Ok(DataSet { inner: set })
    }

    /// DataSet.read(path, zero_point=22.0, ld=None): a CSV file t,mag,mag_err or t,flux,flux_err.
    #[staticmethod]
    #[pyo3(signature = (path, zero_point=DEFAULT_ZERO_POINT, ld=None))]
    fn read(path: std::path::PathBuf, zero_point: f64, ld: Option<f64>) -> PyResult<Self> {
        let mut set = ok(Set::read(&path, zero_point))?;
        set.limb_darkening = crate::light::profile(0.0, ld, None)?.law;
        Ok(DataSet { inner: set })
    }

    /// Times (days), increasing.
    #[getter]
    fn t<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_slice(py, &self.inner.times)
    }

    /// Fluxes (magnitudes converted with the zero point).
    #[getter]
    fn flux<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_slice(py, &self.inner.flux)
    }

    /// Flux errors as given.
    #[getter]
    fn flux_err<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        PyArray1::from_slice(py, &self.inner.flux_err)
    }

    /// "mag" or "flux": what was given.
    #[getter]
    fn measured(&self) -> &'static str {
        match self.inner.measured {
            Measured::Magnitude => "mag",
            Measured::Flux => "flux",
        }
    }

    /// The name used in reports.
    #[getter]
    fn name(&self) -> String {
        self.inner.name.clone()
    }

    fn __len__(&self) -> usize {
        self.inner.len()
    }
}

pub fn data_sets(data: Vec<PyRef<DataSet>>) -> Vec<Set> {
    data.iter().map(|d| d.inner.clone()).collect()
}

pub fn fluxes<'py>(py: Python<'py>, f: &[FluxFit]) -> PyResult<Vec<Bound<'py, PyDict>>> {
    f.iter()
        .map(|f| {
            let d = PyDict::new(py);
            d.set_item("fs", f.fs)?;
            d.set_item("fb", f.fb)?;
            d.set_item("chi2", f.chi2)?;
            Ok(d)
        })
        .collect()
}

/// fit_single_lens(data) -> dict: the bounded single-lens (Paczynski) fit of a list of
/// DataSet: "t0", "u0", "te" (days, Einstein radii, days), "sigma" (their 1-sigma errors),
/// "fluxes" (per set: "fs", "fb", "chi2"), "chi2", "points", "dof".
#[pyfunction]
pub fn fit_single_lens<'py>(
    py: Python<'py>,
    data: Vec<PyRef<DataSet>>,
) -> PyResult<Bound<'py, PyDict>> {
    let sets = data_sets(data);
    let f = py.detach(|| fit_single(&sets));
    let f = ok(f)?;
    let d = PyDict::new(py);
    d.set_item("t0", f.t0)?;
    d.set_item("u0", f.u0)?;
    d.set_item("te", f.te)?;
    d.set_item("sigma", f.sigma.to_vec())?;
    d.set_item("fluxes", fluxes(py, &f.fluxes)?)?;
    d.set_item("chi2", f.chi2)?;
    d.set_item("points", f.points)?;
    d.set_item("dof", f.dof())?;
    Ok(d)
}

/// A model's parameters in a dict (alpha in degrees).
pub fn model_dict<'py>(py: Python<'py>, m: &BinaryModel) -> PyResult<Bound<'py, PyDict>> {
    let line = m.trajectory.line();
    let d = PyDict::new(py);
    d.set_item("s", m.s)?;
    d.set_item("q", m.q)?;
    d.set_item("alpha", line.alpha.to_degrees())?;
    d.set_item("u0", line.u0)?;
    d.set_item("t0", line.t0)?;
    d.set_item("te", line.te)?;
    d.set_item("rho", m.rho)?;
    Ok(d)
}

/// fit_event(data, maps, rhos=None, exclude=(), baseline=None, zoom_levels=2, zoom_points=2,
/// refine=4, tol=1e-4, budget=600.0, clip=5.0, rescale_errors=True, adaptive_timing=True,
/// hops=8, progress=None, threads=None, time_limit=780.0, search_points=1500) -> dict
///
/// The whole fit of a list of DataSet with the binary-lens maps of `maps` (a Store: all its
/// binary maps; or a list of Map): single-lens baseline, search of every map, zoom, exact
/// refinement, outlier clipping (clip sigmas, 0 for none), error rescaling, refinement again,
/// hops (`hops` perturbed restarts per round around the best minimum; 0 for none). Every
/// refinement pass stops `time_limit` seconds after the start (0 for no limit). Data of more
/// than `search_points` points are merged down to that many for the search and the zoom (flat
/// stretches first; 0 reads every point); the refinement fits every point.
/// Returns "minima" (best first; each a dict of "s", "q", "alpha" (degrees), "u0", "t0", "te"
/// (days), "rho", "sigma" (dict of the same names), "chi2", "chi2_as_given", "search_chi2",
/// "partner" (index of its close/wide partner or None), "fluxes"), "single" (the baseline's
/// t0, u0, te, chi2), "error_scales", "clipped" (dicts "set", "t", "residual"), "notes",
/// "seconds" (search, refinement). `progress(event, text)` receives the stages.
/// With the event's `ra` and `dec` (degrees or sexagesimal) the parallax stage runs after the
/// static fit (`refine_with_motion` on the data the fit ended with: `t0_par` default the
/// single lens's t0 rounded, `orbit`, `ephemerides` one per set or None, `parallax_minima`),
/// its rows in "motion" (empty without coordinates).
///
///     fit = causeway.fit_event(sets, store, ra="17:55:00", dec="-29:30:00", orbit=False)
///     fit["motion"][0]["pi_e_n"], fit["motion"][0]["delta_chi2_static"]
#[pyfunction]
#[pyo3(signature = (data, maps, rhos=None, exclude=Vec::new(), baseline=None, zoom_levels=2, zoom_points=2, refine=4, tol=1e-4, budget=600.0, clip=DEFAULT_CLIP_SIGMA, rescale_errors=true, adaptive_timing=true, hops=HOPS, progress=None, threads=None, ra=None, dec=None, t0_par=None, orbit=true, ephemerides=None, parallax_minima=2, time_limit=DEFAULT_TIME_LIMIT.as_secs_f64(), search_points=SEARCH_POINTS))]
#[allow(clippy::too_many_arguments)]
pub fn fit_event<'py>(
    py: Python<'py>,
    data: Vec<PyRef<DataSet>>,
    maps: &Bound<'py, PyAny>,
    rhos: Option<Vec<f64>>,
    exclude: Vec<(f64, f64)>,
    baseline: Option<(f64, f64, f64)>,
    zoom_levels: usize,
    zoom_points: usize,
    refine: usize,
    tol: f64,
    budget: f64,
    clip: f64,
    rescale_errors: bool,
    adaptive_timing: bool,
    hops: usize,
    progress: Option<Py<PyAny>>,
    threads: Option<usize>,
    ra: Option<Bound<'py, PyAny>>,
    dec: Option<Bound<'py, PyAny>>,
    t0_par: Option<f64>,
    orbit: bool,
    ephemerides: Option<Vec<Option<Bound<'py, PyAny>>>>,
    parallax_minima: usize,
    time_limit: f64,
    search_points: usize,
) -> PyResult<Bound<'py, PyDict>> {
    if data.is_empty() {
        return Err(bad("data", "give at least one DataSet"));
    }
    let sets = data_sets(data);
    for (name, seconds) in [("budget", budget), ("time_limit", time_limit)] {
        if !(seconds.is_finite() && seconds >= 0.0) {
            return Err(bad(name, format!("must be >= 0 seconds, got {seconds}")));
        }
    }
    if !(clip == 0.0 || (clip.is_finite() && clip >= 2.0)) {
        return Err(bad("clip", format!("must be 0 (off) or >= 2, got {clip}")));
    }
    if !(tol.is_finite() && tol > 0.0 && tol <= 0.1) {
        return Err(bad("tol", format!("must be in (0, 0.1], got {tol}")));
    }
    let mut options = FitOptions {
        exclude,
        baseline,
        adaptive_timing,
        zoom: Some(ZoomOptions {
            centres: zoom_points,
            levels: zoom_levels,
            ..ZoomOptions::default()
        }),
        clip_sigma: (clip > 0.0).then_some(clip),
        rescale_errors,
        search_points: (search_points > 0).then_some(search_points),
        motion: match (&ra, &dec) {
            (Some(r), Some(d)) => Some(motion_options(
                r,
                d,
                t0_par,
                orbit,
                ephemerides,
                parallax_minima,
                tol,
            )?),
            (None, None) => None,
            (None, Some(_)) => return Err(bad("ra", "give ra with dec")),
            (Some(_), None) => return Err(bad("dec", "give dec with ra")),
        },
        ..FitOptions::default()
    };
    if let Some(r) = rhos {
        options.rule = GridRule {
            rhos: r,
            ..GridRule::default()
        };
    }
    options.refine.candidates = refine;
    options.refine.tol = tol;
    options.refine.hops = hops;
    options.refine.budget = (budget > 0.0).then(|| Duration::from_secs_f64(budget));
    options.time_limit = (time_limit > 0.0).then(|| Duration::from_secs_f64(time_limit));
    let forward = Forward(progress);
    let result = if let Ok(store) = maps.cast::<Store>() {
        let files = ok(maps_of_store(&store.get().inner))?;
        py.detach(|| {
            with_threads(threads, || {
                fit_whole(&sets, MapSource::Files(&files), &options, &forward)
            })
        })?
    } else {
        let list: Vec<PyRef<Map>> = maps
            .extract()
            .map_err(|_| bad("maps", "must be a Store or a list of Map"))?;
        let loaded: Vec<MagnificationMap> = list.iter().map(|m| m.inner.clone()).collect();
        py.detach(|| {
            with_threads(threads, || {
                fit_whole(&sets, MapSource::Loaded(&loaded), &options, &forward)
            })
        })?
    };
    let minima = result
        .minima
        .iter()
        .map(|m| {
            let d = model_dict(py, &m.refined.model)?;
            let sigma = PyDict::new(py);
            for (name, s) in PARAMETERS.iter().zip(m.refined.sigma) {
                let s = if *name == "alpha" { s.to_degrees() } else { s };
                sigma.set_item(if *name == "tE" { "te" } else { name }, s)?;
            }
            d.set_item("sigma", sigma)?;
            d.set_item("chi2", m.refined.chi2)?;
            d.set_item("chi2_as_given", m.chi2_as_given)?;
            d.set_item("search_chi2", m.search_chi2)?;
            d.set_item("partner", m.partner)?;
            d.set_item("fluxes", fluxes(py, &m.refined.fluxes)?)?;
            Ok(d)
        })
        .collect::<PyResult<Vec<_>>>()?;
    let single = PyDict::new(py);
    single.set_item("t0", result.single.t0)?;
    single.set_item("u0", result.single.u0)?;
    single.set_item("te", result.single.te)?;
    single.set_item("chi2", result.single.chi2)?;
    let clipped = result
        .clipped
        .iter()
        .map(|c| {
            let d = PyDict::new(py);
            d.set_item("set", c.set)?;
            d.set_item("t", c.time)?;
            d.set_item("residual", c.residual)?;
            Ok(d)
        })
        .collect::<PyResult<Vec<_>>>()?;
    let d = PyDict::new(py);
    d.set_item("minima", minima)?;
    d.set_item("single", single)?;
    d.set_item("error_scales", result.error_scales)?;
    d.set_item("clipped", clipped)?;
    d.set_item("notes", result.notes)?;
    d.set_item("seconds", result.seconds)?;
    let motion = result
        .motion
        .iter()
        .map(|m| motion_dict(py, m, None, None))
        .collect::<PyResult<Vec<_>>>()?;
    d.set_item("motion", motion)?;
    Ok(d)
}

/// simulate(s, q, t0, u0, te, alpha, rho, times, ld=None, fs=1.0, fb=0.0, sigma_mag=0.01,
/// sigma_flux=None, seed=1, zero_point=22.0, tol=1e-5, ra=None, dec=None, pi_e_n=None,
/// pi_e_e=None, t0_par=None, ds_dt=None, dalpha_dt=None, t0_kep=None, ephemeris=None) -> dict
///
/// Synthetic photometry of a binary-lens event (alpha in degrees) at `times` (days): exact
/// magnifications, F = fs A + fb, Gaussian noise of one constant error in magnitudes (or in
/// flux with sigma_flux), seeded. Returns float64 arrays "t" (sorted), "magnification",
/// "model" (noise-free), "value", "error" (mag or flux, as "measured" says), bool arrays
/// "followup" and "outlier" (all False here), and "data", the DataSet of the points (what the
/// command line's file would read back as). The keyword arguments from `ra` on add parallax
/// and lens orbital motion as `trajectory` describes them (`ephemeris`: the data are seen from
/// that observatory), as `causeway simulate --ra --dec --pi-e-n ...` does.
///
///     sim = causeway.simulate(1.2, 1e-3, 8300, 0.1, 60, 30, 1e-3, t, ra="18:00:00",
///                             dec="-30:00:00", pi_e_n=0.2, pi_e_e=-0.1, seed=3)
#[pyfunction]
#[pyo3(signature = (s, q, t0, u0, te, alpha, rho, times, ld=None, fs=1.0, fb=0.0, sigma_mag=Simulation::DEFAULT_SIGMA_MAG, sigma_flux=None, seed=Simulation::DEFAULT_SEED, zero_point=DEFAULT_ZERO_POINT, tol=Simulation::DEFAULT_TOL, ra=None, dec=None, pi_e_n=None, pi_e_e=None, t0_par=None, ds_dt=None, dalpha_dt=None, t0_kep=None, ephemeris=None))]
#[allow(clippy::too_many_arguments)]
pub fn simulate<'py>(
    py: Python<'py>,
    s: f64,
    q: f64,
    t0: f64,
    u0: f64,
    te: f64,
    alpha: f64,
    rho: f64,
    times: Floats,
    ld: Option<f64>,
    fs: f64,
    fb: f64,
    sigma_mag: f64,
    sigma_flux: Option<f64>,
    seed: u64,
    zero_point: f64,
    tol: f64,
    ra: Option<Bound<'py, PyAny>>,
    dec: Option<Bound<'py, PyAny>>,
    pi_e_n: Option<f64>,
    pi_e_e: Option<f64>,
    t0_par: Option<f64>,
    ds_dt: Option<f64>,
    dalpha_dt: Option<f64>,
    t0_kep: Option<f64>,
    ephemeris: Option<Bound<'py, PyAny>>,
) -> PyResult<Bound<'py, PyDict>> {
    let motion = Motion::new(
        [ra, dec, ephemeris],
        [pi_e_n, pi_e_e, t0_par, ds_dt, dalpha_dt, t0_kep],
    );
    let e = motion.ephemeris()?;
    let sim = Simulation {
        model: moving_model(s, q, t0, u0, te, alpha, rho, &motion)?,
        law: law(ld, None)?,
        fs,
        fb,
        noise: match sigma_flux {
            Some(sigma) => Noise::Flux { sigma },
            None => Noise::Magnitude { sigma: sigma_mag },
        },
        seed,
        zero_point,
        tol,
    };
    let (t, _) = values(&times);
    let out = py.detach(|| sim.synthesize_seen(&t, &observer(&e)));
    let out = ok(out)?;
    let data = ok(out.data_set("simulated", zero_point, sim.law))?;
    synthetic(py, &out, data)
}

/// The points of a simulation as a dict of arrays, with their DataSet.
fn synthetic<'py>(py: Python<'py>, out: &Synthetic, data: Set) -> PyResult<Bound<'py, PyDict>> {
    let d = PyDict::new(py);
    d.set_item("t", PyArray1::from_slice(py, &out.times))?;
    d.set_item(
        "magnification",
        PyArray1::from_slice(py, &out.magnifications),
    )?;
    d.set_item("model", PyArray1::from_slice(py, &out.model))?;
    d.set_item("value", PyArray1::from_slice(py, &out.values))?;
    d.set_item("error", PyArray1::from_slice(py, &out.errors))?;
    d.set_item("followup", PyArray1::from_slice(py, &out.followup))?;
    d.set_item("outlier", PyArray1::from_slice(py, &out.outliers))?;
    d.set_item(
        "measured",
        match out.measured {
            Measured::Magnitude => "mag",
            Measured::Flux => "flux",
        },
    )?;
    d.set_item("data", DataSet { inner: data })?;
    Ok(d)
}

/// simulate_plan(plan, s, q, t0, u0, te, alpha, rho, ld=None, seed=1, tol=1e-5) -> dict
///
/// Synthetic photometry of a binary-lens event (alpha in degrees, t0 in the plan's days) as an
/// observing plan gives it: `plan` is TOML text or a TOML file's path (`causeway.EXAMPLE_PLAN`
/// is a commented one). Returns a dict by site name, each as `simulate` returns (times as
/// written, with the plan's offset) plus "nights" and "nights_lost".
#[pyfunction]
#[pyo3(signature = (plan, s, q, t0, u0, te, alpha, rho, ld=None, seed=Simulation::DEFAULT_SEED, tol=Simulation::DEFAULT_TOL))]
#[allow(clippy::too_many_arguments)]
pub fn simulate_plan<'py>(
    py: Python<'py>,
    plan: &str,
    s: f64,
    q: f64,
    t0: f64,
    u0: f64,
    te: f64,
    alpha: f64,
    rho: f64,
    ld: Option<f64>,
    seed: u64,
    tol: f64,
) -> PyResult<Bound<'py, PyDict>> {
    let plan = if plan.contains('\n') || plan.contains('=') {
        ok(ObservingPlan::parse(plan, "plan"))?
    } else {
        ok(ObservingPlan::read(std::path::Path::new(plan)))?
    };
    let model = model(s, q, t0, u0, te, alpha, rho)?;
    let law = crate::light::profile(rho, ld, None)?.law;
    let sites = py.detach(|| plan.observe(&model, law, seed, tol));
    let d = PyDict::new(py);
    for site in ok(sites)? {
        let one = synthetic(py, &site.data, ok(site.data_set())?)?;
        one.set_item("nights", site.nights)?;
        one.set_item("nights_lost", site.nights_lost)?;
        d.set_item(&site.site, one)?;
    }
    Ok(d)
}
