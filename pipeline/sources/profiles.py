"""Source profiles: a TOML file mapping one export layout onto the canonical form (DEVELOPERS.md)."""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from pipeline.errors import InputError

TABLES = ("checks", "instruments", "sites", "lots", "service_events")
CANONICAL_COLUMNS = {
    "checks": ("instrument_id", "measured_at", "lot_id", "check_type", "target", "measured", "units",
               "simulator_temp_c", "pressure_kpa", "site_id", "operator_id", "outcome"),
    "sites": ("site_id", "region", "time_zone", "latitude", "longitude", "elevation_m"),
    "instruments": ("instrument_id", "technology", "model", "site_id", "region", "in_service_on",
                    "latitude", "longitude"),
    "lots": ("lot_id", "standard_kind", "target", "units", "expanded_uncertainty", "certified_on",
             "expires_on", "supplier"),
    "service_events": ("instrument_id", "event_at", "event_type", "notes"),
}
CHECK_TYPES = ("control", "daily", "verification", "calibration")
OUTCOMES = ("pass", "fail", "aborted", "invalid")
_ALLOWED = {
    "profile": {"name", "table", "delimiter", "decimal", "encoding", "header", "format"},
    "columns": set().union(*CANONICAL_COLUMNS.values()) | {"time_zone"},
    "values": {"units", "time_format", "time_zone", "time_zone_column", "time_zone_from_site"},
    "outcome": set(OUTCOMES),
    "check_type": set(CHECK_TYPES),
}


@dataclass(frozen=True)
class SourceProfile:
    """How to read one source layout. `columns` maps canonical name -> source column name."""

    name: str = "canonical"
    table: str | None = None
    delimiter: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    header: bool = True
    format: str | None = None          # csv | jsonl | parquet; None = by file extension
    columns: dict[str, str] = field(default_factory=dict)
    units: str | None = None
    time_format: str | None = None
    time_zone: str | None = None
    time_zone_column: str | None = None
    time_zone_from_site: bool = False
    outcome: dict[str, tuple[str, ...]] = field(default_factory=dict)
    check_type: dict[str, tuple[str, ...]] = field(default_factory=dict)
    path: str | None = None

    def source_column(self, canonical: str) -> str:
        return self.columns.get(canonical, canonical)


CANONICAL = SourceProfile()


def load_profile(path: str | Path) -> SourceProfile:
    """Read and check a profile file. Unknown sections or keys raise InputError naming file and key."""
    path = Path(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"cannot read profile: {exc.strerror}", file=str(path)) from exc
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"profile is not valid TOML: {exc}", file=str(path)) from exc
    for section, body in data.items():
        if section not in _ALLOWED:
            raise InputError(f"unknown key '{section}' in profile", file=str(path))
        if not isinstance(body, dict):
            raise InputError(f"'{section}' must be a table", file=str(path))
        for key in body:
            if key not in _ALLOWED[section]:
                raise InputError(f"unknown key '{section}.{key}' in profile", file=str(path))
    p = data.get("profile", {})
    v = data.get("values", {})
    table = p.get("table")
    if table is not None and table not in TABLES:
        raise InputError(f"unknown table '{table}' in profile (one of {', '.join(TABLES)})",
                         file=str(path))
    if v.get("time_zone"):
        _check_zone(v["time_zone"], path)

    def spellings(section: str) -> dict[str, tuple[str, ...]]:
        out = {}
        for key, vals in data.get(section, {}).items():
            vals = [vals] if isinstance(vals, str) else vals
            out[key] = tuple(str(x) for x in vals)
        return out

    return SourceProfile(
        name=str(p.get("name", path.stem)), table=table, delimiter=str(p.get("delimiter", ",")),
        decimal=str(p.get("decimal", ".")), encoding=str(p.get("encoding", "utf-8")),
        header=bool(p.get("header", True)), format=p.get("format"),
        columns={str(k): str(c) for k, c in data.get("columns", {}).items()},
        units=v.get("units"), time_format=v.get("time_format"), time_zone=v.get("time_zone"),
        time_zone_column=v.get("time_zone_column"),
        time_zone_from_site=bool(v.get("time_zone_from_site", False)),
        outcome=spellings("outcome"), check_type=spellings("check_type"), path=str(path))


def _check_zone(zone: str, path: Path) -> None:
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError
    try:
        ZoneInfo(zone)
    except (ZoneInfoNotFoundError, ValueError) as exc:
        raise InputError(f"unknown time zone '{zone}' in profile", file=str(path)) from exc
