"""Harmonic-oscillator vibrations."""

from __future__ import annotations

import numpy as np

from pipeline.statmech.terms import Terms


def harmonic(theta_v, T) -> Terms:
    """Sum of independent harmonic oscillators, energies from the zero-point level.

    With x = θ_v/T:  q = 1/(1 − e^{−x}),  (H−H0)/RT = x/(eˣ − 1),
    Cv/R = x² eˣ/(eˣ − 1)²,  S/R = x/(eˣ − 1) − ln(1 − e^{−x}).

    Parameters
    ----------
    theta_v : array (n,)
        Vibrational temperatures θ_v = h c ν̃ / k [K] (scale factor applied).
    T : array (m,)
        Temperatures [K].

    Returns
    -------
    :class:`Terms` summed over the modes.

    Examples
    --------
    >>> t = harmonic([1000.0], [1000.0])
    >>> round(float(t.cp_r[0]), 6)   # e/(e−1)²
    0.920674

    Reference: McQuarrie, *Statistical Mechanics* (1976), eqs. 6-20 to 6-23.
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta_v = np.asarray(theta_v, dtype=float)
    if theta_v.size == 0:
        return Terms.zero(T)
    s, h, cv = harmonic_groups(theta_v, [0], T)
    return Terms(s[0], h[0], cv[0])


def harmonic_groups(theta_v, starts, T):
    """The sums of :func:`harmonic` for consecutive groups of modes (one group a species).

    ``theta_v`` (M,) [K] holds the groups one after the other, group g starting
    at ``starts[g]`` (increasing; every group non-empty).  Returns S/R,
    (H−H0)/RT, Cv/R as (G, m) arrays.  Each group is summed mode by mode in
    its own order, so a group's sums do not depend on the other groups.

    >>> s, h, cv = harmonic_groups([1000.0, 1000.0, 2000.0], [0, 2], [1000.0])
    >>> round(float(cv[0, 0]), 6), round(float(cv[1, 0]), 6)   # 2·e/(e−1)², 4e²/(e²−1)²
    (1.841348, 0.724062)
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta_v = np.asarray(theta_v, dtype=float)
    starts = np.asarray(starts, dtype=np.intp)
    ends = np.r_[starts[1:], theta_v.size]
    out = tuple(np.empty((starts.size, T.size)) for _ in range(3))
    g0 = 0
    while g0 < starts.size:  # runs of groups of about CHUNK values, so the work stays in cache
        g1 = int(np.searchsorted(starts, starts[g0] + max(1, CHUNK // T.size), side="left"))
        g1 = max(g1, g0 + 1)
        lo = starts[g0]
        # (modes, temperatures); x capped at 700 where eˣ would overflow (terms below e^-690 ≈ 1e-300)
        x = np.minimum(theta_v[lo : ends[g1 - 1], None] / T[None, :], 700.0)
        # with e = eˣ − 1 (accurate for small x): (H−H0)/RT = x/e, Cv/R = (x/e)² (1 + e),
        # S/R = x/e + x − ln e
        e = np.expm1(x)
        h = x / e
        cv = h * h * (1.0 + e)
        s = h + (x - np.log(e))
        for g in range(g0, g1):
            for o, a in zip(out, (s, h, cv)):
                o[g] = a[starts[g] - lo : ends[g] - lo].sum(axis=0)
        g0 = g1
    return out


#: element count of the blocks :func:`harmonic_groups` works on
CHUNK = 32768
