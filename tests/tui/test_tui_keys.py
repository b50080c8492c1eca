"""Every keystroke lands in the field that had the focus when it was typed.

The burst tests queue a whole panel's keys at once (no pause between keys), as a
fast typist over SSH delivers them; the values must come out exactly as printed.
"""

from __future__ import annotations

from textual.widgets import Input
from tui_helpers import burst, typed

from tui.app import make_app
from tui.widgets.form import MARK, EntryForm, RowTitle


def values(app) -> dict[str, str]:
    return {k: v for k, v in app.screen.query_one(EntryForm).data().items()
            if not k.endswith("_unit") and k not in ("sample_type", "hco3_source", "pregnancy")}


async def test_a_value_then_tab_then_a_value_in_one_burst_stay_apart():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await burst(pilot, typed("7.21", "tab", "40"))
        assert values(app) == {"ph": "7.21", "pco2": "40"}


async def test_a_whole_panel_in_one_burst_lands_exactly_as_printed():
    """pH, pCO2, pO2, HCO3-, FiO2, (sample, source), Na+, K+, Cl- typed in form order."""
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await burst(pilot, typed("7.33", "tab", "60", "tab", "68", "tab", "31.0", "tab",
                                 "0.40", "tab", "tab", "tab", "140", "tab", "4.1", "tab",
                                 "98"))
        assert values(app) == {"ph": "7.33", "pco2": "60", "po2": "68", "hco3": "31.0",
                               "fio2": "0.40", "na": "140", "k": "4.1", "cl": "98"}


async def test_enter_moves_on_like_tab_also_in_a_burst():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await burst(pilot, typed("7.4", "enter", "4"))
        assert values(app) == {"ph": "7.4", "pco2": "4"}
        assert app.focused.id == "pco2"


async def test_shift_tab_in_a_burst_goes_back_one_field():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await burst(pilot, typed("7.40", "tab", "tab", "shift+tab", "41"))
        assert values(app) == {"ph": "7.40", "pco2": "41"}


async def test_entering_a_filled_field_selects_it_so_typing_replaces_the_value():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await burst(pilot, typed("7.40", "tab", "40"))
        await burst(pilot, typed("shift+tab", "7.35"))
        assert values(app) == {"ph": "7.35", "pco2": "40"}


async def test_the_focused_row_is_marked_by_a_character_not_only_by_colour():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        titles = {t.parent.id: str(t.render()) for t in app.screen.query(RowTitle)}
        assert titles["field-ph"] == f"{MARK} pH"
        assert all(not text.startswith(MARK) for key, text in titles.items()
                   if key != "field-ph")
        await pilot.press("tab")
        assert str(app.screen.query_one("#field-pco2 RowTitle").render()) == f"{MARK} pCO2"
        assert not str(app.screen.query_one("#field-ph RowTitle").render()).startswith(MARK)
        assert isinstance(app.focused, Input) and app.focused.id == "pco2"


async def test_f3_in_a_burst_sends_the_next_keys_to_the_collection_time():
    """Folding the more values from inside them moves the focus at once: the keys typed
    after F3 in the same burst land in Collected, not in the field folded away."""
    from tui.labels import ELECTROLYTES, rest

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        into_more = len(ELECTROLYTES) + 3 + 4 + 3  # from pH: past the gas, FiO2, choices...
        await burst(pilot, [*typed("7.40"), *["tab"] * into_more, "f3",
                            *typed("2026-12-01T21:00Z")])
        assert app.focused.id == "collected_at"
        assert values(app) == {"ph": "7.40", "collected_at": "2026-12-01T21:00Z"}
        assert len(rest()) > 3  # the burst did end inside the group folded away

