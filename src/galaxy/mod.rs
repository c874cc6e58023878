//! Who is the lens: mass, distance and nature of a microlens from a Galactic model, the event's
//! measurements and follow-up imaging.
//!
//! - [`model`]: the Galactic model (Han & Gould 1995, 2003 disk and barred bulge, their
//!   velocities, the Sun's motion), every parameter with its source;
//! - [`mass`]: the present-day mass function with brown dwarfs and remnants (Kroupa 2001 IMF,
//!   Kalirai et al. 2008 white dwarfs, Gould 2000 neutron stars and black holes);
//! - [`sightline`]: number densities and distance weights along one line of sight (lenses by
//!   `D^2 n(D)`, sources after Kiraga & Paczyński 1994);
//! - [`light`]: main-sequence mass-luminosity relations (Mann et al. 2019 in K; Pecaut & Mamajek
//!   2013 in V, I, K), extinction to the lens, the imaging likelihood;
//! - [`posterior`]: the seeded, multithreaded Monte Carlo (Dominik 2006) and its summaries;
//! - [`samples`]: the fit's posterior samples (an MCMC's rows) as the input instead of value
//!   +- error;
//! - [`report`]: the summary text and the CSV of samples; [`figure`]: the posterior pictures.
//!
//! ```
//! use causeway::galaxy::{infer, EventData, LensOptions, Measured, Sightline, SourceDistance};
//! use causeway::progress::Silent;
//! let data = EventData {
//!     te: Some(Measured::new("tE", 30.0, 1.0).unwrap()),
//!     theta_e: Some(Measured::new("theta_E", 0.5, 0.05).unwrap()),
//!     ..Default::default()
//! };
//! let options = LensOptions {
//!     samples: 8192,
//!     source: SourceDistance::Given { kpc: 8.0, err: 0.0 },
//!     ..LensOptions::new(Sightline::new(1.0, -3.0).unwrap())
//! };
//! let post = infer(&data, &options, &Silent).unwrap();
//! let p = post.class_probabilities(false);
//! assert!((p.iter().sum::<f64>() - 1.0).abs() < 1e-9);
//! ```

pub mod figure;
pub mod input;
pub mod light;
pub mod mass;
pub mod model;
pub mod posterior;
pub mod report;
pub mod samples;
pub mod sightline;

pub use light::{Band, Imaging, LensLight};
pub use mass::{LensClass, MassFunction};
pub use model::{GalacticModel, MotionMoments, Population, Sightline};
pub use posterior::{
    infer, infer_samples, EventData, LensOptions, LensPosterior, LensSample, Measured,
    SourceDistance,
};
pub use samples::FitSamples;
pub use sightline::LineOfSight;
