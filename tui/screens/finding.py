"""One finding opened: its statement, working, why, and full sources."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Static

import acidbase

from ..widgets.chrome import CautionBar, KeyLine, TitleLine
from ..widgets.reading import MARKS


class FindingText(VerticalScroll, can_focus=True):
    """The finding's text; arrows and Page keys scroll it."""


class FindingScreen(Screen[None]):
    """Everything the engine says about one finding."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,enter", "app.pop_screen", "back", tooltip="Back to the reading.",
                id="finding-back", priority=True),
    ]

    def __init__(self, finding: acidbase.Finding, stale: bool = False) -> None:
        super().__init__()
        self.finding = finding
        self.stale = stale

    def compose(self) -> ComposeResult:
        f = self.finding
        stale = " (STALE: from the last accepted reading)" if self.stale else ""
        yield TitleLine(f"acidbase - finding - {f.code}{stale}")
        with FindingText(id="finding"):
            yield Static(f"{MARKS.get(f.severity, f.severity).strip()}: {f.title}",
                         classes="finding-title", markup=False)
            yield Static(f.text, markup=False, id="finding-text")
            yield Static("Working", classes="finding-heading")
            yield Static(f.working, markup=False, id="finding-working")
            if f.why:
                yield Static("Why", classes="finding-heading")
                yield Static(f.why, markup=False, id="finding-why")
            yield Static("Sources", classes="finding-heading")
            yield Static("\n".join(f"- {c.full()}" for c in f.citations), markup=False,
                         id="finding-sources")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        self.query_one(FindingText).focus()
