//! Map builders behind one trait.
//!
//! An [`Engine`] turns a lens system and a source-plane [`Window`] into pixel data holding the
//! mean magnification over each pixel. [`Engine::build`] wraps that into a
//! [`MagnificationMap`] with its provenance (timing, counts, version). Engines:
//!
//! - [`RayShooting`] (`rays`): inverse ray shooting on a regular image-plane lattice;
//! - [`PolygonMapping`] (`polygon`): inverse polygon mapping of image-plane cells.
//!
//! To add an engine, implement [`Engine::trace`] and [`Engine::memory_bytes`] in a file of its
//! own and register its name in [`by_name`].

use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::certificate::Certificate;
use crate::map::{utc_now, MagnificationMap, Provenance, Window};
use ndarray::Array2;

pub mod accuracy;
mod coverage;
mod lattice;
mod polygon;
mod rays;

pub use lattice::shooting_radius;
pub use polygon::PolygonMapping;
pub use rays::{ray_budget, RayShooting};

/// What an engine produced: pixel data and its cost.
#[derive(Debug, Clone, PartialEq)]
pub struct Traced {
    /// Mean magnification per pixel, `[[iy, ix]]`, lower-left first.
    pub data: Array2<f32>,
    /// Rays traced through the lens equation.
    pub rays_shot: u64,
    /// Ray hits counted in the window.
    pub rays_landed: u64,
}

/// Receives progress reports from long builds; `()` ignores them.
pub trait Progress: Sync {
    /// Announces the total amount of work, in the engine's own units.
    fn start(&self, _total: u64) {}
    /// Reports `done` more units finished.
    fn advance(&self, _done: u64) {}
    /// True when the caller wants the build to stop: the engine then returns
    /// [`Error::Interrupted`](crate::Error::Interrupted) at its next chunk of work.
    fn cancelled(&self) -> bool {
        false
    }
}

impl Progress for () {}

impl Progress for indicatif::ProgressBar {
    fn start(&self, total: u64) {
        self.set_length(total);
    }
    fn advance(&self, done: u64) {
        self.inc(done);
    }
}

/// A map builder.
pub trait Engine: Sync {
    /// Short name, as given to `--engine` and written into map headers.
    fn name(&self) -> &'static str;

    /// The engine's density setting (rays per unlensed pixel area for ray shooting).
    fn density(&self) -> f64;

    /// Peak working memory in bytes for a window, used to refuse builds that would not fit.
    fn memory_bytes(&self, lens: &LensSystem, window: &Window) -> u64;

    /// Computes the pixel data.
    fn trace(&self, lens: &LensSystem, window: &Window, progress: &dyn Progress) -> Result<Traced>;

    /// Builds a complete map with provenance and its accuracy certificate
    /// ([`Certificate::measure`]), reporting progress.
    fn build_with_progress(
        &self,
        lens: &LensSystem,
        window: &Window,
        progress: &dyn Progress,
    ) -> Result<MagnificationMap> {
        self.build_certified(lens, window, progress, true)
    }

    /// Builds a complete map with provenance; with `certify`, its accuracy certificate too (a
    /// map kept in memory for a search only can go without: it is never written or verified).
    fn build_certified(
        &self,
        lens: &LensSystem,
        window: &Window,
        progress: &dyn Progress,
        certify: bool,
    ) -> Result<MagnificationMap> {
        let build_time = utc_now();
        let started = std::time::Instant::now();
        let traced = self.trace(lens, window, progress)?;
        let build_seconds = started.elapsed().as_secs_f64();
        let certificate = if certify {
            Certificate::measure(lens, window, &traced.data)
        } else {
            None
        };
        Ok(MagnificationMap {
            window: *window,
            data: traced.data,
            provenance: Provenance {
                lens: lens.clone(),
                engine: self.name().to_string(),
                density: self.density(),
                rays_shot: traced.rays_shot,
                rays_landed: traced.rays_landed,
                version: env!("CARGO_PKG_VERSION").to_string(),
                build_time,
                build_seconds,
                certificate,
            },
        })
    }

    /// Builds a complete map with provenance.
    fn build(&self, lens: &LensSystem, window: &Window) -> Result<MagnificationMap> {
        self.build_with_progress(lens, window, &())
    }
}

/// Names accepted by `--engine`.
pub const ENGINE_NAMES: &[&str] = &["rays", "polygon"];

/// The engine called `name` at the given density.
///
/// ```
/// let engine = causeway::engine::by_name("rays", 400.0).unwrap();
/// assert_eq!(engine.name(), "rays");
/// assert!(causeway::engine::by_name("magic", 1.0).is_err());
/// ```
pub fn by_name(name: &str, density: f64) -> Result<Box<dyn Engine>> {
    match name {
        "rays" => Ok(Box::new(RayShooting::try_new(density)?)),
        "polygon" => Ok(Box::new(PolygonMapping::try_new(density)?)),
        other => Err(Error::input(format!(
            "--engine: unknown engine '{}' (known: {})",
            crate::error::shown(other),
            ENGINE_NAMES.join(", ")
        ))),
    }
}

/// Whether `engine` may build `window` within `limit` bytes of working memory: `Err` holds
/// the bytes it would need. A window too large for the engine's own estimate (pixel counts
/// past the address space) is refused on a lower bound of 12 bytes a pixel, before any
/// estimate that could overflow.
///
/// ```
/// use causeway::{engine, lens::LensSystem, map::Window};
/// let rays = engine::by_name("rays", 100.0).unwrap();
/// let lens = LensSystem::binary(1.0, 1e-3).unwrap();
/// let small = Window::new((0.0, 0.0), 2.0, 100).unwrap();
/// assert!(engine::check_memory(rays.as_ref(), &lens, &small, 1 << 30).is_ok());
/// let huge = Window::new((0.0, 0.0), 2.0, 100_000_000).unwrap();
/// assert!(engine::check_memory(rays.as_ref(), &lens, &huge, 1 << 30).unwrap_err() > 1 << 50);
/// ```
pub fn check_memory(
    engine: &dyn Engine,
    lens: &LensSystem,
    window: &Window,
    limit: u64,
) -> std::result::Result<(), u64> {
    let floor = 12.0 * (window.pixels as f64).powi(2);
    if floor > limit as f64 {
        return Err(floor.min(u64::MAX as f64) as u64);
    }
    match engine.memory_bytes(lens, window) {
        need if need > limit => Err(need),
        _ => Ok(()),
    }
}

/// A byte count for messages: `74.5 GiB`, or `210 MiB` below one GiB.
///
/// ```
/// assert_eq!(causeway::engine::gib(3 << 29), "1.5 GiB");
/// assert_eq!(causeway::engine::gib(30 << 20), "30 MiB");
/// ```
pub fn gib(bytes: u64) -> String {
    if bytes < 1 << 30 {
        return format!("{:.0} MiB", bytes as f64 / (1u64 << 20) as f64);
    }
    format!("{:.1} GiB", bytes as f64 / (1u64 << 30) as f64)
}

/// The most pixels per side (same centre and width) that `engine` can build within `limit`
/// bytes, if any: what a refused build can suggest instead.
///
/// ```
/// use causeway::{engine, lens::LensSystem, map::Window};
/// let rays = engine::by_name("rays", 100.0).unwrap();
/// let lens = LensSystem::binary(1.0, 1e-3).unwrap();
/// let window = Window::new((0.0, 0.0), 2.0, 4000).unwrap();
/// let fits = engine::fitting_pixels(rays.as_ref(), &lens, &window, 64 << 20).unwrap();
/// assert!(fits < 4000);
/// let smaller = Window::new((0.0, 0.0), 2.0, fits).unwrap();
/// assert!(engine::check_memory(rays.as_ref(), &lens, &smaller, 64 << 20).is_ok());
/// ```
pub fn fitting_pixels(
    engine: &dyn Engine,
    lens: &LensSystem,
    window: &Window,
    limit: u64,
) -> Option<usize> {
    let fits = |pixels: usize| {
        Window::new(window.center, window.width, pixels)
            .is_ok_and(|w| check_memory(engine, lens, &w, limit).is_ok())
    };
    if !fits(1) {
        return None;
    }
    let (mut lo, mut hi) = (1, window.pixels);
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if fits(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(lo)
}

/// The default working-memory limit of a build: half the machine's memory (from
/// /proc/meminfo), or 4 GiB where that is unknown.
pub fn default_memory_limit() -> u64 {
    std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| {
            let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
            let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
            Some(kib * 1024 / 2)
        })
        .unwrap_or(4 << 30)
}
