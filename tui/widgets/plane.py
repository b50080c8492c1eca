"""The pCO2-HCO3- plane drawn in text cells: the engine's bands and the panel's point.

The bands come from ``acidbase.plane_bands`` (the engine's own compensation
rules); this module only places them on a grid of characters.  Each band has
its own digit, each iso-pH line its own mark, and the legend names them in
words, so nothing depends on colour.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual.widget import Widget

import acidbase
from acidbase.fields import BY_NAME

BAND_MARKS = "123456789"
LINE_MARKS = ":.'~"
OVERLAP = "+"
POINT = "@"
LABEL_WIDTH = 4


def _known(x: float | None) -> bool:
    return x is not None and x > float("-inf")  # False for NaN: every comparison with it is


@dataclass
class Drawing:
    rows: list[str]
    """The plot, axes and tick labels, one string per terminal line."""
    legend: list[tuple[str, str]]
    """(mark, words) for every mark on the plot."""


def _steps(low: float, high: float, n: int) -> list[float]:
    return [low + (high - low) * i / (n - 1) for i in range(n)]


def draw(width: int, height: int, point: tuple[float, float] | None = None,
         pco2: tuple[float, float] = (10.0, 100.0),
         hco3: tuple[float, float] = (0.0, 50.0)) -> Drawing:
    """Draw the plane in ``width`` x ``height`` cells (axes included).

    ``point`` is (pCO2, HCO3-) in canonical units; the ranges widen to hold it.
    """
    p_lo, p_hi = pco2
    h_lo, h_hi = hco3
    if point is not None:
        p_lo, p_hi = min(p_lo, point[0] - 5), max(p_hi, point[0] + 5)
        h_lo, h_hi = min(h_lo, point[1] - 3), max(h_hi, point[1] + 3)
    cols = max(width - LABEL_WIDTH - 1, 10)
    lines = max(height - 2, 5)
    xs = _steps(p_lo, p_hi, cols)
    ys = _steps(h_hi, h_lo, lines)  # top row first
    cells = [[" "] * cols for _ in range(lines)]
    legend: list[tuple[str, str]] = []
    bands = acidbase.plane_bands(xs)
    n_band = n_line = 0
    for name, (low, high) in bands.items():
        low, high = low.tolist(), high.tolist()
        known = [(a, b) for a, b in zip(low, high) if _known(a)]
        is_line = bool(known) and all(a == b for a, b in known)
        if is_line:
            mark = LINE_MARKS[n_line % len(LINE_MARKS)]
            n_line += 1
            legend.append((mark, name))
        else:
            mark = BAND_MARKS[n_band % len(BAND_MARKS)]
            n_band += 1
            legend.append((mark, name))
        for c, (a, b) in enumerate(zip(low, high)):
            if not _known(a):
                continue
            rows = [r for r, y in enumerate(ys) if a <= y <= b]
            if not rows and a <= h_hi and b >= h_lo:
                # a band thinner than a row still shows, on its nearest row
                rows = [min(range(lines), key=lambda r: abs(ys[r] - (a + b) / 2))]
            for r in rows:
                here = cells[r][c]
                if is_line:
                    if here == " ":
                        cells[r][c] = mark
                elif here == " " or here in LINE_MARKS:
                    cells[r][c] = mark
                elif here != mark:
                    cells[r][c] = OVERLAP
    legend.append((OVERLAP, "overlap"))
    if point is not None:
        c = round((point[0] - p_lo) / (p_hi - p_lo) * (cols - 1))
        r = round((h_hi - point[1]) / (h_hi - h_lo) * (lines - 1))
        cells[r][c] = POINT
        where = (f"this panel: pCO2 {point[0]:.4g} {BY_NAME['pco2'].unit}, "
                 f"HCO3- {point[1]:.4g} {BY_NAME['hco3'].unit}")
        legend.append((POINT, where))
    rows = []
    every = max(lines // 5, 1)
    for r, y in enumerate(ys):
        label = f"{y:>{LABEL_WIDTH - 1}.0f}" if r % every == 0 else " " * (LABEL_WIDTH - 1)
        rows.append(f"{label}|{''.join(cells[r])}")
    axis = ["-"] * cols
    ticks = [" "] * (cols + LABEL_WIDTH + 4)
    tick = 10 * int(p_lo // 10 + 1)
    free = 0
    while tick <= p_hi:
        c = round((tick - p_lo) / (p_hi - p_lo) * (cols - 1))
        if c >= free:
            axis[c] = "+"
            for k, ch in enumerate(f"{tick}"):
                ticks[LABEL_WIDTH + c + k] = ch
            free = c + 6
        tick += 10
    rows.append(" " * (LABEL_WIDTH - 1) + "+" + "".join(axis))
    rows.append("".join(ticks).rstrip())
    return Drawing(rows, legend)


class PlaneView(Widget):
    """The drawing, sized to the widget; ``point`` is set by its screen."""

    def __init__(self, point: tuple[float, float] | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.point = point

    def drawing(self) -> Drawing:
        size = self.content_region.size
        return draw(max(size.width, 20), max(size.height, 7), self.point)

    def render(self) -> Text:
        text = Text("\n".join(self.drawing().rows), no_wrap=True)
        text.highlight_words([POINT], "bold reverse")
        return text


def legend_lines(legend: list[tuple[str, str]], width: int) -> list[str]:
    """The legend packed into lines of ``width``; no item is split."""
    lines: list[str] = []
    line = ""
    for mark, words in legend:
        item = f"{mark} {words}"
        if line and len(line) + 3 + len(item) > width:
            lines.append(line)
            line = ""
        line = f"{line}   {item}" if line else item
    if line:
        lines.append(line)
    return lines
