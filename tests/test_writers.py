"""Writers: rounding-aware printing, the fixed-column layout, thermo.yaml, tables, report, determinism.

Reference coefficients: the NASA TM-4513-form data that cantera ships —
``gri30.yaml`` (GRI-Mech 3.0 thermo, Smith et al.) and ``nasa_gas.yaml``
(NASA Glenn, McBride, Zehe & Gordon 2002) — used as realistic inputs.
"""

from __future__ import annotations

import io
import json
import random
from pathlib import Path

import numpy as np
import pytest

from refdata import ROOT
from writerkit import cantera_fits, small_build

from pipeline import __version__
from pipeline.nasa7 import Nasa7Fit
from pipeline.readers import read_records
from pipeline.thermo import T_REF
from pipeline.writers import assemble, printed_fit, record_text, species_fragments
from pipeline.writers.rounding import CP_BAR, H_S_BAR, round_sig

#: the bars of the writers issue (item 2): as printed, H and S at 298.15 K and at Tmid
#: within 1e-9, Cp at Tmid within 1e-8, relative to max(|value|, 1) of Cp/R, H/RT, S/R
BARS = {"cp_r": CP_BAR, "h_rt": H_S_BAR, "s_r": H_S_BAR}


def as_printed(fit: Nasa7Fit) -> Nasa7Fit:
    """The record of ``fit`` written and read back: exactly what a solver evaluates."""
    (back,) = read_records(record_text(fit), name="record")
    return back


def assert_bars(original: Nasa7Fit, back: Nasa7Fit):
    h0, s0 = float(original.h_rt(T_REF)), float(original.s_r(T_REF))
    assert abs(float(back.h_rt(T_REF)) - h0) <= H_S_BAR * max(abs(h0), 1.0), original.name
    assert abs(float(back.s_r(T_REF)) - s0) <= H_S_BAR * max(abs(s0), 1.0), original.name
    for key, jump in back.continuity().items():
        assert jump <= BARS[key], (original.name, key, jump)


# --------------------------------------------------------------------------
# printed coefficients
# --------------------------------------------------------------------------


def test_round_sig_is_what_e15_prints():
    from pipeline.writers.formats import e15

    rng = random.Random(4)
    for _ in range(2000):
        x = rng.uniform(-1, 1) * 10 ** rng.randint(-25, 6)
        assert round_sig(x) == float(e15(x))


def test_round_sig_and_last_digit_are_those_of_the_printed_text():
    """round_sig and last_digit (made by arithmetic where that gives the same float) against
    the E15.8 text read back and its exponent: random magnitudes, nine-digit decimals
    and the halves between them (ties), their floating-point neighbours, values next to
    powers of ten and to 9.999999995·10^e (which print with the next exponent)."""
    from pipeline.writers.formats import e15
    from pipeline.writers.rounding import last_digit

    rng = random.Random(12)
    values = []
    for _ in range(20000):
        e = rng.randint(-20, 32)
        kind = rng.randrange(4)
        if kind == 0:
            x = rng.uniform(1, 10) * 10.0**e
        elif kind == 1:  # a nine-digit decimal or the half between two
            x = (rng.randrange(10**8, 10**9) + rng.choice((0.0, 0.5))) * 10.0 ** (e - 8)
        elif kind == 2:
            x = float(rng.choice(("1e%d", "9.999999995e%d", "9.9999999949999e%d")) % e)
        else:
            x = 10.0**e
        x = np.nextafter(x, rng.choice((-np.inf, np.inf))) if rng.random() < 0.4 else x
        values.append(float(x) * rng.choice((1, -1)))
    for x in values:
        text = e15(x)
        assert round_sig(x) == float(text), x
        assert last_digit(x) == 10.0 ** (int(text.rpartition("E")[2]) - 8), x


def test_bundled_fits_meet_the_bars_as_printed():
    _, _, _, fits, _ = small_build()
    for fit in fits:
        back = as_printed(fit)
        assert_bars(fit, back)
        assert back.low == printed_fit(fit).low and back.high == printed_fit(fit).high


@pytest.mark.parametrize("source", ["gri30.yaml", "nasa_gas.yaml"])
def test_published_coefficients_perturbed_meet_the_bars_as_printed(source):
    """Full-precision inputs near published sets (GRI-Mech 3.0; NASA Glenn 2002, both as
    shipped with cantera), made continuous at Tmid and perturbed in the 8th digit."""
    rng = np.random.default_rng(7)
    fits = cantera_fits(source)
    if source == "nasa_gas.yaml":
        fits = fits[::4]
    for f in fits:
        low = np.array(f.low) * (1 + 1e-8 * rng.standard_normal(7))
        high = np.array(f.high) * (1 + 1e-8 * rng.standard_normal(7))
        fit = Nasa7Fit(f.name, f.formula, f.tlow, f.tmid, f.thigh, tuple(low), tuple(high), charge=f.charge)
        back = as_printed(fit)
        assert_bars(fit, back)
        # the nudges stay far below any fit error: Cp changes by < 1e-5 relative (project bar, docs/format.md)
        T = np.linspace(fit.tlow, fit.thigh, 301)
        T = T[np.abs(T - fit.tmid) > 1.0]
        assert np.max(np.abs(back.cp_r(T) / fit.cp_r(T) - 1)) < 1e-5, f.name


def test_aimed_search_takes_a_candidate_exactly_when_it_meets_the_targets_as_printed(monkeypatch):
    """The search keeps a candidate when its printed coefficients meet every target
    (:func:`_meets`), and goes on otherwise: the flag of each state it makes is _meets of
    that state's coefficients, and each answer meets its targets.  Checked on every state
    made while printing the small build's and 20 GRI-Mech 3.0 fits, about half of them
    failing."""
    from pipeline.writers import rounding

    states, answers = [], []
    state, aimed = rounding._state, rounding._aimed
    monkeypatch.setattr(rounding, "_state", lambda *args: states.append((args, state(*args))) or states[-1][1])
    monkeypatch.setattr(rounding, "_aimed", lambda *args: answers.append((args, aimed(*args))) or answers[-1][1])
    for fit in small_build()[3] + cantera_fits("gri30.yaml")[:20]:
        printed_fit(fit)
    failed = 0
    for (a5, refix, checks), (a, x6, x7, ok) in states:
        assert ok == rounding._meets(a, checks), (a5, refix)
        failed += not ok
    assert 0 < failed < len(states) and len(answers) > 5, (failed, len(states), len(answers))
    for args, a in answers:
        assert a is None or rounding._meets(a, args[-1])


def test_printing_is_idempotent():
    for f in cantera_fits("gri30.yaml"):
        p = printed_fit(f)
        assert printed_fit(p) == p


# --------------------------------------------------------------------------
# fixed-column layout (columns as docs/format.md documents them)
# --------------------------------------------------------------------------


def parse_by_columns(record: str) -> dict:
    """Read a record strictly by the documented columns (1-based, inclusive)."""
    l1, l2, l3, l4 = record.rstrip("\n").split("\n")
    col = lambda line, a, b: line[a - 1:b]  # noqa: E731
    coeffs = [float(col(l, 15 * k + 1, 15 * k + 15)) for l, n in ((l2, 5), (l3, 5), (l4, 4)) for k in range(n)]
    elements = []
    for a in (25, 30, 35, 40, 74):
        sym, count = col(l1, a, a + 1).strip(), col(l1, a + 2, a + 4).strip()
        if sym:
            elements.append((sym, int(count)))
    return {
        "name": col(l1, 1, 18).strip(), "id": col(l1, 19, 24), "elements": elements, "phase": col(l1, 45, 45),
        "tlow": float(col(l1, 46, 55)), "thigh": float(col(l1, 56, 65)), "tmid": float(col(l1, 66, 73)),
        "numbers": [col(l, 80, 80) for l in (l1, l2, l3, l4)], "lengths": [len(l) for l in (l1, l2, l3, l4)],
        "high": coeffs[:7], "low": coeffs[7:],
    }


def test_record_columns_match_the_documented_layout():
    settings, species, _, fits, frags = small_build()
    for sp, fit, fr in zip(species, fits, frags):
        rec = parse_by_columns(fr["record"])
        p = printed_fit(fit)
        assert rec["lengths"] == [80] * 4 and rec["numbers"] == ["1", "2", "3", "4"]
        assert rec["name"] == sp.name
        assert rec["id"] == sp.sha256[:6].upper()  # stable identifier from the input, not a date
        assert rec["elements"] == list(sp.formula)
        assert rec["phase"] == "G"
        assert (rec["tlow"], rec["tmid"], rec["thigh"]) == (p.tlow, p.tmid, p.thigh)
        assert rec["high"] == list(p.high) and rec["low"] == list(p.low)  # high range first


def test_ions_carry_the_electron_and_a_fifth_element_goes_to_columns_74_78():
    """Cations as in NASA Glenn data (cantera's nasa_gas.yaml): element E with count −charge."""
    fits = {f.name: f for f in cantera_fits("nasa_gas.yaml")}
    ion = fits["NO+"]
    rec = parse_by_columns(record_text(ion))
    assert ("E", -1) in rec["elements"] and ion.charge == 1
    five = Nasa7Fit("CHNOAR", (("C", 1), ("H", 1), ("N", 1), ("O", 1), ("Ar", 1)), ion.tlow, ion.tmid,
                    ion.thigh, ion.low, ion.high)  # a layout test: five elements, coefficients of NO+
    rec = parse_by_columns(record_text(five))
    assert rec["elements"][4] == ("Ar", 1) and rec["tmid"] == printed_fit(five).tmid
    six = Nasa7Fit("X", five.formula, ion.tlow, ion.tmid, ion.thigh, ion.low, ion.high, charge=1)
    with pytest.raises(ValueError, match="do not fit"):
        record_text(six)


def test_database_file_frame():
    settings, _, _, _, frags = small_build()
    text = assemble(frags, settings)["thermo.dat"].decode()
    lines = text.split("\n")
    body = [l for l in lines if not l.startswith("!")]
    assert body[0] == "THERMO"
    assert [float(x) for x in body[1].split()] == [settings.tmin, 1000.0, settings.tmax]
    assert body[-2] == "END" and body[-1] == ""
    names = [l[:18].strip() for l in body[2:-2] if l[79] == "1"]
    assert names == sorted(names) and len(names) == len(frags)


# --------------------------------------------------------------------------
# determinism
# --------------------------------------------------------------------------


def test_batches_give_the_fragments_of_one_species_at_a_time(monkeypatch):
    """batch_fragments against species_fragments species by species: chunks of 3, species with
    and without uncertainty columns, tables on the fit grid and computed apart (1 atm; a
    25 K table step), a range narrower than the table, and a species that cannot be written
    (a 19-character name), which gets its ValueError while the others are made."""
    import dataclasses

    import pipeline.writers as writers

    settings, species, tables, fits, _ = small_build()
    items = [(sp, t, f, settings) for sp, t, f in zip(species, tables, fits)]
    items.append((dataclasses.replace(species[1], name="X" * 19), tables[1], fits[1], settings))
    items += [(sp, t, f, settings.replace(pressure="atm")) for sp, t, f, _ in items[:3]]
    items += [(sp, t, f, settings.replace(table_step=25.0)) for sp, t, f, _ in items[3:6]]
    items.append((species[2], tables[2], dataclasses.replace(fits[2], tlow=300.0, thigh=5000.0), settings))
    monkeypatch.setattr(writers, "CHUNK", 3)
    batch = writers.batch_fragments(items)
    assert len(batch) == len(items)
    for item, got in zip(items, batch):
        try:
            one = species_fragments(*item)
        except ValueError as exc:
            assert isinstance(got, ValueError) and str(got) == str(exc)
        else:
            assert got == one, item[0].name
    assert sum(isinstance(got, ValueError) for got in batch) == 1


def test_fitted_columns_and_jump_are_those_of_the_printed_polynomials():
    """The fit columns of the tables and the jump at Tmid in REPORT.md print what
    Nasa7Fit evaluates for the printed coefficients (the writers evaluate many species at
    once, point by point with each point's range)."""
    import pandas as pd

    from pipeline.writers.formats import csv_number, md_number

    settings, species, _, fits, frags = small_build()
    for sp, fit, fr in zip(species, fits, frags):
        p = printed_fit(fit)
        lines = fr["table_csv"].splitlines()
        df = pd.read_csv(io.StringIO(fr["table_csv"]), dtype=str)
        T = np.array([float(line.split(",")[0]) for line in lines[1:]])
        assert list(df["Cp fit [J/mol/K]"]) == [csv_number(x) for x in p.cp(T)]
        assert list(df["S fit [J/mol/K]"]) == [csv_number(x) for x in p.s(T)]
        assert list(df["H-H298 fit [kJ/mol]"]) == [csv_number(x) for x in (p.h(T) - float(p.h(T_REF))) / 1e3]
        assert f"| {md_number(max(p.continuity().values()), '.1e')} |" in fr["report_row"]


def test_floats_converted_together_are_their_yaml_values():
    """float_texts (which converts the floats of a thermo.yaml entry by one repr of their
    list where that holds their YAML) gives yaml_value of each float: random magnitudes
    and the floats whose repr is not their YAML (negative zero, a repr without a point,
    inf, nan), alone or among others."""
    from pipeline.writers.formats import float_texts, yaml_value

    rng = random.Random(8)
    special = [-0.0, 0.0, 1e-05, 2e+20, 1e16, 1.5e16, float("inf"), -float("inf"), float("nan"), 5e-324, -1e-300]
    for _ in range(3000):
        values = [rng.uniform(-1, 1) * 10.0 ** rng.randint(-30, 30) for _ in range(rng.randint(0, 6))]
        if values and rng.random() < 0.5:
            values[rng.randrange(len(values))] = rng.choice(special)
        assert float_texts(values) == [yaml_value(v) for v in values], values


def test_fit_quality_block_is_that_of_as_dict():
    """The writers format a FitQuality's fields directly; the text, the warnings and the
    Tmid flag are those of FitQuality.as_dict() through yaml_block, also for the floats
    that "%r" writes otherwise (negative zero, no point, inf, nan), numpy numbers, a
    limit that is set, and several warnings."""
    import dataclasses

    import pipeline.writers as writers
    from pipeline.writers.formats import yaml_block

    _, _, _, fits, _ = small_build()
    variants = []
    for k, fit in enumerate(fits):
        q = fit.quality
        variants.append(q)
        variants.append(dataclasses.replace(q, minimax_limit=q.minimax_bound * 0.5, warnings=("one | two", "three"),
                                            tmid_auto=not q.tmid_auto))
        odd = [-0.0, 1e-05, float("inf"), float("nan"), np.float64(2.5e-7), 3e20][k % 6]
        variants.append(dataclasses.replace(q, continuity_h_rt=odd, cp_r=dataclasses.replace(q.cp_r, t_abs=odd)))
        variants.append(dataclasses.replace(q, iterations=np.int64(q.iterations), second_derivative=np.bool_(True)))
    for q in variants:
        d = q.as_dict()
        assert writers._quality(q) == (yaml_block(d, 4), d["warnings"], d["tmid_auto"]), q
    assert writers._quality(None) == ("", [], False)


def test_two_renders_are_byte_identical_and_order_free():
    settings, species, tables, fits, frags = small_build()
    again = [species_fragments(sp, t, f, settings) for sp, t, f in zip(species, tables, fits)]
    assert again == frags
    shuffled = list(frags)
    random.Random(1).shuffle(shuffled)
    assert assemble(shuffled, settings) == assemble(frags, settings)


def test_outputs_hold_no_absolute_path_and_no_date():
    import re

    settings, _, _, _, frags = small_build()
    for rel, data in assemble(frags, settings).items():
        text = data.decode("utf-8")
        assert str(ROOT) not in text and str(Path.home()) not in text, rel
        assert not re.search(r"\b20\d\d-\d\d-\d\d\b", text), rel


# --------------------------------------------------------------------------
# thermo.yaml
# --------------------------------------------------------------------------


def load_thermo_yaml(data: bytes):
    import yaml

    from pipeline.safeyaml import load_yaml

    doc = yaml.safe_load(data.decode())  # a YAML 1.1 loader
    assert load_yaml(data.decode()) == doc  # and this project's YAML 1.2 loader: the same values
    return doc


def test_thermo_yaml_round_trips_exactly_and_records_provenance():
    settings, species, tables, fits, frags = small_build()
    doc = load_thermo_yaml(assemble(frags, settings)["thermo.yaml"])
    assert doc["format"] == "statherm-thermo" and doc["format_version"] == 1
    entries = {e["name"]: e for e in doc["species"]}
    for sp, table, fit in zip(species, tables, fits):
        e = entries[sp.name]
        assert e["composition"] == dict(sp.formula) and e["charge"] == sp.charge
        assert e["ranges"][0]["coefficients"] == list(fit.low)  # repr-exact floats
        assert e["ranges"][1]["coefficients"] == list(fit.high)
        assert (e["ranges"][0]["tmin"], e["tmid"], e["ranges"][1]["tmax"]) == (fit.tlow, fit.tmid, fit.thigh)
        assert e["reference_state"]["dhf298"] == table.dhf298 and e["reference_state"]["s298"] == table.s298
        prov = e["provenance"]
        assert prov["sha256"] == sp.sha256 and prov["tool_version"] == __version__
        assert prov["model"] == settings.for_species(sp).model_key()
        assert prov["reference_pressure"] == settings.pressure_pa
        assert prov["species_file"] == Path(sp.path).name  # the file name only, never a full path
        assert e["fit_quality"] == json.loads(json.dumps(fit.quality.as_dict()))
        assert e["sources"] == list(sp.sources)


def test_thermo_yaml_validates_against_the_shipped_schema():
    import jsonschema

    settings, _, _, _, frags = small_build()
    schema = json.loads((ROOT / "pipeline" / "schema" / "thermo.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    doc = load_thermo_yaml(assemble(frags, settings)["thermo.yaml"])
    jsonschema.Draft202012Validator(schema).validate(doc)
    broken = json.loads(json.dumps(doc))
    broken["species"][0]["ranges"][0]["coefficients"] = broken["species"][0]["ranges"][0]["coefficients"][:6]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(broken, schema)
    del broken["species"][1]["provenance"]["sha256"]
    assert not jsonschema.Draft202012Validator(schema).is_valid(broken)


def test_strings_that_yaml_reads_otherwise_stay_strings():
    from pipeline.writers.formats import yaml_value

    import yaml

    for value in ["NO", "Y", "off", "1e3", "3.0", "null", "a: b", "#x", "ok\u2028line", "'q'", '"dq"']:
        assert yaml.safe_load(yaml_value(value)) == value
    for x in (1e-05, -3e20, 0.1, 2.5, 1e100, 5e-324):
        assert yaml.safe_load(yaml_value(x)) == x


# --------------------------------------------------------------------------
# tables and report
# --------------------------------------------------------------------------


def test_tables_read_with_pandas_and_hold_table_fit_and_residuals():
    import pandas as pd

    settings, species, _, fits, frags = small_build()
    files = assemble(frags, settings)
    for sp, fit in zip(species, fits):
        df = pd.read_csv(io.BytesIO(files[f"tables/{sp.name}.csv"]))
        T = df["T [K]"].to_numpy()
        assert T298 in T and np.all(np.isin([200.0, 300.0, 1000.0, 6000.0], T))
        assert np.all(np.diff(T) > 0)
        p = printed_fit(fit)
        assert np.allclose(df["Cp fit [J/mol/K]"], p.cp(T), rtol=0, atol=1e-6)
        assert np.allclose(df["Cp residual [J/mol/K]"], df["Cp fit [J/mol/K]"] - df["Cp [J/mol/K]"], atol=2e-6)
        assert np.allclose(df["S residual [J/mol/K]"], df["S fit [J/mol/K]"] - df["S [J/mol/K]"], atol=2e-6)
        row = df[df["T [K]"] == T298].iloc[0]
        assert row["H-H298 [kJ/mol]"] == 0.0 and abs(row["H-H298 fit [kJ/mol]"]) < 1e-6


T298 = 298.15


def test_whole_table_formatting_prints_every_cell_as_csv_number():
    """csv_rows (array arithmetic for a whole table) against Python's correctly rounded
    "%.Nf" per cell (csv_number): random magnitudes, exact halfway cases (k / 2**m), their
    floating-point neighbours, tiny negatives that print as zero, values past the fast path."""
    from pipeline.writers.formats import csv_number, csv_rows

    rng = np.random.default_rng(3)
    formats = [".2f", ".6f", ".1f", ".3f", ".6f", ".4f", ".5f"]
    places = np.array([2, 6, 1, 3, 6, 4, 5])
    for trial in range(400):
        shape = (int(rng.integers(1, 30)), len(formats))
        kind = trial % 5
        if kind == 0:
            X = rng.uniform(-1, 1, shape) * 10.0 ** rng.integers(-12, 8, shape)
        elif kind == 1:
            X = rng.integers(-10**6, 10**6, shape) / 2.0 ** rng.integers(0, 30, shape)
        elif kind == 2:
            half = (rng.integers(-10**8, 10**8, shape) + 0.5) / 10.0 ** places
            X = np.where(rng.random(shape) < 0.3, half, np.nextafter(half, rng.choice([-np.inf, np.inf], shape)))
        elif kind == 3:
            X = rng.normal(0.0, 1e-6, shape)
        else:
            X = rng.choice([0.0, -0.0, -5e-7, 5e-7, 0.5, -2.5, 1e-300, 99999999.99999999, 1e8, -3e12, np.nan], shape)
        expected = "".join(",".join(csv_number(v, f) for v, f in zip(row, formats)) + "\n" for row in X.tolist())
        assert csv_rows(X, formats) == expected, X


def test_tables_of_many_species_are_cut_where_each_begins():
    """csv_tables against csv_number cell by cell: runs of columns with equal decimals
    (worked on together), the last column's decimals also met before it (its words end in
    a newline), columns of one, two and three integer groups side by side, in row and in
    column order (the writers pass the transpose of their column-major table)."""
    from pipeline.writers.formats import csv_number, csv_tables

    rng = np.random.default_rng(11)
    formats = [".2f", ".6f", ".6f", ".6f", ".1f", ".1f", ".6f", ".3f", ".6f", ".6f"]
    header = [f"c{j}" for j in range(len(formats))]
    for trial in range(300):
        counts = [int(c) for c in rng.integers(1, 8, int(rng.integers(1, 6)))]
        shape = (sum(counts), len(formats))
        magnitude = 10.0 ** rng.integers(-8, 8, len(formats))  # per column: some need a second or third group
        X = rng.uniform(-1, 1, shape) * magnitude
        if trial % 3 == 0:
            X[rng.random(shape) < 0.3] = 0.0
        if trial % 2:
            X = np.ascontiguousarray(X.T).T
        rows = [",".join(csv_number(v, f) for v, f in zip(row, formats)) + "\n" for row in X.tolist()]
        cuts = np.cumsum([0] + counts).tolist()
        expected = [",".join(header) + "\n" + "".join(rows[a:b]) for a, b in zip(cuts[:-1], cuts[1:])]
        assert csv_tables(header, X, formats, counts) == expected, (X, counts)


def test_report_has_one_row_per_species_in_name_order():
    settings, species, _, _, frags = small_build()
    report = assemble(frags, settings)["REPORT.md"].decode()
    rows = [l for l in report.splitlines() if l.startswith("| `")]
    assert [r.split("`")[1] for r in rows] == sorted(sp.name for sp in species)
    assert "## Caution" in report and "## How the tables were made" in report
    width = next(l for l in report.splitlines() if l.startswith("|---")).count("|")
    assert all(r.count("|") == width for r in rows)


_DIGESTS = r"""
import hashlib, json, sys
sys.path.insert(0, sys.argv[1])
from writerkit import small_build
from pipeline.writers import assemble
settings, *_, frags = small_build()
print(json.dumps({k: hashlib.sha256(v).hexdigest() for k, v in assemble(frags, settings).items()}))
"""


def test_builds_in_separate_processes_are_byte_identical():
    """Same inputs, same bytes — across interpreter runs with different hash seeds."""
    import hashlib
    import os
    import subprocess
    import sys

    settings, *_, frags = small_build()
    here = {k: hashlib.sha256(v).hexdigest() for k, v in assemble(frags, settings).items()}
    tests = str(Path(__file__).resolve().parent)
    for seed in ("1", "2"):
        run = subprocess.run([sys.executable, "-c", _DIGESTS, tests], capture_output=True, text=True, cwd=ROOT,
                             env={**os.environ, "PYTHONHASHSEED": seed}, check=True)
        assert json.loads(run.stdout) == here


def test_remembered_flow_mappings_are_those_of_yaml_value():
    """formats._flow_cached remembers a small mapping's text by its items and their types:
    mappings whose values compare equal but differ in type or sign (1, 1.0, True; 0.0, -0.0)
    or are NaN must still get the text yaml_value gives each, asked first or again."""
    from pipeline.writers import formats

    values = [1, 1.0, True, 0, 0.0, -0.0, False, None, "1", float("nan"), float("inf"), 2.5]
    mappings = [{"a": v} for v in values] + [{"C": 1, "H": 4}, {"C": 1.0, "H": 4}, {"C": True, "H": 4}]
    for _ in range(2):  # the second pass reads what the first remembered
        for m in mappings:
            assert formats._flow_cached(m) == formats.yaml_value(m), m
