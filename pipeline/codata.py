"""The CODATA constants statherm computes with, exactly as :mod:`scipy.constants` gives them.

``from pipeline.codata import C`` replaces ``from scipy import constants as C``:
the same names (:data:`NAMES`, and ``C.physical_constants`` for the entries in
:data:`PHYSICAL`), the same floats, bit for bit.  Nothing is typed in here;
every value is read from :mod:`scipy.constants`.

Why not import :mod:`scipy.constants` directly: importing it costs about 0.1 s
(its array-API layer pulls in ``numpy.f2py`` and ``numpy.testing``), more than
numpy itself and a seventh of a 1,000-species cold build, paid before any work
can start, for a dozen numbers.  So the numbers are memoised, as Python
memoises bytecode: the first process that needs them imports
:mod:`scipy.constants` and writes them to ``__pycache__/codata-<key>.json``
beside this module (JSON keeps a float's shortest repr, which reads back to the
same float); later processes read that file (4.5 ms with the json import).  The key is a
sha256 over the paths, sizes and modification times of the scipy source files
that define the values, found without importing scipy, so an upgrade or a
reinstall of scipy gives a new key and the old memo is not used.

The memo is not written when Python is told not to write bytecode
(``PYTHONDONTWRITEBYTECODE``, ``-B``): then every process imports
:mod:`scipy.constants`.  A memo that is missing, unreadable, of another key or
not of the expected shape is ignored; one that cannot be written (a read-only
installation) only costs the import.  A name outside :data:`NAMES` is looked up
in :mod:`scipy.constants` itself.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys

#: the constants of scipy.constants the package uses, by their scipy names
NAMES = ("N_A", "R", "atm", "atomic_mass", "bar", "c", "calorie", "e", "h", "hbar", "k", "m_e")
#: the entries of scipy.constants.physical_constants the package uses
PHYSICAL = ("Bohr radius",)
#: memo layout version (part of the key)
MEMO_FORMAT = 1
#: the scipy sources the values come from (relative to the scipy package folder)
_SOURCES = ("constants/_codata.py", "constants/_constants.py", "version.py")


class Constants:
    """A namespace of constants: ``C.R``, ``C.physical_constants["Bohr radius"]``; names not
    in it are read from :mod:`scipy.constants` (imported then).

    >>> Constants({"R": 8.0}, {}).R
    8.0
    """

    def __init__(self, values: dict[str, float], physical: dict[str, tuple]):
        self.__dict__.update(values)
        self.physical_constants = physical

    def __getattr__(self, name: str):  # only for names not memoised
        if name.startswith("__"):
            raise AttributeError(name)
        from scipy import constants

        return getattr(constants, name)


def _memo_key() -> str | None:
    """sha256 of :data:`MEMO_FORMAT`, the names and the path, size and mtime of each of
    scipy's :data:`_SOURCES`; None when scipy's folder or a source cannot be found."""
    import importlib.machinery

    spec = importlib.machinery.PathFinder.find_spec("scipy")  # locates, does not import
    if spec is None or not spec.submodule_search_locations:
        return None
    root = list(spec.submodule_search_locations)[0]
    h = hashlib.sha256(repr((MEMO_FORMAT, NAMES, PHYSICAL)).encode())
    for rel in _SOURCES:
        path = os.path.join(root, rel)
        try:
            st = os.stat(path)
        except OSError:
            return None
        h.update(f"{path}\0{st.st_size}\0{st.st_mtime_ns}\0".encode())
    return h.hexdigest()


def memo_path(folder: str | None = None) -> str | None:
    """Where the memo of the installed scipy lives (in ``folder``, by default this
    module's ``__pycache__``); None when its key cannot be made."""
    key = _memo_key()
    if key is None:
        return None
    folder = folder or os.path.join(os.path.dirname(os.path.abspath(__file__)), "__pycache__")
    return os.path.join(folder, f"codata-{key[:32]}.json")


def from_scipy() -> tuple[dict[str, float], dict[str, tuple]]:
    """The values of :data:`NAMES` and the entries of :data:`PHYSICAL`, imported from scipy.constants."""
    from scipy import constants

    return ({n: float(getattr(constants, n)) for n in NAMES},
            {n: tuple(constants.physical_constants[n]) for n in PHYSICAL})


def _read(path: str):
    """The memo at ``path`` as (values, physical), or None when it is absent or not a memo."""
    try:
        with open(path, "rb") as fh:
            doc = json.loads(fh.read())
        values = {n: doc["values"][n] for n in NAMES}
        physical = {n: tuple(doc["physical"][n]) for n in PHYSICAL}
    except (OSError, ValueError, KeyError, TypeError):
        return None
    if not all(type(v) is float for v in values.values()):
        return None
    if not all(len(p) == 3 and type(p[0]) is float and type(p[1]) is str and type(p[2]) is float
               for p in physical.values()):
        return None
    return values, physical


def write_memo(path: str, values: dict[str, float], physical: dict[str, tuple]) -> bool:
    """Write the memo atomically (:func:`pipeline.cache.write_atomic`); False when it cannot be."""
    from pathlib import Path

    from pipeline.cache import write_atomic

    data = json.dumps({"values": values, "physical": {n: list(p) for n, p in physical.items()}},
                      sort_keys=True, indent=1).encode()
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        write_atomic(Path(path), data)
        return True
    except OSError:
        return False


def load(folder: str | None = None) -> Constants:
    """The constants: from the memo when there is one for the installed scipy, else
    from :mod:`scipy.constants` (writing the memo unless bytecode writing is off)."""
    path = memo_path(folder)
    got = _read(path) if path else None
    if got is None:
        got = from_scipy()
        if path and not sys.dont_write_bytecode:
            write_memo(path, *got)
    return Constants(*got)


#: the constants (see the module docstring)
C = load()
