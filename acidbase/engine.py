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
from .reference import (ADULT_AGE, LACTATE_HIGH, Settings, interval_columns, paediatric_columns,
                        paediatric_rows, pregnancy_columns)

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
    ("met_acid_unknown", "metabolic acidosis", "unknown"),
    ("met_alk", "metabolic alkalosis", None),
    ("resp_acid", "respiratory acidosis", None),
    ("resp_alk", "respiratory alkalosis", None),
)

#: pH range traditionally compatible with life [life_limits]; critical-call
#: limits of one laboratory [iowa_critical].
PH_LIFE = (6.8, 7.8)
CRITICAL = {"ph": (7.20, 7.60), "pco2": (20.0, 70.0), "po2_low": 40.0}

#: Output columns that hold a value only where a mask holds; elsewhere the kernel
#: leaves meaningless numbers (cheaper than writing NaN) and the results blank them.
VALID_WHEN: dict[str, str] = {
    "expected_pco2_low": "metabolic_only", "expected_pco2_high": "metabolic_only",
    "expected_hco3_acute_low": "respiratory_only", "expected_hco3_acute_high": "respiratory_only",
    "expected_hco3_chronic_low": "respiratory_only",
    "expected_hco3_chronic_high": "respiratory_only",
    "be_expected_pco2_low": "be_metabolic_only", "be_expected_pco2_high": "be_metabolic_only",
    "be_expected_sbe_acute_low": "be_respiratory_only",
    "be_expected_sbe_acute_high": "be_respiratory_only",
    "be_expected_sbe_chronic_low": "be_respiratory_only",
    "be_expected_sbe_chronic_high": "be_respiratory_only",
    "delta_ratio": "delta_applies", "delta_gap": "delta_applies",
}

#: FiO2 read as room air (the age rule for the A-a gradient holds only there).
ROOM_AIR = (0.205, 0.215)

#: Largest published venous-arterial pCO2 difference: limits of agreement up to about
#: 20 mm[Hg] [kelly_2010]; Byrne et al. 2014 found a 95 % prediction interval of about
#: -10.7 to +2.4 kPa-equivalent mm[Hg] for the bias [byrne_2014].  A venous pCO2 above the
#: arterial band by more than this cannot be arterial compensation.
VENOUS_PCO2_EXCESS = 20.0


@dataclass(frozen=True)
class _Reading:
    """One reading's processes (bicarbonate or base-excess family)."""

    prim: dict[str, np.ndarray]
    add: dict[str, np.ndarray]
    timing: np.ndarray
    expected_pco2: tuple[np.ndarray, np.ndarray]
    expected_acute: tuple[np.ndarray, np.ndarray]
    expected_chronic: tuple[np.ndarray, np.ndarray]
    metabolic_only: np.ndarray
    """Rows with a single metabolic primary (where expected pCO2 applies)."""
    respiratory_only: np.ndarray
    """Rows with a single respiratory primary (where expected HCO3 or SBE applies)."""


def nan_unless(mask: np.ndarray) -> np.ndarray:
    """0.0 where ``mask`` holds, NaN elsewhere: added to a column, it blanks the rest.

    Arithmetic instead of ``np.where``, which is several times slower on
    scattered masks.
    """
    with np.errstate(invalid="ignore"):
        return np.divide(0.0, mask.astype(np.float64))


def _pick(m1: np.ndarray, r1: CompensationRule, m2: np.ndarray, r2: CompensationRule,
          driver: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Limits of rule r1 where m1, of r2 where m2 (exclusive masks).

    Rows in neither mask get meaningless numbers: the caller keeps the masks and
    blanks those rows on output (``VALID_WHEN``), which is cheaper than NaN here.
    Each rule's expected value is its own ``expected``; only the choice between
    the two is arithmetic here.
    """
    if r1 == r2:  # one rule for both sides (the base-excess respiratory rules)
        centre = r1.expected(driver)
        return centre - r1.band, centre + r1.band
    f1 = m1.astype(np.float64)
    c1, c2 = r1.expected(driver), r2.expected(driver)
    centre = c2 + (c1 - c2) * f1
    band = r1.band if r1.band == r2.band else r2.band + (r1.band - r2.band) * f1
    return centre - band, centre + band


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
    ra, ma = acid_side & r_acid, acid_side & m_acid
    rl, ml = alk_side & r_alk, alk_side & m_alk
    none = ~(ra | ma | rl | ml)
    # Abnormal pH with both components inside their intervals: the larger
    # relative deviation in pH's direction is primary.  (Rare: skipped when absent.)
    acidaemia = none & (ph < ph_lo)
    alkalaemia = none & (ph > ph_hi)
    if acidaemia.any() or alkalaemia.any():
        rdev = (pco2 - 40.0) / 40.0
        mdev = (met_ref - metabolic) / 24.0
        ra = ra | (acidaemia & (rdev >= mdev) & (rdev > 0))
        ma = ma | (acidaemia & (mdev > rdev) & (mdev > 0))
        rl = rl | (alkalaemia & (rdev <= mdev) & (rdev < 0))
        ml = ml | (alkalaemia & (mdev < rdev) & (mdev < 0))
        none = ~(ra | ma | rl | ml)
    # Normal pH, a component abnormal against pH's side: read it as primary.
    odd = none & (r_acid | m_acid | r_alk | m_alk)
    if odd.any():
        ra = ra | (odd & r_acid)
        ma = ma | (odd & m_acid)
        rl = rl | (odd & r_alk)
        ml = ml | (odd & m_alk)
    prim = {"resp_acid": ra, "met_acid": ma, "resp_alk": rl, "met_alk": ml}

    count = ra.view(np.int8) + ma.view(np.int8) + rl.view(np.int8) + ml.view(np.int8)
    single = count == 1

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

    only_ma, only_mk = single & ma, single & ml
    exp_lo, exp_hi = _pick(only_ma, acid_rule, only_mk, alk_rule, metabolic)
    met_only = only_ma | only_mk
    add = {"resp_acid": met_only & (pco2 > exp_hi), "resp_alk": met_only & (pco2 < exp_lo)}

    only_ra, only_rl = single & ra, single & rl
    resp_only = only_ra | only_rl
    acute_lo, acute_hi = _pick(only_ra, ra_acute, only_rl, rl_acute, pco2)
    chron_lo, chron_hi = _pick(only_ra, ra_chronic, only_rl, rl_chronic, pco2)
    add["met_acid"] = resp_only & (metabolic < acute_lo) & (metabolic < chron_lo)
    add["met_alk"] = resp_only & (metabolic > acute_hi) & (metabolic > chron_hi)
    in_acute = (metabolic >= acute_lo) & (metabolic <= acute_hi)
    in_chronic = (metabolic >= chron_lo) & (metabolic <= chron_hi)
    # A combined disorder (two primaries) has no compensation to read: indeterminate.
    timing = (INDETERMINATE * (resp_only | ((count > 1) & (ra | rl)))
              - (INDETERMINATE - ACUTE) * (resp_only & in_acute & ~in_chronic)
              - (INDETERMINATE - CHRONIC) * (resp_only & in_chronic & ~in_acute)).astype(np.int8)
    return _Reading(prim, add, timing, (exp_lo, exp_hi), (acute_lo, acute_hi),
                    (chron_lo, chron_hi), met_only, resp_only)


def _select(mask: np.ndarray, yes: np.ndarray, no: np.ndarray) -> np.ndarray:
    """``yes`` where mask, ``no`` elsewhere, for finite or NaN columns of one row set.

    Both are computed from the same inputs, so a NaN in one is a NaN in the other.
    """
    m = mask.astype(np.float64)
    return no + m * (yes - no)


def _role(primary: np.ndarray, additional: np.ndarray) -> np.ndarray:
    """Role codes: PRIMARY where primary, else ADDITIONAL where additional, else none."""
    return (primary.view(np.int8) * PRIMARY
            + (additional & ~primary).view(np.int8) * ADDITIONAL).astype(np.int8)


def compute(s: Screened, settings: Settings) -> Frame:
    """Every derived quantity and classification, for all rows at once.

    Blocks whose optional inputs are absent from every row are skipped and
    their outputs share one NaN column (frame columns are never written to).
    """
    v = s.values
    has = s.present
    n = s.n
    nan = np.full(n, np.nan)
    false = np.zeros(n, dtype=bool)
    f: Frame = {name: v[name] for name in v}
    ph, pco2, hco3 = v["ph"], v["pco2"], v["hco3"]
    f["sample_type"], f["hco3_source"] = s.sample_type, s.hco3_source
    f["refused"] = s.refused
    # the settings the rules compare against, as 0-d columns
    f["large_gap"] = np.float64(settings.large_anion_gap)
    f["ref_albumin"] = np.float64(settings.reference_albumin_g_l)
    f["sig_high"] = np.float64(settings.strong_ion_gap_high)
    f["osm_gap_high"] = np.float64(settings.osmolal_gap_high)
    if "urea" in has and "bun" in has:
        f["urea_used"] = np.fmax(v["urea"], v["bun"] * (10.0 / 28.014))  # never both (model)
    elif "bun" in has:
        f["urea_used"] = v["bun"] * (10.0 / 28.014)
    else:
        f["urea_used"] = v["urea"]

    limits = interval_columns(s.sample_type, ("ph", "pco2", "hco3", "sbe"), settings)
    # Order: sample type, then the site's paediatric intervals below 18 years, then the
    # third-trimester ones on the other rows (a row read as paediatric is not also read
    # as pregnant: the published pregnancy intervals are adult ones [abbassi_ghanavati_2009]).
    f["paediatric_site"] = paediatric_rows(s.sample_type, v["age"], settings)
    limits = paediatric_columns(limits, f["paediatric_site"], settings)
    limits = pregnancy_columns(limits, s.sample_type, s.pregnancy, f["paediatric_site"])
    for name, (lo, hi) in limits.items():
        f[f"{name}_lo"], f[f"{name}_hi"] = lo, hi
    f["pregnancy"] = s.pregnancy if s.pregnancy is not None else np.zeros(n, dtype=np.int8)
    f["lactate_high_limit"] = np.float64(LACTATE_HIGH)
    ph_mid = (f["ph_lo"] + f["ph_hi"]) * 0.5

    # --- 1. trust: internal consistency (Henderson-Hasselbalch) ---------------
    f["h_nmol_per_l"] = chem.h_ion_nmol(ph)
    calc = chem.hco3_from_ph_pco2(ph, pco2)
    f["hco3_calculated"] = calc
    tco2 = chem.total_co2(calc, pco2)
    f["total_co2_calculated"] = tco2
    f["h_kassirer_bleich"] = chem.h_ion_kassirer_bleich(pco2, hco3)
    # Each input's printed precision, read from the number as given (the kernel sees
    # numbers, not their text; a whole number is taken as printed to 1).
    f["ph_step"] = chem.printed_half_step(ph, chem.PH_MIN_DECIMALS)
    f["pco2_step"] = chem.printed_half_step(pco2)
    f["hco3_step"] = chem.printed_half_step(hco3)
    tol_a = chem.consistency_tolerance_analyser(pco2, calc, f["ph_step"], f["pco2_step"],
                                                f["hco3_step"])
    tol_c = chem.consistency_tolerance_chemistry(pco2, tco2, f["hco3_step"])
    diff_a = hco3 - calc
    diff_c = hco3 - tco2
    src = s.hco3_source
    chemistry = src == SOURCE_CHEMISTRY
    f["consistency_difference"] = _select(chemistry, diff_c, diff_a)
    f["consistency_tolerance"] = _select(chemistry, tol_c, tol_a)
    ok_a, ok_c = np.abs(diff_a) <= tol_a, np.abs(diff_c) <= tol_c
    bad_a, bad_c = np.abs(diff_a) > tol_a, np.abs(diff_c) > tol_c  # NaN is neither
    analyser, unknown = src == SOURCE_ANALYSER, src == SOURCE_UNKNOWN
    consistent = ((analyser | unknown) & ok_a) | (chemistry & ok_c)
    inconsistent = (analyser & bad_a) | (chemistry & bad_c) | (unknown & bad_a & bad_c)
    f["consistency"] = (consistent.view(np.int8) * CONSISTENT
                        + inconsistent.view(np.int8) * INCONSISTENT).astype(np.int8)
    f["consistency_needs_source"] = unknown & bad_a & ok_c
    f["consistency_tolerance_chemistry"] = tol_c
    f["consistency_difference_chemistry"] = diff_c

    # --- 2. processes: the bicarbonate reading -------------------------------
    # Compensation is judged from the gas: a chemistry total CO2 comes from another
    # sample and method, so the reading uses the HCO3- calculated from the gas's own
    # pH and pCO2 (the gap keeps the chemistry value, measured with Na+ and Cl-).
    hco3_gas = _select(chemistry, calc, hco3)
    f["hco3_reading"] = hco3_gas
    f["reading_from_gas"] = chemistry
    bic = _read(ph, pco2, hco3_gas, ph_mid, f["ph_lo"], f["ph_hi"], f["pco2_lo"], f["pco2_hi"],
                f["hco3_lo"], f["hco3_hi"], 24.0, BICARBONATE_RULES)
    # The metabolic compensation rules were derived in arterial blood. Venous pCO2 runs
    # higher by a variable amount [kelly_2010, byrne_2014], so a venous pCO2 above the
    # expected band is not read as a respiratory acidosis (not assessable) unless it lies
    # above the band widened by the largest published venous-arterial difference; one
    # below the band stays a respiratory alkalosis, since arterial pCO2 would be lower still.
    venous = s.sample_type == VENOUS
    f["expected_pco2_venous_high"] = bic.expected_pco2[1] + VENOUS_PCO2_EXCESS
    beyond = venous & bic.add["resp_acid"] & (pco2 > f["expected_pco2_venous_high"])
    f["venous_beyond_band"] = beyond
    f["venous_compensation_unassessable"] = venous & bic.add["resp_acid"] & ~beyond
    bic.add["resp_acid"] = bic.add["resp_acid"] & (~venous | beyond)
    for key in ("met_acid", "met_alk", "resp_acid", "resp_alk"):
        f[f"prim_{key}"] = bic.prim[key]
        f[f"add_{key}"] = bic.add[key]
    f["expected_pco2_low"], f["expected_pco2_high"] = bic.expected_pco2
    f["expected_hco3_acute_low"], f["expected_hco3_acute_high"] = bic.expected_acute
    f["expected_hco3_chronic_low"], f["expected_hco3_chronic_high"] = bic.expected_chronic
    f["metabolic_only"], f["respiratory_only"] = bic.metabolic_only, bic.respiratory_only
    f["expected_pco2_venous_high"] = f["expected_pco2_venous_high"] + nan_unless(bic.metabolic_only)

    # --- gaps -------------------------------------------------------------------
    f["anion_gap"] = gaps.anion_gap(v["na"], v["cl"], hco3)
    f["anion_gap_k"] = gaps.anion_gap_with_k(v["na"], v["k"], v["cl"], hco3) if "k" in has else nan
    # The gap is judged with K+ when the laboratory says so and K+ was measured; a row
    # without K+ falls back to the gap without K+ and its own interval (and says so).
    if settings.anion_gap_uses_k and "k" in has:
        with_k = ~np.isnan(v["k"])
        judged = np.where(with_k, f["anion_gap_k"], f["anion_gap"])
        lo_k, hi_k, mid_k = settings.anion_gap_k_low, settings.anion_gap_k_high, settings.gap_normal
        lo_n, hi_n = settings.anion_gap_low, settings.anion_gap_high
        wk = with_k.astype(np.float64)
        f["gap_low"] = lo_n + (lo_k - lo_n) * wk
        f["gap_high_limit"] = hi_n + (hi_k - hi_n) * wk
        f["gap_normal"] = (lo_n + hi_n) / 2 + (mid_k - (lo_n + hi_n) / 2) * wk
    else:
        with_k = false
        judged = f["anion_gap"]
        lo_n, hi_n = settings.anion_gap_low, settings.anion_gap_high
        f["gap_low"] = np.float64(lo_n)
        f["gap_high_limit"] = np.float64(hi_n)
        f["gap_normal"] = np.float64((lo_n + hi_n) / 2)
    f["gap_with_k"] = with_k
    f["gap_k_fallback"] = (np.isnan(v["k"]) & ~f["refused"]) if settings.anion_gap_uses_k else false
    if "albumin" in has:
        corrected = gaps.albumin_corrected_gap(judged, v["albumin"], settings.reference_albumin_g_l)
        gap = np.where(np.isnan(v["albumin"]), judged, corrected)
    else:
        corrected, gap = nan, judged
    f["anion_gap_corrected"] = corrected
    f["gap_judged"] = gap
    gap_known = ~np.isnan(gap)
    gap_high = gap > f["gap_high_limit"]
    gap_large = gap >= settings.large_anion_gap
    f["gap_known"], f["gap_high"], f["gap_large"] = gap_known, gap_high, gap_large
    f["gap_not_assessable"] = ~gap_known & ~s.refused
    f["delta_ratio"] = gaps.delta_ratio(gap, hco3, f["gap_normal"])
    f["delta_gap"] = gaps.delta_gap(gap, hco3, f["gap_normal"])
    f["delta_min_fall"] = np.float64(gaps.DELTA_MIN_HCO3_FALL)

    # --- the disorder slots ---------------------------------------------------
    p, a = bic.prim, bic.add
    any_primary = p["met_acid"] | p["met_alk"] | p["resp_acid"] | p["resp_alk"]
    # A raised (albumin-corrected) gap signals a high-gap acidosis whatever the HCO3-
    # [berend_2014, kraut_madias_2007]; the large-gap setting [gabow_1980] only grades
    # the wording (below it a third of raised gaps had no organic acid identified).
    gap_only = ~p["met_acid"] & ~a["met_acid"] & gap_high
    f["gap_reveals_acidosis"] = gap_only & gap_large
    f["gap_raised_smaller"] = gap_only & ~gap_large
    acid_primary = p["met_acid"] | (gap_only & ~any_primary)
    acid_any = p["met_acid"] | a["met_acid"] | gap_only
    role_acid = _role(acid_primary, acid_any)
    role_high = role_acid * gap_high
    ratio = f["delta_ratio"]
    ratio_ok = ~np.isnan(ratio)
    dgap = f["delta_gap"]
    high_active = role_high > ROLE_NONE
    # With a respiratory alkalosis, part of the fall in HCO3- is its compensation, so a
    # low ratio against a baseline of 24 does not show a second acidosis (not assessable).
    # Below the minimum fall the delta gap (band +/-6) is read in place of the ratio.
    resp_alk_present = p["resp_alk"] | a["resp_alk"]
    low_ratio = high_active & ((ratio < 0.8) | (~ratio_ok & (dgap < -gaps.DELTA_GAP_BAND)))
    hidden_normal_gap = low_ratio & ~resp_alk_present
    f["delta_low_or_resp"] = low_ratio & resp_alk_present
    f["delta_hidden_normal_gap"] = hidden_normal_gap
    role_normal = role_acid * (gap_known & ~gap_high) + ADDITIONAL * hidden_normal_gap
    # Below 0.4 the acidosis is mostly normal-gap: that part leads [delta_bands].
    mostly_normal = hidden_normal_gap & (ratio < 0.4) & (role_high == PRIMARY)
    role_normal = role_normal + (PRIMARY - ADDITIONAL) * mostly_normal
    role_high = role_high + (ADDITIONAL - PRIMARY) * mostly_normal
    resp_acid_present = p["resp_acid"] | a["resp_acid"]
    high_hco3_for_gap = high_active & ((ratio > 2.0)
                                       | (~ratio_ok & (dgap > gaps.DELTA_GAP_BAND)))
    f["delta_alkalosis"] = high_hco3_for_gap & ~resp_acid_present
    f["delta_alkalosis_or_resp"] = high_hco3_for_gap & resp_acid_present
    f["role_met_acid_high"] = role_high.astype(np.int8)
    f["delta_applies"] = role_high > ROLE_NONE  # the delta ratio and gap mean nothing else
    f["role_met_acid_normal"] = role_normal.astype(np.int8)
    f["role_met_acid_unknown"] = (role_acid * ~gap_known).astype(np.int8)
    f["role_met_alk"] = _role(p["met_alk"], a["met_alk"] | f["delta_alkalosis"])
    f["role_resp_acid"] = _role(p["resp_acid"], a["resp_acid"])
    f["role_resp_alk"] = _role(p["resp_alk"], a["resp_alk"])
    extra_met = a["met_acid"] | a["met_alk"] | f["delta_alkalosis"] | gap_only
    blurred = (bic.timing > TIMING_NONE) & extra_met
    f["timing_blurred"] = blurred  # a second metabolic process also moves HCO3-
    f["timing_resp"] = (bic.timing + (INDETERMINATE - bic.timing) * blurred).astype(np.int8)
    nothing = ~(high_active | (role_normal > 0) | (f["role_met_acid_unknown"] > 0)
                | (f["role_met_alk"] > 0)
                | (f["role_resp_acid"] > 0) | (f["role_resp_alk"] > 0))
    ph_outside = (ph < f["ph_lo"]) | (ph > f["ph_hi"])
    f["ph_unexplained"] = nothing & ph_outside
    f["no_disorder"] = nothing & ~ph_outside

    # --- the base-excess reading (independent) -------------------------------
    sbe = chem.standard_base_excess(ph, calc)
    f["standard_base_excess"] = sbe
    be = _read(ph, pco2, sbe, ph_mid, f["ph_lo"], f["ph_hi"], f["pco2_lo"], f["pco2_hi"],
               f["sbe_lo"], f["sbe_hi"], 0.0, BASE_EXCESS_RULES)
    agree = np.ones(n, dtype=bool)
    for key in ("met_acid", "met_alk", "resp_acid", "resp_alk"):
        f[f"be_{key}"] = be.prim[key] | be.add[key]
        f[f"bic_{key}"] = p[key] | a[key]
        agree &= f[f"be_{key}"] == f[f"bic_{key}"]
    f["be_expected_pco2_low"], f["be_expected_pco2_high"] = be.expected_pco2
    f["be_expected_sbe_acute_low"], f["be_expected_sbe_acute_high"] = be.expected_acute
    f["be_expected_sbe_chronic_low"], f["be_expected_sbe_chronic_high"] = be.expected_chronic
    f["be_timing"] = be.timing
    f["be_metabolic_only"], f["be_respiratory_only"] = be.metabolic_only, be.respiratory_only
    f["readings_agree"] = agree

    # --- Stewart quantities -----------------------------------------------------
    if {"k", "ica", "lactate"} <= has:
        f["sid_apparent"] = gaps.sid_apparent(v["na"], v["k"], v["ica"], v["mg"], v["cl"], v["lactate"])
    else:
        f["sid_apparent"] = nan
    if {"albumin", "phosphate"} <= has:
        f["sid_effective"] = gaps.sid_effective(calc, v["albumin"], v["phosphate"], ph)
    else:
        f["sid_effective"] = nan
    f["strong_ion_gap"] = f["sid_apparent"] - f["sid_effective"]
    if "albumin" in has:
        (f["story_na_cl"], f["story_albumin"], f["story_lactate"],
         f["story_other"]) = gaps.story_partition(v["na"], v["cl"], v["albumin"], v["lactate"], sbe)
    else:
        f["story_na_cl"] = f["story_albumin"] = f["story_lactate"] = f["story_other"] = nan

    # --- osmolal gap --------------------------------------------------------------
    if "glucose" in has and ("urea" in has or "bun" in has):
        f["osmolality_calculated"] = gaps.calculated_osmolality(v["na"], v["glucose"], f["urea_used"])
    else:
        f["osmolality_calculated"] = nan
    if "osmolality" in has:
        f["osmolal_gap"] = gaps.osmolal_gap(v["osmolality"], f["osmolality_calculated"])
    else:
        f["osmolal_gap"] = nan

    # --- oxygenation (arterial only) ----------------------------------------------
    arterial = s.sample_type == ARTERIAL
    f["arterial"] = arterial
    f["pb_used"] = np.fmax(v["pb"], oxy.SEA_LEVEL_MMHG * np.isnan(v["pb"])) if "pb" in has else (
        np.float64(oxy.SEA_LEVEL_MMHG))
    if "fio2" in has and arterial.any():
        blank = nan_unless(arterial)
        alveolar = oxy.alveolar_po2(v["fio2"], f["pb_used"], pco2)
        f["alveolar_po2"] = alveolar + blank
        f["aa_gradient"] = oxy.aa_gradient(alveolar, v["po2"]) + blank
        room_air = (v["fio2"] >= ROOM_AIR[0]) & (v["fio2"] <= ROOM_AIR[1])
        f["room_air"] = room_air
        # The age rule is an adult rule: no expectation below 18 years.
        f["aa_expected"] = oxy.expected_aa_gradient(v["age"]) + nan_unless(
            arterial & room_air & ~(v["age"] < ADULT_AGE))
        f["pf_ratio"] = oxy.pf_ratio(v["po2"], v["fio2"]) + blank
        f["pf_ratio_altitude"] = oxy.pf_ratio_for_altitude(f["pf_ratio"], f["pb_used"])
        f["po2_above_alveolar"] = arterial & (v["po2"] > alveolar + 10.0)
    else:
        f["alveolar_po2"] = f["aa_gradient"] = f["aa_expected"] = f["pf_ratio"] = nan
        f["pf_ratio_altitude"] = nan
        f["room_air"] = f["po2_above_alveolar"] = false

    f["below_adult_age"] = v["age"] < ADULT_AGE

    # --- temperature (reported, not used: interpretation is at 37 degC) ------------
    if "temperature" in has:
        t = v["temperature"]
        differs = np.abs(t - 37.0) >= 0.5
        blank = nan_unless(differs)
        f["temperature_differs"] = differs
        f["ph_at_temperature"] = chem.ph_at_temperature(ph, t) + blank
        f["pco2_at_temperature"] = chem.pco2_at_temperature(pco2, t) + blank
        f["po2_at_temperature"] = (chem.po2_at_temperature(v["po2"], t) + blank
                                   if "po2" in has else nan)
    else:
        f["temperature_differs"] = false
        f["ph_at_temperature"] = f["pco2_at_temperature"] = f["po2_at_temperature"] = nan
    return f
