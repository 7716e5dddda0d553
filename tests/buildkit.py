"""Helpers for the build, bad-input and diff tests: a small database built once, copied per test."""

from __future__ import annotations

import atexit
import contextlib
import functools
import io
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from refdata import ROOT, SPECIES_DIR

#: bundled species used by the build tests (quick to fit: atom, linear and nonlinear RRHO molecules)
SMALL = ("Ar", "CH4", "CO2", "H2O", "HO2")


def run(*argv: str) -> tuple[int, str, str]:
    """``statherm ARGV`` in this process: (exit code, stdout, stderr)."""
    from pipeline.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(list(argv))
    return rc, out.getvalue(), err.getvalue()


def run_process(*argv: str, env: dict | None = None, **kw) -> subprocess.CompletedProcess:
    """``python -m pipeline ARGV`` as a separate process, from the project root."""
    return subprocess.run([sys.executable, "-m", "pipeline", *argv], cwd=ROOT, capture_output=True, text=True,
                          env={**os.environ, **(env or {})}, **kw)


def popen(*argv: str, env: dict | None = None) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "pipeline", *argv], cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env={**os.environ, **(env or {})})


def imported_modules(importtime_stderr: str) -> set[str]:
    """The modules a ``python -X importtime`` run imported, from its standard error."""
    return {line.split("|")[-1].strip() for line in importtime_stderr.splitlines() if line.startswith("import time:")}


def snapshot(folder: Path) -> dict[str, tuple[bytes, int]]:
    """Every output file (the cache excluded): relative path → (bytes, mtime_ns)."""
    out = {}
    for p in sorted(folder.rglob("*")):
        rel = p.relative_to(folder)
        if p.is_file() and not rel.parts[0].startswith("."):
            out[rel.as_posix()] = (p.read_bytes(), p.stat().st_mtime_ns)
    return out


@functools.lru_cache(maxsize=None)
def _template() -> Path:
    """A database of the SMALL species, built once per test session (output and cache)."""
    root = Path(tempfile.mkdtemp(prefix="statherm-test-"))
    atexit.register(shutil.rmtree, root, True)  # kept for the session's tests, gone after
    (root / "species").mkdir()
    for name in SMALL:
        shutil.copy2(SPECIES_DIR / f"{name}.yaml", root / "species" / f"{name}.yaml")
    rc, _, err = run("build", "--species", str(root / "species"), "--out", str(root / "output"), "--quiet")
    assert rc == 0, err
    return root


def database(tmp_path: Path) -> tuple[Path, Path]:
    """A fresh copy of the built SMALL database in ``tmp_path``: (species folder, output folder)."""
    src = _template()
    shutil.copytree(src / "species", tmp_path / "species")
    shutil.copytree(src / "output", tmp_path / "output")
    return tmp_path / "species", tmp_path / "output"


def edit(path: Path, old: str, new: str) -> None:
    text = path.read_text(encoding="utf-8")
    assert old in text, (path, old)
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
