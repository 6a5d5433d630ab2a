"""Response measurements as ``piezo sweep analyze``, ``piezo response`` and
``piezo fit-frontend`` report them, for Python and JSON.

:func:`sweep_response_of` (swept sine, Farina 2000) and :func:`h1_response_of` (two
channels, H1 = Gxy/Gxx) take a calibrated source in volts at the sensor, fit the
response (:func:`~piezo.response.fit.fit_response`) and return :class:`SweepAnalysis`
and :class:`H1Analysis`, whose ``to_dict()`` is the command's ``--json`` document.
:func:`fit_document`, :func:`golden_document` and :func:`table_document` are the JSON
forms the three commands share.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from piezo.chain.measurement import CalibratedSource
from piezo.chain.quantity import (
    QUANTITIES,
    Sensitivity,
    format_sensitivity,
    quantity_named,
    with_article,
)
from piezo.errors import InputError
from piezo.response.comparison import ComparisonResult, compare_back_to_back
from piezo.response.fit import (
    GoldenDeviation,
    ResponseFit,
    ResponseTable,
    deviation_from_golden,
    fit_response,
)
from piezo.response.measure import H1Estimator, SweepResponse, TransferEstimate, analyze_sweep
from piezo.response.stimulus import SENSOR_LEVEL_KEYS, NoiseSpec, SweepSpec
from piezo.results import to_jsonable

__all__ = [
    "Comparison",
    "ComparisonChannel",
    "H1Analysis",
    "H1Channel",
    "SweepAnalysis",
    "comparison_of",
    "fit_document",
    "golden_document",
    "h1_response_of",
    "stimulus_document",
    "sweep_response_of",
    "table_document",
    "table_subset",
]


def fit_document(fit: ResponseFit | None) -> dict[str, Any]:
    """The fitted numbers as a JSON-ready mapping (keys shared by all response commands).

    ``None`` (no fit made) gives the same keys, each ``null``.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.response.fit import fit_response
    >>> f = np.geomspace(1, 20000, 200)
    >>> r = f / 20.0  # first-order high-pass, |H| = r / sqrt(1 + r²), corner 20 Hz
    >>> m = -40 + 20 * np.log10(r / np.sqrt(1 + r**2))
    >>> doc = fit_document(fit_response(f, m, orders=(1,)))
    >>> round(doc["corner_hz"], 3), doc["corner_order"], round(doc["sensitivity_db"], 2)
    (20.0, 1, -40.0)
    >>> fit_document(None)["corner_hz"], fit_document(None)["band_1db_hz"]
    (None, [None, None])
    """
    if fit is None:
        # The keys of any fit (a flat response's), every value null.
        flat = fit_response(np.geomspace(100.0, 10000.0, 8), np.zeros(8))
        return {
            k: [None, None] if isinstance(v, list) else None for k, v in fit_document(flat).items()
        }
    hp, res = fit.highpass, fit.resonance
    sens_v = fit.sensitivity_v_per_pa
    return {
        "magnitude_unit": fit.magnitude_unit,
        "reference_hz": fit.reference_hz,
        "sensitivity_db": fit.sensitivity_db,
        "sensitivity_mv_per_pa": None if sens_v is None else 1e3 * sens_v,
        "passband_db": fit.passband_db,
        "passband_std_db": fit.passband_std_db,
        "corner_hz": None if hp is None else hp.corner_hz,
        "corner_std_hz": None if hp is None else hp.corner_std_hz,
        "corner_order": None if hp is None else hp.order,
        "corner_q": None if hp is None else hp.q,
        "corner_in_band": None if hp is None else hp.in_band,
        "resonance_hz": None if res is None else res.frequency_hz,
        "resonance_std_hz": None if res is None else res.frequency_std_hz,
        "resonance_q": None if res is None else res.q,
        "resonance_q_std": None if res is None else res.q_std,
        "resonance_peak_db": None if res is None else res.peak_db,
        "resonance_peak_hz": None if res is None else res.peak_hz,
        "resonance_fit_residual_db": None if res is None else res.residual_rms_db,
        "resonance_fit_poor": None if res is None else res.poor_fit,
        "band_1db_hz": [fit.band_1db.low_hz, fit.band_1db.high_hz],
        "band_1db_limited": [fit.band_1db.low_limited, fit.band_1db.high_limited],
        "band_3db_hz": [fit.band_3db.low_hz, fit.band_3db.high_hz],
        "band_3db_limited": [fit.band_3db.low_limited, fit.band_3db.high_limited],
        "fit_residual_rms_db": fit.residual_rms_db,
    }


def stimulus_document(spec: SweepSpec | NoiseSpec) -> dict[str, Any]:
    """A stimulus's parameters as the JSON documents name them (docs/glossary.md).

    The sidecar's ``level_dbfs`` is a sweep's peak and a noise's RMS level; the document
    says which, as ``peak_dbfs`` or ``rms_dbfs`` (the names ``info`` uses).

    Examples
    --------
    >>> from piezo.response.stimulus import sweep_spec
    >>> doc = stimulus_document(sweep_spec(20.0, 20000.0, 1.0, 48000.0, level_dbfs=-6.0))
    >>> doc["peak_dbfs"], "level_dbfs" in doc
    (-6.0, False)
    """
    level_key = "peak_dbfs" if isinstance(spec, SweepSpec) else "rms_dbfs"
    return {
        level_key if name == "level_dbfs" else name: getattr(spec, name)
        for name in spec.__dataclass_fields__
    }


def golden_document(dev: GoldenDeviation, file: str) -> dict[str, Any]:
    """Deviation from the golden response (read from ``file``) as a JSON-ready mapping.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.response.fit import deviation_from_golden
    >>> f = np.array([100.0, 1000.0, 10000.0])
    >>> dev = deviation_from_golden(f, np.array([0.0, 1.0, 0.0]), f, np.zeros(3))
    >>> doc = golden_document(dev, "golden.csv")
    >>> doc["worst_hz"], doc["worst_db"]
    (1000.0, 1.0)
    """
    return {
        "file": file,
        "worst_hz": dev.worst_hz,
        "worst_db": dev.worst_db,
        "rms_db": dev.rms_db,
        "aligned_at_hz": dev.aligned_at_hz,
        "frequency_hz": dev.frequency_hz,
        "deviation_db": dev.deviation_db,
    }


def table_document(table: ResponseTable) -> dict[str, Any]:
    """The response table's columns as a JSON-ready mapping.

    Examples
    --------
    >>> import numpy as np
    >>> t = ResponseTable(np.array([1.0]), np.array([-3.0]), None, "dB re 1 V/V",
    ...                   {"coherence": np.array([0.99])})
    >>> sorted(table_document(t))
    ['coherence', 'frequency_hz', 'magnitude_db', 'phase_deg']
    """
    doc: dict[str, Any] = {
        "frequency_hz": table.frequency_hz,
        "magnitude_db": table.magnitude_db,
        "phase_deg": table.phase_deg,
    }
    doc.update(table.extra)
    return doc


def table_subset(table: ResponseTable, keep: np.ndarray) -> ResponseTable:
    """The rows of ``table`` where ``keep`` is true (every column).

    Examples
    --------
    >>> import numpy as np
    >>> t = ResponseTable(np.array([1.0, 2.0]), np.array([0.0, -1.0]), None, None, {})
    >>> table_subset(t, np.array([False, True])).frequency_hz
    array([2.])
    """
    return ResponseTable(
        table.frequency_hz[keep],
        table.magnitude_db[keep],
        None if table.phase_deg is None else table.phase_deg[keep],
        table.magnitude_unit,
        {k: v[keep] for k, v in table.extra.items()},
    )


# --------------------------------------------------------------------------------------
# Swept sine


@dataclass(frozen=True)
class SweepAnalysis:
    """A swept-sine capture analysed: response, fit, distortion, deviation from golden.

    Attributes
    ----------
    file, channel
        The capture and its analysed channel.
    stimulus
        Where the sweep's parameters came from (its sidecar or WAV).
    sweep
        The sweep.
    sensor_level, quantity
        The RMS amount the sweep makes at the sensor, in the SI unit of ``quantity``
        (Pa, m/s², m/s, m, N), and that quantity; None for both when unknown (relative
        response).
    response
        Deconvolution result (impulse response, harmonics, latency).
    table
        The response on a log grid.
    fit
        Sensitivity, corner, resonance and bands fitted to ``table``.
    thd_percent_at
        THD (harmonics 2 to 5) at the requested frequencies.
    golden, golden_file
        Deviation from a golden response and the file it came from, or None.
    in_water
        The channel's chain is a hydrophone's (levels re 1 µPa): its sensitivity's trade
        form is dB re 1 V/µPa.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> from piezo.response.stimulus import sweep_signal, sweep_spec
    >>> spec = sweep_spec(50.0, 10000.0, 1.0, 48000.0, silence_after_s=0.5)
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "capture.wav"
    >>> sf.write(path, sweep_signal(spec), 48000, subtype="FLOAT")
    >>> a = sweep_response_of(piezo.open(path), spec, stimulus="sweep.stimulus.toml")
    >>> doc = a.to_dict()
    >>> doc["stimulus"], doc["golden"], doc["sweep"]["start_hz"]
    ('sweep.stimulus.toml', None, 50.0)
    >>> a.acoustic_level_pa, a.sensitivity is None, doc["magnitude_unit"]
    (None, True, 'dB re 1 V/FS')
    """

    file: str
    channel: int
    stimulus: str
    sweep: SweepSpec
    sensor_level: float | None
    quantity: str | None
    response: SweepResponse
    table: ResponseTable
    fit: ResponseFit
    thd_percent_at: dict[float, float]
    golden: GoldenDeviation | None = None
    golden_file: str | None = None
    in_water: bool = False

    @property
    def acoustic_level_pa(self) -> float | None:
        """Sound pressure of the sweep at the sensor (RMS, Pa), or None."""
        return self.sensor_level if self.quantity == "pressure" else None

    @property
    def sensitivity(self) -> Sensitivity | None:
        """The voltage sensitivity at the reference frequency, when the level is known."""
        if self.quantity is None or not math.isfinite(self.fit.sensitivity_db):
            return None
        return Sensitivity(
            10.0 ** (self.fit.sensitivity_db / 20.0), "V", QUANTITIES[self.quantity]
        )

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo sweep analyze --json`` document (plain JSON values)."""
        spec = self.sweep
        r = self.response
        golden = None
        if self.golden is not None:
            golden = golden_document(self.golden, self.golden_file or "")
        sens = self.sensitivity
        doc = {
            "file": self.file,
            "channel": self.channel,
            "stimulus": self.stimulus,
            "sweep": stimulus_document(spec),
            "acoustic_level_pa": self.acoustic_level_pa,
            "quantity": self.quantity,
            "sensor_level_rms": self.sensor_level,
            "latency_frames": r.latency_frames,
            "latency_s": r.latency_s,
            "peak_to_noise_db": r.peak_to_noise_db,
            **fit_document(self.fit),
            "sensitivity": (
                None if sens is None else format_sensitivity(sens, in_water=self.in_water)
            ),
            "thd_percent_at": {f"{f:g}": v for f, v in self.thd_percent_at.items()},
            "golden": golden,
            **table_document(self.table),
        }
        return to_jsonable(doc)


def sweep_response_of(
    source: CalibratedSource,
    sweep: SweepSpec,
    *,
    stimulus: str = "",
    level: float | None = None,
    quantity: str | None = None,
    level_what: str = "level",
    acoustic_level_pa: float | None = None,
    golden: ResponseTable | None = None,
    golden_file: str | None = None,
    golden_relative: bool = False,
    thd_at_hz: Sequence[float] = (100.0, 1000.0, 5000.0),
    reference_hz: float = 1000.0,
    points_per_octave: int = 24,
) -> SweepAnalysis:
    """Response, distortion, corner and resonance of a swept-sine capture.

    The capture (one channel of ``source``) is taken in volts at the sensor
    (:meth:`~piezo.chain.measurement.CalibratedSource.volts_at_sensor`: full scale and
    gain undone, a sensitivity ignored, since it is what is measured) and deconvolved
    with the sweep's inverse filter (Farina 2000).

    Parameters
    ----------
    sweep
        The sweep that was played.
    stimulus
        A label of where ``sweep`` came from (a file name), kept in the document.
    level, quantity
        The RMS amount the sweep makes at the sensor, in the SI unit of ``quantity``
        (a name of :data:`piezo.chain.quantity.QUANTITIES`; the channel's chain's when
        None). The sweep's own level (its sidecar) when ``level`` is None. With a level
        the magnitude is a voltage sensitivity, in dB re 1 V per unit of the quantity
        (``dB re 1 V/Pa``, ``dB re 1 V/(m/s²)``, ``dB re 1 V/N`` ...), and
        :attr:`SweepAnalysis.sensitivity` its trade form.
    level_what
        Name of ``level`` in messages (the command's option).
    acoustic_level_pa
        The sound-pressure spelling of ``level`` (Pa RMS; ``quantity`` pressure).
    golden, golden_file, golden_relative
        A golden response to compare with, the file it came from, and whether both are
        aligned at ``reference_hz`` first.
    thd_at_hz
        Frequencies to report THD at.
    reference_hz
        Frequency of the sensitivity and the ±1/±3 dB bands.
    points_per_octave
        Resolution of the response table.

    Raises
    ------
    InputError
        More than one channel, a capture the sweep cannot be found in, a level of a
        quantity other than the one the channel's chain states (its profile, the
        quantity or sensitivity options), or of a channel that measures no mechanical
        quantity.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> from piezo.response.stimulus import sweep_signal, sweep_spec
    >>> spec = sweep_spec(20.0, 20000.0, 2.0, 48000.0, silence_after_s=0.5)
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "capture.wav"
    >>> sf.write(path, 0.5 * sweep_signal(spec), 48000, subtype="FLOAT")
    >>> a = sweep_response_of(piezo.open(path), spec)
    >>> a.to_dict()["latency_frames"], round(a.fit.sensitivity_db, 1)  # 0.5: -6 dB
    (0, -6.0)

    The same capture from an accelerometer on a shaker driven to 1 g RMS: the sweep's
    peak A = 10^(−6/20) FS made a 0.5·A V peak, for √2·g m/s² peak, so the sensitivity
    is 0.5·A/(√2·9.80665) = 18.07 mV/(m/s²), 177.2 mV/g:

    >>> b = sweep_response_of(piezo.open(path, quantity="acceleration"), spec,
    ...                       level=9.80665)
    >>> b.to_dict()["magnitude_unit"], b.to_dict()["sensitivity"]
    ('dB re 1 V/(m/s²)', '18.07 mV/(m/s²) (177.2 mV/g)')
    """
    volts = source.volts_at_sensor()
    file = str(source.recording.path)
    if len(volts.channel_indices) != 1:
        raise InputError(
            f"{source.recording.channels} channels: choose the device's channel",
            source=file,
        )
    channel = volts.channel_indices[0]
    if acoustic_level_pa is not None:
        if level is not None:
            raise InputError("give the sweep's level or its acoustic level, not both")
        level, quantity = acoustic_level_pa, "pressure"
    level, quantity = _level_at_sensor(
        source, channel, sweep, level, quantity, level_what, stimulus
    )
    # Whole-array analysis: a sweep capture is seconds to a minute long.
    capture = np.concatenate([b[:, 0] for b in volts.blocks()] or [np.zeros(0)])
    try:
        # analyze_sweep scales by the level whatever its quantity (it names it Pa); the
        # unit is the level's quantity's.
        response = analyze_sweep(
            capture,
            sweep,
            volts.sample_rate_hz,
            unit="V",
            acoustic_level_pa=level,
        )
        if quantity is not None:
            response = dataclasses.replace(
                response, magnitude_unit=QUANTITIES[quantity].sensitivity_label
            )
        table = response.to_table(points_per_octave=points_per_octave)
        fit = fit_response(
            table.frequency_hz,
            table.magnitude_db,
            reference_hz=reference_hz,
            magnitude_unit=response.magnitude_unit,
        )
    except InputError as exc:
        raise exc.with_source(file) from None
    dev = None
    if golden is not None:
        try:
            dev = deviation_from_golden(
                table.frequency_hz,
                table.magnitude_db,
                golden.frequency_hz,
                golden.magnitude_db,
                align_at_hz=reference_hz if golden_relative else None,
            )
        except InputError as exc:
            raise exc.with_source(golden_file or "golden") from None
    return SweepAnalysis(
        file=file,
        channel=channel,
        stimulus=stimulus,
        sweep=sweep,
        sensor_level=level,
        quantity=quantity,
        response=response,
        table=table,
        fit=fit,
        thd_percent_at=response.thd_percent_at(list(thd_at_hz)),
        golden=dev,
        golden_file=golden_file,
        in_water=source.chain_of(channel).in_water,
    )


def _level_at_sensor(
    source: CalibratedSource,
    channel: int,
    sweep: SweepSpec,
    level: float | None,
    quantity: str | None,
    what: str,
    stimulus: str,
) -> tuple[float | None, str | None]:
    """The sweep's level at the sensor and its quantity: the one given, else the sweep's.

    A level of another quantity than the one the channel's chain states is refused; a
    chain that states none (sound pressure by default) takes the level's.
    """
    file = str(source.recording.path)
    if level is None:
        if sweep.sensor_level is None:
            return None, None
        level, quantity = sweep.sensor_level
        what = f"the level in {stimulus or 'the stimulus sidecar'}"
    if not (math.isfinite(level) and level > 0):
        raise InputError(f"{what}: the level must be positive and finite, got {level!r}")
    chain = source.chain_of(channel)
    named = chain.quantity if quantity is None else quantity_named(quantity, what=what).name
    given = source.provenance_of(channel)
    origin = "default" if given is None else given.quantity
    if origin != "default" and named != chain.quantity:
        where = {"option": "--quantity", "sensitivity unit": "the sensitivity's unit"}.get(
            origin, origin
        )
        raise InputError(
            f"{what}: the sweep's level is {with_article(named)} level, but channel "
            f"{channel} measures {chain.quantity} ({where})",
            source=file,
        )
    if named not in SENSOR_LEVEL_KEYS:
        raise InputError(
            f"{what}: channel {channel} measures {named}; a sweep's level at the sensor is "
            f"one of {', '.join(SENSOR_LEVEL_KEYS)} (give --quantity)",
            source=file,
        )
    return float(level), named


# --------------------------------------------------------------------------------------
# Two-channel H1


@dataclass(frozen=True)
class H1Channel:
    """One measured channel of an H1 measurement: its table and the fit to it.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> x = np.random.default_rng(2).standard_normal(48000 * 4) * 0.1
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "h1.wav"
    >>> sf.write(path, np.column_stack([x, 0.25 * x]), 48000, subtype="FLOAT")
    >>> h1 = h1_response_of(piezo.open(path))
    >>> ch = h1.channels[0]
    >>> ch.channel, ch.fitted_points == ch.to_dict()["fitted_points"]
    (1, True)
    """

    channel: int
    table: ResponseTable
    fit: ResponseFit | None
    fitted_points: int
    #: Why no fit was made (too few coherent points), or None.
    fit_skipped_reason: str | None = None
    magnitude_unit: str | None = None
    reference_hz: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """The channel's entry in the ``piezo response --json`` document."""
        entry = {"channel": self.channel, **fit_document(self.fit)}
        if self.fit is None:
            # The table stands on its own: say what it is in, and why there is no fit.
            entry["magnitude_unit"] = self.magnitude_unit
            entry["reference_hz"] = self.reference_hz
        entry["fitted_points"] = self.fitted_points
        entry["fit_skipped_reason"] = self.fit_skipped_reason
        entry.update(table_document(self.table))
        return to_jsonable(entry)


@dataclass(frozen=True)
class H1Analysis:
    """H1 = Gxy/Gxx and coherence of each measured channel over a reference channel.

    Attributes
    ----------
    file
        The recording.
    estimate
        The Welch-averaged transfer estimate.
    min_coherence
        Only points at least this coherent were fitted.
    channels
        One :class:`H1Channel` per measured channel.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> x = np.random.default_rng(2).standard_normal(48000 * 4) * 0.1
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "h1.wav"
    >>> sf.write(path, np.column_stack([x, 0.25 * x]), 48000, subtype="FLOAT")
    >>> h1 = h1_response_of(piezo.open(path))
    >>> doc = h1.to_dict()
    >>> doc["reference_channel"], doc["channel"], round(doc["sensitivity_db"], 2)  # 20 lg ¼
    (0, 1, -12.04)
    """

    file: str
    estimate: TransferEstimate
    min_coherence: float
    channels: tuple[H1Channel, ...]

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo response --json`` document: the first channel's entry at the top,
        every channel under ``channels`` when there are several."""
        entries = [ch.to_dict() for ch in self.channels]
        doc = {
            "file": self.file,
            "reference_channel": self.estimate.reference_channel,
            "sample_rate_hz": self.estimate.sample_rate_hz,
            "segments": self.estimate.segments,
            "segment_frames": self.estimate.segment_frames,
            "min_coherence": self.min_coherence,
            **entries[0],
        }
        if len(entries) > 1:
            doc["channels"] = entries
        return to_jsonable(doc)


def h1_response_of(
    source: CalibratedSource,
    *,
    reference_channel: int = 0,
    measured_channels: Sequence[int] | None = None,
    segment_frames: int | None = None,
    overlap: float = 0.5,
    min_coherence: float = 0.99,
    reference_hz: float = 1000.0,
    points_per_octave: int = 24,
    advance: Callable[[int], object] | None = None,
) -> H1Analysis:
    """Frequency response H1 = Gxy/Gxx with coherence, from Welch-averaged spectra.

    Every channel of ``source`` is read in volts at the sensor (a sensitivity is
    ignored), so H1 is in V/V. The response is fitted where the coherence is at least
    ``min_coherence``; the tables keep every frequency.

    Parameters
    ----------
    reference_channel
        Channel with the stimulus or the reference sensor (x).
    measured_channels
        Channels measured (y); all others when None.
    segment_frames, overlap
        Welch segments (default: the next power of two ≥ rate/6) and their overlap.
    advance
        Called with the frames of each block read (a progress bar).

    Raises
    ------
    InputError
        Fewer than six coherent points in a channel.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> x = np.random.default_rng(1).standard_normal(48000 * 4) * 0.1
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "h1.wav"
    >>> sf.write(path, np.column_stack([x, 0.5 * x]), 48000, subtype="FLOAT")
    >>> h1 = h1_response_of(piezo.open(path))
    >>> round(h1.channels[0].fit.sensitivity_db, 2)  # y = x/2: 20 lg 0.5
    -6.02
    """
    volts = source.volts_at_sensor().with_channels(None)
    file = str(source.recording.path)
    try:
        est = H1Estimator(
            volts.sample_rate_hz,
            len(volts.channel_indices),
            reference_channel=reference_channel,
            measured_channels=None if measured_channels is None else list(measured_channels),
            segment_frames=segment_frames,
            overlap=overlap,
            unit="V/V",
        )
        volts.feed(est, advance=advance)
        estimate = est.result()
    except InputError as exc:
        raise exc.with_source(file) from None
    channels = []
    for i, ch in enumerate(estimate.measured_channels):
        table = estimate.to_table(channel=i, points_per_octave=points_per_octave)
        keep = table.extra["coherence"] >= min_coherence
        if np.count_nonzero(keep) < 6:
            # The H1 table stands on its own; only the fit needs coherent points.
            reason = (
                f"only {np.count_nonzero(keep)} points have coherence ≥ {min_coherence:g} "
                "(the minimum coherence)"
            )
            channels.append(
                H1Channel(int(ch), table, None, 0, reason, estimate.magnitude_unit, reference_hz)
            )
            continue
        good = table_subset(table, keep)
        try:
            fit = fit_response(
                good.frequency_hz,
                good.magnitude_db,
                reference_hz=reference_hz,
                magnitude_unit=estimate.magnitude_unit,
            )
        except InputError as exc:
            raise exc.with_source(file) from None
        channels.append(H1Channel(int(ch), table, fit, int(keep.sum())))
    return H1Analysis(file, estimate, min_coherence, tuple(channels))


@dataclass(frozen=True)
class ComparisonChannel:
    """One unit under test calibrated against the reference channel.

    Attributes
    ----------
    channel
        The unit's channel (0-based).
    result
        The comparison (:func:`~piezo.response.comparison.compare_back_to_back`).
    stated
        The unit's sensitivity as its chain states it (V per SI unit), or None.
    min_coherence
        Frequencies below this coherence are left out of the chart.
    band_hz
        The band written to a chart: the reference's chart range within the estimate's.

    Examples
    --------
    The demo bench's unit under test (channel 1) against its reference (channel 0,
    10.15 mV/g with its chart): the simulation's truth is 9.62 mV/g at 160 Hz
    (:mod:`piezo.demo.bench`):

    >>> import piezo
    >>> src = piezo.open("recordings/accel-bench.flac")
    >>> cmp = comparison_of(src, h1_response_of(src).estimate, reference_hz=160.0)
    >>> unit = cmp.channels[0]
    >>> unit.channel, unit.to_dict()["sensitivity"]
    (1, '0.9810 mV/(m/s²) (9.621 mV/g)')
    >>> unit.chart_text().splitlines()[1]
    'frequency_hz,relative_db,phase_deg,expanded_uncertainty_db'
    """

    channel: int
    result: ComparisonResult
    stated: float | None
    min_coherence: float
    band_hz: tuple[float, float]

    @property
    def sensitivity(self) -> Sensitivity:
        """The unit's measured sensitivity at the reference frequency."""
        return Sensitivity(self.result.sensitivity_at_reference, "V", self.result.quantity)

    def chart_text(self) -> str:
        """The unit's response curve (relative to :attr:`sensitivity`) as CSV text."""
        return self.result.chart_text(
            low_hz=self.band_hz[0], high_hz=self.band_hz[1], min_coherence=self.min_coherence
        )

    def to_dict(self) -> dict[str, Any]:
        """The channel's entry of the ``comparison`` part of ``piezo response --json``."""
        r = self.result
        index = int(np.argmin(np.abs(r.frequency_hz - r.reference_frequency_hz)))
        keep = (
            (r.frequency_hz >= self.band_hz[0])
            & (r.frequency_hz <= self.band_hz[1])
            & (r.coherence >= self.min_coherence)
        )
        return to_jsonable(
            {
                "channel": self.channel,
                "quantity": r.quantity.name,
                "reference_frequency_hz": float(r.frequency_hz[index]),
                "sensitivity_v_per_unit": r.sensitivity_at_reference,
                "sensitivity": format_sensitivity(self.sensitivity),
                "stated_sensitivity_v_per_unit": self.stated,
                "expanded_uncertainty_db": float(r.expanded_uncertainty_db[index]),
                "coverage_factor": float(r.coverage_factor[index]),
                "independent_averages": r.independent_averages,
                "budget": r.reference_budget.to_dict(),
                "band_hz": list(self.band_hz),
                "chart": {
                    "frequency_hz": r.frequency_hz[keep],
                    "relative_db": r.relative_db[keep],
                    "phase_deg": r.phase_deg[keep],
                    "expanded_uncertainty_db": r.expanded_uncertainty_db[keep],
                    "coherence": r.coherence[keep],
                },
            }
        )


@dataclass(frozen=True)
class Comparison:
    """A back-to-back comparison calibration of every measured channel.

    Attributes
    ----------
    reference_channel
        The reference sensor's channel.
    reference
        Its stated sensitivity (from its chain).
    reference_curve_file
        Its response curve (chart), or None.
    channels
        One :class:`ComparisonChannel` per unit under test.

    Examples
    --------
    >>> import piezo
    >>> src = piezo.open("recordings/accel-bench.flac")
    >>> cmp = comparison_of(src, h1_response_of(src).estimate, reference_hz=160.0)
    >>> doc = cmp.to_dict()
    >>> doc["reference_channel"], doc["reference_sensitivity"], len(doc["channels"])
    (0, '1.035 mV/(m/s²) (10.15 mV/g)', 1)
    """

    reference_channel: int
    reference: Sensitivity
    reference_curve_file: str | None
    channels: tuple[ComparisonChannel, ...]

    def to_dict(self) -> dict[str, Any]:
        """The ``comparison`` part of the ``piezo response --json`` document."""
        return to_jsonable(
            {
                "method": "back-to-back comparison (ISO 16063-21; IEC 60565, IEC 61094-5)",
                "reference_channel": self.reference_channel,
                "reference_sensitivity": format_sensitivity(self.reference),
                "reference_sensitivity_v_per_unit": self.reference.value,
                "reference_response_curve": self.reference_curve_file,
                "coverage": "expanded uncertainty U = k·u_c, k from Student's t, about 95 %",
                "channels": [c.to_dict() for c in self.channels],
            }
        )


def comparison_of(
    source: CalibratedSource,
    estimate: TransferEstimate,
    *,
    reference_hz: float = 1000.0,
    reference_expanded_db: float | None = None,
    min_coherence: float = 0.99,
) -> Comparison:
    """The units' sensitivities against frequency from a calibrated reference channel.

    ``estimate`` is the H1 of the units' volts over the reference's volts (as
    :func:`h1_response_of` gives it); the reference's sensitivity and response curve come
    from its chain in ``source`` (its profile's ``[channel.N]`` section, or options).
    Each unit must measure the reference's quantity. The procedure is the back-to-back
    comparison of ISO 16063-21 (IEC 60565, IEC 61094-5 in pressure).

    Parameters
    ----------
    reference_hz
        Frequency of each unit's stated sensitivity; its chart is relative to it.
    reference_expanded_db
        The reference's expanded uncertainty (k = 2), dB, when its chart has no
        ``expanded_uncertainty_db`` column.
    min_coherence
        Frequencies below this coherence are left out of the written chart.

    Raises
    ------
    InputError
        The reference channel has no sensitivity, a unit measures another quantity, or
        the reference's uncertainty is unknown.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> x = np.random.default_rng(3).standard_normal(48000 * 4) * 0.1
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> sf.write(folder / "b2b.wav", np.column_stack([x, 0.5 * x]), 48000, subtype="FLOAT")
    >>> _ = (folder / "b2b.toml").write_text('[channel.0]\\nsensitivity = "10 mV/g"\\n'
    ...                                      '[channel.1]\\nquantity = "acceleration"\\n')
    >>> src = piezo.open(folder / "b2b.wav")
    >>> h1 = h1_response_of(src)
    >>> cmp = comparison_of(src, h1.estimate, reference_expanded_db=0.2)
    >>> cmp.channels[0].to_dict()["sensitivity"]      # half the reference's output
    '0.5099 mV/(m/s²) (5.000 mV/g)'
    """
    file = str(source.recording.path)
    ref_index = estimate.reference_channel
    ref_chain = source.chain_of(ref_index)
    if not ref_chain.calibrated or not ref_chain.measured.mechanical:
        raise InputError(
            f"a comparison needs the reference channel's sensitivity (channel {ref_index} "
            "has none: give it in the profile's [channel.N] section)",
            source=file,
        )
    reference = Sensitivity(
        float(ref_chain.sensitivity_v_per_unit),  # type: ignore[arg-type]
        "V",
        QUANTITIES[ref_chain.quantity],
    )
    curve = ref_chain.response_curve
    f = np.asarray(estimate.frequency_hz, dtype=float)
    band = (float(f[1]), float(f[-1]))
    if curve is not None:
        band = (
            max(band[0], float(curve.frequency_hz[0])),
            min(band[1], float(curve.frequency_hz[-1])),
        )
    channels = []
    for i, ch in enumerate(estimate.measured_channels):
        unit_chain = source.chain_of(int(ch))
        if unit_chain.quantity != ref_chain.quantity:
            raise InputError(
                f"channel {ch} measures {unit_chain.quantity}, the reference channel "
                f"{ref_index} {ref_chain.quantity}: a comparison needs one quantity",
                source=file,
            )
        try:
            result = compare_back_to_back(
                estimate,
                reference=reference,
                reference_curve=curve,
                reference_expanded_db=reference_expanded_db,
                reference_frequency_hz=reference_hz,
                measured=i,
            )
        except InputError as exc:
            raise exc.with_source(file) from None
        channels.append(
            ComparisonChannel(
                int(ch), result, unit_chain.sensitivity_v_per_unit, min_coherence, band
            )
        )
    return Comparison(ref_index, reference, ref_chain.response_curve_file, tuple(channels))
