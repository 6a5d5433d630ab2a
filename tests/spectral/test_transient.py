"""Transient view: ESD (Parseval), exposure levels, events, the stationarity check."""

from __future__ import annotations

import math

import numpy as np
import pytest

from piezo.errors import InputError
from piezo.spectral.transient import (
    EventDetector,
    StationarityCheck,
    TransientAnalyzer,
    transient_spectrum,
)
from piezo.spectral.welch import welch_psd

FS = 48000.0


@pytest.mark.parametrize("n", [1000, 48000, 50001])
def test_esd_integrates_to_the_energy(rng, n):
    # Parseval: ∫ESD df = ∫x² dt. Acceptance 0.5 % (issue 14); the construction is exact,
    # so the error is rounding (1e-12).
    x = rng.standard_normal((n, 2)) * [1.0, 0.1]
    x[:, 1] += 0.3  # a DC part must count too (no detrending)
    r = transient_spectrum(x, FS, segment_frames=1024)
    esd_energy = np.sum(r.esd, axis=0) * r.resolution_hz
    np.testing.assert_allclose(esd_energy, np.sum(x**2, axis=0) / FS, rtol=1e-9)
    np.testing.assert_allclose(r.energy, np.sum(x**2, axis=0) / FS, rtol=1e-12)


def _burst_capture(rng, seconds=10.0, burst_s=0.3, start_s=0.5):
    n = int(FS * seconds)
    x = 1e-4 * rng.standard_normal(n)
    i0, m = int(start_s * FS), int(burst_s * FS)
    t = np.arange(m) / FS
    x[i0 : i0 + m] += math.sqrt(2) * np.sin(2 * np.pi * 1000 * t)  # 1 Pa RMS
    return x


def test_burst_near_the_start(rng):
    # The case: Welch over 10 s reads the 0.3 s burst's RMS 10 lg(0.3/10) =
    # −15.2 dB low; its exposure 0.3 Pa²·s = 88.75 dB re (20 µPa)²·s is right.
    x = _burst_capture(rng)
    psd = welch_psd(x[:, None], FS, segment_frames=4096)
    welch_ms = float(psd.mean_square()[0])
    assert 10 * math.log10(welch_ms / 1.0) == pytest.approx(10 * math.log10(0.3 / 10), abs=0.1)
    r = transient_spectrum(x, FS)
    level = float(r.exposure_level_db(20e-6)[0])
    assert level == pytest.approx(10 * math.log10(0.3 / (20e-6) ** 2), abs=0.02)
    events = r.events[0]
    assert len(events) == 1
    ev = events[0]
    assert ev.start_s == pytest.approx(0.5, abs=1e-3)
    assert ev.duration_s == pytest.approx(0.3, abs=2e-3)
    # The event's own energy: 0.3 Pa²·s (window quantisation: 0.5 ms of 300 ms).
    assert ev.energy == pytest.approx(0.3, rel=0.01)
    # The 1 kHz third-octave band holds the tone: its exposure equals the total.
    k = int(np.argmin(abs(r.band_nominal_hz - 1000)))
    assert r.band_exposure_level_db(20e-6)[k, 0] == pytest.approx(level, abs=0.1)


def test_stationarity_note_for_the_burst_and_not_for_noise(rng):
    x = _burst_capture(rng)
    check = StationarityCheck(FS, 1, frames=x.size)
    check.update(x[:, None])
    res = check.result()
    assert not res.stationary[0]
    assert "--transient" in res.note()
    noise = rng.standard_normal((x.size, 1))
    check = StationarityCheck(FS, 1, frames=x.size)
    for chunk in np.array_split(noise, 7):
        check.update(chunk)
    res = check.result()
    assert res.stationary[0] and res.note() is None
    # White noise over 30000-sample parts: the spread is a fraction of a dB.
    assert res.spread_db[0] < 0.5


def test_streaming_equals_whole_array(rng):
    x = _burst_capture(rng, seconds=2.0)[:, None]
    whole = transient_spectrum(x, FS)
    a = TransientAnalyzer(FS, 1)
    for chunk in np.array_split(x, 9):
        a.update(chunk)
    parts = a.result()
    np.testing.assert_allclose(parts.esd, whole.esd, rtol=1e-9, atol=1e-30)
    assert [e.start_frame for e in parts.events[0]] == [e.start_frame for e in whole.events[0]]


def test_event_detector_options():
    with pytest.raises(InputError, match="end_db"):
        EventDetector(FS, threshold_db=6.0, end_db=6.0)
    with pytest.raises(InputError, match="sample_rate_hz"):
        EventDetector(0.0)
    with pytest.raises(InputError, match="segment_frames"):
        TransientAnalyzer(FS, 1, segment_frames=10)
