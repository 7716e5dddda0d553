"""Propagation of stated input uncertainties to Cp°, S°, H° and G° over a grid.

A species file may give standard uncertainties (one standard deviation) for

* the formation enthalpy — ``formation.uncertainty`` (unit of ``formation.unit``);
* the frequency scale factor — ``vibrations.scale_uncertainty`` [-];
* each frequency — ``vibrations.uncertainties: [...]`` (one per frequency,
  unit of ``vibrations.unit``, before scaling);
* the rotational constants — ``rotor.uncertainty``: one relative standard
  uncertainty shared by all constants (a geometry error moves them together);
* each torsional barrier — ``barrier_uncertainty`` in a ``torsions`` entry
  (unit of ``barrier_unit``).

The inputs are taken as independent.  The law of propagation of uncertainty
(GUM, JCGM 100:2008, eq. 10, with the second-order term of its §5.1.2 note
for normally distributed inputs, cross terms left out) gives, for each
output y(T),

    u²(y) = Σ_i [ (∂y/∂x_i)² u²(x_i) + ½ (∂²y/∂x_i²)² u⁴(x_i) ],

with the sensitivities ∂y/∂x_i computed from the model itself by central
differences of :func:`pipeline.thermo.thermo_table`, each call vectorised over
the temperature grid, and the curvature from the model at x_i ± u(x_i).  The
second term matters only where a slope changes sign (e.g. the Cp° of ethane's
hindered rotor against its barrier, near 320 K), where the first-order result
alone would fall to zero.  Signed sensitivities are combined per input before
squaring, so correlated outputs are right: G° = H° − T S° takes
∂G/∂x = ∂H/∂x − T ∂S/∂x.  The formation enthalpy enters H° and G° with
sensitivity 1 exactly (H° = ΔfH°298 + [H° − H°298]) and needs no model call.

:func:`monte_carlo` samples the same inputs (JCGM 101:2008) as a check of
the propagation.  A species with no stated uncertainty gives ``None`` —
"not known", which is not the same as zero.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from pipeline.codata import C

#: relative central-difference step for inputs with a non-zero value
_REL_STEP = 1e-4


@dataclass(frozen=True)
class UncertainInput:
    """One input with a stated standard uncertainty.

    ``key`` is the species-file key path the uncertainty was given at;
    ``value`` and ``u`` are in the internal unit ``unit`` (the one the
    perturbation is applied in).
    """

    key: str
    value: float
    u: float
    unit: str


@dataclass(frozen=True, eq=False)
class ThermoUncertainty:
    """Standard uncertainties of one species' properties on a grid ``T`` [K].

    ``cp``, ``s``, ``g_fn`` = u(−(G°−H°298)/T) [J/mol/K]; ``h_minus_h298``,
    ``h`` (absolute, ΔfH°298 included) and ``g`` [J/mol].  ``inputs`` are
    the uncertain inputs; ``g_budget[i]`` is input i's contribution to u(G°)
    [J/mol], Σ_i g_budget[i]² = g² (None for a Monte Carlo estimate).
    """

    name: str
    T: np.ndarray
    cp: np.ndarray
    s: np.ndarray
    h_minus_h298: np.ndarray
    h: np.ndarray
    g: np.ndarray
    g_fn: np.ndarray
    inputs: tuple[UncertainInput, ...]
    g_budget: np.ndarray | None = None

    PROPERTIES = ("cp", "s", "h_minus_h298", "h", "g", "g_fn")

    def at(self, prop: str, T: float) -> float:
        """u(prop) at one temperature [K], linear in T between grid points; NaN outside
        the grid (a species whose range ends below T has no u there, not its end value)."""
        if prop not in self.PROPERTIES:
            raise KeyError(f"{prop!r} is not one of {', '.join(self.PROPERTIES)}")
        return float(np.interp(T, self.T, getattr(self, prop), left=np.nan, right=np.nan))

    def dominant(self, T: float) -> str:
        """The species-file key contributing most to u(G°) at T [K] ('' for Monte Carlo)."""
        if self.g_budget is None or not self.inputs:
            return ""
        share = [abs(float(np.interp(T, self.T, row))) for row in self.g_budget]
        return self.inputs[int(np.argmax(share))].key


def uncertain_inputs(species) -> tuple[UncertainInput, ...]:
    """The inputs of ``species`` that carry a stated standard uncertainty.

    A stated zero counts (an element's ΔfH° is zero by definition and known
    exactly); an input without a stated uncertainty is left out.

    >>> from pipeline.species import parse_species
    >>> doc = b'''name: Ar
    ... formula: {Ar: 1}
    ... shape: atom
    ... symmetry: 1
    ... formation: {enthalpy: 0, uncertainty: 0.1}
    ... sources: [x]
    ... '''
    >>> [(i.key, i.u) for i in uncertain_inputs(parse_species(doc, "Ar.yaml")[0])]
    [('formation.uncertainty', 100.0)]
    """
    out = []
    if species.formation_uncertainty is not None:
        out.append(UncertainInput("formation.uncertainty", species.formation_enthalpy,
                                  species.formation_uncertainty, "J/mol"))
    if species.frequency_scale_uncertainty is not None and species.frequencies:
        out.append(UncertainInput("vibrations.scale_uncertainty", species.frequency_scale,
                                  species.frequency_scale_uncertainty, "1"))
    for i, u in enumerate(species.frequency_uncertainties or ()):
        out.append(UncertainInput(f"vibrations.uncertainties[{i}]", species.frequencies[i], u, "m-1"))
    if species.rotor_uncertainty is not None and species.rotational_constants:
        out.append(UncertainInput("rotor.uncertainty", 1.0, species.rotor_uncertainty, "1"))
    for k, tor in enumerate(species.torsions):
        u = getattr(tor, "barrier_uncertainty", None)
        if u is not None:
            out.append(UncertainInput(f"torsions[{k}].barrier_uncertainty", tor.barrier, u, "J/mol"))
    return tuple(out)


def perturb(species, inputs, deltas):
    """``species`` with input i moved by ``deltas[i]`` (internal units), all at once.

    A scale-factor change multiplies every frequency (and the modes torsions
    replace) by (s + δ)/s; a rotor change multiplies every rotational
    constant by (1 + δ); the others add δ to the one value.

    >>> from types import SimpleNamespace as NS
    >>> from pipeline.species import Species
    >>> sp = Species(name="X", formula=(("H", 2),), shape="linear", symmetry=2, mass=3.3e-27,
    ...              sources=("x",), formation_enthalpy=0.0, rotational_constants=(6000.0,),
    ...              frequencies=(400000.0,))
    >>> inp = [UncertainInput("rotor.uncertainty", 1.0, 0.01, "1")]
    >>> perturb(sp, inp, [0.5]).rotational_constants
    (9000.0,)
    """
    changes: dict = {}
    freqs = np.array(species.frequencies, dtype=float)
    factor = 1.0
    torsions = list(species.torsions)
    for inp, d in zip(inputs, deltas):
        d = float(d)
        if d == 0.0:
            continue
        key = inp.key
        if key == "formation.uncertainty":
            changes["formation_enthalpy"] = species.formation_enthalpy + d
        elif key == "vibrations.scale_uncertainty":
            factor = (species.frequency_scale + d) / species.frequency_scale
            changes["frequency_scale"] = species.frequency_scale + d
        elif key.startswith("vibrations.uncertainties["):
            freqs[int(key[len("vibrations.uncertainties["):-1])] += d
        elif key == "rotor.uncertainty":
            changes["rotational_constants"] = tuple(b * (1.0 + d) for b in species.rotational_constants)
        elif key.startswith("torsions["):
            k = int(key[len("torsions["):key.index("]")])
            torsions[k] = dataclasses.replace(torsions[k], barrier=torsions[k].barrier + d)
        else:  # pragma: no cover - uncertain_inputs makes only the keys above
            raise ValueError(f"unknown uncertain input {key!r}")
    if factor != 1.0:
        torsions = [dataclasses.replace(t, replaces=t.replaces * factor) for t in torsions]
    if factor != 1.0 or np.any(freqs != np.asarray(species.frequencies, dtype=float)):
        changes["frequencies"] = tuple(float(f) for f in freqs * factor)
    if torsions != list(species.torsions):
        changes["torsions"] = tuple(torsions)
    return dataclasses.replace(species, **changes) if changes else species


def _outputs(table) -> np.ndarray:
    """Rows Cp, S, H−H298, H, G, −(G−H298)/T of a ThermoTable, shape (6, n)."""
    return np.vstack([table.cp, table.s, table.h_minus_h298, table.h, table.g, table.g_fn])


def _result(species, T, u_rows, inputs, budget=None) -> ThermoUncertainty:
    return ThermoUncertainty(
        name=species.name, T=T, cp=u_rows[0], s=u_rows[1], h_minus_h298=u_rows[2],
        h=u_rows[3], g=u_rows[4], g_fn=u_rows[5], inputs=tuple(inputs), g_budget=budget,
    )


def sensitivities(species, T, pressure: float = C.bar, inputs=None) -> np.ndarray:
    """∂y/∂x_i for y = Cp, S, H−H298, H, G, −(G−H298)/T; shape (n_inputs, 6, n_T).

    Central differences, ∂y/∂x ≈ [y(x + δ) − y(x − δ)] / 2δ with
    δ = 10⁻⁴ |x| (or δ = u(x) when x = 0); truncation error O(δ²).  The
    formation enthalpy is exact: ∂H/∂ΔfH = ∂G/∂ΔfH = 1, the rest 0 (for a
    0 K formation enthalpy ΔfH°298 = ΔfH°0 + model terms, still slope 1).

    >>> from pipeline.species import Species
    >>> he = Species(name="He", formula=(("He", 1),), shape="atom", symmetry=1,
    ...              mass=4.002602 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...              formation_uncertainty=10.0)
    >>> sensitivities(he, [300.0, 1000.0])[0, 4].tolist()   # ∂G/∂ΔfH
    [1.0, 1.0]
    """
    from pipeline.thermo import thermo_table

    T = np.atleast_1d(np.asarray(T, dtype=float))
    inputs = uncertain_inputs(species) if inputs is None else tuple(inputs)
    out = np.zeros((len(inputs), 6, T.size))
    for i, inp in enumerate(inputs):
        if inp.key == "formation.uncertainty":
            out[i, 3] = out[i, 4] = 1.0
            continue
        if inp.u == 0.0:  # contributes nothing; its slope is not needed
            continue
        step = _REL_STEP * abs(inp.value) if inp.value else inp.u
        delta = np.zeros(len(inputs))
        delta[i] = step
        up = _outputs(thermo_table(perturb(species, inputs, delta), T, pressure))
        down = _outputs(thermo_table(perturb(species, inputs, -delta), T, pressure))
        out[i] = (up - down) / (2.0 * step)
    return out


def curvatures(species, T, pressure: float = C.bar, inputs=None) -> np.ndarray:
    """∂²y/∂x_i² over one standard uncertainty, shape (n_inputs, 6, n_T).

    [y(x + u) − 2 y(x) + y(x − u)] / u², the curvature the model shows across
    the range the input is uncertain over (0 for ΔfH°, in which y is linear).
    """
    from pipeline.thermo import thermo_table

    T = np.atleast_1d(np.asarray(T, dtype=float))
    inputs = uncertain_inputs(species) if inputs is None else tuple(inputs)
    out = np.zeros((len(inputs), 6, T.size))
    todo = [i for i, inp in enumerate(inputs) if inp.key != "formation.uncertainty" and inp.u > 0]
    if not todo:
        return out
    mid = _outputs(thermo_table(species, T, pressure))
    for i in todo:
        delta = np.zeros(len(inputs))
        delta[i] = inputs[i].u
        up = _outputs(thermo_table(perturb(species, inputs, delta), T, pressure))
        down = _outputs(thermo_table(perturb(species, inputs, -delta), T, pressure))
        out[i] = (up - 2.0 * mid + down) / inputs[i].u ** 2
    return out


def propagate(species, T, pressure: float = C.bar) -> ThermoUncertainty | None:
    """Standard uncertainties of ``species`` on the grid ``T`` [K] from its stated input uncertainties.

    u²(y) = Σ_i [(∂y/∂x_i)² u²(x_i) + ½ (∂²y/∂x_i²)² u⁴(x_i)] for each
    property y (see module docstring; GUM, JCGM 100:2008, eq. 10 and §5.1.2).
    Returns None when the species file states no uncertainty.

    Parameters
    ----------
    species : Species
    T : array
        Temperatures [K].
    pressure : float
        Standard pressure p° [Pa].

    Examples
    --------
    ΔfH° alone moves H° and G° by its own uncertainty and leaves Cp° alone:

    >>> from pipeline.species import Species
    >>> ar = Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...              mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...              formation_uncertainty=250.0)
    >>> u = propagate(ar, [298.15, 1000.0])
    >>> u.g.tolist(), u.cp.tolist()
    ([250.0, 250.0], [0.0, 0.0])
    >>> propagate(Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...                   mass=ar.mass, sources=("x",), formation_enthalpy=0.0), [300.0]) is None
    True
    """
    inputs = uncertain_inputs(species)
    if not inputs:
        return None
    T = np.atleast_1d(np.asarray(T, dtype=float))
    u_in = np.array([inp.u for inp in inputs])[:, None, None]
    first = sensitivities(species, T, pressure, inputs) * u_in
    second = curvatures(species, T, pressure, inputs) * u_in**2 / np.sqrt(2.0)
    each = np.sqrt(first**2 + second**2)
    total = np.sqrt(np.sum(each**2, axis=0))
    return _result(species, T, total, inputs, budget=each[:, 4].copy())


def monte_carlo(species, T, pressure: float = C.bar, samples: int = 400, seed: int = 0):
    """Monte Carlo standard uncertainties (JCGM 101:2008): sample, compute, take the spread.

    Every uncertain input is drawn from its normal distribution by Latin
    hypercube sampling (McKay, Beckman & Conover, Technometrics 21, 239,
    1979): each input's ``samples`` draws fall one in each of ``samples``
    equally probable strata, in an order shuffled independently per input, so
    a few hundred model runs give a stable spread.  The generator is seeded
    with ``seed`` (same result every run).  Returns the standard deviation
    (ddof = 1) of the computed properties, or None when nothing is uncertain.
    Costs ``samples`` model evaluations: a check, not part of a build.
    """
    from scipy.special import ndtri

    from pipeline.thermo import thermo_table

    inputs = uncertain_inputs(species)
    if not inputs:
        return None
    T = np.atleast_1d(np.asarray(T, dtype=float))
    rng = np.random.default_rng(seed)
    u_in = np.array([inp.u for inp in inputs])
    strata = np.stack([rng.permutation(samples) for _ in inputs], axis=1)
    z = ndtri((strata + rng.random((samples, len(inputs)))) / samples)
    values = np.array([_outputs(thermo_table(perturb(species, inputs, d), T, pressure)) for d in z * u_in])
    return _result(species, T, values.std(axis=0, ddof=1), inputs)


# --------------------------------------------------------------------------
# What the writers print (no formatting here: plain numbers and names)
# --------------------------------------------------------------------------

#: temperatures [K] at which REPORT.md quotes u(G°)
REPORT_TEMPERATURES = (298.15, 1000.0)


def _sig(x: float, digits: int = 6) -> float:
    """``x`` to ``digits`` significant digits (stable, readable numbers in outputs)."""
    return float(f"{float(x):.{digits}g}")


def structured(u: ThermoUncertainty | None, T) -> dict | None:
    """The ± band for thermo.yaml: standard uncertainties (k = 1) at temperatures ``T`` [K].

    Keys: ``coverage_factor``, ``inputs`` (species-file keys), ``T`` [K],
    ``cp``, ``s`` [J/mol/K], ``h_minus_h298``, ``h``, ``g`` [J/mol]
    (6 significant digits).  None when the species states no uncertainty.

    >>> from pipeline.species import Species
    >>> ar = Species(name="Ar", formula=(("Ar", 1),), shape="atom", symmetry=1,
    ...              mass=39.948 * C.atomic_mass, sources=("x",), formation_enthalpy=0.0,
    ...              formation_uncertainty=250.0)
    >>> structured(propagate(ar, [298.15, 1000.0]), [1000.0])["g"]
    [250.0]
    """
    if u is None:
        return None
    T = [float(t) for t in np.atleast_1d(T)]
    out: dict = {"coverage_factor": 1, "inputs": [i.key for i in u.inputs], "T": T}
    for prop in ("cp", "s", "h_minus_h298", "h", "g"):
        out[prop] = [_sig(u.at(prop, t)) for t in T]
    return out


def table_columns(u: ThermoUncertainty | None, T) -> dict[str, np.ndarray]:
    """Columns for a property table at ``T`` [K]: u(Cp), u(S) [J/mol/K], u(H−H298), u(G) [kJ/mol].

    Empty when the species states no uncertainty (the table then has no
    u columns, rather than columns of zeros).
    """
    if u is None:
        return {}
    T = np.atleast_1d(np.asarray(T, dtype=float))
    return {
        "u(Cp) [J/mol/K]": np.interp(T, u.T, u.cp),
        "u(S) [J/mol/K]": np.interp(T, u.T, u.s),
        "u(H-H298) [kJ/mol]": np.interp(T, u.T, u.h_minus_h298) / 1e3,
        "u(G) [kJ/mol]": np.interp(T, u.T, u.g) / 1e3,
    }


def report_values(u: ThermoUncertainty | None) -> dict | None:
    """u(G°) [kJ/mol] at 298.15 K and 1000 K and the input that dominates it at 1000 K.

    ``{"g298": ..., "g1000": ..., "dominant": "vibrations.scale_uncertainty"}``
    or None when the species states no uncertainty.
    """
    if u is None:
        return None
    return {
        "g298": _sig(u.at("g", REPORT_TEMPERATURES[0]) / 1e3),
        "g1000": _sig(u.at("g", REPORT_TEMPERATURES[1]) / 1e3),
        "dominant": u.dominant(REPORT_TEMPERATURES[1]),
    }


def exceeds(values: dict | None, limit_kj: float) -> bool:
    """True if u(G°, 1000 K) of :func:`report_values` is above ``limit_kj`` [kJ/mol]."""
    return values is not None and values["g1000"] > limit_kj
