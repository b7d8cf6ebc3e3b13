"""Settings: one frozen object from TOML; unknown keys are named."""

import dataclasses

import pytest

from pipeline.errors import InputError
from pipeline.settings import Settings, load_settings


def test_defaults_are_the_common_us_rule():
    settings = load_settings(None)
    rule = settings.standards.tolerance_rules[0]
    # Common practice (from memory): within 0.005 g/210L or 5 %, whichever is greater.
    assert (rule.absolute, rule.relative) == (0.005, 0.05)


def test_file_values_override_defaults(tmp_path):
    path = tmp_path / "program.toml"
    path.write_text('[charts]\nown_baseline_min_checks = 30\n[standards]\n'
                    'tolerance_rules = [{absolute = 0.01, relative = 0.1}]\n')
    settings = load_settings(path)
    assert settings.charts.own_baseline_min_checks == 30
    assert settings.standards.tolerance_rules[0].absolute == 0.01
    assert settings.model == Settings().model


def test_unknown_key_names_file_and_key(tmp_path):
    path = tmp_path / "program.toml"
    path.write_text("[charts]\nown_baseline_min_chekcs = 30\n")
    with pytest.raises(InputError, match=r"program\.toml: unknown key 'charts\.own_baseline_min_chekcs'"):
        load_settings(path)


def test_wrong_type_is_named(tmp_path):
    path = tmp_path / "program.toml"
    path.write_text('[queue]\nsilence_days = "two weeks"\n')
    with pytest.raises(InputError, match=r"'queue\.silence_days' must be of type int"):
        load_settings(path)


def test_settings_are_frozen_and_have_a_stable_digest():
    settings = Settings()
    with pytest.raises(dataclasses.FrozenInstanceError):
        settings.charts = None  # type: ignore[misc]
    assert settings.digest() == Settings().digest()
