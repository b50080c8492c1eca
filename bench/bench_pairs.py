"""Paired runs: `acidbase batch` under several configurations (a checkout, options,
environment), alternating run by run so that each sees the same load; medians of the
run's wall and CPU seconds (imports excluded: the child imports first, then times
`main`) and the largest peak resident memory.

    python bench/bench_pairs.py '{"before": {"tree": "/tmp/before", "args": ["m1.csv"]},
                                  "after": {"tree": ".", "args": ["m1.csv"]}}' 7

Each configuration: ``tree`` (put first on PYTHONPATH; its extensions built in place),
``args`` (the input and options; ``-o`` and ``--summary`` go to a scratch folder),
optional ``env`` (e.g. {"SI": "0.001"} sets the interpreter's switch interval) and
``copy`` ([source, destination], copied before each run: a history store to start from).
A benchmark, not a test."""
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile

CHILD = r'''
import sys, time, resource, os, json
si = float(os.environ.get("SI", "0"))
if si: sys.setswitchinterval(si)
try:  # the command's process settings (acidbase/process.py), where the tree has them
    from acidbase.process import prepare; prepare(["batch"])
except ImportError:
    pass
from acidbase.cli import main
import pyarrow as pa; pa.array([1.0])
r0 = resource.getrusage(resource.RUSAGE_SELF); t0 = time.perf_counter()
rc = main(["batch", *sys.argv[2:]])
t = time.perf_counter() - t0; r1 = resource.getrusage(resource.RUSAGE_SELF)
peak = [int(l.split()[1]) for l in open("/proc/self/status") if l.startswith("VmHWM")][0] / 1024
json.dump({"rc": rc, "peak": peak, "wall": t, "cpu": r1.ru_utime-r0.ru_utime+r1.ru_stime-r0.ru_stime}, open(sys.argv[1], "w"))
'''
configs = json.loads(sys.argv[1])  # {name: {"tree": path, "env": {...}, "args": [...]}}
reps = int(sys.argv[2]) if len(sys.argv) > 2 else 3
res = {k: [] for k in configs}
for r in range(reps):
    for name, c in configs.items():
        with tempfile.TemporaryDirectory() as d:
            rep = os.path.join(d, "r.json")
            env = dict(os.environ, PYTHONPATH=c["tree"], **c.get("env", {}))
            if "copy" in c:
                shutil.copy(c["copy"][0], c["copy"][1])
            subprocess.run([sys.executable, "-c", CHILD, rep, *c["args"], "-o", os.path.join(d, "o.csv"),
                            "--summary", os.path.join(d, "s.txt")], env=env, check=True, stderr=subprocess.DEVNULL)
            res[name].append(json.load(open(rep)))
print("load", os.getloadavg())
for name, rs in res.items():
    print(f"{name:28s} wall {statistics.median(x['wall'] for x in rs):.3f}  cpu {statistics.median(x['cpu'] for x in rs):.3f}  peak {max(x['peak'] for x in rs):.0f} MB  walls {[round(x['wall'],2) for x in rs]}")
