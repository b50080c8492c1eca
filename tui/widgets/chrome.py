"""What every screen carries: a title line and the caution."""

from __future__ import annotations

from rich.text import Text
from textual.binding import Binding
from textual.widgets import DataTable, Static

import acidbase

from ..keys import OwnKeys

#: The caution in at most two rows at 80 columns; F1 shows it in full (``acidbase.CAUTION``),
#: and every saved report carries the full text.
SHORT_CAUTION = ("Caution: supports, never replaces, licensed clinicians and the local "
                 "laboratory's protocols; no treatment advice. F1: the full caution.")


class CautionBar(Static):
    """The caution on every screen: short here, in full on the help screen (F1)."""

    def __init__(self, full: bool = False, **kwargs) -> None:
        super().__init__(acidbase.CAUTION if full else SHORT_CAUTION, markup=False,
                         classes="caution", **kwargs)


class TitleLine(Static):
    """One line saying where the user is."""

    def __init__(self, text: str = "", **kwargs) -> None:
        super().__init__(text, markup=False, classes="title-line", **kwargs)


def key_words(keys: str, short: bool = False) -> str:
    """``"escape,f4"`` -> ``"Esc / F4"``; ``"ctrl+s"`` -> ``"Ctrl+S"`` (short: ``"^S"``)."""
    names = {"escape": "Esc", "enter": "Enter", "space": "Space", "left": "Left",
             "right": "Right", "delete": "Delete"}
    out = []
    for key in keys.split(","):
        parts = key.strip().split("+")
        word = "+".join(names.get(p, p.capitalize() if len(p) > 1 else p.upper())
                        for p in parts)
        out.append(word.replace("Ctrl+", "^") if short else word)
    return " / ".join(out)


class KeyLine(Static):
    """The screen's main keys in one line (a plain line: it does not follow the focus)."""

    def __init__(self, bindings: list[Binding], **kwargs) -> None:
        shown = [b for b in bindings if b.show]
        text = "  ".join(f"{key_words(b.key.split(',')[0], short=True)} {b.description}"
                         for b in shown)
        super().__init__(text, markup=False, classes="key-line", **kwargs)


class PlainTable(OwnKeys, DataTable):
    """A table whose cells are plain text: units such as [pH] are not markup."""

    def add_row(self, *cells: object, **kwargs):  # type: ignore[override]
        return super().add_row(*(Text(str(c)) for c in cells), **kwargs)
