"""Frequency weightings A, C, Z and time weightings F, S of IEC 61672-1:2013.

Frequency weightings
--------------------
The analytic weightings follow IEC 61672-1:2013, Annex E: the pole frequencies f1..f4
are derived from the design constants f_r, f_L, f_H, f_A and D, and each weighting is a
product of the same few factors (:data:`WEIGHTING_TABLE`), normalised to 0 dB at 1 kHz.

The digital filters (:func:`weighting_sos`) are built in two parts:

1. the low-frequency high-pass factors (poles f1, f1 for C; f1, f1, f2, f3 for A) by the
   bilinear transform, which is accurate there because f3 = 738 Hz is far below the
   Nyquist frequency of any supported rate;
2. the high-frequency factor (the double pole f4 = 12.2 kHz), where the bilinear
   transform fails near Nyquist, replaced by one second-order section fitted by least
   squares (Levenberg-Marquardt, deterministic start at the matched-z poles) to the
   analytic curve in dB on 400 log-spaced frequencies from 10 Hz to 0.45 f_s.

The A filter is the C filter followed by the A-only sections (f2, f3 and a second small
fitted correction), so a level meter can take both outputs from one chain. Designs are
cached per sample rate. :func:`conformance` measures a design against the analytic curve
and the class 1 acceptance limits of IEC 61672-1:2013, Table 3.

Time weightings
---------------
F (fast, 125 ms) and S (slow, 1 s) are exponential averages of the squared
frequency-weighted signal (IEC 61672-1:2013, the time-weighting clause 5.8; clause
number from memory), realised as
the one-pole recursion ``y[n] = a y[n-1] + (1 - a) x[n]`` with ``a = exp(-1/(tau f_s))``
(unit gain for a steady input). :class:`ExponentialAverager` streams it with carried state.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

import piezo.sos
from piezo import validate
from piezo._kernels.cache import cached_arrays, code_digest
from piezo._kernels.filters import sosfilt_inplace
from piezo.errors import InputError
from piezo.sos import sos_response_db

__all__ = [
    "A1000_DB",
    "C1000_DB",
    "CLASS1_LIMITS_DB",
    "F1_HZ",
    "F2_HZ",
    "F3_HZ",
    "F4_HZ",
    "MIN_SAMPLE_RATE_HZ",
    "NOMINAL_THIRD_OCTAVE_HZ",
    "TIME_CONSTANTS_S",
    "WEIGHTINGS",
    "ConformanceReport",
    "ConformanceRow",
    "ExponentialAverager",
    "FrequencyWeighting",
    "conformance",
    "exact_third_octave_hz",
    "filter_response_db",
    "time_weighting_coefficient",
    "weighting_chain_sos",
    "weighting_chain_zi",
    "weighting_db",
    "weighting_sos",
]

# --- IEC 61672-1:2013, Annex E: design constants ------------------------------------
_FR_HZ = 1000.0  # reference frequency f_r
_FL_HZ = 10**1.5  # f_L
_FH_HZ = 10**3.9  # f_H
_FA_HZ = 10**2.45  # f_A
_D = math.sqrt(0.5)  # D, with D^2 = 1/2


def _pole_frequencies() -> tuple[float, float, float, float]:
    """f1..f4 from the design constants (IEC 61672-1:2013, Annex E)."""
    c = _FL_HZ**2 * _FH_HZ**2
    b = (1.0 / (1.0 - _D)) * (
        _FR_HZ**2 + _FL_HZ**2 * _FH_HZ**2 / _FR_HZ**2 - _D * (_FL_HZ**2 + _FH_HZ**2)
    )
    root = math.sqrt(b * b - 4.0 * c)
    f1 = math.sqrt((-b - root) / 2.0)
    f4 = math.sqrt((-b + root) / 2.0)
    f2 = (3.0 - math.sqrt(5.0)) / 2.0 * _FA_HZ
    f3 = (3.0 + math.sqrt(5.0)) / 2.0 * _FA_HZ
    return f1, f2, f3, f4


F1_HZ, F2_HZ, F3_HZ, F4_HZ = _pole_frequencies()

#: Weighting -> (number of zeros at 0 Hz, pole frequencies in Hz). The magnitude is
#: ``f4^2 f^n / prod(sqrt(f^2 + fk^2))`` over the poles (Annex E), then normalised.
WEIGHTING_TABLE: dict[str, tuple[int, tuple[float, ...]]] = {
    "A": (4, (F1_HZ, F1_HZ, F2_HZ, F3_HZ, F4_HZ, F4_HZ)),
    "C": (2, (F1_HZ, F1_HZ, F4_HZ, F4_HZ)),
    "Z": (0, ()),
}
WEIGHTINGS = tuple(WEIGHTING_TABLE)


def _unnormalised_db(frequency_hz: np.ndarray, weighting: str) -> np.ndarray:
    zeros, poles = WEIGHTING_TABLE[weighting]
    if not poles:
        return np.zeros_like(frequency_hz)
    f2 = frequency_hz * frequency_hz
    with np.errstate(divide="ignore"):
        level = 20.0 * np.log10(F4_HZ**2) + 10.0 * zeros * np.log10(f2)
        for fk in poles:
            level = level - 10.0 * np.log10(f2 + fk * fk)
    return level


#: Normalisation constants (dB): the unnormalised weightings at 1 kHz. The standard
#: quotes them rounded, C1000 = -0.062 dB and A1000 = -2.000 dB; the exact values are
#: used so that both weightings read exactly 0 dB at 1 kHz.
C1000_DB = float(_unnormalised_db(np.array(_FR_HZ), "C"))
A1000_DB = float(_unnormalised_db(np.array(_FR_HZ), "A"))
_NORMALISATION_DB = {"A": A1000_DB, "C": C1000_DB, "Z": 0.0}


def _check_weighting(weighting: str) -> str:
    key = str(weighting).upper()
    if key not in WEIGHTING_TABLE:
        raise InputError(f"weighting must be one of A, C, Z; got {weighting!r}")
    return key


def weighting_db(frequency_hz: ArrayLike, *, weighting: str) -> np.ndarray:
    """Analytic frequency weighting in dB (IEC 61672-1:2013, Annex E).

    Parameters
    ----------
    frequency_hz
        Frequencies in Hz (any shape, >= 0). 0 Hz gives -inf for A and C.
    weighting
        ``"A"``, ``"C"`` or ``"Z"``.

    Returns
    -------
    numpy.ndarray
        Weighting in dB, 0 dB at 1 kHz, same shape as ``frequency_hz``.

    Examples
    --------
    >>> round(float(weighting_db(100.0, weighting="A")), 1)
    -19.1
    """
    key = _check_weighting(weighting)
    f = np.asarray(frequency_hz, dtype=float)
    if np.any(f < 0) or not np.all(np.isfinite(f)):
        raise InputError("frequency_hz must be finite and >= 0")
    return _unnormalised_db(f, key) - _NORMALISATION_DB[key]


# --- IEC 61672-1:2013, Table 3: nominal frequencies and class 1 acceptance limits ----
#: Nominal one-third-octave frequencies of Table 3, 10 Hz to 20 kHz.
NOMINAL_THIRD_OCTAVE_HZ: tuple[float, ...] = (
    10, 12.5, 16, 20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500,
    630, 800, 1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500,
    16000, 20000,
)  # fmt: skip

#: Class 1 acceptance limits (upper, lower) in dB at each nominal frequency, Table 3.
CLASS1_LIMITS_DB: tuple[tuple[float, float], ...] = (
    (3.0, -math.inf), (2.5, -math.inf), (2.0, -4.0), (2.0, -2.0), (2.0, -1.5),
    (1.5, -1.5), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0),
    (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0),
    (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (0.7, -0.7), (1.0, -1.0), (1.0, -1.0),
    (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.0, -1.0), (1.5, -1.5), (1.5, -2.0),
    (1.5, -2.5), (2.0, -3.0), (2.0, -5.0), (2.5, -16.0), (3.0, -math.inf),
)  # fmt: skip


def exact_third_octave_hz() -> np.ndarray:
    """Exact base-10 frequencies 1000 * 10^(n/10), n = -20..13, behind Table 3's rows.

    Examples
    --------
    Table 3's nominal 12.5 Hz, 1 kHz and 20 kHz rows stand for these exact frequencies:

    >>> f = exact_third_octave_hz()
    >>> len(f), round(float(f[1]), 3), float(f[20]), round(float(f[-1]), 1)
    (34, 12.589, 1000.0, 19952.6)
    """
    return 1000.0 * 10.0 ** (np.arange(-20, 14) / 10.0)


# --- digital realisation ---------------------------------------------------------------
#: Lowest sample rate the digital weightings are designed for.
MIN_SAMPLE_RATE_HZ = 8000.0
_FIT_POINTS = 400
_FIT_LOW_HZ = 10.0
_FIT_TOP_FRACTION = 0.45  # fit up to 0.45 f_s
_FIT_FULL_WEIGHT_HZ = 20000.0  # full weight up to min(20 kHz, 0.42 f_s), 0.1 above


def _check_rate(sample_rate_hz: float) -> float:
    return validate.sample_rate(
        sample_rate_hz,
        minimum_hz=MIN_SAMPLE_RATE_HZ,
        purpose="for the IEC 61672-1 weighting filters",
    )


def _bilinear_highpass(poles_hz: tuple[float, ...], zeros: int, fs: float) -> np.ndarray:
    """Bilinear transform of s^zeros / prod(s + 2 pi fk), as second-order sections."""
    from scipy import signal

    z, p, k = signal.bilinear_zpk(
        np.zeros(zeros), -2.0 * np.pi * np.asarray(poles_hz, dtype=float), 1.0, fs
    )
    return signal.zpk2sos(z, p, k)


def _sos_db(sos: np.ndarray, frequency_hz: np.ndarray, fs: float) -> np.ndarray:
    if len(sos) == 0:
        return np.zeros_like(frequency_hz)
    return sos_response_db(sos, frequency_hz, fs)


def _section(params: np.ndarray) -> np.ndarray:
    """One biquad from (b1, b2, atanh k1, atanh k2); reflection coefficients keep it stable."""
    b1, b2, t1, t2 = params
    k1, k2 = math.tanh(t1), math.tanh(t2)
    return np.array([[1.0, b1, b2, 1.0, k1 * (1.0 + k2), k2]])


def _fit_section(base: np.ndarray, weighting: str, fs: float, *, start_at_f4: bool) -> np.ndarray:
    """Least-squares fit of one biquad so that ``base`` times it matches the analytic curve."""
    from scipy import optimize

    f = np.geomspace(_FIT_LOW_HZ, _FIT_TOP_FRACTION * fs, _FIT_POINTS)
    target = weighting_db(f, weighting=weighting) - _sos_db(base, f, fs)
    weight = np.where(f <= min(_FIT_FULL_WEIGHT_HZ, 0.42 * fs), 1.0, 0.1)

    def residual(params: np.ndarray) -> np.ndarray:
        r = _sos_db(_section(params), f, fs) - target
        return (r - np.average(r, weights=weight)) * weight  # overall gain is free

    if start_at_f4:  # matched-z double pole at f4, no zeros
        pole = math.exp(-2.0 * math.pi * F4_HZ / fs)
        k2 = pole * pole
        k1 = -2.0 * pole / (1.0 + k2)
        start = np.array([0.0, 0.0, math.atanh(k1), math.atanh(k2)])
    else:  # a pass-through section: the base is already close
        start = np.zeros(4)
    sol = optimize.least_squares(
        residual, start, method="lm", xtol=1e-12, ftol=1e-12, max_nfev=2000
    )
    sec = _section(sol.x)
    # Zeros outside the unit circle (same magnitude, more phase) are reflected inside so
    # the whole weighting stays minimum phase like its analog prototype.
    zeros = np.roots(sec[0, :3])
    outside = np.abs(zeros) > 1.0
    if np.any(outside):
        zeros = np.where(outside, 1.0 / np.conj(zeros), zeros)
        sec[0, :3] = np.real(np.poly(zeros))
    return sec


def _normalise(sos: np.ndarray, fs: float) -> np.ndarray:
    sos = sos.copy()
    sos[0, :3] *= 10.0 ** (-_sos_db(sos, np.array([_FR_HZ]), fs)[0] / 20.0)
    return sos


@functools.lru_cache(maxsize=32)
def _design(fs: float) -> tuple[np.ndarray, np.ndarray]:
    """(C sections, A-only sections) for sample rate ``fs``; A = C followed by A-only.

    The fit runs once per sample rate and this module's code: later processes read it
    from the per-user design cache (:func:`piezo._kernels.cache.cached_arrays`).
    """
    key = f"{fs!r} {_source_digest()}"
    stored = cached_arrays("weighting", key, lambda: dict(zip("ca", _fit_design(fs), strict=True)))
    c_sos, a_extra = np.array(stored["c"], dtype=float), np.array(stored["a"], dtype=float)
    c_sos.flags.writeable = False
    a_extra.flags.writeable = False
    return c_sos, a_extra


def _source_digest() -> str:
    # This module and the response evaluation its design normalises with.
    return code_digest(__file__, piezo.sos.__file__)


def _fit_design(fs: float) -> tuple[np.ndarray, np.ndarray]:
    hp1 = _bilinear_highpass((F1_HZ, F1_HZ), 2, fs)
    c_sos = _normalise(np.vstack([hp1, _fit_section(hp1, "C", fs, start_at_f4=True)]), fs)
    hp23 = _bilinear_highpass((F2_HZ, F3_HZ), 2, fs)
    base = np.vstack([c_sos, hp23])
    a_extra = np.vstack([hp23, _fit_section(base, "A", fs, start_at_f4=False)])
    # Normalise the A-only part so that the whole A chain reads 0 dB at 1 kHz.
    gain_db = _sos_db(np.vstack([c_sos, a_extra]), np.array([_FR_HZ]), fs)[0]
    a_extra[0, :3] *= 10.0 ** (-gain_db / 20.0)
    return c_sos, a_extra


def weighting_chain_sos(sample_rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """C-weighting sections and the sections that turn a C-weighted signal into A-weighted.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz, at least 8 kHz.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        ``(c_sos, a_after_c_sos)``, each of shape (sections, 6) for
        :func:`scipy.signal.sosfilt`. Filtering with ``c_sos`` gives the C-weighted
        signal; filtering that with ``a_after_c_sos`` gives the A-weighted signal.

    Examples
    --------
    The two parts together are the A-weighting filter of :func:`weighting_sos`:

    >>> c_sos, a_after_c_sos = weighting_chain_sos(48000)
    >>> c_sos.shape, a_after_c_sos.shape
    ((2, 6), (2, 6))
    >>> bool(np.array_equal(np.vstack([c_sos, a_after_c_sos]), weighting_sos("A", 48000)))
    True
    """
    c_sos, a_extra = _design(_check_rate(sample_rate_hz))
    return c_sos.copy(), a_extra.copy()


def weighting_chain_zi(sample_rate_hz: float) -> np.ndarray:
    """Steady state of the C-weighting sections for a constant unit input.

    What :func:`scipy.signal.sosfilt_zi` gives for the ``c_sos`` of
    :func:`weighting_chain_sos`, kept in the design cache with it. Multiplied by a first
    sample it starts a filter without a step.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz, at least 8 kHz.

    Returns
    -------
    numpy.ndarray
        Shape (sections, 2).

    Examples
    --------
    >>> from scipy import signal
    >>> c_sos, _ = weighting_chain_sos(48000)
    >>> bool(np.allclose(weighting_chain_zi(48000), signal.sosfilt_zi(c_sos)))
    True
    """
    return _c_zi(_check_rate(sample_rate_hz)).copy()


@functools.lru_cache(maxsize=32)
def _c_zi(fs: float) -> np.ndarray:
    def compute() -> dict[str, np.ndarray]:
        from scipy import signal

        return {"zi": signal.sosfilt_zi(_design(fs)[0])}

    zi = np.array(cached_arrays("weighting-zi", f"{fs!r} {_source_digest()}", compute)["zi"])
    zi.flags.writeable = False
    return zi


def weighting_sos(weighting: str, sample_rate_hz: float) -> np.ndarray:
    """Digital frequency-weighting filter as second-order sections.

    Parameters
    ----------
    weighting
        ``"A"``, ``"C"`` or ``"Z"`` (Z returns an empty (0, 6) array: no filtering).
    sample_rate_hz
        Sample rate in Hz, at least 8 kHz.

    Returns
    -------
    numpy.ndarray
        Shape (sections, 6). Gain is exactly 0 dB at 1 kHz. See the module docstring for
        the design; :func:`conformance` reports its accuracy.

    Examples
    --------
    >>> from scipy import signal
    >>> sos = weighting_sos("A", 48000)
    >>> sos.shape, weighting_sos("Z", 48000).shape
    ((4, 6), (0, 6))
    >>> _, h = signal.sosfreqz(sos, worN=[1000.0], fs=48000)
    >>> round(float(abs(h[0])), 9)  # unit gain at 1 kHz
    1.0
    """
    key = _check_weighting(weighting)
    fs = _check_rate(sample_rate_hz)
    if key == "Z":
        return np.zeros((0, 6))
    c_sos, a_extra = _design(fs)
    return (c_sos if key == "C" else np.vstack([c_sos, a_extra])).copy()


def filter_response_db(
    frequency_hz: ArrayLike, *, weighting: str, sample_rate_hz: float
) -> np.ndarray:
    """Magnitude response (dB) of :func:`weighting_sos` at the given frequencies.

    Examples
    --------
    At 48 kHz the digital A filter follows Table 3 of IEC 61672-1:2013 (-19.1 dB at
    100 Hz, 0 dB at 1 kHz, -1.1 dB at 8 kHz):

    >>> r = filter_response_db([100.0, 1000.0, 8000.0], weighting="A", sample_rate_hz=48000)
    >>> [round(float(x), 1) for x in r]
    [-19.1, 0.0, -1.1]
    """
    f = np.asarray(frequency_hz, dtype=float)
    sos = weighting_sos(weighting, sample_rate_hz)
    return _sos_db(sos, f.ravel(), float(sample_rate_hz)).reshape(f.shape)


@dataclass(frozen=True)
class ConformanceRow:
    """One nominal one-third-octave frequency of the conformance check (dB).

    Examples
    --------
    The 100 Hz row of the A filter at 48 kHz: the analytic value is -19.14 dB and class 1
    allows +-1 dB there (IEC 61672-1:2013, Table 3).

    >>> row = conformance("A", 48000).rows[10]
    >>> row.nominal_hz, round(float(row.design_db), 2), (row.upper_limit_db, row.lower_limit_db)
    (100, -19.14, (1.0, -1.0))
    >>> abs(row.deviation_db) < 0.05, row.passed
    (True, True)
    """

    nominal_hz: float
    exact_hz: float
    design_db: float
    filter_db: float | None
    deviation_db: float | None
    upper_limit_db: float
    lower_limit_db: float
    passed: bool | None  # None: frequency at or above 0.49 f_s, not checked


@dataclass(frozen=True)
class ConformanceReport:
    """Digital weighting filter against IEC 61672-1:2013 Table 3, class 1.

    Examples
    --------
    >>> report = conformance("C", 48000)
    >>> report.weighting, report.passed, len(report.rows)
    ('C', True, 34)
    >>> report.max_deviation_to_10k_db < 0.05
    True
    """

    weighting: str
    sample_rate_hz: float
    rows: tuple[ConformanceRow, ...]
    max_deviation_to_10k_db: float
    max_deviation_to_20k_db: float | None
    passed: bool


def conformance(weighting: str, sample_rate_hz: float) -> ConformanceReport:
    """Measure the digital weighting filter against the analytic curve and class 1 limits.

    At each nominal one-third-octave frequency of IEC 61672-1:2013 Table 3 (evaluated at
    the exact base-10 frequency) the filter's response is compared with the analytic
    weighting; the deviation must lie inside the class 1 acceptance limits. Frequencies
    at or above 0.49 f_s are listed but not judged. The maximum deviation is also
    measured on a dense log grid (2000 points) from 10 Hz to 10 kHz and to 20 kHz (both
    capped at 0.49 f_s).

    Examples
    --------
    At 8 kHz the rows from 4 kHz (0.49 f_s = 3.92 kHz) up are listed but not judged:

    >>> report = conformance("A", 8000)
    >>> report.passed, sum(row.passed is None for row in report.rows)
    (True, 8)
    >>> report.max_deviation_to_20k_db is None  # the Nyquist frequency is below 10 kHz
    True
    """
    key = _check_weighting(weighting)
    fs = _check_rate(sample_rate_hz)
    exact = exact_third_octave_hz()
    design = weighting_db(exact, weighting=key)
    top = 0.49 * fs
    response = filter_response_db(exact, weighting=key, sample_rate_hz=fs)
    rows = []
    for nominal, f, d, r, (upper, lower) in zip(
        NOMINAL_THIRD_OCTAVE_HZ, exact, design, response, CLASS1_LIMITS_DB, strict=True
    ):
        if f >= top:
            rows.append(ConformanceRow(nominal, f, d, None, None, upper, lower, None))
            continue
        dev = float(r - d)
        rows.append(
            ConformanceRow(nominal, f, d, float(r), dev, upper, lower, lower <= dev <= upper)
        )

    def max_dev(f_hi: float) -> float:
        f = np.geomspace(10.0, min(f_hi, top), 2000)
        return float(
            np.max(
                np.abs(
                    filter_response_db(f, weighting=key, sample_rate_hz=fs)
                    - weighting_db(f, weighting=key)
                )
            )
        )

    to_20k = max_dev(20000.0) if top > 10000.0 else None
    return ConformanceReport(
        weighting=key,
        sample_rate_hz=fs,
        rows=tuple(rows),
        max_deviation_to_10k_db=max_dev(10000.0),
        max_deviation_to_20k_db=to_20k,
        passed=all(row.passed is not False for row in rows),
    )


class FrequencyWeighting:
    """Streaming A/C/Z frequency-weighting filter with carried state.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz (>= 8 kHz).
    channels
        Number of channels of the blocks given to :meth:`update`.
    weighting
        ``"A"``, ``"C"`` or ``"Z"``.

    Notes
    -----
    Start-up: the filter state is set, at the first sample, to the steady state for a
    constant input equal to that sample, so a DC offset in the recording does not produce
    a step transient.

    Examples
    --------
    A 100 Hz tone through the A filter loses 19.1 dB (IEC 61672-1:2013, Table 3):

    >>> t = np.arange(24000) / 48000
    >>> tone = np.sin(2 * np.pi * 100 * t)[:, None]
    >>> weighted = FrequencyWeighting(48000, 1, weighting="A").update(tone)
    >>> round(float(10 * np.log10(np.mean(weighted[4800:] ** 2) / np.mean(tone[4800:] ** 2))), 1)
    -19.1
    """

    def __init__(self, sample_rate_hz: float, channels: int, *, weighting: str) -> None:
        self.sample_rate_hz = _check_rate(sample_rate_hz)
        self.channels = _check_channels(channels)
        self.weighting = _check_weighting(weighting)
        self._sos = weighting_sos(self.weighting, self.sample_rate_hz)
        self._zi: np.ndarray | None = None

    def update(self, block: ArrayLike) -> np.ndarray:
        """Filter a (frames, channels) block; returns the weighted block, same shape."""
        x = _check_block(block, self.channels)
        if len(self._sos) == 0 or x.shape[0] == 0:
            return x.copy()
        if self._zi is None:
            from scipy import signal

            self._zi = signal.sosfilt_zi(self._sos)[:, :, None] * x[0][None, None, :]
        y = np.array(x, order="C")  # a fresh copy, filtered in place
        sosfilt_inplace(self._sos, y, self._zi)
        return y


# --- time weighting ------------------------------------------------------------------
#: Exponential time constants (IEC 61672-1:2013, time weighting): F 125 ms, S 1 s.
TIME_CONSTANTS_S: dict[str, float] = {"F": 0.125, "S": 1.0}


def time_weighting_coefficient(time_constant_s: float, sample_rate_hz: float) -> float:
    """Pole ``a = exp(-1 / (tau f_s))`` of the one-pole exponential averager.

    Examples
    --------
    >>> a = time_weighting_coefficient(TIME_CONSTANTS_S["F"], 8000)  # 1000 samples per tau
    >>> round(a, 6), round(a**1000, 6)  # a**1000 is exp(-1)
    (0.999, 0.367879)
    """
    tau = float(time_constant_s)
    fs = float(sample_rate_hz)
    if not (tau > 0 and math.isfinite(tau)):
        raise InputError(f"time_constant_s must be positive, got {time_constant_s!r}")
    if not (fs > 0 and math.isfinite(fs)):
        raise InputError(f"sample_rate_hz must be positive, got {sample_rate_hz!r}")
    return math.exp(-1.0 / (tau * fs))


class ExponentialAverager:
    """Streaming exponential time weighting of a squared signal (one pole, carried state).

    ``y[n] = a y[n-1] + (1 - a) x[n]`` with ``a = exp(-1/(tau f_s))``: the discrete form of
    IEC 61672-1:2013 time-weighting definition, with unit gain for a steady input. Give it squared
    frequency-weighted pressure; ``10 lg(y / p0^2)`` is then the time-weighted level.

    Parameters
    ----------
    sample_rate_hz
        Sample rate in Hz.
    channels
        Number of channels.
    time_constant_s
        Time constant in s (0.125 for F, 1.0 for S; see :data:`TIME_CONSTANTS_S`).
    initial
        Mean square the averager holds before the first sample. 0 (the default) is a
        meter reset at the first sample.

    Examples
    --------
    A unit step of mean square reaches 1 - 1/e = 0.632 after one time constant:

    >>> averager = ExponentialAverager(8000, 1, time_constant_s=0.125)
    >>> y = averager.update(np.ones((2000, 1)))
    >>> round(float(y[999, 0]), 3), round(float(y[-1, 0]), 3)  # after 1000, 2000 samples
    (0.632, 0.865)
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        time_constant_s: float,
        initial: float = 0.0,
    ) -> None:
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = _check_channels(channels)
        self.time_constant_s = float(time_constant_s)
        self.a = time_weighting_coefficient(time_constant_s, sample_rate_hz)
        self._zi = np.full((1, self.channels), self.a * float(initial))

    def update(self, squared: ArrayLike) -> np.ndarray:
        """Average a (frames, channels) block of squared values; returns the same shape."""
        q = _check_block(squared, self.channels)
        if q.shape[0] == 0:
            return q.copy()
        from scipy import signal

        y, self._zi = signal.lfilter([1.0 - self.a], [1.0, -self.a], q, axis=0, zi=self._zi)
        return y


def _check_channels(channels: int) -> int:
    return validate.channel_count(channels)


def _check_block(block: ArrayLike, channels: int) -> np.ndarray:
    return validate.signal_block(block, channels)
