"""One validator per kind of input, with one wording.

Every analysis checks what it is given at its entry point with these functions, so a
block of the wrong shape, an impossible sample rate, a physical value out of range or a
NaN sample gets the same answer wherever it arrives. Messages name the argument and its
value (``sample_rate_hz must be ... got 1.0``), never a command-line option: the command
line adds the file in front of them.

Documented ranges
-----------------
Sample rates
    :data:`MIN_SAMPLE_RATE_HZ` (10 Hz) to :data:`MAX_SAMPLE_RATE_HZ` (10 GHz): slow
    data-logger exports to fast oscilloscope captures. A rate below 10 Hz is almost always
    a mistaken time unit (milliseconds read as seconds) and leaves no band to analyse.
Physical values
    Finite, positive, and between :data:`MIN_PHYSICAL` (1e-30) and :data:`MAX_PHYSICAL`
    (1e30) in SI units unless a caller documents a narrower range: wide enough for
    femtofarads and teraohms, narrow enough that products and reciprocals of two such
    values stay finite in float64 (a 1e300 F capacitance would not).
Samples
    Non-finite samples (NaN, infinities) are refused, naming the channel and the first
    sample index (both 0-based). The reader applies this once to every recording (CSV and
    audio alike), and every streaming analysis applies it to the blocks it is given.

May import: :mod:`piezo.errors`, numpy.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from piezo.errors import InputError

__all__ = [
    "MAX_PHYSICAL",
    "MAX_SAMPLE_RATE_HZ",
    "MIN_PHYSICAL",
    "MIN_SAMPLE_RATE_HZ",
    "channel_count",
    "finite_samples",
    "physical_value",
    "sample_rate",
    "signal_block",
]

#: Lowest sample rate accepted anywhere, Hz.
MIN_SAMPLE_RATE_HZ = 10.0
#: Highest sample rate accepted anywhere, Hz.
MAX_SAMPLE_RATE_HZ = 1e10
#: Smallest magnitude of a physical value in SI units (unless a caller narrows it).
MIN_PHYSICAL = 1e-30
#: Largest magnitude of a physical value in SI units (unless a caller narrows it).
MAX_PHYSICAL = 1e30


def _number(value: Any, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise InputError(f"{what} must be a number, got {value!r}")
    return float(value)


def sample_rate(
    value: Any,
    *,
    what: str = "sample_rate_hz",
    minimum_hz: float = MIN_SAMPLE_RATE_HZ,
    maximum_hz: float = MAX_SAMPLE_RATE_HZ,
    purpose: str = "",
) -> float:
    """Check a sample rate in hertz: finite and inside ``[minimum_hz, maximum_hz]``.

    Parameters
    ----------
    value
        The rate to check.
    what
        Name of the argument, used in the message.
    minimum_hz, maximum_hz
        The range; the defaults are the documented range of piezo. An analysis that needs
        more (the IEC 61672-1 weighting filters need 8 kHz) passes its own minimum.
    purpose
        Why a narrower range applies, appended to the message (``"for the ... filters"``).

    Returns
    -------
    float
        The rate as a float.

    Examples
    --------
    >>> sample_rate(48000)
    48000.0
    >>> sample_rate(1.0)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: sample_rate_hz must be between 10 Hz and 1e+10 Hz, got 1.0
    """
    fs = _number(value, what)
    if not (math.isfinite(fs) and minimum_hz <= fs <= maximum_hz):
        why = f" {purpose}" if purpose else ""
        raise InputError(
            f"{what} must be between {minimum_hz:g} Hz and {maximum_hz:g} Hz{why}, got {value!r}"
        )
    return fs


def channel_count(value: Any, *, what: str = "channels") -> int:
    """Check a channel count: an integer of at least 1.

    Examples
    --------
    >>> channel_count(2)
    2
    >>> channel_count(0)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: channels must be a positive integer, got 0
    """
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < 1:
        raise InputError(f"{what} must be a positive integer, got {value!r}")
    return int(value)


def physical_value(
    value: Any,
    *,
    what: str,
    unit: str = "",
    minimum: float = MIN_PHYSICAL,
    maximum: float = MAX_PHYSICAL,
    allow_zero: bool = False,
) -> float:
    """Check a physical value in SI units: finite, positive, inside ``[minimum, maximum]``.

    Parameters
    ----------
    value
        The value (already parsed from any unit text).
    what
        Name of the argument or key, used in the message.
    unit
        SI unit symbol for the message.
    minimum, maximum
        The accepted range; the defaults are the documented range of piezo.
    allow_zero
        Accept exactly 0 as well (a cable of no length, no bias current).

    Examples
    --------
    >>> physical_value(4.7e-8, what="feedback_capacitance", unit="F")
    4.7e-08
    >>> physical_value(1e300, what="feedback_capacitance", unit="F")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: feedback_capacitance must be between 1e-30 F and 1e+30 F, got 1e+300
    """
    x = _number(value, what)
    if allow_zero and x == 0.0:
        return 0.0
    suffix = f" {unit}" if unit else ""
    if not math.isfinite(x) or x <= 0:
        zero = "zero or " if allow_zero else ""
        raise InputError(f"{what} must be {zero}positive and finite, got {value!r}")
    if not minimum <= x <= maximum:
        raise InputError(
            f"{what} must be between {minimum:g}{suffix} and {maximum:g}{suffix}, got {value!r}"
        )
    return x


def finite_samples(
    block: np.ndarray,
    *,
    what: str = "",
    start_frame: int = 0,
    channel_numbers: Sequence[int] | None = None,
    channel_names: Sequence[str] | None = None,
) -> None:
    """Refuse a block holding NaN or infinite samples: the one non-finite-sample policy.

    Parameters
    ----------
    block
        Samples of shape ``(frames, channels)``.
    what
        Name of the argument, put in front of the message (nothing when empty: the
        reader names the file instead).
    start_frame
        Index of the block's first frame in the whole signal, so the message gives the
        sample index in the recording.
    channel_numbers
        The channel number of each column (a selection of a recording's channels).
    channel_names
        A name per column, quoted after the number.

    Examples
    --------
    >>> finite_samples(np.array([[0.0, 1.0], [2.0, np.nan]]), what="block", start_frame=10)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: block: non-finite value (NaN or infinite) in channel 1 at sample 11
    """
    ok = np.isfinite(block)
    if ok.all():
        return
    row, col = (int(v) for v in np.argwhere(~ok)[0])
    number = channel_numbers[col] if channel_numbers is not None else col
    name = f" ({channel_names[col]!r})" if channel_names is not None else ""
    prefix = f"{what}: " if what else ""
    raise InputError(
        f"{prefix}non-finite value (NaN or infinite) in channel {number}{name} "
        f"at sample {start_frame + row}"
    )


def signal_block(
    block: Any, channels: int, *, what: str = "block", start_frame: int = 0
) -> np.ndarray:
    """Check a block of samples and return it as float64 ``(frames, channels)``.

    A 1-D array is taken as one channel when ``channels`` is 1. The samples must be
    finite (:func:`finite_samples`).

    Parameters
    ----------
    block
        The samples; time runs along the first axis.
    channels
        Number of channels the analysis was built for.
    what
        Name of the argument, used in the message.
    start_frame
        Frames the analysis has seen before this block, so a NaN is located in the
        whole signal.

    Examples
    --------
    >>> signal_block([1.0, 2.0], 1).shape
    (2, 1)
    >>> signal_block(np.zeros((4, 2)), 1)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: block must have shape (frames, 1) ... got shape (4, 2)
    """
    try:
        x = np.asarray(block, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{what} must be an array of numbers, got {type(block).__name__}"
        ) from None
    if x.ndim == 1 and channels == 1:
        x = x[:, None]
    if x.ndim != 2 or x.shape[1] != channels:
        raise InputError(
            f"{what} must have shape (frames, {channels}) (time on the first axis), "
            f"got shape {x.shape}"
        )
    finite_samples(x, what=what, start_frame=start_frame)
    return x
