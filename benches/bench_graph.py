"""Benchmark of ``gyrokit.embed.graph`` on the WordNet 3.0 noun hierarchy.

Data: ``data.noun`` of the WordNet 3.0 database, installed by the Debian
package ``wordnet-base`` (``sudo apt-get install wordnet-base``); the loader is
``benches/wordnet.py``. The positives are the transitive closure of the noun
hypernym and instance-hypernym relations (82 115 nouns, 743 241 pairs).

Reported: graph reconstruction (Nickel & Kiela 2017, section 4.1), exactly
over all n (n - 1) pairs (``gk.metrics.reconstruction`` when the package has
it, else :func:`reconstruction` below, undirected only), in two protocols:
undirected (mean average precision over the nodes with neighbours, mean rank
over the edges in both directions: an inner node must also rank all its
descendants ahead of every other node) and ``directed`` (``directed=True``:
each ``(noun, ancestor)`` row ranked among the noun's non-ancestors, the
protocol of the published figures); wall time; positives per second per core; and
the time per epoch with 1 and 2 threads (each in a fresh process, since rayon
fixes its pool size at start-up).

    python benches/bench_graph.py                   # the full run (Poincaré and hyperboloid)
    python benches/bench_graph.py --subset mammal   # the mammal subtree, for tuning
    python benches/bench_graph.py --scaling         # time per epoch, 1 vs 2 threads
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 20 --burn-in 2 \
        --degree-epochs 2 --radial-search            # the radial line search (README figures)
    python benches/bench_graph.py --models poincare --epochs 60 --burn-in 2 --lr 0.6 \
        --batch-size 1024 --node-steps mean          # the best setting found on subsets
    python benches/bench_graph.py --models poincare --directed --negatives 10 --epochs 100 --burn-in 10
                                                     # training on the directed rows (README figures)
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 20 --burn-in 2 \
        --degree-epochs 2 --radial-search --then-directed 40
                                                     # undirected, then directed rows (README figures)
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 40 --burn-in 2 \
        --degree-epochs 2 --radial-search --then-directed 40 --then-negatives 50 --then-rounds 4 \
        --then-hard-repeat 4                         # the same with the worst-ranked rows repeated
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 40 --burn-in 2 \
        --degree-epochs 2 --radial-search --then-directed 40 --then-negatives 50 --then-hard-negatives 10
                                                     # negatives that outrank the positive (README figures)
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 40 --burn-in 2 \
        --degree-epochs 2 --radial-search --then-directed 40 --then-negatives 50 --then-hard-negatives 10 \
        --then-schedule linear                       # the same, second stage's rate decaying
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 40 --burn-in 2 \
        --degree-epochs 2 --radial-search --then-directed 40 --then-negatives 50 --then-hard-negatives 10 \
        --then-schedule linear --init tree           # the same from a spanning tree's embedding
    python benches/bench_graph.py --models poincare --negatives 10 --epochs 10 --burn-in 0 --degree-epochs 0 \
        --radial-search --then-directed 36 --then-negatives 40 --then-hard-negatives 10 --then-schedule linear \
        --init hierarchy --init-scale 0.75           # gk.embed.hierarchy's start, shorter stages (best; README)

Each run prints one JSON line: the settings, wall and CPU seconds of the
training, positives per second per core (wall) and per CPU second, the final
loss, mean average precision and mean rank. Measured figures are in the
README (section Benchmarks).

Published reference (Nickel & Kiela 2017, Table 1, WordNet nouns
reconstruction, Poincaré, d = 10, from memory): MAP about 0.85, mean rank
about 4.0.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from typing import Dict, List, Tuple

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import wordnet  # noqa: E402

import gyrokit as gk  # noqa: E402


def neighbour_lists(n: int, edges: np.ndarray) -> Tuple[np.ndarray, np.ndarray]:
    """CSR of the undirected neighbour sets (deduplicated)."""
    a = np.concatenate([edges, edges[:, ::-1]])
    a = np.unique(a, axis=0)
    a = a[a[:, 0] != a[:, 1]]
    off = np.zeros(n + 1, dtype=np.int64)
    np.add.at(off, a[:, 0] + 1, 1)
    return np.cumsum(off), a[:, 1].copy()


def reconstruction(x: np.ndarray, edges: np.ndarray, model: str, curvature: float = -1.0,
                   block: int = 256) -> Dict[str, float]:
    """Exact graph reconstruction metrics over all pairs, in blocks of rows.

    For a node u with neighbours N(u): the average precision of N(u) when all
    v != u are ranked by distance (precision at the rank of each neighbour v,
    counting every w != u with d(u, w) <= d(u, v)), and for each neighbour the
    rank 1 + #{w not in N(u), w != u : d(u, w) < d(u, v)}. Only candidates no
    farther than u's farthest neighbour matter, so each row keeps those
    before sorting.
    """
    n = x.shape[0]
    off, nb = neighbour_lists(n, edges)
    ap_sum, ap_count, rank_sum, rank_count = 0.0, 0, 0.0, 0
    for s in range(0, n, block):
        e = min(n, s + block)
        D = gk.distance_matrix(x[s:e], x, model=model, curvature=curvature)
        D[np.arange(e - s), np.arange(s, e)] = np.inf  # u itself is not ranked
        for i in range(e - s):
            u = s + i
            nbr = nb[off[u]:off[u + 1]]
            if nbr.size == 0:
                continue
            row = D[i]
            dn = np.sort(row[nbr])
            cand = np.sort(row[row <= dn[-1]])
            # all w != u with d <= d_v, and the neighbours among them
            le_all = np.searchsorted(cand, dn, side="right")
            le_nb = np.searchsorted(dn, dn, side="right")
            ap_sum += float(np.mean(le_nb / le_all))
            ap_count += 1
            lt_all = np.searchsorted(cand, dn, side="left")
            lt_nb = np.searchsorted(dn, dn, side="left")
            rank_sum += float(np.sum(1 + lt_all - lt_nb))
            rank_count += nbr.size
    return {"mean_average_precision": ap_sum / ap_count, "mean_rank": rank_sum / rank_count}


def evaluate(emb, edges: np.ndarray) -> Dict[str, float]:
    metrics = getattr(gk, "metrics", None)
    if metrics is not None and hasattr(metrics, "reconstruction"):
        r = metrics.reconstruction(emb.points, edges, model=emb.model, curvature=emb.curvature)
        # the published protocol: each (noun, ancestor) row ranked among the
        # nodes that are not the noun's ancestors (directed=True)
        rd = metrics.reconstruction(emb.points, edges, model=emb.model, curvature=emb.curvature, directed=True)
        return {"mean_average_precision": float(r.mean_average_precision), "mean_rank": float(r.mean_rank),
                "directed_mean_average_precision": float(rd.mean_average_precision),
                "directed_mean_rank": float(rd.mean_rank),
                "evaluator": "gk.metrics.reconstruction"}
    out = reconstruction(emb.points, edges, emb.model, emb.curvature)
    out["evaluator"] = "bench_graph.reconstruction"
    return out


def load(subset: str) -> Tuple[List[str], np.ndarray]:
    names, pairs = wordnet.noun_closure()
    if subset == "all":
        return names, pairs
    # the closure below one synset (its hyponyms, and itself as their ancestor)
    root = next(i for i, nm in enumerate(names) if nm.startswith(subset + "."))
    keep = np.zeros(len(names), bool)
    keep[root] = True
    keep[pairs[pairs[:, 1] == root, 0]] = True
    sub = pairs[keep[pairs[:, 0]] & keep[pairs[:, 1]]]
    ids = np.flatnonzero(keep)
    remap = -np.ones(len(names), np.int64)
    remap[ids] = np.arange(ids.size)
    return [names[i] for i in ids], remap[sub]


def spanning_parents(n: int, pairs: np.ndarray) -> np.ndarray:
    """A spanning tree of a hierarchy given by its closure (``(descendant,
    ancestor)`` rows): each node's parent is its ancestor with the most
    ancestors (lowest index on ties), which is always a direct parent (an
    ancestor of a direct parent has fewer ancestors than it); -1 for a node
    without ancestors. More than one such root gets a virtual root
    (index ``n``, returned as the last entry) as their common parent."""
    nanc = np.bincount(pairs[:, 0], minlength=n)
    # rows sorted by descendant, then by the ancestor's ancestor count
    # (descending), then by the ancestor's index: the first row of each
    # descendant is its parent
    o = np.lexsort((pairs[:, 1], -nanc[pairs[:, 1]], pairs[:, 0]))
    rows = pairs[o]
    first = np.ones(len(rows), bool)
    first[1:] = rows[1:, 0] != rows[:-1, 0]
    parent = -np.ones(n, np.int64)
    parent[rows[first, 0]] = rows[first, 1]
    if (parent < 0).sum() > 1:
        parent = np.append(np.where(parent < 0, n, parent), -1)
    return parent


def tree_init(args, model: str, n: int, pairs: np.ndarray) -> np.ndarray:
    """Starting points from the combinatorial embedding (``gk.embed.tree``)
    of the hierarchy's spanning tree (:func:`spanning_parents`): every node
    starts beyond its parent, in its parent's direction. (``--init
    hierarchy`` places the nodes of several parents between them:
    ``gk.embed.hierarchy``; an earlier variant of it in this script,
    ``--init dag``, is in the history at commit 37b4fea.)"""
    parent = spanning_parents(n, pairs)
    e = gk.embed.tree(parent, args.dim, scale=args.init_scale, model="poincare", curvature=args.curvature)
    x = e.points[:n]
    return x if model == "poincare" else gk.convert(x, "poincare", model, curvature=args.curvature)


def run(args, model: str, names, pairs) -> Dict[str, float]:
    t = time.perf_counter()
    c = time.process_time()
    if args.init == "hierarchy":
        init = gk.embed.hierarchy(pairs, args.dim, scale=args.init_scale, model=model, curvature=args.curvature,
                                  n_nodes=len(names))
    elif args.init == "tree":
        init = tree_init(args, model, len(names), pairs)
    else:
        init = None
    emb = gk.embed.graph(
        pairs, args.dim, model=model, negatives=args.negatives, epochs=args.epochs,
        learning_rate=args.lr, burn_in=args.burn_in, batch_size=args.batch_size, seed=args.seed,
        n_nodes=len(names), progress=args.progress, node_steps=args.node_steps, schedule=args.schedule,
        burn_in_factor=args.burn_in_factor, curvature=args.curvature,
        degree_epochs=args.degree_epochs, degree_power=args.degree_power, radial_search=args.radial_search,
        directed=args.directed, init=init,
    )
    positives = (1 if args.directed else 2) * len(pairs) * emb.epochs
    stage1 = None
    if args.then_directed:
        # a second stage from the first one's points: directed rows, no burn-in
        t1, c1 = time.perf_counter() - t, time.process_time() - c
        stage1 = {"train_s": t1, "epochs": emb.epochs, "final_loss": float(emb.loss[-1]), **evaluate(emb, pairs)}
        first = emb
        # the evaluation of the first stage is not training time
        t, c = time.perf_counter() - t1, time.process_time() - c1
        emb, extra = second_stage(args, model, names, pairs, first)
        positives += len(pairs) * args.then_directed + extra
    train = time.perf_counter() - t
    cpu = time.process_time() - c
    t = time.perf_counter()
    m = evaluate(emb, pairs)
    ev = time.perf_counter() - t
    threads = int(os.environ.get("RAYON_NUM_THREADS", os.cpu_count() or 1))
    out = {
        "model": model, "dim": args.dim, "epochs": emb.epochs, "negatives": args.negatives, "lr": args.lr,
        "burn_in": args.burn_in, "batch_size": args.batch_size, "node_steps": args.node_steps,
        "schedule": args.schedule, "curvature": args.curvature, "degree_epochs": args.degree_epochs,
        "degree_power": args.degree_power, "radial_search": args.radial_search, "directed_training": args.directed,
        "init": args.init,
        "train_s": train, "train_cpu_s": cpu, "eval_s": ev,
        "positives_per_s_per_core": positives / train / threads, "positives_per_cpu_s": positives / cpu,
        "threads": threads,
        "final_loss": float(emb.loss[-1]) if len(emb.loss) else float("nan"), **m,
    }
    if stage1 is not None:
        out.update(then_directed=args.then_directed, then_negatives=args.then_negatives or args.negatives,
                   then_lr=args.then_lr or args.lr, then_schedule=args.then_schedule,
                   then_radial_search=args.then_radial_search, then_rounds=args.then_rounds,
                   then_hard_rank=args.then_hard_rank, then_hard_repeat=args.then_hard_repeat,
                   then_hard_negatives=args.then_hard_negatives, then_hard_pool=args.then_hard_pool,
                   then_hard_every=args.then_hard_every, first_stage=stage1)
    print(json.dumps(out), flush=True)
    return out


def hard_rows(x: np.ndarray, pairs: np.ndarray, model: str, curvature: float, threshold: float) -> np.ndarray:
    """The ``(noun, ancestor)`` rows whose directed rank (``gk.metrics.reconstruction``'s
    ``ranks``) is above ``threshold``."""
    r = gk.metrics.reconstruction(x, pairs, model=model, curvature=curvature, directed=True)
    return r.arcs[r.ranks > threshold]


def second_stage(args, model: str, names, pairs: np.ndarray, first):
    """The directed second stage from ``first``'s points: ``--then-rounds``
    calls of ``--then-directed / --then-rounds`` epochs each, seeds
    ``seed + 1, seed + 2, ...``; with ``--then-hard-repeat K``, before each
    call the rows ranked worse than ``--then-hard-rank`` are found
    (``reconstruction``'s per-arc ranks, counted in the training time) and
    given ``K`` more times in that call's rows, so that they are drawn ``K +
    1`` times per epoch. Returns the embedding and the extra positives."""
    rounds = max(1, args.then_rounds)
    if args.then_directed % rounds:
        raise SystemExit("--then-directed must be a multiple of --then-rounds")
    emb, extra = first, 0
    for k in range(rounds):
        rows = pairs
        if args.then_hard_repeat:
            hard = hard_rows(emb.points, pairs, model, args.curvature, args.then_hard_rank)
            rows = np.concatenate([pairs] + [hard] * args.then_hard_repeat)
            extra += len(hard) * args.then_hard_repeat * (args.then_directed // rounds)
        emb = gk.embed.graph(
            rows, args.dim, model=model, negatives=args.then_negatives or args.negatives,
            epochs=args.then_directed // rounds, learning_rate=args.then_lr or args.lr, burn_in=0,
            batch_size=args.batch_size, seed=args.seed + 1 + k, n_nodes=len(names), progress=args.progress,
            node_steps=args.node_steps, schedule=args.then_schedule, curvature=args.curvature,
            radial_search=args.then_radial_search, directed=True, init=emb,
            hard_negatives=args.then_hard_negatives, hard_pool=args.then_hard_pool, hard_every=args.then_hard_every,
        )
    return emb, extra


def scaling(args, model: str) -> None:
    """Time per epoch with 1 and 2 threads, each in its own process."""
    code = (
        "import sys, time, numpy as np; sys.path.insert(0, %r); import bench_graph as b, gyrokit as gk\n"
        "names, pairs = b.load(%r)\n"
        "t = time.perf_counter()\n"
        "gk.embed.graph(pairs, %d, model=%r, negatives=%d, epochs=%d, burn_in=0, batch_size=%d, node_steps=%r,\n"
        "               n_nodes=len(names), progress=False)\n"
        "print((time.perf_counter() - t) / %d)\n"
    ) % (os.path.dirname(os.path.abspath(__file__)), args.subset, args.dim, model, args.negatives,
         args.scaling_epochs, args.batch_size, args.node_steps, args.scaling_epochs)
    res = {}
    for th in (1, 2):
        env = dict(os.environ, RAYON_NUM_THREADS=str(th))
        out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
        res[th] = float(out.stdout.strip().splitlines()[-1])
    print(json.dumps({"model": model, "batch_size": args.batch_size, "node_steps": args.node_steps,
                      "seconds_per_epoch_1_thread": res[1], "seconds_per_epoch_2_threads": res[2],
                      "speedup": res[1] / res[2]}), flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--subset", default="all", help="'all' or a synset's first word, e.g. mammal")
    ap.add_argument("--models", default="poincare,hyperboloid")
    ap.add_argument("--dim", type=int, default=10)
    ap.add_argument("--negatives", type=int, default=10)
    ap.add_argument("--epochs", type=int, default=100)
    ap.add_argument("--lr", type=float, default=0.3)
    ap.add_argument("--burn-in", type=int, default=10)
    ap.add_argument("--batch-size", type=int, default=256)
    ap.add_argument("--burn-in-factor", type=float, default=0.1)
    ap.add_argument("--node-steps", default="sum", choices=("sum", "mean"))
    ap.add_argument("--schedule", default="constant", choices=("constant", "linear"))
    ap.add_argument("--degree-epochs", type=int, default=None,
                    help="epochs of degree-weighted negatives (default: the burn-in epochs)")
    ap.add_argument("--degree-power", type=float, default=0.75)
    ap.add_argument("--radial-search", action="store_true",
                    help="a line search on the loss over a common scaling of the radii after every epoch")
    ap.add_argument("--directed", action="store_true",
                    help="train on each (noun, ancestor) row one way (embed.graph's directed=True)")
    ap.add_argument("--then-directed", type=int, default=0, metavar="EPOCHS",
                    help="a second stage of EPOCHS epochs on the directed rows (burn-in 0, seed + 1), "
                         "started from the first stage's points (embed.graph's init=)")
    ap.add_argument("--then-negatives", type=int, default=None, help="negatives of the second stage (default: --negatives)")
    ap.add_argument("--then-lr", type=float, default=None, help="rate of the second stage (default: --lr)")
    ap.add_argument("--then-schedule", default="constant", choices=("constant", "linear"))
    ap.add_argument("--then-radial-search", action="store_true")
    ap.add_argument("--then-rounds", type=int, default=1,
                    help="split the second stage into this many calls (each from the last one's points)")
    ap.add_argument("--then-hard-repeat", type=int, default=0, metavar="K",
                    help="before each call of the second stage, repeat K times the rows ranked worse than "
                         "--then-hard-rank (0: off)")
    ap.add_argument("--then-hard-rank", type=float, default=30.0)
    ap.add_argument("--then-hard-negatives", type=int, default=0,
                    help="embed.graph's hard_negatives in the second stage (negatives that outrank the positive)")
    ap.add_argument("--then-hard-pool", type=int, default=128)
    ap.add_argument("--then-hard-every", type=int, default=5)
    ap.add_argument("--init", default="random", choices=("random", "tree", "hierarchy"),
                    help="starting points: gk.embed.graph's own, the combinatorial embedding of a spanning tree "
                         "(see tree_init), or gk.embed.hierarchy's (the nodes of several parents between them)")
    ap.add_argument("--init-scale", type=float, default=None,
                    help="edge length of --init tree / hierarchy (default: gk.embed.tree's)")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--curvature", type=float, default=-1.0)
    ap.add_argument("--progress", action="store_true", default=None)
    ap.add_argument("--scaling", action="store_true")
    ap.add_argument("--scaling-epochs", type=int, default=2)
    args = ap.parse_args()
    names, pairs = load(args.subset)
    print(json.dumps({"subset": args.subset, "nodes": len(names), "closure_pairs": int(len(pairs))}), flush=True)
    if args.scaling:
        for model in args.models.split(","):
            scaling(args, model)
        return
    for model in args.models.split(","):
        run(args, model, names, pairs)


if __name__ == "__main__":
    main()
