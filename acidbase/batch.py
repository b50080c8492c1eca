"""``acidbase batch``: check a file of panels, every row accounted for.

Flow: file -> chunks of text columns (``fileio``) -> values with their
qualifiers and flags -> ``interpret_many`` (the same kernel as ``check``) ->
output columns -> file, one output row per input row, in input order.  Where
``patient_id`` and ``collected_at`` are present, a first pass collects what the
serial checks need (``serial``) and the second pass writes their result beside
each row.

Censored values (``<5``, ``>180``) never enter a formula as exact numbers: in a
required field the row is refused naming the field; in an optional field the
value is treated as not measured and recorded in the ``qualifiers`` column.  A
laboratory flag after a value (``7.21 L``) is read off, recorded in
``lab_flags``, and the number is used.
"""

from __future__ import annotations

from typing import TYPE_CHECKING
import dataclasses
import ctypes
import html
import json
import os
import shutil
import sys
import time
from collections import Counter, deque
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import ExitStack
from dataclasses import dataclass, field

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from . import audit, config, fileio, history, serial
from . import units as _units
from .engine import SLOTS
from .errors import AcidBaseError
from .fields import BY_NAME
from .inputs.cells import read_setting
from .fileio import BatchInputError, Layout, Source
from .files import hl7, scratch
from .files.check import (EXTRA_COLUMNS, ROW_COLUMN, check_chunk, field_column,  # noqa: F401
                          field_values, output_names, review_mask, review_rules)
from .files.outputs import (
    OutputPathError,
    OutputSet,
    Staged,
    Stopped,
    check_paths,
    silence_stdout,
    stale,
    stop_on_signals,
)
from .files.writer import Writer, escape_text
from .profile import profile_from_args
from .results import CAUTION

if TYPE_CHECKING:  # the command line (argparse) lives in acidbase.cli only
    import argparse

EXIT_OK, EXIT_CANNOT_RUN = 0, 2

# Columns the batch adds around the kernel's own, and one chunk's check: acidbase.files.check.
_process = check_chunk  # one name the run calls, so a test can make a chunk fail

#: Worker threads that check and format chunks (the machine's two cores).
WORKERS = max(1, min(2, os.cpu_count() or 1))

_DELIMS = {"tab": "\t", "\\t": "\t", "comma": ",", "semicolon": ";", "pipe": "|"}


# ---------------------------------------------------------------------------
# Command line


def _pairs(items: list[str], what: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in items:
        if "=" not in item:
            raise BatchInputError(f"--{what} {item!r}: write FIELD=VALUE")
        k, v = item.split("=", 1)
        k = k.strip().lower()
        if k in out:
            raise BatchInputError(f"--{what} given twice for {k}")
        out[k] = v.strip()
    return out


def _delta_overrides(items: list[str]) -> dict[str, float | None]:
    out: dict[str, float | None] = {}
    for k, v in _pairs(items, "delta").items():
        if k not in BY_NAME:
            raise BatchInputError(f"--delta {k}=...: {k!r} is not a numeric field "
                                  f"({', '.join(BY_NAME)})")
        if v.lower() == "off":
            out[k] = None
            continue
        lim = read_setting(v)  # the one reader: '１０', '1_0' and 'inf' are no limit
        if lim is None or lim <= 0:
            raise BatchInputError(f"--delta {k}={v}: the limit must be a positive number in "
                                  f"{BY_NAME[k].unit}, or 'off'")
        out[k] = lim
    return out


# ---------------------------------------------------------------------------
# Progress


class Progress:
    """A one-line bar on stderr, only on a terminal, by rows done of the estimated rows."""

    def __init__(self, total: int, enabled: bool) -> None:
        self.total = max(total, 1)
        self.enabled = enabled and sys.stderr.isatty()
        self.label = ""
        self._last = 0.0
        self._t0 = time.monotonic()

    def update(self, rows: int, force: bool = False) -> None:
        """``rows`` done of about ``total`` (an estimate: the bar stops short of 100 %)."""
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self._last < 0.2:
            return
        self._last = now
        frac = min(rows / self.total, 0.99)
        bar = "#" * int(frac * 30)
        sys.stderr.write(f"\r{self.label} [{bar:<30}] {frac:4.0%} {rows:,} rows "
                         f"{now - self._t0:5.1f} s")
        sys.stderr.flush()

    def end(self) -> None:
        if self.enabled:
            sys.stderr.write("\r" + " " * 78 + "\r")
            sys.stderr.flush()


# ---------------------------------------------------------------------------
# One chunk


# ---------------------------------------------------------------------------
# Summary and report


@dataclass
class Tally:
    rows: int = 0
    refused: int = 0
    review: int = 0
    processes: Counter = field(default_factory=Counter)
    findings: Counter = field(default_factory=Counter)
    lab_flags: Counter = field(default_factory=Counter)
    qualifiers: Counter = field(default_factory=Counter)
    serial_status: Counter = field(default_factory=Counter)
    serial_codes: Counter = field(default_factory=Counter)
    reasons: Counter = field(default_factory=Counter)
    flagged: list[dict[str, str]] = field(default_factory=list)
    plane: np.ndarray = field(default_factory=lambda: np.zeros((PLANE_ROWS, PLANE_COLS),
                                                               dtype=np.int64))

    def merge(self, other: Tally) -> None:
        """Add the counts of ``other``, a later part of the same file."""
        self.rows += other.rows
        self.refused += other.refused
        self.review += other.review
        for name in ("processes", "findings", "lab_flags", "qualifiers", "serial_status",
                     "serial_codes", "reasons"):
            getattr(self, name).update(getattr(other, name))
        self.flagged.extend(other.flagged[:max(0, FLAGGED_LISTED - len(self.flagged))])
        self.plane += other.plane


#: The picture's axes and size, and how many rows the report lists: display choices
#: (design, no source), wide enough for the accepted ranges of most panels.
PLANE_PCO2 = (10.0, 100.0)  # mm[Hg], x axis
PLANE_HCO3 = (0.0, 50.0)    # mmol/L, y axis
PLANE_COLS, PLANE_ROWS = 60, 25
FLAGGED_LISTED = 200


def _counts(arr: pa.Array, split: str | None = None) -> Counter:
    if split is not None:
        arr = pc.list_flatten(pc.split_pattern(arr, split))
    vc = pc.value_counts(arr)
    return Counter({v: c for v, c in zip(vc.field("values").to_pylist(),
                                         vc.field("counts").to_pylist()) if v})


def _nonempty(arr: pa.Array) -> pa.Array:
    return arr.filter(pc.not_equal(arr, ""))


def tally_chunk(t: Tally, out: dict[str, pa.Array], pco2: np.ndarray, hco3: np.ndarray,
                refused: np.ndarray, review: np.ndarray, start: int,
                ids: dict[str, pa.Array | pa.ChunkedArray | None], fired: np.ndarray,
                listed: int = FLAGGED_LISTED, marks: dict[str, Counter] | None = None,
                roles: dict[str, tuple[np.ndarray, list[str]]] | None = None) -> None:
    """Count one chunk into ``t``; list at most ``listed`` more flagged rows.
    ``roles``: each slot's role codes and their words (``check_chunk``'s
    ``meta["roles"]``), counted as codes; without it, the role columns of ``out``."""
    n = len(refused)
    t.rows += n
    t.refused += int(refused.sum())
    t.review += int(review.sum())
    for slot, process, gap in SLOTS:
        name = f"{process}, {gap} gap" if gap else process
        if roles is None:
            counted = _counts(out[f"role_{slot}"])
        else:
            codes, words = roles[slot]
            counted = {w: int(c) for w, c in zip(words, np.bincount(
                codes, minlength=len(words)).tolist()) if w and c}
        for role, c in counted.items():
            t.processes[(name, role)] += c
    # Finding counts straight from the fired-rule matrix (rules x rows), interpreted
    # rows only; the same codes as the finding_codes column, without splitting text.
    from .rules import RULES

    counts = np.count_nonzero(fired & ~refused if refused.any() else fired, axis=1)
    t.findings.update({r.code: int(c) for r, c in zip(RULES, counts.tolist()) if c})
    marks = marks or {}
    # Counted from the reader's structured marks and problems (check_chunk's meta),
    # never by splitting or matching the text of the output columns.
    t.lab_flags.update(marks.get("lab_flags", Counter()))
    t.qualifiers.update(marks.get("qualifiers", Counter()))
    t.serial_status.update(_counts(out["serial_status"]))
    t.serial_codes.update(_counts(_nonempty(out["serial_codes"]), ";"))
    t.reasons.update(marks.get("reasons", Counter()))
    ok = ~refused & np.isfinite(pco2) & np.isfinite(hco3)
    if ok.any():
        t.plane += plane_counts(hco3[ok], pco2[ok])
    room = min(listed, FLAGGED_LISTED - len(t.flagged))
    if room > 0 and review.any():
        idx = np.flatnonzero(review)[:room]
        take = pa.array(idx)
        cols = {"row": [str(start + i + 1) for i in idx.tolist()]}
        for name, arr in ids.items():
            cols[name] = arr.take(take).to_pylist() if arr is not None else [""] * len(idx)
        cols["status"] = out["status"].take(take).to_pylist()
        cols["review because"] = _review_because(fired[:, idx], refused[idx],
                                                 out["serial_codes"].take(take).to_pylist())
        for key in ("reason", "serial_detail"):
            cols[key] = out[key].take(take).to_pylist()
        for j in range(len(idx)):
            t.flagged.append({k: (v[j] or "") for k, v in cols.items()})


#: The picture's bin edges, as ``np.histogram2d`` draws them for these ranges.
_PLANE_EDGES = (np.linspace(*PLANE_HCO3, PLANE_ROWS + 1), np.linspace(*PLANE_PCO2, PLANE_COLS + 1))


def plane_counts(hco3: np.ndarray, pco2: np.ndarray) -> np.ndarray:
    """``np.histogram2d(hco3, pco2, bins=(PLANE_ROWS, PLANE_COLS), range=(PLANE_HCO3,
    PLANE_PCO2))`` counts as int64, by the same steps numpy takes for given edges
    (``searchsorted`` to the right, a value on the last edge in the last bin, values
    outside left out) without its general-purpose overhead."""
    index = []
    for x, edges in zip((hco3, pco2), _PLANE_EDGES):
        k = np.searchsorted(edges, x, side="right")
        k[x == edges[-1]] -= 1
        index.append(k)
    rows, cols = index
    inside = (rows >= 1) & (rows <= PLANE_ROWS) & (cols >= 1) & (cols <= PLANE_COLS)
    flat = (rows[inside] - 1) * PLANE_COLS + (cols[inside] - 1)
    return np.bincount(flat, minlength=PLANE_ROWS * PLANE_COLS).reshape(PLANE_ROWS, PLANE_COLS)


def _review_because(fired: np.ndarray, refused: np.ndarray, serial_codes: list) -> list[str]:
    """For each listed row, what put it on the review list: "refused" (a refused row
    has no reading, so no findings), else the trust findings above "info"
    (``review_rules``); then the serial flags."""
    from .rules import RULES

    rules = review_rules()
    out = []
    for j in range(fired.shape[1]):
        why = ["refused"] if refused[j] else [RULES[i].code for i in rules if fired[i, j]]
        if serial_codes[j]:
            why += serial_codes[j].split(";")
        out.append("; ".join(why))
    return out


def plane_picture(plane: np.ndarray) -> str:
    """The pCO2-HCO3 plane as text: panel density, expected bands, iso-pH lines."""
    from .compensation import plane_bands

    x_edges = np.linspace(*PLANE_PCO2, PLANE_COLS + 1)
    y_edges = np.linspace(*PLANE_HCO3, PLANE_ROWS + 1)
    xc = (x_edges[:-1] + x_edges[1:]) / 2
    grid = [[" "] * PLANE_COLS for _ in range(PLANE_ROWS)]
    bands = plane_bands(xc)
    letters = {"metabolic acidosis": "a", "metabolic alkalosis": "k",
               "acute respiratory acidosis": "r", "chronic respiratory acidosis": "R",
               "acute respiratory alkalosis": "l", "chronic respiratory alkalosis": "L",
               "pH 7.20": "2", "pH 7.40": "4", "pH 7.60": "6"}
    for name, (lo, hi) in bands.items():
        mark = letters.get(name)
        if mark is None:
            continue
        for j in range(PLANE_COLS):
            if not (np.isfinite(lo[j]) and np.isfinite(hi[j])):
                continue
            for i in range(PLANE_ROWS):
                if hi[j] >= y_edges[i] and lo[j] < y_edges[i + 1]:
                    grid[i][j] = mark
    shades = ".:-=+*#%@"
    top = plane.max()
    if top > 0:
        level = np.ceil(np.log1p(plane) / np.log1p(top) * len(shades)).astype(int)
        for i, j in zip(*np.nonzero(plane)):
            grid[i][j] = shades[min(level[i, j], len(shades)) - 1]
    lines = []
    for i in range(PLANE_ROWS - 1, -1, -1):
        label = f"{y_edges[i + 1]:4.0f} |" if i % 5 == 4 else "     |"
        lines.append(label + "".join(grid[i]))
    lines.append("     +" + "-" * PLANE_COLS)
    ticks = [" "] * PLANE_COLS
    axis = "      "
    for v in range(int(PLANE_PCO2[0]), int(PLANE_PCO2[1]) + 1, 15):
        j = int((v - PLANE_PCO2[0]) / (PLANE_PCO2[1] - PLANE_PCO2[0]) * PLANE_COLS)
        for k, ch in enumerate(str(v)):
            if j + k < PLANE_COLS:
                ticks[j + k] = ch
    lines.append(axis + "".join(ticks))
    lines.append(axis + "pCO2, mm[Hg] (x) against HCO3-, mmol/L (y)")
    lines.append(
        "Panels: . : - = + * # % @ (more panels, darker; log scale). Expected bands: "
        "a metabolic acidosis, k metabolic alkalosis, r/R acute/chronic respiratory "
        "acidosis, l/L acute/chronic respiratory alkalosis; 2 4 6 = pH 7.20, 7.40, 7.60.")
    return "\n".join(lines)


def summary_text(t: Tally, notes: list[str], record: dict | None = None) -> str:
    lines = [f"acidbase batch: {t.rows:,} row{'' if t.rows == 1 else 's'}: "
             f"{t.rows - t.refused:,} interpreted, "
             f"{t.refused:,} refused; {t.review:,} need review"]
    lines += [f"  note: {n}" for n in notes]
    if t.processes:
        by = Counter()
        for (process, role), c in t.processes.items():
            by[process] += c
        lines.append("  processes: " + "; ".join(
            f"{p} {c:,} (primary {t.processes[(p, 'primary')]:,})"
            for p, c in _ranked(by)))
    for title, counter in (("finding codes", t.findings), ("laboratory flags", t.lab_flags),
                           ("qualifiers", t.qualifiers), ("serial", t.serial_status),
                           ("serial flags", t.serial_codes), ("refusal reasons", t.reasons)):
        if counter:
            lines.append(f"  {title}: " + "; ".join(f"{k} {c:,}" for k, c in _ranked(counter)))
    if record is not None:
        lines += [f"  audit: {line}" for line in audit.lines(record)]
    lines.append(CAUTION)
    return "\n".join(lines)


def summary_json(t: Tally, notes: list[str], record: dict | None = None) -> str:
    doc = {
        "rows": t.rows, "interpreted": t.rows - t.refused, "refused": t.refused,
        "needs_review": t.review, "notes": notes,
        "processes": {f"{p} {r}": c for (p, r), c in sorted(t.processes.items())},
        "findings": dict(_ranked(t.findings)), "lab_flags": dict(_ranked(t.lab_flags)),
        "qualifiers": dict(_ranked(t.qualifiers)),
        "serial_status": dict(_ranked(t.serial_status)),
        "serial_codes": dict(_ranked(t.serial_codes)),
        "refusal_reasons": dict(_ranked(t.reasons)), "caution": CAUTION,
    }
    if record is not None:
        doc["audit"] = record
    return json.dumps(doc, indent=2, ensure_ascii=False)


def _ranked(counter: Counter) -> list[tuple]:
    """Most common first, ties by name: the same file gives the same summary whatever
    the chunk size or the order in which chunks were counted."""
    return sorted(counter.items(), key=lambda kv: (-kv[1], str(kv[0])))


#: Markdown escaping of echoed text (sample ids, reasons, file headers, the input's
#: name): HTML's three special characters as entities, so no tag or entity from the
#: input reaches a renderer, and CommonMark's inline punctuation backslash-escaped
#: (CommonMark 0.31, "Backslash escapes" and "Entity and numeric character
#: references"), so no link, emphasis, code span or table cell break either.
_MD_ESCAPES = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;", "\\": "\\\\",
                             **{c: "\\" + c for c in "`*_[]|~#!"},
                             "\n": " ", "\r": " "})


def md_text(x: object) -> str:
    """``x`` as Markdown text that renders as itself: no markup, no HTML."""
    return str(x).translate(_MD_ESCAPES)




def _report_sections(t: Tally) -> tuple[tuple[str, Counter], ...]:
    """The report's count tables, in order; findings named by code and title, each
    trust finding that puts a row up for review marked so."""
    from .rules import BY_CODE, RULES

    review = {RULES[i].code for i in review_rules()}
    findings = Counter({
        f"{code}: {BY_CODE[code].title} ({BY_CODE[code].severity}"
        f"{', review' if code in review else ''})": c for code, c in t.findings.items()})
    return (("Processes", Counter({f"{p} ({r})": c for (p, r), c in t.processes.items()})),
            ("Findings", findings), ("Laboratory flags in values", t.lab_flags),
            ("Qualifiers", t.qualifiers), ("Serial checks", t.serial_status),
            ("Serial flags", t.serial_codes), ("Refusal reasons", t.reasons))


def report_markdown(t: Tally, notes: list[str], source: str, record: dict | None = None) -> str:
    out = ["# Batch check report", "", f"Input: {md_text(source)}", "", f"> {CAUTION}", "",
           "## Counts", "", "| | rows |", "|---|---:|", f"| read | {t.rows:,} |",
           f"| interpreted | {t.rows - t.refused:,} |", f"| refused | {t.refused:,} |",
           f"| need review | {t.review:,} |", ""]
    for n in notes:
        out.append(f"- {md_text(n)}")
    for title, counter in _report_sections(t):
        if counter:
            out += ["", f"## {title}", "", "| | rows |", "|---|---:|"]
            out += [f"| {md_text(k)} | {c:,} |" for k, c in _ranked(counter)]
    out += ["", f"## Rows that need review (first {FLAGGED_LISTED})", ""]
    if t.flagged:
        keys = list(t.flagged[0])
        out.append("| " + " | ".join(md_text(k) for k in keys) + " |")
        out.append("|" + "---|" * len(keys))
        out += ["| " + " | ".join(md_text(r[k]) for k in keys) + " |" for r in t.flagged]
    else:
        out.append("None.")
    out += ["", "## Panels on the pCO2-HCO3 plane (interpreted rows)", "", "```",
            plane_picture(t.plane), "```", ""]
    if record is not None:
        out += ["## Audit record", ""] + [f"- {md_text(x)}" for x in audit.lines(record)] + [""]
    out += [f"> {CAUTION}", ""]
    return "\n".join(out)


def report_html(t: Tally, notes: list[str], source: str, record: dict | None = None) -> str:
    """The report as one HTML page.  Echoed text is HTML-escaped and, since a
    spreadsheet opens an HTML table too, formula-escaped as the CSV is (OWASP)."""

    def e(x: object) -> str:
        return html.escape(escape_text(str(x)) or "")

    def table(counter: Counter) -> str:
        rows = "".join(f"<tr><td>{e(str(k))}</td><td>{c:,}</td></tr>"
                       for k, c in _ranked(counter))
        return f"<table><tr><th></th><th>rows</th></tr>{rows}</table>"

    parts = ["<!DOCTYPE html><html><head><meta charset='utf-8'><title>Batch check report</title>"
             "<style>body{font-family:sans-serif;margin:2em}td,th{border:1px solid #999;"
             "padding:2px 6px}table{border-collapse:collapse}.caution{border:2px solid #a00;"
             "padding:8px}</style></head><body>",
             "<h1>Batch check report</h1>", f"<p>Input: <code>{e(source)}</code></p>",
             f"<p class='caution'>{e(CAUTION)}</p>",
             table(Counter({"read": t.rows, "interpreted": t.rows - t.refused,
                            "refused": t.refused, "need review": t.review}))]
    if notes:
        parts.append("<ul>" + "".join(f"<li>{e(n)}</li>" for n in notes) + "</ul>")
    for title, counter in _report_sections(t):
        if counter:
            parts += [f"<h2>{e(title)}</h2>", table(counter)]
    parts.append(f"<h2>Rows that need review (first {FLAGGED_LISTED})</h2>")
    if t.flagged:
        keys = list(t.flagged[0])
        head = "".join(f"<th>{e(k)}</th>" for k in keys)
        body = "".join("<tr>" + "".join(f"<td>{e(r[k])}</td>" for k in keys) + "</tr>"
                       for r in t.flagged)
        parts.append(f"<table><tr>{head}</tr>{body}</table>")
    else:
        parts.append("<p>None.</p>")
    parts += ["<h2>Panels on the pCO2-HCO3 plane (interpreted rows)</h2>",
              f"<pre>{e(plane_picture(t.plane))}</pre>"]
    if record is not None:
        parts += ["<h2>Audit record</h2>",
                  "<ul>" + "".join(f"<li>{e(x)}</li>" for x in audit.lines(record)) + "</ul>"]
    parts.append(f"<p class='caution'>{e(CAUTION)}</p></body></html>")
    return "\n".join(parts)


# ---------------------------------------------------------------------------
# The run


def _settings(args: argparse.Namespace):
    """The laboratory settings the command line built (``acidbase.cli`` sets them)."""
    from .reference import Settings

    make = getattr(args, "make_settings", None)
    return make() if make is not None else Settings()


def escaped_columns(headers: tuple[str, ...]) -> list[str]:
    """Output columns that can carry text from the input, so are formula-escaped: every
    passed-through column, and ours that quote cell values (they start with a field's
    title, but the escaping does not rely on it)."""
    return [f"{h} (input)" for h in headers] + list(headers) + [
        "reason", "serial_detail", "qualifiers", "lab_flags"]


class _InOrder:
    """Calls run one at a time on a thread of their own, in the order given, with at
    most ``ahead`` waiting: ``put`` hands one on (waiting for the oldest when that many
    are in hand), ``drain`` waits for all; an error on the thread is raised here."""

    def __init__(self, name: str, ahead: int = 1) -> None:
        self.pool = ThreadPoolExecutor(1, thread_name_prefix=name)
        self.ahead = ahead
        self.pending: deque[Future] = deque()

    def put(self, fn, *args) -> None:
        self.pending.append(self.pool.submit(fn, *args))
        while len(self.pending) > self.ahead:
            self.pending.popleft().result()

    def drain(self) -> None:
        while self.pending:
            self.pending.popleft().result()

    def close(self) -> None:
        self.pool.shutdown(wait=True, cancel_futures=True)


def _serial_pass(src: Source, layout: Layout, decimal: str, checker: serial.SerialChecker,
                 progress: Progress, store=None) -> None:
    col_of = layout.column_of
    wanted = [col_of["patient_id"], col_of["collected_at"]]
    if "sample_id" in col_of:
        wanted.append(col_of["sample_id"])
    fields_used = [f for f in checker.fields if f in col_of]
    columns_of = layout.columns_of  # one column per specimen: a row reads the filled one
    wanted += [h for f in fields_used for h in columns_of[f]]
    wanted = list(dict.fromkeys(wanted))

    def read(table: pa.Table) -> tuple:
        """One chunk's serial fields, as ``checker.add`` takes them (on a thread)."""
        values = {}
        many = fileio.parse_numeric_many(
            [field_values(table, columns_of[f], layout.missing) for f in fields_used],
            decimal, layout.missing)
        for f, p in zip(fields_used, many):
            spec = BY_NAME[f]
            unit = layout.units.get(f, spec.unit)
            v = p.values * _units.factor(f, spec.kind, unit)
            lo, hi = spec.accepted
            with np.errstate(invalid="ignore"):
                v[(v < lo) | (v > hi)] = np.nan  # refused values take no part
            values[f] = v
        secs, kind = fileio.parse_times(table[col_of["collected_at"]])
        sample = table[col_of["sample_id"]] if "sample_id" in col_of else None
        patient = table[col_of["patient_id"]]
        if store is not None:  # compared, and stored, as keyed hashes only
            patient = store.hash_ids(patient, secs)
        return patient, secs, kind, values, sample

    # Three stages at once: this thread reads the chunks; WORKERS threads read their
    # cells; one thread adds them to the checker in file order (its row numbers) and
    # spills them to the partitions.  The CSV reader, the cell reader, the hashing
    # and the spills let go of the interpreter lock.  At most WORKERS + 1 chunks wait
    # to be read and two to be added: memory stays bounded.
    rows = 0
    reading: deque[Future] = deque()
    pool = ThreadPoolExecutor(WORKERS, thread_name_prefix="acidbase-serial-read")
    adder = _InOrder("acidbase-serial-add")
    try:
        for table in src.chunks(wanted):
            rows += table.num_rows
            reading.append(pool.submit(read, table))
            del table
            while len(reading) > WORKERS:
                adder.put(checker.add, *reading.popleft().result())
            progress.update(rows)
        while reading:
            adder.put(checker.add, *reading.popleft().result())
        adder.drain()
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
        adder.close()
    if store is not None:
        history.feed_earlier(store, checker)
    checker.finish(workers=WORKERS)


def _audit(args: argparse.Namespace) -> dict[str, object]:
    """The settings of a run that its history-store audit record keeps (no paths)."""
    names = ("unit", "missing", "window_hours", "delta", "anion_gap_interval",
             "anion_gap_with_k", "reference_albumin", "history_retention_days", "chunk_rows")
    return {k: getattr(args, k) for k in names if hasattr(args, k)}


#: glibc heap settings of a batch run (``_lean_allocators``).
_KEEP_FREED = 64 << 20
_GROW_BY = 16 << 20
_MAP_ABOVE = 32 << 20


def _lean_allocators() -> None:
    """Allocator settings that keep the peak memory of a run down.

    * glibc gives each new thread an arena of its own, and every arena keeps the
      memory freed in it: capped at two (measured on a 1M-row file with serial
      checks: 298 MB peak with the default, 260 MB with two arenas).
    * pyarrow's jemalloc pool returns freed memory sooner than its default pool
      (5M-row file, serial checks: 304 MB peak with the default, 257 MB with
      jemalloc), unless ``ARROW_DEFAULT_MEMORY_POOL`` chooses a pool.
    * glibc hands a freed block back to the system as soon as 128 KiB are free at the
      top of a heap, and maps every block of 128 KiB or more on its own, so a run of
      chunks took fresh pages from the system for each chunk's arrays (each one a page
      fault, zeroed by the kernel; costly on a virtual machine): the heap keeps up to
      ``_KEEP_FREED`` at its top, grows ``_GROW_BY`` at a time, and blocks below
      ``_MAP_ABOVE`` come from the heap (mallopt(3): M_TRIM_THRESHOLD, M_TOP_PAD,
      M_MMAP_THRESHOLD).  Not where the user has set glibc's malloc in the
      environment (``MALLOC_*_``, ``GLIBC_TUNABLES``).  Measured in docs/performance.md
      ("Session 9").
    Both at the same speed within the noise; each a no-op where unavailable.  The
    batch command owns its process, so the settings are its own.
    """
    try:
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt(ctypes.c_int(-8), ctypes.c_int(2))  # M_ARENA_MAX
        if not any(k.startswith("MALLOC_") or k == "GLIBC_TUNABLES" for k in os.environ):
            libc.mallopt(ctypes.c_int(-1), ctypes.c_int(_KEEP_FREED))  # M_TRIM_THRESHOLD
            libc.mallopt(ctypes.c_int(-2), ctypes.c_int(_GROW_BY))  # M_TOP_PAD
            libc.mallopt(ctypes.c_int(-3), ctypes.c_int(_MAP_ABOVE))  # M_MMAP_THRESHOLD
    except (OSError, AttributeError):
        pass
    if "ARROW_DEFAULT_MEMORY_POOL" not in os.environ:
        try:
            pa.set_memory_pool(pa.jemalloc_memory_pool())
        except (NotImplementedError, pa.ArrowNotImplementedError):
            pass


def _absent_imports_fail_fast() -> None:
    """Make pyarrow's look for an optional module it does not find cost nothing.

    pyarrow imports ``dateutil.relativedelta`` each time it converts a Python value
    (a text or a number handed to a compute function), to recognise that type; where
    dateutil is not installed (it comes with pandas), each attempt searches the import
    path again: ``pa.scalar("")`` took 33 us here without dateutil and 2.4 us with it,
    and a run with serial checks and a history store makes about 2,300 such attempts
    (docs/performance.md).  The import system's own mark for a module known to be
    absent (``None`` in ``sys.modules``) makes each attempt fail at once.  Set only
    when the module is not installed, so nothing that could import it is changed;
    the batch command owns its process, as with ``_lean_allocators``."""
    import importlib.util

    if "dateutil" not in sys.modules and importlib.util.find_spec("dateutil") is None:
        sys.modules["dateutil"] = None  # type: ignore[assignment]


def _give_back_memory() -> None:
    """Hand the memory the check pass freed back to the system before the history
    store's commit: the allocators keep it for reuse, and the commit, which comes after
    the pass, allocated on top of it (5M-row second day against a store of the first:
    peak 310-320 MB without this, 280-287 MB with it, CPU the same; docs/performance.md).
    Arrow's pool releases what it holds unused; glibc trims its heaps (a no-op where
    unavailable)."""
    pa.default_memory_pool().release_unused()
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):
        pass


def _stage_outputs(args: argparse.Namespace, outputs: OutputSet,
                   site: config.Site | None = None) -> dict[str, Staged]:
    """Guard the output paths, then create their temporary files: before any work, so
    an output that is an input (by any name: the site file and the mapping file it
    names included), two outputs that are one file, or a folder that is missing or
    cannot be written stops the run with nothing done."""
    for opt, path in (("-o", args.output), ("--summary", args.summary),
                      ("--report", args.report)):
        if path is not None and not path.strip():  # '' named the current folder
            raise OutputPathError(opt, repr(path), "names no file")
    named = [(opt, path) for opt, path in (("-o", args.output), ("--summary", args.summary),
                                           ("--report", args.report)) if path and path != "-"]
    mapping = args.mapping or (site.mapping if site else None)
    inputs = [("INPUT", args.input)] + [(o, p) for o, p in (
        ("--map", mapping), ("--history", getattr(args, "history", None)),
        ("--config", site.file if site else None)) if p]
    check_paths([(o, p) for o, p in inputs if p != "-"], named)
    return {opt: outputs.add(opt, path) for opt, path in named}


def _run(args: argparse.Namespace, label: str, outputs: OutputSet, stack: ExitStack,
         outcome: _Outcome) -> int:
    """The run; ``label`` names the input in messages and the report.  Temporary files
    and folders are registered on ``stack`` as they are made; the outputs are
    committed (renamed into place) at the very end, together."""
    _lean_allocators()
    _absent_imports_fail_fast()
    started = audit.now()
    units = _pairs(args.unit, "unit")
    retention_option = args.history_retention_days
    site = config.resolve(args, deltas=_delta_overrides(args.delta))
    if retention_option is not None and site.history_path is None:
        # A retention with no store to prune would be dropped unseen (as --unit for a
        # column that is not there).
        raise BatchInputError("--history-retention-days needs a history store: give "
                              "--history PATH (or a [history] path in the site file)")
    # The history store and its retention: the options, else the site file's [history].
    args.history, args.history_retention_days = site.history_path, site.history_retention_days
    delimiter = _DELIMS.get((args.delimiter or "").lower(), args.delimiter)
    if delimiter is not None and len(delimiter) != 1:
        raise BatchInputError(f"--delimiter {args.delimiter!r}: give one character, or 'tab'")
    given_delim = args.output_delimiter
    if given_delim is None:  # a .tsv name asks for tabs
        given_delim = "\t" if (args.output or "").lower().endswith(".tsv") else ","
    out_delim = _DELIMS.get(given_delim.lower(), given_delim)
    if len(out_delim) != 1:
        raise BatchInputError(f"--output-delimiter {args.output_delimiter!r}: give one character")
    if args.chunk_rows < 1:
        raise BatchInputError("--chunk-rows must be at least 1")
    if not site.window_hours > 0:
        raise BatchInputError("--window-hours must be a positive number")
    if args.report and not args.report.lower().endswith((".md", ".html", ".htm")):
        raise BatchInputError("--report: name a .md or .html file")
    profile = profile_from_args(args)
    settings = site.settings
    fhir_out = args.output_format == "fhir"
    if fhir_out:
        from . import fhir

        fhir.require()
        if args.output and not args.output.lower().endswith((".ndjson", ".jsonl", ".json")):
            raise BatchInputError("--output-format fhir writes one Bundle per line "
                                  "(newline-delimited JSON): name the output .ndjson")
    out_fmt = "jsonl" if fhir_out else fileio.output_format(args.output, args.output_format)
    staged = _stage_outputs(args, outputs, site)
    if hl7.looks_like_hl7(args.input, args.format):
        src = hl7.open_source(args.input, args.encoding, args.chunk_rows)
    else:
        src = fileio.open_source(args.input, args.format, delimiter, args.encoding, args.missing,
                                 args.chunk_rows)
    # The audit record names the bytes read: hashed on a thread of its own while the
    # run goes on (hashlib lets go of the interpreter lock on large blocks).
    hashing = ThreadPoolExecutor(1, thread_name_prefix="acidbase-sha256")
    stack.callback(hashing.shutdown)
    input_hash = hashing.submit(audit.file_sha256, args.input)
    mapping = fileio.read_mapping(site.mapping) if site.mapping else None
    layout = fileio.map_headers(src.headers, mapping, units,
                                args.strict_columns and src.format != hl7.FORMAT,
                                defaults=site.units, repeats=src.repeats)
    layout = dataclasses.replace(layout, missing=src.missing, notes=src.notes + layout.notes,
                                 duplicates=src.duplicates,
                                 row_problems=getattr(src, "row_problems", {}))
    if args.decimal:
        decimal = args.decimal
    elif src.format == "csv":
        numeric_idx = [i for i, h in enumerate(src.headers) if layout.field_of.get(h) in BY_NAME]
        decimal = fileio.detect_decimal(fileio.csv_sample(src), numeric_idx, src.delimiter)
    else:
        decimal = "."
    notes = list(layout.notes) + _swept_notes(outcome.swept)
    left = [p for s in staged.values() for p in stale(s)]
    if left:
        notes.append("temporary files of another run to this output, still running or "
                     "killed before it could clean up (never results): " + ", ".join(left))
    if src.format == "csv" and (src.delimiter != "," or decimal != "."):
        notes.append(f"read with delimiter {fileio._show_delims([src.delimiter])} and decimal "
                     f"{decimal!r}")
    col_of = layout.column_of
    do_serial = not args.no_serial and "patient_id" in col_of and "collected_at" in col_of
    if not args.no_serial and not do_serial:
        notes.append("serial checks not run: they need patient_id and collected_at columns")
    data = staged.get("-o")
    writer = Writer(args.output, out_fmt, out_delim,
                    metadata=lambda: {"caution": CAUTION, "audit": json.dumps(audit.record(
                        site, started, None, input_name=label, input_path=args.input,
                        input_sha256=input_hash.result()))},
                    escape=escaped_columns(src.headers), decimals=profile.decimals,
                    sink=data.file if data else None)
    stack.callback(writer.close, False)  # after a commit, a no-op
    checker = store = None
    if args.history and not do_serial:
        notes.append("history store not used: the serial checks did not run")
    passes = 2 if do_serial else 1
    if do_serial:
        if args.history:
            store = history.open_for_run(args.history, args.history_retention_days
                                         or history.DEFAULT_RETENTION_DAYS)
            stack.callback(store.close)  # without a commit: adds nothing
        # With a store, earlier panels join the partitions: twice as many of them.
        checker = serial.SerialChecker(serial.rules_with(site.deltas), site.window_hours,
                                       serial.SerialChecker.partitions_for(src.size)
                                       * (2 if store else 1), keep=store is not None,
                                       hashed_ids=store is not None,
                                       # the sentences: in the file, or for the report's list
                                       detail_rows=None if profile.serial_text
                                       else FLAGGED_LISTED)
        stack.callback(checker.close)  # its scratch folder goes, whatever happens
        progress = Progress(src.estimated_rows(), not args.quiet)
        progress.label = "serial 1/2"
        try:
            _serial_pass(src, layout, decimal, checker, progress, store)
        finally:
            progress.end()
    tally = Tally()
    progress = Progress(src.estimated_rows(), not args.quiet)
    progress.label = f"check {passes}/{passes}" if passes == 2 else "check"

    def work(table: pa.Table, start: int, listed: int):
        """One chunk, on a worker thread: its output rows encoded for the writer, and
        its counts."""
        out, meta = _process(table, layout, decimal, settings, checker, start, profile.derived,
                             severities=profile.severities, keep_results=fhir_out,
                             wanted=None if fhir_out else profile.keeps)
        names = output_names(src.headers, meta["engine_cols"])
        cols = {ROW_COLUMN: pa.array(np.arange(start + 1, start + table.num_rows + 1))}
        for h in src.headers:
            cols[names[h]] = table[h]
        cols.update(out)
        ids = {k: (table[col_of[k]] if k in col_of else None)  # taken from only if listed
               for k in ("sample_id", "patient_id")}
        part = Tally()
        tally_chunk(part, out, meta["pco2"], meta["hco3"], meta["refused"], meta["review"],
                    start, ids, meta["fired"], listed, meta["counts"], meta["roles"])
        if fhir_out:
            lines = fhir.chunk_bundles(table, layout, decimal, out, meta, site, start,
                                       label, input_hash.result())
            return (fhir.LINE_SCHEMA, lines), part, names, table.num_rows
        plain = frozenset(names[h] for h in meta["plain"])
        # the output profile (acidbase/profile.py): counted above, not all written
        cols = {k: v for k, v in cols.items() if k in names.values() or profile.keeps(k)}
        return writer.encode(pa.table(cols), plain), part, names, table.num_rows

    done = 0

    def finish(result) -> None:
        """The next chunk in file order: counted, then written."""
        nonlocal done
        encoded, part, names, rows = result
        if done == 0:
            clash = [h for h, o in names.items() if o != h]
            if clash:
                notes.append("input columns renamed to keep them apart from output columns: "
                             + ", ".join(f"{h!r} -> {names[h]!r}" for h in clash))
        tally.merge(part)
        done += rows
        out.put(put, encoded, done)
        progress.update(done)

    def put(encoded, rows_after: int) -> None:
        """One chunk's bytes into the output, on the writing thread."""
        writer.put(encoded)
        outcome.rows_out = rows_after

    # Chunks are checked and formatted on WORKERS threads (numpy and pyarrow release
    # the GIL inside each operation), counted here and written on one thread of its
    # own, all in file order.  One chunk more than there are workers is handed over,
    # so that both stay busy while this thread reads the next, and the writing thread
    # takes the copy of the bytes into the system's file cache (most of the output's
    # cost: docs/performance.md) off this one.  Besides the chunk being read, at most
    # WORKERS + 1 chunks are in hand and two being written: memory stays bounded.
    pool = ThreadPoolExecutor(WORKERS, thread_name_prefix="acidbase-batch")
    out = _InOrder("acidbase-write")
    pending: deque[Future] = deque()
    try:
        start = 0
        for table in src.chunks():
            pending.append(pool.submit(work, table, start, FLAGGED_LISTED - len(tally.flagged)))
            start += table.num_rows
            while len(pending) > WORKERS:
                finish(pending.popleft().result())
        while pending:
            finish(pending.popleft().result())
        out.drain()
        if done == 0:
            raise BatchInputError(f"{label}: no rows")
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
        out.close()
        progress.end()
    writer.finish()
    if store is not None:  # only a run whose every row was written is stored
        _give_back_memory()
        # Held: committed below, once every output is in place, so that a run that fails
        # after this (a summary or report that cannot be written) adds nothing either.
        notes.append(history.commit_run(store, checker, args.input, _audit(args),
                                        input_hash.result(), hold=True))
    summary = staged.get("--summary")
    record = audit.record(site, started, input_name=label, input_path=args.input,
                          input_sha256=input_hash.result(),
                          rows={"read": tally.rows, "interpreted": tally.rows - tally.refused,
                                "refused": tally.refused})
    text = summary_json(tally, notes, record) if (args.summary or "").endswith(".json") else \
        summary_text(tally, notes, record)
    if summary is not None:
        summary.file.write((text + "\n").encode("utf-8"))
    if args.report:
        doc = report_html(tally, notes, label, record) if args.report.lower().endswith(
            (".html", ".htm")) else report_markdown(tally, notes, label, record)
        staged["--report"].file.write(doc.encode("utf-8"))
    outputs.commit()  # every output in place, or (on an error above) none
    if store is not None:
        outcome.store = args.history
        store.finish()
        outcome.store = None
    if summary is None:
        print(text, file=sys.stderr)
    return EXIT_OK


STDIN_LABEL = "standard input"


def _swept_notes(swept: scratch.Swept) -> list[str]:
    """The run's notes on the scratch folders of killed runs it found at its start."""
    notes = []
    if swept.removed:
        n = swept.removed
        notes.append(f"removed {n} temporary folder{'s' * (n != 1)} left by earlier runs that "
                     "were killed before they could clean up (they held panel data)")
    if swept.stuck:
        notes.append("could not remove temporary folders left by runs that were killed "
                     "(they hold panel data; delete them): " + ", ".join(swept.stuck))
    return notes


def _spool_stdin(folder: str) -> str:
    """Standard input copied to a file in ``folder`` (the serial checks read the input
    twice, and format and dialect are sniffed from its start); its path."""
    if sys.stdin is None:
        raise BatchInputError("standard input is closed; name an INPUT file")
    path = os.path.join(folder, "stdin")
    with open(path, "wb") as f:
        shutil.copyfileobj(sys.stdin.buffer, f, 1 << 20)
    return path


#: Exit status of an unexpected error (a defect): EX_SOFTWARE of BSD's sysexits.h.
EXIT_DEFECT = 70

#: Exit status when standard output was closed by its reader (``| head``): 128 + SIGPIPE,
#: as a shell reports a process ended by that signal.
EXIT_CLOSED_PIPE = 141


@dataclass
class _Outcome:
    """What a run had done when it ended (for the message of a run that did not finish)."""

    rows_out: int = 0
    """Rows put to the output (a file's are staged until the commit)."""
    outputs: OutputSet | None = None
    swept: scratch.Swept = field(default_factory=scratch.Swept)
    """The scratch folders of killed runs this run removed at its start."""
    store: str | None = None
    """The history store whose commit was under way after every output was in place
    (None once it is committed): a failure or stop then left it as it was."""

    @property
    def committed(self) -> bool:
        return self.outputs is not None and self.outputs.committed


def _kept(args: argparse.Namespace, outcome: _Outcome) -> str:
    """What a run that did not finish leaves: its files were never renamed into place;
    standard output may hold some rows."""
    files = list(dict.fromkeys(p for p in (args.output, args.summary, args.report)
                               if p and p.strip() and p != "-"))
    said = []
    if files:
        said.append(f"nothing written, {', '.join(files)} left as "
                    + ("it was" if len(files) == 1 else "they were"))
    if (not args.output or args.output == "-") and outcome.rows_out:
        said.append(f"standard output is incomplete: {outcome.rows_out:,} rows went out "
                    "before the stop")
    return "; ".join(said) or "nothing written"


def run(args: argparse.Namespace) -> int:
    """Run ``acidbase batch``: 0 when every row was written; 2 when it could not run or
    failed (message on stderr, no output file written); 130 (Ctrl-C), 143 (SIGTERM),
    129 (SIGHUP) when stopped; 141 when standard output was closed by its reader; 70
    for an unexpected error (a defect), also with nothing written.

    INPUT ``-`` reads standard input, spooled to a temporary file first."""
    shown = args.input
    outcome = _Outcome()
    message = ""
    try:
        with stop_on_signals(), ExitStack() as stack:
            outputs = outcome.outputs = stack.enter_context(OutputSet())
            # Before this run makes its own: the scratch folders of runs that were killed.
            outcome.swept = scratch.sweep(scratch.PREFIXES)
            if args.input == "-":
                spool = stack.enter_context(scratch.ScratchFolder(scratch.STDIN))
                args.input = _spool_stdin(spool)
            return _run(args, STDIN_LABEL if shown == "-" else args.input, outputs, stack,
                        outcome)
    except (Stopped, KeyboardInterrupt) as e:
        stop = e if isinstance(e, Stopped) else Stopped(2)
        args.input = shown
        if outcome.committed:  # the signal came as the last output was renamed
            print(f"acidbase batch: stopped by {stop.name} after every output was written "
                  f"in full{_store_left(outcome)}", file=sys.stderr)
        else:
            print(f"acidbase batch: stopped by {stop.name} before the end: "
                  f"{_kept(args, outcome)}", file=sys.stderr)
        return stop.exit_status
    except BrokenPipeError:
        silence_stdout()
        args.input = shown
        print(f"acidbase batch: standard output was closed by its reader after "
              f"{outcome.rows_out:,} rows: the output is incomplete", file=sys.stderr)
        return EXIT_CLOSED_PIPE
    except AcidBaseError as e:  # BatchInputError, and the library's own (settings, units)
        message = str(e)
    except OSError as e:
        where = f"{e.filename}: " if getattr(e, "filename", None) else ""  # as the others'
        message = f"{where}{e.strerror or e}"
    except (pa.ArrowInvalid, pa.ArrowTypeError, UnicodeDecodeError) as e:
        message = f"the file could not be read ({e})"
    except Exception as e:  # noqa: BLE001 - a defect: one line, still nothing written
        if outcome.committed:  # (in the clean-up, after every output was in place)
            return _after_commit(f"unexpected {type(e).__name__}: {e} (a defect of acidbase; "
                                 "please report it with the command line)")
        args.input = shown
        print(f"acidbase batch: failed: unexpected {type(e).__name__}: {e} (a defect of "
              f"acidbase; please report it with the command line); {_kept(args, outcome)}",
              file=sys.stderr)
        return EXIT_DEFECT
    if shown == "-":
        message = message.replace(args.input, STDIN_LABEL)
        args.input = shown
    if outcome.committed:
        if outcome.store:  # every output whole, but the run's panels not stored
            print(f"acidbase batch: every output was written in full{_store_left(outcome)}: "
                  f"{message}", file=sys.stderr)
            return EXIT_CANNOT_RUN
        return _after_commit(message)
    print(f"acidbase batch: could not run: {message}; {_kept(args, outcome)}", file=sys.stderr)
    return EXIT_CANNOT_RUN


def _store_left(outcome: _Outcome) -> str:
    """What a failure or a stop after the outputs' commit left of the history store."""
    if not outcome.store:
        return ""
    return (f"; the history store {outcome.store} was left as it was: this run's panels "
            "were not added (the summary's line on the store says what would have been)")


def _after_commit(message: str) -> int:
    """An error in the clean-up after every output was renamed into place: the outputs
    are whole, so the run says so (and ends with 0, as a run whose every row was
    written); what the clean-up left is named, and the next run removes the scratch
    folders of this one (``files.scratch``)."""
    print(f"acidbase batch: every output was written in full; then the clean-up failed: "
          f"{message} (temporary files may be left; the next run removes its scratch "
          "folders)", file=sys.stderr)
    return EXIT_OK


__all__ = ["run", "plane_picture"]
