//! End-to-end tests of the `thicket` binary, one module per topic.

mod analysis;
mod bad_input;
mod confined;
mod crash;
mod ensemble;
mod file_format;
mod free;
mod golden;
mod outputs;
#[path = "../outside/mod.rs"]
mod outside;
mod results;
mod resume;
mod slurm;
mod support;
mod threads;
mod validate;
