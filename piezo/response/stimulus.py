"""Measurement stimuli: exponential sine sweep, its inverse filter, pink and white noise.

The exponential (logarithmic) sine sweep and its inverse filter follow A. Farina,
"Simultaneous measurement of impulse response and distortion with a swept-sine
technique", AES 108th Convention, Paris, 2000, preprint 5093:

    x(t) = A sin[(2π f1 T / R) (e^(R t / T) − 1)],   R = ln(f2 / f1),   0 ≤ t < T,

whose instantaneous frequency is f1 e^(R t / T). The inverse filter is the time-reversed
sweep whose amplitude falls by e^(−R τ / T) along the reversed time τ (6 dB per octave as
the frequency falls), which whitens the sweep's pink spectrum. Convolving a capture with
it gives the linear impulse response at time 0 and the impulse response of the N-th
harmonic Δt_N = T ln N / R earlier.

Levels are in dBFS with the convention of AES17 (a full-scale sine is 0 dBFS; from
memory): a sweep at −6 dBFS has a peak of 10^(−6/20) of full scale, and a noise at
−6 dBFS has the same RMS as that sine, 10^(−6/20)/√2.

Everything here is pure: parameters are small frozen dataclasses that render to and
parse from TOML text (the sidecar that lets analysis rebuild the inverse filter
exactly); writing files is left to the command line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any, ClassVar

import numpy as np
import scipy.fft

from piezo.errors import InputError, SpecError
from piezo.io.text import parse_toml, read_text
from piezo.io.toml import toml_value

__all__ = [
    "SENSOR_LEVEL_KEYS",
    "NoiseSpec",
    "SweepSpec",
    "harmonic_offsets_s",
    "inverse_filter",
    "noise_signal",
    "read_stimulus",
    "stimulus_from_toml",
    "sweep_signal",
    "sweep_spec",
]

#: Default fade-in length, in octaves of the sweep: the low band edge of the
#: deconvolved response is smooth over this span, which keeps its ringing short enough
#: for the analysis window (see ``piezo.response.measure``).
FADE_IN_OCTAVES = 0.5
#: Default fade-out length, in octaves of the sweep (a few milliseconds near 20 kHz).
FADE_OUT_OCTAVES = 1.0 / 24.0

_FORMAT_VERSION = 1

#: Sidecar key of the RMS amount the sweep makes at the sensor, per measured quantity,
#: in its SI unit (``acoustic_level_pa`` is the key older sidecars carry; at most one is
#: set). A channel's quantity names are those of :mod:`piezo.chain.quantity`.
SENSOR_LEVEL_KEYS = {
    "pressure": "acoustic_level_pa",
    "acceleration": "acceleration_level_m_per_s2",
    "velocity": "velocity_level_m_per_s",
    "displacement": "displacement_level_m",
    "force": "force_level_n",
}


def _positive(value: float, what: str) -> float:
    if not (isinstance(value, int | float) and math.isfinite(value) and value > 0):
        raise InputError(f"{what} must be a positive finite number, got {value!r}")
    return float(value)


def _non_negative(value: float, what: str) -> float:
    if not (isinstance(value, int | float) and math.isfinite(value) and value >= 0):
        raise InputError(f"{what} must be zero or a positive finite number, got {value!r}")
    return float(value)


def _level(value: float, what: str) -> float:
    if not (isinstance(value, int | float) and math.isfinite(value)):
        raise InputError(f"{what} must be a finite level in dBFS, got {value!r}")
    if value > 0:
        raise InputError(f"{what} must be at most 0 dBFS (full scale), got {value!r} dBFS")
    return float(value)


def _render_table(table: str, kind: str, values: dict[str, Any]) -> str:
    lines = [
        "# Stimulus written by piezo; analysis rebuilds the signal from these values.",
        f"format_version = {_FORMAT_VERSION}",
        "",
        f"[{table}]",
        f"kind = {toml_value(kind)}",
    ]
    for key, value in values.items():
        if value is not None:
            lines.append(f"{key} = {toml_value(value)}")
    return "\n".join(lines) + "\n"


def _table_values(cls: type, table: dict[str, Any], source: str) -> dict[str, Any]:
    known = {f.name for f in fields(cls)}
    unknown = sorted(set(table) - known - {"kind"})
    if unknown:
        raise SpecError(f"unknown key(s) {', '.join(unknown)} in the stimulus file", source=source)
    values: dict[str, Any] = {}
    for f in fields(cls):
        if f.name not in table:
            continue
        value = table[f.name]
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise SpecError(f"key {f.name!r} must be a number, got {value!r}", source=source)
        values[f.name] = int(value) if f.name == "seed" else float(value)
    return values


@dataclass(frozen=True)
class SweepSpec:
    """Every parameter of an exponential sine sweep stimulus (Farina 2000).

    Build one with :func:`sweep_spec`, which fills in the default fades. The stimulus is
    ``silence_before_s`` of zeros, then the sweep of ``duration_s`` from ``start_hz`` to
    ``stop_hz`` with half-Hann fades at both ends (inside the sweep duration), then
    ``silence_after_s`` of zeros.

    Attributes
    ----------
    start_hz, stop_hz
        Sweep start frequency f1 and stop frequency f2, Hz; 0 < f1 < f2 ≤ fs/2.
    duration_s
        Sweep duration T in seconds (the fades lie inside it, the silences outside).
    sample_rate_hz
        Sample rate of the stimulus, Hz.
    level_dbfs
        Peak of the sweep in dBFS (≤ 0).
    fade_in_s, fade_out_s
        Half-Hann fade lengths in seconds.
    silence_before_s, silence_after_s
        Zeros before and after the sweep, seconds.
    acoustic_level_pa
        RMS sound pressure the sweep produces at the sensor, Pa, when known (from a
        reference microphone or coupler calibration). It turns the measured response
        into a sensitivity in V/Pa. ``None`` leaves the response relative.
    acceleration_level_m_per_s2, velocity_level_m_per_s, displacement_level_m, force_level_n
        The same for a shaker or a force exciter: the RMS amount of that quantity at the
        sensor (from a reference accelerometer or force sensor), in its SI unit; the
        response becomes a sensitivity in V/(m/s²), V/(m/s), V/m or V/N. At most one of
        these and ``acoustic_level_pa`` is set (:attr:`sensor_level`).

    Examples
    --------
    A 20 Hz - 20 kHz sweep has ``R = ln 1000 = 6.908``; halfway through it is at the
    geometric mean ``√(f1·f2) = 632.5`` Hz; -6 dBFS is a peak of ``10^(-6/20)``:

    >>> spec = sweep_spec(20.0, 20000.0, 1.0, 48000.0)
    >>> round(spec.rate_constant, 3), spec.sweep_frames, round(spec.amplitude, 4)
    (6.908, 48000, 0.5012)
    >>> round(float(spec.instantaneous_frequency_hz(0.5)), 1)
    632.5
    >>> SweepSpec.from_toml(spec.to_toml()) == spec
    True
    """

    kind: ClassVar[str] = "exponential-sine-sweep"

    start_hz: float
    stop_hz: float
    duration_s: float
    sample_rate_hz: float
    level_dbfs: float
    fade_in_s: float
    fade_out_s: float
    silence_before_s: float = 0.0
    silence_after_s: float = 0.0
    acoustic_level_pa: float | None = None
    acceleration_level_m_per_s2: float | None = None
    velocity_level_m_per_s: float | None = None
    displacement_level_m: float | None = None
    force_level_n: float | None = None

    def __post_init__(self) -> None:
        fs = _positive(self.sample_rate_hz, "sample_rate_hz")
        f1 = _positive(self.start_hz, "start_hz")
        f2 = _positive(self.stop_hz, "stop_hz")
        if f2 <= f1:
            raise InputError(
                f"stop_hz ({f2:g} Hz) must be above start_hz ({f1:g} Hz) for a rising sweep"
            )
        if f2 > fs / 2:
            raise InputError(
                f"stop_hz ({f2:g} Hz) is above half the sample rate ({fs / 2:g} Hz); "
                "lower it or raise the sample rate"
            )
        duration = _positive(self.duration_s, "duration_s")
        if duration * fs < 64:
            raise InputError(
                f"duration_s ({duration:g} s) gives fewer than 64 samples at {fs:g} Hz"
            )
        _level(self.level_dbfs, "level_dbfs")
        fade_in = _non_negative(self.fade_in_s, "fade_in_s")
        fade_out = _non_negative(self.fade_out_s, "fade_out_s")
        if fade_in + fade_out > duration:
            raise InputError(
                f"fades ({fade_in:g} s + {fade_out:g} s) are longer than the sweep "
                f"({duration:g} s)"
            )
        _non_negative(self.silence_before_s, "silence_before_s")
        _non_negative(self.silence_after_s, "silence_after_s")
        given = [k for k in SENSOR_LEVEL_KEYS.values() if getattr(self, k) is not None]
        if len(given) > 1:
            raise InputError(
                f"the sweep's level at the sensor is given twice ({' and '.join(given)}); "
                "keep the one of the quantity the sensor measures"
            )
        for key in given:
            _positive(getattr(self, key), key)

    @property
    def sensor_level(self) -> tuple[float, str] | None:
        """The RMS amount the sweep makes at the sensor and its quantity, or None.

        The value is in the quantity's SI unit (Pa, m/s², m/s, m, N).

        Examples
        --------
        >>> spec = sweep_spec(20.0, 2000.0, 1.0, 8000.0, sensor_level=9.80665,
        ...                   sensor_quantity="acceleration")
        >>> spec.sensor_level, spec.acceleration_level_m_per_s2, spec.acoustic_level_pa
        ((9.80665, 'acceleration'), 9.80665, None)
        """
        for quantity, key in SENSOR_LEVEL_KEYS.items():
            value = getattr(self, key)
            if value is not None:
                return float(value), quantity
        return None

    # -- derived quantities -------------------------------------------------------------
    @property
    def rate_constant(self) -> float:
        """R = ln(f2 / f1), the sweep's rate constant (Farina 2000)."""
        return math.log(self.stop_hz / self.start_hz)

    @property
    def sweep_frames(self) -> int:
        """Number of samples of the sweep itself (without silences)."""
        return round(self.duration_s * self.sample_rate_hz)

    @property
    def silence_before_frames(self) -> int:
        """Number of leading zero samples."""
        return round(self.silence_before_s * self.sample_rate_hz)

    @property
    def silence_after_frames(self) -> int:
        """Number of trailing zero samples."""
        return round(self.silence_after_s * self.sample_rate_hz)

    @property
    def frames(self) -> int:
        """Total number of samples of the stimulus."""
        return self.silence_before_frames + self.sweep_frames + self.silence_after_frames

    @property
    def amplitude(self) -> float:
        """Peak amplitude of the sweep as a fraction of full scale."""
        return 10.0 ** (self.level_dbfs / 20.0)

    def instantaneous_frequency_hz(self, time_s: np.ndarray | float) -> np.ndarray:
        """Instantaneous frequency f1 e^(R t / T) at ``time_s`` from the sweep start."""
        t = np.asarray(time_s, dtype=np.float64)
        return self.start_hz * np.exp(self.rate_constant * t / self.duration_s)

    # -- sidecar ----------------------------------------------------------------------
    def to_toml(self) -> str:
        """Render the parameters as TOML text (floats written exactly)."""
        values = {f.name: getattr(self, f.name) for f in fields(self)}
        return _render_table("stimulus", self.kind, values)

    @classmethod
    def from_toml(cls, text: str, *, source: str | None = None) -> SweepSpec:
        """Parse TOML text written by :meth:`to_toml`."""
        spec = stimulus_from_toml(text, source=source)
        if not isinstance(spec, SweepSpec):
            raise SpecError(
                f"the stimulus file describes {spec.kind!r}, not an exponential sine sweep",
                source=source,
            )
        return spec


@dataclass(frozen=True)
class NoiseSpec:
    """Parameters of a seeded noise stimulus.

    Attributes
    ----------
    color
        ``"white"`` (flat power spectral density) or ``"pink"`` (density ∝ 1/f, equal
        power per octave).
    duration_s
        Length in seconds.
    sample_rate_hz
        Sample rate, Hz.
    level_dbfs
        RMS level in dBFS (AES17 convention: 0 dBFS is the RMS of a full-scale sine).
    seed
        Seed of ``numpy.random.default_rng``; the same spec always gives the same noise.
    fade_s
        Half-Hann fade at both ends, seconds.

    Examples
    --------
    >>> spec = NoiseSpec("pink", 0.5, 48000.0, -20.0, seed=7)
    >>> spec.frames
    24000
    >>> print(spec.to_toml().splitlines()[4])
    kind = "pink-noise"
    """

    kind: ClassVar[str] = "noise"

    color: str
    duration_s: float
    sample_rate_hz: float
    level_dbfs: float
    seed: int
    fade_s: float = 0.0

    def __post_init__(self) -> None:
        if self.color not in ("white", "pink"):
            raise InputError(f"noise color must be 'white' or 'pink', got {self.color!r}")
        fs = _positive(self.sample_rate_hz, "sample_rate_hz")
        duration = _positive(self.duration_s, "duration_s")
        if duration * fs < 16:
            raise InputError(f"duration_s ({duration:g} s) gives fewer than 16 samples")
        _level(self.level_dbfs, "level_dbfs")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise InputError(f"seed must be a non-negative integer, got {self.seed!r}")
        fade = _non_negative(self.fade_s, "fade_s")
        if 2 * fade > duration:
            raise InputError(f"fade_s ({fade:g} s) is longer than half the noise ({duration:g} s)")

    @property
    def frames(self) -> int:
        """Number of samples."""
        return round(self.duration_s * self.sample_rate_hz)

    def to_toml(self) -> str:
        """Render the parameters as TOML text."""
        values: dict[str, Any] = {f.name: getattr(self, f.name) for f in fields(self)}
        color = values.pop("color")
        return _render_table("stimulus", f"{color}-noise", values)


def stimulus_from_toml(text: str, *, source: str | None = None) -> SweepSpec | NoiseSpec:
    """Parse a stimulus sidecar (TOML text) into a :class:`SweepSpec` or :class:`NoiseSpec`.

    Raises
    ------
    SpecError
        If the text is not TOML, has no ``[stimulus]`` table, names an unknown kind or
        carries an unknown or non-numeric key.

    Examples
    --------
    >>> text = NoiseSpec("white", 2.0, 48000.0, -20.0, seed=1).to_toml()
    >>> stimulus_from_toml(text)
    NoiseSpec(color='white', duration_s=2.0, sample_rate_hz=48000.0, level_dbfs=-20.0,
              seed=1, fade_s=0.0)
    >>> stimulus_from_toml("[stimulus]\\nkind = 'chirp'\\n")
    Traceback (most recent call last):
    ...
    piezo.errors.SpecError: ...unknown stimulus kind 'chirp'...
    """
    doc = parse_toml(text, source=source, error=SpecError)
    table = doc.get("stimulus")
    if not isinstance(table, dict):
        raise SpecError("no [stimulus] table in the stimulus file", source=source)
    kind = table.get("kind")
    try:
        if kind == SweepSpec.kind:
            return SweepSpec(**_table_values(SweepSpec, table, source or "stimulus"))
        if kind in ("white-noise", "pink-noise"):
            values = _table_values(NoiseSpec, table, source or "stimulus")
            return NoiseSpec(color=str(kind).split("-")[0], **values)
    except TypeError as exc:
        raise SpecError(f"incomplete [stimulus] table: {exc}", source=source) from None
    except InputError as exc:
        raise SpecError(exc.message, source=source) from None
    raise SpecError(
        f"unknown stimulus kind {kind!r}; expected {SweepSpec.kind!r}, 'white-noise' or "
        "'pink-noise'",
        source=source,
    )


def read_stimulus(path: str | Path) -> tuple[SweepSpec | NoiseSpec, str]:
    """Read a stimulus sidecar file: the one reader of such files.

    The file is read with :func:`piezo.io.text.read_text` (bounded size, UTF-8) and
    parsed with :func:`stimulus_from_toml`. Returns the stimulus and the file's text
    (kept by callers that record exactly what they analysed).

    Raises
    ------
    SpecError
        Missing, unreadable or invalid files, naming the file.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.stimulus.toml"
    >>> _ = p.write_text(sweep_spec(20.0, 20000.0, 1.0, 48000.0).to_toml())
    >>> read_stimulus(p)[0].stop_hz
    20000.0
    """
    text = read_text(path, what="stimulus file", error=SpecError)
    return stimulus_from_toml(text, source=str(path)), text


def sweep_spec(
    start_hz: float,
    stop_hz: float,
    duration_s: float,
    sample_rate_hz: float,
    *,
    level_dbfs: float = -6.0,
    fade_in_s: float | None = None,
    fade_out_s: float | None = None,
    silence_before_s: float = 0.0,
    silence_after_s: float = 0.0,
    acoustic_level_pa: float | None = None,
    sensor_level: float | None = None,
    sensor_quantity: str = "pressure",
) -> SweepSpec:
    """Build a :class:`SweepSpec`, choosing the fades when they are not given.

    The default fade-in spans the first half octave of the sweep and the default fade-out
    the last 1/24 octave, i.e. T·ln(2^k)/R seconds for k octaves. The level at the
    sensor is ``acoustic_level_pa`` (sound pressure, Pa RMS) or ``sensor_level``, the RMS
    amount of ``sensor_quantity`` in its SI unit (:data:`SENSOR_LEVEL_KEYS`).

    Examples
    --------
    Ten octaves in 10 s: one octave per second, so the fades last 1/2 s and 1/24 s:

    >>> spec = sweep_spec(20.0, 20480.0, 10.0, 48000.0)
    >>> round(spec.fade_in_s, 6), round(spec.fade_out_s, 6), spec.level_dbfs
    (0.5, 0.041667, -6.0)
    """
    ratio = stop_hz / start_hz if start_hz > 0 and stop_hz > start_hz else math.e
    seconds_per_octave = duration_s * math.log(2.0) / math.log(ratio) if duration_s > 0 else 0.0
    if fade_in_s is None:
        fade_in_s = FADE_IN_OCTAVES * seconds_per_octave
    if fade_out_s is None:
        fade_out_s = FADE_OUT_OCTAVES * seconds_per_octave
    return SweepSpec(
        start_hz=float(start_hz),
        stop_hz=float(stop_hz),
        duration_s=float(duration_s),
        sample_rate_hz=float(sample_rate_hz),
        level_dbfs=float(level_dbfs),
        fade_in_s=float(fade_in_s),
        fade_out_s=float(fade_out_s),
        silence_before_s=float(silence_before_s),
        silence_after_s=float(silence_after_s),
        **_sensor_level_field(sensor_level, sensor_quantity, acoustic_level_pa),
    )


def _sensor_level_field(
    value: float | None, quantity: str, acoustic_level_pa: float | None
) -> dict[str, float]:
    """The :class:`SweepSpec` field that holds the level at the sensor (none: empty)."""
    if value is None:
        return {} if acoustic_level_pa is None else {"acoustic_level_pa": float(acoustic_level_pa)}
    key = SENSOR_LEVEL_KEYS.get(quantity)
    if key is None:
        raise InputError(
            f"sensor_quantity {quantity!r}: the level at the sensor is one of "
            f"{', '.join(SENSOR_LEVEL_KEYS)}"
        )
    if acoustic_level_pa is not None:
        raise InputError("give acoustic_level_pa or sensor_level, not both")
    return {key: float(value)}


def _half_hann_fades(frames: int, fade_in: int, fade_out: int) -> np.ndarray:
    """Gain curve rising over ``fade_in`` samples and falling over ``fade_out`` samples."""
    gain = np.ones(frames)
    if fade_in > 0:
        k = np.arange(fade_in)
        gain[:fade_in] = 0.5 * (1.0 - np.cos(np.pi * k / fade_in))
    if fade_out > 0:
        k = np.arange(fade_out)
        gain[frames - fade_out :] *= 0.5 * (1.0 + np.cos(np.pi * (k + 1) / fade_out))
    return gain


def _sweep_only(spec: SweepSpec) -> np.ndarray:
    """The faded sweep without its silences, in fractions of full scale."""
    n = spec.sweep_frames
    t = np.arange(n) / spec.sample_rate_hz
    r = spec.rate_constant
    big_t = spec.duration_s
    phase = 2.0 * np.pi * spec.start_hz * big_t / r * np.expm1(r * t / big_t)
    fade_in = round(spec.fade_in_s * spec.sample_rate_hz)
    fade_out = round(spec.fade_out_s * spec.sample_rate_hz)
    return spec.amplitude * np.sin(phase) * _half_hann_fades(n, fade_in, fade_out)


def sweep_signal(spec: SweepSpec) -> np.ndarray:
    """The stimulus samples, shape (frames,), in fractions of full scale.

    Leading silence, the faded exponential sweep (Farina 2000), trailing silence.

    Examples
    --------
    >>> spec = sweep_spec(20.0, 20000.0, 1.0, 48000.0, silence_before_s=0.1,
    ...                   silence_after_s=0.5)
    >>> x = sweep_signal(spec)
    >>> x.shape, float(np.abs(x[:4800]).max()), round(float(np.abs(x).max()), 4)
    ((76800,), 0.0, 0.5012)
    """
    return np.concatenate(
        [
            np.zeros(spec.silence_before_frames),
            _sweep_only(spec),
            np.zeros(spec.silence_after_frames),
        ]
    )


def inverse_filter(spec: SweepSpec) -> np.ndarray:
    """Inverse filter of the sweep, shape (sweep_frames,).

    The time-reversed faded sweep multiplied by the envelope e^(−R τ / T), τ being the
    time along the reversed signal (Farina 2000), then scaled so that convolving the
    stimulus's sweep with it gives unit gain: the mean of |X(f) F(f)| over
    √2 f1 … f2/√2, weighted evenly per octave, is 1. A capture equal to the stimulus
    therefore deconvolves to a unit impulse at lag ``sweep_frames − 1`` of the full
    convolution, counted from the sweep start.

    Examples
    --------
    The sweep convolved with its inverse peaks at lag ``sweep_frames − 1`` and has unit
    gain across the band (to 0.2 %):

    >>> from scipy import signal
    >>> spec = sweep_spec(20.0, 20000.0, 1.0, 48000.0)
    >>> y = signal.fftconvolve(sweep_signal(spec), inverse_filter(spec))
    >>> int(np.argmax(np.abs(y))) == spec.sweep_frames - 1
    True
    >>> gain = np.abs(np.fft.rfft(y))
    >>> f = np.fft.rfftfreq(y.size, 1 / 48000.0)
    >>> [round(float(gain[np.argmin(np.abs(f - fk))]), 2) for fk in (100, 1000, 10000)]
    [1.0, 1.0, 1.0]
    """
    return _inverse_and_reference(spec)[0]


def _inverse_and_reference(spec: SweepSpec) -> tuple[np.ndarray, np.ndarray]:
    """The inverse filter and the deconvolved sweep itself (sweep * inverse).

    The reference has length 2·sweep_frames (rounded up for the FFT); its zero lag is
    at index ``sweep_frames − 1``.
    """
    sweep = _sweep_only(spec)
    n = sweep.size
    tau = np.arange(n) / spec.sample_rate_hz
    inverse = sweep[::-1] * np.exp(-spec.rate_constant * tau / spec.duration_s)
    nfft = scipy.fft.next_fast_len(2 * n, real=True)
    product = scipy.fft.rfft(sweep, nfft) * scipy.fft.rfft(inverse, nfft)
    magnitude = np.abs(product)
    freq = scipy.fft.rfftfreq(nfft, 1.0 / spec.sample_rate_hz)
    band = (freq >= spec.start_hz * math.sqrt(2.0)) & (freq <= spec.stop_hz / math.sqrt(2.0))
    if np.count_nonzero(band) < 2:
        band = (freq >= spec.start_hz) & (freq <= spec.stop_hz)
    if np.count_nonzero(band) < 2:
        raise InputError(
            f"the sweep {spec.start_hz:g}–{spec.stop_hz:g} Hz over {spec.duration_s:g} s is "
            "too short to resolve its own band; make it longer or wider"
        )
    weight = 1.0 / freq[band]
    gain = float(np.sum(magnitude[band] * weight) / np.sum(weight))
    reference = scipy.fft.irfft(product / gain, nfft)
    return inverse / gain, reference


def harmonic_offsets_s(spec: SweepSpec, orders: int | list[int] = 5) -> dict[int, float]:
    """Time by which the N-th harmonic impulse response precedes the linear one.

    Δt_N = T ln N / ln(f2 / f1) (Farina 2000), in seconds, for N = 2 … ``orders`` (or the
    listed orders).

    Examples
    --------
    With one octave per second the 2nd harmonic comes 1 s early, the 4th 2 s early:

    >>> offsets = harmonic_offsets_s(sweep_spec(20.0, 20480.0, 10.0, 48000.0), 4)
    >>> {n: round(dt, 4) for n, dt in offsets.items()}
    {2: 1.0, 3: 1.585, 4: 2.0}
    """
    wanted = list(range(2, orders + 1)) if isinstance(orders, int) else list(orders)
    return {n: spec.duration_s * math.log(n) / spec.rate_constant for n in wanted}


def noise_signal(spec: NoiseSpec) -> np.ndarray:
    """Seeded white or pink noise, shape (frames,), in fractions of full scale.

    Both are shaped in the frequency domain from one Gaussian draw: white keeps the
    spectrum flat, pink scales bin k by 1/√k (power ∝ 1/f, equal power per octave). The
    DC bin is removed and the result scaled to the RMS of ``level_dbfs``. The peak is not
    limited: Gaussian noise has a crest factor of about 4 to 5, so a level above about
    −15 dBFS may clip when played; :func:`noise_signal` raises if a sample would exceed
    full scale.

    Examples
    --------
    At -20 dBFS the RMS is that of a sine of peak 0.1, ``0.1/√2``; the seed makes it
    repeatable:

    >>> spec = NoiseSpec("pink", 1.0, 48000.0, -20.0, seed=7)
    >>> x = noise_signal(spec)
    >>> round(float(np.sqrt(np.mean(x**2))), 6), bool(np.array_equal(x, noise_signal(spec)))
    (0.070711, True)
    """
    n = spec.frames
    rng = np.random.default_rng(spec.seed)
    spectrum = scipy.fft.rfft(rng.standard_normal(n))
    spectrum[0] = 0.0
    if spec.color == "pink":
        k = np.arange(1, spectrum.size)
        spectrum[1:] /= np.sqrt(k)
    signal = scipy.fft.irfft(spectrum, n)
    fade = round(spec.fade_s * spec.sample_rate_hz)
    signal *= _half_hann_fades(n, fade, fade)
    target_rms = 10.0 ** (spec.level_dbfs / 20.0) / math.sqrt(2.0)
    signal *= target_rms / math.sqrt(float(np.mean(signal**2)))
    peak = float(np.max(np.abs(signal)))
    if peak > 1.0:
        raise InputError(
            f"level_dbfs {spec.level_dbfs:g} dBFS makes the {spec.color} noise peak at "
            f"{20 * math.log10(peak):+.1f} dB re full scale; lower the level by at least "
            f"{20 * math.log10(peak):.1f} dB"
        )
    return signal
