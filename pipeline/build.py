"""The database as a build: ``statherm build``, ``statherm check``, ``statherm show``.

``build`` turns every species file of a database folder into the files of an
output folder (``species/`` → ``output/`` by default):

1. hash each species file (sha256) and look its result up in the cache
   (``OUT/.statherm-cache/``, see :mod:`pipeline.cache`); the key covers the
   file's bytes, the tool version, the settings (``statherm.yaml`` and the
   flags) and a fingerprint of the pipeline's code, so anything that could
   change a number invalidates it;
2. compute what is missing — load, partition functions, fit (batched across
   species, :func:`pipeline.fit.fit_tables`), render the species' fragments
   (:func:`pipeline.writers.batch_fragments`) — in ``--jobs`` processes;
3. assemble the database (:func:`pipeline.writers.assemble`) and write only
   the files whose bytes change, atomically and as one recoverable step.

When nothing changed, a rebuild only hashes the inputs and compares them with
the manifest of the last build: no numpy, no YAML, no computation.

All or nothing: if any species fails, every error (of every bad file) is
reported, the exit code is 1 and no output file changes; ``--keep-going``
writes the database of the good species (and still exits 1).

Settings precedence: flags > the species file's ``fit:`` > ``statherm.yaml`` >
defaults (:mod:`pipeline.settings`).

``--shard I/N`` computes only the I-th of N slices of the species (a stable
split by file name) into the cache and writes no output; a final ``build``
without ``--shard`` assembles the database from the cache.  This is how
``make -j`` or a batch system spreads a large rebuild.

Hook for extra per-species files (plots): when the settings have
``plots: true``, the build calls ``pipeline.plots.species_files(species,
table, fit, settings) -> dict[str, bytes]`` (output-relative path → bytes) for
each computed species and caches the result with its fragments.  If that
raises ImportError (matplotlib missing), the build says so once and goes on
without plots.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

from pipeline import __version__
from pipeline.cache import (
    FORMAT, Cache, Lock, Progress, Staged, Unwritable, canonical_json, code_fingerprint, display_path,
    fault, file_state, sha256_bytes, sha256_json, species_files,
)
from pipeline.diagnostics import Diagnostic, InputError
from pipeline.plots import available as plots_available  # stdlib only: plots appear once matplotlib is installed

EXIT_OK, EXIT_DATA = 0, 1

#: settings a flag may override: (flag, Settings field, argparse type, metavar, help)
_SETTING_FLAGS = (
    ("--tmin", "tmin", float, "K", "low end of the fit and tables [K]"),
    ("--tmid", "tmid", None, "K|auto", "range break [K], or 'auto' to search it"),
    ("--tmax", "tmax", float, "K", "high end of the fit and tables [K]"),
    ("--grid-step", "grid_step", float, "K", "spacing of the grid the fit uses [K]"),
    ("--table-step", "table_step", float, "K", "spacing of output/tables/*.csv [K]"),
    ("--cp-warning", "cp_warning", float, "X", "relative max Cp error above which a fit is flagged"),
)


# --------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------


def _tmid(value: str):
    if value == "auto":
        return "auto"
    try:
        return float(value)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{value!r} is not a temperature [K] or 'auto'") from None


def positive_whole(text: str, also: str = "") -> int:
    """argparse type: a whole number ≥ 1 (a usage error, exit 2, otherwise)."""
    try:
        n = int(text)
    except ValueError:
        n = 0
    if n < 1:
        raise argparse.ArgumentTypeError(f"{text!r} is not a positive whole number{also}")
    return n


def jobs_value(value: str) -> int | str:
    """argparse type of ``--jobs``: a positive whole number or ``auto``."""
    return value if value == "auto" else positive_whole(value, " or 'auto'")


def _shard(value: str) -> tuple[int, int]:
    try:
        i, n = (int(v) for v in value.split("/"))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{value!r} is not I/N (e.g. 2/4)") from None
    if not 1 <= i <= n:
        raise argparse.ArgumentTypeError(f"{value!r}: I must be between 1 and N")
    return i, n


def _common(p: argparse.ArgumentParser, *, settings: bool = True) -> None:
    p.add_argument("--species", default="species", metavar="DIR", help="database folder (default: species)")
    p.add_argument("--out", default="output", metavar="DIR", help="output folder (default: output)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("-q", "--quiet", action="store_true", help="print errors only")
    g.add_argument("-v", "--verbose", action="store_true", help="say what is computed, cached and written")
    p.add_argument("--json", action="store_true", default=argparse.SUPPRESS,
                   help="print diagnostics as JSON on stderr")
    if not settings:
        return
    s = p.add_argument_group("settings (override statherm.yaml and the species files' fit:)")
    for flag, dest, typ, metavar, text in _SETTING_FLAGS:
        s.add_argument(flag, dest=dest, type=typ or _tmid, metavar=metavar, help=text)
    s.add_argument("--pressure", choices=("bar", "atm"), help="standard pressure (default: bar)")
    s.add_argument("--plots", action=argparse.BooleanOptionalAction, default=None,
                   help="write output/plots/ (needs the 'plot' extra)")


def register(sub) -> None:
    """Add ``build``, ``check`` and ``show`` to the ``statherm`` command line."""
    p = sub.add_parser("build", help="species/ → output/ (incremental, all-or-nothing)",
                       description=__doc__.split("\n\n")[0],
                       epilog="Exit codes: 0 success, 1 input or data errors, 2 usage errors.")
    _common(p)
    p.add_argument("-j", "--jobs", type=jobs_value, metavar="N|auto",
                   help="worker processes (default: the jobs setting, auto = one per CPU)")
    p.add_argument("--shard", type=_shard, metavar="I/N", help="compute only slice I of N into the cache")
    p.add_argument("-k", "--keep-going", action="store_true",
                   help="write the good species even if some fail (exit code still 1)")
    p.add_argument("--progress", action="store_true", help="show progress even when not on a terminal")
    p.set_defaults(func=cmd_build)

    c = sub.add_parser("check", help="exit 1 if output/ is stale (species, settings or code changed)",
                       description="Exit 1, naming what is stale, if OUT is not what `statherm build` "
                                   "would write from the species, the settings and the current code.",
                       epilog="Exit codes: 0 up to date, 1 stale or input errors, 2 usage errors.")
    _common(c)
    c.add_argument("--strict", action="store_true",
                   help="rebuild in memory and compare bytes (same machine and libraries only)")
    c.set_defaults(func=cmd_check)

    s = sub.add_parser("show", help="readable view of a fixed-column file (git textconv)",
                       description="Print each species of a fixed-column seven-coefficient file as a "
                                   "property table (for `git diff` through a textconv driver).")
    s.add_argument("file", metavar="FILE", help="fixed-column file (e.g. output/thermo.dat)")
    s.set_defaults(func=cmd_show)


def _flags(args) -> dict:
    """The settings given on the command line (those not given are absent)."""
    out = {dest: getattr(args, dest) for _, dest, *_ in _SETTING_FLAGS if getattr(args, dest, None) is not None}
    for dest in ("pressure", "plots"):
        if getattr(args, dest, None) is not None:
            out[dest] = getattr(args, dest)
    return out


def _verbosity(args) -> int:
    return 0 if args.quiet else (2 if args.verbose else 1)


def cmd_build(args) -> int:
    return build(args.species, args.out, flags=_flags(args), jobs=args.jobs, shard=args.shard,
                 keep_going=args.keep_going, verbosity=_verbosity(args), as_json=args.json,
                 progress=args.progress)


def cmd_check(args) -> int:
    return check(args.species, args.out, flags=_flags(args), verbosity=_verbosity(args), as_json=args.json,
                 strict=args.strict)


# --------------------------------------------------------------------------
# Inputs and keys (standard library only: this is all a no-op rebuild runs)
# --------------------------------------------------------------------------


class Inputs:
    """The species files, the settings file and the code, hashed."""

    def __init__(self, species_dir: str | Path, flags: dict):
        d = Path(species_dir)
        if not d.is_dir():
            what = "is not a folder" if d.exists() else "does not exist"
            raise InputError([Diagnostic(d.as_posix(), "", f"{what} (give the species database folder with --species)")])
        self.dir = d
        self.flags = dict(sorted(flags.items()))
        self.files = []  # (name in folder, display path, bytes, sha256)
        base = display_path(d)
        for p in species_files(d):
            disp = p.name if base == "." else f"{base.rstrip('/')}/{p.name}"
            try:
                data = p.read_bytes()
            except OSError as exc:
                raise InputError([Diagnostic(disp, "", f"cannot be read ({exc.strerror})")]) from None
            self.files.append((p.name, disp, data, sha256_bytes(data)))
        from pipeline.settings import SETTINGS_FILE

        sp = d / SETTINGS_FILE
        self.settings_file = display_path(sp)
        self.settings_sha = sha256_bytes(sp.read_bytes()) if sp.is_file() else None
        self.code = code_fingerprint()
        self.build_key = sha256_json(
            [FORMAT, __version__, self.code, self.settings_sha, self.flags,
             [(name, sha) for name, _, _, sha in self.files], plots_available()]
        )

    def entry_keys(self, settings_key: dict):
        """The cache key of one species file's result, ``key(name, sha256)``: sha256_json of
        [FORMAT, version, code, name, sha256, settings_key, flags].  The canonical JSON of a
        list is its items' joined by commas, so the parts common to every file are encoded
        once (measured: 10–11 ms → 5.5–6 ms per 1,000 files)."""
        head = "[" + ",".join(canonical_json(v) for v in (FORMAT, __version__, self.code)) + ","
        tail = "," + canonical_json(settings_key) + "," + canonical_json(self.flags) + "]"

        def key(name: str, sha: str) -> str:
            return sha256_bytes(f"{head}{canonical_json(name)},{canonical_json(sha)}{tail}".encode())

        return key


def _manifest_current(manifest: dict | None, inputs: Inputs, out: Path, cache: Cache | None) -> bool:
    """True if the last complete build had these inputs and its output files are untouched
    (refreshing the recorded file states when only their mtimes moved)."""
    if not (manifest and manifest.get("build_key") == inputs.build_key and manifest.get("complete")
            and _outputs_unchanged(out, manifest)):
        return False
    if manifest.pop("touched", False) and cache is not None:
        cache.store_manifest(manifest)
    return True


def _outputs_unchanged(out: Path, manifest: dict) -> bool:
    """True if every output file the manifest lists still has the bytes it recorded.

    Files whose size and mtime are unchanged are trusted; others are re-hashed
    (and their new stat recorded when the bytes are still the same).
    """
    for rel, (size, mtime, sha) in manifest.get("outputs", {}).items():
        st = file_state(out / rel)
        if st == [size, mtime]:
            continue
        if st is None or st[0] != size:
            return False
        try:
            if sha256_bytes((out / rel).read_bytes()) != sha:
                return False
        except OSError:
            return False
        manifest["outputs"][rel][:2] = st
        manifest["touched"] = True
    return True


# --------------------------------------------------------------------------
# Computing species (runs in worker processes with --jobs)
# --------------------------------------------------------------------------


def _apply_flags(species, flags: dict):
    """The species with the flags' tmin/tmid/tmax applied over its ``fit:`` block (flags win)."""
    over = {k: flags[k] for k in ("tmin", "tmid", "tmax") if k in flags}
    if not over:
        return species
    import dataclasses

    return dataclasses.replace(species, fit=dataclasses.replace(species.fit, **over))


def _compute(items, settings, flags: dict) -> tuple[list[dict], list[dict]]:
    """Compute the cache entries of ``items`` = [(key, display path, bytes, YAML read ahead or None)].

    Returns (entries, error diagnostics as dicts); :func:`_store` puts the entries in the cache.
    """
    from pipeline.fit import fit_options, fit_tables
    from pipeline.species import _Checker, check_ranges, parse_species
    from pipeline.thermo import temperature_grid, thermo_table, thermo_tables
    from pipeline.writers import batch_fragments

    errors: list[Diagnostic] = []
    parsed = []  # (key, disp, species, warnings, settings); loaded adds the table
    glob = settings.replace(**flags)
    for key, disp, data, doc in items:
        try:
            sp, warns = parse_species(data, disp, doc)
        except InputError as exc:
            errors.extend(exc.diagnostics)
            continue
        sp = _apply_flags(sp, flags)
        s = glob.for_species(sp)
        ck = _Checker(disp)
        check_ranges(ck, s.tmin, None if s.tmid == "auto" else s.tmid, s.tmax, "fit")
        if ck.failed:
            given = ", ".join(f"--{k} {v}" for k, v in flags.items() if k in ("tmin", "tmid", "tmax"))
            errors.extend(Diagnostic(d.file, d.key, d.message + (f" (with {given})" if given else ""))
                          for d in ck.diagnostics)
            continue
        parsed.append((key, disp, sp, warns, s))
    # the species sharing a grid and a pressure are computed together (thermo_tables)
    grids: dict[tuple, list[int]] = {}
    for k, (*_, s) in enumerate(parsed):
        grids.setdefault((float(s.tmin), float(s.tmax), float(s.grid_step), float(s.pressure_pa)), []).append(k)
    computed: dict[int, object] = {}
    for (tmin, tmax, step, pressure), group in grids.items():
        T = temperature_grid(tmin, tmax, step)
        try:
            computed.update(zip(group, thermo_tables([parsed[k][2] for k in group], T, pressure)))
        except (ValueError, ArithmeticError):  # find the file(s) the models cannot take
            for k in group:
                try:
                    computed[k] = thermo_table(parsed[k][2], T, pressure)
                except (ValueError, ArithmeticError) as exc:  # said per file
                    errors.append(Diagnostic(parsed[k][1], "", f"cannot compute its thermochemistry: {exc}"))
    loaded = [item + (computed[k],) for k, item in enumerate(parsed) if k in computed]

    fits = []
    if loaded:
        opts = [fit_options(sp, s) for _, _, sp, _, s, _ in loaded]
        tables = [t for *_, t in loaded]
        try:
            fits = fit_tables(tables, opts)
        except ValueError:
            fits = []
            for table, o, (_, disp, *_) in zip(tables, opts, loaded):
                try:
                    fits.extend(fit_tables([table], [o]))
                except ValueError as exc:
                    errors.append(Diagnostic(disp, "fit", str(exc)))
                    fits.append(None)

    entries = []
    fitted = [(item, fit) for item, fit in zip(loaded, fits) if fit is not None]
    rendered = batch_fragments([(sp, table, fit, s) for (_, _, sp, _, s, table), fit in fitted])
    for ((key, disp, sp, warns, s, table), fit), fragments in zip(fitted, rendered):
        if isinstance(fragments, ValueError):  # e.g. a record that does not fit its columns
            errors.append(Diagnostic(disp, "", f"cannot be written: {fragments}"))
            continue
        extra: dict[str, bytes] = {}
        if s.plots:
            try:
                from pipeline.plots import species_files as plot_files

                extra = plot_files(sp, table, fit, s)
            except ImportError as exc:
                warns = list(warns) + [Diagnostic(disp, "plots", f"no plots written: {exc}", "warning")]
        quality = getattr(fit, "quality", None)
        fit_warns = [Diagnostic(disp, "fit", w, "warning") for w in getattr(quality, "warnings", ())]
        entry = {
            "key": key, "file": disp, "name": sp.name, "sha256": sp.sha256,
            "warnings": [d.as_dict() for d in list(warns) + fit_warns],
            "fragments": fragments,
        }
        entry["files"] = {rel: sha256_bytes(b) for rel, b in extra.items()}
        entry["_extra"] = extra
        entries.append(entry)
    return entries, [d.as_dict() for d in errors]


def _store(entries: list[dict], cache_root: str | None) -> str | None:
    """Put computed entries in the cache (``cache_root``: its folder) as one pack; returns
    the pack's name, or None (no cache, nothing to store, or a cache that cannot be
    written, which only costs time)."""
    if cache_root is None:
        return None
    try:
        return Cache(Path(cache_root).parent).store_entries([(e, e["_extra"]) for e in entries])
    except OSError:
        return None


def _staged(result: tuple[list[dict], list[dict]], stage: str | None) -> tuple[list[dict], list[dict]]:
    """``result`` of :func:`_compute` as it goes to the parent.  With ``stage`` (the
    folder of :meth:`Cache.staging`), each species' table is written there now, in
    the process that computed it, and its entry carries a :class:`Staged` reference in
    ``"staged"`` (output path → Staged) instead of the text: a first build's parent then
    neither receives nor writes the tables, it only moves them into place at the commit.
    The entries themselves are not changed (the cache packs keep the text)."""
    entries, errors = result
    if stage is None:
        return result
    from pipeline.writers import table_path

    top = os.path.basename(stage)
    light, made = [], set()
    for e in entries:
        frags = e["fragments"]
        rel = table_path(e["name"])
        data = frags["table_csv"].encode("utf-8")
        folder = os.path.join(stage, rel.rpartition("/")[0])
        if folder not in made:
            os.makedirs(folder, exist_ok=True)
            made.add(folder)
        with open(os.path.join(stage, rel), "wb") as fh:
            fh.write(data)
        light.append({**e, "fragments": {**frags, "table_csv": None},
                      "staged": {rel: Staged(f"{top}/{rel}", sha256_bytes(data), len(data))}})
    return light, errors


#: most species in one chunk.  The fit, the tables and the writers are batched across a
#: chunk's species; one chunk per worker measured fastest at 1,000 species, although the
#: computing itself costs the same per species in batches of 50 to 500 and the host's two
#: CPUs often differ in speed by 10–30 % (so one worker finishes 50–170 ms before the
#: other): median cold build 0.90 s against 0.99 s with chunks of 250 and 1.06 s with 125
#: (14 interleaved runs; each chunk costs a result message, a pack and a staging round).
#: Guided self-scheduling (chunks shrinking to 64 species), two small chunks at the end
#: (450, 450, 50, 50) and one pack per worker instead of one per chunk did no better.
CHUNK_MAX = 1000
#: fewest species in a chunk of a one-process build (its chunks pace the progress bar)
SERIAL_CHUNK_MIN = 250


def _chunks(todo: list, jobs: int) -> list[list]:
    """``todo`` cut into chunks: for several processes, equal chunks, a whole number of
    them per process (the workers start together and finish together); for one, tenths
    of at least :data:`SERIAL_CHUNK_MIN` species (for the progress bar).

    >>> [len(c) for c in _chunks(list(range(1000)), 2)]
    [500, 500]
    >>> [len(c) for c in _chunks(list(range(2500)), 2)]
    [625, 625, 625, 625]
    >>> [len(c) for c in _chunks(list(range(1000)), 1)]
    [250, 250, 250, 250]
    """
    n = len(todo)
    if jobs == 1:
        size = min(CHUNK_MAX, max(SERIAL_CHUNK_MIN, -(-n // 10)))
        return [todo[i: i + size] for i in range(0, n, size)]
    k = jobs * -(-n // (jobs * CHUNK_MAX))
    ends = [n * j // k for j in range(k + 1)]
    return [todo[a:b] for a, b in zip(ends, ends[1:]) if b > a]


def _compute_all(todo, settings, flags, cache_root, jobs: int, progress: Progress, meanwhile=None,
                 stage: str | None = None):
    """Run :func:`_compute` over ``todo`` in ``jobs`` processes, in chunks (for the progress bar).

    ``meanwhile()``, if given, runs in this process while the workers compute
    (work the parent needs later, e.g. compiling the document templates).
    Returns (entries, error diagnostics as dicts, ``stored``), the entries and
    errors in the order of ``todo``'s chunks whatever order they finish in;
    ``stored()`` gives the names of the cache packs written.  Workers store their
    packs after sending their results, while this process goes on with them:
    ``stored()`` waits for the packs and for the workers to end (call it once,
    also when the results are not used).  With ``stage``, the tables are written
    there by whoever computes them (:func:`_staged`).
    """
    entries: list[dict] = []
    errors: list[dict] = []
    if not todo:
        return entries, errors, lambda: set()
    jobs = max(1, min(jobs, len(todo) // 8 or 1))
    chunks = _chunks(todo, jobs)
    packs: set[str | None] = set()
    if jobs == 1:
        if meanwhile:
            meanwhile()

        def serial():
            for i, chunk in enumerate(chunks):
                result = _compute(chunk, settings, flags)
                packs.add(_store(result[0], cache_root))
                yield i, _staged(result, stage)

        results, stored, stop = serial(), lambda: packs - {None}, None
    else:
        workers = _Workers(chunks, jobs, (settings, flags, cache_root, stage), meanwhile)
        results, stored, stop = workers.results(), workers.stored, workers.stop
    try:
        done = 0
        by_chunk = {}
        for i, result in results:
            by_chunk[i] = result
            done += len(chunks[i])
            progress.update(done)
    except BaseException:
        if stop:
            stop()
        raise
    for i in range(len(chunks)):
        e, err = by_chunk[i]
        entries += e
        errors += err
    return entries, errors, stored


def _context():
    """The multiprocessing context of the build's children: fork where the platform has it
    (a child shares what the parent has imported and read), else spawn."""
    import multiprocessing

    return multiprocessing.get_context("fork" if hasattr(os, "fork") else "spawn")


def _child(target, args: tuple):
    """Start ``target(*args, conn)`` in a child process (:func:`_context`) with ``conn`` the
    sending end of a pipe.  Returns (process, receiving end), or None when the process
    cannot be started."""
    ctx = _context()
    receive, send = ctx.Pipe(duplex=False)
    _widen(send)
    child = ctx.Process(target=target, args=(*args, send), daemon=True)
    try:
        child.start()
    except OSError:
        receive.close()
        send.close()
        return None
    send.close()
    return child, receive


#: pipe capacity asked for a child's results (Linux; the kernel's default is 64 KiB)
PIPE_BYTES = 1 << 20


def _widen(conn) -> None:
    """Give the pipe behind ``conn`` a capacity of :data:`PIPE_BYTES` where the platform
    allows it (Linux ``F_SETPIPE_SZ``; up to ``/proc/sys/fs/pipe-max-size``, 1 MiB by
    default).  A worker's result (1.3 MB for 500 species) then crosses in two writes
    instead of twenty 64 KiB turns, each of which waits for the reader to be scheduled:
    traced on a loaded host, with the other worker still busy, the last worker's send
    took 27–49 ms where its pickling takes 3 (on a quiet host 2–7 ms either way)."""
    try:
        import fcntl

        fcntl.fcntl(conn.fileno(), fcntl.F_SETPIPE_SZ, PIPE_BYTES)
    except (ImportError, AttributeError, OSError):
        pass  # not Linux, or above the system's limit: the default capacity only costs time


def _take(counter, n: int) -> int:
    """Take the next ``n`` items of work from ``counter`` (a shared multiprocessing Value
    counting the items already taken by every process); returns the first one's index."""
    with counter.get_lock():
        first = counter.value
        counter.value = first + n
    return first


class WorkerError(RuntimeError):
    """The traceback of an exception raised in a build worker (the ``__cause__`` of its re-raise)."""


class _Workers:
    """``jobs`` worker processes computing ``chunks`` (each takes the next chunk not yet
    taken — a shared counter — when it is free): :meth:`results` yields (chunk index,
    :func:`_compute` result) as they arrive, :meth:`stored` the names of the cache packs
    the workers wrote after sending them.  A worker's exception is raised in
    :meth:`results`; a worker that dies before every result is in (killed, out of
    memory) raises :class:`WorkerError` there instead of leaving the build waiting."""

    def __init__(self, chunks: list[list], jobs: int, args: tuple, meanwhile=None):
        self.count = len(chunks)
        self.packs: set[str | None] = set()
        self.started: list = []
        self.pending: dict = {}
        taken = _context().Value("l", 0)
        try:
            for _ in range(jobs):
                got = _child(_work, (chunks, taken, *args))
                if got is None:
                    raise WorkerError("cannot start a build worker process")
                self.started.append(got)
                self.pending[got[1]] = got[0]
            if meanwhile:
                meanwhile()
        except BaseException:
            self.stop()
            raise

    def _messages(self):
        """(chunk index, kind, payload) of each message, until every worker has ended."""
        import pickle
        from multiprocessing.connection import wait

        while self.pending:
            for conn in wait(list(self.pending)):
                try:
                    message = pickle.loads(conn.recv_bytes())
                except (EOFError, OSError):  # the worker is done, or died
                    child = self.pending.pop(conn)
                    child.join()
                    yield None, "end", child.exitcode
                    continue
                yield message

    def results(self):
        got = 0
        for i, kind, payload in self._messages():
            if kind == "result":
                yield i, payload
                got += 1
                if got == self.count:
                    return
            elif kind == "pack":
                self.packs.add(payload)
            elif kind == "error":
                exc, trace = payload
                raise exc from WorkerError(trace)
            elif payload:  # a worker ended early
                how = f"signal {-payload}" if payload < 0 else f"exit code {payload}"
                raise WorkerError(f"a build worker process ended early ({how})")
        raise WorkerError("the build workers ended before every result was in")

    def stored(self) -> set[str]:
        """Wait for the workers' last packs and for the workers to end; the pack names.  A
        worker that dies now only leaves its pack out (the cache misses it)."""
        try:
            for _, kind, payload in self._messages():
                if kind == "pack":
                    self.packs.add(payload)
        finally:
            self.stop()
        return self.packs - {None}

    def stop(self) -> None:
        """End the workers now (after an error: their work is not wanted) and close the pipes."""
        for child, conn in self.started:
            conn.close()
            if child.is_alive():
                child.terminate()
            child.join()
        self.pending = {}


def _work(chunks, taken, settings, flags, cache_root, stage, conn) -> None:
    """A build worker (child of :class:`_Workers`): until every chunk is taken, take the
    next (``taken`` counts them), send (index, "result", its result — :func:`_staged`
    into ``stage``), store its entries in the cache and send (index, "pack", the pack's
    name); on an exception, send (None, "error", (exception, traceback text)) and stop."""
    import pickle

    def send(message) -> None:
        conn.send_bytes(pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL))

    try:
        while True:
            i = _take(taken, 1)
            if i >= len(chunks):
                break
            fault("worker")
            result = _compute(chunks[i], settings, flags)
            send((i, "result", _staged(result, stage)))
            send((i, "pack", _store(result[0], cache_root)))
    except BaseException as exc:  # noqa: BLE001 - every failure goes to the parent, which reports it
        import traceback

        trace = traceback.format_exc()
        try:
            send((None, "error", (exc, trace)))
        except Exception:  # noqa: BLE001 - an exception that does not pickle: its text does
            try:
                send((None, "error", (WorkerError(f"{type(exc).__name__}: {exc}"), trace)))
            except OSError:
                pass  # the parent is gone
    finally:
        conn.close()


# --------------------------------------------------------------------------
# Planning: what the output folder should contain
# --------------------------------------------------------------------------


class Plan:
    """Everything a build decides before touching the output folder."""

    files: dict[str, bytes]  # output-relative path → bytes
    errors: list[Diagnostic]
    warnings: list[Diagnostic]
    computed: int
    cached: int
    manifest: dict
    entries: list[dict]
    fresh_packs: set[str]  # cache packs this build wrote (all their entries live)


#: fewest files worth reading ahead in another process (below that, forking costs more than it saves)
READ_AHEAD_MIN = 64


def _read_ahead(inputs: Inputs, cache: Cache | None, shard=None):
    """Start reading the YAML of the species files the cache has never seen, in a forked process.

    A cold build spends its first tenth of a second importing numpy and the
    compute modules; with a second CPU, a child that needs only PyYAML
    (:mod:`pipeline.safeyaml`) reads the files meanwhile.  Returns a function
    that reads, in this process, the files the child has not yet taken (the two
    take blocks of :data:`READ_BLOCK` files in turn from a shared counter, so
    whichever is free first does the rest), waits for the child and gives
    {file sha256: document} (files that could not be read are left out: the
    worker reads them again and reports why).  None when there is nothing worth
    doing, no second CPU or no fork.
    """
    from pipeline.settings import workers

    known = cache.species_hashes() if cache is not None else set()
    files = [(sha, data) for name, _, data, sha in inputs.files if sha not in known and _in_shard(name, shard)]
    if len(files) < READ_AHEAD_MIN or workers("auto") < 2 or not hasattr(os, "fork"):
        return None
    import pickle

    taken = _context().Value("l", 0)
    started = _child(_read_files, (files, taken))
    if started is None:
        return None
    child, receive = started

    got: list[dict] = []

    def collect() -> dict:
        if not got:
            docs = _read_some(files, taken)
            try:
                docs.update(pickle.loads(receive.recv_bytes()))
            except (EOFError, OSError, pickle.UnpicklingError):
                pass  # the child died: the workers read its files themselves
            finally:
                receive.close()
                child.join()
            got.append(docs)
        return got[0]

    return collect


#: files taken at a time from the counter :func:`_read_ahead` shares with its child
READ_BLOCK = 16


def _read_some(files, taken) -> dict:
    """{sha256: document} of the blocks of ``files`` this process takes (``taken`` counts
    the files taken by either process) until none is left, leaving out files that do not
    read cleanly."""
    docs = {}
    while True:
        start = _take(taken, READ_BLOCK)
        if start >= len(files):
            return docs
        from pipeline.safeyaml import load_yaml  # imported by whichever process reads
        for sha, data in files[start:start + READ_BLOCK]:
            try:
                doc = load_yaml(data.decode("utf-8"))
            except Exception:  # noqa: BLE001 - any failure: the worker reads the file and says why
                continue
            if doc is not None:
                docs[sha] = doc


def _read_files(files, taken, conn) -> None:
    """Child of :func:`_read_ahead`: send the documents of the blocks it takes."""
    import pickle

    conn.send_bytes(pickle.dumps(_read_some(files, taken), protocol=pickle.HIGHEST_PROTOCOL))
    conn.close()


def _in_shard(name: str, shard: tuple[int, int] | None) -> bool:
    if shard is None:
        return True
    i, n = shard
    return int(sha256_bytes(name.encode())[:8], 16) % n == i - 1


def _plan(inputs: Inputs, out: Path, cache: Cache | None, *, jobs: int | None, shard=None,
          keep_going: bool = False, verbosity: int = 1, progress: bool = False,
          since_last: bool = False, started: float | None = None, reserve: bool = False) -> Plan:
    """What the output folder should contain; ``started`` (time.monotonic()) is when the
    build began, from which the progress bar's one-second delay counts.  With
    ``reserve`` (a first build into an output folder, which writes every file), the
    workers write the tables themselves (:meth:`Cache.staging`, :func:`_staged`) and the
    temporaries of the other files are made while they compute (:meth:`Cache.reserve`)."""
    ahead = _read_ahead(inputs, cache, shard)
    try:
        return _plan_read(inputs, out, cache, ahead, jobs=jobs, shard=shard, keep_going=keep_going,
                          verbosity=verbosity, progress=progress, since_last=since_last, started=started,
                          reserve=reserve)
    finally:
        if ahead:
            ahead()  # idempotent: waits for (and reaps) the child if an error came first


def _plan_read(inputs: Inputs, out: Path, cache: Cache | None, ahead, *, jobs, shard, keep_going,
               verbosity, progress, since_last, started, reserve=False) -> Plan:
    from pipeline.settings import load_settings, workers

    _set_up_compute()  # before load_settings, which imports numpy
    settings = load_settings(inputs.dir)
    glob = settings.replace(**inputs.flags)
    _check_flags(glob, inputs.flags)
    skey = {**settings.model_key(), "plots": settings.plots}
    if glob.plots:  # plot bytes depend on the drawing library (and on whether it is there)
        from pipeline.plots import engine

        skey["plot_engine"] = engine()
    plan = Plan()
    plan.errors, plan.warnings = [], []
    by_file: dict[str, dict] = {}
    todo = []
    keys = {}
    entry_key = inputs.entry_keys(skey)
    for name, disp, data, sha in inputs.files:
        key = entry_key(name, sha)
        keys[disp] = key
        entry = cache.load_entry(key) if cache else None
        if entry is not None:
            # the same file seen from another working folder: name it as the user does now
            entry["file"] = disp
            entry["warnings"] = [{**d, "file": disp} for d in entry["warnings"]]
            by_file[disp] = entry
        elif _in_shard(name, shard):
            todo.append((key, disp, data, sha))
    plan.cached = len(by_file)
    plan.computed = len(todo)
    if todo:  # the compute modules load while the files are read (and before any fork)
        import pipeline.fit, pipeline.species, pipeline.thermo, pipeline.writers  # noqa: F401,E401
    docs = ahead() if ahead else {}
    todo = [(key, disp, data, docs.get(sha)) for key, disp, data, sha in todo]
    bar = Progress(len(todo), "statherm build", enabled=verbosity > 0, force=progress, start=started)
    try:
        from pipeline.writers import DOCUMENT_TEMPLATES, load_templates  # only this process renders documents

        # a first build (which writes every file): the tables are written where they are
        # computed (_staged); the temporaries of the documents and provenance.json are made
        # while the workers compute
        stage = cache.staging() if reserve and cache is not None and shard is None and todo else None

        def meanwhile() -> None:  # while the workers compute (so only when there is something to compute)
            load_templates()
            if stage:  # the documents and provenance.json; the workers write the tables
                cache.reserve(len(DOCUMENT_TEMPLATES) + 1)

        entries, errors, stored = _compute_all(
            todo, settings, inputs.flags, cache.root.as_posix() if cache else None,
            workers(jobs or settings.jobs), bar, meanwhile=meanwhile if shard is None else None, stage=stage)
    finally:
        bar.close()
    try:  # the workers store their cache packs meanwhile
        plan.errors = [Diagnostic(**d) for d in errors]
        for e in entries:
            by_file[e["file"]] = e
            if verbosity > 1:
                print(f"computed {e['file']} ({e['name']})", file=sys.stderr)
        no_plots = None
        for e in by_file.values():
            for d in e["warnings"]:
                if d["key"] == "plots":  # said once for the database, not for every species
                    no_plots = Diagnostic(inputs.settings_file, "plots", d["message"], "warning")
                else:
                    plan.warnings.append(Diagnostic(**d))
        if no_plots:
            plan.warnings.append(no_plots)
        if shard is not None:
            plan.files, plan.entries, plan.manifest = {}, [], {}
            return plan

        from types import SimpleNamespace

        from pipeline.species import duplicate_names

        dups = duplicate_names([SimpleNamespace(name=e["name"], path=f) for f, e in by_file.items()])
        plan.errors.extend(dups)
        bad = {d.file for d in plan.errors}
        good = sorted((e for f, e in by_file.items() if f not in bad), key=lambda e: e["name"])
        plan.entries = good
        if plan.errors and not keep_going:
            plan.files = {}
            plan.manifest = {}
            return plan

        from pipeline.writers import assemble

        files = dict(assemble([e["fragments"] for e in good], glob))
        if since_last and glob.report_changes:
            _note_changes_since(out, files)
        for e in good:
            extra = e.get("_extra")
            for rel, sha in e.get("files", {}).items():
                files[rel] = extra[rel] if extra else cache.blob(sha)
            files.update(e.get("staged", ()))
        shas = {rel: data.sha if isinstance(data, Staged) else sha256_bytes(data) for rel, data in files.items()}
        files[PROVENANCE] = _provenance_record(inputs, files, shas, left_out=bad)
        shas[PROVENANCE] = sha256_bytes(files[PROVENANCE])
        plan.files = files
        plan.manifest = {
            "format": FORMAT,
            "version": __version__,
            "build_key": inputs.build_key,
            "complete": not plan.errors,
            "code": inputs.code,
            "settings_file": inputs.settings_sha,
            "settings": skey,
            "flags": inputs.flags,
            "inputs": {disp: sha for _, disp, _, sha in inputs.files},
            "entries": {f: keys[f] for f in by_file if f not in bad},
            "outputs": {rel: [0, 0, shas[rel]] for rel in files},
        }
        return plan
    finally:
        plan.fresh_packs = stored()


def _set_up_compute() -> None:
    """Tune this process (and the workers it forks) for the numerical work ahead.

    * One BLAS thread, unless the user has chosen a number (``OPENBLAS_NUM_THREADS``,
      ``OMP_NUM_THREADS``, ``MKL_NUM_THREADS``; only has an effect before numpy is
      first imported): the build is parallel by processes and its matrix products
      are small, so a BLAS thread pool only competes with the workers (measured: the
      parent's idle OpenBLAS thread took 2 % of a 1,000-species cold build's CPU
      samples, spinning).
    * With glibc, ``malloc`` keeps freed memory for reuse (``mallopt``: blocks up to
      32 MB from the heap, heap trimmed only past 256 MB free).  The fit and the
      writers make and drop many numpy temporaries of 0.1–5 MB; by default each one
      is mapped fresh from the kernel and zeroed page by page.  Measured on a worker's
      500 species: 37,000 → 14,000 page faults, 0.08–0.10 → 0.03–0.04 s system time.
    """
    if "numpy" not in sys.modules:
        for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            os.environ.setdefault(var, "1")
    _keep_freed_memory()


#: glibc mallopt parameters (malloc.h) and the values :func:`_keep_freed_memory` sets
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3
_TRIM_BYTES, _MMAP_BYTES = 256 << 20, 32 << 20


def _keep_freed_memory() -> bool:
    """``mallopt`` so that glibc's malloc reuses freed blocks instead of returning them to
    the kernel (see :func:`_set_up_compute`); True if applied (Linux with glibc)."""
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        libc = ctypes.CDLL(None)
        if not hasattr(libc, "gnu_get_libc_version"):  # not glibc (musl's mallopt does nothing)
            return False
        return bool(libc.mallopt(_M_TRIM_THRESHOLD, _TRIM_BYTES)) & bool(libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_BYTES))
    except (OSError, AttributeError):
        return False


def _check_flags(glob, flags: dict) -> None:
    """Flag values that are wrong on their own (ranges are checked per species)."""
    bad = []
    for _, dest, *_ in _SETTING_FLAGS:
        v = flags.get(dest)
        if v is not None and v != "auto" and not v > 0:
            bad.append(Diagnostic("command line", f"--{dest.replace('_', '-')}", f"{v!r} must be positive"))
    if bad:
        raise InputError(bad)


def _changes(out: Path, files: dict[str, bytes | Staged],
             manifest: dict | None) -> tuple[dict[str, bytes | Staged], list[str]]:
    """(files whose bytes differ from what is on disk, stale files to delete); a
    :class:`Staged` file is compared by its sha256."""
    old = (manifest or {}).get("outputs", {})
    listing = _listing(out, files)
    writes = {}
    for rel, data in files.items():
        if rel not in listing:  # not on disk: no need to look
            writes[rel] = data
            continue
        path = os.path.join(out, rel)
        rec = old.get(rel)
        st = file_state(path)
        if st is None:
            writes[rel] = data
            continue
        staged = isinstance(data, Staged)
        if rec is not None and st == rec[:2] and (data.size if staged else len(data)) == rec[0]:
            if (data.sha if staged else sha256_bytes(data)) != rec[2]:
                writes[rel] = data
            continue
        try:
            with open(path, "rb") as fh:
                disk = fh.read()
            if (sha256_bytes(disk) != data.sha) if staged else (disk != data):
                writes[rel] = data
        except OSError:
            writes[rel] = data
    deletes = {rel for rel in old if rel not in files and (out / rel).exists()}
    deletes |= _leftovers(out, files, listing)
    return writes, sorted(deletes)


def _listing(out: Path, files) -> dict[str, bool]:
    """What is in the folders of ``out`` that ``files`` (output-relative paths) go to:
    output-relative path → whether it is a regular file (one directory listing per folder
    instead of a stat per file)."""
    found: dict[str, bool] = {}
    for parent in {rel.rpartition("/")[0] for rel in files}:
        try:
            with os.scandir(os.path.join(out, parent)) as it:
                for e in it:
                    found[f"{parent}/{e.name}" if parent else e.name] = e.is_file()
        except OSError:
            continue
    return found


def _note_changes_since(out: Path, files: dict[str, bytes]) -> None:
    """Open REPORT.md with what changed between the records on disk (the last build) and these.

    Only with ``report_changes: true`` and a previous build in the cache; the
    section is fenced (:mod:`pipeline.diff`) so that ``check`` can leave it out.
    """
    old_dat = out / "thermo.dat"
    if "REPORT.md" not in files or "thermo.dat" not in files or not old_dat.is_file():
        return
    from pipeline.diff import since_last_build, with_since_last_build
    from pipeline.readers import read_records

    try:
        old = read_records(old_dat)
    except InputError:  # not ours to judge here: the build replaces it
        return
    new = read_records(files["thermo.dat"].decode("utf-8"), name="thermo.dat")
    report = with_since_last_build(files["REPORT.md"].decode("utf-8"), since_last_build(old, new))
    files["REPORT.md"] = report.encode("utf-8")


def _ignore_changes_section(out: Path, files: dict[str, bytes], writes: dict[str, bytes]) -> None:
    """``check``: REPORT.md's since-last-build section comes from the cache, not from the
    inputs (a fresh clone has none), so REPORT.md is compared without it."""
    if "REPORT.md" not in writes:
        return
    from pipeline.diff import strip_since_last_build

    try:
        disk = (out / "REPORT.md").read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return
    if strip_since_last_build(disk) == strip_since_last_build(files["REPORT.md"].decode("utf-8")):
        del writes["REPORT.md"]


def _leftovers(out: Path, files: dict[str, bytes], listing: dict[str, bool] | None = None) -> set[str]:
    """Files in the output's sub-folders (tables/, plots/) of a kind the build writes there
    but no longer produces — e.g. the table of a removed species.  ``listing`` is
    :func:`_listing` of ``files``, if known."""
    kinds: dict[str, set[str]] = {}
    for rel in files:
        parent, _, leaf = rel.rpartition("/")
        if parent:
            kinds.setdefault(parent, set()).add(os.path.splitext(leaf)[1])
    if listing is None:
        listing = _listing(out, files)
    out_left = set()
    for rel, is_file in listing.items():
        parent, _, name = rel.rpartition("/")
        if is_file and parent in kinds and rel not in files and os.path.splitext(name)[1] in kinds[parent]:
            out_left.add(rel)
    return out_left


def _note(as_json: bool, text: str) -> None:
    """A line for people on stderr (left out when diagnostics go out as one JSON document)."""
    if not as_json:
        print(text, file=sys.stderr)


def _emit(diags: list[Diagnostic], verbosity: int, as_json: bool) -> None:
    from pipeline.cli import report

    shown = [d for d in diags if d.severity == "error" or verbosity > 0]
    if shown or as_json:
        report(shown, as_json)


# --------------------------------------------------------------------------
# build
# --------------------------------------------------------------------------


def _prepare(out_dir) -> Path:
    out = Path(out_dir)
    try:
        from pipeline.cache import ensure_folder

        ensure_folder(out)
    except Unwritable as exc:
        raise InputError([Diagnostic(out.as_posix(), "", str(exc).split(": ", 1)[1])]) from None
    return out


def build(species_dir="species", out_dir="output", *, flags: dict | None = None, jobs: int | None = None,
          shard=None, keep_going: bool = False, verbosity: int = 1, as_json: bool = False,
          progress: bool = False) -> int:
    """``statherm build``: see the module docstring.  Returns the exit code."""
    t0 = time.monotonic()
    inputs = Inputs(species_dir, flags or {})
    out = _prepare(out_dir)
    cache = Cache(out)
    if shard is not None:
        plan = _plan(inputs, out, cache, jobs=jobs, shard=shard, verbosity=verbosity, progress=progress,
                     started=t0)
        _emit(plan.errors + plan.warnings, verbosity, as_json)
        if verbosity > 0 and not plan.errors:
            i, n = shard
            _note(as_json, f"statherm: shard {i}/{n}: {plan.computed} species computed into the cache")
        return EXIT_DATA if plan.errors else EXIT_OK
    try:
        with Lock(out, quiet=verbosity == 0):
            return _build_locked(inputs, out, cache, t0, jobs=jobs, keep_going=keep_going,
                                 verbosity=verbosity, as_json=as_json, progress=progress)
    except OSError as exc:
        raise InputError([Diagnostic(out.as_posix(), "", f"cannot write ({exc.strerror}: {exc.filename})")]) from None


def _build_locked(inputs, out, cache, t0, *, jobs, keep_going, verbosity, as_json, progress) -> int:
    if cache.recover() and verbosity > 0:
        _note(as_json, f"statherm: completed an interrupted build of {out.as_posix()}")
    manifest = cache.load_manifest()
    if _manifest_current(manifest, inputs, out, cache):
        if verbosity > 1:
            _note(as_json, f"statherm: {out.as_posix()} is up to date ({len(inputs.files)} species)")
        return EXIT_OK
    try:
        return _build_planned(inputs, out, cache, manifest, t0, jobs=jobs, keep_going=keep_going,
                              verbosity=verbosity, as_json=as_json, progress=progress)
    finally:
        cache.drop_reserved()
        cache.drop_staging()


def _build_planned(inputs, out, cache, manifest, t0, *, jobs, keep_going, verbosity, as_json, progress) -> int:
    plan = _plan(inputs, out, cache, jobs=jobs, keep_going=keep_going, verbosity=verbosity, progress=progress,
                 since_last=manifest is not None, started=t0, reserve=manifest is None)
    if plan.errors and not keep_going:
        _emit(plan.errors + plan.warnings, verbosity, as_json)
        files = len({d.file for d in plan.errors})
        _note(as_json, f"statherm: {files} file(s) with errors; {out.as_posix()} left unchanged "
              "(--keep-going writes the good species)")
        return EXIT_DATA
    writes, deletes = _changes(out, plan.files, manifest)
    cache.commit(writes, deletes, plan.manifest)
    cache.prune(set(plan.manifest["entries"].values()),
                {sha for e in plan.entries for sha in e.get("files", {}).values()}, plan.fresh_packs)
    _emit(plan.errors + plan.warnings, verbosity, as_json)
    if verbosity > 0 and (writes or deletes or plan.computed or verbosity > 1):
        dt = time.monotonic() - t0
        _note(as_json, f"statherm: {len(plan.entries)} species ({plan.computed} computed, {plan.cached} cached) → "
              f"{out.as_posix()}: {len(writes)} file(s) written, {len(deletes)} removed, "
              f"{len(plan.files) - len(writes)} unchanged ({dt:.2f} s)")
    if verbosity > 1:
        for rel in sorted(writes):
            print(f"  wrote {rel}", file=sys.stderr)
        for rel in deletes:
            print(f"  removed {rel}", file=sys.stderr)
    return EXIT_DATA if plan.errors else EXIT_OK


# --------------------------------------------------------------------------
# check
# --------------------------------------------------------------------------


def check(species_dir="species", out_dir="output", *, flags: dict | None = None, verbosity: int = 1,
          as_json: bool = False, strict: bool = False) -> int:
    """``statherm check``: exit 1, naming what is stale, if ``out_dir`` is not what a build would write.

    First the output's own record (``provenance.json``) is compared with the
    species files, the settings and the code, and every output file with the
    hash recorded for it.  If all agree the output is up to date and nothing is
    computed, so the answer does not depend on the machine (another CPU or BLAS
    may change the last bits of a fit, never whether the output is stale).
    Otherwise — or always with ``strict`` — the database is rebuilt in memory
    and compared byte for byte, to name what differs and why.
    """
    inputs = Inputs(species_dir, flags or {})
    out = Path(out_dir)
    if not out.is_dir():
        _emit([Diagnostic(out.as_posix(), "", "does not exist: run `statherm build`")], verbosity, as_json)
        return EXIT_DATA
    try:
        _prepare(out)
        cache: Cache | None = Cache(out)
    except InputError:
        cache = None  # read-only checkout: check without a cache
    if cache is None:
        return _check(inputs, out, None, verbosity, as_json, strict)
    with Lock(out, quiet=verbosity == 0):
        cache.recover()
        return _check(inputs, out, cache, verbosity, as_json, strict)


def _check(inputs: Inputs, out: Path, cache: Cache | None, verbosity: int, as_json: bool,
           strict: bool = False) -> int:
    if not strict and not _check_provenance(inputs, out):
        if verbosity > 1:
            _note(as_json, f"statherm: {out.as_posix()} is up to date")
        return EXIT_OK
    # stale (or strict): rebuild in memory to say exactly what differs and why
    manifest = cache.load_manifest() if cache else None
    # strict: compute every species afresh rather than trusting the cache's entries
    plan = _plan(inputs, out, None if strict else cache, jobs=None, verbosity=0)
    if plan.errors:
        _emit(plan.errors, verbosity, as_json)
        _note(as_json, f"statherm: {len({d.file for d in plan.errors})} species file(s) with errors: "
              f"{out.as_posix()} cannot be checked")
        return EXIT_DATA
    writes, deletes = _changes(out, plan.files, manifest)
    _ignore_changes_section(out, plan.files, writes)
    if not writes and not deletes:
        if cache:
            m = plan.manifest
            for rel in m["outputs"]:
                m["outputs"][rel][:2] = file_state(out / rel)
            cache.store_manifest(m)
        if verbosity > 1:
            _note(as_json, f"statherm: {out.as_posix()} is up to date")
        return EXIT_OK
    diags = _stale_reasons(inputs, out, plan, manifest, writes, deletes)
    _emit(diags, 1, as_json)
    if verbosity > 0 and not as_json:
        _note(as_json, f"statherm: {out.as_posix()} is stale ({len(writes)} file(s) differ, {len(deletes)} left over): "
              "run `statherm build` (or `make`)")
    return EXIT_DATA


#: the output's record of what it was built from (species, settings, code) and of its files
PROVENANCE = "provenance.json"


def _normalised(rel: str, data: bytes) -> bytes:
    """The bytes of an output file as recorded: REPORT.md without its since-last-build
    section, which comes from the local cache rather than from the inputs."""
    if rel == "REPORT.md":
        from pipeline.diff import strip_since_last_build

        # a damaged file must hash differently, not crash: undecodable bytes become U+FFFD
        return strip_since_last_build(data.decode("utf-8", "replace")).encode("utf-8")
    return data


def _provenance_record(inputs: Inputs, files: dict[str, bytes], shas: dict[str, str],
                       left_out=frozenset()) -> bytes:
    """``provenance.json``: tool version, code fingerprint, settings, the species files in
    the output (not those ``left_out`` by ``--keep-going``) and the sha256 of every other
    output file (deterministic JSON, no paths, no times).  ``shas`` holds the sha256 of
    each file's bytes; a file :func:`_normalised` changes is hashed again."""
    import json

    hashes = {}
    for rel, data in sorted(files.items()):
        if rel != PROVENANCE:
            norm = _normalised(rel, data)
            hashes[rel] = shas[rel] if norm is data else sha256_bytes(norm)
    doc = {
        "format": "statherm-provenance",
        "format_version": 1,
        "tool_version": __version__,
        "code": inputs.code,
        "settings_file": inputs.settings_sha,
        "flags": inputs.flags,
        "species": {name: sha for name, disp, _, sha in inputs.files if disp not in left_out},
        "files": hashes,
    }
    return (json.dumps(doc, indent=1, sort_keys=True, ensure_ascii=False) + "\n").encode("utf-8")


def _check_provenance(inputs: Inputs, out: Path) -> list[Diagnostic]:
    """What makes ``out`` stale, judged from its provenance record (empty: up to date)."""
    import json

    where = (out / PROVENANCE).as_posix()
    try:
        rec = json.loads((out / PROVENANCE).read_text(encoding="utf-8"))
        recorded_species, recorded_files = dict(rec["species"]), dict(rec["files"])
    except FileNotFoundError:
        return [Diagnostic(where, "", "missing: the output was not written by this version of `statherm build`")]
    except (OSError, ValueError, KeyError, TypeError) as exc:
        return [Diagnostic(where, "", f"unreadable ({type(exc).__name__}): rebuild the output")]
    diags = _species_changes(inputs, recorded_species)
    if rec.get("settings_file") != inputs.settings_sha or rec.get("flags") != inputs.flags:
        diags.append(Diagnostic(inputs.settings_file, "", "settings changed since the output was built"))
    if rec.get("code") != inputs.code or rec.get("tool_version") != __version__:
        diags.append(Diagnostic("pipeline/", "", "code changed since the output was built"))
    for rel, sha in sorted(recorded_files.items()):
        try:
            data = (out / rel).read_bytes()
        except OSError:
            diags.append(Diagnostic((out / rel).as_posix(), "", "missing"))
            continue
        if sha256_bytes(_normalised(rel, data)) != sha:
            diags.append(Diagnostic((out / rel).as_posix(), "", "modified since the build that wrote it"))
    for rel in sorted(_leftovers(out, {**recorded_files, PROVENANCE: b""})):
        diags.append(Diagnostic((out / rel).as_posix(), "", "not written by the last build (left over)"))
    return diags


def _species_changes(inputs: Inputs, recorded: dict[str, str]) -> list[Diagnostic]:
    """The species files new, removed or changed since an output that ``recorded`` them
    (species file name → sha256), in file-name order."""
    now = {name: (disp, sha) for name, disp, _, sha in inputs.files}
    diags = []
    for name in sorted(set(now) | set(recorded)):
        disp = now[name][0] if name in now else (inputs.dir / name).as_posix()
        if name not in recorded:
            diags.append(Diagnostic(disp, "", "new species file, not yet in the output"))
        elif name not in now:
            diags.append(Diagnostic(disp, "", "removed, but still in the output"))
        elif now[name][1] != recorded[name]:
            diags.append(Diagnostic(disp, "", "changed since the output was built"))
    return diags


def _stale_reasons(inputs, out, plan, manifest, writes, deletes) -> list[Diagnostic]:
    """Name why the output is stale: species files, settings, code — then the files.

    Species and model settings are compared through the provenance that
    thermo.yaml records per species (species file, its sha256, tool version,
    model options), on disk and in the fresh build, so this works without a
    cache (a fresh clone in CI); the cache's manifest adds the settings file,
    the flags and the code fingerprint.
    """
    diags: list[Diagnostic] = []
    try:
        on_disk = (out / "thermo.yaml").read_bytes()
    except OSError:
        on_disk = None
    old, new = _provenance(on_disk), _provenance(plan.files.get("thermo.yaml"))
    explained = False
    moved: dict[str, tuple] = {}
    if old is not None and new is not None:
        # the fresh build is of the species files as they are now: compare those with the record
        diags.extend(_species_changes(inputs, {f: p.get("sha256") for f, p in old.items()}))
        for f in sorted(set(old) & set(new)):
            if old[f].get("sha256") == new[f].get("sha256"):
                a, b = old[f].get("model") or {}, new[f].get("model") or {}
                for k in sorted(set(a) | set(b)):
                    if a.get(k) != b.get(k):
                        moved.setdefault(k, (a.get(k), b.get(k)))
                if old[f].get("tool_version") != new[f].get("tool_version"):
                    moved.setdefault("tool version", (old[f].get("tool_version"), new[f].get("tool_version")))
        explained = bool(diags)
    if moved or (manifest and (manifest.get("settings_file") != inputs.settings_sha
                               or manifest.get("flags") != inputs.flags)):
        text = "; ".join(f"{k}: {a!r} → {b!r}" for k, (a, b) in sorted(moved.items()))
        diags.append(Diagnostic(inputs.settings_file, "",
                                "settings changed since the output was built" + (f" ({text})" if text else "")))
        explained = True
    if manifest and (manifest.get("code") != inputs.code or manifest.get("version") != __version__):
        diags.append(Diagnostic("pipeline/", "", "code changed since the output was built"))
        explained = True
    if not explained:
        diags.append(Diagnostic("pipeline/", "", "the species files and model settings are those the output "
                                "records, so the code (or a setting such as plots) changed what a build writes"))
    for rel in sorted(writes):
        what = "missing" if not (out / rel).exists() else "differs from a fresh build"
        diags.append(Diagnostic((out / rel).as_posix(), "", what))
    for rel in deletes:
        diags.append(Diagnostic((out / rel).as_posix(), "", "no longer produced by a build (left over)"))
    return diags


def _provenance(data: bytes | None) -> dict[str, dict] | None:
    """species file name → the provenance thermo.yaml records for it (None if unreadable)."""
    if data is None:
        return None
    from pipeline.safeyaml import load_yaml

    try:
        doc = load_yaml(data.decode("utf-8"))
        out = {}
        for entry in doc["species"]:
            prov = entry.get("provenance") or {}
            if prov.get("species_file"):
                out[prov["species_file"]] = prov
        return out
    except Exception:  # an older or foreign file: no provenance to compare
        return None


# --------------------------------------------------------------------------
# show
# --------------------------------------------------------------------------

#: temperatures [K] of the ``show`` tables (limited to each species' range)
SHOW_T = (200.0, 298.15, 300.0, 400.0, 500.0, 600.0, 800.0, 1000.0, 1500.0, 2000.0, 2500.0,
          3000.0, 3500.0, 4000.0, 5000.0, 6000.0)


def cmd_show(args) -> int:
    text = show(args.file)
    sys.stdout.write(text)
    return EXIT_OK


def show(path: str) -> str:
    """A readable view of a fixed-column file: per species, ranges and Cp, H, S, G at round T.

    Meant as a git ``textconv`` driver, so that ``git diff`` of a database
    shows how the properties moved.
    """
    from pipeline.readers import read_records

    p = Path(path)
    try:
        fits = read_records(p)
    except OSError as exc:
        raise InputError([Diagnostic(path, "", f"cannot be read ({exc.strerror})")]) from None
    lines = []
    for f in fits:
        formula = " ".join(f"{el}{n}" for el, n in f.formula)
        charge = f" charge {f.charge:+d}" if f.charge else ""
        lines.append(f"{f.name}  {formula}{charge}  phase {f.phase}  T {f.tlow:g}–{f.tmid:g}–{f.thigh:g} K")
        lines.append(f"  {'T [K]':>8} {'Cp [J/mol/K]':>13} {'H [kJ/mol]':>12} {'S [J/mol/K]':>12} {'G [kJ/mol]':>12}")
        T = [t for t in SHOW_T if f.tlow <= t <= f.thigh]
        import numpy as np

        T = np.asarray(sorted(set(T) | {f.tlow, f.tmid, f.thigh}), dtype=float)
        # rounded as printed, + 0.0 so that a value that rounds to zero never shows as -0.0000
        cp, h, s, g = (np.round(v, 4) + 0.0 for v in (f.cp(T), f.h(T) / 1e3, f.s(T), f.g(T) / 1e3))
        for i, t in enumerate(T):
            mark = " Tmid" if t == f.tmid else ""
            lines.append(f"  {t:8.2f} {cp[i]:13.4f} {h[i]:12.4f} {s[i]:12.4f} {g[i]:12.4f}{mark}")
        lines.append("")
    return "\n".join(lines) + ("\n" if lines else "")
