"""The compensation table itself (acidbase.compensation) against the worked values of the
methods sheet, section 13, and the Schlichtig 1998 equations."""

from __future__ import annotations

import numpy as np
import pytest

from acidbase import plane_bands
from acidbase.compensation import BASE_EXCESS_RULES, BICARBONATE_RULES

from .panels import MMHG_PER_KPA


def a(*xs: float) -> np.ndarray:
    return np.array(xs, dtype=np.float64)


def test_winters_formula_gives_the_published_bands():
    # Albert, Dell & Winters, Ann Intern Med 1967: 1.5 x HCO3 + 8 +/- 2; methods E6 (HCO3 10: 21-25),
    # E7 (8: 18-22), E8 (12: 24-28).
    lo, hi = BICARBONATE_RULES["winters"].limits(a(10.0, 8.0, 12.0))
    np.testing.assert_allclose(lo, [21.0, 18.0, 24.0])
    np.testing.assert_allclose(hi, [25.0, 22.0, 28.0])


def test_winters_formula_in_kpa_matches_the_derived_form():
    # Methods 3.1, derived: in kPa, 0.2000 x HCO3 + 1.067 +/- 0.27 (UCUM 7.50062 mm[Hg]/kPa).
    hco3 = a(10.0, 20.0)
    centre = BICARBONATE_RULES["winters"].expected(hco3) / MMHG_PER_KPA
    np.testing.assert_allclose(centre, 0.2000 * hco3 + 1.067, atol=0.001)
    assert BICARBONATE_RULES["winters"].band / MMHG_PER_KPA == pytest.approx(0.27, abs=0.005)


def test_metabolic_alkalosis_rule_gives_47_at_hco3_34():
    # Methods E11 (Berend 2014 slope 0.7): 40 + 0.7 x 10 = 47; band +/- 5 (Kidney360 2022 Table 3).
    rule = BICARBONATE_RULES["metabolic_alkalosis"]
    assert rule.expected(a(34.0))[0] == pytest.approx(47.0)
    assert rule.band == pytest.approx(5.0)


def test_metabolic_alkalosis_rule_stays_inside_the_kidney360_band():
    # Kidney360 2022 Table 3: 0.7 x HCO3 + 20 +/- 5; at E11's HCO3 34 that centre is 43.8, and 47
    # lies inside 43.8 +/- 5, so the two published forms agree at this value.
    assert abs(BICARBONATE_RULES["metabolic_alkalosis"].expected(a(34.0))[0] - 43.8) <= 5.0


@pytest.mark.parametrize(
    ("key", "pco2", "expected"),
    [
        ("acute_respiratory_acidosis", 60.0, 26.0),  # methods E9
        ("chronic_respiratory_acidosis", 60.0, 31.0),  # methods E9
        ("acute_respiratory_alkalosis", 20.0, 20.0),  # methods E10
        ("chronic_respiratory_alkalosis", 20.0, 16.0),  # methods E10
    ],
)
def test_respiratory_rules_give_the_published_hco3(key, pco2, expected):
    # Narins & Emmett 1980; Berend 2014 (summary, methods E9/E10): 0.1, 0.35, 0.2, 0.4 per mm[Hg].
    assert BICARBONATE_RULES[key].expected(a(pco2))[0] == pytest.approx(expected)


def test_every_bicarbonate_rule_is_anchored_at_pco2_40_and_hco3_24():
    # Narins & Emmett 1980 (methods 3): deltas from pCO2 40 mm[Hg] and HCO3 24 mmol/L; Winter's
    # formula gives 1.5 x 24 + 8 = 44 at HCO3 24, which is its own regression, not an anchor.
    for key in ("metabolic_alkalosis",):
        assert BICARBONATE_RULES[key].expected(a(24.0))[0] == pytest.approx(40.0)
    for key in (
        "acute_respiratory_acidosis",
        "chronic_respiratory_acidosis",
        "acute_respiratory_alkalosis",
        "chronic_respiratory_alkalosis",
    ):
        assert BICARBONATE_RULES[key].expected(a(40.0))[0] == pytest.approx(24.0)


def test_schlichtig_rules_follow_the_published_equations():
    # Schlichtig, Grogono & Severinghaus, Crit Care Med 1998 (methods 4.2 [S]): metabolic acidosis
    # pCO2 = 40 + SBE; alkalosis 40 + 0.6 x SBE; acute respiratory SBE 0; chronic 0.4 x (pCO2 - 40).
    # SBE -13.04 is methods E13, +10.82 is E15.
    assert BASE_EXCESS_RULES["be_metabolic_acidosis"].expected(a(-13.04))[0] == pytest.approx(26.96)
    assert BASE_EXCESS_RULES["be_metabolic_alkalosis"].expected(a(10.82))[0] == pytest.approx(
        46.492
    )
    assert BASE_EXCESS_RULES["be_acute_respiratory"].expected(a(60.0))[0] == pytest.approx(0.0)
    assert BASE_EXCESS_RULES["be_chronic_respiratory"].expected(a(60.0))[0] == pytest.approx(8.0)


def test_plane_band_for_metabolic_acidosis_is_winters_formula_solved_for_hco3():
    # Winter's 21-25 mm[Hg] at HCO3 10 (E6): at pCO2 23 the HCO3 band is (23 - 10) / 1.5 to
    # (23 - 6) / 1.5 = 8.67-11.33, which holds 10.
    lo, hi = plane_bands(a(23.0))["metabolic acidosis"]
    assert (lo[0], hi[0]) == pytest.approx(((23 - 10) / 1.5, (23 - 6) / 1.5))


def test_plane_iso_ph_line_passes_through_the_e3_point():
    # Methods E3: pH 7.40 at pCO2 40 is HCO3 24.22 (CLSI C46, derived).
    lo, hi = plane_bands(a(40.0))["pH 7.40"]
    assert lo[0] == pytest.approx(24.22, abs=0.005) and hi[0] == lo[0]
