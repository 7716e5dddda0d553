"""Diatomic molecules by a direct sum over their rovibrational levels.

Replaces the rigid rotor and harmonic oscillator for a species with a
``diatomic:`` block.  Levels come from the spectroscopic (Dunham-type)
constants of the ground electronic state,

    E(v, J) = G(v) + F_v(J),
    G(v)    = ωe(v+½) − ωexe(v+½)² + ωeye(v+½)³,
    F_v(J)  = B_v J(J+1) − D_v J²(J+1)² + H_e J³(J+1)³,
    B_v = Be − αe(v+½) + γe(v+½)²,   D_v = D_e + βe(v+½),

summed over every bound level (cutoff rule in :func:`diatomic_levels`).
Homonuclear molecules carry nuclear-spin statistical weights (see
:func:`spin_weights`); the electronic levels of the species' ``electronic:``
block multiply in separately, each excited state taken with the ground
state's rovibrational manifold.
"""

from __future__ import annotations

import math

import numpy as np

from pipeline.statmech.terms import Terms, level_sum
from pipeline.units import theta

#: levels more than DEPTH·kT_max above the ground level are dropped
#: (weight below e^-60 ≈ 1e-26 at every temperature of the grid)
DEPTH = 60.0


def spin_weights(nuclear_spin: float | None, state_symmetry: str = "") -> tuple[float, float]:
    """Nuclear-spin weights of even and odd J, per (2I+1)² spin states.

    With I the spin of each nucleus there are (2I+1)(I+1) exchange-symmetric and
    (2I+1)I antisymmetric spin functions.  In a ground state of exchange
    symmetry g+ or u− the even-J rotational functions are symmetric (odd-J
    antisymmetric); g− or u+ reverse this.  The total function must be
    symmetric for bosons (integer I) and antisymmetric for fermions
    (half-integer I), which fixes which spin set goes with which J.  Weights
    are divided by (2I+1)², so nuclear-spin entropy R ln(2I+1)² is excluded
    (the convention of the thermochemical tables) and at high T the sum tends
    to the classical q/σ with σ = 2.  Heteronuclear: (1, 1).

    Parameters
    ----------
    nuclear_spin : float or None
        I of each nucleus (None: heteronuclear).
    state_symmetry : str
        ``g+``, ``g-``, ``u+`` or ``u-``.

    Returns
    -------
    (weight of even J, weight of odd J) [-].

    Examples
    --------
    >>> spin_weights(0.5, "g+")     # H2: para (even J) 1, ortho (odd J) 3, per 4
    (0.25, 0.75)
    >>> spin_weights(0.0, "g-")     # 16O2: only odd N
    (0.0, 1.0)
    >>> spin_weights(1.0, "g+")     # 14N2: ortho (even) 6, para (odd) 3, per 9
    (0.6666666666666666, 0.3333333333333333)

    Reference: G. Herzberg, *Spectra of Diatomic Molecules*, 2nd ed. (1950),
    ch. III, §2f; McQuarrie, *Statistical Mechanics* (1976), §6-5.
    """
    if nuclear_spin is None:
        return 1.0, 1.0
    g = 2 * nuclear_spin + 1
    sym, anti = g * (nuclear_spin + 1), g * nuclear_spin
    even_symmetric = state_symmetry in ("g+", "u-")
    boson = float(nuclear_spin).is_integer()
    # weight of the J whose rotation×electronic function is symmetric
    w_sym = sym if boson else anti
    w_anti = anti if boson else sym
    even, odd = (w_sym, w_anti) if even_symmetric else (w_anti, w_sym)
    return even / g**2, odd / g**2


def dissociation_limit(d) -> float:
    """D0 [m^-1]: the given ``dissociation`` or the Morse estimate.

    Morse: De = ωe²/(4ωexe), D0 = De − G(0).

    >>> from pipeline.species import Diatomic
    >>> round(dissociation_limit(Diatomic(omega_e=1e5, omega_e_x_e=1e3, B_e=100.0)) / 100, 1)
    24502.5
    """
    if d.dissociation is not None:
        return float(d.dissociation)
    return float(d.omega_e**2 / (4 * d.omega_e_x_e) - _vib(d, np.array([0.0]))[0])


def _vib(d, v):
    x = v + 0.5
    return d.omega_e * x - d.omega_e_x_e * x**2 + d.omega_e_y_e * x**3


def diatomic_levels(d, T_max: float, ground_degeneracy: int = 1):
    """Rovibrational levels E(v,J) [m^-1] above the lowest one, and weights.

    Cutoff rule (bound levels only): v runs while G(v) still rises
    (ΔG(v+½) > 0) and G(v) − G(0) ≤ D0; J runs while F_v(J) still rises
    (dF/d[J(J+1)] = B_v − 2 D_v J(J+1) + 3 H_e J²(J+1)² > 0, before the
    centrifugal terms turn the truncated series over) and E(v,J) − E(0,0) ≤ D0,
    the dissociation energy of the non-rotating molecule.  Quasi-bound levels above that asymptote (held only by the
    centrifugal barrier) are left out.  Levels above DEPTH·kT_max, which
    weigh nothing, are dropped too.  Degeneracy: (2J+1) times the
    nuclear-spin weight of J (:func:`spin_weights`); zero-weight levels are
    removed, so the lowest level returned is the true ground level.

    Excited electronic states listed in ``d.excited`` (term energy Te, degeneracy
    g_s, own constants) add their own manifolds, offset by Te + G_s(0) − G_X(0)
    and weighted g_s / g_X, with g_X = ``ground_degeneracy`` (the ground
    level's degeneracy in the species' ``electronic:`` block, which multiplies
    every state; exact when that block holds the ground level only).  Each
    state is cut at its own D0.

    Parameters
    ----------
    d : :class:`pipeline.species.Diatomic`
        Constants [m^-1].
    T_max : float
        Highest temperature the levels will serve [K].
    ground_degeneracy : int
        g_X, the electronic degeneracy of the ground level.

    Returns
    -------
    (energies [m^-1] from the lowest kept level, degeneracies [-]).

    Examples
    --------
    >>> from pipeline.species import Diatomic
    >>> e, g = diatomic_levels(Diatomic(omega_e=2e5, omega_e_x_e=1e3, B_e=200.0), 300.0)
    >>> (e[:3] / 100).round(6).tolist(), g[:3].tolist()
    ([0.0, 4.0, 12.0], [1.0, 3.0, 5.0])

    Reference: G. Herzberg, *Spectra of Diatomic Molecules*, 2nd ed. (1950),
    eqs. III,94 and IV,10; J. L. Dunham, Phys. Rev. 41, 721 (1932).
    """
    ceiling = DEPTH * T_max / theta(1.0)  # [m^-1]
    parts = [_state_levels(d, 0.0, 1.0, ceiling)]
    g0 = float(_vib(d, np.array([0.0]))[0])
    for energy, degeneracy, ds in d.excited:
        # term energy Te of the state plus its own zero-point level, from X(v=0)
        offset = energy + float(_vib(ds, np.array([0.0]))[0]) - g0
        if offset <= ceiling:
            parts.append(_state_levels(ds, offset, degeneracy / ground_degeneracy, ceiling))
    e = np.concatenate([p[0] for p in parts])
    g = np.concatenate([p[1] for p in parts])
    return e - e.min(), g


def _state_levels(d, offset: float, weight: float, ceiling: float):
    """Bound levels of one electronic state, ``offset`` [m^-1] above X(v=0, J=0)."""
    D0 = dissociation_limit(d)
    even_w, odd_w = spin_weights(d.nuclear_spin, d.state_symmetry)
    cap = min(D0, ceiling - offset)  # [m^-1] above this state's (v=0, J=0)
    G0 = float(_vib(d, np.array([0.0]))[0])
    energies, weights = [], []
    v = 0
    while True:
        Gv = float(_vib(d, np.array([float(v)]))[0]) - G0
        if Gv > cap:
            break
        x = v + 0.5
        Bv = d.B_e - d.alpha_e * x + d.gamma_e * x * x
        if Bv <= 0:
            break
        Dv = d.D_e + d.beta_e * x
        jmax = _j_bound(Bv, Dv, cap - Gv)
        if d.H_e > 0 and Dv > 0:  # H_e J³(J+1)³ lifts F: extend, the E ≤ cap test trims it
            jmax = int(jmax * 1.5) + 2
        J = np.arange(jmax + 1, dtype=float)
        jj = J * (J + 1)
        F = Bv * jj - Dv * jj**2 + d.H_e * jj**3
        E = Gv + F
        rising = Bv - 2 * Dv * jj + 3 * d.H_e * jj**2 > 0
        keep = np.logical_and.accumulate(rising) & (E <= cap)
        w = np.where(J % 2 == 0, even_w, odd_w) * weight
        if d.spin_orbit:
            for comp, deg in _doublet_pi_components(Bv, Dv, J, d.spin_orbit):
                ok = keep & (w * deg > 0) & (Gv + comp <= cap)
                energies.append(Gv + comp[ok] + offset)
                weights.append((w * deg)[ok])
        elif d.spin_spin or d.spin_rotation:
            # J here is N; the three fine-structure components of each N
            for comp, deg in _triplet_components(Bv * jj - Dv * jj**2 + d.H_e * jj**3, J, d):
                ok = keep & (w * deg > 0)
                energies.append(Gv + comp[ok] + offset)
                weights.append((w * deg)[ok])
        else:
            ok = keep & (w > 0)
            energies.append(E[ok] + offset)
            weights.append((w * (2 * J + 1))[ok])
        dG = float(_vib(d, np.array([v + 1.0]))[0] - _vib(d, np.array([float(v)]))[0])
        if dG <= 0:
            break
        v += 1
    return np.concatenate(energies), np.concatenate(weights)


def _j_bound(Bv: float, Dv: float, room: float) -> int:
    """Largest J worth generating for F(J) = B_v J(J+1) − D_v [J(J+1)]² ≤ ``room`` [m^-1].

    With D_v > 0, F lies below B_v J(J+1), so that simple bound would drop bound
    levels: take the smaller root of D_v x² − B_v x + room = 0 (x = J(J+1)), or
    the top of the parabola, x = B_v/(2 D_v), when F never reaches ``room``.

    >>> _j_bound(1.0, 0.0, 12.0), _j_bound(1.0, 0.01, 30.0) > _j_bound(1.0, 0.0, 30.0)
    (5, True)
    """
    if Dv > 0:
        disc = Bv * Bv - 4.0 * Dv * room
        x = (Bv - math.sqrt(disc)) / (2.0 * Dv) if disc > 0 else Bv / (2.0 * Dv)
    else:
        x = room / Bv
    return int(math.ceil(0.5 * (-1 + math.sqrt(1 + 4 * x)))) + 2


def _doublet_pi_components(Bv, Dv, N, A):
    """Levels of a ²Π state in intermediate coupling: [(energies, degeneracies)].

    Hill–Van Vleck, Y = A/B_v, x = J + ½:
    F∓(J) = B_v[x² − 1 ∓ ½√(4x² + Y(Y−4))] − D_v [N(N+1)]²,
    the lower root with N = J − ½, the upper with N = J + ½ (case-(b) labels,
    which also index the arrays here).  J = ½ has one level only,
    B_v − A/2 (the lower root when Y > 2, the upper otherwise).  Each J of
    each component is a Λ-doublet: degeneracy 2(2J+1), divided by 4 because
    the species' ``electronic:`` block gives the whole ²Π term its
    degeneracy 4 (2 for Λ × 2 for spin).

    Reference: E. L. Hill and J. H. Van Vleck, Phys. Rev. 32, 250 (1928);
    G. Herzberg, *Spectra of Diatomic Molecules* (1950), eq. V,28.
    """
    Y = A / Bv
    # lower root: N = 0, 1, … with J = N + ½ (x = N + 1)
    x = N + 1.0
    lower = Bv * (x * x - 1 - 0.5 * np.sqrt(4 * x * x + Y * (Y - 4))) - Dv * (N * (N + 1)) ** 2
    lower_deg = 2 * (2 * (N + 0.5) + 1) / 4
    # upper root: N = 1, 2, … with J = N − ½ (x = N)
    x = np.maximum(N, 1).astype(float)  # N = 0 has no upper level (weight 0 below)
    upper = Bv * (x * x - 1 + 0.5 * np.sqrt(4 * x * x + Y * (Y - 4))) - Dv * (N * (N + 1)) ** 2
    upper_deg = np.where(N >= 1, 2 * (2 * (N - 0.5) + 1) / 4, 0.0)
    # J = ½ exists once: drop the root that is not B − A/2
    if Y > 2:
        upper_deg = np.where(N == 1, 0.0, upper_deg)
    else:
        lower_deg = np.where(N == 0, 0.0, lower_deg)
    return [(lower, lower_deg), (upper, upper_deg)]


def _triplet_components(F, N, d):
    """Fine structure of a ³Σ state: [(energies, degeneracies)] for J = N, N+1, N−1.

    Case (b) basis, H = F(N) + γ N·S + (2λ/3)(3S_z² − S²):
    J = N:  F(N) + 2λ/3 − γ;
    J = N±1 from the 2×2 block of N = J−1 and N = J+1 for each J, diagonal
    F(J−1) + γ(J−1) − (2λ/3)(J−1)/(2J+1) and F(J+1) − γ(J+2) − (2λ/3)(J+2)/(2J+1),
    off-diagonal 2λ√(J(J+1))/(2J+1); the lower root is J = N+1 of the lower N.
    N keeps its parity in the mixing, so the nuclear-spin weights of N apply.
    Degeneracies (2J+1)/3: the species' ``electronic:`` block keeps the
    multiplicity 3 as the term's degeneracy, which these levels redistribute.

    Reference: R. Schlapp, Phys. Rev. 51, 342 (1937); J. M. Brown and
    A. Carrington, *Rotational Spectroscopy of Diatomic Molecules* (2003), §9.
    """
    lam, gam = d.spin_spin, d.spin_rotation
    n = N.astype(int)
    Fx = np.append(F, [F[-1], F[-1]])  # F(N+1), F(N+2) at the end are never kept
    mid = F + 2 * lam / 3 - gam
    mid_deg = np.where(n >= 1, (2 * N + 1) / 3, 0.0)

    def block(J):  # J ≥ 1: roots of the N = J−1, J+1 block
        a = Fx[J - 1] + gam * (J - 1) - (2 * lam / 3) * (J - 1) / (2 * J + 1)
        b = Fx[J + 1] - gam * (J + 2) - (2 * lam / 3) * (J + 2) / (2 * J + 1)
        off = 2 * lam * np.sqrt(J * (J + 1.0)) / (2 * J + 1)
        r = np.sqrt(((a - b) / 2) ** 2 + off**2)
        return (a + b) / 2 - r, (a + b) / 2 + r

    # J = N+1 (lower root of the block of J = N+1), for every N
    up, _ = block(n + 1)
    up_deg = (2 * N + 3) / 3
    # J = N−1 (upper root of the block of J = N−1) for N ≥ 2; N = 1, J = 0 alone
    lo = np.empty_like(F)
    jl = np.maximum(n - 1, 1)
    _, hi = block(jl)
    lo[:] = hi
    if n.size > 1:
        lo[1] = F[1] - 2 * gam - 4 * lam / 3  # N = 1, J = 0: only N = 1 has J = 0
    lo_deg = np.where(n >= 1, (2 * N - 1) / 3, 0.0)
    return [(mid, mid_deg), (up, up_deg), (lo, lo_deg)]


def diatomic_terms(species, T) -> Terms:
    """Rotation and vibration of a diatomic by direct level sum.

    q_rv = Σ_v Σ_J w_J (2J+1) exp(−h c E(v,J)/k T) over the bound levels of
    :func:`diatomic_levels`; S/R, (H−H0)/RT, Cv/R from
    :func:`pipeline.statmech.terms.level_sum`.  Heteronuclear molecules take
    σ = 1; homonuclear ones get the symmetry from the nuclear-spin weights
    (equilibrium ortho/para mixture at every T, nuclear-spin entropy
    excluded), so ``species.symmetry`` (2) is not applied a second time.

    Parameters
    ----------
    species : :class:`pipeline.species.Species` with a ``diatomic`` block.
    T : array
        Temperatures [K].

    Returns
    -------
    :class:`Terms` of rotation + vibration.

    Examples
    --------
    Nearly harmonic, at T ≫ θ_rot: Cv/R = 1 (rotation) + 0.006 (vibration,
    θ_v = 2878 K):

    >>> from types import SimpleNamespace as NS
    >>> from pipeline.species import Diatomic
    >>> d = Diatomic(omega_e=2000e2, omega_e_x_e=1e-3, B_e=2e2, dissociation=8e6)
    >>> t = diatomic_terms(NS(diatomic=d, symmetry=1), [300.0])
    >>> round(float(t.cp_r[0]), 3)
    1.006

    Reference: J. E. Mayer and M. G. Mayer, *Statistical Mechanics* (1940),
    ch. 7; L. V. Gurvich, I. V. Veyts and C. B. Alcock,
    *Thermodynamic Properties of Individual Substances*, 4th ed., vol. 1
    (Hemisphere, 1989), ch. 2 (direct summation over levels).
    """
    T = np.atleast_1d(np.asarray(T, dtype=float))
    d = species.diatomic
    e, g = diatomic_levels(d, float(T.max()), species.electronic[0][0] if d.excited else 1)
    out = level_sum(theta(e), g, T)
    if d.nuclear_spin is None and species.symmetry != 1:
        out = Terms(out.s_r - math.log(species.symmetry), out.h_rt, out.cp_r)
    return out
