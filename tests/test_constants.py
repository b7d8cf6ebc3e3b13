"""Shewhart constants computed by integration against published tables."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest

from pipeline.charts.constants import c4, d2, d3, shewhart_constants

REFERENCE = Path(__file__).parent / "reference" / "arl"


def _rows(name: str) -> list[dict[str, float]]:
    with open(REFERENCE / name, newline="") as fh:
        lines = [line for line in fh if not line.startswith("#")]
    return [{k: float(v) for k, v in row.items()} for row in csv.DictReader(lines)]


TABLE = _rows("shewhart_constants.csv")


@pytest.mark.parametrize("row", TABLE, ids=lambda r: f"n={int(r['n'])}")
def test_d2_d3_c4_match_walpole_table_a22(row):
    n = int(row["n"])
    # Walpole, Myers, Myers & Ye, Probability and Statistics for Engineers and Scientists, Table A.22 (d2)
    assert d2(n) == pytest.approx(row["d2"], abs=2e-3)
    # Walpole et al., Table A.22 (d3)
    assert d3(n) == pytest.approx(row["d3"], abs=2e-3)
    # Walpole et al., Table A.22 (c4, printed to 4 decimals)
    assert c4(n) == pytest.approx(row["c4"], abs=2e-4)


@pytest.mark.parametrize("row", TABLE, ids=lambda r: f"n={int(r['n'])}")
def test_derived_factors_match_montgomery_appendix_vi(row):
    c = shewhart_constants(int(row["n"]))
    # Montgomery, Introduction to Statistical Quality Control, Appendix VI (A2) -- from memory
    assert c.A2 == pytest.approx(row["A2"], abs=2e-3)
    # Montgomery, Appendix VI (D3, clipped at 0) -- from memory
    assert c.D3 == pytest.approx(row["D3"], abs=2e-3)
    # Montgomery, Appendix VI (D4; printed entries come from rounded d2, d3) -- from memory
    assert c.D4 == pytest.approx(row["D4"], abs=2e-3)


def test_closed_forms_for_n2():
    # Tippett (1925): for n = 2 the range is |X1 - X2| ~ sqrt(2)|N(0,1)|, so d2 = 2/sqrt(pi)
    assert d2(2) == pytest.approx(2.0 / math.sqrt(math.pi), abs=1e-9)
    # same: E[R^2] = 2, so d3 = sqrt(2 - 4/pi)
    assert d3(2) == pytest.approx(math.sqrt(2.0 - 4.0 / math.pi), abs=1e-6)
    # c4(2) = sqrt(2/pi) from the gamma-function formula
    assert c4(2) == pytest.approx(math.sqrt(2.0 / math.pi), abs=1e-12)
    # NIST/SEMATECH e-Handbook 6.3.2.2 uses E2 = 3/d2 with d2 = 1.128 for the individuals chart: 2.66
    assert shewhart_constants(2).E2 == pytest.approx(2.66, abs=2e-3)


def test_rejects_subgroup_of_one():
    with pytest.raises(ValueError, match="subgroup size must be an integer >= 2"):
        d2(1)
