"""Benchmark: the compiled number scan and rule packing against their Python references.

    python bench/bench_cells.py                       # 1M synthetic rows, 16,384 a chunk
    python bench/bench_cells.py --n 200000 --passes 5 --before /path/to/older/checkout

Measures, in one run, CPU time (``time.process_time``: the machine is shared), on the
chunks of a synthetic CSV file (bench/synthetic.py) as ``acidbase batch`` reads them:

1. ``read_numbers`` over the numeric columns of every chunk (the batch's own reader,
   ``parse_numeric_many`` through ``parse_numeric``), with the compiled scan and with
   the Python route (``ACIDBASE_PURE_PYTHON=1``), passes alternating;
2. ``results._combine`` on each chunk's fired-rule matrix (from ``interpret_many``,
   computed once beforehand), both ways, passes alternating, label cache warm as in a run;
3. with ``--before DIR`` (a checkout of the code before the change, its extension
   built): ``acidbase batch FILE --no-serial -o OUT --quiet`` user+sys CPU of the child,
   this checkout and DIR alternating.

Prints medians over ``--passes`` passes (whole-file totals) and the median chunk.  A
benchmark, not a test: nothing here fails on a slow machine.
"""

from __future__ import annotations

import argparse
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
sys.path.insert(0, str(HERE.parent))

import synthetic  # noqa: E402

from acidbase import interpret_many, results  # noqa: E402
from acidbase.fields import NUMERIC  # noqa: E402
from acidbase.files.source import open_source  # noqa: E402
from acidbase.inputs.cells import read_numbers  # noqa: E402
from acidbase.rules import RULES  # noqa: E402


def _mode(pure: bool) -> None:
    if pure:
        os.environ["ACIDBASE_PURE_PYTHON"] = "1"
    else:
        os.environ.pop("ACIDBASE_PURE_PYTHON", None)


def _passes(work, passes: int) -> dict[str, tuple[list[float], list[float]]]:
    """{mode: (pass totals, per-chunk times of every pass)}, modes alternating."""
    out: dict[str, tuple[list[float], list[float]]] = {"compiled": ([], []), "python": ([], [])}
    for k in range(passes):
        for mode in (("compiled", "python") if k % 2 == 0 else ("python", "compiled")):
            _mode(mode == "python")
            chunk_times = work()
            out[mode][0].append(sum(chunk_times))
            out[mode][1].extend(chunk_times)
    _mode(False)
    return out


def _child_cpu(cmd: list[str], cwd: str, env: dict[str, str]) -> float:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, cwd=cwd, env=env, check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--chunk", type=int, default=16_384)
    ap.add_argument("--passes", type=int, default=7)
    ap.add_argument("--file", help="a CSV to use (default: generated in a temporary folder)")
    ap.add_argument("--before", help="a checkout of the code before, for the end-to-end runs")
    ap.add_argument("--runs", type=int, default=3, help="end-to-end runs of each checkout")
    args = ap.parse_args()

    tmp = tempfile.mkdtemp(prefix="bench-cells-")
    path = args.file or os.path.join(tmp, "panels.csv")
    if not args.file:
        synthetic.write_csv(path, args.n)
    src = open_source(path, chunk_rows=args.chunk)
    names = [s.name for s in NUMERIC if s.name in src.headers]
    chunks = list(src.chunks(names))
    rows = sum(t.num_rows for t in chunks)
    print(f"{rows:,} rows, {len(chunks)} chunks of {args.chunk:,}; columns {', '.join(names)}; "
          f"load {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f} {os.getloadavg()[2]:.2f}")

    def parse():
        times = []
        for t in chunks:
            t0 = time.process_time()
            for name in names:
                read_numbers(t[name])
            times.append(time.process_time() - t0)
        return times

    fired = [p.fired for t in chunks
             for p in interpret_many({n: t[n] for n in names}).parts]
    codes = [r.code for r in RULES]

    def combine():
        times = []
        for m in fired:
            t0 = time.process_time()
            results._combine(m, codes)
            times.append(time.process_time() - t0)
        return times

    for label, work in (("read_numbers", parse), ("_combine", combine)):
        got = _passes(work, args.passes)
        c, p = (statistics.median(got[m][0]) for m in ("compiled", "python"))
        cc, pc_ = (statistics.median(got[m][1]) * 1e3 for m in ("compiled", "python"))
        print(f"{label:14s} whole file: python {p:.3f} s, compiled {c:.3f} s ({p / c:.1f}x); "
              f"median chunk: python {pc_:.2f} ms, compiled {cc:.2f} ms")

    if args.before:
        env = {k: v for k, v in os.environ.items() if k != "ACIDBASE_PURE_PYTHON"}
        cpu: dict[str, list[float]] = {"before": [], "now": []}
        for k in range(args.runs):
            for which in (("now", "before") if k % 2 == 0 else ("before", "now")):
                cwd = args.before if which == "before" else str(HERE.parent)
                out = os.path.join(tmp, f"out-{which}.csv")
                cmd = [sys.executable, "-m", "acidbase", "batch", os.path.abspath(path),
                       "--no-serial", "-o", out, "--quiet"]
                cpu[which].append(_child_cpu(cmd, cwd, env))
        b, a = statistics.median(cpu["before"]), statistics.median(cpu["now"])
        same = Path(tmp, "out-before.csv").read_bytes() == Path(tmp, "out-now.csv").read_bytes()
        print(f"acidbase batch --no-serial user+sys: before {b:.2f} s, now {a:.2f} s "
              f"({b / a:.2f}x; runs {cpu}); outputs identical: {same}")
    print(f"load after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
