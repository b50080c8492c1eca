"""Run one ``acidbase batch`` in this process and report its time and peak memory.

Used by bench_batch.py so that the peak resident memory measured is the batch run's
own, not the benchmark's (Linux ``ru_maxrss`` is in kilobytes).
"""

from __future__ import annotations

import json
import resource
import sys
import time

from acidbase.cli import main

if __name__ == "__main__":
    report, argv = sys.argv[1], sys.argv[2:]
    t0 = time.perf_counter()
    rc = main(["batch", *argv])
    seconds = time.perf_counter() - t0
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    with open(report, "w") as f:
        json.dump({"rc": rc, "seconds": seconds, "peak_mb": peak_kb / 1024}, f)
