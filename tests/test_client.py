"""A real client reads the database: cantera's converter and ideal-gas phase, and flame temperatures.

cantera (a test dependency only) converts ``thermo.dat`` with its own reader
(``cantera.ck2yaml``), loads every species into an ideal-gas phase with
warnings turned into errors, and evaluates the polynomials itself.  The flame
check compares equilibrium adiabatic flame temperatures with the same
calculation on the GRI-Mech 3.0 thermo bundled with cantera (``gri30.yaml``;
Smith, Golden, Frenklach et al., GRI-Mech 3.0, 1999).
"""

from __future__ import annotations

import atexit
import contextlib
import functools
import io
import shutil
import tempfile
import warnings
from pathlib import Path

import pytest

from refdata import ROOT, SPECIES_DIR
from writerkit import cantera_fits

from pipeline.readers import read_records
from pipeline.settings import Settings
from pipeline.writers import assemble, record_text, species_fragments

ct = pytest.importorskip("cantera")
ck2yaml = pytest.importorskip("cantera.ck2yaml")

#: the equilibrium products the flame check needs (common practice for H/C/O/N–air flames)
MAJOR_PRODUCTS = ("N2", "O2", "H2O", "CO2", "CO", "H2", "OH", "H", "O", "NO", "HO2", "AR")


@functools.lru_cache(maxsize=None)
def bundled_database() -> tuple[Path, bytes]:
    """thermo.dat of every bundled species under the default settings, plus one cation
    record (NO+, NASA Glenn coefficients from cantera's nasa_gas.yaml) to exercise the
    electron convention.  Returns (folder, thermo.dat bytes)."""
    from pipeline.fit import fit_options, fit_tables
    from pipeline.species import load_database
    from pipeline.thermo import temperature_grid, thermo_table

    settings = Settings()
    species, _ = load_database(SPECIES_DIR)
    tables = [thermo_table(sp, temperature_grid(settings.tmin, settings.tmax, settings.grid_step),
                           settings.pressure_pa) for sp in species]
    fits = fit_tables(tables, [fit_options(sp, settings) for sp in species])
    frags = [species_fragments(sp, t, f, settings) for sp, t, f in zip(species, tables, fits)]
    data = assemble(frags, settings)["thermo.dat"]
    ion = {f.name: f for f in cantera_fits("nasa_gas.yaml")}["NO+"]
    text = data.decode().replace("END\n", record_text(ion) + "END\n")
    folder = Path(tempfile.mkdtemp(prefix="statherm-client-"))
    atexit.register(shutil.rmtree, folder, True)  # kept for the session's tests, gone after
    (folder / "thermo.dat").write_text(text, encoding="utf-8")
    return folder, text.encode()


def convert(thermo_dat: Path, folder: Path):
    """cantera's conversion of a thermo.dat: (converter output, species list), warnings as errors."""
    out = io.StringIO()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with contextlib.redirect_stdout(out):
            ck2yaml.convert(None, thermo_file=str(thermo_dat), out_name=str(folder / "converted.yaml"), quiet=True)
        species = ct.Species.list_from_file(str(folder / "converted.yaml"))
    return out.getvalue(), species


@functools.lru_cache(maxsize=None)
def converted():
    """The bundled database of this test, converted by cantera."""
    folder, _ = bundled_database()
    return convert(folder / "thermo.dat", folder)


def test_converter_reads_every_record_without_a_message():
    log, species = converted()
    assert log == ""  # quiet mode prints warnings and errors only
    records = read_records(bundled_database()[0] / "thermo.dat")
    assert [s.name for s in species] == [r.name for r in records]


def test_ideal_gas_phase_loads_every_species_with_zero_warnings():
    _, species = converted()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        gas = ct.Solution(thermo="ideal-gas", species=species)
    assert [str(w.message) for w in caught] == []
    assert gas.n_species == len(species)


def test_compositions_and_charges_equal():
    _, species = converted()
    records = {r.name: r for r in read_records(bundled_database()[0] / "thermo.dat")}
    for sp in species:
        r = records[sp.name]
        expect = {el: float(n) for el, n in r.formula}
        if r.charge:
            expect["E"] = float(-r.charge)
        assert sp.composition == expect, sp.name
        assert sp.charge == pytest.approx(r.charge), sp.name


def test_cantera_evaluates_the_printed_coefficients_as_statherm_does():
    """cp, h, s at six temperatures per species agree to 1e-9 relative (dimensionless
    Cp/R, H/RT, S/R, normalised by max(|value|, 1) as solvers do)."""
    R = ct.gas_constant  # J/kmol/K
    _, species = converted()
    records = {r.name: r for r in read_records(bundled_database()[0] / "thermo.dat")}
    for sp in species:
        r = records[sp.name]
        temps = [r.tlow, 298.15, 0.5 * (r.tlow + r.tmid), r.tmid, 0.5 * (r.tmid + r.thigh), r.thigh]
        for T in temps:
            ours = (float(r.cp_r(T)), float(r.h_rt(T)), float(r.s_r(T)))
            theirs = (sp.thermo.cp(T) / R, sp.thermo.h(T) / (R * T), sp.thermo.s(T) / R)
            for a, b, what in zip(ours, theirs, ("cp", "h", "s")):
                assert abs(a - b) <= 1e-9 * max(abs(a), 1.0), (sp.name, T, what, a, b)


def flame_temperature(species: list, fuel: str) -> float:
    """Equilibrium adiabatic flame temperature [K] of stoichiometric fuel–air (O2 + 3.76 N2,
    common practice) from 298.15 K at 1 atm."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        gas = ct.Solution(thermo="ideal-gas", species=species)
    gas.TP = 298.15, ct.one_atm
    gas.set_equivalence_ratio(1.0, fuel, {"O2": 1.0, "N2": 3.76})
    gas.equilibrate("HP")
    return gas.T


@pytest.mark.parametrize("fuel", ["H2", "CH4"])
def test_adiabatic_flame_temperature_within_10_K_of_gri_mech(fuel):
    """Same calculation, same species set, two sources of thermo: this database and the
    GRI-Mech 3.0 thermo bundled with cantera (gri30.yaml)."""
    _, ours = converted()
    gri = {s.name: s for s in ct.Species.list_from_file("gri30.yaml")}
    names = [s.name for s in ours if s.name in gri]
    assert set(MAJOR_PRODUCTS) | {fuel} <= set(names)
    t_ours = flame_temperature([s for s in ours if s.name in names], fuel)
    t_gri = flame_temperature([gri[n] for n in names], fuel)
    assert abs(t_ours - t_gri) <= 10.0, (fuel, t_ours, t_gri)  # the writers issue's acceptance bar
    assert 2000.0 < t_gri < 2500.0  # both flames near 2200–2400 K (from memory), a sanity bound


COMMITTED = ROOT / "output" / "thermo.dat"


@pytest.mark.skipif(not COMMITTED.is_file(), reason="no committed output/thermo.dat in this checkout")
def test_committed_database_loads_without_warning_and_gives_the_flame_temperatures(tmp_path):
    log, species = convert(COMMITTED, tmp_path)
    assert log == ""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ct.Solution(thermo="ideal-gas", species=species)
    gri = {s.name: s for s in ct.Species.list_from_file("gri30.yaml")}
    names = [s.name for s in species if s.name in gri]
    for fuel in ("H2", "CH4"):
        t_ours = flame_temperature([s for s in species if s.name in names], fuel)
        t_gri = flame_temperature([gri[n] for n in names], fuel)  # GRI-Mech 3.0 thermo (gri30.yaml)
        assert abs(t_ours - t_gri) <= 10.0, (fuel, t_ours, t_gri)  # the writers issue's acceptance bar
