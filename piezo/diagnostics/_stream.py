"""Streaming bookkeeping for the capture diagnostics (private to :mod:`piezo.diagnostics.checker`).

Every helper gives the same result whatever the split of the input into blocks, and
keeps memory bounded.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

EMPTY_I = np.zeros(0, dtype=np.int64)
EMPTY_F = np.zeros(0, dtype=np.float64)


class RunTracker:
    """Runs of consecutive samples whose successive steps are at most ``tol``.

    ``feed`` returns the runs that ended inside the block as arrays ``(start, length,
    value)``: ``start`` is the absolute index of the first sample, ``value`` that
    sample's value. The run still open at the end of the block is carried over.
    """

    def __init__(self, tol: float) -> None:
        self.tol = tol
        self.prev: float | None = None
        self.run_start = 0
        self.run_len = 0
        self.run_value = 0.0

    def feed(self, x: np.ndarray, offset: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        n = x.shape[0]
        if n == 0:
            return EMPTY_I, EMPTY_I, EMPTY_F
        link = np.empty(n, dtype=bool)
        link[0] = self.prev is not None and abs(x[0] - self.prev) <= self.tol
        if n > 1:
            np.less_equal(np.abs(np.diff(x)), self.tol, out=link[1:])
        new = np.flatnonzero(~link)  # block indices where a new run starts
        self.prev = float(x[-1])
        if new.size == 0:
            self.run_len += n
            return EMPTY_I, EMPTY_I, EMPTY_F
        starts = [np.array([self.run_start])] if self.run_len > 0 else []
        lengths = [np.array([self.run_len + new[0]])] if self.run_len > 0 else []
        values = [np.array([self.run_value])] if self.run_len > 0 else []
        starts.append(offset + new[:-1])
        lengths.append(np.diff(new))
        values.append(x[new[:-1]])
        self.run_start = offset + int(new[-1])
        self.run_len = n - int(new[-1])
        self.run_value = float(x[new[-1]])
        return (
            np.concatenate(starts).astype(np.int64),
            np.concatenate(lengths).astype(np.int64),
            np.concatenate(values).astype(np.float64),
        )

    def pending(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The open run as if the input ended now (state unchanged)."""
        if self.run_len == 0:
            return EMPTY_I, EMPTY_I, EMPTY_F
        return (
            np.array([self.run_start]),
            np.array([self.run_len]),
            np.array([self.run_value]),
        )


class MaskRuns:
    """Runs of True in a boolean stream: ``(start, length)`` of runs ended in a block."""

    def __init__(self) -> None:
        self.run_start = 0
        self.run_len = 0

    def feed(self, mask: np.ndarray, offset: int) -> tuple[np.ndarray, np.ndarray]:
        n = mask.shape[0]
        if n == 0:
            return EMPTY_I, EMPTY_I
        m = mask.astype(np.int8)
        d = np.diff(np.concatenate(([1 if self.run_len > 0 else 0], m, [0])))
        starts = np.flatnonzero(d == 1)
        ends = np.flatnonzero(d == -1)  # one past the last True (block index)
        out_s: list[int] = []
        out_l: list[int] = []
        first = 0
        if self.run_len > 0:
            # The open run ends at ends[0] (a 0 is appended, so ends is never empty).
            if ends[0] < n:
                out_s.append(self.run_start)
                out_l.append(self.run_len + int(ends[0]))
                self.run_len = 0
            else:
                self.run_len += n
                return EMPTY_I, EMPTY_I
            first = 1
        closed_ends = ends[first:]
        for s, e in zip(starts, closed_ends, strict=True):
            if e < n:
                out_s.append(offset + int(s))
                out_l.append(int(e - s))
            else:
                self.run_start = offset + int(s)
                self.run_len = int(n - s)
        return np.array(out_s, dtype=np.int64), np.array(out_l, dtype=np.int64)

    def pending(self) -> tuple[np.ndarray, np.ndarray]:
        if self.run_len == 0:
            return EMPTY_I, EMPTY_I
        return np.array([self.run_start]), np.array([self.run_len])


# Buckets of sample values on a fixed relative grid: 2**14 buckets per octave (relative
# width 6e-5 .. 1.2e-4, well below the 1e-3 default clip tolerance), the same whatever the
# block split. Keys increase with the value; 0.0 has key 0.
_MANTISSA_BITS = 14
_EXP_OFFSET = 1100


def _bucket_keys(v: np.ndarray) -> np.ndarray:
    m, e = np.frexp(np.abs(v))
    k = (e.astype(np.int64) + _EXP_OFFSET) * (1 << _MANTISSA_BITS) + np.floor(
        m * (1 << _MANTISSA_BITS)
    ).astype(np.int64)
    k[v == 0] = 0
    return np.where(v < 0, -k, k)


def _bucket_values(keys: np.ndarray) -> np.ndarray:
    a = np.abs(keys)
    e = a // (1 << _MANTISSA_BITS) - _EXP_OFFSET
    m = (a % (1 << _MANTISSA_BITS) + 0.5) / (1 << _MANTISSA_BITS)
    v = np.ldexp(m, e.astype(np.int64))
    v[a == 0] = 0.0
    return np.where(keys < 0, -v, v)


# The spike test compares the band [extreme - tol, extreme] with the band
# [extreme - W tol, extreme - tol). Near any smooth maximum (locally quadratic) the
# value density grows like 1/sqrt(extreme - x), which gives a density ratio of
# (W - 1) / (sqrt(W) - 1) = 4.16 for W = 10, whatever the waveform; a flat clip puts a
# finite fraction of all samples into the top band and gives ratios in the hundreds.
_SPIKE_BAND = 10.0


class ExtremeSide:
    """Bookkeeping at one extreme of one channel (values negated for the lower side)."""

    def __init__(self, abs_tol: float | None, rel_tol: float, max_times: int) -> None:
        self.abs_tol = abs_tol  # tol * full scale, or None: relative to the extreme
        self.rel_tol = rel_tol
        self.max_times = max_times
        self.extreme = -math.inf
        self.hist: dict[int, int] = {}
        self.runs: dict[int, list[Any]] = {}  # key -> [samples, events, [times]]

    def tol(self, extreme: float) -> float:
        return self.abs_tol if self.abs_tol is not None else self.rel_tol * abs(extreme)

    def bound(self) -> float:
        e = self.extreme
        return e - (_SPIKE_BAND + 1.0) * self.tol(e)

    def add_samples(self, y: np.ndarray) -> None:
        if y.size == 0:
            return
        self.extreme = max(self.extreme, float(y.max()))
        b = self.bound()
        keys, counts = np.unique(_bucket_keys(y[y >= b]), return_counts=True)
        for k, c in zip(keys.tolist(), counts.tolist(), strict=True):
            self.hist[k] = self.hist.get(k, 0) + c
        self._prune(b)

    def add_runs(self, starts: np.ndarray, lengths: np.ndarray, values: np.ndarray) -> None:
        if starts.size == 0:
            return
        sel = values >= self.bound()
        if not sel.any():
            return
        keys = _bucket_keys(values[sel])
        for k, s, n in zip(
            keys.tolist(), starts[sel].tolist(), lengths[sel].tolist(), strict=True
        ):
            entry = self.runs.setdefault(k, [0, 0, []])
            entry[0] += n
            entry[1] += 1
            if len(entry[2]) < self.max_times:
                entry[2].append(s)

    def _prune(self, bound: float) -> None:
        lo = int(_bucket_keys(np.array([bound]))[0])
        for d in (self.hist, self.runs):
            for k in [k for k in d if k < lo]:
                del d[k]

    def copy(self) -> ExtremeSide:
        other = ExtremeSide(self.abs_tol, self.rel_tol, self.max_times)
        other.extreme = self.extreme
        other.hist = dict(self.hist)
        other.runs = {k: [v[0], v[1], list(v[2])] for k, v in self.runs.items()}
        return other

    def evaluate(self) -> tuple[float, float, int, int, list[int]]:
        """``(spike_ratio, tol, flat_samples, flat_events, start_indices)`` at the extreme."""
        e = self.extreme
        tol = self.tol(e)
        keys = np.array(sorted(self.hist), dtype=np.int64)
        counts = np.array([self.hist[k] for k in keys.tolist()], dtype=np.float64)
        vals = _bucket_values(keys) if keys.size else EMPTY_F
        top = counts[vals >= e - tol].sum()
        below = counts[(vals < e - tol) & (vals >= e - _SPIKE_BAND * tol)].sum()
        if below > 0:
            ratio = top * (_SPIKE_BAND - 1.0) / below
        else:
            ratio = math.inf if top > 0 else 0.0
        samples = 0
        events = 0
        times: list[int] = []
        for k, (s, ev, t) in self.runs.items():
            if float(_bucket_values(np.array([k]))[0]) >= e - tol:
                samples += s
                events += ev
                times.extend(t)
        return ratio, tol, samples, events, sorted(times)


class IntervalStats:
    """Mean and variance of consecutive fixed-length intervals (absolute positions)."""

    def __init__(self, length: int, channels: int) -> None:
        self.length = length
        self.count = 0
        self.mean = np.zeros(channels)
        self.m2 = np.zeros(channels)
        self.completed = 0

    def _merge(self, chunk: np.ndarray) -> None:
        nb = chunk.shape[0]
        mb = chunk.mean(axis=0)
        m2b = ((chunk - mb) ** 2).sum(axis=0)
        na = self.count
        n = na + nb
        delta = mb - self.mean
        self.mean = self.mean + delta * (nb / n)
        self.m2 = self.m2 + m2b + delta**2 * (na * nb / n)
        self.count = n

    def update(self, block: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Feed a block; return ``(index, means, variances)`` of intervals completed."""
        n = block.shape[0]
        ch = block.shape[1]
        idx: list[np.ndarray] = []
        means: list[np.ndarray] = []
        vars_: list[np.ndarray] = []
        pos = 0
        if self.count > 0 and n > 0:
            take = min(self.length - self.count, n)
            self._merge(block[:take])
            pos = take
            if self.count == self.length:
                idx.append(np.array([self.completed]))
                means.append(self.mean[None, :].copy())
                vars_.append((self.m2 / self.count)[None, :])
                self.completed += 1
                self.count = 0
                self.mean = np.zeros(ch)
                self.m2 = np.zeros(ch)
        full = (n - pos) // self.length
        if full:
            seg = block[pos : pos + full * self.length].reshape(full, self.length, ch)
            m = seg.mean(axis=1)
            v = ((seg - m[:, None, :]) ** 2).mean(axis=1)
            idx.append(self.completed + np.arange(full))
            means.append(m)
            vars_.append(v)
            self.completed += full
            pos += full * self.length
        if pos < n:
            self._merge(block[pos:])
        if not idx:
            return EMPTY_I, np.zeros((0, ch)), np.zeros((0, ch))
        return np.concatenate(idx), np.concatenate(means), np.concatenate(vars_)


_HIST_DB_LO = -320.0
_HIST_DB_STEP = 0.05
_HIST_BINS = int(640 / _HIST_DB_STEP)


class IntervalLevels:
    """RMS levels of fixed intervals (mean removed) in a fixed 0.05 dB histogram.

    Percentiles of the interval levels come from the histogram (to within a bin); memory
    does not depend on the number of intervals. Intervals whose variance is zero (digital
    silence) are counted apart.
    """

    def __init__(self, length: int, channels: int, reference: float | np.ndarray) -> None:
        self.stats = IntervalStats(length, channels)
        self.reference = reference
        self.hist = np.zeros((_HIST_BINS, channels), dtype=np.int64)
        self.silent = np.zeros(channels, dtype=np.int64)

    @property
    def completed(self) -> int:
        return self.stats.completed

    def update(self, x: np.ndarray) -> None:
        idx, _, var = self.stats.update(x)
        if idx.size == 0:
            return
        silent = var <= 0
        self.silent += silent.sum(axis=0)
        with np.errstate(divide="ignore"):
            level = 10 * np.log10(var / self.reference**2)
        bins = np.clip(np.floor((level - _HIST_DB_LO) / _HIST_DB_STEP), 0, _HIST_BINS - 1)
        bins = bins.astype(np.int64)
        for c in range(x.shape[1]):
            np.add.at(self.hist[:, c], bins[~silent[:, c], c], 1)

    def percentile_db(self, channel: int, pct: float) -> float | None:
        """The ``pct`` percentile of the channel's interval levels (dB), None if none."""
        hist = self.hist[:, channel]
        total = int(hist.sum())
        if total == 0:
            return None
        cum = np.cumsum(hist)
        i = int(np.searchsorted(cum, pct / 100.0 * total, side="left"))
        i = min(i, _HIST_BINS - 1)
        return _HIST_DB_LO + (i + 0.5) * _HIST_DB_STEP
