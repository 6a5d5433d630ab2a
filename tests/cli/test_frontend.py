"""The frontend, simulate and equalize commands: exit codes, JSON, files, errors."""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf

from tests.paths import REPO

DESIGN = """
name = "test charge amplifier"
[sensor]
charge_sensitivity = "12 pC/Pa"
capacitance = "1 nF"
[amplifier]
type = "charge"
feedback_capacitance = "1 nF"
feedback_resistance = "1 GOhm"
voltage_noise = "5 nV/rtHz"
clip_level = "10 V"
"""

FS = 48000


@pytest.fixture
def design(tmp_path):
    path = tmp_path / "amp.toml"
    path.write_text(DESIGN, encoding="utf-8")
    return path


@pytest.fixture
def tone(tmp_path):
    """0.25 s of a 1 kHz sine, 0.5 of full scale, two channels (second at half)."""
    t = np.arange(FS // 4) / FS
    x = 0.5 * np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "tone.wav"
    sf.write(str(path), np.column_stack([x, 0.5 * x]), FS, subtype="FLOAT")
    return path


def test_frontend_json_contract(cli, design):
    r = cli("frontend", design, "--json", "--at", "0.159Hz,10Hz")
    assert r.code == 0, r.err
    doc = r.json()
    # Charge-amplifier relations (circuit theory): 12 pC/Pa / 1 nF = 12 mV/Pa,
    # f_c = 1/(2π·1 GΩ·1 nF), τ = 1 s, noise gain 1 + Cs/Cf = 2.
    assert doc["sensitivity_mv_per_pa"] == pytest.approx(12.0)
    assert doc["corner_hz"] == pytest.approx(1 / (2 * math.pi), rel=1e-9)
    assert doc["time_constant_s"] == pytest.approx(1.0)
    assert doc["noise_gain_midband"] == pytest.approx(2.0)
    assert doc["band_1db_hz"][1] is None and doc["band_3db_hz"][0] == pytest.approx(
        doc["corner_hz"]
    )
    assert isinstance(doc["self_noise_dba"], float)
    assert [p["frequency_hz"] for p in doc["phase"]] == [0.159, 10.0]
    assert doc["phase"][0]["phase_deg"] == pytest.approx(45.0, abs=0.1)
    assert {s["source"] for s in doc["noise_budget"]} == {"feedback_resistance", "voltage_noise"}
    assert "high voltages" in doc["caution"]


def test_frontend_terminal_output_has_budget_and_caution(cli):
    r = cli("frontend", REPO / "recordings" / "designs" / "film-buffer-voltage.toml")
    assert r.code == 0, r.err
    assert "Noise budget" in r.out
    assert "Rin thermal" in r.out
    assert "high voltages" in r.out and "confirm them by measurement" in r.out


def test_frontend_vary_and_plot(cli, design, tmp_path):
    png = tmp_path / "plots" / "amp.png"
    r = cli(
        "frontend", design, "--json", "--vary", "feedback_resistance=100M:10G:3", "--plot", png
    )
    assert r.code == 0, r.err
    rows = r.json()["vary"]["rows"]
    assert [row["value"] for row in rows] == pytest.approx([1e8, 1e9, 1e10])
    # f_c = 1/(2π Rf Cf) scales as 1/Rf.
    assert [row["corner_hz"] for row in rows] == pytest.approx(
        [1 / (2 * math.pi * rf * 1e-9) for rf in (1e8, 1e9, 1e10)], rel=1e-9
    )
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    r = cli("frontend", design, "--vary", "feedback_resistance=100M:10G:3")
    assert r.code == 0 and "Trade-off over feedback_resistance" in r.out


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--vary", "feedback_resistance=100M:10G"), "expected NAME=LO:HI:N"),
        (("--vary", "capacitance=1n:2n:3"), "ambiguous"),
        (("--vary", "feedback_resistance=1 GF:10G:3"), "feedback_resistance = '1 GF'"),
        (("--at", "ten hertz"), "--at"),
    ],
)
def test_frontend_bad_options_exit_2(cli, design, args, message):
    r = cli("frontend", design, *args)
    assert r.code == 2
    assert r.err.count("\n") == 1 and r.err.startswith("piezo: error: ")
    assert message in r.err


def test_bad_design_gives_one_line_and_exit_2(cli, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(DESIGN.replace('capacitance = "1 nF"', 'capacitance = "1 nX"', 1))
    r = cli("frontend", bad)
    assert r.code == 2
    assert r.err == (
        f"piezo: error: {bad}: [sensor] capacitance = '1 nX': unknown unit in '1 nX'; "
        "expected a number with an optional SI prefix (f p n u m k M G T) and unit F\n"
    )
    assert r.out == ""
    r = cli("frontend", tmp_path / "none.toml")
    assert r.code == 2 and "cannot read design file: no such file" in r.err


def test_simulate_writes_volts(cli, design, tone, tmp_path):
    out = tmp_path / "sim.wav"
    # The samples read as pascals with 1 V/Pa: 0.5 Pa peak at 1 kHz.
    r = cli(
        "simulate", tone, "--frontend", design, "--out", out, "--sensitivity", "1 V/Pa", "--json"
    )
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["frames"] == FS // 4 and doc["output_unit"] == "V"
    assert doc["max_error_db"] < 0.05
    y, rate = sf.read(str(out))
    assert rate == FS and y.shape == (FS // 4, 2)
    # 0.5 Pa × 12 mV/Pa = 6 mV peak, inverted; the 0.16 Hz corner is 2e-8 dB down at 1 kHz
    # and the realisation within 0.05 dB: rtol 0.6 % covers it.
    assert np.max(np.abs(y[FS // 8 :, 0])) == pytest.approx(6e-3, rel=6e-3)
    assert doc["peak_v"][1] == pytest.approx(3e-3, rel=6e-3)
    assert doc["clipped_samples"] == [0, 0]
    # An existing output is not replaced without --force.
    r = cli("simulate", tone, "--frontend", design, "--out", out, "--sensitivity", "1 V/Pa")
    assert r.code == 2 and "use --force" in r.err
    r = cli(
        "simulate", tone, "--frontend", design, "--out", out, "--sensitivity", "1 V/Pa", "--force"
    )
    assert r.code == 0 and "high voltages" in r.out


def test_simulate_charge_input(cli, design, tone, tmp_path):
    out = tmp_path / "q.wav"
    r = cli(
        "simulate", tone, "--frontend", design, "--out", out, "--input", "charge",
        "--charge-unit", "1 nC", "--channel", "0", "--json",
    )  # fmt: skip
    assert r.code == 0, r.err
    # 0.5 V of samples = 0.5 nC peak through 1 mV/pC = 0.5 V.
    assert r.json()["peak_v"][0] == pytest.approx(0.5, rel=6e-3)


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        ((), "give its sensitivity"),
        (("--input", "charge"), "needs --charge-unit"),
        (("--input", "voltage"), "--input must be"),
    ],
)
def test_simulate_refusals(cli, design, tone, tmp_path, extra, message):
    r = cli("simulate", tone, "--frontend", design, "--out", tmp_path / "x.wav", *extra)
    assert r.code == 2 and message in r.err
    assert not (tmp_path / "x.wav").exists()


def test_simulate_needs_a_float_format(cli, design, tone, tmp_path):
    r = cli("simulate", tone, "--frontend", design, "--out", tmp_path / "x.flac")
    assert r.code == 2 and "float samples" in r.err


def test_equalize_reports_boost_and_keeps_the_scale(cli, design, tone, tmp_path):
    out = tmp_path / "eq.wav"
    r = cli("equalize", tone, "--frontend", design, "--corner", "0.05Hz", "--out", out, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    # Shelf depth 20 lg(fc/ft) with fc = 1/(2π) Hz and ft = 0.05 Hz.
    assert doc["boost_db"] == pytest.approx(20 * math.log10(1 / (2 * math.pi) / 0.05), rel=1e-9)
    assert doc["max_error_db"] < 0.05
    y, _ = sf.read(str(out))
    # Midband gain 1: a 1 kHz tone keeps its amplitude (0.5 of full scale) to within the
    # shelf's residue at 1 kHz, (0.16/1000)² → 1e-7 dB, and the 0.05 dB realisation.
    assert np.max(np.abs(y[FS // 8 :, 0])) == pytest.approx(0.5, rel=6e-3)
    r = cli("equalize", tone, "--frontend", design, "--corner", "1Hz", "--out", tmp_path / "e.wav")
    assert r.code == 2 and "not below the front-end's corner" in r.err
    r = cli(
        "equalize", tone, "--frontend", design, "--corner", "0.1mHz", "--out", tmp_path / "e.wav"
    )
    assert r.code == 2 and "limit 40 dB" in r.err
    r = cli(
        "equalize", tone, "--frontend", design, "--corner", "20 mHz", "--out", tmp_path / "t.wav"
    )
    assert r.code == 0 and "low-frequency boost up to 18.0 dB" in r.out


def test_equalize_json_names_what_it_reports_and_keeps_the_file_calibrated(cli, design, tmp_path):
    # Issue 12 §3.3: the peaks are the written file's sample peaks (fractions of full
    # scale, not "Pa"), the corner is the design's modelled one, and a sidecar profile
    # beside the output keeps it calibrated: levels of the equalized file equal the
    # input's (the shelf leaves a 1 kHz tone unchanged to 1e-7 dB, as above).
    t = np.arange(FS) / FS
    x = 0.5 * np.sin(2 * np.pi * 1000 * t)
    src = tmp_path / "pcm.wav"
    sf.write(str(src), x, FS, subtype="PCM_24")
    src.with_suffix(".toml").write_text(
        '[sensor]\nsensitivity = "12.5 mV/Pa"\n[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n',
        encoding="utf-8",
    )
    out = tmp_path / "eq.wav"
    r = cli("equalize", src, "--frontend", design, "--corner", "0.05Hz", "--out", out, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert "measured_corner_hz" not in doc and "peak" not in doc and "unit" not in doc
    assert doc["model_corner_hz"] == pytest.approx(1 / (2 * math.pi), rel=1e-6)
    assert doc["output_peak_fs"][0] == pytest.approx(0.5, rel=6e-3)
    # 0.5 FS × 2 V / 10 (20 dB) / 12.5 mV/Pa = 8 Pa.
    assert doc["output_peak_pa"][0] == pytest.approx(8.0, rel=6e-3)
    assert doc["profile_written"] == str(out.with_suffix(".toml"))
    before = cli("levels", src, "--json").json()
    after = cli("levels", out, "--json").json()
    assert after["unit"] == "Pa"
    assert after["channels"][0]["LZeq"] == pytest.approx(before["channels"][0]["LZeq"], abs=0.01)


def test_equalize_keeps_each_channels_own_sensor(cli, design, tmp_path):
    # Two accelerometers of different sensitivities (issue 13: per-channel chains): the
    # output keeps each channel's raw scale and its sidecar names each channel's sensor,
    # so levels of the equalized file equal the input's, channel by channel.
    t = np.arange(FS) / FS
    x = 0.5 * np.sin(2 * np.pi * 1000 * t)
    src = tmp_path / "acc.wav"
    sf.write(str(src), np.column_stack([x, 0.25 * x]), FS, subtype="PCM_24")
    src.with_suffix(".toml").write_text(
        '[sensor]\nquantity = "acceleration"\n[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n'
        '[channel.0]\nsensitivity = "10 mV/g"\n[channel.1]\nsensitivity = "50 mV/g"\n',
        encoding="utf-8",
    )
    out = tmp_path / "eq.wav"
    r = cli("equalize", src, "--frontend", design, "--corner", "0.05Hz", "--out", out, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    # 0.5 FS × 2 V / 10 / 10 mV/g = 10 g; 0.125 FS × 0.2 V / 50 mV/g = 0.5 g (g = 9.80665).
    np.testing.assert_allclose(doc["output_peak_m_per_s2"], [98.0665, 4.903325], rtol=6e-3)
    sidecar = out.with_suffix(".toml").read_text(encoding="utf-8")
    assert "[channel.0]" in sidecar and "[channel.1]" in sidecar and "mV/Pa" not in sidecar
    before = cli("levels", src, "--json").json()
    after = cli("levels", out, "--json").json()
    assert after["unit"] == "m/s²"
    for a, b in zip(after["channels"], before["channels"], strict=True):
        assert a["LZeq"] == pytest.approx(b["LZeq"], abs=0.01)


def test_equalize_refuses_channels_it_cannot_write_back(cli, design, tone, tmp_path):
    out = tmp_path / "eq.wav"
    r = cli("equalize", tone, "--frontend", design, "--corner", "0.05Hz", "--out", out,
            "--gain", "0=20 dB", "--gain", "1=0 dB")  # fmt: skip
    assert r.code == 2 and len(r.err.strip().splitlines()) == 1
    assert "different gains or full scales" in r.err and not out.exists()


def test_noise_density_table_at_chosen_frequencies(cli, design):
    # Issue 12 §3.17: the noise budget at chosen frequencies (--at), as a density table in
    # the JSON. The feedback resistor's Johnson current noise √(4kT/Rf) (Johnson 1928,
    # Nyquist 1928) flows through the feedback impedance Rf ∥ Cf, so its output density is
    # √(4kT/Rf)·Rf/|1 + j2πf·Rf·Cf| (1 GΩ, 1 nF here); k = 1.380649e-23 J/K (SI 2019).
    r = cli("frontend", design, "--json", "--at", "1Hz,100Hz,10kHz")
    assert r.code == 0, r.err
    doc = r.json()
    table = doc["noise_density"]
    assert table["frequency_hz"] == [1.0, 100.0, 10000.0]
    rf = next(s for s in table["sources"] if s["source"] == "feedback_resistance")
    f = np.array(table["frequency_hz"])
    kt4 = 4 * 1.380649e-23 * doc["temperature_k"]
    expected = math.sqrt(kt4 / 1e9) * 1e9 / np.abs(1 + 2j * np.pi * f * 1e9 * 1e-9)
    np.testing.assert_allclose(rf["output_v_per_sqrt_hz"], expected, rtol=1e-9)
    total = np.sqrt(sum(np.square(s["output_v_per_sqrt_hz"]) for s in table["sources"]))
    np.testing.assert_allclose(table["total_output_v_per_sqrt_hz"], total, rtol=1e-12)


def test_self_noise_band_is_an_option(cli, design):
    # Issue 12 §3.17: hydrophone and vibration bands differ from 20 Hz–20 kHz. The
    # unweighted self-noise is the input PSD integrated over the band, so a wider band
    # holds at least as much noise, and the band is stated.
    narrow = cli("frontend", design, "--json").json()
    wide = cli("frontend", design, "--json", "--noise-band", "1Hz:100kHz").json()
    assert narrow["noise_band_hz"] == [20.0, 20000.0]
    assert wide["noise_band_hz"] == [1.0, 100000.0]
    assert wide["self_noise_unweighted_db"] > narrow["self_noise_unweighted_db"]
    r = cli("frontend", design, "--noise-band", "1Hz:100kHz")
    assert "over 1 Hz–100 kHz" in r.out
    r = cli("frontend", design, "--noise-band", "10kHz:1kHz")
    assert r.code == 2 and "--noise-band" in r.err
