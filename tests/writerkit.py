"""Helpers for the writers, readers and client tests: realistic fits and a small rendered database.

Reference coefficients: the NASA TM-4513-form data that cantera ships —
``gri30.yaml`` (GRI-Mech 3.0 thermo, Smith et al.) and ``nasa_gas.yaml``
(NASA Glenn, McBride, Zehe & Gordon 2002).
"""

from __future__ import annotations

import functools

from refdata import SPECIES_DIR

from pipeline.nasa7 import Nasa7Fit
from pipeline.settings import Settings
from pipeline.writers import species_fragments

#: bundled species rendered by the writer tests: atom, diatomics, polyatomics, torsions
SMALL = ("Ar", "CH4", "CO2", "H2O", "OH", "NO", "CH3", "H2O2")


def cantera_fits(source: str) -> list[Nasa7Fit]:
    """The two-range NASA7 species of a cantera data file as Nasa7Fit (charge from 'E')."""
    import cantera as ct

    out = []
    for sp in ct.Species.list_from_file(source):
        c = sp.thermo.coeffs
        if type(sp.thermo).__name__ != "NasaPoly2" or len(c) != 15:
            continue
        comp = {el: int(round(n)) for el, n in sp.composition.items()}
        charge = -comp.pop("E", 0)
        out.append(Nasa7Fit(sp.name, tuple(comp.items()), sp.thermo.min_temp, float(c[0]), sp.thermo.max_temp,
                            tuple(c[8:15]), tuple(c[1:8]), charge=charge))
    return out


@functools.lru_cache(maxsize=None)
def small_build():
    """species, fine tables, fits, fragments of a few bundled species under the default settings."""
    from pipeline.fit import fit_options, fit_tables
    from pipeline.species import load_species
    from pipeline.thermo import temperature_grid, thermo_table

    settings = Settings()
    species = [load_species(SPECIES_DIR / f"{n}.yaml", display=f"species/{n}.yaml")[0] for n in SMALL]
    tables = [thermo_table(sp, temperature_grid(settings.tmin, settings.tmax, settings.grid_step),
                           settings.pressure_pa) for sp in species]
    fits = fit_tables(tables, [fit_options(sp, settings) for sp in species])
    frags = [species_fragments(sp, t, f, settings) for sp, t, f in zip(species, tables, fits)]
    return settings, species, tables, fits, frags
