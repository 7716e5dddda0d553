"""The two-range seven-coefficient polynomial (NASA TM-4513 form) and its evaluation.

For each range (a1 … a7)::

    Cp/R = a1 + a2 T + a3 T² + a4 T³ + a5 T⁴
    H/RT = a1 + a2 T/2 + a3 T²/3 + a4 T³/4 + a5 T⁴/5 + a6/T
    S/R  = a1 ln T + a2 T + a3 T²/2 + a4 T³/3 + a5 T⁴/4 + a7

with H on the ΔfH°(298.15 K) scale.  Reference: B. J. McBride, S. Gordon and
M. A. Reno, "Coefficients for Calculating Thermodynamic and Transport
Properties of Individual Species", NASA TM-4513 (1993).

:class:`Nasa7Fit` is what the fitting stage produces, what the writers print
and what :mod:`pipeline.readers` reads back.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from pipeline.codata import C


def cp_r(a, T):
    """Cp/R of one coefficient set at T [K].

    >>> float(cp_r([3.5, 0, 0, 0, 0, 0, 0], 1000.0))
    3.5
    """
    T = np.asarray(T, dtype=float)
    return a[0] + T * (a[1] + T * (a[2] + T * (a[3] + T * a[4])))


def h_rt(a, T):
    """H/RT of one coefficient set at T [K] (H on the ΔfH°298 scale).

    >>> float(h_rt([2.5, 0, 0, 0, 0, -745.375, 0], 298.15))
    0.0
    """
    T = np.asarray(T, dtype=float)
    return a[0] + T * (a[1] / 2 + T * (a[2] / 3 + T * (a[3] / 4 + T * a[4] / 5))) + a[5] / T


def s_r(a, T):
    """S/R of one coefficient set at T [K].

    >>> round(float(s_r([2.5, 0, 0, 0, 0, 0, 4.37967], 298.15)), 4)   # Ar, 1 bar
    18.6237
    """
    T = np.asarray(T, dtype=float)
    return a[0] * np.log(T) + T * (a[1] + T * (a[2] / 2 + T * (a[3] / 3 + T * a[4] / 4))) + a[6]


@dataclass(frozen=True)
class Nasa7Fit:
    """Two ranges of seven coefficients for one species.

    ``low`` applies on [tlow, tmid], ``high`` on [tmid, thigh]; temperatures [K].
    ``quality`` holds the fit metrics of :mod:`pipeline.fit` (None when read
    from a file); ``extra`` carries anything else a writer or reader needs
    (e.g. the record's identifier columns).
    """

    name: str
    formula: tuple[tuple[str, int], ...]
    tlow: float
    tmid: float
    thigh: float
    low: tuple[float, ...]
    high: tuple[float, ...]
    charge: int = 0
    phase: str = "G"
    quality: Any = None
    extra: dict = field(default_factory=dict, compare=False, hash=False)

    def _pick(self, T, fn):
        T = np.asarray(T, dtype=float)
        return np.where(T <= self.tmid, fn(self.low, T), fn(self.high, T))

    def cp_r(self, T):
        """Cp/R at T [K]."""
        return self._pick(T, cp_r)

    def h_rt(self, T):
        """H/RT at T [K]."""
        return self._pick(T, h_rt)

    def s_r(self, T):
        """S/R at T [K]."""
        return self._pick(T, s_r)

    def g_rt(self, T):
        """G/RT = H/RT − S/R at T [K]."""
        return self.h_rt(T) - self.s_r(T)

    def cp(self, T):
        """Cp [J/mol/K]."""
        return C.R * self.cp_r(T)

    def h(self, T):
        """H [J/mol] on the ΔfH°298 scale."""
        return C.R * np.asarray(T, dtype=float) * self.h_rt(T)

    def s(self, T):
        """S [J/mol/K]."""
        return C.R * self.s_r(T)

    def g(self, T):
        """G [J/mol]."""
        return C.R * np.asarray(T, dtype=float) * self.g_rt(T)

    def continuity(self) -> dict[str, float]:
        """Relative jumps of Cp/R, H/RT, S/R at Tmid (|high − low| / max(|low|, 1)).

        The normalisation by max(|value|, 1) is what solvers apply when they
        check a polynomial set at its range break.
        """
        t = self.tmid
        out = {}
        for key, fn in (("cp_r", cp_r), ("h_rt", h_rt), ("s_r", s_r)):
            lo, hi = float(fn(self.low, t)), float(fn(self.high, t))
            out[key] = abs(hi - lo) / max(abs(lo), 1.0)
        return out
