"""The compiled number scan and fired-rule packing (acidbase/_csvfast.c) against their
Python references.

The cell reader's fast route (``inputs.cells.parse_numeric_many``) reads cells of
digits and points with Arrow's casts, and ``results._combine`` packs the fired-rule
matrix with numpy shifts and groups it with ``numpy.unique``; that Python code is kept
as the fallback and is the oracle here.  Hypothesis generates cells of every shape the
policy of docs/input.md names (plain numbers with leading zeros, hundreds of digits,
exact halfway points between two doubles, signs, exponents, spaces, words, other
scripts' digits, flags, comparators, missing tokens) and the two routes must give the
same values bit for bit and the same ParsedColumn, the same (indices, labels) and the
same ``interpret_many`` and ``acidbase batch`` output.  Arrow's cast, the reference
for a value, is correctly rounded; so is the C code's (Clinger's exact division or the
C library's strtod).  Set ACIDBASE_REQUIRE_COMPILED=1 to make a missing build fail
these tests instead of skipping them.
"""

from __future__ import annotations

import csv
import math
import os
from decimal import Decimal, localcontext

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acidbase import csvtext, results
from acidbase.inputs import cells

compiled = pytest.mark.skipif(
    csvtext._csvfast is None and not os.environ.get("ACIDBASE_REQUIRE_COMPILED"),
    reason="the compiled edges are not built (no C compiler at install)")


# ---------------------------------------------------------------------------
# Cells


def _midpoint(x: float, up: bool, nudge: int) -> str:
    """The exact decimal halfway between ``x`` and its neighbour (a rounding tie that
    only a correctly rounded reader settles right), nudged by +-1 in its last digit when
    ``nudge`` says so, as plain fixed-point text."""
    y = math.nextafter(x, math.inf if up else 0.0)
    with localcontext() as ctx:
        ctx.prec = 2000
        mid = (Decimal(x) + Decimal(y)) / 2
        text = format(mid, "f")
        if nudge:
            digits = len(text.split(".")[1]) if "." in text else 0
            mid += Decimal(nudge).scaleb(-digits - 1)
            text = format(mid, "f")
    return text


_digits = st.text("0123456789", min_size=1, max_size=30)
short_plain = st.one_of(
    _digits,
    st.builds(lambda a, b: f"{a}.{b}", _digits, _digits),
    st.builds(lambda a: f".{a}", _digits),
    st.builds(lambda a: f"{a}.", _digits),
)
plain_cells = st.one_of(
    short_plain,
    st.builds(lambda z, a: "0" * z + a, st.integers(0, 40), _digits),  # leading zeros
    st.text("0123456789", min_size=300, max_size=420),  # beyond the double range
    st.builds(lambda a, z: a + "." + "0" * z + "1", _digits, st.integers(280, 340)),  # tiny
    st.builds(lambda x, d: format(x, f".{d}f"), st.floats(0, 1e6), st.integers(0, 25)),
    st.builds(repr, st.floats(0, 1e15, allow_nan=False).filter(lambda x: "e" not in repr(x))),
    st.builds(_midpoint, st.floats(1e-5, 1e6), st.booleans(), st.sampled_from([0, 0, 1, -1])),
    st.integers(0, 2 ** 64).map(str),
)
# Near-plain junk: what the quick test lets through and the cast refuses, what the cast
# reads and the quick test does not, and what only the full pattern reads.
_ODD = ["", " ", ".", "..", "1.2.3", "1..2", "+7.4", "-7.4", "-0", "+0", "-0.0", "1e5",
        "1E-2", "5.e1", ".e5", "1e", "1e400", "-1e400", "1e-400", " 7.4", "7.4 ", "\t7.4",
        "7.4\n", "nan", "NaN", "-nan", "inf", "-inf", "Infinity", "NA", "n/a", "0x10",
        "1_400", "1,400", "1 400", "7,4", "7.21 L", "7.21L", "7.21 *", "<5", ">=180",
        "< 0.3", "<=5 H", "７.４", "١٢", "٣.٥", "7.4\u00a0", "\u20037.4", "7.4e", "=1+1",
        "007.40", "0", "00", "0.", ".0", "5.", ".5", "1" * 400, "9" * 309, "1" * 308]
odd_cells = st.one_of(
    st.sampled_from(_ODD),
    st.builds(lambda a, b: a + b, st.sampled_from(["+", "-", " ", "<", ">=", ""]),
              short_plain),
    st.builds(lambda a, b: a + b, short_plain,
              st.sampled_from([" ", " L", "HH", "*", "e2", "E-3", ".", ",5", "\u00a0"])),
    st.text(max_size=8),
    st.text("0123456789.+-eE ,<>=LH", max_size=10),
)
any_cell = st.one_of(plain_cells, odd_cells)
MISSING = ["NA", "-", "n/a", "."]


def _reference_cell(text: str) -> tuple[bool, float]:
    """The Python route's reading of one cell: plain when it passes the quick test
    (digits and points only, not empty) and Arrow's cast reads it as a finite number."""
    if not text or text.strip("0123456789.") != "":
        return False, math.nan
    try:
        v = pc.cast(pa.array([text]), pa.float64())[0].as_py()
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return False, math.nan
    return (True, v) if math.isfinite(v) else (False, math.nan)


def _bits(values: np.ndarray) -> list[int]:
    return np.ascontiguousarray(values, dtype=np.float64).view(np.uint64).tolist()


@compiled
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.one_of(any_cell, st.none()), max_size=40), st.integers(0, 3),
       st.booleans())
def test_scan_reads_each_cell_as_the_python_route(texts, pad, large):
    """Cell by cell: plain exactly when the Python route's quick test and cast say so,
    with the cast's value bit for bit, NaN elsewhere; sliced and large text too."""
    arr = pa.array(["7.4"] * pad + texts, pa.large_string() if large else pa.string())
    arr = arr.slice(pad)
    values, rest, count = csvtext.plain_numbers(arr)
    want = [_reference_cell(t) if t is not None else (False, math.nan) for t in texts]
    for t, (is_plain, v), got_v, got_rest in zip(texts, want, values.tolist(), rest.tolist()):
        assert got_rest == (t is not None and not is_plain), repr(t)
        assert _bits(np.array([got_v])) == _bits(np.array([v])), (repr(t), got_v, v)
    assert count == int(rest.sum())


@compiled
def test_scan_reads_hard_roundings_as_arrow_does():
    """Decimal texts exactly halfway between two doubles, and just either side, at many
    magnitudes (ties go to even: only a correctly rounded reader gets every one)."""
    texts = []
    for x in (0.1, 1.0, 7.4, 35.3, 137.0, 2.675, 1e-5, 123456.789, 2.0 ** 53, 1e21,
              9007199254740993.0, 5e-324, 2.2250738585072014e-308):
        for up in (True, False):
            for nudge in (0, 1, -1):
                texts.append(_midpoint(x, up, nudge))
    arr = pa.array(texts)
    values, rest, _ = csvtext.plain_numbers(arr)
    assert not rest.any()
    assert _bits(values) == _bits(pc.cast(arr, pa.float64()).to_numpy())


# The cells the scan with marks reads besides plain numbers, and their near misses:
# blanks, spaces and tabs (and blanks it leaves: no-break and em spaces, form feeds,
# vertical tabs), comparators and flags in every order, lower-case flags, doubled marks.
_BLANKS = ["", " ", "  ", "\t", " \t ", "\u00a0", "\u2003", "\f", "\v", "\r", "\n"]
_CMPS = ["<", "<=", ">", ">=", "=<", "=>", "<<", "><", "=", "≤", "<=="]
_FLAGS = [*cells.LAB_FLAGS, "l", "h", "LH", "LA", "HHH", "**", "L*", "AAA", "NN", "HI", "LOW",
          "H L", "Z"]
_NUMBERS = st.one_of(short_plain, st.sampled_from(["7,4", "7,", ",5", "1,400", "7.4.1", "7,4,1",
                                                    "-7.4", "+0.3", "1e2", ".", ",", "1" * 320,
                                                    "<5", "7.4L"]))
marked_cells = st.one_of(
    st.sampled_from(_BLANKS),
    st.builds(lambda a, c, b, x, d, f, e: a + c + b + x + d + f + e,
              st.sampled_from(_BLANKS), st.one_of(st.just(""), st.sampled_from(_CMPS)),
              st.sampled_from(_BLANKS), _NUMBERS, st.sampled_from(_BLANKS),
              st.one_of(st.just(""), st.sampled_from(_FLAGS)), st.sampled_from(_BLANKS)),
    st.builds(lambda x, f: x + f, _NUMBERS, st.sampled_from(_FLAGS)),
    st.builds(lambda c, x: c + x, st.sampled_from(_CMPS), _NUMBERS),
)


def _python_reading(text: str, decimal: str) -> tuple[cells.ParsedColumn, bool]:
    """The pure-Python route's reading of one cell alone (the reference), and whether
    the route reads it as a plain number (the quick test and the first cast)."""
    old = os.environ.get("ACIDBASE_PURE_PYTHON")
    os.environ["ACIDBASE_PURE_PYTHON"] = "1"
    try:
        p = cells.parse_numeric_many([pa.array([text], pa.string())], decimal)[0]
    finally:
        if old is None:
            del os.environ["ACIDBASE_PURE_PYTHON"]
        else:
            os.environ["ACIDBASE_PURE_PYTHON"] = old
    return p, p.plain


def _mark_of(col) -> str | None:
    return None if col is None else col.to_pylist()[0]


@compiled
@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.one_of(marked_cells, any_cell, st.none()), max_size=30), st.integers(0, 3),
       st.booleans(), st.sampled_from([".", ","]))
def test_scan_with_marks_reads_each_cell_as_the_pattern_does(texts, pad, large, decimal):
    """Cell by cell: each cell the scan reads (not left to the pattern) has the Python
    route's value bit for bit, its comparator and flag, no refusal, and is marked plain
    exactly when the Python route reads it as a plain number; the counts add up."""
    arr = pa.array(["7.4"] * pad + texts, pa.large_string() if large else pa.string())
    arr = arr.slice(pad)
    values, rest, marks, count, not_plain, marked = csvtext.scanned_numbers(arr, decimal)
    assert count == int(rest.sum())
    assert not_plain == int(((marks & csvtext.NOT_PLAIN) != 0).sum())
    assert marked == int(((marks & 0x7F) != 0).sum())
    for t, v, r, m in zip(texts, values.tolist(), rest.tolist(), marks.tolist()):
        if t is None:
            assert not r and m == 0 and math.isnan(v)
            continue
        if r:
            assert m == 0 and math.isnan(v), repr(t)
            continue
        want, is_plain = _python_reading(t, decimal)
        assert not want.bad[0], repr(t)
        assert _bits(np.array([v])) == _bits(want.values), (repr(t), v, want.values[0])
        assert csvtext.COMPARATOR_CODES[m & 7] == _mark_of(want.comparator), repr(t)
        assert cells._FLAG_CODES[(m >> 3) & 15] == _mark_of(want.flag), repr(t)
        assert ((m & csvtext.NOT_PLAIN) == 0) == is_plain, repr(t)


def _grid_cells() -> list[str]:
    """Every combination of a blank, a comparator, a blank, a number, a blank, a flag and
    a blank from short lists of the shapes that matter and their near misses."""
    import itertools

    ends = ["", " ", "\t", "\v", "\u00a0"]
    inner = ["", " ", "\t", "\v", "\f"]
    cmps = ["", "<", "<=", ">", ">=", "=<", "<<", "="]
    numbers = ["7.4", "7,4", ".5", "5.", "007", "-1", "1e2", ".", ",", "1.2.3", "1" * 25]
    flags = ["", "L", "HH", "AA", "*", "l", "LA", "LLL"]
    return ["".join(p) for p in itertools.product(ends, cmps, inner, numbers, inner, flags,
                                                  ends)]


@compiled
@pytest.mark.parametrize("decimal", [".", ","])
def test_scan_with_marks_reads_every_combination_as_the_pattern_does(monkeypatch, decimal):
    """Every combination (440,000 cells): each cell the scan reads has the pure-Python
    route's value bit for bit, comparator and flag and is not refused; each it leaves is
    left whole (NaN, no marks); the whole column reads the same both ways."""
    texts = _grid_cells()
    arr = pa.array(texts, pa.string())
    values, rest, marks, _, _, _ = csvtext.scanned_numbers(arr, decimal)
    monkeypatch.setenv("ACIDBASE_PURE_PYTHON", "1")
    want = cells.parse_numeric_many([arr], decimal)[0]
    monkeypatch.delenv("ACIDBASE_PURE_PYTHON")
    read = ~rest
    assert not want.bad[read].any(), [texts[i] for i in np.flatnonzero(read & want.bad)[:5]]
    assert _bits(values[read]) == _bits(want.values[read])
    assert np.isnan(values[rest]).all() and not marks[rest].any()
    for col, words, code in ((want.comparator, csvtext.COMPARATOR_CODES, marks & 7),
                             (want.flag, cells._FLAG_CODES, marks >> 3 & 15)):
        expected = col.to_pylist() if col is not None else [None] * len(texts)
        got = [words[c] for c in code.tolist()]
        wrong = [texts[i] for i in np.flatnonzero(read) if got[i] != expected[i]]
        assert not wrong, wrong[:5]
    bare = (marks & csvtext.NOT_PLAIN) == 0  # plain: digits and one point, as written
    want_bare = [decimal == "." and t.strip("0123456789.") == "" for t in texts]
    assert [texts[i] for i in np.flatnonzero(read) if bare[i] != want_bare[i]] == []
    got = cells.parse_numeric_many([arr], decimal)[0]
    _same_parsed(got, want)


@compiled
def test_scan_with_marks_reads_the_ordinary_cells_of_an_export():
    """The cells a laboratory export prints (each read as the pattern reads it, by the
    test above) are read by the scan and none is left to the pattern; a refusal is."""
    texts = ["7.21 L", "7.21L", " 7.4 ", "\t35.3", "<0.3", "< 0.3", ">=180 H", "<=5 *",
             "6.1 HH", "", "   ", "140 N", "haem", "-7.4", "1e2", "7,4"]
    values, rest, marks, count, _, _ = csvtext.scanned_numbers(pa.array(texts), ".")
    assert rest.tolist() == [False] * 12 + [True] * 4
    assert values[:3].tolist() == [7.21, 7.21, 7.4] and math.isnan(values[4])
    assert [csvtext.COMPARATOR_CODES[m & 7] for m in marks[:8]] == [
        None, None, None, None, "<", "<", ">=", "<="]
    assert [cells._FLAG_CODES[m >> 3 & 15] for m in marks[:9]] == [
        "L", "L", None, None, None, None, "H", "*", "HH"]
    values, rest, _, _, _, _ = csvtext.scanned_numbers(pa.array(["7,4", "7.4", "<1,5 L"]), ",")
    assert rest.tolist() == [False, True, False] and values[0] == 7.4


def _same_parsed(a: cells.ParsedColumn, b: cells.ParsedColumn) -> None:
    assert _bits(a.values) == _bits(b.values)
    for x, y in ((a.comparator, b.comparator), (a.flag, b.flag)):
        assert (x is None) == (y is None)
        if x is not None:
            assert x.type == y.type and x.to_pylist() == y.to_pylist()
    assert a.bad.tolist() == b.bad.tolist()
    assert a.plain == b.plain
    assert a.text.equals(b.text)


def _both(monkeypatch, read):
    monkeypatch.delenv("ACIDBASE_PURE_PYTHON", raising=False)
    got = read()
    monkeypatch.setenv("ACIDBASE_PURE_PYTHON", "1")
    want = read()
    monkeypatch.delenv("ACIDBASE_PURE_PYTHON")
    return got, want


column_of_cells = st.one_of(
    st.lists(st.one_of(plain_cells, st.none()), max_size=30),  # the common, plain case
    st.lists(st.one_of(plain_cells, st.none(), marked_cells), max_size=30),  # blanks, marks
    st.lists(st.one_of(plain_cells, st.none(), st.sampled_from(["-7.4", "1e2", "+.5"])),
             max_size=30),  # what the first cast reads whole
    st.lists(st.one_of(any_cell, st.none()), max_size=30),
)


@compiled
@settings(max_examples=300, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(column_of_cells, min_size=1, max_size=4), st.booleans(),
       st.sampled_from([".", ".", ","]))
def test_columns_read_the_same_with_and_without_the_extension(monkeypatch, cols, use_missing,
                                                               decimal):
    """Whole columns, several at once (their leftovers share one pattern call): the same
    values, comparators, flags, refusals and plain mark from both routes."""
    missing = MISSING if use_missing else []
    arrays = [pa.array(c, pa.string()) for c in cols]
    got, want = _both(monkeypatch, lambda: cells.parse_numeric_many(arrays, decimal, missing))
    for g, w in zip(got, want):
        _same_parsed(g, w)
    got, want = _both(monkeypatch, lambda: [cells.read_numbers(a, decimal, missing)
                                            for a in arrays])
    for g, w in zip(got, want):
        _same_parsed(g, w)


# ---------------------------------------------------------------------------
# Fired-rule packing


def _numpy_words(mask: np.ndarray) -> np.ndarray:
    """results._combine's packing, as numpy does it (bit r % 64 of word r // 64)."""
    k = (mask.shape[0] + 63) // 64
    words = np.zeros((mask.shape[1], k), dtype=np.uint64)
    for r in range(mask.shape[0]):
        words[:, r // 64] |= mask[r].astype(np.uint64) << np.uint64(r % 64)
    return words


@st.composite
def fired(draw):
    """A rules x rows bool matrix with repeated patterns, as a kernel's is."""
    rules = draw(st.sampled_from([1, 7, 63, 64, 65, 130]))
    rows = draw(st.integers(0, 120))
    patterns = draw(st.integers(1, 6))
    seed = draw(st.integers(0, 2 ** 32 - 1))
    rng = np.random.default_rng(seed)
    density = draw(st.sampled_from([0.0, 0.05, 0.3, 0.9, 1.0]))
    base = rng.random((rules, patterns)) < density
    mask = base[:, rng.integers(0, patterns, rows)]
    if draw(st.booleans()) and rows:  # a few rows of their own
        mask[:, rng.integers(0, rows, 3)] = rng.random((rules, 3)) < 0.5
    if draw(st.booleans()):  # a view, not a contiguous array (``fired & keep`` is one)
        mask = np.asfortranarray(mask)
    return mask


@compiled
@settings(max_examples=300, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(fired())
def test_rule_packing_gives_numpy_words_indices_and_labels(monkeypatch, mask):
    """The same words, and the same (indices, labels) in the same order, from both."""
    monkeypatch.setattr(results, "_LABELS", {})  # the module's cache assumes the rule codes
    names = [f"R{r}" for r in range(mask.shape[0])]
    assert np.array_equal(csvtext.packed_rules(mask), _numpy_words(mask))
    if mask.shape[0] <= 64:
        inverse, keys, first = csvtext.grouped_words(_numpy_words(mask)[:, 0])
        uniques, want_inverse = np.unique(_numpy_words(mask)[:, 0], return_inverse=True)
        assert keys == uniques.tolist()
        assert inverse.tolist() == want_inverse.reshape(-1).tolist()
        assert first == [int(np.flatnonzero(want_inverse.reshape(-1) == j)[0])
                         for j in range(len(keys))]

    def combine():
        results._LABELS.clear()  # no label cached by the other route
        return results._combine(mask, names)

    (got_i, got_l), (want_i, want_l) = _both(monkeypatch, combine)
    assert got_l == want_l
    assert got_i.dtype == want_i.dtype == np.int32
    assert got_i.tolist() == want_i.tolist()
    for i in range(mask.shape[1]):  # and the labels say which rules fired
        assert got_l[got_i[i]] == ";".join(n for n, on in zip(names, mask[:, i]) if on)


# ---------------------------------------------------------------------------
# Whole runs

_FIELDS = {  # plausible cells (so that rules fire) and a share of odd ones
    "ph": ["7.4", "7.21", "7.550", "6.95", "7.21 L", "7.10", "7.35"],
    "pco2": ["40", "35.3", "60.0", "22", "80.1"],
    "hco3": ["24", "27.5", "14.2", "35", "9.8"],
    "na": ["140", "138", "128", "152"],
    "cl": ["104", "97", "110", "92"],
    "k": ["4.0", "3.8", "6.1 H", "2.9"],
    "albumin": ["40", "35", "22", ""],
    "lactate": ["0.7", "<0.3", "4.2", "11.0", ""],
}


def _lab_cell(field: str):
    return st.one_of(st.sampled_from(_FIELDS[field]), st.sampled_from(_FIELDS[field]),
                     odd_cells, st.none())


@st.composite
def lab_tables(draw):
    n = draw(st.integers(1, 25))
    return {f: draw(st.lists(_lab_cell(f), min_size=n, max_size=n)) for f in _FIELDS}


def _table_bits(t: pa.Table) -> dict[str, list]:
    """A table's cells, floats by their bits (NaN equals NaN), nulls as None."""
    out = {}
    for name, col in zip(t.column_names, t.columns):
        if pa.types.is_floating(col.type):
            vals = pc.fill_null(col.cast(pa.float64()), 0.0).to_numpy()
            out[name] = (_bits(vals), col.is_null().to_pylist())
        else:
            out[name] = col.to_pylist()
    return out


@compiled
@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(lab_tables())
def test_interpret_many_is_the_same_with_and_without_the_extension(monkeypatch, table):
    """Every output column of ``interpret_many`` on generated text panels."""
    from acidbase import interpret_many

    arrow = pa.table({k: pa.array(v, pa.string()) for k, v in table.items()})
    got, want = _both(monkeypatch, lambda: interpret_many(arrow, missing=["NA"]))
    assert _table_bits(got.to_arrow()) == _table_bits(want.to_arrow())
    assert got.finding_codes().tolist() == want.finding_codes().tolist()


@compiled
@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(lab_tables())
def test_batch_file_is_the_same_with_and_without_the_extension(monkeypatch, tmp_path_factory,
                                                              table):
    """A generated CSV through ``acidbase batch`` (serial checks on): the same output and
    summary bytes, and the same exit code."""
    from acidbase.cli import main

    d = tmp_path_factory.mktemp("batch")
    src = d / "in.csv"
    n = len(table["ph"])
    with open(src, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(["sample_id", "patient_id", "collected_at", *_FIELDS])
        for i in range(n):
            w.writerow([f"S{i}", f"P{i % 3}", f"2026-01-01T{i % 24:02d}:00:00Z",
                        *[(table[k][i] or "").replace("\x00", "") for k in _FIELDS]])

    def run(tag):
        out, summary = d / f"{tag}.csv", d / f"{tag}.txt"
        rc = main(["batch", str(src), "-o", str(out), "--quiet", "--summary", str(summary),
                   "--missing", "NA", "--decimal", "."])
        text = summary.read_bytes() if summary.exists() else b""
        return rc, out.read_bytes() if out.exists() else None, text.split(b"\n  audit:")[0]

    tags = iter(["compiled", "python"])
    got, want = _both(monkeypatch, lambda: run(next(tags)))
    assert got == want


# ---------------------------------------------------------------------------
# The edges themselves


def test_python_route_answers_when_the_extension_is_missing(monkeypatch):
    """Without the build (no C compiler at install) the Python code reads the same."""
    arr = pa.array(["7.40", None, "1e2", "7.21 L", "<5", "x", ""])
    monkeypatch.setattr(csvtext, "_csvfast", None)
    monkeypatch.setattr(results, "_LABELS", {})  # the module's cache assumes the rule codes
    assert csvtext.plain_numbers(arr) is None
    assert csvtext.packed_rules(np.ones((3, 2), bool)) is None
    assert csvtext.grouped_words(np.zeros(2, np.uint64)) is None
    p = cells.parse_numeric_many([arr])[0]
    assert p.values[0] == 7.4 and p.values[2] == 100.0 and p.values[3] == 7.21
    assert p.bad.tolist() == [False, False, False, False, False, True, False]
    idx, labels = results._combine(np.array([[1, 0, 1], [1, 1, 0]], bool), ["A", "B"])
    assert [labels[i] for i in idx] == ["A;B", "B", "A"]


@compiled
@pytest.mark.parametrize("args", [
    (1, 0, None, np.array([0, 9], np.int32).tobytes(), b"abc", False),  # past the data
    (2, 0, None, np.array([0, 1], np.int32).tobytes(), b"ab", False),  # offsets short
    (1, 0, None, np.array([2, 1], np.int32).tobytes(), b"ab", False),  # backwards
    (2, 0, b"", np.array([0, 1, 2], np.int32).tobytes(), b"ab", False),  # no validity bits
    (1, 0, None, np.array([0, 1], np.int32).tobytes(), b"a", True),  # large: short offsets
])
def test_scan_refuses_buffers_that_do_not_hold_their_cells(args):
    """Bad buffers are a ValueError, never a read out of bounds."""
    from acidbase import _csvfast

    n = args[0]
    with pytest.raises(ValueError):
        _csvfast.scan_numbers(*args, np.empty(n), np.empty(n, np.uint8))
    good = (1, 0, None, np.array([0, 1], np.int32).tobytes(), b"7", False)
    with pytest.raises(ValueError):  # outputs too short for the cells
        _csvfast.scan_numbers(*good, np.empty(0), np.empty(1, np.uint8))
    with pytest.raises((ValueError, TypeError, BufferError)):  # a read-only output
        _csvfast.scan_numbers(*good, b"\0" * 8, np.empty(1, np.uint8))


@compiled
def test_packing_refuses_buffers_that_do_not_hold_their_cells():
    from acidbase import _csvfast

    with pytest.raises(ValueError):  # a mask short of rules x rows
        _csvfast.pack_rules(b"\1" * 5, 2, 3, np.empty(3, np.uint64))
    with pytest.raises(ValueError):  # two words a row needed for 65 rules
        _csvfast.pack_rules(b"\1" * 65, 65, 1, np.empty(1, np.uint64))
    with pytest.raises(ValueError):
        _csvfast.group_words(np.zeros(3, np.uint64), 3, np.empty(2, np.int32))


@compiled
def test_leftover_cells_are_read_once_per_text_and_decimal_mark(monkeypatch):
    """The cells the scan leaves ("haem", "-7,4", "+1e2 L") go through the pattern once per
    distinct text and decimal mark; later chunks read them from the table, the same
    as the pure-Python route reads them, and a decimal comma's reading is its own."""
    monkeypatch.setattr(cells, "_LEFTOVERS", {})
    calls = []
    parse = cells._parse_cells
    monkeypatch.setattr(cells, "_parse_cells", lambda c, d: calls.append(len(c)) or parse(c, d))
    texts = ["haem", "-7,4", "-7.4", "+1e2 L", "<-5", "7.4", None, "haem", "-7,4"]
    arr = pa.array(texts * 3, pa.string())
    for decimal in (".", ",", ".", ","):
        got, want = _both(monkeypatch, lambda: cells.parse_numeric_many([arr], decimal)[0])
        _same_parsed(got, want)
    # the pure route reads whole leftovers (15 cells and more) each time; the compiled one
    # reads the distinct texts once per mark: 5 with a point, 6 with a comma ("7.4" too)
    assert sorted(c for c in calls if c < 10) == [5, 6]


# ---------------------------------------------------------------------------
# Choice columns

_SPELLINGS = ["arterial", "Arterial", " venous ", "VENOUS", "capillary", "mixed venous", "",
              " ", "unknown", "art", "=1+1", "-", "NA", "arterial\u00a0", "ärtérial", "\u2003"]


@compiled
@settings(max_examples=300, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(st.one_of(st.sampled_from(_SPELLINGS), st.text(max_size=6), st.none()),
                max_size=60), st.integers(0, 3), st.booleans(), st.integers(1, 8))
def test_distinct_texts_encode_as_arrow_does(texts, pad, large, limit):
    """The same distinct texts in the same order, and the same index per cell (-1 for
    null), as Arrow's dictionary encoding; None beyond the limit; sliced and large text."""
    arr = pa.array(["pad"] * pad + texts, pa.large_string() if large else pa.string())
    arr = arr.slice(pad)
    got = csvtext.distinct_texts(arr, limit)
    encoded = pc.dictionary_encode(arr)
    want_texts = encoded.dictionary.to_pylist()
    if len(want_texts) > limit:
        assert got is None
        return
    indices, distinct = got
    assert distinct == want_texts
    assert indices.tolist() == pc.fill_null(encoded.indices, -1).to_pylist()


@compiled
@settings(max_examples=200, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(st.one_of(st.sampled_from(_SPELLINGS), st.text(max_size=4), st.none()),
                max_size=40), st.booleans(), st.sampled_from(["sample_type", "hco3_source"]))
def test_choice_columns_read_the_same_with_and_without_the_extension(monkeypatch, texts,
                                                                     use_missing, name):
    """Codes, refusals, texts and the plain mark of a choice column from both routes."""
    from acidbase.inputs.vocab import CHOICE_BY_NAME

    missing = MISSING if use_missing else []
    arr = pa.array(texts, pa.string())
    got, want = _both(monkeypatch, lambda: cells.read_choices(arr, CHOICE_BY_NAME[name],
                                                              missing))
    assert got.codes.dtype == want.codes.dtype
    assert got.codes.tolist() == want.codes.tolist()
    assert got.bad.tolist() == want.bad.tolist()
    assert got.plain == want.plain
    assert got.text.equals(want.text)


_TOKEN_CELLS = ["7.4", "\u00a0NA\u2003", " NA", "NA ", "NA", "na", "9999", " 9999 ", "<0.1",
                "7.4 L", "", " ", "\t", "haem", None, "-7.4", "1e2", "7,4", "n/a", "\u00a0", "-"]


@compiled
@pytest.mark.parametrize("missing", [["NA"], ["NA", "-", "n/a", "."], ["9999", "NA"], [""],
                                     [" "], ["<0.1"], ["n/a", "\u00a0"], ["7,4"], ["haem"]])
@pytest.mark.parametrize("decimal", [".", ","])
@pytest.mark.parametrize("cells_of", ["all", "plain_and_tokens", "tokens"])
def test_missing_tokens_read_the_same_with_and_without_the_extension(monkeypatch, missing,
                                                                      decimal, cells_of):
    """Declared missing tokens, with Unicode spaces around them, tokens the scan would read
    (digits, blanks, a censored value) and tokens it would not: the same ParsedColumn
    (values, marks, refusals, plain, and the text with the tokens made null) both ways."""
    texts = {"all": _TOKEN_CELLS, "plain_and_tokens": ["7.4", "35", " NA", "NA", None, "7"],
             "tokens": ["NA", " NA ", "\u00a0NA"]}[cells_of]
    arr = pa.array(texts * 2, pa.string())
    got, want = _both(monkeypatch, lambda: cells.parse_numeric_many([arr, arr.slice(3)],
                                                                    decimal, missing))
    for g, w in zip(got, want):
        _same_parsed(g, w)
