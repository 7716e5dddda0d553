"""Safe YAML for species and settings files: YAML 1.2 core-schema scalars, no duplicate keys.

Only ``true``/``false`` are booleans, so names such as ``NO``, ``ON``, ``Y`` or
``off`` stay strings; ``1e3`` is a number; ``017`` is 17; duplicate keys and
documents that contain themselves are errors; no tag can construct a Python
object.  Needs only PyYAML (no numerics), so a build can read files while the
numerical libraries load.
"""

from __future__ import annotations

import math
import re
from typing import Any

import yaml


_Base = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class SpeciesLoader(_Base):  # type: ignore[misc, valid-type]
    """Safe YAML loader with YAML 1.2 core-schema implicit types."""


SpeciesLoader.yaml_implicit_resolvers = {}
_RESOLVERS = [
    ("tag:yaml.org,2002:bool", r"^(?:true|True|TRUE|false|False|FALSE)$", list("tTfF")),
    ("tag:yaml.org,2002:null", r"^(?:~|null|Null|NULL|)$", ["~", "n", "N", ""]),
    ("tag:yaml.org,2002:int", r"^[-+]?[0-9]+$", list("-+0123456789")),
    (
        "tag:yaml.org,2002:float",
        r"^(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
        r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))$",
        list("-+.0123456789"),
    ),
]
for _tag, _regex, _first in _RESOLVERS:
    SpeciesLoader.add_implicit_resolver(_tag, re.compile(_regex), _first)


def _check_key(node, key_node, key, seen) -> None:
    """Refuse a mapping key that is not a plain value, or that ``seen`` has already."""
    try:
        hash(key)
    except TypeError:
        raise yaml.constructor.ConstructorError(
            "while reading a mapping", node.start_mark, "a key must be a plain value", key_node.start_mark,
        ) from None
    if key in seen:
        raise yaml.constructor.ConstructorError(
            "while reading a mapping", node.start_mark, f"duplicate key {key!r}", key_node.start_mark,
        )


def _construct_mapping(loader, node, deep=False):
    if not isinstance(node, yaml.MappingNode):
        raise yaml.constructor.ConstructorError(
            None, None, f"expected a mapping, found {node.id}", node.start_mark
        )
    seen: dict[Any, Any] = {}
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=deep)
        _check_key(node, key_node, key, seen)
        seen[key] = loader.construct_object(value_node, deep=deep)
    return seen


SpeciesLoader.add_constructor("tag:yaml.org,2002:map", _construct_mapping)


def _construct_int(loader, node):
    """YAML 1.2 core-schema integers are decimal: ``017`` is 17 (YAML 1.1 would read octal)."""
    return int(loader.construct_scalar(node), 10)


SpeciesLoader.add_constructor("tag:yaml.org,2002:int", _construct_int)


_STR, _SEQ, _MAP = "tag:yaml.org,2002:str", "tag:yaml.org,2002:seq", "tag:yaml.org,2002:map"
_INT, _FLOAT = "tag:yaml.org,2002:int", "tag:yaml.org,2002:float"
_BOOL, _NULL = "tag:yaml.org,2002:bool", "tag:yaml.org,2002:null"
#: the implicit tag of a plain scalar by its first character: [(tag, regex)] in order
_BY_FIRST: dict[str, list[tuple[str, re.Pattern]]] = {}
for _tag, _regex, _first in _RESOLVERS:
    for _ch in _first:
        _BY_FIRST.setdefault(_ch, []).append((_tag, re.compile(_regex)))
_CORE = {tag: re.compile(regex) for tag, regex, _ in _RESOLVERS}
_SPECIAL_FLOAT = {".inf": math.inf, "+.inf": math.inf, "-.inf": -math.inf, ".nan": math.nan}


def _resolve(self, kind, value, implicit):
    """The tag of a node (Resolver.resolve for :data:`_RESOLVERS`, without path resolvers)."""
    if kind is yaml.ScalarNode:
        if implicit[0]:
            for tag, regex in _BY_FIRST.get(value[:1], ()):
                if regex.match(value):
                    return tag
        return _STR
    return _SEQ if kind is yaml.SequenceNode else _MAP


SpeciesLoader.resolve = _resolve


def _native(loader, node, memo: dict, busy: set) -> Any:
    """The Python value of a composed node: the core-schema types of :class:`SpeciesLoader`,
    without its generic constructor machinery; any other tag goes to the loader's own
    constructors (so a ``!!python/...`` tag is refused exactly as there)."""
    tag = node.tag
    if type(node) is yaml.ScalarNode:
        v = node.value
        if tag == _STR:
            return v
        if tag in _CORE and _CORE[tag].match(v):  # an explicit tag on another spelling: below
            if tag == _FLOAT:
                return _SPECIAL_FLOAT.get(v.lower()) if v[-1:] in "fFnN" else float(v)
            if tag == _INT:
                return int(v, 10)
            return None if tag == _NULL else v in ("true", "True", "TRUE")
        return loader.construct_object(node, deep=True)
    key = id(node)
    if key in memo:  # an alias: the same object, as PyYAML gives (no exponential copies)
        return memo[key]
    if key in busy:
        raise yaml.constructor.ConstructorError(None, None, "a recursive alias is not allowed", node.start_mark)
    busy.add(key)
    if tag == _SEQ and type(node) is yaml.SequenceNode:
        out: Any = [_native(loader, item, memo, busy) for item in node.value]
    elif tag == _MAP and type(node) is yaml.MappingNode:
        out = {}
        for key_node, value_node in node.value:
            k = _native(loader, key_node, memo, busy)
            _check_key(node, key_node, k, out)
            out[k] = _native(loader, value_node, memo, busy)
    else:
        out = loader.construct_object(node, deep=True)
    busy.discard(key)
    memo[key] = out
    return out


def load_yaml(text: str) -> Any:
    """Parse YAML text with :class:`SpeciesLoader` (raises ``yaml.YAMLError``).

    libyaml (when PyYAML has it) composes the node graph; :func:`_native` turns
    it into Python values.  Same result as ``yaml.load(text, SpeciesLoader)``
    (tested), at about half the cost.

    >>> load_yaml("name: NO\\nflag: off\\nx: 1e3")
    {'name': 'NO', 'flag': 'off', 'x': 1000.0}
    """
    loader = SpeciesLoader(text)
    try:
        node = loader.get_single_node()
        return None if node is None else _native(loader, node, {}, set())
    finally:
        loader.dispose()
