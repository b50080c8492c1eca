"""``acidbase history``: what a history store holds; export or purge one patient."""

from __future__ import annotations

import csv
import io
import json
import os
import sqlite3
import sys
from typing import Any

from . import history
from .errors import AcidBaseError
from .results import CAUTION

EXIT_OK, EXIT_CANNOT_RUN = 0, 2


def run(args: Any) -> int:
    """Run ``acidbase history`` with the options of ``cli.configure_history_parser``."""
    try:
        return _run(args)
    except AcidBaseError as e:
        message = str(e)
    except OSError as e:
        message = f"{e.filename or args.store}: {e.strerror or e}"
    except sqlite3.DatabaseError as e:  # a damaged file
        message = f"{args.store}: the store could not be read ({e})"
    print(f"acidbase history: could not run: {message}", file=sys.stderr)
    return EXIT_CANNOT_RUN


def _run(args: Any) -> int:
    if (args.export or args.purge) and not args.patient:
        raise history.HistoryError("--export and --purge need --patient ID")
    if args.patient and not (args.export or args.purge):
        raise history.HistoryError("--patient needs --export or --purge")
    if args.output and not args.export:
        raise history.HistoryError("-o is for --export")
    if args.output and args.output != "-":  # the store is the export's input
        from .files.outputs import check_paths

        check_paths([("INPUT", args.store)], [("-o", args.output)])
    key = history.site_key() if args.patient else None
    store = history.Store(args.store, key, args.retention_days, create=False)
    try:
        if args.export:
            _export(store.patient(args.patient), args.patient, args.output)
        elif args.purge:
            n = store.purge(args.patient)
            print(f"acidbase history: removed {n} stored panel{'s' * (n != 1)} of that patient")
        elif args.prune:
            n = store.prune()
            print(f"acidbase history: removed {n} panel{'s' * (n != 1)} collected more than "
                  f"{args.retention_days:g} days ago")
        else:
            info = store.summary()
            print(json.dumps({**info, "caution": CAUTION}, indent=1) if args.json
                  else _text(info))
    finally:
        store.close()
    return EXIT_OK


def _text(info: dict) -> str:
    lines = [f"acidbase history: {info['path']} (store version {info['schema_version']})",
             f"  panels: {info['panels']:,} of {info['patients']:,} patients"]
    if info["panels"]:
        lines[-1] += f", collected {info['first_collected']} to {info['last_collected']}"
    lines.append(f"  retention: {info['retention_days']:g} days at each run "
                 "(panels collected earlier are pruned)")
    lines.append(f"  runs recorded: {len(info['runs'])}")
    for r in info["runs"][-20:]:
        lines.append(f"    {r['id']:>4}  {r['finished_at']}  acidbase {r['tool_version']}  "
                     f"input sha256 {(r['input_sha256'] or '')[:12]}  added "
                     f"{r['panels_added'] or 0:,}, already stored {r['panels_already_stored'] or 0:,}")
    lines += ["", CAUTION]
    return "\n".join(lines)


def _export(table, patient_id: str, output: str | None) -> None:
    """CSV: the patient id as given, each stored panel, the caution on the first row."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    fields = list(history.STORED_FIELDS)
    w.writerow(["patient_id", "collected_at", "sample_id", *fields, "caution"])
    rows = history.table_rows(table)
    for i, r in enumerate(rows):
        w.writerow([_cell(patient_id), r["collected_at"], _cell(r["sample_id"] or ""),
                    *("" if r[f] != r[f] else repr(r[f]) for f in fields),
                    CAUTION if i == 0 else ""])
    if output is None:
        sys.stdout.write(buf.getvalue())
        return
    tmp = output + ".partial"
    # Owner only, as the store itself: the file names a patient beside their values.
    with os.fdopen(os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600), "w",
                   encoding="utf-8", newline="") as f:
        f.write(buf.getvalue())
    os.replace(tmp, output)
    print(f"acidbase history: {len(rows)} stored panel{'s' * (len(rows) != 1)} written to "
          f"{output}", file=sys.stderr)


def _cell(text: str) -> str:
    """Formula escaping as ``acidbase batch`` does (OWASP, "CSV Injection")."""
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r", "\n", "\0") else text
