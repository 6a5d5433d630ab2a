"""Response curves (calibration charts) and their streamed correction (piezo.chain.curve)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal

from piezo.chain.curve import (
    MAX_CORRECTION_DB,
    CurveCorrection,
    ResponseCurve,
    parse_response_curve,
)
from piezo.errors import InputError

FS = 48000.0


def _sensor():
    """A sensor of our own: flat, with a +8 dB resonance at 9 kHz.

    scipy.signal.iirpeak(9000, Q=4, fs=48000) gives a unit-peak resonator P(z); the
    sensor is H(z) = 1 + 1.5 P(z), i.e. b = a_p + 1.5 b_p over a_p.
    """
    b_p, a_p = signal.iirpeak(9000.0, 4.0, fs=FS)
    return a_p + 1.5 * b_p, a_p


def _chart(b, a, *, phase: bool) -> ResponseCurve:
    # A chart as a calibration lab would give it: 1/24-octave points, 10 Hz - 20 kHz.
    f = 10.0 * 2.0 ** (np.arange(0, 24 * np.log2(20000 / 10) + 1) / 24)
    _, h = signal.freqz(b, a, worN=f, fs=FS)
    return ResponseCurve(
        f, 20 * np.log10(np.abs(h)), np.degrees(np.unwrap(np.angle(h))) if phase else None
    )


def _third_octave_powers(x: np.ndarray) -> np.ndarray:
    # Independent of piezo: scipy's Welch PSD summed over IEC 61260-1:2014 base-10 band
    # edges (f_m · 10^(∓0.05)), bands 31.5 Hz - 16 kHz.
    f, p = signal.welch(x, FS, nperseg=16384)
    centres = 1000.0 * 10.0 ** (np.arange(-15, 13) / 10)
    return np.array([p[(f >= c * 10**-0.05) & (f < c * 10**0.05)].sum() for c in centres])


def test_correction_gives_back_true_band_levels(rng):
    # The check: noise passed through a known response (scipy design above),
    # corrected by that response's chart, has the band levels of the noise itself within
    # 0.2 dB. Five seconds of noise: the Welch estimate of each band's power has a
    # random error that cancels here, since both band sets come from the same noise.
    b, a = _sensor()
    x = rng.standard_normal(int(5 * FS))
    y = signal.lfilter(b, a, x)
    corr = CurveCorrection(_chart(b, a, phase=False), FS, 1)
    z = np.concatenate(list(corr.blocks(iter(np.array_split(y[:, None], 7)))))[:, 0]
    assert z.shape == x.shape
    diff_db = 10 * np.log10(_third_octave_powers(z) / _third_octave_powers(x))
    assert np.max(np.abs(diff_db)) < 0.2, diff_db
    # Without the correction the resonance band is far off (the test can fail).
    raw_db = 10 * np.log10(_third_octave_powers(y) / _third_octave_powers(x))
    assert np.max(raw_db) > 6.0


def test_correction_with_phase_gives_back_the_waveform(rng):
    # With the chart's phase, the correction inverts H(z) itself: the corrected stream
    # equals the noise sample for sample. Limits: the chart's interpolation between
    # 1/24-octave points and the FIR's truncation; content below 10 Hz and above 20 kHz
    # (outside the chart, end values held) is excluded by band-limiting both signals
    # to 20 Hz - 18 kHz with the same zero-phase Butterworth filter before comparing.
    b, a = _sensor()
    x = rng.standard_normal(int(2 * FS))
    y = signal.lfilter(b, a, x)
    corr = CurveCorrection(_chart(b, a, phase=True), FS, 1)
    z = np.concatenate(list(corr.blocks(iter([y[:, None]]))))[:, 0]
    band = signal.butter(8, [20.0, 18000.0], "bandpass", fs=FS, output="sos")
    xb, zb = signal.sosfiltfilt(band, x), signal.sosfiltfilt(band, z)
    core = slice(int(0.2 * FS), int(1.8 * FS))  # away from the edges' transients
    error_db = 10 * np.log10(np.mean((zb - xb)[core] ** 2) / np.mean(xb[core] ** 2))
    # -30 dB residual = 3 % of the RMS: ~0.3 dB / 2° of combined magnitude and phase
    # error, an order below what a calibration chart itself is certain to.
    assert error_db < -30.0, error_db


@settings(max_examples=25)
@given(cuts=st.lists(st.integers(min_value=0, max_value=3000), max_size=6))
def test_streaming_equals_one_block(cuts):
    # Property: any split into blocks gives the whole-array result (to FFT rounding).
    curve = parse_response_curve("frequency_hz,relative_db\n50,-3\n2000,0\n15000,4")
    x = np.random.default_rng(5).standard_normal((3000, 2))
    whole = np.concatenate(list(CurveCorrection(curve, FS, 2, taps=1025).blocks(iter([x]))))
    parts = np.split(x, sorted(set(cuts)))
    split = list(CurveCorrection(curve, FS, 2, taps=1025).blocks(iter(parts)))
    streamed = np.concatenate(split) if split else np.zeros((0, 2))
    assert streamed.shape == x.shape
    assert_allclose(streamed, whole, atol=1e-12)


def test_short_stream_keeps_its_length():
    curve = parse_response_curve("frequency_hz,relative_db\n10,0\n20000,0")
    x = np.arange(10.0)[:, None]
    out = np.concatenate(list(CurveCorrection(curve, FS, 1, taps=101).blocks(iter([x]))))
    # Flat chart: the FIR is a windowed unit impulse at its centre, so the output is the
    # input (Kaiser window value 1 at the centre tap).
    assert_allclose(out, x, atol=1e-12)


def test_interpolation_is_linear_in_log_frequency_and_holds_ends():
    curve = parse_response_curve("frequency_hz,relative_db,phase_deg\n100,0,0\n10000,20,-90")
    assert_allclose(curve.relative_db_at(np.array([1000.0, 10.0, 1e5])), [10.0, 0.0, 20.0])
    assert_allclose(curve.phase_deg_at(np.array([1000.0])), [-45.0])
    assert curve.coverage_note(100.0, 10000.0) is None
    assert curve.coverage_note(20.0, 10000.0) == (
        "chart covers 100 Hz to 10 kHz; end values held below"
    )


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("frequency_hz,relative_db\n100,0\n100,1", "line 3: frequencies must increase"),
        ("frequency_hz,relative_db\n100,0\n200,nan", "line 3: values must be finite"),
        ("frequency_hz,relative_db\n100,0\n200,x", "line 3: not a number"),
        ("frequency_hz,relative_db\n100,0\n200,41", "exceeds the ±40 dB"),
        ("frequency_hz,relative_db\n-5,0\n200,1", "line 2: frequency must be positive"),
        ("frequency_hz,level\n100,0\n200,1", "line 1: the header must name"),
        ("frequency_hz,relative_db\n100,0", "at least two points"),
        ("frequency_hz,relative_db\n100,0\n200,1,5", "line 3: 3 values for 2 columns"),
    ],
)
def test_bad_curves_are_refused_with_the_line(text, message):
    with pytest.raises(InputError, match=message) as info:
        parse_response_curve(text, source="chart.csv")
    assert str(info.value).startswith("chart.csv: ")


def test_bound_is_forty_db():
    assert MAX_CORRECTION_DB == 40.0
    parse_response_curve("frequency_hz,relative_db\n100,-40\n200,40")


@given(
    points=st.lists(
        st.tuples(
            st.floats(min_value=1.0, max_value=1e5),
            st.floats(min_value=-40, max_value=40),
            st.floats(min_value=-180, max_value=180),
        ),
        min_size=2,
        max_size=30,
        unique_by=lambda p: round(p[0], 6),
    )
)
def test_written_chart_reads_back(points):
    # Property: a chart written with repr() floats reads back exactly.
    points = sorted(points)
    text = "# written by a test\nphase_deg,frequency_hz,relative_db\n" + "\n".join(
        f"{p!r},{f!r},{r!r}" for f, r, p in points
    )
    curve = parse_response_curve(text)
    assert curve.frequency_hz.tolist() == [p[0] for p in points]
    assert curve.relative_db.tolist() == [p[1] for p in points]
    assert curve.phase_deg is not None and curve.phase_deg.tolist() == [p[2] for p in points]
