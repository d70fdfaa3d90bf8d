//! Layer 6: files: the H5MD trajectory writer, the checkpoint and the
//! output lock.

pub mod lock;
pub mod trajectory;
