//! Layer 3: the scenario: raw TOML structs, validation into [`Scenario`],
//! `--set` overrides, errors that name the key, and the memory estimate.
//! Imports `base` and `space` (shapes and models it validates), no physics.
//! Within the layer: binding ← species, csv, species ← geometry ← media, drive ← pairs ← config ← memory ← load, drive ← charge ← config.

pub mod binding;
pub mod charge;
pub mod config;
pub mod csv;
pub mod drive;
pub mod geometry;
pub mod load;
pub mod media;
pub mod memory;
pub mod pairs;
pub mod species;

pub use config::Scenario;
