"""Laney's p' chart: limits for proportions that allow for overdispersion between subgroups.

Used for the rate of aborted or invalid outcomes per unit against the fleet.
Source: Laney, D. B. (2002), "Improved control charts for attributes", Quality Engineering
14(4):531-537. Each subgroup's proportion becomes z_i = (p_i - p_bar) / sigma_pi with
sigma_pi = sqrt(p_bar (1 - p_bar) / n_i); sigma_z = mean moving range of z / 1.128; the limits are
p_bar +/- 3 sigma_pi sigma_z, clipped to [0, 1]. With sigma_z = 1 they are the ordinary p chart.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

D2_TWO = 1.128  # d2 for moving ranges of two (common practice; tabulated in Montgomery, Appendix VI)


@dataclass(frozen=True)
class LaneyPChart:
    """A p' chart over subgroups (here: units), in input order."""

    p_bar: float
    sigma_z: float
    proportions: tuple[float, ...]
    sigma_p: tuple[float, ...]
    z: tuple[float, ...]
    lcl: tuple[float, ...]
    ucl: tuple[float, ...]
    above: tuple[bool, ...]
    sigma_multiplier: float
    warnings: tuple[str, ...] = field(default_factory=tuple)


def laney_p_chart(defectives, sizes, sigma_multiplier: float = 3.0) -> LaneyPChart:
    """Laney p' limits for counts `defectives` out of `sizes` (one entry per subgroup).

    Source: Laney (2002), Quality Engineering 14(4):531-537.
    """
    x = np.asarray(defectives, dtype=float)
    n = np.asarray(sizes, dtype=float)
    warnings = []
    keep = n > 0
    if not keep.all():
        warnings.append("subgroups with no trials have no limits")
    total = n[keep].sum()
    p_bar = float(x[keep].sum() / total) if total > 0 else float("nan")
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.where(keep, x / n, np.nan)
        sigma_p = np.where(keep, np.sqrt(p_bar * (1 - p_bar) / n), np.nan)
        z = (p - p_bar) / sigma_p
    zk = z[np.isfinite(z)]
    if zk.size >= 2:
        sigma_z = float(np.mean(np.abs(np.diff(zk))) / D2_TWO)
    else:
        sigma_z = 1.0
        warnings.append("fewer than two subgroups with a finite z: sigma_z taken as 1 (plain p chart)")
    if p_bar in (0.0, 1.0):
        warnings.append("all or none defective: limits collapse on the centre")
    half = sigma_multiplier * sigma_p * (sigma_z if math.isfinite(sigma_z) else 1.0)
    lcl = np.clip(p_bar - half, 0.0, 1.0)
    ucl = np.clip(p_bar + half, 0.0, 1.0)
    above = np.where(np.isfinite(p), p > ucl, False)
    return LaneyPChart(p_bar=p_bar, sigma_z=sigma_z, proportions=tuple(map(float, p)),
                       sigma_p=tuple(map(float, sigma_p)), z=tuple(map(float, z)), lcl=tuple(map(float, lcl)),
                       ucl=tuple(map(float, ucl)), above=tuple(bool(a) for a in above),
                       sigma_multiplier=sigma_multiplier, warnings=tuple(warnings))
