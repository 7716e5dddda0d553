"""Molecular geometry → principal moments of inertia, rotational constants, linearity.

Atoms carry the mass of their most abundant isotope (table :data:`ISOTOPE`),
because spectroscopic rotational constants and the geometries they come from
describe that isotopologue.  Translation keeps using the standard atomic
weight of the formula (see :mod:`pipeline.elements`); the two differ by far
less than the accuracy of any input.

Nothing here reads files; :mod:`pipeline.blocks` validates the input.
"""

from __future__ import annotations

import math

import numpy as np

from pipeline.codata import C

#: symbol → (atomic mass [u] of the most abundant isotope, its nuclear spin I).
#: Masses: AME2020 atomic mass evaluation (M. Wang et al., Chinese Phys. C 45,
#: 030003, 2021); nuclear spins: NUBASE2020 (F. G. Kondev et al., Chinese
#: Phys. C 45, 030001, 2021).  Values transcribed from memory of those tables.
ISOTOPE: dict[str, tuple[float, float]] = {
    "H": (1.00782503223, 0.5),     # 1H
    "D": (2.01410177812, 1.0),     # 2H, accepted as its own symbol in geometries
    "He": (4.00260325413, 0.0),    # 4He
    "C": (12.0, 0.0),              # 12C (defines the unit)
    "N": (14.00307400443, 1.0),    # 14N
    "O": (15.99491461957, 0.0),    # 16O
    "F": (18.99840316273, 0.5),    # 19F
    "Ne": (19.9924401762, 0.0),    # 20Ne
    "Si": (27.97692653465, 0.0),   # 28Si
    "P": (30.97376199842, 0.5),    # 31P
    "S": (31.9720711744, 0.0),     # 32S
    "Cl": (34.968852682, 1.5),     # 35Cl
    "Ar": (39.9623831237, 0.0),    # 40Ar
    "Br": (78.9183376, 1.5),       # 79Br
    "I": (126.9044719, 2.5),       # 127I
}

#: an atom set is linear when its smallest principal moment is below this
#: fraction of the largest (input coordinates carry ~1e-4 Å of rounding)
LINEAR_TOLERANCE = 1e-4

#: moments [kg m^2] per [u Å^2]
_U_A2 = C.atomic_mass * 1e-20


def inertia_tensor(masses, coords) -> np.ndarray:
    """Inertia tensor about the centre of mass [u Å²].

    I = Σ_i m_i (|r_i|² 𝟙 − r_i r_iᵀ), r_i measured from the centre of mass.

    >>> inertia_tensor([1.0, 1.0], [[0, 0, -1], [0, 0, 1]]).diagonal().tolist()
    [2.0, 2.0, 0.0]

    Reference: H. Goldstein, *Classical Mechanics*, 2nd ed. (1980), §5-3.
    """
    m = np.asarray(masses, dtype=float)
    r = np.asarray(coords, dtype=float).reshape(-1, 3)
    r = r - (m[:, None] * r).sum(axis=0) / m.sum()
    return np.eye(3) * (m * (r * r).sum(axis=1)).sum() - np.einsum("i,ij,ik->jk", m, r, r)


def principal_moments(masses, coords) -> np.ndarray:
    """Principal moments of inertia about the centre of mass, ascending.

    I = Σ_i m_i (|r_i|² 𝟙 − r_i r_iᵀ) with r_i from the centre of mass;
    the moments are the eigenvalues of this tensor.

    Parameters
    ----------
    masses : array (n,)
        Atomic masses [u].
    coords : array (n, 3)
        Cartesian coordinates [Å].

    Returns
    -------
    I_a ≤ I_b ≤ I_c [u Å²].

    Examples
    --------
    CO with r = 1.128 Å (two point masses, I = μ r²):

    >>> I = principal_moments([12.0, 15.99491461957], [[0, 0, 0], [0, 0, 1.128]])
    >>> round(float(I[2]), 4), round(float(I[0]), 12)
    (8.7237, 0.0)

    Reference: H. Goldstein, *Classical Mechanics*, 2nd ed. (1980), §5-3.
    """
    moments = np.linalg.eigvalsh(inertia_tensor(masses, coords))
    return np.where(np.abs(moments) < 1e-12 * max(1.0, moments.max()), 0.0, moments)


def is_linear(moments) -> bool:
    """True when the smallest principal moment vanishes (all atoms on a line).

    >>> is_linear([0.0, 8.72, 8.72]), is_linear([0.6, 1.2, 1.8])
    (True, False)
    """
    m = sorted(float(x) for x in moments)
    return m[0] <= LINEAR_TOLERANCE * m[2]


def rotational_constant(moment_u_a2):
    """Rotational constant of a moment of inertia.

    B̃ = h / (8 π² c I)

    Parameters
    ----------
    moment_u_a2 : float or array
        Moment of inertia [u Å²].

    Returns
    -------
    B̃ [m^-1].

    Examples
    --------
    >>> round(float(rotational_constant(8.7237)) / 100, 4)   # CO, cm-1
    1.9324

    Reference: G. Herzberg, *Spectra of Diatomic Molecules* (1950), eq. III,12.
    """
    return C.h / (8 * math.pi**2 * C.c * np.asarray(moment_u_a2, dtype=float) * _U_A2)


def torsion_moment(masses, coords, top, axis) -> float:
    """Reduced moment of inertia of a rigid top turning about a bond.

    The top (atoms ``top``) turns at unit rate about the line through the two
    ``axis`` atoms while the whole molecule moves so that its linear and angular
    momentum stay zero (Pitzer's reduced moment):

      v_a = u × (r_a − r_P) for top atoms, 0 for the frame, plus V (keeps Σ m v = 0),
      A = Σ m_a |v_a|²,  d = Σ m_a r_a × v_a  (r from the centre of mass),
      I_red = A − dᵀ I⁻¹ d,

    with I the inertia tensor of the whole molecule.  For a top on a symmetric
    axis through the centre of mass (ethane) this is A_top A_rest/(A_top + A_rest).

    Parameters
    ----------
    masses : array (n,)
        Atomic masses [u].
    coords : array (n, 3)
        Cartesian coordinates [Å].
    top : sequence of int
        Indices of the atoms of the rotating top (may include its axis atom).
    axis : (int, int)
        Indices of the two atoms of the bond.

    Returns
    -------
    I_red [u Å²].

    Examples
    --------
    Two equal CH3 tops (H 1.0199 Å off the axis): half of one top's 3 m_H r²:

    >>> r = 1.0199; h = 1.00782503223
    >>> xyz = [[0, 0, 0.7655], [0, 0, -0.7655]] + [
    ...     [r * math.cos(a), r * math.sin(a), s * 1.1611] for s, a0 in ((1, 0), (-1, math.pi / 3))
    ...     for a in (a0, a0 + 2 * math.pi / 3, a0 + 4 * math.pi / 3)]
    >>> round(torsion_moment([12.0, 12.0] + [h] * 6, xyz, top=[0, 2, 3, 4], axis=(0, 1)), 4)
    1.5725

    Reference: K. S. Pitzer, J. Chem. Phys. 14, 239 (1946); J. E. Kilpatrick
    and K. S. Pitzer, J. Chem. Phys. 17, 1064 (1949).
    """
    m = np.asarray(masses, dtype=float)
    r = np.asarray(coords, dtype=float).reshape(-1, 3)
    r = r - (m[:, None] * r).sum(axis=0) / m.sum()
    a, b = axis
    u = (r[b] - r[a]) / np.linalg.norm(r[b] - r[a])
    in_top = np.zeros(m.size, dtype=bool)
    in_top[list(top)] = True
    v = np.where(in_top[:, None], np.cross(u, r - r[a]), 0.0)
    v = v - (m[:, None] * v).sum(axis=0) / m.sum()  # no net translation
    big_a = float((m * (v * v).sum(axis=1)).sum())
    d = (m[:, None] * np.cross(r, v)).sum(axis=0)
    return big_a - float(d @ np.linalg.solve(inertia_tensor(m, r), d))
