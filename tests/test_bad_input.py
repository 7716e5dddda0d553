"""Malformed species files: exit 1, a message naming the file and the key, no traceback,
and the database that was there stays exactly as it was (bytes and mtimes)."""

from __future__ import annotations

from pathlib import Path

import pytest

from buildkit import SPECIES_DIR, database, run, snapshot

H2O = (SPECIES_DIR / "H2O.yaml").read_text(encoding="utf-8")
MARKER = "statherm-must-not-exist"


def h2o(old: str, new: str, name: str = "H2X") -> str:
    """The bundled H2O file under another name, with one text replacement."""
    assert old in H2O, old
    return H2O.replace("name: H2O", f"name: {name}", 1).replace(old, new, 1)


# (case, file text, key the message must name, words it must contain)
CASES = [
    ("yaml-syntax", "name: H2X\nformula: {H: 2, O: 1\n", "line 3, column 1", "YAML syntax error"),
    ("empty-file", "", "", "is empty"),
    ("list-not-mapping", "- name: H2X\n- formula: {H: 2, O: 1}\n", "", "top level is a list"),
    ("unknown-key", h2o("vibrations:", "vibration:"), "vibration", "did you mean 'vibrations'"),
    ("python-tag", f"name: !!python/object/apply:os.system ['touch {MARKER}']\n", "line 1, column 7",
     "is not allowed"),
    ("explicit-tag-bad-value", h2o("symmetry: 2", "symmetry: !!float two"), "", "YAML value cannot be read"),
    ("explicit-bool-tag", h2o("symmetry: 2", "symmetry: !!bool two"), "", "explicit tag does not fit"),
    ("recursive-alias", "name: H2X\nformula: &f {H: *f}\n", "line 2, column 10", "recursive alias"),
    ("unknown-element", h2o("{H: 2, O: 1}", "{H: 2, Oo: 1}"), "formula.Oo", "not an element symbol"),
    ("unknown-unit", h2o("unit: cm-1\nvibrations", "unit: cm^-1\nvibrations"), "rotor.unit", "not a known unit"),
    ("non-numeric", h2o("[3657.05, 1594.75, 3755.93]", "[3657.05, strong, 3755.93]"),
     "vibrations.frequencies[1]", "is not a number"),
    ("zero-frequency", h2o("[3657.05, 1594.75, 3755.93]", "[3657.05, 0, 3755.93]"),
     "vibrations.frequencies[1]", "is zero"),
    ("negative-frequency", h2o("[3657.05, 1594.75, 3755.93]", "[-3657.05, 1594.75, 3755.93]"),
     "vibrations.frequencies[0]", "is negative"),
    ("mode-count", h2o("[3657.05, 1594.75, 3755.93]", "[3657.05, 1594.75]"), "vibrations.frequencies",
     "3 expected"),
    ("rotational-constants", h2o("[27.8806, 14.5216, 9.2778]", "[27.8806, 14.5216]"), "rotor.constants",
     "needs 3"),
    ("symmetry-zero", h2o("symmetry: 2", "symmetry: 0"), "symmetry", "not a positive integer"),
    ("symmetry-fraction", h2o("symmetry: 2", "symmetry: 1.5"), "symmetry", "not a positive integer"),
    ("negative-mass", h2o("symmetry: 2", "symmetry: 2\nmass: -18.0"), "mass", "must be positive"),
    ("tlow-not-below-tmid", h2o("sources:", "fit: {tmin: 250, tmid: 200}\nsources:"), "fit.tmin", "is not below"),
    ("tmid-not-below-thigh", h2o("sources:", "fit: {tmid: 6000, tmax: 5000}\nsources:"), "fit.tmid",
     "is not below"),
    ("name-path-separator", h2o("", "", name="H2O/../x"), "name", "path separator"),
    ("name-too-long", h2o("", "", name="H2O-abcdefghijklm"), "name", "holds 16"),
    ("duplicate-name", h2o("", "", name="CH4"), "name", "already used by"),
]


@pytest.mark.parametrize("case, text, key, words", CASES, ids=[c[0] for c in CASES])
def test_bad_species_file(tmp_path, monkeypatch, case, text, key, words):
    species, out = database(tmp_path)
    monkeypatch.chdir(tmp_path)
    before = snapshot(out)
    bad = species / "zz-bad.yaml"  # sorts after CH4.yaml, so the duplicate is this file
    bad.write_text(text, encoding="utf-8")
    rc, stdout, err = run("build", "--species", "species", "--out", "output")
    assert rc == 1, err
    assert "Traceback" not in err and "internal error" not in err
    prefix = f"species/zz-bad.yaml: {key}: " if key else "species/zz-bad.yaml: "
    line = next((ln for ln in err.splitlines() if ln.startswith(prefix)), None)
    assert line is not None, err
    assert words in line, line
    assert snapshot(out) == before
    assert not Path(MARKER).exists()
    rc, _, err = run("check", "--species", "species", "--out", "output")  # check reports it too
    assert rc == 1 and prefix in err


def test_settings_file_errors_name_the_key(tmp_path, monkeypatch):
    species, out = database(tmp_path)
    monkeypatch.chdir(tmp_path)
    before = snapshot(out)
    (species / "statherm.yaml").write_text("tmid: hot\npresure: atm\n", encoding="utf-8")
    rc, _, err = run("build", "--species", "species", "--out", "output")
    assert rc == 1
    assert "species/statherm.yaml: tmid: 'hot' is not a number" in err
    assert "species/statherm.yaml: presure: unknown key — did you mean 'pressure'?" in err
    assert snapshot(out) == before
