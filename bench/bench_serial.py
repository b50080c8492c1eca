"""Benchmark of the serial checks (and the history store): time and peak memory.

    python bench/bench_serial.py                        # 1M rows, 3 repeats, 5M peak
    python bench/bench_serial.py --n 200000 --big-n 0   # a quick look

Data: bench/synthetic.py's panels (invented, benchmark only), with one value in
``--spike-share`` of the panels pushed beyond its delta limit (Na+, K+ or HCO3-),
so that about twice that share of rows is flagged (the spike and the return to
the series), as on a busy ward's export.

Measures, each run in a child process (bench/_child.py: wall time and peak
resident memory of the run alone), medians of ``--repeats`` runs:

1. ``acidbase batch`` with ``--no-serial``, with the serial checks, and with the
   serial checks and a history store (``--history``, the second run of the day
   against a store holding the first day's panels);
2. the serial checks alone in this process: the first pass over the file and the
   checks (``SerialChecker.add`` and ``finish``), then the output columns for
   every chunk (``arrow_columns``), which is what the checks add to a run;
3. peak memory of ``acidbase batch`` with serial checks on a ``--big-n``-row file
   (target: 300 MB at 5M rows).

A benchmark, not a test: nothing here fails on a slow machine.
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

import numpy as np
import pyarrow as pa
import pyarrow.csv as pa_csv

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

import synthetic  # noqa: E402

# Spikes (invented, benchmark only): beyond the default limits of acidbase.serial.
SPIKES = {"na": 14.0, "k": 1.6, "hco3": 11.0}


def spiked(n: int, seed: int, start: int, share: float, day: int) -> pa.Table:
    cols = synthetic.panels(n, seed, start)
    rng = np.random.default_rng([seed, start, 7])
    hit = rng.random(n) < share
    which = rng.integers(0, len(SPIKES), n)
    sign = np.where(rng.random(n) < 0.5, -1.0, 1.0)
    for j, (field, size) in enumerate(SPIKES.items()):
        sel = hit & (which == j)
        cols[field] = np.where(sel, cols[field] + sign * size, cols[field])
    if day:  # the next day's export: the same patients, 24 h later, new samples
        stamp = np.array(cols["collected_at"], dtype="datetime64[s]") + np.timedelta64(day * 20, "h")
        cols["collected_at"] = np.datetime_as_string(stamp)
        cols["sample_id"] = np.char.add(cols["sample_id"], f"-d{day}")
    return synthetic.as_table(cols, seed, start)


def write(path: str, n: int, share: float, day: int = 0, seed: int = 2026,
          chunk: int = 500_000) -> None:
    synthetic.write_tables(path, (spiked(min(chunk, n - start), seed, start, share, day)
                                  for start in range(0, n, chunk)))


def child(args: list[str], env_extra: dict[str, str] | None = None) -> dict:
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = dict(os.environ, PYTHONPATH=str(HERE.parent) + os.pathsep + os.environ.get(
        "PYTHONPATH", ""), **(env_extra or {}))
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run([sys.executable, str(HERE / "_child.py"), report, *args], check=True,
                   env=env, stderr=subprocess.DEVNULL)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    with open(report) as f:
        out = json.load(f)
    # CPU seconds of the child (start-up included): steadier than wall time on a
    # machine shared with other work.
    out["cpu_s"] = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    os.remove(report)
    if out["rc"] != 0:
        raise SystemExit(f"acidbase batch failed (exit {out['rc']}) on {args}")
    return out


def _numbers(col: pa.ChunkedArray) -> np.ndarray:
    """Cells that are plain numbers as float64, anything else NaN (a stand-in for the
    batch reader, so that what is timed is the checker)."""
    import pyarrow.compute as pc

    ok = pc.match_substring_regex(col, r"^-?[0-9]+(\.[0-9]*)?$")
    num = pc.cast(pc.if_else(ok, col, pa.scalar(None, pa.string())), pa.float64())
    return np.asarray(num.to_numpy(zero_copy_only=False), dtype=np.float64)


def serial_alone(path: str, chunk: int = 16384) -> dict[str, float]:
    """The serial checks in this process: first pass and checks, then every chunk's
    output columns; and the share of rows flagged."""
    from acidbase import fileio, serial

    rules = serial.DELTA_RULES
    names = ["patient_id", "collected_at", "sample_id"] + [r.field for r in rules
                                                           if r.field in synthetic.COLUMNS]
    opts = pa_csv.ConvertOptions(include_columns=names,
                                 column_types={k: pa.string() for k in names})
    reader = pa_csv.open_csv(path, convert_options=opts,
                             read_options=pa_csv.ReadOptions(block_size=1 << 20))
    checker = serial.SerialChecker(rules, serial.DEFAULT_WINDOW_HOURS,
                                   serial.SerialChecker.partitions_for(os.path.getsize(path)))
    t0 = time.perf_counter()
    c0 = time.process_time()
    for rb in reader:
        t = pa.Table.from_batches([rb])
        for lo in range(0, t.num_rows, chunk):
            part = t.slice(lo, chunk)
            secs, kind = fileio.parse_times(part["collected_at"])
            values = {f: _numbers(part[f]) for f in names[3:]}
            checker.add(part["patient_id"], secs, kind, values, part["sample_id"])
    t1 = time.perf_counter()
    c1 = time.process_time()
    checker.finish()
    t2 = time.perf_counter()
    c2 = time.process_time()
    n = len(checker.status)
    flagged = 0
    for start in range(0, n, chunk):
        cols = checker.arrow_columns(start, min(n, start + chunk))
        flagged += int(np.count_nonzero(np.asarray(cols["serial_codes"]) != ""))
    t3 = time.perf_counter()
    c3 = time.process_time()
    checker.close()
    return {"first_pass_s": t1 - t0, "checks_s": t2 - t1, "columns_s": t3 - t2,
            "total_s": t3 - t0, "first_pass_cpu_s": c1 - c0, "checks_cpu_s": c2 - c1,
            "columns_cpu_s": c3 - c2, "total_cpu_s": c3 - c0,
            "flagged_share": flagged / max(n, 1)}


def _medians(runs: list[dict]) -> dict[str, float]:
    return {"seconds": statistics.median(r["seconds"] for r in runs),
            "cpu_s": statistics.median(r["cpu_s"] for r in runs),
            "peak_mb": max(r["peak_mb"] for r in runs)}


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--n", type=int, default=1_000_000)
    p.add_argument("--big-n", type=int, default=5_000_000)
    p.add_argument("--repeats", type=int, default=3)
    p.add_argument("--spike-share", type=float, default=0.09)
    p.add_argument("--skip", default="", help="comma-separated parts to skip: e2e,alone,big,history")
    p.add_argument("--json", help="also write the figures to this file")
    a = p.parse_args()
    skip = set(filter(None, a.skip.split(",")))
    out: dict[str, object] = {"n": a.n, "big_n": a.big_n, "spike_share": a.spike_share}
    with tempfile.TemporaryDirectory(prefix="acidbase-bench-serial-") as tmp:
        day1 = os.path.join(tmp, "day1.csv")
        write(day1, a.n, a.spike_share)
        sink = os.path.join(tmp, "out.csv")
        if "alone" not in skip:
            runs = [serial_alone(day1) for _ in range(a.repeats)]
            out["serial_alone"] = {k: statistics.median(r[k] for r in runs) for k in runs[0]}
            print("serial checks alone:", out["serial_alone"], flush=True)
        if "e2e" not in skip:
            day2 = os.path.join(tmp, "day2.csv")
            write(day2, a.n, a.spike_share, day=1)
            for name, extra in (("no_serial", ["--no-serial"]), ("serial", [])):
                # day2: the same file the history run's second day reads
                runs = [child([day2, "-o", sink, "--quiet", "--summary", sink + ".txt", *extra])
                        for _ in range(a.repeats)]
                out[name] = _medians(runs)
                print(name, out[name], flush=True)
        if "history" not in skip:
            day2 = os.path.join(tmp, "day2.csv")
            if not os.path.exists(day2):
                write(day2, a.n, a.spike_share, day=1)
            env = {"ACIDBASE_HISTORY_KEY": "bench-only-site-key-0123456789abcdef"}
            runs = []
            for _ in range(a.repeats):
                store = os.path.join(tmp, "store.db")
                if os.path.exists(store):
                    os.remove(store)
                # The synthetic panels span a year: a retention that keeps them all.
                keep = ["--history", store, "--history-retention-days", "3650"]
                child([day1, "-o", sink, "--quiet", "--summary", sink + ".txt", *keep], env)
                runs.append(child([day2, "-o", sink, "--quiet", "--summary", sink + ".txt",
                                   *keep], env))
            out["serial_history"] = _medians(runs)
            print("serial + history (second day)", out["serial_history"], flush=True)
        if a.big_n and "big" not in skip:
            big = os.path.join(tmp, "big.csv")
            write(big, a.big_n, a.spike_share)
            for f in (day1, day2):
                if os.path.exists(f):
                    os.remove(f)
            r = child([big, "-o", sink, "--quiet", "--summary", sink + ".txt"])
            out["big_serial"] = {"seconds": r["seconds"], "cpu_s": r["cpu_s"],
                                 "peak_mb": r["peak_mb"]}
            print("big, serial", out["big_serial"], flush=True)
    if a.json:
        with open(a.json, "w") as f:
            json.dump(out, f, indent=1)


if __name__ == "__main__":
    main()
