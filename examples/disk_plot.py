"""Looking at hyperbolic data: a tree in the Poincaré disk, and a 10-dimensional
point cloud through principal geodesic analysis.

Scenario (invented): a small catalogue of product families, each splitting
into sub-families, laid out in the hyperbolic plane; and a 10-dimensional
embedding of customer profiles from three regions. Writes one PNG with two
panels to the path given as the first argument, or to a temporary
directory. Needs matplotlib (pip install gyrokit[plot]).

    python examples/disk_plot.py [out.png]
"""

from __future__ import annotations

import os
import sys
import tempfile

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

import gyrokit as gk  # noqa: E402


def catalogue_tree(branching=3, depth=5, step=2.0):
    """A balanced catalogue tree embedded by gk.embed.tree (every edge
    ``step`` R long). Returns points, parent index per node, and each
    node's top-level family."""
    parent = [-1]
    family = ["root"]
    frontier = [0]
    for k in range(1, depth + 1):
        nxt = []
        for node in frontier:
            for j in range(branching):
                parent.append(node)
                family.append(f"family {j + 1}" if k == 1 else family[node])
                nxt.append(len(parent) - 1)
        frontier = nxt
    parent = np.array(parent)
    return gk.embed.tree(parent, 2, scale=step).points, parent, np.array(family)


def customer_profiles(rng, n_per=150, d=10):
    """Three regions: wrapped clouds around three centres of the 10-ball,
    each elongated along its own direction."""
    xs, labels = [], []
    for r, name in enumerate(["north", "coast", "inland"]):
        centre = np.zeros(d)
        centre[r] = 0.55
        centre[(r + 1) % d] = -0.2
        spread = np.full(d, 0.25)
        spread[(r + 3) % d] = 1.0
        v = rng.normal(size=(n_per, d)) * spread * 0.5
        # tangent vectors at the centre (ambient coordinates) mapped by exp there
        xs.append(gk.poincare.exp_map(v * (1 - centre @ centre) / 2, centre))
        labels += [name] * n_per
    return np.concatenate(xs), np.array(labels)


def main(out_path: str) -> None:
    rng = np.random.default_rng(42)
    pts, parent, family = catalogue_tree()
    edges = np.stack([parent[1:], np.arange(1, len(parent))], axis=1)

    fig, (left, right) = plt.subplots(1, 2, figsize=(13, 6))
    focus = 2  # the head of family 2, moved to the middle by a Möbius translation
    gk.plot.disk(pts, edges=edges, labels=family, center=pts[focus], ax=left, point_size=9, radial_compression=2.0)
    left.set_title(f"catalogue tree ({len(pts)} nodes), node {focus} at the centre")

    x, region = customer_profiles(rng)
    pga = gk.PrincipalGeodesicAnalysis(2)
    z = pga.fit_transform(x)
    gk.plot.disk(z, labels=region, ax=right)
    share = 100 * pga.explained_variance_ratio_.sum()
    right.set_title(f"d = 10 profiles, 2 principal geodesics ({share:.0f}% of the variance)")

    fig.tight_layout()
    fig.savefig(out_path, dpi=90)
    plt.close(fig)

    # what the pictures promise, checked on the data
    moved = gk.poincare.add(-pts[focus], pts)
    assert np.linalg.norm(moved[focus]) < 1e-15
    full = gk.PrincipalGeodesicAnalysis(10).fit(x)
    r = 2 * np.arctanh(np.linalg.norm(full.transform(x), axis=1))
    assert np.allclose(r, gk.poincare.distance(full.mean_, x), rtol=1e-10)
    print(f"wrote {out_path}: tree of {len(pts)} nodes and {len(edges)} geodesic edges; "
          f"PGA keeps {share:.1f}% of the Fréchet variance {gk.frechet_variance(x):.3f} in 2 of 10 dimensions")


if __name__ == "__main__":
    target = sys.argv[1] if len(sys.argv) > 1 else os.path.join(tempfile.mkdtemp(prefix="gyrokit-"), "disk_plot.png")
    main(target)
