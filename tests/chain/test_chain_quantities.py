"""Quantities and per-channel chains through piezo.open and the command line."""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf

import piezo
from piezo.chain.measurement import ChainSettings, load_profile, resolve_chain
from piezo.errors import InputError, SpecError

# Standard acceleration of gravity, exact (3rd CGPM 1901; ISO 80000-3:2019).
G = 9.80665


def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def sine_wav(tmp_path):
    """Two channels, 1 kHz sines of 0.5 FS and 0.25 FS, 2 s at 48 kHz, float WAV."""
    t = np.arange(96000) / 48000
    x = np.stack([0.5 * np.sin(2 * np.pi * 1000 * t), 0.25 * np.sin(2 * np.pi * 1000 * t)], 1)
    path = tmp_path / "take.wav"
    sf.write(path, x, 48000, subtype="FLOAT")
    return path


@pytest.mark.parametrize(
    ("text", "quantity", "unit", "reference", "label"),
    [
        # References: ISO 1683:2015, Table 1; 20 µPa in gases.
        ("12 mV/Pa", "pressure", "Pa", 20e-6, "dB re 20 µPa"),
        ("10 mV/g", "acceleration", "m/s²", 1e-6, "dB re 1 µm/s²"),
        ("100 mV/(mm/s)", "velocity", "m/s", 1e-9, "dB re 1 nm/s"),
        ("8 mV/µm", "displacement", "m", 1e-12, "dB re 1 pm"),
        ("2.2 mV/N", "force", "N", 1e-6, "dB re 1 µN"),
    ],
)
def test_the_sensitivity_unit_names_the_quantity(text, quantity, unit, reference, label):
    chain, prov = resolve_chain(None, ChainSettings(sensitivity=text))
    assert (chain.quantity, chain.unit, chain.reference, chain.level_unit) == (
        quantity,
        unit,
        reference,
        label,
    )
    assert prov.quantity == ("sensitivity unit")


@pytest.mark.parametrize(
    ("text", "volts_per_unit"),
    [
        ("10 mV/g", 10e-3 / G),  # g exact
        ("1.02 mV/(m/s²)", 1.02e-3),
        ("-196 dB re 1 V/µPa", 10 ** (-196 / 20) * 1e6),  # per µPa -> per Pa
        ("-38 dB re 1 V/Pa", 10 ** (-38 / 20)),
        ("2 mV/N", 2e-3),
    ],
)
def test_trade_forms_in_volts_per_si_unit(text, volts_per_unit):
    chain, _ = resolve_chain(None, ChainSettings(sensitivity=text))
    assert chain.sensitivity_v_per_unit == pytest.approx(volts_per_unit, rel=1e-12)


def test_charge_sensitivities_take_the_charge_gain():
    # 4.9 pC/g through 1 mV/pC is 4.9 mV/g: V = Q / Cf (charge amplifier relation).
    chain, _ = resolve_chain(None, ChainSettings(sensitivity="4.9 pC/g", charge_gain="1 mV/pC"))
    assert chain.quantity == "acceleration"
    assert chain.sensitivity_v_per_unit == pytest.approx(4.9e-3 / G, rel=1e-12)
    with pytest.raises(InputError, match="charge_gain"):
        resolve_chain(None, ChainSettings(sensitivity="4 pC/N"))


def test_a_charge_channel_is_in_coulombs():
    chain, _ = resolve_chain(None, ChainSettings(quantity="charge", charge_gain="1 mV/pC"))
    # 1 V at the sensor through 1 mV/pC is 1000 pC.
    assert chain.unit == "C"
    assert chain.scale(is_pcm=False) == pytest.approx(1e-9)
    assert chain.level_unit == "dB re 1 pC"


def test_the_quantity_and_the_sensitivity_must_agree(tmp_path):
    prof = write(
        tmp_path / "p.toml", '[sensor]\nquantity = "acceleration"\nsensitivity = "12 mV/Pa"\n'
    )
    with pytest.raises(SpecError, match=r"sensor\.sensitivity: '12 mV/Pa' is a pressure") as info:
        load_profile(prof)
    assert str(prof) in str(info.value)
    with pytest.raises(InputError, match="pressure sensitivity, but the channel measures force"):
        resolve_chain(None, ChainSettings(sensitivity="12 mV/Pa", quantity="force"))
    # A numeric sensitivity is in V per SI unit of the quantity given.
    chain, _ = resolve_chain(None, ChainSettings(sensitivity=0.004, quantity="force"))
    assert chain.unit == "N"
    with pytest.raises(SpecError, match="unknown quantity 'speed'"):
        load_profile(write(tmp_path / "q.toml", '[sensor]\nquantity = "speed"\n'))
    with pytest.raises(InputError, match="takes no sensitivity"):
        resolve_chain(None, ChainSettings(sensitivity=0.01, quantity="voltage"))


def test_a_reference_pressure_is_refused_for_other_quantities():
    with pytest.raises(InputError, match=r"levels of acceleration are in dB re 1 µm/s²"):
        resolve_chain(None, ChainSettings(sensitivity="10 mV/g", reference="1 uPa"))


def test_levels_of_an_accelerometer(cli, sine_wav):
    r = cli("levels", sine_wav, "--sensitivity", "10 mV/g", "--channel", "0", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] == "m/s²" and doc["level_unit"] == "dB re 1 µm/s²"
    ch = doc["channels"][0]
    assert ch["quantity"] == "acceleration"
    # 0.5 V peak over 10 mV/g is 50 g peak: RMS 50 g / √2, re 1 µm/s² (first principles).
    expected = 20 * math.log10(50 * G / math.sqrt(2) / 1e-6)
    assert ch["LZeq"] == pytest.approx(expected, abs=0.01)  # Z weighting flat at 1 kHz
    assert ch["LAeq"] is None and ch["LCpeak"] is None
    assert any("A and C weightings apply to sound pressure only" in n for n in ch["notes"])
    asked = cli("levels", sine_wav, "--sensitivity", "10 mV/g", "--weight-any-quantity", "--json")
    # A(1 kHz) = 0 dB by definition (IEC 61672-1:2013, Table 3), within its 0.1 dB rounding.
    assert asked.json()["channels"][0]["LAeq"] == pytest.approx(expected, abs=0.1)


def test_bands_refuse_a_weighting_for_acceleration(cli, sine_wav):
    r = cli("bands", sine_wav, "--sensitivity", "10 mV/g", "--weighting", "A", "--json")
    assert r.code == 2
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and "applies to sound pressure only" in lines[0]
    r = cli("bands", sine_wav, "--quantity", "acceleration", "--sensitivity", "1 mV/(m/s²)",
            "--weighting", "A", "--weight-any-quantity", "--json")  # fmt: skip
    assert r.code == 0, r.err
    assert r.json()["quantity"] == "acceleration"
    r = cli("bands", sine_wav, "--sensitivity", "12 mV/Pa", "--quantity", "force", "--json")
    assert r.code == 2 and "--sensitivity: '12 mV/Pa' is a pressure sensitivity" in r.err


def test_channel_sections_override_the_sensor(cli, sine_wav, tmp_path):
    write(
        sine_wav.with_suffix(".toml"),
        '[sensor]\nquantity = "acceleration"\nsensitivity = "10 mV/g"\n[chain]\ngain = "20 dB"\n'
        '[channel.1]\nsensitivity = "5 mV/g"\nserial = "B-2"\n',
    )
    src = piezo.open(sine_wav)
    # 0.5 FS / 10 / 10 mV/g = 5 g; 0.25 FS / 10 / 5 mV/g = 5 g: the same acceleration.
    peaks = np.max(np.abs(np.concatenate(list(src.blocks()))), axis=0)
    np.testing.assert_allclose(peaks, 5 * G, rtol=1e-6)
    doc = cli("info", sine_wav, "--json").json()
    ch0, ch1 = doc["channels"]
    assert ch0["chain"]["provenance"]["sensitivity_v_per_pa"] == str(sine_wav.with_suffix(".toml"))
    assert ch1["chain"]["provenance"]["sensitivity_v_per_pa"].endswith("[channel.1]")
    assert ch1["chain"]["sensitivity"] == "0.5099 mV/(m/s²) (5.000 mV/g)"
    assert ch0["unit"] == ch1["unit"] == "m/s²"
    assert ch0["peak"] == pytest.approx(5 * G, rel=1e-6)
    # Levels per channel with each channel's chain; the check too: full scale 1 V / 10
    # over 10 mV/g is 10 g, over 5 mV/g 20 g; both peaks are 5 g, so the headroom is
    # 20 lg 2 and 20 lg 4 (the raw 0.5 and 0.25 of full scale).
    lv = cli("levels", sine_wav, "--json").json()
    assert lv["channels"][0]["LZeq"] == pytest.approx(lv["channels"][1]["LZeq"], abs=1e-6)
    r = cli("check", sine_wav, "--json")
    assert r.code in (0, 1), r.err
    c0, c1 = r.json()["channels"]
    assert (c0["full_scale"], c1["full_scale"]) == pytest.approx((10 * G, 20 * G), rel=1e-9)
    assert c0["headroom_db"] == pytest.approx(20 * math.log10(2), abs=1e-3)
    assert c1["headroom_db"] == pytest.approx(20 * math.log10(4), abs=1e-3)
    assert cli("check", sine_wav, "--channel", "1", "--json").code in (0, 1)


def test_channels_of_different_quantities_have_their_own_levels(cli, sine_wav):
    write(
        sine_wav.with_suffix(".toml"),
        '[channel.0]\nsensitivity = "10 mV/Pa"\n[channel.1]\nsensitivity = "10 mV/g"\n',
    )
    doc = cli("levels", sine_wav, "--json").json()
    assert doc["level_unit"] is None
    p, a = doc["channels"]
    assert (p["unit"], a["unit"]) == ("Pa", "m/s²")
    # 0.25 V peak over 10 mV/g is 25 g peak, RMS 25 g/√2, re 1 µm/s²; 0.5 V over
    # 10 mV/Pa is 50 Pa peak, re 20 µPa (first principles).
    assert a["LZeq"] == pytest.approx(20 * math.log10(25 * G / math.sqrt(2) / 1e-6), abs=0.01)
    assert p["LZeq"] == pytest.approx(20 * math.log10(50 / math.sqrt(2) / 20e-6), abs=0.01)
    assert p["LAeq"] is not None and a["LAeq"] is None
    # Bands and tone: each channel's level re its own reference (the 1 kHz octave band and
    # the tone hold the whole sine: the same values as LZeq).
    bands = cli("bands", sine_wav, "--fraction", "1", "--low", "1kHz", "--high", "1kHz",
                "--json").json()  # fmt: skip
    assert bands["level_unit"] is None
    bp, ba = (ch["bands"][0]["level_db"] for ch in bands["channels"])
    assert (bp, ba) == pytest.approx((p["LZeq"], a["LZeq"]), abs=0.05)  # class 1 ripple
    assert [ch["unit"] for ch in bands["channels"]] == ["Pa", "m/s²"]
    tone = cli("tone", sine_wav, "--json").json()
    tp, ta = (ch["level_db"] for ch in tone["channels"])
    assert (tp, ta) == pytest.approx((p["LZeq"], a["LZeq"]), abs=0.01)
    assert [ch["level_unit"] for ch in tone["channels"]] == ["dB re 20 µPa", "dB re 1 µm/s²"]
    spectrum = cli("spectrum", sine_wav, "--json").json()
    assert [ch["unit"] for ch in spectrum["channels"]] == ["Pa^2/Hz", "(m/s²)^2/Hz"]
    sp, sa = (ch["mean_square"] for ch in spectrum["channels"])
    # Parseval: the mean square in each channel's unit gives its LZeq.
    assert 10 * np.log10(sp / 20e-6**2) == pytest.approx(p["LZeq"], abs=0.01)
    assert 10 * np.log10(sa / 1e-6**2) == pytest.approx(a["LZeq"], abs=0.01)
    check = cli("check", sine_wav, "--json").json()  # each channel in its own unit
    assert [ch["level_unit"] for ch in check["channels"]] == ["dB re 20 µPa", "dB re 1 µm/s²"]


def test_channel_sections_are_checked(cli, sine_wav, tmp_path):
    bad = write(tmp_path / "bad.toml", '[channel.x]\nsensitivity = "1 mV/Pa"\n')
    with pytest.raises(SpecError, match=r"\[channel.N\] with N = 0, 1"):
        load_profile(bad)
    typo = write(tmp_path / "typo.toml", '[channel.0]\nsensitivty = "1 mV/Pa"\n')
    with pytest.raises(SpecError, match=r"unknown key channel\.0\.sensitivty"):
        load_profile(typo)
    far = write(tmp_path / "far.toml", '[channel.5]\nsensitivity = "1 mV/Pa"\n')
    r = cli("info", sine_wav, "--profile", far)
    assert r.code == 2 and len(r.err.strip().splitlines()) == 1
    assert "[channel.5] describes channel 5, but the recording has 2" in r.err


def test_channels_sharing_a_reference_value_but_not_a_unit(cli, sine_wav, tmp_path):
    # A hydrophone (re 1 µPa) and an accelerometer (re 1 µm/s²): the same number 1e-6 in
    # two units (ISO 1683), so no document may state one reference for both.
    write(
        sine_wav.with_suffix(".toml"),
        '[chain]\nreference = "1 uPa"\n'  # the pressure channels' reference (in water)
        '[channel.0]\nsensitivity = "-200 dB re 1 V/µPa"\n'
        '[channel.1]\nsensitivity = "10 mV/g"\n',
    )
    doc = cli("levels", sine_wav, "--json").json()
    assert doc["unit"] is None and doc["level_unit"] is None
    assert not [k for k in doc if k.startswith("reference")]
    assert [ch["level_unit"] for ch in doc["channels"]] == ["dB re 1 µPa", "dB re 1 µm/s²"]
    # One picture holds one level unit: --plot asks for a channel, in one line.
    r = cli("spectrum", sine_wav, "--plot", tmp_path / "psd.png")
    assert r.code == 2 and len(r.err.strip().splitlines()) == 1
    assert "dB re 1 µPa; dB re 1 µm/s²" in r.err and "--channel N" in r.err
    assert not (tmp_path / "psd.png").exists()
