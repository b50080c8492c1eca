"""The reading: trust first, then the processes, then the derived values.

Every line comes from the Interpretation: its consistency status, its
disorders' labels and its findings' text.  Each finding is an option that opens
its working and sources.  Severity is always written as a word.
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Vertical
from textual.content import Content
from textual.widgets import OptionList, Static
from textual.widgets.option_list import Option

import acidbase
from acidbase.fields import NUMERIC

from ..labels import on_screen

#: The three questions, in the order they are answered.
SECTIONS: tuple[tuple[str, str], ...] = (
    ("trust", "Trust"),
    ("process", "Processes"),
    ("detail", "Derived values"),
)

#: Severity marks: the word itself, padded so the statements line up.
MARKS = {"critical": "CRITICAL", "caution": "caution ", "info": "info    "}


def heading(section: str, title: str, it: acidbase.Interpretation) -> str:
    """The heading of one section, with the summary the Interpretation gives for it."""
    if section == "trust":
        status = it.consistency.status if it.consistency else "not assessable"
        return f"{title}: consistency {status}"
    if section == "process":
        labels = "; ".join(d.label() for d in it.disorders) or "none"
        return f"{title}: {labels}"
    return title


def verdict(it: acidbase.Interpretation | None, stale: bool = False, why: str = "") -> str:
    """The pinned line: the trust verdict and the processes, in one sentence.

    ``why``: without a reading, what stands in its way, in the reading pane's words
    ("Refused: pCO2 (see under the field).", "No reading yet: key in HCO3-.")."""
    if it is None:
        if why:
            return f"Verdict: none - {why}"
        return ("Verdict: none yet - key in "
                + ", ".join(s.title for s in NUMERIC if s.required) + ".")
    if it.status == "refused":
        return "Verdict: not assessable - the engine refused the panel."
    status = it.consistency.status if it.consistency else "not assessable"
    labels = "; ".join(d.label() for d in it.disorders) or "none found"
    lead = "STALE (the form holds a refused value): " if stale else ""
    return f"{lead}Trust: {status} | Processes: {labels}"


class VerdictLine(Static):
    """The verdict, pinned above the caution so it is on screen whatever scrolls."""

    def __init__(self, **kwargs) -> None:
        super().__init__(verdict(None), markup=False, **kwargs)
        self.text = verdict(None)

    def show(self, text: str) -> None:
        if text != self.text:
            self.text = text
            self.update(text)


class ReadingState(Static):
    """One sentence on the state of the reading (none when it is fresh)."""

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self._text = None

    def update(self, content: str = "") -> None:  # type: ignore[override]
        if content != self._text:  # unchanged: no new layout
            self._text = content
            super().update(content)
            self.set_class(not content, "-empty")


class FindingList(OptionList):
    """The reading's lines; a finding's option id is ``finding-<index>``."""


class ReadingPane(Vertical):
    """The current reading, or the last accepted one marked stale."""

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.reading: acidbase.Interpretation | None = None
        """The Interpretation shown (the last accepted one when stale)."""
        self.stale = False
        """True when the form now holds values the engine refuses."""
        self._shown = False
        self._store: tuple[str, list[str]] | None = None

    def compose(self) -> ComposeResult:
        yield ReadingState("", id="reading-state", markup=False)
        yield FindingList(id="findings")

    def on_mount(self) -> None:
        self.show(None)

    def show(self, it: acidbase.Interpretation | None, stale_because: str = "",
             store: tuple[str, list[str]] | None = None) -> None:
        """Show a fresh reading (``it``), or mark the shown one stale (``stale_because``).

        ``store``: the history store's heading and lines, shown after the reading.
        """
        state = self.query_one("#reading-state", ReadingState)
        if stale_because:
            self.stale = self.reading is not None
            if self.stale:
                state.update(f"STALE: the last accepted reading, not what the form holds now. "
                             f"{stale_because}")
            else:
                state.update(stale_because)
                if self._shown:
                    self.query_one(FindingList).clear_options()
                    self._shown = False
            self.set_class(self.stale, "-stale")
            return
        self.stale = False
        self.set_class(False, "-stale")
        if it is not None and it == self.reading and self._shown and store == self._store:
            return  # the same reading again (e.g. a trailing zero typed): nothing to redraw
        self.reading = it
        self._store = store
        self._shown = it is not None
        options = self.query_one(FindingList)
        options.clear_options()
        if it is None:
            state.update("No reading yet: key in "
                         + ", ".join(s.title for s in NUMERIC if s.required) + ".")
            return
        if it.status == "refused":
            state.update("Refused: " + "; ".join(map(str, it.problems)))
            return
        state.update("")
        lines = []
        for section, title in SECTIONS:
            lines.append(Option(Content.from_markup("[b]$text[/b]",
                                                    text=on_screen(heading(section, title,
                                                                           it))),
                                id=section, disabled=True))
            lines += [Option(Content(on_screen(f"{MARKS.get(f.severity, f.severity)} {f.text}")),
                             id=f"finding-{i}")
                      for i, f in enumerate(it.findings) if f.section == section]
        if store is not None:
            title, texts = store
            lines.append(Option(Content.from_markup("[b]$text[/b]", text=on_screen(title)),
                                id="store", disabled=True))
            lines += [Option(Content(on_screen(t)), id=f"store-{i}")
                      for i, t in enumerate(texts)]
        options.add_options(lines)  # one update of the list, not one per line
        first = next((k for k, line in enumerate(lines) if not line.disabled), None)
        if first is not None:
            options.highlighted = first

    def forget(self) -> None:
        """Drop the shown reading: the next one is a new panel's, so nothing can be stale."""
        self.reading = None

    def lines(self) -> list[str]:
        """The text of every line shown (for tests and the tmux check)."""
        options = self.query_one(FindingList)
        return [str(options.get_option_at_index(i).prompt) for i in range(options.option_count)]
