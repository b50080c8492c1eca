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
# their measurement errors cancel; what is left is each value's printed precision
# (half its last printed step, read from the number as given: ``printed_half_step``;
# a whole number is taken as printed to 1, pH as printed to at least 0.01), and the spread between the pK'/solubility conventions in use
# (24.02 to 24.79 mmol/L at pH 7.40 / pCO2 40: +/- 1.6 %) [clsi_c46,
# kassirer_bleich_1965].  The worst cases are added (a bound, not a
# standard deviation) [acidbase_design].
#
# Chemistry total CO2: measured separately, so the analytic errors stay: the
# CLIA 2024 acceptance limits pH +/- 0.04, pCO2 +/- 8 % or 5 mm[Hg] (greater),
# total CO2 +/- 20 % [clia_2024], combined as a root sum of squares; the
# measured total CO2 is compared with the calculated total CO2 (HCO3 + 0.0307
# pCO2).  Agreement studies find 95 % limits of about -4 to +5 mmol/L
# [chittamma_2008, kumar_2017]: an absolute band that is wider than the relative
# CLIA band at low total CO2, so the wider of the two is used, plus the printed
# precision of the entered value.

CONVENTION_SPREAD = 0.016
#: pH is printed to at least 0.01 on blood-gas reports (design assumption, stated in
#: the working): a pH typed as 7.4 is taken as 7.40.
PH_MIN_DECIMALS = 2

#: Widest 95 % limit of agreement between a chemistry total CO2 and the total CO2
#: calculated from the gas's pH and pCO2: -1.45 to +5.33 mmol/L (calculated minus
#: measured) [chittamma_2008]; Kumar 2017 found -4.1 to +2.3 (measured total CO2 minus
#: calculated HCO3-, venous against arterial) [kumar_2017], inside it.  Used
#: symmetrically, since the sign of the bias differs between studies.
CHEMISTRY_AGREEMENT = 5.33

CLIA_PH = 0.04
CLIA_PCO2_FRACTION = 0.08
CLIA_PCO2_MMHG = 5.0
CLIA_TOTAL_CO2_FRACTION = 0.20


def printed_half_step(x: Array, min_decimals: int = 0, max_decimals: int = 3) -> Array:
    """Half the last printed step of each value, read from the number itself.

    The fewest decimals (at least ``min_decimals``) that write the value exactly decide
    the step: 23 and 23.0 -> 0.5, 23.4 -> 0.05, 7.44 -> 0.005.  A number carries no
    trailing zeros, so "23.0" typed on a report reads as printed to 1: the wider,
    safer tolerance [acidbase_design].
    """
    step = np.full(np.shape(x), 0.5 * 10.0 ** -max_decimals)
    with np.errstate(invalid="ignore"):
        for d in range(max_decimals - 1, min_decimals - 1, -1):
            scaled = x * 10.0**d
            whole = np.abs(scaled - np.round(scaled)) < 1e-6 * np.maximum(1.0, np.abs(scaled))
            step = np.where(whole, 0.5 * 10.0**-d, step)
    return step


def consistency_tolerance_analyser(pco2: Array, hco3_calc: Array, ph_step: Array,
                                   pco2_step: Array, hco3_step: Array) -> Array:
    """Largest |entered - calculated| HCO3 explained by printing and convention (mmol/L).

    ``*_step`` are half the printed steps of pH, pCO2 and the entered HCO3.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = (LN10 * ph_step + pco2_step / pco2 + CONVENTION_SPREAD)
    return hco3_calc * rel + hco3_step


def consistency_tolerance_chemistry(pco2: Array, tco2_calc: Array, hco3_step: Array) -> Array:
    """Largest |measured - calculated| total CO2 explained by analytic error (mmol/L):
    the CLIA-propagated band or the published agreement band, whichever is wider, plus
    the printed precision of the measured value."""
    with np.errstate(divide="ignore", invalid="ignore"):
        pco2_rel = np.maximum(CLIA_PCO2_FRACTION, CLIA_PCO2_MMHG / pco2)
        rel = np.sqrt((LN10 * CLIA_PH) ** 2 + pco2_rel**2 + CLIA_TOTAL_CO2_FRACTION**2)
    return np.maximum(tco2_calc * rel, CHEMISTRY_AGREEMENT) + hco3_step


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
