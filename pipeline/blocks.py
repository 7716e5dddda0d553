"""Validation of the advanced species-file blocks: ``diatomic:``, ``torsions:``
and ``rotor: geometry:``.

Each reader takes the file's :class:`pipeline.species._Checker` (so every
message names file, key path, the bad value and what is expected) and returns
SI values (wavenumbers [m^-1], energies [J/mol], moments [kg m^2]) or ``None``
when the block is unusable.  Nothing here computes thermochemistry.
"""

from __future__ import annotations

import dataclasses
from typing import Any

from pipeline import units
from pipeline.codata import C
from pipeline.geometry import (
    ISOTOPE,
    LINEAR_TOLERANCE,
    is_linear,
    principal_moments,
    rotational_constant,
    torsion_moment,
)
from pipeline.species import Diatomic, Torsion, _show

#: keys of a ``diatomic:`` block → Diatomic field (all wavenumbers)
_DIATOMIC_KEYS = ("omega_e", "omega_e_x_e", "omega_e_y_e", "B_e", "alpha_e", "gamma_e", "D_e", "beta_e", "H_e",
                  "dissociation", "spin_spin", "spin_rotation", "spin_orbit")
_DIATOMIC_REQUIRED = ("omega_e", "omega_e_x_e", "B_e")
#: exchange symmetry of a homonuclear ground state: g+ and u− are symmetric
STATE_SYMMETRIES = ("g+", "g-", "u+", "u-")

_TORSION_KEYS = {"replaces", "barrier", "barrier_unit", "periodicity", "symmetry", "moment", "moment_unit", "fourier",
                 "barrier_uncertainty", "top", "axis"}
_BARRIER_UNITS = ("kJ/mol", "kcal/mol", "J/mol", "cm-1")


def read_diatomic(ck, raw: Any, formula=None) -> Diatomic | None:
    """``diatomic:`` → :class:`Diatomic` (wavenumbers in [m^-1]).

    ``formula`` (element counts) decides whether the molecule is homonuclear;
    a homonuclear molecule then needs ``state_symmetry`` (g+, g-, u+, u-) of
    its ground electronic state for the nuclear-spin statistics.  An optional
    ``excited:`` list gives excited electronic states with their own
    constants, each with ``energy`` (Te, same unit) and ``degeneracy``.
    """
    m = ck.mapping(raw, "diatomic")
    if m is None:
        return None
    unit = ck.unit(m.get("unit"), "diatomic.unit", ("cm-1",), "cm-1")
    if unit is None:
        return None
    homonuclear = formula is not None and len(formula) == 1 and formula[0][1] == 2
    spin = None
    if homonuclear:
        el = formula[0][0]
        if el not in ISOTOPE:
            ck.error("formula", f"no nuclear spin is tabulated for {el!r} (needed for a homonuclear 'diatomic' block)")
        else:
            spin = ISOTOPE[el][1]
    ground = _read_state(ck, m, "diatomic", units.WAVENUMBER[unit], homonuclear, formula, spin, excited=False)
    states = []
    raw_ex = m.get("excited")
    if raw_ex is not None:
        if not isinstance(raw_ex, list):
            ck.error("diatomic.excited", f"{_show(raw_ex)} is not a list of excited-state mappings")
        else:
            for i, item in enumerate(raw_ex):
                path = f"diatomic.excited[{i}]"
                sm = ck.mapping(item, path)
                if sm is None:
                    continue
                st = _read_state(ck, sm, path, units.WAVENUMBER[unit], homonuclear, formula, spin, excited=True)
                te = ck.number(sm.get("energy"), f"{path}.energy", positive=True) if "energy" in sm else None
                g = ck.integer(sm.get("degeneracy"), f"{path}.degeneracy", minimum=1) if "degeneracy" in sm else None
                if st is not None and te is not None and g is not None:
                    states.append((te * units.WAVENUMBER[unit], g, st))
    if ck.failed or ground is None:
        return None
    return dataclasses.replace(ground, excited=tuple(states))


def _read_state(ck, m: dict, path: str, f: float, homonuclear: bool, formula, spin, excited: bool):
    """The spectroscopic constants of one electronic state (wavenumbers × ``f``)."""
    allowed = set(_DIATOMIC_KEYS) | {"state_symmetry"}
    allowed |= {"energy", "degeneracy"} if excited else {"unit", "excited"}
    required = _DIATOMIC_REQUIRED + (("energy", "degeneracy") if excited else ())
    ck.keys(m, allowed, path, required=required)
    vals: dict[str, float] = {}
    for key in _DIATOMIC_KEYS:
        if m.get(key) is None:
            continue
        positive = key in ("omega_e", "B_e", "dissociation")
        nonneg = key in ("omega_e_x_e", "D_e")
        x = ck.number(m[key], f"{path}.{key}", positive=positive, nonnegative=nonneg)
        if x is not None:
            vals[key] = x
    if any(k not in vals for k in _DIATOMIC_REQUIRED):
        return None
    w, wx = vals["omega_e"], vals["omega_e_x_e"]
    if wx >= 0.25 * w:
        ck.error(f"{path}.omega_e_x_e", f"{wx!r} is not small compared with omega_e = {w!r} (expected ωexe ≪ ωe)")
    if abs(vals.get("alpha_e", 0.0)) >= vals["B_e"]:
        ck.error(f"{path}.alpha_e", f"{vals['alpha_e']!r} must be smaller than B_e = {vals['B_e']!r}")
    if "dissociation" in vals and vals["dissociation"] <= 0.5 * w:
        ck.error(f"{path}.dissociation", f"{vals['dissociation']!r} lies below the zero-point level ≈ ωe/2")
    if "dissociation" not in vals and wx == 0:
        ck.error(f"{path}.dissociation", "missing; give D0 (the Morse estimate ωe²/4ωexe needs omega_e_x_e > 0)")
    sym = m.get("state_symmetry")
    which = "this state" if excited else "its ground state"
    if homonuclear and sym is None:
        ck.error(
            f"{path}.state_symmetry",
            f"missing; a homonuclear molecule needs the exchange symmetry of {which} "
            f"(one of: {', '.join(STATE_SYMMETRIES)}; e.g. H2, N2 X¹Σg⁺ → g+, O2 X³Σg⁻ → g-)",
        )
    if sym is not None:
        if sym not in STATE_SYMMETRIES:
            ck.error(f"{path}.state_symmetry", f"{_show(sym)} is not one of: {', '.join(STATE_SYMMETRIES)}")
            sym = None
        elif not homonuclear and formula is not None:
            ck.error(f"{path}.state_symmetry", "only a homonuclear molecule (two like atoms) has one; remove it")
    return Diatomic(
        **{k: v * f for k, v in vals.items()},
        nuclear_spin=spin,
        state_symmetry=sym or "",
    )


def check_fine_structure(ck, diatomic: Diatomic, electronic) -> None:
    """A level sum with explicit fine structure needs the whole term in ``electronic``.

    With ``spin_orbit`` (a ²Π ground state) the ground level must have
    degeneracy 4 and no separate level for the other Ω component; with
    ``spin_spin``/``spin_rotation`` (³Σ) degeneracy 3.
    """
    if diatomic.spin_orbit and (diatomic.spin_spin or diatomic.spin_rotation):
        ck.error("diatomic.spin_orbit", "a state is either ²Π (spin_orbit) or ³Σ (spin_spin, spin_rotation), not both")
        return
    want, term = (4, "²Π") if diatomic.spin_orbit else (3, "³Σ") if (diatomic.spin_spin or diatomic.spin_rotation) else (0, "")
    if not want:
        return
    g0 = electronic[0][0]
    if g0 != want:
        ck.error(
            "electronic.levels[0]",
            f"degeneracy {g0}; with the {term} fine structure in the diatomic level sum the ground term is "
            f"listed once with degeneracy {want} (e.g. [{want}, 0.0]); do not list its components separately",
        )
    if diatomic.spin_orbit:
        split = abs(diatomic.spin_orbit)
        for i, (g, e) in enumerate(electronic[1:], start=1):
            if e < 3 * split:
                ck.error(
                    f"electronic.levels[{i}]",
                    f"[{g}, {e / 100:g}] looks like the other ²Π spin-orbit component, which the level sum "
                    "already holds (spin_orbit); remove it",
                )


def read_torsions(ck, raw: Any, rotor: Any = None) -> tuple[Torsion, ...]:
    """``torsions:`` (a list of mappings) → tuple of :class:`Torsion` (SI units).

    ``replaces`` is stored as given [m^-1, unscaled]; the loader's mode
    check ties it to one listed frequency.  The reduced moment is either
    ``moment`` (``moment_unit``, default amu*angstrom^2) or, with a ``rotor:
    geometry:``, ``top`` (0-based indices of the rotating atoms) and ``axis``
    (the two atoms of the bond): Pitzer's reduced moment,
    :func:`pipeline.geometry.torsion_moment`.
    """
    if not isinstance(raw, list) or not raw:
        ck.error("torsions", f"{_show(raw)} is not a list of torsion mappings (- replaces: ..., barrier: ...)")
        return ()
    out = []
    for i, item in enumerate(raw):
        path = f"torsions[{i}]"
        m = ck.mapping(item, path)
        if m is None:
            continue
        ck.keys(m, _TORSION_KEYS, path, required=("replaces", "barrier", "periodicity", "symmetry"))
        if any(k not in m for k in ("replaces", "barrier", "periodicity", "symmetry")):
            continue
        replaces = ck.number(m["replaces"], f"{path}.replaces", positive=True)
        barrier = ck.number(m["barrier"], f"{path}.barrier", nonnegative=True)
        bunit = ck.unit(m.get("barrier_unit"), f"{path}.barrier_unit", _BARRIER_UNITS, "kJ/mol")
        n = ck.integer(m["periodicity"], f"{path}.periodicity", minimum=1)
        sigma = ck.integer(m["symmetry"], f"{path}.symmetry", minimum=1)
        munit = ck.unit(m.get("moment_unit"), f"{path}.moment_unit", units.MOMENT, "amu*angstrom^2")
        if "moment" in m:
            moment = ck.number(m["moment"], f"{path}.moment", positive=True)
            if "top" in m or "axis" in m:
                ck.error(path, "give either 'moment' or 'top' and 'axis' (from rotor.geometry), not both")
        elif "top" in m and "axis" in m:
            moment = _moment_from_geometry(ck, m, path, rotor)
            munit = "amu*angstrom^2"
        else:
            ck.error(f"{path}.moment", "missing required key (or give 'top' and 'axis' with a rotor.geometry)")
            continue
        fourier: list[float] | None = []
        if m.get("fourier") is not None:
            fourier = ck.numbers(m["fourier"], f"{path}.fourier")
        u_barrier = None
        if m.get("barrier_uncertainty") is not None:
            u_barrier = ck.number(m["barrier_uncertainty"], f"{path}.barrier_uncertainty", nonnegative=True)
            if u_barrier is None:
                continue
        if None in (replaces, barrier, bunit, n, sigma, moment, munit) or fourier is None:
            continue
        if n is not None and sigma is not None and n % sigma != 0:
            ck.error(
                f"{path}.symmetry",
                f"{sigma} does not divide the periodicity {n} (the internal symmetry number "
                "counts equivalent minima of one turn)",
            )
            continue
        e = units.MOLAR_ENERGY[bunit]
        out.append(
            Torsion(
                replaces=replaces * units.WAVENUMBER["cm-1"],
                barrier=barrier * e,
                periodicity=n,
                symmetry=sigma,
                moment=moment * units.MOMENT[munit],
                fourier=tuple(v * e for v in fourier),
                barrier_uncertainty=None if u_barrier is None else u_barrier * e,
            )
        )
    return tuple(out)


def read_geometry(ck, mapping: dict, shape: str | None, formula=None) -> tuple[float, ...] | None:
    """``rotor: geometry:`` → rotational constants [m^-1], sorted descending.

    ``geometry`` is a list of ``[symbol, x, y, z]`` rows in Å (``unit:
    angstrom``, the default, or ``bohr``); atoms take their most abundant
    isotope's mass (:data:`pipeline.geometry.ISOTOPE`).  The atoms must match
    ``formula`` and the linearity found must match ``shape``.  Returns one
    constant for a linear molecule, three (A ≥ B ≥ C) otherwise.
    """
    unit = mapping.get("unit", "angstrom")
    scale = _LENGTH
    if unit not in scale:
        ck.error("rotor.unit", f"{_show(unit)} is not a length unit for a geometry (expected one of: angstrom, bohr)")
        return None
    atoms = _geometry_atoms(ck, mapping["geometry"], scale[unit])
    if atoms is None:
        return None
    masses, coords, counts = atoms
    if formula is not None and counts != dict(formula):
        have = ", ".join(f"{k}: {v}" for k, v in sorted(counts.items()))
        ck.error("rotor.geometry", f"the atoms ({have}) do not match the formula {dict(formula)}")
        return None
    moments = principal_moments(masses, coords)
    if moments[2] <= 0:
        ck.error("rotor.geometry", "all atoms sit at one point (expected distinct coordinates)")
        return None
    linear = is_linear(moments)
    found = "linear" if linear else "nonlinear"
    if shape in ("linear", "nonlinear") and shape != found:
        ck.error(
            "shape",
            f"{shape!r} but rotor.geometry is {found} (smallest/largest principal moment "
            f"{moments[0] / moments[2]:.2e}; linear below {LINEAR_TOLERANCE:g})",
        )
        return None
    used = moments[2:] if linear else moments
    return tuple(float(b) for b in sorted(rotational_constant(used), reverse=True))


_LENGTH = {"angstrom": 1.0, "bohr": C.physical_constants["Bohr radius"][0] * 1e10}


def _geometry_atoms(ck, rows: Any, scale: float):
    """Validated geometry rows → (masses [u], coordinates [Å], element counts) or None."""
    if not isinstance(rows, list) or len(rows) < 2:
        ck.error("rotor.geometry", f"{_show(rows)} is not a list of at least two [symbol, x, y, z] rows")
        return None
    masses, coords, counts = [], [], {}
    for i, row in enumerate(rows):
        path = f"rotor.geometry[{i}]"
        if not isinstance(row, list) or len(row) != 4 or not isinstance(row[0], str):
            ck.error(path, f"{_show(row)} is not a [symbol, x, y, z] row")
            continue
        if row[0] not in ISOTOPE:
            ck.error(f"{path}[0]", f"{row[0]!r} has no isotope mass in the table (known: {', '.join(ISOTOPE)})")
            continue
        xyz = [ck.number(v, f"{path}[{k + 1}]") for k, v in enumerate(row[1:])]
        if None in xyz:
            continue
        masses.append(ISOTOPE[row[0]][0])
        coords.append([v * scale for v in xyz])
        el = "H" if row[0] == "D" else row[0]
        counts[el] = counts.get(el, 0) + 1
    if ck.failed:
        return None
    return masses, coords, counts


def _moment_from_geometry(ck, m: dict, path: str, rotor: Any) -> float | None:
    """Reduced moment [u Å²] of a torsion from ``top``/``axis`` and the rotor geometry."""
    if not isinstance(rotor, dict) or "geometry" not in rotor:
        ck.error(f"{path}.top", "needs a rotor.geometry to compute the reduced moment (or give 'moment')")
        return None
    # the geometry's own errors are reported by read_geometry; read it quietly here
    atoms = _geometry_atoms(type(ck)(ck.file), rotor["geometry"], _LENGTH.get(rotor.get("unit", "angstrom"), 1.0))
    if atoms is None:
        return None
    masses, coords, _ = atoms
    n = len(masses)
    top, axis = m["top"], m["axis"]
    ok = True
    for key, value, size in (("top", top, None), ("axis", axis, 2)):
        good = (
            isinstance(value, list)
            and all(isinstance(j, int) and not isinstance(j, bool) and 0 <= j < n for j in value)
            and (size is None or len(value) == size)
            and len(set(value)) == len(value)
        )
        if not good:
            what = "two distinct atom indices" if size else "a list of distinct atom indices"
            ck.error(f"{path}.{key}", f"{_show(value)} is not {what} (0 to {n - 1}, rows of rotor.geometry)")
            ok = False
    if not ok:
        return None
    if not (axis[0] in top) ^ (axis[1] in top):
        ck.error(f"{path}.axis", f"{axis!r}: exactly one of the two bond atoms must belong to the top {top!r}")
        return None
    if len(top) >= n - 1:
        ck.error(f"{path}.top", f"{top!r} leaves no frame to turn against (the rest of the molecule)")
        return None
    moment = torsion_moment(masses, coords, top, axis)
    if not moment > 0:
        ck.error(f"{path}.top", f"{top!r} lies on the axis {axis!r}: its moment is zero")
        return None
    return moment
