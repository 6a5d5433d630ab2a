"""The report's JSON document, built from the result objects of one analysis run.

The HTML page is rendered from this document (and figures drawn from the same result
objects), so the page and the JSON file carry the same numbers.
"""

from __future__ import annotations

import math
import platform
from importlib import metadata
from typing import Any

import numpy as np

from piezo import __version__
from piezo.chain.measurement import CalibratedSource
from piezo.chain.units import format_quantity, ratio_to_db
from piezo.levels.meter import LevelResult
from piezo.levels.summary import LEVEL_KEYS
from piezo.levels.weighting import ConformanceReport
from piezo.results import reference_key
from piezo.spectral.bands import BandResult
from piezo.spectral.summary import confidence_document
from piezo.spectral.welch import PSDResult, SpectrogramResult
from piezo.tone.analysis import ToneResult

__all__ = [
    "CAUTIONS",
    "LEVEL_NAMES",
    "REPORT_SCHEMA",
    "bands_section",
    "chain_section",
    "conformance_section",
    "frontend_section",
    "levels_section",
    "psd_section",
    "recording_section",
    "software_versions",
    "spectrogram_section",
    "tone_section",
]

#: Identifier of the document layout (``docs/report.schema.json``).
REPORT_SCHEMA = "piezo-report/1"

#: Stated in every report, on the page and in the JSON.
CAUTIONS = (
    "An analysis of recordings is not a certified sound level meter measurement: the "
    "levels here are only as good as the recording chain and its calibration.",
    "Occupational noise assessments follow local regulations and use calibrated class 1 "
    "instruments; do not use this report for them.",
    "Piezoelectric elements can produce high voltages under shock or heat; protect the "
    "front-end inputs and handle sensors accordingly.",
)


def software_versions() -> dict[str, str]:
    """Versions of piezo, Python and the libraries that made the numbers."""
    versions = {"piezo": __version__, "python": platform.python_version()}
    for dist in ("numpy", "scipy", "soundfile", "matplotlib", "jinja2"):
        try:
            versions[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            versions[dist] = "not installed"
    return versions


def recording_section(source: CalibratedSource) -> dict[str, Any]:
    """What the recording is: file, format, rate, length, channels analysed."""
    rec = source.recording
    return {
        "file": str(rec.path),
        "name": rec.path.name,
        "format": rec.format,
        "subtype": rec.subtype,
        "sample_rate_hz": rec.sample_rate_hz,
        "frames": rec.frames,
        "duration_s": rec.duration_s,
        # Time of the first sample (a CSV time column's first value, e.g. a scope's
        # pre-trigger): the document's times count from the first sample, the figures'
        # time axes start at this time.
        "start_time_s": rec.start_time_s,
        "channels_in_file": rec.channels,
        "channels": list(source.channel_indices),
        "channel_names": [rec.channel_names[c] for c in source.channel_indices],
        "is_pcm": rec.is_pcm,
    }


def _origin(text: str) -> str:
    if text == "default":
        return "default"
    if text == "option":
        return "command-line option"
    return f"profile {text}"


def chain_section(source: CalibratedSource) -> dict[str, Any]:
    """The measurement chain with the provenance of every value."""
    chain = source.chain
    prov = source.provenance.as_dict() if source.provenance else {}
    origin = {k: _origin(v) for k, v in prov.items()}
    rows = []
    if source.recording.is_pcm:
        rows.append(
            {
                "quantity": "ADC full scale",
                "value": format_quantity(chain.full_scale_v, "V"),
                "source": origin.get("full_scale_v", "default"),
            }
        )
    else:
        rows.append(
            {
                "quantity": "values",
                "value": "volts as exported (CSV)",
                "source": "file",
            }
        )
    rows.append(
        {
            "quantity": "gain between sensor and ADC",
            "value": f"{chain.gain:.6g} V/V ({ratio_to_db(chain.gain):.2f} dB)",
            "source": origin.get("gain", "default"),
        }
    )
    sens = chain.sensitivity_v_per_pa
    rows.append(
        {
            "quantity": "sensor sensitivity",
            "value": (
                "none: results in volts"
                if not chain.calibrated
                else f"{format_quantity(sens, 'V/Pa')} ({ratio_to_db(sens):.2f} dB re 1 V/Pa)"
                if sens is not None
                else f"{chain.sensitivity_text} ({chain.quantity})"
            ),
            "source": origin.get("sensitivity_v_per_pa", "default"),
        }
    )
    rows.append(
        {
            "quantity": "level reference",
            "value": chain.level_unit,
            "source": origin.get("reference_pa", "default") if chain.calibrated else "volts",
        }
    )
    scale = source.scale
    rows.append(
        {
            "quantity": "raw sample to calibrated value",
            "value": f"× {scale:.6g} {chain.unit}",
            "source": "derived",
        }
    )
    profiles = []
    if source.provenance is not None:
        for p in source.provenance.profiles:
            profiles.append(
                {
                    "path": str(p.path),
                    "name": p.name,
                    "serial": p.serial,
                    "calibration_date": p.calibration_date,
                }
            )
    return {
        "unit": chain.unit,
        "level_unit": chain.level_unit,
        "calibrated": chain.calibrated,
        "full_scale_v": chain.full_scale_v,
        "gain": chain.gain,
        "sensitivity_v_per_pa": sens,
        "reference_pa": chain.reference_pa,
        "provenance": prov,
        "rows": rows,
        "profiles": profiles,
    }


def finite(value: float | None, digits: int | None = None) -> float | None:
    """A finite float (rounded to ``digits`` decimals) or None, for JSON."""
    if value is None:
        return None
    value = float(value)
    if not math.isfinite(value):
        return None
    return round(value, digits) if digits is not None else value


#: Levels shown in the report's table, in this order (the order of ``piezo levels``).
#: The level rows, in the order of ``piezo levels`` (one list for terminal, JSON and HTML).
LEVEL_NAMES = LEVEL_KEYS


def _series(values: np.ndarray, digits: int = 2) -> list[float | None]:
    return [finite(v, digits) for v in np.asarray(values, dtype=float).tolist()]


def _columns(matrix: np.ndarray, digits: int = 2) -> list[list[float | None]]:
    """(points, channels) -> one list per channel."""
    m = np.asarray(matrix, dtype=float)
    return [_series(m[:, c], digits) for c in range(m.shape[1])]


def levels_section(levels: LevelResult, level_unit: str, unit: str) -> dict[str, Any]:
    """The level set per channel and the level history (levels in dB re the reference)."""
    channels = []
    for ch in levels.channels:
        entry: dict[str, Any] = {"channel": ch.channel}
        entry.update({name: finite(getattr(ch, name)) for name in LEVEL_NAMES})
        entry["crest_factor_db"] = finite(ch.crest_factor_db)
        entry["notes"] = list(ch.notes)
        channels.append(entry)
    history = None
    h = levels.history
    if h is not None:
        history = {
            "interval_s": h.interval_s,
            "interval_start_s": _series(h.interval_start_s, 6),
            "interval_duration_s": _series(h.interval_duration_s, 6),
            "LAeq": _columns(h.LAeq),
            "LCeq": _columns(h.LCeq),
            "LZeq": _columns(h.LZeq),
            "trace_interval_s": h.trace_interval_s,
            "trace_time_s": _series(h.trace_time_s, 6),
            "LAF": _columns(h.LAF),
            "LAS": _columns(h.LAS),
        }
    return {
        reference_key(unit): levels.reference,
        "level_unit": level_unit,
        "names": list(LEVEL_NAMES),
        "percentile_interval_s": levels.percentile_interval_s,
        "excluded_s": dict(levels.excluded_s),
        "channels": channels,
        "history": history,
    }


def conformance_section(reports: tuple[ConformanceReport, ...]) -> list[dict[str, Any]]:
    """The weighting filters' self-test at the recording's sample rate."""
    out = []
    for rep in reports:
        out.append(
            {
                "weighting": rep.weighting,
                "sample_rate_hz": rep.sample_rate_hz,
                "passed": rep.passed,
                "max_deviation_to_10k_db": finite(rep.max_deviation_to_10k_db),
                "max_deviation_to_20k_db": finite(rep.max_deviation_to_20k_db),
                "rows": [
                    {
                        "nominal_hz": r.nominal_hz,
                        "design_db": finite(r.design_db, 3),
                        "filter_db": finite(r.filter_db, 3),
                        "deviation_db": finite(r.deviation_db, 3),
                        "upper_limit_db": finite(r.upper_limit_db),
                        "lower_limit_db": finite(r.lower_limit_db),
                        "passed": r.passed,
                    }
                    for r in rep.rows
                ],
            }
        )
    return out


def frontend_section(fr: Any) -> dict[str, Any]:
    """The front-end design's summary and modelled response (a FrontendResponse)."""
    sm = fr.summary
    band3 = sm.band_3db_hz
    parts = [
        f"{fr.amplifier} amplifier",
        f"midband {format_quantity(sm.sensitivity_v_per_pa, 'V/Pa')} "
        f"({sm.sensitivity_db_re_1v_per_pa:.2f} dB re 1 V/Pa)",
        f"low corner {format_quantity(sm.corner_hz, 'Hz')} "
        f"(time constant {format_quantity(sm.time_constant_s, 's')})",
    ]
    if band3 is not None:
        lo = "—" if band3[0] is None else format_quantity(band3[0], "Hz")
        hi = "—" if band3[1] is None else format_quantity(band3[1], "Hz")
        parts.append(f"−3 dB band {lo} to {hi}")
    if sm.inverting:
        parts.append("inverting")
    return {
        "design": fr.design,
        "name": fr.name,
        "amplifier": fr.amplifier,
        "summary": "; ".join(parts),
        "sensitivity_v_per_pa": finite(sm.sensitivity_v_per_pa),
        "sensitivity_db_re_1v_per_pa": finite(sm.sensitivity_db_re_1v_per_pa),
        "charge_gain_v_per_c": finite(sm.charge_gain_v_per_c),
        "corner_hz": finite(sm.corner_hz),
        "time_constant_s": finite(sm.time_constant_s),
        "band_3db_hz": None if band3 is None else [finite(v) for v in band3],
        "band_1db_hz": None if sm.band_1db_hz is None else [finite(v) for v in sm.band_1db_hz],
        "inverting": sm.inverting,
        "divider_ratio": finite(sm.divider_ratio),
        "frequency_hz": _series(fr.frequency_hz, 6),
        "level_db": _series(fr.level_db, 3),
        "phase_deg": _series(fr.phase_deg, 2),
    }


def _db(mean_square: np.ndarray, reference: float) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(np.asarray(mean_square, dtype=float) / reference**2)


def psd_section(psd: PSDResult, reference: float, unit: str) -> dict[str, Any]:
    """The Welch PSD per channel, in dB re reference²/Hz."""
    return {
        "window": psd.window,
        "segment_frames": psd.segment_frames,
        "overlap_frames": psd.overlap_frames,
        "resolution_hz": psd.resolution_hz,
        "enbw_hz": psd.enbw_hz,
        "averages": psd.averages,
        "degrees_of_freedom": psd.degrees_of_freedom,
        "confidence": confidence_document(psd),
        "reference_text": format_quantity(reference, unit),
        "frequency_hz": _series(psd.frequency_hz, 4),
        "level_db": _columns(_db(psd.psd, reference)),
    }


def bands_section(bands: BandResult, reference: float) -> dict[str, Any]:
    """Band levels per channel (Leq per band, dB re the reference)."""
    return {
        "fraction": bands.fraction,
        "labels": [b.label for b in bands.bands],
        "nominal_hz": [float(b.nominal_hz) for b in bands.bands],
        "exact_hz": [float(b.exact_hz) for b in bands.bands],
        "level_db": _columns(bands.level_db(reference)),
    }


def spectrogram_section(sg: SpectrogramResult, reference: float) -> dict[str, Any]:
    """Spectrogram per channel: ``level_db[channel][column][bin]``, dB re reference²/Hz."""
    level = sg.level_db(reference)  # (columns, bins, channels)
    return {
        "window": sg.window,
        "segment_frames": int(2 * (sg.frequency_hz.size - 1)),
        "resolution_hz": float(sg.frequency_hz[1] - sg.frequency_hz[0]),
        "time_s": _series(sg.time_s, 4),
        "frequency_hz": _series(sg.frequency_hz, 3),
        "segments_per_column": [int(v) for v in sg.segments_per_column],
        "level_db": [
            [_series(level[j, :, c], 1) for j in range(level.shape[0])]
            for c in range(level.shape[2])
        ],
    }


def tone_section(
    tones: tuple[ToneResult | str, ...], channels: list[int], reference: float
) -> dict[str, Any] | None:
    """Tone metrics of the channels holding a test tone (None when none does)."""
    out = []
    for ch, tone in zip(channels, tones, strict=True):
        if isinstance(tone, str):
            out.append({"channel": ch, "present": False, "reason": tone})
            continue
        out.append(
            {
                "channel": ch,
                "present": True,
                "reason": "",
                "frequency_hz": finite(tone.frequency_hz),
                "tone_rms": finite(tone.tone_rms),
                "level_db": finite(tone.level_db(reference)),
                "thd_percent": finite(tone.thd_percent),
                "thd_n_percent": finite(tone.thd_n_percent),
                "sinad_db": finite(tone.sinad_db),
                "bandwidth_hz": list(tone.bandwidth_hz),
                "resolution_hz": tone.resolution_hz,
                "harmonics": [
                    {
                        "order": n,
                        "rms": finite(v),
                        "re_fundamental_db": finite(
                            20 * math.log10(v / tone.tone_rms)
                            if v > 0 and tone.tone_rms > 0
                            else None
                        ),
                    }
                    for n, v in zip(tone.harmonic_orders, tone.harmonic_rms, strict=True)
                ],
            }
        )
    if not any(t["present"] for t in out):
        return None
    return {"channels": out}
