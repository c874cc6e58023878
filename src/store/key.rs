//! Map keys: everything that determines a map's pixels, in a canonical text form and its hash.

use crate::lens::LensSystem;
use crate::map::tiles::{RefinedMap, Refinement};
use crate::map::{MagnificationMap, Window};
use sha2::{Digest, Sha256};

/// Version of the key's canonical form and of the map format it names. Bump it when either
/// changes meaning, so old files are no longer taken for new ones.
pub const KEY_FORMAT: u32 = 1;

/// Version of the canonical form of a refined map's key (a base and its tiles in one file);
/// a key without refinement keeps [`KEY_FORMAT`] and its text, so its hash is unchanged.
pub const REFINED_KEY_FORMAT: u32 = 2;

/// What a map is a map of: lens, window, engine and its settings.
///
/// ```
/// use causeway::{lens::LensSystem, map::Window, store::MapKey};
/// let key = MapKey::new(LensSystem::binary(1.1, 1e-3).unwrap(),
///                       Window::new((0.0, 0.0), 1.0, 100).unwrap(), "rays", 100.0);
/// assert_eq!(key.hash().len(), 32);
/// assert!(key.canonical().contains("binary s=1.1000000000000001e0 q=1.0000000000000000e-3"));
/// // A refined map's key says so, in format version 2; the plain key is untouched.
/// let refined = key.clone().refined(Some(causeway::map::Refinement::new(4).unwrap()));
/// assert!(refined.canonical().starts_with("causeway map key v2\n"));
/// assert!(refined.canonical().ends_with("refine factor=4 block=48 halo=4\n"));
/// assert_ne!(refined.hash(), key.hash());
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct MapKey {
    /// The lens configuration.
    pub lens: LensSystem,
    /// The source-plane window.
    pub window: Window,
    /// Engine name.
    pub engine: String,
    /// Engine density (rays per unlensed pixel area).
    pub density: f64,
    /// Refined tiles near the caustics, if any ([`crate::map::tiles`]).
    pub refine: Option<Refinement>,
}

/// A float in 17 significant digits, the same text on every platform.
fn f17(v: f64) -> String {
    format!("{v:.16e}")
}

impl MapKey {
    /// A key from its parts.
    pub fn new(lens: LensSystem, window: Window, engine: &str, density: f64) -> Self {
        MapKey {
            lens,
            window,
            engine: engine.to_string(),
            density,
            refine: None,
        }
    }

    /// The same key with `refine` as its refinement.
    pub fn refined(mut self, refine: Option<Refinement>) -> Self {
        self.refine = refine;
        self
    }

    /// The key of an existing map with its tiles.
    pub fn of_refined(map: &RefinedMap) -> Self {
        MapKey::of_map(&map.base).refined(map.refinement)
    }

    /// The key of an existing map, from its provenance.
    pub fn of_map(map: &MagnificationMap) -> Self {
        let p = &map.provenance;
        MapKey::new(p.lens.clone(), map.window, &p.engine, p.density)
    }

    /// The canonical text form: one fact per line, floats in 17 significant digits.
    pub fn canonical(&self) -> String {
        let format = match self.refine {
            Some(_) => REFINED_KEY_FORMAT,
            None => KEY_FORMAT,
        };
        let mut text = format!("causeway map key v{format}\n");
        if let Some((s, q)) = self.lens.binary_parameters() {
            text += &format!("binary s={} q={}\n", f17(s), f17(q));
        }
        for (i, l) in self.lens.lenses().iter().enumerate() {
            text += &format!(
                "lens {} x={} y={} m={}\n",
                i + 1,
                f17(l.position.re),
                f17(l.position.im),
                f17(l.mass)
            );
        }
        let w = &self.window;
        text += &format!(
            "window x={} y={} width={} pixels={}\n",
            f17(w.center.0),
            f17(w.center.1),
            f17(w.width),
            w.pixels
        );
        text += &format!("engine {} density={}\n", self.engine, f17(self.density));
        if let Some(r) = self.refine {
            text += &format!(
                "refine factor={} block={} halo={}\n",
                r.factor, r.block, r.halo
            );
        }
        text
    }

    /// SHA-256 of the canonical form, first 128 bits in lower-case hex: the map's file stem.
    pub fn hash(&self) -> String {
        let digest = Sha256::digest(self.canonical().as_bytes());
        digest[..16].iter().map(|b| format!("{b:02x}")).collect()
    }

    /// File name of the map in a store.
    pub fn file_name(&self) -> String {
        format!("{}.fits", self.hash())
    }
}
