//! The Galactic model: where the stars are and how they move, along one line of sight.
//!
//! Frames: heliocentric Cartesian `x` towards the Galactic centre, `y` towards `l = 90 deg`
//! (the direction of rotation), `z` towards the north Galactic pole, in kpc; the Sun in the plane
//! at `R0` from the centre. Velocities in km/s in the same axes; proper motions in mas/yr along
//! `l` and `b`.
//!
//! Densities (mass, M_sun kpc^-3):
//!
//! - disk: `rho_0 exp(-(R - R0)/h_R) [(1 - beta) sech^2(z/h_1) + beta exp(-|z|/h_2)]`,
//!   `rho_0 = 0.0493 M_sun pc^-3`, `h_R = 2.75 kpc`, `h_1 = 0.156 kpc`, `h_2 = 0.439 kpc`,
//!   `beta = 0.381` (Han & Gould 2003, ApJ 592, 172, after Zheng et al. 2001; from memory);
//! - bulge: the barred "G2" model of Dwek et al. (1995) as Han & Gould (1995, ApJ 447, 53; 2003)
//!   use it, `rho_0 exp(-r_s^2/2)`, `r_s^4 = [(x'/x_0)^2 + (y'/y_0)^2]^2 + (z/z_0)^4`,
//!   `x_0 = 1.58`, `y_0 = 0.62`, `z_0 = 0.43 kpc`, `rho_0 = 1.23 M_sun pc^-3`, the bar's major
//!   axis `x'` 20 deg from the Sun-centre line with its near end at positive `l` (from memory);
//! - `R0 = 8 kpc` (Han & Gould 1995, 2003).
//!
//! Velocities (Han & Gould 1995, from memory): the disk rotates at 220 km/s (flat curve) with
//! dispersions 30 km/s in the plane and 20 km/s perpendicular to it; the bulge does not rotate
//! and has dispersions `(110, 82.5, 66.3)` km/s along `(x, y, z)`. The Sun moves at the
//! rotation speed plus its peculiar motion `(U, V, W) = (11.1, 12.24, 7.25)` km/s (Schönrich,
//! Binney & Dehnen 2010, MNRAS 403, 1829; from memory).

use crate::error::{Error, Result};

/// km/s per (mas/yr x kpc): 1 au/yr in km/s (IAU au, Julian year).
pub const KMS_PER_MASYR_KPC: f64 = 4.740_470_463_533_348;

/// A stellar population of the model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Population {
    /// The double-exponential disk.
    Disk,
    /// The barred bulge.
    Bulge,
}

impl Population {
    /// Both populations, in the order used for tables.
    pub const ALL: [Population; 2] = [Population::Disk, Population::Bulge];

    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Population::Disk => "disk",
            Population::Bulge => "bulge",
        }
    }
}

/// The parameters of the Galactic model; [`GalacticModel::default`] is the published one
/// (module docs give the sources).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GalacticModel {
    /// Distance of the Sun from the Galactic centre (kpc).
    pub r0: f64,
    /// Local disk density (M_sun kpc^-3).
    pub disk_rho0: f64,
    /// Disk scale length (kpc).
    pub disk_length: f64,
    /// Scale heights of the sech^2 and the exponential components (kpc).
    pub disk_heights: (f64, f64),
    /// Weight of the exponential component.
    pub disk_beta: f64,
    /// Central bulge density (M_sun kpc^-3).
    pub bulge_rho0: f64,
    /// Bar scale lengths `(x0, y0, z0)` (kpc).
    pub bulge_scales: (f64, f64, f64),
    /// Angle of the bar's major axis from the Sun-centre line (degrees; near end at l > 0).
    pub bar_angle_deg: f64,
    /// Disk rotation speed (km/s).
    pub rotation: f64,
    /// Disk dispersions in the plane and perpendicular to it (km/s).
    pub disk_sigma: (f64, f64),
    /// Bulge dispersions along x, y, z (km/s).
    pub bulge_sigma: (f64, f64, f64),
    /// The Sun's peculiar motion (U, V, W) (km/s).
    pub sun_peculiar: (f64, f64, f64),
}

impl Default for GalacticModel {
    fn default() -> Self {
        GalacticModel {
            r0: 8.0,
            disk_rho0: 0.0493e9,
            disk_length: 2.75,
            disk_heights: (0.156, 0.439),
            disk_beta: 0.381,
            bulge_rho0: 1.23e9,
            bulge_scales: (1.58, 0.62, 0.43),
            bar_angle_deg: 20.0,
            rotation: 220.0,
            disk_sigma: (30.0, 20.0),
            bulge_sigma: (110.0, 82.5, 66.3),
            sun_peculiar: (11.1, 12.24, 7.25),
        }
    }
}

/// The north Galactic pole (RA, Dec, J2000) and the Galactic longitude of the north celestial
/// pole, degrees.
const GALACTIC_POLE: (f64, f64, f64) = (192.859_48, 27.128_25, 122.931_92);

/// A line of sight in Galactic coordinates (degrees).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sightline {
    /// Galactic longitude (degrees).
    pub l_deg: f64,
    /// Galactic latitude (degrees).
    pub b_deg: f64,
}

impl Sightline {
    /// A line of sight from Galactic `l`, `b` (degrees); `b` in [-90, 90].
    ///
    /// ```
    /// let s = causeway::galaxy::Sightline::new(1.0, -3.0).unwrap();
    /// assert_eq!(s.b_deg, -3.0);
    /// assert!(causeway::galaxy::Sightline::new(0.0, 91.0).is_err());
    /// ```
    pub fn new(l_deg: f64, b_deg: f64) -> Result<Sightline> {
        if !(l_deg.is_finite() && b_deg.is_finite() && b_deg.abs() <= 90.0) {
            return Err(Error::input(format!(
                "line of sight: need finite l and |b| <= 90 degrees, got l = {l_deg}, b = {b_deg}"
            )));
        }
        Ok(Sightline { l_deg, b_deg })
    }

    /// A line of sight from equatorial J2000 coordinates (degrees), through the IAU Galactic
    /// pole (RA 192.85948, Dec 27.12825) and the longitude of the celestial pole (122.93192)
    /// (ICRS-to-Galactic values as astropy uses them; from memory).
    ///
    /// ```
    /// // Sgr A*: l = 359.9443, b = -0.0462 (astropy).
    /// let s = causeway::galaxy::Sightline::from_equatorial(266.41683, -29.00781).unwrap();
    /// assert!((s.l_deg - 359.9443).abs() < 1e-3 && (s.b_deg + 0.0462).abs() < 1e-3);
    /// ```
    pub fn from_equatorial(ra_deg: f64, dec_deg: f64) -> Result<Sightline> {
        if !(ra_deg.is_finite() && dec_deg.is_finite() && dec_deg.abs() <= 90.0) {
            return Err(Error::input(format!(
                "line of sight: need finite RA and |Dec| <= 90 degrees, got {ra_deg}, {dec_deg}"
            )));
        }
        let (ra_p, dec_p, l_ncp) = GALACTIC_POLE;
        let (ra_p, dec_p) = (ra_p.to_radians(), dec_p.to_radians());
        let (ra, dec) = (ra_deg.to_radians(), dec_deg.to_radians());
        let sb = dec.sin() * dec_p.sin() + dec.cos() * dec_p.cos() * (ra - ra_p).cos();
        let b = sb.clamp(-1.0, 1.0).asin();
        let y = dec.cos() * (ra - ra_p).sin();
        let x = dec.sin() * dec_p.cos() - dec.cos() * dec_p.sin() * (ra - ra_p).cos();
        let l = (l_ncp - y.atan2(x).to_degrees()).rem_euclid(360.0);
        Sightline::new(l, b.to_degrees())
    }

    /// Equatorial J2000 coordinates (degrees) of this line of sight, the inverse of
    /// [`Sightline::from_equatorial`].
    ///
    /// ```
    /// use causeway::galaxy::Sightline;
    /// let s = Sightline::from_equatorial(270.1, -29.5).unwrap();
    /// let (ra, dec) = s.equatorial();
    /// assert!((ra - 270.1).abs() < 1e-9 && (dec + 29.5).abs() < 1e-9);
    /// ```
    pub fn equatorial(&self) -> (f64, f64) {
        let (ra_p, dec_p, l_ncp) = GALACTIC_POLE;
        let (l, b) = (self.l_deg.to_radians(), self.b_deg.to_radians());
        let dl = l_ncp.to_radians() - l;
        let sd = b.sin() * dec_p.to_radians().sin() + b.cos() * dec_p.to_radians().cos() * dl.cos();
        let y = b.cos() * dl.sin();
        let x = b.sin() * dec_p.to_radians().cos() - b.cos() * dec_p.to_radians().sin() * dl.cos();
        let ra = (ra_p + y.atan2(x).to_degrees()).rem_euclid(360.0);
        (ra, sd.clamp(-1.0, 1.0).asin().to_degrees())
    }

    /// Position angle (radians, from equatorial north through east) of the direction of
    /// increasing Galactic latitude at this line of sight: a vector of (north, east) parts
    /// `(n, e)` has the parts `(e cos a - n sin a, n cos a + e sin a)` along `(l, b)`.
    ///
    /// ```
    /// use causeway::galaxy::Sightline;
    /// // Towards the bulge, Galactic north lies about 60 degrees west of equatorial north
    /// // (astropy: 299.6 degrees), and the plane runs north-east.
    /// let a = Sightline::new(1.0, -3.0).unwrap().galactic_north_angle();
    /// assert!((a.rem_euclid(std::f64::consts::TAU).to_degrees() - 299.6).abs() < 0.1, "{a}");
    /// ```
    pub fn galactic_north_angle(&self) -> f64 {
        let (ra, dec) = self.equatorial();
        let h = 1e-5;
        let (lo, hi) = (
            Sightline::from_equatorial(ra, dec - h),
            Sightline::from_equatorial(ra, dec + h),
        );
        let (Ok(lo), Ok(hi)) = (lo, hi) else {
            return 0.0;
        };
        let dl = ((hi.l_deg - lo.l_deg + 180.0).rem_euclid(360.0) - 180.0)
            * self.b_deg.to_radians().cos();
        let db = hi.b_deg - lo.b_deg;
        (-dl).atan2(db)
    }

    /// Unit vectors `(towards the star, along l, along b)` in the heliocentric frame.
    pub fn basis(&self) -> [[f64; 3]; 3] {
        let (l, b) = (self.l_deg.to_radians(), self.b_deg.to_radians());
        [
            [b.cos() * l.cos(), b.cos() * l.sin(), b.sin()],
            [-l.sin(), l.cos(), 0.0],
            [-b.sin() * l.cos(), -b.sin() * l.sin(), b.cos()],
        ]
    }

    /// Heliocentric position (kpc) at distance `d` (kpc).
    pub fn position(&self, d: f64) -> [f64; 3] {
        let [n, _, _] = self.basis();
        [d * n[0], d * n[1], d * n[2]]
    }
}

/// Mean and covariance of the proper motion (mas/yr, along `l` and `b`) of one population's
/// stars at one distance, as seen from the Sun (heliocentric).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MotionMoments {
    /// Mean proper motion `(mu_l, mu_b)` (mas/yr).
    pub mean: [f64; 2],
    /// Covariance `[[ll, lb], [lb, bb]]` ((mas/yr)^2).
    pub cov: [[f64; 2]; 2],
}

impl GalacticModel {
    /// Disk mass density (M_sun kpc^-3) at heliocentric position `p` (kpc).
    pub fn disk_density(&self, p: [f64; 3]) -> f64 {
        let r = ((self.r0 - p[0]).powi(2) + p[1].powi(2)).sqrt();
        let (h1, h2) = self.disk_heights;
        let sech = 1.0 / (p[2] / h1).cosh();
        self.disk_rho0
            * (-(r - self.r0) / self.disk_length).exp()
            * ((1.0 - self.disk_beta) * sech * sech + self.disk_beta * (-p[2].abs() / h2).exp())
    }

    /// Bulge mass density (M_sun kpc^-3) at heliocentric position `p` (kpc).
    pub fn bulge_density(&self, p: [f64; 3]) -> f64 {
        let (dx, dy) = (p[0] - self.r0, p[1]);
        let t = self.bar_angle_deg.to_radians();
        let xb = -dx * t.cos() + dy * t.sin();
        let yb = dx * t.sin() + dy * t.cos();
        let (x0, y0, z0) = self.bulge_scales;
        let rs4 = ((xb / x0).powi(2) + (yb / y0).powi(2)).powi(2) + (p[2] / z0).powi(4);
        self.bulge_rho0 * (-0.5 * rs4.sqrt()).exp()
    }

    /// Mass density of one population at distance `d` (kpc) along `los`.
    ///
    /// ```
    /// use causeway::galaxy::{GalacticModel, Population, Sightline};
    /// let m = GalacticModel::default();
    /// let los = Sightline::new(1.0, -3.0).unwrap();
    /// // Towards the bulge, bulge stars outnumber disk stars near the centre.
    /// assert!(m.density(Population::Bulge, &los, 8.0) > m.density(Population::Disk, &los, 8.0));
    /// ```
    pub fn density(&self, pop: Population, los: &Sightline, d: f64) -> f64 {
        let p = los.position(d);
        match pop {
            Population::Disk => self.disk_density(p),
            Population::Bulge => self.bulge_density(p),
        }
    }

    /// The Sun's velocity (km/s) in the Galactic rest frame.
    pub fn sun_velocity(&self) -> [f64; 3] {
        let (u, v, w) = self.sun_peculiar;
        [u, self.rotation + v, w]
    }

    /// Mean velocity (km/s, Galactic rest frame) and the diagonal dispersions along the
    /// population's own axes, with those axes, at heliocentric position `p`.
    fn velocity_field(&self, pop: Population, p: [f64; 3]) -> ([f64; 3], [[f64; 3]; 3], [f64; 3]) {
        match pop {
            Population::Disk => {
                let (rx, ry) = (p[0] - self.r0, p[1]);
                let r = rx.hypot(ry).max(1e-9);
                let along = [ry / r, -rx / r, 0.0];
                let radial = [rx / r, ry / r, 0.0];
                let mean = [self.rotation * along[0], self.rotation * along[1], 0.0];
                let (sp, sz) = self.disk_sigma;
                (mean, [radial, along, [0.0, 0.0, 1.0]], [sp, sp, sz])
            }
            Population::Bulge => {
                let (sx, sy, sz) = self.bulge_sigma;
                let axes = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];
                ([0.0; 3], axes, [sx, sy, sz])
            }
        }
    }

    /// Heliocentric proper-motion moments of population `pop` at distance `d` along `los`:
    /// the population's mean velocity less the Sun's, and its dispersions, projected on the
    /// sky and divided by the distance.
    ///
    /// ```
    /// use causeway::galaxy::{GalacticModel, Population, Sightline};
    /// let m = GalacticModel::default();
    /// let los = Sightline::new(0.0, 0.0).unwrap();
    /// // Bulge stars at 8 kpc drift against the Sun's rotation: mu_l ~ -(220 + 12) / (4.74 x 8).
    /// let mm = m.motion_moments(Population::Bulge, &los, 8.0);
    /// assert!((mm.mean[0] + 232.24 / (4.74047 * 8.0)).abs() < 1e-3);
    /// ```
    pub fn motion_moments(&self, pop: Population, los: &Sightline, d: f64) -> MotionMoments {
        let (mean, axes, sigma) = self.velocity_field(pop, los.position(d));
        let sun = self.sun_velocity();
        let [_, el, eb] = los.basis();
        let dot = |a: &[f64; 3], b: &[f64; 3]| a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
        let rel = [mean[0] - sun[0], mean[1] - sun[1], mean[2] - sun[2]];
        let scale = 1.0 / (KMS_PER_MASYR_KPC * d);
        let e = [el, eb];
        let mut cov = [[0.0; 2]; 2];
        for i in 0..2 {
            for j in 0..2 {
                cov[i][j] = (0..3)
                    .map(|k| sigma[k] * sigma[k] * dot(&axes[k], &e[i]) * dot(&axes[k], &e[j]))
                    .sum::<f64>()
                    * scale
                    * scale;
            }
        }
        MotionMoments {
            mean: [dot(&rel, &el) * scale, dot(&rel, &eb) * scale],
            cov,
        }
    }
}

impl MotionMoments {
    /// A draw from this Gaussian given two standard normal deviates.
    pub fn draw(&self, z: [f64; 2]) -> [f64; 2] {
        let a = self.cov[0][0].sqrt();
        let c = if a > 0.0 { self.cov[0][1] / a } else { 0.0 };
        let d = (self.cov[1][1] - c * c).max(0.0).sqrt();
        [self.mean[0] + a * z[0], self.mean[1] + c * z[0] + d * z[1]]
    }

    /// The distribution of this motion less an independent `other` (means and covariances
    /// subtract and add).
    pub fn less(&self, other: &MotionMoments) -> MotionMoments {
        let mut cov = self.cov;
        for (i, row) in cov.iter_mut().enumerate() {
            for (j, c) in row.iter_mut().enumerate() {
                *c += other.cov[i][j];
            }
        }
        MotionMoments {
            mean: [self.mean[0] - other.mean[0], self.mean[1] - other.mean[1]],
            cov,
        }
    }

    /// Probability density at `x` ((mas/yr)^-2).
    ///
    /// ```
    /// use causeway::galaxy::MotionMoments;
    /// let m = MotionMoments { mean: [1.0, 0.0], cov: [[4.0, 0.0], [0.0, 1.0]] };
    /// let peak = 1.0 / (2.0 * std::f64::consts::PI * 2.0);
    /// assert!((m.density([1.0, 0.0]) - peak).abs() < 1e-15);
    /// assert!((m.density([3.0, 0.0]) - peak * (-0.5f64).exp()).abs() < 1e-15);
    /// ```
    pub fn density(&self, x: [f64; 2]) -> f64 {
        let [[a, b], [_, d]] = self.cov;
        let det = a * d - b * b;
        let (u, v) = (x[0] - self.mean[0], x[1] - self.mean[1]);
        let q = (d * u * u - 2.0 * b * u * v + a * v * v) / det;
        (-0.5 * q).exp() / (std::f64::consts::TAU * det.sqrt())
    }
}
