"""Number and field formatting for the templates (jinja2 filters), and the template environment.

Nothing here computes thermochemistry: each function turns a value into the
exact characters a file holds.  The fixed-column layout is that of NASA
TM-4513 (McBride, Gordon & Reno 1993): E15.8 coefficients, F10.3/F8.3
temperatures, element symbols (A2) with counts (I3).
"""

from __future__ import annotations

import functools
import json
import math
from pathlib import Path

TEMPLATES = Path(__file__).resolve().parent.parent / "templates"


def e15(x: float) -> str:
    """A coefficient as an E15.8 field (15 characters).

    >>> e15(3.5) + "|" + e15(-1.0208999e-3)
    ' 3.50000000E+00|-1.02089990E-03'
    """
    x = float(x) + 0.0  # no negative zero
    if abs(x) < 1e-99:
        x = 0.0
    text = f"{x:15.8E}"
    if len(text) != 15:
        raise ValueError(f"{x!r} does not fit an E15.8 field")
    return text


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
        return "[" + ", ".join(_yaml_float(v) if type(v) is float else yaml_value(v) for v in value) + "]"
    if kind is dict:
        return "{" + ", ".join(f"{yaml_key(k)}: {yaml_value(v)}" for k, v in value.items()) + "}"
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
    if "e" in text:
        mantissa, exponent = text.split("e")
        if "." not in mantissa:
            mantissa += ".0"
        return f"{mantissa}e{exponent}"
    return text


def yaml_block(mapping: dict, indent: int = 0) -> str:
    """A mapping as YAML block lines ``key: flow value`` at ``indent`` spaces (no final newline).

    >>> print(yaml_block({"tmid": 1000.0, "cp_r": {"max_rel": 0.001}}, 4))
        tmid: 1000.0
        cp_r: {max_rel: 0.001}
    """
    pad = " " * indent
    return "\n".join(f"{pad}{yaml_key(k)}: {yaml_value(v)}" for k, v in mapping.items())


@functools.lru_cache(maxsize=4096)
def yaml_key(key) -> str:
    """A mapping key: identifier-like keys plain, anything else quoted.

    >>> yaml_key("max_rel"), yaml_key("Y"), yaml_key("u(G)")
    ('max_rel', '"Y"', '"u(G)"')
    """
    key = str(key)
    plain = key.replace("_", "a").isalnum() and key.isascii() and key[:1].isalpha() and len(key) > 1
    return key if plain and key.lower() not in ("yes", "no", "on", "off", "true", "false", "null") else json.dumps(key)


def csv_number(x: float, fmt: str = ".6f") -> str:
    """A number for a CSV cell (no negative zero).

    >>> csv_number(-0.0), csv_number(1.5, ".3e")
    ('0.000000', '1.500e+00')
    """
    text = format(float(x) + 0.0, fmt)
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]
    return text


def md_number(x: float, fmt: str = ".3f") -> str:
    """A number for a Markdown table cell (``—`` for None or NaN).

    >>> md_number(1.23456), md_number(None), md_number(2.5e-7, ".1e")
    ('1.235', '—', '2.5e-07')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "—"
    return csv_number(x, fmt)


FILTERS = {
    "e15": e15, "f10": f10, "f8": f8, "element": element_field, "yaml": yaml_value,
    "yaml_key": yaml_key, "yaml_block": yaml_block, "csv": csv_number, "md": md_number,
}


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
    return env


@functools.lru_cache(maxsize=None)
def template(name: str):
    """A compiled template of ``pipeline/templates`` by file name."""
    return environment().get_template(name)


def render(template_name: str, /, **context) -> str:
    """Render the template ``template_name`` with ``context``."""
    return template(template_name).render(**context)
