"""``statherm diff``: the review names exactly what changed, by how much and where."""

from __future__ import annotations

import shutil

import pytest

from buildkit import database, edit, run


def _rows(report: str) -> dict[str, list[str]]:
    """Markdown table rows of the report: species → cells."""
    rows = {}
    for line in report.splitlines():
        if line.startswith("| ") and not line.startswith("| species"):
            cells = [c.strip() for c in line.strip("|").split("|")]
            rows[cells[0]] = cells
    return rows


@pytest.fixture
def two_builds(tmp_path):
    """The SMALL database (old) and a copy (new) to edit and rebuild."""
    species, old = database(tmp_path)
    new = tmp_path / "new"
    shutil.copytree(old, new)
    return species, old, new


def test_identical_databases_give_an_empty_report(two_builds):
    _, old, new = two_builds
    assert run("diff", str(old), str(new)) == (0, "", "")
    assert run("diff", "--fail-on-change", str(old / "thermo.dat"), str(new / "thermo.dat")) == (0, "", "")


def test_formation_enthalpy_change_moves_h_and_g_only(two_builds):
    """H°(T) = ΔfH°298 + [H°(T) − H°298] (DESIGN.md conventions): raising ΔfH°298 by 1 kJ/mol
    shifts H and G by exactly that at every T and leaves Cp and S alone."""
    species, old, new = two_builds
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -73.52")
    assert run("build", "--species", str(species), "--out", str(new), "--quiet")[0] == 0
    rc, report, err = run("diff", str(old), str(new))
    assert rc == 0, err
    rows = _rows(report)
    assert set(rows) == {"CH4"}  # exactly the edited species
    assert rows["CH4"][1] == "changed"
    assert float(rows["CH4"][4]) == pytest.approx(1.0, abs=2e-4)  # ΔH [kJ/mol] as printed (4 decimals)
    from pipeline.diff import compare, read_database

    (change,) = compare(read_database(str(old)), read_database(str(new)))
    # the printed coefficients carry 9 significant digits and are re-balanced as printed,
    # so what the edit did not touch moves only at the 1e-7 relative level
    assert change.largest["H"][0] == pytest.approx(1.0, abs=1e-4)
    assert change.largest["G"][0] == pytest.approx(1.0, abs=1e-4)
    assert abs(change.largest["Cp"][0]) < 1e-4 and abs(change.largest["S"][0]) < 1e-4
    assert run("diff", "--fail-on-change", str(old), str(new))[0] == 1


def test_added_removed_and_range_changes(two_builds):
    species, old, new = two_builds
    (species / "HO2.yaml").unlink()
    shutil.copy2(species / "H2O.yaml", species / "H2X.yaml")
    edit(species / "H2X.yaml", "name: H2O", "name: H2X")
    edit(species / "CO2.yaml", "sources:", "fit: {tmid: 1200}\nsources:")
    assert run("build", "--species", str(species), "--out", str(new), "--quiet")[0] == 0
    rc, report, _ = run("diff", str(old / "thermo.dat"), str(new / "thermo.dat"))
    assert rc == 0
    rows = _rows(report)
    assert {k: v[1] for k, v in rows.items()} == {"CO2": "changed", "H2X": "added", "HO2": "removed"}
    assert "1200" in rows["CO2"][-1] and "range" in rows["CO2"][-1]
    assert "1 changed, 1 added, 1 removed (5 → 5 species)" in report


def test_unreadable_inputs_are_reported(tmp_path):
    rc, _, err = run("diff", str(tmp_path / "a.dat"), str(tmp_path))
    assert rc == 1 and "a.dat: does not exist" in err and "Traceback" not in err
