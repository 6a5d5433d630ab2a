"""The response demo (valve-rig contact pickups): deterministic, and it tells the truth."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from piezo.demo.response import (
    PICKUPS,
    response_demo,
    response_demo_files,
    response_demo_texts,
)
from piezo.response.fit import fit_response, parse_response_csv
from piezo.response.measure import analyze_sweep, response_h1
from piezo.response.stimulus import SweepSpec, stimulus_from_toml


@pytest.fixture(scope="module")
def demo():
    return response_demo()


def test_deterministic(demo):
    again = response_demo()
    for a, b in zip(demo.captures, again.captures, strict=True):
        assert np.array_equal(a.samples, b.samples)
    assert np.array_equal(demo.two_channel, again.two_channel)


def test_story_values():
    nominal = PICKUPS[0]
    # Voltage mode: fc = 1/(2π R_in (C_s + C_c + C_in)) (circuit theory):
    # 1 MΩ and 2.06 nF give 77.26 Hz; the divider C_s/C_total = 1.8/2.06.
    assert nominal.corner_hz == pytest.approx(1 / (2 * math.pi * 1e6 * 2.06e-9))
    assert nominal.sensitivity_v_per_pa == pytest.approx(6e-3 * 1.8 / 2.06)
    assert PICKUPS[1].corner_hz == pytest.approx(nominal.corner_hz / 0.33)


@pytest.mark.parametrize("index", [0, 1, 2])
def test_analysis_recovers_each_pickup(demo, index):
    cap = demo.captures[index]
    p = cap.pickup
    volts = cap.samples * demo.full_scale_v / 10 ** (demo.gain_db / 20)
    r = analyze_sweep(volts, demo.sweep, demo.sample_rate_hz, unit="V")
    assert r.magnitude_unit == "dB re 1 V/Pa"
    table = r.to_table()
    fit = fit_response(table.frequency_hz, table.magnitude_db)
    # Sensitivity at 1 kHz: the analog model, raised 0.026 dB by the driver's cubic term
    # (x³ adds 3/4 of its coefficient to the fundamental: 1 + 0.75·0.004 = 1.003,
    # +0.026 dB). 0.01 dB covers ADC noise at −100 dBFS.
    expected = p.magnitude_db(np.array([1000.0]))[0] + 20 * math.log10(1.003)
    assert fit.sensitivity_db == pytest.approx(expected, abs=0.01)
    assert fit.highpass is not None and fit.highpass.order == 1
    assert fit.highpass.corner_hz == pytest.approx(p.corner_hz, rel=0.005)
    assert fit.resonance is not None
    assert fit.resonance.frequency_hz == pytest.approx(p.resonance_hz, rel=0.005)
    assert fit.resonance.q == pytest.approx(p.resonance_q, rel=0.02)
    # Driver distortion 0.3 % H2 and 0.1 % H3 → THD √(0.3² + 0.1²) = 0.316 % (reference
    # values' THD formula) where the pickup is nearly flat: at 2 and 3 kHz its response
    # is 0.14 and 0.37 dB above that at 1 kHz (resonance tail), under 5 % on THD.
    assert r.thd_percent_at([1000.0])[1000.0] == pytest.approx(math.hypot(0.3, 0.1), rel=0.05)
    # Issue 12 defect 1: the latency is the simulated 277 samples (it read 278: the
    # pickup's resonance goes on rolling off beyond the sweep's band), and with it
    # removed the phase is the pickup's own analog phase, S·s/(s + ω_c) · ω_r²/(s² +
    # s·ω_r/Q + ω_r²) evaluated by scipy.signal.freqs, within 2° up to 10 kHz (the
    # issue's tolerance; one sample of latency is 75° at 10 kHz). Measured: 0.11°.
    assert r.latency_frames == 277
    wc, wr = 2 * math.pi * p.corner_hz, 2 * math.pi * p.resonance_hz
    b = np.polymul([1.0, 0.0], [wr * wr])
    a = np.polymul([1.0, wc], [1.0, wr / p.resonance_q, wr * wr])
    f = r.frequency_hz
    sel = (f >= 30.0) & (f <= 10000.0)
    _, model = scipy.signal.freqs(b, a, 2 * math.pi * f[sel])
    phase_error_deg = np.degrees(np.angle(r.response[sel] / model))
    assert np.max(np.abs(phase_error_deg)) < 2.0


def test_golden_and_two_channel(demo):
    nominal = demo.captures[0].pickup
    np.testing.assert_allclose(
        demo.golden.magnitude_db, nominal.magnitude_db(demo.golden.frequency_hz)
    )
    ref, dev = demo.two_channel[:, 0], demo.two_channel[:, 1]
    h1 = response_h1(ref, dev, demo.sample_rate_hz)
    table = h1.to_table()
    keep = table.extra["coherence"] >= 0.99
    fit = fit_response(table.frequency_hz[keep], table.magnitude_db[keep])
    # H1 with 5.9 Hz Welch bins is biased near the corner (1.0 % measured); 3 %.
    assert fit.highpass.corner_hz == pytest.approx(nominal.corner_hz, rel=0.03)


def test_files_and_texts(demo):
    files = response_demo_files(demo)
    names = [f.name for f in files]
    assert names[0] == "valve-pickup-sweep.flac"
    assert len(names) == len(set(names)) == 5
    for f in files:
        assert f.samples.ndim == 2 and np.max(np.abs(f.samples)) < 1.0
    texts = response_demo_texts(demo)
    spec = stimulus_from_toml(texts["valve-pickup-sweep.stimulus.toml"])
    assert isinstance(spec, SweepSpec) and spec == demo.sweep
    golden = parse_response_csv(texts["valve-pickup-golden.csv"])
    assert golden.magnitude_unit == "dB re 1 V/Pa"
    np.testing.assert_allclose(golden.magnitude_db, demo.golden.magnitude_db, atol=1e-4)
