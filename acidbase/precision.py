"""The derived values every surface reports, and the decimals each is shown with.

One table, read by the text and Markdown reports, the terminal app and the batch CSV
(``acidbase.results`` re-exports it).
"""

from __future__ import annotations

#: Derived values reported by ``check --json`` and the batch output, in order.
DERIVED: tuple[str, ...] = (
    "hco3_calculated", "total_co2_calculated", "h_nmol_per_l", "anion_gap", "anion_gap_k",
    "anion_gap_corrected", "delta_ratio", "delta_gap", "standard_base_excess",
    "expected_pco2_low", "expected_pco2_high", "expected_hco3_acute_low",
    "expected_hco3_acute_high", "expected_hco3_chronic_low", "expected_hco3_chronic_high",
    "be_expected_pco2_low", "be_expected_pco2_high", "sid_apparent", "sid_effective",
    "strong_ion_gap", "story_na_cl", "story_albumin", "story_lactate", "story_other",
    "osmolality_calculated", "osmolal_gap", "alveolar_po2", "aa_gradient", "aa_expected",
    "pf_ratio", "ph_at_temperature", "pco2_at_temperature", "po2_at_temperature",
)

#: Decimals each derived value is shown with (text and Markdown reports, the terminal
#: app, batch CSV): the precision laboratories print the measured quantities with, two
#: for the delta ratio, three for pH (common laboratory practice, no source).  ``check
#: --json`` and batch JSON Lines and Parquet carry the unrounded value.
DECIMALS: dict[str, int] = {
    **dict.fromkeys(DERIVED, 1),
    "delta_ratio": 2,
    "ph_at_temperature": 3,
    **dict.fromkeys(("osmolality_calculated", "osmolal_gap", "alveolar_po2", "aa_gradient",
                     "aa_expected", "pf_ratio", "po2_at_temperature"), 0),
}
