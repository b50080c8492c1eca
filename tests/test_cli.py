"""The `acidbase` command through a subprocess: exit codes, JSON shape, no tracebacks.

Expected readings cite the published rule they follow.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "acidbase", *args], capture_output=True,
                          text=True, cwd=ROOT, timeout=120)


BASE = ["--ph", "7.40", "--pco2", "40", "--hco3", "24.2", "--na", "140", "--cl", "104"]


def test_check_prints_caution_and_the_three_questions():
    r = run("check", *BASE)
    assert r.returncode == 0, r.stderr
    assert "does not replace" in r.stdout
    for heading in ("1. Can these numbers be trusted?", "2. Which acid-base processes",
                    "3. What follows"):
        assert heading in r.stdout


def test_check_json_has_the_documented_keys():
    # Winter's formula (Albert, Dell & Winters, Ann Intern Med 1967): HCO3 10 -> pCO2 23 +/- 2,
    # so pCO2 23 is compensation, not a second process.  pH from Henderson-Hasselbalch
    # (CLSI C46): 6.105 + log10(10 / (0.0307 * 23)) = 7.256.
    r = run("check", "--json", "--ph", "7.256", "--pco2", "23", "--hco3", "10", "--na", "140",
            "--cl", "104", "--sample-type", "arterial", "--hco3-source", "analyser")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert set(doc) >= {"disorders", "derived", "consistency", "findings", "caution"}
    assert doc["disorders"] == [{"process": "metabolic acidosis", "role": "primary",
                                 "timing": None, "anion_gap": "high"}]
    for key in ("hco3_calculated", "h_nmol_per_l", "anion_gap", "anion_gap_corrected",
                "delta_ratio", "standard_base_excess", "expected_pco2_low", "expected_pco2_high"):
        assert key in doc["derived"]
    assert doc["derived"]["expected_pco2_low"] == pytest.approx(21.0)
    assert doc["derived"]["expected_pco2_high"] == pytest.approx(25.0)
    assert doc["derived"]["anion_gap_corrected"] is None  # no albumin given
    assert doc["consistency"]["status"] == "consistent"
    for f in doc["findings"]:
        assert set(f) >= {"code", "severity", "text", "citation"}
        assert f["severity"] in ("info", "caution", "critical")
    assert "licensed clinicians" in doc["caution"]


def test_check_refuses_pco2_in_the_wrong_unit_with_a_hint_and_exit_2():
    # 5.3 kPa is an ordinary pCO2 (1 kPa = 7.50062 mm[Hg], UCUM); as mm[Hg] it is impossible.
    r = run("check", "--ph", "7.40", "--pco2", "5.3", "--hco3", "24", "--na", "140", "--cl", "104")
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert "pCO2 (pco2) 5.3 mm[Hg] is outside the accepted range 8 to 250 mm[Hg]" in r.stderr
    assert "kPa" in r.stderr
    assert r.stdout == ""


def test_check_accepts_the_same_pco2_in_kpa():
    r = run("check", "--json", "--ph", "7.40", "--pco2", "5.3", "--pco2-unit", "kPa",
            "--hco3", "24", "--na", "140", "--cl", "104")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["inputs"]["pco2"]["value"] == pytest.approx(5.3 * 7.50062, rel=1e-4)


@pytest.mark.parametrize("args", [
    ["--ph", "abc", "--pco2", "40", "--hco3", "24", "--na", "140", "--cl", "104"],
    ["--ph", "7.4", "--pco2", "40", "--na", "140", "--cl", "104"],
    ["--ph", "nan", "--pco2", "40", "--hco3", "24", "--na", "140", "--cl", "104"],
    ["--ph", "7.4", "--pco2", "40", "--pco2-unit", "bar", "--hco3", "24", "--na", "140",
     "--cl", "104"],
    ["--ph", "1e309", "--pco2", "40", "--hco3", "24", "--na", "140", "--cl", "104"],
])
def test_bad_input_exits_2_without_traceback(args):
    r = run("check", *args)
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert r.stderr.strip()


def test_demo_runs_and_carries_the_caution():
    r = run("demo")
    assert r.returncode == 0, r.stderr
    assert r.stdout.count("does not replace") >= 2
    assert "refused" in r.stdout  # the demo includes a panel typed in the wrong unit


@pytest.mark.parametrize("command", [[], ["check"], ["demo"], ["batch"], ["tui"]])
def test_help_of_every_command_prints_without_error(command):
    r = run(*command, "--help")
    assert r.returncode == 0, r.stderr
    assert "Traceback" not in r.stderr
    assert "usage:" in r.stdout


def test_a_reversed_anion_gap_interval_is_refused_with_exit_2():
    r = run("check", *BASE, "--anion-gap-interval", "12", "6")
    assert r.returncode == 2
    assert "anion gap interval 12 to 6 mmol/L" in r.stderr
    assert "Traceback" not in r.stderr


def test_a_local_anion_gap_interval_changes_the_verdict():
    # Gap 140 - 104 - 24.2 = 11.8: inside 6-12 (Klaestrup 2011) but above 3-11 (Winter 1990).
    codes = {}
    for name, extra in (("default", []), ("local", ["--anion-gap-interval", "3", "11"])):
        r = run("check", "--json", *BASE, *extra, "--albumin", "44")
        assert r.returncode == 0, r.stderr
        codes[name] = [f["code"] for f in json.loads(r.stdout)["findings"]]
    assert "P-GAP-RAISED-ONLY" not in codes["default"]
    assert "P-GAP-RAISED-ONLY" in codes["local"]


def test_a_missing_required_value_is_named_not_dumped():
    r = run("check", "--ph", "7.4", "--pco2", "40", "--na", "140", "--cl", "104")
    assert r.returncode == 2
    assert "HCO3- (hco3) is required and was not given" in r.stderr
    assert "{" not in r.stderr


def _refusal_lines(stderr: str) -> list[str]:
    return [line[4:] for line in stderr.splitlines() if line.startswith("  - ")]


def test_check_refuses_with_the_librarys_problems_in_the_librarys_order():
    """One gate: ``check`` reads its options as ``interpret_many`` reads a one-row table,
    so a panel with several problems gets the library's lines, every one, in its order
    (numbers by field, urea with urea nitrogen, then the words)."""
    import acidbase

    cells = {"ph": "7.4", "pco2": "40", "hco3": "24", "k": "abc", "urea": "5", "bun": "14",
             "sample_type": "art", "lactate": "<1", "na": "1,40"}
    r = run("check", *(f"--{k.replace('_', '-')}={v}" for k, v in cells.items()))
    assert r.returncode == 2 and r.stdout == ""
    library = acidbase.interpret_many({k: [v] for k, v in cells.items()})[0]
    assert _refusal_lines(r.stderr) == [str(p) for p in library.problems]
    assert [p.kind for p in library.problems] == [
        "not_a_number", "not_a_number", "urea_and_bun", "not_a_choice"]


def test_a_unit_the_field_does_not_take_is_refused_by_check_as_panel_refuses_it():
    """``--pco2-unit bar``: ``check`` (no model) and ``Panel`` give the same lines, one per
    unit, naming the option's field, the unit and the units accepted."""
    import acidbase

    r = run("check", *BASE, "--pco2-unit", "bar", "--k-unit", "mmol")
    assert r.returncode == 2 and r.stdout == ""
    with pytest.raises(Exception) as info:
        acidbase.Panel(ph=7.4, pco2=40, hco3=24, pco2_unit="bar", k_unit="mmol")
    assert _refusal_lines(r.stderr) == acidbase.describe(info.value) == [
        "pco2_unit: unit 'bar' is not accepted for pCO2; use one of mm[Hg], kPa",
        "k_unit: unit 'mmol' is not accepted for K+; use one of mmol/L, mEq/L"]


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="no /dev/full here")
@pytest.mark.parametrize("command", [["check", *BASE], ["check", "--json", *BASE], ["demo"]])
def test_a_full_disk_on_standard_output_is_named_not_a_traceback(command):
    """``acidbase check > /dev/full``: /dev/full refuses every write with ENOSPC, as a
    full disk does; the command says so and exits 2, never a traceback or status 1."""
    with open("/dev/full", "w") as full:
        r = subprocess.run([sys.executable, "-m", "acidbase", *command], stdout=full,
                           stderr=subprocess.PIPE, text=True, cwd=ROOT, timeout=120)
    assert r.returncode == 2, r.stderr
    assert "Traceback" not in r.stderr and "Exception ignored" not in r.stderr
    assert r.stderr.startswith(f"acidbase {command[0]}: standard output: No space left on device")


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="no /dev/full here")
@pytest.mark.parametrize("fmt", ["csv", "jsonl"])
def test_batch_into_a_full_disk_names_standard_output(tmp_path, fmt):
    """``acidbase batch in.csv > /dev/full`` said "could not run: No space left on device",
    naming no file (the input could be blamed); it names standard output, as check does."""
    data = tmp_path / "in.csv"
    data.write_text("ph,pco2,hco3\n7.40,40,24\n", encoding="utf-8")
    with open("/dev/full", "w") as full:
        r = subprocess.run([sys.executable, "-m", "acidbase", "batch", str(data), "--quiet",
                            "--output-format", fmt], stdout=full, stderr=subprocess.PIPE,
                           text=True, cwd=ROOT, timeout=120)
    assert r.returncode == 2, r.stderr
    assert "Traceback" not in r.stderr and "Exception ignored" not in r.stderr
    assert "could not run: standard output: No space left on device" in r.stderr, r.stderr


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="no /dev/full here")
@pytest.mark.parametrize("command", [["--help"], ["batch", "--help"], ["history", "--help"],
                                     ["--version"], ["check", "--version"]])
def test_help_and_version_into_a_full_disk_fail_with_one_line(command):
    """``acidbase --help > /dev/full`` ended with 0: argparse drops a refused write, and
    the last flush came at the interpreter's exit, unreported. Now exit 2 and one line."""
    with open("/dev/full", "w") as full:
        r = subprocess.run([sys.executable, "-m", "acidbase", *command], stdout=full,
                           stderr=subprocess.PIPE, text=True, cwd=ROOT, timeout=120)
    assert r.returncode == 2, r.stderr
    who = "acidbase" + (f" {command[0]}" if not command[0].startswith("-") else "")
    assert r.stderr == (f"{who}: standard output: No space left on device; what was written "
                        "is incomplete\n")


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="no /dev/full here")
def test_a_refused_panel_into_a_full_disk_says_only_the_refusal():
    """Nothing was written to standard output, so nothing is said of it (a last write of
    no bytes, which /dev/full refuses too, added "what was written is incomplete")."""
    with open("/dev/full", "w") as full:
        r = subprocess.run([sys.executable, "-m", "acidbase", "check", "--ph", "7.4",
                            "--pco2", "40"], stdout=full, stderr=subprocess.PIPE, text=True,
                           cwd=ROOT, timeout=120)
    assert r.returncode == 2
    assert r.stderr == "acidbase: panel refused:\n  - HCO3- (hco3) is required and was not given\n"


# An 80-column terminal: the width of a VT100 and of the terminals that followed it, and
# the width the terminal app is built for (docs/tui.md). Common practice, no source.
@pytest.mark.parametrize("command", [
    ["demo"],
    ["check", "--ph", "7.21", "--pco2", "5.3", "--pco2-unit", "kPa", "--hco3", "15.4", "--na",
     "138", "--cl", "104", "--albumin", "32", "--sample-type", "arterial", "--hco3-source",
     "analyser"],
])
def test_text_output_fits_an_80_column_terminal(command):
    r = run(*command)
    assert r.returncode == 0 and "does not replace" in r.stdout
    wide = [line for line in r.stdout.splitlines() if len(line) > 80]
    assert not wide, wide[:3]


@pytest.mark.parametrize("command", [[], ["check"], ["demo"], ["batch"], ["shard"],
                                     ["history"], ["tui"], ["config"], ["config", "show"]])
def test_help_of_every_command_carries_the_caution_within_80_columns(command):
    """Every surface carries the caution (COMMON safety rule), --help included; argparse
    wraps to COLUMNS, but not a group's title, which once ran to 109 columns."""
    r = subprocess.run([sys.executable, "-m", "acidbase", *command, "--help"],
                       capture_output=True, text=True, cwd=ROOT, timeout=120,
                       env={**os.environ, "COLUMNS": "80"})
    assert r.returncode == 0, r.stderr
    assert "does not replace" in " ".join(r.stdout.split())
    wide = [line for line in r.stdout.splitlines() if len(line) > 80]
    assert not wide, wide


@pytest.mark.parametrize("again", [["--ph", "7.41"], ["--pco2-unit", "kPa", "--pco2-unit", "mm[Hg]"],
                                   ["--sample-type", "venous", "--sample-type", "arterial"]])
def test_a_panel_option_given_twice_with_two_values_is_refused(again):
    """``... --ph 7.21 ... --ph 7.41`` (a recalled command with a value appended) read the
    last pH silently; which was meant cannot be told, as with a JSON Lines key given
    twice (docs/input.md), so the command refuses it, naming both."""
    r = run("check", *BASE, *again)
    assert r.returncode == 2 and "Traceback" not in r.stderr
    option = again[-2]
    assert f"argument {option}: given twice" in r.stderr


def test_a_panel_option_given_twice_with_one_value_is_read():
    r = run("check", *BASE, "--ph", "7.40")
    assert r.returncode == 0, r.stderr


@pytest.mark.parametrize("option, value, words", [
    # UCUM "1" (FiO2 as a fraction) and "[pH]" are codes, not words: "21 1 ... 0.16 to 1 1"
    ("--fio2", "21", "FiO2 (fio2) 21 is outside the accepted range 0.16 to 1 - FiO2 would "
                     "be ordinary at this value in %"),
    ("--ph", "8.9", "pH (ph) 8.9 is outside the accepted range 6 to 8\n"),
])
def test_a_refusal_leaves_out_units_that_are_no_unit(option, value, words):
    args = dict(zip(BASE[::2], BASE[1::2])) | {option: value}
    r = run("check", *[x for kv in args.items() for x in kv])
    assert r.returncode == 2 and words in r.stderr, r.stderr


@pytest.mark.parametrize("value, unit", [("5.3 kPa", "kPa"), ("40mmHg", "mm[Hg]"),
                                         ("40 mm Hg", "mm[Hg]")])
def test_a_unit_typed_after_the_number_is_refused_with_where_the_unit_goes(value, unit):
    """``--pco2 "5.3 kPa"``: refused (a cell holds a number), with the way to state the
    unit, not only "expected a number in mm[Hg]"."""
    r = run("check", "--ph", "7.40", "--pco2", value, "--hco3", "24")
    assert r.returncode == 2
    assert f"the unit is not read from the value: state it on its own (pco2 unit {unit})" \
        in r.stderr, r.stderr


@pytest.mark.parametrize("stdin, stdout", [(subprocess.DEVNULL, subprocess.PIPE),
                                           (None, subprocess.PIPE)])
def test_the_app_without_a_terminal_says_so_instead_of_waiting_unseen(stdin, stdout):
    """``acidbase tui > file`` or ``< /dev/null`` once drew into the file and waited for
    keys that could not come (a stuck, invisible app)."""
    r = subprocess.run([sys.executable, "-m", "acidbase", "tui"], stdin=stdin, stdout=stdout,
                       stderr=subprocess.PIPE, text=True, cwd=ROOT, timeout=30)
    assert r.returncode == 2
    assert "acidbase: tui needs a terminal" in r.stderr and "acidbase check" in r.stderr
    assert r.stdout == ""


@pytest.mark.parametrize(("command", "option", "value"), [
    ("check", "--reference-albumin", "\uff14\uff14"),       # full-width digits
    ("check", "--reference-albumin", "4_4"),                # digit grouping
    ("check", "--reference-albumin", "nan"),
    ("check", "--anion-gap-interval", "\uff16"),
    ("batch", "--window-hours", "inf"),
    ("batch", "--window-hours", "1e400"),                   # beyond the float range
    ("batch", "--window-hours", "\uff12\uff14"),
    ("batch", "--chunk-rows", "\uff18"),
    ("batch", "--chunk-rows", "1_0"),
    ("batch", "--chunk-rows", "2.5"),
    ("batch", "--delta", "pco2=\uff11\uff10"),
    ("batch", "--delta", "ph=1_0"),
])
def test_a_setting_given_as_an_option_is_read_as_a_value_is(tmp_path, command, option, value):
    """A number given to a setting (the anion-gap interval, the reference albumin, the
    serial window, a delta limit, the chunk size) is read by the one cell reader, as a
    panel value is (docs/input.md): other scripts' digits, digit grouping and
    non-finite numbers are refused, naming the option and the text (they were read by
    Python's float(): '４４' as 44, '1_0' as 10, and --window-hours inf was taken)."""
    data = tmp_path / "in.csv"
    data.write_text("ph,pco2,hco3\n7.40,40,24\n", encoding="utf-8")
    values = [value, "20"] if option == "--anion-gap-interval" else [value]
    args = ([*BASE, option, *values] if command == "check"
            else [str(data), "-o", str(tmp_path / "out.csv"), option, *values])
    r = run(command, *args)
    assert r.returncode == 2, r.stdout
    assert repr(value) in r.stderr or value in r.stderr
    assert option.lstrip("-").split("-")[0] in r.stderr
    assert "Traceback" not in r.stderr
    assert not (tmp_path / "out.csv").exists()


def test_a_setting_written_as_an_ordinary_number_is_read():
    r = run("check", *BASE, "--reference-albumin", "+4.0e1 ", "--anion-gap-interval", "8", "16")
    assert r.returncode == 0, r.stderr


def test_check_shows_the_ids_it_was_given_in_text_and_json():
    """--sample-id, --patient-id and --collected-at were read only into the FHIR Bundle:
    the text and JSON readings carried no sign of which panel they were of.  They are
    shown as given; a control character (a terminal escape) is written as an escape."""
    ids = ["--sample-id", "S-77\x1b[2J", "--patient-id", "P-9", "--collected-at",
           "2024-01-01T10:00"]
    r = run("check", "--brief", *BASE, *ids)
    assert r.returncode == 0, r.stderr
    assert ("Sample id: S-77\\x1b[2J; Patient id: P-9; Collected at: 2024-01-01T10:00"
            in r.stdout)
    assert "\x1b" not in r.stdout
    r = run("check", "--json", *BASE, *ids)
    doc = json.loads(r.stdout)
    assert (doc["sample_id"], doc["patient_id"], doc["collected_at"]) == (
        "S-77\x1b[2J", "P-9", "2024-01-01T10:00")
    assert "sample_id" not in json.loads(run("check", "--json", *BASE).stdout)
