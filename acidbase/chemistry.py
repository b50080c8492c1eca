"""Henderson-Hasselbalch and the quantities that follow from it: arrays in, arrays out.

Canonical units throughout: pCO2 and pO2 in mm[Hg], concentrations in mmol/L,
[H+] in nmol/L, temperature in degC.  NaN in gives NaN out; nothing here raises
on odd numbers.  Each function names its source key (``acidbase.references``).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]

#: CO2 solubility in plasma at 37 degC, mmol/L per mm[Hg], and the apparent pK'
#: of the CO2/HCO3- system, as used by the CLSI C46 bicarbonate equation
#: [clsi_c46].  Textbook forms use 0.0301 (or 0.03) and 6.10 [kassirer_bleich_1965].
CO2_SOLUBILITY = 0.0307
PK_PRIME = 6.105

#: Kassirer-Bleich constant: [H+] (nmol/L) = 24 x pCO2 / HCO3 [kassirer_bleich_1965].
KASSIRER_BLEICH_K = 24.0


#: ln(10), for powers of ten as exponentials.
LN10 = float(np.log(10.0))


def exp10(x: Array) -> Array:
    """10^x as exp(x ln 10).

    numpy's exponential is vectorised; ``np.power`` calls the C library's pow once
    per element, about seven times slower here (bench/).  The two agree to within a
    few units in the last place (about 1e-15 relative over pH 6.5 to 8), far below
    any printed digit.
    """
    return np.exp(x * LN10)


def h_ion_nmol(ph: Array) -> Array:
    """[H+] in nmol/L: 10^(9 - pH) (definition of pH)."""
    return exp10(9.0 - ph)


def hco3_from_ph_pco2(ph: Array, pco2: Array) -> Array:
    """Plasma bicarbonate from pH and pCO2 [clsi_c46].

    HCO3 = 0.0307 x pCO2 x 10^(pH - 6.105); mmol/L, pCO2 in mm[Hg], 37 degC.
    """
    return CO2_SOLUBILITY * pco2 * exp10(ph - PK_PRIME)


def total_co2(hco3: Array, pco2: Array) -> Array:
    """Plasma total CO2: HCO3 + 0.0307 x pCO2 [clsi_c46]."""
    return hco3 + CO2_SOLUBILITY * pco2


def h_ion_kassirer_bleich(pco2: Array, hco3: Array) -> Array:
    """[H+] from pCO2 and HCO3: 24 x pCO2 / HCO3 [kassirer_bleich_1965]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return KASSIRER_BLEICH_K * pco2 / hco3


def standard_base_excess(ph: Array, hco3: Array) -> Array:
    """Standard base excess (extracellular fluid), Van Slyke equation [clsi_c46].

    SBE = HCO3 - 24.8 + 16.2 x (pH - 7.40), mmol/L.
    """
    return hco3 - 24.8 + 16.2 * (ph - 7.40)


# --- Internal consistency ---------------------------------------------------
#
# The tolerance on |HCO3 entered - HCO3 calculated| is propagated from the
# uncertainty of each input, as relative errors of HCO3 (d ln HCO3):
#   pH:    d ln HCO3 = ln(10) x dpH
#   pCO2:  d ln HCO3 = dpCO2 / pCO2
#   HCO3:  its own relative error
#
# Analyser-calculated HCO3: the analyser derived it from the same pH and pCO2, so
# their measurement errors cancel; what is left is printing to 0.01 pH, 1 mm[Hg]
# and 0.1 mmol/L, and the spread between the pK'/solubility conventions in use
# (24.02 to 24.79 mmol/L at pH 7.40 / pCO2 40: +/- 1.6 %) [clsi_c46,
# kassirer_bleich_1965].  The worst cases are added (a bound, not a
# standard deviation) [acidbase_design].
#
# Chemistry total CO2: measured separately, so the analytic errors stay: the
# CLIA 2024 acceptance limits pH +/- 0.04, pCO2 +/- 8 % or 5 mm[Hg] (greater),
# total CO2 +/- 20 % [clia_2024], combined as a root sum of squares; the
# measured total CO2 is compared with the calculated total CO2 (HCO3 + 0.0307
# pCO2).  Agreement studies find 95 % limits of about -4 to +5 mmol/L
# [chittamma_2008, kumar_2017], inside this band at ordinary values.

ROUNDING_PH = 0.005
ROUNDING_PCO2 = 0.5
ROUNDING_HCO3 = 0.05
CONVENTION_SPREAD = 0.016

CLIA_PH = 0.04
CLIA_PCO2_FRACTION = 0.08
CLIA_PCO2_MMHG = 5.0
CLIA_TOTAL_CO2_FRACTION = 0.20


def consistency_tolerance_analyser(pco2: Array, hco3_calc: Array) -> Array:
    """Largest |entered - calculated| HCO3 explained by printing and convention (mmol/L)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = (LN10 * ROUNDING_PH + ROUNDING_PCO2 / pco2 + CONVENTION_SPREAD)
    return hco3_calc * rel + ROUNDING_HCO3


def consistency_tolerance_chemistry(pco2: Array, tco2_calc: Array) -> Array:
    """Largest |measured - calculated| total CO2 explained by analytic error (mmol/L)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        pco2_rel = np.maximum(CLIA_PCO2_FRACTION, CLIA_PCO2_MMHG / pco2)
        rel = np.sqrt((LN10 * CLIA_PH) ** 2 + pco2_rel**2 + CLIA_TOTAL_CO2_FRACTION**2)
    return tco2_calc * rel


# --- Temperature correction -------------------------------------------------
#
# Reported for information only: interpretation uses the 37 degC values
# (alpha-stat).  pH [rosenthal_1948], pCO2 [nunn_1965], pO2 [severinghaus_1979].


def ph_at_temperature(ph: Array, temperature: Array) -> Array:
    """pH(T) = pH(37) - [0.0147 + 0.0065 (pH(37) - 7.40)] (T - 37) [rosenthal_1948]."""
    return ph - (0.0147 + 0.0065 * (ph - 7.40)) * (temperature - 37.0)


def pco2_at_temperature(pco2: Array, temperature: Array) -> Array:
    """pCO2(T) = pCO2(37) x 10^(0.019 (T - 37)) [nunn_1965]."""
    return pco2 * exp10(0.019 * (temperature - 37.0))


def po2_at_temperature(po2: Array, temperature: Array) -> Array:
    """pO2(T) = pO2(37) x 10^(f (T - 37)) [severinghaus_1979].

    f = (5.49e-11 pO2^3.88 + 0.071) / (9.72e-9 pO2^3.88 + 2.30), pO2 at 37 degC in mm[Hg].
    """
    p = np.power(po2, 3.88)
    f = (5.49e-11 * p + 0.071) / (9.72e-9 * p + 2.30)
    return po2 * exp10(f * (temperature - 37.0))
