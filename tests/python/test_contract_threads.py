"""Contract tests for the element-wise gyrovector functions of gyrokit:
valid input never gives NaN or inf (hard cases near the sphere included),
results are deterministic, independent of the thread count and of how the
input is sliced, and the GIL is released during large calls."""

from __future__ import annotations

import concurrent.futures
import threading
import time

import numpy as np
import pytest

from conftest import radius
pytestmark = pytest.mark.filterwarnings("ignore::gyrokit.poincare.RimClipWarning")
from contract_support import big_args, call, FUNC_IDS, FUNCS, make_args


# ------------------------------------------------------------------ no NaN


def _hard_args(func, rng, n, d, k):
    """Valid inputs concentrated where formulas break: near the sphere,
    nearly coincident, nearly opposite, zero and tiny points."""
    R = radius(k)
    kinds = [kind for _, kind in func[3]]
    args = make_args(func, rng, (n,), d, curvature=k)
    pts = [i for i, kd in enumerate(kinds) if kd == "point"]
    if len(pts) >= 2:
        i, j = pts[0], pts[1]
        q = n // 6
        args[j][:q] = -args[i][:q] * (1 - 1e-15)           # nearly opposite
        args[j][q:2 * q] = args[i][q:2 * q] * (1 - 1e-15)  # nearly coincident
        args[j][2 * q:3 * q] = -args[i][2 * q:3 * q]       # exactly opposite
        args[j][3 * q:4 * q] = args[i][3 * q:4 * q]        # identical
    i = pts[0]
    args[i][-4:] = 0.0
    args[i][-8:-4] = R * 1e-300
    args[i][-12:-8] = 5e-324
    if "scalar" in kinds:
        s = kinds.index("scalar")
        args[s][:] = rng.standard_normal(n) * 10.0 ** rng.uniform(-300, 300, n)
        args[s][:6] = [0.0, -0.0, 1e308, -1e308, 5e-324, 1.0]
    if "vector" in kinds:
        s = kinds.index("vector")
        args[s] *= 10.0 ** rng.uniform(-300, 300, (n, 1))
        args[s][:3] = 0.0
    for a, kd in zip(args, kinds):
        if kd == "point":
            sq = (a.astype(np.longdouble) ** 2).sum(axis=1) * np.longdouble(-k)
            assert np.all(sq < 1), "test generator produced a point outside the ball"
    return args


@pytest.mark.parametrize("k", [-1.0, -0.3, -4.0, -1e-6])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_valid_input_never_nan(func, k):
    # Never a silent NaN: valid input, including points with 1 - |x|/R down
    # to 1e-15 and the degenerate pairs above, gives no NaN anywhere.
    rng = np.random.default_rng(34)
    for d in (1, 3, 16):
        args = _hard_args(func, rng, 3000, d, k)
        out = call(func, args, curvature=k)
        assert out.shape == (3000, d)
        bad = np.any(np.isnan(out), axis=1)
        assert not bad.any(), f"d={d}: {bad.sum()} NaN rows, first {np.flatnonzero(bad)[:5]}"


@pytest.mark.parametrize("k", [-1.0, -0.3, -4.0, -1e-6])
@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_valid_input_finite(func, k):
    # Stronger than "no NaN": every result is finite. Ball operations return
    # (at worst rounded-onto-the-sphere) ball points, and a gyration is a
    # rotation (its docstring: it preserves norms), so |gyr[a,b] v| = |v|,
    # here at most ~1e301: an inf is as silent a failure as a NaN.
    rng = np.random.default_rng(34)
    for d in (1, 3, 16):
        args = _hard_args(func, rng, 3000, d, k)
        out = call(func, args, curvature=k)
        bad = ~np.all(np.isfinite(out), axis=1)
        first = np.flatnonzero(bad)[:3]
        assert not bad.any(), (
            f"d={d}: {bad.sum()} non-finite rows, first {first}: "
            + "; ".join(f"args {[a[i].tolist() for a in args]} -> {out[i].tolist()}" for i in first)
        )


# ---------------------------------------------------- determinism / threads


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_repeated_calls_bit_identical(func):
    # Repeated calls agree bit for bit (no state, no nondeterministic reduction).
    args = big_args(func, 50_000, 8)
    first = call(func, args)
    for _ in range(2):
        np.testing.assert_array_equal(call(func, args), first)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_threads_agree_with_serial(func):
    # Calls from 4 Python threads at once (large enough that the native code
    # runs with the GIL released) agree bit for bit with serial calls.
    inputs = [big_args(func, 200_000, 8, part=t) for t in range(3)]
    inputs.append(inputs[0])  # two threads on the very same arrays
    serial = [call(func, a) for a in inputs]
    with concurrent.futures.ThreadPoolExecutor(max_workers=4) as ex:
        results = list(ex.map(lambda a: call(func, a), inputs))
    for s, r in zip(serial, results):
        np.testing.assert_array_equal(r, s)


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_large_input_equals_small_slices(func):
    # Chunking and threading must not change bits: a 300 000 x 16 call equals
    # the same rows computed in small slices (a prime slice length, so slice
    # edges do not line up with any internal chunking).
    n, step = 300_000, 7919
    args = big_args(func, n, 16)
    full = call(func, args)
    for s in range(0, n, step):
        np.testing.assert_array_equal(call(func, [a[s:s + step] for a in args]), full[s:s + step])


@pytest.mark.parametrize("func", FUNCS, ids=FUNC_IDS)
def test_gil_released_during_large_call(func):
    # The native code runs with the GIL released: while a worker thread runs
    # 4 large calls (tens of ms each), the main thread keeps waking up from
    # 1 ms sleeps, and every wake-up needs the GIL. Were the GIL held during
    # a call, the main thread could only wake between calls: about one
    # wake-up per call, i.e. at most ~6 in all. Counting wake-ups (rather
    # than timing gaps) keeps this robust on a loaded machine.
    args = big_args(func, 200_000, 16)
    calls = 4
    wakeups, elapsed = _wakeups_during(lambda: [call(func, args) for _ in range(calls)])
    assert wakeups >= 4 * (calls + 2), (wakeups, elapsed)


def _wakeups_during(job, timeout=600.0):
    """Runs `job` in a daemon thread and counts the main thread's 1 ms
    wake-ups until it ends; returns (wake-ups, seconds). Were the job never
    to return (a call holding the GIL or stuck), or to raise, the test fails
    after `timeout` seconds or with the error instead of hanging the suite
    (a thread join with timeout, no plugin needed)."""
    done = threading.Event()
    errors = []

    def work():
        try:
            job()
        except BaseException as e:  # noqa: BLE001 - reported by the main thread
            errors.append(e)
        finally:
            done.set()

    th = threading.Thread(target=work, daemon=True)
    th.start()
    wakeups = 0
    t0 = time.perf_counter()
    while not done.is_set():
        if time.perf_counter() - t0 > timeout:
            pytest.fail(f"the calls did not finish within {timeout:g} s ({wakeups} wake-ups)")
        time.sleep(0.001)
        wakeups += 1
    elapsed = time.perf_counter() - t0
    th.join(timeout=timeout)
    assert not th.is_alive(), "worker thread did not end"
    assert not errors, f"the worker raised {errors[0]!r}"
    return wakeups, elapsed


def test_wakeup_counter_fails_instead_of_hanging():
    # common practice: a job that never ends makes the test fail at the
    # deadline (here 0.3 s), and a job that raises fails with its error
    blocker = threading.Event()
    t0 = time.perf_counter()
    with pytest.raises(pytest.fail.Exception, match="did not finish"):
        _wakeups_during(blocker.wait, timeout=0.3)
    assert time.perf_counter() - t0 < 60
    blocker.set()

    def boom():
        raise RuntimeError("worker failed")

    with pytest.raises(AssertionError, match="worker failed"):
        _wakeups_during(boom, timeout=30)
