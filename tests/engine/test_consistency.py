"""Internal consistency (Henderson-Hasselbalch) by HCO3- source, in every container.

Reference point: methods E3, pH 7.40 and pCO2 40 give CLSI HCO3 24.22 and total CO2
24.22 + 0.0307 x 40 = 25.45 mmol/L (CLSI C46, derived).  Na 140 and a normal gap fill the
electrolytes (see panels.py).
"""

from __future__ import annotations

import pytest

import acidbase

from .panels import GAP_MIDPOINT, NA_E23

CALC_HCO3 = 24.22  # methods E3, CLSI C46 derived
CALC_TCO2 = 25.45  # CLSI C46: 24.22 + 1.228, derived


def e3_with(hco3: float, source: str) -> acidbase.Panel:
    return acidbase.Panel(
        ph=7.40,
        pco2=40.0,
        hco3=hco3,
        na=NA_E23,
        cl=NA_E23 - hco3 - GAP_MIDPOINT,
        sample_type="arterial",
        hco3_source=source,
    )


def test_analyser_hco3_matching_henderson_hasselbalch_is_consistent(interpret):
    r = interpret(e3_with(CALC_HCO3, "analyser"))
    assert r.consistency.status == "consistent"
    assert r.consistency.hco3_calculated == pytest.approx(CALC_HCO3, abs=0.005)
    assert "T-HH-CONSISTENT" in r.codes()


@pytest.mark.parametrize("hco3", [24.02, 24.79], ids=["textbook 6.10/0.0301", "pK' 6.095/0.0307"])
def test_analyser_using_another_pk_convention_is_still_consistent(interpret, hco3):
    # Methods 1.2 table, derived: other conventions print 24.02 (Kassirer & Bleich 1965 constants)
    # or 24.79 (pK' 6.095, value from memory) for pH 7.40 / pCO2 40; neither is an entry error.
    assert interpret(e3_with(hco3, "analyser")).consistency.status == "consistent"


def test_analyser_hco3_beyond_the_clia_propagated_band_is_inconsistent(interpret):
    # Methods 2.2 item 1, derived from CLIA 2024 limits: even separately measured values differ by
    # at most about 18 %; 24.22 x 1.19 = 28.8, just outside, is an entry or transcription error.
    r = interpret(e3_with(CALC_HCO3 * 1.19, "analyser"))
    assert r.consistency.status == "inconsistent"
    assert r.consistency.difference == pytest.approx(CALC_HCO3 * 0.19, abs=0.01)
    finding = next(f for f in r.findings if f.code == "T-HH-INCONSISTENT")
    assert finding.severity == "critical"
    assert "entry or transcription error" in finding.text


def test_chemistry_total_co2_at_the_published_limit_of_agreement_is_consistent(interpret):
    # Chittamma & Vanavanan, Clin Chem Lab Med 2008: calculated minus measured total CO2 up to
    # +5.33 (upper 95 % limit); measured 25.45 - 5.33 = 20.12 is ordinary for a chemistry analyser.
    r = interpret(e3_with(CALC_TCO2 - 5.33, "chemistry"))
    assert r.consistency.status == "consistent"
    assert r.consistency.difference == pytest.approx(-5.33, abs=0.01)


def test_the_same_difference_from_an_analyser_is_inconsistent(interpret):
    """The source decides the tolerance: 20.12 typed as the analyser's own HCO3- is an error."""
    # Same value as above (Chittamma 2008 limit), but an analyser computes HCO3 from its own pH and
    # pCO2 (Kim et al., Cureus 2015: recalculate first), so a 4.1 mmol/L gap is not method spread.
    assert interpret(e3_with(CALC_TCO2 - 5.33, "analyser")).consistency.status == "inconsistent"


def test_chemistry_total_co2_at_kumars_upper_limit_is_consistent(interpret):
    # Kumar, Indian J Med Biochem 2017: measured minus calculated up to +2.3 (upper 95 % limit).
    assert interpret(e3_with(CALC_TCO2 + 2.3, "chemistry")).consistency.status == "consistent"


def test_chemistry_total_co2_beyond_the_probable_error_threshold_is_inconsistent(interpret):
    # Methods 2.2 item 3 (a design suggestion, not a published rule): a difference over 8 mmol/L is
    # a probable error; it is also beyond CLIA 2024's +/-20 % for total CO2 alone (5.1 at 25.45).
    # 25.45 - 8.5 = 16.95 sits just outside.
    r = interpret(e3_with(CALC_TCO2 - 8.5, "chemistry"))
    assert r.consistency.status == "inconsistent"
    finding = next(f for f in r.findings if f.code == "T-HH-INCONSISTENT")
    assert "sample handling" in finding.text


def test_unknown_source_with_a_difference_only_chemistry_explains_is_not_assessable(interpret):
    # The Chittamma 2008 limit value again: it fits a chemistry total CO2 but not an analyser HCO3-,
    # so with the source unstated the verdict cannot be given.
    r = interpret(e3_with(CALC_TCO2 - 5.33, "unknown"))
    assert r.consistency.status == "not assessable"
    assert "T-HH-SOURCE-NEEDED" in r.codes()
    assert not {"T-HH-CONSISTENT", "T-HH-INCONSISTENT"} & set(r.codes())


def test_unknown_source_matching_henderson_hasselbalch_is_consistent(interpret):
    assert interpret(e3_with(CALC_HCO3, "unknown")).consistency.status == "consistent"


def test_unknown_source_beyond_both_tolerances_is_inconsistent(interpret):
    # 16.95: beyond the 8 mmol/L probable-error threshold (methods 2.2, design) for either source.
    assert interpret(e3_with(CALC_TCO2 - 8.5, "unknown")).consistency.status == "inconsistent"


def test_inconsistency_is_reported_before_the_processes(interpret):
    """Trust first: the inconsistent finding precedes every process finding."""
    codes = interpret(e3_with(CALC_HCO3 * 1.19, "analyser")).codes()
    first_process = min(i for i, c in enumerate(codes) if c.startswith("P-"))
    assert codes.index("T-HH-INCONSISTENT") < first_process


def test_derived_hydrogen_ion_and_total_co2_at_e3(interpret):
    # Methods E5: pH 7.40 is [H+] 39.8 nmol/L; CLSI C46 total CO2 24.22 + 0.0307 x 40 = 25.45.
    d = interpret(e3_with(CALC_HCO3, "analyser")).derived
    assert d["h_nmol_per_l"] == pytest.approx(39.8, abs=0.05)
    assert d["total_co2_calculated"] == pytest.approx(CALC_TCO2, abs=0.005)


def test_an_hco3_printed_as_a_whole_number_is_judged_at_its_printed_precision(interpret):
    # Issue example: pH 7.44, pCO2 33, HCO3- 23 from the analyser.  CLSI C46: calculated HCO3-
    # 0.0307 x 33 x 10^(7.44 - 6.105) = 21.9, difference +1.1.  Printed to 1, HCO3- carries
    # +/- 0.5 (half its last digit) on top of pH +/- 0.005, pCO2 +/- 0.5 and the 1.6 %
    # convention spread: tolerance 21.9 x (0.0115 + 0.0152 + 0.016) + 0.5 = 1.43.
    r = interpret(acidbase.Panel(ph=7.44, pco2=33, hco3=23, hco3_source="analyser"))
    assert r.consistency.status == "consistent"
    assert r.consistency.tolerance == pytest.approx(1.43, abs=0.01)


def test_the_same_panel_with_hco3_to_a_tenth_is_held_to_the_tighter_tolerance(interpret):
    # HCO3- 23.1 (printed to 0.1: +/- 0.05): tolerance 0.93 < difference +1.2: inconsistent.
    r = interpret(acidbase.Panel(ph=7.44, pco2=33, hco3=23.1, hco3_source="analyser"))
    assert r.consistency.status == "inconsistent"


def test_a_chemistry_total_co2_is_judged_with_the_published_agreement_band(interpret):
    # Issue example: pH 7.12, pCO2 32, total CO2 8.  Calculated total CO2 10.17 + 0.98 = 11.15,
    # difference -3.15: inside +/- 5.33 (widest 95 % limit of agreement, Chittamma & Vanavanan,
    # Clin Chem Lab Med 2008) plus the printed half-step 0.5.
    r = interpret(acidbase.Panel(ph=7.12, pco2=32, hco3=8, hco3_source="chemistry"))
    assert r.consistency.status == "consistent"
    assert r.consistency.tolerance == pytest.approx(5.83, abs=0.01)


def test_compensation_with_a_chemistry_total_co2_is_judged_from_the_gas(interpret):
    # Issue example: pH 7.25, pCO2 27, total CO2 15.  From the gas (CLSI C46): HCO3- 11.58;
    # Winter's 1.5 x 11.6 + 8 +/- 2 = 23.4-27.4 (Albert, Dell & Winters 1967) holds pCO2 27,
    # where the chemistry value would give 28.5-32.5 and an additional respiratory alkalosis.
    r = interpret(acidbase.Panel(ph=7.25, pco2=27, hco3=15, hco3_source="chemistry"))
    assert "respiratory alkalosis" not in {d.process for d in r.disorders}
    assert {"P-WINTERS-MET", "P-COMPENSATION-FROM-GAS"} <= set(r.codes())
    # 0.0307 x 27 x 10^(7.25 - 6.105) = 11.575: lower edge 1.5 x 11.575 + 8 - 2 = 23.36
    assert r.derived["expected_pco2_low"] == pytest.approx(23.36, abs=0.01)
