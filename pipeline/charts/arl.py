"""Average run lengths of Shewhart, CUSUM and EWMA charts for standardised normal data.

All functions work in sigma units: the chart watches z = (x - center) / sigma, `shift`
is a step change of the mean in sigma units and `drift` a linear trend in sigma per check.
Zero-state run lengths (the chart starts fresh) are returned unless a headstart is given.

Methods:
- CUSUM: Markov chain of Brook & Evans (1972), Biometrika 59:539-549, with `n_states`
  states on [0, h]; the two sides combined by 1/ARL = 1/ARL+ + 1/ARL-
  (Lucas & Crosier 1982, Technometrics 24:199-205), which is exact for the zero-state chart.
  With a fast-initial-response headstart the sides interact, and the two-dimensional chain of
  Woodall (1984), Technometrics 26:41-46, is solved instead (sparse, Richardson-extrapolated).
  Siegmund's (1985) approximation as a check.
- EWMA: Nystrom solution of the integral equation with Gauss-Legendre nodes
  (Crowder 1987, Technometrics 29:401-407), and the Markov chain of Lucas & Saccucci
  (1990, Technometrics 32:1-12) as a second method.
- Linear drift: the same chains with a transition matrix that changes every check
  (Gan 1991, J. Statist. Comput. Simul. 38:181-200; Aerne, Champ & Rigdon 1991).

Discretisation: a Brook-Evans chain replaces the continuous CUSUM by m cells of width
w = 2h/(2m - 1); its error shrinks like 1/m^2 (about 0.05 % at m = 100 for h = 5). By default
chains of 100 and 200 cells are combined by Richardson extrapolation, which leaves an error
near 1e-5 (tests compare with an 800-cell chain).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import scipy.sparse as _sparse
import scipy.sparse.linalg as _sparse_linalg
from scipy.special import ndtr

CUSUM_STATES = 200
_RICHARDSON_STATES = (100, 200)
EWMA_NODES = 48
# A drift run length is summed until the chart has signalled with this probability ...
_SURVIVAL_TOL = 1e-12
# ... or for this many checks at most (a drift so slow it never signals is reported as inf).
_MAX_STEPS = 200_000


def _check_positive(**values: float) -> None:
    for name, value in values.items():
        if not (value > 0 and math.isfinite(value)):
            raise ValueError(f"{name} must be positive and finite, got {value!r}")


# ----------------------------------------------------------------------------- Shewhart


def shewhart_arl(L: float = 3.0, shift: float = 0.0) -> float:
    """ARL of an individuals chart with limits at +-L sigma for a step shift.

    Source: ARL = 1 / P(signal) for independent checks, P = 1 - Phi(L - d) + Phi(-L - d)
    (Montgomery, Introduction to Statistical Quality Control, section 6.3).
    """
    _check_positive(L=L)
    p = ndtr(-L - shift) + ndtr(-L + shift)
    return float(1.0 / p)


def shewhart_drift_arl(L: float, drift: float, shift: float = 0.0, *, first_check_shifted: bool = True) -> float:
    """ARL of an individuals chart under a linear drift of `drift` sigma per check.

    The mean at check t is shift + drift * t (or drift * (t - 1) when first_check_shifted is False).
    Source: Aerne, Champ & Rigdon (1991), Commun. Statist. Theory Methods 20:3341-3349.
    """
    _check_positive(L=L)
    t = np.arange(1, _MAX_STEPS + 1, dtype=float)
    mean = shift + drift * (t if first_check_shifted else t - 1.0)
    p = ndtr(-L - mean) + ndtr(-L + mean)
    survival = np.cumprod(1.0 - p)
    return float(1.0 + survival.sum())


# ----------------------------------------------------------------------------- CUSUM


@lru_cache(maxsize=16)
def _cusum_grid(h: float, n_states: int) -> tuple[np.ndarray, float, np.ndarray]:
    w = 2.0 * h / (2 * n_states - 1)
    centers = np.arange(n_states) * w
    diff = np.arange(n_states)[None, :] - np.arange(n_states)[:, None]  # j - i
    centers.flags.writeable = False  # cached: shared between calls, so never modified
    diff.flags.writeable = False
    return centers, w, diff


def _cusum_matrix(k: float, h: float, shift: float, n_states: int) -> np.ndarray:
    """One-sided upper CUSUM transition matrix among the in-control states (Brook & Evans)."""
    centers, w, diff = _cusum_grid(h, n_states)
    m = n_states
    # P(move by d cells) depends only on d = j - i: the matrix is Toeplitz.
    d = np.arange(-(m - 1), m)
    upper = ndtr(d * w + w / 2.0 + k - shift)
    lower = ndtr(d * w - w / 2.0 + k - shift)
    R = (upper - lower)[diff + (m - 1)]
    R[:, 0] = ndtr(w / 2.0 - centers + k - shift)  # reset to zero
    return R


def _start_state(headstart: float, h: float, n_states: int) -> int:
    if headstart < 0 or headstart >= h:
        raise ValueError(f"headstart must lie in [0, h), got {headstart!r} with h = {h!r}")
    _, w, _ = _cusum_grid(h, n_states)
    return int(round(headstart / w))


def _solve_diagonally_dominant(A: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve A x = b by Gaussian elimination without pivoting.

    I - R for a sub-stochastic R is diagonally dominant by rows, so elimination without pivoting
    is stable (growth factor at most 2; Wilkinson 1961). Written with numpy row operations because
    a threaded LAPACK solve of a few hundred unknowns can stall for 100 ms on a busy 2-core machine.
    """
    A = np.array(A, dtype=float)
    b = np.array(b, dtype=float)
    n = len(b)
    for i in range(n - 1):
        f = A[i + 1:, i] / A[i, i]
        A[i + 1:, i + 1:] -= f[:, None] * A[i, i + 1:][None, :]
        b[i + 1:] -= f * b[i]
    x = np.empty(n)
    for i in range(n - 1, -1, -1):
        x[i] = (b[i] - np.sum(A[i, i + 1:] * x[i + 1:])) / A[i, i]
    return x


def _cusum_one_sided_at(k: float, h: float, shift: float, headstart: float, m: int) -> float:
    R = _cusum_matrix(k, h, shift, m)
    arl = _solve_diagonally_dominant(np.eye(m) - R, np.ones(m))
    _, w, _ = _cusum_grid(h, m)
    # The headstart is interpolated between cell centres so its error is O(w^2), like the chain's.
    return float(np.interp(headstart, np.arange(m) * w, arl))


def cusum_one_sided_arl(k: float, h: float, shift: float = 0.0, headstart: float = 0.0,
                        *, n_states: int | None = None) -> float:
    """ARL of the upper one-sided tabular CUSUM S_t = max(0, S_{t-1} + z_t - k), signal at S_t > h.

    Parameters: k reference value, h decision interval, shift mean of z, headstart S_0 (FIR);
    n_states a fixed number of cells, or None (default) for chains of 100 and 200 cells combined by
    Richardson extrapolation (the chain's error falls like 1/m^2), accurate to about 1e-5.
    Returns: the ARL from S_0 = headstart.
    Source: Brook & Evans (1972) Markov chain.
    """
    _check_positive(h=h)
    _start_state(headstart, h, n_states or CUSUM_STATES)  # validates the headstart
    if n_states is not None:
        return _cusum_one_sided_at(k, h, shift, headstart, n_states)
    (m1, m2) = _RICHARDSON_STATES
    v1 = _cusum_one_sided_at(k, h, shift, headstart, m1)
    v2 = _cusum_one_sided_at(k, h, shift, headstart, m2)
    return v2 + (v2 - v1) * m1 * m1 / (m2 * m2 - m1 * m1)


def cusum_arl(k: float, h: float, shift: float = 0.0, headstart: float = 0.0,
              *, n_states: int | None = None) -> float:
    """ARL of the two-sided tabular CUSUM (both sides start at `headstart`).

    Parameters: k, h in sigma units; shift the step change in sigma; headstart the fast
    initial response value (Lucas & Crosier 1982), 0 for zero state.
    Returns: zero state: 1 / (1/ARL+ + 1/ARL-), the lower side evaluated as an upper CUSUM at
    -shift (exact for the zero-state chart; the two-dimensional chain agrees to 1e-12).
    With a headstart: the two-dimensional chain (Woodall 1984).
    Source: Brook & Evans (1972); Lucas & Crosier (1982); Woodall (1984).
    """
    if headstart > 0:
        _start_state(headstart, h, CUSUM_STATES)  # validates the headstart
        return cusum_two_dimensional_arl(float(k), float(h), float(shift), float(headstart))
    up = cusum_one_sided_arl(k, h, shift, headstart, n_states=n_states)
    if shift == 0:
        return up / 2.0  # the two sides are mirror images
    down = cusum_one_sided_arl(k, h, -shift, headstart, n_states=n_states)
    return float(1.0 / (1.0 / up + 1.0 / down))


def _cusum_2d_diagonal(k: float, h: float, shift: float, m: int) -> tuple[np.ndarray, float]:
    """ARL from the states (i w, i w) of the two-dimensional chain on (S+, S-), m cells per side."""
    w = 2.0 * h / (2 * m - 1)
    i = np.repeat(np.arange(m), m)
    j = np.tile(np.arange(m), m)
    a, b = i * w, j * w
    p = np.arange(m)
    # One observation x moves S+ up and S- down together; between consecutive breakpoints of x the
    # pair stays in one target cell, so each row is a handful of normal-probability intervals.
    cuts = np.sort(np.concatenate([(p[None, :] + 0.5) * w - a[:, None] + k,
                                   b[:, None] - k - (p[None, :] + 0.5) * w], axis=1), axis=1)
    lo = np.concatenate([np.full((m * m, 1), -np.inf), cuts], axis=1)
    hi = np.concatenate([cuts, np.full((m * m, 1), np.inf)], axis=1)
    mid = np.where(np.isinf(lo), hi - 1.0, np.where(np.isinf(hi), lo + 1.0, 0.5 * (lo + hi)))
    pu = np.clip(np.ceil(np.maximum(0.0, a[:, None] + mid - k) / w - 0.5), 0, None)
    pv = np.clip(np.ceil(np.maximum(0.0, b[:, None] - mid - k) / w - 0.5), 0, None)
    prob = ndtr(hi - shift) - ndtr(lo - shift)
    keep = (pu < m) & (pv < m) & (prob > 1e-15)
    rows = np.broadcast_to(np.arange(m * m)[:, None], prob.shape)[keep]
    R = _sparse.csc_matrix((prob[keep], (rows, (pu * m + pv)[keep].astype(np.int64))), shape=(m * m, m * m))
    arl = _sparse_linalg.spsolve(_sparse.identity(m * m, format="csc") - R, np.ones(m * m))
    return arl[np.arange(m) * (m + 1)], w


@lru_cache(maxsize=256)
def cusum_two_dimensional_arl(k: float, h: float, shift: float = 0.0, headstart: float = 0.0,
                              sizes: tuple[int, int] = (24, 48)) -> float:
    """ARL of the two-sided CUSUM by the two-dimensional Markov chain on (S+, S-).

    Solved at two grid sizes and Richardson-extrapolated (the chain's error falls like 1/m^2);
    the headstart is interpolated linearly between cells. Accurate to about 0.01 %.
    Source: Woodall (1984), "On the Markov chain approach to the two-sided CUSUM procedure",
    Technometrics 26:41-46; Brook & Evans (1972) discretisation.
    """
    values = []
    for m in sizes:
        diag, w = _cusum_2d_diagonal(k, h, shift, m)
        values.append(float(np.interp(headstart, np.arange(m) * w, diag)))
    (m1, m2), (v1, v2) = sizes, values
    return v2 + (v2 - v1) * m1 * m1 / (m2 * m2 - m1 * m1)


def siegmund_arl(k: float, h: float, shift: float = 0.0, *, sided: str = "two") -> float:
    """Siegmund's (1985) approximation of the CUSUM ARL.

    Source: ARL = [exp(-2 D b) + 2 D b - 1] / (2 D^2) with b = h + 1.166 and D = shift - k
    (ARL = b^2 when D = 0); two sides combined by 1/ARL = 1/ARL+ + 1/ARL-.
    Siegmund, Sequential Analysis (1985); Montgomery, section 9.1.
    """
    b = h + 1.166

    def one(delta: float) -> float:
        dd = delta - k
        if abs(dd) < 1e-12:
            return b * b
        return (math.exp(-2.0 * dd * b) + 2.0 * dd * b - 1.0) / (2.0 * dd * dd)

    if sided == "one":
        return one(shift)
    if sided != "two":
        raise ValueError(f"sided must be 'one' or 'two', got {sided!r}")
    return 1.0 / (1.0 / one(shift) + 1.0 / one(-shift))


def cusum_one_sided_survival(k: float, h: float, t_max: int, shift: float = 0.0, headstart: float = 0.0,
                             *, n_states: int = CUSUM_STATES) -> np.ndarray:
    """P(RL > t) for t = 1..t_max of the upper one-sided CUSUM (Brook & Evans chain)."""
    R = _cusum_matrix(k, h, shift, n_states)
    v = np.zeros(n_states)
    v[_start_state(headstart, h, n_states)] = 1.0
    out = np.empty(t_max)
    for t in range(t_max):
        v = v @ R
        out[t] = v.sum()
    return out


def cusum_survival(k: float, h: float, t_max: int, shift: float = 0.0, headstart: float = 0.0,
                   *, n_states: int = CUSUM_STATES) -> np.ndarray:
    """P(RL > t), t = 1..t_max, of the two-sided CUSUM, as the product of the sides' survivals.

    The product treats the sides as independent, which is the survival-function form of the
    Lucas & Crosier combination of ARLs; a test checks it against simulation.
    """
    up = cusum_one_sided_survival(k, h, t_max, shift, headstart, n_states=n_states)
    down = cusum_one_sided_survival(k, h, t_max, -shift, headstart, n_states=n_states)
    return up * down


def _sum_survival(step, v: np.ndarray) -> float:
    """1 + sum over t of P(RL > t), iterating a time-varying chain v <- v R_t."""
    total = 1.0
    for t in range(1, _MAX_STEPS + 1):
        v = step(t, v)
        s = v.sum()
        total += s
        if s < _SURVIVAL_TOL:
            return float(total)
    return math.inf


def cusum_drift_arl(k: float, h: float, drift: float, shift: float = 0.0, headstart: float = 0.0,
                    *, first_check_shifted: bool = True, n_states: int = 200) -> float:
    """ARL of the upper one-sided CUSUM when the mean drifts linearly.

    The mean at check t is shift + drift * t, or shift + drift * (t - 1) when
    first_check_shifted is False (Gan's convention). For an upward drift the upper side is the
    one that signals; a two-sided chart's drift ARL is within a fraction of a percent of this
    (the lower side's hazard under an upward drift is tiny), checked by simulation in the tests.
    Source: time-varying Brook & Evans chain (Gan 1992; Aerne, Champ & Rigdon 1991).
    """
    _check_positive(h=h)
    if drift < 0:
        return cusum_drift_arl(k, h, -drift, -shift, headstart, first_check_shifted=first_check_shifted,
                               n_states=n_states)
    offset = 0.0 if first_check_shifted else -1.0
    v = np.zeros(n_states)
    v[_start_state(headstart, h, n_states)] = 1.0
    return _sum_survival(lambda t, v: v @ _cusum_matrix(k, h, shift + drift * (t + offset), n_states), v)


# ----------------------------------------------------------------------------- EWMA


def ewma_limit(lam: float, L: float) -> float:
    """Half-width of the asymptotic EWMA limits, L sqrt(lam / (2 - lam)), in sigma units of z."""
    if not 0 < lam <= 1:
        raise ValueError(f"lambda must lie in (0, 1], got {lam!r}")
    _check_positive(L=L)
    return L * math.sqrt(lam / (2.0 - lam))


@lru_cache(maxsize=8)
def _gauss_legendre(n: int) -> tuple[np.ndarray, np.ndarray]:
    nodes, weights = np.polynomial.legendre.leggauss(n)
    nodes.flags.writeable = False  # cached: shared between calls
    weights.flags.writeable = False
    return nodes, weights


def _ewma_nodes(lam: float, L: float, n_nodes: int) -> tuple[np.ndarray, np.ndarray, float]:
    H = ewma_limit(lam, L)
    x, w = _gauss_legendre(n_nodes)
    return H * x, H * w, H


def _ewma_kernel(lam: float, nodes: np.ndarray, weights: np.ndarray, shift: float, start: np.ndarray) -> np.ndarray:
    """K[i, j] = w_j f(y_j | start_i): density of the next EWMA value y given the current one."""
    arg = (nodes[None, :] - (1.0 - lam) * start[:, None]) / lam - shift
    return weights[None, :] * np.exp(-0.5 * arg * arg) / (lam * math.sqrt(2.0 * math.pi))


def ewma_arl(lam: float, L: float, shift: float = 0.0, *, start: float = 0.0, method: str = "integral",
             n_nodes: int = EWMA_NODES) -> float:
    """ARL of the two-sided EWMA z_t = lam x_t + (1 - lam) z_{t-1} with fixed limits +-L sqrt(lam/(2-lam)).

    Parameters: lam smoothing constant in (0, 1]; L limit multiple; shift step change in sigma;
    start z_0 in sigma units; method "integral" (Crowder 1987, Gauss-Legendre Nystrom with
    n_nodes nodes) or "markov" (Lucas & Saccucci 1990, 2 n_nodes + 1 states).
    Returns: the zero-state ARL.
    """
    if method == "markov":
        return _ewma_markov_arl(lam, L, shift, start, n_nodes)
    if method != "integral":
        raise ValueError(f"method must be 'integral' or 'markov', got {method!r}")
    nodes, weights, H = _ewma_nodes(lam, L, n_nodes)
    if abs(start) >= H:
        raise ValueError(f"start must lie inside the limits +-{H:.4g}, got {start!r}")
    K = _ewma_kernel(lam, nodes, weights, shift, nodes)
    a = np.linalg.solve(np.eye(n_nodes) - K, np.ones(n_nodes))
    k0 = _ewma_kernel(lam, nodes, weights, shift, np.array([start]))[0]
    return float(1.0 + k0 @ a)


def _ewma_markov_matrix(lam: float, L: float, shift: float, m: int) -> tuple[np.ndarray, np.ndarray]:
    H = ewma_limit(lam, L)
    w = 2.0 * H / m
    centers = -H + (np.arange(m) + 0.5) * w
    base = (1.0 - lam) * centers[:, None]
    R = ndtr((centers[None, :] + w / 2.0 - base) / lam - shift) - ndtr((centers[None, :] - w / 2.0 - base) / lam - shift)
    return R, centers


def _ewma_markov_arl(lam: float, L: float, shift: float, start: float, n_nodes: int) -> float:
    m = 2 * n_nodes + 1
    R, centers = _ewma_markov_matrix(lam, L, shift, m)
    arl = np.linalg.solve(np.eye(m) - R, np.ones(m))
    return float(arl[int(np.argmin(np.abs(centers - start)))])


def ewma_survival(lam: float, L: float, t_max: int, shift: float = 0.0, *, n_nodes: int = EWMA_NODES) -> np.ndarray:
    """P(RL > t), t = 1..t_max, of the zero-state two-sided EWMA (Nystrom, Crowder 1987)."""
    nodes, weights, _ = _ewma_nodes(lam, L, n_nodes)
    K = _ewma_kernel(lam, nodes, weights, shift, nodes)
    v = _ewma_kernel(lam, nodes, weights, shift, np.array([0.0]))[0]
    out = np.empty(t_max)
    for t in range(t_max):
        out[t] = v.sum()
        v = v @ K
    return np.minimum(out, 1.0)


def ewma_drift_arl(lam: float, L: float, drift: float, shift: float = 0.0, *, first_check_shifted: bool = True,
                   n_nodes: int = EWMA_NODES) -> float:
    """ARL of the two-sided EWMA (fixed limits) when the mean drifts by `drift` sigma per check.

    The mean at check t is shift + drift * t, or shift + drift * (t - 1) when
    first_check_shifted is False (Gan's convention).
    Source: Nystrom form of the time-varying chain of Gan (1991), J. Statist. Comput. Simul. 38:181-200.
    """
    nodes, weights, _ = _ewma_nodes(lam, L, n_nodes)
    offset = 0.0 if first_check_shifted else -1.0
    # The kernel depends on the mean only through a shift of its argument; precompute the part
    # that does not change. P(RL > t) = v_t . 1 with v_1 = K_1(0, .) and v_{t+1} = v_t K_{t+1}.
    base = (nodes[None, :] - (1.0 - lam) * nodes[:, None]) / lam
    scale = weights[None, :] / (lam * math.sqrt(2.0 * math.pi))
    v0 = _ewma_kernel(lam, nodes, weights, shift + drift * (1.0 + offset), np.array([0.0]))[0]
    total = 1.0 + v0.sum()
    v = v0
    for t in range(2, _MAX_STEPS + 1):
        arg = base - (shift + drift * (t + offset))
        v = v @ (scale * np.exp(-0.5 * arg * arg))
        s = v.sum()
        total += s
        if s < _SURVIVAL_TOL:
            return float(total)
    return math.inf
