//! The two gyrovector ball models behind one interface: the Möbius space
//! of the Poincaré ball ([`Mobius`](crate::models::poincare::Mobius)) and
//! the Einstein space of the Klein ball
//! ([`Einstein`](crate::models::klein::Einstein)). Each model implements
//! the per-point kernels of [`GyroBall`] on a zero-sized type; the batched
//! forms over arrays are written once here, generic over the model, and
//! monomorphised: with `#[inline(always)]` on the kernels and on the row
//! closures, each copy compiled inside `simd::dispatch` inlines everything.
//!
//! Kernels that produce a point return its exact gap (from the gap
//! identities of the operation, never recomputed from rounded coordinates),
//! which the rim rule ([`Rim`], `ball.rs`) needs to tell a result that
//! float64 cannot hold from one that only its last rounding put on the
//! sphere. The work figures passed to `map_rows` only size parallel chunks.

use crate::batch::{map_rows, model_operands, point_core, take_row, wants_f32, Core, Data, Operand, Output, Take};
use crate::error::Result;
use crate::models::ball::{checked_gap, Curvature, Rim};
use crate::numeric::with_scratch;
use Take::{Point, Scalar, Vector};

/// The per-point kernels of a gyrovector ball model. Every `g` argument is
/// the gap `1 - kappa |x|^2` of the point before it.
pub trait GyroBall: Copy + Send + Sync + 'static {
    /// The model's name in messages ("Poincaré", "Klein").
    const NAME: &'static str;

    /// `x ⊕ (sy y)` (`sy = -1` gives `x ⊖ y`); returns the exact gap.
    fn add_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, sy: f64, out: &mut [f64]) -> f64;
    /// `r ⊗ x`; returns the exact gap.
    fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) -> f64;
    /// `gyr[u, v] w` for any vector `w`.
    fn gyration_g(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, w: &[f64], out: &mut [f64]);
    /// The midpoint of the geodesic from `a` to `b`; returns the exact gap.
    fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) -> f64;
    /// `exp_x(v)`; returns the exact gap.
    fn exp_map_g(c: &Curvature, x: &[f64], gx: f64, v: &[f64], out: &mut [f64]) -> f64;
    /// `log_x(y)`.
    fn log_map_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]);
    /// Parallel transport of `v` from `x` to `y`.
    fn transport_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, v: &[f64], out: &mut [f64]);
    /// The point at fraction `t` of the geodesic from `x` to `y`; returns
    /// the exact gap.
    fn geodesic_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) -> f64;
}

/// Implements [`GyroBall`] for the zero-sized type `$ty` by the free
/// per-point kernels (`add_g`, `scale_g`, ...) of the module it is invoked
/// in: each model writes its kernels once, as functions of its module (the
/// other models and the statistics call them directly), and names its type
/// here (`gyro_ball!(Mobius, "Poincaré")`).
macro_rules! gyro_ball {
    ($ty:ident, $name:literal) => {
        impl $crate::models::gyro::GyroBall for $ty {
            const NAME: &'static str = $name;

            #[inline(always)]
            fn add_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, sy: f64, out: &mut [f64]) -> f64 {
                add_g(c, x, gx, y, gy, sy, out)
            }
            #[inline(always)]
            fn scale_g(c: &Curvature, r: f64, x: &[f64], gx: f64, out: &mut [f64]) -> f64 {
                scale_g(c, r, x, gx, out)
            }
            #[inline(always)]
            fn gyration_g(c: &Curvature, u: &[f64], gu: f64, v: &[f64], gv: f64, w: &[f64], out: &mut [f64]) {
                gyration_g(c, u, gu, v, gv, w, out)
            }
            #[inline(always)]
            fn midpoint_g(c: &Curvature, a: &[f64], ga: f64, b: &[f64], gb: f64, out: &mut [f64]) -> f64 {
                midpoint_g(c, a, ga, b, gb, out)
            }
            #[inline(always)]
            fn exp_map_g(c: &Curvature, x: &[f64], gx: f64, v: &[f64], out: &mut [f64]) -> f64 {
                exp_map_g(c, x, gx, v, out)
            }
            #[inline(always)]
            fn log_map_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, out: &mut [f64]) {
                log_map_g(c, x, gx, y, gy, out)
            }
            #[inline(always)]
            fn transport_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, v: &[f64], out: &mut [f64]) {
                transport_g(c, x, gx, y, gy, v, out)
            }
            #[inline(always)]
            fn geodesic_g(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) -> f64 {
                geodesic_g(c, x, gx, y, gy, t, out)
            }
        }
    };
}
pub(crate) use gyro_ball;

/// The operand a result beyond the rim is blamed on: the point (or scalar)
/// operand with the most rows of its own (the first among equals), so that
/// the message names the row of the result whenever one operand spans the
/// broadcast shape.
pub(crate) fn blame(ops: &[Operand]) -> usize {
    let rows = |o: &Operand| -> usize {
        let s = o.data.shape();
        match o.core {
            Core::Point => s[..s.len().saturating_sub(1)].iter().product(),
            Core::Scalar => s.iter().product(),
        }
    };
    let mut best = 0;
    for (i, o) in ops.iter().enumerate() {
        if rows(o) > rows(&ops[best]) {
            best = i;
        }
    }
    best
}

/// The batched form of a ball-model kernel, written once: the operands are
/// named as in Python and taken as `args` says, checked in order on every
/// row ([`take_row`]: the first bad one is the row's fault); `kernel(rows,
/// gaps, out)` gets the gaps of the point operands (1 for the others) and,
/// for a point result, returns its exact gap, which goes through the rim
/// rule (`rim`; `None` for results that are not points, whose return value
/// is unused).
#[inline(always)]
pub(crate) fn ball_rows<'a, M: GyroBall, const N: usize>(
    c: Curvature,
    args: [(&'static str, Data<'a>, Take); N],
    work: usize,
    rim: Option<&Rim>,
    kernel: impl Fn(&[&[f64]], &[f64; N], &mut [f64]) -> f64 + Sync,
) -> Result<Output> {
    let (ops, takes) = model_operands(args);
    let (f32_out, arg) = (wants_f32(&ops), blame(&ops));
    map_rows(
        &ops,
        &point_core,
        work,
        #[inline(always)]
        |r, out| {
            let g = take_row(
                r,
                &takes,
                #[inline(always)]
                |x| checked_gap(&c, x).map(|g| g.value()),
            )?;
            let gout = kernel(r, &g, out);
            match rim {
                Some(rim) => rim.apply(&c, out, gout, f32_out, M::NAME, arg),
                None => Ok(()),
            }
        },
    )
}

/// Batched `x ⊕ y` over broadcast leading axes.
pub fn add_arrays<'a, M: GyroBall>(c: Curvature, x: Data<'a>, y: Data<'a>, rim: &Rim) -> Result<Output> {
    ball_rows::<M, 2>(
        c,
        [("x", x, Point), ("y", y, Point)],
        16,
        Some(rim),
        #[inline(always)]
        |r, g, out| M::add_g(&c, r[0], g[0], r[1], g[1], 1.0, out),
    )
}

/// Batched `x ⊖ y`.
pub fn sub_arrays<'a, M: GyroBall>(c: Curvature, x: Data<'a>, y: Data<'a>, rim: &Rim) -> Result<Output> {
    ball_rows::<M, 2>(
        c,
        [("x", x, Point), ("y", y, Point)],
        16,
        Some(rim),
        #[inline(always)]
        |r, g, out| M::add_g(&c, r[0], g[0], r[1], g[1], -1.0, out),
    )
}

/// Batched `r ⊗ x`; `r` broadcasts against the leading axes of `x`.
pub fn scale_arrays<'a, M: GyroBall>(c: Curvature, r: Data<'a>, x: Data<'a>, rim: &Rim) -> Result<Output> {
    ball_rows::<M, 2>(
        c,
        [("r", r, Scalar), ("x", x, Point)],
        12,
        Some(rim),
        #[inline(always)]
        |r, g, out| M::scale_g(&c, r[0][0], r[1], g[1], out),
    )
}

/// Batched `gyr[a, b] v`; `v` is any finite vector (gyrations are linear).
pub fn gyration_arrays<'a, M: GyroBall>(c: Curvature, a: Data<'a>, b: Data<'a>, v: Data<'a>) -> Result<Output> {
    ball_rows::<M, 3>(
        c,
        [("a", a, Point), ("b", b, Point), ("v", v, Vector)],
        40,
        None,
        #[inline(always)]
        |r, g, out| {
            M::gyration_g(&c, r[0], g[0], r[1], g[1], r[2], out);
            1.0
        },
    )
}

/// Batched midpoint of `x` and `y`.
pub fn midpoint_arrays<'a, M: GyroBall>(c: Curvature, x: Data<'a>, y: Data<'a>, rim: &Rim) -> Result<Output> {
    ball_rows::<M, 2>(
        c,
        [("x", x, Point), ("y", y, Point)],
        30,
        Some(rim),
        #[inline(always)]
        |r, g, out| M::midpoint_g(&c, r[0], g[0], r[1], g[1], out),
    )
}

/// Batched exponential map; `base = None` is the origin.
pub fn exp_map_arrays<'a, M: GyroBall>(c: Curvature, v: Data<'a>, base: Option<Data<'a>>, rim: &Rim) -> Result<Output> {
    match base {
        None => ball_rows::<M, 1>(
            c,
            [("v", v, Vector)],
            16,
            Some(rim),
            #[inline(always)]
            |r, _, out| {
                with_scratch(
                    r[0].len(),
                    #[inline(always)]
                    |z| M::exp_map_g(&c, z, 1.0, r[0], out),
                )
            },
        ),
        Some(b) => ball_rows::<M, 2>(
            c,
            [("v", v, Vector), ("base", b, Point)],
            24,
            Some(rim),
            #[inline(always)]
            |r, g, out| M::exp_map_g(&c, r[1], g[1], r[0], out),
        ),
    }
}

/// Batched logarithmic map; `base = None` is the origin.
pub fn log_map_arrays<'a, M: GyroBall>(c: Curvature, y: Data<'a>, base: Option<Data<'a>>) -> Result<Output> {
    match base {
        None => ball_rows::<M, 1>(
            c,
            [("y", y, Point)],
            16,
            None,
            #[inline(always)]
            |r, g, out| {
                with_scratch(
                    r[0].len(),
                    #[inline(always)]
                    |z| M::log_map_g(&c, z, 1.0, r[0], g[0], out),
                );
                1.0
            },
        ),
        Some(b) => ball_rows::<M, 2>(
            c,
            [("y", y, Point), ("base", b, Point)],
            24,
            None,
            #[inline(always)]
            |r, g, out| {
                M::log_map_g(&c, r[1], g[1], r[0], g[0], out);
                1.0
            },
        ),
    }
}

/// Batched parallel transport of `v` from `start` to `end`.
pub fn transport_arrays<'a, M: GyroBall>(c: Curvature, v: Data<'a>, start: Data<'a>, end: Data<'a>) -> Result<Output> {
    let args = [("v", v, Vector), ("start", start, Point), ("end", end, Point)];
    ball_rows::<M, 3>(
        c,
        args,
        60,
        None,
        #[inline(always)]
        |r, g, out| {
            M::transport_g(&c, r[1], g[1], r[2], g[2], r[0], out);
            1.0
        },
    )
}

/// Batched geodesic interpolation; `t` broadcasts against the leading axes.
pub fn geodesic_arrays<'a, M: GyroBall>(
    c: Curvature,
    x: Data<'a>,
    y: Data<'a>,
    t: Data<'a>,
    rim: &Rim,
) -> Result<Output> {
    ball_rows::<M, 3>(
        c,
        [("x", x, Point), ("y", y, Point), ("t", t, Scalar)],
        30,
        Some(rim),
        #[inline(always)]
        |r, g, out| {
            let t = r[2][0];
            if t.abs() <= GYROLINE_BEYOND {
                M::geodesic_g(&c, r[0], g[0], r[1], g[1], t, out)
            } else {
                gyroline_g::<M>(&c, r[0], g[0], r[1], g[1], t, out)
            }
        },
    )
}

/// Beyond this `|t|` the geodesic is taken as the gyroline: the closed-form
/// weights of `geodesic_g` are about `1 - t` and `t` for nearly coincident
/// points and cancel in their sum (fuzz F11: NaN for `t = 2^250`).
const GYROLINE_BEYOND: f64 = 2.0;

/// The gyroline `x ⊕ (t ⊗ ((-x) ⊕ y))` (Ungar: the geodesic through `x` and
/// `y` in both gyrovector ball models), with exact gaps carried through each
/// step: no cancellation for any `t`, whatever the distance of `x` and `y`.
fn gyroline_g<M: GyroBall>(c: &Curvature, x: &[f64], gx: f64, y: &[f64], gy: f64, t: f64, out: &mut [f64]) -> f64 {
    let d = x.len();
    with_scratch(2 * d, |buf| {
        let (u, w) = buf.split_at_mut(d);
        // (-x) ⊕ y = -(x ⊖ y): the gyrogroup automorphism -(a ⊕ b) = (-a) ⊕ (-b)
        let gu = M::add_g(c, x, gx, y, gy, -1.0, u);
        u.iter_mut().for_each(|v| *v = -*v);
        let gw = M::scale_g(c, t, u, gu, w);
        M::add_g(c, x, gx, w, gw, 1.0, out)
    })
}
