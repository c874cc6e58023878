//! When a site observes: its nights within the season, the nights lost to weather, and the
//! exposures of each night at the survey or the follow-up cadence (plan time, before any offset).

use super::plan::Site;
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Minutes per day.
const MINUTES: f64 = 1440.0;

/// The exposures of one site.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Schedule {
    /// Exposure times (plan time), increasing.
    pub times: Vec<f64>,
    /// Whether each exposure is at the follow-up cadence.
    pub followup: Vec<bool>,
    /// Nights whose window meets the season.
    pub nights: usize,
    /// Of those, the nights lost.
    pub lost: usize,
}

/// The site's exposures. Night `k` (an integer) is the window of `night_hours` centred on
/// `k + night_middle`, cut to the season. For every such night, in order, two uniforms are drawn
/// from `rng`: the night is lost when the first is below `lost_nights`; otherwise the first
/// exposure falls that fraction (the second uniform) of one cadence step after the window
/// opens, and the next ones follow at the follow-up cadence inside a follow-up window and at the
/// survey cadence outside (a step that would pass the start of a follow-up window stops at it).
/// A site without a survey cadence observes its follow-up windows only.
pub(super) fn schedule(site: &Site, rng: &mut ChaCha8Rng) -> Schedule {
    let half = site.night_hours / 48.0;
    let (start, end) = site.season;
    let first = (start - site.night_middle - half).floor() as i64;
    let last = (end - site.night_middle + half).ceil() as i64;
    let cadence = Cadence::of(site);
    let mut out = Schedule {
        times: Vec::new(),
        followup: Vec::new(),
        nights: 0,
        lost: 0,
    };
    for k in first..=last {
        let middle = k as f64 + site.night_middle;
        let (lo, hi) = ((middle - half).max(start), (middle + half).min(end));
        if lo >= hi {
            continue;
        }
        let (weather, phase): (f64, f64) = (rng.random(), rng.random());
        out.nights += 1;
        if weather < site.lost_nights {
            out.lost += 1;
            continue;
        }
        let mut t = cadence.first(lo, phase);
        while t < hi {
            let followup = cadence.in_followup(t);
            out.times.push(t);
            out.followup.push(followup);
            t = cadence.next(t);
        }
    }
    out
}

/// The steps between exposures.
struct Cadence<'a> {
    /// Survey step (days), if the site surveys.
    survey: Option<f64>,
    /// Follow-up step (days).
    followup: f64,
    /// Follow-up windows `[start, end)`.
    windows: &'a [(f64, f64)],
}

impl<'a> Cadence<'a> {
    fn of(site: &'a Site) -> Self {
        Cadence {
            survey: site.interval_minutes.map(|m| m / MINUTES),
            followup: site.followup_minutes / MINUTES,
            windows: &site.followup,
        }
    }

    fn in_followup(&self, t: f64) -> bool {
        self.windows.iter().any(|&(a, b)| a <= t && t < b)
    }

    /// The earliest follow-up window start after `t` (infinity when none).
    fn next_window(&self, t: f64) -> f64 {
        self.windows
            .iter()
            .map(|w| w.0)
            .filter(|&a| a > t)
            .fold(f64::INFINITY, f64::min)
    }

    /// The first exposure of a night opening at `lo`, `phase` in [0, 1).
    fn first(&self, lo: f64, phase: f64) -> f64 {
        let step = match self.survey {
            Some(step) if !self.in_followup(lo) => step,
            _ => self.followup,
        };
        self.settle((lo + phase * step).min(self.next_window(lo)))
    }

    /// The exposure after `t`.
    fn next(&self, t: f64) -> f64 {
        let step = match self.survey {
            _ if self.in_followup(t) => self.followup,
            Some(step) => step,
            None => f64::INFINITY,
        };
        self.settle((t + step).min(self.next_window(t)))
    }

    /// `t`, or the next follow-up window's start if the site observes only those and `t` is
    /// outside them.
    fn settle(&self, t: f64) -> f64 {
        if self.survey.is_none() && !self.in_followup(t) {
            self.next_window(t)
        } else {
            t
        }
    }
}
