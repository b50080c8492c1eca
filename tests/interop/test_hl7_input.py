"""HL7 v2 ORU^R01 spools are read through the same reader as CSV, to the same readings.

Field positions are those of HL7 Version 2.5.1 chapter 7 (OBX-2 value type, OBX-3
observation identifier, OBX-5 value, OBX-6 units, OBX-8 abnormal flags, OBX-11 result
status; SPM-4 specimen type, table 0487; OBR-7 and SPM-17 collection time).  LOINC
codes and their specimens are those verified in the project's LOINC notes.  The
messages are our own, invented for these tests.
"""

from __future__ import annotations

import pytest

from acidbase.files import hl7

from .helpers import DATA, msh, obx, rows_of, run, write_spool

SPOOL = DATA / "spool.hl7"

#: The same five panels as tests/data/hl7/spool.hl7, as a laboratory CSV would give them:
#: pCO2 in kPa throughout (52 and 31 mm[Hg] taken to kPa with UCUM's 0.133322 kPa per
#: mm[Hg], written out in full), the flags after the values, the comparator kept.
EQUIVALENT_CSV = """\
sample_id,patient_id,collected_at,sample_type,hco3_source,ph,pco2 (kPa),hco3,na,cl,lactate
SPC-1,PT-1001,2026-03-01T10:02:00+01:00,arterial,analyser,7.21 L,3.47 L,10.2 L,139 N,104 N,<0.3 L
SPC-2,PT-1002,2026-03-01T11:20:00+01:00,venous,analyser,7.33 N,6.932744,26.5,141,101,
SPC-3,PT-1003,2026-03-01T11:55:00+01:00,capillary,analyser,7.47 H,4.2 L,22.8,138,103,
SPC-4,PT-1004,2026-03-01T12:05:00+01:00,arterial,unknown,,,,,,
SPC-5,PT-1001,2026-03-01T12:15:00+01:00,arterial,analyser,7.30 L,4.132982 L,14.9 L,140,103,
"""

#: Columns that must be equal, and derived values that must agree to rounding.
SAME = ("status", "consistency", "disorders", "finding_codes", "lab_flags", "qualifiers",
        "needs_review", "serial_status", "serial_codes")
CLOSE = ("anion_gap", "standard_base_excess", "hco3_calculated", "expected_pco2_low",
         "delta_ratio", "h_nmol_per_l")


def _batch(capsys, tmp_path, source, name, *extra):
    out = tmp_path / f"{name}.csv"
    rc, _, err = run(capsys, "batch", source, "-o", out, "--profile", "full", *extra)
    assert rc == 0, err
    return rows_of(out), err


def test_a_spool_reads_to_the_same_readings_as_the_equivalent_csv(tmp_path, capsys):
    csv_file = tmp_path / "same.csv"
    csv_file.write_text(EQUIVALENT_CSV, encoding="utf-8")
    from_hl7, _ = _batch(capsys, tmp_path, SPOOL, "hl7")
    from_csv, _ = _batch(capsys, tmp_path, csv_file, "csv")
    assert len(from_hl7) == len(from_csv) == 5
    for a, b in zip(from_hl7, from_csv):
        if b["status"] == "refused":  # message 4 is malformed; its CSV twin has no values
            assert a["status"] == "refused"
            continue
        for key in SAME:
            assert a[key] == b[key], (a["sample_id"], key)
        for key in CLOSE:
            if b[key]:
                assert float(a[key]) == pytest.approx(float(b[key]), abs=0.051), key
        assert (a["sample_id"], a["patient_id"], a["sample_type"]) == \
            (b["sample_id"], b["patient_id"], b["sample_type"])


def test_each_order_group_is_one_row_in_file_order(tmp_path, capsys):
    rows, _ = _batch(capsys, tmp_path, SPOOL, "o")
    assert [r["sample_id"] for r in rows] == ["SPC-1", "SPC-2", "SPC-3", "SPC-4", "SPC-5"]
    assert [r["message"] for r in rows] == ["1", "2", "3", "4", "5"]


def test_specimen_from_spm4_sets_the_sample_type_and_venous_intervals_apply(tmp_path, capsys):
    rows, _ = _batch(capsys, tmp_path, SPOOL, "o")
    assert [r["sample_type"] for r in rows] == ["arterial", "venous", "capillary", "unknown",
                                                "arterial"]
    assert "T-SAMPLE-VENOUS" in rows[1]["finding_codes"]
    assert "T-SAMPLE-CAPILLARY" in rows[2]["finding_codes"]


def test_sn_comparator_is_kept_as_a_qualifier_and_flags_are_read(tmp_path, capsys):
    rows, _ = _batch(capsys, tmp_path, SPOOL, "o")
    assert rows[0]["qualifiers"] == "lactate <0.3 L"
    assert "ph L" in rows[0]["lab_flags"] and "pco2 L" in rows[0]["lab_flags"]


def test_cancelled_results_are_skipped_and_counted(tmp_path, capsys):
    rows, err = _batch(capsys, tmp_path, SPOOL, "o")
    assert "k (mmol/L)" not in rows[0]  # the only K+ result had status X
    assert "OBX 32713-0 status X (cannot be obtained) skipped" in rows[0]["hl7_notes"]
    assert "1 result(s) skipped by status (X/D/W) X 1" in err


def test_a_malformed_message_is_refused_with_its_position_and_the_others_read(tmp_path, capsys):
    rows, err = _batch(capsys, tmp_path, SPOOL, "o")
    bad = rows[3]
    assert bad["status"] == "refused"
    # Message 4 starts at segment 31 of the file; its OBX (segment 34) lacks OBX-11.  The
    # message was not read, so no field of it is also said to be "not given" (it was).
    assert bad["reason"] == ("HL7 message 4 (segment 34 of the file) not read: OBX-11 "
                             "(result status, required) is empty")
    assert [r["status"] for r in rows].count("interpreted") == 4
    assert (bad["patient_id"], bad["sample_id"]) == ("PT-1004", "SPC-4")  # read before the fault
    assert "Traceback" not in err


@pytest.mark.parametrize("segment, words", [
    ("OB|1|NM|2744-1^pH^LN||7.40|[pH]|||||F",
     "segment 'OB|1|NM|2744-1^pH^LN' has no valid segment id"),
    ("ZZZ", None),  # a site's own Z segment is allowed and passed over
])
def test_segment_ids_are_checked(tmp_path, capsys, segment, words):
    path = write_spool(tmp_path / "one.hl7", [
        msh("20260301101500+0100", "M1"), "PID|1||P1",
        "OBR|1||S1|24336-0^Gas panel^LN|||20260301100200+0100",
        obx(1, "NM", "2744-1^pH^LN", "7.40", "[pH]"), obx(2, "NM", "2019-8^pCO2^LN", "40", "mm[Hg]"),
        obx(3, "NM", "1960-4^HCO3^LN", "24", "mmol/L"), obx(4, "NM", "2951-2^Na^LN", "140", "mmol/L"),
        obx(5, "NM", "2075-0^Cl^LN", "104", "mmol/L"), segment])
    rows, _ = _batch(capsys, tmp_path, path, "o")
    if words is None:
        assert rows[0]["status"] == "interpreted"
    else:
        assert rows[0]["status"] == "refused" and words in rows[0]["reason"]


def test_a_message_that_is_not_oru_r01_is_refused(tmp_path, capsys):
    path = write_spool(tmp_path / "adt.hl7", [
        "MSH|^~\\&|A|B|||20260301||ADT^A01|X1|P|2.5.1", "PID|1||P1"])
    rows, _ = _batch(capsys, tmp_path, path, "o")
    assert rows[0]["status"] == "refused"
    assert "MSH-9 is 'ADT^A01', not an ORU^R01 message" in rows[0]["reason"]


def _simple(extra_obx: list[str], spm: str = "") -> list[str]:
    segs = [msh("20260301101500+0100", "M1"), "PID|1||P1",
            "OBR|1||S1|24336-0^Gas panel^LN|||20260301100200+0100",
            obx(1, "NM", "2744-1^pH^LN", "7.40", "[pH]"),
            obx(2, "NM", "2019-8^pCO2^LN", "40", "mm[Hg]"),
            obx(3, "NM", "1960-4^HCO3^LN", "24", "mmol/L"),
            obx(4, "NM", "2951-2^Na^LN", "140", "mmol/L"),
            obx(5, "NM", "2075-0^Cl^LN", "104", "mmol/L"), *extra_obx]
    return segs + ([spm] if spm else [])


def test_two_results_for_one_field_refuse_the_panel_naming_both(tmp_path, capsys):
    path = write_spool(tmp_path / "two.hl7", _simple(
        [obx(6, "NM", "2746-6^pH venous^LN", "7.35", "[pH]")]))
    rows, _ = _batch(capsys, tmp_path, path, "o")
    assert rows[0]["status"] == "refused"
    assert "pH (ph): two results in one order (segments 4 and 9)" in rows[0]["reason"]


def test_a_unit_the_field_does_not_take_refuses_the_panel_with_the_unit(tmp_path, capsys):
    path = write_spool(tmp_path / "unit.hl7", _simple(
        [obx(6, "NM", "2518-9^Lactate^LN", "1.1", "mg/dL")]))
    rows, _ = _batch(capsys, tmp_path, path, "o")
    assert rows[0]["status"] == "refused"
    assert "unit 'mg/dL' is not one of mmol/L" in rows[0]["reason"]


def test_a_temperature_in_fahrenheit_refuses_the_panel_with_the_unit_to_give(tmp_path, capsys):
    """Body temperature, LOINC 8310-5, in UCUM [degF]: refused, the hint names Cel
    (units.not_taken_hint, as the options, the library and the CSV units say it)."""
    path = write_spool(tmp_path / "degf.hl7", _simple(
        [obx(6, "NM", "8310-5^Body temperature^LN", "98.6", "[degF]")]))
    rows, _ = _batch(capsys, tmp_path, path, "o")
    assert rows[0]["status"] == "refused"
    assert "unit '[degF]' is not one of Cel" in rows[0]["reason"]
    assert "does not take or convert: give the value in Cel" in rows[0]["reason"]


def test_a_value_impossible_in_its_unit_is_refused_not_converted(tmp_path, capsys):
    """pCO2 5.3 with OBX-6 mm[Hg] is a kPa value in the wrong unit: refused."""
    segs = _simple([])
    segs[4] = obx(2, "NM", "2019-8^pCO2^LN", "5.3", "mm[Hg]")
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "x.hl7", segs), "o")
    assert rows[0]["status"] == "refused" and "pCO2" in rows[0]["reason"]


def test_alternate_loinc_coding_in_obx3_is_read(tmp_path, capsys):
    segs = _simple([obx(6, "NM", "K1^Kalium^L^2823-3^Potassium^LN", "4.1", "mmol/L")])
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "alt.hl7", segs), "o")
    assert rows[0]["k (mmol/L)"] == "4.1"


def test_mllp_framing_and_any_line_ends_are_tolerated(tmp_path, capsys):
    plain, _ = _batch(capsys, tmp_path, SPOOL, "plain")
    segs = SPOOL.read_bytes().decode().split("\r")[:-1]
    for frame, newline in ((True, "\r"), (False, "\r\n"), (False, "\n")):
        path = write_spool(tmp_path / "framed.hl7", segs, frame=frame, newline=newline)
        rows, _ = _batch(capsys, tmp_path, path, "framed")
        assert [r["finding_codes"] for r in rows] == [r["finding_codes"] for r in plain]


def test_collection_time_becomes_iso_8601_for_the_serial_checks(tmp_path, capsys):
    rows, _ = _batch(capsys, tmp_path, SPOOL, "o")
    assert rows[0]["collected_at"] == "2026-03-01T10:02:00+01:00"
    # PT-1001 has two panels 13 minutes apart: compared
    assert rows[0]["serial_status"] == rows[4]["serial_status"] == "within limits"


def test_hco3_source_follows_the_bicarbonate_code():
    """1960-4 (arterial blood) is the analyser's value; 2028-9 (serum total CO2) chemistry."""
    assert hl7.HCO3_SOURCE["1960-4"] == "analyser"
    assert hl7.HCO3_SOURCE["2028-9"] == "chemistry"


@pytest.mark.parametrize("text, iso", [
    ("20260301100200+0100", "2026-03-01T10:02:00+01:00"),
    ("202603011002", "2026-03-01T10:02"),
    ("20260301", "20260301"),  # no time: left as given (the serial checks say so)
])
def test_hl7_times_become_iso_8601(text, iso):
    assert hl7.hl7_time(text) == iso


def test_a_file_with_no_messages_could_not_run(tmp_path, capsys):
    path = tmp_path / "empty.hl7"
    path.write_text("\r\n", encoding="utf-8")
    rc, _, err = run(capsys, "batch", path, "-o", tmp_path / "o.csv")
    assert rc == 2 and "no HL7 v2 messages" in err and "Traceback" not in err


def test_hl7_without_the_optional_library_says_how_to_install_it(tmp_path, capsys, monkeypatch):
    import builtins

    real = builtins.__import__

    def no_hl7(name, *args, **kw):
        if name == "hl7":
            raise ImportError(name)
        return real(name, *args, **kw)

    monkeypatch.setattr(builtins, "__import__", no_hl7)
    rc, _, err = run(capsys, "batch", SPOOL, "-o", tmp_path / "o.csv")
    assert rc == 2 and "acidbase[hl7]" in err


@pytest.mark.parametrize("ph_code, pco2_code, kind", [
    ("2746-6", "2021-4", "venous"),      # pH and pCO2 of Venous blood
    ("2745-8", "11557-6", "capillary"),  # pH of Capillary blood; pCO2 of Blood says nothing
    ("2744-1", "2021-4", "unknown"),     # arterial and venous codes disagree
])
def test_without_spm4_the_gas_codes_set_the_sample_type(tmp_path, capsys, ph_code, pco2_code,
                                                        kind):
    segs = _simple([])
    segs[3] = obx(1, "NM", f"{ph_code}^pH^LN", "7.36", "[pH]")
    segs[4] = obx(2, "NM", f"{pco2_code}^pCO2^LN", "46", "mm[Hg]")
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "s.hl7", segs), "o")
    assert rows[0]["sample_type"] == kind


def test_deleted_and_wrong_results_are_skipped_and_counted(tmp_path, capsys):
    segs = _simple([obx(6, "NM", "2823-3^K^LN", "9.9", "mmol/L", status="D"),
                    obx(7, "NM", "2524-7^Lactate^LN", "8.0", "mmol/L", status="W")])
    rows, err = _batch(capsys, tmp_path, write_spool(tmp_path / "dw.hl7", segs), "o")
    assert rows[0]["status"] == "interpreted"
    assert "k (mmol/L)" not in rows[0] and "lactate (mmol/L)" not in rows[0]
    assert "2 result(s) skipped by status (X/D/W) D 1, W 1" in err


def _pco2_message(n: int, value: str, unit: str) -> list[str]:
    return [msh("20260301101500+0100", f"M{n}"), f"PID|1||P{n}",
            f"OBR|1||S{n}|24336-0^Gas panel^LN|||202603011{n:03d}",
            obx(1, "NM", "2744-1^pH^LN", "7.40", "[pH]"),
            obx(2, "NM", "2019-8^pCO2^LN", value, unit),
            obx(3, "NM", "1960-4^HCO3^LN", "24", "mmol/L")]


def test_a_field_in_two_units_is_read_by_the_one_reader_in_each_cells_unit(tmp_path, capsys):
    """pCO2 in kPa in one message and mm[Hg] in another (one column takes one unit, so
    each cell is taken to mm[Hg]).  Each cell is read by the one cell reader in the unit
    its OBX-6 states: full-width digits are refused, not converted (docs/input.md); an
    exponent is read, then converted (1e1 kPa was passed on unconverted and read as
    10 mm[Hg]); a value impossible in its own unit is refused in that unit with the
    hint (40 kPa was refused as "300 mm[Hg]", with no hint).  UCUM: 1 kPa =
    7.50062 mm[Hg] (value from memory; acidbase.units holds the factor)."""
    segs = (_pco2_message(1, "5.3", "kPa") + _pco2_message(2, "\uff14\uff10", "mm[Hg]")
            + _pco2_message(3, "1e1", "kPa") + _pco2_message(4, "40", "kPa")
            + _pco2_message(5, "\uff15.\uff13", "kPa") + _pco2_message(6, "40", "mm[Hg]"))
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "mixed.hl7", segs), "o")
    assert len(rows) == 6 and [r["message"] for r in rows] == ["1", "2", "3", "4", "5", "6"]
    assert [r["status"] for r in rows] == ["interpreted", "refused", "interpreted", "refused",
                                           "refused", "interpreted"]
    assert float(rows[0]["pco2 (mm[Hg])"]) == pytest.approx(5.3 * 7.50062, abs=1e-3)
    assert float(rows[2]["pco2 (mm[Hg])"]) == pytest.approx(10 * 7.50062, abs=1e-3)
    assert "only the digits 0-9 are read" in rows[1]["reason"]
    assert rows[4]["reason"] == ("pCO2 (pco2) '\uff15.\uff13' is not a number - only the digits "
                                 "0-9 are read; digits of other scripts are refused, not converted")
    assert rows[3]["reason"] == (
        "pCO2 (pco2) 40 kPa is outside the accepted range 1.067 to 33.33 kPa - pCO2 would be "
        "ordinary at this value in mm[Hg]: if that is the unit, state it (pco2 unit mm[Hg]), "
        "the value was not converted")


@pytest.mark.parametrize(("value", "vtype", "words"), [
    ("40~41", "NM", "'40~41' holds more than one value (repetitions)"),
    ("40^41", "NM", "'40^41' holds more than one value (components)"),
    ("40&1", "NM", "'40&1' holds more than one value (components)"),
    ("<^0.3~>^9", "SN", "holds more than one value (repetitions)"),
])
def test_a_result_holding_two_values_refuses_the_panel(tmp_path, capsys, value, vtype, words):
    """OBX-5 of an NM result holds one number (HL7 v2.5.1 2A.3.47), an SN result one
    structured number (2A.3.72); a repetition (~) or a component (^, &) more was read as
    its first value alone, the rest dropped unseen.  Which was meant cannot be told: the
    panel is refused, naming the field, the OBX and the value."""
    segs = _simple([])
    segs[4] = obx(2, vtype, "2019-8^pCO2^LN", value, "mm[Hg]")
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "two.hl7", segs), "o")
    assert rows[0]["status"] == "refused"
    assert rows[0]["reason"].startswith("pCO2 (pco2) OBX 2019-8: OBX-5 ")
    assert words in rows[0]["reason"]
    assert "was not given" not in rows[0]["reason"]


def test_an_empty_trailing_component_is_one_value(tmp_path, capsys):
    segs = _simple([])
    segs[4] = obx(2, "NM", "2019-8^pCO2^LN", "40^", "mm[Hg]")
    rows, _ = _batch(capsys, tmp_path, write_spool(tmp_path / "one.hl7", segs), "o")
    assert rows[0]["status"] == "interpreted" and rows[0]["pco2 (mm[Hg])"] == "40"
