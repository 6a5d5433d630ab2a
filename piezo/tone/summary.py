"""Test-tone metrics and calibrator sensitivity as ``piezo tone`` and ``piezo calibrate``
report them, for Python and JSON.

:func:`tone_of` streams a :class:`~piezo.chain.measurement.CalibratedSource` through a
:class:`~piezo.tone.analysis.ToneAnalyzer` (and, for the SNR, a recording with the tone
switched off through a Welch spectrum); :class:`Tone` holds the results and
:meth:`Tone.to_dict` is the command's ``--json`` document.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

from piezo.chain.measurement import CalibratedSource
from piezo.chain.quantity import QUANTITIES, quantity_named
from piezo.errors import InputError
from piezo.response.uncertainty import Budget
from piezo.results import reference_key, to_jsonable
from piezo.spectral.summary import default_upper_limit_hz
from piezo.spectral.welch import WelchPSD
from piezo.tone.analysis import (
    ToneAnalyzer,
    ToneResult,
    band_mean_square,
    default_bandwidth_hz,
)
from piezo.tone.calibrator import (
    CLASS1_LEVEL_TOLERANCE_DB,
    CalibrationResult,
    ToneCalibrator,
    calibration_budget,
    calibrator_frequency_hz,
)
from piezo.validate import physical_value

__all__ = ["RESOLUTION_HZ", "Calibration", "Tone", "calibration_of", "tone_of"]

#: Bin spacing of the tone analysis, hertz (1 s segments).
RESOLUTION_HZ = 1.0


@dataclass(frozen=True)
class Tone:
    """Tone metrics of every analysed channel of one recording.

    Attributes
    ----------
    file, noise_file
        The recording and the tone-off recording (or None), as they were opened.
    unit, level_unit
        Unit of the samples and of the tone level.
    reference
        Reference of the tone level (Pa, or 1 V).
    bandwidth_hz
        Measurement bandwidth actually used (limited by Nyquist).
    bandwidth_source
        ``"option"`` when the bandwidth was given, ``"sample rate"`` when it is the
        default for the sample rate (20 Hz to 20 kHz up to 48 kHz sampling),
        ``"sensor"`` when that default ends lower, at the upper end of the sensor's
        frequency range (:func:`~piezo.spectral.summary.default_upper_limit_hz`).
    channel_indices
        The recording's channels, in the order of ``results``.
    results
        One :class:`~piezo.tone.analysis.ToneResult` per channel.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(96000) / 48000
    >>> sf.write(path, 0.5 * np.sin(2 * np.pi * 440 * t), 48000, subtype="FLOAT")
    >>> tone = tone_of(piezo.open(path))
    >>> round(tone.to_dict()["channels"][0]["frequency_hz"], 2), tone.bandwidth_hz
    (440.0, (20.0, 20000.0))
    """

    file: str
    noise_file: str | None
    unit: str | None
    level_unit: str | None
    reference: float
    bandwidth_hz: tuple[float, float]
    channel_indices: tuple[int, ...]
    results: tuple[ToneResult, ...]
    bandwidth_source: str = "option"
    #: What the channels measure (pressure, acceleration ..., voltage uncalibrated).
    quantity: str | None = "voltage"
    #: Each channel's quantity, unit, level unit and level reference (ISO 1683).
    quantities: tuple[str, ...] = ()
    units: tuple[str, ...] = ()
    level_units: tuple[str, ...] = ()
    references: tuple[float, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo tone --json`` document (plain JSON values)."""
        first = self.results[0]
        doc = {
            "file": self.file,
            "quantity": self.quantity,
            "unit": self.unit,
            "level_unit": self.level_unit,
            "bandwidth_hz": list(self.bandwidth_hz),
            "bandwidth_source": self.bandwidth_source,
            "resolution_hz": first.resolution_hz,
            "segments": first.segments,
            "noise_file": self.noise_file,
            "channels": [
                {
                    "channel": ch,
                    **self._channel_units(i),
                    "frequency_hz": r.frequency_hz,
                    "level_db": r.level_db(
                        self.references[i] if self.references else self.reference
                    ),
                    "tone_rms": r.tone_rms,
                    "thd_percent": r.thd_percent,
                    "thd_n_percent": r.thd_n_percent,
                    "sinad_db": r.sinad_db,
                    "snr_db": r.snr_db,
                    "noise_rms": r.noise_rms,
                    "total_rms": r.total_rms,
                    "residual_rms": r.residual_rms,
                    "harmonics": [
                        {
                            "order": n,
                            "rms": v,
                            "percent": 100 * v / r.tone_rms if r.tone_rms else None,
                        }
                        for n, v in zip(r.harmonic_orders, r.harmonic_rms, strict=True)
                    ],
                }
                for i, (ch, r) in enumerate(zip(self.channel_indices, self.results, strict=True))
            ],
        }
        return to_jsonable(doc)

    def _channel_units(self, i: int) -> dict[str, Any]:
        if not self.quantities:
            return {}
        return {
            "quantity": self.quantities[i],
            "unit": self.units[i],
            "level_unit": self.level_units[i],
            reference_key(self.units[i]): self.references[i],
        }


def tone_of(
    source: CalibratedSource,
    *,
    expected_hz: float | None = None,
    bandwidth_hz: tuple[float, float] | None = None,
    harmonics: int = 10,
    noise: CalibratedSource | None = None,
    advance: Callable[[int], object] | None = None,
) -> Tone:
    """Fundamental, level, THD, THD+N, SINAD (and SNR) of a steady tone in ``source``.

    THD after IEC 60268-3 (harmonics 2..``harmonics`` over the fundamental), THD+N and
    SINAD after AES17, from a 1 Hz Blackman-Harris Welch spectrum of the whole recording
    (one segment when it is shorter than 1 s). With ``noise``, a recording of the same
    chain with the tone off, the SNR is its in-band mean square against the tone's.

    Parameters
    ----------
    expected_hz
        Nominal tone frequency (searched within ±12 %); the strongest line when None.
    bandwidth_hz
        Band of THD and THD+N; None for the default of the sample rate
        (:func:`~piezo.tone.analysis.default_bandwidth_hz`), ended at the sensor's
        frequency range where its profile states one that ends lower.
    advance
        Called with the frames of each block read (a progress bar).

    Raises
    ------
    InputError
        Too short a recording, a noise recording of another rate or channel count, or
        no tone in the band.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(48000 * 2) / 48000
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * t) + 0.005 * np.sin(2 * np.pi * 2000 * t)
    >>> sf.write(path, x, 48000, subtype="FLOAT")
    >>> tone = tone_of(piezo.open(path), expected_hz=1000)
    >>> r = tone.results[0]
    >>> round(r.frequency_hz, 3), round(r.thd_percent, 3)  # second harmonic at 1 %
    (1000.0, 1.0)
    """
    file = str(source.recording.path)
    fs = source.sample_rate_hz
    nch = len(source.channel_indices)
    if source.frames < 2:
        raise InputError("the recording is too short for a tone analysis", source=file)
    seg = None if source.frames >= fs / RESOLUTION_HZ else source.frames
    bandwidth_source = "option"
    if bandwidth_hz is None:
        low_hz, rate_high_hz = default_bandwidth_hz(fs)
        high_hz, bandwidth_source = default_upper_limit_hz(source, rate_high_hz)
        if high_hz <= low_hz:
            raise InputError(
                f"the sensor's frequency range ends at {high_hz:g} Hz, at or below the "
                f"default bandwidth's low end ({low_hz:g} Hz); give the bandwidth "
                "(--bandwidth, bandwidth_hz)",
                source=file,
            )
        bandwidth_hz = (low_hz, high_hz)
    try:
        analyzer = ToneAnalyzer(
            fs,
            nch,
            expected_hz=expected_hz,
            bandwidth_hz=bandwidth_hz,
            harmonics=harmonics,
            resolution_hz=RESOLUTION_HZ,
            segment_frames=seg,
        )
    except InputError as exc:
        raise exc.with_source(file) from None
    source.feed(analyzer, advance=advance)
    noise_ms = None
    if noise is not None:
        noise_file = str(noise.recording.path)
        if len(noise.channel_indices) != nch or noise.sample_rate_hz != fs:
            raise InputError(
                f"the noise recording must have the same rate and channels as "
                f"{source.recording.path.name} ({fs:g} Hz, {nch} channel(s))",
                source=noise_file,
            )
        nseg = int(min(noise.frames, round(fs / RESOLUTION_HZ)))
        if nseg < 2:
            raise InputError("the noise recording is empty", source=noise_file)
        welch = WelchPSD(fs, nch, segment_frames=nseg, window="blackmanharris")
        for block in noise.blocks():
            welch.update(block)
        noise_ms = band_mean_square(welch.result(), *analyzer.bandwidth_hz)
    try:
        results = analyzer.result(noise_mean_square=noise_ms)
    except InputError as exc:
        raise exc.with_source(file) from None
    low, high = analyzer.bandwidth_hz
    chains = source.chains
    units = source.units
    level_units = tuple(c.level_unit for c in chains)
    same = len(set(units)) == 1 and len(set(level_units)) == 1
    return Tone(
        file=file,
        noise_file=None if noise is None else str(noise.recording.path),
        unit=units[0] if same else None,
        level_unit=level_units[0] if same else None,
        reference=float(source.references[0]) if same else math.nan,
        bandwidth_hz=(float(low), float(high)),
        channel_indices=source.channel_indices,
        results=tuple(results),
        bandwidth_source=bandwidth_source,
        quantity=chains[0].measured.name if same else None,
        quantities=tuple(c.measured.name for c in chains),
        units=units,
        level_units=level_units,
        references=tuple(float(r) for r in source.references),
    )


@dataclass(frozen=True)
class Calibration:
    """A sensor's sensitivity measured on a calibrator (``piezo calibrate``).

    Attributes
    ----------
    file, channel
        The capture and its channel.
    gain, full_scale_v
        The chain the capture was taken through (its sensitivity, if any, is ignored).
    result
        The calibrator measurement (quantity, level, tone, RMS volts, sensitivity,
        stability).
    budget
        GUM uncertainty budget of the sensitivity level, dB
        (:func:`~piezo.tone.calibrator.calibration_budget`).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "cal.wav"
    >>> t = np.arange(48000 * 3) / 48000
    >>> sf.write(path, 0.05 * np.sin(2 * np.pi * 1000 * t), 48000, subtype="FLOAT")
    >>> cal = calibration_of(piezo.open(path, gain="20 dB"), level_db=114.0)
    >>> cal.to_dict()["chain"]["gain"], round(cal.to_dict()["calibrator_pressure_pa"], 3)
    (10.0, 10.024)
    """

    file: str
    channel: int
    gain: float
    full_scale_v: float
    result: CalibrationResult
    budget: Budget

    @property
    def calibrator_level_db(self) -> float:
        """The calibrator's level, dB re :attr:`reference`."""
        return self.result.level_db

    @property
    def reference(self) -> float:
        """The level's reference, in the quantity's SI unit (ISO 1683; 20 µPa in air)."""
        return self.result.reference

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo calibrate --json`` document (without ``profile_written``)."""
        r = self.result
        q = QUANTITIES[r.quantity]
        pressure = r.quantity == "pressure"
        level_unit = f"dB re {r.reference / 1e-6:g} µPa" if pressure else q.level_label()
        doc: dict[str, Any] = {
            "file": self.file,
            "channel": self.channel,
            "quantity": r.quantity,
            "unit": q.unit,
            "level_unit": level_unit,
            "sensitivity_v_per_unit": r.sensitivity_v_per_unit,
            "sensitivity": r.sensitivity_text,
        }
        if r.charge_gain_v_per_c is not None:
            doc["charge_sensitivity_c_per_unit"] = r.charge_sensitivity_c_per_unit
        if pressure:
            doc["sensitivity_mv_per_pa"] = r.sensitivity_mv_per_pa
            doc["sensitivity_dbv_per_pa"] = r.sensitivity_dbv_per_pa
        doc.update(
            tone_hz=r.tone_hz,
            residual_db=r.residual_db,
            tone_rms_v=r.tone_rms_v,
            calibrator_level_db=r.level_db,
            calibrator_rms=r.calibrator_rms,
        )
        if pressure:
            doc["calibrator_pressure_pa"] = r.calibrator_rms
        doc.update(
            level_spread_db=r.level_spread_db,
            frequency_spread_percent=100 * r.frequency_spread,
            stable=r.stable,
            # The chain under the same key and names as in ``info`` and ``check``.
            chain={
                "full_scale_v": self.full_scale_v,
                "gain": self.gain,
                reference_key(q.unit): r.reference,
                **(
                    {}
                    if r.charge_gain_v_per_c is None
                    else {"charge_gain_v_per_c": r.charge_gain_v_per_c}
                ),
            },
            uncertainty={
                "expanded_uncertainty_db": self.budget.expanded_uncertainty,
                "coverage_factor": self.budget.coverage_factor,
                "budget": self.budget.to_dict(),
            },
        )
        return to_jsonable(doc)


def calibration_of(
    source: CalibratedSource,
    *,
    level_db: float | None = None,
    expected_hz: float | None = None,
    quantity: str | None = None,
    calibrator_tolerance_db: float = CLASS1_LEVEL_TOLERANCE_DB,
    calibrator_expanded_db: float | None = None,
    charge_gain_v_per_c: float | None = None,
    advance: Callable[[int], object] | None = None,
) -> Calibration:
    """Sensitivity of the sensor on one channel of ``source`` from a calibrator tone.

    The capture is read in volts at the sensor
    (:meth:`~piezo.chain.measurement.CalibratedSource.volts_at_sensor`); the tone's
    band-limited RMS voltage over the calibrator's RMS amount is the sensitivity
    (:class:`~piezo.tone.calibrator.ToneCalibrator`), in V per SI unit of the quantity.
    ``quantity`` is what the calibrator applies, by default the channel's (its profile's
    or ``quantity=`` of :func:`piezo.open`); ``level_db`` is re that quantity's level
    reference (the chain's reference pressure for sound pressure, else ISO 1683), 94 dB
    by default for a sound calibrator, required for the others;
    ``expected_hz`` defaults to the quantity's usual calibrator frequency
    (:func:`~piezo.tone.calibrator.calibrator_frequency_hz`). ``result.stable`` says
    whether the tone's level and frequency held still; the caller decides whether to
    accept it. ``calibrator_tolerance_db`` (class 1 of IEC 60942:2017 by default) or a
    certificate's ``calibrator_expanded_db`` (k = 2) enter the uncertainty budget. With
    ``charge_gain_v_per_c`` (the charge amplifier of a charge-output sensor) the result
    is a charge sensitivity too (``"4.000 pC/N"``).

    Raises
    ------
    InputError
        More than one channel, a quantity other than sound pressure without
        ``level_db``, or without a usual calibrator frequency and no ``expected_hz``,
        or no calibrator tone.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "cal.wav"
    >>> t = np.arange(48000 * 3) / 48000
    >>> # 94 dB re 20 µPa is 1.0024 Pa RMS; 10 mV/Pa gives 10.02 mV RMS at the sensor.
    >>> sf.write(path, 0.010024 * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t), 48000,
    ...          subtype="FLOAT")
    >>> cal = calibration_of(piezo.open(path), level_db=94.0)
    >>> round(cal.result.sensitivity_mv_per_pa, 2), cal.result.stable
    (10.0, True)
    >>> # The same volts from a 1 g RMS vibration calibrator (139.83 dB re 1 µm/s²):
    >>> sf.write(path, 0.010024 * np.sqrt(2) * np.sin(1000 * t), 48000, subtype="FLOAT")
    >>> acc = calibration_of(piezo.open(path, quantity="acceleration"), level_db=139.83)
    >>> acc.to_dict()["sensitivity"], round(acc.result.tone_hz, 1)
    ('1.022 mV/(m/s²) (10.02 mV/g)', 159.2)
    """
    file = str(source.recording.path)
    if len(source.channel_indices) != 1:
        raise InputError(
            f"{source.recording.channels} channels: choose the calibrated one", source=file
        )
    chain = source.chain_of(source.channel_indices[0])
    name = chain.quantity if quantity is None else quantity
    try:
        if charge_gain_v_per_c is not None:
            physical_value(charge_gain_v_per_c, what="charge_gain_v_per_c", unit="V/C")
        q = quantity_named(name)
        if level_db is None:
            if q.name != "pressure":
                raise InputError(f"level_db: give the level of the {q.name} calibrator")
            level_db = 94.0
        if expected_hz is None:
            expected_hz = calibrator_frequency_hz(q.name)
        reference = chain.reference_pa if q.name == "pressure" else q.reference
        cal = ToneCalibrator(
            source.sample_rate_hz,
            expected_hz=expected_hz,
            level_db=level_db,
            reference=reference,
            quantity=q.name,
        )
        source.volts_at_sensor().feed(cal, advance=advance)
        result = replace(cal.result(), charge_gain_v_per_c=charge_gain_v_per_c)
    except InputError as exc:
        raise exc.with_source(file) from None
    return Calibration(
        file=file,
        channel=source.channel_indices[0],
        gain=chain.gain,
        full_scale_v=chain.full_scale_v,
        result=result,
        budget=calibration_budget(
            result,
            calibrator_tolerance_db=calibrator_tolerance_db,
            calibrator_expanded_db=calibrator_expanded_db,
        ),
    )
