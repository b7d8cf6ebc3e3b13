"""GUM (JCGM 100:2008) building blocks: standard uncertainties, combination, expansion.

Source: JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
uncertainty in measurement: 4.3.7 (rectangular a/sqrt(3)), 4.3.9 (triangular a/sqrt(6)),
5.1.2 (law of propagation, uncorrelated inputs), 6.2 and 6.3 (expanded uncertainty U = k u_c),
G.4.1 (Welch-Satterthwaite effective degrees of freedom).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass


@dataclass(frozen=True)
class UncertaintyComponent:
    """One input of a budget: its standard uncertainty, sensitivity and contribution |c| u."""

    name: str
    description: str
    evaluation: str             # 'A' (statistics of repeated observations) or 'B' (other information)
    distribution: str           # 'normal', 'rectangular', 'triangular'
    standard_uncertainty: float
    sensitivity: float
    contribution: float         # |sensitivity| x standard_uncertainty, in the unit of the result
    degrees_of_freedom: float   # math.inf for type B


def rectangular_u(half_width: float) -> float:
    """Standard uncertainty of a rectangular distribution of half-width a: a / sqrt(3) (GUM 4.3.7)."""
    return half_width / math.sqrt(3.0)


def triangular_u(half_width: float) -> float:
    """Standard uncertainty of a triangular distribution of half-width a: a / sqrt(6) (GUM 4.3.9)."""
    return half_width / math.sqrt(6.0)


def normal_u_from_expanded(expanded: float, coverage_factor: float = 2.0) -> float:
    """Standard uncertainty from a certificate's expanded uncertainty U and coverage factor k."""
    return expanded / coverage_factor


def make_component(name: str, standard_uncertainty: float, *, sensitivity: float = 1.0,
                   evaluation: str = "B", distribution: str = "normal",
                   degrees_of_freedom: float = math.inf, description: str = "") -> UncertaintyComponent:
    """A budget line with its contribution |c_i| u(x_i) computed."""
    return UncertaintyComponent(name=name, description=description, evaluation=evaluation,
                                distribution=distribution, standard_uncertainty=standard_uncertainty,
                                sensitivity=sensitivity,
                                contribution=abs(sensitivity) * standard_uncertainty,
                                degrees_of_freedom=degrees_of_freedom)


def combine_in_quadrature(contributions: Iterable[float]) -> float:
    """Combined standard uncertainty of uncorrelated contributions: sqrt(sum (c_i u_i)^2) (GUM 5.1.2)."""
    return math.sqrt(sum(c * c for c in contributions))


def combined_standard_uncertainty(components: Iterable[UncertaintyComponent]) -> float:
    """u_c of a budget of uncorrelated components."""
    return combine_in_quadrature(c.contribution for c in components)


def expanded_uncertainty(combined: float, coverage_factor: float = 2.0) -> float:
    """U = k u_c (GUM 6.2.1); k = 2 gives about 95 % coverage for a normal distribution."""
    return coverage_factor * combined


def effective_degrees_of_freedom(components: Iterable[UncertaintyComponent]) -> float:
    """Welch-Satterthwaite nu_eff = u_c^4 / sum(u_i^4 / nu_i) (GUM G.4.1); inf when all are type B."""
    comps = list(components)
    uc = combined_standard_uncertainty(comps)
    denom = sum(c.contribution ** 4 / c.degrees_of_freedom for c in comps
                if math.isfinite(c.degrees_of_freedom) and c.degrees_of_freedom > 0)
    return math.inf if denom == 0 else uc ** 4 / denom
