"""Source profiles: parsing, and unknown keys naming file and key."""

from __future__ import annotations

from pathlib import Path

import pytest

from pipeline.errors import InputError
from pipeline.sources.profiles import load_profile

DEMO_PROFILES = Path(__file__).resolve().parent.parent / "demo_fleet" / "profiles"


def test_demo_profiles_load():
    p = load_profile(DEMO_PROFILES / "mgl.toml")
    assert (p.table, p.delimiter, p.decimal, p.units) == ("checks", ";", ",", "mg/L")
    assert p.source_column("instrument_id") == "DeviceNo"
    assert p.outcome["pass"] == ("OK",)
    assert load_profile(DEMO_PROFILES / "ugdl.toml").time_zone_column == "tz"
    assert load_profile(DEMO_PROFILES / "local.toml").time_zone_from_site


def test_unknown_key_names_file_and_key(tmp_path):
    path = tmp_path / "p.toml"
    path.write_text('[profile]\nname = "x"\n[values]\ntimezone = "UTC"\n', encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_profile(path)
    assert str(exc.value) == f"{path}: unknown key 'values.timezone' in profile"


def test_unknown_section_and_bad_zone(tmp_path):
    path = tmp_path / "p.toml"
    path.write_text("[colums]\nx = 'y'\n", encoding="utf-8")
    with pytest.raises(InputError, match="unknown key 'colums'"):
        load_profile(path)
    path.write_text("[values]\ntime_zone = 'Mars/Olympus'\n", encoding="utf-8")
    with pytest.raises(InputError, match="unknown time zone 'Mars/Olympus'"):
        load_profile(path)
