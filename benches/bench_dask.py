"""gk.dask benchmark: out-of-core Fréchet mean and neighbours on a local cluster.

Prints ratios against baselines timed in the same run:

1. ``gk.dask.frechet_mean`` on N x 16 points stored on disk (a ``.npy``
   file read through ``np.memmap`` by the workers, block by block; default
   N = 20 000 000, 2.56 GB, more than one worker's memory limit), on a
   ``distributed.LocalCluster`` of 2 worker processes of at most 2 GiB each,
   against in-memory ``gk.frechet_mean`` on the first N/10 points (time per
   point). Also: the peak resident memory of each worker process (sampled
   every 0.2 s) and the largest difference between the two means' iterates
   is not comparable (different data); instead the dask mean of the first
   N/10 points is compared with the in-memory one.
2. ``gk.dask.KMeans`` (10 clusters, the first 10 points as ``init``) on
   the first N/10 points on disk against in-memory ``gk.KMeans`` with the
   same parameters on the same points (same clusters; time ratio).
3. ``gk.dask.knn`` (k = 10) on M = 2 000 000 points at d = 2 against
   ``gk.NeighborIndex(x).query(k=10)`` on the same points in memory.
4. What these per-point costs predict for 1 000 000 000 points on 100
   workers (the README's scale-out section quotes the figures).

Data: hyperbolic radii uniform in [0, 3] about the origin of the Poincaré
ball, random directions, K = -1 (invented, seeded).

Usage: ``python benches/bench_dask.py [--n 20000000] [--m 2000000] [--chunk 500000] [--dir DIR]``.
The data file is written to ``--dir`` (default: a temporary directory,
removed at the end).
"""

from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import threading
import time

import numpy as np

import gyrokit as gk


def write_points(path: str, n: int, d: int, seed: int, block: int = 1_000_000) -> None:
    """n points of the Poincaré ball into a .npy file, written block by block."""
    out = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(n, d))
    rng = np.random.default_rng(seed)
    for s in range(0, n, block):
        e = min(n, s + block)
        v = rng.standard_normal((e - s, d))
        v /= np.linalg.norm(v, axis=1)[:, None]
        v *= np.tanh(rng.uniform(0, 3, e - s) / 2)[:, None]
        out[s:e] = v
    out.flush()
    del out


def load_rows(path: str, start: int, stop: int) -> np.ndarray:
    """Rows start..stop of the file (runs on a worker: only this block is
    read, through the page cache, without a copy)."""
    return np.asarray(np.load(path, mmap_mode="r")[start:stop])


def on_disk(path: str, n: int, d: int, chunk: int):
    import dask
    import dask.array as da

    load = dask.delayed(load_rows, pure=True)
    blocks = [
        da.from_delayed(load(path, s, min(n, s + chunk)), (min(n, s + chunk) - s, d), dtype=np.float64)
        for s in range(0, n, chunk)
    ]
    return da.concatenate(blocks, axis=0)


class PeakMemory:
    """Largest resident set size of each worker process, sampled in a thread."""

    def __init__(self, client) -> None:
        self.client = client
        self.peak: dict = {}
        self._stop = threading.Event()
        self._t = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        import psutil  # distributed depends on it

        def rss() -> int:
            return psutil.Process().memory_info().rss

        while not self._stop.is_set():
            try:
                for w, v in self.client.run(rss).items():
                    self.peak[w] = max(self.peak.get(w, 0), v)
            except Exception:
                pass
            time.sleep(0.2)

    def __enter__(self) -> "PeakMemory":
        self._t.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        self._t.join()


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=20_000_000)
    ap.add_argument("--m", type=int, default=2_000_000)
    ap.add_argument("--d", type=int, default=16)
    ap.add_argument("--chunk", type=int, default=500_000)
    ap.add_argument("--dir", default=None)
    a = ap.parse_args()

    import dask
    import distributed

    tmp = a.dir or tempfile.mkdtemp(prefix="gyrokit-bench-")
    path = os.path.join(tmp, "points.npy")
    try:
        t = time.perf_counter()
        write_points(path, a.n, a.d, seed=1)
        print(f"wrote {a.n} x {a.d} points ({os.path.getsize(path) / 1e9:.2f} GB) in {time.perf_counter() - t:.1f} s")

        n_mem = a.n // 10
        x_mem = np.array(load_rows(path, 0, n_mem))
        t = time.perf_counter()
        ref = gk.frechet_mean(x_mem)
        t_mem = time.perf_counter() - t
        print(f"in memory: gk.frechet_mean {n_mem} x {a.d}: {t_mem:.3f} s, {t_mem / n_mem * 1e9:.1f} ns/point "
              f"({ref.iterations} Newton steps)")

        cluster = distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, memory_limit="2GiB", dashboard_address=None
        )
        client = distributed.Client(cluster)
        try:
            small = gk.dask.frechet_mean(on_disk(path, n_mem, a.d, a.chunk))
            err = float(gk.distance_matrix(small.mean[None], ref.mean[None])[0, 0])
            print(f"dask mean of the same {n_mem} points vs in memory: distance {err:.2e}")
            x = on_disk(path, a.n, a.d, a.chunk)
            with PeakMemory(client) as pm:
                t = time.perf_counter()
                r = gk.dask.frechet_mean(x)
                t_dask = time.perf_counter() - t
            per = t_dask / a.n
            print(f"gk.dask.frechet_mean {a.n} x {a.d} from disk, 2 workers x 2 GiB: {t_dask:.2f} s, "
                  f"{per * 1e9:.1f} ns/point ({r.iterations} Newton steps)")
            print(f"  ratio per point, dask / in memory: {per / (t_mem / n_mem):.2f}  (target <= 2)")
            for w, v in sorted(pm.peak.items()):
                print(f"  peak RSS of worker {w}: {v / 2**20:.0f} MiB")

            # KMeans, the first N/10 points, same parameters and init
            init = x_mem[:10]
            t = time.perf_counter()
            km = gk.KMeans(10, init=init, max_iter=20).fit(x_mem)
            t_km = time.perf_counter() - t
            t = time.perf_counter()
            dkm = gk.dask.KMeans(10, init=init, max_iter=20).fit(on_disk(path, n_mem, a.d, a.chunk))
            t_dkm = time.perf_counter() - t
            same = bool(np.array_equal(dkm.labels_.compute(), km.labels_))
            print(f"KMeans 10 clusters, {n_mem} x {a.d}, {km.n_iter_} Lloyd updates: gk.KMeans {t_km:.2f} s, "
                  f"gk.dask.KMeans from disk {t_dkm:.2f} s ({dkm.n_iter_} updates), ratio {t_dkm / t_km:.2f}; "
                  f"same labels: {same}")

            # knn, d = 2
            rng = np.random.default_rng(2)
            v = rng.standard_normal((a.m, 2))
            v /= np.linalg.norm(v, axis=1)[:, None]
            y = v * np.tanh(rng.uniform(0, 3, a.m) / 2)[:, None]
            t = time.perf_counter()
            ii, dd = gk.NeighborIndex(y).query(k=10)
            t_idx = time.perf_counter() - t
            import dask.array as da

            dy = da.from_array(y, chunks=(a.m // 8, -1))
            t = time.perf_counter()
            gi, gd = dask.compute(*gk.dask.knn(dy, 10))
            t_knn = time.perf_counter() - t
            same = bool(np.array_equal(gi, ii) and np.array_equal(gd, dd))
            print(f"knn k=10, {a.m} x 2: NeighborIndex {t_idx:.2f} s, gk.dask.knn (8 blocks, 2 workers) "
                  f"{t_knn:.2f} s, ratio {t_knn / t_idx:.2f}; identical: {same}")

            # What the measured costs predict for 1e9 points on 100 workers
            # (worker-seconds per point from the 2-worker runs; tasks,
            # transfers and stragglers not included).
            big, workers = 1_000_000_000, 100
            mean_s = t_dask * 2 / a.n * big / workers
            km_s = t_dkm * 2 / n_mem / max(1, dkm.n_iter_) * big / workers
            blocks = -(-big * 2 * 8 // (256 * 2**20))  # index blocks of 256 MiB at d = 2
            knn_s = t_knn * 2 / a.m * blocks * big / workers
            print(f"prediction for {big:.0e} points, {workers} workers: frechet_mean ({a.d} coordinates) "
                  f"{mean_s:.0f} s; KMeans ({a.d} coordinates, 10 clusters) {km_s:.0f} s per Lloyd update; "
                  f"knn k=10 at d = 2 ({blocks} index blocks, every query block against each) "
                  f"{knn_s / 3600:.1f} h (an upper estimate: tree queries grow with log n)")
        finally:
            client.close()
            cluster.close()
    finally:
        if a.dir is None:
            shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
