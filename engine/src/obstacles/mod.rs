//! Layer 4: fixed obstacles placed from the seed: spheres (random,
//! lattice, overlapping, from a file) and fibres.

pub mod fibres;
pub mod spheres;

pub use spheres::FixedObstacles;
