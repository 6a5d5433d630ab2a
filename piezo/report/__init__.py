"""Reports: one self-contained HTML page and the same content as JSON, per recording.

:func:`analyse` runs every analysis on one pass over a calibrated source;
:func:`report_document` turns the results into the JSON document
(``docs/report.schema.json``); :func:`render_html` renders that document with the
figures of :mod:`piezo.plots.figures`; :func:`write_report` writes both files atomically.
The look of the figures is defined once, in :mod:`piezo.plots.style`.
"""

from piezo.report.build import report_document, report_figures, write_report
from piezo.report.html import render_html
from piezo.report.run import ReportSettings, RunResults, analyse

__all__ = [
    "ReportSettings",
    "RunResults",
    "analyse",
    "render_html",
    "report_document",
    "report_figures",
    "write_report",
]
