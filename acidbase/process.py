"""The ``acidbase`` command's process: settings made before numpy and pyarrow load, then
the command (``acidbase.cli``).

The console script and ``python -m acidbase`` start here.  The library (``import
acidbase``, ``acidbase.cli.main`` called from a program) never does, so a program that
uses the library keeps its own settings; a setting the user has made in the
environment is kept too.  This module imports neither library: both read their
settings once, when they load.

* ``OPENBLAS_NUM_THREADS=1`` (OpenBLAS's own variable, numpy's BLAS): the BLAS starts
  a pool of threads at numpy's import, one a core, which wait for work by spinning;
  this tool does no linear algebra, so the pool never has any.  Here (2 cores,
  docs/performance.md, "Session 8") ``import numpy`` took 148 ms of CPU with the pool
  and 67 ms without it.
* ``ARROW_DEFAULT_MEMORY_POOL=jemalloc`` for ``acidbase batch`` (Arrow's own
  variable), where this pyarrow is built with jemalloc: the batch gives pyarrow's
  calls the jemalloc pool (``batch._lean_allocators``), but Arrow's own work (reading
  CSV, compressing and decompressing IPC blocks, compute kernels) allocated from the
  default pool, mimalloc, so each pool kept memory the other could not reuse and
  the process kept taking fresh pages from the system.  One pool for the whole
  process: paired runs in docs/performance.md ("Session 8").
"""

from __future__ import annotations

import os
import sys
from collections.abc import Sequence

from .commands import command_word


def arrow_has_jemalloc() -> bool:
    """Whether the installed pyarrow was built with jemalloc, read from the build's
    configuration header that its packages carry (``arrow/util/config.h``), without
    loading pyarrow.  False when it cannot be told: naming a pool that is not built
    in would make Arrow print a warning on every run."""
    import importlib.util

    try:
        spec = importlib.util.find_spec("pyarrow")
    except (ImportError, ValueError):
        return False
    for folder in (spec.submodule_search_locations or []) if spec else []:
        try:
            with open(os.path.join(folder, "include", "arrow", "util", "config.h"),
                      encoding="utf-8", errors="replace") as f:
                return any(line.split() == ["#define", "ARROW_JEMALLOC"] for line in f)
        except OSError:
            continue
    return False


def prepare(argv: Sequence[str], environ: dict[str, str] | None = None) -> None:
    """The settings of the module docstring, for the command ``argv`` names; none
    once numpy (or, for the pool, pyarrow) is loaded, since it would read none."""
    env = os.environ if environ is None else environ
    if "numpy" not in sys.modules:
        env.setdefault("OPENBLAS_NUM_THREADS", "1")
    if (command_word(argv) == "batch" and "pyarrow" not in sys.modules
            and "ARROW_DEFAULT_MEMORY_POOL" not in env and arrow_has_jemalloc()):
        env["ARROW_DEFAULT_MEMORY_POOL"] = "jemalloc"


def main() -> int:
    """The console script: the settings, then the command."""
    prepare(sys.argv[1:])
    from .cli import main as run

    return run()
