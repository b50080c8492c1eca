"""The compiled CSV writer (acidbase/csvtext.py) against its reference, fileio.csv_rows.

The reference is Arrow's CSV writer (quoting "needed") after ``fileio.fixed_columns``
and ``fileio.escape_formula``; its fixed-point text is checked against Python's own
``format`` in tests/test_fixed_output.py.  Here hypothesis generates tables of every
column kind the compiled writer handles (odd text, formula starts, quotes, line
breaks, ties, huge and tiny numbers, nulls, chunked and sliced arrays) and the two
must give the same bytes.  Set ACIDBASE_REQUIRE_COMPILED=1 to make a missing build
fail these tests instead of skipping them.
"""

from __future__ import annotations

import os

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acidbase import csvtext, fileio

compiled = pytest.mark.skipif(
    csvtext._csvfast is None and not os.environ.get("ACIDBASE_REQUIRE_COMPILED"),
    reason="the compiled writer is not built (no C compiler at install)")

# Text that stresses quoting and formula escaping: the escape bytes, number-like cells
# that are exempt (-5, +1e3, ,5) and look-alikes that are not (-e5, +.), quotes, breaks.
_PIECES = ["=", "+", "-", "@", "\t", "\r", "\n", "\x00", '"', ",", ";", ".", "e", "E", "1",
           "07", " ", "é", "µmol/L", "SUM(A1)", "mmHg", "", "'"]
texts = st.one_of(
    st.lists(st.sampled_from(_PIECES), max_size=6).map("".join),
    st.text(max_size=12),
    st.from_regex(r"[+-]?(\d{0,3}([.,]\d{0,2})?)([eE][+-]?\d{0,2})?", fullmatch=True),
)
# Floats: any double (huge, tiny, negative zero, infinities, NaN), and values on or near
# a rounding tie at 0 to 3 decimals (k + 0.5) / 10**d, where the rounding is decided.
floats = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=-1e6, max_value=1e6),
    st.builds(lambda k, d, s: s * (k + 0.5) / 10 ** d, st.integers(0, 10 ** 6),
              st.integers(0, 3), st.sampled_from([1.0, -1.0])),
    st.sampled_from([0.0, -0.0, 0.05, -0.05, 0.15, 2.675, 1e15, 9.999999999999999e14,
                     -1e-300, 5e-324, 1.7976931348623157e308]),
)


@st.composite
def columns(draw, n: int):
    """(name, array, decimals or None, escaped): one column of ``n`` rows."""
    kind = draw(st.sampled_from(["text", "large_text", "fixed", "int", "bool", "null"]))
    mask = draw(st.lists(st.booleans(), min_size=n, max_size=n))
    if kind in ("text", "large_text"):
        values = draw(st.lists(texts, min_size=n, max_size=n))
        arr = pa.array([None if m else v for v, m in zip(values, mask)],
                       type=pa.string() if kind == "text" else pa.large_string())
        # the reference's escaping joins pa.string() pieces, so cannot take a large_string
        # column (the readers hand over pa.string()); the compiled writer can
        return arr, None, kind == "text" and draw(st.booleans())
    if kind == "fixed":
        values = np.array(draw(st.lists(floats, min_size=n, max_size=n)), dtype=np.float64)
        arr = pa.array(values, mask=np.array(mask, dtype=bool) if n else None,
                       type=pa.float64())
        return arr, draw(st.integers(0, 3)), False
    if kind == "int":
        values = draw(st.lists(st.integers(-2 ** 63, 2 ** 63 - 1), min_size=n, max_size=n))
        return pa.array([None if m else v for v, m in zip(values, mask)], pa.int64()), None, False
    if kind == "bool":
        values = draw(st.lists(st.booleans(), min_size=n, max_size=n))
        return pa.array([None if m else v for v, m in zip(values, mask)]), None, False
    return pa.nulls(n), None, False


@st.composite
def tables(draw):
    """A table of generated columns, each split into chunks, some of them slices."""
    n = draw(st.integers(0, 25))
    width = draw(st.integers(1, 6))
    cols, decimals, escape, plain = {}, {}, set(), set()
    for j in range(width):
        arr, d, esc = draw(columns(n))
        name = f"c{j}"
        # a slice of a longer array: the writer must honour the array's offset
        pad = draw(st.integers(0, 3))
        if pad and n:
            arr = pa.concat_arrays([arr.slice(0, pad % n), arr]).slice(pad % n)
        cuts = sorted(draw(st.lists(st.integers(0, n), max_size=3)))
        pieces = [arr.slice(a, b - a) for a, b in zip([0, *cuts], [*cuts, n])]
        cols[name] = pa.chunked_array(pieces, type=arr.type)
        if d is not None:
            decimals[name] = d
        if esc:
            escape.add(name)
            if draw(st.booleans()):
                plain.add(name)
    return pa.table(cols), decimals, escape, plain


@compiled
@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tables(), st.sampled_from([",", ";", "\t", "|"]))
def test_compiled_writer_gives_the_reference_bytes(case, delimiter):
    """Byte for byte on generated tables."""
    table, decimals, esc, plain = case
    want = fileio.csv_rows(table, decimals, esc, plain, delimiter).to_pybytes()
    got = csvtext.compiled_csv(table, decimals, esc, plain, delimiter)
    assert got == want


@compiled
def test_compiled_writer_rounds_ties_as_the_decimal_digits_say():
    """37.45 is stored just above 37.45, so it rounds up; 0.125 is an exact tie, so it
    goes to even.  Expected text from Python's format(x, '.1f') and '.2f'."""
    table = pa.table({"x": pa.array([37.45, 0.125, -0.04, 2.5, -2.5, 1e20])})
    got = csvtext.compiled_csv(table, {"x": 1}, None, (), ",").decode()
    assert got.split("\n")[:-1] == ['"37.5"', '"0.1"', '"0.0"', '"2.5"', '"-2.5"',
                                    '"100000000000000000000.0"']
    got = csvtext.compiled_csv(table, {"x": 2}, None, (), ",").decode()
    assert got.split("\n")[1] == '"0.12"'  # format(0.125, ".2f"): half to even


@compiled
def test_compiled_writer_escapes_formulas_but_not_plain_numbers():
    """OWASP CSV injection: a leading =, +, -, @, tab or line break gets an apostrophe;
    a signed number does not."""
    table = pa.table({"t": ["=1+1", "-5", "+1e3", "-e5", "@x", "ok", '"q"']})
    got = csvtext.compiled_csv(table, {}, None, (), ",").decode().split("\n")[:-1]
    assert got == ['"\'=1+1"', '"-5"', '"+1e3"', '"\'-e5"', '"\'@x"', '"ok"', '"""q"""']


def test_unsupported_columns_go_to_the_reference_whole():
    """A timestamp column (from a Parquet input, say) is not the compiled writer's:
    the writer falls back to the reference for the whole table."""
    table = pa.table({"t": pa.array([0, 1], type=pa.timestamp("s")), "x": [1.25, None]})
    assert csvtext.compiled_csv(table, {"x": 1}, None, (), ",") is None
    want = fileio.csv_rows(table, {"x": 1}, None, (), ",").to_pybytes()
    _, got = fileio.Writer(None, "csv", decimals={"x": 1}).encode(table)
    assert bytes(got) == want


def test_writer_uses_the_reference_when_the_extension_is_missing(monkeypatch):
    """Without the build (no C compiler at install) the same text comes from Python."""
    table = pa.table({"x": [1.25, -0.01, None], "t": ["=a", "b", None]})
    monkeypatch.setattr(csvtext, "_csvfast", None)
    assert not csvtext.compiled_available()
    assert csvtext.compiled_csv(table, {"x": 1}, None, (), ",") is None
    _, got = fileio.Writer(None, "csv", decimals={"x": 1}).encode(table)
    assert bytes(got) == b'"1.2","\'=a"\n"0.0","b"\n,\n'


@compiled
def test_batch_file_is_the_same_with_and_without_the_extension(tmp_path, monkeypatch):
    """A whole ``acidbase batch`` run on the test data: identical output files."""
    from acidbase.cli import main

    src = os.path.join(os.path.dirname(__file__), "data", "batch")
    inputs = sorted(f for f in os.listdir(src) if f.endswith((".csv", ".tsv", ".jsonl"))
                    and "mapping" not in f)
    assert inputs
    for name in inputs:
        outs = []
        for pure in ("", "1"):
            monkeypatch.setenv("ACIDBASE_PURE_PYTHON", pure)
            out = tmp_path / f"{pure or 'c'}-{name}"
            rc = main(["batch", os.path.join(src, name), "-o", str(out), "--quiet",
                       "--summary", str(tmp_path / "s.txt")])
            outs.append((rc, out.read_bytes() if out.exists() else None))
        assert outs[0] == outs[1], name


def test_fixed_text_columns_are_declared_as_text_in_the_writer_schema():
    """The writer's schema for CSV names fixed-point columns as text, as it did."""
    w = fileio.Writer(None, "csv", decimals={"x": 1})
    schema, _ = w.encode(pa.table({"x": [1.0], "n": [1]}))
    assert schema.field("x").type == pa.string() and schema.field("n").type == pa.int64()


@compiled
@pytest.mark.parametrize("spec, rows", [
    ([(1, 0, [(5, 0, None, b"\0" * 4, b"")])], 5),  # offsets for 0 of 5 cells
    ([(1, 0, [(1, 0, None, np.array([0, 9], np.int32).tobytes(), b"abc")])], 1),  # past data
    ([(3, 0, [(2, 0, None, b"\0" * 8, None)])], 2),  # one int64 for two cells
    ([(4, 99, [(0, 0, None, b"", None)])], 0),  # decimals out of range
    ([(9, 0, [])], 0),  # no such kind
    ([(3, 0, [(1, 0, None, b"\0" * 8, None)])], 2),  # chunks short of the rows
])
def test_compiled_writer_refuses_buffers_that_do_not_hold_their_cells(spec, rows):
    """Bad buffers are a ValueError, never a read out of bounds."""
    from acidbase import _csvfast

    with pytest.raises(ValueError):
        _csvfast.encode(spec, rows, b",")
