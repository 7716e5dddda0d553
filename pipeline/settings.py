"""Build settings: documented defaults, ``statherm.yaml``, species ``fit:``, flags.

Precedence (highest first): command-line flags, the species file's ``fit:``
block (for tmin/tmid/tmax), the database's ``statherm.yaml``, the defaults
below.

``statherm.yaml`` keys (all optional)::

    pressure: bar          # bar (IUPAC, default) | atm
    tmin: 200              # K, low end of the fit and tables
    tmid: auto             # auto (search, see pipeline.fit) or a temperature [K]
    tmax: 6000             # K
    grid_step: 10          # K, spacing of the grid the fit uses
    table_step: 100        # K, spacing of output/tables/*.csv (298.15 K added)
    cp_warning: 0.005      # relative max Cp error above which a fit is flagged
    g_uncertainty_warning: 4.184  # kJ/mol; REPORT.md lists species whose u(G°, 1000 K) exceeds it
    plots: false           # write output/plots/ (needs the 'plot' extra)
    report_changes: false  # REPORT.md opens with what changed since the last build (from the cache)
    jobs: auto             # worker processes for builds: auto (one per CPU this process may use) or N
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from pipeline.diagnostics import Diagnostic, InputError


@dataclass(frozen=True)
class Settings:
    """Resolved settings for one build (see module docstring for the keys)."""

    pressure: str = "bar"
    tmin: float = 200.0
    tmid: float | str = "auto"
    tmax: float = 6000.0
    grid_step: float = 10.0
    table_step: float = 100.0
    cp_warning: float = 0.005
    g_uncertainty_warning: float = 4.184  # [kJ/mol] 1 kcal/mol, "chemical accuracy" (common practice)
    plots: bool = False
    report_changes: bool = False
    jobs: int | str = "auto"

    @property
    def pressure_pa(self) -> float:
        """The standard pressure [Pa]."""
        from pipeline.units import PRESSURE  # lazy: a no-op rebuild must not import scipy

        return PRESSURE[self.pressure]

    def replace(self, **changes: Any) -> "Settings":
        return dataclasses.replace(self, **{k: v for k, v in changes.items() if v is not None})

    def for_species(self, species) -> "Settings":
        """These settings with the species file's ``fit:`` overrides applied."""
        f = species.fit
        return self.replace(tmin=f.tmin, tmid=f.tmid, tmax=f.tmax)

    def model_key(self) -> dict:
        """The settings that change computed numbers (cache keys, provenance)."""
        d = dataclasses.asdict(self)
        d.pop("jobs")
        d.pop("plots")
        d.pop("g_uncertainty_warning")  # only selects what REPORT.md lists
        d.pop("report_changes")
        return d


SETTINGS_FILE = "statherm.yaml"


def workers(jobs: int | str) -> int:
    """Worker processes for a ``jobs`` setting: N itself, or for ``auto`` the CPUs this
    process may run on (its affinity mask, which container and batch limits set).

    >>> workers(3)
    3
    >>> workers("auto") >= 1
    True
    """
    if jobs != "auto":
        return int(jobs)
    import os

    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # no affinity masks on this platform
        return max(1, os.cpu_count() or 1)


def load_settings(database: str | Path, base: Settings | None = None) -> Settings:
    """Read ``statherm.yaml`` from the database folder (if present) over the defaults."""
    from pipeline.species import _Checker, check_ranges

    base = base or Settings()
    path = Path(database) / SETTINGS_FILE
    if not path.exists():
        return base
    from pipeline.safeyaml import load_yaml
    file = path.as_posix()
    try:
        doc = load_yaml(path.read_text(encoding="utf-8"))
    except Exception as exc:  # yaml errors, decoding errors
        raise InputError([Diagnostic(file, "", f"cannot be read as YAML: {str(exc).splitlines()[0]}")]) from None
    if doc is None:
        return base
    ck = _Checker(file)
    m = ck.mapping(doc, "")
    if m is None:
        raise InputError(ck.diagnostics)
    fields = {f.name for f in dataclasses.fields(Settings)}
    ck.keys(m, fields, "")
    values: dict[str, Any] = {}
    if "pressure" in m:
        if m["pressure"] not in ("bar", "atm"):
            ck.error("pressure", f"{m['pressure']!r} is not 'bar' or 'atm'")
        else:
            values["pressure"] = m["pressure"]
    for key in ("tmin", "tmax", "grid_step", "table_step", "cp_warning", "g_uncertainty_warning"):
        if key in m:
            values[key] = ck.number(m[key], key, positive=True)
    if "tmid" in m:
        values["tmid"] = "auto" if m["tmid"] == "auto" else ck.number(m["tmid"], "tmid", positive=True)
    for key in ("plots", "report_changes"):
        if key in m:
            if not isinstance(m[key], bool):
                ck.error(key, f"{m[key]!r} is not true or false")
            else:
                values[key] = m[key]
    if "jobs" in m:
        values["jobs"] = "auto" if m["jobs"] == "auto" else ck.integer(m["jobs"], "jobs", minimum=1)
    if not ck.failed:
        tmid = values.get("tmid", base.tmid)
        check_ranges(ck, values.get("tmin", base.tmin), None if tmid == "auto" else tmid,
                     values.get("tmax", base.tmax), "")
    if ck.failed:
        raise InputError(ck.diagnostics)
    return base.replace(**values)
