"""One gate: the same cell gets the same reading, with the same message, on every path.

Every path a value comes in by (a ``check`` option, ``Panel``, ``interpret_many``, CSV,
JSON Lines, Parquet with plain, dictionary and large_string text columns, the terminal
app's series file) reads the cells below.  The expected fate of each cell is the
policy of docs/input.md; the numbers are arithmetic (the anion gap with K+ is
Na + K - Cl - HCO3, Emmett & Narins' definition as in docs/methods.md), so a cell
read as 4.0 mmol/L gives 140 + 4 - 104 - 24 = 16.
"""

from __future__ import annotations

import csv
import io
import json
import subprocess
import sys
from contextlib import redirect_stderr, redirect_stdout
from decimal import Decimal

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import acidbase
from acidbase import cli
from acidbase.inputs.panel import describe_fields

BASE = {"ph": "7.40", "pco2": "40", "hco3": "24", "na": "140", "cl": "104"}
GAP_K_AT_4 = 140 + 4 - 104 - 24  # anion gap with K+ when K+ reads 4.0 mmol/L

OK, NONE, CENSORED, BAD, RANGE = "accepted 4.0", "not measured", "censored", "not_a_number", \
    "outside_accepted_range"

#: (cell as text, expected fate) for K+ (optional, canonical mmol/L, accepted 0.5-15).
CELLS: list[tuple[str, str]] = [
    ("4.0", OK), ("4", OK), (" 4.0 ", OK), ("+4.0", OK), ("4.", OK), ("4.00", OK),
    ("4e0", OK), ("0.4e1", OK), ("4.0 L", OK), ("4.0 H", OK), ("4.0 LL", OK),
    ("4.0 HH", OK), ("4.0*", OK), ("4.0 A", OK), ("4.0 N", OK), ("4.0L", OK),
    ("", NONE), ("   ", NONE),
    ("<5", CENSORED), (">3", CENSORED), ("<=3.5", CENSORED), (">= 3", CENSORED),
    ("abc", BAD), ("NA", BAD), ("n/a", BAD), ("nan", BAD), ("NaN", BAD), ("inf", BAD),
    ("-Infinity", BAD), ("1,400", BAD), ("4,0", BAD), ("1_4", BAD), ("4 0", BAD),
    ("\uff14.\uff10", BAD),  # full-width digits
    ("\u0664.\u0660", BAD),  # Arabic-Indic digits
    ("4.0.1", BAD), ("4.0 X", BAD), ("0x4", BAD), ("4.0 mmol/L", BAD), ("True", BAD),
    ("true", BAD), ("--4", BAD), ("4-", BAD), ("1e400", BAD), ("4.0 L H", BAD),
    ("< >4", BAD), ("=4", BAD),
    ("40", RANGE), ("0.1", RANGE), ("-4", RANGE), ("15000", RANGE),
]


def expected_kind(fate: str) -> str | None:
    return fate if fate in (BAD, RANGE) else None


def library_reading(cell: object) -> tuple[str, object]:
    """(status, anion gap with K+ or the refusal message) by interpret_many, alone."""
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
    it = r[0]
    if it.status == "refused":
        return "refused", "; ".join(map(str, it.problems))
    return "interpreted", it.derived["anion_gap_k"]


def test_every_cell_has_its_documented_fate_in_the_library():
    for cell, fate in CELLS:
        status, what = library_reading(cell)
        r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
        if fate == OK:
            assert (status, what) == ("interpreted", pytest.approx(GAP_K_AT_4)), cell
        elif fate in (NONE, CENSORED):
            assert (status, what) == ("interpreted", None), cell
            assert r[0].qualifiers == ((f"k {cell.strip()}",) if fate == CENSORED else ()), cell
        else:
            assert status == "refused", cell
            assert [p.kind for p in r[0].problems] == [fate], cell


def test_a_flag_after_a_value_is_read_off_and_recorded():
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": ["4.0 L"]})
    assert r[0].lab_flags == ("k L",)


def _panel_reading(cell: str) -> tuple[str, object]:
    try:
        panel = acidbase.Panel(**BASE, k=cell)
    except Exception as e:  # pydantic.ValidationError: its lines for field k
        lines = [line for field, line in describe_fields(e) if field == "k"]
        return "refused", "; ".join(lines)
    return "interpreted", acidbase.interpret(panel).derived["anion_gap_k"]


def _cli_reading(cell: str) -> tuple[str, object]:
    out, err = io.StringIO(), io.StringIO()
    args = ["check", "--json"] + [x for k, v in BASE.items() for x in (f"--{k}", v)]
    with redirect_stdout(out), redirect_stderr(err):
        rc = cli.main([*args, f"--k={cell}"])
    if rc == 2:
        lines = [line.strip()[2:] for line in err.getvalue().splitlines()
                 if line.startswith("  - ")]
        return "refused", "; ".join(lines)
    return "interpreted", json.loads(out.getvalue())["derived"]["anion_gap_k"]


def _rows() -> list[dict[str, str]]:
    return [{**BASE, "k": cell} for cell, _ in CELLS]


def _batch(tmp_path, path) -> list[tuple[str, object]]:
    out = tmp_path / f"{path.name}.out.jsonl"
    with redirect_stderr(io.StringIO()):
        rc = cli.main(["batch", str(path), "-o", str(out), "--quiet", "--decimal", ".",
                       "--derived", "all"])
    assert rc == 0
    got = []
    for line in out.read_text(encoding="utf-8").splitlines():
        row = json.loads(line)
        got.append(("refused", row["reason"]) if row["status"] == "refused"
                   else ("interpreted", row["anion_gap_k"]))
    return got


def _write_csv(path) -> None:
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=[*BASE, "k"], quoting=csv.QUOTE_ALL)
        w.writeheader()
        w.writerows(_rows())


def _parquet(path, kind: str) -> None:
    cells = pa.array([r["k"] for r in _rows()], pa.string())
    if kind == "dictionary":
        cells = cells.dictionary_encode()
    elif kind == "large_string":
        cells = cells.cast(pa.large_string())
    cols = {k: pa.array([v] * len(CELLS)) for k, v in BASE.items()}
    pq.write_table(pa.table({**cols, "k": cells}), path)


def _same(reference, got, path: str) -> None:
    for (cell, fate), ref, mine in zip(CELLS, reference, got):
        if ref[0] == "interpreted" and ref[1] is not None:
            assert mine[0] == "interpreted" and mine[1] == pytest.approx(ref[1]), (path, cell)
        else:
            assert mine == ref, (path, cell, fate)


@pytest.fixture(scope="module")
def reference():
    return [library_reading(cell) for cell, _ in CELLS]


def test_panel_reads_every_cell_as_the_library_does(reference):
    _same(reference, [_panel_reading(c) for c, _ in CELLS], "Panel")


def test_check_options_read_every_cell_as_the_library_does(reference):
    _same(reference, [_cli_reading(c) for c, _ in CELLS], "check")


def test_one_column_of_all_the_cells_reads_each_as_it_reads_alone(reference):
    """Row independence: the cells side by side in one (mixed) column."""
    cols = {k: [v] * len(CELLS) for k, v in BASE.items()}
    r = acidbase.interpret_many({**cols, "k": [c for c, _ in CELLS]})
    got = [("refused", "; ".join(map(str, it.problems))) if it.status == "refused"
           else ("interpreted", it.derived["anion_gap_k"]) for it in r]
    _same(reference, got, "one column")


def test_csv_reads_every_cell_as_the_library_does(tmp_path, reference):
    path = tmp_path / "cells.csv"
    _write_csv(path)
    _same(reference, _batch(tmp_path, path), "CSV")


def test_json_lines_read_every_cell_as_the_library_does(tmp_path, reference):
    path = tmp_path / "cells.jsonl"
    path.write_text("".join(json.dumps(r) + "\n" for r in _rows()), encoding="utf-8")
    _same(reference, _batch(tmp_path, path), "JSON Lines")


@pytest.mark.parametrize("kind", ["string", "dictionary", "large_string"])
def test_parquet_text_columns_read_every_cell_as_the_library_does(tmp_path, reference, kind):
    path = tmp_path / f"cells-{kind}.parquet"
    _parquet(path, kind)
    _same(reference, _batch(tmp_path, path), f"Parquet {kind}")


def test_the_app_series_file_reads_every_cell_as_the_library_does(tmp_path, reference):
    from tui.sitting import read_csv

    path = tmp_path / "series.csv"
    _write_csv(path)
    entries, _ = read_csv(path)
    got = []
    for entry in entries:
        panel = entry.panel()
        if panel is None:
            got.append(("refused", "; ".join(entry.problems())))
        else:
            got.append(("interpreted", acidbase.interpret(panel).derived["anion_gap_k"]))
    _same(reference, got, "series file")


# ---------------------------------------------------------------- values that are not text

@pytest.mark.parametrize(("cell", "kind"), [
    (True, "not_a_number"), (np.bool_(False), "not_a_number"), (float("inf"), "not_a_number"),
    (10 ** 400, "not_a_number"), ([4.0], "not_a_number"), ({"k": 4}, "not_a_number"),
])
def test_values_that_are_not_numbers_are_refused_by_panel_and_library_alike(cell, kind):
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
    assert [p.kind for p in r[0].problems] == [kind]
    with pytest.raises(Exception) as info:
        acidbase.Panel(**BASE, k=cell)
    assert [e["type"] for e in info.value.errors()] == [kind]


def test_fio2_given_as_a_yes_no_value_is_refused():
    with pytest.raises(Exception) as info:
        acidbase.Panel(**BASE, fio2=True)
    assert "yes/no value is not a measurement" in str(info.value)


@pytest.mark.parametrize(("cell", "read"), [
    (4, 16.0), (4.0, 16.0), (np.float32(4.0), 16.0), (None, None), (float("nan"), None),
])
def test_numbers_and_missing_markers_read_alike_in_panel_and_library(cell, read):
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
    assert r[0].derived["anion_gap_k"] == (pytest.approx(read) if read else None)
    assert acidbase.interpret(acidbase.Panel(**BASE, k=cell)).derived["anion_gap_k"] == (
        pytest.approx(read) if read else None)


@pytest.mark.parametrize(("cell", "read"), [
    (Decimal("4.0"), 16.0), (Decimal("4"), 16.0), (Decimal("0.4E+1"), 16.0),
    (Decimal("NaN"), "not_a_number"), (Decimal("sNaN"), "not_a_number"),
    (Decimal("-Infinity"), "not_a_number"),
    (Decimal("1E+400"), "not_a_number"), (Decimal("40"), "outside_accepted_range"),
])
def test_a_python_decimal_reads_as_an_arrow_decimal_column_does(cell, read):
    """A database's NUMERIC values come to Python as ``decimal.Decimal``: read as the
    number it is, as a decimal128 Arrow column of it is (was refused as "not a
    number", with the generic hint); NaN, infinity and values beyond the
    floating-point range are refused as any such number is (docs/input.md)."""
    cols = {k: [v] for k, v in BASE.items()}
    r = acidbase.interpret_many({**cols, "k": [cell]})
    if isinstance(read, str):
        assert [p.kind for p in r[0].problems] == [read]
        with pytest.raises(Exception) as info:
            acidbase.Panel(**BASE, k=cell)
        assert [e["type"] for e in info.value.errors()] == [read]
        return
    assert r[0].derived["anion_gap_k"] == pytest.approx(read)
    arrow = acidbase.interpret_many({**cols, "k": pa.array([cell], pa.decimal128(5, 2))})
    assert arrow[0].derived["anion_gap_k"] == pytest.approx(read)
    assert acidbase.interpret(acidbase.Panel(**BASE, k=cell)).derived["anion_gap_k"] == (
        pytest.approx(read))


def test_a_clean_row_beside_nan_is_read():
    """The issue's case: ``["4.0", nan]`` once refused its clean second row."""
    cols = {k: [v, v] for k, v in BASE.items()}
    r = acidbase.interpret_many({**cols, "k": ["4.0", float("nan")]})
    assert r.refused.tolist() == [False, False]


# ---------------------------------------------------------------- choices

@pytest.mark.parametrize(("cell", "word"), [
    ("Arterial", "arterial"), (" VENOUS ", "venous"), ("capillary", "capillary"),
    ("", "unknown"), (None, "unknown"), ("Unknown", "unknown"),
])
def test_a_choice_is_read_in_any_case_on_every_path(tmp_path, cell, word):
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "sample_type": [cell]})
    assert r[0].sample_type == word
    assert acidbase.interpret(acidbase.Panel(**BASE, sample_type=cell)).sample_type == word
    if isinstance(cell, str):
        out, err = io.StringIO(), io.StringIO()
        args = ["check", "--json"] + [x for k, v in BASE.items() for x in (f"--{k}", v)]
        with redirect_stdout(out), redirect_stderr(err):
            assert cli.main([*args, f"--sample-type={cell}"]) == 0, err.getvalue()
        assert json.loads(out.getvalue())["sample_type"] == word


@pytest.mark.parametrize("cell", ["art", "arterial blood", "1", 1, True])
def test_a_word_outside_the_vocabulary_is_refused_with_one_message(cell):
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "sample_type": [cell]})
    msg = str(r[0].problems[0])
    assert r[0].problems[0].kind == "not_a_choice"
    assert "is not one of arterial, venous, capillary, unknown" in msg
    with pytest.raises(Exception) as info:
        acidbase.Panel(**BASE, sample_type=cell)
    assert [line for _, line in describe_fields(info.value)] == [msg]


def test_every_choice_comes_from_one_declaration():
    from acidbase.fields import HCO3_SOURCES, SAMPLE_TYPES
    from acidbase.inputs.vocab import CHOICE_BY_NAME, Hco3Source, SampleType

    assert SAMPLE_TYPES == tuple(SampleType) == CHOICE_BY_NAME["sample_type"].words
    assert HCO3_SOURCES == tuple(Hco3Source)
    assert acidbase.Panel.model_fields["sample_type"].default == "unknown"


# ---------------------------------------------------------------- a declared decimal comma

COMMA_CELLS = [("4,0", OK), ("4,0 L", OK), ("<5", CENSORED), ("4.0", BAD), ("1.400", BAD),
               ("4", OK), ("", NONE)]


def test_a_declared_decimal_comma_reads_alike_on_every_path(tmp_path):
    """``--decimal ,``: a comma is the decimal mark and a point is refused, in the library,
    Panel, check and a file."""
    base = {**BASE, "ph": "7,40"}
    for cell, fate in COMMA_CELLS:
        r = acidbase.interpret_many({**{k: [v] for k, v in base.items()}, "k": [cell]},
                                    decimal=",")
        lib = r[0]
        if fate == OK:
            assert lib.derived["anion_gap_k"] == pytest.approx(GAP_K_AT_4), cell
        elif fate == BAD:
            assert [p.kind for p in lib.problems] == [BAD], cell
        p_ok = True
        try:
            acidbase.Panel.model_validate({**base, "k": cell}, context={"decimal": ","})
        except Exception:
            p_ok = False
        assert p_ok == (lib.status == "interpreted"), cell
        out, err = io.StringIO(), io.StringIO()
        args = ["check", "--json", "--decimal", ","] + [
            x for k, v in base.items() for x in (f"--{k}", v)]
        with redirect_stdout(out), redirect_stderr(err):
            rc = cli.main([*args, f"--k={cell}"])
        assert (rc == 0) == (lib.status == "interpreted"), cell
    path = tmp_path / "comma.csv"
    lines = ["ph;pco2;hco3;na;cl;k"] + [f"7,40;40;24;140;104;{c}" for c, _ in COMMA_CELLS]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    out = tmp_path / "comma.jsonl"
    with redirect_stderr(io.StringIO()):
        # the sample holds both marks ("4.0" beside "4,0"): detection refuses to choose,
        # so the comma is declared, as the message asks
        assert cli.main(["batch", str(path), "-o", str(out), "--quiet", "--decimal", ","]) == 0
    rows = [json.loads(x) for x in out.read_text(encoding="utf-8").splitlines()]
    assert [r["status"] == "refused" for r in rows] == [f == BAD for _, f in COMMA_CELLS]


def test_a_very_long_cell_is_shown_shortened_with_its_length_on_every_path(tmp_path):
    """A 10,000-character cell was echoed whole in its refusal (and in the batch file's
    reason column); the message shows its start and says how long it is."""
    cell = "7" * 10_000
    lib_status, lib_message = library_reading(cell)
    assert lib_status == "refused" and len(lib_message) < 400
    assert "'7777777777" in lib_message and "(10000 characters)" in lib_message
    r = subprocess.run([sys.executable, "-m", "acidbase", "check",
                        *[f"--{k}={v}" for k, v in BASE.items()], f"--k={cell}"],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 2 and lib_message in r.stderr


@pytest.mark.parametrize(("cell", "hint"), [
    ("1_400", "digit grouping is not read"),
    ("1 400", "digit grouping is not read"),
    ("snake_case", "expected a number in mmol/L"),
    ("K_4.0", "expected a number in mmol/L"),
    (np.bytes_(b"4.0"), "expected a number in mmol/L"),
    ("\u22124.0", "the character '\u2212' (U+2212) is not read"),    # minus sign
    ("4\u00b70", "the character '\u00b7' (U+00B7) is not read"),     # middle dot
    ("4.0\u200b", "the character '\\u200b' (U+200B) is not read"),  # zero-width space,
    ("4\u20090", "the character '\\u2009' (U+2009) is not read"),   # thin space: escaped
])
def test_the_hint_of_a_refused_cell_says_what_is_wrong_with_it(cell, hint):
    """Digit grouping is digits either side of a separator; an underscore elsewhere (a
    word, a numpy bytes value's name) is no grouping (each was told "digit grouping is
    not read; write the number without separators").  A character of another script
    that looks like a sign, a point or a space is named with its code point (each was
    told only "expected a number"): the cell looks right on screen."""
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
    assert [p.kind for p in r[0].problems] == ["not_a_number"]
    assert hint in r[0].problems[0].hint


@pytest.mark.parametrize("unit", [None, 5, 1.0])
def test_a_unit_that_is_not_text_is_refused_as_any_unit_not_taken(unit):
    """``Panel(pco2_unit=None)`` (a database row's empty unit column) or a number gave
    pydantic's "Input should be a valid string", naming neither the field's units nor
    the field; it is refused as ``interpret_many`` refuses it (``UnitError``: "unit
    'None' is not accepted"), with the units the field takes."""
    with pytest.raises(Exception) as info:
        acidbase.Panel(**BASE, pco2_unit=unit)
    errors = info.value.errors()
    assert [e["type"] for e in errors] == ["unit_not_accepted"]
    assert errors[0]["msg"] == (f"unit '{unit}' is not accepted for pCO2; use one of "
                                "mm[Hg], kPa")
    with pytest.raises(acidbase.UnitError) as lib:
        acidbase.interpret_many({k: [v] for k, v in BASE.items()}, {"pco2": unit})
    assert f"unit '{unit}' is not accepted" in str(lib.value)


@pytest.mark.parametrize(("given", "text"), [(12345, "12345"), (np.int64(10 ** 12), "1000000000000"),
                                             ("S-1", "S-1")])
def test_an_id_given_as_a_whole_number_is_its_text(given, text):
    """A database's integer key as ``Panel(sample_id=12345)`` was refused with pydantic's
    "Input should be a valid string", while the same number in a JSON Lines or Parquet
    file is read as its text; a yes/no value is still no id."""
    panel = acidbase.Panel(**BASE, sample_id=given, patient_id=given)
    assert (panel.sample_id, panel.patient_id) == (text, text)
    with pytest.raises(Exception):
        acidbase.Panel(**BASE, sample_id=True)


@pytest.mark.parametrize(("cell", "read"), [
    (np.array(4.0), 16.0), (np.array("4.0"), 16.0), (np.array(4, dtype=np.int32), 16.0),
    (np.array(True), "not_a_number"), (np.array(np.nan), None),
])
def test_a_zero_dimensional_array_is_the_one_cell_it_holds(cell, read):
    """``Panel(k=np.array(4.0))`` (a reduction kept as an array) was refused as
    "'array(4.)' is not a number", though a column reads a 0-d array as its cell."""
    panel_read = None
    try:
        panel_read = acidbase.interpret(acidbase.Panel(**BASE, k=cell)).derived["anion_gap_k"]
    except Exception as e:  # noqa: BLE001
        assert read == "not_a_number" and [x["type"] for x in e.errors()] == [read]
    r = acidbase.interpret_many({**{k: [v] for k, v in BASE.items()}, "k": [cell]})
    if read == "not_a_number":
        assert [p.kind for p in r[0].problems] == [read]
    elif read is None:
        assert panel_read is None and r[0].derived["anion_gap_k"] is None
    else:
        assert panel_read == pytest.approx(read) and r[0].derived["anion_gap_k"] == pytest.approx(read)
