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

import contextlib
import datetime
import json
import math
import os
import re
import socket
import stat
import sys
import time
import urllib.parse
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
from piezo.errors import OutputError
from piezo.io.atomic import open_no_follow, output_folder, refuse_link, write_bytes_atomic
from piezo.io.tables import csv_text
from piezo.plots.batch import histogram_figure, response_figure
from piezo.report.html import data_uri, render_page

__all__ = [
    "JOURNAL_NAME",
    "LOCK_NAME",
    "RESULT_FILES",
    "Journal",
    "OutputLock",
    "capture_report_html",
    "junit_xml_text",
    "pid_alive",
    "read_previous_rows",
    "report_link",
    "report_page_names",
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
    """Append-only record of finished rows, one JSON document per line.

    The journal is opened without following links: a symbolic link (or a second hard
    link) planted at its name in the output folder is refused with
    :class:`~piezo.errors.OutputError`, and what it points to is left untouched. A new
    journal (``keep=False``) replaces the name, never truncating a file in place.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as out:
    ...     journal = Journal(out, keep=False)
    ...     journal.add({"file": "PD27-24101.flac", "verdict": "pass"})
    ...     journal.close(remove=False)
    ...     read_previous_rows(out)
    [{'file': 'PD27-24101.flac', 'verdict': 'pass'}]
    """

    def __init__(self, out_dir: str | Path, *, keep: bool) -> None:
        self.path = Path(out_dir) / JOURNAL_NAME
        flags = os.O_WRONLY | os.O_CREAT | os.O_APPEND
        if not keep:
            refuse_link(self.path)
            with contextlib.suppress(FileNotFoundError):
                self.path.unlink()
            flags |= os.O_EXCL
        try:
            fd = open_no_follow(self.path, flags)
        except FileExistsError:  # created by someone else since the unlink
            raise OutputError(
                "appeared while starting; refusing to use it", source=str(self.path)
            ) from None
        _refuse_shared(fd, self.path)
        self._fh = os.fdopen(fd, "a", encoding="utf-8")

    def add(self, row: Mapping[str, Any]) -> None:
        self._fh.write(json.dumps(row, sort_keys=True, separators=(",", ":")) + "\n")
        self._fh.flush()

    def close(self, *, remove: bool) -> None:
        self._fh.close()
        if remove:
            self.path.unlink(missing_ok=True)


def _refuse_shared(fd: int, path: Path) -> None:
    """Close ``fd`` and refuse ``path`` unless it is a plain file with one name."""
    info = os.fstat(fd)
    if not stat.S_ISREG(info.st_mode) or info.st_nlink > 1:
        os.close(fd)
        what = "is not a plain file" if not stat.S_ISREG(info.st_mode) else "has other hard links"
        raise OutputError(f"{what}; refusing to write to it", source=str(path))


def _read_no_follow(path: Path, limit: int | None = None) -> str | None:
    """Text of ``path`` (UTF-8, bad bytes replaced), None if missing; links refused."""
    try:
        fd = open_no_follow(path, os.O_RDONLY)
    except OutputError:
        if path.is_symlink():
            raise
        return None
    with os.fdopen(fd, "rb") as fh:
        data = fh.read() if limit is None else fh.read(limit)
    return data.decode("utf-8", errors="replace")


#: Marks an output folder as used by a running batch (pid, host, start time; JSON).
LOCK_NAME = ".piezo-batch.lock"

#: A lock file that cannot be parsed is taken as a run's start being written at this
#: moment, unless it is older than this (a run killed between creating and filling it).
_LOCK_UNREADABLE_STALE_S = 10.0


class OutputLock:
    """One batch run at a time in an output folder.

    :meth:`acquire` creates ``LOCK_NAME`` exclusively (never through a link) holding
    the process id, host name and start time. A lock left by a run that was killed (its
    host is this host and its process no longer runs) is recognised as stale and taken
    over; any other lock refuses the run with :class:`~piezo.errors.OutputError`.
    A lock from another host is never taken over: this host cannot tell whether that
    run still lives; the message says which host and process to check.

    Examples
    --------
    >>> import tempfile
    >>> folder = tempfile.mkdtemp()
    >>> lock = OutputLock(folder)
    >>> lock.acquire()
    >>> OutputLock(folder).acquire()  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: ...: in use by another batch run (process ... on ..., since ...)...
    >>> lock.release()
    >>> OutputLock(folder).acquire()
    """

    def __init__(self, out_dir: str | Path) -> None:
        self.folder = Path(out_dir)
        self.path = self.folder / LOCK_NAME
        self._text: str | None = None

    def acquire(self) -> None:
        """Take the folder, or raise :class:`OutputError` if another run uses it."""
        text = json.dumps(
            {
                "pid": os.getpid(),
                "host": socket.gethostname(),
                "started": datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            },
            sort_keys=True,
        )
        for attempt in range(2):
            try:
                fd = open_no_follow(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                holder = self._holder()
                if attempt == 0 and holder is None:
                    with contextlib.suppress(FileNotFoundError):
                        self.path.unlink()  # stale: removes the name only, never a target
                    continue
                raise OutputError(
                    f"in use by another batch run ({holder}); if that run has ended, "
                    f"remove {LOCK_NAME} from the folder",
                    source=str(self.folder),
                ) from None
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(text + "\n")
                fh.flush()
                os.fsync(fh.fileno())
            self._text = text + "\n"
            return

    def _holder(self) -> str | None:
        """Who holds the lock, or None if the lock is stale."""
        raw = _read_no_follow(self.path, 4096)
        if raw is None:
            return None  # removed meanwhile
        try:
            info = json.loads(raw)
            pid, host, started = int(info["pid"]), str(info["host"]), str(info["started"])
        except (ValueError, KeyError, TypeError):
            with contextlib.suppress(OSError):
                age = time.time() - self.path.lstat().st_mtime
                if age > _LOCK_UNREADABLE_STALE_S:
                    return None
            return "a run that is starting"
        if host == socket.gethostname() and pid != os.getpid() and not pid_alive(pid):
            return None
        return f"process {pid} on {host}, since {started}"

    def release(self) -> None:
        """Remove the lock if it is still the one this run wrote."""
        if self._text is None:
            return
        with contextlib.suppress(OSError):
            if _read_no_follow(self.path, 4096) == self._text:
                self.path.unlink()
        self._text = None


def pid_alive(pid: int) -> bool:
    """True if a process with id ``pid`` runs on this host.

    Examples
    --------
    >>> pid_alive(os.getpid())
    True
    """
    if pid <= 0:
        return False
    if sys.platform == "win32":
        import ctypes

        kernel32 = ctypes.windll.kernel32  # type: ignore[attr-defined]
        handle = kernel32.OpenProcess(0x00100000 | 0x1000, False, pid)  # SYNCHRONIZE | QUERY
        if not handle:
            return False
        try:
            return bool(kernel32.WaitForSingleObject(handle, 0) == 0x102)  # WAIT_TIMEOUT
        finally:
            kernel32.CloseHandle(handle)
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # runs, as another user
        return True
    return True


def read_previous_rows(out_dir: str | Path) -> list[dict[str, Any]]:
    """Rows of an earlier run in ``out_dir``: results.json and an interrupted run's journal.

    A journal line cut off by the interruption is ignored. Missing files give no rows;
    either file being a symbolic link is refused (:class:`OutputError`).

    Examples
    --------
    An interrupted run: one complete journal line and one cut off mid-write:

    >>> import tempfile
    >>> from pathlib import Path
    >>> with tempfile.TemporaryDirectory() as out:
    ...     _ = (Path(out) / JOURNAL_NAME).write_text('{"file": "a.wav"}\\n{"file": "b.w')
    ...     read_previous_rows(out)
    [{'file': 'a.wav'}]
    """
    rows: list[dict[str, Any]] = []
    text = _read_no_follow(Path(out_dir) / "results.json")
    if text is not None:
        try:
            data = json.loads(text)
            rows.extend(r for r in data.get("results", []) if isinstance(r, dict))
        except (ValueError, AttributeError):
            pass
    text = _read_no_follow(Path(out_dir) / JOURNAL_NAME)
    for line in (text or "").splitlines():
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

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> s = summarize(rows, spec)
    >>> s["captures"], s["counts"], round(s["yield"], 3)
    (3, {'pass': 1, 'warn': 0, 'fail': 1, 'not evaluable': 1}, 0.333)
    >>> m = s["metrics"][0]
    >>> m["name"], m["n"], m["lower"], m["upper"]
    ('resonance', 2, 3900.0, 4700.0)
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
        entry = {
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
        if m.has_trade_form:
            entry["mean_trade_form"] = m.trade_form(cap.mean)
        metrics.append(entry)
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

    Comment lines above the header name each metric column's unit
    (``# sensitivity: dB re 1 V/Pa``, docs/glossary.md); the metric columns are named as
    the spec's metrics. Metric values have six significant digits (results.json keeps
    full precision); a file name starting with ``#`` gets a leading apostrophe, so no
    result line reads as a comment;
    message columns join several messages with " | ". Written by
    :func:`piezo.io.tables.csv_text`: a text cell a spreadsheet would evaluate (a file
    name or serial starting with ``=``, ``+``, ``-``, ``@``) gets a leading apostrophe.

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> lines = results_csv_text(rows, spec).splitlines()
    >>> lines[:2]  # comment lines name each metric's unit
    ['# piezo batch results', '# resonance: Hz']
    >>> lines[2]
    'file,serial,verdict,resonance,failed_limits,warnings,not_evaluable,error,content_sha256,spec_sha256'
    >>> lines[3].split(",")[:4]
    ['PD27-24101.flac', '24101', 'pass', '4289.13']
    """
    names = [m.name for m in spec.metrics]
    traded = [m for m in spec.metrics if m.has_trade_form]
    header = [
        "file",
        "serial",
        "verdict",
        *names,
        *(f"{m.name}_trade_form" for m in traded),
        "failed_limits",
        "warnings",
        "not_evaluable",
        "error",
        "content_sha256",
        "spec_sha256",
    ]
    table = (
        [
            "'" + r["file"] if r["file"].startswith("#") else r["file"],
            r["serial"],
            r["verdict"],
            *(_csv_number(r["metrics"].get(n)) for n in names),
            *(m.trade_form(r["metrics"].get(m.name)) or "" for m in traded),
            " | ".join(r["failed_limits"]),
            " | ".join(r["warnings"]),
            " | ".join(r["not_evaluable"]),
            r["error"] or "",
            r["content_sha256"],
            r["spec_sha256"],
        ]
        for r in rows
    )
    comments = ["piezo batch results", *(f"{m.name}: {m.unit}" for m in spec.metrics)]
    return csv_text(header, table, comments=comments)


def results_json_text(rows: Sequence[Mapping[str, Any]], spec: Spec) -> str:
    """The whole run as one JSON document (sorted keys, no timestamps).

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> import json
    >>> doc = json.loads(results_json_text(rows, spec))
    >>> doc["spec"]["name"], [r["verdict"] for r in doc["results"]]
    ('PD27 resonance', ['pass', 'fail', 'not evaluable'])
    >>> results_json_text(rows, spec) == results_json_text(rows, spec)  # no timestamps
    True
    """
    doc = {
        "piezo_version": __version__,
        "spec": {"name": spec.name, "sha256": spec.sha256},
        "metrics": [m.to_json() for m in spec.metrics],
        "summary": summarize(rows, spec),
        "results": [_with_trade_forms(r, spec) for r in rows],
    }
    return json.dumps(_json_safe(doc), indent=1, sort_keys=True, allow_nan=False) + "\n"


def _with_trade_forms(row: Mapping[str, Any], spec: Spec) -> Mapping[str, Any]:
    """The row with ``trade_forms`` (metric -> text) for sensitivities of a line whose
    quantity has a trade form of its own (mV/g ...); the row itself otherwise."""
    traded = [m for m in spec.metrics if m.has_trade_form]
    if not traded:
        return row
    forms = {m.name: m.trade_form(row["metrics"].get(m.name)) for m in traded}
    return {**row, "trade_forms": forms}


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

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> import xml.etree.ElementTree as ET
    >>> suite = ET.fromstring(junit_xml_text(rows, spec)).find("testsuite")
    >>> suite.get("tests"), suite.get("failures"), suite.get("errors")
    ('3', '1', '1')
    >>> [case.get("name") for case in suite.iter("testcase")][0]
    '24101 (PD27-24101.flac)'
    >>> suite.find("testcase/failure").get("message")
    'resonance = 5215.59 Hz above upper limit 4700 (Q 1.1, peak +3.21 dB) [fail]'
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

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> page = summary_html_text(rows, spec)
    >>> page.startswith("<!DOCTYPE html>"), "<title>Batch summary: PD27 resonance</title>" in page
    (True, True)
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


def report_page_names(files: Iterable[str]) -> dict[str, str]:
    """File name of each capture's report page (``reports/<name>``), unique in the run.

    The capture's path with its folders joined by ``__`` (``lot/b/SN1.wav`` ->
    ``lot__b__SN1.wav.html``), made safe and unique by the naming rule of
    :mod:`piezo.report.names` that ``piezo report`` uses too. Names are handed out in
    sorted path order, so they do not depend on the order captures finish in.

    Examples
    --------
    >>> report_page_names(["lot/PD27-32001 x.flac", "lot/PD27-32001_x.flac", "Ölpumpe.wav"])
    ... # doctest: +NORMALIZE_WHITESPACE
    {'lot/PD27-32001 x.flac': 'lot__PD27-32001 x.flac.html',
     'lot/PD27-32001_x.flac': 'lot__PD27-32001_x.flac.html',
     'Ölpumpe.wav': 'Ölpumpe.wav.html'}
    >>> report_page_names(["a/b.wav", "a__b.wav"])
    {'a/b.wav': 'a__b.wav.html', 'a__b.wav': 'a__b.wav-2.html'}
    """
    from piezo.report.names import UniqueNames

    names = UniqueNames()
    pages = {}
    for file in sorted(set(files)):
        flat = file.replace(os.sep, "__").replace("/", "__").lstrip("_")
        pages[file] = names.claim(flat, ending=".html")
    return {file: pages[file] for file in files}


def capture_report_html(
    row: Mapping[str, Any], spec: Spec, data: Mapping[str, Any] | None = None
) -> str:
    """Report of one capture: verdict, every metric with its value, limits and margin,
    and, when ``data`` carries the swept response, a plot of it with the spec's golden
    response and masks.

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> page = capture_report_html(rows[1], spec)
    >>> "<title>Capture report: PD27-24107.flac</title>" in page
    True
    """
    lines = []
    for m in spec.metrics:
        value = row["metrics"].get(m.name)
        lines.append(
            {
                "metric": m,
                "value": value,
                "trade_form": m.trade_form(value),
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

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as out:
    ...     [path.name for path in write_outputs(out, rows, spec)]
    ['results.csv', 'junit.xml', 'summary.html', 'results.json']
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
    *,
    name: str | None = None,
) -> str:
    """Write ``out_dir/reports/<name>`` for one capture; return its relative link.

    ``name`` defaults to the capture's own name from :func:`report_page_names` (give
    the run's names to keep colliding captures apart). A ``reports`` folder that is a
    symbolic link is refused (:class:`OutputError`).

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> import tempfile
    >>> from pathlib import Path
    >>> with tempfile.TemporaryDirectory() as out:
    ...     link = write_capture_report(out, rows[1], spec)
    ...     link, (Path(out) / link).is_file()
    ('reports/PD27-24107.flac.html', True)
    """
    folder = output_folder(Path(out_dir) / "reports", within=out_dir)
    name = report_page_names([row["file"]])[row["file"]] if name is None else name
    page = capture_report_html(row, spec, data).encode("utf-8")
    write_bytes_atomic(folder / name, page, within=out_dir)
    return report_link(name)


def report_link(name: str) -> str:
    """Relative link from summary.html to the report page ``name`` (percent-encoded).

    Examples
    --------
    >>> report_link("lot__PD27 x.flac.html")
    'reports/lot__PD27%20x.flac.html'
    """
    return "reports/" + urllib.parse.quote(name)


def write_capture_reports(
    out_dir: str | Path, rows: Iterable[Mapping[str, Any]], spec: Spec
) -> dict[str, str]:
    """Write one report (without curves) per capture; return file -> link.

    Examples
    --------
    Three units of the bundled demo lot, judged on their resonance alone: one passes, one
    resonates too high, one file is truncated:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> from piezo.batch.runner import evaluate_capture
    >>> rows = [
    ...     evaluate_capture(f"recordings/pd27-lot/{name}", spec, display=name)
    ...     for name in ("PD27-24101.flac", "PD27-24107.flac", "PD27-24136.flac")
    ... ]
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as out:
    ...     links = write_capture_reports(out, rows, spec)
    >>> links["PD27-24136.flac"]
    'reports/PD27-24136.flac.html'
    """
    rows = list(rows)
    names = report_page_names([row["file"] for row in rows])
    return {
        row["file"]: write_capture_report(out_dir, row, spec, name=names[row["file"]])
        for row in rows
    }
