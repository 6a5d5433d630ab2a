"""Assemble a report: the JSON document, the figures, the HTML page, and write them.

This is the report layer: it may write files (atomically, through
:func:`piezo.io.atomic.atomic_output`), the analysis core does not.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from piezo.diagnostics.summary import diagnostics_document
from piezo.io.atomic import atomic_output
from piezo.levels.summary import VIBRATION_CAUTION
from piezo.plots import figures as plots
from piezo.report.document import (
    CAUTIONS,
    REPORT_SCHEMA,
    bands_section,
    chain_section,
    conformance_section,
    frontend_section,
    levels_section,
    psd_section,
    recording_section,
    software_versions,
    spectrogram_section,
    tone_section,
)
from piezo.report.html import render_html
from piezo.report.run import RunResults
from piezo.results import to_jsonable

__all__ = ["report_document", "report_figures", "write_report"]


def report_document(run: RunResults, *, json_name: str = "report.json") -> dict[str, Any]:
    """The JSON document of a run (``docs/report.schema.json``).

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
    >>> doc = report_document(run, json_name="tone.json")
    >>> doc["report"]["schema"], doc["report"]["json_name"]
    ('piezo-report/2', 'tone.json')
    >>> doc["recording"]["name"], doc["chain"]["level_unit"]
    ('tone.wav', 'dB re 20 µPa')
    >>> doc["levels"]["channels"][0]["unit"], doc["spectrum"]["level_unit"]
    ('Pa', 'dB re (20 µPa)²/Hz')
    >>> round(doc["tone"]["channels"][0]["level_db"], 1)  # 1 Pa RMS
    94.0
    >>> folder.cleanup()
    """
    source = run.source
    channels = list(source.channel_indices)
    chains = source.chains
    diagnostics = diagnostics_document(run.diagnostics)
    doc: dict[str, Any] = {
        "report": {
            "schema": REPORT_SCHEMA,
            "generated_utc": run.generated_utc,
            "software": software_versions(),
            "json_name": json_name,
        },
        "cautions": [
            *CAUTIONS,
            *([VIBRATION_CAUTION] if any(c.measured.name != "pressure" for c in chains) else []),
        ],
        "notes": list(run.notes),
        "recording": recording_section(source),
        "chain": chain_section(source),
        "settings": run.settings.as_dict(),
        "diagnostics": diagnostics,
        "levels": levels_section(run.levels) if run.levels else None,
        "spectrum": psd_section(run.psd, channels, chains) if run.psd else None,
        "bands": _with_limit(bands_section(run.bands, channels, chains), run)
        if run.bands
        else None,
        "spectrogram": (
            spectrogram_section(run.spectrogram, channels, chains) if run.spectrogram else None
        ),
        "tone": _with_bandwidth_source(tone_section(run.tones, channels, chains), run),
        "frontend": frontend_section(run.frontend) if run.frontend else None,
        "conformance": {
            "weighting": conformance_section(run.conformance),
            "bands": _band_selftest(run),
            "note": "; ".join(run.notes) or "no filter self-test at this sample rate",
        },
    }
    return to_jsonable(doc)


def _with_limit(section: dict[str, Any], run: RunResults) -> dict[str, Any]:
    """The bands section with its upper limit and where it came from (as ``piezo bands``)."""
    return {
        **section,
        "high_hz": run.limits.band_high_hz,
        "high_source": run.limits.high_source,
    }


def _with_bandwidth_source(
    section: dict[str, Any] | None, run: RunResults
) -> dict[str, Any] | None:
    """The tone section with where its bandwidth's upper end came from (as ``piezo tone``)."""
    if section is None:
        return None
    return {**section, "bandwidth_source": run.limits.bandwidth_source}


def _band_selftest(run: RunResults) -> dict[str, Any] | None:
    bc = run.band_conformance
    if bc is None:
        return None
    return {
        "fraction": bc.fraction,
        "sample_rate_hz": bc.sample_rate_hz,
        "bands": bc.bands,
        "worst_margin_db": bc.worst_margin_db,
        "worst_band": bc.worst_band,
        "worst_omega": bc.worst_omega,
        "passed": bc.passed,
    }


def report_figures(run: RunResults) -> dict[str, bytes]:
    """Every figure of the report, by name, as PNG bytes.

    Examples
    --------
    A figure for each result the run holds (here, to keep the example short, only the
    diagnostics' roll-off):

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
    >>> import dataclasses
    >>> fewer = dataclasses.replace(run, levels=None, bands=None, spectrogram=None, psd=None)
    >>> figures = report_figures(fewer)
    >>> sorted(figures)
    ['rolloff_0']
    >>> figures["rolloff_0"][1:4]  # the PNG signature
    b'PNG'
    >>> folder.cleanup()
    """
    figures: dict[str, bytes] = {}
    source = run.source
    # Time axes are the recording's: they start at its first sample's time.
    start_s = source.recording.start_time_s
    for diag in run.diagnostics.channels:
        png = plots.rolloff_figure(diag, source.chain_of(diag.channel).level_unit)
        if png is not None:
            figures[f"rolloff_{diag.channel}"] = png
    channels = list(source.channel_indices)
    chains = source.chains
    if run.levels is not None and run.levels.result.history is not None:
        figures["level_history"] = plots.level_history_figure(run.levels, start_time_s=start_s)
    if run.psd is not None:
        figures["psd"] = plots.psd_figure(run.psd, channels, chains)
    if run.bands is not None:
        figures["bands"] = plots.bands_figure(run.bands, channels, chains)
    if run.spectrogram is not None:
        for i, channel in enumerate(channels):
            figures[f"spectrogram_{channel}"] = plots.spectrogram_figure(
                run.spectrogram, i, channel, chains[i], start_time_s=start_s
            )
    if run.frontend is not None:
        figures["frontend"] = plots.frontend_figure(run.frontend)
    return figures


def write_report(run: RunResults, out_dir: Path, stem: str) -> tuple[Path, Path]:
    """Write ``<stem>.html`` and ``<stem>.json`` into ``out_dir`` (atomically each).

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
    >>> import dataclasses
    >>> from pathlib import Path
    >>> fewer = dataclasses.replace(run, levels=None, bands=None, spectrogram=None, psd=None)
    >>> html_path, json_path = write_report(fewer, Path(folder.name), "tone")
    >>> html_path.name, json_path.name
    ('tone.html', 'tone.json')
    >>> '"json_name": "tone.json"' in json_path.read_text(encoding="utf-8")
    True
    >>> folder.cleanup()
    """

    html_path = out_dir / f"{stem}.html"
    json_path = out_dir / f"{stem}.json"
    doc = report_document(run, json_name=json_path.name)
    page = render_html(doc, report_figures(run))
    text = json.dumps(doc, indent=2, allow_nan=False, ensure_ascii=False) + "\n"
    with atomic_output(json_path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    with atomic_output(html_path) as tmp:
        tmp.write_text(page, encoding="utf-8")
    return html_path, json_path
