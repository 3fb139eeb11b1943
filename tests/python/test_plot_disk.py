"""gk.plot.disk: geodesic arcs, model conversion, recentring, labels, errors.

Every geometric check reads the data back from what was plotted (the
LineCollection's segments, the scatter's offsets), with matplotlib's Agg
backend.
"""

from __future__ import annotations

import subprocess
import sys

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import mpmath  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

import gyrokit as gk  # noqa: E402


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


def _edges_of(ax):
    """The plotted arcs, one array per edge, from the one LineCollection."""
    (lc,) = [c for c in ax.collections if c.get_gid() == "gyrokit-edges"]
    return [np.asarray(s) for s in lc.get_segments()]


def _points_of(ax):
    (sc,) = [c for c in ax.collections if c.get_gid() == "gyrokit-points"]
    return np.asarray(sc.get_offsets())


def _hard_pairs():
    """Edge end points in the unit disk: generic, near the rim, nearly and
    exactly collinear with the centre, one at the centre, very close pairs."""
    rng = np.random.default_rng(5)
    n = 200
    ang = rng.uniform(0, 2 * np.pi, size=(n, 2))
    rad = rng.uniform(0, 0.999, size=(n, 2))
    a = np.stack([rad[:, 0] * np.cos(ang[:, 0]), rad[:, 0] * np.sin(ang[:, 0])], axis=1)
    b = np.stack([rad[:, 1] * np.cos(ang[:, 1]), rad[:, 1] * np.sin(ang[:, 1])], axis=1)
    hard_a = [[1 - 1e-9, 0.0], [0.6, 0.0], [0.3, 0.4], [0.0, 0.0], [0.5, 0.5], [0.7, 0.1],
              [0.999999, 0.0], [-0.5, 0.25]]
    hard_b = [[0.0, 1 - 1e-9], [-0.9, 1e-13], [-0.6, -0.8 + 1e-3], [0.2, -0.7], [0.5 + 1e-7, 0.5 - 1e-7],
              [-0.7, -0.1], [0.999999 * np.cos(1e-3), 0.999999 * np.sin(1e-3)], [0.8, -0.45]]
    return np.concatenate([a, hard_a]), np.concatenate([b, hard_b])


def _cross(u, v):
    return u[..., 0] * v[..., 1] - u[..., 1] * v[..., 0]


def _circle_through(p, q, r):
    """Centre and radius of the circle through three points (the
    circumcentre formula from the perpendicular bisectors, common practice)."""
    ax_, ay = p
    bx, by = q
    cx, cy = r
    d = 2 * (ax_ * (by - cy) + bx * (cy - ay) + cx * (ay - by))
    ux = ((ax_**2 + ay**2) * (by - cy) + (bx**2 + by**2) * (cy - ay) + (cx**2 + cy**2) * (ay - by)) / d
    uy = ((ax_**2 + ay**2) * (cx - bx) + (bx**2 + by**2) * (ax_ - cx) + (cx**2 + cy**2) * (bx - ax_)) / d
    c = np.array([ux, uy])
    return c, np.linalg.norm(np.asarray(p) - c)


@pytest.mark.parametrize("curvature", [-1.0, -4.0])
def test_arcs_are_circles_orthogonal_to_the_boundary_through_both_ends(curvature):
    R = 1 / np.sqrt(-curvature)
    a, b = _hard_pairs()
    x = np.concatenate([a, b]) * R
    m = len(a)
    edges = np.stack([np.arange(m), np.arange(m) + m], axis=1)
    ax = gk.plot.disk(x, edges=edges, curvature=curvature, arc_samples=32)
    segs = _edges_of(ax)
    assert len(segs) == m
    curved = 0
    for i, s in enumerate(segs):
        # both end points, exactly where the points are
        np.testing.assert_allclose(s[0], x[i], rtol=0, atol=1e-15 * R)
        np.testing.assert_allclose(s[-1], x[m + i], rtol=0, atol=1e-14 * R)
        chord = s[-1] - s[0]
        L = np.linalg.norm(chord)
        if L < 1e-3 * R:
            continue  # too short for a three-point circle fit in float64
        # sagitta: distance of the samples from the chord
        dev = np.abs(chord[0] * (s[:, 1] - s[0, 1]) - chord[1] * (s[:, 0] - s[0, 0])) / L
        if dev.max() < 1e-6 * L:
            # a diameter (end points collinear with the centre): the chord's
            # line passes through the centre
            line_to_origin = abs(chord[0] * s[0, 1] - chord[1] * s[0, 0]) / L
            assert line_to_origin < 1e-6 * R
            continue
        curved += 1
        c, r = _circle_through(s[0], s[len(s) // 2], s[-1])
        # orthogonal circles: |c|^2 = R^2 + r^2 (Pythagoras at an intersection
        # point, where the radii meet at a right angle; handbook identity)
        assert abs(c @ c - (R * R + r * r)) <= 1e-9 * (c @ c)
        # every sample on that circle, inside the disk
        np.testing.assert_allclose(np.linalg.norm(s - c, axis=1), r, rtol=1e-9)
        assert np.all(np.linalg.norm(s, axis=1) < R)
    assert curved > 150


def test_adaptive_sampling_stays_within_its_tolerance_of_the_arc():
    """Default arc_samples: diameters get 2 points, every polyline piece
    strays at most 2.5e-4 R from the circle (sagitta of a chord of length l on
    a circle of radius r: r - sqrt(r^2 - l^2/4), handbook)."""
    a, b = _hard_pairs()
    x = np.concatenate([a, b])
    m = len(a)
    edges = np.stack([np.arange(m), np.arange(m) + m], axis=1)
    segs = _edges_of(gk.plot.disk(x, edges=edges))
    dense = _edges_of(gk.plot.disk(x, edges=edges, arc_samples=64))
    counts = np.array([len(s) for s in segs])
    assert counts.min() >= 2 and counts.max() <= 64
    assert len(segs[m - 7]) == 2  # [0.6, 0] to [-0.9, 1e-13]: 1e-13 off a diameter
    for s, d in zip(segs, dense):
        np.testing.assert_array_equal(s[[0, -1]], d[[0, -1]])
        L = np.linalg.norm(d[-1] - d[0])
        if L < 1e-3:
            continue
        dev = np.abs(_cross(d - d[0], d[-1] - d[0])) / L
        if len(s) == 2:
            # a straight piece: the arc must be within tolerance of the chord
            assert dev.max() <= 2.6e-4
            continue
        c, r = _circle_through(d[0], d[len(d) // 2], d[-1])
        piece = np.linalg.norm(np.diff(s, axis=0), axis=1)
        sag = r - np.sqrt(np.maximum(r * r - piece * piece / 4, 0))
        assert sag.max() <= 2.6e-4


def test_every_sample_lies_on_the_geodesic_distance_additivity():
    """d(a, p) + d(p, b) = d(a, b) for every plotted point p of the edge a-b
    (equality in the triangle inequality holds exactly on the geodesic
    segment; metric-space identity), with gk distances and, on a few
    edges, a 50-digit mpmath evaluation of the textbook arccosh formula."""
    a, b = _hard_pairs()
    x = np.concatenate([a, b])
    m = len(a)
    edges = np.stack([np.arange(m), np.arange(m) + m], axis=1)
    segs = np.array(_edges_of(gk.plot.disk(x, edges=edges, arc_samples=32)))
    A = np.broadcast_to(a[:, None, :], segs.shape)
    B = np.broadcast_to(b[:, None, :], segs.shape)
    dab = gk.poincare.distance(a, b)[:, None]
    excess = gk.poincare.distance(A, segs) + gk.poincare.distance(segs, B) - dab
    assert np.all(np.abs(excess) <= 1e-9 * np.maximum(dab, 1e-6)), np.abs(excess).max()
    # the samples are spread along the arc (none piles up at the ends)
    frac = gk.poincare.distance(A, segs) / dab
    assert np.all(np.diff(frac[dab[:, 0] > 1e-3], axis=1) > 0)

    mpmath.mp.dps = 50

    def d_mp(p, q):  # Poincaré distance, textbook arccosh form (Beardon, The Geometry of Discrete Groups, 7.2)
        p = [mpmath.mpf(float(v)) for v in p]
        q = [mpmath.mpf(float(v)) for v in q]
        num = sum((pi - qi) ** 2 for pi, qi in zip(p, q))
        den = (1 - sum(v * v for v in p)) * (1 - sum(v * v for v in q))
        return mpmath.acosh(1 + 2 * num / den)

    for i in (0, 3, m - 8, m - 7, m - 5, m - 1):
        total = d_mp(a[i], b[i])
        for p in segs[i][1:-1:5]:
            assert abs(d_mp(a[i], p) + d_mp(p, b[i]) - total) <= 1e-9 * total


def test_model_conversion_against_textbook_maps():
    rng = np.random.default_rng(1)
    p = rng.uniform(-0.6, 0.6, size=(30, 2))
    s = np.sum(p * p, axis=1, keepdims=True)
    # textbook maps from the Poincaré disk (Cannon, Floyd, Kenyon, Parry, "Hyperbolic geometry", 1997, sec. 7)
    klein = 2 * p / (1 + s)
    hyper = np.concatenate([(1 + s) / (1 - s), 2 * p / (1 - s)], axis=1)
    for model, pts in (("poincare", p), ("klein", klein), ("hyperboloid", hyper)):
        got = _points_of(gk.plot.disk(pts, model=model))
        np.testing.assert_allclose(got, p, atol=1e-14)
    # the half-plane: the Cayley transform z -> (z - i)/(z + i) takes it to the disk
    # (a standard isometry; gk's half-space orientation is then a rotation of that picture,
    # so compare the distances between points instead)
    half = gk.convert(p, "poincare", "halfspace")
    got = _points_of(gk.plot.disk(half, model="halfspace"))
    Dp = gk.distance_matrix(p)
    np.testing.assert_allclose(gk.distance_matrix(got), Dp, rtol=1e-12, atol=1e-13)


def test_center_moves_that_point_to_the_origin_and_keeps_distances():
    rng = np.random.default_rng(2)
    p = rng.uniform(-0.65, 0.65, size=(40, 2))
    e = np.stack([np.arange(39), np.arange(1, 40)], axis=1)
    for model in ("poincare", "klein", "hyperboloid"):
        x = gk.convert(p, "poincare", model)
        ax = gk.plot.disk(x, edges=e, model=model, center=x[7])
        got = _points_of(ax)
        assert np.linalg.norm(got[7]) < 1e-15
        # an isometry (Möbius translation): all distances kept (distance_matrix of gk
        # against the mpmath-checked distances of the original points is the same function,
        # so also check one distance in closed form: d(0, q) = 2 artanh|q| (Beardon 7.2))
        np.testing.assert_allclose(gk.distance_matrix(got), gk.distance_matrix(p), rtol=1e-11, atol=1e-12)
        np.testing.assert_allclose(2 * np.arctanh(np.linalg.norm(got[0])), gk.poincare.distance(p[7], p[0]), rtol=1e-12)
        # arcs follow their translated end points
        segs = _edges_of(ax)
        np.testing.assert_allclose(segs[6][-1], got[7], atol=1e-15)
    ax = gk.plot.disk(p, center=12)  # a row index
    assert np.linalg.norm(_points_of(ax)[12]) < 1e-15


def test_labels_one_legend_entry_each_and_colours_by_label():
    rng = np.random.default_rng(3)
    p = rng.uniform(-0.6, 0.6, size=(60, 2))
    for labels, expect in (
        (np.arange(60) % 4, ["0", "1", "2", "3"]),
        (np.array(["b", "a", "c"] * 20), ["a", "b", "c"]),
        ([("t", i % 2) for i in range(60)], ["('t', 0)", "('t', 1)"]),
    ):
        ax = gk.plot.disk(p, labels=labels)
        texts = [t.get_text() for t in ax.get_legend().get_texts()]
        assert texts == expect
        colors = _points_of_colors(ax)
        lab = np.array([str(v) for v in (labels if not isinstance(labels, list) else labels)], dtype=object)
        for v in set(lab.tolist()):
            same = colors[lab == v]
            assert np.all(same == same[0])
        assert len({tuple(c) for c in colors}) == len(expect)
    plt.close("all")
    with pytest.raises(ValueError, match="one entry per point"):
        gk.plot.disk(p, labels=np.arange(59))
    with pytest.raises(ValueError, match="edges: row 0"):
        gk.plot.disk(p, edges=[[0, 60]])
    assert plt.get_fignums() == []  # bad input is refused before a figure is made


def _points_of_colors(ax):
    (sc,) = [c for c in ax.collections if c.get_gid() == "gyrokit-points"]
    return np.asarray(sc.get_facecolors())


def test_radial_compression_is_a_labelled_display_transform():
    rng = np.random.default_rng(4)
    p = rng.uniform(-0.7, 0.7, size=(20, 2))
    c = 3.0
    ax = gk.plot.disk(p, radial_compression=c, edges=[[0, 1], [2, 3]])
    got = _points_of(ax)
    rho = gk.poincare.distance(np.zeros(2), p)
    # drawn radius tanh(rho / (2c)), along the same ray (the documented display map)
    np.testing.assert_allclose(np.linalg.norm(got, axis=1), np.tanh(rho / (2 * c)), rtol=1e-13)
    np.testing.assert_allclose(got / np.linalg.norm(got, axis=1)[:, None], p / np.linalg.norm(p, axis=1)[:, None],
                               atol=1e-14)
    notes = [t.get_text() for t in ax.texts if t.get_gid() == "gyrokit-display-note"]
    assert notes == ["display: hyperbolic radii / 3"]
    assert not [t for t in gk.plot.disk(p).texts if t.get_gid() == "gyrokit-display-note"]
    with pytest.raises(ValueError, match="radial_compression"):
        gk.plot.disk(p, radial_compression=0.5)


def test_one_collection_for_many_edges_and_ax_returned():
    rng = np.random.default_rng(6)
    p = rng.uniform(-0.7, 0.7, size=(1000, 2))
    e = rng.integers(0, 1000, size=(5000, 2))
    fig, ax0 = plt.subplots()
    ax = gk.plot.disk(p, edges=e, ax=ax0, arc_samples=8)
    assert ax is ax0
    assert len([c for c in ax.collections if c.get_gid() == "gyrokit-edges"]) == 1
    assert np.array(_edges_of(ax)).shape == (5000, 8, 2)
    assert len(_edges_of(gk.plot.disk(p, edges=e))) == 5000
    fig.savefig(__import__("io").BytesIO(), format="png")


def test_higher_dimensions_point_to_principal_geodesic_analysis():
    x = np.full((5, 3), 0.1)
    with pytest.raises(ValueError, match="PrincipalGeodesicAnalysis"):
        gk.plot.disk(x)
    h = gk.convert(x, "poincare", "hyperboloid")  # (5, 4): d = 3
    with pytest.raises(ValueError, match="PrincipalGeodesicAnalysis"):
        gk.plot.disk(h, model="hyperboloid")
    # d = 2 on the hyperboloid (width 3) is fine; d = 1 is drawn on a diameter
    gk.plot.disk(gk.convert(x[:, :2], "poincare", "hyperboloid"), model="hyperboloid")
    got = _points_of(gk.plot.disk(np.array([[0.5], [-0.2]])))
    np.testing.assert_array_equal(got, [[0.5, 0.0], [-0.2, 0.0]])


def test_bad_input_names_the_argument_and_row():
    p = np.array([[0.1, 0.2], [0.3, 0.4], [0.9, 0.9], [0.0, 0.1]])
    with pytest.raises(ValueError, match="row 2"):
        gk.plot.disk(p)
    good = p[[0, 1, 3]]
    with pytest.raises(ValueError, match=r"edges: row 1"):
        gk.plot.disk(good, edges=[[0, 1], [1, 3]])
    with pytest.raises(ValueError, match=r"edges must have shape"):
        gk.plot.disk(good, edges=[0, 1, 2])
    with pytest.raises(TypeError, match="edges"):
        gk.plot.disk(good, edges=[[0.5, 1.0]])
    with pytest.raises(ValueError, match="model"):
        gk.plot.disk(good, model="disk")
    with pytest.raises(ValueError, match="curvature"):
        gk.plot.disk(good, curvature=1.0)
    with pytest.raises(ValueError, match="center"):
        gk.plot.disk(good, center=[0.1, 0.2, 0.3])
    with pytest.raises(ValueError, match="center = 5"):
        gk.plot.disk(good, center=5)
    with pytest.raises(ValueError):
        gk.plot.disk(good, center=[2.0, 0.0])
    with pytest.raises(TypeError, match="x must be"):
        gk.plot.disk(np.array([["a", "b"]]))
    with pytest.raises(TypeError, match="ax must be a matplotlib Axes"):
        gk.plot.disk(good, ax=np.zeros(2))
    with pytest.raises(ValueError, match="point_size"):
        gk.plot.disk(good, point_size=-1.0)
    with pytest.raises(TypeError, match="edge_width"):
        gk.plot.disk(good, edge_width="thin")


def test_missing_matplotlib_is_a_clear_import_error_and_gyrokit_imports_without_it(monkeypatch):
    for name in ("matplotlib", "matplotlib.pyplot", "matplotlib.collections", "matplotlib.patches"):
        monkeypatch.setitem(sys.modules, name, None)
    with pytest.raises(ImportError, match=r"pip install gyrokit\[plot\]"):
        gk.plot.disk(np.zeros((1, 2)))
    code = (
        "import sys; sys.modules['matplotlib'] = None\n"
        "import gyrokit as gk, numpy as np\n"
        "assert 'matplotlib.pyplot' not in sys.modules\n"
        "print(gk.PrincipalGeodesicAnalysis(2).fit_transform(np.full((3, 4), 0.1) * np.arange(3)[:, None]).shape)\n"
        "try:\n    gk.plot.disk(np.zeros((1, 2)))\nexcept ImportError as e:\n    print('extra' in str(e))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["(3,", "2)", "True"]


def test_graphs_categoricals_and_unconvertible_arguments():
    import networkx as nx
    import pandas as pd

    p = np.random.default_rng(8).uniform(-0.5, 0.5, size=(4, 2))
    ax = gk.plot.disk(p, edges=nx.path_graph(4), labels=pd.Categorical(["x", "y", "x", "z"]))
    ends = np.array([[s[0], s[-1]] for s in _edges_of(ax)])
    np.testing.assert_array_equal(ends, np.stack([p[:-1], p[1:]], axis=1))
    assert [t.get_text() for t in ax.get_legend().get_texts()] == ["x", "y", "z"]

    class Unconvertible:
        def __array__(self, *args, **kwargs):
            raise RuntimeError("no array here")

    for name in ("edges", "labels", "center"):
        with pytest.raises(TypeError, match=name):
            gk.plot.disk(p, **{name: Unconvertible()})
    with pytest.raises(TypeError, match="x must be"):
        gk.plot.disk(Unconvertible())
    with pytest.raises(TypeError, match="X must be"):
        gk.PrincipalGeodesicAnalysis(2).fit(Unconvertible())
    # empty input: an empty picture
    ax = gk.plot.disk(np.zeros((0, 2)), edges=np.zeros((0, 2), dtype=int), labels=[])
    assert len(_points_of(ax)) == 0


def test_far_out_hyperboloid_points_are_placed_from_their_own_model():
    """Points about 60 R from the origin (beyond the Poincaré ball's float64
    range) recentred on one of them: each drawn at Euclidean radius
    tanh(d/2) for its distance d from the centre, against mpmath at 120
    digits (Minkowski form d = acosh(-<c, x>_L), Ratcliffe 3.2, of the points
    the spatial coordinates define)."""
    import warnings

    rng = np.random.default_rng(13)
    base = np.array([np.cosh(60.0), np.sinh(60.0), 0.0])
    v = rng.normal(size=(30, 2))
    tang = gk.hyperboloid.transport(np.concatenate([np.zeros((30, 1)), v], axis=1), np.eye(3)[0], base)
    x = gk.hyperboloid.exp_map(tang, base)
    got = _points_of(gk.plot.disk(x, model="hyperboloid", center=3, edges=[[3, 4], [5, 6]]))
    assert np.linalg.norm(got[3]) < 1e-15
    mpmath.mp.dps = 120

    def on_sheet(p):
        s = [mpmath.mpf(float(c)) for c in p[1:]]
        return [mpmath.sqrt(1 + sum(c * c for c in s))] + s

    c = on_sheet(x[3])
    for i in range(30):
        xi = on_sheet(x[i])
        ref = float(mpmath.acosh(max(c[0] * xi[0] - c[1] * xi[1] - c[2] * xi[2], 1)))
        assert abs(2 * np.arctanh(np.linalg.norm(got[i])) - ref) <= 1e-9 * max(ref, 1e-3)
    # without a centre they lie beyond the float64 disk: drawn on the rim, quietly
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        far = _points_of(gk.plot.disk(x, model="hyperboloid"))
    np.testing.assert_allclose(np.linalg.norm(far, axis=1), 1.0, atol=1e-15)
    # with a display compression, drawn too close in: said so
    with pytest.warns(gk.RimClipWarning):
        gk.plot.disk(x, model="hyperboloid", radial_compression=2.0)
