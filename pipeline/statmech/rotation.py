"""Rigid-rotor rotational partition functions.

Linear molecules use an exact sum over J where the rotational temperature is
high compared with T (T < ``EXACT_BELOW`` θ_r) and the Mulholland expansion
above; nonlinear molecules use the classical rigid rotor with its first
quantum correction.
"""

from __future__ import annotations

import math

import numpy as np

from pipeline.statmech.terms import Terms, level_sum

#: linear rotor: exact level sum for T below this multiple of θ_r; the
#: Mulholland series is good to ~(θ/T)⁴ < 1e-9 relative above it
EXACT_BELOW = 200.0


def linear_levels(theta_r, T_max: float, depth: float = 60.0, count_only: bool = False):
    """Rigid-rotor levels J(J+1) θ_r with degeneracies 2J+1 up to e^{−depth} at T_max
    (``count_only``: just their number).

    >>> th, g = linear_levels(10.0, 10.0, depth=6.0)
    >>> g.tolist()
    [1.0, 3.0, 5.0]
    """
    jmax = int(math.ceil(0.5 * (-1 + math.sqrt(1 + 4 * depth * T_max / theta_r)))) + 1
    if count_only:
        return jmax
    J = np.arange(jmax, dtype=float)
    return J * (J + 1) * theta_r, 2 * J + 1


def _mulholland(theta_r, T) -> Terms:
    """ln q = ln(T/θ) + ln P(y), P = 1 + y/3 + y²/15 + 4y³/315, y = θ/T."""
    y = theta_r / T
    y2 = y * y  # y**2 (numpy squares by this product)
    P = 1 + y / 3 + y2 / 15 + 4 * y**3 / 315
    dP = 1 / 3 + 2 * y / 15 + 12 * y2 / 315
    d2P = 2 / 15 + 24 * y / 315
    h = 1 - y * dP / P
    cv = 1 + y2 * (d2P * P - dP * dP) / P**2
    s = np.log(T / theta_r) + np.log(P) + h
    return Terms(s, h, cv)


def linear_rotor(theta_r: float, symmetry: int, T) -> Terms:
    """Rigid linear rotor.

    q = (1/σ) Σ_J (2J+1) exp(−J(J+1) θ_r/T); for T/θ_r ≥ 200 the Mulholland
    expansion q = (T/σθ_r)(1 + y/3 + y²/15 + 4y³/315), y = θ_r/T.

    Parameters
    ----------
    theta_r : float
        Rotational temperature θ_r = h c B̃ / k [K].
    symmetry : int
        Rotational symmetry number σ [-].
    T : array
        Temperatures [K].

    Returns
    -------
    :class:`Terms` (Cv/R → 1 at high T).

    Examples
    --------
    >>> t = linear_rotor(2.78, 1, [298.15])   # CO
    >>> round(float(t.h_rt[0]), 5)   # 1 − θ/(3T) to first order
    0.99689

    Reference: H. P. Mulholland, Proc. Cambridge Phil. Soc. 24, 280 (1928);
    McQuarrie, *Statistical Mechanics* (1976), eq. 6-38.
    """
    t = linear_rotors([theta_r], [symmetry], T)
    return Terms(t.s_r[0], t.h_rt[0], t.cp_r[0])


def linear_rotors(theta_r, symmetry, T) -> Terms:
    """:func:`linear_rotor` of several molecules on one grid: Terms of (L, m) arrays.

    The Mulholland expansion is evaluated for all molecules and temperatures
    at once; the temperatures below ``EXACT_BELOW`` θ_r take the level sum,
    molecule by molecule.  Each value is the one :func:`linear_rotor` gives.

    Parameters
    ----------
    theta_r : array (L,)
        Rotational temperatures θ_r [K].
    symmetry : array (L,)
        Rotational symmetry numbers σ [-].
    T : array (m,)
        Temperatures [K].

    >>> t = linear_rotors([2.78, 2.78], [1, 2], [298.15])
    >>> round(float(t.s_r[0, 0] - t.s_r[1, 0]), 6)   # ln 2
    0.693147
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta_r = np.asarray(theta_r, dtype=float)
    exact = T < EXACT_BELOW * theta_r[:, None]
    # y = θ/T: the expansion is kept only where y ≤ 1/200; elsewhere it may overflow unseen
    with np.errstate(all="ignore"):
        out = _mulholland(theta_r[:, None], T)
    out_s, out_h, out_c = out.s_r, out.h_rt, out.cp_r
    if exact.any():
        for i, t, rows, cols in _exact_sums(theta_r, exact, T):
            out_s[i[rows], cols], out_h[i[rows], cols], out_c[i[rows], cols] = t.s_r, t.h_rt, t.cp_r
    log_sigma = np.array([math.log(s) for s in symmetry])
    return Terms(out_s - log_sigma[:, None], out_h, out_c)


def _exact_sums(theta_r, exact, T):
    """The level sums of :func:`linear_rotors` at its ``exact`` (L, m) temperatures.

    Yields ``(molecules, terms, rows, cols)``: for the molecules (indices) that
    share a number of levels (:func:`linear_levels` up to their highest exact
    temperature), the sums of :func:`pipeline.statmech.terms.level_sum` at
    temperature ``T[cols]`` of molecule ``molecules[rows]``, all computed at
    once — a sum over one row of levels, the same as the molecule's own call.
    """
    hot = np.flatnonzero(exact.any(axis=1))
    t_max = np.where(exact[hot], T, -np.inf).max(axis=1).tolist()
    sizes: dict[int, list[int]] = {}
    for i, tm in zip(hot.tolist(), t_max):
        sizes.setdefault(linear_levels(float(theta_r[i]), tm, count_only=True), []).append(i)
    for n, members in sizes.items():
        i = np.array(members)
        J = np.arange(n, dtype=float)
        levels = (J * (J + 1))[None, :] * theta_r[i][:, None]
        levels = levels - levels.min(axis=1, keepdims=True)
        rows, cols = np.nonzero(exact[i])
        yield i, _row_level_sums(levels[rows], 2 * J + 1, T[cols]), rows, cols


def _row_level_sums(theta, g, T) -> Terms:
    """:func:`pipeline.statmech.terms.level_sum` with levels ``theta[r]`` (from 0) at ``T[r]``, row by row.

    The same operations on −x = θ/(−T) instead of x (each rounds the same up to its sign):
    w = g e^{−x}, Σ w x = −Σ w (−x), Σ w x x = Σ [w (−x)] (−x).
    """
    xn = theta / -T[:, None]
    w = np.exp(xn)
    w *= g[None, :]
    q = w.sum(axis=1)
    wx = np.multiply(w, xn, out=w)  # −w x
    m1 = np.negative(wx.sum(axis=1)) / q
    m2 = np.multiply(wx, xn, out=wx).sum(axis=1) / q
    return Terms(np.log(q) + m1, m1, np.maximum(m2 - m1 * m1, 0.0))


def nonlinear_rotor(thetas, symmetry: int, T, optical_isomers: int = 1) -> Terms:
    """Rigid nonlinear rotor, classical with its first quantum correction.

    q = (n_opt √π / σ) √(T³/(θ_A θ_B θ_C)) · exp(c/T),
    c = [2(θ_A+θ_B+θ_C) − (θ_Aθ_B/θ_C + θ_Bθ_C/θ_A + θ_Cθ_A/θ_B)]/12,

    so (H−H0)/RT = 3/2 − c/T, Cv/R = 3/2, S/R = ln q_cl + 3/2.  For a
    symmetric top this is 1 + (θ_B/12T)(4 − θ_B/θ_A) to first order; for a
    spherical top exp(θ/4T).

    Parameters
    ----------
    thetas : sequence of 3 floats, or array (S, 3)
        Rotational temperatures θ_A, θ_B, θ_C [K] (one row per species).
    symmetry : int or array (S,)
        External symmetry number σ [-].
    T : array (m,)
        Temperatures [K].
    optical_isomers : int or array (S,)
        Number of optical isomers n_opt (adds R ln n_opt to S).

    Returns
    -------
    :class:`Terms` of arrays (m,), or (S, m) for S species.

    Examples
    --------
    >>> t = nonlinear_rotor([10.0, 10.0, 10.0], 12, [300.0])
    >>> round(float(t.h_rt[0]), 6)   # 3/2 − θ/(4T)
    1.491667

    Reference: K. F. Stripp and J. G. Kirkwood, J. Chem. Phys. 19, 1131
    (1951); R. C. Tolman / McQuarrie, *Statistical Mechanics* (1976), eq. 8-35.
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    th = np.asarray(thetas, dtype=float)
    a, b, c_ = th[..., 0, None], th[..., 1, None], th[..., 2, None]
    corr = (2 * (a + b + c_) - (a * b / c_ + b * c_ / a + c_ * a / b)) / 12.0
    lead = np.log(np.asarray(optical_isomers, dtype=float) * math.sqrt(math.pi)
                  / np.asarray(symmetry, dtype=float))[..., None]
    s = lead + 0.5 * np.log(T**3 / (a * b * c_)) + 1.5
    return Terms(s, 1.5 - corr / T, np.full(s.shape, 1.5))
