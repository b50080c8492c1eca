"""Benchmark: cold start of ``acidbase check``, ``--help`` and ``tui --help`` against
``python -c "import numpy"``, fresh processes, alternating, in one run.

Target (issue 14, item 5): ``acidbase check`` on one panel at most numpy's import + 100 ms.
The machine is shared, so only the differences measured in the same run mean anything.
Also prints which heavy modules each command loaded (they should be none but pydantic,
which the one gate's ``Panel`` needs).

Bytecode: an installed package runs from cached bytecode, so by default the children
get a private ``PYTHONPYCACHEPREFIX`` (written by one warm-up run of each command)
even where ``PYTHONDONTWRITEBYTECODE`` is set; ``--source`` measures with neither
(every module of the package compiled from source at each start, about 50-60 ms more).

    python bench/bench_startup.py --runs 15 [--source] [--compare OTHER_CHECKOUT]

``--compare`` adds ``acidbase check`` and ``--help`` run from another checkout (e.g.
``git worktree add /tmp/old <commit>``), alternating with the rest: before and after in
one run.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
HEAVY = ("pyarrow", "textual", "pandas", "polars", "pydantic")
CHECK = ["check", "--ph", "7.4", "--pco2", "40", "--hco3", "24"]


def commands() -> dict[str, list[str]]:
    py = sys.executable
    return {
        "python -c pass": [py, "-c", "pass"],
        "import numpy": [py, "-c", "import numpy"],
        # the floor while the one gate's Panel is a pydantic model: numpy, pydantic, and
        # building a model (Panel itself is built by the same calls, over more fields)
        "import numpy, pydantic": [py, "-c", "import numpy, pydantic\n"
                                   "class M(pydantic.BaseModel):\n    x: float = 0"],
        "acidbase check": [py, "-m", "acidbase", *CHECK],
        "acidbase --help": [py, "-m", "acidbase", "--help"],
        "acidbase tui --help": [py, "-m", "acidbase", "tui", "--help"],
    }


def loaded(args: list[str]) -> list[str]:
    """The heavy modules present after ``main(args)`` in a fresh interpreter."""
    code = ("import sys\nfrom acidbase.cli import main\ntry:\n    main(%r)\n"
            "except SystemExit:\n    pass\nprint(' '.join(m for m in %r if m in sys.modules), "
            "file=sys.stderr)" % (args, HEAVY))
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env=_env(), cwd=CODE, check=False)
    return done.stderr.split()


CODE = HERE.parent
PYCACHE: str | None = None


def _env(code: Path | None = None) -> dict[str, str]:
    env = dict(os.environ, PYTHONPATH=str(code or CODE) + os.pathsep
               + os.environ.get("PYTHONPATH", ""))
    if PYCACHE is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = PYCACHE
    return env


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=15)
    ap.add_argument("--source", action="store_true", help="no cached bytecode")
    ap.add_argument("--compare", type=Path, help="another checkout to time beside this one")
    a = ap.parse_args()
    global PYCACHE
    if not a.source:
        PYCACHE = tempfile.mkdtemp(prefix="acidbase-pycache-")
    cmds = commands()
    where = {k: CODE for k in cmds}
    if a.compare:
        for k in ("acidbase check", "acidbase --help"):
            cmds[f"{k} [compare]"], where[f"{k} [compare]"] = cmds[k], a.compare.resolve()
    for k in cmds:  # warm-up: the bytecode cache, the file cache
        subprocess.run(cmds[k], env=_env(where[k]), cwd=where[k], stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL, check=False)
    times: dict[str, list[float]] = {k: [] for k in cmds}
    load = os.getloadavg()[0]
    for r in range(a.runs):
        for k in (cmds if r % 2 == 0 else list(reversed(cmds))):
            t0 = time.perf_counter()
            subprocess.run(cmds[k], env=_env(where[k]), cwd=where[k],
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
            times[k].append(time.perf_counter() - t0)
    med = {k: statistics.median(v) * 1000 for k, v in times.items()}
    numpy_ms = med["import numpy"]
    print(f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {CODE}"
          f"{f' [compare]: {a.compare}' if a.compare else ''}; "
          f"{'from source' if a.source else 'bytecode cached'}; medians of {a.runs}; "
          f"load average {load:.1f} at start, {os.getloadavg()[0]:.1f} at end")
    for k, v in med.items():
        over = f"  (+{v - numpy_ms:.0f} ms over import numpy)" if k != "import numpy" and (
            "numpy" in k or k.startswith("acidbase")) else ""
        print(f"  {k:26s} {v:6.0f} ms{over}")
    print(f"  target: acidbase check <= import numpy + 100 ms: "
          f"{'holds' if med['acidbase check'] - numpy_ms <= 100 else 'does not hold'}")
    for args in (CHECK, ["--help"], ["tui", "--help"]):
        print(f"  heavy modules after {' '.join(args)}: {', '.join(loaded(args)) or 'none'}")
    if PYCACHE is not None:
        shutil.rmtree(PYCACHE, ignore_errors=True)


if __name__ == "__main__":
    main()
