"""Integer and real scalar arguments out of the int64 / float64 range are a
ValueError naming the argument, never an OverflowError from the conversion
(fuzzing finding F7, tests/fuzz/FINDINGS.md)."""

import numpy as np
import pytest

import gyrokit as gk

X = np.random.default_rng(0).uniform(-0.3, 0.3, (20, 2))


@pytest.mark.parametrize(
    "call, name",
    [
        (lambda: gk.knn(X, 2**64), "k"),
        (lambda: gk.knn(X, -1), "k"),
        (lambda: gk.NeighborIndex(X, leaf_size=2**63), "leaf_size"),
        (lambda: gk.NeighborIndex(X).query(X, 2**64), "k"),
        (lambda: gk.radius_neighbors(X, 2**1100), "r"),
        (lambda: gk.NeighborIndex(X).query_radius(X, 2**1100), "r"),
    ],
)
def test_out_of_range_scalars_are_value_errors(call, name):
    # common practice: the argument is named, the exception is a ValueError
    with pytest.raises(ValueError, match=rf"^{name}\b"):
        call()


@pytest.mark.parametrize("bad", [True, "3", 2.0, None])
def test_non_integers_are_type_errors(bad):
    with pytest.raises(TypeError, match="^k must be an integer"):
        gk.knn(X, bad)


@pytest.mark.parametrize(
    "call, name",
    [
        (lambda: gk.frechet_mean(X, max_iter=-1), "max_iter"),
        (lambda: gk.frechet_mean(X, max_iter=2**64), "max_iter"),
        (lambda: gk.KMeans(2, max_iter=2**64).fit(X), "max_iter"),
        (lambda: gk.KMeans(2, n_init=2**70).fit(X), "n_init"),
    ],
)
def test_out_of_range_iteration_counts_are_value_errors(call, name):
    with pytest.raises(ValueError, match=rf"^{name}\b"):
        call()
