"""Render a report document to one self-contained HTML page (Jinja2, autoescaped).

The page embeds its style sheet and its figures (PNG as base64 data URIs): it needs no
network and no other file, and prints on A4.
"""

from __future__ import annotations

import base64
import math
import re
from collections.abc import Mapping
from importlib import resources
from typing import Any

import jinja2
from markupsafe import Markup

__all__ = ["data_uri", "render_html"]

_TEMPLATES = resources.files("piezo.report") / "templates"


def _load(name: str) -> str:
    return (_TEMPLATES / name).read_text(encoding="utf-8")


def _fmt(value: Any, spec: str = "") -> str:
    """Format a number with ``spec``; None and non-finite values show as a dash."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if not math.isfinite(value):
            return "—"
        digits = re.search(r"\.(\d+)f$", spec)
        if digits:
            value = round(value, int(digits.group(1))) + 0.0  # no "-0.000"
        return format(value, spec) if spec else format(value, "g")
    if isinstance(value, int):
        return format(value, spec) if spec else str(value)
    if isinstance(value, list | tuple):
        return ", ".join(_fmt(v, spec) for v in value)
    return str(value)


def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FunctionLoader(lambda name: _load(name)),
        autoescape=True,  # every value is escaped unless marked safe in code
        undefined=jinja2.StrictUndefined,  # a missing key is an error, not a blank
        trim_blocks=False,
        lstrip_blocks=False,
        keep_trailing_newline=True,
    )
    env.filters["fmt"] = _fmt
    return env


def data_uri(png: bytes) -> str:
    """A PNG as a ``data:`` URI for an ``<img src>``."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def render_html(doc: Mapping[str, Any], figures: Mapping[str, bytes]) -> str:
    """The report page for ``doc`` (the JSON document) with ``figures`` (name -> PNG).

    Only the project's own style sheet is inserted unescaped; every value of ``doc`` is
    escaped by the template engine.
    """
    env = _environment()
    template = env.get_template("report.html.j2")
    uris = {name: data_uri(png) for name, png in figures.items()}
    return template.render(doc=doc, figures=uris, css=Markup(_load("report.css")))
