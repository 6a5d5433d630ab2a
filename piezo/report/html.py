"""Render piezo's HTML pages: the capture report and the batch pages (Jinja2, autoescaped).

One template system for every page: the templates in ``piezo/report/templates/`` share
one frame (``_page.html.j2``), one set of pieces (``_macros.html.j2``: severity badges,
figures) and one style sheet (``piezo.css``). Each page embeds the style sheet and its
figures (PNG as base64 data URIs): it needs no network and no other file, and prints on A4.

Examples
--------
>>> page = render_page("batch_capture.html.j2", row={"file": "<a>.wav", "serial": "",
...     "verdict": "pass", "error": None, "content_sha256": "0" * 64, "failed_limits": [],
...     "warnings": [], "not_evaluable": []}, spec={"name": "lot", "sha256": "1" * 64},
...     lines=[], png=None)
>>> "&lt;a&gt;.wav" in page and "<a>.wav" not in page
True
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

from piezo import __version__

__all__ = ["data_uri", "environment", "render_html", "render_page"]

_TEMPLATES = resources.files("piezo.report") / "templates"
#: The one style sheet of every page.
STYLESHEET = "piezo.css"


def _load(name: str) -> str:
    return (_TEMPLATES / name).read_text(encoding="utf-8")


def _fmt(value: Any, spec: str = "") -> str:
    """Format a number with ``spec``; None and non-finite values show as a dash.

    Examples
    --------
    >>> _fmt(-0.0001, ".3f"), _fmt(None), _fmt(float("nan"), ".4g"), _fmt(12345.678, ".4g")
    ('0.000', '—', '—', '1.235e+04')
    """
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


def environment() -> jinja2.Environment:
    """The Jinja2 environment of every piezo page: package templates, autoescape on,
    a missing value an error (StrictUndefined), the ``fmt`` number filter.

    Examples
    --------
    Values are escaped, and ``fmt`` shows a missing number as a dash:

    >>> env = environment()
    >>> env.from_string("{{ name }}: {{ value | fmt('.1f') }}").render(name="<b>", value=93.98)
    '&lt;b&gt;: 94.0'
    >>> env.from_string("{{ value | fmt }}").render(value=None)
    '—'
    >>> env.from_string("{{ missing }}").render()
    Traceback (most recent call last):
    ...
    jinja2.exceptions.UndefinedError: 'missing' is undefined
    """
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


def data_uri(png: bytes | None) -> str | None:
    """A PNG as a ``data:`` URI for an ``<img src>`` (None stays None).

    Examples
    --------
    >>> data_uri(b"\\x89PNG")
    'data:image/png;base64,iVBORw=='
    """
    if png is None:
        return None
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def render_page(template: str, **context: Any) -> str:
    """Render the page ``template`` with ``context``, the shared style sheet and the
    piezo version. Only the project's own style sheet is inserted unescaped; every value
    of ``context`` is escaped by the template engine.

    Examples
    --------
    >>> page = render_page("batch_capture.html.j2", row={"file": "PD27-24101.flac",
    ...     "serial": "24101", "verdict": "pass", "error": None, "content_sha256": "0" * 64,
    ...     "failed_limits": [], "warnings": [], "not_evaluable": []},
    ...     spec={"name": "lot", "sha256": "1" * 64}, lines=[], png=None)
    >>> page.startswith("<!DOCTYPE html>")
    True
    >>> "<title>Capture report: PD27-24101.flac</title>" in page
    True
    """
    page = environment().get_template(template)
    return page.render(css=Markup(_load(STYLESHEET)), version=__version__, **context)


def render_html(doc: Mapping[str, Any], figures: Mapping[str, bytes]) -> str:
    """The report page for ``doc`` (the JSON document) with ``figures`` (name -> PNG).

    Examples
    --------
    >>> import tempfile
    >>> import numpy as np
    >>> import soundfile as sf
    >>> import piezo
    >>> folder = tempfile.TemporaryDirectory()
    >>> path = f"{folder.name}/tone.wav"
    >>> t = np.arange(12000) / 48000.0  # 0.25 s
    >>> tone_v = 0.05 * np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t)  # 1 Pa RMS at 50 mV/Pa
    >>> sf.write(path, tone_v, 48000, subtype="PCM_24")
    >>> source = piezo.open(path, sensitivity="50 mV/Pa")
    >>> from piezo.report.run import ReportSettings, analyse
    >>> run = analyse(source, ReportSettings(band_fraction=1))
    >>> from piezo.report.build import report_document
    >>> page = render_html(report_document(run), figures={})
    >>> "tone.wav" in page, page.startswith("<!DOCTYPE html>")
    (True, True)
    >>> folder.cleanup()
    """
    uris = {name: data_uri(png) for name, png in figures.items()}
    return render_page("report.html.j2", doc=doc, figures=uris)
