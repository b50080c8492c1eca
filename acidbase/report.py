"""Rendering an Interpretation: a plain-text report, Markdown, and the JSON document.

Every rendering starts with the caution.  Severity is always written as a word
("critical", "caution", "info"), never carried by colour alone.
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from .codes import DERIVED_UNITS
from .fields import BY_NAME
from .precision import DECIMALS
from .rules import number_text

if TYPE_CHECKING:
    from .results import Interpretation

SCHEMA = "acidbase.interpretation/1"

QUESTIONS = {
    "trust": "1. Can these numbers be trusted?",
    "process": "2. Which acid-base processes are present?",
    "detail": "3. What follows: derived values",
}

#: Labels of derived values for the text report (key, label, unit, format); the
#: decimals are ``results.DECIMALS``, the one precision table of every surface.
DERIVED_LABELS: tuple[tuple[str, str, str, str], ...] = tuple(
    (key, label, unit, f"{sign}.{DECIMALS[key]}f") for key, label, unit, sign in (
        ("hco3_calculated", "HCO3- calculated (Henderson-Hasselbalch)", "mmol/L", ""),
        ("h_nmol_per_l", "[H+]", "nmol/L", ""),
        ("total_co2_calculated", "Total CO2 calculated", "mmol/L", ""),
        ("anion_gap", "Anion gap (without K+)", "mmol/L", ""),
        ("anion_gap_k", "Anion gap (with K+)", "mmol/L", ""),
        ("anion_gap_corrected", "Anion gap, albumin-corrected", "mmol/L", ""),
        ("delta_ratio", "Delta ratio", "", ""),
        ("delta_gap", "Delta gap", "mmol/L", "+"),
        ("standard_base_excess", "Standard base excess", "mmol/L", "+"),
        ("expected_pco2_low", "Expected pCO2, low", "mm[Hg]", ""),
        ("expected_pco2_high", "Expected pCO2, high", "mm[Hg]", ""),
        ("sid_apparent", "Strong ion difference, apparent", "mEq/L", ""),
        ("sid_effective", "Strong ion difference, effective", "mEq/L", ""),
        ("strong_ion_gap", "Strong ion gap", "mEq/L", ""),
        ("osmolality_calculated", "Osmolality, calculated", "mosm/kg", ""),
        ("osmolal_gap", "Osmolal gap", "mosm/kg", ""),
        ("alveolar_po2", "Alveolar pO2", "mm[Hg]", ""),
        ("aa_gradient", "A-a gradient", "mm[Hg]", ""),
        ("aa_expected", "A-a gradient, age-expected upper", "mm[Hg]", ""),
        ("pf_ratio", "PaO2/FiO2", "mm[Hg]", ""),
    )
)


def as_json_dict(it: Interpretation) -> dict[str, Any]:
    """The ``check --json`` document."""
    return {
        "schema": SCHEMA,
        "caution": it.caution,
        "status": it.status,
        "problems": [str(p) for p in it.problems],
        "sample_type": it.sample_type,
        "hco3_source": it.hco3_source,
        "inputs": it.inputs,
        "consistency": it.consistency.as_dict() if it.consistency else
        {"status": "not assessable"},
        "disorders": [d.as_dict() for d in it.disorders],
        "derived": dict(it.derived),
        "derived_units": dict(DERIVED_UNITS),
        "findings": [f.as_dict() for f in it.findings],
        "settings": it.settings,
        # what the reader read off the cells, present only when there was something
        **({"qualifiers": list(it.qualifiers)} if it.qualifiers else {}),
        **({"lab_flags": list(it.lab_flags)} if it.lab_flags else {}),
    }


#: Text reports fit an 80-column terminal, the width the terminal app is built for
#: (docs/tui.md; common practice, no source).
TEXT_WIDTH = 80


def wrap_lines(text: str, indent: str = "", width: int = TEXT_WIDTH,
               hang: str | None = None) -> list[str]:
    """``text`` as lines of at most ``width`` columns, the first led by ``indent``, the
    others by ``hang`` (default: ``indent``)."""
    rest = indent if hang is None else hang
    # Whole words only: "low-flow", "Henderson-Hasselbalch" and "7.35-7.45" stay on one line.
    return textwrap.wrap(text, width=width, initial_indent=indent, subsequent_indent=rest,
                         break_on_hyphens=False) or [indent]


#: The panel's identity as ``as_text`` names it (text fields given with the panel).
IDENTITY_LABELS = {"sample_id": "Sample id", "patient_id": "Patient id",
                   "collected_at": "Collected at"}


def shown_text(text: str) -> str:
    """Free text as printed: control characters (a terminal's escape sequences, line
    breaks) written as escapes, so an id cannot move the cursor or forge a line."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


def as_text(it: Interpretation, width: int = TEXT_WIDTH, working: bool = True,
            identity: Mapping[str, str] | None = None) -> str:
    """A readable report: caution, the panel's identity (``identity``: the sample id,
    patient id and collection time given, ``IDENTITY_LABELS``), the three questions in
    order, then sources."""
    lines: list[str] = []
    lines += wrap_lines(it.caution, "", width)
    lines.append("")
    named = [f"{IDENTITY_LABELS[k]}: {shown_text(v)}" for k, v in (identity or {}).items()
             if k in IDENTITY_LABELS and v is not None]
    if named:
        lines += wrap_lines("; ".join(named), "", width)
    if it.status == "refused":
        lines.append("Panel refused; nothing was interpreted:")
        for p in it.problems:
            lines += wrap_lines(str(p), "  - ", width)
        return "\n".join(lines) + "\n"
    lines.append(f"Sample: {it.sample_type}; HCO3- source: {it.hco3_source}")
    shown = []
    for name, item in it.inputs.items():
        spec = BY_NAME[name]
        unit = "" if item["unit"] in ("1", "[pH]") else f" {item['unit']}"
        shown.append(f"{spec.title} {item['value']:.6g}{unit}")
    lines += wrap_lines("Inputs (canonical units): " + ", ".join(shown), "", width)
    if it.qualifiers:
        lines += wrap_lines("Censored values, read as not measured: " + ", ".join(it.qualifiers),
                       "", width)
    if it.lab_flags:
        lines += wrap_lines("Laboratory flags read off the values: " + ", ".join(it.lab_flags),
                       "", width)
    cited: dict[str, Any] = {}
    for section, heading in QUESTIONS.items():
        lines.append("")
        lines.append(heading)
        if section == "process":
            labels = "; ".join(d.label() for d in it.disorders) or "none"
            lines += wrap_lines(f"Disorders: {labels}", "  ", width)
        if section == "detail":
            for key, label, unit, fmt in DERIVED_LABELS:
                value = it.derived.get(key)
                if value is not None:
                    lines.append(f"  {label:<44} {number_text(value, fmt):>8} {unit}")
        for f in it.in_section(section):
            lines += wrap_lines(f"[{f.severity}] {f.code}: {f.text}", "  ", width)
            if working:
                lines += wrap_lines(f"working: {f.working}", "      ", width)
            lines += wrap_lines("source: " + "; ".join(c.short() for c in f.citations), "      ", width)
            for c in f.citations:
                cited[c.key] = c
    lines.append("")
    lines.append("Sources")
    for c in cited.values():
        lines += wrap_lines(c.full(), "  - ", width, hang="    ")
    lines.append("")
    lines += wrap_lines(it.caution, "", width)
    return "\n".join(lines) + "\n"


def as_markdown(it: Interpretation) -> str:
    """The same report as Markdown (for saving from the terminal app)."""
    out = [f"> {it.caution}", ""]
    if it.status == "refused":
        out.append("**Panel refused.**")
        out += [f"- {p}" for p in it.problems]
        return "\n".join(out) + "\n"
    out.append(f"Sample: {it.sample_type}; HCO3- source: {it.hco3_source}")
    out.append("")
    out.append("| Input | Value | Unit |")
    out.append("|---|---|---|")
    for name, item in it.inputs.items():
        out.append(f"| {BY_NAME[name].title} | {item['value']:.6g} | {item['unit']} |")
    cited: dict[str, Any] = {}
    for section, heading in QUESTIONS.items():
        out += ["", f"## {heading}", ""]
        if section == "process":
            out.append("Disorders: " + ("; ".join(d.label() for d in it.disorders) or "none"))
            out.append("")
        if section == "detail":
            out += ["| Derived value | Value | Unit |", "|---|---|---|"]
            for key, label, unit, fmt in DERIVED_LABELS:
                value = it.derived.get(key)
                if value is not None:
                    out.append(f"| {label} | {number_text(value, fmt)} | {unit} |")
            out.append("")
        for f in it.in_section(section):
            out.append(f"- **{f.severity}** `{f.code}`: {f.text}  ")
            out.append(f"  working: {f.working}  ")
            out.append("  source: " + "; ".join(c.short() for c in f.citations))
            for c in f.citations:
                cited[c.key] = c
    out += ["", "## Sources", ""]
    out += [f"- {c.full()}" for c in cited.values()]
    out += ["", f"> {it.caution}"]
    return "\n".join(out) + "\n"
