"""Digital realisations: simulate a front-end on samples, equalize its roll-off.

The reference is the exact analog response of piezo.frontend.model, itself checked against an
independent nodal solution in test_frontend.py; the acceptance (0.05 dB from twice the
corner to 0.4·fs) is the issue's.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from piezo.errors import InputError
from piezo.frontend.filters import (
    Equalizer,
    FrontendFilter,
    equalize,
    equalizer_zpk,
    realise_frontend,
    simulate_frontend,
)
from piezo.frontend.model import (
    Cable,
    ChargeAmplifier,
    Frontend,
    Sensor,
    VoltageAmplifier,
    corner_frequency_hz,
    frequency_response,
    midband_sensitivity_v_per_pa,
)

FS = 48000.0

PLAIN = Frontend(
    Sensor(12e-12, 1e-9),
    ChargeAmplifier(feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9, clip_level_v=10.0),
)
DESIGNS = {
    "charge, no resonance": PLAIN,
    # A disc's bending mode well inside the band.
    "charge, resonance 5 kHz": Frontend(
        Sensor(216e-12, 18e-9, resonance_hz=5e3, q=8.0),
        ChargeAmplifier(feedback_capacitance_f=10e-9, feedback_resistance_ohm=1e9, gain=10.0),
        Cable(300e-12),
    ),
    # A mounted resonance above Nyquist: only its rising skirt is in band.
    "charge, resonance 30 kHz, slow op-amp": Frontend(
        Sensor(12e-12, 1e-9, resonance_hz=30e3, q=25.0),
        ChargeAmplifier(
            feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9, gain_bandwidth_hz=200e3
        ),
    ),
    "voltage, 354 Hz corner": Frontend(
        Sensor.from_voltage_sensitivity(10e-3, 100e-12, resonance_hz=12e3, q=4.0),
        VoltageAmplifier(input_resistance_ohm=1e6, input_capacitance_f=50e-12, gain=10.0),
        Cable(300e-12),
    ),
}


@pytest.mark.parametrize("name", list(DESIGNS))
def test_realisation_matches_the_analog_response(name):
    fe = DESIGNS[name]
    real = realise_frontend(fe, FS)
    fc = corner_frequency_hz(fe)
    # Evaluated on a grid of its own (not the one used in the design), 2·fc to 0.4·fs.
    f = np.geomspace(2 * fc, 0.4 * FS, 3001)
    err_db = 20 * np.log10(np.abs(real.response(f)) / np.abs(frequency_response(fe, f)))
    # The acceptance: 0.05 dB.
    assert np.max(np.abs(err_db)) < 0.05
    assert real.max_error_db < 0.05
    # Polarity is kept: the charge amplifier inverts, and at 10·fc (phase lead of the
    # high-pass ~6°, tiny delay effects) the digital output has the analog's sign.
    h_a = frequency_response(fe, 10 * fc)
    h_d = real.response(np.array([10 * fc]))[0]
    assert abs(np.degrees(np.angle(h_d / h_a))) < 5


def test_sine_through_the_filter_has_the_analog_gain_and_phase():
    fe = DESIGNS["voltage, 354 Hz corner"]
    t = np.arange(int(0.25 * FS)) / FS
    f0 = 1000.0
    x = np.sin(2 * np.pi * f0 * t)
    y = simulate_frontend(x, FS, frontend=fe)
    # Steady state after 0.2 s (the 354 Hz corner decays in ~0.5 ms, the resonance in
    # Q/(π·fr) ≈ 0.1 ms): fit a·sin + b·cos by least squares over the last 0.05 s.
    tail = t >= 0.2
    basis = np.column_stack([np.sin(2 * np.pi * f0 * t[tail]), np.cos(2 * np.pi * f0 * t[tail])])
    (a, b), *_ = np.linalg.lstsq(basis, y[tail], rcond=None)
    h = frequency_response(fe, f0)
    # Gain within the realisation's 0.05 dB; phase within 2° (the magnitude-fitted
    # minimum-phase realisation departs from the analog phase mostly near Nyquist; at
    # 1 kHz = 0.02·fs the departure measured is well under that).
    assert 20 * math.log10(math.hypot(a, b) / abs(h)) == pytest.approx(0.0, abs=0.05)
    assert math.degrees(math.atan2(b, a)) == pytest.approx(math.degrees(np.angle(h)), abs=2.0)


def test_charge_input_scales_by_the_sensitivity():
    fe = DESIGNS["charge, no resonance"]
    rng = np.random.default_rng(7)
    pa = rng.standard_normal(4800)
    by_pressure = simulate_frontend(pa, FS, frontend=fe, clip=False)
    by_charge = simulate_frontend(pa * 12e-12, FS, frontend=fe, input="charge", clip=False)
    assert_allclose(by_charge, by_pressure, rtol=1e-9, atol=1e-15)


def test_clipping_is_applied_and_counted():
    # 12 mV/Pa, clip at 10 V: a 1 kHz sine of 1000 Pa peak (12 V peak out) clips.
    t = np.arange(4800) / FS
    x = np.column_stack([1000 * np.sin(2 * np.pi * 1000 * t), 1 * np.sin(2 * np.pi * 1000 * t)])
    filt = FrontendFilter(FS, 2, frontend=PLAIN)
    y = filt.update(x)
    res = filt.result()
    assert np.max(np.abs(y[:, 0])) == pytest.approx(10.0)
    assert res.clipped_samples[0] > 0
    assert res.clipped_samples[1] == 0
    assert res.peak_v[1] == pytest.approx(0.012, rel=0.01)
    assert res.frames == 4800


def test_zero_and_one_frame_blocks_and_shape_checks():
    filt = FrontendFilter(FS, 2, frontend=PLAIN)
    assert filt.update(np.zeros((0, 2))).shape == (0, 2)
    assert filt.update(np.ones((1, 2))).shape == (1, 2)
    with pytest.raises(InputError, match=r"shape \(frames, 2\)"):
        filt.update(np.zeros((5, 3)))
    with pytest.raises(InputError, match="sample_rate_hz"):
        FrontendFilter(0.0, 1, frontend=PLAIN)
    with pytest.raises(InputError, match="'pressure' or 'charge'"):
        FrontendFilter(FS, 1, frontend=PLAIN, input="volts")


# --------------------------------------------------------------------------- equalizer


def test_equalizer_matches_its_analog_shelf():
    fe = PLAIN  # corner 0.159 Hz
    eq = Equalizer(FS, 1, frontend=fe, target_corner_hz=0.02)
    z, p, k = equalizer_zpk(fe, 0.02)
    f = np.geomspace(2 * 0.02, 0.4 * FS, 2001)
    s = 2j * np.pi * f
    analog = k * (s - z[0]) / (s - p[0])
    err_db = 20 * np.log10(np.abs(eq.realisation.response(f)) / np.abs(analog))
    assert np.max(np.abs(err_db)) < 0.05  # the acceptance
    # Shelf depth: 20 lg(fc/ft) for a first-order pole moved from fc to ft (exact).
    assert eq.boost_db == pytest.approx(20 * math.log10((1 / (2 * math.pi)) / 0.02), rel=1e-9)
    assert eq.boost_at_db(1e-6) == pytest.approx(eq.boost_db, abs=1e-3)
    assert eq.boost_at_db(1000.0) == pytest.approx(0.0, abs=1e-6)


def test_simulate_then_equalize_gives_the_target_high_pass():
    # Front-end high-pass s/(s+ωc) times the shelf (s+ωc)/(s+ωt) = s/(s+ωt): a
    # first-order high-pass at the target (textbook algebra), at the midband sensitivity.
    fe = DESIGNS["voltage, 354 Hz corner"]
    target = 20.0
    sim = realise_frontend(fe, FS)
    eq = Equalizer(FS, 1, frontend=fe, target_corner_hz=target)
    f = np.geomspace(2 * target, 2000.0, 500)
    cascade = sim.response(f) * eq.realisation.response(f)
    expected = frequency_response(fe, f) * (2j * np.pi * f + 2 * np.pi * corner_frequency_hz(fe))
    expected /= 2j * np.pi * f + 2 * np.pi * target
    # Two realisations each within 0.05 dB of their analog responses.
    assert_allclose(20 * np.log10(np.abs(cascade / expected)), 0.0, atol=0.1)
    # The shelf's zero cancels the front-end's pole exactly: at the target the analog
    # product is 3.01 dB below midband (the 12 kHz resonance adds (20/12e3)² ≈ 3e-6).
    z, p, k = equalizer_zpk(fe, target)
    s_t = 2j * np.pi * target
    at_target = abs(frequency_response(fe, target) * k * (s_t - z[0]) / (s_t - p[0]))
    assert at_target == pytest.approx(midband_sensitivity_v_per_pa(fe) / math.sqrt(2), rel=1e-5)


@pytest.mark.parametrize(
    ("target", "message"),
    [
        (0.0, "positive frequency"),
        (-1.0, "positive frequency"),
        (float("nan"), "positive frequency"),
        (0.2, "not below the front-end's corner"),
        (1e-4, r"boost low frequencies by 64\.0 dB \(limit 40 dB\)"),
    ],
)
def test_equalizer_refuses_unstable_or_absurd_targets(target, message):
    with pytest.raises(InputError, match=message):
        Equalizer(FS, 1, frontend=PLAIN, target_corner_hz=target)


def test_equalizer_boost_limit_is_adjustable_and_names_the_lowest_corner():
    with pytest.raises(InputError, match=r"at least 0\.01592 Hz"):
        Equalizer(FS, 1, frontend=PLAIN, target_corner_hz=0.01, max_boost_db=20.0)
    eq = Equalizer(FS, 1, frontend=PLAIN, target_corner_hz=1e-4, max_boost_db=70.0)
    assert eq.result().boost_db == pytest.approx(64.0, abs=0.05)


# --------------------------------------------------------------------------- streaming


def _split(x: np.ndarray, cuts: list[int]) -> list[np.ndarray]:
    points = sorted({min(c, len(x)) for c in cuts})
    return np.split(x, points)


SIGNAL = np.random.default_rng(11).standard_normal((3000, 2)) * np.array([300.0, 1.0])


@settings(max_examples=25, deadline=None)
@given(cuts=st.lists(st.integers(0, 3000), max_size=6))
def test_frontend_filter_blockwise_equals_whole(cuts):
    fe = DESIGNS["charge, resonance 5 kHz"]
    whole = FrontendFilter(FS, 2, frontend=fe)
    expected = whole.update(SIGNAL)
    parts = FrontendFilter(FS, 2, frontend=fe)
    got = np.concatenate([parts.update(b) for b in _split(SIGNAL, cuts)])
    # sosfilt with carried state is the same arithmetic whichever way it is cut; only
    # summation order differs (none here), so equality to 1e-12 relative.
    assert_allclose(got, expected, rtol=1e-12, atol=1e-18)
    assert parts.result() == whole.result()


@settings(max_examples=25, deadline=None)
@given(cuts=st.lists(st.integers(0, 3000), max_size=6))
def test_equalizer_blockwise_equals_whole(cuts):
    expected = equalize(SIGNAL, FS, frontend=PLAIN, target_corner_hz=0.05)
    parts = Equalizer(FS, 2, frontend=PLAIN, target_corner_hz=0.05)
    got = np.concatenate([parts.update(b) for b in _split(SIGNAL, cuts)])
    assert_allclose(got, expected, rtol=1e-12, atol=1e-15)
    assert parts.result().frames == 3000


def test_realise_zpk_refuses_unstable_poles():
    from piezo.frontend.filters import realise_zpk

    with pytest.raises(InputError, match="not in the left half-plane"):
        realise_zpk(np.array([0.0]), np.array([2.0 + 0j]), 1.0, FS, check_band_hz=(1.0, 100.0))
