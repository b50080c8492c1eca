"""Benchmark: cold start of ``acidbase check``, ``--help`` and ``tui --help`` against
``python -c "import numpy"``, fresh processes, alternating, in one run.

Target (issue 14, item 5): ``acidbase check`` on one panel at most numpy's import + 100 ms.
The machine is shared, so only the differences measured in the same run mean anything;
each child's CPU time (user + sys, from ``getrusage``) is reported beside its wall time,
since CPU time suffers less from other work on the machine.  Also prints which heavy
modules each command loaded (they should be none: no pyarrow, textual, pandas, polars,
nor pydantic, which only the ``Panel`` model needs).

Bytecode: an installed package runs from cached bytecode, so by default the children
get a private ``PYTHONPYCACHEPREFIX``, filled first by ``compileall`` of the package
trees and by one warm-up run of each command (numpy's and the standard library's
modules), even where ``PYTHONDONTWRITEBYTECODE`` is set (it is dropped for the
children); ``--source`` measures with neither (every module of the package compiled
from source at each start, about 50-80 ms more).

    python bench/bench_startup.py --runs 21 [--source] [--compare OTHER_CHECKOUT]

``--compare`` adds each ``acidbase`` command run from another checkout (e.g. a copy of
``main``'s tree: ``git archive main | tar -x -C /tmp/before``), alternating with the
rest: before and after in one run.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
CODE = HERE.parent
HEAVY = ("pyarrow", "textual", "pandas", "polars", "pydantic")
CHECK = ["check", "--ph", "7.4", "--pco2", "40", "--hco3", "24"]
ACIDBASE = {"acidbase check": CHECK, "acidbase --help": ["--help"],
            "acidbase tui --help": ["tui", "--help"]}
PYCACHE: str | None = None


def _env(code: Path) -> dict[str, str]:
    env = dict(os.environ, PYTHONPATH=str(code) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    if PYCACHE is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = PYCACHE
    return env


def commands(compare: Path | None) -> dict[str, tuple[list[str], Path]]:
    """Label -> (argv, the checkout it runs from, also its working directory)."""
    py = sys.executable
    out = {"python -c pass": ([py, "-c", "pass"], CODE),
           "import numpy": ([py, "-c", "import numpy"], CODE)}
    for label, args in ACIDBASE.items():
        out[label] = ([py, "-m", "acidbase", *args], CODE)
        if compare is not None:
            out[f"{label} [compare]"] = ([py, "-m", "acidbase", *args], compare)
    return out


def run_once(argv: list[str], code: Path) -> tuple[float, float]:
    """(wall seconds, CPU seconds user + sys) of one fresh process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(argv, env=_env(code), cwd=code, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL, check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def loaded(args: list[str], code: Path) -> list[str]:
    """The heavy modules present after ``main(args)`` in a fresh interpreter."""
    probe = ("import sys\nfrom acidbase.cli import main\ntry:\n    main(%r)\n"
             "except SystemExit:\n    pass\nprint(' '.join(m for m in %r if m in sys.modules), "
             "file=sys.stderr)" % (args, HEAVY))
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          env=_env(code), cwd=code, check=False)
    return done.stderr.split()


def revision(code: Path) -> str:
    done = subprocess.run(["git", "-C", str(code), "rev-parse", "--short", "HEAD"],
                          capture_output=True, text=True, check=False)
    return done.stdout.strip() or "not a git checkout"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=15)
    ap.add_argument("--source", action="store_true", help="no cached bytecode")
    ap.add_argument("--compare", type=Path, help="another checkout to time beside this one")
    a = ap.parse_args()
    global PYCACHE
    compare = a.compare.resolve() if a.compare else None
    if not a.source:
        PYCACHE = tempfile.mkdtemp(prefix="acidbase-pycache-")
        for tree in {CODE, compare} - {None}:
            subprocess.run([sys.executable, "-m", "compileall", "-q", "acidbase", "tui"],
                           env=_env(tree), cwd=tree, stdout=subprocess.DEVNULL, check=False)
    cmds = commands(compare)
    for argv, code in cmds.values():  # warm-up: the rest of the bytecode, the file cache
        run_once(argv, code)
    wall: dict[str, list[float]] = {k: [] for k in cmds}
    cpu: dict[str, list[float]] = {k: [] for k in cmds}
    load = os.getloadavg()[0]
    for r in range(a.runs):
        for k in (list(cmds) if r % 2 == 0 else list(reversed(cmds))):
            w, c = run_once(*cmds[k])
            wall[k].append(w)
            cpu[k].append(c)
    mw = {k: statistics.median(v) * 1000 for k, v in wall.items()}
    mc = {k: statistics.median(v) * 1000 for k, v in cpu.items()}
    print(f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {CODE} at {revision(CODE)}"
          + (f"; [compare]: {compare} at {revision(compare)}" if compare else "")
          + f"; {'from source' if a.source else 'bytecode cached'}; medians of {a.runs}; "
          f"load average {load:.1f} at start, {os.getloadavg()[0]:.1f} at end; "
          f"{os.cpu_count()} CPUs")
    print(f"  {'command':34s} {'wall':>7s} {'over numpy':>11s} {'CPU':>7s} {'over numpy':>11s}")
    for k in cmds:
        over = k not in ("python -c pass", "import numpy")
        dw = f"+{mw[k] - mw['import numpy']:.0f} ms" if over else ""
        dc = f"+{mc[k] - mc['import numpy']:.0f} ms" if over else ""
        print(f"  {k:34s} {mw[k]:4.0f} ms {dw:>11s} {mc[k]:4.0f} ms {dc:>11s}")
    for label, key in (("wall", mw), ("CPU", mc)):
        over = key["acidbase check"] - key["import numpy"]
        print(f"  target ({label}): acidbase check <= import numpy + 100 ms: "
              f"{'holds' if over <= 100 else 'does not hold'} (+{over:.0f} ms)")
    for label, args in ACIDBASE.items():
        print(f"  heavy modules after {label}: {', '.join(loaded(args, CODE)) or 'none'}"
              + (f" (compare: {', '.join(loaded(args, compare)) or 'none'})" if compare else ""))
    if PYCACHE is not None:
        shutil.rmtree(PYCACHE, ignore_errors=True)


if __name__ == "__main__":
    main()
