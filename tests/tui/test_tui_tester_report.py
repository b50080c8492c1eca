"""Defects a tester met in the real app (80x24, 60x20, without colour), each keyed in as
a terminal delivers keys: many keys in one burst.

The panels are tests/tui/tui_helpers.py's (consistent by Henderson-Hasselbalch, CLSI C46-A2
constants); the file paths are the tests' own.
"""

from __future__ import annotations

import csv

import pytest
from textual.widgets import Input
from tui_helpers import PANELS, keep_two, key_in, processes_line

import acidbase
from tui.app import make_app
from tui.screens.files import SaveScreen
from tui.sitting import read_csv
from tui.widgets.form import ChoiceField, ValueField


def _status(app) -> str:
    return str(app.screen.query_one("#status").render())


# -- 3. a failed save keeps the dialog, what was typed, and says what failed -------------

async def test_a_failed_series_save_keeps_the_dialog_and_the_typed_path_and_says_why(tmp_path):
    missing = tmp_path / "no-such-folder" / "series.csv"
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        # one burst: open the dialog, choose CSV, type the path, Enter
        await pilot.press("ctrl+s", "right", "right", "tab", "ctrl+u", *str(missing), "enter")
        await pilot.pause()
        assert isinstance(app.screen, SaveScreen), "the dialog closed on a failed save"
        dialog = app.screen
        assert dialog.query_one("#path", Input).value == str(missing)
        assert dialog.query_one(ChoiceField).value == "csv"
        problem = dialog.problem
        assert str(missing) in problem and "does not exist" in problem, problem
        assert dialog.query_one("#save-problem").display
        assert app.focused is dialog.query_one("#path", Input)
        assert app.sitting.unsaved and not missing.exists()
        # corrected in place: Enter saves and the dialog closes
        good = tmp_path / "series.csv"
        await pilot.press("ctrl+u", *str(good), "enter")
        await pilot.pause()
        assert not isinstance(app.screen, SaveScreen)
        assert good.exists() and not app.sitting.unsaved
        assert f"Saved 2 panels to {good}" in _status(app)


async def test_a_series_save_that_fails_mid_write_keeps_the_dialog(tmp_path, monkeypatch):
    target = tmp_path / "series.csv"

    def full_disk(self, rows):
        raise OSError(28, "No space left on device")

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        monkeypatch.setattr(csv.DictWriter, "writerows", full_disk)
        await pilot.press("ctrl+s", "right", "right", "tab", "ctrl+u", *str(target), "enter")
        await pilot.pause()
        assert isinstance(app.screen, SaveScreen)
        assert "No space left on device" in app.screen.problem
        assert str(target) in app.screen.problem
        assert app.screen.query_one("#path", Input).value == str(target)
        assert app.sitting.unsaved and not target.exists()


async def test_a_failed_load_keeps_the_dialog_and_the_typed_path_and_says_why(tmp_path):
    """As a failed save: a missing file, then a file with no panels, each said in the
    dialog with the path as typed; corrected in place, Enter loads and the dialog closes."""
    from tui.screens.files import LoadScreen

    missing = tmp_path / "no-such-series.csv"
    empty = tmp_path / "empty.csv"
    empty.write_text("ph,pco2,hco3\n")
    good = tmp_path / "series.csv"
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await keep_two(pilot)
        ok, message = app.try_save("csv", str(good), None)
        assert ok, message
        app.sitting.entries.clear()
        # one burst: open the dialog, type the path, Enter
        await pilot.press("ctrl+o", "ctrl+u", *str(missing), "enter")
        await pilot.pause()
        assert isinstance(app.screen, LoadScreen), "the dialog closed on a failed load"
        dialog = app.screen
        assert dialog.query_one("#path", Input).value == str(missing)
        assert str(missing) in dialog.problem and "Not loaded" in dialog.problem
        assert dialog.query_one("#load-problem").display
        assert app.focused is dialog.query_one("#path", Input)
        await pilot.press("ctrl+u", *str(empty), "enter")
        await pilot.pause()
        assert isinstance(app.screen, LoadScreen)
        assert app.screen.problem == f"{empty} holds no panels."
        assert app.sitting.entries == []
        await pilot.press("ctrl+u", *str(good), "enter")
        await pilot.pause()
        assert not isinstance(app.screen, LoadScreen)
        assert len(app.sitting.entries) == 2 and app.sitting.current == 0
        assert f"Loaded 2 panels from {good}" in _status(app)
        # Esc closes it without loading anything
        await pilot.press("ctrl+o", "escape")
        await pilot.pause()
        assert not isinstance(app.screen, LoadScreen) and len(app.sitting.entries) == 2


# -- 1. a decimal comma typed in the form is read by the one reader ---------------------

def _comma(values: tuple[str, ...]) -> tuple[str, ...]:
    return tuple(v.replace(".", ",") for v in values)


@pytest.mark.parametrize("name", ["metabolic acidosis", "chronic respiratory acidosis"])
async def test_a_panel_typed_with_decimal_commas_reads_as_with_points(name, tmp_path):
    """"7,30" is 7.30 in the form as in a file with a decimal comma: the library reads the
    panel typed with points and with commas alike (the oracle: ``acidbase.interpret`` of
    the panel with points)."""
    points = dict(zip(("ph", "pco2", "hco3", "na", "cl"), PANELS[name]))
    expected = acidbase.interpret(acidbase.Panel.model_validate(points))
    labels = "; ".join(d.label() for d in expected.disorders) or "none"
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, _comma(PANELS[name]))
        assert app.screen.query_one("#ph", Input).value == PANELS[name][0].replace(".", ",")
        refused = [f.spec.name for f in app.screen.query(ValueField) if f.has_class("-refused")]
        assert refused == []
        assert processes_line(app) == f"Processes: {labels}"
        assert app.panel is not None and app.panel.ph == float(PANELS[name][0])
        # kept, it stays read (the series, and the file the series is saved to)
        await pilot.press("f5")
        await pilot.pause()
        assert app.sitting.entries[0].panel() == app.panel
        ok, message = app.try_save("csv", str(tmp_path / "s.csv"), None)
        assert ok, message
    entries, _ = read_csv(tmp_path / "s.csv")
    assert entries[0].panel() == app.panel


async def test_pco2_5_comma_3_in_mmhg_is_refused_with_the_f2_way_out_and_f2_converts_it():
    """"5,3" is read as 5.3: outside 8-250 mm[Hg] (acidbase/fields.py) and ordinary in kPa,
    so the form says how to switch; in kPa, F2 offers 5.3 kPa = 39.75 mm[Hg] (UCUM:
    1 mm[Hg] = 133.322 Pa)."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("7", ",", "4", "0", "tab", "5", ",", "3")
        await pilot.pause()
        field = app.screen.query_one("#field-pco2", ValueField)
        assert field.message == "refused: not in 8-250 mmHg; press F2 for kPa"
        await pilot.press("f2")  # a refused number: read in kPa as typed
        await pilot.pause()
        assert field.unit == "kPa" and field.text == "5,3" and field.message == ""
        await pilot.press("f2")  # a filled, accepted value: convert or reinterpret?
        await pilot.pause()
        assert type(app.screen).__name__ == "UnitScreen"
        assert str(app.screen.query_one("#convert").render()) == \
            "C  convert: 39.75 mmHg (the same pCO2)"


async def test_a_comma_among_values_with_points_is_refused_in_the_apps_words():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, ("7,40", "40.5", "24.2", "140", "105"))
        field = app.screen.query_one("#field-ph", ValueField)
        assert field.message == ("refused: other values have a decimal point; type every "
                                 "value with the same decimal mark")
        assert "--decimal" not in field.message


# -- 4. help and quit are on the key line at 60x20 and 80x24 ------------------------------

@pytest.mark.parametrize("size", [(60, 20), (80, 24)])
async def test_help_and_quit_are_drawn_on_every_screens_key_line(size):
    from textual.geometry import Region

    from tui.widgets.chrome import KeyLine

    async def drawn() -> str:
        line = app.screen.query_one(KeyLine)
        region = line.region
        assert app.screen.region.contains_region(region) and region.height == 1
        strips = line.render_lines(Region(0, 0, region.width, 1))
        return strips[0].text

    app = make_app(demo=True)
    async with app.run_test(size=size) as pilot:
        for open_keys, name in [((), "entry"), (("f9",), "series"), (("ctrl+s",), "save"),
                                (("f4",), "plane"), (("f8",), "compare"), (("f1",), "help")]:
            await pilot.press(*open_keys)
            await pilot.pause()
            text = await drawn()
            assert "F1 help" in text and "^Q quit" in text, (name, text)
            if name != "entry":
                assert "Esc" in text, (name, text)
            await pilot.press("escape" if name != "help" else "f1")
            await pilot.pause()


# -- 2, 5, 6. the series list: values as keyed, in their unit and precision; refusals in
# the app's words ----------------------------------------------------------------------

def _series_cells(app) -> tuple[list[str], list[list[str]]]:
    from tui.screens.series import SeriesTable

    table = app.screen.query_one(SeriesTable)
    headings = [str(c.label) for c in table.columns.values()]
    return headings, [[str(c) for c in table.get_row_at(i)] for i in range(table.row_count)]


async def _keep(pilot, ph: str, pco2: str, hco3: str, kpa: bool = False) -> None:
    """Key in pH, pCO2 (switched to kPa first with F2 when ``kpa``) and HCO3-, and keep."""
    await pilot.press("ctrl+n", *ph, "tab")
    if kpa:
        await pilot.press("f2")
    await pilot.press(*pco2, "tab", "tab", *hco3, "f5")
    await pilot.pause()


async def test_the_series_shows_a_pco2_keyed_in_kpa_in_kpa_and_says_so():
    """5.3 kPa was shown as 39.75 (mm[Hg], unlabelled).  5.3 kPa = 39.75 mm[Hg] (UCUM:
    1 mm[Hg] = 133.322 Pa); with HCO3- 24.2 at pH 7.40 the panel is consistent by
    Henderson-Hasselbalch (CLSI C46-A2: 0.0307 x 39.75 x 10^(7.40 - 6.105) = 24.1)."""
    app = make_app()
    async with app.run_test(size=(100, 24)) as pilot:
        await _keep(pilot, "7.40", "5.3", "24.2", kpa=True)
        await pilot.press("f9")
        await pilot.pause()
        headings, rows = _series_cells(app)
        assert headings[5] == "pCO2 kPa" and rows[0][5] == "5.3"
        await pilot.press("escape")
        await _keep(pilot, "7.40", "40", "24.2", kpa=True)  # F2 back to mm[Hg]
        await pilot.press("f9")
        await pilot.pause()
        headings, rows = _series_cells(app)
        assert headings[5] == "pCO2"
        assert [r[5] for r in rows] == ["5.3 kPa", "40 mmHg"]
        assert not any("39.7" in cell or "39.8" in cell for r in rows for cell in r)


async def test_the_series_shows_ph_to_two_decimals_at_least_and_values_as_reported():
    """pH 7.40 was shown as "7.4"; a pH is reported to 0.01 at least (PH_MIN_DECIMALS,
    acidbase/chemistry.py), other values with the decimals they were keyed with."""
    app = make_app(demo=True)
    async with app.run_test(size=(100, 30)) as pilot:
        await _keep(pilot, "7.4", "40", "24.2")
        await _keep(pilot, "7.355", "40.5", "24")
        await pilot.press("f9")
        await pilot.pause()
        headings, rows = _series_cells(app)
        assert headings[4:7] == ["pH", "pCO2 mmHg", "HCO3- mmol/L"]
        assert [r[4:7] for r in rows[-2:]] == [["7.40", "40", "24.2"], ["7.355", "40.5", "24"]]
        from acidbase.demo import DEMO_PANELS
        for panel, row in zip(DEMO_PANELS, rows):
            if row[-1].startswith("refused"):
                continue
            assert row[4] == f"{panel['ph']:.2f}", row  # the demo's pH 7.40 is "7.40"


async def test_a_refused_kept_panel_says_why_in_the_apps_words_with_the_unit_key():
    """pCO2 5.3 in mm[Hg] is outside 8-250 mm[Hg] (acidbase/fields.py) and ordinary in
    kPa: the series says so with the app's key for the unit (F2), not the library's
    generic hint, built from the refusal's data."""
    app = make_app()
    async with app.run_test(size=(100, 24)) as pilot:
        await _keep(pilot, "7.40", "5.3", "24.2")
        await pilot.press("f9")
        await pilot.pause()
        _, rows = _series_cells(app)
        assert rows[0][5] == "5.3"
        assert rows[0][-1] == "refused: pCO2 not in 8-250 mmHg; press F2 for kPa"
        await pilot.press("escape")
        await _keep(pilot, "7.40", "40", "")  # no HCO3-: needed
        await pilot.press("f9")
        await pilot.pause()
        _, rows = _series_cells(app)
        assert rows[1][-1] == "refused: needed: HCO3-"
