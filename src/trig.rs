//! Gyrotrigonometry: gyroangles and triangles in the Möbius (Poincaré) and
//! Einstein (Klein) gyrovector spaces, and triangles in every model.
//!
//! The gyroangle at `b` between `⊖b⊕a` and `⊖b⊕c` (Ungar, "Analytic
//! Hyperbolic Geometry", 2005, ch. 8) is the Euclidean angle between those
//! two gyrovectors. In the Poincaré ball it equals the hyperbolic angle of
//! the triangle at `b` (the left gyrotranslation `⊖b⊕·` is an isometry taking
//! `b` to the origin, where the model is conformal); in the Klein ball the
//! Einstein gyrovectors are the Möbius ones scaled radially (Ungar's
//! isomorphism `p -> 2 ⊗ p`), so the angle is the same.
//!
//! How the digits are kept:
//!
//! * The gyrovectors come from the models' exact subtraction kernels (written
//!   around `s = x + y` with carried gaps). In gyrocommutative gyrogroups
//!   `⊖b⊕a = ⊖(b⊖a)`, and negating both vectors leaves every angle, wedge
//!   and dot product unchanged, so `b⊖a` and `b⊖c` are used directly.
//! * An angle is `atan2(|u ∧ w|, u.w)` with the wedge from exact 2x2 minors
//!   when `u` and `w` are nearly parallel (`numeric::wedge_sq`): exact for
//!   angles near 0 and π, where `acos` of a rounded cosine has no digits.
//! * The defect is not `π - (α + β + γ)` (for a triangle of side 1e-6 R
//!   that difference of rounded angles keeps 4 digits). With `b` moved to
//!   the origin the triangle is `(0, u, w)` in the Poincaré ball, and its
//!   defect (area / R^2) is
//!   `δ = 2 atan2(kappa |u ∧ w|, 1 - kappa u.w)`, the ball form of the
//!   complex-plane formula `tan(δ/2) = Im(z̄ w)/(1 - Re(z̄ w))` for the
//!   triangle `(0, z, w)` of the unit disk (the triangle lies in the plane
//!   through the origin spanned by `u` and `w`, a totally geodesic disk).
//!   `1 - kappa u.w = (g_u + g_w)/2 + kappa |u - w|^2/2` is a sum of
//!   non-negative terms with the exact gaps of the kernels, so `δ` keeps its
//!   digits for tiny triangles and near the rim. Checked against Gauss–Bonnet
//!   with 50-digit angles in the tests.
//! * Sides are the element-wise distances of each model
//!   (`pairwise::point_distance`), bit-identical to `distance`.
//!
//! Half-space and hyperboloid vertices are read into the Poincaré hub
//! (`convert::to_hub`) first; sides come from their own model.

use crate::batch::{map_rows, scalar_core, Data, Operand, Output};
use crate::error::{Fault, Result, RowFault};
use crate::models::ball::{point_gap, Curvature};
use crate::models::convert::to_hub;
use crate::models::{hyperboloid, klein, poincare, Model};
use crate::numeric::{dist_sq, dot2, sumsq, wedge_sq, with_scratch};
use crate::pairwise::point_distance;

/// The gyrovector space of a ball model.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Space {
    /// Möbius (Poincaré ball).
    Mobius,
    /// Einstein (Klein ball).
    Einstein,
}

/// `b ⊖ x` in `space`; returns the exact gap of the result.
#[inline(always)]
fn sub_g(space: Space, c: &Curvature, b: &[f64], gb: f64, x: &[f64], gx: f64, out: &mut [f64]) -> f64 {
    match space {
        Space::Mobius => poincare::add_g(c, b, gb, x, gx, -1.0, out),
        Space::Einstein => klein::add_g(c, b, gb, x, gx, -1.0, out),
    }
}

/// The Euclidean angle between `u` and `w`, in `[0, π]`:
/// `atan2(|u ∧ w|, u.w)`, accurate near 0 and π.
#[inline(always)]
pub fn vector_angle(u: &[f64], w: &[f64]) -> f64 {
    wedge_sq(u, w).sqrt().atan2(dot2(u, w))
}

/// The defect `δ` of the triangle `(0, u, w)` of the Poincaré ball, from the
/// exact gaps `gu`, `gw` of `u` and `w` (see the module notes).
#[inline(always)]
pub fn defect_at_origin(c: &Curvature, u: &[f64], gu: f64, w: &[f64], gw: f64) -> f64 {
    let k = c.kappa;
    let den = 0.5 * (gu + gw) + 0.5 * k * dist_sq(u, w);
    2.0 * (k * wedge_sq(u, w).sqrt()).atan2(den)
}

/// The gyroangle at `b` of the triangle `a, b, c` given with gaps; `ws` is
/// scratch of length `2 d`. Faults name `a` (0) or `c` (2) when it coincides
/// with `b`.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn angle_at(
    space: Space,
    k: &Curvature,
    a: &[f64],
    ga: f64,
    b: &[f64],
    gb: f64,
    c: &[f64],
    gc: f64,
    ws: &mut [f64],
) -> std::result::Result<f64, (usize, usize)> {
    let (u, w) = ws.split_at_mut(a.len());
    sub_g(space, k, b, gb, a, ga, u);
    sub_g(space, k, b, gb, c, gc, w);
    if sumsq(u) == 0.0 {
        return Err((0, 1));
    }
    if sumsq(w) == 0.0 {
        return Err((2, 1));
    }
    Ok(vector_angle(u, w))
}

const NAMES: [&str; 3] = ["a", "b", "c"];

fn coincident(pair: (usize, usize)) -> RowFault {
    RowFault::new(pair.0, Fault::Coincident(NAMES[pair.1]))
}

/// Batched gyroangle at `b` between `⊖b⊕a` and `⊖b⊕c`:
/// `(..., d) x 3 -> (...)`.
pub fn angle_arrays<'a>(space: Space, k: Curvature, a: Data<'a>, b: Data<'a>, c: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("c", c)];
    map_rows(
        &ops,
        &scalar_core,
        40,
        #[inline(always)]
        |r, out| {
            let ga = point_gap(&k, r[0], 0)?;
            let gb = point_gap(&k, r[1], 1)?;
            let gc = point_gap(&k, r[2], 2)?;
            with_scratch(
                2 * r[0].len(),
                #[inline(always)]
                |ws| {
                    out[0] = angle_at(space, &k, r[0], ga, r[1], gb, r[2], gc, ws).map_err(coincident)?;
                    Ok(())
                },
            )
        },
    )
}

/// Sides, angles and defect of the triangle with vertices `p[0..3]` (ball
/// points of `space` with gaps `g`), into `out[3..7]`; `ws` has length `2 d`.
#[inline(always)]
fn triangle_ball(
    space: Space,
    k: &Curvature,
    p: [&[f64]; 3],
    g: [f64; 3],
    ws: &mut [f64],
    out: &mut [f64],
) -> std::result::Result<(), RowFault> {
    let d = p[0].len();
    // angles at a and c (rotations of the vertex order)
    out[3] = angle_at(space, k, p[1], g[1], p[0], g[0], p[2], g[2], ws)
        .map_err(|(x, y)| coincident(([1, 0, 2][x], [1, 0, 2][y])))?;
    out[5] = angle_at(space, k, p[0], g[0], p[2], g[2], p[1], g[1], ws)
        .map_err(|(x, y)| coincident(([0, 2, 1][x], [0, 2, 1][y])))?;
    // the angle at b, and the defect of the triangle moved to put b at the origin
    let (u, w) = ws.split_at_mut(d);
    let gu = sub_g(space, k, p[1], g[1], p[0], g[0], u);
    let gw = sub_g(space, k, p[1], g[1], p[2], g[2], w);
    out[4] = vector_angle(u, w);
    out[6] = match space {
        Space::Mobius => defect_at_origin(k, u, gu, w, gw),
        Space::Einstein => {
            // the Poincaré images: radial scalings, no digits lost at the origin
            let a = gu.sqrt();
            u.iter_mut().for_each(|v| *v /= 1.0 + a);
            let pu = klein::poincare_gap(gu);
            let a = gw.sqrt();
            w.iter_mut().for_each(|v| *v /= 1.0 + a);
            let pw = klein::poincare_gap(gw);
            defect_at_origin(k, u, pu, w, pw)
        }
    };
    Ok(())
}

/// Batched triangles of any model: `(..., w) x 3 -> (..., 8)` holding, per
/// row, the sides opposite a, b, c, the angles at a, b, c, the defect
/// `π - (α + β + γ)` and the area `defect R^2`.
pub fn triangle_arrays<'a>(model: Model, k: Curvature, a: Data<'a>, b: Data<'a>, c: Data<'a>) -> Result<Output> {
    let ops = [Operand::point("a", a), Operand::point("b", b), Operand::point("c", c)];
    if model == Model::Hyperboloid {
        hyperboloid::check_dim(&ops)?;
    }
    map_rows(
        &ops,
        &|_| vec![8],
        120,
        #[inline(always)]
        |r, out| {
            let w = r[0].len();
            let d = if model == Model::Hyperboloid { w - 1 } else { w };
            // sides first: they validate every vertex in its own model
            let side = |i: usize, j: usize| {
                point_distance(model, &k, r[i], r[j])
                    .map_err(|f| RowFault::new(if f.arg == 0 { i } else { j }, f.fault))
            };
            out[1] = side(0, 2)?;
            out[0] = side(1, 2)?;
            out[2] = side(0, 1)?;
            match model {
                Model::Poincare | Model::Klein => {
                    let space = if model == Model::Poincare { Space::Mobius } else { Space::Einstein };
                    let g = [point_gap(&k, r[0], 0)?, point_gap(&k, r[1], 1)?, point_gap(&k, r[2], 2)?];
                    with_scratch(
                        2 * d,
                        #[inline(always)]
                        |ws| triangle_ball(space, &k, [r[0], r[1], r[2]], g, ws, out),
                    )?;
                }
                Model::Hyperboloid | Model::HalfSpace => {
                    with_scratch(
                        5 * d,
                        #[inline(always)]
                        |buf| {
                            let (hub, ws) = buf.split_at_mut(3 * d);
                            let (h0, rest) = hub.split_at_mut(d);
                            let (h1, h2) = rest.split_at_mut(d);
                            let g0 = to_hub(model, &k, r[0], h0).map_err(|f| RowFault::new(0, f))?;
                            let g1 = to_hub(model, &k, r[1], h1).map_err(|f| RowFault::new(1, f))?;
                            let g2 = to_hub(model, &k, r[2], h2).map_err(|f| RowFault::new(2, f))?;
                            triangle_ball(Space::Mobius, &k, [h0, h1, h2], [g0, g1, g2], ws, out)
                        },
                    )?;
                }
            }
            out[7] = out[6] * k.radius * k.radius;
            Ok(())
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    fn tri(model: Model, k: &Curvature, a: &[f64], b: &[f64], c: &[f64]) -> Vec<f64> {
        let v = |x: &[f64]| ndarray::ArrayD::from_shape_vec(ndarray::IxDyn(&[x.len()]), x.to_vec()).unwrap();
        let (va, vb, vc) = (v(a), v(b), v(c));
        let out = triangle_arrays(model, *k, Data::F64(va.view()), Data::F64(vb.view()), Data::F64(vc.view()))
            .unwrap()
            .into_f64();
        out.iter().copied().collect()
    }

    #[test]
    fn defect_agrees_with_the_angle_sum_and_the_laws_of_cosines() {
        // handbook identities: the hyperbolic law of cosines (sides and
        // angles), Gauss–Bonnet (area = (π - sum of angles) R^2)
        let k = Curvature::new(-2.5).unwrap();
        let (a, b, c) = ([0.3, -0.1, 0.2], [-0.2, 0.4, 0.05], [0.1, 0.1, -0.5]);
        for model in [Model::Poincare, Model::Klein] {
            let t = tri(model, &k, &a, &b, &c);
            let (s, an) = (&t[0..3], &t[3..6]);
            let r = k.radius;
            let law = (s[1] / r).cosh() * (s[2] / r).cosh() - (s[1] / r).sinh() * (s[2] / r).sinh() * an[0].cos();
            if model == Model::Poincare {
                assert!((law - (s[0] / r).cosh()).abs() < 1e-13, "{law}");
                let dual = -an[1].cos() * an[2].cos() + an[1].sin() * an[2].sin() * (s[0] / r).cosh();
                assert!((dual - an[0].cos()).abs() < 1e-13);
                assert!((PI - an.iter().sum::<f64>() - t[6]).abs() < 1e-14, "{t:?}");
                assert!((t[7] - t[6] * r * r).abs() < 1e-15);
            }
            // sides and angles do not depend on the model (isometric images)
            let p = tri(Model::Poincare, &k, &a, &b, &c);
            if model == Model::Klein {
                let mut kp = [[0.0; 3]; 3];
                for (x, o) in [&a, &b, &c].iter().zip(kp.iter_mut()) {
                    klein::from_poincare(*x, crate::numeric::gap(k.kappa, *x), o);
                }
                let q = tri(Model::Klein, &k, &kp[0], &kp[1], &kp[2]);
                for i in 0..7 {
                    assert!((q[i] - p[i]).abs() < 1e-14 * p[i].abs().max(1.0), "{i} {q:?} {p:?}");
                }
            }
        }
    }

    #[test]
    fn coincident_vertices_are_named() {
        let k = Curvature::default();
        let v = |x: &[f64]| ndarray::ArrayD::from_shape_vec(ndarray::IxDyn(&[x.len()]), x.to_vec()).unwrap();
        let (a, b) = (v(&[0.1, 0.2]), v(&[0.3, 0.0]));
        let e = angle_arrays(Space::Mobius, k, Data::F64(a.view()), Data::F64(b.view()), Data::F64(b.view()));
        let msg = format!("{:?}", e.unwrap_err());
        assert!(msg.contains("c") && msg.contains("coincides with b"), "{msg}");
    }
}
