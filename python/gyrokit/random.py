"""Sampling in hyperbolic space: the wrapped normal distribution and the
uniform distribution on a hyperbolic ball, in every model.

Randomness: ``seed`` is ``None`` (fresh entropy from the operating system),
an ``int`` (reproducible), or a ``numpy.random.Generator`` (one 64-bit seed
is drawn from it, so successive calls differ while the whole script stays
reproducible), as ``numpy.random.default_rng`` takes it; this is the rule of
:class:`gyrokit.KMeans` ``random_state`` too. The samples are drawn in the
Rust core (xoshiro256**, Blackman & Vigna 2018) in chunks of 1024 points,
each chunk from its own non-overlapping stream, so the result depends on the
seed only, never on the number of threads. The streams are not NumPy's: the
same seed gives different numbers from ``numpy.random``.

Samples are float64 arrays of shape ``size + (w,)`` (``w = d + 1`` on the
hyperboloid, ``d`` otherwise). Points beyond what a ball model holds in
float64 (farther than about 37 R from the origin in the Poincaré ball, 18 R
in Klein) raise ``ValueError``; draw such distributions with
``model="hyperboloid"``.
"""

from __future__ import annotations

import math
from typing import Any, Tuple, Union

import numpy as np

from . import _args, _native

__all__ = ["wrapped_normal", "wrapped_normal_logpdf", "uniform_ball"]


def _seed64(seed: Any) -> int:
    if isinstance(seed, (bool, np.bool_)):
        raise TypeError("seed must be None, an int or a numpy.random.Generator, got a bool")
    if seed is not None and not isinstance(seed, (int, np.integer, np.random.Generator)):
        raise TypeError(f"seed must be None, an int or a numpy.random.Generator, got {type(seed).__name__}")
    if isinstance(seed, (int, np.integer)) and seed < 0:
        raise ValueError(f"seed must be non-negative, got {seed}")
    rng = np.random.default_rng(seed)
    return int(rng.integers(0, 2**64, dtype=np.uint64))


def _size(size: Any) -> Tuple[int, ...]:
    if isinstance(size, tuple):
        shape = tuple(_args.count("size", s, 0) for s in size)
    else:
        shape = (_args.count("size", size, 0),)
    if math.prod(shape) > _args.INT_MAX:
        raise ValueError(f"size {shape} is too large")
    return shape


def _model(model: Any) -> str:
    if not isinstance(model, str):
        raise TypeError(f"model must be a str, got {type(model).__name__}")
    return model


def _cov(cov: Any, mean: Any, model: str) -> Any:
    """A scalar variance or a (d,) diagonal becomes the (d, d) matrix."""
    c = np.asarray(cov)
    if c.ndim == 2:
        return cov
    w = np.shape(mean)[-1] if np.ndim(mean) >= 1 else 0
    d = w - 1 if model == "hyperboloid" else w
    if c.ndim == 0:
        if c.dtype.kind not in "fiu":
            raise TypeError(f"cov must be real numbers, got dtype {c.dtype}")
        return np.eye(max(d, 0)) * float(c)
    if c.ndim == 1:
        if c.dtype.kind not in "fiu":
            raise TypeError(f"cov must be real numbers, got dtype {c.dtype}")
        if c.shape[0] != d:
            raise ValueError(f"cov as a diagonal must have length d = {d}, got {c.shape[0]}")
        return np.diag(c.astype(np.float64))
    raise ValueError(f"cov must be a scalar, a (d,) diagonal or a (d, d) matrix; got shape {c.shape}")


def wrapped_normal(
    mean: Any,
    cov: Any,
    size: Union[int, Tuple[int, ...]] = 1,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    seed: Any = None,
) -> np.ndarray:
    """Samples of the wrapped normal distribution (Nagano et al. 2019).

    ``z ~ N(0, cov)`` in the tangent space at the origin, in orthonormal
    (intrinsic, Riemannian) coordinates along the coordinate axes at the
    model's origin (the centre of the Poincaré and Klein balls, ``(R, 0,
    ..., 0)`` on the hyperboloid, ``(0, ..., 0, R)`` in the half-space), is
    carried to ``mean`` by parallel transport along the geodesic from the
    origin and mapped by ``exp_mean``: ``|z|`` is the distance of the sample
    from ``mean``. The same distribution in every model (the models are
    isometric).

    mean : one point of ``model``, shape ``(w,)`` (``w = d + 1`` on the
        hyperboloid).
    cov : a scalar variance, a ``(d,)`` diagonal or a symmetric positive
        definite ``(d, d)`` matrix, in units of distance squared.
    size : int or tuple; the result has shape ``size + (w,)``, float64.
    seed : None, int or numpy.random.Generator (see the module notes).
    """
    m = _model(model)
    c = _cov(cov, mean, m)
    shape = _size(size)
    n = math.prod(shape)
    out = _native.wrapped_normal(mean, c, n, m, _args.real("curvature", curvature), _seed64(seed))
    return out.reshape(shape + (out.shape[-1],))


def wrapped_normal_logpdf(
    x: Any, mean: Any, cov: Any, *, model: str = "poincare", curvature: float = -1.0
) -> Any:
    """Log-density of the wrapped normal with respect to the Riemannian volume.

    Signature ``(..., w) -> (...)``. With ``z`` the intrinsic coordinates of
    ``log_mean(x)`` carried back to the origin, ``r = |z| = d(mean, x)``::

        log p(x) = log N(z; 0, cov) - (d - 1) log(sinh(r/R) / (r/R))

    (the normal density divided by the volume factor of the exponential map
    in geodesic polar coordinates). ``mean`` and ``cov`` as in
    :func:`wrapped_normal`.
    """
    m = _model(model)
    return _native.wrapped_normal_logpdf(x, mean, _cov(cov, mean, m), m, _args.real("curvature", curvature))


def uniform_ball(
    radius: float,
    size: Union[int, Tuple[int, ...]] = 1,
    dim: int = 2,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    seed: Any = None,
) -> np.ndarray:
    """Points uniform (for the Riemannian volume) in the hyperbolic ball of
    ``radius`` about the model's origin.

    ``radius`` is a distance in the metric of ``curvature``; the distance
    from the origin has density proportional to ``sinh(r/R)^(dim - 1)`` on
    ``[0, radius]`` and the direction is uniform. The radial law is drawn
    exactly (rejection from closed-form proposals, no numerical CDF
    inversion), for any radius and dimension. Result: float64, shape
    ``size + (w,)`` with ``w = dim + 1`` on the hyperboloid, ``dim``
    otherwise. The Poincaré ball holds radii up to about 37 R (Klein 18 R,
    hyperboloid spatial coordinates up to 2^250, half-space coordinates within
    2^-250..2^250, both about 173 R when R = 1); beyond, a ``ValueError``.
    """
    m = _model(model)
    shape = _size(size)
    n = math.prod(shape)
    d = _args.count("dim", dim, 1)
    out = _native.uniform_ball(
        _args.real("radius", radius), n, d, m, _args.real("curvature", curvature), _seed64(seed)
    )
    return out.reshape(shape + (out.shape[-1],))
