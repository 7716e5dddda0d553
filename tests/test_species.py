"""Species-file loading: units, YAML safety and one test per validation error."""

from __future__ import annotations

import copy

import pytest
import yaml
from scipy import constants as C

from pipeline.diagnostics import InputError
from pipeline.species import load_database, load_yaml, parse_species

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


# --------------------------------------------------------------------------
# The plain-file reader (species._plain) against the full checks (species._build)
# --------------------------------------------------------------------------


def _full(d, file="X.yaml", digest="0" * 64):
    """What _build makes of a document: (species or None, its diagnostics)."""
    from pipeline.species import _build, _Checker

    ck = _Checker(file)
    sp = _build(ck, d, digest)
    return (None if ck.failed else sp), ck.diagnostics


def _same_as_full(d) -> bool:
    """If _plain accepts ``d``, _build accepts it too, silently, with the same fields and bits.

    Returns whether _plain accepted it."""
    import pickle

    from pipeline.species import _plain

    fast = _plain(copy.deepcopy(d), "X.yaml", "0" * 64)
    if fast is None:
        return False
    slow, diags = _full(copy.deepcopy(d))
    assert slow is not None and not diags, diags
    assert fast == slow
    assert [(k, repr(v)) for k, v in vars(fast).items()] == [(k, repr(v)) for k, v in vars(slow).items()]
    assert pickle.dumps(fast) == pickle.dumps(slow)
    return True


def _plain_documents():
    """The bundled species and 120 benchmark species (pipeline.bench.synthesise: a load, not data)."""
    import tempfile
    from pathlib import Path

    from buildkit import SPECIES_DIR
    from pipeline.bench import synthesise

    docs = [load_yaml(p.read_text(encoding="utf-8")) for p in sorted(SPECIES_DIR.glob("*.yaml"))
            if p.name != "statherm.yaml"]
    with tempfile.TemporaryDirectory() as tmp:
        docs += [load_yaml(p.read_text(encoding="utf-8")) for p in synthesise(120, Path(tmp), seed=3)]
    return docs


PLAIN_DOCS = _plain_documents()


def test_plain_reader_builds_what_the_full_checks_build():
    """Every bundled and benchmark file the plain reader takes gives the Species of _build;
    the benchmark files (basic blocks only) all take the plain path."""
    taken = [_same_as_full(d) for d in PLAIN_DOCS]
    assert all(taken[-120:])
    assert _same_as_full(doc(mass=18.0, charge=0, optical_isomers=1, notes="n",
                             electronic={"unit": "K", "levels": [[3, 100.0], [1, 0]]},
                             formation={"enthalpy": -57.8, "unit": "kcal/mol", "temperature": 0,
                                        "uncertainty": 0.1},
                             vibrations={"frequencies": [3657, 1594.75, 3755.93], "scale": 0.97}))
    assert _same_as_full(doc(rotor={"moments": [0.6, 1.2, 1.8]}))


@pytest.mark.parametrize("changes", [
    {"mass": 19.5},                                    # the 1 % mass warning
    {"mass": 18.015, "charge": 1.0},                   # an integer written as a float
    {"symmetry": 2.0},
    {"formula": {"H": 2.0, "O": 1}},
    {"rotor": {"constants": [27.88, 14.52, 9.28], "uncertainty": 0.01}},
    {"vibrations": {"frequencies": [3657.05, 1594.75, 3755.93], "uncertainties": [1, 1, 1]}},
    {"fit": {"tmid": 1200}},
])
def test_plain_reader_leaves_other_files_to_the_full_checks(changes):
    """Files with a warning, or values and blocks the plain reader does not read itself,
    go through _build (and keep its messages)."""
    from pipeline.species import _plain

    assert _plain(doc(**changes), "X.yaml", "0" * 64) is None


def test_plain_reader_never_accepts_what_the_full_checks_refuse():
    """Each value of plain documents replaced by other values, or its key removed: whenever the
    plain reader accepts the result, _build accepts it silently, with the same Species.  The
    replacement values are edge cases chosen to probe the checks (a load, not data)."""
    others = [None, True, False, 0, -1, 1, 2, 3, 1.5, 0.0, -0.0, -2.5, 1e308, float("inf"), float("nan"),
              "", " ", "x", "cm-1", "GHz", "K", "eV", "kcal/mol", "J/mol", "amu*angstrom^2", "g*cm^2", "linear",
              "atom", "nonlinear", 10**400, [], [0.0], [1.0], [1, 2], [1.0, 2.0, 3.0], [[1, 0.0]], [[2, 0.0], [1, 5.0]],
              {}, {"C": 1}, {"H": 1}, {"O": 2}]

    def paths(node, prefix=()):
        if prefix:
            yield prefix
        if isinstance(node, dict):
            for k, v in node.items():
                yield from paths(v, prefix + (k,))
        elif isinstance(node, list):
            for i, v in enumerate(node):
                yield from paths(v, prefix + (i,))

    accepted = 0
    for base in PLAIN_DOCS[:33:4] + PLAIN_DOCS[-120::15]:
        for path in paths(base):
            for value in others + [...]:
                d = copy.deepcopy(base)
                parent = d
                for step in path[:-1]:
                    parent = parent[step]
                if value is ...:
                    if not isinstance(parent, dict):
                        continue
                    del parent[path[-1]]
                else:
                    parent[path[-1]] = value
                accepted += _same_as_full(d)
    assert accepted  # some replacements stay valid (e.g. another unit, count or number)
