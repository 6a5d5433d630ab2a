"""Tests for piezo.spectral.welch: Welch PSD, windows, confidence interval, spectrogram."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal

from piezo.errors import InputError
from piezo.spectral.welch import (
    WINDOWS,
    Spectrogram,
    WelchPSD,
    equivalent_noise_bandwidth_bins,
    overlap_correlation,
    segment_frames_for,
    spectrogram,
    welch_psd,
    window_coefficients,
)

FS = 48000.0


def _noise(n: int, channels: int = 1, seed: int = 7) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal((n, channels))


# --- windows -------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("name", "nenbw"),
    [
        # Harris 1978, table 1 / Heinzel et al. 2002, appendix: rectangular 1.0000,
        # Hann 1.5000, 4-term Blackman-Harris (-92 dB) 2.0044; HFT95 3.8112 (Heinzel).
        ("rectangular", 1.0000),
        ("hann", 1.5000),
        ("blackmanharris", 2.0044),
        ("flattop", 3.8112),
    ],
)
def test_window_enbw_matches_published_values(name, nenbw):
    w = window_coefficients(name, 4096)
    # Published values have four decimals: a rounding half-width of 5e-5 bins. A
    # periodic window of 4096 samples matches the continuous value far closer.
    assert abs(equivalent_noise_bandwidth_bins(w) - nenbw) <= 5e-5


@pytest.mark.parametrize(
    ("name", "shift", "rho"),
    [
        # Harris 1978, table 1, "overlap correlation": Hann 65.9 % (75 % overlap) and
        # 16.7 % (50 %); rectangular 75.0 % and 50.0 %; 4-term Blackman-Harris 46.0 % and
        # 3.8 % (the Blackman-Harris row from memory; the Hann row recomputes exactly as
        # 1/6 at 50 %).
        ("hann", 1024, 0.659),
        ("hann", 2048, 0.167),
        ("rectangular", 1024, 0.750),
        ("rectangular", 2048, 0.500),
        ("blackmanharris", 1024, 0.460),
        ("blackmanharris", 2048, 0.038),
    ],
)
def test_overlap_correlation_matches_harris(name, shift, rho):
    w = window_coefficients(name, 4096)
    # Table values have three significant decimals: half a unit in the last place.
    assert abs(overlap_correlation(w, shift) - rho) <= 5e-4


def test_flattop_amplitude_flatness():
    # Heinzel et al. 2002 (HFT95): maximum amplitude error 0.0044 dB for a tone anywhere
    # between two bins. Check the worst case, half a bin off, with the spectrum scaling.
    n = 4096
    t = np.arange(8 * n) / FS
    f = (200 + 0.5) * FS / n
    x = np.sqrt(2) * np.sin(2 * np.pi * f * t)  # 1 unit RMS
    r = welch_psd(x, FS, segment_frames=n, window="flattop", scaling="spectrum")
    peak_db = 10 * np.log10(r.psd[:, 0].max())
    assert abs(peak_db) <= 0.0044 + 0.0005  # + tiny sidelobe/overlap ripple allowance


def test_unknown_window_is_refused():
    with pytest.raises(InputError, match="window must be one of"):
        window_coefficients("kaiser", 128)


# --- Welch equals scipy ----------------------------------------------------------------


@pytest.mark.parametrize("window", WINDOWS)
@pytest.mark.parametrize("average", ["mean", "median"])
def test_welch_equals_scipy(window, average):
    x = _noise(50_000, 2)
    r = welch_psd(x, FS, segment_frames=1000, window=window, average=average, overlap=0.5)
    w = window_coefficients(window, 1000)
    f, p = signal.welch(x, FS, window=w, nperseg=1000, noverlap=500, axis=0, average=average)
    assert_allclose(r.frequency_hz, f, rtol=1e-12)
    # 1e-9 relative (issue contract); the constant-detrended DC bin is ~1e-36 of
    # rounding noise in both, hence an absolute floor far below every other bin.
    assert_allclose(r.psd, p, rtol=1e-9, atol=1e-20)


@pytest.mark.parametrize("overlap", [0.3, 0.5, 0.9])
def test_welch_with_offset_blockwise_equals_scipy(overlap):
    # Segment means come from chunk sums when the segment spans few gcd(n, step) chunks
    # (0.5: 2 chunks) and from the segments themselves otherwise (0.3 and 0.9: 10); a DC
    # offset makes a wrong mean visible. Reference: scipy.signal.welch (constant detrend).
    x = _noise(30_000, 2, seed=11) + np.array([0.3, -2.0])
    est = WelchPSD(FS, 2, segment_frames=1000, overlap=overlap)
    for a, b in itertools.pairwise([0, 1, 999, 1000, 7777, 30_000]):
        est.update(x[a:b])
    r = est.result()
    w = window_coefficients("hann", 1000)
    _f, p = signal.welch(x, FS, window=w, nperseg=1000, noverlap=r.overlap_frames, axis=0)
    # 1e-9 relative (issue contract), every bin: with the Hann window the detrended DC
    # bin, Σ w·(x - mean), is noise-sized here, not rounding noise (an offset left in
    # would make it 300 and 9000 times larger for these two offsets).
    assert_allclose(r.psd, p, rtol=1e-9)


def test_welch_spectrum_scaling_equals_scipy():
    x = _noise(30_000)
    r = welch_psd(x, FS, segment_frames=2048, scaling="spectrum", overlap=0.75)
    _f, p = signal.welch(x, FS, nperseg=2048, noverlap=1536, axis=0, scaling="spectrum")
    assert_allclose(r.psd, p, rtol=1e-9, atol=1e-20)


def test_reference_tone_on_bin():
    # Heinzel, Rüdiger, Schilling 2002 (spectrum and density scaling): fs 48 kHz,
    # N 4096 Hann, 1 Pa RMS tone on bin 86: spectrum peak 1.000 Pa², density peak 0.056889 Pa²/Hz.
    n = 4096
    t = np.arange(16 * n) / FS
    x = np.sqrt(2) * np.sin(2 * np.pi * 86 * FS / n * t)
    spec = welch_psd(x, FS, segment_frames=n, scaling="spectrum")
    dens = welch_psd(x, FS, segment_frames=n)
    assert np.argmax(spec.psd[:, 0]) == 86
    assert_allclose(spec.psd[86, 0], 1.000, rtol=1e-9)
    assert_allclose(dens.psd[86, 0], 0.056889, rtol=1e-5)  # 5 significant digits given
    assert_allclose(dens.enbw_hz, 1.5 * FS / n, rtol=1e-12)


def test_white_noise_density_level():
    # One-sided density of unit-variance white noise is 2/fs (Heinzel et al. 2002).
    x = _noise(400_000)
    r = welch_psd(x, FS, segment_frames=256)
    interior = r.psd[2:-2, 0].mean()
    # ~3000 segments x 124 bins averaged: relative standard error well below 0.5 %.
    assert_allclose(interior, 2 / FS, rtol=0.01)


# --- Parseval --------------------------------------------------------------------------


def _tone(n, f, rms=1.0):
    t = np.arange(n) / FS
    return np.sqrt(2) * rms * np.sin(2 * np.pi * f * t + 0.3)


@pytest.mark.parametrize("window", WINDOWS)
@pytest.mark.parametrize("kind", ["noise", "tone", "mixture"])
def test_parseval(window, kind):
    n = 480_000
    if kind == "noise":
        x = _noise(n)[:, 0]
    elif kind == "tone":
        x = _tone(n, 1234.5, 2.0)
    else:
        x = _tone(n, 440.0) + 0.5 * _tone(n, 6001.3) + 0.3 * _noise(n, seed=3)[:, 0]
    ms = np.mean((x - x.mean()) ** 2)
    for scaling in ("density", "spectrum"):
        r = welch_psd(x, FS, segment_frames=4096, window=window, scaling=scaling)
        # Issue contract: within 0.5 %. Each segment obeys Parseval exactly; what is left
        # is the window's uneven weighting of samples, averaged over ~230 segments.
        assert_allclose(r.mean_square()[0], ms, rtol=0.005)


# --- confidence interval (Welch 1967; Bendat & Piersol) -------------------------------


def test_effective_averages_match_simulated_variance():
    # Welch 1967, eq. 11: overlapped segments are worth fewer independent averages.
    # With 75 % overlap and Hann the variance is ~1.9x that of the naive 1/K. Simulate:
    # 200 realisations x 125 interior bins of white noise give ~25 000 estimates; the
    # relative standard error of the sample variance is about sqrt(2/25000) ~ 1 %
    # (plus bin-to-bin correlation of Hann neighbours), so 8 % separates the formula
    # from the naive value with margin.
    rng = np.random.default_rng(11)
    n_seg, k = 256, 60
    frames = n_seg + (k - 1) * n_seg // 4
    estimates = []
    for _ in range(200):
        r = welch_psd(rng.standard_normal(frames), FS, segment_frames=n_seg, overlap=0.75)
        estimates.append(r.psd[2:-2, 0] / (2 / FS))
    rel_var = np.var(np.concatenate(estimates))
    assert r.averages == k
    assert_allclose(1 / rel_var, r.effective_averages, rtol=0.08)
    assert r.effective_averages < 0.6 * k  # the naive count would be wrong


def test_confidence_interval_independent_segments():
    # Bendat & Piersol: with K independent segments (no overlap) the estimate has 2K
    # degrees of freedom; interval nu*P/chi2(1-a/2) .. nu*P/chi2(a/2). For nu = 20 the
    # 95 % quantiles of chi-square are 9.591 and 34.170 (standard tables).
    x = _noise(10 * 512)
    r = welch_psd(x, FS, segment_frames=512, overlap=0.0)
    assert r.averages == 10
    assert_allclose(r.degrees_of_freedom, 20.0)
    assert_allclose(r.ci_lower_db, 10 * np.log10(20 / 34.170), atol=2e-3)
    assert_allclose(r.ci_upper_db, 10 * np.log10(20 / 9.591), atol=2e-3)


def test_median_and_max_have_no_chi_square_interval():
    x = _noise(20_000)
    for average in ("median", "max"):
        r = welch_psd(x, FS, segment_frames=512, average=average)
        assert r.ci_lower_db is None and r.ci_upper_db is None


# --- median cap, max hold --------------------------------------------------------------


def test_median_memory_cap_keeps_evenly_spread_subset():
    x = _noise(200_000)
    bins = 129
    cap_bytes = 40 * 8 * bins  # room for 40 segments
    est = WelchPSD(FS, 1, segment_frames=256, average="median", median_memory_bytes=cap_bytes)
    est.update(x)
    r = est.result()
    assert r.averages == (200_000 - 256) // 128 + 1
    assert 20 <= r.median_segments <= 40
    # The subset's median estimates the same PSD: within the spread of a median of
    # 20+ chi-square(2) values (~30 % per bin), so compare the mean over bins (~3 %).
    full = welch_psd(x, FS, segment_frames=256, average="median")
    assert_allclose(r.psd[2:-2].mean(), full.psd[2:-2].mean(), rtol=0.1)


def test_max_hold_is_at_least_mean():
    x = _noise(20_000) + _tone(20_000, 1000)[:, None]
    mx = welch_psd(x, FS, segment_frames=512, average="max")
    mean = welch_psd(x, FS, segment_frames=512)
    assert np.all(mx.psd >= mean.psd * (1 - 1e-12))


# --- streaming -------------------------------------------------------------------------


@settings(max_examples=25, deadline=None)
@given(
    cuts=st.lists(st.integers(0, 6000), min_size=0, max_size=6),
    average=st.sampled_from(["mean", "median", "max"]),
)
def test_blockwise_equals_whole(cuts, average):
    x = _noise(6000, 2, seed=5)
    whole = welch_psd(x, FS, segment_frames=300, overlap=0.6, average=average)
    est = WelchPSD(FS, 2, segment_frames=300, overlap=0.6, average=average)
    edges = [0, *sorted(cuts), x.shape[0]]
    for a, b in itertools.pairwise(edges):
        est.update(x[a:b])
    assert_allclose(est.result().psd, whole.psd, rtol=1e-12, atol=1e-30)


@settings(max_examples=15, deadline=None)
@given(cuts=st.lists(st.integers(0, 20000), min_size=0, max_size=5))
def test_spectrogram_blockwise_equals_whole(cuts):
    x = _noise(20_000, 1, seed=9)
    opts = dict(segment_frames=256, max_columns=8)
    whole = spectrogram(x, FS, **opts)
    est = Spectrogram(FS, 1, **opts)
    edges = [0, *sorted(cuts), x.shape[0]]
    for a, b in itertools.pairwise(edges):
        est.update(x[a:b])
    r = est.result()
    assert_allclose(r.power, whole.power, rtol=1e-12)
    assert_allclose(r.time_s, whole.time_s, rtol=1e-12)


def test_too_short_raises():
    est = WelchPSD(FS, 1, segment_frames=1024)
    est.update(np.zeros((100, 1)))
    with pytest.raises(InputError, match="too little data"):
        est.result()


def test_bad_block_shape_raises():
    est = WelchPSD(FS, 2, segment_frames=64)
    with pytest.raises(InputError, match=r"shape \(frames, 2\)"):
        est.update(np.zeros((100, 3)))


def test_resolution_option():
    assert segment_frames_for(48000, 1.0) == 48000  # 48000 = 2^7·3·5^3 is a fast size
    n = segment_frames_for(44100, 3.0)
    assert 44100 / n <= 3.0
    est = WelchPSD(FS, 1, resolution_hz=10.0)
    assert FS / est.segment_frames <= 10.0


# --- spectrogram -----------------------------------------------------------------------


def test_spectrogram_bounded_and_consistent_with_welch():
    x = _noise(100_000) + _tone(100_000, 3000)[:, None]
    r = spectrogram(x, FS, segment_frames=512, max_columns=16)
    assert 8 <= r.power.shape[0] <= 16
    # The count-weighted mean of the columns is the Welch mean over the same segments.
    w = welch_psd(x, FS, segment_frames=512)
    mean = (r.power * r.segments_per_column[:, None, None]).sum(0) / r.segments_per_column.sum()
    assert r.segments_per_column.sum() == w.averages
    assert_allclose(mean, w.psd, rtol=1e-10)
    assert np.all(np.diff(r.time_s) > 0)
    # Calibrated dB: a 1 Pa RMS tone reads 93.98 dB re (20 µPa)² in the spectrum scaling
    # (1 Pa RMS = 20 lg(1 / 20e-6) = 93.979 dB, ISO 1683:2015 reference).
    n = 4096
    tone = _tone(8 * n, 86 * FS / n)
    s = spectrogram(tone, FS, segment_frames=n, scaling="spectrum")
    assert_allclose(s.level_db(20e-6)[:, 86, 0], 93.979, atol=0.001)


def test_public_api_is_pinned():
    # Reports, batch checks and the CLI use these names: renaming one is a breaking change.
    import piezo.spectral.welch

    assert set(piezo.spectral.welch.__all__) == {
        "AVERAGES", "PSDResult", "SCALINGS", "Spectrogram", "SpectrogramResult", "WINDOWS",
        "WelchPSD", "equivalent_noise_bandwidth_bins", "overlap_correlation",
        "segment_frames_for", "spectrogram", "welch_psd", "window_coefficients",
    }  # fmt: skip
    assert all(hasattr(piezo.spectral.welch, name) for name in piezo.spectral.welch.__all__)
