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
    /// target ball model (the rim rule of `models::ball`); carries the model
    /// name and whether the output is float32.
    Unrepresentable(&'static str, bool),
    /// The exact result of a ball-model operation lies closer to the sphere
    /// than the output dtype resolves; carries the model name and whether
    /// the output is float32.
    BeyondBall(&'static str, bool),
}

/// What a ball model cannot hold, written once for every message about it
/// (conversions and operations alike). A point is held when its exact
/// radius rounds to a radius below R: float64 radii end at `1 - 2^-53` R,
/// so points within `2^-54` R of the sphere are not. The figures are the
/// hyperbolic distances from the origin of that limit and of the last radius
/// (`2 artanh` in the Poincaré ball, `artanh` in the Klein ball; mpmath),
/// and the same for float32 (`2^-24`).
pub fn ball_range_text(model: &str, f32: bool) -> String {
    let klein = model == "Klein";
    let (dtype, half, far, last) = match (f32, klein) {
        (false, false) => ("float64", "5.6e-17", "38.1", "37.4"),
        (false, true) => ("float64", "5.6e-17", "19.1", "18.7"),
        (true, false) => ("float32", "3.0e-8", "18.0", "17.3"),
        (true, true) => ("float32", "3.0e-8", "9.0", "8.7"),
    };
    format!(
        "{dtype} cannot hold it strictly inside the {model} ball: it lies within {half} R of the sphere \
         (farther than {far} R from the origin), where {dtype} radii end (the last one below R is {last} R \
         out); the hyperboloid model holds such points (gyrokit.convert(..., 'hyperboloid'), \
         gyrokit.hyperboloid)"
    )
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
            Fault::Unrepresentable(m, f32) => format!("cannot be converted: {}", ball_range_text(m, f32)),
            Fault::BeyondBall(m, f32) => format!(
                "gives a result beyond the range of the ball model: {}{}; on_rim='clip' clips such results to the \
                 last radius with a warning",
                ball_range_text(m, f32),
                if f32 { ", and float64 inputs give float64 results, which reach twice as far" } else { "" }
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
