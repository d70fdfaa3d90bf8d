//! Layer 5: taking steps. One pipeline composes a particle's displacement,
//! the boundary that folds it and the contact rule that accepts it; the
//! crowd (mobile hard spheres) uses the same pieces in its parallel sweep.

pub mod confined;
pub mod crowd;
pub mod kernels;
