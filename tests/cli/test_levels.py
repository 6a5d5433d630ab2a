"""Command-line tests of ``piezo levels``: exit codes, the JSON contract, defaults."""

from __future__ import annotations

import inspect
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from piezo.levels.meter import FILTER_SETTLE_S, LevelMeter, sound_levels
from piezo.levels.summary import LEVEL_KEYS

FS = 48000
RECORDINGS = Path(__file__).resolve().parents[2] / "recordings"

# The JSON contract: these keys must be present in every channel entry.
CONTRACT_KEYS = {
    "channel", "LZeq", "LAeq", "LCeq", "LAFmax", "LASmax", "LAFmin", "LASmin", "LCpeak",
    "LZpeak", "LAE", "LAF10", "LAF50", "LAF90", "duration_s",
}  # fmt: skip


@pytest.fixture
def tone_and_silence(tmp_path):
    """2 s, 2 channels, 24-bit: ch 0 a 1 kHz sine of 0.5 (fraction of full scale RMS),
    ch 1 digital silence."""
    t = np.arange(2 * FS) / FS
    x = np.zeros((2 * FS, 2))
    x[:, 0] = 0.5 * math.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "tone.wav"
    sf.write(path, x, FS, subtype="PCM_24")
    return path


def test_levels_json_contract(cli, tone_and_silence):
    res = cli("levels", tone_and_silence, "--sensitivity", "1 V/Pa", "--json")
    assert res.code == 0, res.err
    doc = res.json()
    assert doc["unit"] == "Pa" and doc["reference_pa"] == pytest.approx(20e-6)
    tone, silent = doc["channels"]
    assert CONTRACT_KEYS <= set(tone) and CONTRACT_KEYS <= set(silent)
    # 1 V full scale, 1 V/Pa: 0.5 Pa RMS = 20 lg(0.5 / 20e-6) = 87.96 dB (computed); the
    # 24-bit quantisation and filter start-up are far below the 0.02 dB allowed.
    for key in ("LZeq", "LAeq", "LCeq"):
        assert abs(tone[key] - 87.96) <= 0.02
    assert tone["duration_s"] == pytest.approx(2.0)
    # An all-zero channel: null levels with a note, never -inf.
    assert all(silent[key] is None for key in LEVEL_KEYS)
    assert any("all zeros" in note for note in silent["notes"])


def test_levels_uncalibrated_is_db_re_1_volt(cli, tone_and_silence):
    res = cli("levels", tone_and_silence, "--channel", "0", "--json")
    assert res.code == 0, res.err
    doc = res.json()
    assert doc["unit"] == "V" and doc["reference_v"] == 1.0
    assert [c["channel"] for c in doc["channels"]] == [0]
    assert abs(doc["channels"][0]["LZeq"] - 20 * math.log10(0.5)) <= 0.02


def test_levels_history(cli, tone_and_silence):
    res = cli("levels", tone_and_silence, "--interval", "500 ms", "--channel", "0", "--json")
    assert res.code == 0, res.err
    hist = res.json()["history"]
    assert hist["interval_start_s"] == pytest.approx([0.0, 0.5, 1.0, 1.5])
    assert hist["trace_interval_s"] == pytest.approx(0.1)
    assert len(hist["channels"][0]["LAF"]) == 20
    assert all(abs(v - 20 * math.log10(0.5)) < 0.05 for v in hist["channels"][0]["LAeq"])


def test_levels_c_z_time_weighted_and_las_in_json(cli, tmp_path):
    """Issue 12 §3.17: LCFmax … LZSmin, LAS percentiles (also chosen ones) and the
    history's LAFmax and LCpeak per interval, in the JSON document and the table. A steady
    1 kHz sine of 1 Pa RMS for 6 s (longer than the 5.1 s the S minima wait): C and Z are
    0 dB at 1 kHz (IEC 61672-1:2013, Annex E normalises C there), so every F and S level
    reads 93.98 dB (20 lg(1 / 20e-6), computed) after settling, within the ±0.003 dB
    ripple of the F level and the 0.03 dB a reset averager has left after 5 τ; the
    C peak is √2 higher, +3.01 dB."""
    t = np.arange(6 * FS) / FS
    path = tmp_path / "steady.wav"
    sf.write(path, 0.5 * math.sqrt(2) * np.sin(2 * np.pi * 1000 * t), FS, subtype="DOUBLE")
    res = cli("levels", path, "--sensitivity", "500 mV/Pa", "--json", "--interval", "1s",
              "--percentiles", "1,99")  # fmt: skip
    assert res.code == 0, res.err
    doc = res.json()
    ch = doc["channels"][0]
    for w in "CZ":
        for t_w in "FS":
            assert ch[f"L{w}{t_w}max"] == pytest.approx(93.98, abs=0.04)
            assert ch[f"L{w}{t_w}min"] == pytest.approx(93.98, abs=0.04)
    for key in ("LAS5", "LAS50", "LAS95", "LAS1", "LAS99"):
        assert ch[key] == pytest.approx(93.98, abs=0.04), key
    hist = doc["history"]["channels"][0]
    assert len(hist["LAFmax"]) == len(hist["LCpeak"]) == 6
    # After the first interval the F level is steady (settled long before).
    assert hist["LAFmax"][1:] == pytest.approx([93.98] * 5, abs=0.02)
    assert hist["LCpeak"] == pytest.approx([93.98 + 3.01] * 6, abs=0.02)
    out = cli("levels", path, "--sensitivity", "500 mV/Pa", "--interval", "1s").out
    assert "LZSmax" in out and "LAS95" in out and "LCpeak" in out


def test_levels_terminal_table(cli, tone_and_silence):
    res = cli("levels", tone_and_silence, "--sensitivity", "1 V/Pa")
    assert res.code == 0, res.err
    # 87.96 dB printed to 0.1 dB.
    assert "LAeq" in res.out and "LAF90" in res.out and "88.0" in res.out
    assert "not a certified sound level meter" in res.out.replace("\n", " ")


def test_cli_defaults_equal_library_defaults(cli, tone_and_silence):
    # The CLI passes nothing it was not given: its numbers are the library's defaults.
    doc = cli("levels", tone_and_silence, "--json").json()
    x, fs = sf.read(tone_and_silence, dtype="float64", always_2d=True)
    lib = sound_levels(x, fs, reference=1.0)
    for entry, ch in zip(doc["channels"], lib.channels, strict=True):
        for key in LEVEL_KEYS:
            assert entry[key] == (
                None if getattr(ch, key) is None else pytest.approx(getattr(ch, key), rel=1e-12)
            )
    defaults = {name: p.default for name, p in inspect.signature(LevelMeter).parameters.items()}
    assert doc["percentile_interval_s"] == pytest.approx(defaults["percentile_interval_s"])
    assert doc["start_up_excluded_s"]["LAFmax"] == pytest.approx(defaults["filter_settle_s"])
    assert defaults["filter_settle_s"] == FILTER_SETTLE_S
    assert "history" not in doc and defaults["interval_s"] is None


def test_levels_settle_zero_keeps_an_event_at_the_start(cli, tmp_path):
    # A tap in the first 10 ms: excluded from LCpeak by default (with a note), kept with
    # --settle 0.
    x = np.zeros(FS)
    x[100:148] = 0.8 * np.hanning(48)
    x[148:] = 1e-4 * np.random.default_rng(3).standard_normal(FS - 148)
    path = tmp_path / "tap.wav"
    sf.write(path, x, FS, subtype="PCM_24")
    default = cli("levels", path, "--json").json()["channels"][0]
    kept = cli("levels", path, "--settle", "0", "--json").json()["channels"][0]
    assert any("largest sample" in note for note in default["notes"])
    assert kept["LCpeak"] > default["LCpeak"] + 20


@pytest.mark.parametrize(
    "options, message",
    [
        (["--interval", "0 s"], "--interval: must be positive"),
        (["--settle", "-1"], "--settle must be 0 or more"),
        (["--interval", "fast"], "--interval"),
    ],
)
def test_levels_bad_options(cli, tone_and_silence, options, message):
    res = cli("levels", tone_and_silence, *options)
    assert res.code == 2
    assert message in res.err and res.out == ""


@pytest.mark.parametrize(
    "name, unit, channels",
    [("pump-bench.flac", "Pa", 2), ("tank-hydrophone.flac", "Pa", 1), ("tap-test.csv", "V", 2)],
)
def test_levels_on_demo_recordings(cli, name, unit, channels):
    res = cli("levels", RECORDINGS / name, "--json")
    assert res.code == 0, res.err
    doc = res.json()
    assert doc["unit"] == unit and len(doc["channels"]) == channels
    for ch in doc["channels"]:
        # An RMS never exceeds the peak of the same signal.
        assert ch["LZeq"] is not None and ch["LZeq"] <= ch["LZpeak"]


def test_chosen_percentiles(cli, tmp_path):
    # Issue 12 §3.17: --percentiles 1,10,50,90,99 gives LAF1 ... LAF99. White noise that
    # steps by 20 dB every 2 s: LAF1 reads the loud parts, LAF99 the quiet ones, 20 dB
    # apart within 1 dB (the F level of broadband noise scatters by σ ≈ 4.34/√(B·2τ) dB,
    # about 0.06 dB for B of some kHz and τ = 125 ms, Bendat & Piersol §8.2; the 1 dB
    # leaves room for the F averager's 125 ms transitions, about 2 % of the time).
    import soundfile as sf

    fs = 48000
    rng = np.random.default_rng(17)
    x = rng.standard_normal(8 * fs) * np.repeat([0.02, 0.2, 0.02, 0.2], 2 * fs)
    path = tmp_path / "steps.wav"
    sf.write(str(path), x / 4, fs, subtype="FLOAT")
    r = cli("levels", path, "--sensitivity", "250 mV/Pa", "--percentiles", "1,10,50,90,99",
            "--json")  # fmt: skip
    assert r.code == 0, r.err
    ch = r.json()["channels"][0]
    assert {"LAF1", "LAF10", "LAF50", "LAF90", "LAF99"} <= set(ch)
    assert ch["LAF1"] >= ch["LAF10"] >= ch["LAF50"] >= ch["LAF90"] >= ch["LAF99"]
    assert ch["LAF1"] - ch["LAF99"] == pytest.approx(20.0, abs=1.0)
    r = cli("levels", path, "--percentiles", "0,50")
    assert r.code == 2 and "--percentiles" in r.err


def test_velocity_rms_in_the_machine_vibration_band(cli, tmp_path):
    # 1 g peak at 159.155 Hz (ω = 1000 rad/s) integrates to v = a/ω = 9.80665 mm/s peak
    # (first principles), 6.9344 mm/s RMS; the 10 Hz-1 kHz band (ISO 20816-1) passes
    # 159 Hz unchanged, and the band-pass removes the integration's start-up offset.
    fs = 48000
    t = np.arange(10 * fs) / fs
    path = tmp_path / "acc.wav"
    sf.write(path, 0.01 * np.sin(2 * np.pi * 159.155 * t), fs, subtype="FLOAT")  # 10 mV/g
    doc = cli("levels", path, "--sensitivity", "10 mV/g", "--integrate", "1", "--json").json()
    assert doc["velocity_band_hz"] == [10.0, 1000.0]
    assert doc["channels"][0]["velocity_rms_m_per_s"] == pytest.approx(
        9.80665e-3 / np.sqrt(2), rel=1e-3
    )
    # The same tone outside a chosen band: 159 Hz is 2.6 octaves below a 1 kHz edge, where
    # the 2nd-order side falls 12 dB per octave (about -31 dB).
    narrow = cli(
        "levels",
        path,
        "--sensitivity",
        "10 mV/g",
        "--integrate",
        "1",
        "--velocity-band",
        "1kHz:2kHz",
        "--json",
    ).json()
    assert narrow["channels"][0]["velocity_rms_m_per_s"] < 0.05 * 9.80665e-3 / np.sqrt(2)
    plain = cli("levels", path, "--sensitivity", "10 mV/g", "--json").json()
    assert "velocity_band_hz" not in plain  # acceleration: no velocity RMS
    bad = cli("levels", path, "--velocity-band", "10Hz")
    assert bad.code == 2 and "--velocity-band" in bad.err
    reversed_band = cli("levels", path, "--velocity-band", "2kHz:1kHz")
    assert reversed_band.code == 2 and "--velocity-band" in reversed_band.err
