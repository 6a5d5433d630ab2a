"""Measurement chain and sensor profiles (piezo.chain.measurement)."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from piezo.chain.measurement import (
    REFERENCE_AIR_PA,
    REFERENCE_WATER_PA,
    CalibratedSource,
    Chain,
    ChainSettings,
    load_profile,
    resolve_chain,
)
from piezo.errors import InputError, SpecError
from piezo.io.reader import open_recording


def test_reference_pressures_iso_1683():
    # ISO 1683:2015: 20 µPa in gases, 1 µPa in liquids.
    assert REFERENCE_AIR_PA == 20e-6
    assert REFERENCE_WATER_PA == 1e-6


def test_scale_pcm_and_csv():
    chain = Chain(full_scale_v=2.0, gain=10.0, sensitivity_v_per_unit=0.01)
    # A full-scale PCM sample is 2 V at the ADC, 0.2 V at the sensor, 20 Pa.
    assert chain.scale(is_pcm=True) == pytest.approx(20.0)
    # CSV values are volts at the ADC: 1 V there is 0.1 V at the sensor, 10 Pa.
    assert chain.scale(is_pcm=False) == pytest.approx(10.0)
    assert chain.unit == "Pa"
    assert chain.level_unit == "dB re 20 µPa"


def test_uncalibrated_chain_is_in_volts():
    chain = Chain(full_scale_v=2.0, gain=10.0)
    assert chain.unit == "V"
    assert chain.reference == 1.0
    assert chain.level_unit == "dB re 1 V"
    assert chain.scale(is_pcm=True) == pytest.approx(0.2)


@pytest.mark.parametrize(
    "kwargs", [{"sensitivity_v_per_unit": 0.0}, {"gain": -1.0}, {"full_scale_v": float("nan")}]
)
def test_chain_rejects_non_positive_values(kwargs):
    with pytest.raises(InputError, match="must be positive"):
        Chain(**kwargs)


def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_profile_with_charge_sensitivity(tmp_path):
    prof = load_profile(
        write(
            tmp_path / "p.toml",
            '[sensor]\nname = "disc"\ncharge_sensitivity = "12 pC/Pa"\ncapacitance = "1.2 nF"\n'
            'calibration_date = 2026-11-20\n[chain]\ncharge_gain = "1 mV/pC"\ngain = "20 dB"\n',
        )
    )
    # 12 pC/Pa x 1 mV/pC = 12 mV/Pa (V = Q/Cf, charge amplifier relation).
    assert prof.sensitivity_v_per_pa == pytest.approx(12e-3)
    assert prof.capacitance_f == pytest.approx(1.2e-9)
    assert prof.gain == pytest.approx(10.0)
    assert prof.calibration_date == "2026-11-20"


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("[sensor\n", "TOML syntax error"),
        ("[sense]\nx = 1\n", r"unknown section \[sense\]"),
        ('[sensor]\nsensitivty = "1 mV/Pa"\n', "unknown key sensor.sensitivty"),
        ('[sensor]\nsensitivity = "12 mV"\n', "sensor.sensitivity"),
        ('[chain]\ngain = "loud"\n', "chain.gain"),
        ('[sensor]\ncapacitance = "1 nH"\n', "sensor.capacitance: unknown unit"),
    ],
)
def test_bad_profiles_name_the_key(tmp_path, text, message):
    path = write(tmp_path / "bad.toml", text)
    with pytest.raises(SpecError, match=message) as info:
        load_profile(path)
    assert str(path) in str(info.value)


def test_precedence_sidecar_profile_option(tmp_path):
    rec = tmp_path / "r.wav"
    sf.write(str(rec), np.zeros((10, 1)) + 0.5, 8000)
    write(tmp_path / "r.toml", '[sensor]\nsensitivity = "10 mV/Pa"\n[chain]\ngain = "20 dB"\n')
    prof = write(tmp_path / "p.toml", '[chain]\nfull_scale = "2 V"\ngain = "6 dB"\n')
    chain, prov = resolve_chain(rec, ChainSettings())
    assert chain.sensitivity_v_per_pa == pytest.approx(0.01)
    assert chain.gain == pytest.approx(10.0)
    assert prov.gain == str(tmp_path / "r.toml")
    chain, prov = resolve_chain(rec, ChainSettings(profile=prof))
    assert chain.gain == pytest.approx(10 ** (6 / 20))  # profile overrides the sidecar
    assert chain.full_scale_v == 2.0
    assert chain.sensitivity_v_per_pa == pytest.approx(0.01)  # sidecar value kept
    chain, prov = resolve_chain(rec, ChainSettings(profile=prof, gain="0 dB"))
    assert chain.gain == 1.0  # options override everything
    assert prov.gain == "option"
    chain, _ = resolve_chain(rec, ChainSettings(), use_sidecar=False)
    assert chain.sensitivity_v_per_pa is None


def test_calibrated_source_blocks(tmp_path):
    rec_path = tmp_path / "s.wav"
    x = np.full((100, 2), 0.25)
    sf.write(str(rec_path), x, 8000, subtype="FLOAT")
    src = CalibratedSource.of(
        open_recording(rec_path),
        Chain(full_scale_v=4.0, gain=2.0, sensitivity_v_per_unit=0.05),
        channels=[1],
    )
    got = np.concatenate(list(src.blocks(30)))
    # 0.25 FS x 4 V / 2 / 0.05 V/Pa = 10 Pa
    np.testing.assert_allclose(got, 10.0, rtol=1e-7)
    assert got.shape == (100, 1)
    assert src.unit == "Pa"
