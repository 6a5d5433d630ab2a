"""Batch outputs: results.csv, results.json, junit.xml, summary.html, capture reports.

This is an edge layer: it writes files. Every file is written atomically (a temporary
file in the same folder, flushed and synced, then ``os.replace``), so an interrupted run
leaves the previous complete file or none, never half a file. While a run is going on,
finished rows are appended to a journal (``.piezo-batch-journal.jsonl``) that
``--resume`` reads after an interruption; it is removed once the results are written.

The text builders (``*_text``) are pure and deterministic: the same rows give the same
bytes, whatever order they were computed in.
"""

from __future__ import annotations

import json
import math
import os
import re
import xml.etree.ElementTree as ET
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from piezo import __version__
from piezo.batch.spec import MetricSpec, Spec
from piezo.batch.stats import (
    capability,
    far_outliers,
    histogram,
    verdict_counts,
    yield_fraction,
)
from piezo.batch.verdict import FAIL, NOT_EVALUABLE, VERDICTS, WARN
from piezo.io.atomic import output_folder, write_bytes_atomic
from piezo.io.tables import csv_text
from piezo.plots.batch import histogram_figure, response_figure
from piezo.report.html import data_uri, render_page

__all__ = [
    "JOURNAL_NAME",
    "RESULT_FILES",
    "Journal",
    "capture_report_html",
    "junit_xml_text",
    "read_previous_rows",
    "report_file_name",
    "results_csv_text",
    "results_json_text",
    "summarize",
    "summary_html_text",
    "write_capture_report",
    "write_capture_reports",
    "write_outputs",
]

RESULT_FILES = ("results.csv", "junit.xml", "summary.html", "results.json")
JOURNAL_NAME = ".piezo-batch-journal.jsonl"


class Journal:
    """Append-only record of finished rows, one JSON document per line."""

    def __init__(self, out_dir: str | Path, *, keep: bool) -> None:
        self.path = Path(out_dir) / JOURNAL_NAME
        self._fh = open(self.path, "a" if keep else "w", encoding="utf-8")

    def add(self, row: Mapping[str, Any]) -> None:
        self._fh.write(json.dumps(row, sort_keys=True, separators=(",", ":")) + "\n")
        self._fh.flush()

    def close(self, *, remove: bool) -> None:
        self._fh.close()
        if remove:
            self.path.unlink(missing_ok=True)


def read_previous_rows(out_dir: str | Path) -> list[dict[str, Any]]:
    """Rows of an earlier run in ``out_dir``: results.json and an interrupted run's journal.

    A journal line cut off by the interruption is ignored. Missing files give no rows.
    """
    rows: list[dict[str, Any]] = []
    results = Path(out_dir) / "results.json"
    if results.is_file():
        try:
            data = json.loads(results.read_text(encoding="utf-8"))
            rows.extend(r for r in data.get("results", []) if isinstance(r, dict))
        except (OSError, ValueError, AttributeError):
            pass
    journal = Path(out_dir) / JOURNAL_NAME
    if journal.is_file():
        with open(journal, encoding="utf-8", errors="replace") as fh:
            for line in fh:
                try:
                    row = json.loads(line)
                except ValueError:
                    continue
                if isinstance(row, dict):
                    rows.append(row)
    return rows


# ---------------------------------------------------------------------------------------
# Summary numbers.


def summarize(rows: Sequence[Mapping[str, Any]], spec: Spec) -> dict[str, Any]:
    """Counts per verdict, yield, and per metric n/mean/σ/Cp/Cpk and histogram data.

    Capability (NIST/SEMATECH 6.1.6) assumes a process in statistical control: it uses
    the captures where the metric was evaluated, less its far outliers (Tukey's fences,
    :func:`~piezo.batch.stats.far_outliers`; special causes such as a clipped capture,
    counted in ``outliers``), against the metric's innermost "fail" limits (its "warn"
    limits when it has no other).
    """
    counts = verdict_counts(r["verdict"] for r in rows)
    metrics: list[dict[str, Any]] = []
    for m in spec.metrics:
        values = [r["metrics"].get(m.name) for r in rows]
        finite = np.array([float(v) for v in values if v is not None and math.isfinite(v)])
        far = far_outliers(finite)
        lsl, usl = m.spec_limits()
        cap = capability(finite[~far], lsl=lsl, usl=usl)
        hist = histogram(finite, lower=lsl, upper=usl)
        metrics.append(
            {
                "name": m.name,
                "kind": m.kind,
                "unit": m.unit,
                "lower": lsl,
                "upper": usl,
                "n": cap.n,
                "outliers": int(np.count_nonzero(far)),
                "mean": cap.mean,
                "std": cap.std,
                "cp": cap.cp,
                "cpk": cap.cpk,
                "cpl": cap.cpl,
                "cpu": cap.cpu,
                "histogram": {
                    "edges": hist.edges,
                    "counts": hist.counts,
                    "below": hist.below,
                    "above": hist.above,
                },
            }
        )
    return {
        "captures": len(rows),
        "counts": counts,
        "yield": yield_fraction(counts),
        "metrics": metrics,
    }


# ---------------------------------------------------------------------------------------
# CSV and JSON.


def _csv_number(value: float | None) -> str:
    return "" if value is None else f"{value:.6g}"


def results_csv_text(rows: Sequence[Mapping[str, Any]], spec: Spec) -> str:
    """One line per capture: file, serial, verdict, each metric, messages, hashes.

    Metric values have six significant digits (results.json keeps full precision);
    message columns join several messages with " | ". Written by
    :func:`piezo.io.tables.csv_text`: a text cell a spreadsheet would evaluate (a file
    name or serial starting with ``=``, ``+``, ``-``, ``@``) gets a leading apostrophe.
    """
    names = [m.name for m in spec.metrics]
    header = [
        "file",
        "serial",
        "verdict",
        *names,
        "failed_limits",
        "warnings",
        "not_evaluable",
        "error",
        "content_sha256",
        "spec_sha256",
    ]
    table = (
        [
            r["file"],
            r["serial"],
            r["verdict"],
            *(_csv_number(r["metrics"].get(n)) for n in names),
            " | ".join(r["failed_limits"]),
            " | ".join(r["warnings"]),
            " | ".join(r["not_evaluable"]),
            r["error"] or "",
            r["content_sha256"],
            r["spec_sha256"],
        ]
        for r in rows
    )
    return csv_text(header, table)


def results_json_text(rows: Sequence[Mapping[str, Any]], spec: Spec) -> str:
    """The whole run as one JSON document (sorted keys, no timestamps)."""
    doc = {
        "piezo_version": __version__,
        "spec": {"name": spec.name, "sha256": spec.sha256},
        "metrics": [m.to_json() for m in spec.metrics],
        "summary": summarize(rows, spec),
        "results": list(rows),
    }
    return json.dumps(_json_safe(doc), indent=1, sort_keys=True, allow_nan=False) + "\n"


def _json_safe(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, Mapping):
        return {k: _json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_safe(v) for v in value]
    return value


# ---------------------------------------------------------------------------------------
# JUnit XML.


def junit_xml_text(rows: Sequence[Mapping[str, Any]], spec: Spec) -> str:
    """JUnit XML: one ``testsuite``, one ``testcase`` per capture.

    A failing capture carries a ``failure`` (message: its failed limits), a capture that
    is not evaluable an ``error``; warnings go to the test case's ``system-out``.
    """
    counts = verdict_counts(r["verdict"] for r in rows)
    suites = ET.Element(
        "testsuites",
        {
            "name": "piezo batch",
            "tests": str(len(rows)),
            "failures": str(counts[FAIL]),
            "errors": str(counts[NOT_EVALUABLE]),
        },
    )
    suite = ET.SubElement(
        suites,
        "testsuite",
        {
            "name": spec.name or "piezo batch",
            "tests": str(len(rows)),
            "failures": str(counts[FAIL]),
            "errors": str(counts[NOT_EVALUABLE]),
            "skipped": "0",
            "time": "0",
        },
    )
    props = ET.SubElement(suite, "properties")
    ET.SubElement(props, "property", {"name": "spec_sha256", "value": spec.sha256})
    ET.SubElement(props, "property", {"name": "piezo_version", "value": __version__})
    classname = "piezo.batch." + (re.sub(r"[^A-Za-z0-9_]+", "_", spec.name).strip("_") or "lot")
    for r in rows:
        label = f"{r['serial']} ({r['file']})" if r["serial"] else r["file"]
        case = ET.SubElement(
            suite,
            "testcase",
            {"classname": classname, "name": label, "file": r["file"], "time": "0"},
        )
        if r["verdict"] == FAIL:
            failure = ET.SubElement(
                case, "failure", {"type": "limit", "message": "; ".join(r["failed_limits"])}
            )
            failure.text = "\n".join(r["failed_limits"] + r["not_evaluable"])
        elif r["verdict"] == NOT_EVALUABLE:
            error = ET.SubElement(
                case, "error", {"type": "not evaluable", "message": "; ".join(r["not_evaluable"])}
            )
            error.text = "\n".join(r["not_evaluable"])
        if r["warnings"]:
            out = ET.SubElement(case, "system-out")
            out.text = "\n".join(r["warnings"])
    ET.indent(suites)
    return ET.tostring(suites, encoding="unicode", xml_declaration=True) + "\n"


# ---------------------------------------------------------------------------------------
# HTML.


def summary_html_text(
    rows: Sequence[Mapping[str, Any]],
    spec: Spec,
    *,
    reports: Mapping[str, str] | None = None,
) -> str:
    """The lot summary page: yield, counts, histograms with limits, Cp/Cpk, failing units.

    ``reports`` maps a row's file to the relative link of its capture report.
    """
    summary = summarize(rows, spec)
    for metric, m in zip(summary["metrics"], spec.metrics, strict=True):
        metric["png"] = data_uri(histogram_figure(metric, m))
        metric["two_sided"] = metric["lower"] is not None and metric["upper"] is not None
    bad = [r for r in rows if r["verdict"] in (FAIL, NOT_EVALUABLE)]
    warned = [r for r in rows if r["verdict"] == WARN]
    return render_page(
        "batch_summary.html.j2",
        spec=spec,
        summary=summary,
        verdicts=VERDICTS,
        bad=bad,
        warned=warned,
        reports=reports or {},
    )


def report_file_name(file: str) -> str:
    """A flat, safe file name for a capture's report (unique per capture path)."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", file.replace(os.sep, "__").replace("/", "__"))
    return stem.strip("._") + ".html"


def capture_report_html(
    row: Mapping[str, Any], spec: Spec, data: Mapping[str, Any] | None = None
) -> str:
    """Report of one capture: verdict, every metric with its value, limits and margin,
    and, when ``data`` carries the swept response, a plot of it with the spec's golden
    response and masks."""
    lines = []
    for m in spec.metrics:
        value = row["metrics"].get(m.name)
        lines.append(
            {
                "metric": m,
                "value": value,
                "limits": [_limit_text(m, lim.lower, lim.upper, lim.severity) for lim in m.limits],
                "margin": _margin(m, value),
                "margin_to": "fail limit" if m.fail_limits() != (None, None) else "warn limit",
            }
        )
    png = data_uri(response_figure(data.get("response"), spec)) if data else None
    return render_page("batch_capture.html.j2", row=row, spec=spec, lines=lines, png=png)


def _limit_text(m: MetricSpec, lower: float | None, upper: float | None, severity: str) -> str:
    if m.kind in ("response_mask", "band_mask"):
        return f"inside the mask ({severity})"
    parts = []
    if lower is not None:
        parts.append(f"≥ {lower:.6g}")
    if upper is not None:
        parts.append(f"≤ {upper:.6g}")
    return f"{' and '.join(parts)} {m.unit} ({severity})"


def _margin(m: MetricSpec, value: float | None) -> float | None:
    """Distance from the value to the nearest fail limit, or, for a metric with warn
    limits only, to the nearest warn limit (negative: outside)."""
    if value is None:
        return None
    lsl, usl = m.spec_limits()
    sides = [
        v
        for v in (
            (value - lsl) if lsl is not None else None,
            (usl - value) if usl is not None else None,
        )
        if v is not None
    ]
    return min(sides) if sides else None


def write_outputs(
    out_dir: str | Path,
    rows: Sequence[Mapping[str, Any]],
    spec: Spec,
    *,
    reports: Mapping[str, str] | None = None,
) -> list[Path]:
    """Write results.csv, junit.xml, summary.html and results.json into ``out_dir``.

    All texts are built first, then each file replaced atomically; results.json (the file
    ``--resume`` reads) comes last.
    """
    out = Path(out_dir)
    texts = {
        "results.csv": results_csv_text(rows, spec),
        "junit.xml": junit_xml_text(rows, spec),
        "summary.html": summary_html_text(rows, spec, reports=reports),
        "results.json": results_json_text(rows, spec),
    }
    written = []
    for name in RESULT_FILES:
        write_bytes_atomic(out / name, texts[name].encode("utf-8"), within=out)
        written.append(out / name)
    return written


def write_capture_report(
    out_dir: str | Path,
    row: Mapping[str, Any],
    spec: Spec,
    data: Mapping[str, Any] | None = None,
) -> str:
    """Write ``out_dir/reports/<file>.html`` for one capture; return its relative link."""
    folder = output_folder(Path(out_dir) / "reports", within=out_dir)
    name = report_file_name(row["file"])
    page = capture_report_html(row, spec, data).encode("utf-8")
    write_bytes_atomic(folder / name, page, within=out_dir)
    return f"reports/{name}"


def write_capture_reports(
    out_dir: str | Path, rows: Iterable[Mapping[str, Any]], spec: Spec
) -> dict[str, str]:
    """Write one report (without curves) per capture; return file -> link."""
    return {row["file"]: write_capture_report(out_dir, row, spec) for row in rows}
