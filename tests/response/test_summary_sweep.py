"""sweep_response_of: the sweep's level at the sensor in the channel's quantity (issue #13)."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import scipy.signal
import soundfile as sf

import piezo
from piezo.batch.spec import CAPTURE_QUANTITIES, Measurand
from piezo.chain.quantity import QUANTITIES
from piezo.errors import InputError
from piezo.response.stimulus import sweep_signal, sweep_spec
from piezo.response.summary import sweep_response_of

FS = 48000.0
#: Standard acceleration of gravity, exact (ISO 80000-3:2019; 3rd CGPM 1901).
G = 9.80665


@pytest.fixture
def accelerometer(tmp_path):
    """A 10 mV/g accelerometer behind a 1st-order 200 Hz high-pass (scipy.signal.butter),
    on a shaker driven by the sweep to 1 g RMS; the capture in volts (FLOAT)."""
    spec = sweep_spec(20.0, 20000.0, 2.0, FS, silence_before_s=0.1, silence_after_s=0.5)
    accel = math.sqrt(2.0) * G / spec.amplitude * sweep_signal(spec)
    sos = scipy.signal.butter(1, 200.0, "highpass", fs=FS, output="sos")
    path = tmp_path / "accel.wav"
    sf.write(path, 10e-3 / G * scipy.signal.sosfilt(sos, accel), int(FS), subtype="FLOAT")
    _, h = scipy.signal.sosfreqz(sos, worN=[1000.0], fs=FS)
    return path, spec, abs(h[0])


def test_accelerometer_sensitivity_at_1khz(accelerometer):
    path, spec, gain_1k = accelerometer
    a = sweep_response_of(piezo.open(path), spec, level=G, quantity="acceleration")
    assert a.table.magnitude_unit == "dB re 1 V/(m/s²)" == a.fit.magnitude_unit
    assert a.acoustic_level_pa is None and a.fit.sensitivity_v_per_pa is None
    # |H(1 kHz)| of the 200 Hz first-order high-pass is 0.98058 (scipy): the response
    # matters here. Tolerance 1e-4 (0.0009 dB): noise-free float32 capture, 1 kHz
    # 5.6 octaves inside the sweep's edges; a scale error (√2, g, A) would be ≥ 2 %.
    assert a.sensitivity is not None
    assert a.sensitivity.value == pytest.approx(10e-3 / G * gain_1k, rel=1e-4)
    # The trade form, 4 significant digits: mV/(m/s²), then mV/g; each read back within
    # half a unit in its last digit (plus the 1e-4 above).
    text = a.to_dict()["sensitivity"]
    form = re.fullmatch(r"([\d.]+) mV/\(m/s²\) \(([\d.]+) mV/g\)", text)
    assert form is not None, text
    assert float(form.group(1)) == pytest.approx(10 * gain_1k / G, abs=0.0006)
    assert float(form.group(2)) == pytest.approx(10 * gain_1k, abs=0.0051)


def test_level_of_another_quantity_than_the_chains_is_refused(accelerometer):
    path, spec, _ = accelerometer
    with pytest.raises(InputError, match="force level, but channel 0 measures acceleration"):
        sweep_response_of(piezo.open(path, quantity="acceleration"), spec, level=5.0,
                          quantity="force", level_what="--level")  # fmt: skip
    # A sidecar's level is held to the chain too, and named as the sidecar's.
    shaker = sweep_spec(20.0, 20000.0, 2.0, FS, silence_before_s=0.1, silence_after_s=0.5,
                        sensor_level=G, sensor_quantity="acceleration")  # fmt: skip
    with pytest.raises(InputError, match=r"the level in s\.toml: .* measures pressure"):
        sweep_response_of(piezo.open(path, quantity="pressure"), shaker, stimulus="s.toml")
    # Without a stated quantity the sidecar's names it.
    a = sweep_response_of(piezo.open(path), shaker)
    assert a.quantity == "acceleration" and a.sensor_level == G


@pytest.mark.parametrize("name", CAPTURE_QUANTITIES)
def test_sensitivity_unit_is_the_batch_runners(name):
    # One naming: the batch line's sensitivity metric unit is the quantity's label.
    assert QUANTITIES[name].sensitivity_label == Measurand(name).sensitivity_unit


def test_relative_response_without_a_level(accelerometer):
    path, spec, gain_1k = accelerometer
    a = sweep_response_of(piezo.open(path, quantity="acceleration"), spec)
    assert a.quantity is None and a.sensitivity is None
    assert a.table.magnitude_unit == "dB re 1 V/FS"
    # The capture is 10 mV/g · √2 g / A per FS of the sweep: 20·lg(√2·0.01·|H| / A);
    # 0.001 dB is the 1e-4 of the calibrated test.
    expected = 20 * np.log10(math.sqrt(2) * 10e-3 * gain_1k / spec.amplitude)
    assert a.fit.sensitivity_db == pytest.approx(expected, abs=1e-3)


def test_a_hydrophones_sensitivity_reads_in_db_re_1_v_per_micropascal(tmp_path):
    # A flat -196 dB re 1 V/µPa hydrophone (0.1585 mV/Pa) swept to 1 Pa RMS in a tank;
    # with levels re 1 µPa (ISO 1683, water) its trade form is the level, as data sheets
    # give it (IEC 60565 expresses hydrophone sensitivity in dB re 1 V/µPa).
    spec = sweep_spec(20.0, 20000.0, 1.0, FS, silence_before_s=0.1, silence_after_s=0.5)
    volts_per_pa = 10 ** (-196 / 20) * 1e6
    pressure = math.sqrt(2.0) / spec.amplitude * sweep_signal(spec)  # 1 Pa RMS
    path = tmp_path / "tank.wav"
    sf.write(path, volts_per_pa * pressure, int(FS), subtype="FLOAT")
    doc = sweep_response_of(piezo.open(path, reference="1 uPa"), spec, level=1.0).to_dict()
    assert doc["sensitivity"] == "-196.00 dB re 1 V/µPa"
    air = sweep_response_of(piezo.open(path), spec, level=1.0).to_dict()
    assert air["sensitivity"] == "0.1585 mV/Pa"
