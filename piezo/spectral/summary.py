"""Spectra and band levels as ``piezo spectrum`` and ``piezo bands`` report them.

:func:`spectrum_of` and :func:`bands_of` stream a
:class:`~piezo.chain.measurement.CalibratedSource` through
:class:`~piezo.spectral.welch.WelchPSD` and :class:`~piezo.spectral.bands.BandAnalyzer`;
:class:`Spectrum` and :class:`Bands` hold the results with what they were measured on,
and their ``to_dict()`` is the command's ``--json`` document.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from piezo.chain.measurement import CalibratedSource
from piezo.chain.quantity import QUANTITIES
from piezo.chain.units import squared_unit
from piezo.errors import InputError
from piezo.results import reference_key, to_jsonable
from piezo.spectral.averaging import main_lobe_half_width_bins
from piezo.spectral.bands import BandAnalyzer, BandResult, default_high_hz
from piezo.spectral.welch import PSDResult, Spectrogram, WelchPSD

if TYPE_CHECKING:
    from piezo.spectral.peaks import PeakRule, SpectralPeak

__all__ = [
    "Bands",
    "Spectrum",
    "bands_of",
    "confidence_document",
    "default_upper_limit_hz",
    "psd_level_unit",
    "spectrum_of",
]


def confidence_document(psd: PSDResult) -> dict[str, float] | None:
    """The PSD's confidence interval as ``spectrum`` and the report give it.

    ``coverage_probability`` (as in an uncertainty budget) and the bounds as offsets in
    dB to add to a PSD level; ``None`` for the median average, whose interval has no
    simple form.

    Examples
    --------
    The bounds are the χ² interval of a mean of ν/2 independent periodograms,
    ``10·lg(ν / χ²(ν, 1 − α/2))`` below and ``10·lg(ν / χ²(ν, α/2))`` above (Bendat &
    Piersol, *Random Data*, 4th ed., 2010, 8.5.4):

    >>> import numpy as np
    >>> from scipy.stats import chi2
    >>> from piezo.spectral.welch import WelchPSD
    >>> psd = WelchPSD(8000.0, 1, segment_frames=256)
    >>> psd.update(np.random.default_rng(1).standard_normal((8000, 1)))
    >>> doc = confidence_document(psd.result())
    >>> nu = psd.result().degrees_of_freedom
    >>> expected = 10 * np.log10(nu / chi2.ppf(0.975, nu))
    >>> doc["coverage_probability"], bool(abs(doc["lower_db"] - expected) < 1e-9)
    (0.95, True)
    """
    if psd.ci_lower_db is None or psd.ci_upper_db is None:
        return None
    return {
        "coverage_probability": psd.confidence_level,
        "lower_db": psd.ci_lower_db,
        "upper_db": psd.ci_upper_db,
    }


def psd_level_unit(level_unit: str, scaling: str) -> str:
    """How PSD levels are labelled: ``dB re (20 µPa)²/Hz`` for a density.

    Examples
    --------
    >>> psd_level_unit("dB re 20 µPa", "density")
    'dB re (20 µPa)²/Hz'
    >>> psd_level_unit("dB re 1 V", "spectrum")
    'dB re (1 V)²'
    """
    ref = level_unit.removeprefix("dB re ")
    return f"dB re ({ref})²/Hz" if scaling == "density" else f"dB re ({ref})²"


@dataclass(frozen=True)
class Spectrum:
    """The Welch PSD of every analysed channel of one recording.

    Attributes
    ----------
    file
        The recording, as it was opened.
    unit
        Unit of the PSD, e.g. ``"Pa^2/Hz"``.
    level_unit
        Unit of PSD levels, e.g. ``"dB re (20 µPa)²/Hz"``.
    reference
        Reference of the levels (Pa, or 1 V), squared in the level unit; NaN when the
        channels measure different quantities (then see ``references``).
    channel_indices
        The recording's channels, in the order of the PSD's columns.
    result
        The estimator's result.
    quantities, units, level_units, references
        Per channel: what it measures, the PSD's unit, the unit of its levels and their
        reference (each channel through its own chain, a profile's ``[channel.N]``).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "noise.wav"
    >>> x = np.random.default_rng(0).standard_normal(48000) * 0.01
    >>> sf.write(path, x, 48000, subtype="FLOAT")
    >>> sp = spectrum_of(piezo.open(path))
    >>> sp.result.segment_frames, sp.to_dict()["window"]
    (4096, 'hann')
    """

    file: str
    unit: str | None
    level_unit: str | None
    reference: float
    channel_indices: tuple[int, ...]
    result: PSDResult
    #: What the channels measure (pressure, acceleration ..., voltage uncalibrated).
    quantity: str | None = "voltage"
    #: Where a channel's response curve does not cover the spectrum (end values held).
    response_curve_notes: tuple[str, ...] = ()
    quantities: tuple[str, ...] = ()
    units: tuple[str, ...] = ()
    level_units: tuple[str, ...] = ()
    references: tuple[float, ...] = ()

    def reference_of(self, column: int) -> float:
        """The level reference of the PSD's ``column`` (its channel's own)."""
        return self.references[column] if self.references else self.reference

    def _channel_units(self, column: int) -> dict[str, Any]:
        if not self.quantities:
            return {}
        return {
            "quantity": self.quantities[column],
            "unit": self.units[column],
            "level_unit": self.level_units[column],
            reference_key(QUANTITIES[self.quantities[column]].unit): (self.references[column]),
        }

    def peaks(self, column: int) -> tuple[list[SpectralPeak], PeakRule]:
        """The distinct peaks of the PSD's ``column`` (strongest first) and the rule
        applied: :func:`piezo.spectral.peaks.distinct_peaks` with the window's main lobe
        and the scatter of the chosen average."""
        # Imported here for start-up time: the peak search needs scipy.signal and
        # scipy.stats (about 0.5 s of CPU to import), which ``piezo bands`` never uses.
        from piezo.spectral.peaks import distinct_peaks, scatter_dof

        r = self.result
        return distinct_peaks(
            r.frequency_hz,
            r.psd[:, column],
            main_lobe_half_width_bins=main_lobe_half_width_bins(r.window),
            degrees_of_freedom=scatter_dof(r.average, r.effective_averages),
        )

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo spectrum --json`` document (plain JSON values)."""
        r = self.result
        found = [self.peaks(i) for i in range(len(self.channel_indices))]
        rule = found[0][1]
        doc = {
            "file": self.file,
            "quantity": self.quantity,
            "unit": self.unit,
            "level_unit": self.level_unit,
            "scaling": r.scaling,
            "sample_rate_hz": r.sample_rate_hz,
            "segment_frames": r.segment_frames,
            "overlap_frames": r.overlap_frames,
            "resolution_hz": r.resolution_hz,
            "window": r.window,
            "average": r.average,
            "enbw_hz": r.enbw_hz,
            "enbw_bins": r.enbw_bins,
            "averages": r.averages,
            "effective_averages": r.effective_averages,
            "response_curve_notes": list(self.response_curve_notes),
            "confidence": confidence_document(r),
            # Distinct peaks: at least one main lobe apart, standing the margin above
            # the local floor, separated by valleys deeper than the scatter.
            "peak_separation_hz": rule.separation_bins * r.resolution_hz,
            "peak_margin_db": rule.floor_margin_db,
            "channels": [
                {
                    "channel": ch,
                    **self._channel_units(i),
                    "mean_square": float(r.mean_square()[i]),
                    "peaks": [
                        {
                            "frequency_hz": pk.frequency_hz,
                            "level_db": 10.0 * np.log10(pk.density / self.reference_of(i) ** 2),
                            "above_floor_db": pk.above_floor_db,
                        }
                        for pk in found[i][0]
                    ],
                    "frequency_hz": r.frequency_hz,
                    "psd": r.psd[:, i],
                }
                for i, ch in enumerate(self.channel_indices)
            ],
        }
        return to_jsonable(doc)


def spectrum_of(
    source: CalibratedSource,
    *,
    resolution_hz: float | None = None,
    window: str = "hann",
    overlap: float = 0.5,
    average: str = "mean",
    scaling: str = "density",
    spectrogram: Spectrogram | None = None,
    also: Sequence[Any] = (),
    advance: Callable[[int], object] | None = None,
) -> Spectrum:
    """Welch power spectral density of each channel of ``source``, in one pass.

    One-sided and calibrated (Pa^2/Hz with a sensitivity, V^2/Hz without); the options
    are those of :class:`~piezo.spectral.welch.WelchPSD`. Without ``resolution_hz`` the
    segments are 4096 samples long.

    Parameters
    ----------
    spectrogram
        A :class:`~piezo.spectral.welch.Spectrogram` fed the same blocks (for a
        picture), so the file is read once.
    also
        Further streaming analyses fed the same blocks (e.g. a stationarity check).
    advance
        Called with the frames of each block read (a progress bar).

    Raises
    ------
    InputError
        The recording is shorter than one segment.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(48000 * 2) / 48000
    >>> sf.write(path, 0.5 * np.sin(2 * np.pi * 1000 * t), 48000, subtype="FLOAT")
    >>> sp = spectrum_of(piezo.open(path), resolution_hz=5.0)
    >>> sp.unit, sp.level_unit
    ('V^2/Hz', 'dB re (1 V)²/Hz')
    >>> round(sp.to_dict()["channels"][0]["mean_square"], 4)  # (0.5 V)² / 2, Parseval
    0.125
    """
    fs = source.sample_rate_hz
    est = WelchPSD(
        fs,
        len(source.channel_indices),
        resolution_hz=resolution_hz,
        window=window,
        overlap=overlap,
        average=average,
        scaling=scaling,
    )
    if est.segment_frames > source.frames:
        raise InputError(
            f"the recording has {source.frames} samples, fewer than one segment of "
            f"{est.segment_frames} ({est.segment_frames / fs:g} s); use a coarser "
            "resolution",
            source=str(source.recording.path),
        )
    source.feed(est, *([] if spectrogram is None else [spectrogram]), *also, advance=advance)
    result = est.result()
    chains = source.chains
    units = tuple(squared_unit(c.unit) + result.unit_suffix.removeprefix("^2") for c in chains)
    level_units = tuple(psd_level_unit(c.level_unit, scaling) for c in chains)
    same = len(set(units)) == 1 and len(set(level_units)) == 1
    return Spectrum(
        file=str(source.recording.path),
        unit=units[0] if same else None,
        level_unit=level_units[0] if same else None,
        reference=float(source.references[0]) if same else math.nan,
        channel_indices=source.channel_indices,
        result=result,
        quantity=chains[0].measured.name if same else None,
        response_curve_notes=tuple(source.curve_notes(result.resolution_hz, fs / 2)),
        quantities=tuple(c.measured.name for c in chains),
        units=units,
        level_units=level_units,
        references=tuple(float(r) for r in source.references),
    )


def _nominal(value: float) -> int | float:
    """1000.0 -> 1000, 31.5 stays 31.5 (nominal labels read naturally in JSON)."""
    return int(value) if float(value).is_integer() else value


def _finite(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


@dataclass(frozen=True)
class Bands:
    """Fractional-octave band levels of every analysed channel of one recording.

    Attributes
    ----------
    file
        The recording, as it was opened.
    unit, level_unit
        Unit of the samples and of the band levels.
    reference
        Reference of the levels (Pa, or 1 V).
    sample_rate_hz
        Sample rate of the recording.
    channel_indices
        The recording's channels, in the order of the result's columns.
    result
        The band bank's result (fraction, weighting, bands, mean squares, history).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(48000) / 48000
    >>> sf.write(path, np.sin(2 * np.pi * 500 * t), 48000, subtype="FLOAT")
    >>> b = bands_of(piezo.open(path), fraction=1, low_hz=125, high_hz=2000)
    >>> b.result.bands[int(np.argmax(b.level_db()[:, 0]))].nominal_hz
    500.0
    """

    file: str
    unit: str | None
    level_unit: str | None
    reference: float
    sample_rate_hz: float
    channel_indices: tuple[int, ...]
    result: BandResult
    #: Highest nominal band asked for, Hz, and where it came from ("option", "sample
    #: rate" or "sensor": the sensor's frequency range).
    high_hz: float = 20000.0
    high_source: str = "option"
    #: What the channels measure (pressure, acceleration ..., voltage uncalibrated).
    quantity: str | None = "voltage"
    #: Where a channel's response curve does not cover the bands (end values held).
    response_curve_notes: tuple[str, ...] = ()
    #: Each channel's quantity, unit, level unit and level reference (ISO 1683).
    quantities: tuple[str, ...] = ()
    units: tuple[str, ...] = ()
    level_units: tuple[str, ...] = ()
    references: tuple[float, ...] = ()

    @property
    def level_reference(self) -> float | np.ndarray:
        """The reference of each channel's levels: one value, or one per channel."""
        if self.references and len(set(self.references)) > 1:
            return np.array(self.references)
        return self.reference

    def level_db(self) -> np.ndarray:
        """Band Leq in dB re each channel's reference, shape ``(bands, channels)``."""
        return self.result.level_db(self.level_reference)

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo bands --json`` document (plain JSON values)."""
        result = self.result
        levels = self.level_db()
        doc: dict[str, Any] = {
            "file": self.file,
            "fraction": result.fraction,
            "quantity": self.quantity,
            "unit": self.unit,
            "level_unit": self.level_unit,
            "weighting": result.weighting,
            "sample_rate_hz": self.sample_rate_hz,
            "interval_s": result.interval_s,
            "high_hz": self.high_hz,
            "high_source": self.high_source,
            "response_curve_notes": list(self.response_curve_notes),
            "channels": [],
        }
        for i, ch in enumerate(self.channel_indices):
            entry: dict[str, Any] = {"channel": ch}
            if self.quantities:
                entry.update(
                    quantity=self.quantities[i],
                    unit=self.units[i],
                    level_unit=self.level_units[i],
                )
                entry[reference_key(self.units[i])] = self.references[i]
            entry.update(
                {
                    "bands": [
                        {
                            "nominal_hz": _nominal(b.nominal_hz),
                            "exact_hz": b.exact_hz,
                            "lower_hz": b.lower_hz,
                            "upper_hz": b.upper_hz,
                            "level_db": _finite(levels[j, i]),
                        }
                        for j, b in enumerate(result.bands)
                    ],
                }
            )
            if result.interval_s is not None:
                hist = result.history_db(self.level_reference)[:, :, i]
                entry["history"] = {
                    "time_s": result.history_time_s,
                    "interval_duration_s": result.history_duration_s,
                    "level_db": [[_finite(v) for v in row] for row in hist],
                }
            doc["channels"].append(entry)
        return to_jsonable(doc)


def default_upper_limit_hz(source: CalibratedSource, rate_limit_hz: float) -> tuple[float, str]:
    """The default upper limit of an analysis, Hz, and where it comes from.

    ``rate_limit_hz`` is the limit the sample rate sets (the command's own rule); a
    sensor whose profile states its usable frequency range (``frequency_range``) ends
    the analysis at that range's upper end when it is lower. With several channels the
    widest sensor's end applies, so that no channel's usable band is cut, and a channel
    whose sensor states no range leaves the sample rate's limit.

    Returns
    -------
    limit_hz, source
        The limit and ``"sensor"`` or ``"sample rate"`` (the ``high_source`` and
        ``bandwidth_source`` values; ``"option"`` is the caller's, for a given limit).

    Examples
    --------
    >>> from pathlib import Path
    >>> from piezo.chain.measurement import Chain
    >>> from piezo.io.reader import Recording
    >>> rec = Recording(Path("x.wav"), 48000.0, 4, 1, "WAV", "PCM_24", ("ch0",), True)
    >>> disc = Chain(frequency_range_hz=(0.5, 10000.0))
    >>> default_upper_limit_hz(CalibratedSource.of(rec, disc), 20000.0)
    (10000.0, 'sensor')
    >>> default_upper_limit_hz(CalibratedSource.of(rec, Chain()), 20000.0)
    (20000.0, 'sample rate')
    """
    ranges = [chain.frequency_range_hz for chain in source.chains]
    if not ranges or any(r is None for r in ranges):
        return rate_limit_hz, "sample rate"
    sensor_hz = max(r[1] for r in ranges if r is not None)
    if sensor_hz < rate_limit_hz:
        return sensor_hz, "sensor"
    return rate_limit_hz, "sample rate"


def bands_of(
    source: CalibratedSource,
    *,
    fraction: int = 3,
    low_hz: float = 20.0,
    high_hz: float | None = None,
    interval_s: float | None = None,
    weighting: str = "Z",
    weight_any_quantity: bool = False,
    advance: Callable[[int], object] | None = None,
) -> Bands:
    """Band Leq of each channel through the IEC 61260-1:2014 class 1 filter bank.

    The options are those of :class:`~piezo.spectral.bands.BandAnalyzer` (1/``fraction``
    octave bands from ``low_hz`` to ``high_hz`` nominal, limited by Nyquist, after an
    IEC 61672-1 ``weighting``). Without ``high_hz`` the highest band follows from the
    sample rate (:func:`~piezo.spectral.bands.default_high_hz`: 20 kHz up to 48 kHz
    sampling), or from the sensor's frequency range where its profile states one and it
    ends lower (:func:`default_upper_limit_hz`), and the document says which
    (``high_source``: ``"sample rate"``, ``"sensor"`` or ``"option"``). The A and C weightings
    apply to sound pressure only (IEC 61672-1): for other quantities they are refused
    unless ``weight_any_quantity``.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(48000 * 2) / 48000
    >>> sf.write(path, 0.5 * np.sin(2 * np.pi * 1000 * t), 48000, subtype="FLOAT")
    >>> b = bands_of(piezo.open(path), fraction=1, low_hz=250, high_hz=4000)
    >>> [band["nominal_hz"] for band in b.to_dict()["channels"][0]["bands"]]
    [250, 500, 1000, 2000, 4000]
    >>> round(float(b.level_db()[2, 0]), 1)  # the 1 kHz band holds the tone: 20 lg(0.5/√2)
    -9.0
    """
    if weighting.upper() != "Z" and not weight_any_quantity:
        for index, chain in zip(source.channel_indices, source.chains, strict=True):
            if not chain.weightable:
                raise InputError(
                    f"weighting {weighting.upper()} applies to sound pressure only "
                    f"(IEC 61672-1); channel {index} measures {chain.quantity} "
                    "(--weight-any-quantity, weight_any_quantity=True, applies it anyway)",
                    source=str(source.recording.path),
                )
    high_source = "option"
    if high_hz is None:
        high_hz, high_source = default_upper_limit_hz(
            source, default_high_hz(source.sample_rate_hz)
        )
        if high_source == "sensor" and high_hz < low_hz:
            raise InputError(
                f"the sensor's frequency range ends at {high_hz:g} Hz, below the lowest "
                f"band asked for ({low_hz:g} Hz); ask for lower bands or give the highest "
                "(--low/--high, low_hz/high_hz)",
                source=str(source.recording.path),
            )
    try:
        analyzer = BandAnalyzer(
            source.sample_rate_hz,
            len(source.channel_indices),
            fraction=fraction,
            low_hz=low_hz,
            high_hz=high_hz,
            interval_s=interval_s,
            weighting=weighting,
        )
    except InputError as exc:
        raise exc.with_source(str(source.recording.path)) from None
    source.feed(analyzer, advance=advance)
    result = analyzer.result()
    edges = (result.bands[0].lower_hz, result.bands[-1].upper_hz) if result.bands else None
    chains = source.chains
    units = source.units
    level_units = tuple(c.level_unit for c in chains)
    same = len(set(units)) == 1 and len(set(level_units)) == 1
    return Bands(
        file=str(source.recording.path),
        unit=units[0] if same else None,
        level_unit=level_units[0] if same else None,
        reference=float(source.references[0]) if same else math.nan,
        sample_rate_hz=source.sample_rate_hz,
        channel_indices=source.channel_indices,
        result=result,
        high_hz=float(high_hz),
        high_source=high_source,
        quantity=chains[0].measured.name if same else None,
        response_curve_notes=tuple(source.curve_notes(*edges)) if edges else (),
        quantities=tuple(c.measured.name for c in chains),
        units=units,
        level_units=level_units,
        references=tuple(float(r) for r in source.references),
    )
