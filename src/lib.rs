//! causeway: magnification maps and finite-source light curves for gravitational microlensing.

pub mod error;
pub mod fsutil;
pub mod lens;
pub mod map;
pub mod table;

pub use error::{Error, Result};
