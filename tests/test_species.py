"""Species-file loading: units, YAML safety and one test per validation error."""

from __future__ import annotations

import copy

import pytest
import yaml
from scipy import constants as C

from pipeline.diagnostics import InputError
from pipeline.safeyaml import load_yaml
from pipeline.species import load_database, parse_species

# A valid water document; the numbers are the starter-database values
# (rotational constants and fundamentals: NIST CCCBDB experimental data).
BASE = {
    "name": "H2O",
    "formula": {"H": 2, "O": 1},
    "shape": "nonlinear",
    "symmetry": 2,
    "rotor": {"constants": [27.8806, 14.5216, 9.2778], "unit": "cm-1"},
    "vibrations": {"frequencies": [3657.05, 1594.75, 3755.93], "unit": "cm-1"},
    "formation": {"enthalpy": -241.826, "unit": "kJ/mol"},
    "sources": ["test document"],
}


def doc(**changes):
    d = copy.deepcopy(BASE)
    for key, value in changes.items():
        if value is ...:
            d.pop(key)
        else:
            d[key] = value
    return d


def parse(d, file="species/X.yaml"):
    return parse_species(yaml.safe_dump(d, sort_keys=False).encode(), file)


def errors(d) -> list[str]:
    with pytest.raises(InputError) as exc:
        parse(d)
    return [str(x) for x in exc.value.diagnostics if x.severity == "error"]


def one_error(d, key: str, *words: str) -> str:
    errs = errors(d)
    hits = [e for e in errs if e.startswith(f"species/X.yaml: {key}: ")]
    assert hits, errs
    for w in words:
        assert w in hits[0], hits[0]
    return hits[0]


def test_valid_document_in_si_units():
    sp, warnings = parse(BASE)
    assert warnings == []
    assert sp.rotational_constants[0] == pytest.approx(2788.06)  # m^-1
    assert sp.formation_enthalpy == pytest.approx(-241826.0)
    assert sp.mass == pytest.approx(18.015 * C.atomic_mass, rel=1e-4)  # IUPAC 2021: 2 × 1.008 + 15.999


@pytest.mark.parametrize(
    "unit, value, expect_m",
    # 1 cm-1 ↔ c × 1 cm-1 = 29.9792458 GHz (SI definition of the speed of light)
    [("cm-1", 1.0, 100.0), ("GHz", 29.9792458, 100.0), ("MHz", 29979.2458, 100.0)],
)
def test_rotational_constant_units(unit, value, expect_m):
    d = doc(shape="linear", formula={"C": 1, "O": 1}, rotor={"constants": [value], "unit": unit},
            vibrations={"frequencies": [2143.0]})
    sp, _ = parse(d)
    assert sp.rotational_constants[0] == pytest.approx(expect_m, rel=1e-12)


def test_moments_of_inertia():
    # B̃ = h/(8π² c I): I = 1 amu·Å² ↔ B ≈ 16.8576 cm-1 (from memory of the conversion factor)
    d = doc(rotor={"moments": [1.0, 2.0, 3.0], "unit": "amu*angstrom^2"})
    sp, _ = parse(d)
    assert sp.rotational_constants[0] / 100 == pytest.approx(16.8576, rel=1e-4)


# thermochemical calorie: 4.184 J exactly (by definition)
@pytest.mark.parametrize("unit, factor", [("kJ/mol", 1e3), ("kcal/mol", 4184.0), ("J/mol", 1.0)])
def test_enthalpy_units(unit, factor):
    sp, _ = parse(doc(formation={"enthalpy": -2.0, "unit": unit}))
    assert sp.formation_enthalpy == pytest.approx(-2.0 * factor)


@pytest.mark.parametrize("word", ["NO", "ON", "Y", "n", "off", "yes", "No"])
def test_yaml_keeps_words_as_strings(word):
    assert load_yaml(f"name: {word}") == {"name": word}


def test_yaml_numbers_follow_yaml_12():
    assert load_yaml("a: 1e3\nb: -2.5E-1\nc: 7") == {"a": 1000.0, "b": -0.25, "c": 7}


def test_yaml_python_tags_are_refused(tmp_path):
    marker = tmp_path / "ran"
    text = f"name: !!python/object/apply:os.system ['touch {marker}']\n"
    with pytest.raises(InputError) as exc:
        parse_species(text.encode(), "species/X.yaml")
    assert not marker.exists()
    assert "YAML" in str(exc.value)


def test_duplicate_yaml_key():
    with pytest.raises(InputError) as exc:
        parse_species(b"name: A\nname: B\n", "species/X.yaml")
    assert "duplicate key 'name'" in str(exc.value)


def test_unknown_key_suggests_close_one():
    d = doc()
    d["symetry"] = d.pop("symmetry")
    one_error(d, "symetry", "unknown key", "did you mean 'symmetry'")


def test_missing_key():
    one_error(doc(sources=...), "sources", "missing")


def test_unknown_element_symbol():
    one_error(doc(formula={"H": 2, "Xx": 1}), "formula.Xx", "not an element symbol")


def test_lowercase_element_suggests_symbol():
    one_error(doc(formula={"h": 2, "O": 1}), "formula.h", "did you mean 'H'")


def test_mass_differs_from_formula_warns():
    _, warnings = parse(doc(mass=19.5))
    assert any("1 %" in str(w) and w.key == "mass" for w in warnings)


def test_negative_mass():
    one_error(doc(mass=-18.0), "mass", "positive")


def test_linear_needs_one_constant():
    d = doc(shape="linear", formula={"C": 1, "O": 1}, rotor={"constants": [1.9, 1.9]},
            vibrations={"frequencies": [2143.0]})
    one_error(d, "rotor.constants", "linear", "needs 1")


def test_nonlinear_needs_three_constants():
    one_error(doc(rotor={"constants": [27.9, 14.5]}), "rotor.constants", "needs 3")


def test_atom_has_no_rotor():
    d = doc(name="O", formula={"O": 1}, shape="atom", vibrations=..., rotor={"constants": [1.0]})
    one_error(d, "rotor", "atom has no rotor")


def test_mode_count():
    one_error(doc(vibrations={"frequencies": [3657.05, 1594.75]}), "vibrations.frequencies",
              "3N−6 = 3", "3 expected")


@pytest.mark.parametrize("bad, word", [(0.0, "zero"), (-120.0, "negative")])
def test_zero_or_negative_frequency(bad, word):
    msg = one_error(doc(vibrations={"frequencies": [3657.05, bad, 3755.93]}),
                    "vibrations.frequencies[1]", word)
    assert "imaginary mode" in msg and "torsion" in msg


@pytest.mark.parametrize("bad", [0, -2, 1.5, "two", True])
def test_symmetry_positive_integer(bad):
    one_error(doc(symmetry=bad), "symmetry", "positive integer")


@pytest.mark.parametrize("bad", ["", "A" * 17, "CH3/OH", "C H4", "../x", "a*b"])
def test_name_safe_set(bad):
    one_error(doc(name=bad), "name", "not a valid record name")


def test_name_must_be_string():
    one_error(doc(name=12), "name", "not a string")


def test_non_numeric_value():
    one_error(doc(formation={"enthalpy": "minus ten"}), "formation.enthalpy", "not a number")


def test_unknown_unit():
    one_error(doc(formation={"enthalpy": 1.0, "unit": "eV/molecule"}), "formation.unit", "not a known unit")


def test_fit_range_order():
    one_error(doc(fit={"tmin": 200, "tmid": 7000, "tmax": 6000}), "fit.tmid", "not below")


def test_several_errors_reported_together():
    errs = errors(doc(symmetry=0, formula={"Q": 1}, sources=[]))
    keys = {e.split(": ")[1] for e in errs}
    assert {"symmetry", "formula.Q", "sources"} <= keys


def test_duplicate_names_across_files(tmp_path):
    for fname in ("a.yaml", "b.yaml"):
        (tmp_path / fname).write_text(yaml.safe_dump(BASE))
    with pytest.raises(InputError) as exc:
        load_database(tmp_path)
    msgs = [str(d) for d in exc.value.diagnostics]
    assert any("b.yaml: name:" in m and "already used" in m and "a.yaml" in m for m in msgs)


def test_database_reports_every_bad_file(tmp_path):
    (tmp_path / "good.yaml").write_text(yaml.safe_dump(BASE))
    (tmp_path / "bad1.yaml").write_text(yaml.safe_dump(doc(name="W1", symmetry=0)))
    (tmp_path / "bad2.yaml").write_text("name: [unclosed\n")
    with pytest.raises(InputError) as exc:
        load_database(tmp_path)
    files = {d.file.rsplit("/", 1)[-1] for d in exc.value.diagnostics}
    assert {"bad1.yaml", "bad2.yaml"} <= files
