"""FHIR R4 output: every Bundle validates with the FHIR models and its references resolve.

The resources' structure is checked by the ``fhir.resources`` R4B models (HL7 FHIR R4B
4.3.0; Observation, DiagnosticReport, Bundle, Device and Provenance are unchanged from
R4 4.0.1); codes are checked here against the code systems they belong to: v3
ObservationInterpretation (L, H, A, AA...), ObservationStatus, UCUM for units, and the
project's own code systems for rule codes, derived values and processes.
"""

from __future__ import annotations

import json

import pytest
from fhir.resources.R4B.bundle import Bundle

from acidbase import CAUTION
from acidbase.codes import DERIVED_SYSTEM, RULE_SYSTEM, code_system_files
from acidbase.fhir import LOINC, UCUM, dangling, fhir_datetime
from acidbase.fields import NUMERIC
from acidbase.rules import RULES

from .helpers import DATA, run

SPOOL = DATA / "spool.hl7"
ROOT = DATA.parents[2]
VERIFIED_LOINC = {code for spec in NUMERIC for code in spec.loinc}
SEVERITY = {r.code: r.severity for r in RULES}


def resources(doc, kind=None):
    out = [e["resource"] for e in doc["entry"]]
    return [r for r in out if kind is None or r["resourceType"] == kind]


@pytest.fixture(scope="module")
def spool_bundles(tmp_path_factory):
    from acidbase.cli import main

    out = tmp_path_factory.mktemp("fhir") / "out.ndjson"
    assert main(["batch", str(SPOOL), "--output-format", "fhir", "-o", str(out), "--quiet",
                 "--summary", str(out.with_suffix(".json"))]) == 0
    return [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()]


def test_one_bundle_per_panel_in_file_order(spool_bundles):
    assert len(spool_bundles) == 5
    ids = [resources(b, "DiagnosticReport")[0].get("identifier", [{}])[0].get("value")
           for b in spool_bundles]
    assert ids == ["SPC-1", "SPC-2", "SPC-3", "SPC-4", "SPC-5"]


def test_every_bundle_validates_and_every_reference_resolves(spool_bundles):
    for doc in spool_bundles:
        Bundle.model_validate(doc)
        assert doc["type"] == "collection"
        assert dangling(doc) == []
        urls = [e["fullUrl"] for e in doc["entry"]]
        assert len(set(urls)) == len(urls)


def test_input_observations_carry_loinc_ucum_comparator_and_flag(spool_bundles):
    first = spool_bundles[0]
    inputs = [o for o in resources(first, "Observation") if "category" in o]
    by_code = {o["code"]["coding"][0]["code"]: o for o in inputs}
    assert set(by_code) == {"2744-1", "2019-8", "1960-4", "32717-1", "41650-3", "2518-9"}
    ph = by_code["2744-1"]
    assert ph["valueQuantity"] == {"value": 7.21, "unit": "[pH]", "system": UCUM,
                                   "code": "[pH]"}
    assert ph["interpretation"][0]["coding"][0]["code"] == "L"
    assert ph["status"] == "final"  # OBX-11 F
    # pCO2 came in kPa here and in mm[Hg] in another message: each as it came
    assert by_code["2019-8"]["valueQuantity"]["code"] == "kPa"
    assert by_code["2019-8"]["valueQuantity"]["value"] == 3.47
    lactate = by_code["2518-9"]["valueQuantity"]
    assert (lactate["comparator"], lactate["value"]) == ("<", 0.3)
    for o in inputs:
        for c in o["code"].get("coding", []):
            assert c["system"] == LOINC and c["code"] in VERIFIED_LOINC


def test_derived_values_come_from_the_inputs_in_ucum(spool_bundles):
    doc = spool_bundles[0]
    inputs = {e["fullUrl"] for e in doc["entry"]
              if e["resource"]["resourceType"] == "Observation" and "category" in e["resource"]}
    derived = [o for o in resources(doc, "Observation")
               if o["code"]["coding"][0]["system"] == DERIVED_SYSTEM]
    gap = next(o for o in derived if o["code"]["coding"][0]["code"] == "anion_gap")
    # anion gap = Na - (Cl + HCO3) = 139 - (104 + 10.2) = 24.8 mmol/L
    assert gap["valueQuantity"]["value"] == pytest.approx(24.8)
    assert gap["valueQuantity"]["code"] == "mmol/L"
    for o in derived:
        assert {r["reference"] for r in o["derivedFrom"]} == inputs
        assert o["valueQuantity"]["system"] == UCUM


def test_findings_carry_rule_code_statement_working_sources_and_severity(spool_bundles):
    doc = spool_bundles[0]
    findings = [o for o in resources(doc, "Observation")
                if o["code"]["coding"][0]["system"] == RULE_SYSTEM]
    assert findings
    for o in findings:
        code = o["code"]["coding"][0]["code"]
        want = {"caution": "A", "critical": "AA"}.get(SEVERITY[code])
        got = o.get("interpretation", [{"coding": [{"code": None}]}])[0]["coding"][0]["code"]
        assert got == want, code
        assert o["valueString"]
        assert o["note"][0]["text"].startswith("Working: ")
        assert o["note"][1]["text"].startswith("Sources: ")


def test_the_report_concludes_with_the_disorders_and_the_caution(spool_bundles):
    report = resources(spool_bundles[0], "DiagnosticReport")[0]
    assert report["conclusion"].startswith("metabolic acidosis (high gap, primary)")
    assert CAUTION in report["conclusion"]
    codes = [c["coding"][0]["code"] for c in report["conclusionCode"]]
    assert codes == ["metabolic-acidosis-high-gap", "respiratory-acidosis"]
    assert report["status"] == "preliminary"  # the site's default for machine readings


def test_a_refused_panel_gives_a_cancelled_report_with_the_reason(spool_bundles):
    report = resources(spool_bundles[3], "DiagnosticReport")[0]
    assert report["status"] == "cancelled"
    assert "OBX-11 (result status, required) is empty" in report["conclusion"]
    assert CAUTION in report["conclusion"]
    assert not [o for o in resources(spool_bundles[3], "Observation")
                if o["code"]["coding"][0]["system"] == RULE_SYSTEM]


def test_device_and_provenance_name_the_tool_version_input_and_settings(spool_bundles):
    import hashlib

    from acidbase import __version__

    doc = spool_bundles[0]
    device = resources(doc, "Device")[0]
    assert device["version"][0]["value"] == __version__
    prov = resources(doc, "Provenance")[0]
    assert prov["agent"][0]["type"]["coding"][0]["code"] == "assembler"
    texts = " ".join(e["what"].get("display", "") for e in prov["entity"])
    assert hashlib.sha256(SPOOL.read_bytes()).hexdigest() in texts
    assert "settings SHA-256" in texts
    report_url = next(e["fullUrl"] for e in doc["entry"]
                      if e["resource"]["resourceType"] == "DiagnosticReport")
    assert {"reference": report_url} in prov["target"]


def test_check_fhir_prints_one_valid_bundle(capsys):
    rc, out, _ = run(capsys, "check", "--ph", "7.21", "--pco2", "3.47", "--pco2-unit", "kPa",
                     "--hco3", "10.2", "--na", "139", "--cl", "104", "--sample-type", "venous",
                     "--patient-id", "PT-9", "--collected-at", "2026-03-01T10:02+01:00", "--fhir")
    assert rc == 0
    doc = json.loads(out)
    Bundle.model_validate(doc)
    assert dangling(doc) == []
    ph = next(o for o in resources(doc, "Observation") if o["code"]["text"] == "pH")
    assert ph["code"]["coding"][0]["code"] == "2746-6"  # pH of Venous blood
    assert ph["effectiveDateTime"] == "2026-03-01T10:02:00+01:00"
    assert ph["subject"] == {"identifier": {"value": "PT-9"}}


def test_observation_status_of_machine_readings_is_a_setting(capsys):
    _, out, _ = run(capsys, "check", "--ph", "7.4", "--pco2", "40", "--hco3", "24", "--na",
                     "140", "--cl", "104", "--fhir", "--fhir-status", "final")
    doc = json.loads(out)
    assert resources(doc, "DiagnosticReport")[0]["status"] == "final"
    machine = [o for o in resources(doc, "Observation") if "category" not in o]
    assert machine and {o["status"] for o in machine} == {"final"}


def test_fhir_without_the_optional_library_says_how_to_install_it(capsys, monkeypatch):
    import builtins

    real = builtins.__import__

    def no_fhir(name, *args, **kw):
        if name.startswith("fhir.resources"):
            raise ImportError(name)
        return real(name, *args, **kw)

    monkeypatch.setattr(builtins, "__import__", no_fhir)
    rc, _, err = run(capsys, "check", "--ph", "7.4", "--pco2", "40", "--hco3", "24", "--na",
                     "140", "--cl", "104", "--fhir")
    assert rc == 2 and "acidbase[fhir]" in err and "Traceback" not in err


@pytest.mark.parametrize("text, want", [
    ("2026-03-01T10:02+01:00", "2026-03-01T10:02:00+01:00"),
    ("2026-03-01T10:02:30Z", "2026-03-01T10:02:30Z"),
    ("2026-03-01 10:02:30Z", "2026-03-01T10:02:30Z"),
    ("2026-03-01T10:02:30", None),  # FHIR: a time needs a time zone
    ("yesterday", None),
])
def test_collection_times_become_fhir_datetimes_only_when_fhir_can_hold_them(text, want):
    assert fhir_datetime(text) == want


def test_published_code_systems_are_current():
    """docs/fhir/ is regenerated by `python -m acidbase.codes`."""
    for name, text in code_system_files().items():
        assert (ROOT / "docs" / "fhir" / name).read_text(encoding="utf-8") == text, name


def test_the_rule_code_system_lists_every_rule_once():
    doc = json.loads(code_system_files()["CodeSystem-acidbase-rule.json"])
    codes = [c["code"] for c in doc["concept"]]
    assert codes == [r.code for r in RULES] and len(set(codes)) == len(codes)
    assert doc["count"] == len(codes)


def test_every_emitted_unit_is_valid_ucum():
    """Units of the FHIR output: UCUM codes (UCUM v2.2 table of example codes)."""
    from acidbase.codes import DERIVED_UNITS

    ucum = {"mmol/L", "nmol/L", "mm[Hg]", "meq/L", "mosm/kg", "[pH]", "1", "kPa", "g/L",
            "g/dL", "mg/dL", "%", "Cel", "a", "umol/L"}
    assert set(DERIVED_UNITS.values()) <= ucum


def test_a_critical_finding_is_interpreted_aa_and_a_caution_a(capsys):
    """pH 6.75 is outside 6.80-7.80 (T-PH-LIFE, critical)."""
    _, out, _ = run(capsys, "check", "--ph", "6.75", "--pco2", "60", "--hco3", "8.1", "--na",
                     "140", "--cl", "100", "--fhir")
    doc = json.loads(out)
    got = {o["code"]["coding"][0]["code"]: o.get("interpretation", [{"coding": [{}]}])[0]
           ["coding"][0].get("code") for o in resources(doc, "Observation")
           if o["code"].get("coding", [{}])[0].get("system") == RULE_SYSTEM}
    assert got["T-PH-LIFE"] == "AA"
    assert {got[c] for c in got if SEVERITY[c] == "caution"} <= {"A"}
    assert {got[c] for c in got if SEVERITY[c] == "info"} <= {None}


def test_a_csv_with_loinc_headers_gives_those_codes_and_units_back(tmp_path, capsys):
    """Glucose under 2345-7 (mass concentration) is read, and written, in mg/dL."""
    src = DATA.parent / "batch" / "loinc_headers.csv"
    out = tmp_path / "o.ndjson"
    rc, _, err = run(capsys, "batch", src, "--output-format", "fhir", "-o", out)
    assert rc == 0, err
    doc = json.loads(out.read_text(encoding="utf-8").splitlines()[0])
    Bundle.model_validate(doc)
    got = {o["code"]["coding"][0]["code"]: o["valueQuantity"]
           for o in resources(doc, "Observation") if o.get("category")}
    assert {"2744-1", "2019-8", "1960-4", "2951-2", "2075-0", "2345-7"} <= set(got)
    assert (got["2345-7"]["value"], got["2345-7"]["code"]) == (90.0, "mg/dL")
    assert got["1960-4"]["value"] == 24.22


def test_fhir_output_to_a_file_named_for_another_format_could_not_run(tmp_path, capsys):
    rc, _, err = run(capsys, "batch", SPOOL, "--output-format", "fhir",
                     "-o", tmp_path / "o.parquet")
    assert rc == 2 and "name the output .ndjson" in err
    assert not (tmp_path / "o.parquet").exists()
