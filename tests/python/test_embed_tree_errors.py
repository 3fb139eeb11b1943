"""gk.embed.tree and gk.metrics.tree_distances: what is not a tree, and bad
arguments, get an error naming the node or the argument."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

import gyrokit as gk
from tree_support import path

BAD_TREES = [
    ([], "empty"),
    ([-1, 0, -1], "nodes 0 and 2 both have parent -1"),
    ([-1, 0, 7], "node 2 has parent 7, out of range"),
    ([-1, -3], "node 1 has parent -3, out of range"),
    ([-1, 3, 1, 2], "node 1 lies on a cycle"),
    ([1, 2, 0], "no node has parent -1"),
    ([-1, 1], "node 1 is its own parent"),
    (np.array([[0, 1], [2, 1]]), "node 1 has two parents"),
    (np.array([[0, 1], [1, 9]]), "row 1 names node 9"),
    (np.array([[0, 1], [1, 2], [2, 1]]), "two parents"),
]


@pytest.mark.parametrize("fn", ["embed", "distances"])
@pytest.mark.parametrize("tree,msg", BAD_TREES)
def test_not_a_tree(fn, tree, msg):
    with pytest.raises(ValueError, match=msg):
        if fn == "embed":
            gk.embed.tree(tree)
        else:
            gk.metrics.tree_distances(tree)


def test_networkx_graphs_that_are_not_trees():
    g = nx.cycle_graph(4)
    g.add_edge(0, 4)
    with pytest.raises(ValueError, match="edge between nodes . and . closes it"):
        gk.embed.tree(g)
    g = nx.Graph([(0, 1), (1, 2), (2, 0), (3, 4)])
    with pytest.raises(ValueError, match="cycle"):
        gk.embed.tree(g)
    g = nx.Graph([("a", "b"), ("b", "c")])
    with pytest.raises(ValueError, match="no node 0: pass root="):
        gk.embed.tree(g)
    with pytest.raises(ValueError, match="root 'z' is not a node"):
        gk.embed.tree(g, root="z")
    d = nx.DiGraph([(0, 1), (2, 1)])
    with pytest.raises(ValueError, match="node 1 has two parents"):
        gk.embed.tree(d)
    with pytest.raises(ValueError, match="empty"):
        gk.embed.tree(nx.Graph())
    with pytest.raises(ValueError, match="node 2 is not connected to the root 0"):
        gk.embed.tree(nx.Graph([(0, 1), (2, 3)]))
    with pytest.raises(ValueError, match="nodes 0 and 2 are both never a child"):
        gk.embed.tree(nx.DiGraph([(0, 1), (2, 3)]))
    with pytest.raises(ValueError, match="every node is a child"):
        gk.embed.tree(nx.DiGraph([(0, 1), (1, 2), (2, 0)]))


def test_bad_arguments():
    with pytest.raises(TypeError, match="parent must be an array of integers"):
        gk.embed.tree([-1.0, 0.5])
    with pytest.raises(ValueError, match=r"got shape \(2, 3\)"):
        gk.embed.tree(np.zeros((2, 3), dtype=int))
    for s in (0.0, -1.0, float("nan"), float("inf")):
        with pytest.raises(ValueError, match="scale must be a finite positive number"):
            gk.embed.tree(path(3), scale=s)
    with pytest.raises(ValueError, match="dim must be >= 2"):
        gk.embed.tree(path(3), 1)
    with pytest.raises(ValueError, match="model must be one of"):
        gk.embed.tree(path(3), model="sphere")
    with pytest.raises(ValueError, match="curvature"):
        gk.embed.tree(path(3), curvature=1.0)
    with pytest.raises(ValueError, match="root= applies to networkx graphs only"):
        gk.embed.tree(path(3), root=0)


def test_a_scale_that_does_not_fit_names_the_node_and_a_model_that_holds_it():
    with pytest.raises(ValueError, match=r"node 10 \(depth 10\) lies 40\.0+\d* R .*hyperboloid"):
        gk.embed.tree(path(11), scale=4.0)
    with pytest.raises(ValueError, match="klein model.*scale <= 1.87"):
        gk.embed.tree(path(11), scale=2.0, model="klein")
    gk.embed.tree(path(11), scale=4.0, model="hyperboloid")
    with pytest.raises(ValueError, match="beyond what any model holds"):
        gk.embed.tree(path(11), scale=20.0, model="hyperboloid")
