"""The compiled edges (acidbase._csvfast), when the extension is built.

The edges, each with its Python reference kept beside its caller; each function here
answers None when the extension is not built (no C compiler at install) or is switched
off (environment variable ``ACIDBASE_PURE_PYTHON=1``, for comparisons and benchmarks),
and the caller then uses the reference:

* ``compiled_csv``: the CSV text of a batch output table.  The batch writer
  (``fileio.Writer.encode``) writes with its own Python code (``fileio.csv_rows``)
  when it answers None, also when the table has a column the C code does not write
  (say a timestamp passed through from a Parquet input).  The C code does the
  reference's three steps in one pass over the rows without the interpreter lock:
  derived values as fixed-point text (``fileio.fixed_columns``), formula escaping
  (``fileio.escape_formula``) and Arrow's CSV writing with quoting "needed".  A
  dictionary-encoded text column (the batch's labels) has each label's cell written
  once (``cells``) and copied by index; the reference decodes it to text first.
* ``plain_numbers``: which cells of a text column are plain decimal numbers, and their
  values, for the cell reader's fast route (``inputs.cells.parse_numeric_many``, whose
  Arrow casts are the reference).  It decides nothing else: every other cell goes
  through the reader's pattern.
* ``scanned_numbers``: the same scan reading also the ordinary cells around plain
  numbers (blank cells, spaces and tabs, a decimal comma, comparators, laboratory
  flags), as the reader's pattern reads them (``inputs.cells.parse_numeric_many``,
  whose pure-Python route is the reference); refusals stay with the pattern.
* ``distinct_texts``: a choice column's few distinct texts and each cell's index into
  them, for the choice reader (``inputs.cells._choices_of_text``, whose Arrow
  dictionary encoding is the reference); what a text means is decided in Python.
* ``packed_rules`` and ``grouped_words``: the fired-rule matrix as one 64-bit word per
  row and 64 rules, and its distinct patterns (``results._combine``, whose numpy code is
  the reference).

``tests/test_csvtext.py`` and ``tests/test_compiled_edges.py`` compare each with its
reference on generated input, byte for byte and bit for bit.  pyarrow is imported on
first use (``acidbase._arrow``): the rule packing serves a single panel too.
"""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pyarrow as pa
else:  # imported on first use (acidbase/_arrow.py)
    from ._arrow import pa

try:  # optional: absent when the package was installed without a C compiler
    from . import _csvfast
except ImportError:  # pragma: no cover - depends on the build
    _csvfast = None

#: The compiled writer's kinds of column (see _csvfast.c).
_NULL, _UTF8, _LARGE_UTF8, _INT64, _FIXED, _BOOL, _LABELS = range(7)
_MAX_DECIMALS = 15


def compiled_available() -> bool:
    """True when the compiled edges are built and not switched off."""
    return _csvfast is not None and not os.environ.get("ACIDBASE_PURE_PYTHON")


def _chunks(col: pa.ChunkedArray, kind: int) -> list[tuple]:
    out = []
    for a in col.chunks:
        bufs = a.buffers()
        data = bufs[2] if kind in (_UTF8, _LARGE_UTF8) else None
        out.append((len(a), a.offset, bufs[0] if a.null_count else None,
                    bufs[1] if len(bufs) > 1 else None, data))
    return out


def _label_chunks(col: pa.ChunkedArray, esc: int) -> list[tuple] | None:
    """A dictionary column's chunks for the compiled writer: each chunk's labels
    written once as text cells (by the writer itself, so exactly as a text column's
    cell), then copied row by row by index."""
    out = []
    for a in col.chunks:
        labels = a.dictionary
        if not pa.types.is_string(labels.type):
            labels = labels.cast(pa.string())
        text, starts = _csvfast.cells(
            (_UTF8, esc, _chunks(pa.chunked_array([labels], pa.string()), _UTF8)), len(labels))
        indices = a.indices
        if not pa.types.is_int32(indices.type):
            try:
                indices = indices.cast(pa.int32())
            except (pa.ArrowInvalid, OverflowError):
                return None
        bufs = indices.buffers()
        out.append((len(a), indices.offset, bufs[0] if indices.null_count else None, bufs[1],
                    text, len(labels), starts))
    return out


def _spec(name: str, col: pa.ChunkedArray, decimals: Mapping[str, int],
          escape: Collection[str] | None, plain: Collection[str]) -> tuple | None:
    """What the compiled writer is told about one column; None if it cannot write it."""
    t = col.type
    if pa.types.is_dictionary(t):
        v = t.value_type
        if not (pa.types.is_string(v) or pa.types.is_large_string(v)):
            return None
        esc = int((escape is None or name in escape) and name not in plain)
        chunks = _label_chunks(col, esc)
        return None if chunks is None else (_LABELS, esc, chunks)
    if pa.types.is_string(t) or pa.types.is_large_string(t):
        esc = int((escape is None or name in escape) and name not in plain)
        kind = _UTF8 if pa.types.is_string(t) else _LARGE_UTF8
        return kind, esc, _chunks(col, kind)
    if pa.types.is_floating(t):
        d = decimals.get(name)
        if d is None or not 0 <= d <= _MAX_DECIMALS:
            return None  # Arrow's own float text: left to the reference
        if not pa.types.is_float64(t):
            try:
                col = col.cast(pa.float64())  # exact: every float32 is a double
            except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
                return None
        return _FIXED, d, _chunks(col, _FIXED)
    if pa.types.is_integer(t):
        if not pa.types.is_int64(t):
            try:
                col = col.cast(pa.int64())
            except (pa.ArrowInvalid, OverflowError):  # uint64 beyond int64
                return None
        return _INT64, 0, _chunks(col, _INT64)
    if pa.types.is_boolean(t):
        return _BOOL, 0, _chunks(col, _BOOL)
    if pa.types.is_null(t):
        return _NULL, 0, [(len(a), 0, None, None, None) for a in col.chunks]
    return None


def compiled_csv(table: pa.Table, decimals: Mapping[str, int], escape: Collection[str] | None,
                 plain: Collection[str], delimiter: str) -> bytes | None:
    """``fileio.csv_rows``'s bytes from the compiled writer; None when it is not built,
    switched off, or the table has a column it does not write (the caller then uses
    the reference)."""
    if not compiled_available():
        return None
    sep = delimiter.encode("utf-8")
    if len(sep) != 1:
        return None
    specs = []
    for name, col in zip(table.column_names, table.columns):
        spec = _spec(name, col, decimals, escape, plain)
        if spec is None:
            return None
        specs.append(spec)
    return _csvfast.encode(specs, table.num_rows, sep)


def _text_buffers(column: pa.Array) -> tuple | None:
    """How the compiled edge is handed a ``string`` or ``large_string`` column: (length,
    offset, validity or None, offsets, data, large); None when the extension is not built
    or switched off, or the column is not text."""
    if not compiled_available():
        return None
    t = column.type
    if not (pa.types.is_string(t) or pa.types.is_large_string(t)):
        return None
    bufs = column.buffers()
    return (len(column), column.offset, bufs[0] if column.null_count else None, bufs[1],
            bufs[2], pa.types.is_large_string(t))


def plain_numbers(column: pa.Array) -> tuple[np.ndarray, np.ndarray, int] | None:
    """(values, rest, count) of a ``string`` or ``large_string`` column: ``values`` the
    float64 value of each plain decimal number (digits and at most one point, finite;
    NaN elsewhere), ``rest`` the valid cells that are not one (a bool array), ``count``
    their number.  None when the extension is not built or switched off."""
    text = _text_buffers(column)
    if text is None:
        return None
    n = len(column)
    values = np.empty(n, dtype=np.float64)
    rest = np.empty(n, dtype=np.bool_)
    if n == 0:
        return values, rest, 0
    try:
        count = _csvfast.scan_numbers(*text, values, rest.view(np.uint8))
    except ValueError:  # buffers laid out as the scan does not expect: the reference reads
        return None
    return values, rest, count


#: The comparators by their code in the scan's marks (bits 0-2; 0: none), as
#: ``inputs.cells._VALUE`` spells them.
COMPARATOR_CODES: tuple[str | None, ...] = (None, "<", "<=", ">", ">=")
#: The marks' bit for a cell that is not a plain number as written.
NOT_PLAIN = 0x80


def scanned_numbers(column: pa.Array, decimal: str = "."
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, int, int, int] | None:
    """(values, rest, marks, count, not_plain, marked) of a ``string`` or
    ``large_string`` column, read by the compiled scan with marks (``_csvfast.c``,
    ``read_cell``): ``values`` float64 (NaN where not measured, censored or left to the
    pattern), ``rest`` the cells left to the reader's pattern (bool; ``count`` of them),
    ``marks`` uint8 per cell (bits 0-2 the comparator, ``COMPARATOR_CODES``; bits 3-6 the
    flag, 1 + its index in ``inputs.cells.LAB_FLAGS``; ``NOT_PLAIN``), ``not_plain`` how
    many cells read are not plain numbers as written, ``marked`` how many carry a
    comparator or a flag.  None when the extension is not built or switched off."""
    text = _text_buffers(column)
    if text is None or decimal not in (".", ","):
        return None
    n = len(column)
    values = np.empty(n, dtype=np.float64)
    rest = np.empty(n, dtype=np.bool_)
    marks = np.empty(n, dtype=np.uint8)
    if n == 0:
        return values, rest, marks, 0, 0, 0
    try:
        count, not_plain, marked = _csvfast.scan_numbers(
            *text, values, rest.view(np.uint8), ord(decimal), marks)
    except ValueError:  # buffers laid out as the scan does not expect: the reference reads
        return None
    return values, rest, marks, count, not_plain, marked


def distinct_texts(column: pa.Array, limit: int = 64) -> tuple[np.ndarray, list[str]] | None:
    """(indices, texts) of a ``string`` or ``large_string`` column: its distinct texts in
    the order of their first cell, and each cell's index into them (int32; -1 for a null
    cell), as Arrow's dictionary encoding gives them.  None when the column has more
    than ``limit`` distinct texts, or the extension is not built or switched off."""
    text = _text_buffers(column)
    if text is None:
        return None
    n = len(column)
    indices = np.empty(n, dtype=np.int32)
    if n == 0:
        return indices, []
    try:
        got = _csvfast.distinct_texts(*text, indices, limit)
        return None if got is None else (indices, [b.decode("utf-8") for b in got])
    except (ValueError, UnicodeDecodeError):  # the reference reads it
        return None


def packed_rules(mask: np.ndarray) -> np.ndarray | None:
    """The (rules x rows) bool matrix ``mask`` as (rows, ceil(rules / 64)) uint64 words,
    bit r % 64 of word r // 64 set where rule r fired; None when the extension is not
    built or switched off."""
    if not compiled_available():
        return None
    rules, rows = mask.shape
    words = np.empty((rows, (rules + 63) // 64), dtype=np.uint64)
    src = np.ascontiguousarray(mask, dtype=np.bool_).view(np.uint8)
    _csvfast.pack_rules(src, rules, rows, words)
    return words


def grouped_words(words: np.ndarray) -> tuple[np.ndarray, list[int], list[int]] | None:
    """(inverse, keys, first) of a uint64 column: the distinct words in increasing order
    (``keys``, as ``numpy.unique``), the first row of each and each row's index into them
    (int32); None when the extension is not built or switched off."""
    if not compiled_available():
        return None
    words = np.ascontiguousarray(words, dtype=np.uint64)
    inverse = np.empty(len(words), dtype=np.int32)
    keys, first = _csvfast.group_words(words, len(words), inverse)
    return inverse, keys, first


__all__ = ["compiled_available", "compiled_csv", "grouped_words", "packed_rules",
           "distinct_texts", "plain_numbers", "scanned_numbers"]
