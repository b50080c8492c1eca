"""The CSV text of a batch output table: compiled when built, Python otherwise.

``csv_text`` is the one function the batch writer calls.  It has two
implementations that write the same bytes:

* ``python_csv``, the reference: derived values as fixed-point text
  (``fileio.fixed_columns``), formula escaping (``fileio.escape_formula``), then
  Arrow's CSV writer with quoting "needed";
* ``compiled_csv``, the optional C extension ``acidbase._csvfast`` (built by
  ``pip install .`` when a C compiler is at hand; ``setup.py``), which does the
  three in one pass over the rows without the interpreter lock.  It handles
  text, integer, boolean, null and fixed-point float columns; a table with any
  other column (say a timestamp passed through from a Parquet input) goes to
  ``python_csv`` whole.

``tests/test_csvtext.py`` compares the two on generated tables byte for byte.
Setting the environment variable ``ACIDBASE_PURE_PYTHON=1`` makes
``csv_text`` use the reference (for comparisons and benchmarks).
"""

from __future__ import annotations

import os
from collections.abc import Collection, Mapping

import pyarrow as pa
import pyarrow.csv as pa_csv

try:  # optional: absent when the package was installed without a C compiler
    from . import _csvfast
except ImportError:  # pragma: no cover - depends on the build
    _csvfast = None

#: The compiled writer's kinds of column (see _csvfast.c).
_NULL, _UTF8, _LARGE_UTF8, _INT64, _FIXED, _BOOL = range(6)
_MAX_DECIMALS = 15


def compiled_available() -> bool:
    """True when the compiled writer is built and not switched off."""
    return _csvfast is not None and not os.environ.get("ACIDBASE_PURE_PYTHON")


def python_csv(table: pa.Table, decimals: Mapping[str, int], escape: Collection[str] | None,
               plain: Collection[str], delimiter: str) -> pa.Buffer:
    """The reference: rows of ``table`` as CSV text without a header.

    ``decimals``: float columns written as fixed-point text with that many
    decimals; ``escape``: the text columns to formula-escape (None: all), except
    those in ``plain``, which the caller found to hold nothing to escape.
    """
    from .fileio import escape_formula, fixed_columns

    table = fixed_columns(table, decimals)
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


def _chunks(col: pa.ChunkedArray, kind: int) -> list[tuple]:
    out = []
    for a in col.chunks:
        bufs = a.buffers()
        data = bufs[2] if kind in (_UTF8, _LARGE_UTF8) else None
        out.append((len(a), a.offset, bufs[0] if a.null_count else None,
                    bufs[1] if len(bufs) > 1 else None, data))
    return out


def _spec(name: str, col: pa.ChunkedArray, decimals: Mapping[str, int],
          escape: Collection[str] | None, plain: Collection[str]) -> tuple | None:
    """What the compiled writer is told about one column; None if it cannot write it."""
    t = col.type
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
    """``python_csv``'s bytes from the compiled writer; None when it is not built or
    the table has a column it does not write (the caller then uses ``python_csv``)."""
    if _csvfast is None:
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


def csv_text(table: pa.Table, decimals: Mapping[str, int], escape: Collection[str] | None,
             plain: Collection[str], delimiter: str) -> bytes | pa.Buffer:
    """Rows of ``table`` as CSV text without a header (see ``python_csv``): from the
    compiled writer when it is built and handles every column, else the reference."""
    if compiled_available():
        out = compiled_csv(table, decimals, escape, plain, delimiter)
        if out is not None:
            return out
    return python_csv(table, decimals, escape, plain, delimiter)


__all__ = ["compiled_available", "compiled_csv", "csv_text", "python_csv"]
