"""Two kept panels side by side, with what changed between them."""

from __future__ import annotations

from typing import TYPE_CHECKING, ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Static

import acidbase
from acidbase.fields import NUMERIC
from acidbase.report import DERIVED_LABELS
from acidbase.rules import number_text

from ..labels import reported, unit_label, with_unit
from ..widgets.chrome import CautionBar, KeyLine, PlainTable, TitleLine

if TYPE_CHECKING:
    from ..app import AcidBaseApp


class CompareTable(PlainTable):
    """Rows: inputs, consistency, derived values; columns: A, B, B - A and the unit."""



def _num(x: float | None, fmt: str = ".4g") -> str:
    return "" if x is None else number_text(x, fmt)


def _change(a: float | None, b: float | None, fmt: str = ".4g") -> str:
    if a is None or b is None:
        return "" if a is None and b is None else "only one"
    return number_text(b - a, "+" + fmt.lstrip("+"))


class CompareScreen(Screen[None]):
    """Panel A (earlier) and panel B (later) of the series."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("f6", "step(-1)", "B earlier", tooltip="Compare with an earlier panel as B.",
                id="compare-earlier", priority=True),
        Binding("f7", "step(1)", "B later", tooltip="Compare with a later panel as B.",
                id="compare-later", priority=True),
        Binding("escape,f8", "app.pop_screen", "back", tooltip="Back.", id="compare-back", priority=True),
    ]

    app: AcidBaseApp

    def __init__(self, a: int, b: int) -> None:
        super().__init__()
        self.a, self.b = a, b

    def compose(self) -> ComposeResult:
        yield TitleLine("", id="compare-title")
        yield CompareTable(id="compare", zebra_stripes=True, cursor_type="row")
        yield Static("", id="compare-processes", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_mount(self) -> None:
        table = self.query_one(CompareTable)
        # widths that fit 80 columns; a long label is cut, its unit has a column of its own
        for label, width in (("", 27), ("A", 12), ("B", 12), ("B - A", 8), ("unit", 7)):
            table.add_column(label, width=width)
        self.fill()
        self.query_one(CompareTable).focus()

    def action_step(self, step: int) -> None:
        n = len(self.app.sitting.entries)
        b = self.b + step
        if b == self.a:
            b += step
        if 0 <= b < n:
            self.b = b
            self.fill()

    def _read(self, i: int) -> tuple[acidbase.Panel | None, acidbase.Interpretation | None]:
        panel = self.app.sitting.entries[i].panel()
        return panel, (acidbase.interpret(panel, self.app.settings) if panel else None)

    def fill(self) -> None:
        entries = self.app.sitting.entries
        (pa, ia), (pb, ib) = self._read(self.a), self._read(self.b)
        self.query_one("#compare-title", TitleLine).update(
            f"acidbase - compare - A: panel {self.a + 1} {entries[self.a].label()} - "
            f"B: panel {self.b + 1} {entries[self.b].label()}")
        table = self.query_one(CompareTable)
        table.clear()
        for spec in NUMERIC:
            row = self._input_row(spec.name, (self.a, pa), (self.b, pb))
            if row is not None:
                table.add_row(spec.title, *row)
        sa = ia.consistency.status if ia and ia.consistency else "refused"
        sb = ib.consistency.status if ib and ib.consistency else "refused"
        table.add_row("consistency", sa, sb, "same" if sa == sb else "changed", "")
        for key, label, unit, fmt in DERIVED_LABELS:
            va = ia.derived.get(key) if ia else None
            vb = ib.derived.get(key) if ib else None
            if va is not None or vb is not None:
                table.add_row(label, _num(va, fmt), _num(vb, fmt), _change(va, vb, fmt), unit_label(unit))
        self.query_one("#compare-processes", Static).update("\n".join(self._words(ia, ib)))

    def _input_row(self, name: str, *panels: tuple[int, acidbase.Panel | None]
                   ) -> tuple[str, str, str, str] | None:
        """A, B, B - A and the unit of one input, each value as it was reported: in the
        unit it was keyed in, with its decimals (5.3 kPa stays 5.3 kPa, 24.0 stays 24.0).
        Two values in different units are shown each with its unit, and no change (a
        difference in a unit neither was reported in would claim digits none carried)."""
        shown: list[tuple[str, float, str] | None] = []
        for i, panel in panels:
            value = getattr(panel, name) if panel is not None else None
            if value is None:
                shown.append(None)
                continue
            entry = self.app.sitting.entries[i]
            decimal = entry.reading_context().get("decimal", ".")
            shown.append((reported(name, value, entry.data.get(name), decimal), value,
                          getattr(panel, f"{name}_unit")))
        if not any(shown):
            return None
        units = {cell[2] for cell in shown if cell}
        if len(units) > 1:
            return (*(with_unit(c[0], c[2]) if c else "" for c in shown), "", "differ")
        a, b = shown
        unit = unit_label(units.pop())
        if a is None or b is None:
            return (a[0] if a else "", b[0] if b else "", "only one", unit)
        # the change to the decimals of the more precise of the two shown values
        decimals = max(len(text.partition(".")[2]) for text, _, _ in (a, b))
        return a[0], b[0], _change(a[1], b[1], f".{decimals}f"), unit

    @staticmethod
    def _words(ia: acidbase.Interpretation | None,
               ib: acidbase.Interpretation | None) -> list[str]:
        def labels(it: acidbase.Interpretation | None) -> str:
            if it is None:
                return "refused by the engine"
            return "; ".join(d.label() for d in it.disorders) or "none"

        lines = [f"A processes: {labels(ia)}", f"B processes: {labels(ib)}"]
        if ia and ib:
            ta = {f.title for f in ia.findings}
            tb = {f.title for f in ib.findings}
            gone = [f.title for f in ia.findings if f.title not in tb]
            new = [f.title for f in ib.findings if f.title not in ta]
            lines.append("Only in A: " + ("; ".join(gone) or "nothing"))
            lines.append("Only in B: " + ("; ".join(new) or "nothing"))
        return lines
