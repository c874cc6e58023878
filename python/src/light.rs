//! Finite sources: trajectories, magnifications read from a map, by contour integration, and
//! the exact magnification of a binary-lens model along its trajectory.

use crate::convert::{bad, chunked, ok, pair, shaped, values, with_threads, Array, Floats};
use crate::lens::{sources, Lens};
use crate::map::Map;
use crate::parallax::{moving_model, observer, Motion};
use causeway::contour;
use causeway::curve::{Evaluation, Method, PointMagnification, Sampler, StraightLine};
use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::lens::LensSystem;
use causeway::map::MagnificationMap;
use causeway::solve::ImageSolver;
use causeway::source::{LimbDarkening, SourceProfile};
use pyo3::prelude::*;

/// Names of the codes in the `method` array of `map_magnification`.
pub const MAP_METHODS: [&str; 6] = [
    "direct",
    "convolved",
    "bilinear",
    "expansion",
    "point",
    "contour",
];

/// A curve read from a map: magnifications, their estimated absolute errors, method codes
/// (naming [`MAP_METHODS`]) and warnings.
pub type MapRead = (Vec<f64>, Vec<f64>, Vec<u8>, Vec<String>);
/// Names of the codes in the `method` array of `contour_magnification`.
pub const CONTOUR_METHODS: [&str; 5] = [
    "point",
    "far-point",
    "small-source",
    "contour",
    "quadrupole",
];

/// The limb-darkening law of the `ld` (linear u) and `ld_sqrt` ((c, d)) arguments.
pub fn law(ld: Option<f64>, ld_sqrt: Option<(f64, f64)>) -> PyResult<LimbDarkening> {
    Ok(match (ld, ld_sqrt) {
        (None, None) => LimbDarkening::Uniform,
        (Some(u), None) => LimbDarkening::Linear { u },
        (None, Some((c, d))) => LimbDarkening::SquareRoot { c, d },
        (Some(_), Some(_)) => return Err(bad("ld_sqrt", "give ld or ld_sqrt, not both")),
    })
}

/// The source profile of `rho` and the limb-darkening arguments.
pub fn profile(rho: f64, ld: Option<f64>, ld_sqrt: Option<(f64, f64)>) -> PyResult<SourceProfile> {
    ok(SourceProfile::new(rho, law(ld, ld_sqrt)?))
}

/// trajectory(t0, u0, te, alpha, times, ra=None, dec=None, pi_e_n=None, pi_e_e=None,
/// t0_par=None, ds_dt=None, dalpha_dt=None, t0_kep=None, ephemeris=None) -> (x, y)
///
/// Source positions (Einstein radii) at `times` (days, any shape): on a straight line
/// tau = (t - t0)/te, position (tau cos(alpha) - u0 sin(alpha), tau sin(alpha) + u0 cos(alpha)),
/// alpha in degrees. With parallax (`pi_e_n`, `pi_e_e` and the event's `ra`, `dec`: degrees
/// or sexagesimal strings; `t0_par` days, default t0 rounded to a day; times below 2,400,000
/// are JD - 2450000) tau and u0 gain pi_E . Delta s and pi_E x Delta s (Gould 2004), seen from
/// the Earth or an observatory (`ephemeris`: a CSV path, an (n, 4) array t, x, y, z
/// heliocentric equatorial or an (n, 3) array t, north, east offsets from the Earth; au). With
/// orbital motion (`ds_dt` per year, `dalpha_dt` radians per year about `t0_kep`, default t0)
/// the binary axis turns. The positions are in the lens frame at each time.
///
///     x, y = causeway.trajectory(8300, 0.1, 60, 30, t, ra="18:00:00", dec="-30:00:00",
///                                pi_e_n=0.2, pi_e_e=-0.1)
#[pyfunction]
#[pyo3(signature = (t0, u0, te, alpha, times, ra=None, dec=None, pi_e_n=None, pi_e_e=None, t0_par=None, ds_dt=None, dalpha_dt=None, t0_kep=None, ephemeris=None))]
#[allow(clippy::too_many_arguments)]
pub fn trajectory<'py>(
    py: Python<'py>,
    t0: f64,
    u0: f64,
    te: f64,
    alpha: f64,
    times: Floats,
    ra: Option<Bound<'py, PyAny>>,
    dec: Option<Bound<'py, PyAny>>,
    pi_e_n: Option<f64>,
    pi_e_e: Option<f64>,
    t0_par: Option<f64>,
    ds_dt: Option<f64>,
    dalpha_dt: Option<f64>,
    t0_kep: Option<f64>,
    ephemeris: Option<Bound<'py, PyAny>>,
) -> PyResult<(Array<'py, f64>, Array<'py, f64>)> {
    let motion = Motion::new(
        [ra, dec, ephemeris],
        [pi_e_n, pi_e_e, t0_par, ds_dt, dalpha_dt, t0_kep],
    );
    let line = ok(StraightLine::new(t0, u0, te, alpha.to_radians()))?;
    let (t, shape) = values(&times);
    let tr = motion.apply(ok(Trajectory::straight(t0, u0, te, alpha.to_radians()))?)?;
    let pts = if tr.is_straight() {
        line.path(&t).points
    } else {
        let e = motion.ephemeris()?;
        ok(tr.positions_seen(&t, &observer(&e)))?
    };
    Ok((
        shaped(py, pts.iter().map(|p| p.0).collect(), &shape)?,
        shaped(py, pts.iter().map(|p| p.1).collect(), &shape)?,
    ))
}

/// The evaluation named by `evaluation`.
pub fn evaluation(name: &str) -> PyResult<Evaluation> {
    match name {
        "auto" => Ok(Evaluation::Auto),
        "direct" => Ok(Evaluation::Direct),
        "convolved" => Ok(Evaluation::Convolved),
        _ => Err(bad(
            "evaluation",
            format!("must be 'auto', 'direct' or 'convolved', got {name:?}"),
        )),
    }
}

/// Finite-source values from `map` at `points`, continued off the map with the map's lens
/// (as the command line's `curve --map` does); with `fallback`, every value whose error
/// estimate exceeds `tol` is recomputed by contour integration (as `curve` does by default).
pub fn sample_map(
    map: &MagnificationMap,
    profile: SourceProfile,
    points: &[(f64, f64)],
    tol: f64,
    evaluation: Evaluation,
    fallback: bool,
) -> causeway::Result<MapRead> {
    let lens: &LensSystem = &map.provenance.lens;
    let solver = (lens.len() > 1)
        .then(|| ImageSolver::new(lens).ok())
        .flatten();
    let point: &dyn PointMagnification = match &solver {
        Some(s) => s,
        None => lens,
    };
    let mut sampler = Sampler::new(profile)
        .tol(tol)
        .evaluation(evaluation)
        .lens(point)
        .map(map);
    if fallback {
        sampler = sampler.fallback(lens);
    }
    let curve = sampler.sample(points)?;
    let code = |m: Method| {
        MAP_METHODS
            .iter()
            .position(|&n| n == m.name())
            .expect("every method is named in MAP_METHODS") as u8
    };
    Ok((
        curve.samples.iter().map(|s| s.magnification).collect(),
        curve.samples.iter().map(|s| s.error).collect(),
        curve.samples.iter().map(|s| code(s.method)).collect(),
        curve.warnings,
    ))
}

/// map_magnification(map, x, y, rho, ld=None, ld_sqrt=None, tol=1e-3, evaluation="auto",
/// fallback=True, threads=None) -> (A, error, method)
///
/// Magnification of a source of radius `rho` (Einstein radii; 0 is a point source) centred at
/// (x, y) (arrays of one shape), read from `map`: A and its estimated absolute error (float64)
/// and method (uint8) of that shape, method codes naming `causeway.MAP_METHODS` ("direct",
/// "convolved", "bilinear", "expansion", "point", "contour"). `tol` is one relative tolerance
/// for every value, in (0, 0.1]: with `fallback` (the default, as `causeway curve`) a value
/// whose error estimate exceeds it is recomputed by contour integration with the map's lens
/// (method "contour"); without, the map's values are kept with their estimates. Off the map
/// the point-source magnification with its small-source correction serves where its error
/// estimate is below `tol`; a point nothing can serve raises ValueError. `ld` is the linear limb-darkening coefficient u, `ld_sqrt` the
/// square-root law's (c, d). Warnings (a source too small for the map) go to `warnings.warn`.
#[pyfunction]
#[pyo3(signature = (map, x, y, rho, ld=None, ld_sqrt=None, tol=1e-3, evaluation="auto", fallback=true, threads=None))]
#[allow(clippy::too_many_arguments)]
pub fn map_magnification<'py>(
    py: Python<'py>,
    map: &Map,
    x: Floats,
    y: Floats,
    rho: f64,
    ld: Option<f64>,
    ld_sqrt: Option<(f64, f64)>,
    tol: f64,
    evaluation: &str,
    fallback: bool,
    threads: Option<usize>,
) -> PyResult<(Array<'py, f64>, Array<'py, f64>, Array<'py, u8>)> {
    let profile = profile(rho, ld, ld_sqrt)?;
    let evaluation = self::evaluation(evaluation)?;
    let (xs, ys, shape) = pair(&x, &y, ("x", "y"))?;
    let points: Vec<(f64, f64)> = xs.into_iter().zip(ys).collect();
    let (a, e, m, warnings) = py.detach(|| {
        with_threads(threads, || {
            sample_map(&map.inner, profile, &points, tol, evaluation, fallback)
        })
    })?;
    py.check_signals()?;
    if !warnings.is_empty() {
        let warn = py.import("warnings")?.getattr("warn")?;
        for w in warnings {
            warn.call1((w.trim_start_matches("warning: "),))?;
        }
    }
    Ok((
        shaped(py, a, &shape)?,
        shaped(py, e, &shape)?,
        shaped(py, m, &shape)?,
    ))
}

/// contour_magnification(lens, x, y, rho, ld=None, ld_sqrt=None, tol=1e-4, threads=None)
/// -> (A, error, method)
///
/// Finite-source magnification by contour integration of the image boundaries, to relative
/// tolerance `tol` in (0, 0.1], at source centres (x, y) (arrays of one shape, Einstein radii):
/// A and its estimated absolute error (float64), method (uint8 codes naming
/// `causeway.CONTOUR_METHODS`: "point" for rho = 0, "far-point" far from the caustics where the
/// point source meets the tolerance, "quadrupole" nearer where the point source and its
/// quadrupole term do, "small-source" where the expansion does, "contour").
/// Up to 4 lenses.
#[pyfunction]
#[pyo3(signature = (lens, x, y, rho, ld=None, ld_sqrt=None, tol=1e-4, threads=None))]
#[allow(clippy::too_many_arguments)]
pub fn contour_magnification<'py>(
    py: Python<'py>,
    lens: &Lens,
    x: Floats,
    y: Floats,
    rho: f64,
    ld: Option<f64>,
    ld_sqrt: Option<(f64, f64)>,
    tol: f64,
    threads: Option<usize>,
) -> PyResult<(Array<'py, f64>, Array<'py, f64>, Array<'py, u8>)> {
    let profile = profile(rho, ld, ld_sqrt)?;
    let (zeta, shape) = sources(&x, &y)?;
    // Checks the tolerance and the lens once, before any chunk.
    ok(contour::ContourSolver::new(&lens.inner, tol))?;
    let est = chunked(py, zeta.len(), threads, |r| {
        contour::magnifications(&lens.inner, &zeta[r], &profile, tol)
    })?;
    let code = |m: contour::Method| match m {
        contour::Method::PointSource => 0u8,
        contour::Method::FarPoint => 1,
        contour::Method::SmallSource => 2,
        contour::Method::Contour => 3,
        contour::Method::Quadrupole => 4,
    };
    Ok((
        shaped(py, est.iter().map(|e| e.magnification).collect(), &shape)?,
        shaped(py, est.iter().map(|e| e.error).collect(), &shape)?,
        shaped(py, est.iter().map(|e| code(e.method)).collect(), &shape)?,
    ))
}

/// The binary-lens model of the arguments (alpha in degrees).
#[allow(clippy::too_many_arguments)]
pub fn model(
    s: f64,
    q: f64,
    t0: f64,
    u0: f64,
    te: f64,
    alpha: f64,
    rho: f64,
) -> PyResult<BinaryModel> {
    crate::lens::check_binary(s, q)?;
    if !(rho.is_finite() && rho >= 0.0) {
        return Err(bad("rho", format!("must be finite and >= 0, got {rho}")));
    }
    Ok(BinaryModel {
        s,
        q,
        rho,
        trajectory: ok(Trajectory::straight(t0, u0, te, alpha.to_radians()))?,
    })
}

/// model_magnification(s, q, t0, u0, te, alpha, rho, times, ld=None, ld_sqrt=None, tol=1e-4,
/// threads=None, ra=None, dec=None, pi_e_n=None, pi_e_e=None, t0_par=None, ds_dt=None,
/// dalpha_dt=None, t0_kep=None, ephemeris=None) -> A
///
/// The exact magnification of a binary-lens model at `times` (days, any shape; A float64 of
/// that shape): lens (s, q), straight trajectory (t0 days, u0 Einstein radii, te days, alpha
/// degrees), source radius rho; point source plus small-source correction far from caustics,
/// contour integration near them, to relative tolerance `tol`. The magnification the fit's
/// refinement and `simulate` use. The keyword arguments from `ra` on add parallax and lens
/// orbital motion as `trajectory` describes them (all None: the straight line).
///
///     a = causeway.model_magnification(1.2, 1e-3, 8300, 0.1, 60, 30, 1e-3, t,
///                                      ra=270.0, dec=-30.0, pi_e_n=0.2, pi_e_e=-0.1)
#[pyfunction]
#[pyo3(signature = (s, q, t0, u0, te, alpha, rho, times, ld=None, ld_sqrt=None, tol=1e-4, threads=None, ra=None, dec=None, pi_e_n=None, pi_e_e=None, t0_par=None, ds_dt=None, dalpha_dt=None, t0_kep=None, ephemeris=None))]
#[allow(clippy::too_many_arguments)]
pub fn model_magnification<'py>(
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
    ld_sqrt: Option<(f64, f64)>,
    tol: f64,
    threads: Option<usize>,
    ra: Option<Bound<'py, PyAny>>,
    dec: Option<Bound<'py, PyAny>>,
    pi_e_n: Option<f64>,
    pi_e_e: Option<f64>,
    t0_par: Option<f64>,
    ds_dt: Option<f64>,
    dalpha_dt: Option<f64>,
    t0_kep: Option<f64>,
    ephemeris: Option<Bound<'py, PyAny>>,
) -> PyResult<Array<'py, f64>> {
    let motion = Motion::new(
        [ra, dec, ephemeris],
        [pi_e_n, pi_e_e, t0_par, ds_dt, dalpha_dt, t0_kep],
    );
    let m = moving_model(s, q, t0, u0, te, alpha, rho, &motion)?;
    let e = motion.ephemeris()?;
    let seen = observer(&e);
    let law = law(ld, ld_sqrt)?;
    let (t, shape) = values(&times);
    let a = chunked(py, t.len(), threads, |r| {
        m.magnifications_seen(&t[r], &seen, law, tol)
    })?;
    shaped(py, a, &shape)
}
