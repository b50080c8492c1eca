"""The project's own code systems: rule codes, derived values, processes.

Findings, derived values and disorders have no verified code in LOINC or SNOMED CT
that means exactly what the kernel computes, so every surface that needs a code
(the FHIR output, ``check --json``) takes it from here, and the FHIR CodeSystem
resources in ``docs/fhir/`` are generated from these tables by
``python -m acidbase.codes`` (a test fails when they are stale), as docs/rules.md
is generated from the rule table.

The canonical URLs use the reserved top-level domain ``.invalid`` (RFC 2606,
Eastlake & Panitz, "Reserved Top Level DNS Names", IETF 1999): the project has no
web home yet, and a placeholder that can never resolve is safer than one that
might belong to someone else.  Replace ``CODE_SYSTEM_BASE`` once it has one.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

from .engine import SLOTS
from .rules import RULES

CODE_SYSTEM_BASE = "https://acidbase.invalid/fhir/CodeSystem"
RULE_SYSTEM = f"{CODE_SYSTEM_BASE}/rule"
DERIVED_SYSTEM = f"{CODE_SYSTEM_BASE}/derived"
PROCESS_SYSTEM = f"{CODE_SYSTEM_BASE}/process"
REPORT_SYSTEM = f"{CODE_SYSTEM_BASE}/report"

#: The one report code: "acid-base reading of a blood-gas and electrolyte panel".
READING_CODE = ("acid-base-reading", "Acid-base reading of a blood-gas and electrolyte panel")

#: Each derived value: (title, UCUM unit).  Units are those of the formulas in
#: docs/methods.md; UCUM codes per the UCUM specification (Schadow & McDonald,
#: "The Unified Code for Units of Measure", Regenstrief Institute, v2.2, 2024):
#: ``meq/L`` for strong-ion quantities (charge), ``1`` for a ratio.
DERIVED_INFO: dict[str, tuple[str, str]] = {
    "hco3_calculated": ("HCO3- calculated (Henderson-Hasselbalch)", "mmol/L"),
    "total_co2_calculated": ("Total CO2 calculated", "mmol/L"),
    "h_nmol_per_l": ("Hydrogen ion concentration [H+]", "nmol/L"),
    "anion_gap": ("Anion gap without K+", "mmol/L"),
    "anion_gap_k": ("Anion gap with K+", "mmol/L"),
    "anion_gap_corrected": ("Anion gap, albumin-corrected", "mmol/L"),
    "delta_ratio": ("Delta ratio", "1"),
    "delta_gap": ("Delta gap", "mmol/L"),
    "standard_base_excess": ("Standard base excess", "mmol/L"),
    "expected_pco2_low": ("Expected pCO2, low limit", "mm[Hg]"),
    "expected_pco2_high": ("Expected pCO2, high limit", "mm[Hg]"),
    "expected_hco3_acute_low": ("Expected HCO3-, acute, low limit", "mmol/L"),
    "expected_hco3_acute_high": ("Expected HCO3-, acute, high limit", "mmol/L"),
    "expected_hco3_chronic_low": ("Expected HCO3-, chronic, low limit", "mmol/L"),
    "expected_hco3_chronic_high": ("Expected HCO3-, chronic, high limit", "mmol/L"),
    "be_expected_pco2_low": ("Expected pCO2 from base excess, low limit", "mm[Hg]"),
    "be_expected_pco2_high": ("Expected pCO2 from base excess, high limit", "mm[Hg]"),
    "sid_apparent": ("Strong ion difference, apparent", "meq/L"),
    "sid_effective": ("Strong ion difference, effective", "meq/L"),
    "strong_ion_gap": ("Strong ion gap", "meq/L"),
    "story_na_cl": ("Base-excess part: sodium-chloride effect", "mmol/L"),
    "story_albumin": ("Base-excess part: albumin effect", "mmol/L"),
    "story_lactate": ("Base-excess part: lactate effect", "mmol/L"),
    "story_other": ("Base-excess part: other ions", "mmol/L"),
    "osmolality_calculated": ("Osmolality, calculated", "mosm/kg"),
    "osmolal_gap": ("Osmolal gap", "mosm/kg"),
    "alveolar_po2": ("Alveolar pO2", "mm[Hg]"),
    "aa_gradient": ("Alveolar-arterial pO2 gradient", "mm[Hg]"),
    "aa_expected": ("Alveolar-arterial pO2 gradient, age-expected upper limit", "mm[Hg]"),
    "pf_ratio": ("pO2/FiO2 ratio", "mm[Hg]"),
    "ph_at_temperature": ("pH at the patient's temperature", "[pH]"),
    "pco2_at_temperature": ("pCO2 at the patient's temperature", "mm[Hg]"),
    "po2_at_temperature": ("pO2 at the patient's temperature", "mm[Hg]"),
}

#: Unit of every derived value (``check --json`` "derived_units").
DERIVED_UNITS: dict[str, str] = {k: unit for k, (_, unit) in DERIVED_INFO.items()}


def process_code(process: str, anion_gap: str | None = None) -> str:
    """Code of a disorder's process: "metabolic-acidosis-high-gap", "respiratory-alkalosis"."""
    base = process.replace(" ", "-")
    return f"{base}-{anion_gap}-gap" if anion_gap else base


def process_title(process: str, anion_gap: str | None = None) -> str:
    return f"{process}, {anion_gap} anion gap" if anion_gap else process


#: Process codes, one per disorder slot of the kernel.
PROCESSES: tuple[tuple[str, str], ...] = tuple(
    (process_code(p, g), process_title(p, g)) for _, p, g in SLOTS)


def _code_system(name: str, url: str, title: str, description: str,
                 concepts: list[dict[str, Any]]) -> dict[str, Any]:
    from . import __version__

    return {
        "resourceType": "CodeSystem", "id": f"acidbase-{name}", "url": url,
        "version": __version__, "name": f"Acidbase{name.capitalize()}", "title": title,
        "status": "draft", "experimental": True, "publisher": "acidbase",
        "description": description, "caseSensitive": True, "content": "complete",
        "count": len(concepts), "concept": concepts,
    }


def code_systems() -> dict[str, dict[str, Any]]:
    """The CodeSystem resources (JSON dicts) by file stem."""
    rules = [{"code": r.code, "display": r.title,
              "definition": f"{r.section}, {r.severity}: {r.why or r.title}"} for r in RULES]
    derived = [{"code": k, "display": f"{title} ({unit})"}
               for k, (title, unit) in DERIVED_INFO.items()]
    processes = [{"code": c, "display": t} for c, t in PROCESSES]
    report = [{"code": READING_CODE[0], "display": READING_CODE[1]}]
    return {
        "CodeSystem-acidbase-rule": _code_system(
            "rule", RULE_SYSTEM, "acidbase rule codes",
            "The findings acidbase can make; generated from acidbase/rules.py.", rules),
        "CodeSystem-acidbase-derived": _code_system(
            "derived", DERIVED_SYSTEM, "acidbase derived values",
            "Values acidbase computes from a panel, with their UCUM unit.", derived),
        "CodeSystem-acidbase-process": _code_system(
            "process", PROCESS_SYSTEM, "acidbase acid-base processes",
            "The acid-base processes acidbase names in a reading.", processes),
        "CodeSystem-acidbase-report": _code_system(
            "report", REPORT_SYSTEM, "acidbase report codes",
            "The kind of report acidbase writes.", report),
    }


def code_system_files() -> dict[str, str]:
    """File name -> text, as committed under docs/fhir/."""
    return {f"{stem}.json": json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
            for stem, doc in code_systems().items()}


def main(argv: list[str] | None = None) -> int:
    folder = Path(argv[0] if argv else "docs/fhir")
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in code_system_files().items():
        (folder / name).write_text(text, encoding="utf-8")
        print(f"wrote {folder / name}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main(sys.argv[1:]))
