"""The same analysis on dask arrays: out of core and on a cluster.

Install with ``pip install gyrokit[dask]`` (dask and distributed). Every
function takes dask arrays (or anything :func:`dask.array.asarray` accepts:
NumPy arrays, ``np.memmap``, zarr arrays) of points along the last axis,
rows chunked any way (the coordinate axis is brought into one chunk), and
builds ordinary dask tasks that call the Rust core on one block each: no
scheduler or transport of our own, so the same code runs on the threaded
scheduler, on a ``distributed.LocalCluster`` or on a multi-machine cluster
(only the ``Client`` address changes).

Results are the in-memory functions' results, bit for bit, whatever the
chunking: every pair distance is computed by the same kernel in the same
operation order (``gk.distance_matrix``), and neighbour candidates are
merged by the same total order (distance, then index) as ``gk.knn``.

Errors in a block (a point outside the ball, NaN) are raised when the
result is computed, as a ``ValueError`` naming the argument and the row of
the whole array (not of the block).
"""

from __future__ import annotations

import re
from typing import Any, List, Optional, Tuple

import numpy as np

from . import _native
from ._args import count as _count
from .kmeans import KMeans as _InMemoryKMeans

try:
    import dask
    import dask.array as da
except ImportError as e:  # pragma: no cover - exercised without the extra
    raise ImportError(
        "gyrokit.dask needs dask: install the extra with `pip install gyrokit[dask]` "
        "(dask[array] and distributed)"
    ) from e

__all__ = ["distance_matrix", "knn", "frechet_mean", "einstein_midpoint", "KMeans"]

_ROW = re.compile(r"^(\w+): row (\d+)")


def _width(model: str) -> None:
    if model not in ("poincare", "klein", "hyperboloid", "halfspace"):
        # The core's message names the valid models.
        _native.distance_matrix(np.zeros((0, 1)), None, model, -1.0, None)


def _lazy(name: str, a: Any, kinds: str, what: str) -> "da.Array":
    """``a`` as a dask array, its dtype checked first (object or complex
    data cannot be chunked by size, and are not real numbers)."""
    if not isinstance(a, da.Array):
        if not (hasattr(a, "dtype") and hasattr(a, "shape") and hasattr(a, "__getitem__")):
            a = np.asarray(a)  # lists and scalars; array-likes (zarr, memmap) stay lazy
        if np.dtype(a.dtype).kind not in kinds:
            raise TypeError(f"{name}: expected {what}, got dtype {np.dtype(a.dtype)}")
        a = da.from_array(a, chunks=a.shape if len(a.shape) and 0 in a.shape else "auto")
    elif a.dtype.kind not in kinds:
        raise TypeError(f"{name}: expected {what}, got dtype {a.dtype}")
    return a


def _as_points(name: str, a: Any) -> "da.Array":
    a = _lazy(name, a, "fiub", "an array of real numbers")
    if a.ndim != 2:
        raise ValueError(f"{name}: expected a 2-d array of points (n, d), got {a.ndim} dimension(s)")
    if a.dtype.kind != "f":
        a = a.astype(np.float64)
    if a.numblocks[1] != 1:
        a = a.rechunk({1: -1})
    return a


def _starts(chunks: Tuple[int, ...]) -> List[int]:
    return list(np.concatenate([[0], np.cumsum(chunks)[:-1]]).astype(int)) if chunks else []


def _out_dtype(*arrays: "da.Array") -> np.dtype:
    """float32 when every array argument is float32 (the library's one dtype rule)."""
    return np.dtype(np.float32) if all(a.dtype == np.float32 for a in arrays) else np.dtype(np.float64)


def distance_matrix(
    x: Any,
    y: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
) -> "da.Array":
    """All pairwise distances as a lazy ``(n, m)`` dask array, block ``(i, j)``
    from row blocks ``i`` of ``x`` and ``j`` of ``y`` (``y=None`` uses ``x``).

    Bit-identical to :func:`gyrokit.distance_matrix` on the same data,
    whatever the chunking. Store a result larger than memory with
    ``da.to_zarr`` or ``da.store`` into a ``np.memmap``.
    """
    _width(model)
    x = _as_points("x", x)
    yy = x if y is None else _as_points("y", y)
    if yy.shape[1] != x.shape[1]:
        raise ValueError(f"x and y must have the same number of coordinates, got {x.shape[1]} and {yy.shape[1]}")
    dtype = _out_dtype(x, yy)
    xs, ys = _starts(x.chunks[0]), _starts(yy.chunks[0])
    same = y is None

    def block(xb: np.ndarray, yb: np.ndarray, x0: int, y0: int) -> np.ndarray:
        try:
            return _native.distance_matrix(xb, yb, model, curvature, None)
        except ValueError as e:
            if same:
                # Both blocks come from x: name x for a bad row of either.
                raise _relabel(e, {"x": ("x", x0), "y": ("x", y0)}) from None
            raise _relabel(e, {"x": ("x", x0), "y": ("y", y0)}) from None

    task = dask.delayed(block, pure=True)
    xblocks, yblocks = x.to_delayed().ravel(), yy.to_delayed().ravel()
    return da.block(
        [
            [
                da.from_delayed(task(xb, yb, xs[i], ys[j]), (x.chunks[0][i], yy.chunks[0][j]), dtype=dtype)
                for j, yb in enumerate(yblocks)
            ]
            for i, xb in enumerate(xblocks)
        ]
    )


def _merge(k: int, *parts: Tuple[np.ndarray, np.ndarray]) -> Tuple[np.ndarray, np.ndarray]:
    """The k smallest candidates per row by (distance, index): a total order, so
    the result does not depend on how the blocks were grouped."""
    idx = np.concatenate([p[0] for p in parts], axis=1)
    dist = np.concatenate([p[1] for p in parts], axis=1)
    order = np.lexsort((idx, dist), axis=1)[:, :k]
    return np.take_along_axis(idx, order, 1), np.take_along_axis(dist, order, 1)


def _relabel(e: ValueError, names: dict) -> ValueError:
    """Renames the core's argument (``names``: core name -> (public name,
    first row of the block)) and shifts its row to the whole array's."""
    msg = str(e)
    m = _ROW.match(msg)
    if m is None or m.group(1) not in names:
        return e
    public, start = names[m.group(1)]
    rest = msg[m.end():].replace(f"|{m.group(1)}|", f"|{public}|")
    return ValueError(f"{public}: row {int(m.group(2)) + start}{rest}")


def _block_index(yb: np.ndarray, model: str, curvature: float, name: str, y0: int) -> Any:
    """The neighbour index of one row block (tree or brute force, chosen by
    ``NeighborIndex``'s rule); float64, so candidates are ranked in float64."""
    from ._index import NeighborIndex

    try:
        return NeighborIndex(np.asarray(yb, dtype=np.float64), model, curvature=curvature)
    except ValueError as e:
        raise _relabel(e, {"x": (name, y0)}) from None


def _block_query(
    index: Any, xb: np.ndarray, k: int, x0: int, y0: int, self_search: bool
) -> Tuple[np.ndarray, np.ndarray]:
    """Candidates of one (x block, index block) pair: global indices, float64 distances."""
    rows = xb.shape[0]
    kk = min(k + (1 if self_search else 0), len(index))
    if rows == 0:
        return np.empty((0, k), np.int64), np.empty((0, k), np.float64)
    try:
        idx, dist = index.query(np.asarray(xb, dtype=np.float64), kk)
    except ValueError as e:
        raise _relabel(e, {"y": ("x", x0)}) from None
    idx = idx + y0
    if self_search:
        # Drop each row's own index (duplicates at distance 0 stay, as in
        # gk.knn): the row's other candidates move up, and the freed last
        # slot gets a sentinel that sorts after every real candidate.
        own = idx == (np.arange(rows) + x0)[:, None]
        if own.any():
            order = np.argsort(own, axis=1, kind="stable")
            idx = np.take_along_axis(idx, order, 1)
            dist = np.take_along_axis(dist, order, 1)
            hit = own.any(axis=1)
            idx[hit, -1] = np.iinfo(np.int64).max
            dist[hit, -1] = np.inf
    return idx, dist


def knn(
    x: Any,
    k: int,
    y: Any = None,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    index_bytes: int = 256 * 2**20,
) -> Tuple["da.Array", "da.Array"]:
    """The ``k`` nearest rows of ``y`` to each row of ``x``, exact.

    Returns lazy ``(indices (n, k) int64, distances (n, k))`` dask arrays,
    chunked like the rows of ``x``; compute both together
    (``dask.compute(idx, dist)``) so that each block is searched once.
    ``y`` is cut into blocks of at most ``index_bytes`` of points (256 MiB
    by default: one block for up to 16 million points at d = 2), each
    indexed by a :class:`gyrokit.NeighborIndex` in one task (tree or brute
    force by the index's own rule, so low dimensions get a tree and never
    pay for all pairs), which every row block of ``x`` queries, on the
    workers, for its ``k`` best candidates; the candidates of a row block are
    merged by (distance, index), the tie rule of :func:`gyrokit.knn`, in a
    binary tree of tasks, so the results equal ``gk.knn``'s exactly
    (distances float32 when every input is float32, ranked in float64).
    ``y=None`` searches ``x`` itself and excludes each point's own row
    (duplicates at distance 0 stay). Memory per task: one index, one block
    of queries and ``2k`` candidates per row.
    """
    _width(model)
    k = _count("k", k, 1)
    x = _as_points("x", x)
    yy = x if y is None else _as_points("y", y)
    if yy.shape[1] != x.shape[1]:
        raise ValueError(f"x and y must have the same number of coordinates, got {x.shape[1]} and {yy.shape[1]}")
    n, m = x.shape[0], yy.shape[0]
    candidates = m - 1 if y is None else m
    if k > candidates and not (y is None and n == 0):
        raise ValueError(f"k = {k} exceeds the number of candidates ({candidates})")
    dtype = _out_dtype(x, yy)
    xs, ys = _starts(x.chunks[0]), _starts(yy.chunks[0])
    # Index blocks of at most index_bytes of points: one index for all of y
    # when it fits, so that every query runs against one tree.
    per = max(1, _count("index_bytes", index_bytes, 1) // (8 * max(1, yy.shape[1])))
    if m > 0:
        yy = yy.rechunk({0: min(per, m)})
    ys = _starts(yy.chunks[0])
    xblocks = x.to_delayed().ravel()
    yblocks = yy.to_delayed().ravel()
    build = dask.delayed(_block_index, pure=True)
    indexes = [build(yb, model, curvature, "x" if y is None else "y", ys[j]) for j, yb in enumerate(yblocks)]
    part = dask.delayed(_block_query, pure=True, nout=2)
    merge = dask.delayed(_merge, pure=True, nout=2)
    idx_blocks, dist_blocks = [], []
    for i, xb in enumerate(xblocks):
        leaves = [part(ix, xb, k, xs[i], ys[j], y is None) for j, ix in enumerate(indexes)]
        while len(leaves) > 1:
            leaves = [merge(k, *leaves[a : a + 2]) for a in range(0, len(leaves), 2)]
        rows = x.chunks[0][i]
        if leaves:
            top = merge(k, leaves[0])
            ib, db = top[0], top[1]
        else:
            ib = np.empty((rows, k), np.int64)
            db = np.empty((rows, k), np.float64)
        idx_blocks.append(da.from_delayed(ib, (rows, k), dtype=np.int64))
        dist_blocks.append(da.from_delayed(db, (rows, k), dtype=np.float64))
    if not idx_blocks:
        return da.zeros((0, k), dtype=np.int64), da.zeros((0, k), dtype=dtype)
    idx = da.concatenate(idx_blocks, axis=0)
    dist = da.concatenate(dist_blocks, axis=0)
    if dtype == np.float32:
        dist = dist.astype(np.float32)
    return idx, dist


def _rows_like(name: str, a: Any, x: "da.Array") -> "da.Array":
    """A per-point 1-d array chunked like the rows of ``x``."""
    a = _lazy(name, a, "fiubUS" if name == "labels" else "fiub", "numbers or strings" if name == "labels" else "real numbers")
    if a.ndim != 1:
        raise ValueError(f"{name} must be 1-D (one value per point), got {a.ndim} dimensions")
    if a.shape[0] != x.shape[0]:
        raise ValueError(f"{name} has length {a.shape[0]} but x has {x.shape[0]} points")
    return a.rechunk((x.chunks[0],))


def _chunk_sums(
    xb: np.ndarray,
    wb: Optional[np.ndarray],
    wmax: float,
    cb: Optional[np.ndarray],
    queries: list,
    model: str,
    curvature: float,
    x0: int,
) -> list:
    """One chunk's sums for every group's query (runs on a worker)."""
    if xb.shape[0] == 0:
        return [None] * len(queries)
    try:
        return _native.centroid_chunk_sums(xb, wb, wmax, cb, queries, model, curvature)
    except ValueError as e:
        msg = str(e)
        m = re.match(r"^(weights|labels): entry (\d+)", msg)
        if m is not None:
            raise ValueError(f"{m.group(1)}: entry {int(m.group(2)) + x0}{msg[m.end():]}") from None
        raise _relabel(e, {"x": ("x", x0)}) from None


def _centroids(
    x: Any,
    weights: Any,
    labels: Any,
    model: str,
    curvature: float,
    newton: bool,
    tol: float,
    max_iter: int,
) -> Tuple[np.ndarray, Any, Any, Any, Optional[np.ndarray], bool]:
    from ._args import real

    _width(model)
    x = _as_points("x", x)
    if x.shape[0] == 0:
        raise ValueError("x is empty: a centroid needs at least one point")
    f32 = x.dtype == np.float32
    w = None
    wmax = 1.0
    if weights is not None:
        w = _rows_like("weights", weights, x)
        f32 = f32 and w.dtype == np.float32
        w = w.astype(np.float64)
        wmax = float(w.max().compute())
        if not np.isfinite(wmax):
            wmax = 1.0  # the chunk check names the bad entry
    codes = None
    values = None
    if labels is not None:
        lab = _rows_like("labels", labels, x)
        if lab.dtype.kind == "f" and bool(da.isnan(lab).any().compute()):
            bad = int(da.argmax(da.isnan(lab)).compute())
            raise ValueError(f"labels: entry {bad} is missing (NaN); every point needs a label")
        values = np.unique(da.unique(lab).compute())
        codes = lab.map_blocks(lambda c: np.searchsorted(values, c).astype(np.int64), dtype=np.int64)
    groups = 1 if values is None else len(values)
    drv = _native.CentroidDriver(groups, newton, real("tol", tol) if newton else 1e-12, _count("max_iter", max_iter, 0))
    xblocks = x.to_delayed().ravel()
    wblocks = [None] * len(xblocks) if w is None else list(w.to_delayed().ravel())
    cblocks = [None] * len(xblocks) if codes is None else list(codes.to_delayed().ravel())
    starts = _starts(x.chunks[0])
    task = dask.delayed(_chunk_sums, pure=True)
    while True:
        queries = drv.queries()
        if all(q is None for q in queries):
            break
        parts = dask.compute(
            *[task(xb, wb, wmax, cb, queries, model, curvature, x0) for xb, wb, cb, x0 in zip(xblocks, wblocks, cblocks, starts)]
        )
        drv.feed(list(parts))
    try:
        mean, it, conv, gn = drv.result(x.shape[1] - (1 if model == "hyperboloid" else 0), model, curvature)
    except ValueError as e:
        m = re.match(r"empty group (\d+)", str(e))
        if m is None:
            raise
        if values is None:
            raise ValueError("weights are all zero: the mean of no points is undefined") from None
        raise ValueError(
            f"label {values.tolist()[int(m.group(1))]!r}: its points all have weight zero (an empty group has no mean)"
        ) from None
    if f32:
        mean = mean.astype(np.float32)
    return mean, it, conv, gn, values, labels is not None


def frechet_mean(
    x: Any,
    *,
    weights: Any = None,
    labels: Any = None,
    model: str = "poincare",
    curvature: float = -1.0,
    tol: float = 1e-12,
    max_iter: int = 50,
) -> Any:
    """The weighted Fréchet mean of chunked points (per label with ``labels``).

    The iteration of :func:`gyrokit.frechet_mean` (Einstein start, Riemannian
    Newton with the exact Hessian), run on the client; each step asks every
    chunk for its gradient and Hessian sums, which the Rust core computes on
    the worker holding the chunk (``_native.centroid_chunk_sums``), and adds
    them in chunk order. One pass over the data per step (about 3 passes for
    the start and 3 to 6 Newton steps). The result equals
    ``gk.frechet_mean``'s to about 1e-13 (the sums are grouped by chunk
    rather than by the in-memory reduction blocks) and does not depend on the
    number of workers or on which worker ran what: a chunk recomputed after a
    worker died gives the same sums. Returns :class:`gyrokit.FrechetMean`.

    ``weights`` and ``labels``: 1-d dask or NumPy arrays, one entry per
    point; labels of any sortable dtype (rows of the result in
    ``np.unique`` order, values in ``.labels``).
    """
    from .centroids import _mean_result

    mean, it, conv, gn, values, labelled = _centroids(x, weights, labels, model, curvature, True, tol, max_iter)
    return _mean_result(mean, it, conv, gn, values if labelled else None, tol, max_iter)


def einstein_midpoint(
    x: Any,
    *,
    weights: Any = None,
    labels: Any = None,
    model: str = "poincare",
    curvature: float = -1.0,
) -> np.ndarray:
    """The weighted Einstein midpoint of chunked points, as
    :func:`gyrokit.einstein_midpoint` (``(d,)``, or ``(n_labels, d)`` rows in
    ``np.unique(labels)`` order), from per-chunk sums (one to three passes)."""
    mean, _, _, _, _, labelled = _centroids(x, weights, labels, model, curvature, False, 0.0, 0)
    return mean if labelled else mean[0]


# --------------------------------------------------------------------- k-means

_GOLDEN = 0x9E3779B97F4A7C15
_MASK = (1 << 64) - 1


def _mix64(z: Any) -> Any:
    """The SplitMix64 finaliser (Steele, Lea & Flood 2014), on Python ints or
    uint64 arrays (wrapping arithmetic)."""
    if isinstance(z, int):
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & _MASK
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & _MASK
        return z ^ (z >> 31)
    with np.errstate(over="ignore"):
        z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
        return z ^ (z >> np.uint64(31))


def _exp_keys(seed: int, draw: int, start: int, n: int) -> np.ndarray:
    """Standard exponential variates of the points ``start .. start + n`` for
    one draw of one run: a counter-based stream (SplitMix64 of the point's
    global index), so a point's variate depends on its index, never on the
    chunking or on the worker that computes it."""
    base = _mix64((seed + (draw + 1) * 0xD1B54A32D192ED03) & _MASK)
    with np.errstate(over="ignore"):
        z = np.uint64(base) + (np.arange(start, start + n, dtype=np.uint64) + np.uint64(1)) * np.uint64(_GOLDEN)
    u = (_mix64(z) >> np.uint64(11)).astype(np.float64) * 2.0**-53
    return -np.log1p(-u)


def _rows64(xb: np.ndarray) -> np.ndarray:
    # k-means computes in float64 whatever the input dtype (as gk.KMeans).
    return np.ascontiguousarray(xb, dtype=np.float64)


def _smallest(key: np.ndarray, xb: np.ndarray, x0: int, m: int) -> list:
    """The ``m`` smallest keys below infinity of a chunk as ``(key, global
    index, row)`` (ties to the lower index)."""
    ok = np.flatnonzero(key < np.inf)
    order = ok[np.lexsort((ok, key[ok]))][:m]
    return [(float(key[i]), x0 + int(i), xb[i]) for i in order]


def _seed_block(
    xb: np.ndarray,
    d2b: Optional[np.ndarray],
    c: Optional[np.ndarray],
    chosen: list,
    seed: int,
    draw: int,
    m: int,
    model: str,
    curvature: float,
    x0: int,
) -> Tuple[Optional[np.ndarray], list, list]:
    """One seeding draw on one chunk (runs on a worker): the squared distance
    of every point to its nearest chosen centre, updated with the newest
    centre ``c``, and the chunk's best candidates of the exponential race
    (key ``E_i / w_i``, compared through its logarithm, with ``w_i`` the squared distance, or 1 for a uniform
    draw), plus the uniform race over the points not chosen yet (used when
    every point coincides with a chosen centre)."""
    xb = _rows64(xb)
    n = xb.shape[0]
    if n == 0:
        return d2b, [], []
    if c is not None:
        try:
            dist = _native.distance_matrix(xb, c[None, :], model, curvature, None)[:, 0]
        except ValueError as e:
            raise _relabel(e, {"x": ("X", x0)}) from None
        d2 = dist * dist
        d2b = d2 if d2b is None else np.minimum(d2b, d2)
    e = _exp_keys(seed, draw, x0, n)
    free = np.ones(n, bool)
    local = [i - x0 for i in chosen if x0 <= i < x0 + n]
    free[local] = False
    if d2b is None:
        return d2b, _smallest(np.where(free, e, np.inf), xb, x0, m), []
    # log(E_i / w_i), so that tiny weights neither overflow nor lose the race
    # by rounding (the order of the keys is the order of their logarithms)
    pos = d2b > 0
    with np.errstate(divide="ignore"):
        key = np.where(pos, np.log(e) - np.log(np.where(pos, d2b, 1.0)), np.inf)
    return d2b, _smallest(key, xb, x0, m), _smallest(np.where(free, e, np.inf), xb, x0, 1)


def _best(parts: list, m: int) -> list:
    """The ``m`` smallest candidates of all chunks, by (key, index)."""
    return sorted((c for p in parts for c in p), key=lambda t: (t[0], t[1]))[:m]


def _assign_block(
    xb: np.ndarray,
    centres: np.ndarray,
    queries: Optional[list],
    prev: Optional[np.ndarray],
    model: str,
    curvature: float,
    x0: int,
) -> Tuple[np.ndarray, Tuple[int, float, np.ndarray, Any]]:
    """Assignment of one chunk (runs on a worker): each point's nearest
    centre (ties to the lower index, as ``gk.knn``), and the chunk's summary:
    labels changed since ``prev``, its part of the inertia, the cluster
    sizes, and the Newton sums of every cluster at its centre (the first
    update step, from the same read of the chunk)."""
    from .neighbors import knn as _knn

    xb = _rows64(xb)
    k = centres.shape[0]
    if xb.shape[0] == 0:
        return np.empty(0, np.int64), (0, 0.0, np.zeros(k, np.int64), None if queries is None else [None] * k)
    try:
        idx, dist = _knn(xb, 1, centres, model=model, curvature=curvature)
    except ValueError as e:
        raise _relabel(e, {"x": ("X", x0)}) from None
    lab = idx[:, 0]
    dv = dist[:, 0]
    changed = int(lab.shape[0] if prev is None else np.count_nonzero(lab != prev))
    sums = None
    if queries is not None:
        sums = _native.centroid_chunk_sums(xb, None, 1.0, lab, queries, model, curvature)
    return lab, (changed, float(np.dot(dv, dv)), np.bincount(lab, minlength=k), sums)


def _far_block(
    xb: np.ndarray, lab: np.ndarray, centres: np.ndarray, m: int, model: str, curvature: float, x0: int
) -> list:
    """Per cluster, the chunk's ``m`` points farthest from their centre as
    ``(label, distance, global index, row)`` (ties to the lower index): the
    candidates of the empty-cluster repair."""
    xb = _rows64(xb)
    n = xb.shape[0]
    if n == 0:
        return []
    dist = _native.distance_matrix(xb, centres, model, curvature, None)[np.arange(n), lab]
    order = np.lexsort((np.arange(n), -dist, lab))
    out: list = []
    taken: dict = {}
    for i in order:
        j = int(lab[i])
        if taken.get(j, 0) < m:
            taken[j] = taken.get(j, 0) + 1
            out.append((j, float(dist[i]), x0 + int(i), xb[i]))
    return out


def _move_labels(lab: np.ndarray, moves: dict, x0: int) -> np.ndarray:
    lab = lab.copy()
    for i, j in moves.items():
        if x0 <= i < x0 + lab.shape[0]:
            lab[i - x0] = j
    return lab


def _stats_block(xb: np.ndarray, lab: Optional[np.ndarray], queries: list, model: str, curvature: float, x0: int) -> list:
    if xb.shape[0] == 0:
        return [None] * len(queries)
    try:
        return _native.centroid_chunk_sums(_rows64(xb), None, 1.0, lab, queries, model, curvature)
    except ValueError as e:
        raise _relabel(e, {"x": ("X", x0)}) from None


def _pair_distances(a: np.ndarray, b: np.ndarray, model: str, curvature: float) -> np.ndarray:
    """``d(a_j, b_j)`` for every row ``j``."""
    return np.diagonal(_native.distance_matrix(a, b, model, curvature, None)).copy()


class KMeans(_InMemoryKMeans):
    """k-means of chunked points (dask arrays, ``np.memmap``, zarr), with
    hyperbolic distances and Fréchet-mean centres: the algorithm of
    :class:`gyrokit.KMeans` (see its module documentation), each pass over
    the data a round of ordinary dask tasks, one per chunk.

    * Assignment: every chunk finds each point's nearest centre (ties to the
      lower index) and, from the same read of the chunk, the Newton sums of
      every cluster at its current centre (``_native.centroid_chunk_sums``).
      The labels stay on the workers (persisted, 8 bytes a point).
    * Update: the Newton iteration of each centre, warm-started at the
      previous centre, runs on the client (``_native.CentroidDriver``),
      asking the chunks for one round of sums per further step; the sums are
      added in chunk order, so the result never depends on the number of
      workers or on which worker ran what (a chunk recomputed after a
      worker died gives the same sums).
    * Empty clusters: repaired as in :class:`gyrokit.KMeans` (the farthest
      point of a cluster with at least two points), from each chunk's
      farthest candidates (an extra pass, only when a cluster empties).
    * The final centres are the Fréchet means of the last clusters, from
      their Einstein midpoints (as ``gk.dask.frechet_mean(x, labels=...)``);
      a final assignment gives ``labels_`` and ``inertia_``.

    Seeding (``init="k-means++"``, one pass per centre; ``"random"``, one
    pass) draws by an exponential race: point ``i`` gets the key
    ``E_i / w_i`` with ``E_i`` a standard exponential variate from a
    counter-based stream of the run's seed and the point's global index
    (SplitMix64) and ``w_i`` its squared distance to the nearest chosen
    centre (1 for a uniform draw), and the smallest key wins, which draws
    ``i`` with probability ``w_i / sum w`` (D^2 sampling, Arthur &
    Vassilvitskii 2007). The draws depend only on the seed and on the
    points' order, never on the chunking; they are not the draws of the
    in-memory :class:`gyrokit.KMeans`, so seeded runs of the two differ.
    This is plain k-means++, one candidate per centre: the in-memory
    estimator keeps the best of ``2 + floor(ln n_clusters)`` candidates
    (greedy k-means++), which would cost that many passes per centre here.
    With an array ``init`` (or identical seeds) the two give the same
    clusters; centres agree to about 1e-13 (sums grouped by chunk).

    Differences from :class:`gyrokit.KMeans`: ``n_init`` defaults to 1 (each
    run costs passes over the data); ``labels_`` is a dask array (chunked
    like the rows of ``X``); ``predict`` and ``transform`` return lazy dask
    arrays. Passes per Lloyd iteration: one assignment plus one per further
    Newton step (usually one or two); the stop rule's spread (``tol > 0``,
    as in :class:`gyrokit.KMeans`) costs 2 to 4 passes once per fit.
    """

    def __init__(self, n_clusters: int = 8, *, n_init: Any = 1, **params: Any) -> None:
        # gk.KMeans's parameters; only n_init's default differs (one run).
        super().__init__(n_clusters, n_init=n_init, **params)

    def __repr__(self) -> str:
        return "gyrokit.dask." + super().__repr__()

    # ------------------------------------------------------------------ passes
    def _blocks(self, x: "da.Array") -> Tuple[list, List[int]]:
        return list(x.to_delayed().ravel()), _starts(x.chunks[0])

    def _seed(self, blocks: list, starts: List[int], n: int, seed: Optional[int], init: Any) -> np.ndarray:
        k, model, curv = int(self.n_clusters), self.model, float(self.curvature)
        if not isinstance(init, str):
            return init
        task = dask.delayed(_seed_block, pure=True, nout=3)
        if init == "random":
            outs = dask.compute(*[task(xb, None, None, [], seed, 0, k, model, curv, x0)[1] for xb, x0 in zip(blocks, starts)])
            return np.array([c[2] for c in _best(list(outs), k)], dtype=np.float64)
        chosen: List[int] = []
        rows: list = []
        d2: list = [None] * len(blocks)
        c = None
        for draw in range(k):
            outs = [task(xb, d2[b], c, list(chosen), seed, draw, 1, model, curv, x0) for b, (xb, x0) in enumerate(zip(blocks, starts))]
            outs = dask.persist(*outs)
            d2 = [o[0] for o in outs]
            cands = dask.compute(*[o[1] for o in outs], *[o[2] for o in outs])
            race, spare = list(cands[: len(outs)]), list(cands[len(outs):])
            best = _best(race, 1) or _best(spare, 1)
            _, i, row = best[0]
            chosen.append(i)
            rows.append(np.array(row, dtype=np.float64))
            c = rows[-1]
        return np.array(rows)

    def _assign(self, blocks: list, starts: List[int], centres: np.ndarray, queries: Optional[list], prev: Optional[list]) -> Tuple[list, list]:
        task = dask.delayed(_assign_block, pure=True, nout=2)
        outs = dask.persist(
            *[
                task(xb, centres, queries, None if prev is None else prev[b], self.model, float(self.curvature), x0)
                for b, (xb, x0) in enumerate(zip(blocks, starts))
            ]
        )
        labels = [o[0] for o in outs]
        summary = list(dask.compute(*[o[1] for o in outs]))
        return labels, summary

    def _rounds(self, drv: Any, blocks: list, starts: List[int], labels: Optional[list], once: bool = False) -> list:
        """Runs a centroid driver to the end on chunk sums over ``labels``
        (``None``: one group of all points); with ``once``, one round whose
        chunk sums are returned instead of fed."""
        task = dask.delayed(_stats_block, pure=True)
        labs = [None] * len(blocks) if labels is None else labels
        while True:
            queries = drv.queries()
            if all(q is None for q in queries):
                return []
            parts = list(
                dask.compute(
                    *[task(xb, lb, queries, self.model, float(self.curvature), x0) for xb, lb, x0 in zip(blocks, labs, starts)]
                )
            )
            if once:
                return parts
            drv.feed(parts)

    def _threshold(self, blocks: list, starts: List[int], n: int, d: int) -> float:
        """The stop rule's bound on ``sum_j d(c_j, c_j')^2`` (unit ball):
        ``tol`` times the data's spread, the mean squared distance of the
        points to their Einstein midpoint over ``d`` (gk.KMeans's rule; 2 to
        4 passes, only for ``tol > 0``)."""
        tol = float(self.tol)
        if tol == 0.0:
            return 0.0
        model, curv = self.model, float(self.curvature)
        mid = _native.CentroidDriver(1, False, 1e-12, 0)
        self._rounds(mid, blocks, starts, None)
        centre = mid.result(d, model, curv)[0]
        parts = self._rounds(_native.CentroidDriver.lloyd(centre, model, curv), blocks, starts, None, once=True)
        f = sum(p[0][4] for p in parts if p[0] is not None)  # chunk order
        return tol * f / n / d

    def _repair(self, blocks: list, starts: List[int], labels: list, centres: np.ndarray, counts: np.ndarray) -> Tuple[list, np.ndarray]:
        """The empty-cluster repair of gk.KMeans (module docs, step 3)."""
        empty = [j for j in range(len(counts)) if counts[j] == 0]
        task = dask.delayed(_far_block, pure=True)
        parts = dask.compute(
            *[task(xb, lb, centres, len(empty), self.model, float(self.curvature), x0) for xb, lb, x0 in zip(blocks, labels, starts)]
        )
        queue: dict = {}
        for j, dv, i, row in sorted((c for p in parts for c in p), key=lambda t: (-t[1], t[2])):
            queue.setdefault(j, []).append((dv, i, row))
        counts = counts.copy()
        centres = centres.copy()
        moves: dict = {}
        for j in empty:
            heads = [(q[0][0], q[0][1], c) for c, q in queue.items() if q and counts[c] >= 2]
            if not heads:
                continue
            _, i, c = min(heads, key=lambda t: (-t[0], t[1]))
            _, _, row = queue[c].pop(0)
            counts[c] -= 1
            counts[j] += 1
            moves[i] = j
            centres[j] = row
        move = dask.delayed(_move_labels, pure=True)
        labels = list(dask.persist(*[move(lb, moves, x0) for lb, x0 in zip(labels, starts)]))
        return labels, centres

    def _lloyd(
        self, blocks: list, starts: List[int], centres: np.ndarray, d: int, threshold: float
    ) -> Tuple[np.ndarray, list, float, int, list]:
        model, curv, k = self.model, float(self.curvature), int(self.n_clusters)
        radius = 1.0 / np.sqrt(-curv)
        drv = _native.CentroidDriver.lloyd(centres, model, curv)
        labels, summary = self._assign(blocks, starts, centres, drv.queries(), None)
        history = [float(sum(s[1] for s in summary))]
        used = labels
        n_iter = 0
        for _ in range(int(self.max_iter)):
            counts = np.sum([s[2] for s in summary], axis=0)
            if (counts == 0).any():
                labels, centres = self._repair(blocks, starts, labels, centres, counts)
                drv = _native.CentroidDriver.lloyd(centres, model, curv)
            else:
                drv.feed([s[3] for s in summary])
            self._rounds(drv, blocks, starts, labels)
            new = drv.result(d, model, curv, centres)[0]
            shift = float(np.sum((_pair_distances(centres, new, model, curv) / radius) ** 2))
            centres = new
            n_iter += 1
            drv = _native.CentroidDriver.lloyd(centres, model, curv)
            used = labels
            labels, summary = self._assign(blocks, starts, centres, drv.queries(), used)
            history.append(float(sum(s[1] for s in summary)))
            if sum(s[0] for s in summary) == 0 or shift <= threshold:
                break
        # The final centres: the Fréchet means of the last update's clusters
        # from their Einstein midpoints, as frechet_mean(X, labels=...) does.
        final = _native.CentroidDriver(k, True, 1e-12, 50)
        self._rounds(final, blocks, starts, used)
        centres = final.result(d, model, curv, centres)[0]
        labels, summary = self._assign(blocks, starts, centres, None, None)
        history[-1] = float(sum(s[1] for s in summary))
        return centres, labels, history[-1], n_iter, history

    # ------------------------------------------------------------------ API
    def fit(self, X: Any, y: Any = None) -> "KMeans":
        """Clusters ``X`` ((n, width) chunked points of ``model``); returns ``self``."""
        self._check_params()
        _width(self.model)
        x = _as_points("X", X)
        n, width = x.shape
        k = int(self.n_clusters)
        if n == 0:
            raise ValueError("X is empty: k-means needs at least one point")
        if k > n:
            raise ValueError(f"n_clusters={k} is larger than the number of points ({n})")
        d = width - (1 if self.model == "hyperboloid" else 0)
        if isinstance(self.init, str):
            rng = np.random.default_rng(self.random_state)
            seeds: List[Optional[int]] = [int(rng.integers(0, 2**64, dtype=np.uint64)) for _ in range(self._runs())]
            init: Any = self.init
        else:
            init = self._array(self.init, "init").astype(np.float64)
            if init.shape != (k, width):
                raise ValueError(f"init must have shape (n_clusters, width) = {(k, width)}; got {init.shape}")
            try:
                _native.einstein_midpoint(np.ascontiguousarray(init), None, None, self.model, float(self.curvature))
            except ValueError as e:
                raise ValueError(f"init is not a valid array of {self.model} points: {e}") from None
            seeds = [None]
        blocks, starts = self._blocks(x)
        threshold = self._threshold(blocks, starts, n, d)
        best = None
        for seed in seeds:
            centres = self._seed(blocks, starts, n, seed, init)
            run = self._lloyd(blocks, starts, centres, d, threshold)
            if best is None or run[2] < best[2]:
                best = run
        assert best is not None
        centres, labels, inertia, n_iter, history = best
        self.cluster_centers_ = centres
        self.labels_ = da.concatenate(
            [da.from_delayed(lb, (rows,), dtype=np.int64) for lb, rows in zip(labels, x.chunks[0])]
        )
        self.inertia_ = float(inertia)
        self.n_iter_ = int(n_iter)
        self.inertia_history_ = history
        self.n_features_in_ = width
        return self

    def _fitted_points(self, X: Any, what: str) -> "da.Array":
        from .kmeans import UnfittedError

        if not hasattr(self, "cluster_centers_"):
            raise UnfittedError(f"KMeans.{what} needs cluster centres, and this KMeans has none yet: run fit(X) first")
        x = _as_points("X", X)
        if x.shape[1] != self.n_features_in_:
            raise ValueError(f"X has {x.shape[1]} coordinates per point but KMeans was fitted with {self.n_features_in_}")
        return x

    def predict(self, X: Any) -> "da.Array":
        """Index of the nearest centre of each point (ties to the lower index), lazy."""
        x = self._fitted_points(X, "predict")
        idx, _ = knn(x, 1, self.cluster_centers_, model=self.model, curvature=float(self.curvature))
        return idx[:, 0]

    def fit_predict(self, X: Any, y: Any = None) -> "da.Array":
        """``fit(X)`` and return ``labels_``."""
        return self.fit(X).labels_

    def transform(self, X: Any) -> "da.Array":
        """Distances from each point to each centre, ``(n, n_clusters)``, lazy."""
        x = self._fitted_points(X, "transform")
        return distance_matrix(x, self.cluster_centers_, model=self.model, curvature=float(self.curvature))

    def fit_transform(self, X: Any, y: Any = None) -> "da.Array":
        """``fit(X)`` and return ``transform(X)``."""
        return self.fit(X).transform(X)

    def score(self, X: Any, y: Any = None) -> float:
        """Minus the inertia of ``X`` about the fitted centres (higher is better)."""
        x = self._fitted_points(X, "score")
        _, dist = knn(x, 1, self.cluster_centers_, model=self.model, curvature=float(self.curvature))
        return -float((dist[:, 0].astype(np.float64) ** 2).sum().compute())
