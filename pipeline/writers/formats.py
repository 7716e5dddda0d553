"""Number and field formatting, the per-species fragments, and the template environment.

Nothing here computes thermochemistry: each function turns a value into the
exact characters a file holds.  The fixed-column layout is that of NASA
TM-4513 (McBride, Gordon & Reno 1993): E15.8 coefficients, F10.3/F8.3
temperatures, element symbols (A2) with counts (I3).

Whole documents (``thermo.dat``, ``thermo.yaml``, ``REPORT.md``) are jinja2
templates in ``pipeline/templates`` that use the number formats below as
filters.  What one species contributes is made a thousand times per build,
so each fragment is one function here: :func:`record` (its four lines of
``thermo.dat``), :func:`species_entry` (its entry of ``thermo.yaml``),
:func:`report_row` (its row of ``REPORT.md``) and :func:`csv_tables`
(``tables/NAME.csv`` of many species at once).
"""

from __future__ import annotations

import functools
import json
import math
import re
from pathlib import Path

import numpy as np

TEMPLATES = Path(__file__).resolve().parent.parent / "templates"


def e15(x: float) -> str:
    """A coefficient as an E15.8 field (15 characters).

    >>> e15(3.5) + "|" + e15(-1.0208999e-3)
    ' 3.50000000E+00|-1.02089990E-03'
    """
    return e15_fields((x,))


def e15_fields(values) -> str:
    """Coefficients as consecutive E15.8 fields (15 characters each), no separators.

    No negative zero; magnitudes below 1e-99 (which would need a three-digit
    exponent) print as zero; a value that does not fit 15 columns raises ValueError.

    >>> e15_fields([2.5, -0.0, 1e-120, 6.02214076e23])
    ' 2.50000000E+00 0.00000000E+00 0.00000000E+00 6.02214076E+23'
    """
    xs = tuple(0.0 if abs(x) < 1e-99 else x + 0.0 for x in map(float, values))
    text = _E15 * len(xs) % xs
    if len(text) != 15 * len(xs):
        bad = next(x for x in xs if len(_E15 % x) != 15)
        raise ValueError(f"{bad!r} does not fit an E15.8 field")
    return text


_E15 = "%15.8E"


def f10(t: float) -> str:
    """A temperature [K] as an F10.3 field.

    >>> f10(298.15)
    '   298.150'
    """
    return _fixed(t, 10)


def f8(t: float) -> str:
    """A temperature [K] as an F8.3 field.

    >>> f8(1000.0)
    '1000.000'
    """
    return _fixed(t, 8)


def _fixed(t: float, width: int) -> str:
    text = f"{float(t):{width}.3f}"
    if len(text) != width:
        raise ValueError(f"{t!r} K does not fit an F{width}.3 field")
    return text


def element_field(pair) -> str:
    """One element of a record: symbol in two columns (A2), count in three (I3).

    ``None`` gives the five blank columns of an unused slot.

    >>> element_field(("O", 1)) + "|" + element_field(("E", -1)) + "|" + element_field(None) + "|"
    'O   1|E  -1|     |'
    """
    if pair is None:
        return " " * 5
    symbol, count = pair
    if len(symbol) > 2 or not -99 <= int(count) <= 999:
        raise ValueError(f"element {symbol!r} × {count} does not fit the A2,I3 field")
    return f"{symbol:<2}{int(count):>3d}"


def yaml_value(value) -> str:
    """A value as one YAML flow node, read back identically by YAML 1.1 and 1.2 loaders.

    Floats use Python's shortest round-trip repr, with a decimal point and a
    signed exponent so that YAML 1.1 loaders (PyYAML) also read a float;
    strings are double-quoted (JSON escapes); mappings and lists in flow style.

    >>> yaml_value({"ab": [1, 2.5e-05, None, True, "NO"]})
    '{ab: [1, 2.5e-05, null, true, "NO"]}'
    >>> yaml_value(1e-05), yaml_value(-3e+20), yaml_value(float("inf"))
    ('1.0e-05', '-3.0e+20', '.inf')
    """
    kind = type(value)
    if kind is float:
        return _yaml_float(value)
    if kind is list or kind is tuple:
        if value and set(map(type, value)) == _FLOAT:
            return _yaml_floats(value)
        return "[" + ", ".join([_yaml_float(v) if type(v) is float else yaml_value(v) for v in value]) + "]"
    if kind is dict:
        items = [f"{_KEYS.get(k) or yaml_key(k)}: {_yaml_float(v) if type(v) is float else yaml_value(v)}"
                 for k, v in value.items()]
        return "{" + ", ".join(items) + "}"
    if kind is str:
        return _yaml_string(value)
    if value is None:
        return "null"
    if kind is bool:
        return "true" if value else "false"
    if kind is int:
        return str(value)
    if isinstance(value, (bool, int, float, str, dict, list, tuple)):  # subclasses
        base = next(t for t in (bool, int, float, str, dict, list) if isinstance(value, t))
        return yaml_value(base(value))
    if hasattr(value, "item"):  # numpy scalars
        return yaml_value(value.item())
    raise TypeError(f"cannot write {type(value).__name__} to YAML")


def _yaml_string(value: str) -> str:
    if value.isascii() and value.isprintable() and '"' not in value and "\\" not in value:
        return f'"{value}"'
    text = json.dumps(value, ensure_ascii=False)
    for ch in "\u0085\u2028\u2029\ufeff":  # line breaks and BOM to YAML, not to JSON
        text = text.replace(ch, f"\\u{ord(ch):04x}")
    return text


def _yaml_float(value: float) -> str:
    text = repr(value + 0.0)
    if "n" in text:  # inf, nan
        return ".nan" if math.isnan(value) else ".inf" if value > 0 else "-.inf"
    if "." not in text:  # "1e-05": a mantissa without a point, which YAML 1.1 reads as a string
        return text.replace("e", ".0e")
    return text


def _yaml_floats(values) -> str:
    """A list of floats as a YAML flow sequence: :func:`_yaml_float` of each, made by
    one ``repr`` of the whole list (Python writes a list of floats as ``[x, y]``)
    when every float has a point (each repr holds at most one)."""
    text = repr([v + 0.0 for v in values])
    if "n" in text or text.count(".") != len(values):  # inf, nan, or a mantissa without a point
        return "[" + ", ".join(map(_yaml_float, values)) + "]"
    return text


_FLOAT = {float}


def float_texts(values: list) -> list[str]:
    """:func:`yaml_value` of each float of the list ``values``; cut from one ``repr`` of
    the list when that holds them (no inf, nan, negative zero, or repr without a point
    such as ``1e-05``), which is a float conversion per value and no call.

    >>> float_texts([2.5, 1.5e-08, -3.0]), float_texts([1e-05, -0.0, 1e400])
    (['2.5', '1.5e-08', '-3.0'], ['1.0e-05', '0.0', '.inf'])
    """
    text = repr(values)
    if "n" in text or text.count(".") != len(values) or "-0.0," in text or "-0.0]" in text or not values:
        return [_yaml_float(v) for v in values]
    return text[1:-1].split(", ")


def yaml_block(mapping: dict, indent: int = 0) -> str:
    """A mapping as YAML block lines ``key: flow value`` at ``indent`` spaces (no final newline).

    >>> print(yaml_block({"tmid": 1000.0, "cp_r": {"max_rel": 0.001}}, 4))
        tmid: 1000.0
        cp_r: {max_rel: 0.001}
    """
    pad = " " * indent
    return "\n".join([f"{pad}{_KEYS.get(k) or yaml_key(k)}: {_yaml_float(v) if type(v) is float else yaml_value(v)}"
                      for k, v in mapping.items()])


def yaml_key(key) -> str:
    """A mapping key: identifier-like keys plain, anything else quoted.

    >>> yaml_key("max_rel"), yaml_key("Y"), yaml_key("u(G)")
    ('max_rel', '"Y"', '"u(G)"')
    """
    text = str(key)
    plain = text.replace("_", "a").isalnum() and text.isascii() and text[:1].isalpha() and len(text) > 1
    if not plain or text.lower() in ("yes", "no", "on", "off", "true", "false", "null"):
        text = json.dumps(text)
    if type(key) is str and len(_KEYS) < 4096:  # the string keys met so far, to look up instead of recompute
        _KEYS[key] = text
    return text


_KEYS: dict = {}


def csv_number(x: float, fmt: str = ".6f") -> str:
    """A number for a CSV cell (no negative zero).

    >>> csv_number(-0.0), csv_number(1.5, ".3e")
    ('0.000000', '1.500e+00')
    """
    text = format(float(x) + 0.0, fmt)
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]
    return text


def csv_rows(values, formats) -> str:
    """The rows of a CSV table: ``values[i, j]`` printed with ``formats[j]``, cells
    joined by commas, every row ending in a newline; exactly as :func:`csv_number`
    prints each cell (no negative zero), made for the whole table at once.

    Fixed-point formats ``".Nf"`` (N = 1 … 6) of values below 1e8 in magnitude
    are made with array operations (:func:`_fixed_point_tables`); anything else
    with one ``%`` operation for the whole table.

    >>> print(csv_rows(np.array([[298.15, -1.0e-8, 0.0078125], [300.0, 1234.5678915, -2.5]]),
    ...                [".2f", ".6f", ".6f"]), end="")
    298.15,0.000000,0.007812
    300.00,1234.567892,-2.500000
    """
    X = np.asarray(values, dtype=float)
    return "".join(_csv_texts(X, tuple(formats), [X.shape[0]] if X.ndim else [1]))


def _csv_texts(X, formats: tuple, counts) -> list[str]:
    """:func:`csv_rows` of ``X``, cut into the texts of ``counts[0]``, ``counts[1]``, … consecutive rows."""
    if X.ndim != 2 or X.shape[1] != len(formats) or not all(_fixed_point(f) for f in formats):
        text = "".join(",".join(csv_number(v, f) for v, f in zip(row, formats)) + "\n" for row in X)
    else:
        if X.size:
            decimals = tuple(int(f[1]) for f in formats)
            if min(decimals) >= 1 and max(decimals) <= 6 and X.max() < 1e8 and X.min() > -1e8:  # False for nan
                C = X.T
                return _fixed_point_tables(C if C.flags.c_contiguous else np.ascontiguousarray(C), decimals, counts)
        text = _rows_format(formats, X.shape[0]) % tuple((X + 0.0).ravel().tolist())
        if "-0." in text:  # perhaps a tiny negative printed as −0
            text = _NEGATIVE_ZERO.sub(r"\1", text)
    if len(counts) == 1:
        return [text]
    row_ends = np.flatnonzero(np.frombuffer(text.encode("ascii"), dtype=np.uint8) == 10) + 1  # after each newline
    cuts = np.concatenate(([0], row_ends))[np.cumsum([0, *counts])].tolist()
    return [text[a:b] for a, b in zip(cuts[:-1], cuts[1:])]


#: a whole cell that prints zero with a minus sign (the sign is dropped, as csv_number does)
_NEGATIVE_ZERO = re.compile(r"(?<![^,\n])-(0\.0+)(?![^,\n])")


def _fixed_point(fmt: str) -> bool:
    return len(fmt) == 3 and fmt[0] == "." and fmt[1].isdigit() and fmt[2] == "f"


@functools.lru_cache(maxsize=64)
def _rows_format(formats: tuple, rows: int) -> str:
    """One ``%`` format string for a whole table of ``rows`` rows."""
    return ("%" + ",%".join(formats) + "\n") * rows


_POW10 = np.array([1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6])  # exact doubles
#: word numbers in :func:`_words`: "000" … "999", then "0" … "999", then "-0" … "-999", then ""
_UNPADDED, _EMPTY = 1000, 3000


@functools.lru_cache(maxsize=16)
def _words(decimals: tuple):
    """The 4-byte words :func:`_fixed_point_tables` spells cells with (NUL-padded), and per
    column j the first word of its decimals block: with ``decimals[j]`` = N ≤ 2 one word
    ".dd" + separator, else two, ".ddd" and the last N − 3 digits + separator (the
    separator a comma, a newline after the last column).  The words of a block are
    numbered by the first three decimals (the first three of six: the decimals are
    counted in millionths), and the second word of a block follows 1000 words later."""
    words = [f"{i:03d}" for i in range(1000)] + [str(i) for i in range(1000)] + [f"-{i}" for i in range(1000)] + [""]
    first: dict = {}
    blocks = []
    for j, d in enumerate(decimals):
        sep = "\n" if j == len(decimals) - 1 else ","
        if (d, sep) not in first:
            first[(d, sep)] = len(words)
            if d <= 2:
                words += [f".{i:03d}"[:1 + d] + sep for i in range(1000)]
            else:
                words += [f".{i:03d}" for i in range(1000)] + [f"{i:03d}"[:d - 3] + sep for i in range(1000)]
        blocks.append(first[(d, sep)])
    lut = np.frombuffer("".join(w.ljust(4, "\0") for w in words).encode("ascii"), dtype=np.uint32)
    return lut, tuple(blocks)


@functools.lru_cache(maxsize=64)
def _runs(decimals: tuple) -> tuple:
    """The columns in runs of equal decimals: (first column, end, decimals)."""
    runs, j = [], 0
    while j < len(decimals):
        k = j
        while k < len(decimals) and decimals[k] == decimals[j]:
            k += 1
        runs.append((j, k, decimals[j]))
        j = k
    return tuple(runs)


def _fixed_point_tables(C, decimals: tuple, counts) -> list[str]:
    """:func:`csv_rows` of the table whose column j is ``C[j]`` (|C| < 1e8, finite), with
    ``decimals[j]`` (1 … 6) decimals in column j, by array operations; cut into the texts
    of ``counts[0]``, ``counts[1]``, … consecutive rows.

    Each cell is rounded to the integer round(x·10^N) exactly — the product is split
    into its double and its rounding error (Dekker 1971), so the rounding is that of
    the binary value, ties to even, as ``"%.Nf"`` does — and spelt in words of up to
    four characters (:func:`_words`) looked up by the digit groups of that integer:
    the integer part in groups of three, the leading group unpadded and with the sign,
    a second and third group only in a column where some cell reaches a thousand or a
    million; then the decimals in one or two words ending in the separator.  Every step
    is exact: the integers stay below 1e14 < 2**53.  The columns of equal decimals are
    worked on together, with the power of ten a scalar.

    Reference: T. J. Dekker, "A floating-point technique for extending the
    available precision", Numer. Math. 18, 224–242 (1971).
    """
    rows = C.shape[1]
    lut, blocks = _words(decimals)
    work = []  # per run: first column, end, its int part, its leading word (sign included), its decimal words
    groups = []  # words of the integer part per column
    for j0, j1, d in _runs(decimals):
        B = C[j0:j1]
        scale = _POW10[d]
        p = B * scale
        n = np.rint(p)  # nearest integer to p, ties to even
        r = np.subtract(p, n, out=p)  # exact
        if np.abs(r).max() == 0.5:  # p halfway: the product's error decides (used there only: |C| ≥ 5e-7, no underflow)
            c = 134217729.0 * B  # Dekker's split: B = bh + bl, 26 bits each; bh·scale, bl·scale exact
            bh = c - (c - B)
            err = (bh * scale - B * scale) + (B - bh) * scale  # B·scale = p + err exactly
            n += (r == 0.5) & (err > 0.0)
            n -= (r == -0.5) & (err < 0.0)
        lead = (n < 0.0) * 1000.0 + _UNPADDED  # "0" … "999", or "-0" … "-999"; a cell printing as zero has n = 0
        a = np.abs(n, out=n)
        ip = np.floor(a / scale)  # integer part, and the decimals in millionths
        fp = a - ip * scale
        if d < 6:
            fp *= _POW10[6 - d]
        f1 = np.floor(fp / 1e3)
        work.append((j0, j1, d, ip, lead, f1, fp - f1 * 1e3))
        groups += (0 if x < 1e3 else 1 if x < 1e6 else 2 for x in ip.max(axis=1).tolist())
    widths = [g + (2 if d <= 2 else 3) for g, d in zip(groups, decimals)]
    ends = np.cumsum(widths).tolist()
    W = np.empty((ends[-1], rows))  # the words of the cells, row by row of W, column by column of the CSV
    for j0, j1, d, ip, lead, f1, f0 in work:
        # the columns of the run in stretches of equal words: their words are rows of W at a stride
        j = j0
        while j < j1:
            k = j
            while k < j1 and widths[k] == widths[j] and blocks[k] == blocks[j]:
                k += 1
            w, g, at = widths[j], groups[j], ends[j] - widths[j]
            lj, ipj = lead[j - j0:k - j0], ip[j - j0:k - j0]
            if g == 0:
                np.add(lj, ipj, out=W[at:at + w * (k - j):w])
            else:
                g2 = np.floor(ipj / 1e6)
                rest = ipj - g2 * 1e6
                g1 = np.floor(rest / 1e3)
                g0 = rest - g1 * 1e3
                if g == 1:
                    mid = g1 > 0.0
                    W[at:at + w * (k - j):w] = np.where(mid, lj + g1, _EMPTY)
                    W[at + 1:at + w * (k - j):w] = np.where(mid, g0, lj + g0)
                else:
                    big, mid = g2 > 0.0, g1 > 0.0
                    W[at:at + w * (k - j):w] = np.where(big, lj + g2, _EMPTY)
                    W[at + 1:at + w * (k - j):w] = np.where(big, g1, np.where(mid, lj + g1, _EMPTY))
                    W[at + 2:at + w * (k - j):w] = np.where(big | mid, g0, lj + g0)
            np.add(f1[j - j0:k - j0], blocks[j], out=W[at + g + 1:at + w * (k - j):w])
            if d > 2:
                np.add(f0[j - j0:k - j0], blocks[j] + 1000, out=W[at + g + 2:at + w * (k - j):w])
            j = k
    raw = lut.take(W.astype(np.intp)).T.tobytes()
    size = 4 * ends[-1]
    cuts = np.cumsum([0, *counts]).tolist()
    return [raw[size * a:size * b].translate(None, b"\0").decode("ascii") for a, b in zip(cuts[:-1], cuts[1:])]


def md_number(x: float, fmt: str = ".3f") -> str:
    """A number for a Markdown table cell (``—`` for None or NaN).

    >>> md_number(1.23456), md_number(None), md_number(2.5e-7, ".1e")
    ('1.235', '—', '2.5e-07')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "—"
    return csv_number(x, fmt)


# --------------------------------------------------------------------------
# One species' fragments
# --------------------------------------------------------------------------


def record(name: str, identifier: str, elements, phase: str, tlow: float, tmid: float, thigh: float,
           low, high) -> str:
    """One species' four 80-column lines of thermo.dat (NASA TM-4513 layout, docs/format.md).

    Line 1: name (columns 1–18), ``identifier`` (19–24), four element fields
    (25–44), phase (45), Tlow, Thigh (F10.3) and Tmid (F8.3) in 46–73, a fifth
    element (74–78), then ``1`` in column 80.  Lines 2–4: the high range a1 … a7,
    then the low range, five E15.8 fields a line, the line number in column 80.
    ``elements`` is a list of (symbol, count), at most five; the caller checks the
    widths of name and identifier (:func:`pipeline.writers.record_text`).

    >>> a = [2.5, 0.0, 0.0, 0.0, 0.0, -745.375, 4.37967417]
    >>> print(record("AR", "9F86D0", [("Ar", 1)], "G", 200.0, 1000.0, 6000.0, a, a), end="")
    AR                9F86D0Ar  1               G   200.000  6000.0001000.000      1
     2.50000000E+00 0.00000000E+00 0.00000000E+00 0.00000000E+00 0.00000000E+00    2
    -7.45375000E+02 4.37967417E+00 2.50000000E+00 0.00000000E+00 0.00000000E+00    3
     0.00000000E+00 0.00000000E+00-7.45375000E+02 4.37967417E+00                   4
    """
    slots = list(elements[:4]) + [None] * (4 - len(elements[:4]))
    fifth = elements[4] if len(elements) > 4 else None
    c = e15_fields(tuple(high) + tuple(low))
    return (f"{'%-18s%-6s' % (name, identifier)}{''.join(map(element_field, slots))}{phase}"
            f"{f10(tlow)}{f10(thigh)}{f8(tmid)}{element_field(fifth)} 1\n"
            f"{c[:75]}    2\n{c[75:150]}    3\n{c[150:]}                   4\n")


def species_entry(name: str, composition: dict, charge: int, phase: str, molar_mass: float, tmid: float,
                  ranges: list[dict], reference_state: dict, quality: dict | str, uncertainty: dict | None,
                  sources, species_file: str, sha256: str, version: str, model: dict, pressure_pa: float) -> str:
    """One species' entry in the ``species:`` list of thermo.yaml (docs/format.md), ending in a newline.

    Top-level keys in block style, each value a flow node (:func:`yaml_value`);
    ``ranges`` (dicts with ``tmin``, ``tmax``, ``coefficients``) and ``sources``
    as block lists; ``quality`` and ``uncertainty`` as nested blocks
    (:func:`yaml_block`; ``quality`` may also be given as its block's lines, already
    made) — ``fit_quality: {}`` when there is none, no
    ``uncertainty`` key when there is none.

    >>> print(species_entry("AR", {"Ar": 1}, 0, "G", 0.039948, 1000.0,
    ...     [{"tmin": 200.0, "tmax": 1000.0, "coefficients": [2.5, 0.0]}], {"s298": 154.8}, {}, None,
    ...     ["from memory"], "Ar.yaml", "9f86d0", "0.1.0", {"pressure": "bar"}, 1e5), end="")
    - name: "AR"
      composition: {Ar: 1}
      charge: 0
      phase: "G"
      molar_mass: 0.039948
      tmid: 1000.0
      ranges:
      - {tmin: 200.0, tmax: 1000.0, coefficients: [2.5, 0.0]}
      reference_state: {s298: 154.8}
      fit_quality: {}
      sources:
      - "from memory"
      provenance:
        species_file: "Ar.yaml"
        sha256: "9f86d0"
        tool_version: "0.1.0"
        model: {pressure: "bar"}
        reference_pressure: 100000.0
    """
    y = yaml_value
    floats = [molar_mass, tmid]
    for r in ranges:
        floats += (r["tmin"], r["tmax"], *r["coefficients"])
    floats += reference_state.values()
    floats.append(pressure_pa)
    if set(map(type, floats)) == _FLOAT:  # the usual entry: its floats converted together, one % format
        key = (tuple(len(r["coefficients"]) for r in ranges), tuple(reference_state))
        fmt = _ENTRY_FORMATS.get(key) or _entry_format(key)
        texts = float_texts(floats)
        head = fmt % (_yaml_string(name) if type(name) is str else y(name), _flow_cached(composition),
                      y(charge), _yaml_string(phase) if type(phase) is str else y(phase), *texts[:-1])
        tail = texts[-1]
    else:
        head = (f"- name: {y(name)}\n  composition: {y(composition)}\n  charge: {y(charge)}\n  phase: {y(phase)}\n"
                f"  molar_mass: {y(molar_mass)}\n  tmid: {y(tmid)}\n  ranges:\n"
                + "".join([f"  - {{tmin: {y(r['tmin'])}, tmax: {y(r['tmax'])}, coefficients: {y(r['coefficients'])}}}\n"
                           for r in ranges])
                + f"  reference_state: {y(reference_state)}\n")
        tail = y(pressure_pa)
    out = [head]
    if quality and type(quality) is not str:
        quality = yaml_block(quality, 4)
    out.append(f"  fit_quality:\n{quality}\n" if quality else "  fit_quality: {}\n")
    if uncertainty:
        out.append(f"  uncertainty:\n{yaml_block(uncertainty, 4)}\n")
    out.append("  sources:\n")
    out += [f"  - {y(source)}\n" for source in sources]
    out.append(f"  provenance:\n    species_file: {y(species_file)}\n    sha256: {y(sha256)}\n"
               f"    tool_version: {y(version)}\n    model: {_flow_cached(model)}\n    reference_pressure: {tail}\n")
    return "".join(out)


_ENTRY_FORMATS: dict = {}


def _entry_format(key: tuple) -> str:
    """The ``%`` format of the head of an entry (name … reference_state) whose ranges have
    ``key[0]`` coefficients and whose reference state has the keys ``key[1]``: four
    nodes, then the floats' texts."""
    lines = ["- name: %s", "  composition: %s", "  charge: %s", "  phase: %s", "  molar_mass: %s", "  tmid: %s",
             "  ranges:"]
    lines += ["  - {tmin: %s, tmax: %s, coefficients: [" + ", ".join(["%s"] * n) + "]}" for n in key[0]]
    lines.append("  reference_state: {" + ", ".join(f"{yaml_key(k).replace('%', '%%')}: %s" for k in key[1]) + "}")
    fmt = "\n".join(lines) + "\n"
    if len(_ENTRY_FORMATS) < 256:
        _ENTRY_FORMATS[key] = fmt
    return fmt


_FLOWS: dict = {}


def _flow_cached(value) -> str:
    """:func:`yaml_value` of ``value``, remembered for a small mapping of string keys and
    scalar values (a formula, the model settings: the same for many species) by its
    items and their types."""
    if type(value) is dict:
        kinds = tuple(map(type, value.values()))
        if _SCALARS.issuperset(kinds) and _STR.issuperset(map(type, value)):
            key = (tuple(value.items()), kinds)
            text = _FLOWS.get(key)
            if text is None:
                if len(_FLOWS) > 4096:
                    _FLOWS.clear()
                text = _FLOWS[key] = yaml_value(value)
            return text
    return yaml_value(value)


_SCALARS = frozenset((str, int, float, bool, type(None)))
_STR = frozenset((str,))


def report_row(name: str, formula: str, dhf298: float, s298: float, cp298: float, tmid: float, tmid_auto: bool,
               cp_error: float | None, h_error: float | None, s_error: float | None, continuity: float,
               u_g298: float | None, u_g1000: float | None, plot: str, warnings: str) -> str:
    """One species' row of the species table of REPORT.md (columns in ``REPORT.md.j2``), ending in a newline.

    ΔfH°298 [kJ/mol], S°298 and Cp°298 [J/mol/K] with three decimals, Tmid [K]
    with one (`` (auto)`` if searched), max |ΔCp|/Cp, max |ΔH| [J/mol], max |ΔS|
    [J/mol/K] and the jump at Tmid, u(G°) at 298.15 and 1000 K [kJ/mol];
    ``—`` for a number that is None (:func:`md_number`).

    >>> report_row("AR", "Ar1", 0.0, 154.846, 20.786, 1000.0, False, 1e-12, 0.0, 0.0, 0.0, None, None, "", "")
    '| `AR` | Ar1 | 0.000 | 154.846 | 20.786 | 1000.0 | 1.00e-12 | 0.00 | 0.0000 | 0.0e+00 | — / — |  |  |\\n'
    """
    return (f"| `{name}` | {formula} | {md_number(dhf298, '.3f')} | {md_number(s298, '.3f')} | "
            f"{md_number(cp298, '.3f')} | {md_number(tmid, '.1f')}{' (auto)' if tmid_auto else ''} | "
            f"{md_number(cp_error, '.2e')} | {md_number(h_error, '.2f')} | {md_number(s_error, '.4f')} | "
            f"{md_number(continuity, '.1e')} | {md_number(u_g298, '.2f')} / {md_number(u_g1000, '.2f')} | "
            f"{plot} | {warnings} |\n")


def csv_tables(header, values, formats, counts) -> list[str]:
    """The texts of several ``tables/NAME.csv`` with the same columns, made at once: each
    the column names joined by commas, then its ``counts[i]`` consecutive rows of
    ``values`` (:func:`csv_rows` of the whole of ``values``, cut at the rows; the fast path
    cuts the bytes before their padding is taken out, finding no newline).

    >>> csv_tables(["T [K]", "Cp [J/mol/K]"], np.array([[298.15, 20.786], [300.0, 20.786], [298.15, 29.1]]),
    ...            [".2f", ".6f"], [2, 1])
    ['T [K],Cp [J/mol/K]\\n298.15,20.786000\\n300.00,20.786000\\n', 'T [K],Cp [J/mol/K]\\n298.15,29.100000\\n']
    """
    head = ",".join(header) + "\n"
    return [head + text for text in _csv_texts(np.asarray(values, dtype=float), tuple(formats), counts)]


#: the number formats the document templates use
FILTERS = {"f10": f10, "yaml": yaml_value, "md": md_number}


@functools.lru_cache(maxsize=None)
def environment():
    """The jinja2 environment over ``pipeline/templates`` (built once, on first use)."""
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(TEMPLATES)),
        autoescape=False,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
        undefined=jinja2.StrictUndefined,
    )
    env.filters.update(FILTERS)
    env.globals.clear()  # the templates use only their context and filters; an empty table keeps each render cheap
    return env


@functools.lru_cache(maxsize=None)
def template(name: str):
    """A compiled template of ``pipeline/templates`` by file name."""
    return environment().get_template(name)


def render(template_name: str, /, **context) -> str:
    """Render the template ``template_name`` with ``context``."""
    return template(template_name).render(**context)
