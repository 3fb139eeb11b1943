"""gk.metrics.reconstruction: exact mean average precision and mean rank.

References: scikit-learn's ``label_ranking_average_precision_score`` for
the mean average precision (its tie rule: every item scored at least as
high as a relevant one ranks at or above it), and a brute-force numpy count
of the SPEC's mean-rank definition over the full distance matrix
(``gk.distance_matrix``, whose distances are bit-identical to the
reconstruction kernel's ranking quantity)."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from sklearn.metrics import label_ranking_average_precision_score

import gyrokit as gk
from conftest import MODELS, to_model, ball_points


def _adjacency(n, edges):
    a = np.zeros((n, n), dtype=bool)
    a[edges[:, 0], edges[:, 1]] = True
    a[edges[:, 1], edges[:, 0]] = True
    return a


def _reference(d, a):
    """(MAP from scikit-learn, mean rank from a brute-force count, per-node AP,
    per-arc ranks as a dict (u, v) -> rank)."""
    n = d.shape[0]
    # Scores: -distance; the node itself gets a score below every other,
    # so it never ranks ahead of anything (the SPEC ranks v != u only).
    s = -d.copy()
    np.fill_diagonal(s, -d.max() - 1.0)
    has = a.any(axis=1)
    # scikit-learn, label_ranking_average_precision_score (its tie rule).
    m = label_ranking_average_precision_score(a[has], s[has])
    per_node = np.full(n, np.nan)
    for u in np.flatnonzero(has):
        per_node[u] = label_ranking_average_precision_score(a[u : u + 1], s[u : u + 1])
    # Mean rank, the SPEC's definition counted directly (common practice).
    ranks = {}
    idx = np.arange(n)
    for u in np.flatnonzero(has):
        non = (~a[u]) & (idx != u)
        for v in np.flatnonzero(a[u]):
            ranks[(int(u), int(v))] = 1 + np.count_nonzero(non & (d[u] < d[u, v]))
    return m, float(np.mean(list(ranks.values()))), per_node, ranks


def _assert_matches_reference(r, d, a):
    """``r`` against :func:`_reference` on distances ``d`` and adjacency ``a``."""
    m, mr, per, ranks = _reference(d, a)
    assert r.mean_average_precision == pytest.approx(m, rel=1e-12)
    assert r.mean_rank == pytest.approx(mr, rel=1e-12)
    has = a.any(axis=1)
    np.testing.assert_array_equal(r.nodes, np.flatnonzero(has))
    np.testing.assert_allclose(r.average_precision, per[has], rtol=1e-12)
    assert r.ranked_edges == int(a.sum())
    # every arc once, sorted by (u, v), with its rank
    np.testing.assert_array_equal(r.arcs, np.argwhere(a))
    assert r.arcs.dtype == np.int64 and r.ranks.dtype == np.int64
    np.testing.assert_array_equal(r.ranks, [ranks[(u, v)] for u, v in r.arcs])


@pytest.mark.parametrize("model", MODELS)
def test_random_graph_matches_sklearn_and_brute_force(model):
    rng = np.random.default_rng(7 + MODELS.index(model))
    n, dim = 157, 3
    p = ball_points(rng, n, dim, 3.0)
    # duplicated points: exact ties (equal h, equal distance)
    p[10:20] = p[0:10]
    x = to_model(p, model)
    e = rng.integers(0, n, (500, 2))
    e = e[e[:, 0] != e[:, 1]]
    # a hub of high degree (more than 16 neighbours: the binary-search path)
    e = np.vstack([e, np.column_stack([np.full(40, 3), np.arange(100, 140)])])
    r = gk.metrics.reconstruction(x, e, model=model)
    d = gk.distance_matrix(x, model=model)
    a = _adjacency(n, e)
    _assert_matches_reference(r, d, a)


@pytest.mark.parametrize("model", ["poincare", "hyperboloid"])
def test_directed_graph_matches_sklearn_and_brute_force(model):
    # directed=True: N(u) = the targets of u's rows only (Nickel & Kiela
    # 2017, sec. 4.1: each observed (u, v) ranked among {v' : (u, v') not
    # observed}); the same references on the one-way adjacency matrix
    rng = np.random.default_rng(31)
    n, dim = 143, 4
    p = ball_points(rng, n, dim, 3.0)
    p[5:9] = p[0:4]
    x = to_model(p, model)
    e = rng.integers(0, n, (400, 2))
    e = e[e[:, 0] != e[:, 1]]
    # a node with many targets, rows repeated, and both directions of a pair
    e = np.vstack([e, np.column_stack([np.full(30, 7), np.arange(60, 90)]), e[:5], [[1, 2], [2, 1]]])
    r = gk.metrics.reconstruction(x, e, model=model, directed=True)
    d = gk.distance_matrix(x, model=model)
    a = np.zeros((n, n), dtype=bool)
    a[e[:, 0], e[:, 1]] = True
    _assert_matches_reference(r, d, a)
    # a node pointing at u ranks against u's targets in the directed score
    # only: on a chain 0 -> 1 -> 2 placed 0, 1, 2 along a line, node 1's only
    # target 2 is as far as node 0 (a non-neighbour when directed)
    xc = np.array([[-0.5, 0.0], [0.0, 0.0], [0.5, 0.0]])
    ch = np.array([[0, 1], [1, 2]])
    assert gk.metrics.reconstruction(xc, ch).mean_rank == 1.0
    rd = gk.metrics.reconstruction(xc, ch, directed=True)
    assert rd.ranked_edges == 2 and rd.mean_rank == 1.0
    assert rd.average_precision.tolist() == [1.0, 0.5]  # the tie with node 0 counts against
    with pytest.raises(TypeError, match="directed"):
        gk.metrics.reconstruction(xc, ch, directed="yes")


def test_ties_with_neighbours_and_non_neighbours():
    # Five points on a line in the disc; node 0's neighbours are 1 and 3,
    # and node 2 duplicates node 1, node 4 duplicates node 3.
    x = np.array([[0.0, 0.0], [0.2, 0.0], [0.2, 0.0], [0.5, 0.0], [0.5, 0.0]])
    e = np.array([[0, 1], [0, 3]])
    r = gk.metrics.reconstruction(x, e)
    # Hand count (the SPEC's definitions): for u = 0, v = 1 has 2 nodes at
    # distance <= d(0,1) (1 and its duplicate 2), 1 neighbour among them:
    # precision 1/2; v = 3 has 4 nodes at <= d(0,3), 2 neighbours: 1/2.
    # So AP(0) = 1/2. Node 1: its neighbour 0 is behind node 2 (distance 0):
    # precision 1/2.
    # Node 3: neighbour 0 is farthest but node 4 (distance 0), 1, 2 are closer:
    # precision 1/4.
    np.testing.assert_array_equal(r.nodes, [0, 1, 3])
    np.testing.assert_allclose(r.average_precision, [0.5, 0.5, 0.25], rtol=1e-15)
    assert r.mean_average_precision == pytest.approx((0.5 + 0.5 + 0.25) / 3, rel=1e-15)
    # Ranks: (0,1): nothing strictly closer than 1 among non-neighbours of 0
    # (2 is tied): 1. (0,3): non-neighbours 2 (0.2) strictly closer, 4 tied: 2.
    # (1,0): node 2 closer: 2. (3,0): nodes 4, 1, 2 closer: 4.
    assert r.mean_rank == pytest.approx((1 + 2 + 2 + 4) / 4, rel=1e-15)
    np.testing.assert_array_equal(r.arcs, [[0, 1], [0, 3], [1, 0], [3, 0]])
    np.testing.assert_array_equal(r.ranks, [1, 2, 2, 4])


def test_networkx_graph_and_duplicate_edges():
    rng = np.random.default_rng(3)
    n = 60
    x = ball_points(rng, n, 2, 4.0)
    g = nx.gnm_random_graph(n, 150, seed=5)
    e = np.array(g.edges())
    r1 = gk.metrics.reconstruction(x, g)
    # both directions and repeats of an edge count once
    r2 = gk.metrics.reconstruction(x, np.vstack([e, e[:, ::-1], e[:7]]))
    assert r1.mean_average_precision == r2.mean_average_precision
    assert r1.mean_rank == r2.mean_rank
    np.testing.assert_array_equal(r1.average_precision, r2.average_precision)
    assert r1.ranked_edges == 2 * g.number_of_edges()


def test_perfect_embedding_of_a_path():
    # Points on a geodesic in the order of a path graph: every node's
    # neighbours are its nearest points (hand count: MAP 1, mean rank 1).
    n = 30
    x = np.column_stack([np.tanh(np.linspace(-3, 3, n) / 2), np.zeros(n)])
    e = np.column_stack([np.arange(n - 1), np.arange(1, n)])
    r = gk.metrics.reconstruction(x, e)
    assert r.mean_average_precision == 1.0
    assert r.mean_rank == 1.0


def test_threads_do_not_change_the_result():
    import subprocess
    import sys

    code = (
        "import numpy as np, gyrokit as gk\n"
        "rng = np.random.default_rng(0)\n"
        "x = rng.uniform(-0.4, 0.4, (300, 5))\n"
        "e = rng.integers(0, 300, (900, 2)); e = e[e[:, 0] != e[:, 1]]\n"
        "r = gk.metrics.reconstruction(x, e)\n"
        "print(r.mean_average_precision.hex(), r.mean_rank.hex())\n"
    )
    outs = set()
    for t in ("1", "2", "3"):
        env = dict(__import__("os").environ, RAYON_NUM_THREADS=t)
        outs.add(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True).stdout)
    assert len(outs) == 1


@pytest.mark.parametrize(
    "edges, match",
    [
        (np.array([[0, 1], [2, 9]]), r"edges row 1: \(2, 9\) names node 9, out of range for 5 points"),
        (np.array([[0, 1], [-1, 2]]), r"edges row 1"),
        (np.array([[0, 1], [1, 2], [3, 3]]), r"edges row 2: \(3, 3\) is a self-loop"),
        (np.zeros((0, 2), dtype=np.int64), r"edges is empty"),
        ([], r"edges is empty"),
        (np.array([[0, 1, 2]]), r"edges must have shape \(m, 2\)"),
    ],
)
def test_bad_edges(edges, match):
    x = np.zeros((5, 2))
    with pytest.raises(ValueError, match=match):
        gk.metrics.reconstruction(x, edges)


def test_bad_edge_types_and_graphs():
    x = np.zeros((5, 2))
    with pytest.raises(TypeError, match="edges must be an integer array"):
        gk.metrics.reconstruction(x, np.array([[0.0, 1.0]]))
    g = nx.Graph([(0, 1), (1, 7)])
    with pytest.raises(ValueError, match="graph node 7 is out of range"):
        gk.metrics.reconstruction(x, g)
    g = nx.Graph([(0, 1), (2, 2)])
    with pytest.raises(ValueError, match="graph node 2 has a self-loop"):
        gk.metrics.reconstruction(x, g)
    g = nx.Graph([("a", "b")])
    with pytest.raises(ValueError, match="graph node 'a' is not a row index"):
        gk.metrics.reconstruction(x, g)
    with pytest.raises(ValueError, match=r"x: row 1"):
        gk.metrics.reconstruction(np.array([[0.0, 0.0], [1.5, 0.0]]), np.array([[0, 1]]))
