//! Layer 5: taking steps. One pipeline composes a particle's displacement,
//! the boundary that folds it and the contact rule that accepts it
//! (`pipeline`); the crowd (mobile hard spheres) uses the same displacement
//! and boundary pieces in its parallel sweep.

pub mod binding;
pub mod boundary;
pub mod contact;
pub mod crowd;
pub mod displacement;
pub mod pipeline;
pub mod state;

pub use pipeline::Stepper;
pub use state::{Kinetics, State};
