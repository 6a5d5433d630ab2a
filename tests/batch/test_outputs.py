"""Batch outputs: CSV, JSON, JUnit XML, HTML, atomic writes, journal (piezo.batch.outputs)."""

from __future__ import annotations

import csv
import functools
import json
import os
import re
import urllib.parse
import xml.etree.ElementTree as ET

import html5lib
import pytest

from piezo.batch import outputs
from piezo.batch.outputs import (
    JOURNAL_NAME,
    Journal,
    junit_xml_text,
    read_previous_rows,
    results_csv_text,
    results_json_text,
    summary_html_text,
    write_capture_reports,
    write_outputs,
)
from piezo.batch.runner import expand_inputs, run_batch
from piezo.batch.spec import load_spec, parse_spec
from piezo.io.atomic import write_bytes_atomic
from piezo.plots.style import LIMIT_STYLES, capture_figures
from tests import batch_fakes as fakes
from tests.chromium import CHROMIUM, image_layout
from tests.paths import RECORDINGS

SPEC = parse_spec(fakes.SPEC_TEXT)


@pytest.fixture(scope="module")
def rows(tmp_path_factory):
    d = tmp_path_factory.mktemp("lot")
    for i, amp in enumerate([0.45, 0.44, 0.46, 0.45, 0.455]):
        fakes.write_capture(d / f"SN000{i}.wav", amp)
    fakes.write_capture(d / "SN0100.wav", 0.15)
    fakes.write_capture(d / "SN0101.wav", 0.45, noise=3e-3)
    (d / "SN0102 <b>bad<i>.wav").write_bytes(b"not audio")
    files = expand_inputs([str(d)])
    return run_batch(files, SPEC, workers=1, job=functools.partial(fakes.job, spec=SPEC))


def test_csv_has_one_row_per_capture_and_metric_columns(rows):
    lines = results_csv_text(rows, SPEC).splitlines()
    # Each metric column's unit in a comment line above the header (docs/glossary.md).
    assert lines[0] == "# piezo batch results"
    assert lines[1 : 1 + len(SPEC.metrics)] == [f"# {m.name}: {m.unit}" for m in SPEC.metrics]
    table = list(csv.DictReader(ln for ln in lines if not ln.startswith("#")))
    assert [r["file"] for r in table] == [r["file"] for r in rows]
    assert list(table[0]) == [
        "file", "serial", "verdict", "sensitivity", "clipping", "noise_floor",
        "failed_limits", "warnings", "not_evaluable", "error", "content_sha256", "spec_sha256",
    ]  # fmt: skip
    verdicts = [r["verdict"] for r in table]
    assert verdicts.count("pass") == 5
    assert verdicts.count("fail") == verdicts.count("warn") == verdicts.count("not evaluable") == 1
    low = next(r for r in table if r["serial"] == "0100")
    assert "sensitivity = " in low["failed_limits"]
    assert float(low["sensitivity"]) == pytest.approx(
        next(r for r in rows if r["serial"] == "0100")["metrics"]["sensitivity"], rel=1e-5
    )  # 6 significant digits in the CSV
    bad = next(r for r in table if r["verdict"] == "not evaluable")
    assert bad["sensitivity"] == "" and bad["error"].startswith("unreadable capture")


def test_csv_result_lines_never_read_as_comments(rows):
    # A capture named "#1.wav" (relative path) must not start a line with "#", which
    # readers of piezo's tables skip as a comment.
    renamed = [{**rows[0], "file": "#1.wav"}, *rows[1:]]
    lines = results_csv_text(renamed, SPEC).splitlines()
    comments = [ln for ln in lines if ln.startswith("#")]
    assert len(comments) == 1 + len(SPEC.metrics)
    assert any(ln.startswith("'#1.wav,") for ln in lines)


def test_json_document(rows):
    doc = json.loads(results_json_text(rows, SPEC))
    assert doc["spec"]["sha256"] == SPEC.sha256
    assert doc["results"] == rows
    s = doc["summary"]
    assert s["captures"] == 8
    assert s["counts"] == {"pass": 5, "warn": 1, "fail": 1, "not evaluable": 1}
    assert s["yield"] == pytest.approx(6 / 8)
    sens = s["metrics"][0]
    # 7 evaluated; the low unit (-19.5 dB against -10 ± 0.2 dB) is a far outlier, left
    # out of the capability and counted apart.
    assert sens["name"] == "sensitivity" and (sens["n"], sens["outliers"]) == (6, 1)
    assert sens["lower"] == -13.0 and sens["upper"] == -7.0
    h = sens["histogram"]
    assert sens["cp"] is not None and sum(h["counts"]) + h["below"] + h["above"] == 7
    assert h["below"] == 1  # the low unit, far outside the others' spread
    assert s["metrics"][1]["cp"] is None  # clipping: one-sided


def test_junit_shape(rows):
    # Shape of the JUnit XML read by common CI servers (the Ant/Jenkins JUnit schema,
    # from memory): <testsuites> holding <testsuite name tests failures errors
    # [skipped] [time]>, holding <testcase name classname [time]> elements, each with
    # at most one <failure message type> or <error message type>, and an optional
    # <system-out>; counts in the suite equal the number of such children.
    root = ET.fromstring(junit_xml_text(rows, SPEC).encode("utf-8"))
    assert root.tag == "testsuites"
    (suite,) = root.findall("testsuite")
    for attr in ("name", "tests", "failures", "errors", "skipped", "time"):
        assert attr in suite.attrib
    cases = suite.findall("testcase")
    assert int(suite.get("tests")) == len(cases) == len(rows)
    assert int(suite.get("failures")) == sum(len(c.findall("failure")) for c in cases) == 1
    assert int(suite.get("errors")) == sum(len(c.findall("error")) for c in cases) == 1
    allowed = {"failure", "error", "skipped", "system-out", "system-err"}
    for case, row in zip(cases, rows, strict=True):
        assert case.get("name") and case.get("classname")
        assert float(case.get("time")) >= 0
        assert {child.tag for child in case} <= allowed
        assert len(case.findall("failure")) + len(case.findall("error")) <= 1
        if row["verdict"] == "fail":
            failure = case.find("failure")
            assert failure.get("message") == "; ".join(row["failed_limits"])
            assert failure.get("type") == "limit"
        if row["verdict"] == "warn":
            assert case.find("system-out").text.startswith("noise_floor = ")
    assert suite.find("properties/property[@name='spec_sha256']").get("value") == SPEC.sha256


def test_summary_html_is_valid_escaped_and_has_histograms(rows):
    text = summary_html_text(rows, SPEC, reports={rows[-1]["file"]: "reports/x.html"})
    parser = html5lib.HTMLParser(strict=True)
    parser.parse(text)  # raises on a parse error
    assert "<b>bad<i>" not in text  # file names are escaped (autoescape)
    assert "SN0102 &lt;b&gt;bad&lt;i&gt;.wav" in text
    assert text.count("data:image/png;base64,") == 3  # one histogram per metric
    assert "75.0 %" in text  # yield 6/8
    assert 'href="reports/x.html"' in text


def test_capture_reports_written_and_linked(rows, tmp_path):
    links = write_capture_reports(tmp_path, rows, SPEC)
    assert len(links) == len(rows)
    for row in rows:
        # Links are URLs (percent-encoded); the page is at the decoded name.
        page = (tmp_path / urllib.parse.unquote(links[row["file"]])).read_text(encoding="utf-8")
        html5lib.HTMLParser(strict=True).parse(page)
        assert row["verdict"] in page


# ---------------------------------------------------------------------------------------
# Defect: batch pages. The golden curve's legend read "golden (golden)"; warn-only limits
# showed no margin; the histograms were small (450 px) and drew no warn limits.

#: The fake spec with a warn band inside the fail band of the sensitivity.
WARN_SPEC = parse_spec(
    fakes.SPEC_TEXT.replace(
        "[metrics.sensitivity]\nnominal = -10.0\nlower_rel = -3.0\nupper_rel = 3.0\n",
        "[metrics.sensitivity]\nnominal = -10.0\n"
        "[[metrics.sensitivity.limits]]\nlower_rel = -3.0\nupper_rel = 3.0\n"
        "[[metrics.sensitivity.limits]]\nlower_rel = -1.0\nupper_rel = 1.0\n"
        'severity = "warn"\n',
    )
)


def _vertical_lines(ax):
    """x position and colour of every vertical line of ``ax``."""
    from matplotlib.colors import to_hex

    out = set()
    for line in ax.get_lines():
        x = list(line.get_xdata())
        if len(x) == 2 and x[0] == x[1]:
            out.add((round(float(x[0]), 9), to_hex(line.get_color())))
    return out


def test_histograms_are_large_and_draw_fail_and_warn_limits(rows):
    assert len(WARN_SPEC.metrics[0].limits) == 2  # the spec text above did change
    with capture_figures() as figs:
        summary_html_text(rows, WARN_SPEC)
    assert len(figs) == 3  # one histogram per metric
    for fig in figs:
        width_px = fig.get_size_inches()[0] * fig.dpi
        assert width_px >= 900  # as wide as the report's figures (6.6 in at 150 dpi)
    fail, warn = LIMIT_STYLES["fail"]["color"], LIMIT_STYLES["warn"]["color"]
    sensitivity, _, noise = (fig.axes[0] for fig in figs)
    assert _vertical_lines(sensitivity) == {
        (-13.0, fail), (-7.0, fail), (-11.0, warn), (-9.0, warn)
    }  # fmt: skip
    assert _vertical_lines(noise) == {(-60.0, warn)}  # a warn-only limit is drawn too
    legend = [t.get_text() for t in sensitivity.figure.legends[0].get_texts()]
    assert "fail limit" in legend and "warn limit" in legend


def test_warn_only_limit_shows_its_margin(rows):
    row = next(r for r in rows if r["metrics"].get("noise_floor") is not None)
    page = outputs.capture_report_html(row, SPEC)
    html5lib.HTMLParser(strict=True).parse(page)
    cells = re.search(r"<td>noise_floor</td>(.*?)</tr>", page, re.S).group(1)
    expected = -60.0 - row["metrics"]["noise_floor"]  # upper warn limit − value
    assert f"{expected:.3g}" in cells and "to warn limit" in cells
    sens = re.search(r"<td>sensitivity</td>(.*?)</tr>", page, re.S).group(1)
    assert "to fail limit" in sens


def test_golden_curve_legend_names_it_once():
    spec = load_spec(RECORDINGS / "pd27-spec.toml")
    golden = next(m for m in spec.metrics if m.kind == "golden_deviation")
    assert golden.name == "golden"  # the case that read "golden (golden)"
    g = golden.params["golden_data"]
    row = {
        "file": "u.flac", "serial": "1", "verdict": "pass", "error": None,
        "content_sha256": "0" * 64, "metrics": {}, "failed_limits": [], "warnings": [],
        "not_evaluable": [],
    }  # fmt: skip
    data = {"response": {"frequency_hz": g["frequency_hz"], "magnitude_db": g["magnitude_db"]}}
    with capture_figures() as figs:
        page = outputs.capture_report_html(row, spec, data)
    html5lib.HTMLParser(strict=True).parse(page)
    (fig,) = figs
    legend = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend == ["measured", "golden response"]


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed: page not rendered")
def test_summary_renders_with_full_width_histograms(rows, tmp_path):
    page = summary_html_text(rows, SPEC)
    sizes, console = image_layout(page, tmp_path)
    assert console == []
    assert len(sizes) == 3
    for w, h, shown in sizes:
        # Laid out at the text width of the page (62 rem at 15 px less the padding;
        # the window is 1200 px wide), not as a thumbnail.
        assert w >= 900 and h > 0 and shown >= 800, (w, h, shown)


def test_outputs_byte_identical_and_atomic(rows, tmp_path, monkeypatch):
    write_outputs(tmp_path, rows, SPEC)
    first = {name: (tmp_path / name).read_bytes() for name in outputs.RESULT_FILES}
    write_outputs(tmp_path, list(rows), SPEC)
    for name in ("results.csv", "results.json", "junit.xml", "summary.html"):
        assert (tmp_path / name).read_bytes() == first[name]  # figures included

    # A failure while replacing leaves the previous complete file and no temporary file.
    def broken_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        write_bytes_atomic(tmp_path / "results.csv", b"half")
    assert (tmp_path / "results.csv").read_bytes() == first["results.csv"]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(outputs.RESULT_FILES)


def test_journal_and_previous_rows(rows, tmp_path):
    assert read_previous_rows(tmp_path) == []
    journal = Journal(tmp_path, keep=False)
    for row in rows[:3]:
        journal.add(row)
    journal.close(remove=False)
    with open(tmp_path / JOURNAL_NAME, "a", encoding="utf-8") as fh:
        fh.write('{"file": "cut off by a kill')  # a line cut by an interruption
    assert read_previous_rows(tmp_path) == rows[:3]
    write_outputs(tmp_path, rows[3:], SPEC)
    assert read_previous_rows(tmp_path) == rows[3:] + rows[:3]
    Journal(tmp_path, keep=True).close(remove=True)
    assert not (tmp_path / JOURNAL_NAME).exists()
