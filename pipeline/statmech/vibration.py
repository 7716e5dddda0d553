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
    x = theta_v[None, :] / T[:, None]
    em = np.exp(-x)
    one_minus = -np.expm1(-x)  # 1 − e^{−x}, accurate for small x
    h = x * em / one_minus
    cv = x * x * em / one_minus**2
    s = h - np.log(one_minus)
    return Terms(s.sum(axis=1), h.sum(axis=1), cv.sum(axis=1))
