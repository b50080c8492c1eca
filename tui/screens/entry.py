"""The entry screen: the form on the left, the reading on the right, read as you type."""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from pydantic import ValidationError
from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Input, OptionList, Static

import acidbase
from acidbase.fields import BY_NAME, REQUIRED

from ..sitting import Entry
from ..widgets.chrome import CautionBar, KeyLine, TitleLine
from ..widgets.form import EntryForm, FoldTitle, MoreValues, ValueField
from ..widgets.reading import FindingList, ReadingPane

if TYPE_CHECKING:
    from ..app import AcidBaseApp


def problems_by_field(error: ValidationError) -> tuple[dict[str, list[str]], list[str]]:
    """The engine's messages keyed by field ("panel" for the whole), and the missing fields.

    ``acidbase.describe`` gives one line per error, in the order of ``errors()``.
    """
    by_field: dict[str, list[str]] = {}
    missing: list[str] = []
    for e, line in zip(error.errors(include_url=False), acidbase.describe(error)):
        name = str(e["loc"][0]) if e["loc"] else "panel"
        if e["type"] == "missing":
            missing.append(name)
        else:
            by_field.setdefault(name, []).append(line)
    return by_field, missing


def _titles(names: list[str]) -> str:
    return ", ".join(BY_NAME[n].title if n in BY_NAME else n for n in names)


class EntryScreen(Screen[None]):
    """Key in a panel; the reading follows every accepted change."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("f2", "unit", "unit", tooltip="Read the focused value in its next unit "
                "(the number stays as typed; the engine reads it in the unit shown).", id="unit"),
        Binding("f3", "fold", "fold", tooltip="Fold or unfold the group of more values.",
                id="fold"),
        Binding("f4", "plane", "plane", tooltip="Show the panel on the pCO2-HCO3- plane with "
                "the expected band of each simple disorder.", id="plane"),
        Binding("f5", "keep", "keep", tooltip="Keep a copy of this panel in the series; the "
                "form stays filled for the next panel.", id="keep"),
        Binding("f6", "move(-1)", "previous", tooltip="Open the previous kept panel (its "
                "accepted edits then update it).", id="previous", show=False),
        Binding("f7", "move(1)", "next", tooltip="Open the next kept panel.",
                id="next", show=False),
        Binding("f8", "compare", "compare", tooltip="Compare this panel with the one before it, "
                "side by side with the differences.", id="compare", show=False),
        Binding("f9", "series", "series", tooltip="List the panels kept in this sitting.",
                id="series"),
        Binding("ctrl+r", "reading", "reading", tooltip="Move between the form and the "
                "reading (Enter on a finding opens its working and sources).", id="reading",
                show=False),
        Binding("ctrl+n", "new", "new", tooltip="Start a new, empty panel (kept panels stay).",
                id="new", show=False),
        Binding("ctrl+s", "save", "save", tooltip="Save the reading as text or Markdown, or "
                "the series as CSV.", id="save"),
        Binding("ctrl+o", "load", "load", tooltip="Load a series from a CSV file.", id="load",
                show=False),
    ]

    #: At 100 columns and more the form widens so that long titles fit on one line.
    HORIZONTAL_BREAKPOINTS: ClassVar[list[tuple[int, str]]] = [(0, "-narrow"), (100, "-wide")]

    app: AcidBaseApp

    def compose(self) -> ComposeResult:
        yield TitleLine(id="title")
        with Horizontal(id="body"):
            yield EntryForm(id="form")
            yield ReadingPane(id="reading")
        yield Static("", id="status", markup=False, classes="-empty")
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    @property
    def form(self) -> EntryForm:
        return self.query_one(EntryForm)

    @property
    def pane(self) -> ReadingPane:
        return self.query_one(ReadingPane)

    def on_mount(self) -> None:
        self.query_one("#ph", Input).focus()
        sitting = self.app.sitting
        if sitting.current is not None:
            self.load_entry(sitting.entries[sitting.current])
        elif self.app.initial_panel is not None:
            self.form.fill(self.app.initial_panel.model_dump(exclude_none=True))
        self.show_title()

    # -- reading ---------------------------------------------------------------
    @on(EntryForm.Edited)
    def reread(self) -> None:
        """Validate the form with the engine and show the reading, or mark it stale."""
        data = self.form.data()
        try:
            panel = acidbase.Panel.model_validate(data)
        except ValidationError as e:
            by_field, missing = problems_by_field(e)
            self.form.show_problems(by_field)
            reasons = []
            if by_field:
                reasons.append(f"Refused: {_titles(list(by_field))} (the engine's message is "
                               "beside the field).")
            if missing:
                reasons.append(f"Needed: {_titles(missing)}.")
            if self.pane.reading is None and not by_field:
                reasons = [f"No reading yet: key in {_titles(missing)}."]
            self.pane.show(None, stale_because=" ".join(reasons))
            self.app.panel = None
            return
        self.form.show_problems({})
        self.app.panel = panel
        self.pane.show(acidbase.interpret(panel, self.app.settings))
        self.app.sitting.update_current(data)

    def load_entry(self, entry: Entry) -> None:
        """Show a kept entry in the form; the reading starts afresh (nothing stale)."""
        self.pane.forget()
        self.form.fill(entry.data)
        self.say(f"note: {entry.note}" if entry.note else "")

    def say(self, text: str) -> None:
        status = self.query_one("#status", Static)
        status.update(text)
        status.set_class(not text, "-empty")
        self.show_title()

    def show_title(self) -> None:
        s = self.app.sitting
        if s.current is None:
            where = "new panel, not kept (F5 keeps it)"
        else:
            where = (f"kept panel {s.current + 1} of {len(s.entries)} (edits update it): "
                     f"{s.entries[s.current].label()}")
        self.query_one("#title", TitleLine).update(
            f"acidbase - entry - {where} - series: {len(s.entries)} kept")

    # -- actions ---------------------------------------------------------------
    def action_unit(self) -> None:
        field = None
        if self.focused is not None:
            field = next((w for w in self.focused.ancestors_with_self
                          if isinstance(w, ValueField)), None)
        if field is None:
            self.say("F2 switches the unit of the value field that has the focus.")
            return
        if not field.next_unit():
            self.say(f"{field.spec.title} has one unit: {field.spec.unit}.")
        else:
            self.say(f"{field.spec.title} is now read in {field.unit}.")

    def action_fold(self) -> None:
        more = self.query_one(MoreValues)
        more.folded = not more.folded
        if more.folded and self.focused is not None and more in self.focused.ancestors:
            self.query_one(FoldTitle).focus()

    def action_keep(self) -> None:
        data = self.form.data()
        if not any(k in data for k in REQUIRED):
            self.say("Nothing to keep yet: the form is empty.")
            return
        n = self.app.sitting.keep(data)
        refused = "" if self.app.panel else " The engine refuses it as it stands."
        self.say(f"Kept as panel {n + 1}.{refused} The form stays as it is for the next panel.")

    def action_move(self, step: int) -> None:
        entry = self.app.sitting.move(step)
        if entry is None:
            self.say("No panel that way." if self.app.sitting.entries else
                     "The series is empty: F5 keeps the current panel.")
            return
        self.load_entry(entry)

    def action_new(self) -> None:
        self.app.sitting.current = None
        self.pane.forget()
        self.form.fill({})
        self.query_one("#ph", Input).focus()
        self.say("New panel.")

    def action_reading(self) -> None:
        findings = self.query_one(FindingList)
        if findings.has_focus:
            self.query_one("#ph", Input).focus()
        else:
            findings.focus()

    @on(OptionList.OptionSelected, "#findings")
    def open_finding(self, event: OptionList.OptionSelected) -> None:
        from .finding import FindingScreen

        it = self.pane.reading
        option_id = event.option.id or ""
        if it is None or not option_id.startswith("finding-"):
            return
        self.app.push_screen(FindingScreen(it.findings[int(option_id.split("-")[1])],
                                           stale=self.pane.stale))

    def action_plane(self) -> None:
        from .plane import PlaneScreen

        self.app.push_screen(PlaneScreen(self.pane.reading, stale=self.pane.stale))

    def action_series(self) -> None:
        from .series import SeriesScreen

        self.app.push_screen(SeriesScreen(), self._after_series)

    def _after_series(self, chosen: int | None) -> None:
        if chosen is not None:
            self.app.sitting.current = chosen
            self.load_entry(self.app.sitting.entries[chosen])
        self.show_title()

    def action_compare(self) -> None:
        from .compare import CompareScreen

        s = self.app.sitting
        if len(s.entries) < 2:
            self.say("Compare needs two kept panels (F5 keeps the current one).")
            return
        a = s.current if s.current is not None else len(s.entries) - 1
        b = a - 1 if a > 0 else a + 1
        self.app.push_screen(CompareScreen(b, a))

    def action_save(self) -> None:
        from .files import SaveScreen

        self.app.push_screen(SaveScreen(), self._save)

    def _save(self, choice: tuple[str, str] | None) -> None:
        if choice is None:
            return
        kind, path = choice
        self.say(self.app.save(kind, path, self.pane.reading))

    def action_load(self) -> None:
        from .files import LoadScreen

        self.app.push_screen(LoadScreen(), self._load)

    def _load(self, path: str | None) -> None:
        if not path:
            return
        message, first = self.app.load(path)
        if first is not None:
            self.app.sitting.current = first
            self.load_entry(self.app.sitting.entries[first])
        self.say(message)

