//! End-to-end tests of the `thicket` binary, one module per topic.

mod analysis;
mod bad_input;
mod confined;
mod file_format;
mod free;
mod outputs;
mod results;
mod resume;
mod support;
mod threads;
mod validate;
