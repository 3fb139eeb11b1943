//! Conversions between the four models, through one hub: the Poincaré point
//! together with its exact gap `g = 1 - kappa |p|^2`. Each model has one map
//! into the hub and one out of it, written so that the gap is derived
//! exactly rather than recomputed from rounded coordinates:
//!
//! * Klein `k`: `p = k/(1 + sqrt(g_k))`, `g = 2 sqrt(g_k)/(1 + sqrt(g_k))`;
//!   back `k = 2p/(2 - g)`.
//! * hyperboloid `(x0, x_s)`: `c = sqrt(1 + kappa |x_s|^2)`, `p = x_s/(1 + c)`,
//!   `g = 2/(1 + c)`; back `x0 = R (2 - g)/g`, `x_s = 2p/g`.
//! * half-space `y` (the inversion in the sphere about the ball's south pole,
//!   scaled so that the origin maps to `(0, ..., 0, R)`):
//!   `D = kappa |y'|^2 + (1 + sqrt(kappa) y_d)^2`, `p' = 2y'/D`,
//!   `p_d = R (1 - kappa |y|^2)/D`, `g = 4 sqrt(kappa) y_d / D`; back with
//!   `E = kappa |p'|^2 + (1 + sqrt(kappa) p_d)^2`, `y' = 2p'/E`, `y_d = R g/E`,
//!   where `1 + sqrt(kappa) p_d = (g + kappa |p'|^2)/(1 - sqrt(kappa) p_d)`
//!   near the south pole.

use crate::batch::{map_rows, wants_f32, Data, Operand, Output};
use crate::error::{Fault, Result, RowFault};
use crate::models::ball::{checked_gap, settle, Curvature};
use crate::models::{halfspace, hyperboloid, klein, Model};
use crate::numeric::{gap_dd, sumsq, with_scratch};

/// Reads a point of `src` into the hub: writes `p` (length d) and returns
/// the gap.
#[inline(always)]
pub fn to_hub(src: Model, k: &Curvature, x: &[f64], p: &mut [f64]) -> std::result::Result<f64, Fault> {
    match src {
        Model::Poincare => {
            let g = checked_gap(k, x)?.value();
            p.copy_from_slice(x);
            Ok(g)
        }
        Model::Klein => Ok(klein::to_poincare(x, checked_gap(k, x)?.value(), p)),
        Model::Hyperboloid => Ok(hyperboloid::to_poincare(&x[1..], hyperboloid::read_point(k, x)?, p)),
        Model::HalfSpace => {
            halfspace::read_point(x)?;
            let n = x.len() - 1;
            let yd = x[n];
            let one = 1.0 + k.sqrt_kappa * yd;
            let den = k.kappa * sumsq(&x[..n]) + one * one;
            for i in 0..n {
                p[i] = 2.0 * x[i] / den;
            }
            p[n] = k.radius * gap_dd(k.kappa, x).value() / den;
            Ok(4.0 * k.sqrt_kappa * yd / den)
        }
    }
}

/// Writes the hub point `(p, g)` in `dst` coordinates. Returns the exact
/// gap of the result in the ball models (1 for the others).
#[inline(always)]
pub fn from_hub(dst: Model, k: &Curvature, p: &[f64], g: f64, out: &mut [f64]) -> f64 {
    match dst {
        Model::Poincare => {
            out.copy_from_slice(p);
            return g;
        }
        Model::Klein => return klein::from_poincare(p, g, out),
        Model::Hyperboloid => hyperboloid::from_poincare(k, p, g, out),
        Model::HalfSpace => {
            let n = p.len() - 1;
            let pd = k.sqrt_kappa * p[n];
            let side = k.kappa * sumsq(&p[..n]);
            let one = if pd >= 0.0 { 1.0 + pd } else { (g + side) / (1.0 - pd) };
            let e = side + one * one;
            for i in 0..n {
                out[i] = 2.0 * p[i] / e;
            }
            out[n] = k.radius * g / e;
        }
    }
    1.0
}

/// Batched conversion of points from `src` to `dst`.
pub fn convert_arrays<'a>(k: Curvature, x: Data<'a>, src: Model, dst: Model) -> Result<Output> {
    let w = x.shape().last().copied().unwrap_or(0);
    let d = if src == Model::Hyperboloid { w.saturating_sub(1) } else { w };
    let ops = [Operand::point("x", x)];
    if src == Model::Hyperboloid {
        hyperboloid::check_dim(&ops)?;
    }
    let f32_out = wants_f32(&ops);
    map_rows(
        &ops,
        &|_| vec![dst.width(d)],
        20,
        #[inline(always)]
        |r, out| {
            with_scratch(
                d,
                #[inline(always)]
                |p| {
                    let g = to_hub(src, &k, r[0], p).map_err(|f| RowFault::new(0, f))?;
                    if src == dst {
                        out.copy_from_slice(r[0]);
                        return Ok(());
                    }
                    let g_out = from_hub(dst, &k, p, g, out);
                    match dst {
                        Model::Poincare | Model::Klein => {
                            // the rim rule of ball.rs, with no opt-in to clip
                            if !settle(&k, out, g_out, f32_out) {
                                let name = if dst == Model::Klein { "Klein" } else { "Poincaré" };
                                return Err(RowFault::new(0, Fault::Unrepresentable(name, f32_out)));
                            }
                        }
                        _ => {
                            if !out.iter().all(|v| v.is_finite()) {
                                return Err(RowFault::new(0, Fault::Overflow));
                            }
                            if dst == Model::Hyperboloid && sumsq(&out[1..]) > hyperboloid::MAX_SPATIAL_SQ {
                                return Err(RowFault::new(0, Fault::ResultBeyondRange));
                            }
                        }
                    }
                    Ok(())
                },
            )
        },
    )
}
