"""The rule table: every finding the tool can make, as data.

Each rule has a stable code, a section (trust, process, detail: the order of the
three questions), a severity, a vectorised predicate over the engine's frame, a
one-line statement, its working (formula, inputs, result), a "why" for the docs
and the detail view, and citation keys into ``acidbase.references``.

Statements and working are templates filled from the frame's values at one row
(``str.format`` fields name frame columns); a few need wording that depends on
the row and are functions of the row instead.  docs/rules.md is generated from
this table (``python -m acidbase.docs``); a test fails when it drifts.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any, Self

import numpy as np

from .compensation import METABOLIC_ALKALOSIS_PCO2_CEILING
from .engine import (
    ACUTE,
    ARTERIAL,
    CAPILLARY,
    CHRONIC,
    CONSISTENT,
    CRITICAL,
    INCONSISTENT,
    PH_LIFE,
    SOURCE_ANALYSER,
    SOURCE_CHEMISTRY,
    VENOUS,
    VENOUS_PCO2_EXCESS,
    Frame,
)
from .fields import HCO3_SOURCES, NUMERIC, PREGNANCY_STATES, SAMPLE_TYPES
from .gaps import DELTA_GAP_BAND, DELTA_MIN_HCO3_FALL
from .reference import ADULT_AGE, LACTATE_HIGH, NEONATE_AGE

Row = Mapping[str, Any]
Text = str | Callable[[Row], str]

SECTIONS = ("trust", "process", "detail")
SEVERITIES = ("info", "caution", "critical")


@dataclass(frozen=True)
class Rule:
    code: str
    section: str
    severity: str
    title: str
    when: Callable[[Frame], np.ndarray]
    text: Text
    working: Text
    why: str
    refs: tuple[str, ...]
    fires: tuple[Mapping[str, Any], ...] = ()
    """Example panels (``Panel`` keywords) on which the rule fires."""
    quiet: tuple[Mapping[str, Any], ...] = ()
    """Example panels on which it stays quiet."""


def _process_word(r: Row) -> str:
    return "respiratory acidosis" if r["prim_resp_acid"] else "respiratory alkalosis"


def number_text(x: float, spec: str) -> str:
    """``format(x, spec)``, except that a value that rounds to zero carries no minus
    sign: -0.01 with ".1f" is "0.0" ("+0.0" with "+.1f"), as in the batch CSV, since
    "-0.0" reads as a value below zero."""
    text = format(x, spec)
    if text.lstrip().startswith("-") and float(text) == 0.0:
        return format(0.0, spec)
    return text


def _fmt(x: float, spec: str = ".1f") -> str:
    return "n/a" if x is None or not np.isfinite(x) else number_text(x, spec)


def shown(x: float, limit: float, spec: str = ".0f") -> str:
    """``x`` printed with ``spec``, or with as many more decimals (up to 3) as it takes
    for the printed number to lie on the same side of ``limit`` as ``x`` itself: 45.4
    against a limit of 45 prints "45.4", not "45", so no text reads "45 above 45"."""
    if x is None or not np.isfinite(x):
        return "n/a"
    decimals = int(spec[1:-1] or 0) if spec.startswith(".") and spec.endswith("f") else None
    if decimals is None or limit is None or not np.isfinite(limit) or x == limit:
        return number_text(x, spec)
    for d in range(decimals, 4):
        text = number_text(x, f".{d}f")
        if (float(text) - limit) * (x - limit) > 0:
            return text
    return number_text(x, ".3f")


def _extreme_mask(f: Frame) -> np.ndarray:
    out = np.zeros(f["ph"].shape, dtype=bool)
    for spec in NUMERIC:
        lo, hi = spec.physiologic
        out |= (f[spec.name] < lo) | (f[spec.name] > hi)
    return out


def _extreme_text(r: Row) -> str:
    items = []
    for spec in NUMERIC:
        lo, hi = spec.physiologic
        x = r[spec.name]
        if np.isfinite(x) and (x < lo or x > hi):
            items.append(f"{spec.title} {x:.6g} {spec.unit} (usual extremes {lo:g} to {hi:g})")
    return ("Extreme value, implausible but possible (such values are measured and "
            "published): verify the sample and the entry before use: " + "; ".join(items) + ".")


def _critical_mask(f: Frame) -> np.ndarray:
    lo, hi = CRITICAL["ph"]
    c_lo, c_hi = CRITICAL["pco2"]
    arterial = f["sample_type"] == ARTERIAL
    return ((f["ph"] < lo) | (f["ph"] > hi) | (f["pco2"] < c_lo) | (f["pco2"] > c_hi)
            | (arterial & (f["po2"] < CRITICAL["po2_low"])))


def _critical_text(r: Row) -> str:
    lo, hi = CRITICAL["ph"]
    c_lo, c_hi = CRITICAL["pco2"]
    items = []
    if r["ph"] < lo or r["ph"] > hi:
        items.append(f"pH {shown(r['ph'], lo if r['ph'] < lo else hi, '.2f')} (limits {lo:.2f}, "
                     f"{hi:.2f})")
    if r["pco2"] < c_lo or r["pco2"] > c_hi:
        items.append(f"pCO2 {shown(r['pco2'], c_lo if r['pco2'] < c_lo else c_hi)} mm[Hg] "
                     f"(limits {c_lo:.0f}, {c_hi:.0f})")
    if r["sample_type"] == ARTERIAL and r["po2"] < CRITICAL["po2_low"]:
        items.append(f"arterial pO2 {shown(r['po2'], CRITICAL['po2_low'])} mm[Hg] (limit "
                     f"{CRITICAL['po2_low']:.0f})")
    return ("In the critical-call range of a published laboratory handbook: " + "; ".join(items)
            + ". Follow the local critical-result procedure.")


def _source_name(r: Row) -> str:
    return {"analyser": "HCO3- calculated by the blood-gas analyser",
            "chemistry": "total CO2 measured by the chemistry analyser",
            "unknown": "HCO3- source not stated"}[HCO3_SOURCES[r["hco3_source"]]]


def _consistent_text(r: Row) -> str:
    what = ("measured total CO2 against calculated total CO2" if r["hco3_source"] == SOURCE_CHEMISTRY
            else "entered HCO3- against HCO3- calculated from pH and pCO2")
    return (f"pH, pCO2 and HCO3- agree (Henderson-Hasselbalch): {what} differ by "
            f"{r['consistency_difference']:+.1f} mmol/L, within the tolerance "
            f"+/-{r['consistency_tolerance']:.1f} ({_source_name(r)}).")


def _inconsistent_text(r: Row) -> str:
    d, t = r["consistency_difference"], r["consistency_tolerance"]
    if r["hco3_source"] == SOURCE_ANALYSER:
        cause = ("an analyser calculates HCO3- from its own pH and pCO2, so this points to an "
                 "entry or transcription error")
    elif r["hco3_source"] == SOURCE_CHEMISTRY:
        cause = ("more than analytic error and timing explain: check sample handling "
                 "(under-filled or uncapped tube, delay), the times of the two samples, and "
                 "transcription")
    else:
        cause = "larger than either an analyser-calculated HCO3- or a chemistry total CO2 allows"
    return (f"pH, pCO2 and HCO3- do not agree: HCO3- {r['hco3']:.1f} entered, "
            f"{r['hco3_calculated']:.1f} calculated from pH and pCO2 (difference {d:+.1f}, "
            f"tolerance +/-{t:.1f} mmol/L); {cause}. The reading below rests on numbers that "
            f"need checking first.")


def _hh_working(r: Row) -> str:
    return (f"HCO3 calc = 0.0307 x pCO2 x 10^(pH - 6.105) = 0.0307 x {r['pco2']:.1f} x "
            f"10^({r['ph']:.3f} - 6.105) = {r['hco3_calculated']:.2f} mmol/L; total CO2 calc = "
            f"{r['total_co2_calculated']:.2f}; [H+] = 10^(9 - pH) = {r['h_nmol_per_l']:.1f} "
            f"nmol/L, Kassirer-Bleich 24 x pCO2 / HCO3 = {_fmt(r['h_kassirer_bleich'])} nmol/L; "
            f"tolerance: analyser {_fmt(r['consistency_tolerance'] if r['hco3_source'] != SOURCE_CHEMISTRY else np.nan)}"
            f", chemistry {r['consistency_tolerance_chemistry']:.1f} mmol/L (the wider of the "
            f"CLIA-propagated band and the published agreement +/-5.33); printed precision read "
            f"from the numbers as given, a whole number taken as printed to 1: pH +/-"
            f"{r['ph_step']:g}, pCO2 +/-{r['pco2_step']:g}, HCO3- +/-{r['hco3_step']:g}")


def _primary_text(name: str, what: str) -> Callable[[Row], str]:
    """Primary process: pH (its side) and the component that moved, printed at the
    precision that shows its comparison with the limit."""
    def text(r: Row) -> str:
        side = "acidaemia" if r["ph"] < r["ph_lo"] else "alkalaemia" if r["ph"] > r["ph_hi"] else "normal pH"
        limit = r["ph_lo"] if r["ph"] < r["ph_lo"] else r["ph_hi"]
        return f"Primary {name}: pH {shown(r['ph'], limit, '.2f')} ({side}), {what.format_map(r)}."
    return text


def _timing_text(r: Row) -> str:
    word = _process_word(r)
    t = r["timing_resp"]
    acute = f"{r['expected_hco3_acute_low']:.1f}-{r['expected_hco3_acute_high']:.1f}"
    chronic = f"{r['expected_hco3_chronic_low']:.1f}-{r['expected_hco3_chronic_high']:.1f}"
    bands = f"HCO3- {r['hco3']:.1f}; acute band {acute}, chronic band {chronic} mmol/L"
    acid = bool(r["prim_resp_acid"])
    if t == ACUTE:
        other = "metabolic acidosis" if acid else "metabolic alkalosis"
        return (f"The {word} is consistent with an acute process (buffering only), or with a "
                f"chronic one plus a {other}: {bands}.")
    if t == CHRONIC:
        other = "metabolic alkalosis" if acid else "metabolic acidosis"
        return (f"The {word} is consistent with a chronic process (renal compensation in "
                f"place), or with an acute one plus a {other}: {bands}.")
    if r["timing_blurred"]:
        return (f"The {word} cannot be timed: a concurrent metabolic process also moves "
                f"HCO3- ({bands}).")
    return (f"The {word} cannot be timed: {bands}; between or across the bands (acute on "
            f"chronic, still adapting, or a small change where the bands overlap).")


def _within_text(r: Row, rule_name: str) -> str:
    """pCO2 inside the expected band, printed at the precision that shows it inside."""
    lo, hi = r["expected_pco2_low"], r["expected_pco2_high"]
    edge = lo if abs(r["pco2"] - lo) < abs(r["pco2"] - hi) else hi
    return (f"Respiratory compensation as expected: pCO2 {shown(r['pco2'], edge)} mm[Hg] within "
            f"{shown(lo, r['pco2'], '.1f')}-{shown(hi, r['pco2'], '.1f')}{rule_name}.")


def _above_band_text(r: Row, rule_name: str) -> str:
    """pCO2 above the expected band: an additional respiratory acidosis; for venous blood
    only beyond the band widened by the largest published venous-arterial difference."""
    name = f" {rule_name}" if rule_name else ""
    band = f"{r['expected_pco2_low']:.1f}-{r['expected_pco2_high']:.1f}"
    if r["sample_type"] == VENOUS:
        return (f"Venous pCO2 {shown(r['pco2'], r['expected_pco2_venous_high'])} mm[Hg] is above "
                f"the expected {band}{name} even widened by {VENOUS_PCO2_EXCESS:.0f} mm[Hg], the "
                f"largest published venous-arterial difference (upper limit "
                f"{r['expected_pco2_venous_high']:.1f}): an additional respiratory acidosis; "
                f"confirm with an arterial sample.")
    return (f"pCO2 {shown(r['pco2'], r['expected_pco2_high'])} mm[Hg] is above the expected "
            f"{band}{name}: an additional respiratory acidosis.")


def _be_disagree_text(r: Row) -> str:
    names = {"met_acid": "metabolic acidosis", "met_alk": "metabolic alkalosis",
             "resp_acid": "respiratory acidosis", "resp_alk": "respiratory alkalosis"}
    bic = [n for k, n in names.items() if r[f"bic_{k}"]] or ["none"]
    be = [n for k, n in names.items() if r[f"be_{k}"]] or ["none"]
    reasons = []
    if r["consistency"] == INCONSISTENT:
        reasons.append("SBE is computed from the HCO3- calculated from pH and pCO2, which "
                       "disagrees with the HCO3- entered (see the consistency verdict)")
    metabolic_differs = any(r[f"bic_{k}"] != r[f"be_{k}"] for k in ("met_acid", "met_alk"))
    if metabolic_differs:
        reasons.append(
            f"HCO3- {r['hco3']:.1f} against its interval {r['hco3_lo']:.0f}-{r['hco3_hi']:.0f} "
            f"and SBE {r['standard_base_excess']:+.1f} against {r['sbe_lo']:.1f} to "
            f"{r['sbe_hi']:+.1f} fall on different sides: plasma HCO3- also moves with pCO2 "
            f"(about 1 mmol/L per 10 mm[Hg] acutely), SBE does not")
    if any(r[f"bic_{k}"] != r[f"be_{k}"] for k in ("resp_acid", "resp_alk")):
        if np.isfinite(r["expected_pco2_low"]) and np.isfinite(r["be_expected_pco2_low"]):
            reasons.append(
                f"the expected pCO2 differs between the families (bicarbonate "
                f"{r['expected_pco2_low']:.2f}-{r['expected_pco2_high']:.2f}, base excess "
                f"{r['be_expected_pco2_low']:.2f}-{r['be_expected_pco2_high']:.2f} mm[Hg]) and "
                f"pCO2 {r['pco2']:.2f} lies inside one band only")
        elif not metabolic_differs:
            reasons.append("the two families' bands for the respiratory component part here")
    why = "; ".join(reasons) or "the two families' bands part here"
    return (f"The two readings disagree: bicarbonate rules give {', '.join(bic)}; base-excess "
            f"rules (SBE {r['standard_base_excess']:+.1f} mmol/L) give {', '.join(be)}. Why: "
            f"{why}. Read the panel with both in view.")


def _be_agrees_working(r: Row) -> str:
    """SBE = HCO3 - 24.8 + 16.2 x (pH - 7.40) = {hco3_calculated:.1f} - 24.8 + 16.2 x
    ({ph:.3f} - 7.40) = {standard_base_excess:+.1f}; beside a single metabolic process,
    expected pCO2 (metabolic) {be_expected_pco2_low:.1f}-{be_expected_pco2_high:.1f}"""
    text = (f"SBE = HCO3 - 24.8 + 16.2 x (pH - 7.40) = {r['hco3_calculated']:.1f} - 24.8 + "
            f"16.2 x ({r['ph']:.3f} - 7.40) = {r['standard_base_excess']:+.1f}")
    if np.isfinite(r["be_expected_pco2_low"]):  # only beside a single metabolic process
        text += (f"; expected pCO2 (metabolic) {r['be_expected_pco2_low']:.1f}-"
                 f"{r['be_expected_pco2_high']:.1f}")
    return text


def _pf_text(r: Row) -> str:
    pf = r["pf_ratio"]
    altitude = ""
    if np.isfinite(r["pf_ratio_altitude"]):
        altitude = (f"; PB {r['pb_used']:.0f} mm[Hg] is that of more than 1,000 m, so the Berlin "
                    f"bands are read on P/F x PB/760 = {r['pf_ratio_altitude']:.0f}")
        pf = r["pf_ratio_altitude"]
    if pf <= 100:
        band = "at or below 100, the range the Berlin definition calls severe"
    elif pf <= 200:
        band = "in 101-200, the range the Berlin definition calls moderate"
    elif pf <= 300:
        band = "in 201-300, the range the Berlin definition calls mild"
    else:
        band = "above 300, outside the Berlin ranges"
    return (f"PaO2/FiO2 {r['pf_ratio']:.0f} mm[Hg]{altitude}: {band} (the definition also needs "
            f"PEEP of at least 5 cmH2O, or CPAP for the mild range, timing, imaging and origin "
            f"criteria; this is not a diagnosis).")


def _oxy_not_read_text(r: Row) -> str:
    kind = SAMPLE_TYPES[r["sample_type"]]
    return (f"pO2 {r['po2']:.0f} mm[Hg] is not read as oxygenation: the sample is {kind}, and "
            f"only arterial pO2 reflects gas exchange.")


def _delta_band(r: Row) -> str:
    x = r["delta_ratio"]
    if not np.isfinite(x):
        return (f"not assessable: HCO3- fell {24.0 - r['hco3']:.1f} below 24, less than the "
                f"{DELTA_MIN_HCO3_FALL:.0f} mmol/L a ratio needs; the delta gap is read instead "
                f"(band +/-{DELTA_GAP_BAND:.0f})")
    if x < 0.4:
        return "below 0.4: mostly a normal-gap (hyperchloraemic) acidosis"
    if x < 0.8:
        return "0.4-0.8: high-gap and normal-gap acidosis together"
    if x <= 2.0:
        return "0.8-2: an uncomplicated high-gap acidosis"
    return "above 2: HCO3- higher than the gap predicts"


def _lactate_part(r: Row) -> str:
    """The measured lactate's share of the gap's rise, where lactate was measured."""
    if not np.isfinite(r["lactate"]):
        return "; lactate not measured"
    rise = r["gap_judged"] - r["gap_normal"]
    return (f"; the measured lactate {r['lactate']:.1f} mmol/L can account for up to "
            f"{max(min(r['lactate'], rise), 0.0):.1f} of the gap's rise of {rise:.1f} above its "
            f"baseline {r['gap_normal']:.1f}")


def _missing_gap_inputs(r: Row) -> str:
    missing = [name for name, key in (("Na+", "na"), ("Cl-", "cl")) if not np.isfinite(r[key])]
    return " and ".join(missing) or "the gap's inputs"


def _stewart_text(r: Row) -> str:
    mg = "" if np.isfinite(r["mg"]) else " (Mg2+ not measured, left out of SIDa)"
    return (f"Strong ion difference: apparent {r['sid_apparent']:.1f}, effective "
            f"{r['sid_effective']:.1f} mEq/L; strong ion gap {r['strong_ion_gap']:.1f}{mg}.")


def _aa_text(r: Row) -> str:
    base = (f"A-a gradient {r['aa_gradient']:.0f} mm[Hg] (alveolar pO2 {r['alveolar_po2']:.0f}, "
            f"FiO2 {r['fio2']:.2f}, PB {r['pb_used']:.0f})")
    if np.isfinite(r["aa_expected"]):
        base = base.replace(f"A-a gradient {r['aa_gradient']:.0f}",
                            f"A-a gradient {shown(r['aa_gradient'], r['aa_expected'])}", 1)
        return base + (f"; expected at most {r['aa_expected']:.1f} for age {r['age']:.0f} on "
                       f"room air.")
    if r["age"] < ADULT_AGE:
        return base + f"; no age-expected value below {ADULT_AGE:.0f} years (an adult rule)."
    if not r["room_air"]:
        return base + "; no age-expected value off room air (the age rule holds only at FiO2 0.21)."
    return base + "; age not given, so no age-expected value."


RULES: tuple[Rule, ...] = (
    # ---------------------------------------------------------------- trust
    Rule("T-HH-CONSISTENT", "trust", "info", "Internally consistent",
         lambda f: f["consistency"] == CONSISTENT, _consistent_text, _hh_working,
         "An analyser measures pH and pCO2 and calculates HCO3-; a typed-in or separately "
         "measured HCO3- that disagrees with the Henderson-Hasselbalch value shows an error "
         "somewhere. The tolerance is propagated from the inputs' uncertainty (docs/methods.md).",
         ("clsi_c46", "kassirer_bleich_1965", "clia_2024")),
    Rule("T-HH-INCONSISTENT", "trust", "critical", "Internally inconsistent",
         lambda f: f["consistency"] == INCONSISTENT, _inconsistent_text, _hh_working,
         "A discrepancy beyond the propagated tolerance: for an analyser's own HCO3- an entry "
         "error; for a chemistry total CO2, handling, timing or transcription.",
         ("clsi_c46", "clia_2024", "kim_2015", "chittamma_2008", "kumar_2017")),
    Rule("T-HH-SOURCE-NEEDED", "trust", "caution", "Consistency depends on the HCO3- source",
         lambda f: f["consistency_needs_source"],
         "Consistency not assessable: the difference {consistency_difference_chemistry:+.1f} "
         "mmol/L fits a separately measured total CO2 but not an analyser-calculated HCO3-; "
         "state the HCO3- source.", _hh_working,
         "The two sources carry different tolerances; the tool will not guess which applies.",
         ("clsi_c46", "clia_2024", "chittamma_2008")),
    Rule("T-PH-LIFE", "trust", "critical", "pH at the limit of life",
         lambda f: (f["ph"] < PH_LIFE[0]) | (f["ph"] > PH_LIFE[1]),
         lambda r: (f"pH {shown(r['ph'], PH_LIFE[0] if r['ph'] < PH_LIFE[0] else PH_LIFE[1], '.2f')}"
                    f" is outside {PH_LIFE[0]:.2f}-{PH_LIFE[1]:.2f}, the range traditionally "
                    f"compatible with life: verify the sample and the measurement at once."),
         "pH {ph:.3f}; [H+] {h_nmol_per_l:.0f} nmol/L",
         "Survivals outside the range are reported, so the value is not refused, but it calls "
         "for immediate verification.", ("life_limits",)),
    Rule("T-CRITICAL", "trust", "critical", "Critical-call value", _critical_mask, _critical_text,
         "pH {ph:.2f}; pCO2 {pco2:.0f} mm[Hg]; pO2 {po2:.0f} mm[Hg]",
         "Critical limits differ between laboratories; these are one published set.",
         ("iowa_critical",)),
    Rule("T-EXTREME-VALUE", "trust", "caution", "Extreme value", _extreme_mask, _extreme_text,
         "physiologic limits per field: acidbase.fields",
         "Accepted but beyond the values usually seen; typing and unit errors live here.",
         ("acidbase_design",)),
    Rule("T-PO2-ABOVE-ALVEOLAR", "trust", "caution", "pO2 above alveolar pO2",
         lambda f: f["po2_above_alveolar"],
         "pO2 {po2:.1f} mm[Hg] exceeds the alveolar pO2 {alveolar_po2:.1f} for FiO2 {fio2:.2f} "
         "by more than 10: impossible in steady state. Possible air in the sample, or the FiO2 "
         "is wrong.",
         "PAO2 = FiO2 x (PB - 47) - pCO2 x (FiO2 + (1 - FiO2) / 0.8) = {fio2:.2f} x "
         "({pb_used:.0f} - 47) - {pco2:.1f} x ({fio2:.2f} + (1 - {fio2:.2f}) / 0.8) = "
         "{alveolar_po2:.1f} mm[Hg]",
         "Air bubbles pull pO2 towards that of room air (about 150 mm[Hg]) and lower pCO2.",
         ("baird_2013", "merck_alveolar")),
    Rule("T-POSSIBLE-VENOUS", "trust", "caution", "Arterial label, venous-like pO2",
         lambda f: (f["sample_type"] == ARTERIAL) & (f["po2"] < 40.0),
         "Arterial pO2 {po2@40:.0f} mm[Hg] is either severe hypoxaemia or venous blood labelled "
         "arterial: check the sample, an oximetry saturation and the patient.",
         "pO2 {po2@40:.0f} mm[Hg] < 40", "Venous pO2 runs about 37 mm[Hg] below arterial.",
         ("baird_2013", "byrne_2014")),
    Rule("T-POSSIBLE-DELAY", "trust", "caution", "Possible delayed analysis",
         lambda f: (f["glucose"] < 3.0) & (f["lactate"] > 4.0),
         "Possible delayed analysis: glucose {glucose@3:.1f} low with lactate {lactate@4:.1f} "
         "mmol/L high, the pattern of glycolysis in a sample left standing (also seen in real "
         "disease); check the time from draw to analysis.",
         "glucose {glucose@3:.1f} < 3.0 and lactate {lactate@4:.1f} > 4.0 mmol/L",
         "Cells keep consuming glucose and producing lactate at room temperature; pCO2 rises "
         "and pH falls after about 30 minutes.", ("baird_2013", "cuhadar_2022")),
    Rule("T-POSSIBLE-DILUTION", "trust", "caution", "Possible dilution",
         lambda f: ((f["cl"] > 110.0) & (f["hco3"] < f["hco3_lo"]) & (f["pco2"] < f["pco2_lo"])
                    & (((f["k"] < 3.3).astype(np.int8) + (f["glucose"] < 3.5)
                        + (f["hb"] < 8.0) + (f["albumin"] < 25.0)) >= 2)),
         "Possible dilution by saline or a line flush: chloride {cl@110:.0f} high with pCO2, HCO3- "
         "and at least two of K+, glucose, haemoglobin, albumin low; ask how the sample was "
         "drawn before reading the acid-base picture.",
         "Cl {cl:.0f}; HCO3 {hco3:.1f}; pCO2 {pco2:.1f}; K {k}; glucose {glucose}; Hb {hb}; "
         "albumin {albumin}",
         "Saline or excess liquid heparin lowers pCO2, HCO3- and the measured analytes in "
         "proportion to the dilution, while chloride rises with saline.",
         ("baird_2013", "acidbase_design")),
    Rule("T-AG-NEGATIVE", "trust", "critical", "Negative anion gap",
         lambda f: f["anion_gap"] < 0.0,
         "Anion gap {anion_gap:.1f} mmol/L is negative: almost always an analytic or entry "
         "error (or bromide, iodide, lithium, a paraprotein); check Na+, Cl- and HCO3-.",
         "AG = Na - (Cl + HCO3) = {na:.0f} - ({cl:.0f} + {hco3:.1f}) = {anion_gap:.1f}",
         "Measured cations cannot fall short of measured anions in real plasma.",
         ("kraut_madias_2007",)),
    Rule("T-AG-LOW", "trust", "caution", "Low anion gap",
         lambda f: (f["anion_gap"] >= 0.0) & (f["anion_gap"] < f["gap_low"]),
         "Anion gap {anion_gap@gap_low:.1f} mmol/L is below {gap_low:.0f}: consider laboratory error, "
         "low albumin, a paraprotein, or halides.",
         "AG = Na - (Cl + HCO3) = {na:.0f} - ({cl:.0f} + {hco3:.1f}) = {anion_gap:.1f}",
         "A low gap is more often an error or hypoalbuminaemia than a disease of its own.",
         ("kraut_madias_2007",)),
    Rule("T-SAMPLE-UNKNOWN", "trust", "info", "Sample type not stated",
         lambda f: f["sample_type"] == SAMPLE_TYPES.index("unknown"),
         "Sample type not stated: arterial intervals are used for pH, pCO2 and HCO3-, and "
         "pO2 is not read as oxygenation.", "sample_type = unknown",
         "Venous and arterial values differ; a venous pO2 says nothing of gas exchange.",
         ("aarc_2013", "kelly_2010")),
    Rule("T-SAMPLE-VENOUS", "trust", "info", "Venous sample",
         lambda f: f["sample_type"] == VENOUS,
         "Venous sample: venous intervals used (pH {ph_lo:.2f}-{ph_hi:.2f}, pCO2 "
         "{pco2_lo:.0f}-{pco2_hi:.0f} mm[Hg], HCO3- {hco3_lo:.0f}-{hco3_hi:.0f} mmol/L).",
         "arterial intervals shifted by mean arterial-venous differences (pH 0.035, pCO2 5.7, "
         "HCO3 1.41)",
         "Venous pH and HCO3- track arterial values closely; pCO2 does not.",
         ("kelly_2010", "aarc_2013")),
    Rule("T-SAMPLE-CAPILLARY", "trust", "info", "Capillary sample",
         lambda f: f["sample_type"] == CAPILLARY,
         "Capillary sample: arterial intervals used for pH, pCO2 and HCO3-; pO2 is not read as "
         "oxygenation.", "sample_type = capillary",
         "Arterialised capillary pH and pCO2 approximate arterial values; pO2 underestimates.",
         ("aarc_2013",)),
    Rule("T-PREGNANCY-INTERVALS", "trust", "info", "Third-trimester intervals",
         lambda f: (f["pregnancy"] == PREGNANCY_STATES.index("third_trimester"))
         & ~f["paediatric_site"],
         lambda r: ("Pregnancy, third trimester: " + (
             f"pH, pCO2 and HCO3- read against published third-trimester intervals (pH "
             f"{r['ph_lo']:.2f}-{r['ph_hi']:.2f}, pCO2 {r['pco2_lo']:.0f}-{r['pco2_hi']:.0f} "
             f"mm[Hg], HCO3- {r['hco3_lo']:.0f}-{r['hco3_hi']:.0f} mmol/L); the compensation rules "
             f"were derived outside pregnancy, whose baseline is a compensated respiratory "
             f"alkalosis" if r["sample_type"] != VENOUS else
             "no published venous intervals in pregnancy, so the venous adult intervals are "
             "used; read the respiratory component with care") + "."),
         "intervals: pH {ph_lo:.2f}-{ph_hi:.2f}; pCO2 {pco2_lo:.0f}-{pco2_hi:.0f}; HCO3 "
         "{hco3_lo:.0f}-{hco3_hi:.0f}; SBE {sbe_lo:.1f} to {sbe_hi:.1f}",
         "Pregnancy lowers pCO2 and HCO3-; adult intervals would read a normal pregnancy as "
         "a respiratory alkalosis.",
         ("abbassi_ghanavati_2009", "hankins_1996")),
    # ---------------------------------------------------------------- processes
    Rule("P-ADULT-RULES-ONLY", "process", "caution", "Adult rules applied below 18",
         lambda f: f["below_adult_age"],
         lambda r: (f"Age {r['age']:.2f} years"
                    + (" (a neonate)" if r["age"] < NEONATE_AGE else "")
                    + (f": pH, pCO2, HCO3- and SBE are read against the site's own paediatric "
                       f"intervals (pH {r['ph_lo']:.2f}-{r['ph_hi']:.2f}, pCO2 "
                       f"{r['pco2_lo']:.0f}-{r['pco2_hi']:.0f} mm[Hg], HCO3- "
                       f"{r['hco3_lo']:.0f}-{r['hco3_hi']:.0f} mmol/L, SBE {r['sbe_lo']:.1f} to "
                       f"{r['sbe_hi']:.1f} mmol/L; pregnancy intervals not applied), but the "
                       f"compensation rules, the anion-gap interval and the A-a age rule remain "
                       f"adult ones, not established below {ADULT_AGE:.0f}; no A-a expectation is "
                       f"given." if r["paediatric_site"] else
                       f": the reference intervals, the compensation rules, the anion-gap "
                       f"interval and the A-a age rule used here are adult ones and are not "
                       f"established below {ADULT_AGE:.0f}; no A-a expectation is given. Read "
                       f"the processes with paediatric intervals (not set here).")),
         f"age {{age:.2f}} < {ADULT_AGE:.0f} years",
         "Children and especially neonates have other intervals (lower pCO2 and HCO3- in "
         "infancy) and the rules were fitted in adults.",
         ("iowa_critical", "klaestrup_2011", "albert_1967")),
    Rule("P-COMPENSATION-FROM-GAS", "process", "info", "Compensation judged from the gas",
         lambda f: f["reading_from_gas"] & np.isfinite(f["hco3_calculated"]),
         "The primary process and compensation are judged from HCO3- {hco3_calculated:.1f} "
         "calculated from the gas's own pH and pCO2, not from the chemistry total CO2 "
         "{hco3:.1f} (another sample and method); the anion gap uses the chemistry value.",
         "HCO3 used for the reading = 0.0307 x {pco2:.1f} x 10^({ph:.3f} - 6.105) = "
         "{hco3_reading:.2f} mmol/L",
         "The compensation rules relate pCO2 to the HCO3- of the same blood; a chemistry "
         "total CO2 differs from it by -4 to +5 mmol/L in method comparisons.",
         ("albert_1967", "chittamma_2008", "kumar_2017")),
    Rule("P-NONE", "process", "info", "No acid-base disorder",
         lambda f: f["no_disorder"] & ~f["refused"],
         lambda r: (f"No acid-base disorder found: pH {r['ph']:.2f}, pCO2 {r['pco2']:.0f} mm[Hg] "
                    f"and HCO3- {r['hco3']:.1f} mmol/L within their intervals"
                    + ("; anion gap not assessable (Na+ or Cl- not given)." if not r["gap_known"]
                       else ", anion gap not raised." if not r["gap_high"] else
                       "; the anion gap is raised (see below).")),
         "pH {ph_lo:.2f}-{ph_hi:.2f}; pCO2 {pco2_lo:.0f}-{pco2_hi:.0f}; HCO3 {hco3_lo:.0f}-"
         "{hco3_hi:.0f}; gap {gap_judged:.1f} <= {gap_high_limit:.0f}",
         "Normal values do not exclude offsetting disorders; the gap and SBE are shown below.",
         ("narins_emmett_1980", "klaestrup_2011")),
    Rule("P-PH-UNEXPLAINED", "process", "caution", "pH not explained by pCO2 or HCO3-",
         lambda f: f["ph_unexplained"],
         "pH {ph:.2f} is outside {ph_lo:.2f}-{ph_hi:.2f} while pCO2 {pco2:.0f} mm[Hg] and "
         "HCO3- {hco3:.1f} mmol/L sit at their reference values: no process is assessable "
         "from these numbers; check them (see the consistency verdict).",
         "pH {ph:.3f}; pCO2 {pco2:.1f} vs {pco2_lo:.0f}-{pco2_hi:.0f}; HCO3 {hco3:.1f} vs "
         "{hco3_lo:.0f}-{hco3_hi:.0f}",
         "An acidaemia or alkalaemia needs a component that moved; none did.",
         ("narins_emmett_1980", "clsi_c46")),
    Rule("P-PRIMARY-METABOLIC-ACIDOSIS", "process", "caution", "Primary metabolic acidosis",
         lambda f: f["prim_met_acid"],
         _primary_text("metabolic acidosis", "HCO3- {hco3_reading@hco3_lo:.1f} mmol/L below {hco3_lo:.0f}"),
         "pH {ph:.3f} vs {ph_lo:.2f}-{ph_hi:.2f}; HCO3 {hco3:.1f} vs {hco3_lo:.0f}-{hco3_hi:.0f}",
         "The primary process is the abnormal component that moves pH the way it went.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-PRIMARY-METABOLIC-ALKALOSIS", "process", "caution", "Primary metabolic alkalosis",
         lambda f: f["prim_met_alk"],
         _primary_text("metabolic alkalosis", "HCO3- {hco3_reading@hco3_hi:.1f} mmol/L above {hco3_hi:.0f}"),
         "pH {ph:.3f} vs {ph_lo:.2f}-{ph_hi:.2f}; HCO3 {hco3:.1f} vs {hco3_lo:.0f}-{hco3_hi:.0f}",
         "The primary process is the abnormal component that moves pH the way it went.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-PRIMARY-RESPIRATORY-ACIDOSIS", "process", "caution", "Primary respiratory acidosis",
         lambda f: f["prim_resp_acid"],
         _primary_text("respiratory acidosis", "pCO2 {pco2@pco2_hi:.0f} mm[Hg] above {pco2_hi:.0f}"),
         "pH {ph:.3f} vs {ph_lo:.2f}-{ph_hi:.2f}; pCO2 {pco2:.1f} vs {pco2_lo:.0f}-{pco2_hi:.0f}",
         "The primary process is the abnormal component that moves pH the way it went.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-PRIMARY-RESPIRATORY-ALKALOSIS", "process", "caution", "Primary respiratory alkalosis",
         lambda f: f["prim_resp_alk"],
         _primary_text("respiratory alkalosis", "pCO2 {pco2@pco2_lo:.0f} mm[Hg] below {pco2_lo:.0f}"),
         "pH {ph:.3f} vs {ph_lo:.2f}-{ph_hi:.2f}; pCO2 {pco2:.1f} vs {pco2_lo:.0f}-{pco2_hi:.0f}",
         "The primary process is the abnormal component that moves pH the way it went.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-COMBINED", "process", "caution", "Combined respiratory and metabolic process",
         lambda f: (f["prim_met_acid"] & f["prim_resp_acid"]) | (f["prim_met_alk"] & f["prim_resp_alk"]),
         "Both components move pH the same way (pCO2 {pco2:.0f} mm[Hg], HCO3- {hco3:.1f} "
         "mmol/L): a combined disorder, with no compensation to assess.",
         "pCO2 {pco2:.1f} vs {pco2_lo:.0f}-{pco2_hi:.0f}; HCO3 {hco3:.1f} vs {hco3_lo:.0f}-{hco3_hi:.0f}",
         "Compensation never moves the other component in the same direction as the primary.",
         ("narins_emmett_1980",)),
    Rule("P-WINTERS-MET", "process", "info", "Respiratory compensation as expected",
         lambda f: (f["metabolic_only"] & f["prim_met_acid"] & (f["pco2"] >= f["expected_pco2_low"])
                    & (f["pco2"] <= f["expected_pco2_high"])),
         lambda r: _within_text(r, " (Winter's formula)"),
         "expected pCO2 = 1.5 x HCO3 + 8 +/- 2 = 1.5 x {hco3_reading:.2f} + 8 = "
         "{expected_pco2_low:.2f}-{expected_pco2_high:.2f} mm[Hg]",
         "Winter's formula is the regression of pCO2 on HCO3- in metabolic acidosis with its "
         "95% band.", ("albert_1967",)),
    Rule("P-WINTERS-ABOVE", "process", "caution", "pCO2 above Winter's band",
         lambda f: f["prim_met_acid"] & f["add_resp_acid"],
         lambda r: _above_band_text(r, "(Winter's formula)"),
         "expected pCO2 = 1.5 x {hco3_reading:.2f} + 8 +/- 2 = {expected_pco2_low:.2f}-"
         "{expected_pco2_high:.2f}",
         "Ventilation is less than the acidosis calls for.", ("albert_1967", "kelly_2010")),
    Rule("P-WINTERS-BELOW", "process", "caution", "pCO2 below Winter's band",
         lambda f: f["prim_met_acid"] & f["add_resp_alk"],
         "pCO2 {pco2@expected_pco2_low:.0f} mm[Hg] is below the expected {expected_pco2_low:.1f}-"
         "{expected_pco2_high:.1f} (Winter's formula): an additional respiratory alkalosis.",
         "expected pCO2 = 1.5 x {hco3_reading:.2f} + 8 +/- 2 = {expected_pco2_low:.2f}-"
         "{expected_pco2_high:.2f}",
         "Ventilation is more than the acidosis calls for.", ("albert_1967",)),
    Rule("P-MALK-EXPECTED", "process", "info", "Compensation of metabolic alkalosis as expected",
         lambda f: (f["metabolic_only"] & f["prim_met_alk"] & (f["pco2"] >= f["expected_pco2_low"])
                    & (f["pco2"] <= f["expected_pco2_high"])),
         lambda r: _within_text(r, ""),
         "expected pCO2 = 40 + 0.7 x (HCO3 - 24) +/- 5 = 40 + 0.7 x ({hco3_reading:.2f} - 24) = "
         "{expected_pco2_low:.2f}-{expected_pco2_high:.2f} mm[Hg]",
         "pCO2 rises about 0.7 mm[Hg] per mmol/L of HCO3- above 24; the band is wide.",
         ("berend_2014", "kidney360_2022")),
    Rule("P-MALK-CEILING", "process", "caution", "pCO2 beyond usual compensation",
         lambda f: (f["metabolic_only"] & f["prim_met_alk"] & (f["pco2"] >= f["expected_pco2_low"])
                    & (f["pco2"] <= f["expected_pco2_high"])
                    & (f["pco2"] > METABOLIC_ALKALOSIS_PCO2_CEILING)
                    & (f["sample_type"] != VENOUS)),
         "pCO2 {pco2@55:.0f} mm[Hg] lies in the expected band but above about "
         f"{METABOLIC_ALKALOSIS_PCO2_CEILING:.0f} mm[Hg], which respiratory compensation for a "
         "metabolic alkalosis rarely exceeds: an additional respiratory acidosis cannot be "
         "excluded.",
         f"pCO2 {{pco2@55:.1f}} > {METABOLIC_ALKALOSIS_PCO2_CEILING:.0f} mm[Hg]; expected band "
         "{expected_pco2_low:.1f}-{expected_pco2_high:.1f}",
         "The 0.7 slope keeps rising with HCO3-; hypoventilation does not. A rule of thumb "
         "(55 to 60 mm[Hg] in teaching tables), so a caution, not a verdict; venous pCO2 runs "
         "higher and is not read against it.",
         ("malk_pco2_ceiling", "berend_2014", "kidney360_2022")),
    Rule("P-MALK-ABOVE", "process", "caution", "pCO2 above the metabolic-alkalosis band",
         lambda f: f["prim_met_alk"] & f["add_resp_acid"],
         lambda r: _above_band_text(r, ""),
         "expected pCO2 = 40 + 0.7 x ({hco3_reading:.2f} - 24) +/- 5 = {expected_pco2_low:.2f}-"
         "{expected_pco2_high:.2f}",
         "Compensation for metabolic alkalosis rarely takes pCO2 above about 55 mm[Hg].",
         ("berend_2014", "kidney360_2022", "kelly_2010")),
    Rule("P-MALK-BELOW", "process", "caution", "pCO2 below the metabolic-alkalosis band",
         lambda f: f["prim_met_alk"] & f["add_resp_alk"],
         "pCO2 {pco2@expected_pco2_low:.0f} mm[Hg] is below the expected {expected_pco2_low:.1f}-"
         "{expected_pco2_high:.1f}: an additional respiratory alkalosis.",
         "expected pCO2 = 40 + 0.7 x ({hco3_reading:.2f} - 24) +/- 5 = {expected_pco2_low:.2f}-"
         "{expected_pco2_high:.2f}",
         "Ventilation is more than the alkalosis allows.", ("berend_2014", "kidney360_2022")),
    Rule("P-RESP-TIMING", "process", "info", "Timing of the respiratory process",
         lambda f: ((f["prim_resp_acid"] ^ f["prim_resp_alk"]) & ~f["prim_met_acid"] & ~f["prim_met_alk"]
                    & ~f["add_met_acid"] & ~f["add_met_alk"]),
         _timing_text,
         "acute: HCO3 = 24 +/- 0.1 (acidosis) or 0.2 (alkalosis) per mm[Hg] from 40; chronic: "
         "0.35 (acidosis) or 0.4 (alkalosis); each +/- 2 mmol/L",
         "Buffering changes HCO3- within minutes; renal compensation takes 3-5 days.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-RESP-MET-ACIDOSIS", "process", "caution", "HCO3- below the respiratory bands",
         lambda f: (f["prim_resp_acid"] | f["prim_resp_alk"]) & f["add_met_acid"],
         lambda r: (f"HCO3- {shown(r['hco3'], min(r['expected_hco3_acute_low'], r['expected_hco3_chronic_low']), '.1f')} "
                    f"mmol/L is below what the {_process_word(r)} explains "
                    f"(lowest expected {min(r['expected_hco3_acute_low'], r['expected_hco3_chronic_low']):.1f}): "
                    f"an additional metabolic acidosis."),
         "acute band {expected_hco3_acute_low:.1f}-{expected_hco3_acute_high:.1f}; chronic band "
         "{expected_hco3_chronic_low:.1f}-{expected_hco3_chronic_high:.1f} mmol/L",
         "Neither buffering nor renal compensation lowers HCO3- this far.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-RESP-MET-ALKALOSIS", "process", "caution", "HCO3- above the respiratory bands",
         lambda f: (f["prim_resp_acid"] | f["prim_resp_alk"]) & f["add_met_alk"],
         lambda r: (f"HCO3- {shown(r['hco3'], max(r['expected_hco3_acute_high'], r['expected_hco3_chronic_high']), '.1f')} "
                    f"mmol/L is above what the {_process_word(r)} explains "
                    f"(highest expected {max(r['expected_hco3_acute_high'], r['expected_hco3_chronic_high']):.1f}): "
                    f"an additional metabolic alkalosis."),
         "acute band {expected_hco3_acute_low:.1f}-{expected_hco3_acute_high:.1f}; chronic band "
         "{expected_hco3_chronic_low:.1f}-{expected_hco3_chronic_high:.1f} mmol/L",
         "Neither buffering nor renal compensation raises HCO3- this far.",
         ("narins_emmett_1980", "berend_2014")),
    Rule("P-HIGH-GAP-ACIDOSIS", "process", "caution", "High anion gap metabolic acidosis",
         lambda f: f["role_met_acid_high"] > 0,
         lambda r: (f"The metabolic acidosis has a high anion gap: {shown(r['gap_judged'], r['gap_high_limit'], '.1f')} "
                    f"mmol/L above {r['gap_high_limit']:.0f}" + _lactate_part(r) + "."),
         "gap judged = {gap_judged:.1f} (albumin-corrected when albumin is known); upper limit "
         "{gap_high_limit:.0f}", "Unmeasured anions (lactate, ketones, toxins, uraemic anions).",
         ("kraut_madias_2007", "figge_1998", "klaestrup_2011")),
    Rule("P-GAP-RAISED-ONLY", "process", "caution", "Raised gap: high-gap acidosis to confirm",
         lambda f: f["gap_raised_smaller"],
         lambda r: (f"Anion gap {shown(r['gap_judged'], r['gap_high_limit'], '.1f')} mmol/L is "
                    f"above {r['gap_high_limit']:.0f} while HCO3- {r['hco3']:.1f} is no lower than "
                    f"the other processes explain: read as a high-gap metabolic acidosis that "
                    f"another process offsets" + _lactate_part(r) + f". Below {r['large_gap']:.0f}"
                    f" a raised gap has no organic acid identified in about a third of cases: "
                    f"confirm (lactate, ketones, creatinine) and compare with earlier gaps."),
         "gap {gap_judged:.2f} > {gap_high_limit:.0f} (and < {large_gap:.0f}); baseline "
         "{gap_normal:.1f}; lactate {lactate}",
         "A raised gap signals a high-gap acidosis whatever the HCO3-: another process (a "
         "respiratory alkalosis's compensation, a metabolic alkalosis) can hold HCO3- up; "
         "alkalaemia itself raises the gap only a little. Gap intervals are wide and "
         "analyser-dependent, so a smaller rise is read with a caution.",
         ("berend_2014", "kraut_madias_2007", "gabow_1980", "rastegar_2007")),
    Rule("P-NORMAL-GAP-ACIDOSIS", "process", "caution", "Normal anion gap metabolic acidosis",
         lambda f: (f["role_met_acid_normal"] > 0) & ~f["delta_hidden_normal_gap"],
         "The metabolic acidosis has a normal anion gap ({gap_judged:.1f} mmol/L, limit "
         "{gap_high_limit:.0f}): hyperchloraemic.",
         "gap judged = {gap_judged:.1f}; chloride {cl:.0f} mmol/L",
         "Loss of HCO3- or gain of chloride, without unmeasured anions.",
         ("kraut_madias_2007",)),
    Rule("P-GAP-REVEALS-ACIDOSIS", "process", "caution", "Large gap: metabolic acidosis",
         lambda f: f["gap_reveals_acidosis"],
         lambda r: (f"Anion gap {r['gap_judged']:.1f} mmol/L (at least {r['large_gap']:.0f}) "
                    f"signals a high-gap metabolic acidosis although HCO3- is {r['hco3']:.1f}: "
                    f"another process holds HCO3- up" + _lactate_part(r) + "."),
         "gap {gap_judged:.2f} >= {large_gap:.0f}",
         "In Gabow's series most gaps of 20 or more, and almost all above 30, came with an "
         "identified organic acidosis (lactic or keto-acidosis); the setting grades the wording, "
         "every raised gap is read as a high-gap acidosis.",
         ("gabow_1980", "berend_2014", "kraut_madias_2007")),
    Rule("P-GAP-NOT-ASSESSABLE", "process", "info", "Anion gap not assessable",
         lambda f: f["gap_not_assessable"],
         lambda r: ("Anion gap not assessable: " + _missing_gap_inputs(r) + " not given. "
                    "Whether a metabolic acidosis has a high or a normal gap, the delta ratio, "
                    "and a high-gap acidosis hidden by another process cannot be read"
                    + (f"; the measured lactate {r['lactate']:.1f} mmol/L (above "
                       f"{r['lactate_high_limit']:.1f}) points to a lactic, high-gap kind"
                       if r["lactate"] > r["lactate_high_limit"] else "") + "."),
         "AG = Na - (Cl + HCO3) needs Na+ and Cl-; Na {na}, Cl {cl}",
         "Most bedside gases come without chloride: the gas itself is read, the gap is not "
         "guessed.", ("kraut_madias_2007",)),
    Rule("P-DELTA-NORMAL-GAP", "process", "caution", "Hidden normal-gap acidosis",
         lambda f: f["delta_hidden_normal_gap"],
         lambda r: ((f"Delta ratio {r['delta_ratio']:.2f} ({_delta_band(r)})"
                     if np.isfinite(r["delta_ratio"]) else
                     f"Delta gap {r['delta_gap']:+.1f}, beyond -{DELTA_GAP_BAND:.0f}")
                    + ": HCO3- fell more than the gap rose, so a normal-gap acidosis accompanies "
                    "the high-gap one."),
         "delta ratio = (gap - {gap_normal:.1f}) / (24 - HCO3) = ({gap_judged:.1f} - "
         "{gap_normal:.1f}) / (24 - {hco3:.1f}) = {delta_ratio:.2f}; delta gap {delta_gap:+.1f}",
         "The ratio varies between acidoses (higher in lactic than keto-acidosis); read it as "
         "a pointer, not a proof.", ("rastegar_2007", "delta_bands")),
    Rule("P-DELTA-ALKALOSIS", "process", "caution", "Concurrent metabolic alkalosis",
         lambda f: f["delta_alkalosis"],
         lambda r: (f"HCO3- {r['hco3']:.1f} is higher than the gap {r['gap_judged']:.1f} predicts "
                    + (f"(delta ratio {r['delta_ratio']:.2f}, above 2; delta gap "
                       f"{r['delta_gap']:+.1f})" if np.isfinite(r["delta_ratio"]) else
                       f"(delta gap {r['delta_gap']:+.1f}, beyond +{DELTA_GAP_BAND:.0f}; the ratio "
                       f"is not assessable over a fall of {24.0 - r['hco3']:.1f})")
                    + ": a concurrent metabolic alkalosis."),
         "delta gap = (gap - {gap_normal:.1f}) - (24 - HCO3) = ({gap_judged:.1f} - "
         "{gap_normal:.1f}) - (24 - {hco3:.1f}) = {delta_gap:+.1f}; ratio {delta_ratio:.2f}",
         "A ratio above 2, or (where the fall of HCO3- is too small for a ratio) a delta gap "
         "above +6, means HCO3- started high or was pushed up.",
         ("rastegar_2007", "wrenn_1990", "delta_bands")),
    Rule("P-DELTA-HIGH-RESPIRATORY", "process", "info", "High delta ratio with respiratory acidosis",
         lambda f: f["delta_alkalosis_or_resp"],
         "HCO3- is higher than the gap predicts (delta gap {delta_gap:+.1f}); with a "
         "respiratory acidosis present this may be its renal compensation rather than a "
         "metabolic alkalosis: not assessable from one panel.",
         "delta gap = (gap - {gap_normal:.0f}) - (24 - HCO3) = {delta_gap:+.1f}",
         "Pre-existing high HCO3- from compensated hypercapnia raises the ratio.",
         ("rastegar_2007", "wrenn_1990")),
    Rule("P-DELTA-LOW-RESPIRATORY", "process", "info", "Low delta ratio with respiratory alkalosis",
         lambda f: f["delta_low_or_resp"],
         "Delta ratio {delta_ratio:.2f} (delta gap {delta_gap:+.1f}) is low, but with a respiratory "
         "alkalosis part of the fall in HCO3- is its renal compensation: a second, normal-gap "
         "acidosis is not assessable from one panel.",
         "delta ratio = ({gap_judged:.1f} - {gap_normal:.0f}) / (24 - {hco3:.1f}) = {delta_ratio:.2f}",
         "The ratio assumes HCO3- started at 24; compensation for hypocapnia lowers it.",
         ("rastegar_2007", "delta_bands")),
    Rule("P-VENOUS-COMPENSATION", "process", "caution", "Respiratory compensation not assessable",
         lambda f: f["venous_compensation_unassessable"],
         "Venous pCO2 {pco2@expected_pco2_high:.0f} mm[Hg] is above the band {expected_pco2_low:.1f}-"
         "{expected_pco2_high:.1f} expected of arterial blood, but within the largest published "
         f"venous-arterial difference ({VENOUS_PCO2_EXCESS:.0f} mm[Hg]; widened limit "
         "{expected_pco2_venous_high:.1f}): whether ventilation matches the metabolic process is "
         "not assessable without an arterial sample.",
         "expected (arterial) pCO2 {expected_pco2_low:.2f}-{expected_pco2_high:.2f}; widened for "
         "venous blood to {expected_pco2_venous_high:.2f}; venous pCO2 {pco2:.1f}",
         "The compensation rules were derived in arterial blood.",
         ("kelly_2010", "byrne_2014", "albert_1967")),
    Rule("P-VENOUS-RESPIRATORY", "process", "caution", "Respiratory process read from venous blood",
         lambda f: (f["sample_type"] == VENOUS) & ((f["role_resp_acid"] > 0) | (f["role_resp_alk"] > 0)),
         "Respiratory process read from venous blood: venous and arterial pCO2 can differ by up "
         "to about 20 mm[Hg]; confirm with an arterial sample before relying on it.",
         "venous pCO2 {pco2:.0f} mm[Hg]; interval {pco2_lo:.0f}-{pco2_hi:.0f}",
         "Venous pCO2 below 45 mm[Hg] reliably excludes arterial hypercapnia; other values do not "
         "convert.", ("kelly_2010", "byrne_2014", "aarc_2013")),
    Rule("P-BE-AGREES", "process", "info", "Base-excess reading agrees",
         lambda f: f["readings_agree"] & np.isfinite(f["standard_base_excess"]),
         "The base-excess reading agrees (SBE {standard_base_excess:+.1f} mmol/L, interval "
         "{sbe_lo:.1f} to {sbe_hi:+.1f}).",
         _be_agrees_working,
         "A second, independent family of compensation rules.", ("clsi_c46", "schlichtig_1998")),
    Rule("P-BE-DISAGREES", "process", "caution", "Base-excess reading disagrees",
         lambda f: ~f["readings_agree"] & np.isfinite(f["standard_base_excess"]),
         _be_disagree_text,
         "SBE = {hco3_calculated:.1f} - 24.8 + 16.2 x ({ph:.3f} - 7.40) = "
         "{standard_base_excess:+.1f}; Schlichtig: metabolic acidosis pCO2 = 40 + SBE, alkalosis "
         "40 + 0.6 SBE; chronic respiratory SBE = 0.4 x (pCO2 - 40)",
         "Where the families part, neither is simply right; both views go to the reader.",
         ("clsi_c46", "schlichtig_1998", "berend_2014")),
    # ---------------------------------------------------------------- details
    Rule("D-ANION-GAP", "detail", "info", "Anion gap",
         lambda f: np.isfinite(f["anion_gap"]),
         lambda r: (f"Anion gap {r['anion_gap']:.1f} mmol/L (without K+), "
                    f"{_fmt(r['anion_gap_k'])} with K+; albumin-corrected "
                    f"{_fmt(r['anion_gap_corrected'])}; judged against {r['gap_low']:.0f}-"
                    f"{r['gap_high_limit']:.0f}."),
         "AG = Na - (Cl + HCO3) = {na:.0f} - ({cl:.0f} + {hco3:.1f}) = {anion_gap:.1f}; "
         "AGc = AG + 0.25 x ({ref_albumin:.0f} - albumin g/L) = {anion_gap_corrected}",
         "Reference intervals differ between analysers: set the local one.",
         ("kraut_madias_2007", "figge_1998", "klaestrup_2011", "winter_1990")),
    Rule("D-GAP-WITHOUT-K", "detail", "info", "Gap judged without K+",
         lambda f: f["gap_k_fallback"],
         "K+ not measured: the gap is judged without K+ against {gap_low:.0f}-"
         "{gap_high_limit:.0f} mmol/L, not the with-K+ interval set for this laboratory.",
         "AG = Na - (Cl + HCO3) = {anion_gap:.1f}",
         "The with-K+ gap cannot be formed without K+; the without-K+ interval still applies.",
         ("klaestrup_2011",)),
    Rule("D-GAP-UNCORRECTED", "detail", "caution", "Gap not corrected for albumin",
         lambda f: np.isnan(f["albumin"]) & f["gap_known"] & ~f["gap_high"],
         "Albumin not measured: the gap is not corrected, and a low albumin would hide a raised "
         "gap (0.25 mmol/L per g/L below {ref_albumin:.0f}).",
         "gap {anion_gap:.1f} uncorrected",
         "Hypoalbuminaemia lowers the gap and can mask an organic acidosis.", ("figge_1998",)),
    Rule("D-DELTA", "detail", "info", "Delta ratio and delta gap",
         lambda f: f["role_met_acid_high"] > 0,
         lambda r: ((f"Delta ratio {r['delta_ratio']:.2f}" if np.isfinite(r["delta_ratio"])
                     else "Delta ratio") + f" ({_delta_band(r)}); delta gap "
                    f"{r['delta_gap']:+.1f} mmol/L (beyond +/-{DELTA_GAP_BAND:.0f} suggests a "
                    f"second metabolic process)."),
         "ratio = (gap - baseline) / (24 - HCO3), formed when HCO3- fell at least "
         "{delta_min_fall:.0f}; baseline {gap_normal:.1f} = midpoint of the gap interval in use "
         "{gap_low:.0f}-{gap_high_limit:.0f}; gap {gap_judged:.1f}, HCO3 {hco3:.1f}",
         "Read beside the clinical picture; the bands are conventions.",
         ("rastegar_2007", "wrenn_1990", "delta_bands")),
    Rule("D-SBE", "detail", "info", "Standard base excess",
         lambda f: np.isfinite(f["standard_base_excess"]),
         "Standard base excess {standard_base_excess:+.1f} mmol/L (interval {sbe_lo:.1f} to "
         "{sbe_hi:+.1f}).",
         "SBE = HCO3calc - 24.8 + 16.2 x (pH - 7.40) = {standard_base_excess:+.2f}",
         "The metabolic component independent of pCO2.", ("clsi_c46", "klaestrup_2011")),
    Rule("D-STEWART", "detail", "info", "Strong ion difference and gap",
         lambda f: np.isfinite(f["strong_ion_gap"]), _stewart_text,
         "SIDa = Na + K + 2 Ca + 2 Mg - Cl - lactate; SIDe = HCO3 + albumin x (0.123 pH - 0.631) "
         "+ phosphate x (0.309 pH - 0.469); SIG = SIDa - SIDe = {strong_ion_gap:.1f}",
         "The physicochemical view: a raised SIG points to unmeasured anions.",
         ("kellum_2000", "figge_fencl_1992")),
    Rule("D-SIG-HIGH", "detail", "caution", "Raised strong ion gap",
         lambda f: f["strong_ion_gap"] > f["sig_high"],
         "Strong ion gap {strong_ion_gap@sig_high:.1f} mEq/L above {sig_high:.0f}: unmeasured anions.",
         "SIG = {sid_apparent:.1f} - {sid_effective:.1f} = {strong_ion_gap:.1f}",
         "Local normals for SIG vary; the threshold is a setting.", ("plos_2013", "kellum_2000")),
    Rule("D-BEDSIDE-PARTITION", "detail", "info", "Base-excess partition",
         lambda f: np.isfinite(f["story_albumin"]),
         lambda r: (f"SBE {r['standard_base_excess']:+.1f} splits into sodium-chloride "
                    f"{r['story_na_cl']:+.1f}, albumin {r['story_albumin']:+.1f}, lactate "
                    f"{_fmt(r['story_lactate'], '+.1f')}, other ions {r['story_other']:+.1f} mmol/L."),
         "Na-Cl effect = (Na - Cl) - 35; albumin effect = 0.25 x (42 - albumin g/L); lactate "
         "effect = 1 - lactate; other = SBE - the rest",
         "A bedside Stewart approach: which ions account for the base excess.", ("story_2016",)),
    Rule("D-OSMOLAL-GAP", "detail", "info", "Osmolal gap",
         lambda f: np.isfinite(f["osmolal_gap"]) & ~(f["osmolal_gap"] > f["osm_gap_high"]),
         "Osmolal gap {osmolal_gap:.0f} mosm/kg (measured {osmolality:.0f}, calculated "
         "{osmolality_calculated:.0f}).",
         "calc = 2 x Na + glucose + urea = 2 x {na:.0f} + {glucose:.1f} + {urea_used:.1f} = "
         "{osmolality_calculated:.0f}", "", ("lynd_2008",)),
    Rule("D-OSMOLAL-GAP-HIGH", "detail", "caution", "Raised osmolal gap",
         lambda f: f["osmolal_gap"] > f["osm_gap_high"],
         "Osmolal gap {osmolal_gap@osm_gap_high:.0f} mosm/kg above {osm_gap_high:.0f}: unmeasured osmoles "
         "(alcohols and other solutes) to be considered with the clinical picture.",
         "calc = 2 x Na + glucose + urea = 2 x {na:.0f} + {glucose:.1f} + {urea_used:.1f} = "
         "{osmolality_calculated:.0f}; gap = {osmolality:.0f} - {osmolality_calculated:.0f}",
         "A normal gap does not exclude a toxic alcohol that is already metabolised.",
         ("lynd_2008",)),
    Rule("D-AA-GRADIENT", "detail", "info", "A-a gradient",
         lambda f: np.isfinite(f["aa_gradient"]) & ~(f["aa_gradient"] > f["aa_expected"]),
         _aa_text,
         "PAO2 = FiO2 x (PB - 47) - pCO2 x (FiO2 + (1 - FiO2) / 0.8) = {alveolar_po2:.1f}; "
         "A-a = PAO2 - pO2 = {aa_gradient:.1f}",
         "The full alveolar gas equation; the simplified pCO2 / 0.8 overstates the gradient at "
         "high FiO2.", ("riley_1949", "merck_alveolar", "aa_age_rule")),
    Rule("D-AA-GRADIENT-HIGH", "detail", "caution", "Raised A-a gradient",
         lambda f: f["aa_gradient"] > f["aa_expected"],
         lambda r: _aa_text(r).replace("A-a gradient", "Raised A-a gradient", 1),
         "PAO2 = FiO2 x (PB - 47) - pCO2 x (FiO2 + (1 - FiO2) / 0.8) = {alveolar_po2:.1f}; "
         "A-a = {aa_gradient:.1f}; expected age/4 + 4 = {aa_expected:.1f}",
         "A gradient above the age-expected value on room air points to a gas-exchange defect.",
         ("riley_1949", "merck_alveolar", "aa_age_rule")),
    Rule("D-PF-RATIO", "detail", "info", "PaO2/FiO2",
         lambda f: np.isfinite(f["pf_ratio"]), _pf_text,
         "P/F = pO2 / FiO2 = {po2:.0f} / {fio2:.2f} = {pf_ratio:.1f}; above 1,000 m (PB below "
         "674 mm[Hg]) x PB/760 = {pf_ratio_altitude:.1f}",
         "Bands as in the Berlin definition; context, not a diagnosis.", ("berlin_2012",)),
    Rule("D-PO2-NOT-READ", "detail", "info", "pO2 not read as oxygenation",
         lambda f: np.isfinite(f["po2"]) & ~f["arterial"], _oxy_not_read_text,
         "sample type not arterial", "Venous pO2 is not a substitute for arterial pO2.",
         ("aarc_2013",)),
    Rule("D-TEMPERATURE", "detail", "info", "Values at patient temperature",
         lambda f: f["temperature_differs"],
         lambda r: (f"At the patient's {r['temperature']:.1f} degC: pH {r['ph_at_temperature']:.3f}, "
                    f"pCO2 {r['pco2_at_temperature']:.1f}, pO2 {_fmt(r['po2_at_temperature'])} "
                    f"mm[Hg]. The reading above uses the 37 degC values."),
         "pH(T) = pH - (0.0147 + 0.0065 (pH - 7.40)) (T - 37); pCO2(T) = pCO2 x 10^(0.019 (T - 37));"
         " pO2 by Severinghaus' factor",
         "Whether to read corrected values is a clinical choice (alpha-stat or pH-stat); the "
         "compensation rules were derived at 37 degC.",
         ("rosenthal_1948", "nunn_1965", "severinghaus_1979")),
    Rule("D-LACTATE-HIGH", "detail", "caution", "Raised lactate",
         lambda f: f["lactate"] > LACTATE_HIGH,
         "Lactate {lactate@lactate_high_limit:.1f} mmol/L above the reference limit "
         "{lactate_high_limit:.1f}.",
         "lactate {lactate:.2f} > {lactate_high_limit:.1f} mmol/L",
         "Lactate is a measured unmeasured anion: it is read into the anion-gap findings.",
         ("klaestrup_2011",)),
)

def _with_examples(rules: tuple[Rule, ...]) -> tuple[Rule, ...]:
    """Each rule with its fires/quiet example panels (``acidbase.rule_examples``)."""
    from dataclasses import replace

    from .rule_examples import EXAMPLES

    return tuple(replace(r, fires=EXAMPLES[r.code][0], quiet=EXAMPLES[r.code][1])
                 if r.code in EXAMPLES else r for r in rules)


RULES = _with_examples(RULES)
BY_CODE: dict[str, Rule] = {r.code: r for r in RULES}


def evaluate(frame: Frame) -> np.ndarray:
    """Boolean matrix (rules x rows): which rule fires on which row.

    Refused rows fire nothing (their values are NaN, and the masks are cleared).
    """
    n = frame["ph"].shape[0]
    out = np.empty((len(RULES), n), dtype=bool)  # every row is written below
    with np.errstate(invalid="ignore"):
        for i, rule in enumerate(RULES):
            out[i] = rule.when(frame)
    out[:, frame["refused"]] = False
    return out


def render(rule: Rule, template: Text, row: Row) -> str:
    """A rule's text or working for one row: numbers print through ``number_text``
    (NaN as n/a) whether the template is a format string or a function of the row."""
    formatted = _Formatted(row)
    if callable(template):
        return template(formatted)
    return template.format_map(formatted)


class _Formatted(dict):
    """Row values for str.format: NaN prints as n/a, plain fields print rounded."""

    def __init__(self, row: Row) -> None:
        super().__init__(row)

    def __getitem__(self, key: str) -> Any:
        if "@" in key:  # "x@limit": x printed at the precision that shows its side of limit
            name, limit = key.split("@")
            try:
                edge = float(limit)  # a whole number written in the template (no ".": format
                # would read it as an attribute)
            except ValueError:
                edge = super().__getitem__(limit)
            return _Cmp(super().__getitem__(name), edge)
        value = super().__getitem__(key)
        return _Num(value) if isinstance(value, float | np.floating) else value


class _Num(float):
    def __format__(self, spec: str) -> str:
        if not np.isfinite(self):
            return "n/a"
        return number_text(float(self), spec or ".4g")


class _Cmp(float):
    """A value with the limit it was compared against (see ``shown``)."""

    limit: float

    def __new__(cls, value: float, limit: float) -> Self:
        obj = super().__new__(cls, value)
        obj.limit = float(limit)
        return obj

    def __format__(self, spec: str) -> str:
        return shown(float(self), self.limit, spec or ".0f")
