//! One model at one parameter point: the dense realisation of a model
//! ([`lattice`]), its exact invariants ([`invariants`]), momenta
//! ([`momentum`]), the Gaussian fixed point ([`fixed_point`] on dense
//! fields, [`qspace`] per wavevector for translation-invariant arrays), and
//! the phase a pinned set of terms names ([`phase`]), and
//! the [`system::System`] that holds them ready for evaluation at many
//! points; the residual theory of a pinned set ([`pinned`]) and the
//! identity and name of a pinned phase ([`phase`]). Engines (dims, flow,
//! scan, search, edges) build on this layer;
//! it never reaches up to them.

pub mod fixed_point;
pub mod invariants;
pub mod lattice;
pub mod momentum;
pub mod phase;
pub mod pinned;
pub mod qspace;
pub mod relevance;
pub mod system;
