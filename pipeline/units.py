"""Unit table: every unit a species file may name, converted to SI.

Spectroscopic energies are held internally as wavenumbers in [m^-1]
(the SI unit of ν̃), moments of inertia in [kg m^2], molar energies in
[J/mol].  All constants come from :mod:`scipy.constants` (CODATA), through
:mod:`pipeline.codata`.
"""

from __future__ import annotations

from pipeline.codata import C

#: wavenumber-like quantities (rotational constants, frequencies, levels) → [m^-1]
WAVENUMBER = {
    "cm-1": 100.0,
    "m-1": 1.0,
    "GHz": 1e9 / C.c,
    "MHz": 1e6 / C.c,
    "K": C.k / (C.h * C.c),
    "eV": C.e / (C.h * C.c),
}

#: units accepted for rotational constants (a subset: what spectroscopists quote)
ROTATIONAL = ("cm-1", "GHz", "MHz")

#: moments of inertia → [kg m^2]
MOMENT = {
    "amu*angstrom^2": C.atomic_mass * 1e-20,
    "g*cm^2": 1e-7,
    "kg*m^2": 1.0,
}

#: molar energies → [J/mol]
MOLAR_ENERGY = {
    "kJ/mol": 1e3,
    "kcal/mol": C.calorie * 1e3,
    "J/mol": 1.0,
    "cm-1": C.h * C.c * 100.0 * C.N_A,
}

#: pressures → [Pa]
PRESSURE = {"bar": C.bar, "atm": C.atm, "Pa": 1.0}

#: second radiation constant c2 = h c / k [m K]: ν̃ [m^-1] × c2 = θ [K]
C2 = C.h * C.c / C.k


def theta(wavenumber_m):
    """Characteristic temperature of a level or mode.

    θ = h c ν̃ / k

    Parameters
    ----------
    wavenumber_m : float or array
        Wavenumber ν̃ [m^-1].

    Returns
    -------
    θ [K].

    Examples
    --------
    >>> round(float(theta(100.0 * 1000.0)), 3)   # 1000 cm-1
    1438.777

    Reference: CODATA 2018 second radiation constant c2 = hc/k
    (Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021).
    """
    return wavenumber_m * C2
