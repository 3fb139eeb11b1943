"""Centroids of hyperbolic point sets: Fréchet mean, Einstein midpoint, variance.

Every function takes points of any model (``model="poincare"`` default,
``"klein"``, ``"hyperboloid"``, ``"halfspace"``), optional non-negative
``weights`` (a zero weight drops its point) and optional ``labels`` giving
one result per distinct label, computed in one pass over the data.
``weights`` and ``labels`` are keyword-only.

Labels may be any hashable values, one per point: integers, floats,
strings, tuples, object arrays, or a pandas ``Categorical`` (or a Series of
that dtype). Results list the label values in ``.labels``, in the order of
``np.unique(labels)``; for a ``Categorical``, the categories that occur, in
the categorical's own order; for values that cannot be sorted together
(e.g. mixed types), in order of first appearance. Missing labels (``None``,
NaN, a categorical's missing code) raise ``ValueError`` naming the entry.
The values are factorised once in Python; the core groups integer codes.
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Optional, Tuple, Union

import numpy as np

from ._args import count
from . import _native

def _all_f32(*arrays: Any) -> bool:
    """The dtype policy: float32 results only when every array input is float32."""
    present = [a for a in arrays if a is not None]
    return bool(present) and all(getattr(a, "dtype", None) == np.float32 for a in present)


__all__ = [
    "FrechetMean", "FrechetVariance", "ConvergenceWarning", "frechet_mean", "einstein_midpoint", "frechet_variance",
]


def _missing(v: Any) -> bool:
    return v is None or (isinstance(v, (float, np.floating)) and v != v)


def _factorize(labels: Any) -> Tuple[Any, Optional[np.ndarray]]:
    """``(codes, values)``: what the core groups, and the label value of each
    code (``None`` when the labels are integers, passed through as they are:
    the core sorts them, which is ``np.unique`` order)."""
    if labels is None:
        return None, None
    if getattr(labels, "cat", None) is not None and hasattr(labels, "array"):
        labels = labels.array  # a pandas Series of categorical dtype: its Categorical
    codes, cats = getattr(labels, "codes", None), getattr(labels, "categories", None)
    if codes is not None and cats is not None:  # a pandas Categorical
        codes = np.asarray(codes).astype(np.int64)
        bad = np.flatnonzero(codes < 0)
        if bad.size:
            raise ValueError(f"labels: entry {bad[0]} is missing; every point needs a label")
        cats = np.asarray(cats)
        present = np.flatnonzero(np.bincount(codes, minlength=len(cats)))
        remap = np.zeros(len(cats), dtype=np.int64)
        remap[present] = np.arange(present.size)
        return remap[codes], cats[present]
    a = np.asarray(labels)
    if a.ndim != 1:
        # e.g. a list of tuples: one object per point
        if isinstance(labels, (list, tuple)) and a.ndim > 1:
            a = np.empty(len(labels), dtype=object)
            a[:] = list(labels)
        else:
            raise ValueError(f"labels must be 1-D (one label per point), got shape {a.shape}")
    if a.dtype.kind in "iu" and a.dtype.itemsize < 8 or a.dtype.kind == "i":
        return a, None
    if a.dtype.kind == "f":
        bad = np.flatnonzero(np.isnan(a))
        if bad.size:
            raise ValueError(f"labels: entry {bad[0]} is missing (NaN); every point needs a label")
    elif a.dtype.kind == "O":
        for i, v in enumerate(a.tolist()):
            if _missing(v):
                raise ValueError(f"labels: entry {i} is missing ({v!r}); every point needs a label")
    try:
        values, inverse = np.unique(a, return_inverse=True)
    except TypeError:  # values that cannot be sorted together: first appearance
        seen: dict = {}
        try:
            inverse = np.array([seen.setdefault(v, len(seen)) for v in a.tolist()], dtype=np.int64)
        except TypeError as e:
            raise TypeError(f"labels must be hashable values: {e}") from None
        values = np.empty(len(seen), dtype=object)
        values[:] = list(seen)
    return np.asarray(inverse, dtype=np.int64).reshape(-1), values


def _named(keys: np.ndarray, values: Optional[np.ndarray]) -> np.ndarray:
    """The label values of the core's sorted group keys."""
    return keys if values is None else values[keys]


def _call(f: Callable[..., Any], values: Optional[np.ndarray], *args: Any) -> Any:
    """Calls the core; a message about ``label <code>`` names the value."""
    try:
        return f(*args)
    except ValueError as e:
        m = re.match(r"label (-?\d+):(.*)", str(e), re.S)
        if values is None or m is None:
            raise
        raise ValueError(f"label {values.tolist()[int(m.group(1))]!r}:{m.group(2)}") from None


class ConvergenceWarning(RuntimeWarning):
    """The Fréchet mean iteration stopped at ``max_iter`` before reaching ``tol``."""


@dataclass(frozen=True)
class FrechetMean:
    """Result of :func:`frechet_mean`.

    ``mean`` is ``(d,)`` (``(d+1,)`` on the hyperboloid) without labels, or
    ``(n_labels, ...)`` with labels, rows in the order of ``labels`` (the
    label values; see the module docstring).
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
    *,
    weights: Any = None,
    labels: Any = None,
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
    :class:`ConvergenceWarning` and returns the last iterate. Near the rim,
    float64 coordinates cannot place the mean closer than about
    ``2 eps |m| / (1 - |m|^2)`` of hyperbolic distance (one ulp; 1e-7 R at
    ``1 - |m| = 1e-9``): when the Newton step falls below that resolution the
    iterate is final and ``converged`` is True, and ``grad_norm`` reports the
    gradient left at the representable point, which can then exceed ``tol``.
    Deterministic: bit-identical whatever the thread count.
    """
    codes, values = _factorize(labels)
    max_iter = count("max_iter", max_iter, 0)
    mean, keys, it, conv, gn = _call(_native.frechet_mean, values, x, weights, codes, model, curvature, tol, max_iter)
    if _all_f32(x, weights):
        mean = mean.astype(np.float32)
    return _mean_result(mean, it, conv, gn, _named(keys, values) if labels is not None else None, tol, max_iter)


def _mean_result(mean: Any, it: Any, conv: Any, gn: Any, labs: Optional[np.ndarray], tol: float, max_iter: int) -> FrechetMean:
    """The :class:`FrechetMean` of the core's per-group arrays (``labs`` the
    label values, None without labels), warning when a group did not converge."""
    if not bool(np.all(conv)):
        where = f" (labels {list(labs[~conv])[:10]})" if labs is not None else ""
        warnings.warn(
            f"frechet_mean did not reach tol={tol} in max_iter={max_iter} iterations{where}; "
            f"gradient norm {float(np.max(gn)):.3e}",
            ConvergenceWarning,
            stacklevel=3,
        )
    if labs is None:
        return FrechetMean(mean[0], int(it[0]), bool(conv[0]), float(gn[0]), None)
    return FrechetMean(mean, it, conv, gn, labs)


def einstein_midpoint(
    x: Any,
    *,
    weights: Any = None,
    labels: Any = None,
    model: str = "poincare",
    curvature: float = -1.0,
    return_labels: bool = False,
) -> Any:
    """The weighted Einstein midpoint (gyrocentroid) ``sum w γ k / sum w γ`` in the Klein ball.

    Computed from any model and returned in it: ``(d,)`` without labels,
    ``(n_labels, d)`` with labels (rows in ``np.unique(labels)`` order). In
    the Poincaré ball it equals the Möbius gyromidpoint of the points (for
    two points, :func:`gyrokit.poincare.midpoint`). One pass, closed form; a
    good approximation to the Fréchet mean and its starting point.
    ``return_labels=True`` (with ``labels``) returns ``(means, label_values)``.
    """
    codes, values = _factorize(labels)
    mean, keys = _call(_native.einstein_midpoint, values, x, weights, codes, model, curvature)
    if _all_f32(x, weights):
        mean = mean.astype(np.float32)
    if labels is None:
        return mean[0]
    return (mean, _named(keys, values)) if return_labels else mean


@dataclass(frozen=True)
class FrechetVariance:
    """Result of :func:`frechet_variance` with ``labels``: ``variance[i]`` is
    the variance of the points labelled ``labels[i]`` (label values, in the
    order described in the module docstring)."""

    variance: np.ndarray
    labels: np.ndarray


def frechet_variance(
    x: Any,
    center: Any = None,
    *,
    weights: Any = None,
    labels: Any = None,
    model: str = "poincare",
    curvature: float = -1.0,
) -> Union[float, FrechetVariance]:
    """``sum w d(center, x)^2 / sum w``, in units of distance squared.

    ``center=None`` uses the Fréchet mean (of each label's points with
    ``labels``). Without ``labels``, returns a float. With ``labels``,
    returns a :class:`FrechetVariance` (``.variance``, ``.labels``), computed
    in one pass over each label's points; ``center`` is then ``None``, one
    point for every label, or ``(n_labels, width)`` points, one per label in
    the order of ``.labels``. Each label's variance is bit-identical to the
    variance of that label's points alone.
    """
    codes, values = _factorize(labels)
    keys, var = _call(_native.frechet_variance, values, x, center, weights, codes, model, curvature)
    if labels is None:
        return float(var[0])
    return FrechetVariance(var, _named(keys, values))
