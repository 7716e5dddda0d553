"""Electronic partition function from a list of levels."""

from __future__ import annotations

import math

import numpy as np

from pipeline.statmech.terms import Terms, level_sum
from pipeline.units import theta


def electronic(levels, T) -> Terms:
    """Electronic contribution from levels (g_i, ν̃_i).

    q_el = Σ g_i exp(−h c ν̃_i / k T); the ground-state degeneracy g_0 alone
    adds R ln g_0 to S.

    Parameters
    ----------
    levels : sequence of (int, float)
        Degeneracy g_i and energy ν̃_i [m^-1] above the ground level.
    T : array
        Temperatures [K].

    Returns
    -------
    :class:`Terms`.

    Examples
    --------
    A doublet ground state alone gives S = R ln 2:

    >>> round(float(electronic([(2, 0.0)], [300.0]).s_r[0]), 6)
    0.693147

    Reference: McQuarrie, *Statistical Mechanics* (1976), §8-1.
    """
    g = np.array([lv[0] for lv in levels], dtype=float)
    e = np.array([lv[1] for lv in levels], dtype=float)
    if e.size and not e.any():  # ground level(s) only: q = Σ g, no energy, no heat capacity
        T = np.atleast_1d(np.asarray(T, dtype=float))
        return Terms(np.full(T.shape, ground_entropy(levels)), np.zeros(T.shape), np.zeros(T.shape))
    return level_sum(theta(e), g, T)


def ground_entropy(levels) -> float | None:
    """S/R = ln Σ g_i of levels that all lie at zero energy, else None (levels above the ground).

    >>> round(ground_entropy([(2, 0.0)]), 6), ground_entropy([(2, 0.0), (2, 1e4)])
    (0.693147, None)
    """
    if any(lv[1] != 0.0 for lv in levels) or not levels:
        return None
    return math.log(float(sum(lv[0] for lv in levels)))
