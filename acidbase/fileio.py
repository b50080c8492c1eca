"""Panel files out (the writing half), and the names of the reading half.

The reading half moved along the flow: formats and dialects
(``acidbase.files.formats``), headers (``acidbase.files.headers``), chunked
sources (``acidbase.files.source``), collection times (``acidbase.files.times``)
and the one cell reader (``acidbase.inputs``).  Their names are re-exported here
so existing callers keep working.

* CSV output escapes cells a spreadsheet would run as a formula (OWASP, "CSV
  Injection", owasp.org/www-community/attacks/CSV_Injection; OWASP ASVS 1.2.10)
  [owasp_csv]:
  a text cell starting with ``= + - @``, tab, carriage return, line feed or NUL
  gets a leading single quote, unless the whole cell is a plain number, so a
  base excess of ``-5.2`` stays a number.  Quoting follows RFC 4180 (pyarrow's
  writer).
"""

from __future__ import annotations

import functools
import io
import json
import os
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv
import pyarrow.parquet as pq

from .errors import BatchInputError
from .files.formats import (DELIMITERS, FORMATS, Dialect, _show_delims, detect_decimal,  # noqa: F401
                            detect_format, sniff_csv)
from .files.headers import (ALL_FIELDS, CHOICE_FIELDS, Layout, map_headers,  # noqa: F401
                            read_mapping, split_unit)
from .files.source import (CSV_BLOCK_MAX, Source, csv_sample, jsonl_headers,  # noqa: F401
                           open_source, rechunk)
from .files.times import (TIME_INVALID, TIME_MISSING, TIME_NAIVE, TIME_ZONED,  # noqa: F401
                          parse_times)
from .inputs.cells import (LAB_FLAGS, ParsedColumn, _mask, _parse_cells,  # noqa: F401
                           parse_choice, parse_numeric, parse_numeric_many, parse_text)

#: A cell that is a plain number in either decimal convention (escaping exempts it).
_PLAIN_NUMBER = r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$"
_FORMULA_BYTES = pa.array([b"=", b"+", b"-", b"@", b"\t", b"\r", b"\n", b"\x00"])

# ---------------------------------------------------------------------------
# Writers

#: Largest scaled value (value x 10**decimals) ``format_fixed`` formats with integer
#: arithmetic; beyond it (never for a derived value of an accepted panel) a cell is
#: formatted by Python's own ``format``.
_FIXED_LIMIT = 1e15


def _round_scaled(a: np.ndarray, scale: float) -> np.ndarray:
    """``a * scale`` rounded to an integer as the decimal digits of ``a`` say.

    The product in floating point can land exactly on a half (37.45 x 10 gives
    374.5, though the double nearest 37.45 lies just above it); there the exact
    product's rounding error, from Dekker's error-free product [dekker_1971], says
    which way, and only an exact tie is rounded half to
    even, as Python's ``format`` does.  ``scale`` is a small power of ten.
    """
    p = a * scale
    k = np.rint(p)
    tie = (p - np.floor(p)) == 0.5
    if tie.any():
        t = a[tie]
        split = t * 134217729.0  # 2**27 + 1: high half of each value
        hi = split - (split - t)
        err = (hi * scale - p[tie]) + (t - hi) * scale  # exact: product minus p
        base = np.floor(p[tie])
        k[tie] = np.where(err > 0, base + 1.0, np.where(err < 0, base, k[tie]))
    return k


@functools.lru_cache(maxsize=8)
def _nulls(n: int) -> pa.Array:
    """An all-null text column (immutable, so one per length is shared)."""
    return pa.nulls(n, pa.string())


def format_fixed(values: np.ndarray, decimals: int) -> pa.Array:
    """Numbers as text with exactly ``decimals`` decimals (``12.3``), NaN as null.

    The same text as Python's ``format(value, f".{decimals}f")``, except that a
    value that rounds to zero is written without a minus sign.  Vectorised: digits come from
    integer arithmetic on the whole column and are packed straight into an Arrow
    string array, about three times faster than Arrow's own formatting of doubles,
    which writes every value's shortest round-trip form (``17.30000000000001``).
    """
    x = np.asarray(values, dtype=np.float64)
    n = x.shape[0]
    finite = np.isfinite(x)
    count = int(np.count_nonzero(finite))
    if count == 0:
        return _nulls(n)
    v = x[finite] if count < n else x
    scaled = _round_scaled(np.abs(v), 10.0 ** decimals)
    if scaled.max() >= _FIXED_LIMIT:
        texts = [format(c, f".{decimals}f") if np.isfinite(c) else None for c in x.tolist()]
        return pa.array([t[1:] if t and t.startswith("-") and float(t) == 0 else t
                         for t in texts], type=pa.string())
    k = scaled.astype(np.int64)
    neg = (v < 0) & (k > 0)
    width = max(len(str(int(k.max()))), decimals + 1)  # digit columns, right-aligned
    digits = np.full(count, decimals + 1, dtype=np.int8)
    for e in range(decimals + 1, width):
        digits += k >= 10 ** e
    dot = 1 if decimals else 0
    total = 1 + width + dot  # a sign column, the digits, the decimal point
    m = np.empty((count, total), dtype=np.uint8)
    q, col = k, total - 1
    for j in range(width):
        nxt = q // 10
        m[:, col] = q - nxt * 10
        q, col = nxt, col - 1
        if dot and j == decimals - 1:
            col -= 1  # the decimal point's column
    m += ord("0")
    if dot:
        m[:, total - 1 - decimals] = ord(".")
    lengths = digits + np.int8(dot) + neg.view(np.int8)
    first = (total - lengths).astype(np.intp)
    rows = np.flatnonzero(neg)
    m[rows, first[rows]] = ord("-")
    # each row's text is its last ``lengths`` bytes; row-major order packs them
    data = m[np.arange(total, dtype=np.int8)[None, :] >= first[:, None].astype(np.int8)]
    full = lengths.astype(np.int32)
    if count < n:
        full = np.zeros(n, dtype=np.int32)
        full[finite] = lengths
    offsets = np.zeros(n + 1, dtype=np.int32)
    np.cumsum(full, out=offsets[1:])
    if count == n:
        return pa.StringArray.from_buffers(n, pa.py_buffer(offsets), pa.py_buffer(data))
    bitmap = pa.py_buffer(np.packbits(finite, bitorder="little"))
    return pa.StringArray.from_buffers(n, pa.py_buffer(offsets), pa.py_buffer(data), bitmap,
                                       null_count=n - count)


#: At most this many values go through one ``format_fixed`` call: its working
#: arrays take about 70 bytes per finite value, so a call on all of a large chunk's
#: derived values at once set the batch run's peak memory.
FIXED_CALL_VALUES = 1 << 17


def fixed_columns(table: pa.Table, decimals: Mapping[str, int]) -> pa.Table:
    """``table`` with its floating-point columns named in ``decimals`` as fixed text.

    Columns with the same decimals are formatted in ``format_fixed`` calls on
    their values end to end (up to ``FIXED_CALL_VALUES`` values a call), then
    sliced apart (slices share the text buffers): the fixed cost of a call is paid
    once per few columns, not once per column, and its memory stays bounded.
    """
    groups: dict[int, list[str]] = {}
    for name in table.column_names:
        d = decimals.get(name)
        if d is not None and pa.types.is_floating(table.schema.field(name).type):
            groups.setdefault(d, []).append(name)
    if not groups:
        return table
    n = table.num_rows
    text: dict[str, pa.Array] = {}
    per_call = max(1, FIXED_CALL_VALUES // max(n, 1))  # columns per call
    for d, names in groups.items():
        for at in range(0, len(names), per_call):
            batch = names[at:at + per_call]
            values = np.concatenate([
                np.asarray(table[name].combine_chunks().to_numpy(zero_copy_only=False),
                           dtype=np.float64) for name in batch]) if n else np.zeros(0)
            joined = format_fixed(values, d)
            for k, name in enumerate(batch):
                text[name] = joined.slice(k * n, n)
    cols = [text.get(name, col) for name, col in zip(table.column_names, table.columns)]
    fields = [pa.field(name, pa.string()) if name in text else table.schema.field(name)
              for name in table.column_names]
    return pa.table(cols, schema=pa.schema(fields))


def escape_danger(column: pa.Array | pa.ChunkedArray) -> pa.Array:
    """True where a text cell is one a spreadsheet would run as a formula (OWASP); null
    (never true) elsewhere, so ``is_valid`` of the result says "some cell is"."""
    # The first byte decides (all the characters in question are ASCII).
    first = pc.binary_slice(column.cast(pa.binary()), 0, 1)
    starts = pc.is_in(first, value_set=_FORMULA_BYTES)
    if not pc.any(starts).as_py():  # the common case, without a regular expression
        return pa.nulls(len(column), pa.bool_())
    danger = pc.and_(starts, pc.invert(pc.match_substring_regex(column, _PLAIN_NUMBER)))
    return pc.if_else(danger, True, pa.scalar(None, pa.bool_()))


def escape_formula(column: pa.Array | pa.ChunkedArray) -> pa.Array | pa.ChunkedArray:
    """Prefix ``'`` to text cells a spreadsheet would run as a formula (OWASP)."""
    if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        return column
    danger = escape_danger(column)
    if not pc.any(pc.is_valid(danger)).as_py():
        return column
    return pc.if_else(pc.is_valid(danger), pc.binary_join_element_wise("'", column, ""), column)


def output_format(path: str | None, given: str | None) -> str:
    if given:
        if given not in FORMATS:
            raise BatchInputError(f"output format {given!r} is not one of {', '.join(FORMATS)}")
        return given
    if path is None or path == "-":
        return "csv"
    suffix = Path(path).suffix.lower()
    if suffix in (".jsonl", ".ndjson", ".json"):
        return "jsonl"
    if suffix in (".parquet", ".pq"):
        return "parquet"
    return "csv"


def _json_values(col: pa.Array) -> pa.Array | None:
    """Each cell of ``col`` as JSON text (``null`` for nulls and NaN), as ``json.dumps``
    writes it; None for a type this does not handle."""
    t = col.type
    if pa.types.is_null(t):
        return pa.repeat(pa.scalar("null"), len(col))
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        col = col.cast(pa.string())
        body = col
        if pc.any(pc.match_substring_regex(col, r'["\\]')).as_py():
            body = pc.replace_substring(pc.replace_substring(col, "\\", "\\\\"), '"', '\\"')
        control = _mask(pc.match_substring_regex(col, "[\x00-\x1f]"))
        if control.any():  # line breaks, tabs and the like: those cells by json.dumps
            cells = col.take(pa.array(np.flatnonzero(control))).to_pylist()
            body = pc.replace_with_mask(body, pa.array(control), pa.array(
                [json.dumps(c, ensure_ascii=False)[1:-1] for c in cells], type=pa.string()))
        return pc.fill_null(pc.binary_join_element_wise('"', body, '"', ""), "null")
    if pa.types.is_floating(t):
        col = col.cast(pa.float64())
        values = np.asarray(col.to_numpy(zero_copy_only=False), dtype=np.float64)
        if np.isinf(values).any():
            return None  # json.dumps writes Infinity; never in our output, left to it
        text = pc.cast(col, pa.string())
        # Arrow writes 6 and -0 where Python writes 6.0 and -0.0
        bare = pc.invert(pc.match_substring_regex(text, "[.eEn]"))
        text = pc.if_else(bare, pc.binary_join_element_wise(text, ".0", ""), text)
        return pc.fill_null(pc.if_else(pc.is_nan(col), pa.scalar(None, pa.string()), text),
                            "null")
    if pa.types.is_integer(t):
        return pc.fill_null(pc.cast(col, pa.string()), "null")
    if pa.types.is_boolean(t):
        return pc.fill_null(pc.if_else(col, "true", "false"), "null")
    return None


def jsonl_bytes(table: pa.Table) -> bytes:
    """``table`` as JSON Lines, one object per row, the same text as ``json.dumps(row,
    ensure_ascii=False)`` gives (numbers may differ in form, not value: Arrow writes
    0.00001 where Python writes 1e-05).  Built column by column with Arrow's string
    kernels; a table with a column type not handled here (timestamps, lists, ...)
    goes row by row through ``json.dumps`` with ``default=str``."""
    n = table.num_rows
    if n == 0:
        return b""
    parts = []
    for name, col in zip(table.column_names, table.columns):
        col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
        values = _json_values(col)
        if values is None:
            out = io.StringIO()
            for rec in table.to_pylist():
                out.write(json.dumps(rec, ensure_ascii=False, default=str))
                out.write("\n")
            return out.getvalue().encode("utf-8")
        key = json.dumps(name, ensure_ascii=False) + ": "
        parts.append((key, values))
    # the braces ride on the first and last fragments: one join makes the lines
    (k0, v0), (k1, v1) = parts[0], parts[-1]
    if len(parts) == 1:
        parts = [pc.binary_join_element_wise("{" + k0, v0, "}\n", "")]
    else:
        parts = ([pc.binary_join_element_wise("{" + k0, v0, "")]
                 + [pc.binary_join_element_wise(k, v, "") for k, v in parts[1:-1]]
                 + [pc.binary_join_element_wise(k1, v1, "}\n", "")])
    lines = pc.binary_join_element_wise(*parts, ", ") if len(parts) > 1 else parts[0]
    offsets = np.frombuffer(lines.buffers()[1], dtype=np.int32, count=n + 1,
                            offset=lines.offset * 4)
    return lines.buffers()[2][int(offsets[0]):int(offsets[-1])].to_pybytes()


class Writer:
    """Writes output tables in one format; the schema is fixed by the first table.

    A file is written as ``<name>.partial`` and renamed when ``close(ok=True)``,
    so a run that cannot finish leaves no half-written output behind.

    Writing is split in two so the costly half can run on worker threads:
    ``encode`` (formula escaping and formatting CSV or JSON Lines text; safe to
    call from several threads at once) and ``put`` (appending to the file, in
    the order the caller gives).  ``write`` does both.
    """

    def __init__(self, path: str | None, fmt: str, delimiter: str = ",",
                 metadata: Mapping[str, str] | None = None,
                 escape: Sequence[str] | None = None,
                 decimals: Mapping[str, int] | None = None) -> None:
        """``escape``: the CSV columns that can carry text from the input (all when
        None); the others hold only the tool's own vocabulary and numbers.
        ``decimals``: number columns written to CSV with that many decimals (JSON
        Lines and Parquet keep the full doubles, as ``check --json`` does)."""
        self.escape = None if escape is None else frozenset(escape)
        self.decimals = dict(decimals or {})
        if fmt == "parquet" and (path is None or path == "-"):
            raise BatchInputError("Parquet output needs a file: give -o OUTPUT.parquet")
        self.path = path if path not in (None, "-") else None
        self.fmt = fmt
        self.delimiter = delimiter
        self.metadata = dict(metadata or {})
        self._tmp = f"{self.path}.partial" if self.path else None
        self._sink = None
        self._writer = None
        self.schema: pa.Schema | None = None

    def _csv_options(self, header: bool) -> pa_csv.WriteOptions:
        return pa_csv.WriteOptions(include_header=header, delimiter=self.delimiter,
                                   quoting_style="needed")

    def _open(self, schema: pa.Schema) -> None:
        import sys
        if self._tmp:
            self._sink = open(self._tmp, "wb")
        else:
            self._sink = sys.stdout.buffer
        self.schema = schema.with_metadata(self.metadata) if self.metadata else schema
        if self.fmt == "csv":
            pa_csv.write_csv(schema.empty_table(), self._sink, self._csv_options(True))
        elif self.fmt == "parquet":
            self._writer = pq.ParquetWriter(self._sink, self.schema)

    def encode(self, table: pa.Table, plain: frozenset[str] = frozenset()
               ) -> tuple[pa.Schema, bytes | pa.Buffer | pa.Table]:
        """``table`` made ready for ``put``: CSV as Arrow's buffer of its text, JSON Lines
        as bytes, Parquet as is.

        ``plain``: columns of this table the caller has read cell by cell and found
        to hold only numbers or its own vocabulary, so escaping would change nothing.
        """
        if self.fmt == "csv":
            table = fixed_columns(table, self.decimals)
            table = pa.table([escape_formula(c) if (self.escape is None or name in self.escape)
                              and name not in plain else c
                              for name, c in zip(table.column_names, table.columns)],
                             schema=table.schema)
            sink = pa.BufferOutputStream()
            pa_csv.write_csv(table, sink, self._csv_options(False))
            return table.schema, sink.getvalue()  # Arrow's buffer: no copy into bytes
        if self.fmt == "jsonl":
            return table.schema, jsonl_bytes(table)
        return table.schema, table

    def put(self, encoded: tuple[pa.Schema, bytes | pa.Buffer | pa.Table]) -> None:
        """Append one ``encode``d table to the output."""
        schema, payload = encoded
        if self.schema is None:
            self._open(schema)
        elif schema.names != self.schema.names:
            raise BatchInputError("output columns changed between chunks: "
                                  f"{self.schema.names} then {schema.names}")
        if isinstance(payload, pa.Table):
            self._writer.write_table(payload.cast(self.schema.remove_metadata()))
        else:
            self._sink.write(payload)

    def write(self, table: pa.Table) -> None:
        self.put(self.encode(table))

    def close(self, ok: bool = True) -> None:
        if self._writer is not None:
            self._writer.close()
        if self._sink is not None and self._tmp:
            self._sink.close()
        elif self._sink is not None:
            self._sink.flush()
        if self._tmp and os.path.exists(self._tmp):
            if ok:
                os.replace(self._tmp, self.path)
            else:
                os.remove(self._tmp)


__all__ = [
    "ALL_FIELDS", "BatchInputError", "Dialect", "LAB_FLAGS", "Layout", "ParsedColumn", "Source",
    "TIME_INVALID", "TIME_MISSING", "TIME_NAIVE", "TIME_ZONED", "Writer", "csv_sample",
    "detect_decimal", "detect_format", "escape_danger", "escape_formula", "fixed_columns", "format_fixed",
    "map_headers", "open_source", "output_format", "parse_choice", "parse_numeric",
    "parse_numeric_many", "parse_text", "parse_times", "read_mapping",
    "rechunk",
    "sniff_csv", "split_unit",
]
