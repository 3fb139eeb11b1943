//! The four models of hyperbolic space and what they share: the curvature,
//! ball-point validation, the rim rule and projection (`ball`), the
//! interface of the two gyrovector ball models with their batched forms
//! written once (`gyro`), one module per model with its own kernels and its
//! maps to and from the hub, the conversions through the hub (`convert`), and
//! the one reader of arrays of points (`points`).

pub mod ball;
pub mod convert;
pub mod gyro;
pub mod halfspace;
pub mod hyperboloid;
pub mod klein;
pub mod poincare;
pub mod points;

use crate::error::{Error, Result};

/// The four models.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Model {
    Poincare,
    Klein,
    Hyperboloid,
    HalfSpace,
}

impl Model {
    pub const NAMES: [&'static str; 4] = ["poincare", "klein", "hyperboloid", "halfspace"];

    /// Parses a model name (argument `arg` in messages).
    pub fn parse(name: &str, arg: &str) -> Result<Model> {
        match name {
            "poincare" => Ok(Model::Poincare),
            "klein" => Ok(Model::Klein),
            "hyperboloid" => Ok(Model::Hyperboloid),
            "halfspace" => Ok(Model::HalfSpace),
            _ => Err(Error::Value(format!("{arg} must be one of {:?}, got {name:?}", Model::NAMES))),
        }
    }

    /// Coordinates per point for ball dimension `d`.
    pub fn width(self, d: usize) -> usize {
        if self == Model::Hyperboloid {
            d + 1
        } else {
            d
        }
    }
}
