"""Digital realisations of a front-end: simulate it on a recording, or equalize its roll-off.

:class:`FrontendFilter` shapes a recording taken as the sensor's pressure (Pa) or charge
(C) as the front-end would, giving output volts. :class:`Equalizer` undoes the measured
front-end's first-order high-pass and puts a lower corner in its place (a stable
low-frequency shelf (s + ωc)/(s + ωt), not the raw inverse (s + ωc)/s, whose pole at DC
would integrate every offset without bound).

Digital design. Every analog pole p is mapped exactly, z = exp(p/fs) (impulse
invariance of the poles; Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed.,
§7.2.1); poles above 0.45·fs, which have no place below Nyquist, are put on the same
radius at an angle just below π. Zeros at DC stay at z = 1. The remaining numerator is
fitted in magnitude: |B(e^jω)|² is a cosine polynomial found by linear least squares on
the relative error against |H(jω)·A(e^jω)|² over 0–0.45·fs (log- and linearly spaced
points), then factored into its minimum-phase part (spectral factorisation). The order
grows until the realisation is within 0.01 dB of the exact response from twice the
corner to 0.4·fs, or the best attempt is kept; the achieved error is reported.

Phase. A minimum-phase filter with that magnitude has less lag than the analog
response, whose roll-off goes on above Nyquist where a sampled system has nothing. A
delay of 0–3.5 samples (whole samples and a first-order Thiran all-pass, which leaves
the magnitude untouched) is chosen to bring the phase closest to the analog over the
same band; the largest remaining difference is reported too (a few degrees for a
resonance inside the band, 0 for a plain high-pass).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, signal

from piezo import validate
from piezo.errors import InputError
from piezo.frontend.model import Frontend, InputKind, analog_zpk, corner_frequency_hz
from piezo.sos import sos_response

__all__ = [
    "DigitalRealisation",
    "Equalizer",
    "EqualizerResult",
    "FrontendFilter",
    "SimulationResult",
    "equalize",
    "equalizer_zpk",
    "realise_frontend",
    "realise_zpk",
    "simulate_frontend",
]

#: Target accuracy of a realisation over its check band, dB.
_GOOD_ENOUGH_DB = 0.01
#: Upper end of the fitted band and of the check band, as fractions of fs.
_FIT_TOP = 0.45
_CHECK_TOP = 0.4
_MAX_ORDER = 12
#: Lowest corner, as a fraction of fs, that float64 second-order sections hold reliably
#: (the pole is then 1 − 6e-10 from the unit circle, 6e6 times the float64 spacing).
_LOWEST_FRACTION = 1e-10


@dataclass(frozen=True)
class DigitalRealisation:
    """A digital filter standing in for an analog response.

    Attributes
    ----------
    sos
        Second-order sections (scipy.signal layout), shape (n_sections, 6).
    sample_rate_hz
        Sample rate the filter is designed for, Hz.
    check_band_hz
        Band over which it was compared with the exact analog response, Hz.
    max_error_db
        Largest magnitude difference over the check band, dB.
    max_phase_error_deg
        Largest phase difference over the check band, degrees (information only).

    Examples
    --------
    The digital filter follows the analog response over its check band, from twice the
    corner (2 × 1.59 Hz) to 0.4 × fs:

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor, frequency_response
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> r = realise_frontend(fe, 48000.0)
    >>> [round(f, 2) for f in r.check_band_hz], r.max_error_db < 0.01
    ([3.18, 19200.0], True)
    >>> ratio = r.response(np.array([1000.0])) / frequency_response(fe, np.array([1000.0]))
    >>> round(float(abs(ratio[0])), 4)
    1.0
    """

    sos: np.ndarray
    sample_rate_hz: float
    check_band_hz: tuple[float, float]
    max_error_db: float
    max_phase_error_deg: float

    def response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Complex response of the digital filter at ``frequency_hz``."""
        return sos_response(self.sos, np.asarray(frequency_hz, dtype=float), self.sample_rate_hz)


def _analog(
    frequency_hz: np.ndarray, zeros: np.ndarray, poles: np.ndarray, gain: float
) -> np.ndarray:
    s = 2j * math.pi * frequency_hz
    h = np.full(s.shape, gain, dtype=complex)
    for z in zeros:
        h = h * (s - z)
    for p in poles:
        h = h / (s - p)
    return h


def _map_pole(pole: complex, sample_rate_hz: float, angle_limit: float) -> complex:
    if abs(pole) / (2.0 * math.pi) < _FIT_TOP * sample_rate_hz:
        return complex(np.exp(pole / sample_rate_hz))
    radius = math.exp(pole.real / sample_rate_hz)
    angle = math.copysign(min(abs(pole.imag) / sample_rate_hz, angle_limit * math.pi), pole.imag)
    return complex(radius * np.exp(1j * angle))


def _cosine_matrix(omega: np.ndarray, order: int) -> np.ndarray:
    k = np.arange(order + 1)
    c = 2.0 * np.cos(np.outer(omega, k))
    c[:, 0] = 1.0
    return c


def _fit_once(
    zeros: np.ndarray,
    poles: np.ndarray,
    gain: float,
    fs: float,
    order: int,
    angle_limit: float,
    fit_omega: np.ndarray,
    check_f: np.ndarray,
) -> tuple[tuple[np.ndarray, np.ndarray, float], float] | None:
    """One magnitude fit of numerator ``order``; returns ((z, p, k), dB error)."""
    dc_zeros = int(np.sum(zeros == 0))
    other_zeros = zeros[zeros != 0]
    zp = np.array([_map_pole(complex(p), fs, angle_limit) for p in poles], dtype=complex)
    ew = np.exp(1j * fit_omega)
    a_mag2 = np.ones(fit_omega.shape)
    for p in zp:
        a_mag2 *= np.abs(1.0 - p / ew) ** 2
    fixed_mag2 = np.abs(1.0 - 1.0 / ew) ** (2 * dc_zeros)
    # |H_analog|² without its DC zeros (they are kept exactly as z = 1).
    s = 1j * fit_omega * fs
    h_mag2 = np.ones(fit_omega.shape)
    for z in other_zeros:
        h_mag2 *= np.abs(s - z) ** 2
    for p in poles:
        h_mag2 /= np.abs(s - p) ** 2
    h_mag2 *= np.abs(s) ** (2 * dc_zeros)
    with np.errstate(divide="ignore", invalid="ignore"):
        target = h_mag2 * a_mag2 / fixed_mag2
    usable = np.isfinite(target) & (target > 0)
    omega, target = fit_omega[usable], target[usable]
    weight = np.where(omega <= 2 * math.pi * _FIT_TOP, 1.0, 0.05)
    c = _cosine_matrix(omega, order)
    r, *_ = np.linalg.lstsq(c * (weight / target)[:, None], weight, rcond=None)
    full = _cosine_matrix(np.linspace(0.0, math.pi, 8 * order + 1024), order) @ r
    if np.min(full) <= 0:
        return None
    sym = np.concatenate([r[::-1], r[1:]])
    roots = np.roots(sym) if order > 0 else np.array([])
    inside = roots[np.abs(roots) < 1.0]
    if len(inside) != order:
        return None
    dz = np.concatenate([inside, np.ones(dc_zeros)])
    # Causal form B(z⁻¹)/A(z⁻¹): as many poles as zeros, the surplus at the origin.
    surplus = len(dz) - len(zp)
    if surplus > 0:
        zp = np.concatenate([zp, np.zeros(surplus)])
    elif surplus < 0:
        dz = np.concatenate([dz, np.zeros(-surplus)])
    _, hd = signal.freqz_zpk(dz, zp, 1.0, worN=check_f, fs=fs)
    ha = _analog(check_f, zeros, poles, gain)
    err = 20.0 * np.log10(np.abs(hd) / np.abs(ha))
    centre = (err.max() + err.min()) / 2.0
    err_db = float(np.max(np.abs(err - centre)))
    return (dz, zp, 10.0 ** (-centre / 20.0)), err_db


def _delay_allpass(delay_samples: float) -> tuple[np.ndarray, np.ndarray, float]:
    """Zeros, poles and gain of a delay of ``delay_samples``: whole samples (poles at the
    origin) and a first-order Thiran all-pass (a + z⁻¹)/(1 + a·z⁻¹), a = (1 − D)/(1 + D),
    for the fraction D in [0.5, 1.5) (Thiran 1971; maximally flat group delay D)."""
    if delay_samples < 0.5:
        whole, frac = 0, delay_samples
    else:
        whole = math.floor(delay_samples - 0.5)
        frac = delay_samples - whole
    a = (1.0 - frac) / (1.0 + frac)
    origin = np.zeros(whole)
    if frac < 0.02:  # a → 1: the all-pass tends to 1 (pole and zero cancel at z = −1)
        return np.array([]), origin, 1.0
    if abs(a) < 1e-9:  # D = 1: one more whole sample
        return np.array([]), np.zeros(whole + 1), 1.0
    return np.array([-1.0 / a]), np.concatenate([origin, [-a]]), a


def _align_phase(
    fit: tuple[np.ndarray, np.ndarray, float],
    zeros: np.ndarray,
    poles: np.ndarray,
    gain: float,
    fs: float,
    check_f: np.ndarray,
) -> tuple[tuple[np.ndarray, np.ndarray, float], float]:
    """Add the delay (0–3.5 samples, an all-pass: the magnitude is untouched) and the
    polarity that bring the phase closest to the analog over ``check_f``.

    The magnitude fit is minimum phase; the analog response has more phase lag, from
    its roll-off continuing above Nyquist. A delay takes up most of the difference.
    """
    dz, dp, k = fit
    _, hd = signal.freqz_zpk(dz, dp, k, worN=check_f, fs=fs)
    ha = _analog(check_f, zeros, poles, gain)
    zinv = np.exp(-2j * math.pi * check_f / fs)

    def phase_error(delay: float) -> tuple[float, float]:
        az, ap, ak = _delay_allpass(delay)
        h = hd * ak
        for z in az:
            h = h * (1.0 - z * zinv)
        for p in ap:
            h = h / (1.0 - p * zinv)
        # Polarity from the low end of the band, where a delay turns the phase least.
        sign = 1.0 if np.real(ha[0] * np.conj(h[0])) >= 0 else -1.0
        return float(np.max(np.abs(np.degrees(np.angle(sign * h / ha))))), sign

    grid = np.linspace(0.0, 3.5, 351)
    errors = [phase_error(d)[0] for d in grid]
    start = float(grid[int(np.argmin(errors))])
    refined = optimize.minimize_scalar(
        lambda d: phase_error(d)[0],
        bounds=(max(0.0, start - 0.01), start + 0.01),
        method="bounded",
    )
    delay = float(refined.x) if refined.fun < min(errors) else start
    err, sign = phase_error(delay)
    az, ap, ak = _delay_allpass(delay)
    return (np.concatenate([dz, az]), np.concatenate([dp, ap]), sign * k * ak), err


def realise_zpk(
    zeros: np.ndarray,
    poles: np.ndarray,
    gain: float,
    sample_rate_hz: float,
    *,
    check_band_hz: tuple[float, float],
) -> DigitalRealisation:
    """Digital filter whose magnitude follows the analog H(s) = k·Π(s−z)/Π(s−p).

    Parameters
    ----------
    zeros, poles
        Analog zeros and poles, rad/s (left half-plane poles; zeros anywhere in the
        left half-plane or at 0).
    gain
        k.
    sample_rate_hz
        Sample rate, Hz.
    check_band_hz
        Band over which the error is measured and minimised, Hz.

    Examples
    --------
    An analog first-order high-pass s/(s + 2π·100 Hz), realised at 48 kHz and compared
    with scipy's analog response:

    >>> import math
    >>> import numpy as np
    >>> from scipy import signal
    >>> z, p, k = np.array([0.0]), np.array([-2 * math.pi * 100.0]), 1.0
    >>> r = realise_zpk(z, p, k, 48000.0, check_band_hz=(200.0, 19200.0))
    >>> f = np.array([100.0, 1000.0])
    >>> _, ha = signal.freqs_zpk(z, p, k, worN=2 * math.pi * f)
    >>> (np.abs(r.response(f)) / np.abs(ha)).round(4).tolist(), r.max_error_db < 0.01
    ([1.0, 1.0], True)
    """
    fs = _check_rate(sample_rate_hz)
    zeros = np.asarray(zeros, dtype=complex)
    poles = np.asarray(poles, dtype=complex)
    if np.any(poles.real >= 0):
        raise InputError(f"unstable analog response: poles {poles!r} not in the left half-plane")
    lo, hi = check_band_hz
    check_f = np.geomspace(lo, hi, 2000)
    corners = np.abs(np.concatenate([poles, zeros[zeros != 0]])) / (2 * math.pi)
    lowest = (
        max(float(np.min(corners)) / 10.0, _LOWEST_FRACTION * fs) if len(corners) else 1e-3 * fs
    )
    fit_f = np.unique(
        np.concatenate(
            [
                np.linspace(0.0, fs / 2, 3000)[1:],
                np.geomspace(lowest, fs / 2, 1500),
            ]
        )
    )
    fit_omega = 2 * math.pi * fit_f / fs
    above = np.abs(poles) / (2 * math.pi) >= _FIT_TOP * fs
    angle_limits = (0.9, 0.95, 0.8) if np.any(above) else (0.9,)
    best: tuple[tuple[np.ndarray, np.ndarray, float], float] | None = None
    n_min = max(0, len(poles) - int(np.sum(zeros == 0)) - 1)
    for order in range(n_min, _MAX_ORDER + 1):
        for angle_limit in angle_limits:
            fit = _fit_once(zeros, poles, gain, fs, order, angle_limit, fit_omega, check_f)
            if fit is None:
                continue
            if best is None or fit[1] < best[1]:
                best = fit
        if best is not None and best[1] <= _GOOD_ENOUGH_DB:
            break
    if best is None:
        raise InputError("no stable digital realisation of this response at this sample rate")
    zpk, err_db = best
    (dz, dp, k), phase_deg = _align_phase(zpk, zeros, poles, gain, fs, check_f)
    sos = signal.zpk2sos(dz, dp, k)
    return DigitalRealisation(sos, fs, (float(lo), float(hi)), err_db, phase_deg)


_check_rate = validate.sample_rate
_check_channels = validate.channel_count


def _check_band(corner_hz: float, fs: float) -> tuple[float, float]:
    return (min(2.0 * corner_hz, 0.1 * fs), _CHECK_TOP * fs)


def _as_block(block: np.ndarray, channels: int) -> np.ndarray:
    return validate.signal_block(block, channels)


class _StreamingSOS:
    """Carried-state second-order-section filter over (frames, channels) blocks."""

    def __init__(self, sos: np.ndarray, channels: int) -> None:
        self._sos = sos
        self._zi = np.zeros((sos.shape[0], 2, channels))
        self.frames = 0

    def filter(self, x: np.ndarray) -> np.ndarray:
        if x.shape[0] == 0:
            return x.copy()
        y, self._zi = signal.sosfilt(self._sos, x, axis=0, zi=self._zi)
        self.frames += x.shape[0]
        return y


@dataclass(frozen=True)
class SimulationResult:
    """Summary of a simulated front-end run (see :class:`FrontendFilter`).

    Examples
    --------
    A 20 Pa sine at 0.1 V/Pa would swing 2 V peak into a 1 V clip level: |2 sin| > 1 for
    1 − (2/π)·arcsin(1/2) = 2/3 of the time (first principles):

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9,
    ...                       clip_level_v=1.0)
    >>> sim = FrontendFilter(48000.0, 1, frontend=Frontend(Sensor(10e-12, 1e-9), amp))
    >>> _ = sim.update(20.0 * np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)[:, None])
    >>> res = sim.result()
    >>> res.peak_v, round(res.clipped_samples[0] / res.frames, 2)
    ((1.0,), 0.67)
    """

    frames: int
    peak_v: tuple[float, ...]
    clipped_samples: tuple[int, ...]
    clip_level_v: float | None
    max_error_db: float
    check_band_hz: tuple[float, float]


@functools.lru_cache(maxsize=32)
def realise_frontend(
    frontend: Frontend, sample_rate_hz: float, *, input: InputKind = "pressure"
) -> DigitalRealisation:
    """Digital realisation of ``frontend`` at ``sample_rate_hz`` (input Pa or C, output V).

    Cached: a design realised once at a rate is not fitted again.

    Examples
    --------
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> r = realise_frontend(fe, 48000.0)
    >>> r.sample_rate_hz, r is realise_frontend(fe, 48000.0)  # fitted once, then cached
    (48000.0, True)
    """
    fs = _check_rate(sample_rate_hz)
    zeros, poles, gain = analog_zpk(frontend, input=input)
    return realise_zpk(
        zeros, poles, gain, fs, check_band_hz=_check_band(corner_frequency_hz(frontend), fs)
    )


class FrontendFilter:
    """Streaming simulation of a front-end on a recording.

    Parameters
    ----------
    sample_rate_hz
        Sample rate of the blocks, Hz.
    channels
        Number of channels in every block.
    frontend
        The design to simulate.
    input
        ``"pressure"``: blocks are the sensor's pressure, Pa. ``"charge"``: blocks are
        the sensor's charge, C.
    clip
        When True and the design has a clip level, the output is limited to ±clip level
        as the amplifier would, and clipped samples are counted.

    ``update(block)`` returns the output block in volts, same shape.

    Examples
    --------
    Streaming in blocks gives the whole-array result:

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> x = np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)[:, None]  # 1 Pa at 1 kHz
    >>> sim = FrontendFilter(48000.0, 1, frontend=fe)
    >>> y = np.concatenate([sim.update(x[:1000]), sim.update(x[1000:])])
    >>> bool(np.allclose(y[:, 0], simulate_frontend(x[:, 0], 48000.0, frontend=fe)))
    True
    >>> sim.result().frames
    4800
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        frontend: Frontend,
        input: InputKind = "pressure",
        clip: bool = True,
    ) -> None:
        self.sample_rate_hz = _check_rate(sample_rate_hz)
        self.channels = _check_channels(channels)
        self.realisation = realise_frontend(frontend, self.sample_rate_hz, input=input)
        self._filter = _StreamingSOS(self.realisation.sos, self.channels)
        self._clip = frontend.amplifier.clip_level_v if clip else None
        self._peak = np.zeros(self.channels)
        self._clipped = np.zeros(self.channels, dtype=np.int64)

    def update(self, block: np.ndarray) -> np.ndarray:
        """Filter one block (frames, channels) of Pa or C; return volts."""
        y = self._filter.filter(_as_block(block, self.channels))
        if y.shape[0] == 0:
            return y
        if self._clip is not None:
            over = np.abs(y) > self._clip
            self._clipped += over.sum(axis=0)
            y = np.clip(y, -self._clip, self._clip)
        self._peak = np.maximum(self._peak, np.max(np.abs(y), axis=0))
        return y

    def result(self) -> SimulationResult:
        """Frames processed, output peak and clipped samples per channel."""
        return SimulationResult(
            frames=self._filter.frames,
            peak_v=tuple(float(v) for v in self._peak),
            clipped_samples=tuple(int(v) for v in self._clipped),
            clip_level_v=self._clip,
            max_error_db=self.realisation.max_error_db,
            check_band_hz=self.realisation.check_band_hz,
        )


def simulate_frontend(
    signal_in: np.ndarray,
    sample_rate_hz: float,
    *,
    frontend: Frontend,
    input: InputKind = "pressure",
    clip: bool = True,
) -> np.ndarray:
    """Whole-array wrapper of :class:`FrontendFilter`; 1-D or (frames, channels) input.

    Examples
    --------
    1 Pa at 1 kHz into Sq/Cf = 10 pC/Pa / 100 pF gives 0.1 V peak, inverted:

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> x = np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)
    >>> y = simulate_frontend(x, 48000.0, frontend=fe)
    >>> round(float(np.max(np.abs(y[2400:]))), 3), bool(np.dot(x[2400:], y[2400:]) < 0)
    (0.1, True)
    """
    x = np.asarray(signal_in, dtype=np.float64)
    flat = x.ndim == 1
    x2 = x[:, None] if flat else x
    if x2.ndim != 2:
        raise InputError(f"signal must be 1-D or (frames, channels), got shape {x.shape!r}")
    filt = FrontendFilter(sample_rate_hz, x2.shape[1], frontend=frontend, input=input, clip=clip)
    y = filt.update(x2)
    return y[:, 0] if flat else y


# --------------------------------------------------------------------------- equalizer


def _high_pass_pole_hz(frontend: Frontend) -> float:
    _, poles, _ = analog_zpk(frontend, input="charge")
    return float(np.min(np.abs(poles))) / (2.0 * math.pi)


def equalizer_zpk(
    frontend: Frontend, target_corner_hz: float
) -> tuple[np.ndarray, np.ndarray, float]:
    """Analog shelf E(s) = (s + ωc)/(s + ωt) as zeros, poles (rad/s) and gain (E(∞) = 1).

    ωc is the front-end's high-pass pole, ωt = 2π·target_corner_hz.

    Examples
    --------
    >>> import math
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> zeros, poles, gain = equalizer_zpk(fe, 1 / (2 * math.pi))  # 1 rad/s
    >>> zeros.real.round(6).tolist(), poles.real.round(6).tolist(), gain  # 1/(Rf·Cf) = 10 rad/s
    ([-10.0], [-1.0], 1.0)
    """
    wc = 2.0 * math.pi * _high_pass_pole_hz(frontend)
    wt = 2.0 * math.pi * target_corner_hz
    return np.array([complex(-wc)]), np.array([complex(-wt)]), 1.0


@dataclass(frozen=True)
class EqualizerResult:
    """Summary of an equalizer run (see :class:`Equalizer`).

    ``model_corner_hz`` is the −3 dB corner of the front-end design's model (not a
    measurement of the recording); ``peak`` the output's sample peaks per channel, in
    the unit of the samples fed (Pa or V).

    Examples
    --------
    Lowering the corner tenfold raises the gain towards DC by 20·lg 10 = 20 dB:

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor, corner_frequency_hz
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> eq = Equalizer(1000.0, 1, frontend=fe, target_corner_hz=corner_frequency_hz(fe) / 10)
    >>> _ = eq.update(np.zeros((100, 1)))
    >>> res = eq.result()
    >>> res.frames, round(res.boost_db, 3), round(res.model_corner_hz / res.target_corner_hz, 6)
    (100, 20.0, 10.0)
    """

    frames: int
    model_corner_hz: float
    target_corner_hz: float
    boost_db: float
    peak: tuple[float, ...]
    max_error_db: float
    check_band_hz: tuple[float, float]


class Equalizer:
    """Streaming low-frequency equalizer: replaces the front-end's corner by a lower one.

    The front-end's high-pass s/(s + ωc) times the shelf (s + ωc)/(s + ωt) is the
    high-pass s/(s + ωt) at the target corner; the midband gain is unchanged (1) and the
    gain towards DC rises to ωc/ωt. That rise multiplies whatever the recording holds
    below the old corner (noise, drift, handling) by up to ``boost_db``.

    Parameters
    ----------
    sample_rate_hz, channels
        As every streaming analysis.
    frontend
        The design whose roll-off is to be undone (its corner is solved from the model).
    target_corner_hz
        New -3 dB corner, Hz; below the front-end's corner.
    max_boost_db
        Largest low-frequency boost accepted, dB (default 40 dB, a factor 100: beyond
        that the result is dominated by amplified low-frequency noise and offsets).

    Raises
    ------
    InputError
        For a target that is not positive, not below the front-end's corner, too close
        to DC for the sample rate, or boosting more than ``max_boost_db``.

    Examples
    --------
    The shelf rises from 0 dB at high frequencies to ``boost_db`` towards DC:

    >>> import math
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> eq = Equalizer(1000.0, 1, frontend=fe, target_corner_hz=1 / (2 * math.pi))
    >>> round(eq.boost_db, 3), eq.boost_at_db([1e-4, 100.0]).round(2).tolist()
    (20.0, [20.0, 0.0])
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        frontend: Frontend,
        target_corner_hz: float,
        max_boost_db: float = 40.0,
    ) -> None:
        self.sample_rate_hz = _check_rate(sample_rate_hz)
        self.channels = _check_channels(channels)
        if not (
            isinstance(target_corner_hz, int | float)
            and math.isfinite(target_corner_hz)
            and target_corner_hz > 0
        ):
            raise InputError(
                f"target corner must be a positive frequency, got {target_corner_hz!r}: a "
                "corner at 0 Hz is the raw inverse, whose DC gain is unbounded"
            )
        if not (math.isfinite(max_boost_db) and max_boost_db > 0):
            raise InputError(f"max_boost_db must be positive, got {max_boost_db!r}")
        self.model_corner_hz = corner_frequency_hz(frontend)
        pole_hz = _high_pass_pole_hz(frontend)
        if target_corner_hz >= self.model_corner_hz:
            raise InputError(
                f"target corner {target_corner_hz:.4g} Hz is not below the front-end's "
                f"corner {self.model_corner_hz:.4g} Hz; the equalizer only lowers a corner"
            )
        self.boost_db = 20.0 * math.log10(pole_hz / target_corner_hz)
        if self.boost_db > max_boost_db:
            lowest = pole_hz / 10.0 ** (max_boost_db / 20.0)
            raise InputError(
                f"target corner {target_corner_hz:.4g} Hz would boost low frequencies by "
                f"{self.boost_db:.1f} dB (limit {max_boost_db:g} dB); choose a corner of at "
                f"least {lowest:.4g} Hz"
            )
        if target_corner_hz < _LOWEST_FRACTION * self.sample_rate_hz:
            raise InputError(
                f"target corner {target_corner_hz:.4g} Hz is too close to DC for a sample "
                f"rate of {self.sample_rate_hz:g} Hz (below {_LOWEST_FRACTION:g} of it)"
            )
        if 2.0 * target_corner_hz >= _CHECK_TOP * self.sample_rate_hz:
            raise InputError(
                f"target corner {target_corner_hz:.4g} Hz is too close to Nyquist for a "
                f"sample rate of {self.sample_rate_hz:g} Hz"
            )
        self.target_corner_hz = float(target_corner_hz)
        zeros, zpoles, gain = equalizer_zpk(frontend, self.target_corner_hz)
        self.realisation = realise_zpk(
            zeros,
            zpoles,
            gain,
            self.sample_rate_hz,
            check_band_hz=_check_band(self.target_corner_hz, self.sample_rate_hz),
        )
        self._zpk = (zeros, zpoles, gain)
        self._filter = _StreamingSOS(self.realisation.sos, self.channels)
        self._peak = np.zeros(self.channels)

    def boost_at_db(self, frequency_hz: np.ndarray | float) -> np.ndarray:
        """Gain of the shelf at ``frequency_hz``, dB (0 at high frequencies)."""
        f = np.asarray(frequency_hz, dtype=float)
        return 20.0 * np.log10(np.abs(_analog(f, *self._zpk)))

    def update(self, block: np.ndarray) -> np.ndarray:
        """Equalize one block (frames, channels); same units out as in."""
        y = self._filter.filter(_as_block(block, self.channels))
        if y.shape[0]:
            self._peak = np.maximum(self._peak, np.max(np.abs(y), axis=0))
        return y

    def result(self) -> EqualizerResult:
        """Corners, boost, output peak per channel and realisation accuracy."""
        return EqualizerResult(
            frames=self._filter.frames,
            model_corner_hz=self.model_corner_hz,
            target_corner_hz=self.target_corner_hz,
            boost_db=self.boost_db,
            peak=tuple(float(v) for v in self._peak),
            max_error_db=self.realisation.max_error_db,
            check_band_hz=self.realisation.check_band_hz,
        )


def equalize(
    signal_in: np.ndarray,
    sample_rate_hz: float,
    *,
    frontend: Frontend,
    target_corner_hz: float,
    max_boost_db: float = 40.0,
) -> np.ndarray:
    """Whole-array wrapper of :class:`Equalizer`; 1-D or (frames, channels) input.

    Examples
    --------
    A 1 Hz tone read through a 1.59 Hz high-pass keeps 1/√(1 + 1.59²) = 0.532 of its
    amplitude; equalized to a 0.159 Hz corner, 1/√(1 + 0.159²) = 0.988 (first-order
    high-pass, first principles):

    >>> import numpy as np
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor, corner_frequency_hz
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> x = np.sin(2 * np.pi * np.arange(20000) / 1000)  # 20 s at 1 kHz, 1 Pa
    >>> y = simulate_frontend(x, 1000.0, frontend=fe) / 0.1  # back to Pa at midband
    >>> z = equalize(y, 1000.0, frontend=fe, target_corner_hz=corner_frequency_hz(fe) / 10)
    >>> round(float(np.max(np.abs(y[-5000:]))), 3), round(float(np.max(np.abs(z[-5000:]))), 3)
    (0.532, 0.988)
    """
    x = np.asarray(signal_in, dtype=np.float64)
    flat = x.ndim == 1
    x2 = x[:, None] if flat else x
    if x2.ndim != 2:
        raise InputError(f"signal must be 1-D or (frames, channels), got shape {x.shape!r}")
    eq = Equalizer(
        sample_rate_hz,
        x2.shape[1],
        frontend=frontend,
        target_corner_hz=target_corner_hz,
        max_boost_db=max_boost_db,
    )
    y = eq.update(x2)
    return y[:, 0] if flat else y
