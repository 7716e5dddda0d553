"""Build state on disk: hashes, the code fingerprint, cache entries, atomic writes, lock, journal.

Standard library only, so that a no-op rebuild (``statherm build`` with
nothing to do) decides so without importing numpy, yaml or scipy.

Layout of the cache folder ``OUT/.statherm-cache/`` (git-ignored, local to
one machine; deleting it only costs a cold rebuild)::

    lock             flock(2) target: one build (or check) per output folder at a time
    manifest.json    what the last build read and wrote (inputs, settings, code, output stats)
    entries/pack-SHA.json  computed species, many to a file: {"format", "entries": {KEY: entry}},
                     KEY = sha256 of everything an entry depends on, SHA = sha256 of the file;
                     the entries' text fragments follow the JSON line as plain UTF-8 text
    blobs/SHA        binary per-species files (e.g. plots), content-addressed
    journal.json     present only while a build moves its files into place
    tmp/             new file contents before they are moved into place (a first build's
                     workers write the species tables into tmp/stage-PID/ themselves)

Crash safety: new contents are written to ``tmp/`` first; then the journal
(the list of moves and deletions, and the manifest to write) is committed with
one ``os.replace``; then the moves run.  A build killed before the journal
commit leaves the previous output untouched (its temporary files are swept up
later); one killed after it is completed by the next ``build`` or ``check``
(:func:`recover`), so every file is always either the complete old or the
complete new version.
"""

from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import shutil
import sys
import time
from pathlib import Path
from typing import NamedTuple

CACHE_DIR = ".statherm-cache"
FORMAT = 3  # bump when the layout of entries or the manifest changes (2: entries in packs, 3: their texts raw)
#: a pack is rewritten by :meth:`Cache.prune` when more than this share of its entries is dead
PACK_DEAD_SHARE = 0.25
#: more packs than this (e.g. after many one-species rebuilds) are merged into one by :meth:`Cache.prune`
MAX_PACKS = 64


def sha256_bytes(data: bytes) -> str:
    """Hex sha256 of ``data``.

    >>> sha256_bytes(b"")[:12]
    'e3b0c44298fc'
    """
    return hashlib.sha256(data).hexdigest()


def canonical_json(value) -> str:
    """Canonical JSON text of a value: sorted keys, no spaces (what :func:`sha256_json` hashes)."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"))


def sha256_json(value) -> str:
    """Hex sha256 of a JSON-serialisable value (canonical: sorted keys, no spaces)."""
    return sha256_bytes(canonical_json(value).encode())


def species_files(directory: str | Path) -> list[Path]:
    """The species files of a database folder (``*.yaml``/``*.yml``), sorted by name.

    The folder's settings file ``statherm.yaml`` is not a species file.
    """
    d = Path(directory)
    with os.scandir(d) as found:  # one listing; file types from it, without a stat per file
        names = sorted(e.name for e in found if os.path.splitext(e.name)[1] in (".yaml", ".yml")
                       and e.name != "statherm.yaml" and e.is_file())
    return [d / name for name in names]


def display_path(p: Path) -> str:
    """A path as the user would type it: relative to the working folder when inside it."""
    try:
        return p.resolve().relative_to(Path.cwd().resolve()).as_posix()
    except ValueError:
        return p.as_posix()


#: package modules that never take part in a build (command-line front ends of other jobs):
#: editing them keeps the cache valid
NOT_BUILD_CODE = frozenset({"bench.py"})


def code_fingerprint() -> str:
    """sha256 over the pipeline package: every module (but :data:`NOT_BUILD_CODE`), template and schema.

    Any edit to code that could turn inputs into different output changes it,
    so cached results of older code are never reused.
    """
    root = Path(__file__).resolve().parent
    h = hashlib.sha256()
    for path in sorted(root.rglob("*")):
        rel = path.relative_to(root).as_posix()
        if "__pycache__" in path.parts or rel in NOT_BUILD_CODE or not path.is_file() or path.suffix in (".pyc", ".tmp"):
            continue
        h.update(rel.encode() + b"\0" + hashlib.sha256(path.read_bytes()).digest())
    return h.hexdigest()


class Unwritable(Exception):
    """The output folder cannot be created or written (message says which and why)."""


def ensure_folder(out: Path) -> None:
    """Create the output folder (not its parents) and its cache; check they are writable."""
    if out.exists() and not out.is_dir():
        raise Unwritable(f"{out.as_posix()}: is not a folder (give an output folder with --out)")
    if not out.exists():
        if not out.parent.is_dir():
            raise Unwritable(
                f"{out.as_posix()}: cannot be created: its parent folder {out.parent.as_posix()} does not exist"
            )
        try:
            out.mkdir()
        except OSError as exc:
            raise Unwritable(f"{out.as_posix()}: cannot be created ({exc.strerror})") from None
    cache = out / CACHE_DIR
    try:
        for sub in ("", "entries", "blobs", "tmp"):
            (cache / sub).mkdir(exist_ok=True)
        probe = cache / "tmp" / f"probe-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink(missing_ok=True)
    except OSError as exc:
        raise Unwritable(
            f"{out.as_posix()}: cannot write here ({exc.strerror}) — fix its permissions or choose "
            "another folder with --out"
        ) from None


class Lock:
    """Exclusive ``flock`` on ``OUT/.statherm-cache/lock``: serialises builds into one folder.

    Waits (saying so once on stderr) while another process holds it; the
    kernel releases it when that process ends, even by SIGKILL.
    """

    def __init__(self, out: Path, quiet: bool = False):
        self.path = out / CACHE_DIR / "lock"
        self.quiet = quiet
        self.fd: int | None = None

    def __enter__(self) -> "Lock":
        self.fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(self.fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            if exc.errno not in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                raise
            if not self.quiet:
                print(f"statherm: waiting for another build in {self.path.parent.parent.as_posix()} to finish",
                      file=sys.stderr)
            fcntl.flock(self.fd, fcntl.LOCK_EX)
        return self

    def __exit__(self, *exc) -> None:
        if self.fd is not None:
            fcntl.flock(self.fd, fcntl.LOCK_UN)
            os.close(self.fd)
            self.fd = None


def fault(point: str) -> None:
    """Fault injection for the crash tests: SIGKILL this process at ``point``.

    Active only when the environment variable ``STATHERM_FAULT`` equals
    ``point``; a no-op otherwise.
    """
    if os.environ.get("STATHERM_FAULT") == point:
        import signal

        os.kill(os.getpid(), signal.SIGKILL)


def write_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder and ``os.replace``."""
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        with open(tmp, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise


def read_json(path: Path):
    """A JSON file's value, or None if it is missing or unreadable (a damaged cache is ignored)."""
    try:
        with open(path, "rb") as fh:
            return json.loads(fh.read())
    except (OSError, ValueError):
        return None


def dump_json(value) -> bytes:
    """Compact, key-sorted JSON of a cache file.  Non-ASCII text is written as \\u escapes
    (json's ASCII encoder is about twice as fast as its Unicode one)."""
    return json.dumps(value, sort_keys=True, separators=(",", ":")).encode()


class Staged(NamedTuple):
    """An output file already written under the cache's ``tmp/`` (by a build worker): its
    path there, its sha256 and size.  :meth:`Cache.commit` moves it into place instead of
    writing it."""

    name: str  # relative to tmp/
    sha: str
    size: int


class Cache:
    """The cache folder of one output folder (see module docstring)."""

    def __init__(self, out: Path):
        self.out = out
        self.root = out / CACHE_DIR
        self._pack_cache: dict[str, dict] | None = None
        self._reserved = 0  # empty temporaries tmp/PID-0 … made by reserve()
        self._stage: str | None = None  # tmp/stage-PID, made by staging()

    # -- entries ------------------------------------------------------------
    #
    # One file per build chunk ("pack"), not one per species: a cold build of
    # 1,000 species then writes a handful of cache files instead of 1,000.  A
    # pack is named by the sha256 of its bytes and written atomically, so
    # concurrent shards never write the same name with different contents; a
    # damaged or foreign file in entries/ is ignored (and pruned).

    def _packs(self) -> dict[str, dict]:
        """Pack file name → its entries (key → entry), read once per Cache."""
        if self._pack_cache is None:
            packs: dict[str, dict] = {}
            folder = self.root / "entries"
            try:
                names = sorted(os.listdir(folder))
            except OSError:
                names = []
            for name in names:
                entries = self._read_pack(name)
                if entries is not None:
                    packs[name] = entries
            self._pack_cache = packs
        return self._pack_cache

    def _read_pack(self, name: str) -> dict | None:
        """A pack's entries, or None if ``name`` is not a readable pack of this format
        (see :meth:`_write_pack`)."""
        if not name.startswith("pack-"):
            return None
        try:
            with open(self.root / "entries" / name, "rb") as fh:
                raw = fh.read()
            end = raw.index(b"\n")
            data = json.loads(raw[:end])
            if not (isinstance(data, dict) and data.get("format") == FORMAT and isinstance(data.get("entries"), dict)
                    and data.get("text_bytes") == len(raw) - end - 1):  # a torn pack is no pack
                return None
            text = memoryview(raw)[end + 1:]
            for entry in data["entries"].values():  # each text decoded from its own bytes: one copy
                entry["fragments"] = {k: str(text[a:b], "utf-8") for k, (a, b) in entry["fragments"].items()}
        except (OSError, ValueError, TypeError, KeyError, AttributeError):  # damaged or foreign: ignored
            return None
        return data["entries"]

    def load_entry(self, key: str) -> dict | None:
        for entries in self._packs().values():
            entry = entries.get(key)
            if isinstance(entry, dict) and entry.get("key") == key:
                break
        else:
            return None
        blobs = entry.get("files", {})
        if any(not (self.root / "blobs" / sha).is_file() for sha in blobs.values()):
            return None
        return dict(entry)

    def species_hashes(self) -> set[str]:
        """sha256 of every species file some entry was computed from."""
        return {e.get("sha256") for entries in self._packs().values() for e in entries.values()
                if isinstance(e, dict)}

    def store_entries(self, items: list[tuple[dict, dict[str, bytes]]]) -> str | None:
        """Store species' entries as one pack; each item is (entry, binary files).  Returns
        the pack's file name (None when there was nothing to store).

        Binary files (output path → bytes, e.g. plots) go to ``blobs/`` under
        their sha256; the entry keeps the references.
        """
        entries = {}
        for entry, files in items:
            entry = dict(entry)
            entry.pop("_extra", None)
            refs = dict(entry.get("files") or {})
            for rel, data in (files or {}).items():
                sha = sha256_bytes(data)
                blob = self.root / "blobs" / sha
                if not blob.exists():
                    write_atomic(blob, data)
                refs[rel] = sha
            entry["files"] = refs
            entries[entry["key"]] = entry
        if not entries:
            return None
        return self._write_pack(entries)

    def _write_pack(self, entries: dict[str, dict]) -> str:
        """Write entries as one pack; returns its name.  The pack is one line of JSON in which
        each entry's ``fragments`` (its texts: record, table, thermo.yaml entry, …) are
        [start, end) byte offsets into the UTF-8 text after that line: the texts, mostly CSV
        tables, are then neither escaped when written nor unescaped when read (measured on the
        packs of 500 benchmark species each: one written, 28 → 11 ms; two read, 26 → 10 ms)."""
        texts: list[bytes] = []
        at = 0
        index = {}
        for key, entry in entries.items():
            offsets = {}
            for k, text in entry["fragments"].items():
                data = text.encode("utf-8")
                offsets[k] = [at, at + len(data)]
                texts.append(data)
                at += len(data)
            index[key] = {**entry, "fragments": offsets}
        tail = b"".join(texts)
        data = dump_json({"format": FORMAT, "entries": index, "text_bytes": len(tail)}) + b"\n" + tail
        name = f"pack-{sha256_bytes(data)[:32]}.json"
        write_atomic(self.root / "entries" / name, data)
        if self._pack_cache is not None:
            self._pack_cache[name] = entries
        return name

    def blob(self, sha: str) -> bytes:
        return (self.root / "blobs" / sha).read_bytes()

    def prune(self, keep_entries: set[str], keep_blobs: set[str], fresh: set[str] = frozenset()) -> None:
        """Forget entries and blobs no current species refers to.

        A pack with no live entry is deleted; packs with more than
        :data:`PACK_DEAD_SHARE` dead entries (all packs, when there are more
        than :data:`MAX_PACKS`) are merged into one new pack of their live
        entries, written before the old ones are deleted, so a kill in between
        only leaves duplicates.  ``fresh`` names packs just written with live
        entries only (this build's): they are not read again.
        """
        known = self._packs()  # as read at the start of the build: the packs of earlier builds
        folder = self.root / "entries"
        try:
            present = os.listdir(folder)
        except OSError:
            present = []
        packs, drop = {}, []
        for name in present:
            if name in fresh:
                continue
            entries = known.get(name)
            if entries is None:  # written since (e.g. by a shard), or not a pack
                entries = self._read_pack(name)
                if entries is None:
                    drop.append(name)  # damaged, foreign or old-format files
                    continue
            packs[name] = entries
        merge: dict[str, dict] = {}
        crowded = len(packs) + len(fresh) > MAX_PACKS
        for name, entries in packs.items():
            live = {k: e for k, e in entries.items() if k in keep_entries}
            if not live:
                drop.append(name)
            elif crowded or len(live) < (1.0 - PACK_DEAD_SHARE) * len(entries):
                merge.update(live)
                drop.append(name)
        if merge:
            kept = self._write_pack(merge)
            drop = [name for name in drop if name != kept]
        for name in drop:
            try:
                os.unlink(folder / name)
            except OSError:
                pass
        try:
            names = os.listdir(self.root / "blobs")
        except OSError:
            names = []
        for name in names:
            if name not in keep_blobs:
                try:
                    os.unlink(self.root / "blobs" / name)
                except OSError:
                    pass
        self._pack_cache = None

    # -- manifest -----------------------------------------------------------

    @property
    def manifest_path(self) -> Path:
        return self.root / "manifest.json"

    def load_manifest(self) -> dict | None:
        m = read_json(self.manifest_path)
        return m if isinstance(m, dict) and m.get("format") == FORMAT else None

    def store_manifest(self, manifest: dict) -> None:
        write_atomic(self.manifest_path, dump_json(manifest))

    # -- committing output --------------------------------------------------

    @property
    def journal_path(self) -> Path:
        return self.root / "journal.json"

    def _temporary(self, i: int) -> str:
        """Path of this process's ``i``-th temporary (the names :meth:`commit` writes to)."""
        return os.path.join(self.root, "tmp", f"{os.getpid()}-{i}")

    def reserve(self, count: int) -> None:
        """Make ``count`` empty temporaries for the next :meth:`commit` (as many as it will
        probably write): a build does this while its workers compute, so that creating the
        files (allocating their inodes, the costly part on a busy ext4) is not left to the
        end.  Unused ones are removed by :meth:`commit` or :meth:`drop_reserved`."""
        for i in range(self._reserved, count):
            with open(self._temporary(i), "wb"):
                pass
            self._reserved = i + 1

    def staging(self) -> str:
        """An empty folder under ``tmp/`` for this build's workers to write output files
        into (see :class:`Staged`); removed by :meth:`drop_staging`."""
        path = os.path.join(self.root, "tmp", f"stage-{os.getpid()}")
        shutil.rmtree(path, ignore_errors=True)
        os.makedirs(path)
        self._stage = path
        return path

    def drop_staging(self) -> None:
        """Remove the folder of :meth:`staging` and what was not moved out of it."""
        if self._stage is not None:
            shutil.rmtree(self._stage, ignore_errors=True)
            self._stage = None

    def drop_reserved(self, keep: int = 0) -> None:
        """Remove the reserved temporaries past the first ``keep`` (which the caller has
        taken over) and forget them all."""
        for i in range(keep, self._reserved):
            try:
                os.unlink(self._temporary(i))
            except FileNotFoundError:
                pass
        self._reserved = 0

    def commit(self, writes: dict[str, bytes | Staged], deletes: list[str], manifest: dict) -> None:
        """Replace/delete output files as one recoverable step (see module docstring).

        ``writes``: output-relative path → new bytes, or the :class:`Staged` file
        that holds them (only files whose bytes change); ``deletes``:
        output-relative paths to remove; ``manifest``: the manifest to store once
        the files are in place.  Output stats for the written files are filled
        into ``manifest["outputs"]`` here.
        """
        moves = []
        written = 0
        for k, (rel, data) in enumerate(sorted(writes.items())):
            if isinstance(data, Staged):
                moves.append([data.name, rel])
            else:
                path = self._temporary(written)  # a reserved temporary is opened, truncated and written
                with open(path, "wb") as fh:
                    fh.write(data)
                moves.append([os.path.basename(path), rel])
                written += 1
            if k == len(writes) // 2:
                fault("writing-temporaries")
        self.drop_reserved(keep=written)  # the written ones are moved into place below
        moves = self._whole_folders(moves)
        journal = {"format": FORMAT, "moves": moves, "deletes": sorted(deletes), "manifest": manifest}
        fault("before-journal")
        write_atomic(self.journal_path, dump_json(journal))
        fault("after-journal")
        self._apply(journal)

    def _whole_folders(self, moves: list[list[str]]) -> list[list[str]]:
        """``moves`` with the moves out of a staged folder made one move of the folder, where
        that folder holds just those files under their own names and their destination
        folder does not exist yet (a first build: ``tables/`` arrives in one rename instead
        of one per species)."""
        groups: dict[tuple[str, str], list[int]] = {}
        for i, (tmp, rel) in enumerate(moves):
            src, _, leaf = tmp.rpartition("/")
            dest, _, name = rel.rpartition("/")
            if src and dest and leaf == name:
                groups.setdefault((src, dest), []).append(i)
        if not groups:
            return moves
        drop, folded = set(), []
        for (src, dest), members in groups.items():
            try:
                held = os.listdir(os.path.join(self.root, "tmp", src))
            except OSError:
                continue
            if len(held) == len(members) and not os.path.lexists(os.path.join(self.out, dest)):
                drop.update(members)
                folded.append([src, dest])
        return [m for i, m in enumerate(moves) if i not in drop] + folded

    def _apply(self, journal: dict) -> None:
        tmpdir, out = os.path.join(self.root, "tmp"), os.fspath(self.out)
        half = len(journal["moves"]) // 2
        made: set[str] = set()
        for i, (tmp, rel) in enumerate(journal["moves"]):
            parent = rel.rpartition("/")[0]
            if parent not in made:
                os.makedirs(os.path.join(out, parent), exist_ok=True)
                made.add(parent)
            try:
                os.replace(os.path.join(tmpdir, tmp), os.path.join(out, rel))
            except FileNotFoundError:
                pass  # moved already (a recovery replaying the journal)
            if i == half:
                fault("moving")
        for rel in journal["deletes"]:
            try:
                os.unlink(self.out / rel)
            except FileNotFoundError:
                pass
            parent = (self.out / rel).parent
            while parent != self.out:
                try:
                    parent.rmdir()  # only if empty
                except OSError:
                    break
                parent = parent.parent
        manifest = journal["manifest"]
        outputs = manifest.setdefault("outputs", {})
        for rel in list(outputs):
            st = _stat(os.path.join(out, rel))
            if st is None:
                del outputs[rel]
            else:
                outputs[rel][:2] = st
        self.store_manifest(manifest)
        fault("before-journal-removal")
        os.unlink(self.journal_path)

    def recover(self) -> bool:
        """Finish a build that was killed after committing its journal; sweep temporaries.

        Returns True if an interrupted build was completed.  Call with the lock held.
        """
        journal = read_json(self.journal_path)
        done = False
        if isinstance(journal, dict) and journal.get("format") == FORMAT:
            self._apply(journal)
            done = True
        elif self.journal_path.exists():
            self.journal_path.unlink()  # torn write cannot happen (os.replace), but be safe
        try:
            names = os.listdir(self.root / "tmp")
        except OSError:
            names = []
        for name in names:
            path = self.root / "tmp" / name
            if path.is_dir() and not path.is_symlink():  # a build's staging folder
                shutil.rmtree(path, ignore_errors=True)
                continue
            try:
                os.unlink(path)
            except OSError:
                pass
        return done


def _stat(path: Path) -> list[int] | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return [st.st_size, st.st_mtime_ns]


def file_state(path: Path) -> list[int] | None:
    """[size, mtime_ns] of a file, or None if it does not exist (what the manifest records)."""
    return _stat(path)


class Progress:
    """A one-line progress bar on stderr, shown only on a terminal once a build runs > ``delay`` s.

    ``force=True`` shows it in logs too (plain lines instead of a redrawn bar).
    """

    def __init__(self, total: int, label: str, *, enabled: bool, force: bool = False, delay: float = 1.0,
                 start: float | None = None):
        self.total = max(total, 1)
        self.label = label
        self.tty = sys.stderr.isatty()
        self.enabled = enabled and (self.tty or force)
        self.start = time.monotonic() if start is None else start  # the delay counts from here
        self.delay = 0.0 if force else delay
        self.shown = False
        self.last = -1

    def update(self, done: int) -> None:
        if not self.enabled or time.monotonic() - self.start < self.delay:
            return
        self.shown = True
        if self.tty:
            width = 30
            fill = int(width * done / self.total)
            sys.stderr.write(f"\r{self.label} [{'#' * fill}{' ' * (width - fill)}] {done}/{self.total}")
            sys.stderr.flush()
        else:
            pct = int(100 * done / self.total) // 10 * 10
            if pct != self.last:
                self.last = pct
                print(f"{self.label}: {done}/{self.total}", file=sys.stderr)

    def close(self) -> None:
        if self.shown and self.tty:
            sys.stderr.write("\r" + " " * (len(self.label) + 50) + "\r")
            sys.stderr.flush()
