"""Site configuration: a laboratory's own settings in a TOML file.

Found by ``--config FILE``, else the file named by the environment variable
``ACIDBASE_CONFIG``, else ``$XDG_CONFIG_HOME/acidbase/config.toml`` (``~/.config``
when the variable is unset: the XDG Base Directory Specification, freedesktop.org,
version 0.8, 2021).  Options on the command line override the file; the file
overrides the built-in defaults.  The kernel's part of the file becomes the same
``Settings`` the options build (``Settings.checked``), so a value the options would
refuse is refused in the file too, naming its key.

Example (every key optional; canonical units: pCO2 mm[Hg], HCO3-/SBE/gaps mmol/L,
albumin g/L)::

    [intervals.arterial]
    ph = [7.35, 7.45]
    pco2 = [35, 45]
    [intervals.venous]
    pco2 = [41, 51]
    [intervals.paediatric]    # read below 18 years (not venous); none built in
    ph = [7.30, 7.45]
    [anion_gap]
    low = 3
    high = 11
    with_k = false
    [albumin]
    reference_g_l = 40
    [serial]
    window_hours = 12
    delta = { pco2 = 15, k = "off" }
    [units]
    pco2 = "kPa"
    [batch]
    mapping = "lis-headers.csv"
    [history]                 # the store batch runs (and the app) use without --history
    path = "/srv/lab/acidbase-history.db"
    retention_days = 30
    [fhir]
    observation_status = "preliminary"
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from .sitefile import SiteFile

from . import units as _units
from .errors import AcidBaseError
from .fields import BY_NAME, SAMPLE_TYPES
from .reference import PAEDIATRIC, Settings, SettingsError, check_interval

ENV_VAR = "ACIDBASE_CONFIG"
#: Observation statuses a site may give machine readings (FHIR R4 ObservationStatus,
#: HL7 FHIR R4 4.0.1, 2019, value set observation-status).
OBSERVATION_STATUSES = ("preliminary", "final", "registered", "amended")
DEFAULT_OBSERVATION_STATUS = "preliminary"  # until a person signs the reading off
#: A history store's panels collected longer ago than this are pruned (days); common
#: practice, no source: each laboratory sets its own (``[history] retention_days``).
DEFAULT_HISTORY_RETENTION_DAYS = 30


class ConfigError(ValueError, AcidBaseError):
    """A site configuration file that cannot be used; names the file and the key."""


@dataclass(frozen=True)
class Site:
    """The settings in force, and where each came from."""

    settings: Settings
    window_hours: float
    deltas: dict[str, float | None]
    units: dict[str, str]
    mapping: str | None
    observation_status: str
    history_path: str | None = None
    history_retention_days: float | None = None
    file: str | None = None
    file_sha256: str | None = None
    found_by: str = "none"
    origins: dict[str, str] = field(default_factory=dict)

    def values(self) -> dict[str, Any]:
        """Every setting as ``key -> value`` (JSON-ready), in a stable order."""
        s = self.settings
        out: dict[str, Any] = {}
        intervals = s.intervals()
        for kind in SAMPLE_TYPES:
            for name in ("ph", "pco2", "hco3", "sbe"):
                iv = intervals[kind][name]
                out[f"intervals.{kind}.{name}"] = [iv.low, iv.high]
        for name, lo, hi in s.paediatric_intervals:  # none unless the site set them
            out[f"intervals.{PAEDIATRIC}.{name}"] = [lo, hi]
        out["anion_gap.low"], out["anion_gap.high"] = s.anion_gap_low, s.anion_gap_high
        out["anion_gap.k_low"], out["anion_gap.k_high"] = s.anion_gap_k_low, s.anion_gap_k_high
        out["anion_gap.with_k"] = s.anion_gap_uses_k
        out["albumin.reference_g_l"] = s.reference_albumin_g_l
        out["serial.window_hours"] = self.window_hours
        from .serial import DELTA_RULES

        deltas: dict[str, float | None] = {r.field: r.limit for r in DELTA_RULES}
        deltas.update(self.deltas)
        for name, limit in deltas.items():
            out[f"serial.delta.{name}"] = "off" if limit is None else limit
        for name, unit in sorted(self.units.items()):
            out[f"units.{name}"] = unit
        out["batch.mapping"] = self.mapping
        out["history.path"] = self.history_path
        out["history.retention_days"] = (DEFAULT_HISTORY_RETENTION_DAYS
                                         if self.history_retention_days is None
                                         else self.history_retention_days)
        out["fhir.observation_status"] = self.observation_status
        return out

    def origin(self, key: str) -> str:
        return self.origins.get(key, "built-in default")

    def sha256(self) -> str:
        """SHA-256 of the settings in force (canonical JSON): equal settings, equal hash."""
        import json

        text = json.dumps(self.values(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def show(self) -> str:
        """``acidbase config show``: one line per setting, with where it came from."""
        head = (f"configuration file: {self.file} (found by {self.found_by})" if self.file
                else "configuration file: none (looked at --config, $" + ENV_VAR
                + ", " + str(default_path()) + ")")
        lines = [head, f"settings SHA-256: {self.sha256()}", ""]
        vals = self.values()
        width = max(len(k) for k in vals)
        for key, value in vals.items():
            shown = "" if value is None else (" to ".join(f"{x:g}" for x in value)
                                              if isinstance(value, list) else str(value))
            lines.append(f"{key:<{width}}  {shown or '(none)':<14}  {self.origin(key)}")
        return "\n".join(lines)


def default_path() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "acidbase" / "config.toml"


def find(option: str | None) -> tuple[Path | None, str]:
    """The configuration file to read and how it was found (``--config``, env, folder)."""
    if option:
        return Path(option), "--config"
    env = os.environ.get(ENV_VAR)
    if env:
        return Path(env), f"${ENV_VAR}"
    path = default_path()
    if path.is_file():
        return path, "the user's config folder"
    return None, "none"


def _file_key(loc: tuple) -> str:
    """The file's key of a pydantic error location (without its union branch tags)."""
    return ".".join(str(x) for x in loc if str(x) != "[key]" and not (
        isinstance(x, str) and (x in ("float", "int", "bool", "str") or x.startswith("literal["))))


def load(path: Path) -> tuple[SiteFile, str]:
    """Read and check one file; ``ConfigError`` names the file, the key and the reason.

    The TOML parser and the file's models are imported here, not at start-up: most
    runs have no file.
    """
    import tomllib

    from pydantic import ValidationError

    from .sitefile import SiteFile
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise ConfigError(f"configuration file {path}: {e.strerror or e}") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as e:
        raise ConfigError(f"configuration file {path}: not valid TOML ({e})") from None
    try:
        site = SiteFile.model_validate(data)
    except ValidationError as e:
        err = e.errors()[0]
        # a union's branches ("float", "literal['off']") are no keys of the file: one
        # value refused by each branch is one refusal
        keys = list(dict.fromkeys(_file_key(x["loc"]) for x in e.errors()))
        key = keys[0]
        reason = "unknown key" if err["type"] == "extra_forbidden" else err["msg"]
        more = f" (and {len(keys) - 1} more)" if len(keys) > 1 else ""
        raise ConfigError(f"configuration file {path}: key {key!r}: {reason}{more}") from None
    return site, hashlib.sha256(raw).hexdigest()


def _file_values(site: SiteFile, path: Path) -> dict[str, Any]:
    """The file's settings as ``key -> value``, each checked; refusals name the key."""
    out: dict[str, Any] = {}

    def bad(key: str, reason: str) -> ConfigError:
        return ConfigError(f"configuration file {path}: key {key!r}: {reason}")

    for kind, table in site.intervals.items():
        for name in ("ph", "pco2", "hco3", "sbe"):
            pair = getattr(table, name)
            if pair is None:
                continue
            key = f"intervals.{kind}.{name}"
            try:
                check_interval(kind, name, pair[0], pair[1])
            except SettingsError as e:
                raise bad(key, str(e)) from None
            out[key] = [float(pair[0]), float(pair[1])]
    for attr in ("low", "high", "k_low", "k_high", "with_k"):
        if (v := getattr(site.anion_gap, attr)) is not None:
            out[f"anion_gap.{attr}"] = v
    if site.albumin.reference_g_l is not None:
        out["albumin.reference_g_l"] = site.albumin.reference_g_l
    if site.serial.window_hours is not None:
        out["serial.window_hours"] = site.serial.window_hours
    for name, limit in site.serial.delta.items():
        key = f"serial.delta.{name}"
        if name not in BY_NAME:
            raise bad(key, f"{name!r} is not a numeric field ({', '.join(BY_NAME)})")
        if limit != "off" and not limit > 0:
            raise bad(key, f"give a positive limit in {BY_NAME[name].unit}, or \"off\"")
        out[key] = None if limit == "off" else float(limit)
    for name, unit in site.units.items():
        key = f"units.{name}"
        if name not in BY_NAME:
            raise bad(key, f"{name!r} is not a numeric field ({', '.join(BY_NAME)})")
        spec = BY_NAME[name]
        if _units.normalise(unit) not in spec.units:
            hint = _units.not_taken_hint(spec.kind, unit)
            raise bad(key, f"{unit!r} is not a unit of {spec.title} ({', '.join(spec.units)})"
                           + (f"; {hint}" if hint else ""))
        out[key] = _units.normalise(unit)
    if site.batch.mapping:
        mapping = Path(site.batch.mapping)
        out["batch.mapping"] = str(mapping if mapping.is_absolute() else path.parent / mapping)
    if site.history.path:
        store = Path(site.history.path)
        out["history.path"] = str(store if store.is_absolute() else path.parent / store)
    if site.history.retention_days is not None:
        out["history.retention_days"] = float(site.history.retention_days)
    if site.fhir.observation_status:
        out["fhir.observation_status"] = site.fhir.observation_status
    return out


def _option_values(args: Any) -> dict[str, Any]:
    """Settings given as options (``None`` where an option was not given)."""
    if args is None:
        return {}
    out: dict[str, Any] = {}
    gap = getattr(args, "anion_gap_interval", None)
    with_k = getattr(args, "anion_gap_with_k", False)
    if gap:
        prefix = "anion_gap.k_" if with_k else "anion_gap."
        out[f"{prefix}low"], out[f"{prefix}high"] = float(gap[0]), float(gap[1])
    if with_k:
        out["anion_gap.with_k"] = True
    if getattr(args, "reference_albumin", None) is not None:
        out["albumin.reference_g_l"] = float(args.reference_albumin)
    if getattr(args, "window_hours", None) is not None:
        out["serial.window_hours"] = float(args.window_hours)
    if getattr(args, "mapping", None):
        out["batch.mapping"] = args.mapping
    if getattr(args, "fhir_status", None):
        out["fhir.observation_status"] = args.fhir_status
    if getattr(args, "history", None):
        out["history.path"] = args.history
    if getattr(args, "history_retention_days", None) is not None:
        out["history.retention_days"] = float(args.history_retention_days)
    return out


_KERNEL = {"anion_gap.low": "anion_gap_low", "anion_gap.high": "anion_gap_high",
           "anion_gap.k_low": "anion_gap_k_low", "anion_gap.k_high": "anion_gap_k_high",
           "anion_gap.with_k": "anion_gap_uses_k",
           "albumin.reference_g_l": "reference_albumin_g_l"}


def resolve(args: Any = None, *, config: str | None = None,
            deltas: dict[str, float | None] | None = None) -> Site:
    """The settings in force: built-in defaults, then the file, then the options.

    ``deltas`` are the batch's ``--delta`` options, already checked; they override the
    file's entries field by field.  The file's ``units`` are defaults: a unit stated
    by an option, a header or a LOINC code wins over them.
    """
    from .serial import DEFAULT_WINDOW_HOURS

    path, found_by = find(config if config is not None else getattr(args, "config", None))
    values: dict[str, Any] = {}
    origins: dict[str, str] = {}
    digest = None
    if path is not None:
        site_file, digest = load(path)
        for k, v in _file_values(site_file, path).items():
            values[k], origins[k] = v, f"file {path}"
    for k, v in _option_values(args).items():
        values[k], origins[k] = v, "option"
    for name, limit in (deltas or {}).items():
        values[f"serial.delta.{name}"], origins[f"serial.delta.{name}"] = limit, "option --delta"
    kw: dict[str, Any] = {attr: values[k] for k, attr in _KERNEL.items() if k in values}
    kw["reference_intervals"] = tuple(
        (k.split(".")[1], k.split(".")[2], v[0], v[1])
        for k, v in values.items()
        if k.startswith("intervals.") and k.split(".")[1] != PAEDIATRIC)
    kw["paediatric_intervals"] = tuple(
        (k.split(".")[2], v[0], v[1])
        for k, v in values.items() if k.startswith(f"intervals.{PAEDIATRIC}."))
    try:
        settings = Settings.checked(**kw)
    except SettingsError as e:
        files = sorted({origins[k] for k in _KERNEL if origins.get(k, "").startswith("file")})
        if not files:
            raise
        raise ConfigError(f"settings from the {' and '.join(files)} with the options: {e}") \
            from None
    file_units = {k.split(".", 1)[1]: v for k, v in values.items() if k.startswith("units.")}
    return Site(
        settings=settings,
        window_hours=values.get("serial.window_hours", DEFAULT_WINDOW_HOURS),
        deltas={k.split(".", 2)[2]: v for k, v in values.items()
                if k.startswith("serial.delta.")},
        units=file_units,
        mapping=values.get("batch.mapping"),
        observation_status=values.get("fhir.observation_status", DEFAULT_OBSERVATION_STATUS),
        history_path=values.get("history.path"),
        history_retention_days=values.get("history.retention_days"),
        file=str(path) if path is not None else None, file_sha256=digest, found_by=found_by,
        origins=origins)


__all__ = ["ENV_VAR", "ConfigError", "Site", "default_path",
           "find", "load", "resolve"]
