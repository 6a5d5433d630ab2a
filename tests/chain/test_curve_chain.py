"""Response curves in the calibrated path: profile key, option, correction, coverage."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

import piezo
from tests.paths import RECORDINGS

FS = 48000


def sensor_response_sos() -> np.ndarray:
    """A sensor of our own: 2nd-order Butterworth high-pass at 30 Hz (scipy.signal.butter)
    cascaded with a mounted resonance at 9 kHz, Q = 4 (analog 2nd-order low-pass
    w0²/(s² + s·w0/Q + w0²), made digital by scipy.signal.bilinear_zpk with the
    resonance frequency pre-warped)."""
    hp = signal.butter(2, 30.0, "highpass", fs=FS, output="sos")
    w0 = 2 * FS * np.tan(np.pi * 9000.0 / FS)  # pre-warped, rad/s
    poles = np.roots([1.0, w0 / 4.0, w0**2])
    z, p, k = signal.bilinear_zpk([], poles, w0**2, FS)
    res = signal.zpk2sos(z, p, k)
    return np.vstack([hp, res])


def chart_text(sos: np.ndarray) -> str:
    """The response as a chart: 1/24-octave points from 10 Hz to 20 kHz, dB and degrees."""
    f = 10.0 * 2.0 ** (np.arange(0, 24 * np.log2(20000 / 10) + 1) / 24)
    _, h = signal.sosfreqz(sos, worN=f, fs=FS)
    phase = np.rad2deg(np.unwrap(np.angle(h)))
    rows = [
        f"{fi:.4f},{20 * np.log10(abs(hi)):.5f},{ph:.4f}"
        for fi, hi, ph in zip(f, h, phase, strict=True)
    ]
    return "# chart of a simulated sensor\nfrequency_hz,relative_db,phase_deg\n" + "\n".join(rows)


@pytest.fixture
def bench(tmp_path, rng):
    """White noise (the 'true' quantity, in volts at 1 V/unit) and the same noise through
    the sensor's response, 12 s each, float WAV; the matching chart."""
    x = 0.1 * rng.standard_normal(12 * FS)
    sos = sensor_response_sos()
    sf.write(tmp_path / "true.wav", x, FS, subtype="FLOAT")
    sf.write(tmp_path / "sensed.wav", signal.sosfilt(sos, x), FS, subtype="FLOAT")
    (tmp_path / "chart.csv").write_text(chart_text(sos), encoding="utf-8")
    return tmp_path


def test_the_curve_gives_back_the_true_band_levels(cli, bench):
    opts = ["--fraction", "3", "--low", "20Hz", "--high", "12.5kHz", "--json"]
    true = cli("bands", bench / "true.wav", "--sensitivity", "10 mV/g", *opts)
    raw = cli("bands", bench / "sensed.wav", "--sensitivity", "10 mV/g", *opts)
    fixed = cli(
        "bands", bench / "sensed.wav", "--sensitivity", "10 mV/g",
        "--response-curve", bench / "chart.csv", *opts,
    )  # fmt: skip
    assert fixed.code == 0, fixed.err

    def levels(r):
        return np.array([b["level_db"] for b in r.json()["channels"][0]["bands"]])

    t, r, c = levels(true), levels(raw), levels(fixed)
    # The response is far from flat (about +12 dB at the resonance, -7 dB at 20 Hz) ...
    assert np.max(np.abs(r - t)) > 6.0
    # ... and the corrected band levels equal the true ones within 0.2 dB (the issue's
    # bound). What is left: the chart's linear-in-dB interpolation between 1/24-octave
    # points and the FIR's finite length (1 Hz resolution); the random error of the
    # noise cancels, as both results come from the same samples.
    np.testing.assert_allclose(c, t, atol=0.2)
    assert fixed.json()["response_curve_notes"] == []  # 10 Hz to 20 kHz covers the bands


def test_streamed_correction_equals_whole_file(bench):
    src = piezo.open(bench / "sensed.wav", response_curve=bench / "chart.csv")
    small = np.concatenate(list(src.blocks(7919)))
    whole = np.concatenate(list(src.blocks(12 * FS)))
    assert small.shape == whole.shape == (12 * FS, 1)  # delay compensated: same length
    np.testing.assert_allclose(small, whole, atol=1e-12)


def test_profile_curve_relative_to_the_profile_and_coverage(cli, bench, tmp_path):
    folder = tmp_path / "charts"
    folder.mkdir()
    (folder / "narrow.csv").write_text(
        "frequency_hz,relative_db\n100,0\n1000,3\n", encoding="utf-8"
    )
    prof = tmp_path / "sensor.toml"
    prof.write_text('[sensor]\nsensitivity = "10 mV/Pa"\nresponse_curve = "charts/narrow.csv"\n')
    doc = cli("info", bench / "true.wav", "--profile", prof, "--json").json()
    chain = doc["channels"][0]["chain"]
    assert chain["response_curve"] == str(folder / "narrow.csv")
    assert chain["provenance"]["response_curve"] == str(prof)
    bands = cli("bands", bench / "true.wav", "--profile", prof, "--fraction", "1", "--json").json()
    (note,) = bands["response_curve_notes"]
    assert note.startswith("ch 0: response curve") and "100 Hz to 1 kHz" in note
    assert "below and above" in note


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("frequency_hz,relative_db\n100,0\n50,1\n", "line 3: frequencies must increase"),
        ("frequency_hz,relative_db\n100,0\n200,nan\n", "line 3: values must be finite"),
        ("frequency_hz,relative_db\n100,0\n200,45\n", "exceeds the ±40 dB"),
    ],
)
def test_bad_curves_are_refused_in_one_line(cli, bench, text, message):
    chart = bench / "bad.csv"
    chart.write_text(text, encoding="utf-8")
    r = cli("levels", bench / "true.wav", "--response-curve", chart)
    assert r.code == 2
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and str(chart) in lines[0] and message in lines[0]


def test_demo_bench_has_a_curve_on_the_reference_channel_only(cli):
    doc = cli("info", RECORDINGS / "accel-bench.flac", "--json").json()
    ref, unit = doc["channels"]
    assert ref["quantity"] == unit["quantity"] == "acceleration"
    assert ref["chain"]["response_curve"].endswith("accel-bench-reference-chart.csv")
    assert ref["chain"]["provenance"]["response_curve"].endswith("[channel.0]")
    assert unit["chain"]["response_curve"] is None
    assert ref["chain"]["sensitivity"].endswith("(10.15 mV/g)")


def test_the_worked_example_of_the_profile_docs(cli, tmp_path):
    # docs/profiles.md: 10 mV/g, 20 dB gain, 2 V full scale, chart +3 dB at 8 kHz; 2 g RMS
    # at 8 kHz reads 145.85 dB re 1 µm/s² once corrected (g = 9.80665 m/s², exact).
    adc_rms_v = 2.0 * 10e-3 * 10 ** (3 / 20) * 10.0
    t = np.arange(4 * FS) / FS
    path = tmp_path / "vib.wav"
    sf.write(path, adc_rms_v / 2.0 * np.sqrt(2) * np.sin(2 * np.pi * 8000 * t), FS, "FLOAT")
    chart = tmp_path / "chart.csv"
    chart.write_text("frequency_hz,relative_db\n10,0\n1000,0\n8000,3\n10000,3\n", "utf-8")
    opts = ["--sensitivity", "10 mV/g", "--gain", "20 dB", "--full-scale", "2 V", "--json"]
    plain = cli("levels", path, *opts).json()["channels"][0]["LZeq"]
    fixed = cli("levels", path, *opts, "--response-curve", chart).json()["channels"][0]["LZeq"]
    expected = 20 * np.log10(2 * 9.80665 / 1e-6)
    assert expected == pytest.approx(145.85, abs=0.005)
    assert plain == pytest.approx(expected + 3.0, abs=0.01)
    # 0.02 dB: the FIR's ripple at 8 kHz is far smaller; the file's edges (a half-length of
    # 0.68 s seen against silence) cost less than that over 4 s.
    assert fixed == pytest.approx(expected, abs=0.02)
