"""Capture diagnostics: is a recording sound enough to trust the numbers taken from it?

A :class:`CaptureChecker` reads calibrated blocks once, in order, with bounded memory, and
returns per channel a set of checks, each with a severity (ok / warn / fail), the evidence
and the threshold used:

- clipping: runs of samples at the converter's digital extremes, and analog clipping below
  full scale (flat runs at the observed extreme together with a spike in the histogram of
  sample values there);
- headroom: peak relative to full scale, crest factor;
- DC offset and slow drift (the mean of fixed intervals);
- dropouts: runs of exact zeros or of one repeated value, gaps in a CSV time column;
- mains hum at 50/60 Hz and harmonics, with the level of each line;
- low-frequency roll-off: the effective low corner of the capture fitted to the
  low-frequency part of the power spectral density, or a stated reason why it cannot be
  determined;
- noise floor: the level of the quietest intervals, the PSD floor, and the signal-to-noise
  ratio when a signal stands out of the floor;
- metadata: sample rate in the file against the sidecar, sensitivity missing.

A channel's verdict is the worst severity of its own checks; the file's verdict is the
worst of the channel verdicts and the metadata checks (a file-level warning, such as no
sensitivity given, does not make a sound channel warn).
Thresholds live in :class:`Thresholds`; :func:`load_thresholds` reads them from TOML.

This module is pure analysis: it neither prints nor writes files.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from piezo import validate
from piezo.chain.measurement import CalibratedSource
from piezo.chain.units import format_quantity
from piezo.diagnostics._stream import (
    EMPTY_F,
    ExtremeSide,
    IntervalLevels,
    IntervalStats,
    MaskRuns,
    RunTracker,
)
from piezo.diagnostics.spectral import (
    HumLine,
    HumResult,
    RolloffResult,
    estimate_rolloff,
    measure_hum,
    psd_floor,
)
from piezo.diagnostics.thresholds import (
    Severity,
    Thresholds,
    load_thresholds,
    parse_threshold_assignment,
    worst_severity,
)
from piezo.errors import InputError, RecordingError
from piezo.levels.weighting import MIN_SAMPLE_RATE_HZ, FrequencyWeighting
from piezo.results import reference_key
from piezo.spectral.welch import WelchPSD, segment_frames_for

__all__ = [
    "CaptureChecker",
    "CaptureDiagnostics",
    "CaptureMetadata",
    "ChannelDiagnostics",
    "Check",
    "ClipLevel",
    "ClippingResult",
    "DcResult",
    "DropoutResult",
    "HeadroomResult",
    "HumLine",
    "HumResult",
    "NoiseFloorResult",
    "RolloffResult",
    "Severity",
    "Thresholds",
    "check_capture",
    "checker_for_source",
    "estimate_rolloff",
    "load_thresholds",
    "measure_hum",
    "parse_threshold_assignment",
    "worst_severity",
]


@dataclass(frozen=True)
class CaptureMetadata:
    """What the caller knows about the capture besides its samples.

    Parameters
    ----------
    file_rate_hz
        Sample rate stated in the file header (None when the file has none, e.g. CSV).
    sidecar_rate_hz
        Sample rate stated in a sidecar or profile (None when there is none).
    sensitivity_known
        False when a channel that needs a sensor sensitivity has none (its results stay in
        volts); None when the question does not apply.
    uncalibrated_channels
        The channels (numbers in the file) left without a sensitivity, named in the
        warning when only some of the analysed channels lack one; empty when not known.
    time_gaps
        Number of gaps the CSV reader found in the time column (None when not CSV).
    largest_time_gap_s
        The longest such gap in seconds.

    Examples
    --------
    A sidecar whose sample rate disagrees with the file header fails the capture:

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> meta = CaptureMetadata(file_rate_hz=48000.0, sidecar_rate_hz=44100.0)
    >>> diag = check_capture(x, 48000.0, metadata=meta)
    >>> [(c.name, c.severity.value) for c in diag.metadata_checks], diag.verdict.value
    ([('sample_rate', 'fail')], 'fail')
    """

    file_rate_hz: float | None = None
    sidecar_rate_hz: float | None = None
    sensitivity_known: bool | None = None
    uncalibrated_channels: tuple[int, ...] = ()
    time_gaps: int | None = None
    largest_time_gap_s: float | None = None


# --------------------------------------------------------------------------------------
# Result objects
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Check:
    """One finding: which check, how bad, the evidence and the threshold applied.

    Examples
    --------
    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> c = check_capture(x, 48000.0).channels[0].check("headroom")
    >>> c.severity.value, c.evidence
    ('ok', 'peak -6.02 dBFS, headroom 6.02 dB, crest factor 3.01 dB')
    >>> sorted(c.as_dict())
    ['evidence', 'name', 'severity', 'threshold']
    """

    name: str
    severity: Severity
    evidence: str
    threshold: str

    def as_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "severity": self.severity.value,
            "evidence": self.evidence,
            "threshold": self.threshold,
        }


@dataclass(frozen=True)
class ClipLevel:
    """A clip found on one side of the signal.

    Examples
    --------
    A 100 Hz sine limited at 0.7 of full scale by an analog stage (flat tops below the
    converter's extremes), one clip per period on each side over 1 s:

    >>> import numpy as np
    >>> t = np.arange(48000) / 48000
    >>> x = np.clip(0.9 * np.sin(2 * np.pi * 100 * t), -0.7, 0.7)
    >>> for lv in check_capture(x, 48000.0).channels[0].clipping.levels:
    ...     print(lv.side, lv.kind, lv.level, f"{lv.level_dbfs:.2f}", lv.events)
    positive analog 0.7 -3.10 100
    negative analog -0.7 -3.10 100
    """

    side: str  # "positive" or "negative"
    kind: str  # "digital" or "analog"
    level: float  # in the unit of the samples
    level_dbfs: float | None
    samples: int
    events: int
    spike_ratio: float | None  # None for digital clipping (no histogram test)


@dataclass(frozen=True)
class ClippingResult:
    """Clipping of one channel: clipped samples, events and the clip levels found.

    Examples
    --------
    A 100 Hz sine at 1.5 × full scale, clipped by the converter: |1.5 sin| reaches 1
    for a fraction 1 − (2/π)·arcsin(2/3) = 0.535 of the time (first principles), in two
    events per period:

    >>> import numpy as np
    >>> t = np.arange(48000) / 48000
    >>> x = np.clip(1.5 * np.sin(2 * np.pi * 100 * t), -1.0, 1.0)
    >>> clip = check_capture(x, 48000.0).channels[0].clipping
    >>> clip.events, round(clip.clipped_fraction, 2), [lv.kind for lv in clip.levels]
    (200, 0.54, ['digital', 'digital'])
    """

    clipped_samples: int
    clipped_fraction: float
    events: int
    event_times_s: tuple[float, ...]
    levels: tuple[ClipLevel, ...]
    over_samples: int  # samples beyond full scale (float files); 0 when not applicable
    digital_determinable: bool  # False when the full scale is unknown


@dataclass(frozen=True)
class HeadroomResult:
    """Peak, headroom to full scale, RMS and crest factor of one channel.

    Examples
    --------
    A sine at half of full scale peaks at 20·lg 0.5 = -6.02 dBFS; a sine's crest
    factor is √2, 3.01 dB:

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> h = check_capture(x, 48000.0).channels[0].headroom
    >>> round(h.peak_dbfs, 2), round(h.headroom_db, 2), round(h.crest_factor_db, 2)
    (-6.02, 6.02, 3.01)
    """

    peak: float
    peak_dbfs: float | None
    headroom_db: float | None  # full scale over peak in dB (positive = room left)
    rms: float
    crest_factor_db: float | None


@dataclass(frozen=True)
class DcResult:
    """DC offset and slow drift of one channel.

    Examples
    --------
    A 0.05 offset under a sine of amplitude 0.5 (AC RMS 0.5/√2): 5 % of full scale,
    0.14 × the AC RMS, which warns (from 1 % of full scale by default):

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000) + 0.05
    >>> ch = check_capture(x, 48000.0).channels[0]
    >>> round(ch.dc.dc_fraction_of_fs, 4), round(ch.dc.dc_re_rms, 3)
    (0.05, 0.141)
    >>> ch.check("dc").severity.value
    'warn'
    """

    dc_offset: float  # in the unit of the samples
    dc_offset_v: float | None  # in volts at the sensor output (None: no such factor)
    dc_fraction_of_fs: float | None
    ac_rms: float
    dc_re_rms: float | None  # |DC| / AC RMS
    drift_pp: float | None  # peak-to-peak of interval means
    drift_slope_per_s: float | None
    drift_change: float | None  # |slope| × time between the first and last interval
    drift_re_rms: float | None  # drift_change / AC RMS
    drift_t: float | None  # t statistic of the slope (None with fewer than 4 intervals)
    intervals: int


@dataclass(frozen=True)
class DropoutResult:
    """Runs of zeros or of one repeated value, time-column gaps, silent edges.

    Examples
    --------
    5 ms of zeros (240 samples at 48 kHz) in the middle of a 1 s sine:

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> x[24000:24240] = 0.0
    >>> d = check_capture(x, 48000.0).channels[0].dropouts
    >>> d.zero_runs, d.zero_samples, d.dropout_fraction, d.event_times_s
    (1, 240, 0.005, (0.5,))
    """

    zero_runs: int
    zero_samples: int
    repeat_runs: int
    repeat_samples: int
    dropout_samples: int
    dropout_fraction: float
    event_times_s: tuple[float, ...]
    min_run_samples: int
    time_gaps: int | None
    largest_time_gap_s: float | None
    silent: bool
    leading_s: float  # constant (e.g. silent) run the recording starts with, s
    trailing_s: float  # constant run the recording ends with, s


@dataclass(frozen=True)
class NoiseFloorResult:
    """Noise floor (quietest intervals), signal level, SNR and PSD floor of one channel.

    Examples
    --------
    White noise of RMS 1e-3 (-60 dB re 1 V) throughout and, in the first half second, a
    sine of amplitude 0.1 (RMS 0.1/√2, -23.0 dB re 1 V):

    >>> import numpy as np
    >>> t = np.arange(48000) / 48000
    >>> x = 1e-3 * np.random.default_rng(1).standard_normal(48000)
    >>> x[:24000] += 0.1 * np.sin(2 * np.pi * 1000 * t[:24000])
    >>> n = check_capture(x, 48000.0).channels[0].noise
    >>> round(n.noise_floor_db), round(n.signal_level_db, 1), round(n.snr_db)
    (-60, -23.0, 37)
    """

    noise_floor_db: float | None  # quietest intervals, dB re reference
    noise_floor_a_db: float | None  # the same A-weighted (IEC 61672-1); None below 8 kHz
    signal_level_db: float | None
    snr_db: float | None
    psd_floor_db: float | None  # dB re reference²/Hz
    intervals: int
    silent_intervals: int
    reason: str


@dataclass(frozen=True)
class ChannelDiagnostics:
    """All checks of one channel.

    Examples
    --------
    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> ch = check_capture(x, 48000.0).channels[0]
    >>> ch.verdict.value, [c.name for c in ch.checks]
    ('ok', ['clipping', 'headroom', 'dc', 'dropouts', 'hum', 'rolloff', 'noise'])
    >>> ch.check("dropouts").evidence
    'no dropouts found'
    """

    channel: int
    verdict: Severity
    checks: tuple[Check, ...]
    clipping: ClippingResult
    headroom: HeadroomResult
    dc: DcResult
    dropouts: DropoutResult
    hum: HumResult
    rolloff: RolloffResult
    noise: NoiseFloorResult
    psd_frequencies_hz: np.ndarray = field(repr=False)
    psd: np.ndarray = field(repr=False)
    unit: str = "V"  # unit of the channel's values
    reference: float = 1.0  # reference of its levels, in ``unit`` (ISO 1683)
    full_scale: float | None = 1.0  # the converter's full scale in ``unit``; None: unknown

    @property
    def level_unit(self) -> str:
        """How the channel's levels are labelled: 'dB re 20 µPa', 'dB re 1 µm/s²' ..."""
        return _level_unit(self.reference, self.unit)

    def check(self, name: str) -> Check:
        """The check called ``name``."""
        for c in self.checks:
            if c.name == name:
                return c
        raise KeyError(name)

    def as_dict(self) -> dict[str, Any]:
        """JSON-friendly mapping (the ``piezo check --json`` channel contract)."""
        c, h, d, dr, hu, r, n = (
            self.clipping,
            self.headroom,
            self.dc,
            self.dropouts,
            self.hum,
            self.rolloff,
            self.noise,
        )
        return {
            "channel": self.channel,
            "unit": self.unit,
            "level_unit": self.level_unit,
            reference_key(self.unit): self.reference,
            "full_scale": _num(self.full_scale),
            "verdict": self.verdict.value,
            "clipping": {
                "clipped_samples": c.clipped_samples,
                "clipped_fraction": c.clipped_fraction,
                "events": c.events,
                "event_times_s": list(c.event_times_s),
                "over_samples": c.over_samples,
                "levels": [
                    {
                        "side": lv.side,
                        "kind": lv.kind,
                        "level": lv.level,
                        "level_dbfs": _num(lv.level_dbfs),
                        "samples": lv.samples,
                        "events": lv.events,
                        "spike_ratio": _num(lv.spike_ratio),
                    }
                    for lv in c.levels
                ],
            },
            "headroom_db": _num(h.headroom_db),
            "peak": h.peak,
            "peak_dbfs": _num(h.peak_dbfs),
            "rms": h.rms,
            "crest_factor_db": _num(h.crest_factor_db),
            "dc_offset_v": _num(d.dc_offset_v),
            "dc": {
                "offset": d.dc_offset,
                "fraction_of_full_scale": _num(d.dc_fraction_of_fs),
                "ac_rms": d.ac_rms,
                "re_rms": _num(d.dc_re_rms),
                "drift_pp": _num(d.drift_pp),
                "drift_slope_per_s": _num(d.drift_slope_per_s),
                "drift_change": _num(d.drift_change),
                "drift_re_rms": _num(d.drift_re_rms),
                "drift_t": _num(d.drift_t),
                "intervals": d.intervals,
            },
            "rolloff": {
                "corner_hz": _num(r.corner_hz),
                "status": r.status,
                "order": r.order,
                "upper_bound_hz": _num(r.upper_bound_hz),
                "residual_db": _num(r.residual_db),
                "lowest_content_hz": _num(r.lowest_content_hz),
                "expected_corner_hz": _num(r.expected_corner_hz),
                "reason": r.reason,
                "band_hz": list(r.band_hz),
                "band_level_db": [_num(v) for v in r.band_level_db],
                "fit_level_db": _num(r.fit_level_db),
                "tilt_db_per_decade": _num(r.tilt_db_per_decade),
                "fit_order": r.fit_order,
                "fit_corner_hz": _num(r.fit_corner_hz),
            },
            "dropouts": {
                "zero_runs": dr.zero_runs,
                "zero_samples": dr.zero_samples,
                "repeat_runs": dr.repeat_runs,
                "repeat_samples": dr.repeat_samples,
                "dropout_samples": dr.dropout_samples,
                "dropout_fraction": dr.dropout_fraction,
                "event_times_s": list(dr.event_times_s),
                "min_run_samples": dr.min_run_samples,
                "time_gaps": dr.time_gaps,
                "largest_time_gap_s": _num(dr.largest_time_gap_s),
                "silent": dr.silent,
                "leading_s": dr.leading_s,
                "trailing_s": dr.trailing_s,
            },
            "noise_floor_db": _num(n.noise_floor_db),
            "noise": {
                "noise_floor_db": _num(n.noise_floor_db),
                "noise_floor_a_db": _num(n.noise_floor_a_db),
                "signal_level_db": _num(n.signal_level_db),
                "snr_db": _num(n.snr_db),
                "psd_floor_db": _num(n.psd_floor_db),
                "intervals": n.intervals,
                "silent_intervals": n.silent_intervals,
                "reason": n.reason,
            },
            "hum": {
                "status": hu.status,
                "mains_hz": _num(hu.mains_hz),
                "level_db": _num(hu.level_db),
                "re_total_db": _num(hu.re_total_db),
                "reason": hu.reason,
                "lines": [
                    {
                        "mains_hz": ln.mains_hz,
                        "harmonic": ln.harmonic,
                        "nominal_hz": ln.nominal_hz,
                        "frequency_hz": ln.frequency_hz,
                        "level_db": _num(ln.level_db),
                        "re_total_db": _num(ln.re_total_db),
                        "above_floor_db": _num(ln.above_floor_db),
                        "detected": ln.detected,
                    }
                    for ln in hu.lines
                ],
            },
            "checks": [ck.as_dict() for ck in self.checks],
        }


@dataclass(frozen=True)
class CaptureDiagnostics:
    """The result of :class:`CaptureChecker`: metadata checks and one entry per channel.

    Each channel states its own unit, level reference and full scale
    (:class:`ChannelDiagnostics`); :attr:`unit`, :attr:`reference` and
    :attr:`full_scale` are the values shared by every channel, None where they differ.

    Examples
    --------
    The file's verdict is the worst channel's: a clean channel beside a clipped one.

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> diag = check_capture(np.column_stack([x, np.clip(3 * x, -1, 1)]), 48000.0)
    >>> diag.duration_s, [c.verdict.value for c in diag.channels], diag.verdict.value
    (1.0, ['ok', 'fail'], 'fail')
    >>> diag.as_dict()["channels"][1]["clipping"]["levels"][0]["kind"]
    'digital'
    """

    sample_rate_hz: float
    frames: int
    thresholds: Thresholds
    metadata_checks: tuple[Check, ...]
    channels: tuple[ChannelDiagnostics, ...]

    @property
    def duration_s(self) -> float:
        return self.frames / self.sample_rate_hz

    def _shared(self, values: list[Any]) -> Any:
        return values[0] if values and all(v == values[0] for v in values) else None

    @property
    def unit(self) -> str | None:
        """Unit of the values when every channel has the same, else None."""
        return self._shared([c.unit for c in self.channels])

    @property
    def level_unit(self) -> str | None:
        """Label of the levels when every channel has the same, else None."""
        return self._shared([c.level_unit for c in self.channels])

    @property
    def reference(self) -> float | None:
        """Reference of the levels when every channel has the same, else None."""
        return self._shared([c.reference for c in self.channels])

    @property
    def full_scale(self) -> float | None:
        """Full scale (in :attr:`unit`) when the channels share unit and full scale, else
        None (also when it is unknown)."""
        if self.unit is None:
            return None
        return self._shared([c.full_scale for c in self.channels])

    @property
    def verdict(self) -> Severity:
        """Worst verdict over all channels."""
        return worst_severity(
            [c.verdict for c in self.channels] + [c.severity for c in self.metadata_checks]
        )

    def as_dict(self) -> dict[str, Any]:
        """JSON-friendly mapping (the ``piezo check --json`` contract)."""
        return {
            "sample_rate_hz": self.sample_rate_hz,
            "frames": self.frames,
            "duration_s": self.duration_s,
            "unit": self.unit,
            "reference": self.reference,
            "full_scale": _num(self.full_scale),
            "verdict": self.verdict.value,
            "metadata": [c.as_dict() for c in self.metadata_checks],
            "thresholds": self.thresholds.as_dict(),
            "channels": [c.as_dict() for c in self.channels],
        }


def _pct(fraction: float) -> str:
    """A fraction as a percentage with two significant digits: '0.012 %'."""
    return f"{100 * fraction:.2g} %"


def _num(value: float | None) -> float | None:
    """A finite float, or None (JSON has no infinities)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _level_unit(reference: float, unit: str) -> str:
    """'dB re 20 µPa', 'dB re 1 µm/s²', 'dB re 1 V': a level's reference written out."""
    return f"dB re {format_quantity(reference, unit)}"


def _per_channel(value: Any, channels: int, what: str) -> tuple[Any, ...]:
    """One value for every channel, or a sequence of exactly one per channel."""
    if isinstance(value, str) or not isinstance(value, Sequence | np.ndarray):
        return (value,) * channels
    values = tuple(value)
    if len(values) != channels:
        raise InputError(
            f"{what}: needs one value or one per channel ({channels}), got {len(values)}"
        )
    return values


def _positive(value: Any, what: str) -> float:
    return validate.physical_value(value, what=what)


def _positive_or_none(value: Any, what: str) -> float | None:
    return None if value is None else validate.physical_value(value, what=f"{what} (or None)")


# --------------------------------------------------------------------------------------
# The checker
# --------------------------------------------------------------------------------------


def _not_determinable(
    reason: str, expected_corner_hz: float | None
) -> tuple[HumResult, RolloffResult]:
    """Hum and roll-off results for a channel whose spectrum cannot say anything."""
    hum = HumResult("not determinable", None, None, None, (), reason)
    rolloff = RolloffResult(
        "not determinable", None, None, None, None, None, expected_corner_hz, reason
    )
    return hum, rolloff


class CaptureChecker:
    """Streaming diagnostics of a capture.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz.
    channels
        Number of channels of the blocks.
    full_scale
        The converter's full scale expressed in the unit of the samples (1.0 for PCM
        samples in fractions of full scale; full scale in volts divided by any gain and
        sensitivity for calibrated samples). None when unknown (e.g. a CSV export whose
        instrument range is not given): digital clipping and headroom are then not
        determinable and analog clipping uses tolerances relative to the observed extreme.
        One value for every channel, or a sequence of one per channel (each channel in
        its own unit, through its own chain).
    thresholds
        Limits used by the checks (defaults: :class:`Thresholds`).
    metadata
        What is known besides the samples (:class:`CaptureMetadata`).
    reference
        Reference value for dB levels, in the unit of the samples (1.0 = dB re 1 unit;
        20e-6 for dB re 20 µPa when the samples are in pascals, 1e-6 for dB re 1 µm/s²
        in m/s², ISO 1683). One value, or one per channel.
    unit
        Name of the unit of the samples, for the evidence texts (``"V"``, ``"Pa"``,
        ``"m/s²"`` ...). One name, or one per channel.
    volts_per_unit
        Volts at the sensor output per unit of the samples (the sensitivity in V/Pa for
        pressure samples, in V/(m/s²) for acceleration, 1 for volts), for ``dc_offset_v``;
        None where no such factor exists (an integrated channel: ``dc_offset_v`` is then
        None). One value, or one per channel.
    weightable
        Whether the IEC 61672-1 A weighting applies to a channel (it is defined for sound
        pressure; volts are taken as a microphone's): ``noise_floor_a_db`` is None where
        it does not. One flag, or one per channel; by default True for channels in
        ``"Pa"`` or ``"V"``.
    channel_indices
        Channel numbers in the source file, for the results (default 0, 1, ...).
    expected_frames
        Length of the recording when known in advance; a recording shorter than the
        diagnostic PSD's segment then gets a shorter segment (coarser bins) instead of no
        spectrum.
    spectral
        False leaves out what needs the diagnostic PSD (the hum and roll-off checks, "not
        determinable: spectral checks not asked for", and the noise floor's PSD figure),
        for a caller that needs only the time-domain checks (the batch runner's clipping
        metric).

    Notes
    -----
    Memory is bounded: one PSD segment per channel, fixed histograms and small
    dictionaries near the extremes; nothing grows with the length of the recording.

    Examples
    --------
    Fed in uneven blocks, the checker finds what :func:`check_capture` finds on the
    whole array:

    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> checker = CaptureChecker(48000.0, 1, expected_frames=48000)
    >>> for block in np.array_split(x[:, None], 7):
    ...     checker.update(block)
    >>> streamed = checker.result().channels[0]
    >>> whole = check_capture(x, 48000.0).channels[0]
    >>> [c.severity for c in streamed.checks] == [c.severity for c in whole.checks]
    True
    >>> streamed.headroom.peak == whole.headroom.peak
    True
    >>> abs(streamed.headroom.rms - whole.headroom.rms) < 1e-12  # summation order only
    True

    Channels through different chains: a microphone in pascals beside an accelerometer
    in m/s², each with its own full scale and its own level reference (ISO 1683):

    >>> two = np.column_stack([x, x])
    >>> diag = check_capture(two, 48000.0, full_scale=[2.0, 50.0], unit=["Pa", "m/s²"],
    ...                      reference=[20e-6, 1e-6], volts_per_unit=[0.01, 0.001])
    >>> [(ch.unit, ch.level_unit, ch.full_scale) for ch in diag.channels]
    [('Pa', 'dB re 20 µPa', 2.0), ('m/s²', 'dB re 1 µm/s²', 50.0)]
    >>> diag.channels[1].check("headroom").evidence
    'peak -40.00 dBFS, headroom 40.00 dB, crest factor 3.01 dB'
    >>> diag.unit is None, diag.channels[1].noise.noise_floor_a_db is None
    (True, True)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        full_scale: float | Sequence[float | None] | None = 1.0,
        thresholds: Thresholds | None = None,
        metadata: CaptureMetadata | None = None,
        reference: float | Sequence[float] = 1.0,
        unit: str | Sequence[str] = "V",
        volts_per_unit: float | Sequence[float | None] | None = 1.0,
        weightable: bool | Sequence[bool] | None = None,
        channel_indices: Sequence[int] | None = None,
        expected_frames: int | None = None,
        spectral: bool = True,
    ) -> None:
        validate.sample_rate(sample_rate_hz)
        self.spectral = bool(spectral)
        validate.channel_count(channels)
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = channels
        self.full_scales: tuple[float | None, ...] = tuple(
            _positive_or_none(v, "full_scale")
            for v in _per_channel(full_scale, channels, "full_scale")
        )
        self.references: tuple[float, ...] = tuple(
            _positive(v, "reference") for v in _per_channel(reference, channels, "reference")
        )
        self.units: tuple[str, ...] = tuple(str(v) for v in _per_channel(unit, channels, "unit"))
        self.volts_per_unit: tuple[float | None, ...] = tuple(
            _positive_or_none(v, "volts_per_unit")
            for v in _per_channel(volts_per_unit, channels, "volts_per_unit")
        )
        if weightable is None:
            self.weightable: tuple[bool, ...] = tuple(u in ("Pa", "V") for u in self.units)
        else:
            self.weightable = tuple(
                bool(v) for v in _per_channel(weightable, channels, "weightable")
            )
        self.thresholds = thresholds or Thresholds()
        self.metadata = metadata or CaptureMetadata()
        if channel_indices is None:
            channel_indices = list(range(channels))
        if len(channel_indices) != channels:
            raise InputError(
                f"channel_indices: needs {channels} entries, got {list(channel_indices)!r}"
            )
        self.channel_indices = [int(c) for c in channel_indices]
        th = self.thresholds
        fs = self.sample_rate_hz
        self.frames = 0
        # Whole-channel mean and M2 (Chan et al. pairwise update).
        self._mean = np.zeros(channels)
        self._m2 = np.zeros(channels)
        self._peak = np.zeros(channels)
        self._over = np.zeros(channels, dtype=np.int64)
        # Full scale per channel as an array (inf where unknown: nothing lies beyond it).
        self._fs_array = np.array([math.inf if v is None else v for v in self.full_scales])
        # Clipping: tolerances relative to each channel's own full scale.
        abs_tol = [None if v is None else th.clip_level_tolerance * v for v in self.full_scales]
        flat_tol = [0.0 if v is None else th.clip_flat_tolerance * v for v in self.full_scales]
        self._pos = [
            ExtremeSide(abs_tol[c], th.clip_level_tolerance, th.max_event_times)
            for c in range(channels)
        ]
        self._neg = [
            ExtremeSide(abs_tol[c], th.clip_level_tolerance, th.max_event_times)
            for c in range(channels)
        ]
        self._flat = [RunTracker(flat_tol[c]) for c in range(channels)]
        # Digital clipping per side: [runs tracker, [samples, events, times]].
        self._digital: list[dict[str, tuple[MaskRuns, list[Any]]]] = [
            {side: (MaskRuns(), [0, 0, []]) for side in ("positive", "negative")}
            for _ in range(channels)
        ]
        # Dropouts.
        self._dropout_min = max(th.dropout_min_samples, round(th.dropout_min_duration_s * fs))
        self._exact = [RunTracker(0.0) for _ in range(channels)]
        self._zero_acc: list[list[Any]] = [[0, 0, []] for _ in range(channels)]
        self._repeat_acc: list[dict[float, list[Any]]] = [{} for _ in range(channels)]
        self._repeat_other: list[list[Any]] = [[0, 0, []] for _ in range(channels)]
        self._leading = [0] * channels  # frames of the constant run the recording opens with
        # DC drift.
        self._drift_len = max(1, round(th.drift_interval_s * fs))
        self._drift = IntervalStats(self._drift_len, channels)
        self._drift_n = np.zeros(channels)
        self._drift_min = np.full(channels, math.inf)
        self._drift_max = np.full(channels, -math.inf)
        self._drift_st = np.zeros(channels)
        self._drift_stt = np.zeros(channels)
        self._drift_sm = np.zeros(channels)
        self._drift_stm = np.zeros(channels)
        self._drift_smm = np.zeros(channels)
        self._drift_m0 = np.full(channels, math.nan)  # first interval mean (origin of sums)
        # Noise floor.
        self._noise_len = max(1, round(th.noise_interval_s * fs))
        refs = np.array(self.references)
        self._noise = IntervalLevels(self._noise_len, channels, refs)
        # The same through the IEC 61672-1 A weighting (not below its minimum rate), for
        # the channels it applies to (sound pressure, or volts).
        self._weighted = [c for c in range(channels) if self.weightable[c]]
        self._weight_a: FrequencyWeighting | None = None
        self._noise_a: IntervalLevels | None = None
        if fs >= MIN_SAMPLE_RATE_HZ and self._weighted:
            n_a = len(self._weighted)
            self._weight_a = FrequencyWeighting(fs, n_a, weighting="A")
            self._noise_a = IntervalLevels(self._noise_len, n_a, refs[self._weighted])
        # Diagnostic PSD (Welch, Hann, 50 % overlap; piezo.spectral.welch). A recording known
        # to be shorter than a segment gets the longest power-of-two segment that fits.
        segment = segment_frames_for(fs, th.spectrum_resolution_hz)
        if expected_frames is not None and expected_frames < segment:
            segment = 2 ** max(int(math.floor(math.log2(max(expected_frames, 64)))), 6)
        self._spectrum = WelchPSD(fs, channels, segment_frames=segment, window="hann")

    # ---------------------------------------------------------------- update
    def update(self, block: np.ndarray) -> None:
        """Feed the next block of samples, shape (frames, channels) (1-D for one channel)."""
        x = validate.signal_block(block, self.channels, start_frame=self.frames)
        n = x.shape[0]
        if n == 0:
            return
        offset = self.frames
        # Whole-channel statistics.
        mb = x.mean(axis=0)
        m2b = ((x - mb) ** 2).sum(axis=0)
        na = self.frames
        tot = na + n
        delta = mb - self._mean
        self._mean = self._mean + delta * (n / tot)
        self._m2 = self._m2 + m2b + delta**2 * (na * n / tot)
        ax = np.abs(x)
        self._peak = np.maximum(self._peak, ax.max(axis=0))
        th = self.thresholds
        self._over += (ax > self._fs_array).sum(axis=0)
        for c in range(self.channels):
            xc = x[:, c]
            # Analog clipping bookkeeping at both extremes.
            self._pos[c].add_samples(xc)
            self._neg[c].add_samples(-xc)
            s, ln, v = self._flat[c].feed(xc, offset)
            self._add_flat_runs(c, s, ln, v)
            # Digital clipping: runs of samples at the extremes of the channel's own scale.
            full_scale = self.full_scales[c]
            if full_scale is not None:
                digital_level = th.digital_clip_level * full_scale
                for side, mask in (
                    ("positive", xc >= digital_level),
                    ("negative", xc <= -digital_level),
                ):
                    tracker, acc = self._digital[c][side]
                    ds, dl = tracker.feed(mask, offset)
                    self._add_digital(acc, ds, dl)
            # Dropouts: runs of one exact value.
            s, ln, v = self._exact[c].feed(xc, offset)
            self._add_exact_runs(c, s, ln, v)
        if self.spectral:
            self._spectrum.update(x)
        self._update_drift(x)
        self._noise.update(x)
        if self._weight_a is not None and self._noise_a is not None:
            self._noise_a.update(self._weight_a.update(x[:, self._weighted]))
        self.frames += n

    def _add_flat_runs(self, c: int, s: np.ndarray, ln: np.ndarray, v: np.ndarray) -> None:
        keep = ln >= self.thresholds.clip_min_run
        if keep.any():
            self._pos[c].add_runs(s[keep], ln[keep], v[keep])
            self._neg[c].add_runs(s[keep], ln[keep], -v[keep])

    def _add_digital(self, acc: list[Any], s: np.ndarray, ln: np.ndarray) -> None:
        keep = ln >= self.thresholds.clip_min_run
        for start, length in zip(s[keep].tolist(), ln[keep].tolist(), strict=True):
            acc[0] += length
            acc[1] += 1
            if len(acc[2]) < self.thresholds.max_event_times:
                acc[2].append(start)

    def _add_exact_runs(self, c: int, s: np.ndarray, ln: np.ndarray, v: np.ndarray) -> None:
        keep = ln >= self._dropout_min
        if not keep.any():
            return
        max_t = self.thresholds.max_event_times
        table = self._repeat_acc[c]
        for start, length, value in zip(
            s[keep].tolist(), ln[keep].tolist(), v[keep].tolist(), strict=True
        ):
            if start == 0:
                self._leading[c] = length  # silence or a held value before the signal
                continue
            if value == 0.0:
                acc = self._zero_acc[c]
            elif value in table or len(table) < 64:
                acc = table.setdefault(value, [0, 0, []])
            else:
                acc = self._repeat_other[c]
            acc[0] += length
            acc[1] += 1
            if len(acc[2]) < max_t:
                acc[2].append(start)

    def _update_drift(self, x: np.ndarray) -> None:
        idx, means, _ = self._drift.update(x)
        if idx.size == 0:
            return
        t = (idx + 0.5) * self._drift_len / self.sample_rate_hz
        self._drift_n += idx.size
        self._drift_min = np.minimum(self._drift_min, means.min(axis=0))
        self._drift_max = np.maximum(self._drift_max, means.max(axis=0))
        self._drift_st += t.sum()
        self._drift_stt += (t**2).sum()
        if self._drift_n[0] == idx.size:  # the first intervals: fix the origin
            self._drift_m0 = means[0].copy()
        m = means - self._drift_m0
        self._drift_sm += m.sum(axis=0)
        self._drift_stm += (t[:, None] * m).sum(axis=0)
        self._drift_smm += (m**2).sum(axis=0)

    # ---------------------------------------------------------------- result
    def result(self) -> CaptureDiagnostics:
        """Diagnostics of everything fed so far (the checker may be fed further)."""
        if self.frames == 0:
            raise RecordingError("the recording holds no samples; nothing to check")
        th = self.thresholds
        spec = self._spectrum.result() if self.spectral and self._spectrum_ready() else None
        meta_checks = self._metadata_checks()
        channels = []
        for c in range(self.channels):
            clipping, clip_check, clip_levels = self._clipping(c)
            headroom, headroom_check = self._headroom(c)
            dc, dc_check = self._dc(c)
            dropouts, dropout_check = self._dropouts(c, clip_levels)
            ac_power = dc.ac_rms**2
            if spec is None:
                reason = (
                    "spectral checks not asked for"
                    if not self.spectral
                    else "recording shorter than one spectrum segment "
                    f"({self._spectrum.segment_frames / self.sample_rate_hz:.3g} s)"
                )
                hum, rolloff = _not_determinable(reason, th.rolloff_expected_hz)
                freqs = EMPTY_F
                psd_c = EMPTY_F
                psd_floor_db = None
            else:
                freqs, dof = spec.frequency_hz, spec.degrees_of_freedom
                psd_c = spec.psd[:, c]
                if ac_power > 0:
                    hum = measure_hum(
                        freqs,
                        psd_c,
                        total_power=ac_power,
                        degrees_of_freedom=dof,
                        reference=self.references[c],
                        thresholds=th,
                    )
                    exclude = [ln.frequency_hz for ln in hum.lines if ln.detected]
                    rolloff = estimate_rolloff(
                        freqs,
                        psd_c,
                        degrees_of_freedom=dof,
                        exclude_hz=exclude,
                        reference=self.references[c],
                        thresholds=th,
                    )
                else:
                    reason = "channel carries no signal"
                    hum, rolloff = _not_determinable(reason, th.rolloff_expected_hz)
                psd_floor_db = self._psd_floor_db(c, freqs, psd_c, dof)
            hum_check = self._hum_check(c, hum)
            rolloff_check = self._rolloff_check(rolloff)
            noise, noise_check = self._noise_floor(c, psd_floor_db)
            checks = (
                clip_check,
                headroom_check,
                dc_check,
                dropout_check,
                hum_check,
                rolloff_check,
                noise_check,
            )
            # File-level (metadata) checks make the file's verdict, not the channel's.
            verdict = worst_severity([k.severity for k in checks])
            channels.append(
                ChannelDiagnostics(
                    channel=self.channel_indices[c],
                    verdict=verdict,
                    checks=checks,
                    clipping=clipping,
                    headroom=headroom,
                    dc=dc,
                    dropouts=dropouts,
                    hum=hum,
                    rolloff=rolloff,
                    noise=noise,
                    psd_frequencies_hz=freqs,
                    psd=psd_c,
                    unit=self.units[c],
                    reference=self.references[c],
                    full_scale=self.full_scales[c],
                )
            )
        return CaptureDiagnostics(
            sample_rate_hz=self.sample_rate_hz,
            frames=self.frames,
            thresholds=th,
            metadata_checks=meta_checks,
            channels=tuple(channels),
        )

    # ---------------------------------------------------------------- pieces
    def _fmt(self, c: int, value: float) -> str:
        """A value of channel ``c`` with its unit: '1.013 Pa', '2.5 m/s²'."""
        return format_quantity(value, self.units[c])

    def _ref(self, c: int) -> str:
        """Channel ``c``'s level unit: 'dB re 20 µPa', 'dB re 1 µm/s²', 'dB re 1 V' ..."""
        return _level_unit(self.references[c], self.units[c])

    def _dbfs(self, c: int, value: float) -> float | None:
        full_scale = self.full_scales[c]
        if full_scale is None or value <= 0:
            return None
        return 20 * math.log10(value / full_scale)

    def _clipping(self, c: int) -> tuple[ClippingResult, Check, list[tuple[float, float]]]:
        th = self.thresholds
        fs = self.sample_rate_hz
        levels: list[ClipLevel] = []
        clip_values: list[tuple[float, float]] = []  # (level, tol) of detected analog clips
        times: list[int] = []
        total = 0
        events = 0
        digital_level = None
        full_scale = self.full_scales[c]
        if full_scale is not None:
            digital_level = th.digital_clip_level * full_scale
            for side_name, (tracker, acc) in self._digital[c].items():
                samples, n_ev, t = acc[0], acc[1], list(acc[2])
                ds, dl = tracker.pending()
                if dl.size and dl[0] >= th.clip_min_run:
                    samples += int(dl[0])
                    n_ev += 1
                    if len(t) < th.max_event_times:
                        t.append(int(ds[0]))
                if not samples:
                    continue
                ext = self._pos[c].extreme if side_name == "positive" else self._neg[c].extreme
                level = ext if side_name == "positive" else -ext
                levels.append(
                    ClipLevel(side_name, "digital", level, self._dbfs(c, ext), samples, n_ev, None)
                )
                total += samples
                events += n_ev
                times.extend(t)
        mean = float(self._mean[c])
        for side_name, side in (("positive", self._pos[c]), ("negative", self._neg[c])):
            ext = side.extreme
            other = self._neg[c].extreme if side_name == "positive" else self._pos[c].extreme
            if not math.isfinite(ext) or ext <= (mean if side_name == "positive" else -mean):
                continue
            if ext + other <= 0:  # constant channel: no extreme to speak of
                continue
            if digital_level is not None and ext >= digital_level:
                continue  # counted as digital clipping
            tmp = side.copy()
            s, ln, v = self._flat[c].pending()
            keep = ln >= th.clip_min_run
            tmp.add_runs(s[keep], ln[keep], (v if side_name == "positive" else -v)[keep])
            ratio, tol, samples, n_ev, t = tmp.evaluate()
            if samples >= th.clip_min_run and ratio >= th.clip_spike_ratio:
                level = ext if side_name == "positive" else -ext
                levels.append(
                    ClipLevel(side_name, "analog", level, self._dbfs(c, ext), samples, n_ev, ratio)
                )
                clip_values.append((level, tol))
                total += samples
                events += n_ev
                times.extend(t)
        fraction = total / self.frames
        event_times = tuple(i / fs for i in sorted(times)[: th.max_event_times])
        result = ClippingResult(
            clipped_samples=total,
            clipped_fraction=fraction,
            events=events,
            event_times_s=event_times,
            levels=tuple(levels),
            over_samples=int(self._over[c]),
            digital_determinable=full_scale is not None,
        )
        threshold = (
            f"clip = run of >= {th.clip_min_run} samples at >= {th.digital_clip_level:g} of "
            f"full scale, or flat at the extreme with value-histogram spike >= "
            f"{th.clip_spike_ratio:g}; any clip warns, fail from {_pct(th.clip_fail_fraction)} "
            "of samples"
        )
        if total == 0 and result.over_samples == 0:
            evidence = "no clipping found"
            if full_scale is None:
                evidence += " (full scale unknown: digital clipping not determinable)"
            return result, Check("clipping", Severity.OK, evidence, threshold), clip_values
        parts = []
        for lv in levels:
            where = f"{self._fmt(c, lv.level)}"
            if lv.level_dbfs is not None:
                where += f" ({lv.level_dbfs:.2f} dBFS)"
            parts.append(f"{lv.kind} clip at {where} on the {lv.side} side")
        evidence = (
            f"{total} clipped samples ({_pct(fraction)}) in {events} events"
            + (f"; {'; '.join(parts)}" if parts else "")
            + (f"; first at {event_times[0]:.4g} s" if event_times else "")
        )
        if result.over_samples:
            evidence += f"; {result.over_samples} samples beyond full scale"
        severity = (
            Severity.FAIL
            if fraction >= th.clip_fail_fraction or result.over_samples
            else Severity.WARN
        )
        return result, Check("clipping", severity, evidence, threshold), clip_values

    def _ac_rms(self, c: int) -> float:
        return math.sqrt(max(float(self._m2[c]) / self.frames, 0.0))

    def _headroom(self, c: int) -> tuple[HeadroomResult, Check]:
        th = self.thresholds
        peak = float(self._peak[c])
        mean = float(self._mean[c])
        rms = math.sqrt(self._ac_rms(c) ** 2 + mean**2)
        crest = 20 * math.log10(peak / rms) if rms > 0 and peak > 0 else None
        peak_dbfs = self._dbfs(c, peak)
        headroom = None if peak_dbfs is None else -peak_dbfs
        result = HeadroomResult(peak, peak_dbfs, headroom, rms, crest)
        threshold = (
            f"warn when headroom < {th.headroom_warn_db:g} dB, or peak < "
            f"{th.underrange_warn_dbfs:g} dBFS (little of the range used)"
        )
        crest_text = f", crest factor {crest:.2f} dB" if crest is not None else ""
        if self.full_scales[c] is None:
            return result, Check(
                "headroom",
                Severity.OK,
                f"peak {self._fmt(c, peak)}{crest_text}; full scale unknown, headroom not "
                "determinable",
                threshold,
            )
        if peak_dbfs is None:
            return result, Check("headroom", Severity.WARN, "peak is zero: no signal", threshold)
        headroom = -peak_dbfs
        evidence = f"peak {peak_dbfs:.2f} dBFS, headroom {headroom:.2f} dB{crest_text}"
        if headroom < th.headroom_warn_db:
            sev = Severity.WARN
            evidence += ": the peak reaches full scale"
        elif peak_dbfs < th.underrange_warn_dbfs:
            sev = Severity.WARN
            evidence += ": the signal uses little of the converter's range"
        else:
            sev = Severity.OK
        return result, Check("headroom", sev, evidence, threshold)

    def _dc(self, c: int) -> tuple[DcResult, Check]:
        th = self.thresholds
        dc = float(self._mean[c])
        ac = self._ac_rms(c)
        full_scale = self.full_scales[c]
        volts_per_unit = self.volts_per_unit[c]
        frac = abs(dc) / full_scale if full_scale is not None else None
        re_rms = abs(dc) / ac if ac > 0 else None
        n = float(self._drift_n[c])
        drift_pp = slope = change = drift_re = t_stat = None
        if n >= 2:
            drift_pp = float(self._drift_max[c] - self._drift_min[c])
            # Least-squares line through the interval means: slope, and its t statistic
            # from the scatter about the line (n - 2 degrees of freedom).
            sxx = float(self._drift_stt[c] - self._drift_st[c] ** 2 / n)
            if sxx > 0:
                sxy = float(self._drift_stm[c] - self._drift_st[c] * self._drift_sm[c] / n)
                syy = float(self._drift_smm[c] - self._drift_sm[c] ** 2 / n)
                slope = sxy / sxx
                span_s = (n - 1) * self._drift_len / self.sample_rate_hz
                change = abs(slope) * span_s
                drift_re = change / ac if ac > 0 else None
                if n >= 4:
                    resid = max(syy - slope * sxy, 0.0) / (n - 2)
                    t_stat = abs(slope) / math.sqrt(resid / sxx) if resid > 0 else math.inf
        result = DcResult(
            dc,
            None if volts_per_unit is None else dc * volts_per_unit,
            frac,
            ac,
            re_rms,
            drift_pp,
            slope,
            change,
            drift_re,
            t_stat,
            int(n),
        )
        threshold = (
            f"|DC| warns from {_pct(th.dc_warn_fraction)} of full scale or "
            f"{th.dc_warn_ratio:g} × AC RMS, fails from {_pct(th.dc_fail_fraction)} of full "
            f"scale; a trend of the {th.drift_interval_s:g} s means warns when it changes by "
            f">= {th.drift_warn_ratio:g} × AC RMS with t >= {th.drift_min_t:g}"
        )
        evidence = f"DC {self._fmt(c, dc)}"
        if frac is not None:
            evidence += f" ({_pct(frac)} of full scale)"
        if re_rms is not None:
            evidence += f" = {re_rms:.2g} × AC RMS"
        drifting = (
            drift_re is not None
            and t_stat is not None
            and drift_re >= th.drift_warn_ratio
            and t_stat >= th.drift_min_t
        )
        if drift_pp is not None and slope is not None:
            evidence += (
                f"; means of {int(n)} intervals spread {self._fmt(c, drift_pp)} p-p, trend "
                f"{self._fmt(c, slope)}/s"
            )
            if t_stat is None:
                evidence += " (too few intervals to judge)"
            elif drifting and change is not None:
                evidence += (
                    f": drift of {self._fmt(c, change)} over the recording (t = {t_stat:.3g})"
                )
            else:
                evidence += f" (no steady drift, t = {t_stat:.2g})"
        else:
            evidence += "; drift not determinable (shorter than two intervals)"
        sev = Severity.OK
        if frac is not None and frac >= th.dc_fail_fraction:
            sev = Severity.FAIL
        elif (frac is not None and frac >= th.dc_warn_fraction) or (
            re_rms is not None and re_rms >= th.dc_warn_ratio
        ):
            sev = Severity.WARN
        if drifting and sev is Severity.OK:
            sev = Severity.WARN
        return result, Check("dc", sev, evidence, threshold)

    def _dropouts(
        self, c: int, clip_levels: list[tuple[float, float]]
    ) -> tuple[DropoutResult, Check]:
        th = self.thresholds
        zero = [self._zero_acc[c][0], self._zero_acc[c][1], list(self._zero_acc[c][2])]
        table = {k: [v[0], v[1], list(v[2])] for k, v in self._repeat_acc[c].items()}
        ro = self._repeat_other[c]
        other = [ro[0], ro[1], list(ro[2])]
        full_scale = self.full_scales[c]
        digital = th.digital_clip_level * full_scale if full_scale is not None else None
        leading = self._leading[c]
        trailing = 0
        constant = False
        s, ln, v = self._exact[c].pending()
        if ln.size and ln[0] >= self._dropout_min:
            value = float(v[0])
            at_clip = (digital is not None and abs(value) >= digital) or any(
                abs(value - lv) <= tol for lv, tol in clip_levels
            )
            if int(s[0]) == 0:
                constant = True  # one value from the first sample to the last
            elif not at_clip:
                trailing = int(ln[0])  # silence or a held value after the signal
        rep_samples, rep_runs = other[0], other[1]
        times = list(zero[2]) + list(other[2])
        for value, (n, ev, t) in table.items():
            if digital is not None and abs(value) >= digital:
                continue  # digital clipping
            if any(abs(value - lv) <= tol for lv, tol in clip_levels):
                continue  # analog clipping
            rep_samples += n
            rep_runs += ev
            times.extend(t)
        silent = bool(self._peak[c] == 0) or constant
        total = zero[0] + rep_samples
        fraction = total / self.frames
        event_times = tuple(i / self.sample_rate_hz for i in sorted(times)[: th.max_event_times])
        meta = self.metadata
        result = DropoutResult(
            zero_runs=zero[1],
            zero_samples=zero[0],
            repeat_runs=rep_runs,
            repeat_samples=rep_samples,
            dropout_samples=total,
            dropout_fraction=fraction,
            event_times_s=event_times,
            min_run_samples=self._dropout_min,
            time_gaps=meta.time_gaps,
            largest_time_gap_s=meta.largest_time_gap_s,
            silent=silent,
            leading_s=0.0 if constant else leading / self.sample_rate_hz,
            trailing_s=trailing / self.sample_rate_hz,
        )
        threshold = (
            f"dropout = run of >= {self._dropout_min} equal samples inside the recording; any "
            f"dropout or time-column gap warns, fail from {_pct(th.dropout_fail_fraction)} "
            f"of samples; constant start and end warn from "
            f"{_pct(th.edge_silence_warn_fraction)} of the recording"
        )
        if silent:
            what = "every sample is zero" if self._peak[c] == 0 else "one value throughout"
            return result, Check(
                "dropouts",
                Severity.FAIL,
                f"{what}: the channel carries no signal",
                threshold,
            )
        edge_fraction = (leading + trailing) / self.frames
        parts = []
        if zero[1]:
            parts.append(f"{zero[1]} runs of zeros ({zero[0]} samples)")
        if rep_runs:
            parts.append(f"{rep_runs} runs of a repeated value ({rep_samples} samples)")
        if meta.time_gaps:
            gap = (
                f", largest {meta.largest_time_gap_s:.4g} s"
                if meta.largest_time_gap_s is not None
                else ""
            )
            parts.append(f"{meta.time_gaps} gaps in the time column{gap}")
        edges = []
        if leading:
            edges.append(f"starts with {leading / self.sample_rate_hz:.4g} s of one value")
        if trailing:
            edges.append(f"ends with {trailing / self.sample_rate_hz:.4g} s of one value")
        edge_text = "; ".join(edges)
        edge_sev = Severity.WARN if edge_fraction >= th.edge_silence_warn_fraction else Severity.OK
        if not parts:
            evidence = "no dropouts found" + (f" (recording {edge_text})" if edges else "")
            return result, Check("dropouts", edge_sev, evidence, threshold)
        evidence = "; ".join(parts) + f" ({_pct(fraction)} of samples)"
        if event_times:
            evidence += f"; first at {event_times[0]:.4g} s"
        if edges:
            evidence += f"; recording {edge_text}"
        sev = Severity.FAIL if fraction >= th.dropout_fail_fraction else Severity.WARN
        return result, Check("dropouts", worst_severity([sev, edge_sev]), evidence, threshold)

    def _spectrum_ready(self) -> bool:
        """True once the diagnostic PSD has at least one segment."""
        return self.frames >= self._spectrum.segment_frames

    def _psd_floor_db(
        self, c: int, freqs: np.ndarray, psd: np.ndarray, dof: float
    ) -> float | None:
        floor = psd_floor(
            freqs, psd, degrees_of_freedom=dof, percentile=self.thresholds.noise_floor_percentile
        )
        if floor is None or floor <= 0:
            return None
        return 10 * math.log10(floor / self.references[c] ** 2)

    def _hum_check(self, c: int, hum: HumResult) -> Check:
        th = self.thresholds
        threshold = (
            f"hum = line >= {th.hum_detect_db:g} dB above the local floor; warns from "
            f"{th.hum_warn_db:g} dB, fails from {th.hum_fail_db:g} dB re the AC power"
        )
        if hum.status != "detected":
            text = (
                "no mains hum found" if hum.status == "none" else f"not determinable: {hum.reason}"
            )
            return Check("hum", Severity.OK, text, threshold)
        found = [ln for ln in hum.lines if ln.detected and ln.mains_hz == hum.mains_hz]
        harmonics = ", ".join(f"{ln.frequency_hz:.4g} Hz" for ln in found)
        rel = hum.re_total_db
        evidence = (
            f"mains {hum.mains_hz:g} Hz: lines at {harmonics}; together "
            f"{hum.level_db:.1f} {self._ref(c)}"
            + (f", {rel:.1f} dB re the AC power" if rel is not None else "")
        )
        sev = Severity.OK
        if rel is not None and rel >= th.hum_fail_db:
            sev = Severity.FAIL
        elif rel is not None and rel >= th.hum_warn_db:
            sev = Severity.WARN
        return Check("hum", sev, evidence, threshold)

    def _rolloff_check(self, r: RolloffResult) -> Check:
        th = self.thresholds
        exp = th.rolloff_expected_hz
        threshold = (
            f"expected corner {exp:g} Hz ± {_pct(th.rolloff_tolerance)}"
            if exp is not None
            else "no expected corner given"
        ) + f"; fit misfit <= {th.rolloff_max_residual_db:g} dB"
        if r.status == "estimated":
            assert r.corner_hz is not None  # an estimate always has its corner
            evidence = f"corner {r.corner_hz:.3g} Hz ({r.reason})"
            sev = Severity.OK
            if exp is not None and abs(r.corner_hz / exp - 1.0) > th.rolloff_tolerance:
                sev = Severity.WARN
                evidence += f"; expected {exp:g} Hz"
            return Check("rolloff", sev, evidence, threshold)
        if r.status == "below range":
            assert r.upper_bound_hz is not None  # "below range" always has its bound
            evidence = f"corner below {r.upper_bound_hz:.3g} Hz ({r.reason})"
            sev = Severity.OK
            if exp is not None and exp > r.upper_bound_hz * (1 + th.rolloff_tolerance):
                sev = Severity.WARN
                evidence += f"; expected {exp:g} Hz"
            return Check("rolloff", sev, evidence, threshold)
        return Check("rolloff", Severity.OK, f"not determinable: {r.reason}", threshold)

    def _noise_floor(self, c: int, psd_floor: float | None) -> tuple[NoiseFloorResult, Check]:
        th = self.thresholds
        intervals = int(self._noise.completed)
        silent = int(self._noise.silent[c])
        floor = self._noise.percentile_db(c, th.noise_floor_percentile)
        sig = self._noise.percentile_db(c, th.signal_percentile)
        floor_a = (
            self._noise_a.percentile_db(self._weighted.index(c), th.noise_floor_percentile)
            if self._noise_a is not None and c in self._weighted
            else None
        )
        threshold = (
            f"floor / signal = {th.noise_floor_percentile:g}th / "
            f"{th.signal_percentile:g}th percentile of {th.noise_interval_s:g} s levels; "
            f"SNR given when >= {th.signal_presence_db:g} dB, warns below "
            f"{th.snr_warn_db:g} dB"
        )
        ref = self._ref(c)
        if floor is None or sig is None:
            reason = (
                "shorter than one noise interval"
                if intervals == 0
                else "every interval is digital silence"
            )
            res = NoiseFloorResult(None, None, None, None, psd_floor, intervals, silent, reason)
            return res, Check(
                "noise", Severity.OK, f"noise floor not determinable: {reason}", threshold
            )
        snr = sig - floor
        evidence = f"quietest intervals {floor:.1f} {ref}"
        if floor_a is not None:
            evidence += f" ({floor_a:.1f} dB A-weighted)"
        if psd_floor is not None:
            evidence += (
                f"; PSD floor {psd_floor:.1f} dB re "
                f"({format_quantity(self.references[c], self.units[c])})²/Hz"
            )
        if silent:
            evidence += f"; {silent} silent intervals"
        if snr >= th.signal_presence_db:
            reason = "signal stands out of the quietest intervals"
            res = NoiseFloorResult(floor, floor_a, sig, snr, psd_floor, intervals, silent, reason)
            evidence += f"; signal {sig:.1f} {ref}, SNR {snr:.1f} dB"
            sev = Severity.WARN if snr < th.snr_warn_db else Severity.OK
            return res, Check("noise", sev, evidence, threshold)
        reason = (
            f"steady recording: loud and quiet intervals within {th.signal_presence_db:g} dB, "
            "no SNR"
        )
        res = NoiseFloorResult(floor, floor_a, sig, None, psd_floor, intervals, silent, reason)
        return res, Check("noise", Severity.OK, evidence + f"; {reason}", threshold)

    def _metadata_checks(self) -> tuple[Check, ...]:
        th = self.thresholds
        meta = self.metadata
        checks = []
        if meta.file_rate_hz is not None and meta.sidecar_rate_hz is not None:
            rel = abs(meta.file_rate_hz - meta.sidecar_rate_hz) / meta.sidecar_rate_hz
            threshold = f"rates differ by more than {th.rate_mismatch_tolerance:g} (relative)"
            if rel > th.rate_mismatch_tolerance:
                checks.append(
                    Check(
                        "sample_rate",
                        Severity.FAIL,
                        f"file says {meta.file_rate_hz:g} Hz, sidecar says "
                        f"{meta.sidecar_rate_hz:g} Hz: every frequency and duration is off",
                        threshold,
                    )
                )
            else:
                checks.append(
                    Check(
                        "sample_rate",
                        Severity.OK,
                        f"file and sidecar agree on {meta.file_rate_hz:g} Hz",
                        threshold,
                    )
                )
        expected = "a sensitivity is expected for levels of the measured quantity"
        if meta.sensitivity_known is False:
            missing = meta.uncalibrated_channels
            some = bool(missing) and len(missing) < self.channels
            where = (
                f" for channel{'s' if len(missing) > 1 else ''} "
                + ", ".join(str(i) for i in missing)
                if some
                else ""
            )
            checks.append(
                Check(
                    "sensitivity",
                    Severity.WARN,
                    f"no sensor sensitivity given{where}: "
                    f"{'its' if some and len(missing) == 1 else 'the'} levels are in volts, "
                    "not in the unit of the measured quantity",
                    expected,
                )
            )
        elif meta.sensitivity_known:
            checks.append(Check("sensitivity", Severity.OK, "sensor sensitivity given", expected))
        return tuple(checks)


def checker_for_source(source: CalibratedSource, thresholds: Thresholds) -> CaptureChecker:
    """A :class:`CaptureChecker` set up for ``source``: per channel full scale, unit, level
    reference and volts per unit, from each channel's own chain; and the metadata.

    The full scale is known for audio files (a raw sample of 1.0); for CSV files only for
    channels whose full scale was given by option or profile (otherwise the instrument
    range is unknown and digital clipping and headroom are not determinable), and never
    for an integrated channel (integration changes amplitudes with frequency, so no one
    velocity or displacement stands for the converter's full scale).

    Examples
    --------
    The bundled calibrator recording has a full scale of 2 V behind a 20 dB gain (its
    sidecar), so full scale at the sensor is 2 V / 10 = 0.2 V; no sensitivity is given:

    >>> import piezo
    >>> source = piezo.open("recordings/calibrator-94dB.wav")
    >>> checker = checker_for_source(source, Thresholds())
    >>> [round(v, 6) for v in checker.full_scales], checker.units
    ([0.2], ('V',))
    >>> checker.metadata.sensitivity_known
    False

    The accelerometer bench: two channels, each with its own sensitivity (its profile's
    ``[channel.N]`` sections), so each has its own full scale in m/s²; 2 V / 10 over
    10.15 mV/g and over 10 mV/g, g = 9.80665 m/s²:

    >>> bench = checker_for_source(piezo.open("recordings/accel-bench.flac"), Thresholds())
    >>> [round(v, 2) for v in bench.full_scales], bench.units, bench.references
    ([193.23, 196.13], ('m/s²', 'm/s²'), (1e-06, 1e-06))
    """
    rec = source.recording
    full_scales: list[float | None] = []
    volts_per_unit: list[float | None] = []
    uncalibrated: list[int] = []
    needs_sensitivity = False
    for index, chain in zip(source.channel_indices, source.chains, strict=True):
        provenance = source.provenance_of(index)
        scale = chain.scale(is_pcm=rec.is_pcm)
        if chain.integrations:
            full_scales.append(None)
            volts_per_unit.append(None)
        else:
            if rec.is_pcm:
                full_scales.append(scale)
            elif provenance is not None and provenance.full_scale_v != "default":
                full_scales.append(chain.full_scale_v * scale)
            else:
                full_scales.append(None)
            volts_per_unit.append(chain.sensitivity_v_per_unit or 1.0)
        if chain.quantity != "voltage":  # a voltage channel takes no sensitivity
            needs_sensitivity = True
            if not chain.calibrated:
                uncalibrated.append(index)
    sidecar_rate = None
    provenances = [source.provenance, *(source.provenance_of(i) for i in source.channel_indices)]
    provenance = next((p for p in provenances if p is not None), None)
    if provenance is not None:
        for prof in provenance.profiles:
            if prof.sample_rate_hz is not None:
                sidecar_rate = prof.sample_rate_hz
    metadata = CaptureMetadata(
        file_rate_hz=rec.sample_rate_hz,
        sidecar_rate_hz=sidecar_rate,
        sensitivity_known=not uncalibrated if needs_sensitivity else None,
        uncalibrated_channels=tuple(uncalibrated),
        # Set when the CSV reader was asked to report gaps (piezo check) instead of
        # refusing them; None for audio files and for readers that refuse gaps.
        time_gaps=rec.time_gaps,
        largest_time_gap_s=rec.largest_time_gap_s,
    )
    chains = source.chains
    return CaptureChecker(
        source.sample_rate_hz,
        len(source.channel_indices),
        full_scale=full_scales,
        thresholds=thresholds,
        metadata=metadata,
        reference=[c.reference for c in chains],
        unit=[c.unit for c in chains],
        volts_per_unit=volts_per_unit,
        weightable=[c.weightable for c in chains],
        channel_indices=list(source.channel_indices),
        expected_frames=source.frames,
    )


def check_capture(
    samples: np.ndarray,
    sample_rate_hz: float,
    *,
    full_scale: float | Sequence[float | None] | None = 1.0,
    thresholds: Thresholds | None = None,
    metadata: CaptureMetadata | None = None,
    reference: float | Sequence[float] = 1.0,
    unit: str | Sequence[str] = "V",
    volts_per_unit: float | Sequence[float | None] | None = 1.0,
    weightable: bool | Sequence[bool] | None = None,
    channel_indices: Sequence[int] | None = None,
    spectral: bool = True,
) -> CaptureDiagnostics:
    """Diagnose a whole capture held in memory (thin wrapper over :class:`CaptureChecker`).

    ``samples`` has shape (frames, channels) or (frames,) for one channel. The options
    are :class:`CaptureChecker`'s: one value for all channels, or one per channel.

    Examples
    --------
    >>> import numpy as np
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)
    >>> diag = check_capture(x, 48000.0)
    >>> diag.verdict.value, diag.frames, diag.channels[0].check("clipping").evidence
    ('ok', 48000, 'no clipping found')
    """
    x = np.asarray(samples, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    if x.ndim != 2:
        raise InputError(f"samples: expected shape (frames, channels), got {x.shape}")
    checker = CaptureChecker(
        sample_rate_hz,
        x.shape[1],
        full_scale=full_scale,
        thresholds=thresholds,
        metadata=metadata,
        reference=reference,
        unit=unit,
        volts_per_unit=volts_per_unit,
        weightable=weightable,
        channel_indices=channel_indices,
        expected_frames=x.shape[0],
        spectral=spectral,
    )
    checker.update(x)
    return checker.result()
