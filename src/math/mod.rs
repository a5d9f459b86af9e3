//! Algorithms without physics, one file each: exact rational numbers
//! ([`rational`]), big-integer matrices, inertia and signature ([`zmat`]),
//! fraction-free elimination for det, inverse (block by block where the
//! matrix splits) and rank ([`bareiss`]), a sparse row echelon for rank and independent subsets ([`echelon`]), the
//! Smith normal form and the lattice operations built on it ([`smith`]),
//! LLL reduction, exact and float ([`lll`]), integral Gram-Schmidt numbers
//! in envelope form ([`envelope_gs`]), readable bases of integer
//! forms ([`reduce`]), the enumeration of lattice points in an ellipsoid
//! ([`ellipsoid`]), and double-double arithmetic with the few dense
//! symmetric-matrix routines the accurate fixed-point route needs
//! ([`ddouble`]: Cholesky, triangular inverse, Jacobi eigen-solver), and
//! the DOP853 Runge-Kutta integrator with grouped error norm and dense
//! output ([`dop853`]), and products of symmetric banded matrices with
//! the bandwidth of a matrix above a threshold ([`banded`]).
//! Nothing here knows about models or fields; nothing here imports from
//! outside `math/`.

pub mod banded;
pub mod bareiss;
pub mod ddouble;
pub mod dop853;
pub mod echelon;
pub mod ellipsoid;
pub mod envelope_gs;
pub mod lll;
pub mod rational;
pub mod reduce;
pub mod smith;
pub mod zbasis;
pub mod zmat;
