"""Reference intervals and the settings a laboratory may change.

Intervals for pH, pCO2 and HCO3 depend on the sample type; the anion-gap
interval depends on the analyser (Winter et al. 1990; Rastegar 2007), so it is a
setting.  Every number names its source key (``acidbase.references``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import fields as _fields
from .errors import AcidBaseError
from .fields import SAMPLE_TYPES


class SettingsError(ValueError, AcidBaseError):
    """A laboratory setting outside what the rules can use."""


@dataclass(frozen=True)
class Interval:
    low: float
    high: float
    source: tuple[str, ...]


# Arterial blood, adults: pH 7.35-7.45, pCO2 35-45 mm[Hg], HCO3 22-26 mmol/L are
# the textbook intervals that the compensation rules are anchored to
# (reference point pCO2 40, HCO3 24) [narins_emmett_1980, berend_2014].
# SBE -3.0 to +2.8 mmol/L [klaestrup_2011].
#
# Venous blood: the arterial intervals shifted by the weighted mean
# arterial-venous differences of Kelly 2010 (pH -0.035, pCO2 +5.7 mm[Hg],
# HCO3 +1.41 mmol/L) and rounded outward [kelly_2010, acidbase_design].
#
# Capillary (arterialised) and unknown samples use the arterial intervals;
# an unknown sample is never read for oxygenation [aarc_2013].
INTERVALS: dict[str, dict[str, Interval]] = {
    "arterial": {
        "ph": Interval(7.35, 7.45, ("narins_emmett_1980", "berend_2014")),
        "pco2": Interval(35.0, 45.0, ("narins_emmett_1980", "berend_2014")),
        "hco3": Interval(22.0, 26.0, ("narins_emmett_1980", "berend_2014")),
        "sbe": Interval(-3.0, 2.8, ("klaestrup_2011",)),
    },
    "venous": {
        "ph": Interval(7.31, 7.42, ("kelly_2010", "acidbase_design")),
        "pco2": Interval(40.0, 51.0, ("kelly_2010", "acidbase_design")),
        "hco3": Interval(23.0, 28.0, ("kelly_2010", "acidbase_design")),
        "sbe": Interval(-3.0, 2.8, ("klaestrup_2011", "kelly_2010")),
    },
}
INTERVALS["capillary"] = INTERVALS["arterial"]
INTERVALS["unknown"] = INTERVALS["arterial"]

# Pregnancy, third trimester, arterial blood: pH 7.41-7.53, pCO2 25-33 mm[Hg], HCO3
# 16-22 mmol/L, from the reference table of Abbassi-Ghanavati et al. 2009 (values from
# memory, marked so) [abbassi_ghanavati_2009]; the means measured at 36-38 weeks by
# Hankins et al. 1996 (pH 7.46, pCO2 26.6, HCO3 18.2) lie inside them [hankins_1996].
# No published third-trimester SBE interval was found: the interval here is the Van
# Slyke SBE at the corners of the pH and HCO3 intervals, rounded outward
# [clsi_c46, acidbase_design].  Applied to arterial, capillary and unknown samples;
# a venous sample keeps the venous intervals (no published venous values in pregnancy).
PREGNANCY_INTERVALS: dict[str, dict[str, Interval]] = {
    "third_trimester": {
        "ph": Interval(7.41, 7.53, ("abbassi_ghanavati_2009",)),
        "pco2": Interval(25.0, 33.0, ("abbassi_ghanavati_2009",)),
        "hco3": Interval(16.0, 22.0, ("abbassi_ghanavati_2009",)),
        "sbe": Interval(-8.7, -0.6, ("clsi_c46", "acidbase_design")),
    },
}

#: Below this age (years) the adult intervals, compensation rules and the A-a age rule
#: are not established [klaestrup_2011 studied adults 20-76; iowa_critical lists separate
#: neonatal and paediatric intervals].
ADULT_AGE = 18.0
#: Neonate: the first 28 days of life, in years (28 / 365.25).
NEONATE_AGE = 28.0 / 365.25

#: Lactate upper reference limit, arterial, mmol/L [klaestrup_2011].
LACTATE_HIGH = 2.5


@dataclass(frozen=True)
class Settings:
    """Choices a laboratory makes for its own analysers and population.

    Defaults are documented in docs/methods.md with their sources.
    """

    anion_gap_low: float = 6.0
    """Lower reference limit of the anion gap without K+ (blood-gas analyser) [klaestrup_2011]."""
    anion_gap_high: float = 12.0
    """Upper reference limit of the anion gap without K+ [klaestrup_2011]."""
    anion_gap_k_low: float = 10.0
    """Lower limit of the anion gap with K+ [klaestrup_2011]."""
    anion_gap_k_high: float = 16.0
    """Upper limit of the anion gap with K+ [klaestrup_2011]."""
    anion_gap_uses_k: bool = False
    """Judge the gap with K+ included (needs K+); the default leaves K+ out."""
    reference_albumin_g_l: float = 44.0
    """Albumin to which the gap is corrected, g/L [figge_1998]."""
    large_anion_gap: float = 20.0
    """A corrected gap at or above this signals metabolic acidosis whatever the pH and HCO3 [gabow_1980]."""
    osmolal_gap_high: float = 10.0
    """Osmolal gap above this is raised, mosm/kg (common practice) [lynd_2008]."""
    strong_ion_gap_high: float = 8.0
    """Strong ion gap above this suggests unmeasured anions, mmol/L [plos_2013]."""
    reference_intervals: tuple[tuple[str, str, float, float], ...] = ()
    """The laboratory's own intervals in place of ``INTERVALS``: (sample type, quantity,
    low, high), canonical units (site configuration, ``acidbase.config``)."""
    paediatric_intervals: tuple[tuple[str, float, float], ...] = ()
    """The laboratory's own paediatric intervals: (quantity, low, high), canonical units,
    read on rows with a measured age below ``ADULT_AGE`` (``paediatric_columns``).  The
    tool ships none."""

    @classmethod
    def checked(cls, **kw: float | bool) -> Settings:
        """Settings from user input, refused with a clear message when they make no sense."""
        s = cls(**kw)  # type: ignore[arg-type]
        for name, lo, hi in (("anion gap interval", s.anion_gap_low, s.anion_gap_high),
                             ("anion gap interval with K+", s.anion_gap_k_low, s.anion_gap_k_high)):
            if not (0.0 <= lo < hi <= 40.0):
                raise SettingsError(f"{name} {lo:g} to {hi:g} mmol/L: give LOW < HIGH within 0 to 40")
        if not 20.0 <= s.reference_albumin_g_l <= 60.0:
            raise SettingsError(f"reference albumin {s.reference_albumin_g_l:g} g/L: give 20 to 60 g/L")
        for kind, name, lo, hi in s.reference_intervals:
            check_interval(kind, name, lo, hi)
        for name, lo, hi in s.paediatric_intervals:
            check_interval(PAEDIATRIC, name, lo, hi)
        return s

    def intervals(self) -> dict[str, dict[str, Interval]]:
        """``INTERVALS`` with this laboratory's own intervals in place."""
        if not self.reference_intervals:
            return INTERVALS
        out = {kind: dict(table) for kind, table in INTERVALS.items()}
        for kind, name, lo, hi in self.reference_intervals:
            out[kind][name] = Interval(float(lo), float(hi), ("site configuration",))
        return out

    @property
    def gap_interval(self) -> tuple[float, float]:
        if self.anion_gap_uses_k:
            return self.anion_gap_k_low, self.anion_gap_k_high
        return self.anion_gap_low, self.anion_gap_high

    @property
    def gap_normal(self) -> float:
        """The gap taken as 'normal' for the delta ratio: the interval's midpoint."""
        lo, hi = self.gap_interval
        return (lo + hi) / 2.0


def paediatric_rows(sample_type: np.ndarray, age: np.ndarray, settings: Settings | None
                    ) -> np.ndarray:
    """Rows read against the site's paediatric intervals: a measured age below
    ``ADULT_AGE``, a sample that is not venous, and a site that set such intervals."""
    if settings is None or not settings.paediatric_intervals:
        return np.zeros(sample_type.shape[0], dtype=bool)
    return (age < ADULT_AGE) & (sample_type != SAMPLE_TYPES.index("venous"))


def paediatric_columns(limits: dict[str, tuple[np.ndarray, np.ndarray]], rows: np.ndarray,
                       settings: Settings) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """``limits`` with the site's paediatric intervals on ``rows`` (``paediatric_rows``).

    A quantity the site left unset keeps its sample-type interval.  Venous samples keep
    the venous intervals: the site file holds one paediatric table, read as the
    arterial one (design, no source), as the pregnancy intervals are.
    """
    if not rows.any():
        return limits
    out = dict(limits)
    for name, lo, hi in settings.paediatric_intervals:
        if name in out:
            low, high = out[name]
            out[name] = (np.where(rows, float(lo), low), np.where(rows, float(hi), high))
    return out


def pregnancy_columns(limits: dict[str, tuple[np.ndarray, np.ndarray]], sample_type: np.ndarray,
                      pregnancy: np.ndarray | None, skip: np.ndarray | None = None
                      ) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """``limits`` with the third-trimester intervals on the rows that state it (not venous,
    not the ``skip`` rows: those already read against the site's paediatric intervals)."""
    from .fields import PREGNANCY_STATES

    if pregnancy is None:
        return limits
    rows = (pregnancy == PREGNANCY_STATES.index("third_trimester")) & (
        sample_type != SAMPLE_TYPES.index("venous"))
    if skip is not None:
        rows &= ~skip
    if not rows.any():
        return limits
    table = PREGNANCY_INTERVALS["third_trimester"]
    out = {}
    for name, (lo, hi) in limits.items():
        iv = table[name]
        out[name] = (np.where(rows, iv.low, lo), np.where(rows, iv.high, hi))
    return out


#: Quantities whose interval a laboratory may set, and the widest interval the rules
#: can use (canonical units): the accepted ranges of ``acidbase.fields``, and for SBE
#: +/-30 mmol/L (design, no source: beyond the values the rules are anchored to).
SETTABLE_INTERVALS: dict[str, tuple[float, float]] = {
    **{name: _fields.BY_NAME[name].accepted for name in ("ph", "pco2", "hco3")},
    "sbe": (-30.0, 30.0)}


#: The site file's name for its paediatric table (``[intervals.paediatric]``).
PAEDIATRIC = "paediatric"


def check_interval(kind: str, name: str, low: float, high: float) -> None:
    """Refuse a laboratory interval the rules cannot use (``SettingsError``); ``kind`` is a
    sample type or ``PAEDIATRIC``."""
    if kind not in SAMPLE_TYPES and kind != PAEDIATRIC:
        raise SettingsError(f"interval for sample type {kind!r}: give one of "
                            f"{', '.join(SAMPLE_TYPES)}")
    if name not in SETTABLE_INTERVALS:
        raise SettingsError(f"interval of {name!r}: give one of {', '.join(SETTABLE_INTERVALS)}")
    a, b = SETTABLE_INTERVALS[name]
    if not (a <= low < high <= b):
        raise SettingsError(f"{kind} {name} interval {low:g} to {high:g}: give LOW < HIGH "
                            f"within {a:g} to {b:g}")


def interval_columns(sample_type: np.ndarray, names: tuple[str, ...],
                     settings: Settings | None = None
                     ) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Per-row low and high limits of each quantity in ``names``, from sample-type codes.

    A limit that is the same for every sample type (SBE), or for every row of this
    call, comes back as a 0-d array, which broadcasts like a column at no cost.
    Otherwise the codes are widened to the platform index type once: ``np.take``
    with int8 indices converts them on every call, several times slower than the
    look-up itself.
    """
    uniform = bool(sample_type.shape[0]) and sample_type.min() == sample_type.max()
    kinds = (SAMPLE_TYPES[int(sample_type[0])],) if uniform else SAMPLE_TYPES
    intervals = settings.intervals() if settings is not None else INTERVALS
    index = None
    out = {}
    for name in names:
        limits = []
        for side in ("low", "high"):
            table = np.array([getattr(intervals[kind][name], side) for kind in kinds])
            if (table == table[0]).all():
                limits.append(np.float64(table[0]))
                continue
            if index is None:
                index = sample_type.astype(np.intp)
            limits.append(np.take(table, index))
        out[name] = (limits[0], limits[1])
    return out
