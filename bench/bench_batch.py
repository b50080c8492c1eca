"""Benchmark: kernel, CSV end to end, a plain-script baseline and cold start, in one run.

    python bench/bench_batch.py                 # defaults below
    python bench/bench_batch.py --n 1000000 --big-n 5000000 --baseline-n 1000000

Measures, on synthetic panels (bench/synthetic.py, seeded):

1. the in-memory kernel: ``interpret_many`` over ``--n`` panels, with the sample
   type and HCO3- source as integer codes (as ``acidbase batch`` passes them) and as
   Python strings, and with ``Results.table()`` (the output columns); median of
   ``--repeats`` runs;
2. CSV in -> CSV out end to end: ``acidbase batch`` in a child process on a file of
   ``--n`` rows: the default (lean) output with serial checks on and off, the full
   output (``--profile full``), and the lean output with the compiled CSV writer
   switched off (``ACIDBASE_PURE_PYTHON=1``, the Python reference); median of
   ``--repeats`` runs, peak resident memory of the child;
3. the row-by-row baseline: what a plain script does, the csv module in and out and
   a handful of rules per row in Python (``plain_script``), on ``--baseline-n`` rows;
4. the I/O floor: in a fresh process, the CSV read by pyarrow on one thread while the
   other writes the lean output's bytes into a new file (no checks, no formatting);
   the most any program writing that output could do here, against the plain script;
5. peak memory of ``acidbase batch`` (serial checks on) on a ``--big-n``-row file;
6. cold start: ``acidbase check`` on one panel and ``acidbase --help`` against
   ``python -c "import numpy"``, ``--start-runs`` fresh processes each, alternating,
   medians.

Prints one table with rows per second, peak memory and the ratios; ``--json FILE``
also writes the figures.  Targets (issue 14, 2-core machine, same run): CSV end to
end with serial checks >= 3x the plain script, without >= 4x; peak memory <= 300 MB
on 5M rows with serial checks; ``check`` cold start <= numpy's import + 100 ms.  A
benchmark, not a test: nothing here fails on a slow machine.
"""

from __future__ import annotations

import argparse
import cProfile
import csv
import importlib.util
import json
import os
import platform
import pstats
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

import synthetic

import acidbase
from acidbase.fields import HCO3_SOURCES, NUMERIC, SAMPLE_TYPES
from acidbase.model import choice_codes


def _median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def kernel(n: int, repeats: int) -> dict[str, float]:
    """``interpret_many`` in memory, with the choice columns (sample type, HCO3-
    source) in the two forms it accepts: integer codes, as ``acidbase batch`` passes
    them (its reader encodes the text column by column), and Python strings, which
    the kernel then encodes itself (comparisons of Python objects, which hold the
    interpreter lock)."""
    cols = synthetic.panels(n)
    columns = {s.name: cols[s.name] for s in NUMERIC if s.name in cols}
    text = dict(columns, sample_type=cols["sample_type"].astype(object),
                hco3_source=cols["hco3_source"].astype(object))
    coded = dict(columns, sample_type=choice_codes(text["sample_type"], n, SAMPLE_TYPES,
                                                   "unknown")[0],
                 hco3_source=choice_codes(text["hco3_source"], n, HCO3_SOURCES, "unknown")[0])
    acidbase.interpret_many({k: v[:1000] for k, v in text.items()})  # warm imports
    t_coded = _median_time(lambda: acidbase.interpret_many(coded), repeats)
    t_text = _median_time(lambda: acidbase.interpret_many(text), repeats)
    t_table = _median_time(lambda: acidbase.interpret_many(coded).table(), repeats)
    return {"kernel_panels_per_s": n / t_coded, "kernel_text_panels_per_s": n / t_text,
            "kernel_table_panels_per_s": n / t_table, "kernel_seconds": t_coded,
            "kernel_text_seconds": t_text, "kernel_table_seconds": t_table}


def child_env(**extra: str) -> dict[str, str]:
    """The environment of the measured processes: the source tree first on the path,
    and bytecode read from ``__pycache__`` as an installed package has it
    (``compile_tree`` writes it; ``PYTHONDONTWRITEBYTECODE``, set in some shells,
    would only stop the writing, and is dropped so a run does not differ from the
    next)."""
    env = dict(os.environ, PYTHONPATH=str(HERE.parent) + os.pathsep + os.environ.get(
        "PYTHONPATH", ""), **extra)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def compile_tree() -> None:
    """Bytecode for the package's modules, as ``pip install`` writes it."""
    import compileall

    compileall.compile_dir(str(HERE.parent / "acidbase"), quiet=1)


def child(args: list[str], env_extra: dict[str, str] | None = None) -> dict[str, float]:
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = child_env(**(env_extra or {}))
    subprocess.run([sys.executable, str(HERE / "_child.py"), report, *args], check=True,
                   env=env, stderr=subprocess.DEVNULL)
    with open(report) as f:
        out = json.load(f)
    os.remove(report)
    if out["rc"] != 0:
        raise SystemExit(f"acidbase batch failed (exit {out['rc']}) on {args}")
    return out


def end_to_end(path: str, out: str, n: int, repeats: int, extra: list[str],
               env_extra: dict[str, str] | None = None) -> dict[str, float]:
    runs = [child([path, "-o", out, "--quiet", "--summary", out + ".summary", *extra], env_extra)
            for _ in range(repeats)]
    t = statistics.median(r["seconds"] for r in runs)
    return {"rows_per_s": n / t, "seconds": t, "peak_mb": max(r["peak_mb"] for r in runs),
            "bytes_per_row": os.path.getsize(out) / n if out.endswith(".csv") else None}


def plain_script(path: str, out: str, n: int) -> dict[str, float]:
    """The baseline: a plain Python script one row at a time, csv module in and out and
    a handful of rules per row (not acidbase's method; a timing reference only).

    The forms a script would use (keys of acidbase/references.py): HCO3- = 0.0307 x
    pCO2 x 10**(pH - 6.105) [clsi_c46]; anion gap Na - (Cl + HCO3) [kraut_madias_2007];
    Winter's expected pCO2 1.5 x HCO3 + 8 +/- 2 [albert_1967]; pH 7.35-7.45, HCO3-
    22-26 and pCO2 35-45 mm[Hg] as reference ranges and a gap above 12 (common
    practice, no source); a consistency margin of 2 mmol/L (invented for the baseline).
    """
    t0 = time.perf_counter()
    rows = 0
    with open(path, newline="") as fin, open(out, "w", newline="") as fout:
        reader = csv.reader(fin)
        header = next(reader)
        at = {h: i for i, h in enumerate(header)}
        iph, ipco2, ihco3, ina, icl = (at[k] for k in ("ph", "pco2", "hco3", "na", "cl"))
        writer = csv.writer(fout)
        writer.writerow(header + ["status", "hco3_calculated", "anion_gap", "findings"])
        for row in reader:
            if rows >= n:
                break
            rows += 1
            try:
                ph, pco2, hco3 = float(row[iph]), float(row[ipco2]), float(row[ihco3])
                na, cl = float(row[ina]), float(row[icl])
            except ValueError:
                writer.writerow(row + ["refused", "", "", ""])
                continue
            if not (6.5 <= ph <= 8.0 and 5 <= pco2 <= 200 and 1 <= hco3 <= 60):
                writer.writerow(row + ["refused", "", "", ""])
                continue
            calc = 0.0307 * pco2 * 10 ** (ph - 6.105)
            gap = na - (cl + hco3)
            found = []
            if abs(hco3 - calc) > 2:
                found.append("inconsistent")
            if ph < 7.35:
                found.append("acidaemia")
                if hco3 < 22:
                    found.append("metabolic acidosis")
                    expected = 1.5 * hco3 + 8
                    if pco2 > expected + 2:
                        found.append("with respiratory acidosis")
                    elif pco2 < expected - 2:
                        found.append("with respiratory alkalosis")
                if pco2 > 45:
                    found.append("respiratory acidosis")
            elif ph > 7.45:
                found.append("alkalaemia")
                if hco3 > 26:
                    found.append("metabolic alkalosis")
                if pco2 < 35:
                    found.append("respiratory alkalosis")
            if gap > 12:
                found.append("high anion gap")
            writer.writerow(row + ["interpreted", f"{calc:.1f}", f"{gap:.1f}", ";".join(found)])
    t = time.perf_counter() - t0
    return {"rows_per_s": rows / t, "seconds": t, "rows": rows}


def io_floor_child(src: str, data: str, dest: str, report: str) -> None:
    """The I/O floor, in a fresh process: read ``src`` with pyarrow's streaming CSV
    reader (as ``acidbase batch`` reads it) on one thread while the other writes the
    bytes of ``data`` (a finished run's output, read into memory first) into a new
    file ``dest``, 1 MiB at a time.  No checks, no formatting: the least time any
    program that reads this file and writes that output can take on this machine
    with two threads.  Imports count, as they do in the batch runs."""
    with open(data, "rb") as f:
        payload = f.read()
    t0 = time.perf_counter()
    import threading

    import pyarrow.csv as pa_csv

    def read() -> None:
        with pa_csv.open_csv(src) as reader:
            for _ in reader:
                pass

    reading = threading.Thread(target=read)
    reading.start()
    view = memoryview(payload)
    with open(dest, "wb") as f:
        f.writelines(view[at:at + (1 << 20)] for at in range(0, len(view), 1 << 20))
    reading.join()
    seconds = time.perf_counter() - t0
    with open(report, "w") as f:
        json.dump({"seconds": seconds}, f)


def io_floor(src: str, data: str, dest: str, n: int, repeats: int) -> dict[str, float]:
    """Median of ``repeats`` runs of ``io_floor_child``, each a new file."""
    times = []
    for _ in range(repeats):
        if os.path.exists(dest):
            os.remove(dest)
        with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
            report = f.name
        subprocess.run([sys.executable, __file__, "--io-floor-child", src, data, dest, report],
                       check=True, env=child_env())
        with open(report) as f:
            times.append(json.load(f)["seconds"])
        os.remove(report)
    os.remove(dest)
    t = statistics.median(times)
    return {"rows_per_s": n / t, "seconds": t}


def cold_start(runs: int) -> dict[str, float]:
    """Median wall time of fresh processes, alternating the commands run by run."""
    py = sys.executable
    env = child_env()
    commands = {
        "numpy_import": [py, "-c", "import numpy"],
        "python_bare": [py, "-c", "pass"],
        "check": [py, "-m", "acidbase", "check", "--ph", "7.40", "--pco2", "40", "--hco3", "24",
                  "--na", "140", "--cl", "104"],
        "help": [py, "-m", "acidbase", "--help"],
    }
    times: dict[str, list[float]] = {k: [] for k in commands}
    for r in range(runs):
        order = list(commands) if r % 2 == 0 else list(reversed(commands))
        for k in order:
            t0 = time.perf_counter()
            subprocess.run(commands[k], env=env, stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL, check=False)
            times[k].append(time.perf_counter() - t0)
    return {f"{k}_ms": statistics.median(v) * 1000 for k, v in times.items()}


def stages(path: str, chunk_rows: int = 16384) -> dict[str, float]:
    """Seconds in each stage of the batch path, in this process, one thread, serial
    checks off, default (lean) output: read (the CSV reader), check (a chunk's whole
    work: cells, kernel, output columns), write_compiled and write_python (the CSV text
    of the chunk's output by the compiled writer and by the Python reference).
    Summed over the file.  Uses the batch's internals: when they change, this says so
    instead of timing something else."""
    import pyarrow as pa

    from acidbase import batch, csvtext, fileio
    from acidbase.profile import Profile

    profile = Profile()
    spent = dict.fromkeys(("read", "check", "write_compiled", "write_python"), 0.0)
    try:
        src = fileio.open_source(path, chunk_rows=chunk_rows)
        layout = fileio.map_headers(src.headers)
        escape = set(batch.escaped_columns(src.headers))
        start = 0
        chunks = iter(src.chunks())
        while True:
            t0 = time.perf_counter()
            try:
                table = next(chunks)
            except StopIteration:
                break
            t1 = time.perf_counter()
            out, meta = batch._process(table, layout, ".", None, None, start, profile.derived,
                                       severities=profile.severities, wanted=profile.keeps)
            cols = {"row": pa.array(np.arange(start + 1, start + table.num_rows + 1))}
            cols.update({h: table[h] for h in src.headers})
            cols.update({k: v for k, v in out.items() if profile.keeps(k)})
            tab = pa.table(cols)
            t2 = time.perf_counter()
            plain = meta["plain"]
            compiled = csvtext.compiled_csv(tab, profile.decimals, escape, plain, ",")
            t3 = time.perf_counter()
            fileio.csv_rows(tab, profile.decimals, escape, plain, ",")
            t4 = time.perf_counter()
            spent["read"] += t1 - t0
            spent["check"] += t2 - t1
            spent["write_compiled"] += (t3 - t2) if compiled is not None else float("nan")
            spent["write_python"] += t4 - t3
            start += table.num_rows
    except (AttributeError, TypeError, KeyError) as e:  # the internals moved
        return {"not measured": str(e)}
    return spent


def profile_kernel(n: int, top: int = 15) -> str:
    cols = synthetic.panels(n)
    columns = {s.name: cols[s.name] for s in NUMERIC if s.name in cols}
    columns["sample_type"] = cols["sample_type"].astype(object)
    columns["hco3_source"] = cols["hco3_source"].astype(object)
    pr = cProfile.Profile()
    pr.enable()
    acidbase.interpret_many(columns).table()
    pr.disable()
    import io
    buf = io.StringIO()
    pstats.Stats(pr, stream=buf).sort_stats("tottime").print_stats(top)
    return buf.getvalue()


#: End-to-end configurations: key, label, extra options, extra environment.
RUNS = (
    ("csv_serial", "CSV -> CSV, serial on, lean (default)", [], None),
    ("csv_no_serial", "CSV -> CSV, --no-serial, lean", ["--no-serial"], None),
    ("csv_serial_full", "CSV -> CSV, serial on, --profile full", ["--profile", "full"], None),
    ("csv_no_serial_full", "CSV -> CSV, --no-serial, --profile full",
     ["--no-serial", "--profile", "full"], None),
    ("csv_no_serial_python", "same as lean --no-serial, Python writer", ["--no-serial"],
     {"ACIDBASE_PURE_PYTHON": "1"}),
    ("csv_no_serial_full_python", "same as full --no-serial, Python writer",
     ["--no-serial", "--profile", "full"], {"ACIDBASE_PURE_PYTHON": "1"}),
)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--big-n", type=int, default=5_000_000, help="0 to skip")
    ap.add_argument("--baseline-n", type=int, default=1_000_000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--start-runs", type=int, default=15, help="cold-start processes each")
    ap.add_argument("--workdir", default=None)
    ap.add_argument("--json", dest="json_out")
    ap.add_argument("--profile", action="store_true", help="print the kernel's hot spots")
    ap.add_argument("--io-floor-child", nargs=4, help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.io_floor_child:
        io_floor_child(*a.io_floor_child)
        return
    from acidbase import csvtext

    compile_tree()
    results: dict[str, object] = {
        "date": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime()),
        "machine": f"{platform.machine()}, {os.cpu_count()} cores, Python "
                   f"{platform.python_version()}, numpy {np.__version__}, pyarrow "
                   f"{__import__('pyarrow').__version__}",
        "load_average_start": os.getloadavg(),
        "compiled_writer": csvtext.compiled_available(),
        # pyarrow imports pandas, where installed, the first time it builds an array
        # (about 0.3 s a run here); the README's install (`pip install .`) has none.
        "pandas_installed": importlib.util.find_spec("pandas") is not None,
        "n": a.n, "big_n": a.big_n, "baseline_n": a.baseline_n, "repeats": a.repeats,
    }
    with tempfile.TemporaryDirectory(dir=a.workdir) as tmp:
        src = os.path.join(tmp, "panels.csv")
        synthetic.write_csv(src, a.n)
        results["file_mb"] = os.path.getsize(src) / 1e6
        results["cold_start"] = cold_start(a.start_runs)
        results["kernel"] = kernel(a.n, a.repeats)
        out = os.path.join(tmp, "out.csv")
        results["plain_script"] = plain_script(src, out, a.baseline_n)
        for key, _, extra, env in RUNS:
            results[key] = end_to_end(src, out, a.n, a.repeats, extra, env)
            if key == "csv_no_serial":  # its output: the bytes the floor writes
                lean = os.path.join(tmp, "lean.csv")
                os.replace(out, lean)
        results["io_floor"] = io_floor(src, lean, out, a.n, a.repeats)
        os.remove(lean)
        results["plain_script_again"] = plain_script(src, out, a.baseline_n)
        results["stages_seconds"] = stages(src)
        if a.big_n:
            big = os.path.join(tmp, "big.csv")
            synthetic.write_csv(big, a.big_n)
            results["big_file_mb"] = os.path.getsize(big) / 1e6
            results["big_serial"] = end_to_end(big, out, a.big_n, 1, [])
            os.remove(big)
    results["load_average_end"] = os.getloadavg()
    # the baseline measured before and after the end-to-end runs: their median
    base = statistics.median([results["plain_script"]["rows_per_s"],
                              results["plain_script_again"]["rows_per_s"]])
    results["plain_script_rows_per_s"] = base
    k = results["kernel"]
    cs = results["cold_start"]
    lines = [
        (f"acidbase batch benchmark, {results['date']}; {results['machine']}; compiled CSV "
         f"writer {'on' if results['compiled_writer'] else 'OFF'}; pandas "
         f"{'installed (pyarrow imports it: about +0.3 s a run)' if results['pandas_installed'] else 'not installed'}"),
        (f"{a.n:,} synthetic panels ({results['file_mb']:.0f} MB CSV); medians of "
         f"{a.repeats}; load average {results['load_average_start'][0]:.1f} at start, "
         f"{results['load_average_end'][0]:.1f} at end"),
        f"  kernel interpret_many, coded   {k['kernel_panels_per_s']:>12,.0f} panels/s",
        f"  kernel, choices as text        {k['kernel_text_panels_per_s']:>12,.0f} panels/s",
        f"  kernel + output columns        {k['kernel_table_panels_per_s']:>12,.0f} panels/s",
        (f"  plain script (csv module, a handful of rules per row) {base:,.0f} rows/s "
         f"({results['plain_script']['rows_per_s']:,.0f} before, "
         f"{results['plain_script_again']['rows_per_s']:,.0f} after the runs below)"),
    ]
    for key, label, _, _ in RUNS:
        r = results[key]
        lines.append(f"  {label:<44} {r['rows_per_s']:>10,.0f} rows/s  peak {r['peak_mb']:5.0f} MB"
                     f"  {r['bytes_per_row'] or 0:5.0f} B/row  {r['rows_per_s'] / base:5.2f}x "
                     f"plain script")
    r = results["io_floor"]
    lines.append(f"  {'I/O floor (read, write lean bytes, no work)':<44} "
                 f"{r['rows_per_s']:>10,.0f} rows/s{'':28}{r['rows_per_s'] / base:5.2f}x "
                 f"plain script")
    if a.big_n:
        r = results["big_serial"]
        lines.append(f"  {a.big_n:,}-row file ({results['big_file_mb']:.0f} MB), serial on, lean: "
                     f"{r['rows_per_s']:,.0f} rows/s, peak {r['peak_mb']:.0f} MB (target 300)")
    lines.append(f"  cold start (medians of {a.start_runs}): python -c pass "
                 f"{cs['python_bare_ms']:.0f} ms, import numpy {cs['numpy_import_ms']:.0f} ms, "
                 f"acidbase check {cs['check_ms']:.0f} ms (+{cs['check_ms'] - cs['numpy_import_ms']:.0f}"
                 f" over numpy; target +100), acidbase --help {cs['help_ms']:.0f} ms")
    lines.append("  targets: serial on >= 3x the plain script, --no-serial >= 4x")
    st = results["stages_seconds"]
    if "not measured" in st:
        lines.append(f"  stages: not measured ({st['not measured']})")
    else:
        per_row = ", ".join(f"{k} {v / a.n * 1e6:.2f}" for k, v in st.items())
        lines.append("  where the time goes (one thread, --no-serial, lean, microseconds per "
                     f"row): {per_row}")
    print("\n".join(lines))
    if a.profile:
        print(profile_kernel(min(a.n, 1_000_000)))
    if a.json_out:
        with open(a.json_out, "w") as f:
            json.dump(results, f, indent=2)


if __name__ == "__main__":
    main()
