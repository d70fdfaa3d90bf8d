//! thicket-engine: overdamped Langevin (Brownian) dynamics of spheres in
//! crowded and confined media.
//!
//! The engine moves particles and writes trajectories; it never reads
//! trajectories back (that is `thicket-analysis`).

pub mod config;
pub mod confined;
pub mod contact;
pub mod crowders;
pub mod error;
pub mod fibres;
pub mod geometry;
pub mod lock;
pub mod medium;
pub mod memory;
pub mod mobility;
pub mod neighbors;
pub mod obstacles;
pub mod rng;

pub use config::Scenario;
pub use error::{EngineError, Result};
pub mod integrate;
pub mod run;
pub mod trajectory;
