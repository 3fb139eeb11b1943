//! The core error type. The binding layer maps it to Python exceptions in one
//! place: `Value` becomes `ValueError`, `Type` becomes `TypeError`.

use std::fmt;

#[derive(Debug, Clone, PartialEq)]
pub enum Error {
    /// Bad values: shapes, domains, parameters.
    Value(String),
    /// Bad types: dtypes that cannot become float64, non-numeric arguments.
    Type(String),
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Value(m) | Error::Type(m) => f.write_str(m),
        }
    }
}

impl std::error::Error for Error {}

pub type Result<T> = std::result::Result<T, Error>;

pub(crate) fn value_err<T>(msg: impl Into<String>) -> Result<T> {
    Err(Error::Value(msg.into()))
}

/// What is wrong with one row of one operand, found inside a row kernel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Fault {
    /// NaN or infinity among the coordinates (or the scalar).
    NonFinite,
    /// A ball point on or outside the sphere of radius R; carries |x|/R - 1
    /// (0 when the point is on the sphere to working precision).
    OutsideBall(f64),
    /// A velocity at or above the speed of light; carries |v|/c - 1.
    AtOrAboveLight(f64),
    /// A hyperboloid point whose x0 <= 0 or that is off the sheet beyond the
    /// tolerance; carries the relative defect.
    OffHyperboloid(f64),
    /// A half-space point with last coordinate <= 0.
    NotInHalfSpace,
    /// The result of a valid input overflows float64.
    Overflow,
    /// A hyperboloid point whose spatial coordinates exceed the range in
    /// which products of coordinates fit in float64.
    BeyondRange,
    /// A hyperboloid result beyond that range.
    ResultBeyondRange,
    /// The converted point is too close to the sphere for float64 in the
    /// target ball model (it rounds onto the sphere).
    Unrepresentable(&'static str),
}

impl Fault {
    pub fn describe(&self) -> String {
        match *self {
            Fault::NonFinite => "contains NaN or infinity".to_string(),
            Fault::OutsideBall(e) => format!(
                "is on or outside the ball (|x|/R - 1 = {e:.3e}); points must lie strictly \
                 inside the ball of radius R = 1/sqrt(-curvature)"
            ),
            Fault::AtOrAboveLight(e) => {
                format!("has speed at or above c (|v|/c - 1 = {e:.3e})")
            }
            Fault::OffHyperboloid(e) if e.is_nan() => {
                "has x0 <= 0 (not on the upper sheet of the hyperboloid)".to_string()
            }
            Fault::OffHyperboloid(e) => format!(
                "is off the hyperboloid <x,x> = 1/K: x0 differs from sqrt(1/-K + |x_1..d|^2) \
                 by {e:.3e} relative (tolerance 1e-6); hyperboloid.project() repairs drifted points"
            ),
            Fault::Overflow => "gives a result that overflows float64".to_string(),
            Fault::BeyondRange => "lies beyond the hyperboloid range: |x_1..d| must be at most 2^250 \
                 (about 1.8e75, some 173 R from the origin when R = 1) so that products of \
                 coordinates fit in float64"
                .to_string(),
            Fault::ResultBeyondRange => "gives a point beyond the hyperboloid range (|x_1..d| at most \
                 2^250, about 1.8e75), where products of coordinates overflow float64"
                .to_string(),
            Fault::Unrepresentable(m) => format!(
                "cannot be represented in the {m} model in float64: its image lies within \
                 1.1e-16 R of the sphere and rounds onto it (the Klein ball holds points up to \
                 about 18 R from the origin, the Poincaré ball up to about 37 R)"
            ),
            Fault::NotInHalfSpace => "has last coordinate <= 0 (outside the upper half-space)".to_string(),
        }
    }
}

/// A fault in operand number `arg` of a row kernel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowFault {
    pub arg: usize,
    pub fault: Fault,
}

impl RowFault {
    #[inline]
    pub fn new(arg: usize, fault: Fault) -> RowFault {
        RowFault { arg, fault }
    }
}
