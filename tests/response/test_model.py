"""Tests for piezo.response.model: the one high-pass/resonance response model."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal

from piezo.errors import InputError
from piezo.response.model import (
    analog_prototype,
    complex_response,
    highpass_db,
    highpass_power,
    resonance_db,
    response_db,
)

F = np.geomspace(0.5, 50000.0, 400)

CASES = [
    # (corner_hz, order, q, resonance_hz, resonance_q)
    (30.0, 1, None, None, None),
    (30.0, 2, 0.6, None, None),
    (30.0, 2, None, None, None),
    (12.0, 3, None, None, None),
    (5.0, 4, None, 8000.0, 12.0),
    (80.0, 2, 1.4, 3000.0, 25.0),
]


@pytest.mark.parametrize(("fc", "order", "q", "fr", "qr"), CASES)
def test_magnitude_and_phase_equal_scipy_freqs(fc, order, q, fr, qr):
    kw = {"corner_hz": fc, "order": order, "q": q, "resonance_hz": fr, "resonance_q": qr}
    # Independent prototype: scipy's analog Butterworth high-pass where the shape is one,
    # else the textbook second-order sections written out here.
    wc = 2 * math.pi * fc
    if q is None and order > 1:
        b, a = signal.butter(order, wc, btype="highpass", analog=True)
    elif order == 1:
        b, a = [1.0, 0.0], [1.0, wc]
    else:
        b, a = [1.0, 0.0, 0.0], [1.0, wc / q, wc**2]
    if fr is not None:
        wr = 2 * math.pi * fr
        b, a = np.polymul(b, [wr**2]), np.polymul(a, [1.0, wr / qr, wr**2])
    _, h = signal.freqs(b, a, worN=2 * math.pi * F)
    # Closed forms and polynomial evaluation of the same function in float64: the
    # agreement is limited by rounding of polynomials with coefficients up to ~1e20
    # (relative ~1e-12); 1e-9 dB and 1e-9 rad leave ample margin yet catch any wrong
    # term (a misplaced q or order changes the result by whole dB).
    assert_allclose(response_db(F, **kw), 20 * np.log10(np.abs(h)), atol=1e-9)
    assert_allclose(np.angle(complex_response(F, **kw)), np.angle(h), atol=1e-9)
    if fr is None:
        assert_allclose(
            10 * np.log10(highpass_power(F, corner_hz=fc, order=order, q=q)),
            20 * np.log10(np.abs(h)),
            atol=1e-9,
        )


def test_prototype_equals_scipy_butterworth_coefficients():
    b, a = analog_prototype(corner_hz=10.0, order=5)
    b_ref, a_ref = signal.butter(5, 2 * math.pi * 10.0, btype="highpass", analog=True)
    assert_allclose(b / a[0], b_ref / a_ref[0], rtol=1e-12, atol=1e-12)
    assert_allclose(a / a[0], a_ref / a_ref[0], rtol=1e-12)


def test_hand_values():
    # Butterworth: |H|² = 1/2 at the corner, any order (Butterworth 1930).
    for n in (1, 2, 3, 6):
        assert highpass_power(40.0, corner_hz=40.0, order=n) == pytest.approx(0.5, rel=1e-15)
    # First order one decade below the corner: -10 lg(1 + 100) = -20.0432 dB.
    assert float(highpass_db(3.0, corner_hz=30.0, order=1)) == pytest.approx(
        -10 * math.log10(101), abs=1e-12
    )
    # Second order with q at its pole frequency: |H| = q.
    assert float(highpass_db(30.0, corner_hz=30.0, order=2, q=3.0)) == pytest.approx(
        20 * math.log10(3.0), abs=1e-12
    )
    # Resonance: unity far below, q at the resonance, -40 dB/decade far above.
    assert float(resonance_db(1.0, resonance_hz=1e4, q=5.0)) == pytest.approx(0.0, abs=1e-6)
    assert float(resonance_db(1e6, resonance_hz=1e4, q=5.0)) == pytest.approx(-80.0, abs=1e-3)


def test_power_has_no_overflow_far_from_the_corner():
    p = highpass_power(np.array([0.0, 1e-300, 1e300]), corner_hz=1.0, order=4)
    assert p.tolist() == [0.0, 0.0, 1.0]


def test_errors():
    with pytest.raises(InputError, match="order must be a positive integer"):
        highpass_db(F, corner_hz=10.0, order=0)
    with pytest.raises(InputError, match="q applies to a second-order"):
        highpass_db(F, corner_hz=10.0, order=3, q=0.7)
    with pytest.raises(InputError, match="resonance_q"):
        response_db(F, corner_hz=10.0, order=1, resonance_hz=100.0)
    with pytest.raises(InputError, match="corner_hz and q must be positive"):
        analog_prototype(corner_hz=-1.0, order=1)


def test_public_api_is_pinned():
    import piezo.response.model as model

    assert set(model.__all__) == {
        "analog_prototype",
        "complex_response",
        "highpass_db",
        "highpass_power",
        "resonance_db",
        "response_db",
    }
