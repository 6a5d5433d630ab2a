"""Sensitivity from a calibrator capture, for every measured quantity.

A calibrator applies a known RMS amount of the sensor's quantity at one frequency: a
sound calibrator (IEC 60942) usually 94 or 114 dB re 20 µPa at 1 kHz; a hand-held
vibration calibrator usually 10 m/s² RMS (or 1 g) at 159.2 Hz, where ω = 1000 rad/s, so
that velocity and displacement follow from acceleration by powers of 1000 (common
practice of the trade, no standard fixes it); force and hydrophone calibrators exist too.
The band-limited RMS voltage of the tone, divided by the calibrator's RMS amount, is the
sensitivity in V per SI unit of the quantity (V/Pa, V/(m/s²), V/N ...).

Method (streamed, one pass):

1. The tone frequency is located in the first second with a Hann-windowed FFT and must lie
   within :data:`FREQUENCY_SEARCH_RATIO` of the expected frequency; the line's frequency
   comes from the one tone-line estimator, :func:`piezo.tone.line.spectral_line`.
2. A one-third-octave Butterworth band-pass (order 3, second-order sections with carried
   state) centred on the found frequency isolates the tone. Its gain at the found frequency
   is divided out, so the band RMS reads the tone alone.
3. The band-passed signal is cut into segments of :data:`SEGMENT_S`; the first
   :data:`SETTLE_S` seconds are skipped so the filter's start-up does not count. Each
   segment gives a level and a frequency (from interpolated zero crossings); the tone is
   stable when the segment levels stay within :data:`STABILITY_DB` and the frequencies
   within :data:`FREQUENCY_STABILITY`.
4. The residual (noise and distortion) is what is left of the broadband mean square
   (mean removed) after the tone's band mean square is taken away, stated in dB re the
   tone.

Uncertainty (:func:`calibration_budget`): a GUM budget (JCGM 100:2008) of the
sensitivity level in dB with three components: the calibrator's level (by default the
class 1 tolerance of a sound calibrator, IEC 60942:2017, ±0.25 dB at 160 Hz to 1.25 kHz,
taken as a rectangular distribution; a vibration or force calibrator's stated tolerance;
or the expanded uncertainty of its calibration certificate), the
repeatability of the segment levels (Type A, s/√n with n − 1 degrees of freedom, GUM
4.2.3) and the noise and distortion inside the tone's band (at most the whole residual,
which adds ``10·lg(1 + 10^(residual/10))`` dB of power; rectangular). The chain's own
gain and ADC scale, and the calibrator's corrections for static pressure and for the
sensor's load volume, are not in it: they belong to the chain and to the calibrator's
instructions (for a vibration calibrator: its loading by the sensor's mass).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal

from piezo.chain.measurement import REFERENCE_AIR_PA
from piezo.chain.quantity import QUANTITIES, Sensitivity, format_sensitivity, quantity_named
from piezo.chain.units import ratio_to_db
from piezo.errors import InputError
from piezo.response.uncertainty import Budget, Component
from piezo.sos import sos_response
from piezo.spectral.averaging import AutoSpectra
from piezo.tone.line import spectral_line

__all__ = [
    "CALIBRATOR_FREQUENCY_HZ",
    "CLASS1_LEVEL_TOLERANCE_DB",
    "CalibrationResult",
    "ToneCalibrator",
    "calibrate_tone",
    "calibration_budget",
    "calibrator_frequency_hz",
    "calibrator_pressure_pa",
]

#: Level tolerance of a class 1 sound calibrator, dB (IEC 60942:2017, for 160 Hz to
#: 1.25 kHz): the half-width of the rectangular distribution assumed when no calibration
#: certificate is given.
CLASS1_LEVEL_TOLERANCE_DB = 0.25

#: Usual nominal frequency of a calibrator, by quantity: 1 kHz for sound calibrators
#: (IEC 60942:2017 calibrators work at 250 Hz or 1 kHz), 159.2 Hz (ω = 1000 rad/s) for
#: hand-held vibration calibrators (common practice of the trade). Other quantities have
#: no usual frequency: it must be given.
CALIBRATOR_FREQUENCY_HZ = {
    "pressure": 1000.0,
    "acceleration": 1000.0 / (2.0 * math.pi),
    "velocity": 1000.0 / (2.0 * math.pi),
    "displacement": 1000.0 / (2.0 * math.pi),
}

#: Segment length for the stability check, seconds (common practice, no source).
SEGMENT_S = 0.5
#: Start-up excluded from the measurement, seconds: the band-pass settles within a few
#: tens of cycles at 1 kHz; 0.25 s leaves ample margin.
SETTLE_S = 0.25
#: Largest spread of segment levels for a stable tone, dB. IEC 60942:2017 allows class 1
#: calibrators a short-term level fluctuation of about 0.1 dB (from memory); twice that
#: leaves room for background noise without accepting a handled or moving calibrator.
STABILITY_DB = 0.2
#: Largest relative spread of segment frequencies for a stable tone.
FREQUENCY_STABILITY = 0.005
#: The found tone must lie within this ratio of the expected frequency (either side).
FREQUENCY_SEARCH_RATIO = 1.12
#: Components below this frequency are not taken for a louder tone than the calibrator's
#: (IEC 60942:2017 calibrators work at 250 Hz or 1 kHz; multi-frequency ones from 31.5 Hz).
INFRASOUND_HZ = 20.0
#: Minimum length of a usable capture, seconds.
MIN_DURATION_S = SETTLE_S + 2 * SEGMENT_S


def calibrator_frequency_hz(quantity: str, *, what: str = "expected_hz") -> float:
    """The usual nominal frequency of a calibrator of ``quantity``
    (:data:`CALIBRATOR_FREQUENCY_HZ`); refused, naming ``what``, for the others.

    Examples
    --------
    >>> calibrator_frequency_hz("pressure"), round(calibrator_frequency_hz("acceleration"), 2)
    (1000.0, 159.15)
    >>> calibrator_frequency_hz("force", what="--frequency")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: --frequency: force calibrators have no usual frequency; give the \
calibrator's nominal frequency, e.g. 159.2 Hz
    """
    found = CALIBRATOR_FREQUENCY_HZ.get(quantity)
    if found is None:
        raise InputError(
            f"{what}: {quantity} calibrators have no usual frequency; give the calibrator's "
            "nominal frequency, e.g. 159.2 Hz"
        )
    return found


def calibrator_pressure_pa(level_db: float, reference_pa: float = REFERENCE_AIR_PA) -> float:
    """RMS pressure of a calibrator level: ``p = p0 * 10^(L/20)`` (ISO 1683 reference).

    Examples
    --------
    94 dB re 20 uPa is close to 1 Pa, 114 dB ten times that:

    >>> round(calibrator_pressure_pa(94.0), 4), round(calibrator_pressure_pa(114.0), 3)
    (1.0024, 10.024)
    """
    return reference_pa * 10.0 ** (level_db / 20.0)


@dataclass(frozen=True)
class CalibrationResult:
    """What a calibrator capture tells about the sensor.

    Attributes
    ----------
    sensitivity_v_per_unit
        Band-limited tone RMS voltage over the calibrator's RMS amount of ``quantity``,
        V per its SI unit (V/Pa, V/(m/s²), V/N ...).
    tone_hz
        Tone frequency found.
    tone_rms_v
        RMS voltage of the tone (at the sensor, after the chain's gain is undone).
    residual_db
        Noise and distortion relative to the tone, dB (negative: below the tone).
    level_spread_db
        Largest minus smallest segment level.
    frequency_spread
        Relative spread of the segment frequencies.
    segments
        Number of segments measured.
    level_db, reference
        The calibrator level assumed and its reference, in the quantity's SI unit.
    stable
        True when the tone met the stability limits.
    segment_level_std_db
        Sample standard deviation of the segment levels (n − 1 in the denominator).
    quantity
        What the calibrator applies (``"pressure"``, ``"acceleration"`` ...).
    charge_gain_v_per_c
        The charge amplifier's gain (V/C) of a charge-output sensor, when known: the
        sensitivity is then also a charge sensitivity (C per unit, ``"4 pC/N"``).

    Examples
    --------
    A 50 mV/Pa sensor on a 94 dB calibrator gives 50.12 mV RMS at 1 kHz:

    >>> t = np.arange(96000) / 48000
    >>> volts = 0.05 * calibrator_pressure_pa(94.0) * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    >>> result = calibrate_tone(volts, 48000)
    >>> round(result.tone_rms_v * 1e3, 2), round(result.sensitivity_mv_per_pa, 3)
    (50.12, 50.0)
    >>> round(result.sensitivity_dbv_per_pa, 2), result.segments, result.stable
    (-26.02, 3, True)
    """

    sensitivity_v_per_unit: float
    tone_hz: float
    tone_rms_v: float
    residual_db: float
    level_spread_db: float
    frequency_spread: float
    segments: int
    level_db: float
    reference: float
    stable: bool
    segment_level_std_db: float = math.nan
    quantity: str = "pressure"
    charge_gain_v_per_c: float | None = None

    @property
    def calibrator_rms(self) -> float:
        """The calibrator's RMS amount, in the quantity's SI unit."""
        return self.reference * 10.0 ** (self.level_db / 20.0)

    @property
    def charge_sensitivity_c_per_unit(self) -> float | None:
        """The charge sensitivity (C per SI unit) with a charge amplifier's gain, else None."""
        gain = self.charge_gain_v_per_c
        return None if gain is None else self.sensitivity_v_per_unit / gain

    @property
    def sensitivity(self) -> Sensitivity:
        """The measured sensitivity, with its quantity: a charge sensitivity with a charge
        amplifier's gain, else a voltage sensitivity."""
        q = QUANTITIES[self.quantity]
        charge = self.charge_sensitivity_c_per_unit
        if charge is not None:
            return Sensitivity(charge, "C", q)
        return Sensitivity(self.sensitivity_v_per_unit, "V", q)

    @property
    def sensitivity_text(self) -> str:
        """The sensitivity in its trade form (``"8.500 mV/Pa"``, ``"1.020 mV/(m/s²) ..."``,
        ``"4.000 pC/N"``)."""
        return format_sensitivity(self.sensitivity)

    @property
    def sensitivity_v_per_pa(self) -> float | None:
        """Sensitivity in V/Pa of a sound-pressure calibration, else None."""
        return self.sensitivity_v_per_unit if self.quantity == "pressure" else None

    @property
    def sensitivity_mv_per_pa(self) -> float | None:
        """Sensitivity in mV/Pa of a sound-pressure calibration, else None."""
        s = self.sensitivity_v_per_pa
        return None if s is None else 1e3 * s

    @property
    def sensitivity_dbv_per_pa(self) -> float | None:
        """Sensitivity in dB re 1 V/Pa of a sound-pressure calibration, else None."""
        s = self.sensitivity_v_per_pa
        return None if s is None else ratio_to_db(s)


class ToneCalibrator:
    """Streaming measurement of a calibrator tone on one channel (volts in).

    Parameters
    ----------
    sample_rate_hz
        Sample rate of the capture.
    expected_hz
        Nominal calibrator frequency (1 kHz for most calibrators).
    level_db
        Calibrator level, dB re ``reference``.
    reference
        Reference of the level in the quantity's SI unit; by default the quantity's
        ISO 1683 reference (20 µPa for sound pressure in air, 1 µm/s², 1 µN ...).
    quantity
        What the calibrator applies: ``"pressure"`` (a sound calibrator),
        ``"acceleration"`` (a vibration calibrator), ``"force"`` ...

    Examples
    --------
    Fed in blocks, with noise 40 dB below the tone (0.5 mV RMS against 50.1 mV):

    >>> t = np.arange(96000) / 48000
    >>> volts = 0.05 * calibrator_pressure_pa(94.0) * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    >>> volts += 0.0005 * np.random.default_rng(0).standard_normal(volts.size)
    >>> calibrator = ToneCalibrator(48000, expected_hz=1000.0, level_db=94.0)
    >>> for block in np.array_split(volts, 9):
    ...     calibrator.update(block)
    >>> result = calibrator.result()
    >>> round(result.sensitivity_mv_per_pa, 1), round(result.residual_db), result.stable
    (50.0, -40, True)

    A vibration calibrator, 10 m/s² RMS (140 dB re 1 µm/s²) at 159.2 Hz, on a 10 mV/g
    accelerometer (g = 9.80665 m/s²) gives 10.197 mV RMS:

    >>> volts = 0.010 / 9.80665 * 10 * np.sqrt(2) * np.sin(1000 * t)
    >>> vib = ToneCalibrator(48000, expected_hz=159.2, level_db=140.0, quantity="acceleration")
    >>> vib.update(volts)
    >>> vib.result().sensitivity_text
    '1.020 mV/(m/s²) (10.00 mV/g)'
    """

    def __init__(
        self,
        sample_rate_hz: float,
        *,
        expected_hz: float = 1000.0,
        level_db: float = 94.0,
        reference: float | None = None,
        quantity: str = "pressure",
    ) -> None:
        if not sample_rate_hz > 0:
            raise InputError(f"sample_rate_hz must be positive, got {sample_rate_hz!r}")
        upper_edge = expected_hz * FREQUENCY_SEARCH_RATIO * 2 ** (1 / 6)
        if not 0 < expected_hz or upper_edge >= sample_rate_hz / 2:
            raise InputError(
                f"calibrator frequency {expected_hz:g} Hz is out of range for a sample rate "
                f"of {sample_rate_hz:g} Hz"
            )
        q = quantity_named(quantity)
        if not q.mechanical:
            raise InputError(
                f"quantity: a channel that measures {q.name} has no sensitivity to calibrate; "
                "give the sensor's quantity (pressure, acceleration, force ...)"
            )
        self.fs = float(sample_rate_hz)
        self.expected_hz = float(expected_hz)
        self.level_db = float(level_db)
        self.quantity = q.name
        self.reference = float(q.reference if reference is None else reference)
        self._head: list[np.ndarray] = []
        self._head_frames = 0
        self._head_needed = int(round(self.fs * 1.0))
        self._sos: np.ndarray | None = None
        self._zi: np.ndarray | None = None
        self._gain_at_tone = 1.0
        self.tone_hz_coarse: float | None = None
        self._n = 0  # samples through the filter
        self._seg_len = int(round(SEGMENT_S * self.fs))
        self._settle = int(round(SETTLE_S * self.fs))
        self._seg_band: list[float] = []
        self._seg_freq: list[float] = []
        self._acc_band = 0.0
        self._acc_raw = 0.0
        self._acc_raw2 = 0.0
        self._acc_n = 0
        self._tot_band = 0.0
        self._tot_raw = 0.0
        self._tot_raw2 = 0.0
        self._tot_n = 0
        self._crossings: list[float] = []
        self._prev: float | None = None

    def update(self, block: np.ndarray) -> None:
        """Feed the next samples (1-D, or 2-D with a single channel), in volts."""
        x = np.asarray(block, dtype=np.float64)
        if x.ndim == 2:
            if x.shape[1] != 1:
                raise InputError(f"expected one channel, got {x.shape[1]}")
            x = x[:, 0]
        if x.size == 0:
            return
        if self._sos is None:
            self._head.append(x)
            self._head_frames += x.size
            if self._head_frames < self._head_needed:
                return
            head = np.concatenate(self._head)
            self._head = []
            self._design(head)
            x = head
        self._run(x)

    def _design(self, head: np.ndarray) -> None:
        n = head.size
        # One Hann-windowed, mean-removed segment of the head, density-scaled.
        auto = AutoSpectra(self.fs, 1, segment_frames=n, window="hann")
        auto.update(head)
        psd = auto.result()
        spec, freqs = psd.density[:, 0], psd.frequency_hz
        lo = self.expected_hz / FREQUENCY_SEARCH_RATIO
        hi = self.expected_hz * FREQUENCY_SEARCH_RATIO
        band = (freqs >= lo) & (freqs <= hi)
        if not band.any() or spec[band].max() <= 0:
            raise InputError(f"no tone found between {lo:.0f} and {hi:.0f} Hz")
        k = int(np.flatnonzero(band)[np.argmax(spec[band])])
        # The strongest component overall must be the tone, not a louder disturbance
        # (half its amplitude: a quarter of its power), a calibrator of another
        # frequency. Infrasound is not counted: seating a calibrator on a piezo element
        # squeezes it, a swing far below any tone.
        audible = freqs >= INFRASOUND_HZ
        if spec[k] < 0.25 * spec[audible].max():
            k_all = int(np.flatnonzero(audible)[np.argmax(spec[audible])])
            raise InputError(
                f"the strongest component is at {freqs[k_all]:.1f} Hz, not near the "
                f"expected {self.expected_hz:g} Hz; set expected_hz to the calibrator's "
                "nominal frequency"
            )
        # The coarse frequency: the one tone-line estimator over the Hann main lobe.
        f0 = spectral_line(freqs, spec, k, half_width_bins=2).frequency_hz
        self.tone_hz_coarse = float(f0)
        edges = f0 * np.array([2 ** (-1 / 6), 2 ** (1 / 6)])
        self._sos = signal.butter(3, edges, btype="bandpass", fs=self.fs, output="sos")
        self._zi = np.zeros((self._sos.shape[0], 2))
        self._gain_at_tone = float(abs(sos_response(self._sos, np.array([f0]), self.fs)[0]))

    def _run(self, x: np.ndarray) -> None:
        assert self._sos is not None
        y, self._zi = signal.sosfilt(self._sos, x, zi=self._zi)
        start = self._n
        self._n += x.size
        # Skip the settling samples.
        skip = max(0, self._settle - start)
        if skip >= x.size:
            self._prev = float(y[-1])
            return
        t0 = start + skip
        xs, ys = x[skip:], y[skip:]
        prev = self._prev if skip == 0 else float(y[skip - 1])
        self._prev = float(y[-1])
        # Positive-going zero crossings, linearly interpolated, in samples.
        yy = ys if prev is None else np.concatenate([[prev], ys])
        offset = t0 if prev is None else t0 - 1
        idx = np.flatnonzero((yy[:-1] < 0) & (yy[1:] >= 0))
        frac = -yy[idx] / (yy[idx + 1] - yy[idx])
        self._crossings.extend((offset + idx + frac).tolist())
        # Segment accumulation.
        pos = 0
        while pos < xs.size:
            take = min(self._seg_len - self._acc_n, xs.size - pos)
            xb, yb = xs[pos : pos + take], ys[pos : pos + take]
            self._acc_band += float(np.dot(yb, yb))
            self._acc_raw += float(xb.sum())
            self._acc_raw2 += float(np.dot(xb, xb))
            self._acc_n += take
            pos += take
            if self._acc_n == self._seg_len:
                self._close_segment(t0 + pos)

    def _close_segment(self, end_sample: int) -> None:
        self._seg_band.append(self._acc_band / self._acc_n)
        start_sample = end_sample - self._acc_n
        cr = [c for c in self._crossings if start_sample <= c < end_sample]
        if len(cr) >= 3:
            self._seg_freq.append((len(cr) - 1) * self.fs / (cr[-1] - cr[0]))
        self._crossings = [c for c in self._crossings if c >= end_sample - 1]
        self._tot_band += self._acc_band
        self._tot_raw += self._acc_raw
        self._tot_raw2 += self._acc_raw2
        self._tot_n += self._acc_n
        self._acc_band = self._acc_raw = self._acc_raw2 = 0.0
        self._acc_n = 0

    def result(self) -> CalibrationResult:
        """Sensitivity, tone frequency, residual and stability of what was fed.

        Raises
        ------
        InputError
            If the capture is too short or holds no tone.
        """
        if self._sos is None and self._head:
            head = np.concatenate(self._head)
            self._head = []
            self._design(head)
            self._run(head)
        if len(self._seg_band) < 2:
            raise InputError(
                f"calibrator capture too short: need at least {MIN_DURATION_S:g} s "
                f"({len(self._seg_band)} segment(s) of {SEGMENT_S:g} s measured)"
            )
        band_ms = self._tot_band / self._tot_n / self._gain_at_tone**2
        mean = self._tot_raw / self._tot_n
        total_ms = self._tot_raw2 / self._tot_n - mean**2
        if band_ms <= 0:
            raise InputError("no tone found: the band-passed signal is silent")
        residual_ms = max(total_ms - band_ms, band_ms * 1e-15)
        seg_db = 10 * np.log10(np.asarray(self._seg_band))
        level_spread = float(seg_db.max() - seg_db.min())
        if len(self._seg_freq) >= 2:
            f = np.asarray(self._seg_freq)
            freq_spread = float((f.max() - f.min()) / f.mean())
            tone_hz = float(f.mean())
        else:
            freq_spread = math.inf
            tone_hz = float(self.tone_hz_coarse or math.nan)
        tone_rms = math.sqrt(band_ms)
        return CalibrationResult(
            sensitivity_v_per_unit=tone_rms / (self.reference * 10.0 ** (self.level_db / 20.0)),
            tone_hz=tone_hz,
            tone_rms_v=tone_rms,
            residual_db=10 * math.log10(residual_ms / band_ms),
            level_spread_db=level_spread,
            frequency_spread=freq_spread,
            segments=len(self._seg_band),
            level_db=self.level_db,
            reference=self.reference,
            stable=level_spread <= STABILITY_DB and freq_spread <= FREQUENCY_STABILITY,
            segment_level_std_db=float(np.std(seg_db, ddof=1)),
            quantity=self.quantity,
        )


def calibrate_tone(
    x: np.ndarray,
    sample_rate_hz: float,
    *,
    expected_hz: float = 1000.0,
    level_db: float = 94.0,
    reference: float | None = None,
    quantity: str = "pressure",
) -> CalibrationResult:
    """Whole-array form of :class:`ToneCalibrator` (``x`` in volts, one channel).

    Examples
    --------
    A 250 Hz calibrator at 114 dB (10.02 Pa) on a sensor reading 2 mV RMS:

    >>> t = np.arange(96000) / 48000
    >>> volts = 0.002 * np.sqrt(2) * np.sin(2 * np.pi * 250 * t)
    >>> result = calibrate_tone(volts, 48000, expected_hz=250.0, level_db=114.0)
    >>> round(result.tone_hz, 3), round(result.sensitivity_v_per_pa * 1e6, 1)  # uV/Pa
    (250.0, 199.5)
    """
    cal = ToneCalibrator(
        sample_rate_hz,
        expected_hz=expected_hz,
        level_db=level_db,
        reference=reference,
        quantity=quantity,
    )
    cal.update(x)
    return cal.result()


def calibration_budget(
    result: CalibrationResult,
    *,
    calibrator_tolerance_db: float = CLASS1_LEVEL_TOLERANCE_DB,
    calibrator_expanded_db: float | None = None,
) -> Budget:
    """GUM uncertainty budget of a calibrator sensitivity, in dB of sensitivity level.

    Parameters
    ----------
    result
        The calibrator measurement.
    calibrator_tolerance_db
        Half-width of the calibrator's level tolerance (rectangular, GUM 4.3.7); the
        default is the class 1 tolerance of IEC 60942:2017.
    calibrator_expanded_db
        Expanded uncertainty (k = 2) of the calibrator's level from its calibration
        certificate; when given it replaces the tolerance (GUM 4.3.6), and the level
        passed to the measurement should be the certificate's value.

    Examples
    --------
    A class 1 calibrator alone contributes 0.25/√3 = 0.144 dB:

    >>> r = CalibrationResult(0.0085, 1000.0, 0.0085, -60.0, 0.01, 0.0, 8, 94.0, 2e-5,
    ...                       True, segment_level_std_db=0.004)
    >>> b = calibration_budget(r)
    >>> [round(c.standard_uncertainty, 4) for c in b.components]
    [0.1443, 0.0014, 0.0]
    >>> round(b.expanded_uncertainty, 2)
    0.29
    """
    if calibrator_expanded_db is not None:
        if not (math.isfinite(calibrator_expanded_db) and calibrator_expanded_db >= 0):
            raise InputError(
                "calibrator expanded uncertainty must be finite and not negative, "
                f"got {calibrator_expanded_db!r} dB"
            )
        level = Component.from_expanded(
            f"calibrator level (certificate, U = {calibrator_expanded_db:g} dB, k = 2)",
            calibrator_expanded_db,
        )
    else:
        if not (math.isfinite(calibrator_tolerance_db) and calibrator_tolerance_db >= 0):
            raise InputError(
                "calibrator tolerance must be finite and not negative, "
                f"got {calibrator_tolerance_db!r} dB"
            )
        level = Component.rectangular(
            f"calibrator level (tolerance ±{calibrator_tolerance_db:g} dB)",
            calibrator_tolerance_db,
        )
    n = result.segments
    s = result.segment_level_std_db
    repeat = Component(
        f"repeatability of {n} segment levels",
        (s if math.isfinite(s) else 0.0) / math.sqrt(n),
        degrees_of_freedom=max(n - 1, 1),
        distribution="t",
    )
    noise = Component.rectangular(
        "noise and distortion in the tone band",
        10.0 * math.log10(1.0 + 10.0 ** (result.residual_db / 10.0)),
    )
    return Budget((level, repeat, noise))
