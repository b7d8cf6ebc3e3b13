"""Run lengths of Shewhart, CUSUM and EWMA charts against published tables and simulation."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest

from pipeline.charts.arl import (
    cusum_arl,
    cusum_drift_arl,
    cusum_one_sided_arl,
    cusum_survival,
    cusum_two_dimensional_arl,
    ewma_arl,
    ewma_drift_arl,
    ewma_survival,
    shewhart_arl,
    shewhart_drift_arl,
    siegmund_arl,
)

from helpers.run_length import simulate_cusum, simulate_ewma

REFERENCE = Path(__file__).parent / "reference" / "arl"


def _rows(name: str) -> list[dict[str, str]]:
    with open(REFERENCE / name, newline="") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


def _printed(text: str, rel: float) -> dict[str, float]:
    """pytest.approx arguments for a printed value: `rel`, or half a unit of its last digit if larger."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return {"rel": rel, "abs": 0.5 * 10.0**-decimals}


# ---------------------------------------------------------------- Shewhart


def test_shewhart_individuals_arl():
    # published-check-values.md: ARL0 = 1/(2(1 - Phi(3))) = 370.398 (COMPUTED; Montgomery section 6.3)
    assert shewhart_arl(3.0, 0.0) == pytest.approx(370.398, abs=1e-3)
    # same source: 43.895 at a 1-sigma shift (COMPUTED)
    assert shewhart_arl(3.0, 1.0) == pytest.approx(43.895, abs=1e-3)


def test_shewhart_drift_reduces_to_step_arl_without_drift():
    # common practice: with zero drift the run length is geometric, ARL = 1/p
    assert shewhart_drift_arl(3.0, 0.0) == pytest.approx(shewhart_arl(3.0), rel=1e-9)


# ---------------------------------------------------------------- CUSUM


@pytest.mark.parametrize("row", _rows("cusum_k05.csv"), ids=lambda r: f"h{r['h']}-d{r['shift']}")
def test_cusum_arl_matches_lucas_crosier_table(row):
    # The Brook-Evans chain replaces the continuous CUSUM by 400 cells; the table itself came from a
    # coarser chain and is printed to 3 significant figures, so 1 % relative (or half a printed unit).
    computed = cusum_arl(0.5, float(row["h"]), float(row["shift"]))
    # Lucas & Crosier (1982), Technometrics 24:199-205, Table 1; Montgomery Table 9.3 after Hawkins (h = 5)
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 1e-2))


@pytest.mark.parametrize("shift", [0.0, 1.0, 2.5])
def test_cusum_discretisation_has_converged(shift):
    default = cusum_arl(0.5, 5.0, shift)  # Richardson extrapolation of 100- and 200-cell chains
    fine = cusum_arl(0.5, 5.0, shift, n_states=600)
    # Brook & Evans (1972): the chain converges as the cell width shrinks (error ~ 1/m^2, 600 cells are
    # within 3e-5 of the limit); the extrapolated default agrees with 600 cells to 5e-5
    assert default == pytest.approx(fine, rel=5e-5)


def test_siegmund_values():
    # published-check-values.md: Siegmund (1985), k = 0.5, h = 5, shift 0: one-sided 938.2 (COMPUTED)
    assert siegmund_arl(0.5, 5.0, 0.0, sided="one") == pytest.approx(938.2, abs=0.05)
    # same: two-sided 469.1 (COMPUTED)
    assert siegmund_arl(0.5, 5.0, 0.0) == pytest.approx(469.1, abs=0.05)


@pytest.mark.parametrize("shift", [0.0, 0.5, 1.0, 1.5])
def test_siegmund_agrees_with_markov_chain(shift):
    # Montgomery section 9.1: Siegmund's approximation is close to exact ARLs for moderate shifts (within 2 %)
    assert siegmund_arl(0.5, 5.0, shift) == pytest.approx(cusum_arl(0.5, 5.0, shift), rel=2e-2)


def test_cusum_one_sided_is_twice_two_sided_in_control():
    # Lucas & Crosier (1982): 1/ARL = 1/ARL+ + 1/ARL-, so by symmetry the two-sided ARL0 is half the one-sided
    assert cusum_one_sided_arl(0.5, 4.0) == pytest.approx(2.0 * cusum_arl(0.5, 4.0), rel=1e-12)


def test_cusum_headstart_against_simulation():
    rng = np.random.default_rng(20261202)
    rl = simulate_cusum(0.5, 5.0, 20_000, rng, shift=1.0, headstart=2.5)
    se = rl.std(ddof=1) / math.sqrt(rl.size)
    # Lucas & Crosier (1982) FIR: a headstart h/2 cuts the ARL at 1 sigma from 10.4 to about 6.3;
    # the chain agrees with a 20,000-chart simulation within 4 standard errors
    assert cusum_arl(0.5, 5.0, 1.0, headstart=2.5) == pytest.approx(rl.mean(), abs=4 * se)


def test_cusum_headstart_in_control_against_simulation():
    rng = np.random.default_rng(7)
    rl = simulate_cusum(0.5, 5.0, 12_000, rng, headstart=2.5)
    se = rl.std(ddof=1) / math.sqrt(rl.size)
    # Woodall (1984) two-dimensional chain: with a headstart the sides interact (the simple combination
    # would say 448); the chain agrees with a 12,000-chart simulation within 4 standard errors
    assert cusum_arl(0.5, 5.0, 0.0, headstart=2.5) == pytest.approx(rl.mean(), abs=4 * se)
    # common practice: a headstart costs some in-control run length
    assert cusum_arl(0.5, 5.0, 0.0, headstart=2.5) < cusum_arl(0.5, 5.0, 0.0)


@pytest.mark.parametrize("row", _rows("cusum_k05_fir.csv"), ids=lambda r: f"h{r['h']}-d{r['shift']}")
def test_cusum_fir_matches_lucas_crosier(row):
    computed = cusum_arl(0.5, float(row["h"]), float(row["shift"]), headstart=float(row["headstart"]))
    # Lucas & Crosier (1982), FIR headstart h/2 (from memory; recomputed): 1 % or half a printed unit
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 1e-2))


@pytest.mark.parametrize("shift", [0.0, 1.0, 2.5])
def test_two_dimensional_chain_confirms_side_combination_at_zero_state(shift):
    # Lucas & Crosier (1982): 1/ARL = 1/ARL+ + 1/ARL- holds for the zero-state chart; Woodall's (1984)
    # two-dimensional chain (Richardson-extrapolated) agrees to 1e-4
    assert cusum_two_dimensional_arl(0.5, 5.0, shift, 0.0) == pytest.approx(cusum_arl(0.5, 5.0, shift), rel=1e-4)


def test_cusum_survival_against_simulation():
    rng = np.random.default_rng(11)
    rl = simulate_cusum(0.5, 5.0, 20_000, rng)
    survival = cusum_survival(0.5, 5.0, 500)
    for t in (10, 100, 500):
        observed = float((rl > t).mean())
        se = math.sqrt(observed * (1 - observed) / rl.size)
        # Brook & Evans (1972) chain, sides multiplied as in the Lucas & Crosier combination:
        # P(RL > t) within 4 standard errors (plus 0.004 for the independence approximation) of simulation
        assert survival[t - 1] == pytest.approx(observed, abs=4 * se + 0.004)


@pytest.mark.parametrize("row", _rows("drift_cusum_gan1992.csv"), ids=lambda r: f"drift{r['drift']}")
def test_cusum_drift_matches_gan_1992(row):
    computed = cusum_drift_arl(float(row["k"]), float(row["h"]), float(row["drift"]), first_check_shifted=False)
    # Gan's method freezes the mean after a finite number of steps, so his figures differ from the exact
    # time-varying chain by up to about 1 %: tolerance 1.5 % relative.
    # Gan (1992), one-sided CUSUM under linear drift, Table 1 (quoted in the R package spc, xDcusum.arl)
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 1.5e-2))


def test_cusum_two_sided_drift_against_simulation():
    rng = np.random.default_rng(3)
    rl = simulate_cusum(0.5, 5.07, 20_000, rng, drift=0.05)
    se = rl.std(ddof=1) / math.sqrt(rl.size)
    # Gan (1992) time-varying chain for the upper side; the lower side barely matters under an upward
    # drift, so the two-sided simulation agrees within 4 standard errors
    assert cusum_drift_arl(0.5, 5.07, 0.05) == pytest.approx(rl.mean(), abs=4 * se)


def test_cusum_rejects_headstart_beyond_h():
    with pytest.raises(ValueError, match="headstart must lie in"):
        cusum_arl(0.5, 4.0, 0.0, headstart=4.0)


# ---------------------------------------------------------------- EWMA


@pytest.mark.parametrize("row", _rows("ewma_lucas_saccucci.csv"), ids=lambda r: f"lam{r['lam']}-d{r['shift']}")
def test_ewma_arl_matches_lucas_saccucci(row):
    computed = ewma_arl(float(row["lam"]), float(row["L"]), float(row["shift"]))
    # Lucas & Saccucci (1990), Technometrics 32:1-12 (lambda 0.5 row confirmed; others as tabulated in Montgomery)
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 5e-3))


def test_ewma_matches_sas_ewmaarl_to_many_digits():
    # SAS/QC EWMAARL(delta = 1, lambda = 0.25, L = 3) = 11.154267016 (CONFIRMED); Gauss-Legendre Nystrom, 48 nodes
    assert ewma_arl(0.25, 3.0, 1.0) == pytest.approx(11.154267016, abs=2e-9)


@pytest.mark.parametrize("lam,L,shift", [(0.25, 2.998, 0.0), (0.1, 2.814, 1.0), (0.05, 2.615, 0.5)])
def test_ewma_markov_chain_agrees_with_integral_equation(lam, L, shift):
    # Lucas & Saccucci (1990) Markov chain (301 states) against Crowder (1987) integral equation: within 0.1 %
    assert ewma_arl(lam, L, shift, method="markov", n_nodes=150) == pytest.approx(ewma_arl(lam, L, shift), rel=1e-3)


def test_ewma_survival_against_simulation():
    rng = np.random.default_rng(5)
    rl = simulate_ewma(0.25, 2.998, 20_000, rng)
    survival = ewma_survival(0.25, 2.998, 500)
    for t in (10, 100, 500):
        observed = float((rl > t).mean())
        se = math.sqrt(observed * (1 - observed) / rl.size)
        # Crowder (1987) kernel iterated forward: P(RL > t) within 4 standard errors of a 20,000-chart simulation
        assert survival[t - 1] == pytest.approx(observed, abs=4 * se)


@pytest.mark.parametrize("row", _rows("drift_ewma_gan1991.csv"), ids=lambda r: f"lam{r['lam']}-drift{r['drift']}")
def test_ewma_drift_matches_gan_1991(row):
    lam = float(row["lam"])
    L = float(row["limit"]) / math.sqrt(lam / (2.0 - lam))
    computed = ewma_drift_arl(lam, L, float(row["drift"]), first_check_shifted=False)
    # Gan (1991), J. Statist. Comput. Simul. 38:181-200, Table 1 (quoted in the R package spc, xDewma.arl);
    # Gan's own discretisation and 3-figure printing: 1 % relative
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 1e-2))


@pytest.mark.parametrize("row", _rows("drift_ewma_aerne1991.csv"), ids=lambda r: f"lam{r['lam']}-drift{r['drift']}")
def test_ewma_drift_matches_aerne_champ_rigdon_1991(row):
    lam, L, drift = float(row["lam"]), float(row["L"]), float(row["drift"])
    computed = ewma_arl(lam, L) if drift == 0 else ewma_drift_arl(lam, L, drift)
    # Aerne, Champ & Rigdon (1991), Commun. Statist. Theory Methods 20:3341-3349, Table I (quoted in spc)
    assert computed == pytest.approx(float(row["arl"]), **_printed(row["arl"], 1e-2))


def test_ewma_drift_against_simulation():
    rng = np.random.default_rng(9)
    rl = simulate_ewma(0.1336, 2.8826, 20_000, rng, drift=0.05)
    se = rl.std(ddof=1) / math.sqrt(rl.size)
    # Gan (1991) time-varying chain (Nystrom form) against simulation: within 4 standard errors
    assert ewma_drift_arl(0.1336, 2.8826, 0.05) == pytest.approx(rl.mean(), abs=4 * se)


def test_ewma_rejects_bad_lambda():
    with pytest.raises(ValueError, match=r"lambda must lie in \(0, 1\]"):
        ewma_arl(1.5, 3.0)
