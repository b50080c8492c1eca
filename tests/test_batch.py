"""``acidbase batch`` end to end: every row accounted for, in order, as ``check`` reads it.

Input files are described, with the source of every number, in tests/data/batch/README.md.
"""

from __future__ import annotations

import csv
import json
import os
import re
import shutil
from pathlib import Path

import numpy as np
import pyarrow as pa
import pydantic
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import acidbase
from acidbase import batch as batch_module
from acidbase.cli import main
from acidbase.fields import NUMERIC

DATA = Path(__file__).parent / "data" / "batch"


def batch(capsys, *args: str) -> tuple[int, str]:
    rc = main(["batch", *map(str, args)])
    return rc, capsys.readouterr().err


def rows_of(path: Path) -> list[dict[str, str]]:
    with path.open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


# -- every row accounted for -------------------------------------------------------------

def test_mixed_file_keeps_every_row_in_order_with_status_and_reason(tmp_path, capsys):
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", out)
    assert rc == 0
    rows = rows_of(out)
    inputs = rows_of(DATA / "mixed.csv")
    assert [r["sample_id"] for r in rows] == [r["sample_id"] for r in inputs]
    assert [r["row"] for r in rows] == [str(i) for i in range(1, len(inputs) + 1)]
    status = {r["sample_id"]: r["status"] for r in rows}
    refused = {"M03", "M05", "M06", "M09", "M11"}  # M08 (no Na+) is read as a bare gas
    assert {k for k, v in status.items() if v == "refused"} == refused
    for r in rows:
        assert (r["reason"] != "") == (r["status"] == "refused")
        assert r["needs_review"] == "yes" or r["status"] == "interpreted"
    assert "12 rows: 7 interpreted, 5 refused" in err


@pytest.mark.parametrize("sample,words", [
    ("M03", ["pH (ph)", "9.4", "accepted range"]),
    ("M05", ["pCO2 (pco2)", "5.3", "kPa"]),
    ("M06", ["K+ (k)", "'haem'", "not a number"]),
    ("M09", ["pCO2 (pco2)", "'<10'", "censored"]),
    ("M11", ["hco3_source", "plasma"]),
])
def test_refusal_reason_names_the_field_and_the_value(tmp_path, capsys, sample, words):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    reason = next(r["reason"] for r in rows_of(out) if r["sample_id"] == sample)
    for w in words:
        assert w in reason


def test_a_row_without_sodium_is_read_with_the_gap_not_assessable(tmp_path, capsys):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out, "--findings", "all")
    r = next(r for r in rows_of(out) if r["sample_id"] == "M08")
    assert r["status"] == "interpreted" and r["anion_gap"] == ""
    assert "P-GAP-NOT-ASSESSABLE" in r["finding_codes"]


def test_refused_row_carries_no_reading(tmp_path, capsys):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    r = next(r for r in rows_of(out) if r["sample_id"] == "M06")
    assert r["disorders"] == r["finding_codes"] == r["anion_gap"] == ""


def test_censored_optional_value_is_not_measured_and_recorded(tmp_path, capsys):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    r = next(r for r in rows_of(out) if r["sample_id"] == "M07")
    assert r["status"] == "interpreted" and r["qualifiers"] == "lactate <0.3"
    assert r["lactate"] == "<0.3"  # the input cell passes through as written
    assert "D-LACTATE-HIGH" not in r["finding_codes"]


def test_trailing_flag_is_recorded_and_the_value_used(tmp_path, capsys):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out, "--profile", "full")
    rows = {r["sample_id"]: r for r in rows_of(out)}
    assert rows["M10"]["lab_flags"] == "ph L"
    # E17 (Story 2016) read with the flag is read as E17 without it.
    plain = acidbase.interpret(acidbase.Panel(ph=7.20, pco2=40, hco3=15, na=133, cl=110,
                                              lactate=5, sample_type="arterial",
                                              hco3_source="analyser"))
    assert rows["M10"]["finding_codes"] == ";".join(plain.codes())


def test_formula_in_a_passed_through_cell_is_escaped_and_numbers_are_not(tmp_path, capsys):
    out = tmp_path / "out.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    rows = {r["sample_id"]: r for r in rows_of(out)}
    assert rows["M12"]["comment"] == "'=1+2"  # OWASP CSV Injection: leading quote
    assert rows["M02"]["comment"] == "-5.2"   # a number stays a number
    assert rows["M01"]["standard_base_excess"].startswith("-")  # numeric output unescaped


# -- batch and check agree ---------------------------------------------------------------

def _panels_of_mixed() -> list[tuple[str, dict]]:
    """The rows of mixed.csv that Python's float() reads in full, as Panels."""
    out = []
    for r in rows_of(DATA / "mixed.csv"):
        try:
            data = {s.name: float(r[s.name]) for s in NUMERIC if r.get(s.name)}
        except ValueError:
            continue
        try:
            panel = acidbase.Panel(**data, sample_type=r["sample_type"],
                                   hco3_source=r["hco3_source"])
        except pydantic.ValidationError:
            continue
        out.append((r["sample_id"], panel))
    return out


def test_batch_and_check_agree_row_for_row(tmp_path, capsys):
    out = tmp_path / "out.jsonl"
    batch(capsys, DATA / "mixed.csv", "-o", out, "--profile", "full")
    got = {r["sample_id"]: r for r in map(json.loads, out.read_text().splitlines())}
    checked = 0
    for sid, panel in _panels_of_mixed():
        r = got[sid]
        if r["qualifiers"] or r["lab_flags"]:
            continue
        it = acidbase.interpret(panel)
        doc = it.to_dict()
        assert r["status"] == it.status
        assert r["finding_codes"] == ";".join(it.codes())
        assert r["disorders"] == "; ".join(d.label() for d in it.disorders)
        for key, value in it.derived.items():
            if value is None:
                assert r[key] is None, key
            else:
                assert r[key] == pytest.approx(value, rel=1e-12), key
        assert doc["status"] == r["status"]
        checked += 1
    assert checked >= 4


# -- locales, headers, formats -----------------------------------------------------------

def _readings(path: Path) -> list[tuple[str, str, str, str]]:
    return [(r["sample_id"], r["status"], r["finding_codes"], r["anion_gap"])
            for r in rows_of(path)]


@pytest.mark.parametrize("name", ["semicolon_comma_bom.csv", "tab.tsv"])
def test_each_locale_variant_reads_as_the_comma_file(tmp_path, capsys, name):
    ref, out = tmp_path / "ref.csv", tmp_path / "out.csv"
    assert batch(capsys, DATA / "comma.csv", "-o", ref)[0] == 0
    assert batch(capsys, DATA / name, "-o", out)[0] == 0
    assert _readings(out) == _readings(ref)
    assert all(r["status"] == "interpreted" for r in rows_of(out))


def test_decimal_comma_can_be_set_by_option(tmp_path, capsys):
    out = tmp_path / "out.csv"
    rc, _ = batch(capsys, DATA / "semicolon_comma_bom.csv", "--delimiter", ";", "--decimal", ",",
                  "-o", out)
    assert rc == 0 and all(r["status"] == "interpreted" for r in rows_of(out))


def test_loinc_headers_are_read(tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert batch(capsys, DATA / "loinc_headers.csv", "-o", out, "--profile", "full")[0] == 0
    rows = rows_of(out)
    ref = acidbase.interpret(acidbase.Panel(ph=7.40, pco2=40, hco3=24.22, na=140, cl=106.78,
                                            glucose=90, glucose_unit="mg/dL", bun=14,
                                            bun_unit="mg/dL", sample_type="arterial"))
    assert rows[0]["status"] == "interpreted"
    assert rows[0]["finding_codes"] == ";".join(ref.codes())
    # Lynd et al., BMC Emerg Med 2008 (SI form 2 Na + urea + glucose): 2 x 140 + 90/18
    # + 14/2.8 = 290 mosm/kg, read only if 2345-7 and 3094-0 are read in mg/dL.
    assert float(rows[0]["osmolality_calculated"]) == pytest.approx(290.0, abs=0.5)
    assert ref.derived["osmolality_calculated"] == pytest.approx(290.0, abs=0.5)


def test_mapping_file_reads_a_laboratorys_headers_and_units(tmp_path, capsys):
    out = tmp_path / "out.csv"
    rc, _ = batch(capsys, DATA / "lab_export.csv", "--map", DATA / "lab_mapping.csv", "-o", out,
                  "--findings", "all")
    assert rc == 0
    rows = rows_of(out)
    assert [r["status"] for r in rows] == ["interpreted", "interpreted"]
    ref = acidbase.interpret(acidbase.Panel(ph=7.40, pco2=5.333, pco2_unit="kPa", hco3=24.22,
                                            na=140, cl=106.78, sample_type="arterial"))
    assert rows[0]["finding_codes"] == ";".join(ref.codes())
    assert rows[0]["PaCO2"] == "5.333"


def test_unit_option_sets_a_column_unit(tmp_path, capsys):
    f = tmp_path / "kpa.csv"
    f.write_text("ph,pco2,hco3,na,cl\n7.40,5.333,24.22,140,106.78\n")
    out = tmp_path / "out.csv"
    assert batch(capsys, f, "--unit", "pco2=kPa", "-o", out)[0] == 0
    assert rows_of(out)[0]["status"] == "interpreted"


def test_json_lines_in_and_parquet_out(tmp_path, capsys):
    out = tmp_path / "out.parquet"
    assert batch(capsys, DATA / "panels.jsonl", "-o", out)[0] == 0
    t = pq.read_table(out)
    assert t["sample_id"].to_pylist() == ["J1", "J2", "J3"]
    assert t["status"].to_pylist() == ["interpreted", "interpreted", "refused"]
    assert t["lab_flags"].to_pylist()[1] == "ph L" and t["qualifiers"].to_pylist()[1] == \
        "lactate <0.3"
    assert t.schema.metadata[b"caution"].decode() == acidbase.CAUTION


def test_parquet_in_with_native_numbers(tmp_path, capsys):
    src = tmp_path / "in.parquet"
    pq.write_table(pa.table({"ph": [7.40, 7.255], "pco2": [40.0, 60.0], "hco3": [24.22, 26.0],
                             "na": [140.0, 140.0], "cl": [106.78, 105.0],
                             "sample_type": ["arterial", "arterial"]}), src)
    out = tmp_path / "out.csv"
    assert batch(capsys, src, "-o", out)[0] == 0
    assert [r["status"] for r in rows_of(out)] == ["interpreted", "interpreted"]


# -- chunks ------------------------------------------------------------------------------

def test_small_chunks_give_the_same_output_as_one_chunk(tmp_path, capsys):
    big = tmp_path / "big.csv"
    lines = (DATA / "serial_unsorted.csv").read_text().splitlines()
    body = lines[1:] * 3  # 54 rows; repeated sample ids are fine, patients repeat too
    big.write_text("\n".join([lines[0]] + body) + "\n")
    one, many = tmp_path / "one.csv", tmp_path / "many.csv"
    assert batch(capsys, big, "-o", one)[0] == 0
    assert batch(capsys, big, "--chunk-rows", "5", "-o", many)[0] == 0
    assert one.read_bytes() == many.read_bytes()
    assert len(rows_of(many)) == 54


def test_a_chunk_joined_from_several_reader_blocks_gives_the_same_output(tmp_path, capsys,
                                                                        monkeypatch):
    """The CSV reader parses blocks of at most CSV_BLOCK_MAX bytes and chunks are joined
    from them: with a block of 1 KB the 54-row file (about 4 KB) is read in several
    blocks, one chunk, and gives the same bytes as when read in one block."""
    from acidbase import fileio

    big = tmp_path / "big.csv"
    lines = (DATA / "serial_unsorted.csv").read_text().splitlines()
    big.write_text("\n".join([lines[0]] + lines[1:] * 3) + "\n")
    assert big.stat().st_size > 3 * 1024
    whole, blocks = tmp_path / "whole.csv", tmp_path / "blocks.csv"
    assert batch(capsys, big, "-o", whole)[0] == 0
    monkeypatch.setattr(fileio, "CSV_BLOCK_MAX", 1024)
    assert batch(capsys, big, "-o", blocks)[0] == 0
    assert whole.read_bytes() == blocks.read_bytes()
    assert len(rows_of(blocks)) == 54


def test_chunks_on_worker_threads_keep_rows_counts_and_report_as_one_chunk(tmp_path, capsys):
    """Chunks are worked on two threads and put back in file order: the rows, the
    summary's counts and the report's flagged rows are those of a one-chunk run."""
    outs = {}
    for label, extra in (("one", []), ("many", ["--chunk-rows", "2"])):
        out, summary, report = (tmp_path / f"{label}.csv", tmp_path / f"{label}.json",
                                tmp_path / f"{label}.md")
        assert batch(capsys, DATA / "mixed.csv", "-o", out, "--summary", summary,
                     "--report", report, *extra)[0] == 0
        doc = json.loads(summary.read_text())
        doc["audit"].pop("started"), doc["audit"].pop("ended")  # the run's own clock
        text = re.sub(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", "TIME", report.read_text())
        outs[label] = (out.read_bytes(), doc, text)
    assert outs["one"][0] == outs["many"][0]
    assert outs["one"][1] == outs["many"][1]
    assert outs["one"][2] == outs["many"][2].replace(str(tmp_path / "many"), str(tmp_path / "one"))


@pytest.mark.parametrize("stage", ["read", "add"])
def test_a_failure_on_a_thread_of_the_serial_checks_first_pass_fails_the_run(
        tmp_path, capsys, monkeypatch, stage):
    """The first pass reads chunks' cells on worker threads and adds them to the
    checker on another: a failure in either (here a full disk, on the third chunk)
    stops the run with its message, nothing written, no traceback, and no thread
    left hanging."""
    from acidbase import fileio, serial

    calls = []
    target, name = (fileio, "parse_times") if stage == "read" else (serial.SerialChecker, "add")
    real = getattr(target, name)

    def failing(*a, **k):
        calls.append(1)
        if len(calls) == 3:
            raise OSError(28, "No space left on device")
        return real(*a, **k)

    monkeypatch.setattr(target, name, failing)
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, DATA / "serial_unsorted.csv", "-o", out, "--chunk-rows", "2")
    assert rc == 2 and "No space left on device" in err and "Traceback" not in err
    assert not out.exists() and list(tmp_path.iterdir()) == []
    import threading

    assert not [t for t in threading.enumerate() if t.name.startswith("acidbase-serial")]


def test_a_failure_on_the_writing_thread_fails_the_run(tmp_path, capsys, monkeypatch):
    """The output is written on a thread of its own: a full disk on the third chunk
    stops the run with its message, nothing written, no thread left hanging."""
    import threading

    from acidbase.files import writer

    calls = []
    real = writer.Writer.put

    def failing(self, *a, **k):
        calls.append(1)
        if len(calls) == 3:
            raise OSError(28, "No space left on device")
        return real(self, *a, **k)

    monkeypatch.setattr(writer.Writer, "put", failing)
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, DATA / "mixed.csv", "-o", out, "--chunk-rows", "2")
    assert rc == 2 and "No space left on device" in err and "Traceback" not in err
    assert len(calls) >= 3 and not out.exists() and list(tmp_path.iterdir()) == []
    assert not [t for t in threading.enumerate() if t.name.startswith("acidbase-write")]


# -- serial through the command -----------------------------------------------------------

def test_serial_checks_on_an_unsorted_file(tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert batch(capsys, DATA / "serial_unsorted.csv", "-o", out, "--profile", "full")[0] == 0
    rows = {r["sample_id"]: r for r in rows_of(out)}
    assert rows["S03"]["serial_codes"].split(";")[:2] == ["SERIAL-BREAK", "SERIAL-DELTA-NA"]
    assert "SERIAL-DELTA-NA" in rows["S04"]["serial_codes"]
    for sid in ("S01", "S02", "S05", "S06", "S07", "S08", "S09", "S12", "S14", "S15", "S16"):
        assert rows[sid]["serial_codes"] == "", sid
    assert rows["S13"]["serial_codes"] == "SERIAL-DELTA-K"
    assert "SERIAL-DELTA-NA" in rows["S17"]["serial_codes"]
    assert rows["S10"]["serial_status"].startswith("not assessable")
    assert rows["S18"]["serial_status"] == "not assessable: no patient_id or collected_at"
    assert rows["S03"]["needs_review"] == "yes" and rows["S01"]["needs_review"] == "no"


def test_no_serial_option_and_missing_columns_say_not_run(tmp_path, capsys):
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, DATA / "comma.csv", "-o", out, "--profile", "full")
    assert rc == 0 and "serial checks not run" in err
    assert {r["serial_status"] for r in rows_of(out)} == {"not run"}


# -- could not run ------------------------------------------------------------------------

@pytest.mark.parametrize("args,words", [
    (["missing.csv"], "no such file"),
    ([DATA / "lab_export.csv"], "no column for required field"),
    ([DATA / "comma.csv", "--unit", "pco2=bar"], "not accepted"),
    ([DATA / "comma.csv", "--delta", "na=-3"], "positive number"),
    ([DATA / "comma.csv", "--report", "r.pdf"], ".md or .html"),
])
def test_could_not_run_exits_2_with_one_clear_line(tmp_path, capsys, args, words):
    """One line, and a previous output left byte for byte (these cases stop before any
    row is read; tests/test_outputs.py stops runs after rows were written)."""
    (tmp_path / "o.csv").write_bytes(b"previous\n")
    rc, err = batch(capsys, *args, "-o", tmp_path / "o.csv")
    assert rc == 2
    assert words in err and "Traceback" not in err
    assert err.startswith("acidbase batch: could not run:") and err.count("\n") == 1
    assert "nothing written, " in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o.csv"]
    assert (tmp_path / "o.csv").read_bytes() == b"previous\n"


def test_ragged_line_stops_the_run_and_leaves_no_output(tmp_path, capsys):
    """The ragged line comes after the first chunks were formatted and written."""
    f = tmp_path / "ragged.csv"
    f.write_text("ph,pco2,hco3,na,cl\n" + "7.40,40,24.22,140,106.78\n" * 3000
                 + "7.40,40,24.22\n")
    rc, err = batch(capsys, f, "-o", tmp_path / "o.csv", "--chunk-rows", "100")
    assert rc == 2 and "3 fields where the header has 5" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ragged.csv"]


# -- summary, report, caution -------------------------------------------------------------

def test_summary_counts_processes_flags_and_reasons(tmp_path, capsys):
    summary = tmp_path / "s.json"
    batch(capsys, DATA / "mixed.csv", "-o", tmp_path / "o.csv", "--summary", summary)
    doc = json.loads(summary.read_text())
    assert doc["rows"] == 12 and doc["refused"] == 5 and doc["interpreted"] == 7
    assert doc["lab_flags"] == {"ph L": 1}
    assert doc["qualifiers"] == {"lactate <#": 1, "pco2 <#": 1}
    assert sum(doc["refusal_reasons"].values()) >= 5
    assert doc["caution"] == acidbase.CAUTION


@pytest.mark.parametrize("name", ["r.md", "r.html"])
def test_report_has_counts_flagged_rows_picture_and_caution(tmp_path, capsys, name):
    report = tmp_path / name
    assert batch(capsys, DATA / "mixed.csv", "-o", tmp_path / "o.csv", "--report", report)[0] == 0
    text = report.read_text()
    assert "pCO2, mm[Hg]" in text and "M03" in text
    assert (acidbase.CAUTION if name.endswith(".md") else "licensed clinicians") in text


def test_caution_is_in_the_output_file_and_on_stderr(tmp_path, capsys):
    out = tmp_path / "o.csv"
    _, err = batch(capsys, DATA / "comma.csv", "-o", out)
    rows = rows_of(out)
    assert rows[0]["caution"] == acidbase.CAUTION and acidbase.CAUTION in err


def test_no_progress_bar_when_stderr_is_not_a_terminal(tmp_path, capsys):
    _, err = batch(capsys, DATA / "serial_unsorted.csv", "-o", tmp_path / "o.csv")
    assert "\r" not in err


def test_input_column_named_like_an_output_column_is_kept_apart(tmp_path, capsys):
    f = tmp_path / "clash.csv"
    shutil.copy(DATA / "comma.csv", f)
    text = f.read_text().splitlines()
    f.write_text("\n".join([text[0] + ",status"] + [t + ",sent" for t in text[1:]]) + "\n")
    out = tmp_path / "o.csv"
    _, err = batch(capsys, f, "-o", out)
    r = rows_of(out)[0]
    assert r["status (input)"] == "sent" and r["status"] == "interpreted"
    assert "renamed" in err


def test_standard_output_by_default(capsys):
    rc = main(["batch", str(DATA / "comma.csv"), "--quiet"])
    cap = capsys.readouterr()
    assert rc == 0
    assert cap.out.splitlines()[0].startswith('"row","sample_id"')
    assert len(cap.out.splitlines()) == 5


def test_derived_option_limits_the_value_columns(tmp_path, capsys):
    out = tmp_path / "o.csv"
    assert batch(capsys, DATA / "comma.csv", "--derived", "anion_gap,standard_base_excess",
                 "-o", out)[0] == 0
    cols = set(rows_of(out)[0])
    assert {"anion_gap", "standard_base_excess", "finding_codes"} <= cols
    assert "hco3_calculated" not in cols
    rc, err = batch(capsys, DATA / "comma.csv", "--derived", "gap", "-o", out)
    assert rc == 2 and "gap" in err


def test_bad_choice_message_is_the_kernels_own(tmp_path, capsys):
    out = tmp_path / "o.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    reason = next(r["reason"] for r in rows_of(out) if r["sample_id"] == "M11")
    kernel = acidbase.interpret_many({"ph": [7.40], "pco2": [40.0], "hco3": [24.22],
                                      "na": [140.0], "cl": [106.78],
                                      "sample_type": ["arterial"], "hco3_source": ["plasma"]})
    assert reason == kernel.reasons[0]


@pytest.mark.parametrize("text", ["ph,pco2,hco3,na,cl\n", "ph,pco2,hco3,na,cl",
                                  "ph;pco2;hco3;na;cl", "ph,pco2,hco3,na,cl\r"])
def test_header_without_rows_could_not_run(tmp_path, capsys, text):
    """A header line alone, with or without its line end: "no rows" (without one it was
    Arrow's "Empty CSV file or block: cannot infer number of columns")."""
    f = tmp_path / "empty.csv"
    f.write_bytes(text.encode())
    (tmp_path / "o.csv").write_bytes(b"previous\n")
    rc, err = batch(capsys, f, "-o", tmp_path / "o.csv")
    assert rc == 2 and "no rows" in err
    assert (tmp_path / "o.csv").read_bytes() == b"previous\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["empty.csv", "o.csv"]


def test_an_input_that_is_no_file_is_named_for_what_it_is(tmp_path, capsys):
    """A folder, or a pipe (``<(cat file)``, read once, where a run reads its file more than
    once), as INPUT: said so, with what to give (both said "no such file")."""
    (tmp_path / "d").mkdir()
    os.mkfifo(tmp_path / "pipe")
    for path, words in ((tmp_path / "d", "d: is a folder; name a file"),
                         (tmp_path / "pipe", "pipe: is not a regular file (a pipe or a device); "
                                             "give - to read standard input"),
                         (tmp_path / "nothing.csv", "nothing.csv: no such file")):
        for fmt in ((), ("--format", "hl7")):
            rc, err = batch(capsys, path, *fmt, "-o", tmp_path / "o.csv")
            assert rc == 2 and words in err, err
            assert not (tmp_path / "o.csv").exists()


def test_columns_left_unescaped_never_start_like_a_formula(tmp_path, capsys):
    """Only input-carrying columns are escaped; the others must never need it (OWASP)."""
    out = tmp_path / "o.csv"
    batch(capsys, DATA / "mixed.csv", "-o", out)
    inputs = set(rows_of(DATA / "mixed.csv")[0])
    for r in rows_of(out):
        for key, cell in r.items():
            if key in inputs or key in ("reason", "serial_detail", "qualifiers", "lab_flags"):
                continue
            if cell and cell[0] in "=+-@\t\r\n\0":
                float(cell)  # only a number may start so


def test_other_encoding_is_read_when_named(tmp_path, capsys):
    # cp1252 (Windows-1252) encodes ü as 0xFC and ß as 0xDF.
    f = tmp_path / "cp1252.csv"
    f.write_bytes("ph;pco2;hco3;na;cl;ward\n7,40;40;24,22;140;106,78;Grüße\n".encode("cp1252"))
    out = tmp_path / "o.csv"
    rc, err = batch(capsys, f, "-o", out)
    assert rc == 2 and "0xfc" in err
    assert batch(capsys, f, "--encoding", "cp1252", "-o", out)[0] == 0
    r = rows_of(out)[0]
    assert r["ward"] == "Grüße" and r["status"] == "interpreted"


def test_parquet_with_integer_ids_and_timestamps_runs_serial_checks(tmp_path, capsys):
    import datetime as dt

    src = tmp_path / "ser.parquet"
    times = [dt.datetime(2026, 1, 1, h, tzinfo=dt.timezone.utc) for h in (8, 10, 12)]
    # E3 panels; Na+ 128 in the middle (Cl- moved with it, gap 9): a one-panel spike.
    pq.write_table(pa.table({
        "patient_id": [1, 1, 1], "collected_at": pa.array(times, type=pa.timestamp("s", "UTC")),
        "ph": [7.40] * 3, "pco2": [40.0] * 3, "hco3": [24.22] * 3,
        "na": [140.0, 128.0, 140.0], "cl": [106.78, 94.78, 106.78]}), src)
    out = tmp_path / "o.csv"
    assert batch(capsys, src, "-o", out)[0] == 0
    codes = [r["serial_codes"] for r in rows_of(out)]
    assert codes[0] == "" and codes[1].startswith("SERIAL-BREAK") and "SERIAL-DELTA-NA" in codes[2]


def test_settings_that_make_no_sense_could_not_run(tmp_path, capsys):
    rc, err = batch(capsys, DATA / "comma.csv", "--anion-gap-interval", "12", "6",
                    "-o", tmp_path / "o.csv")
    assert rc == 2 and err.startswith("acidbase batch: could not run: anion gap interval")


# -- standard input -----------------------------------------------------------------------

def _run_stdin(data: bytes, *args: str):
    import os
    import subprocess
    import sys

    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    return subprocess.run([sys.executable, "-m", "acidbase", "batch", "-", "--quiet", *args],
                          input=data, capture_output=True, env=env, timeout=120)


def test_standard_input_gives_the_same_output_as_the_file(tmp_path, capsys):
    src = DATA / "serial_unsorted.csv"
    out = tmp_path / "out.csv"
    assert batch(capsys, src, "-o", out)[0] == 0
    done = _run_stdin(src.read_bytes())
    assert done.returncode == 0, done.stderr
    assert done.stdout == out.read_bytes()


def test_standard_input_problems_name_standard_input(tmp_path):
    done = _run_stdin(b"")
    assert done.returncode == 2
    assert b"could not run: standard input: the file is empty" in done.stderr
    assert b"Traceback" not in done.stderr


def test_report_says_why_each_listed_row_needs_review(tmp_path, capsys):
    """Each row the report lists names what put it there: "refused" for a refused row
    (which has no reading, so no findings), else the trust findings above "info" among
    the row's finding codes in the output, then its serial flags; the findings table
    gives each code its title."""
    from acidbase.rules import BY_CODE

    out, report = tmp_path / "o.csv", tmp_path / "r.md"
    assert batch(capsys, DATA / "mixed.csv", "-o", out, "--report", report)[0] == 0
    by_row = {r["row"]: r for r in rows_of(out)}
    lines = report.read_text().split("## Rows that need review")[1].splitlines()
    head = [c.strip() for c in lines[2].strip("|").split("|")]
    listed = [dict(zip(head, (c.strip() for c in ln.strip("|").split("|"))))
              for ln in lines[4:] if ln.startswith("| ")]
    assert listed and len(listed) == sum(r["needs_review"] == "yes" for r in by_row.values())
    for item in listed:
        row = by_row[item["row"]]
        trust = [c for c in row["finding_codes"].split(";")
                 if c and BY_CODE[c].section == "trust" and BY_CODE[c].severity != "info"]
        first = ["refused"] if row["status"] == "refused" else trust
        serial = [c for c in row["serial_codes"].split(";") if c]
        assert first and item["review because"].split("; ") == first + serial
    assert "T-CRITICAL: " + BY_CODE["T-CRITICAL"].title in report.read_text()


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.floats(-20, 80, allow_nan=False), st.floats(-5, 130, allow_nan=False)),
                min_size=1, max_size=60),
       st.lists(st.tuples(st.integers(0, batch_module.PLANE_ROWS), st.integers(0, batch_module.PLANE_COLS)),
                max_size=20))
def test_plane_counts_are_numpys_histogram(points, on_edges):
    """The summary's pCO2/HCO3- picture counts as numpy's histogram2d does (numpy is
    the reference: the same bins, a value on the last edge in the last bin, values
    outside left out), values on bin edges included."""
    rows, cols = batch_module._PLANE_EDGES
    points = points + [(rows[i], cols[j]) for i, j in on_edges]
    hco3 = np.array([p[0] for p in points])
    pco2 = np.array([p[1] for p in points])
    ref, _, _ = np.histogram2d(hco3, pco2, bins=(batch_module.PLANE_ROWS, batch_module.PLANE_COLS),
                               range=(batch_module.PLANE_HCO3, batch_module.PLANE_PCO2))
    assert (batch_module.plane_counts(hco3, pco2) == ref.astype(np.int64)).all()


def test_an_absent_optional_module_is_marked_absent_and_nothing_else(monkeypatch):
    """pyarrow looks for dateutil each time it converts a Python value; where it is
    not installed, the batch marks it absent the import system's way (None in
    sys.modules: importing it fails at once, as it would have anyway); where it is
    installed, nothing is touched.  pyarrow still converts values either way."""
    import importlib.util
    import sys

    import pyarrow as pa

    real_find = importlib.util.find_spec
    monkeypatch.delitem(sys.modules, "dateutil", raising=False)
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "dateutil" else real_find(name, *a))
    batch_module._absent_imports_fail_fast()
    assert "dateutil" in sys.modules and sys.modules["dateutil"] is None
    with pytest.raises(ImportError):
        import dateutil.relativedelta  # noqa: F401
    assert pa.scalar("7.40").as_py() == "7.40"
    monkeypatch.undo()

    spec = object()  # installed: left alone
    monkeypatch.delitem(sys.modules, "dateutil", raising=False)
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: spec if name == "dateutil" else real_find(name, *a))
    batch_module._absent_imports_fail_fast()
    assert "dateutil" not in sys.modules


def test_the_reports_list_is_the_same_whatever_the_profile(tmp_path, monkeypatch, capsys):
    """A lean run words the serial flags of only the rows its report can list (the
    first FLAGGED_LISTED flagged ones); its report lists the same rows, with the same
    serial detail, as a run that words them all (``--profile full``), over several
    partitions.  Invented panels, for this test only."""
    from acidbase import serial

    monkeypatch.setattr(batch_module, "FLAGGED_LISTED", 12)
    monkeypatch.setattr(serial.SerialChecker, "partitions_for", staticmethod(lambda size: 5))
    rng = np.random.default_rng(8)
    lines = ["sample_id,patient_id,collected_at,ph,pco2,hco3,na,cl,k"]
    for i in range(600):
        na = 140 + (25 if rng.random() < 0.15 else 0) + rng.normal(0, 2)
        lines.append(f"S{i},P{rng.integers(0, 40)},2026-03-{1 + i // 200:02d}T"
                     f"{(i // 10) % 20:02d}:{i % 60:02d}:00Z,7.40,40,24,{na:.0f},104,4.1")
    src = tmp_path / "panels.csv"
    src.write_text("\n".join(lines) + "\n")
    listed = []
    for profile in ("lean", "full"):
        report = tmp_path / f"{profile}.md"
        rc = main(["batch", str(src), "-o", str(tmp_path / f"{profile}.csv"), "--report",
                   str(report), "--profile", profile, "--quiet"])
        assert rc == 0
        text = report.read_text()
        listed.append(text[text.index("## Rows that need review"):text.index("## Panels on")])
    capsys.readouterr()
    assert listed[0] == listed[1]
    assert listed[0].count("SERIAL-DELTA-NA") >= 8 and listed[0].count("delta limit") >= 8


# -- a header given twice ------------------------------------------------------------------

@pytest.mark.parametrize("header, others", [("ph", "pco2,hco3"), ("pCO2 (kPa)", "ph,hco3"),
                                            ("2744-1", "pco2,hco3")])
def test_a_field_header_given_twice_stops_the_run_as_two_spellings_do(tmp_path, capsys, header,
                                                                      others):
    """``ph,ph`` is two columns for one field, as ``pH,PH`` is: the run stops and names
    both, never reading the first and passing the second through unread (a row with its
    value only in the second would be refused as "not given")."""
    src = tmp_path / "twice.csv"
    src.write_text(f"sample_id,{header},{others},{header}\nA,7.40,40,24,\nB,,40,24,7.30\n")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 2 and not out.exists()
    assert f"columns {header!r} and '{header} (2)' both map to" in err


def test_a_field_header_given_twice_in_parquet_stops_the_run(tmp_path, capsys):
    src = tmp_path / "twice.parquet"
    pq.write_table(pa.table([["7.40"], ["40"], ["24"], ["7.41"]],
                            names=["ph", "pco2", "hco3", "ph"]), src)
    rc, err = batch(capsys, src, "-o", tmp_path / "out.csv", "--quiet")
    assert rc == 2 and "columns 'ph' and 'ph (2)' both map to ph" in err


def test_a_passed_through_header_given_twice_is_renamed_and_kept(tmp_path, capsys):
    src = tmp_path / "twice.csv"
    src.write_text("sample_id,ph,pco2,hco3,note,note\nA,7.40,40,24,one,two\n")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 0 and "'note' -> 'note (2)'" in err
    row = rows_of(out)[0]
    assert (row["note"], row["note (2)"], row["status"]) == ("one", "two", "interpreted")


# -- compressed files and tab-separated output ---------------------------------------------

TWO_PANELS = "sample_id,ph,pco2,hco3\nA,7.40,40,24\nB,7.35,45,24.1\n"


@pytest.mark.parametrize("name", ["out.csv.gz", "out.jsonl.bz2", "out.csv.zip", "out.CSV.XZ"])
def test_an_output_named_as_compressed_is_refused_not_written_as_plain_text(
        tmp_path, capsys, name):
    """``-o out.csv.gz`` once wrote plain CSV under a gzip name (gunzip then fails)."""
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    rc, err = batch(capsys, src, "-o", tmp_path / name, "--quiet")
    assert rc == 2 and not (tmp_path / name).exists()
    assert f"-o {tmp_path / name}: acidbase writes no compressed files" in err


def test_a_compressed_input_is_named_as_such_with_the_way_to_read_it(tmp_path, capsys):
    """A gzip file was reported as "byte 0x8b is not utf-8; give --encoding cp1252"."""
    import gzip

    src = tmp_path / "day.csv.gz"
    src.write_bytes(gzip.compress(TWO_PANELS.encode()))
    rc, err = batch(capsys, src, "-o", tmp_path / "out.csv", "--quiet")
    assert rc == 2 and "gzip-compressed" in err and "gunzip -c" in err
    assert "--encoding" not in err


def test_a_tsv_output_is_separated_by_tabs(tmp_path, capsys):
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    out = tmp_path / "out.tsv"
    rc, _ = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 0
    with out.open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f, delimiter="\t"))
    assert [(r["row"], r["sample_id"], r["status"]) for r in rows] == [
        ("1", "A", "interpreted"), ("2", "B", "interpreted")]


def test_an_output_delimiter_given_wins_over_a_tsv_name(tmp_path, capsys):
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    out = tmp_path / "out.tsv"
    rc, _ = batch(capsys, src, "-o", out, "--quiet", "--output-delimiter", ";")
    assert rc == 0 and out.read_text().startswith('"row";"sample_id"')


@pytest.mark.parametrize("option", ["-o", "--summary", "--report"])
def test_an_output_option_given_twice_with_two_files_is_refused(tmp_path, capsys, option):
    """``-o a.csv ... -o b.csv`` wrote b.csv only, silently; the run now stops at once."""
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    first, second = (tmp_path / f"{n}.md" for n in ("a", "b"))
    with pytest.raises(SystemExit) as stop:
        batch(capsys, src, option, first, option, second, "--quiet")
    assert stop.value.code == 2 and "given twice" in capsys.readouterr().err
    assert not first.exists() and not second.exists()


def test_a_utf16_file_is_named_with_the_encoding_that_reads_it(tmp_path, capsys):
    """A spreadsheet's "Unicode text" export (UTF-16 with its byte-order mark) was told
    "give --encoding (for example cp1252)", which would read it as nonsense."""
    src = tmp_path / "export.txt"
    src.write_bytes("sample_id\tph\tpco2\thco3\r\nA\t7.40\t40\t24\r\n".encode("utf-16"))
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 2 and "give --encoding utf-16" in err and "cp1252" not in err
    rc, _ = batch(capsys, src, "-o", out, "--quiet", "--encoding", "utf-16")
    assert rc == 0 and [r["status"] for r in rows_of(out)] == ["interpreted"]


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_a_utf16_file_without_its_mark_is_named_with_the_encoding_that_reads_it(
        tmp_path, capsys, codec):
    """UTF-16 text without a byte-order mark decodes as UTF-8 (ASCII and NUL bytes), so the
    run said "no column for required field(s)", listing headers like 'p\\x00h\\x00'; a
    sample with every other byte NUL is named UTF-16, with the encoding to give.  One NUL
    byte in a cell is still read (that row refused)."""
    src = tmp_path / "export.csv"
    src.write_bytes("ph,pco2,hco3\r\n7.40,40,24\r\n".encode(codec))
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 2 and f"give --encoding {codec}" in err and not out.exists(), err
    rc, err = batch(capsys, src, "-o", out, "--quiet", "--encoding", codec)
    assert rc == 0 and [r["status"] for r in rows_of(out)] == ["interpreted"], err
    one = tmp_path / "one.csv"
    one.write_bytes(b"ph,pco2,hco3\n7.40,4\x000,24\n7.40,40,24\n")
    rc, err = batch(capsys, one, "-o", out, "--quiet")
    assert rc == 0 and [r["status"] for r in rows_of(out)] == ["refused", "interpreted"]


@pytest.mark.parametrize("option", ["-o", "--summary"])
def test_the_site_file_is_never_an_output(tmp_path, capsys, option):
    """``--config site.toml --summary site.toml`` overwrote the laboratory's site file
    with the summary: an input, by any name, is never written (docs/batch.md)."""
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    site = tmp_path / "site.toml"
    site.write_text("[intervals.arterial]\n")
    rc, err = batch(capsys, src, "--config", site, option, site, "--quiet")
    assert rc == 2 and site.read_text() == "[intervals.arterial]\n"
    assert "is the --config file" in err


def test_the_site_files_mapping_file_is_never_an_output(tmp_path, capsys):
    src = tmp_path / "day.csv"
    src.write_text(TWO_PANELS)
    mapping = tmp_path / "map.csv"
    mapping.write_text("header,field\nPH,ph\n")
    site = tmp_path / "site.toml"
    site.write_text(f"[batch]\nmapping = \"{mapping}\"\n")
    rc, err = batch(capsys, src, "--config", site, "-o", mapping, "--quiet")
    assert rc == 2 and mapping.read_text() == "header,field\nPH,ph\n"
    assert "is the --map file" in err


class _FakeLibc:
    """Records mallopt(3) calls instead of making them."""

    def __init__(self):
        self.calls = []

    def mallopt(self, param, value):
        self.calls.append((param.value, value.value))
        return 1


@pytest.mark.parametrize("user_setting", [None, "MALLOC_TRIM_THRESHOLD_", "GLIBC_TUNABLES"])
def test_a_batch_run_keeps_freed_heap_memory_unless_the_user_set_glibc_malloc(
        monkeypatch, user_setting):
    """The batch's glibc settings (batch._lean_allocators): two arenas always; the heap
    kept for reuse (M_TRIM_THRESHOLD -1, M_TOP_PAD -2, M_MMAP_THRESHOLD -3: glibc's
    malloc.h) only where the user's environment does not set glibc's malloc itself."""
    libc = _FakeLibc()
    monkeypatch.setattr(batch_module.ctypes, "CDLL", lambda name: libc)
    monkeypatch.setenv("ARROW_DEFAULT_MEMORY_POOL", "system")  # (leave this process's pool)
    for name in [k for k in os.environ if k.startswith("MALLOC_")]:
        monkeypatch.delenv(name)
    monkeypatch.delenv("GLIBC_TUNABLES", raising=False)
    if user_setting:
        monkeypatch.setenv(user_setting, "glibc.malloc.trim_threshold=0"
                           if user_setting == "GLIBC_TUNABLES" else "0")
    batch_module._lean_allocators()
    params = dict(libc.calls)
    assert params[-8] == 2  # M_ARENA_MAX
    heap = {-1: batch_module._KEEP_FREED, -2: batch_module._GROW_BY,
            -3: batch_module._MAP_ABOVE}
    if user_setting:
        assert not heap.keys() & params.keys()
    else:
        assert {k: params.get(k) for k in heap} == heap


def test_a_parquet_bytes_column_is_copied_as_text_or_refused_by_name(tmp_path, capsys):
    """A Parquet column of bytes (BYTE_ARRAY without the UTF-8 annotation, as some older
    writers store text) passed through: CSV and JSON Lines carry it as the same text
    (JSON Lines wrote Python's "b'S-1'"); bytes that are not UTF-8 cannot be text, so a
    CSV or JSON Lines output is refused naming the column and the row, and Parquet
    keeps them (the run said "the file could not be read (Invalid UTF8 payload)")."""
    good, bad = tmp_path / "good.parquet", tmp_path / "bad.parquet"
    base = {"ph": [7.40, 7.40], "pco2": [40.0, 40.0], "hco3": [24.0, 24.0]}
    pq.write_table(pa.table({**base, "note": pa.array([b"S-1", None], pa.binary())}), good)
    pq.write_table(pa.table({**base, "note": pa.array([b"ok", b"\xff\xfe"], pa.binary())}), bad)
    rc, err = batch(capsys, good, "-o", tmp_path / "g.csv")
    assert rc == 0, err
    assert [r["note"] for r in rows_of(tmp_path / "g.csv")] == ["S-1", ""]
    rc, err = batch(capsys, good, "-o", tmp_path / "g.jsonl")
    assert rc == 0, err
    lines = (tmp_path / "g.jsonl").read_text(encoding="utf-8").splitlines()
    assert [json.loads(x)["note"] for x in lines] == ["S-1", None]
    for name in ("b.csv", "b.jsonl"):
        rc, err = batch(capsys, bad, "-o", tmp_path / name)
        assert rc == 2 and not (tmp_path / name).exists()
        assert "column 'note'" in err and "row 2" in err and "not UTF-8" in err, err
        assert "Parquet" in err
    rc, err = batch(capsys, bad, "-o", tmp_path / "b.parquet")
    assert rc == 0, err
    assert pq.read_table(tmp_path / "b.parquet")["note"].to_pylist() == [b"ok", b"\xff\xfe"]


def test_a_pregnancy_column_is_read_as_check_reads_the_option(tmp_path, capsys):
    """The ``pregnancy`` column was mapped but never handed to the kernel: a
    third-trimester panel read against the adult intervals in a file (a respiratory
    alkalosis) and against the third-trimester ones by ``check --pregnancy`` (none;
    Abbassi-Ghanavati, Greer & Cunningham 2009, acidbase.reference), and a word outside
    the vocabulary ("banana", a JSON false) was passed over unread."""
    src = tmp_path / "preg.csv"
    src.write_text("ph,pco2,hco3,pregnancy\n7.44,31,21,third_trimester\n7.44,31,21,no\n"
                   "7.44,31,21,banana\n7.44,31,21,\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--profile", "full")
    assert rc == 0, err
    rows = rows_of(out)
    library = acidbase.interpret_many({"ph": [7.44] * 4, "pco2": [31] * 4, "hco3": [21] * 4,
                                       "pregnancy": ["third_trimester", "no", "banana", None]})
    assert [r["status"] for r in rows] == ["interpreted", "interpreted", "refused",
                                           "interpreted"]
    assert "T-PREGNANCY-INTERVALS" in rows[0]["finding_codes"].split(";")
    assert "T-PREGNANCY-INTERVALS" not in rows[1]["finding_codes"].split(";")
    for row, it in zip(rows, library):
        assert row["disorders"] == "; ".join(d.label() for d in it.disorders)
        assert row["reason"] == "; ".join(map(str, it.problems))
    assert "Pregnancy (pregnancy) 'banana' is not one of" in rows[2]["reason"]
    jsonl = tmp_path / "preg.jsonl"
    jsonl.write_text('{"ph": 7.44, "pco2": 31, "hco3": 21, "pregnancy": false}\n',
                     encoding="utf-8")
    rc, err = batch(capsys, jsonl, "-o", out)
    assert rc == 0 and rows_of(out)[0]["status"] == "refused", err


def test_json_lines_take_the_encoding_option_as_csv_does(tmp_path, capsys):
    """JSON Lines were always decoded as UTF-8, whatever --encoding said, and a byte that
    is not UTF-8 stopped the run with Python's words ("the file could not be read ('utf-8'
    codec can't decode byte 0xe9 ...)"); a UTF-16 export likewise.  They are read in the
    encoding given, and refused as a CSV file is, naming the encoding to give."""
    line = '{"ph": 7.40, "pco2": 40, "hco3": 24, "sample_id": "Sé-1"}\n'
    latin, utf16 = tmp_path / "latin.jsonl", tmp_path / "utf16.jsonl"
    latin.write_bytes(line.encode("latin-1"))
    utf16.write_bytes(line.encode("utf-16"))
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, latin, "-o", out)
    assert rc == 2 and "is not utf-8 text" in err and "--encoding" in err, err
    assert "codec can't decode" not in err and not out.exists()
    rc, err = batch(capsys, utf16, "-o", out)
    assert rc == 2 and "give --encoding utf-16" in err and not out.exists(), err
    for path, encoding in ((latin, "latin-1"), (utf16, "utf-16")):
        rc, err = batch(capsys, path, "-o", out, "--encoding", encoding)
        assert rc == 0, err
        row = rows_of(out)[0]
        assert (row["status"], row["sample_id"]) == ("interpreted", "Sé-1")


@pytest.mark.parametrize("text", [
    " ph , PCO2 ,\"hco3\"\n7.40,40,24\n7.30,40,20\n",       # spaces around headers
    "\n \r\n ph ,pco2,hco3\n7.40,40,24\n7.30,40,20\n",      # and blank lines before them
    "\nph,pco2,hco3,note,note\n7.40,40,24,a,b\n7.30,40,20,c,d\n",  # a repeated header
])
def test_headers_with_spaces_or_blank_lines_before_them_keep_every_row(tmp_path, capsys, text):
    """Headers are matched trimmed of their spaces; the CSV reader was asked for the
    trimmed names, which the file's header line does not hold, and the run ended as a
    defect (exit 70, ArrowKeyError).  Where the reader is given the names (a repeated
    header renamed, a header trimmed), blank lines before the header line are skipped
    with it: the header line was read as a data row, a row that is not in the file."""
    src = tmp_path / "in.csv"
    src.write_text(text, encoding="utf-8")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out)
    assert rc == 0, err
    rows = rows_of(out)
    assert [r["row"] for r in rows] == ["1", "2"]
    assert [r["status"] for r in rows] == ["interpreted", "interpreted"]
    assert [r["ph"] for r in rows] == ["7.40", "7.30"]


@pytest.mark.parametrize("with_time", [False, True])
def test_json_lines_output_is_json_whatever_the_input_numbers(tmp_path, capsys, with_time):
    """A Parquet input's NaN and infinity, copied to a JSON Lines output, were written as
    the tokens NaN and Infinity (json.dumps' own, which no JSON reader takes): an
    infinity sent the whole table through json.dumps row by row, as did any timestamp
    column, and a NaN beside one.  A NaN is null (as a missing number is), an infinity
    the text the CSV output shows; every line parses as strict JSON (RFC 8259)."""
    src = tmp_path / "in.parquet"
    cols = {"ph": [7.40, float("nan"), float("inf")], "pco2": [40.0, 40.0, float("-inf")],
            "hco3": [24.0, 24.0, 24.0]}
    if with_time:
        cols["collected_at"] = pa.array([np.datetime64("2024-01-01T10:00", "us")] * 3)
    pq.write_table(pa.table(cols), src)
    out = tmp_path / "out.jsonl"
    rc, err = batch(capsys, src, "-o", out)
    assert rc == 0, err

    def refuse(token):
        raise ValueError(f"not JSON: {token}")

    rows = [json.loads(line, parse_constant=refuse)
            for line in out.read_text(encoding="utf-8").splitlines()]
    assert [r["row"] for r in rows] == [1, 2, 3]
    assert [r["ph"] for r in rows] == [7.4, None, "inf"]
    assert rows[2]["pco2"] == "-inf"
    assert [r["status"] for r in rows] == ["interpreted", "refused", "refused"]
    if with_time:
        assert rows[0]["collected_at"] == "2024-01-01 10:00:00"


def test_a_byte_that_is_not_utf8_past_the_first_lines_is_named_by_line_and_column(
        tmp_path, capsys):
    """The first 64 KB are sampled; a byte past them that is not UTF-8 stopped the run
    with Arrow's words ("In CSV column #2: CSV conversion error to string: invalid UTF8
    data"), counting columns from 0 and naming no line.  The file line, the byte and the
    column are named, with the encoding to try; nothing is written."""
    src = tmp_path / "late.csv"
    rows = b"note,ph,pco2,hco3\n" + b"x,7.40,40,24\n" * 8000
    src.write_bytes(rows + b"x,7.40,4\xe90,24\n" + b"x,7.40,40,24\n")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--quiet")
    assert rc == 2 and not out.exists()
    assert "late.csv: line 8002 (byte 0xe9), column 'pco2': not utf-8 text" in err, err
    assert "--encoding" in err


@pytest.mark.parametrize("option", ["-o", "--summary"])
def test_an_empty_output_name_is_refused_as_naming_no_file(tmp_path, capsys, option):
    """``-o ''`` (an unset shell variable, ``-o "$OUT"``) said "OUTPUT : is a folder; name
    a file" (the empty name is the current folder); it names the option and says the
    name names no file, before any work."""
    src = tmp_path / "in.csv"
    src.write_text("ph,pco2,hco3\n7.40,40,24\n", encoding="utf-8")
    rc, err = batch(capsys, src, option, "")
    assert rc == 2 and f"could not run: {option} '': names no file; nothing written" in err, err


@pytest.mark.parametrize("delimiter", ["1", ".", "-", ":", " ", '"', "\n"])
def test_an_output_delimiter_that_is_part_of_a_bare_cell_is_refused(tmp_path, capsys,
                                                                    delimiter):
    """Numbers (the row number, a Parquet input's numbers) and times are written bare:
    a digit, a point, a sign, a colon or a space as the delimiter cut them apart (with
    "1", row 1 came out as "11"), and a quote or a line break failed the run as "the
    file could not be read (WriteOptions: ...)", blaming the input.  Refused before any
    work, naming the option and the delimiters to give."""
    src = tmp_path / "in.csv"
    src.write_text("ph,pco2,hco3\n7.40,40,24\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    rc, err = batch(capsys, src, "-o", out, "--output-delimiter", delimiter)
    assert rc == 2 and not out.exists()
    assert f"--output-delimiter {delimiter!r}: give , ; | or tab" in err, err


@pytest.mark.parametrize(("mapping", "words"), [
    ("header,field\nAcidity,ph\nCO2,pco2\nBic,bicarbonate\n",
     "line 4: field 'bicarbonate' is not one of"),
    ("header,field\nAcidity,ph\n,pco2\nBic,hco3\n",
     "line 3: the header cell is empty (field 'pco2'); name the column it maps"),
])
def test_a_mapping_file_line_that_cannot_be_read_says_what_is_wrong(tmp_path, capsys,
                                                                    mapping, words):
    """A field spelt in plain words ("bicarbonate") is named as the field to use, as
    ``Panel(bicarbonate=...)`` does, never read as it; an empty header cell was told
    "field 'pco2' is not one of ...", about a field that is one."""
    src, path = tmp_path / "lab.csv", tmp_path / "map.csv"
    src.write_text("Acidity,CO2,Bic\n7.40,40,24\n", encoding="utf-8")
    path.write_text(mapping, encoding="utf-8")
    rc, err = batch(capsys, src, "--map", path, "-o", tmp_path / "o.csv")
    assert rc == 2 and words in err, err
    if "bicarbonate" in mapping:
        assert "(use hco3)" in err
