"""Site configuration: found in order, checked like the options, shown in every output.

Intervals in these files are a site's own choices, made up for the tests; what is
checked is that the tool uses the site's interval instead of its built-in one (the
built-in venous pCO2 interval 40-51 mm[Hg] is Kelly 2010's arterial-venous
difference applied to 35-45, acidbase.reference).
"""

from __future__ import annotations

import json

import pytest

from acidbase import config

from .helpers import run

#: Anion gap 141 - (104 + 26.5) = 10.5 mmol/L, inside 6-12: no metabolic process.
VENOUS_52 = ("check", "--ph", "7.33", "--pco2", "52", "--hco3", "26.5", "--na", "141",
             "--cl", "104", "--sample-type", "venous")


def site_file(tmp_path, text: str, name: str = "site.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def disorders(capsys, *args) -> list[str]:
    rc, out, err = run(capsys, *args, "--json")
    assert rc == 0, err
    return [d["process"] for d in json.loads(out)["disorders"]]


def test_a_site_interval_changes_the_verdict_it_should(tmp_path, capsys):
    """pCO2 52 is above the built-in venous 40-51, inside a site's 41-55."""
    assert disorders(capsys, *VENOUS_52) == ["respiratory acidosis"]
    path = site_file(tmp_path, "[intervals.venous]\npco2 = [41, 55]\n")
    assert disorders(capsys, *VENOUS_52, "--config", path) == []


def test_the_site_interval_shows_in_the_working(tmp_path, capsys):
    path = site_file(tmp_path, "[intervals.venous]\npco2 = [41, 55]\n")
    _, out, _ = run(capsys, *VENOUS_52, "--config", path, "--json")
    venous = next(f for f in json.loads(out)["findings"] if f["code"] == "T-SAMPLE-VENOUS")
    assert "pCO2 41-55 mm[Hg]" in venous["text"]


def test_the_file_is_found_by_option_then_variable_then_config_folder(tmp_path, capsys,
                                                                      monkeypatch):
    folder = tmp_path / "xdg" / "acidbase"
    folder.mkdir(parents=True)
    site_file(folder, "[albumin]\nreference_g_l = 40\n", "config.toml")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "xdg"))
    assert config.resolve().settings.reference_albumin_g_l == 40.0
    monkeypatch.setenv(config.ENV_VAR, str(site_file(tmp_path, "[albumin]\nreference_g_l = 42\n",
                                                     "env.toml")))
    assert config.resolve().settings.reference_albumin_g_l == 42.0
    given = site_file(tmp_path, "[albumin]\nreference_g_l = 38\n", "given.toml")
    site = config.resolve(config=str(given))
    assert site.settings.reference_albumin_g_l == 38.0 and site.found_by == "--config"


def test_options_override_the_file(tmp_path, capsys):
    path = site_file(tmp_path, "[anion_gap]\nlow = 3\nhigh = 11\n")
    _, out, _ = run(capsys, *VENOUS_52, "--config", path, "--anion-gap-interval", "4", "10",
                     "--json")
    settings = json.loads(out)["settings"]
    assert (settings["anion_gap_low"], settings["anion_gap_high"]) == (4.0, 10.0)


@pytest.mark.parametrize("text, words", [
    ("[intervals.venous]\npco2 = [55, 41]\n",
     "key 'intervals.venous.pco2': venous pco2 interval 55 to 41: give LOW < HIGH within 8 to 250"),
    ("[intervals.venus]\npco2 = [41, 55]\n", "key 'intervals.venus'"),
    ("[anion_gap]\nlowest = 3\n", "key 'anion_gap.lowest': unknown key"),
    ("[units]\npco2 = \"bar\"\n", "key 'units.pco2': 'bar' is not a unit of pCO2"),
    ("[units]\ntemperature = \"[degF]\"\n",
     "'[degF]' is not a unit of Patient temperature (Cel); [degF] is degrees Fahrenheit, "
     "which acidbase does not take or convert: give the value in Cel"),
    ("[serial]\ndelta = { na = -3 }\n", "key 'serial.delta.na': give a positive limit"),
    ("[fhir]\nobservation_status = \"done\"\n", "key 'fhir.observation_status'"),
    ("[albumin\n", "not valid TOML"),
    ("[anion_gap]\nlow = 12\nhigh = 6\n", "anion gap interval 12 to 6 mmol/L"),
])
def test_a_bad_file_is_refused_naming_the_key_and_the_reason(tmp_path, capsys, text, words):
    path = site_file(tmp_path, text)
    rc, _, err = run(capsys, *VENOUS_52, "--config", path)
    assert rc == 2
    assert words in err and str(path) in err and "Traceback" not in err


def test_a_missing_file_named_by_the_option_is_refused(tmp_path, capsys):
    rc, _, err = run(capsys, *VENOUS_52, "--config", tmp_path / "none.toml")
    assert rc == 2 and "none.toml" in err and "Traceback" not in err


def test_config_show_prints_each_setting_and_where_it_came_from(tmp_path, capsys):
    path = site_file(tmp_path, "[intervals.venous]\npco2 = [41, 55]\n[fhir]\n"
                               "observation_status = \"final\"\n")
    rc, out, _ = run(capsys, "config", "show", "--config", path, "--reference-albumin", "40")
    assert rc == 0
    lines = {line.split()[0]: line for line in out.splitlines()[3:] if line.strip()}
    assert lines["intervals.venous.pco2"].split()[1:4] == ["41", "to", "55"]
    assert lines["intervals.venous.pco2"].endswith(f"file {path}")
    assert lines["albumin.reference_g_l"].endswith("option")
    assert lines["intervals.arterial.ph"].endswith("built-in default")
    assert lines["fhir.observation_status"].split()[1] == "final"
    assert f"configuration file: {path} (found by --config)" in out


def test_site_default_units_apply_where_no_unit_is_stated(tmp_path, capsys):
    path = site_file(tmp_path, "[units]\npco2 = \"kPa\"\n")
    rc, out, _ = run(capsys, "check", "--ph", "7.40", "--pco2", "5.33", "--hco3", "24",
                     "--na", "140", "--cl", "104", "--json", "--config", path)
    assert rc == 0
    # 5.33 kPa / 0.133322 kPa per mm[Hg] = 39.98 mm[Hg] (UCUM m[Hg] = 133.3220 kPa)
    assert json.loads(out)["inputs"]["pco2"]["value"] == pytest.approx(39.978, abs=0.001)
    csv_file = tmp_path / "p.csv"
    csv_file.write_text("ph,pco2,hco3,na,cl\n7.40,5.33,24,140,104\n", encoding="utf-8")
    rc, _, err = run(capsys, "batch", csv_file, "-o", tmp_path / "o.csv", "--config", path)
    assert rc == 0, err
    csv_file.write_text("ph,pco2 (mm[Hg]),hco3,na,cl\n7.40,40,24,140,104\n", encoding="utf-8")
    rc, _, err = run(capsys, "batch", csv_file, "-o", tmp_path / "o.csv", "--config", path)
    assert rc == 0, err  # a unit the header states wins over the site's default


def test_batch_reads_window_and_deltas_from_the_file(tmp_path, capsys):
    path = site_file(tmp_path, "[serial]\nwindow_hours = 2\ndelta = { na = 1 }\n")
    site = config.resolve(config=str(path), deltas={"k": None})
    assert site.window_hours == 2.0
    assert site.deltas == {"na": 1.0, "k": None}
    assert site.origin("serial.delta.k") == "option --delta"


def test_the_config_file_is_shown_in_the_outputs(tmp_path, capsys):
    path = site_file(tmp_path, "[intervals.venous]\npco2 = [41, 55]\n")
    _, out, _ = run(capsys, *VENOUS_52, "--config", path, "--json")
    audit = json.loads(out)["audit"]
    assert audit["config_file"] == str(path)
    assert audit["settings"]["intervals.venous.pco2"] == [41.0, 55.0]
    csv_file = tmp_path / "p.csv"
    csv_file.write_text("ph,pco2,hco3,na,cl,sample_type\n7.33,52,26.5,141,104,venous\n",
                        encoding="utf-8")
    summary = tmp_path / "s.json"
    rc, _, err = run(capsys, "batch", csv_file, "-o", tmp_path / "o.csv", "--config", path,
                     "--summary", summary)
    assert rc == 0, err
    doc = json.loads(summary.read_text(encoding="utf-8"))
    assert doc["audit"]["config_file"] == str(path)
    assert doc["audit"]["settings"]["intervals.venous.pco2"] == [41.0, 55.0]
    assert doc["processes"] == {}  # the site's interval: no respiratory acidosis


def test_the_default_mapping_file_is_found_beside_the_config_file(tmp_path, capsys):
    import shutil

    from .helpers import DATA, rows_of

    batch_data = DATA.parent / "batch"
    shutil.copy(batch_data / "lab_mapping.csv", tmp_path / "lab_mapping.csv")
    path = site_file(tmp_path, "[batch]\nmapping = \"lab_mapping.csv\"\n")
    out = tmp_path / "o.csv"
    rc, _, err = run(capsys, "batch", batch_data / "lab_export.csv", "-o", out)
    assert rc == 2 and "no column for required field" in err  # without the file
    rc, _, err = run(capsys, "batch", batch_data / "lab_export.csv", "-o", out, "--config", path)
    assert rc == 0, err
    assert rows_of(out)[0]["status"] == "interpreted"


# --- paediatric intervals: the site's own, read below 18 years --------------------------
# The tool ships no paediatric intervals.  The pH interval 7.30-7.45 below is this test's
# own configuration, not a clinical value.  The panel: pH 7.33, pCO2 45 mm[Hg], HCO3-
# 23.2 mmol/L (0.0307 x 45 x 10^(7.33 - 6.105) = 23.2, Henderson-Hasselbalch with the
# constants of acidbase.chemistry), so only the pH lies outside the adult 7.35-7.45.
PAED_SITE = "[intervals.paediatric]\nph = [7.30, 7.45]\n"
PANEL_733 = ("check", "--ph", "7.33", "--pco2", "45", "--hco3", "23.2", "--na", "140",
             "--cl", "106")


def test_a_site_paediatric_interval_changes_a_childs_verdict(tmp_path, capsys):
    path = site_file(tmp_path, PAED_SITE)
    assert disorders(capsys, *PANEL_733, "--age", "5") == ["respiratory acidosis"]
    assert disorders(capsys, *PANEL_733, "--age", "5", "--config", path) == []
    _, out, _ = run(capsys, *PANEL_733, "--age", "5", "--config", path, "--json")
    adult_rules = next(f for f in json.loads(out)["findings"] if f["code"] == "P-ADULT-RULES-ONLY")
    assert "site's own paediatric intervals (pH 7.30-7.45" in adult_rules["text"]
    assert "compensation rules" in adult_rules["text"] and "remain adult" in adult_rules["text"]


def test_a_site_paediatric_interval_leaves_an_adults_and_a_venous_verdict_alone(tmp_path,
                                                                               capsys):
    path = site_file(tmp_path, PAED_SITE)
    assert disorders(capsys, *PANEL_733, "--age", "40", "--config", path) == [
        "respiratory acidosis"]
    assert disorders(capsys, *PANEL_733, "--config", path) == ["respiratory acidosis"]  # no age
    # a venous sample keeps the venous intervals (pH 7.31-7.42): 7.30 is below both
    venous = ("check", "--ph", "7.30", "--pco2", "48", "--hco3", "23.1", "--na", "140",
              "--cl", "106", "--sample-type", "venous", "--age", "5")
    site = site_file(tmp_path, "[intervals.paediatric]\nph = [7.25, 7.45]\n", "wide.toml")
    assert disorders(capsys, *venous, "--config", site) == disorders(capsys, *venous) == [
        "respiratory acidosis"]


def test_without_paediatric_intervals_the_child_caution_says_none_are_set(capsys):
    _, out, _ = run(capsys, *PANEL_733, "--age", "5", "--json")
    adult_rules = next(f for f in json.loads(out)["findings"] if f["code"] == "P-ADULT-RULES-ONLY")
    assert "paediatric intervals (not set here)" in adult_rules["text"]


def test_a_pregnant_child_is_read_against_the_site_paediatric_intervals(tmp_path, capsys):
    path = site_file(tmp_path, PAED_SITE)
    _, out, _ = run(capsys, *PANEL_733, "--age", "16", "--pregnancy", "third_trimester",
                    "--config", path, "--json")
    doc = json.loads(out)
    codes = [f["code"] for f in doc["findings"]]
    assert "T-PREGNANCY-INTERVALS" not in codes and doc["disorders"] == []


@pytest.mark.parametrize("text, words", [
    ("[intervals.paediatric]\nph = [7.45, 7.30]\n",
     "key 'intervals.paediatric.ph': paediatric ph interval 7.45 to 7.3: give LOW < HIGH"),
    ("[intervals.paediatric]\nsbe = [-40, 3]\n",
     "key 'intervals.paediatric.sbe': paediatric sbe interval -40 to 3: give LOW < HIGH "
     "within -30 to 30"),
    ("[intervals.paediatric]\nk = [3, 5]\n", "key 'intervals.paediatric.k': unknown key"),
])
def test_a_bad_paediatric_interval_is_refused_naming_the_key(tmp_path, capsys, text, words):
    path = site_file(tmp_path, text)
    rc, _, err = run(capsys, *PANEL_733, "--age", "5", "--config", path)
    assert rc == 2
    assert words in err and "Traceback" not in err


def test_config_show_and_the_audit_record_carry_the_paediatric_intervals(tmp_path, capsys):
    path = site_file(tmp_path, PAED_SITE + "hco3 = [18, 26]\n")
    rc, out, _ = run(capsys, "config", "show", "--config", path)
    assert rc == 0
    lines = {line.split()[0]: line for line in out.splitlines()[3:] if line.strip()}
    assert lines["intervals.paediatric.ph"].split()[1:4] == ["7.3", "to", "7.45"]
    assert lines["intervals.paediatric.hco3"].endswith(f"file {path}")
    assert "intervals.paediatric.pco2" not in lines  # the tool ships none
    _, with_site, _ = run(capsys, *PANEL_733, "--config", path, "--json")
    _, without, _ = run(capsys, *PANEL_733, "--json")
    audit, plain = json.loads(with_site)["audit"], json.loads(without)["audit"]
    assert audit["settings"]["intervals.paediatric.hco3"] == [18.0, 26.0]
    assert audit["settings_sha256"] != plain["settings_sha256"]


def test_the_library_refuses_a_bad_paediatric_interval_too():
    from acidbase.reference import Settings, SettingsError

    with pytest.raises(SettingsError, match="paediatric pco2 interval 50 to 30"):
        Settings.checked(paediatric_intervals=(("pco2", 50.0, 30.0),))
    with pytest.raises(SettingsError, match="interval of 'k'"):
        Settings.checked(paediatric_intervals=(("k", 3.0, 5.0),))


@pytest.mark.parametrize(("text", "key"), [
    ("[serial]\nwindow_hours = inf\n", "serial.window_hours"),
    ("[history]\nretention_days = inf\n", "history.retention_days"),
    ("[serial.delta]\nph = inf\n", "serial.delta.ph"),
    ("[albumin]\nreference_g_l = nan\n", "albumin.reference_g_l"),
    ("[intervals.arterial]\nph = [7.35, inf]\n", "intervals.arterial.ph.1"),
])
def test_a_site_setting_of_nan_or_infinity_is_refused_naming_its_key(tmp_path, capsys,
                                                                     text, key):
    """TOML writes NaN and infinity (``inf``, ``nan``); no setting is one.  An infinite
    serial window, retention or delta limit was taken (``window_hours = inf`` compared
    every panel of a patient), and a delta's refusal named the union branch
    ('serial.delta.ph.float', "(and 1 more)")."""
    path = site_file(tmp_path, text)
    rc, _, err = run(capsys, "config", "show", "--config", path)
    assert rc == 2
    assert f"key {key!r}: Input should be a finite number" in err, err
    assert "(and" not in err and "float" not in err
