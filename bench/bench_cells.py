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
   this checkout and DIR alternating;
4. with ``--before DIR``, the gate and the check stage, per chunk in one thread
   (``time.thread_time``), in child processes that import this checkout or DIR,
   alternating: "gate" is what the kernel is handed (``files.check.panel_columns`` and
   ``inputs.panel.screen``: the numeric arrays, choice codes, masks and refusals),
   "check" the chunk's whole work as the batch does it (``batch._process``: the gate,
   the kernel, the rules and the output columns, lean profile, serial checks off), the
   CSV reading left out (the file's chunks are read first; the check stage runs over
   all of them, then the gate alone).  ``--gate-only`` runs this part alone.

Prints medians over ``--passes`` passes (whole-file totals) and the median chunk.  A
benchmark, not a test: nothing here fails on a slow machine.
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


#: The child of part 4: times the gate and the check stage of every chunk of a file.
_GATE_CHILD = r"""
import json, sys, time
from acidbase import batch, fileio
from acidbase.files.check import panel_columns
from acidbase.inputs.panel import screen
from acidbase.profile import Profile

path, chunk_rows = sys.argv[1], int(sys.argv[2])
src = fileio.open_source(path, chunk_rows=chunk_rows)
layout = fileio.map_headers(src.headers)
profile = Profile()
tables = list(src.chunks())
check = 0.0
start = 0
for table in tables:  # the check stage, chunk by chunk as the batch runs it
    t0 = time.thread_time()
    batch._process(table, layout, ".", None, None, start, profile.derived,
                   severities=profile.severities, wanted=profile.keeps)
    check += time.thread_time() - t0
    start += table.num_rows
gate = 0.0
for table in tables:  # then the gate alone, over the same chunks
    t0 = time.thread_time()
    cols, problems = panel_columns(table, layout, ())
    screen(cols, None, decimal=".", missing=(), row_problems=problems)
    gate += time.thread_time() - t0
print(json.dumps({"gate": gate, "check": check, "rows": start}))
"""


def _gate_runs(path: str, chunk: int, before: str, runs: int) -> None:
    """Part 4: gate and check-stage CPU, this checkout against ``before``, alternating."""
    got: dict[str, dict[str, list[float]]] = {w: {"gate": [], "check": []}
                                              for w in ("before", "now")}
    for k in range(runs):
        for which in (("now", "before") if k % 2 == 0 else ("before", "now")):
            root = before if which == "before" else str(HERE.parent)
            env = {key: v for key, v in os.environ.items() if key != "ACIDBASE_PURE_PYTHON"}
            env["PYTHONPATH"] = root
            out = subprocess.run([sys.executable, "-c", _GATE_CHILD, os.path.abspath(path),
                                  str(chunk)], cwd=root, env=env, check=True,
                                 capture_output=True, text=True).stdout
            res = json.loads(out.strip().splitlines()[-1])
            for key in ("gate", "check"):
                got[which][key].append(res[key])
    med = {w: {key: statistics.median(v) for key, v in d.items()} for w, d in got.items()}
    b, a = med["before"], med["now"]
    print(f"gate  (thread CPU, whole file): before {b['gate']:.3f} s, now {a['gate']:.3f} s "
          f"({a['gate'] / b['gate']:.2f} of before)")
    print(f"check (thread CPU, whole file): before {b['check']:.3f} s, now {a['check']:.3f} s "
          f"({a['check'] / b['check']:.2f} of before); the gate's share: before "
          f"{b['gate'] / b['check']:.0%}, now {a['gate'] / a['check']:.0%}")
    print(f"  runs: {json.dumps({w: {k: [round(x, 3) for x in v] for k, v in d.items()} for w, d in got.items()})}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--chunk", type=int, default=16_384)
    ap.add_argument("--passes", type=int, default=7)
    ap.add_argument("--file", help="a CSV to use (default: generated in a temporary folder)")
    ap.add_argument("--before", help="a checkout of the code before, for the end-to-end runs")
    ap.add_argument("--runs", type=int, default=3, help="end-to-end runs of each checkout")
    ap.add_argument("--gate-only", action="store_true",
                    help="with --before: only the gate and check-stage comparison (part 4)")
    args = ap.parse_args()

    tmp = tempfile.mkdtemp(prefix="bench-cells-")
    path = args.file or os.path.join(tmp, "panels.csv")
    if not args.file:
        synthetic.write_csv(path, args.n)
    if args.gate_only and args.before:
        print(f"load {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
        _gate_runs(path, args.chunk, args.before, args.runs)
        print(f"load after: {os.getloadavg()[0]:.2f}")
        return
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
        _gate_runs(path, args.chunk, args.before, args.runs)
    print(f"load after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
