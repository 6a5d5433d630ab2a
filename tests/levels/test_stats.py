"""Streaming statistics and the RMS in a band (piezo.levels.stats)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from piezo.errors import InputError
from piezo.levels.stats import BandRms

# --- RMS in a band (the velocity band of machine-vibration practice) -------------------


def test_band_rms_matches_scipy_sosfilt_of_the_same_design(rng):
    # The streamed band RMS equals the RMS of scipy.signal.sosfilt through the same
    # Butterworth design, whatever the block split (the filter state is carried).
    fs = 8000.0
    x = rng.standard_normal((20000, 2))
    whole = BandRms(fs, 2, (10.0, 1000.0))
    whole.update(x)
    parts = BandRms(fs, 2, (10.0, 1000.0))
    for start in range(0, x.shape[0], 1234):
        parts.update(x[start : start + 1234])
    sos = signal.butter(2, (10.0, 1000.0), btype="bandpass", fs=fs, output="sos")
    expected = np.sqrt(np.mean(signal.sosfilt(sos, x, axis=0) ** 2, axis=0))
    np.testing.assert_allclose(whole.rms, expected, rtol=1e-10)
    np.testing.assert_allclose(parts.rms, expected, rtol=1e-10)


def test_band_rms_edges_are_minus_3_db_of_a_butterworth():
    # A Butterworth band-pass is −3.01 dB (1/√2) at its edges (first principles).
    fs, n = 48000.0, 48000 * 4
    t = np.arange(n) / fs
    for f in (10.0, 1000.0):
        rms = BandRms(fs, 1, (10.0, 1000.0))
        rms.update(np.sin(2 * np.pi * f * t)[:, None])
        # Start-up of the 10 Hz edge over 4 s: a few tenths of a percent.
        assert rms.rms[0] == pytest.approx(0.5, rel=5e-3)


@pytest.mark.parametrize("band", [(0.0, 100.0), (100.0, 10.0), (10.0, 23000.0)])
def test_band_rms_refuses_a_band_that_is_not_one(band):
    with pytest.raises(InputError, match="band"):
        BandRms(48000.0, 1, band)
