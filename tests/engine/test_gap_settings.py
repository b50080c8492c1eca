"""The anion gap judged with K+ (a laboratory setting), in every container.

Klaestrup et al., Clin Chem Lab Med 2011: 10-16 mmol/L with K+, 6-12 without (methods E28).
Kraut & Madias, Clin J Am Soc Nephrol 2007: AG(K) = (Na + K) - (Cl + HCO3).  K+ 4.0 is the
4 mmol/L shift between the two Klaestrup intervals.  Acid-base values: methods E6, HCO3 10 at
Winter's centre 23 (Albert, Dell & Winters 1967).
"""

from __future__ import annotations

import pytest

import acidbase

from .panels import edge_panel

WITH_K = acidbase.Settings(anion_gap_uses_k=True)


def gap_label(r) -> str | None:
    """"high" when any metabolic acidosis entry has a high gap (a low delta ratio may add a
    normal-gap entry beside it, or put it first)."""
    labels = {d.anion_gap for d in r.disorders if d.process == "metabolic acidosis"}
    return "high" if "high" in labels else next(iter(labels), None)


def test_gap_with_k_just_above_16_is_high(interpret):
    # 12.5 + 4.0 = 16.5: just outside the with-K upper edge 16.
    r = interpret(edge_panel(10.0, 23.0, gap=12.5, k=4.0), WITH_K)
    assert r.derived["anion_gap_k"] == pytest.approx(16.5)
    assert gap_label(r) == "high"


def test_gap_with_k_just_below_16_is_normal(interpret):
    # 11.5 + 4.0 = 15.5: just inside the with-K upper edge 16.
    r = interpret(edge_panel(10.0, 23.0, gap=11.5, k=4.0), WITH_K)
    assert gap_label(r) == "normal"


def test_gap_with_k_setting_and_no_potassium_does_not_call_a_gap_of_25_normal(interpret):
    # Gap without K+ 25 (Gabow 1980 level, value from memory); AG(K) = 25 + K >= 25 > 16 for any
    # K+ >= 0 (Kraut & Madias 2007; Klaestrup 2011), so "normal gap" cannot be right.
    r = interpret(edge_panel(10.0, 23.0, gap=25.0), WITH_K)
    assert gap_label(r) != "normal"
    assert "P-NORMAL-GAP-ACIDOSIS" not in r.codes()


def test_a_laboratory_interval_of_3_to_11_reads_a_gap_of_11_5_as_high(interpret):
    # Winter, Pearson, Gabow et al., Arch Intern Med 1990: ISE-era interval 3-11 mmol/L; 11.5 is
    # just outside its upper edge (and inside Klaestrup's default 6-12).
    ise = acidbase.Settings(anion_gap_low=3.0, anion_gap_high=11.0)
    r = interpret(edge_panel(10.0, 23.0, gap=11.5), ise)
    assert "high" in {d.anion_gap for d in r.disorders}


def test_the_default_interval_reads_the_same_gap_of_11_5_as_normal(interpret):
    # Klaestrup 2011 default 6-12: 11.5 just inside the upper edge.
    r = interpret(edge_panel(10.0, 23.0, gap=11.5))
    assert {d.anion_gap for d in r.disorders} == {"normal"}
