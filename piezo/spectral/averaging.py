"""The one spectral-averaging core: segments, windows, FFTs, auto and cross spectra.

Every averaged spectrum in piezo comes from here: the Welch PSD and the spectrogram
(:mod:`piezo.spectral.welch`), the two-channel H1 estimate
(:class:`piezo.response.measure.H1Estimator`) and, through the PSD, the capture
diagnostics and the tone metrics.

Method: Welch's overlapped-segment averaging (P. D. Welch, "The use of fast Fourier
transform for the estimation of power spectra", IEEE Trans. Audio Electroacoust. AU-15,
1967). A stream is cut into segments of ``segment_frames`` samples starting every
``step_frames = segment_frames - overlap_frames`` samples from the first sample; the
samples after the last full segment of a block are carried to the next block, so block
boundaries never change the result. Each segment has its mean removed (optional), is
windowed and transformed. One-sided scaling (Heinzel, Rüdiger and Schilling, "Spectrum
and spectral density estimation by the DFT", 2002, sections 9-11), with ``X_k`` the DFT
of the windowed segment ``w·x``::

    density  = 2 |X_k|² / (fs · Σ w²)      (DC and Nyquist bins not doubled)
    spectrum = 2 |X_k|² / (Σ w)²           = density · ENBW

and the same scale for the cross spectrum ``2 conj(X_k)·Y_k / (fs · Σ w²)``.

The pieces:

- :class:`Segmenter` cuts, windows and transforms (in cache-sized batches);
- :class:`AutoSpectra` averages the power of every channel (mean, median or max hold);
- :class:`CrossSpectra` averages the auto spectra and the cross spectra of every channel
  against a reference channel, for transfer functions and coherence.

Memory does not grow with the recording: one batch of transformed segments
(:data:`FFT_BATCH_SAMPLES` samples, whatever the segment length), the carried samples
(fewer than a segment, plus the longest block fed) and the sums. The segment length is a
free parameter (a resonance a few hertz wide at 192 kHz wants 32768 samples or more).
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np

from piezo import validate
from piezo.errors import InputError

__all__ = [
    "AVERAGES",
    "DEFAULT_SEGMENT_FRAMES",
    "FFT_BATCH_SAMPLES",
    "WINDOWS",
    "AutoSpectra",
    "AutoSpectraResult",
    "CrossSpectra",
    "CrossSpectraResult",
    "Segmenter",
    "effective_averages",
    "equivalent_noise_bandwidth_bins",
    "main_lobe_half_width_bins",
    "median_bias",
    "overlap_correlation",
    "segment_frames_for",
    "window_coefficients",
]

#: Window names offered for spectral estimates.
WINDOWS = ("hann", "flattop", "blackmanharris", "rectangular")
#: Averaging of the segment periodograms.
AVERAGES = ("mean", "median", "max")

# HFT95 flat-top window (Heinzel et al. 2002, appendix D): sidelobes -95 dB, amplitude
# flatness 0.0044 dB, NENBW 3.8112 bins. Cosine-sum coefficients with alternating signs.
_HFT95 = (1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665)
#: Hann: 0.5 − 0.5·cos (Harris 1978, eq. 27a).
_HANN = (0.5, -0.5)
#: 4-term Blackman–Harris, −92 dB sidelobes (Harris 1978, Table 1).
_BLACKMAN_HARRIS = (0.35875, -0.48829, 0.14128, -0.01168)

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
#: working memory of one update whatever the block size. A segment longer than this is
#: transformed one at a time.
FFT_BATCH_SAMPLES = 2**18


def window_coefficients(name: str, frames: int) -> np.ndarray:
    """Periodic (DFT-even) window of ``frames`` samples, as used for spectral analysis.

    Parameters
    ----------
    name
        ``"hann"``; ``"flattop"`` (HFT95, Heinzel et al. 2002); ``"blackmanharris"``
        (4-term, -92 dB sidelobes, Harris 1978); ``"rectangular"``.
    frames
        Window length in samples.

    Examples
    --------
    >>> w = window_coefficients("hann", 4)
    >>> [round(float(v), 12) for v in w]
    [0.0, 0.5, 1.0, 0.5]
    """
    if name not in WINDOWS:
        raise InputError(f"window must be one of {', '.join(WINDOWS)}; got {name!r}")
    if frames < 1:
        raise InputError(f"window length must be at least 1 sample, got {frames}")
    if name == "rectangular":
        return np.ones(frames)
    # Periodic cosine-sum windows (the DFT-even form that Welch averaging wants):
    # w[n] = Σ c_k cos(2π k n / N), signs folded into the coefficients.
    coefficients = {"hann": _HANN, "blackmanharris": _BLACKMAN_HARRIS}.get(name, _HFT95)
    z = 2.0 * np.pi * np.arange(frames) / frames
    return np.asarray(sum(c * np.cos(k * z) for k, c in enumerate(coefficients)))


#: Half the main-lobe width (null to null) of each window, bins. A cosine-sum window of
#: ``K`` terms (``w = Σ_{k<K} a_k cos(2πkn/N)``) has the first zeros of its transform
#: ``K`` bins from the centre (Harris 1978, section V; Heinzel et al. 2002, appendix C):
#: rectangular 1, Hann 2, 4-term Blackman-Harris 4, HFT95 (5 terms) 5.
_MAIN_LOBE_HALF_WIDTH_BINS = {"rectangular": 1, "hann": 2, "blackmanharris": 4, "flattop": 5}


def main_lobe_half_width_bins(name: str) -> int:
    """Half the main-lobe width (first zero to first zero) of window ``name``, in bins.

    Examples
    --------
    >>> main_lobe_half_width_bins("hann"), main_lobe_half_width_bins("flattop")
    (2, 5)
    """
    if name not in _MAIN_LOBE_HALF_WIDTH_BINS:
        raise InputError(f"window must be one of {', '.join(WINDOWS)}; got {name!r}")
    return _MAIN_LOBE_HALF_WIDTH_BINS[name]


def equivalent_noise_bandwidth_bins(window: np.ndarray) -> float:
    """Normalised equivalent noise bandwidth ``N·Σw²/(Σw)²``, in bins (Harris 1978).

    Examples
    --------
    >>> equivalent_noise_bandwidth_bins(window_coefficients("hann", 1024))
    1.5
    """
    w = np.asarray(window, dtype=np.float64)
    return float(w.size * np.dot(w, w) / w.sum() ** 2)


def overlap_correlation(window: np.ndarray, shift_frames: int) -> float:
    """Correlation ``Σ w[n]·w[n+shift] / Σ w²`` of a window with itself shifted.

    Its square is the correlation between periodograms of overlapping segments of white
    noise (Welch 1967, eq. 10).

    Examples
    --------
    Hann at 50 % overlap: exactly 1/6.

    >>> round(overlap_correlation(window_coefficients("hann", 4096), 2048), 12)
    0.166666666667
    """
    w = np.asarray(window, dtype=np.float64)
    if shift_frames >= w.size:
        return 0.0
    return float(np.dot(w[: w.size - shift_frames], w[shift_frames:]) / np.dot(w, w))


def effective_averages(window: np.ndarray, step_frames: int, segments: int) -> float:
    """Independent averages equivalent to ``segments`` overlapped segments.

    Welch (1967), eq. 11: for white noise the normalised variance of the averaged
    periodogram is ``(1/K)·[1 + 2·Σ_{j=1}^{K-1} (1 - j/K)·ρ(j)²]`` with ``ρ(j)`` the
    window's :func:`overlap_correlation` at ``j·step`` samples; its inverse is the
    number of effective averages.

    Examples
    --------
    Without overlap the segments are independent:

    >>> effective_averages(window_coefficients("hann", 256), 256, 10)
    10.0
    """
    k = segments
    total = 1.0
    j = 1
    while j < k and j * step_frames < window.size:
        total += 2.0 * (1.0 - j / k) * overlap_correlation(window, j * step_frames) ** 2
        j += 1
    return k / total


def median_bias(n: int) -> float:
    """Bias of the sample median of ``n`` chi-square (2 dof) values relative to the mean.

    Series from B. Allen et al., "FINDCHIRP", Phys. Rev. D 85 (2012), appendix B; the
    same correction :func:`scipy.signal.welch` applies with ``average="median"``.

    Examples
    --------
    The median of one value is the value; of three, ``1 + 1/3 - 1/2``:

    >>> median_bias(1), round(median_bias(3), 12)
    (1.0, 0.833333333333)
    """
    ii_2 = 2.0 * np.arange(1.0, (n - 1) // 2 + 1)
    return float(1.0 + np.sum(1.0 / (ii_2 + 1.0) - 1.0 / ii_2))


def segment_frames_for(sample_rate_hz: float, resolution_hz: float) -> int:
    """Segment length giving a bin spacing no coarser than ``resolution_hz``.

    The length is rounded up to a size the FFT handles fast (only factors 2, 3, 5).

    Examples
    --------
    >>> segment_frames_for(48000, 1.0)
    48000
    >>> segment_frames_for(192000, 5.0)
    38400
    """
    if not resolution_hz > 0:
        raise InputError(f"resolution must be positive, got {resolution_hz!r} Hz")
    n = math.ceil(sample_rate_hz / resolution_hz - 1e-9)
    import scipy.fft  # here, not at module level: the band analysis never needs it

    return int(scipy.fft.next_fast_len(max(n, 2), real=True))


_check_rate = validate.sample_rate
_check_channels = validate.channel_count


def _as_block(block: np.ndarray, channels: int) -> np.ndarray:
    """Validate a ``(frames, channels)`` block (1-D accepted for one channel)."""
    return validate.signal_block(block, channels)


class Segmenter:
    """Cut a stream into overlapping windowed segments and FFT them in batches.

    Parameters
    ----------
    sample_rate_hz
        Sample rate, hertz.
    channels
        Number of channels in each block.
    segment_frames
        Segment (FFT) length in samples, at least 2; or give ``resolution_hz``. Default
        :data:`DEFAULT_SEGMENT_FRAMES`.
    resolution_hz
        Wanted bin spacing; the segment length is rounded up to a fast FFT size.
    window
        One of :data:`WINDOWS`, or the coefficients themselves (an array of
        ``segment_frames`` values, e.g. from :func:`scipy.signal.get_window`).
    overlap
        Fraction of a segment shared with the next, ``0 <= overlap < 1``.
    detrend
        ``"constant"`` removes each segment's mean before windowing (as scipy's
        default), ``None`` keeps it.

    Attributes
    ----------
    n, step, noverlap
        Segment length, step between segment starts and overlap, samples.
    w
        Window coefficients.
    bins
        One-sided bins, ``n // 2 + 1``.
    density_scale
        Per-bin factor turning ``|X_k|²`` into a one-sided density (unit²/Hz).
    segments
        Segments transformed so far.

    Examples
    --------
    Ten samples, segments of four with half overlap: starts 0, 2, 4, 6; the last two
    samples wait for the next block.

    >>> seg = Segmenter(80.0, 1, segment_frames=4, window="rectangular", detrend=None)
    >>> [(first, k) for first, k, _ in seg.feed(np.ones(10))]
    [(0, 4)]
    >>> [(first, k) for first, k, _ in seg.feed(np.ones(2))]
    [(4, 1)]
    >>> seg.segments, seg.frequency_hz().tolist()
    (5, [0.0, 20.0, 40.0])
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        segment_frames: int | None = None,
        resolution_hz: float | None = None,
        window: str | np.ndarray = "hann",
        overlap: float = 0.5,
        detrend: str | None = "constant",
    ) -> None:
        self.fs = _check_rate(sample_rate_hz)
        self.channels = _check_channels(channels)
        if segment_frames is not None and resolution_hz is not None:
            raise InputError("give segment_frames or resolution_hz, not both")
        if segment_frames is None:
            if not isinstance(window, str):
                segment_frames = int(np.size(window))
            elif resolution_hz is None:
                segment_frames = DEFAULT_SEGMENT_FRAMES
            else:
                segment_frames = segment_frames_for(self.fs, resolution_hz)
        if not (isinstance(segment_frames, int | np.integer) and segment_frames >= 2):
            raise InputError(f"segment_frames must be an integer >= 2, got {segment_frames!r}")
        if not 0.0 <= overlap < 1.0:
            raise InputError(f"overlap must be a fraction in [0, 1), got {overlap!r}")
        if detrend not in ("constant", None):
            raise InputError(f"detrend must be 'constant' or None, got {detrend!r}")
        self.n = int(segment_frames)
        self.noverlap = min(int(round(overlap * self.n)), self.n - 1)
        self.step = self.n - self.noverlap
        if isinstance(window, str):
            self.window_name = window
            self.w = window_coefficients(window, self.n)
        else:
            self.window_name = "custom"
            self.w = np.array(window, dtype=np.float64)
            if self.w.shape != (self.n,) or not np.all(np.isfinite(self.w)):
                raise InputError(
                    f"window coefficients must be {self.n} finite numbers, got shape "
                    f"{np.shape(window)}"
                )
            if not np.dot(self.w, self.w) > 0:
                raise InputError("window coefficients must not all be zero")
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
        import scipy.fft  # loaded by the first segmenter, not by importing this module

        self._rfft = scipy.fft.rfft
        self._w_spec = scipy.fft.rfft(self.w)
        nonzero = np.flatnonzero(np.abs(self._w_spec) > 1e-13 * np.abs(self._w_spec).max())
        self._w_bins = int(nonzero[-1]) + 1
        # Segments windowed and transformed per FFT call, into a preallocated buffer.
        self._batch = max(1, FFT_BATCH_SAMPLES // (self.n * self.channels))
        self._buf = np.empty((self._batch, self.channels, self.n))
        g = math.gcd(self.n, self.step)
        self._chunk = g if self.n // g <= 8 else None

    @property
    def segment_frames(self) -> int:
        """Segment length in samples."""
        return self.n

    @property
    def overlap_frames(self) -> int:
        """Samples shared by consecutive segments."""
        return self.noverlap

    @property
    def enbw_bins(self) -> float:
        """Equivalent noise bandwidth of the window, bins."""
        return equivalent_noise_bandwidth_bins(self.w)

    @property
    def enbw_hz(self) -> float:
        """Equivalent noise bandwidth of the window, hertz."""
        return self.enbw_bins * self.fs / self.n

    def frequency_hz(self) -> np.ndarray:
        """Bin frequencies, hertz, shape ``(bins,)``."""
        return np.arange(self.bins) * self.fs / self.n

    def describe(self) -> dict[str, Any]:
        """The segmenting as result fields: ``frequency_hz``, ``sample_rate_hz``,
        ``segment_frames``, ``overlap_frames``, ``window``, ``enbw_bins``, ``enbw_hz``."""
        return {
            "frequency_hz": self.frequency_hz(),
            "sample_rate_hz": self.fs,
            "segment_frames": self.n,
            "overlap_frames": self.noverlap,
            "window": self.window_name,
            "enbw_bins": self.enbw_bins,
            "enbw_hz": self.enbw_hz,
        }

    def too_short(self) -> InputError:
        """The error for a stream shorter than one segment."""
        return InputError(
            f"too little data for one segment of {self.n} samples "
            f"({self.n / self.fs:g} s); use a coarser resolution or a longer recording"
        )

    def _batches(
        self, data: np.ndarray, first: int, count: int
    ) -> Iterator[tuple[int, np.ndarray]]:
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
            spec = self._rfft(buf, axis=-1, overwrite_x=True, workers=_WORKERS)
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

    def feed(self, block: np.ndarray) -> Iterator[tuple[int, int, np.ndarray]]:
        """Yield ``(first_segment_index, k, spec)`` batches for the segments a block
        completes; ``spec`` is the ``(k, channels, bins)`` DFT, valid until the next
        batch.

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

    def feed_power(self, block: np.ndarray) -> Iterator[tuple[int, np.ndarray]]:
        """Yield ``(first_segment_index, power)`` batches; power is ``(k, channels,
        bins)`` in density scaling (unit²/Hz)."""
        for first, _k, spec in self.feed(block):
            power = spec.real**2
            power += spec.imag**2
            power *= self.density_scale
            yield first, power


@dataclass(frozen=True)
class AutoSpectraResult:
    """Averaged one-sided power spectral densities of every channel.

    Attributes
    ----------
    frequency_hz
        Bin frequencies, shape ``(bins,)``.
    density
        Shape ``(bins, channels)``, unit²/Hz.
    average
        ``"mean"``, ``"median"`` (bias-corrected) or ``"max"``.
    averages
        Segments averaged (for the median: segments seen).
    median_segments
        Segments the median was taken over; ``None`` for the other averages.
    sample_rate_hz, segment_frames, overlap_frames, window
        The segmenting used.
    enbw_bins, enbw_hz
        Equivalent noise bandwidth of the window, bins and hertz.
    effective_averages
        Independent averages equivalent to the overlapped segments (Welch 1967, eq.
        11) for the mean; ``averages`` otherwise.

    Examples
    --------
    White noise of variance 1 at 1 kHz has the one-sided density 2/fs = 0.002 V²/Hz:

    >>> auto = AutoSpectra(1000.0, 1, segment_frames=256)
    >>> auto.update(np.random.default_rng(0).standard_normal(200_000))
    >>> r = auto.result()
    >>> round(float(np.mean(r.density[1:-1, 0])), 4), r.enbw_bins
    (0.002, 1.5)
    """

    frequency_hz: np.ndarray
    density: np.ndarray
    average: str
    averages: int
    median_segments: int | None
    sample_rate_hz: float
    segment_frames: int
    overlap_frames: int
    window: str
    enbw_bins: float
    enbw_hz: float
    effective_averages: float

    @property
    def spectrum(self) -> np.ndarray:
        """Mean square per bin (unit²): ``density · enbw_hz``, reads the RMS² of a tone."""
        return self.density * self.enbw_hz


class AutoSpectra:
    """Streaming averaged power spectra (Welch 1967) of every channel.

    Parameters
    ----------
    sample_rate_hz, channels, segment_frames, resolution_hz, window, overlap, detrend
        The segmenting, see :class:`Segmenter`.
    average
        ``"mean"`` (Welch), ``"median"`` (robust against bursts, bias-corrected as in
        scipy) or ``"max"`` (max-hold).
    median_memory_bytes
        Memory allowed for the segments kept for a median. Up to that cap the median is
        exact (equal to scipy's); past it every other kept segment is dropped and only
        every second (fourth, ...) later segment is kept, so the median is taken over an
        evenly spread subset of at least half the cap, through the whole recording.

    Examples
    --------
    A 1 kHz tone of RMS 1 on a bin: the spectrum scaling reads its mean square.

    >>> fs, n = 48000.0, 4800
    >>> t = np.arange(10 * n) / fs
    >>> auto = AutoSpectra(fs, 1, segment_frames=n)
    >>> auto.update(np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)[:, None])
    >>> r = auto.result()
    >>> r.averages, round(float(r.spectrum[100, 0]), 9)
    (19, 1.0)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        segment_frames: int | None = None,
        resolution_hz: float | None = None,
        window: str | np.ndarray = "hann",
        overlap: float = 0.5,
        detrend: str | None = "constant",
        average: str = "mean",
        median_memory_bytes: int = MEDIAN_MEMORY_BYTES,
    ) -> None:
        if average not in AVERAGES:
            raise InputError(f"average must be one of {', '.join(AVERAGES)}; got {average!r}")
        self.segmenter = Segmenter(
            sample_rate_hz,
            channels,
            segment_frames=segment_frames,
            resolution_hz=resolution_hz,
            window=window,
            overlap=overlap,
            detrend=detrend,
        )
        self.average = average
        bins = self.segmenter.bins
        shape = (self.segmenter.channels, bins)
        if average == "mean":
            self._acc = np.zeros((self.segmenter.channels, 2 * bins))  # (re², im²) pairs
        else:
            self._acc = np.full(shape, -np.inf)
        if average == "median":
            per_segment = 8 * self.segmenter.channels * bins
            self._cap = max(16, int(median_memory_bytes // per_segment) // 2 * 2)
            self._store = np.empty((self._cap, *shape))
            self._stored = 0
            self._stride = 1

    def update(self, block: np.ndarray) -> None:
        """Feed samples, shape ``(frames, channels)`` (1-D for one channel)."""
        if self.average == "mean":
            # Σ|X|² over the batch, unscaled, as re² and im² side by side (the complex
            # output viewed as float pairs, squared and summed in one pass); scaled in
            # result().
            for _first, _k, spec in self.segmenter.feed(block):
                pairs = spec.view(np.float64)
                self._acc += np.einsum("kcb,kcb->cb", pairs, pairs)
            return
        for first, power in self.segmenter.feed_power(block):
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

    def result(self) -> AutoSpectraResult:
        """The averaged densities of everything fed so far.

        Raises
        ------
        InputError
            If fewer samples than one segment were fed.
        """
        seg = self.segmenter
        k = seg.segments
        if k == 0:
            raise seg.too_short()
        median_segments = None
        if self.average == "mean":
            density = (self._acc[:, 0::2] + self._acc[:, 1::2]) * (seg.density_scale / k)
            k_eff = effective_averages(seg.w, seg.step, k)
        elif self.average == "max":
            density = self._acc.copy()
            k_eff = float(k)
        else:
            median_segments = self._stored
            stored = self._store[: self._stored]
            density = np.median(stored, axis=0) / median_bias(self._stored)
            k_eff = float(k)
        return AutoSpectraResult(
            density=np.ascontiguousarray(density.T),
            average=self.average,
            averages=k,
            median_segments=median_segments,
            effective_averages=k_eff,
            **seg.describe(),
        )


@dataclass(frozen=True)
class CrossSpectraResult:
    """Averaged auto spectra and cross spectra against a reference channel.

    Attributes
    ----------
    frequency_hz
        Bin frequencies, shape ``(bins,)``.
    auto
        One-sided auto spectral densities ``G_cc``, shape ``(bins, channels)``, unit²/Hz.
    cross
        One-sided cross spectral densities ``G_rc = 2 E[conj(X_r)·X_c]/(fs Σw²)`` of the
        reference ``r`` with every channel ``c`` (column ``r`` is ``G_rr``), shape
        ``(bins, channels)``, complex; the convention of :func:`scipy.signal.csd`
        with ``x`` the reference.
    reference_channel
        Index of the reference channel.
    averages
        Segments averaged.
    sample_rate_hz, segment_frames, overlap_frames, window
        The segmenting used.
    enbw_bins, enbw_hz
        Equivalent noise bandwidth of the window, bins and hertz.

    Examples
    --------
    Two independent noises: the coherence stays near 0 (about 1/averages).

    >>> rng = np.random.default_rng(4)
    >>> cs = CrossSpectra(1000.0, 2, segment_frames=128)
    >>> cs.update(rng.standard_normal((64_000, 2)))
    >>> r = cs.result()
    >>> bool(np.mean(r.coherence()[1:-1, 1]) < 0.01), bool(np.allclose(r.coherence()[:, 0], 1))
    (True, True)
    """

    frequency_hz: np.ndarray
    auto: np.ndarray
    cross: np.ndarray
    reference_channel: int
    averages: int
    sample_rate_hz: float
    segment_frames: int
    overlap_frames: int
    window: str
    enbw_bins: float
    enbw_hz: float

    def transfer_h1(self) -> np.ndarray:
        """H1 = G_rc / G_rr of every channel against the reference, ``(bins, channels)``.

        Bins where the reference has no power hold NaN or inf.
        """
        ref = self.auto[:, self.reference_channel]
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.cross / ref[:, None]

    def coherence(self) -> np.ndarray:
        """Magnitude-squared coherence ``|G_rc|² / (G_rr G_cc)``, ``(bins, channels)``.

        Bins where either side has no power hold NaN.
        """
        ref = self.auto[:, self.reference_channel]
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.abs(self.cross) ** 2 / (ref[:, None] * self.auto)


class CrossSpectra:
    """Streaming averaged auto and cross spectra (Welch 1967) against a reference channel.

    The segments of all channels are cut, windowed and transformed together
    (:class:`Segmenter`); the sums are mean-averaged. For a transfer function (H1), a
    coherence, or a two-channel impedance (drive voltage against shunt current).

    Parameters
    ----------
    sample_rate_hz, channels, segment_frames, resolution_hz, window, overlap, detrend
        The segmenting, see :class:`Segmenter`.
    reference_channel
        The channel ``r`` every cross spectrum is taken against.

    Examples
    --------
    A channel that is the reference times -2 has H1 = -2 and coherence 1:

    >>> rng = np.random.default_rng(1)
    >>> x = rng.standard_normal(8192)
    >>> cs = CrossSpectra(48000.0, 2, segment_frames=1024)
    >>> cs.update(np.column_stack([x, -2.0 * x]))
    >>> r = cs.result()
    >>> r.averages, bool(np.allclose(r.transfer_h1()[1:-1, 1], -2.0))
    (15, True)
    >>> bool(np.allclose(r.coherence()[1:-1, 1], 1.0))
    True
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        reference_channel: int = 0,
        segment_frames: int | None = None,
        resolution_hz: float | None = None,
        window: str | np.ndarray = "hann",
        overlap: float = 0.5,
        detrend: str | None = "constant",
    ) -> None:
        self.segmenter = Segmenter(
            sample_rate_hz,
            channels,
            segment_frames=segment_frames,
            resolution_hz=resolution_hz,
            window=window,
            overlap=overlap,
            detrend=detrend,
        )
        if not (
            isinstance(reference_channel, int | np.integer)
            and 0 <= reference_channel < self.segmenter.channels
        ):
            raise InputError(
                f"reference_channel must be one of 0 … {self.segmenter.channels - 1}, got "
                f"{reference_channel!r}"
            )
        self.reference_channel = int(reference_channel)
        shape = (self.segmenter.channels, self.segmenter.bins)
        self._auto = np.zeros(shape)
        self._cross = np.zeros(shape, dtype=np.complex128)

    def update(self, block: np.ndarray) -> None:
        """Feed samples, shape ``(frames, channels)``."""
        r = self.reference_channel
        for _first, _k, spec in self.segmenter.feed(block):
            pairs = spec.view(np.float64)
            auto = np.einsum("kcb,kcb->cb", pairs, pairs)
            self._auto += auto[:, 0::2] + auto[:, 1::2]
            self._cross += np.einsum("kb,kcb->cb", np.conj(spec[:, r]), spec)

    def result(self) -> CrossSpectraResult:
        """The averaged spectra of everything fed so far.

        Raises
        ------
        InputError
            If fewer samples than one segment were fed.
        """
        seg = self.segmenter
        k = seg.segments
        if k == 0:
            raise seg.too_short()
        scale = seg.density_scale / k
        return CrossSpectraResult(
            auto=np.ascontiguousarray((self._auto * scale).T),
            cross=np.ascontiguousarray((self._cross * scale).T),
            reference_channel=self.reference_channel,
            averages=k,
            **seg.describe(),
        )
