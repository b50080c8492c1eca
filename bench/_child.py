"""Run one ``acidbase batch`` in this process and report its time and peak memory.

Used by bench_batch.py so that the peak resident memory measured is the batch run's
own, not the benchmark's.  Linux carries a process's peak resident size (``VmHWM``,
``ru_maxrss``) over from the parent at fork, so the child first resets it
(``/proc/self/clear_refs`` with 5, Linux 4.0 and later) and reads ``VmHWM`` from
``/proc/self/status`` at the end.
"""

from __future__ import annotations

import json
import resource
import sys
import time

try:  # the command's own process settings (acidbase/process.py), as `acidbase batch` has them
    from acidbase.process import prepare
except ImportError:  # (a checkout from before they existed)
    pass
else:
    prepare(["batch"])
from acidbase.cli import main  # noqa: E402


def _peak_kb() -> int:
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


if __name__ == "__main__":
    report, argv = sys.argv[1], sys.argv[2:]
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
    except OSError:
        pass
    t0 = time.perf_counter()
    rc = main(["batch", *argv])
    seconds = time.perf_counter() - t0
    peak_kb = _peak_kb()
    with open(report, "w") as f:
        json.dump({"rc": rc, "seconds": seconds, "peak_mb": peak_kb / 1024}, f)
