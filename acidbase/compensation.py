"""Expected-compensation rules as a table: rule, formula, band, source.

Two independent families:

* bicarbonate rules (the "Boston" approach): expected pCO2 from HCO3 for
  metabolic processes, expected HCO3 from pCO2 for respiratory ones, anchored at
  pCO2 40 mm[Hg] and HCO3 24 mmol/L [narins_emmett_1980, berend_2014];
* standard-base-excess rules [schlichtig_1998], anchored at pCO2 40 and SBE 0.

Each rule gives the expected value of the compensating quantity and a half-width
band; outside the band, an additional process is present.  The same table draws
the bands on the pCO2-HCO3 plane (``plane_bands``), so the picture and the
verdict cannot drift apart.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .chemistry import hco3_from_ph_pco2

Array = np.ndarray


@dataclass(frozen=True)
class CompensationRule:
    key: str
    process: str
    """The primary process the rule applies to."""
    predicts: str
    """The compensating quantity: "pco2", "hco3" or "sbe"."""
    formula: str
    slope: float
    """Expected = at_anchor + slope x (driver - anchor): every rule here is linear."""
    anchor: float
    at_anchor: float
    band: float
    """Half-width of the expected band, in the unit of ``predicts``."""
    sources: tuple[str, ...]
    band_sources: tuple[str, ...]

    def expected(self, driver: Array) -> Array:
        """Expected value of ``predicts`` from the driving quantity."""
        return self.at_anchor + self.slope * (driver - self.anchor)

    def limits(self, driver: Array) -> tuple[Array, Array]:
        centre = self.expected(driver)
        return centre - self.band, centre + self.band


BICARBONATE_RULES: dict[str, CompensationRule] = {
    r.key: r
    for r in (
        CompensationRule(
            "winters", "metabolic acidosis", "pco2",
            "expected pCO2 = 1.5 x HCO3 + 8 +/- 2 mm[Hg] (Winter's formula)",
            1.5, 0.0, 8.0, 2.0,
            ("albert_1967",), ("albert_1967",)),
        CompensationRule(
            "metabolic_alkalosis", "metabolic alkalosis", "pco2",
            "expected pCO2 = 40 + 0.7 x (HCO3 - 24) +/- 5 mm[Hg]",
            0.7, 24.0, 40.0, 5.0,
            ("berend_2014",), ("kidney360_2022",)),
        CompensationRule(
            "acute_respiratory_acidosis", "respiratory acidosis", "hco3",
            "expected HCO3 = 24 + 0.1 x (pCO2 - 40) +/- 2 mmol/L (acute)",
            0.1, 40.0, 24.0, 2.0,
            ("narins_emmett_1980", "berend_2014"), ("acidbase_design",)),
        CompensationRule(
            "chronic_respiratory_acidosis", "respiratory acidosis", "hco3",
            "expected HCO3 = 24 + 0.35 x (pCO2 - 40) +/- 2 mmol/L (chronic)",
            0.35, 40.0, 24.0, 2.0,
            ("narins_emmett_1980", "berend_2014"), ("acidbase_design",)),
        CompensationRule(
            "acute_respiratory_alkalosis", "respiratory alkalosis", "hco3",
            "expected HCO3 = 24 - 0.2 x (40 - pCO2) +/- 2 mmol/L (acute)",
            0.2, 40.0, 24.0, 2.0,
            ("narins_emmett_1980", "berend_2014"), ("acidbase_design",)),
        CompensationRule(
            "chronic_respiratory_alkalosis", "respiratory alkalosis", "hco3",
            "expected HCO3 = 24 - 0.4 x (40 - pCO2) +/- 2 mmol/L (chronic)",
            0.4, 40.0, 24.0, 2.0,
            ("berend_2014",), ("acidbase_design",)),
    )
}

#: Respiratory compensation for a metabolic alkalosis rarely takes pCO2 above about 55
#: mm[Hg]; teaching tables quote 55 to 60 [malk_pco2_ceiling].  Above it, a pCO2 inside
#: the expected band is not taken as compensation alone (a caution, not a verdict).
METABOLIC_ALKALOSIS_PCO2_CEILING = 55.0

BASE_EXCESS_RULES: dict[str, CompensationRule] = {
    r.key: r
    for r in (
        CompensationRule(
            "be_metabolic_acidosis", "metabolic acidosis", "pco2",
            "expected pCO2 = 40 + SBE +/- 2 mm[Hg]",
            1.0, 0.0, 40.0, 2.0, ("schlichtig_1998",), ("acidbase_design",)),
        CompensationRule(
            "be_metabolic_alkalosis", "metabolic alkalosis", "pco2",
            "expected pCO2 = 40 + 0.6 x SBE +/- 5 mm[Hg]",
            0.6, 0.0, 40.0, 5.0, ("schlichtig_1998",), ("acidbase_design",)),
        CompensationRule(
            "be_acute_respiratory", "respiratory", "sbe",
            "expected SBE = 0 +/- 3 mmol/L (acute)",
            0.0, 40.0, 0.0, 3.0, ("schlichtig_1998",),
            ("klaestrup_2011", "acidbase_design")),
        CompensationRule(
            "be_chronic_respiratory", "respiratory", "sbe",
            "expected SBE = 0.4 x (pCO2 - 40) +/- 3 mmol/L (chronic)",
            0.4, 40.0, 0.0, 3.0, ("schlichtig_1998",),
            ("acidbase_design",)),
    )
}


def plane_bands(pco2: Array) -> dict[str, tuple[Array, Array]]:
    """HCO3 limits of each simple disorder's expected band along a pCO2 grid.

    For the picture on the pCO2-HCO3 plane.  Metabolic bands are Winter's formula
    and the alkalosis rule solved for HCO3; respiratory bands are the acute and
    chronic rules.  Each band is NaN outside the side of normal where its
    disorder lives.  Also returns the iso-pH lines 7.20, 7.40 and 7.60
    (Henderson-Hasselbalch, CLSI constants) as zero-width bands.
    """
    pco2 = np.asarray(pco2, dtype=np.float64)
    out: dict[str, tuple[Array, Array]] = {}
    for key, keep in (("winters", pco2 <= 40.0), ("metabolic_alkalosis", pco2 >= 40.0)):
        r = BICARBONATE_RULES[key]
        # pCO2 = at_anchor + slope (HCO3 - anchor) +/- band, solved for HCO3
        lo = r.anchor + (pco2 - r.at_anchor - r.band) / r.slope
        hi = r.anchor + (pco2 - r.at_anchor + r.band) / r.slope
        # each metabolic band lives on its own side of the reference HCO3 (24)
        lo, hi = (lo, np.minimum(hi, 24.0)) if key == "winters" else (np.maximum(lo, 24.0), hi)
        keep = keep & (lo <= hi)
        out[r.process] = (np.where(keep, lo, np.nan), np.where(keep, hi, np.nan))
    for key in ("acute_respiratory_acidosis", "chronic_respiratory_acidosis"):
        r = BICARBONATE_RULES[key]
        lo, hi = r.limits(pco2)
        keep = pco2 >= 40.0
        out[key.replace("_", " ")] = (np.where(keep, lo, np.nan), np.where(keep, hi, np.nan))
    for key in ("acute_respiratory_alkalosis", "chronic_respiratory_alkalosis"):
        r = BICARBONATE_RULES[key]
        lo, hi = r.limits(pco2)
        keep = pco2 <= 40.0
        out[key.replace("_", " ")] = (np.where(keep, lo, np.nan), np.where(keep, hi, np.nan))
    for ph in (7.2, 7.4, 7.6):
        line = hco3_from_ph_pco2(np.full_like(pco2, ph), pco2)
        out[f"pH {ph:.2f}"] = (line, line)
    return out
