"""Panels for the engine tests, every number traceable to a source.

Two kinds of panel only:

* published panels: the inputs of a worked example in a cited source (methods sheet,
  section 13, numbered E1-E28), with any missing required field filled as stated beside it;
* edge panels: pCO2 and HCO3- put just inside or just outside a published band edge,
  pH then placed where Henderson-Hasselbalch puts it, so the panel is internally
  consistent and only the band is under test.

Fillers, stated once: Na+ 140 mmol/L is the sodium of the methods sheet's E23 worked
example; Cl- is then chosen so that Na - (Cl + HCO3) equals the gap under test, by
default 9 mmol/L, the midpoint of the blood-gas-analyser interval 6-12 without K+
(Klaestrup et al., Clin Chem Lab Med 2011).
"""

from __future__ import annotations

import math

import numpy as np

import acidbase
from acidbase.fields import NUMERIC

# CLSI C46-A2 (NCCLS C46-A 2001 reproduction, methods sheet 1.1 [C]):
# HCO3 = 0.0307 x pCO2 x 10^(pH - 6.105), so pH = 6.105 + log10(HCO3 / (0.0307 x pCO2)).
CLSI_ALPHA = 0.0307
CLSI_PK = 6.105

# Klaestrup et al., Clin Chem Lab Med 2011: anion gap without K+ 6-12 mmol/L; midpoint 9.
GAP_MIDPOINT = 9.0
# Methods sheet E23: Na 140 mmol/L.
NA_E23 = 140.0
# UCUM: 1 kPa = 7.50062 mm[Hg] (101.325 kPa = 760 mm[Hg]).
MMHG_PER_KPA = 760.0 / 101.325


def ph_for(hco3: float, pco2: float) -> float:
    """pH that Henderson-Hasselbalch (CLSI constants) gives for this HCO3 and pCO2, to 0.001."""
    return round(CLSI_PK + math.log10(hco3 / (CLSI_ALPHA * pco2)), 3)


def edge_panel(hco3: float, pco2: float, gap: float = GAP_MIDPOINT, **extra) -> acidbase.Panel:
    """An arterial panel with analyser HCO3-, pH placed by Henderson-Hasselbalch.

    Cl- is chosen so that the anion gap without K+ equals ``gap`` (default: the
    Klaestrup 2011 midpoint, a normal gap).
    """
    fields = {
        "ph": ph_for(hco3, pco2),
        "pco2": pco2,
        "hco3": hco3,
        "na": NA_E23,
        "cl": NA_E23 - hco3 - gap,
        "sample_type": "arterial",
        "hco3_source": "analyser",
    }
    fields.update(extra)
    return acidbase.Panel(**fields)


def story_2016() -> acidbase.Panel:
    """Story DA, Anesth Analg 2016 bedside case (methods E17): Na 133, Cl 110, albumin
    22 g/L, lactate 5, pH 7.20, pCO2 40, HCO3 15.  Sample type and HCO3- source are not
    part of the case; arterial blood-gas values are assumed."""
    return acidbase.Panel(
        ph=7.20,
        pco2=40.0,
        hco3=15.0,
        na=133.0,
        cl=110.0,
        albumin=22.0,
        albumin_unit="g/L",
        lactate=5.0,
        sample_type="arterial",
        hco3_source="analyser",
    )


def normal_e3(**extra) -> acidbase.Panel:
    """Methods E3: pH 7.40, pCO2 40 gives CLSI HCO3 24.22 mmol/L; normal gap filler."""
    fields = {
        "ph": 7.40,
        "pco2": 40.0,
        "hco3": 24.22,
        "na": NA_E23,
        "cl": NA_E23 - 24.22 - GAP_MIDPOINT,
        "sample_type": "arterial",
        "hco3_source": "analyser",
    }
    return acidbase.Panel(**(fields | extra))


def catalogue() -> dict[str, acidbase.Panel]:
    """The published and edge panels used across the suite, by name."""
    return {
        "E3 normal": normal_e3(),
        "E17 Story 2016 case": story_2016(),
        # Methods E6 (exam-bank worked example): HCO3 10, measured pCO2 28.
        "E6 Winter's inadequate": edge_panel(10.0, 28.0),
        # Methods E9: pCO2 60, acute HCO3 26 / chronic 31.
        "E9 acute respiratory acidosis": edge_panel(26.0, 60.0),
        "E9 chronic respiratory acidosis": edge_panel(31.0, 60.0),
        # Methods E10: pCO2 20, acute HCO3 20 / chronic 16.
        "E10 acute respiratory alkalosis": edge_panel(20.0, 20.0),
        "E10 chronic respiratory alkalosis": edge_panel(16.0, 20.0),
        # Methods E11: HCO3 34, expected pCO2 40 + 0.7 x 10 = 47.
        "E11 metabolic alkalosis": edge_panel(34.0, 47.0),
        # Methods E22 oxygenation inputs on the E3 acid-base values.
        "E22 oxygenation": normal_e3(po2=90.0, fio2=0.50),
        # Methods E25: patient at 33 degC.
        "E25 hypothermia": normal_e3(po2=90.0, temperature=33.0),
        "E3 venous": venous_kelly(),
        "E3 in kPa": normal_e3(pco2=40.0 / MMHG_PER_KPA, pco2_unit="kPa"),
        # Methods E23: glucose 90 mg/dL, BUN 14 mg/dL; one with a measured osmolality just
        # above the > 10 mosm/kg gap threshold (methods 7.1 [S]), one without.
        "E23 with measured osmolality": normal_e3(
            glucose=90.0, glucose_unit="mg/dL", bun=14.0, osmolality=300.5
        ),
        "E23 without measured osmolality": normal_e3(glucose=90.0, glucose_unit="mg/dL", bun=14.0),
    }


def venous_kelly(sample_type: str = "venous") -> acidbase.Panel:
    """The E3 arterial values moved by the weighted mean arterial-venous differences of
    Kelly, Emerg Med Australas 2010 (pH -0.035, pCO2 +5.7 mm[Hg], HCO3 +1.41 mmol/L):
    pH 7.365, pCO2 45.7, HCO3 25.63; Cl- for the filler gap."""
    hco3 = 24.22 + 1.41
    return acidbase.Panel(
        ph=7.40 - 0.035,
        pco2=40.0 + 5.7,
        hco3=hco3,
        na=NA_E23,
        cl=NA_E23 - hco3 - GAP_MIDPOINT,
        sample_type=sample_type,
        hco3_source="analyser",
    )


def columns_of(panels: list[acidbase.Panel]) -> dict[str, np.ndarray]:
    """Columns in canonical units for ``interpret_many`` (a batch of many)."""
    canon = [p.canonical() for p in panels]
    cols: dict[str, np.ndarray] = {}
    for spec in NUMERIC:
        cols[spec.name] = np.array(
            [np.nan if c[spec.name] is None else c[spec.name] for c in canon], dtype=np.float64
        )
    cols["sample_type"] = np.array([p.sample_type for p in panels], dtype=object)
    cols["hco3_source"] = np.array([p.hco3_source for p in panels], dtype=object)
    cols["pregnancy"] = np.array([p.pregnancy for p in panels], dtype=object)
    return cols
