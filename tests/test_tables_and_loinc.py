"""``interpret_many`` as a table entry point, ``Results`` as a table, ``check_table``, the
specimen-aware LOINC headers, per-ion units, and the reader's odd files.

Expected values are arithmetic or unit definitions: an equivalent is one mole of
charge (IUPAC Gold Book, "equivalent entity"), so Ca2+ 2.4 mEq/L is 1.2 mmol/L; LOINC
specimens as in the long common names of research/loinc.md (GECCO, MII value sets).
"""

from __future__ import annotations

import io
import json
from contextlib import redirect_stderr

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import acidbase
from acidbase import cli
from acidbase.errors import BatchInputError, ColumnError, UnitError
from acidbase.files.check import check_table, panel_columns
from acidbase.files.headers import map_headers

BASE = {"ph": [7.40, 7.21], "pco2": [40.0, 60.0], "hco3": [24.0, 23.0], "na": [140.0, 140.0],
        "cl": [104.0, 104.0]}


# ---------------------------------------------------------------- interpret_many's inputs

def test_a_pandas_frame_a_polars_frame_and_an_arrow_table_read_alike():
    pd = pytest.importorskip("pandas")
    pl = pytest.importorskip("polars")
    cols = {**BASE, "k": ["4.0 L", None], "sample_type": ["Arterial", "venous"]}
    ref = acidbase.interpret_many(cols)
    for data in (pd.DataFrame(cols), pl.DataFrame(cols, strict=False), pa.table(cols),
                 pa.table(cols).to_batches()[0]):
        r = acidbase.interpret_many(data)
        assert [it.to_dict() for it in r] == [it.to_dict() for it in ref], type(data)


def test_an_unknown_column_is_refused_naming_the_known_ones():
    with pytest.raises(ColumnError) as info:
        acidbase.interpret_many({**BASE, "albumen": [40, 40]})
    assert info.value.names == ("albumen",)
    assert "albumin" in str(info.value) and "albumen" in str(info.value)


def test_an_unknown_column_naming_a_field_in_other_words_says_which_column_to_use():
    """As Panel(sodium=...) does (fields.suggest): refused, never read as that field."""
    with pytest.raises(ColumnError) as info:
        acidbase.interpret_many({**BASE, "sodium": [140, 140], "albumen": [40, 40]})
    assert info.value.names == ("sodium", "albumen")
    assert info.value.suggested == ("na", None)
    assert "'sodium' (use 'na')" in str(info.value)


def test_columns_of_unequal_length_are_refused():
    with pytest.raises(ColumnError, match="unequal lengths"):
        acidbase.interpret_many({**BASE, "k": [4.0]})


@pytest.mark.parametrize("unit", [None, 5, "psi"])
def test_a_unit_that_is_not_a_unit_is_a_unit_error(unit):
    with pytest.raises(UnitError):
        acidbase.interpret_many(BASE, units={"pco2": unit})


@pytest.mark.parametrize("column", [
    np.array([b"7.4", b"\xff"]), np.array(["2020-01-01", "2020-01-02"], dtype="datetime64[D]"),
    np.array([1 + 2j, 3j]), np.array([True, False]), pa.array([[1], [2]])])
def test_columns_of_odd_types_refuse_their_cells_not_the_call(column):
    r = acidbase.interpret_many({**BASE, "k": column})
    assert r.refused.tolist() == [True, True]
    assert all(p.kind == "not_a_number" for it in r for p in it.problems)


def test_a_lone_value_of_any_type_is_one_cell_for_every_row():
    import datetime

    r = acidbase.interpret_many({**BASE, "k": datetime.date(2020, 1, 1)})
    assert len(r) == 2 and r.refused.tolist() == [True, True]


def test_something_that_is_not_columns_is_a_column_error():
    with pytest.raises(ColumnError):
        acidbase.interpret_many([1, 2, 3])


CELL = st.one_of(
    st.sampled_from(["4.0", " 4 ", "4.0 L", "<3", "", "NA", "nan", "1,4", "\uff14", "True",
                     "abc", "1e400", "40", "-1"]),
    st.floats(allow_nan=True, allow_infinity=True), st.integers(min_value=-10 ** 400,
                                                                max_value=10 ** 400),
    st.none(), st.booleans(), st.text(max_size=6), st.binary(max_size=3),
    st.dates(), st.complex_numbers(max_magnitude=10), st.decimals(allow_nan=False))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(CELL, CELL), min_size=1, max_size=6))
def test_interpret_many_reads_each_row_as_it_reads_alone(rows):
    """Property: any cells give only readings (no exception), and row i of a column
    reads as that row read alone (row independence)."""
    n = len(rows)
    cols = {k: v * (n // 2 + 1) for k, v in BASE.items()}
    cols = {k: v[:n] for k, v in cols.items()}
    cols["k"] = [a for a, _ in rows]
    cols["lactate"] = [b for _, b in rows]
    many = acidbase.interpret_many(cols)
    assert len(many) == n
    for i in range(n):
        alone = acidbase.interpret_many({k: [v[i]] for k, v in cols.items()})
        assert many[i].to_dict() == alone[0].to_dict()


# ---------------------------------------------------------------- Results as a table

def test_results_are_a_sequence_of_interpretations():
    r = acidbase.interpret_many({**BASE, "k": [4.0, "abc"]})
    assert len(r) == 2 and r[-1].status == "refused" and r[0].status == "interpreted"
    assert [it.status for it in r] == ["interpreted", "refused"]
    assert repr(r) == "<Results: 2 panel(s), 1 interpreted, 1 refused>"
    with pytest.raises(IndexError):
        r[2]
    assert "K+ (k) 'abc' is not a number" in r[1].to_text()
    assert r[1].to_dict()["problems"] == [str(r[1].problems[0])]


def test_the_report_says_what_the_reader_read_off_the_cells():
    it = acidbase.interpret(acidbase.Panel(ph="7.25 L", pco2="60", hco3="25.7", na="140",
                                           cl="104", lactate="<0.3"))
    text = it.to_text()
    assert "read as not measured: lactate <0.3" in text and "values: ph L" in text
    assert it.to_dict()["qualifiers"] == ["lactate <0.3"]


def test_to_arrow_types_categories_as_dictionaries_and_processes_as_booleans():
    r = acidbase.interpret_many(BASE)
    t = r.to_arrow()
    assert t.num_rows == 2
    assert pa.types.is_dictionary(t.schema.field("status").type)
    assert pa.types.is_dictionary(t.schema.field("sample_type").type)
    assert t.schema.field("has_resp_acid").type == pa.bool_()
    assert t.schema.field("anion_gap").type == pa.float64()
    # row 2 (pH 7.21, pCO2 60, HCO3 23) is a respiratory acidosis: the boolean says so
    assert t.column("has_resp_acid").to_pylist()[1] is True
    assert t.column("anion_gap").to_pylist()[0] == pytest.approx(140 - 104 - 24)


def test_to_pandas_gives_categoricals():
    pytest.importorskip("pandas")
    df = acidbase.interpret_many(BASE).to_pandas()
    assert str(df["status"].dtype) == "category" and len(df) == 2


# ---------------------------------------------------------------- check_table

def test_check_table_checks_one_arrow_batch_as_the_batch_command_does(tmp_path):
    table = pa.table({"ph": ["7.40", "7.21 L"], "pco2": ["40", "60"], "hco3": ["24", "23"],
                      "na": ["140", "140"], "cl": ["104", "104"], "ward": ["A", "B"]})
    out = check_table(table)
    assert out.column("row").to_pylist() == [1, 2]
    assert out.column("ward").to_pylist() == ["A", "B"]
    assert out.column("lab_flags").to_pylist() == ["", "ph L"]
    path = tmp_path / "in.csv"
    path.write_text("ph,pco2,hco3,na,cl,ward\n7.40,40,24,140,104,A\n7.21 L,60,23,140,104,B\n")
    res = tmp_path / "out.jsonl"
    with redirect_stderr(io.StringIO()):
        assert cli.main(["batch", str(path), "-o", str(res), "--quiet", "--findings", "all"]) == 0
    rows = [json.loads(x) for x in res.read_text().splitlines()]
    for name in ("status", "reason", "finding_codes", "disorders", "anion_gap"):
        assert [r[name] for r in rows] == out.column(name).to_pylist(), name


# ---------------------------------------------------------------- LOINC with specimen

def _read(headers: list[str], *rows: list[str]):
    table = pa.table({h: pa.array([r[i] for r in rows], pa.string())
                      for i, h in enumerate(headers)})
    layout = map_headers(table.schema.names)
    cols, problems = panel_columns(table, layout)
    return acidbase.interpret_many(cols, row_problems=problems), layout


def test_venous_codes_set_the_venous_sample_type():
    """research/loinc.md 1.3: pH 7.36 / pCO2 46 under venous codes once read arterial."""
    r, _ = _read(["2746-6", "2021-4", "14627-4", "39791-9", "2075-0"],
                 ["7.36", "46", "25", "140", "104"])
    assert r[0].sample_type == "venous"
    assert r[0].disorders == () and "T-SAMPLE-VENOUS" in r[0].codes()


@pytest.mark.parametrize(("codes", "word"), [
    (["2745-8", "2020-6"], "capillary"),     # pH and pCO2 of capillary blood
    (["2744-1", "2019-8"], "arterial"),
    (["19213-8", "19212-0"], "venous"),      # mixed venous: read with venous intervals
    (["11558-4", "11557-6"], "unknown"),     # blood, specimen not stated
])
def test_each_specimen_sets_its_sample_type(codes, word):
    r, _ = _read([*codes, "1959-6", "2951-2", "2075-0"], ["7.40", "40", "24", "140", "104"])
    assert r[0].sample_type == word


def test_capillary_po2_is_read():
    r, layout = _read(["ph", "pco2", "hco3", "na", "cl", "2704-5"],
                      ["7.40", "40", "24", "140", "104", "60"])
    assert layout.field_of["2704-5"] == "po2" and r[0].inputs["po2"]["value"] == 60


def test_a_sample_type_that_contradicts_the_code_refuses_the_row():
    r, _ = _read(["sample_type", "2746-6", "2021-4", "hco3", "na", "cl"],
                 ["arterial", "7.36", "46", "25", "140", "104"],
                 ["", "7.36", "46", "25", "140", "104"],
                 ["Venous", "7.36", "46", "25", "140", "104"])
    assert r.refused.tolist() == [True, False, False]
    assert r[0].problems[0].kind == "specimen_conflict"
    assert r[1].sample_type == "venous"


def test_one_column_per_specimen_is_read_row_by_row():
    r, _ = _read(["2744-1", "2746-6", "2019-8", "2021-4", "hco3", "na", "cl"],
                 ["7.40", "", "40", "", "24", "140", "104"],
                 ["", "7.36", "", "46", "25", "140", "104"],
                 ["7.40", "7.36", "40", "", "24", "140", "104"])
    assert [it.sample_type for it in r][:2] == ["arterial", "venous"]
    assert r[1].inputs["ph"]["value"] == 7.36
    assert r.refused.tolist() == [False, False, True]


def test_total_co2_sets_the_chemistry_source():
    r, _ = _read(["ph", "pco2", "2028-9", "na", "cl"], ["7.40", "40", "24", "140", "104"])
    assert r[0].hco3_source == "chemistry"


def test_fio2_and_albumin_codes_take_loinc_units():
    layout = map_headers(["ph", "pco2", "hco3", "na", "cl", "3150-0", "1751-7"])
    assert layout.units["fio2"] == "%" and layout.units["albumin"] == "g/dL"


def test_temperature_adjusted_and_standard_values_are_never_read():
    layout = map_headers(["ph", "pco2", "hco3", "na", "cl", "33254-4", "19230-2"])
    assert "33254-4" not in layout.field_of and "19230-2" not in layout.field_of
    assert any("33254-4" in n and "temperature" in n for n in layout.notes)


@pytest.mark.parametrize(("field", "meq", "mmol"), [
    ("ica", 2.4, 1.2), ("mg", 1.6, 0.8), ("na", 140.0, 140.0), ("k", 4.0, 4.0)])
def test_milliequivalents_convert_by_the_ion_charge(field, meq, mmol):
    cols = {k: [v[0]] for k, v in BASE.items()} | {field: [meq]}
    r = acidbase.interpret_many(cols, units={field: "mEq/L"})
    assert r[0].inputs[field]["value"] == pytest.approx(mmol)


def test_phosphate_takes_no_milliequivalents():
    with pytest.raises(UnitError):
        acidbase.interpret_many({**BASE, "phosphate": [1.0, 1.0]}, units={"phosphate": "mEq/L"})


# ---------------------------------------------------------------- odd files (issue 11)

def _batch(tmp_path, path):
    out = tmp_path / "out.jsonl"
    err = io.StringIO()
    with redirect_stderr(err):
        rc = cli.main(["batch", str(path), "-o", str(out), "--quiet"])
    rows = [json.loads(x) for x in out.read_text().splitlines()] if rc == 0 else []
    return rc, rows, err.getvalue()


LINE = "7.40,40,24,140,104"


def test_a_repeated_header_is_renamed_and_reported(tmp_path):
    path = tmp_path / "dup.csv"
    path.write_text(f"n,n,ph,pco2,hco3,na,cl\n1,2,{LINE}\n")
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0 and rows[0]["n"] == "1" and rows[0]["n (2)"] == "2"
    assert "'n' -> 'n (2)'" in err and "Traceback" not in err


def test_a_cell_larger_than_a_read_block_is_read(tmp_path):
    path = tmp_path / "big.csv"
    big = "x" * (900 << 10)
    path.write_text(f"ph,pco2,hco3,na,cl,note\n{LINE},a\n{LINE},\"{big}\"\n{LINE},b\n")
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0, err
    assert [r["note"] for r in rows] == ["a", big, "b"]


def test_a_quoted_line_break_after_the_sampled_start_is_read(tmp_path):
    path = tmp_path / "late.csv"
    path.write_text("ph,pco2,hco3,na,cl,note\n" + f"{LINE},a\n" * 4000
                    + f"{LINE},\"two\nlines\"\n{LINE},b\n")
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0, err
    assert len(rows) == 4002 and rows[4000]["note"] == "two\nlines"


def test_a_json_key_given_twice_refuses_its_row_only(tmp_path):
    path = tmp_path / "dup.jsonl"
    path.write_text('{"ph": 7.4, "pco2": 40, "hco3": 24, "na": 140, "cl": 104}\n'
                    '{"ph": 7.4, "ph": 7.1, "pco2": 40, "hco3": 24, "na": 140, "cl": 104}\n')
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0 and [r["status"] for r in rows] == ["interpreted", "refused"]
    assert "'ph'" in rows[1]["reason"] and "twice" in rows[1]["reason"]


def test_a_large_string_parquet_column_is_read(tmp_path):
    path = tmp_path / "ls.parquet"
    pq.write_table(pa.table({h: pa.array([v], pa.large_string()) for h, v in zip(
        ["ph", "pco2", "hco3", "na", "cl"], LINE.split(","))}), path)
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0 and rows[0]["status"] == "interpreted", err


def test_a_list_column_is_refused_by_name(tmp_path):
    path = tmp_path / "nested.parquet"
    cols = {h: [float(v)] for h, v in zip(["ph", "pco2", "hco3", "na", "cl"], LINE.split(","))}
    pq.write_table(pa.table({**cols, "tags": [[1, 2]]}), path)
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 2 and "'tags'" in err and "Traceback" not in err


def test_map_headers_still_stops_on_two_plain_columns_for_one_field():
    with pytest.raises(BatchInputError, match="both map to ph"):
        map_headers(["ph", "2744-1", "pco2", "hco3", "na", "cl"])


def test_panel_table_is_the_entry_for_a_table_of_coded_cells():
    """What an HL7 v2 reader hands over: text cells under LOINC codes."""
    pt = acidbase.panel_table(pa.table({
        "2746-6": ["7.36"], "2021-4": ["46"], "1959-6": ["25"], "2951-2": ["140"],
        "2075-0": ["104"], "3150-0": ["40"]}))
    r = pt.interpret()
    assert (r[0].sample_type, r[0].hco3_source) == ("venous", "analyser")
    assert r[0].inputs["fio2"]["value"] == pytest.approx(0.40)  # 40 % under 3150-0


def test_a_new_choice_input_is_one_row_of_the_vocabulary(monkeypatch):
    """The clinical helper's pregnancy input: one enum and one Choice row give the Panel
    field, its reader and its refusal message, with nothing else written."""
    from enum import StrEnum

    from acidbase.inputs import panel as model
    from acidbase.inputs.vocab import CHOICES, Choice

    class Pregnancy(StrEnum):
        YES = "yes"
        NO = "no"
        UNKNOWN = "unknown"

    monkeypatch.setattr(model, "CHOICES", (*CHOICES, Choice("pregnancy", "Pregnancy",
                                                            Pregnancy, "unknown")))
    panel_class = model._build_panel()
    base = {k: v[0] for k, v in BASE.items()}
    assert panel_class(**base, pregnancy=" Yes ").pregnancy == "yes"
    with pytest.raises(Exception, match="is not one of yes, no, unknown"):
        panel_class(**base, pregnancy="maybe")


def test_serial_checks_read_one_column_per_specimen_as_the_reading_does(tmp_path):
    """pH 7.40 (arterial column) then 7.10 (venous column) an hour later: the serial
    check sees both values (a change of 0.30, beyond the default pH delta limit)."""
    path = tmp_path / "ser.csv"
    path.write_text("patient_id,collected_at,2744-1,2746-6,2019-8,2021-4,hco3,na,cl\n"
                    "p1,2026-01-01T10:00Z,7.40,,40,,24,140,104\n"
                    "p1,2026-01-01T11:00Z,,7.10,,60,18,140,104\n")
    rc, rows, err = _batch(tmp_path, path)
    assert rc == 0, err
    assert "SERIAL-DELTA-PH" in rows[1]["serial_codes"]


# -- the library given the wrong kind of thing ------------------------------------------

@pytest.mark.parametrize("given", [{"ph": 7.40, "pco2": 40, "hco3": 24}, None, "7.40"])
def test_interpret_given_no_panel_says_what_it_takes(given):
    """``interpret({"ph": ...})``: a TypeError naming ``Panel``, not an AttributeError
    about ``.columns`` from inside the library."""
    with pytest.raises(TypeError, match=r"interpret takes an acidbase\.Panel.*Panel\.model_validate"):
        acidbase.interpret(given)


@pytest.mark.parametrize("given", [{"ph": [7.40], "pco2": [40], "hco3": [24]},
                                   [{"ph": 7.40, "pco2": 40, "hco3": 24}], "day.csv"])
def test_check_table_given_no_arrow_table_says_what_it_takes(given):
    with pytest.raises(TypeError, match=r"check_table takes a pyarrow Table.*pyarrow\.table"):
        acidbase.check_table(given)


def test_results_to_pandas_without_pandas_says_how_to_get_it(monkeypatch):
    """The README's install has no pandas: ``to_pandas`` says what it needs and that
    ``to_arrow`` needs nothing more (was: pyarrow's bare "No module named 'pandas'")."""
    import sys

    results = acidbase.interpret_many({"ph": [7.40], "pco2": [40], "hco3": [24]})
    monkeypatch.setitem(sys.modules, "pandas", None)  # import pandas now fails
    with pytest.raises(ImportError, match=r"to_pandas needs pandas .*pip install pandas.*to_arrow"):
        results.to_pandas()


def test_a_unit_for_a_name_that_is_no_numeric_field_says_so():
    """``units={"sodium": ...}`` said "sodium: unit 'mmol/L' is not accepted; use one of "
    (an empty list): the name is what is wrong."""
    with pytest.raises(ColumnError, match=r"units: 'sodium' is not a numeric field.*\bna\b"):
        acidbase.interpret_many(BASE, units={"sodium": "mmol/L"})


@pytest.mark.parametrize("settings", [{"reference_albumin": 40}, "default", 44])
def test_settings_that_are_no_settings_say_what_they_should_be(settings):
    """``interpret(panel, {"reference_albumin": 40})`` raised an AttributeError from inside."""
    panel = acidbase.Panel(ph=7.40, pco2=40, hco3=24)
    for call in (lambda: acidbase.interpret(panel, settings),
                 lambda: acidbase.interpret_many(BASE, settings=settings)):
        with pytest.raises(TypeError, match=r"settings must be an acidbase\.Settings"):
            call()
