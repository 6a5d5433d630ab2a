"""The report's JSON document, built from the result objects of one analysis run.

The HTML page is rendered from this document (and figures drawn from the same result
objects), so the page and the JSON file carry the same numbers.
"""

from __future__ import annotations

import math
import platform
from collections.abc import Sequence
from importlib import metadata
from typing import Any

import numpy as np

from piezo import __version__
from piezo.chain.measurement import CalibratedSource, Chain
from piezo.chain.units import format_quantity, ratio_to_db
from piezo.levels.summary import LEVEL_KEYS, Levels
from piezo.levels.weighting import ConformanceReport
from piezo.results import reference_key, shared_value
from piezo.spectral.bands import BandResult
from piezo.spectral.summary import confidence_document, psd_level_unit
from piezo.spectral.welch import PSDResult, SpectrogramResult
from piezo.tone.analysis import ToneResult

__all__ = [
    "CAUTIONS",
    "LEVEL_NAMES",
    "REPORT_SCHEMA",
    "bands_section",
    "chain_section",
    "channel_units",
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
REPORT_SCHEMA = "piezo-report/2"

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


def channel_units(source: CalibratedSource) -> list[dict[str, Any]]:
    """What each analysed channel's values and levels are in: its quantity, unit, level
    unit and level reference (ISO 1683; 1 V uncalibrated), by its own chain.

    Examples
    --------
    >>> import piezo
    >>> (ch,) = channel_units(piezo.open("recordings/calibrator-94dB.wav"))
    >>> ch["channel"], ch["quantity"], ch["unit"], ch["level_unit"], ch["reference_text"]
    (0, 'voltage', 'V', 'dB re 1 V', '1 V')
    """
    return _units(list(source.channel_indices), source.chains)


def _units(channels: Sequence[int], chains: Sequence[Chain]) -> list[dict[str, Any]]:
    return [
        {
            "channel": index,
            "quantity": chain.measured.name,
            "unit": chain.unit,
            "level_unit": chain.level_unit,
            reference_key(chain.unit): chain.reference,
            "reference_text": format_quantity(chain.reference, chain.unit),
        }
        for index, chain in zip(channels, chains, strict=True)
    ]


def _relabel(units: list[dict[str, Any]], scaling: str) -> list[dict[str, Any]]:
    """Channel units with the level unit of a density (``dB re (20 µPa)²/Hz``)."""
    return [{**u, "level_unit": psd_level_unit(u["level_unit"], scaling)} for u in units]


def chain_section(source: CalibratedSource) -> dict[str, Any]:
    """The measurement chain of each channel with the provenance of every value.

    ``unit`` and ``level_unit`` are those all channels share, or None;
    ``shared`` is True when every analysed channel has the same chain (one table on
    the page).

    Examples
    --------
    The bundled calibrator recording: its sidecar sets 2 V full scale and 20 dB gain, and
    no sensitivity yet, so results are in volts at the sensor (2 V / 10 per unit sample):

    >>> import piezo
    >>> chain = chain_section(piezo.open("recordings/calibrator-94dB.wav"))
    >>> chain["unit"], chain["level_unit"], chain["calibrated"], chain["shared"]
    ('V', 'dB re 1 V', False, True)
    >>> (ch,) = chain["channels"]
    >>> ch["gain"], [(row["quantity"], row["value"]) for row in ch["rows"]][1:]
    ... # doctest: +NORMALIZE_WHITESPACE
    (10.0, [('gain between sensor and ADC', '10 V/V (20.00 dB)'),
     ('sensor sensitivity', 'none: results in volts'),
     ('response curve', 'none (flat)'),
     ('level reference', 'dB re 1 V'),
     ('raw sample to calibrated value', '× 0.2 V')])

    The bundled bench of two accelerometers: one profile, a ``[channel.N]`` section
    (sensitivity, and a chart for channel 0) for each:

    >>> bench = chain_section(piezo.open("recordings/accel-bench.flac"))
    >>> bench["unit"], bench["shared"], [ch["sensitivity"] for ch in bench["channels"]]
    ('m/s²', False, ['1.035 mV/(m/s²) (10.15 mV/g)', '1.020 mV/(m/s²) (10.00 mV/g)'])
    >>> bench["channels"][0]["provenance"]["response_curve"]
    'recordings/accel-bench.toml [channel.0]'
    """
    channels = [
        _channel_chain(source, index, chain)
        for index, chain in zip(source.channel_indices, source.chains, strict=True)
    ]
    profiles: dict[str, dict[str, Any]] = {}
    for ch in channels:
        for p in ch["profiles"]:
            profiles.setdefault(p["path"], {k: p[k] for k in _PROFILE_KEYS})
    return {
        "unit": shared_value([ch["unit"] for ch in channels]),
        "level_unit": shared_value([ch["level_unit"] for ch in channels]),
        "calibrated": all(ch["calibrated"] for ch in channels),
        "shared": len({_chain_key(ch) for ch in channels}) == 1,
        "channels": channels,
        "profiles": list(profiles.values()),
    }


_PROFILE_KEYS = ("path", "name", "serial", "calibration_date")


def _chain_key(entry: dict[str, Any]) -> str:
    """What makes two channels' chain tables the same (values and where they came from)."""
    return repr((entry["rows"], [p["path"] for p in entry["profiles"]], entry["sensor"]))


def _channel_chain(source: CalibratedSource, index: int, chain: Chain) -> dict[str, Any]:
    """One channel's chain: its values, its table rows, its provenance and profiles."""
    provenance = source.provenance_of(index)
    prov = provenance.as_dict() if provenance else {}
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
        rows.append({"quantity": "values", "value": "volts as exported (CSV)", "source": "file"})
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
            "quantity": "response curve",
            "value": chain.response_curve_file or "none (flat)",
            "source": origin.get("response_curve", "default")
            if chain.response_curve_file
            else "default",
        }
    )
    rows.append(
        {
            "quantity": "level reference",
            "value": chain.level_unit,
            "source": origin.get("reference_pa", "default")
            if chain.calibrated and chain.measured.name == "pressure"
            else "ISO 1683"
            if chain.calibrated
            else "volts",
        }
    )
    scale = chain.scale(is_pcm=source.recording.is_pcm)
    rows.append(
        {
            "quantity": "raw sample to calibrated value",
            "value": f"× {scale:.6g} {chain.unit}",
            "source": "derived",
        }
    )
    profiles = []
    sensor: dict[str, Any] = {}
    for p in provenance.profiles if provenance is not None else ():
        own = p.channels.get(index)
        entry = {
            "path": str(p.path),
            "name": p.name,
            "serial": p.serial,
            "calibration_date": p.calibration_date,
        }
        profiles.append(entry)
        # The sensor of this channel: its [channel.N] section over the profile's [sensor].
        for key in ("name", "serial", "calibration_date"):
            value = (getattr(own, key) if own is not None else None) or entry[key]
            if value is not None:
                sensor[key] = value
    (units,) = _units([index], [chain])
    return {
        **units,
        "calibrated": chain.calibrated,
        "full_scale_v": chain.full_scale_v,
        "gain": chain.gain,
        "sensitivity_v_per_unit": chain.sensitivity_v_per_unit,
        "sensitivity": chain.sensitivity_text,
        "sensitivity_v_per_pa": sens,
        "response_curve": chain.response_curve_file,
        "sensor": {k: sensor.get(k) for k in ("name", "serial", "calibration_date")},
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


def levels_section(levels: Levels) -> dict[str, Any]:
    """The level set per channel and the level history, each channel in dB re its own
    reference (the levels of ``piezo levels``, :func:`piezo.levels.summary.levels_of`).

    ``level_unit`` (and the reference key) are those the channels share, else
    ``level_unit`` is None and each channel states its own. A- and
    C-weighted levels of channels that do not measure sound pressure are null, with a
    note (IEC 61672-1 defines the weightings for sound pressure).

    Examples
    --------
    A 1 kHz sine of 1 Pa RMS for 0.5 s: 20 lg(1 Pa / 20 µPa) = 94.0 dB for every
    weighting, since A and C are 0 dB at 1 kHz (IEC 61672-1:2013, Table 3), and the peak
    is 3 dB above (crest factor √2):

    >>> import tempfile
    >>> import numpy as np
    >>> import soundfile as sf
    >>> import piezo
    >>> from piezo.levels.summary import levels_of
    >>> folder = tempfile.TemporaryDirectory()
    >>> path = f"{folder.name}/tone.wav"
    >>> t = np.arange(24000) / 48000.0
    >>> sf.write(path, 0.05 * np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t), 48000,
    ...          subtype="FLOAT")
    >>> section = levels_section(levels_of(piezo.open(path, sensitivity="50 mV/Pa")))
    >>> ch = section["channels"][0]
    >>> round(ch["LZeq"], 1), round(ch["LAeq"], 1), round(ch["LCeq"], 1), round(ch["LZpeak"], 1)
    (94.0, 94.0, 94.0, 97.0)
    >>> section["level_unit"], section["reference_pa"], section["names"][:3]
    ('dB re 20 µPa', 2e-05, ['LZeq', 'LAeq', 'LCeq'])

    The same file read as an accelerometer's (10 mV/g): 1 Pa's 50 mV RMS is 5 g,
    20 lg(5 · 9.80665 m/s² / 1 µm/s²) = 153.8 dB re 1 µm/s² (ISO 1683), without A and
    C levels:

    >>> acc = levels_section(levels_of(piezo.open(path, sensitivity="10 mV/g")))
    >>> ch = acc["channels"][0]
    >>> ch["level_unit"], round(ch["LZeq"], 1), ch["LAeq"], ch["notes"][-1][:32]
    ('dB re 1 µm/s²', 153.8, None, 'A and C weightings apply to soun')
    >>> folder.cleanup()
    """
    result = levels.result
    doc = levels.to_dict()
    channels = []
    for entry in doc["channels"]:
        out: dict[str, Any] = {
            k: entry[k]
            for k in ("channel", "quantity", "unit", "level_unit", reference_key(entry["unit"]))
        }
        out.update({name: finite(entry[name]) for name in LEVEL_NAMES})
        out["crest_factor_db"] = finite(entry["crest_factor_db"])
        out["notes"] = list(entry["notes"])
        channels.append(out)
    history = None
    h = result.history
    if h is not None:
        weighted = levels.weighted or (True,) * len(channels)

        def weighted_only(matrix: np.ndarray) -> list[list[float | None] | None]:
            cols: list[list[float | None] | None] = list(_columns(matrix))
            return [c if w else None for c, w in zip(cols, weighted, strict=True)]

        history = {
            "interval_s": h.interval_s,
            "interval_start_s": _series(h.interval_start_s, 6),
            "interval_duration_s": _series(h.interval_duration_s, 6),
            "LAeq": weighted_only(h.LAeq),
            "LCeq": weighted_only(h.LCeq),
            "LZeq": _columns(h.LZeq),
            "trace_interval_s": h.trace_interval_s,
            "trace_time_s": _series(h.trace_time_s, 6),
            "LAF": weighted_only(h.LAF),
            "LAS": weighted_only(h.LAS),
        }
    key = None if doc["unit"] is None else reference_key(doc["unit"])
    shared = {key: doc[key]} if key is not None and key in doc else {}
    return {
        **shared,
        "level_unit": doc["level_unit"],
        "names": list(LEVEL_NAMES),
        "percentile_interval_s": result.percentile_interval_s,
        "excluded_s": dict(result.excluded_s),
        "response_curve_notes": list(levels.response_curve_notes),
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


def _db(mean_square: np.ndarray, reference: float | np.ndarray) -> np.ndarray:
    """Mean squares in dB re ``reference`` (one per channel, along the last axis)."""
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(np.asarray(mean_square, dtype=float) / reference**2)


def psd_section(
    psd: PSDResult, channels: Sequence[int], chains: Sequence[Chain]
) -> dict[str, Any]:
    """The Welch PSD per channel, each in dB re its own reference squared per hertz.

    ``channels`` are the recording's channel numbers of the PSD's columns, ``chains``
    their chains; ``reference_text`` and ``level_unit`` are those the channels share, or
    None (see ``channels``).

    Examples
    --------
    4800-sample Hann segments at 48 kHz resolve 10 Hz; 0.5 s with 50 % overlap gives
    9 averages:

    >>> import numpy as np
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.spectral.welch import WelchPSD
    >>> t = np.arange(24000) / 48000.0
    >>> welch = WelchPSD(48000.0, 1, segment_frames=4800)
    >>> welch.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> psd = psd_section(welch.result(), [0], [Chain(sensitivity_v_per_unit=1.0)])
    >>> psd["window"], psd["resolution_hz"], psd["averages"], psd["reference_text"]
    ('hann', 10.0, 9, '20 µPa')
    >>> psd["level_unit"], psd["channels"][0]["unit"]
    ('dB re (20 µPa)²/Hz', 'Pa')
    """
    units = _relabel(_units(channels, chains), psd.scaling)
    return {
        "window": psd.window,
        "segment_frames": psd.segment_frames,
        "overlap_frames": psd.overlap_frames,
        "resolution_hz": psd.resolution_hz,
        "enbw_hz": psd.enbw_hz,
        "averages": psd.averages,
        "degrees_of_freedom": psd.degrees_of_freedom,
        "confidence": confidence_document(psd),
        "reference_text": shared_value([u["reference_text"] for u in units]),
        "level_unit": shared_value([u["level_unit"] for u in units]),
        "channels": units,
        "frequency_hz": _series(psd.frequency_hz, 4),
        "level_db": _columns(_db(psd.psd, _references(chains))),
    }


def _references(chains: Sequence[Chain]) -> np.ndarray:
    """Each channel's level reference, in its unit (broadcasts over a result's columns)."""
    return np.array([c.reference for c in chains], dtype=float)


def bands_section(
    bands: BandResult, channels: Sequence[int], chains: Sequence[Chain]
) -> dict[str, Any]:
    """Band levels per channel (Leq per band, dB re each channel's own reference).

    Examples
    --------
    A 1 Pa RMS tone at 1 kHz lands in the 1 kHz octave band at 94 dB re 20 µPa:

    >>> import numpy as np
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.spectral.bands import BandAnalyzer
    >>> t = np.arange(24000) / 48000.0
    >>> bank = BandAnalyzer(48000.0, 1, fraction=1)
    >>> bank.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> bands = bands_section(bank.result(), [0], [Chain(sensitivity_v_per_unit=1.0)])
    >>> bands["labels"]
    ['31.5', '63', '125', '250', '500', '1k', '2k', '4k', '8k', '16k']
    >>> round(bands["level_db"][0][bands["labels"].index("1k")], 1)
    94.0
    >>> bands["level_unit"]
    'dB re 20 µPa'
    """
    units = _units(channels, chains)
    return {
        "fraction": bands.fraction,
        "labels": [b.label for b in bands.bands],
        "nominal_hz": [float(b.nominal_hz) for b in bands.bands],
        "exact_hz": [float(b.exact_hz) for b in bands.bands],
        "level_unit": shared_value([u["level_unit"] for u in units]),
        "channels": units,
        "level_db": _columns(bands.level_db(_references(chains))),
    }


def spectrogram_section(
    sg: SpectrogramResult, channels: Sequence[int], chains: Sequence[Chain]
) -> dict[str, Any]:
    """Spectrogram per channel: ``level_db[channel][column][bin]``, each channel in dB re
    its own reference squared per hertz.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.spectral.welch import Spectrogram
    >>> t = np.arange(24000) / 48000.0
    >>> sg = Spectrogram(48000.0, 1, segment_frames=1024, max_columns=8)
    >>> sg.update(np.sin(2 * np.pi * 1000.0 * t)[:, None])
    >>> section = spectrogram_section(sg.result(), [0], [Chain()])  # volts
    >>> section["segment_frames"], section["resolution_hz"]  # 48000 / 1024
    (1024, 46.875)
    >>> len(section["level_db"]), len(section["level_db"][0]) == len(section["time_s"])
    (1, True)
    >>> section["level_unit"]
    'dB re (1 V)²/Hz'
    """
    units = _relabel(_units(channels, chains), "density")
    level = _db(sg.power, _references(chains))  # (columns, bins, channels)
    return {
        "window": sg.window,
        "segment_frames": int(2 * (sg.frequency_hz.size - 1)),
        "resolution_hz": float(sg.frequency_hz[1] - sg.frequency_hz[0]),
        "time_s": _series(sg.time_s, 4),
        "frequency_hz": _series(sg.frequency_hz, 3),
        "segments_per_column": [int(v) for v in sg.segments_per_column],
        "level_unit": shared_value([u["level_unit"] for u in units]),
        "channels": units,
        "level_db": [
            [_series(level[j, :, c], 1) for j in range(level.shape[0])]
            for c in range(level.shape[2])
        ],
    }


def tone_section(
    tones: tuple[ToneResult | str, ...], channels: Sequence[int], chains: Sequence[Chain]
) -> dict[str, Any] | None:
    """Tone metrics of the channels holding a test tone (None when none does), each
    channel's level and RMS in its own unit and level reference.

    Examples
    --------
    One channel with a 1 kHz tone of 1 Pa RMS (94 dB re 20 µPa), one without:

    >>> import numpy as np
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.tone.analysis import ToneAnalyzer
    >>> t = np.arange(24000) / 48000.0
    >>> analyzer = ToneAnalyzer(48000.0, 1, resolution_hz=10.0)
    >>> analyzer.update((np.sqrt(2.0) * np.sin(2 * np.pi * 1000.0 * t))[:, None])
    >>> (tone,) = analyzer.result()
    >>> pa = Chain(sensitivity_v_per_unit=1.0)
    >>> section = tone_section((tone, "no test tone"), [0, 1], [pa, pa])
    >>> first, second = section["channels"]
    >>> round(first["frequency_hz"], 3), round(first["level_db"], 2), first["level_unit"]
    (1000.0, 93.98, 'dB re 20 µPa')
    >>> second
    {'channel': 1, 'present': False, 'reason': 'no test tone'}
    >>> tone_section(("no test tone",), [0], [pa]) is None
    True
    """
    out = []
    for units, chain, tone in zip(_units(channels, chains), chains, tones, strict=True):
        if isinstance(tone, str):
            out.append({"channel": units["channel"], "present": False, "reason": tone})
            continue
        reference = chain.reference
        out.append(
            {
                **units,
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
