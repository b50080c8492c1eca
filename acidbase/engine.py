"""The vectorised kernel: screened columns in, a frame of derived columns out.

One code path for every caller: a single panel is a batch of one.  The frame is
a plain dict of numpy arrays (inputs in canonical units, derived values,
classification masks and codes); ``acidbase.rules`` reads it to emit findings
and ``acidbase.results`` turns it into output.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import chemistry as chem
from . import gaps
from . import oxygenation as oxy
from .compensation import BASE_EXCESS_RULES, BICARBONATE_RULES, CompensationRule
from .fields import HCO3_SOURCES, SAMPLE_TYPES
from .model import Screened
from .reference import Settings, interval_columns

Frame = dict[str, np.ndarray]

ARTERIAL = SAMPLE_TYPES.index("arterial")
VENOUS = SAMPLE_TYPES.index("venous")
CAPILLARY = SAMPLE_TYPES.index("capillary")
SOURCE_ANALYSER = HCO3_SOURCES.index("analyser")
SOURCE_CHEMISTRY = HCO3_SOURCES.index("chemistry")
SOURCE_UNKNOWN = HCO3_SOURCES.index("unknown")

#: consistency codes
NOT_ASSESSABLE, CONSISTENT, INCONSISTENT = 0, 1, 2
CONSISTENCY_NAMES = ("not assessable", "consistent", "inconsistent")

#: respiratory timing codes
TIMING_NONE, ACUTE, CHRONIC, INDETERMINATE = 0, 1, 2, 3
TIMING_NAMES = (None, "acute", "chronic", "indeterminate")

#: role codes
ROLE_NONE, PRIMARY, ADDITIONAL = 0, 1, 2
ROLE_NAMES = (None, "primary", "additional")

#: Disorder slots: (slot key, process, anion-gap label)
SLOTS: tuple[tuple[str, str, str | None], ...] = (
    ("met_acid_high", "metabolic acidosis", "high"),
    ("met_acid_normal", "metabolic acidosis", "normal"),
    ("met_alk", "metabolic alkalosis", None),
    ("resp_acid", "respiratory acidosis", None),
    ("resp_alk", "respiratory alkalosis", None),
)

#: pH range traditionally compatible with life [life_limits]; critical-call
#: limits of one laboratory [iowa_critical].
PH_LIFE = (6.8, 7.8)
CRITICAL = {"ph": (7.20, 7.60), "pco2": (20.0, 70.0), "po2_low": 40.0}

#: FiO2 read as room air (the age rule for the A-a gradient holds only there).
ROOM_AIR = (0.205, 0.215)


@dataclass(frozen=True)
class _Reading:
    """One reading's processes (bicarbonate or base-excess family)."""

    prim: dict[str, np.ndarray]
    add: dict[str, np.ndarray]
    timing: np.ndarray
    expected_pco2: tuple[np.ndarray, np.ndarray]
    expected_acute: tuple[np.ndarray, np.ndarray]
    expected_chronic: tuple[np.ndarray, np.ndarray]


def _read(
    ph: np.ndarray, pco2: np.ndarray, metabolic: np.ndarray,
    ph_mid: np.ndarray, ph_lo: np.ndarray, ph_hi: np.ndarray,
    pco2_lo: np.ndarray, pco2_hi: np.ndarray, met_lo: np.ndarray, met_hi: np.ndarray,
    met_ref: float, rules: dict[str, CompensationRule],
) -> _Reading:
    """Primary processes and expected compensation for one family of rules.

    ``metabolic`` is HCO3 (bicarbonate rules) or SBE (base-excess rules).  The
    primary process is the abnormal component that moves pH the way it went;
    both, when both do (a combined disorder).  With a normal pH the side of the
    interval's midpoint decides.  The compensating component is then judged
    against the rule's band: outside it, an additional process.
    """
    acid_side = ph <= ph_mid
    alk_side = ph > ph_mid
    r_acid, r_alk = pco2 > pco2_hi, pco2 < pco2_lo
    m_acid, m_alk = metabolic < met_lo, metabolic > met_hi
    prim = {
        "resp_acid": acid_side & r_acid,
        "met_acid": acid_side & m_acid,
        "resp_alk": alk_side & r_alk,
        "met_alk": alk_side & m_alk,
    }
    none = ~(prim["resp_acid"] | prim["met_acid"] | prim["resp_alk"] | prim["met_alk"])
    # Abnormal pH with both components inside their intervals: the larger
    # relative deviation in pH's direction is primary.
    rdev = (pco2 - 40.0) / 40.0
    mdev = (met_ref - metabolic) / 24.0
    acidaemia, alkalaemia = ph < ph_lo, ph > ph_hi
    prim["resp_acid"] |= none & acidaemia & (rdev >= mdev) & (rdev > 0)
    prim["met_acid"] |= none & acidaemia & (mdev > rdev) & (mdev > 0)
    prim["resp_alk"] |= none & alkalaemia & (rdev <= mdev) & (rdev < 0)
    prim["met_alk"] |= none & alkalaemia & (mdev < rdev) & (mdev < 0)
    # Normal pH, a component abnormal against pH's side: read it as primary.
    none = ~(prim["resp_acid"] | prim["met_acid"] | prim["resp_alk"] | prim["met_alk"])
    prim["resp_acid"] |= none & r_acid
    prim["met_acid"] |= none & m_acid
    prim["resp_alk"] |= none & r_alk
    prim["met_alk"] |= none & m_alk

    count = (prim["resp_acid"].astype(np.int8) + prim["met_acid"] + prim["resp_alk"]
             + prim["met_alk"])
    single = count == 1
    nan = np.full(ph.shape, np.nan)

    if "winters" in rules:
        acid_rule, alk_rule = rules["winters"], rules["metabolic_alkalosis"]
        ra_acute, ra_chronic = (rules["acute_respiratory_acidosis"],
                                rules["chronic_respiratory_acidosis"])
        rl_acute, rl_chronic = (rules["acute_respiratory_alkalosis"],
                                rules["chronic_respiratory_alkalosis"])
    else:
        acid_rule, alk_rule = rules["be_metabolic_acidosis"], rules["be_metabolic_alkalosis"]
        ra_acute = rl_acute = rules["be_acute_respiratory"]
        ra_chronic = rl_chronic = rules["be_chronic_respiratory"]

    only_ma = single & prim["met_acid"]
    only_mk = single & prim["met_alk"]
    lo_a, hi_a = acid_rule.limits(metabolic)
    lo_k, hi_k = alk_rule.limits(metabolic)
    exp_lo = np.where(only_ma, lo_a, np.where(only_mk, lo_k, nan))
    exp_hi = np.where(only_ma, hi_a, np.where(only_mk, hi_k, nan))
    met_only = only_ma | only_mk
    add = {
        "resp_acid": met_only & (pco2 > exp_hi),
        "resp_alk": met_only & (pco2 < exp_lo),
    }

    only_ra = single & prim["resp_acid"]
    only_rl = single & prim["resp_alk"]
    resp_only = only_ra | only_rl
    acute_lo = np.where(only_ra, ra_acute.limits(pco2)[0], np.where(only_rl, rl_acute.limits(pco2)[0], nan))
    acute_hi = np.where(only_ra, ra_acute.limits(pco2)[1], np.where(only_rl, rl_acute.limits(pco2)[1], nan))
    chron_lo = np.where(only_ra, ra_chronic.limits(pco2)[0], np.where(only_rl, rl_chronic.limits(pco2)[0], nan))
    chron_hi = np.where(only_ra, ra_chronic.limits(pco2)[1], np.where(only_rl, rl_chronic.limits(pco2)[1], nan))
    band_lo = np.fmin(acute_lo, chron_lo)
    band_hi = np.fmax(acute_hi, chron_hi)
    add["met_acid"] = resp_only & (metabolic < band_lo)
    add["met_alk"] = resp_only & (metabolic > band_hi)
    in_acute = (metabolic >= acute_lo) & (metabolic <= acute_hi)
    in_chronic = (metabolic >= chron_lo) & (metabolic <= chron_hi)
    timing = np.zeros(ph.shape, dtype=np.int8)
    timing[resp_only] = INDETERMINATE
    timing[resp_only & in_acute & ~in_chronic] = ACUTE
    timing[resp_only & in_chronic & ~in_acute] = CHRONIC
    # A combined disorder (two primaries) has no compensation to read.
    timing[(count > 1) & (prim["resp_acid"] | prim["resp_alk"])] = INDETERMINATE
    return _Reading(prim, add, timing, (exp_lo, exp_hi), (acute_lo, acute_hi),
                    (chron_lo, chron_hi))


def compute(s: Screened, settings: Settings) -> Frame:
    """Every derived quantity and classification, for all rows at once."""
    v = s.values
    f: Frame = {name: v[name] for name in v}
    ph, pco2, hco3 = v["ph"], v["pco2"], v["hco3"]
    f["sample_type"], f["hco3_source"] = s.sample_type, s.hco3_source
    f["refused"] = s.refused
    f["urea_used"] = np.where(np.isnan(v["urea"]), v["bun"] * (10.0 / 28.014), v["urea"])

    for name in ("ph", "pco2", "hco3", "sbe"):
        f[f"{name}_lo"], f[f"{name}_hi"] = interval_columns(s.sample_type, name)
    ph_mid = (f["ph_lo"] + f["ph_hi"]) / 2.0

    # --- 1. trust: internal consistency (Henderson-Hasselbalch) ---------------
    f["h_nmol_per_l"] = chem.h_ion_nmol(ph)
    calc = chem.hco3_from_ph_pco2(ph, pco2)
    f["hco3_calculated"] = calc
    f["total_co2_calculated"] = chem.total_co2(calc, pco2)
    f["h_kassirer_bleich"] = chem.h_ion_kassirer_bleich(pco2, hco3)
    tol_a = chem.consistency_tolerance_analyser(pco2, calc)
    tol_c = chem.consistency_tolerance_chemistry(pco2, f["total_co2_calculated"])
    diff_a = hco3 - calc
    diff_c = hco3 - f["total_co2_calculated"]
    src = s.hco3_source
    chemistry = src == SOURCE_CHEMISTRY
    f["consistency_difference"] = np.where(chemistry, diff_c, diff_a)
    f["consistency_tolerance"] = np.where(chemistry, tol_c, tol_a)
    ok_a, ok_c = np.abs(diff_a) <= tol_a, np.abs(diff_c) <= tol_c
    status = np.full(ph.shape, NOT_ASSESSABLE, dtype=np.int8)
    analyser = src == SOURCE_ANALYSER
    unknown = src == SOURCE_UNKNOWN
    status[analyser & ok_a] = CONSISTENT
    status[analyser & ~ok_a] = INCONSISTENT
    status[chemistry & ok_c] = CONSISTENT
    status[chemistry & ~ok_c] = INCONSISTENT
    status[unknown & ok_a] = CONSISTENT
    status[unknown & ~ok_a & ~ok_c] = INCONSISTENT
    status[~np.isfinite(diff_a)] = NOT_ASSESSABLE
    f["consistency"] = status
    f["consistency_needs_source"] = unknown & ~ok_a & ok_c
    f["consistency_tolerance_chemistry"] = tol_c
    f["consistency_difference_chemistry"] = diff_c

    # --- 2. processes: the bicarbonate reading -------------------------------
    bic = _read(ph, pco2, hco3, ph_mid, f["ph_lo"], f["ph_hi"], f["pco2_lo"], f["pco2_hi"],
                f["hco3_lo"], f["hco3_hi"], 24.0, BICARBONATE_RULES)
    for key in ("met_acid", "met_alk", "resp_acid", "resp_alk"):
        f[f"prim_{key}"] = bic.prim[key]
        f[f"add_{key}"] = bic.add[key]
    f["expected_pco2_low"], f["expected_pco2_high"] = bic.expected_pco2
    f["expected_hco3_acute_low"], f["expected_hco3_acute_high"] = bic.expected_acute
    f["expected_hco3_chronic_low"], f["expected_hco3_chronic_high"] = bic.expected_chronic

    # --- gaps -------------------------------------------------------------------
    f["anion_gap"] = gaps.anion_gap(v["na"], v["cl"], hco3)
    f["anion_gap_k"] = gaps.anion_gap_with_k(v["na"], v["k"], v["cl"], hco3)
    judged = f["anion_gap_k"] if settings.anion_gap_uses_k else f["anion_gap"]
    f["anion_gap_corrected"] = gaps.albumin_corrected_gap(
        judged, v["albumin"], settings.reference_albumin_g_l)
    has_alb = ~np.isnan(v["albumin"])
    gap = np.where(has_alb, f["anion_gap_corrected"], judged)
    f["gap_judged"] = gap
    f["gap_low"] = np.full(ph.shape, settings.gap_interval[0])
    f["gap_high_limit"] = np.full(ph.shape, settings.gap_interval[1])
    f["gap_normal"] = np.full(ph.shape, settings.gap_normal)
    gap_high = gap > settings.gap_interval[1]
    gap_large = gap >= settings.large_anion_gap
    f["gap_high"], f["gap_large"] = gap_high, gap_large
    f["delta_ratio"] = gaps.delta_ratio(gap, hco3, settings.gap_normal)
    f["delta_gap"] = gaps.delta_gap(gap, hco3, settings.gap_normal)

    # --- the disorder slots ---------------------------------------------------
    any_primary = bic.prim["met_acid"] | bic.prim["met_alk"] | bic.prim["resp_acid"] | bic.prim["resp_alk"]
    met_acid_role = np.where(bic.prim["met_acid"], PRIMARY,
                             np.where(bic.add["met_acid"], ADDITIONAL, ROLE_NONE)).astype(np.int8)
    gap_only = (met_acid_role == ROLE_NONE) & gap_large
    f["gap_reveals_acidosis"] = gap_only
    met_acid_role = np.where(gap_only, np.where(any_primary, ADDITIONAL, PRIMARY), met_acid_role)
    role_high = np.where(gap_high, met_acid_role, ROLE_NONE).astype(np.int8)
    role_normal = np.where(~gap_high, met_acid_role, ROLE_NONE).astype(np.int8)
    high_active = role_high > ROLE_NONE
    resp_acid_present = bic.prim["resp_acid"] | bic.add["resp_acid"]
    ratio = f["delta_ratio"]
    hidden_normal_gap = high_active & (ratio < 0.8)
    f["delta_hidden_normal_gap"] = hidden_normal_gap
    role_normal = np.where(hidden_normal_gap & (role_normal == ROLE_NONE), ADDITIONAL, role_normal)
    high_hco3_for_gap = high_active & ((ratio > 2.0) | ((hco3 >= 24.0) & (f["delta_gap"] > 6.0)))
    f["delta_alkalosis"] = high_hco3_for_gap & ~resp_acid_present
    f["delta_alkalosis_or_resp"] = high_hco3_for_gap & resp_acid_present
    met_alk_role = np.where(bic.prim["met_alk"], PRIMARY,
                            np.where(bic.add["met_alk"] | f["delta_alkalosis"], ADDITIONAL, ROLE_NONE))
    f["role_met_acid_high"] = role_high
    f["role_met_acid_normal"] = role_normal.astype(np.int8)
    f["role_met_alk"] = met_alk_role.astype(np.int8)
    f["role_resp_acid"] = np.where(bic.prim["resp_acid"], PRIMARY,
                                   np.where(bic.add["resp_acid"], ADDITIONAL, ROLE_NONE)).astype(np.int8)
    f["role_resp_alk"] = np.where(bic.prim["resp_alk"], PRIMARY,
                                  np.where(bic.add["resp_alk"], ADDITIONAL, ROLE_NONE)).astype(np.int8)
    extra_met = bic.add["met_acid"] | bic.add["met_alk"] | f["delta_alkalosis"] | gap_only
    timing = np.where((bic.timing > TIMING_NONE) & extra_met, INDETERMINATE, bic.timing)
    f["timing_resp"] = timing.astype(np.int8)
    f["no_disorder"] = (role_high + f["role_met_acid_normal"] + f["role_met_alk"]
                        + f["role_resp_acid"] + f["role_resp_alk"]) == 0

    # --- the base-excess reading (independent) -------------------------------
    sbe = chem.standard_base_excess(ph, calc)
    f["standard_base_excess"] = sbe
    be = _read(ph, pco2, sbe, ph_mid, f["ph_lo"], f["ph_hi"], f["pco2_lo"], f["pco2_hi"],
               f["sbe_lo"], f["sbe_hi"], 0.0, BASE_EXCESS_RULES)
    for key in ("met_acid", "met_alk", "resp_acid", "resp_alk"):
        f[f"be_{key}"] = be.prim[key] | be.add[key]
        f[f"bic_{key}"] = bic.prim[key] | bic.add[key]
    f["be_expected_pco2_low"], f["be_expected_pco2_high"] = be.expected_pco2
    f["be_expected_sbe_acute_low"], f["be_expected_sbe_acute_high"] = be.expected_acute
    f["be_expected_sbe_chronic_low"], f["be_expected_sbe_chronic_high"] = be.expected_chronic
    f["be_timing"] = be.timing
    agree = np.ones(ph.shape, dtype=bool)
    for key in ("met_acid", "met_alk", "resp_acid", "resp_alk"):
        agree &= f[f"be_{key}"] == f[f"bic_{key}"]
    f["readings_agree"] = agree

    # --- Stewart quantities -----------------------------------------------------
    f["sid_apparent"] = gaps.sid_apparent(v["na"], v["k"], v["ica"], v["mg"], v["cl"], v["lactate"])
    f["sid_effective"] = gaps.sid_effective(calc, v["albumin"], v["phosphate"], ph)
    f["strong_ion_gap"] = gaps.strong_ion_gap(f["sid_apparent"], f["sid_effective"])
    (f["story_na_cl"], f["story_albumin"], f["story_lactate"],
     f["story_other"]) = gaps.story_partition(v["na"], v["cl"], v["albumin"], v["lactate"], sbe)

    # --- osmolal gap --------------------------------------------------------------
    f["osmolality_calculated"] = gaps.calculated_osmolality(v["na"], v["glucose"], f["urea_used"])
    f["osmolal_gap"] = gaps.osmolal_gap(v["osmolality"], f["osmolality_calculated"])

    # --- oxygenation (arterial only) ----------------------------------------------
    arterial = s.sample_type == ARTERIAL
    pb = np.where(np.isnan(v["pb"]), oxy.SEA_LEVEL_MMHG, v["pb"])
    f["pb_used"] = pb
    alveolar = oxy.alveolar_po2(v["fio2"], pb, pco2)
    f["alveolar_po2"] = np.where(arterial, alveolar, np.nan)
    f["aa_gradient"] = np.where(arterial, oxy.aa_gradient(alveolar, v["po2"]), np.nan)
    room_air = (v["fio2"] >= ROOM_AIR[0]) & (v["fio2"] <= ROOM_AIR[1])
    f["room_air"] = room_air
    f["aa_expected"] = np.where(arterial & room_air, oxy.expected_aa_gradient(v["age"]), np.nan)
    f["pf_ratio"] = np.where(arterial, oxy.pf_ratio(v["po2"], v["fio2"]), np.nan)
    f["po2_above_alveolar"] = arterial & (v["po2"] > alveolar + 10.0)

    # --- temperature (reported, not used: interpretation is at 37 degC) ------------
    t = v["temperature"]
    differs = np.abs(t - 37.0) >= 0.5
    f["temperature_differs"] = differs
    f["ph_at_temperature"] = np.where(differs, chem.ph_at_temperature(ph, t), np.nan)
    f["pco2_at_temperature"] = np.where(differs, chem.pco2_at_temperature(pco2, t), np.nan)
    f["po2_at_temperature"] = np.where(differs, chem.po2_at_temperature(v["po2"], t), np.nan)
    f["arterial"] = arterial
    return f
