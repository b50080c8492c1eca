"""Benchmark: the kernel, CSV in to CSV out, and the same rules row by row, in one run.

    python bench/bench_batch.py                 # defaults below
    python bench/bench_batch.py --n 1000000 --big-n 5000000 --baseline-n 20000

Measures, on synthetic panels (bench/synthetic.py, seeded):

1. the in-memory kernel: ``interpret_many`` over ``--n`` panels, with the sample
   type and HCO3- source as integer codes (as ``acidbase batch`` passes them) and as
   Python strings, and with ``Results.table()`` (the output columns); median of
   ``--repeats`` runs;
2. CSV in -> CSV out end to end: ``acidbase batch`` in a child process on a file of
   ``--n`` rows, with and without the serial checks, median of ``--repeats`` runs;
   peak resident memory of the child;
3. the row-by-row baseline: the same rules one panel at a time in plain Python
   (csv module in, ``acidbase.interpret`` per row, csv module out) on ``--baseline-n``
   rows, scaled to rows per second;
4. peak memory of ``acidbase batch`` on a ``--big-n``-row file (target 300 MB at 5M).

Prints one table with panels per second, peak memory and the ratios; ``--json FILE``
also writes the figures.  Targets (issue 4, 2-core machine): kernel >= 5M panels/s;
CSV end to end >= 1M rows/s and >= 4x the row-by-row baseline; peak memory <= 300 MB
for a 5M-row file.  A benchmark, not a test: nothing here fails on a slow machine.
"""

from __future__ import annotations

import argparse
import cProfile
import csv
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

import synthetic  # noqa: E402

import acidbase  # noqa: E402
from acidbase.fields import HCO3_SOURCES, NUMERIC, SAMPLE_TYPES  # noqa: E402
from acidbase.files.check import panel_columns  # noqa: E402
from acidbase.model import choice_codes  # noqa: E402
from acidbase.results import DECIMALS  # noqa: E402


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


def child(args: list[str]) -> dict[str, float]:
    with tempfile.NamedTemporaryFile(suffix=".json", delete=False) as f:
        report = f.name
    env = dict(os.environ, PYTHONPATH=str(HERE.parent) + os.pathsep + os.environ.get(
        "PYTHONPATH", ""))
    subprocess.run([sys.executable, str(HERE / "_child.py"), report, *args], check=True,
                   env=env, stderr=subprocess.DEVNULL)
    with open(report) as f:
        out = json.load(f)
    os.remove(report)
    if out["rc"] != 0:
        raise SystemExit(f"acidbase batch failed (exit {out['rc']}) on {args}")
    return out


def end_to_end(path: str, out: str, n: int, repeats: int, extra: list[str]) -> dict[str, float]:
    runs = [child([path, "-o", out, "--quiet", "--summary", out + ".summary", *extra])
            for _ in range(repeats)]
    t = statistics.median(r["seconds"] for r in runs)
    return {"rows_per_s": n / t, "seconds": t, "peak_mb": max(r["peak_mb"] for r in runs)}


def row_by_row(path: str, out: str, n: int) -> dict[str, float]:
    """The same rules one row at a time: csv module, a Panel and ``interpret`` per row."""
    numeric = [s.name for s in NUMERIC]
    t0 = time.perf_counter()
    with open(path, newline="") as fin, open(out, "w", newline="") as fout:
        reader = csv.DictReader(fin)
        writer = None
        for i, row in enumerate(reader):
            if i >= n:
                break
            data = {}
            status, reason, codes, disorders = "interpreted", "", "", ""
            try:
                for k in numeric:
                    v = row.get(k)
                    if v:
                        data[k] = float(v)
                for k in ("sample_type", "hco3_source"):
                    if row.get(k):
                        data[k] = row[k]
                it = acidbase.interpret(acidbase.Panel(**data))
                codes = ";".join(it.codes())
                disorders = "; ".join(d.label() for d in it.disorders)
                derived = it.derived
            except (ValueError, TypeError) as e:  # pydantic.ValidationError is a ValueError
                status, reason, derived = "refused", str(e).splitlines()[0], {}
            rec = dict(row, status=status, reason=reason, finding_codes=codes,
                       disorders=disorders, **{k: ("" if v is None else v)
                                               for k, v in derived.items()})
            if writer is None:
                fields = list(row) + ["status", "reason", "finding_codes", "disorders"] + \
                    list(acidbase.results.DERIVED)
                writer = csv.DictWriter(fout, fields, extrasaction="ignore")
                writer.writeheader()
            writer.writerow(rec)
    t = time.perf_counter() - t0
    return {"rows_per_s": n / t, "seconds": t}


def stages(path: str, chunk_rows: int = 16384) -> dict[str, float]:
    """Seconds spent in each stage of the batch path, in this process, one thread.

    read (pyarrow CSV), values (parsing cells), kernel (``interpret_many``), table
    (``Results.table``), columns (the rest of a chunk's processing: to Arrow,
    refusals, qualifiers, review; measured as the whole chunk step minus the three
    before, run again on the same chunk), escape (formula escaping), write (CSV
    formatting into memory); decimals (derived values as fixed-point text) before
    escaping.  Summed over the file; serial checks off.
    """
    import io

    import pyarrow as pa
    import pyarrow.csv as pa_csv

    from acidbase import batch, fileio

    src = fileio.open_source(path, chunk_rows=chunk_rows)
    layout = fileio.map_headers(src.headers)
    spent = dict.fromkeys(("read", "values", "kernel", "table", "columns", "decimals", "escape",
                           "write"), 0.0)

    def timed(key: str, fn):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        spent[key] += dt
        return out, dt

    chunks = iter(src.chunks())
    while True:
        try:
            table, _ = timed("read", lambda: next(chunks))
        except StopIteration:
            break
        # "values": the table's columns by field (the cells themselves are read by the
        # one reader inside interpret_many, so their reading is timed with the kernel)
        cv, a = timed("values", lambda: panel_columns(table, layout))
        res, b = timed("kernel", lambda: acidbase.interpret_many(cv[0], row_problems=cv[1]))
        _, c = timed("table", res.table)
        t0 = time.perf_counter()
        out, _ = batch._process(table, layout, ".", None, None, 0)
        spent["columns"] += max(0.0, time.perf_counter() - t0 - (a + b + c))
        cols = {h: table[h] for h in src.headers}
        cols.update(out)
        tab = pa.table(cols)
        tab, _ = timed("decimals", lambda: fileio.fixed_columns(tab, DECIMALS))
        escaped = set(batch.escaped_columns(src.headers))
        tab, _ = timed("escape", lambda: pa.table(
            [fileio.escape_formula(col) if name in escaped else col
             for name, col in zip(tab.column_names, tab.columns)], schema=tab.schema))
        timed("write", lambda: pa_csv.write_csv(tab, io.BytesIO()))
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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000)
    ap.add_argument("--big-n", type=int, default=5_000_000, help="0 to skip")
    ap.add_argument("--baseline-n", type=int, default=20_000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--workdir", default=None)
    ap.add_argument("--json", dest="json_out")
    ap.add_argument("--profile", action="store_true", help="print the kernel's hot spots")
    a = ap.parse_args()
    results: dict[str, object] = {
        "date": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime()),
        "machine": f"{platform.machine()}, {os.cpu_count()} cores, Python "
                   f"{platform.python_version()}, numpy {np.__version__}, pyarrow "
                   f"{__import__('pyarrow').__version__}",
        "n": a.n, "big_n": a.big_n, "baseline_n": a.baseline_n, "repeats": a.repeats,
    }
    with tempfile.TemporaryDirectory(dir=a.workdir) as tmp:
        src = os.path.join(tmp, "panels.csv")
        synthetic.write_csv(src, a.n)
        results["file_mb"] = os.path.getsize(src) / 1e6
        results["kernel"] = kernel(a.n, a.repeats)
        out = os.path.join(tmp, "out.csv")
        results["csv_serial"] = end_to_end(src, out, a.n, a.repeats, [])
        results["csv_no_serial"] = end_to_end(src, out, a.n, a.repeats, ["--no-serial"])
        results["csv_no_serial_no_derived"] = end_to_end(
            src, out, a.n, a.repeats, ["--no-serial", "--derived", "none"])
        pq_out = os.path.join(tmp, "out.parquet")
        results["csv_to_parquet"] = end_to_end(src, pq_out, a.n, a.repeats, ["--no-serial"])
        results["stages_seconds"] = stages(src)
        results["row_by_row"] = row_by_row(src, out, a.baseline_n)
        if a.big_n:
            big = os.path.join(tmp, "big.csv")
            synthetic.write_csv(big, a.big_n)
            results["big_file_mb"] = os.path.getsize(big) / 1e6
            results["big_serial"] = end_to_end(big, out, a.big_n, 1, [])
            os.remove(big)
    base = results["row_by_row"]["rows_per_s"]
    k = results["kernel"]
    lines = [
        f"acidbase batch benchmark, {results['date']}; {results['machine']}",
        f"{a.n:,} synthetic panels ({results['file_mb']:.0f} MB CSV); medians of {a.repeats}",
        f"  kernel interpret_many, coded   {k['kernel_panels_per_s']:>12,.0f} panels/s  "
        f"(target 5,000,000)",
        f"  kernel, choices as text        {k['kernel_text_panels_per_s']:>12,.0f} panels/s",
        f"  kernel + output columns        {k['kernel_table_panels_per_s']:>12,.0f} panels/s",
    ]
    for key, label in (("csv_serial", "CSV -> CSV, serial checks on "),
                       ("csv_no_serial", "CSV -> CSV, --no-serial       "),
                       ("csv_no_serial_no_derived", "  same, --derived none        "),
                       ("csv_to_parquet", "CSV -> Parquet, --no-serial   ")):
        r = results[key]
        lines.append(f"  {label} {r['rows_per_s']:>12,.0f} rows/s    peak {r['peak_mb']:6.0f} MB"
                     f"   {r['rows_per_s'] / base:5.1f}x row by row")
    lines.append(f"  row by row (plain Python)      {base:>12,.0f} rows/s    "
                 f"({a.baseline_n:,} rows, scaled)")
    if a.big_n:
        r = results["big_serial"]
        lines.append(f"  {a.big_n:,}-row file ({results['big_file_mb']:.0f} MB), serial on: "
                     f"{r['rows_per_s']:,.0f} rows/s, peak {r['peak_mb']:.0f} MB (target 300)")
    lines.append("  targets: CSV end to end >= 1,000,000 rows/s and >= 4x row by row")
    st = results["stages_seconds"]
    total = sum(st.values())
    per_row = ", ".join(f"{k} {v / a.n * 1e6:.2f}" for k, v in st.items())
    lines.append("  where the time goes (one thread, --no-serial, microseconds per row): "
                 f"{per_row}; total {total / a.n * 1e6:.2f}")
    print("\n".join(lines))
    if a.profile:
        print(profile_kernel(min(a.n, 1_000_000)))
    if a.json_out:
        with open(a.json_out, "w") as f:
            json.dump(results, f, indent=2)


if __name__ == "__main__":
    main()
