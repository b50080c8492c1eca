"""Gaps and the physicochemical quantities: arrays in, arrays out.

Anion gap, albumin correction, delta ratio and delta gap, osmolal gap, the
Stewart strong-ion quantities and the bedside base-excess partition.  Units:
mmol/L (= mEq/L for monovalent ions), albumin in g/L, osmolality in mosm/kg.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

Array = NDArray[np.float64]

#: Figge et al. 1998: each g/L fall of albumin lowers the gap by 0.25 mmol/L [figge_1998].
ALBUMIN_GAP_PER_G_L = 0.25


def anion_gap(na: Array, cl: Array, hco3: Array) -> Array:
    """AG = Na - (Cl + HCO3) [kraut_madias_2007]."""
    return na - (cl + hco3)


def anion_gap_with_k(na: Array, k: Array, cl: Array, hco3: Array) -> Array:
    """AG(K) = (Na + K) - (Cl + HCO3) [kraut_madias_2007]; NaN without K."""
    return na + k - (cl + hco3)


def albumin_corrected_gap(gap: Array, albumin: Array, reference_albumin: float) -> Array:
    """AGc = AG + 0.25 x (reference albumin - albumin), albumin in g/L [figge_1998]."""
    return gap + ALBUMIN_GAP_PER_G_L * (reference_albumin - albumin)


#: Smallest fall of HCO3- (mmol/L below 24) over which the delta ratio is formed.  The
#: normal spread of the gap (half-width 3 mmol/L of a 6-12 interval) and of HCO3- (2
#: mmol/L of 22-26) together come to about 3.6 mmol/L (root sum of squares): a fall
#: smaller than 5 is of the size of that noise, and a ratio over it means nothing
#: (Rastegar 2007 warns against reading the ratio alone) [rastegar_2007,
#: acidbase_design].  Below it the delta gap is read instead.
DELTA_MIN_HCO3_FALL = 5.0
#: Delta gap beyond +/-6 mmol/L suggests a second metabolic process [wrenn_1990].
DELTA_GAP_BAND = 6.0


def delta_ratio(gap: Array, hco3: Array, gap_normal: float | Array,
                hco3_normal: float = 24.0, min_fall: float = DELTA_MIN_HCO3_FALL) -> Array:
    """(AG - AG normal) / (HCO3 normal - HCO3) [rastegar_2007].

    Not assessable (NaN) when HCO3 has fallen less than ``min_fall`` below its
    normal value: the ratio of two small, noisy differences has no meaning, and
    the delta gap is read instead.
    """
    denom = hco3_normal - hco3
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(denom >= min_fall, (gap - gap_normal) / denom, np.nan)


def delta_gap(gap: Array, hco3: Array, gap_normal: float | Array,
              hco3_normal: float = 24.0) -> Array:
    """(AG - AG normal) - (HCO3 normal - HCO3) [wrenn_1990]."""
    return (gap - gap_normal) - (hco3_normal - hco3)


def calculated_osmolality(na: Array, glucose: Array, urea: Array) -> Array:
    """2 Na + glucose + urea, all mmol/L, in mosm/kg [lynd_2008]."""
    return 2.0 * na + glucose + urea


def osmolal_gap(measured: Array, calculated: Array) -> Array:
    """Measured - calculated osmolality [lynd_2008]."""
    return measured - calculated


def sid_apparent(na: Array, k: Array, ica: Array, mg: Array, cl: Array, lactate: Array) -> Array:
    """SIDa = Na + K + 2 Ca2+ + 2 Mg2+ - Cl - lactate (mEq/L) [kellum_2000].

    Magnesium is optional: when it is NaN it is left out (it adds about 1 mEq/L),
    and the finding says so.
    """
    return na + k + 2.0 * ica + 2.0 * np.nan_to_num(mg, nan=0.0) - cl - lactate


def albumin_charge(albumin: Array, ph: Array) -> Array:
    """[Alb-] = albumin (g/L) x (0.123 pH - 0.631) [figge_fencl_1992]."""
    return albumin * (0.123 * ph - 0.631)


def phosphate_charge(phosphate: Array, ph: Array) -> Array:
    """[Pi-] = phosphate (mmol/L) x (0.309 pH - 0.469) [figge_fencl_1992]."""
    return phosphate * (0.309 * ph - 0.469)


def sid_effective(hco3: Array, albumin: Array, phosphate: Array, ph: Array) -> Array:
    """SIDe = HCO3 + [Alb-] + [Pi-] (Figge-Fencl) [figge_fencl_1992]."""
    return hco3 + albumin_charge(albumin, ph) + phosphate_charge(phosphate, ph)


def strong_ion_gap(sida: Array, side: Array) -> Array:
    """SIG = SIDa - SIDe [kellum_2000]."""
    return sida - side


#: Story 2016 bedside partition constants [story_2016].
STORY_NA_CL = 35.0
STORY_ALBUMIN_G_L = 42.0


def story_partition(na: Array, cl: Array, albumin: Array, lactate: Array, sbe: Array
                    ) -> tuple[Array, Array, Array, Array]:
    """Bedside split of SBE into sodium-chloride, albumin, lactate and other ions [story_2016].

    Returns (Na-Cl effect, albumin effect, lactate effect, other ions), mmol/L:
    (Na - Cl) - 35; 0.25 x (42 - albumin g/L); 1 - lactate; SBE minus the three.
    A missing lactate is left out of the split (its effect NaN, "other ions"
    then includes it); without albumin there is no split (all NaN).
    """
    alb = ALBUMIN_GAP_PER_G_L * (STORY_ALBUMIN_G_L - albumin)
    na_cl = (na - cl) - STORY_NA_CL + 0.0 * alb  # the split needs albumin: NaN without it
    lac = 1.0 - lactate + 0.0 * alb
    other = sbe - na_cl - alb - np.nan_to_num(lac, nan=0.0)
    return na_cl, alb, lac, other
