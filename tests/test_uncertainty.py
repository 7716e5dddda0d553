"""Uncertainty propagation: inputs parsed, linearised sensitivities, Monte Carlo check.

Input uncertainties used below are magnitudes, not check values:

* frequency scale factor u = 0.03 — the size of the scale-factor
  uncertainties for common quantum-chemistry methods reported by Irikura,
  Johnson & Kacker, J. Phys. Chem. A 109, 8430 (2005) (magnitude from memory);
* per-mode 2 % and rotational constants 2 % — common practice for computed
  frequencies and for B from a computed geometry (~1 % in bond lengths);
* torsional barrier ± 0.6 kJ/mol (5 % of ethane's) — common practice for a
  computed barrier.

The checks compare two independent evaluations of the same statement
(propagation, JCGM 100:2008 eq. 10 with its second-order term, against
sampling, JCGM 101:2008), or
the model's slopes against the closed forms of the rigid rotor and harmonic
oscillator (McQuarrie, *Statistical Mechanics*, 1976, eqs. 6-20 to 6-23 and 8-35).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import constants as C

from pipeline.diagnostics import InputError
from pipeline.species import parse_species
from pipeline.thermo import temperature_grid
from pipeline.uncertainty import monte_carlo, propagate, sensitivities, uncertain_inputs
from pipeline.units import theta
from refdata import SPECIES_DIR

GRID = temperature_grid(200.0, 6000.0, 100.0)


def _with_uncertainties(sp):
    return dataclasses.replace(
        sp,
        frequency_scale_uncertainty=0.03,
        frequency_uncertainties=tuple(0.02 * f for f in sp.frequencies),
        rotor_uncertainty=0.02,
    )


@pytest.mark.parametrize("name", ["HO2", "CH4", "CO2"])
def test_linearised_matches_monte_carlo(database, name):
    sp = _with_uncertainties(database[name])
    lin = propagate(sp, GRID)
    # 1000 draws: sampling error of a standard deviation ≈ 1/√(2·999) ≈ 2.2 % (less with
    # the Latin hypercube), so 10 % also covers what the second-order term leaves out
    mc = monte_carlo(sp, GRID, samples=1000, seed=20261201)
    _agree(lin, mc, name)


def _agree(lin, mc, name):
    for prop in lin.PROPERTIES:
        a, b = getattr(lin, prop), getattr(mc, prop)
        stated = a > 1e-9 * a.max()
        assert stated.sum() >= len(lin.T) - 1, prop  # only H−H298 at 298.15 K is exactly zero
        worst = np.max(np.abs(b[stated] / a[stated] - 1.0))
        assert worst < 0.10, f"{name} {prop}: linearised vs Monte Carlo differ by {worst:.1%}"


def test_torsion_barrier_matches_monte_carlo(database):
    # ethane's hindered CH3 rotor: its Cp slope against the barrier changes sign near 320 K,
    # where the first-order term alone falls to zero and the second-order term carries u
    sp = database["C2H6"]
    tors = tuple(dataclasses.replace(t, barrier_uncertainty=600.0) for t in sp.torsions)
    sp = dataclasses.replace(sp, torsions=tors, formation_uncertainty=None)
    T = temperature_grid(200.0, 3000.0, 100.0)
    lin = propagate(sp, T)
    # one input: 100 Latin-hypercube strata sample its normal distribution evenly
    _agree(lin, monte_carlo(sp, T, samples=100, seed=7), "C2H6")


def test_no_uncertainty_gives_none(database):
    sp = dataclasses.replace(database["OH"], formation_uncertainty=None)
    assert uncertain_inputs(sp) == ()
    assert propagate(sp, GRID) is None
    assert monte_carlo(sp, GRID, samples=10) is None


def test_stated_zero_is_zero_not_none(database):
    # H2 is an element in its reference state: ΔfH° = 0 exactly, stated as 0.0 in its file
    u = propagate(database["H2"], GRID)
    assert u is not None
    assert np.all(u.g == 0.0) and np.all(u.cp == 0.0)


def test_formation_enthalpy_moves_h_and_g_only(database):
    sp = database["CH4"]  # ΔfH° ± 0.06 kJ/mol in its file
    u = propagate(sp, GRID)
    assert np.allclose(u.h, sp.formation_uncertainty, rtol=0, atol=1e-12)
    assert np.allclose(u.g, sp.formation_uncertainty, rtol=0, atol=1e-12)
    assert np.all(u.cp == 0.0) and np.all(u.s == 0.0) and np.all(u.h_minus_h298 == 0.0)


def test_rotor_slope_is_rigid_rotor_closed_form(database):
    # S_rot/R = ln(√π/σ) + ½ ln(T³/θAθBθC) + 3/2: scaling all constants by (1+ε)
    # gives ∂S/∂ε = −(3/2) R and ∂²S/∂ε² = +(3/2) R at ε = 0 (McQuarrie 1976, eq. 8-35);
    # Cp does not move.  u² = (3/2 R u)² + ½ (3/2 R u²)²
    sp = dataclasses.replace(database["H2O"], formation_uncertainty=None, rotor_uncertainty=0.01)
    slope = sensitivities(sp, GRID)[0]
    assert np.allclose(slope[1], -1.5 * C.R, rtol=1e-7)
    u = propagate(sp, GRID)
    expect = 1.5 * C.R * 0.01 * np.sqrt(1 + 0.01**2 / 2)
    assert np.allclose(u.s, expect, rtol=1e-6)
    assert np.allclose(u.cp, 0.0, atol=1e-9)
    assert np.allclose(u.g, GRID * expect, rtol=1e-6)


def test_frequency_slope_is_harmonic_closed_form(database):
    # Cv/R = x² eˣ/(eˣ−1)², x = θ/T; ∂(Cv/R)/∂θ = (1/T) x eˣ/(eˣ−1)² [2 − x (eˣ+1)/(eˣ−1)]
    # (derivative of McQuarrie 1976, eq. 6-22)
    sp = database["CO2"]
    u_modes = [0.0] * len(sp.frequencies)
    u_modes[2] = 0.01 * sp.frequencies[2]
    sp = dataclasses.replace(sp, formation_uncertainty=None, frequency_uncertainties=tuple(u_modes))
    i = [inp.key for inp in uncertain_inputs(sp)].index("vibrations.uncertainties[2]")
    slope = sensitivities(sp, GRID)[i, 0]  # ∂Cp/∂ν̃ [J/mol/K per m^-1]
    th = float(theta(sp.frequencies[2]))
    x = th / GRID
    ex = np.exp(x)
    dcv = (x * ex / (ex - 1) ** 2) * (2 - x * (ex + 1) / (ex - 1)) / GRID
    expect = C.R * dcv * th / sp.frequencies[2]
    assert np.allclose(slope, expect, rtol=1e-6, atol=1e-15)


def test_budget_names_dominant_input(database):
    sp = dataclasses.replace(database["HO2"], rotor_uncertainty=0.02)
    u = propagate(sp, GRID)
    # at 298.15 K the 0.16 kJ/mol ΔfH° beats T·(3/2)R·0.02 = 74 J/mol; at 3000 K rotor wins (745 J/mol)
    assert u.dominant(298.15) == "formation.uncertainty"
    assert u.dominant(3000.0) == "rotor.uncertainty"
    assert np.allclose(np.sqrt((u.g_budget**2).sum(axis=0)), u.g)


_DOC = """name: HO2
formula: {H: 1, O: 2}
shape: nonlinear
symmetry: 1
rotor: {constants: [20.357, 1.1179, 1.0560], unit: cm-1, uncertainty: 0.01}
vibrations:
  frequencies: [3436.2, 1391.8, 1097.6]
  scale: 0.97
  scale_uncertainty: 0.02
  uncertainties: [10, 5, 5]
formation: {enthalpy: 12.26, uncertainty: 0.16}
sources: ["Jacox 1994; ATcT"]
"""


def test_species_file_keys_in_si():
    sp, _ = parse_species(_DOC.encode(), "HO2.yaml")
    assert sp.rotor_uncertainty == 0.01
    assert sp.frequency_scale_uncertainty == 0.02
    # per-mode uncertainties carry the scale factor like the frequencies: cm-1 → m-1 × 0.97
    assert sp.frequency_uncertainties == pytest.approx((10 * 97.0, 5 * 97.0, 5 * 97.0))
    assert sp.formation_uncertainty == pytest.approx(160.0)
    keys = [i.key for i in uncertain_inputs(sp)]
    assert keys == ["formation.uncertainty", "vibrations.scale_uncertainty", "vibrations.uncertainties[0]",
                    "vibrations.uncertainties[1]", "vibrations.uncertainties[2]", "rotor.uncertainty"]


@pytest.mark.parametrize(
    "old, new, key, words",
    [
        ("uncertainties: [10, 5, 5]", "uncertainties: [10, 5]", "vibrations.uncertainties", "2 given for 3"),
        ("uncertainties: [10, 5, 5]", "uncertainties: [10, -5, 5]", "vibrations.uncertainties[1]", "between 0"),
        ("scale_uncertainty: 0.02", "scale_uncertainty: high", "vibrations.scale_uncertainty", "not a number"),
        ("uncertainty: 0.01}", "uncertainty: 1.5}", "rotor.uncertainty", "relative"),
    ],
)
def test_bad_uncertainty_is_reported(old, new, key, words):
    with pytest.raises(InputError) as exc:
        parse_species(_DOC.replace(old, new).encode(), "HO2.yaml")
    d = exc.value.diagnostics[0]
    assert (d.file, d.key) == ("HO2.yaml", key)
    assert words in d.message


def test_band_written_into_thermo_yaml_and_tables(tmp_path, database):
    """The outputs carry the propagated band where uncertainties are stated, and none elsewhere."""
    import pandas as pd

    from buildkit import run
    from pipeline.safeyaml import load_yaml
    from pipeline.species import load_species

    species = tmp_path / "species"
    species.mkdir()
    (species / "HO2.yaml").write_text(_DOC)
    off = (SPECIES_DIR / "OH.yaml").read_text().replace("uncertainty: 0.03", "")
    assert "uncertainty" not in off
    (species / "OH.yaml").write_text(off)
    rc, _, err = run("build", "--species", str(species), "--out", str(tmp_path / "out"), "--quiet")
    assert rc == 0, err
    ho2 = load_species(species / "HO2.yaml")[0]
    doc = load_yaml((tmp_path / "out" / "thermo.yaml").read_text())
    entries = {e["name"]: e for e in doc["species"]}
    assert "uncertainty" not in entries["OH"]
    band = entries["HO2"]["uncertainty"]
    expect = propagate(ho2, band["T"])
    assert band["inputs"] == [i.key for i in expect.inputs]
    for prop in ("cp", "s", "h_minus_h298", "h", "g"):
        assert np.allclose(band[prop], getattr(expect, prop), rtol=1e-5, atol=1e-9), prop
    csv = pd.read_csv(tmp_path / "out" / "tables" / "HO2.csv")
    T = csv["T [K]"].to_numpy()
    expect = propagate(ho2, T)
    assert np.allclose(csv["u(Cp) [J/mol/K]"], expect.cp, atol=1e-6)
    assert np.allclose(csv["u(G) [kJ/mol]"], expect.g / 1e3, atol=1e-6)
    assert not [c for c in pd.read_csv(tmp_path / "out" / "tables" / "OH.csv").columns if c.startswith("u(")]


def test_no_uncertainty_quoted_outside_the_range(database):
    """A species fitted over 200–800 K has no u(G°) at 1000 K (not its 800 K value)."""
    import dataclasses

    from pipeline.species import FitOptions
    from pipeline.thermo import temperature_grid
    from pipeline.uncertainty import propagate, report_values

    sp = dataclasses.replace(database["H2O"], fit=FitOptions(tmin=200.0, tmax=800.0))
    u = propagate(sp, temperature_grid(200.0, 800.0, 10.0))
    values = report_values(u)
    assert values["g298"] > 0 and values["g1000"] != values["g1000"]  # NaN
