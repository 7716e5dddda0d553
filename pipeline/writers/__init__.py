"""Writers: a species' rendered fragments, and the database assembled from them.

Two calls, made by :mod:`pipeline.build`:

``species_fragments(species, table, fit, settings) -> dict[str, str]``
    Everything one species contributes to ``output/``, rendered (the
    expensive, cacheable part).  Keys:

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
constraints); the templates in ``pipeline/templates`` only format.  The
formats are described in ``docs/format.md``.
"""

from __future__ import annotations

import dataclasses
import functools
from pathlib import PurePath

import numpy as np

from pipeline.writers.rounding import printed_fit

__all__ = ["species_fragments", "assemble", "printed_fit", "record_text", "record_elements", "FORMAT_VERSION", "table_path"]

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
# One species
# --------------------------------------------------------------------------


def species_fragments(species, table, fit, settings) -> dict[str, str]:
    """Render everything ``species`` contributes to the database (keys: module docstring).

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
    from pipeline import __version__
    from pipeline.writers.formats import render

    s = settings.for_species(species)
    pressure = s.pressure_pa
    formula, charge = tuple(species.formula), int(species.charge)
    if (fit.name, fit.formula, fit.charge) != (species.name, formula, charge):
        fit = dataclasses.replace(fit, name=species.name, formula=formula, charge=charge)
    printed = printed_fit(fit)
    quality = fit.quality.as_dict() if hasattr(fit.quality, "as_dict") else {}
    elements = record_elements(species.formula, species.charge)
    record = _record(printed, identifier(species.sha256) if species.sha256 else "")

    # the printed polynomials at the table temperatures, over the fit grid, at 298.15 K and on both sides of Tmid
    T, cp, sm, dh, gfn = _at_table_step(species, table, _table_grid(s.tmin, s.tmax, s.table_step), pressure)
    Tf = np.asarray(table.T, dtype=float)
    inside = (Tf >= printed.tlow) & (Tf <= printed.thigh)
    inside = slice(None) if inside.all() else inside  # the usual case: no copies
    Tf = Tf[inside]
    v = _printed_values(printed, (T, Tf))
    (cp_f, cpf_grid), (h_t, hf_grid), (s_f, sf_grid) = v["cp"], v["h"], v["s"]
    h298 = v["h298"]
    u = _uncertainty(species, T, pressure)

    # property table at the table step, with the printed polynomials beside it
    dh_f = h_t - h298
    gfn_f = s_f - dh_f / T
    columns = [
        ("T [K]", T, ".2f"),
        ("Cp [J/mol/K]", cp, ".6f"), ("S [J/mol/K]", sm, ".6f"),
        ("H-H298 [kJ/mol]", dh / 1e3, ".6f"), ("-(G-H298)/T [J/mol/K]", gfn, ".6f"),
        ("Cp fit [J/mol/K]", cp_f, ".6f"), ("S fit [J/mol/K]", s_f, ".6f"),
        ("H-H298 fit [kJ/mol]", dh_f / 1e3, ".6f"), ("-(G-H298)/T fit [J/mol/K]", gfn_f, ".6f"),
        ("Cp residual [J/mol/K]", cp_f - cp, ".6f"), ("S residual [J/mol/K]", s_f - sm, ".6f"),
        ("H-H298 residual [kJ/mol]", (dh_f - dh) / 1e3, ".6f"),
        ("-(G-H298)/T residual [J/mol/K]", gfn_f - gfn, ".6f"),
    ]
    if u is not None:
        from pipeline.uncertainty import table_columns

        columns += [(head, values, ".6f") for head, values in table_columns(u, T).items()]
    values = np.empty((len(T), len(columns)))
    for j, c in enumerate(columns):
        values[:, j] = c[1]
    table_csv = render("table.csv.j2", header=[c[0] for c in columns], values=values,
                       formats=[c[2] for c in columns])

    # thermo.yaml entry
    uncertainty = None
    report_u = None
    if u is not None:
        from pipeline.uncertainty import exceeds, report_values, structured

        uncertainty = structured(u, [t for t in U_BAND_T if s.tmin <= t <= s.tmax])
        report_u = report_values(u)
    entry = render(
        "species.yaml.j2", name=species.name, composition={el: n for el, n in species.formula},
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
        species_file=PurePath(species.path).name if species.path else "", sha256=species.sha256,
        version=__version__, model=_model_key(s), pressure_pa=float(pressure),
    )

    # REPORT.md row, errors of the printed polynomials over the fit grid
    cp_t, h_t, s_t = table.cp[inside], table.h[inside], table.s[inside]
    cp_err = np.abs(cpf_grid - cp_t) / np.abs(cp_t)
    h_err = np.abs(hf_grid - h_t)
    s_err = np.abs(sf_grid - s_t)
    warnings = list(quality.get("warnings", []))
    note = ""
    if report_u is not None and exceeds(report_u, s.g_uncertainty_warning):
        warnings.append(f"u(G°, 1000 K) = {report_u['g1000']:.2f} kJ/mol")
        dominant = f" (largest contribution: `{report_u['dominant']}`)" if report_u["dominant"] else ""
        note = f"- `{species.name}`: {report_u['g1000']:.2f} kJ/mol{dominant}\n"
    plot = ""
    if s.plots:
        from pipeline.plots import PLOTS_DIR, available, plot_file_name

        if available():  # without matplotlib the build writes no plots: link none
            plot = f"[plot](<{PLOTS_DIR}/{plot_file_name(species.name)}>)"
    row = render(
        "report_row.md.j2", name=species.name, formula=" ".join(f"{el}{n}" for el, n in elements),
        dhf298=table.dhf298 / 1e3, s298=table.s298, cp298=table.cp298, tmid=printed.tmid,
        tmid_auto=bool(quality.get("tmid_auto", False)),
        cp_error=float(cp_err.max()) if len(Tf) else None, h_error=float(h_err.max()) if len(Tf) else None,
        s_error=float(s_err.max()) if len(Tf) else None, continuity=v["continuity"],
        u_g298=report_u["g298"] if report_u else None, u_g1000=report_u["g1000"] if report_u else None,
        plot=plot, warnings="; ".join(w.replace("|", "/") for w in warnings),
    )
    return {"name": species.name, "record": record, "yaml": entry, "report_row": row,
            "report_note": note, "table_csv": table_csv}


def _printed_values(p, temperatures) -> dict:
    """Cp, H, S [SI] of the printed fit ``p`` on each array of ``temperatures``, H at
    298.15 K, and the largest relative jump of Cp/R, H/RT, S/R at Tmid — in one pass.

    The numbers are those of :class:`pipeline.nasa7.Nasa7Fit`'s ``cp``, ``h``, ``s``
    and ``max(continuity().values())``, bit for bit: the same functions of
    :mod:`pipeline.nasa7` evaluated once over every point, each point with
    the coefficients of its own range (Tmid belongs to the low range).
    """
    from scipy import constants as C

    from pipeline.nasa7 import cp_r, h_rt, s_r
    from pipeline.thermo import T_REF

    parts = [np.asarray(t, dtype=float) for t in temperatures]
    sizes = [len(t) for t in parts]
    T = np.concatenate(parts + [np.array([T_REF, p.tmid, p.tmid])])
    high = T > p.tmid
    high[-2:] = (False, True)  # Tmid in the low range, then in the high range
    a = np.where(high[:, None], np.array(p.high, dtype=float), np.array(p.low, dtype=float)).T.copy()
    dimensionless = {"cp": cp_r(a, T), "h": h_rt(a, T), "s": s_r(a, T)}
    si = {"cp": C.R * dimensionless["cp"], "h": C.R * T * dimensionless["h"], "s": C.R * dimensionless["s"]}
    bounds = [0]
    for n in sizes:
        bounds.append(bounds[-1] + n)
    out = {q: [values[i:j] for i, j in zip(bounds[:-1], bounds[1:])] for q, values in si.items()}
    out["h298"] = float(si["h"][-3])
    jumps = []
    for values in dimensionless.values():  # Nasa7Fit.continuity()
        lo, hi = float(values[-2]), float(values[-1])
        jumps.append(abs(hi - lo) / max(abs(lo), 1.0))
    out["continuity"] = max(jumps)
    return out


@functools.lru_cache(maxsize=64)
def _table_grid(tmin: float, tmax: float, step: float) -> np.ndarray:
    """:func:`pipeline.thermo.temperature_grid` of the tables (read-only, made once per range)."""
    from pipeline.thermo import temperature_grid

    grid = np.array(temperature_grid(tmin, tmax, step), dtype=float)
    grid.flags.writeable = False
    return grid


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
    from pipeline.writers.formats import render

    elements = record_elements(p.formula, p.charge)
    if len(elements) > 5:
        raise ValueError(f"{p.name}: {len(elements)} elements (electron included) do not fit a record (at most 5)")
    if len(identifier) > 6:
        raise ValueError(f"{p.name}: identifier {identifier!r} is longer than columns 19–24")
    if len(p.name) > 18:
        raise ValueError(f"{p.name}: a record name holds at most 18 characters (columns 1–18)")
    if len(p.name) == 18:
        identifier = ""  # a name filling columns 1–18 would run into it and read back as one word
    text = render(
        "record.dat.j2", name=p.name, identifier=identifier,
        elements=elements[:4] + [None] * (4 - len(elements[:4])), fifth=elements[4] if len(elements) > 4 else None,
        phase=p.phase, tlow=p.tlow, tmid=p.tmid, thigh=p.thigh, low=p.low, high=p.high,
    )
    _check_record(p.name, text)
    return text


def _at_table_step(species, table, grid, pressure):
    """T, Cp, S, H−H298, −(G−H298)/T of the species on ``grid``: rows of the fit-grid
    ``table`` when it holds every grid temperature (the usual case: 10 K grid, 100 K
    table step), else computed."""
    from pipeline.thermo import thermo_table

    T = np.asarray(table.T, dtype=float)
    idx = np.searchsorted(T, grid)
    if table.pressure == pressure and np.all(idx < len(T)) and np.array_equal(T[np.minimum(idx, len(T) - 1)], grid):
        src = table
    else:
        src, idx = thermo_table(species, grid, pressure), slice(None)
    return tuple(np.asarray(getattr(src, f))[idx] for f in ("T", "cp", "s", "h_minus_h298", "g_fn"))


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


def assemble(fragments: list[dict[str, str]], settings) -> dict[str, bytes]:
    """The whole database from species fragments: output-relative path → bytes.

    Species are written in name order whatever the order of ``fragments``;
    only string joins and the file headers (from ``settings``: ranges,
    pressure, tool version) happen here.
    """
    from pipeline import __version__
    from pipeline.writers.formats import render

    frags = sorted(fragments, key=lambda f: f["name"])
    names = [f["name"] for f in frags]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise ValueError(f"species named more than once: {', '.join(dup)}")
    tmid = settings.tmid if settings.tmid != "auto" else 1000.0  # default Tmid of the ranges line (common practice)
    common = dict(version=__version__, pressure_label=_PRESSURE_LABEL[settings.pressure],
                  pressure_pa=float(settings.pressure_pa))
    files: dict[str, bytes] = {}
    files["thermo.dat"] = render(
        "thermo.dat.j2", title="fixed-column seven-coefficient records (NASA TM-4513 layout)",
        tlow=settings.tmin, tmid=tmid, thigh=settings.tmax, records="".join(f["record"] for f in frags),
        **common,
    ).encode("utf-8")
    files["thermo.yaml"] = render(
        "thermo.yaml.j2", format_version=FORMAT_VERSION, units=_UNITS, entries="".join(f["yaml"] for f in frags),
        **common,
    ).encode("utf-8")
    files["REPORT.md"] = render(
        "REPORT.md.j2", count=len(frags), rows="".join(f["report_row"] for f in frags).rstrip("\n"),
        notes="".join(f.get("report_note", "") for f in frags).rstrip("\n"),
        g_limit=settings.g_uncertainty_warning, grid_step=settings.grid_step, table_step=settings.table_step,
        tmin=settings.tmin, tmax=settings.tmax,
        tmid_policy="searched per species" if settings.tmid == "auto" else f"{float(settings.tmid):g} K unless a species file sets it",
        **common,
    ).encode("utf-8")
    for f in frags:
        files[table_path(f["name"])] = f["table_csv"].encode("utf-8")
    return files
