//! Layer 3: the scenario: raw TOML structs, validation into [`Scenario`],
//! `--set` overrides, errors that name the key, and the memory estimate.
//! Imports `base` and `space` (shapes and models it validates), no physics.

pub mod config;
pub mod geometry;
pub mod media;
pub mod memory;

pub use config::Scenario;
