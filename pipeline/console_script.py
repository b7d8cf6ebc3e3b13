"""The `breathfleet` console script: switch off numpy's huge-page advice, then run the command line.

The switch is read when numpy is imported (pipeline/batch_memory.py), and the command modules
import numpy, so it is set here, before pipeline.cli is imported. This module is outside that
package: importing any module of it would import the commands first.
"""

from __future__ import annotations

from pipeline.batch_memory import prepare_batch_process


def main() -> None:
    prepare_batch_process()
    from pipeline.cli import main as command_line

    command_line()
