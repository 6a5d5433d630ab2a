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
    """Versions of piezo, Python and the libraries that made the numbers.

    Examples
    --------
    >>> import piezo
    >>> versions = software_versions()
    >>> list(versions)
    ['piezo', 'python', 'numpy', 'scipy', 'soundfile', 'matplotlib', 'jinja2']
    >>> versions["piezo"] == piezo.__version__
    True
    """
    versions = {"piezo": __version__, "python": platform.python_version()}
    for dist in ("numpy", "scipy", "soundfile", "matplotlib", "jinja2"):
        try:
            versions[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            versions[dist] = "not installed"
    return versions


def recording_section(source: CalibratedSource) -> dict[str, Any]:
    """What the recording is: file, format, rate, length, channels analysed.

    Examples
    --------
    >>> import piezo
    >>> rec = recording_section(piezo.open("recordings/calibrator-94dB.wav"))
    >>> rec["name"], rec["format"], rec["subtype"], rec["sample_rate_hz"], rec["duration_s"]
    ('calibrator-94dB.wav', 'WAV', 'PCM_24', 48000.0, 4.0)
    >>> rec["channels"], rec["is_pcm"]
    ([0], True)
    """
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
    """The measurement chain with the provenance of every value.

    Examples
    --------
    The bundled calibrator recording: its sidecar sets 2 V full scale and 20 dB gain, and
    no sensitivity yet, so results are in volts at the sensor (2 V / 10 per unit sample):

    >>> import piezo
    >>> chain = chain_section(piezo.open("recordings/calibrator-94dB.wav"))
    >>> chain["unit"], chain["level_unit"], chain["calibrated"], chain["gain"]
    ('V', 'dB re 1 V', False, 10.0)
    >>> [(row["quantity"], row["value"]) for row in chain["rows"]][1:]
    ... # doctest: +NORMALIZE_WHITESPACE
    [('gain between sensor and ADC', '10 V/V (20.00 dB)'),
     ('sensor sensitivity', 'none: results in volts'),
     ('level reference', 'dB re 1 V'),
     ('raw sample to calibrated value', '× 0.2 V')]
    """
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
    """A finite float (rounded to ``digits`` decimals) or None, for JSON.

    Examples
    --------
    >>> finite(93.97940008672037, 2), finite(float("inf")), finite(None), finite(3)
    (93.98, None, None, 3.0)
    """
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
    """The level set per channel and the level history (levels in dB re the reference).

    Examples
    --------
    A 1 kHz sine of 1 Pa RMS for 0.5 s: 20 lg(1 Pa / 20 µPa) = 94.0 dB for every
    weighting, since A and C are 0 dB at 1 kHz (IEC 61672-1:2013, Table 3), and the peak
    is 3 dB above (crest factor √2):

    >>> import numpy as np
    >>> from piezo.levels.meter import LevelMeter
    >>> t = np.arange(24000) / 48000.0
    >>> meter = LevelMeter(48000.0, 1)
    >>> meter.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> section = levels_section(meter.result(), "dB re 20 µPa", "Pa")
    >>> ch = section["channels"][0]
    >>> round(ch["LZeq"], 1), round(ch["LAeq"], 1), round(ch["LCeq"], 1), round(ch["LZpeak"], 1)
    (94.0, 94.0, 94.0, 97.0)
    >>> section["names"][:3]
    ['LZeq', 'LAeq', 'LCeq']
    """
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
    """The weighting filters' self-test at the recording's sample rate.

    Examples
    --------
    The A-weighting filter at 48 kHz against the design values of IEC 61672-1:2013,
    Table 3 (-19.1 dB at 100 Hz, 0 dB at 1 kHz):

    >>> from piezo.levels.weighting import conformance
    >>> (a,) = conformance_section((conformance("A", 48000.0),))
    >>> a["weighting"], a["passed"]
    ('A', True)
    >>> [(r["nominal_hz"], round(r["design_db"], 1)) for r in a["rows"]
    ...  if r["nominal_hz"] in (100, 1000)]
    [(100, -19.1), (1000, 0.0)]
    """
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
    """The front-end design's summary and modelled response (a FrontendResponse).

    Examples
    --------
    The bundled charge-amplifier design: its 10 s time constant puts the low corner at
    1 / (2π · 10 s) = 15.9 mHz:

    >>> from pathlib import Path
    >>> from piezo.report.run import frontend_response
    >>> design = Path("recordings/designs/pump-disc-charge.toml")
    >>> fe = frontend_section(frontend_response(design, top_hz=24000.0))
    >>> fe["amplifier"], round(fe["time_constant_s"], 3), round(1000 * fe["corner_hz"], 1)
    ('charge', 10.0, 15.9)
    >>> fe["summary"].split("; ")[0]
    'charge amplifier'
    """
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
    """The Welch PSD per channel, in dB re reference²/Hz.

    Examples
    --------
    4800-sample Hann segments at 48 kHz resolve 10 Hz; 0.5 s with 50 % overlap gives
    9 averages:

    >>> import numpy as np
    >>> from piezo.spectral.welch import WelchPSD
    >>> t = np.arange(24000) / 48000.0
    >>> welch = WelchPSD(48000.0, 1, segment_frames=4800)
    >>> welch.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> psd = psd_section(welch.result(), 20e-6, "Pa")
    >>> psd["window"], psd["resolution_hz"], psd["averages"], psd["reference_text"]
    ('hann', 10.0, 9, '20 µPa')
    """
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
    """Band levels per channel (Leq per band, dB re the reference).

    Examples
    --------
    A 1 Pa RMS tone at 1 kHz lands in the 1 kHz octave band at 94 dB re 20 µPa:

    >>> import numpy as np
    >>> from piezo.spectral.bands import BandAnalyzer
    >>> t = np.arange(24000) / 48000.0
    >>> bank = BandAnalyzer(48000.0, 1, fraction=1)
    >>> bank.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> bands = bands_section(bank.result(), 20e-6)
    >>> bands["labels"]
    ['31.5', '63', '125', '250', '500', '1k', '2k', '4k', '8k', '16k']
    >>> round(bands["level_db"][0][bands["labels"].index("1k")], 1)
    94.0
    """
    return {
        "fraction": bands.fraction,
        "labels": [b.label for b in bands.bands],
        "nominal_hz": [float(b.nominal_hz) for b in bands.bands],
        "exact_hz": [float(b.exact_hz) for b in bands.bands],
        "level_db": _columns(bands.level_db(reference)),
    }


def spectrogram_section(sg: SpectrogramResult, reference: float) -> dict[str, Any]:
    """Spectrogram per channel: ``level_db[channel][column][bin]``, dB re reference²/Hz.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.spectral.welch import Spectrogram
    >>> t = np.arange(24000) / 48000.0
    >>> sg = Spectrogram(48000.0, 1, segment_frames=1024, max_columns=8)
    >>> sg.update(np.sin(2 * np.pi * 1000.0 * t)[:, None])
    >>> section = spectrogram_section(sg.result(), 20e-6)
    >>> section["segment_frames"], section["resolution_hz"]  # 48000 / 1024
    (1024, 46.875)
    >>> len(section["level_db"]), len(section["level_db"][0]) == len(section["time_s"])
    (1, True)
    """
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
    """Tone metrics of the channels holding a test tone (None when none does).

    Examples
    --------
    One channel with a 1 kHz tone of 1 Pa RMS (94 dB re 20 µPa), one without:

    >>> import numpy as np
    >>> from piezo.tone.analysis import ToneAnalyzer
    >>> t = np.arange(24000) / 48000.0
    >>> analyzer = ToneAnalyzer(48000.0, 1, resolution_hz=10.0)
    >>> analyzer.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> (tone,) = analyzer.result()
    >>> section = tone_section((tone, "no test tone"), [0, 1], 20e-6)
    >>> first, second = section["channels"]
    >>> round(first["frequency_hz"], 3), round(first["level_db"], 2)
    (1000.0, 93.98)
    >>> second
    {'channel': 1, 'present': False, 'reason': 'no test tone'}
    >>> tone_section(("no test tone",), [0], 20e-6) is None
    True
    """
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
