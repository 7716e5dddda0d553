"""ThermoTable: Cp°, S°, H°−H°298, −(G°−H°298)/T and H° of one species on a grid.

Built from a :class:`~pipeline.species.Species` by summing the partition-function
contributions of :mod:`pipeline.statmech`.  Molar SI units throughout:
Cp, S [J/mol/K], H [J/mol], T [K].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pipeline.codata import C
from pipeline.elements import ELEMENT_H298_H0
from pipeline.statmech import sorted_terms

T_REF = 298.15  # [K]

#: most species :func:`thermo_tables` computes in one set of (species × temperature) arrays
BATCH = 64


def temperature_grid(tmin: float = 200.0, tmax: float = 6000.0, step: float = 10.0) -> np.ndarray:
    """Grid from ``tmin`` to ``tmax`` [K] every ``step`` [K], with 298.15 K always included.

    >>> temperature_grid(200, 500, 100).tolist()
    [200.0, 298.15, 300.0, 400.0, 500.0]
    """
    n = int(round((tmax - tmin) / step))
    grid = tmin + step * np.arange(n + 1, dtype=float)
    grid = grid[grid <= tmax + 1e-9]
    if grid[-1] < tmax - 1e-9:
        grid = np.append(grid, tmax)
    if tmin <= T_REF <= tmax:
        grid = np.union1d(grid, [T_REF])
    return grid


@dataclass(frozen=True)
class ThermoTable:
    """Standard-state properties of one species on a temperature grid.

    Attributes: ``T`` [K]; ``cp``, ``s``, ``g_fn`` = −(G°−H°298)/T [J/mol/K];
    ``h_minus_h298``, ``h`` = ΔfH°298 + (H°−H°298) [J/mol]; scalars
    ``dhf298`` [J/mol], ``s298``, ``cp298`` [J/mol/K], ``h298_minus_h0`` [J/mol],
    ``pressure`` [Pa].
    """

    name: str
    T: np.ndarray
    cp: np.ndarray
    s: np.ndarray
    h_minus_h298: np.ndarray
    g_fn: np.ndarray
    h: np.ndarray
    dhf298: float
    s298: float
    cp298: float
    h298_minus_h0: float
    pressure: float

    @property
    def g(self) -> np.ndarray:
        """G° = H° − T S° [J/mol] on the ΔfH°298 enthalpy scale."""
        return self.h - self.T * self.s

    def to_frame(self):
        """The table as a pandas DataFrame with SI units in the column names."""
        import pandas as pd

        return pd.DataFrame(
            {
                "T [K]": self.T,
                "Cp [J/mol/K]": self.cp,
                "S [J/mol/K]": self.s,
                "H-H298 [kJ/mol]": self.h_minus_h298 / 1e3,
                "-(G-H298)/T [J/mol/K]": self.g_fn,
                "H [kJ/mol]": self.h / 1e3,
            }
        )


def formation_at_298(species, h298_minus_h0: float) -> float:
    """ΔfH°(298.15 K) [J/mol] of a species whose file gives it at 0 K or 298.15 K.

    ΔfH°298 = ΔfH°0 + [H°298 − H°0](species) − Σ_el n_el [H°298 − H°0](el, ref)
              + z [H°298 − H°0](e⁻),

    with the element reference values of CODATA (Cox, Wagman & Medvedev 1989)
    and the thermal-electron convention (electron gas, 5/2 R·298.15 K) for ions.

    >>> from types import SimpleNamespace as NS
    >>> sp = NS(formation_temperature=0.0, formation_enthalpy=0.0, formula=(("H", 2),), charge=0)
    >>> formation_at_298(sp, 8468.0)
    0.0
    """
    if species.formation_temperature != 0.0:
        return float(species.formation_enthalpy)
    ref = sum(n * ELEMENT_H298_H0[el] for el, n in species.formula)
    electron = species.charge * 2.5 * C.R * T_REF
    return float(species.formation_enthalpy + h298_minus_h0 - ref + electron)


def thermo_table(species, T=None, pressure: float = C.bar) -> ThermoTable:
    """Compute the :class:`ThermoTable` of ``species`` on the grid ``T`` [K].

    H°−H°298 = RT·(H−H0)/RT − [H°298 − H°0];  −(G°−H°298)/T = S° − (H°−H°298)/T.
    The one-species case of :func:`thermo_tables` (the same bits).

    Examples
    --------
    >>> import pipeline.species as sp
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> t = thermo_table(ar, [298.15, 1000.0])
    >>> round(t.s298, 3), round(float(t.cp[1]), 4)
    (154.846, 20.7862)
    """
    return thermo_tables([species], T, pressure)[0]


def thermo_tables(species_list, T=None, pressure: float = C.bar) -> list[ThermoTable]:
    """:func:`thermo_table` of many species on one grid ``T`` [K], computed together.

    The partition-function sums run on (species × temperature) arrays
    (:func:`pipeline.statmech.sorted_terms`); a species' table is the same,
    bit for bit, alone or in any list.

    >>> import pipeline.species as sp
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> [round(t.s298, 3) for t in thermo_tables([ar, ar])]
    [154.846, 154.846]
    """
    species_list = list(species_list)
    if T is None:
        T = temperature_grid()
    T = np.atleast_1d(np.asarray(T, dtype=float))
    if len(species_list) > BATCH:  # in batches whose arrays stay in cache (rows are independent)
        return [t for lo in range(0, len(species_list), BATCH)
                for t in thermo_tables(species_list[lo : lo + BATCH], T, pressure)]
    if not species_list:
        return []
    Tx = np.append(T, T_REF)
    row, s_r, h_rt, cp_r = sorted_terms(species_list, Tx, pressure)
    R = C.R
    h_h0 = R * Tx * h_rt
    h298_h0 = h_h0[:, -1:]
    s = R * s_r[:, :-1]
    cp = R * cp_r[:, :-1]
    dh = h_h0[:, :-1] - h298_h0
    g_fn = s - dh / T
    s298 = (R * s_r[:, -1]).tolist()
    cp298 = (R * cp_r[:, -1]).tolist()
    h0 = h298_h0[:, 0].tolist()
    dhf = [formation_at_298(sp, h0[r]) for sp, r in zip(species_list, row)]
    dhf_rows = np.empty(len(row))
    dhf_rows[row] = dhf
    h = dhf_rows[:, None] + dh
    new = object.__new__
    out = []
    for i, sp in enumerate(species_list):
        r = row[i]
        t = new(ThermoTable)  # the dataclass's fields, set without its frozen __setattr__
        t.__dict__.update(
            name=sp.name, T=T, cp=cp[r], s=s[r], h_minus_h298=dh[r], g_fn=g_fn[r], h=h[r],
            dhf298=dhf[i], s298=s298[r], cp298=cp298[r], h298_minus_h0=h0[r], pressure=pressure,
        )
        out.append(t)
    return out
