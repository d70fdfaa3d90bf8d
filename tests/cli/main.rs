//! End-to-end tests of the `thicket` binary, one module per topic.

mod analysis;
mod bad_input;
mod file_format;
mod free;
#[path = "../outside/mod.rs"]
mod outside;
mod resume;
mod support;
mod threads;
