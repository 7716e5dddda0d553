"""``statherm diff OLD NEW``: what changed between two databases, for review.

OLD and NEW are fixed-column seven-coefficient files (NASA TM-4513 layout) or
output folders (their ``thermo.dat``).  The report is a Markdown table of the
added, removed and changed species; for a changed species, the largest change
(new − old) of Cp [J/mol/K], H [kJ/mol], S [J/mol/K] and G [kJ/mol] over the
temperatures both versions cover, and the temperature [K] where it occurs.
Unchanged species are not listed; identical databases give an empty report.

A species is *changed* when anything its record holds differs: coefficients,
temperature ranges, composition, charge or phase.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from pathlib import Path

from pipeline.diagnostics import Diagnostic, InputError

EXIT_OK, EXIT_CHANGED = 0, 1

#: properties compared: (label, unit, Nasa7Fit method, scale to the unit)
PROPERTIES = (
    ("Cp", "J/mol/K", "cp", 1.0),
    ("H", "kJ/mol", "h", 1e-3),
    ("S", "J/mol/K", "s", 1.0),
    ("G", "kJ/mol", "g", 1e-3),
)

#: spacing [K] of the comparison grid (the range ends, Tmid values and 298.15 K are added)
STEP = 10.0


@dataclass(frozen=True)
class Change:
    """One species that differs between the two databases."""

    name: str
    status: str  # "added" | "removed" | "changed"
    largest: dict = field(default_factory=dict)  # property label → (new − old, T [K])
    notes: tuple[str, ...] = ()


def register(sub) -> None:
    p = sub.add_parser("diff", help="Markdown review of what changed between two databases",
                       description=__doc__.split("\n\n")[0] + " " + __doc__.split("\n\n")[1],
                       epilog="Exit codes: 0 success (or no change), 1 changed with --fail-on-change "
                              "or unreadable input, 2 usage errors.")
    p.add_argument("old", metavar="OLD", help="fixed-column file or output folder")
    p.add_argument("new", metavar="NEW", help="fixed-column file or output folder")
    p.add_argument("--fail-on-change", action="store_true", help="exit 1 if any species was added, removed or changed")
    p.add_argument("--plots", metavar="DIR",
                   help="also write DIR/NAME.png per changed species: old and new Cp and G overlaid (needs the 'plot' extra)")
    p.set_defaults(func=cmd_diff)


def cmd_diff(args) -> int:
    old, new = read_database(args.old), read_database(args.new)
    changes = compare(old, new)
    sys.stdout.write(markdown(changes, args.old, args.new, len(old), len(new)))
    if getattr(args, "plots", None) and changes:
        from pipeline.plots import PlotsUnavailable, write_comparisons

        try:
            paths = write_comparisons(changes, old, new, args.plots, "old", "new")
        except PlotsUnavailable as exc:
            raise InputError([Diagnostic("statherm diff", "--plots", str(exc))]) from None
        except OSError as exc:
            raise InputError([Diagnostic(args.plots, "", f"cannot be written ({exc.strerror})")]) from None
        sys.stdout.write("\n" + "".join(f"![{c.name}: old vs new]({p})\n" for c, p in zip(changes, paths)))
    return EXIT_CHANGED if (changes and args.fail_on_change) else EXIT_OK


def read_database(path: str) -> list:
    """The records of a fixed-column file, or of ``thermo.dat`` in an output folder."""
    from pipeline.readers import read_records

    p = Path(path)
    if p.is_dir():
        p = p / "thermo.dat"
    if not p.is_file():
        what = "does not exist" if not p.exists() else "is not a file"
        raise InputError([Diagnostic(p.as_posix(), "", f"{what} (expected a fixed-column file or an output folder)")])
    try:
        return read_records(p)
    except InputError:
        raise
    except (ValueError, UnicodeDecodeError) as exc:
        raise InputError([Diagnostic(p.as_posix(), "", f"cannot be read as fixed-column records: {exc}")]) from None


def _same(a, b) -> bool:
    return (a.formula, a.charge, a.phase, a.tlow, a.tmid, a.thigh, tuple(a.low), tuple(a.high)) == (
        b.formula, b.charge, b.phase, b.tlow, b.tmid, b.thigh, tuple(b.low), tuple(b.high))


def _range(f) -> str:
    return f"{f.tlow:g}–{f.tmid:g}–{f.thigh:g} K"


def _formula(f) -> str:
    return "".join(f"{el}{n if n != 1 else ''}" for el, n in f.formula) + (f" ({f.charge:+d})" if f.charge else "")


def largest_changes(old, new) -> tuple[dict, tuple[str, ...]]:
    """Largest new − old of each property over the common range, and where.

    Returns ({label: (delta, T)}, notes).  Evaluated every ``STEP`` K plus the
    range ends, both Tmid values and 298.15 K, so a jump at a range break is
    not missed.
    """
    import numpy as np

    notes = []
    lo, hi = max(old.tlow, new.tlow), min(old.thigh, new.thigh)
    if (old.tlow, old.tmid, old.thigh) != (new.tlow, new.tmid, new.thigh):
        notes.append(f"range {_range(old)} → {_range(new)}")
    if (old.formula, old.charge) != (new.formula, new.charge):
        notes.append(f"composition {_formula(old)} → {_formula(new)}")
    if old.phase != new.phase:
        notes.append(f"phase {old.phase} → {new.phase}")
    if lo >= hi:
        notes.append("the temperature ranges do not overlap")
        return {}, tuple(notes)
    T = np.arange(lo, hi + 1e-9, STEP)
    T = np.union1d(T, [t for t in (lo, hi, old.tmid, new.tmid, 298.15) if lo <= t <= hi])
    out = {}
    for label, _, method, scale in PROPERTIES:
        d = (getattr(new, method)(T) - getattr(old, method)(T)) * scale
        i = int(np.argmax(np.abs(d)))
        out[label] = (float(d[i]), float(T[i]))
    return out, tuple(notes)


def compare(old: list, new: list) -> list[Change]:
    """Added, removed and changed species (unchanged ones are left out), sorted by name."""
    a = {f.name: f for f in old}
    b = {f.name: f for f in new}
    out = []
    for name in sorted(set(a) | set(b)):
        if name not in a:
            out.append(Change(name, "added", notes=(f"{_formula(b[name])}, {_range(b[name])}",)))
        elif name not in b:
            out.append(Change(name, "removed", notes=(f"{_formula(a[name])}, {_range(a[name])}",)))
        elif not _same(a[name], b[name]):
            largest, notes = largest_changes(a[name], b[name])
            out.append(Change(name, "changed", largest, notes))
    return out


def _num(v: float) -> str:
    if v == 0:
        return "0"
    return f"{v:+.4f}" if abs(v) >= 1e-3 else f"{v:+.2e}"


def markdown(changes: list[Change], old_label: str, new_label: str, n_old: int, n_new: int) -> str:
    """The review table (empty string when nothing changed)."""
    if not changes:
        return ""
    count = {s: sum(c.status == s for c in changes) for s in ("changed", "added", "removed")}
    lines = [
        f"### statherm diff: `{old_label}` → `{new_label}`",
        "",
        f"{count['changed']} changed, {count['added']} added, {count['removed']} removed "
        f"({n_old} → {n_new} species). Largest change new − old over the common range, and where.",
        "",
    ]
    head = ["species", "status"]
    for label, unit, _, _ in PROPERTIES:
        head += [f"Δ{label} [{unit}]", "at T [K]"]
    head.append("notes")
    lines.append("| " + " | ".join(head) + " |")
    lines.append("|" + "|".join(["---", "---"] + ["---:"] * (2 * len(PROPERTIES)) + ["---"]) + "|")
    for c in changes:
        row = [c.name, c.status]
        for label, *_ in PROPERTIES:
            if label in c.largest:
                d, t = c.largest[label]
                row += [_num(d), f"{t:g}"]
            else:
                row += ["", ""]
        row.append("; ".join(c.notes))
        lines.append("| " + " | ".join(row) + " |")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------
# "What changed since the last build" (a REPORT.md section)
# --------------------------------------------------------------------------

#: the section is fenced by these lines, so that `statherm check` can leave it out
#: (it depends on the previous build, which a fresh checkout does not have)
SINCE_BEGIN = "<!-- statherm: since-last-build -->"
SINCE_END = "<!-- statherm: end since-last-build -->"


def since_last_build(old: list, new: list) -> str:
    """A short Markdown section naming what changed between the last build's records and these.

    ``old`` and ``new`` are lists of Nasa7Fit.  For each changed species the
    largest change of Cp and G and where; the section is fenced by
    :data:`SINCE_BEGIN` / :data:`SINCE_END`.  Empty when nothing changed.
    """
    changes = compare(old, new)
    if not changes:
        return ""
    count = {s: sum(c.status == s for c in changes) for s in ("changed", "added", "removed")}
    lines = [
        SINCE_BEGIN,
        "## What changed since the last build",
        "",
        f"{count['changed']} changed, {count['added']} added, {count['removed']} removed "
        "(largest change new − old, and where).",
        "",
        "| species | status | ΔCp [J/mol/K] | at T [K] | ΔG [kJ/mol] | at T [K] |",
        "|---|---|---:|---:|---:|---:|",
    ]
    for c in changes:
        row = [c.name, c.status]
        for label in ("Cp", "G"):
            d = c.largest.get(label)
            row += [_num(d[0]), f"{d[1]:g}"] if d else ["", ""]
        lines.append("| " + " | ".join(row) + " |")
    lines.append(SINCE_END)
    return "\n".join(lines) + "\n"


def strip_since_last_build(text: str) -> str:
    """``text`` without its since-last-build section (and the blank line after it).

    >>> strip_since_last_build("# R\\n\\n" + SINCE_BEGIN + "\\nx\\n" + SINCE_END + "\\n\\nrest\\n")
    '# R\\n\\nrest\\n'
    """
    start = text.find(SINCE_BEGIN)
    if start < 0:
        return text
    end = text.find(SINCE_END, start)
    if end < 0:
        return text
    end += len(SINCE_END)
    while text[end:end + 1] == "\n" and text[end + 1:end + 2] == "\n":
        end += 1
    return text[:start] + text[end + 1:]


def with_since_last_build(report: str, section: str) -> str:
    """``report`` with ``section`` placed after its title line (replacing any previous one)."""
    report = strip_since_last_build(report)
    if not section:
        return report
    head, sep, rest = report.partition("\n\n")
    if head.startswith("# ") and sep:
        return head + "\n\n" + section + "\n" + rest
    return section + "\n" + report
