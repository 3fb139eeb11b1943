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

try:
    import dask
    import dask.array as da
except ImportError as e:  # pragma: no cover - exercised without the extra
    raise ImportError(
        "gyrokit.dask needs dask: install the extra with `pip install gyrokit[dask]` "
        "(dask[array] and distributed)"
    ) from e

__all__ = ["distance_matrix", "knn", "frechet_mean", "einstein_midpoint"]

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
