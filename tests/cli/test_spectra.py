"""Command line: piezo spectrum, piezo bands, piezo tone (exit codes, JSON contracts)."""

from __future__ import annotations

import csv
import inspect
import math

import numpy as np
import pytest
import soundfile as sf

from piezo.cli import bands as cli_bands
from piezo.cli import spectrum as cli_spectrum
from piezo.spectral.bands import BandAnalyzer
from piezo.spectral.welch import WelchPSD

FS = 48000
#: 1 Pa RMS = 20 lg(1 / 20e-6) = 93.979 dB re 20 µPa (ISO 1683:2015 reference).
ONE_PA_DB = 93.979


@pytest.fixture
def tone_wav(tmp_path):
    """2 s of a 1 kHz sine, 0.1 full scale RMS, with 1 % second harmonic; with
    --sensitivity 100 mV/Pa (full scale 1 V) it is a 1 Pa RMS tone."""
    t = np.arange(2 * FS) / FS
    x = 0.1 * math.sqrt(2) * (np.sin(2 * np.pi * 1000 * t) + 0.01 * np.sin(2 * np.pi * 2000 * t))
    # 10 ms raised-cosine fade-in: no switch-on click spreading into other bands.
    ramp = int(0.01 * FS)
    x[:ramp] *= 0.5 - 0.5 * np.cos(np.pi * np.arange(ramp) / ramp)
    path = tmp_path / "tone.wav"
    sf.write(str(path), np.column_stack([x, 0.5 * x]), FS, subtype="DOUBLE")
    return path


SENS = ("--sensitivity", "100 mV/Pa")


def test_spectrum_json_contract(cli, tone_wav, tmp_path):
    out_csv, out_png = tmp_path / "psd.csv", tmp_path / "psd.png"
    r = cli("spectrum", tone_wav, *SENS, "--json", "--resolution", "10Hz",
            "--csv", out_csv, "--plot", out_png)  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] == "Pa^2/Hz"
    assert doc["averages"] >= 1 and doc["enbw_hz"] > 0
    ch0 = doc["channels"][0]
    assert ch0["channel"] == 0
    assert len(ch0["frequency_hz"]) == len(ch0["psd"])
    assert doc["resolution_hz"] <= 10.0
    # Parseval over the PSD gives the tone's mean square (1 Pa² + 1e-4) within 0.5 %.
    assert ch0["mean_square"] == pytest.approx(1.0001, rel=0.005)
    assert doc["channels"][1]["mean_square"] == pytest.approx(0.25 * 1.0001, rel=0.005)
    lines = out_csv.read_text().splitlines()
    # The units of the columns are named above the header (docs/glossary.md).
    assert lines[:3] == ["# piezo spectrum table", "# ch0_psd: Pa^2/Hz",
                         "# ch0_psd_db: dB re (20 µPa)²/Hz"]  # fmt: skip
    rows = list(csv.reader(ln for ln in lines if not ln.startswith("#")))
    assert rows[0][:3] == ["frequency_hz", "ch0_psd", "ch0_psd_db"]
    assert len(rows) == len(ch0["psd"]) + 1
    assert out_png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_spectrum_uncalibrated_and_options(cli, tone_wav):
    r = cli("spectrum", tone_wav, "--json", "--window", "flattop", "--average", "median",
            "--overlap", "0.75", "--scaling", "spectrum", "--channel", "1")  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] == "V^2"
    assert [c["channel"] for c in doc["channels"]] == [1]
    # Issue 12 §3.13: no chi-square interval for a median, so no confidence object with
    # null bounds either: the key is null.
    assert doc["confidence"] is None


def test_spectrum_text_output(cli, tone_wav):
    r = cli("spectrum", tone_wav, *SENS)
    assert r.code == 0, r.err
    assert "averages" in r.out and "RMS Pa" in r.out


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--window", "kaiser"), "--window must be one of"),
        (("--average", "mode"), "--average must be one of"),
        (("--resolution", "0.01Hz"), "fewer than one segment"),
        (("--resolution", "fast"), "--resolution"),
    ],
)
def test_spectrum_bad_options_exit_2(cli, tone_wav, args, message):
    r = cli("spectrum", tone_wav, *args)
    assert r.code == 2
    assert message in r.err and r.err.startswith("piezo: error:")


def test_spectrum_defaults_match_library():
    params = inspect.signature(cli_spectrum.spectrum).parameters
    lib = inspect.signature(WelchPSD).parameters
    for name in ("window", "overlap", "average", "scaling"):
        assert params[name].default == lib[name].default, name


def test_bands_json_contract(cli, tone_wav, tmp_path):
    out_csv = tmp_path / "bands.csv"
    r = cli("bands", tone_wav, *SENS, "--json", "--fraction", "3", "--csv", out_csv)
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["fraction"] == 3
    bands = doc["channels"][0]["bands"]
    assert bands[0]["nominal_hz"] == 20 and bands[-1]["nominal_hz"] == 20000
    k = next(b for b in bands if b["nominal_hz"] == 1000)
    assert k["exact_hz"] == 1000.0
    # 1 Pa tone at 1 kHz: 93.98 dB in its band; the 2 s Leq includes the 10 ms fade-in
    # (-0.01 dB) and the filters' start-up: 0.05 dB.
    assert k["level_db"] == pytest.approx(ONE_PA_DB, abs=0.05)
    two_k = next(b for b in bands if b["nominal_hz"] == 2000)
    assert two_k["level_db"] == pytest.approx(ONE_PA_DB - 40, abs=0.05)  # 1 % harmonic
    lines = out_csv.read_text().splitlines()
    assert lines[:3] == ["# piezo band table", "# ch0_level_db: dB re 20 µPa",
                         "# ch1_level_db: dB re 20 µPa"]  # fmt: skip
    rows = list(csv.reader(ln for ln in lines if not ln.startswith("#")))
    assert rows[0] == ["nominal_hz", "exact_hz", "ch0_level_db", "ch1_level_db"]
    assert len(rows) == 32


def test_bands_history_and_range(cli, tone_wav):
    r = cli("bands", tone_wav, *SENS, "--json", "--fraction", "1", "--low", "250Hz",
            "--high", "4kHz", "--interval", "0.5s", "--channel", "0")  # fmt: skip
    assert r.code == 0, r.err
    doc = r.json()
    ch = doc["channels"][0]
    assert [b["nominal_hz"] for b in ch["bands"]] == [250, 500, 1000, 2000, 4000]
    assert ch["history"]["time_s"] == [0.0, 0.5, 1.0, 1.5]
    assert ch["history"]["level_db"][-1][2] == pytest.approx(ONE_PA_DB, abs=0.005)


def test_bands_bad_fraction_exit_2(cli, tone_wav):
    r = cli("bands", tone_wav, "--fraction", "5")
    assert r.code == 2 and "--fraction must be one of" in r.err


def test_bands_defaults_match_library():
    params = inspect.signature(cli_bands.bands).parameters
    lib = inspect.signature(BandAnalyzer).parameters
    assert params["fraction"].default == lib["fraction"].default


def test_tone_json_contract(cli, tone_wav):
    r = cli("tone", tone_wav, *SENS, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    c0, c1 = doc["channels"]
    assert c0["channel"] == 0
    assert c0["frequency_hz"] == pytest.approx(1000.0, rel=1e-6)
    assert c0["level_db"] == pytest.approx(ONE_PA_DB, abs=0.001)
    assert c1["level_db"] == pytest.approx(ONE_PA_DB - 6.0206, abs=0.001)  # half amplitude
    assert c0["thd_percent"] == pytest.approx(1.0, abs=0.01)
    assert c0["thd_n_percent"] == pytest.approx(100 * 0.01 / math.sqrt(1.0001), abs=0.01)
    assert c0["sinad_db"] == pytest.approx(40.0, abs=0.01)
    assert c0["snr_db"] is None
    assert doc["bandwidth_hz"] == [20.0, 20000.0]


def test_tone_with_noise_file(cli, tmp_path):
    rng = np.random.default_rng(8)
    t = np.arange(2 * FS) / FS
    noise = 1e-4 * rng.standard_normal(t.size)
    tone = 0.1 * math.sqrt(2) * np.sin(2 * np.pi * 1000 * t) + noise
    sf.write(str(tmp_path / "t.wav"), tone, FS, subtype="DOUBLE")
    sf.write(str(tmp_path / "n.wav"), noise, FS, subtype="DOUBLE")
    r = cli("tone", tmp_path / "t.wav", "--json", "--noise", tmp_path / "n.wav",
            "--bandwidth", "20Hz:20kHz")  # fmt: skip
    assert r.code == 0, r.err
    c = r.json()["channels"][0]
    # Tone 0.1 V RMS over white noise of 1e-4 V: noise in 20 Hz - 20 kHz is
    # 1e-8·19980/24000 V² (2σ²/fs density); SNR within 0.1 dB (2 s of averaging).
    want = 10 * math.log10(0.01 / (1e-8 * 19980 / 24000))
    assert c["snr_db"] == pytest.approx(want, abs=0.1)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--bandwidth", "20Hz-20kHz"), "--bandwidth must look like"),
        (("--expected", "5kHz"), "no tone found near 5000 Hz"),
    ],
)
def test_tone_errors_exit_2(cli, tone_wav, args, message):
    r = cli("tone", tone_wav, *args)
    assert r.code == 2
    assert message in r.err


def test_tone_text_output(cli, tone_wav):
    r = cli("tone", tone_wav, *SENS)
    assert r.code == 0, r.err
    assert "THD+N" in r.out and "93.98" in r.out


def test_bands_a_weighting(cli, tone_wav):
    r = cli("bands", tone_wav, *SENS, "--json", "--weighting", "A", "--channel", "0")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["weighting"] == "A"
    k = next(b for b in doc["channels"][0]["bands"] if b["nominal_hz"] == 1000)
    # A-weighting is 0 dB at 1 kHz (IEC 61672-1:2013 table 3).
    assert k["level_db"] == pytest.approx(ONE_PA_DB, abs=0.05)
    r = cli("bands", tone_wav, "--weighting", "B")
    assert r.code == 2 and "--weighting must be A, C or Z" in r.err


def test_bands_and_tone_default_their_upper_limit_from_the_sample_rate(cli, tmp_path):
    # Issue 12 §3.16: at 1 MS/s the defaults no longer stop at 20 kHz. A 40 kHz tone with
    # its 3rd harmonic (120 kHz, 1 %) at 1 MS/s: bands reach the 40 kHz band and beyond
    # (up to 0.475 fs, the bank's edge limit), tone counts H3 (in 20 Hz–450 kHz), and both
    # say that the limit came from the sample rate.
    import soundfile as sf

    fs = 1_000_000
    t = np.arange(fs // 2) / fs
    x = 0.5 * np.sin(2 * np.pi * 40000 * t) + 0.005 * np.sin(2 * np.pi * 120000 * t)
    path = tmp_path / "ultra.wav"
    sf.write(str(path), x, fs, subtype="FLOAT")
    r = cli("bands", path, "--fraction", "1", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["high_source"] == "sample rate" and doc["high_hz"] == pytest.approx(475000.0)
    nominal = [b["nominal_hz"] for b in doc["channels"][0]["bands"]]
    assert 31500 in nominal and 125000 in nominal and max(nominal) <= 250000
    r = cli("tone", path, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["bandwidth_source"] == "sample rate"
    assert doc["bandwidth_hz"] == [20.0, 450000.0]
    # THD = 0.005/0.5 = 1 % (IEC 60268-3 definition), within 0.01 percentage points.
    assert abs(doc["channels"][0]["thd_percent"] - 1.0) <= 0.01
    r = cli("bands", path, "--fraction", "1")
    assert "default for 1e+06 Hz sampling" in r.out


def test_bands_and_tone_end_their_defaults_at_the_sensor_range(cli, tone_wav, tmp_path):
    # Issue 12 defect 16: a profile that states the sensor's usable frequency range
    # (here a disc usable to 8 kHz, sampled at 48 kHz) ends the default bands and the
    # default THD+N bandwidth there, and says so; an explicit option overrides it.
    profile = tmp_path / "disc.toml"
    profile.write_text('[sensor]\nfrequency_range = "20 Hz .. 8 kHz"\n', encoding="utf-8")
    r = cli("bands", tone_wav, *SENS, "--profile", profile, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert (doc["high_hz"], doc["high_source"]) == (8000.0, "sensor")
    assert doc["channels"][0]["bands"][-1]["nominal_hz"] == 8000
    r = cli("bands", tone_wav, *SENS, "--profile", profile)
    text = " ".join(r.out.split())  # the terminal wraps long lines
    assert "bands up to 8000 Hz: where the sensor's frequency range ends" in text
    r = cli("bands", tone_wav, *SENS, "--profile", profile, "--high", "20kHz", "--json")
    doc = r.json()
    assert (doc["high_hz"], doc["high_source"]) == (20000.0, "option")
    assert doc["channels"][0]["bands"][-1]["nominal_hz"] == 20000
    r = cli("tone", tone_wav, *SENS, "--profile", profile, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert (doc["bandwidth_hz"], doc["bandwidth_source"]) == ([20.0, 8000.0], "sensor")
    # The 1 % second harmonic (2 kHz) lies inside the sensor's range: THD 1 %
    # (IEC 60268-3 definition), as with the 20 kHz default.
    assert doc["channels"][0]["thd_percent"] == pytest.approx(1.0, abs=0.01)
    r = cli("tone", tone_wav, *SENS, "--profile", profile, "--bandwidth", "20Hz:20kHz",
            "--json")  # fmt: skip
    assert (r.json()["bandwidth_hz"], r.json()["bandwidth_source"]) == ([20.0, 20000.0], "option")
    r = cli("tone", tone_wav, *SENS, "--profile", profile)
    text = " ".join(r.out.split())  # the terminal wraps long lines
    assert "20 Hz to 8000 Hz (default: up to where the sensor's frequency range ends)" in text
    r = cli("info", tone_wav, "--profile", profile, "--json")
    assert r.json()["chain"]["frequency_range_hz"] == [20.0, 8000.0]
    r = cli("info", tone_wav, "--profile", profile)
    assert "frequency range 20 Hz .. 8000 Hz" in " ".join(r.out.split())


def test_sensor_range_of_several_channels(cli, tone_wav, tmp_path):
    # Channel 1's sensor is usable to 4 kHz, channel 0's to 8 kHz: one bank serves both,
    # so the wider range applies (no channel's usable band is cut). A channel whose
    # sensor states no range leaves the sample rate's default.
    profile = tmp_path / "two.toml"
    profile.write_text(
        '[sensor]\nfrequency_range = "20 Hz .. 8 kHz"\n'
        '[channel.1]\nfrequency_range = "20 Hz .. 4 kHz"\n',
        encoding="utf-8",
    )
    doc = cli("bands", tone_wav, "--profile", profile, "--json").json()
    assert (doc["high_hz"], doc["high_source"]) == (8000.0, "sensor")
    doc = cli("bands", tone_wav, "--profile", profile, "--channel", "1", "--json").json()
    assert (doc["high_hz"], doc["high_source"]) == (4000.0, "sensor")
    profile.write_text('[channel.1]\nfrequency_range = "20 Hz .. 4 kHz"\n', "utf-8")
    doc = cli("bands", tone_wav, "--profile", profile, "--json").json()
    assert (doc["high_hz"], doc["high_source"]) == (20000.0, "sample rate")


@pytest.mark.parametrize(
    ("value", "message"),
    [
        ('"8 kHz"', "sensor.frequency_range must look like 'LOW .. HIGH'"),
        ('"8 kHz .. 20 Hz"', "the low end must lie below the high end"),
    ],
)
def test_malformed_sensor_range_is_refused_in_one_line(cli, tone_wav, tmp_path, value, message):
    profile = tmp_path / "bad.toml"
    profile.write_text(f"[sensor]\nfrequency_range = {value}\n", encoding="utf-8")
    for command in ("bands", "tone", "info"):
        r = cli(command, tone_wav, "--profile", profile)
        assert r.code == 2
        lines = r.err.strip().splitlines()
        assert len(lines) == 1 and str(profile) in lines[0] and message in lines[0]


def test_sensor_range_below_the_lowest_band_is_refused(cli, tone_wav, tmp_path):
    # A seismic sensor usable to 10 Hz: the default bands start at 20 Hz, so there is
    # nothing to show without options; the message says what to give.
    profile = tmp_path / "geo.toml"
    profile.write_text('[sensor]\nfrequency_range = "0.1 Hz .. 10 Hz"\n', encoding="utf-8")
    r = cli("bands", tone_wav, "--profile", profile)
    assert r.code == 2 and "the sensor's frequency range ends at 10 Hz" in r.err
    r = cli("tone", tone_wav, "--profile", profile)
    assert r.code == 2 and "--bandwidth" in r.err
    r = cli("bands", tone_wav, "--profile", profile, "--low", "1Hz", "--json")
    assert r.code == 0, r.err
    assert r.json()["channels"][0]["bands"][-1]["nominal_hz"] == 10


def test_bands_history_states_interval_durations(cli, tone_wav):
    # Issue 12 §3.17: a 2 s recording in 0.75 s intervals has a last interval of 0.5 s;
    # the history says so beside each start time.
    r = cli("bands", tone_wav, *SENS, "--json", "--fraction", "1", "--low", "500Hz",
            "--high", "2kHz", "--interval", "0.75s")  # fmt: skip
    assert r.code == 0, r.err
    hist = r.json()["channels"][0]["history"]
    assert hist["time_s"] == [0.0, 0.75, 1.5]
    assert hist["interval_duration_s"] == pytest.approx([0.75, 0.75, 0.5])


# --- distinct peaks (issue 12 §3.6) ---------------------------------------------------

#: Rate of the peak scene: a high-rate capture, as the issue's 1 MS/s file.
PEAK_FS = 1_000_000
#: The scene's distinct lines, hertz: a resonance (band-pass, Q 20) and two tones.
PEAK_LINES_HZ = (40_000.0, 100_000.0, 250_000.0)


@pytest.fixture
def peak_wav(tmp_path):
    """1 s at 1 MS/s: white noise (0.5 mV RMS), noise through a 40 kHz resonance (Q 20,
    about 20 dB above the floor at its peak) and tones at 100 kHz (1 mV) and 250 kHz
    (0.3 mV). Invented for the test."""
    from scipy import signal

    rng = np.random.default_rng(12)
    n = PEAK_FS
    b, a = signal.iirpeak(PEAK_LINES_HZ[0], 20.0, PEAK_FS)
    x = 0.5e-3 * rng.standard_normal(n) + signal.lfilter(b, a, 5e-3 * rng.standard_normal(n))
    t = np.arange(n) / PEAK_FS
    x += 1e-3 * np.sin(2 * np.pi * PEAK_LINES_HZ[1] * t)
    x += 3e-4 * np.sin(2 * np.pi * PEAK_LINES_HZ[2] * t)
    path = tmp_path / "peaks.wav"
    sf.write(str(path), x, PEAK_FS, subtype="FLOAT")
    return path


def _near_lines(found_hz, tolerance_hz):
    """Each expected line matched by exactly one found peak, and nothing else found."""
    assert len(found_hz) == len(PEAK_LINES_HZ), found_hz
    for f0 in PEAK_LINES_HZ:
        assert sum(abs(f - f0) <= tolerance_hz for f in found_hz) == 1, (f0, found_hz)


# Tolerance: a tone's strongest bin is within half a bin of it; the resonance's within
# the width where its band-pass response is 1 dB down, f0/(2Q)·0.509 = 509 Hz (about two
# 244 Hz bins), inside which the estimate's scatter (±0.4 dB, 95 %) can move the maximum.
_PEAK_TOLERANCE_HZ = 509.0


def test_spectrum_lists_distinct_peaks(cli, peak_wav):
    """The terminal lists exactly the three lines, one number format (issue 12 §3.6:
    four bins of one resonance and noise bins were listed, "40039" beside "4.6021e+05")."""
    r = cli("spectrum", peak_wav)
    assert r.code == 0, r.err
    import re

    # One row per peak: frequency (Hz, fixed point), PSD level (dB), above floor (dB).
    rows = re.findall(r"(?m)(\d+(?:\.\d+)?) Hz\s+(-?\d+\.\d) dB\s+\+(\d+\.\d) dB\s*$", r.out)
    _near_lines([float(f) for f, _, _ in rows], _PEAK_TOLERANCE_HZ)
    assert "e+" not in r.out


def test_spectrum_json_peaks(cli, peak_wav):
    r = cli("spectrum", peak_wav, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    peaks = doc["channels"][0]["peaks"]
    _near_lines([p["frequency_hz"] for p in peaks], _PEAK_TOLERANCE_HZ)
    # Strongest first; each stands above the floor by at least the rule's margin.
    levels = [p["level_db"] for p in peaks]
    assert levels == sorted(levels, reverse=True)
    assert all(p["above_floor_db"] >= doc["peak_margin_db"] for p in peaks)


def test_spectrum_plot_keeps_a_csv_time_offset(cli, tmp_path):
    """Issue 12 §3.16: the spectrogram of ``spectrum --plot`` runs on the recording's
    time, which starts at the CSV time column's first value (a -100 µs pre-trigger)."""
    from numpy.testing import assert_allclose

    from piezo.plots import style

    fs, start = 50000.0, -1e-4
    x = 0.1 * np.random.default_rng(2).standard_normal(25000)
    path = tmp_path / "scope.csv"
    rows = [f"{start + i / fs:.7f},{v:.6f}" for i, v in enumerate(x)]
    path.write_text("Time (s),Disc (V)\n" + "\n".join(rows) + "\n", encoding="utf-8")
    wav = tmp_path / "same.wav"
    sf.write(str(wav), x, int(fs), subtype="FLOAT")  # the same samples, from time 0
    edges = []
    for src, out in ((path, "csv.png"), (wav, "wav.png")):
        with style.capture_figures() as figs:
            r = cli("spectrum", src, "--plot", tmp_path / out)
        assert r.code == 0, r.err
        (fig,) = figs
        mesh = fig.axes[1].collections[0]  # the spectrogram's cells
        edges.append(mesh.get_coordinates()[0, :, 0])
    # The same cells, shifted by the offset: rounding of the time column only.
    assert_allclose(edges[0], edges[1] + start, rtol=0, atol=1e-9)


def test_spectrum_gives_channels_of_different_quantities_each_in_its_own_unit(cli, tmp_path):
    # A pressure channel (10 mV/Pa) and an accelerometer channel (10 mV/g) see the same
    # 0.1 V RMS tone: 10 Pa RMS is 20·lg(10 / 20 µPa) = 113.98 dB re 20 µPa, and 10 g =
    # 98.0665 m/s² (g = 9.80665 m/s², ISO 80000-3) is 20·lg(98.0665 / 1 µm/s²) =
    # 159.83 dB re 1 µm/s² (references of ISO 1683:2015).
    fs = 48000
    t = np.arange(2 * fs) / fs
    x = 0.1 * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "mixed.wav"
    sf.write(path, np.column_stack([x, x]), fs, subtype="FLOAT")
    (tmp_path / "mixed.toml").write_text(
        '[channel.0]\nquantity = "pressure"\nsensitivity = "10 mV/Pa"\n'
        '[channel.1]\nquantity = "acceleration"\nsensitivity = "10 mV/g"\n',
        encoding="utf-8",
    )
    csv_path = tmp_path / "psd.csv"
    r = cli("spectrum", path, "--json", "--csv", csv_path)
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["unit"] is None and doc["level_unit"] is None
    pressure, accel = doc["channels"]
    assert (pressure["quantity"], pressure["reference_pa"]) == ("pressure", 2e-5)
    assert (accel["quantity"], accel["reference_m_per_s2"]) == ("acceleration", 1e-6)
    # Parseval: the mean square of each channel in its own unit.
    assert pressure["mean_square"] == pytest.approx(100.0, rel=1e-3)
    assert accel["mean_square"] == pytest.approx(98.0665**2, rel=1e-3)
    assert pressure["peaks"][0]["frequency_hz"] == pytest.approx(1000, abs=12)
    text = csv_path.read_text(encoding="utf-8")
    assert (
        "# ch0_psd_db: dB re (20 µPa)²/Hz" in text and "# ch1_psd_db: dB re (1 µm/s²)²/Hz" in text
    )
    shown = cli("spectrum", path)
    assert "113.98 dB re 20 µPa" in shown.out and "159.83 dB re 1 µm/s²" in shown.out
    refused = cli("spectrum", path, "--plot", tmp_path / "psd.png")
    assert refused.code == 2 and "--channel N" in refused.err
    assert not (tmp_path / "psd.png").exists()
