"""Centroids of hyperbolic point sets: Fréchet mean, Einstein midpoint, variance.

Every function takes points of any model (``model="poincare"`` default,
``"klein"``, ``"hyperboloid"``, ``"halfspace"``), optional non-negative
``weights`` (a zero weight drops its point) and, for the means, optional
integer ``labels`` giving one centroid per distinct label, in the order of
``np.unique(labels)``, computed in one pass over the data.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any, Optional

import numpy as np

from . import _native

def _all_f32(*arrays: Any) -> bool:
    """The dtype policy: float32 results only when every array input is float32."""
    present = [a for a in arrays if a is not None]
    return bool(present) and all(getattr(a, "dtype", None) == np.float32 for a in present)


__all__ = [
    "FrechetMean", "ConvergenceWarning", "frechet_mean", "einstein_midpoint", "frechet_variance",
]


class ConvergenceWarning(RuntimeWarning):
    """The Fréchet mean iteration stopped at ``max_iter`` before reaching ``tol``."""


@dataclass(frozen=True)
class FrechetMean:
    """Result of :func:`frechet_mean`.

    ``mean`` is ``(d,)`` (``(d+1,)`` on the hyperboloid) without labels, or
    ``(n_labels, ...)`` with labels, rows in the order of ``labels``.
    ``iterations``, ``converged`` and ``grad_norm`` are scalars without
    labels and arrays with them. ``grad_norm`` is the Riemannian norm of the
    weighted mean log vector ``sum w log_mean(x) / sum w`` at the result, in
    units of the ball radius R (zero exactly at the minimiser).
    """

    mean: np.ndarray
    iterations: Any
    converged: Any
    grad_norm: Any
    labels: Optional[np.ndarray] = None


def frechet_mean(
    x: Any,
    weights: Any = None,
    labels: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    tol: float = 1e-12,
    max_iter: int = 50,
) -> FrechetMean:
    """The weighted Fréchet (Karcher) mean ``argmin_m sum_i w_i d(m, x_i)^2``.

    Riemannian Newton's method with the exact Hessian of the objective,
    started at the Einstein midpoint, with a step-halving safeguard (the
    objective is strictly convex in hyperbolic space, so the minimiser is
    unique and the iteration cannot diverge or leave the ball). Typically 3-6
    iterations to ``tol = 1e-12``. Stops when ``grad_norm <= tol``; if
    ``max_iter`` Newton steps do not get there, warns with
    :class:`ConvergenceWarning` and returns the last iterate. Deterministic:
    bit-identical whatever the thread count.
    """
    mean, labs, it, conv, gn = _native.frechet_mean(x, weights, labels, model, curvature, tol, max_iter)
    if not bool(np.all(conv)):
        bad = labs[~conv] if labels is not None else []
        where = f" (labels {list(bad)[:10]})" if labels is not None else ""
        warnings.warn(
            f"frechet_mean did not reach tol={tol} in max_iter={max_iter} iterations{where}; "
            f"gradient norm {float(np.max(gn)):.3e}",
            ConvergenceWarning,
            stacklevel=2,
        )
    if _all_f32(x, weights):
        mean = mean.astype(np.float32)
    if labels is None:
        return FrechetMean(mean[0], int(it[0]), bool(conv[0]), float(gn[0]), None)
    return FrechetMean(mean, it, conv, gn, labs)


def einstein_midpoint(
    x: Any,
    weights: Any = None,
    labels: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
) -> np.ndarray:
    """The weighted Einstein midpoint (gyrocentroid) ``sum w γ k / sum w γ`` in the Klein ball.

    Computed from any model and returned in it: ``(d,)`` without labels,
    ``(n_labels, d)`` with labels (rows in ``np.unique(labels)`` order). In
    the Poincaré ball it equals the Möbius gyromidpoint of the points (for
    two points, :func:`gyrokit.poincare.midpoint`). One pass, closed form; a
    good approximation to the Fréchet mean and its starting point.
    """
    mean, _ = _native.einstein_midpoint(x, weights, labels, model, curvature)
    if _all_f32(x, weights):
        mean = mean.astype(np.float32)
    return mean[0] if labels is None else mean


def frechet_variance(
    x: Any,
    center: Any = None,
    weights: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
) -> float:
    """``sum w d(center, x)^2 / sum w``; ``center=None`` uses the Fréchet mean."""
    if center is None:
        center = frechet_mean(x, weights, model=model, curvature=curvature).mean
    return _native.frechet_variance(x, center, weights, model, curvature)
