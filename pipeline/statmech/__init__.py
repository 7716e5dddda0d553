"""Partition functions: translation, rotation, vibration, electronic, and the
beyond-rigid-rotor models (diatomic level sums, hindered torsions).

:func:`species_terms` combines them for one :class:`~pipeline.species.Species`.
Nothing here reads files.
"""

from __future__ import annotations

import numpy as np

from pipeline.codata import C
from pipeline.statmech.electronic import electronic, ground_entropy
from pipeline.statmech.rotation import linear_rotor, linear_rotors, nonlinear_rotor
from pipeline.statmech.terms import Terms, level_sum
from pipeline.statmech.translation import translation
from pipeline.statmech.vibration import harmonic, harmonic_groups
from pipeline.units import theta

__all__ = [
    "Terms", "level_sum", "translation", "linear_rotor", "nonlinear_rotor",
    "harmonic", "electronic", "species_terms", "stacked_terms", "sorted_terms", "harmonic_frequencies",
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

    Translation, rigid rotors and harmonic vibrations are computed for all
    species at once; diatomic level sums, torsions and excited electronic
    levels species by species.  Each row adds its contributions in the order
    of :func:`species_terms`, with element-wise operations and per-species
    sums only, so a species' row is the same, bit for bit, whatever other
    species share the call.

    >>> import pipeline.species as sp
    >>> ar = sp.Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                 mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0)
    >>> stacked_terms([ar, ar], [298.15]).s_r.shape
    (2, 1)
    """
    species_list = list(species_list)
    row, s, h, c = sorted_terms(species_list, T, pressure)
    if all(r == i for i, r in enumerate(row)):
        return Terms(s, h, c)
    return Terms(s[row], h[row], c[row])


#: order of the blocks :func:`sorted_terms` stacks the species in
_NONLINEAR, _LINEAR, _ATOM, _DIATOMIC = range(4)


def _kind(sp) -> int:
    if sp.diatomic is not None:
        return _DIATOMIC
    return {"nonlinear": _NONLINEAR, "linear": _LINEAR}.get(sp.shape, _ATOM)


def sorted_terms(species_list, T, pressure: float = C.bar):
    """The sums of :func:`stacked_terms`, with the species' rows in an order of their own.

    Returns ``(row, s_r, h_rt, cp_r)``: species ``i`` of ``species_list`` is row
    ``row[i]`` of the (S, m) arrays.  The rows are grouped by model (rigid
    nonlinear, rigid linear, atoms, diatomic level sums), each group by
    decreasing number of harmonic modes, so that each model's contribution
    is added to one contiguous block of rows.
    """
    species_list = list(species_list)
    T = np.atleast_1d(np.asarray(T, dtype=float))
    kinds = [_kind(sp) for sp in species_list]
    modes = [len(sp.frequencies) if k in (_NONLINEAR, _LINEAR) else 0 for sp, k in zip(species_list, kinds)]
    # by model, then by decreasing number of harmonic modes (harmonic_groups then fills row ranges)
    order = sorted(range(len(species_list)), key=lambda i: (kinds[i], -modes[i]))
    row = [0] * len(order)
    for r, i in enumerate(order):
        row[i] = r
    group = [species_list[i] for i in order]
    kinds = [kinds[i] for i in order]
    n_nonlinear = kinds.count(_NONLINEAR)
    n_linear = kinds.count(_LINEAR)

    mass = np.array([float(sp.mass) for sp in group])
    unique, which = np.unique(mass, return_inverse=True)  # isomers share a translation row
    if unique.size < mass.size:
        s = translation(unique[:, None], T, pressure).s_r[which]
    else:
        s = translation(mass[:, None], T, pressure).s_r  # a new (S, m) array
    h = np.full(s.shape, 2.5)  # translation: (H−H0)/RT = Cp/R = 5/2
    c = np.full(s.shape, 2.5)

    def add(rows, t):
        s[rows] += t.s_r
        h[rows] += t.h_rt
        c[rows] += t.cp_r

    if n_nonlinear:
        block = group[:n_nonlinear]
        add(slice(0, n_nonlinear), nonlinear_rotor(
            theta(np.array([sp.rotational_constants for sp in block], dtype=float)),
            np.array([sp.symmetry for sp in block]), T, np.array([sp.optical_isomers for sp in block])))
    if n_linear:
        block = group[n_nonlinear:n_nonlinear + n_linear]
        add(slice(n_nonlinear, n_nonlinear + n_linear), linear_rotors(
            np.array([float(theta(sp.rotational_constants[0])) for sp in block]), [sp.symmetry for sp in block], T))
    for r in range(n_nonlinear + n_linear, len(group)):
        if kinds[r] == _DIATOMIC:
            from pipeline.statmech.diatomic import diatomic_terms

            add(r, diatomic_terms(group[r], T))
    for lo, hi in ((0, n_nonlinear), (n_nonlinear, n_nonlinear + n_linear)):
        count = [modes[i] for i in order[lo:hi] if modes[i]]  # the block's first rows
        if count:
            # harmonic_frequencies of the block's species, one after the other
            freqs = np.array([f for sp in group[lo : lo + len(count)] for f in sp.frequencies], dtype=float)
            starts = np.cumsum([0] + count[:-1])
            add(slice(lo, lo + len(count)), Terms(*harmonic_groups(theta(freqs), starts, T)))
    ground = []  # (row, S/R) of species whose electronic levels all lie at zero energy
    for r, sp in enumerate(group):
        if sp.torsions:
            from pipeline.statmech.torsion import torsion_terms

            for tor in sp.torsions:
                add(r, torsion_terms(tor, T))
        if sp.electronic == _SINGLET:
            continue
        g = ground_entropy(sp.electronic)
        if g is None:
            add(r, electronic(sp.electronic, T))
        elif g != 0.0:  # electronic() gives S/R = ln g, no H, no Cp: the same sums, in one step
            ground.append((r, g))
    if ground:
        s[[r for r, _ in ground]] += np.array([g for _, g in ground])[:, None]
    return row, s, h, c


#: the electronic levels of a species that has no ``electronic:`` block (S/R += ln 1 = 0)
_SINGLET = ((1, 0.0),)
