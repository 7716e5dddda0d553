"""Reference data for tests.

Reference thermochemistry comes from the NASA TM-4513-form seven-coefficient
data that the cantera package ships: ``gri30.yaml`` (GRI-Mech 3.0 thermo) first,
``nasa_gas.yaml`` (NASA Glenn gas-phase database) for species GRI-Mech lacks.
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SPECIES_DIR = ROOT / "species"

#: statherm record name → name in cantera's bundled files where they differ
ALIASES = {"HE": "He", "AR": "AR"}


@functools.lru_cache(maxsize=None)
def bundled(source: str) -> dict:
    """Upper-case name → cantera Species of one data file shipped with cantera."""
    import cantera as ct

    return {sp.name.upper(): sp for sp in ct.Species.list_from_file(source)}


def reference(name: str, source: str | None = None):
    """(cantera Species, source file) of the published coefficients for ``name``, or None.

    Without ``source``: GRI-Mech 3.0 (gri30.yaml) first, then NASA Glenn (nasa_gas.yaml).
    """
    key = ALIASES.get(name, name).upper()
    for src in (source,) if source else ("gri30.yaml", "nasa_gas.yaml"):
        if key in bundled(src):
            return bundled(src)[key], src
    return None


def reference_cp(name: str, T, source: str | None = None) -> np.ndarray:
    """Cp [J/mol/K] from the bundled seven-coefficient data at temperatures T [K]."""
    sp, _ = reference(name, source)
    return np.array([sp.thermo.cp(float(t)) for t in np.atleast_1d(T)]) / 1e3


def reference_s(name: str, T, source: str | None = None) -> np.ndarray:
    """S [J/mol/K] (cantera's data are at 1 bar unless the source says otherwise)."""
    sp, _ = reference(name, source)
    return np.array([sp.thermo.s(float(t)) for t in np.atleast_1d(T)]) / 1e3
