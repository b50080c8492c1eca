"""Sample types and oxygenation, in every container.

Venous intervals: the arterial ones moved by Kelly, Emerg Med Australas 2010 (pH -0.035,
pCO2 +5.7, HCO3 +1.41).  Only arterial pO2 is read as oxygenation (AARC Clinical Practice
Guideline, Respir Care 2013: venous pO2 is not a substitute for PaO2).
"""

from __future__ import annotations

import pytest

import acidbase

from .panels import edge_panel, normal_e3, venous_kelly


def test_venous_sample_is_read_against_venous_intervals(interpret):
    # Kelly 2010 shift of the E3 values: pH 7.365, pCO2 45.7, HCO3 25.63 is a normal venous gas.
    r = interpret(venous_kelly("venous"))
    assert r.disorders == ()
    assert {"T-SAMPLE-VENOUS", "P-NONE"} <= set(r.codes())


def test_the_same_numbers_labelled_arterial_read_a_respiratory_acidosis(interpret):
    # pCO2 45.7 is above the arterial upper limit 45 (Narins & Emmett 1980; Berend 2014).
    r = interpret(venous_kelly("arterial"))
    assert [d.process for d in r.disorders] == ["respiratory acidosis"]


def test_venous_respiratory_process_carries_a_caution(interpret):
    # Methods E9 acute values (pCO2 60, HCO3 26) labelled venous: pCO2 above the venous limit 51;
    # Kelly 2010 limits of agreement up to +/-20 mm[Hg], so the reading needs an arterial sample.
    r = interpret(edge_panel(26.0, 60.0, sample_type="venous"))
    assert "respiratory acidosis" in {d.process for d in r.disorders}
    finding = next(f for f in r.findings if f.code == "P-VENOUS-RESPIRATORY")
    assert finding.severity == "caution"


@pytest.mark.parametrize("sample_type", ["venous", "capillary", "unknown"])
def test_non_arterial_po2_is_not_read_as_oxygenation(interpret, sample_type):
    # Methods E22 inputs (pO2 90, FiO2 0.50) on a sample that is not arterial (AARC 2013).
    r = interpret(normal_e3(po2=90.0, fio2=0.50, sample_type=sample_type))
    assert r.derived["alveolar_po2"] is None
    assert r.derived["aa_gradient"] is None
    assert r.derived["pf_ratio"] is None
    assert "D-PO2-NOT-READ" in r.codes()
    assert not {"D-AA-GRADIENT", "D-AA-GRADIENT-HIGH", "D-PF-RATIO"} & set(r.codes())


def test_low_venous_po2_raises_no_hypoxaemia_call(interpret):
    # Venous pO2 runs about 37 mm[Hg] below arterial (Byrne et al., Respirology 2014: 36.9); a venous
    # pO2 of 39, just under the Iowa critical-call limit 40, is not an arterial critical value.
    r = interpret(acidbase.Panel(**(venous_kelly("venous").model_dump() | {"po2": 39.0})))
    assert not {"T-CRITICAL", "T-POSSIBLE-VENOUS"} & set(r.codes())


def test_arterial_po2_just_below_40_is_a_critical_call_and_possibly_venous(interpret):
    # University of Iowa handbook critical call: arterial pO2 < 40 mm[Hg]; 39 is just outside.
    # Baird 2013 / Byrne 2014: venous blood labelled arterial shows this pattern.
    r = interpret(normal_e3(po2=39.0))
    assert {"T-CRITICAL", "T-POSSIBLE-VENOUS"} <= set(r.codes())


def test_arterial_oxygenation_values_match_the_e22_worked_values(interpret):
    # Methods E22, derived (Merck alveolar gas equation; ARDS Definition Task Force, JAMA 2012):
    # PAO2 306.5 (simplified) + 40 x 0.5 x 0.25 = 311.5 in the full form (Riley & Cournand
    # 1949), A-a 221.5, P/F 180 -> the Berlin "moderate" range.
    r = interpret(normal_e3(po2=90.0, fio2=0.50))
    d = r.derived
    assert (d["alveolar_po2"], d["aa_gradient"], d["pf_ratio"]) == pytest.approx(
        (311.5, 221.5, 180.0)
    )
    pf = next(f for f in r.findings if f.code == "D-PF-RATIO")
    assert "moderate" in pf.text


def test_room_air_alveolar_po2_and_age_expected_gradient(interpret):
    # Methods E21 (Merck): PAO2 99.7 on room air at PB 760 with pCO2 40, plus the full form's
    # 40 x 0.21 x 0.25 = 2.1 (Riley & Cournand 1949): 101.8; age/4 + 4 = 14 at age 40 (common
    # practice, no source).  pO2 90 from E22 gives A-a 11.8, inside the expected 14.
    r = interpret(normal_e3(po2=90.0, fio2=0.21, age=40.0))
    assert r.derived["alveolar_po2"] == pytest.approx(101.8, abs=0.05)
    assert r.derived["aa_expected"] == pytest.approx(14.0)
    assert "D-AA-GRADIENT" in r.codes() and "D-AA-GRADIENT-HIGH" not in r.codes()


def test_age_expected_gradient_is_not_applied_off_room_air(interpret):
    # The age/4 + 4 rule holds only at FiO2 0.21 (methods 8 and 14); E22 is at FiO2 0.50.
    r = interpret(normal_e3(po2=90.0, fio2=0.50, age=40.0))
    assert r.derived["aa_expected"] is None
    assert "D-AA-GRADIENT-HIGH" not in r.codes()


def test_po2_above_alveolar_po2_is_flagged(interpret):
    # Methods 11.2 (design, from physics): pO2 > PAO2 + 10 is impossible in steady state.  On room
    # air PAO2 is 101.8 (E21 in the full form); pO2 112.5 sits just beyond 111.8.
    r = interpret(normal_e3(po2=112.5, fio2=0.21))
    assert "T-PO2-ABOVE-ALVEOLAR" in r.codes()


def test_po2_just_under_the_alveolar_limit_is_not_flagged(interpret):
    # 111.0: just inside PAO2 + 10 = 111.8 (E21, full form).
    assert "T-PO2-ABOVE-ALVEOLAR" not in interpret(normal_e3(po2=111.0, fio2=0.21)).codes()


def test_temperature_corrected_values_match_e25_and_the_reading_stays_at_37(interpret):
    # Methods E25, derived (Rosenthal 1948; Nunn 1965; Severinghaus 1979): at 33 degC pH 7.459,
    # pCO2 33.6, pO2 70.0; interpretation uses the 37 degC values (alpha-stat), so no disorder.
    r = interpret(normal_e3(po2=90.0, temperature=33.0))
    d = r.derived
    assert d["ph_at_temperature"] == pytest.approx(7.459, abs=0.0005)
    assert d["pco2_at_temperature"] == pytest.approx(33.6, abs=0.05)
    assert d["po2_at_temperature"] == pytest.approx(70.0, abs=0.05)
    assert r.disorders == ()
    assert "D-TEMPERATURE" in r.codes()


def test_temperature_corrected_values_match_e26(interpret):
    # Methods E26, derived: at 39 degC pH 7.371, pCO2 43.7, pO2 102.1.
    d = interpret(normal_e3(po2=90.0, temperature=39.0)).derived
    assert d["ph_at_temperature"] == pytest.approx(7.371, abs=0.0005)
    assert d["pco2_at_temperature"] == pytest.approx(43.7, abs=0.05)
    assert d["po2_at_temperature"] == pytest.approx(102.1, abs=0.05)


@pytest.mark.parametrize(
    ("po2", "band"),
    [
        (50.0, "severe"),  # P/F 100: the severe band's upper edge (<= 100)
        (50.5, "moderate"),  # P/F 101: just inside moderate (100 < P/F <= 200)
        (100.0, "moderate"),  # P/F 200: the moderate band's upper edge
        (100.5, "mild"),  # P/F 201: just inside mild (200 < P/F <= 300)
        (150.0, "mild"),  # P/F 300: the mild band's upper edge
        (150.5, "outside"),  # P/F 301: just above every Berlin range
    ],
)
def test_pf_ratio_bands_follow_the_berlin_definition(interpret, po2, band):
    # ARDS Definition Task Force, JAMA 2012: mild 200 < P/F <= 300, moderate 100 < P/F <= 200,
    # severe P/F <= 100 (each with PEEP >= 5); FiO2 0.50 as in methods E22.
    r = interpret(normal_e3(po2=po2, fio2=0.50))
    assert band in next(f for f in r.findings if f.code == "D-PF-RATIO").text


@pytest.mark.parametrize(("po2", "raised"), [(87.0, True), (88.5, False)])
def test_aa_gradient_is_raised_just_above_the_age_expected_value(interpret, po2, raised):
    # Age/4 + 4 = 14 at age 40 (common practice, no source); room-air PAO2 101.8 (E21 in the
    # full form): pO2 87 gives A-a 14.8, just above; pO2 88.5 gives 13.3, just below.
    codes = interpret(normal_e3(po2=po2, fio2=0.21, age=40.0)).codes()
    assert ("D-AA-GRADIENT-HIGH" in codes) is raised


@pytest.mark.parametrize(("pco2", "acidosis"), [(50.5, False), (51.5, True)])
def test_venous_pco2_limit_is_the_arterial_limit_moved_by_kelly(interpret, pco2, acidosis):
    # Arterial upper limit 45 + Kelly 2010 mean difference 5.7 = 50.7, rounded outward to 51:
    # 50.5 just inside, 51.5 just outside; HCO3 25.63 as in the Kelly-shifted E3 panel, pH by
    # Henderson-Hasselbalch (CLSI).
    r = interpret(edge_panel(25.63, pco2, sample_type="venous"))
    assert ("respiratory acidosis" in {d.process for d in r.disorders}) is acidosis


def test_published_venous_values_read_no_disorder_as_venous(interpret):
    # Methods E2 inputs (Silverthorn, Human Physiology 8e, ch. 20 problem 3): venous pCO2 46 with
    # HCO3 24; pH 7.334 by CLSI Henderson-Hasselbalch (7.340 with the textbook constants).  Inside
    # the Kelly-shifted venous intervals (pH 7.31-7.42, pCO2 40-51, HCO3 23-28).
    r = interpret(edge_panel(24.0, 46.0, sample_type="venous"))
    assert r.disorders == ()


def test_published_venous_values_labelled_arterial_read_a_respiratory_acidosis(interpret):
    # Same E2 values against the arterial intervals: pH 7.334 < 7.35 and pCO2 46 > 45.
    r = interpret(edge_panel(24.0, 46.0, sample_type="arterial"))
    assert [(d.process, d.role) for d in r.disorders] == [("respiratory acidosis", "primary")]


def test_winters_formula_on_venous_values_carries_the_venous_caution(interpret):
    # Methods E6 at Winter's centre (HCO3 10, pCO2 23) moved by Kelly 2010 to venous (HCO3 11.41,
    # pCO2 28.7): Winter's formula, derived from arterial blood (Albert, Dell & Winters 1967), puts
    # 28.7 above 1.5 x 11.41 + 8 + 2 = 27.1.  The respiratory reading rests on venous pCO2, so the
    # venous caution must accompany it.
    r = interpret(edge_panel(10.0 + 1.41, 23.0 + 5.7, sample_type="venous"))
    if "respiratory acidosis" in {d.process for d in r.disorders}:
        assert "P-VENOUS-RESPIRATORY" in r.codes()
    assert ("metabolic acidosis", "primary") in {(d.process, d.role) for d in r.disorders}


def test_venous_pco2_beyond_the_widened_winters_band_reads_a_respiratory_acidosis(interpret):
    # Issue example: pH 6.94, pCO2 50, HCO3 10.5 venous.  Winter's 1.5 x 10.5 + 8 +/- 2 =
    # 21.75-25.75 (Albert 1967); widened by the largest venous-arterial difference, 20 mm[Hg]
    # (Kelly 2010 limits of agreement): 45.75 < 50, so a respiratory acidosis is read.
    r = interpret(acidbase.Panel(ph=6.94, pco2=50, hco3=10.5, na=138, cl=100,
                                 sample_type="venous"))
    assert "respiratory acidosis" in {d.process for d in r.disorders}
    assert "P-WINTERS-ABOVE" in r.codes() and "P-VENOUS-COMPENSATION" not in r.codes()


def test_venous_pco2_inside_the_widened_band_stays_not_assessable(interpret):
    # Same HCO3 10.5: pCO2 45 is above 25.75 but inside 45.75 (Kelly 2010 +20): not assessable.
    r = interpret(edge_panel(10.5, 45.0, sample_type="venous"))
    assert "respiratory acidosis" not in {d.process for d in r.disorders}
    assert "P-VENOUS-COMPENSATION" in r.codes()


def test_adult_age_rule_is_withheld_below_18_with_a_caution(interpret):
    # Issue example --age 0.2: the age/4 + 4 rule and the intervals are adult (Klaestrup 2011
    # studied 20-76 years; the Iowa handbook lists separate neonatal intervals).
    r = interpret(normal_e3(po2=90.0, fio2=0.21, age=0.2))
    assert r.derived["aa_expected"] is None
    assert "P-ADULT-RULES-ONLY" in r.codes()
    assert "P-ADULT-RULES-ONLY" not in interpret(normal_e3(age=18.0)).codes()


def test_third_trimester_means_read_no_disorder_with_the_pregnancy_intervals(interpret):
    # Hankins et al. 1996 means at 36-38 weeks: pH 7.46, PaCO2 26.6, HCO3 18.2.  With the
    # third-trimester intervals (Abbassi-Ghanavati 2009, value from memory) no disorder; with
    # adult intervals the same numbers read as a respiratory alkalosis.
    panel = {"ph": 7.46, "pco2": 26.6, "hco3": 18.2, "sample_type": "arterial"}
    r = interpret(acidbase.Panel(**panel, pregnancy="third_trimester"))
    assert r.disorders == () and "T-PREGNANCY-INTERVALS" in r.codes()
    r = interpret(acidbase.Panel(**panel))
    assert "respiratory alkalosis" in {d.process for d in r.disorders}


def test_pf_ratio_is_read_on_the_altitude_corrected_value(interpret):
    # Berlin definition footnote: above 1,000 m, P/F x PB/760.  pO2 90 on FiO2 0.4 at PB 600:
    # P/F 225 (mild) becomes 225 x 600/760 = 177.6 (moderate).
    r = interpret(normal_e3(po2=90.0, fio2=0.40, pb=600.0))
    pf = next(f for f in r.findings if f.code == "D-PF-RATIO")
    assert "178" in pf.text and "moderate" in pf.text
