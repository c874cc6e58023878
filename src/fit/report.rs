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

use super::minima::Minimum;
use super::photometry::DataSet;
use super::scales::{scales, PhysicalInput, Scales};
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
}

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
        let n: usize = self.data.iter().map(DataSet::len).sum();
        n.saturating_sub(7 + 2 * self.data.len())
    }

    fn scales_of(&self, m: &Minimum) -> Result<Option<Scales>> {
        let model = &m.refined.model;
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
        out.push('\n');
        let single = self.single_chi2();
        for (i, m) in self.minima.iter().enumerate() {
            let r = &m.refined;
            let l = r.model.trajectory.line();
            let sg = r.sigma;
            let values = [
                r.model.s,
                sg[0],
                r.model.q,
                sg[1],
                l.alpha.to_degrees(),
                sg[2].to_degrees(),
                l.u0,
                sg[3],
                l.t0,
                sg[4],
                l.te,
                sg[5],
                r.model.rho,
                sg[6],
            ];
            let _ = write!(out, "{}", i + 1);
            for v in values {
                let _ = write!(out, ",{}", fmt_f64(v));
            }
            let chi2 = self.chi2(i);
            let _ = write!(
                out,
                ",{},{},{},{},{}",
                fmt_f64(chi2),
                self.dof(),
                fmt_f64(single - chi2),
                fmt_f64(m.search_chi2),
                m.partner.map_or(String::new(), |p| p.to_string())
            );
            let _ = write!(out, ",{},{}", fmt_f64(r.chi2), r.model.kind());
            for ((f, k), c) in r.fluxes.iter().zip(self.error_scales).zip(&self.clipped) {
                let _ = write!(
                    out,
                    ",{},{},{},{c}",
                    fmt_f64(f.fs),
                    fmt_f64(f.fb),
                    fmt_f64(*k)
                );
            }
            if let Some(sc) = self.scales_of(m)? {
                for v in sc.values() {
                    let _ = write!(out, ",{}", v.map_or(String::new(), fmt_f64));
                }
            }
            out.push('\n');
        }
        Ok(out)
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
                 t0 = {:.4}, tE = {:.3} d, rho = {:.2e}: chi2 = {:.1} ({:.3} per dof), \
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
                r.model.rho,
                chi2,
                chi2 / self.dof().max(1) as f64,
                self.single_chi2() - chi2,
                m.search_chi2,
                m.partner
                    .map_or(String::new(), |p| format!(" (close/wide partner of #{p})"))
            );
        }
        out
    }
}
