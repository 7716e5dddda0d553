"""Partition functions: translation, rotation, vibration, electronic, and the
beyond-rigid-rotor models (diatomic level sums, hindered torsions).

:func:`species_terms` combines them for one :class:`~pipeline.species.Species`.
Nothing here reads files.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as C

from pipeline.statmech.electronic import electronic, ground_entropy
from pipeline.statmech.rotation import linear_rotor, nonlinear_rotor
from pipeline.statmech.terms import Terms, level_sum
from pipeline.statmech.translation import translation
from pipeline.statmech.vibration import harmonic, harmonic_groups
from pipeline.units import theta

__all__ = [
    "Terms", "level_sum", "translation", "linear_rotor", "nonlinear_rotor",
    "harmonic", "electronic", "species_terms", "stacked_terms", "harmonic_frequencies",
]


def harmonic_frequencies(species) -> np.ndarray:
    """The wavenumbers [m^-1] treated as harmonic (the loader has already
    removed the modes that torsions replace)."""
    return np.asarray(species.frequencies, dtype=float)


def species_terms(species, T, pressure: float = C.bar) -> Terms:
    """All contributions for one species on the grid ``T`` [K] at p° [Pa].

    Sum of translation, external rotation, harmonic vibrations (less the modes
    replaced by torsions), hindered torsions, electronic levels — or, for a
    species with a ``diatomic`` block, a direct rovibrational level sum in place
    of rotor and vibrations.  The one-species case of :func:`stacked_terms`.
    """
    t = stacked_terms([species], T, pressure)
    return Terms(t.s_r[0], t.h_rt[0], t.cp_r[0])


def stacked_terms(species_list, T, pressure: float = C.bar) -> Terms:
    """:func:`species_terms` of many species on one grid ``T`` [K]: Terms of (S, m) arrays.

    Translation, rigid nonlinear rotors and harmonic vibrations are computed
    for all species at once; the other models species by species.  Each row
    adds its contributions in the order of :func:`species_terms`, with
    element-wise operations and per-species sums only, so a species' row is
    the same, bit for bit, whatever other species share the call.

    >>> import pipeline.species as sp
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> stacked_terms([ar, ar], [298.15]).s_r.shape
    (2, 1)
    """
    species_list = list(species_list)
    T = np.atleast_1d(np.asarray(T, dtype=float))
    mass = np.array([float(sp.mass) for sp in species_list])
    tr = translation(mass[:, None], T, pressure)
    shape = (len(species_list), T.size)
    s, h, c = (np.array(np.broadcast_to(a, shape)) for a in (tr.s_r, tr.h_rt, tr.cp_r))

    def add(rows, t):
        s[rows] += t.s_r
        h[rows] += t.h_rt
        c[rows] += t.cp_r

    nonlinear = [i for i, sp in enumerate(species_list) if sp.diatomic is None and sp.shape == "nonlinear"]
    for i, sp in enumerate(species_list):
        if sp.diatomic is not None:
            from pipeline.statmech.diatomic import diatomic_terms

            add(i, diatomic_terms(sp, T))
        elif sp.shape == "linear":
            add(i, linear_rotor(float(theta(sp.rotational_constants[0])), sp.symmetry, T))
    if nonlinear:
        group = [species_list[i] for i in nonlinear]
        add(nonlinear, nonlinear_rotor(
            theta(np.array([sp.rotational_constants for sp in group], dtype=float)),
            np.array([sp.symmetry for sp in group]), T, np.array([sp.optical_isomers for sp in group])))
    vib = [(i, theta(harmonic_frequencies(sp))) for i, sp in enumerate(species_list)
           if sp.shape != "atom" and sp.diatomic is None]
    vib = [(i, th) for i, th in vib if th.size]
    if vib:
        starts = np.cumsum([0] + [th.size for _, th in vib[:-1]])
        hs, hh, hc = harmonic_groups(np.concatenate([th for _, th in vib]), starts, T)
        add([i for i, _ in vib], Terms(hs, hh, hc))
    ground = []  # (row, S/R) of species whose electronic levels all lie at zero energy
    for i, sp in enumerate(species_list):
        if sp.torsions:
            from pipeline.statmech.torsion import torsion_terms

            for tor in sp.torsions:
                add(i, torsion_terms(tor, T))
        g = ground_entropy(sp.electronic)
        if g is None:
            add(i, electronic(sp.electronic, T))
        elif g != 0.0:  # electronic() gives S/R = ln g, no H, no Cp: the same sums, in one step
            ground.append((i, g))
    if ground:
        s[[i for i, _ in ground]] += np.array([g for _, g in ground])[:, None]
    return Terms(s, h, c)
