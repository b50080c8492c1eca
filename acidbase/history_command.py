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
from .files.outputs import OutputSet, Staged, check_paths, emit
from .results import CAUTION

EXIT_OK, EXIT_CANNOT_RUN = 0, 2


def run(args: Any) -> int:
    """Run ``acidbase history`` with the options of ``cli.configure_history_parser``."""
    try:
        return _run(args)
    except AcidBaseError as e:
        message = str(e)
    except BrokenPipeError:  # standard output closed by its reader: acidbase.cli's to end
        raise
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
    with OutputSet() as outputs:
        staged = None
        if args.output and args.output != "-":
            # As ``acidbase batch -o``: never the store (the export's input) by any name;
            # staged beside the target before any work, renamed into place when whole.
            check_paths([("INPUT", args.store)], [("-o", args.output)])
            staged = outputs.add("-o", args.output)
            if staged.temp and not os.path.exists(staged.target):
                # Owner only, as the store itself: the file names a patient beside
                # their values.  (A file replaced keeps its own mode.)
                os.fchmod(staged.file.fileno(), 0o600)
        return _run_on(args, outputs, staged)


def _run_on(args: Any, outputs: OutputSet, staged: Staged | None) -> int:
    key = history.site_key() if args.patient else None
    store = history.Store(args.store, key, args.retention_days, create=False)
    try:
        if args.export:
            _export(store.patient(args.patient), args.patient, outputs, staged, args.output)
        elif args.purge:
            n = store.purge(args.patient)
            emit(f"acidbase history: removed {n} stored panel{'s' * (n != 1)} of that patient\n")
        elif args.prune:
            n = store.prune()
            emit(f"acidbase history: removed {n} panel{'s' * (n != 1)} collected more than "
                 f"{args.retention_days:g} days ago\n")
        else:
            info = store.summary()
            emit((json.dumps({**info, "caution": CAUTION}, indent=1) if args.json
                  else _text(info)) + "\n")
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


def _export(table, patient_id: str, outputs: OutputSet, staged: Staged | None,
            output: str | None) -> None:
    """CSV: the patient id as given, each stored panel, the caution on the first row;
    to ``staged`` (renamed into place here, once whole) or standard output."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    fields = list(history.STORED_FIELDS)
    w.writerow(["patient_id", "collected_at", "sample_id", *fields, "caution"])
    rows = history.table_rows(table)
    for i, r in enumerate(rows):
        w.writerow([_cell(patient_id), r["collected_at"], _cell(r["sample_id"] or ""),
                    *("" if r[f] != r[f] else repr(r[f]) for f in fields),
                    CAUTION if i == 0 else ""])
    if staged is None:
        emit(buf.getvalue())
        return
    try:
        staged.file.write(buf.getvalue().encode("utf-8"))
        outputs.commit()
    except OSError as e:  # named by the export's path, not the store's
        raise OSError(e.errno, e.strerror, output) from e
    print(f"acidbase history: {len(rows)} stored panel{'s' * (len(rows) != 1)} written to "
          f"{output}", file=sys.stderr)


def _cell(text: str) -> str:
    """Formula escaping as ``acidbase batch`` does (OWASP, "CSV Injection")."""
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r", "\n", "\0") else text
