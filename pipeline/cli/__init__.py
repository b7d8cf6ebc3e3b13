"""The `breathfleet` command line: a thin shell that parses, calls one library function and renders.

Each module in this package defines one click command named `command`; they are
discovered here, so adding a command means adding a module. Library errors become
one-line messages and a non-zero exit at this edge only.
"""

from __future__ import annotations

import importlib
import pkgutil

import click

from pipeline import __version__
from pipeline.errors import InputError
from pipeline.settings import load_settings


class _Group(click.Group):
    def invoke(self, ctx: click.Context):  # turn library errors into one-line messages
        try:
            return super().invoke(ctx)
        except InputError as exc:
            raise click.ClickException(str(exc)) from exc


@click.group(cls=_Group, epilog="Example: breathfleet --settings program.toml ingest --db fleet.duckdb exports/*.csv")
@click.option("--settings", "settings_path", type=click.Path(dir_okay=False), envvar="BREATHFLEET_SETTINGS",
              help="Program settings (TOML). Defaults apply where it is silent.")
@click.version_option(__version__, prog_name="breathfleet")
@click.pass_context
def main(ctx: click.Context, settings_path: str | None) -> None:
    """breathfleet: statistical quality control for a fleet of evidential breath alcohol instruments.

    It informs maintenance and oversight; it does not certify an instrument or invalidate a test.
    """
    try:
        ctx.obj = load_settings(settings_path)
    except InputError as exc:
        raise click.ClickException(str(exc)) from exc


for _info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
    if not _info.name.startswith("_"):
        main.add_command(importlib.import_module(f"{__name__}.{_info.name}").command)
