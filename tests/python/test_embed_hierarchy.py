"""gk.embed.hierarchy: the combinatorial embedding of a hierarchy with
multiple inheritance, and its use as the start of gk.embed.graph."""

from __future__ import annotations

import warnings

import mpmath
import networkx as nx
import numpy as np
import pytest

import gyrokit as gk
from conftest import mp_distance

mpmath.mp.dps = 50


def closure_of(dag: nx.DiGraph) -> np.ndarray:
    """(descendant, ancestor) rows of a DiGraph whose edges run parent ->
    child (networkx's ancestors: the reference closure)."""
    rows = [(v, a) for v in dag.nodes for a in nx.ancestors(dag, v)]
    return np.array(sorted(rows), dtype=np.int64)


def catalogue(seed: int = 0, n: int = 300) -> nx.DiGraph:
    """An invented product catalogue: each new category gets one parent among
    the earlier ones (a deeper one more likely) and, one time in four, a
    second parent too (a category listed under two departments)."""
    rng = np.random.default_rng(seed)
    g = nx.DiGraph()
    g.add_node(0)
    for v in range(1, n):
        p = int(rng.integers(max(0, v - 40), v))
        g.add_edge(p, v)
        if v > 5 and rng.random() < 0.25:
            q = int(rng.integers(0, v))
            if q != p:
                g.add_edge(q, v)
    return g


def test_on_a_tree_closure_it_is_the_tree_embedding_bit_for_bit():
    rng = np.random.default_rng(3)
    parent = np.array([-1] + [int(rng.integers(0, v)) for v in range(1, 200)])
    tree = nx.DiGraph((int(p), v) for v, p in enumerate(parent) if p >= 0)
    rows = closure_of(tree)
    for model in ("poincare", "klein", "hyperboloid", "halfspace"):
        a = gk.embed.hierarchy(rows, 4, scale=0.8, model=model)
        b = gk.embed.tree(parent, 4, scale=0.8, model=model)
        assert np.array_equal(a.points, b.points), model
        assert a.scale == b.scale == 0.8
    # the default scale is the tree's
    assert gk.embed.hierarchy(rows, 4).scale == gk.embed.tree(parent, 4).scale


@pytest.mark.parametrize("closed", [True, False])
def test_every_node_is_one_edge_beyond_its_parents_or_their_mean(closed):
    g = catalogue()
    rows = closure_of(g) if closed else np.array([(v, p) for p, v in g.edges], dtype=np.int64)
    s = 0.7
    e = gk.embed.hierarchy(rows, 5, scale=s)
    x = e.points
    assert np.all(np.linalg.norm(x, axis=1) < 1)
    # direct parents: networkx's transitive reduction (reference), the same
    # from the closure and from the direct edges
    red = nx.transitive_reduction(g)
    joined = 0
    for v in range(1, len(x)):
        ps = sorted(red.predecessors(v))
        if len(ps) == 1:
            target = x[ps[0]]
        else:
            # one edge from the parents' Fréchet mean
            target = gk.frechet_mean(x[ps], tol=1e-15).mean
            joined += 1
        d = mp_distance("poincare", x[v], target, -1.0)  # mpmath reference distance
        assert abs(float(d) - s) < 1e-9, (v, ps, float(d))
    assert joined > 40
    # the nodes are all distinct: none sits on another
    D = gk.distance_matrix(x)
    np.fill_diagonal(D, np.inf)
    assert D.min() > 0.1 * s


def test_input_forms_and_models_agree():
    g = catalogue(1, 120)
    rows = closure_of(g)
    a = gk.embed.hierarchy(rows, 3, scale=1.0)
    b = gk.embed.hierarchy(g, 3, scale=1.0)  # networkx, parent -> child
    assert np.array_equal(a.points, b.points)
    # the direct (child, parent) rows: the same hierarchy, the same points
    direct = np.array([(v, p) for p, v in g.edges], dtype=np.int64)
    assert np.array_equal(gk.embed.hierarchy(direct, 3, scale=1.0).points, a.points)
    # duplicated and shuffled rows: the same embedding
    rng = np.random.default_rng(0)
    c = gk.embed.hierarchy(np.concatenate([rows, rows[rng.permutation(len(rows))]]), 3, scale=1.0)
    assert np.array_equal(a.points, c.points)
    # other models: the same points, to the resolution of their float64
    # coordinates (the Klein ball's radial rounding is about 1e-16 e^(2r)/4,
    # 1e-10 at the 7.6 R of the deepest nodes here; gk.embed.tree's notes)
    Dp = gk.distance_matrix(a.points)
    for model, tol in (("klein", 1e-8), ("hyperboloid", 1e-12)):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", gk.embed.EdgeAccuracyWarning)
            h = gk.embed.hierarchy(rows, 3, scale=1.0, model=model)
        assert h.model == model
        np.testing.assert_allclose(gk.distance_matrix(h.points, model=model), Dp, rtol=tol, atol=tol)
    # n_nodes adds isolated nodes, under the virtual root with the others
    d = gk.embed.hierarchy(rows, 3, scale=1.0, n_nodes=len(g) + 2)
    assert d.points.shape == (len(g) + 2, 3)


def test_several_roots_hang_from_the_origin():
    rows = np.array([[2, 0], [3, 1], [4, 2], [4, 3]])
    e = gk.embed.hierarchy(rows, 2, scale=1.0)
    r = 2 * np.arctanh(np.linalg.norm(e.points, axis=1))  # distance from the origin
    np.testing.assert_allclose(r[:2], 1.0, rtol=1e-14)
    np.testing.assert_allclose(r[2:4], 2.0, rtol=1e-14)


@pytest.mark.parametrize(
    "edges, kw, match",
    [
        ([[0, 1], [1, 1]], {}, "row 1.*self-loop"),
        ([[0, 1], [1, 2], [2, 0]], {}, "cycle"),
        ([[0, 5]], {"n_nodes": 3}, "row 0.*out of range"),
        ([[0, -1]], {}, "row 0.*negative"),
        ([[0, 1]], {"dim": 1}, "dim"),
        ([[0, 1]], {"scale": -1.0}, "scale"),
        (np.zeros((0, 2), dtype=int), {}, "empty"),
    ],
)
def test_bad_input_is_a_value_error(edges, kw, match):
    with pytest.raises(ValueError, match=match):
        gk.embed.hierarchy(np.asarray(edges), **kw)


def test_bad_types():
    with pytest.raises(TypeError, match="DiGraph"):
        gk.embed.hierarchy(nx.path_graph(3))
    with pytest.raises(TypeError, match="integer"):
        gk.embed.hierarchy(np.array([[0.5, 1.0]]))


def test_as_start_it_reaches_the_map_sooner_than_random_points():
    # a catalogue of 300 categories with multiple listings, its closure,
    # d = 5, the directed protocol of gk.metrics.reconstruction (Nickel &
    # Kiela 2017, section 4.1; checked against scikit-learn in
    # test_metrics_reconstruction): after 10 epochs from the hierarchy start
    # the mean average precision is far above the random start's (measured:
    # 0.813 against 0.517; start alone 0.289). Random cross-listings make
    # this catalogue less tree-like than a taxonomy: after 20 epochs the
    # random start has caught up (0.838 against 0.831)
    g = catalogue()
    rows = closure_of(g)
    kw = dict(epochs=10, learning_rate=0.3, batch_size=32, seed=1, progress=False, directed=True)
    start = gk.embed.hierarchy(rows, 5, scale=0.75)
    from_start = gk.embed.graph(rows, 5, init=start, burn_in=0, **kw)
    from_random = gk.embed.graph(rows, 5, **kw)
    m_start = gk.metrics.reconstruction(from_start.points, rows, directed=True).mean_average_precision
    m_random = gk.metrics.reconstruction(from_random.points, rows, directed=True).mean_average_precision
    assert m_start >= 0.78, m_start
    assert m_start > m_random + 0.2, (m_start, m_random)
