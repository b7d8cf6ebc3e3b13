"""Profiled REML from cell statistics, against published fits and plain statsmodels MixedLM."""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from pipeline.models.reml import cells_from_frame, fit_reml

REFERENCE = Path(__file__).parent / "reference"

# Davies & Goldsmith (1972), as printed in Bates, "lme4: Mixed-effects modeling with R", ch. 1 (Dyestuff),
# and Box & Tiao (1973) (Dyestuff2); copied in /work/shared/reference/published-check-values.md.
DYESTUFF = ("A 1545 1440 1440 1520 1580 | B 1540 1555 1490 1560 1495 | C 1595 1550 1605 1510 1560 | "
            "D 1445 1440 1595 1465 1545 | E 1595 1630 1515 1635 1625 | F 1520 1455 1450 1480 1445")
DYESTUFF2 = ("A 7.298 3.846 2.434 9.566 7.99 | B 5.22 6.556 0.608 11.788 -0.892 | "
             "C 0.11 10.386 13.434 5.51 8.166 | D 2.212 4.852 7.092 9.288 4.98 | "
             "E 0.282 9.014 4.458 9.446 7.198 | F 1.722 4.782 8.106 0.758 3.758")


def _batches(text: str) -> pd.DataFrame:
    rows = []
    for part in text.split("|"):
        label, *values = part.split()
        rows += [(label, float(v)) for v in values]
    return pd.DataFrame(rows, columns=["batch", "y"])


def _one_way(frame: pd.DataFrame, subject: str):
    cells, subjects, _lots, _groups = cells_from_frame(frame, y="y", subject=subject)
    return fit_reml(cells, n_lots=1, n_subjects=len(subjects), fixed_t=False, fixed_d=False, random_slope=False)


def test_dyestuff_reml_variance_components():
    fit = _one_way(_batches(DYESTUFF), "batch")
    assert fit.converged and not fit.boundary
    # Bates, lme4 book ch. 1, Dyestuff REML fit: batch variance 1764.05, residual 2451.25 (balanced closed form)
    assert fit.cov_re[0, 0] == pytest.approx(1764.05, rel=1e-4)
    assert fit.residual_var[0] == pytest.approx(2451.25, rel=1e-4)
    # Bates, lme4 book ch. 1: fixed intercept 1527.5, standard error 19.3834
    assert fit.fixed[0] == pytest.approx(1527.5, rel=1e-9)
    assert np.sqrt(fit.fixed_cov[0, 0]) == pytest.approx(19.3834, rel=1e-4)


def test_dyestuff2_is_a_boundary_fit():
    fit = _one_way(_batches(DYESTUFF2), "batch")
    assert fit.converged
    # Bates, lme4 book ch. 1, Dyestuff2: the batch variance estimate is exactly zero (boundary fit)
    assert fit.boundary
    assert fit.cov_re[0, 0] < 1e-8
    # Bates, lme4 book ch. 1, Dyestuff2: residual variance 13.81, intercept 5.6656 with SE 0.6784
    assert fit.residual_var[0] == pytest.approx(13.81, abs=0.005)
    assert fit.fixed[0] == pytest.approx(5.6656, abs=5e-5)
    assert np.sqrt(fit.fixed_cov[0, 0]) == pytest.approx(0.6784, abs=5e-5)


def _read_sirstv():
    lines = (REFERENCE / "nist" / "SiRstv.dat").read_text().splitlines()
    number = r"([-+]?\d\.\d+E[-+]\d+)"
    between = re.search(r"Between Instrument\s+\d+\s+" + number + r"\s+" + number, "\n".join(lines))
    within = re.search(r"Within Instrument\s+\d+\s+" + number + r"\s+" + number, "\n".join(lines))
    start = next(i for i, line in enumerate(lines) if line.startswith("Data:  Instrument"))
    data = [line.split() for line in lines[start + 1:] if line.strip()]
    frame = pd.DataFrame({"instrument": [int(a) for a, _ in data], "y": [float(b) for _, b in data]})
    return frame, float(between.group(2)), float(within.group(2))


def test_nist_sirstv_mean_squares_give_the_variance_components():
    frame, ms_between, ms_within = _read_sirstv()
    assert len(frame) == 25
    replicates = frame.groupby("instrument").size().iloc[0]
    # Leading digits are shared (NIST notes 3 constant leading digits): centre before sums of squares.
    frame["y"] = frame["y"] - frame["y"].mean()
    fit = _one_way(frame, "instrument")
    # NIST StRD SiRstv certified values: within-instrument MS = repeatability variance;
    # balanced one-way ANOVA: between variance = (MS_between - MS_within) / n, which REML equals
    # when positive (Searle, Casella & McCulloch 1992, Variance Components, sec. 3.7 / 6.7).
    assert fit.residual_var[0] == pytest.approx(ms_within, rel=1e-6)
    assert fit.cov_re[0, 0] == pytest.approx((ms_between - ms_within) / replicates, rel=1e-5)


def _small_fleet(seed: int, n_subjects: int = 40, per: int = 25, n_lots: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    subject = np.repeat(np.arange(n_subjects), per)
    t = rng.uniform(0, 12, subject.size)
    d = rng.uniform(0, 3, subject.size) * (subject % 2)
    lot = (t // (12 / n_lots)).astype(int) ^ (subject % 2)
    lot_eff = rng.normal(0, 1, n_lots + 1)
    b = rng.multivariate_normal([0, 0], [[0.6, 0.02], [0.02, 0.03]], n_subjects)
    y = (lot_eff[lot] + 0.05 * t + 0.3 * d + b[subject, 0] + b[subject, 1] * t + rng.normal(0, 1, subject.size))
    return pd.DataFrame({"subject": subject, "lot": lot, "t": t, "d": d, "y": y})


@pytest.mark.parametrize("seed", [3, 11])
def test_equals_statsmodels_mixedlm_on_a_small_fleet(seed):
    import statsmodels.formula.api as smf

    frame = _small_fleet(seed)
    cells, subjects, lots, _ = cells_from_frame(frame, y="y", subject="subject", lot="lot", t="t", d="d")
    fit = fit_reml(cells, n_lots=len(lots), n_subjects=len(subjects), lot_names=tuple(map(str, lots)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = smf.mixedlm("y ~ 0 + C(lot) + t + d", frame, groups=frame["subject"], re_formula="~t")
        ref = model.fit(reml=True, method=["lbfgs"], gtol=1e-10)
    assert fit.converged
    # common practice: the same REML criterion maximised by statsmodels MixedLM (Lindstrom & Bates 1988)
    assert -0.5 * fit.neg2_reml == pytest.approx(ref.llf, rel=1e-6, abs=1e-6)
    np.testing.assert_allclose(fit.fixed, ref.fe_params.to_numpy(), rtol=1e-4, atol=1e-5)
    np.testing.assert_allclose(fit.residual_var[0], ref.scale, rtol=1e-4)
    np.testing.assert_allclose(fit.cov_re, ref.cov_re.to_numpy(), rtol=1e-3, atol=1e-5)
    # statsmodels takes standard errors from the inverse Hessian of all parameters; ours are the GLS
    # covariance (X'V^-1X)^-1 at the REML variances, so they agree to the order of that difference.
    np.testing.assert_allclose(np.sqrt(np.diag(fit.fixed_cov)), ref.bse_fe.to_numpy(), rtol=5e-3)
    blups = np.array([ref.random_effects[s].to_numpy() for s in subjects])
    np.testing.assert_allclose(fit.blup, blups, rtol=1e-3, atol=1e-4)
