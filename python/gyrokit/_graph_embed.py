"""Learned embeddings of graphs (``gyrokit.embed.graph``); the work is done by
the Rust core (``src/embed/graph.rs``), this module handles the arguments, the
progress bar and interruption."""

from __future__ import annotations

import math
import sys
import time
import warnings
from typing import Any, List, Optional, Tuple

import numpy as np

from . import _args, _native
from .embed import Embedding

#: Seconds of work per call into the core: the progress bar and Ctrl-C are
#: handled between calls.
_SLICE_SECONDS = 0.1


class TrainingInterruptedWarning(UserWarning):
    """Training was interrupted (Ctrl-C); the points reached so far were returned."""


def _is_networkx(g: Any) -> bool:
    return type(g).__module__.split(".")[0] == "networkx"


def _from_networkx(g: Any) -> Tuple[np.ndarray, int]:
    nodes = list(g.nodes)
    index = {v: i for i, v in enumerate(nodes)}
    rows: List[Tuple[int, int]] = []
    for u, v in g.edges():
        if u == v:
            raise ValueError(f"edges: the graph has a self-loop at node {u!r}")
        rows.append((index[u], index[v]))
    return np.array(rows, dtype=np.int64).reshape(-1, 2), len(nodes)


def _edge_array(edges: Any) -> np.ndarray:
    a = np.asarray(edges)
    if a.dtype.kind not in "iu":
        if a.dtype.kind == "f" and a.size and np.all(np.isfinite(a)) and np.all(a == np.round(a)):
            a = a.astype(np.int64)
        else:
            raise TypeError(f"edges must be an (m, 2) array of integer node ids, got dtype {a.dtype}")
    if a.ndim != 2 or a.shape[1] != 2:
        raise ValueError(f"edges must have shape (m, 2), got {a.shape}")
    if a.shape[0] == 0:
        raise ValueError("edges is empty: at least one edge (a row (u, v)) is needed")
    if a.dtype.kind == "u" and a.size and a.max() > np.iinfo(np.int64).max:
        i = int(np.argmax(a.max(axis=1) > np.iinfo(np.int64).max))
        raise ValueError(f"edges: row {i} has a node id out of range")
    return np.ascontiguousarray(a, dtype=np.int64)


def _edge_rows(edges: Any, n_nodes: Any, empty_ok: bool = False) -> Tuple[np.ndarray, int]:
    """An ``(m, 2)`` array of node ids and the node count: ``n_nodes``, or
    the largest id + 1 (a negative id named by its row). ``empty_ok``: no
    rows are allowed when ``n_nodes`` is given."""
    if empty_ok and n_nodes is not None and np.asarray(edges).size == 0:
        return np.zeros((0, 2), dtype=np.int64), _args.count("n_nodes", n_nodes, 1)
    e = _edge_array(edges)
    if n_nodes is not None:
        return e, _args.count("n_nodes", n_nodes, 1)
    if int(e.min()) < 0:
        i = int(np.argmax(e.min(axis=1) < 0))
        raise ValueError(f"edges: row {i} ({e[i, 0]}, {e[i, 1]}) has a negative node id")
    return e, int(e.max()) + 1


def _progress_bar(progress: Any, total: int) -> Any:
    if progress is False:
        return None
    try:
        from tqdm.auto import tqdm
    except ImportError:
        if progress is True:
            raise ImportError(
                "progress=True needs tqdm, an optional dependency: pip install gyrokit[progress]"
            ) from None
        return None
    # disable=None: off when stderr is not a terminal (unless asked for).
    return tqdm(
        total=total,
        unit="edge",
        unit_scale=True,
        disable=None if progress is None else False,
        file=sys.stderr,
        dynamic_ncols=True,
    )


def graph(
    edges: Any,
    dim: int = 10,
    *,
    model: str = "poincare",
    curvature: float = -1.0,
    negatives: int = 10,
    epochs: int = 100,
    learning_rate: float = 0.3,
    burn_in: int = 10,
    seed: int = 0,
    progress: Optional[bool] = None,
    batch_size: int = 256,
    burn_in_factor: float = 0.1,
    n_nodes: Optional[int] = None,
    directed: bool = False,
    node_steps: str = "sum",
    schedule: str = "constant",
    degree_epochs: Optional[int] = None,
    degree_power: float = 0.75,
    radial_search: bool = False,
    init: Any = None,
    hard_negatives: int = 0,
    hard_pool: int = 128,
    hard_every: int = 5,
) -> Embedding:
    """Learn an embedding of a graph by Riemannian SGD on the ranking loss of
    Nickel & Kiela (2017; hyperboloid: 2018).

    ``edges``: an ``(m, 2)`` integer array of node ids ``0 .. n_nodes - 1``
    (``n_nodes`` defaults to the largest id + 1), or a networkx graph, whose
    nodes are numbered in the order of ``list(G.nodes)`` (row ``i`` of the
    result is that list's node ``i``). For a hierarchy give the transitive
    closure, rows ``(descendant, ancestor)``. The graph is undirected, as in
    graph reconstruction (``gyrokit.metrics.reconstruction``): each row is a
    positive pair in both directions, ``(u, v)`` and ``(v, u)``, so that an
    inner node of a hierarchy also ranks its descendants above the rest
    (on a balanced tree's closure this lifts the mean average precision from
    about 0.94 to 0.97); ``directed=True`` uses each row as given only, as
    in Nickel & Kiela's experiments (half the work per epoch).

    For every positive ``(u, v)``, ``negatives`` nodes are drawn uniformly among those not
    adjacent to ``u`` (in either direction; with ``directed=True``, among the
    nodes ``w`` without a row ``(u, w)``, as in Nickel & Kiela's loss, so a
    descendant of ``u`` in a hierarchy's closure can be drawn), and the loss is
    ``-log(exp(-d(u, v)) / sum over {v} and the negatives of exp(-d(u, w)))``,
    distances in the metric of ``curvature``. Each step is the model's exact
    exponential map of ``-learning_rate`` times the Riemannian gradient (the
    loss is summed over a batch, so the rate is per positive); a Poincaré step
    whose exact end lies beyond what float64 holds (within 2^-53 R of the
    sphere) is halved, never clamped. The first ``burn_in`` epochs run at
    ``learning_rate * burn_in_factor``. Starting points are uniform in
    ``[-1e-3 R, 1e-3 R]^dim`` (their images on the hyperboloid), unless
    ``init`` gives them.

    ``init``: starting points, an ``(n_nodes, width)`` array of points of
    ``model`` (width ``dim``, ``dim + 1`` on the hyperboloid), or an
    :class:`~gyrokit.embed.Embedding` of that model and curvature, such as
    the result of an earlier call: training continues from it with the
    arguments of this call (the random draws of a run do not depend on the
    start, so continuing from the points of an ``epochs=0`` run repeats the
    run from scratch bit for bit). A bad row is a ``ValueError`` naming it.
    The use that motivated it, on a hierarchy's closure: train undirected
    first, then continue with ``directed=True`` and no burn-in. Measured
    (d = 10, seed 0; directed mean average precision / mean rank of
    ``gyrokit.metrics.reconstruction``; README, Benchmarks): on the 82 115
    WordNet nouns, 20 undirected epochs (10 negatives, rate 0.3, burn-in 2,
    ``degree_epochs=2``, ``radial_search=True``) then 40 directed epochs
    (``burn_in=0``) reached 0.814 / 12.4 in 164 s (40 + 40 epochs, 50
    negatives in the second stage: 0.832 / 11.3 in 448 s), where the best
    single runs reached 0.820 / 26.8 in about 950 s; on the 4017-noun
    ``animal`` subtree 100 undirected then 50 directed epochs reached
    0.948 / 1.48 against 0.869 / 3.68 for 100 directed epochs alone.
    On a taxonomy, start from its combinatorial embedding instead of random
    points (``init=gyrokit.embed.hierarchy(edges, dim, scale=0.75)``,
    ``burn_in=0``): on WordNet 10 undirected epochs from it, then 36
    directed ones with 40 negatives, ``hard_negatives=10`` and a linearly
    decaying rate, reached 0.947 / 3.79 in 769 s on 2 threads, where 40
    undirected epochs from random points then 40 directed ones (50
    negatives) reached 0.886 / 9.15.

    ``node_steps``: how a node touched by several positives of one batch
    moves. ``"sum"`` takes the summed step (what sequential SGD would do,
    evaluated at one point); ``"mean"`` the mean of the contributions, so that
    no node moves more than one positive's step per batch. On a hierarchy's
    closure the nodes near the root take part in a large share of all
    positives, and their summed steps overshoot at large batches and rates;
    ``"mean"`` allows both to grow (see the benchmark figures in the README).

    ``degree_epochs``: during the first ``degree_epochs`` epochs (default:
    the ``burn_in`` epochs) the negatives of ``u`` are drawn with probability
    proportional to ``c ** degree_power`` among its admissible ones, ``c`` a
    node's number of positives (its degree; the exponent 0.75 is the
    convention of word2vec's negative sampling), by Walker's alias method, a
    draw excluded for ``u`` drawn again; afterwards uniformly. Early on this
    confronts every node with the hubs of the graph. ``0``: uniform
    negatives throughout. Measured (d = 10; directed / undirected protocol
    of ``gyrokit.metrics.reconstruction``; README, Benchmarks): on all
    82 115 WordNet nouns (50 negatives, 40 epochs, rate 0.5 decaying
    linearly, burn-in 2) ``degree_epochs=2`` against 0 moved the mean
    average precision from 0.797 / 0.767 to 0.820 / 0.797 and the mean rank
    from 38.1 / 474 to 26.8 / 267; on the WordNet ``animal`` subtree (4017
    nodes) with the defaults otherwise (100 epochs), the mean rank went from
    8.8 / 20.7 to 6.5 / 11.6 and the mean average precision from
    0.820 / 0.847 to 0.834 / 0.864.

    ``radial_search``: after every epoch from the end of burn-in on, every
    point's hyperbolic radius (its distance to the origin) is multiplied by
    the common factor ``f`` in ``[2/3, 3/2]`` that minimises the loss of a
    sample of about 65 000 pairs (positives drawn uniformly, each with
    ``negatives`` uniform negatives; golden-section search on ``ln f``),
    directions kept, and only if that lowers the sample's loss. SGD moves
    the radii of a hierarchy's nodes only slowly: on the WordNet nouns the
    loss still fell along this one direction after 20 epochs (a sample's
    loss 0.338 at ``f = 1``, 0.323 at ``f = 1.3``). Measured (d = 10,
    10 negatives, 20 epochs, rate 0.3, burn-in 2; README, Benchmarks): the
    mean average precision went from 0.664 / 0.658 to 0.730 / 0.763
    (undirected / directed protocol of ``gyrokit.metrics.reconstruction``),
    the directed mean rank from 69.7 to 28.0, but the undirected mean rank
    from 205 to 243 (inner nodes rank their far descendants lower), for 6%
    more time. It reaches the plateau sooner without raising it: with 50
    negatives over 40 epochs (rate 0.5 decaying linearly) the MAP was lower
    with the search (0.753 / 0.783 against 0.797 / 0.820) at a lower loss,
    and on a small balanced tree it cost MAP (0.975 to 0.943). Default off.

    ``hard_negatives``: this many of the ``negatives`` of each positive
    ``(u, v)`` are drawn uniformly from ``u``'s ``hard_pool`` nearest
    admissible nodes in the current embedding (an exact k-nearest-neighbour
    search over all nodes, at the start of every ``hard_every``-th epoch
    after burn-in), and such a draw ``w`` is kept only if it violates the
    ranking of the positive (``w`` is closer to ``u`` than ``v`` is);
    otherwise the slot takes the ordinary draw. Uniform negatives almost
    never hit the few nodes that outrank a node's true neighbours (on the
    WordNet nouns about 10 of 82 115 per row, on average); these draws aim
    at them. Measured on
    the WordNet noun closure at d = 10, directed stage of 40 epochs with 50
    negatives from an undirected start (README, Benchmarks): directed MAP /
    mean rank 0.832 / 11.3 without, 0.879 / 9.76 with ``hard_negatives=10``
    (pool 128, every 5 epochs), in about the same training time (440 s for
    both stages against 448 s, quiet machine).
    Keeping every pool draw (the nearest non-neighbours, siblings included)
    measured worse (0.770 / 35.8). Default 0 (off).

    ``schedule``: ``"constant"`` keeps ``learning_rate`` after burn-in;
    ``"linear"`` lowers it linearly with the positives done, to
    ``learning_rate / 100`` at the end of the last epoch (common practice
    for SGD with a fixed budget of epochs; it needs ``epochs > burn_in``).

    ``model``: ``"poincare"`` (points ``(n, dim)``) or ``"hyperboloid"``
    (``(n, dim + 1)``, holding points far beyond the ball's float64 reach of
    about 37 R). Both take exact exponential maps of the same intrinsic
    gradient from the same start, so their results agree up to rounding.

    Parallel scheme: batch-synchronous on all cores. In each batch of
    ``batch_size`` positives every gradient is computed from the points of
    the previous batch, the contributions to each node are summed in a fixed
    order and each touched node takes one step. Results depend on ``seed``
    only, never on the number of threads (bit for bit). Against lock-free
    (Hogwild) updates this costs staleness within a batch (a node touched
    several times takes one summed step, which limits the batch size: on
    WordNet nouns batches of 4096 diverged where 256 converged) and a
    grouping pass (about 5-7% of the CPU time); ``batch_size=1`` is plain
    sequential SGD. ``node_steps="mean"`` bounds every node's step per batch
    (see below), which lets the batch grow. Short steps use the Poincaré
    exponential map's closed form in float64 when the exact gap of the result
    (recomputed from its coordinates) is at least 2^-26 (about 19 R from the
    origin), else the double-double form or, on the hyperboloid, its own
    exponential map; the hyperboloid takes them from its points' Poincaré
    images and stores the hyperboloid image of the result (one WordNet epoch
    from trained points: 10.5 s instead of 27.0 s on one thread).

    ``progress``: a tqdm bar (epoch, loss, edges per second; tqdm is the
    optional extra ``pip install gyrokit[progress]``): ``None`` shows it when
    tqdm is installed and stderr is a terminal, ``True`` always, ``False``
    never. Ctrl-C stops the training between two slices of about 0.1 s and
    returns the points reached so far, with a ``TrainingInterruptedWarning``.

    Returns an :class:`~gyrokit.embed.Embedding` with ``points``, ``model``,
    ``curvature``, ``loss`` (mean loss per completed epoch) and ``epochs``
    (completed epochs).
    """
    if isinstance(model, str) and model not in ("poincare", "hyperboloid"):
        raise ValueError(
            f"model must be 'poincare' or 'hyperboloid' for learned embeddings, got {model!r} "
            "(convert the result with gyrokit.convert)"
        )
    if _is_networkx(edges):
        if n_nodes is not None:
            raise ValueError("n_nodes is taken from the networkx graph; leave it None")
        e, n = _from_networkx(edges)
        if e.shape[0] == 0:
            raise ValueError("edges: the networkx graph has no edges")
    else:
        e, n = _edge_rows(edges, n_nodes)
    dim = _args.count("dim", dim, 1)
    negatives = _args.count("negatives", negatives, 1)
    epochs = _args.count("epochs", epochs, 0)
    burn_in = _args.count("burn_in", burn_in, 0)
    batch_size = _args.count("batch_size", batch_size, 1)
    seed = _args.count("seed", seed, 0)
    learning_rate = _args.real("learning_rate", learning_rate)
    if not (math.isfinite(learning_rate) and learning_rate > 0):
        raise ValueError(f"learning_rate must be a finite positive number, got {learning_rate}")
    burn_in_factor = _args.real("burn_in_factor", burn_in_factor)
    degree_epochs = burn_in if degree_epochs is None else _args.count("degree_epochs", degree_epochs, 0)
    degree_power = _args.real("degree_power", degree_power)  # the core checks its range
    hard_negatives = _args.count("hard_negatives", hard_negatives, 0)  # the core checks it against negatives
    hard_pool = _args.count("hard_pool", hard_pool, 1)
    hard_every = _args.count("hard_every", hard_every, 1)
    curvature = _args.real("curvature", curvature)
    if not isinstance(radial_search, (bool, np.bool_)):
        raise TypeError(f"radial_search must be True or False, got {radial_search!r}")
    if not isinstance(directed, (bool, np.bool_)):
        raise TypeError(f"directed must be True or False, got {directed!r}")
    if node_steps not in ("sum", "mean"):
        raise ValueError(f"node_steps must be 'sum' or 'mean', got {node_steps!r}")
    if schedule not in ("constant", "linear"):
        raise ValueError(f"schedule must be 'constant' or 'linear', got {schedule!r}")
    if schedule == "linear" and epochs <= burn_in:
        raise ValueError(
            f"schedule='linear' needs epochs > burn_in (the rate decays after burn-in), got epochs={epochs}, "
            f"burn_in={burn_in}"
        )
    if progress not in (None, True, False):
        raise TypeError(f"progress must be None, True or False, got {progress!r}")
    if isinstance(init, Embedding):
        if init.model != model or init.curvature != curvature:
            hint = (
                "convert its points with gyrokit.convert" if init.model != model
                else "pass points of this curvature's ball"
            )
            raise ValueError(
                f"init is an embedding in model {init.model!r} at curvature {init.curvature}; this training uses "
                f"model {model!r} at curvature {curvature} ({hint})"
            )
        init = init.points

    trainer = _native.GraphTrainer(
        e, n, dim, model, curvature, negatives, learning_rate, burn_in, burn_in_factor, batch_size, 1e-3, seed,
        bool(directed), node_steps == "mean", epochs if schedule == "linear" else 0, degree_epochs, degree_power,
        bool(radial_search), init, hard_negatives, hard_pool, hard_every,
    )
    m = trainer.n_edges
    bar = _progress_bar(progress, epochs * m) if epochs > 0 else None
    budget = max(batch_size, 1024)
    try:
        while trainer.epoch < epochs:
            t0 = time.perf_counter()
            done, loss = trainer.run(budget)
            dt = time.perf_counter() - t0
            # Aim at slices of about _SLICE_SECONDS (batches are never split,
            # so the slicing does not change the result).
            if dt > 0:
                budget = int(min(max(budget * min(max(_SLICE_SECONDS / dt, 0.5), 2.0), batch_size), 1 << 30))
            if bar is not None:
                bar.update(done)
                if loss is not None:
                    bar.set_postfix(epoch=f"{trainer.epoch}/{epochs}", loss=f"{loss:.4g}", refresh=False)
    except KeyboardInterrupt:
        warnings.warn(
            f"training interrupted after {trainer.epoch} of {epochs} epochs "
            f"(and {trainer.position} of {m} positives of the next): returning the points reached so far",
            TrainingInterruptedWarning,
            stacklevel=2,
        )
    finally:
        if bar is not None:
            bar.close()
    if trainer.shortened:
        warnings.warn(
            f"{trainer.shortened} step halvings kept points representable near the rim of the float64 "
            f"{model} ball; a smaller learning_rate or model='hyperboloid' avoids them",
            RuntimeWarning,
            stacklevel=2,
        )
    return Embedding(
        points=trainer.points(),
        model=model,
        curvature=curvature,
        loss=np.asarray(trainer.losses, dtype=np.float64),
        epochs=trainer.epoch,
    )


__all__ = ["graph", "TrainingInterruptedWarning"]
