"""Fuzzing the species loader: whatever the document, an InputError (or a Species), never a traceback."""

from __future__ import annotations

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from buildkit import SPECIES_DIR
from pipeline.diagnostics import InputError
from pipeline.safeyaml import load_yaml
from pipeline.species import _TOP_KEYS, Species, parse_species

VALID = [p.read_text(encoding="utf-8") for p in sorted(SPECIES_DIR.glob("*.yaml"))]
KEYS = sorted(_TOP_KEYS) + ["constants", "frequencies", "unit", "levels", "enthalpy", "tmin", "tmid", "tmax",
                             "O", "H", "C", "N", "Xx", "moments", "geometry", "scale", "temperature"]

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-10**6, 10**6),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=12),
    st.sampled_from(["cm-1", "GHz", "kJ/mol", "atom", "linear", "nonlinear", "auto", "NO", "1e3", "-0"]),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.sampled_from(KEYS), inner, max_size=4)),
    max_leaves=8,
)
documents = st.one_of(
    st.dictionaries(st.sampled_from(KEYS), values, max_size=12),
    values,
)

FUZZ = settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
_Dumper = getattr(yaml, "CSafeDumper", yaml.SafeDumper)
PARSED = [load_yaml(t) for t in VALID]


def _dump(doc) -> bytes:
    return yaml.dump(doc, Dumper=_Dumper, allow_unicode=True).encode()


def _load(data: bytes) -> None:
    try:
        sp, warnings = parse_species(data, "fuzz.yaml")
    except InputError as exc:
        assert exc.diagnostics
        for d in exc.diagnostics:
            assert d.file == "fuzz.yaml" and d.message
        return
    assert isinstance(sp, Species)


@settings(FUZZ, max_examples=200)
@given(documents)
def test_generated_documents(doc):
    _load(_dump(doc))


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))


@FUZZ
@given(st.sampled_from(range(len(PARSED))), st.data())
def test_valid_files_with_one_value_replaced(index, data):
    """A bundled species with the value at one key path replaced (or the key removed)."""
    import copy

    doc = copy.deepcopy(PARSED[index])
    path = data.draw(st.sampled_from([p for p in _paths(doc) if p]))
    parent = doc
    for step in path[:-1]:
        parent = parent[step]
    if data.draw(st.booleans()) and isinstance(parent, dict):
        del parent[path[-1]]
    else:
        parent[path[-1]] = data.draw(values)
    _load(_dump(doc))


@FUZZ
@given(st.sampled_from(VALID), st.data())
def test_mutated_species_files(text, data):
    """Bundled species files with random cuts, insertions and replacements (valid UTF-8 or not)."""
    raw = text.encode()
    for _ in range(data.draw(st.integers(1, 4))):
        i = data.draw(st.integers(0, len(raw)))
        j = data.draw(st.integers(i, min(len(raw), i + 12)))
        raw = raw[:i] + data.draw(st.binary(max_size=6) | st.sampled_from(
            [b"", b":", b"-", b"[", b"{", b"!!python/object:os.system", b"&a *a", b"\t", b"0", b"e"])) + raw[j:]
    _load(raw)


def _reference_load(text: str):
    """The loader's documents as PyYAML's own constructors build them (SpeciesLoader's
    resolvers and constructors, without load_yaml's direct node conversion)."""
    from pipeline.safeyaml import SpeciesLoader

    return yaml.load(text, Loader=SpeciesLoader)  # noqa: S506 - safe loader subclass


def _outcome(fn, text):
    try:
        value = fn(text)
    except (yaml.YAMLError, ValueError, KeyError, TypeError) as exc:
        return ("error", type(exc).__name__)
    except RecursionError:
        return ("error", "RecursionError")
    # through repr: NaN == NaN as text, and 1, 1.0 and True differ
    return ("ok", repr(value))


@FUZZ
@given(st.one_of(documents.map(lambda d: _dump(d).decode()),
                 st.sampled_from(VALID).flatmap(
                     lambda t: st.tuples(st.integers(0, len(t)), st.sampled_from(
                         ["", ": ", "!!float ", "!!int ", "!!bool ", "!!str ", "&a ", "*a ", "- ", "{", "]",
                          ".inf", "-.NaN", "017", "+3", "1_0", "0x1F", "yes", "~", "\n  ", "<<: "]))
                     .map(lambda c: t[:c[0]] + c[1] + t[c[0]:]))))
def test_load_yaml_agrees_with_pyyaml_constructors(text):
    """load_yaml turns libyaml's nodes into values itself; it must give what PyYAML's
    constructors give for the same resolvers (or fail where they fail)."""
    new, ref = _outcome(load_yaml, text), _outcome(_reference_load, text)
    if new == ("error", "ConstructorError") and ref[0] == "ok":  # a document that contains itself
        assert "[...]" in ref[1] or "{...}" in ref[1], (text, ref)
        return
    assert new == ref


def test_load_yaml_refuses_a_document_that_contains_itself():
    assert _outcome(load_yaml, "a: &x [1, *x]") == ("error", "ConstructorError")
    assert "[...]" in _outcome(_reference_load, "a: &x [1, *x]")[1]
