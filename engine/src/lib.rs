//! thicket-engine: overdamped Langevin (Brownian) dynamics of spheres in
//! crowded and confined media.
//!
//! The engine moves particles and writes trajectories; it never reads
//! trajectories back (that is `thicket-analysis`).

pub mod mobility;
pub mod config;
pub mod error;
pub mod medium;
pub mod rng;

pub use config::Scenario;
pub use error::{EngineError, Result};
pub mod integrate;
pub mod run;
pub mod trajectory;
