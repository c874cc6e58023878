//! The image solver: polynomial roots, polished and checked on the lens equation.

use super::polynomial::{LensPolynomials, Poly, MAX_DEGREE};
use super::roots::{aberth_to, circle_guesses};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use num_complex::Complex64;

/// Most point lenses the exact solver takes (the polynomial has degree N^2 + 1).
pub const MAX_LENSES: usize = 4;

/// An image is accepted when the lens equation holds to
/// |zeta(z) - zeta| <= RESIDUAL_TOLERANCE * (1 + |zeta|) after polishing. Properly polished
/// images reach about 1e-16 of that scale; the roots that are not images (false roots) stay far
/// above it except for sources within about this distance of a caustic, where a pair of images
/// is appearing or vanishing and the two cases cannot be told apart in double precision anyway.
pub const RESIDUAL_TOLERANCE: f64 = 1e-10;

/// Looser bound used only when the strict one gives an image set that breaks the counting or
/// parity rules: the set is then chosen among the roots below this bound (see [`ImageSolver`]).
pub const LOOSE_TOLERANCE: f64 = 1e-6;

/// Aberth-Ehrlich stops a root once its correction is below this, relative; Newton on the
/// lens equation finishes the job.
const ABERTH_STOP: f64 = 1e-9;

/// The previous call's roots seed the next when the sources are closer than this (Einstein
/// radii); farther, the fresh guesses of [`ImageSolver`] converge faster.
const WARM_RADIUS: f64 = 0.05;

/// Newton steps on the lens equation per root, at most.
const MAX_POLISH: usize = 12;

/// Roots that polishing left with a residual below this (times 1 + |zeta|) but above the
/// acceptance tolerance get a second, unbounded Newton run when the image set is incomplete.
const SECOND_CHANCE: f64 = 1e-3;

/// Two polished roots closer than this (relative to 1 + |z|) are one image.
const DUPLICATE: f64 = 1e-12;

/// |z| by a square root (faster than the overflow-safe `hypot` of `Complex::norm`; the values
/// met here are far from overflow).
trait FastNorm {
    fn fnorm(self) -> f64;
}

impl FastNorm for Complex64 {
    #[inline]
    fn fnorm(self) -> f64 {
        self.norm_sqr().sqrt()
    }
}

/// a < b, false when either is NaN (a NaN residual never counts as progress).
#[inline]
fn lower(a: f64, b: f64) -> bool {
    a.partial_cmp(&b) == Some(std::cmp::Ordering::Less)
}

/// a - b as an unevaluated sum of two doubles per component (Knuth's TwoSum), so that shifting
/// the source into a frame loses nothing.
fn two_diff(a: Complex64, b: Complex64) -> (Complex64, Complex64) {
    fn two_sum(x: f64, y: f64) -> (f64, f64) {
        let s = x + y;
        let bb = s - x;
        (s, (x - (s - bb)) + (y - bb))
    }
    let (re, re_lo) = two_sum(a.re, -b.re);
    let (im, im_lo) = two_sum(a.im, -b.im);
    (Complex64::new(re, im), Complex64::new(re_lo, im_lo))
}

/// One image of a point source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Image {
    /// Position z in the lens plane (Einstein radii).
    pub position: Complex64,
    /// Signed determinant of the Jacobian of the lens map at the image, det J = 1 - |kappa|^2.
    pub jacobian: f64,
    /// Point-source magnification of this image, 1/|det J|.
    pub magnification: f64,
    /// +1 where det J > 0 (minimum or maximum of the time delay), -1 where det J < 0 (saddle).
    pub parity: i8,
    /// Lens-equation residual |zeta(z) - zeta| left after polishing.
    pub residual: f64,
}

impl Image {
    fn new(position: Complex64, jacobian: f64, residual: f64) -> Self {
        Image {
            position,
            jacobian,
            magnification: 1.0 / jacobian.abs(),
            parity: if jacobian >= 0.0 { 1 } else { -1 },
            residual,
        }
    }
}

/// A reusable point-source image solver for one lens system: holds the lens polynomials, a
/// workspace and the roots of the previous call, which seed the next call (a warm start: cheap
/// for sources that move a little between calls, as along a trajectory or a contour). No
/// allocation per call.
///
/// Method: the polynomial of degree N^2 + 1 (Witt 1990; the binary one written out term by term)
/// in the centre-of-mass frame, all roots at once by Aberth-Ehrlich, each root polished by
/// Newton's method on the lens equation itself (never moving more than a third of the distance to
/// the nearest other root, so that a false root cannot slide onto an image already found), and
/// kept when its residual is below [`RESIDUAL_TOLERANCE`]. The set found must obey the counting
/// rule (N + 1, N + 3, ... up to 5(N - 1) images for N >= 2; 2 for N = 1) and the parity rule
/// (positive minus negative parity = 1 - N; Rhie 1997, Petters et al. 2001); if it does not, the
/// call is repeated from fresh initial guesses, and failing that the roots below
/// [`LOOSE_TOLERANCE`] are split at the widest gap in residual that gives a valid set. A source
/// for which no valid set exists is an [`Error::Numerical`].
///
/// ```
/// use causeway::lens::LensSystem;
/// use causeway::solve::ImageSolver;
/// use num_complex::Complex64;
/// let lens = LensSystem::binary(1.0, 1.0).unwrap();
/// let mut solver = ImageSolver::new(&lens).unwrap();
/// // A source at the centre of a resonant equal-mass binary: inside the caustic, 5 images.
/// let images = solver.images(Complex64::new(0.0, 0.01)).unwrap();
/// assert_eq!(images.len(), 5);
/// let parity: i32 = images.iter().map(|i| i.parity as i32).sum();
/// assert_eq!(parity, -1);
/// // Far away: 3 images and almost no magnification.
/// assert_eq!(solver.images(Complex64::new(30.0, 0.0)).unwrap().len(), 3);
/// assert!((solver.magnification(Complex64::new(30.0, 0.0)).unwrap() - 1.0).abs() < 1e-4);
/// ```
#[derive(Debug, Clone)]
pub struct ImageSolver {
    n: usize,
    /// Lens positions and masses in the original frame (for the lens equation).
    pos: [Complex64; 4],
    mass: [f64; 4],
    /// Origins of the polynomial frames: the centre of mass first, then each lens.
    origins: [Complex64; MAX_LENSES + 1],
    /// The lens polynomials in each frame.
    frames: [LensPolynomials; MAX_LENSES + 1],
    /// The order in which frames are tried: the lightest lens first, then the centre of mass,
    /// then the other lenses.
    order: [usize; MAX_LENSES + 1],
    roots: [Complex64; MAX_DEGREE],
    warm_degree: usize,
    /// The source of the previous call: its roots seed this call when it is near.
    last_source: Complex64,
    images: [Image; MAX_DEGREE],
    count: usize,
}

const ZERO: Complex64 = Complex64::new(0.0, 0.0);

/// The warm-start state of an [`ImageSolver`]: the roots of one call and its source (the
/// default seeds nothing).
#[derive(Debug, Clone, Copy, Default)]
pub struct WarmStart {
    roots: [Complex64; MAX_DEGREE],
    degree: usize,
    source: Complex64,
}

/// A polished root: lens-plane position, Jacobian determinant, residual.
#[derive(Debug, Clone, Copy)]
struct Candidate {
    /// Position in the coordinates of `frame`.
    w: Complex64,
    frame: usize,
    /// Position in the lens frame.
    z: Complex64,
    det: f64,
    residual: f64,
}

impl ImageSolver {
    /// A solver for `lens`; more than [`MAX_LENSES`] lenses is an input error.
    pub fn new(lens: &LensSystem) -> Result<Self> {
        let n = lens.len();
        if n > MAX_LENSES {
            return Err(Error::input(format!(
                "the exact point-source solver takes at most {MAX_LENSES} point lenses \
                 (its polynomial has degree N^2+1); this lens has {n}"
            )));
        }
        let mut pos = [ZERO; 4];
        let mut mass = [0.0; 4];
        for (i, l) in lens.lenses().iter().enumerate() {
            pos[i] = l.position;
            mass[i] = l.mass;
        }
        let com: Complex64 = (0..n).map(|i| pos[i] * mass[i]).sum();
        let mut origins = [com; MAX_LENSES + 1];
        origins[1..=n].copy_from_slice(&pos[..n]);
        let frames = origins.map(|o| {
            let shifted: Vec<Complex64> = (0..n).map(|i| pos[i] - o).collect();
            LensPolynomials::new(&shifted, &mass[..n])
        });
        let lightest = (0..n)
            .min_by(|&a, &b| mass[a].total_cmp(&mass[b]))
            .unwrap_or(0);
        let mut order = [0; MAX_LENSES + 1];
        order[0] = 1 + lightest;
        let mut k = 1;
        for f in 0..=n {
            if f != 1 + lightest {
                order[k] = f;
                k += 1;
            }
        }
        let blank = Image::new(ZERO, 1.0, 0.0);
        Ok(ImageSolver {
            n,
            pos,
            mass,
            origins,
            frames,
            order,
            roots: [ZERO; MAX_DEGREE],
            warm_degree: 0,
            last_source: ZERO,
            images: [blank; MAX_DEGREE],
            count: 0,
        })
    }

    /// Number of point lenses.
    pub fn lens_count(&self) -> usize {
        self.n
    }

    /// Forgets the previous roots: the next call starts from fresh initial guesses.
    pub fn reset(&mut self) {
        self.warm_degree = 0;
    }

    /// The roots of the last call and its source: restored by [`ImageSolver::resume`], they
    /// seed a later call for a nearby source whatever was solved in between (as when a contour
    /// is bisected, and the best seed of a new sample is its neighbour's).
    pub fn warm_start(&self) -> WarmStart {
        WarmStart {
            roots: self.roots,
            degree: self.warm_degree,
            source: self.last_source,
        }
    }

    /// Seeds the next call with a state taken by [`ImageSolver::warm_start`] (of this solver).
    pub fn resume(&mut self, state: &WarmStart) {
        self.roots = state.roots;
        self.warm_degree = state.degree;
        self.last_source = state.source;
    }

    /// The images of a point source at `zeta`, sorted by x then y. The slice lives in the
    /// solver's workspace until the next call.
    pub fn images(&mut self, zeta: Complex64) -> Result<&[Image]> {
        self.solve_or_nudge(zeta)?;
        Ok(&self.images[..self.count])
    }

    /// Solves for `zeta`; where no consistent image set exists because the source sits exactly
    /// on a caustic (at a cusp, images merge and the count is undefined), solves for the nearest
    /// of four sources moved by 1e-10 (1 + |zeta|), the one-sided limits of the image set.
    fn solve_or_nudge(&mut self, zeta: Complex64) -> Result<()> {
        let first = match self.solve(zeta) {
            Ok(()) => return Ok(()),
            Err(e) => e,
        };
        let step = 1e-10 * (1.0 + zeta.norm());
        for dir in [
            Complex64::new(1.0, 0.0),
            Complex64::new(0.0, 1.0),
            Complex64::new(-1.0, 0.0),
            Complex64::new(0.0, -1.0),
        ] {
            self.reset();
            if self.solve(zeta + dir * step).is_ok() {
                return Ok(());
            }
        }
        Err(first)
    }

    /// Point-source magnification at `zeta`: sum over images of 1/|det J|. A source exactly
    /// behind a single lens gives +infinity (the Einstein ring).
    pub fn magnification(&mut self, zeta: Complex64) -> Result<f64> {
        if self.n == 1 && zeta == self.pos[0] {
            return Ok(f64::INFINITY);
        }
        self.solve_or_nudge(zeta)?;
        Ok(self.images[..self.count]
            .iter()
            .map(|i| i.magnification)
            .sum())
    }

    /// Source position of z and the shear kappa(z) = sum m_i / conj(z - z_i)^2, with the lens
    /// positions `pos` of one frame (z and the result in that frame).
    #[inline]
    fn lens_map(&self, pos: &[Complex64; 4], z: Complex64) -> (Complex64, Complex64) {
        let mut defl = ZERO;
        let mut shear = ZERO;
        for (p, &m) in pos[..self.n].iter().zip(&self.mass) {
            let t = z - p;
            let f = 1.0 / t.norm_sqr();
            // 1/conj(t) = t/|t|^2
            let d = Complex64::new(t.re * f, t.im * f);
            let md = d * m;
            defl += md;
            shear += md * d;
        }
        (z - defl, shear)
    }

    /// Newton's method on the lens equation from w0, never moving further than `cap` from w0,
    /// and taking only steps that lower the residual; in the coordinates of `frame`, where an
    /// image next to the lens at the origin keeps its full relative precision. A `damped` run
    /// halves a step that does not lower the residual instead of stopping. The source is
    /// `src.0 + src.1` (its shift into the frame, kept exactly as a sum of two doubles).
    fn polish(
        &self,
        frame: usize,
        w0: Complex64,
        src: (Complex64, Complex64),
        cap: f64,
        max_iter: usize,
        damped: bool,
    ) -> Candidate {
        let pos = &self.frames[frame].positions;
        let residual = |w: Complex64| {
            let (s, k) = self.lens_map(pos, w);
            ((src.0 - s) + src.1, k)
        };
        let mut w = w0;
        let (mut r, mut k) = residual(w);
        let mut res = r.fnorm();
        for _ in 0..max_iter {
            let det = 1.0 - k.norm_sqr();
            if det == 0.0 || res == 0.0 {
                break;
            }
            // Solve dw + k conj(dw) = r for dw.
            let dw = (r - k * r.conj()) / det;
            let wn = w + dw;
            if !wn.is_finite() || (wn - w0).fnorm() > cap {
                break;
            }
            let (mut r_n, mut k_n) = residual(wn);
            let mut res_n = r_n.fnorm();
            let mut wn = wn;
            // Damped runs halve a step that does not lower the residual (a few times).
            let mut halvings = 0;
            while damped && !lower(res_n, res) && halvings < 20 {
                halvings += 1;
                wn = w + dw.unscale((1u64 << halvings) as f64);
                (r_n, k_n) = residual(wn);
                res_n = r_n.fnorm();
            }
            if !lower(res_n, res) {
                break;
            }
            let step = (wn - w).fnorm();
            w = wn;
            k = k_n;
            r = r_n;
            res = res_n;
            if step <= 4.0 * f64::EPSILON * w.fnorm() {
                break;
            }
        }
        let det = 1.0 - k.norm_sqr();
        Candidate {
            w,
            frame,
            z: w + self.origins[frame],
            det,
            residual: if res.is_finite() && det.is_finite() {
                res
            } else {
                f64::INFINITY
            },
        }
    }

    /// Fresh initial guesses for the roots (in the polynomial frame), one per root, from the
    /// limit of well-separated lenses: the major image of a point lens of the total mass at the
    /// centre of mass; beside each lens i its minor image z_i + m_i / conj(zeta - z_i); and for
    /// each ordered pair i != j the false root z_i - m_i / conj(zeta - z_j). That is
    /// 1 + N + N(N - 1) = N^2 + 1 guesses, and each lies near the root it stands for unless
    /// the source is near a caustic.
    fn cold_guesses(&mut self, frame: usize, w: Complex64, poly: &Poly) {
        let deg = poly.degree();
        if deg != self.n * self.n + 1 {
            circle_guesses(poly.coeffs(), &mut self.roots[..deg]);
            return;
        }
        let pos = self.frames[frame].positions;
        // m / conj(d), bounded to 0.5 in modulus (a source next to a lens).
        let pull = |m: f64, d: Complex64| {
            let a = d.fnorm();
            if a < 2.0 * m {
                d.unscale(a.max(1e-300)) * 0.5
            } else {
                d.unscale(a * a) * m
            }
        };
        let com = self.origins[0] - self.origins[frame];
        let wc = w - com;
        let u = wc.fnorm();
        self.roots[0] = if u > 1e-3 {
            com + wc * (0.5 + 0.5 * (1.0 + 4.0 / (u * u)).sqrt())
        } else {
            com + Complex64::new(0.9, 0.7)
        };
        let mut k = 1;
        for i in 0..self.n {
            for j in 0..self.n {
                let sign = if i == j { 1.0 } else { -1.0 };
                let tiny = Complex64::new(1e-9 * (k as f64), 1e-9 * (i as f64 + 1.0));
                self.roots[k] = pos[i] + pull(self.mass[i], w - pos[j]) * sign + tiny;
                k += 1;
            }
        }
    }

    fn solve(&mut self, zeta: Complex64) -> Result<()> {
        if !zeta.is_finite() {
            return Err(Error::input(format!(
                "source position ({}, {}) is not finite",
                zeta.re, zeta.im
            )));
        }
        if self.n == 1 {
            return self.solve_single(zeta);
        }
        let previous = std::mem::replace(&mut self.last_source, zeta);
        let blank = Candidate {
            w: ZERO,
            frame: 0,
            z: ZERO,
            det: 0.0,
            residual: f64::INFINITY,
        };
        let mut cands = [blank; MAX_DEGREE];
        // Everything polished so far, over all frames, for the last-resort selection.
        // (A Vec: it allocates only when the first frame fails, which is rare.)
        let mut pool: Vec<Candidate> = Vec::new();
        let order = self.order;
        for (try_no, &frame) in order[..=self.n].iter().enumerate() {
            let src = two_diff(zeta, self.origins[frame]);
            let w = src.0;
            let lp = &self.frames[frame];
            let mut poly = if self.n == 2 {
                lp.binary_polynomial(w)
            } else {
                lp.image_polynomial(w)
            };
            // A source exactly behind a lens cancels the leading coefficient: one (false) root
            // has gone to infinity, and the degree drops.
            poly.trim();
            let deg = poly.degree();
            // The primary frame tries a warm start first, when there is one; every frame then
            // tries fresh initial guesses.
            let warm = try_no == 0
                && self.warm_degree == deg
                && (zeta - previous).norm_sqr() <= WARM_RADIUS * WARM_RADIUS;
            for attempt in 0..(1 + warm as usize) {
                if attempt > 0 || !warm {
                    self.cold_guesses(frame, w, &poly);
                }
                let it = aberth_to(poly.coeffs(), &mut self.roots[..deg], ABERTH_STOP);
                if it.is_none() {
                    continue;
                }
                self.polish_all(frame, src, deg, &mut cands);
                let mut found = self.select(zeta, &mut cands[..deg], RESIDUAL_TOLERANCE);
                // Roots that came close to the lens equation without reaching it may be a
                // pair of images the capped polish could not finish: look again.
                let near = SECOND_CHANCE * (1.0 + zeta.fnorm());
                let from = found.unwrap_or(0);
                if cands[from..deg].iter().any(|c| c.residual <= near) {
                    let saved = cands;
                    match self.second_chance(zeta, src, &mut cands[..deg]) {
                        Some(k) if k >= from => found = Some(k),
                        _ => cands = saved,
                    }
                }
                if let Some(count) = found {
                    self.store(&cands[..count]);
                    self.warm_degree = if try_no == 0 { deg } else { 0 };
                    return Ok(());
                }
                for c in &cands[..deg] {
                    let dup = pool
                        .iter()
                        .any(|o| (o.z - c.z).fnorm() <= DUPLICATE * (1.0 + c.z.fnorm()));
                    if !dup && c.residual.is_finite() {
                        pool.push(*c);
                    }
                }
            }
        }
        self.warm_degree = 0;
        let pool = &mut pool[..];
        let count = self
            .select(zeta, pool, RESIDUAL_TOLERANCE)
            .or_else(|| self.select_loose(zeta, pool));
        if let Some(count) = count {
            self.store(&pool[..count]);
            return Ok(());
        }
        Err(Error::Numerical(format!(
            "no consistent image set for the source at ({}, {}): the roots found break the \
             image-count or parity rule",
            zeta.re, zeta.im
        )))
    }

    /// Polishes every root, each within a third of its distance to the nearest other root.
    #[allow(clippy::needless_range_loop)]
    fn polish_all(
        &self,
        frame: usize,
        src: (Complex64, Complex64),
        deg: usize,
        cands: &mut [Candidate; MAX_DEGREE],
    ) {
        for i in 0..deg {
            let r = self.roots[i];
            let mut nearest = f64::INFINITY;
            for (j, &o) in self.roots[..deg].iter().enumerate() {
                if j != i {
                    nearest = nearest.min((r - o).fnorm());
                }
            }
            let cap = if nearest.is_finite() {
                nearest / 3.0
            } else {
                1.0
            };
            cands[i] = self.polish(frame, r, src, cap, MAX_POLISH, false);
        }
    }

    /// When the capped polish may have left out images (the roots of a close pair of images are
    /// only accurate to about the square root of the precision), the roots that came near the
    /// lens equation get an unbounded Newton run; two runs that end on the same point count
    /// once (the better one is kept). Then the selection again.
    fn second_chance(
        &self,
        zeta: Complex64,
        src: (Complex64, Complex64),
        cands: &mut [Candidate],
    ) -> Option<usize> {
        let tol = RESIDUAL_TOLERANCE * (1.0 + zeta.fnorm());
        let near = SECOND_CHANCE * (1.0 + zeta.fnorm());
        let mut changed = false;
        for c in cands.iter_mut() {
            if c.residual > tol && c.residual <= near {
                *c = self.polish(c.frame, c.w, src, f64::INFINITY, 4 * MAX_POLISH, true);
                changed = true;
            }
        }
        if !changed {
            return None;
        }
        cands.sort_unstable_by(|a, b| a.residual.total_cmp(&b.residual));
        for i in 0..cands.len() {
            for j in 0..i {
                if cands[j].residual.is_finite()
                    && (cands[i].w - cands[j].w).fnorm() <= DUPLICATE * (1.0 + cands[i].w.fnorm())
                {
                    cands[i].residual = f64::INFINITY;
                }
            }
        }
        self.select(zeta, cands, RESIDUAL_TOLERANCE)
    }

    fn valid_set(&self, cands: &[Candidate]) -> bool {
        let k = cands.len();
        let n = self.n;
        if k < n + 1 || k > 5 * (n - 1) || !(k - (n + 1)).is_multiple_of(2) {
            return false;
        }
        let parity: i64 = cands
            .iter()
            .map(|c| if c.det >= 0.0 { 1 } else { -1 })
            .sum();
        parity == 1 - n as i64
    }

    /// Sorts by residual; the roots below the tolerance, if they form a valid set.
    fn select(&self, zeta: Complex64, cands: &mut [Candidate], tol: f64) -> Option<usize> {
        cands.sort_unstable_by(|a, b| a.residual.total_cmp(&b.residual));
        let tol = tol * (1.0 + zeta.fnorm());
        let k = cands.iter().take_while(|c| c.residual <= tol).count();
        self.valid_set(&cands[..k]).then_some(k)
    }

    /// Among the valid sets made of the best-k roots with residuals below the loose tolerance,
    /// the one followed by the widest gap in log residual.
    fn select_loose(&self, zeta: Complex64, cands: &mut [Candidate]) -> Option<usize> {
        cands.sort_unstable_by(|a, b| a.residual.total_cmp(&b.residual));
        let tol = LOOSE_TOLERANCE * (1.0 + zeta.fnorm());
        let floor = 1e-300;
        let mut best: Option<(f64, usize)> = None;
        for k in 1..=cands.len() {
            if cands[k - 1].residual > tol || !self.valid_set(&cands[..k]) {
                continue;
            }
            let next = cands.get(k).map_or(f64::INFINITY, |c| c.residual);
            let gap = (next.max(floor) / cands[k - 1].residual.max(floor)).ln();
            if best.is_none_or(|(g, _)| gap > g) {
                best = Some((gap, k));
            }
        }
        best.map(|(_, k)| k)
    }

    fn store(&mut self, cands: &[Candidate]) {
        for (slot, c) in self.images.iter_mut().zip(cands) {
            *slot = Image::new(c.z, c.det, c.residual);
        }
        self.count = cands.len();
        self.images[..self.count].sort_unstable_by(|a, b| {
            a.position
                .re
                .total_cmp(&b.position.re)
                .then(a.position.im.total_cmp(&b.position.im))
        });
    }

    /// N = 1: the two images on the line through lens and source (Paczynski 1986).
    fn solve_single(&mut self, zeta: Complex64) -> Result<()> {
        let d = zeta - self.pos[0];
        let u = d.fnorm();
        if u == 0.0 {
            return Err(Error::Numerical(
                "the source is exactly behind the lens: its image is the Einstein ring and the \
                 magnification is infinite"
                    .into(),
            ));
        }
        let root = (1.0 + 4.0 / (u * u)).sqrt();
        // Paczynski 1986: A = (u^2 + 2)/(u sqrt(u^2 + 4)); the images carry (A + 1)/2 and
        // (A - 1)/2, the outer one with positive parity. Written so that nothing cancels.
        let r4 = (u * u + 4.0).sqrt();
        let excess = 4.0 / ((u * u + 2.0 + u * r4) * u * r4); // A - 1
        for (k, sign) in [1.0, -1.0].into_iter().enumerate() {
            // (1 - root)/2 = -2/(u^2 (1 + root)), without cancellation.
            let factor = if sign > 0.0 {
                0.5 * (1.0 + root)
            } else {
                -2.0 / (u * u * (1.0 + root))
            };
            let z = self.pos[0] + d * factor;
            let (src, _) = self.lens_map(&self.pos, z);
            let a = if sign > 0.0 {
                1.0 + 0.5 * excess
            } else {
                0.5 * excess
            };
            self.images[k] = Image {
                position: z,
                jacobian: sign / a,
                magnification: a,
                parity: sign as i8,
                residual: (src - zeta).fnorm(),
            };
        }
        self.count = 2;
        self.images[..2].sort_unstable_by(|a, b| {
            a.position
                .re
                .total_cmp(&b.position.re)
                .then(a.position.im.total_cmp(&b.position.im))
        });
        Ok(())
    }
}
