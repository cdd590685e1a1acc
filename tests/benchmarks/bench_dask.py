"""Scale evidence for vicino.dask: k nearest on a 2-worker LocalCluster with a memory limit per worker.

    python tests/benchmarks/bench_dask.py                      # n = 10^7, k = 8, 1.0 GB per worker
    python tests/benchmarks/bench_dask.py --n 1000000 --memory-limit 0.3

The points are generated on the workers (uniform in the unit square, one
seeded stream per input partition), so the client never holds them. The
links are written to Parquet in a temporary folder. Printed: wall time of
each phase, peak resident memory of each worker process (sampled every
0.2 s), the bytes the workers sent each other (the shuffle and the halos),
halo units, and the memory the in-memory route needs for the same n (24
bytes per link for the CSR result and its distances, plus the points,
their Z-order copy and the k-d tree; measured in a fresh process with
--in-memory). Never fails.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import threading
import time

import numpy as np
import pandas as pd


def make_points(i: int, rows: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng([seed, i])
    return pd.DataFrame({"x": rng.random(rows), "y": rng.random(rows)}, index=pd.RangeIndex(i * rows, (i + 1) * rows))


def in_memory_peak(n: int, k: int) -> tuple[float, float]:
    """Seconds and peak MB of vicino.k_nearest on the same n points, in a fresh process."""
    code = (
        "import numpy as np, resource, time, vicino, warnings;"
        f"xy = np.random.default_rng(0).random(({n}, 2)); t = time.perf_counter();"
        f"w = vicino.k_nearest(xy, {k}); print(time.perf_counter() - t,"
        " resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False)
    if out.returncode:
        return float("nan"), float("nan")
    t, mb = out.stdout.split()
    return float(t), float(mb)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--n", type=int, default=10_000_000)
    parser.add_argument("--k", type=int, default=8)
    parser.add_argument("--memory-limit", type=float, default=1.0, help="GB per worker")
    parser.add_argument("--partitions", type=int, default=0, help="spatial partitions (default: n / 250,000)")
    parser.add_argument("--in-memory", action="store_true", help="also measure the in-memory route")
    args = parser.parse_args()

    import dask
    import dask.dataframe as dd
    from distributed import Client, LocalCluster

    import vicino.dask as vd

    n, k = args.n, args.k
    parts = args.partitions or max(2, n // 250_000)
    rows = n // parts
    n = rows * parts
    limit = int(args.memory_limit * 1e9)
    # the in-memory route: the result alone is n k links x (8 B index + 8 B weight + 8 B distance)
    result_bytes = n * k * 24
    print(f"n = {n:,}, k = {k}, {parts} partitions of {rows:,} units, {args.memory_limit} GB per worker")
    gb = result_bytes / 1e9
    print(f"in-memory result alone: {n:,} x {k} x 24 B = {gb:.2f} GB (limit {args.memory_limit} GB per worker)")
    if args.in_memory:
        t, mb = in_memory_peak(n, k)
        print(f"in-memory k_nearest: {t:.1f} s, peak {mb / 1024:.2f} GB in one process")

    cluster = LocalCluster(
        n_workers=2, processes=True, threads_per_worker=1, memory_limit=limit, dashboard_address=None, silence_logs=50
    )
    client = Client(cluster)
    peaks: dict[str, float] = {}
    stop = threading.Event()

    def rss() -> float:
        import psutil

        return psutil.Process().memory_info().rss

    def sample() -> None:
        while not stop.is_set():
            try:
                for w, b in client.run(rss).items():
                    peaks[w] = max(peaks.get(w, 0.0), b)
            except Exception:  # a worker restarting: sample again
                pass
            time.sleep(0.2)

    def sent() -> float:
        def outgoing(dask_worker) -> float:  # type: ignore[no-untyped-def]
            return float(getattr(dask_worker, "transfer_outgoing_bytes_total", 0))

        return sum(client.run(outgoing).values())

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    meta = make_points(0, 0, 0)
    ddf = dd.from_delayed([dask.delayed(make_points)(i, rows, 1) for i in range(parts)], meta=meta, verify_meta=False)
    t0 = time.perf_counter()
    table = vd.k_nearest(ddf, k, npartitions=parts, check_ids=False)
    t1 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        table.to_parquet(os.path.join(tmp, "links"))
        t2 = time.perf_counter()
        size = sum(os.path.getsize(os.path.join(d, f)) for d, _, fs in os.walk(tmp) for f in fs)
    halo = sum(table.halo_sizes())
    moved = sent()
    stop.set()
    sampler.join()
    print(f"partition, local search and rounds: {t1 - t0:.1f} s; links written to Parquet: {t2 - t1:.1f} s")
    print(f"total {t2 - t0:.1f} s; Parquet {size / 1e9:.2f} GB")
    for w, b in sorted(peaks.items()):
        print(f"peak worker memory {w}: {b / 1e9:.2f} GB (limit {args.memory_limit} GB)")
    print(f"halo units {halo:,} ({halo / n:.1%} of n, summed over rounds)")
    print(f"bytes sent between workers: {moved / 1e9:.2f} GB ({moved / n:.0f} B per unit)")
    print(f"client peak memory: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2:.2f} GB")
    client.close()
    cluster.close()


if __name__ == "__main__":
    main()
