"""Tests for piezo.tone.analysis: tone frequency, level, THD, THD+N, SINAD, SNR."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from piezo.errors import InputError
from piezo.tone.analysis import ToneAnalyzer, measure_tone

FS = 48000.0


def _tone(f0, *, seconds=3.0, rms=1.0, harmonics=(), phase=0.4):
    """Sine of ``rms`` plus harmonics given as (order, amplitude re fundamental)."""
    t = np.arange(int(seconds * FS)) / FS
    x = np.sin(2 * np.pi * f0 * t + phase)
    for n, rel in harmonics:
        x += rel * np.sin(2 * np.pi * n * f0 * t + 1.3 * n)
    return math.sqrt(2) * rms * x


def test_one_pascal_1khz_reads_93_98_db():
    # 1 Pa RMS = 20 lg(1 / 20e-6) = 93.979 dB re 20 µPa (ISO 1683:2015 reference).
    r = measure_tone(_tone(1000.0), FS)
    assert_allclose(r.level_db(20e-6), 93.979, atol=0.001)
    assert_allclose(r.frequency_hz, 1000.0, rtol=1e-6)


@pytest.mark.parametrize("f0", [31.7, 997.3, 1000.0, 4321.123, 15003.7])
def test_frequency_better_than_0_01_percent(f0):
    # Issue contract: better than 0.01 % for a clean tone. Off-bin frequencies are the
    # hard case for interpolation; the centroid of the Blackman-Harris power kernel is
    # exact up to its sidelobes, so we ask for 1e-6 relative (100x the contract).
    r = measure_tone(_tone(f0), FS)
    assert abs(r.frequency_hz / f0 - 1) < 1e-6
    # No scalloping: the level is exact wherever the tone lies between bins.
    assert_allclose(r.tone_rms, 1.0, rtol=1e-6)


@pytest.mark.parametrize("f0", [997.3, 1000.0, 2500.5])
def test_thd_known_harmonics(f0):
    # THD re the fundamental (the common definition, common practice): 1 % second + 0.5 % third
    # harmonic gives THD = sqrt(0.01² + 0.005²) = 1.1180 %; issue tolerance 0.01 percentage points.
    r = measure_tone(_tone(f0, harmonics=[(2, 0.01), (3, 0.005)]), FS)
    assert abs(r.thd_percent - 1.1180) <= 0.01
    # With nothing but harmonics, THD+N re the total is the distortion factor
    # THD/sqrt(1+THD²) (the distortion factor re the total, common definition);
    # SINAD = -THD+N in dB.
    thd = math.hypot(0.01, 0.005)
    assert_allclose(r.thd_n_ratio, thd / math.sqrt(1 + thd**2), rtol=1e-4)
    assert_allclose(r.sinad_db, -20 * math.log10(r.thd_n_ratio), rtol=1e-12)
    # Orders up to the bandwidth's upper end (20 kHz by default), the band of THD+N.
    assert r.harmonic_orders == tuple(n for n in range(2, 11) if n * f0 <= 20000)
    assert_allclose(r.harmonic_rms[:2], [0.01, 0.005], rtol=1e-4)


def test_thd_with_noise_and_snr():
    # White noise of standard deviation s has one-sided density 2 s²/fs, so its mean
    # square in 20 Hz - 20 kHz is s²·(19980/24000) (Heinzel et al. 2002, density of
    # white noise). Three seconds at 1 Hz bins: ~60 000 degrees of freedom, so the
    # noise power is known to ~0.6 %: 0.05 dB on SNR.
    rng = np.random.default_rng(12)
    s = 1e-3
    x = _tone(1000.0, harmonics=[(2, 0.01), (3, 0.005)])
    noise = s * rng.standard_normal(x.size)
    r = measure_tone(x + noise, FS, noise=noise)
    noise_ms = s**2 * 19980 / 24000
    assert_allclose(r.snr_db, 10 * math.log10(1.0 / noise_ms), atol=0.05)
    # Harmonics sit 40 and 46 dB above the noise in their bins: THD within 0.01 pp.
    assert abs(r.thd_percent - 1.1180) <= 0.01
    # THD+N includes the noise: sqrt(harmonics² + noise) over the total.
    harm_ms = 2 * 0.5 * (0.01**2 + 0.005**2)
    want = math.sqrt((harm_ms + noise_ms) / (1 + harm_ms + noise_ms))
    assert_allclose(r.thd_n_ratio, want, rtol=0.01)


def test_harmonics_stop_at_nyquist():
    r = measure_tone(_tone(5000.0, harmonics=[(2, 0.01), (4, 0.002)]), FS)
    assert r.harmonic_orders == (2, 3, 4)  # 5th would be 25 kHz > 24 kHz
    assert abs(r.thd_percent - 100 * math.hypot(0.01, 0.002)) <= 0.01


def test_bandwidth_limits_thd_n():
    # A 30 kHz-side spur is outside a 20 Hz - 20 kHz bandwidth: excluded from THD+N.
    x = _tone(1000.0) + 0.1 * math.sqrt(2) * np.sin(2 * np.pi * 21000 * np.arange(3 * 48000) / FS)
    narrow = measure_tone(x, FS, bandwidth_hz=(20, 20000))
    wide = measure_tone(x, FS, bandwidth_hz=(20, 23000))
    assert narrow.thd_n_percent < 1e-3
    assert_allclose(wide.thd_n_ratio, 0.1 / math.sqrt(1.01), rtol=1e-4)


def test_expected_frequency_selects_the_tone():
    x = _tone(1000.0) + _tone(250.0, rms=3.0)
    assert_allclose(measure_tone(x, FS).frequency_hz, 250.0, rtol=1e-6)
    assert_allclose(measure_tone(x, FS, expected_hz=1000).frequency_hz, 1000.0, rtol=1e-6)
    with pytest.raises(InputError, match="no tone found near 8000 Hz"):
        measure_tone(np.zeros(48000), FS, expected_hz=8000)


def test_short_signal_uses_one_segment():
    r = measure_tone(_tone(1000.0, seconds=0.25), FS)
    assert r.segments == 1 and r.resolution_hz == 4.0
    assert_allclose(r.frequency_hz, 1000.0, rtol=1e-4)


def test_multichannel():
    x = np.stack([_tone(1000.0), _tone(440.0, rms=0.5)], axis=1)
    r = measure_tone(x, FS)
    assert_allclose([r[0].frequency_hz, r[1].frequency_hz], [1000.0, 440.0], rtol=1e-6)
    assert_allclose([r[0].tone_rms, r[1].tone_rms], [1.0, 0.5], rtol=1e-6)


@settings(max_examples=10, deadline=None)
@given(cuts=st.lists(st.integers(0, 96000), min_size=0, max_size=5))
def test_blockwise_equals_whole(cuts):
    x = _tone(997.3, seconds=2.0, harmonics=[(2, 0.01)])[:, None]
    whole = ToneAnalyzer(FS, 1)
    whole.update(x)
    an = ToneAnalyzer(FS, 1)
    for a, b in itertools.pairwise([0, *sorted(cuts), x.shape[0]]):
        an.update(x[a:b])
    r, w = an.result()[0], whole.result()[0]
    assert_allclose(
        [r.frequency_hz, r.tone_rms, r.thd_ratio, r.thd_n_ratio],
        [w.frequency_hz, w.tone_rms, w.thd_ratio, w.thd_n_ratio],
        rtol=1e-9,
    )


def test_bad_options():
    with pytest.raises(InputError, match="bandwidth"):
        measure_tone(_tone(1000.0), FS, bandwidth_hz=(20000, 20))
    with pytest.raises(InputError, match="harmonics"):
        measure_tone(_tone(1000.0), FS, harmonics=1)


def test_noise_alone_is_not_a_tone():
    # White noise has no line 10 dB above its neighbours (detection rule of piezo.tone.analysis).
    x = np.random.default_rng(2).standard_normal(int(2 * FS))
    with pytest.raises(InputError, match="no tone found"):
        measure_tone(x, FS)


def test_public_api_is_pinned():
    # `measure_tone` is what calibration and production checks call.
    import piezo.tone.analysis

    assert set(piezo.tone.analysis.__all__) == {
        "LINE_HALF_WIDTH_BINS", "ToneAnalyzer", "ToneResult", "band_mean_square",
        "default_bandwidth_hz", "measure_tone", "noise_mean_square",
    }  # fmt: skip
    assert all(hasattr(piezo.tone.analysis, name) for name in piezo.tone.analysis.__all__)


def test_thd_and_thd_n_share_one_band():
    # Issue 12 §3.15: 7 kHz at 48 kHz with H3 at −40 dB (1 %, at 21 kHz): outside the
    # default 20 Hz–20 kHz band, so neither THD nor THD+N counts it (THD was 1.0 % beside
    # a THD+N of 0.0 %). H2 at 14 kHz, inside, counts in both.
    x = _tone(7000.0, harmonics=[(3, 0.01)])
    r = measure_tone(x, FS)
    assert r.harmonic_orders == (2,)
    assert r.thd_percent < 1e-3 and r.thd_n_percent < 1e-3
    # Widened to 23 kHz the band holds H3: both see it (THD 1 %; THD+N the distortion
    # factor 0.01/√(1 + 0.01²), as in test_thd_known_harmonics).
    wide = measure_tone(x, FS, bandwidth_hz=(20, 23000))
    assert wide.harmonic_orders == (2, 3)
    assert abs(wide.thd_percent - 1.0) <= 0.01
    assert_allclose(wide.thd_n_ratio, 0.01 / math.sqrt(1 + 0.01**2), rtol=1e-4)
    # THD never exceeds THD+N re the fundamental: THD+N·total ≥ THD·fundamental.
    for res in (r, wide):
        assert res.thd_ratio * res.tone_rms <= res.thd_n_ratio * res.total_rms * (1 + 1e-9)
