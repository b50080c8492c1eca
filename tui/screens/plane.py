"""The panel's point on the pCO2-HCO3- plane, with the engine's expected bands."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Static

import acidbase
from acidbase.fields import BY_NAME

from ..labels import on_screen, unit_label
from ..widgets.chrome import CautionBar, KeyLine, TitleLine
from ..widgets.plane import POINT, PlaneView, legend_lines


def point_of(it: acidbase.Interpretation | None) -> tuple[float, float] | None:
    """The reading's (pCO2, HCO3-) in canonical units, as the engine normalised them."""
    if it is None or "pco2" not in it.inputs or "hco3" not in it.inputs:
        return None
    return it.inputs["pco2"]["value"], it.inputs["hco3"]["value"]


class PlaneScreen(Screen[None]):
    """A picture of where the panel sits among the simple disorders' bands."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,f4", "app.pop_screen", "back", tooltip="Back to the entry.",
                id="plane-back", priority=True),
    ]

    def __init__(self, it: acidbase.Interpretation | None, stale: bool = False) -> None:
        super().__init__()
        self.point = point_of(it)
        self.stale = stale

    def compose(self) -> ComposeResult:
        axes = (f"HCO3- {unit_label(BY_NAME['hco3'].unit)} (up), pCO2 "
                f"{unit_label(BY_NAME['pco2'].unit)} (across)")
        if self.stale:  # first, so that an 80-column title never cuts it off
            title = f"acidbase - plane - STALE: @ is the last accepted panel - {axes}"
        else:
            what = "no panel read yet" if self.point is None else "@ is the panel"
            title = f"acidbase - plane - {axes} - {what}"
        yield TitleLine(title)
        yield PlaneView(self.point, id="plane")
        yield Static("", id="legend", markup=False)
        yield CautionBar()
        yield KeyLine([*self.BINDINGS, *self.app.BINDINGS])

    def on_resize(self) -> None:
        self.call_after_refresh(self.show_legend)

    def on_mount(self) -> None:
        self.call_after_refresh(self.show_legend)

    def show_legend(self) -> None:
        legend = self.query_one(PlaneView).drawing().legend
        if self.stale:
            legend = [(m, f"STALE, the last accepted {w.removeprefix('this ')}" if m == POINT
                       else w) for m, w in legend]
        width = self.query_one("#legend", Static).content_region.width or 78
        self.query_one("#legend", Static).update(
            on_screen("\n".join(legend_lines(legend, width))))
