//! Layer 7: the run driver and the observers that watch a run (frames,
//! membrane flux meter, progress), each saving its part of one checkpoint.

pub mod driver;
pub mod membrane;
pub mod observe;
pub mod part;

pub use driver::{run, run_part, RunOptions, RunOutcome};
