"""Plain JSON values from result objects: the one conversion every output uses.

Result objects are dataclasses over numbers and numpy arrays. :func:`to_jsonable` turns
them into JSON values: dataclasses become objects, numpy scalars and arrays numbers and
lists, paths strings, and non-finite floats ``null`` (JSON has no NaN or infinity).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, is_dataclass
from pathlib import Path
from typing import Any, TypeVar

import numpy as np

__all__ = ["reference_key", "shared_value", "to_jsonable"]

T = TypeVar("T")


def to_jsonable(obj: Any) -> Any:
    """Turn result objects into plain JSON values.

    Examples
    --------
    >>> import numpy as np
    >>> to_jsonable({"level_db": np.float64(94.0), "peaks": np.array([1.0, np.nan])})
    {'level_db': 94.0, 'peaks': [1.0, None]}
    """
    if is_dataclass(obj) and not isinstance(obj, type):
        return to_jsonable(asdict(obj))
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def shared_value(values: Sequence[T]) -> T | None:
    """The one value every channel has, or None when they differ (JSON ``null``).

    A document's top-level ``unit``, ``level_unit`` and ``quantity`` are the channels'
    common value; when the channels differ each channel entry states its own.

    Examples
    --------
    >>> shared_value(["Pa", "Pa"]), shared_value(["Pa", "m/s²"])
    ('Pa', None)
    """
    return values[0] if values and all(v == values[0] for v in values) else None


def reference_key(unit: str) -> str:
    """The JSON key of a level reference, named by its unit (docs/glossary.md).

    Pa gives ``reference_pa``, 1 V ``reference_v``; the mechanical units are spelt out
    (``m/s²`` gives ``reference_m_per_s2``).

    Examples
    --------
    >>> reference_key("Pa"), reference_key("V"), reference_key("m/s²")
    ('reference_pa', 'reference_v', 'reference_m_per_s2')
    """
    slug = unit.replace("²", "2").replace("/", "_per_").lower()
    return f"reference_{slug}"
