//! Mathematics with no physics in it.
//!
//! - [`ddouble`]: double-double arithmetic (about 31 significant digits) and
//!   the few dense symmetric-matrix routines the accurate fixed-point route
//!   needs (Cholesky, triangular inverse, Jacobi eigen-solver).

pub mod ddouble;
