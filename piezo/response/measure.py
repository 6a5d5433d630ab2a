"""Frequency response of a device: swept-sine deconvolution and the two-channel H1 estimate.

Two ways to measure what a sensor and its front-end do to a signal:

- :func:`analyze_sweep` deconvolves a capture of an exponential sine sweep (made by
  :mod:`piezo.response.stimulus`) with the sweep's inverse filter (A. Farina, AES 108th Convention,
  2000, preprint 5093). The linear impulse response appears at the capture's latency and
  the impulse responses of the harmonics 2 … 5 at Δt_N = T ln N / ln(f2/f1) before it;
  each is cut out with its own window, giving the linear response (magnitude, phase,
  group delay) and the harmonic distortion against frequency.
- :class:`H1Estimator` / :func:`response_h1` estimate H1 = Gxy / Gxx with the coherence
  γ² = |Gxy|² / (Gxx Gyy) from Welch-averaged cross and auto spectra (P. D. Welch, IEEE
  Trans. Audio Electroacoust. 15, 1967) of a recording that carries the stimulus (or a
  reference sensor) on one channel and the device on others. Any broadband stimulus
  works: noise, music, sweeps.

Magnitudes are in dB re 1 (capture unit) per pascal when the stimulus's acoustic level
is known, otherwise relative to the stimulus. Fractional-octave smoothing
(:func:`smooth_fractional_octave`) is for display only; every number is taken from the
unsmoothed response.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass

import numpy as np
import scipy.fft
import scipy.signal
import scipy.special

from piezo import validate
from piezo.errors import InputError
from piezo.response.fit import ResponseTable, fit_response
from piezo.response.model import complex_response
from piezo.response.stimulus import (
    SweepSpec,
    _inverse_and_reference,
    harmonic_offsets_s,
    inverse_filter,
)
from piezo.spectral.averaging import CrossSpectra

__all__ = [
    "H1Estimator",
    "ImpulseResponse",
    "SweepResponse",
    "TransferEstimate",
    "analyze_sweep",
    "deconvolve",
    "log_frequency_grid",
    "response_h1",
    "smooth_fractional_octave",
]

#: Fraction of the gap between two consecutive impulse responses (orders N and N+1)
#: given to the later one (order N) as pre-time; the rest is the earlier one's tail.
#: Chosen from the measured window-truncation error of the linear response near the
#: sweep's low edge: 0.7 keeps it below 0.01 dB at 30 Hz for a 2 s 20 Hz–20 kHz sweep.
SPLIT_FRACTION = 0.7
#: Half-Hann taper at each end of every window, as a fraction of that side's length.
TAPER_FRACTION = 0.1
#: Frequencies where the deconvolution's own band-limited response (sweep * inverse,
#: windowed) is below this gain are not reported (the sweep's band edges).
MIN_REFERENCE_GAIN = 0.5
#: A harmonic is reported at excitation frequency f only if its window holds at least
#: this many cycles of N·f: shorter windows smear the harmonic's spectrum with the
#: neighbouring orders' ringing. Measured on y = x + 0.01 x² and y = x + 0.02 x³
#: (2 s and 5 s sweeps, 20 Hz–20 kHz): 5–10 cycles err by up to 2.8 dB, 10–15 by 1.1 dB,
#: 15–20 by 0.5 dB, 20–30 by 0.2 dB.
MIN_HARMONIC_CYCLES = 20.0
#: Band of the latency fit, as multiples of the sweep's start and stop frequencies:
#: above the fade-in (half an octave) and its ringing; up to 0.9 f2, below the default
#: fade-out (1/24 octave, 0.97 f2) yet close enough to f2 that a roll-off beyond the
#: band shows its curvature there (well below f2 its phase is proportional to f, as a
#: delay's is, and the two cannot be told apart).
DELAY_FIT_START = 4.0
DELAY_FIT_STOP = 0.9
#: The latency is read as a digital filter's only when that reading's excess-phase
#: residual is at most this fraction of the sampled-analog reading's; otherwise the
#: device is taken to be analog (a sensor is). Our rule; measured on noise-free
#: captures each kind leaves at least 4 times less residual under its own reading (the
#: demo pickups 4.1, digital Butterworth filters 7.3, analog ones 13 and more).
DIGITAL_RESIDUAL_RATIO = 0.5
#: Points per octave of the log-magnitude in Bode's relation (piecewise linear in ln f).
BODE_POINTS_PER_OCTAVE = 96


def _as_signal(x: np.ndarray, what: str) -> np.ndarray:
    """Validate a single-channel signal: (frames,) or (frames, 1) finite floats."""
    arr = np.asarray(x, dtype=np.float64)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise InputError(
            f"{what} must be one channel, shape (frames,) or (frames, 1); got shape "
            f"{np.shape(x)}: pick the channel to analyse"
        )
    if arr.size == 0:
        raise InputError(f"{what} is empty")
    validate.finite_samples(arr[:, None], what=what)
    return arr


_check_rate = validate.sample_rate


def log_frequency_grid(start_hz: float, stop_hz: float, points_per_octave: int) -> np.ndarray:
    """Frequencies from ``start_hz`` to ``stop_hz`` spaced evenly in log frequency.

    The points are 1000 · 2^(k / points_per_octave) Hz (so 1 kHz is always a grid point)
    for every integer k that falls inside [start_hz, stop_hz].

    Examples
    --------
    >>> log_frequency_grid(250.0, 4000.0, 1).tolist()
    [250.0, 500.0, 1000.0, 2000.0, 4000.0]
    >>> log_frequency_grid(1000.0, 2000.0, 24).size  # both ends of the octave
    25
    """
    if points_per_octave < 1:
        raise InputError(f"points_per_octave must be at least 1, got {points_per_octave!r}")
    if not (0 < start_hz < stop_hz):
        raise InputError(f"need 0 < start_hz < stop_hz, got {start_hz!r} and {stop_hz!r}")
    k_lo = math.ceil(points_per_octave * math.log2(start_hz / 1000.0) - 1e-9)
    k_hi = math.floor(points_per_octave * math.log2(stop_hz / 1000.0) + 1e-9)
    k = np.arange(k_lo, k_hi + 1)
    return 1000.0 * 2.0 ** (k / points_per_octave)


def smooth_fractional_octave(
    frequency_hz: np.ndarray, magnitude_db: np.ndarray, *, fraction: int
) -> np.ndarray:
    """1/``fraction``-octave smoothing of a magnitude in dB, for display only.

    Each point becomes the mean power (10^(dB/10)) of all points within ±1/(2·fraction)
    octave of it. NaN points are ignored. Never use the result for numbers.

    Examples
    --------
    On a 24-points-per-octave grid a third-octave window holds 9 points; one point at
    +10 dB (power 10) among 0 dB points becomes ``10·lg((10 + 8)/9) = 3.01`` dB:

    >>> f = log_frequency_grid(250.0, 4000.0, 24)
    >>> m = np.where(f == 1000.0, 10.0, 0.0)
    >>> smoothed = smooth_fractional_octave(f, m, fraction=3)
    >>> round(float(smoothed[f == 1000.0][0]), 2), round(float(smoothed[0]), 2)
    (3.01, 0.0)
    """
    f = np.asarray(frequency_hz, dtype=np.float64)
    m = np.asarray(magnitude_db, dtype=np.float64)
    if f.shape != m.shape or f.ndim != 1:
        raise InputError("frequency_hz and magnitude_db must be 1-D arrays of equal length")
    if fraction < 1:
        raise InputError(f"fraction must be at least 1, got {fraction!r}")
    order = np.argsort(f)
    fs_, ms = f[order], m[order]
    ok = np.isfinite(ms) & (fs_ > 0)
    power = np.where(ok, 10.0 ** (np.where(ok, ms, 0.0) / 10.0), 0.0)
    csum = np.concatenate([[0.0], np.cumsum(power)])
    ccount = np.concatenate([[0], np.cumsum(ok)])
    half = 2.0 ** (1.0 / (2.0 * fraction))
    lo = np.searchsorted(fs_, fs_ / half, side="left")
    hi = np.searchsorted(fs_, fs_ * half, side="right")
    count = ccount[hi] - ccount[lo]
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = (csum[hi] - csum[lo]) / count
        smoothed = np.where((count > 0) & (fs_ > 0), 10.0 * np.log10(mean), np.nan)
    out = np.empty_like(smoothed)
    out[order] = smoothed
    return out


# --------------------------------------------------------------------------------------
# Swept sine
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ImpulseResponse:
    """One windowed impulse response cut from the deconvolved capture.

    Attributes
    ----------
    order
        1 for the linear response, N for the N-th harmonic.
    samples
        The windowed samples (half-Hann tapers at both ends), in capture units per
        stimulus unit (see :attr:`SweepResponse.magnitude_unit`, before calibration).
    start_lag_frames
        Lag of ``samples[0]`` relative to the linear impulse response (the latency), in
        samples; negative because each window starts before its response.
    sample_rate_hz
        Sample rate, Hz.

    Examples
    --------
    >>> ir = ImpulseResponse(1, np.array([0.0, 1.0, 0.5]), -1, 48000.0)
    >>> (ir.time_s * 48000.0).tolist()
    [-1.0, 0.0, 1.0]
    """

    order: int
    samples: np.ndarray
    start_lag_frames: int
    sample_rate_hz: float

    @property
    def time_s(self) -> np.ndarray:
        """Time of each sample relative to the linear impulse response, seconds."""
        return (self.start_lag_frames + np.arange(self.samples.size)) / self.sample_rate_hz


@dataclass(frozen=True)
class SweepResponse:
    """Result of :func:`analyze_sweep`.

    Arrays share the analysis grid ``frequency_hz`` (FFT bins of the linear window,
    zero-padded twice, inside the sweep band).

    Attributes
    ----------
    frequency_hz
        Analysis frequencies, Hz.
    response
        Complex response on that grid, referred to the latency (the detected delay is
        not in the phase). In ``magnitude_unit`` as a ratio.
    magnitude_db, phase_deg
        20 lg|response| in ``magnitude_unit``; phase in degrees, wrapped to (−180, 180].
    group_delay_s
        −dφ/dω in seconds, excluding ``latency_s``.
    magnitude_unit
        ``"dB re 1 V/Pa"`` (calibrated: capture in volts and the stimulus's acoustic level
        known) or ``"dB re 1 <unit>/FS"`` (relative: capture unit per stimulus full scale).
    latency_frames, latency_s
        Delay of the capture against the stimulus, whole samples: the pure delay before
        the device's impulse response (the slope of the excess phase over the minimum
        phase of the measured magnitude, with the device's roll-off beyond the sweep's
        band fitted too), not the response's peak, which a minimum-phase device puts
        after its onset. A converter's linear-phase anti-alias filter is a delay and
        counts in it.
    harmonic_percent
        Order N → distortion of that order vs excitation frequency, percent of the
        fundamental output, NaN where not measurable: N·f in or above the sweep's
        fade-out, f in the fade-in where the stimulus level is reduced, or fewer than
        ``MIN_HARMONIC_CYCLES`` cycles of N·f in the harmonic's window (the lowest
        frequencies of a short sweep).
    thd_percent
        √(Σ_N H_N²) over the orders measured at that frequency (orders whose N·f lies
        above the band are left out); NaN where no order is measured.
    linear_ir, harmonic_irs
        The windowed impulse responses.
    peak_to_noise_db
        Linear IR peak over the RMS of the deconvolved capture after the linear window
        (a rough measure of the measurement's signal-to-noise ratio).
    sample_rate_hz, spec
        Sample rate and the stimulus's parameters.

    Examples
    --------
    A device of gain 0.5, 10 samples late, with a square term: ``y = 0.5·x + 0.1·x²``.
    For ``x = A sin ωt`` the second harmonic is ``0.1·A²/2`` against a fundamental of
    ``0.5·A``, i.e. ``0.1·A`` = 5.01 % at A = 10^(-6/20) (-6 dBFS):

    >>> from piezo.response.stimulus import sweep_signal, sweep_spec
    >>> spec = sweep_spec(50.0, 10000.0, 0.5, 48000.0, silence_after_s=0.1)
    >>> x = sweep_signal(spec)
    >>> y = np.concatenate([np.zeros(10), 0.5 * x + 0.1 * x**2])[: x.size]
    >>> r = analyze_sweep(y, spec, 48000.0)
    >>> k = int(np.argmin(np.abs(r.frequency_hz - 1000.0)))
    >>> r.latency_frames, r.magnitude_unit, round(float(r.magnitude_db[k]), 2)
    (10, 'dB re 1 FS/FS', -6.02)
    >>> round(float(r.harmonic_percent[2][k]), 2), round(r.thd_percent_at([1000.0])[1000.0], 2)
    (5.01, 5.01)
    >>> table = r.to_table(points_per_octave=3)
    >>> float(table.frequency_hz[2]), round(float(table.magnitude_db[2]), 2)
    (125.0, -6.01)
    """

    frequency_hz: np.ndarray
    response: np.ndarray
    group_delay_s: np.ndarray
    magnitude_unit: str
    latency_frames: int
    harmonic_percent: dict[int, np.ndarray]
    thd_percent: np.ndarray
    linear_ir: ImpulseResponse
    harmonic_irs: dict[int, ImpulseResponse]
    peak_to_noise_db: float
    sample_rate_hz: float
    spec: SweepSpec

    @property
    def magnitude_db(self) -> np.ndarray:
        """20 lg|response|, dB in :attr:`magnitude_unit`."""
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(self.response))

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of the response, degrees, wrapped to (−180, 180]."""
        return np.degrees(np.angle(self.response))

    @property
    def latency_s(self) -> float:
        """Latency in seconds."""
        return self.latency_frames / self.sample_rate_hz

    def to_table(self, *, points_per_octave: int = 24) -> ResponseTable:
        """The response on a log-spaced grid (interpolated, not smoothed) for CSV/JSON.

        Magnitude in dB and unwrapped phase are interpolated linearly in log frequency;
        columns: ``group_delay_ms``, ``h2_percent`` … ``h5_percent``, ``thd_percent``.
        """
        f = self.frequency_hz
        grid = log_frequency_grid(float(f[0]), float(f[-1]), points_per_octave)
        lf, lg = np.log(f), np.log(grid)
        mag = np.interp(lg, lf, self.magnitude_db)
        phase = np.interp(lg, lf, np.unwrap(np.angle(self.response)))
        phase_deg = np.degrees(np.angle(np.exp(1j * phase)))
        extra = {"group_delay_ms": 1e3 * np.interp(lg, lf, self.group_delay_s)}
        for order, pct in self.harmonic_percent.items():
            extra[f"h{order}_percent"] = np.interp(lg, lf, pct)
        extra["thd_percent"] = np.interp(lg, lf, self.thd_percent)
        return ResponseTable(
            frequency_hz=grid,
            magnitude_db=mag,
            phase_deg=phase_deg,
            magnitude_unit=self.magnitude_unit,
            extra=extra,
        )

    def thd_percent_at(self, frequencies_hz: list[float] | np.ndarray) -> dict[float, float]:
        """THD (percent) interpolated at each frequency; NaN outside the measured range."""
        lf = np.log(self.frequency_hz)
        out: dict[float, float] = {}
        for fq in np.atleast_1d(np.asarray(frequencies_hz, dtype=np.float64)):
            if fq < self.frequency_hz[0] or fq > self.frequency_hz[-1]:
                out[float(fq)] = math.nan
            else:
                out[float(fq)] = float(np.interp(math.log(fq), lf, self.thd_percent))
        return out


def deconvolve(capture: np.ndarray, spec: SweepSpec) -> tuple[np.ndarray, int]:
    """Convolve a capture with the sweep's inverse filter (Farina 2000).

    Whole-array FFT convolution: memory is a few times (capture + sweep) samples of
    float64/complex128, which is fine for sweep captures (seconds to a few minutes at
    48 kHz: a one-minute capture costs some hundreds of megabytes at most). Longer
    recordings should be cut around the sweep first.

    Parameters
    ----------
    capture
        Samples, shape (frames,), in any unit.
    spec
        The stimulus's parameters.

    Returns
    -------
    output, zero_lag_index
        The full convolution (length frames + sweep_frames − 1) and the index in it that
        corresponds to zero delay between stimulus and capture (where a loopback capture
        has its unit impulse).

    Examples
    --------
    A capture 10 samples late has its impulse 10 samples after the zero lag:

    >>> from piezo.response.stimulus import sweep_signal, sweep_spec
    >>> spec = sweep_spec(50.0, 10000.0, 0.5, 48000.0)
    >>> capture = np.concatenate([np.zeros(10), sweep_signal(spec)])
    >>> out, zero_lag = deconvolve(capture, spec)
    >>> out.size == capture.size + spec.sweep_frames - 1, int(np.argmax(np.abs(out))) - zero_lag
    (True, 10)
    """
    y = _as_signal(capture, "capture")
    return _deconvolve(y, inverse_filter(spec), spec)


def _deconvolve(y: np.ndarray, inverse: np.ndarray, spec: SweepSpec) -> tuple[np.ndarray, int]:
    length = y.size + inverse.size - 1
    nfft = scipy.fft.next_fast_len(length, real=True)
    output = scipy.fft.irfft(scipy.fft.rfft(y, nfft) * scipy.fft.rfft(inverse, nfft), nfft)
    zero_lag = spec.silence_before_frames + inverse.size - 1
    return output[:length], zero_lag


def _cut(signal: np.ndarray, centre: int, pre: int, post: int) -> np.ndarray:
    """``signal[centre - pre : centre + post]`` zero-padded outside, with half-Hann tapers."""
    out = np.zeros(pre + post)
    lo, hi = centre - pre, centre + post
    src_lo, src_hi = max(lo, 0), min(hi, signal.size)
    if src_hi > src_lo:
        out[src_lo - lo : src_hi - lo] = signal[src_lo:src_hi]
    n_in = max(1, round(TAPER_FRACTION * pre))
    n_out = max(1, round(TAPER_FRACTION * post))
    out[:n_in] *= 0.5 * (1.0 - np.cos(np.pi * np.arange(n_in) / n_in))
    out[pre + post - n_out :] *= 0.5 * (1.0 + np.cos(np.pi * (np.arange(n_out) + 1) / n_out))
    return out


def _folded_cepstrum_phase(log_magnitude: np.ndarray) -> np.ndarray:
    """Minimum phase (rad) of a digital system from its log-magnitude on 0 … fs/2.

    The periodic Hilbert transform, computed as the folded real cepstrum (A. V. Oppenheim
    and R. W. Schafer, *Discrete-Time Signal Processing*, 3rd ed., 2010, §13.8):
    ``log_magnitude`` holds ln|H| on the ``n/2 + 1`` bins of an ``n``-point FFT.
    """
    n = 2 * (log_magnitude.size - 1)
    cepstrum = scipy.fft.irfft(log_magnitude, n)
    fold = np.zeros(n)
    fold[0] = 1.0
    fold[1 : n // 2] = 2.0
    fold[n // 2] = 1.0
    return np.imag(scipy.fft.rfft(cepstrum * fold))


def _chi2(x: np.ndarray) -> np.ndarray:
    """Legendre's chi function χ₂(x) = Σ x^(2k+1) / (2k+1)² = (Li₂(x) − Li₂(−x)) / 2, 0 ≤ x ≤ 1.

    ``scipy.special.spence(1 − x)`` is the dilogarithm Li₂(x).
    """
    x = np.asarray(x, dtype=np.float64)
    return 0.5 * (scipy.special.spence(1.0 - x) - scipy.special.spence(1.0 + x))


def _bode_kernel_integral(x: np.ndarray) -> np.ndarray:
    """∫₀ˣ ln coth(|u|/2) du (odd in x): π²/4 − 2 χ₂(e^(−|x|)) for x > 0."""
    return np.sign(x) * (math.pi**2 / 4.0 - 2.0 * _chi2(np.exp(-np.abs(x))))


def _bode_phase(log_f: np.ndarray, log_magnitude: np.ndarray) -> np.ndarray:
    """Minimum phase (rad) of an analog system at ``log_f`` (evenly spaced) from ln|H|.

    Bode's gain–phase relation, φ(ω₀) = (1/π) ∫ (d ln|H| / du) ln coth(|u|/2) du with
    u = ln(ω/ω₀) (H. W. Bode, *Network Analysis and Feedback Amplifier Design*, 1945,
    chapter XIV; chapter from memory), integrated exactly for ln|H| linear in u between
    the points and constant beyond the first and the last. On even spacing Δ the
    integral over segment i seen from point j depends on i − j only: one kernel,
    ``G((k + 1)Δ) − G(kΔ)``, correlated with the slopes.
    """
    step = (log_f[-1] - log_f[0]) / (log_f.size - 1)
    slope = np.diff(log_magnitude) / step
    k = np.arange(-(log_f.size - 1), log_f.size - 1)
    kernel = _bode_kernel_integral((k + 1) * step) - _bode_kernel_integral(k * step)
    return np.correlate(kernel, slope, "valid")[::-1] / math.pi


def _device_model(f: np.ndarray, magnitude: np.ndarray) -> np.ndarray:
    """Complex response of the high-pass/resonance model fitted to a measured magnitude.

    :func:`piezo.response.fit.fit_response` on a 1/24-octave grid. The model is an
    analog minimum-phase system, so its phase accounts for its magnitude beyond the
    measured band too (a resonance's tail above the sweep's stop frequency). Unity where
    no part of the model is found.
    """
    unity = np.ones(f.size, dtype=np.complex128)
    grid = log_frequency_grid(float(f[0]), float(f[-1]), 24)
    if grid.size < 8:
        return unity
    grid_db = np.interp(np.log(grid), np.log(f), 20.0 * np.log10(magnitude))
    reference_hz = 1000.0 if grid[0] <= 1000.0 <= grid[-1] else math.sqrt(grid[0] * grid[-1])
    try:
        fit = fit_response(grid, grid_db, reference_hz=reference_hz)
    except InputError:
        # The model only sharpens the estimate: on a response it cannot describe (too
        # few points to fit) the measured magnitude alone is used.
        return unity
    hp, res = fit.highpass, fit.resonance
    if hp is None and res is None:
        return unity
    # Without a high-pass, the resonance alone: the model over its own first-order
    # high-pass part (any corner; the ratio is exact).
    corner_hz, order, q = (hp.natural_hz, hp.order, hp.q) if hp else (float(f[0]), 1, None)
    h = complex_response(
        f,
        corner_hz=corner_hz,
        order=order,
        q=q,
        resonance_hz=None if res is None else res.frequency_hz,
        resonance_q=None if res is None else res.q,
    )
    if hp is None:
        h = h / complex_response(f, corner_hz=corner_hz, order=1)
    return h


def _fit_delay(
    omega: np.ndarray, excess: np.ndarray, tails: tuple[np.ndarray, np.ndarray]
) -> tuple[float, float]:
    """Least squares ``excess ≈ −ω·τ + a·tail_high + b·tail_low + c``: (τ in s, RMS in rad)."""
    design = np.column_stack([-omega, *tails, np.ones(omega.size)])
    coef, *_ = np.linalg.lstsq(design, excess, rcond=None)
    rms = float(np.sqrt(np.mean((design @ coef - excess) ** 2)))
    return float(coef[0]), rms


_DelayBasis = tuple[
    np.ndarray,
    np.ndarray,
    np.ndarray,
    np.ndarray,
    np.ndarray,
    tuple[np.ndarray, np.ndarray],
    tuple[np.ndarray, np.ndarray],
]
# Bases by (bins, bin spacing, top bin, band start and stop bin, sweep band): these fix
# the grid and the band, so equal keys give bitwise equal bases.
_DELAY_BASES: dict[tuple[int, float, float, int, int, float, float], _DelayBasis | None] = {}


def _delay_basis(
    freq: np.ndarray, lo: int, hi: int, start_hz: float, stop_hz: float
) -> _DelayBasis | None:
    """What the latency fit needs that does not depend on the capture, computed once per
    analysis grid and band (a batch analyses the same sweep over and over).

    Returns the band's frequencies, the mask of those fitted, their angular frequencies,
    ln f, the nodes of Bode's relation, and the phase of a unit log-magnitude slope
    beyond each band edge for the analog and the digital device; None when fewer than 8
    frequencies are fitted. The arrays are read-only.
    """
    key = (freq.size, float(freq[1]), float(freq[-1]), lo, hi, float(start_hz), float(stop_hz))
    if key in _DELAY_BASES:
        with contextlib.suppress(KeyError):  # another thread may have cleared the table
            return _DELAY_BASES[key]
    f = freq[lo:hi]
    fit = (f >= DELAY_FIT_START * start_hz) & (f <= DELAY_FIT_STOP * stop_hz)
    basis: _DelayBasis | None = None
    if np.count_nonzero(fit) >= 8:
        log_f = np.log(f)
        nodes = np.linspace(
            log_f[0], log_f[-1], round(BODE_POINTS_PER_OCTAVE * math.log2(f[-1] / f[0])) + 2
        )
        above = np.zeros(freq.size)
        above[hi:] = np.log(freq[hi:] / f[-1])
        below = np.zeros(freq.size)
        below[:lo] = np.log(np.maximum(freq[:lo], freq[1]) / f[0])
        basis = (
            f.copy(),
            fit,
            2.0 * np.pi * f[fit],
            log_f,
            nodes,
            (2.0 / math.pi * _chi2(f[fit] / f[-1]), 2.0 / math.pi * _chi2(f[0] / f[fit])),
            (
                _folded_cepstrum_phase(above)[lo:hi][fit],
                _folded_cepstrum_phase(below)[lo:hi][fit],
            ),
        )
        for a in (*basis[:5], *basis[5], *basis[6]):
            a.flags.writeable = False
    if len(_DELAY_BASES) >= 64:  # a long-running process meeting many sweeps
        _DELAY_BASES.clear()
    _DELAY_BASES[key] = basis
    return basis


def _pure_delay_frames(
    freq: np.ndarray,
    h_spec: np.ndarray,
    d_spec: np.ndarray,
    sel: slice,
    spec: SweepSpec,
    *,
    max_shift: int,
) -> int:
    """Whole samples from the linear window's centre to the response's pure delay.

    A minimum-phase device's phase follows from its log-magnitude over all frequencies;
    the sweep shows the magnitude only inside its band, and a roll-off beyond the band
    adds phase inside it that grows nearly in proportion to f, as a delay does. The
    excess phase (measured phase minus the minimum phase of the measured magnitude,
    held constant beyond the band) is therefore fitted with the delay, a constant and
    the phase of one unknown log-magnitude slope beyond each band edge. This is done
    for the two kinds of device a digital capture can show:

    - a sampled analog device (sensor, front-end, analog anti-alias filter), whose
      magnitude goes on beyond fs/2: the high-pass/resonance model fitted to the
      magnitude is taken with its own analog phase, the rest (measured over model) with
      Bode's relation, and the slopes beyond the band with theirs, 2/π · χ₂(f/f_hi) and
      2/π · χ₂(f_lo/f) per unit slope of ln|H| against ln f;
    - a digital filter, whose phase relation is the periodic one over 0 … fs/2 (the
      folded cepstrum), slopes and all.

    The two differ by about a sample for a device that rolls off near fs/2 (a digital
    filter's zeros at fs/2 are half a sample of phase each). The digital reading is
    kept only when it leaves at most ``DIGITAL_RESIDUAL_RATIO`` of the analog reading's
    residual; otherwise the device is taken to be analog, as a sensor is.
    """
    fs = spec.sample_rate_hz
    lo, hi = sel.start, sel.stop
    basis = _delay_basis(freq, lo, hi, spec.start_hz, spec.stop_hz)
    if basis is None:
        return 0
    f, fit, omega, log_f, nodes, analog_tails, digital_tails = basis
    h = h_spec[sel] / d_spec[sel]
    magnitude = np.maximum(np.abs(h), np.max(np.abs(h)) * 1e-6)

    # Sampled analog device.
    model = _device_model(f, magnitude)
    rest = np.log(magnitude / np.abs(model))
    rest_phase = np.interp(log_f, nodes, _bode_phase(nodes, np.interp(nodes, log_f, rest)))
    analog_excess = np.unwrap(np.angle(h / model)) - rest_phase
    analog_s, analog_rms = _fit_delay(omega, analog_excess[fit], analog_tails)

    # Digital device.
    full = np.empty(freq.size)
    full[:lo] = np.log(magnitude[0])
    full[lo:hi] = np.log(magnitude)
    full[hi:] = np.log(magnitude[-1])
    digital_excess = np.unwrap(np.angle(h)) - _folded_cepstrum_phase(full)[sel]
    digital_s, digital_rms = _fit_delay(omega, digital_excess[fit], digital_tails)

    delay_s = digital_s if digital_rms <= DIGITAL_RESIDUAL_RATIO * analog_rms else analog_s
    return int(np.clip(round(delay_s * fs), -max_shift, max_shift))


def analyze_sweep(
    capture: np.ndarray,
    spec: SweepSpec,
    sample_rate_hz: float,
    *,
    unit: str = "FS",
    acoustic_level_pa: float | None = None,
    max_order: int = 5,
    linear_window_s: float | None = None,
    pure_delay: bool = True,
) -> SweepResponse:
    """Linear response and harmonic distortion from a swept-sine capture (Farina 2000).

    Steps: convolve with the inverse filter (:func:`deconvolve`); locate the linear
    impulse response by the peak of |output|; cut the linear impulse response with a window from
    ``SPLIT_FRACTION``·Δt_2 before the peak to ``linear_window_s`` after it, and the
    N-th harmonic impulse response around Δt_N before the peak with a window reaching
    ``SPLIT_FRACTION`` of the way to each neighbour; Fourier-transform each window and
    divide by the same window applied to the deconvolved stimulus itself (sweep *
    inverse), so that the inverse filter's band-edge ripple and the truncation of its
    ringing cancel (reference deconvolution). The N-th harmonic spectrum at N·f is
    mapped back to the excitation frequency f. The latency, to which the phase is
    referred, is the pure delay: the peak plus the whole samples fitted to the slope of
    the excess phase (measured phase minus the minimum phase of the measured magnitude),
    fitted together with the phase of an unknown roll-off beyond each band edge, for a
    sampled analog device (Bode's gain–phase relation, the fitted high-pass/resonance
    model) and for a digital filter (the periodic relation over 0 … fs/2); the analog
    reading is kept unless the digital one explains the phase markedly better.

    Parameters
    ----------
    capture
        Recorded samples, shape (frames,) or (frames, 1): in volts (calibrated) or in
        fractions of full scale. It must contain the whole sweep.
    spec
        Parameters of the stimulus that was played.
    sample_rate_hz
        Sample rate of the capture; must equal the stimulus's.
    unit
        Unit of the capture samples, used in :attr:`SweepResponse.magnitude_unit`.
    acoustic_level_pa
        RMS sound pressure of the sweep at the sensor, Pa. Defaults to
        ``spec.acoustic_level_pa``. When known, the response is a sensitivity in
        ``unit``/Pa: |H| · A / (√2 · p_rms), A the sweep's digital peak.
    max_order
        Highest harmonic order to separate (2 … 5 by default; 1 separates none).
    linear_window_s
        Length of the linear window after the peak, seconds; default Δt_2. Longer gives
        finer frequency resolution and more noise.
    pure_delay
        Fit the pure delay as described above (the latency and the phase referred to
        it). False takes the latency at the impulse response's peak and skips the fit
        (about 20-40 ms per capture): for callers that use magnitudes and distortion
        only, which do not depend on it (the batch runner).

    Returns
    -------
    SweepResponse

    Examples
    --------
    A loopback capture (the stimulus itself) reads 0 dB, no latency and no distortion:

    >>> from piezo.response.stimulus import sweep_signal, sweep_spec
    >>> spec = sweep_spec(50.0, 10000.0, 0.5, 48000.0, silence_after_s=0.1)
    >>> r = analyze_sweep(sweep_signal(spec), spec, 48000.0)
    >>> k = int(np.argmin(np.abs(r.frequency_hz - 1000.0)))
    >>> r.latency_frames, round(float(r.magnitude_db[k]), 3), float(r.thd_percent[k]) < 1e-3
    (0, 0.0, True)
    """
    fs = _check_rate(sample_rate_hz)
    if not math.isclose(fs, spec.sample_rate_hz, rel_tol=1e-9):
        raise InputError(
            f"the capture's sample rate ({fs:g} Hz) differs from the stimulus's "
            f"({spec.sample_rate_hz:g} Hz); record at the stimulus's rate"
        )
    if not (isinstance(max_order, int) and 1 <= max_order <= 10):
        raise InputError(f"max_order must be an integer from 1 to 10, got {max_order!r}")
    level_pa = spec.acoustic_level_pa if acoustic_level_pa is None else acoustic_level_pa
    if level_pa is not None and not (math.isfinite(level_pa) and level_pa > 0):
        raise InputError(f"acoustic_level_pa must be positive, got {level_pa!r}")
    y = _as_signal(capture, "capture")
    if y.size < spec.sweep_frames:
        raise InputError(
            f"the capture has {y.size} samples but the sweep alone has {spec.sweep_frames}; "
            "record the whole stimulus"
        )

    inverse, reference = _inverse_and_reference(spec)
    output, zero_lag = _deconvolve(y, inverse, spec)
    peak_index = int(np.argmax(np.abs(output)))
    latency = peak_index - zero_lag
    sweep_start = spec.silence_before_frames + latency
    if sweep_start < 0:
        raise InputError(
            f"the capture starts {-sweep_start / fs:.3f} s after the sweep did (latency "
            f"{latency} samples); start recording before playback"
        )
    if sweep_start + spec.sweep_frames > y.size:
        missing = (sweep_start + spec.sweep_frames - y.size) / fs
        raise InputError(
            f"the capture ends {missing:.3f} s before the sweep does (latency {latency} "
            "samples); record until after the sweep's end"
        )

    ref_zero = spec.sweep_frames - 1

    offsets = {1: 0.0, **harmonic_offsets_s(spec, max_order + 1)}
    gap_s = {n: offsets[n] - offsets[n - 1] for n in range(2, max_order + 2)}
    post_s = {1: gap_s[2] if linear_window_s is None else float(linear_window_s)}
    if post_s[1] <= 0 or not math.isfinite(post_s[1]):
        raise InputError(f"linear_window_s must be positive, got {linear_window_s!r}")
    for n in range(2, max_order + 1):
        post_s[n] = (1.0 - SPLIT_FRACTION) * gap_s[n]
    pre_s = {n: SPLIT_FRACTION * gap_s[n + 1] for n in range(1, max_order + 1)}

    # Linear window: sets the analysis grid.
    pre1, post1 = round(pre_s[1] * fs), round(post_s[1] * fs)
    n_fft = scipy.fft.next_fast_len(2 * (pre1 + post1), real=True)
    freq = scipy.fft.rfftfreq(n_fft, 1.0 / fs)
    h_lin = _cut(output, peak_index, pre1, post1)
    d_lin = _cut(reference, ref_zero, pre1, post1)
    h_spec = scipy.fft.rfft(h_lin, n_fft)
    d_spec = scipy.fft.rfft(d_lin, n_fft)
    band = (
        (freq >= spec.start_hz) & (freq <= spec.stop_hz) & (np.abs(d_spec) >= MIN_REFERENCE_GAIN)
    )
    if np.count_nonzero(band) < 4:
        raise InputError(
            "the sweep is too short for its band: fewer than 4 analysis frequencies; "
            "make the sweep longer"
        )
    lo_i, hi_i = np.flatnonzero(band)[[0, -1]]
    sel = slice(lo_i, hi_i + 1)
    f = freq[sel]
    h = h_spec[sel] / d_spec[sel]
    # The peak of a minimum-phase device's impulse response lies after its onset: refer
    # the phase to the pure delay instead (the excess phase's slope), not to the peak.
    shift = (
        _pure_delay_frames(freq, h_spec, d_spec, sel, spec, max_shift=pre1 // 2)
        if pure_delay
        else 0
    )
    if shift:
        h = h * np.exp(2j * np.pi * f * shift / fs)
        latency += shift

    unwrapped = np.unwrap(np.angle(h))
    group_delay = -np.gradient(unwrapped, 2.0 * np.pi * f)

    linear_ir = ImpulseResponse(1, h_lin, -pre1 - shift, fs)
    harmonic_irs: dict[int, ImpulseResponse] = {}
    harmonic_percent: dict[int, np.ndarray] = {}
    fade_top_hz = spec.start_hz * math.exp(spec.rate_constant * spec.fade_in_s / spec.duration_s)
    # The inverse filter carries the sweep's fade-out: a harmonic landing there is not
    # faded in the capture, so dividing by the (twice faded) reference would overstate it.
    fade_out_start_hz = spec.stop_hz * math.exp(
        -spec.rate_constant * spec.fade_out_s / spec.duration_s
    )
    for n in range(2, max_order + 1):
        pre_n, post_n = round(pre_s[n] * fs), round(post_s[n] * fs)
        centre = peak_index - round(offsets[n] * fs)
        h_n = _cut(output, centre, pre_n, post_n)
        d_n = _cut(reference, ref_zero, pre_n, post_n)
        m = scipy.fft.next_fast_len(2 * (pre_n + post_n), real=True)
        fn = scipy.fft.rfftfreq(m, 1.0 / fs)
        hn_spec = scipy.fft.rfft(h_n, m)
        dn_spec = scipy.fft.rfft(d_n, m)
        ok = np.abs(dn_spec) >= MIN_REFERENCE_GAIN
        ratio = np.full(fn.size, np.nan)
        ratio[ok] = np.abs(hn_spec[ok] / dn_spec[ok])
        at_harmonic = np.interp(n * f, fn, ratio, left=np.nan, right=np.nan)
        window_s = (pre_n + post_n) / fs
        valid = (
            (n * f <= fade_out_start_hz)
            & (f >= fade_top_hz)
            & (n * f < fs / 2)
            & (n * f * window_s >= MIN_HARMONIC_CYCLES)
        )
        with np.errstate(divide="ignore", invalid="ignore"):
            pct = np.where(valid, 100.0 * at_harmonic / np.abs(h), np.nan)
        harmonic_percent[n] = pct
        harmonic_irs[n] = ImpulseResponse(n, h_n, -round(offsets[n] * fs) - pre_n - shift, fs)
    if harmonic_percent:
        stack = np.array(list(harmonic_percent.values()))
        measured = np.any(np.isfinite(stack), axis=0)
        thd = np.where(measured, np.sqrt(np.nansum(stack**2, axis=0)), np.nan)
    else:
        thd = np.full(f.size, np.nan)

    tail = output[peak_index + post1 :]
    if tail.size > 16 and np.any(tail):
        noise_rms = float(np.sqrt(np.mean(tail**2)))
        peak_to_noise = 20.0 * math.log10(abs(output[peak_index]) / noise_rms)
    else:
        peak_to_noise = math.inf

    if level_pa is not None:
        h = h * spec.amplitude / (math.sqrt(2.0) * level_pa)
        magnitude_unit = f"dB re 1 {unit}/Pa"
    else:
        magnitude_unit = f"dB re 1 {unit}/FS"

    return SweepResponse(
        frequency_hz=f,
        response=h,
        group_delay_s=group_delay,
        magnitude_unit=magnitude_unit,
        latency_frames=latency,
        harmonic_percent=harmonic_percent,
        thd_percent=thd,
        linear_ir=linear_ir,
        harmonic_irs=harmonic_irs,
        peak_to_noise_db=peak_to_noise,
        sample_rate_hz=fs,
        spec=spec,
    )


# --------------------------------------------------------------------------------------
# Two-channel H1
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class TransferEstimate:
    """Result of :class:`H1Estimator`: H1 and coherence per measured channel.

    Attributes
    ----------
    frequency_hz
        FFT bin frequencies, Hz, shape (bins,).
    response
        H1 = Gxy / Gxx, complex, shape (bins, measured channels): measured unit per
        reference unit.
    coherence
        γ² = |Gxy|² / (Gxx Gyy), shape (bins, measured channels), 0 … 1.
    segments
        Number of averaged Welch segments.
    segment_frames
        Segment length, samples.
    reference_channel, measured_channels
        Channel indices of the input blocks.
    sample_rate_hz
        Sample rate, Hz.
    magnitude_unit
        Unit text of 20 lg|H1| (e.g. ``"dB re 1 V/V"``).

    Examples
    --------
    A delay of one sample has unit gain and the phase ``-360°·f/fs``, -45° at 6 kHz
    and 48 kHz:

    >>> x = np.random.default_rng(4).standard_normal(48000)
    >>> r = response_h1(x, np.roll(x, 1), 48000.0, segment_frames=1024)
    >>> k = int(np.argmin(np.abs(r.frequency_hz - 6000.0)))
    >>> float(r.frequency_hz[k]), round(float(r.phase_deg[k, 0]), 1)
    (6000.0, -45.0)
    >>> round(float(r.magnitude_db[k, 0]), 2), r.magnitude_unit
    (0.0, 'dB re 1 V/V')
    >>> r.to_table(points_per_octave=1).frequency_hz.tolist()
    [125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0]
    """

    frequency_hz: np.ndarray
    response: np.ndarray
    coherence: np.ndarray
    segments: int
    segment_frames: int
    reference_channel: int
    measured_channels: tuple[int, ...]
    sample_rate_hz: float
    magnitude_unit: str = "dB re 1"

    @property
    def magnitude_db(self) -> np.ndarray:
        """20 lg|H1|, shape (bins, measured channels)."""
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(self.response))

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of H1, degrees, wrapped to (−180, 180]."""
        return np.degrees(np.angle(self.response))

    def to_table(
        self,
        *,
        channel: int = 0,
        points_per_octave: int = 24,
        start_hz: float | None = None,
        stop_hz: float | None = None,
    ) -> ResponseTable:
        """One measured channel on a log-spaced grid (interpolated) for CSV/JSON.

        ``channel`` indexes :attr:`measured_channels`. The grid starts at the second bin
        above 0 Hz (the first ones carry the window's leakage of DC) unless
        ``start_hz`` is given, and ends below Nyquist unless ``stop_hz`` is given.
        """
        f = self.frequency_hz
        lo = float(f[2]) if start_hz is None else max(float(start_hz), float(f[1]))
        hi = float(f[-2]) if stop_hz is None else min(float(stop_hz), float(f[-1]))
        grid = log_frequency_grid(lo, hi, points_per_octave)
        h = self.response[:, channel]
        mag = np.interp(grid, f, self.magnitude_db[:, channel])
        phase = np.interp(grid, f, np.unwrap(np.angle(h)))
        return ResponseTable(
            frequency_hz=grid,
            magnitude_db=mag,
            phase_deg=np.degrees(np.angle(np.exp(1j * phase))),
            magnitude_unit=self.magnitude_unit,
            extra={"coherence": np.interp(grid, f, self.coherence[:, channel])},
        )


def _default_segment_frames(sample_rate_hz: float) -> int:
    """Next power of two ≥ fs/6: a resolution of 6 Hz or finer (about 0.17 s)."""
    return int(2 ** math.ceil(math.log2(sample_rate_hz / 6.0)))


class H1Estimator:
    """Streaming H1 = Gxy / Gxx and coherence from Welch-averaged spectra (Welch 1967).

    Blocks (frames, channels) of calibrated samples go to the one averaging core,
    :class:`piezo.spectral.averaging.CrossSpectra`: segments of ``segment_frames``
    samples overlapping by ``overlap``, each with its mean removed (like
    ``scipy.signal.csd``'s default ``detrend="constant"``), windowed and transformed;
    the cross and auto spectra are averaged. Memory is bounded whatever the
    recording's length. Block boundaries do not change the result.

    Parameters
    ----------
    sample_rate_hz
        Sample rate, Hz.
    channels
        Number of channels in each block.
    reference_channel
        Channel carrying the stimulus or the reference sensor (x).
    measured_channels
        Channels of the device(s) under test (y); default all others.
    segment_frames
        Welch segment length; default the next power of two ≥ fs/6 (resolution ≤ 6 Hz).
    overlap
        Fraction of overlap between segments, 0 ≤ overlap < 1.
    window
        Window name for ``scipy.signal.get_window`` (periodic).
    unit
        Unit of the measured over the reference channel, for the magnitude label.

    Examples
    --------
    A device that halves the reference: H1 = 0.5 (-6.02 dB), coherence 1.

    >>> x = np.random.default_rng(3).standard_normal(48000)
    >>> est = H1Estimator(48000.0, 2, segment_frames=4096)
    >>> est.update(np.column_stack([x, 0.5 * x]))
    >>> r = est.result()
    >>> bool(np.allclose(r.response[1:-1, 0], 0.5)), bool(np.all(r.coherence[1:-1] > 0.999))
    (True, True)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        reference_channel: int = 0,
        measured_channels: tuple[int, ...] | list[int] | None = None,
        segment_frames: int | None = None,
        overlap: float = 0.5,
        window: str = "hann",
        unit: str = "V/V",
    ) -> None:
        self.sample_rate_hz = _check_rate(sample_rate_hz)
        if isinstance(channels, bool) or not isinstance(channels, int) or channels < 2:
            raise InputError(f"a two-channel estimate needs at least 2 channels, got {channels!r}")
        self.channels = channels
        if not (0 <= reference_channel < channels):
            raise InputError(
                f"reference_channel {reference_channel!r} is not one of the {channels} "
                f"channels (0 … {channels - 1})"
            )
        self.reference_channel = int(reference_channel)
        if measured_channels is None:
            measured = tuple(c for c in range(channels) if c != reference_channel)
        else:
            measured = tuple(int(c) for c in measured_channels)
        for c in measured:
            if not (0 <= c < channels) or c == reference_channel:
                raise InputError(
                    f"measured channel {c!r} must be one of 0 … {channels - 1} and differ "
                    f"from the reference channel {reference_channel}"
                )
        if not measured:
            raise InputError("no measured channel left besides the reference channel")
        self.measured_channels = measured
        if segment_frames is None:
            segment_frames = _default_segment_frames(self.sample_rate_hz)
        if (
            isinstance(segment_frames, bool)
            or not isinstance(segment_frames, int)
            or (segment_frames < 8)
        ):
            raise InputError(f"segment_frames must be an integer ≥ 8, got {segment_frames!r}")
        self.segment_frames = segment_frames
        if not (0.0 <= overlap < 1.0):
            raise InputError(f"overlap must be in [0, 1), got {overlap!r}")
        self.overlap = float(overlap)
        self._hop = segment_frames - round(overlap * segment_frames)
        if self._hop < 1:
            raise InputError(f"overlap {overlap!r} leaves no hop between segments")
        try:
            self._window = scipy.signal.get_window(window, segment_frames)
        except ValueError as exc:
            raise InputError(f"window {window!r}: {exc}") from None
        self.window = window
        self.unit = unit
        self._columns = [self.reference_channel, *measured]
        # The one averaging core; the reference goes first.
        self._spectra = CrossSpectra(
            self.sample_rate_hz,
            len(self._columns),
            reference_channel=0,
            segment_frames=segment_frames,
            window=self._window,
            overlap=self.overlap,
        )

    def update(self, block: np.ndarray) -> None:
        """Add a block of shape (frames, channels); any frame count, including 0."""
        arr = validate.signal_block(block, self.channels)
        if arr.shape[0] == 0:
            return
        self._spectra.update(arr[:, self._columns])

    def result(self) -> TransferEstimate:
        """H1 and coherence over everything seen so far."""
        if self._spectra.segmenter.segments == 0:
            raise InputError(
                f"too short for one Welch segment of {self.segment_frames} samples; record "
                "longer or choose a shorter segment"
            )
        spectra = self._spectra.result()
        h1 = spectra.transfer_h1()[:, 1:]
        coh = spectra.coherence()[:, 1:]
        return TransferEstimate(
            frequency_hz=spectra.frequency_hz,
            response=h1,
            coherence=np.clip(np.nan_to_num(coh, nan=0.0), 0.0, 1.0),
            segments=spectra.averages,
            segment_frames=self.segment_frames,
            reference_channel=self.reference_channel,
            measured_channels=self.measured_channels,
            sample_rate_hz=self.sample_rate_hz,
            magnitude_unit=f"dB re 1 {self.unit}",
        )


def response_h1(
    reference: np.ndarray,
    measured: np.ndarray,
    sample_rate_hz: float,
    *,
    segment_frames: int | None = None,
    overlap: float = 0.5,
    window: str = "hann",
    unit: str = "V/V",
) -> TransferEstimate:
    """H1 = Gxy / Gxx with coherence from two whole arrays (Welch 1967 averaging).

    Thin wrapper over :class:`H1Estimator`: ``reference`` (frames,) is the stimulus or
    reference sensor, ``measured`` (frames,) or (frames, k) the device channel(s).

    Examples
    --------
    Noise added at the output leaves H1 unbiased (here 2) and lowers the coherence to
    ``S_xx/(S_xx + S_nn)``, 0.5 at equal powers (Bendat & Piersol, *Random Data*, 4th ed.,
    chapter 6, from memory; from 92 segments the estimate reads slightly high, 0.51):

    >>> rng = np.random.default_rng(4)
    >>> x, noise = rng.standard_normal(48000), rng.standard_normal(48000)
    >>> r = response_h1(x, 2.0 * (x + noise), 48000.0, segment_frames=1024)
    >>> r.segments, round(float(np.mean(np.abs(r.response[1:-1, 0]))), 1)
    (92, 2.0)
    >>> round(float(np.mean(r.coherence[1:-1, 0])), 1)
    0.5
    """
    x = _as_signal(reference, "reference")
    y = np.asarray(measured, dtype=np.float64)
    if y.ndim == 1:
        y = y[:, None]
    if y.ndim != 2 or y.shape[0] != x.size:
        raise InputError(
            f"measured must have shape ({x.size},) or ({x.size}, k) like the reference, "
            f"got {np.shape(measured)}"
        )
    block = np.column_stack([x, y])
    est = H1Estimator(
        sample_rate_hz,
        block.shape[1],
        reference_channel=0,
        segment_frames=segment_frames,
        overlap=overlap,
        window=window,
        unit=unit,
    )
    est.update(block)
    return est.result()
