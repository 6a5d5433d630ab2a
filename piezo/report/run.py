"""One analysis run for a report: every analysis fed from a single pass over the file.

:func:`analyse` reads the calibrated source once, in blocks, and feeds each streaming
analysis; :class:`RunResults` holds their result objects. The JSON document
(:func:`piezo.report.build.report_document`) and the figures are both made from these
objects, so nothing is computed twice.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

import numpy as np

from piezo.chain.measurement import CalibratedSource
from piezo.diagnostics.checker import CaptureDiagnostics, Thresholds, checker_for_source
from piezo.errors import InputError
from piezo.frontend.model import (
    ResponseSummary,
    frequency_response,
    load_frontend,
    phase_deg,
    summarise_response,
)
from piezo.io.reader import BLOCK_FRAMES
from piezo.levels.summary import Levels, levels_of
from piezo.levels.weighting import MIN_SAMPLE_RATE_HZ, ConformanceReport, conformance
from piezo.spectral.averaging import DEFAULT_SEGMENT_FRAMES
from piezo.spectral.bands import BandAnalyzer, BandResult, default_high_hz
from piezo.spectral.selftest import BandConformance, band_conformance
from piezo.spectral.summary import default_upper_limit_hz
from piezo.spectral.welch import PSDResult, Spectrogram, SpectrogramResult, WelchPSD
from piezo.tone.analysis import ToneAnalyzer, ToneResult, default_bandwidth_hz

__all__ = [
    "FrontendResponse",
    "Limits",
    "ReportSettings",
    "RunResults",
    "analyse",
    "frontend_response",
    "report_limits",
]

#: Lowest nominal band of the report's band levels, Hz (the bank's default, as ``piezo
#: bands``).
BAND_LOW_HZ = 20.0


@dataclass(frozen=True)
class ReportSettings:
    """Every setting of a report run (all of them are printed in the report).

    Attributes
    ----------
    block_frames
        Frames per block read from the file.
    level_interval_s
        Interval of the level history (LAeq per interval); None: chosen from the length
        of the recording (about 100 intervals, a round number of seconds, at least 0.1 s).
    psd_segment_frames
        Segment length of the Welch PSD; None: 4096 samples, as ``piezo spectrum``
        (:data:`~piezo.spectral.averaging.DEFAULT_SEGMENT_FRAMES`), fewer (a power of two)
        when the recording is shorter than four segments.
    band_fraction
        Bandwidth designator of the band levels (3: one-third octaves).
    spectrogram_segment_frames, spectrogram_columns
        Segment length and the most columns kept of the spectrogram (None: about
        1/46.9 of the sample rate rounded to a power of two, 1024 at 48 kHz).
    tone_resolution_hz
        Bin spacing of the tone analysis (Blackman-Harris window).
    tone_min_share
        A channel's tone metrics are reported when its strongest line carries at least
        this share of the in-band mean square (a test tone dominates its recording;
        common practice, no source).
    thresholds
        Thresholds of the capture diagnostics.
    frontend_design
        Front-end design file whose response is shown, or None.

    Examples
    --------
    >>> settings = ReportSettings(band_fraction=1)
    >>> settings.as_dict()["band_fraction"], settings.as_dict()["psd_segment_frames"]
    (1, None)
    >>> "thresholds" in settings.as_dict()
    False
    >>> ReportSettings(block_frames=0)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: block_frames: must be a whole number >= 1, got 0
    """

    block_frames: int = BLOCK_FRAMES
    level_interval_s: float | None = None
    psd_segment_frames: int | None = None
    band_fraction: int = 3
    spectrogram_segment_frames: int | None = None
    spectrogram_columns: int = 128
    tone_resolution_hz: float = 1.0
    tone_min_share: float = 0.5
    thresholds: Thresholds = field(default_factory=Thresholds)
    frontend_design: Path | None = None

    def __post_init__(self) -> None:
        if not (isinstance(self.block_frames, int) and self.block_frames >= 1):
            raise InputError(
                f"block_frames: must be a whole number >= 1, got {self.block_frames!r}"
            )

    def as_dict(self) -> dict[str, Any]:
        """Settings as plain values (thresholds listed separately in the document)."""
        out: dict[str, Any] = {}
        for f in fields(self):
            if f.name == "thresholds":
                continue
            value = getattr(self, f.name)
            out[f.name] = str(value) if isinstance(value, Path) else value
        return out


@dataclass(frozen=True)
class FrontendResponse:
    """The modelled response of a front-end design (``piezo.frontend.model``).

    ``level_db`` is the magnitude relative to the midband sensitivity, ``phase_deg`` the
    phase, both on ``frequency_hz``.

    Examples
    --------
    >>> from pathlib import Path
    >>> design = Path("recordings/designs/film-buffer-voltage.toml")
    >>> fr = frontend_response(design, top_hz=24000.0)
    >>> fr.amplifier, fr.frequency_hz.shape == fr.level_db.shape == fr.phase_deg.shape
    ('voltage', True)
    """

    design: str
    name: str
    amplifier: str
    summary: ResponseSummary
    frequency_hz: np.ndarray
    level_db: np.ndarray
    phase_deg: np.ndarray


def frontend_response(path: Path, *, top_hz: float) -> FrontendResponse:
    """Load a design and evaluate its response from below its corner up to ``top_hz``.

    Examples
    --------
    The curve starts a factor 20 below the corner, where a first-order high-pass is down
    10 lg(1 + 20²) = 26.0 dB and leads by arctan(20) = 87.1°:

    >>> from pathlib import Path
    >>> design = Path("recordings/designs/pump-disc-charge.toml")
    >>> fr = frontend_response(design, top_hz=24000.0)
    >>> fr.name, fr.amplifier
    ('PD-27 disc on the bench charge amplifier', 'charge')
    >>> round(float(fr.frequency_hz[0]) / fr.summary.corner_hz, 6), float(fr.frequency_hz[-1])
    (0.05, 24000.0)
    >>> round(float(fr.level_db[0]), 1), round(float(fr.phase_deg[0]), 1)
    (-26.0, 87.1)
    """
    fe = load_frontend(path)
    summary = summarise_response(fe)
    low = max(summary.corner_hz / 20.0, 1e-4)
    f = np.geomspace(low, max(top_hz, 10.0 * low), 600)
    h = frequency_response(fe, f)
    return FrontendResponse(
        design=str(path),
        name=fe.name,
        amplifier=fe.amplifier.kind,
        summary=summary,
        frequency_hz=f,
        level_db=20.0 * np.log10(np.abs(h) / summary.sensitivity_v_per_pa),
        phase_deg=np.asarray(phase_deg(fe, f), dtype=float),
    )


@dataclass(frozen=True)
class Limits:
    """The upper limits of the report's band levels and tone analysis, with their origin.

    The limits are those ``piezo bands`` and ``piezo tone`` take without options
    (:func:`report_limits`); ``high_source`` and ``bandwidth_source`` say where each came
    from, in those commands' words: ``"sample rate"`` (the default for the rate) or
    ``"sensor"`` (ended lower where the sensor's stated frequency range ends).

    Examples
    --------
    >>> Limits(20000.0, "sample rate", (20.0, 20000.0), "sample rate").band_high_hz
    20000.0
    """

    band_high_hz: float
    high_source: str
    tone_bandwidth_hz: tuple[float, float]
    bandwidth_source: str


def report_limits(source: CalibratedSource) -> Limits:
    """The default upper limits of ``piezo bands`` and ``piezo tone`` for ``source``.

    The sample rate's limit (:func:`~piezo.spectral.bands.default_high_hz`,
    :func:`~piezo.tone.analysis.default_bandwidth_hz`), ended lower by the sensor's
    frequency range (:func:`~piezo.spectral.summary.default_upper_limit_hz`): the one rule
    of those commands, so a report and the commands agree.

    Examples
    --------
    >>> from pathlib import Path
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.io.reader import Recording
    >>> rec = Recording(Path("x.wav"), 1e6, 4, 1, "WAV", "PCM_24", ("ch0",), True)
    >>> report_limits(CalibratedSource.of(rec, Chain()))
    Limits(band_high_hz=475000.0, high_source='sample rate', \
tone_bandwidth_hz=(20.0, 450000.0), bandwidth_source='sample rate')
    >>> disc = Chain(frequency_range_hz=(1.0, 10000.0))
    >>> report_limits(CalibratedSource.of(rec, disc))
    Limits(band_high_hz=10000.0, high_source='sensor', \
tone_bandwidth_hz=(20.0, 10000.0), bandwidth_source='sensor')
    """
    fs = source.sample_rate_hz
    band_high_hz, high_source = default_upper_limit_hz(source, default_high_hz(fs))
    tone_low_hz, rate_high_hz = default_bandwidth_hz(fs)
    tone_high_hz, bandwidth_source = default_upper_limit_hz(source, rate_high_hz)
    return Limits(
        band_high_hz=float(band_high_hz),
        high_source=high_source,
        tone_bandwidth_hz=(float(tone_low_hz), float(tone_high_hz)),
        bandwidth_source=bandwidth_source,
    )


@dataclass(frozen=True)
class RunResults:
    """The result objects of one run, with what they were made from.

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
    >>> run = analyse(source, ReportSettings(band_fraction=1))
    >>> run.source is source, run.frontend is None, run.notes
    (True, True, ())
    >>> run.limits.band_high_hz, run.limits.high_source
    (20000.0, 'sample rate')
    >>> run.generated_utc.endswith("Z")
    True
    >>> folder.cleanup()
    """

    source: CalibratedSource
    settings: ReportSettings
    generated_utc: str
    diagnostics: CaptureDiagnostics
    levels: Levels | None
    psd: PSDResult | None
    bands: BandResult | None
    spectrogram: SpectrogramResult | None
    tones: tuple[ToneResult | str, ...]  # per channel: the metrics, or why there are none
    frontend: FrontendResponse | None
    conformance: tuple[ConformanceReport, ...]
    band_conformance: BandConformance | None
    notes: tuple[str, ...]
    limits: Limits  # the band and tone limits, and where each came from


def _power_of_two_at_most(frames: int) -> int:
    return 2 ** max(int(math.floor(math.log2(max(frames, 16)))), 4)


def analyse(
    source: CalibratedSource,
    settings: ReportSettings,
    *,
    advance: Callable[[int], Any] | None = None,
) -> RunResults:
    """Read ``source`` once and run every analysis of the report on it.

    ``advance(frames)`` is called after each block (for a progress bar). Settings left
    to be chosen (None) are resolved from the recording and kept in the result.

    Examples
    --------
    A 0.25 s, 1 kHz tone of 1 Pa RMS: 94.0 dB re 20 µPa (20 lg(1 Pa / 20 µPa)), and the
    same LAeq, A-weighting being 0 dB at 1 kHz (IEC 61672-1:2013, Table 3):

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
    >>> frames = []
    >>> run = analyse(source, ReportSettings(band_fraction=1), advance=frames.append)
    >>> sum(frames)
    12000
    >>> (tone,) = run.tones
    >>> round(tone.frequency_hz, 2), round(tone.level_db(20e-6), 1)
    (1000.0, 94.0)
    >>> round(run.levels.channel(0)["LAeq"], 1)
    94.0

    Settings left open are chosen from the recording (the PSD segment: the largest power
    of two up to a quarter of the 12000 frames):

    >>> run.settings.psd_segment_frames, run.settings.level_interval_s
    (2048, 0.1)
    >>> folder.cleanup()
    """
    fs = source.sample_rate_hz
    frames = source.frames
    channels = len(source.channel_indices)
    notes: list[str] = []
    psd_segment = settings.psd_segment_frames or min(
        DEFAULT_SEGMENT_FRAMES, _power_of_two_at_most(frames // 4)
    )
    sg_segment = settings.spectrogram_segment_frames or min(
        _power_of_two_at_most(int(fs / 46.875)), _power_of_two_at_most(frames // 8)
    )
    tone_resolution = max(settings.tone_resolution_hz, 2.0 * fs / frames)
    settings = replace(
        settings,
        level_interval_s=settings.level_interval_s or _nice_interval(frames / fs),
        psd_segment_frames=psd_segment,
        spectrogram_segment_frames=sg_segment,
        tone_resolution_hz=tone_resolution,
    )
    checker = checker_for_source(source, settings.thresholds)
    psd = WelchPSD(fs, channels, segment_frames=psd_segment, window="hann")
    limits = report_limits(source)
    bands = None
    if limits.band_high_hz >= BAND_LOW_HZ:
        bands = BandAnalyzer(
            fs,
            channels,
            fraction=settings.band_fraction,
            low_hz=BAND_LOW_HZ,
            high_hz=limits.band_high_hz,
        )
    else:
        notes.append(
            f"no band levels: the sensor's frequency range ends at "
            f"{limits.band_high_hz:g} Hz, below the lowest band ({BAND_LOW_HZ:g} Hz)"
        )
    sgram = Spectrogram(
        fs, channels, segment_frames=sg_segment, max_columns=settings.spectrogram_columns
    )
    tones: list[ToneAnalyzer] = []
    low_hz, high_hz = limits.tone_bandwidth_hz
    if high_hz > low_hz:
        tones = [
            ToneAnalyzer(
                fs, 1, bandwidth_hz=limits.tone_bandwidth_hz, resolution_hz=tone_resolution
            )
            for _ in range(channels)
        ]
    analyses: list[Any] = [checker, psd, sgram, _EachChannel(tones)]
    if bands is not None:
        analyses.append(bands)
    levels = None
    if fs >= MIN_SAMPLE_RATE_HZ:
        # piezo levels' own computation (each channel in its own unit and level
        # reference, A and C weightings where they apply), reading the blocks that feed
        # every other analysis: the file is read once.
        levels = levels_of(
            source,
            interval_s=settings.level_interval_s,
            also=analyses,
            block_frames=settings.block_frames,
            advance=advance,
        )
    else:
        notes.append(
            f"levels and the weighting self-test need at least {MIN_SAMPLE_RATE_HZ:g} Hz "
            f"(IEC 61672-1 filters); this recording has {fs:g} Hz"
        )
        source.feed(*analyses, advance=advance, block_frames=settings.block_frames)
    design = None
    if settings.frontend_design is not None:
        design = frontend_response(settings.frontend_design, top_hz=fs / 2.0)
    selftest: tuple[ConformanceReport, ...] = ()
    if fs >= MIN_SAMPLE_RATE_HZ:
        selftest = (conformance("A", fs), conformance("C", fs))
    now = _dt.datetime.now(_dt.UTC).replace(microsecond=0)
    band_result = bands.result() if bands is not None else None
    no_tone = (
        f"no tone analysis: the sensor's frequency range ends at {high_hz:g} Hz, at or "
        f"below the low end of the bandwidth ({low_hz:g} Hz)"
    )
    return RunResults(
        source=source,
        settings=settings,
        generated_utc=now.isoformat().replace("+00:00", "Z"),
        diagnostics=checker.result(),
        levels=levels,
        psd=psd.result() if frames >= psd_segment else None,
        bands=band_result if band_result is not None and band_result.bands else None,
        spectrogram=sgram.result() if frames >= sg_segment else None,
        tones=tuple(_tone(t, settings.tone_min_share) for t in tones)
        if tones
        else (no_tone,) * channels,
        frontend=design,
        conformance=selftest,
        band_conformance=band_conformance(
            settings.band_fraction, fs, low_hz=BAND_LOW_HZ, high_hz=limits.band_high_hz
        )
        if band_result is not None and band_result.bands
        else None,
        notes=tuple(notes),
        limits=limits,
    )


class _EachChannel:
    """Feeds one single-channel analysis per channel its column of each block."""

    def __init__(self, analyses: list[ToneAnalyzer]) -> None:
        self.analyses = analyses

    def update(self, block: np.ndarray) -> None:
        for c, analysis in enumerate(self.analyses):
            analysis.update(block[:, c : c + 1])


def _tone(analyzer: ToneAnalyzer, min_share: float) -> ToneResult | str:
    """The tone metrics of one channel, or the reason there are none."""
    try:
        (result,) = analyzer.result()
    except InputError as exc:
        return exc.message
    share = (result.tone_rms / result.total_rms) ** 2 if result.total_rms > 0 else 0.0
    if share < min_share:
        return (
            f"no test tone: the strongest line ({result.frequency_hz:.5g} Hz) carries "
            f"{100 * share:.2g} % of the in-band mean square (at least "
            f"{100 * min_share:g} % needed)"
        )
    return result


_NICE_S = (0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0)


def _nice_interval(duration_s: float) -> float:
    """A round interval giving about 100 intervals over ``duration_s`` (at least 0.1 s)."""
    want = duration_s / 100.0
    for step in _NICE_S:
        if step >= want:
            return step
    return 60.0 * math.ceil(want / 60.0)
