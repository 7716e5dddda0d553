"""Readers: fixed-column records back into Nasa7Fit — ours, and files in other programs' styles.

Coefficient values come from the GRI-Mech 3.0 thermo (Smith et al.) that cantera
ships as ``gri30.yaml``; they are re-typed here in the styles other programs
use (lower-case symbols, real-valued counts, blank Tmid, D exponents, comments).
"""

from __future__ import annotations

import pytest

from writerkit import cantera_fits, small_build

from pipeline.diagnostics import InputError
from pipeline.readers import fortran_float, read_records
from pipeline.writers import assemble, printed_fit, record_text

FIELDS = ("name", "formula", "charge", "phase", "tlow", "tmid", "thigh", "low", "high")


def same(a, b) -> bool:
    return all(getattr(a, f) == getattr(b, f) for f in FIELDS)


def test_write_read_round_trip_is_exact_to_printed_precision(tmp_path):
    settings, species, _, fits, frags = small_build()
    path = tmp_path / "thermo.dat"
    path.write_bytes(assemble(frags, settings)["thermo.dat"])
    back = {f.name: f for f in read_records(path)}
    assert sorted(back) == sorted(sp.name for sp in species)
    for sp, fit in zip(species, fits):
        assert same(back[sp.name], printed_fit(fit)), sp.name
        assert back[sp.name].extra["identifier"] == sp.sha256[:6].upper()
    assert [f.name for f in read_records(str(path))] == [f.name for f in read_records(path.read_text())]


def test_ions_and_electron_round_trip():
    """Cations, anions and the electron gas as in NASA Glenn data (cantera's nasa_gas.yaml)."""
    fits = {f.name: f for f in cantera_fits("nasa_gas.yaml")}
    for name in ("NO+", "O2-", "Electron", "ALCLF+"):
        (back,) = read_records(record_text(fits[name]))
        assert same(back, printed_fit(fits[name])), name


def foreign_record(f, *, lower=False, real_counts=False, blank_tmid=False, d_exp=False, fifth=None,
                   numbers=True, comment="") -> str:
    """``f`` typed as another program might: same columns, different habits."""
    def e(x):
        s = f"{x:15.8E}"
        return s.replace("E", "D") if d_exp else s

    els = ""
    for el, n in f.formula[:4]:
        sym = el.lower() if lower else el.upper()
        cnt = f"{float(n):3.1f}" if real_counts else f"{n:3d}"
        els += f"{sym:<2}{cnt}"
    els = els.ljust(20)
    tmid = " " * 8 if blank_tmid else f"{f.tmid:8.2f}"
    five = f"{fifth[0]:<2}{fifth[1]:3d}" if fifth else " " * 5
    num = (lambda k: str(k)) if numbers else (lambda k: " ")
    lines = [
        f"{f.name:<18}{'GRI3':<6}{els}G{f.tlow:10.3f}{f.thigh:10.3f}{tmid}{five} {num(1)}",
        "".join(e(a) for a in f.high[:5]) + "    " + num(2),
        "".join(e(a) for a in (*f.high[5:], *f.low[:3])) + "    " + num(3),
        "".join(e(a) for a in f.low[3:]) + " " * 19 + num(4),
    ]
    if comment:
        lines[0] += comment
    return "\n".join(lines) + "\n"


def test_reads_other_programs_files():
    gri = {f.name: f for f in cantera_fits("gri30.yaml")}
    text = "\n".join([
        "! thermo data typed in other programs' styles",
        "THERMO ALL",
        "   300.000  1000.000  5000.000",
        "!",
        foreign_record(gri["CH4"], lower=True),
        foreign_record(gri["CO2"], real_counts=True, comment="   ! trailing comment"),
        "",
        foreign_record(gri["OH"], blank_tmid=True, d_exp=True),
        foreign_record(gri["HCN"], fifth=("AR", 1), numbers=False),
        "END",
        "anything after END is not read",
    ])
    fits = {f.name: f for f in read_records(text, name="foreign.dat")}
    assert list(fits) == ["CH4", "CO2", "OH", "HCN"]
    assert fits["CH4"].formula == (("C", 1), ("H", 4))  # lower-case symbols
    assert fits["CO2"].formula == (("C", 1), ("O", 2))  # counts written as reals
    assert fits["OH"].tmid == 1000.0  # blank Tmid: the ranges line's default
    assert fits["HCN"].formula[-1] == ("Ar", 1)  # fifth element, columns 74–78
    for name, f in fits.items():
        ref = gri[name]
        assert f.low == tuple(float(f"{a:.8E}") for a in ref.low), name
        assert f.high == tuple(float(f"{a:.8E}") for a in ref.high), name
        assert (f.tlow, f.thigh) == (ref.tlow, ref.thigh)


def test_records_without_header_are_read():
    gri = {f.name: f for f in cantera_fits("gri30.yaml")}
    (f,) = read_records(foreign_record(gri["H2O"]))
    assert f.name == "H2O" and f.tmid == gri["H2O"].tmid


@pytest.mark.parametrize("damage, expect", [
    (lambda t: "\n".join(t.splitlines()[:3]) + "\n", "needs 4 lines"),
    (lambda t: t.replace("    2\n", "    3\n", 1), "expected line 2"),
    (lambda t: t[:81] + "x.yz" + t[85:], "is not a number"),
    (lambda t: t[:50] + "?" * 6 + t[56:], "Tlow, Thigh, Tmid"),
    (lambda t: t[:65] + "  100.00" + t[73:], "Tmid 100 K is outside"),
    (lambda t: t[:24] + " " * 20 + t[44:], "no element"),
])
def test_damaged_records_name_file_line_and_problem(damage, expect):
    gri = {f.name: f for f in cantera_fits("gri30.yaml")}
    text = damage(foreign_record(gri["H2O"]))
    with pytest.raises(InputError) as exc:
        read_records(text, name="bad.dat")
    message = str(exc.value)
    assert message.startswith("bad.dat: line ") and expect in message


def test_unreadable_file_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="cannot be read"):
        read_records(tmp_path / "missing.dat")


def test_fortran_reals():
    assert fortran_float("1.0D+01") == 10.0 and fortran_float("-2.5-3") == -2.5e-3 and fortran_float("") == 0.0
    with pytest.raises(ValueError):
        fortran_float("1.2.3")


def test_a_file_in_another_layout_holds_no_records_and_stray_text_in_a_section_is_an_error():
    from refdata import SPECIES_DIR

    assert read_records(SPECIES_DIR / "OH.yaml") == []
    gri = {f.name: f for f in cantera_fits("gri30.yaml")}
    text = "THERMO\n   300.000  1000.000  5000.000\n" + foreign_record(gri["H2O"]) + "H2O2 (see below)\nEND\n"
    with pytest.raises(InputError, match="line 7: expected the first line of a record"):
        read_records(text, name="stray.dat")


def test_a_name_filling_its_columns_reads_back_alone():
    """An 18-character name (columns 1–18, NASA TM-4513 layout) keeps its identity on reading."""
    from pipeline.nasa7 import Nasa7Fit
    from pipeline.writers import record_text

    coeffs = (2.5, 0.0, 0.0, 0.0, 0.0, -745.375, 4.37967)
    fit = Nasa7Fit(name="A" * 18, formula=(("Ar", 1),), tlow=200.0, tmid=1000.0, thigh=6000.0,
                   low=coeffs, high=coeffs)
    (back,) = read_records(record_text(fit, "9F86D0"), name="long.dat")
    assert back.name == "A" * 18
