"""Benchmark: the CPU an `acidbase batch` run needs, against the plain script's time.

    python bench/bench_budget.py                 # 1M rows, 5 rounds
    python bench/bench_budget.py --n 200000 --rounds 3

The targets of issue 14 are ratios of wall time against a plain row-by-row script
(bench_batch.plain_script).  A run on C cores cannot take less wall time than its CPU
time divided by C, so ``plain seconds / (CPU seconds / C)`` is the highest ratio the
run could reach, however its work were spread over the cores (threads or processes).
This benchmark measures, in rounds that alternate the three (so they see the same
load): the plain script's wall time, and for `acidbase batch` with serial checks and
without, each run's wall time and CPU time (user + system of the child process, start-up
included: ``resource.getrusage(RUSAGE_CHILDREN)``).  It prints the medians, the ratio
reached, the ceiling on this machine's cores, and the cores kept busy (CPU / wall).

Data: bench/synthetic.py's seeded panels (invented, benchmark only).  A benchmark, not
a test: nothing here fails on a slow machine.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import bench_batch  # noqa: E402
import synthetic  # noqa: E402


def batch_run(path: str, out: str, extra: list[str]) -> tuple[float, float]:
    """One `acidbase batch` in a child (bench/_child.py, the command's process
    settings): its wall seconds and its CPU seconds."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    bench_batch.child([path, "-o", out, "--quiet", "--summary", out + ".summary", *extra])
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return wall, cpu


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--n", type=int, default=1_000_000)
    p.add_argument("--rounds", type=int, default=5)
    p.add_argument("--json", help="also write the figures to this file")
    a = p.parse_args()
    cores = os.cpu_count() or 1
    bench_batch.compile_tree()
    with tempfile.TemporaryDirectory(prefix="acidbase-bench-budget-") as tmp:
        src = os.path.join(tmp, "panels.csv")
        synthetic.write_csv(src, a.n)
        out = os.path.join(tmp, "out.csv")
        runs: dict[str, list] = {"plain": [], "no_serial": [], "serial": []}
        for r in range(a.rounds):
            runs["plain"].append(bench_batch.plain_script(src, os.path.join(tmp, "plain.csv"),
                                                          a.n)["seconds"])
            runs["no_serial"].append(batch_run(src, out, ["--no-serial"]))
            runs["serial"].append(batch_run(src, out, []))
            print(f"round {r + 1}: plain {runs['plain'][-1]:.2f} s; --no-serial "
                  "%.2f s wall, %.2f s CPU; serial %.2f s wall, %.2f s CPU"
                  % (*runs["no_serial"][-1], *runs["serial"][-1]), flush=True)
    plain = statistics.median(runs["plain"])
    figures: dict[str, object] = {"n": a.n, "rounds": a.rounds, "cores": cores,
                                  "plain_seconds": plain,
                                  "load_average_end": os.getloadavg()[0]}
    print(f"\n{a.n:,} rows, {cores} cores, medians of {a.rounds} rounds; the plain script "
          f"{plain:.2f} s ({a.n / plain:,.0f} rows/s)")
    for name in ("no_serial", "serial"):
        wall = statistics.median(w for w, _ in runs[name])
        cpu = statistics.median(c for _, c in runs[name])
        f = {"wall_s": wall, "cpu_s": cpu, "ratio": plain / wall,
             "ceiling": plain / (cpu / cores), "cores_busy": cpu / wall}
        figures[name] = f
        print(f"  {name:9}: {wall:.2f} s wall, {cpu:.2f} s CPU; {f['ratio']:.2f}x the plain "
              f"script; at most {f['ceiling']:.2f}x with every core busy; "
              f"{f['cores_busy']:.2f} cores busy")
    if a.json:
        with open(a.json, "w") as fh:
            json.dump(figures, fh, indent=1)


if __name__ == "__main__":
    main()
