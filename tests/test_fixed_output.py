"""Derived values as fixed-point text, the chunked writer, and the batched value parser.

The reference for number text is Python's own ``format(x, ".Nf")``, which rounds the
exact binary value correctly (CPython's float formatting, David Gay's algorithm).
"""

from __future__ import annotations

import csv
import io
import math
import re

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import acidbase
from acidbase import batch, cli, fileio
from acidbase.fields import NUMERIC
from acidbase.results import DECIMALS, DERIVED


def python_text(x: float, decimals: int) -> str | None:
    """The reference: Python's format, with "-0.0" written "0.0"."""
    if not math.isfinite(x):
        return None
    text = format(x, f".{decimals}f")
    return text[1:] if text.startswith("-") and float(text) == 0 else text


# -- format_fixed ----------------------------------------------------------------

@settings(max_examples=300, deadline=None)
@given(st.lists(st.floats(min_value=-1e6, max_value=1e6) | st.just(math.nan), max_size=60),
       st.integers(min_value=0, max_value=3))
def test_fixed_text_is_pythons_format(values, decimals):
    got = fileio.format_fixed(np.array(values, dtype=np.float64), decimals).to_pylist()
    assert got == [python_text(v, decimals) for v in values]


@pytest.mark.parametrize("values, decimals", [
    # one decimal arithmetic lands on halves: 1.5 x 27.5 + 8 - 2 = 47.25 and the like
    (np.round(np.arange(-500, 1500) * 0.1, 1) * 1.5 + 6.0, 1),
    (np.round(np.arange(-500, 1500) * 0.1, 1) * 0.35 + 22.0, 1),
    (np.arange(-4000, 4000) / 8.0, 2),   # exact binary ties: half to even, as Python
    (np.arange(-4000, 4000) / 2.0, 0),
    (np.arange(-4000, 4000) / 2000.0, 3),
])
def test_fixed_text_at_ties_is_pythons_format(values, decimals):
    got = fileio.format_fixed(values, decimals).to_pylist()
    assert got == [python_text(v, decimals) for v in values.tolist()]


def test_fixed_text_examples():
    # 37.45 is stored just above 37.45: Python's format (the reference) gives 37.5
    x = np.array([37.45, 0.125, -0.04, -3.14159, np.nan, np.inf, 0.0, 123.456])
    assert fileio.format_fixed(x, 1).to_pylist() == [
        "37.5", "0.1", "0.0", "-3.1", None, None, "0.0", "123.5"]
    assert fileio.format_fixed(x, 2).to_pylist()[1] == "0.12"  # exact tie: half to even
    assert fileio.format_fixed(np.full(3, np.nan), 1).null_count == 3
    assert fileio.format_fixed(np.array([]), 1).to_pylist() == []


def test_fixed_text_beyond_the_integer_range_falls_back_to_python():
    x = np.array([1e20, -2.5e17, 3.0])
    assert fileio.format_fixed(x, 1).to_pylist() == [python_text(v, 1) for v in x.tolist()]


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=-1e6, max_value=1e6), st.integers(min_value=0, max_value=3),
       st.sampled_from(["", "+"]))
def test_report_number_text_is_pythons_format_without_a_negative_zero(x, decimals, sign):
    """The text report, the terminal app and the rule texts print numbers through
    ``number_text``: Python's format, the CSV's text, and "+0.0" for "+.1f"."""
    from acidbase.rules import number_text

    got = number_text(x, f"{sign}.{decimals}f")
    want = python_text(x, decimals)
    assert got == (("+" + want if not want.startswith("-") else want) if sign else want)


def test_a_base_excess_that_rounds_to_zero_prints_without_a_minus_sign():
    # CLSI C46: HCO3 calc = 0.0307 x 39.75 x 10^(7.41 - 6.105) = 24.631; SBE = 24.631 -
    # 24.8 + 16.2 x (7.41 - 7.40) = -0.007, shown to one decimal as +0.0, never -0.0
    panel = acidbase.Panel(ph=7.41, pco2=39.75, hco3=24.3, na=139, cl=104)
    it = acidbase.interpret(panel)
    assert -0.05 < it.derived["standard_base_excess"] < 0
    from acidbase.report import as_markdown, as_text

    for text in (as_text(it, working=True), as_markdown(it)):
        assert not re.search(r"-0\.0+(?![0-9])", text) and "SBE +0.0" in text


def test_decimals_cover_every_derived_value_and_the_report_uses_them():
    from acidbase.report import DERIVED_LABELS

    assert set(DECIMALS) == set(DERIVED)
    for key, _, _, fmt in DERIVED_LABELS:
        assert fmt.endswith(f".{DECIMALS[key]}f")


# -- the batch CSV and check agree on the shown value -----------------------------------

def test_batch_csv_derived_text_is_checks_value_at_its_decimals(tmp_path, capsys):
    rows = [
        "ph,pco2,hco3,na,cl,k,albumin,lactate,sample_type,hco3_source",
        "7.25,24,10.2,140,104,4.1,38,6.2,arterial,analyser",
        "7.51,35.3,27.5,138,97,3.8,35,0.7,arterial,analyser",
        "7.33,62,31.5,141,98,4.4,41,,arterial,analyser",
        "7.40,40,24.2,140,104,4.0,40,1.0,venous,chemistry",
    ]
    src = tmp_path / "in.csv"
    src.write_text("\n".join(rows) + "\n")
    out = tmp_path / "out.csv"
    assert cli.main(["batch", str(src), "-o", str(out), "--quiet", "--derived", "all",
                     "--summary", str(tmp_path / "s.txt")]) == 0
    got = list(csv.DictReader(out.open(newline="")))
    header = rows[0].split(",")
    for line, r in zip(rows[1:], got):
        cells = dict(zip(header, line.split(",")))
        panel = acidbase.Panel(**{k: float(v) for k, v in cells.items()
                                  if v and k not in ("sample_type", "hco3_source")},
                               sample_type=cells["sample_type"], hco3_source=cells["hco3_source"])
        derived = acidbase.interpret(panel).derived
        for key in DERIVED:
            want = derived.get(key)
            assert r[key] == ("" if want is None else python_text(want, DECIMALS[key])), key


# -- the writer: encoded chunks put in order --------------------------------------------

def test_chunks_encoded_apart_write_the_same_file_as_one_table(tmp_path):
    table = pa.table({"a": pa.array(["=1+2", "x", None, "-5.2"]),
                      "v": pa.array([1.25, None, -0.04, 12.0])})
    whole, parts = tmp_path / "whole.csv", tmp_path / "parts.csv"
    w = fileio.Writer(str(whole), "csv", decimals={"v": 1})
    w.write(table)
    w.close()
    w = fileio.Writer(str(parts), "csv", decimals={"v": 1})
    encoded = [w.encode(table.slice(0, 1)), w.encode(table.slice(1, 2)), w.encode(table.slice(3))]
    for e in encoded:  # encoding may happen on other threads; putting is in order
        w.put(e)
    w.close()
    assert whole.read_bytes() == parts.read_bytes()
    rows = list(csv.reader(io.StringIO(whole.read_text())))
    assert rows == [["a", "v"], ["'=1+2", "1.2"], ["x", ""], ["", "0.0"], ["-5.2", "12.0"]]


def test_parquet_and_jsonl_keep_the_unrounded_value(tmp_path):
    pytest.importorskip("pyarrow.parquet")
    import json

    import pyarrow.parquet as pq

    table = pa.table({"v": pa.array([1.23456])})
    for name, read in (("o.parquet", lambda p: pq.read_table(p)["v"][0].as_py()),
                       ("o.jsonl", lambda p: json.loads(p.read_text())["v"])):
        path = tmp_path / name
        w = fileio.Writer(str(path), name.split(".")[1], decimals={"v": 1})
        w.write(table)
        w.close()
        assert read(path) == 1.23456


# -- parsing a chunk's columns together -------------------------------------------------

CELLS = st.sampled_from(["7.40", "24.2", "140", "", "  ", None, "7.21 L", "<0.3", ">= 180",
                         "-5.2", "+3", "1e2", ".5", "abc", "1.2.3", "8.4*", " 7.4 ", "HH",
                         "7,4", "NaN", "3.9 H"])


@settings(max_examples=200, deadline=None)
@given(st.lists(st.lists(CELLS, min_size=5, max_size=5), min_size=1, max_size=4))
def test_columns_parsed_together_read_as_each_alone(columns):
    arrays = [pa.array(c, type=pa.string()) for c in columns]
    together = fileio.parse_numeric_many(arrays)
    for arr, p in zip(arrays, together):
        alone = fileio._parse_cells(arr, ".")  # every cell through the full pattern
        assert np.array_equal(p.values, alone.values, equal_nan=True)
        assert p.bad.tolist() == alone.bad.tolist()
        for a, b in ((p.comparator, alone.comparator), (p.flag, alone.flag)):
            assert (a is None) == (b is None)
            if a is not None:
                assert a.to_pylist() == b.to_pylist()


# -- partial tallies ---------------------------------------------------------------------

def test_tallies_of_two_halves_merge_to_the_tally_of_the_whole(tmp_path):
    from acidbase import reference

    rows = ["ph,pco2,hco3,na,cl,lactate,sample_id"]
    rows += [f"7.{20 + i % 25},{30 + i % 20},{14 + i % 12},140,{100 + i % 9},"
             f"{'<0.3' if i % 7 == 0 else 1.1},S{i}" for i in range(300)]
    src = tmp_path / "in.csv"
    src.write_text("\n".join(rows) + "\n")
    source = fileio.open_source(src, chunk_rows=1000)
    layout = fileio.map_headers(source.headers)
    table = next(source.chunks())

    def tally_of(t, start):
        out, meta = batch._process(t, layout, ".", reference.Settings(), None, start)
        tally = batch.Tally()
        ids = {"sample_id": t["sample_id"].combine_chunks(), "patient_id": None}
        batch.tally_chunk(tally, out, meta["pco2"], meta["hco3"], meta["refused"],
                          meta["review"], start, ids, meta["fired"])
        return tally

    whole = tally_of(table, 0)
    merged = tally_of(table.slice(0, 130), 0)
    merged.merge(tally_of(table.slice(130), 130))
    assert whole.rows == merged.rows == 300
    for name in ("refused", "review", "processes", "findings", "qualifiers", "reasons"):
        assert getattr(whole, name) == getattr(merged, name), name
    assert whole.flagged == merged.flagged
    assert (whole.plane == merged.plane).all()


def test_every_numeric_field_has_a_parse_path():
    # parse_numeric_many keeps the order of the columns it is given
    arrays = [pa.array(["1", "x"]) for _ in NUMERIC]
    assert len(fileio.parse_numeric_many(arrays)) == len(NUMERIC)


def test_columns_read_as_plain_still_escape_every_dangerous_cell(tmp_path):
    """Escaping is skipped only for columns read in full as bare numbers or allowed
    words; a tab before a value or a choice, or a formula, is still escaped (OWASP)."""
    src = tmp_path / "in.csv"
    src.write_text("ph,pco2,hco3,na,cl,sample_type\n"
                   "7.40,40,24.2,140,104,arterial\n"
                   '"\t7.38",41,24.1,140,104,"\tvenous"\n'
                   "=1+2,40,24,140,104,arterial\n"
                   "7.41,-40,24,140,104,arterial\n")
    out = tmp_path / "out.csv"
    assert cli.main(["batch", str(src), "-o", str(out), "--quiet",
                     "--summary", str(tmp_path / "s.txt")]) == 0
    rows = list(csv.DictReader(out.open(newline="")))
    assert [r["ph"] for r in rows] == ["7.40", "'\t7.38", "'=1+2", "7.41"]
    assert rows[1]["sample_type"] == "'\tvenous"
    assert rows[3]["pco2"] == "-40"  # a plain negative number is left alone
    assert rows[0]["sample_type"] == "arterial"


# -- JSON Lines built column by column ---------------------------------------------------

TEXT = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=12)


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.none() | TEXT,
                          st.none() | st.floats(allow_infinity=False),
                          st.none() | st.integers(-10**12, 10**12),
                          st.none() | st.booleans()), min_size=1, max_size=20))
def test_jsonl_rows_read_back_as_pythons_json_of_the_same_rows(rows):
    """The reference is Python's json module: each line json.loads to the row (NaN as
    null), and for numbers of the size derived values have (Arrow and Python choose
    different forms for very small or large ones: 1e-05, 1e+10) the text is
    json.dumps's, byte for byte."""
    import json

    table = pa.table({"text": pa.array([r[0] for r in rows], type=pa.string()),
                      "number": pa.array([r[1] for r in rows], type=pa.float64()),
                      "count": pa.array([r[2] for r in rows], type=pa.int64()),
                      "flag": pa.array([r[3] for r in rows], type=pa.bool_())})
    lines = fileio.jsonl_bytes(table).decode("utf-8").split("\n")
    assert lines[-1] == "" and len(lines) == len(rows) + 1
    for line, (text, number, count, flag) in zip(lines, rows):
        want = {"text": text, "number": None if number is None or math.isnan(number) else number,
                "count": count, "flag": flag}
        assert json.loads(line) == want
        if want["number"] is None or 1e-3 <= abs(want["number"]) < 1e6:
            assert line == json.dumps(want, ensure_ascii=False)


def test_jsonl_of_other_types_goes_through_json_dumps():
    import datetime as dt
    import json

    table = pa.table({"when": pa.array([dt.datetime(2026, 1, 1, 8, 30)]), "v": [1.5]})
    assert fileio.jsonl_bytes(table).decode() == json.dumps(
        {"when": "2026-01-01 08:30:00", "v": 1.5}) + "\n"


def test_jsonl_of_one_column_and_of_no_rows():
    assert fileio.jsonl_bytes(pa.table({"a": ["x"]})) == b'{"a": "x"}\n'
    assert fileio.jsonl_bytes(pa.table({"a": pa.array([], type=pa.string())})) == b""
