"""The entry screen: the form on the left, the reading on the right, read as you type.

Every key of this screen is a priority binding: Tab, Shift+Tab and Enter (the
number pad's too) move the focus, and F2 switches the focused field's unit, when the
key is taken from the queue, before the next key is handed to a field.  So keys
typed in one burst land in (and act on) the field that had the focus when each was
typed.

A key bound to an action is taken from the app's queue at once, but the keys typed
before it may still wait in the queue of the field they were handed to.  So every
action that reads, replaces or converts the form first lets each widget handle what is
already queued to it (``after_typed_keys``): F5 keeps "7.33", not the "7" handled so
far; Ctrl+N clears the whole panel typed before it, and the keys after it land in the
new one; F2 asks about "60", not about an empty field.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from pydantic import ValidationError
from textual import events, on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import Input, OptionList, Static

import acidbase
from acidbase.fields import BY_NAME, REQUIRED

from ..keys import after_typed_keys
from ..labels import unit_label, with_unit
from ..sitting import Entry, typed_decimal, typed_number
from ..widgets.chrome import CautionBar, KeyLine, TitleLine
from ..widgets.form import ChoiceField, EntryForm, MoreValues, ValueField
from ..widgets.reading import FindingList, ReadingPane, VerdictLine, verdict
from ..words import f2_hint, problems_by_field

if TYPE_CHECKING:
    from ..app import AcidBaseApp


def _titles(names: list[str]) -> str:
    return ", ".join(BY_NAME[n].title if n in BY_NAME else n for n in names)


class EntryScreen(Screen[None]):
    """Key in a panel; the reading follows every accepted change."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("tab", "next_field", "next field", tooltip="Next field (also Enter).",
                id="next-field", show=False, priority=True),
        Binding("shift+tab", "previous_field", "previous field", tooltip="Previous field.",
                id="previous-field", show=False, priority=True),
        # The number pad's Enter arrives as Enter, as ESC O M (read as Enter) or, from some
        # terminals and tmux, as a line feed (Ctrl+J).
        Binding("enter,ctrl+j", "enter_next", "next field", tooltip="In the form: next "
                "field, like Tab (the number pad's Enter too).", id="enter-next", show=False,
                priority=True),
        Binding("f2", "unit", "unit", tooltip="Switch the focused value's unit; a filled "
                "value asks: convert it, or read the number in the new unit.", id="unit", priority=True),
        Binding("f3", "fold", "fold", tooltip="Fold or unfold the group of more values.",
                id="fold", show=False, priority=True),
        Binding("f4", "plane", "plane", tooltip="Show the panel on the pCO2-HCO3- plane with "
                "the expected band of each simple disorder.", id="plane", priority=True),
        Binding("f5", "keep", "keep", tooltip="Keep a copy of this panel in the series; the "
                "form stays filled for the next panel.", id="keep", priority=True),
        Binding("f6", "move(-1)", "previous", tooltip="Open the previous kept panel (its "
                "accepted edits then update it).", id="previous", show=False, priority=True),
        Binding("f7", "move(1)", "next", tooltip="Open the next kept panel.",
                id="next", show=False, priority=True),
        Binding("f8", "compare", "compare", tooltip="Compare this panel with the one before it, "
                "side by side with the differences.", id="compare", show=False, priority=True),
        Binding("f9", "series", "series", tooltip="List the panels kept in this sitting.",
                id="series", priority=True),
        Binding("ctrl+r", "reading", "reading", tooltip="Move between the form and the "
                "reading (Enter on a finding opens its working and sources).", id="reading",
                show=False, priority=True),
        Binding("ctrl+n", "new", "new", tooltip="Start a new, empty panel (kept panels stay; "
                "Ctrl+Z brings the cleared form back).", id="new", show=False, priority=True),
        Binding("ctrl+z", "undo", "undo", tooltip="Bring back the form cleared by Ctrl+N.",
                id="undo", show=False, priority=True),
        Binding("ctrl+s", "save", "save", tooltip="Save the report for the chart (text or "
                "Markdown), or the series as CSV.", id="save", priority=True),
        Binding("ctrl+y", "copy", "copy", tooltip="Copy the report for the chart to the "
                "clipboard (where the terminal allows it).", id="copy", show=False, priority=True),
        Binding("ctrl+o", "load", "load", tooltip="Load a series from a CSV file.", id="load",
                show=False, priority=True),
        Binding("ctrl+t", "store", "store", tooltip="With --history: the patient's stored "
                "panels within the serial window and this panel's check against them; K "
                "there keeps this panel in the store (asks first).", id="store", show=False,
                priority=True),
    ]

    #: At 100 columns and more the form widens so that long titles fit on one line.
    HORIZONTAL_BREAKPOINTS: ClassVar[list[tuple[int, str]]] = [(0, "-narrow"), (100, "-wide")]

    app: AcidBaseApp

    def __init__(self) -> None:
        super().__init__()
        self._cleared: tuple[dict, int | None] | None = None

    def compose(self) -> ComposeResult:
        yield TitleLine(id="title")
        with Horizontal(id="body"):
            yield EntryForm(units=self.app.units, id="form")
            yield ReadingPane(id="reading")
        yield Static("", id="status", markup=False, classes="-empty")
        yield VerdictLine(id="verdict")
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
        if self.app.store is not None and not self.app.store.usable:
            self.call_after_refresh(self.say, self.app.store.problem)
        sitting = self.app.sitting
        if sitting.current is not None:
            self.load_entry(sitting.entries[sitting.current])
        elif self.app.initial_panel is not None:
            self.form.fill(self.app.initial_panel.model_dump(exclude_none=True))
        self.show_title()

    # -- moving between fields -------------------------------------------------
    def action_next_field(self) -> None:
        self.focus_next()

    def action_previous_field(self) -> None:
        self.focus_previous()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action == "enter_next":
            # Enter moves on in the form; elsewhere (the reading) it keeps its own meaning.
            focused = self.focused
            return isinstance(focused, (Input, ChoiceField)) and focused.screen is self
        if action == "undo":
            return self._cleared is not None
        return True

    def action_enter_next(self) -> None:
        self.focus_next()

    # -- reading ---------------------------------------------------------------
    @on(EntryForm.Edited)
    def reread(self) -> None:
        """Validate the form with the engine and show the reading, or mark it stale."""
        data = self.form.data()
        verdict_line = self.query_one(VerdictLine)
        # the decimal mark of the values as typed: the one reader reads them with it
        decimal, mixed = typed_decimal(data)
        try:
            panel = acidbase.Panel.model_validate(data, context={"decimal": decimal})
        except ValidationError as e:
            by_field, missing = problems_by_field(e, mixed)
            self.form.show_messages(self._with_hints(by_field))
            reasons = []
            if by_field:
                reasons.append(f"Refused: {_titles(list(by_field))} (see under the field).")
            if missing:
                reasons.append(f"Needed: {_titles(missing)}.")
            if self.pane.reading is None and not by_field:
                reasons = [f"No reading yet: key in {_titles(missing)}."]
            self.pane.show(None, stale_because=" ".join(reasons))
            # no reading to keep: the line says what stands in its way (a refused value,
            # the values still needed), as the reading pane does, never "key in" a value
            # that is keyed
            verdict_line.show(verdict(self.pane.reading, stale=self.pane.stale)
                              if self.pane.stale else verdict(None, why=" ".join(reasons)))
            self.app.panel = None
            return
        self.form.show_messages(self._with_hints({}))
        self.app.panel = panel
        reading = acidbase.interpret(panel, self.app.settings)
        store, suffix = self._store_section(panel, data)
        self.pane.show(reading, store=store)
        verdict_line.show(verdict(reading) + (f" | {suffix}" if suffix else ""))
        self.app.sitting.update_current(data)

    # -- the history store (--history) -------------------------------------------
    def _store_section(self, panel: acidbase.Panel, data: dict
                       ) -> tuple[tuple[str, list[str]] | None, str]:
        """The store's part of the reading and of the verdict (none without --history)."""
        link = self.app.store
        if link is None:
            return None, ""
        from ..store import section

        patient = str(data.get("patient_id") or "").strip()
        typing = self.focused is not None and self.focused.id == "patient_id"
        waiting = bool(patient) and typing and not link.known(patient)
        check = None if waiting or not link.usable else link.check(panel, data, read=True)
        title, lines, suffix = section(link, check, patient, waiting)
        return (title, lines), suffix

    def on_descendant_blur(self, event: events.DescendantBlur) -> None:
        # The patient's stored panels are read once the id is typed in full.
        if self.app.store is not None and event.widget.id == "patient_id":
            self.call_after_refresh(self.reread)

    @after_typed_keys
    def action_store(self) -> None:
        link = self.app.store
        if link is None:
            self.say("No history store: start the app with --history PATH to use one.")
            return
        if not link.usable:
            self.say(link.problem)
            return
        from .store import StoreScreen

        self.app.push_screen(StoreScreen(self.form.data()), lambda _: self.reread())

    def _with_hints(self, by_field: dict[str, list[str]]) -> dict[str, list[str]]:
        """Add "check: press F2 for kPa?" under values also ordinary in another unit."""
        out = dict(by_field)
        decimal = typed_decimal(self.form.data())[0]
        for f in self.form.fields():
            if f.text and f.spec.name not in by_field:
                number = typed_number(f.text, decimal)
                hint = f2_hint(f.spec.name, number, f.unit) if number is not None else ""
                if hint:
                    out[f.spec.name] = [f"check: {hint}?"]
        return out

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
            where = "new panel, not kept (F5 keeps)"
        else:
            where = (f"kept {s.current + 1} of {len(s.entries)} (edits update it): "
                     f"{s.entries[s.current].label()}")
        unsaved = ", not saved" if s.unsaved and s.entries else ""
        self.query_one("#title", TitleLine).update(
            f"acidbase - {where} - {len(s.entries)} kept{unsaved}")

    # -- units -------------------------------------------------------------------
    def _focused_field(self) -> ValueField | None:
        if self.focused is None:
            return None
        return next((w for w in self.focused.ancestors_with_self
                     if isinstance(w, ValueField)), None)

    @after_typed_keys
    def action_unit(self) -> None:
        field = self._focused_field()
        if field is None:
            self.say("F2 switches the unit of the value that has the focus.")
            return
        new = field.next_unit_of()
        if new is None:
            unit = unit_label(field.unit)
            self.say(f"{field.spec.title} has one unit" + (f": {unit}." if unit else "."))
            return
        if not field.text or field.has_class("-refused"):
            # nothing to convert (or a refused number): the typed number is read in the new unit
            self._switch(field, new)
            return
        number = typed_number(field.text, typed_decimal(self.form.data())[0])
        try:
            if number is None:
                raise ValueError(field.text)
            converted = acidbase.convert(field.spec.name, number, field.unit, new)
            back = acidbase.convert(field.spec.name, number, new, field.unit)
        except ValueError:
            self._switch(field, new)
            return
        from .confirm import UnitScreen

        shown = f"{converted:.4g}"
        old = with_unit(field.text, field.unit)
        self.app.push_screen(UnitScreen(
            f"{field.spec.title} {old}: switch to {unit_label(new)}?",
            f"{with_unit(shown, new)} (the same {field.spec.title})",
            f"{with_unit(field.text, new)} (= {with_unit(f'{back:.4g}', field.unit)})",
            old), lambda answer: self._unit_answer(field, new, shown, answer))

    def _unit_answer(self, field: ValueField, new: str, shown: str, answer: str | None) -> None:
        if answer == "convert":
            self._switch(field, new, shown)
        elif answer == "reinterpret":
            self._switch(field, new)
        else:
            self.say(f"{field.spec.title} stays {with_unit(field.text, field.unit)}.")
        field.input.focus()

    def _switch(self, field: ValueField, unit: str, value: str | None = None) -> None:
        field.set_unit(unit, value)
        self.app.remember_unit(field.spec.name, unit)
        what = f"{with_unit(value, unit)} (converted)" if value is not None else \
            f"read in {unit_label(unit)}"
        self.say(f"{field.spec.title}: {what}; new panels use {unit_label(unit)} too.")

    # -- actions ---------------------------------------------------------------
    def action_fold(self) -> None:
        more = self.query_one(MoreValues)
        more.folded = not more.folded
        if more.folded and self.focused is not None and more in self.focused.ancestors:
            # set at once, not after this key (as .focus() would): the next keys of a burst
            # land in the field that has the focus now
            self.set_focus(self.query_one("#collected_at", Input))

    @after_typed_keys
    def action_keep(self) -> None:
        data = self.form.data()
        if not any(k in data for k in REQUIRED):
            self.say("Nothing to keep yet: the form is empty.")
            return
        n = self.app.sitting.keep(data)
        refused = "" if self.app.panel else " The engine refuses it as it stands."
        self.say(f"Kept as panel {n + 1}.{refused} The form stays as it is for the next panel.")

    @after_typed_keys
    def action_move(self, step: int) -> None:
        entry = self.app.sitting.move(step)
        if entry is None:
            self.say("No panel that way." if self.app.sitting.entries else
                     "The series is empty: F5 keeps the current panel.")
            return
        self.load_entry(entry)

    @after_typed_keys
    def action_new(self) -> None:
        data = self.form.data()
        filled = any(k in data for k in BY_NAME)
        self._cleared = (data, self.app.sitting.current) if filled else None
        self.app.sitting.current = None
        self.pane.forget()
        self.form.fill({})
        self.set_focus(self.query_one("#ph", Input))
        self.say("New panel (units as chosen). Ctrl+Z brings the cleared one back."
                 if filled else "New panel.")

    @after_typed_keys
    def action_undo(self) -> None:
        if self._cleared is None:
            return
        data, current = self._cleared
        self._cleared = None
        s = self.app.sitting
        s.current = current if current is not None and current < len(s.entries) else None
        self.pane.forget()
        self.form.fill(data)
        self.say("The cleared panel is back.")

    def action_reading(self) -> None:
        findings = self.query_one(FindingList)
        if findings.has_focus:
            self.set_focus(self.query_one("#ph", Input))
        else:
            self.set_focus(findings)

    @on(OptionList.OptionSelected, "#findings")
    def open_finding(self, event: OptionList.OptionSelected) -> None:
        from .finding import FindingScreen

        it = self.pane.reading
        option_id = event.option.id or ""
        if option_id.startswith("store"):
            self.action_store()
            return
        if it is None or not option_id.startswith("finding-"):
            return
        self.app.push_screen(FindingScreen(it.findings[int(option_id.split("-")[1])],
                                           stale=self.pane.stale))

    @after_typed_keys
    def action_plane(self) -> None:
        from .plane import PlaneScreen

        self.app.push_screen(PlaneScreen(self.pane.reading, stale=self.pane.stale))

    @after_typed_keys
    def action_series(self) -> None:
        from .series import SeriesScreen

        self.app.push_screen(SeriesScreen(), self._after_series)

    def _after_series(self, chosen: int | None) -> None:
        if chosen is not None:
            self.app.sitting.current = chosen
            self.load_entry(self.app.sitting.entries[chosen])
        self.show_title()

    @after_typed_keys
    def action_compare(self) -> None:
        from .compare import CompareScreen

        s = self.app.sitting
        if len(s.entries) < 2:
            self.say("Compare needs two kept panels (F5 keeps the current one).")
            return
        # this panel and the one before it (the one after the first), the earlier as A
        # so that B - A runs forward in time
        a = s.current if s.current is not None else len(s.entries) - 1
        b = a - 1 if a > 0 else a + 1
        self.app.push_screen(CompareScreen(min(a, b), max(a, b)))

    # -- files -------------------------------------------------------------------
    def _report_refused(self) -> str:
        if self.pane.reading is None:
            return "No reading yet: nothing to report."
        if self.app.panel is None:
            return ("The form holds a refused or missing value: correct it first, so that "
                    "the report's values and reading agree.")
        return ""

    @after_typed_keys
    def action_copy(self) -> None:
        why = self._report_refused()
        if why:
            self.say(f"Not copied. {why}")
            return
        self.app.copy_to_clipboard(self.app.report_text(self.pane.reading, self.form.data()))
        self.say("The report is on the clipboard where the terminal allows it (OSC 52); "
                 "Ctrl+S saves it to a file.")

    @after_typed_keys
    def action_save(self) -> None:
        from .files import SaveScreen

        self.app.push_screen(SaveScreen(self.app.default_names(self.form.data()),
                                        save=self._save_now), self._saved)

    def _save_now(self, kind: str, path: str, replace: bool) -> tuple[bool, str]:
        """The save dialog's saver: (written, what to tell the user)."""
        if kind != "csv":
            why = self._report_refused()
            if why:
                return False, f"Not saved. {why}"
        return self.app.try_save(kind, path, self.pane.reading, self.form.data(), replace)

    def _saved(self, message: str | None) -> None:
        if message:
            self.say(message)
        self.show_title()

    @after_typed_keys
    def action_load(self) -> None:
        from .files import LoadScreen

        self.app.push_screen(LoadScreen(self.app.load), self._loaded)

    def _loaded(self, done: tuple[str, int] | None) -> None:
        """After the load dialog: the first panel added, opened (None: nothing added)."""
        if done is None:
            return
        message, first = done
        self.app.sitting.current = first
        self.load_entry(self.app.sitting.entries[first])
        self.say(message)
