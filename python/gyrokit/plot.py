"""Drawing hyperbolic point sets in the Poincaré disk (matplotlib).

matplotlib is an optional extra: ``pip install gyrokit[plot]``. It is
imported when a plotting function is called, never by ``import gyrokit``.

Edges are drawn as exact geodesic arcs: the arc of the circle orthogonal to
the boundary through both end points (a diameter when they are collinear
with the centre). Every arc is written as one Möbius image of the segment
``[0, 1]`` (see ``_geodesic_arcs``), so circles and diameters come out of
the same formula and no case switch is needed; all edges are computed in a
few vectorised NumPy passes and drawn as one ``LineCollection``.

Points crowded at the rim: the Poincaré picture shrinks Euclidean sizes by
``(1 - |x|^2/R^2)/2``, so deep hierarchies pile up on the boundary. Two
remedies: ``center=`` moves a point of interest to the middle (an isometry:
the picture is still exact), and ``radial_compression=c > 1`` divides every
hyperbolic distance from the centre by ``c`` for display only (a point at
distance ``rho`` is drawn at Euclidean radius ``R tanh(rho / (2 R c))``), which
spreads the rim out; the drawing is then no longer the Poincaré disk (arcs
are bent, angles change) and the Axes carries a note saying so.
"""

from __future__ import annotations

import contextlib
import warnings
from typing import Any, Iterator, Optional, Tuple

import numpy as np

from ._args import count, real
from .pga import _as_array, _hub_of, _origin_of, _tangent_at

__all__ = ["disk"]

_MODELS = ("poincare", "klein", "hyperboloid", "halfspace")


def _matplotlib() -> Tuple[Any, Any, Any]:
    """``(pyplot, LineCollection, Circle)``, or an ImportError naming the extra."""
    try:
        import matplotlib.pyplot as plt
        from matplotlib.collections import LineCollection
        from matplotlib.patches import Circle
    except ImportError as e:
        raise ImportError(
            "gyrokit.plot needs matplotlib, an optional extra: pip install gyrokit[plot] "
            f"(or pip install matplotlib); the import failed with: {e}"
        ) from None
    return plt, LineCollection, Circle


def _geodesic_arcs(a: Any, b: Any, samples: Optional[int] = 32, tol: float = 2.5e-4) -> Tuple[np.ndarray, np.ndarray]:
    """Points along the geodesics of the unit Poincaré disk from ``a`` to ``b``.

    ``a``, ``b``: ``(m, 2)`` points of the open unit disk. Returns
    ``(vertices, counts)``: ``counts[i]`` points of edge ``i`` (``samples``
    each, or with ``samples=None`` as few as keep the polyline within ``tol``
    of the arc, from 2 for a diameter up to 64), stacked edge after edge in
    ``vertices`` ``(sum(counts), 2)``. Edge ``i`` runs from ``a[i]`` (exactly)
    to ``b[i]`` (exactly) along the arc of the circle orthogonal to the unit
    circle through both, or the diameter through them.

    With complex coordinates, every circle or line through ``a`` and ``b``
    is ``z(t) = (a (1 - t) + b l t) / ((1 - t) + l t)``, ``t`` in ``[0, 1]``,
    for a unit ``l = e^{i phi}``: along it the angle of
    ``(z - a)/(b - z)`` is ``phi``, so ``phi`` is the inscribed angle of
    the chord ``ab`` (the locus of a constant inscribed angle is a circular
    arc; ``phi = 0`` the straight segment). The geodesic circle also passes
    through the inverse point ``a* = a/|a|^2``, which lies off the arc, so
    ``phi = arg((a - a*)/(b - a*)) = arg(1 - a conj(b))`` (the factor
    ``|a|^2 > 0`` divides out, and ``a = 0`` gives ``phi = 0``: the
    diameter). Collinear end points give ``Im(1 - a conj(b)) = a x b = 0``
    and ``phi = 0`` exactly, so the diameter case needs no threshold. The
    real part ``1 - a.b`` is formed as ``(g_a + g_b + |a - b|^2)/2`` with
    ``g = 1 - |.|^2``, which does not cancel for two points near the rim.
    Since ``|phi| < pi/2`` the parameter speed varies by at most a factor
    ``1/cos(phi/2)^2 < 2``, so uniform ``t`` spaces the samples evenly
    enough to draw. Evaluated as ``z = a + (b - a) w``,
    ``w = t / (t + (1 - t) conj(l))``, in real arithmetic.
    """
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    m = a.shape[0]
    ga = 1.0 - np.einsum("ij,ij->i", a, a)
    gb = 1.0 - np.einsum("ij,ij->i", b, b)
    diff = b - a
    chord2 = np.einsum("ij,ij->i", diff, diff)
    re = 0.5 * (ga + gb + chord2)  # 1 - a.b
    im = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]  # Im(1 - a conj(b)) = a x b
    h = np.hypot(re, im)
    cos, sin = re / h, im / h
    if samples is None:
        # A polyline of k equal pieces on an arc of radius r turning by 2|phi|
        # strays r (1 - cos(phi/k)) ~ r phi^2 / (2 k^2) from it, with
        # r = |b - a| / (2 sin|phi|); uniform t makes the pieces unequal, the
        # longest up to 1/cos(phi/2)^2 = 2/(1 + cos(phi)) times the mean.
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.sqrt(chord2) / (2.0 * np.abs(sin))
            phi = np.arctan2(np.abs(sin), cos)
            k = np.ceil(2.0 / (1.0 + cos) * phi * np.sqrt(r / (2.0 * tol)))
        k = np.where(np.isfinite(k), k, 1.0)
        counts = (np.clip(k, 1.0, 63.0) + 1.0).astype(np.int64)
    else:
        counts = np.full(m, int(samples), dtype=np.int64)
    total = int(counts.sum())
    edge = np.repeat(np.arange(m), counts)
    first = np.cumsum(counts) - counts
    t = (np.arange(total) - first[edge]) / (counts[edge] - 1.0)
    s = 1.0 - t
    # w = t / (t + s conj(l)) = t (dr + i s sin) / (dr^2 + (s sin)^2), dr = t + s cos
    dr = t + s * cos[edge]
    di = s * sin[edge]
    q = t / (dr * dr + di * di)
    wr, wi = dr * q, di * q
    dx, dy = diff[edge, 0], diff[edge, 1]
    out = np.empty((total, 2))
    out[:, 0] = a[edge, 0] + (dx * wr - dy * wi)
    out[:, 1] = a[edge, 1] + (dx * wi + dy * wr)
    last = first + counts - 1
    out[first] = a
    out[last] = b
    return out, counts


@contextlib.contextmanager
def _quiet_rim(c: float) -> Iterator[None]:
    """Points farther than about 38 R from the centre are drawn at the last
    float64 radius: in the exact picture (``c == 1``) that is where they are,
    to far below a pixel, so the clipping warning is dropped; with a radial
    compression they would be drawn too close in, and the warning stays."""
    from ._native import RimClipWarning

    with warnings.catch_warnings():
        if c == 1.0:
            warnings.simplefilter("ignore", RimClipWarning)
        yield


def _compress(p: np.ndarray, c: float) -> np.ndarray:
    """The display transform of ``radial_compression``: unit-disk points at
    hyperbolic distance ``rho`` from the centre moved to radius ``tanh(rho/(2c))``
    along their ray (``rho = 2 artanh |p|``)."""
    r = np.sqrt(np.sum(p * p, axis=-1, keepdims=True))
    with np.errstate(invalid="ignore", divide="ignore"):
        f = np.where(r > 0, np.tanh(np.arctanh(np.minimum(r, 1.0)) / c) / r, 1.0 / c)
    return p * f


def _edges(edges: Any, n: int) -> np.ndarray:
    """``edges`` as an ``(m, 2)`` int64 array of row indices into ``x``."""
    if hasattr(edges, "edges") and hasattr(edges, "nodes"):  # a networkx graph on nodes 0..n-1
        edges = list(edges.edges())
    e = _as_array("edges", edges)
    if e.size == 0:
        return np.zeros((0, 2), dtype=np.int64)
    if e.dtype.kind not in "iu" and not (e.dtype.kind == "f" and np.all(np.isfinite(e)) and np.all(e == np.round(e))):
        raise TypeError(f"edges must be integer indices into the rows of x, got dtype {e.dtype}")
    if e.ndim != 2 or e.shape[1] != 2:
        raise ValueError(f"edges must have shape (m, 2), one (i, j) pair of row indices per edge; got {e.shape}")
    e = e.astype(np.int64)
    bad = np.flatnonzero(np.any((e < 0) | (e >= n), axis=1))
    if bad.size:
        raise ValueError(f"edges: row {bad[0]} = {e[bad[0]].tolist()} refers to a point outside 0..{n - 1}")
    return e


def disk(
    x: Any,
    *,
    edges: Any = None,
    labels: Any = None,
    model: str = "poincare",
    curvature: float = -1.0,
    center: Any = None,
    ax: Any = None,
    radial_compression: float = 1.0,
    arc_samples: Optional[int] = None,
    point_size: Optional[float] = None,
    point_color: Any = "C0",
    edge_color: Any = "0.55",
    edge_width: float = 0.6,
    legend: bool = True,
    boundary: bool = True,
) -> Any:
    """Draw 2-D hyperbolic points (and edges between them) in the Poincaré disk.

    Parameters
    ----------
    x : (n, 2) points of ``model`` (``(n, 3)`` on the hyperboloid); ``(n, 1)``
        points are drawn on the horizontal diameter. Half-space points are
        converted to the Poincaré disk (:func:`gyrokit.convert`); Klein and
        hyperboloid points are placed from their own model (the log map at
        the centre, parallel transport to the origin, the disk's exp map),
        so hyperboloid points beyond the disk's float64 range can be drawn
        around a ``center`` near them. Higher dimensions raise
        ``ValueError``: reduce them first with
        ``gyrokit.PrincipalGeodesicAnalysis(2).fit_transform(x)``.
    edges : (m, 2) int array of row indices into ``x`` (or a networkx graph on
        the nodes ``0..n-1``), drawn as geodesic arcs in one ``LineCollection``.
    labels : (n,) hashable values (the rules of :func:`gyrokit.frechet_mean`);
        points are coloured by label and the legend has one entry per label.
    model, curvature : the model of ``x`` and ``center``, and K < 0. The disk
        is drawn at its true radius ``R = 1/sqrt(-K)``.
    center : a point of ``model`` (or an int: the row of ``x``) moved to the
        middle by the Möbius translation ``p -> (-c) ⊕ p`` (an isometry).
    ax : a matplotlib Axes to draw into (default: a new figure's).
    radial_compression : ``c >= 1``, display only: a point at hyperbolic
        distance ``rho`` from the centre is drawn at radius
        ``R tanh(rho / (2 R c))``, spreading out points crowded at the rim;
        ``c = 1`` (default) is the exact Poincaré picture. With ``c > 1`` the
        Axes is annotated "display: hyperbolic radii / c".
        Points farther than about 38 R from the centre (hyperboloid data can
        be) are drawn at the rim; with ``c > 1`` a ``RimClipWarning`` says
        they are drawn too close in.
    arc_samples : points per drawn arc; default ``None``: as many as keep the
        polyline within 2.5e-4 R of the true arc (2 for a diameter, at most 64;
        32 each with ``radial_compression > 1``).
    point_size, point_color : marker size (default from ``n``) and colour when
        there are no labels.
    edge_color, edge_width : the arcs' colour and line width.
    legend : draw the legend of the labels.
    boundary : draw the boundary circle.

    Returns the matplotlib Axes. The Axes is square, without ticks, in the
    Poincaré coordinates of the (translated) points; the arcs are
    ``ax.collections`` entries with ``gid == "gyrokit-edges"``, the points
    ``gid == "gyrokit-points"``.
    """
    plt, LineCollection, Circle = _matplotlib()
    from . import convert, poincare  # noqa: PLC0415  (the package imports this module)

    if not isinstance(model, str) or model not in _MODELS:
        raise ValueError(f"model must be one of {list(_MODELS)}, got {model!r}")
    k = real("curvature", curvature)
    if not (np.isfinite(k) and k < 0):
        raise ValueError(f"curvature must be finite and < 0, got {curvature!r}")
    R = 1.0 / np.sqrt(-k)
    c = real("radial_compression", radial_compression)
    if not (np.isfinite(c) and c >= 1.0):
        raise ValueError(f"radial_compression must be a finite number >= 1, got {radial_compression!r}")
    if arc_samples is not None:
        arc_samples = count("arc_samples", arc_samples, 2)
    if point_size is not None:
        point_size = real("point_size", point_size)
        if not (np.isfinite(point_size) and point_size > 0):
            raise ValueError(f"point_size must be a finite number > 0, got {point_size!r}")
    edge_width = real("edge_width", edge_width)
    if not (np.isfinite(edge_width) and edge_width >= 0):
        raise ValueError(f"edge_width must be a finite number >= 0, got {edge_width!r}")
    if ax is not None:
        from matplotlib.axes import Axes

        if not isinstance(ax, Axes):
            raise TypeError(f"ax must be a matplotlib Axes (or None for a new figure), got {type(ax).__name__}")

    a = _as_array("x", x)
    if a.dtype.kind not in "biuf":
        raise TypeError(f"x must be an array of real numbers, got dtype {a.dtype}")
    if a.ndim != 2:
        raise ValueError(f"x must be a 2-D array of points (n, width); got shape {a.shape}")
    d = a.shape[1] - (1 if model == "hyperboloid" else 0)
    if d > 2:
        raise ValueError(
            f"x holds {d}-dimensional points and the disk shows 2: reduce them first, e.g. "
            f"gyrokit.PrincipalGeodesicAnalysis(2, model={model!r}).fit_transform(x) (its result is a Poincaré disk)"
        )
    if d < 1:
        raise ValueError(f"x must hold points of dimension 1 or 2; got width {a.shape[1]} for model {model!r}")
    n = a.shape[0]
    hub = _hub_of(model)
    P = np.asarray(convert(a.astype(np.float64), model, hub, curvature=k), dtype=np.float64).reshape(n, a.shape[1])
    base = None
    if center is not None:
        if isinstance(center, (int, np.integer)) and not isinstance(center, (bool, np.bool_)):
            i = int(center)
            if not -n <= i < n:
                raise ValueError(f"center = {i} is not a row of x (n = {n})")
            base = P[i]
        else:
            cm = _as_array("center", center, np.float64)
            if cm.shape != (a.shape[1],):
                raise ValueError(f"center must be one point of {model} with {a.shape[1]} coordinates, got shape {cm.shape}")
            base = np.asarray(convert(cm, model, hub, curvature=k), dtype=np.float64).reshape(-1)
    if hub == "poincare" and base is None:
        p = P
    elif n == 0:
        p = np.zeros((0, d))
    elif hub == "poincare":
        # the Möbius translation taking the centre to the origin
        with _quiet_rim(c):
            p = np.asarray(poincare.add(-base, P, curvature=k, on_rim="clip"), dtype=np.float64)
    else:
        # Klein and hyperboloid points placed from their own model: the
        # isometry taking the centre (or the origin) to the origin without
        # rotation is exp_0 o (transport to the origin) o log_centre (the
        # Möbius translation of the Poincaré case), so hyperboloid points
        # beyond the ball's float64 range are drawn too (at the rim when
        # farther than about 38 R from the centre)
        W = _tangent_at(P, _origin_of(hub, d, k) if base is None else base, hub, d, k)
        with _quiet_rim(c):
            p = np.asarray(poincare.exp_map(W / 2.0, curvature=k, on_rim="clip"), dtype=np.float64)
    if d == 1:
        p = np.concatenate([p, np.zeros((n, 1))], axis=1)

    u = p / R  # the unit disk: the arc and display formulas are scale-free
    verts = counts = None
    if edges is not None:
        e = _edges(edges, n)
        # bent by the display transform, arcs need their samples whatever their shape
        samples = arc_samples if arc_samples is not None or c == 1.0 else 32
        verts, counts = _geodesic_arcs(u[e[:, 0]], u[e[:, 1]], samples)
    if c != 1.0:
        u = _compress(u, c)
        if verts is not None:
            verts = _compress(verts, c)

    if labels is not None:
        from .centroids import _factorize

        try:
            codes, values = _factorize(labels)
        except (ValueError, TypeError):
            raise
        except Exception as e:  # noqa: BLE001 - an object whose __array__ raises
            raise TypeError(f"labels must be one hashable value per point: {type(e).__name__}: {e}") from None
        codes = np.asarray(codes).reshape(-1)
        if codes.shape[0] != n:
            raise ValueError(f"labels must have one entry per point: {codes.shape[0]} labels for {n} points")
        if values is None:  # integer labels: their distinct values, in order
            values, codes = np.unique(codes, return_inverse=True)
        codes = np.asarray(codes, dtype=np.int64).reshape(-1)

    if ax is None:
        _, ax = plt.subplots(figsize=(6, 6))
    if boundary:
        ax.add_patch(Circle((0.0, 0.0), R, fill=False, color="0.2", lw=1.0, gid="gyrokit-boundary"))
    if verts is not None and len(counts):
        # One LineCollection; its segments are views into one vertex array.
        segments = np.split(verts * R, np.cumsum(counts)[:-1])
        lc = LineCollection(segments, colors=edge_color, linewidths=edge_width, zorder=1, gid="gyrokit-edges")
        ax.add_collection(lc, autolim=False)

    if point_size is None:
        point_size = float(np.clip(2000.0 / max(n, 1), 2.0, 40.0))
    xy = u * R
    if labels is None:
        ax.scatter(xy[:, 0], xy[:, 1], s=point_size, c=[point_color], zorder=2, gid="gyrokit-points", linewidths=0)
    else:
        m = len(values)
        cmap = plt.get_cmap("tab10" if m <= 10 else "tab20" if m <= 20 else "turbo")
        colors = cmap(np.arange(m) % cmap.N) if m <= 20 else cmap(np.linspace(0.0, 1.0, m))
        ax.scatter(xy[:, 0], xy[:, 1], s=point_size, c=colors[codes], zorder=2, gid="gyrokit-points", linewidths=0)
        if legend:
            from matplotlib.lines import Line2D

            handles = [
                Line2D([], [], ls="", marker="o", color=colors[j], label=str(v)) for j, v in enumerate(list(values))
            ]
            ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False,
                      ncol=1 if m <= 25 else 2, fontsize="small")
    if c != 1.0:
        ax.text(0.0, -1.08 * R, f"display: hyperbolic radii / {c:g}", ha="center", va="top", fontsize="small",
                gid="gyrokit-display-note")
    lim = 1.04 * R
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_aspect("equal")
    ax.set_axis_off()
    return ax
