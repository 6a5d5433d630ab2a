"""Tests for piezo.tone.line: the one tone-line estimator (energy barycenter, Parseval)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from piezo.errors import InputError
from piezo.spectral.averaging import AutoSpectra
from piezo.tone.line import spectral_line

FS = 48000.0


def _density(x: np.ndarray, n: int, window: str) -> tuple[np.ndarray, np.ndarray]:
    auto = AutoSpectra(FS, 1, segment_frames=n, window=window)
    auto.update(x)
    r = auto.result()
    return r.frequency_hz, r.density[:, 0]


def test_hand_computed_sums_and_centroid():
    # Energy barycenter (Ding, Zheng, Yang 2010): f = Σ f_k P_k / Σ P_k, power Σ P_k·Δf.
    f = np.arange(6) * 2.0  # 2 Hz bins
    p = np.array([0.0, 1.0, 3.0, 1.0, 0.0, 0.0])
    line = spectral_line(f, p, 2, half_width_bins=1)
    assert (line.first_bin, line.last_bin) == (1, 3)
    assert line.frequency_hz == 4.0  # (2·1 + 4·3 + 6·1) / 5
    assert line.power == 10.0  # 5 · 2 Hz
    asym = spectral_line(f, np.array([0.0, 1.0, 2.0, 0.0, 0.0, 0.0]), 2, half_width_bins=1)
    assert asym.frequency_hz == pytest.approx((2.0 * 1 + 4.0 * 2) / 3, rel=1e-15)
    # A floor density of 0.5 under three 2 Hz bins: 3 unit² off the 10.
    assert spectral_line(f, p, 2, half_width_bins=1, floor_density=0.5).mean_square == 7.0
    # The DC bin is never part of a line.
    assert spectral_line(f, p, 0, half_width_bins=1).first_bin == 1


def test_tone_on_a_bin_rectangular_is_exact():
    # Rectangular window, tone on bin 100 of N: all its power in that bin, A²/2.
    n = 4800
    t = np.arange(4 * n) / FS
    x = 3.0 * np.cos(2 * np.pi * 1000.0 * t)
    f, p = _density(x, n, "rectangular")
    line = spectral_line(f, p, 100, half_width_bins=0)
    # Floating-point sums of 4800-term DFTs: 1e-12 relative.
    assert line.mean_square == pytest.approx(4.5, rel=1e-12)
    assert line.frequency_hz == 1000.0


@pytest.mark.parametrize("offset_bins", [0.0, 0.13, 0.25, 0.5])
def test_tone_between_bins_blackman_harris(offset_bins):
    # 4-term Blackman-Harris, ±6 bins: the whole main lobe (±4 bins) and the first
    # sidelobes; what is left out is below -92 dB (Harris 1978), so the mean square reads
    # A²/2 to 1e-8 relative and the centroid the frequency to 1e-5 bins (the kernel's
    # truncated tails are that small and nearly symmetric).
    n = 4800
    df = FS / n
    f0 = 1000.0 + offset_bins * df
    t = np.arange(30 * n) / FS
    f, p = _density(math.sqrt(2) * 0.7 * np.sin(2 * np.pi * f0 * t + 0.3), n, "blackmanharris")
    line = spectral_line(f, p, int(round(f0 / df)), half_width_bins=6)
    assert line.rms == pytest.approx(0.7, rel=1e-8)
    assert abs(line.frequency_hz - f0) <= 1e-5 * df


def test_hann_three_and_five_bins():
    # Hann, a quarter bin off. Five bins hold the main lobe: the centroid is within
    # 1e-3 bins (the -31 dB sidelobes are left out). Three bins (the hum check) hold at
    # least 97.9 % of the power (Harris 1978, worst case half a bin off: -0.09 dB) and
    # the centroid is pulled toward the peak bin, by less than 0.01 bins here
    # (computed from the Hann kernel, common practice).
    n = 4800
    df = FS / n
    f0 = 1000.0 + 0.25 * df
    t = np.arange(30 * n) / FS
    f, p = _density(np.sin(2 * np.pi * f0 * t), n, "hann")
    five = spectral_line(f, p, 100, half_width_bins=2)
    three = spectral_line(f, p, 100, half_width_bins=1)
    assert abs(five.frequency_hz - f0) <= 1e-3 * df
    assert abs(three.frequency_hz - f0) <= 1e-2 * df
    assert 0.979 * 0.5 <= three.mean_square <= 0.5
    assert five.mean_square == pytest.approx(0.5, rel=1e-3)


def test_errors():
    f = np.arange(4.0)
    with pytest.raises(InputError, match="peak_bin"):
        spectral_line(f, np.ones(4), 4, half_width_bins=1)
    with pytest.raises(InputError, match="half_width_bins"):
        spectral_line(f, np.ones(4), 1, half_width_bins=-1)
    with pytest.raises(InputError, match="equal length"):
        spectral_line(f, np.ones(3), 1, half_width_bins=1)
