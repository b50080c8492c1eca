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


def alveolar_po2(fio2: Array, pb: Array, pco2: Array) -> Array:
    """PAO2 = FiO2 x (PB - 47) - PaCO2 / 0.8 [merck_alveolar]."""
    return fio2 * (pb - PH2O_MMHG) - pco2 / RESPIRATORY_QUOTIENT


def aa_gradient(pao2_alveolar: Array, po2: Array) -> Array:
    """P(A-a)O2 = PAO2 - PaO2 [merck_alveolar]."""
    return pao2_alveolar - po2


def expected_aa_gradient(age: Array) -> Array:
    """Upper expected A-a gradient on room air: age/4 + 4 mm[Hg] [aa_age_rule]."""
    return age / 4.0 + 4.0


def pf_ratio(po2: Array, fio2: Array) -> Array:
    """PaO2/FiO2 in mm[Hg] [berlin_2012]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return po2 / fio2
