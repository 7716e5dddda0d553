"""Fit pictures: one PNG page per species, and old-vs-new pages for reviews.

A species page shows Cp°, S° and H°−H°298 from the statistical-mechanics table
(solid) and from the polynomials as written (dashed), the residual of the
polynomials below each, Tmid marked, the ± u band (standard uncertainty,
k = 1, see :mod:`pipeline.uncertainty`) when the species file states
uncertainties, and a published reference (points from the species file's
``reference:`` block, or a reference :class:`~pipeline.nasa7.Nasa7Fit`)
where one is given.

matplotlib is optional (the ``plot`` extra: ``pip install "statherm[plot]"``)
and imported only inside the functions that draw.  Pictures are
byte-reproducible: the Agg renderer, matplotlib's default style (whatever the
user's ``matplotlibrc`` says), a fixed size and resolution, and no software
or date metadata in the PNG.
"""

from __future__ import annotations

import io
import sys
from pathlib import Path

#: page size [in] and resolution [dots per inch] of every picture
FIGSIZE = (11.0, 7.5)
DPI = 100
#: PNG text chunks matplotlib would add; None removes them
PNG_METADATA = {"Software": None}
INSTALL_HINT = 'plots need matplotlib: pip install "statherm[plot]"'


class PlotsUnavailable(ImportError):
    """matplotlib is not installed (an ImportError, so a build can carry on without plots)."""


def available() -> bool:
    """True if matplotlib can be imported (the ``plot`` extra is installed)."""
    import importlib.util

    if "matplotlib" in sys.modules:  # imported already (or blocked: None)
        return sys.modules["matplotlib"] is not None
    return importlib.util.find_spec("matplotlib") is not None


def engine() -> str:
    """The drawing library and its version (part of the build's cache key), or "" without it.

    Read from the installed package's metadata: matplotlib is not imported.
    """
    if not available():
        return ""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return f"matplotlib {version('matplotlib')}"
    except PackageNotFoundError:  # importable but not installed as a distribution
        return "matplotlib"


def _mpl():
    try:
        import matplotlib
        import matplotlib.style
    except ImportError:
        raise PlotsUnavailable(INSTALL_HINT) from None
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    return matplotlib, Figure, FigureCanvasAgg


def _png(fig, canvas_cls) -> bytes:
    canvas_cls(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, metadata=PNG_METADATA)
    return buf.getvalue()


def _style(matplotlib):
    """matplotlib's default style plus this project's few choices (no user rc files)."""
    rc = {
        "font.size": 9.0,
        "axes.grid": True,
        "grid.alpha": 0.3,
        "legend.fontsize": 8.0,
        "legend.frameon": False,
        "figure.dpi": DPI,
        "savefig.dpi": DPI,
        "path.simplify": False,
    }
    return matplotlib.style.context(["default", rc])


_PANELS = (
    # attribute of ThermoTable, label, unit factor (SI → shown), residual scale
    ("cp", "Cp° [J/mol/K]", 1.0),
    ("s", "S° [J/mol/K]", 1.0),
    ("h_minus_h298", "H° − H°298 [kJ/mol]", 1e-3),
)


def _fit_values(fit, T):
    """Cp, S, H−H298 of the polynomials at T, in the units of a ThermoTable."""
    from pipeline.thermo import T_REF

    return {
        "cp": fit.cp(T),
        "s": fit.s(T),
        "h_minus_h298": fit.h(T) - float(fit.h(T_REF)),
    }


def _reference_values(reference, T):
    """(label, {prop: (T, values)}, as_points) of a reference fit or reference points."""
    import numpy as np

    if reference is None:
        return None
    if hasattr(reference, "cp_r"):  # a Nasa7Fit
        lo, hi = max(reference.tlow, float(T[0])), min(reference.thigh, float(T[-1]))
        tr = T[(T >= lo) & (T <= hi)]
        vals = _fit_values(reference, tr)
        label = reference.extra.get("source") or "reference polynomials"
        return label, {k: (tr, v) for k, v in vals.items()}, False
    # reference points (pipeline.species.ReferenceData)
    points = {}
    for prop in ("cp", "s", "h_minus_h298"):
        v = getattr(reference, prop, None)
        if v is not None:
            points[prop] = (np.asarray(reference.T, dtype=float), np.asarray(v, dtype=float))
    return reference.source, points, True


def render_plot(table, fit, uncertainty=None, reference=None, title: str | None = None) -> bytes:
    """One species page as PNG bytes (same inputs → same bytes).

    Parameters
    ----------
    table : ThermoTable
        The statistical-mechanics values on a (fine) grid [SI units].
    fit : Nasa7Fit
        The polynomials as written.
    uncertainty : ThermoUncertainty or None
        Standard uncertainties on ``table.T``; draws the ± u band (k = 1).
    reference : Nasa7Fit, ReferenceData or None
        Published values to overlay (a fit: dotted line; points: markers).
    title : str
        Page title (default: the species name, ΔfH°298 and Tmid).

    Residuals: (fit − table)/table for Cp° and S°; for H° the residual
    divided by RT, i.e. the error of H/RT that the polynomial represents.
    The ± u band is drawn on the residual's scale too, so the page shows
    whether the fit error is below the uncertainty of the data.

    Raises :class:`PlotsUnavailable` without matplotlib.
    """
    import numpy as np
    from pipeline.codata import C

    matplotlib, Figure, Canvas = _mpl()
    T = np.asarray(table.T, dtype=float)
    fitted = _fit_values(fit, T)
    ref = _reference_values(reference, T)
    with _style(matplotlib):
        fig = Figure(figsize=FIGSIZE, dpi=DPI)
        grid = fig.add_gridspec(2, 3, height_ratios=(3, 1), hspace=0.08, wspace=0.28,
                                left=0.06, right=0.99, top=0.89, bottom=0.08)
        for col, (prop, label, factor) in enumerate(_PANELS):
            ax = fig.add_subplot(grid[0, col])
            res = fig.add_subplot(grid[1, col], sharex=ax)
            y = getattr(table, prop)
            u = getattr(uncertainty, prop) if uncertainty is not None else None
            if u is not None and np.any(u > 0):
                ax.fill_between(T, (y - u) * factor, (y + u) * factor, color="tab:orange",
                                alpha=0.35, linewidth=0, label="± u (k = 1)")
            else:
                u = None
            ax.plot(T, y * factor, color="black", linewidth=1.2, label="partition function")
            ax.plot(T, fitted[prop] * factor, color="tab:blue", linewidth=1.0, linestyle="--",
                    label="polynomials (as written)")
            if ref is not None and prop in ref[1]:
                tr, vr = ref[1][prop]
                if ref[2]:
                    ax.plot(tr, vr * factor, linestyle="none", marker="o", markersize=4,
                            markerfacecolor="none", color="tab:red", label=ref[0])
                else:
                    ax.plot(tr, vr * factor, color="tab:red", linewidth=1.0, linestyle=":", label=ref[0])
            # residual, and the ± u band on the same scale: is the fit error below the data's?
            scale = C.R * T if prop == "h_minus_h298" else y
            r = (fitted[prop] - y) / scale
            res.set_ylabel("Δ(H/RT)" if prop == "h_minus_h298" else "relative residual")
            if u is not None:
                res.fill_between(T, -u / scale, u / scale, color="tab:orange", alpha=0.35, linewidth=0)
            res.plot(T, r, color="tab:blue", linewidth=1.0)
            res.axhline(0.0, color="black", linewidth=0.6)
            res.ticklabel_format(axis="y", style="sci", scilimits=(-2, 2))
            for a in (ax, res):
                a.axvline(fit.tmid, color="grey", linestyle=":", linewidth=1.0)
            ax.text(fit.tmid, 0.98, " Tmid", transform=ax.get_xaxis_transform(), va="top",
                    ha="left", color="grey", fontsize=8)
            ax.set_ylabel(label)
            ax.tick_params(labelbottom=False)
            res.set_xlabel("T [K]")
            res.set_xlim(float(T[0]), float(T[-1]))
            if col == 1:  # S° rises and flattens: its lower right corner is empty
                ax.legend(loc="lower right")
        if title is None:
            title = (f"{table.name}    ΔfH°298 = {table.dhf298 / 1e3:.3f} kJ/mol    "
                     f"S°298 = {table.s298:.3f} J/mol/K    Tmid = {fit.tmid:g} K")
            if uncertainty is not None:
                from pipeline.uncertainty import REPORT_TEMPERATURES

                ug = [(t, uncertainty.at("g", t) / 1e3) for t in REPORT_TEMPERATURES]
                title += "\nu(G°) = " + ", ".join(f"{u:.3f} kJ/mol at {t:g} K" for t, u in ug if u == u)
        fig.suptitle(title, fontsize=11)
        return _png(fig, Canvas)


def render_comparison(name: str, T, old, new, old_label: str = "old", new_label: str = "new") -> bytes:
    """Old and new Cp° and G° of one species overlaid, with new − old below (PNG bytes).

    ``old`` and ``new`` are :class:`~pipeline.nasa7.Nasa7Fit` (either may be
    None for an added or removed species); G° on the ΔfH°298 scale [kJ/mol].
    """
    import numpy as np

    matplotlib, Figure, Canvas = _mpl()
    T = np.asarray(T, dtype=float)
    with _style(matplotlib):
        fig = Figure(figsize=(11.0, 5.5), dpi=DPI)
        grid = fig.add_gridspec(2, 2, height_ratios=(3, 1), hspace=0.08, wspace=0.22,
                                left=0.07, right=0.99, top=0.89, bottom=0.1)
        for col, (label, fn, factor) in enumerate((("Cp° [J/mol/K]", "cp", 1.0), ("G° [kJ/mol]", "g", 1e-3))):
            ax = fig.add_subplot(grid[0, col])
            res = fig.add_subplot(grid[1, col], sharex=ax)
            vals = {}
            for fit, tag, style in ((old, old_label, dict(color="grey", linewidth=2.0)),
                                    (new, new_label, dict(color="tab:blue", linewidth=1.0, linestyle="--"))):
                if fit is None:
                    continue
                t = T[(T >= fit.tlow) & (T <= fit.thigh)]
                v = getattr(fit, fn)(t) * factor
                vals[tag] = (t, v)
                ax.plot(t, v, label=tag, **style)
                ax.axvline(fit.tmid, color=style["color"], linestyle=":", linewidth=0.8)
            if len(vals) == 2:
                lo = max(old.tlow, new.tlow)
                hi = min(old.thigh, new.thigh)
                t = T[(T >= lo) & (T <= hi)]
                res.plot(t, (getattr(new, fn)(t) - getattr(old, fn)(t)) * factor, color="tab:red", linewidth=1.0)
            res.axhline(0.0, color="black", linewidth=0.6)
            res.set_ylabel(f"{new_label} − {old_label}")
            res.set_xlabel("T [K]")
            res.set_xlim(float(T[0]), float(T[-1]))
            ax.set_ylabel(label)
            ax.tick_params(labelbottom=False)
            if col == 0:
                ax.legend(loc="lower right")
        fig.suptitle(f"{name}: {old_label} vs {new_label}", fontsize=11)
        return _png(fig, Canvas)


def plot_file_name(name: str) -> str:
    """File name of a species' page (path separators, which records read from other
    programs' files may hold, become ``_``).

    >>> plot_file_name("CH3O2"), plot_file_name("C2H4O/2")
    ('CH3O2.png', 'C2H4O_2.png')
    """
    return name.replace("/", "_").replace("\\", "_") + ".png"


def write_comparisons(changes, old, new, directory, old_label: str = "old", new_label: str = "new") -> list[str]:
    """Write one old-vs-new page per added, removed or changed species into ``directory``.

    ``changes`` are :class:`pipeline.diff.Change` items; ``old`` and ``new``
    the two lists of Nasa7Fit.  Returns the written paths (as given, POSIX
    form) in the order of ``changes``.  Raises :class:`PlotsUnavailable`
    without matplotlib.
    """
    import numpy as np

    from pipeline.cache import write_atomic

    _mpl()
    a = {f.name: f for f in old}
    b = {f.name: f for f in new}
    folder = Path(directory)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for c in changes:
        fo, fn = a.get(c.name), b.get(c.name)
        fits = [f for f in (fo, fn) if f is not None]
        lo, hi = min(f.tlow for f in fits), max(f.thigh for f in fits)
        T = np.union1d(np.arange(lo, hi + 1e-9, 10.0), [hi, *(f.tmid for f in fits)])
        path = folder / plot_file_name(c.name)
        write_atomic(path, render_comparison(c.name, T, fo, fn, old_label, new_label))
        written.append(path.as_posix())
    return written


# --------------------------------------------------------------------------
# Command line: statherm plot NAME
# --------------------------------------------------------------------------


PLOTS_DIR = "plots"


def species_files(species, table, fit, settings) -> dict[str, bytes]:
    """The build's per-species plot files: ``{"plots/NAME.png": PNG bytes}``.

    ``table`` is the species' table on the fit grid and ``fit`` the fitted
    polynomials.  Raises :class:`PlotsUnavailable` (an ImportError) without
    matplotlib.
    """
    _mpl()
    return {f"{PLOTS_DIR}/{plot_file_name(species.name)}": _page(species, table, fit)}


def species_page(species, settings, reference=None) -> bytes:
    """Compute, fit and draw one species (the on-demand path of ``statherm plot``)."""
    from pipeline.fit import fit_options, fit_table
    from pipeline.thermo import temperature_grid, thermo_table

    s = settings.for_species(species)
    table = thermo_table(species, temperature_grid(s.tmin, s.tmax, s.grid_step), s.pressure_pa)
    return _page(species, table, fit_table(table, **fit_options(species, settings)), reference)


def _page(species, table, fit, reference=None) -> bytes:
    """One species page: the polynomials as the fixed-column record prints them, the ± u band
    on the table's grid, the given reference or else the species file's ``reference:``."""
    from pipeline.uncertainty import propagate
    from pipeline.writers.rounding import printed_fit

    u = propagate(species, table.T, table.pressure)
    if reference is None:
        reference = getattr(species, "reference", None)
    return render_plot(table, printed_fit(fit), u, reference)


def cmd_plot(args) -> int:
    """Write one species' fit page as PNG."""
    from pipeline.cli import EXIT_OK, _find_species
    from pipeline.diagnostics import Diagnostic, InputError
    from pipeline.settings import load_settings

    if not available():
        raise InputError([Diagnostic("statherm plot", "", INSTALL_HINT)])
    settings = load_settings(args.species)
    if args.atm:
        settings = settings.replace(pressure="atm")
    sp = _find_species(args.target, args.species)
    reference = None
    if args.reference:
        reference = _reference_from_file(args.reference, sp.name)
    data = species_page(sp, settings, reference)
    out = Path(args.output) if args.output else Path(plot_file_name(sp.name))
    from pipeline.cache import write_atomic

    try:
        write_atomic(out, data)
    except OSError as exc:
        raise InputError([Diagnostic(out.as_posix(), "", f"cannot be written ({exc.strerror})")]) from None
    print(out.as_posix(), file=sys.stdout)
    return EXIT_OK


def _reference_from_file(path: str, name: str):
    """The record ``name`` of a fixed-column file, as a reference Nasa7Fit."""
    import dataclasses

    from pipeline.diagnostics import Diagnostic, InputError
    from pipeline.readers import read_records

    fits = read_records(path)
    for fit in fits:
        if fit.name.upper() == name.upper():
            return dataclasses.replace(fit, extra={**fit.extra, "source": Path(path).name})
    raise InputError([Diagnostic(path, "", f"has no record named {name!r} to use as reference")])


def register(subparsers) -> None:
    """Add ``statherm plot NAME`` to the command line."""
    p = subparsers.add_parser("plot", help="one species' fit picture (PNG; needs the 'plot' extra)")
    p.add_argument("target", metavar="NAME|FILE", help="record name in the database, or a species file")
    p.add_argument("--species", default="species", metavar="DIR", help="database folder (default: species)")
    p.add_argument("-o", "--output", metavar="FILE", help="where to write (default: NAME.png here)")
    p.add_argument("--reference", metavar="FILE",
                   help="fixed-column file whose record of the same name is overlaid as the reference")
    p.add_argument("--atm", action="store_true", help="standard pressure 1 atm instead of 1 bar")
    p.set_defaults(func=cmd_plot)
