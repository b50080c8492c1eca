"""Output tables: CSV, JSON Lines and Parquet bytes, numbers in fixed decimals, and
CSV formula escaping.

* CSV output escapes cells a spreadsheet would run as a formula (OWASP, "CSV
  Injection", owasp.org/www-community/attacks/CSV_Injection; OWASP ASVS 1.2.10;
  CWE-1236) [owasp_csv]: a text cell starting with ``= + - @``, tab, carriage
  return, line feed or NUL gets a leading single quote, unless the whole cell is a
  plain number, so a base excess of ``-5.2`` stays a number.  The rule is a pure
  function of the cell (``escape_text``), applied to the header row too, and to
  text columns of every Arrow type (string, large_string, binary, dictionary-encoded).
  Quoting follows RFC 4180 (pyarrow's writer).
* The bytes written are a function of the tables given: the same tables give the
  same file (a compiled writer can be checked byte for byte against this one).
* Where the bytes go is the caller's: a staged file (``acidbase.files.outputs``:
  renamed into place only when the run succeeded) or standard output.
"""

from __future__ import annotations

import contextlib
import functools
import json
import re
import sys
from collections.abc import Callable, Collection, Mapping, Sequence
from pathlib import Path
from typing import BinaryIO

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

from .._arrow import pq
from .outputs import OutputError, OutputSet

#: Output formats, chosen by the name or by option.
OUTPUT_FORMATS: tuple[str, ...] = ("csv", "jsonl", "parquet")
#: CSV output delimiters: none of them is part of a cell written bare (numbers, times).
OUTPUT_DELIMITERS: tuple[str, ...] = (",", ";", "|", "\t")

#: A cell that is a plain number in either decimal convention (escaping exempts it).
_PLAIN_NUMBER = r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$"
_PLAIN_NUMBER_RE = re.compile(_PLAIN_NUMBER)
#: First characters that make a spreadsheet run a cell (OWASP "CSV Injection").
FORMULA_STARTS = "=+-@\t\r\n\x00"
_FORMULA_BYTES = pa.array([c.encode() for c in FORMULA_STARTS])


def _mask(arr: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """A boolean numpy mask from an arrow boolean array (nulls are False)."""
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    return np.asarray(pc.fill_null(arr, False).to_numpy(zero_copy_only=False), dtype=bool)


def escape_text(cell: str | None) -> str | None:
    """One cell as written to CSV: ``'`` before a cell a spreadsheet would run as a
    formula (OWASP), unless it is a plain number.  The statement of the rule; the
    column-wide ``escape_formula`` gives the same result for every cell."""
    if cell and cell[0] in FORMULA_STARTS and not _PLAIN_NUMBER_RE.match(cell):
        return "'" + cell
    return cell


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


def _is_text(t: pa.DataType) -> bool:
    """Cells written as text or bytes: strings of any width, binary (as its bytes)."""
    return (pa.types.is_string(t) or pa.types.is_large_string(t) or pa.types.is_binary(t)
            or pa.types.is_large_binary(t))


def _escape_plain(column: pa.Array | pa.ChunkedArray) -> pa.Array | pa.ChunkedArray:
    danger = escape_danger(column)
    if not pc.any(pc.is_valid(danger)).as_py():
        return column
    quote, empty = pa.scalar("'", column.type), pa.scalar("", column.type)
    return pc.if_else(pc.is_valid(danger), pc.binary_join_element_wise(quote, column, empty),
                      column)


def _escape_dictionary(column: pa.DictionaryArray) -> pa.DictionaryArray:
    """The dictionary's values escaped (the rule is a function of the cell, so each
    distinct text once); indices and type kept."""
    values = _escape_plain(column.dictionary)
    if values is column.dictionary:
        return column
    return pa.DictionaryArray.from_arrays(column.indices, values, ordered=column.type.ordered)


def escape_formula(column: pa.Array | pa.ChunkedArray) -> pa.Array | pa.ChunkedArray:
    """``escape_text`` on every cell of a text column, whatever its Arrow type; the
    column keeps its type (a dictionary-encoded one its indices), other columns are
    returned as they are."""
    t = column.type
    if pa.types.is_dictionary(t):
        if not _is_text(t.value_type):
            return column
        if isinstance(column, pa.ChunkedArray):  # each chunk may have its own dictionary
            return pa.chunked_array([_escape_dictionary(c) for c in column.chunks], type=t)
        return _escape_dictionary(column)
    if _is_text(t):
        return _escape_plain(column)
    if getattr(pa.types, "is_string_view", lambda _: False)(t):
        return _escape_plain(column.cast(pa.string()))
    return column


#: Names of compressed files: the writer writes none, and a plain file under such a
#: name would fail whatever reads it next.
COMPRESSED_SUFFIXES: tuple[str, ...] = (".gz", ".bz2", ".xz", ".zip", ".zst", ".7z")


def output_format(path: str | None, given: str | None) -> str:
    """``csv``, ``jsonl`` or ``parquet``: as given, else from the name (CSV on standard
    output).  A name of a compressed file is refused (``COMPRESSED_SUFFIXES``)."""
    if path and Path(path).suffix.lower() in COMPRESSED_SUFFIXES:
        plain = Path(path).with_suffix("")
        raise OutputError(f"-o {path}: acidbase writes no compressed files; write {plain} "
                          "and compress it afterwards")
    if given:
        if given not in OUTPUT_FORMATS:
            raise OutputError(f"output format {given!r} is not one of "
                              f"{', '.join(OUTPUT_FORMATS)}")
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
        text = pc.cast(col, pa.string())
        # Arrow writes 6 and -0 where Python writes 6.0 and -0.0
        bare = pc.invert(pc.match_substring_regex(text, "[.eEn]"))
        text = pc.if_else(bare, pc.binary_join_element_wise(text, ".0", ""), text)
        # JSON has no infinity (json.dumps wrote the token Infinity, which no JSON reader
        # takes): an infinite number passed through from the input is written as the
        # text the CSV output shows, "inf" or "-inf"
        text = pc.if_else(pc.is_inf(col), pc.binary_join_element_wise('"', text, '"', ""), text)
        return pc.fill_null(pc.if_else(pc.is_nan(col), pa.scalar(None, pa.string()), text),
                            "null")
    if pa.types.is_integer(t):
        return pc.fill_null(pc.cast(col, pa.string()), "null")
    if pa.types.is_boolean(t):
        return pc.fill_null(pc.if_else(col, "true", "false"), "null")
    return None


def _json_cell(v: object) -> object:
    """A cell for ``json.dumps``: NaN as None, an infinite number as its text."""
    if isinstance(v, float) and not np.isfinite(v):
        return None if v != v else ("inf" if v > 0 else "-inf")
    return v


def jsonl_bytes(table: pa.Table) -> bytes:
    """``table`` as JSON Lines, one object per row, the same text as ``json.dumps(row,
    ensure_ascii=False)`` gives (numbers may differ in form, not value: Arrow writes
    0.00001 where Python writes 1e-05).  Built column by column with Arrow's string
    kernels; a column of a type not handled here (timestamps, dates, decimals...) goes
    cell by cell through ``json.dumps`` with ``default=str``.  Never a NaN or Infinity
    token: a missing or NaN number is ``null``, an infinite one its text."""
    n = table.num_rows
    if n == 0:
        return b""
    parts = []
    for name, col in zip(table.column_names, table.columns):
        col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
        values = _json_values(col)
        if values is None:  # (the whole table went row by row: a float NaN beside a
            # timestamp column was written as the token NaN)
            values = pa.array([json.dumps(_json_cell(v), ensure_ascii=False, default=str)
                               for v in col.to_pylist()], pa.string())
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


def decoded(table: pa.Table) -> pa.Table:
    """Dictionary-encoded columns (the batch's own labels: status, consistency,
    disorders, finding codes...) as plain text; the table itself when it has none."""
    if not any(pa.types.is_dictionary(t) for t in table.schema.types):
        return table
    return pa.table([c.cast(c.type.value_type) if pa.types.is_dictionary(c.type) else c
                     for c in table.columns], names=table.column_names)


def csv_rows(table: pa.Table, decimals: Mapping[str, int], escape: Collection[str] | None,
             plain: Collection[str], delimiter: str) -> pa.Buffer:
    """Rows of ``table`` as CSV text without a header: the reference the compiled
    writer (acidbase.csvtext) must match byte for byte.

    ``decimals``: float columns written as fixed-point text with that many
    decimals; ``escape``: the text columns to formula-escape (None: all), except
    those in ``plain``, which the caller found to hold nothing to escape.
    """
    table = fixed_columns(decoded(table), decimals)
    table = pa.table([escape_formula(c) if (escape is None or name in escape)
                      and name not in plain else c
                      for name, c in zip(table.column_names, table.columns)],
                     schema=table.schema)
    # Arrow's writer (pyarrow 26) writes 4 KB of NUL bytes for a column whose first
    # chunk is empty: empty chunks are dropped first (they hold no cells).
    table = pa.table([pa.chunked_array([a for a in c.chunks if len(a)], type=c.type)
                      if any(len(a) == 0 for a in c.chunks) else c for c in table.columns],
                     schema=table.schema)
    sink = pa.BufferOutputStream()
    pa_csv.write_csv(table, sink, pa_csv.WriteOptions(include_header=False, delimiter=delimiter,
                                                      quoting_style="needed"))
    return sink.getvalue()  # Arrow's buffer: no copy into bytes


class _StandardOutput:
    """Standard output's bytes, a refused write (``> /dev/full``, a full disk) raised
    with the name "standard output", so the run's message says where it failed; a
    closed pipe (``BrokenPipeError``) passes as it is."""

    closed = False

    def __init__(self, raw: BinaryIO) -> None:
        self.raw = raw

    def writable(self) -> bool:
        return True

    def write(self, data) -> int:
        try:
            return self.raw.write(data)
        except BrokenPipeError:
            raise
        except OSError as e:
            raise OSError(e.errno, e.strerror, "standard output") from e

    def flush(self) -> None:
        try:
            self.raw.flush()
        except BrokenPipeError:
            raise
        except OSError as e:
            raise OSError(e.errno, e.strerror, "standard output") from e


def _bytes_as_text(table: pa.Table, fmt: str) -> pa.Table:
    """``table`` with its columns of bytes (Parquet's BYTE_ARRAY without the UTF-8
    annotation, passed through) as the text they hold, for the text formats; bytes that
    are not UTF-8 cannot be written as text: refused, naming the column and the row."""
    for i, t in enumerate(table.schema.types):
        if not (pa.types.is_binary(t) or pa.types.is_large_binary(t)):
            continue
        name = table.column_names[i]
        try:
            text = table.column(i).cast(pa.string())
        except pa.ArrowInvalid:
            cells = table.column(i).to_pylist()
            at = next(k for k, c in enumerate(cells) if c is not None and not _utf8(c))
            row = table.column("row")[at].as_py() if "row" in table.column_names else at + 1
            raise OutputError(
                f"column {name!r} holds bytes that are not UTF-8 text (row {row}: "
                f"{cells[at][:20]!r}); {'CSV' if fmt == 'csv' else 'JSON Lines'} output "
                "carries text only: write Parquet (-o NAME.parquet), which keeps the bytes"
            ) from None
        table = table.set_column(i, name, text)
    return table


def _utf8(data: bytes) -> bool:
    try:
        data.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


class Writer:
    """Writes output tables in one format; the schema is fixed by the first table.

    The bytes go to ``sink`` when given (a staged file the caller commits, see
    ``acidbase.files.outputs``), else to ``path`` through a staged file of the
    writer's own (renamed into place by ``close(ok=True)``, removed by
    ``close(ok=False)``: a previous file of that name is untouched until then), else
    to standard output.

    Writing is split in two so the costly half can run on worker threads:
    ``encode`` (formula escaping and formatting CSV or JSON Lines text; safe to
    call from several threads at once) and ``put`` (appending to the file, in
    the order the caller gives).  ``write`` does both.
    """

    def __init__(self, path: str | None, fmt: str, delimiter: str = ",",
                 metadata: Mapping[str, str] | Callable[[], Mapping[str, str]] | None = None,
                 escape: Sequence[str] | None = None,
                 decimals: Mapping[str, int] | None = None,
                 sink: BinaryIO | None = None) -> None:
        """``escape``: the CSV columns that can carry text from the input (all when
        None); the others hold only the tool's own vocabulary and numbers.
        ``decimals``: number columns written to CSV with that many decimals (JSON
        Lines and Parquet keep the full doubles, as ``check --json`` does).
        ``metadata`` (Parquet's key-value metadata) may be a function, called when the
        first table is put (what it needs may still be on its way at the start)."""
        if fmt == "csv" and delimiter not in OUTPUT_DELIMITERS:
            raise OutputError(
                f"--output-delimiter {delimiter!r}: give , ; | or tab (a digit, a point, a "
                "sign, a colon, a space, a quote or a line break is part of cells written "
                "bare, such as numbers and times, and would cut them apart)")
        self.escape = None if escape is None else frozenset(escape)
        self.decimals = dict(decimals or {})
        to_stdout = sink is None and path in (None, "-")
        if fmt == "parquet" and to_stdout:
            raise OutputError("Parquet output needs a file: give -o OUTPUT.parquet")
        if to_stdout and sys.stdout is None:
            raise OutputError("standard output is closed; give -o OUTPUT")
        self.path = None if to_stdout else path
        self.fmt = fmt
        self.delimiter = delimiter
        self.metadata = metadata if callable(metadata) else dict(metadata or {})
        self._own: OutputSet | None = None
        if sink is None and not to_stdout:
            self._own = OutputSet()
            sink = self._own.add("OUTPUT", str(path)).file
        self._given = sink
        self._sink: BinaryIO | None = None
        self._writer = None
        self.schema: pa.Schema | None = None

    def _csv_options(self, header: bool) -> pa_csv.WriteOptions:
        return pa_csv.WriteOptions(include_header=header, delimiter=self.delimiter,
                                   quoting_style="needed")

    def _open(self, schema: pa.Schema) -> None:
        self._sink = self._given if self._given is not None else _StandardOutput(
            sys.stdout.buffer)
        if callable(self.metadata):
            self.metadata = dict(self.metadata())
        self.schema = schema.with_metadata(self.metadata) if self.metadata else schema
        if self.fmt == "csv":
            names = [escape_text(n) or "" for n in schema.names]  # headers come from input
            header = pa.table([pa.array([], pa.null())] * len(names), names=names)
            pa_csv.write_csv(header, self._sink, self._csv_options(True))
        elif self.fmt == "parquet":
            self._writer = pq.ParquetWriter(self._sink, self.schema)

    def encode(self, table: pa.Table, plain: frozenset[str] = frozenset()
               ) -> tuple[pa.Schema, bytes | pa.Buffer | pa.Table]:
        """``table`` made ready for ``put``: CSV as Arrow's buffer of its text, JSON Lines
        as bytes, Parquet as is.

        ``plain``: columns of this table the caller has read cell by cell and found
        to hold only numbers or its own vocabulary, so escaping would change nothing.
        """
        if self.fmt != "parquet":
            table = _bytes_as_text(table, self.fmt)
        if self.fmt == "csv":  # derived values and labels as text: the schema says text
            from ..csvtext import compiled_csv

            schema = pa.schema([pa.field(f.name, pa.string()) if (
                f.name in self.decimals and pa.types.is_floating(f.type))
                or pa.types.is_dictionary(f.type) else f for f in table.schema])
            text = compiled_csv(table, self.decimals, self.escape, plain, self.delimiter)
            if text is None:
                text = csv_rows(table, self.decimals, self.escape, plain, self.delimiter)
            return schema, text
        table = decoded(table)  # the file's columns are text, whatever the batch kept
        if self.fmt == "jsonl":
            return table.schema, jsonl_bytes(table)
        return table.schema, table

    def put(self, encoded: tuple[pa.Schema, bytes | pa.Buffer | pa.Table]) -> None:
        """Append one ``encode``d table to the output."""
        schema, payload = encoded
        if self.schema is None:
            self._open(schema)
        elif schema.names != self.schema.names:
            raise OutputError("output columns changed between chunks: "
                              f"{self.schema.names} then {schema.names}")
        if isinstance(payload, pa.Table):
            self._writer.write_table(payload.cast(self.schema.remove_metadata()))
        else:
            self._sink.write(payload)

    def write(self, table: pa.Table) -> None:
        self.put(self.encode(table))

    def finish(self) -> None:
        """End the format (Parquet's footer) and flush; the file stays staged."""
        if self._writer is not None:
            self._writer.close()
            self._writer = None
        if self._sink is not None:
            self._sink.flush()

    def close(self, ok: bool = True) -> None:
        """Finish, then, for a file of the writer's own: rename it into place when ``ok``,
        else remove it.  A sink given by the caller is the caller's to commit."""
        try:
            if ok:
                self.finish()
                if self._own is not None:
                    self._own.commit()
            else:
                with contextlib.suppress(Exception):  # the file is going anyway
                    self.finish()
        finally:
            if self._own is not None:
                self._own.discard()


__all__ = ["FORMULA_STARTS", "OUTPUT_FORMATS", "Writer", "csv_rows", "decoded", "escape_danger",
           "escape_formula", "escape_text", "fixed_columns", "format_fixed", "jsonl_bytes", "output_format"]
