"""Tone metrics: frequency, level, THD, THD+N, SINAD and SNR of a steady test tone.

Definitions (paraphrased from AES17-2015 and IEC 60268-3:2018; the wording is ours):

* **Fundamental** - the strongest spectral component within the analysis bandwidth (or
  near the expected frequency, when one is given).
* **THD** (total harmonic distortion, IEC 60268-3) - the RMS sum of the harmonics of
  orders 2 to ``harmonics`` (10 by default, fewer when they would pass the upper end of
  the bandwidth, which is at most the Nyquist frequency) divided by the RMS of the
  fundamental: ``sqrt(Σ V_n²) / V_1``. THD and THD+N see the same band, so THD never
  exceeds THD+N (re the fundamental).
* **THD+N** (AES17) - the RMS of everything left in the stated bandwidth once the
  fundamental is notched out (harmonics, noise, hum, spurious tones), divided by the RMS
  of the whole signal in that bandwidth.
* **SINAD** - the inverse of THD+N in decibels: ``10·lg(total / residual)``.
* **SNR** - the mean square of the fundamental over the mean square of a separate
  noise-only recording (tone switched off), both in the same bandwidth.

Method. A long recording is reduced, block by block, to a mean Welch power spectrum
(:class:`piezo.spectral.welch.WelchPSD`, 4-term Blackman-Harris window: sidelobes 92 dB down,
so distortion products far below the tone stay visible; 1 Hz bins by default). Memory is
bounded whatever the length; the metrics describe the average over the whole recording.
By Parseval, the power summed over a few bins either side of a spectral line is the
line's mean square whatever its position between bins (no scalloping loss), and the
power-weighted centroid of those bins is its frequency (the window's power kernel is
symmetric), which gives the fundamental frequency to a small fraction of a bin (the one
tone-line estimator, :func:`piezo.tone.line.spectral_line`). The
noise under each line (the mean of the neighbouring bins) is subtracted from the
harmonics and added back to the THD+N residual.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.errors import InputError
from piezo.spectral.welch import PSDResult, WelchPSD
from piezo.tone.line import SpectralLine, spectral_line

__all__ = [
    "LINE_HALF_WIDTH_BINS",
    "ToneAnalyzer",
    "ToneResult",
    "band_mean_square",
    "default_bandwidth_hz",
    "measure_tone",
    "noise_mean_square",
]

#: Bins either side of a line counted as the line (the Blackman-Harris main lobe spans
#: +-4 bins; +-6 holds all but ~1e-9 of a line's power).
LINE_HALF_WIDTH_BINS = 6
#: Bins either side of a line (beyond its own) averaged for the local noise floor.
_FLOOR_BINS = 20
#: A line counts as a tone only if its power is this many times the noise floor under it
#: (10 dB; common practice, no source).
DETECTION_RATIO = 10.0
#: With an expected frequency, the fundamental is searched within this ratio of it.
SEARCH_RATIO = 1.12
#: Default analysis bandwidth, hertz (AES17 standard audio measurement bandwidth).
DEFAULT_BANDWIDTH_HZ = (20.0, 20000.0)


@dataclass(frozen=True)
class ToneResult:
    """Tone metrics of one channel. RMS values are in the input unit (Pa or V).

    Attributes
    ----------
    frequency_hz
        Fundamental frequency (power-weighted centroid of its line).
    tone_rms
        RMS of the fundamental.
    harmonic_orders, harmonic_rms
        Orders measured (2, 3, ...) and their RMS values (noise floor removed).
    thd_ratio
        Total harmonic distortion, ``sqrt(Σ V_n²)/V_1`` (a ratio, not %).
    total_rms
        RMS of the signal within the bandwidth.
    residual_rms
        RMS within the bandwidth once the fundamental is removed.
    thd_n_ratio
        ``residual_rms / total_rms``.
    sinad_db
        ``20·lg(total_rms / residual_rms)``.
    noise_rms, snr_db
        RMS of the noise-only recording in the bandwidth and ``20·lg(tone/noise)``,
        when a noise recording was given.
    bandwidth_hz
        Analysis bandwidth actually used (the upper end limited by Nyquist).
    resolution_hz
        Bin spacing of the spectrum analysed.
    segments
        Spectra averaged.

    Examples
    --------
    A 1 kHz tone of 1 V amplitude with a second harmonic 40 dB down has 1 % THD:

    >>> t = np.arange(48000) / 48000
    >>> x = np.sin(2 * np.pi * 1000 * t) + 0.01 * np.sin(2 * np.pi * 2000 * t)
    >>> result = measure_tone(x, 48000)
    >>> round(result.frequency_hz, 3), round(result.tone_rms, 4), round(result.thd_percent, 3)
    (1000.0, 0.7071, 1.0)
    >>> round(result.level_db(1.0), 2), round(result.sinad_db, 1)  # dB re 1 V
    (-3.01, 40.0)
    """

    frequency_hz: float
    tone_rms: float
    harmonic_orders: tuple[int, ...]
    harmonic_rms: tuple[float, ...]
    thd_ratio: float
    total_rms: float
    residual_rms: float
    thd_n_ratio: float
    sinad_db: float
    noise_rms: float | None
    snr_db: float | None
    bandwidth_hz: tuple[float, float]
    resolution_hz: float
    segments: int

    @property
    def thd_percent(self) -> float:
        """THD in percent."""
        return 100.0 * self.thd_ratio

    @property
    def thd_n_percent(self) -> float:
        """THD+N in percent."""
        return 100.0 * self.thd_n_ratio

    def level_db(self, reference: float) -> float:
        """Level of the fundamental in dB re ``reference`` (20 µPa, 1 µPa or 1 V)."""
        return 20.0 * math.log10(self.tone_rms / reference) if self.tone_rms > 0 else -math.inf


#: Highest sample rate treated as an audio rate, Hz (see :func:`default_bandwidth_hz`).
AUDIO_RATE_MAX_HZ = 48000.0
#: Above audio rates the default bandwidth reaches this fraction of the sample rate,
#: where converters' anti-alias filters are still flat (common practice, no source).
HIGH_RATE_BAND_RATIO = 0.45


def default_bandwidth_hz(sample_rate_hz: float) -> tuple[float, float]:
    """Default measurement bandwidth for a sample rate, Hz.

    The AES17 20 Hz–20 kHz band at audio rates (up to :data:`AUDIO_RATE_MAX_HZ`); above
    them 20 Hz to :data:`HIGH_RATE_BAND_RATIO` of the rate, so harmonics of an ultrasonic
    or high-rate capture are not hidden.

    Examples
    --------
    >>> default_bandwidth_hz(48000.0), default_bandwidth_hz(1e6)
    ((20.0, 20000.0), (20.0, 450000.0))
    """
    if not (math.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise InputError(f"sample_rate_hz must be positive, got {sample_rate_hz!r}")
    if sample_rate_hz <= AUDIO_RATE_MAX_HZ:
        return DEFAULT_BANDWIDTH_HZ
    return (DEFAULT_BANDWIDTH_HZ[0], HIGH_RATE_BAND_RATIO * sample_rate_hz)


def _bandwidth(bandwidth_hz: tuple[float, float], sample_rate_hz: float) -> tuple[float, float]:
    lo, hi = (float(v) for v in bandwidth_hz)
    if not 0 <= lo < hi:
        raise InputError(f"bandwidth must be low < high (hertz); got {lo:g} to {hi:g}")
    hi = min(hi, sample_rate_hz / 2)
    if lo >= hi:
        raise InputError(
            f"bandwidth {lo:g} Hz to {bandwidth_hz[1]:g} Hz lies above the Nyquist "
            f"frequency ({sample_rate_hz / 2:g} Hz)"
        )
    return lo, hi


def band_mean_square(psd: PSDResult, low_hz: float, high_hz: float) -> np.ndarray:
    """Mean square per channel of a density spectrum between two frequencies (unit²).

    Examples
    --------
    The line of a sine of amplitude 1 holds its mean square 1/2 whatever the bins:

    >>> from piezo.spectral.welch import WelchPSD
    >>> t = np.arange(48000) / 48000
    >>> welch = WelchPSD(48000, 1, resolution_hz=1.0, window="blackmanharris")
    >>> welch.update(np.sin(2 * np.pi * 1000.3 * t)[:, None])
    >>> [round(float(v), 4) for v in band_mean_square(welch.result(), 990.0, 1010.0)]
    [0.5]
    """
    if psd.scaling != "density":
        raise InputError("band_mean_square needs a density spectrum (scaling='density')")
    f = psd.frequency_hz
    sel = (f >= low_hz) & (f <= high_hz)
    return psd.psd[sel].sum(axis=0) * psd.resolution_hz


class ToneAnalyzer:
    """Streaming tone metrics (see the module description for definitions and method).

    Parameters
    ----------
    sample_rate_hz
        Sample rate, hertz.
    channels
        Number of channels in each block.
    expected_hz
        Nominal tone frequency; the fundamental is searched within a factor 1.12 of it.
        Without it, the strongest line in the bandwidth is taken.
    bandwidth_hz
        ``(low, high)`` of the THD+N / SINAD / SNR measurement, default 20 Hz - 20 kHz
        (the upper end is limited to Nyquist).
    harmonics
        Highest harmonic order in THD (default 10).
    resolution_hz
        Bin spacing of the underlying spectrum (default 1 Hz). Coarser bins need less
        signal: at least one segment of ``1/resolution_hz`` seconds is needed.
    segment_frames
        Segment length in samples instead of a resolution.

    Examples
    --------
    Two channels fed in blocks; the second is the first at half the amplitude:

    >>> t = np.arange(48000) / 48000
    >>> x = np.sin(2 * np.pi * 1000 * t) + 0.01 * np.sin(2 * np.pi * 3000 * t)
    >>> analyzer = ToneAnalyzer(48000, 2, expected_hz=1000)
    >>> for block in np.array_split(np.column_stack([x, 0.5 * x]), 5):
    ...     analyzer.update(block)
    >>> [(round(r.tone_rms, 4), round(r.thd_percent, 3)) for r in analyzer.result()]
    [(0.7071, 1.0), (0.3536, 1.0)]
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        expected_hz: float | None = None,
        bandwidth_hz: tuple[float, float] = DEFAULT_BANDWIDTH_HZ,
        harmonics: int = 10,
        resolution_hz: float | None = 1.0,
        segment_frames: int | None = None,
    ) -> None:
        if segment_frames is not None:
            resolution_hz = None
        self._welch = WelchPSD(
            sample_rate_hz,
            channels,
            segment_frames=segment_frames,
            resolution_hz=resolution_hz,
            window="blackmanharris",
            overlap=0.5,
        )
        self.fs = float(sample_rate_hz)
        self.bandwidth_hz = _bandwidth(bandwidth_hz, self.fs)
        if expected_hz is not None and not 0 < expected_hz < self.fs / 2:
            raise InputError(
                f"expected tone frequency must be between 0 and Nyquist "
                f"({self.fs / 2:g} Hz); got {expected_hz!r}"
            )
        self.expected_hz = expected_hz
        if not (isinstance(harmonics, int) and harmonics >= 2):
            raise InputError(f"harmonics must be an integer >= 2, got {harmonics!r}")
        self.harmonics = harmonics

    def update(self, block: np.ndarray) -> None:
        """Feed calibrated samples, shape ``(frames, channels)``."""
        self._welch.update(block)

    def spectrum(self) -> PSDResult:
        """The averaged density spectrum so far."""
        return self._welch.result()

    def result(self, *, noise_mean_square: np.ndarray | None = None) -> list[ToneResult]:
        """Tone metrics per channel.

        Parameters
        ----------
        noise_mean_square
            Mean square per channel of a noise-only recording in the same bandwidth (see
            :func:`band_mean_square`), for the SNR.
        """
        psd = self._welch.result()
        out = []
        for ch in range(psd.psd.shape[1]):
            noise = None if noise_mean_square is None else float(noise_mean_square[ch])
            out.append(self._analyse(psd, psd.psd[:, ch], noise))
        return out

    def _analyse(self, psd: PSDResult, p: np.ndarray, noise_ms: float | None) -> ToneResult:
        f = psd.frequency_hz
        df = psd.resolution_hz
        k = LINE_HALF_WIDTH_BINS
        nbins = p.size
        lo, hi = self.bandwidth_hz
        if self.expected_hz is not None:
            search = (f >= self.expected_hz / SEARCH_RATIO) & (
                f <= self.expected_hz * SEARCH_RATIO
            )
            where = f"near {self.expected_hz:g} Hz"
        else:
            search = (f >= lo) & (f <= hi)
            where = f"between {lo:g} and {hi:g} Hz"
        search[: k + 1] = False  # a line needs its full width above DC
        if not search.any() or not np.any(p[search] > 0):
            raise InputError(f"no tone found {where} (resolution {df:g} Hz)")
        peak = int(np.flatnonzero(search)[np.argmax(p[search])])
        if peak + k >= nbins:
            raise InputError(f"the tone at {f[peak]:g} Hz is too close to Nyquist to measure")

        def line(center: int) -> SpectralLine:
            """The line around bin ``center``, with the mean density beside it as floor."""
            found = spectral_line(f, p, center, half_width_bins=k)
            a, b = found.first_bin, found.last_bin
            ring = np.concatenate(
                [p[max(a - _FLOOR_BINS, 1) : a], p[b + 1 : min(b + 1 + _FLOOR_BINS, nbins)]]
            )
            return found.with_floor(ring.mean() if ring.size else 0.0)

        fund = line(peak)
        fund_power, fund_floor, a, b = fund.power, fund.floor_power, fund.first_bin, fund.last_bin
        if not fund_power > DETECTION_RATIO * fund_floor:
            raise InputError(
                f"no tone found {where}: the strongest line ({f[peak]:.6g} Hz) is not "
                f"{10 * math.log10(DETECTION_RATIO):.0f} dB above the noise around it"
            )
        f0 = fund.frequency_hz
        tone_ms = max(fund.mean_square, 0.0)
        if f0 < 2 * (k + 1) * df:
            raise InputError(
                f"tone at {f0:.3g} Hz is too low for {df:g} Hz bins; use a finer resolution"
            )
        orders, harm_ms = [], []
        for n in range(2, self.harmonics + 1):
            center = int(round(n * f0 / df))
            # THD counts the harmonics inside the bandwidth, the band of THD+N too.
            if center + k >= nbins - 1 or n * f0 > hi:
                break
            orders.append(n)
            harm_ms.append(max(line(center).mean_square, 0.0))
        thd = math.sqrt(sum(harm_ms)) / math.sqrt(tone_ms) if tone_ms > 0 else math.inf
        in_band = (f >= lo) & (f <= hi)
        total_ms = float(p[in_band].sum() * df)
        notch = np.zeros(nbins, dtype=bool)
        notch[a : b + 1] = True
        residual_ms = float(p[in_band & ~notch].sum() * df)
        # Noise under the notch (only the part inside the bandwidth) is added back.
        inside = np.count_nonzero(in_band & notch) / (b - a + 1)
        residual_ms += fund_floor * inside
        if not a * df >= lo or not b * df <= hi:
            raise InputError(
                f"the tone at {f0:g} Hz lies outside the bandwidth {lo:g} to {hi:g} Hz"
            )
        thd_n = math.sqrt(residual_ms / total_ms) if total_ms > 0 else math.inf
        sinad = -20.0 * math.log10(thd_n) if thd_n > 0 else math.inf
        noise_rms = snr = None
        if noise_ms is not None:
            noise_rms = math.sqrt(noise_ms)
            snr = 10.0 * math.log10(tone_ms / noise_ms) if noise_ms > 0 else math.inf
        return ToneResult(
            frequency_hz=f0,
            tone_rms=math.sqrt(tone_ms),
            harmonic_orders=tuple(orders),
            harmonic_rms=tuple(math.sqrt(v) for v in harm_ms),
            thd_ratio=thd,
            total_rms=math.sqrt(total_ms),
            residual_rms=math.sqrt(residual_ms),
            thd_n_ratio=thd_n,
            sinad_db=sinad,
            noise_rms=noise_rms,
            snr_db=snr,
            bandwidth_hz=(lo, hi),
            resolution_hz=df,
            segments=psd.averages,
        )


def measure_tone(
    x: np.ndarray,
    sample_rate_hz: float,
    *,
    expected_hz: float | None = None,
    bandwidth_hz: tuple[float, float] = DEFAULT_BANDWIDTH_HZ,
    harmonics: int = 10,
    resolution_hz: float = 1.0,
    noise: np.ndarray | None = None,
) -> ToneResult | list[ToneResult]:
    """Tone metrics of a whole array (``(frames,)`` or ``(frames, channels)``).

    Returns one :class:`ToneResult` for 1-D input, a list (one per channel) otherwise.
    If ``x`` is shorter than one segment of ``1/resolution_hz`` seconds, the whole array
    is taken as the one segment (coarser bins). ``noise`` is a noise-only recording of
    the same shape convention; it gives the SNR.

    This is the form a calibration or production check needs: the band-limited RMS of
    the tone (``tone_rms``), its frequency and the residual (``thd_n_ratio``).

    Examples
    --------
    With a noise-only recording the SNR comes too. Here white noise of 1 mV RMS over
    0-24 kHz puts 0.83e-6 V² into 20 Hz-20 kHz, about 57.8 dB below the 0.5 V² tone:

    >>> t = np.arange(48000) / 48000
    >>> noise = 0.001 * np.random.default_rng(1).standard_normal(48000)
    >>> result = measure_tone(np.sin(2 * np.pi * 1000 * t) + noise, 48000, noise=noise)
    >>> round(result.snr_db)
    58
    >>> round(result.thd_n_percent, 2)  # residual = in-band noise: 0.9e-3 V / 0.707 V
    0.13
    """
    arr = np.asarray(x, dtype=np.float64)
    one = arr.ndim == 1
    x2 = arr[:, None] if one else arr
    if x2.ndim != 2 or x2.shape[0] < 2:
        raise InputError(f"signal must be (frames,) or (frames, channels); got {arr.shape}")
    seg = None
    if x2.shape[0] < sample_rate_hz / resolution_hz:
        seg = x2.shape[0]
    an = ToneAnalyzer(
        sample_rate_hz,
        x2.shape[1],
        expected_hz=expected_hz,
        bandwidth_hz=bandwidth_hz,
        harmonics=harmonics,
        resolution_hz=resolution_hz,
        segment_frames=seg,
    )
    an.update(x2)
    noise_ms = None
    if noise is not None:
        n = np.asarray(noise, dtype=np.float64)
        n2 = n[:, None] if n.ndim == 1 else n
        if n2.shape[1] != x2.shape[1]:
            raise InputError(
                f"noise has {n2.shape[1]} channel(s), the tone recording {x2.shape[1]}"
            )
        noise_ms = noise_mean_square(n2, sample_rate_hz, bandwidth_hz=an.bandwidth_hz)
    results = an.result(noise_mean_square=noise_ms)
    return results[0] if one else results


def noise_mean_square(
    x: np.ndarray, sample_rate_hz: float, *, bandwidth_hz: tuple[float, float]
) -> np.ndarray:
    """Mean square per channel of a noise-only array within ``bandwidth_hz`` (unit²).

    Uses the same 1 Hz Welch spectrum as the tone (or one segment of the whole array
    when it is shorter), so both sides of the SNR see the same bandwidth.

    Examples
    --------
    White noise of 1 mV RMS spread over 0-24 kHz puts about 19980 / 24000 of its
    1e-6 V² into 20 Hz-20 kHz (0.83e-6 V²; one seeded estimate):

    >>> noise = 0.001 * np.random.default_rng(1).standard_normal(48000)
    >>> ms = noise_mean_square(noise, 48000, bandwidth_hz=(20.0, 20000.0))
    >>> f"{float(ms[0]):.2e}"
    '8.14e-07'
    """
    n2 = np.asarray(x, dtype=np.float64)
    n2 = n2[:, None] if n2.ndim == 1 else n2
    lo, hi = _bandwidth(bandwidth_hz, sample_rate_hz)
    seg = min(n2.shape[0], int(round(sample_rate_hz)))
    if seg < 2:
        raise InputError("the noise recording is empty")
    w = WelchPSD(sample_rate_hz, n2.shape[1], segment_frames=seg, window="blackmanharris")
    w.update(n2)
    return band_mean_square(w.result(), lo, hi)
