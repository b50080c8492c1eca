"""What every screen carries: a title line and the caution."""

from __future__ import annotations

from textual.widgets import Static

import acidbase


class CautionBar(Static):
    """The library's caution, in full, on every screen."""

    def __init__(self, **kwargs) -> None:
        super().__init__(acidbase.CAUTION, markup=False, classes="caution", **kwargs)


class TitleLine(Static):
    """One line saying where the user is."""

    def __init__(self, text: str = "", **kwargs) -> None:
        super().__init__(text, markup=False, classes="title-line", **kwargs)
