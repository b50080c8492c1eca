"""Example panels for every rule in the table: one where it fires, one where it stays quiet.

Data for the rule registry (``acidbase.rules`` attaches them to each ``Rule``), run by
one parametrised test (tests/engine/test_rule_examples.py) and shown in docs/rules.md.
Each example is the keywords of a ``Panel``; an optional ``settings`` entry holds
laboratory settings.  The panels are our own, built on the band edges the rules cite
(pH placed by Henderson-Hasselbalch with the CLSI constants, ``gas``), not patients.
"""

from __future__ import annotations

import math
from typing import Any

Example = dict[str, Any]


def gas(hco3: float, pco2: float, **extra: Any) -> Example:
    """An arterial, analyser-calculated panel with pH placed by Henderson-Hasselbalch
    (CLSI C46: pH = 6.105 + log10(HCO3 / (0.0307 pCO2))), to 0.01; Na+ 140 and Cl- giving
    a gap of 9 (midpoint of 6-12) unless given."""
    out: Example = {"ph": round(6.105 + math.log10(hco3 / (0.0307 * pco2)), 2), "pco2": pco2,
                    "hco3": hco3, "na": 140.0, "cl": 140.0 - hco3 - 9.0,
                    "sample_type": "arterial", "hco3_source": "analyser"}
    out.update(extra)
    return out


#: A normal arterial panel (pH 7.40, pCO2 40, HCO3- 24.2, gap 9, albumin 44 g/L).
NORMAL = gas(24.2, 40.0, albumin=44.0)
#: Metabolic acidosis at Winter's centre (HCO3- 12, pCO2 26), normal gap.
MET_ACID = gas(12.0, 26.0, albumin=44.0)
#: The same with a raised gap (21).
HIGH_GAP = gas(12.0, 26.0, albumin=44.0, cl=107.0)
#: Metabolic alkalosis at its band's centre (HCO3- 34, pCO2 47).
MET_ALK = gas(34.0, 47.0, albumin=44.0)
#: Chronic respiratory acidosis (pCO2 60, HCO3- 31).
RESP_ACID = gas(31.0, 60.0, albumin=44.0)
#: Acute respiratory alkalosis (pCO2 25, HCO3- 21).
RESP_ALK = gas(21.0, 25.0, albumin=44.0)

#: Rules that fire on every panel that is read (no quiet example exists).
ALWAYS: frozenset[str] = frozenset({"D-SBE"})

EXAMPLES: dict[str, tuple[tuple[Example, ...], tuple[Example, ...]]] = {
    # code: (fires, quiet)
    "T-HH-CONSISTENT": ((NORMAL,), (NORMAL | {"hco3": 30.0, "cl": 101.0},)),
    "T-HH-INCONSISTENT": ((NORMAL | {"hco3": 30.0, "cl": 101.0},), (NORMAL,)),
    "T-HH-SOURCE-NEEDED": ((NORMAL | {"hco3": 27.5, "cl": 103.5, "hco3_source": "unknown"},),
                           (NORMAL | {"hco3_source": "unknown"},)),
    "T-PH-LIFE": ((gas(3.5, 40.0),), (MET_ACID,)),
    "T-CRITICAL": ((gas(6.0, 18.0),), (NORMAL,)),
    "T-EXTREME-VALUE": ((gas(62.0, 58.0, cl=70.0),), (NORMAL,)),
    "T-PO2-ABOVE-ALVEOLAR": ((NORMAL | {"po2": 130.0, "fio2": 0.21},),
                             (NORMAL | {"po2": 95.0, "fio2": 0.21},)),
    "T-POSSIBLE-VENOUS": ((NORMAL | {"po2": 35.0},), (NORMAL | {"po2": 90.0},)),
    "T-POSSIBLE-DELAY": ((NORMAL | {"glucose": 2.5, "lactate": 5.0},),
                         (NORMAL | {"glucose": 5.0, "lactate": 5.0},)),
    "T-POSSIBLE-DILUTION": ((gas(18.0, 30.0, cl=113.0, k=3.0, glucose=3.0),),
                            (gas(18.0, 30.0, cl=113.0, k=4.0, glucose=5.0),)),
    "T-AG-NEGATIVE": ((NORMAL | {"cl": 117.0},), (NORMAL,)),
    "T-AG-LOW": ((NORMAL | {"cl": 112.0},), (NORMAL,)),
    "T-SAMPLE-UNKNOWN": ((NORMAL | {"sample_type": "unknown"},), (NORMAL,)),
    "T-SAMPLE-VENOUS": ((gas(25.6, 46.0, sample_type="venous"),), (NORMAL,)),
    "T-SAMPLE-CAPILLARY": ((NORMAL | {"sample_type": "capillary"},), (NORMAL,)),
    "T-PREGNANCY-INTERVALS": ((gas(18.2, 26.6, pregnancy="third_trimester"),),
                              (gas(18.2, 26.6, pregnancy="no"),)),
    # the second: a site's own paediatric pH interval (a test setting, not a clinical value)
    "P-ADULT-RULES-ONLY": ((NORMAL | {"age": 0.2},
                            NORMAL | {"age": 5.0, "settings": {
                                "paediatric_intervals": (("ph", 7.30, 7.45),)}}),
                           (NORMAL | {"age": 18.0},)),
    "P-COMPENSATION-FROM-GAS": ((gas(11.6, 27.0, hco3_source="chemistry") | {"hco3": 15.0},),
                                (MET_ACID,)),
    "P-NONE": ((NORMAL,), (MET_ACID,)),
    "P-PH-UNEXPLAINED": ((NORMAL | {"ph": 7.30},), (NORMAL,)),
    "P-PRIMARY-METABOLIC-ACIDOSIS": ((MET_ACID,), (NORMAL,)),
    "P-PRIMARY-METABOLIC-ALKALOSIS": ((MET_ALK,), (NORMAL,)),
    "P-PRIMARY-RESPIRATORY-ACIDOSIS": ((RESP_ACID,), (NORMAL,)),
    "P-PRIMARY-RESPIRATORY-ALKALOSIS": ((RESP_ALK,), (NORMAL,)),
    "P-COMBINED": ((gas(15.0, 60.0),), (MET_ACID,)),
    "P-WINTERS-MET": ((MET_ACID,), (gas(12.0, 32.0),)),
    "P-WINTERS-ABOVE": ((gas(12.0, 32.0),), (MET_ACID,)),
    "P-WINTERS-BELOW": ((gas(12.0, 21.0),), (MET_ACID,)),
    "P-MALK-EXPECTED": ((MET_ALK,), (gas(34.0, 40.0),)),
    "P-MALK-CEILING": ((gas(48.0, 60.0),), (MET_ALK,)),
    "P-MALK-ABOVE": ((gas(34.0, 55.0),), (MET_ALK,)),
    "P-MALK-BELOW": ((gas(34.0, 40.0),), (MET_ALK,)),
    "P-RESP-TIMING": ((RESP_ACID,), (MET_ACID,)),
    "P-RESP-MET-ACIDOSIS": ((gas(23.0, 60.0),), (RESP_ACID,)),
    "P-RESP-MET-ALKALOSIS": ((gas(36.0, 60.0),), (RESP_ACID,)),
    "P-HIGH-GAP-ACIDOSIS": ((HIGH_GAP,), (MET_ACID,)),
    "P-GAP-RAISED-ONLY": ((gas(17.0, 20.0, cl=106.0, lactate=4.0),), (NORMAL,)),
    "P-NORMAL-GAP-ACIDOSIS": ((MET_ACID,), (HIGH_GAP,)),
    "P-GAP-REVEALS-ACIDOSIS": ((gas(30.0, 45.0, cl=88.0),), (gas(30.0, 45.0, cl=98.0),)),
    "P-GAP-NOT-ASSESSABLE": (({"ph": 7.28, "pco2": 26.0, "hco3": 12.0},), (MET_ACID,)),
    "P-DELTA-NORMAL-GAP": ((gas(12.0, 26.0, cl=111.0),), (HIGH_GAP,)),
    "P-DELTA-ALKALOSIS": ((gas(18.0, 35.0, cl=100.0),), (gas(18.0, 35.0, cl=107.0),)),
    "P-DELTA-HIGH-RESPIRATORY": ((gas(20.0, 60.0, cl=100.0),), (gas(20.0, 60.0, cl=111.0),)),
    "P-DELTA-LOW-RESPIRATORY": ((gas(13.0, 25.0, cl=111.0),), (HIGH_GAP,)),
    "P-VENOUS-COMPENSATION": ((gas(10.5, 45.0, sample_type="venous"),),
                              (gas(10.5, 50.0, sample_type="venous"),)),
    "P-VENOUS-RESPIRATORY": ((gas(33.0, 70.0, sample_type="venous"),), (RESP_ACID,)),
    "P-BE-AGREES": ((NORMAL,), (gas(11.0, 26.3),)),
    "P-BE-DISAGREES": ((gas(11.0, 26.3),), (NORMAL,)),
    "D-ANION-GAP": ((NORMAL,), ({"ph": 7.40, "pco2": 40.0, "hco3": 24.2},)),
    "D-GAP-WITHOUT-K": ((NORMAL | {"settings": {"anion_gap_uses_k": True}},),
                        (NORMAL | {"k": 4.0, "settings": {"anion_gap_uses_k": True}},)),
    "D-GAP-UNCORRECTED": ((gas(24.2, 40.0),), (NORMAL,)),
    "D-DELTA": ((HIGH_GAP,), (MET_ACID,)),
    # SBE is formed from pH and pCO2 alone: every panel that is read has one.
    "D-SBE": ((NORMAL,), ()),
    "D-STEWART": ((NORMAL | {"k": 4.0, "ica": 1.2, "mg": 0.9, "lactate": 1.0, "phosphate": 1.0},),
                  (NORMAL,)),
    "D-SIG-HIGH": ((NORMAL | {"k": 4.0, "ica": 1.2, "mg": 0.9, "lactate": 1.0, "phosphate": 1.0,
                              "cl": 95.0},),
                   (NORMAL | {"k": 4.0, "ica": 1.2, "mg": 0.9, "lactate": 1.0,
                              "phosphate": 1.0},)),
    "D-BEDSIDE-PARTITION": ((NORMAL,), (gas(24.2, 40.0),)),
    "D-OSMOLAL-GAP": ((NORMAL | {"glucose": 5.0, "urea": 5.0, "osmolality": 295.0},),
                      (NORMAL | {"glucose": 5.0, "urea": 5.0, "osmolality": 310.0},)),
    "D-OSMOLAL-GAP-HIGH": ((NORMAL | {"glucose": 5.0, "urea": 5.0, "osmolality": 310.0},),
                           (NORMAL | {"glucose": 5.0, "urea": 5.0, "osmolality": 295.0},)),
    "D-AA-GRADIENT": ((NORMAL | {"po2": 95.0, "fio2": 0.21, "age": 40.0},),
                      (NORMAL | {"po2": 70.0, "fio2": 0.21, "age": 40.0},)),
    "D-AA-GRADIENT-HIGH": ((NORMAL | {"po2": 70.0, "fio2": 0.21, "age": 40.0},),
                           (NORMAL | {"po2": 95.0, "fio2": 0.21, "age": 40.0},)),
    "D-PF-RATIO": ((NORMAL | {"po2": 90.0, "fio2": 0.5},), (NORMAL | {"po2": 90.0},)),
    "D-PO2-NOT-READ": ((NORMAL | {"po2": 40.0, "sample_type": "venous"},), (NORMAL | {"po2": 90.0},)),
    "D-TEMPERATURE": ((NORMAL | {"temperature": 33.0},), (NORMAL | {"temperature": 37.2},)),
    "D-LACTATE-HIGH": ((NORMAL | {"lactate": 4.0},), (NORMAL | {"lactate": 2.5},)),
}
