//! The physical-scale options (source angular radius, distances or relative parallax), a group
//! that commands reporting fitted models flatten into their own options.

use crate::error::Result;
use crate::fit::scales::PhysicalInput;
use clap::Args;

/// What is known about the source and the distances, for the physical scales of a model.
#[derive(Debug, Clone, Default, Args)]
pub struct PhysicalArgs {
    /// Angular radius of the source (microarcseconds): gives theta_E = theta_* / rho and the
    /// proper motion.
    #[arg(long, value_name = "UAS", allow_hyphen_values = true)]
    pub theta_star: Option<f64>,
    /// Lens distance (kpc), with --ds: gives the masses and the projected separation.
    #[arg(long, value_name = "KPC", allow_hyphen_values = true, requires = "ds")]
    pub dl: Option<f64>,
    /// Source distance (kpc): with --dl; alone, the lens distance of the parallax rows.
    #[arg(long, value_name = "KPC", allow_hyphen_values = true)]
    pub ds: Option<f64>,
    /// Relative parallax 1/D_L - 1/D_S (mas), instead of --dl and --ds: gives the masses.
    #[arg(long, value_name = "MAS", allow_hyphen_values = true, conflicts_with_all = ["dl", "ds"])]
    pub pi_rel: Option<f64>,
}

impl PhysicalArgs {
    /// The checked input; errors name the parameter (shown as its option by `main`).
    ///
    /// ```
    /// use causeway::cli::physical::PhysicalArgs;
    /// let args = PhysicalArgs { theta_star: Some(0.6), pi_rel: Some(0.1), ..Default::default() };
    /// assert_eq!(args.input().unwrap().pi_rel(), Some(0.1));
    /// let bad = PhysicalArgs { dl: Some(-1.0), ds: Some(8.0), ..Default::default() };
    /// assert!(bad.input().unwrap_err().to_string().starts_with("dl"));
    /// ```
    pub fn input(&self) -> Result<PhysicalInput> {
        let input = PhysicalInput {
            theta_star_uas: self.theta_star,
            dl_kpc: self.dl,
            ds_kpc: self.ds,
            pi_rel_mas: self.pi_rel,
        };
        input.check()?;
        Ok(input)
    }

    /// Whether any option was given.
    pub fn any(&self) -> bool {
        self.theta_star.is_some() || self.dl.is_some() || self.ds.is_some() || self.pi_rel.is_some()
    }
}
