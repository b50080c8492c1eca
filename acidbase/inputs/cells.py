"""THE cell reader: every value that comes in is read here.

(Being rewritten: see acidbase.inputs.)
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ..model import choice_code

#: HL7 v2 table 0078 abnormal flags as they trail values in exports (L, H, LL, HH,
#: A, AA, N), plus ``*``, which several laboratory exports print for "abnormal"
#: (common laboratory practice, no source).
LAB_FLAGS: tuple[str, ...] = ("LL", "HH", "AA", "L", "H", "A", "N", "*")

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_VALUE = (
    r"^\s*(?P<cmp><=|>=|<|>)?\s*(?P<num>" + _NUMBER + r")\s*(?P<flag>"
    + "|".join(re.escape(f) for f in LAB_FLAGS) + r")?\s*$"
)


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
    from ..fileio import escape_danger  # moved with the writer; read lazily

    plain = not pc.any(pc.is_valid(escape_danger(encoded.dictionary))).as_py()
    return lookup[idx], refused[idx], text, plain

