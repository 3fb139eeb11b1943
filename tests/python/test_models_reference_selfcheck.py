"""The 50-digit mpmath references of the model accuracy tests (mp_models.py)
checked against second, independent mpmath formulations on the same
hard-case inputs: other routes (through the hyperboloid), distances across
models, the gyration's closed form, finite differences of the Klein tangent
maps, and exp/log/transport/geodesic/matvec/convert identities at high
precision. Failures here mean a wrong reference, not a library defect."""

from __future__ import annotations

from mpmath import mp, mpf
import numpy as np
import pytest

import mp_models as M
from conftest import radius
from models_reference_inputs import ball_point, KS, point_pair
from models_reference_cases import FUNC_BY_NAME


# ====================================================== the references themselves
#
# The references are only as good as their formulas: each is checked here
# against a second, independent mpmath formulation on the same hard-case
# inputs. Failures here mean a wrong reference, not a library defect.

REF_KINDS = ("random", "edge1e-3", "edge1e-15", "close1e-12", "far30")
REF_DS = (1, 3)


def _ref_rows(func_name, kinds=REF_KINDS):
    """A few rows of each kind from the accuracy test's own generators."""
    func = FUNC_BY_NAME[func_name]
    rng = np.random.default_rng(20240601)
    for kind in kinds:
        if kind not in func.kinds:
            continue
        for K in KS:
            for d in REF_DS:
                extra = func.extra(rng, K, d, kind) if func.extra else {}
                yield kind, K, func.sample(kind, rng, K, d), extra


def _rel(a, b, floor_r=0.0, K=-1.0):
    """Relative difference of two mpmath values, computed at 100 digits."""
    with mp.workdps(100):
        den = max(M.value_norm(b), mpf(floor_r) * radius(K))
        diff = M.value_diff_norm(a, b)
        return float(diff / den) if den > 0 else float(diff)


_VIA = {"exp_map": M.exp_map_via_hyperboloid, "log_map": M.log_map_via_hyperboloid,
        "transport": M.transport_via_hyperboloid, "geodesic": M.geodesic_via_hyperboloid}


@pytest.mark.parametrize("name", [f"{m}.{op}" for m in ("poincare", "klein") for op in _VIA])
def test_reference_routes_agree(name):
    # mpmath 50-digit reference of the textbook formula vs the same operation
    # computed on the hyperboloid (independent formulas, see mp_models)
    model, op = name.split(".")
    via = _VIA[op]
    kinds = REF_KINDS + (("origin",) if op in ("exp_map", "log_map") else ())
    worst = 0.0
    for kind, K, args, extra in _ref_rows(name, kinds):
        a = M.converged(getattr(M, f"{model}_{op}"), *args, curvature=K)
        b = M.converged(lambda *xs, **kw: via(model, *xs, **kw), *args, curvature=K)
        worst = max(worst, _rel(a, b, 1e-40, K))
    assert worst < 1e-30, worst


def test_reference_distances_agree_across_models():
    # five formulas for one distance: Poincaré acosh, Poincaré 2R artanh|(-x)⊕y|/R,
    # and the Klein, hyperboloid and half-space formulas on the exact (120-digit)
    # images of the points
    worst = 0.0
    for kind, K, (x, y), _ in _ref_rows("poincare.distance"):
        dps = 120
        ref = M.poincare_distance(x, y, curvature=K, dps=dps)
        others = [M.poincare_distance_asinh(x, y, curvature=K, dps=dps)]
        for model, fn in (("klein", M.klein_distance), ("hyperboloid", M.hyperboloid_distance),
                          ("halfspace", M.halfspace_distance)):
            xi = M.convert(x, "poincare", model, curvature=K, dps=dps)
            yi = M.convert(y, "poincare", model, curvature=K, dps=dps)
            others.append(fn(xi, yi, curvature=K, dps=dps))
        for o in others:
            worst = max(worst, _rel(o, ref, 1e-40, K))
    assert worst < 1e-30, worst


def test_reference_gyration_closed_form_matches_definition():
    # from memory (Ungar's closed form) vs the gyrator identity, on edge points
    rng = np.random.default_rng(3)
    worst = 0.0
    for K in KS:
        for d in (2, 3, 8):
            for gap in (0.5, 1e-9, 1e-15):
                a = ball_point(rng, d, K, gap=gap)
                b = ball_point(rng, d, K, gap=gap)
                w = rng.standard_normal(d) * 10.0
                c = M.converged(M.mobius_gyration, a, b, w, curvature=K)
                o = M.mobius_gyration_closed(a, b, w, curvature=K, dps=400)
                worst = max(worst, _rel(o, c))
    assert worst < 1e-30, worst


def test_reference_klein_tangent_maps_match_finite_differences():
    # chain rule vs central differences of the point maps at 90 digits, step 1e-25
    rng = np.random.default_rng(4)
    worst = 0.0
    for K in KS:
        for d in (1, 3, 8):
            for gap in (0.5, 1e-6, 1e-12):
                x = ball_point(rng, d, K, gap=gap, model="klein")
                v = rng.standard_normal(d)
                a = M.klein_to_poincare_tangent(v, x, curvature=K, dps=90)
                b = M.klein_to_poincare_tangent_fd(v, x, curvature=K, dps=90)
                worst = max(worst, _rel(a, b))
                p = ball_point(rng, d, K, gap=gap, model="poincare")
                a = M.poincare_to_klein_tangent(v, p, curvature=K, dps=90)
                b = M.poincare_to_klein_tangent_fd(v, p, curvature=K, dps=90)
                worst = max(worst, _rel(a, b))
    # central differences: error ~ (step/gap)^2 relative, 1e-26 at gap 1e-12
    assert worst < 1e-20, worst


@pytest.mark.parametrize("model", ["poincare", "klein", "hyperboloid"])
def test_reference_exp_log_transport_geodesic_identities(model):
    # identities of the exact operations, in mpmath at converged precision:
    #   exp_x(log_x y) = y;   |log_x y| = d(x, y);   P_{x->y}(log_x y) = -log_y x;
    #   d(x, gamma(t)) = t d(x, y)
    exp_f, log_f = getattr(M, f"{model}_exp_map"), getattr(M, f"{model}_log_map")
    tr_f, geo_f = getattr(M, f"{model}_transport"), getattr(M, f"{model}_geodesic")
    dist_f = getattr(M, f"{model}_distance")
    norm_f = {"poincare": M.poincare_riemannian_norm, "klein": M.klein_riemannian_norm,
              "hyperboloid": M.hyperboloid_minkowski_norm}[model]
    rng = np.random.default_rng(5)
    worst = 0.0
    for kind in ("random", "edge1e-9", "close1e-12", "far30"):
        for K in KS:
            for d in (1, 3):
                x, y = point_pair(model, kind, rng, d, K)
                dps = 200
                lg = log_f(y, x, curvature=K, dps=dps)
                dxy = dist_f(x, y, curvature=K, dps=dps)
                back = exp_f(lg, x, curvature=K, dps=dps)
                yy = M.convert(y, model, model, curvature=K, dps=dps)
                worst = max(worst, _rel(back, yy))
                worst = max(worst, _rel(norm_f(lg, x, curvature=K, dps=dps), dxy))
                moved = tr_f(lg, x, y, curvature=K, dps=dps)
                with mp.workdps(dps):  # mpf negation rounds to the working precision
                    minus = M.neg(log_f(x, y, curvature=K, dps=dps))
                worst = max(worst, _rel(moved, minus))
                t = float(rng.uniform(0, 1))
                g = geo_f(x, y, t, curvature=K, dps=dps)
                with mp.workdps(dps):  # t * d at full precision, not mp's default 15
                    t_dxy = mpf(t) * dxy
                worst = max(worst, _rel(dist_f(x, g, curvature=K, dps=dps), t_dxy))
                if model == "klein" and d > 1:
                    # Klein geodesics are straight chords: g - x is parallel to y - x
                    with mp.workdps(dps):
                        u, w = M.vsub(g, M.to_mp(x)), M.vsub(M.to_mp(y), M.to_mp(x))
                        s_ = M.dot(u, w) / M.sq(w)
                        worst = max(worst, float(M.norm(M.vsub(u, M.smul(s_, w))) / M.norm(w)))
    assert worst < 1e-30, worst


def test_reference_matvec_and_convert_identities():
    rng = np.random.default_rng(6)
    worst = 0.0
    for K in KS:
        big_r = radius(K)
        for d in (1, 3, 8):
            x = ball_point(rng, d, K, gap=10.0 ** rng.uniform(-12, 0))
            r = float(rng.uniform(-2, 2))
            # (r I) ⊗ x = r ⊗ x  (Ganea et al. 2018; from memory)
            a = M.poincare_matvec(r * np.eye(d), x, curvature=K, dps=80)
            b = M.mobius_scale(r, x, curvature=K, dps=80)
            worst = max(worst, _rel(a, b))
            # round trips through every model
            for dst in M.MODELS:
                there = M.convert(x, "poincare", dst, curvature=K, dps=120)
                back = M.convert(there, dst, "poincare", curvature=K, dps=120)
                worst = max(worst, _rel(back, M.to_mp(x)))
        # the ball origin goes to (0, ..., 0, R) in the half-space
        o = [float(c) for c in M.convert(np.zeros(3), "poincare", "halfspace", curvature=K)]
        assert o[:2] == [0.0, 0.0] and abs(o[2] - big_r) <= 1e-15 * big_r, o
    assert worst < 1e-30, worst
