"""``piezo check`` on a file whose channels have chains of their own (``[channel.N]``).

A microphone (pressure) on channel 0 and an accelerometer (acceleration) on channel 1,
each with its own sensitivity: every finding of a channel is in that channel's unit and
level reference (ISO 1683:2015, Table 1: 20 µPa for sound pressure in air, 1 µm/s² for
acceleration), and clipping is judged at that channel's own full scale. Before each
channel had its own chain in the check, such a file was refused (exit 2).
"""

from __future__ import annotations

import json
import math

import jsonschema
import numpy as np
import pytest
import soundfile as sf

import piezo
from piezo.diagnostics.summary import check_of
from tests.paths import RECORDINGS, REPO

SCHEMA = json.loads((REPO / "docs" / "check.schema.json").read_text(encoding="utf-8"))

FS = 48000
G = 9.80665  # standard acceleration of gravity, m/s² (CGPM 1901; ISO 80000-3)
FULL_SCALE_V = 2.0
MIC_V_PER_PA = 10e-3
ACCEL_V_PER_G = 10e-3
# Raw sample amplitudes (fractions of full scale) of the 1 kHz sines.
MIC_QUIET, MIC_LOUD = 0.01, 0.3
ACCEL_QUIET, ACCEL_LOUD = 0.02, 1.5  # the loud half drives the converter past full scale
ACCEL_DC = 0.005  # raw DC on the accelerometer channel

PROFILE = f"""\
[chain]
full_scale = "{FULL_SCALE_V} V"

[channel.0]
name = "measurement microphone"
sensitivity = "{MIC_V_PER_PA * 1e3:g} mV/Pa"

[channel.1]
name = "accelerometer"
sensitivity = "{ACCEL_V_PER_G * 1e3:g} mV/g"
"""


def _level_db(rms: float, reference: float) -> float:
    """20 lg(rms / reference): a level by its definition (ISO 1683, IEC 60050-801)."""
    return 20 * math.log10(rms / reference)


def _samples() -> np.ndarray:
    """2 s at 48 kHz, raw fractions of full scale: 1 kHz sines, quiet in the first
    second, loud in the second; (frames, 2).

    1 kHz at 48 kHz is 48 samples a period, so every 0.1 s noise interval (4800 samples)
    holds exactly 100 periods: each interval's RMS (mean removed) is the sine's A/√2.
    """
    t = np.arange(2 * FS) / FS
    s = np.sin(2 * np.pi * 1000 * t)
    quiet = t < 1.0
    mic = np.where(quiet, MIC_QUIET, MIC_LOUD) * s
    accel = np.clip(np.where(quiet, ACCEL_QUIET, ACCEL_LOUD) * s + ACCEL_DC, -1.0, 1.0)
    return np.column_stack([mic, accel])


@pytest.fixture
def mixed(tmp_path):
    """The samples as a PCM_24 WAV with the two-sensor profile as its sidecar."""
    path = tmp_path / "bench.wav"
    sf.write(path, _samples(), FS, subtype="PCM_24")
    path.with_suffix(".toml").write_text(PROFILE, encoding="utf-8")
    return path


def test_each_channel_is_checked_in_its_own_unit_and_level_reference(cli, mixed):
    r = cli("check", mixed, "--json")
    # Exit 1, not 2: the file is checked (the accelerometer clips, which fails).
    assert r.code == 1, r.err
    doc = r.json()
    jsonschema.Draft202012Validator(SCHEMA).validate(doc)
    mic, accel = doc["channels"]
    assert (mic["quantity"], mic["unit"], mic["level_unit"]) == ("pressure", "Pa", "dB re 20 µPa")
    assert (accel["quantity"], accel["unit"], accel["level_unit"]) == (
        "acceleration",
        "m/s²",
        "dB re 1 µm/s²",
    )
    assert mic["reference_pa"] == pytest.approx(20e-6, rel=1e-12)
    assert accel["reference_m_per_s2"] == pytest.approx(1e-6, rel=1e-12)
    # The channels differ: nothing shared to state at the top.
    assert doc["unit"] is None and doc["quantity"] is None and doc["chain"] is None
    assert doc["full_scale_pa"] is None
    assert mic["chain"]["sensitivity_v_per_pa"] == pytest.approx(MIC_V_PER_PA)
    assert accel["chain"]["sensitivity_v_per_unit"] == pytest.approx(ACCEL_V_PER_G / G)
    assert accel["chain"]["provenance"]["sensitivity_v_per_pa"].endswith("[channel.1]")

    # Full scale at the sensor, by hand: 2 V over 10 mV/Pa is 200 Pa; 2 V over 10 mV/g
    # is 200 g.
    assert mic["full_scale"] == pytest.approx(FULL_SCALE_V / MIC_V_PER_PA, rel=1e-12)
    accel_fs = FULL_SCALE_V / ACCEL_V_PER_G * G
    assert accel["full_scale"] == pytest.approx(accel_fs, rel=1e-12)

    # Noise floor = the quietest 0.1 s intervals = the quiet first second, whose RMS is
    # A/√2 in the channel's unit (A = raw amplitude × full scale over the sensitivity).
    # The level histogram has 0.05 dB bins, read at the bin centre: ±0.025 dB; 24-bit
    # quantisation changes the RMS by < 1e-5 relative (far below that).
    mic_quiet_rms = MIC_QUIET * FULL_SCALE_V / MIC_V_PER_PA / math.sqrt(2)
    accel_quiet_rms = ACCEL_QUIET * accel_fs / math.sqrt(2)
    assert mic["noise_floor_db"] == pytest.approx(_level_db(mic_quiet_rms, 20e-6), abs=0.026)
    assert accel["noise_floor_db"] == pytest.approx(_level_db(accel_quiet_rms, 1e-6), abs=0.026)
    # 96.99 dB re 20 µPa and 148.86 dB re 1 µm/s²: one reference for both would put
    # them 26 dB apart from these.
    # The signal (loud second) of the microphone, and the SNR: 20 lg(0.3 / 0.01).
    mic_loud_rms = MIC_LOUD * FULL_SCALE_V / MIC_V_PER_PA / math.sqrt(2)
    assert mic["noise"]["signal_level_db"] == pytest.approx(
        _level_db(mic_loud_rms, 20e-6), abs=0.026
    )
    assert mic["noise"]["snr_db"] == pytest.approx(20 * math.log10(30), abs=0.05)  # 2 bins
    # The A weighting applies to sound pressure only (IEC 61672-1). At 1 kHz it is 0 dB
    # by definition; ±0.7 dB is the class 1 acceptance limit there (IEC 61672-1:2013,
    # Table 3).
    assert mic["noise"]["noise_floor_a_db"] == pytest.approx(mic["noise_floor_db"], abs=0.7)
    assert accel["noise"]["noise_floor_a_db"] is None

    # Clipping at each channel's own full scale: the accelerometer is driven to 1.5 of
    # full scale (digital clipping at ±200 g), the microphone peaks at 0.3 of its own.
    assert mic["clipping"]["clipped_samples"] == 0
    assert mic["headroom_db"] == pytest.approx(-20 * math.log10(MIC_LOUD), abs=1e-3)
    levels = {lv["side"]: lv for lv in accel["clipping"]["levels"]}
    assert {lv["kind"] for lv in levels.values()} == {"digital"}
    # The extreme 24-bit code is 1 − 2⁻²³ of full scale.
    assert levels["positive"]["level"] == pytest.approx(accel_fs, rel=2e-7)
    assert levels["negative"]["level"] == pytest.approx(-accel_fs, rel=2e-7)
    # |1.5 sin + 0.005| ≥ 1 for a share 1 − (asin(0.995/1.5) + asin(1.005/1.5))/π of a
    # period (inverse of the sine), over the loud half of the samples.
    share = 1 - (math.asin(0.995 / 1.5) + math.asin(1.005 / 1.5)) / math.pi
    # A run's sample count is its continuous length rounded up or down: ±1 sample in
    # each of the 2 runs a period over 1000 periods.
    assert accel["clipping"]["clipped_samples"] == pytest.approx(share * FS, abs=2000)
    clip = next(c for c in accel["checks"] if c["name"] == "clipping")
    assert clip["severity"] == "fail"
    assert "digital clip at 1961 m/s²" in clip["evidence"]  # 200 g = 1961.33 m/s²

    # DC in volts at the sensor: the mean of the raw samples times 2 V (gain 1); the
    # clipping shaves more off the positive side, so the mean is below the 0.005 added.
    # 24-bit quantisation moves the mean by < 2⁻²³ of full scale: rel 1e-4 holds it.
    raw_mean = float(_samples()[:, 1].mean())
    assert raw_mean < ACCEL_DC
    assert accel["dc_offset_v"] == pytest.approx(raw_mean * FULL_SCALE_V, rel=1e-4)
    assert accel["dc"]["offset"] == pytest.approx(accel["dc_offset_v"] / (ACCEL_V_PER_G / G))
    assert mic["dc_offset_v"] == pytest.approx(0.0, abs=1e-6)

    # Evidence texts in each channel's unit and level reference.
    noise = {
        ch["channel"]: next(c for c in ch["checks"] if c["name"] == "noise") for ch in (mic, accel)
    }
    assert "dB re 20 µPa" in noise[0]["evidence"] and "µm/s²" not in noise[0]["evidence"]
    assert "dB re 1 µm/s²" in noise[1]["evidence"] and "µPa" not in noise[1]["evidence"]


def test_library_document_equals_the_command_output(cli, mixed):
    r = cli("check", mixed, "--json")
    assert check_of(piezo.open(mixed, allow_time_gaps=True)).to_dict() == r.json()


def test_terminal_output_names_each_channels_unit_and_chain(cli, mixed):
    r = cli("check", mixed)
    assert r.code == 1, r.err
    out = " ".join(r.out.split())  # rich wraps lines to the terminal width
    assert "each channel through its own chain" in out
    assert "pressure in Pa, levels in dB re 20 µPa" in out
    assert "acceleration in m/s², levels in dB re 1 µm/s²" in out
    assert "full scale in m/s²: 1961 m/s²" in out  # 200 g
    assert "verdict: FAIL" in out and "channel 1 (clipping)" in out


def test_one_channel_of_the_mixed_file_keeps_its_chain_at_the_top(cli, mixed):
    doc = cli("check", mixed, "--channel", "0", "--json").json()
    assert (doc["unit"], doc["level_unit"]) == ("Pa", "dB re 20 µPa")
    assert doc["full_scale_pa"] == pytest.approx(FULL_SCALE_V / MIC_V_PER_PA)
    assert doc["chain"]["sensitivity_v_per_pa"] == pytest.approx(MIC_V_PER_PA)
    assert doc["verdict"] != "fail"  # the clipped accelerometer is not analysed


def test_csv_channels_get_a_full_scale_only_when_one_is_given(cli, tmp_path):
    # A DAQ export in volts, two columns behind the same profile: without a full scale
    # the instrument range is unknown (null, digital clipping not determinable); with
    # "10 V" each channel has 10 V over its own sensitivity.
    t = np.arange(8000) / 8000.0
    a = 0.5 * np.sin(2 * np.pi * 100 * t)
    path = tmp_path / "daq.csv"
    path.write_text(
        "time,mic,accel\n"
        + "\n".join(f"{u:.6f},{v:.6f},{w:.6f}" for u, v, w in zip(t, a, a / 2, strict=True)),
        encoding="utf-8",
    )
    profile = tmp_path / "daq.profile.toml"
    profile.write_text(PROFILE.replace(f'full_scale = "{FULL_SCALE_V} V"', ""), encoding="utf-8")
    doc = cli("check", path, "--profile", profile, "--json").json()
    assert [ch["full_scale"] for ch in doc["channels"]] == [None, None]
    assert [ch["unit"] for ch in doc["channels"]] == ["Pa", "m/s²"]
    evidence = next(c for c in doc["channels"][1]["checks"] if c["name"] == "clipping")
    assert "digital clipping not determinable" in evidence["evidence"]
    doc = cli("check", path, "--profile", profile, "--full-scale", "10 V", "--json").json()
    fs = [ch["full_scale"] for ch in doc["channels"]]
    assert fs == pytest.approx([10 / MIC_V_PER_PA, 10 / ACCEL_V_PER_G * G], rel=1e-12)
    # Peak 0.5 V (mic) and 0.25 V (accel) against 10 V: 20 lg 20 and 20 lg 40 of headroom.
    heads = [ch["headroom_db"] for ch in doc["channels"]]
    assert heads == pytest.approx([20 * math.log10(20), 20 * math.log10(40)], abs=1e-3)
    # A full scale for channel 0 only (N=VALUE): channel 1's stays unknown.
    doc = cli("check", path, "--profile", profile, "--full-scale", "0=10 V", "--json").json()
    mic, accel = doc["channels"]
    assert mic["full_scale"] == pytest.approx(10 / MIC_V_PER_PA, rel=1e-12)
    assert accel["full_scale"] is None and accel["headroom_db"] is None


def test_bundled_accelerometer_bench_is_checked(cli):
    # recordings/accel-bench.toml: two accelerometers, 10.15 mV/g and 10 mV/g behind
    # 20 dB into 2 V: full scales of 0.2 V over each sensitivity.
    r = cli("check", RECORDINGS / "accel-bench.flac", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] == "m/s²" and doc["chain"] is None  # one unit, two sensitivities
    fs = [ch["full_scale"] for ch in doc["channels"]]
    assert fs == pytest.approx([0.2 / 10.15e-3 * G, 0.2 / 10e-3 * G], rel=1e-9)
    assert all(ch["level_unit"] == "dB re 1 µm/s²" for ch in doc["channels"])


def test_sensitivity_warning_names_the_channel_without_one(cli, mixed):
    # Only the microphone has a sensitivity: the accelerometer channel stays in volts,
    # and the file-level warning says which channel.
    mixed.with_suffix(".toml").write_text(PROFILE.split("[channel.1]")[0], encoding="utf-8")
    doc = cli("check", mixed, "--json").json()
    meta = {m["name"]: m for m in doc["metadata"]}
    assert meta["sensitivity"]["severity"] == "warn"
    assert meta["sensitivity"]["evidence"].startswith(
        "no sensor sensitivity given for channel 1: its levels are in volts"
    )
    assert [ch["unit"] for ch in doc["channels"]] == ["Pa", "V"]
    # A channel that measures voltage takes no sensitivity: no warning about it.
    doc = cli("check", mixed, "--no-sidecar", "--quantity", "voltage", "--json").json()
    assert "sensitivity" not in {m["name"] for m in doc["metadata"]}
