"""k-means clustering in hyperbolic space (Lloyd's algorithm with Fréchet means).

:class:`KMeans` follows the usual estimator conventions (``fit`` returns
``self``, fitted attributes end in ``_``, ``get_params``/``set_params``).
It works directly in the coordinates of the input model (``"poincare"``,
``"klein"``, ``"hyperboloid"`` or ``"halfspace"``): distances are exact
hyperbolic distances and cluster centres are Fréchet means, so the result
does not depend on the model the data is given in (up to rounding).

Algorithm (per run; the best of ``n_init`` runs by inertia is kept):

1. Seeding. ``init="k-means++"`` (greedy k-means++): the first centre is a
   uniformly chosen point; for each further centre, ``2 + floor(ln
   n_clusters)`` candidate points are drawn, each with probability
   proportional to its squared hyperbolic distance to the nearest centre
   chosen so far (D^2 sampling, Arthur & Vassilvitskii 2007), and the
   candidate that leaves the smallest sum of those squared distances is
   kept (the greedy variant the same paper suggests; the candidate count
   is scikit-learn's). Plain D^2 sampling tends to pick far outliers in
   hyperbolic data, whose volume grows exponentially with the radius (on
   the benchmark's taxonomy it left seven of ten clusters with a single
   point); the greedy choice seeds clusters of many points and lower
   inertia, in fewer Lloyd iterations. If every point already coincides
   with a centre, the next one is drawn uniformly from the points not
   chosen yet. ``init="random"``: ``n_clusters`` distinct points chosen
   uniformly. An ``(n_clusters, width)`` array: those centres (then a
   single run).
2. Assignment: every point goes to its nearest centre by exact hyperbolic
   distance, ties to the lower centre index (the ranking and the distances
   of :func:`gyrokit.knn`).
3. Empty clusters (a centre with no points, e.g. duplicate centres):
   handled deterministically, in increasing cluster index. Among the points
   whose cluster holds at least two points, the one farthest from its
   centre (lowest index on ties) is moved into the empty cluster and
   becomes its centre. This never raises the inertia and never empties
   another cluster.
4. Update: every centre whose points changed becomes the Fréchet mean of
   its points, by the Newton iteration of :func:`gyrokit.frechet_mean`
   started at the previous centre (the others stay); these intermediate
   centres stop after a Newton step shorter than 1e-5 R (they are then
   within about 1e-10 R of the mean). A cluster's first step costs no pass
   over the data once it has been updated before: it takes the Hessian of
   its last update and the statistics of the points that moved in or out. The centres of
   the last update are recomputed exactly as
   ``frechet_mean(X, labels=...)`` computes them (from the Einstein
   midpoint, to its default tolerance), so ``cluster_centers_`` depends only
   on the final clusters.
5. Repeat 2-4 until the labels stop changing, or the squared hyperbolic
   movement of the centres ``sum_j d(c_j, c_j')^2`` is at most ``tol``
   times the data's spread, or ``max_iter`` updates were made. The spread
   is the mean squared hyperbolic distance of the points to their Einstein
   midpoint divided by the dimension ``d`` (computed once per fit): the
   hyperbolic counterpart of the mean per-feature variance by which
   scikit-learn's Euclidean ``KMeans`` scales its ``tol``, so the same
   ``tol`` (default ``1e-4`` in both) stops at a comparable stage; where
   the Euclidean rule measures centre movement in the coordinates, this one
   measures it along the hyperbolic metric, so it means the same in every
   model and at any radius. ``tol=0`` runs until the labels stop changing
   (or ``max_iter``). A final assignment makes ``labels_`` and ``inertia_``
   consistent with ``cluster_centers_``.

The whole fit runs in the native core in one call: the points are read and
validated once, every step uses all cores, and the result is bit-identical
for any number of threads.

Randomness: ``random_state`` feeds ``numpy.random.default_rng``, which draws
one 64-bit seed per run (``n_init`` draws; none for an array ``init``). Each
run's seeding then uses its own xoshiro256** generator (Blackman & Vigna
2018) started from that seed by SplitMix64. So an int gives reproducible
results, and ``n_init`` fits on one shared ``Generator`` replay the runs of
one ``n_init``-run fit.

If the final assignment leaves a centre without points (possible only when
iteration stops on ``tol`` or ``max_iter``), that centre is kept as it is.
Computation is in float64 and ``cluster_centers_`` is float64 whatever the
input dtype.

The inertia (sum of squared hyperbolic distances to the assigned centre)
never rises: for fixed labels the Fréchet mean minimises each cluster's sum,
the empty-cluster repair only lowers it, and reassignment to the nearest
centre never increases it. ``inertia_history_`` records it after every
assignment of the kept run (``inertia_history_[-1] == inertia_``).
"""

from __future__ import annotations

from typing import Any, Dict, Optional, Tuple

import numpy as np

from ._args import count
from . import _native
from .neighbors import distance_matrix, knn

__all__ = ["KMeans", "UnfittedError"]

_MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
_INITS = ("k-means++", "random")


class UnfittedError(ValueError, AttributeError):
    """A method that needs the results of ``fit`` (the cluster centres) was
    called on an estimator that has none yet."""


_int_param = count


class KMeans:
    """k-means clustering with hyperbolic distances and Fréchet-mean centres.

    Parameters
    ----------
    n_clusters : int, default 8
        Number of clusters (1 <= n_clusters <= number of points).
    model : {"poincare", "klein", "hyperboloid", "halfspace"}
        Model the points (and the returned centres) are given in.
    curvature : float, default -1.0
        Sectional curvature K < 0.
    init : "k-means++", "random" or array (n_clusters, width)
        Seeding; see the module docstring.
    n_init : int or "auto", default "auto"
        Number of seeded runs; the one with the lowest inertia is kept
        (ignored, i.e. 1, when ``init`` is an array). ``"auto"``: 1 run with
        ``init="k-means++"``, 10 with ``init="random"`` (the rule of
        scikit-learn's default ``n_init="auto"``). One k-means++ run can end
        in a local optimum that merges two separated clusters; ``n_init=4``
        or more rarely keeps one, at that many times the cost. Cost of one
        run, 10 clusters, against scikit-learn's Euclidean ``KMeans`` with
        the same parameters (``benches/bench_kmeans.py --seeds 10``, figures
        in the README; NumPy's BLAS at one thread): with two threads each,
        times summed over ten seeds, 1.6 to 1.9 times its time on 36 607
        points at d = 10, and 1.3 to 1.5 times on 1 000 000 points at d = 2
        (one seed); with one thread each 2.3 to 2.8 and 1.8 to 2.3 times.
        Hyperbolic Lloyd also takes more iterations than Euclidean Lloyd on
        these data (27.6 against 19.3 on average with ``tol=0``).
    max_iter : int, default 100
        Maximum number of Lloyd updates per run.
    tol : float, default 1e-4
        Stop when the summed squared hyperbolic centre movement of an update,
        ``sum_j d(c_j, c_j')^2``, is at most ``tol`` times the data's spread
        (see the module docstring; 0: only when the labels stop changing).
    random_state : None, int or numpy.random.Generator
        Source of randomness (``numpy.random.default_rng(random_state)``);
        an int gives reproducible results.

    Attributes
    ----------
    cluster_centers_ : (n_clusters, width) array, in the input model.
    labels_ : (n,) int64 array, index of each point's nearest centre.
    inertia_ : float, sum of squared hyperbolic distances to the assigned centre.
    n_iter_ : int, number of Lloyd updates of the kept run.
    inertia_history_ : list of float, inertia after every assignment of the kept run.
    n_features_in_ : int, width of the points seen in ``fit``.
    """

    def __init__(
        self,
        n_clusters: int = 8,
        *,
        model: str = "poincare",
        curvature: float = -1.0,
        init: Any = "k-means++",
        n_init: Any = "auto",
        max_iter: int = 100,
        tol: float = 1e-4,
        random_state: Any = None,
    ) -> None:
        self.n_clusters = n_clusters
        self.model = model
        self.curvature = curvature
        self.init = init
        self.n_init = n_init
        self.max_iter = max_iter
        self.tol = tol
        self.random_state = random_state

    # ------------------------------------------------------------------ params
    _PARAM_NAMES = ("n_clusters", "model", "curvature", "init", "n_init", "max_iter", "tol", "random_state")

    def get_params(self, deep: bool = True) -> Dict[str, Any]:
        """The constructor parameters as a dict."""
        return {name: getattr(self, name) for name in self._PARAM_NAMES}

    def set_params(self, **params: Any) -> "KMeans":
        """Sets constructor parameters; unknown names raise ``ValueError``."""
        for name, value in params.items():
            if name not in self._PARAM_NAMES:
                raise ValueError(f"invalid parameter {name!r} for KMeans; valid parameters: {list(self._PARAM_NAMES)}")
            setattr(self, name, value)
        return self

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.get_params().items() if not isinstance(v, np.ndarray))
        return f"KMeans({args})"

    def _check_params(self) -> None:
        _int_param("n_clusters", self.n_clusters, 1)
        if isinstance(self.n_init, str):
            if self.n_init != "auto":
                raise ValueError(f"n_init must be an integer >= 1 or 'auto', got {self.n_init!r}")
        else:
            _int_param("n_init", self.n_init, 1)
        _int_param("max_iter", self.max_iter, 1)
        if not isinstance(self.model, str) or self.model not in _MODELS:
            raise ValueError(f"model must be one of {list(_MODELS)}, got {self.model!r}")
        try:
            k = float(self.curvature)
        except (TypeError, ValueError):
            raise TypeError(f"curvature must be a number, got {self.curvature!r}") from None
        if not (np.isfinite(k) and k < 0):
            raise ValueError(f"curvature must be finite and < 0, got {self.curvature!r}")
        try:
            tol = float(self.tol)
        except (TypeError, ValueError):
            raise TypeError(f"tol must be a number, got {self.tol!r}") from None
        if not tol >= 0:
            raise ValueError(f"tol must be >= 0, got {self.tol!r}")
        if isinstance(self.init, str):
            if self.init not in _INITS:
                raise ValueError(f"init must be one of {list(_INITS)} or an array of centres, got {self.init!r}")

    def _runs(self) -> int:
        """The number of seeded runs (``n_init``, with "auto" resolved)."""
        if isinstance(self.n_init, str):
            return 1 if self.init == "k-means++" else 10
        return int(self.n_init)

    # ------------------------------------------------------------------ data
    def _array(self, X: Any, name: str = "X") -> np.ndarray:
        """``X`` as a float64/float32 (n, width) array, shape and dtype checked
        (the point values are validated by the core, in the same pass that
        reads them)."""
        a = np.asarray(X)
        if a.dtype.kind not in "biuf":
            raise TypeError(f"{name} must be an array of real numbers, got dtype {a.dtype}")
        if a.dtype not in (np.float64, np.float32):
            a = a.astype(np.float64)
        if a.ndim != 2:
            raise ValueError(f"{name} must be a 2-D array of points (n, width); got shape {a.shape}")
        if a.shape[0] == 0:
            raise ValueError(f"{name} is empty: k-means needs at least one point")
        return a

    def _points(self, X: Any, name: str = "X") -> np.ndarray:
        """``X`` as a validated float64 (n, width) array of the model's points."""
        a = np.ascontiguousarray(self._array(X, name), dtype=np.float64)
        try:
            # One validating pass (NaN/inf, outside the ball, off the hyperboloid, ...).
            _native.einstein_midpoint(a, None, None, self.model, float(self.curvature))
        except ValueError as e:
            raise ValueError(f"{name} is not a valid array of {self.model} points: {e}") from None
        return a

    def _assign(self, X: np.ndarray, centers: np.ndarray) -> Tuple[np.ndarray, np.ndarray]:
        """Nearest centre (ties to the lower index) and its distance, per point."""
        idx, dist = knn(X, 1, centers, model=self.model, curvature=float(self.curvature))
        return idx[:, 0], dist[:, 0]

    # ------------------------------------------------------------------ seeding
    def _kmeanspp(self, X: Any, rng: np.random.Generator, trials: Optional[int] = None) -> np.ndarray:
        """The k-means++ centres the core would seed a run with, for one seed
        drawn from ``rng`` (the seeding alone, for inspection and tests);
        ``trials`` candidates per centre (default: the fit's greedy count;
        1: plain D^2 sampling)."""
        X = self._array(X)
        seed = int(rng.integers(0, 2**64, dtype=np.uint64))
        idx = _native.kmeans_plusplus(X, int(self.n_clusters), seed, self.model, float(self.curvature), trials)
        return np.array(X[idx], dtype=np.float64)

    # ------------------------------------------------------------------ API
    def fit(self, X: Any, y: Any = None) -> "KMeans":
        """Clusters ``X`` ((n, width) points of ``model``); returns ``self``."""
        self._check_params()
        X = self._array(X)
        n, k = X.shape[0], int(self.n_clusters)
        if k > n:
            raise ValueError(f"n_clusters={k} is larger than the number of points ({n})")
        if isinstance(self.init, str):
            init, given = self.init, None
            rng = np.random.default_rng(self.random_state)
            # One seed per run, drawn in turn (see the module docstring).
            seeds = [int(rng.integers(0, 2**64, dtype=np.uint64)) for _ in range(self._runs())]
        else:
            given = self._array(self.init, "init")
            if given.shape != (k, X.shape[1]):
                raise ValueError(f"init must have shape (n_clusters, width) = {(k, X.shape[1])}; got {given.shape}")
            init, seeds = "given", []
        centers, labels, inertia, n_iter, history = _native.kmeans_fit(
            X, k, init, given, seeds, int(self.max_iter), float(self.tol), self.model, float(self.curvature)
        )
        self.cluster_centers_ = centers
        self.labels_ = labels.astype(np.int64, copy=False)
        self.inertia_ = float(inertia)
        self.n_iter_ = int(n_iter)
        self.inertia_history_ = list(history)
        self.n_features_in_ = X.shape[1]
        return self

    def _check_fitted(self, X: Any, what: str) -> np.ndarray:
        if not hasattr(self, "cluster_centers_"):
            raise UnfittedError(f"KMeans.{what} needs cluster centres, and this KMeans has none yet: run fit(X) first")
        X = self._points(X)
        if X.shape[1] != self.n_features_in_:
            raise ValueError(f"X has {X.shape[1]} coordinates per point but KMeans was fitted with {self.n_features_in_}")
        return X

    def predict(self, X: Any) -> np.ndarray:
        """Index of the nearest cluster centre of each point (ties to the lower index)."""
        X = self._check_fitted(X, "predict")
        return self._assign(X, self.cluster_centers_)[0]

    def fit_predict(self, X: Any, y: Any = None) -> np.ndarray:
        """``fit(X)`` and return ``labels_``."""
        return self.fit(X).labels_

    def transform(self, X: Any) -> np.ndarray:
        """Hyperbolic distances from each point to each centre, ``(n, n_clusters)``."""
        X = self._check_fitted(X, "transform")
        return distance_matrix(X, self.cluster_centers_, model=self.model, curvature=float(self.curvature))

    def fit_transform(self, X: Any, y: Any = None) -> np.ndarray:
        """``fit(X)`` and return ``transform(X)``."""
        return self.fit(X).transform(X)

    def score(self, X: Any, y: Any = None) -> float:
        """Minus the inertia of ``X`` about the fitted centres (higher is better)."""
        X = self._check_fitted(X, "score")
        dist = self._assign(X, self.cluster_centers_)[1]
        return -float(np.dot(dist, dist))

