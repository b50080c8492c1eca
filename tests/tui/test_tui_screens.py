"""The other screens: the plane, the help, and the caution on every one of them."""

from __future__ import annotations

import pytest
from tui_helpers import PANELS, key_in, replace_value

import acidbase
from tui.app import make_app
from tui.screens.help import PLACES, help_lines, key_words
from tui.widgets.chrome import SHORT_CAUTION, CautionBar
from tui.widgets.plane import BAND_MARKS, POINT, draw


def test_every_band_of_the_engine_is_in_the_legend_in_words():
    drawing = draw(70, 14)
    names = list(acidbase.plane_bands([40.0]))
    assert [words for _, words in drawing.legend[:len(names)]] == names


def test_band_marks_sit_where_the_engine_puts_the_band():
    """Each digit on a column lies within (or, for a thin band, next to) the band's limits."""
    width, height = 70, 20
    drawing = draw(width, height)
    plot = drawing.rows[:height - 2]
    cols = width - 5
    xs = [10.0 + 90.0 * i / (cols - 1) for i in range(cols)]
    ys = [50.0 - 50.0 * r / (height - 3) for r in range(height - 2)]
    step = 50.0 / (height - 3)
    bands = list(acidbase.plane_bands(xs).values())
    for r, row in enumerate(plot):
        for c, mark in enumerate(row[4:]):  # after the 3-cell label and the axis
            if mark in BAND_MARKS:
                low, high = (v.tolist()[c] for v in bands[BAND_MARKS.index(mark)])
                assert low - step <= ys[r] <= high + step


def test_the_point_is_drawn_once_and_named_with_its_values():
    # Winter's formula (Albert, Dell & Winters 1967): at HCO3 14, pCO2 29 is in the band,
    # so the point sits on the metabolic-acidosis band's rows.
    drawing = draw(70, 14, point=(29.0, 14.0))
    assert sum(row.count(POINT) for row in drawing.rows) == 1
    assert drawing.legend[-1] == (POINT, "this panel: pCO2 29 mm[Hg], HCO3- 14 mmol/L")


def test_the_plane_widens_to_hold_a_point_outside_it():
    drawing = draw(70, 14, point=(150.0, 58.0))
    assert sum(row.count(POINT) for row in drawing.rows) == 1


def test_the_help_lists_every_binding_of_every_screen():
    text = " ".join(" ".join(help_lines(make_app().BINDINGS, width=1000)).split())
    for _, bindings in [("Everywhere", make_app().BINDINGS), *PLACES]:
        for b in bindings:
            assert " ".join(f"{key_words(b.key):<16} {b.tooltip or b.description}".split()) \
                in text


def test_key_names_are_written_as_on_the_keyboard():
    assert key_words("escape,f4") == "Esc / F4"
    assert key_words("ctrl+s") == "Ctrl+S"


async def _caution_shown(app) -> bool:
    bars = list(app.screen.query(CautionBar))
    if len(bars) != 1:
        return False
    bar = bars[0]
    region = bar.region
    screen = app.screen.region
    text = str(bar.render())
    return (text in (SHORT_CAUTION, acidbase.CAUTION) and bar.display and region.height >= 1
            and screen.contains_region(region))


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_the_caution_is_on_every_screen(size):
    app = make_app()
    async with app.run_test(size=size) as pilot:
        await key_in(pilot, PANELS["metabolic acidosis"])
        assert await _caution_shown(app), "entry"
        await pilot.press("f5", "f5")
        for open_key, name in [("f1", "help"), ("f4", "plane"), ("f9", "series"),
                               ("f8", "compare"), ("ctrl+s", "save"), ("ctrl+o", "load")]:
            await pilot.press(open_key)
            await pilot.pause()
            assert await _caution_shown(app), name
            await pilot.press("escape")
            await pilot.pause()
        await pilot.press("ctrl+r", "enter")
        await pilot.pause()
        assert await _caution_shown(app), "finding"


async def test_the_caution_costs_at_most_two_rows_at_80_by_24_and_f1_shows_it_in_full():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        bar = app.screen.query_one(CautionBar)
        assert str(bar.render()) == SHORT_CAUTION
        assert 1 <= bar.region.height <= 2
        assert bar.region.bottom <= 23  # above the footer
        # the short text keeps the message: support, not replacement; no treatment advice
        for words in ("never replaces", "licensed clinicians", "no treatment advice", "F1"):
            assert words in SHORT_CAUTION
        await pilot.press("f1")
        await pilot.pause()
        assert str(app.screen.query_one("#full-caution").render()) == acidbase.CAUTION


async def test_help_opens_from_a_field_and_closes_with_escape():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("7", "f1")
        await pilot.pause()
        assert type(app.screen).__name__ == "HelpScreen"
        await pilot.press("escape")
        await pilot.pause()
        assert app.focused.id == "ph" and app.focused.value == "7"


async def test_f1_on_the_help_closes_it_as_its_key_line_says():
    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("f1")
        await pilot.pause()
        assert type(app.screen).__name__ == "HelpScreen"
        await pilot.press("f1")
        await pilot.pause()
        assert type(app.screen).__name__ == "EntryScreen"


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_the_plane_of_a_stale_reading_says_stale_where_it_is_seen(size):
    """The form holds a refused value: the plane draws the last accepted panel, and says
    so on screen. "(STALE: ...)" once ended an 85-column title and was cut at 80."""
    from tui.widgets.chrome import TitleLine

    app = make_app()
    async with app.run_test(size=size) as pilot:
        await key_in(pilot, PANELS["metabolic acidosis"])
        await replace_value(pilot, "ph", "99")
        await pilot.press("f4")
        await pilot.pause()
        title = app.screen.query_one(TitleLine)
        shown = str(title.render())[: title.content_region.width]
        assert "STALE" in shown, shown
        legend = str(app.screen.query_one("#legend").render())
        assert "STALE" in legend and "mm[Hg]" not in legend + shown


async def test_the_plane_of_a_fresh_reading_names_its_axes_in_the_apps_units():
    from tui.widgets.chrome import TitleLine

    app = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await key_in(pilot, PANELS["metabolic acidosis"])
        await pilot.press("f4")
        await pilot.pause()
        title = app.screen.query_one(TitleLine)
        shown = str(title.render())[: title.content_region.width]
        assert shown.endswith("HCO3- mmol/L (up), pCO2 mmHg (across) - @ is the panel"), shown
        assert "STALE" not in shown + str(app.screen.query_one("#legend").render())
