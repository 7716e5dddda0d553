"""Constrained two-range seven-coefficient fits of a ThermoTable, and their quality.

The fit (one species, ranges [Tlow, Tmid] and [Tmid, Thigh]):

* Cp/R is a quartic in T in each range;
* Cp/R and d(Cp/R)/dT are continuous at Tmid (optionally d²(Cp/R)/dT² too);
* the low range's a6, a7 give H°(298.15 K) = ΔfH°298 and S°(298.15 K) = S°298
  exactly; the high range's a6, a7 make H° and S° continuous at Tmid;
* the objective is the **maximum relative Cp error** over the grid (minimax),
  not a least-squares sum.

Parametrisation.  With x = T/1000 K (the scaled temperature every solve uses)
and u = (2x − x_low − x_high)/(x_high − x_low) ∈ [−1, 1],

    Cp/R (low)  = Σ_{j=0..4} c_j T_j(u)
    Cp/R (high) = Σ_{j=0..4} c_j T_j(u) + Σ_k d_k v^k,   v = (x − x_mid)/h,

with T_j the Chebyshev polynomials, h = (x_high − x_low)/2 and k = 2, 3, 4
(k = 3, 4 with the second-derivative option).  The difference of the two
quartics has a double (triple) root at Tmid, so the continuity conditions hold
for every parameter vector and the minimax problem has no constraints left:
8 (7) free parameters.  The Chebyshev/shifted basis keeps the design matrix
well conditioned (its condition number is reported); the monomial coefficients
in x are obtained exactly by polynomial composition and divided by 1000^k.

Minimax.  Relative error r_i = (B c)_i / y_i − 1 with y = Cp/R of the table.
Lawson's algorithm (iteratively reweighted least squares, weights
w_i ← w_i |r_i| / Σ w|r|) converges to the minimax solution.  At every step the
weighted normal equations make λ = W r / ‖W r‖₁ a feasible point of the dual
linear programme (Aᵀλ = 0, ‖λ‖₁ = 1), so

    L = Σ w_i r_i² / Σ w_i |r_i|  ≤  min_c max_i |r_i|  ≤  max_i |r_i|,

a *certified* lower bound on the minimax limit that costs nothing.  Iteration
stops when max|r| ≤ (1 + tol) L, so every fit carries a proof that its error
is within that factor of the mathematical limit.  The limit itself can also be
computed exactly as a linear programme (:func:`minimax_limit`, HiGHS).
Many species and many Tmid candidates are solved at once: the design matrix
does not depend on the species (only the row scaling 1/y does), so the normal
matrices of all species are one matrix product with the stacked outer products
of the design rows.

Tmid search (``tmid="auto"``): candidates every 100 K from 800 K to 2000 K
fitted on a 50 K subset of the grid, then every 10 K within ±90 K of the best
coarse candidate, and the best of these is fitted on the full grid.  The
chosen Tmid is therefore a multiple of 10 K in [800, 2000] K.

References
----------
C. L. Lawson, *Contributions to the theory of linear least maximum
approximation*, PhD thesis, UCLA (1961).  J. R. Rice and K. H. Usow, "The
Lawson algorithm and extensions", Math. Comp. 22, 118–127 (1968).
E. W. Cheney, *Introduction to Approximation Theory* (McGraw-Hill, 1966),
ch. 2 (linear Chebyshev approximation and its dual).
B. J. McBride, S. Gordon and M. A. Reno, NASA TM-4513 (1993) (the polynomial form).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import Chebyshev, Polynomial
from scipy import constants as C

from pipeline import nasa7
from pipeline.nasa7 import Nasa7Fit
from pipeline.thermo import T_REF

#: automatic Tmid search: range [K], coarse step [K], fine step [K], fine half-width [K]
TMID_SEARCH = (800.0, 2000.0)
TMID_COARSE_STEP = 100.0
TMID_FINE_STEP = 10.0
TMID_FINE_HALF_WIDTH = 90.0
#: spacing [K] of the grid subset used while searching Tmid
SEARCH_SPACING = 50.0
#: Lawson stopping rule: max error ≤ (1 + tol) × certified lower bound, or the iteration cap
FINAL_TOL, FINAL_ITERATIONS = 0.01, 200
SEARCH_TOL, SEARCH_ITERATIONS = 0.03, 40
#: margin above the classical high-temperature Cp limit before warning (the fit's own error)
CLASSICAL_MARGIN = 0.01
#: a design-matrix condition number above this is reported as a warning
CONDITION_WARNING = 1e8
#: spacing [K] of the dense grid on which the fitted Cp is checked (sign, classical limit)
CHECK_SPACING = 2.0

_X = 1000.0  # the temperature scale [K] of every solve


# --------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class PropertyError:
    """Largest errors of one dimensionless property over the fit grid.

    ``max_rel`` is |fit − table| / |table| for Cp/R and |fit − table| /
    max(|table|, 1) for H/RT, S/R, G/RT (those cross zero; the same
    normalisation solvers use for continuity); ``max_abs`` is |fit − table|
    in the property's own dimensionless units.  ``t_rel``/``t_abs`` [K] are
    where each occurs.
    """

    max_rel: float
    t_rel: float
    max_abs: float
    t_abs: float


@dataclass(frozen=True)
class FitQuality:
    """Fit metrics of one species (see :func:`fit_table`)."""

    tmid: float  # [K], the Tmid used
    tmid_auto: bool  # chosen by the search (True) or given (False)
    cp_r: PropertyError
    h_rt: PropertyError
    s_r: PropertyError
    g_rt: PropertyError
    minimax_bound: float  # certified lower bound on the minimax relative Cp error (Lawson dual)
    minimax_limit: float | None  # the exact limit (linear programme), when computed
    continuity_cp_r: float  # relative jumps at Tmid, Nasa7Fit.continuity()
    continuity_h_rt: float
    continuity_s_r: float
    condition: float  # condition number of the scaled, 1/Cp-weighted design matrix
    evaluation_condition: float  # max over the grid of Σ|a_k T^k| / |Cp/R|
    iterations: int  # Lawson iterations of the final fit
    points: int  # grid points fitted
    second_derivative: bool
    cp_warning: float
    warnings: tuple[str, ...] = ()

    @property
    def max_cp_error(self) -> float:
        """Max relative Cp error over the grid."""
        return self.cp_r.max_rel

    @property
    def limit_ratio(self) -> float:
        """Achieved max Cp error / minimax limit (the certified bound if the LP was not run)."""
        ref = self.minimax_limit if self.minimax_limit is not None else self.minimax_bound
        return self.cp_r.max_rel / ref if ref > 0 else (1.0 if self.cp_r.max_rel == 0 else math.inf)

    def as_dict(self) -> dict:
        """Plain floats, strings, bools and lists (for YAML/JSON writers)."""
        d = dataclasses.asdict(self)
        d["warnings"] = list(self.warnings)
        d["limit_ratio"] = float(self.limit_ratio)
        return _plain(d)


def _plain(v):
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v)
    return v


# --------------------------------------------------------------------------
# The design (species-independent)
# --------------------------------------------------------------------------


def _design(T, tlow, tmid, thigh, second_derivative):
    """Design matrix B (n, p) on the grid T [K] and the maps to x-monomial coefficients.

    Returns ``B, Lc, Hc`` with Cp/R on the grid = B @ θ, and the coefficients
    of Cp/R as a polynomial in x = T/1000 (powers 0…4) equal to Lc @ θ (low
    range) and Hc @ θ (high range).
    """
    x = np.asarray(T, dtype=float) / _X
    xl, xm, xh = tlow / _X, tmid / _X, thigh / _X
    u = (2 * x - xl - xh) / (xh - xl)
    h = (xh - xl) / 2
    v = (x - xm) / h
    ks = (3, 4) if second_derivative else (2, 3, 4)
    B = np.hstack([np.polynomial.chebyshev.chebvander(u, 4),
                   np.where(x[:, None] > xm, v[:, None] ** np.array(ks, dtype=float), 0.0)])
    p = B.shape[1]
    Lc = np.zeros((5, p))
    Hc = np.zeros((5, p))
    for j in range(5):
        coef = Chebyshev.basis(j, domain=[xl, xh]).convert(kind=Polynomial).coef
        Lc[: coef.size, j] = coef
        Hc[: coef.size, j] = coef
    vpoly = Polynomial([-xm / h, 1.0 / h])
    for i, k in enumerate(ks):
        coef = (vpoly**k).coef
        Hc[: coef.size, 5 + i] = coef
    # orthonormalise the columns on the grid (B = Q R): the solves see Q √n, whose
    # condition number is 1; the maps to coefficients absorb R⁻¹.
    Q, R = np.linalg.qr(B)
    Rinv = np.linalg.solve(R, np.eye(p)) * math.sqrt(B.shape[0])
    return Q * math.sqrt(B.shape[0]), Lc @ Rinv, Hc @ Rinv


# --------------------------------------------------------------------------
# Batched Lawson iteration
# --------------------------------------------------------------------------


def _spd_solve(G, b):
    """Solve G z = b for stacks of small symmetric positive definite G (Cholesky, vectorised)."""
    p = G.shape[-1]
    L = np.zeros_like(G)
    scale = np.einsum("...ii->...i", G).max(axis=-1)
    tiny = 1e-15 * scale
    for j in range(p):
        d = G[..., j, j] - np.einsum("...k,...k->...", L[..., j, :j], L[..., j, :j])
        L[..., j, j] = np.sqrt(np.maximum(d, tiny))
        if j + 1 < p:
            s = G[..., j + 1 :, j] - np.einsum("...ik,...k->...i", L[..., j + 1 :, :j], L[..., j, :j])
            L[..., j + 1 :, j] = s / L[..., j, j, None]
    z = np.empty_like(b)
    for j in range(p):  # L y = b
        z[..., j] = (b[..., j] - np.einsum("...k,...k->...", L[..., j, :j], z[..., :j])) / L[..., j, j]
    for j in range(p - 1, -1, -1):  # Lᵀ z = y
        z[..., j] = (z[..., j] - np.einsum("...k,...k->...", L[..., j + 1 :, j], z[..., j + 1 :])) / L[..., j, j]
    return z


@dataclass
class _Lawson:
    theta: np.ndarray  # (..., p) best parameters
    error: np.ndarray  # (...,) max relative error of theta
    bound: np.ndarray  # (...,) certified lower bound on the minimax error
    iterations: int


def _lawson(B, y, tol, max_iter):
    """Minimax relative fit of y (S, n) by B (M, n, p) for every (candidate, species) pair.

    Returns :class:`_Lawson` with arrays of shape (M, S, p) / (M, S).
    """
    M, n, p = B.shape
    S = y.shape[0]
    iu = np.triu_indices(p)
    P = (B[:, :, :, None] * B[:, :, None, :])[:, :, iu[0], iu[1]]  # (M, n, p(p+1)/2)
    inv = 1.0 / y
    inv2 = inv * inv
    w = np.full((M, S, n), 1.0 / n)
    best_theta = np.zeros((M, S, p))
    best_err = np.full((M, S), np.inf)
    best_bound = np.zeros((M, S))
    active = np.ones((M, S), dtype=bool)
    it = 0
    for it in range(1, max_iter + 1):
        G_u = np.matmul(w * inv2, P)  # (M, S, q)
        G = np.empty((M, S, p, p))
        G[:, :, iu[0], iu[1]] = G_u
        G[:, :, iu[1], iu[0]] = G_u
        rhs = np.matmul(w * inv, B)  # (M, S, p)
        theta = _spd_solve(G, rhs)
        r = np.matmul(theta, B.transpose(0, 2, 1)) * inv - 1.0  # (M, S, n)
        a = np.abs(r)
        err = a.max(axis=-1)
        wa = w * a
        swa = wa.sum(axis=-1)
        bound = np.where(swa > 0, (wa * a).sum(axis=-1) / np.where(swa > 0, swa, 1.0), 0.0)
        upd = active & (err < best_err)
        best_err = np.where(upd, err, best_err)
        best_theta = np.where(upd[..., None], theta, best_theta)
        best_bound = np.where(active, np.maximum(best_bound, bound), best_bound)
        active = active & (best_err > (1.0 + tol) * best_bound) & (best_err > 1e-14)
        if not active.any():
            break
        # Lawson update, with a floor that keeps the normal matrix regular
        w = wa + 1e-14 * swa[..., None] / n
        w /= w.sum(axis=-1, keepdims=True)
    # the bound is exact in exact arithmetic; at round-off level (exact fits) it may exceed the error
    return _Lawson(best_theta, best_err, np.minimum(best_bound, best_err), it)


# --------------------------------------------------------------------------
# From parameters to coefficients and quality
# --------------------------------------------------------------------------


def _x_to_t(cx):
    """x-monomial coefficients (…, 5) of Cp/R → T-monomial coefficients a1…a5 (…, 5)."""
    return cx / _X ** np.arange(5)


def _poly_int(a, T):
    """(Σ a_k T^{k+1}/(k+1), Σ a_0 ln T + a_k T^k / k) for a (…, 5): H/R − a6 [K] and S/R − a7."""
    h = T * (a[..., 0] + T * (a[..., 1] / 2 + T * (a[..., 2] / 3 + T * (a[..., 3] / 4 + T * a[..., 4] / 5))))
    s = a[..., 0] * np.log(T) + T * (a[..., 1] + T * (a[..., 2] / 2 + T * (a[..., 3] / 3 + T * a[..., 4] / 4)))
    return h, s


def _coefficients(theta, Lc, Hc, tmid, dhf298, s298):
    """Low and high seven-coefficient sets (…, 7) from parameters (…, p)."""
    lo5 = _x_to_t(theta @ Lc.T)
    hi5 = _x_to_t(theta @ Hc.T)
    # make Cp/R continuity exact in floating point (a correction at round-off level)
    lo_cp = nasa7.cp_r(np.moveaxis(lo5, -1, 0), tmid)
    hi_cp = nasa7.cp_r(np.moveaxis(hi5, -1, 0), tmid)
    hi5[..., 0] += lo_cp - hi_cp
    h0, s0 = _poly_int(lo5, T_REF)
    a6_lo = dhf298 / C.R - h0
    a7_lo = s298 / C.R - s0
    hl, sl = _poly_int(lo5, tmid)
    hh, sh = _poly_int(hi5, tmid)
    a6_hi = (hl + a6_lo) - hh
    a7_hi = (sl + a7_lo) - sh
    low = np.concatenate([lo5, a6_lo[..., None], a7_lo[..., None]], axis=-1)
    high = np.concatenate([hi5, a6_hi[..., None], a7_hi[..., None]], axis=-1)
    return low, high


def _property_error(fit, ref, T, relative_floor):
    """PropertyError rows for arrays (S, n)."""
    d = np.abs(fit - ref)
    rel = d / (np.maximum(np.abs(ref), 1.0) if relative_floor else np.abs(ref))
    ir = rel.argmax(axis=1)
    ia = d.argmax(axis=1)
    rows = np.arange(fit.shape[0])
    return [PropertyError(float(rel[k, ir[k]]), float(T[ir[k]]), float(d[k, ia[k]]), float(T[ia[k]]))
            for k in rows]


def _evaluate(low, high, tmid, T):
    """Cp/R, H/RT, S/R of coefficient stacks (S, 7) on T (n,), ranges split at tmid (S,)."""
    lo = low.T[:, :, None]
    hi = high.T[:, :, None]
    use_low = T[None, :] <= tmid[:, None]
    return tuple(np.where(use_low, fn(lo, T), fn(hi, T)) for fn in (nasa7.cp_r, nasa7.h_rt, nasa7.s_r))


def _dense_grid(tlow, thigh):
    n = max(2, int(math.ceil((thigh - tlow) / CHECK_SPACING)) + 1)
    return np.linspace(tlow, thigh, n)


# --------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------


def tmid_candidates(tlow: float, thigh: float, T=None) -> np.ndarray:
    """Coarse Tmid candidates [K]: every 100 K in [800, 2000] K strictly inside (tlow, thigh).

    A candidate needs three grid points of ``T`` (if given) above it and
    three below.  If none is left, the 10 K multiple nearest the middle of the
    range is used.

    >>> tmid_candidates(200.0, 6000.0).tolist()[:3]
    [800.0, 900.0, 1000.0]
    >>> tmid_candidates(300.0, 1000.0).tolist()
    [800.0, 900.0]
    """
    lo, hi = TMID_SEARCH
    c = np.arange(lo, hi + 0.5 * TMID_COARSE_STEP, TMID_COARSE_STEP)
    c = c[(c > tlow) & (c < thigh)]
    if T is not None:
        T = np.asarray(T)
        c = np.array([t for t in c if (T < t).sum() >= 3 and (T > t).sum() >= 3])
    if c.size == 0:
        c = np.array([round((tlow + thigh) / 2 / TMID_FINE_STEP) * TMID_FINE_STEP])
    return c.astype(float)


def _fine_candidates(best, tlow, thigh, T):
    lo, hi = TMID_SEARCH
    c = best + TMID_FINE_STEP * np.arange(-round(TMID_FINE_HALF_WIDTH / TMID_FINE_STEP),
                                          round(TMID_FINE_HALF_WIDTH / TMID_FINE_STEP) + 1)
    c = c[(c >= lo) & (c <= hi) & (c > tlow) & (c < thigh)]
    c = np.array([t for t in c if (T < t).sum() >= 3 and (T > t).sum() >= 3])
    return c if c.size else np.array([best])


def _search_indices(T):
    """Indices of a ≈50 K subset of the grid T (ends kept)."""
    if T.size < 3:
        return np.arange(T.size)
    step = float(np.median(np.diff(T)))
    k = max(1, int(round(SEARCH_SPACING / step)))
    return np.unique(np.r_[np.arange(0, T.size, k), T.size - 1])


def _grid(table, tlow, thigh):
    T = np.asarray(table.T, dtype=float)
    if T.min() > tlow * (1 + 1e-9) or T.max() < thigh * (1 - 1e-9):
        raise ValueError(
            f"{table.name}: the table spans {T.min():g}–{T.max():g} K, the fit needs {tlow:g}–{thigh:g} K"
        )
    keep = (T >= tlow * (1 - 1e-12)) & (T <= thigh * (1 + 1e-12))
    return keep


def _choose_tmid(T, y, tlow, thigh, second_derivative):
    """Automatic Tmid [K] for each row of y (S, n) on grid T: coarse then fine search."""
    idx = _search_indices(T)
    Ts, ys = T[idx], y[:, idx]
    coarse = tmid_candidates(tlow, thigh, Ts)
    B = np.stack([_design(Ts, tlow, c, thigh, second_derivative)[0] for c in coarse])
    res = _lawson(B, ys, SEARCH_TOL, SEARCH_ITERATIONS)
    best_coarse = _pick(coarse, res.error)
    chosen = np.empty(y.shape[0])
    for bc in np.unique(best_coarse):
        rows = np.flatnonzero(best_coarse == bc)
        fine = _fine_candidates(bc, tlow, thigh, Ts)
        B = np.stack([_design(Ts, tlow, c, thigh, second_derivative)[0] for c in fine])
        r = _lawson(B, ys[rows], SEARCH_TOL, SEARCH_ITERATIONS)
        chosen[rows] = _pick(fine, r.error)
    return chosen


#: Tmid preferred among candidates whose errors tie (e.g. atoms whose Cp is exactly 5/2 R)
TMID_PREFERRED = 1000.0


def _pick(candidates, error):
    """Per species (columns of error (M, S)), the candidate of least error; ties → nearest 1000 K."""
    best = error.min(axis=0)
    tie = error <= best * (1 + 1e-6) + 1e-12
    dist = np.where(tie, np.abs(candidates - TMID_PREFERRED)[:, None], np.inf)
    return candidates[dist.argmin(axis=0)]


def fit_tables(tables, options) -> list[Nasa7Fit]:
    """Fit many ThermoTables at once (the batched path the build uses).

    ``options[i]`` is a dict of :func:`fit_table`'s keyword arguments for
    ``tables[i]`` (missing keys take fit_table's defaults).  Species that
    share a grid, a range and the derivative option are solved together as
    stacked numpy problems, Tmid candidates included.
    """
    tables = list(tables)
    options = [dict(o) for o in options]
    if len(options) != len(tables):
        raise ValueError(f"{len(tables)} tables but {len(options)} option sets")
    defaults = dict(tlow=200.0, tmid="auto", thigh=6000.0, cp_warning=0.005, second_derivative=False,
                    formula=(), charge=0, cp_r_ceiling=None, with_limit=False)
    opts = []
    for o in options:
        unknown = set(o) - set(defaults)
        if unknown:
            raise TypeError(f"unknown fit options: {sorted(unknown)}")
        opts.append({**defaults, **o})
    groups: dict[tuple, list[int]] = {}
    for i, (t, o) in enumerate(zip(tables, opts)):
        tlow, thigh = float(o["tlow"]), float(o["thigh"])
        keep = _grid(t, tlow, thigh)
        T = np.asarray(t.T, dtype=float)[keep]
        key = (T.tobytes(), tlow, thigh, bool(o["second_derivative"]))
        groups.setdefault(key, []).append(i)
    out: list[Nasa7Fit | None] = [None] * len(tables)
    for (tb, tlow, thigh, sd), rows in groups.items():
        T = np.frombuffer(tb, dtype=float)
        y = np.stack([np.asarray(tables[i].cp, dtype=float)[_grid(tables[i], tlow, thigh)] / C.R
                      for i in rows])
        bad = [tables[i].name for i, yy in zip(rows, y) if not np.all(np.isfinite(yy)) or yy.min() <= 0]
        if bad:
            raise ValueError(f"{', '.join(bad)}: the table's Cp is not positive and finite everywhere")
        tmid = np.empty(len(rows))
        auto = np.array([opts[i]["tmid"] == "auto" for i in rows])
        for k, i in enumerate(rows):
            if not auto[k]:
                tm = float(opts[i]["tmid"])
                if not tlow < tm < thigh:
                    raise ValueError(f"{tables[i].name}: Tmid {tm:g} K is not inside ({tlow:g}, {thigh:g}) K")
                tmid[k] = tm
        if auto.any():
            tmid[auto] = _choose_tmid(T, y[auto], tlow, thigh, sd)
        for tm in np.unique(tmid):
            sel = np.flatnonzero(tmid == tm)
            for i, fit in zip([rows[k] for k in sel],
                              _final(T, y[sel], [tables[rows[k]] for k in sel], [opts[rows[k]] for k in sel],
                                     tlow, float(tm), thigh, sd, auto[sel])):
                out[i] = fit
    return out  # type: ignore[return-value]


def _final(T, y, tables, opts, tlow, tmid, thigh, sd, auto):
    """Final fits of species (rows of y) sharing grid T and Tmid; Nasa7Fit list."""
    B, Lc, Hc = _design(T, tlow, tmid, thigh, sd)
    res = _lawson(B[None], y, FINAL_TOL, FINAL_ITERATIONS)
    theta = res.theta[0]
    dhf = np.array([t.dhf298 for t in tables])
    s298 = np.array([t.s298 for t in tables])
    low, high = _coefficients(theta, Lc, Hc, tmid, dhf, s298)
    S = y.shape[0]
    tm = np.full(S, tmid)
    cp_f, h_f, s_f = _evaluate(low, high, tm, T)
    g_f = h_f - s_f
    keep = [_grid(t, tlow, thigh) for t in tables]
    h_t = np.stack([np.asarray(t.h, dtype=float)[k] for t, k in zip(tables, keep)]) / (C.R * T)
    s_t = np.stack([np.asarray(t.s, dtype=float)[k] for t, k in zip(tables, keep)]) / C.R
    errs = {
        "cp_r": _property_error(cp_f, y, T, False),
        "h_rt": _property_error(h_f, h_t, T, True),
        "s_r": _property_error(s_f, s_t, T, True),
        "g_rt": _property_error(g_f, h_t - s_t, T, True),
    }
    # conditioning: design matrix with the 1/Cp row scaling; polynomial evaluation
    conds = [float(np.linalg.cond(B / yy[:, None])) for yy in y]
    terms = np.zeros((S, T.size))
    for k in range(5):
        terms += np.abs(np.where(T[None, :] <= tmid, low[:, k, None], high[:, k, None]) * T[None, :] ** k)
    ev_cond = (terms / np.abs(cp_f)).max(axis=1)
    dense = _dense_grid(tlow, thigh)
    cp_dense = _evaluate(low, high, tm, dense)[0]
    fits = []
    for k in range(S):
        o = opts[k]
        base = Nasa7Fit(
            name=tables[k].name, formula=tuple(o["formula"]), tlow=tlow, tmid=tmid, thigh=thigh,
            low=tuple(float(v) for v in low[k]), high=tuple(float(v) for v in high[k]),
            charge=int(o["charge"]),
        )
        cont = base.continuity()
        limit = None
        if o["with_limit"]:
            limit = _lp_limit(B, y[k])
        warnings = _warnings(errs["cp_r"][k], float(o["cp_warning"]), dense, cp_dense[k],
                             o["cp_r_ceiling"], conds[k])
        q = FitQuality(
            tmid=tmid, tmid_auto=bool(auto[k]),
            cp_r=errs["cp_r"][k], h_rt=errs["h_rt"][k], s_r=errs["s_r"][k], g_rt=errs["g_rt"][k],
            minimax_bound=float(res.bound[0, k]), minimax_limit=limit,
            continuity_cp_r=cont["cp_r"], continuity_h_rt=cont["h_rt"], continuity_s_r=cont["s_r"],
            condition=conds[k], evaluation_condition=float(ev_cond[k]), iterations=res.iterations,
            points=int(T.size), second_derivative=sd, cp_warning=float(o["cp_warning"]),
            warnings=tuple(warnings),
        )
        fits.append(dataclasses.replace(base, quality=q))
    return fits


def _warnings(cp_err: PropertyError, threshold, dense, cp_dense, ceiling, cond):
    out = []
    if cp_err.max_rel > threshold:
        out.append(f"poor fit: max Cp error {100 * cp_err.max_rel:.2f} % at {cp_err.t_rel:g} K "
                   f"exceeds {100 * threshold:.2f} %")
    if cp_dense.min() <= 0:
        i = int(cp_dense.argmin())
        out.append(f"fitted Cp is not positive: Cp/R = {cp_dense[i]:.4g} at {dense[i]:g} K")
    if ceiling is not None and cp_dense.max() > ceiling * (1 + CLASSICAL_MARGIN):
        i = int(cp_dense.argmax())
        out.append(f"fitted Cp/R = {cp_dense[i]:.4f} at {dense[i]:g} K exceeds the classical "
                   f"high-temperature limit {ceiling:.4f} by more than {100 * CLASSICAL_MARGIN:g} %")
    if cond > CONDITION_WARNING:
        out.append(f"ill-conditioned fit: design condition number {cond:.3g}")
    return out


def fit_table(table, *, tlow: float = 200.0, tmid: float | str = "auto", thigh: float = 6000.0,
              cp_warning: float = 0.005, second_derivative: bool = False, formula=(), charge: int = 0,
              cp_r_ceiling: float | None = None, with_limit: bool = False) -> Nasa7Fit:
    """Fit one ThermoTable with the two-range seven-coefficient form (see module docstring).

    Parameters
    ----------
    table : ThermoTable
        Cp, H, S of the species on a grid covering [tlow, thigh] [K].
    tlow, thigh : float
        Range ends [K]; only grid points inside are fitted.
    tmid : float or "auto"
        The range break [K], or "auto" for the search of the module docstring.
    cp_warning : float
        Max relative Cp error above which the fit is flagged (default 0.5 %).
    second_derivative : bool
        Also make d²(Cp/R)/dT² continuous at Tmid.
    formula, charge
        Copied into the :class:`Nasa7Fit`.
    cp_r_ceiling : float, optional
        Classical high-temperature limit of Cp/R (:func:`classical_cp_r`);
        the fit is flagged if its Cp/R exceeds it by more than 1 %.
    with_limit : bool
        Also solve the linear programme for the exact minimax limit
        (:func:`minimax_limit`) and store it in the quality.

    Returns
    -------
    Nasa7Fit with ``quality`` a :class:`FitQuality`.

    Examples
    --------
    Argon's Cp is 5/2 R, a quartic: the fit reproduces it and S°298.

    >>> import pipeline.species as sp, pipeline.thermo as th
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> f = fit_table(th.thermo_table(ar), formula=ar.formula)
    >>> round(f.low[0], 10), round(f.quality.max_cp_error, 12)
    (2.5, 0.0)
    >>> round(float(f.s(298.15)), 3)
    154.846
    """
    return fit_tables([table], [dict(tlow=tlow, tmid=tmid, thigh=thigh, cp_warning=cp_warning,
                                     second_derivative=second_derivative, formula=formula,
                                     charge=charge, cp_r_ceiling=cp_r_ceiling,
                                     with_limit=with_limit)])[0]


def _lp_limit(B, y) -> float:
    from scipy.optimize import linprog

    A = B / y[:, None]
    n, p = A.shape
    ones = np.ones((n, 1))
    A_ub = np.block([[A, -ones], [-A, -ones]])
    b_ub = np.concatenate([np.ones(n), -np.ones(n)])
    cost = np.zeros(p + 1)
    cost[-1] = 1.0
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, bounds=[(None, None)] * p + [(0, None)], method="highs")
    if res.status != 0:
        raise RuntimeError(f"minimax linear programme failed: {res.message}")
    return float(res.fun)


def minimax_limit(table, tlow: float = 200.0, tmid: float = 1000.0, thigh: float = 6000.0, *,
                  second_derivative: bool = False) -> float:
    """The least achievable max relative Cp error for these ranges (a linear programme).

    min_θ max_i |(B θ)_i / y_i − 1| over the grid points of ``table`` in
    [tlow, thigh], with the continuity conditions of the module docstring
    built into B; solved as min t subject to −t ≤ (Bθ)_i/y_i − 1 ≤ t with
    HiGHS (scipy.optimize.linprog).  Reference: Cheney (1966), ch. 2.

    >>> import pipeline.species as sp, pipeline.thermo as th
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> minimax_limit(th.thermo_table(ar)) < 1e-12
    True
    """
    keep = _grid(table, tlow, thigh)
    T = np.asarray(table.T, dtype=float)[keep]
    y = np.asarray(table.cp, dtype=float)[keep] / C.R
    B = _design(T, tlow, tmid, thigh, second_derivative)[0]
    return _lp_limit(B, y)


def classical_cp_r(species, tlow: float = 200.0, thigh: float = 6000.0) -> float:
    """Classical high-temperature limit of Cp°/R for a species, over [tlow, thigh] [K].

    Cp/R → 5/2 (translation with pV = RT) + 0 / 1 / 3/2 (atom / linear /
    nonlinear rigid rotation) + 1 per harmonic vibration (equipartition), to
    which the largest electronic contribution Cp_el/R on [tlow, thigh] is
    added (a Schottky term, not a classical one).  A hindered torsion counts
    as the larger of 1 and its own largest Cv/R on the range; a species with
    a ``diatomic`` level sum (anharmonic, centrifugal stretching: it may
    exceed the harmonic limit) counts as the larger of 1 (rotation) + 1
    (vibration) and the level sum's own largest Cp/R.  Equipartition:
    D. A. McQuarrie, *Statistical Mechanics* (1976), ch. 8.

    >>> import pipeline.species as sp
    >>> h2o = sp.Species(name="H2O", formula=(("H", 2), ("O", 1)), shape="nonlinear", symmetry=2,
    ...                  mass=18.015 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...                  rotational_constants=(2788.0, 1452.0, 928.0),
    ...                  frequencies=(365705.0, 159475.0, 375593.0))
    >>> classical_cp_r(h2o)
    7.0
    """
    from pipeline.statmech import electronic, harmonic_frequencies, species_terms

    T = np.linspace(tlow, thigh, 200)
    value = 2.5
    if species.diatomic is not None:
        from pipeline.statmech.diatomic import diatomic_terms

        value += max(2.0, float(diatomic_terms(species, T).cp_r.max()))
    else:
        value += {"atom": 0.0, "linear": 1.0, "nonlinear": 1.5}[species.shape]
        if species.shape != "atom":
            value += float(len(harmonic_frequencies(species)))
    if species.torsions:
        from pipeline.statmech.torsion import torsion_terms

        for tor in species.torsions:
            value += max(1.0, float(torsion_terms(tor, T).cp_r.max()))
    value += float(electronic(species.electronic, T).cp_r.max())
    return value


def fit_options(species, settings) -> dict:
    """fit_table keyword arguments for one species under build ``settings``.

    Applies the species file's ``fit:`` overrides (Settings.for_species) and
    adds formula, charge and the classical Cp ceiling.
    """
    s = settings.for_species(species)
    return dict(tlow=float(s.tmin), tmid=s.tmid if s.tmid == "auto" else float(s.tmid),
                thigh=float(s.tmax), cp_warning=float(s.cp_warning), formula=species.formula,
                charge=species.charge, cp_r_ceiling=classical_cp_r(species, s.tmin, s.tmax))
