"""Each formula of chemistry.py, gaps.py and oxygenation.py against a published or derived
worked value (methods sheet, section 13).  Functions are called over arrays, as the kernel
calls them; the tolerance of each check is half a unit in the last printed digit of the
worked value unless stated."""

from __future__ import annotations

import numpy as np
import pytest

from acidbase import chemistry as chem
from acidbase import gaps
from acidbase import oxygenation as oxy


def a(*xs: float) -> np.ndarray:
    return np.array(xs, dtype=np.float64)


# --------------------------------------------------------------------------- Henderson-Hasselbalch


def test_clsi_bicarbonate_at_normal_ph_and_pco2_is_24_22():
    # Methods E3, derived from CLSI C46 constants: 0.0307 x 40 x 10^(7.40 - 6.105)
    # = 1.228 x 19.724 = 24.22 mmol/L.
    assert chem.hco3_from_ph_pco2(a(7.40), a(40.0))[0] == pytest.approx(24.22, abs=0.005)


def test_clsi_bicarbonate_of_the_story_case_is_about_15_3():
    # Methods E17, derived from CLSI C46 constants: 0.0307 x 40 x 10^(7.20 - 6.105) = 15.28
    # (the sheet quotes 15.3-15.5 across pK' conventions).
    assert chem.hco3_from_ph_pco2(a(7.20), a(40.0))[0] == pytest.approx(15.28, abs=0.005)


def test_clsi_bicarbonate_differs_from_the_textbook_constants_by_less_than_one():
    """Methods section 1.2 table: 6.10/0.0301 gives 24.02, CLSI 6.105/0.0307 gives 24.22."""
    # Kassirer & Bleich, N Engl J Med 1965 constants (alpha 0.0301, pK 6.10): 24.02 at 7.40/40.
    textbook = 0.0301 * 40.0 * 10 ** (7.40 - 6.10)
    assert textbook == pytest.approx(24.02, abs=0.005)
    assert abs(chem.hco3_from_ph_pco2(a(7.40), a(40.0))[0] - textbook) < 0.8


def test_total_co2_adds_dissolved_co2_of_about_1_2_at_pco2_40_and_2_5_at_80():
    # CLSI C46 (NCCLS C46-A 2001 via manufacturer manual): ctCO2 = HCO3 + 0.0307 x pCO2;
    # methods 2.2 derived: about 1.2 mmol/L at pCO2 40, 2.5 at 80 (0.0307 x 40 = 1.228,
    # 0.0307 x 80 = 2.456).
    out = chem.total_co2(a(24.0, 24.0), a(40.0, 80.0)) - 24.0
    np.testing.assert_allclose(out, [1.228, 2.456], atol=1e-9)


def test_kassirer_bleich_gives_40_nmol_at_pco2_40_and_hco3_24():
    # Kassirer & Bleich, N Engl J Med 1965: [H+] = 24 x pCO2 / HCO3; methods E4: 24 x 40 / 24 = 40.
    assert chem.h_ion_kassirer_bleich(a(40.0), a(24.0))[0] == pytest.approx(40.0, abs=1e-9)


def test_kassirer_bleich_is_nan_not_an_error_when_hco3_is_zero():
    """A formula undefined at its input gives NaN or inf, never raises (MetPy habit)."""
    out = chem.h_ion_kassirer_bleich(a(40.0), a(0.0))
    assert not np.isfinite(out[0])


def test_hydrogen_ion_follows_the_definition_of_ph_across_the_table():
    # Methods E5, derived from the definition [H+] = 10^(9 - pH) nmol/L, printed to 0.1.
    ph = a(7.00, 7.10, 7.20, 7.30, 7.40, 7.50, 7.60, 6.80, 7.80)
    expected = [100.0, 79.4, 63.1, 50.1, 39.8, 31.6, 25.1, 158.5, 15.8]
    np.testing.assert_allclose(chem.h_ion_nmol(ph), expected, atol=0.05)


def test_kassirer_bleich_40_nmol_per_l_is_ph_7_398():
    # Methods E4: 40 nmol/L from Kassirer-Bleich is pH 7.398; E5: pH 7.40 is 39.8 nmol/L.
    kb = chem.h_ion_kassirer_bleich(a(40.0), a(24.0))[0]
    assert 9.0 - np.log10(kb) == pytest.approx(7.398, abs=0.0005)


# --------------------------------------------------------------------------- standard base excess


@pytest.mark.parametrize(
    ("ph", "hco3", "expected"),
    [
        (7.40, 24.8, 0.0),  # methods E12
        (7.20, 15.0, -13.04),  # methods E13
        (7.10, 10.0, -19.66),  # methods E14
        (7.50, 34.0, 10.82),  # methods E15
    ],
)
def test_standard_base_excess_matches_the_van_slyke_worked_values(ph, hco3, expected):
    # CLSI C46 (NCCLS C46-A 2001): SBE = HCO3 - 24.8 + 16.2 x (pH - 7.40); methods E12-E15 derived,
    # e.g. E13: 15 - 24.8 + 16.2 x (-0.20) = -13.04.
    assert chem.standard_base_excess(a(ph), a(hco3))[0] == pytest.approx(expected, abs=0.005)


# --------------------------------------------------------------------------- temperature


def test_temperature_correction_to_33_degrees_matches_worked_values():
    # Methods E25, derived from Rosenthal 1948 (pH), Nunn et al. 1965 (pCO2) and
    # Severinghaus 1979 (pO2) equations: pH 7.459, pCO2 33.6, pO2 70.0 mm[Hg].
    t = a(33.0)
    assert chem.ph_at_temperature(a(7.40), t)[0] == pytest.approx(7.459, abs=0.0005)
    assert chem.pco2_at_temperature(a(40.0), t)[0] == pytest.approx(33.6, abs=0.05)
    assert chem.po2_at_temperature(a(90.0), t)[0] == pytest.approx(70.0, abs=0.05)


def test_temperature_correction_to_39_degrees_matches_worked_values():
    # Methods E26 (same equations): pH 7.371, pCO2 43.7, pO2 102.1 mm[Hg].
    t = a(39.0)
    assert chem.ph_at_temperature(a(7.40), t)[0] == pytest.approx(7.371, abs=0.0005)
    assert chem.pco2_at_temperature(a(40.0), t)[0] == pytest.approx(43.7, abs=0.05)
    assert chem.po2_at_temperature(a(90.0), t)[0] == pytest.approx(102.1, abs=0.05)


def test_temperature_correction_moves_ph_by_the_ph_dependent_slope():
    # Rosenthal, J Biol Chem 1948 (coefficient as read in secondary material): slope
    # 0.0147 + 0.0065 x (pH - 7.40) per degC; at pH 7.00 and 33 degC: 7.00 + 4 x 0.0121 = 7.0484.
    assert chem.ph_at_temperature(a(7.00), a(33.0))[0] == pytest.approx(7.0484, abs=1e-6)


def test_temperature_correction_is_the_identity_at_37_degrees():
    # Common practice, no source: the analyser measures at 37 degC, so nothing changes there.
    t = a(37.0)
    assert chem.ph_at_temperature(a(7.21), t)[0] == pytest.approx(7.21)
    assert chem.pco2_at_temperature(a(61.0), t)[0] == pytest.approx(61.0)
    assert chem.po2_at_temperature(a(75.0), t)[0] == pytest.approx(75.0)


def test_temperature_correction_lowers_pco2_about_4_percent_per_degree():
    # Bradley, Severinghaus & Stupfel, J Appl Physiol 1956: a fall of 1 degC lowers CO2 tension
    # about 4.4 %; Nunn 1965 factor 10^(-0.019) = 0.957 (a 4.3 % fall).
    ratio = chem.pco2_at_temperature(a(40.0), a(36.0))[0] / 40.0
    assert ratio == pytest.approx(1 - 0.044, abs=0.002)


# --------------------------------------------------------------------------- consistency tolerance


def test_analyser_tolerance_admits_the_spread_of_pk_conventions():
    # Methods section 1.2 table, derived: at pH 7.40 / pCO2 40 the conventions give 24.02
    # (6.10/0.0301) to 24.79 (6.095/0.0307) against CLSI 24.22; an analyser using either is not
    # an entry error, so the tolerance must reach both (0.57 above, 0.20 below).
    calc = chem.hco3_from_ph_pco2(a(7.40), a(40.0))
    # printed as pH 7.40, pCO2 40.0 (taken as 40), HCO3- 24.2: half-steps 0.005, 0.5, 0.05
    tol = chem.consistency_tolerance_analyser(a(40.0), calc, a(0.005), a(0.5), a(0.05))[0]
    assert tol >= 24.79 - calc[0]
    assert tol >= calc[0] - 24.02


def test_analyser_tolerance_is_tighter_than_the_clia_propagated_band():
    # Methods 2.2 item 1, derived from CLIA 2024 limits (pH +/-0.04, pCO2 +/-8 %): a separately
    # measured HCO3 may differ by up to about 18 %; the analyser's own value must be held tighter.
    calc = chem.hco3_from_ph_pco2(a(7.40), a(40.0))
    # even with HCO3- printed to a whole number (half-step 0.5)
    assert chem.consistency_tolerance_analyser(a(40.0), calc, a(0.005), a(0.5), a(0.5))[0] < 0.18 * calc[0]


def test_chemistry_tolerance_covers_published_limits_of_agreement():
    # Chittamma & Vanavanan, Clin Chem Lab Med 2008: calculated minus measured total CO2, 95 %
    # limits -1.45 to +5.33; Kumar, Indian J Med Biochem 2017: measured minus calculated -4.1 to
    # +2.3.  A tolerance for chemistry total CO2 must admit the widest of these, 5.33 mmol/L.
    calc = chem.total_co2(chem.hco3_from_ph_pco2(a(7.40), a(40.0)), a(40.0))
    assert chem.consistency_tolerance_chemistry(a(40.0), calc, a(0.0))[0] >= 5.33


def test_chemistry_tolerance_keeps_the_published_band_at_low_total_co2():
    # Chittamma & Vanavanan 2008 limits of agreement (widest 5.33 mmol/L) are absolute: at a
    # total CO2 of 9 the CLIA-propagated 21 % (about 1.9) must not narrow the band below them.
    calc = chem.total_co2(chem.hco3_from_ph_pco2(a(7.12), a(32.0)), a(32.0))
    assert chem.consistency_tolerance_chemistry(a(32.0), calc, a(0.0))[0] == pytest.approx(5.33)


@pytest.mark.parametrize("value, decimals, step", [
    (23.0, 0, 0.5), (23.4, 0, 0.05), (7.44, 2, 0.005), (7.4, 2, 0.005), (33.25, 0, 0.005)])
def test_printed_half_step_is_read_from_the_number(value, decimals, step):
    # Half the last printed digit (rounding to the printed precision, ISO 80000-1 Annex B):
    # 23 -> 0.5, 23.4 -> 0.05; pH is read as printed to at least 0.01.
    assert chem.printed_half_step(a(value), decimals)[0] == pytest.approx(step)


# --------------------------------------------------------------------------- anion gap and albumin


def test_anion_gap_of_the_story_case_is_8():
    # Kraut & Madias, Clin J Am Soc Nephrol 2007: AG = Na - (Cl + HCO3); Story 2016 case (E17):
    # 133 - (110 + 15) = 8, derived.
    assert gaps.anion_gap(a(133.0), a(110.0), a(15.0))[0] == pytest.approx(8.0)


def test_anion_gap_with_potassium_adds_potassium():
    # Kraut & Madias 2007: AG(K) = (Na + K) - (Cl + HCO3); Klaestrup 2011 intervals 10-16 with K
    # against 6-12 without, 4 apart; K 4.0 mmol/L gives the same 4 mmol/L shift on the E17 case.
    assert gaps.anion_gap_with_k(a(133.0), a(4.0), a(110.0), a(15.0))[0] == pytest.approx(12.0)


def test_anion_gap_with_potassium_is_nan_without_potassium():
    """A missing K+ is NaN and propagates: the gap with K+ is not assessable, never a guess."""
    assert np.isnan(gaps.anion_gap_with_k(a(133.0), a(np.nan), a(110.0), a(15.0))[0])


@pytest.mark.parametrize(("reference", "expected"), [(44.0, 18.0), (40.0, 17.0)])
def test_figge_correction_of_gap_12_at_albumin_20_g_per_l(reference, expected):
    # Figge, Jabor, Kazda & Fencl, Crit Care Med 1998: +0.25 mmol/L per g/L of albumin below the
    # reference; methods E18, derived: 12 + 0.25 x (44 - 20) = 18; with reference 40 g/L: 17.
    out = gaps.albumin_corrected_gap(a(12.0), a(20.0), reference)
    assert out[0] == pytest.approx(expected)


def test_figge_ten_g_per_l_fall_in_albumin_hides_2_5_of_gap():
    # Figge et al., Crit Care Med 1998 (methods E19, published): each 10 g/L fall in albumin
    # makes the gap underestimate by 2.5 mEq/L.
    corrected = gaps.albumin_corrected_gap(a(12.0), a(34.0), 44.0)
    assert corrected[0] - 12.0 == pytest.approx(2.5)


def test_figge_correction_leaves_the_gap_alone_at_the_reference_albumin():
    # Figge 1998: the correction is zero at the reference albumin (44 g/L, our default).
    assert gaps.albumin_corrected_gap(a(11.0), a(44.0), 44.0)[0] == pytest.approx(11.0)


# --------------------------------------------------------------------------- delta ratio and gap


def test_delta_ratio_is_one_when_gap_rises_as_much_as_hco3_falls():
    # Rastegar, J Am Soc Nephrol 2007, with conventional normals 12 and 24 (methods 5.3 [S]):
    # (24 - 12) / (24 - 12) = 1, an uncomplicated high-gap acidosis.
    assert gaps.delta_ratio(a(24.0), a(12.0), 12.0)[0] == pytest.approx(1.0)


def test_delta_ratio_of_the_story_case_is_one_half():
    # Story 2016 case (E17): albumin-corrected gap 8 + 0.25 x (44 - 22) = 13.5 (Figge 1998);
    # ratio (13.5 - 9) / (24 - 15) = 0.5 with the Klaestrup 2011 midpoint 9, derived.
    assert gaps.delta_ratio(a(13.5), a(15.0), 9.0)[0] == pytest.approx(0.5)


def test_delta_ratio_is_nan_when_hco3_is_not_below_normal():
    """Ratio undefined at HCO3 >= 24 (no fall to divide by): NaN, not a division error."""
    out = gaps.delta_ratio(a(20.0, 20.0), a(24.0, 30.0), 9.0)
    assert np.isnan(out).all()


def test_delta_gap_reduces_to_sodium_minus_chloride_minus_36():
    # Wrenn, Ann Emerg Med 1990 delta gap; derangedphysiology simplified form (methods 5.3 [S]):
    # with normals 12 and 24, (AG - 12) - (24 - HCO3) = Na - Cl - 36.
    na, cl, hco3 = a(133.0, 140.0), a(110.0, 95.0), a(15.0, 30.0)
    ag = gaps.anion_gap(na, cl, hco3)
    np.testing.assert_allclose(gaps.delta_gap(ag, hco3, 12.0), na - cl - 36.0)


# --------------------------------------------------------------------------- osmolality


def test_calculated_osmolality_si_form_gives_290_for_the_e23_panel():
    # Lynd et al., BMC Emerg Med 2008: SI form 2 x Na + urea + glucose; methods E23 (Na 140,
    # glucose 90 mg/dL = 5 mmol/L by /18, BUN 14 mg/dL = 5 mmol/L urea by /2.8): 290, derived.
    out = gaps.calculated_osmolality(a(140.0), a(90.0 / 18.0), a(14.0 / 2.8))
    assert out[0] == pytest.approx(290.0)


def test_osmolal_gap_is_measured_minus_calculated():
    # Lynd et al. 2008: gap = measured - calculated; > 10 mosm/kg commonly raised (methods 7.1 [S]).
    assert gaps.osmolal_gap(a(301.0), a(290.0))[0] == pytest.approx(11.0)


# --------------------------------------------------------------------------- Stewart quantities


def test_figge_fencl_effective_sid_at_normal_values_is_38_44():
    # Figge, Mydosh & Fencl, J Lab Clin Med 1992 (as printed in a CJASN definitions table);
    # methods E27, derived: HCO3 24.72 + albumin 42 x (0.123 x 7.40 - 0.631) = 11.73
    # + phosphate 1.1 x (0.309 x 7.40 - 0.469) = 2.00; SIDe 38.44.  (E27's HCO3 24.72 is the
    # Stewart bicarbonate term 2.46e-11 x pCO2 / 10^-pH; it is passed in as given.)
    ph = a(7.40)
    assert gaps.albumin_charge(a(42.0), ph)[0] == pytest.approx(11.73, abs=0.005)
    assert gaps.phosphate_charge(a(1.1), ph)[0] == pytest.approx(2.00, abs=0.005)
    assert gaps.sid_effective(a(24.72), a(42.0), a(1.1), ph)[0] == pytest.approx(38.44, abs=0.01)


def test_apparent_sid_counts_divalent_ions_twice():
    # CJASN definitions table (methods 6.1 [C]): ionised Ca and Mg enter in mEq/L = 2 x mmol/L.
    args = {
        "na": a(140.0),
        "k": a(4.0),
        "ica": a(1.0),
        "mg": a(1.0),
        "cl": a(100.0),
        "lactate": a(1.0),
    }
    base = gaps.sid_apparent(**args)[0]
    assert gaps.sid_apparent(**(args | {"ica": a(2.0)}))[0] - base == pytest.approx(2.0)
    assert gaps.sid_apparent(**(args | {"mg": a(2.0)}))[0] - base == pytest.approx(2.0)
    assert gaps.sid_apparent(**(args | {"lactate": a(2.0)}))[0] - base == pytest.approx(-1.0)


def test_strong_ion_gap_is_apparent_minus_effective():
    # Kellum, Crit Care 2000; CJASN table: SIG = SIDa - SIDe; with SIDa 42 (the 42 +/- 2 normal of
    # methods 6.1 [S]) and the E27 SIDe 38.44: 3.56, derived.
    assert gaps.strong_ion_gap(a(42.0), a(38.44))[0] == pytest.approx(3.56)


def test_story_partition_of_the_story_case():
    # Story, Anesth Analg 2016 bedside constants (methods 6.2 [S]) on the E17 case: Na-Cl effect
    # (133 - 110) - 35 = -12; albumin 0.25 x (42 - 22) = +5; lactate 1 - 5 = -4; with CLSI SBE
    # -13.04 (E13) the other ions are -13.04 - (-12 + 5 - 4) = -2.04, derived.
    na_cl, alb, lac, other = gaps.story_partition(a(133.0), a(110.0), a(22.0), a(5.0), a(-13.04))
    assert (na_cl[0], alb[0], lac[0]) == pytest.approx((-12.0, 5.0, -4.0))
    assert other[0] == pytest.approx(-2.04, abs=1e-9)


# --------------------------------------------------------------------------- oxygenation


def test_alveolar_po2_on_room_air_at_sea_level_is_the_simplified_99_7_plus_2_1():
    # Merck Manual Professional, simplified equation (PH2O 47, R 0.8); methods E21: 0.21 x 713 -
    # 40 / 0.8 = 99.7.  The full form (Riley & Cournand 1949) adds PaCO2 x FiO2 x (1 - R) / R =
    # 40 x 0.21 x 0.25 = 2.1: 101.8 mm[Hg].
    assert oxy.alveolar_po2(a(0.21), a(760.0), a(40.0))[0] == pytest.approx(99.7 + 2.1, abs=0.05)


def test_alveolar_po2_and_gradient_at_fio2_one_half():
    # Methods E22 (simplified): PAO2 0.50 x 713 - 50 = 306.5; the full form adds 40 x 0.5 x 0.25
    # = 5 (Riley & Cournand 1949): 311.5; A-a 311.5 - 90 = 221.5.
    pa = oxy.alveolar_po2(a(0.50), a(760.0), a(40.0))
    assert pa[0] == pytest.approx(311.5)
    assert oxy.aa_gradient(pa, a(90.0))[0] == pytest.approx(221.5)


def test_alveolar_po2_at_fio2_one_is_a_quarter_of_pco2_above_the_simplified_form():
    # Full form at FiO2 1.0: the nitrogen term vanishes, PAO2 = 713 - PaCO2 = 673; the
    # simplified form gives 713 - 50 = 663 (overstating the gradient by PaCO2/4 = 10).
    assert oxy.alveolar_po2(a(1.0), a(760.0), a(40.0))[0] == pytest.approx(673.0)


def test_pf_ratio_is_corrected_for_barometric_pressure_above_1000_m():
    # ARDS Definition Task Force, JAMA 2012, footnote: above 1,000 m use P/F x PB/760.
    # 150 x 600 / 760 = 118.4; at 700 mm[Hg] (below 1,000 m: standard atmosphere 674.1) none.
    got = oxy.pf_ratio_for_altitude(a(150.0, 150.0), a(600.0, 700.0))
    assert got[0] == pytest.approx(150.0 * 600.0 / 760.0)
    assert np.isnan(got[1])


def test_pf_ratio_of_90_on_one_half_is_180():
    # ARDS Definition Task Force, JAMA 2012 (P/F, FiO2 as fraction); methods E22: 90 / 0.5 = 180.
    assert oxy.pf_ratio(a(90.0), a(0.50))[0] == pytest.approx(180.0)


def test_expected_aa_gradient_at_age_40_is_14():
    # Age/4 + 4 mm[Hg]: common practice, no source (methods 8, origin not identified): 40/4 + 4 = 14.
    assert oxy.expected_aa_gradient(a(40.0))[0] == pytest.approx(14.0)


def test_story_partition_without_lactate_leaves_lactate_in_other_ions():
    """A missing lactate is NaN in its own slot and counted within "other ions"."""
    # Story 2016 constants on the E17 case without its lactate: other = -13.04 - (-12 + 5) = -6.04.
    _, _, lac, other = gaps.story_partition(a(133.0), a(110.0), a(22.0), a(np.nan), a(-13.04))
    assert np.isnan(lac[0])
    assert other[0] == pytest.approx(-6.04)


def test_powers_of_ten_agree_with_decimal_arithmetic_far_below_a_printed_digit():
    """exp10 (10^x as exp(x ln 10), the kernel's form) against Python's decimal module at
    40 digits, over the exponents the kernel takes: 9 - pH and pH - 6.105 for pH 6.5 to
    8.0, and the temperature factors.  A relative error of 1e-14 is eleven digits below
    the 0.1 mmol/L to which HCO3- is printed."""
    import decimal

    ph = np.linspace(6.5, 8.0, 301)
    x = np.concatenate([9.0 - ph, ph - chem.PK_PRIME, 0.019 * np.linspace(-12.0, 6.0, 37)])
    got = chem.exp10(x)
    with decimal.localcontext() as ctx:
        ctx.prec = 40
        exact = np.array([float(decimal.Decimal(10) ** decimal.Decimal(float(v))) for v in x])
    np.testing.assert_allclose(got, exact, rtol=1e-14, atol=0.0)
