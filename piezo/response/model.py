"""The one high-pass/resonance response model: an analog high-pass and a single resonance.

Used by the response fits (:mod:`piezo.response.fit`), the capture diagnostics' roll-off
check (:mod:`piezo.diagnostics.spectral`) and the figures that draw either.

The model is the analog prototype, with ``s = j·2πf``, ``ω_c = 2π·corner_hz`` and
``ω_r = 2π·resonance_hz``::

    H(s) = s^n / D_n(s)  ·  ω_r² / (s² + s·ω_r/Q_r + ω_r²)

The high-pass denominator ``D_n`` is ``s + ω_c`` for order 1; ``s² + s·ω_c/q + ω_c²`` for
order 2 with a pole quality factor ``q``; and otherwise the Butterworth polynomial of
order ``n`` (poles equally spaced on the left half of the circle of radius ω_c, S.
Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7, 1930), whose
power response is ``|H|² = r^2n / (1 + r^2n)``, ``r = f/corner_hz``. A second-order
high-pass with ``q = 1/√2`` is the Butterworth one. The resonance factor (a
single-degree-of-freedom mass-spring-damper, unity below the resonance) is optional.

Magnitudes are computed from the closed forms in decibels or as power ratios, without
overflow far from the corner; phase from the rational function itself.
:func:`analog_prototype` gives the numerator and denominator polynomials, e.g. for
:func:`scipy.signal.freqs`.
"""

from __future__ import annotations

import math

import numpy as np

from piezo.errors import InputError

__all__ = [
    "analog_prototype",
    "complex_response",
    "highpass_db",
    "highpass_power",
    "resonance_db",
    "response_db",
]


def _check(order: int, q: float | None) -> None:
    """The model's form. Parameter values are not checked here (fits pass trial values
    that may underflow; non-positive ones give NaN or inf, as numpy does)."""
    if isinstance(order, bool) or not isinstance(order, int | np.integer) or order < 1:
        raise InputError(f"order must be a positive integer, got {order!r}")
    if q is not None and order != 2:
        raise InputError(f"q applies to a second-order high-pass only, got order {order!r}")


def _ratio(frequency_hz: np.ndarray | float, reference_hz: float) -> np.ndarray:
    return np.asarray(frequency_hz, dtype=np.float64) / reference_hz


def highpass_db(
    frequency_hz: np.ndarray | float, *, corner_hz: float, order: int, q: float | None = None
) -> np.ndarray:
    """Magnitude ``10·lg |H|²`` (dB) of the high-pass at ``frequency_hz``.

    Parameters
    ----------
    frequency_hz
        Frequencies, hertz (positive).
    corner_hz
        Corner: the -3 dB frequency of a Butterworth high-pass (``q=None``), the pole
        frequency of a second-order one with ``q``.
    order
        Order ``n`` (slope ``20·n`` dB/decade far below the corner).
    q
        Pole quality factor of a second-order high-pass; ``None``: Butterworth.

    Examples
    --------
    Butterworth: -3.01 dB at the corner whatever the order; 20·n dB/decade below it.

    >>> round(float(highpass_db(100.0, corner_hz=100.0, order=3)), 4)
    -3.0103
    >>> round(float(highpass_db(1.0, corner_hz=100.0, order=2)), 4)
    -80.0
    >>> round(float(highpass_db(100.0, corner_hz=100.0, order=2, q=2.0)), 4)
    6.0206
    """
    _check(order, q)
    r = _ratio(frequency_hz, corner_hz)
    if q is None:
        return 20.0 * order * np.log10(r) - 10.0 * np.log10(1.0 + r ** (2 * order))
    return 20.0 * order * np.log10(r) - 10.0 * np.log10((1.0 - r**2) ** 2 + (r / q) ** 2)


def highpass_power(
    frequency_hz: np.ndarray | float, *, corner_hz: float, order: int, q: float | None = None
) -> np.ndarray:
    """Power ratio ``|H|²`` of the high-pass (see :func:`highpass_db`), overflow-free.

    Examples
    --------
    >>> highpass_power([10.0, 1e6], corner_hz=10.0, order=1).tolist()
    [0.5, 0.9999999999]
    >>> float(highpass_power(0.0, corner_hz=10.0, order=2))
    0.0
    """
    _check(order, q)
    r = _ratio(frequency_hz, corner_hz)
    # r^2n/(1 + r^2n) = 1/(1 + r^-2n), and for q: 1/((r^-2 - 1)² + r^-2/q²).
    with np.errstate(divide="ignore", over="ignore"):
        if q is None:
            return 1.0 / (1.0 + np.power(r, -2.0 * order))
        u = np.power(r, -2.0)
        return 1.0 / ((u - 1.0) ** 2 + u / q**2)


def resonance_db(frequency_hz: np.ndarray | float, *, resonance_hz: float, q: float) -> np.ndarray:
    """Magnitude (dB) of a single resonance ``ω_r²/(s² + s·ω_r/q + ω_r²)``, unity below it.

    Examples
    --------
    At the resonance the gain is q (20·lg 10 = 20 dB for q = 10):

    >>> round(float(resonance_db(5000.0, resonance_hz=5000.0, q=10.0)), 9)
    20.0
    """
    r = _ratio(frequency_hz, resonance_hz)
    return -10.0 * np.log10((1.0 - r**2) ** 2 + (r / q) ** 2)


def response_db(
    frequency_hz: np.ndarray | float,
    *,
    corner_hz: float,
    order: int,
    q: float | None = None,
    resonance_hz: float | None = None,
    resonance_q: float | None = None,
) -> np.ndarray:
    """Magnitude (dB) of the high-pass times the optional resonance.

    Examples
    --------
    >>> f = np.array([20.0, 1000.0])
    >>> response_db(f, corner_hz=20.0, order=1, resonance_hz=1000.0, resonance_q=4.0).round(3)
    array([-3.007, 12.039])
    """
    level = highpass_db(frequency_hz, corner_hz=corner_hz, order=order, q=q)
    if resonance_hz is None:
        return level
    if resonance_q is None:
        raise InputError("a resonance needs its quality factor (resonance_q)")
    return level + resonance_db(frequency_hz, resonance_hz=resonance_hz, q=resonance_q)


def analog_prototype(
    *,
    corner_hz: float,
    order: int,
    q: float | None = None,
    resonance_hz: float | None = None,
    resonance_q: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of ``H(s)`` in powers of ``s`` (rad/s), highest first.

    Examples
    --------
    >>> b, a = analog_prototype(corner_hz=1 / (2 * np.pi), order=1)
    >>> b.tolist(), a.tolist()
    ([1.0, 0.0], [1.0, 1.0])
    """
    _check(order, q)
    if not corner_hz > 0 or (q is not None and not q > 0):
        raise InputError(f"corner_hz and q must be positive, got {corner_hz!r} and {q!r}")
    wc = 2.0 * math.pi * corner_hz
    b = np.zeros(order + 1)
    b[0] = 1.0
    if order == 1:
        a = np.array([1.0, wc])
    elif q is not None:
        a = np.array([1.0, wc / q, wc * wc])
    else:
        k = np.arange(1, order + 1)
        poles = wc * np.exp(1j * math.pi * (2 * k + order - 1) / (2 * order))
        a = np.real(np.poly(poles))
    if resonance_hz is not None:
        if resonance_q is None or not resonance_q > 0 or not resonance_hz > 0:
            raise InputError(
                "a resonance needs a positive frequency and quality factor, got "
                f"resonance_hz={resonance_hz!r}, resonance_q={resonance_q!r}"
            )
        wr = 2.0 * math.pi * resonance_hz
        b = b * wr * wr
        a = np.polymul(a, [1.0, wr / resonance_q, wr * wr])
    return b, a


def complex_response(
    frequency_hz: np.ndarray | float,
    *,
    corner_hz: float,
    order: int,
    q: float | None = None,
    resonance_hz: float | None = None,
    resonance_q: float | None = None,
) -> np.ndarray:
    """``H(j·2πf)`` of the model (magnitude and phase), from :func:`analog_prototype`.

    Examples
    --------
    A first-order high-pass leads by 45° at its corner:

    >>> h = complex_response(50.0, corner_hz=50.0, order=1)
    >>> round(float(np.degrees(np.angle(h))), 9)
    45.0
    """
    b, a = analog_prototype(
        corner_hz=corner_hz, order=order, q=q, resonance_hz=resonance_hz, resonance_q=resonance_q
    )
    s = 2j * math.pi * np.asarray(frequency_hz, dtype=np.float64)
    return np.polyval(b, s) / np.polyval(a, s)
