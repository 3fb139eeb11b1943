"""gk.metrics.tree_distances against networkx shortest paths."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

import gyrokit as gk
from tree_support import balanced, caterpillar, path, random_recursive, star, to_networkx


@pytest.mark.parametrize(
    "parent",
    [random_recursive(300, 1), balanced(2, 7), path(120), star(90), caterpillar(20, 4)],
    ids=["random_recursive", "balanced", "path", "star", "caterpillar"],
)
def test_all_pairs_match_networkx(parent):
    # reference: networkx all_pairs_shortest_path_length (BFS on the graph)
    g = to_networkx(parent)
    n = len(parent)
    want = np.zeros((n, n), dtype=np.int64)
    for u, row in nx.all_pairs_shortest_path_length(g):
        for v, d in row.items():
            want[u, v] = d
    got = gk.metrics.tree_distances(parent)
    assert got.shape == (n, n) and got.dtype == np.int32
    np.testing.assert_array_equal(got, want)


def test_pairs_on_a_large_deep_tree_match_networkx():
    # reference: networkx shortest_path_length on sampled pairs
    parent = np.concatenate([random_recursive(20000, 7), 20000 + path(3000)])
    parent[20000] = 19999  # a long path hanging from the last node
    g = to_networkx(parent)
    rng = np.random.default_rng(0)
    pairs = rng.integers(0, len(parent), size=(400, 2))
    got = gk.metrics.tree_distances(parent, pairs)
    want = [nx.shortest_path_length(g, int(a), int(b)) for a, b in pairs]
    np.testing.assert_array_equal(got, want)


def test_input_forms_agree():
    parent = random_recursive(200, 5)
    edges = np.array([(p, i) for i, p in enumerate(parent) if p >= 0])
    rng = np.random.default_rng(1)
    edges = edges[rng.permutation(len(edges))]
    base = gk.metrics.tree_distances(parent)
    np.testing.assert_array_equal(gk.metrics.tree_distances(edges), base)
    np.testing.assert_array_equal(gk.metrics.tree_distances(to_networkx(parent)), base)
    # labels other than 0..n-1 are numbered in G.nodes order
    g = nx.relabel_nodes(to_networkx(parent), {i: f"n{i}" for i in range(200)})
    np.testing.assert_array_equal(gk.metrics.tree_distances(g, root="n0"), base)


def test_bad_pairs_name_the_row():
    with pytest.raises(ValueError, match="row 1 names node 5"):
        gk.metrics.tree_distances(path(5), [[0, 1], [0, 5]])
    with pytest.raises(ValueError, match=r"shape \(p, 2\)"):
        gk.metrics.tree_distances(path(5), [0, 1])
    with pytest.raises(TypeError, match="integers"):
        gk.metrics.tree_distances(path(5), [[0.5, 1.0]])
