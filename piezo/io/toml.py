"""Writing TOML: the one renderer of values and tables (pure: it returns text).

Every TOML file piezo writes (stimulus sidecars, derived limit specs, profiles) renders
its values here, so they all read back exactly with :func:`piezo.io.text.parse_toml`:
floats with :func:`repr` (shortest text that round-trips), strings as basic strings with
every control character escaped, arrays of those.

May import: the standard library.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

__all__ = ["toml_key", "toml_table", "toml_value"]

_ESCAPES = {
    '"': '\\"',
    "\\": "\\\\",
    "\b": "\\b",
    "\t": "\\t",
    "\n": "\\n",
    "\f": "\\f",
    "\r": "\\r",
}


def _string(text: str) -> str:
    out = []
    for c in text:
        if c in _ESCAPES:
            out.append(_ESCAPES[c])
        elif ord(c) < 0x20 or ord(c) == 0x7F:
            out.append(f"\\u{ord(c):04x}")
        else:
            out.append(c)
    return '"' + "".join(out) + '"'


def toml_value(value: Any) -> str:
    """Render one value as TOML text.

    Booleans, integers, finite floats, strings and lists or tuples of those. A float is
    written with :func:`repr`, so it reads back to the same number.

    Raises
    ------
    ValueError
        For a non-finite float (TOML's ``nan``/``inf`` would not survive as a limit).
    TypeError
        For any other type.

    Examples
    --------
    >>> toml_value(0.1), toml_value(3), toml_value(True)
    ('0.1', '3', 'true')
    >>> print(toml_value('PD-(?P<serial>\\\\d{5})'))
    "PD-(?P<serial>\\\\d{5})"
    >>> toml_value([1.5, "a\\nb"])
    '[1.5, "a\\\\nb"]'
    >>> import tomllib
    >>> tomllib.loads("x = " + toml_value("tab\\t\\x7f'\\""))["x"] == "tab\\t\\x7f'\\""
    True
    """
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"cannot write {value!r} to TOML")
        return repr(value)
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, list | tuple):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} to TOML")


def toml_key(key: str) -> str:
    """A bare key when TOML allows one, else a quoted key.

    Examples
    --------
    >>> toml_key("sample_rate_hz"), toml_key("a b")
    ('sample_rate_hz', '"a b"')
    """
    if key and all(c.isascii() and (c.isalnum() or c in "_-") for c in key):
        return key
    return _string(key)


def toml_table(name: str, values: Mapping[str, Any]) -> list[str]:
    """Lines of a ``[name]`` table; keys whose value is None are left out.

    Examples
    --------
    >>> toml_table("sensor", {"name": "disc", "serial": None, "capacitance": "47 nF"})
    ['[sensor]', 'name = "disc"', 'capacitance = "47 nF"']
    """
    lines = [f"[{name}]"]
    lines += [f"{toml_key(k)} = {toml_value(v)}" for k, v in values.items() if v is not None]
    return lines
