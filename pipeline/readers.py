"""Read fixed-column seven-coefficient records (NASA TM-4513 layout) into :class:`Nasa7Fit`.

Reads this project's ``thermo.dat`` and files written by other programs in the
same layout (McBride, Gordon & Reno, NASA TM-4513, 1993; see docs/format.md):

* optional ``THERMO`` (or ``THERMO ALL``) line, optionally followed by the
  global ranges line (Tlow, Tmid, Thigh; Tmid is used for records whose own
  Tmid field is blank); a closing ``END``; records without any header;
* comment lines starting with ``!`` and trailing ``! …`` comments; blank lines
  between records;
* per record four lines; line numbers 1–4 in column 80 are checked when
  present and not required (without them, a record starts at each line with
  Tlow and Thigh in columns 46–65); text outside a ``THERMO`` section that is
  not a record is skipped, so a file in another layout yields no records;
* element fields in columns 25–44 (four of A2,I3) and a fifth in 74–78;
  symbols in any case (``CL``, ``cl`` → ``Cl``); counts written as integers
  or as Fortran reals (``2.``, ``2.00``); blank or zero counts skipped;
  element ``E`` (electron) gives the charge, −count;
* coefficients as E15.8 (or any Fortran real: ``D`` exponents, ``1.5-03``),
  blank fields read as zero, as Fortran does.

Errors name the file and line and say what was expected
(:class:`~pipeline.diagnostics.InputError`).
"""

from __future__ import annotations

import re
from pathlib import Path

from pipeline.diagnostics import Diagnostic, InputError
from pipeline.nasa7 import Nasa7Fit

_FORTRAN_EXP = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+))([+-]\d+)$")
_ELEMENT_SLOTS = [(24, 29), (29, 34), (34, 39), (39, 44)]
_FIFTH = (73, 78)
_COEFFS = [(1, 0), (1, 15), (1, 30), (1, 45), (1, 60), (2, 0), (2, 15), (2, 30), (2, 45), (2, 60),
           (3, 0), (3, 15), (3, 30), (3, 45)]


def fortran_float(text: str) -> float:
    """A Fortran-formatted real: blank → 0, ``D`` exponents, exponent without ``E``.

    >>> fortran_float(" 1.23456789E+00"), fortran_float("-1.5D-03"), fortran_float("2.5-03"), fortran_float("   ")
    (1.23456789, -0.0015, 0.0025, 0.0)
    """
    s = text.strip().upper().replace("D", "E")
    if not s:
        return 0.0
    m = _FORTRAN_EXP.match(s)
    if m:
        s = f"{m.group(1)}E{m.group(2)}"
    return float(s)


def read_records(source, *, name: str | None = None) -> list[Nasa7Fit]:
    """Every record of a fixed-column file, in file order.

    ``source`` is a path (``str`` or :class:`~pathlib.Path`) or the text
    itself (a ``str`` containing a newline); ``name`` is the file name used in
    messages for text input.

    >>> line1 = f"{'AR':<18}{'':6}{'AR  1':<20}G{200:10.3f}{6000:10.3f}{1000:8.3f}{'':6}1"
    >>> coeffs = " 2.50000000E+00" + " 0.00000000E+00" * 4
    >>> text = "\\n".join([line1, coeffs + "    2",
    ...                   "-7.45375000E+02 4.37967491E+00" + " 2.50000000E+00" + " 0.00000000E+00" * 2 + "    3",
    ...                   " 0.00000000E+00" * 2 + "-7.45375000E+02 4.37967491E+00" + " " * 19 + "4", ""])
    >>> [(f.name, f.formula, f.tmid, f.low[0]) for f in read_records(text)]
    [('AR', (('Ar', 1),), 1000.0, 2.5)]
    """
    if isinstance(source, Path) or (isinstance(source, str) and "\n" not in source):
        path = Path(source)
        file = name or path.as_posix()
        try:
            text = path.read_text(encoding="utf-8", errors="replace")
        except OSError as exc:
            raise InputError([Diagnostic(file, "", f"cannot be read ({exc.strerror})")]) from None
    else:
        text, file = str(source), name or "<text>"
    return _parse(text, file)


def _content(text: str):
    """(line number, line without comment) for every non-blank, non-comment line."""
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.rstrip("\r\n")
        if line.lstrip().startswith("!"):
            continue
        if "!" in line:
            line = line[: line.index("!")]
        if line.strip():
            yield number, line.rstrip()


def _parse(text: str, file: str) -> list[Nasa7Fit]:
    def fail(number: int, message: str):
        raise InputError([Diagnostic(file, f"line {number}", message)])

    lines = list(_content(text))
    # a record starts at a line with 1 in column 80, or (files that do not number their
    # lines) at an unnumbered line that looks like a first line; it is read as four lines
    marked = any(_marker(line) == "1" for _, line in lines)
    default_tmid = None
    out: list[Nasa7Fit] = []
    i = 0
    expect_ranges = in_section = False
    while i < len(lines):
        number, line = lines[i]
        word = line.split()[0].upper()
        if word in ("THERMO", "THERM") and not _marker(line):
            expect_ranges = in_section = True
            i += 1
            continue
        if word == "END" and not _marker(line):
            break
        if expect_ranges:
            expect_ranges = False
            fields = line.split()
            if not _marker(line) and not _looks_like_first(line) and len(fields) >= 3:
                try:
                    default_tmid = fortran_float(fields[1])
                except ValueError:
                    fail(number, f"the ranges line after THERMO should hold Tlow, Tmid, Thigh; found {line.strip()!r}")
                i += 1
                continue
        starts = _marker(line) == "1" or (not _marker(line) and _looks_like_first(line))
        if not starts:
            if marked and in_section:
                found = f"{_marker(line)!r} in column 80" if _marker(line) else f"{line.strip()[:40]!r}"
                fail(number, f"expected the first line of a record (1 in column 80), found {found}")
            i += 1  # text outside a THERMO section (a header, or not this layout at all)
            continue
        if i + 3 >= len(lines):
            fail(number, f"a record needs 4 lines; the file ends after {len(lines) - i}")
        group = lines[i : i + 4]
        for k, (n, l) in enumerate(group, start=1):
            mark = _marker(l)
            if mark and mark != str(k):
                fail(n, f"expected line {k} of a record (column 80 = {k}), found {mark!r} in column 80")
        out.append(_record(group, default_tmid, fail))
        i += 4
    return out


def _looks_like_first(line: str) -> bool:
    """A line with numbers in columns 46–55 and 56–65 (Tlow, Thigh) and a name."""
    if len(line) < 65 or not line[:18].strip():
        return False
    try:
        return bool(line[45:55].strip() and line[55:65].strip()) and fortran_float(line[45:55]) >= 0 \
            and fortran_float(line[55:65]) >= 0
    except ValueError:
        return False


def _marker(line: str) -> str:
    """Column 80 of a line, if it is a record line number."""
    return line[79] if len(line) >= 80 and line[79] in "1234" and not line[80:].strip() else ""


def _record(group, default_tmid, fail) -> Nasa7Fit:
    (n1, l1), *_ = group
    padded = [l.ljust(80) for _, l in group]
    first = padded[0]
    head = first[:18]
    if not head.strip():
        fail(n1, "columns 1–18 (the species name) are blank")
    name = head.split()[0]
    identifier = first[18:24].strip()
    if not first[17].isspace() and not first[18].isspace():  # a long name running into columns 19–24
        name, identifier = first[:24].split()[0], ""
    formula: list[tuple[str, int]] = []
    charge = 0
    slots = list(_ELEMENT_SLOTS)
    fifth = first[_FIFTH[0]:_FIFTH[1]]
    has_fifth = fifth[:2].strip().isalpha()
    if has_fifth:
        slots.append(_FIFTH)
    for a, b in slots:
        field = first[a:b]
        symbol, count_text = field[:2].strip(), field[2:].strip()
        if not symbol:
            continue
        if not symbol.isalpha():
            fail(n1, f"columns {a + 1}–{b}: {field!r} is not an element symbol and count (A2,I3)")
        try:
            count = int(round(fortran_float(count_text))) if count_text else 0
        except ValueError:
            fail(n1, f"columns {a + 3}–{b}: count {count_text!r} of element {symbol!r} is not a number")
        if count == 0:
            continue
        symbol = symbol.capitalize()
        if symbol == "E":
            charge = -count
        else:
            formula.append((symbol, count))
    if not formula and not charge:
        fail(n1, f"record {name!r} has no element in columns 25–44")
    phase = first[44].strip() or "G"
    try:
        tlow = fortran_float(first[45:55])
        thigh = fortran_float(first[55:65])
        tmid_text = first[65:73] if has_fifth else first[65:78]
        tmid = fortran_float(tmid_text) if tmid_text.strip() else default_tmid
    except ValueError:
        fail(n1, f"columns 46–73 of {name!r} should hold Tlow, Thigh, Tmid (F10.3, F10.3, F8.3): {first[45:78]!r}")
    if tmid is None:
        fail(n1, f"{name!r}: Tmid (columns 66–73) is blank and no THERMO ranges line gives a default")
    if not first[45:55].strip() or not first[55:65].strip():
        fail(n1, f"{name!r}: Tlow and Thigh (columns 46–65) must be given")
    coeffs = []
    for row, col in _COEFFS:
        field = padded[row][col:col + 15]
        try:
            coeffs.append(fortran_float(field))
        except ValueError:
            fail(group[row][0], f"columns {col + 1}–{col + 15} of {name!r}: {field.strip()!r} is not a number")
    high, low = tuple(coeffs[:7]), tuple(coeffs[7:])
    if not (tlow <= tmid <= thigh):
        fail(n1, f"{name!r}: Tmid {tmid:g} K is outside Tlow–Thigh ({tlow:g}–{thigh:g} K)")
    return Nasa7Fit(
        name=name, formula=tuple(formula), tlow=tlow, tmid=tmid, thigh=thigh, low=low, high=high,
        charge=charge, phase=phase, extra={"identifier": identifier, "line": n1},
    )
