//! A catalogue of invented events for the recovery benchmark: sixteen binary-lens (and two
//! single-lens) events of the kinds a modeler meets, observed as real data are, with the
//! ready-made plan ([`ObservingPlan::survey_with_followup`]: three survey sites with nightly
//! gaps, lost nights, error scales above 1 and outliers, and a follow-up site over the
//! anomaly), times near 9000 (as JD - 2450000), and the broad library that serves them all.
//!
//! The follow-up window of each event is placed as a follow-up team would place it after an
//! alert: from one day before to 1.5 days after the largest departure of the event's light
//! curve from its host's own (for a single lens, around the peak).

use super::plan::ObservingPlan;
use crate::curve::time_range;
use crate::error::Result;
use crate::fit::event::FitResult;
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::photometry::DataSet;
use crate::fit::refine::exact_chi2;
use crate::lens::paczynski;
use crate::source::LimbDarkening;
use crate::store::library::LibrarySpec;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// The library spec a user who does not know the answer would search with: s log-spaced over
/// [0.5, 2] (13 values), q log-spaced over [1e-4, 0.3] (11 values), a map on every caustic of
/// each binary (`rule = "caustics"`), 500^2 pixels, the polygon engine.
pub const BROAD_LIBRARY: &str = "# Every caustic of every binary in s 0.5..2, q 1e-4..0.3.\n\
    s = { log = [0.5, 2.0, 13] }\n\
    q = { log = [1e-4, 0.3, 11] }\n\
    pixels = 500\n\
    rays = 1\n\
    engine = \"polygon\"\n\
    [window]\n\
    rule = \"caustics\"\n";

/// The kinds of event in the catalogue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EventKind {
    /// A wide planet whose planetary caustic the source crosses off the peak.
    WidePlanet,
    /// A close planet whose off-axis triangular caustic the source crosses (a dip or a bump).
    ClosePlanet,
    /// High magnification through a central caustic (q near 5e-4, u0 < 0.01).
    CentralCaustic,
    /// A resonant caustic over the peak.
    Resonant,
    /// A stellar binary (q 0.2 to 0.5) with a U-shaped trough between caustic crossings.
    StellarBinary,
    /// A short bump from a cusp approach, without a crossing.
    CuspApproach,
    /// A low-q planet (1e-4) whose anomaly the finite source partly washes out.
    LowMassRatio,
    /// A plain single lens.
    SingleLens,
}

impl EventKind {
    /// A short name for tables.
    pub fn name(&self) -> &'static str {
        match self {
            EventKind::WidePlanet => "wide planet",
            EventKind::ClosePlanet => "close planet",
            EventKind::CentralCaustic => "central caustic",
            EventKind::Resonant => "resonant",
            EventKind::StellarBinary => "stellar binary",
            EventKind::CuspApproach => "cusp approach",
            EventKind::LowMassRatio => "low q",
            EventKind::SingleLens => "single lens",
        }
    }
}

/// One invented event: its truth, how it is observed, and the noise seed.
#[derive(Debug, Clone, PartialEq)]
pub struct BenchEvent {
    /// A name for tables and file names.
    pub name: &'static str,
    /// Its kind.
    pub kind: EventKind,
    /// The true model.
    pub truth: BinaryModel,
    /// Blend flux of every site, as a fraction of its source flux.
    pub blend: f64,
    /// The season, plan time (days).
    pub season: (f64, f64),
    /// Seed of the observing plan's streams.
    pub seed: u64,
}

impl BenchEvent {
    /// The observing plan of the event (follow-up over its largest departure).
    pub fn plan(&self) -> Result<ObservingPlan> {
        // Point source (rho at most 1e-3): the departure's place, not its size, is wanted.
        let point = BinaryModel {
            rho: self.truth.rho.min(1e-3),
            ..self.truth
        };
        let (t, _) = departure(&point, self.season)?;
        Ok(ObservingPlan::survey_with_followup(
            self.season,
            &[(t - 1.0, t + 1.5)],
            self.blend,
        ))
    }

    /// Variant `k` of the event (`k = 0` is the event itself): the same lens and the same
    /// path across it (s, q, u0, alpha), observed another way, drawn from a stream seeded by
    /// the event's seed and `k`: tE scaled by 0.67 to 1.5, rho by 0.74 to 1.35, t0 moved by up
    /// to half a day (the anomaly falls elsewhere in the night), the season moved by up to 15
    /// days about the peak, blending from 0 to 3, and other noise. For measuring the fit on
    /// events it was not tuned on.
    ///
    /// ```
    /// let e = &causeway::fit::simulate::events::recovery_events().unwrap()[0];
    /// let v = e.variant(3).unwrap();
    /// assert_eq!((v.truth.s, v.truth.q), (e.truth.s, e.truth.q));
    /// assert_ne!(v.seed, e.seed);
    /// assert_eq!(e.variant(0).unwrap(), *e);
    /// ```
    pub fn variant(&self, k: u64) -> Result<BenchEvent> {
        if k == 0 {
            return Ok(self.clone());
        }
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed.wrapping_mul(1_000_003).wrapping_add(k));
        let l = *self.truth.trajectory.line();
        let te = l.te * rng.random_range(-0.4f64..0.4).exp();
        let t0 = l.t0 + rng.random_range(-0.5..0.5);
        let rho = self.truth.rho * rng.random_range(-0.3f64..0.3).exp();
        let blend = [0.0, 0.2, 0.5, 1.0, 2.0, 3.0][rng.random_range(0..6)];
        let shift = rng.random_range(-15.0..15.0);
        let half = 0.5 * (self.season.1 - self.season.0);
        Ok(BenchEvent {
            truth: BinaryModel {
                rho,
                trajectory: Trajectory::straight(t0, l.u0, te, l.alpha)?,
                ..self.truth
            },
            blend,
            season: (t0 + shift - half, t0 + shift + half),
            seed: self.seed + 1000 * k,
            ..self.clone()
        })
    }

    /// The event's data sets, one per site (uniform source; magnifications to 1e-4).
    pub fn data(&self) -> Result<Vec<DataSet>> {
        self.plan()?
            .data_sets(&self.truth, LimbDarkening::Uniform, self.seed, 1e-4)
    }
}

/// The time where the light curve of `model` departs most from its host's own (Paczynski's
/// curve about the heavier lens), sampled every 0.005 days over `season`, and the departure
/// there, `|ln(A / A_host)|`.
pub(super) fn departure(model: &BinaryModel, season: (f64, f64)) -> Result<(f64, f64)> {
    let n = ((season.1 - season.0) / 0.005) as usize + 1;
    let times = time_range(season.0, season.1, n)?;
    let a = model.magnifications(&times, LimbDarkening::Uniform, 1e-3)?;
    let host = model.lens()?.lenses()[0];
    let mut best = (model.trajectory.line().t0, 0.0);
    for (&t, &a) in times.iter().zip(&a) {
        let (x, y) = model.trajectory.position(t);
        let u = (x - host.position.re).hypot(y - host.position.im) / host.mass.sqrt();
        let d = (a / paczynski(u.max(1e-9))).ln().abs();
        if d > best.1 {
            best = (t, d);
        }
    }
    Ok(best)
}

/// The sixteen events of the recovery benchmark, two of each [`EventKind`], blending from 0
/// to 3 times the source flux, t0 near 9000.
///
/// ```
/// let events = causeway::fit::simulate::events::recovery_events().unwrap();
/// assert_eq!(events.len(), 16);
/// ```
pub fn recovery_events() -> Result<Vec<BenchEvent>> {
    use EventKind::*;
    // name, kind, s, q, u0, alpha (deg), rho, tE (d), t0 - 9000, blend
    type Row = (
        &'static str,
        EventKind,
        f64,
        f64,
        f64,
        f64,
        f64,
        f64,
        f64,
        f64,
    );
    #[rustfmt::skip]
    let table: [Row; 16] = [
        ("wide-1", WidePlanet, 1.35, 3e-3, 0.207, 200.0, 3e-3, 29.0, 0.0, 0.3),
        ("wide-2", WidePlanet, 1.6, 1e-3, -0.25, 165.0, 2e-3, 35.0, 4.0, 1.0),
        ("close-1", ClosePlanet, 0.75, 5e-3, 0.15, 75.0, 2e-3, 25.0, -3.0, 0.5),
        ("close-2", ClosePlanet, 0.8, 2e-3, 0.30, 30.0, 2e-3, 40.0, 2.0, 0.0),
        ("central-1", CentralCaustic, 1.1, 5e-4, 0.005, 120.0, 1e-3, 35.0, 0.0, 2.0),
        ("central-2", CentralCaustic, 0.85, 6e-4, 0.008, 50.0, 1.5e-3, 22.0, 5.0, 1.0),
        ("resonant-1", Resonant, 1.0, 0.01, 0.05, 30.0, 3e-3, 30.0, 0.0, 0.5),
        ("resonant-2", Resonant, 1.05, 0.02, 0.08, 250.0, 2e-3, 45.0, -4.0, 0.0),
        ("stellar-1", StellarBinary, 0.9, 0.3, 0.1, 60.0, 2e-3, 40.0, 0.0, 1.0),
        ("stellar-2", StellarBinary, 1.2, 0.2, 0.15, 130.0, 1e-3, 60.0, 3.0, 0.2),
        ("cusp-1", CuspApproach, 1.4, 4e-3, -0.11, 20.0, 2e-3, 30.0, 0.0, 1.5),
        ("cusp-2", CuspApproach, 1.5, 2e-3, 0.76, 300.0, 2e-3, 35.0, -2.0, 0.0),
        ("lowq-1", LowMassRatio, 1.2, 1e-4, 0.183, 210.0, 5e-3, 28.0, 0.0, 0.5),
        ("lowq-2", LowMassRatio, 0.9, 1e-4, 0.003, 70.0, 6e-3, 25.0, 1.0, 3.0),
        ("single-1", SingleLens, 8.0, 1e-6, 0.1, 0.0, 1e-3, 30.0, 0.0, 1.0),
        ("single-2", SingleLens, 8.0, 1e-6, 0.4, 90.0, 1e-3, 15.0, -2.0, 0.0),
    ];
    table
        .iter()
        .enumerate()
        .map(|(k, &(name, kind, s, q, u0, alpha, rho, te, dt, blend))| {
            let t0 = 9000.0 + dt;
            Ok(BenchEvent {
                name,
                kind,
                truth: BinaryModel {
                    s,
                    q,
                    rho,
                    trajectory: Trajectory::straight(t0, u0, te, alpha.to_radians())?,
                },
                blend,
                season: (t0 - 50.0, t0 + 50.0),
                seed: 100 + k as u64,
            })
        })
        .collect()
}

/// The outcome of one fit of a benchmark event, judged by the benchmark's rule.
#[derive(Debug, Clone, PartialEq)]
pub struct Verdict {
    /// chi^2 of the best minimum over the data as given.
    pub chi2: f64,
    /// chi^2 of the true model over the same data.
    pub chi2_true: f64,
    /// chi^2 of the best minimum and of the true model over the data the fit last minimised
    /// (outliers clipped, error bars scaled).
    pub chi2_fit: (f64, f64),
    /// Degrees of freedom of a binary model.
    pub dof: usize,
    /// The single lens's chi^2 less the best minimum's.
    pub improvement: f64,
    /// Whether a reported minimum has (s, q) within one grid step of the truth or of its
    /// close/wide partner (s -> 1/s).
    pub near_truth: bool,
    /// Whether the event counts as recovered (see [`BenchEvent::judge`]).
    pub recovered: bool,
}

impl BenchEvent {
    /// Judges a fit of the event's `data`: recovered when a reported minimum has (s, q) within
    /// one grid step (`steps`: natural-log steps of the library's s and q axes) of the truth or
    /// of its close/wide partner, and the best chi^2 is at most the truth's plus
    /// max(25, 0.002 dof), over the data as given or over the data the fit minimised (the two
    /// weight the sets differently when the fit scaled their error bars, and the fit can only
    /// be asked to beat the truth on its own objective); a single lens when the best binary
    /// improves on the
    /// single lens by less than 100.
    pub fn judge(&self, data: &[DataSet], fit: &FitResult, steps: (f64, f64)) -> Result<Verdict> {
        let truth = &self.truth;
        let chi2_true = exact_chi2(data, truth, 1e-4)?.0;
        let n: usize = data.iter().map(DataSet::len).sum();
        let dof = n.saturating_sub(7 + 2 * data.len());
        let chi2 = fit.minima[0].chi2_as_given;
        let chi2_fit = (
            fit.minima[0].refined.chi2,
            exact_chi2(&fit.data, truth, 1e-4)?.0,
        );
        let improvement = fit.single.chi2 - chi2;
        let within = |x: f64, step: f64| x.ln().abs() <= step * 1.01;
        let near_truth = fit.minima.iter().any(|m| {
            let (s, q) = (m.refined.model.s, m.refined.model.q);
            within(q / truth.q, steps.1)
                && (within(s / truth.s, steps.0) || within(s * truth.s, steps.0))
        });
        let recovered = if self.kind == EventKind::SingleLens {
            improvement < 100.0
        } else {
            let slack = (0.002 * dof as f64).max(25.0);
            near_truth && (chi2 <= chi2_true + slack || chi2_fit.0 <= chi2_fit.1 + slack)
        };
        Ok(Verdict {
            chi2,
            chi2_true,
            chi2_fit,
            dof,
            improvement,
            near_truth,
            recovered,
        })
    }

    /// The 3 x 3 part of `library` around the grid point nearest the truth (for quick checks).
    pub fn near_library(&self, library: &LibrarySpec) -> LibrarySpec {
        let around = |axis: &[f64], x: f64| -> Vec<f64> {
            let distance = |k: usize| (axis[k] / x).ln().abs();
            let k = (0..axis.len())
                .min_by(|&a, &b| distance(a).total_cmp(&distance(b)))
                .unwrap_or(0);
            axis[k.saturating_sub(1)..(k + 2).min(axis.len())].to_vec()
        };
        LibrarySpec {
            s: around(&library.s, self.truth.s),
            q: around(&library.q, self.truth.q),
            ..library.clone()
        }
    }
}

/// The natural-log grid steps of a library's s and q axes (log-spaced).
pub fn log_steps(library: &LibrarySpec) -> (f64, f64) {
    let step = |v: &[f64]| (v[v.len() - 1] / v[0]).ln() / (v.len().max(2) - 1) as f64;
    (step(&library.s), step(&library.q))
}
