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
    /// A half-space point with a coordinate beyond 2^250 in magnitude or a
    /// last coordinate below 2^-250, where `|y - z|^2 / (y_d z_d)` would
    /// overflow float64.
    BeyondHalfSpaceRange,
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
    /// A vertex that coincides with the vertex named (an angle there is
    /// undefined).
    Coincident(&'static str),
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
    /// The fault in words; `name` is the argument the formulas speak of
    /// (`|y|/R - 1` for a bad `y`).
    pub fn describe_as(&self, name: &str) -> String {
        match *self {
            Fault::NonFinite => "contains NaN or infinity".to_string(),
            Fault::OutsideBall(e) => format!(
                "is on or outside the ball (|{name}|/R - 1 = {e:.3e}); points must lie strictly \
                 inside the ball of radius R = 1/sqrt(-curvature)"
            ),
            Fault::AtOrAboveLight(e) => {
                format!("has speed at or above c (|{name}|/c - 1 = {e:.3e})")
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
            Fault::Coincident(other) => {
                format!("coincides with {other}: the angle between them is undefined")
            }
            Fault::NotInHalfSpace => "has last coordinate <= 0 (outside the upper half-space)".to_string(),
            Fault::BeyondHalfSpaceRange => "lies beyond the half-space range: coordinates must be at most 2^250 \
                 (about 1.8e75) in magnitude and the last one at least 2^-250 (about 5.5e-76), so that \
                 |y - z|^2 / (y_d z_d) fits in float64 (the hyperboloid model reaches as far)"
                .to_string(),
        }
    }

    /// Whether the fault is about where the point lies (a domain fault), as
    /// opposed to NaN/infinity or a result that overflows.
    fn is_domain(&self) -> bool {
        matches!(
            self,
            Fault::OutsideBall(_)
                | Fault::OffHyperboloid(_)
                | Fault::NotInHalfSpace
                | Fault::BeyondRange
                | Fault::BeyondHalfSpaceRange
        )
    }
}

/// How far outside the sphere (`|x|/R - 1`) rounding to float32 can put a
/// point that was inside: rounding each coordinate moves the point by at
/// most 2^-24 |x| (6e-8 R at the sphere); the bound leaves room for the
/// curvature's own rounding. Beyond it the point was outside before it was
/// rounded, and the float32 hint would mislead.
const F32_ROUNDING_REACH: f64 = 1e-6;

/// The error for a bad row of an input: the one formatter of such messages,
/// shared by the broadcasting engine, the pairwise paths and the centroids.
///
/// * `name`: the argument as the user passed it (`"x"`, `"y"`, ...).
/// * `shape`: that argument's full shape (point axis included).
/// * `row`: the bad row's index in the argument's own leading axes (`[]` for
///   a single point or value, `[i]` for a 2-D array of points, `[i, j]` for
///   a 3-D one); for a scalar operand (no point axis) `row` has as many
///   entries as `shape`.
/// * `fault`: what is wrong with the row.
/// * `was_f32`: the argument arrived as float32 (before widening).
///
/// Besides the place and the fault, the message says when float32 rounding
/// is the likely cause (a point that float64 could hold inside the ball but
/// float32 cannot) and when the shape suggests the array was transposed
/// (`(d, n)` passed for `(n, d)`).
pub fn row_error(name: &str, shape: &[usize], row: &[usize], fault: Fault, was_f32: bool) -> Error {
    let is_point = shape.len() > row.len();
    let place = match row.len() {
        0 if is_point => format!("{name} (a single point)"),
        0 => format!("{name} (a single value)"),
        1 => format!("{name}: row {}", row[0]),
        _ => format!("{name}: row ({})", row.iter().map(|i| i.to_string()).collect::<Vec<_>>().join(", ")),
    };
    let mut msg = format!("{place} {}", fault.describe_as(name));
    if was_f32 {
        if let Fault::OutsideBall(e) = fault {
            if e <= F32_ROUNDING_REACH {
                msg.push_str(&format!(
                    ". {name} is float32, which cannot hold this point: rounding to float32 (steps of \
                     6e-8 R near the sphere) moved it onto or outside the sphere; float32 holds ball \
                     points only up to about 16 R from the origin in the Poincaré ball, 8 R in the \
                     Klein ball. Pass the points as float64 (from the original data: converting the \
                     float32 array does not bring them back inside), or pull them inside with \
                     gk.poincare.project / gk.klein.project"
                ));
            }
        }
    }
    if is_point && row.first() == Some(&0) && fault.is_domain() && looks_transposed(shape) {
        let (a, b) = (shape[0], shape[1]);
        msg.push_str(&format!(
            ". {name} has shape ({a}, {b}), read as {a} points of dimension {b} (points lie along the \
             last axis): if it holds {b} points of dimension {a}, pass its transpose ({name}.T)"
        ));
    }
    Error::Value(msg)
}

/// A 2-D shape `(a, b)` whose last axis is much longer than the first: more
/// likely `b` points of dimension `a` than `a` points of dimension `b`.
pub fn looks_transposed(shape: &[usize]) -> bool {
    shape.len() == 2 && shape[1] >= 16 && shape[1] >= 4 * shape[0]
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

#[cfg(test)]
mod tests {
    use super::*;

    fn msg(e: Error) -> String {
        match e {
            Error::Value(m) => m,
            Error::Type(m) => panic!("expected a ValueError, got TypeError {m}"),
        }
    }

    #[test]
    fn names_the_argument_in_the_formula_and_the_place() {
        let m = msg(row_error("y", &[5, 3], &[2], Fault::OutsideBall(0.25), false));
        assert!(m.starts_with("y: row 2 is on or outside the ball (|y|/R - 1 = 2.500e-1)"), "{m}");
        let m = msg(row_error("end", &[2, 4, 3], &[1, 2], Fault::NonFinite, false));
        assert!(m.starts_with("end: row (1, 2) contains NaN"), "{m}");
        let m = msg(row_error("x", &[3], &[], Fault::NonFinite, false));
        assert!(m.starts_with("x (a single point)"), "{m}");
        let m = msg(row_error("t", &[], &[], Fault::NonFinite, false));
        assert!(m.starts_with("t (a single value)"), "{m}");
        let m = msg(row_error("v", &[4, 3], &[0], Fault::AtOrAboveLight(0.5), false));
        assert!(m.contains("|v|/c - 1"), "{m}");
    }

    #[test]
    fn float32_hint_only_for_float32_points_just_outside() {
        let hint = "float32, which cannot hold this point";
        assert!(msg(row_error("x", &[9, 3], &[4], Fault::OutsideBall(8.6e-9), true)).contains(hint));
        assert!(msg(row_error("x", &[9, 3], &[4], Fault::OutsideBall(0.0), true)).contains(hint));
        // float64 input, or a point far outside, or another fault: no hint
        assert!(!msg(row_error("x", &[9, 3], &[4], Fault::OutsideBall(8.6e-9), false)).contains(hint));
        assert!(!msg(row_error("x", &[9, 3], &[4], Fault::OutsideBall(0.5), true)).contains(hint));
        assert!(!msg(row_error("x", &[9, 3], &[4], Fault::NonFinite, true)).contains(hint));
    }

    #[test]
    fn transposition_hint_for_wide_arrays_failing_at_row_0() {
        let m = msg(row_error("x", &[3, 1000], &[0], Fault::OutsideBall(29.5), false));
        assert!(m.contains("x has shape (3, 1000)") && m.contains("(x.T)"), "{m}");
        // not for a plausible shape, a later row, a scalar operand or NaN
        for (shape, row, f) in [
            (vec![5usize, 3], vec![0usize], Fault::OutsideBall(1.0)),
            (vec![3, 1000], vec![1], Fault::OutsideBall(1.0)),
            (vec![3, 1000], vec![0, 0], Fault::NonFinite),
            (vec![3, 1000], vec![0], Fault::NonFinite),
        ] {
            let m = msg(row_error("x", &shape, &row, f, false));
            assert!(!m.contains("transpose"), "{m}");
        }
    }
}
