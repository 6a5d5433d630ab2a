"""Tests for piezo.spectral.averaging: the one segmenting/averaging core (auto, cross)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal

from piezo.errors import InputError
from piezo.spectral.averaging import (
    FFT_BATCH_SAMPLES,
    AutoSpectra,
    CrossSpectra,
    Segmenter,
    window_coefficients,
)

# Agreement with scipy: both sides compute the same sums of the same float64 products,
# in a different order; 1e-10 relative leaves many orders of magnitude above the
# accumulated rounding (~1e-14 for thousands of terms) and far below any real defect.
RTOL = 1e-10


def _pair(n: int, seed: int = 5) -> np.ndarray:
    """Reference noise and a filtered, noisy copy of it: (n, 2)."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(n)
    b, a = signal.butter(2, 0.1)
    y = signal.lfilter(b, a, x) + 0.1 * rng.standard_normal(n)
    return np.column_stack([x, y])


@pytest.mark.parametrize("average", ["mean", "median"])
def test_auto_spectra_equal_scipy_welch(average):
    x = _pair(20000)
    auto = AutoSpectra(1000.0, 2, segment_frames=512, average=average)
    auto.update(x)
    r = auto.result()
    f, p = signal.welch(x, fs=1000.0, nperseg=512, axis=0, average=average)
    assert_allclose(r.frequency_hz, f)
    assert_allclose(r.density, p, rtol=RTOL)


def test_cross_spectra_equal_scipy_csd_welch_and_coherence():
    fs = 2000.0
    x = _pair(30000)
    cs = CrossSpectra(fs, 2, segment_frames=1024, overlap=0.5)
    cs.update(x)
    r = cs.result()
    kw = {"fs": fs, "nperseg": 1024, "noverlap": 512}
    _, pxx = signal.welch(x[:, 0], **kw)
    _, pyy = signal.welch(x[:, 1], **kw)
    _, pxy = signal.csd(x[:, 0], x[:, 1], **kw)
    _, coh = signal.coherence(x[:, 0], x[:, 1], **kw)
    assert_allclose(r.auto[:, 0], pxx, rtol=RTOL)
    assert_allclose(r.auto[:, 1], pyy, rtol=RTOL)
    assert_allclose(r.cross[:, 1], pxy, rtol=RTOL)
    assert_allclose(r.cross[:, 0].real, pxx, rtol=RTOL)
    assert_allclose(r.coherence()[:, 1], coh, rtol=1e-9)
    assert_allclose(r.transfer_h1()[:, 1], pxy / pxx, rtol=1e-9)


def test_reference_channel_other_than_first():
    x = _pair(8192)
    cs = CrossSpectra(1000.0, 2, reference_channel=1, segment_frames=256)
    cs.update(x)
    r = cs.result()
    _, pyx = signal.csd(x[:, 1], x[:, 0], fs=1000.0, nperseg=256)
    assert_allclose(r.cross[:, 0], pyx, rtol=RTOL)


def test_custom_window_array_equals_scipy():
    # A window given as coefficients (as H1 does with scipy.signal.get_window).
    x = _pair(9000)
    w = signal.get_window(("tukey", 0.25), 600)
    auto = AutoSpectra(1000.0, 2, window=w, overlap=0.25)
    auto.update(x)
    r = auto.result()
    _, p = signal.welch(x, fs=1000.0, window=w, noverlap=150, axis=0)
    assert r.window == "custom" and r.segment_frames == 600
    assert_allclose(r.density, p, rtol=RTOL)


def test_two_channel_impedance_long_segments_at_192k():
    # Drive voltage across a series R-C, current through it: Z = R + 1/(j w C). The
    # current is made from the voltage by the exact discrete (bilinear) admittance, so
    # V/I is that filter's inverse response; segments of 32768 samples at 192 kHz.
    fs, n = 192000.0, 32768
    r_ohm, c_f = 1000.0, 1e-6
    b, a = signal.bilinear([c_f, 0.0], [r_ohm * c_f, 1.0], fs)  # Y(s) = sC / (1 + sRC)
    v = np.random.default_rng(2).standard_normal(8 * n)
    i = signal.lfilter(b, a, v)
    cs = CrossSpectra(fs, 2, segment_frames=n)
    # Blocks of an odd length: every segment spans block boundaries.
    for start in range(0, v.size, 30001):
        cs.update(np.column_stack([i, v])[start : start + 30001])
    res = cs.result()
    z = res.transfer_h1()[:, 1]  # H1 of the voltage against the current: Z
    f = res.frequency_hz
    _, y_ref = signal.freqz(b, a, worN=f, fs=fs)
    sel = (f > 100.0) & (f < 20000.0)
    # Even noise-free, a segment of the current holds the response to voltage from
    # before the segment (the circuit's memory): a small uncorrelated part, seen as a
    # coherence just under 1. The random error of H1 is then about
    # sqrt(1 - g2) / sqrt(2 n_d g2) per bin (Bendat & Piersol, Random Data, 4th ed.,
    # chapter 9, gain and phase factor estimates), n_d the independent averages: taken
    # as half the segments (50 % Hann overlap gives about 0.9 of them, Welch 1967), and
    # six of those errors allowed for the complex (gain and phase) error over 3400 bins.
    g2 = res.coherence()[sel, 1]
    sigma = np.sqrt((1.0 - g2) / (2.0 * (res.averages / 2) * g2))
    assert np.all(np.abs(z[sel] * y_ref[sel] - 1.0) <= 6.0 * sigma)
    assert np.all(g2 > 0.998)
    assert res.averages == 15 and res.segment_frames == n


def test_memory_is_bounded_whatever_the_length():
    seg = Segmenter(192000.0, 2, segment_frames=32768)
    rng = np.random.default_rng(0)
    for _ in range(40):
        for _first, _k, _spec in seg.feed(rng.standard_normal((20000, 2))):
            pass
    # One batch of at most FFT_BATCH_SAMPLES samples (or one segment when longer), and a
    # carried buffer of at most the block plus a segment.
    assert seg._buf.size <= max(FFT_BATCH_SAMPLES, 32768 * 2)
    assert seg._data.shape[0] <= 20000 + 32768
    assert seg.segments == (40 * 20000 - 32768) // 16384 + 1


@settings(max_examples=25, deadline=None)
@given(
    cuts=st.lists(st.integers(min_value=0, max_value=5000), min_size=1, max_size=6),
    overlap=st.sampled_from([0.0, 0.5, 0.75]),
)
def test_cross_streaming_equals_whole(cuts, overlap):
    x = _pair(5000, seed=11)
    whole = CrossSpectra(1000.0, 2, segment_frames=300, overlap=overlap)
    whole.update(x)
    parts = CrossSpectra(1000.0, 2, segment_frames=300, overlap=overlap)
    edges = [0, *sorted(cuts), x.shape[0]]
    for a, b in itertools.pairwise(edges):
        parts.update(x[a:b])
    rw, rp = whole.result(), parts.result()
    assert rw.averages == rp.averages
    # Same segments, same arithmetic; only the batch grouping differs (rounding).
    assert_allclose(rp.auto, rw.auto, rtol=1e-12)
    assert_allclose(rp.cross, rw.cross, rtol=1e-12, atol=1e-12 * np.abs(rw.cross).max())


def test_errors_name_the_argument():
    with pytest.raises(InputError, match="reference_channel"):
        CrossSpectra(1000.0, 2, reference_channel=2)
    with pytest.raises(InputError, match="window coefficients"):
        Segmenter(1000.0, 1, segment_frames=8, window=np.ones(7))
    with pytest.raises(InputError, match="too little data"):
        CrossSpectra(1000.0, 2, segment_frames=64).result()
    with pytest.raises(InputError, match="window must be one of"):
        window_coefficients("kaiser", 8)


def test_public_api_is_pinned():
    import piezo.spectral.averaging as averaging

    assert set(averaging.__all__) >= {
        "AutoSpectra",
        "AutoSpectraResult",
        "CrossSpectra",
        "CrossSpectraResult",
        "Segmenter",
        "window_coefficients",
        "equivalent_noise_bandwidth_bins",
    }
    assert all(hasattr(averaging, name) for name in averaging.__all__)
