"""Units: kept for the sitting and the next one, hinted, and never switched silently."""

from __future__ import annotations

import json

import pytest
from textual.widgets import Input
from tui_helpers import PANELS, key_in, replace_value

import acidbase
from tui.app import make_app
from tui.widgets.form import ValueField
from tui.widgets.reading import ReadingPane


def field(app, name: str) -> ValueField:
    return app.screen.query_one(f"#field-{name}", ValueField)


async def switch_pco2_to_kpa(pilot) -> None:
    """F2 on the empty pCO2 field: nothing to convert, so no question."""
    await pilot.press("tab", "f2")
    await pilot.pause()


async def test_a_unit_chosen_is_kept_for_new_panels_of_the_sitting():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await switch_pco2_to_kpa(pilot)
        assert field(app, "pco2").unit == "kPa"
        await pilot.press(*"5.3", "ctrl+n")
        await pilot.pause()
        assert app.screen.query_one("#pco2", Input).value == ""
        assert field(app, "pco2").unit == "kPa"
        # on screen the unit is written for people
        assert str(field(app, "pco2").query_one(".field-unit").render()) == "kPa"
        assert str(field(app, "po2").query_one(".field-unit").render()) == "mmHg"


async def test_a_unit_chosen_is_remembered_in_the_settings_file_for_the_next_sitting(
        config_home):
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await switch_pco2_to_kpa(pilot)
    saved = json.loads((config_home / "acidbase" / "tui.json").read_text(encoding="utf-8"))
    assert saved == {"units": {"pco2": "kPa"}}
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert field(app, "pco2").unit == "kPa"
        assert field(app, "po2").unit == "mm[Hg]"


async def test_an_unreadable_settings_file_means_no_choices_yet(config_home):
    (config_home / "acidbase").mkdir()
    (config_home / "acidbase" / "tui.json").write_text('{"units": {"pco2": "bar", "ph": 3',
                                                       encoding="utf-8")
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert field(app, "pco2").unit == "mm[Hg]"


@pytest.mark.parametrize(("name", "text"), [("po2", "12"), ("pco2", "9")])
async def test_a_value_odd_in_its_unit_and_ordinary_in_the_other_gets_a_hint(name, text):
    """pO2 12 mm[Hg] (physiologic 20-700) and pCO2 9 mm[Hg] (10-150) are accepted but out
    of the ordinary; as kPa (90 and 67.5 mm[Hg]; 1 kPa = 7.50062 mm[Hg]) they are
    ordinary (acidbase.fields ranges)."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await replace_value(pilot, name, text)
        assert acidbase.also_ordinary(name, text, "mm[Hg]") == ("kPa",)
        assert field(app, name).message == "check: press F2 for kPa?"
        assert not field(app, name).has_class("-refused")


@pytest.mark.parametrize(("name", "text"), [("po2", "45"), ("po2", "68"), ("po2", "90"),
                                            ("pco2", "12")])
async def test_a_value_ordinary_in_its_unit_gets_no_hint_though_ordinary_in_kpa_too(
        name, text):
    """pO2 45, 68, 90 and pCO2 12 mm[Hg] are ordinary as typed, and as kPa too: no hint."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        await replace_value(pilot, name, text)
        assert acidbase.also_ordinary(name, text, "mm[Hg]") == ("kPa",)
        assert field(app, name).message == ""


async def test_a_kpa_value_odd_in_kpa_and_ordinary_in_mmhg_gets_the_mmhg_hint():
    """pO2 95 kPa = 712.6 mm[Hg], above the physiologic 700; 95 mm[Hg] is ordinary."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        app.screen.query_one("#po2").focus()
        await pilot.pause()
        await pilot.press("f2", *"95")
        await pilot.pause()
        assert field(app, "po2").unit == "kPa"
        assert field(app, "po2").message == "check: press F2 for mmHg?"
        await pilot.press("backspace")  # 9 kPa = 67.5 mm[Hg]: ordinary, no hint
        await pilot.pause()
        assert field(app, "po2").message == ""


async def test_a_value_ordinary_only_in_its_unit_gets_no_hint():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])  # pCO2 40: as kPa (300 mm[Hg]) not ordinary
        assert field(app, "pco2").message == ""


async def test_f2_on_a_filled_value_asks_and_shows_both_readings():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await replace_value(pilot, "po2", "68")
        await pilot.press("f2")
        await pilot.pause()
        assert type(app.screen).__name__ == "UnitScreen"
        # UCUM: 1 mm[Hg] = 0.133322 kPa: 68 mm[Hg] = 9.066 kPa; 68 kPa = 510.0 mm[Hg]
        convert = str(app.screen.query_one("#convert").render())
        reinterpret = str(app.screen.query_one("#reinterpret").render())
        assert convert.startswith("C  convert: 9.066 kPa")
        assert reinterpret.startswith("R  reinterpret: 68 kPa (= 510 mmHg)")
        await pilot.press("escape")
        await pilot.pause()
        assert field(app, "po2").unit == "mm[Hg]" and field(app, "po2").text == "68"
        assert app.focused.id == "po2"


async def test_converting_keeps_the_quantity_and_reinterpreting_keeps_the_number():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["normal"])
        before = app.screen.query_one(ReadingPane).reading
        await replace_value(pilot, "pco2", "40")
        await pilot.press("f2", "c")
        await pilot.pause()
        assert (field(app, "pco2").text, field(app, "pco2").unit) == ("5.333", "kPa")
        after = app.screen.query_one(ReadingPane).reading
        # 5.333 kPa back in mm[Hg]: 40.00 (UCUM factor), so the reading is unchanged
        assert after.inputs["pco2"]["value"] == pytest.approx(40.0, abs=0.01)
        assert after.disorders == before.disorders
        await pilot.press("f2", "r")  # now 5.333 read as mm[Hg]: refused (8-200)
        await pilot.pause()
        assert (field(app, "pco2").text, field(app, "pco2").unit) == ("5.333", "mm[Hg]")
        assert field(app, "pco2").has_class("-refused")


def test_a_unit_that_reads_the_number_the_same_is_never_hinted():
    """mEq/L of a monovalent ion is mmol/L (IUPAC: one mole of charge per equivalent)."""
    assert acidbase.also_ordinary("na", "140", "mmol/L") == ()
    assert acidbase.also_ordinary("pco2", "12", "mm[Hg]") == ("kPa",)
