"""Dimensionless thermodynamic functions of one degree of freedom.

Every partition-function model returns :class:`Terms` on a temperature grid:

* ``s_r``  = S/R
* ``h_rt`` = (H − H0)/(R T)   (H0: the lowest level of that degree of freedom)
* ``cp_r`` = Cp/R             (Cv/R for internal motions; translation adds the
  ideal-gas p V = R T term to H and Cp)

Contributions of independent motions add (the partition function factorises).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Terms:
    """S/R, (H−H0)/RT and Cp/R arrays on one temperature grid."""

    s_r: np.ndarray
    h_rt: np.ndarray
    cp_r: np.ndarray

    def __add__(self, other: "Terms") -> "Terms":
        return Terms(self.s_r + other.s_r, self.h_rt + other.h_rt, self.cp_r + other.cp_r)

    @staticmethod
    def zero(T) -> "Terms":
        z = np.zeros_like(np.asarray(T, dtype=float))
        return Terms(z, z.copy(), z.copy())


def level_sum(theta, degeneracy, T, *, chunk: int = 2_000_000) -> Terms:
    """Thermodynamic functions from a direct sum over energy levels.

    q = Σ_i g_i exp(−θ_i/T),  (U−U0)/RT = ⟨θ⟩/T,
    Cv/R = (⟨θ²⟩ − ⟨θ⟩²)/T²,  S/R = ln q + (U−U0)/RT,

    with θ_i = ε_i/k measured from the lowest level (shifted here if needed).

    Parameters
    ----------
    theta : array (n,)
        Level energies as temperatures θ_i = ε_i/k [K].
    degeneracy : array (n,)
        Degeneracies g_i [-].
    T : array (m,)
        Temperatures [K].

    Returns
    -------
    :class:`Terms` on ``T``.

    Examples
    --------
    A two-level system with equal degeneracies at T = θ:

    >>> t = level_sum([0.0, 100.0], [1, 1], [100.0])
    >>> round(float(t.cp_r[0]), 6)  # x² eˣ/(1+eˣ)², x = 1
    0.196612

    Reference: D. A. McQuarrie, *Statistical Mechanics* (Harper & Row, 1976),
    ch. 2 (canonical ensemble averages).
    """
    theta = np.asarray(theta, dtype=float)
    g = np.asarray(degeneracy, dtype=float)
    T = np.atleast_1d(np.asarray(T, dtype=float))
    theta = theta - theta.min()
    out_s = np.empty_like(T)
    out_h = np.empty_like(T)
    out_c = np.empty_like(T)
    step = max(1, chunk // max(1, theta.size))
    for lo in range(0, T.size, step):
        t = T[lo : lo + step, None]
        x = theta[None, :] / t
        w = g[None, :] * np.exp(-x)
        q = w.sum(axis=1)
        m1 = (w * x).sum(axis=1) / q
        m2 = (w * x * x).sum(axis=1) / q
        out_s[lo : lo + step] = np.log(q) + m1
        out_h[lo : lo + step] = m1
        out_c[lo : lo + step] = np.maximum(m2 - m1 * m1, 0.0)
    return Terms(out_s, out_h, out_c)
