"""The layout of a site configuration file (``acidbase.config``), as pydantic models.

Unknown keys are refused, so a misspelt key never passes unseen; values are checked
against the rules' limits afterwards (``config._file_values``), naming the key.
"""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, field_validator


class _Strict(BaseModel):
    # no NaN or infinity (TOML writes them: nan, inf): no setting is one
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class IntervalTable(_Strict):
    ph: tuple[float, float] | None = None
    pco2: tuple[float, float] | None = None
    hco3: tuple[float, float] | None = None
    sbe: tuple[float, float] | None = None


class AnionGapSection(_Strict):
    low: float | None = None
    high: float | None = None
    k_low: float | None = None
    k_high: float | None = None
    with_k: bool | None = None


class AlbuminSection(_Strict):
    reference_g_l: float | None = None


class SerialSection(_Strict):
    window_hours: float | None = None
    delta: dict[str, float | Literal["off"]] = {}

    @field_validator("window_hours")
    @classmethod
    def _positive(cls, v: float | None) -> float | None:
        if v is not None and not v > 0:
            raise ValueError("give a positive number of hours")
        return v


class BatchSection(_Strict):
    mapping: str | None = None


class HistorySection(_Strict):
    path: str | None = None
    retention_days: float | None = None

    @field_validator("retention_days")
    @classmethod
    def _positive_days(cls, v: float | None) -> float | None:
        if v is not None and not v > 0:
            raise ValueError("give a positive number of days")
        return v


class FhirSection(_Strict):
    observation_status: Literal["preliminary", "final", "registered", "amended"] | None = None


class SiteFile(_Strict):
    """The file's layout: unknown keys are refused, so a misspelt key never passes unseen."""

    # "paediatric": the site's own intervals below 18 years (``reference.paediatric_columns``)
    intervals: dict[Literal["arterial", "venous", "capillary", "unknown", "paediatric"],
                    IntervalTable] = {}
    anion_gap: AnionGapSection = AnionGapSection()
    albumin: AlbuminSection = AlbuminSection()
    serial: SerialSection = SerialSection()
    units: dict[str, str] = {}
    batch: BatchSection = BatchSection()
    history: HistorySection = HistorySection()
    fhir: FhirSection = FhirSection()
