"""``piezo spectrum --transient`` and the stationarity note of ``piezo spectrum``."""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf


@pytest.fixture
def burst(tmp_path, rng):
    # 10 s at 48 kHz, a 0.3 s 1 kHz burst of 0.5 FS peak at 0.5 s over a quiet floor.
    fs = 48000
    x = 1e-5 * rng.standard_normal(10 * fs)
    t = np.arange(int(0.3 * fs)) / fs
    x[fs // 2 : fs // 2 + t.size] += 0.5 * np.sin(2 * np.pi * 1000 * t)
    p = tmp_path / "burst.wav"
    sf.write(p, x, fs, subtype="FLOAT")
    return p


def test_transient_json_gives_the_exposure(cli, burst):
    r = cli("spectrum", burst, "--transient", "--sensitivity", "1 V/Pa", "--json")
    assert r.code == 0, r.err
    (ch,) = r.json()["channels"]
    # 0.3 s of 0.5/√2 Pa RMS: E = 0.0375 Pa²·s -> 10 lg(E/(20 µPa)²) = 79.72 dB.
    expected = 10 * math.log10(0.3 * 0.125 / (20e-6) ** 2)
    assert ch["exposure_level_db"] == pytest.approx(expected, abs=0.05)
    (ev,) = ch["events"]
    assert ev["exposure_level_db"] == pytest.approx(expected, abs=0.1)
    assert ev["rms"] == pytest.approx(0.5 / math.sqrt(2), rel=0.01)


def test_spectrum_notes_the_transient(cli, burst):
    r = cli("spectrum", burst)
    assert r.code == 0, r.err
    assert "--transient" in r.err


def test_each_channel_has_its_own_exposure_unit(cli, burst, tmp_path):
    # The same burst on two channels: a 1 V/Pa microphone and a 1 V/(m/s²) accelerometer.
    # Each exposure is re its own reference squared (ISO 1683: 20 µPa, 1 µm/s²).
    x, fs = sf.read(burst)
    two = tmp_path / "two.wav"
    sf.write(two, np.column_stack([x, x]), fs, subtype="FLOAT")
    r = cli("spectrum", two, "--transient", "--sensitivity", "0=1 V/Pa",
            "--sensitivity", "1=1 V/(m/s²)", "--json")  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] is None and doc["exposure_unit"] is None
    p, a = doc["channels"]
    assert (p["unit"], a["unit"]) == ("Pa", "m/s²")
    assert a["exposure_unit"] == "dB re (1 µm/s²)²·s" and a["esd_unit"] == "(m/s²)²·s/Hz"
    energy = 0.3 * 0.125  # 0.3 s of (0.5/√2)² per unit²
    assert p["exposure_level_db"] == pytest.approx(10 * math.log10(energy / 20e-6**2), abs=0.05)
    assert a["exposure_level_db"] == pytest.approx(10 * math.log10(energy / 1e-6**2), abs=0.05)
