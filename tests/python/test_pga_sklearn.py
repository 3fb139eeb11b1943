"""scikit-learn's estimator checks on gyrokit.PrincipalGeodesicAnalysis, where they apply.

As for KMeans (test_kmeans_sklearn.py): the checks need scikit-learn's tag
machinery, so they run on a test-local subclass adding the mixins; the
half-space model with the ``positive_only`` input tag makes most generated
data valid points. Not required here: data off the half-space (a zero last
coordinate), complex, object or sparse input, and checks matching
scikit-learn's own error wording ("Reshape your data", "1 sample", ...).
"""

from __future__ import annotations

import pytest

import gyrokit as gk

sklearn = pytest.importorskip("sklearn")
from sklearn.base import BaseEstimator, TransformerMixin  # noqa: E402
from sklearn.utils.estimator_checks import check_estimator  # noqa: E402

MUST_PASS = {
    "check_estimator_cloneable", "check_estimator_repr", "check_no_attributes_set_in_init",
    "check_fit_score_takes_y", "check_estimators_overwrite_params", "check_dont_overwrite_parameters",
    "check_estimators_fit_returns_self", "check_readonly_memmap_input", "check_estimators_unfitted",
    "check_do_not_raise_errors_in_init_or_set_params", "check_estimators_nan_inf",
    "check_f_contiguous_array_estimator", "check_transformer_data_not_an_array", "check_transformer_general",
    "check_transformers_unfitted", "check_parameters_default_constructible", "check_methods_sample_order_invariance",
    "check_methods_subset_invariance", "check_get_params_invariance", "check_set_params", "check_dict_unchanged",
    "check_fit_idempotent", "check_fit_check_is_fitted", "check_n_features_in", "check_fit1d",
}


class _Checked(gk.PrincipalGeodesicAnalysis, TransformerMixin, BaseEstimator):
    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.positive_only = True
        return tags


def test_sklearn_estimator_checks_that_apply():
    results = check_estimator(_Checked(1, model="halfspace"), on_fail=None)
    status = {}
    for r in results:
        status.setdefault(r["check_name"], []).append((r["status"], r["exception"]))
    missing = MUST_PASS - set(status)
    assert not missing, f"checks not run by this scikit-learn version: {sorted(missing)}"
    failed = {name: [repr(e)[:200] for s, e in status[name] if s != "passed"] for name in MUST_PASS}
    failed = {k: v for k, v in failed.items() if v}
    assert not failed, failed
