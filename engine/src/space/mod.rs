//! Layer 2: the space particles move in: box, confining shapes, wall
//! mobilities (plane walls, and by position in a cylindrical pore), placed
//! bodies, neighbour searches and soft wall potentials. Imports only `base`.

pub mod bodies;
pub mod collisions;
pub mod mobility;
pub mod neighbors;
pub mod pore_hydro;
pub mod potentials;
pub mod shape;
pub mod sim_box;
pub mod soft;

pub use sim_box::{reflect, SimBox};
