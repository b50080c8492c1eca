"""The entry form: one row per panel field, in the order a blood-gas report prints.

Titles, units and the order come from ``acidbase.fields``; the form never
checks a value itself.  It gathers what is typed into the mapping that
``acidbase.Panel.model_validate`` reads, and shows beside each field the
engine's message for a refused value.
"""

from __future__ import annotations

from typing import Any, ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Input, Label, Static

from acidbase.fields import HCO3_SOURCES, NUMERIC, SAMPLE_TYPES, TEXT_FIELDS, FieldSpec

#: Plain names for the text fields (they carry no chemistry), in the form's order.
TEXT_TITLES = {"collected_at": "Collected", "patient_id": "Patient", "sample_id": "Sample id"}


class ValueInput(Input):
    """The text box of one numeric field (its id is the field name)."""


class ValueField(Widget):
    """One numeric field: title, value, unit, and the engine's message when refused.

    A grid of three cells (title, value, unit) and, only while a value is refused, a
    message across all three: few widgets per field keep each keystroke's layout cheap.
    """

    unit: reactive[str] = reactive("")
    """The unit the typed number is read in (UCUM); F2 cycles it."""

    class UnitChanged(Message):
        """The unit of a field was switched."""

        def __init__(self, field: ValueField) -> None:
            self.field = field
            super().__init__()

        @property
        def control(self) -> ValueField:
            return self.field

    def __init__(self, spec: FieldSpec) -> None:
        super().__init__(id=f"field-{spec.name}", classes="field-row")
        self.spec = spec
        self._message = ""
        self.set_reactive(ValueField.unit, spec.unit)

    def compose(self) -> ComposeResult:
        yield Label(self.spec.title, classes="field-title", markup=False)
        yield ValueInput(id=self.spec.name, compact=True, select_on_focus=False,
                         tooltip=self.spec.help)
        yield Label(self.unit, classes="field-unit", markup=False)

    def on_mount(self) -> None:
        self.input = self.query_one(ValueInput)
        self._unit_label = self.query_one(".field-unit", Label)
        self._message_box: Static | None = None

    @property
    def text(self) -> str:
        return self.input.value.strip()

    def watch_unit(self, unit: str) -> None:
        if self.is_mounted:
            self._unit_label.update(unit)

    def next_unit(self) -> bool:
        """Read the typed number in the field's next unit; False when it has only one."""
        units = self.spec.units
        if len(units) < 2:
            return False
        self.unit = units[(units.index(self.unit) + 1) % len(units)] if self.unit in units \
            else units[0]
        self.post_message(self.UnitChanged(self))
        return True

    def show_message(self, lines: list[str]) -> None:
        """Show the engine's messages for this field (none: clear)."""
        text = "\n".join(f"refused: {line}" for line in lines)
        if text != self._message:  # unchanged: no restyle, no new layout
            self._message = text
            if self._message_box is None:
                self._message_box = Static(text, classes="field-message", markup=False)
                self.mount(self._message_box)
            else:
                self._message_box.update(text)
            self.set_class(bool(lines), "-refused")

    @property
    def message(self) -> str:
        """The engine's messages shown beside the field ("" when none)."""
        return self._message


class ChoiceField(Widget, can_focus=True):
    """A field with a few fixed answers, cycled with the arrow keys or space."""

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
        # The brackets mark focus in words and shapes, not by colour alone.
        shown = f"< {self.value} >" if self.has_focus else f"  {self.value}  "
        return f"{self.title:<10}{shown}"

    def on_focus(self) -> None:
        self.refresh()

    def on_blur(self) -> None:
        self.refresh()

    def action_step(self, step: int) -> None:
        i = self.choices.index(self.value) if self.value in self.choices else 0
        self.value = self.choices[(i + step) % len(self.choices)]
        self.post_message(self.Changed(self))


class FoldTitle(Widget, can_focus=True):
    """The title of the group of more values; Enter folds or unfolds it."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter,space", "fold", "fold", show=False),
    ]

    def render(self) -> str:
        group = self.parent
        folded = isinstance(group, MoreValues) and group.folded
        return "+ More values (folded: F3)" if folded else "- More values (F3 folds)"

    def action_fold(self) -> None:
        if isinstance(self.parent, MoreValues):
            self.parent.folded = not self.parent.folded


class MoreValues(Vertical):
    """The optional values, as a group that can be folded away (then Tab skips them)."""

    folded: reactive[bool] = reactive(False)

    def watch_folded(self, folded: bool) -> None:
        for child in self.query_children(ValueField):
            child.display = not folded
        self.query_one(FoldTitle).refresh()


class TextInput(Input):
    """A free-text field (time, patient, sample id)."""


class EntryForm(VerticalScroll):
    """All the panel's fields: the required ones, the sample, more values, the labels."""

    class Edited(Message):
        """Something in the form changed (a value, a unit or a choice)."""

    def compose(self) -> ComposeResult:
        # Na+ and Cl- are optional (a bare gas is read) but stay in the first group, in the
        # order a report prints them.
        first = ("na", "cl")
        required = [s for s in NUMERIC if s.required or s.name in first]
        optional = [s for s in NUMERIC if not (s.required or s.name in first)]
        for spec in required:
            yield ValueField(spec)
        yield ChoiceField("sample_type", "Sample", SAMPLE_TYPES, "unknown")
        yield ChoiceField("hco3_source", "HCO3- from", HCO3_SOURCES, "unknown")
        with MoreValues(id="more"):
            yield FoldTitle(id="fold")
            for spec in optional:
                yield ValueField(spec)
        for name in sorted(TEXT_FIELDS, key=list(TEXT_TITLES).index):
            with Horizontal(classes="field-line text-line"):
                yield Label(TEXT_TITLES[name], classes="field-title", markup=False)
                yield TextInput(id=name, compact=True, max_length=200)
        yield Static("", id="panel-message", markup=False)

    _panel_text = ""

    def on_mount(self) -> None:
        # the form's widgets never change: look them up once, not on every keystroke
        self._fields = list(self.query(ValueField))
        self._choices = list(self.query(ChoiceField))
        self._texts = list(self.query(TextInput))
        self._panel_message = self.query_one("#panel-message", Static)

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
        """Show ``data`` in the form (as from an entry); posts one ``Edited``."""
        with self.prevent(Input.Changed, ValueField.UnitChanged, ChoiceField.Changed):
            for f in self.fields():
                value = data.get(f.spec.name)
                f.input.value = "" if value is None else str(value)
                f.unit = str(data.get(f"{f.spec.name}_unit") or f.spec.unit)
            for choice in self._choices:
                value = str(data.get(choice.id) or "unknown")
                choice.value = value if value in choice.choices else "unknown"
            for box in self._texts:
                box.value = str(data.get(box.id) or "")
        self.post_message(self.Edited())

    # -- showing what the engine said ----------------------------------------
    def show_problems(self, by_field: dict[str, list[str]]) -> None:
        """Messages beside their fields; those of the panel as a whole at the end."""
        for f in self.fields():
            f.show_message(by_field.get(f.spec.name, []))
        names = {f.spec.name for f in self._fields}
        rest = [line for name, lines in by_field.items() if name not in names for line in lines]
        text = "\n".join(f"refused: {line}" for line in rest)
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
