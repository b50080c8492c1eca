"""Defects met using the real app as a respiratory therapist would (branch ``app-sweep``):
80x24 and 60x20, without colour, keys in bursts.  Each test keys in as a terminal
delivers keys: many keys in one ``pilot.press`` call.

The gases are consistent by Henderson-Hasselbalch (CLSI C46-A2 constants:
HCO3- = 0.0307 x pCO2 x 10^(pH - 6.105) within the tolerance), as in tui_helpers.py.
"""

from __future__ import annotations

import acidbase
from tui.app import make_app


def _table(app, selector: str) -> tuple[list[str], list[list[str]]]:
    table = app.screen.query_one(selector)
    headings = [str(c.label) for c in table.columns.values()]
    return headings, [[str(c) for c in table.get_row_at(i)] for i in range(table.row_count)]


async def _keep(pilot, ph: str, pco2: str, hco3: str, kpa: bool = False) -> None:
    """Ctrl+N, then pH, pCO2 (in kPa with F2 first when ``kpa``), HCO3-, and F5: one burst."""
    keys = ["ctrl+n", *ph, "tab", *(["f2"] if kpa else []), *pco2, "tab", "tab", *hco3, "f5"]
    await pilot.press(*keys)
    await pilot.pause()


# -- a value keyed with a trailing zero is shown as reported ---------------------------

async def test_the_series_shows_a_value_typed_24_0_as_24_0():
    """HCO3- typed "24.0" was shown as "24" in the series: a measured value shows the
    decimals it was reported with, trailing zero included (7.40 / 5.3 kPa / 24.0 is
    consistent: 0.0307 x 39.75 x 10^1.295 = 24.1, CLSI C46-A2)."""
    app = make_app()
    async with app.run_test(size=(100, 24)) as pilot:
        await _keep(pilot, "7.40", "5.3", "24.0", kpa=True)
        await _keep(pilot, "7,31", "6,1", "22,5", kpa=False)  # pCO2 stays kPa (chosen)
        await pilot.press("f9")
        await pilot.pause()
        headings, rows = _table(app, "#series")
        assert headings[4:7] == ["pH", "pCO2 kPa", "HCO3- mmol/L"]
        assert [r[4:7] for r in rows] == [["7.40", "5.3", "24.0"], ["7.31", "6.1", "22.5"]]


# -- the compare screen shows the inputs as reported, the earlier panel as A -------------

def _compare_rows(app) -> dict[str, list[str]]:
    _, rows = _table(app, "#compare")
    return {r[0]: r[1:] for r in rows}


async def test_compare_shows_inputs_in_the_unit_keyed_with_their_decimals():
    """pCO2 keyed as 5.3 and 6.1 kPa was shown as 39.75 and 45.75 mmHg with a change of
    -6.001 mmHg (digits no analyser printed); HCO3- 24.0 as 24.  The inputs are shown as
    reported, the change to the shown decimals.  (7.40 / 5.3 kPa / 24.0 and 7.31 /
    6.1 kPa / 22.5 are consistent by Henderson-Hasselbalch, CLSI C46-A2.)"""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await _keep(pilot, "7.40", "5.3", "24.0", kpa=True)
        await _keep(pilot, "7.31", "6.1", "22.5")
        await pilot.press("f8")
        await pilot.pause()
        rows = _compare_rows(app)
        assert rows["pH"] == ["7.40", "7.31", "-0.09", ""]
        assert rows["pCO2"] == ["5.3", "6.1", "+0.8", "kPa"]
        assert rows["HCO3-"] == ["24.0", "22.5", "-1.5", "mmol/L"]
        # a third panel in mmHg: each value with its own unit, no change in a third unit
        await pilot.press("escape", "ctrl+n", "f2", "f2")  # F2 on pH: one unit, says so
        await pilot.press("tab", "f2", *"40", "tab", "tab", *"24.2", "shift+tab",
                          "shift+tab", "shift+tab", *"7.40", "f5")
        await pilot.pause()
        await pilot.press("f8")
        await pilot.pause()
        rows = _compare_rows(app)
        assert rows["pCO2"] == ["6.1 kPa", "40 mmHg", "", "differ"]
        assert not any("39.7" in c or "45.7" in c for r in rows.values() for c in r)


async def test_compare_from_the_first_kept_panel_puts_the_earlier_panel_as_a():
    """F8 on the first kept panel (nothing before it) put the later panel as A and the
    earlier as B, so B - A ran backwards in time (pH 7.40 then 7.30 showed +0.10)."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await _keep(pilot, "7.40", "40", "24.2")
        await _keep(pilot, "7.30", "40", "19.2")
        await pilot.press("f6", "f6", "f8")  # open panel 1, compare
        await pilot.pause()
        title = str(app.screen.query_one("#compare-title").render())
        assert "A: panel 1" in title and "B: panel 2" in title
        assert _compare_rows(app)["pH"] == ["7.40", "7.30", "-0.10", ""]
        await pilot.press("escape", "f9", "home", "f8")  # the series, first row, compare
        await pilot.pause()
        title = str(app.screen.query_one("#compare-title").render())
        assert "A: panel 1" in title and "B: panel 2" in title


# -- a failed load names the path once ------------------------------------------------

async def test_a_failed_load_names_the_path_once(tmp_path):
    """"Not loaded: /x/nope.csv: /x/nope.csv: no such file" named the path twice."""
    from tui.screens.files import LoadScreen

    missing = tmp_path / "nope.csv"
    junk = tmp_path / "junk.csv"
    junk.write_text("a,b\n1,2\n", encoding="utf-8")
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("ctrl+o", "ctrl+u", *str(missing), "enter")
        await pilot.pause()
        assert isinstance(app.screen, LoadScreen)
        assert app.screen.problem.startswith(f"Not loaded: {missing}")
        assert app.screen.problem.count(str(missing)) == 1, app.screen.problem
        await pilot.press("ctrl+u", *str(junk), "enter")  # a reason without the path
        await pilot.pause()
        assert app.screen.problem.startswith(f"Not loaded: {junk}: ")
        assert app.screen.problem.count(str(junk)) == 1, app.screen.problem


# -- the verdict line never asks for a value that is keyed ------------------------------

async def test_the_verdict_line_names_a_refused_value_not_values_to_key_in():
    """pH, pCO2 5.3 (mmHg: refused, outside 8-250 mmHg, acidbase/fields.py) and HCO3-
    keyed on a new form: the verdict line said "none yet - key in pH, pCO2, HCO3-" (all
    three were keyed) while the reading said pCO2 was refused; with pH alone it asked
    for pH too."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press(*"7.40", "tab", *"5.3", "tab", "tab", *"24.0", "tab")
        await pilot.pause()
        line = app.screen.query_one("#verdict").text
        assert "key in" not in line, line
        assert line == "Verdict: none - Refused: pCO2 (see under the field)."
        await pilot.press("ctrl+n", *"7.40", "tab")
        await pilot.pause()
        line = app.screen.query_one("#verdict").text
        assert line == "Verdict: none - No reading yet: key in pCO2, HCO3-.", line


# -- the series shows the highlighted panel's whole reading -----------------------------

async def test_the_series_shows_the_highlighted_panels_whole_reading_at_60_columns():
    """At 80 columns the series' reading column was cut ("respiratory acido"), at 60 it
    was off the screen: the highlighted panel's reading is shown whole under the table."""
    from tui.screens.series import SeriesScreen

    app = make_app(demo=True)
    async with app.run_test(size=(60, 20)) as pilot:
        await pilot.press("f9", "home", "down", "down", "down")  # panel 4 of the demo
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, SeriesScreen)
        entry = app.sitting.entries[3]
        reading = "; ".join(d.label() for d in acidbase.interpret(
            entry.panel(), app.settings).disorders)
        assert len(reading) > 30  # longer than the table's room for it at 60 columns
        shown = str(screen.query_one("#series-reading").render())
        assert shown == f"Panel 4: {reading}"
        widget = screen.query_one("#series-reading")
        assert widget.region.height >= 1 and widget.region.bottom <= 20  # on the screen
        await pilot.press("up")
        await pilot.pause()
        assert str(screen.query_one("#series-reading").render()).startswith("Panel 3: ")


# -- dialogs fit a 60-column terminal ----------------------------------------------------

async def test_the_save_and_load_dialogs_fit_60_columns_and_wrap_their_words(tmp_path):
    """At 60 columns the dialogs (72 wide) ran past the edge: "not replaced unaske", the
    path box and a failure's reason cut off.  They now take the terminal's width and wrap."""
    from textual.widgets import Label

    from tui.screens.files import LoadScreen, SaveScreen

    missing = tmp_path / "a-folder-that-does-not-exist" / "and-a-long-name" / "series.csv"
    app = make_app()
    async with app.run_test(size=(60, 20)) as pilot:
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, SaveScreen)
        dialog = app.screen.query_one(".dialog")
        assert dialog.region.right <= 60, dialog.region
        for label in app.screen.query(Label):
            assert label.region.right <= dialog.region.right, (label, label.region)
        await pilot.press("escape")
        await pilot.pause()
        await pilot.press("ctrl+o", "ctrl+u", *str(missing), "enter")
        await pilot.pause()
        assert isinstance(app.screen, LoadScreen)
        dialog = app.screen.query_one(".dialog")
        problem = app.screen.query_one("#load-problem")
        assert dialog.region.right <= 60 and problem.region.right <= dialog.region.right
        assert problem.region.height >= 2  # the reason wraps, whole, inside the dialog


# -- the caution on the questions --------------------------------------------------------

async def test_the_questions_carry_the_caution_and_their_keys():
    """The quit question and the unit question (F2 on a filled value) covered the screen
    with no caution and no key line, unlike every other screen."""
    from tui.screens.confirm import ConfirmScreen, UnitScreen
    from tui.widgets.chrome import SHORT_CAUTION, CautionBar, KeyLine

    def check(screen, keys: tuple[str, ...]) -> None:
        bar = screen.query_one(CautionBar)
        assert str(bar.render()) == SHORT_CAUTION
        assert bar.region.height >= 2 and bar.region.bottom <= 20, bar.region
        line = screen.query_one(KeyLine).text
        for key in keys:
            assert key in line, line

    app = make_app()
    async with app.run_test(size=(60, 20)) as pilot:
        await pilot.press(*"7.40", "tab", *"40", "tab", "tab", *"24.2", "f5",
                          "shift+tab", "shift+tab", "f2")  # F2 on pCO2 40 mmHg
        await pilot.pause()
        assert isinstance(app.screen, UnitScreen)
        check(app.screen, ("C convert", "R reinterpret", "Esc keep", "F1 help"))
        await pilot.press("escape", "ctrl+q")  # one kept panel, not saved: asks
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        check(app.screen, ("Y yes", "N no", "F1 help"))


# -- a saved series keeps the decimals a value was keyed with ----------------------------

async def test_a_saved_series_keeps_the_decimals_typed_and_loads_back_as_reported(tmp_path):
    """pH "7.40" was written as 7.4 and HCO3- "24.0" as 24.0's repr; "7,31" with a decimal
    comma as 7.31.  The file now carries what was reported (a decimal point: the file's
    mark), so the series loaded back shows 24.0, not 24.  A pCO2 keyed in kPa is written
    converted to mm[Hg], the file's unit, as before (docs/tui.md)."""
    import csv

    good = tmp_path / "series.csv"
    app = make_app()
    async with app.run_test(size=(100, 24)) as pilot:
        await _keep(pilot, "7.40", "40", "24.0")
        await _keep(pilot, "7,31", "46,0", "22,5")
        await pilot.press("ctrl+s", "right", "right", "tab", "ctrl+u", *str(good), "enter")
        await pilot.pause()
        with good.open(encoding="utf-8", newline="") as fh:
            rows = list(csv.DictReader(fh))
        assert [(r["ph"], r["pco2"], r["hco3"]) for r in rows] == [
            ("7.40", "40", "24.0"), ("7.31", "46.0", "22.5")]
        await pilot.press("ctrl+o", "ctrl+u", *str(good), "enter", "f9")
        await pilot.pause()
        _, shown = _table(app, "#series")
        assert [r[4:7] for r in shown] == [["7.40", "40", "24.0"], ["7.31", "46.0", "22.5"]] * 2

