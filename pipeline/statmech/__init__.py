"""Partition functions: translation, rotation, vibration, electronic, and the
beyond-rigid-rotor models (diatomic level sums, hindered torsions).

:func:`species_terms` combines them for one :class:`~pipeline.species.Species`.
Nothing here reads files.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as C

from pipeline.statmech.electronic import electronic
from pipeline.statmech.rotation import linear_rotor, nonlinear_rotor
from pipeline.statmech.terms import Terms, level_sum
from pipeline.statmech.translation import translation
from pipeline.statmech.vibration import harmonic
from pipeline.units import theta

__all__ = [
    "Terms", "level_sum", "translation", "linear_rotor", "nonlinear_rotor",
    "harmonic", "electronic", "species_terms", "harmonic_frequencies",
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
    of rotor and vibrations.
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    total = translation(species.mass, T, pressure)
    if species.diatomic is not None:
        from pipeline.statmech.diatomic import diatomic_terms

        total = total + diatomic_terms(species, T)
    elif species.shape == "linear":
        total = total + linear_rotor(float(theta(species.rotational_constants[0])), species.symmetry, T)
    elif species.shape == "nonlinear":
        total = total + nonlinear_rotor(
            theta(np.asarray(species.rotational_constants)), species.symmetry, T, species.optical_isomers
        )
    if species.shape != "atom" and species.diatomic is None:
        total = total + harmonic(theta(harmonic_frequencies(species)), T)
    if species.torsions:
        from pipeline.statmech.torsion import torsion_terms

        for tor in species.torsions:
            total = total + torsion_terms(tor, T)
    total = total + electronic(species.electronic, T)
    return total
