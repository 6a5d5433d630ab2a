"""Transients: energy spectral density, exposure levels, events, and a stationarity check.

Welch averaging (:mod:`piezo.spectral.welch`) gives the mean power of a stationary
signal; a single burst in a long capture is diluted by the capture's length (one 0.3 s
burst in 10 s reads 15 dB below its own RMS). A transient is described by its energy:

- the energy spectral density ESD(f) = 2 |X(f)|² (one-sided, X the Fourier transform in
  unit·s), in unit²·s/Hz, whose integral over frequency is ∫x² dt (Parseval). It is
  computed with the Welch core: Hann segments at 75 % overlap, whose squared windows sum
  to a constant (1.5 times the hop), over the capture padded with zeros at both ends, so
  every sample is weighted equally and the sum of the segment periodograms is the energy;
- exposure levels L_E = 10 lg(∫x² dt / (x_ref² · 1 s)) in dB re (x_ref)²·s (for sound
  pressure in air dB re (20 µPa)²·s, the sound exposure level of IEC 61672-1, 3.19),
  overall and per fractional-octave band (the IEC 61260-1 bank of
  :mod:`piezo.spectral.bands`: band mean square times duration);
- events: spans where the short-term RMS rises a threshold above the noise floor, each
  with its own exposure (:class:`EventDetector`);
- :class:`StationarityCheck`: the spread of the mean square over equal parts of a
  capture, which ``piezo spectrum`` uses to say when Welch averaging does not fit.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field

import numpy as np

from piezo import validate
from piezo.errors import InputError
from piezo.spectral.bands import BandAnalyzer
from piezo.spectral.welch import WelchPSD

__all__ = [
    "STATIONARITY_SPREAD_DB",
    "Event",
    "EventDetector",
    "StationarityCheck",
    "StationarityResult",
    "TransientAnalyzer",
    "TransientResult",
    "transient_spectrum",
]

#: A part of the capture whose mean square exceeds the median part's by more than this
#: is a transient for Welch averaging: with 16 parts it then holds at least 10/(10 + 15)
#: = 40 % of the capture's energy, so the averaged spectrum is one part's spectrum
#: diluted by the capture's length (our rule, argued here).
STATIONARITY_SPREAD_DB = 10.0


def _rate(sample_rate_hz: float) -> float:
    rate = validate.sample_rate(sample_rate_hz)
    if not math.isfinite(rate):
        raise InputError(f"sample_rate_hz must be a finite number, got {sample_rate_hz!r}")
    return rate


def _finite_block(block: np.ndarray, channels: int) -> np.ndarray:
    arr = validate.signal_block(block, channels)
    if not np.all(np.isfinite(arr)):
        raise InputError("block contains NaN or infinite samples")
    return arr


# --- Events ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Event:
    """One event of one channel: where it is and its energy.

    Attributes
    ----------
    start_frame, stop_frame
        First and one-past-last sample of the event.
    start_s, duration_s
        The same in seconds.
    peak
        Largest |x| in the event (unit of the samples).
    energy
        ∫x² dt over the event, unit²·s.
    samples
        The event's samples (from ``pre_frames`` before the onset) when the detector
        keeps them, else None.
    samples_start_frame
        Frame of ``samples[0]``.

    Examples
    --------
    A decaying tone ``e^(-t/τ)·sin(ωt)`` with ``τ`` = 10 ms (many periods) carries the
    energy ``∫e^(-2t/τ)·sin²(ωt) dt ≈ τ/4`` = 0.0025:

    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x = 1e-3 * rng.standard_normal(20000)
    >>> t = np.arange(2000) / 20000
    >>> x[8000:10000] += np.exp(-t / 0.01) * np.sin(2 * np.pi * 3000 * t)
    >>> det = EventDetector(20000.0)
    >>> det.update(x)
    >>> (event,) = det.result()
    >>> event.start_frame, round(event.energy, 5), round(event.peak, 2)
    (8000, 0.0025, 0.98)
    """

    start_frame: int
    stop_frame: int
    start_s: float
    duration_s: float
    peak: float
    energy: float
    samples: np.ndarray | None = field(default=None, repr=False)
    samples_start_frame: int = 0


class EventDetector:
    """Streaming detection of taps, impacts and bursts on one channel.

    The signal is cut into windows of ``window_s``; the noise floor is the 10th
    percentile of all window RMS values so far (kept in a 0.1 dB histogram: bounded
    memory). An event starts at the first window whose RMS is ``threshold_db`` above the
    floor, and ends when the RMS stays within ``end_db`` of the floor for ``hold_s``,
    when a window jumps ``retrigger_db`` above the previous one (the next tap), or after
    ``max_event_s``. The first ``warmup_windows`` windows only feed the floor (their
    samples are kept and examined once the floor is known), so a capture must start
    with some quiet (or with events shorter than most of that span).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x = 1e-3 * rng.standard_normal(20000)
    >>> t = np.arange(2000) / 20000
    >>> x[8000:10000] += np.exp(-t / 0.01) * np.sin(2 * np.pi * 3000 * t)
    >>> det = EventDetector(20000.0)
    >>> det.update(x)
    >>> [round(e.start_s, 3) for e in det.result()]
    [0.4]
    """

    def __init__(
        self,
        sample_rate_hz: float,
        *,
        threshold_db: float = 20.0,
        end_db: float = 6.0,
        window_s: float = 5e-4,
        hold_s: float = 5e-3,
        retrigger_db: float = 12.0,
        max_event_s: float = 2.0,
        pre_s: float = 1e-3,
        keep_samples: bool = False,
        warmup_windows: int = 32,
    ) -> None:
        self.sample_rate_hz = _rate(sample_rate_hz)
        for name, value in (("threshold_db", threshold_db), ("end_db", end_db)):
            if not (math.isfinite(value) and value > 0):
                raise InputError(f"{name} must be a positive number of dB, got {value!r}")
        if end_db >= threshold_db:
            raise InputError(f"end_db ({end_db!r}) must be below threshold_db ({threshold_db!r})")
        self.window = max(4, round(window_s * self.sample_rate_hz))
        self.hold = max(1, math.ceil(hold_s * self.sample_rate_hz / self.window))
        self.max_windows = max(2, round(max_event_s * self.sample_rate_hz / self.window))
        self.pre = round(pre_s * self.sample_rate_hz)
        self.threshold_db = float(threshold_db)
        self.end_db = float(end_db)
        self.retrigger_db = float(retrigger_db)
        self.keep_samples = keep_samples
        self.warmup = int(warmup_windows)
        self._hist = np.zeros(6000, dtype=np.int64)  # −400 … +200 dB in 0.1 dB
        self._pending = np.zeros(0)
        self._frame = 0  # frame index of _pending[0]
        self._windows_seen = 0
        self._tail = np.zeros(0)  # last samples before the current window (pre-trigger)
        self._state: dict | None = None
        self._events: list[Event] = []
        self._prev_db = -math.inf
        self._taken = 0

    def floor_db(self) -> float:
        """Noise floor so far: 10th percentile of the window RMS levels, dB re 1 unit."""
        return self._floor_db()

    def _floor_db(self) -> float:
        total = int(self._hist.sum())
        if total == 0:
            return -math.inf
        k = int(np.searchsorted(np.cumsum(self._hist), max(1, math.ceil(0.1 * total))))
        return -400.0 + 0.1 * k + 0.05

    def update(self, block: np.ndarray) -> None:
        """Add samples: shape (frames,) or (frames, 1)."""
        x = np.asarray(block, dtype=np.float64)
        if x.ndim == 2 and x.shape[1] == 1:
            x = x[:, 0]
        if x.ndim != 1:
            raise InputError(f"block must have shape (frames,) or (frames, 1), got {x.shape}")
        if not np.all(np.isfinite(x)):
            raise InputError("block contains NaN or infinite samples")
        data = np.concatenate([self._pending, x])
        n_win = data.size // self.window
        if self._windows_seen + n_win < self.warmup and n_win:
            # Warm-up: only learn the floor, keep the samples for later.
            ms = np.mean(data[: n_win * self.window].reshape(n_win, self.window) ** 2, axis=1)
            self._pending = data
            self._learn(ms)
            self._warm_n = getattr(self, "_warm_n", 0) + n_win
            return
        if getattr(self, "_warm_n", 0):
            # The warm-up windows were learnt already; do not count them twice.
            self._hist[:] = 0
            self._warm_n = 0
        used = n_win * self.window
        windows = data[:used].reshape(n_win, self.window)
        ms = np.mean(windows**2, axis=1)
        self._learn(ms)
        floor = self._floor_db()
        with np.errstate(divide="ignore"):
            level = 10.0 * np.log10(ms)
        loud = np.flatnonzero(level > floor + self.threshold_db)
        i = 0
        while i < n_win:
            if self._state is None:
                # Idle: jump to the next window above the threshold (vectorised search).
                k = int(np.searchsorted(loud, i))
                if k == loud.size:
                    self._prev_db = float(level[-1])
                    break
                j = int(loud[k])
                if j > i:
                    self._prev_db = float(level[j - 1])
                i = j
            self._step(i, level[i], floor, windows)
            i += 1
        self._windows_seen += n_win
        keep_tail = np.concatenate([self._tail, data[:used]])[-max(self.pre, 1) :]
        self._tail = keep_tail
        self._frame += used
        self._pending = data[used:]

    def _learn(self, ms: np.ndarray) -> None:
        with np.errstate(divide="ignore"):
            db = 10.0 * np.log10(np.maximum(ms, 1e-40))
        idx = np.clip(((db + 400.0) / 0.1).astype(np.int64), 0, self._hist.size - 1)
        np.add.at(self._hist, idx, 1)

    def _step(self, i: int, level_db: float, floor_db: float, windows: np.ndarray) -> None:
        start = self._frame + i * self.window
        w = windows[i]
        st = self._state
        on = level_db > floor_db + self.threshold_db
        if st is not None:
            retrigger = on and level_db > self._prev_db + self.retrigger_db
            quiet = level_db < floor_db + self.end_db
            st["quiet"] = st["quiet"] + 1 if quiet else 0
            if retrigger or st["quiet"] >= self.hold or st["windows"] >= self.max_windows:
                self._close(st)
                self._state = st = None
                if not retrigger:
                    self._prev_db = level_db
                    return
            else:
                st["windows"] += 1
                st["stop"] = start + self.window
                st["peak"] = max(st["peak"], float(np.max(np.abs(w))))
                st["energy"] += float(np.sum(w * w))
                if st["quiet"] == 0:
                    st["last_loud"] = start + self.window
                if self.keep_samples:
                    st["samples"].append(w.copy())
        if st is None and on:
            pre = np.zeros(0)
            if self.keep_samples and self.pre:
                before = np.concatenate([self._tail, windows[:i].ravel()])
                pre = before[-self.pre :]
            self._state = {
                "start": start,
                "stop": start + self.window,
                "last_loud": start + self.window,
                "windows": 1,
                "quiet": 0,
                "peak": float(np.max(np.abs(w))),
                "energy": float(np.sum(w * w)),
                "samples": [pre, w.copy()],
                "samples_start": start - pre.size,
            }
        self._prev_db = level_db

    def _close(self, st: dict) -> None:
        fs = self.sample_rate_hz
        stop = st["last_loud"]
        samples = np.concatenate(st["samples"]) if self.keep_samples else None
        self._events.append(
            Event(
                start_frame=int(st["start"]),
                stop_frame=int(stop),
                start_s=st["start"] / fs,
                duration_s=(stop - st["start"]) / fs,
                peak=st["peak"],
                energy=st["energy"] / fs,
                samples=samples,
                samples_start_frame=int(st["samples_start"]),
            )
        )

    def take_closed(self) -> list[Event]:
        """Events closed since the last call, with their samples; the detector keeps them
        without samples (so memory does not grow with the number of events)."""
        fresh = self._events[self._taken :]
        self._events[self._taken :] = [
            Event(e.start_frame, e.stop_frame, e.start_s, e.duration_s, e.peak, e.energy)
            for e in fresh
        ]
        self._taken = len(self._events)
        return fresh

    def result(self) -> list[Event]:
        """Events so far (one still open at the end of the data is closed there)."""
        done = copy.deepcopy(self)
        if getattr(done, "_warm_n", 0) and done._pending.size >= done.window:
            # Shorter than the warm-up: examine what there is with the floor learnt.
            done.warmup = 0
            pending, done._pending = done._pending, np.zeros(0)
            done._hist[:] = 0
            done._warm_n = 0
            done.update(pending)
        if done._state is not None:
            done._close(done._state)
        return done._events


# --- Stationarity ----------------------------------------------------------------------


@dataclass(frozen=True)
class StationarityResult:
    """Mean square of equal parts of a capture, per channel.

    Attributes
    ----------
    part_s
        Length of a part, s.
    part_mean_square
        Shape (parts, channels).
    spread_db
        10 lg(largest part / median part) per channel.
    stationary
        Per channel: spread within :data:`STATIONARITY_SPREAD_DB`.

    Examples
    --------
    One sixteenth of the capture at four times the amplitude is ``10·lg 16 = 12.04`` dB
    above the median part:

    >>> import numpy as np
    >>> x = np.ones((48000, 1)); x[3000:6000] = 4.0
    >>> check = StationarityCheck(48000.0, 1, frames=48000)
    >>> check.update(x)
    >>> r = check.result()
    >>> r.part_s, round(float(r.spread_db[0]), 2), r.note()[:34]
    (0.0625, 12.04, 'channel(s) 0: one 0.0625 s part of')
    """

    part_s: float
    part_mean_square: np.ndarray
    spread_db: np.ndarray
    stationary: np.ndarray

    def note(self) -> str | None:
        """A sentence for the user when a channel is not stationary, else None."""
        bad = [int(i) for i in np.flatnonzero(~self.stationary)]
        if not bad:
            return None
        worst = float(np.max(self.spread_db[bad]))
        return (
            f"channel(s) {', '.join(map(str, bad))}: one {self.part_s:.3g} s part of the "
            f"capture is {worst:.1f} dB above the median part; Welch averaging assumes a "
            "stationary signal and dilutes a transient by the capture's length: use "
            "--transient for its exposure and energy spectral density"
        )


class StationarityCheck:
    """Streaming mean square of ``parts`` equal parts of a capture of ``frames`` samples.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.zeros((48000, 1)); x[1000:2000] = 1.0
    >>> check = StationarityCheck(48000.0, 1, frames=48000)
    >>> check.update(x)
    >>> bool(check.result().stationary[0])
    False
    """

    def __init__(self, sample_rate_hz: float, channels: int, *, frames: int, parts: int = 16):
        self.sample_rate_hz = _rate(sample_rate_hz)
        if frames < parts:
            raise InputError(f"frames ({frames!r}) must be at least parts ({parts!r})")
        self.channels = int(channels)
        self.parts = int(parts)
        self.part_frames = frames // parts
        self._sum = np.zeros((parts, self.channels))
        self._n = np.zeros(parts, dtype=np.int64)
        self._frame = 0

    def update(self, block: np.ndarray) -> None:
        """Add a block (frames, channels)."""
        arr = _finite_block(block, self.channels)
        idx = np.minimum((self._frame + np.arange(arr.shape[0])) // self.part_frames,
                         self.parts - 1)  # fmt: skip
        np.add.at(self._sum, idx, arr * arr)
        np.add.at(self._n, idx, 1)
        self._frame += arr.shape[0]

    def result(self) -> StationarityResult:
        """Part mean squares and the verdict per channel."""
        ms = self._sum / np.maximum(self._n, 1)[:, None]
        med = np.median(ms, axis=0)
        top = np.max(ms, axis=0)
        with np.errstate(divide="ignore", invalid="ignore"):
            spread = np.where(top > 0, 10 * np.log10(top / np.maximum(med, 1e-300)), 0.0)
        spread = np.minimum(spread, 300.0)
        return StationarityResult(
            self.part_frames / self.sample_rate_hz, ms, spread, spread <= STATIONARITY_SPREAD_DB
        )


# --- Energy spectral density and exposure ---------------------------------------------


@dataclass(frozen=True)
class TransientResult:
    """Energy view of a capture.

    Attributes
    ----------
    frequency_hz
        Bins of the ESD, Hz.
    esd
        Energy spectral density, unit²·s/Hz, shape (bins, channels).
    energy
        ∫x² dt per channel, unit²·s.
    duration_s
        Length of the capture, s.
    band_nominal_hz, band_energy
        Fractional-octave bands and their energy ∫x_band² dt, shape (bands, channels).
    events
        Events per channel (:class:`Event`).
    resolution_hz
        Bin spacing of the ESD.

    Examples
    --------
    0.1 s of a 1 kHz tone of 1 Pa RMS has an exposure of 0.1 Pa²·s, 83.98 dB re
    (20 µPa)²·s, nearly all of it in the 1 kHz octave:

    >>> import numpy as np
    >>> x = np.zeros(48000)
    >>> x[4800:9600] = np.sqrt(2) * np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)
    >>> r = transient_spectrum(x, 48000.0, fraction=1, low_hz=250.0, high_hz=4000.0)
    >>> round(float(r.energy[0]), 6), round(float(r.exposure_level_db(20e-6)[0]), 2)
    (0.1, 83.98)
    >>> r.band_nominal_hz.tolist(), r.band_exposure_level_db(20e-6)[:, 0].round(1).tolist()
    ([250.0, 500.0, 1000.0, 2000.0, 4000.0], [50.3, 59.1, 84.0, 59.2, 39.7])
    """

    frequency_hz: np.ndarray
    esd: np.ndarray
    energy: np.ndarray
    duration_s: float
    band_nominal_hz: np.ndarray
    band_energy: np.ndarray
    events: tuple[tuple[Event, ...], ...]
    resolution_hz: float

    def exposure_level_db(self, reference: float | np.ndarray) -> np.ndarray:
        """10 lg(energy / (reference² · 1 s)) per channel: dB re (reference)²·s.

        ``reference`` is one value or one per channel (each channel in its own unit)."""
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.energy / reference**2)

    def band_exposure_level_db(self, reference: float | np.ndarray) -> np.ndarray:
        """Band exposure levels, dB re (reference)²·s, shape (bands, channels).

        ``reference`` is one value or one per channel."""
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.band_energy / reference**2)


class TransientAnalyzer:
    """Streaming ESD, exposure, band exposure and events of a capture.

    Parameters
    ----------
    sample_rate_hz, channels
        Rate, Hz, and channels of the blocks.
    segment_frames
        ESD segment length (Hann, 75 % overlap); default 4096.
    fraction, low_hz, high_hz
        Band bank (IEC 61260-1) for the band exposures; ``high_hz`` is limited by the
        sample rate.
    threshold_db
        Event threshold above the noise floor (:class:`EventDetector`).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(3)
    >>> x = rng.standard_normal((48000, 1))
    >>> r = transient_spectrum(x, 48000.0)
    >>> esd_energy = float(np.sum(r.esd[:, 0]) * r.resolution_hz)
    >>> round(esd_energy / float(np.sum(x**2) / 48000.0), 9)
    1.0
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        segment_frames: int = 4096,
        fraction: int = 3,
        low_hz: float = 20.0,
        high_hz: float | None = None,
        threshold_db: float = 20.0,
    ) -> None:
        fs = _rate(sample_rate_hz)
        self.sample_rate_hz = fs
        self.channels = int(channels)
        self.segment_frames = int(segment_frames)
        if self.segment_frames < 16 or self.segment_frames % 4:
            raise InputError(
                f"segment_frames must be a multiple of 4 and at least 16, got {segment_frames!r}"
            )
        self.hop = self.segment_frames // 4
        self._psd = WelchPSD(
            fs, self.channels, segment_frames=self.segment_frames, window="hann",
            overlap=0.75, detrend=None,
        )  # fmt: skip
        self._psd.update(np.zeros((self.segment_frames - self.hop, self.channels)))
        top = min(high_hz if high_hz is not None else fs / 2.5, fs / 2.5)
        self._bands = BandAnalyzer(fs, self.channels, fraction=fraction, low_hz=low_hz,
                                   high_hz=top)  # fmt: skip
        self._events = [EventDetector(fs, threshold_db=threshold_db) for _ in range(channels)]
        self._energy = np.zeros(self.channels)
        self._frames = 0

    def update(self, block: np.ndarray) -> None:
        """Add a block (frames, channels)."""
        arr = _finite_block(block, self.channels)
        if arr.shape[0] == 0:
            return
        self._psd.update(arr)
        self._bands.update(arr)
        for i, det in enumerate(self._events):
            det.update(arr[:, i])
        self._energy += np.sum(arr * arr, axis=0)
        self._frames += arr.shape[0]

    def result(self) -> TransientResult:
        """The energy view of everything so far."""
        if self._frames == 0:
            raise InputError("no samples were given: a transient view needs samples")
        fs = self.sample_rate_hz
        psd = copy.deepcopy(self._psd)
        # Zeros after the end: every sample is then inside four segments.
        lead = self.segment_frames - self.hop
        covered = lead + self._frames
        tail = lead + (-covered) % self.hop
        psd.update(np.zeros((tail, self.channels)))
        r = psd.result()
        # ESD = Σ 2|X|²Δt²/C over segments, C = Σw²/hop = 1.5 for Hann at 75 % overlap;
        # the PSD is the mean of 2|X|²/(fs Σw²): ESD = PSD · segments · hop / fs.
        esd = r.psd * (r.averages * self.hop / fs)
        bands = self._bands.result()
        duration = self._frames / fs
        return TransientResult(
            frequency_hz=r.frequency_hz,
            esd=esd,
            energy=self._energy / fs,
            duration_s=duration,
            band_nominal_hz=bands.nominal_hz,
            band_energy=bands.mean_square * duration,
            events=tuple(tuple(det.result()) for det in self._events),
            resolution_hz=fs / self.segment_frames,
        )


def transient_spectrum(x: np.ndarray, sample_rate_hz: float, **options) -> TransientResult:
    """Whole-array :class:`TransientAnalyzer`: ``x`` of shape (frames,) or (frames, ch).

    Examples
    --------
    >>> import numpy as np
    >>> x = np.zeros(48000); x[4800:9600] = 1.0       # 0.1 s of 1 Pa
    >>> r = transient_spectrum(x, 48000.0)
    >>> round(float(r.exposure_level_db(20e-6)[0]), 2)     # 10 lg(0.1 / (20 µPa)²)
    83.98
    """
    arr = np.asarray(x, dtype=np.float64)
    arr = arr[:, None] if arr.ndim == 1 else arr
    analyzer = TransientAnalyzer(sample_rate_hz, arr.shape[1], **options)
    analyzer.update(arr)
    return analyzer.result()
