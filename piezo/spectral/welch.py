"""Power spectral density (Welch), windows, and a bounded-memory spectrogram.

Welch's method (P. D. Welch, "The use of fast Fourier transform for the estimation of
power spectra", IEEE Trans. Audio Electroacoust. AU-15, 1967) averages modified
periodograms of overlapping, windowed segments. Everything here is one-sided and
calibrated: a signal in pascals gives a density in Pa²/Hz (``scaling="density"``) or the
mean square per bin in Pa² (``scaling="spectrum"``, which reads the RMS² of a tone).

Scaling (Heinzel, Rüdiger and Schilling, "Spectrum and spectral density estimation by the
DFT", 2002, sections 9-11), with ``X_k`` the DFT of the windowed segment ``w·x``::

    density  = 2 |X_k|² / (fs · Σ w²)      (DC and Nyquist bins not doubled)
    spectrum = 2 |X_k|² / (Σ w)²           = density · ENBW

The mean over segments equals :func:`scipy.signal.welch` on the same data. Segments are
accumulated as blocks arrive, so memory does not grow with the recording length; the
median (which needs the segments themselves) keeps a bounded, evenly spread subset of
them, see :class:`WelchPSD`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft
from scipy import signal, stats

from piezo import validate
from piezo.errors import InputError

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

#: Window names offered for spectral estimates.
WINDOWS = ("hann", "flattop", "blackmanharris", "rectangular")
#: Averaging of the segment periodograms.
AVERAGES = ("mean", "median", "max")
#: Output scalings: power spectral density, or mean square per bin.
SCALINGS = ("density", "spectrum")

# HFT95 flat-top window (Heinzel et al. 2002, appendix D): sidelobes -95 dB, amplitude
# flatness 0.0044 dB, NENBW 3.8112 bins. Cosine-sum coefficients with alternating signs.
_HFT95 = (1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665)

#: Memory allowed for the stored segments of a median average, bytes.
MEDIAN_MEMORY_BYTES = 64 * 2**20
#: Threads for batched FFTs. One: a batch is small (a block's worth of segments), and
#: with two threads on the two shared cores of the benchmark machine the Welch PSD was
#: no faster in wall time and used more CPU (docs/performance.md, "Spectra").
_WORKERS = 1
#: Segment length when neither a length nor a resolution is given.
DEFAULT_SEGMENT_FRAMES = 4096
#: Samples (segments x length x channels) windowed and transformed per FFT call: a
#: batch (2 MB windowed, 2 MB transformed) stays in the processor's cache and bounds the
#: working memory of one update whatever the block size.
_FFT_BATCH_SAMPLES = 2**18


def window_coefficients(name: str, frames: int) -> np.ndarray:
    """Periodic (DFT-even) window of ``frames`` samples, as used for spectral analysis.

    Parameters
    ----------
    name
        ``"hann"``; ``"flattop"`` (HFT95, Heinzel et al. 2002); ``"blackmanharris"``
        (4-term, -92 dB sidelobes, Harris 1978); ``"rectangular"``.
    frames
        Window length in samples.
    """
    if name not in WINDOWS:
        raise InputError(f"window must be one of {', '.join(WINDOWS)}; got {name!r}")
    if frames < 1:
        raise InputError(f"window length must be at least 1 sample, got {frames}")
    if name == "hann":
        return signal.windows.hann(frames, sym=False)
    if name == "blackmanharris":
        return signal.windows.blackmanharris(frames, sym=False)
    if name == "rectangular":
        return np.ones(frames)
    z = 2.0 * np.pi * np.arange(frames) / frames
    return sum(c * np.cos(k * z) for k, c in enumerate(_HFT95))


def equivalent_noise_bandwidth_bins(window: np.ndarray) -> float:
    """Normalised equivalent noise bandwidth ``N·Σw²/(Σw)²``, in bins (Harris 1978)."""
    w = np.asarray(window, dtype=np.float64)
    return float(w.size * np.dot(w, w) / w.sum() ** 2)


def overlap_correlation(window: np.ndarray, shift_frames: int) -> float:
    """Correlation ``Σ w[n]·w[n+shift] / Σ w²`` of a window with itself shifted.

    Its square is the correlation between periodograms of overlapping segments of white
    noise (Welch 1967, eq. 10).
    """
    w = np.asarray(window, dtype=np.float64)
    if shift_frames >= w.size:
        return 0.0
    return float(np.dot(w[: w.size - shift_frames], w[shift_frames:]) / np.dot(w, w))


def segment_frames_for(sample_rate_hz: float, resolution_hz: float) -> int:
    """Segment length giving a bin spacing no coarser than ``resolution_hz``.

    The length is rounded up to a size the FFT handles fast (only factors 2, 3, 5).
    """
    if not resolution_hz > 0:
        raise InputError(f"resolution must be positive, got {resolution_hz!r} Hz")
    n = math.ceil(sample_rate_hz / resolution_hz - 1e-9)
    return int(scipy.fft.next_fast_len(max(n, 2), real=True))


_check_rate = validate.sample_rate
_check_channels = validate.channel_count


def _as_block(block: np.ndarray, channels: int) -> np.ndarray:
    """Validate a ``(frames, channels)`` block (1-D accepted for one channel)."""
    return validate.signal_block(block, channels)


def _median_bias(n: int) -> float:
    """Bias of the sample median of ``n`` chi-square (2 dof) values relative to the mean.

    Series from B. Allen et al., "FINDCHIRP", Phys. Rev. D 85 (2012), appendix B; the
    same correction :func:`scipy.signal.welch` applies with ``average="median"``.
    """
    ii_2 = 2.0 * np.arange(1.0, (n - 1) // 2 + 1)
    return float(1.0 + np.sum(1.0 / (ii_2 + 1.0) - 1.0 / ii_2))


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


class _Segmenter:
    """Cut a stream into overlapping windowed segments and FFT them in batches."""

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        segment_frames: int | None,
        resolution_hz: float | None,
        window: str,
        overlap: float,
        detrend: str | None,
    ) -> None:
        self.fs = _check_rate(sample_rate_hz)
        self.channels = _check_channels(channels)
        if segment_frames is not None and resolution_hz is not None:
            raise InputError("give segment_frames or resolution_hz, not both")
        if segment_frames is None:
            segment_frames = (
                DEFAULT_SEGMENT_FRAMES
                if resolution_hz is None
                else segment_frames_for(self.fs, resolution_hz)
            )
        if not (isinstance(segment_frames, int | np.integer) and segment_frames >= 2):
            raise InputError(f"segment_frames must be an integer >= 2, got {segment_frames!r}")
        if not 0.0 <= overlap < 1.0:
            raise InputError(f"overlap must be a fraction in [0, 1), got {overlap!r}")
        if detrend not in ("constant", None):
            raise InputError(f"detrend must be 'constant' or None, got {detrend!r}")
        self.n = int(segment_frames)
        self.noverlap = min(int(round(overlap * self.n)), self.n - 1)
        self.step = self.n - self.noverlap
        self.window_name = window
        self.w = window_coefficients(window, self.n)
        self.detrend = detrend
        self.bins = self.n // 2 + 1
        self.segments = 0  # segments emitted so far
        # Stream buffer: the unused tail of earlier blocks, then the current block. It
        # grows to the longest block fed plus a segment, not with the recording length.
        self._data = np.empty((0, self.channels))
        self._pending = 0
        # One-sided density scale; DC and (even n) Nyquist bins are not doubled.
        scale = np.full(self.bins, 2.0 / (self.fs * np.dot(self.w, self.w)))
        scale[0] /= 2.0
        if self.n % 2 == 0:
            scale[-1] /= 2.0
        self.density_scale = scale
        self._w_spec = scipy.fft.rfft(self.w)
        nonzero = np.flatnonzero(np.abs(self._w_spec) > 1e-13 * np.abs(self._w_spec[0]))
        self._w_bins = int(nonzero[-1]) + 1
        # Segments windowed and transformed per FFT call, into a preallocated buffer.
        self._batch = max(1, _FFT_BATCH_SAMPLES // (self.n * self.channels))
        self._buf = np.empty((self._batch, self.channels, self.n))
        g = math.gcd(self.n, self.step)
        self._chunk = g if self.n // g <= 8 else None

    def _batches(self, data: np.ndarray, first: int, count: int):
        """Yield ``(k, spec)`` for ``count`` segments of ``data`` starting at sample
        ``first`` (step ``self.step``), in batches: ``spec`` is the ``(k, channels, bins)``
        DFT of the windowed (and, if asked, mean-removed) segments. ``spec`` is a scratch
        array, valid until the next batch."""
        n, step = self.n, self.step
        for done in range(0, count, self._batch):
            k = min(self._batch, count - done)
            start = first + done * step
            stop = start + (k - 1) * step + n
            region = data[start:stop]
            view = np.lib.stride_tricks.sliding_window_view(region, n, axis=0)[::step]
            buf = self._buf[:k]
            np.multiply(view, self.w, out=buf)  # (k, channels, n)
            spec = scipy.fft.rfft(buf, axis=-1, overwrite_x=True, workers=_WORKERS)
            if self.detrend == "constant":
                # Removing each segment's mean before windowing subtracts mean·DFT(w),
                # which is non-zero only in the first few bins of a cosine-sum window.
                k_w = self._w_bins
                spec[..., :k_w] -= (
                    self._segment_means(region, view, k)[..., None] * (self._w_spec[:k_w])
                )
            yield k, spec

    def _segment_means(self, region: np.ndarray, view: np.ndarray, k: int) -> np.ndarray:
        """Means ``(k, channels)`` of the segments in ``region``: from sums over chunks
        of ``gcd(n, step)`` samples when a segment spans few of them (each sample is read
        once), else from the segments themselves."""
        g = self._chunk
        if g is None:
            return view.mean(axis=-1)
        chunks = region.reshape(-1, g, self.channels).sum(axis=1)  # (chunks, channels)
        per_seg, chunk_step = self.n // g, self.step // g
        sums = chunks[0 : (k - 1) * chunk_step + 1 : chunk_step].copy()
        for j in range(1, per_seg):
            sums += chunks[j : j + (k - 1) * chunk_step + 1 : chunk_step]
        return sums / self.n

    def feed(self, block: np.ndarray):
        """Yield ``(first_segment_index, k, spec)`` batches, see :meth:`_batches`.

        The samples left over from earlier blocks (fewer than a segment) and the block
        are placed one after the other in a reused buffer, so that every segment of the
        block goes through the same batched FFT calls; a block that starts a fresh
        stream is read in place.
        """
        x = _as_block(block, self.channels)
        frames = x.shape[0]
        if frames == 0:
            return
        n, step = self.n, self.step
        p = self._pending  # samples kept from earlier blocks (< n), at the buffer start
        total = p + frames
        if p == 0:
            data = x
        else:
            if self._data.shape[0] < total:
                grown = np.empty((total, self.channels))
                grown[:p] = self._data[:p]
                self._data = grown
            data = self._data
            data[p:total] = x
        count = 0 if total < n else (total - n) // step + 1
        for k, spec in self._batches(data, 0, count):
            yield self.segments, k, spec
            self.segments += k
        cut = count * step
        rest = total - cut
        if self._data.shape[0] < rest:
            self._data = np.empty((max(rest, n), self.channels))
        self._data[:rest] = data[cut:total]  # numpy buffers overlapping copies
        self._pending = rest

    def feed_power(self, block: np.ndarray):
        """Yield ``(first_segment_index, power)`` batches; power is ``(k, channels,
        bins)`` in density scaling."""
        for first, _k, spec in self.feed(block):
            power = spec.real**2
            power += spec.imag**2
            power *= self.density_scale
            yield first, power


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
        if average not in AVERAGES:
            raise InputError(f"average must be one of {', '.join(AVERAGES)}; got {average!r}")
        if scaling not in SCALINGS:
            raise InputError(f"scaling must be one of {', '.join(SCALINGS)}; got {scaling!r}")
        if not 0.0 < confidence_level < 1.0:
            raise InputError(f"confidence_level must be in (0, 1), got {confidence_level!r}")
        self._seg = _Segmenter(
            sample_rate_hz, channels, segment_frames, resolution_hz, window, overlap, detrend
        )
        self.average = average
        self.scaling = scaling
        self.confidence_level = float(confidence_level)
        shape = (channels, self._seg.bins)
        if average == "mean":
            self._acc = np.zeros((channels, 2 * self._seg.bins))  # (re², im²) pairs
        else:
            self._acc = np.full(shape, -np.inf)
        if average == "median":
            per_segment = 8 * channels * self._seg.bins
            self._cap = max(16, int(median_memory_bytes // per_segment) // 2 * 2)
            self._store = np.empty((self._cap, *shape))
            self._stored = 0
            self._stride = 1

    @property
    def segment_frames(self) -> int:
        """Segment length in samples."""
        return self._seg.n

    def update(self, block: np.ndarray) -> None:
        """Feed calibrated samples, shape ``(frames, channels)``."""
        if self.average == "mean":
            # Σ|X|² over the batch, unscaled, as re² and im² side by side (the complex
            # output viewed as float pairs, squared and summed in one pass); scaled in
            # result().
            for _first, _k, spec in self._seg.feed(block):
                pairs = spec.view(np.float64)
                self._acc += np.einsum("kcb,kcb->cb", pairs, pairs)
            return
        for first, power in self._seg.feed_power(block):
            if self.average == "max":
                np.maximum(self._acc, power.max(axis=0), out=self._acc)
            else:
                self._keep(first, power)

    def _keep(self, first: int, power: np.ndarray) -> None:
        for i in range(power.shape[0]):
            index = first + i
            if index % self._stride:
                continue
            if self._stored == self._cap:
                # Keep the segments whose index is a multiple of the doubled stride.
                self._store[: self._cap // 2] = self._store[0 : self._cap : 2]
                self._stored = self._cap // 2
                self._stride *= 2
                if index % self._stride:
                    continue
            self._store[self._stored] = power[i]
            self._stored += 1

    def result(self) -> PSDResult:
        """The spectrum of everything fed so far.

        Raises
        ------
        InputError
            If fewer samples than one segment were fed.
        """
        seg = self._seg
        k = seg.segments
        if k == 0:
            raise InputError(
                f"too little data for one segment of {seg.n} samples "
                f"({seg.n / seg.fs:g} s); use a coarser resolution or a longer recording"
            )
        median_segments = None
        if self.average == "mean":
            psd = (self._acc[:, 0::2] + self._acc[:, 1::2]) * (seg.density_scale / k)
        elif self.average == "max":
            psd = self._acc.copy()
        else:
            median_segments = self._stored
            stored = self._store[: self._stored]
            psd = np.median(stored, axis=0) / _median_bias(self._stored)
        enbw_bins = equivalent_noise_bandwidth_bins(seg.w)
        enbw_hz = enbw_bins * seg.fs / seg.n
        if self.scaling == "spectrum":
            psd = psd * enbw_hz
        if self.average == "mean":
            k_eff = _effective_averages(seg.w, seg.step, k)
            dof = 2.0 * k_eff
            alpha = 1.0 - self.confidence_level
            lo = 10.0 * math.log10(dof / stats.chi2.ppf(1.0 - alpha / 2.0, dof))
            hi = 10.0 * math.log10(dof / stats.chi2.ppf(alpha / 2.0, dof))
        else:
            k_eff, lo, hi = float(k), None, None
            dof = 2.0 * k_eff
        return PSDResult(
            frequency_hz=np.arange(seg.bins) * seg.fs / seg.n,
            psd=np.ascontiguousarray(psd.T),
            scaling=self.scaling,
            window=seg.window_name,
            average=self.average,
            sample_rate_hz=seg.fs,
            segment_frames=seg.n,
            overlap_frames=seg.noverlap,
            enbw_bins=enbw_bins,
            enbw_hz=enbw_hz,
            averages=k,
            effective_averages=k_eff,
            degrees_of_freedom=dof,
            confidence_level=self.confidence_level,
            ci_lower_db=lo,
            ci_upper_db=hi,
            median_segments=median_segments,
        )


def _effective_averages(window: np.ndarray, step: int, segments: int) -> float:
    """Independent averages equivalent to ``segments`` overlapped segments.

    Welch (1967), eq. 11: for white noise the normalised variance of the averaged
    periodogram is ``(1/K)·[1 + 2·Σ_{j=1}^{K-1} (1 - j/K)·ρ(j)²]`` with ``ρ(j)`` the
    window's :func:`overlap_correlation` at ``j·step`` samples; its inverse is the
    number of effective averages.
    """
    k = segments
    total = 1.0
    j = 1
    while j < k and j * step < window.size:
        total += 2.0 * (1.0 - j / k) * overlap_correlation(window, j * step) ** 2
        j += 1
    return k / total


def welch_psd(x: np.ndarray, sample_rate_hz: float, **options) -> PSDResult:
    """Whole-array Welch PSD: ``x`` of shape ``(frames,)`` or ``(frames, channels)``.

    Options are those of :class:`WelchPSD`.
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
        self._seg = _Segmenter(
            sample_rate_hz, channels, segment_frames, resolution_hz, window, overlap, "constant"
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
            raise InputError(
                f"too little data for one segment of {seg.n} samples ({seg.n / seg.fs:g} s)"
            )
        count = self._count[:c]
        power = self._power[:c] / count[:, None, None]
        if self.scaling == "spectrum":
            power = power * equivalent_noise_bandwidth_bins(seg.w) * seg.fs / seg.n
        return SpectrogramResult(
            time_s=self._tsum[:c] / count,
            frequency_hz=np.arange(seg.bins) * seg.fs / seg.n,
            power=np.ascontiguousarray(power.transpose(0, 2, 1)),
            segments_per_column=count.copy(),
            scaling=self.scaling,
            window=seg.window_name,
        )


def spectrogram(x: np.ndarray, sample_rate_hz: float, **options) -> SpectrogramResult:
    """Whole-array :class:`Spectrogram`: ``x`` of shape ``(frames,)`` or
    ``(frames, channels)``."""
    arr = np.asarray(x, dtype=np.float64)
    channels = 1 if arr.ndim == 1 else arr.shape[1]
    est = Spectrogram(sample_rate_hz, channels, **options)
    est.update(arr.reshape(arr.shape[0], channels) if arr.ndim == 1 else arr)
    return est.result()
