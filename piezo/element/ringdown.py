"""Ring-down and tap tests: events, their decaying modes, and the average over events.

A tap, an impact or a burst that stops leaves an element ringing in its modes, each a
damped sinusoid x(t) = A e^(−σt) cos(2π f_d t + φ). :class:`RingdownAnalyzer` finds the
events of a capture (:class:`piezo.spectral.transient.EventDetector`) and identifies the
modes of each from the free decay after its peak:

1. the matrix pencil method (Y. Hua and T. K. Sarkar, "Matrix pencil method for
   estimating parameters of exponentially damped/undamped sinusoids in noise", IEEE
   Trans. Acoust., Speech, Signal Process. 38(5), 1990, pp. 814–824) gives the poles
   z = e^((−σ + j2πf_d)/f_s) from the singular vectors of a Hankel matrix of the samples,
   with the model order set by the singular values that stand above the noise;
2. a non-linear least-squares fit of the sum of damped sinusoids, started at those
   poles, refines them; the standard uncertainties of f_d and σ come from its covariance
   s²(JᵀJ)⁻¹.

Per mode: damped frequency f_d, damping ratio ζ = σ/ω_n with ω_n = √(σ² + ω_d²),
Q = 1/(2ζ), decay rate 20σ/ln 10 in dB/s, and the amplitude at the start of the fit.
The logarithmic decrement δ = ln(x_n/x_(n+1)) between successive peaks is
δ = σT_d = 2πζ/√(1 − ζ²) (vibration textbooks, e.g. S. S. Rao, Mechanical Vibrations,
6th ed., 2017, section 2.6.4); :func:`logarithmic_decrement` and
:func:`damping_from_decrement` convert. Modes of repeated events are grouped by
frequency and averaged, with their spread.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import linalg, optimize

from piezo.errors import InputError
from piezo.spectral.transient import Event, EventDetector

__all__ = [
    "DecayMode",
    "EventModes",
    "ModeSummary",
    "RingdownAnalyzer",
    "RingdownResult",
    "damping_from_decrement",
    "identify_modes",
    "logarithmic_decrement",
    "matrix_pencil",
    "ringdown",
]

#: Samples of a decay given to the matrix pencil at most (its Hankel matrix's
#: decomposition costs about N³/27 operations): the first part, where the signal is
#: strongest. The least-squares refinement uses up to :data:`MAX_FIT_FRAMES`.
MAX_PENCIL_FRAMES = 1000
#: Samples of a decay fitted at most by the least-squares refinement.
MAX_FIT_FRAMES = 16384
#: Modes of different events within this relative frequency are the same mode.
GROUP_TOLERANCE = 0.01


def logarithmic_decrement(damping_ratio: float) -> float:
    """δ = 2πζ/√(1 − ζ²) for 0 ≤ ζ < 1.

    Examples
    --------
    >>> round(logarithmic_decrement(0.01), 6)
    0.062835
    """
    if not 0 <= damping_ratio < 1:
        raise InputError(f"damping_ratio must be in [0, 1), got {damping_ratio!r}")
    return 2 * math.pi * damping_ratio / math.sqrt(1 - damping_ratio**2)


def damping_from_decrement(decrement: float) -> float:
    """ζ = δ/√(4π² + δ²), the inverse of :func:`logarithmic_decrement`.

    Examples
    --------
    >>> round(damping_from_decrement(logarithmic_decrement(0.05)), 12)
    0.05
    """
    if not (math.isfinite(decrement) and decrement >= 0):
        raise InputError(f"decrement must be a non-negative number, got {decrement!r}")
    return decrement / math.sqrt(4 * math.pi**2 + decrement**2)


@dataclass(frozen=True)
class DecayMode:
    """One decaying mode of one event.

    Attributes
    ----------
    frequency_hz
        Damped (ringing) frequency f_d, Hz; ``u_frequency_hz`` its standard uncertainty.
    natural_frequency_hz
        ω_n/2π = √(f_d² + (σ/2π)²), Hz.
    damping_ratio, q
        ζ and Q = 1/(2ζ), with standard uncertainties.
    decay_rate_per_s, decay_db_per_s
        σ (1/s) and 20σ/ln 10 (dB/s).
    amplitude
        Amplitude A at the start of the fit (unit of the samples).

    Examples
    --------
    A free decay at f_d = 1 kHz with σ = 100/s: Q = ω_n / (2σ) = 31.42, the decay is
    20σ / ln 10 = 868.6 dB/s and the decrement σ / f_d = 0.1.

    >>> import numpy as np
    >>> t = np.arange(800) / 8000
    >>> (mode,), _ = identify_modes(np.exp(-100 * t) * np.cos(2 * np.pi * 1000 * t), 8000.0)
    >>> round(mode.frequency_hz, 3), round(mode.q, 2), round(mode.decay_db_per_s, 1)
    (1000.0, 31.42, 868.6)
    >>> round(logarithmic_decrement(mode.damping_ratio), 6), round(mode.amplitude, 6)
    (0.1, 1.0)
    """

    frequency_hz: float
    u_frequency_hz: float | None
    natural_frequency_hz: float
    damping_ratio: float
    u_damping_ratio: float | None
    q: float
    u_q: float | None
    decay_rate_per_s: float
    decay_db_per_s: float
    amplitude: float


def matrix_pencil(
    y: np.ndarray, *, order: int | None = None, noise_rms: float | None = None
) -> np.ndarray:
    """Poles z_i of y[n] ≈ Σ R_i z_i^n by the matrix pencil method (Hua & Sarkar 1990).

    The pencil parameter is L = N/3. The model order is ``order``, or the number of
    singular values of the Hankel matrix above 2·noise_rms·(√(N−L) + √(L+1)) (twice the
    largest singular value of a matrix of that size filled with white noise of that RMS),
    or, without ``noise_rms``, those above 10⁻³ of the largest.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.arange(200)
    >>> y = 0.99**n * np.cos(0.3 * n)
    >>> z = matrix_pencil(y, order=2)
    >>> np.sort(np.angle(z)).round(6).tolist(), np.abs(z).round(6).tolist()
    ([-0.3, 0.3], [0.99, 0.99])
    """
    x = np.asarray(y, dtype=np.float64)
    n = x.size
    if n < 8:
        raise InputError(f"a matrix pencil needs at least 8 samples, got {n}")
    L = max(2, n // 3)
    hank = linalg.hankel(x[: n - L], x[n - L - 1 :])
    # Right singular vectors and singular values from the eigen-decomposition of HᵀH
    # (L+1 square: much cheaper than the SVD of H, and accurate for the singular values
    # down to 10⁻⁶ of the largest that the order selection looks at).
    lam, vecs = linalg.eigh(hank.T @ hank)
    s = np.sqrt(np.clip(lam[::-1], 0.0, None))
    vh = vecs[:, ::-1].T
    if order is None:
        if noise_rms is not None and noise_rms > 0:
            level = 2.0 * noise_rms * (math.sqrt(n - L) + math.sqrt(L + 1))
        else:
            level = 1e-3 * s[0]
        order = int(np.sum(s > level))
    order = max(1, min(order, L - 1))
    v = vh[:order].conj().T
    a = np.linalg.pinv(v[:-1]) @ v[1:]
    return np.linalg.eigvals(a)


def _model(params: np.ndarray, t: np.ndarray) -> np.ndarray:
    out = np.zeros(t.size)
    for f, s, a, b in params.reshape(-1, 4):
        e = np.exp(-s * t)
        w = 2 * np.pi * f * t
        out += e * (a * np.cos(w) + b * np.sin(w))
    return out


def identify_modes(
    y: np.ndarray,
    sample_rate_hz: float,
    *,
    max_modes: int = 8,
    noise_rms: float | None = None,
    min_frequency_hz: float = 0.0,
    max_frequency_hz: float | None = None,
) -> tuple[list[DecayMode], float]:
    """Decaying modes of a free decay ``y`` (starting at its first sample).

    Returns the modes (strongest first, at most ``max_modes``) and the RMS of the
    residual of the fit.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(4000) / 20000
    >>> y = np.exp(-60 * t) * np.cos(2 * np.pi * 3200 * t)
    >>> modes, _ = identify_modes(y, 20000.0)
    >>> round(modes[0].frequency_hz, 3), round(modes[0].decay_rate_per_s, 3)
    (3200.0, 60.0)
    """
    fs = float(sample_rate_hz)
    x = np.asarray(y, dtype=np.float64)[:MAX_FIT_FRAMES]
    top = fs / 2 if max_frequency_hz is None else min(max_frequency_hz, fs / 2)
    z = matrix_pencil(x[:MAX_PENCIL_FRAMES], noise_rms=noise_rms)
    keep = [
        p
        for p in z
        if p.imag > 0
        and 0 < abs(p) < 1
        and min_frequency_hz <= np.angle(p) * fs / (2 * np.pi) <= 0.98 * top
    ]
    if not keep:
        return [], float(np.sqrt(np.mean(x * x)))
    t = np.arange(x.size) / fs
    start = []
    for p in keep:
        f = float(np.angle(p) * fs / (2 * np.pi))
        s = float(-math.log(abs(p)) * fs)
        start.append((f, s))
    # Amplitudes by linear least squares, then the whole model by non-linear least squares.
    basis = np.column_stack(
        [g for f, s in start for g in (np.exp(-s * t) * np.cos(2 * np.pi * f * t),
                                       np.exp(-s * t) * np.sin(2 * np.pi * f * t))]
    )  # fmt: skip
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    amp = np.hypot(coef[0::2], coef[1::2])
    order = np.argsort(amp)[::-1]
    floor = 3.0 * noise_rms if noise_rms else 1e-6 * float(np.max(np.abs(x)))
    chosen = [i for i in order if amp[i] > floor][:max_modes]
    if not chosen:
        return [], float(np.sqrt(np.mean(x * x)))
    p0 = np.array([v for i in chosen for v in (*start[i], coef[2 * i], coef[2 * i + 1])])
    res = optimize.least_squares(lambda p: _model(p, t) - x, p0, x_scale="jac", method="lm",
                                 max_nfev=200 * p0.size)  # fmt: skip
    p = res.x
    resid = res.fun
    dof = max(x.size - p.size, 1)
    s2 = float(resid @ resid) / dof
    try:
        cov = np.linalg.pinv(res.jac.T @ res.jac) * s2
    except np.linalg.LinAlgError:
        cov = np.full((p.size, p.size), np.nan)
    modes = []
    for k, (f, s, a, b) in enumerate(p.reshape(-1, 4)):
        if not (f > 0 and s > 0):
            continue
        f, s = float(f), float(s)
        wd = 2 * math.pi * f
        wn = math.hypot(s, wd)
        zeta = s / wn
        # ζ = σ/√(σ² + ω_d²): ∂ζ/∂σ = ω_d²/ω_n³, ∂ζ/∂ω_d = −σω_d/ω_n³.
        c = cov[4 * k : 4 * k + 2, 4 * k : 4 * k + 2]
        grad = np.array([-s * wd / wn**3 * 2 * math.pi, wd * wd / wn**3])
        var_z = float(grad @ c @ grad)
        u_zeta = math.sqrt(var_z) if math.isfinite(var_z) and var_z >= 0 else None
        u_f = math.sqrt(c[0, 0]) if math.isfinite(c[0, 0]) and c[0, 0] >= 0 else None
        q = 1 / (2 * zeta)
        modes.append(
            DecayMode(
                frequency_hz=f,
                u_frequency_hz=u_f,
                natural_frequency_hz=wn / (2 * math.pi),
                damping_ratio=zeta,
                u_damping_ratio=u_zeta,
                q=q,
                u_q=None if u_zeta is None else q * u_zeta / zeta,
                decay_rate_per_s=s,
                decay_db_per_s=20 * s / math.log(10),
                amplitude=float(math.hypot(a, b)),
            )
        )
    modes.sort(key=lambda m: -m.amplitude)
    return modes, float(np.sqrt(np.mean(resid * resid)))


@dataclass(frozen=True)
class EventModes:
    """An event and the modes identified in its decay.

    Attributes
    ----------
    start_s, duration_s, peak
        Where the event is and its largest |x|.
    fit_start_s, fit_duration_s
        The free decay fitted: from just after the peak.
    modes
        Strongest first.
    noise_rms, residual_rms
        Noise floor of the channel, and RMS residual of the fit.

    Examples
    --------
    Two taps, 1 kHz modes of amplitude 1 and 0.5, in noise of 0.1 mV RMS:

    >>> import numpy as np
    >>> t = np.arange(2000) / 8000
    >>> x = 1e-4 * np.random.default_rng(0).standard_normal(t.size)
    >>> for start_s, amplitude in ((0.02, 1.0), (0.12, 0.5)):
    ...     tau = np.clip(t - start_s, 0, None)
    ...     x += (t >= start_s) * amplitude * np.exp(-100 * tau) * np.sin(2 * np.pi * 1000 * tau)
    >>> events = ringdown(x, 8000.0)[0].events
    >>> [(round(e.start_s, 3), round(e.peak, 1), len(e.modes)) for e in events]
    [(0.02, 1.0, 1), (0.12, 0.5, 1)]
    >>> [round(e.modes[0].frequency_hz, 1) for e in events]
    [1000.0, 1000.0]
    """

    start_s: float
    duration_s: float
    peak: float
    fit_start_s: float
    fit_duration_s: float
    modes: tuple[DecayMode, ...]
    noise_rms: float
    residual_rms: float


@dataclass(frozen=True)
class ModeSummary:
    """One mode over the events where it was found: mean and sample standard deviation.

    Examples
    --------
    The same 1 kHz mode (Q = 31.4) rung twice is one mode found in two events:

    >>> import numpy as np
    >>> t = np.arange(2000) / 8000
    >>> x = 1e-4 * np.random.default_rng(0).standard_normal(t.size)
    >>> for start_s, amplitude in ((0.02, 1.0), (0.12, 0.5)):
    ...     tau = np.clip(t - start_s, 0, None)
    ...     x += (t >= start_s) * amplitude * np.exp(-100 * tau) * np.sin(2 * np.pi * 1000 * tau)
    >>> (mode,) = ringdown(x, 8000.0)[0].modes
    >>> mode.events, round(mode.frequency_hz, 1), round(mode.q, 1), mode.frequency_std_hz < 0.01
    (2, 1000.0, 31.4, True)
    """

    events: int
    frequency_hz: float
    frequency_std_hz: float | None
    q: float
    q_std: float | None
    damping_ratio: float
    decay_db_per_s: float
    amplitude: float


@dataclass(frozen=True)
class RingdownResult:
    """Events and modes of one channel.

    Examples
    --------
    One result per channel; a silent channel has no events:

    >>> import numpy as np
    >>> t = np.arange(2000) / 8000
    >>> tap = (t >= 0.02) * np.exp(-100 * (t - 0.02)) * np.sin(2 * np.pi * 1000 * (t - 0.02))
    >>> noise = 1e-4 * np.random.default_rng(0).standard_normal((t.size, 2))
    >>> results = ringdown(np.column_stack([tap, 0 * tap]) + noise, 8000.0)
    >>> [(r.channel, r.sample_rate_hz, len(r.events)) for r in results]
    [(0, 8000.0, 1), (1, 8000.0, 0)]
    >>> round(results[0].modes[0].frequency_hz, 1)
    1000.0
    """

    channel: int
    sample_rate_hz: float
    events: tuple[EventModes, ...]
    modes: tuple[ModeSummary, ...]


def _summarise(events: list[EventModes]) -> tuple[ModeSummary, ...]:
    found = sorted((m for e in events for m in e.modes), key=lambda m: m.frequency_hz)
    groups: list[list[DecayMode]] = []
    for m in found:
        if groups and m.frequency_hz <= groups[-1][0].frequency_hz * (1 + GROUP_TOLERANCE):
            groups[-1].append(m)
        else:
            groups.append([m])

    def spread(values: list[float]) -> float | None:
        return float(np.std(values, ddof=1)) if len(values) > 1 else None

    out = []
    for g in groups:
        f = [m.frequency_hz for m in g]
        q = [m.q for m in g]
        out.append(
            ModeSummary(
                events=len(g),
                frequency_hz=float(np.mean(f)),
                frequency_std_hz=spread(f),
                q=float(np.mean(q)),
                q_std=spread(q),
                damping_ratio=float(np.mean([m.damping_ratio for m in g])),
                decay_db_per_s=float(np.mean([m.decay_db_per_s for m in g])),
                amplitude=float(np.mean([m.amplitude for m in g])),
            )
        )
    out.sort(key=lambda s: (-s.events, -s.amplitude))
    return tuple(out)


class RingdownAnalyzer:
    """Streaming ring-down analysis of each channel: events, modes, averages.

    Parameters
    ----------
    sample_rate_hz, channels
        Rate, Hz, and channels of the blocks.
    threshold_db
        Event threshold above the noise floor.
    max_modes
        Modes kept per event.
    skip_s
        Time after an event's peak before the free decay is fitted (the contact of a
        hammer, the end of a burst).
    min_frequency_hz, max_frequency_hz
        Modes outside are ignored.
    max_event_s
        Longest event kept; memory is one event per channel at a time.

    Notes
    -----
    The noise floor is learnt as blocks arrive and sets the pencil's model order and the
    amplitude floor, so block boundaries may move the identified values, within a small
    fraction of their standard uncertainty (tested).

    Examples
    --------
    >>> import numpy as np
    >>> fs = 20000.0
    >>> t = np.arange(int(0.3 * fs)) / fs
    >>> x = 1e-4 * np.random.default_rng(0).standard_normal(t.size)
    >>> tau = np.clip(t - 0.05, 0, None)
    >>> x += (t >= 0.05) * np.exp(-tau * 50) * np.sin(2 * np.pi * 2000 * tau)
    >>> r = ringdown(x, fs)[0]
    >>> len(r.events), round(r.modes[0].frequency_hz, 1), round(r.modes[0].q)
    (1, 2000.0, 126)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        threshold_db: float = 20.0,
        max_modes: int = 6,
        skip_s: float = 2e-4,
        min_frequency_hz: float = 0.0,
        max_frequency_hz: float | None = None,
        max_event_s: float = 2.0,
    ) -> None:
        if not (isinstance(channels, int) and channels >= 1):
            raise InputError(f"channels must be a positive integer, got {channels!r}")
        if not (isinstance(max_modes, int) and max_modes >= 1):
            raise InputError(f"max_modes must be a positive integer, got {max_modes!r}")
        if not (math.isfinite(skip_s) and skip_s >= 0):
            raise InputError(f"skip_s must be 0 or more seconds, got {skip_s!r}")
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = channels
        self.max_modes = max_modes
        self.skip_s = float(skip_s)
        self.min_frequency_hz = float(min_frequency_hz)
        self.max_frequency_hz = max_frequency_hz
        self._detectors = [
            EventDetector(
                sample_rate_hz,
                threshold_db=threshold_db,
                keep_samples=True,
                max_event_s=max_event_s,
            )
            for _ in range(channels)
        ]
        self._done: list[int] = [0] * channels
        self._modes: list[list[EventModes]] = [[] for _ in range(channels)]

    def update(self, block: np.ndarray) -> None:
        """Add a block (frames, channels)."""
        arr = np.asarray(block, dtype=np.float64)
        if arr.ndim != 2 or arr.shape[1] != self.channels:
            raise InputError(
                f"block must have shape (frames, {self.channels}), got {np.shape(block)}"
            )
        for i, det in enumerate(self._detectors):
            det.update(arr[:, i])
            # Identify closed events as they come; their samples are dropped then.
            for ev in det.take_closed():
                self._modes[i].append(self._identify(ev, det))
                self._done[i] += 1

    def _identify(self, ev: Event, det: EventDetector) -> EventModes:
        fs = self.sample_rate_hz
        x = ev.samples if ev.samples is not None else np.zeros(0)
        floor_db = det.floor_db()
        noise = 10 ** (floor_db / 20) if math.isfinite(floor_db) else 0.0
        k0 = int(np.argmax(np.abs(x))) + round(self.skip_s * fs)
        end = ev.stop_frame - ev.samples_start_frame
        seg = x[k0:end]
        modes: list[DecayMode] = []
        resid = float("nan")
        if seg.size >= 16:
            modes, resid = identify_modes(
                seg, fs, max_modes=self.max_modes, noise_rms=noise,
                min_frequency_hz=self.min_frequency_hz, max_frequency_hz=self.max_frequency_hz,
            )  # fmt: skip
        return EventModes(
            start_s=ev.start_s,
            duration_s=ev.duration_s,
            peak=ev.peak,
            fit_start_s=(ev.samples_start_frame + k0) / fs,
            fit_duration_s=min(seg.size, MAX_FIT_FRAMES) / fs,
            modes=tuple(modes),
            noise_rms=noise,
            residual_rms=resid,
        )

    def result(self) -> list[RingdownResult]:
        """One result per channel (events still open at the end are closed there)."""
        out = []
        for i, det in enumerate(self._detectors):
            events = list(self._modes[i])
            for ev in det.result()[self._done[i] :]:
                events.append(self._identify(ev, det))
            out.append(RingdownResult(i, self.sample_rate_hz, tuple(events), _summarise(events)))
        return out


def ringdown(x: np.ndarray, sample_rate_hz: float, **options) -> list[RingdownResult]:
    """Whole-array :class:`RingdownAnalyzer`: ``x`` of shape (frames,) or (frames, ch).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(4000) / 20000
    >>> x = np.where(t > 0.02, np.exp(-(t - 0.02) * 40) * np.sin(2e4 * (t - 0.02)), 0.0)
    >>> x += 1e-4 * np.random.default_rng(1).standard_normal(t.size)
    >>> [round(m.frequency_hz, 1) for m in ringdown(x, 20000.0)[0].modes]
    [3183.1]
    """
    arr = np.asarray(x, dtype=np.float64)
    arr = arr[:, None] if arr.ndim == 1 else arr
    analyzer = RingdownAnalyzer(sample_rate_hz, arr.shape[1], **options)
    analyzer.update(arr)
    return analyzer.result()
