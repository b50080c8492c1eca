"""Reading and writing panel files: values, headers, dialects, times, escaping."""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acidbase import fileio, loinc
from acidbase.fields import NUMERIC
from acidbase.fileio import BatchInputError

DATA = Path(__file__).parent / "data" / "batch"


# -- values -------------------------------------------------------------------

def test_plain_numbers_are_read_exactly():
    # Python's float() is the reference reading of a decimal string.
    cells = ["7.40", "-5.2", "24.22", "1e2", ".5", "+3"]
    p = fileio.parse_numeric(pa.array(cells))
    assert p.values.tolist() == [float(c) for c in cells]
    assert not p.bad.any() and p.comparator is None and p.flag is None


def test_empty_and_blank_cells_are_not_measured_not_refused():
    p = fileio.parse_numeric(pa.array(["", None, "   ", "7.4"]))
    assert np.isnan(p.values[:3]).all() and p.values[3] == 7.4
    assert not p.bad.any()


@pytest.mark.parametrize("flag", ["L", "H", "LL", "HH", "A", "AA", "N"])
def test_trailing_hl7_flag_is_read_off_and_the_number_used(flag):
    # HL7 v2 table 0078 abnormal flags (interoperability notes A.5).
    p = fileio.parse_numeric(pa.array([f"7.21 {flag}", "7.40"]))
    assert p.values[0] == 7.21 and p.flag.to_pylist() == [flag, None]
    assert not p.bad.any()


def test_asterisk_flag_without_space_is_read_off():
    # "*" as an abnormal mark: common laboratory practice, no source.
    p = fileio.parse_numeric(pa.array(["8.4*"]))
    assert p.values[0] == 8.4 and p.flag.to_pylist() == ["*"]


@pytest.mark.parametrize("cell,cmp", [("<5", "<"), (">180", ">"), ("<=0.3", "<="),
                                      (">= 15", ">=")])
def test_censored_value_keeps_its_comparator_and_never_becomes_a_number(cell, cmp):
    # FHIR Quantity.comparator <, <=, >=, > (interoperability notes A.5).
    p = fileio.parse_numeric(pa.array([cell]))
    assert np.isnan(p.values[0]) and p.comparator.to_pylist() == [cmp]
    assert p.censored.tolist() == [True] and not p.bad.any()


@pytest.mark.parametrize("cell", ["haem", "1,234", "7.2.1", "NA", "n/a", "7.21 X", "--"])
def test_text_that_is_not_a_number_is_refused_not_guessed(cell):
    # No silent guesses (interoperability notes A.5: reject thousands separators).
    p = fileio.parse_numeric(pa.array([cell, "7.4"]))
    assert p.bad.tolist() == [True, False] and np.isnan(p.values[0])


def test_decimal_comma_is_read_and_a_point_is_then_refused():
    # R read.csv2 / pandas decimal=',' convention; with a decimal comma "1.234" is a
    # thousands separator, which is never guessed.
    p = fileio.parse_numeric(pa.array(["7,21", "<0,3", "8,4 H", "1.234"]), decimal=",")
    assert p.values[0] == 7.21 and p.values[2] == 8.4
    assert p.comparator.to_pylist()[1] == "<" and p.flag.to_pylist()[2] == "H"
    assert p.bad.tolist() == [False, False, False, True]


def test_native_parquet_numbers_pass_straight_through():
    p = fileio.parse_numeric(pa.array([7.4, None, 7.2], type=pa.float32()))
    assert p.values[0] == pytest.approx(7.4, abs=1e-6) and np.isnan(p.values[1])


def test_missing_token_is_only_missing_when_declared(tmp_path):
    f = tmp_path / "m.csv"
    f.write_text("ph,pco2,hco3,na,cl,k\n7.40,40,24.22,140,106.78,NA\n")
    plain = next(fileio.open_source(f).chunks())
    assert fileio.parse_numeric(plain["k"]).bad.tolist() == [True]
    declared = next(fileio.open_source(f, missing=["NA"]).chunks())
    assert fileio.parse_numeric(declared["k"]).bad.tolist() == [False]


# -- dialects -----------------------------------------------------------------

@pytest.mark.parametrize("name,delimiter", [("comma.csv", ","), ("semicolon_comma_bom.csv", ";"),
                                            ("tab.tsv", "\t")])
def test_delimiter_is_detected(name, delimiter):
    d = fileio.sniff_csv(DATA / name)
    assert d.delimiter == delimiter
    assert d.headers[0] == "sample_id"  # the UTF-8 byte-order mark is not part of it


def test_decimal_comma_is_detected_in_a_semicolon_file():
    d = fileio.sniff_csv(DATA / "semicolon_comma_bom.csv")
    assert fileio.detect_decimal(d.sample, [1, 2, 3, 4, 5], d.delimiter) == ","
    d = fileio.sniff_csv(DATA / "comma.csv")
    assert fileio.detect_decimal(d.sample, [1, 2, 3, 4, 5], d.delimiter) == "."


def test_mixed_decimal_marks_stop_the_run():
    with pytest.raises(BatchInputError, match="--decimal"):
        fileio.detect_decimal([["7,40", "40.5"]], [0, 1], ";")


def test_unreadable_encoding_names_the_byte(tmp_path):
    f = tmp_path / "latin.csv"
    f.write_bytes("ph,pco2,hco3,na,cl,note\n7.40,40,24.22,140,106.78,gr\xfc\xdfe\n"
                  .encode("latin-1"))
    with pytest.raises(BatchInputError, match="0xfc"):
        fileio.sniff_csv(f)
    assert fileio.sniff_csv(f, encoding="cp1252").headers[-1] == "note"


def test_format_is_known_from_the_name_or_the_bytes(tmp_path):
    assert fileio.detect_format(DATA / "panels.jsonl") == "jsonl"
    f = tmp_path / "noext"
    f.write_bytes(b"PAR1....")
    assert fileio.detect_format(f) == "parquet"  # Parquet magic number "PAR1"


# -- headers ------------------------------------------------------------------

def test_our_field_names_map_case_insensitively_and_keep_units_in_parentheses():
    layout = fileio.map_headers(["pH", "pCO2 (kPa)", "HCO3", "Na", "Cl", "ward"])
    assert layout.field_of["pCO2 (kPa)"] == "pco2" and layout.units["pco2"] == "kPa"
    assert layout.unread == ("ward",)


def test_loinc_codes_map_to_their_fields():
    # LOINC 2744-1 pH arterial, 2019-8 pCO2 arterial, 1960-4 HCO3 arterial,
    # 2951-2 sodium serum/plasma, 2075-0 chloride (interoperability notes A.1).
    layout = fileio.map_headers(["2744-1", "2019-8", "1960-4", "2951-2", "2075-0"])
    assert [layout.field_of[h] for h in layout.headers] == ["ph", "pco2", "hco3", "na", "cl"]


def test_loinc_mass_glucose_code_reads_mg_per_dl():
    # LOINC 2345-7 is "Glucose [Mass/volume] in Serum or Plasma" (interoperability notes A.1).
    layout = fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", "2345-7"])
    assert layout.units["glucose"] == "mg/dL"


def test_loinc_code_of_uncertain_property_needs_a_stated_unit():
    with pytest.raises(BatchInputError, match="state the unit"):
        fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", "2777-1"])
    layout = fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", "2777-1"],
                                units={"phosphate": "mg/dL"})
    assert layout.units["phosphate"] == "mg/dL"


def test_mapping_file_maps_a_laboratorys_headers_with_units():
    mapping = fileio.read_mapping(DATA / "lab_mapping.csv")
    headers = fileio.sniff_csv(DATA / "lab_export.csv").headers
    layout = fileio.map_headers(headers, mapping)
    assert layout.field_of["PaCO2"] == "pco2" and layout.units["pco2"] == "kPa"
    assert layout.field_of["Specimen"] == "sample_type"


def test_mapping_file_with_unknown_field_names_the_line(tmp_path):
    f = tmp_path / "map.csv"
    f.write_text("header,field\nPaCO2,pco2\nSodium,sodium\n")
    with pytest.raises(BatchInputError, match="line 3"):
        fileio.read_mapping(f)


def test_two_columns_for_one_field_stop_the_run():
    with pytest.raises(BatchInputError, match="both map to ph"):
        fileio.map_headers(["ph", "2744-1", "pco2", "hco3", "na", "cl"])


def test_missing_required_field_names_it_and_the_columns_found():
    with pytest.raises(BatchInputError, match=r"pCO2 \(pco2\).*'PaCO2'"):
        fileio.map_headers(["ph", "PaCO2", "hco3", "na", "cl"])


def test_unit_the_field_does_not_accept_stops_the_run():
    with pytest.raises(BatchInputError, match="not accepted"):
        fileio.map_headers(["ph", "pco2", "hco3", "na", "cl"], units={"pco2": "bar"})


def test_conflicting_units_stop_the_run():
    with pytest.raises(BatchInputError, match="state one unit"):
        fileio.map_headers(["ph", "pco2 (kPa)", "hco3", "na", "cl"], units={"pco2": "mmHg"})


@pytest.mark.parametrize("header", ["temperature (degF)", "Temperature ([degF])", "temperature (°F)"])
def test_a_header_in_degrees_fahrenheit_stops_the_run_with_the_unit_to_give(header):
    """Passed through unread, the column's temperatures would silently go unused."""
    with pytest.raises(BatchInputError) as info:
        fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", header])
    assert repr(header) in str(info.value)
    assert "[degF] is degrees Fahrenheit" in str(info.value) and "in Cel" in str(info.value)


def test_a_header_whose_brackets_hold_no_unit_is_still_passed_through():
    layout = fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", "temperature (ward 7)"])
    assert "temperature (ward 7)" not in layout.field_of


def test_strict_columns_refuses_unknown_headers():
    with pytest.raises(BatchInputError, match="'ward'"):
        fileio.map_headers(["ph", "pco2", "hco3", "na", "cl", "ward"], strict=True)


def test_loinc_table_is_built_from_the_field_table():
    """Codes exist once (acidbase.fields); the header table inverts them."""
    codes = {c: s.name for s in NUMERIC for c in s.loinc}
    assert loinc.HEADER_CODES == codes
    assert set(loinc.SPECIMEN) == set(codes)
    assert set(loinc.IMPLIED_UNIT) <= set(codes) and loinc.UNIT_REQUIRED <= set(codes)


# -- times --------------------------------------------------------------------

@pytest.mark.parametrize("text", ["2026-01-01T10:00:00Z", "2026-01-01T10:00:00+01:00",
                                  "2026-01-01T10:00:00-0530", "2026-03-01T00:30:00+02:00"])
def test_iso_times_with_offsets_match_the_standard_library(text):
    # ISO 8601; Python's datetime.fromisoformat is the reference.
    secs, kind = fileio.parse_times(pa.array([text]))
    ref = dt.datetime.fromisoformat(text.replace("Z", "+00:00").replace("-0530", "-05:30"))
    assert kind[0] == fileio.TIME_ZONED and secs[0] == int(ref.timestamp())


def test_iso_times_without_offset_are_wall_clock():
    secs, kind = fileio.parse_times(pa.array(["2026-01-01T10:00", "2026-01-01 10:00:30"]))
    ref = dt.datetime(2026, 1, 1, 10, 0, tzinfo=dt.timezone.utc).timestamp()
    assert kind.tolist() == [fileio.TIME_NAIVE] * 2 and secs.tolist() == [ref, ref + 30]


@pytest.mark.parametrize("text", ["2026-02-30T10:00:00Z", "2026-01-01", "yesterday",
                                  "01/02/2026 10:00", "2026-13-01T10:00:00"])
def test_invalid_or_dateless_times_are_invalid_not_rolled_over(text):
    # 30 February does not exist (Gregorian calendar); a date alone has no time of day.
    _, kind = fileio.parse_times(pa.array([text, None]))
    assert kind.tolist() == [fileio.TIME_INVALID, fileio.TIME_MISSING]


# -- writing ------------------------------------------------------------------

@pytest.mark.parametrize("cell", ["=1+2", "+A1", "-cmd", "@SUM(A1)", "\tx", "\rx", "\nx"])
def test_formula_cells_get_a_leading_quote(cell):
    # OWASP "CSV Injection": prefix cells starting with = + - @ TAB CR LF with '.
    assert fileio.escape_formula(pa.array([cell])).to_pylist() == ["'" + cell]


@pytest.mark.parametrize("cell", ["-5.2", "+3", "-0,6", "7.40", "normal", "", None])
def test_numbers_and_plain_text_are_not_escaped(cell):
    # Numbers stay numbers (interoperability notes A.5, clinical caveat on base excess).
    assert fileio.escape_formula(pa.array([cell], type=pa.string())).to_pylist() == [cell]


def test_csv_writer_quotes_per_rfc4180_and_escapes(tmp_path):
    out = tmp_path / "o.csv"
    w = fileio.Writer(str(out), "csv")
    w.write(pa.table({"a": pa.array(['=1+2";=1+2', "x,y"]), "b": pa.array([-5.2, 1.0])}))
    w.close()
    rows = list(csv.reader(out.open(newline="")))  # the standard library's RFC 4180 reader
    assert rows == [["a", "b"], ["'=1+2\";=1+2", "-5.2"], ["x,y", "1"]]


def test_writer_leaves_no_file_when_the_run_fails(tmp_path):
    """A write that fails half-way (the columns change) leaves the previous file as it
    was and no temporary file; while writing, rows went to a staged file only."""
    out = tmp_path / "o.csv"
    out.write_bytes(b"previous\n")
    w = fileio.Writer(str(out), "csv")
    try:
        w.write(pa.table({"a": ["x"] * 1000}))
        staged = [p for p in tmp_path.iterdir() if p.name.endswith(".incomplete")]
        assert len(staged) == 1 and staged[0].name.startswith(".o.csv.")
        assert out.read_bytes() == b"previous\n"
        with pytest.raises(ValueError, match="output columns changed"):
            w.write(pa.table({"b": ["y"]}))
    finally:
        w.close(ok=False)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o.csv"]
    assert out.read_bytes() == b"previous\n"


def test_writer_replaces_the_previous_file_only_when_it_closes(tmp_path):
    out = tmp_path / "o.csv"
    out.write_bytes(b"previous\n")
    w = fileio.Writer(str(out), "csv")
    w.write(pa.table({"a": ["x"]}))
    assert out.read_bytes() == b"previous\n"
    w.close()
    assert out.read_bytes() == b'"a"\n"x"\n'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o.csv"]


@pytest.mark.parametrize("kind", ["string", "large_string", "dictionary", "binary",
                                  "large_binary", "chunked", "chunked dictionary"])
def test_formula_cells_are_escaped_whatever_the_arrow_text_type(tmp_path, kind):
    cells = pa.array(["=1+2", "ok", None, "-5.2", "@x"])
    col = {"string": cells, "large_string": cells.cast(pa.large_string()),
           "dictionary": cells.dictionary_encode(), "binary": cells.cast(pa.binary()),
           "large_binary": cells.cast(pa.large_binary()),
           "chunked": pa.chunked_array([cells.slice(0, 2), cells.slice(2)]),
           "chunked dictionary": pa.chunked_array([cells.slice(0, 2).dictionary_encode(),
                                                   cells.slice(2).dictionary_encode()])}[kind]
    escaped = fileio.escape_formula(col)
    assert escaped.type == col.type  # a writer given a schema can take it back
    got = [c.decode() if isinstance(c, bytes) else c for c in escaped.to_pylist()]
    assert got == ["'=1+2", "ok", None, "-5.2", "'@x"]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.one_of(st.none(), st.text(max_size=6),
                          st.sampled_from(["=1", "+3", "-5.2", "-0,6", "@a", "\t1", "-x"])),
                min_size=1, max_size=20))
def test_column_escaping_is_the_cell_rule_on_every_cell(cells):
    """The vectorised escaping equals ``escape_text`` cell by cell (the oracle a compiled
    writer is checked against)."""
    got = fileio.escape_formula(pa.array(cells, type=pa.string())).to_pylist()
    assert got == [fileio.escape_text(c) for c in cells]


def test_rechunk_keeps_every_row_in_order():
    batches = [pa.record_batch({"i": list(range(s, s + n))}) for s, n in ((0, 5), (5, 1), (6, 9))]
    tables = list(fileio.rechunk(iter(batches), 4))
    assert [t.num_rows for t in tables] == [4, 4, 4, 3]
    assert sum((t["i"].to_pylist() for t in tables), []) == list(range(15))


def test_quoted_line_break_in_a_cell_is_one_row(tmp_path):
    # RFC 4180 section 2.6: a quoted field may contain line breaks.
    f = tmp_path / "nl.csv"
    f.write_text('ph,pco2,hco3,na,cl,comment\n7.40,40,24.22,140,106.78,"two\nlines"\n'
                 '7.255,60,26,140,105,one\n')
    src = fileio.open_source(f)
    t = next(src.chunks())
    assert t.num_rows == 2 and t["comment"].to_pylist() == ["two\nlines", "one"]


def test_one_odd_cell_does_not_change_how_the_others_read():
    """The one-cast fast paths and the cell-by-cell paths give the same values."""
    times = ["2026-01-01T10:00:00Z", "2026-06-30T23:59:59+02:00"]
    fast, _ = fileio.parse_times(pa.array(times))
    slow, kind = fileio.parse_times(pa.array(times + ["not a time"]))
    assert slow[:2].tolist() == fast.tolist() and kind[2] == fileio.TIME_INVALID
    cells = ["7.40", "-5.2", "24.22", "1e2"]
    fast_v = fileio.parse_numeric(pa.array(cells)).values
    slow_v = fileio.parse_numeric(pa.array(cells + ["7.21 L"])).values
    assert slow_v[:4].tolist() == fast_v.tolist()


@pytest.mark.parametrize("word", ["NaN", "nan", "inf", "-Infinity"])
def test_number_words_are_refused_however_the_column_reads(word):
    """Arrow's one-shot cast reads "nan" and "inf"; a laboratory value never is one. The
    cell is refused whether the rest of its column is plain (one cast) or not."""
    for cells in ([word, "7.40"], [word, "7.40", "7.21 L"], [word]):
        p = fileio.parse_numeric(pa.array(cells))
        assert p.bad.tolist()[0], cells
        if len(cells) > 1:  # the plain cell beside it still reads
            assert p.values[1] == 7.40 and not p.bad[1:].any(), cells


def test_number_words_are_refused_by_the_library_too():
    import acidbase

    r = acidbase.interpret_many({"ph": np.array(["nan", "7.4"], dtype=object), "pco2": [40, 40],
                                 "hco3": [24, 24], "na": [140, 140], "cl": [104, 104],
                                 "lactate": np.array(["inf", "1"], dtype=object)})
    assert r.refused.tolist() == [True, False]
    assert "'nan' is not a number" in r.reasons[0]
    assert "'inf' is not a number" in r.reasons[0]


# -- a ragged CSV line ----------------------------------------------------------------------

@pytest.mark.parametrize("text, line, got, header", [
    # (file text, the file line of the ragged record (header = 1), its fields, the header's)
    ("ph,pco2,hco3\n7.40,40,24\n7.30,40,24,5\n", 3, 4, 3),
    ("ph,pco2,hco3\n7.30,40,24,1,2\n7.40,40,24\n", 2, 5, 3),
    # a quoted cell over two lines and a blank line before it: file lines, not records
    ('ph,pco2,hco3,note\n7.40,40,24,"first\nsecond"\n\n7.30,40\n', 5, 2, 4),
    ("\ufeffph;pco2;hco3\n7,40;40;24\n7,30;40;24;9\n", 3, 4, 3),
])
def test_a_ragged_csv_line_is_named_by_its_file_line_and_counts(tmp_path, capsys, text, line,
                                                                 got, header):
    """The run stops at a line with more (or fewer) cells than the header; the message
    names the file line as an editor numbers it (the header is line 1), so the line can
    be found and fixed (it said only "a line has 4 fields")."""
    from acidbase.cli import main

    src = tmp_path / "ragged.csv"
    src.write_bytes(text.encode("utf-8"))
    with pytest.raises(BatchInputError) as info:
        for _ in fileio.open_source(src).chunks():
            pass
    said = f"line {line} has {got} fields where the header has {header} (line 1 is the header):"
    assert said in str(info.value)
    assert main(["batch", str(src), "-o", str(tmp_path / "out.csv"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"ragged.csv: {said}" in err and "Traceback" not in err
    assert not (tmp_path / "out.csv").exists()


# -- JSON Lines numbers beyond the floating-point range ----------------------------------

@pytest.mark.parametrize("written", ["1e999", "-1E+400", "NaN", "-Infinity"])
def test_a_json_number_beyond_range_is_refused_as_written(tmp_path, capsys, written):
    """``"pco2": 1e999`` (a valid JSON number; Python's reader makes it infinity) was
    refused as ``'inf'``, a value not in the file: the refusal and the output's copy of
    the cell show it as written, as for the same cell in a CSV file."""
    from acidbase.cli import main

    src = tmp_path / "p.jsonl"
    src.write_text(f'{{"ph": 7.40, "pco2": {written}, "hco3": 24}}\n'
                   '{"ph": 7.40, "pco2": 40, "hco3": 24}\n')
    out = tmp_path / "out.csv"
    assert main(["batch", str(src), "-o", str(out), "--quiet"]) == 0
    capsys.readouterr()
    rows = list(csv.DictReader(out.open()))
    assert rows[0]["status"] == "refused" and rows[1]["status"] == "interpreted"
    assert rows[0]["reason"].startswith(f"pCO2 (pco2) {written!r} is not a number")
    assert rows[0]["pco2"].lstrip("'") == written
    assert "inf" not in rows[0]["reason"].lower().replace("infinity", "")
    # The same cell in a CSV file is refused with the same words.
    same = tmp_path / "p.csv"
    same.write_text(f"ph,pco2,hco3\n7.40,{written},24\n")
    assert main(["batch", str(same), "-o", str(tmp_path / "same.csv"), "--quiet"]) == 0
    capsys.readouterr()
    assert next(csv.DictReader((tmp_path / "same.csv").open()))["reason"] == rows[0]["reason"]
