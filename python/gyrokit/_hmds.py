"""Hyperbolic multidimensional scaling (h-MDS; Sala, De Sa, Gu and Ré 2018):
points whose pairwise distances reproduce a distance table.

Derivation (our own, on the hyperboloid of radius R, ``<x, x> = -R^2``):
pick a base point b and move it to ``(R, 0, ..., 0)`` by an isometry. Then
every point is ``x_i = (R cosh a_i, s_i)`` with ``a_i = D[b, i]/R`` and
``|s_i| = R sinh a_i``, and ``cosh(D_ij/R) = -<x_i, x_j>/R^2`` gives the Gram
matrix of the spatial parts,

    s_i . s_j / R^2 = cosh a_i cosh a_j - cosh c_ij,    c_ij = D_ij/R.

Written this way it cancels badly (both terms grow like ``e^(a_i + a_j)``
while their difference can be far smaller); with ``cosh x - cosh y =
2 sinh((x+y)/2) sinh((x-y)/2)`` it becomes

    G_ij = sinh a_i sinh a_j - 2 sinh((c + a_i - a_j)/2) sinh((c - a_i + a_j)/2),

an identity for any numbers, in which both terms are products of
accurately computed factors (the half-sums are formed from the given
distances, never from their cosh). For distances of points of H^dim, G is
positive semi-definite of rank dim; its leading dim eigenpairs give
``s = R U sqrt(lambda)`` and ``x_0 = sqrt(R^2 + |s|^2)``. The base point is
the 1-centre of the table (the row with the smallest largest distance),
which keeps the ``a_i``, and so the size of ``G`` relative to its finest
detail, as small as the data allows.

The eigenproblem is LAPACK's (``scipy.linalg.eigh``, only the leading
eigenpairs): a dense symmetric eigensolver is what LAPACK does best, and a
re-write in the core would be slower and less tested. The O(n^2) Gram
matrix is element-wise NumPy work; the conversion to the requested model is
the core's (``gyrokit.convert``).

float64 limits (what any coordinates can hold): a hyperboloid point ``a R``
from the origin has spatial coordinates of size ``R sinh a``, spaced ``u R
sinh a`` apart (u = 2^-53), and moving it across its radius by ``delta``
moves it by ``delta`` in hyperbolic distance; so a pair ``d`` apart there
is held to about ``u sinh(a) R / d`` relative at best, whatever the
algorithm. Two refinements reach that grid:

1. The frame. The eigensolver resolves ``G`` to ``eps`` times its largest
   entries, about ``e^(2a)``: its base point is the 1-centre, which keeps
   ``a`` smallest. The result is then moved to the row ``f`` minimising
   ``max_i sinh(D[f, i]/R) / m_i`` (``m_i`` the distance from ``i`` to its
   nearest other point): the origin that loses the fewest digits on the
   finest detail of the table, usually a point of its tightest cluster. The
   boost is applied to differences, ``L x_i = L (x_i - x_f) + (R, 0)``, with
   ``s_i - s_f`` exact for nearby points and ``x0_i - x0_f = (s_i - s_f).(s_i
   + s_f) / (x0_i + x0_f)``, so offsets near ``f`` keep about ``eps e^(2a)``
   relative.
2. A Gauss-Newton polish. The eigensolver cannot give a 1e-8 R pair beside
   a 10 R one its digits (``G``'s error is normwise), but the table has
   them: the pairs reproduced worse than 2^-36 relative are refined, by
   Gauss-Newton steps on the relative residuals ``(d_ij - D_ij) / D_ij`` of
   every pair touching their points (residuals from the core's exact
   distance, the Jacobian ``(ds - dx0 s_i/x0_i) / (R sinh(d/R))`` from the
   chord ``|x_i - x_j|_L = 2R sinh(d/2R)``), the points in groups (connected
   components of the pairs to refine, cut at ``640/dim`` points), the
   others fixed; each group's least-squares problem is solved by LAPACK's
   column-pivoted QR (rows sorted by decreasing norm) after compressing the
   rows towards fixed points by a QR per point (the weights span many orders
   of magnitude, which normal equations would square), with a Levenberg-Marquardt term ``2^-20 / m_i`` per point:
   seen from far out, a tight cluster's sideways translation changes its
   distances to the rest only at second order, and an undamped step along
   it destroys the cluster. Up to 8 sweeps, while the worst pair improves
   by half; the best result is kept. The polish runs only for a table from
   H^dim: when ``G``'s (dim+1)-th eigenvalue is below 2^-30 times its
   largest, or the eigensolver's result already holds at least half of the
   pairs to 2^-30; other tables keep the rank-``dim`` Gram approximation of
   h-MDS.

Measured on 36-point sets of H^2, H^5 and H^10 (50-digit mpmath distances
of the float64 output): every pair to 1.5e-11 (2^-36) relative or better with
clusters of 8 points 1e-4, 1e-6 and 1e-8 R apart at 2, 5 and 10 R from the
points' 1-centre (before: up to 4e-7 at 5 R and 7e-3 at 10 R). With two
such clusters far apart no origin is near both: every pair is then within
``max(2^-36, 1.24 u sinh(a) R / d)`` relative (measured over 90 tables;
``a R`` the nearer point's distance from the origin), the float64 grid
above: 4e-8 for 1e-8 R clusters 2 R apart, 4e-7 for 1e-6 R clusters 16 R
apart. The information is in the table; float64 coordinates in one frame
cannot hold it.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ._args import count, real
from .embed import Embedding

#: Largest distance from the base point (in units of R) whose hyperboloid
#: point has spatial coordinates within the model's range 2^250.
_MAX_A = math.asinh(2.0**250)


def _check_table(D: Any) -> np.ndarray:
    try:
        a = np.asarray(D)
    except Exception as e:  # pragma: no cover - exotic array-likes
        raise TypeError(f"D must be an (n, n) array of distances: {e}") from None
    if a.dtype.kind not in "fiu" or a.dtype == np.bool_:
        raise TypeError(f"D must be an (n, n) array of real distances, got dtype {a.dtype}")
    a = np.array(a, dtype=np.float64)
    if a.ndim != 2 or a.shape[0] != a.shape[1]:
        raise ValueError(f"D must be a square (n, n) distance matrix, got shape {a.shape}")
    n = a.shape[0]
    if n == 0:
        raise ValueError("D is empty: there is nothing to embed")
    bad = ~np.isfinite(a) | (a < 0)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise ValueError(f"D row {i}: D[{i}, {j}] = {a[i, j]} is not a finite distance >= 0")
    dg = np.diagonal(a)
    if (dg != 0).any():
        i = int(np.flatnonzero(dg != 0)[0])
        raise ValueError(f"D row {i}: D[{i}, {i}] = {a[i, i]}; the diagonal must be 0")
    asym = np.abs(a - a.T) > 1e-12 * np.maximum(a, a.T)
    if asym.any():
        i, j = np.argwhere(asym)[0]
        raise ValueError(f"D row {i}: not symmetric: D[{i}, {j}] = {a[i, j]} but D[{j}, {i}] = {a[j, i]}")
    return a


def _log_sinh(x: np.ndarray) -> np.ndarray:
    """``log sinh x`` for ``x >= 0`` without overflow (``-inf`` at 0):
    ``x - log 2 + log(-expm1(-2x))``."""
    with np.errstate(divide="ignore"):
        return x - math.log(2.0) + np.log(-np.expm1(-2.0 * x))


def _frame_centre(A: np.ndarray, reach: float) -> int:
    """The row whose point, placed at the origin, keeps the finest detail
    of the table (module notes, "float64 limits"): it minimises
    ``max_i sinh(A[b, i]) / m_i``, ``m_i`` the distance from point ``i`` to
    its nearest other point, over the rows whose distances all stay within
    ``reach`` (the output model's range). -1 when none does."""
    n = A.shape[0]
    with np.errstate(divide="ignore"):
        logm = np.log(np.where(A > 0, A, np.inf).min(axis=1))
    cost = np.empty(n)
    step = 1024
    for lo in range(0, n, step):
        blk = A[lo : lo + step]
        cost[lo : lo + step] = (_log_sinh(blk) - logm[None, :]).max(axis=1)
    ok = A.max(axis=1) <= reach
    if not ok.any():
        return -1
    cost[~ok] = np.inf
    return int(np.argmin(cost))


def _move_to_origin(s: np.ndarray, b: int, R: float) -> np.ndarray:
    """Spatial parts of the points after the boost that takes point ``b`` to
    ``(R, 0, ..., 0)``. Applied to differences (``L x_i = L (x_i - x_b) +
    (R, 0)``, with ``s_i - s_b`` exact for nearby points and ``x0_i - x0_b``
    from ``(s_i - s_b).(s_i + s_b) / (x0_i + x0_b)``), so points near ``b``
    keep their offsets to about ``eps e^(2a)`` relative, ``a R`` the old
    radius of ``b``; the Gauss-Newton polish that follows recovers the rest
    from the table."""
    sb = s[b].copy()
    nb = math.sqrt(float(sb @ sb))
    if nb == 0.0:
        return s.copy()
    u = sb / nb
    x0 = np.sqrt(R * R + np.einsum("ij,ij->i", s, s))
    sh = nb / R
    a = math.asinh(sh)
    cm1 = 2.0 * math.sinh(0.5 * a) ** 2  # cosh a - 1
    ds = s - sb
    d0 = np.einsum("ij,ij->i", ds, s + sb) / (x0 + x0[b])
    out = ds + np.multiply.outer(cm1 * (ds @ u) - sh * d0, u)
    out[b] = 0.0
    return out


def _relative_errors(s: np.ndarray, a: np.ndarray, c: float) -> np.ndarray:
    """``|d_ij - D_ij| / D_ij`` of the points with spatial parts ``s`` (the
    library's distance, exact to a few ulps), 0 where ``D_ij = 0``."""
    from . import distance_matrix

    R = 1.0 / math.sqrt(-c)
    x = np.column_stack([np.sqrt(R * R + np.einsum("ij,ij->i", s, s)), s])
    d = distance_matrix(x, model="hyperboloid", curvature=c)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(a > 0, np.abs(d - a) / a, 0.0)


def _gradients(si: np.ndarray, sj: np.ndarray, x0i: np.ndarray, x0j: np.ndarray, rsh: np.ndarray) -> np.ndarray:
    """``grad_{s_i} d(x_i, x_j)`` for hyperboloid points read through their
    spatial parts: from ``|x_i - x_j|_L^2 = |ds|^2 - dx0^2 = 4 R^2
    sinh^2(d/2R)``, ``grad = (ds - dx0 s_i/x0_i) / (R sinh(d/R))``, with
    ``dx0 = ds.(s_i + s_j)/(x0_i + x0_j)`` (no difference of large x0).
    ``rsh`` is ``R sinh(d/R)`` (broadcast against the leading axes)."""
    ds = si - sj
    dx0 = np.einsum("...k,...k->...", ds, si + sj) / (x0i + x0j)
    return (ds - (dx0 / x0i)[..., None] * si) / rsh[..., None]


def _gauss_newton_block(s: np.ndarray, a: np.ndarray, B: np.ndarray, c: float, near: np.ndarray) -> None:
    """One Gauss-Newton step on the points ``B`` (the others fixed) for the
    residuals ``(d_ij - D_ij) / D_ij`` of every pair with an end in ``B``;
    updates ``s[B]`` in place.

    The residuals come from the library's exact distance; the Jacobian (the
    formula of ``_gradients``) needs only a few digits. Rows towards points
    outside ``B`` are compressed per point by a QR factorisation (rows sorted
    by decreasing norm, as graded least squares wants), the rows between
    points of ``B`` kept as they are, and the whole solved by LAPACK's
    column-pivoted QR least squares (``gelsy``; rows sorted by decreasing
    norm, which with column pivoting makes Householder QR stable row by row,
    Cox and Higham 1998): the weights ``1/D_ij`` span many orders of
    magnitude, which the normal equations would square."""
    from scipy.linalg import lstsq

    from . import hyperboloid

    R = 1.0 / math.sqrt(-c)
    n, dim = s.shape
    k = len(B)
    x0 = np.sqrt(R * R + np.einsum("ij,ij->i", s, s))
    x = np.column_stack([x0, s])
    d = hyperboloid.distance(x[B][:, None, :], x[None, :, :], curvature=c)  # (k, n)
    aB = a[B]
    inB = np.zeros(n, dtype=bool)
    inB[B] = True
    use = (aB > 0) & (d > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(use, 1.0 / aB, 0.0)
        r = np.where(use, (d - aB) * w, 0.0)
        rsh = np.where(use, R * np.sinh(d / R), 1.0)
    g = _gradients(s[B][:, None, :], s[None, :, :], x0[B][:, None], x0[None, :], rsh)  # (k, n, dim)
    g *= w[..., None]
    # rows towards fixed points, compressed per point of B
    ext = np.where(inB[None, :], 0.0, 1.0)
    ge = g * ext[..., None]
    re = r * ext
    order = np.argsort(-np.einsum("ijk,ijk->ij", ge, ge), axis=1, kind="stable")
    ge = np.take_along_axis(ge, order[..., None], axis=1)
    re = np.take_along_axis(re, order, axis=1)
    Q, Rf = np.linalg.qr(ge)  # (k, n, m), (k, m, dim), m = min(n, dim)
    qr_rhs = np.einsum("ijl,ij->il", Q, re)
    mq = Rf.shape[1]
    rows = []
    rhs = []
    M_ext = np.zeros((k * mq, k * dim))
    for t in range(k):
        M_ext[t * mq : (t + 1) * mq, t * dim : (t + 1) * dim] = Rf[t]
    rows.append(M_ext)
    rhs.append(-qr_rhs.reshape(-1))
    # rows between points of B
    if k > 1:
        iu, ju = np.triu_indices(k, 1)
        bi, bj = B[iu], B[ju]
        keep = use[iu, bj]
        iu, ju, bi, bj = iu[keep], ju[keep], bi[keep], bj[keep]
        if len(iu):
            gi = g[iu, bj]  # grad wrt s_i, already weighted
            gj = _gradients(s[bj], s[bi], x0[bj], x0[bi], rsh[iu, bj]) * w[iu, bj][:, None]
            M_in = np.zeros((len(iu), k * dim))
            cols = np.arange(dim)
            M_in[np.arange(len(iu))[:, None], iu[:, None] * dim + cols] = gi
            M_in[np.arange(len(iu))[:, None], ju[:, None] * dim + cols] = gj
            rows.append(M_in)
            rhs.append(-r[iu, bj])
    # Levenberg-Marquardt damping on each point's own scale (``near``: its
    # nearest distance in the table): a direction in which moving the point
    # by ``near`` changes the relative residuals by less than _DAMP holds no
    # information worth its nonlinearity (seen from far out, a tight cluster's
    # sideways translation changes the distances to the rest only at second
    # order) and is left alone.
    rows.append(np.kron(np.diag(_DAMP / near[B]), np.eye(dim)))
    rhs.append(np.zeros(k * dim))
    M = np.concatenate(rows)
    y = np.concatenate(rhs)
    o = np.argsort(-np.einsum("ij,ij->i", M, M), kind="stable")
    delta = lstsq(M[o], y[o], lapack_driver="gelsy")[0]
    s[B] += delta.reshape(k, dim)


def _blocks(bad: np.ndarray, S: np.ndarray, size: int) -> list:
    """The points ``S`` in groups: the connected components of the graph of
    bad pairs, each cut into parts of at most ``size`` points (not packed
    together: the least-squares work grows with the square of a group)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components

    _, lab = connected_components(csr_matrix(bad[np.ix_(S, S)]), directed=False)
    out: list = []
    for comp in range(lab.max() + 1 if len(lab) else 0):
        members = S[lab == comp]
        out.extend(members[lo : lo + size] for lo in range(0, len(members), size))
    return out


#: Pairs reproduced worse than this (relative) are refined.
_REFINE_TOL = 2.0**-36
#: Refinement runs only for a table from H^dim: when the Gram matrix's
#: (dim+1)-th eigenvalue is below this times its largest, or the
#: eigensolver's result already holds at least half of the pairs to this; a
#: table that is not hyperbolic keeps its rank-dim Gram approximation.
_HYPERBOLIC_TOL = 2.0**-30
_MAX_SWEEPS = 8
_DAMP = 2.0**-20


def _refine(s: np.ndarray, a: np.ndarray, c: float, rank_dim: bool) -> np.ndarray:
    """Gauss-Newton polish of the pairs the eigensolver did not resolve
    (module notes); returns the best spatial parts found."""
    n, dim = s.shape
    E = _relative_errors(s, a, c)
    iu = np.triu_indices(n, 1)
    if n < 3 or not (rank_dim or np.median(E[iu]) <= _HYPERBOLIC_TOL):
        return s
    best, worst = s.copy(), E.max()
    size = max(4, 640 // dim)
    near = np.where(a > 0, a, np.inf).min(axis=1)
    near[~np.isfinite(near)] = 1.0 / math.sqrt(-c)
    for _ in range(_MAX_SWEEPS):
        if worst <= _REFINE_TOL:
            break
        bad = E > _REFINE_TOL
        S = np.flatnonzero(bad.any(axis=1))
        for B in _blocks(bad, S, size):
            _gauss_newton_block(s, a, B, c, near)
        E = _relative_errors(s, a, c)
        w = E.max()
        if not w < worst:
            break
        improved = w < 0.5 * worst
        best, worst = s.copy(), w
        if not improved:
            break
    return best


def from_distances(D: Any, dim: int, *, model: str = "hyperboloid", curvature: float = -1.0) -> Embedding:
    """Points in ``dim``-dimensional hyperbolic space whose distances reproduce ``D``.

    Hyperbolic multidimensional scaling (h-MDS, Sala, De Sa, Gu and Ré 2018),
    derived in the module notes. ``D``: ``(n, n)`` distances in the metric of
    ``curvature`` (symmetric to 1e-12 relative, zero diagonal, finite,
    non-negative; otherwise a ``ValueError`` naming the row). Returns an
    :class:`~gyrokit.embed.Embedding` with ``points`` ``(n, dim + 1)`` on the
    hyperboloid (default) or ``(n, dim)`` in the other models, ``scale``
    None.

    When ``D`` holds the distances of points of H^dim, they are reproduced to
    1e-8 relative or better, by construction (module notes: the eigensolver
    from the 1-centre, the result moved to the origin that keeps the finest
    detail, then a Gauss-Newton polish of the pairs above 2^-36 against the
    table): measured against 50-digit references in dim 2, 5 and 10, every
    pair to 1.5e-11 (2^-36) for pairs up to 20 R and for clusters 1e-4, 1e-6 and
    1e-8 R wide 10 R from the points' centre. The limit is float64 itself: a
    pair ``d`` apart ``a R`` from the origin of the result cannot be held
    better than about ``u sinh(a) R / d`` (u = 2^-53, the coordinates'
    spacing). With one tight cluster the origin goes there; with several
    tight clusters far apart, every pair is measured within ``max(2^-36,
    1.24 u sinh(a) R / d)``: 1e-8 R clusters 2 R apart keep about 4e-8,
    1e-6 R clusters 16 R apart 4e-7. Otherwise (a table that is not
    hyperbolic) the result is the rank-``dim`` approximation of the Gram
    matrix (negative eigenvalues dropped), not polished.
    The origin of the result is a point of the table (the row ``f``
    minimising ``max_i sinh(D[f, i]/R) / m_i``, ``m_i`` the distance from
    ``i`` to its nearest other point, among the rows that keep every point
    within the model's range); the result is determined up to an isometry
    fixing it.
    Distances beyond ``asinh(2^250) R`` (about 174 R) from the 1-centre do
    not fit the hyperboloid's coordinate range and raise ``ValueError``; the
    ball models hold less (about 37 R in the Poincaré ball, 18 R in Klein),
    which ``gyrokit.convert`` reports.
    """
    from . import convert  # the package's own conversion (the core's)
    from .__init__ import MODELS

    dim = count("dim", dim, 1)
    c = real("curvature", curvature)
    if not (math.isfinite(c) and c < 0):
        raise ValueError(f"curvature must be a finite number < 0, got {c}")
    if model not in MODELS:
        raise ValueError(f"model must be one of {MODELS}, got {model!r}")
    a = _check_table(D)
    n = a.shape[0]
    R = 1.0 / math.sqrt(-c)
    A = a / R
    b = int(np.argmin(A.max(axis=1)))  # the 1-centre: the best-conditioned Gram matrix
    ab = A[b]
    if ab.max() > _MAX_A:
        i = int(np.argmax(ab))
        raise ValueError(
            f"D row {i}: distance {a[b, i]} from the central point (row {b}) exceeds the hyperboloid's "
            f"float64 range ({_MAX_A:.1f} R)"
        )
    sh = np.sinh(ab)
    G = np.multiply.outer(sh, sh)
    G -= 2.0 * np.sinh(0.5 * ((A + ab[:, None]) - ab[None, :])) * np.sinh(0.5 * ((A - ab[:, None]) + ab[None, :]))
    G = 0.5 * (G + G.T)  # the two products are symmetric up to rounding
    k = min(dim, n)
    from scipy.linalg import eigh

    # one eigenpair more than needed: its eigenvalue says whether the table
    # has rank dim (the table of points of H^dim, up to rounding)
    lam, U = eigh(G, subset_by_index=[max(n - k - 1, 0), n - 1])
    rank_dim = n == k or lam[0] <= _HYPERBOLIC_TOL * abs(lam[-1])
    lam, U = lam[-k:], U[:, -k:]
    lam = np.clip(lam[::-1], 0.0, None)
    U = U[:, ::-1]
    s = np.zeros((n, dim))
    s[:, :k] = U * (R * np.sqrt(lam))
    # the output model's range (``embed.tree``'s ``max_radius``): the move must
    # not push a point out of it
    reach = {"poincare": 37.0, "klein": 18.5, "halfspace": _MAX_A - abs(math.log(R)) - 1.0}.get(model, _MAX_A)
    f = _frame_centre(A, reach)
    if f >= 0 and f != b:
        s = _move_to_origin(s, f, R)
    s = _refine(s, a, c, rank_dim)
    x0 = np.sqrt(R * R + np.einsum("ij,ij->i", s, s))
    pts = np.column_stack([x0, s])
    if model != "hyperboloid":
        pts = convert(pts, "hyperboloid", model, curvature=c)
    return Embedding(points=pts, model=model, curvature=c)
