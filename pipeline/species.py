"""Species files (YAML) → validated, frozen :class:`Species` in SI units.

This module owns the input contract of ``../shared/DESIGN.md``: the keys, the
units, and every check on them.  It computes no thermochemistry.

Internal units: mass [kg]; rotational constants, vibrational wavenumbers and
electronic level energies as wavenumbers [m^-1]; moments of inertia
[kg m^2]; enthalpies [J/mol]; temperatures [K].

YAML is read with the safe loader of :mod:`pipeline.safeyaml`, whose implicit
types follow the YAML 1.2 core schema: only ``true``/``false`` are booleans, so
names such as ``NO``, ``ON``, ``Y`` or ``off`` stay strings; ``1e3`` is a
number; duplicate keys are errors; no tag can construct a Python object.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pipeline import units
from pipeline.cache import display_path as _display, species_files  # noqa: F401 (stdlib-only helpers)
from pipeline.codata import C
from pipeline.diagnostics import Diagnostic, InputError
from pipeline.elements import ATOMIC_WEIGHT, formula_mass

# --------------------------------------------------------------------------
# The Species record
# --------------------------------------------------------------------------

#: characters allowed in a species name (the record's name field is 1–16 of them)
NAME_PATTERN = re.compile(r"^[A-Za-z0-9][A-Za-z0-9()\[\]+\-_,.']{0,15}$")
NAME_RULE = (
    "1–16 characters: letters, digits and ( ) [ ] + - _ , . ' — starting with a letter or digit"
)

SHAPES = ("atom", "linear", "nonlinear")


@dataclass(frozen=True)
class FitOptions:
    """Per-species overrides of the fit settings (None: use the build settings)."""

    tmin: float | None = None
    tmid: float | None = None
    tmax: float | None = None


@dataclass(frozen=True)
class Diatomic:
    """Spectroscopic constants of a diatomic, wavenumbers [m^-1].

    ``G(v) = ωe(v+½) − ωexe(v+½)² + ωeye(v+½)³``,
    ``F_v(J) = B_v J(J+1) − D_v J²(J+1)² + H_e J³(J+1)³`` with
    ``B_v = Be − αe(v+½) + γe(v+½)²`` and ``D_v = D_e + βe(v+½)``.
    ``dissociation`` is D0, measured from the lowest level [m^-1] (None:
    estimated by the model).  ``nuclear_spin`` is I of each nucleus of a
    homonuclear molecule (None: heteronuclear); ``state_symmetry`` the
    exchange symmetry of its ground state (``g+``, ``g-``, ``u+``, ``u-``).
    ``excited`` lists excited electronic states with their own constants.
    """

    omega_e: float
    omega_e_x_e: float
    B_e: float
    alpha_e: float = 0.0
    D_e: float = 0.0
    omega_e_y_e: float = 0.0
    gamma_e: float = 0.0
    beta_e: float = 0.0
    H_e: float = 0.0
    dissociation: float | None = None
    nuclear_spin: float | None = None
    state_symmetry: str = ""
    excited: tuple = ()  # ((Te [m^-1], degeneracy, Diatomic), ...) excited states
    spin_spin: float = 0.0  # λ of a ³Σ state [m^-1]
    spin_rotation: float = 0.0  # γ of a ³Σ state [m^-1]
    spin_orbit: float = 0.0  # A of a ²Π state [m^-1] (0: not a ²Π level sum)


@dataclass(frozen=True)
class Torsion:
    """A one-dimensional hindered internal rotor.

    V(φ) = Σ_k V_k/2 (1 − cos(k n φ)); ``barrier`` is V_1 [J/mol] (``fourier``
    holds any further V_k [J/mol]); ``moment`` the reduced moment [kg m^2].
    """

    replaces: float  # wavenumber [m^-1] of the harmonic mode it replaces
    barrier: float  # [J/mol]
    periodicity: int
    symmetry: int
    moment: float  # [kg m^2]
    fourier: tuple[float, ...] = ()
    barrier_uncertainty: float | None = None  # standard uncertainty of ``barrier`` [J/mol]


@dataclass(frozen=True)
class ReferenceData:
    """Published values to overlay on a species' plot (``reference:`` block).

    ``T`` [K]; ``cp``, ``s`` [J/mol/K] and ``h_minus_h298`` [J/mol], each
    None or one value per temperature; ``source`` names the publication.
    """

    source: str
    T: tuple[float, ...]
    cp: tuple[float, ...] | None = None
    s: tuple[float, ...] | None = None
    h_minus_h298: tuple[float, ...] | None = None


@dataclass(frozen=True)
class Species:
    """One gas-phase species, validated, in SI units (see module docstring)."""

    name: str
    formula: tuple[tuple[str, int], ...]
    shape: str
    symmetry: int
    mass: float  # [kg]
    sources: tuple[str, ...]
    formation_enthalpy: float  # [J/mol] at formation_temperature
    formation_temperature: float = 298.15  # [K], 298.15 or 0
    formation_uncertainty: float | None = None  # [J/mol]
    charge: int = 0
    optical_isomers: int = 1
    rotational_constants: tuple[float, ...] = ()  # [m^-1]; B, or A ≥ B ≥ C
    frequencies: tuple[float, ...] = ()  # [m^-1], scale applied; harmonic modes only (torsional ones removed)
    frequency_scale: float = 1.0
    electronic: tuple[tuple[int, float], ...] = ((1, 0.0),)  # (g, energy [m^-1])
    diatomic: Diatomic | None = None
    torsions: tuple[Torsion, ...] = ()
    fit: FitOptions = field(default_factory=FitOptions)
    # standard uncertainties (None: not given); see pipeline.uncertainty
    frequency_scale_uncertainty: float | None = None  # of the scale factor [-]
    frequency_uncertainties: tuple[float, ...] | None = None  # per mode [m^-1], scale applied
    rotor_uncertainty: float | None = None  # relative, all rotational constants together [-]
    reference: ReferenceData | None = None  # published values for the plot
    path: str = ""
    sha256: str = ""

    @property
    def atoms(self) -> int:
        """Number of atoms N."""
        return sum(n for _, n in self.formula)

    @property
    def molar_mass(self) -> float:
        """Molar mass [kg/mol]."""
        return self.mass * C.N_A


# --------------------------------------------------------------------------
# Validation helpers
# --------------------------------------------------------------------------

_TOP_KEYS = {
    "name", "formula", "charge", "shape", "symmetry", "optical_isomers", "mass",
    "rotor", "vibrations", "electronic", "formation", "sources", "fit",
    "diatomic", "torsions", "notes", "reference",
}
_REQUIRED = ("name", "formula", "shape", "symmetry", "formation", "sources")


class _Checker:
    """Collects diagnostics for one file while its keys are read."""

    def __init__(self, file: str):
        self.file = file
        self.diagnostics: list[Diagnostic] = []

    def error(self, key: str, message: str) -> None:
        self.diagnostics.append(Diagnostic(self.file, key, message))

    def warn(self, key: str, message: str) -> None:
        self.diagnostics.append(Diagnostic(self.file, key, message, "warning"))

    @property
    def failed(self) -> bool:
        return any(d.severity == "error" for d in self.diagnostics)

    # -- typed getters: return None (and record an error) when the value is bad

    def keys(self, mapping: dict, allowed: set[str], path: str, required=()) -> None:
        for key in mapping:
            if not isinstance(key, str) or key not in allowed:
                hint = difflib.get_close_matches(str(key), sorted(allowed), n=1, cutoff=0.6)
                suggestion = f" — did you mean '{hint[0]}'?" if hint else ""
                where = f"{path}.{key}" if path else str(key)
                self.error(where, f"unknown key{suggestion} (expected one of: {', '.join(sorted(allowed))})")
        for key in required:
            if key not in mapping:
                where = f"{path}.{key}" if path else key
                self.error(where, "missing required key")

    def mapping(self, value: Any, path: str) -> dict | None:
        if not isinstance(value, dict):
            self.error(path, f"{_show(value)} is not a mapping (expected 'key: value' lines)")
            return None
        return value

    def number(self, value: Any, path: str, *, positive=False, nonnegative=False) -> float | None:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.error(path, f"{_show(value)} is not a number")
            return None
        x = float(value)
        if not math.isfinite(x):
            self.error(path, f"{_show(value)} is not a finite number")
            return None
        if positive and x <= 0:
            self.error(path, f"{_show(value)} must be positive")
            return None
        if nonnegative and x < 0:
            self.error(path, f"{_show(value)} must not be negative")
            return None
        return x

    def integer(self, value: Any, path: str, *, minimum: int | None = None) -> int | None:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                what = "a positive integer" if minimum == 1 else "an integer"
                self.error(path, f"{_show(value)} is not {what}")
                return None
        if minimum is not None and value < minimum:
            what = "a positive integer" if minimum == 1 else f"an integer ≥ {minimum}"
            self.error(path, f"{_show(value)} is not {what}")
            return None
        return int(value)

    def numbers(self, value: Any, path: str) -> list[float] | None:
        if not isinstance(value, list):
            self.error(path, f"{_show(value)} is not a list of numbers (expected [x, y, ...])")
            return None
        out = []
        for i, v in enumerate(value):
            x = self.number(v, f"{path}[{i}]")
            if x is None:
                return None
            out.append(x)
        return out

    def unit(self, value: Any, path: str, table: dict | tuple, default: str) -> str | None:
        if value is None:
            return default
        options = list(table)
        if not isinstance(value, str) or value not in options:
            self.error(path, f"{_show(value)} is not a known unit (expected one of: {', '.join(options)})")
            return None
        return value


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


# --------------------------------------------------------------------------
# Blocks
# --------------------------------------------------------------------------


def _read_formula(ck: _Checker, raw: Any) -> tuple[tuple[str, int], ...] | None:
    m = ck.mapping(raw, "formula")
    if m is None:
        return None
    if not m:
        ck.error("formula", "is empty (expected element counts such as {O: 1, H: 1})")
        return None
    out = []
    for el, n in m.items():
        if not isinstance(el, str) or el not in ATOMIC_WEIGHT:
            hint = difflib.get_close_matches(str(el).capitalize(), list(ATOMIC_WEIGHT), n=1)
            suggestion = f" — did you mean '{hint[0]}'?" if hint else ""
            ck.error(f"formula.{el}", f"{_show(el)} is not an element symbol{suggestion}")
            continue
        count = ck.integer(n, f"formula.{el}", minimum=1)
        if count is not None:
            out.append((el, count))
    return tuple(out) if not ck.failed else None


def _read_rotor(ck: _Checker, raw: Any, shape: str | None, formula=None) -> tuple[float, ...] | None:
    m = ck.mapping(raw, "rotor")
    if m is None:
        return None
    kinds = [k for k in ("constants", "moments", "geometry") if k in m]
    ck.keys(m, {"constants", "moments", "geometry", "unit", "uncertainty"}, "rotor")
    if len(kinds) != 1:
        ck.error("rotor", "give exactly one of 'constants', 'moments' or 'geometry'")
        return None
    kind = kinds[0]
    if kind == "geometry":
        from pipeline.blocks import read_geometry

        return read_geometry(ck, m, shape, formula)
    values = ck.numbers(m[kind], f"rotor.{kind}")
    if values is None:
        return None
    table = units.ROTATIONAL if kind == "constants" else units.MOMENT
    default = "cm-1" if kind == "constants" else "amu*angstrom^2"
    unit = ck.unit(m.get("unit"), "rotor.unit", table, default)
    if unit is None:
        return None
    for i, v in enumerate(values):
        if v <= 0:
            ck.error(f"rotor.{kind}[{i}]", f"{v!r} must be positive")
            return None
    if kind == "constants":
        consts = [v * units.WAVENUMBER[unit] for v in values]
    else:
        # B̃ = h / (8 π² c I)  [m^-1]
        consts = [C.h / (8 * math.pi**2 * C.c * v * units.MOMENT[unit]) for v in values]
    want = {"linear": 1, "nonlinear": 3}.get(shape or "")
    if want is not None and len(consts) != want:
        ck.error(
            f"rotor.{kind}",
            f"{len(consts)} value(s) given; a {shape} molecule needs {want}"
            + (" (B)" if want == 1 else " (A, B, C)"),
        )
        return None
    return tuple(sorted(consts, reverse=True))


def _read_vibrations(ck: _Checker, raw: Any):
    """(frequencies [m^-1], scale, u(scale) or None, per-mode u [m^-1] or None) or None."""
    m = ck.mapping(raw, "vibrations")
    if m is None:
        return None
    ck.keys(m, {"frequencies", "unit", "scale", "scale_uncertainty", "uncertainties"}, "vibrations",
            required=("frequencies",))
    if "frequencies" not in m:
        return None
    freqs = ck.numbers(m["frequencies"], "vibrations.frequencies")
    unit = ck.unit(m.get("unit"), "vibrations.unit", ("cm-1",), "cm-1")
    scale = 1.0 if "scale" not in m else ck.number(m["scale"], "vibrations.scale", positive=True)
    if freqs is None or unit is None or scale is None:
        return None
    for i, f in enumerate(freqs):
        if f <= 0:
            ck.error(
                f"vibrations.frequencies[{i}]",
                f"{f!r} is {'zero' if f == 0 else 'negative'} (imaginary mode?) — remove it "
                "or describe it as a torsion",
            )
    u_scale = u_freqs = None
    if m.get("scale_uncertainty") is not None:
        u_scale = ck.number(m["scale_uncertainty"], "vibrations.scale_uncertainty", nonnegative=True)
        if u_scale is not None and u_scale >= scale:
            ck.error("vibrations.scale_uncertainty", f"{u_scale!r} is not below the scale factor {scale!r}")
    if m.get("uncertainties") is not None:
        u_freqs = ck.numbers(m["uncertainties"], "vibrations.uncertainties")
        if u_freqs is not None and len(u_freqs) != len(freqs):
            ck.error("vibrations.uncertainties",
                     f"{len(u_freqs)} given for {len(freqs)} frequencies (one per frequency, same unit)")
        for i, (u, f) in enumerate(zip(u_freqs or (), freqs)):
            if u < 0 or u >= f:
                ck.error(f"vibrations.uncertainties[{i}]",
                         f"{u!r} is not between 0 and its frequency {f!r}")
    if ck.failed:
        return None
    factor = scale * units.WAVENUMBER[unit]
    return (
        tuple(f * factor for f in freqs),
        scale,
        u_scale,
        None if u_freqs is None else tuple(u * factor for u in u_freqs),
    )


def _read_rotor_uncertainty(ck: _Checker, raw: Any) -> float | None:
    """``rotor.uncertainty``: relative standard uncertainty of all rotational constants [-]."""
    if not isinstance(raw, dict) or raw.get("uncertainty") is None:
        return None
    u = ck.number(raw["uncertainty"], "rotor.uncertainty", nonnegative=True)
    if u is not None and u >= 0.5:
        ck.error("rotor.uncertainty", f"{u!r} is a relative uncertainty (e.g. 0.01 for 1 %); expected below 0.5")
        return None
    return u


def _read_electronic(ck: _Checker, raw: Any) -> tuple[tuple[int, float], ...] | None:
    m = ck.mapping(raw, "electronic")
    if m is None:
        return None
    ck.keys(m, {"levels", "unit"}, "electronic", required=("levels",))
    unit = ck.unit(m.get("unit"), "electronic.unit", ("cm-1", "K", "eV"), "cm-1")
    levels = m.get("levels")
    if not isinstance(levels, list) or not levels:
        ck.error("electronic.levels", f"{_show(levels)} is not a list of [degeneracy, energy] pairs")
        return None
    out = []
    for i, lv in enumerate(levels):
        path = f"electronic.levels[{i}]"
        if not isinstance(lv, list) or len(lv) != 2:
            ck.error(path, f"{_show(lv)} is not a [degeneracy, energy] pair")
            continue
        g = ck.integer(lv[0], f"{path}[0]", minimum=1)
        e = ck.number(lv[1], f"{path}[1]", nonnegative=True)
        if g is not None and e is not None and unit is not None:
            out.append((g, e * units.WAVENUMBER[unit]))
    if ck.failed:
        return None
    out.sort(key=lambda p: p[1])
    if out[0][1] != 0.0:
        ck.error("electronic.levels", "the lowest level must have energy 0 (the ground state)")
        return None
    return tuple(out)


def _read_formation(ck: _Checker, raw: Any) -> tuple[float, float, float | None] | None:
    m = ck.mapping(raw, "formation")
    if m is None:
        return None
    ck.keys(m, {"enthalpy", "unit", "temperature", "uncertainty"}, "formation", required=("enthalpy",))
    if "enthalpy" not in m:
        return None
    h = ck.number(m["enthalpy"], "formation.enthalpy")
    unit = ck.unit(m.get("unit"), "formation.unit", ("kJ/mol", "kcal/mol", "J/mol"), "kJ/mol")
    t = 298.15 if "temperature" not in m else ck.number(m["temperature"], "formation.temperature")
    if t is not None and t not in (298.15, 0.0):
        ck.error("formation.temperature", f"{t!r} is not 298.15 or 0 (K)")
        t = None
    unc = None
    if m.get("uncertainty") is not None:
        unc = ck.number(m["uncertainty"], "formation.uncertainty", nonnegative=True)
    if h is None or unit is None or t is None:
        return None
    factor = units.MOLAR_ENERGY[unit]
    return h * factor, t, None if unc is None else unc * factor


def _read_reference(ck: _Checker, raw: Any) -> ReferenceData | None:
    """``reference: {source, T: [K], cp: [J/mol/K], s: [J/mol/K], h_minus_h298: [kJ/mol]}``."""
    m = ck.mapping(raw, "reference")
    if m is None:
        return None
    props = ("cp", "s", "h_minus_h298")
    ck.keys(m, {"source", "T", *props}, "reference", required=("source", "T"))
    source = m.get("source")
    if "source" in m and not (isinstance(source, str) and source.strip()):
        ck.error("reference.source", f"{_show(source)} is not a citation (text)")
    T = ck.numbers(m["T"], "reference.T") if "T" in m else None
    for i, t in enumerate(T or ()):
        if t <= 0:
            ck.error(f"reference.T[{i}]", f"{t!r} is not a temperature above 0 K")
    if not any(k in m for k in props):
        ck.error("reference", "give at least one of: cp, s, h_minus_h298")
    values: dict[str, tuple[float, ...]] = {}
    for key, factor in zip(props, (1.0, 1.0, 1e3)):
        if key in m:
            v = ck.numbers(m[key], f"reference.{key}")
            if v is not None and T is not None and len(v) != len(T):
                ck.error(f"reference.{key}", f"{len(v)} value(s) for {len(T)} temperature(s) in reference.T")
            elif v is not None:
                values[key] = tuple(x * factor for x in v)
    if ck.failed or T is None:
        return None
    return ReferenceData(source=source.strip(), T=tuple(T), **values)


def _read_fit(ck: _Checker, raw: Any) -> FitOptions | None:
    m = ck.mapping(raw, "fit")
    if m is None:
        return None
    ck.keys(m, {"tmin", "tmid", "tmax"}, "fit")
    vals = {}
    for key in ("tmin", "tmid", "tmax"):
        if m.get(key) is not None and m.get(key) != "auto":
            vals[key] = ck.number(m[key], f"fit.{key}", positive=True)
    if ck.failed:
        return None
    opts = FitOptions(**vals)
    check_ranges(ck, opts.tmin, opts.tmid, opts.tmax, "fit")
    return None if ck.failed else opts


def check_ranges(ck, tmin, tmid, tmax, path: str) -> None:
    """Tlow < Tmid < Thigh (for whichever of them are given), 298.15 K inside."""
    if tmin is not None and tmin > 298.15:
        ck.error(f"{path}.tmin", f"{tmin!r} K is above 298.15 K; the reference state must lie in range")
    if tmax is not None and tmax <= 298.15:
        ck.error(f"{path}.tmax", f"{tmax!r} K must be above 298.15 K")
    pairs = [("tmin", tmin, "tmid", tmid), ("tmid", tmid, "tmax", tmax), ("tmin", tmin, "tmax", tmax)]
    for a, va, b, vb in pairs:
        if va is not None and vb is not None and va >= vb:
            ck.error(f"{path}.{a}", f"{a} = {va!r} K is not below {b} = {vb!r} K")
            return


# --------------------------------------------------------------------------
# Entry points
# --------------------------------------------------------------------------


def parse_species(data: bytes, file: str, doc: Any = None) -> tuple[Species, list[Diagnostic]]:
    """Validate one species document; raise :class:`InputError` with all its errors.

    ``doc``, if given, is ``load_yaml(data.decode())`` read beforehand (see
    ``pipeline.build``); ``data`` is still what the species' hash is taken of.
    Returns the species and its warnings.
    """
    ck = _Checker(file)
    if doc is not None:
        return _checked(ck, doc, data)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError([Diagnostic(file, "", f"is not UTF-8 text ({exc.reason} at byte {exc.start})")]) from None
    import yaml  # here only: a build reads its documents in a child (pipeline.build), so it needs no yaml

    from pipeline.safeyaml import load_yaml

    try:
        doc = load_yaml(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        if "constructor for the tag" in problem:  # e.g. !!python/object: refused, nothing constructed or run
            tag = problem.rsplit(" ", 1)[-1]
            raise InputError([Diagnostic(file, where, f"YAML tag {tag} is not allowed (plain YAML only; "
                                                      "nothing in the file was executed)")]) from None
        raise InputError([Diagnostic(file, where, f"YAML syntax error: {problem}")]) from None
    except RecursionError:
        raise InputError([Diagnostic(file, "", "YAML nesting is too deep")]) from None
    except (ValueError, KeyError, TypeError) as exc:  # an explicit tag on a value it cannot take: !!float abc
        raise InputError([Diagnostic(file, "", "YAML value cannot be read: an explicit tag does not fit "
                                               f"its value ({exc})")]) from None
    return _checked(ck, doc, data)


def _checked(ck: _Checker, doc: Any, data: bytes) -> tuple[Species, list[Diagnostic]]:
    file = ck.file
    if doc is None:
        raise InputError([Diagnostic(file, "", "is empty (expected a species mapping: name, formula, ...)")])
    if not isinstance(doc, dict):
        raise InputError(
            [Diagnostic(file, "", f"top level is a {type(doc).__name__}, expected a mapping of species keys")]
        )
    species = _build(ck, doc, _sha256(data))
    if ck.failed or species is None:
        raise InputError(ck.diagnostics)
    return species, [d for d in ck.diagnostics if d.severity == "warning"]


def _build(ck: _Checker, doc: dict, digest: str) -> Species | None:
    ck.keys(doc, _TOP_KEYS, "", required=_REQUIRED)

    name = doc.get("name")
    if "name" in doc:
        if not isinstance(name, str):
            ck.error("name", f"{_show(name)} is not a string (quote names YAML reads otherwise, e.g. \"NO\")")
            name = None
        elif not NAME_PATTERN.match(name):
            why = ("contains a path separator; " if "/" in name or "\\" in name else
                   f"is {len(name)} characters, the record's name field holds 16; " if len(name) > 16 else "")
            ck.error("name", f"{name!r} is not a valid record name: {why}{NAME_RULE}")
            name = None

    formula = _read_formula(ck, doc["formula"]) if "formula" in doc else None
    charge = ck.integer(doc.get("charge", 0), "charge")

    shape = doc.get("shape")
    if "shape" in doc and shape not in SHAPES:
        ck.error("shape", f"{_show(shape)} is not one of: {', '.join(SHAPES)}")
        shape = None
    natoms = sum(n for _, n in formula) if formula else None
    if shape and natoms is not None:
        if shape == "atom" and natoms != 1:
            ck.error("shape", f"'atom' but the formula has {natoms} atoms")
        if shape != "atom" and natoms == 1:
            ck.error("shape", f"{shape!r} but the formula has a single atom (use 'atom')")
        if shape == "nonlinear" and natoms == 2:
            ck.error("shape", "'nonlinear' but a diatomic is always linear")

    symmetry = ck.integer(doc["symmetry"], "symmetry", minimum=1) if "symmetry" in doc else None
    optical = ck.integer(doc.get("optical_isomers", 1), "optical_isomers", minimum=1)

    mass = None
    if doc.get("mass") is not None:
        m = ck.number(doc["mass"], "mass", positive=True)
        if m is not None:
            mass = m
            if formula and charge is not None:
                expect = formula_mass(dict(formula), charge)
                if abs(m - expect) > 0.01 * expect:
                    ck.warn("mass", f"{m!r} u differs by more than 1 % from the formula's {expect:.4f} u")
    elif formula and charge is not None:
        mass = formula_mass(dict(formula), charge)

    diatomic = None
    if doc.get("diatomic") is not None:
        from pipeline.blocks import read_diatomic

        diatomic = read_diatomic(ck, doc["diatomic"], formula)
        if shape and shape != "linear":
            ck.error("diatomic", f"a 'diatomic' block needs shape 'linear', not {shape!r}")
        if natoms is not None and natoms != 2:
            ck.error("diatomic", f"a 'diatomic' block needs a two-atom formula (found {natoms} atoms)")
        for key in ("rotor", "vibrations"):
            if key in doc:
                ck.error(key, "give either a 'diatomic' block or rotor/vibrations, not both")
        if diatomic is not None and symmetry is not None:
            want_sigma = 1 if diatomic.nuclear_spin is None else 2
            if symmetry != want_sigma:
                kind = "homonuclear" if want_sigma == 2 else "heteronuclear"
                ck.error("symmetry", f"{symmetry} but a {kind} diatomic has symmetry number {want_sigma}")

    rotor: tuple[float, ...] = ()
    u_rotor = None
    if doc.get("rotor") is not None:
        if shape == "atom":
            ck.error("rotor", "an atom has no rotor; remove this block")
        else:
            rotor = _read_rotor(ck, doc["rotor"], shape, formula) or ()
            u_rotor = _read_rotor_uncertainty(ck, doc["rotor"])
    elif shape in ("linear", "nonlinear") and diatomic is None:
        ck.error("rotor", f"missing required key for a {shape} molecule (constants, moments or geometry)")

    torsions: tuple[Torsion, ...] = ()
    if doc.get("torsions") is not None:
        from pipeline.blocks import read_torsions

        torsions = read_torsions(ck, doc["torsions"], doc.get("rotor"))
        if shape == "atom" or diatomic is not None or natoms == 2:
            ck.error("torsions", "only a polyatomic molecule has internal rotors; remove this block")

    freqs: tuple[float, ...] = ()
    scale = 1.0
    u_scale = u_freqs = None
    if doc.get("vibrations") is not None:
        if shape == "atom":
            ck.error("vibrations", "an atom has no vibrations; remove this block")
        else:
            vib = _read_vibrations(ck, doc["vibrations"])
            if vib is not None:
                freqs, scale, u_scale, u_freqs = vib
    if shape in ("linear", "nonlinear") and natoms and diatomic is None and not ck.failed:
        freqs = _check_modes(ck, freqs, scale, torsions, shape, natoms)

    electronic = ((1, 0.0),)
    if doc.get("electronic") is not None:
        electronic = _read_electronic(ck, doc["electronic"]) or electronic
    if diatomic is not None:
        from pipeline.blocks import check_fine_structure

        check_fine_structure(ck, diatomic, electronic)

    formation = _read_formation(ck, doc["formation"]) if "formation" in doc else None

    sources = doc.get("sources")
    if "sources" in doc:
        if (
            not isinstance(sources, list)
            or not sources
            or not all(isinstance(s, str) and s.strip() for s in sources)
        ):
            ck.error("sources", f"{_show(sources)} is not a non-empty list of citations (strings)")
            sources = None

    fit = FitOptions()
    if doc.get("fit") is not None:
        fit = _read_fit(ck, doc["fit"]) or fit

    if doc.get("notes") is not None and not isinstance(doc["notes"], str):
        ck.error("notes", f"{_show(doc['notes'])} is not text")

    reference = _read_reference(ck, doc["reference"]) if doc.get("reference") is not None else None

    if ck.failed:
        return None
    assert name and formula and shape and symmetry and formation and sources and mass
    return Species(
        name=name,
        formula=formula,
        shape=shape,
        symmetry=symmetry,
        mass=mass * C.atomic_mass,
        sources=tuple(sources),
        formation_enthalpy=formation[0],
        formation_temperature=formation[1],
        formation_uncertainty=formation[2],
        charge=charge or 0,
        optical_isomers=optical or 1,
        rotational_constants=rotor,
        frequencies=freqs,
        frequency_scale=scale,
        electronic=electronic,
        diatomic=diatomic,
        torsions=torsions,
        fit=fit,
        frequency_scale_uncertainty=u_scale,
        frequency_uncertainties=u_freqs,
        rotor_uncertainty=u_rotor,
        reference=reference,
        path=ck.file,
        sha256=digest,
    )


def _check_modes(ck, freqs, scale, torsions, shape, natoms) -> tuple[float, ...]:
    """Mode count 3N−5 / 3N−6, and the harmonic modes that torsions replace.

    The frequency list may hold all 3N−5/3N−6 modes — then each torsion's
    ``replaces`` must match one listed (unscaled) frequency within 0.5 cm-1 and
    that mode is dropped from the harmonic set — or already leave the torsional
    modes out (3N−6 minus the number of torsions), ``replaces`` then recording
    which mode the torsion stands for.  Returns the harmonic wavenumbers [m^-1].
    """
    modes = 3 * natoms - (5 if shape == "linear" else 6)
    if len(freqs) == modes - len(torsions):
        return freqs
    if len(freqs) != modes:
        extra = (
            f" ({modes} with the torsional modes listed, {modes - len(torsions)} without)" if torsions else ""
        )
        ck.error(
            "vibrations.frequencies",
            f"{len(freqs)} given; a {shape} molecule of {natoms} atoms has "
            f"3N−{5 if shape == 'linear' else 6} = {modes} modes, so {modes} expected{extra}",
        )
        return freqs
    left = list(freqs)
    for i, tor in enumerate(torsions):
        unscaled = [f / scale for f in left]
        gaps = [abs(f - tor.replaces) for f in unscaled]
        if not gaps or min(gaps) > 50.0:  # 0.5 cm-1 in m^-1
            ck.error(
                f"torsions[{i}].replaces",
                f"{tor.replaces / 100:g} cm-1 matches none of the listed frequencies "
                "(name the harmonic mode this torsion replaces, or leave torsional modes out of the list)",
            )
            continue
        left.pop(gaps.index(min(gaps)))
    return tuple(left)


def load_species(path: str | Path, display: str | None = None) -> tuple[Species, list[Diagnostic]]:
    """Read and validate one species file; raise :class:`InputError` on any error."""
    path = Path(path)
    file = display or path.as_posix()
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError([Diagnostic(file, "", f"cannot be read ({exc.strerror})")]) from None
    return parse_species(data, file)


def load_database(directory: str | Path) -> tuple[list[Species], list[Diagnostic]]:
    """Load every species file of a folder.

    Collects the errors of every file (not only the first bad one) and checks
    that each name is used once (case-insensitively, so that table files stay
    distinct on every file system).  Raises :class:`InputError` if anything
    failed; returns the species sorted by name and all warnings otherwise.
    """
    directory = Path(directory)
    errors: list[Diagnostic] = []
    warnings: list[Diagnostic] = []
    loaded: list[Species] = []
    for p in species_files(directory):
        try:
            sp, warn = load_species(p, display=_display(p))
        except InputError as exc:
            errors.extend(exc.diagnostics)
            continue
        loaded.append(sp)
        warnings.extend(warn)
    errors.extend(duplicate_names(loaded))
    if errors:
        raise InputError(errors + warnings)
    return sorted(loaded, key=lambda s: s.name), warnings


def duplicate_names(species: list[Species]) -> list[Diagnostic]:
    """One diagnostic for each species whose name another file already uses."""
    first: dict[str, Species] = {}
    out = []
    for sp in sorted(species, key=lambda s: s.path):
        key = sp.name.upper()
        if key in first:
            out.append(
                Diagnostic(sp.path, "name", f"{sp.name!r} is already used by {first[key].path}; names must be unique")
            )
        else:
            first[key] = sp
    return out
