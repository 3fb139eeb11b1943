"""Principal geodesic analysis in the tangent space at the Fréchet mean.

The linearised principal geodesic analysis of Fletcher, Lu, Pizer and Joshi
(IEEE Trans. Med. Imaging 23(8), 2004): the data are mapped by the
logarithm at their Fréchet mean ``m`` into the tangent space ``T_m``, and
ordinary principal components are found there. The geodesics
``exp_m(s w)`` along the component directions ``w`` are the principal
geodesics.

Tangent coordinates. The tangent vectors are expressed in an orthonormal
frame of ``T_m`` (Riemannian units: a coordinate vector's Euclidean length
is the hyperbolic distance ``d(m, x)``): the standard frame at the origin,
carried to ``m`` by parallel transport along the geodesic. Klein and
hyperboloid data are analysed in their own model: ``log_m(x)`` (the core's
``log_map``) is transported back to the origin (the core's ``transport``),
where the Klein metric is Euclidean and the hyperboloid's is that of the
spatial coordinates; so far-out hyperboloid data (beyond the Poincaré
ball's float64 range of about 37 R) can be analysed. Poincaré data (and
half-space data, converted to the Poincaré ball, since the half-space has no
log map here) use the conformal metric ``lambda_m^2 <.,.>``,
``lambda_m = 2/(1 - |m|^2/R^2)``: the coordinates of ``log_m(x)`` are
``u = lambda_m log_m(x)``, computed as ``u = 2 log_0((-m) ⊕ x)`` (the Möbius
translation ``p -> (-m) ⊕ p`` is an isometry whose differential at ``m`` is
``(lambda_m/2) I``, no rotation: the transport to the origin), which needs
no rounded ``lambda_m`` for a mean near the rim. The inverse is ``exp_m`` in
the same frame (``x = m ⊕ exp_0(u/2)`` in the Poincaré ball).

No centring: at the Fréchet mean the log vectors average to zero (the
stationarity condition of the mean, up to its tolerance ``grad_norm``), so
the components are those of the second moment about ``m``, and
``explained_variance_`` (normalised by ``n``) sums over all components to
the Fréchet variance ``mean_i d(m, x_i)^2`` (:func:`gyrokit.frechet_variance`).
scikit-learn's ``PCA`` of the same tangent vectors normalises by ``n - 1``.

``transform`` returns points of the ``n_components``-dimensional Poincaré
ball of the same curvature: the component coordinates ``c`` of a point,
mapped by the exponential at that ball's origin, so the origin stands for
the mean and a point's distance from the origin is ``|c| <= d(m, x)``, with
equality when all components are kept; a point farther than about 38 R from
the mean cannot be held by that ball in float64 and raises ``ValueError``
naming the row.
"""

from __future__ import annotations

from typing import Any, Dict

import numpy as np

from ._args import count, real
from .kmeans import UnfittedError

__all__ = ["PrincipalGeodesicAnalysis"]

_MODELS = ("poincare", "klein", "hyperboloid", "halfspace")


def _as_array(name: str, value: Any, dtype: Any = None) -> np.ndarray:
    """``np.asarray(value, dtype)``; an exception from the conversion (an
    object whose ``__array__`` raises, ragged lists, strings for a float
    dtype) becomes a ``TypeError`` naming the argument, as does a conversion
    to a real ``dtype`` that NumPy would make with a loss or a guess
    (complex numbers, strings, dates)."""
    def convert(v: Any, dt: Any) -> np.ndarray:
        try:
            return np.asarray(v, dtype=dt)
        except Exception as e:  # noqa: BLE001 - whatever the caller's object raises
            raise TypeError(f"{name} must be an array of real numbers: {type(e).__name__}: {e}") from None

    raw = convert(value, None)
    # the dtype is judged before converting (NumPy warns when a conversion
    # drops the imaginary parts of complex numbers)
    if dtype is not None and raw.dtype.kind not in "biufO":
        raise TypeError(f"{name} must be an array of real numbers, got dtype {raw.dtype}")
    return raw if dtype is None else convert(raw, dtype)


def _hub_of(model: str) -> str:
    """The model an analysis runs in: the input's, except the half-space
    (which has no log map of its own), handled in the Poincaré ball."""
    return "poincare" if model == "halfspace" else model


def _origin_of(hub: str, d: int, k: float) -> np.ndarray:
    o = np.zeros(d + (1 if hub == "hyperboloid" else 0))
    if hub == "hyperboloid":
        o[0] = 1.0 / np.sqrt(-k)
    return o


def _tangent_at(P: np.ndarray, base: np.ndarray, hub: str, d: int, k: float) -> np.ndarray:
    """Orthonormal (Riemannian) coordinates ``(n, d)`` of ``log_base(P)``, in the
    frame at ``base`` transported from the standard frame at the origin (see
    the module notes); ``P`` and ``base`` points of ``hub``."""
    from . import hyperboloid, klein, poincare

    if P.shape[0] == 0:
        return np.zeros((0, d))
    if hub == "poincare":
        # 2 log_0((-m) ⊕ x): the translation's differential is (lambda_m/2) I
        return 2.0 * np.asarray(poincare.log_map(poincare.add(-base, P, curvature=k), curvature=k), dtype=np.float64)
    # log at the base, carried to the origin by parallel transport; there the
    # Klein metric is Euclidean and the hyperboloid's that of the spatial part
    mod = klein if hub == "klein" else hyperboloid
    v = mod.log_map(P, base, curvature=k)
    w = np.asarray(mod.transport(v, base, _origin_of(hub, d, k), curvature=k), dtype=np.float64)
    return w[:, 1:] if hub == "hyperboloid" else w


def _exp_at(U: np.ndarray, base: np.ndarray, hub: str, d: int, k: float) -> np.ndarray:
    """Points of ``hub``: ``exp_base`` of orthonormal coordinates ``U`` (the inverse of ``_tangent_at``)."""
    from . import hyperboloid, klein, poincare

    if hub == "poincare":
        return np.asarray(poincare.add(base, poincare.exp_map(U / 2.0, curvature=k), curvature=k), dtype=np.float64)
    mod = klein if hub == "klein" else hyperboloid
    if hub == "hyperboloid":
        U = np.concatenate([np.zeros((U.shape[0], 1)), U], axis=1)
    v = mod.transport(U, _origin_of(hub, d, k), base, curvature=k)
    return np.asarray(mod.exp_map(v, base, curvature=k), dtype=np.float64)


class PrincipalGeodesicAnalysis:
    """Principal geodesic analysis (tangent-space, at the Fréchet mean).

    Parameters
    ----------
    n_components : int, default 2
        Number of principal geodesics kept (1 <= n_components <= d).
    model : {"poincare", "klein", "hyperboloid", "halfspace"}
        Model of the input points (and of ``mean_`` and ``inverse_transform``).
    curvature : float, default -1.0
        Sectional curvature K < 0, of the input and of the output ball.

    Attributes
    ----------
    mean_ : (width,) the Fréchet mean, in ``model``.
    components_ : (n_components, d) orthonormal rows: the principal directions
        in the orthonormal tangent frame at the mean (see the module notes),
        by decreasing variance; the sign of each row makes its entry of
        largest magnitude positive.
    explained_variance_ : (n_components,) the variance (mean squared
        coordinate, normalised by n) along each component, in units of
        distance squared.
    explained_variance_ratio_ : (n_components,) the same over the total (the
        Fréchet variance); zeros when all points coincide.
    singular_values_ : (n_components,) of the tangent-coordinate matrix.
    n_components_ : int.
    n_features_in_ : int, width of the points seen in ``fit``.
    """

    _PARAM_NAMES = ("n_components", "model", "curvature")

    def __init__(self, n_components: int = 2, *, model: str = "poincare", curvature: float = -1.0) -> None:
        self.n_components = n_components
        self.model = model
        self.curvature = curvature

    # ------------------------------------------------------------------ params
    def get_params(self, deep: bool = True) -> Dict[str, Any]:
        """The constructor parameters as a dict."""
        return {name: getattr(self, name) for name in self._PARAM_NAMES}

    def set_params(self, **params: Any) -> "PrincipalGeodesicAnalysis":
        """Sets constructor parameters; unknown names raise ``ValueError``."""
        for name, value in params.items():
            if name not in self._PARAM_NAMES:
                raise ValueError(
                    f"invalid parameter {name!r} for PrincipalGeodesicAnalysis; valid parameters: {list(self._PARAM_NAMES)}"
                )
            setattr(self, name, value)
        return self

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.get_params().items())
        return f"PrincipalGeodesicAnalysis({args})"

    def _check_params(self) -> float:
        count("n_components", self.n_components, 1)
        if not isinstance(self.model, str) or self.model not in _MODELS:
            raise ValueError(f"model must be one of {list(_MODELS)}, got {self.model!r}")
        k = real("curvature", self.curvature)
        if not (np.isfinite(k) and k < 0):
            raise ValueError(f"curvature must be finite and < 0, got {self.curvature!r}")
        return k

    # ------------------------------------------------------------------ data
    @staticmethod
    def _array(X: Any, name: str) -> np.ndarray:
        a = _as_array(name, X)
        if a.dtype.kind not in "biuf":
            raise TypeError(f"{name} must be an array of real numbers, got dtype {a.dtype}")
        if a.ndim != 2:
            raise ValueError(f"{name} must be a 2-D array of points (n, width); got shape {a.shape}")
        return np.ascontiguousarray(a, dtype=np.float64)

    def _hub(self) -> str:
        return _hub_of(self.model)

    def _points(self, X: Any, name: str, k: float) -> np.ndarray:
        """``X`` (points of ``model``) as validated float64 points of the hub model."""
        from . import convert

        a = self._array(X, name)
        if a.shape[0] == 0:
            return a
        try:
            return np.asarray(convert(a, self.model, self._hub(), curvature=k), dtype=np.float64)
        except ValueError as e:
            raise ValueError(f"{name} is not a valid array of {self.model} points: {e}") from None

    def _tangent(self, P: np.ndarray, k: float) -> np.ndarray:
        """Orthonormal tangent coordinates at the mean."""
        return _tangent_at(P, self._mean_h, self._hub(), self._d, k)

    def _from_tangent(self, U: np.ndarray, k: float) -> np.ndarray:
        """Points of the hub model: ``exp_m`` of orthonormal tangent coordinates at the mean."""
        return _exp_at(U, self._mean_h, self._hub(), self._d, k)

    # ------------------------------------------------------------------ API
    def fit(self, X: Any, y: Any = None) -> "PrincipalGeodesicAnalysis":
        """Finds the Fréchet mean and principal directions of ``X``; returns ``self``."""
        from . import convert, frechet_mean

        k = self._check_params()
        X = self._array(X, "X")
        P = self._points(X, "X", k)
        n = P.shape[0]
        d = P.shape[1] - (1 if self._hub() == "hyperboloid" else 0)
        if n == 0:
            raise ValueError("X is empty: principal geodesic analysis needs at least one point")
        nc = int(self.n_components)
        if nc > d:
            raise ValueError(f"n_components={nc} is larger than the dimension of the points (d = {d})")
        self._d = d
        self._mean_h = np.asarray(frechet_mean(P, model=self._hub(), curvature=k).mean, dtype=np.float64)
        U = self._tangent(P, k)
        _, s, vt = np.linalg.svd(U, full_matrices=True)
        s = np.concatenate([s, np.zeros(d - s.size)])  # n < d: the missing directions carry no variance
        # Deterministic signs: the largest-magnitude entry of each direction is positive.
        big = np.argmax(np.abs(vt), axis=1)
        vt = vt * np.where(vt[np.arange(d), big] < 0, -1.0, 1.0)[:, None]
        var = s**2 / n
        total = float(np.sum(var))
        self.components_ = vt[:nc].copy()
        self.singular_values_ = s[:nc].copy()
        self.explained_variance_ = var[:nc].copy()
        self.explained_variance_ratio_ = var[:nc] / total if total > 0 else np.zeros(nc)
        self.n_components_ = nc
        self.n_features_in_ = int(X.shape[1])
        self._curvature = k
        self.mean_ = np.asarray(convert(self._mean_h, self._hub(), self.model, curvature=k), dtype=np.float64)
        return self

    def _check_fitted(self, what: str) -> float:
        if not hasattr(self, "components_"):
            raise UnfittedError(
                f"PrincipalGeodesicAnalysis.{what} needs the fitted mean and components, and this estimator has "
                "none yet: run fit(X) first"
            )
        return self._curvature

    def transform(self, X: Any) -> np.ndarray:
        """Points of the ``n_components``-dimensional Poincaré ball, ``(n, n_components)``.

        The coordinates ``c = u @ components_.T`` of each point's tangent
        vector ``u`` at the mean, mapped by ``exp`` at the origin of that ball
        (so ``distance(0, result) = |c|``).
        """
        from . import poincare

        k = self._check_fitted("transform")
        a = self._array(X, "X")
        if a.shape[1] != self.n_features_in_:
            raise ValueError(
                f"X has {a.shape[1]} coordinates per point but PrincipalGeodesicAnalysis was fitted with "
                f"{self.n_features_in_}"
            )
        P = self._points(a, "X", k)
        C = self._tangent(P, k) @ self.components_.T
        if C.shape[0] == 0:
            return C
        return np.asarray(poincare.exp_map(C / 2.0, curvature=k), dtype=np.float64)

    def fit_transform(self, X: Any, y: Any = None) -> np.ndarray:
        """``fit(X)`` and return ``transform(X)``."""
        return self.fit(X).transform(X)

    def inverse_transform(self, Z: Any) -> np.ndarray:
        """Points of ``model`` from points ``Z`` of the ``n_components``-ball.

        ``Z``'s component coordinates ``c = 2 log_0(Z)`` give the tangent
        vector ``c @ components_`` at the mean, mapped back by ``exp`` at the
        mean. For ``Z = transform(X)`` this is the projection of ``X`` onto
        the principal geodesic subspace (``X`` itself when all components are
        kept).
        """
        from . import convert, poincare

        k = self._check_fitted("inverse_transform")
        z = self._array(Z, "Z")
        if z.shape[1] != self.n_components_:
            raise ValueError(
                f"Z has {z.shape[1]} coordinates per point but there are n_components_ = {self.n_components_} components"
            )
        if z.shape[0] == 0:
            return np.zeros((0, self.n_features_in_))
        try:
            C = 2.0 * np.asarray(poincare.log_map(z, curvature=k), dtype=np.float64)
        except ValueError as e:
            raise ValueError(f"Z is not a valid array of points of the {self.n_components_}-dimensional Poincaré ball: {e}") from None
        P = self._from_tangent(C @ self.components_, k)
        return np.asarray(convert(P, self._hub(), self.model, curvature=k), dtype=np.float64)
