"""Chart design by run length: choose CUSUM (k, h) or EWMA (lambda, L) for a target in-control ARL.

Every design is a frozen record of its parameters and the run lengths they give, so a chart
can store the design it ran with. Designs are pure functions of their arguments and cached.

Source: CUSUM k = shift/2 is the optimal reference value for a step of that size
(Moustakides 1986; Montgomery, section 9.1.3), h solves ARL0 by the Brook & Evans (1972)
chain. EWMA (lambda, L) minimises the out-of-control ARL subject to the in-control ARL,
the design procedure of Lucas & Saccucci (1990), Technometrics 32:1-12.
"""

from __future__ import annotations

import dataclasses
import math
import warnings as _warnings
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

from scipy.optimize import brentq, minimize_scalar

from pipeline.charts import arl as _arl

CUSUM_METHOD = "Brook & Evans (1972) Markov chain, sides combined as in Lucas & Crosier (1982)"
EWMA_METHOD = "Crowder (1987) integral equation, Gauss-Legendre Nystrom; design as Lucas & Saccucci (1990)"


@dataclass(frozen=True)
class CusumDesign:
    """A two-sided tabular CUSUM design in sigma units and its run lengths.

    arl1 is the zero-state ARL at `shift`; arl_drift the ARL under a linear drift of `drift`
    sigma per check (upper side, mean drift * t at check t), None when no drift was asked for.
    """

    k: float
    h: float
    arl0: float
    arl1: float
    shift: float
    target_arl0: float | None
    headstart: float = 0.0
    drift: float | None = None
    arl_drift: float | None = None
    method: str = CUSUM_METHOD
    converged: bool = True
    warnings: tuple[str, ...] = ()

    def parameters(self) -> dict[str, Any]:
        """The design as a JSON-ready dict (for a chart's `parameters` column)."""
        return {"chart": "cusum", **dataclasses.asdict(self), "warnings": list(self.warnings)}


@dataclass(frozen=True)
class EwmaDesign:
    """A two-sided EWMA design (fixed asymptotic limits +-L sqrt(lam/(2-lam)) sigma) and its run lengths."""

    lam: float
    L: float
    arl0: float
    arl1: float
    shift: float
    target_arl0: float | None
    limit: float = 0.0
    drift: float | None = None
    arl_drift: float | None = None
    method: str = EWMA_METHOD
    converged: bool = True
    warnings: tuple[str, ...] = ()

    def parameters(self) -> dict[str, Any]:
        """The design as a JSON-ready dict (for a chart's `parameters` column)."""
        return {"chart": "ewma", **dataclasses.asdict(self), "warnings": list(self.warnings)}


def _check_targets(arl0: float, shift: float) -> None:
    if not (arl0 > 1 and math.isfinite(arl0)):
        raise ValueError(f"the in-control ARL must be a finite number above 1, got {arl0!r}")
    if not (shift > 0 and math.isfinite(shift)):
        raise ValueError(f"the shift to detect must be positive (in sigma), got {shift!r}")


def evaluate_cusum(k: float, h: float, shift: float = 1.0, *, headstart: float = 0.0,
                   drift: float | None = None, target_arl0: float | None = None) -> CusumDesign:
    """Run lengths of a given two-sided CUSUM (k, h): in control, at `shift`, and under `drift`.

    Source: Brook & Evans (1972); drift by the time-varying chain (Gan 1992).
    """
    arl0 = _arl.cusum_arl(k, h, 0.0, headstart)
    arl1 = _arl.cusum_arl(k, h, shift, headstart)
    arl_drift = None if drift is None else _arl.cusum_drift_arl(k, h, drift, 0.0, headstart)
    return CusumDesign(k=float(k), h=float(h), arl0=arl0, arl1=arl1, shift=float(shift), target_arl0=target_arl0,
                       headstart=float(headstart), drift=drift, arl_drift=arl_drift)


@lru_cache(maxsize=64)
def design_cusum(arl0: float = 500.0, shift: float = 1.0, *, headstart: float = 0.0,
                 drift: float | None = None) -> CusumDesign:
    """CUSUM design: k = shift/2 and the h whose zero-state two-sided ARL0 equals `arl0`.

    Parameters: arl0 target in-control ARL (checks); shift the step to detect (sigma);
    headstart a FIR value as a fraction-free number in sigma (0 for none, often h/2);
    drift optional linear drift (sigma per check) whose ARL is reported.
    Returns: CusumDesign. Source: Brook & Evans (1972); k = shift/2 (Montgomery, section 9.1.3).
    """
    _check_targets(arl0, shift)
    k = shift / 2.0
    notes: list[str] = []

    def gap(h: float) -> float:
        value = _arl.cusum_arl(k, h, 0.0, min(headstart, 0.999 * h))
        return math.log(value) - math.log(arl0) if 0 < value < 1e12 else 30.0

    # Bracket around Siegmund's approximation, which is within a few percent of the chain's h.
    try:
        guess = brentq(lambda h: math.log(_arl.siegmund_arl(k, h)) - math.log(arl0), 1e-3, 100.0)
    except (ValueError, OverflowError):
        guess = 5.0
    lo, hi = max(0.05, 0.9 * guess - 0.2), 1.1 * guess + 0.2
    for _ in range(20):
        if gap(lo) <= 0:
            break
        lo /= 2.0
    for _ in range(20):
        if gap(hi) >= 0:
            break
        hi *= 1.5
    if gap(lo) > 0 or gap(hi) < 0:
        raise ValueError(f"no decision interval h gives an in-control ARL of {arl0} with k = {k}; "
                         "choose a larger ARL0 or a smaller shift")
    h = brentq(gap, lo, hi, xtol=1e-6)
    if headstart >= h:
        notes.append(f"headstart {headstart} is not below h = {h:.4f}; it was limited to 0.999 h")
    design = evaluate_cusum(k, h, shift, headstart=min(headstart, 0.999 * h), drift=drift, target_arl0=arl0)
    converged = abs(design.arl0 / arl0 - 1.0) < 1e-4
    if not converged:
        notes.append(f"ARL0 reached {design.arl0:.2f}, not {arl0}")
    return dataclasses.replace(design, converged=converged, warnings=tuple(notes))


def evaluate_ewma(lam: float, L: float, shift: float = 1.0, *, drift: float | None = None,
                  target_arl0: float | None = None) -> EwmaDesign:
    """Run lengths of a given two-sided EWMA (lam, L): in control, at `shift`, and under `drift`.

    Source: Crowder (1987) integral equation; drift by the time-varying kernel (Gan 1991).
    """
    arl0 = _arl.ewma_arl(lam, L, 0.0)
    arl1 = _arl.ewma_arl(lam, L, shift)
    arl_drift = None if drift is None else _arl.ewma_drift_arl(lam, L, drift)
    return EwmaDesign(lam=float(lam), L=float(L), arl0=arl0, arl1=arl1, shift=float(shift), target_arl0=target_arl0,
                      limit=_arl.ewma_limit(lam, L), drift=drift, arl_drift=arl_drift)


@lru_cache(maxsize=256)
def ewma_L_for_arl0(lam: float, arl0: float = 500.0) -> float:
    """The limit multiple L that gives a two-sided EWMA with smoothing `lam` the in-control ARL `arl0`."""
    def gap(L: float) -> float:
        value = _arl.ewma_arl(lam, L, 0.0)
        # Far beyond any useful ARL0 the linear system loses precision; treat it as "too large".
        return math.log(value) - math.log(arl0) if 0 < value < 1e12 else 30.0

    if gap(0.3) > 0 or gap(6.0) < 0:
        raise ValueError(f"no limit multiple L in [0.3, 6] gives an in-control ARL of {arl0} with lambda = {lam}")
    return float(brentq(gap, 0.3, 6.0, xtol=1e-7))


@lru_cache(maxsize=64)
def design_ewma(arl0: float = 500.0, shift: float = 1.0, *, drift: float | None = None,
                lam_bounds: tuple[float, float] = (0.02, 1.0)) -> EwmaDesign:
    """EWMA design: the (lambda, L) with ARL0 = `arl0` that minimises the ARL at `shift`.

    For each lambda, L solves ARL0; lambda is then chosen by a bounded scalar search
    (the ARL1 curve is flat near its minimum, so lambda is found to about 1e-3).
    Returns: EwmaDesign. Source: Lucas & Saccucci (1990) design procedure; Crowder (1987) ARLs.
    """
    _check_targets(arl0, shift)
    lo, hi = lam_bounds
    if not 0 < lo < hi <= 1:
        raise ValueError(f"lam_bounds must satisfy 0 < low < high <= 1, got {lam_bounds!r}")

    def arl1_of(lam: float) -> float:
        return _arl.ewma_arl(lam, ewma_L_for_arl0(lam, arl0), shift)

    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        try:
            res = minimize_scalar(arl1_of, bounds=(lo, hi), method="bounded", options={"xatol": 5e-4})
        except ValueError as exc:
            raise ValueError(f"no EWMA design reaches an in-control ARL of {arl0}; choose a larger ARL0") from exc
    lam = float(res.x)
    notes = [str(w.message) for w in caught]
    if min(lam - lo, hi - lam) < 1e-3:
        notes.append(f"the best lambda {lam:.4f} lies on the search bound {lam_bounds}")
    design = evaluate_ewma(lam, ewma_L_for_arl0(lam, arl0), shift, drift=drift, target_arl0=arl0)
    converged = bool(res.success) and abs(design.arl0 / arl0 - 1.0) < 1e-4
    return dataclasses.replace(design, converged=converged, warnings=tuple(notes))
