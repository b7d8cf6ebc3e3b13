"""Profiled REML for a linear mixed model fitted from sufficient statistics per cell.

Model, for check j of unit-period i (one "subject"):

    y_ij = beta_lot(ij) + beta_t t_ij + beta_d d_ij + b0_i + b1_i t_ij + e_ij,
    (b0_i, b1_i) ~ N(0, sigma^2 Gamma),   e_ij ~ N(0, sigma^2 r_g(ij)),  r_0 = 1,

with lots as fixed effects (no intercept: the lot dummies sum to one), a random intercept
and slope per subject, and a residual variance per group g (technology x level).

Every quantity REML needs is a sum over checks, so the data enter only through the
sufficient statistics of each cell (subject, lot, group): n and the sums of t, t^2, d, d^2,
t d, y, t y, d y, y^2. Each subject's 2x2 random block is integrated out with the Woodbury
identity, V_i^{-1} = W - W Z (Gamma^{-1} + Z'WZ)^{-1} Z'W, written as
M_i = Gamma (I + A_i Gamma)^{-1} so that a singular Gamma (a boundary fit) stays defined,
and log|V_i| = log|I + A_i Gamma| - sum log w. sigma^2 and beta are profiled out, so one
evaluation of the restricted likelihood costs O(cells + lot pairs within subjects).

Source: Harville (1977) JASA 72:320-340 (REML); Lindstrom & Bates (1988) JASA 83:1014-1022
(profiled likelihood); Henderson (1975) for BLUPs; Bates et al. (2015) J. Stat. Softw. 67(1)
(the Cholesky parametrisation that admits boundary fits).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, sparse

STAT_COLUMNS = ("n", "st", "stt", "sd", "sdd", "std", "sy", "sty", "sdy", "syy")
_LOG2PI = np.log(2.0 * np.pi)


@dataclass(frozen=True)
class RemlFit:
    """Result of a REML fit. Variances are absolute (sigma^2 already multiplied in)."""

    fixed_names: tuple[str, ...]
    fixed: np.ndarray            # beta
    fixed_cov: np.ndarray        # GLS covariance of beta at the REML variances
    cov_re: np.ndarray           # 2x2 covariance of (intercept, slope) random effects
    residual_var: np.ndarray     # per group
    blup: np.ndarray             # subjects x 2 (intercept, slope)
    blup_cov: np.ndarray         # subjects x 2 x 2 conditional covariance (given beta)
    neg2_reml: float
    converged: bool
    boundary: bool
    n_obs: int
    n_subjects: int
    iterations: int
    warnings: tuple[str, ...] = field(default_factory=tuple)
    theta: np.ndarray = field(default_factory=lambda: np.zeros(0))


class _Problem:
    """Precomputed index structure of one data set; evaluates -2 log restricted likelihood."""

    def __init__(self, cells: pd.DataFrame, n_lots: int, n_subjects: int, n_groups: int,
                 fixed_t: bool, fixed_d: bool, random_slope: bool):
        self.n_lots, self.n_subjects, self.n_groups = n_lots, n_subjects, n_groups
        self.random_slope = random_slope
        self.subject = cells["subject"].to_numpy(np.int64)
        self.lot = cells["lot"].to_numpy(np.int64)
        self.group = cells["group"].to_numpy(np.int64)
        self.s = {c: cells[c].to_numpy(np.float64) for c in STAT_COLUMNS}
        self.n_obs = int(self.s["n"].sum())
        self.col_t = n_lots if fixed_t else -1
        self.col_d = n_lots + int(fixed_t) if fixed_d else -1
        self.p = n_lots + int(fixed_t) + int(fixed_d)
        self.n_per_group = np.bincount(self.group, weights=self.s["n"], minlength=n_groups)
        # Entries: one per (subject, fixed column) with a nonzero B_i row.
        key = self.subject * (n_lots + 2) + self.lot
        uniq, self.entry_of_cell = np.unique(key, return_inverse=True)
        n_lot_entries = len(uniq)
        ent_subject = [uniq // (n_lots + 2)]
        ent_col = [uniq % (n_lots + 2)]
        subjects = np.arange(n_subjects)
        if fixed_t:
            ent_subject.append(subjects)
            ent_col.append(np.full(n_subjects, self.col_t))
        if fixed_d:
            ent_subject.append(subjects)
            ent_col.append(np.full(n_subjects, self.col_d))
        self.ent_subject = np.concatenate(ent_subject)
        self.ent_col = np.concatenate(ent_col)
        self.n_lot_entries = n_lot_entries
        # F = B R (R R' = M_i per subject) has a fixed sparsity pattern: (column, 2 subject + k).
        ne = len(self.ent_subject)
        rows = np.repeat(self.ent_col, 2)
        cols = (2 * np.repeat(self.ent_subject, 2) + np.tile([0, 1], ne))
        pattern = sparse.csr_matrix((np.arange(1, 2 * ne + 1, dtype=float), (rows, cols)),
                                    shape=(self.p, 2 * n_subjects))
        self.f_order = pattern.data.astype(np.int64) - 1       # csr slot -> flat (entry, k)
        self.f_pattern = pattern
        self._precompute()

    def _by_group(self, index: np.ndarray, size: int, stats: tuple[str, ...]) -> dict[str, np.ndarray]:
        """Sums of each statistic by (group, index), so a change of group weights is one small product."""
        flat = self.group * size + index
        G = self.n_groups
        return {k: np.bincount(flat, self.s[k], G * size).reshape(G, size) for k in stats}

    def _precompute(self) -> None:
        N, K = self.n_subjects, self.n_lots
        self.g_subject = self._by_group(self.subject, N, ("n", "st", "stt", "sy", "sty", "sd", "std"))
        self.g_entry = self._by_group(self.entry_of_cell, self.n_lot_entries, ("n", "st"))
        self.g_lot = self._by_group(self.lot, K, ("n", "st", "sd", "sy"))
        self.g_total = {k: np.bincount(self.group, self.s[k], self.n_groups)
                        for k in ("stt", "std", "sdd", "sty", "sdy", "syy")}

    def _weighted(self, log_r: np.ndarray):
        w = np.exp(-log_r)
        N, K = self.n_subjects, self.n_lots
        gs = {k: w @ v for k, v in self.g_subject.items()}
        tot = {k: float(w @ v) for k, v in self.g_total.items()}
        a11, a12, a22 = gs["n"], gs["st"], gs["stt"]
        u = np.stack([gs["sy"], gs["sty"]], axis=1)
        ne = len(self.ent_subject)
        b = np.zeros((ne, 2))
        nl = self.n_lot_entries
        b[:nl, 0] = w @ self.g_entry["n"]
        b[:nl, 1] = w @ self.g_entry["st"]
        off = nl
        if self.col_t >= 0:
            b[off:off + N, 0] = a12
            b[off:off + N, 1] = a22
            off += N
        if self.col_d >= 0:
            b[off:off + N, 0] = gs["sd"]
            b[off:off + N, 1] = gs["std"]
        gl = {k: w @ v for k, v in self.g_lot.items()}
        p = self.p
        C = np.zeros((p, p))
        v = np.zeros(p)
        C[np.arange(K), np.arange(K)] = gl["n"]
        v[:K] = gl["sy"]
        ct, cd = self.col_t, self.col_d
        if ct >= 0:
            C[:K, ct] = C[ct, :K] = gl["st"]
            v[ct] = tot["sty"]
            C[ct, ct] = tot["stt"]
        if cd >= 0:
            C[:K, cd] = C[cd, :K] = gl["sd"]
            v[cd] = tot["sdy"]
            C[cd, cd] = tot["sdd"]
        if ct >= 0 and cd >= 0:
            C[ct, cd] = C[cd, ct] = tot["std"]
        ywy = tot["syy"]
        A = np.empty((N, 2, 2))
        A[:, 0, 0], A[:, 0, 1], A[:, 1, 0], A[:, 1, 1] = a11, a12, a12, a22
        return A, u, b, C, v, ywy

    def gamma(self, theta: np.ndarray) -> np.ndarray:
        l11, l21, l22 = theta[:3] if self.random_slope else (theta[0], 0.0, 0.0)
        L = np.array([[l11, 0.0], [l21, l22]])
        return L @ L.T

    def log_r(self, theta: np.ndarray) -> np.ndarray:
        k = 3 if self.random_slope else 1
        return np.concatenate([[0.0], theta[k:]])

    def solve(self, theta: np.ndarray) -> dict:
        G = self.gamma(theta)
        log_r = self.log_r(theta)
        A, u, b, C, v, ywy = self._weighted(log_r)
        D = np.eye(2)[None] + A @ G                            # I + A_i Gamma
        det = D[:, 0, 0] * D[:, 1, 1] - D[:, 0, 1] * D[:, 1, 0]
        Dinv = np.empty_like(D)
        Dinv[:, 0, 0], Dinv[:, 1, 1] = D[:, 1, 1] / det, D[:, 0, 0] / det
        Dinv[:, 0, 1], Dinv[:, 1, 0] = -D[:, 0, 1] / det, -D[:, 1, 0] / det
        M = np.einsum("ij,njk->nik", G, Dinv)
        M = 0.5 * (M + M.transpose(0, 2, 1))
        # Sum_i B_i M_i B_i' = F F' with F = B R, R R' = M_i (2x2 Cholesky of a PSD matrix).
        r11 = np.sqrt(np.maximum(M[:, 0, 0], 0.0))
        r21 = np.divide(M[:, 1, 0], r11, out=np.zeros_like(r11), where=r11 > 0)
        r22 = np.sqrt(np.maximum(M[:, 1, 1] - r21 * r21, 0.0))
        s_e = self.ent_subject
        fvals = np.empty((len(s_e), 2))
        fvals[:, 0] = b[:, 0] * r11[s_e] + b[:, 1] * r21[s_e]
        fvals[:, 1] = b[:, 1] * r22[s_e]
        F = self.f_pattern.copy()
        F.data = fvals.ravel()[self.f_order]
        BMB = (F @ F.T).toarray()
        Mu = np.einsum("nij,nj->ni", M, u)
        bmu = np.bincount(self.ent_col, np.einsum("ei,ei->e", b, Mu[self.ent_subject]), self.p)
        umu = float(np.einsum("ni,ni->", u, Mu))
        XtVX = C - BMB
        XtVX = 0.5 * (XtVX + XtVX.T)
        XtVy = v - bmu
        return dict(G=G, log_r=log_r, A=A, u=u, b=b, M=M, det=det, XtVX=XtVX, XtVy=XtVy, ytVy=ywy - umu)

    def objective(self, theta: np.ndarray) -> float:
        try:
            r = self.solve(theta)
            if np.any(r["det"] <= 0):
                return np.inf
            chol = np.linalg.cholesky(r["XtVX"])
        except (np.linalg.LinAlgError, FloatingPointError):
            return np.inf
        z = np.linalg.solve(chol, r["XtVy"])
        rss = r["ytVy"] - float(z @ z)
        dof = self.n_obs - self.p
        if not rss > 0:
            return np.inf
        logdet_v = np.log(r["det"]).sum() + float(self.n_per_group @ r["log_r"])
        return float(dof * np.log(rss / dof) + logdet_v + 2.0 * np.log(np.diag(chol)).sum()
                     + dof * (1.0 + _LOG2PI))


def start_values(cells: pd.DataFrame, n_groups: int, random_slope: bool) -> np.ndarray:
    """Method-of-moments start: within-cell variance per group, between-cell spread for Gamma."""
    n = cells["n"].to_numpy(float)
    mean = cells["sy"].to_numpy(float) / n
    within = cells["syy"].to_numpy(float) - n * mean**2
    df = np.maximum(n - 1, 0)
    g = cells["group"].to_numpy()
    pooled = np.bincount(g, within, n_groups) / np.maximum(np.bincount(g, df, n_groups), 1)
    pooled = np.where(pooled > 0, pooled, np.nanmax([pooled.max(), 1e-12]))
    between = np.var(mean) if len(mean) > 1 else pooled[0]
    ratio = max(between / pooled[0], 0.05)
    head = [np.sqrt(ratio), 0.0, 0.1 * np.sqrt(ratio)] if random_slope else [np.sqrt(ratio)]
    return np.concatenate([head, np.log(pooled[1:] / pooled[0])])


def fit_reml(cells: pd.DataFrame, *, n_lots: int, n_subjects: int, n_groups: int = 1,
             fixed_t: bool = True, fixed_d: bool = True, random_slope: bool = True,
             lot_names: tuple[str, ...] | None = None, maxiter: int = 500,
             theta0: np.ndarray | None = None) -> RemlFit:
    """Fit the model by profiled REML from cell statistics.

    Parameters:
        cells: one row per (subject, lot, group) with integer columns subject, lot, group
            (0-based) and the sums in STAT_COLUMNS.
        n_lots, n_subjects, n_groups: sizes of the index ranges.
        fixed_t, fixed_d: include the fixed mean slope in t and the depletion slope in d.
        random_slope: a random slope in t per subject (else a random intercept only).
        theta0: a start (e.g. the previous fit's theta); moment estimates when None or the wrong length.
    Returns:
        RemlFit with beta, its covariance, variance components, BLUPs and convergence flags.
    Source: see the module docstring.
    """
    prob = _Problem(cells, n_lots, n_subjects, n_groups, fixed_t, fixed_d, random_slope)
    start = start_values(cells, n_groups, random_slope)
    if theta0 is None or len(theta0) != len(start) or not np.all(np.isfinite(theta0)) \
            or not np.isfinite(prob.objective(np.asarray(theta0, float))):
        theta0 = start
    theta0 = np.asarray(theta0, float)
    caught: list[str] = []
    with warnings.catch_warnings(record=True) as wlist, np.errstate(all="ignore"):
        warnings.simplefilter("always")
        res = optimize.minimize(prob.objective, theta0, method="L-BFGS-B",
                                options={"maxiter": maxiter, "ftol": 1e-12, "gtol": 1e-7})
        res_x, res_fun = res.x, res.fun
        polished = False
        if not res.success:
            # A derivative-free retry when the quasi-Newton step stalled (often near a boundary).
            res2 = optimize.minimize(prob.objective, res.x, method="Nelder-Mead",
                                     options={"xatol": 1e-7, "fatol": 1e-10, "maxiter": 400 * len(theta0)})
            polished = bool(res2.success)
            if res2.fun <= res.fun:
                res_x, res_fun = res2.x, res2.fun
        caught.extend(str(w.message) for w in wlist)
    converged = bool(np.isfinite(res_fun) and (res.success or polished))
    if not res.success:
        caught.append(f"L-BFGS-B: {res.message}" + ("; Nelder-Mead retry converged" if polished else ""))
    theta = res_x
    r = prob.solve(theta)
    cov_unscaled = np.linalg.inv(r["XtVX"])
    beta = cov_unscaled @ r["XtVy"]
    dof = prob.n_obs - prob.p
    sigma2 = (r["ytVy"] - beta @ r["XtVy"]) / dof
    # BLUP: b_i = M_i (u_i - B_i' beta); conditional covariance sigma^2 M_i (given beta).
    bb = np.zeros((prob.n_subjects, 2))
    contrib = r["b"] * beta[prob.ent_col][:, None]
    bb[:, 0] = np.bincount(prob.ent_subject, contrib[:, 0], prob.n_subjects)
    bb[:, 1] = np.bincount(prob.ent_subject, contrib[:, 1], prob.n_subjects)
    blup = np.einsum("nij,nj->ni", r["M"], r["u"] - bb)
    G = r["G"] * sigma2
    resid = sigma2 * np.exp(r["log_r"])
    boundary = bool(G[0, 0] < 1e-6 * resid[0] or (random_slope and
                    np.linalg.det(G) < 1e-8 * max(G[0, 0] * G[1, 1], 1e-300)))
    if boundary:
        caught.append("boundary fit: a random-effect variance (or the intercept-slope correlation) is at its limit")
    names = list(lot_names) if lot_names is not None else [f"lot{k}" for k in range(n_lots)]
    if fixed_t:
        names.append("t")
    if fixed_d:
        names.append("d")
    return RemlFit(fixed_names=tuple(names), fixed=beta, fixed_cov=sigma2 * cov_unscaled, cov_re=G,
                   residual_var=resid, blup=blup, blup_cov=sigma2 * r["M"], neg2_reml=float(res_fun),
                   converged=converged, boundary=boundary, n_obs=prob.n_obs, n_subjects=prob.n_subjects,
                   iterations=int(res.nit), warnings=tuple(dict.fromkeys(caught)), theta=theta)


def cells_from_frame(df: pd.DataFrame, *, y: str, subject: str, lot: str | None = None,
                     t: str | None = None, d: str | None = None, group: str | None = None):
    """Aggregate a long frame into cell statistics; returns (cells, subject labels, lot labels, group labels)."""
    frame = pd.DataFrame({
        "subject_key": df[subject].to_numpy(),
        "lot_key": df[lot].to_numpy() if lot else np.zeros(len(df), int),
        "group_key": df[group].to_numpy() if group else np.zeros(len(df), int),
        "t": df[t].to_numpy(float) if t else np.zeros(len(df)),
        "d": df[d].to_numpy(float) if d else np.zeros(len(df)),
        "y": df[y].to_numpy(float),
    })
    frame["subject"], subjects = pd.factorize(frame["subject_key"], sort=True)
    frame["lot"], lots = pd.factorize(frame["lot_key"], sort=True)
    frame["group"], groups = pd.factorize(frame["group_key"], sort=True)
    tt, dd, yy = frame["t"], frame["d"], frame["y"]
    frame = frame.assign(n=1.0, st=tt, stt=tt * tt, sd=dd, sdd=dd * dd, std=tt * dd, sy=yy,
                         sty=tt * yy, sdy=dd * yy, syy=yy * yy)
    cells = frame.groupby(["subject", "lot", "group"], as_index=False)[list(STAT_COLUMNS)].sum()
    return cells, subjects, lots, groups
