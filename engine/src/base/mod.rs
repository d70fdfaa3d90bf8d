//! Layer 1: what every other layer uses; imports no other layer.

pub mod error;
pub mod medium;
pub mod rng;
