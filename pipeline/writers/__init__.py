"""Writers: a species' rendered fragments, and the database assembled from them.

Two calls, made by :mod:`pipeline.build`:

``batch_fragments([(species, table, fit, settings), ...]) -> list``
    For each species, everything it contributes to ``output/``, rendered
    (the expensive, cacheable part), or the ValueError that keeps it from
    being written; the array work is done for many species at once.
    ``species_fragments(species, table, fit, settings)`` is the same for one
    species (it raises the ValueError).  The fragments are a dict, keys:

    ``name``
        the record name (the database is ordered by it);
    ``record``
        its four 80-column lines of ``thermo.dat``;
    ``yaml``
        its entry in the ``species:`` list of ``thermo.yaml``;
    ``report_row``
        its row of the species table of ``REPORT.md``;
    ``report_note``
        its line in REPORT.md's list of species with a large u(G°), or "";
    ``table_csv``
        the full text of ``tables/NAME.csv``.

``assemble(fragments, settings) -> dict[str, bytes]``
    Output-relative path → exact bytes for the whole database
    (``thermo.dat``, ``thermo.yaml``, ``REPORT.md``, ``tables/NAME.csv``),
    species in name order: string joins and a header, nothing recomputed,
    no timestamps, no absolute paths.

The coefficients printed are those of :func:`pipeline.writers.rounding.printed_fit`
(rounded, then re-balanced so that the printed numbers keep the fit's
constraints).  :mod:`pipeline.writers.formats` only formats: a function per
species fragment, and the filters of the three document templates in
``pipeline/templates``.  The formats are described in ``docs/format.md``.
"""

from __future__ import annotations

import dataclasses
import functools
import os
from pathlib import PurePath

import numpy as np

from pipeline import __version__
from pipeline.codata import C
from pipeline.thermo import T_REF
from pipeline.writers import formats
from pipeline.writers.rounding import printed_fit

__all__ = ["species_fragments", "batch_fragments", "assemble", "printed_fit", "record_text", "record_elements",
           "FORMAT_VERSION", "table_path"]

#: version of the thermo.yaml format (docs/format.md); bump on incompatible change
FORMAT_VERSION = 1

#: temperatures [K] of the ± band written into thermo.yaml (those inside the species' range);
#: the tables carry it at every table temperature
U_BAND_T = (200.0, 298.15, 500.0, 1000.0, 1500.0, 2000.0, 3000.0, 4000.0, 5000.0, 6000.0)

#: fragment keys (see module docstring)
KEYS = ("name", "record", "yaml", "report_row", "report_note", "table_csv")

_PRESSURE_LABEL = {"bar": "1 bar", "atm": "1 atm"}
_UNITS = {
    "temperature": "K", "coefficients": "Cp/R, H/RT, S/R (dimensionless)", "molar_mass": "kg/mol",
    "enthalpy": "J/mol", "entropy": "J/mol/K", "heat_capacity": "J/mol/K", "pressure": "Pa",
}


def table_path(name: str) -> str:
    """Output-relative path of a species' property table.

    >>> table_path("CH3")
    'tables/CH3.csv'
    """
    return f"tables/{name}.csv"


def record_elements(formula, charge: int = 0) -> list[tuple[str, int]]:
    """The element fields of a record: the formula in its own order, and for an
    ion the electron as element ``E`` with count −charge (common practice).

    >>> record_elements((("O", 1), ("H", 1)), charge=1)
    [('O', 1), ('H', 1), ('E', -1)]
    """
    out = [(el, int(n)) for el, n in formula]
    if charge:
        out.append(("E", -int(charge)))
    return out


def identifier(sha256: str) -> str:
    """Columns 19–24: the first six hex digits of the species file's sha256, upper case.

    Stable for unchanged input (unlike a date), and different when the file changes.

    >>> identifier("9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08")
    '9F86D0'
    """
    return sha256[:6].upper()


# --------------------------------------------------------------------------
# One species, and many at once
# --------------------------------------------------------------------------

#: species whose arrays are worked on together: enough to share the cost of each array
#: operation, few enough that the temporaries (~100 kB each) stay in the processor's caches
#: (measured on the benchmark species: 16 is ~15 % faster than 64, and than 8)
CHUNK = 16


def species_fragments(species, table, fit, settings) -> dict[str, str]:
    """Render everything ``species`` contributes to the database (keys: module docstring).

    The one-species case of :func:`batch_fragments` (the same bytes); raises
    ValueError if the species cannot be written (e.g. a record that does not
    fit its columns).

    Parameters
    ----------
    species : Species
    table : ThermoTable
        The species' table on the fit grid (fit errors in REPORT.md are taken over it).
    fit : Nasa7Fit
        The fitted polynomials (full precision; printed via :func:`printed_fit`).
    settings : Settings
        The build settings (the species file's ``fit:`` overrides are applied here).
    """
    (fragments,) = batch_fragments([(species, table, fit, settings)])
    if isinstance(fragments, ValueError):
        raise fragments
    return fragments


def batch_fragments(items) -> list:
    """:func:`species_fragments` of each ``(species, table, fit, settings)`` of ``items``, in order.

    The fragments are byte for byte those of one call per species; the array
    work (the printed polynomials over every fit grid, the property tables
    and their formatting, the errors) is done for :data:`CHUNK` species at a
    time instead of species by species.  A species that cannot be written
    gets its ValueError in place of its fragments; the others are still made.
    """
    out: list = []
    steps: dict = {}  # the rows of the table step by fit grid (the species of a batch mostly share one)
    _LOGS.clear()  # ln T by fit grid, for this batch only (like ``steps``)
    for start in range(0, len(items), CHUNK):
        chunk = items[start:start + CHUNK]
        results: list = [None] * len(chunk)
        ready = []
        for k, (species, table, fit, settings) in enumerate(chunk):
            try:
                ready.append((k, _Species(species, table, fit, settings, steps)))
            except ValueError as exc:
                results[k] = exc
        if ready:
            _evaluate([sp for _, sp in ready])
        for k, sp in ready:
            try:
                results[k] = sp.fragments()
            except ValueError as exc:
                results[k] = exc
        out += results
    return out


class _Species:
    """One species on its way to its fragments: what is made species by species
    (printed fit, record, settings, the rows of its table at the table step), then,
    after :func:`_evaluate` has set ``table_csv``, ``errors`` and ``continuity``,
    :meth:`fragments`."""

    def __init__(self, species, table, fit, settings, steps: dict):
        s = self.settings = _for_species(settings, species)
        self.pressure = s.pressure_pa
        formula, charge = tuple(species.formula), int(species.charge)
        if (fit.name, fit.formula, fit.charge) != (species.name, formula, charge):
            fit = dataclasses.replace(fit, name=species.name, formula=formula, charge=charge)
        self.species, self.table, self.fit = species, table, fit
        self.printed = printed_fit(fit)
        self.quality = _quality(fit.quality)
        self.record = _record(self.printed, identifier(species.sha256) if species.sha256 else "")
        self.grid = grid = _table_grid(s.tmin, s.tmax, s.table_step)
        # the table step is rows of the fit-grid table when it holds every grid temperature
        # (the usual case: 10 K grid, 100 K table step), else the species is computed on it;
        # ``steps`` remembers the rows by fit grid (by identity: it holds the arrays it was made from)
        key = (id(table.T), id(grid), table.pressure == self.pressure)
        known = steps.get(key)
        if known is not None and known[0] is table.T and known[1] is grid:
            rows = known[2]
        else:
            T = np.asarray(table.T, dtype=float)
            idx = np.searchsorted(T, grid)
            ok = key[2] and idx.max(initial=-1) < len(T) and np.array_equal(T[idx], grid)
            rows = idx if ok else None
            steps[key] = (table.T, grid, rows)
        if rows is not None:
            self.rows, self.at_step = rows, None
        else:
            from pipeline.thermo import thermo_table

            self.rows, self.at_step = None, thermo_table(species, grid, self.pressure)
        self.u = _uncertainty(species, grid, self.pressure)
        self.extra = {}
        if self.u is not None:
            from pipeline.uncertainty import table_columns

            self.extra = table_columns(self.u, grid)
        self.table_csv = self.errors = self.continuity = None

    def fragments(self) -> dict[str, str]:
        species, table, fit, printed, s = self.species, self.table, self.fit, self.printed, self.settings
        quality, warnings, tmid_auto = self.quality
        uncertainty = report_u = None
        if self.u is not None:
            from pipeline.uncertainty import report_values, structured

            uncertainty = structured(self.u, [t for t in U_BAND_T if s.tmin <= t <= s.tmax])
            report_u = report_values(self.u)
        entry = formats.species_entry(
            name=species.name, composition={el: n for el, n in species.formula},
            charge=int(species.charge), phase=fit.phase, molar_mass=float(species.molar_mass), tmid=float(fit.tmid),
            ranges=[
                {"tmin": float(fit.tlow), "tmax": float(fit.tmid), "coefficients": [float(a) for a in fit.low]},
                {"tmin": float(fit.tmid), "tmax": float(fit.thigh), "coefficients": [float(a) for a in fit.high]},
            ],
            reference_state={
                "dhf298": float(table.dhf298), "s298": float(table.s298), "cp298": float(table.cp298),
                "h298_minus_h0": float(table.h298_minus_h0),
            },
            quality=quality, uncertainty=uncertainty, sources=list(species.sources),
            species_file=_file_name(species.path) if species.path else "", sha256=species.sha256,
            version=__version__, model=_model_key(s), pressure_pa=float(self.pressure),
        )
        note = ""
        if report_u is not None:
            from pipeline.uncertainty import exceeds

            if exceeds(report_u, s.g_uncertainty_warning):
                warnings.append(f"u(G°, 1000 K) = {report_u['g1000']:.2f} kJ/mol")
                dominant = f" (largest contribution: `{report_u['dominant']}`)" if report_u["dominant"] else ""
                note = f"- `{species.name}`: {report_u['g1000']:.2f} kJ/mol{dominant}\n"
        plot = ""
        if s.plots:
            from pipeline.plots import PLOTS_DIR, available, plot_file_name

            if available():  # without matplotlib the build writes no plots: link none
                plot = f"[plot](<{PLOTS_DIR}/{plot_file_name(species.name)}>)"
        cp_error, h_error, s_error = self.errors
        row = formats.report_row(
            name=species.name,
            formula=" ".join(f"{el}{n}" for el, n in record_elements(species.formula, species.charge)),
            dhf298=table.dhf298 / 1e3, s298=table.s298, cp298=table.cp298, tmid=printed.tmid,
            tmid_auto=tmid_auto, cp_error=cp_error, h_error=h_error, s_error=s_error,
            continuity=self.continuity, u_g298=report_u["g298"] if report_u else None,
            u_g1000=report_u["g1000"] if report_u else None,
            plot=plot, warnings="; ".join(w.replace("|", "/") for w in warnings),
        )
        return {"name": species.name, "record": self.record, "yaml": entry, "report_row": row,
                "report_note": note, "table_csv": self.table_csv}


def _quality(q) -> tuple[str, list, bool]:
    """The fit metrics ``q`` as the writers use them: the lines of the ``fit_quality``
    block of thermo.yaml (indented by four; "" for none), the warnings, and whether Tmid
    was searched — what ``formats.yaml_block(q.as_dict(), 4)``, ``as_dict()["warnings"]``
    and ``["tmid_auto"]`` give (``as_dict`` is the definition; test_writers checks that
    the two agree).  For a FitQuality the text is one format of its fields, the floats
    converted together (:func:`formats.float_texts`), instead of the dict and a node
    per value."""
    if not hasattr(q, "as_dict"):
        return "", [], False
    from pipeline.fit import FitQuality, PropertyError

    if type(q) is FitQuality:
        values = _getter(FitQuality)(q)
        kinds = tuple(map(type, values))
        plan = _QUALITY_PLANS.get(kinds) or _quality_plan(kinds)
        if plan[0] is not None:
            fmt, order, floats_at, errors_at, others_at = plan
            floats = [values[i] for i in floats_at]
            fields = _getter(PropertyError)
            for i in errors_at:
                floats += fields(values[i])
            floats.append(float(q.limit_ratio))
            if set(map(type, floats)) == _FLOAT:
                texts = formats.float_texts(floats) + [formats.yaml_value(values[i]) for i in others_at]
                return fmt % order(texts), list(q.warnings), bool(q.tmid_auto)
    d = q.as_dict()
    return (formats.yaml_block(d, 4) if d else ""), list(d.get("warnings", [])), bool(d.get("tmid_auto", False))


_FLOAT = {float}


def _quality_plan(kinds: tuple) -> tuple:
    """For FitQuality field values of the types ``kinds``: the ``%`` format of the block,
    the getter that puts the texts (the floats first, then the nodes) in its order, the
    float fields, the PropertyError fields and the fields written as nodes; the format
    None if a field is of a kind not covered."""
    from pipeline.fit import FitQuality, PropertyError

    floats_at, errors_at, others_at = [], [], []
    for i, kind in enumerate(kinds):
        if kind is float:
            floats_at.append(i)
        elif kind is PropertyError:
            errors_at.append(i)
        elif kind in (bool, int, str, tuple, type(None)):
            others_at.append(i)
        else:
            break
    else:
        import operator

        def key(name):
            return formats.yaml_key(name).replace("%", "%%")

        enames = [key(e.name) for e in dataclasses.fields(PropertyError)]
        n_float = len(floats_at) + len(errors_at) * len(enames) + 1
        slots = {i: [k] for k, i in enumerate(floats_at)}  # field → its texts (floats first, then nodes)
        slots.update((i, list(range(len(floats_at) + k * len(enames), len(floats_at) + (k + 1) * len(enames))))
                     for k, i in enumerate(errors_at))
        slots.update((i, [n_float + k]) for k, i in enumerate(others_at))
        lines, order = [], []
        for i, f in enumerate(dataclasses.fields(FitQuality)):
            value = "%s" if kinds[i] is not PropertyError else "{" + ", ".join(f"{e}: %s" for e in enames) + "}"
            lines.append(f"    {key(f.name)}: {value}")
            order += slots[i]
        lines.append("    limit_ratio: %s")
        order.append(n_float - 1)
        plan = ("\n".join(lines), operator.itemgetter(*order), tuple(floats_at), tuple(errors_at), tuple(others_at))
        if len(_QUALITY_PLANS) < 64:
            _QUALITY_PLANS[kinds] = plan
        return plan
    return (None,)


_QUALITY_PLANS: dict = {}
_GETTERS: dict = {}


def _getter(cls):
    """``operator.attrgetter`` of the fields of dataclass ``cls``, in order (made once per class)."""
    get = _GETTERS.get(cls)
    if get is None:
        import operator

        get = _GETTERS[cls] = operator.attrgetter(*(f.name for f in dataclasses.fields(cls)))
    return get


#: the columns of tables/NAME.csv before any uncertainty columns: table, printed fit, fit − table
_TABLE_COLUMNS = (
    "T [K]", "Cp [J/mol/K]", "S [J/mol/K]", "H-H298 [kJ/mol]", "-(G-H298)/T [J/mol/K]",
    "Cp fit [J/mol/K]", "S fit [J/mol/K]", "H-H298 fit [kJ/mol]", "-(G-H298)/T fit [J/mol/K]",
    "Cp residual [J/mol/K]", "S residual [J/mol/K]", "H-H298 residual [kJ/mol]", "-(G-H298)/T residual [J/mol/K]",
)
_NO_VALUES = np.zeros(3)


@functools.lru_cache(maxsize=8)
def _table_formats(columns: int) -> tuple:
    """Cell formats of a table of ``columns`` columns: T with two decimals, the rest with six."""
    return (".2f",) + (".6f",) * (columns - 1)


def _evaluate(group: list) -> None:
    """The printed polynomials of every species of ``group`` over its fit grid, its
    table temperatures, 298.15 K and both sides of Tmid, in one pass; from them each
    species' ``table_csv``, ``errors`` (max |ΔCp|/Cp, |ΔH|, |ΔS| over the fit grid
    within its range, None for an empty one) and ``continuity`` (the largest
    relative jump of Cp/R, H/RT, S/R at Tmid).

    The values are those of :class:`pipeline.nasa7.Nasa7Fit`'s ``cp``, ``h``, ``s``
    and ``max(continuity().values())``, bit for bit: the same functions of
    :mod:`pipeline.nasa7`, elementwise, each point with the coefficients of its
    own range (Tmid belongs to the low range).

    The points of a species are its fit grid, then (only if its table step is not
    rows of it) its table temperatures, then 298.15 K, Tmid, Tmid; the table data
    are laid out alike, so one index serves both.
    """
    from pipeline.nasa7 import cp_r, h_rt

    n = len(group)
    tmids = np.array([sp.printed.tmid for sp in group])
    tail = np.empty((n, 3))
    tail[:, 0], tail[:, 1], tail[:, 2] = T_REF, tmids, tmids
    pieces = {f: [] for f in ("T", "cp", "s", "h_minus_h298", "g_fn", "h")}
    logs = []  # ln T of the points, from each fit grid's once (np.log of the same numbers: the same bits)
    sizes, grid_sizes, steps = [], [], []
    at = 0
    for i, sp in enumerate(group):
        nf = len(sp.table.T)
        extra = 0 if sp.at_step is None else len(sp.grid)
        for f, parts in pieces.items():
            parts.append(getattr(sp.table, f))
            if extra:
                parts.append(getattr(sp.at_step, f))
            parts.append(tail[i] if f == "T" else _NO_VALUES)
        logs.append(_log_of(sp.table.T))
        if extra:
            logs.append(np.log(np.asarray(sp.at_step.T, dtype=float)))
        logs.append(np.log(tail[i]))
        sizes.append(nf + extra + 3)
        grid_sizes += (nf, extra + 3)
        steps.append(sp.rows + at if extra == 0 else np.arange(at + nf, at + nf + extra))
        at += sizes[-1]
    T = np.concatenate(pieces["T"])
    ends = np.cumsum(sizes)
    # coefficients point by point: 2i + 1 (high range) above Tmid, 2i (low range) else
    high = T > np.repeat(tmids, sizes)
    high[ends - 2] = False  # Tmid in the low range, then in the high range
    high[ends - 1] = True
    ranges = np.empty((7, 2 * n))
    ranges[:, 0::2] = np.array([sp.printed.low for sp in group], dtype=float).T
    ranges[:, 1::2] = np.array([sp.printed.high for sp in group], dtype=float).T
    a = ranges.take(np.repeat(2 * np.arange(n), sizes) + high, axis=1)
    cp_n, h_n = cp_r(a, T), h_rt(a, T)
    # s_r(a, T) of pipeline.nasa7, term for term, with ln T looked up
    s_n = a[0] * np.concatenate(logs) + T * (a[1] + T * (a[2] / 2 + T * (a[3] / 3 + T * a[4] / 4))) + a[6]
    jumps = [np.abs(x[ends - 1] - x[ends - 2]) / np.maximum(np.abs(x[ends - 2]), 1.0) for x in (cp_n, h_n, s_n)]
    continuity = np.maximum(np.maximum(jumps[0], jumps[1]), jumps[2])  # Nasa7Fit.continuity()
    cp, h, s = C.R * cp_n, C.R * T * h_n, C.R * s_n
    h298 = h[ends - 3]

    # the property tables: rows of X are the columns (table, printed fit, fit − table)
    counts = [len(sp.grid) for sp in group]
    rows = np.concatenate(steps)
    data = {f: np.concatenate(parts) for f, parts in pieces.items() if f != "T"}
    X = np.empty((len(_TABLE_COLUMNS), len(rows)))
    X[0], X[1], X[2], X[3], X[4] = T[rows], data["cp"][rows], data["s"][rows], data["h_minus_h298"][rows], \
        data["g_fn"][rows]
    X[5], X[6] = cp[rows], s[rows]
    np.subtract(h[rows], np.repeat(h298, counts), out=X[7])  # H − H298 of the fit [J/mol]
    np.subtract(X[6], np.divide(X[7], X[0], out=X[8]), out=X[8])  # −(G − H298)/T = S − (H − H298)/T
    np.subtract(X[5:9], X[1:5], out=X[9:13])  # residuals, fit − table
    X[3:13:4] /= 1e3  # the H − H298 columns in kJ/mol
    tables: dict = {}  # species by their uncertainty columns (most often none)
    for i, sp in enumerate(group):
        tables.setdefault(tuple(sp.extra), []).append(i)
    first = np.cumsum(counts) - counts
    for extra, members in tables.items():
        if len(tables) == 1 and not extra:
            values = X
        else:
            cols = np.concatenate([np.arange(first[i], first[i] + counts[i]) for i in members])
            values = np.concatenate([X[:, cols]] + [[np.concatenate([group[i].extra[c] for i in members])]
                                                   for c in extra])
        texts = formats.csv_tables(_TABLE_COLUMNS + extra, values.T, _table_formats(len(values)),
                                   [counts[i] for i in members])
        for i, text in zip(members, texts):
            group[i].table_csv = text

    # errors of the printed polynomials over each fit grid within the printed range: the
    # largest of each species' points there (zeros elsewhere do not change it: errors are ≥ 0)
    inside = np.repeat(np.tile((True, False), n), grid_sizes)
    inside &= T >= np.repeat([sp.printed.tlow for sp in group], sizes)
    inside &= T <= np.repeat([sp.printed.thigh for sp in group], sizes)
    found = np.add.reduceat(inside, ends - sizes, dtype=np.intp).tolist()
    errors = [np.divide(np.abs(cp - data["cp"]), np.abs(data["cp"]), out=np.zeros(len(T)), where=inside),
              np.where(inside, np.abs(h - data["h"]), 0.0), np.where(inside, np.abs(s - data["s"]), 0.0)]
    largest = [np.maximum.reduceat(e, ends - sizes).tolist() for e in errors]
    for i, (sp, jump) in enumerate(zip(group, continuity.tolist())):
        sp.continuity = jump
        sp.errors = (largest[0][i], largest[1][i], largest[2][i]) if found[i] else (None, None, None)


_LOGS: dict = {}


def _log_of(T) -> np.ndarray:
    """``np.log`` of a fit grid, made once per grid array in a batch (remembered by identity, with the array)."""
    known = _LOGS.get(id(T))
    if known is not None and known[0] is T:
        return known[1]
    if len(_LOGS) > 64:
        _LOGS.clear()
    logT = np.log(np.asarray(T, dtype=float))
    _LOGS[id(T)] = (T, logT)
    return logT


@functools.lru_cache(maxsize=64)
def _table_grid(tmin: float, tmax: float, step: float) -> np.ndarray:
    """:func:`pipeline.thermo.temperature_grid` of the tables (read-only, made once per range)."""
    from pipeline.thermo import temperature_grid

    grid = np.array(temperature_grid(tmin, tmax, step), dtype=float)
    grid.flags.writeable = False
    return grid


_SPECIES_SETTINGS: dict = {}


def _for_species(settings, species):
    """``settings.for_species(species)``, made once per distinct settings and ``fit:`` block."""
    key = (settings, species.fit)
    s = _SPECIES_SETTINGS.get(key)
    if s is None:
        if len(_SPECIES_SETTINGS) > 256:
            _SPECIES_SETTINGS.clear()
        s = _SPECIES_SETTINGS[key] = settings.for_species(species)
    return s


def _file_name(path: str) -> str:
    """``PurePath(path).name``; for the usual ``folder/NAME.yaml`` without making a path object."""
    tail = path.rpartition("/")[2]
    if tail not in ("", ".", "..") and os.sep == "/" and os.altsep is None:
        return tail
    return PurePath(path).name


_MODEL_KEYS: dict = {}


def _model_key(settings) -> dict:
    """``settings.model_key()``, computed once per distinct settings."""
    key = _MODEL_KEYS.get(settings)
    if key is None:
        key = _MODEL_KEYS[settings] = settings.model_key()
    return key


def record_text(fit, identifier: str = "") -> str:
    """The four 80-column lines of one record (NASA TM-4513 layout), as printed.

    ``fit`` is printed with :func:`printed_fit` (idempotent, so an already
    printed fit is written unchanged); ``identifier`` fills columns 19–24.
    Elements are the fit's formula and, for an ion, ``E`` with count −charge;
    a fifth element goes to columns 74–78; more do not fit and raise ValueError.
    """
    return _record(printed_fit(fit), identifier)


def _record(p, identifier: str) -> str:
    """:func:`record_text` of a fit already printed."""
    elements = record_elements(p.formula, p.charge)
    if len(elements) > 5:
        raise ValueError(f"{p.name}: {len(elements)} elements (electron included) do not fit a record (at most 5)")
    if len(identifier) > 6:
        raise ValueError(f"{p.name}: identifier {identifier!r} is longer than columns 19–24")
    if len(p.name) > 18:
        raise ValueError(f"{p.name}: a record name holds at most 18 characters (columns 1–18)")
    if len(p.name) == 18:
        identifier = ""  # a name filling columns 1–18 would run into it and read back as one word
    text = formats.record(p.name, identifier, elements, p.phase, p.tlow, p.tmid, p.thigh, p.low, p.high)
    _check_record(p.name, text)
    return text


def _uncertainty(species, T, pressure):
    """Propagated uncertainties on T, or None when the species file states none."""
    from pipeline.uncertainty import propagate, uncertain_inputs

    if not uncertain_inputs(species):
        return None
    return propagate(species, T, pressure)


def _check_record(name: str, record: str) -> None:
    lines = record.split("\n")
    if lines[-1] != "" or len(lines) != 5:
        raise ValueError(f"{name}: record rendered as {len(lines) - 1} lines, not 4")
    for i, line in enumerate(lines[:4], start=1):
        if len(line) != 80 or line[79] != str(i):
            raise ValueError(f"{name}: record line {i} is {len(line)} columns, not 80 ending in {i}: {line!r}")


# --------------------------------------------------------------------------
# The database
# --------------------------------------------------------------------------


#: the jinja2 templates of the whole documents :func:`assemble` renders
DOCUMENT_TEMPLATES = ("thermo.dat.j2", "thermo.yaml.j2", "REPORT.md.j2")


def load_templates() -> None:
    """Import jinja2 and compile the document templates (a build does this while its workers compute)."""
    for name in DOCUMENT_TEMPLATES:
        formats.template(name)


def assemble(fragments: list[dict[str, str]], settings) -> dict[str, bytes]:
    """The whole database from species fragments: output-relative path → bytes.

    Species are written in name order whatever the order of ``fragments``;
    only string joins and the file headers (from ``settings``: ranges,
    pressure, tool version) happen here.  A species whose ``table_csv`` is None
    (its table already written by a build worker) gets no table here.
    """
    frags = sorted(fragments, key=lambda f: f["name"])
    names = [f["name"] for f in frags]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise ValueError(f"species named more than once: {', '.join(dup)}")
    tmid = settings.tmid if settings.tmid != "auto" else 1000.0  # default Tmid of the ranges line (common practice)
    common = dict(version=__version__, pressure_label=_PRESSURE_LABEL[settings.pressure],
                  pressure_pa=float(settings.pressure_pa))
    files: dict[str, bytes] = {}
    files["thermo.dat"] = formats.render(
        "thermo.dat.j2", title="fixed-column seven-coefficient records (NASA TM-4513 layout)",
        tlow=settings.tmin, tmid=tmid, thigh=settings.tmax, records="".join(f["record"] for f in frags),
        **common,
    ).encode("utf-8")
    files["thermo.yaml"] = formats.render(
        "thermo.yaml.j2", format_version=FORMAT_VERSION, units=_UNITS, entries="".join(f["yaml"] for f in frags),
        **common,
    ).encode("utf-8")
    files["REPORT.md"] = formats.render(
        "REPORT.md.j2", count=len(frags), rows="".join(f["report_row"] for f in frags).rstrip("\n"),
        notes="".join(f.get("report_note", "") for f in frags).rstrip("\n"),
        g_limit=settings.g_uncertainty_warning, grid_step=settings.grid_step, table_step=settings.table_step,
        tmin=settings.tmin, tmax=settings.tmax,
        tmid_policy="searched per species" if settings.tmid == "auto" else f"{float(settings.tmid):g} K unless a species file sets it",
        **common,
    ).encode("utf-8")
    for f in frags:
        if f["table_csv"] is not None:
            files[table_path(f["name"])] = f["table_csv"].encode("utf-8")
    return files
