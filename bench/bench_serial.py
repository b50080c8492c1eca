"""Benchmark of the serial checks (and the history store): time and peak memory.

    python bench/bench_serial.py                        # 1M rows, 3 repeats, 5M peak
    python bench/bench_serial.py --n 200000 --big-n 0   # a quick look
    git worktree add /tmp/acidbase-before main          # the code to compare with, then
    python bench/bench_serial.py --before /tmp/acidbase-before

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
   (target: 300 MB at 5M rows);
4. where the store's time goes (part ``phases``): the second day's run in this
   process, with and without the store, one after the other, and the CPU time of
   each step that the store adds to or changes: hashing the ids and reading the
   stored panels (the main thread's, ``time.thread_time``), the checks and adding
   the run's panels (the process's, ``time.process_time``: they work on threads of
   their own while nothing else runs).  A per-step figure is steadier than a whole
   run's on a shared machine.

With ``--before TREE`` (a checkout of other code, e.g. main's), parts 1 and 2 are
also run with that tree's ``acidbase``, interleaved with this tree's runs (before,
after, before, after...) so that both see the same load; the figures are then
under ``before`` and ``after`` with their ratios.

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
#: The tree whose ``acidbase`` is measured (``--before`` runs this file again with
#: another tree here).
TREE = os.environ.get("ACIDBASE_BENCH_TREE") or str(HERE.parent)
sys.path.insert(0, str(HERE))
sys.path.insert(0, TREE)

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


def child(args: list[str], env_extra: dict[str, str] | None = None,
          tree: str = TREE) -> dict:
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = dict(os.environ, PYTHONPATH=tree + os.pathsep + os.environ.get(
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


def serial_alone_in(tree: str, path: str) -> dict[str, float]:
    """``serial_alone`` with ``tree``'s acidbase, in a child process."""
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = dict(os.environ, ACIDBASE_BENCH_TREE=tree, PYTHONPATH=tree)
    subprocess.run([sys.executable, str(HERE / "bench_serial.py"), "--alone-json", report,
                    path], check=True, env=env)
    with open(report) as f:
        out = json.load(f)
    os.remove(report)
    return out


_STEPS = {"hash_ids": ("history", "Store.hash_ids"), "read": ("history", "feed_earlier"),
          "first_pass": ("serial", "SerialChecker.add"),
          "checks": ("serial", "SerialChecker.finish"), "add": ("history", "commit_run")}
#: Steps that work on threads of their own (the partitions on the batch's workers, the
#: store's encoding on its thread), while nothing else runs: timed by the process's CPU.
_THREADED = {"checks", "add"}


def phases(day2: str, store: str | None) -> dict[str, float]:
    """One ``acidbase batch`` of ``day2`` in this process (with the store ``store``, a
    copy of the first day's, when given): its CPU seconds, and the CPU seconds of each
    of ``_STEPS``: the main thread's, or the process's for ``_THREADED``."""
    import contextlib
    import importlib
    import io

    from acidbase.cli import main as cli_main

    spent = dict.fromkeys(_STEPS, 0.0)
    for name, (module, attr) in _STEPS.items():
        mod = importlib.import_module(f"acidbase.{module}")
        owner, _, fn = attr.rpartition(".")
        obj = getattr(mod, owner) if owner else mod
        real = getattr(obj, fn)

        clock = time.process_time if name in _THREADED else time.thread_time

        def timed(*a, _real=real, _name=name, _clock=clock, **k):
            t = _clock()
            try:
                return _real(*a, **k)
            finally:
                spent[_name] += _clock() - t
        setattr(obj, fn, timed)
    with tempfile.TemporaryDirectory(prefix="acidbase-bench-phases-") as tmp:
        args = ["batch", day2, "-o", os.path.join(tmp, "out.csv"), "--quiet"]
        if store:
            db = os.path.join(tmp, "store.db")
            with open(store, "rb") as src, open(db, "wb") as dst:
                dst.write(src.read())
            args += ["--history", db, "--history-retention-days", "3650"]
        c0 = time.process_time()
        with contextlib.redirect_stderr(io.StringIO()):
            rc = cli_main(args)
        if rc != 0:
            raise SystemExit(f"acidbase batch failed (exit {rc})")
        return {"cpu_s": time.process_time() - c0, **spent}


def phases_in(tree: str, day2: str, store: str | None) -> dict[str, float]:
    """``phases`` with ``tree``'s acidbase, in a child process."""
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = dict(os.environ, ACIDBASE_BENCH_TREE=tree, PYTHONPATH=tree,
               ACIDBASE_HISTORY_KEY="bench-only-site-key-0123456789abcdef")
    # The command's process settings (acidbase/process.py), which this file cannot make
    # for itself (it loads numpy and pyarrow before it knows it is the child): without
    # them Arrow's own work and pyarrow's calls use two memory pools, and the store's
    # commit takes fresh pages that the command does not (docs/performance.md, "Session 8").
    env.setdefault("OPENBLAS_NUM_THREADS", "1")
    try:
        from acidbase.process import arrow_has_jemalloc
    except ImportError:  # (a checkout from before they existed)
        pass
    else:
        if arrow_has_jemalloc():
            env.setdefault("ARROW_DEFAULT_MEMORY_POOL", "jemalloc")
    subprocess.run([sys.executable, str(HERE / "bench_serial.py"), "--phases-json", report,
                    day2, store or ""], check=True, env=env)
    with open(report) as f:
        out = json.load(f)
    os.remove(report)
    return out


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
    p.add_argument("--skip", default="",
                   help="comma-separated parts to skip: e2e,alone,big,history,phases")
    p.add_argument("--before", metavar="TREE",
                   help="also measure this checkout's acidbase, interleaved (before/after)")
    p.add_argument("--json", help="also write the figures to this file")
    p.add_argument("--alone-json", nargs=2, metavar=("OUT", "CSV"), help=argparse.SUPPRESS)
    p.add_argument("--phases-json", nargs=3, metavar=("OUT", "CSV", "STORE"),
                   help=argparse.SUPPRESS)
    a = p.parse_args()
    if a.alone_json:  # a child of serial_alone_in: this tree's checker on one file
        with open(a.alone_json[0], "w") as f:
            json.dump(serial_alone(a.alone_json[1]), f)
        return
    if a.phases_json:  # a child of phases_in
        with open(a.phases_json[0], "w") as f:
            json.dump(phases(a.phases_json[1], a.phases_json[2] or None), f)
        return
    skip = set(filter(None, a.skip.split(",")))
    trees = {"after": TREE}
    if a.before:
        trees = {"before": os.path.abspath(a.before), "after": TREE}
    out: dict[str, object] = {"n": a.n, "big_n": a.big_n, "spike_share": a.spike_share,
                              "trees": trees, "load_before": os.getloadavg()}
    figures: dict[str, dict[str, object]] = {name: {} for name in trees}
    env = {"ACIDBASE_HISTORY_KEY": "bench-only-site-key-0123456789abcdef"}
    with tempfile.TemporaryDirectory(prefix="acidbase-bench-serial-") as tmp:
        day1 = os.path.join(tmp, "day1.csv")
        day2 = os.path.join(tmp, "day2.csv")
        write(day1, a.n, a.spike_share)
        sink = os.path.join(tmp, "out.csv")
        if "alone" not in skip:
            runs: dict[str, list] = {name: [] for name in trees}
            for _ in range(a.repeats):
                for name, tree in trees.items():
                    runs[name].append(serial_alone_in(tree, day1))
            for name in trees:
                figures[name]["serial_alone"] = {k: statistics.median(r[k] for r in runs[name])
                                                 for k in runs[name][0]}
                print(name, "serial checks alone:", figures[name]["serial_alone"], flush=True)
        modes = []
        if "e2e" not in skip:
            modes += [("no_serial", ["--no-serial"]), ("serial", [])]
        if "history" not in skip:
            modes.append(("serial_history", "history"))
        if modes:
            write(day2, a.n, a.spike_share, day=1)
            runs = {(name, mode): [] for name in trees for mode, _ in modes}
            for _ in range(a.repeats):
                for name, tree in trees.items():
                    for mode, extra in modes:
                        base = [day2, "-o", sink, "--quiet", "--summary", sink + ".txt"]
                        if extra != "history":
                            # day2: the same file the history run's second day reads
                            runs[name, mode].append(child([*base, *extra], tree=tree))
                            continue
                        store = os.path.join(tmp, "store.db")
                        if os.path.exists(store):
                            os.remove(store)
                        # The synthetic panels span a year: a retention that keeps them.
                        keep = ["--history", store, "--history-retention-days", "3650"]
                        child([day1, "-o", sink, "--quiet", "--summary", sink + ".txt", *keep],
                              env, tree)
                        runs[name, mode].append(child([*base, *keep], env, tree))
            for (name, mode), got in runs.items():
                figures[name][mode] = _medians(got)
                figures[name][mode]["cpu_runs"] = [r["cpu_s"] for r in got]
                print(name, mode, figures[name][mode], flush=True)
        if "phases" not in skip:
            if not os.path.exists(day2):
                write(day2, a.n, a.spike_share, day=1)
            stores = {}
            for name, tree in trees.items():  # each tree's store of the first day
                stores[name] = os.path.join(tmp, f"day1-{name}.db")
                child([day1, "-o", sink, "--quiet", "--summary", sink + ".txt", "--history",
                       stores[name], "--history-retention-days", "3650"], env, tree)
            steps: dict[tuple[str, str], list] = {}
            for _ in range(a.repeats):
                for name, tree in trees.items():
                    for mode in ("serial", "serial_history"):
                        steps.setdefault((name, mode), []).append(phases_in(
                            tree, day2, stores[name] if mode == "serial_history" else None))
            for (name, mode), got in steps.items():
                med = {k: statistics.median(r[k] for r in got) for k in got[0]}
                med["cpu_runs"] = [r["cpu_s"] for r in got]
                if mode == "serial_history":  # each pair (one after the other): its ratio
                    plain = steps[name, "serial"]
                    med["pair_ratios"] = [h["cpu_s"] / p["cpu_s"] for h, p in zip(got, plain)]
                    med["store_overhead"] = statistics.median(med["pair_ratios"]) - 1
                figures[name][f"phases_{mode}"] = med
                print(name, "phases", mode, med, flush=True)
        if a.big_n and "big" not in skip:
            big = os.path.join(tmp, "big.csv")
            write(big, a.big_n, a.spike_share)
            for f in (day1, day2):
                if os.path.exists(f):
                    os.remove(f)
            r = child([big, "-o", sink, "--quiet", "--summary", sink + ".txt"])
            figures["after"]["big_serial"] = {"seconds": r["seconds"], "cpu_s": r["cpu_s"],
                                              "peak_mb": r["peak_mb"]}
            print("big, serial", figures["after"]["big_serial"], flush=True)
    out.update(figures)
    out["load_after"] = os.getloadavg()
    for name, f in figures.items():
        if "serial" in f and "serial_history" in f:
            f["store_overhead"] = f["serial_history"]["cpu_s"] / f["serial"]["cpu_s"] - 1
            print(name, f"store adds {100 * f['store_overhead']:.0f} % CPU", flush=True)
    if a.json:
        with open(a.json, "w") as f:
            json.dump(out, f, indent=1)


if __name__ == "__main__":
    main()
