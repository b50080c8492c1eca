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


#: Keys the key line shows at any width: help, quit (the app's keys) and the way back (Esc).
ALWAYS_SHOWN_IDS = frozenset({"help", "quit"})


def _always(binding: Binding) -> bool:
    return binding.id in ALWAYS_SHOWN_IDS or "escape" in binding.key.split(",")


class KeyLine(Static):
    """The screen's main keys in one line (a plain line: it does not follow the focus).

    Help (F1), quit (Ctrl+Q) and the way back (Esc) are shown at any width; the screen's
    other keys fill the rest of the line, in their order, as many as fit (F1 lists them
    all).  At 60 columns the entry screen's line ran past the edge and hid Ctrl+Q."""

    def __init__(self, bindings: list[Binding], **kwargs) -> None:
        self.items = [(f"{key_words(b.key.split(',')[0], short=True)} {b.description}",
                       _always(b)) for b in bindings if b.show]
        super().__init__(self.fitted(10_000), markup=False, classes="key-line", **kwargs)

    def fitted(self, width: int) -> str:
        """The keys that fit in ``width`` cells: every key that is always shown, then the
        others in order while they fit."""
        gap = 2
        used = sum(len(text) for text, always in self.items if always)
        used += gap * max(0, sum(1 for _, always in self.items if always) - 1)
        shown = []
        for text, always in self.items:
            if always:
                shown.append(text)
            elif used + gap + len(text) <= width:
                shown.append(text)
                used += gap + len(text)
        return (" " * gap).join(shown)

    @property
    def text(self) -> str:
        """The line as drawn at the widget's width."""
        return self.fitted(self.content_region.width or 10_000)

    def on_resize(self) -> None:
        self.update(self.text)


class PlainTable(OwnKeys, DataTable):
    """A table whose cells are plain text: units such as [pH] are not markup."""

    def add_row(self, *cells: object, **kwargs):  # type: ignore[override]
        return super().add_row(*(Text(str(c)) for c in cells), **kwargs)
