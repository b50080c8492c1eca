"""Every output says which tool, version and settings made it, from which input.

SHA-256 digests are checked against Python's hashlib (NIST FIPS 180-4); the version
against the package's own ``__version__``.
"""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

import pytest

from acidbase import __version__
from acidbase.codes import DERIVED_INFO, DERIVED_UNITS
from acidbase.results import DERIVED

from .helpers import run

CSV = Path(__file__).resolve().parents[1] / "data" / "batch" / "mixed.csv"
PANEL = ("--ph", "7.21", "--pco2", "26", "--hco3", "10.2", "--na", "139", "--cl", "104")
STAMP = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ$")


@pytest.mark.parametrize("args", [(), ("check",), ("batch",), ("demo",), ("config",),
                                  ("config", "show"), ("tui",)])
def test_version_everywhere(capsys, args):
    with pytest.raises(SystemExit) as e:
        run(capsys, *args, "--version")
    assert e.value.code == 0
    assert capsys.readouterr().out.strip() == f"acidbase {__version__}"


def test_check_json_carries_the_audit_record(capsys):
    _, out, _ = run(capsys, "check", *PANEL, "--json")
    audit = json.loads(out)["audit"]
    assert (audit["tool"], audit["version"]) == ("acidbase", __version__)
    assert STAMP.match(audit["started"]) and STAMP.match(audit["ended"])
    assert re.fullmatch(r"[0-9a-f]{64}", audit["settings_sha256"])
    assert audit["settings"]["anion_gap.high"] == 12.0
    assert audit["config_file"] is None


def test_equal_settings_give_an_equal_hash_and_a_change_changes_it(capsys):
    digests = []
    for extra in ((), (), ("--reference-albumin", "40")):
        _, out, _ = run(capsys, "check", *PANEL, "--json", *extra)
        digests.append(json.loads(out)["audit"]["settings_sha256"])
    assert digests[0] == digests[1] != digests[2]


def test_derived_values_in_json_carry_their_units(capsys):
    _, out, _ = run(capsys, "check", *PANEL, "--json")
    doc = json.loads(out)
    assert set(doc["derived_units"]) == set(doc["derived"])
    assert doc["derived_units"]["anion_gap"] == "mmol/L"
    assert doc["derived_units"]["expected_pco2_low"] == "mm[Hg]"
    assert doc["derived_units"]["delta_ratio"] == "1"


def test_every_derived_value_has_a_title_and_a_unit():
    assert set(DERIVED_INFO) == set(DERIVED) == set(DERIVED_UNITS)


def test_batch_summary_json_names_the_input_digest_rows_and_settings(tmp_path, capsys):
    summary = tmp_path / "s.json"
    rc, _, err = run(capsys, "batch", CSV, "-o", tmp_path / "o.csv", "--summary", summary)
    assert rc == 0, err
    doc = json.loads(summary.read_text(encoding="utf-8"))
    audit = doc["audit"]
    assert audit["input"]["sha256"] == hashlib.sha256(CSV.read_bytes()).hexdigest()
    assert audit["input"]["bytes"] == CSV.stat().st_size
    assert audit["rows"] == {"read": doc["rows"], "interpreted": doc["interpreted"],
                             "refused": doc["refused"]}
    assert audit["version"] == __version__ and audit["started"] <= audit["ended"]


@pytest.mark.parametrize("suffix", [".md", ".html"])
def test_batch_report_and_text_summary_carry_the_audit_record(tmp_path, capsys, suffix):
    report = tmp_path / f"r{suffix}"
    rc, _, err = run(capsys, "batch", CSV, "-o", tmp_path / "o.csv", "--report", report)
    assert rc == 0
    digest = hashlib.sha256(CSV.read_bytes()).hexdigest()
    text = report.read_text(encoding="utf-8")
    assert "Audit record" in text and digest in text and f"acidbase {__version__}" in text
    assert f"SHA-256 {digest}" in err  # the text summary on stderr


def test_parquet_output_carries_the_audit_record_in_its_metadata(tmp_path, capsys):
    import pyarrow.parquet as pq

    out = tmp_path / "o.parquet"
    rc, _, err = run(capsys, "batch", CSV, "-o", out)
    assert rc == 0, err
    record = json.loads(pq.read_schema(out).metadata[b"audit"])
    assert record["version"] == __version__
    assert record["input"]["sha256"] == hashlib.sha256(CSV.read_bytes()).hexdigest()
    assert "ended" not in record  # written at the start; the summary has the end
