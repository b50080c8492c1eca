"""Panel files in and out: formats, headers, the values laboratory systems export.

Reading is columnar (pyarrow) and chunked, so a file larger than memory streams
through; no row is parsed by a Python loop on the CSV path.

* Formats: CSV (delimiter detected among ``, ; TAB |`` or given; decimal comma
  detected or given; UTF-8 with or without a byte-order mark, or another
  encoding by option), JSON Lines, Parquet.
* Headers: our field names, LOINC codes (``acidbase.loinc``), or a laboratory's
  own headers through a mapping file (CSV with columns ``header,field[,unit]``).
  A unit may follow a header in parentheses, ``pCO2 (kPa)``.
* Values: a number, optionally preceded by a comparator (``<5``, ``>=180``:
  censored, below or above a reporting limit) and optionally followed by a
  laboratory flag from HL7 v2 table 0078 (``L H LL HH A AA N``, and ``*``)
  [hl7_0078]; comparators as FHIR ``Quantity.comparator`` [fhir_quantity].
  Anything else is "not a number" and refuses its row; nothing is guessed
  (``1,234`` is not read as a thousand, ``NA`` is not read as missing unless
  declared with ``--missing``).
* Writing (formats, formula escaping) is ``acidbase.files.writer``; its names are
  re-exported here.
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv
import pyarrow.parquet as pq

from . import loinc
from . import units as _units
from .errors import AcidBaseError, UnitError
from .fields import BY_NAME, REQUIRED, TEXT_FIELDS
from .files.writer import (  # re-exported: the writing half lives in acidbase.files
    Writer,
    escape_danger,
    escape_formula,
    escape_text,
    fixed_columns,
    format_fixed,
    jsonl_bytes,
    output_format,
)
from .model import choice_code

#: Fields that are text, read as given: choices and identifiers.
CHOICE_FIELDS: tuple[str, ...] = ("sample_type", "hco3_source")
ALL_FIELDS: tuple[str, ...] = tuple(BY_NAME) + CHOICE_FIELDS + TEXT_FIELDS

DELIMITERS: tuple[str, ...] = (",", ";", "\t", "|")
FORMATS: tuple[str, ...] = ("csv", "jsonl", "parquet")

#: HL7 v2 table 0078 abnormal flags as they trail values in exports (L, H, LL, HH,
#: A, AA, N), plus ``*``, which several laboratory exports print for "abnormal"
#: (common laboratory practice, no source).
LAB_FLAGS: tuple[str, ...] = ("LL", "HH", "AA", "L", "H", "A", "N", "*")

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_VALUE = (
    r"^\s*(?P<cmp><=|>=|<|>)?\s*(?P<num>" + _NUMBER + r")\s*(?P<flag>"
    + "|".join(re.escape(f) for f in LAB_FLAGS) + r")?\s*$"
)


class BatchInputError(ValueError, AcidBaseError):
    """The file cannot be read as panels at all (the run cannot start)."""

    def __init__(self, message: str) -> None:
        super().__init__(message)
        self.message = message

    def __str__(self) -> str:
        return self.message


# ---------------------------------------------------------------------------
# Formats and CSV dialects


def detect_format(path: str | os.PathLike[str], given: str | None = None) -> str:
    """``csv``, ``jsonl`` or ``parquet``: as given, else from the name, else the bytes."""
    if given:
        if given not in FORMATS:
            raise BatchInputError(f"format {given!r} is not one of {', '.join(FORMATS)}")
        return given
    suffix = Path(path).suffix.lower()
    if suffix in (".csv", ".tsv", ".txt"):
        return "csv"
    if suffix in (".jsonl", ".ndjson", ".json"):
        return "jsonl"
    if suffix in (".parquet", ".pq"):
        return "parquet"
    with open(path, "rb") as f:
        head = f.read(4)
    if head == b"PAR1":
        return "parquet"
    if head.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"{"):
        return "jsonl"
    return "csv"


@dataclass(frozen=True)
class Dialect:
    delimiter: str
    headers: tuple[str, ...]
    sample: tuple[tuple[str, ...], ...]
    """The first data rows (for decimal detection)."""
    multiline: bool = False
    """A quoted cell of the first rows holds a line break (slower parsing needed)."""


def _read_text_sample(path: str | os.PathLike[str], encoding: str, size: int = 1 << 16) -> str:
    with open(path, "rb") as f:
        raw = f.read(size)
    if not raw.strip():
        raise BatchInputError(f"{path}: the file is empty")
    codec = "utf-8-sig" if encoding.lower().replace("_", "-") in ("utf-8", "utf8") else encoding
    try:
        text = raw.decode(codec)
    except UnicodeDecodeError as e:
        if len(raw) == size and e.start >= len(raw) - 4:  # cut by the sample boundary
            text = raw[: e.start].decode(codec)
        else:
            raise BatchInputError(
                f"{path}: byte 0x{raw[e.start]:02x} at position {e.start} is not {encoding}; "
                "save the file as UTF-8 or give --encoding (for example cp1252)") from None
    except LookupError:
        raise BatchInputError(f"encoding {encoding!r} is not known") from None
    return text


def sniff_csv(path: str | os.PathLike[str], delimiter: str | None = None,
              encoding: str = "utf-8") -> Dialect:
    """The delimiter (given, or the one that splits the first rows evenly) and headers."""
    text = _read_text_sample(path, encoding)
    cut = len(text.encode("utf-8", "replace")) >= (1 << 16) - 4
    candidates = (delimiter,) if delimiter else DELIMITERS
    # The delimiter that gives the header at least two columns and most rows the
    # header's width (a ragged line is reported later, by the reader, with its text).
    best: tuple[float, int, str, list[list[str]]] | None = None
    for d in candidates:
        try:
            rows = [r for r in csv.reader(io.StringIO(text, newline=""), delimiter=d)
                    if any(c.strip() for c in r)]
        except csv.Error:
            continue
        if cut and len(rows) > 1:
            rows = rows[:-1]  # the last row of the sample may be cut
        rows = rows[:50]
        width = len(rows[0]) if rows else 0
        if width < 2:
            continue
        agree = sum(len(r) == width for r in rows) / len(rows)
        if agree >= 0.5 and (best is None or (agree, width) > best[:2]):
            best = (agree, width, d, rows)
    if best is None:
        raise BatchInputError(
            f"{path}: could not tell the delimiter (tried {_show_delims(candidates)}): the "
            "first lines do not split into the same number of columns; give --delimiter")
    _, _, d, rows = best
    headers = tuple(h.strip() for h in rows[0])
    multiline = any("\n" in c or "\r" in c for r in rows for c in r)
    return Dialect(d, headers, tuple(tuple(r) for r in rows[1:]), multiline)


def _show_delims(ds: Sequence[str]) -> str:
    return " ".join({"\t": "TAB"}.get(d, repr(d)) for d in ds)


def detect_decimal(sample: Sequence[Sequence[str]], numeric_columns: Sequence[int],
                   delimiter: str) -> str:
    """"," when the numeric cells of the sample use a decimal comma, else ".".

    Refuses to choose when both appear; the comma is never taken as a
    thousands separator.
    """
    comma = point = 0
    pat_comma = re.compile(r"\d,\d")
    pat_point = re.compile(r"\d\.\d")
    for row in sample:
        for j in numeric_columns:
            if j < len(row):
                cell = row[j]
                comma += bool(pat_comma.search(cell))
                point += bool(pat_point.search(cell))
    if comma and point:
        raise BatchInputError(
            "the numbers in the first rows use both a decimal comma and a decimal point; "
            "give --decimal , or --decimal .")
    if comma and delimiter == ",":
        raise BatchInputError(
            "numbers with a decimal comma in a comma-separated file are ambiguous; "
            "give --decimal ,")
    return "," if comma else "."


# ---------------------------------------------------------------------------
# Headers -> fields


@dataclass(frozen=True)
class Layout:
    """How the columns of one file are read."""

    headers: tuple[str, ...]
    """Every input column, in file order (all are passed through)."""
    field_of: dict[str, str]
    """Input header -> field name, for the columns that are read."""
    units: dict[str, str]
    """Numeric field -> unit label (UCUM), for every numeric field present."""
    notes: tuple[str, ...] = ()
    """Things the user should know (columns passed through unread...)."""

    @property
    def column_of(self) -> dict[str, str]:
        return {f: h for h, f in self.field_of.items()}

    @property
    def unread(self) -> tuple[str, ...]:
        return tuple(h for h in self.headers if h not in self.field_of)


_UNIT_SUFFIX = re.compile(r"^(?P<base>.*?\S)\s*\((?P<unit>[^()]+)\)\s*$")


def split_unit(header: str) -> tuple[str, str | None]:
    """``"pCO2 (kPa)"`` -> ``("pCO2", "kPa")``; no suffix -> ``(header, None)``."""
    m = _UNIT_SUFFIX.match(header)
    if m:
        return m["base"].strip(), m["unit"].strip()
    return header.strip(), None


def _is_unit_of(fld: str, unit: str | None) -> bool:
    """True when ``unit`` is a unit the numeric field accepts ("pH (37C)" is no unit)."""
    spec = BY_NAME.get(fld)
    return spec is not None and unit is not None and _units.normalise(unit) in spec.units


def read_mapping(path: str | os.PathLike[str]) -> dict[str, tuple[str, str | None]]:
    """A mapping file: CSV with columns ``header``, ``field`` and optionally ``unit``."""
    try:
        dialect = sniff_csv(path)
    except BatchInputError as e:
        raise BatchInputError(f"mapping file: {e}") from None
    except OSError as e:
        raise BatchInputError(f"mapping file {path}: {e.strerror}") from None
    cols = [h.lower() for h in dialect.headers]
    if "header" not in cols or "field" not in cols:
        raise BatchInputError(
            f"mapping file {path}: needs columns 'header' and 'field' (and optionally 'unit'); "
            f"found {', '.join(dialect.headers)}")
    with open(path, encoding="utf-8-sig", newline="") as f:
        rows = list(csv.reader(f, delimiter=dialect.delimiter))
    ih, jf = cols.index("header"), cols.index("field")
    ju = cols.index("unit") if "unit" in cols else None
    out: dict[str, tuple[str, str | None]] = {}
    for lineno, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        header = row[ih].strip() if ih < len(row) else ""
        fld = row[jf].strip().lower() if jf < len(row) else ""
        unit = row[ju].strip() if ju is not None and ju < len(row) and row[ju].strip() else None
        if not header or fld not in ALL_FIELDS:
            raise BatchInputError(
                f"mapping file {path} line {lineno}: field {fld!r} is not one of "
                f"{', '.join(ALL_FIELDS)}")
        if header in out:
            raise BatchInputError(f"mapping file {path} line {lineno}: header {header!r} "
                                  "is mapped twice")
        out[header] = (fld, unit)
    return out


def map_headers(headers: Sequence[str], mapping: Mapping[str, tuple[str, str | None]] | None = None,
                units: Mapping[str, str] | None = None, strict: bool = False) -> Layout:
    """Decide which input column feeds which field, and in which unit.

    Precedence for a column: the mapping file, then our field name, then a LOINC
    code.  Precedence for a unit: ``units`` (the ``--unit`` options), the
    mapping file or a header suffix, the unit implied by a LOINC code, the
    field's canonical unit.  Two columns for one field, a unit a field does not
    accept, or a missing required field stop the run (``BatchInputError``).
    """
    mapping = dict(mapping or {})
    given_units = {k.lower(): v for k, v in (units or {}).items()}
    field_of: dict[str, str] = {}
    stated: dict[str, tuple[str, str]] = {}  # field -> (unit, where)
    needs_unit: dict[str, str] = {}
    for h in headers:
        base, suffix = split_unit(h)
        fld = unit = None
        where = ""
        if h in mapping:
            fld, unit = mapping[h]
            where = f"mapping file for column {h!r}"
        elif h.strip().lower() in ALL_FIELDS:
            fld, where = h.strip().lower(), f"header {h!r}"
        elif base.lower() in ALL_FIELDS and _is_unit_of(base.lower(), suffix):
            fld, unit, where = base.lower(), suffix, f"header {h!r}"
        elif (code_field := loinc.field_for(base)) is not None and (
                suffix is None or _is_unit_of(code_field, suffix)):
            fld, where = code_field, f"header {h!r}"
            unit = suffix or loinc.IMPLIED_UNIT.get(base)
            if unit is None and base in loinc.UNIT_REQUIRED:
                needs_unit[code_field] = h
        if fld is None:
            continue
        if fld in field_of.values():
            other = next(k for k, v in field_of.items() if v == fld)
            raise BatchInputError(
                f"columns {other!r} and {h!r} both map to {fld}; keep one, or map one with a "
                "mapping file to another field")
        field_of[h] = fld
        if unit is not None:
            if fld not in BY_NAME:
                raise BatchInputError(f"{where}: {fld} is text and takes no unit")
            stated[fld] = (unit, where)

    present = set(field_of.values())
    for fld in given_units:
        if fld not in BY_NAME:
            raise BatchInputError(f"--unit {fld}=...: {fld!r} is not a numeric field "
                                  f"({', '.join(BY_NAME)})")
        if fld not in present:
            raise BatchInputError(f"--unit {fld}=... given, but no column maps to {fld}")
    resolved: dict[str, str] = {}
    for fld in present & set(BY_NAME):
        spec = BY_NAME[fld]
        if fld in given_units:
            unit = given_units[fld]
            if fld in stated and _units.normalise(stated[fld][0]) != _units.normalise(unit):
                raise BatchInputError(
                    f"{fld}: --unit says {unit!r} but the {stated[fld][1]} says "
                    f"{stated[fld][0]!r}; state one unit")
        elif fld in stated:
            unit = stated[fld][0]
        elif fld in needs_unit:
            raise BatchInputError(
                f"column {needs_unit[fld]!r} ({spec.title}): this LOINC code may be a mass "
                f"concentration; state the unit (--unit {fld}=..., accepted: "
                f"{', '.join(spec.units)})")
        else:
            unit = spec.unit
        try:
            _units.factor(fld, spec.kind, unit)
        except UnitError as e:
            raise BatchInputError(str(e)) from None
        resolved[fld] = _units.normalise(unit)

    missing = [f for f in REQUIRED if f not in present]
    if missing:
        names = ", ".join(f"{BY_NAME[f].title} ({f})" for f in missing)
        raise BatchInputError(
            f"no column for required field(s) {names}; columns found: "
            f"{', '.join(repr(h) for h in headers)}. Name columns with the field names, "
            "LOINC codes, or give a mapping file (--map)")
    unread = [h for h in headers if h not in field_of]
    notes: list[str] = []
    if unread:
        if strict:
            raise BatchInputError(
                f"columns not recognised: {', '.join(repr(h) for h in unread)} "
                "(--strict-columns); map them with --map or drop --strict-columns")
        notes.append("passed through, not read: " + ", ".join(repr(h) for h in unread))
    unused = [h for h in mapping if h not in headers]
    if unused:
        notes.append("mapping file headers not in this file: " + ", ".join(repr(h) for h in unused))
    return Layout(tuple(headers), field_of, resolved, tuple(notes))


# ---------------------------------------------------------------------------
# Sources: chunks of string (or native) columns


class _CountingReader(io.RawIOBase):
    """A binary file that counts the bytes read (for the progress bar)."""

    def __init__(self, f) -> None:
        self._f = f
        self.count = 0

    def readable(self) -> bool:
        return True

    def readinto(self, b) -> int:
        n = self._f.readinto(b)
        self.count += n or 0
        return n

    def close(self) -> None:
        self._f.close()
        super().close()


@dataclass
class Source:
    """An input file opened for chunked reading (each ``chunks`` call rereads it)."""

    path: str
    format: str
    headers: tuple[str, ...]
    delimiter: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    missing: tuple[str, ...] = ()
    multiline: bool = False
    chunk_rows: int = 1 << 18
    size: int = 0
    total_rows: int | None = None
    _progress: list[int] = field(default_factory=lambda: [0])

    @property
    def bytes_read(self) -> int:
        return self._progress[0]

    def estimated_rows(self) -> int:
        """Rows in the file: exact for Parquet, from the first lines' length otherwise."""
        if self.total_rows is not None:
            return self.total_rows
        try:
            with open(self.path, "rb") as f:
                head = f.read(1 << 16)
        except OSError:
            return 1
        lines = max(head.count(b"\n") - 1, 1)
        return max(1, int(self.size / (len(head) / lines)))

    def chunks(self, columns: Sequence[str] | None = None,
               on_progress: Callable[[int], None] | None = None) -> Iterator[pa.Table]:
        """Tables of ``chunk_rows`` rows (the last may be shorter), in file order."""
        cols = list(columns) if columns is not None else list(self.headers)
        if self.format == "csv":
            raw = self._csv_batches(cols, on_progress)
        elif self.format == "parquet":
            raw = self._parquet_batches(cols, on_progress)
        else:
            raw = self._jsonl_batches(cols, on_progress)
        yield from rechunk(raw, self.chunk_rows)

    def _csv_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        block = int(min(max(self.chunk_rows * 96, 1 << 16), CSV_BLOCK_MAX))
        f = _CountingReader(open(self.path, "rb"))
        try:
            reader = pa_csv.open_csv(
                io.BufferedReader(f, 1 << 20),
                read_options=pa_csv.ReadOptions(block_size=block, encoding=self.encoding),
                parse_options=pa_csv.ParseOptions(delimiter=self.delimiter,
                                                  newlines_in_values=self.multiline),
                convert_options=pa_csv.ConvertOptions(
                    column_types={h: pa.string() for h in self.headers},
                    include_columns=cols, strings_can_be_null=True,
                    null_values=[""] + list(self.missing), quoted_strings_can_be_null=True),
            )
            while True:
                try:
                    batch = reader.read_next_batch()
                except StopIteration:
                    break
                except pa.ArrowInvalid as e:
                    raise BatchInputError(f"{self.path}: {_csv_error(str(e))}") from None
                if on_progress:
                    on_progress(f.count)
                yield batch
        except pa.ArrowInvalid as e:
            raise BatchInputError(f"{self.path}: {_csv_error(str(e))}") from None
        finally:
            f.close()

    def _parquet_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        pf = pq.ParquetFile(self.path)
        done = 0
        for batch in pf.iter_batches(batch_size=self.chunk_rows, columns=cols):
            done += batch.num_rows
            if on_progress and self.total_rows:
                on_progress(int(self.size * done / self.total_rows))
            yield batch

    def _jsonl_batches(self, cols: list[str], on_progress) -> Iterator[pa.RecordBatch]:
        # Values may be numbers in one record and text ("<5") in the next, which a
        # typed JSON reader refuses; records are read here and kept as text.
        f = _CountingReader(open(self.path, "rb"))
        try:
            lines = io.TextIOWrapper(io.BufferedReader(f), encoding="utf-8-sig")
            buf: list[dict] = []
            for lineno, line in enumerate(lines, start=1):
                if not line.strip():
                    continue
                buf.append(_json_record(line, lineno, self.path))
                if len(buf) >= self.chunk_rows:
                    yield _records_to_batch(buf, cols, self.missing)
                    buf = []
                    if on_progress:
                        on_progress(f.count)
            if buf:
                yield _records_to_batch(buf, cols, self.missing)
            if on_progress:
                on_progress(f.count)
        finally:
            f.close()


def _csv_error(text: str) -> str:
    text = text.replace("CSV parse error: ", "")
    m = re.search(r"Expected (\d+) columns, got (\d+): (.*)", text, re.S)
    if m:
        return (f"a line has {m[2]} fields where the header has {m[1]}: {m[3].strip()[:120]!r}; "
                "nothing was written (fix the line, or check --delimiter)")
    return text


def _json_record(line: str, lineno: int, path: str) -> dict:
    try:
        rec = json.loads(line)
    except json.JSONDecodeError as e:
        raise BatchInputError(f"{path} line {lineno}: not JSON ({e.msg})") from None
    if not isinstance(rec, dict):
        raise BatchInputError(f"{path} line {lineno}: a JSON Lines record must be an object")
    return rec


def _json_text(v: object) -> str | None:
    if v is None:
        return None
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return v
    return json.dumps(v)


def _records_to_batch(records: list[dict], cols: list[str],
                      missing: tuple[str, ...]) -> pa.RecordBatch:
    arrays = []
    for c in cols:
        vals = [_json_text(r.get(c)) for r in records]
        if missing:
            vals = [None if v in missing else v for v in vals]
        arrays.append(pa.array(vals, type=pa.string()))
    return pa.RecordBatch.from_arrays(arrays, names=cols)


def jsonl_headers(path: str | os.PathLike[str]) -> tuple[str, ...]:
    """Keys of a JSON Lines file, in order of first appearance (one pass)."""
    keys: dict[str, None] = {}
    with open(path, encoding="utf-8-sig") as f:
        for lineno, line in enumerate(f, start=1):
            if line.strip():
                for k in _json_record(line, lineno, str(path)):
                    keys.setdefault(k, None)
    if not keys:
        raise BatchInputError(f"{path}: no records")
    return tuple(keys)


#: Largest block the CSV reader parses at once.  The reader's memory grows with its
#: block (about 40 MB more at 1.5 MB than at 768 KB, reading the benchmark file),
#: while larger chunks need only more blocks, which ``rechunk`` joins.
CSV_BLOCK_MAX = 768 << 10


def rechunk(batches: Iterator[pa.RecordBatch], rows: int) -> Iterator[pa.Table]:
    """Regroup batches into tables of exactly ``rows`` rows (the last may be shorter)."""
    pending: list[pa.RecordBatch] = []
    have = 0
    for b in batches:
        if b.num_rows == 0:
            continue
        pending.append(b)
        have += b.num_rows
        while have >= rows:
            t = pa.Table.from_batches(pending)
            yield t.slice(0, rows)
            rest = t.slice(rows)
            pending = rest.to_batches()
            have = rest.num_rows
    if have:
        yield pa.Table.from_batches(pending)


def open_source(path: str | os.PathLike[str], fmt: str | None = None, delimiter: str | None = None,
                encoding: str = "utf-8", missing: Sequence[str] = (),
                chunk_rows: int = 1 << 18) -> Source:
    """Open INPUT: format, delimiter and headers (decimal is set after mapping)."""
    p = str(path)
    if not os.path.isfile(p):
        raise BatchInputError(f"{p}: no such file")
    fmt = detect_format(p, fmt)
    size = os.path.getsize(p)
    if fmt == "csv":
        d = sniff_csv(p, delimiter, encoding)
        src = Source(p, fmt, d.headers, d.delimiter, encoding=encoding, multiline=d.multiline)
        src._sample = d.sample  # type: ignore[attr-defined]
    elif fmt == "parquet":
        try:
            pf = pq.ParquetFile(p)
        except (pa.ArrowInvalid, OSError) as e:
            raise BatchInputError(f"{p}: not a readable Parquet file ({e})") from None
        src = Source(p, fmt, tuple(pf.schema_arrow.names), total_rows=pf.metadata.num_rows)
    else:
        src = Source(p, fmt, jsonl_headers(p))
    src.size = size
    src.missing = tuple(missing)
    src.chunk_rows = max(1, int(chunk_rows))
    return src


def csv_sample(src: Source) -> tuple[tuple[str, ...], ...]:
    return getattr(src, "_sample", ())


# ---------------------------------------------------------------------------
# Values


@dataclass
class ParsedColumn:
    """One numeric column read from text."""

    values: np.ndarray
    """float64; NaN where empty, censored or not a number."""
    comparator: pa.Array | None
    """Per row "<", ">", "<=", ">=" or null; None when the column has none."""
    flag: pa.Array | None
    """Per row laboratory flag or null; None when the column has none."""
    bad: np.ndarray
    """Rows whose cell is not a number (the row is refused)."""
    text: pa.Array
    """The cells as text (for messages)."""
    plain: bool = False
    """Every cell is empty or a bare number (read by one cast of the raw text): formula
    escaping would change none of them."""

    @property
    def censored(self) -> np.ndarray:
        if self.comparator is None:
            return np.zeros(len(self.values), dtype=bool)
        return _mask(pc.is_valid(self.comparator))


def _mask(arr: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """A boolean numpy mask from an arrow boolean array (nulls are False)."""
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    return np.asarray(pc.fill_null(arr, False).to_numpy(zero_copy_only=False), dtype=bool)


def _floats(arr: pa.Array) -> np.ndarray:
    return np.asarray(pc.cast(arr, pa.float64()).to_numpy(zero_copy_only=False), dtype=np.float64)


def _text_floats(arr: pa.Array) -> np.ndarray:
    """Text cells cast to floats in one go; ``ArrowInvalid`` unless every cell is a
    plain number.  Arrow's cast also reads the words "nan", "inf" and "infinity",
    which are not laboratory values: a cell that gave a non-finite number counts as
    not plain, so it goes through the value pattern and is refused."""
    vals = _floats(arr)
    if not np.isfinite(vals).all() and (~np.isfinite(vals) & _mask(pc.is_valid(arr))).any():
        raise pa.ArrowInvalid("a cell is not a plain number")
    return vals


def parse_numeric(column: pa.Array | pa.ChunkedArray, decimal: str = ".") -> ParsedColumn:
    """Read a column of laboratory values (see the module docstring)."""
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    n = len(column)
    t = column.type
    if pa.types.is_floating(t) or pa.types.is_integer(t) or pa.types.is_decimal(t):
        vals = _floats(column)
        vals = np.where(np.isnan(vals), np.nan, vals)
        return ParsedColumn(vals, None, None, np.zeros(n, dtype=bool), pc.cast(column, pa.string()),
                            plain=True)
    if pa.types.is_null(t):
        return ParsedColumn(np.full(n, np.nan), None, None, np.zeros(n, dtype=bool),
                            pa.nulls(n, pa.string()), plain=True)
    if not (pa.types.is_string(t) or pa.types.is_large_string(t)):
        text = pc.cast(column, pa.string()) if not pa.types.is_boolean(t) else \
            pc.if_else(column, "true", "false")
        bad = _mask(pc.is_valid(column))
        return ParsedColumn(np.full(n, np.nan), None, None, bad, text)
    if decimal == "." and pa.types.is_string(t):
        return parse_numeric_many([column])[0]
    if decimal == ".":
        try:  # the common case: every cell a plain number, no spaces
            return ParsedColumn(_text_floats(column), None, None, np.zeros(n, dtype=bool),
                                column, plain=True)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            pass
    return _parse_cells(column, decimal)


def parse_numeric_many(columns: Sequence[pa.Array | pa.ChunkedArray],
                       decimal: str = ".") -> list[ParsedColumn]:
    """``parse_numeric`` of several columns (a chunk's), the same result for each.

    With a decimal point, cells of digits and points only are cast a column at a
    time; the few others (flags, comparators, signs, spaces, text) of all the
    columns go through the full pattern together, since each pattern call has a
    fixed cost (about half a millisecond) that a per-column call would pay again.
    """
    out: list[ParsedColumn | None] = [None] * len(columns)
    pending: list[tuple[int, pa.Array, np.ndarray, np.ndarray]] = []
    for i, column in enumerate(columns):
        if isinstance(column, pa.ChunkedArray):
            column = column.combine_chunks()
        if decimal != "." or not pa.types.is_string(column.type):
            out[i] = parse_numeric(column, decimal)
            continue
        n = len(column)
        try:  # the common case: every cell a plain number, no spaces
            out[i] = ParsedColumn(_text_floats(column), None, None, np.zeros(n, dtype=bool),
                                  column, plain=True)
            continue
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            pass
        quick = _mask(pc.and_(pc.equal(pc.ascii_trim(column, characters="0123456789."), ""),
                              pc.not_equal(column, "")))
        try:
            vals = _floats(pc.if_else(pa.array(quick), column, pa.scalar(None, pa.string())))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):  # "1.2.3" passed the test
            out[i] = _parse_cells(column, decimal)
            continue
        rest = np.flatnonzero(_mask(pc.is_valid(column)) & ~quick)
        if rest.size == 0:
            out[i] = ParsedColumn(vals, None, None, np.zeros(n, dtype=bool), column, plain=True)
        else:
            pending.append((i, column, vals, rest))
    if pending:
        sub = _parse_cells(pa.concat_arrays([c.take(pa.array(r)) for _, c, _, r in pending]), ".")
        pos = 0
        for i, column, vals, rest in pending:
            n, k = len(column), rest.size
            vals[rest] = sub.values[pos:pos + k]
            bad = np.zeros(n, dtype=bool)
            bad[rest] = sub.bad[pos:pos + k]
            where = np.full(n, -1, dtype=np.int64)
            where[rest] = np.arange(pos, pos + k)
            index = pa.array(where, mask=where < 0)
            spread = []
            for part in (sub.comparator, sub.flag):
                has = part is not None and pc.any(pc.is_valid(part.slice(pos, k))).as_py()
                spread.append(pc.take(part, index) if has else None)
            out[i] = ParsedColumn(vals, spread[0], spread[1], bad, column)
            pos += k
    return out  # type: ignore[return-value]


def _parse_cells(column: pa.Array, decimal: str) -> ParsedColumn:
    """Every cell of a text column through the full pattern (see the module docstring)."""
    n = len(column)
    text = column
    work = pc.utf8_trim_whitespace(column)
    work = pc.if_else(pc.equal(work, ""), pa.scalar(None, pa.string()), work)
    foreign = None
    if decimal == ",":
        # With a decimal comma a point can only be a thousands separator: not read.
        foreign = _mask(pc.match_substring(work, "."))
        work = pc.replace_substring(work, ",", ".")
    if foreign is None or not foreign.any():
        try:  # the common case: every cell a plain number
            return ParsedColumn(_text_floats(work), None, None, np.zeros(n, dtype=bool), text)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            pass
    # Only the cells that are not plain numbers go through the full pattern (the
    # extracting regular expression costs about ten times the matching one).
    present = _mask(pc.is_valid(work))
    # The anchored matching pattern costs about 40 ns a cell (measured on an idle
    # minute; three substring replacements and a digit test cost three times that).
    plain = _mask(pc.match_substring_regex(work, "^" + _NUMBER + "$"))
    if foreign is not None:
        plain &= ~foreign
    vals = _floats(pc.if_else(pa.array(plain), work, pa.scalar(None, pa.string())))
    rest = np.flatnonzero(present & ~plain)
    bad = np.zeros(n, dtype=bool)
    cmp = flag = None
    if rest.size:
        parts = pc.extract_regex(work.take(pa.array(rest)), _VALUE)
        matched = _mask(pc.is_valid(parts))
        bad[rest[~matched]] = True
        if foreign is not None:
            bad |= foreign
        num = pc.struct_field(parts, "num")
        sub_vals = _floats(pc.if_else(pc.equal(num, ""), pa.scalar(None, pa.string()), num))
        sub_cmp = pc.struct_field(parts, "cmp")
        sub_flag = pc.struct_field(parts, "flag")
        censored = _mask(pc.not_equal(sub_cmp, ""))
        vals[rest] = np.where(censored | ~matched, np.nan, sub_vals)
        where = np.full(n, -1, dtype=np.int64)
        where[rest] = np.arange(rest.size)
        index = pa.array(where, mask=where < 0)
        if censored.any():
            cmp = pc.take(pc.if_else(pc.equal(sub_cmp, ""), pa.scalar(None, pa.string()),
                                     sub_cmp), index)
        if _mask(pc.not_equal(sub_flag, "")).any():
            flag = pc.take(pc.if_else(pc.equal(sub_flag, ""), pa.scalar(None, pa.string()),
                                      sub_flag), index)
    return ParsedColumn(vals, cmp, flag, bad, text)


def parse_text(column: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """A text column as an object array (None where empty), whitespace trimmed."""
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        column = pc.cast(column, pa.string())
    work = pc.utf8_trim_whitespace(column)
    work = pc.if_else(pc.equal(work, ""), pa.scalar(None, pa.string()), work)
    return np.asarray(work.to_numpy(zero_copy_only=False), dtype=object)


def parse_choice(column: pa.Array | pa.ChunkedArray, allowed: Sequence[str],
                 default: str) -> tuple[np.ndarray, np.ndarray, pa.Array, bool]:
    """A choice column as integer codes into ``allowed`` (the kernel's encoding).

    Returns ``(codes, bad, text, plain)``: int8 codes (empty cells take ``default``),
    a mask of cells that are none of ``allowed`` (they get ``default`` and refuse the
    row), the cells as text for messages, and whether no distinct text is one that
    formula escaping would change.  Each distinct cell text is read once, by
    the library's own rule (``acidbase.model.choice_code``: case and surrounding
    spaces ignored, "none" and "nan" empty), so a file and ``check`` agree.
    """
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    text = column if pa.types.is_string(column.type) else pc.cast(column, pa.string())
    encoded = pc.dictionary_encode(text)
    default_code = list(allowed).index(default)
    pairs = [choice_code(v, tuple(allowed), default_code) for v in encoded.dictionary.to_pylist()]
    lookup = np.array([c for c, _ in pairs] + [default_code], dtype=np.int8)
    refused = np.array([b for _, b in pairs] + [False], dtype=bool)
    idx = np.asarray(pc.fill_null(encoded.indices, len(pairs)).to_numpy(zero_copy_only=False))
    plain = not pc.any(pc.is_valid(escape_danger(encoded.dictionary))).as_py()
    return lookup[idx], refused[idx], text, plain


_ISO = (r"^(?P<date>\d{4}-\d{2}-\d{2})[T ](?P<hm>\d{2}:\d{2})(?::(?P<s>\d{2})(?:[.,]\d+)?)?"
        r"(?P<zone>Z|[+-]\d{2}:?\d{2})?$")

#: Kinds of collection time, per row.
TIME_MISSING, TIME_NAIVE, TIME_ZONED, TIME_INVALID = 0, 1, 2, 3


def parse_times(column: pa.Array | pa.ChunkedArray) -> tuple[np.ndarray, np.ndarray]:
    """ISO 8601 date-times -> (seconds since 1970 as int64, kind per row).

    A time with an offset (``Z``, ``+01:00``) is converted to UTC; a time without
    one is read as written (wall clock).  A date without a time of day, or text
    that is not an ISO 8601 date-time, is ``TIME_INVALID``; invalid calendar
    dates (30 February) are invalid, not rolled over.
    """
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    n = len(column)
    if pa.types.is_timestamp(column.type):
        zoned = column.type.tz is not None
        secs = pc.cast(pc.cast(column, pa.timestamp("s", tz=column.type.tz)), pa.int64())
        valid = _mask(pc.is_valid(secs))
        out = np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
        kind = np.where(valid, TIME_ZONED if zoned else TIME_NAIVE, TIME_MISSING).astype(np.int8)
        return out, kind
    text = pc.cast(column, pa.string())
    fast = _times_fast(text)
    if fast is not None:
        return fast
    text = pc.utf8_trim_whitespace(text)
    present = _mask(pc.and_(pc.is_valid(text), pc.not_equal(text, "")))
    parts = pc.extract_regex(text, _ISO)
    matched = _mask(pc.is_valid(parts))
    date = pc.struct_field(parts, "date")
    hm = pc.struct_field(parts, "hm")
    s = pc.struct_field(parts, "s")
    s = pc.if_else(pc.equal(s, ""), "00", s)
    zone = pc.replace_substring(pc.struct_field(parts, "zone"), ":", "")
    zone = pc.if_else(pc.equal(zone, "Z"), "+0000", zone)
    zoned = matched & _mask(pc.not_equal(zone, ""))
    stamp = pc.binary_join_element_wise(date, "T", hm, ":", s, "")
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    for mask, fmt, arr in ((zoned, "%Y-%m-%dT%H:%M:%S%z",
                            pc.binary_join_element_wise(stamp, zone, "")),
                           (matched & ~zoned, "%Y-%m-%dT%H:%M:%S", stamp)):
        if not mask.any():
            continue
        ts = pc.strptime(arr, format=fmt, unit="s", error_is_null=True)
        secs = pc.cast(ts, pa.int64())
        # strptime rolls 30 February over to March: compare the date back.
        if fmt.endswith("%z"):
            local = pc.add(secs, _zone_seconds(zone))
            back = pc.strftime(pc.cast(local, pa.timestamp("s")), format="%Y-%m-%d")
        else:
            back = pc.strftime(ts, format="%Y-%m-%d")
        good = _mask(pc.and_(pc.is_valid(secs), pc.equal(back, date))) & mask
        out = np.where(good, np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False),
                                        dtype=np.int64), out)
        ok |= good
    kind = np.full(n, TIME_MISSING, dtype=np.int8)
    kind[present] = TIME_INVALID
    kind[ok & ~zoned] = TIME_NAIVE
    kind[ok & zoned] = TIME_ZONED
    return out, kind


def _times_fast(text: pa.Array) -> tuple[np.ndarray, np.ndarray] | None:
    """The common cases in one cast: every time with an offset, or every time without.

    Arrow's ISO 8601 cast checks the calendar (30 February fails), so only the
    rule "a date alone is no time" needs its own test; anything else, or any
    failing cell, goes the slow way with its own verdict per cell.
    """
    n = len(text)
    if text.null_count == n:
        return None
    valid = _mask(pc.is_valid(text))
    for typ, kind_code in ((pa.timestamp("s", tz="UTC"), TIME_ZONED),
                           (pa.timestamp("s"), TIME_NAIVE)):
        if kind_code == TIME_NAIVE and pc.min(pc.utf8_length(text)).as_py() < 16:
            return None  # a date alone, or something shorter than a date-time
        try:
            secs = pc.cast(pc.cast(text, typ), pa.int64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
        out = np.asarray(pc.fill_null(secs, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
        kind = np.where(valid, kind_code, TIME_MISSING).astype(np.int8)
        return out, kind
    return None


def _zone_seconds(zone: pa.Array) -> pa.Array:
    z = pc.if_else(pc.equal(zone, ""), "+0000", zone)
    sign = pc.if_else(pc.starts_with(z, "-"), -1, 1)
    hh = pc.cast(pc.utf8_slice_codeunits(z, 1, 3), pa.int64())
    mm = pc.cast(pc.utf8_slice_codeunits(z, 3, 5), pa.int64())
    return pc.multiply(sign, pc.add(pc.multiply(hh, 3600), pc.multiply(mm, 60)))


__all__ = [
    "ALL_FIELDS", "BatchInputError", "Dialect", "LAB_FLAGS", "Layout", "ParsedColumn", "Source",
    "TIME_INVALID", "TIME_MISSING", "TIME_NAIVE", "TIME_ZONED", "Writer", "csv_sample",
    "detect_decimal", "detect_format", "escape_danger", "escape_formula", "escape_text", "fixed_columns", "format_fixed",
    "jsonl_bytes", "map_headers", "open_source", "output_format", "parse_choice", "parse_numeric",
    "parse_numeric_many", "parse_text", "parse_times", "read_mapping",
    "rechunk",
    "sniff_csv", "split_unit",
]
