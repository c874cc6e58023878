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

    /// Builds a complete map with provenance, reporting progress.
    fn build_with_progress(
        &self,
        lens: &LensSystem,
        window: &Window,
        progress: &dyn Progress,
    ) -> Result<MagnificationMap> {
        let build_time = utc_now();
        let started = std::time::Instant::now();
        let traced = self.trace(lens, window, progress)?;
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
                build_seconds: started.elapsed().as_secs_f64(),
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
            "--engine: unknown engine '{other}' (known: {})",
            ENGINE_NAMES.join(", ")
        ))),
    }
}
