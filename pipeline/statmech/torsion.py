"""One-dimensional hindered internal rotation (torsion) by its energy levels.

The Hamiltonian of a rigid top of reduced moment I turning in the potential

    V(φ) = V₁/2 (1 − cos nφ) + Σ_{k≥2} V_k/2 (1 − cos knφ),

    Ĥ = −(ħ²/2I) d²/dφ² + V(φ),

is diagonalised in the free-rotor basis e^{imφ}/√(2π): ⟨m|Ĥ|m⟩ = B m² + Σ V_k/2,
⟨m|Ĥ|m ± kn⟩ = −V_k/4, with B = ħ²/2I.  Only m ≡ r (mod n) couple, so the
matrix splits into n banded blocks, each diagonalised on its own.  The basis
grows until every level that matters (below :data:`DEPTH`·kT_max) is
converged; the partition function is the level sum over one full turn divided
by the internal symmetry number σ_int.
"""

from __future__ import annotations

import math

import numpy as np

from pipeline.codata import C
from pipeline.statmech.terms import Terms, level_sum

#: levels more than DEPTH·kT_max above the ground level are left out (weight < e^-50)
DEPTH = 50.0
#: basis convergence: kept levels move by less than this [K] when the basis grows
CONVERGED = 1e-7


def rotor_constant(moment: float) -> float:
    """Rotational constant of a torsional top as a temperature.

    θ_B = ħ² / (2 I k)

    Parameters
    ----------
    moment : float
        Reduced moment of inertia I [kg m^2].

    Returns
    -------
    θ_B [K].

    Examples
    --------
    >>> I = 1.6 * C.atomic_mass * 1e-20       # 1.6 u Å² (ethane-like)
    >>> round(rotor_constant(I), 3)
    15.159

    Reference: K. S. Pitzer and W. D. Gwinn, J. Chem. Phys. 10, 428 (1942).
    """
    return C.hbar**2 / (2 * moment * C.k)


def _potential_terms(torsion) -> list[tuple[int, float]]:
    """[(harmonic index k·n, V_k as a temperature [K])] of the cosine series."""
    terms = [(torsion.periodicity, torsion.barrier / C.R)]
    for k, vk in enumerate(torsion.fourier, start=2):
        terms.append((k * torsion.periodicity, vk / C.R))
    return [(p, v) for p, v in terms if v != 0.0]


def torsion_levels(torsion, T_max: float) -> np.ndarray:
    """Energy levels [K] of a hindered rotor, from the ground level, up to DEPTH·T_max.

    Parameters
    ----------
    torsion : :class:`pipeline.species.Torsion`
        Barrier and Fourier terms [J/mol], periodicity n, reduced moment [kg m^2].
    T_max : float
        Highest temperature the levels serve [K].

    Returns
    -------
    Sorted levels θ_i = (E_i − E_0)/k [K] over one full turn (each counted once).

    Examples
    --------
    Free rotor (no barrier): 0, B, B, 4B, 4B, …

    >>> from pipeline.species import Torsion
    >>> tor = Torsion(replaces=2e4, barrier=0.0, periodicity=3, symmetry=3,
    ...               moment=C.hbar**2 / (2 * C.k * 10.0))     # θ_B = 10 K
    >>> torsion_levels(tor, 2.0)[:5].round(9).tolist()
    [0.0, 10.0, 10.0, 40.0, 40.0]

    Reference: J. D. Lewis, T. B. Malloy, T. H. Chao and J. Laane, J. Mol.
    Struct. 12, 427 (1972) (free-rotor basis); K. S. Pitzer and W. D. Gwinn,
    J. Chem. Phys. 10, 428 (1942).
    """
    from scipy.linalg import eigvals_banded

    n = torsion.periodicity
    theta_b = rotor_constant(torsion.moment)
    terms = _potential_terms(torsion)
    v_total = sum(abs(v) for _, v in terms)
    v_shift = sum(v for _, v in terms) / 2.0
    e_cut = DEPTH * T_max
    # block r: m = r + n j; a Fourier term of index p = k n couples j and j ± k
    bands = [(p // n, -v / 4.0) for p, v in terms]
    width = max((k for k, _ in bands), default=0)

    def levels(j_max: int) -> np.ndarray:
        out = []
        for r in range(n):
            j = np.arange(-j_max, j_max + 1)
            m = r + n * j
            ab = np.zeros((width + 1, j.size))  # upper banded storage
            ab[width] = theta_b * m.astype(float) ** 2 + v_shift
            for k, c in bands:
                ab[width - k, k:] += c
            top = e_cut + 2 * v_total + v_shift
            vals = eigvals_banded(ab, select="v", select_range=(-np.inf, top))
            out.append(np.real(vals))
        return np.sort(np.concatenate(out))

    # free-rotor levels B m² reach e_cut + barriers at |m| = sqrt(...); start there
    j_max = int(math.ceil(math.sqrt((e_cut + 2 * v_total) / theta_b) / n)) + 8
    prev = levels(j_max)
    while True:
        j_max = int(1.5 * j_max) + 4
        cur = levels(j_max)
        lo = min(prev.size, cur.size)
        keep = cur[:lo] - cur[0] <= e_cut
        if np.max(np.abs(cur[:lo][keep] - prev[:lo][keep]), initial=0.0) < CONVERGED:
            break
        prev = cur
    cur = cur - cur[0]
    return cur[cur <= e_cut]


def torsion_terms(torsion, T) -> Terms:
    """Thermodynamic functions of one hindered internal rotor.

    q = (1/σ_int) Σ_i exp(−θ_i/T) over the levels of :func:`torsion_levels`;
    energies from the torsional ground level.  Limits: V → 0 gives the free
    rotor q = (1/σ_int)√(π T/θ_B); V ≫ kT gives n/σ_int harmonic oscillators of
    wavenumber ν̃ = (n / 2πc) √(V₁ / 2I) (one in each well).

    Parameters
    ----------
    torsion : :class:`pipeline.species.Torsion`
    T : array
        Temperatures [K].

    Returns
    -------
    :class:`Terms` (Cv/R → ½ at high T).

    Examples
    --------
    >>> from pipeline.species import Torsion
    >>> tor = Torsion(replaces=2e4, barrier=0.0, periodicity=3, symmetry=3,
    ...               moment=C.hbar**2 / (2 * C.k * 10.0))
    >>> round(float(torsion_terms(tor, [1000.0]).cp_r[0]), 6)   # free rotor
    0.5

    Reference: K. S. Pitzer and W. D. Gwinn, J. Chem. Phys. 10, 428 (1942);
    D. G. Truhlar, J. Comput. Chem. 12, 266 (1991) (levels and limits).
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    th = torsion_levels(torsion, float(T.max()))
    out = level_sum(th, np.ones_like(th), T)
    return Terms(out.s_r - math.log(torsion.symmetry), out.h_rt, out.cp_r)
