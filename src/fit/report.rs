//! The ranked table of minima (CSV) and its one-line-per-minimum summary.
//!
//! Columns: `rank`, each model parameter and its uncertainty (`s,s_err,q,q_err,alpha_deg,
//! alpha_err_deg,u0,u0_err,t0,t0_err,tE,tE_err,rho,rho_err`), `chi2` (over the data as given:
//! every point, errors as in the files), `dof`, `delta_chi2` (the single-lens fit's chi^2 less
//! this model's, both over the data as given: the improvement), `search_chi2` (the map-based
//! value the refinement started from), `close_wide_partner` (rank of the partner, empty if
//! none), `chi2_fit` (what the fit minimised: clipped points out, each set's errors scaled),
//! `model` (the kind of model: `static` for a binary on a straight line), then
//! `fs_K,fb_K,error_scale_K,clipped_K` for each data set K (numbered from 1 in input order; the
//! scale applied in the fit and the points clipped), then the physical scales when any were
//! asked for.
//!
//! With the parallax stage ([`super::motion`]) its models follow the static ones as rows of
//! their own (ranks go on counting; `model` is `parallax` or `parallax+orbit`; `dof` counts
//! their 9 or 11 parameters; `search_chi2` is their static minimum's), and every row gets the
//! columns `static_rank,delta_chi2_static,pi_EN,pi_EN_err,pi_EE,pi_EE_err,t0_par,ds_dt,
//! ds_dt_err,dalpha_dt,dalpha_dt_err,t0_kep` (empty on static rows; `delta_chi2_static` is the
//! static minimum's chi^2 less this one's, on the fitted data; rates per year, dalpha/dt in
//! radians). With `--theta-star` as well, the parallax rows also get what parallax and the
//! source size say of the lens ([`super::scales::ParallaxMeasure`]; `lens_dl_kpc`, the
//! separation and the energy ratio need `--ds`): each of [`LENS_NAMES`] and its `_err`, and
//! `orbit_flag`, `unbound` where the projected kinetic to potential energy ratio is 1 or more.

use super::fluxes::FluxFit;
use super::minima::Minimum;
use super::model::BinaryModel;
use super::motion::MotionMinimum;
use super::photometry::DataSet;
use super::refine::POINT_SOURCE_RHO;
use super::scales::{scales, LensValues, PhysicalInput, Scales, LENS_NAMES};
use super::single::SingleLensFit;
use crate::error::Result;
use crate::table::fmt_f64;
use std::fmt::Write as _;

/// Everything the table reports.
#[derive(Debug, Clone)]
pub struct Report<'a> {
    /// The data sets, in input order.
    pub data: &'a [DataSet],
    /// The single-lens baseline.
    pub single: &'a SingleLensFit,
    /// The ranked minima.
    pub minima: &'a [Minimum],
    /// Error-bar scale of each data set applied in the fit.
    pub error_scales: &'a [f64],
    /// Points clipped from each data set.
    pub clipped: Vec<usize>,
    /// Physical input, if any was given.
    pub physical: Option<PhysicalInput>,
    /// The parallax stage's models (empty without it).
    pub motion: &'a [MotionMinimum],
}

/// The columns of the parallax stage's rows.
const MOTION_COLUMNS: &str = ",static_rank,delta_chi2_static,pi_EN,pi_EN_err,pi_EE,pi_EE_err,\
                              t0_par,ds_dt,ds_dt_err,dalpha_dt,dalpha_dt_err,t0_kep";

impl Report<'_> {
    /// chi^2 of minimum `i` over the data as given.
    pub fn chi2(&self, i: usize) -> f64 {
        self.minima[i].chi2_as_given
    }

    /// chi^2 of the single-lens fit over the data as given.
    pub fn single_chi2(&self) -> f64 {
        self.single.chi2
    }

    /// Degrees of freedom of a binary model: points less 7 parameters and 2 fluxes per set.
    pub fn dof(&self) -> usize {
        self.dof_of(7)
    }

    /// Degrees of freedom of a model of `parameters` parameters and 2 fluxes per set.
    fn dof_of(&self, parameters: usize) -> usize {
        let n: usize = self.data.iter().map(DataSet::len).sum();
        n.saturating_sub(parameters + 2 * self.data.len())
    }

    fn scales_of(&self, model: &BinaryModel) -> Result<Option<Scales>> {
        self.physical
            .as_ref()
            .map(|p| scales(p, model.rho, model.trajectory.line().te, model.s, model.q))
            .transpose()
    }

    /// The CSV table.
    pub fn csv(&self) -> Result<String> {
        let mut out = String::from(
            "rank,s,s_err,q,q_err,alpha_deg,alpha_err_deg,u0,u0_err,t0,t0_err,tE,tE_err,rho,\
             rho_err,chi2,dof,delta_chi2,search_chi2,close_wide_partner,chi2_fit,model",
        );
        for k in 1..=self.data.len() {
            let _ = write!(out, ",fs_{k},fb_{k},error_scale_{k},clipped_{k}");
        }
        if self.physical.is_some() {
            for name in Scales::NAMES {
                let _ = write!(out, ",{name}");
            }
        }
        if !self.motion.is_empty() {
            out.push_str(&MOTION_COLUMNS.replace(' ', ""));
        }
        let theta_star = self
            .physical
            .and_then(|p| p.theta_star_uas)
            .filter(|_| !self.motion.is_empty());
        if theta_star.is_some() {
            for name in LENS_NAMES {
                let _ = write!(out, ",{name},{name}_err");
            }
            out.push_str(",orbit_flag");
        }
        out.push('\n');
        for (i, m) in self.minima.iter().enumerate() {
            let r = &m.refined;
            let row = Row {
                model: &r.model,
                sigma: &r.sigma,
                chi2: self.chi2(i),
                dof: self.dof(),
                search_chi2: m.search_chi2,
                partner: m.partner,
                chi2_fit: r.chi2,
                fluxes: &r.fluxes,
            };
            self.row(&mut out, i + 1, &row)?;
            if !self.motion.is_empty() {
                out.push_str(&",".repeat(MOTION_COLUMNS.matches(',').count()));
            }
            if theta_star.is_some() {
                out.push_str(&",".repeat(2 * LENS_NAMES.len() + 1));
            }
            out.push('\n');
        }
        for (j, m) in self.motion.iter().enumerate() {
            let row = Row {
                model: &m.model,
                sigma: &m.sigma,
                chi2: m.chi2_as_given,
                dof: self.dof_of(m.sigma.len()),
                search_chi2: self.minima[m.from].search_chi2,
                partner: None,
                chi2_fit: m.chi2,
                fluxes: &m.fluxes,
            };
            self.row(&mut out, self.minima.len() + j + 1, &row)?;
            let tr = &m.model.trajectory;
            let opt = |v: Option<f64>| v.map_or(String::new(), fmt_f64);
            let sig = |k: usize| opt(m.sigma.get(k).copied());
            let p = tr.parallax();
            let o = tr.orbit();
            let _ = write!(
                out,
                ",{},{},{},{},{},{},{},{},{},{},{},{}",
                m.from + 1,
                fmt_f64(m.delta_chi2),
                opt(p.map(|p| p.pi_en)),
                sig(7),
                opt(p.map(|p| p.pi_ee)),
                sig(8),
                opt(p.map(|p| p.geometry.t0_par)),
                opt(o.map(|o| o.ds_dt)),
                if o.is_some() { sig(9) } else { String::new() },
                opt(o.map(|o| o.dalpha_dt)),
                if o.is_some() { sig(10) } else { String::new() },
                opt(o.map(|o| o.t0_kep)),
            );
            if let Some(theta_star) = theta_star {
                let (v, e) = self.lens_of(m, theta_star);
                for k in 0..LENS_NAMES.len() {
                    let _ = write!(out, ",{},{}", finite(v[k]), finite(e[k]));
                }
                let _ = write!(out, ",{}", if v[10] >= 1.0 { "unbound" } else { "" });
            }
            out.push('\n');
        }
        Ok(out)
    }

    /// What the parallax row `m` says of the lens, and the uncertainties (NaN where unknown).
    fn lens_of(&self, m: &MotionMinimum, theta_star: f64) -> (LensValues, LensValues) {
        let ds = self.physical.and_then(|p| p.ds_kpc);
        match m.lens_measure(theta_star, ds) {
            Some((measure, Some(cov))) => measure.lens_with_errors(&cov),
            Some((measure, None)) => (measure.lens(), [f64::NAN; 11]),
            None => ([f64::NAN; 11], [f64::NAN; 11]),
        }
    }

    /// The columns every row has, without the line end.
    fn row(&self, out: &mut String, rank: usize, row: &Row) -> Result<()> {
        let l = row.model.trajectory.line();
        let sg = row.sigma;
        let values = [
            row.model.s,
            sg[0],
            row.model.q,
            sg[1],
            l.alpha.to_degrees(),
            sg[2].to_degrees(),
            l.u0,
            sg[3],
            l.t0,
            sg[4],
            l.te,
            sg[5],
            row.model.rho,
            sg[6],
        ];
        let _ = write!(out, "{rank}");
        for v in values {
            let _ = write!(out, ",{}", fmt_f64(v));
        }
        let _ = write!(
            out,
            ",{},{},{},{},{}",
            fmt_f64(row.chi2),
            row.dof,
            fmt_f64(self.single_chi2() - row.chi2),
            fmt_f64(row.search_chi2),
            row.partner.map_or(String::new(), |p| p.to_string())
        );
        let _ = write!(out, ",{},{}", fmt_f64(row.chi2_fit), row.model.kind());
        for ((f, k), c) in row.fluxes.iter().zip(self.error_scales).zip(&self.clipped) {
            let _ = write!(
                out,
                ",{},{},{},{c}",
                fmt_f64(f.fs),
                fmt_f64(f.fb),
                fmt_f64(*k)
            );
        }
        if let Some(sc) = self.scales_of(row.model)? {
            for v in sc.values() {
                let _ = write!(out, ",{}", v.map_or(String::new(), fmt_f64));
            }
        }
        Ok(())
    }

    /// One line per minimum for the terminal.
    pub fn summary(&self) -> String {
        let mut out = String::new();
        let _ = writeln!(
            out,
            "single lens: t0 = {:.4}, u0 = {:.5}, tE = {:.3} d, chi2 = {:.1} for {} points",
            self.single.t0,
            self.single.u0,
            self.single.te,
            self.single_chi2(),
            self.single.points
        );
        for (i, m) in self.minima.iter().enumerate() {
            let r = &m.refined;
            let l = r.model.trajectory.line();
            let chi2 = self.chi2(i);
            let _ = writeln!(
                out,
                "#{}: s = {:.4} +- {:.1e}, q = {:.3e} +- {:.1e}, alpha = {:.2} deg, u0 = {:.5}, \
                 t0 = {:.4}, tE = {:.3} d, {}: chi2 = {:.1} ({:.3} per dof), \
                 delta chi2 = {:.1} (search {:.1}){}",
                i + 1,
                r.model.s,
                r.sigma[0],
                r.model.q,
                r.sigma[1],
                l.alpha.to_degrees(),
                l.u0,
                l.t0,
                l.te,
                rho_text(r.model.rho),
                chi2,
                chi2 / self.dof().max(1) as f64,
                self.single_chi2() - chi2,
                m.search_chi2,
                m.partner
                    .map_or(String::new(), |p| format!(" (close/wide partner of #{p})"))
            );
        }
        for (j, m) in self.motion.iter().enumerate() {
            let l = m.model.trajectory.line();
            let (pn, pe) = m
                .model
                .trajectory
                .parallax()
                .map_or((f64::NAN, f64::NAN), |p| (p.pi_en, p.pi_ee));
            let _ = writeln!(
                out,
                "#{} ({} from #{}): u0 = {:.5}, alpha = {:.2} deg, pi_E = ({:.3} +- {:.3}, \
                 {:.3} +- {:.3}){}: chi2 = {:.1}, {:.1} below the static model",
                self.minima.len() + j + 1,
                m.model.kind(),
                m.from + 1,
                l.u0,
                l.alpha.to_degrees(),
                pn,
                m.sigma[7],
                pe,
                m.sigma[8],
                m.model
                    .trajectory
                    .orbit()
                    .map_or(String::new(), |o| format!(
                        ", ds/dt = {:.3}/yr, dalpha/dt = {:.3} rad/yr",
                        o.ds_dt, o.dalpha_dt
                    )),
                m.chi2_as_given,
                m.delta_chi2
            );
        }
        out
    }
}

/// The summary's source radius: below [`POINT_SOURCE_RHO`] the data did not fix it.
fn rho_text(rho: f64) -> String {
    if rho < POINT_SOURCE_RHO {
        format!("rho < {POINT_SOURCE_RHO:.0e} (a point source: the data do not fix it)")
    } else {
        format!("rho = {rho:.2e}")
    }
}

/// A number, or empty when it is not finite.
fn finite(v: f64) -> String {
    if v.is_finite() {
        fmt_f64(v)
    } else {
        String::new()
    }
}

/// What one row of the table shows.
struct Row<'a> {
    model: &'a BinaryModel,
    sigma: &'a [f64],
    chi2: f64,
    dof: usize,
    search_chi2: f64,
    partner: Option<usize>,
    chi2_fit: f64,
    fluxes: &'a [FluxFit],
}
