"""Foundation checks: partition-function thermochemistry of the starter set
against CODATA key values and the NASA TM-4513-form coefficients shipped with
cantera, plus internal thermodynamic consistency."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants as C

from refdata import reference, reference_cp
from pipeline.thermo import T_REF, temperature_grid, thermo_table

# CODATA key values (Cox, Wagman & Medvedev, CODATA Key Values for
# Thermodynamics, Hemisphere 1989): S°(298.15 K, 1 bar) [J/mol/K]
CODATA_S298 = {
    "AR": 154.846,
    "N2": 191.609,
    "O2": 205.152,
    "H2": 130.680,
    "CO": 197.660,
    "H2O": 188.835,
    "CO2": 213.785,
}
# CODATA key values (same source): H°(298.15 K) − H°(0) [kJ/mol]
CODATA_H298_H0 = {"N2": 8.670, "O2": 8.683, "CO2": 9.365, "H2O": 9.905, "H2": 8.468}

STARTER = ["AR", "HE", "H", "O", "N", "H2", "O2", "N2", "OH", "CO", "NO", "H2O", "CO2", "CH4", "HO2"]


def test_argon_entropy_sackur_tetrode(database):
    t = thermo_table(database["AR"], [T_REF])
    assert abs(t.s298 - CODATA_S298["AR"]) <= 0.01


@pytest.mark.parametrize("name", ["N2", "O2", "H2", "CO", "H2O", "CO2"])
def test_entropy_against_codata(database, name):
    t = thermo_table(database[name], [T_REF])
    assert abs(t.s298 - CODATA_S298[name]) <= 0.3


@pytest.mark.parametrize("name", ["N2", "O2", "CO2", "H2O", "H2"])
def test_enthalpy_increment_against_codata(database, name):
    t = thermo_table(database[name], [T_REF])
    tolerance = 0.06 if name == "H2" else 0.03  # kJ/mol, issue 2 (H2 needs level sums for better)
    assert abs(t.h298_minus_h0 / 1e3 - CODATA_H298_H0[name]) <= tolerance


def test_starter_set_present(database):
    assert set(STARTER) <= set(database)


@pytest.mark.parametrize("name", STARTER)
def test_heat_capacity_against_tm4513(database, name):
    """Cp within 1 % at 298.15–500 K and 3 % at 1000 K of the NASA TM-4513-form
    coefficients bundled with cantera (gri30.yaml; nasa_gas.yaml for He)."""
    assert reference(name) is not None, f"no bundled reference for {name}"
    low = np.array([298.15, 350.0, 400.0, 450.0, 500.0])
    t = thermo_table(database[name], low)
    assert np.max(np.abs(t.cp / reference_cp(name, low) - 1)) <= 0.01
    t = thermo_table(database[name], [1000.0])
    assert abs(t.cp[0] / reference_cp(name, [1000.0])[0] - 1) <= 0.03


@pytest.mark.parametrize("name", ["OH", "H2O", "CH4", "O", "NO", "HO2", "CO2"])
def test_internal_consistency(database, name):
    """Cp = dH/dT, S(T1) = S(T0) + ∫ Cp/T dT and G = H − TS, each to 1e-6 relative."""
    sp = database[name]
    T = np.array([250.0, 600.0, 1500.0, 4000.0])
    dT = 1e-3
    up, dn = thermo_table(sp, T + dT), thermo_table(sp, T - dT)
    mid = thermo_table(sp, T)
    dhdt = (up.h_minus_h298 - dn.h_minus_h298) / (2 * dT)
    assert np.max(np.abs(dhdt / mid.cp - 1)) < 1e-6

    # ∫ Cp/T dT by Gauss–Legendre on 50 panels of 20 nodes each
    x, w = np.polynomial.legendre.leggauss(20)
    edges = np.geomspace(300.0, 3000.0, 51)
    a, b = edges[:-1, None], edges[1:, None]
    nodes = (0.5 * (b - a) * x + 0.5 * (b + a)).ravel()
    weights = (0.5 * (b - a) * w).ravel()
    tab = thermo_table(sp, nodes)
    integral = np.sum(weights * tab.cp / nodes)
    ends = thermo_table(sp, [300.0, 3000.0])
    assert abs((ends.s[0] + integral) / ends.s[1] - 1) < 1e-6

    g = mid.h - mid.T * mid.s
    g_from_fn = mid.dhf298 - mid.T * mid.g_fn  # H298 − T·[−(G−H298)/T] = G
    assert np.max(np.abs(g / g_from_fn - 1)) < 1e-6


def test_standard_pressure_option(database):
    """1 atm lowers S by R ln(101325/100000) and leaves Cp and H alone (IUPAC convention)."""
    sp = database["N2"]
    bar = thermo_table(sp, [T_REF, 1000.0])
    atm = thermo_table(sp, [T_REF, 1000.0], pressure=C.atm)
    assert np.allclose(bar.s - atm.s, C.R * np.log(C.atm / C.bar), rtol=1e-12)
    assert np.array_equal(bar.cp, atm.cp)


def test_grid_includes_reference_temperature():
    grid = temperature_grid(200.0, 6000.0, 10.0)
    assert T_REF in grid and grid[0] == 200.0 and grid[-1] == 6000.0
    assert np.all(np.diff(grid) > 0)
