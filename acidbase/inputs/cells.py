"""THE cell reader: every value that comes in, on every path, is read here.

Options (``acidbase check``), ``Panel``, ``interpret_many`` columns, CSV, JSON
Lines and Parquet cells and the terminal app's series file all call
``read_numbers`` (a column) or ``read_number`` (one cell) for numbers, and
``read_choices`` / ``read_choice`` for choices, so a cell has one fate and one
message whatever way it came in.  The policy, as docs/input.md states it:

* A number: digits 0-9 with an optional sign, decimal mark and exponent
  (``7.4``, ``+7.40``, ``.5``, ``1e2``), surrounding spaces ignored.
* Decimal mark: a point; a comma only where the source declares it
  (``--decimal ,`` for files and ``check``; a CSV's decimal comma is detected).
  A comma is never read as digit grouping: ``1,400``, ``1_400`` and ``1 400``
  are refused.
* Censored values: a comparator before the number (``<5``, ``>=180``; FHIR
  ``Quantity.comparator`` [fhir_quantity]) marks a value beyond a reporting
  limit: it never enters a formula as an exact number (a required field refuses
  the row; an optional one is "not measured", with the qualifier recorded).
* Laboratory flags after a number (``7.21 L``; HL7 v2 table 0078 [hl7_0078],
  and ``*``) are read off and recorded; the number is used.
* Not measured: an empty cell, None, a floating-point NaN, or a token declared
  with ``--missing`` (compared after trimming spaces).  The words "NA", "nan",
  "inf" are not numbers and refuse the row unless declared missing.
* A Python ``Decimal`` (a database's NUMERIC) is the number it writes, as an Arrow
  decimal column is.
* Refused: yes/no values (``True``, a boolean column), non-finite numbers,
  integers beyond the floating-point range, digits of other scripts (full-width,
  Arabic-Indic: refused, never converted), digit grouping, anything else.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from types import ModuleType
from typing import TYPE_CHECKING, Any

import numpy as np

from .._arrow import is_arrow
from ..csvtext import COMPARATOR_CODES, compiled_available, distinct_texts, scanned_numbers
from .vocab import Choice, normalise_word

if TYPE_CHECKING:
    import pyarrow as pa
    import pyarrow.compute as pc
else:  # imported on first use: one panel never needs Arrow (acidbase/_arrow.py)
    from .._arrow import pa, pc

#: HL7 v2 table 0078 abnormal flags as they trail values in exports (L, H, LL, HH,
#: A, AA, N), plus ``*``, which several laboratory exports print for "abnormal"
#: (common laboratory practice, no source) [hl7_0078]; comparators (< <= >= >) as FHIR
#: ``Quantity.comparator`` [fhir_quantity].
LAB_FLAGS: tuple[str, ...] = ("LL", "HH", "AA", "L", "H", "A", "N", "*")

# ASCII digits only, spelled out: the policy refuses other scripts' digits.
_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_VALUE = (
    r"^\s*(?P<cmp><=|>=|<|>)?\s*(?P<num>" + _NUMBER + r")\s*(?P<flag>"
    + "|".join(re.escape(f) for f in LAB_FLAGS) + r")?\s*$"
)


@dataclass
class ParsedColumn:
    """One numeric column read from text."""

    values: np.ndarray
    """float64; NaN where empty, censored or not a number."""
    comparator: pa.Array | np.ndarray | None
    """Per row "<", ">", "<=", ">=" or null; None when the column has none (an object
    array with None for the object path, an Arrow array for Arrow columns)."""
    flag: pa.Array | np.ndarray | None
    """Per row laboratory flag or null; None when the column has none."""
    bad: np.ndarray
    """Rows whose cell is not a number (the row is refused)."""
    text: pa.Array | np.ndarray
    """The cells as text (for messages; use ``cell(i)``)."""
    plain: bool = False
    """Every cell is empty or a bare number (read by one cast of the raw text): formula
    escaping would change none of them."""

    @property
    def censored(self) -> np.ndarray:
        if self.comparator is None:
            return np.zeros(len(self.values), dtype=bool)
        return _present(self.comparator)

    def cell(self, i: int) -> str | None:
        """The text of cell ``i`` as given (None when empty)."""
        return _item(self.text, i)

    def cells(self, rows: np.ndarray) -> list[str | None]:
        """The texts of the cells ``rows`` (int indices), as ``cell`` gives each."""
        if isinstance(self.text, np.ndarray):
            return [_item(self.text, i) for i in rows.tolist()]
        return self.text.take(pa.array(rows, pa.int64())).to_pylist()

    def marks(self, which: str) -> list[tuple[int, str]]:
        """(row, mark) for each row with a comparator (``which="comparator"``, the mark
        being the cell's text) or a laboratory flag (``"flag"``)."""
        col = self.comparator if which == "comparator" else self.flag
        if col is None:
            return []
        rows = np.flatnonzero(_present(col)).tolist()
        return [(i, (self.cell(i) if which == "comparator" else _item(col, i)) or "")
                for i in rows]


def _bind_arrow() -> None:
    """Once a column of Arrow is read (pyarrow is then imported anyway), this module's
    ``pa`` and ``pc`` become the modules themselves: each name looked up through the
    stand-ins costs an import lookup, about a tenth of a column's reading."""
    global pa, pc
    if not isinstance(pc, ModuleType):
        import pyarrow
        import pyarrow.compute

        pa, pc = pyarrow, pyarrow.compute


def _present(col: pa.Array | np.ndarray) -> np.ndarray:
    """Rows holding a value: Arrow's validity, or not None in an object array."""
    if isinstance(col, np.ndarray):
        return np.array([x is not None for x in col.tolist()], dtype=bool)
    return _mask(pc.is_valid(col))


def _item(col: pa.Array | np.ndarray | None, i: int) -> Any:
    if col is None or i >= len(col):
        return None
    return col[i] if isinstance(col, np.ndarray) else col[i].as_py()


def _mask(arr: pa.Array | pa.ChunkedArray) -> np.ndarray:
    """A boolean numpy mask from an arrow boolean array (nulls are False)."""
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    return np.asarray(pc.fill_null(arr, False).to_numpy(zero_copy_only=False), dtype=bool)


def _floats(arr: pa.Array) -> np.ndarray:
    out = np.asarray(pc.cast(arr, pa.float64()).to_numpy(zero_copy_only=False), dtype=np.float64)
    return out if out.flags.writeable else out.copy()


def _text_floats(arr: pa.Array) -> np.ndarray:
    """Text cells cast to floats in one go; ``ArrowInvalid`` unless every cell is a
    plain number.  Arrow's cast also reads the words "nan", "inf" and "infinity",
    which are not laboratory values: a cell that gave a non-finite number counts as
    not plain, so it goes through the value pattern and is refused."""
    vals = _floats(arr)
    if not np.isfinite(vals).all() and (~np.isfinite(vals) & _mask(pc.is_valid(arr))).any():
        raise pa.ArrowInvalid("a cell is not a plain number")
    return vals


def _text_column(column: pa.Array | pa.ChunkedArray, missing: Sequence[str] = ()) -> pa.Array:
    """One Arrow array, dictionary and large text decoded to ``string``, declared missing
    tokens (compared after trimming spaces) made null."""
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks() if column.num_chunks else pa.array([], column.type)
    t = column.type
    if pa.types.is_dictionary(t):
        column = column.dictionary_decode()
        t = column.type
    if pa.types.is_large_string(t) or pa.types.is_string_view(t):
        column = column.cast(pa.string())
    if missing and pa.types.is_string(column.type):
        hit = _missing_hits(column, missing)
        if pc.any(hit).as_py():
            column = pc.if_else(hit, pa.scalar(None, pa.string()), column)
    return column


def _missing_hits(column: pa.Array, missing: Sequence[str]) -> pa.Array:
    """Where a text cell, its surrounding spaces trimmed, is a declared missing token."""
    return pc.is_in(pc.utf8_trim_whitespace(column), value_set=pa.array(list(missing),
                                                                        pa.string()))


@functools.lru_cache(maxsize=64)
def _scan_reads_a_token(missing: tuple[str, ...], decimal: str) -> bool:
    """True when the compiled scan would read one of the missing tokens as a cell (a
    number, a blank...), or cannot say: the tokens are then made null before the scan.
    Otherwise no cell the scan reads is a token (a cell that trims to a token would be
    one the scan reads trimmed too), so only the cells it leaves are compared with them."""
    got = scanned_numbers(pa.array(list(missing), pa.string()), decimal)
    return got is None or not got[1].all()


def _nested(t: pa.DataType) -> bool:
    return pa.types.is_nested(t) or pa.types.is_binary(t) or pa.types.is_large_binary(t)


def parse_numeric(column: pa.Array | pa.ChunkedArray, decimal: str = ".",
                  missing: Sequence[str] = ()) -> ParsedColumn:
    """Read an Arrow column of laboratory values (see the module docstring)."""
    _bind_arrow()
    column = _text_column(column, missing)
    n = len(column)
    t = column.type
    if pa.types.is_floating(t) or pa.types.is_integer(t) or pa.types.is_decimal(t):
        vals = _floats(column)
        infinite = np.isinf(vals)
        text = pc.cast(column, pa.string())
        if infinite.any():  # a non-finite number is no laboratory value
            vals = np.where(infinite, np.nan, vals)
            return ParsedColumn(vals, None, None, infinite, text)
        return ParsedColumn(vals, None, None, np.zeros(n, dtype=bool), text, plain=True)
    if pa.types.is_null(t):
        return ParsedColumn(np.full(n, np.nan), None, None, np.zeros(n, dtype=bool),
                            pa.nulls(n, pa.string()), plain=True)
    if not pa.types.is_string(t):
        if pa.types.is_boolean(t):
            text = pc.if_else(column, "True", "False")
        elif _nested(t):
            text = pa.array([None if v is None else str(v)[:60] for v in column.to_pylist()],
                            pa.string())
        else:
            text = pc.cast(column, pa.string())
        bad = _mask(pc.is_valid(column))
        return ParsedColumn(np.full(n, np.nan), None, None, bad, text)
    return parse_numeric_many([column], decimal)[0]


def parse_numeric_many(columns: Sequence[pa.Array | pa.ChunkedArray],
                       decimal: str = ".", missing: Sequence[str] = ()) -> list[ParsedColumn]:
    """``parse_numeric`` of several columns (a chunk's), the same result for each.

    With a decimal point, cells of digits and points only are cast a column at a
    time; the few others (flags, comparators, signs, spaces, text) of all the
    columns go through the full pattern together, since each pattern call has a
    fixed cost (about half a millisecond) that a per-column call would pay again.
    With a decimal comma each column goes through the full pattern.

    When the compiled edge is built (``csvtext.scanned_numbers``) it reads, in one pass
    a column, the plain numbers and the ordinary cells around them (blank cells,
    spaces, a decimal comma, comparators, laboratory flags), exactly as the routes
    below read them; only the cells it leaves (signs, exponents, words, refusals...)
    go through the pattern, all columns' together.  The Python code below stays the
    reference (tests/test_compiled_edges.py compares the two cell by cell).
    """
    _bind_arrow()
    out: list[ParsedColumn | None] = [None] * len(columns)
    pending: list[tuple[int, pa.Array, np.ndarray, np.ndarray, np.ndarray | None]] = []
    # With the compiled scan, missing tokens it cannot read are looked for only among the
    # cells it leaves (trimming and comparing every cell costs more than the scan).
    late = tuple(missing) if (missing and compiled_available() and decimal in (".", ",")
                              and not _scan_reads_a_token(tuple(missing), decimal)) else ()
    for i, column in enumerate(columns):
        column = _text_column(column, () if late else missing)
        if not pa.types.is_string(column.type):
            out[i] = parse_numeric(column, decimal)
            continue
        scanned = scanned_numbers(column, decimal)
        if scanned is not None:  # the compiled scan: the same reading (see _scanned)
            out[i] = _scanned(column, decimal, *scanned, pending, i, late)
            continue
        if late:  # the scan declined the column: the tokens as the reference makes them
            column = _text_column(column, late)
        if decimal != ".":
            out[i] = _parse_cells(column, decimal)
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
        if np.isinf(vals).any():  # hundreds of digits: beyond the floating-point range
            out[i] = _parse_cells(column, decimal)
            continue
        rest = np.flatnonzero(_mask(pc.is_valid(column)) & ~quick)
        if rest.size == 0:
            out[i] = ParsedColumn(vals, None, None, np.zeros(n, dtype=bool), column, plain=True)
        else:
            pending.append((i, column, vals, rest, None))
    scanned = [e for e in pending if e[4] is not None]
    if scanned:  # the compiled scan's leftovers: their values, refusals and marks
        got = _read_leftovers(pa.concat_arrays([c.take(pa.array(r)) for _, c, _, r, _ in scanned]),
                              decimal)
        pos = 0
        for i, column, vals, rest, marks in scanned:
            k = rest.size
            vals[rest] = got[0][pos:pos + k]
            bad = np.zeros(len(column), dtype=bool)
            bad[rest] = got[1][pos:pos + k]
            marks[rest] |= got[2][pos:pos + k]
            out[i] = _marked(column, vals, marks, bad, plain=False)
            pos += k
    pending = [e for e in pending if e[4] is None]
    if pending:
        sub = _parse_cells(pa.concat_arrays([c.take(pa.array(r)) for _, c, _, r, _ in pending]),
                           decimal)
        pos = 0
        for i, column, vals, rest, _ in pending:
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


#: The laboratory flags by their code in the compiled scan's marks (bits 3-6; 0: none).
_FLAG_CODES: tuple[str | None, ...] = (None, *LAB_FLAGS)


#: The pattern's reading of cells the compiled scan leaves, by (decimal mark, text):
#: (value, refused, marks).  A reading depends on the cell's text alone, and a file's
#: leftovers repeat a few texts ("haem", "-7.4"), so each is read once; bounded as
#: ``_CHOICE_CACHE`` is.  Up to ``_LOOKED_UP`` leftovers in a chunk are looked up one
#: by one; more go through the pattern together.
_LEFTOVERS: dict[tuple[str, str], tuple[float, bool, int]] = {}
_LOOKED_UP = 2048


def _read_leftovers(cells: pa.Array, decimal: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, refused, marks) of the cells the compiled scan left, as the pattern
    (``_parse_cells``) reads them; marks as the scan's (comparator and flag codes)."""
    if len(cells) <= _LOOKED_UP:
        texts = cells.to_pylist()
        table = _LEFTOVERS
        unknown = list(dict.fromkeys(t for t in texts if (decimal, t) not in table))
        if unknown:
            if len(table) > 10_000:  # bounded: a column of free text cannot grow it for ever
                table.clear()
            read = _pattern_marks(pa.array(unknown, pa.string()), decimal)
            for t, v, b, m in zip(unknown, *(x.tolist() for x in read)):
                table[(decimal, t)] = (v, b, m)
        rows = [table.get((decimal, t)) for t in texts]
        if None not in rows:  # (the other thread may have cleared the table meanwhile)
            return (np.array([r[0] for r in rows], dtype=np.float64),
                    np.array([r[1] for r in rows], dtype=bool),
                    np.array([r[2] for r in rows], dtype=np.uint8))
    return _pattern_marks(cells, decimal)


def _pattern_marks(cells: pa.Array, decimal: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``_parse_cells`` of ``cells``, its comparators and flags as the scan's mark codes."""
    sub = _parse_cells(cells, decimal)
    marks = np.zeros(len(cells), dtype=np.uint8)
    for part, words, shift in ((sub.comparator, COMPARATOR_CODES, 0), (sub.flag, _FLAG_CODES, 3)):
        if part is not None and part.null_count < len(part):
            marks |= np.array([words.index(w) for w in part.to_pylist()], np.uint8) << shift
    return sub.values, sub.bad, marks


def _marked(column: pa.Array, vals: np.ndarray, marks: np.ndarray | None, bad: np.ndarray,
            plain: bool) -> ParsedColumn:
    """A ParsedColumn from the compiled scan's marks: the comparators and flags as text
    columns (null where none; None when the column has none), as the pattern gives them."""
    parts: list[pa.Array | None] = [None, None]
    if marks is not None:
        for j, (codes, words) in enumerate(((marks & 7, COMPARATOR_CODES),
                                            ((marks >> 3) & 15, _FLAG_CODES))):
            if codes.any():
                parts[j] = pc.take(pa.array(words, pa.string()), pa.array(codes))
    return ParsedColumn(vals, parts[0], parts[1], bad, column, plain)


def _scanned(column: pa.Array, decimal: str, vals: np.ndarray, rest_mask: np.ndarray,
             marks: np.ndarray, count: int, not_plain: int, marked: int,
             pending: list[tuple[int, pa.Array, np.ndarray, np.ndarray, np.ndarray | None]],
             i: int, missing: tuple[str, ...] = ()) -> ParsedColumn | None:
    """``parse_numeric_many``'s reading of one column from the compiled scan
    (``csvtext.scanned_numbers``): the values and marks of the cells it read, and the
    valid cells it left (``rest_mask``, ``count`` of them).

    The Python route above is the reference, and this gives its result: the scan reads
    exactly the cells that the quick test and cast read (plain), and the blank, spaced,
    censored and flagged cells as the pattern reads them (each cell's reading depends
    on no other cell).  A column is plain (read whole by the Python route's first
    cast) when every cell read is plain, with a decimal point, and the cells left cast
    too; otherwise the cells left go through the full pattern, as the quick route's
    leftovers do.  Returns None when the column joins ``pending``.

    ``missing``: tokens the scan reads in no cell (``_scan_reads_a_token``), not yet made
    null: the cells left that are one are made null here, as ``_text_column`` does."""
    n = len(column)
    bad = np.zeros(n, dtype=bool)
    if count and missing:
        left = np.flatnonzero(rest_mask)
        hit = _mask(_missing_hits(column.take(pa.array(left)), missing))
        if hit.any():
            gone = np.zeros(n, dtype=bool)
            gone[left[hit]] = True
            column = pc.if_else(pa.array(gone), pa.scalar(None, pa.string()), column)
            rest_mask = rest_mask & ~gone
            count -= int(hit.sum())
    if count == 0:
        return _marked(column, vals, marks if marked else None, bad,
                       plain=decimal == "." and not not_plain)
    rest = np.flatnonzero(rest_mask)
    if decimal == "." and not not_plain:
        try:  # "-7.4", "1e2": the Python route's first cast reads them, and the column is plain
            vals[rest] = _text_floats(column.take(pa.array(rest)))
            return ParsedColumn(vals, None, None, bad, column, plain=True)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            pass
    pending.append((i, column, vals, rest, marks))
    return None


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
    infinite = np.isinf(vals)  # "1e400": a number too large to be any measurement
    if infinite.any():
        bad |= infinite
    vals[bad] = np.nan
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


# ---------------------------------------------------------------------------
# Any container: Arrow, numpy, pandas/polars columns, lists, one cell


def _is_missing_object(cell: object) -> bool:
    if cell is None:
        return True
    if isinstance(cell, (float, np.floating)):
        return bool(np.isnan(cell))
    return type(cell).__name__ in ("NAType", "NaTType")  # pandas' missing markers


_VALUE_RE = re.compile(_VALUE, re.ASCII)


def _text_cell(text: str, decimal: str, missing: Sequence[str]
               ) -> tuple[float, str | None, str | None, bool]:
    """One text cell: (value, comparator, flag, refused), by the same pattern as the column
    reader (``_VALUE``, ASCII digits only); ``tests/test_one_gate.py`` holds the two to
    one result.  No Arrow call: reading one cell (``Panel``) stays cheap."""
    t = text.strip()
    if t == "" or t in missing:
        return math.nan, None, None, False
    if decimal == ",":
        if "." in t:  # with a decimal comma a point can only be grouping: not read
            return math.nan, None, None, True
        t = t.replace(",", ".")
    m = _VALUE_RE.match(t)
    if m is None:
        return math.nan, None, None, True
    v = float(m["num"])
    if math.isinf(v):
        return math.nan, None, None, True
    cmp, flag = m["cmp"] or None, m["flag"] or None
    return (math.nan if cmp else v), cmp, flag, False


def _object_numbers(cells: list[Any], decimal: str, missing: Sequence[str]) -> ParsedColumn:
    """Python objects, each read alone: numbers as numbers, text by the text pattern,
    None/NaN as not measured, anything else (yes/no values, lists...) refused.  The
    marks and texts are object arrays (``None`` for none), not Arrow ones."""
    n = len(cells)
    vals = np.full(n, np.nan)
    bad = np.zeros(n, dtype=bool)
    texts = np.full(n, None, dtype=object)
    cmps = np.full(n, None, dtype=object)
    flags = np.full(n, None, dtype=object)
    for i, c in enumerate(cells):
        if isinstance(c, np.ndarray) and c.ndim == 0:  # a 0-d array is its one cell
            c = c.item()
        if isinstance(c, (bool, np.bool_)):
            bad[i], texts[i] = True, str(bool(c))
        elif _is_missing_object(c):
            continue
        elif isinstance(c, str):
            texts[i] = c
            vals[i], cmps[i], flags[i], bad[i] = _text_cell(c, decimal, missing)
        elif isinstance(c, (int, np.integer, float, np.floating, Decimal)):
            # a Decimal (a database's NUMERIC) is the number it writes, as an Arrow
            # decimal column is; its text as written ("7.40") for messages
            texts[i] = repr(c) if isinstance(c, float) else str(c)[:40]
            try:
                v = float(c)  # a Decimal NaN or infinity, or 1E+400, is not finite
            except OverflowError:  # an integer beyond the floating-point range
                v = math.inf
            except ValueError:  # a signalling Decimal NaN
                v = math.nan
            if math.isfinite(v):
                vals[i] = v
            else:
                bad[i] = True
        else:
            bad[i], texts[i] = True, repr(c)[:60]
    has = [x is not None for x in cmps]
    cmp = cmps if any(has) else None
    flag = flags if any(x is not None for x in flags) else None
    return ParsedColumn(vals, cmp, flag, bad, texts)


def is_column(x: Any) -> bool:
    """True for a column of cells (a sequence, an array, a pandas or polars column); any
    other value is one cell, repeated for every row."""
    return isinstance(x, (list, tuple, range, np.ndarray)) or is_arrow(x) or (
        hasattr(x, "to_numpy") and hasattr(x, "__len__")) or hasattr(x, "to_arrow")


def _objects(seq: Any) -> np.ndarray:
    """A one-dimensional object array of the cells of ``seq`` (lists stay cells)."""
    try:
        arr = np.asarray(seq, dtype=object)
    except (ValueError, TypeError):
        arr = None
    if arr is None or arr.ndim != 1:
        cells = list(seq)
        arr = np.empty(len(cells), dtype=object)
        for i, c in enumerate(cells):
            arr[i] = c
    return arr


def read_numbers(column: Any, decimal: str = ".", missing: Sequence[str] = (),
                 n: int | None = None) -> ParsedColumn:
    """THE number reader: any column (Arrow, numpy, a pandas or polars column, a list)
    or one cell (repeated ``n`` times), read by the policy of the module docstring.

    Each cell is read alone: its reading never depends on the other cells of the
    column (a list ``["4.0", nan]`` reads 4.0 and "not measured").
    """
    if is_arrow(column):
        return parse_numeric(column, decimal, missing)
    if not is_column(column):
        cells = [column] * (1 if n is None else n)
        return _object_numbers(cells, decimal, missing)
    if hasattr(column, "to_arrow") and not isinstance(column, np.ndarray):  # polars
        try:
            return parse_numeric(column.to_arrow(), decimal, missing)
        except (TypeError, AttributeError, pa.ArrowException):
            pass
    arr = column if isinstance(column, np.ndarray) else _objects(column)
    if arr.ndim == 0:
        return _object_numbers([arr.item()] * (1 if n is None else n), decimal, missing)
    if arr.ndim > 1:
        arr = _objects(list(arr))
    if arr.dtype.kind in "fiu":
        vals = arr.astype(np.float64)
        infinite = np.isinf(vals)
        if not infinite.any():
            # no cell is refused, so no cell's text is ever asked for (``cell`` -> None)
            return ParsedColumn(vals, None, None, np.zeros(len(vals), dtype=bool),
                                np.empty(0, dtype=object), plain=True)
        return _object_numbers(arr.tolist(), decimal, missing)
    if arr.dtype.kind == "U":
        return parse_numeric(pa.array(arr.tolist(), pa.string()), decimal, missing)
    return _object_numbers(list(arr), decimal, missing)  # bytes, dates, complex: refused


def read_numbers_many(columns: Sequence[Any], decimal: str = ".", missing: Sequence[str] = (),
                      n: int | None = None) -> list[ParsedColumn]:
    """``read_numbers`` of each of ``columns``, in order: the Arrow ones read together
    (``parse_numeric_many``: their leftover cells share one pass of the pattern), each
    cell still read alone."""
    out: list[ParsedColumn | None] = [None] * len(columns)
    arrow = [i for i, c in enumerate(columns) if is_arrow(c)]
    if arrow:
        _bind_arrow()
        for i, p in zip(arrow, parse_numeric_many([columns[i] for i in arrow], decimal,
                                                  missing)):
            out[i] = p
    for i, c in enumerate(columns):
        if out[i] is None:
            out[i] = read_numbers(c, decimal, missing, n=n)
    return out  # type: ignore[return-value]


def _one(cell: object) -> np.ndarray:
    arr = np.empty(1, dtype=object)
    arr[0] = cell
    return arr


@dataclass(frozen=True)
class NumberCell:
    """One cell read: ``value`` (None when not measured, censored or refused)."""

    value: float | None
    comparator: str | None = None
    flag: str | None = None
    bad: bool = False
    text: str | None = None


def read_number(cell: object, decimal: str = ".", missing: Sequence[str] = ()) -> NumberCell:
    """One cell through ``read_numbers`` (the same reading as in any column)."""
    p = read_numbers(_one(cell), decimal, missing)
    v = float(p.values[0])
    return NumberCell(None if math.isnan(v) else v, _item(p.comparator, 0), _item(p.flag, 0),
                      bool(p.bad[0]), p.cell(0))


def read_setting(text: object) -> float | None:
    """A number given to a setting (an option's value: the anion-gap interval, the serial
    window, a delta limit, a count), read by ``read_number`` as a panel value is, and
    plain: no comparator, no laboratory flag, finite.  None when it is not one (other
    scripts' digits, digit grouping, NaN and infinity words, nothing)."""
    cell = read_number(text)
    if cell.bad or cell.comparator or cell.flag or cell.value is None:
        return None
    return cell.value


#: A number with a word after it that may be a unit ("5.3 kPa", "40mmHg", "40 mm Hg").
_NUMBER_THEN_WORDS = re.compile(r"(?:[<>]=?)?\s*[+-]?[0-9.,]*[0-9]\s*(?P<after>[^\s0-9].*)")


def number_hint(cell: object, decimal: str, unit: str, field: str = "",
                units: Sequence[str] = ()) -> str:
    """What to do about a refused number cell (part of its Problem); ``field`` and its
    accepted ``units`` name the way to state a unit typed after the number."""
    if isinstance(cell, (bool, np.bool_)) or str(cell).strip().lower() in ("true", "false"):
        return "a yes/no value is not a measurement"
    text = str(cell).strip()
    low = text.lower().lstrip("+-")
    if low in ("nan", "inf", "infinity", "na", "n/a") or (
            isinstance(cell, (float, int, np.number)) and not isinstance(cell, bool)):
        return ("NaN, infinity and words are not laboratory values; leave the cell empty "
                "when not measured (or declare the token with --missing)")
    number = text.replace(",", ".") if decimal == "," else text
    if re.fullmatch(r"[+-]?[0-9]+(\.[0-9]*)?([eE][+-]?[0-9]+)?", number) and (
            decimal == "." or "." not in text) and math.isinf(float(number)):
        return "a number beyond the floating-point range is no measurement"
    if any(ch.isdigit() and not "0" <= ch <= "9" for ch in text):
        return "only the digits 0-9 are read; digits of other scripts are refused, not converted"
    odd = next((ch for ch in text if not ch.isascii()), None)
    if odd is not None:  # a typographic minus, a middle dot, a thin or zero-width space...
        return (f"the character {odd!r} (U+{ord(odd):04X}) is not read: write the number "
                "with the digits 0-9, a point (or the declared decimal mark) and - or +")
    if re.search(r"[0-9][_ ][0-9]", text):
        return "digit grouping is not read; write the number without separators"
    if decimal == "." and "," in text:
        return ("a comma is not read as digit grouping, nor as a decimal mark unless the "
                "input declares one (--decimal ,)")
    if decimal == "," and "." in text:
        return "the decimal mark is declared as a comma; a point is not read"
    after = _NUMBER_THEN_WORDS.fullmatch(text)
    if after and units:
        from ..units import normalise

        stated = normalise(after["after"])
        if stated in units:
            return f"the unit is not read from the value: state it on its own ({field} unit {stated})"
    return (f"expected a number in {unit}, optionally with < > <= >= before it or a "
            f"laboratory flag ({' '.join(LAB_FLAGS)}) after it")


# ---------------------------------------------------------------------------
# Choices


@dataclass
class ChoiceColumn:
    """A choice column read: int8 codes into the choice's words, and what was refused."""

    codes: np.ndarray
    bad: np.ndarray
    text: pa.Array | np.ndarray | None
    """The cells as text (for messages, ``cell(i)``); None for integer codes."""
    plain: bool = True
    """No cell is one that formula escaping would change."""

    def cell(self, i: int) -> str | None:
        return _item(self.text, i)


_FORMULA_START = tuple("=+-@\t\r\n\x00")
#: Cell text -> (code, refused), per vocabulary: choices have few distinct spellings.
_CHOICE_CACHE: dict[tuple[str, ...], dict[str, tuple[int, bool]]] = {}


def _choice_of_text(text: str | None, words: tuple[str, ...], default_code: int,
                    missing: Sequence[str]) -> tuple[int, bool]:
    if text is None:
        return default_code, False
    stripped = text.strip()
    if stripped == "" or stripped in missing:
        return default_code, False
    word = normalise_word(stripped)
    if word in words:
        return words.index(word), False
    return default_code, True


def read_choices(column: Any, choice: Choice, missing: Sequence[str] = (),
                 n: int | None = None) -> ChoiceColumn:
    """THE choice reader (vocab module docstring): any column, or one cell repeated ``n``
    times.  A numpy integer array is taken as the kernel's codes already encoded."""
    words, default = choice.words, choice.default_code
    if column is None:
        size = 1 if n is None else n
        return ChoiceColumn(np.full(size, default, np.int8), np.zeros(size, bool), None)
    if isinstance(column, np.ndarray) and column.dtype.kind in "iu" and column.ndim == 1:
        bad = (column < 0) | (column >= len(words))
        return ChoiceColumn(np.where(bad, default, column).astype(np.int8), bad, None)
    if is_arrow(column):
        arr = _text_column(column)
        if pa.types.is_string(arr.type) or pa.types.is_null(arr.type):
            return _choices_of_text(arr.cast(pa.string()), words, default, missing)
        cells = [None if v is None else v for v in arr.to_pylist()]
    elif not is_column(column):
        cells = [column] * (1 if n is None else n)
    else:
        if hasattr(column, "to_arrow") and not isinstance(column, np.ndarray):
            try:
                return read_choices(column.to_arrow(), choice, missing)
            except (TypeError, AttributeError, pa.ArrowException):
                pass
        arr = column if isinstance(column, np.ndarray) else _objects(column)
        cells = [arr.item()] * (1 if n is None else n) if arr.ndim == 0 else list(arr)
    # Python cells, read here without Arrow (one cell for a Panel stays cheap); each
    # distinct text once, by the same rule as an Arrow column's dictionary.
    n_cells = len(cells)
    codes = np.full(n_cells, default, dtype=np.int8)
    bad = np.zeros(n_cells, dtype=bool)
    texts = np.full(n_cells, None, dtype=object)
    seen: dict[str, tuple[int, bool]] = {}
    for i, c in enumerate(cells):
        if isinstance(c, str):
            texts[i] = c
            got = seen.get(c)
            if got is None:
                got = seen[c] = _choice_of_text(c, words, default, missing)
            codes[i], bad[i] = got
        elif not _is_missing_object(c):  # a number or a yes/no value is no choice
            texts[i] = str(c)[:60]
            bad[i] = True
    plain = not bad.any() and not any(t.startswith(_FORMULA_START) for t in seen)
    return ChoiceColumn(codes, bad, texts, plain)


def _choices_of_text(text: pa.Array, words: tuple[str, ...], default: int,
                     missing: Sequence[str]) -> ChoiceColumn:
    seen = distinct_texts(text)  # the compiled edge: the same encoding (None: not built)
    if seen is not None:
        idx, distinct = seen  # -1 for a null cell: the last entry of the lookups below
    else:
        encoded = pc.dictionary_encode(text)
        distinct = encoded.dictionary.to_pylist()
        idx = np.asarray(pc.fill_null(encoded.indices, len(distinct))
                         .to_numpy(zero_copy_only=False))
    table = _CHOICE_CACHE.setdefault(words, {})
    if len(table) > 10_000:  # bounded: a column of free text cannot grow it for ever
        table.clear()
    pairs = []
    for v in distinct:
        key = v if not missing else None
        got = table.get(key) if key is not None else None
        if got is None:
            got = _choice_of_text(v, words, default, missing)
            if key is not None:
                table[key] = got
        pairs.append(got)
    lookup = np.array([c for c, _ in pairs] + [default], dtype=np.int8)
    refused = np.array([b for _, b in pairs] + [False], dtype=bool)
    plain = not any(v.startswith(_FORMULA_START) for v in distinct if v)
    return ChoiceColumn(lookup[idx], refused[idx], text, plain)


def read_choice(cell: object, choice: Choice, missing: Sequence[str] = ()) -> tuple[str, bool]:
    """One choice cell: (word, refused); the default word when empty or refused."""
    c = read_choices(_one(cell), choice, missing)
    return choice.words[int(c.codes[0])], bool(c.bad[0])


def parse_choice(column: pa.Array | pa.ChunkedArray, allowed: Sequence[str],
                 default: str) -> tuple[np.ndarray, np.ndarray, pa.Array, bool]:
    """(codes, bad, text, plain) of a choice column whose words are ``allowed`` (kept for
    callers that hold the words, not the ``Choice``)."""
    from .vocab import CHOICES

    choice = next((c for c in CHOICES if c.words == tuple(allowed) and c.default == default),
                  None)
    if choice is None:
        raise ValueError(f"no choice has the words {allowed}")
    c = read_choices(column, choice)
    return c.codes, c.bad, c.text, c.plain
