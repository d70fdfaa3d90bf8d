//! End-to-end tests of `thicket tracks`: synthetic camera tracks, their
//! files and ground truth, with outside checks in Python (numpy, scipy, h5py).

mod bad_input;
mod bleaching;
mod files;
mod focal;
mod import;
#[path = "../outside/mod.rs"]
mod outside;
mod support;
