"""pipeline.codata: the constants are scipy.constants' own floats, memoised and re-read safely."""

from __future__ import annotations

import ast
import importlib.machinery
import json
import os
import sys
from pathlib import Path
from types import SimpleNamespace

import pytest
from scipy import constants as scipy_constants

from pipeline import codata

PACKAGE = Path(codata.__file__).resolve().parent


def test_values_are_scipys_bit_for_bit():
    for name in codata.NAMES:
        assert getattr(codata.C, name) == getattr(scipy_constants, name), name
    for name in codata.PHYSICAL:
        assert codata.C.physical_constants[name] == tuple(scipy_constants.physical_constants[name])


def test_other_names_come_from_scipy():
    assert codata.C.zero_Celsius == scipy_constants.zero_Celsius


def test_every_constant_the_package_uses_is_memoised():
    """Each ``C.<name>`` in a module importing C from pipeline.codata is in NAMES (else
    the build would import scipy.constants after all)."""
    used = set()
    for path in PACKAGE.rglob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        imports_c = any(isinstance(n, ast.ImportFrom) and n.module == "pipeline.codata"
                        and any(a.name == "C" for a in n.names) for n in ast.walk(tree))
        if imports_c:
            used |= {n.attr for n in ast.walk(tree)
                     if isinstance(n, ast.Attribute) and isinstance(n.value, ast.Name) and n.value.id == "C"}
    used -= {"physical_constants"}
    assert used, "no module uses the constants?"
    assert used <= set(codata.NAMES), sorted(used - set(codata.NAMES))


def test_memo_written_then_read_without_scipy(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "dont_write_bytecode", False)
    first = codata.load(str(tmp_path))
    (memo,) = tmp_path.glob("codata-*.json")
    assert memo.as_posix() == codata.memo_path(str(tmp_path))

    def no_import():
        raise AssertionError("scipy.constants imported although the memo is there")

    monkeypatch.setattr(codata, "from_scipy", no_import)
    again = codata.load(str(tmp_path))
    for name in codata.NAMES:
        assert getattr(again, name) == getattr(first, name) == getattr(scipy_constants, name)
    assert again.physical_constants == first.physical_constants


@pytest.mark.parametrize("text", ["", "{", "[]", '{"values": {}, "physical": {}}',
                                  '{"values": {"R": "8.3"}, "physical": {}}'])
def test_a_broken_memo_is_ignored_and_replaced(tmp_path, monkeypatch, text):
    monkeypatch.setattr(sys, "dont_write_bytecode", False)
    path = Path(codata.memo_path(str(tmp_path)))
    path.write_text(text, encoding="utf-8")
    got = codata.load(str(tmp_path))
    assert got.R == scipy_constants.R
    assert json.loads(path.read_text(encoding="utf-8"))["values"]["R"] == scipy_constants.R


def test_no_memo_when_bytecode_writing_is_off(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "dont_write_bytecode", True)
    assert codata.load(str(tmp_path)).h == scipy_constants.h
    assert not list(tmp_path.iterdir())


def test_unwritable_folder_only_costs_the_import(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "dont_write_bytecode", False)
    blocker = tmp_path / "file"
    blocker.write_text("not a folder", encoding="utf-8")
    assert codata.load(str(blocker / "sub")).k == scipy_constants.k
    assert not codata.write_memo(str(blocker / "sub" / "m.json"), {}, {})


def test_key_follows_scipys_files(tmp_path, monkeypatch):
    """A changed (upgraded, reinstalled) scipy source gives another memo name; a missing one none."""
    fake = tmp_path / "scipy"
    for rel in codata._SOURCES:
        (fake / rel).parent.mkdir(parents=True, exist_ok=True)
        (fake / rel).write_text("# a\n", encoding="utf-8")
    spec = SimpleNamespace(submodule_search_locations=[str(fake)])
    monkeypatch.setattr(importlib.machinery.PathFinder, "find_spec", lambda name: spec)
    one = codata.memo_path(str(tmp_path))
    target = fake / codata._SOURCES[0]
    st = target.stat()
    os.utime(target, ns=(st.st_atime_ns, st.st_mtime_ns + 1_000_000_000))
    two = codata.memo_path(str(tmp_path))
    assert one and two and one != two
    target.unlink()
    assert codata.memo_path(str(tmp_path)) is None


def test_cold_build_with_a_memo_imports_no_scipy_constants(tmp_path):
    """With the memo in place (as after a first run), a cold build never imports scipy.constants."""
    from buildkit import database, imported_modules, run_process

    path = codata.memo_path()
    assert path and codata.write_memo(path, *codata.from_scipy())  # what the first run writes
    species, _ = database(tmp_path)
    proc = run_process("build", "-q", "--jobs", "1", "--species", str(species), "--out", str(tmp_path / "cold"),
                       env={"PYTHONPROFILEIMPORTTIME": "1"})
    assert proc.returncode == 0, proc.stderr
    imported = imported_modules(proc.stderr)
    assert "pipeline.fit" in imported  # it did compute
    assert "scipy.constants" not in imported and "scipy._lib._array_api" not in imported
