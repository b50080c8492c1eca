"""The compiled CSV text of a batch output table, when the extension is built.

The batch writer (``fileio.Writer.encode``) asks ``compiled_csv`` first and writes
with its own Python code (``fileio.csv_rows``, the reference) when it answers None:
the extension ``acidbase._csvfast`` is not built (no C compiler at install), is
switched off (environment variable ``ACIDBASE_PURE_PYTHON=1``, for comparisons and
benchmarks), or the table has a column it does not write.  The C code does the
reference's three steps in one pass over the rows without the interpreter lock:
derived values as fixed-point text (``fileio.fixed_columns``), formula escaping
(``fileio.escape_formula``) and Arrow's CSV writing with quoting "needed".  It
writes text, dictionary-encoded text (each label's cell written once, then copied by
index), integer, boolean, null and fixed-point float columns; a table with any
other column (say a timestamp passed through from a Parquet input) goes to the
reference whole.

``tests/test_csvtext.py`` compares the two on generated tables byte for byte.
"""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping

import pyarrow as pa

try:  # optional: absent when the package was installed without a C compiler
    from . import _csvfast
except ImportError:  # pragma: no cover - depends on the build
    _csvfast = None

#: The compiled writer's kinds of column (see _csvfast.c).
_NULL, _UTF8, _LARGE_UTF8, _INT64, _FIXED, _BOOL, _LABELS = range(7)
_MAX_DECIMALS = 15


def compiled_available() -> bool:
    """True when the compiled writer is built and not switched off."""
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


__all__ = ["compiled_available", "compiled_csv"]
