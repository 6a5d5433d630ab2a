"""Sensitivity from a calibrator capture (piezo.tone.calibrator)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from piezo.errors import InputError
from piezo.tone.calibrator import (
    CalibrationResult,
    ToneCalibrator,
    calibrate_tone,
    calibration_budget,
    calibrator_pressure_pa,
)

FS = 48000


def capture(
    seconds, *, level_db=94.0, sens_v_per_pa=0.0125, f0=1000.0, noise_v=0.0, rng=None, harmonic=0.0
):
    t = np.arange(int(seconds * FS)) / FS
    p_rms = calibrator_pressure_pa(level_db)
    x = p_rms * np.sqrt(2) * (np.sin(2 * np.pi * f0 * t) + harmonic * np.sin(4 * np.pi * f0 * t))
    v = sens_v_per_pa * x
    if noise_v:
        v = v + noise_v * rng.standard_normal(t.size)
    return v


def test_calibrator_pressures_iso_1683():
    # 94 dB re 20 µPa = 1.00237 Pa; 114 dB = 10.0237 Pa (computed from ISO 1683 p0).
    assert calibrator_pressure_pa(94.0) == pytest.approx(1.00237, abs=5e-6)
    assert calibrator_pressure_pa(114.0) == pytest.approx(10.0237, abs=5e-5)
    # and 1 Pa RMS is 93.979 dB
    assert 20 * np.log10(1.0 / 20e-6) == pytest.approx(93.979, abs=5e-4)


@pytest.mark.parametrize("level_db", [94.0, 114.0])
@pytest.mark.parametrize("f0", [1000.0, 1006.0, 994.0])  # ±0.7 %: IEC 60942 class 1 tolerance
def test_sensitivity_recovered(level_db, f0, rng):
    v = capture(3.0, level_db=level_db, f0=f0, noise_v=2e-5, rng=rng)
    r = calibrate_tone(v, FS, level_db=level_db)
    # The band-pass gain at the found tone is divided out; what remains is noise in the
    # 1/3-octave band (~ -58 dB re tone here, i.e. 0.0001 %) and the frequency estimate's
    # effect on that gain correction: 0.01 % is well above both.
    assert r.sensitivity_v_per_pa == pytest.approx(0.0125, rel=1e-4)
    assert r.tone_hz == pytest.approx(f0, rel=1e-5)
    assert r.stable


def test_residual_reads_a_known_harmonic():
    # A 1 % second harmonic and nothing else: residual = 20 lg 0.01 = -40 dB re the tone.
    v = capture(2.0, harmonic=0.01)
    r = calibrate_tone(v, FS)
    assert r.residual_db == pytest.approx(-40.0, abs=0.05)


def test_streaming_equals_whole():
    v = capture(2.0)
    whole = calibrate_tone(v, FS)
    cal = ToneCalibrator(FS)
    for i in range(0, v.size, 4801):
        cal.update(v[i : i + 4801])
    part = cal.result()
    assert part.sensitivity_v_per_pa == pytest.approx(whole.sensitivity_v_per_pa, rel=1e-9)


@given(split=st.integers(1, 20000))
@settings(max_examples=10, deadline=None)
def test_streaming_any_block_size_property(split):
    v = capture(1.5)
    whole = calibrate_tone(v, FS)
    cal = ToneCalibrator(FS)
    for i in range(0, v.size, split):
        cal.update(v[i : i + split])
    assert cal.result().sensitivity_v_per_pa == pytest.approx(whole.sensitivity_v_per_pa, rel=1e-9)


def test_unstable_tone_is_flagged():
    v = capture(3.0)
    v[len(v) // 2 :] *= 10 ** (1.0 / 20)  # the calibrator slipped: +1 dB half way
    r = calibrate_tone(v, FS)
    assert not r.stable
    assert r.level_spread_db > 0.9


def test_wrong_frequency_is_refused():
    v = capture(2.0, f0=250.0)
    with pytest.raises(InputError, match="not near the expected 1000 Hz"):
        calibrate_tone(v, FS)
    r = calibrate_tone(v, FS, expected_hz=250.0)
    assert r.sensitivity_v_per_pa == pytest.approx(0.0125, rel=1e-4)


def test_too_short():
    with pytest.raises(InputError, match="too short"):
        calibrate_tone(capture(0.5), FS)


def test_250_hz_calibrator_seated_during_the_first_second_is_measured():
    # Issue 12 §3.9: a 250 Hz calibrator, expected_hz=250, refused with "give the
    # calibrator frequency" because the first second held a louder disturbance: seating
    # the calibrator on a piezo element squeezes it (here a 3 Hz swing of 10× the tone's
    # amplitude, decaying over 1 s). Infrasound below 20 Hz is no calibrator tone (IEC
    # 60942:2017 calibrators work at 250 Hz or 1 kHz, multi-frequency ones from 31.5 Hz);
    # the band-pass removes it and the tone is measured.
    v = capture(3.0, f0=250.0)
    t = np.arange(v.size) / FS
    swing = 10 * np.max(np.abs(v)) * np.exp(-t / 1.0) * np.sin(2 * np.pi * 3.0 * t)
    r = calibrate_tone(v + swing, FS, expected_hz=250.0)
    # The swing adds to the band RMS only through the band-pass's stop band (order 3,
    # 1/3 octave at 250 Hz: below 1e-6 in power at 3 Hz), after the 0.25 s settling.
    assert r.sensitivity_v_per_pa == pytest.approx(0.0125, rel=1e-3)
    assert r.tone_hz == pytest.approx(250.0, rel=1e-4)


def test_refusal_names_the_argument_not_an_option():
    # A core message names the argument (expected_hz), never a CLI option.
    with pytest.raises(InputError, match="expected_hz") as info:
        calibrate_tone(capture(2.0, f0=250.0), FS)
    assert "--" not in str(info.value)


# --- the uncertainty budget (JCGM 100:2008) --------------------------------------------


def _calibrator_capture(rng, *, level_error_db, noise_rel, fs=8000.0, seconds=1.75):
    n = int(fs * seconds)
    t = np.arange(n) / fs
    p_rms = 20e-6 * 10 ** ((94.0 + level_error_db) / 20)  # the calibrator's actual level
    tone = p_rms * np.sqrt(2) * np.sin(2 * np.pi * 1000.3 * t + rng.uniform(0, 2 * np.pi))
    sensitivity_v_per_pa = 8.5e-3
    x = sensitivity_v_per_pa * (tone + noise_rel * p_rms * rng.standard_normal(n))
    return x, sensitivity_v_per_pa


def test_budget_components_follow_the_gum_rules():
    r = CalibrationResult(8.5e-3, 1000.0, 8.5e-3, -40.0, 0.02, 0.0, 9, 94.0, 2e-5, True, 0.006)
    b = calibration_budget(r)
    level, repeat, noise = b.components
    # GUM 4.3.7: rectangular half-width a gives a/√3; IEC 60942:2017 class 1: a = 0.25 dB.
    assert level.standard_uncertainty == pytest.approx(0.25 / math.sqrt(3))
    # GUM 4.2.3: the mean of n repeats has s/√n with n − 1 degrees of freedom.
    assert repeat.standard_uncertainty == pytest.approx(0.006 / 3)
    assert repeat.degrees_of_freedom == 8
    # In-band noise at most the whole residual: 10·lg(1 + 10^(−40/10)) dB of power.
    assert noise.standard_uncertainty == pytest.approx(10 * math.log10(1 + 1e-4) / math.sqrt(3))
    certificate = calibration_budget(r, calibrator_expanded_db=0.12)
    assert certificate.components[0].standard_uncertainty == pytest.approx(0.06)  # GUM 4.3.6
    with pytest.raises(ValueError, match="not negative"):
        calibration_budget(r, calibrator_tolerance_db=-0.1)


def test_expanded_uncertainty_covers_the_truth_at_about_95_percent(rng):
    # A calibrator whose actual level departs from its certificate value by a normal error
    # with the certificate's U (k = 2): the sensitivity's U must cover the true
    # sensitivity in about 95.45 % of captures (JCGM 100:2008, 6.3.3). With 200 captures
    # the count has a binomial sd of 2.9; 180 is 3.7 sd below the expected 191.
    u_cert = 0.10
    trials, hits = 200, 0
    for _ in range(trials):
        x, true = _calibrator_capture(
            rng, level_error_db=rng.normal(0, u_cert / 2), noise_rel=0.01
        )
        r = calibrate_tone(x, 8000.0, level_db=94.0)
        b = calibration_budget(r, calibrator_expanded_db=u_cert)
        hits += abs(20 * math.log10(r.sensitivity_v_per_pa / true)) <= b.expanded_uncertainty
    assert 180 <= hits <= 200


# --- vibration calibrators ------------------------------------------------------------------

G = 9.80665  # standard acceleration of gravity, exact (3rd CGPM 1901; ISO 80000-3:2019)


@pytest.mark.parametrize("f0", [159.2, 1000 / (2 * math.pi)])  # nominal, and ω = 1000 rad/s
def test_vibration_calibrator_gives_the_accelerometer_sensitivity(f0):
    # 10 m/s² RMS (a hand-held vibration calibrator, common practice) through a 10 mV/g
    # accelerometer: 10 · 0.010 / 9.80665 = 10.197 mV RMS at the sensor.
    t = np.arange(3 * FS) / FS
    volts = 10.0 * 0.010 / G * np.sqrt(2) * np.sin(2 * np.pi * f0 * t)
    # 140 dB re 1 µm/s² (ISO 1683:2015) is 10 m/s².
    r = calibrate_tone(volts, FS, expected_hz=159.2, level_db=140.0, quantity="acceleration")
    assert r.calibrator_rms == pytest.approx(10.0, rel=1e-12)
    # Tolerance from the estimator: the mean square of a sine over T seconds that hold no
    # whole number of cycles departs from 1/2 by at most 1/(ωT) relative, so the RMS by
    # 1/(2ωT); T is what the segments measured (settling excluded). Noise-free float
    # volts add nothing else (the band-pass gain at the tone is divided out).
    measured_s = r.segments * 0.5
    tol = 1 / (2 * 2 * np.pi * f0 * measured_s)
    assert r.sensitivity_v_per_unit * G * 1e3 == pytest.approx(10.0, rel=tol)  # mV/g
    assert r.tone_hz == pytest.approx(f0, rel=1e-5)
    assert r.quantity == "acceleration" and r.sensitivity_v_per_pa is None
    # The trade forms of an accelerometer: per m/s², and per g beside it.
    assert r.sensitivity_text.startswith("1.020 mV/(m/s²) (") and "mV/g)" in r.sensitivity_text


def test_voltage_and_charge_channels_have_no_sensitivity_to_calibrate():
    for quantity in ("voltage", "charge"):
        with pytest.raises(InputError, match=f"measures {quantity} has no sensitivity"):
            ToneCalibrator(FS, quantity=quantity)
