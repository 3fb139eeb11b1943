"""Fuzzing harness for every public function and class of gyrokit (atheris).

Not part of the default test run. Usage (from the repository root, after
``make build``)::

    .venv/bin/python tests/fuzz/fuzz_api.py -runs=20000            # smoke (CI)
    .venv/bin/python tests/fuzz/fuzz_api.py -runs=200000 -seed=7    # a longer run
    .venv/bin/python tests/fuzz/fuzz_api.py --survey -runs=...      # log findings, keep going
    .venv/bin/python tests/fuzz/fuzz_api.py --repro CRASH_FILE      # replay one input, verbose
    GYROKIT_FUZZ_TRACE=1 ...                                      # print each call before making it

Any other ``-flag`` goes to libFuzzer (``-timeout=`` is the hang detector:
an input running longer aborts the run and leaves ``crash-*``/``timeout-*``
files).

Targets are enumerated from the package: ``__all__`` of ``gyrokit``, of
every submodule it exports, and of every other public (non-underscore)
module of the package found by ``pkgutil`` (a module without ``__all__``
contributes the public callables defined in it; one whose optional extra is
missing is skipped with a note). Positional parameters get arrays of the
role their name suggests (points of the module's model, tangent vectors,
scalars), keyword parameters get values of their default's type, with known
names (``model``, ``curvature``, ``k``, ``weights``, ``labels``, ...) drawn
from lists of valid and invalid values. Classes are constructed and their
public methods called (an estimator is fitted first; ``NeighborIndex`` is
also round-tripped through a corrupted pickle state).

Adding a function, a class or a submodule (``gyrokit.embed``,
``gyrokit.metrics``, ``gyrokit.random``, ``gyrokit.plot``,
``PrincipalGeodesicAnalysis``, ...): nothing to do here when it is listed
in ``__all__`` (of ``gyrokit`` or of its module, which must not start with
an underscore). Check the target list with
``python -c "import fuzz_api as f; print([t[0] for t in f.TARGETS])"``
(from ``tests/fuzz/``). If one of its parameters has a name the harness
does not know, add the name to one of the role tables before
``value_for`` (``POINT_NAMES``, ``WORK_COUNTS`` for iteration counts and
sizes, ``INT_ARRAY_NAMES``, ``DISTANCE_TABLE_NAMES``, ``SPD_NAMES``,
``SEED_NAMES``, ``NONE_NAMES``); otherwise it gets a value of its
default's type. Optional extras must be installed (``make test`` installs
them) for their module to be fuzzed; matplotlib runs with the Agg backend
and figures are closed after every call. A run can focus on a few targets:
``GYROKIT_FUZZ_TARGETS='gyrokit.*.exp_map,gyrokit.KMeans'`` (fnmatch
patterns, comma-separated).

Inputs: shapes (0-d to 3-d, empty axes, broadcasting and mismatched
shapes), dtypes (float16/32/64, longdouble, ints, uints, bool, complex,
object, str, bytes, datetime, structured, byte-swapped), layouts (Fortran,
transposed, negative strides, every-other-element views, zero strides from
``broadcast_to``, read-only, misaligned buffers), values (valid points,
points within 1e-16 of the sphere, NaN, +-inf, 1e308, subnormals, -0.0),
and wrong types (None, strings, dicts, ragged lists, huge ints, objects
whose ``__array__`` raises, pandas objects).

Oracle, per input:
* the call returns, or raises ``ValueError`` or ``TypeError`` (subclasses
  included); anything else -- ``PanicException`` (a Rust panic), other
  exception types, ``SystemError`` -- is a finding;
* the only warning allowed is ``gyrokit.ConvergenceWarning``;
* if every numeric input is finite and the call succeeds, no float in the
  result is NaN;
* no crash and no hang (libFuzzer: signals and ``-timeout``).

Findings stop the run (after printing a reproducer) unless ``--survey`` is
given, which appends one JSON line per new finding signature to
``findings.jsonl`` in the working directory (override with
``GYROKIT_FUZZ_FINDINGS``) and continues; ``--repro FILE.jsonl`` replays
them. Known findings not fixed yet are skipped (``KNOWN``, with
``tests/fuzz/FINDINGS.md``); ``GYROKIT_FUZZ_NO_SKIP=1`` runs them too,
``GYROKIT_FUZZ_NO_SKIP=F2,F6`` only the findings named. ``GYROKIT_FUZZ_COUNT`` names a file that receives the number of
inputs run so far (every 1000 inputs).
"""

from __future__ import annotations

import base64
import fnmatch
import importlib
import inspect
import io
import json
import os
import pickle
import pkgutil
import re
import sys
import types
import warnings

import atheris

os.environ.setdefault("MPLBACKEND", "Agg")  # gyrokit.plot: no windows

with atheris.instrument_imports():
    import gyrokit as gk

import numpy as np

try:  # optional: pandas inputs
    import pandas as pd
except ImportError:  # pragma: no cover
    pd = None

MODELS = ("poincare", "klein", "hyperboloid", "halfspace")
MODEL_MODULES = {"poincare": "poincare", "klein": "klein", "hyperboloid": "hyperboloid", "halfspace": "halfspace"}
ALLOWED = (ValueError, TypeError)
ALLOWED_WARNINGS = (gk.ConvergenceWarning,)


# ---------------------------------------------------------------------------
# targets


def public_modules():
    """gyrokit and each of its public submodules: those it exports in
    ``__all__`` and every other non-underscore module of the package
    (imported here; one whose optional extra is missing is skipped with a
    note on stderr)."""
    mods = {"gyrokit": gk}
    for name in gk.__all__:
        ob = getattr(gk, name, None)
        if isinstance(ob, types.ModuleType):
            mods[f"gyrokit.{name}"] = ob
    for info in pkgutil.iter_modules(gk.__path__):
        if info.name.startswith("_") or f"gyrokit.{info.name}" in mods:
            continue
        try:
            mods[f"gyrokit.{info.name}"] = importlib.import_module(f"gyrokit.{info.name}")
        except ImportError as e:  # an optional extra (matplotlib, ...) not installed
            print(f"fuzz: gyrokit.{info.name} not fuzzed: {e}", file=sys.stderr)
    return list(mods.items())


def module_names(mod):
    """The public names of a module: its ``__all__``, else the public
    callables defined in it."""
    names = getattr(mod, "__all__", None)
    if names is not None:
        return list(names)
    return [n for n, ob in vars(mod).items()
            if not n.startswith("_") and callable(ob) and getattr(ob, "__module__", None) == mod.__name__]


def public_targets():
    """(qualified name, object, module name) of every public function and
    class of gyrokit and of each of its public submodules."""
    seen, out = set(), []
    for mname, mod in public_modules():
        for name in module_names(mod):
            ob = getattr(mod, name, None)
            if isinstance(ob, types.ModuleType) or id(ob) in seen:
                continue
            if inspect.isclass(ob) and issubclass(ob, BaseException):
                continue  # exception and warning classes
            if not callable(ob):
                continue  # constants (MODELS, SPEED_OF_LIGHT, __version__)
            if inspect.isclass(ob) and hasattr(ob, "__dataclass_fields__"):
                continue  # result records (FrechetMean): constructing one computes nothing
            seen.add(id(ob))
            out.append((f"{mname}.{name}", ob, mname.split(".")[-1]))
    return out


def selected(targets):
    """The targets whose name matches one of the comma-separated fnmatch
    patterns of GYROKIT_FUZZ_TARGETS (all of them when it is unset), so that
    a run can focus on a few functions: GYROKIT_FUZZ_TARGETS='gyrokit.*.exp_map,gyrokit.frechet_mean'."""
    pats = [p.strip() for p in os.environ.get("GYROKIT_FUZZ_TARGETS", "").split(",") if p.strip()]
    if not pats:
        return targets
    out = [t for t in targets if any(fnmatch.fnmatchcase(t[0], p) for p in pats)]
    if not out:
        raise SystemExit(f"GYROKIT_FUZZ_TARGETS={pats} matches no target; targets: {[t[0] for t in targets]}")
    return out


TARGETS = selected(public_targets())


# ---------------------------------------------------------------------------
# drawing


class Draw:
    """Structural choices from the fuzzer's bytes (so that mutations steer
    them), bulk numbers from a generator seeded by those bytes."""

    def __init__(self, data: bytes):
        self.fdp = atheris.FuzzedDataProvider(data)
        self.rng = np.random.default_rng(self.fdp.ConsumeUInt(8))

    def int(self, lo: int, hi: int) -> int:
        if self.fdp.remaining_bytes():
            return self.fdp.ConsumeIntInRange(lo, hi)
        return int(self.rng.integers(lo, hi + 1))

    def pick(self, seq):
        return seq[self.int(0, len(seq) - 1)]

    def chance(self, p: float) -> bool:
        return self.int(0, 999) < p * 1000


class Ctx:
    """What one call is about: model, curvature and speed of light the
    generated points should respect (when they are meant to be valid), the
    point dimension and a leading shape shared by the array arguments."""

    def __init__(self, dr: Draw, module: str):
        self.model = MODEL_MODULES.get(module, "poincare")
        self.module = module
        self.K = -1.0
        self.c = None
        self.d = dr.pick([1, 2, 2, 3, 3, 3, 5, 8, 17]) if not dr.chance(0.02) else dr.pick([0, 40, 129])
        self.lead = pick_lead(dr)


def pick_lead(dr: Draw):
    nd = dr.pick([0, 1, 1, 1, 1, 2])
    sizes = [0, 1, 2, 3, 5, 7, 16, 33, 64]
    if dr.chance(0.02):
        sizes = [200, 300]
    return tuple(dr.pick(sizes) for _ in range(nd))


def directions(dr: Draw, n: int, d: int) -> np.ndarray:
    u = dr.rng.normal(size=(n, d))
    norm = np.linalg.norm(u, axis=1, keepdims=True)
    norm[norm == 0] = 1.0
    return u / norm


def radii_fraction(dr: Draw, n: int) -> np.ndarray:
    """Fractions of R: uniform, near the rim (1 - 10^-u down to 1e-16), tiny."""
    kind = dr.pick(["uniform", "uniform", "rim", "mixed", "tiny", "zero"])
    if kind == "uniform":
        return dr.rng.uniform(0, 0.95, size=n)
    if kind == "rim":
        return 1 - 10.0 ** -dr.rng.uniform(1, 16.5, size=n)
    if kind == "mixed":
        return np.where(dr.rng.random(n) < 0.5, dr.rng.uniform(0, 1, n), 1 - 10.0 ** -dr.rng.uniform(1, 16, n))
    if kind == "tiny":
        return 10.0 ** -dr.rng.uniform(10, 310, size=n)
    return np.zeros(n)


def ball_points(dr: Draw, n: int, d: int, K: float) -> np.ndarray:
    R = 1 / np.sqrt(-K) if K < 0 and np.isfinite(K) else 1.0
    return directions(dr, n, d) * radii_fraction(dr, n)[:, None] * R


def model_points(dr: Draw, model: str, n: int, d: int, K: float) -> np.ndarray:
    """Valid points of `model` (d coordinates; d + 1 on the hyperboloid),
    built with NumPy formulas of the models (not with gyrokit)."""
    R = 1 / np.sqrt(-K) if K < 0 and np.isfinite(K) else 1.0
    if model in ("poincare", "klein"):
        return ball_points(dr, n, d, K)
    if model == "hyperboloid":
        # Poincaré p -> (R (1 + |p/R|^2), 2 p) / (1 - |p/R|^2): the textbook map.
        p = ball_points(dr, n, d, K) / R
        s = np.sum(p * p, axis=1, keepdims=True)
        g = 1 - s
        g[g <= 0] = 1e-300
        return np.concatenate([R * (1 + s) / g, 2 * R * p / g], axis=1)
    # half-space: last coordinate positive, spread over many scales
    x = dr.rng.normal(size=(n, d)) * 10.0 ** dr.rng.uniform(-3, 3, size=(n, 1)) * R
    x[:, -1] = np.abs(x[:, -1]) * 10.0 ** dr.rng.uniform(-20, 20, size=n) + 1e-300
    return x


def vectors(dr: Draw, n: int, d: int) -> np.ndarray:
    scale = 10.0 ** dr.rng.uniform(-8, 3, size=(n, 1))
    if dr.chance(0.05):
        scale = scale * dr.pick([1e-300, 1e150, 1e300])
    return dr.rng.normal(size=(n, d)) * scale


SPECIALS = [np.nan, np.inf, -np.inf, 1e308, -1e308, 5e-324, -0.0, 0.0, 1.0, -1.0, 1e-300, 2.0 ** 250]


def perturb(dr: Draw, a: np.ndarray) -> np.ndarray:
    """Sometimes poison a few entries or rescale the whole array."""
    if a.size and dr.chance(0.15):
        flat = a.reshape(-1).copy()
        for _ in range(dr.int(1, 3)):
            flat[dr.int(0, flat.size - 1)] = dr.pick(SPECIALS)
        a = flat.reshape(a.shape)
    if a.size and dr.chance(0.03):
        a = a * dr.pick([1e300, 1e-300, -1.0, 1e10])
    return a


def with_dtype(dr: Draw, a: np.ndarray):
    """The array in another dtype (most of the time float64 or float32)."""
    kind = dr.pick(["f8"] * 10 + ["f4"] * 5 + ["f2", "g", ">f8", ">f4", "i8", "i4", "u1", "?", "c16", "c8",
                                                "O", "Ofloat", "U", "S", "M8[s]", "m8[s]", "struct"])
    with np.errstate(all="ignore"):
        if kind in ("f8", "f4", "f2", "g", ">f8", ">f4"):
            return a.astype(kind)
        if kind in ("i8", "i4", "u1"):
            return np.nan_to_num(a, nan=0, posinf=1e9, neginf=-1e9).clip(-1e9, 1e9).astype(kind)
        if kind == "?":
            return a != 0
        if kind in ("c16", "c8"):
            return (a + 1j * dr.pick([0.0, 1e-3])).astype(kind)
        if kind == "O":
            o = a.astype(object)
            if o.size and dr.chance(0.5):
                o.reshape(-1)[0] = dr.pick([None, "x", 1j, 2 ** 200, [1.0]])
            return o
        if kind == "Ofloat":
            return a.astype(object)  # Python floats in an object array
        if kind == "U":
            return a.astype("U32")
        if kind == "S":
            return a.astype("S32")
        if kind in ("M8[s]", "m8[s]"):
            return np.zeros(a.shape, dtype=kind)
        return np.zeros(a.shape, dtype=[("a", "f8"), ("b", "i4")])


def with_layout(dr: Draw, a: np.ndarray):
    """The same values in another memory layout."""
    kind = dr.pick(["c"] * 8 + ["f", "tt", "neg", "step", "bcast", "ro", "misaligned"])
    if kind == "c" or a.ndim == 0:
        return a
    if kind == "f":
        return np.asfortranarray(a)
    if kind == "tt":
        return a.T.copy().T
    if kind == "neg":
        return np.flip(np.flip(a, axis=-1).copy(), axis=-1)
    if kind == "step":
        w = np.zeros(a.shape[:-1] + (2 * a.shape[-1],), dtype=a.dtype)
        w[..., ::2] = a
        return w[..., ::2]
    if kind == "bcast" and a.shape[0] > 0:
        return np.broadcast_to(a[:1], a.shape)
    if kind == "ro":
        b = a.copy()
        b.setflags(write=False)
        return b
    if kind == "misaligned" and a.dtype.kind in "fiuc" and a.dtype.itemsize > 1:
        buf = np.zeros(a.nbytes + 1, dtype=np.uint8)
        m = np.frombuffer(buf.data, dtype=a.dtype, count=a.size, offset=1).reshape(a.shape)
        m[...] = a
        return m
    return a


class RaisesInArray:
    def __array__(self, *args, **kw):
        raise RuntimeError("no array here")


class Weird(float):
    """A float subclass (np.asarray reads it as a float)."""


def wrong_value(dr: Draw):
    return dr.pick([None, "abc", b"xy", {}, [], [[1.0, 2.0], [3.0]], object(), lambda: 0, 1j, True, 2 ** 200,
                    RaisesInArray(), Weird(0.5), (0.1, 0.2), range(3), np.float32(0.5), np.int64(3),
                    float("nan"), -1, [[0.1, "a"]]])


def as_pandas(dr: Draw, a: np.ndarray):
    if pd is None or a.ndim not in (1, 2):
        return a
    return pd.Series(a) if a.ndim == 1 else pd.DataFrame(a)


def module_is_model(ctx: Ctx) -> bool:
    return ctx.module in MODEL_MODULES


def array_arg(dr: Draw, ctx: Ctx, role: str, lead=None):
    """An array argument of a role: 'point', 'vector', 'velocity', 'scalar',
    'matrix', 'point2d' (n, d) for pairwise functions."""
    if dr.chance(0.04):
        return wrong_value(dr)
    lead = ctx.lead if lead is None else lead
    if dr.chance(0.1):
        lead = pick_lead(dr)  # broadcasting, or a mismatch
    d = ctx.d
    if dr.chance(0.04):
        d = dr.pick([0, 1, 2, 4, 9])  # mismatched dimension
    lead = list(lead)
    while lead and int(np.prod(lead)) * max(d, 1) > 40_000:  # keep each input small (a string copy
        i = int(np.argmax(lead))                              # of 10^7 entries is 1.5 GB)
        lead[i] //= 2
    lead = tuple(lead)
    n = int(np.prod(lead)) if lead else 1
    if role in ("point", "point2d"):
        width = d + 1 if ctx.model == "hyperboloid" else d
        base = model_points(dr, ctx.model, n, d, ctx.K) if d > 0 else np.zeros((n, width))
        a = base.reshape(tuple(lead) + (base.shape[-1],))
    elif role == "velocity":
        c = ctx.c if ctx.c is not None and np.isfinite(ctx.c) and ctx.c > 0 else 299792458.0
        a = (ball_points(dr, n, d, -1.0) * c).reshape(tuple(lead) + (d,))
    elif role == "scalar":
        a = (dr.rng.normal(size=n) * 10.0 ** dr.rng.uniform(-3, 2)).reshape(lead)
    elif role == "matrix":
        shape = (d, d) if not dr.chance(0.2) else (dr.int(0, 4), d)
        a = dr.rng.normal(size=shape)
    else:
        width = d + 1 if ctx.model == "hyperboloid" and module_is_model(ctx) else d
        a = vectors(dr, n, width).reshape(tuple(lead) + (width,))
    if dr.chance(0.1) and a.ndim:
        a = a[..., : dr.int(0, a.shape[-1])]  # truncated last axis
    a = perturb(dr, a)
    a = with_layout(dr, with_dtype(dr, a))
    if dr.chance(0.03):
        a = a.tolist() if isinstance(a, np.ndarray) and a.size < 200 else a
    if dr.chance(0.02) and isinstance(a, np.ndarray):
        a = as_pandas(dr, a)
    return a


def float_arg(dr: Draw, typical):
    if dr.chance(0.7):
        return dr.pick(typical)
    return dr.pick([0.0, -0.0, -1.0, 1.0, np.nan, np.inf, -np.inf, 1e-320, 1e308, -1e308, 0.5, 2 ** 70, "1.0", None,
                    np.float32(0.25), np.array(0.5), np.array([0.5, 0.5]), True, 1j])


def int_arg(dr: Draw, typical, huge=True):
    """An integer argument; `huge=False` for counts of work (n_init,
    max_iter), where a huge valid value legitimately runs for ever."""
    if dr.chance(0.75):
        return dr.pick(typical)
    extreme = [2 ** 31, 2 ** 63 - 1, 2 ** 63, 2 ** 64, -2 ** 63] if huge else [-2 ** 63, -2 ** 64]
    return dr.pick(extreme + [0, -1, 1, 1.5, 2.0, True, "3", None, np.int64(2), np.uint64(3), np.int8(-1),
                              np.float64(2.0)])


def str_arg(dr: Draw, typical):
    if dr.chance(0.85):
        return dr.pick(typical)
    return dr.pick(["", "POINCARE", "poincare ", "ball", None, 3, b"poincare", "klein\x00", "ü"])


def labels_arg(dr: Draw, n: int):
    k = dr.int(1, 4)
    kind = dr.pick(["int"] * 6 + ["str", "float", "obj", "cat", "short", "2d", "neg", "bool", "nan"])
    lab = dr.rng.integers(0, k, size=n)
    if kind == "str":
        return np.array([f"g{i}" for i in lab])
    if kind == "float":
        return lab.astype(float)
    if kind == "obj":
        return lab.astype(object)
    if kind == "cat" and pd is not None:
        return pd.Categorical([f"c{i}" for i in lab])
    if kind == "short":
        return lab[: max(0, n - 1)]
    if kind == "2d":
        return lab.reshape(-1, 1)
    if kind == "neg":
        return lab - 2 ** 62
    if kind == "bool":
        return lab % 2 == 0
    if kind == "nan":
        return np.where(lab == 0, np.nan, lab)
    return lab


def weights_arg(dr: Draw, n: int):
    kind = dr.pick(["ok"] * 6 + ["zero", "neg", "nan", "inf", "short", "2d", "huge", "f32", "int"])
    w = dr.rng.uniform(0, 2, size=n)
    if kind == "zero":
        return np.zeros(n)
    if kind == "neg":
        return w - 1
    if kind == "nan" and n:
        w[0] = np.nan
    if kind == "inf" and n:
        w[0] = np.inf
    if kind == "short":
        return w[: max(0, n - 1)]
    if kind == "2d":
        return w.reshape(-1, 1)
    if kind == "huge":
        return w * 1e308
    if kind == "f32":
        return w.astype(np.float32)
    if kind == "int":
        return (w * 3).astype(np.int64)
    return w


# ---------------------------------------------------------------------------
# arguments by parameter name

# Parameter names with a role, whatever function they belong to: the one
# place to extend when a new public function has a parameter the harness
# does not know (an unknown name gets a value of its default's type, or a
# point array when it has no default).
POINT_NAMES = {"x", "y", "a", "b", "base", "start", "end", "X", "k_points", "mean"}
MODEL_PARAMS = {"model", "src", "dst"}
# counts of work: small valid values and invalid ones, never a huge valid
# count (which legitimately runs for ever or exhausts memory)
WORK_COUNTS = {"n_init", "max_iter", "epochs", "negatives", "burn_in", "size", "n_samples", "n_components", "dim",
               "n_iter"}
INT_ARRAY_NAMES = {"parent", "edges", "pairs"}  # node indices: trees, graphs, pairs of rows
DISTANCE_TABLE_NAMES = {"D", "target"}  # (n, n) distance tables
SPD_NAMES = {"cov"}  # (d, d) covariance matrices
SEED_NAMES = {"random_state", "seed"}
NONE_NAMES = {"ax", "progress"}  # objects of other libraries: None (the default) or junk


def int_array_arg(dr: Draw, ctx: Ctx, name: str):
    """Node indices: a parent array (n,) with one root -1, or (m, 2) rows of
    indices, sometimes corrupted (a cycle, an index out of range, floats)."""
    n = max(npoints(ctx), 1)
    if name == "parent":
        a = np.array([-1] + [int(dr.rng.integers(0, i)) for i in range(1, n)], dtype=np.int64)
    else:
        m = dr.int(0, 2 * n)
        a = dr.rng.integers(0, n, size=(m, 2))
    if a.size and dr.chance(0.2):
        flat = a.reshape(-1)
        flat[dr.int(0, flat.size - 1)] = dr.pick([-1, -2, n, n + 5, 2 ** 62, 0])
    if dr.chance(0.05):
        a = a.astype(dr.pick([np.float64, np.int32, np.uint8, object]))
    return a


def distance_table_arg(dr: Draw, ctx: Ctx):
    n = max(npoints(ctx), 1)
    p = ball_points(dr, n, max(ctx.d, 1), -1.0)
    with np.errstate(all="ignore"):
        sq = np.sum((p[:, None] - p[None]) ** 2, axis=-1)
        g = 1 - np.sum(p * p, axis=1)
        D = np.arccosh(1 + 2 * sq / np.maximum(g[:, None] * g[None], 1e-300))  # Poincaré distances
    return perturb(dr, D)


def spd_arg(dr: Draw, ctx: Ctx):
    d = max(ctx.d, 1)
    a = dr.rng.normal(size=(d, d))
    return perturb(dr, a @ a.T * 10.0 ** dr.rng.uniform(-6, 2) + (0 if dr.chance(0.2) else 1e-3) * np.eye(d))


def npoints(ctx: Ctx) -> int:
    return ctx.lead[0] if len(ctx.lead) >= 1 else 1


def value_for(dr: Draw, ctx: Ctx, fname: str, module: str, p: inspect.Parameter):
    """A value for parameter `p` of function `fname` (in `module`)."""
    name = p.name
    pairwise = module in ("gyrokit", "neighbors", "_index", "centroids", "kmeans")
    if name in MODEL_PARAMS:
        return str_arg(dr, [ctx.model] if name != "dst" else list(MODELS))
    if name == "curvature":
        return float_arg(dr, [-1.0, -1.0, -1.0, -0.25, -4.0, -1e-6])
    if name == "c" and fname.rsplit(".", 1)[-1] in ("angle", "triangle"):
        # the third vertex of a gyroangle / triangle: a point like a and b
        return array_arg(dr, ctx, "point")
    if name == "c":
        return float_arg(dr, [299792458.0, 1.0, 3.0, 1e-3])
    if name in ("k", "n_clusters"):
        if module == "relativity":  # from_klein(k): a Klein point
            return array_arg(dr, ctx, "point")
        return int_arg(dr, [1, 1, 2, 3, 5])
    if name in ("max_iter",):
        return int_arg(dr, [1, 3, 50], huge=False)
    if name in WORK_COUNTS:
        return int_arg(dr, [1, 2, 3], huge=False)
    if name in INT_ARRAY_NAMES:
        return int_array_arg(dr, ctx, name) if not dr.chance(0.05) else wrong_value(dr)
    if name in DISTANCE_TABLE_NAMES:
        return distance_table_arg(dr, ctx) if not dr.chance(0.05) else wrong_value(dr)
    if name in SPD_NAMES:
        return spd_arg(dr, ctx) if not dr.chance(0.05) else wrong_value(dr)
    if name in NONE_NAMES:
        return None if dr.chance(0.9) else wrong_value(dr)
    if name == "leaf_size":
        return int_arg(dr, [1, 2, 16, 64])
    if name in ("tol",):
        return float_arg(dr, [1e-12, 1e-10, 0.0, 1e-3])
    if name == "margin":
        return float_arg(dr, [1e-12, 1e-6, 0.5])
    if name == "r" and pairwise:
        return float_arg(dr, [0.0, 0.5, 1.0, 3.0, np.inf])
    if name == "r" or name == "t":
        return array_arg(dr, ctx, "scalar")
    if name == "weights":
        return weights_arg(dr, npoints(ctx)) if not dr.chance(0.05) else wrong_value(dr)
    if name == "labels":
        return labels_arg(dr, npoints(ctx)) if not dr.chance(0.05) else wrong_value(dr)
    if name == "center":
        return array_arg(dr, ctx, "point", lead=())
    if name == "out":
        n = npoints(ctx)
        return dr.pick([np.zeros((n, n)), np.zeros((n, n), np.float32), np.zeros((n, n + 1)), np.zeros((n, n), int),
                        np.zeros((n, n)).T, np.zeros((2 * n, n))[::2], [[0.0]]])
    if name == "init":
        if dr.chance(0.7):
            return dr.pick(["k-means++", "random"])
        return dr.pick(["foo", None, 3]) if dr.chance(0.5) else array_arg(dr, ctx, "point")
    if name in SEED_NAMES:
        return dr.pick([None, 0, 1, 12345, np.random.default_rng(3), -1, "x", 2 ** 80, 1.5])
    if name in ("deep",):
        return dr.pick([True, False, None])
    if name in POINT_NAMES or (name == "y" and pairwise):
        if name == "y" and pairwise and dr.chance(0.4):
            return None
        return array_arg(dr, ctx, "point")
    if module == "relativity":
        if name in ("u", "v"):
            return array_arg(dr, ctx, "velocity")
        return array_arg(dr, ctx, "vector")  # a (acceleration), w (rapidity)
    if name == "m":
        return array_arg(dr, ctx, "matrix")
    if name in ("v", "u"):
        return array_arg(dr, ctx, "vector" if not dr.chance(0.4) else "point")
    # unknown parameter: follow its default
    default = p.default
    if isinstance(default, bool):
        return dr.pick([True, False, None, 1])
    if isinstance(default, int):
        return int_arg(dr, [default, 1, 2])
    if isinstance(default, float):
        return float_arg(dr, [default])
    if isinstance(default, str):
        return str_arg(dr, [default])
    return array_arg(dr, ctx, "point")


def call_args(dr: Draw, ctx: Ctx, fname: str, module: str, fn):
    """Positional and keyword arguments for `fn`; required parameters always
    given, optional ones sometimes, sometimes an extra or a missing one."""
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):
        return [], {}
    params = [p for p in sig.parameters.values() if p.name != "self" and p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD)]
    # settle model/curvature/c first so that points are drawn to match them
    kw = {}
    for p in params:
        if p.name in ("model", "src") and dr.chance(0.7):
            kw[p.name] = value_for(dr, ctx, fname, module, p)
            if isinstance(kw[p.name], str) and kw[p.name] in MODELS:
                ctx.model = kw[p.name]
        elif p.name == "curvature" and dr.chance(0.4):
            kw[p.name] = value_for(dr, ctx, fname, module, p)
            try:
                ctx.K = float(kw[p.name])
            except (TypeError, ValueError):
                pass
        elif p.name == "c" and dr.chance(0.5):
            kw[p.name] = value_for(dr, ctx, fname, module, p)
            try:
                ctx.c = float(kw[p.name])
            except (TypeError, ValueError):
                pass
    args = []
    positional_open = True  # no earlier positional parameter skipped or given by keyword
    for p in params:
        positional = p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD)
        if p.name in kw:
            positional_open = False
            continue
        required = p.default is inspect.Parameter.empty
        if not required and not dr.chance(0.5):
            positional_open = False
            continue
        v = value_for(dr, ctx, fname, module, p)
        if positional and positional_open and (required or dr.chance(0.5)):
            args.append(v)
        else:
            positional_open = False
            kw[p.name] = v
    if dr.chance(0.01):
        kw["no_such_argument"] = 1
    if dr.chance(0.01) and args:
        args.pop()
    return args, kw


# ---------------------------------------------------------------------------
# the oracle


class Finding(Exception):
    pass


def numeric_finite(ob) -> bool:
    """Whether an argument is numeric (real or bool) and finite throughout;
    non-numeric arguments and None count as finite (they should fail)."""
    if ob is None or isinstance(ob, (str, bytes, bool)):
        return True
    if isinstance(ob, (int, float, np.number)):
        return bool(np.isfinite(float(ob))) if not isinstance(ob, complex) else True
    if isinstance(ob, np.ndarray):
        if ob.dtype.kind in "fiub":
            with np.errstate(all="ignore"):
                return bool(np.all(np.isfinite(ob.astype(np.float64))))
        if ob.dtype.kind == "O":
            return all(numeric_finite(v) for v in ob.reshape(-1)[:1000])
        return True
    if isinstance(ob, (list, tuple)):
        return all(numeric_finite(v) for v in ob)
    if pd is not None and isinstance(ob, (pd.Series, pd.DataFrame)):
        return numeric_finite(ob.to_numpy())
    return True


def nan_in(ob, depth=0) -> bool:
    if depth > 4:
        return False
    if isinstance(ob, float):
        return ob != ob
    if isinstance(ob, np.ndarray):
        return ob.dtype.kind in "fc" and bool(np.isnan(ob).any())
    if isinstance(ob, np.floating):
        return bool(np.isnan(ob))
    if isinstance(ob, (tuple, list)):
        return any(nan_in(v, depth + 1) for v in ob)
    if hasattr(ob, "cluster_centers_"):  # a fitted estimator
        return any(nan_in(getattr(ob, a, None), depth + 1) for a in ("cluster_centers_", "inertia_"))
    if hasattr(ob, "__dataclass_fields__"):
        return any(nan_in(getattr(ob, f), depth + 1) for f in ob.__dataclass_fields__)
    return False


def describe_value(v) -> str:
    if isinstance(v, np.ndarray):
        s = f"ndarray(dtype={v.dtype}, shape={v.shape}, strides={v.strides}, C={v.flags.c_contiguous}, " \
            f"aligned={v.flags.aligned}, writeable={v.flags.writeable}"
        if v.size <= 12:
            s += f", values={v.tolist()!r}"
        return s + ")"
    try:
        r = repr(v)
    except Exception as e:  # noqa: BLE001 - e.g. pandas cannot print big-endian frames
        r = f"<{type(v).__name__}, repr failed: {type(e).__name__}>"
    return r if len(r) < 300 else r[:300] + "..."


def describe_call(name, args, kw) -> str:
    parts = [describe_value(a) for a in args] + [f"{k}={describe_value(v)}" for k, v in kw.items()]
    return f"{name}({', '.join(parts)})"


def check_call(name, fn, args, kw, log):
    """Runs fn(*args, **kw) under the oracle. Returns the result or None
    (also when the call is skipped as a known finding)."""
    if known_issue(name, args, kw):
        return None
    if TRACE:  # a crash (signal) leaves no log: print each call before it is made
        print("  calling " + describe_call(name, args, kw), file=sys.stderr, flush=True)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        finite = all(numeric_finite(a) for a in args) and all(numeric_finite(v) for k, v in kw.items() if k != "out")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            res = fn(*args, **kw)
        except ALLOWED as e:
            if type(e).__module__ == "pyo3_runtime":
                raise Finding(f"{type(e).__name__}: {e}")
            log.append((name, args, kw, f"{type(e).__name__}: {e}"))
            res, ok = None, False
        except BaseException as e:  # noqa: B036 - PanicException is a BaseException
            if isinstance(e, (KeyboardInterrupt, Finding)):
                raise
            raise Finding(f"{type(e).__module__}.{type(e).__name__}: {e}")
        else:
            ok = True
        finally:
            plt = sys.modules.get("matplotlib.pyplot")
            if plt is not None:  # gyrokit.plot: do not pile up figures
                plt.close("all")
    for w in caught:
        if not issubclass(w.category, ALLOWED_WARNINGS):
            raise Finding(f"warning {w.category.__name__}: {w.message}")
    if ok and finite and nan_in(res):
        raise Finding("NaN in the result of a call with finite inputs")
    return res


# ---------------------------------------------------------------------------
# known findings not fixed yet, skipped so that a long run is not stopped by
# them again and again (GYROKIT_FUZZ_NO_SKIP=1 runs them too). Each entry:
# target, why, predicate on (args, kw). Remove an entry when its fix lands.


def _huge(args, kw, limit=1e150) -> bool:
    """Some float argument has a finite entry beyond `limit` in magnitude."""
    for a in list(args) + list(kw.values()):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                v = np.asarray(a, dtype=np.float64)
        except Exception:  # noqa: BLE001
            continue
        with np.errstate(all="ignore"):
            if v.size and np.any(np.isfinite(v) & (np.abs(v) > limit)):
                return True
    return False


def _floats(args, kw):
    for a in list(args) + list(kw.values()):
        if isinstance(a, (str, bytes)) or a is None:
            continue
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                v = np.asarray(a, dtype=np.float64)
        except Exception:  # noqa: BLE001
            continue
        yield v


def _tiny(args, kw, limit=1e-150) -> bool:
    """Some float argument has a non-zero entry below `limit` in magnitude."""
    with np.errstate(all="ignore"):
        return any(v.size and np.any((v != 0) & (np.abs(v) < limit)) for v in _floats(args, kw))


def _extreme_curvature(args, kw) -> bool:
    try:
        k = abs(float(kw.get("curvature", -1.0)))
    except (TypeError, ValueError):
        return False
    return k > 1e150 or 0 < k < 1e-150


def _far_geodesic(args, kw) -> bool:
    """geodesic(x, y, t) whose point lies beyond ~30 R (t extrapolates far)."""
    if len(args) < 3:
        return False
    try:
        t = np.max(np.abs(np.asarray(args[2], dtype=np.float64)))
        x, y = (np.asarray(a, dtype=np.float64) for a in args[:2])
        k = float(kw.get("curvature", -1.0))
        R = 1 / np.sqrt(-k)
        with np.errstate(all="ignore"):
            # textbook Poincaré/Klein bound: d(x, y) <= d(0, x) + d(0, y), d(0, x) <= 2 artanh(|x|/R) R
            rx = np.max(np.linalg.norm(x, axis=-1)) / R
            ry = np.max(np.linalg.norm(y, axis=-1)) / R
            reach = 2 * (np.arctanh(min(rx, 1 - 1e-16)) + np.arctanh(min(ry, 1 - 1e-16)))
        return bool(t * reach + reach > 30)
    except Exception:  # noqa: BLE001
        return False


def _near_rim(args, kw, gap=1e-5) -> bool:
    """A point argument within `gap` R of the sphere (ball models; the
    hyperboloid's x0 beyond 1/gap)."""
    model = kw.get("model", "poincare")
    if model == "halfspace":
        return False
    try:
        k = float(kw.get("curvature", -1.0))
        R = 1 / np.sqrt(-k) if k < 0 else 1.0
    except (TypeError, ValueError):
        R = 1.0
    for v in _floats(args, kw):
        if v.ndim < 1 or v.shape[-1] < 1 or not v.size:
            continue
        with np.errstate(all="ignore"):
            if model == "hyperboloid":
                if np.any(np.abs(v[..., 0]) > R / gap):
                    return True
            elif np.any(1 - np.linalg.norm(v, axis=-1) / R < gap):
                return True
    return False


def _bad_int(args, kw, depth=0) -> bool:
    """An integer argument outside int64 (also inside a pickle state), or a
    negative max_iter."""
    for name, a in list(enumerate(args)) + list(kw.items()):
        if isinstance(a, (int, np.integer)) and not isinstance(a, (bool, np.bool_)):
            if not -2 ** 63 <= int(a) < 2 ** 63 or (name == "max_iter" and int(a) < 0):
                return True
        elif depth < 2 and isinstance(a, (tuple, list)) and len(a) < 20 and _bad_int(a, {}, depth + 1):
            return True
        elif depth < 2 and isinstance(a, dict) and _bad_int([], a, depth + 1):
            return True
    return False


def _raises_in_array(args, kw) -> bool:
    return any(isinstance(a, RaisesInArray) for a in list(args) + list(kw.values()))


def _always(args, kw) -> bool:
    return True


# Findings of the 1 000 000-input survey in code outside the harness's
# owner's files (reproducers in tests/fuzz/FINDINGS.md), as fnmatch patterns
# of the call name. Each skips only the inputs that trigger it.
KNOWN = [
    # F2 (huge inputs of exp_map/transport/log_map/geodesic) and F4 (tiny
    # coordinates) are fixed and their entries removed (predicates _huge and
    # _tiny kept above for re-skipping a regression while it is fixed).
    # F6 (centroids near the rim) is fixed and its entries removed (the
    # predicate _near_rim is kept above for re-skipping a regression).
    # F8, by design: an exception raised by the caller's own __array__ passes
    # through unchanged, as in NumPy (FINDINGS.md)
    # (any function: the argument is converted by NumPy, or by dask)
    ("gyrokit.*", "F8 RuntimeError from __array__ passes through", _raises_in_array),
]
# GYROKIT_FUZZ_NO_SKIP=1 runs every known finding; a comma-separated list of
# finding ids (GYROKIT_FUZZ_NO_SKIP=F2,F6) runs only those.
_NO_SKIP = os.environ.get("GYROKIT_FUZZ_NO_SKIP", "")
SKIP_KNOWN = _NO_SKIP != "1"
UNSKIPPED = {s.strip() for s in _NO_SKIP.split(",") if s.strip() and s.strip() != "1"}
SKIPPED = [0]


def known_issue(name, args, kw) -> bool:
    if not SKIP_KNOWN:
        return False
    for pattern, why, pred in KNOWN:
        if why.split()[0] in UNSKIPPED:
            continue
        if fnmatch.fnmatchcase(name, pattern) and pred(args, kw):
            SKIPPED[0] += 1
            return True
    return False


# ---------------------------------------------------------------------------
# one input


GEN_ERRORS = [0]


def gen_args(dr: Draw, ctx: Ctx, name, module, fn):
    """call_args, or None when drawing the arguments itself failed (a
    harness limitation, counted, never a finding)."""
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return call_args(dr, ctx, name, module, fn)
    except Exception:  # noqa: BLE001
        GEN_ERRORS[0] += 1
        return None


def run_function(dr: Draw, name, fn, module, log):
    ctx = Ctx(dr, module)
    got = gen_args(dr, ctx, name, module, fn)
    if got is None:
        return None
    args, kw = got
    log.append((name, args, kw, None))
    try:
        return check_call(name, fn, args, kw, log)
    finally:
        if module == "plot":  # drawn figures stay open in pyplot until closed
            import matplotlib.pyplot as plt

            plt.close("all")


def run_class(dr: Draw, name, cls, module, log):
    ctx = Ctx(dr, module)
    if ctx.lead == () or len(ctx.lead) > 1:
        ctx.lead = (dr.pick([1, 2, 3, 5, 16, 40]),)
    got = gen_args(dr, ctx, name, module, cls)
    if got is None:
        return
    args, kw = got
    log.append((name, args, kw, None))
    obj = check_call(name, cls, args, kw, log)
    if obj is None:
        return
    methods = [m for m, v in inspect.getmembers(type(obj)) if not m.startswith("_") and callable(v)]
    props = [m for m, v in inspect.getmembers(type(obj)) if not m.startswith("_") and isinstance(v, property)]
    for _ in range(dr.int(1, 3)):
        if hasattr(obj, "fit") and dr.chance(0.6):
            m = "fit"
        elif methods:
            m = dr.pick(methods)
        else:
            break
        meth = getattr(obj, m)
        got = gen_args(dr, ctx, f"{name}.{m}", module, meth)
        if got is None:
            break
        margs, mkw = got
        log.append((f"{name}.{m}", margs, mkw, None))
        check_call(f"{name}.{m}", meth, margs, mkw, log)
    for p in props:
        log.append((f"{name}.{p}", [], {}, None))
        check_call(f"{name}.{p}", lambda: getattr(obj, p), [], {}, log)
    if hasattr(obj, "__getstate__") and hasattr(obj, "__setstate__") and dr.chance(0.3):
        fuzz_state(dr, name, obj, log)


def fuzz_state(dr: Draw, name, obj, log):
    """Round trip through pickle, then a corrupted state into __setstate__."""
    blob = pickle.dumps(obj)
    check_call(f"{name} pickle", pickle.loads, [blob], {}, log)
    state = obj.__getstate__()
    if not (isinstance(state, dict) and "tree" in state):
        return
    parts = list(state["tree"])
    i = dr.int(0, len(parts) - 1)
    v = parts[i]
    if isinstance(v, np.ndarray):
        kind = dr.pick(["values", "shape", "dtype", "empty", "big"])
        with np.errstate(all="ignore"):
            if kind == "values" and v.size:
                v = v.copy()
                flat = v.reshape(-1)
                j = dr.int(0, flat.size - 1)
                flat[j] = dr.pick([-1, 0, 2 ** 40, -2 ** 62, np.nan, np.inf, 1e308, 7]) if v.dtype.kind == "f" \
                    else dr.pick([-1, 0, 2 ** 40, -2 ** 62, 7, flat.size, flat.size + 1])
            elif kind == "shape":
                v = v[: max(0, v.shape[0] - 1)]
            elif kind == "dtype":
                v = v.astype(dr.pick([np.float32, np.int32, np.float64, np.int64]))
            elif kind == "empty":
                v = v[:0]
            else:
                v = np.concatenate([v, v])
    else:
        v = dr.pick([None, -1, 0, 2, 10 ** 9, "poincare", "klein", "x", -1.0, np.nan, 2 ** 64])
    parts[i] = v
    fresh = type(obj).__new__(type(obj))
    log.append((f"{name}.__setstate__", [f"field {i} corrupted: {describe_value(v)}"], {}, None))
    check_call(f"{name}.__setstate__", fresh.__setstate__, [{"tree": tuple(parts)}], {}, log)
    if hasattr(fresh, "_tree"):
        q = getattr(fresh, "query", None)
        if q is not None:
            check_call(f"{name}.query (after state)", q, [], {"k": dr.int(1, 3)}, log)
        qr = getattr(fresh, "query_radius", None)
        if qr is not None:
            check_call(f"{name}.query_radius (after state)", qr, [], {"r": dr.pick([0.5, 2.0, np.inf])}, log)


# ---------------------------------------------------------------------------
# driver

SURVEY = False
FINDINGS_PATH = os.environ.get("GYROKIT_FUZZ_FINDINGS", "findings.jsonl")
COUNT_PATH = os.environ.get("GYROKIT_FUZZ_COUNT")
VERBOSE = False
TRACE = os.environ.get("GYROKIT_FUZZ_TRACE") == "1"
_count = 0
_seen: set = set()


def signature(target: str, msg: str) -> str:
    return target + " | " + re.sub(r"[-+]?\d[\d.e+-]*", "#", msg)[:120]


def record(data: bytes, target: str, msg: str, log) -> None:
    sig = signature(target, msg)
    if sig in _seen:
        return
    _seen.add(sig)
    calls = [describe_call(n, a, k) for n, a, k, _ in log if _ is None][-4:]
    entry = {"signature": sig, "target": target, "message": msg, "calls": calls,
             "input_b64": base64.b64encode(data).decode()}
    with open(FINDINGS_PATH, "a") as f:
        f.write(json.dumps(entry) + "\n")
    print(f"\n=== finding: {msg}\n    in {calls[-1] if calls else target}", file=sys.stderr, flush=True)


FORCED_TARGET = [None]  # --repro of a findings file: the target it names


def TestOneInput(data: bytes) -> None:
    global _count
    _count += 1
    if COUNT_PATH and _count % 1000 == 0:
        with open(COUNT_PATH, "w") as f:
            f.write(f"{_count} {GEN_ERRORS[0]} {SKIPPED[0]}\n")
    dr = Draw(data)
    name, ob, module = TARGETS[dr.int(0, len(TARGETS) - 1)]
    if FORCED_TARGET[0] is not None:
        name, ob, module = next(t for t in TARGETS if t[0] == FORCED_TARGET[0])
    log: list = []
    try:
        if inspect.isclass(ob):
            run_class(dr, name, ob, module, log)
        else:
            run_function(dr, name, ob, module, log)
    except Finding as f:
        if VERBOSE or not SURVEY:
            for n, a, k, err in log:
                print(("  call " if err is None else "    -> ") + (describe_call(n, a, k) if err is None else err),
                      file=sys.stderr)
        if SURVEY:
            record(data, name, str(f), log)
            return
        raise
    if VERBOSE:
        for n, a, k, err in log:
            print(("  call " if err is None else "    -> ") + (describe_call(n, a, k) if err is None else err),
                  file=sys.stderr)


def main(argv):
    global SURVEY, VERBOSE
    if "--survey" in argv:
        argv.remove("--survey")
        SURVEY = True
    if "--repro" in argv:
        i = argv.index("--repro")
        path = argv[i + 1]
        VERBOSE = True
        if path.endswith(".jsonl"):
            for line in open(path):
                e = json.loads(line)
                print(f"--- {e['signature']}", file=sys.stderr)
                FORCED_TARGET[0] = e["target"]
                try:
                    TestOneInput(base64.b64decode(e["input_b64"]))
                except Finding as f:
                    print(f"FINDING: {f}", file=sys.stderr)
        else:
            TestOneInput(open(path, "rb").read())
        return
    if not any(a.startswith("-timeout") for a in argv):
        argv.append("-timeout=60")
    atheris.Setup(argv, TestOneInput)
    atheris.Fuzz()


if __name__ == "__main__":
    main(sys.argv)
