"""``piezo check``: exit codes, the JSON contract, thresholds from file and options."""

from __future__ import annotations

import json

import jsonschema
import numpy as np
import pytest
import soundfile as sf

from piezo.diagnostics.checker import Thresholds
from tests.paths import RECORDINGS, REPO

SCHEMA = json.loads((REPO / "docs" / "check.schema.json").read_text(encoding="utf-8"))

FS = 48000


def _write(path, x, subtype="PCM_24", fs=FS):
    sf.write(str(path), x, fs, subtype=subtype)
    return path


@pytest.fixture
def clean(tmp_path):
    t = np.arange(FS) / FS
    return _write(tmp_path / "clean.wav", 0.5 * np.sin(2 * np.pi * 997 * t))


@pytest.fixture
def clipped(tmp_path):
    t = np.arange(FS) / FS
    x = np.clip(np.sin(2 * np.pi * 997 * t), -0.8, 0.8)
    return _write(
        tmp_path / "clipped.wav", np.column_stack([0.5 * np.sin(2 * np.pi * 997 * t), x])
    )


def test_clean_capture_exits_0_with_the_json_contract(cli, clean):
    r = cli("check", clean, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["verdict"] in ("ok", "warn")
    (ch,) = doc["channels"]
    assert ch["channel"] == 0
    assert ch["verdict"] in ("ok", "warn")
    for key in ("clipped_samples", "clipped_fraction", "events"):
        assert key in ch["clipping"]
    assert ch["clipping"]["clipped_samples"] == 0
    # 0.5 of full scale: headroom 20 lg 2 = 6.02 dB.
    assert ch["headroom_db"] == pytest.approx(6.0206, abs=1e-3)
    assert ch["dc_offset_v"] == pytest.approx(0.0, abs=1e-6)
    assert set(ch["rolloff"]) >= {"corner_hz", "status"}
    assert {"zero_runs", "repeat_runs", "dropout_fraction"} <= set(ch["dropouts"])
    assert "noise_floor_db" in ch
    assert "status" in ch["hum"]
    # CLI defaults are the library defaults.
    assert doc["thresholds"] == Thresholds().as_dict()


def test_a_failing_channel_exits_1(cli, clipped):
    r = cli("check", clipped, "--json")
    assert r.code == 1
    ok, bad = r.json()["channels"]
    assert bad["verdict"] == "fail"
    expected = (1 - 2 / np.pi * np.arcsin(0.8)) * FS  # see tests/test_diagnostics.py
    assert bad["clipping"]["clipped_samples"] == pytest.approx(expected, rel=0.01)
    assert ok["clipping"]["clipped_samples"] == 0
    # Only the good channel: exit 0.
    assert cli("check", clipped, "--channel", "0", "--json").code == 0


def test_terminal_table_names_check_severity_and_threshold(cli, clipped):
    r = cli("check", clipped)
    assert r.code == 1
    assert "clipping" in r.out
    assert "FAIL" in r.out
    assert "analog clip" in r.out
    assert "verdict: FAIL" in r.out


def test_dc_offset_v_is_in_volts_when_calibrated(cli, tmp_path):
    # 0.05 of a 2 V full scale after 20 dB gain: 0.1 V at the ADC, 10 mV at the sensor.
    t = np.arange(FS) / FS
    path = _write(tmp_path / "dc.wav", 0.05 + 0.2 * np.sin(2 * np.pi * 100 * t))
    r = cli(
        "check",
        path,
        "--json",
        "--full-scale",
        "2 V",
        "--gain",
        "20 dB",
        "--sensitivity",
        "10 mV/Pa",
    )
    ch = r.json()["channels"][0]
    assert ch["dc_offset_v"] == pytest.approx(0.01, rel=1e-4)
    assert ch["dc"]["offset"] == pytest.approx(1.0, rel=1e-4)  # 10 mV / (10 mV/Pa)
    assert r.json()["unit"] == "Pa"


def test_thresholds_file_options_and_expected_corner(cli, clean, tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text("[thresholds]\nclip_min_run = 7\nsnr_warn_db = 30\n")
    r = cli(
        "check",
        clean,
        "--json",
        "--thresholds",
        limits,
        "--threshold",
        "snr_warn_db=12",
        "--expected-corner",
        "160 mHz",
    )
    assert r.code == 0, r.err
    th = r.json()["thresholds"]
    assert th["clip_min_run"] == 7
    assert th["snr_warn_db"] == 12.0  # the option wins over the file
    assert th["rolloff_expected_hz"] == pytest.approx(0.16)


def test_unusable_input_exits_2(cli, tmp_path, clean):
    r = cli("check", tmp_path / "missing.wav")
    assert r.code == 2
    assert r.err.startswith("piezo: error:")
    r = cli("check", clean, "--threshold", "clip_min_rum=3")
    assert r.code == 2
    assert "unknown threshold 'clip_min_rum'" in r.err
    bad = tmp_path / "bad.toml"
    bad.write_text("clip_min_run = -2\n")
    r = cli("check", clean, "--thresholds", bad)
    assert r.code == 2
    assert "clip_min_run" in r.err


def test_sidecar_rate_disagreeing_with_the_file_fails(cli, clean):
    clean.with_suffix(".toml").write_text('[chain]\nsample_rate = "44.1 kHz"\n')
    r = cli("check", clean, "--json")
    assert r.code == 1
    meta = {m["name"]: m for m in r.json()["metadata"]}
    assert meta["sample_rate"]["severity"] == "fail"
    assert "44100" in meta["sample_rate"]["evidence"]


def test_demo_recordings(cli):
    # The demo scenarios (piezo/demo.py): the pump bench's channel 1 preamplifier
    # saturates at 0.8 of full scale during cavitation knocks, then a DC offset of 1.2 %
    # of full scale is added after it.
    r = cli("check", RECORDINGS / "pump-bench.flac", "--json")
    assert r.code == 1, r.err  # a failing channel
    ch0, ch1 = r.json()["channels"]
    assert ch0["verdict"] == "ok"
    assert ch1["verdict"] == "fail"
    clip = next(c for c in ch1["checks"] if c["name"] == "clipping")
    assert clip["severity"] == "fail"
    assert ch1["clipping"]["clipped_samples"] > 0
    # Clip levels: +0.8 + 0.012 and -0.8 + 0.012 of full scale.
    assert f"{20 * np.log10(0.812):.2f} dBFS" in clip["evidence"]
    assert f"{20 * np.log10(0.788):.2f} dBFS" in clip["evidence"]
    dc = next(c for c in ch1["checks"] if c["name"] == "dc")
    assert dc["severity"] == "warn"
    # 0.012 added by the generator; the 14 knocks (decaying 2.6 kHz sines, clipped) add
    # at most about 14 x 0.8 / (2 pi 2600) / 5 s = 1.4e-4 of full scale: 5e-4 covers it.
    assert ch1["dc"]["fraction_of_full_scale"] == pytest.approx(0.012, abs=5e-4)
    r = cli("check", RECORDINGS / "tank-hydrophone.flac", "--json")
    assert r.code == 0
    (ch,) = r.json()["channels"]
    assert ch["verdict"] == "ok"
    assert ch["rolloff"]["status"] == "estimated"
    assert ch["rolloff"]["corner_hz"] == pytest.approx(20.0, rel=0.15)
    # The valve-rig noise capture (piezo/demo_response.py): channel 1 is the nominal
    # pickup behind a 1 MOhm buffer, corner 1/(2 pi R_in (C_s + C_c + C_in)) with
    # 1.8 nF + 250 pF + 10 pF = 77.3 Hz (voltage-mode corner, circuit theory),
    # excited by pink noise down to low frequencies: the capture shows the corner.
    r = cli("check", RECORDINGS / "valve-pickup-noise-2ch.flac", "--json")
    ro = r.json()["channels"][1]["rolloff"]
    assert ro["status"] == "estimated"
    assert ro["corner_hz"] == pytest.approx(1 / (2 * np.pi * 1e6 * 2.06e-9), rel=0.10)
    r = cli("check", RECORDINGS / "tap-test.csv", "--json")
    assert r.code == 0
    assert r.json()["full_scale_pa"] is None


def test_json_validates_against_the_shipped_schema(cli, clean, clipped):
    validator = jsonschema.Draft202012Validator(SCHEMA)
    validator.check_schema(SCHEMA)
    docs = [
        cli("check", clean, "--json").json(),
        cli("check", clipped, "--json").json(),
        cli("check", RECORDINGS / "tap-test.csv", "--json").json(),
    ]
    for doc in docs:
        validator.validate(doc)
    # The schema is not a rubber stamp: a broken document is refused.
    broken = docs[1]
    broken["channels"][1]["rolloff"]["status"] = "guessed"
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(broken)
    del docs[0]["channels"][0]["clipping"]["clipped_samples"]
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(docs[0])


def test_csv_time_gaps_are_reported_by_check(cli, tmp_path):
    # A scope export with one missing row: 'info' refuses it, 'check' reports the gap.
    t = np.arange(4000) / 4000.0
    rng = np.random.default_rng(7)
    v = 0.1 * rng.standard_normal(t.size)
    keep = np.ones(t.size, bool)
    keep[2000] = False
    path = tmp_path / "gap.csv"
    path.write_text(
        "time,v\n" + "\n".join(f"{a:.7f},{b:.6f}" for a, b in zip(t[keep], v[keep], strict=True))
    )
    assert cli("info", path).code == 2
    r = cli("check", path, "--json")
    assert r.code in (0, 1), r.err
    drop = r.json()["channels"][0]["dropouts"]
    assert drop["time_gaps"] == 1
    assert drop["largest_time_gap_s"] == pytest.approx(1 / 4000, rel=1e-6)
