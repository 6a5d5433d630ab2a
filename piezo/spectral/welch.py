"""Power spectral density (Welch) and a bounded-memory spectrogram.

Welch's method (P. D. Welch, "The use of fast Fourier transform for the estimation of
power spectra", IEEE Trans. Audio Electroacoust. AU-15, 1967) averages modified
periodograms of overlapping, windowed segments. Everything here is one-sided and
calibrated: a signal in pascals gives a density in Pa²/Hz (``scaling="density"``) or the
mean square per bin in Pa² (``scaling="spectrum"``, which reads the RMS² of a tone).

The segmenting, windowing, transforms, scaling and averaging are those of the one
averaging core, :mod:`piezo.spectral.averaging` (whose window helpers are re-exported
here); this module adds the confidence interval of the PSD and the spectrogram's
bounded column store. The mean over segments equals :func:`scipy.signal.welch` on the
same data; the median keeps a bounded, evenly spread subset of the segments, see
:class:`WelchPSD`."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.errors import InputError
from piezo.spectral.averaging import (
    AVERAGES,
    MEDIAN_MEMORY_BYTES,
    WINDOWS,
    AutoSpectra,
    Segmenter,
    equivalent_noise_bandwidth_bins,
    overlap_correlation,
    segment_frames_for,
    window_coefficients,
)

__all__ = [
    "AVERAGES",
    "SCALINGS",
    "WINDOWS",
    "PSDResult",
    "Spectrogram",
    "SpectrogramResult",
    "WelchPSD",
    "equivalent_noise_bandwidth_bins",
    "overlap_correlation",
    "segment_frames_for",
    "spectrogram",
    "welch_psd",
    "window_coefficients",
]

#: Output scalings: power spectral density, or mean square per bin.
SCALINGS = ("density", "spectrum")


@dataclass(frozen=True)
class PSDResult:
    """A one-sided Welch spectrum.

    Attributes
    ----------
    frequency_hz
        Bin frequencies, shape ``(bins,)``.
    psd
        Shape ``(bins, channels)``. Unit² per hertz (``scaling="density"``) or unit²
        per bin (``scaling="spectrum"``), where unit is that of the input (Pa or V).
    scaling, window, average
        The options used.
    sample_rate_hz
        Sample rate of the input.
    segment_frames, overlap_frames
        Segment length and overlap in samples.
    enbw_bins, enbw_hz
        Equivalent noise bandwidth of the window, in bins and hertz.
    averages
        Number of segments averaged (for the median: segments seen).
    effective_averages
        Number of statistically independent averages equivalent to the overlapped
        segments for white noise (Welch 1967); ``averages`` for max and median.
    degrees_of_freedom
        ``2·effective_averages`` (chi-square degrees of freedom of a mean estimate).
    confidence_level
        Probability that the true PSD lies within the interval below.
    ci_lower_db, ci_upper_db
        Offsets in dB to add to ``10·lg(psd)`` for the confidence interval of the true
        value (Bendat & Piersol, *Random Data*, chapter 8); ``None`` unless
        ``average="mean"``. They hold for bins other than DC and Nyquist.
    median_segments
        Segments the median was taken over (all of them up to the memory cap).

    Examples
    --------
    With ``scaling="spectrum"`` the peak bin of a tone on a bin reads its mean square
    (0.25 for an RMS of 0.5), and :meth:`mean_square` sums it back (Parseval):

    >>> t = np.arange(48000) / 48000.0
    >>> tone = np.sqrt(2) * 0.5 * np.sin(2 * np.pi * 1000.0 * t)
    >>> r = welch_psd(tone, 48000.0, segment_frames=4800, scaling="spectrum")
    >>> r.resolution_hz, r.unit_suffix, round(float(r.psd.max()), 6)
    (10.0, '^2', 0.25)
    >>> round(float(r.mean_square()[0]), 6)
    0.25
    """

    frequency_hz: np.ndarray
    psd: np.ndarray
    scaling: str
    window: str
    average: str
    sample_rate_hz: float
    segment_frames: int
    overlap_frames: int
    enbw_bins: float
    enbw_hz: float
    averages: int
    effective_averages: float
    degrees_of_freedom: float
    confidence_level: float
    ci_lower_db: float | None
    ci_upper_db: float | None
    median_segments: int | None = None

    @property
    def resolution_hz(self) -> float:
        """Bin spacing, hertz."""
        return self.sample_rate_hz / self.segment_frames

    @property
    def unit_suffix(self) -> str:
        """``"^2/Hz"`` for a density, ``"^2"`` for a spectrum."""
        return "^2/Hz" if self.scaling == "density" else "^2"

    def mean_square(self) -> np.ndarray:
        """Mean square per channel from the spectrum (Parseval), unit².

        For a density the integral ``Σ psd·Δf``; for a spectrum ``Σ psd / NENBW``.
        """
        if self.scaling == "density":
            return self.psd.sum(axis=0) * self.resolution_hz
        return self.psd.sum(axis=0) / self.enbw_bins


class WelchPSD:
    """Streaming one-sided Welch PSD.

    Parameters
    ----------
    sample_rate_hz
        Sample rate, hertz.
    channels
        Number of channels in each block.
    segment_frames
        Segment (FFT) length in samples. Or give ``resolution_hz``; default 4096 samples'
        worth of resolution.
    resolution_hz
        Wanted bin spacing; the segment length is rounded up to a fast FFT size.
    window
        One of :data:`WINDOWS` (default Hann).
    overlap
        Fraction of a segment shared with the next (default 0.5).
    average
        ``"mean"`` (Welch), ``"median"`` (robust against bursts, bias-corrected as in
        scipy) or ``"max"`` (max-hold).
    scaling
        ``"density"`` (unit²/Hz) or ``"spectrum"`` (unit² per bin, ENBW-corrected: reads
        the mean square of a tone).
    detrend
        ``"constant"`` removes each segment's mean (as scipy's default), or ``None``.
    confidence_level
        Coverage of the reported chi-square confidence interval (mean average only).
    median_memory_bytes
        Memory allowed for the segments kept for a median. Up to that cap the median is
        exact (equal to scipy's); past it every other kept segment is dropped and only
        every second (fourth, ...) later segment is kept, so the median is taken over an
        evenly spread subset of at least half the cap, through the whole recording.

    Notes
    -----
    Segments start at multiples of ``segment_frames - overlap_frames`` from the first
    sample; samples after the last full segment are not used (as in scipy).

    Examples
    --------
    Equal to :func:`scipy.signal.welch` on the same data:

    >>> from scipy import signal
    >>> x = np.random.default_rng(2).standard_normal((10_000, 1))
    >>> est = WelchPSD(8000.0, 1, segment_frames=512)
    >>> est.update(x)
    >>> r = est.result()
    >>> _, ref = signal.welch(x[:, 0], fs=8000.0, nperseg=512)
    >>> bool(np.allclose(r.psd[:, 0], ref, rtol=1e-10)), r.averages
    (True, 38)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        segment_frames: int | None = None,
        resolution_hz: float | None = None,
        window: str = "hann",
        overlap: float = 0.5,
        average: str = "mean",
        scaling: str = "density",
        detrend: str | None = "constant",
        confidence_level: float = 0.95,
        median_memory_bytes: int = MEDIAN_MEMORY_BYTES,
    ) -> None:
        if scaling not in SCALINGS:
            raise InputError(f"scaling must be one of {', '.join(SCALINGS)}; got {scaling!r}")
        if not 0.0 < confidence_level < 1.0:
            raise InputError(f"confidence_level must be in (0, 1), got {confidence_level!r}")
        self._core = AutoSpectra(
            sample_rate_hz,
            channels,
            segment_frames=segment_frames,
            resolution_hz=resolution_hz,
            window=window,
            overlap=overlap,
            detrend=detrend,
            average=average,
            median_memory_bytes=median_memory_bytes,
        )
        self.average = average
        self.scaling = scaling
        self.confidence_level = float(confidence_level)

    @property
    def segment_frames(self) -> int:
        """Segment length in samples."""
        return self._core.segmenter.n

    def update(self, block: np.ndarray) -> None:
        """Feed calibrated samples, shape ``(frames, channels)``."""
        self._core.update(block)

    def result(self) -> PSDResult:
        """The spectrum of everything fed so far.

        Raises
        ------
        InputError
            If fewer samples than one segment were fed.
        """
        avg = self._core.result()
        psd = avg.density if self.scaling == "density" else avg.spectrum
        k_eff = avg.effective_averages
        dof = 2.0 * k_eff
        lo: float | None = None
        hi: float | None = None
        if self.average == "mean":
            alpha = 1.0 - self.confidence_level
            # χ² quantiles through the inverse survival function (scipy.special is a
            # third of scipy.stats's import): chi2.ppf(q, ν) = chdtri(ν, 1 − q).
            from scipy.special import chdtri

            lo = 10.0 * math.log10(dof / chdtri(dof, alpha / 2.0))
            hi = 10.0 * math.log10(dof / chdtri(dof, 1.0 - alpha / 2.0))
        return PSDResult(
            frequency_hz=avg.frequency_hz,
            psd=psd,
            scaling=self.scaling,
            window=avg.window,
            average=self.average,
            sample_rate_hz=avg.sample_rate_hz,
            segment_frames=avg.segment_frames,
            overlap_frames=avg.overlap_frames,
            enbw_bins=avg.enbw_bins,
            enbw_hz=avg.enbw_hz,
            averages=avg.averages,
            effective_averages=k_eff,
            degrees_of_freedom=dof,
            confidence_level=self.confidence_level,
            ci_lower_db=lo,
            ci_upper_db=hi,
            median_segments=avg.median_segments,
        )


def welch_psd(x: np.ndarray, sample_rate_hz: float, **options) -> PSDResult:
    """Whole-array Welch PSD: ``x`` of shape ``(frames,)`` or ``(frames, channels)``.

    Options are those of :class:`WelchPSD`.

    Examples
    --------
    The one-sided density of white noise is ``2·σ²/fs`` (here averaged over the bins
    between DC and Nyquist, relative to the sample variance); the Hann window's
    equivalent noise bandwidth is 1.5 bins (Harris, Proc. IEEE 66, 1978, table I):

    >>> x = np.random.default_rng(1).standard_normal(100_000)
    >>> r = welch_psd(x, 1000.0, segment_frames=256)
    >>> round(float(np.mean(r.psd[1:-1, 0])) / (2.0 * float(np.var(x)) / 1000.0), 2)
    1.0
    >>> r.enbw_bins, round(r.enbw_hz, 4)
    (1.5, 5.8594)
    """
    arr = np.asarray(x, dtype=np.float64)
    channels = 1 if arr.ndim == 1 else arr.shape[1]
    est = WelchPSD(sample_rate_hz, channels, **options)
    est.update(arr.reshape(arr.shape[0], channels) if arr.ndim == 1 else arr)
    return est.result()


@dataclass(frozen=True)
class SpectrogramResult:
    """A time-decimated short-time power spectrum.

    Attributes
    ----------
    time_s
        Centre time of each column, shape ``(columns,)``.
    frequency_hz
        Bin frequencies, shape ``(bins,)``.
    power
        Mean power per column, shape ``(columns, bins, channels)``, in the scaling given
        (unit²/Hz or unit² per bin).
    segments_per_column
        Segments averaged into each column, shape ``(columns,)``.
    scaling, window
        The options used.

    Examples
    --------
    A tone of mean square 0.25 in density scaling reads ``0.25 / ENBW`` at its bin:
    with 480-sample Hann segments at 48 kHz the ENBW is 1.5 × 100 Hz, so
    ``10·lg(0.25/150) = -27.78`` dB re 1/Hz:

    >>> t = np.arange(48000) / 48000.0
    >>> tone = np.sqrt(2) * 0.5 * np.sin(2 * np.pi * 1000.0 * t)
    >>> s = spectrogram(tone, 48000.0, segment_frames=480, overlap=0.0)
    >>> s.power.shape, float(s.frequency_hz[10])
    ((100, 241, 1), 1000.0)
    >>> round(float(s.level_db(1.0)[0, 10, 0]), 2)
    -27.78
    """

    time_s: np.ndarray
    frequency_hz: np.ndarray
    power: np.ndarray
    segments_per_column: np.ndarray
    scaling: str
    window: str

    def level_db(self, reference: float) -> np.ndarray:
        """``10·lg(power / reference²)``: dB re reference²/Hz (density) or re reference²."""
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.power / reference**2)


class Spectrogram:
    """Streaming STFT power with bounded memory.

    Segments are windowed and scaled as in :class:`WelchPSD` (mean of one segment). At
    most ``max_columns`` columns are kept: when they are all used, neighbouring columns
    are merged pairwise (their power averaged) and each column from then on averages
    twice as many segments. The result has between ``max_columns/2`` and
    ``max_columns`` columns however long the recording is.

    Examples
    --------
    One second at 48 kHz in 10 ms segments is 100 segments; with four columns at most
    they are merged until each column holds 32 (the last the 4 left over):

    >>> sp = Spectrogram(48000.0, 1, segment_frames=480, overlap=0.0, max_columns=4)
    >>> sp.update(np.zeros((48000, 1)))
    >>> r = sp.result()
    >>> r.segments_per_column.tolist(), [round(float(t), 2) for t in r.time_s]
    ([32, 32, 32, 4], [0.16, 0.48, 0.8, 0.98])
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        segment_frames: int | None = None,
        resolution_hz: float | None = None,
        window: str = "hann",
        overlap: float = 0.5,
        scaling: str = "density",
        max_columns: int = 1024,
    ) -> None:
        if scaling not in SCALINGS:
            raise InputError(f"scaling must be one of {', '.join(SCALINGS)}; got {scaling!r}")
        if not (isinstance(max_columns, int) and max_columns >= 2 and max_columns % 2 == 0):
            raise InputError(f"max_columns must be an even integer >= 2, got {max_columns!r}")
        self._seg = Segmenter(
            sample_rate_hz,
            channels,
            segment_frames=segment_frames,
            resolution_hz=resolution_hz,
            window=window,
            overlap=overlap,
        )
        self.scaling = scaling
        self.max_columns = max_columns
        self._power = np.zeros((max_columns, channels, self._seg.bins))
        self._count = np.zeros(max_columns, dtype=np.int64)
        self._tsum = np.zeros(max_columns)
        self._columns = 0
        self._group = 1

    def update(self, block: np.ndarray) -> None:
        """Feed calibrated samples, shape ``(frames, channels)``."""
        seg = self._seg
        for first, power in seg.feed_power(block):
            for i in range(power.shape[0]):
                index = first + i
                col = index // self._group
                if col >= self.max_columns:
                    half = self.max_columns // 2
                    self._power[:half] = self._power[0::2] + self._power[1::2]
                    self._count[:half] = self._count[0::2] + self._count[1::2]
                    self._tsum[:half] = self._tsum[0::2] + self._tsum[1::2]
                    self._power[half:] = 0.0
                    self._count[half:] = 0
                    self._tsum[half:] = 0.0
                    self._group *= 2
                    col = index // self._group
                self._power[col] += power[i]
                self._count[col] += 1
                self._tsum[col] += (index * seg.step + seg.n / 2) / seg.fs
                self._columns = col + 1

    def result(self) -> SpectrogramResult:
        """Columns so far (raises :class:`InputError` when there is not one segment)."""
        seg = self._seg
        c = self._columns
        if c == 0:
            raise seg.too_short()
        count = self._count[:c]
        power = self._power[:c] / count[:, None, None]
        if self.scaling == "spectrum":
            power = power * seg.enbw_hz
        return SpectrogramResult(
            time_s=self._tsum[:c] / count,
            frequency_hz=seg.frequency_hz(),
            power=np.ascontiguousarray(power.transpose(0, 2, 1)),
            segments_per_column=count.copy(),
            scaling=self.scaling,
            window=seg.window_name,
        )


def spectrogram(x: np.ndarray, sample_rate_hz: float, **options) -> SpectrogramResult:
    """Whole-array :class:`Spectrogram`: ``x`` of shape ``(frames,)`` or
    ``(frames, channels)``.

    Examples
    --------
    In ``"spectrum"`` scaling a tone's bin reads its mean square, here 0.5 (-3.01 dB re 1):

    >>> t = np.arange(8000) / 8000.0
    >>> s = spectrogram(np.sin(2 * np.pi * 1000.0 * t), 8000.0, segment_frames=80,
    ...                 scaling="spectrum")
    >>> float(s.frequency_hz[10]), round(float(s.level_db(1.0)[0, 10, 0]), 2)
    (1000.0, -3.01)
    """
    arr = np.asarray(x, dtype=np.float64)
    channels = 1 if arr.ndim == 1 else arr.shape[1]
    est = Spectrogram(sample_rate_hz, channels, **options)
    est.update(arr.reshape(arr.shape[0], channels) if arr.ndim == 1 else arr)
    return est.result()
