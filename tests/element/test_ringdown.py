"""Ring-down: matrix pencil + least squares, logarithmic decrement, repeated events."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from piezo.element.ringdown import (
    RingdownAnalyzer,
    damping_from_decrement,
    identify_modes,
    logarithmic_decrement,
    matrix_pencil,
    ringdown,
)
from piezo.errors import InputError
from piezo.io.reader import open_recording
from tests.paths import RECORDINGS

FS = 48000.0
# (damped frequency Hz, Q, amplitude): three modes of our own.
MODES = ((1830.0, 120.0, 1.0), (4270.0, 60.0, 0.5), (9610.0, 200.0, 0.3))


def _decay(t, modes=MODES):
    x = np.zeros(t.size)
    for f, q, a in modes:
        wd = 2 * np.pi * f
        # σ from Q: ζ = 1/(2Q), ω_n = ω_d/√(1 − ζ²), σ = ζ ω_n.
        zeta = 1 / (2 * q)
        sigma = zeta * wd / math.sqrt(1 - zeta**2)
        x += a * np.exp(-sigma * t) * np.cos(wd * t + 0.4)
    return x


def test_decrement_relations():
    # δ = 2πζ/√(1−ζ²) (vibration textbooks; Rao, Mechanical Vibrations, 2.6.4): for
    # ζ = 0.05, δ = 0.314553 by hand.
    assert logarithmic_decrement(0.05) == pytest.approx(0.314553, abs=1e-6)
    assert damping_from_decrement(0.314553) == pytest.approx(0.05, abs=1e-6)
    with pytest.raises(InputError, match="damping_ratio"):
        logarithmic_decrement(1.0)


def test_decrement_of_successive_peaks_matches_the_identified_damping():
    # Independent route: ln(x_n/x_(n+1)) of successive maxima of a single damped mode,
    # found by scipy.signal.find_peaks, against the fitted ζ through δ(ζ).
    t = np.arange(6000) / FS
    x = _decay(t, ((1830.0, 120.0, 1.0),))
    peaks, _ = signal.find_peaks(x)
    delta = float(np.mean(np.log(x[peaks[:-1]] / x[peaks[1:]])))
    modes, _ = identify_modes(x, FS)
    # Sampled maxima sit up to half a sample from the true ones: the mean over 200 cycles
    # keeps that error near 1e-4 relative.
    assert logarithmic_decrement(modes[0].damping_ratio) == pytest.approx(delta, rel=2e-3)
    assert modes[0].q == pytest.approx(120.0, rel=1e-6)


def test_sum_of_modes_at_40_db_snr(rng):
    # Acceptance of issue 14: frequencies within 0.1 %, Q within 5 % at 40 dB SNR (RMS of
    # the decay over the analysed span against the noise RMS).
    t = np.arange(12000) / FS
    clean = _decay(t)
    noise_rms = np.sqrt(np.mean(clean**2)) / 100.0
    x = clean + noise_rms * rng.standard_normal(t.size)
    modes, resid = identify_modes(x, FS, noise_rms=noise_rms)
    assert len(modes) == 3
    got = sorted(modes, key=lambda m: m.frequency_hz)
    for m, (f, q, a) in zip(got, MODES, strict=True):
        assert m.frequency_hz == pytest.approx(f, rel=1e-3)
        assert m.q == pytest.approx(q, rel=0.05)
        assert m.amplitude == pytest.approx(a, rel=0.05)
        assert m.u_frequency_hz is not None and m.u_q is not None
        # The stated uncertainty is meaningful: the error lies within 4 u.
        assert abs(m.q - q) < 4 * m.u_q
    assert resid == pytest.approx(noise_rms, rel=0.1)


def test_matrix_pencil_needs_samples():
    with pytest.raises(InputError, match="at least 8 samples"):
        matrix_pencil(np.ones(4))


def _taps(rng, times, fs=FS, seconds=1.0, noise=1e-3):
    n = int(fs * seconds)
    t = np.arange(n) / fs
    x = noise * rng.standard_normal(n)
    for t0 in times:
        tau = np.clip(t - t0, 0, None)
        x += (t >= t0) * _decay(tau, MODES[:2]) * 0.5
    return x


def test_repeated_taps_are_averaged(rng):
    x = _taps(rng, [0.1, 0.35, 0.6, 0.85])
    r = ringdown(x, FS)[0]
    assert [round(e.start_s, 2) for e in r.events] == [0.1, 0.35, 0.6, 0.85]
    top = sorted(r.modes[:2], key=lambda m: m.frequency_hz)
    assert top[0].events == 4 and top[1].events == 4
    assert top[0].frequency_hz == pytest.approx(1830.0, rel=1e-3)
    assert top[1].q == pytest.approx(60.0, rel=0.05)
    assert top[0].q_std is not None and top[0].q_std < 0.05 * 120


def test_streaming_equals_whole_array(rng):
    x = _taps(rng, [0.1, 0.5])
    whole = ringdown(x, FS)[0]
    a = RingdownAnalyzer(FS, 1)
    for chunk in np.array_split(x, 13):
        a.update(chunk[:, None])
    parts = a.result()[0]
    assert [e.start_s for e in parts.events] == [e.start_s for e in whole.events]
    # The noise floor is learnt as blocks arrive, and it sets the pencil's model order
    # and the amplitude floor: blocks may move the results, but far inside their
    # standard uncertainty.
    for ev_p, ev_w in zip(parts.events, whole.events, strict=True):
        for m, n in zip(ev_p.modes, ev_w.modes, strict=True):
            assert abs(m.frequency_hz - n.frequency_hz) < 0.1 * n.u_frequency_hz
            assert abs(m.q - n.q) < 0.1 * n.u_q


def test_bundled_tap_test_capture():
    # recordings/tap-test.csv (piezo.demo.scenes): one tap at 20 ms on a disc with modes
    # at 3200 Hz (τ = 18 ms, Q = π·3200·0.018 = 181) and 8100 Hz (τ = 6 ms, Q = 153),
    # the reference channel at 3200 Hz (τ = 15 ms, Q = 151). Q = π f τ for light damping.
    rec = open_recording(RECORDINGS / "tap-test.csv")
    x = np.concatenate(list(rec.blocks()))
    disc, ref = ringdown(x, rec.sample_rate_hz)
    assert len(disc.events) == 1
    assert disc.events[0].start_s == pytest.approx(0.02, abs=1e-3)
    by_f = sorted(disc.modes, key=lambda m: m.frequency_hz)
    assert by_f[0].frequency_hz == pytest.approx(3200.0, rel=1e-3)
    assert by_f[0].q == pytest.approx(math.pi * 3200 * 0.018, rel=0.05)
    assert by_f[1].frequency_hz == pytest.approx(8100.0, rel=1e-3)
    assert by_f[1].q == pytest.approx(math.pi * 8100 * 0.006, rel=0.05)
    assert ref.modes[0].q == pytest.approx(math.pi * 3200 * 0.015, rel=0.05)
