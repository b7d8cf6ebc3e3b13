"""The command group: settings come from the group's one --settings option and reach every command."""

from __future__ import annotations

from types import SimpleNamespace

import pytest
from click.testing import CliRunner

import pipeline.cli.analyse as analyse_cli
from pipeline.cli import main
from pipeline.db import open_database
from pipeline.settings import Settings, load_settings


def test_only_the_group_has_a_settings_option():
    # click documentation (Commands and Groups, "Nested Handling and Contexts"): an option of the group is
    # parsed before the command name; a second --settings on a command would shadow it with another value
    assert any("--settings" in p.opts for p in main.params)
    for name, command in main.commands.items():
        assert not any("--settings" in p.opts for p in command.params), name


@pytest.fixture
def captured(monkeypatch):
    """Replace the analysis with a stub that records the settings it was given."""
    seen: list[Settings] = []

    def fake_analyse(con, settings):
        seen.append(settings)
        return SimpleNamespace(mode="full", run_id=1, n_new_checks=0, n_groups=0, n_signals=0, n_baselines=0,
                               duration_s=0.0)

    monkeypatch.setattr(analyse_cli, "analyse_fleet", fake_analyse)
    return seen


def test_analyse_uses_the_group_settings(tmp_path, captured):
    toml = tmp_path / "program.toml"
    toml.write_text("[charts]\ntarget_arl0 = 370.0\nrun_rules = \"nelson\"\n", encoding="utf-8")
    db = tmp_path / "fleet.duckdb"
    open_database(db).close()
    res = CliRunner().invoke(main, ["--settings", str(toml), "analyse", "--db", str(db)])
    assert res.exit_code == 0, res.output
    # click documentation (pass_obj): the command receives ctx.obj, which the group set from --settings
    assert captured == [load_settings(toml)]
    assert (captured[0].charts.target_arl0, captured[0].charts.run_rules) == (370.0, "nelson")
    res = CliRunner().invoke(main, ["analyse", "--db", str(db)], env={"BREATHFLEET_SETTINGS": str(toml)})
    assert res.exit_code == 0, res.output
    # the group option's envvar (click documentation: "Values from Environment Variables") reaches analyse too
    assert captured[1] == load_settings(toml)


def test_analyse_rejects_its_old_settings_option(tmp_path, captured):
    db = tmp_path / "fleet.duckdb"
    open_database(db).close()
    res = CliRunner().invoke(main, ["analyse", "--db", str(db), "--settings", str(tmp_path / "x.toml")])
    # click documentation (usage errors): an unknown option exits with code 2 and names the option
    assert res.exit_code == 2 and "No such option '--settings'" in res.output
    assert captured == []
    res = CliRunner().invoke(main, ["analyse", "--db", str(db)], env={"BREATHFLEET_SETTINGS": ""})
    assert res.exit_code == 0, res.output
    assert captured == [Settings()]
