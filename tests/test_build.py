"""The database as a build: incremental, all-or-nothing, atomic, locked, sharded, checked."""

from __future__ import annotations

import json
import os
import shutil
import signal
import sys
import time
from pathlib import Path

import pytest

from buildkit import SMALL, database, edit, imported_modules, popen, run, run_process, snapshot

# --------------------------------------------------------------------------
# incremental rebuilds
# --------------------------------------------------------------------------


def test_rebuild_of_unchanged_inputs_writes_nothing(tmp_path):
    species, out = database(tmp_path)
    before = snapshot(out)
    rc, _, err = run("build", "--species", str(species), "--out", str(out))
    assert rc == 0, err
    assert snapshot(out) == before  # same bytes and same mtimes


def test_no_op_rebuild_imports_no_numerics(tmp_path):
    import subprocess

    species, out = database(tmp_path)

    from refdata import ROOT

    proc = subprocess.run([sys.executable, "-X", "importtime", "-m", "pipeline", "build", "--species", str(species),
                           "--out", str(out), "--verbose"], cwd=ROOT, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "up to date" in proc.stderr
    imported = imported_modules(proc.stderr)
    for heavy in ("numpy", "yaml", "scipy", "pandas", "jinja2", "pipeline.species", "pipeline.fit"):
        assert heavy not in imported


def test_one_edited_species_changes_only_its_files(tmp_path):
    species, out = database(tmp_path)
    before = snapshot(out)
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--verbose")
    assert rc == 0, err
    assert "1 computed" in err
    after = snapshot(out)
    assert set(after) == set(before)
    changed = {rel for rel in after if after[rel] != before[rel]}
    assert any("CH4" in Path(rel).name for rel in changed)
    for rel in changed:  # the database files, and CH4's own files
        assert "/" not in rel or "CH4" in Path(rel).name, rel
    for rel in before:  # every other species' files keep their bytes and their mtime
        if "/" in rel and "CH4" not in Path(rel).name:
            assert after[rel] == before[rel], rel
    from pipeline.readers import read_records

    old = {f.name: f for f in read_records(before["thermo.dat"][0].decode())}
    new = {f.name: f for f in read_records(after["thermo.dat"][0].decode())}
    assert {n for n in new if new[n] != old[n]} == {"CH4"}  # only its record changed


def test_removed_species_leaves_no_files(tmp_path):
    species, out = database(tmp_path)
    (species / "HO2.yaml").unlink()
    rc, _, err = run("build", "--species", str(species), "--out", str(out))
    assert rc == 0, err
    assert not [rel for rel in snapshot(out) if "HO2" in Path(rel).name]
    assert "HO2" not in (out / "thermo.dat").read_text()


def test_rebuild_after_deleting_the_cache_gives_the_same_bytes_and_keeps_mtimes(tmp_path):
    species, out = database(tmp_path)
    before = snapshot(out)
    shutil.rmtree(out / ".statherm-cache")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--verbose")
    assert rc == 0, err
    assert f"{len(SMALL)} computed" in err
    assert snapshot(out) == before


def test_jobs_shards_and_reading_ahead_give_the_same_bytes(tmp_path, monkeypatch):
    import pipeline.build as b
    from pipeline.bench import synthesise

    monkeypatch.setattr(b, "READ_AHEAD_MIN", 16)  # so that each shard reads ahead too
    n = 80  # enough species for two worker processes
    species = tmp_path / "species"
    synthesise(n, species)
    results = {}
    read = []
    real = b._read_ahead
    monkeypatch.setattr(b, "_read_ahead", lambda *a: read.append(real(*a)) or read[-1])
    for name, runs in (("serial", [["--jobs", "1"]]), ("jobs", [["--jobs", "2"]]),
                       ("shards", [["--shard", "1/2"], ["--shard", "2/2"], []]), ("no-read-ahead", [[]])):
        if name == "no-read-ahead":
            monkeypatch.setattr(b, "READ_AHEAD_MIN", 10**9)
        dest = tmp_path / name
        for extra in runs:
            rc, _, err = run("build", "--species", str(species), "--out", str(dest), "--verbose", *extra)
            assert rc == 0, err
        if name == "shards":
            assert f"(0 computed, {n} cached)" in err  # the final build only assembles what the shards cached
        results[name] = {rel: b for rel, (b, _) in snapshot(dest).items()}
    if len(os.sched_getaffinity(0)) > 1:  # read ahead in the cold builds (and the shards), not when all is cached
        assert [r is not None for r in read] == [True, True, True, True, False, False]
    assert len(results["serial"]) > n
    for name in ("jobs", "shards", "no-read-ahead"):
        assert results[name] == results["serial"], name


def test_reading_ahead_leaves_bad_files_to_be_reported(tmp_path):
    import pipeline.build as b
    from pipeline.bench import synthesise

    species = tmp_path / "species"
    synthesise(b.READ_AHEAD_MIN + 4, species)
    (species / "zz-syntax.yaml").write_text("name: ZZ\nformula: {H: 2\n", encoding="utf-8")
    (species / "zz-bytes.yaml").write_bytes(b"name: Z\xff\n")
    rc, _, err = run("build", "--species", str(species), "--out", str(tmp_path / "out"))
    assert rc == 1
    assert "zz-syntax.yaml: line 3, column 1: YAML syntax error" in err
    assert "zz-bytes.yaml: is not UTF-8 text" in err
    assert "Traceback" not in err


def test_worker_errors_come_in_file_order_whatever_finishes_first(tmp_path, monkeypatch):
    """Bad files in several chunks of a two-worker build are reported as a serial build reports them."""
    import pipeline.build as b
    from pipeline.bench import synthesise

    species = tmp_path / "species"
    paths = synthesise(40, species)
    for k in (3, 17, 25, 38):  # spread over the four chunks below
        edit(paths[k], "symmetry: ", "symmetry: -")
    monkeypatch.setattr(b, "CHUNK_MAX", 10)  # 40 species: four chunks
    said = {}
    for jobs in ("1", "2"):
        rc, _, err = run("build", "--species", str(species), "--out", str(tmp_path / jobs), "--jobs", jobs)
        assert rc == 1
        said[jobs] = [line for line in err.splitlines() if "symmetry" in line]
    assert len(said["1"]) == 4 and said["2"] == said["1"]


def test_workers_store_their_packs_for_the_next_build(tmp_path):
    """Workers store their cache packs after sending their results; the build waits for them,
    so a rebuild with one species edited computes that one only."""
    from pipeline.bench import synthesise

    species, out = tmp_path / "species", tmp_path / "out"
    paths = synthesise(40, species)
    assert run("build", "--species", str(species), "--out", str(out), "--jobs", "2", "--quiet")[0] == 0
    packs = os.listdir(out / ".statherm-cache" / "entries")
    assert len(packs) == 2  # one per chunk
    paths[7].write_text(paths[7].read_text(encoding="utf-8") + "notes: edited\n", encoding="utf-8")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--jobs", "2")
    assert rc == 0 and "(1 computed, 39 cached)" in err, err


def test_a_killed_worker_fails_the_build_and_leaves_the_output(tmp_path):
    """A worker process killed mid-build (STATHERM_FAULT=worker: SIGKILL before its first chunk) is
    an error the parent reports; it neither waits forever nor writes anything."""
    from pipeline.bench import synthesise

    species, out = tmp_path / "species", tmp_path / "out"
    paths = synthesise(24, species)  # enough for two workers
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    before = snapshot(out)
    for path in paths:  # all to compute again, in two workers
        path.write_text(path.read_text(encoding="utf-8") + "notes: edited\n", encoding="utf-8")
    proc = run_process("build", "--species", str(species), "--out", str(out), "--jobs", "2",
                       env={"STATHERM_FAULT": "worker"}, timeout=120)
    assert proc.returncode == 3, proc.stderr
    assert f"worker process ended early (signal {signal.SIGKILL})" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert snapshot(out) == before
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    assert snapshot(out) != before


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="pipe capacity is a Linux setting")
def test_a_childs_pipe_holds_a_whole_result_chunk():
    """A worker's result pipe is widened to PIPE_BYTES (or the system's limit), and a
    message of that size still arrives whole."""
    import fcntl

    import pipeline.build as b

    limit = int(Path("/proc/sys/fs/pipe-max-size").read_text())
    child, receive = b._child(_send_blob, (b.PIPE_BYTES // 2,))
    try:
        assert fcntl.fcntl(receive.fileno(), fcntl.F_GETPIPE_SZ) >= min(b.PIPE_BYTES, limit)
        assert receive.recv_bytes() == b"x" * (b.PIPE_BYTES // 2)
    finally:
        receive.close()
        child.join()
    assert child.exitcode == 0


def _send_blob(size, conn):
    conn.send_bytes(b"x" * size)
    conn.close()


def test_a_worker_exception_is_raised_in_the_parent_with_its_traceback():
    import multiprocessing
    import pickle

    import pipeline.build as b

    # settings=None makes _compute fail in the worker: the same exception type comes back
    workers = b._Workers([[("k", "x.yaml", b"name: X\n", None)]] * 2, 2, (None, {}, None, None))
    with pytest.raises(AttributeError) as caught:
        list(workers.results())
    assert workers.stored() == set()  # and the workers are gone
    assert isinstance(caught.value.__cause__, b.WorkerError)
    assert "in _compute" in str(caught.value.__cause__)  # the worker's traceback text

    class Local(Exception):  # a local class does not pickle: the worker sends its text instead
        pass

    def fail(*_):
        raise Local("no luck")

    receive, send = multiprocessing.Pipe(duplex=False)
    real, b._compute = b._compute, fail
    try:
        b._work([[]], multiprocessing.Value("l", 0), None, {}, None, None, send)
    finally:
        b._compute = real
    i, kind, (exc, trace) = pickle.loads(receive.recv_bytes())
    assert (i, kind) == (None, "error") and isinstance(exc, b.WorkerError) and str(exc) == "Local: no luck"
    assert "no luck" in trace


def test_read_ahead_gives_the_same_documents_whoever_reads_them(tmp_path, monkeypatch):
    """The parent and the read-ahead child share the files; a child that reads none (or dies)
    leaves them all to the parent; either way the documents are those of load_yaml."""
    import pickle

    import pipeline.build as b
    from pipeline.bench import synthesise
    from pipeline.safeyaml import load_yaml

    species = tmp_path / "species"
    synthesise(b.READ_AHEAD_MIN + 40, species)
    (species / "zz-syntax.yaml").write_text("name: ZZ\nformula: {H: 2\n", encoding="utf-8")
    inputs = b.Inputs(species, {})
    direct = {sha: load_yaml(data.decode()) for name, _, data, sha in inputs.files if name != "zz-syntax.yaml"}
    collect = b._read_ahead(inputs, None)
    if collect is None:
        pytest.skip("no fork or one CPU: nothing is read ahead")
    assert collect() == direct and collect() is collect()

    def lazy(files, taken, conn):  # a child that takes no file
        conn.send_bytes(pickle.dumps({}))
        conn.close()

    def dying(files, taken, conn):  # a child that takes a block and dies
        with taken.get_lock():
            taken.value += b.READ_BLOCK
        os._exit(1)

    for child in (lazy, dying):
        monkeypatch.setattr(b, "_read_files", child)
        got = b._read_ahead(inputs, None)()
        if child is lazy:
            assert got == direct
        else:  # the dead child's block is left to the workers
            assert len(got) == len(direct) - b.READ_BLOCK and all(direct[k] == v for k, v in got.items())


def test_a_first_build_reserves_its_temporaries_and_leaves_none(tmp_path, monkeypatch):
    """A first build into a folder makes its temporaries while computing (Cache.reserve): the
    same bytes as without, nothing left in tmp/, also when it fails."""
    from pipeline.cache import Cache

    species, out = database(tmp_path)
    asked = []
    real = Cache.reserve
    monkeypatch.setattr(Cache, "reserve", lambda self, n: asked.append(n) or real(self, n))
    assert run("build", "--species", str(species), "--out", str(tmp_path / "first"), "--quiet")[0] == 0
    assert asked == [4]  # thermo.dat, thermo.yaml, REPORT.md, provenance.json (the workers write the tables)
    assert {rel: b for rel, (b, _) in snapshot(tmp_path / "first").items()} == \
        {rel: b for rel, (b, _) in snapshot(out).items()}
    assert not os.listdir(tmp_path / "first" / ".statherm-cache" / "tmp")
    assert run("build", "--species", str(species), "--out", str(tmp_path / "first"), "--quiet")[0] == 0
    assert asked == [4]  # a rebuild has a manifest: nothing reserved
    edit(species / "HO2.yaml", "symmetry: ", "symmetry: -")
    rc, _, err = run("build", "--species", str(species), "--out", str(tmp_path / "failed"), "--quiet")
    assert rc == 1 and len(asked) == 2
    assert not os.listdir(tmp_path / "failed" / ".statherm-cache" / "tmp")
    assert not snapshot(tmp_path / "failed")


def test_shard_writes_no_output(tmp_path):
    species, _ = database(tmp_path)
    dest = tmp_path / "fresh"
    rc, _, err = run("build", "--species", str(species), "--out", str(dest), "--shard", "1/3")
    assert rc == 0, err
    assert snapshot(dest) == {}


# --------------------------------------------------------------------------
# settings precedence: flags > species fit: > statherm.yaml > defaults
# --------------------------------------------------------------------------


def _tmids(out: Path) -> dict[str, float]:
    from pipeline.readers import read_records

    return {f.name: f.tmid for f in read_records(out / "thermo.dat")}


def test_settings_precedence(tmp_path):
    species, out = database(tmp_path)
    (species / "statherm.yaml").write_text("tmid: 1100\n", encoding="utf-8")
    edit(species / "CO2.yaml", "sources:", "fit: {tmid: 1500}\nsources:")
    rc, _, err = run("build", "--species", str(species), "--out", str(out))
    assert rc == 0, err
    tmid = _tmids(out)
    assert tmid["CO2"] == 1500.0  # the species file beats statherm.yaml
    assert tmid["H2O"] == 1100.0  # statherm.yaml beats the default (auto)
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--tmid", "1300")
    assert rc == 0, err
    assert set(_tmids(out).values()) == {1300.0}  # the flag beats both


def test_flag_outside_a_species_range_names_file_and_flag(tmp_path):
    species, out = database(tmp_path)
    before = snapshot(out)
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--tmid", "7000")
    assert rc == 1
    assert "H2O.yaml: fit.tmid:" in err and "--tmid 7000" in err
    assert "Traceback" not in err
    assert snapshot(out) == before


# --------------------------------------------------------------------------
# all or nothing
# --------------------------------------------------------------------------


def test_bad_files_are_all_reported_and_nothing_is_written(tmp_path):
    species, out = database(tmp_path)
    before = snapshot(out)
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")  # a good change, not written either
    (species / "bad1.yaml").write_text("name: X1\nformula: {Xq: 1}\n", encoding="utf-8")
    (species / "bad2.yaml").write_text("- a list\n", encoding="utf-8")
    rc, _, err = run("build", "--species", str(species), "--out", str(out))
    assert rc == 1
    assert "bad1.yaml: formula.Xq:" in err and "bad2.yaml:" in err
    assert "left unchanged" in err
    assert snapshot(out) == before


def test_keep_going_writes_the_good_species(tmp_path):
    species, out = database(tmp_path)
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")
    (species / "bad.yaml").write_text("name: X1\n", encoding="utf-8")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--keep-going")
    assert rc == 1, err
    assert "bad.yaml: formula: missing required key" in err
    from pipeline.readers import read_records

    names = {f.name for f in read_records(out / "thermo.dat")}
    assert names == {"AR", "CH4", "CO2", "H2O", "HO2"}
    rc, _, _ = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1  # a database with a failed species is not up to date


def test_json_diagnostics(tmp_path):
    species, out = database(tmp_path)
    (species / "bad.yaml").write_text("name: X1\nformula: {H: 1}\nshape: atom\nsymmetry: 0\n", encoding="utf-8")
    rc, _, err = run("--json", "build", "--species", str(species), "--out", str(out))
    assert rc == 1
    doc = json.loads(err[: err.rindex("]") + 1])
    keys = {(Path(d["file"]).name, d["key"]) for d in doc if d["severity"] == "error"}
    assert ("bad.yaml", "symmetry") in keys and ("bad.yaml", "formation") in keys


# --------------------------------------------------------------------------
# check
# --------------------------------------------------------------------------


def test_check_names_what_is_stale(tmp_path):
    species, out = database(tmp_path)
    args = ("check", "--species", str(species), "--out", str(out))
    assert run(*args)[0] == 0
    edit(species / "H2O.yaml", "enthalpy: -241.826", "enthalpy: -241.800")
    rc, _, err = run(*args)
    assert rc == 1
    assert "H2O.yaml: changed since the output was built" in err
    (species / "statherm.yaml").write_text("tmid: 1200\n", encoding="utf-8")
    rc, _, err = run(*args)
    assert rc == 1
    assert "statherm.yaml: settings changed" in err and "tmid: 'auto' → 1200" in err
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    assert run(*args) == (0, "", "")


def test_check_names_new_and_removed_species_files(tmp_path):
    species, out = database(tmp_path)
    shutil.copy(species / "Ar.yaml", species / "Ar-copy.yaml")
    edit(species / "Ar-copy.yaml", "name: AR", "name: ARX")
    (species / "H2O.yaml").unlink()
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1
    assert "Ar-copy.yaml: new species file, not yet in the output" in err
    assert "H2O.yaml: removed, but still in the output" in err
    assert "changed since the output was built" not in err


def test_check_without_a_cache_compares_bytes(tmp_path):
    """A fresh clone (CI) has output/ but no cache: check rebuilds in memory and compares."""
    species, out = database(tmp_path)
    shutil.rmtree(out / ".statherm-cache")
    before = snapshot(out)
    args = ("check", "--species", str(species), "--out", str(out))
    assert run(*args)[0] == 0
    assert snapshot(out) == before
    shutil.rmtree(out / ".statherm-cache")
    edit(species / "CO2.yaml", "enthalpy: -393.51", "enthalpy: -393.00")
    rc, _, err = run(*args)
    assert rc == 1
    assert "CO2.yaml: changed since the output was built" in err  # from thermo.yaml's provenance
    assert "thermo.dat: differs from a fresh build" in err
    assert snapshot(out) == before  # check writes no output


def test_check_names_code_changes(tmp_path, monkeypatch):
    """A code change that alters what a build writes is reported as such (simulated by
    changing the fingerprint and the assembled bytes)."""
    import pipeline.build
    import pipeline.writers

    species, out = database(tmp_path)
    real = pipeline.writers.assemble
    monkeypatch.setattr(pipeline.build, "code_fingerprint", lambda files=None: "0" * 64)
    monkeypatch.setattr(pipeline.writers, "assemble",
                        lambda frags, s: {k: v + b"\n" if k == "thermo.dat" else v for k, v in real(frags, s).items()})
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1
    assert "pipeline/: code changed" in err and "thermo.dat: differs" in err


def test_check_and_build_report_missing_species_folder(tmp_path):
    for cmd in ("build", "check"):
        rc, _, err = run(cmd, "--species", str(tmp_path / "nope"), "--out", str(tmp_path / "out"))
        assert rc == 1 and "nope: does not exist" in err and "Traceback" not in err


# --------------------------------------------------------------------------
# faults: SIGKILL, lock, unwritable output
# --------------------------------------------------------------------------

FAULT_POINTS = ("writing-temporaries", "before-journal", "after-journal", "moving", "before-journal-removal")


def _changed_database(tmp_path):
    """A built database, and what it becomes once every species is edited and rebuilt."""
    species, out = database(tmp_path)
    old = {rel: b for rel, (b, _) in snapshot(out).items()}
    for name in SMALL:
        text = (species / f"{name}.yaml").read_text(encoding="utf-8")
        (species / f"{name}.yaml").write_text(text + "notes: edited\n", encoding="utf-8")
    edit(species / "HO2.yaml", "enthalpy: 12.26", "enthalpy: 12.00")
    ref = tmp_path / "reference"
    rc, _, err = run("build", "--species", str(species), "--out", str(ref), "--quiet")
    assert rc == 0, err
    new = {rel: b for rel, (b, _) in snapshot(ref).items()}
    assert new != old
    return species, out, old, new


@pytest.mark.parametrize("point", FAULT_POINTS)
def test_sigkill_at_each_step_leaves_old_or_new_files(tmp_path, point):
    species, out, old, new = _changed_database(tmp_path)
    proc = run_process("build", "--species", str(species), "--out", str(out), env={"STATHERM_FAULT": point})
    assert proc.returncode == -signal.SIGKILL
    now = {rel: b for rel, (b, _) in snapshot(out).items()}
    for rel, data in now.items():  # never a torn or foreign file
        assert data in (old.get(rel), new.get(rel)), rel
    if point in ("writing-temporaries", "before-journal"):
        assert now == old  # killed before the commit: the previous output, untouched
    rc, _, err = run("check", "--species", str(species), "--out", str(out))  # completes a committed build
    if point in ("writing-temporaries", "before-journal"):
        assert rc == 1
        assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    else:
        assert rc == 0, err
    assert {rel: b for rel, (b, _) in snapshot(out).items()} == new
    assert not os.listdir(out / ".statherm-cache" / "tmp")


@pytest.mark.parametrize("point", FAULT_POINTS)
def test_sigkill_of_a_first_build_at_each_step_leaves_old_or_new_files(tmp_path, point):
    """The same for a first build into a folder that holds an output but no cache: its workers
    write the tables into a staging folder and the commit moves them; the next build finishes
    or redoes it, and no staging folder is left."""
    species, out, old, new = _changed_database(tmp_path)
    shutil.rmtree(out / ".statherm-cache")
    proc = run_process("build", "--species", str(species), "--out", str(out), env={"STATHERM_FAULT": point})
    assert proc.returncode == -signal.SIGKILL
    now = {rel: b for rel, (b, _) in snapshot(out).items()}
    for rel, data in now.items():
        assert data in (old.get(rel), new.get(rel)), rel
    if point in ("writing-temporaries", "before-journal"):
        assert now == old
    tmp = out / ".statherm-cache" / "tmp"
    assert any(name.startswith("stage-") for name in os.listdir(tmp))  # the killed build's staging folder
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    assert {rel: b for rel, (b, _) in snapshot(out).items()} == new
    assert not os.listdir(tmp)


def test_staged_tables_move_as_one_folder_into_a_folder_without_tables(tmp_path):
    """A first build moves its staged tables/ folder in one rename when the output has no
    tables/ and the folder holds just the files written; else file by file."""
    from pipeline.cache import Cache

    cache = Cache(tmp_path / "out")
    staged = cache.root / "tmp" / "stage-1" / "tables"
    staged.mkdir(parents=True)
    for name in ("A.csv", "B.csv"):
        (staged / name).write_text(name)
    moves = [["stage-1/tables/A.csv", "tables/A.csv"], ["7-0", "thermo.dat"], ["stage-1/tables/B.csv", "tables/B.csv"]]
    assert cache._whole_folders(moves) == [["7-0", "thermo.dat"], ["stage-1/tables", "tables"]]
    assert cache._whole_folders(moves[:2]) == moves[:2]  # B.csv is not written: it stays behind
    (tmp_path / "out" / "tables").mkdir()
    assert cache._whole_folders(moves) == moves  # tables/ exists: each file is moved


@pytest.mark.parametrize("point", ["after-journal", "moving"])
def test_sigkill_of_a_first_build_into_an_empty_folder_is_completed(tmp_path, point):
    """Killed after its journal, a first build into an empty folder (whose tables/ moves as
    one folder) is completed by the next command: the same files as an uninterrupted build."""
    species, out = database(tmp_path)
    fresh = tmp_path / "fresh"
    proc = run_process("build", "--species", str(species), "--out", str(fresh), env={"STATHERM_FAULT": point})
    assert proc.returncode == -signal.SIGKILL
    journal = json.loads((fresh / ".statherm-cache" / "journal.json").read_bytes())
    assert ["tables"] == [rel for tmp, rel in journal["moves"] if tmp.endswith("/tables")]
    rc, _, err = run("check", "--species", str(species), "--out", str(fresh))
    assert rc == 0, err
    assert {rel: b for rel, (b, _) in snapshot(fresh).items()} == {rel: b for rel, (b, _) in snapshot(out).items()}
    assert not os.listdir(fresh / ".statherm-cache" / "tmp")


def test_staged_tables_are_written_once_and_compared_by_hash(tmp_path):
    """_staged writes each table where it was computed and hands the parent a Staged
    reference (sha256, size) instead of the text, leaving the entries for the cache whole;
    _changes compares a Staged file with the file on disk by its hash."""
    import pipeline.build as b
    from pipeline.cache import Staged, sha256_bytes

    entries = [{"name": "OH", "fragments": {"name": "OH", "table_csv": "a,b\nfirst,row\n", "record": "r"}},
               {"name": "H2O", "fragments": {"name": "H2O", "table_csv": "a,b\nother,row\n", "record": "s"}}]
    stage = tmp_path / "tmp" / "stage-1"
    stage.mkdir(parents=True)
    light, errors = b._staged((entries, ["e"]), str(stage))
    assert errors == ["e"] and entries[0]["fragments"]["table_csv"].startswith("a,b")
    for e, sent in zip(entries, light):
        data = e["fragments"]["table_csv"].encode()
        rel = f"tables/{e['name']}.csv"
        assert sent["fragments"]["table_csv"] is None and sent["fragments"]["record"] == e["fragments"]["record"]
        assert sent["staged"] == {rel: Staged(f"stage-1/{rel}", sha256_bytes(data), len(data))}
        assert (stage / rel).read_bytes() == data
    assert b._staged((entries, []), None) == (entries, [])
    out = tmp_path / "out"
    (out / "tables").mkdir(parents=True)
    (out / "tables" / "OH.csv").write_bytes(entries[0]["fragments"]["table_csv"].encode())
    (out / "tables" / "H2O.csv").write_bytes(b"other bytes")
    files = {rel: st for e in light for rel, st in e["staged"].items()}
    writes, deletes = b._changes(out, files, None)
    assert list(writes) == ["tables/H2O.csv"] and deletes == []


def test_sigkill_at_random_moments(tmp_path):
    """Kill real builds of a changed database at staggered moments; every file stays whole."""
    species, out, old, new = _changed_database(tmp_path)
    saved = tmp_path / "saved"
    shutil.copytree(out, saved, ignore=shutil.ignore_patterns(".statherm-cache"))
    t0 = time.monotonic()
    assert run_process("build", "--species", str(species), "--out", str(tmp_path / "timing")).returncode == 0
    full = time.monotonic() - t0
    for fraction in (0.3, 0.5, 0.7, 0.85, 0.95):
        shutil.rmtree(out)
        shutil.copytree(saved, out)  # the old output, no cache: the build recomputes and rewrites
        proc = popen("build", "--species", str(species), "--out", str(out))
        time.sleep(fraction * full)
        proc.send_signal(signal.SIGKILL)
        proc.communicate()
        for rel, (data, _) in snapshot(out).items():
            assert data in (old.get(rel), new.get(rel)), (fraction, rel)
        assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
        assert {rel: b for rel, (b, _) in snapshot(out).items()} == new


def test_two_builds_into_one_folder_are_serialised(tmp_path):
    import threading

    from pipeline.cache import Lock

    species, out = database(tmp_path)
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")
    before = snapshot(out)
    lines: list[str] = []
    with Lock(out, quiet=True):
        proc = popen("build", "--species", str(species), "--out", str(out))
        reader = threading.Thread(target=lambda: lines.extend(proc.stderr), daemon=True)
        reader.start()
        deadline = time.monotonic() + 120
        while not any("waiting for another build" in line for line in lines):
            assert proc.poll() is None and time.monotonic() < deadline, lines
            time.sleep(0.05)
        time.sleep(0.5)
        assert proc.poll() is None  # still waiting: it has written nothing
        assert snapshot(out) == before
    assert proc.wait(timeout=120) == 0, lines
    reader.join(timeout=10)
    assert snapshot(out) != before


def test_unusable_output_folder_gives_a_clear_error(tmp_path, monkeypatch):
    species, _ = database(tmp_path)
    afile = tmp_path / "afile"
    afile.write_text("x")
    cases = [
        (tmp_path / "no" / "such" / "out", "cannot be created: its parent folder"),
        (afile, "is not a folder"),
    ]
    for out, message in cases:
        rc, _, err = run("build", "--species", str(species), "--out", str(out))
        assert rc == 1 and message in err and "Traceback" not in err, err
    ro = tmp_path / "ro"
    ro.mkdir()
    if os.geteuid() != 0:  # permission bits do not stop root
        ro.chmod(0o555)
        rc, _, err = run("build", "--species", str(species), "--out", str(ro))
        ro.chmod(0o755)
        assert rc == 1 and "cannot write here (Permission denied)" in err
    import errno

    def read_only(self, *a, **k):
        raise OSError(errno.EROFS, os.strerror(errno.EROFS), str(self))

    monkeypatch.setattr(Path, "mkdir", read_only)
    rc, _, err = run("build", "--species", str(species), "--out", str(ro))
    assert rc == 1 and f"cannot write here ({os.strerror(errno.EROFS)})" in err and "Traceback" not in err


# --------------------------------------------------------------------------
# messages and progress
# --------------------------------------------------------------------------


def test_quiet_build_says_nothing_and_progress_only_when_asked(tmp_path):
    species, out = database(tmp_path)
    shutil.rmtree(out / ".statherm-cache")
    rc, stdout, err = run("build", "--species", str(species), "--out", str(out), "--quiet")
    assert (rc, stdout, err) == (0, "", "")
    shutil.rmtree(out / ".statherm-cache")
    rc, _, err = run("build", "--species", str(species), "--out", str(out))
    assert rc == 0 and "statherm build:" not in err  # not a terminal: no progress bar
    shutil.rmtree(out / ".statherm-cache")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--progress")
    assert rc == 0 and f"statherm build: {len(SMALL)}/{len(SMALL)}" in err


# --------------------------------------------------------------------------
# show (git textconv)
# --------------------------------------------------------------------------


def test_show_tabulates_every_species(tmp_path):
    from scipy import constants as C

    _, out = database(tmp_path)
    rc, text, err = run("show", str(out / "thermo.dat"))
    assert rc == 0, err
    for name in ("AR", "CH4", "CO2", "H2O", "HO2"):
        assert any(line.startswith(name + " ") for line in text.splitlines())
    ar = text[text.index("AR "):].splitlines()
    row = next(line for line in ar if line.split()[0] == "298.15")
    # Cp of a monatomic ideal gas is 5/2 R (R: CODATA via scipy.constants)
    assert float(row.split()[1]) == pytest.approx(2.5 * C.R, abs=1e-4)
    assert float(row.split()[2]) == pytest.approx(0.0, abs=1e-4)  # H°298 = ΔfH°298 = 0 for the element


def test_git_diff_through_the_textconv_driver(tmp_path):
    """The README's .gitattributes line and git config make `git diff` show property tables."""
    import subprocess

    from refdata import ROOT

    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    species, out = database(tmp_path)
    repo = tmp_path
    shutil.copy2(ROOT / ".gitattributes", repo / ".gitattributes")

    def git(*a):
        return subprocess.run(["git", *a], cwd=repo, capture_output=True, text=True, check=True).stdout

    git("init", "-q")
    git("config", "user.email", "t@example.org")
    git("config", "user.name", "t")
    git("config", "diff.statherm.textconv", f"{sys.executable} -m pipeline show")
    git("add", ".gitattributes", "output/thermo.dat")
    git("commit", "-q", "-m", "db")
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    diff = subprocess.run(["git", "diff", "output/thermo.dat"], cwd=repo, capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(ROOT)}).stdout
    plus = [line[1:] for line in diff.splitlines() if line.startswith("+") and not line.startswith("+++")]
    assert plus, diff
    assert not any("E+0" in line or "E-0" in line for line in plus)  # property rows, not coefficient columns

    def numeric(line):
        try:
            return len([float(x) for x in line.split()[:5]]) == 5
        except ValueError:
            return False

    assert any(numeric(line) for line in plus)


def test_progress_bar_on_a_terminal(tmp_path):
    """On a terminal, a build that runs longer than about a second draws a bar on stderr
    (and a shorter one does not)."""
    import pty
    import re
    import subprocess

    from pipeline.bench import synthesise
    from refdata import ROOT

    synthesise(300, tmp_path / "species")
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "pipeline", "build", "--species", str(tmp_path / "species"),
                             "--out", str(tmp_path / "out")], cwd=ROOT, stdin=subprocess.DEVNULL,
                            stdout=subprocess.DEVNULL, stderr=slave)
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 4096)
        except OSError:  # the terminal closes with the process
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    assert proc.wait(timeout=300) == 0
    text = b"".join(chunks).decode("utf-8", "replace")
    seconds = float(re.search(r"\((\d+\.\d+) s\)", text).group(1))  # the build's own timing
    drawn = "\rstatherm build [" in text and "/300" in text
    if seconds > 1.5:
        assert drawn, text
    elif seconds < 0.9:
        assert not drawn, text


def test_check_is_machine_independent(tmp_path, monkeypatch):
    """An up-to-date output stays up to date on a machine whose arithmetic differs in the
    last bits (simulated by perturbing every fitted coefficient by 1e-13 relative): the
    default check judges from provenance.json; --strict compares rebuilt bytes."""
    import dataclasses

    import pipeline.fit

    species, out = database(tmp_path)
    shutil.rmtree(out / ".statherm-cache")  # a fresh clone: no cache
    real = pipeline.fit.fit_tables

    def other_machine(tables, options):
        return [dataclasses.replace(f, low=tuple(a * (1 + 1e-13) for a in f.low),
                                    high=tuple(a * (1 + 1e-13) for a in f.high))
                for f in real(tables, options)]

    monkeypatch.setattr(pipeline.fit, "fit_tables", other_machine)
    args = ("check", "--species", str(species), "--out", str(out))
    assert run(*args)[0] == 0
    rc, _, err = run(*args, "--strict")
    assert rc == 1 and "thermo.yaml: differs from a fresh build" in err


def test_strict_check_rebuilds_even_with_a_cache(tmp_path, monkeypatch):
    """--strict trusts neither the cache's manifest nor its entries: it compares freshly
    computed bytes."""
    import dataclasses

    import pipeline.fit

    species, out = database(tmp_path)
    assert (out / ".statherm-cache").is_dir()
    real = pipeline.fit.fit_tables
    monkeypatch.setattr(pipeline.fit, "fit_tables", lambda tables, options: [
        dataclasses.replace(f, low=tuple(a * (1 + 1e-6) for a in f.low)) for f in real(tables, options)])
    rc, _, err = run("check", "--species", str(species), "--out", str(out), "--strict")
    assert rc == 1 and "differs from a fresh build" in err


def test_check_with_a_cache_notices_a_left_over_file(tmp_path):
    species, out = database(tmp_path)
    (out / "tables" / "ZZZ.csv").write_text("T [K]\n", encoding="utf-8")
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1 and "ZZZ.csv" in err


def test_check_reports_a_damaged_report_without_a_traceback(tmp_path):
    species, out = database(tmp_path)
    with open(out / "REPORT.md", "ab") as fh:
        fh.write(b"\xff\xfe")
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1 and "REPORT.md" in err and "internal error" not in err


def test_check_notices_a_hand_edited_output(tmp_path):
    species, out = database(tmp_path)
    table = out / "tables" / "CO2.csv"
    table.write_bytes(table.read_bytes().replace(b"200.00,", b"200.01,", 1))
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 1 and "CO2.csv" in err


def _packs(out: Path) -> dict[str, set[str]]:
    """Cache pack file → the keys of the entries it holds."""
    from pipeline.cache import Cache

    folder = out / ".statherm-cache" / "entries"
    return {p.name: set(Cache(out)._read_pack(p.name)) for p in folder.iterdir()}


def test_cache_entries_are_packed_and_dead_ones_pruned(tmp_path):
    species, out = database(tmp_path)
    packs = _packs(out)
    assert sum(len(k) for k in packs.values()) == len(SMALL)  # one build, one pack per chunk
    assert len(packs) < len(SMALL)
    # one edit: a one-entry pack appears; the old pack has 1 of 5 entries dead (20 % ≤ 25 %): kept
    edit(species / "CH4.yaml", "enthalpy: -74.52", "enthalpy: -74.00")
    assert run("build", "--species", str(species), "--out", str(out), "--quiet")[0] == 0
    live = set(json.loads((out / ".statherm-cache" / "manifest.json").read_bytes())["entries"].values())
    packs = _packs(out)
    assert live <= set().union(*packs.values())
    # a second edit kills 2 of 5 in the first pack (40 % > 25 %): its live entries are merged
    edit(species / "H2O.yaml", "sources:", "# edited\nsources:")
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--quiet")
    assert rc == 0, err
    live = set(json.loads((out / ".statherm-cache" / "manifest.json").read_bytes())["entries"].values())
    packs = _packs(out)
    held = [k for keys in packs.values() for k in keys]
    assert set(held) == live  # no dead entry left
    # the pruned cache still serves every species: deleting the output rebuilds nothing
    before = snapshot(out)
    for rel in before:
        (out / rel).unlink()
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--verbose")
    assert rc == 0, err
    assert "0 computed" in err
    assert {rel: b for rel, (b, _) in snapshot(out).items()} == {rel: b for rel, (b, _) in before.items()}


def test_damaged_or_foreign_cache_files_are_ignored(tmp_path):
    species, out = database(tmp_path)
    before = {rel: b for rel, (b, _) in snapshot(out).items()}
    entries = out / ".statherm-cache" / "entries"
    for p in entries.iterdir():
        p.write_bytes(p.read_bytes()[: len(p.read_bytes()) // 2])  # a torn file
    (entries / "stray.json").write_text("{}")
    (out / "thermo.dat").unlink()
    rc, _, err = run("build", "--species", str(species), "--out", str(out), "--verbose")
    assert rc == 0, err
    assert f"{len(SMALL)} computed" in err
    assert {rel: b for rel, (b, _) in snapshot(out).items()} == before
    assert "stray.json" not in {p.name for p in entries.iterdir()}


def test_a_pack_keeps_its_texts_after_its_json_and_a_torn_one_is_no_pack(tmp_path):
    """Cache packs hold the entries' texts raw after one line of JSON: they read back equal,
    non-ASCII text included; a pack cut short (or with a foreign head) reads as no pack."""
    from pipeline.cache import Cache

    cache = Cache(tmp_path)
    (cache.root / "entries").mkdir(parents=True)
    entries = {"k1": {"key": "k1", "name": "OH", "warnings": [], "files": {},
                      "fragments": {"name": "OH", "table_csv": "T [K],Cp° [J/mol/K]\nfirst,row\n",
                                    "report_note": "", "yaml": "- name: OH  # \u2014 \"quoted\"\n"}},
               "k2": {"key": "k2", "name": "H2O", "warnings": [], "files": {},
                      "fragments": {"name": "H2O", "table_csv": "T,Cp\n", "report_note": "n\n", "yaml": ""}}}
    name = cache._write_pack(entries)
    assert Cache(tmp_path)._read_pack(name) == entries
    path = cache.root / "entries" / name
    data = path.read_bytes()
    assert data.count(b"\n") > 1 and b"K],Cp\xc2\xb0 [J/mol/K]\nfirst,row\n" in data  # as it is, not escaped
    path.write_bytes(data[:-3])
    assert Cache(tmp_path)._read_pack(name) is None
    path.write_bytes(b"[1, 2]\n" + data.partition(b"\n")[2])
    assert Cache(tmp_path)._read_pack(name) is None


def test_jobs_setting_auto_number_or_error(tmp_path):
    from pipeline.settings import load_settings, workers

    (tmp_path / "statherm.yaml").write_text("jobs: auto\n")
    assert load_settings(tmp_path).jobs == "auto"
    assert workers("auto") == len(os.sched_getaffinity(0))
    (tmp_path / "statherm.yaml").write_text("jobs: 3\n")
    assert workers(load_settings(tmp_path).jobs) == 3
    (tmp_path / "statherm.yaml").write_text("jobs: 0\n")
    from pipeline.diagnostics import InputError

    with pytest.raises(InputError) as err:
        load_settings(tmp_path)
    assert err.value.diagnostics[0].key == "jobs"
    proc = run_process("build", "--jobs", "0", "--out", str(tmp_path / "out"))
    assert proc.returncode == 2 and "--jobs" in proc.stderr and "Traceback" not in proc.stderr


def test_the_command_runs_without_the_cyclic_collector_and_leaves_with_mains_code():
    """cli.run (the console script and ``python -m pipeline``) turns the cyclic garbage
    collector off before the command runs, flushes what it printed and exits with the code
    main returned."""
    import subprocess

    from buildkit import ROOT

    code = "import gc, pipeline.cli as c; c.main = lambda: print(gc.isenabled(), end='') or 4; c.run()"
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True)
    assert (proc.returncode, proc.stdout) == (4, "False"), proc.stderr


def test_the_compute_modules_and_default_settings_load_without_yaml(tmp_path):
    """A cold build reads its YAML in the read-ahead child: the modules the build's parent
    and workers load (and the settings of a folder without statherm.yaml) import no yaml;
    parsing a file without a document read ahead still works."""
    import subprocess

    from buildkit import ROOT

    code = ("import sys, pipeline.build, pipeline.fit, pipeline.species, pipeline.thermo, pipeline.writers\n"
            "from pipeline.settings import load_settings\n"
            "load_settings(sys.argv[1])\n"
            "before = 'yaml' in sys.modules\n"
            "sp, _ = pipeline.species.parse_species(open(sys.argv[2], 'rb').read(), 'OH.yaml')\n"
            "print(before, 'yaml' in sys.modules, sp.name)")
    species = ROOT / "species"
    proc = subprocess.run([sys.executable, "-c", code, str(tmp_path), str(species / "OH.yaml")], cwd=ROOT,
                          capture_output=True, text=True)
    assert proc.stdout.split() == ["False", "True", "OH"], proc.stderr


def test_bench_times_each_kind_of_build_and_leaves_no_build_folders(tmp_path):
    from pipeline.bench import bench_size, table

    r = bench_size(12, tmp_path, repeat=1, log=lambda _: None)
    assert min(r["floor"], r["cold"], r["noop"], r["one"]) > 0
    # the one-changed rebuild rewrote the edited species' table (the first file) and the whole files only
    assert [rel for rel in r["rewritten"] if rel.startswith("tables/")] == ["tables/BX00000.csv"]
    assert {"thermo.dat", "thermo.yaml", "provenance.json"} <= set(r["rewritten"])
    assert sorted(os.listdir(tmp_path)) == ["floor.pack", "floor.py", "species"]
    assert "| 12 |" in table([r])


def test_a_build_asks_for_one_blas_thread_unless_the_user_chose(tmp_path):
    import subprocess

    from refdata import ROOT

    species, _ = database(tmp_path)
    code = ("import os, sys; from pipeline.cli import main; "
            "rc = main(['build', '--species', sys.argv[1], '--out', sys.argv[2], '--quiet']); "
            "print(rc, os.environ.get('OPENBLAS_NUM_THREADS'), 'numpy' in sys.modules)")
    base = {k: v for k, v in os.environ.items() if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    for given, expect in ((None, "1"), ("3", "3")):
        env = dict(base, **({"OPENBLAS_NUM_THREADS": given} if given else {}))
        done = subprocess.run([sys.executable, "-c", code, str(species), str(tmp_path / f"out-{given}")],
                              capture_output=True, text=True, env=env, cwd=ROOT)
        assert done.stdout.split() == ["0", expect, "True"], done.stderr


def test_memory_freed_in_a_build_is_kept_for_reuse(tmp_path):
    """With glibc, a build process keeps freed blocks (mallopt): rounds of numpy temporaries
    that would each be mapped fresh from the kernel cost no page faults after the first."""
    import subprocess

    if not sys.platform.startswith("linux"):
        pytest.skip("glibc malloc only")
    code = ("import resource, sys; import numpy as np; import pipeline.build as b\n"
            "applied = b._keep_freed_memory() if sys.argv[1] == '1' else None\n"
            "def rounds(k):\n"
            "    for _ in range(k):\n"
            "        a = [np.ones(131072 + 1000 * i) for i in range(10)]\n"
            "        del a\n"
            "rounds(1)\n"
            "f = resource.getrusage(resource.RUSAGE_SELF).ru_minflt\n"
            "rounds(20)\n"
            "print(applied, resource.getrusage(resource.RUSAGE_SELF).ru_minflt - f)\n")
    got = {}
    for tuned in ("0", "1"):
        done = subprocess.run([sys.executable, "-c", code, tuned], capture_output=True, text=True, check=True)
        applied, faults = done.stdout.split()
        got[tuned] = (applied, int(faults))
    if got["1"][0] != "True":
        pytest.skip("not glibc")
    # 20 rounds of ten ~1 MB arrays: about 40,000 faults by default (measured), none when kept
    assert got["1"][1] < 1000 < got["0"][1]


def test_entry_keys_are_the_sha256_of_the_whole_canonical_list(tmp_path):
    import pipeline.build as b
    from pipeline.cache import sha256_json

    species, _ = database(tmp_path)
    inputs = b.Inputs(species, {"tmin": 250.0, "tmid": "auto"})
    skey = {"pressure": "bar", "plots": False, "grid": [10.0, None, True], "note": "Ünïcode ✓"}
    key = inputs.entry_keys(skey)
    for name, sha in (("CH4.yaml", "0" * 64), ("ÄÖ \"q\".yaml", "f" * 64)):
        whole = [b.FORMAT, b.__version__, inputs.code, name, sha, skey, inputs.flags]
        assert key(name, sha) == sha256_json(whole)
    assert key("a.yaml", "1" * 64) != key("b.yaml", "1" * 64) != inputs.entry_keys({**skey, "plots": True})("b.yaml", "1" * 64)
