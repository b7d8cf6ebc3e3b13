"""Shewhart chart constants d2, d3, c4, A2, A3, B3, B4, D3, D4 and E2, computed rather than tabled.

d2 and d3 are the mean and standard deviation of the range of n standard normal
variables, found by numerical integration; c4 is the mean of the sample standard
deviation over sigma, from gamma functions. The derived factors follow the usual
3-sigma definitions.

Source: Tippett (1925) for the range moments; Montgomery, *Introduction to Statistical
Quality Control*, Appendix VI, and Walpole et al., Table A.22, for the definitions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.integrate import simpson
from scipy.special import gammaln, ndtr

# Integration grid for the range moments: the integrands decay like the normal tail,
# so +-9 covers them; trapezoid over x (smooth, decaying at both ends) and Simpson over
# the range w (which starts at a boundary) are accurate to about 1e-7.
_X = np.linspace(-9.0, 9.0, 1201)
_W = np.linspace(0.0, 12.0, 601)


@dataclass(frozen=True)
class ShewhartConstants:
    """Constants for subgroups of size n (3-sigma limits)."""

    n: int
    d2: float
    d3: float
    c4: float
    A2: float
    A3: float
    B3: float
    B4: float
    D3: float
    D4: float
    E2: float


def _check_n(n: int) -> None:
    if int(n) != n or n < 2:
        raise ValueError(f"subgroup size must be an integer >= 2, got {n!r}")


@lru_cache(maxsize=64)
def d2(n: int) -> float:
    """Expected range of n standard normal variables.

    Source: d2(n) = integral of 1 - Phi(x)^n - (1 - Phi(x))^n over the real line (Tippett 1925).
    """
    _check_n(n)
    p = ndtr(_X)
    return float(np.trapezoid(1.0 - p**n - (1.0 - p) ** n, _X))


@lru_cache(maxsize=64)
def d3(n: int) -> float:
    """Standard deviation of the range of n standard normal variables.

    The range's distribution is F(w) = n * integral phi(x) [Phi(x + w) - Phi(x)]^(n-1) dx,
    and E[R^2] = 2 * integral w (1 - F(w)) dw; d3 = sqrt(E[R^2] - d2^2).
    Source: Tippett (1925); Montgomery, Appendix VI.
    """
    _check_n(n)
    phi = np.exp(-0.5 * _X**2) / math.sqrt(2.0 * math.pi)
    px = ndtr(_X)
    inner = ndtr(_X[None, :] + _W[:, None]) - px[None, :]
    cdf = n * np.trapezoid(phi[None, :] * inner ** (n - 1), _X, axis=1)
    second_moment = 2.0 * simpson(_W * (1.0 - cdf), x=_W)
    return float(math.sqrt(second_moment - d2(n) ** 2))


def c4(n: int) -> float:
    """Mean of the sample standard deviation of n normal variables, in units of sigma.

    Source: c4 = sqrt(2/(n-1)) Gamma(n/2) / Gamma((n-1)/2).
    """
    _check_n(n)
    return float(math.sqrt(2.0 / (n - 1)) * math.exp(gammaln(n / 2.0) - gammaln((n - 1) / 2.0)))


def shewhart_constants(n: int) -> ShewhartConstants:
    """All 3-sigma Shewhart factors for subgroup size n.

    Parameters: n, the subgroup size (>= 2; for an individuals chart the moving range uses n = 2).
    Returns: ShewhartConstants.
    Source: Montgomery, Appendix VI definitions: A2 = 3/(d2 sqrt n), A3 = 3/(c4 sqrt n),
    B3, B4 = 1 -+ 3 sqrt(1 - c4^2)/c4, D3, D4 = 1 -+ 3 d3/d2 (lower ones clipped at 0), E2 = 3/d2.
    """
    _check_n(n)
    a, b, c = d2(n), d3(n), c4(n)
    s = 3.0 * math.sqrt(1.0 - c * c) / c
    return ShewhartConstants(
        n=n, d2=a, d3=b, c4=c,
        A2=3.0 / (a * math.sqrt(n)), A3=3.0 / (c * math.sqrt(n)),
        B3=max(0.0, 1.0 - s), B4=1.0 + s,
        D3=max(0.0, 1.0 - 3.0 * b / a), D4=1.0 + 3.0 * b / a, E2=3.0 / a,
    )
