"""Built-in demo panels: one night's blood gases on an invented respiratory unit.

Invented data, for the demo only (never for tests).  The scenario is ours: the
night shift of a twelve-bed respiratory high-dependency unit, where the
respiratory therapist checks each gas before it goes on the chart.  The set
covers each kind of reading the tool gives: normal, simple disorders with and
without the expected compensation, mixed double and triple disorders, a venous
sample, an inconsistent panel and a panel typed in the wrong unit.
"""

from __future__ import annotations

from typing import Any

DEMO_PANELS: tuple[dict[str, Any], ...] = (
    {"sample_id": "N-01", "patient_id": "bed-03", "collected_at": "2026-11-30T21:40",
     "note": "admission check, post-operative, breathing room air",
     "ph": 7.41, "pco2": 39, "hco3": 24.3, "na": 139, "cl": 104, "k": 4.1, "albumin": 41,
     "po2": 92, "fio2": 0.21, "age": 34, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-02", "patient_id": "bed-07", "collected_at": "2026-11-30T22:15",
     "note": "long-standing lung disease, settled on low-flow oxygen",
     "ph": 7.35, "pco2": 62, "hco3": 33.6, "na": 138, "cl": 95, "k": 4.4, "albumin": 38,
     "po2": 61, "fio2": 0.28, "age": 71, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-03", "patient_id": "bed-05", "collected_at": "2026-11-30T23:05",
     "note": "sudden breathlessness, tiring",
     "ph": 7.24, "pco2": 63, "hco3": 26.5, "na": 141, "cl": 104, "k": 4.6,
     "po2": 58, "fio2": 0.35, "age": 58, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-04", "patient_id": "bed-11", "collected_at": "2026-11-30T23:50",
     "note": "new admission, high glucose, deep breathing",
     "ph": 7.16, "pco2": 20, "hco3": 7.0, "na": 133, "cl": 97, "k": 5.6, "albumin": 44,
     "glucose": 28.4, "urea": 9.1, "osmolality": 312, "lactate": 2.1,
     "sample_type": "arterial", "hco3_source": "analyser", "age": 22, "po2": 108, "fio2": 0.21},
    {"sample_id": "N-05", "patient_id": "bed-02", "collected_at": "2026-12-01T00:30",
     "note": "septic, vomiting for two days, on a ventilator",
     "ph": 7.38, "pco2": 39, "hco3": 22.4, "na": 144, "cl": 91, "k": 3.1, "albumin": 24,
     "lactate": 6.8, "ica": 1.05, "mg": 0.8, "phosphate": 1.6, "po2": 84, "fio2": 0.5,
     "age": 66, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-06", "patient_id": "bed-09", "collected_at": "2026-12-01T01:10",
     "note": "diarrhoea, then drowsy; a triple disorder",
     "ph": 7.15, "pco2": 31, "hco3": 10.5, "na": 136, "cl": 111, "k": 3.2, "albumin": 40,
     "lactate": 4.6, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-07", "patient_id": "bed-04", "collected_at": "2026-12-01T02:00",
     "note": "anxious, tingling fingers, room air",
     "ph": 7.53, "pco2": 27, "hco3": 22.0, "na": 140, "cl": 107, "k": 3.6, "albumin": 42,
     "po2": 104, "fio2": 0.21, "age": 29, "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-08", "patient_id": "bed-08", "collected_at": "2026-12-01T02:45",
     "note": "nasogastric drainage for a week",
     "ph": 7.52, "pco2": 47, "hco3": 37.5, "na": 137, "cl": 90, "k": 2.9, "albumin": 36,
     "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-09", "patient_id": "bed-06", "collected_at": "2026-12-01T03:20",
     "note": "venous gas from a peripheral line, for the electrolytes",
     "ph": 7.33, "pco2": 49, "hco3": 25.4, "na": 135, "cl": 101, "k": 4.9, "albumin": 39,
     "po2": 38, "sample_type": "venous", "hco3_source": "analyser"},
    {"sample_id": "N-10", "patient_id": "bed-03", "collected_at": "2026-12-01T04:05",
     "note": "copied from the printout by hand: one digit slipped",
     "ph": 7.40, "pco2": 41, "hco3": 42.0, "na": 139, "cl": 102, "k": 4.0,
     "sample_type": "arterial", "hco3_source": "analyser"},
    {"sample_id": "N-11", "patient_id": "bed-12", "collected_at": "2026-12-01T04:40",
     "note": "chemistry total CO2 from the morning round, next to the gas",
     "ph": 7.31, "pco2": 30, "hco3": 16.0, "na": 140, "cl": 112, "k": 3.8, "albumin": 35,
     "sample_type": "arterial", "hco3_source": "chemistry"},
    {"sample_id": "N-12", "patient_id": "bed-10", "collected_at": "2026-12-01T05:15",
     "note": "analyser reports kPa; typed in without the unit",
     "ph": 7.37, "pco2": 5.6, "hco3": 24.0, "na": 141, "cl": 104,
     "sample_type": "arterial", "hco3_source": "analyser"},
)
