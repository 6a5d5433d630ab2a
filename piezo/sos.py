"""Digital filters as second-order sections: the frequency response, in numpy alone.

The analyses filter with second-order sections (rows ``b0 b1 b2 a0 a1 a2``, the layout
of :func:`scipy.signal.sosfilt`). Their designs are computed once and cached; what runs
on every call is the evaluation of a response, which needs no scipy and so keeps
``scipy.signal`` (a second of import on a small machine) off the path of a command.

May import numpy only.
"""

from __future__ import annotations

import numpy as np

__all__ = ["sos_response", "sos_response_db"]


def sos_response(sos: np.ndarray, frequency_hz: np.ndarray, sample_rate_hz: float) -> np.ndarray:
    """Complex response of second-order sections at ``frequency_hz``.

    ``H(z) = Π_k (b0 + b1 z⁻¹ + b2 z⁻²) / (a0 + a1 z⁻¹ + a2 z⁻²)`` evaluated on the unit
    circle at ``z = exp(j 2π f / fs)``: what :func:`scipy.signal.sosfreqz` returns for
    ``worN=frequency_hz, fs=sample_rate_hz``.

    Examples
    --------
    A one-pole smoother ``y[n] = 0.5 x[n] + 0.5 y[n-1]`` has unit gain at DC and
    ``0.5 / 1.5 = 1/3`` at the Nyquist frequency:

    >>> sos = np.array([[0.5, 0.0, 0.0, 1.0, -0.5, 0.0]])
    >>> np.round(np.abs(sos_response(sos, np.array([0.0, 24000.0]), 48000.0)), 6)
    array([1.      , 0.333333])
    """
    sections = np.atleast_2d(np.asarray(sos, dtype=np.float64))
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=np.float64))
    z1 = np.exp(-2j * np.pi * f / float(sample_rate_hz))  # z⁻¹
    h = np.ones(f.shape, dtype=np.complex128)
    for b0, b1, b2, a0, a1, a2 in sections:
        # Horner's rule, as scipy.signal.freqz evaluates each section: near z = 1 a
        # high-pass section's terms nearly cancel, and the order of the sums matters.
        h *= (b0 + z1 * (b1 + z1 * b2)) / (a0 + z1 * (a1 + z1 * a2))
    return h


def sos_response_db(
    sos: np.ndarray, frequency_hz: np.ndarray, sample_rate_hz: float
) -> np.ndarray:
    """Gain of second-order sections in dB at ``frequency_hz`` (-inf at a zero).

    Examples
    --------
    >>> sos = np.array([[0.5, 0.0, 0.0, 1.0, -0.5, 0.0]])
    >>> np.round(sos_response_db(sos, np.array([0.0]), 48000.0), 6)
    array([0.])
    """
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(sos_response(sos, frequency_hz, sample_rate_hz)))
