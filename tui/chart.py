"""The report saved or copied for the chart: whose it is, when, with what, then the reading.

The reading itself is the library's report (``acidbase.report``), re-wrapped at 80
columns; the app adds only the header a chart needs: patient and sample ids, the
collection time, the time of the reading, the tool version, the site settings in
force and the values as keyed, with their units (UCUM, as in every file).  The
full caution leads and ends every report.
"""

from __future__ import annotations

import dataclasses
import re
import textwrap
from datetime import datetime
from typing import Any

import acidbase
from acidbase.fields import BY_NAME

from .labels import GAS

WIDTH = 80


def _wrap_line(line: str, markdown: bool) -> list[str]:
    if len(line) <= WIDTH or (markdown and line.lstrip().startswith("|")):
        return [line]
    indent = line[: len(line) - len(line.lstrip())]
    body = line.lstrip()
    more = indent
    if markdown and body.startswith("> "):
        more = indent + "> "
    elif body.startswith("- "):
        more = indent + "  "
    hard_break = markdown and line.endswith("  ")
    out = textwrap.wrap(line, WIDTH, subsequent_indent=more, break_on_hyphens=False)
    if hard_break and out:
        out[-1] += "  "
    return out or [line]


def wrap(text: str, markdown: bool = False) -> str:
    """Every line at most 80 columns (Markdown tables stay whole)."""
    return "\n".join(piece for line in text.splitlines() for piece in _wrap_line(line, markdown))


def settings_words(settings: acidbase.Settings) -> str:
    """Every site setting as ``name = value``, defaults included (what was in force)."""
    if dataclasses.is_dataclass(settings):
        items = dataclasses.asdict(settings).items()
    else:  # pragma: no cover - a settings object of another shape
        items = vars(settings).items()
    return "; ".join(f"{k} = {v}" for k, v in items)


def keyed_values(data: dict[str, Any]) -> list[str]:
    """The values as keyed, each with its unit, gas first then the library's order."""
    names = [*GAS, *(n for n in BY_NAME if n not in GAS)]
    return [f"{BY_NAME[n].title} {data[n]} {data.get(f'{n}_unit') or BY_NAME[n].unit}"
            for n in names if data.get(n) not in (None, "")]


def _sanitise(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")[:40]


def default_name(data: dict[str, Any], when: datetime, suffix: str) -> str:
    """``acidbase-<sample id>-<YYYYmmdd-HHMM>.<suffix>`` (``panel`` without a sample id)."""
    sample = _sanitise(str(data.get("sample_id") or "")) or "panel"
    return f"acidbase-{sample}-{when:%Y%m%d-%H%M}.{suffix}"


def chart_report(reading: acidbase.Interpretation, data: dict[str, Any],
                 settings: acidbase.Settings, read_at: datetime, markdown: bool = False) -> str:
    """The report for the chart, as plain text or Markdown, wrapped at 80 columns."""
    from acidbase.report import as_markdown, as_text

    def given(name: str) -> str:
        return str(data.get(name) or "not given")

    header = [
        ("Patient id", given("patient_id")),
        ("Sample id", given("sample_id")),
        ("Collected", given("collected_at")),
        ("Read at", read_at.isoformat(timespec="seconds")),
        ("Tool", f"acidbase {acidbase.__version__} (terminal app)"),
        ("Site settings", settings_words(settings)),
        ("Values as keyed", "; ".join(keyed_values(data))),
        ("Sample", (f"{data.get('sample_type', 'unknown')}; HCO3- source: "
                    f"{data.get('hco3_source', 'unknown')}; pregnancy: "
                    f"{data.get('pregnancy', 'unknown')}")),
    ]
    if markdown:
        head = ["# acidbase reading for the chart", ""]
        head += [f"- **{k}:** {v}" for k, v in header]
        body = as_markdown(reading)
    else:
        head = ["acidbase reading for the chart", ""]
        head += [f"{k}: {v}" for k, v in header]
        body = as_text(reading)
    text = "\n".join(head) + "\n\n" + body.rstrip("\n") + "\n"
    if " ".join(acidbase.CAUTION.split()) not in " ".join(text.split()):
        text += "\n" + acidbase.CAUTION + "\n"
    return wrap(text, markdown) + "\n"
