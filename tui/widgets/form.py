"""The entry form: the gas first, in the order the analyser prints it.

pH, pCO2, pO2, HCO3-, then FiO2, the sample type and the HCO3- source, then the
electrolytes, then the rest (a group F3 folds away), then the time and the ids.
Titles and accepted units come from ``acidbase.fields``; the form never checks a
value itself.  It gathers what is typed into the mapping that
``acidbase.Panel.model_validate`` reads, and shows under a field what the engine
refused there (in the app's words) or that a value would also be ordinary in
another unit.

The focused row is marked twice, never by colour alone: a ``>`` before its title
and its title in reversed colours (SGR 7).
"""

from __future__ import annotations

from typing import Any, ClassVar

from textual import events, on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Input, Label, Static

from acidbase.fields import (BY_NAME, HCO3_SOURCES, PREGNANCY_STATES, SAMPLE_TYPES, TEXT_FIELDS,
                             FieldSpec)

from ..keys import OwnKeys
from ..labels import AFTER_GAS, ELECTROLYTES, GAS, choice_label, form_title, rest, unit_label

#: The answer fields of the group of more values, after its numbers (in the form's order).
MORE_CHOICES: tuple[str, ...] = ("pregnancy",)

#: Plain names for the text fields (they carry no chemistry), in the form's order.
TEXT_TITLES = {"collected_at": "Collected", "patient_id": "Patient", "sample_id": "Sample id"}

#: The focus mark before a row's title (a character, so it shows without colour).
MARK = ">"


def marked(title: str, focused: bool) -> str:
    return f"{MARK if focused else ' '} {title}"


class RowTitle(Label):
    """A row's title; shows the focus mark while the row holds the focus."""

    def __init__(self, title: str, **kwargs) -> None:
        super().__init__(marked(title, False), markup=False, classes="field-title", **kwargs)
        self.title = title

    def mark(self, focused: bool) -> None:
        self.update(marked(self.title, focused))
        self.set_class(focused, "-focused")


class ShowsStart:
    """A text box that shows the beginning of its text once it has lost the focus.

    Typing leaves the view at the end of the text: a long time or id then showed its
    tail ("026-12-03T09:00Z" for 2026-12-03T09:00Z, a year that misreads)."""

    def on_blur(self) -> None:
        # after the refresh: the box's own scroll to its cursor, for the keys of a burst
        # handled just before, comes first
        self.call_after_refresh(self._show_start)  # type: ignore[attr-defined]

    def _show_start(self) -> None:
        if not self.has_focus:  # type: ignore[attr-defined]
            self.scroll_to(x=0, animate=False, immediate=True)  # type: ignore[attr-defined]


class ValueInput(OwnKeys, ShowsStart, Input):
    """The text box of one numeric field (its id is the field name)."""


class ValueField(Widget):
    """One numeric field: title, value, unit, and a message line when there is one.

    A grid of three cells (title, value, unit) and, only while there is something to
    say, a message across all three: few widgets per field keep each keystroke cheap.
    """

    unit: reactive[str] = reactive("")
    """The unit the typed number is read in (UCUM); F2 switches it."""

    class UnitChanged(Message):
        """The unit of a field was switched."""

        def __init__(self, field: ValueField) -> None:
            self.field = field
            super().__init__()

        @property
        def control(self) -> ValueField:
            return self.field

    def __init__(self, spec: FieldSpec, unit: str | None = None) -> None:
        super().__init__(id=f"field-{spec.name}", classes="field-row")
        self.spec = spec
        self._message = ""
        self.set_reactive(ValueField.unit, unit or spec.unit)

    def compose(self) -> ComposeResult:
        yield RowTitle(form_title(self.spec.name))
        # Entering a filled field selects its text, so typing replaces the old value.
        yield ValueInput(id=self.spec.name, compact=True, select_on_focus=True,
                         tooltip=self.spec.help)
        yield Label(unit_label(self.unit), classes="field-unit", markup=False)

    def on_mount(self) -> None:
        self.input = self.query_one(ValueInput)
        self._unit_label = self.query_one(".field-unit", Label)
        self._message_box: Static | None = None

    @property
    def text(self) -> str:
        return self.input.value.strip()

    def watch_unit(self, unit: str) -> None:
        if self.is_mounted:
            self._unit_label.update(unit_label(unit))

    def next_unit_of(self) -> str | None:
        """The unit F2 would switch to; None when the field has only one."""
        units = self.spec.units
        if len(units) < 2:
            return None
        return units[(units.index(self.unit) + 1) % len(units)] if self.unit in units \
            else units[0]

    def set_unit(self, unit: str, value: str | None = None) -> None:
        """Read the field in ``unit`` (and show ``value`` instead of the typed text)."""
        with self.prevent(Input.Changed):
            if value is not None:
                self.input.value = value
        self.unit = unit
        self.post_message(self.UnitChanged(self))

    def show_message(self, lines: list[str]) -> None:
        """Show the lines under the field (none: clear).  Each line leads with its word."""
        text = "\n".join(lines)
        if text != self._message:  # unchanged: no restyle, no new layout
            self._message = text
            if self._message_box is None:
                self._message_box = Static(text, classes="field-message", markup=False)
                self.mount(self._message_box)
            else:
                self._message_box.update(text)
            self.set_class(bool(lines), "-message")
            self.set_class(any(line.startswith("refused") for line in lines), "-refused")

    @property
    def message(self) -> str:
        """What is shown under the field ("" when nothing)."""
        return self._message


class ChoiceField(OwnKeys, Widget, can_focus=True):
    """A field with a few fixed answers, stepped with the arrow keys or space."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("right,space", "step(1)", "next answer", show=False),
        Binding("left", "step(-1)", "previous answer", show=False),
    ]

    value: reactive[str] = reactive("")

    class Changed(Message):
        def __init__(self, field: ChoiceField) -> None:
            self.field = field
            super().__init__()

        @property
        def control(self) -> ChoiceField:
            return self.field

    def __init__(self, name: str, title: str, choices: tuple[str, ...], value: str) -> None:
        super().__init__(id=name, classes="choice")
        self.title = title
        self.choices = choices
        self.set_reactive(ChoiceField.value, value)

    def render(self) -> str:
        # The mark and the brackets show focus in shapes, not by colour alone.
        word = choice_label(self.value)
        shown = f"< {word} >" if self.has_focus else f"  {word}  "
        return f"{marked(self.title, self.has_focus):<14}{shown}"

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()

    def action_step(self, step: int) -> None:
        i = self.choices.index(self.value) if self.value in self.choices else 0
        self.value = self.choices[(i + step) % len(self.choices)]
        self.post_message(self.Changed(self))


class FoldTitle(Widget):
    """The title of the group of more values (F3 folds it; never a stop for Tab)."""

    def render(self) -> str:
        group = self.parent
        folded = isinstance(group, MoreValues) and group.folded
        return "+ more values (F3 shows)" if folded else "- more values (F3 folds)"


class MoreValues(Vertical):
    """The rest of the optional values, as a group that can be folded away."""

    folded: reactive[bool] = reactive(False)

    def watch_folded(self, folded: bool) -> None:
        for child in self.children:
            if isinstance(child, (ValueField, ChoiceField)):
                child.display = not folded
        self.query_one(FoldTitle).refresh()


class TextInput(OwnKeys, ShowsStart, Input):
    """A free-text field (time, patient, sample id)."""


class EntryForm(VerticalScroll):
    """All the panel's fields, the gas first."""

    class Edited(Message):
        """Something in the form changed (a value, a unit or a choice)."""

    def __init__(self, units: dict[str, str] | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.units = units if units is not None else {}
        """The unit chosen for each field in this sitting (shared with the app)."""

    def _field(self, name: str) -> ValueField:
        return ValueField(BY_NAME[name], self.units.get(name))

    def compose(self) -> ComposeResult:
        for name in GAS + AFTER_GAS:
            yield self._field(name)
        yield ChoiceField("sample_type", "Sample", SAMPLE_TYPES, "unknown")
        yield ChoiceField("hco3_source", "HCO3- from", HCO3_SOURCES, "unknown")
        for name in ELECTROLYTES:
            yield self._field(name)
        with MoreValues(id="more"):
            yield FoldTitle(id="fold")
            for name in rest():
                yield self._field(name)
            # Pregnancy selects the third-trimester intervals (acidbase.reference).
            yield ChoiceField("pregnancy", "Pregnancy", PREGNANCY_STATES, "unknown")
        for name in sorted(TEXT_FIELDS, key=list(TEXT_TITLES).index):
            with Horizontal(classes="field-line text-line"):
                yield RowTitle(TEXT_TITLES[name])
                yield TextInput(id=name, compact=True, max_length=200, select_on_focus=True)
        yield Static("", id="panel-message", markup=False)

    _panel_text = ""
    _marked: RowTitle | None = None

    def on_mount(self) -> None:
        # the form's widgets never change: look them up once, not on every keystroke
        self._fields = list(self.query(ValueField))
        self._choices = list(self.query(ChoiceField))
        self._texts = list(self.query(TextInput))
        self._panel_message = self.query_one("#panel-message", Static)

    # -- the focus mark --------------------------------------------------------
    def on_descendant_focus(self, event: events.DescendantFocus) -> None:
        row = event.widget.parent
        title = row.query_children(RowTitle).first() if row is not None and \
            row.query_children(RowTitle) else None
        if self._marked is not None and self._marked is not title:
            self._marked.mark(False)
        self._marked = title
        if title is not None:
            title.mark(True)

    def on_descendant_blur(self, event: events.DescendantBlur) -> None:
        if self._marked is not None and event.widget.parent is self._marked.parent:
            self._marked.mark(False)
            self._marked = None

    # -- reading the form ----------------------------------------------------
    def fields(self) -> list[ValueField]:
        return self._fields

    def field(self, name: str) -> ValueField:
        return self.query_one(f"#field-{name}", ValueField)

    def data(self) -> dict[str, Any]:
        """The mapping for ``Panel.model_validate``: typed text, units, choices, labels."""
        out: dict[str, Any] = {}
        for f in self.fields():
            if f.text:
                out[f.spec.name] = f.text
                if f.unit != f.spec.unit:
                    out[f"{f.spec.name}_unit"] = f.unit
        for choice in self._choices:
            out[choice.id] = choice.value
        for box in self._texts:
            if box.value.strip():
                out[box.id] = box.value.strip()
        return out

    def fill(self, data: dict[str, Any]) -> None:
        """Show ``data`` in the form (as from an entry); posts one ``Edited``.

        A value without a unit is in the field's canonical unit; an empty field takes
        the unit chosen in this sitting.
        """
        with self.prevent(Input.Changed, ValueField.UnitChanged, ChoiceField.Changed):
            for f in self.fields():
                value = data.get(f.spec.name)
                f.input.value = "" if value is None else str(value)
                if value is None:
                    f.unit = self.units.get(f.spec.name, f.spec.unit)
                else:
                    f.unit = str(data.get(f"{f.spec.name}_unit") or f.spec.unit)
            for choice in self._choices:
                value = str(data.get(choice.id) or "unknown")
                choice.value = value if value in choice.choices else "unknown"
            for box in self._texts:
                box.value = str(data.get(box.id) or "")
        self.post_message(self.Edited())

    # -- showing what the engine said ----------------------------------------
    def show_messages(self, by_field: dict[str, list[str]]) -> None:
        """Lines under their fields; those of the panel as a whole at the end."""
        for f in self.fields():
            f.show_message(by_field.get(f.spec.name, []))
        names = {f.spec.name for f in self._fields}
        rest_ = [line for name, lines in by_field.items() if name not in names for line in lines]
        text = "\n".join(rest_)
        if text != self._panel_text:
            self._panel_text = text
            self._panel_message.update(text)

    # -- events ----------------------------------------------------------------
    @on(Input.Changed)
    @on(ValueField.UnitChanged)
    @on(ChoiceField.Changed)
    def _edited(self, event: Message) -> None:
        event.stop()
        self.post_message(self.Edited())
