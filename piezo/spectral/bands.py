"""Fractional-octave band levels (IEC 61260-1:2014), by a multirate filter bank.

Band frequencies (IEC 61260-1:2014, clause 5.2 - 5.4): octave ratio ``G = 10^(3/10)``,
reference frequency ``f_r = 1000 Hz``; for a bandwidth designator ``b`` (1 for octaves,
3 for one-third octaves, ...) the exact mid-band frequencies are

* odd ``b``:  ``f_m = f_r · G^(x/b)``
* even ``b``: ``f_m = f_r · G^((2x+1)/(2b))`` (1 kHz is then a band edge)

and the band edges are ``f_m · G^(∓1/(2b))``.

Filters. Each band is a Butterworth band-pass of order :data:`BAND_ORDER` with its -3 dB
points on the exact band edges, in second-order sections (float64), normalised to unit
gain at the exact mid-band frequency. To keep low bands numerically sound and the cost
low, the bank is multirate: a band is filtered at the lowest rate ``fs/2^k`` at which its
upper edge is at most :data:`STAGE_EDGE_RATIO` of that rate. Between rates an elliptic
low-pass (passband ripple 0.002 dB up to the highest band edge handled below it, at
least :data:`ANTI_ALIAS_STOP_DB` dB down from the next rate's Nyquist frequency on, so
nothing folds back above that floor) is applied before keeping every second sample.
Each band's response through the whole chain meets the class 1 acceptance limits of
IEC 61260-1:2014 (table 1); ``tests/test_bands.py`` checks every one-third-octave band
from 12.5 Hz to 16 kHz at 48 kHz, and :meth:`FilterBank.response_db` gives the
response of the chain for any frequency.

Band levels are mean squares of the filter outputs (an Leq per band), over the whole
recording and optionally per interval. Filter state is carried between blocks.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field

import numpy as np

import piezo.sos
from piezo import validate
from piezo._kernels.cache import cached_arrays, code_digest
from piezo._kernels.filters import SOSBank
from piezo.errors import InputError
from piezo.levels.weighting import FrequencyWeighting
from piezo.sos import sos_response

__all__ = [
    "ANTI_ALIAS_STOP_DB",
    "BAND_ORDER",
    "FRACTIONS",
    "OCTAVE_RATIO",
    "Band",
    "BandAnalyzer",
    "BandResult",
    "FilterBank",
    "band_levels",
    "exact_midband_hz",
    "fractional_octave_bands",
    "nominal_midband_hz",
]

#: Octave frequency ratio, base ten (IEC 61260-1:2014, 5.2).
OCTAVE_RATIO = 10.0**0.3
#: Reference frequency, hertz (IEC 61260-1:2014, 5.3).
REFERENCE_HZ = 1000.0
#: Bandwidth designators offered (1/b octave).
FRACTIONS = (1, 2, 3, 6, 12, 24)
#: Butterworth order of each band-pass (an 8th-order band-pass). Order 3 already meets
#: class 1; order 4 leaves margin in the skirts and keeps the effective bandwidth within
#: 0.11 dB of the nominal one (pink noise reads closer to an ideal band).
BAND_ORDER = 4
#: A band is filtered at the lowest rate at which upper edge <= this ratio x rate.
STAGE_EDGE_RATIO = 0.23
#: Highest band edge accepted at the input rate, as a fraction of the sample rate.
MAX_EDGE_RATIO = 0.475
#: Anti-alias low-pass: passband ripple (dB) and stopband attenuation (dB).
ANTI_ALIAS_RIPPLE_DB = 0.002
ANTI_ALIAS_STOP_DB = 100.0
# The two sizes below, measured on 30 s of noise in memory (fraction 3, 48 kHz, three
# rounds alternating): 10.4-10.6 ns per frame as set, 10.8-11.0 with 8192 and 65536.
#: Samples gathered at a decimated stage before it is filtered (amortises call cost).
_STAGE_CHUNK = 32768
#: Longest piece of input filtered at once (one read block of piezo.io.reader).
_UPDATE_FRAMES = 131072

#: Segment starts of a chunk without history intervals (read only).
_ONE_SEGMENT = np.zeros(1, dtype=np.int64)
_ONE_SEGMENT.flags.writeable = False

# Preferred (nominal) mid-band frequencies of one-third-octave bands, one decade:
# IEC 61260-1:2014 annex E (the R10 series of ISO 266), as mantissas.
_R10 = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)


def _check_fraction(fraction: int) -> int:
    if fraction not in FRACTIONS:
        raise InputError(
            f"fraction must be one of {', '.join(map(str, FRACTIONS))} (1/b octave); "
            f"got {fraction!r}"
        )
    return int(fraction)


def exact_midband_hz(x: int | np.ndarray, fraction: int) -> float | np.ndarray:
    """Exact mid-band frequency of band number ``x`` (0 at or just above 1 kHz), hertz.

    IEC 61260-1:2014, equations (2) and (3): ``1000·G^(x/b)`` for odd ``b``,
    ``1000·G^((2x+1)/(2b))`` for even ``b``.

    Examples
    --------
    Band 0 of one-third octaves is 1 kHz, band 1 is ``1000·10^(0.1) = 1258.9`` Hz; for
    half octaves 1 kHz is a band edge, so band 0 is centred at ``1000·G^(1/4)``:

    >>> exact_midband_hz(0, 3), round(exact_midband_hz(1, 3), 3)
    (1000.0, 1258.925)
    >>> round(exact_midband_hz(0, 2), 1)
    1188.5
    >>> exact_midband_hz(np.arange(-2, 3), 1).round(2)
    array([ 251.19,  501.19, 1000.  , 1995.26, 3981.07])
    """
    b = _check_fraction(fraction)
    x = np.asarray(x, dtype=np.float64)
    exponent = x / b if b % 2 else (2.0 * x + 1.0) / (2.0 * b)
    out = REFERENCE_HZ * OCTAVE_RATIO**exponent
    return float(out) if out.ndim == 0 else out


def nominal_midband_hz(exact_hz: float, fraction: int) -> float:
    """Nominal mid-band frequency used as the band's label, hertz.

    Octaves and one-third octaves take the preferred numbers of IEC 61260-1:2014 annex E
    (ISO 266 R10 series: ..., 31.5, 40, 50, 63, 80, 100, ...). Other bandwidths are
    rounded to three significant figures when the leading digit is 1 to 4 and to two
    when it is 5 to 9 (the rounding rule of ANSI S1.11-2004 annex A; stated from memory).

    Examples
    --------
    Preferred numbers of IEC 61260-1:2014 annex E for one-third octaves and octaves:

    >>> nominal_midband_hz(1258.925, 3), nominal_midband_hz(19.953, 3)
    (1250.0, 20.0)
    >>> nominal_midband_hz(125.89, 1)
    125.0

    Other bandwidths are rounded (two figures when the leading digit is 5 to 9):

    >>> nominal_midband_hz(1883.649, 6), nominal_midband_hz(749.894, 6)
    (1880.0, 750.0)
    """
    b = _check_fraction(fraction)
    if b in (1, 3):
        n = round(10.0 * math.log10(exact_hz / REFERENCE_HZ))  # one-third-octave index
        value = _R10[n % 10] * 10.0 ** (3 + n // 10)
        return float(f"{value:.3g}")
    exponent = math.floor(math.log10(exact_hz))
    lead = int(exact_hz / 10.0**exponent)
    digits = 3 if lead <= 4 else 2
    return float(f"{exact_hz:.{digits}g}")


@dataclass(frozen=True)
class Band:
    """One fractional-octave band.

    Attributes
    ----------
    index
        Band number ``x`` of IEC 61260-1 (0 at 1 kHz for odd ``b``).
    exact_hz, lower_hz, upper_hz
        Exact mid-band frequency and band edges, hertz.
    nominal_hz
        Nominal mid-band frequency (label), hertz.

    Examples
    --------
    The 1 kHz octave has its edges at ``1000·G^(∓1/2)`` (IEC 61260-1:2014, 5.4):

    >>> band = fractional_octave_bands(1, low_hz=1000.0, high_hz=1000.0)[0]
    >>> band.index, band.label, round(band.lower_hz, 1), round(band.upper_hz, 1)
    (0, '1k', 707.9, 1412.5)
    """

    index: int
    exact_hz: float
    lower_hz: float
    upper_hz: float
    nominal_hz: float

    @property
    def label(self) -> str:
        """Nominal frequency as text: ``"31.5"``, ``"1k"``, ``"12.5k"``."""
        f = self.nominal_hz
        if f >= 1000:
            return f"{f / 1000:g}k"
        return f"{f:g}"


#: Highest sample rate treated as an audio rate, Hz: up to it the bands stop at 20 kHz
#: by default (the top of the audio band); above it, at what the sample rate allows.
AUDIO_RATE_MAX_HZ = 48000.0


def default_high_hz(sample_rate_hz: float) -> float:
    """Default upper end of the band range for a sample rate, Hz.

    20 kHz at audio rates (up to :data:`AUDIO_RATE_MAX_HZ`); above them the highest band
    the rate allows (upper edge up to :data:`MAX_EDGE_RATIO` of it), so a 1 MS/s capture
    is not cut at 20 kHz.

    Examples
    --------
    >>> default_high_hz(48000.0), default_high_hz(1e6)
    (20000.0, 475000.0)
    """
    if not (math.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise InputError(f"sample_rate_hz must be positive, got {sample_rate_hz!r}")
    if sample_rate_hz <= AUDIO_RATE_MAX_HZ:
        return 20000.0
    return MAX_EDGE_RATIO * sample_rate_hz


def fractional_octave_bands(
    fraction: int = 3,
    *,
    low_hz: float = 20.0,
    high_hz: float = 20000.0,
    sample_rate_hz: float | None = None,
) -> list[Band]:
    """Bands of ``1/fraction`` octave whose nominal range covers ``low_hz`` .. ``high_hz``.

    A band is included when its exact mid-band frequency lies within a quarter band of
    the range (so ``20`` picks the band of nominal 20 Hz, exact 19.95 Hz). With a sample
    rate, bands whose upper edge exceeds :data:`MAX_EDGE_RATIO` of it are left out.

    Examples
    --------
    The 31 one-third-octave bands of 20 Hz to 20 kHz; at 8 kHz the bank stops at 3.15 kHz
    (the 4 kHz band's upper edge, 4.47 kHz, is above ``0.475·fs``):

    >>> bands = fractional_octave_bands(3)
    >>> len(bands), [b.label for b in bands[:4]], bands[-1].label
    (31, ['20', '25', '31.5', '40'], '20k')
    >>> fractional_octave_bands(3, sample_rate_hz=8000.0)[-1].label
    '3.15k'
    """
    b = _check_fraction(fraction)
    if not 0 < low_hz <= high_hz:
        raise InputError(f"band range must satisfy 0 < low <= high; got {low_hz}, {high_hz}")
    half = OCTAVE_RATIO ** (1.0 / (2 * b))
    quarter = OCTAVE_RATIO ** (1.0 / (4 * b))
    # Solve the mid-band formula for x at the range ends.
    offset = 0.0 if b % 2 else 0.5
    x_lo = math.ceil(b * math.log(low_hz / quarter / REFERENCE_HZ, OCTAVE_RATIO) - offset)
    x_hi = math.floor(b * math.log(high_hz * quarter / REFERENCE_HZ, OCTAVE_RATIO) - offset)
    bands = []
    for x in range(x_lo, x_hi + 1):
        fm = float(exact_midband_hz(x, b))
        if sample_rate_hz is not None and fm * half > MAX_EDGE_RATIO * sample_rate_hz:
            continue
        bands.append(Band(x, fm, fm / half, fm * half, nominal_midband_hz(fm, b)))
    if not bands:
        limit = "" if sample_rate_hz is None else f" below {MAX_EDGE_RATIO:g}·fs"
        raise InputError(f"no 1/{b}-octave band lies between {low_hz:g} and {high_hz:g} Hz{limit}")
    return bands


def _anti_alias_sos() -> np.ndarray:
    """Elliptic half-rate low-pass, normalised frequencies (fs = 1).

    Passband 0.002 dB up to ``STAGE_EDGE_RATIO/2`` (the highest band edge filtered at
    the next rate), at least :data:`ANTI_ALIAS_STOP_DB` from 0.25 (the next Nyquist).
    """
    from scipy import signal

    wp = STAGE_EDGE_RATIO  # = (STAGE_EDGE_RATIO / 2) / 0.5
    order, _ = signal.ellipord(wp, 0.5, ANTI_ALIAS_RIPPLE_DB, ANTI_ALIAS_STOP_DB)
    sos = signal.ellip(
        order, ANTI_ALIAS_RIPPLE_DB, ANTI_ALIAS_STOP_DB, wp, btype="low", output="sos"
    )
    # The zeros lie on the unit circle, so b2 = b0 up to rounding; make it exact, as the
    # compiled bank (piezo._kernels.filters.SOSBank) requires.
    sos[:, 2] = sos[:, 0]
    return sos


def _band_sos(band: Band, rate_hz: float) -> np.ndarray:
    from scipy import signal

    sos = signal.butter(
        BAND_ORDER, [band.lower_hz, band.upper_hz], btype="bandpass", fs=rate_hz, output="sos"
    )
    sos[0, :3] /= abs(sos_response(sos, np.array([band.exact_hz]), rate_hz)[0])
    return sos


def _source_digest() -> str:
    # This module and the response evaluation its design normalises with.
    return code_digest(__file__, piezo.sos.__file__)


class FilterBank:
    """The designed multirate filter bank for a set of bands at one sample rate.

    Attributes
    ----------
    bands
        The bands, low to high.
    stage_of_band
        Decimation stage ``k`` (rate ``fs/2^k``) at which each band is filtered.
    band_sos
        Second-order sections of each band-pass at its stage rate.
    anti_alias_sos
        The low-pass applied before each halving of the rate.

    Examples
    --------
    Each band has unit gain at its mid-band frequency and -3 dB at its edges (the
    Butterworth design); lower bands run at lower rates:

    >>> bands = fractional_octave_bands(1, low_hz=500.0, high_hz=2000.0)
    >>> bank = FilterBank(48000.0, bands)
    >>> bank.stage_of_band, bank.stage_rate_hz(3)
    ([3, 2, 1], 6000.0)
    >>> k = bands[1]
    >>> gain_db = bank.response_db([k.exact_hz, k.lower_hz, k.upper_hz])[:, 1]
    >>> bool(abs(gain_db[0]) < 1e-9), gain_db[1:].round(2).tolist()
    (True, [-3.01, -3.01])
    """

    def __init__(self, sample_rate_hz: float, bands: list[Band]) -> None:
        self.sample_rate_hz = float(sample_rate_hz)
        self.bands = list(bands)
        self.stage_of_band: list[int] = []
        for band in self.bands:
            if band.upper_hz > MAX_EDGE_RATIO * self.sample_rate_hz:
                raise InputError(
                    f"band {band.label} Hz reaches {band.upper_hz:.0f} Hz, too close to "
                    f"the Nyquist frequency at {self.sample_rate_hz:g} Hz"
                )
            k = 0
            while band.upper_hz <= STAGE_EDGE_RATIO * self.sample_rate_hz / 2 ** (k + 1):
                k += 1
            self.stage_of_band.append(k)
        self.stages = max(self.stage_of_band) + 1
        # The design runs once per sample rate, band set and this module's code; later
        # processes read it from the per-user design cache, without scipy.signal.
        key = repr(
            (
                self.sample_rate_hz,
                [(b.index, b.exact_hz, b.lower_hz, b.upper_hz) for b in self.bands],
                self.stage_of_band,
                _source_digest(),
            )
        )
        stored = cached_arrays("bands", key, self._design)
        self.anti_alias_sos = np.array(stored["anti_alias"], dtype=np.float64)
        self.band_sos = [np.array(s, dtype=np.float64) for s in stored["bands"]]

    def _design(self) -> dict[str, np.ndarray]:
        self.anti_alias_sos = _anti_alias_sos()
        self.band_sos = [
            _band_sos(b, self.sample_rate_hz / 2**k)
            for b, k in zip(self.bands, self.stage_of_band, strict=True)
        ]
        # Unit gain of the whole chain (anti-alias ripple included) at each mid-band
        # frequency, so a tone there reads its true level.
        at_mid = self.response_db(np.array([b.exact_hz for b in self.bands]))
        for j, sos in enumerate(self.band_sos):
            sos[0, :3] *= 10.0 ** (-at_mid[j, j] / 20.0)
        return {"anti_alias": self.anti_alias_sos, "bands": np.stack(self.band_sos)}

    def stage_rate_hz(self, stage: int) -> float:
        """Sample rate of decimation stage ``stage``, hertz."""
        return self.sample_rate_hz / 2**stage

    def response_db(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Steady-state gain (dB) of each band's whole chain to a sine, ``(freqs, bands)``.

        A sine passes the anti-alias low-passes of the stages above its band and, after
        each halving of the rate, appears at its folded (aliased) frequency; the band
        filter then acts at the frequency it has at that stage. This is exact for a
        steady sine, so it is the response a meter would measure.
        """
        f = np.abs(np.atleast_1d(np.asarray(frequency_hz, dtype=np.float64)))
        f = f % self.sample_rate_hz
        f = np.minimum(f, self.sample_rate_hz - f)
        gain_db = np.zeros(f.size)
        at_stage = []  # (frequency, cumulative anti-alias gain in dB) at each stage
        for k in range(self.stages):
            rate = self.stage_rate_hz(k)
            at_stage.append((f, gain_db))
            h = sos_response(self.anti_alias_sos, f / rate, 1.0)
            gain_db = gain_db + 20.0 * np.log10(np.maximum(np.abs(h), 1e-300))
            next_rate = rate / 2
            f = np.where(f <= next_rate / 2, f, next_rate - f)
        out = np.empty((f.size, len(self.bands)))
        for j, (sos, k) in enumerate(zip(self.band_sos, self.stage_of_band, strict=True)):
            fk, g = at_stage[k]
            h = sos_response(sos, fk, self.stage_rate_hz(k))
            out[:, j] = g + 20.0 * np.log10(np.maximum(np.abs(h), 1e-300))
        return out


@dataclass(frozen=True)
class BandResult:
    """Band levels of a recording.

    Attributes
    ----------
    fraction
        Bandwidth designator ``b`` (1/b octave).
    bands
        The bands, low to high.
    mean_square
        Mean square of each band's filter output, shape ``(bands, channels)``, unit².
    interval_s
        Length of the history intervals, or ``None``.
    history_time_s
        Start time of each interval, shape ``(intervals,)`` (empty without intervals).
    weighting
        Frequency weighting applied before the bank: ``"Z"``, ``"A"`` or ``"C"``.
    history_mean_square
        Mean square per interval, shape ``(intervals, bands, channels)``. Each band's
        output is counted in the interval its (decimated) sample falls in; the filters'
        delay (a few periods of the band's mid-band frequency) is not compensated.
    history_duration_s
        Length of each interval, shape ``(intervals,)``: ``interval_s`` (rounded to whole
        samples) except the last, which holds what is left of the recording.

    Examples
    --------
    A 1 kHz tone of 1 Pa RMS reads ``20·lg(1/20 µPa) = 93.98`` dB in its octave:

    >>> t = np.arange(8000) / 8000.0
    >>> x = np.sqrt(2) * np.sin(2 * np.pi * 1000.0 * t)
    >>> r = band_levels(x, 8000.0, fraction=1, low_hz=500.0, high_hz=2000.0)
    >>> r.nominal_hz.tolist(), r.mean_square.shape
    ([500.0, 1000.0, 2000.0], (3, 1))
    >>> round(float(r.level_db(20e-6)[1, 0]), 1)
    94.0
    """

    fraction: int
    bands: list[Band]
    mean_square: np.ndarray
    interval_s: float | None
    history_time_s: np.ndarray
    history_mean_square: np.ndarray
    weighting: str = "Z"
    history_duration_s: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def exact_hz(self) -> np.ndarray:
        """Exact mid-band frequencies, hertz."""
        return np.array([b.exact_hz for b in self.bands])

    @property
    def nominal_hz(self) -> np.ndarray:
        """Nominal mid-band frequencies, hertz."""
        return np.array([b.nominal_hz for b in self.bands])

    def level_db(self, reference: float | np.ndarray) -> np.ndarray:
        """Band Leq in dB re ``reference`` (20 µPa, 1 µPa, or 1 V; or one per channel),
        ``(bands, channels)``."""
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.mean_square / reference**2)

    def history_db(self, reference: float | np.ndarray) -> np.ndarray:
        """Per-interval band levels in dB re ``reference`` (one value, or one per channel),
        ``(intervals, bands, channels)``."""
        with np.errstate(divide="ignore"):
            return 10.0 * np.log10(self.history_mean_square / reference**2)


class _Stage:
    """Filters of one decimation stage (its bands, then the anti-alias low-pass), with
    carried state."""

    def __init__(self, bank: FilterBank, stage: int, channels: int) -> None:
        self.stage = stage
        self.factor = 2**stage  # input samples per stage sample
        self.band_indices = [i for i, k in enumerate(bank.stage_of_band) if k == stage]
        # Bands run low to high and stages high to low rate, so a stage's bands are
        # contiguous: one slice updates all their sums at once.
        lo = self.band_indices[0] if self.band_indices else 0
        self.bands = slice(lo, lo + len(self.band_indices))
        if self.band_indices != list(range(self.bands.start, self.bands.stop)):
            raise AssertionError("bands of a stage must be contiguous")
        self.last = stage == bank.stages - 1
        sos = [bank.band_sos[i] for i in self.band_indices]
        if not self.last:
            sos.append(bank.anti_alias_sos)
        self.filters = SOSBank(sos, channels, output_index=None if self.last else len(sos) - 1)
        self.count = 0  # stage samples filtered so far
        # Output of the anti-alias low-pass, reused between chunks (the next stage
        # copies the samples it keeps).
        self.out = np.empty((channels, _STAGE_CHUNK + _UPDATE_FRAMES // 2**stage))
        # Decimated samples waiting to be filtered (stages after the first), gathered
        # into one buffer (grown if a piece does not fit).
        self.pending = np.empty((_STAGE_CHUNK + _UPDATE_FRAMES // 2**stage, channels))
        self.pending_frames = 0


class BandAnalyzer:
    """Streaming fractional-octave band levels (IEC 61260-1:2014 class 1 filters).

    Parameters
    ----------
    sample_rate_hz
        Sample rate, hertz.
    channels
        Number of channels in each block.
    fraction
        Bandwidth designator ``b``: 1, 2, 3, 6, 12 or 24 (default 3: one-third octave).
    low_hz, high_hz
        Nominal range of bands (default 20 Hz to 20 kHz), limited by the sample rate.
    interval_s
        If given, band levels are also kept for consecutive intervals of this length
        (a band-level history); the last, partial interval is kept too.
    weighting
        ``"Z"`` (none, default), ``"A"`` or ``"C"``: the signal first passes the
        IEC 61672-1 frequency-weighting filter of :mod:`piezo.levels.weighting`, so the levels
        are A- or C-weighted band levels.

    Examples
    --------
    Fed in blocks with a 0.5 s history: both halves of a steady 1 Pa RMS tone read
    about 93.98 dB re 20 µPa in the 1 kHz octave:

    >>> t = np.arange(8000) / 8000.0
    >>> x = np.sqrt(2) * np.sin(2 * np.pi * 1000.0 * t)
    >>> an = BandAnalyzer(8000.0, 1, fraction=1, low_hz=500.0, high_hz=2000.0,
    ...                   interval_s=0.5)
    >>> for block in np.split(x, 4):
    ...     an.update(block)
    >>> r = an.result()
    >>> r.history_time_s.tolist(), r.history_db(20e-6)[:, 1, 0].round(1).tolist()
    ([0.0, 0.5], [94.0, 94.0])
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        fraction: int = 3,
        low_hz: float = 20.0,
        high_hz: float = 20000.0,
        interval_s: float | None = None,
        weighting: str = "Z",
    ) -> None:
        sample_rate_hz = validate.sample_rate(sample_rate_hz)
        validate.channel_count(channels)
        self.fraction = _check_fraction(fraction)
        self.channels = int(channels)
        bands = fractional_octave_bands(
            fraction, low_hz=low_hz, high_hz=high_hz, sample_rate_hz=sample_rate_hz
        )
        self.bank = FilterBank(sample_rate_hz, bands)
        if weighting not in ("A", "C", "Z"):
            raise InputError(f"weighting must be 'A', 'C' or 'Z'; got {weighting!r}")
        self.weighting = weighting
        self._weighting = (
            None
            if weighting == "Z"
            else FrequencyWeighting(sample_rate_hz, self.channels, weighting=weighting)
        )
        self._stages = [_Stage(self.bank, k, self.channels) for k in range(self.bank.stages)]
        nb = len(bands)
        self._sum = np.zeros((nb, self.channels))
        self._n = np.zeros(nb, dtype=np.int64)
        self.interval_s = interval_s
        if interval_s is not None:
            frames = round(interval_s * sample_rate_hz)
            if not (interval_s > 0 and frames >= 1):
                raise InputError(f"interval must be positive, got {interval_s!r} s")
            self._interval_frames = frames
        # Interval sums are kept per interval index, grown as needed.
        self._hist_sum = np.zeros((0, nb, self.channels))
        self._hist_n = np.zeros((0, nb), dtype=np.int64)
        self._frames = 0

    @property
    def bands(self) -> list[Band]:
        """The bands analysed."""
        return self.bank.bands

    def update(self, block: np.ndarray) -> None:
        """Feed calibrated samples, shape ``(frames, channels)`` (1-D for one channel)."""
        x = validate.signal_block(block, self.channels)
        if x.shape[0] == 0:
            return
        # Long blocks are filtered in pieces, so the intermediate arrays of the stages
        # stay in the processor's cache (measured: a one-minute block in one piece took
        # six times as long per sample).
        for first in range(0, x.shape[0], _UPDATE_FRAMES):
            piece = x[first : first + _UPDATE_FRAMES]
            self._frames += piece.shape[0]
            if self._weighting is not None:
                piece = self._weighting.update(piece)
            self._run(0, piece)

    def _run(self, k: int, x: np.ndarray, *, flush: bool = False) -> None:
        stage = self._stages[k]
        if k > 0:
            # Gather the decimated samples (``x`` may be a view of the previous stage's
            # reused output buffer: copied here).
            m = stage.pending_frames
            need = m + x.shape[0]
            if need > stage.pending.shape[0]:
                grown = np.empty((2 * need, self.channels))
                grown[:m] = stage.pending[:m]
                stage.pending = grown
            stage.pending[m:need] = x
            stage.pending_frames = need
            if need < _STAGE_CHUNK and not flush:
                return
            x = stage.pending[:need]
            stage.pending_frames = 0
        if x.shape[0] == 0:
            return
        start = stage.count
        n = x.shape[0]
        first, starts = self._segments(stage, start, n)
        if stage.out.shape[1] < n:
            stage.out = np.empty((self.channels, n))
        sums, y = stage.filters.process(x, starts, out=stage.out)
        nb = len(stage.band_indices)
        if nb:
            bands = stage.bands
            self._sum[bands] += sums[:, :nb].sum(axis=0)
            self._n[bands] += n
            if self.interval_s is not None:
                counts = np.diff(np.append(starts, n))
                self._hist_sum[first : first + starts.size, bands] += sums[:, :nb]
                self._hist_n[first : first + starts.size, bands] += counts[:, None]
        stage.count += n
        if not stage.last:
            assert y is not None  # every stage but the last passes its output on
            # Keep samples at even stage index: input sample numbers divisible by 2^(k+1).
            self._run(k + 1, y[start % 2 :: 2], flush=flush)

    def _segments(self, stage: _Stage, start: int, n: int) -> tuple[int, np.ndarray]:
        """First interval touched by stage samples ``start .. start+n-1`` and the offsets
        (within the chunk) where each touched interval begins."""
        if self.interval_s is None:
            return 0, _ONE_SEGMENT
        per = self._interval_frames
        # Interval of stage sample j: input sample number j·2^k divided by the interval.
        first = (start * stage.factor) // per
        last = ((start + n - 1) * stage.factor) // per
        if last >= self._hist_sum.shape[0]:
            grow = max(last + 1, 2 * self._hist_sum.shape[0])
            hist = np.zeros((grow, *self._hist_sum.shape[1:]))
            hist[: self._hist_sum.shape[0]] = self._hist_sum
            hist_n = np.zeros((grow, self._hist_n.shape[1]), dtype=np.int64)
            hist_n[: self._hist_n.shape[0]] = self._hist_n
            self._hist_sum, self._hist_n = hist, hist_n
        bounds = np.arange(first + 1, last + 1, dtype=np.int64) * per
        cut = -(-bounds // stage.factor) - start  # first stage sample of each interval
        return first, np.concatenate([[0], cut]).astype(np.int64)

    def result(self) -> BandResult:
        """Band levels of everything fed so far (pending decimated samples included)."""
        if self._frames == 0:
            raise InputError("no samples were given: band levels need at least one sample")
        done = copy.deepcopy(self)
        for k in range(1, len(done._stages)):
            done._run(k, np.zeros((0, done.channels)), flush=True)
        with np.errstate(invalid="ignore", divide="ignore"):
            ms = done._sum / np.maximum(done._n, 1)[:, None]
        ms[done._n == 0] = np.nan
        if self.interval_s is None:
            times = np.zeros(0)
            durations = np.zeros(0)
            hist = np.zeros((0, len(self.bands), self.channels))
        else:
            intervals = -(-self._frames // self._interval_frames)
            counts = done._hist_n[:intervals]
            with np.errstate(invalid="ignore", divide="ignore"):
                hist = done._hist_sum[:intervals] / counts[:, :, None]
            hist[counts == 0] = np.nan
            fs = self.bank.sample_rate_hz
            starts = np.arange(intervals) * self._interval_frames
            times = starts / fs
            durations = (np.minimum(starts + self._interval_frames, self._frames) - starts) / fs
        return BandResult(
            fraction=self.fraction,
            bands=self.bands,
            mean_square=ms,
            interval_s=self.interval_s,
            history_time_s=times,
            history_mean_square=hist,
            weighting=self.weighting,
            history_duration_s=durations,
        )


def band_levels(x: np.ndarray, sample_rate_hz: float, **options) -> BandResult:
    """Whole-array :class:`BandAnalyzer`: ``x`` of shape ``(frames,)`` or
    ``(frames, channels)``.

    Examples
    --------
    A 1 kHz tone of 1 V RMS reads 0 dB re 1 V in the 1 kHz one-third-octave band (within
    0.05 dB: the filter's build-up at the start costs about 0.02 dB over one second) and
    far less in its neighbours:

    >>> t = np.arange(8000) / 8000.0
    >>> x = np.sqrt(2) * np.sin(2 * np.pi * 1000.0 * t)
    >>> r = band_levels(x, 8000.0, low_hz=800.0, high_hz=1250.0)
    >>> lv = r.level_db(1.0)[:, 0]
    >>> [b.label for b in r.bands], bool(abs(lv[1]) < 0.05), lv[[0, 2]].round(1).tolist()
    (['800', '1k', '1.25k'], True, [-27.1, -23.4])
    """
    arr = np.asarray(x, dtype=np.float64)
    channels = 1 if arr.ndim == 1 else arr.shape[1]
    analyzer = BandAnalyzer(sample_rate_hz, channels, **options)
    analyzer.update(arr.reshape(arr.shape[0], channels) if arr.ndim == 1 else arr)
    return analyzer.result()
