//! The part of the HDF5 API thicket uses, behind one name.
//!
//! By default this is a pure-Rust implementation: files are written by a
//! small writer of our own ([`native`]) in a layout every HDF5 reader opens
//! (superblock v2, v2 object headers, chunked datasets indexed by version-1
//! B-trees) and read through the `hdf5-reader` crate, so nothing outside
//! Rust is needed to build. With the `system` feature the same names come
//! from `hdf5-metno`, which links the system HDF5 C library.
//!
//! Crash consistency of the pure path: data chunks are written in place, but
//! every piece of metadata (object headers, chunk index) is written afresh
//! into space the current superblock does not reference, and the superblock
//! is repointed last at each `flush`, so a process killed at any moment
//! leaves the file exactly as of its last flush.

#[cfg(feature = "system")]
pub use hdf5_metno::*;

#[cfg(not(feature = "system"))]
mod native;
#[cfg(not(feature = "system"))]
pub use native::*;
