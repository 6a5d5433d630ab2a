"""Sound levels of a recording, streamed: the level set a sound level meter reports.

:class:`LevelMeter` consumes calibrated blocks (Pa, or V for an uncalibrated chain) and
gives, per channel, the levels defined in IEC 61672-1:2013 (definitions in
``docs/levels.md``): equivalent continuous levels LZeq, LAeq, LCeq; maximum and minimum
time-weighted levels LAFmax, LAFmin, LASmax, LASmin; peak levels LCpeak, LZpeak; the
sound exposure level LAE; the F and S time-weighted C and Z levels LCFmax, LCFmin,
LCSmax, LCSmin, LZFmax, LZFmin, LZSmax, LZSmin; percentile levels LAF5, LAF10, LAF50,
LAF90, LAF95 and LAS5 … LAS95; the crest factor; and, on request, a level history (Leq,
LAFmax and LCpeak per interval, LAF and LAS traces).

Signal path per channel::

    x ──Z──────────────────────────────▶ LZeq, LZpeak
    │                                    └ x² ─ F, S ─▶ LZF*, LZS*
    └─C sections──▶ yC ─────────────────▶ LCeq, LCpeak
                    │                    └ yC² ─ F, S ─▶ LCF*, LCS*
                    └─A-only sections──▶ yA ─▶ LAeq, LAE
                                          └─ yA² ─ F (125 ms), S (1 s) ─▶ LAF*, LAS*

Start-up (documented in ``docs/levels.md``)
    The frequency-weighting filters start in the steady state for a constant input equal
    to the first sample (no step transient from a DC offset). The F and S averagers start
    at zero, as a meter reset at the first sample; a reset averager only rises towards its
    steady reading, so it cannot produce a false maximum. Statistics that could still be
    falsified by start-up are taken only after a settling time, which the result reports
    (:attr:`LevelResult.excluded_s`): ``filter_settle_s`` (default 0.1 s) for LCpeak and
    the F and S maxima of every weighting (and the per-interval LAFmax and LCpeak of the
    history); that plus 5 time constants (0.625 s for F, 5 s for S; a reset averager is
    then within 0.03 dB of its steady reading) for the F minima and the LAF percentiles,
    and the S minima and the LAS percentiles. LZpeak has no filter and uses every
    sample. Leq and LAE
    integrate the whole recording. When the largest sample lies inside the settling time
    a note says so (a capture that starts on the event wants ``filter_settle_s=0``).

Computation
    One compiled pass per block (:func:`piezo._kernels.filters.level_meter_block`, numba) does
    everything per sample: the C and A weighting cascades with carried state, sums of
    squares, peaks, and the F and S exponential averagers of the A-, C- and Z-weighted
    squares evaluated at every sample, so their maxima and minima are exact sample
    values. LAF and LAS percentiles use the A-F and A-S levels sampled at the last sample
    of every ``percentile_interval_s`` (default 0.01 s, rounded to whole samples),
    counted in histograms of 0.001 dB bins (memory does not grow with the recording) and
    interpolated within the bin. F and S level traces in
    the history are sampled the same way every ``trace_interval_s`` (default 0.1 s).

This is a signal analysis of a recording, not a certified sound level meter measurement.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from piezo._kernels import filters as kern
from piezo.errors import InputError
from piezo.levels.weighting import (
    TIME_CONSTANTS_S,
    _check_block,
    _check_channels,
    _check_rate,
    time_weighting_coefficient,
    weighting_chain_sos,
    weighting_chain_zi,
)

__all__ = [
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

#: Default settling time of the frequency-weighting filters, s.
FILTER_SETTLE_S = 0.1
#: Time constants a reset averager is given before its minimum and percentiles count.
SETTLE_TIME_CONSTANTS = 5.0
#: Percentile levels reported: LAF5, LAF10, LAF50, LAF90, LAF95 (and LAS5 … LAS95).
PERCENTILES = (5, 10, 50, 90, 95)
#: Time weightings whose A-weighted level has percentiles.
PERCENTILE_WEIGHTINGS = ("LAF", "LAS")
#: Histogram resolution and range (dB re the reference) for percentile levels. 0.001 dB
#: resolves the ±0.003 dB ripple of the F level of a steady tone; 600 000 bins are
#: 4.8 MB per channel, whatever the length of the recording.
HISTOGRAM_STEP_DB = 0.001
HISTOGRAM_LOW_DB = -300.0
HISTOGRAM_HIGH_DB = 300.0

_LEVEL_NAMES = (
    "LZeq", "LAeq", "LCeq", "LAFmax", "LAFmin", "LASmax", "LASmin",
    "LCFmax", "LCFmin", "LCSmax", "LCSmin", "LZFmax", "LZFmin", "LZSmax", "LZSmin",
    "LCpeak", "LZpeak", "LAE", "LAF5", "LAF10", "LAF50", "LAF90", "LAF95",
    "LAS5", "LAS10", "LAS50", "LAS90", "LAS95",
)  # fmt: skip
#: The F and S maxima and minima: name, state row, and the statistic whose start-up
#: time applies (maxima: the filter settling time; minima: plus 5 time constants).
_EXTREMES = (
    ("LAFmax", kern.ST_F_MAX), ("LAFmin", kern.ST_F_MIN),
    ("LASmax", kern.ST_S_MAX), ("LASmin", kern.ST_S_MIN),
    ("LCFmax", kern.ST_CF_MAX), ("LCFmin", kern.ST_CF_MIN),
    ("LCSmax", kern.ST_CS_MAX), ("LCSmin", kern.ST_CS_MIN),
    ("LZFmax", kern.ST_ZF_MAX), ("LZFmin", kern.ST_ZF_MIN),
    ("LZSmax", kern.ST_ZS_MAX), ("LZSmin", kern.ST_ZS_MIN),
)  # fmt: skip


@dataclass(frozen=True)
class ChannelLevels:
    """Levels of one channel in dB re the reference; ``None`` where undefined (see notes).

    Examples
    --------
    A 1 kHz tone of 1 Pa RMS reads 93.98 dB re 20 uPa (20 lg(1 / 20e-6)) in every weighting,
    since A and C are 0 dB at 1 kHz; its peak is 3.01 dB higher (crest factor sqrt(2)):

    >>> t = np.arange(48000) / 48000
    >>> tone = np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    >>> ch = sound_levels(tone, 48000).channels[0]
    >>> {name: round(ch.levels()[name], 2) for name in ("LZeq", "LAeq", "LCeq", "LZpeak")}
    {'LZeq': 93.98, 'LAeq': 93.98, 'LCeq': 93.98, 'LZpeak': 96.99}
    >>> round(ch.crest_factor_db, 2), ch.LASmin  # 1 s is too short for LASmin
    (3.01, None)
    >>> ch.notes  # doctest: +NORMALIZE_WHITESPACE
    ('LASmin, LCSmin, LZSmin, LAS percentiles: recording not longer than the 5.1 s
      start-up time excluded from them',)
    """

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
    LCFmax: float | None
    LCFmin: float | None
    LCSmax: float | None
    LCSmin: float | None
    LZFmax: float | None
    LZFmin: float | None
    LZSmax: float | None
    LZSmin: float | None
    LAS5: float | None
    LAS10: float | None
    LAS50: float | None
    LAS90: float | None
    LAS95: float | None
    #: Peak over RMS of the unweighted (Z) signal, as a ratio and in dB.
    crest_factor: float | None
    crest_factor_db: float | None
    notes: tuple[str, ...] = ()
    #: The chosen percentiles (``LevelMeter(percentiles=...)``) by name, LAF then LAS:
    #: e.g. "LAF1", "LAF99", "LAS1", "LAS99".
    percentile_levels: dict[str, float | None] = field(default_factory=dict)

    def levels(self) -> dict[str, float | None]:
        """The levels by their standard names (LZeq ... LAS95)."""
        return {name: getattr(self, name) for name in _LEVEL_NAMES}


@dataclass(frozen=True)
class LevelHistory:
    """Level history: Leq, LAFmax and LCpeak per interval and decimated F/S traces,
    shape (points, channels).

    Levels are dB re the reference; NaN where the signal was exactly zero, and for
    LAFmax and LCpeak in an interval that lies wholly inside the filter settling time
    (the maxima count from the same frame as the whole recording's, so the largest
    interval LAFmax is the recording's LAFmax).

    Examples
    --------
    >>> t = np.arange(48000) / 48000
    >>> tone = np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)  # 1 Pa RMS, 93.98 dB
    >>> history = sound_levels(tone, 48000, interval_s=0.25).history
    >>> history.interval_start_s.tolist()
    [0.0, 0.25, 0.5, 0.75]
    >>> history.LAeq.round(1)[:, 0].tolist()
    [94.0, 94.0, 94.0, 94.0]
    >>> history.LAF.shape, history.trace_interval_s  # (points, channels)
    ((10, 1), 0.1)
    """

    interval_s: float
    interval_start_s: np.ndarray
    interval_duration_s: np.ndarray
    LZeq: np.ndarray
    LAeq: np.ndarray
    LCeq: np.ndarray
    LAFmax: np.ndarray
    LCpeak: np.ndarray
    trace_interval_s: float
    trace_time_s: np.ndarray
    LAF: np.ndarray
    LAS: np.ndarray


@dataclass(frozen=True)
class LevelResult:
    """Result of :class:`LevelMeter`.

    ``excluded_s`` maps each start-up-sensitive statistic to the time (s from the start
    of the recording) before which samples are not used for it.

    Examples
    --------
    >>> result = sound_levels(np.full(24000, 0.02), 48000)
    >>> result.frames, result.duration_s, result.reference
    (24000, 0.5, 2e-05)
    >>> result.excluded_s["LAFmax"], result.excluded_s["LAFmin"]  # 0.1 s; + 5 x 125 ms
    (0.1, 0.725)
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
    """10 lg(ms / ref^2) elementwise, NaN where ms <= 0; no temporaries (long histories)."""
    ms = np.asarray(mean_square, dtype=float)
    out = np.full(ms.shape, np.nan)
    ok = ms > 0
    np.divide(ms, reference * reference, out=out, where=ok)
    np.log10(out, out=out, where=ok)
    np.multiply(out, 10.0, out=out, where=ok)
    return out


class _Growing:
    """Rows of shape ``row_shape`` appended in bulk, stored in an array that doubles."""

    def __init__(self, row_shape: tuple[int, ...]) -> None:
        self._data = np.zeros((16, *row_shape))
        self._n = 0

    def extend(self, rows: np.ndarray) -> None:
        m = rows.shape[0]
        if self._n + m > self._data.shape[0]:
            grown = np.zeros((max(2 * self._data.shape[0], self._n + m), *self._data.shape[1:]))
            grown[: self._n] = self._data[: self._n]
            self._data = grown
        self._data[self._n : self._n + m] = rows
        self._n += m

    def view(self) -> np.ndarray:
        return self._data[: self._n]

    def __len__(self) -> int:
        return self._n


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
        samples). Default 0.1 s.
    percentile_interval_s
        Sampling interval of the F level for the percentile levels (rounded to whole
        samples). Default 0.01 s.
    filter_settle_s
        Settling time of the frequency-weighting filters, excluded from LCpeak and the F
        and S maxima (and, plus 5 time constants, from the F and S minima and the
        percentiles). Default 0.1 s.
    percentiles
        Further percentiles to report, in per cent (0 < p < 100), e.g. (1, 99) gives
        LAF1, LAF99, LAS1 and LAS99 in :attr:`ChannelLevels.percentile_levels`;
        LAF5 … LAF95 and LAS5 … LAS95 are always given.

    Notes
    -----
    Memory does not grow with the recording length, except for the optional history
    (about 2 x 10 trace points per second and 5 values per interval, per channel). The
    two percentile histograms take 4.8 MB each per channel.

    Examples
    --------
    Two channels, 1 Pa and 0.1 Pa RMS at 1 kHz, fed in uneven blocks: 20 dB apart.

    >>> t = np.arange(48000) / 48000
    >>> tone = np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    >>> meter = LevelMeter(48000, 2)
    >>> for block in np.array_split(np.column_stack([tone, 0.1 * tone]), 7):
    ...     meter.update(block)
    >>> [round(ch.LAeq, 2) for ch in meter.result().channels]
    [93.98, 73.98]
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
        percentiles: Sequence[float] = (),
    ) -> None:
        fs = _check_rate(sample_rate_hz)
        self.percentiles = tuple(float(p) for p in percentiles)
        for p in self.percentiles:
            if not (0.0 < p < 100.0):
                raise InputError(f"percentiles must lie between 0 and 100, got {p!r}")
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
        f_min = settle + round(SETTLE_TIME_CONSTANTS * TIME_CONSTANTS_S["F"] * fs)
        s_min = settle + round(SETTLE_TIME_CONSTANTS * TIME_CONSTANTS_S["S"] * fs)
        self._start = {
            "LZpeak": 0,
            "LCpeak": settle,
            **{
                name: settle if name.endswith("max") else (f_min if name[2] == "F" else s_min)
                for name, _ in _EXTREMES
            },
            "LAF percentiles": f_min,
            "LAS percentiles": s_min,
        }
        self._c_sos, self._a_sos = weighting_chain_sos(fs)
        ch = self.channels
        self._frames = 0
        self._zi_c: np.ndarray | None = None
        self._zi_a: np.ndarray | None = None
        self._a_f = time_weighting_coefficient(TIME_CONSTANTS_S["F"], fs)
        self._a_s = time_weighting_coefficient(TIME_CONSTANTS_S["S"], fs)
        self._starts = np.array(
            [
                self._start["LCpeak"],
                self._start["LAFmin"],
                self._start["LAF percentiles"],
                self._start["LASmin"],
            ],
            dtype=np.int64,
        )
        self._periods = np.array(
            [self._pct_frames, self._trace_frames, self._interval_frames or 0], dtype=np.int64
        )
        self._state = kern.new_level_state(ch)  # sums, peaks, averagers (rows kern.ST_*)
        n_bins = round((HISTOGRAM_HIGH_DB - HISTOGRAM_LOW_DB) / HISTOGRAM_STEP_DB)
        # Histograms of the A-F and A-S levels ("LAF", "LAS"), and for each, row 0: level
        # of exactly zero; row 1: outside the histogram range.
        self._hist = {w: np.zeros((ch, n_bins), dtype=np.int64) for w in PERCENTILE_WEIGHTINGS}
        self._hist_other = {w: np.zeros((2, ch), dtype=np.int64) for w in PERCENTILE_WEIGHTINGS}
        # Output buffers of the kernel, reused between blocks.
        self._trace_buf = np.zeros((2, ch, 1))
        self._int_buf = np.zeros((1, kern.INTERVAL_ROWS, ch))
        # History, in arrays that double when full: mean squares (Z, C, A) of completed
        # intervals, their largest A-F mean square and C peak (squared), and F, S mean
        # squares at the trace instants.
        self._int_store = _Growing((3, ch))
        self._int_max_store = _Growing((2, ch))
        self._trace_store = _Growing((2, ch))
        self._scratch = np.empty(ch)  # the compiled pass's working space

    # ---------------------------------------------------------------- streaming input
    def update(self, block: ArrayLike) -> None:
        """Add a (frames, channels) block of calibrated samples (any frame count)."""
        x = np.ascontiguousarray(_check_block(block, self.channels))
        n = x.shape[0]
        if n == 0:
            return
        first_block = self._zi_c is None
        if first_block:
            # Steady state for a constant input equal to the first sample (no DC step).
            zi = weighting_chain_zi(self.sample_rate_hz)  # (sections, 2)
            self._zi_c = zi[:, :, None] * x[0][None, None, :]
            # C blocks DC exactly (zeros at z = 1), so the A-only part starts at rest.
            self._zi_a = np.zeros((len(self._a_sos), 2, self.channels))
        trace_cap = n // self._trace_frames + 1
        if self._trace_buf.shape[2] < trace_cap:
            self._trace_buf = np.zeros((2, self.channels, trace_cap))
        q = self._interval_frames
        int_cap = 1 if q is None else n // q + 1
        if self._int_buf.shape[0] < int_cap:
            self._int_buf = np.zeros((int_cap, kern.INTERVAL_ROWS, self.channels))
        n_trace, n_int = kern.level_meter_block(
            x,
            self._c_sos,
            self._a_sos,
            self._zi_c,
            self._zi_a,
            self._state,
            self._hist["LAF"],
            self._hist_other["LAF"],
            self._hist["LAS"],
            self._hist_other["LAS"],
            self._frames,
            self._starts,
            self._periods,
            self._a_f,
            self._a_s,
            self.reference * self.reference,
            HISTOGRAM_LOW_DB,
            HISTOGRAM_STEP_DB,
            self._trace_buf,
            self._int_buf,
            self._scratch,
        )
        if n_trace < 0:  # nothing was updated
            if first_block:
                self._zi_c = self._zi_a = None
            raise InputError("block contains NaN or infinite samples")
        self._frames += n
        if q is not None:
            self._trace_store.extend(np.moveaxis(self._trace_buf[:, :, :n_trace], 2, 0))
            self._int_store.extend(self._int_buf[:n_int, :3] / q)
            # -inf: an interval wholly inside the settling time (0 reads NaN, as silence).
            maxima = np.maximum(self._int_buf[:n_int, 3:], 0.0)
            maxima[:, 1] **= 2  # C peak as a square, like the mean squares
            self._int_max_store.extend(maxima)

    # ---------------------------------------------------------------------- result
    def result(self) -> LevelResult:
        """Levels of everything given so far (the meter can go on being updated)."""
        fs = self.sample_rate_hz
        n = self._frames
        channels = tuple(self._channel_result(c, n) for c in range(self.channels))
        return LevelResult(
            sample_rate_hz=fs,
            reference=self.reference,
            frames=n,
            duration_s=n / fs,
            channels=channels,
            percentile_interval_s=self.percentile_interval_s,
            excluded_s={k: v / fs for k, v in self._start.items()},
            history=None if self._interval_frames is None else self._history_result(),
        )

    def _channel_result(self, c: int, n: int) -> ChannelLevels:
        fs = self.sample_rate_hz
        ref = self.reference
        notes: list[str] = []
        undefined: dict[str, Any] = {
            **dict.fromkeys(_LEVEL_NAMES),
            "crest_factor": None,
            "crest_factor_db": None,
            "percentile_levels": dict.fromkeys(
                f"{w}{p:g}" for w in PERCENTILE_WEIGHTINGS for p in self.percentiles
            ),
        }
        if n == 0:
            return ChannelLevels(c, **undefined, notes=("no samples",))
        st = self._state[:, c]
        if st[kern.ST_SUM_Z] == 0.0:
            return ChannelLevels(
                c,
                **undefined,
                notes=("channel is all zeros (digital silence): levels are undefined",),
            )
        ms = st[[kern.ST_SUM_Z, kern.ST_SUM_C, kern.ST_SUM_A]] / n
        lzeq, lceq, laeq = (_db(v, ref) for v in ms)
        lae = _db(st[kern.ST_SUM_A] / fs, ref)  # exposure re ref^2 * 1 s
        peak_z = max(st[kern.ST_PEAK_Z_HEAD], st[kern.ST_PEAK_Z_AFTER])
        lzpeak = _db(peak_z**2, ref)
        values: dict[str, float | None] = {
            "LZeq": lzeq,
            "LAeq": laeq,
            "LCeq": lceq,
            "LZpeak": lzpeak,
            "LAE": lae,
        }

        too_short: dict[float, list[str]] = {}  # start-up time -> levels it leaves undefined
        zero: list[str] = []

        def after_start(key: str, value: float | None) -> float | None:
            if n <= self._start[key]:
                too_short.setdefault(self._start[key] / fs, []).append(key)
                return None
            if value is None:
                zero.append(key)
            return value

        values["LCpeak"] = after_start("LCpeak", _db(st[kern.ST_PEAK_C] ** 2, ref))
        if n > self._start["LCpeak"] and st[kern.ST_PEAK_Z_HEAD] > st[kern.ST_PEAK_Z_AFTER]:
            notes.append(
                f"the largest sample lies in the first {self._start['LCpeak'] / fs:g} s, "
                "which is excluded from LCpeak and the F and S maxima as filter start-up; "
                "for a capture that starts on the event set the settling time to 0"
            )
        for key, row in _EXTREMES:
            values[key] = after_start(key, _db(st[row], ref))
        percentile_levels: dict[str, float | None] = {}
        for w in PERCENTILE_WEIGHTINGS:
            what = f"{w} percentiles"
            pct = self._percentile_levels(w, c)
            if pct is None:
                too_short.setdefault(self._start[what] / fs, []).append(what)
            for p in PERCENTILES:
                values[f"{w}{p}"] = None if pct is None else pct[p]
            if pct is not None and any(pct[p] is None for p in PERCENTILES):
                notes.append(f"{what}: some fall on zero or out-of-range levels")
            if self._hist_other[w][1, c]:
                notes.append(
                    f"{self._hist_other[w][1, c]} {w} level samples outside "
                    f"{HISTOGRAM_LOW_DB:g}..{HISTOGRAM_HIGH_DB:g} dB were clamped for "
                    "percentiles"
                )
            chosen = self._percentile_levels(w, c, self.percentiles) if self.percentiles else {}
            percentile_levels.update(
                {f"{w}{p:g}": None if chosen is None else chosen[p] for p in self.percentiles}
            )
        for start_s, keys in too_short.items():
            notes.append(
                f"{', '.join(keys)}: recording not longer than the {start_s:g} s start-up "
                "time excluded from them"
            )
        if zero:
            notes.append(f"{', '.join(zero)}: the weighted signal is exactly zero")
        crest = None
        crest_db = None
        if ms[0] > 0:
            crest = float(peak_z / math.sqrt(ms[0]))
            crest_db = 20.0 * math.log10(crest) if crest > 0 else None
        return ChannelLevels(
            c,
            **{k: values[k] for k in _LEVEL_NAMES},
            crest_factor=crest,
            crest_factor_db=crest_db,
            notes=tuple(notes),
            percentile_levels=percentile_levels,
        )

    def _percentile_levels(
        self, weighting: str, c: int, percentiles: Sequence[float] = PERCENTILES
    ) -> dict[float, float | None] | None:
        hist = self._hist[weighting][c]
        zero = int(self._hist_other[weighting][0, c])
        clipped_count = int(self._hist_other[weighting][1, c])
        total = int(hist.sum()) + zero
        if total == 0:
            return None
        out: dict[float, float | None] = {}
        # Counts from the loudest bin down; LAFn is the level exceeded n % of the time,
        # interpolated linearly within its bin (levels spread evenly over a bin: the
        # grouped-data quantile of descriptive statistics), not the bin's centre.
        from_top = np.cumsum(hist[::-1])
        n_bins = hist.size
        for p in percentiles:
            k = max(1, math.ceil(p / 100.0 * total))
            if k > from_top[-1]:
                out[p] = None  # falls on F levels of exactly zero
                continue
            i = int(np.searchsorted(from_top, k))
            b = n_bins - 1 - i
            clipped = clipped_count and (b == 0 or b == n_bins - 1)
            above = int(from_top[i - 1]) if i else 0
            inside = (p / 100.0 * total - above) / int(hist[b])
            top_edge = HISTOGRAM_LOW_DB + (b + 1) * HISTOGRAM_STEP_DB
            level = top_edge - min(max(inside, 0.0), 1.0) * HISTOGRAM_STEP_DB
            out[p] = None if clipped else round(level, 6)
        return out

    def _history_result(self) -> LevelHistory:
        fs = self.sample_rate_hz
        ref = self.reference
        q = self._interval_frames
        assert q is not None
        ms = self._int_store.view()  # (intervals, 3, channels)
        lengths = np.full(len(ms), float(q))
        partial = self._frames % q  # intervals start at frame 0
        maxima = self._int_max_store.view()  # (intervals, 2, channels): A-F max, C peak²
        if partial:
            rows = [kern.ST_INT_Z, kern.ST_INT_C, kern.ST_INT_A]
            ms = np.concatenate([ms, (self._state[rows] / partial)[None]])
            last = np.maximum(self._state[[kern.ST_INT_F_MAX, kern.ST_INT_PEAK_C]], 0.0)
            last[1] **= 2
            maxima = np.concatenate([maxima, last[None]])
            lengths = np.append(lengths, float(partial))
        starts = (np.cumsum(lengths) - lengths) / fs
        traces = np.moveaxis(self._trace_store.view(), 0, 2)  # (2, channels, points)
        t = np.arange(1, traces.shape[2] + 1, dtype=float)  # in place: long histories
        t *= self._trace_frames
        t -= 1.0
        t /= fs
        return LevelHistory(
            interval_s=q / fs,
            interval_start_s=starts,
            interval_duration_s=lengths / fs,
            LZeq=_db_array(ms[:, 0, :], ref),
            LCeq=_db_array(ms[:, 1, :], ref),
            LAeq=_db_array(ms[:, 2, :], ref),
            LAFmax=_db_array(maxima[:, 0, :], ref),
            LCpeak=_db_array(maxima[:, 1, :], ref),
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
    percentiles: Sequence[float] = (),
) -> LevelResult:
    """Levels of a whole array: a thin wrapper over :class:`LevelMeter`.

    Parameters
    ----------
    samples
        Calibrated samples, shape (frames,) or (frames, channels), in Pa (or V).
    sample_rate_hz
        Sample rate in Hz.
    reference, interval_s, trace_interval_s, percentile_interval_s, filter_settle_s, percentiles
        As for :class:`LevelMeter`.

    Examples
    --------
    A 100 Hz tone of 1 Pa RMS: A-weighting takes off 19.1 dB and C-weighting 0.3 dB
    (IEC 61672-1:2013, Table 3).

    >>> t = np.arange(48000) / 48000
    >>> ch = sound_levels(np.sqrt(2) * np.sin(2 * np.pi * 100 * t), 48000).channels[0]
    >>> round(ch.LZeq, 2), round(ch.LZeq - ch.LAeq, 1), round(ch.LZeq - ch.LCeq, 1)
    (93.98, 19.1, 0.3)
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
        percentiles=percentiles,
    )
    meter.update(x)
    return meter.result()
