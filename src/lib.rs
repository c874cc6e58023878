//! causeway: magnification maps and finite-source light curves for gravitational microlensing.
//!
//! The crate follows the pipeline of DESIGN.md; data flows one way, lower modules never use
//! higher ones:
//!
//! - [`lens`]: point-mass lens systems and the lens equation;
//! - [`engine`]: map builders behind one trait (inverse ray shooting);
//! - [`map`]: the magnification map, its FITS file and PNG picture;
//! - [`cli`]: the command line (no physics there).
//!
//! ```
//! use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
//! let lens = LensSystem::single();
//! let window = Window::new((0.5, 0.0), 0.2, 8).unwrap();
//! let map = RayShooting::new(100.0).build(&lens, &window).unwrap();
//! assert!(map.mean() > 1.0);
//! ```

pub mod caustics;
pub mod cli;
pub mod contour;
pub mod curve;
pub mod engine;
pub mod error;
pub mod fit;
pub mod fsutil;
pub mod galaxy;
pub mod lens;
pub mod map;
pub mod parallax;
pub mod plot;
pub mod progress;
pub mod solve;
pub mod source;
pub mod store;
pub mod table;

pub use error::{Error, Result};
