"""``piezo calibrate`` for every quantity: levels with units, trade forms, the profile written."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
import soundfile as sf

G = 9.80665  # standard acceleration of gravity, exact (3rd CGPM 1901; ISO 80000-3:2019)
FS = 48000
OMEGA = 1000.0  # rad/s: the 159.2 Hz of hand-held vibration calibrators (common practice)
CHAIN = ("--gain", "20 dB", "--full-scale", "2 V")


def vibration_capture(path, *, rms=10.0, mv_per_g=10.0, seconds=3.0, channels=1):
    """A 10 mV/g accelerometer on a 10 m/s² RMS calibrator at ω = 1000 rad/s, through
    20 dB of gain into an ADC of 2 V full scale (24-bit)."""
    t = np.arange(int(seconds * FS)) / FS
    volts = rms * mv_per_g * 1e-3 / G * np.sqrt(2) * np.sin(OMEGA * t)
    raw = volts * 10.0 / 2.0
    data = raw if channels == 1 else np.column_stack([raw, 0.2 * raw])
    sf.write(path, data, FS, subtype="PCM_24")
    return path


#: Tolerance of the sensitivity, relative: the mean square of a sine over T seconds that
#: hold no whole number of cycles departs from 1/2 by at most 1/(ωT), so the RMS by
#: 1/(2ωT), with T the 2.5 s the calibrator measures of a 3 s capture (0.25 s settling,
#: whole 0.5 s segments). 24-bit quantisation of a -26 dBFS tone adds ~1e-7: nothing.
SENS_TOL = 1 / (2 * OMEGA * 2.5)


def mv_per_g(doc):
    return doc["sensitivity_v_per_unit"] * G * 1e3


def test_a_vibration_calibrator_gives_mv_per_g(cli, tmp_path):
    path = vibration_capture(tmp_path / "acc.wav")
    r = cli("calibrate", path, "--level", "10 m/s²", *CHAIN, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert (doc["quantity"], doc["unit"], doc["level_unit"]) == (
        "acceleration",
        "m/s²",
        "dB re 1 µm/s²",
    )
    assert mv_per_g(doc) == pytest.approx(10.0, rel=SENS_TOL)
    # 10 m/s² is 140 dB re 1 µm/s² (ISO 1683:2015).
    assert doc["calibrator_level_db"] == pytest.approx(140.0, abs=1e-12)
    assert doc["calibrator_rms"] == pytest.approx(10.0, rel=1e-12)
    assert doc["tone_hz"] == pytest.approx(OMEGA / (2 * np.pi), rel=1e-5)
    assert doc["sensitivity"].startswith("1.020 mV/(m/s²) (")
    assert doc["chain"] == {"full_scale_v": 2.0, "gain": pytest.approx(10.0),
                            "reference_m_per_s2": 1e-6}  # fmt: skip
    # Pressure-only keys stay out of an acceleration calibration.
    assert not {"sensitivity_mv_per_pa", "calibrator_pressure_pa"} & set(doc)
    # The budget stays: a clean tone leaves the calibrator's ±0.25 dB (rectangular).
    assert doc["uncertainty"]["expanded_uncertainty_db"] == pytest.approx(
        2 * 0.25 / np.sqrt(3), rel=1e-3
    )
    text = cli("calibrate", path, "--level", "10 m/s²", *CHAIN)
    assert "140 dB re 1 µm/s² = 10 m/s² RMS" in text.out
    assert "mV/g" in text.out


@pytest.mark.parametrize(
    "level",
    ["10 m/s²", "10 m/s^2", "140 dB re 1 µm/s²", "140 dB re 1 um/s2", "140", "140 dB"],
)
def test_every_spelling_of_the_level_gives_the_same_sensitivity(cli, tmp_path, level):
    path = vibration_capture(tmp_path / "acc.wav")
    # A bare level is re the channel's quantity: --quantity acceleration makes it 1 µm/s².
    r = cli("calibrate", path, "--level", level, "--quantity", "acceleration", *CHAIN, "--json")
    assert r.code == 0, r.err
    assert r.json()["calibrator_rms"] == pytest.approx(10.0, rel=1e-12)
    assert mv_per_g(r.json()) == pytest.approx(10.0, rel=SENS_TOL)


def test_one_g_calibrator(cli, tmp_path):
    path = vibration_capture(tmp_path / "acc.wav", rms=G)
    doc = cli("calibrate", path, "--level", "1 g", *CHAIN, "--json").json()
    assert doc["calibrator_rms"] == pytest.approx(G, rel=1e-12)  # via its level: a few ulp
    assert mv_per_g(doc) == pytest.approx(10.0, rel=SENS_TOL)


def test_round_trip_write_profile_then_levels(cli, tmp_path):
    path = vibration_capture(tmp_path / "acc.wav")
    side = path.with_suffix(".toml")
    side.write_text('[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n', encoding="utf-8")
    r = cli("calibrate", path, "--level", "10 m/s²", "--write-profile", side, "--json")
    assert r.code == 0, r.err
    written = tomllib.loads(side.read_text(encoding="utf-8"))
    assert written["sensor"]["quantity"] == "acceleration"
    assert written["sensor"]["sensitivity"].endswith(" mV/(m/s²)")
    assert written["chain"] == {"gain": "20 dB", "full_scale": "2 V"}
    # The sidecar now calibrates the file: 10 m/s² RMS is 140 dB re 1 µm/s² (ISO 1683).
    # Tolerance: the sensitivity's (SENS_TOL, 0.0017 dB) plus LZeq's own over the whole
    # 3 s, 1/(ωT) in mean square (0.0014 dB), plus 5 printed digits (0.0004 dB).
    levels = cli("levels", path, "--json")
    assert levels.code == 0, levels.err
    (ch,) = levels.json()["channels"]
    assert ch["level_unit"] == "dB re 1 µm/s²"
    assert ch["LZeq"] == pytest.approx(140.0, abs=0.004)


def test_multi_channel_files_ask_for_one_channel_naming_quantities(cli, tmp_path):
    path = vibration_capture(tmp_path / "pair.wav", channels=2)
    path.with_suffix(".toml").write_text(
        '[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n[channel.0]\nquantity = "acceleration"\n'
        '[channel.1]\nquantity = "pressure"\n',
        encoding="utf-8",
    )
    r = cli("calibrate", path, "--level", "10 m/s²")
    assert r.code == 2 and r.err.count("\n") == 1
    assert "2 channels (0: acceleration, 1: pressure)" in r.err and "--channel N" in r.err


def test_one_channel_of_several_is_written_to_its_section(cli, tmp_path):
    path = vibration_capture(tmp_path / "pair.wav", channels=2)
    side = path.with_suffix(".toml")
    side.write_text('[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n', encoding="utf-8")
    r = cli("calibrate", path, "--channel", "1", "--level", "10 m/s²", "--write-profile", side)
    assert r.code == 0, r.err
    written = tomllib.loads(side.read_text(encoding="utf-8"))
    assert "sensor" not in written and written["channel"]["1"]["quantity"] == "acceleration"
    info = cli("info", path, "--json").json()
    ch0, ch1 = info["channels"]
    # Channel 1 carried 0.2 of channel 0's volts: it reads as a 2 mV/g sensor.
    assert ch1["chain"]["provenance"]["sensitivity_v_per_pa"] == f"{side} [channel.1]"
    assert ch1["chain"]["sensitivity_v_per_unit"] * G * 1e3 == pytest.approx(2.0, rel=SENS_TOL)
    assert ch0["unit"] == "V"  # still uncalibrated
    assert ch1["rms"] == pytest.approx(10.0, rel=2 * SENS_TOL)


def test_a_pressure_profile_is_still_read_as_sound_pressure(cli, tmp_path):
    # 94 dB, '94 dB' and '94 dB re 20 µPa' are one level (IEC 60027-3; ISO 1683 20 µPa).
    t = np.arange(3 * FS) / FS
    p = 20e-6 * 10 ** (94 / 20) * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "mic.wav"
    sf.write(path, p * 0.0085, FS, subtype="PCM_24")
    docs = [
        cli("calibrate", path, "--level", level, "--json").json()
        for level in ("94", "94 dB", "94 dB re 20 µPa")
    ]
    assert docs[0] == docs[1] == docs[2]
    assert docs[0]["sensitivity_mv_per_pa"] == pytest.approx(8.5, rel=1e-4)
    assert docs[0]["quantity"] == "pressure" and docs[0]["sensitivity"] == "8.500 mV/Pa"


def test_a_hydrophone_level_is_re_one_micropascal(cli, tmp_path):
    # With the water reference (ISO 1683: 1 µPa) a bare 120 dB is 1 Pa RMS.
    t = np.arange(3 * FS) / FS
    path = tmp_path / "hyd.wav"
    sf.write(path, 50e-6 * np.sqrt(2) * np.sin(2 * np.pi * 250 * t), FS, subtype="FLOAT")
    r = cli("calibrate", path, "--level", "120", "--reference", "1 uPa", "--frequency",
            "250 Hz", "--json")  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["calibrator_rms"] == pytest.approx(1.0, rel=1e-12)
    assert doc["level_unit"] == "dB re 1 µPa"
    # 50 µV at 1 Pa is 0.05 mV/Pa (-86.02 dB re 1 V/Pa); float samples, 1/(2ωT) ≈ 1.3e-4.
    assert doc["sensitivity_mv_per_pa"] == pytest.approx(0.05, rel=1.3e-4)


def test_a_force_calibrator_needs_its_frequency(cli, tmp_path):
    path = vibration_capture(tmp_path / "force.wav")
    r = cli("calibrate", path, "--level", "10 N", *CHAIN)
    assert r.code == 2 and "--frequency" in r.err and "force" in r.err
    doc = cli("calibrate", path, "--level", "10 N", "--frequency", "159.2 Hz", *CHAIN,
              "--json").json()  # fmt: skip
    # The same volts at 10 N RMS: 10.197 mV / 10 N = 1.0197 mV/N.
    assert doc["quantity"] == "force" and doc["sensitivity"].endswith(" mV/N")
    assert doc["sensitivity_v_per_unit"] == pytest.approx(0.010 / G, rel=SENS_TOL)


@pytest.mark.parametrize(
    ("options", "message"),
    [
        (("--level", "10", "--quantity", "acceleration"), "not a calibrator level"),
        (("--level", "10 m/s²", "--quantity", "force"), "is a level of acceleration, but"),
        (("--level", "10 V"), "--level: '10 V' is a voltage, not a sound, vibration or"),
        (("--level", "140", "--quantity", "voltage"), "calibrate measures a sensor's"),
        # 94 dB is a sound calibrator's: an accelerometer channel needs its level given.
        (("--quantity", "acceleration"), "--level: channel 0 measures acceleration"),
    ],
)
def test_bad_levels_are_one_line(cli, tmp_path, options, message):
    path = vibration_capture(tmp_path / "acc.wav")
    r = cli("calibrate", path, *options, *CHAIN)
    assert r.code == 2 and r.out == ""
    assert r.err.count("\n") == 1 and message in r.err


def test_a_charge_amplifier_gives_pc_per_n_and_writes_it_back(cli, tmp_path):
    # The same volts, now a force sensor behind a 10 mV/pC charge amplifier on a 10 N RMS
    # calibrator: 10.197 mV / 10 N / 10 mV/pC = 0.10197 pC/N.
    path = vibration_capture(tmp_path / "force.wav")
    side = path.with_suffix(".toml")
    side.write_text('[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n', encoding="utf-8")
    r = cli("calibrate", path, "--level", "10 N", "--frequency", "159.2 Hz",
            "--charge-gain", "10 mV/pC", "--write-profile", side, "--json")  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["charge_sensitivity_c_per_unit"] == pytest.approx(0.010 / G * 1e-11, rel=SENS_TOL)
    assert doc["sensitivity"].endswith(" pC/N") and doc["chain"]["charge_gain_v_per_c"] == 1e10
    written = tomllib.loads(side.read_text(encoding="utf-8"))
    assert written["sensor"]["charge_sensitivity"].endswith(" pC/N")
    assert "sensitivity" not in written["sensor"]
    assert written["chain"]["charge_gain"] == "10 mV/pC"
    # Read back through the profile alone: 10 N RMS (the tolerance of the sensitivity,
    # of info's RMS over 3 s, 1/(2ωT), and of 5 printed digits).
    info = cli("info", path, "--json").json()
    (ch,) = info["channels"]
    assert ch["unit"] == "N"
    assert ch["rms"] == pytest.approx(10.0, rel=SENS_TOL + 1 / (2 * OMEGA * 3) + 5e-5)
