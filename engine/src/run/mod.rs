//! Layer 7: the run driver and the observers that watch a run.

pub mod driver;

pub use driver::{run, RunOptions, RunOutcome};
