//! A model made ready for evaluation: the validated model, its dense
//! lattice and its exact invariants, computed once; and the evaluation of
//! the fixed point at parameter points.

use std::path::Path;

use nalgebra::DMatrix;

use crate::error::{Error, InputError};
use crate::fixed_point::{FixedPoint, Unphysical};
use crate::invariants::Invariants;
use crate::lattice::Lattice;
use crate::model::Model;

/// A model with everything that does not depend on the parameter point.
#[derive(Debug, Clone)]
pub struct System {
    /// The validated model.
    pub model: Model,
    /// Its dense realisation.
    pub lattice: Lattice,
    /// Exact data (independent of V).
    pub invariants: Invariants,
    /// K as floats.
    pub k: DMatrix<f64>,
}

impl System {
    /// Load a model file and prepare it.
    pub fn load(path: &Path) -> Result<System, InputError> {
        System::new(Model::load(path)?)
    }

    /// Prepare a validated model.
    pub fn new(model: Model) -> Result<System, InputError> {
        let lattice = Lattice::build(&model)?;
        let invariants = Invariants::compute(&model, &lattice)?;
        let k = lattice.k_f64();
        Ok(System {
            model,
            lattice,
            invariants,
            k,
        })
    }

    /// Dense V at a point; errors name the entry and the point.
    pub fn v_at(&self, point: &[f64]) -> Result<DMatrix<f64>, Error> {
        let mut v = DMatrix::zeros(self.lattice.n, self.lattice.n);
        self.lattice
            .fill_v(&self.model, point, &mut v)
            .map_err(|msg| {
                InputError::new(
                    &self.model.file,
                    "",
                    format!("{msg} at {}", self.model.params.describe(point)),
                )
            })?;
        Ok(v)
    }

    /// The fixed point at a parameter point; a V that is not positive
    /// definite is reported as [`Unphysical`] with the point.
    pub fn fixed_point(&self, point: &[f64]) -> Result<FixedPoint, Error> {
        let v = self.v_at(point)?;
        FixedPoint::solve(&self.k, &v).map_err(|smallest_eigenvalue| {
            Error::Unphysical(Unphysical {
                point: self.model.params.describe(point),
                smallest_eigenvalue,
            })
        })
    }

    /// Extra (fixed) dimension of each term at a point; must be finite and >= 0.
    pub fn extra_dimensions(&self, point: &[f64]) -> Result<Vec<f64>, Error> {
        self.model
            .terms
            .iter()
            .map(|t| {
                let x = t.extra_dimension.eval(point);
                if x.is_finite() && x >= 0.0 {
                    Ok(x)
                } else {
                    Err(Error::Input(InputError::new(
                        &self.model.file,
                        format!("term \"{}\".extra_dimension", t.name),
                        format!(
                            "must be a finite number >= 0, found {x} at {}",
                            self.model.params.describe(point)
                        ),
                    )))
                }
            })
            .collect()
    }

    /// Momentum mismatch of each term's representative (None without momenta).
    pub fn momentum_mismatches(&self, point: &[f64]) -> Option<Vec<f64>> {
        let k = self.lattice.momenta(&self.model, point)?;
        Some(
            self.invariants
                .terms
                .iter()
                .map(|t| {
                    t.particles
                        .iter()
                        .zip(&k)
                        .map(|(m, p)| crate::exact::to_f64(m) * p)
                        .sum()
                })
                .collect(),
        )
    }
}
