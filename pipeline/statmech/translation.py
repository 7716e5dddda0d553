"""Translational partition function of an ideal gas."""

from __future__ import annotations

import numpy as np

from pipeline.codata import C
from pipeline.statmech.terms import Terms


def translation(mass, T, pressure=C.bar) -> Terms:
    """Translational contribution with the ideal-gas p V term (Sackur–Tetrode).

    S/R = ln[(2π m k T / h²)^{3/2} k T / p°] + 5/2,   (H − H0)/RT = 5/2,   Cp/R = 5/2.

    Parameters
    ----------
    mass : float
        Molecular mass m [kg].
    T : array
        Temperatures [K].
    pressure : float
        Standard pressure p° [Pa] (1 bar, IUPAC; 1 atm on request).

    Returns
    -------
    :class:`Terms`.

    Examples
    --------
    Argon at 298.15 K and 1 bar (CODATA key value 154.846 J/mol/K):

    >>> t = translation(39.948 * C.atomic_mass, [298.15])
    >>> round(float(t.s_r[0] * C.R), 3)
    154.846

    Reference: O. Sackur, Ann. Phys. 36, 958 (1911); H. Tetrode, Ann. Phys. 38,
    434 (1912); McQuarrie, *Statistical Mechanics* (1976), eq. 5-20.
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    lam = (2.0 * np.pi * mass * C.k * T / C.h**2) ** 1.5
    s_r = np.log(lam * C.k * T / pressure) + 2.5
    return Terms(s_r, np.full_like(T, 2.5), np.full_like(T, 2.5))
