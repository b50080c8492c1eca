"""Which columns a batch output carries: a lean default, everything on request.

The default ("lean") keeps what a laboratory reads on every row: the row number,
the input columns as given, status, reason, consistency, disorders, needs_review,
the qualifiers and lab flags of the input cells, the caution and critical finding
codes, a few derived values a laboratory checks (calculated HCO3- and the
difference measured minus calculated, anion gap and albumin-corrected gap,
standard base excess), the short serial codes, and the caution.  Printing fewer
bytes a row is most of what makes a large file fast to write (docs/performance.md).

``--profile full`` adds the rest: the info findings, every derived value, the
role and timing columns (which restate the disorders column), and the serial
status and detail sentences.  ``--derived`` and ``--findings`` choose each part
on its own.  Whatever the profile, the caution stays in the file (first row's
``caution`` cell, and the Parquet metadata), the summary and the report, and the
summary and report count every finding whatever the file shows.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .engine import SLOTS
from .errors import AcidBaseError
from .precision import DECIMALS, DERIVED

PROFILES = ("lean", "full")
FINDINGS = ("caution", "all")

#: The derived values of the lean profile.  ``hco3_difference`` is the figure the
#: consistency verdict judges: measured HCO3- minus the Henderson-Hasselbalch value
#: (total CO2 minus calculated total CO2 for HCO3- from a chemistry analyser).
LAB_DERIVED: tuple[str, ...] = ("hco3_calculated", "hco3_difference", "anion_gap",
                                "anion_gap_corrected", "standard_base_excess")
#: Every derived-value column a batch file can carry.
ALL_DERIVED: tuple[str, ...] = (DERIVED[:1] + ("hco3_difference",) + DERIVED[1:])
#: Columns that restate the disorders column role by role.
ROLE_COLUMNS: tuple[str, ...] = tuple(f"role_{slot}" for slot, _, _ in SLOTS) + (
    "timing_respiratory",)
#: The serial checks' sentences; their codes (``serial_codes``) are always written.
SERIAL_TEXT: tuple[str, ...] = ("serial_status", "serial_detail")


class ProfileError(ValueError, AcidBaseError):
    """An output option that names no profile, finding set or derived value."""


@dataclass(frozen=True)
class Profile:
    """The columns of one batch output."""

    derived: tuple[str, ...] = LAB_DERIVED
    findings: str = "caution"  #: "caution" (caution and critical) or "all"
    roles: bool = False
    serial_text: bool = False

    def keeps(self, column: str) -> bool:
        """Whether an output column of ours is written (input columns always are)."""
        if column in ALL_DERIVED:
            return column in self.derived
        if column in ROLE_COLUMNS:
            return self.roles
        if column in SERIAL_TEXT:
            return self.serial_text
        return True

    @property
    def severities(self) -> tuple[str, ...] | None:
        """The severities whose codes go in ``finding_codes`` (None: every one)."""
        return None if self.findings == "all" else ("caution", "critical")

    @property
    def decimals(self) -> dict[str, int]:
        """Decimals of the derived columns written (``results.DECIMALS``); the HCO3-
        difference at the precision of the calculated HCO3- it is taken from."""
        return {k: DECIMALS.get(k, DECIMALS["hco3_calculated"]) for k in self.derived}


FULL = Profile(ALL_DERIVED, "all", True, True)


def _derived(spec: str) -> tuple[str, ...]:
    text = spec.strip().lower()
    if text == "all":
        return ALL_DERIVED
    if text == "lab":
        return LAB_DERIVED
    if text == "none":
        return ()
    names = tuple(dict.fromkeys(x.strip() for x in text.split(",") if x.strip()))
    unknown = [x for x in names if x not in ALL_DERIVED]
    if unknown or not names:
        raise ProfileError(f"--derived {spec!r}: {', '.join(unknown) or 'no name'} not among "
                           f"the derived values (all, lab, none, or names from "
                           f"{', '.join(ALL_DERIVED)})")
    return names


def profile_from_options(profile: str = "lean", derived: str | None = None,
                         findings: str | None = None) -> Profile:
    """The profile named, with ``--derived`` and ``--findings`` overriding its parts."""
    name = (profile or "lean").strip().lower()
    if name not in PROFILES:
        raise ProfileError(f"--profile {profile!r}: choose one of {', '.join(PROFILES)}")
    base = FULL if name == "full" else Profile()
    chosen = base.findings if findings is None else findings.strip().lower()
    if chosen not in FINDINGS:
        raise ProfileError(f"--findings {findings!r}: choose one of {', '.join(FINDINGS)}")
    return Profile(base.derived if derived is None else _derived(derived), chosen, base.roles,
                   base.serial_text)


def profile_from_args(args: Any) -> Profile:
    """The profile ``acidbase batch``'s options ask for (``--profile``, ``--derived``,
    ``--findings``; declared in acidbase.cli)."""
    return profile_from_options(args.profile, args.derived, args.findings)


__all__ = [
    "ALL_DERIVED",
    "FINDINGS",
    "FULL",
    "LAB_DERIVED",
    "PROFILES",
    "Profile",
    "ProfileError",
    "profile_from_args",
    "profile_from_options",
]
