"""Second-order-section responses in numpy (piezo.sos) against scipy.signal."""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy import signal

from piezo.sos import sos_response, sos_response_db


@given(order=st.integers(1, 8), kind=st.sampled_from(["lowpass", "highpass", "bandpass"]))
def test_matches_scipy_sosfreqz_on_butterworth_designs(order, kind):
    fs = 48000.0
    edges = [300.0, 3000.0] if kind == "bandpass" else 1000.0
    sos = signal.butter(order, edges, btype=kind, fs=fs, output="sos")
    f = np.geomspace(1.0, 23999.0, 200)
    _, expected = signal.sosfreqz(sos, worN=f, fs=fs)
    # Both evaluate the same rational function; rounding differs by a few ulps per section.
    np.testing.assert_allclose(sos_response(sos, f, fs), expected, rtol=1e-9, atol=1e-12)


def test_elliptic_zeros_give_minus_infinity_and_scipy_agrees():
    sos = signal.ellip(6, 0.01, 80, 0.4, output="sos")
    f = np.linspace(0.0, 0.5, 101)
    _, expected = signal.sosfreqz(sos, worN=f, fs=1.0)
    np.testing.assert_allclose(sos_response(sos, f, 1.0), expected, rtol=1e-8, atol=1e-12)
    with np.errstate(divide="ignore"):
        np.testing.assert_allclose(
            sos_response_db(sos, f, 1.0), 20 * np.log10(np.abs(expected)), atol=1e-6
        )
