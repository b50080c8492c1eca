"""What must fit: every word of the reading at 80, 100 and 132 columns, the pinned verdict,
and the form's titles on one line."""

from __future__ import annotations

import pytest
from rich.cells import cell_len
from textual.geometry import Region
from tui_helpers import PANELS, key_in, processes_line, replace_value

from tui.app import make_app
from tui.widgets.form import RowTitle, marked
from tui.widgets.reading import FindingList, VerdictLine, verdict

SIZES = [(80, 24), (100, 30), (132, 40)]


def _words(text: str) -> list[str]:
    return text.split()


async def shown_lines(pilot, widget) -> list[str]:
    """Every line the widget draws, scrolled from top to bottom, each row once."""
    region = widget.scrollable_content_region
    out: list[str] = []
    y = 0
    while True:
        widget.scroll_to(y=y, animate=False, immediate=True)
        await pilot.pause()
        top = round(widget.scroll_y)
        strips = widget.render_lines(Region(0, 0, region.width, region.height))
        out += [strip.text for strip in strips][y - top:]
        if top >= widget.max_scroll_y:
            return out
        y = top + region.height


@pytest.mark.parametrize("size", SIZES)
async def test_every_word_of_a_known_reading_is_drawn_at_each_width(size):
    """A chronic hypercapnia (the panel that lost "(additional)" and last words before)."""
    app = make_app()
    async with app.run_test(size=size) as pilot:
        await key_in(pilot, PANELS["normal"])  # a shorter reading first, then a longer one
        await replace_value(pilot, "pco2", "60")
        await replace_value(pilot, "hco3", "31.0")
        await replace_value(pilot, "ph", "7.33")
        await replace_value(pilot, "cl", "98")
        assert processes_line(app) == "Processes: respiratory acidosis (chronic, primary)"
        findings = app.screen.query_one(FindingList)
        prompts = [str(findings.get_option_at_index(i).prompt)
                   for i in range(findings.option_count)]
        assert len(prompts) > 5
        drawn = await shown_lines(pilot, findings)
        assert _words(" ".join(drawn)) == _words(" ".join(prompts))
        # and the lines are cut nowhere: none is wider than the list's content
        assert all(len(line.rstrip()) <= findings.scrollable_content_region.width
                   for line in drawn)


@pytest.mark.parametrize("size", SIZES)
async def test_the_verdict_is_pinned_whole_on_screen_at_each_width(size):
    app = make_app()
    async with app.run_test(size=size) as pilot:
        await key_in(pilot, PANELS["mixed"])
        line = app.screen.query_one(VerdictLine)
        reading = app.screen.query_one("ReadingPane").reading
        assert line.text == verdict(reading)
        assert line.text.startswith("Trust: consistent | Processes: metabolic acidosis")
        assert app.screen.region.contains_region(line.region)
        drawn = line.render_lines(Region(0, 0, *line.outer_size))
        text = " ".join(s.text for s in drawn).replace("\u2594", " ")  # less its top edge
        assert _words(text) == _words(line.text)
        await pilot.press("ctrl+r", "end")  # scrolling the reading leaves the verdict be
        await pilot.pause()
        assert app.screen.region.contains_region(line.region)


@pytest.mark.parametrize("size", SIZES)
async def test_every_title_of_the_form_is_on_one_line(size):
    app = make_app()
    async with app.run_test(size=size) as pilot:
        await pilot.pause()
        for title in app.screen.query(RowTitle):
            if title.display and title.parent.display:
                assert title.region.height <= 1, title.title


@pytest.mark.parametrize("size", SIZES)
async def test_every_title_of_the_form_ends_before_its_value(size):
    """A blank column between a row's title and its value, focused or not: "Ionised Ca2+"
    ran into "1.1" ("Ionised Ca2+1.1", a charge of 2+1.1 at a glance)."""
    app = make_app()
    async with app.run_test(size=size) as pilot:
        await pilot.pause()
        for title in app.screen.query(RowTitle):
            if title.display and title.parent.display:
                for focused in (False, True):
                    drawn = marked(title.title, focused)
                    assert cell_len(drawn) < title.region.width, drawn
