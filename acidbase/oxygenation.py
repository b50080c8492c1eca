"""Oxygenation quantities: alveolar gas equation, A-a gradient, PaO2/FiO2.

Only arterial samples are read for oxygenation; the caller masks the rest
[aarc_2013].  Units: mm[Hg]; FiO2 as a fraction.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]

#: Water vapour pressure at 37 degC and respiratory quotient [merck_alveolar].
PH2O_MMHG = 47.0
RESPIRATORY_QUOTIENT = 0.8
SEA_LEVEL_MMHG = 760.0


#: Barometric pressure at 1,000 m in the standard atmosphere, mm[Hg]: 89.87 kPa
#: [icao_atmosphere] (value from memory).  Below it (higher than 1,000 m) the Berlin
#: definition multiplies PaO2/FiO2 by PB/760 [berlin_2012, footnote to its table].
PB_AT_1000_M = 674.1


def alveolar_po2(fio2: Array, pb: Array, pco2: Array) -> Array:
    """PAO2 = FiO2 x (PB - 47) - PaCO2 x (FiO2 + (1 - FiO2) / R), R = 0.8.

    The full form [riley_1949]: the simplified PaCO2 / R [merck_alveolar] assumes no
    net nitrogen exchange and overstates the alveolar pO2's fall by PaCO2 x FiO2 x
    (1 - R) / R, about a quarter of PaCO2 at FiO2 1.0 and 2 mm[Hg] on room air.
    """
    r = RESPIRATORY_QUOTIENT
    return fio2 * (pb - PH2O_MMHG) - pco2 * (fio2 + (1.0 - fio2) / r)


def aa_gradient(pao2_alveolar: Array, po2: Array) -> Array:
    """P(A-a)O2 = PAO2 - PaO2 [merck_alveolar]."""
    return pao2_alveolar - po2


def expected_aa_gradient(age: Array) -> Array:
    """Upper expected A-a gradient on room air: age/4 + 4 mm[Hg] [aa_age_rule]."""
    return age / 4.0 + 4.0


def pf_ratio_for_altitude(pf: Array, pb: Array) -> Array:
    """P/F x PB / 760 where PB is below the pressure at 1,000 m, else NaN [berlin_2012]."""
    return np.where(pb < PB_AT_1000_M, pf * pb / SEA_LEVEL_MMHG, np.nan)


def pf_ratio(po2: Array, fio2: Array) -> Array:
    """PaO2/FiO2 in mm[Hg] [berlin_2012]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return po2 / fio2
