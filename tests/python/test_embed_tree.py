"""gk.embed.tree: edge lengths, the directions of the children, Sarkar's
bound, the scale limits of each model."""

from __future__ import annotations

import mpmath
import networkx as nx
import numpy as np
import pytest

import gyrokit as gk
from conftest import EPS, mp_distance
from tree_support import FAMILIES, balanced, caterpillar, path, random_recursive, star, to_networkx

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")


def edge_lengths(e, parent):
    child = np.flatnonzero(parent >= 0)
    d = getattr(gk, e.model).distance(e.points[child], e.points[parent[child]], curvature=e.curvature)
    return child, np.asarray(d)


@pytest.mark.parametrize("model", MODELS)
@pytest.mark.parametrize("dim", [2, 3, 10])
def test_every_edge_has_length_scale(model, dim):
    # the depth x scale keeps every node where float64 resolves 1e-9 of an
    # edge (r < 16 + ln(scale) R, 8 + ln(scale)/2 R in Klein; see the docstring)
    parent = random_recursive(3000, seed=dim)
    height = int(gk.metrics.tree_distances(parent, np.stack([np.zeros(3000, int), np.arange(3000)], 1)).max())
    scale = (7.0 if model == "klein" else 15.0) / height
    for curvature in (-1.0, -0.3):
        e = gk.embed.tree(parent, dim, scale=scale, model=model, curvature=curvature)
        R = 1 / np.sqrt(-curvature)
        assert e.points.shape == (3000, dim + (model == "hyperboloid"))
        assert e.scale == scale and e.model == model and e.curvature == curvature
        _, d = edge_lengths(e, parent)
        # common practice: the defining property, with the library's exact distance
        np.testing.assert_allclose(d, scale * R, rtol=1e-9, atol=0)


@pytest.mark.parametrize("model", MODELS)
def test_edges_against_mpmath(model):
    # reference: mpmath at 50 digits on the float64 points (conftest.mp_distance,
    # the textbook closed forms)
    parent = balanced(3, 6)
    e = gk.embed.tree(parent, 3, scale=2.0 if model != "klein" else 1.0, model=model, curvature=-2.0)
    rng = np.random.default_rng(0)
    child = rng.choice(np.flatnonzero(parent >= 0), 40, replace=False)
    for c in child:
        ref = mp_distance(model, e.points[c], e.points[parent[c]], -2.0)
        want = mpmath.mpf(e.scale) / mpmath.sqrt(2)
        assert abs(float((ref - want) / want)) < 1e-9, (c, ref)


def test_far_out_edges_are_exact_to_the_float64_resolution():
    # An explicit scale may take a path to the rim, 37.4 R in the Poincaré
    # ball, with a warning. Along a ray the Poincaré radius resolves
    # 2^-53 e^r/2 R (common practice: d r = 2 d|x| / (1 - |x|^2)); the edges
    # are exact up to that rounding.
    parent = path(11)
    with pytest.warns(gk.embed.EdgeAccuracyWarning, match="1e-9"):
        e = gk.embed.tree(parent, 2, model="poincare", scale=3.739)
    child, d = edge_lengths(e, parent)
    r = child * e.scale
    assert np.all(np.abs(d - e.scale) <= 4 * EPS * np.exp(r) + 1e-12 * e.scale)
    # mpmath, from the origin: the deepest node is 37.39 R out to its resolution
    ref = mp_distance("poincare", np.zeros(2), e.points[10], -1.0)
    assert abs(float(ref) - 37.39) < 4 * EPS * np.exp(37.39)
    # the hyperboloid resolves radii to 2^-53 relative: a path out to 170 R keeps
    # every edge to 1e-9 (mpmath on the deepest edge)
    with pytest.warns(gk.embed.EdgeAccuracyWarning):
        e = gk.embed.tree(parent, 2, model="hyperboloid", scale=17.0)
    _, d = edge_lengths(e, parent)
    np.testing.assert_allclose(d, e.scale, rtol=1e-9)
    # (400 digits: the law of cosines cancels 150 of them at 170 R)
    ref = mp_distance("hyperboloid", e.points[9], e.points[10], -1.0, dps=400)
    assert abs(float(ref) / e.scale - 1) < 1e-9


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid", "halfspace"])
@pytest.mark.parametrize("dim", [2, 5])
def test_scale_none_keeps_every_edge_to_1e9(model, dim):
    # The contract: every edge is `scale` to 1e-9 relative, also with
    # the automatic scale (random recursive tree, deepest node at the
    # accurate radius; mpmath at 50 digits on the deepest edges).
    import warnings

    parent = random_recursive(400, seed=3)
    with warnings.catch_warnings():
        warnings.simplefilter("error", gk.embed.EdgeAccuracyWarning)
        e = gk.embed.tree(parent, dim, model=model)
    child, d = edge_lengths(e, parent)
    np.testing.assert_allclose(d, e.scale, rtol=1e-9)
    depth = np.zeros(len(parent), dtype=int)
    for i in range(1, len(parent)):  # random_recursive: parents precede children
        depth[i] = depth[parent[i]] + 1
    deep = child[np.argsort(depth[child])[-5:]]
    for c in deep:
        ref = mp_distance(model, e.points[c], e.points[parent[c]], -1.0, dps=60)
        assert abs(float(ref) / e.scale - 1) < 1e-9, (c, float(ref))


@pytest.mark.parametrize("dim", [2, 10])
def test_children_are_maximally_separated(dim):
    # Directions at a node, read back with the library's log map (independent
    # of the construction): in the plane k children and the parent are 2 pi/(k + 1)
    # apart (Sarkar 2011); in dim = 10 with k + 1 <= 11 they form a regular
    # simplex, every angle arccos(-1/k) (Sala et al. 2018; simplex angles: handbook).
    parent = np.array([-1, 0, 1, 1, 1, 1, 1, 2, 2])  # node 1: parent 0, children 2..6
    e = gk.embed.tree(parent, dim, scale=1.5)
    base = e.points[1]
    others = e.points[[0, 2, 3, 4, 5, 6]]
    v = gk.poincare.log_map(others, base=np.broadcast_to(base, others.shape))
    u = v / np.linalg.norm(v, axis=1, keepdims=True)
    cos = u @ u.T
    iu = np.triu_indices(6, 1)
    if dim == 2:
        ang = np.sort(np.arctan2(u[:, 1], u[:, 0]))
        gaps = np.diff(np.concatenate([ang, ang[:1] + 2 * np.pi]))
        np.testing.assert_allclose(gaps, 2 * np.pi / 6, atol=1e-12)
    else:
        np.testing.assert_allclose(cos[iu], -1 / 5, atol=1e-12)
    # and every child is at distance scale from node 1 (log map length)
    np.testing.assert_allclose(np.linalg.norm(v, axis=1) * 2 / (1 - base @ base), 1.5, rtol=1e-12)


def worst_distortion(e, parent):
    # direct formula (SPEC): max(d/(s t)) * max(s t/d) over all pairs; tree
    # distances from networkx (reference: networkx BFS)
    n = len(parent)
    t = np.zeros((n, n))
    for u, row in nx.all_pairs_shortest_path_length(to_networkx(parent)):
        for v, h in row.items():
            t[u, v] = h
    d = gk.distance_matrix(e.points, model=e.model, curvature=e.curvature)
    iu = np.triu_indices(n, 1)
    ratio = d[iu] / (e.scale * t[iu])
    return ratio.max() / ratio.min()


@pytest.mark.parametrize("family", sorted(FAMILIES))
@pytest.mark.parametrize("dim", [2, 10])
def test_sarkar_distortion_falls_towards_one(family, dim):
    # Sarkar (2011), Sala et al. (2018): the worst-case distortion of the
    # construction tends to 1 as the scale grows
    parent = FAMILIES[family]()
    height = int(gk.metrics.tree_distances(parent)[0].max())
    # scales up to height x scale <= 36 R: beyond, siblings deep down are less
    # than 1e-16 rad apart and float64 rounds them to one direction
    scales = [s for s in (1.0, 2.0, 4.0, 8.0, 16.0) if s * height <= 36]
    w = [worst_distortion(gk.embed.tree(parent, dim, scale=s, model="hyperboloid"), parent) for s in scales]
    if family == "path":
        # a path goes straight out along a geodesic: no distortion at any scale
        np.testing.assert_allclose(w, 1.0, atol=1e-12)
        return
    assert len(scales) >= 3
    assert all(a > b for a, b in zip(w, w[1:])), w
    assert w[-1] - 1 < (w[0] - 1) / 4, w


def test_input_forms_agree_and_labels_map_in_node_order():
    parent = random_recursive(300, 11)
    base = gk.embed.tree(parent, 3, scale=1.0).points
    edges = np.array([(p, i) for i, p in enumerate(parent) if p >= 0])
    edges = edges[np.random.default_rng(2).permutation(len(edges))]
    np.testing.assert_array_equal(gk.embed.tree(edges, 3, scale=1.0).points, base)
    np.testing.assert_array_equal(gk.embed.tree(to_networkx(parent), 3, scale=1.0).points, base)
    dg = nx.DiGraph((int(p), i) for i, p in enumerate(parent) if p >= 0)
    order = list(dg.nodes)  # not 0..n-1 in order, but exactly those labels
    np.testing.assert_array_equal(gk.embed.tree(dg, 3, scale=1.0).points, base)
    g = nx.relabel_nodes(to_networkx(parent), {i: f"n{i}" for i in range(300)})
    np.testing.assert_array_equal(gk.embed.tree(g, 3, scale=1.0, root="n0").points, base)
    assert sorted(order) == list(range(300))


def test_single_node_and_star_scale_none():
    e = gk.embed.tree([-1], 2)
    np.testing.assert_array_equal(e.points, [[0.0, 0.0]])
    e = gk.embed.tree(star(10), 2, model="klein")
    # one level: the Klein accurate radius, ln(4e6 s)/2 = s (see embed.tree)
    assert e.scale == pytest.approx(0.5 * np.log(4e6 * e.scale), rel=1e-12)
    assert np.all(np.linalg.norm(e.points, axis=1) < 1)
