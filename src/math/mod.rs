//! Algorithms without physics, one file each: exact rational algebra
//! ([`rational`]), big-integer matrices ([`zmat`]), the Smith normal form
//! and the lattice operations built on it ([`smith`]), readable bases of
//! integer forms ([`reduce`]), and the enumeration of lattice points in an
//! ellipsoid ([`ellipsoid`]), and double-double arithmetic with the few dense
//! symmetric-matrix routines the accurate fixed-point route needs
//! ([`ddouble`]: Cholesky, triangular inverse, Jacobi eigen-solver). Nothing here knows about models or fields.

pub mod ddouble;
pub mod ellipsoid;
pub mod rational;
pub mod reduce;
pub mod smith;
pub mod zmat;
