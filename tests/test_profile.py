"""Output profiles of ``acidbase batch``: a lean default, the full shape on request."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from acidbase.cli import main
from acidbase.profile import ALL_DERIVED, LAB_DERIVED, ProfileError, profile_from_options
from acidbase.results import CAUTION
from acidbase.rules import RULES

DATA = Path(__file__).parent / "data" / "batch"
SEVERITY = {r.code: r.severity for r in RULES}


def run(tmp_path: Path, *args: str, name: str = "out.csv") -> list[dict[str, str]]:
    out = tmp_path / name
    assert main(["batch", str(DATA / "mixed.csv"), "-o", str(out), "--quiet",
                 "--summary", str(tmp_path / "summary.txt"), *args]) == 0
    with out.open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_lean_default_writes_the_listed_columns_and_no_others(tmp_path):
    rows = run(tmp_path)
    cols = list(rows[0])
    assert [c for c in cols if c in ALL_DERIVED] == list(LAB_DERIVED)
    assert not [c for c in cols if c.startswith("role_") or c == "timing_respiratory"]
    assert "serial_status" not in cols and "serial_detail" not in cols
    for c in ("status", "reason", "consistency", "disorders", "finding_codes", "needs_review",
              "qualifiers", "lab_flags", "serial_codes", "caution"):
        assert c in cols, c


def test_lean_findings_are_the_caution_and_critical_codes_of_the_full_output(tmp_path):
    """The same rows' codes, info findings left out, order kept."""
    lean, full = run(tmp_path), run(tmp_path, "--profile", "full", name="full.csv")
    assert len(lean) == len(full)
    seen_info = False
    for a, b in zip(lean, full):
        codes = [c for c in b["finding_codes"].split(";") if c]
        seen_info |= any(SEVERITY[c] == "info" for c in codes)
        assert a["finding_codes"] == ";".join(c for c in codes if SEVERITY[c] != "info")
    assert seen_info  # the test data has info findings to leave out


def test_full_profile_keeps_every_column(tmp_path):
    cols = list(run(tmp_path, "--profile", "full")[0])
    assert all(k in cols for k in ALL_DERIVED)
    assert "role_met_alk" in cols and "serial_status" in cols and "serial_detail" in cols


def test_hco3_difference_is_measured_minus_calculated(tmp_path):
    """The figure the consistency verdict judges: measured HCO3- minus the
    Henderson-Hasselbalch value (Henderson 1908; Hasselbalch 1916), for HCO3- from a
    gas analyser (or of unknown source); checked against the row's own printed
    columns, to their last decimal."""
    rows = [r for r in run(tmp_path) if r["status"] == "interpreted"
            and r["hco3_difference"] and r.get("hco3_source", "") != "chemistry"]
    assert len(rows) > 5
    for r in rows:
        want = float(r["hco3"]) - float(r["hco3_calculated"])
        assert float(r["hco3_difference"]) == pytest.approx(want, abs=0.051 + 1e-9)


def test_findings_and_derived_options_override_the_profile(tmp_path):
    rows = run(tmp_path, "--findings", "all", "--derived", "anion_gap")
    assert [c for c in rows[0] if c in ALL_DERIVED] == ["anion_gap"]
    assert any(SEVERITY[c] == "info" for r in rows for c in r["finding_codes"].split(";") if c)


def test_caution_is_in_the_lean_file_and_summary(tmp_path):
    rows = run(tmp_path)
    assert rows[0]["caution"] == CAUTION
    summary = (tmp_path / "summary.txt").read_text(encoding="utf-8")
    assert " ".join(CAUTION.split()[:6]) in " ".join(summary.split())


def test_summary_counts_info_findings_the_lean_file_leaves_out(tmp_path):
    run(tmp_path)
    lean = (tmp_path / "summary.txt").read_text(encoding="utf-8")
    run(tmp_path, "--profile", "full", name="full.csv")
    assert (tmp_path / "summary.txt").read_text(encoding="utf-8") == lean


@pytest.mark.parametrize("args", [("lean", "everything", None), ("lean", None, "some"),
                                  ("wide", None, None), ("lean", "gap", None)])
def test_unknown_profile_parts_are_refused_by_name(args):
    with pytest.raises(ProfileError) as e:
        profile_from_options(*args)
    assert any(str(a) in str(e.value) for a in args if a)


def test_bad_profile_option_ends_the_run_with_a_message(tmp_path, capsys):
    rc = main(["batch", str(DATA / "mixed.csv"), "-o", str(tmp_path / "o.csv"), "--quiet",
               "--derived", "nonsense"])
    assert rc == 2 and "--derived" in capsys.readouterr().err
