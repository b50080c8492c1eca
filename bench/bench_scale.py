"""Benchmark: the Dask path (acidbase.scale) against one process, on the same shards.

    python bench/bench_scale.py --n 1000000 --shards 8 --repeats 3

Writes ``--n`` synthetic panels (bench/synthetic.py) as CSV, shards them by patient
(``acidbase.scale.shard``, timed), then checks the shards, alternating, in
``--repeats`` rounds:

* one process: each shard read with pyarrow and checked with ``partitions.check_shard``
  (``acidbase batch`` on the shard, serial checks included), one after the other;
* Dask, a local cluster of 2 workers (threads of one process, then 2 processes):
  ``read_parquet(folder).map_partitions(check_partition, meta=...).compute()``,
  cluster start-up included and reported apart.

Prints medians and the ratio to one process.  A benchmark, not a test.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

import pyarrow.parquet as pq
import synthetic

from acidbase import partitions, scale


def one_process(folder: str) -> float:
    t0 = time.perf_counter()
    for f in sorted(os.listdir(folder)):
        partitions.check_shard(pq.read_table(os.path.join(folder, f)))
    return time.perf_counter() - t0


def with_dask(folder: str, processes: bool) -> tuple[float, float]:
    import dask.dataframe as dd
    from dask.distributed import Client, LocalCluster

    t0 = time.perf_counter()
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=processes,
                      dashboard_address=None) as cluster, Client(cluster):
        t1 = time.perf_counter()
        ddf = dd.read_parquet(folder)
        meta = partitions.output_meta(folder)
        ddf.map_partitions(partitions.check_partition, meta=meta).compute()
        t2 = time.perf_counter()
    return t2 - t1, t1 - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--shards", type=int, default=8)
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args()
    import logging

    logging.getLogger("distributed").setLevel(logging.ERROR)
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "panels.csv")
        synthetic.write_csv(src, a.n)
        t0 = time.perf_counter()
        scale.shard(src, os.path.join(tmp, "shards"), a.shards)
        t_shard = time.perf_counter() - t0
        folder = os.path.join(tmp, "shards")
        runs: dict[str, list[float]] = {"one": [], "threads": [], "processes": []}
        start: dict[str, list[float]] = {"threads": [], "processes": []}
        for _ in range(a.repeats):
            runs["one"].append(one_process(folder))
            for key, procs in (("threads", False), ("processes", True)):
                work, up = with_dask(folder, procs)
                runs[key].append(work)
                start[key].append(up)
        med = {k: statistics.median(v) for k, v in runs.items()}
        print(f"{a.n:,} rows, {a.shards} shards; sharding {t_shard:.2f} s; load average "
              f"{os.getloadavg()[0]:.1f}")
        print(f"  one process          {med['one']:.2f} s  {a.n / med['one']:,.0f} rows/s")
        for k in ("threads", "processes"):
            print(f"  dask, 2 workers ({k:9}) {med[k]:.2f} s  {a.n / med[k]:,.0f} rows/s  "
                  f"{med[k] / med['one']:.2f}x one process's time; cluster start "
                  f"{statistics.median(start[k]):.2f} s")


if __name__ == "__main__":
    main()
