//! Tree-level relevance of a cosine (docs/physics.md section 1): a term
//! integrated over space and time in 1+1 dimensions has RG eigenvalue
//! 2 - Delta and is relevant when that is positive. The one place where
//! the space-time dimension of a term enters.

/// Space-time dimension of a term integrated over the whole system (1+1).
pub const SPACETIME_DIMENSION: f64 = 2.0;

/// Tree-level RG eigenvalue 2 - Delta of a term of scaling dimension Delta.
pub fn rg_eigenvalue(dimension: f64) -> f64 {
    SPACETIME_DIMENSION - dimension
}

/// Relevant at tree level: 2 - Delta > 0.
pub fn is_relevant(dimension: f64) -> bool {
    rg_eigenvalue(dimension) > 0.0
}
