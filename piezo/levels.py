"""Sound levels of a recording, streamed: the level set a sound level meter reports.

:class:`LevelMeter` consumes calibrated blocks (Pa, or V for an uncalibrated chain) and
gives, per channel, the levels defined in IEC 61672-1:2013 (definitions in
``docs/levels.md``): equivalent continuous levels LZeq, LAeq, LCeq; maximum and minimum
time-weighted levels LAFmax, LAFmin, LASmax, LASmin; peak levels LCpeak, LZpeak; the
sound exposure level LAE; percentile levels LAF5, LAF10, LAF50, LAF90, LAF95; the crest
factor; and, on request, a level history.

Signal path per channel::

    x ──Z──────────────────────────────▶ LZeq, LZpeak
    └─C sections──▶ yC ─────────────────▶ LCeq, LCpeak
                    └─A-only sections──▶ yA ─▶ LAeq, LAE
                                          └─ yA² ─ F (125 ms), S (1 s) ─▶ LAF*, LAS*

Start-up (documented in ``docs/levels.md``)
    The frequency-weighting filters start in the steady state for a constant input equal
    to the first sample (no step transient from a DC offset). The F and S averagers start
    at zero, as a meter reset at the first sample; a reset averager only rises towards its
    steady reading, so it cannot produce a false maximum. Statistics that could still be
    falsified by start-up are taken only after a settling time, which the result reports
    (:attr:`LevelResult.excluded_s`): ``filter_settle_s`` (default 0.1 s) for LCpeak,
    LAFmax and LASmax; that plus 5 time constants (0.625 s for F, 5 s for S; a reset
    averager is then within 0.03 dB of its steady reading) for LAFmin, the LAF
    percentiles and LASmin. LZpeak has no filter and uses every sample. Leq and LAE
    integrate the whole recording. When the largest sample lies inside the settling time
    a note says so (a capture that starts on the event wants ``filter_settle_s=0``).

Time weighting on a block grid
    The exponential averagers are evaluated exactly, but not sample by sample in Python:
    the squared A-weighted signal is cut into blocks of 32 samples on a grid fixed to the
    start of the recording, the averager value at each block end follows from a one-pole
    recursion at the block rate, and the value at every sample is computed (from the
    block-start value and the block's samples) only in blocks whose bounds show they could
    hold a new maximum or minimum. Results equal a per-sample recursion to rounding.
    LAF percentiles use the F level sampled at the last sample of every
    ``percentile_interval_s`` (default 0.01 s, rounded to whole samples), counted in a
    histogram of 0.01 dB bins (memory does not grow with the recording). F and S level
    traces in the history are sampled the same way every ``trace_interval_s`` (default
    0.1 s).

This is a signal analysis of a recording, not a certified sound level meter measurement.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike
from scipy import signal

from piezo.errors import InputError
from piezo.weighting import (
    TIME_CONSTANTS_S,
    _check_block,
    _check_channels,
    _check_rate,
    sosfilt_inplace,
    time_weighting_coefficient,
    weighting_chain_sos,
)

__all__ = [
    "BLOCK_FRAMES",
    "FILTER_SETTLE_S",
    "HISTOGRAM_STEP_DB",
    "PERCENTILES",
    "SETTLE_TIME_CONSTANTS",
    "ChannelLevels",
    "LevelHistory",
    "LevelMeter",
    "LevelResult",
    "sound_levels",
]

#: Samples per block of the time-weighting grid.
BLOCK_FRAMES = 32
#: Default settling time of the frequency-weighting filters, s.
FILTER_SETTLE_S = 0.1
#: Time constants a reset averager is given before its minimum and percentiles count.
SETTLE_TIME_CONSTANTS = 5.0
#: Percentile levels reported: LAF5, LAF10, LAF50, LAF90, LAF95.
PERCENTILES = (5, 10, 50, 90, 95)
#: Histogram resolution and range (dB re the reference) for percentile levels.
HISTOGRAM_STEP_DB = 0.01
HISTOGRAM_LOW_DB = -300.0
HISTOGRAM_HIGH_DB = 300.0

_LEVEL_NAMES = (
    "LZeq", "LAeq", "LCeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LCpeak", "LZpeak",
    "LAE", "LAF5", "LAF10", "LAF50", "LAF90", "LAF95",
)  # fmt: skip


@dataclass(frozen=True)
class ChannelLevels:
    """Levels of one channel in dB re the reference; ``None`` where undefined (see notes)."""

    channel: int
    LZeq: float | None
    LAeq: float | None
    LCeq: float | None
    LAFmax: float | None
    LAFmin: float | None
    LASmax: float | None
    LASmin: float | None
    LCpeak: float | None
    LZpeak: float | None
    LAE: float | None
    LAF5: float | None
    LAF10: float | None
    LAF50: float | None
    LAF90: float | None
    LAF95: float | None
    #: Peak over RMS of the unweighted (Z) signal, as a ratio and in dB.
    crest_factor: float | None
    crest_factor_db: float | None
    notes: tuple[str, ...] = ()

    def levels(self) -> dict[str, float | None]:
        """The levels by their standard names (LZeq ... LAF95)."""
        return {name: getattr(self, name) for name in _LEVEL_NAMES}


@dataclass(frozen=True)
class LevelHistory:
    """Level history: Leq per interval and decimated F/S traces, shape (points, channels).

    Levels are dB re the reference; NaN where the signal was exactly zero.
    """

    interval_s: float
    interval_start_s: np.ndarray
    interval_duration_s: np.ndarray
    LZeq: np.ndarray
    LAeq: np.ndarray
    LCeq: np.ndarray
    trace_interval_s: float
    trace_time_s: np.ndarray
    LAF: np.ndarray
    LAS: np.ndarray


@dataclass(frozen=True)
class LevelResult:
    """Result of :class:`LevelMeter`.

    ``excluded_s`` maps each start-up-sensitive statistic to the time (s from the start
    of the recording) before which samples are not used for it.
    """

    sample_rate_hz: float
    reference: float
    frames: int
    duration_s: float
    channels: tuple[ChannelLevels, ...]
    percentile_interval_s: float
    excluded_s: dict[str, float] = field(default_factory=dict)
    history: LevelHistory | None = None


def _db(mean_square: float, reference: float) -> float | None:
    """10 lg(ms / ref^2), or None for a zero (or non-finite) mean square."""
    if not (mean_square > 0.0) or not math.isfinite(mean_square):
        return None
    return 10.0 * math.log10(mean_square / (reference * reference))


def _db_array(mean_square: np.ndarray, reference: float) -> np.ndarray:
    ms = np.asarray(mean_square, dtype=float)
    out = np.full(ms.shape, np.nan)
    ok = ms > 0
    out[ok] = 10.0 * np.log10(ms[ok] / (reference * reference))
    return out


def _absmax_into(a: np.ndarray, acc: np.ndarray) -> None:
    """acc = max(acc, max |a| along the frames axis) for a (channels, frames) array."""
    np.maximum(acc, np.maximum(a.max(axis=1), -a.min(axis=1)), out=acc)


class _Averager:
    """Block-grid exponential averager state for all channels (one time constant)."""

    def __init__(self, tau_s: float, fs: float, channels: int) -> None:
        L = BLOCK_FRAMES
        self.a = time_weighting_coefficient(tau_s, fs)
        self.b = 1.0 - self.a
        self.a_block = self.a**L
        j = np.arange(L)
        # Block-end value: Y_k = a^L Y_{k-1} + sum_i b a^(L-1-i) q_i.
        self.w_end = self.b * self.a ** (L - 1 - j)
        # Per-sample value inside a block: y_j = a^(j+1) Y_start + (T q)_j.
        self.a_start = self.a ** (j + 1)
        diff = j[:, None] - j[None, :]
        self.T = np.where(diff >= 0, self.b * self.a ** np.maximum(diff, 0), 0.0)
        self.up = self.a ** (-(L - 1))  # y_j <= Y_k a^-(L-1)
        self.block_sos = np.array([[1.0, 0.0, 0.0, 1.0, -self.a_block, 0.0]])
        self.last = np.zeros(channels)  # value at the last processed block end
        self.max = np.full(channels, -np.inf)
        self.min = np.full(channels, np.inf)

    def at_instants(
        self, qb: np.ndarray, start: np.ndarray, first: int, every: int
    ) -> tuple[np.ndarray, np.ndarray]:
        """Values at the frames n with (n + 1) % every == 0 inside blocks ``qb``.

        ``qb`` is (channels, blocks, L) starting at frame ``first``; ``start`` holds the
        value before each block. Returns (values (channels, m), frame indices (m,)).
        """
        L = qb.shape[2]
        lo = -(-(first + 1) // every) * every - 1  # first n >= first with (n+1) % every == 0
        frames = np.arange(lo, first + qb.shape[1] * L, every)
        if frames.size == 0:
            return np.zeros((qb.shape[0], 0)), frames
        blk, j = np.divmod(frames - first, L)
        rows = qb[:, blk, :]  # (channels, m, L)
        vals = start[:, blk] * self.a_start[j] + np.einsum("cml,ml->cm", rows, self.T[j])
        return vals, frames

    def samples(self, start: np.ndarray, q: np.ndarray) -> np.ndarray:
        """Exact per-sample values of blocks ``q`` (n, L) starting from values ``start``."""
        return start[:, None] * self.a_start[None, :] + q @ self.T.T


class LevelMeter:
    """Streaming sound level meter (IEC 61672-1:2013 quantities), any block sizes.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz (at least 8 kHz, for the weighting filters).
    channels
        Number of channels of the blocks.
    reference
        Reference value of the levels in the unit of the samples: 20e-6 (Pa, air),
        1e-6 (Pa, water) or 1.0 (V, for dB re 1 V).
    interval_s
        If given, keep a level history: Leq (Z, A, C) per interval of this length, and
        LAF/LAS traces. ``None`` (default): no history.
    trace_interval_s
        Sampling interval of the LAF/LAS traces in the history (rounded to whole
        32-sample blocks). Default 0.1 s.
    percentile_interval_s
        Sampling interval of the F level for the percentile levels (rounded to whole
        32-sample blocks). Default 0.01 s.
    filter_settle_s
        Settling time of the frequency-weighting filters, excluded from LCpeak, LAFmax,
        LASmax (and, plus 5 time constants, from LAFmin, LAF percentiles, LASmin).
        Default 0.1 s.

    Notes
    -----
    Memory does not grow with the recording length, except for the optional history
    (about 2 x 10 trace points per second and 3 values per interval, per channel).
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        reference: float = 20e-6,
        interval_s: float | None = None,
        trace_interval_s: float = 0.1,
        percentile_interval_s: float = 0.01,
        filter_settle_s: float = FILTER_SETTLE_S,
    ) -> None:
        fs = _check_rate(sample_rate_hz)
        self.sample_rate_hz = fs
        self.channels = _check_channels(channels)
        if not (reference > 0 and math.isfinite(reference)):
            raise InputError(f"reference must be a positive number, got {reference!r}")
        self.reference = float(reference)
        for name, value in (
            ("trace_interval_s", trace_interval_s),
            ("percentile_interval_s", percentile_interval_s),
        ):
            if not (value > 0 and math.isfinite(value)):
                raise InputError(f"{name} must be positive, got {value!r}")
        if not (filter_settle_s >= 0 and math.isfinite(filter_settle_s)):
            raise InputError(f"filter_settle_s must be >= 0, got {filter_settle_s!r}")
        self._pct_frames = max(1, round(percentile_interval_s * fs))
        self._trace_frames = max(1, round(trace_interval_s * fs))
        self.percentile_interval_s = self._pct_frames / fs
        self.trace_interval_s = self._trace_frames / fs
        self._interval_frames: int | None = None
        if interval_s is not None:
            if not (interval_s > 0 and math.isfinite(interval_s)):
                raise InputError(f"interval_s must be positive, got {interval_s!r}")
            self._interval_frames = max(1, round(interval_s * fs))
        self.interval_s = None if self._interval_frames is None else self._interval_frames / fs
        # Start indices (frames) of the start-up-sensitive statistics.
        settle = round(filter_settle_s * fs)
        self._start = {
            "LZpeak": 0,
            "LCpeak": settle,
            "LAFmax": settle,
            "LASmax": settle,
            "LAFmin": settle + round(SETTLE_TIME_CONSTANTS * TIME_CONSTANTS_S["F"] * fs),
            "LAF percentiles": settle + round(SETTLE_TIME_CONSTANTS * TIME_CONSTANTS_S["F"] * fs),
            "LASmin": settle + round(SETTLE_TIME_CONSTANTS * TIME_CONSTANTS_S["S"] * fs),
        }
        self._c_sos, self._a_sos = weighting_chain_sos(fs)
        ch = self.channels
        self._frames = 0
        self._zi_c: np.ndarray | None = None
        self._zi_a: np.ndarray | None = None
        self._work: np.ndarray | None = None
        self._sum = np.zeros((3, ch))  # Z, C, A sums of squares
        self._peak_z = np.zeros(ch)
        self._peak_z_head = np.zeros(ch)  # |x| max inside the filter settling time
        self._peak_z_after = np.zeros(ch)  # |x| max after it
        self._peak_c = np.zeros(ch)
        self._pending = np.zeros((ch, 0))  # A-squared samples not yet on the block grid
        self._blocks = 0  # blocks processed on the grid
        self._f = _Averager(TIME_CONSTANTS_S["F"], fs, ch)
        self._s = _Averager(TIME_CONSTANTS_S["S"], fs, ch)
        self._block_weights = np.stack(
            [self._f.w_end, self._s.w_end, np.ones(BLOCK_FRAMES)], axis=1
        )
        n_bins = round((HISTOGRAM_HIGH_DB - HISTOGRAM_LOW_DB) / HISTOGRAM_STEP_DB)
        self._hist = np.zeros((ch, n_bins), dtype=np.int64)
        self._hist_zero = np.zeros(ch, dtype=np.int64)  # F level exactly zero
        self._hist_clipped = np.zeros(ch, dtype=np.int64)  # outside the histogram range
        # History accumulators.
        self._int_sum = np.zeros((3, ch))
        self._int_frames = 0
        self._int_done: list[np.ndarray] = []  # each (3, ch) mean squares
        self._int_len: list[int] = []
        self._trace: list[np.ndarray] = []  # each (2, ch, n) F, S mean squares

    # ---------------------------------------------------------------- streaming input
    def update(self, block: ArrayLike) -> None:
        """Add a (frames, channels) block of calibrated samples (any frame count)."""
        x = _check_block(block, self.channels)
        n = x.shape[0]
        if n == 0:
            return
        xt = np.ascontiguousarray(x.T)  # (channels, frames); a view for one channel
        sum_z = np.einsum("ij,ij->i", xt, xt)
        if not np.all(np.isfinite(sum_z)):
            raise InputError("block contains NaN or infinite samples")
        if self._zi_c is None:
            # Steady state for a constant input equal to the first sample (no DC step).
            zi = signal.sosfilt_zi(self._c_sos)  # (sections, 2)
            self._zi_c = np.ascontiguousarray(zi[None, :, :] * xt[:, 0][:, None, None])
            # C blocks DC exactly (zeros at z = 1), so the A-only part starts at rest.
            self._zi_a = np.zeros((self.channels, len(self._a_sos), 2))
        # Work buffers are reused between blocks of the same size: fresh multi-megabyte
        # arrays per block cost page faults comparable to the filtering itself.
        if self._work is None or self._work.shape[2] != n:
            self._work = np.empty((2, self.channels, n))
        yc, ya = self._work[0], self._work[1]
        np.copyto(yc, xt)
        sosfilt_inplace(self._c_sos, yc, self._zi_c)
        np.copyto(ya, yc)
        sosfilt_inplace(self._a_sos, ya, self._zi_a)
        qa = np.multiply(ya, ya, out=ya)
        self._sum[0] += sum_z
        self._sum[1] += np.einsum("ij,ij->i", yc, yc)
        self._sum[2] += qa.sum(axis=1)
        head = min(max(self._start["LCpeak"] - self._frames, 0), n)
        if head:
            _absmax_into(xt[:, :head], self._peak_z_head)
        if head < n:
            _absmax_into(xt[:, head:], self._peak_z_after)
        np.maximum(self._peak_z_head, self._peak_z_after, out=self._peak_z)
        if head < n:
            _absmax_into(yc[:, head:], self._peak_c)
        if self._interval_frames is not None:
            self._history_update(xt, yc, qa)
        self._frames += n
        self._time_weighting(qa)

    def _history_update(self, xt: np.ndarray, yc: np.ndarray, qa: np.ndarray) -> None:
        assert self._interval_frames is not None
        n = xt.shape[1]
        q = self._interval_frames
        pos = 0
        while pos < n:
            take = min(n - pos, q - self._int_frames)
            sl = slice(pos, pos + take)
            self._int_sum[0] += np.einsum("ij,ij->i", xt[:, sl], xt[:, sl])
            self._int_sum[1] += np.einsum("ij,ij->i", yc[:, sl], yc[:, sl])
            self._int_sum[2] += qa[:, sl].sum(axis=1)
            self._int_frames += take
            pos += take
            if self._int_frames == q:
                self._int_done.append(self._int_sum / q)
                self._int_len.append(q)
                self._int_sum = np.zeros_like(self._int_sum)
                self._int_frames = 0

    def _time_weighting(self, qa: np.ndarray) -> None:
        """Feed squared A-weighted samples to the block grid (whole blocks only)."""
        L = BLOCK_FRAMES
        p = self._pending.shape[1]
        if p:
            # Complete the pending block first; the rest is then aligned to the grid
            # and is used in place (no copy of the whole chunk).
            take = min(L - p, qa.shape[1])
            self._pending = np.concatenate([self._pending, qa[:, :take]], axis=1)
            qa = qa[:, take:]
            if self._pending.shape[1] < L:
                return
            head = self._pending
            self._pending = np.zeros((self.channels, 0))
            self._grid_blocks(head)
        nb = qa.shape[1] // L
        if nb:
            self._grid_blocks(qa[:, : nb * L])
        self._pending = qa[:, nb * L :].copy()

    def _grid_blocks(self, q: np.ndarray) -> None:
        """Run the averagers over whole grid blocks ``q`` (channels, nb * L)."""
        L = BLOCK_FRAMES
        nb = q.shape[1] // L
        qb = q.reshape(self.channels, nb, L)
        first = self._blocks * L  # frame index of the first sample of these blocks
        self._blocks += nb
        u = qb @ self._block_weights  # (channels, nb, 3): F input, S input, block sum
        qsum = u[:, :, 2]
        starts = []
        for av, col, max_key, min_key in (
            (self._f, 0, "LAFmax", "LAFmin"),
            (self._s, 1, "LASmax", "LASmin"),
        ):
            # Block-end values: Y_k = a^L Y_(k-1) + U_k, a one-pole section at block rate.
            y = np.ascontiguousarray(u[:, :, col])
            zi = np.zeros((self.channels, 1, 2))
            zi[:, 0, 0] = av.a_block * av.last
            sosfilt_inplace(av.block_sos, y, zi)
            start = np.empty_like(y)
            start[:, 0] = av.last
            start[:, 1:] = y[:, :-1]
            av.last = y[:, -1].copy()
            av.max = self._extreme(av, qb, y, start, qsum, first, self._start[max_key], True)
            av.min = self._extreme(av, qb, y, start, qsum, first, self._start[min_key], False)
            starts.append(start)
        self._percentiles(self._f.at_instants(qb, starts[0], first, self._pct_frames))
        if self._interval_frames is not None:
            f_tr = self._f.at_instants(qb, starts[0], first, self._trace_frames)
            s_tr = self._s.at_instants(qb, starts[1], first, self._trace_frames)
            if f_tr[1].size:
                self._trace.append(np.stack([f_tr[0], s_tr[0]]))

    @staticmethod
    def _extreme(
        av: _Averager,
        qb: np.ndarray,
        y: np.ndarray,
        start: np.ndarray,
        qsum: np.ndarray,
        first: int,
        first_ok: int,
        is_max: bool,
    ) -> np.ndarray:
        """Exact running max (or min) of the averager over samples from ``first_ok`` on.

        Block-end values are exact samples; inside a block the averager is bounded by
        ``min(Y_start + b sum(q), Y_end a^-(L-1))`` from above and by
        ``max(Y_start a^L, Y_end - b sum(q))`` from below. Only blocks whose bound passes
        the best block-end value are evaluated sample by sample.
        """
        L = BLOCK_FRAMES
        current = av.max if is_max else av.min
        k_ok = max(0, (first_ok - first) // L)  # first block whose end is eligible
        if k_ok >= y.shape[1]:
            return current
        ys, ss, qs = y[:, k_ok:], start[:, k_ok:], qsum[:, k_ok:]
        if is_max:
            best = np.maximum(current, ys.max(axis=1))
            cand = np.minimum(ss + av.b * qs, ys * av.up) >= best[:, None]
        else:
            best = np.minimum(current, ys.min(axis=1))
            cand = np.maximum(ss * av.a_block, ys - av.b * qs) <= best[:, None]
        ci, bi = np.nonzero(cand)
        if ci.size:
            vals = av.samples(ss[ci, bi], qb[ci, k_ok + bi])  # (candidates, L)
            frame0 = first + (k_ok + bi) * L
            if np.any(frame0 < first_ok):  # the block holding first_ok is partly early
                early = frame0[:, None] + np.arange(L)[None, :] < first_ok
                vals = np.where(early, -np.inf if is_max else np.inf, vals)
            if is_max:
                np.maximum.at(best, ci, vals.max(axis=1))
            else:
                np.minimum.at(best, ci, vals.min(axis=1))
        return best

    def _percentiles(self, sampled: tuple[np.ndarray, np.ndarray]) -> None:
        values, frames = sampled
        pick = frames >= self._start["LAF percentiles"]
        if np.any(pick):
            self._bin(values[:, pick], self._hist, self._hist_zero, self._hist_clipped)

    def _bin(
        self, ms: np.ndarray, hist: np.ndarray, zero_count: np.ndarray, clipped: np.ndarray
    ) -> None:
        """Count F mean squares ``ms`` (channels, m) into 0.01 dB level bins."""
        n_bins = hist.shape[1]
        for c in range(self.channels):
            v = ms[c]
            zero = v <= 0
            zero_count[c] += int(np.count_nonzero(zero))
            level = 10.0 * np.log10(v[~zero] / (self.reference * self.reference))
            idx = np.floor((level - HISTOGRAM_LOW_DB) / HISTOGRAM_STEP_DB).astype(np.int64)
            clipped[c] += int(np.count_nonzero((idx < 0) | (idx >= n_bins)))
            np.add.at(hist[c], np.clip(idx, 0, n_bins - 1), 1)

    # ---------------------------------------------------------------------- result
    def result(self) -> LevelResult:
        """Levels of everything given so far (the meter can go on being updated)."""
        fs = self.sample_rate_hz
        ref = self.reference
        n = self._frames
        duration_s = n / fs
        # Samples not yet on the block grid: evaluate the averagers on them exactly
        # (without changing the meter's state).
        m = self._pending.shape[1]
        first = self._blocks * BLOCK_FRAMES
        q = np.zeros((self.channels, 1, BLOCK_FRAMES))
        q[:, 0, :m] = self._pending
        ext = {}
        for name, av, key_max, key_min in (
            ("F", self._f, "LAFmax", "LAFmin"),
            ("S", self._s, "LASmax", "LASmin"),
        ):
            mx, mn = av.max.copy(), av.min.copy()
            if m:
                frames = first + np.arange(m)
                vals = av.samples(av.last, q[:, 0, :])[:, :m]
                okx = frames >= self._start[key_max]
                okn = frames >= self._start[key_min]
                if np.any(okx):
                    mx = np.maximum(mx, vals[:, okx].max(axis=1))
                if np.any(okn):
                    mn = np.minimum(mn, vals[:, okn].min(axis=1))
            ext[name] = (mx, mn)

        def tail(av: _Averager, every: int) -> tuple[np.ndarray, np.ndarray]:
            vals, frames = av.at_instants(q, av.last[:, None], first, every)
            keep = frames < first + m
            return vals[:, keep], frames[keep]

        tail_pct = tail(self._f, self._pct_frames)
        tail_trace = None
        if self._interval_frames is not None:
            tail_trace = np.stack(
                [tail(self._f, self._trace_frames)[0], tail(self._s, self._trace_frames)[0]]
            )
        channels = []
        for c in range(self.channels):
            channels.append(self._channel_result(c, n, ext, tail_pct))
        excluded = {k: v / fs for k, v in self._start.items()}
        return LevelResult(
            sample_rate_hz=fs,
            reference=ref,
            frames=n,
            duration_s=duration_s,
            channels=tuple(channels),
            percentile_interval_s=self.percentile_interval_s,
            excluded_s=excluded,
            history=None if tail_trace is None else self._history_result(tail_trace),
        )

    def _channel_result(
        self, c: int, n: int, ext: dict, tail_pct: tuple[np.ndarray, np.ndarray]
    ) -> ChannelLevels:
        fs = self.sample_rate_hz
        ref = self.reference
        notes: list[str] = []
        if n == 0:
            return ChannelLevels(c, *([None] * (len(_LEVEL_NAMES) + 2)), notes=("no samples",))
        if self._sum[0, c] == 0.0:
            return ChannelLevels(
                c,
                *([None] * (len(_LEVEL_NAMES) + 2)),
                notes=("channel is all zeros (digital silence): levels are undefined",),
            )
        ms = self._sum[:, c] / n
        lzeq, lceq, laeq = (_db(v, ref) for v in ms)
        lae = _db(self._sum[2, c] / fs, ref)  # exposure re ref^2 * 1 s
        lzpeak = _db(self._peak_z[c] ** 2, ref)
        values: dict[str, float | None] = {
            "LZeq": lzeq,
            "LAeq": laeq,
            "LCeq": lceq,
            "LZpeak": lzpeak,
            "LAE": lae,
        }

        def after_start(key: str, value: float | None, what: str) -> float | None:
            if n <= self._start[key]:
                notes.append(
                    f"{what}: recording shorter than the {self._start[key] / fs:g} s "
                    "start-up time excluded from it"
                )
                return None
            if value is None:
                notes.append(f"{what}: the weighted signal is exactly zero")
            return value

        values["LCpeak"] = after_start("LCpeak", _db(self._peak_c[c] ** 2, ref), "LCpeak")
        if n > self._start["LCpeak"] and self._peak_z_head[c] > self._peak_z_after[c]:
            notes.append(
                f"the largest sample lies in the first {self._start['LCpeak'] / fs:g} s, "
                "which is excluded from LCpeak, LAFmax and LASmax as filter start-up; for "
                "a capture that starts on the event set the settling time to 0"
            )
        for name, key_max, key_min in (("F", "LAFmax", "LAFmin"), ("S", "LASmax", "LASmin")):
            mx, mn = ext[name]
            values[key_max] = after_start(key_max, _db(mx[c], ref), key_max)
            values[key_min] = after_start(key_min, _db(mn[c], ref), key_min)
        pct = self._percentile_levels(c, tail_pct)
        if pct is None:
            notes.append(
                "LAF percentiles: no F level sample after the "
                f"{self._start['LAF percentiles'] / fs:g} s start-up time"
            )
        for p in PERCENTILES:
            values[f"LAF{p}"] = None if pct is None else pct[p]
        if pct is not None and any(pct[p] is None for p in PERCENTILES):
            notes.append("LAF percentiles: some fall on zero or out-of-range F levels")
        if self._hist_clipped[c]:
            notes.append(
                f"{self._hist_clipped[c]} F level samples outside "
                f"{HISTOGRAM_LOW_DB:g}..{HISTOGRAM_HIGH_DB:g} dB were clamped for percentiles"
            )
        crest = None
        crest_db = None
        if ms[0] > 0:
            crest = float(self._peak_z[c] / math.sqrt(ms[0]))
            crest_db = 20.0 * math.log10(crest) if crest > 0 else None
        return ChannelLevels(
            c,
            **{k: values[k] for k in _LEVEL_NAMES},
            crest_factor=crest,
            crest_factor_db=crest_db,
            notes=tuple(notes),
        )

    def _percentile_levels(
        self, c: int, tail_pct: tuple[np.ndarray, np.ndarray]
    ) -> dict[int, float | None] | None:
        hist = self._hist[c : c + 1].copy()
        zero_count = self._hist_zero[c : c + 1].copy()
        clipped_count = self._hist_clipped[c : c + 1].copy()
        values, frames = tail_pct
        pick = frames >= self._start["LAF percentiles"]
        if np.any(pick):
            self._bin(values[c : c + 1, pick], hist, zero_count, clipped_count)
        hist = hist[0]
        zero = int(zero_count[0])
        total = int(hist.sum()) + zero
        if total == 0:
            return None
        out: dict[int, float | None] = {}
        # Counts from the loudest bin down; LAFn is the lowest level among the loudest n %.
        from_top = np.cumsum(hist[::-1])
        n_bins = hist.size
        for p in PERCENTILES:
            k = max(1, math.ceil(p / 100.0 * total))
            if k > from_top[-1]:
                out[p] = None  # falls on F levels of exactly zero
                continue
            i = int(np.searchsorted(from_top, k))
            b = n_bins - 1 - i
            clipped = clipped_count[0] and (b == 0 or b == n_bins - 1)
            out[p] = None if clipped else HISTOGRAM_LOW_DB + (b + 0.5) * HISTOGRAM_STEP_DB
        return out

    def _history_result(self, tail_trace: np.ndarray) -> LevelHistory:
        fs = self.sample_rate_hz
        ref = self.reference
        done = list(self._int_done)
        lengths = list(self._int_len)
        if self._int_frames:
            done.append(self._int_sum / self._int_frames)
            lengths.append(self._int_frames)
        ms = np.stack(done) if done else np.zeros((0, 3, self.channels))
        lengths_arr = np.asarray(lengths, dtype=float)
        starts = np.concatenate([[0.0], np.cumsum(lengths_arr)[:-1]]) / fs if lengths else []
        traces = np.concatenate([*self._trace, tail_trace], axis=2)
        t = (np.arange(1, traces.shape[2] + 1) * self._trace_frames - 1) / fs
        return LevelHistory(
            interval_s=float(self.interval_s),
            interval_start_s=np.asarray(starts, dtype=float),
            interval_duration_s=lengths_arr / fs,
            LZeq=_db_array(ms[:, 0, :], ref),
            LCeq=_db_array(ms[:, 1, :], ref),
            LAeq=_db_array(ms[:, 2, :], ref),
            trace_interval_s=self.trace_interval_s,
            trace_time_s=t,
            LAF=_db_array(traces[0].T, ref),
            LAS=_db_array(traces[1].T, ref),
        )


def sound_levels(
    samples: ArrayLike,
    sample_rate_hz: float,
    *,
    reference: float = 20e-6,
    interval_s: float | None = None,
    trace_interval_s: float = 0.1,
    percentile_interval_s: float = 0.01,
    filter_settle_s: float = FILTER_SETTLE_S,
) -> LevelResult:
    """Levels of a whole array: a thin wrapper over :class:`LevelMeter`.

    Parameters
    ----------
    samples
        Calibrated samples, shape (frames,) or (frames, channels), in Pa (or V).
    sample_rate_hz
        Sample rate in Hz.
    reference, interval_s, trace_interval_s, percentile_interval_s, filter_settle_s
        As for :class:`LevelMeter`.
    """
    x = np.asarray(samples, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    if x.ndim != 2:
        raise InputError(f"samples must be 1-D or (frames, channels), got shape {x.shape}")
    meter = LevelMeter(
        sample_rate_hz,
        x.shape[1],
        reference=reference,
        interval_s=interval_s,
        trace_interval_s=trace_interval_s,
        percentile_interval_s=percentile_interval_s,
        filter_settle_s=filter_settle_s,
    )
    meter.update(x)
    return meter.result()
