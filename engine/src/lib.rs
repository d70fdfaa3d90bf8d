//! thicket-engine: overdamped Langevin (Brownian) dynamics of spheres in
//! crowded and confined media.
//!
//! The engine moves particles and writes trajectories; it never reads
//! trajectories back (that is `thicket-analysis`). Its layers, each a
//! folder, import only the ones listed before them (ARCHITECTURE.md;
//! checked by `engine/tests/architecture.rs`):
//!
//! 1. [`base`]: errors, random streams, water's properties.
//! 2. [`space`]: the box, confining shapes, wall mobilities, bodies and neighbour searches.
//! 3. [`scenario`]: the TOML scenario, raw and validated, and its memory estimate.
//! 4. [`obstacles`]: placing fixed spheres and fibres.
//! 5. [`step`]: the step pipeline (displacement, boundary, contact) and the crowd.
//! 6. [`io`]: the trajectory file, the checkpoint and the output lock.
//! 7. [`run`]: the run driver and its observers.

pub mod base;
pub mod io;
pub mod obstacles;
pub mod run;
pub mod scenario;
pub mod space;
pub mod step;

pub use base::error::{EngineError, Result};
pub use scenario::Scenario;
