"""Tests of piezo.levels.meter against IEC 61672-1:2013, physics invariants and PyOctaveBand.

Check values come from IEC 61672-1:2013 (Annex E formulas, the toneburst and C-peak
tables), recomputed from the defining formulas where a table is rounded.
"""

from __future__ import annotations

import math

import numpy as np
import pyoctaveband
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal

from piezo.errors import InputError
from piezo.levels.meter import (
    PERCENTILES,
    LevelMeter,
    sound_levels,
)
from piezo.levels.weighting import ExponentialAverager, weighting_db, weighting_sos

P0 = 20e-6


def sine(freq_hz: float, rms: float, duration_s: float, fs: float) -> np.ndarray:
    t = np.arange(round(duration_s * fs)) / fs
    return rms * math.sqrt(2) * np.sin(2 * np.pi * freq_hz * t)


@pytest.mark.parametrize("fs", [44100.0, 48000.0])
def test_1khz_sine_of_1_pa_reads_93_98_db(fs):
    # 1 Pa RMS = 93.979 dB re 20 uPa (computed); A and C are 0 dB at 1 kHz (Table 3).
    res = sound_levels(sine(1000, 1.0, 2.0, fs), fs)
    ch = res.channels[0]
    for level in (ch.LZeq, ch.LAeq, ch.LCeq):
        assert abs(level - 93.98) <= 0.02  # the tolerance; filter start-up < 0.002
    assert res.duration_s == 2.0 and res.reference == P0


def test_100hz_a_weighting_is_19_1_db_lower():
    # IEC 61672-1:2013 Table 3: A(100 Hz) = -19.1 dB, C(100 Hz) = -0.3 dB. Tolerance: half
    # the table's 0.1 dB rounding step plus 0.01 dB for the digital filter.
    ch = sound_levels(sine(100, 1.0, 2.0, 48000.0), 48000.0).channels[0]
    assert abs((ch.LAeq - ch.LZeq) - (-19.1)) <= 0.06
    assert abs((ch.LCeq - ch.LZeq) - (-0.3)) <= 0.06


def test_peak_minus_rms_of_steady_sine_is_3_01_db():
    # Steady sine: L_peak - L_eq = 20 lg sqrt(2) = 3.01 dB. At 1 kHz and 48 kHz a sample
    # falls on every crest, so the sample peak is the true peak (rounding only).
    ch = sound_levels(sine(1000, 0.3, 1.0, 48000.0), 48000.0).channels[0]
    assert abs(ch.LZpeak - ch.LZeq - 3.0103) < 1e-6
    assert abs(ch.crest_factor - math.sqrt(2)) < 1e-9
    assert abs(ch.crest_factor_db - 3.0103) < 1e-4


def test_lae_is_laeq_plus_ten_lg_duration():
    # L_AE = L_Aeq,T + 10 lg(T / 1 s) (IEC 61672-1:2013, definition of sound exposure level).
    ch = sound_levels(sine(500, 0.2, 2.5, 48000.0), 48000.0).channels[0]
    assert abs(ch.LAE - (ch.LAeq + 10 * math.log10(2.5))) < 1e-9


def _toneburst(tb_s: float, fs: float, pre_s: float = 0.3, post_s: float = 0.6) -> np.ndarray:
    """4 kHz burst of whole cycles from silence, starting and ending at zero crossings."""
    n = round(tb_s * fs)
    x = np.zeros(round(pre_s * fs) + n + round(post_s * fs))
    x[round(pre_s * fs) : round(pre_s * fs) + n] = np.sin(2 * np.pi * 4000 * np.arange(n) / fs)
    return x


def _ideal_a_spread_db(tb_s: float, fs: float, weighting: str = "A") -> float:
    """Energy change of the burst by the ideal A weighting relative to a steady 4 kHz tone.

    The reference values assume the weighted burst energy scales with Tb. A burst of a
    few cycles has a broad spectrum, and the analytic A curve (Annex E, evaluated here by
    FFT) takes up to 0.12 dB from it at 0.25 ms. It is a property of the weighting, not of
    the meter, so it is added to the reference before the +-0.1 dB comparison.
    """
    n_fft = 1 << 20
    n = round(tb_s * fs)
    x = np.zeros(n_fft)
    x[:n] = np.sin(2 * np.pi * 4000 * np.arange(n) / fs)
    spec = np.abs(np.fft.rfft(x)) ** 2
    f = np.fft.rfftfreq(n_fft, 1 / fs)
    gain = np.zeros_like(f)
    gain[1:] = 10 ** (weighting_db(f[1:], weighting=weighting) / 10)
    return float(
        10 * np.log10(np.sum(spec * gain) / np.sum(spec))
        - weighting_db(4000.0, weighting=weighting)
    )


# IEC 61672-1:2013 toneburst response (4 kHz, from silence), relative to the steady level:
# Tb (s), L_AFmax - L_A, L_ASmax - L_A (None: not specified), L_AE - L_A; with the
# class 1 limits (upper, lower) for F and S. Values are delta = 10 lg(1 - exp(-Tb/tau))
# and 10 lg(Tb / 1 s), rounded to 0.1 dB by the standard (V).
TONEBURSTS = [
    (1.0, 0.0, -2.0, 0.0, (0.5, -0.5), (0.5, -0.5)),
    (0.5, -0.1, -4.1, -3.0, (0.5, -0.5), (0.5, -0.5)),
    (0.2, -1.0, -7.4, -7.0, (0.5, -0.5), (0.5, -0.5)),
    (0.1, -2.6, -10.2, -10.0, (1.0, -1.0), (1.0, -1.0)),
    (0.05, -4.8, -13.1, -13.0, (1.0, -1.0), (1.0, -1.0)),
    (0.02, -8.3, -17.0, -17.0, (1.0, -1.0), (1.0, -1.5)),
    (0.01, -11.1, -20.0, -20.0, (1.0, -1.0), (1.0, -2.0)),
    (0.005, -14.1, -23.0, -23.0, (1.0, -1.0), (1.0, -2.5)),
    (0.002, -18.0, -27.0, -27.0, (1.0, -1.5), (1.0, -3.0)),
    (0.001, -21.0, None, -30.0, (1.0, -2.0), None),
    (0.0005, -24.0, None, -33.0, (1.0, -2.5), None),
    (0.00025, -27.0, None, -36.0, (1.0, -3.0), None),
]


def test_toneburst_response():
    fs = 48000.0
    steady = sound_levels(sine(4000, 1 / math.sqrt(2), 2.0, fs), fs).channels[0].LAeq
    for tb, ref_f, ref_s, ref_e, lim_f, lim_s in TONEBURSTS:
        ch = sound_levels(_toneburst(tb, fs), fs).channels[0]
        spread = _ideal_a_spread_db(tb, fs)
        got_f, got_e = ch.LAFmax - steady, ch.LAE - steady
        # Within 0.1 dB of the reference (the target), after the ideal
        # weighting's own effect on a short burst (<= 0.03 dB for Tb >= 2 ms).
        assert abs(got_f - (ref_f + spread)) <= 0.1, (tb, got_f)
        assert abs(got_e - (ref_e + spread)) <= 0.1, (tb, got_e)
        # And inside the class 1 acceptance limits without any correction.
        assert lim_f[1] <= got_f - ref_f <= lim_f[0]
        if ref_s is not None:
            got_s = ch.LASmax - steady
            assert abs(got_s - (ref_s + spread)) <= 0.1, (tb, got_s)
            assert lim_s[1] <= got_s - ref_s <= lim_s[0]


@pytest.mark.parametrize("weighting", ["C", "Z"])
def test_c_and_z_toneburst_response(weighting):
    """Issue 12 §3.17: LCFmax, LCSmax, LZFmax, LZSmax. IEC 61672-1:2013 specifies the
    toneburst response for the time weightings whatever the frequency weighting
    (table 4); the same reference values as for A, within 0.1 dB after the ideal
    weighting's own effect on a short burst (none for Z)."""
    fs = 48000.0
    steady = getattr(sound_levels(sine(4000, 1 / math.sqrt(2), 2.0, fs), fs).channels[0],
                     f"L{weighting}eq")  # fmt: skip
    for tb, ref_f, ref_s, _, lim_f, lim_s in TONEBURSTS:
        ch = sound_levels(_toneburst(tb, fs), fs).channels[0]
        spread = _ideal_a_spread_db(tb, fs, weighting) if weighting != "Z" else 0.0
        got_f = getattr(ch, f"L{weighting}Fmax") - steady
        assert abs(got_f - (ref_f + spread)) <= 0.1, (tb, got_f)
        assert lim_f[1] <= got_f - ref_f <= lim_f[0]
        if ref_s is not None:
            got_s = getattr(ch, f"L{weighting}Smax") - steady
            assert abs(got_s - (ref_s + spread)) <= 0.1, (tb, got_s)
            assert lim_s[1] <= got_s - ref_s <= lim_s[0]


@pytest.mark.parametrize(
    "freq_hz, cycles, ref_db, limit_db",
    [
        # IEC 61672-1:2013 Table 5 (V): L_Cpeak - L_C for one cycle / half cycles at
        # exactly 10^1.5, 10^2.7 and 10^3.9 Hz; tolerance = the class 1 limit there.
        (10**1.5, 1.0, 2.5, 2.0),
        (10**2.7, 1.0, 3.5, 1.0),
        (10**3.9, 1.0, 3.4, 2.0),
        (10**2.7, 0.5, 2.4, 1.0),
        (10**2.7, -0.5, 2.4, 1.0),
    ],
)
def test_c_peak_response(freq_hz, cycles, ref_db, limit_db):
    fs = 48000.0
    n = round(abs(cycles) / freq_hz * fs)
    x = np.zeros(round(0.5 * fs) + n + round(0.3 * fs))
    x[round(0.5 * fs) : round(0.5 * fs) + n] = math.copysign(1.0, cycles) * np.sin(
        2 * np.pi * freq_hz * np.arange(n) / fs
    )
    steady_c = sound_levels(sine(freq_hz, 1 / math.sqrt(2), 2.0, fs), fs).channels[0].LCeq
    got = sound_levels(x, fs).channels[0].LCpeak - steady_c
    assert abs(got - ref_db) <= limit_db


def _pink_noise(n: int, fs: float, rng: np.random.Generator) -> np.ndarray:
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / fs)
    spec[1:] /= np.sqrt(f[1:])
    spec[0] = 0.0
    x = np.fft.irfft(spec, n)
    return x / np.sqrt(np.mean(x**2))


def test_pink_noise_laeq_agrees_with_pyoctaveband(rng):
    # Independent reference: PyOctaveBand 2.0.0 (test-only; its A filter is a bilinear
    # design run at an oversampled rate of 96 kHz, then resampled back).
    assert pyoctaveband.__version__ == "2.0.0"
    fs = 48000.0
    x = _pink_noise(round(8 * fs), fs, rng) * 0.5  # Pa
    ours = sound_levels(x, fs).channels[0].LAeq
    theirs = float(pyoctaveband.laeq(x, int(fs)))
    # The tolerance; both filters are within ~0.01 dB of Annex E below 10 kHz.
    assert abs(ours - theirs) <= 0.1
    # Third opinion: the noise is periodic (built by inverse FFT), so the Annex E curve
    # applied to its spectrum (Parseval) gives the ideal LAeq. Measured: ours +0.002 dB,
    # PyOctaveBand -0.056 dB. Tolerance 0.02 dB: our filter deviates by up to 0.075 dB
    # only above 10 kHz, where pink noise carries little A-weighted energy, and the
    # start-up transient of an 8 s signal is far smaller.
    spec = np.abs(np.fft.rfft(x)) ** 2
    f = np.fft.rfftfreq(len(x), 1 / fs)
    gain = np.zeros_like(f)
    gain[1:] = 10 ** (weighting_db(f[1:], weighting="A") / 10)
    one_sided = np.where((f > 0) & (f < fs / 2), 2.0, 1.0)
    ideal = 10 * np.log10(np.sum(one_sided * spec * gain) / len(x) ** 2 / P0**2)
    assert abs(ours - ideal) <= 0.02


def _f_trace(x: np.ndarray, fs: float, tau: float) -> np.ndarray:
    """Per-sample time-weighted mean square, straight from scipy (no block grid)."""
    sos = weighting_sos("A", fs)
    ya = signal.sosfilt(sos, x, zi=signal.sosfilt_zi(sos) * x[0])[0]
    return ExponentialAverager(fs, 1, time_constant_s=tau).update((ya * ya)[:, None])[:, 0]


def test_max_min_and_percentiles_match_per_sample_reference(rng):
    fs = 8000.0
    # Noise whose level changes every 100 ms, so max/min fall inside blocks.
    x = rng.standard_normal(round(7 * fs)) * np.repeat(rng.uniform(0.05, 2.0, 70), 800)
    res = sound_levels(x, fs)
    ch = res.channels[0]
    for tau, k_max, k_min in ((0.125, "LAFmax", "LAFmin"), (1.0, "LASmax", "LASmin")):
        y = _f_trace(x, fs, tau)
        mx = y[round(res.excluded_s[k_max] * fs) :].max()
        mn = y[round(res.excluded_s[k_min] * fs) :].min()
        # Same quantity computed two ways: only rounding differs.
        assert_allclose(getattr(ch, k_max), 10 * np.log10(mx / P0**2), rtol=1e-12)
        assert_allclose(getattr(ch, k_min), 10 * np.log10(mn / P0**2), rtol=1e-12)
    # Percentiles: F level sampled at the end of every 10 ms interval (80 samples).
    y = _f_trace(x, fs, 0.125)
    step = round(res.percentile_interval_s * fs)
    assert step == 80
    idx = np.arange(step - 1, len(y), step)
    idx = idx[idx >= round(res.excluded_s["LAF percentiles"] * fs)]
    levels = 10 * np.log10(y[idx] / P0**2)
    for p in PERCENTILES:
        # Level exceeded p % of the time; the 0.01 dB histogram bin limits agreement.
        expected = np.sort(levels)[::-1][math.ceil(p / 100 * len(levels)) - 1]
        assert abs(getattr(ch, f"LAF{p}") - expected) <= 0.01


def _scipy_weighted(x: np.ndarray, fs: float, weighting: str) -> np.ndarray:
    """The A-, C- or Z-weighted signal by ``scipy.signal.sosfilt`` (the meter's design:
    C sections, started in the steady state for the first sample, then the A-only ones)."""
    from piezo.levels.weighting import weighting_chain_sos

    c_sos, a_sos = weighting_chain_sos(fs)
    y = x
    if weighting in "CA":
        y = signal.sosfilt(c_sos, y, zi=signal.sosfilt_zi(c_sos) * x[0])[0]
    if weighting == "A":
        y = signal.sosfilt(a_sos, y)
    return y


def _scipy_trace(x: np.ndarray, fs: float, weighting: str, tau: float) -> np.ndarray:
    """Per-sample time-weighted mean square from scipy alone: the weighted square through
    the RC averager y[n] = a·y[n-1] + (1 - a)·q[n], a = exp(-1/(τ·fs)) (the exponential
    time weighting of IEC 61672-1:2013, sampled), by ``scipy.signal.lfilter``."""
    y = _scipy_weighted(x, fs, weighting)
    a = math.exp(-1.0 / (tau * fs))
    return signal.lfilter([1 - a], [1, -a], y * y)


def test_c_z_time_weighted_extremes_and_las_percentiles_match_scipy(rng):
    """Issue 12 §3.17: every F/S maximum and minimum (A, C, Z) and the LAS percentiles
    (also chosen ones) equal a per-sample computation with scipy's filters."""
    fs = 8000.0
    x = rng.standard_normal(round(9 * fs)) * np.repeat(rng.uniform(0.05, 2.0, 90), 800)
    res = sound_levels(x, fs, percentiles=(1, 99))
    ch = res.channels[0]
    for w in "ACZ":
        for tau, t in ((0.125, "F"), (1.0, "S")):
            y = _scipy_trace(x, fs, w, tau)
            for kind, pick in (("max", np.max), ("min", np.min)):
                key = f"L{w}{t}{kind}"
                value = pick(y[round(res.excluded_s[key] * fs) :])
                # The same recursion in another order of operations: rounding only.
                assert_allclose(getattr(ch, key), 10 * np.log10(value / P0**2), rtol=1e-9,
                                err_msg=key)  # fmt: skip
    y = _scipy_trace(x, fs, "A", 1.0)
    step = round(res.percentile_interval_s * fs)
    idx = np.arange(step - 1, len(y), step)
    idx = idx[idx >= round(res.excluded_s["LAS percentiles"] * fs)]
    levels = np.sort(10 * np.log10(y[idx] / P0**2))[::-1]
    assert res.excluded_s["LAS percentiles"] == pytest.approx(res.excluded_s["LASmin"])
    for p in (*PERCENTILES, 1, 99):
        # Level exceeded p % of the time; the meter interpolates within 0.001 dB bins.
        expected = levels[math.ceil(p / 100 * len(levels)) - 1]
        got = getattr(ch, f"LAS{p}", None) if p in PERCENTILES else ch.percentile_levels[f"LAS{p}"]
        assert abs(got - expected) <= 0.002, p
    assert set(ch.percentile_levels) == {"LAF1", "LAF99", "LAS1", "LAS99"}


def test_start_up_excludes_filter_transient_and_reports_it():
    fs = 48000.0
    x = sine(1000, 1.0, 1.0, fs)
    clean = sound_levels(x, fs).channels[0]
    # A 10 Pa DC offset: the filters start in steady state for the first sample, so no
    # false LCpeak/LAFmax (a zero-state start would read about +20 dB).
    offset = sound_levels(x + 10.0, fs)
    ch = offset.channels[0]
    assert abs(ch.LCpeak - clean.LCpeak) < 0.05
    assert abs(ch.LAFmax - clean.LAFmax) < 0.05
    assert offset.excluded_s["LAFmax"] == pytest.approx(0.1)
    assert offset.excluded_s["LAFmin"] == pytest.approx(0.1 + 5 * 0.125)
    assert offset.excluded_s["LASmin"] == pytest.approx(0.1 + 5 * 1.0)
    # A 1 s capture is shorter than the S settling time: LASmin is None, with a note.
    assert ch.LASmin is None
    assert any("LASmin" in note for note in ch.notes)
    # The F minimum after settling is within 0.03 dB of the steady level (5 tau).
    assert abs(clean.LAFmin - clean.LAeq) < 0.03


def test_all_zero_channel_gives_none_with_a_note(rng):
    fs = 48000.0
    x = np.zeros((round(1.5 * fs), 2))
    x[:, 1] = rng.standard_normal(len(x)) * 0.1
    res = sound_levels(x, fs)
    silent, live = res.channels
    assert all(v is None for v in silent.levels().values())
    assert silent.crest_factor is None
    assert any("all zeros" in note for note in silent.notes)
    assert live.LAeq is not None and math.isfinite(live.LAeq)


def test_reference_values_and_volts():
    fs = 48000.0
    x = sine(1000, 1.0, 1.0, fs)
    # dB re 1 V: a 1 V RMS sine reads 0 dB; re 1 uPa (water, ISO 1683) 26.02 dB above
    # re 20 uPa (20 lg 20).
    assert abs(sound_levels(x, fs, reference=1.0).channels[0].LZeq) < 1e-9
    water = sound_levels(x, fs, reference=1e-6).channels[0].LZeq
    air = sound_levels(x, fs, reference=20e-6).channels[0].LZeq
    assert abs(water - air - 20 * math.log10(20)) < 1e-9


def test_history_intervals_and_traces(rng):
    fs = 8000.0
    x = rng.standard_normal(round(3.5 * fs)) * np.repeat([0.1, 1.0, 0.3, 2.0], 7000)
    res = sound_levels(x, fs, interval_s=1.0)
    hist = res.history
    ch = res.channels[0]
    assert_allclose(hist.interval_start_s, [0.0, 1.0, 2.0, 3.0])
    assert_allclose(hist.interval_duration_s, [1.0, 1.0, 1.0, 0.5])
    # Energy average of the interval Leqs, weighted by duration, is the overall Leq.
    for name in ("LZeq", "LAeq", "LCeq"):
        e = np.sum(hist.interval_duration_s * 10 ** (getattr(hist, name)[:, 0] / 10))
        assert abs(10 * np.log10(e / 3.5) - getattr(ch, name)) < 1e-9
    # Traces every 0.1 s (25 blocks of 32 samples at 8 kHz): samples of the F/S levels.
    assert hist.trace_interval_s == pytest.approx(0.1)
    assert hist.LAF.shape == (35, 1) and hist.LAS.shape == (35, 1)
    y = _f_trace(x, fs, 0.125)
    idx = np.round(hist.trace_time_s * fs).astype(int)
    assert_allclose(hist.LAF[:, 0], 10 * np.log10(y[idx] / P0**2), rtol=1e-12)
    assert sound_levels(x, fs).history is None
    # Issue 12 §3.17: LAFmax and LCpeak per interval, from the settling frame on (the
    # recording's LAFmax and LCpeak are the largest of them), against scipy.
    f = _scipy_trace(x, fs, "A", 0.125)
    yc = np.abs(_scipy_weighted(x, fs, "C"))
    settle = round(res.excluded_s["LAFmax"] * fs)
    for k, start in enumerate(hist.interval_start_s):
        sl = slice(max(round(start * fs), settle), round((start + 1.0) * fs))
        assert_allclose(hist.LAFmax[k, 0], 10 * np.log10(f[sl].max() / P0**2), rtol=1e-9)
        assert_allclose(hist.LCpeak[k, 0], 20 * np.log10(yc[sl].max() / P0), rtol=1e-9)
    assert np.nanmax(hist.LAFmax) == pytest.approx(ch.LAFmax, abs=1e-9)
    assert np.nanmax(hist.LCpeak) == pytest.approx(ch.LCpeak, abs=1e-9)


def _assert_results_equal(a, b, rtol=1e-9):
    assert a.frames == b.frames
    for ca, cb in zip(a.channels, b.channels, strict=True):
        for name, va in ca.levels().items():
            vb = cb.levels()[name]
            assert (va is None) == (vb is None), name
            if va is not None:
                assert_allclose(va, vb, rtol=rtol, err_msg=name)
        assert ca.notes == cb.notes
    if a.history is not None:
        for name in ("LZeq", "LAeq", "LCeq", "LAFmax", "LCpeak", "LAF", "LAS"):
            assert_allclose(getattr(a.history, name), getattr(b.history, name), rtol=rtol)


_SIGNAL = None


def _signal():
    global _SIGNAL
    if _SIGNAL is None:
        rng = np.random.default_rng(7)
        fs = 8000.0
        n = round(6.0 * fs)
        x = rng.standard_normal((n, 2)) * np.repeat(rng.uniform(0.05, 2.0, 60), n // 60)[:, None]
        x[:, 1] += 0.5  # DC offset on one channel
        _SIGNAL = (x, fs, sound_levels(x, fs, interval_s=0.5))
    return _SIGNAL


@settings(max_examples=25, deadline=None)
@given(
    cuts=st.lists(st.integers(min_value=0, max_value=48000), min_size=0, max_size=12),
    ones=st.integers(min_value=0, max_value=47800),
)
def test_blockwise_equals_whole_file(cuts, ones):
    x, fs, whole = _signal()
    meter = LevelMeter(fs, 2, interval_s=0.5)
    # Random uneven split points, plus a run of 1-sample blocks and an empty block.
    points = sorted({*cuts, ones, ones + 1, *range(ones + 1, ones + 40)})
    prev = 0
    for p in [*points, len(x)]:
        meter.update(x[prev:p])
        prev = max(prev, p)
    _assert_results_equal(meter.result(), whole)


def test_result_does_not_disturb_the_stream():
    x, fs, whole = _signal()
    meter = LevelMeter(fs, 2, interval_s=0.5)
    meter.update(x[:12345])
    meter.result()  # mid-stream result between sampling instants and inside an interval
    meter.update(x[12345:])
    _assert_results_equal(meter.result(), whole)
    assert 12345 % round(whole.percentile_interval_s * fs) != 0
    assert 12345 % round(whole.history.interval_s * fs) != 0


def test_bad_input_is_rejected_with_the_argument_named():
    with pytest.raises(InputError, match=r"block must have shape \(frames, 2\)"):
        LevelMeter(48000, 2).update(np.zeros((10, 1)))
    with pytest.raises(InputError, match="NaN or infinite"):
        LevelMeter(48000, 1).update(np.array([[0.0], [np.nan]]))
    with pytest.raises(InputError, match="reference must be a positive number, got 0"):
        LevelMeter(48000, 1, reference=0)
    with pytest.raises(InputError, match="interval_s must be positive, got -1"):
        LevelMeter(48000, 1, interval_s=-1)


def test_percentiles_of_a_steady_level_interpolate_within_the_bin():
    # Issue 12 §3.13: a steady 1 kHz tone at 80.000 dB (0.2 Pa RMS; A(1 kHz) = 0 dB by
    # IEC 61672-1:2013 table 3) read LAF10 79.995, a histogram bin centre. The F level of
    # a steady 1 kHz sine ripples by ±10 lg(1 + 1/(2π·2 kHz·0.125 s)) = ±0.003 dB (the
    # 2f ripple of an RC averager), so every percentile lies within 0.004 dB of 80.000.
    # 10 s: the F averager, reset at the start, is within 0.003 dB of its reading after
    # 0.9 s (e^(−t/τ) < 7e-4), under 2 % of the counted samples, less than LAF95's 5 %.
    fs = 48000.0
    x = sine(1000, 0.2, 10.0, fs)
    ch = sound_levels(x, fs).channels[0]
    a_1k = float(weighting_db(np.array([1000.0]), weighting="A")[0])
    for p in PERCENTILES:
        value = getattr(ch, f"LAF{p}")
        assert abs(value - (80.0 + a_1k)) < 0.004, (p, value)
    assert f"{ch.LAF10:.2f}" == "80.00"
