//! Map keys: everything that determines a map's pixels, in a canonical text form and its hash.

use crate::lens::LensSystem;
use crate::map::{MagnificationMap, Window};
use sha2::{Digest, Sha256};

/// Version of the key's canonical form and of the map format it names. Bump it when either
/// changes meaning, so old files are no longer taken for new ones.
pub const KEY_FORMAT: u32 = 1;

/// What a map is a map of: lens, window, engine and its settings.
///
/// ```
/// use causeway::{lens::LensSystem, map::Window, store::MapKey};
/// let key = MapKey::new(LensSystem::binary(1.1, 1e-3).unwrap(),
///                       Window::new((0.0, 0.0), 1.0, 100).unwrap(), "rays", 100.0);
/// assert_eq!(key.hash().len(), 32);
/// assert!(key.canonical().contains("binary s=1.1000000000000001e0 q=1.0000000000000000e-3"));
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
        }
    }

    /// The key of an existing map, from its provenance.
    pub fn of_map(map: &MagnificationMap) -> Self {
        let p = &map.provenance;
        MapKey::new(p.lens.clone(), map.window, &p.engine, p.density)
    }

    /// The canonical text form: one fact per line, floats in 17 significant digits.
    pub fn canonical(&self) -> String {
        let mut text = format!("causeway map key v{KEY_FORMAT}\n");
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
