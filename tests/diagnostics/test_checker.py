"""Tests of piezo.diagnostics.checker (capture checks).

Check values come from closed-form signal facts (stated beside each test), from
scipy.signal (filters, Welch PSD) or are marked "common practice, no source".
"""

from __future__ import annotations

import itertools
import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal

from piezo.diagnostics.checker import (
    CaptureChecker,
    CaptureMetadata,
    Severity,
    Thresholds,
    check_capture,
    estimate_rolloff,
    load_thresholds,
    parse_threshold_assignment,
    worst_severity,
)
from piezo.errors import InputError, RecordingError, SpecError

FS = 48000.0


def sine(freq_hz: float, amplitude: float, duration_s: float, fs: float = FS, phase=0.0):
    t = np.arange(round(duration_s * fs)) / fs
    return amplitude * np.sin(2 * np.pi * freq_hz * t + phase)


# --------------------------------------------------------------------------- clipping


def test_sine_clipped_at_0p8_is_analog_clipping_with_the_right_count():
    # A full-scale sine clipped at c = 0.8: |sin| > c for a fraction
    # 1 - (2/pi) asin(c) = 0.40966 of each period (both half waves together), from the
    # inverse of the sine over a quarter period. 997 Hz at 48 kHz is not locked to the
    # sample grid, so the count follows the continuous fraction to within one sample per
    # half period (< 0.05 % here); the issue's +-1 % is the acceptance limit.
    x = np.clip(sine(997.0, 1.0, 1.0), -0.8, 0.8)
    expected = (1 - 2 / np.pi * np.arcsin(0.8)) * x.size
    ch = check_capture(x, FS).channels[0]
    assert ch.clipping.clipped_samples == pytest.approx(expected, rel=0.01)
    assert {lv.kind for lv in ch.clipping.levels} == {"analog"}
    assert sorted(lv.level for lv in ch.clipping.levels) == [-0.8, 0.8]
    # 997 periods in 1 s: one clip event per half period.
    assert ch.clipping.events == pytest.approx(2 * 997, abs=2)
    assert ch.check("clipping").severity is Severity.FAIL
    # The first event starts where the sine first reaches 0.8: t = asin(0.8)/(2 pi f).
    first = np.arcsin(0.8) / (2 * np.pi * 997.0)
    assert ch.clipping.event_times_s[0] == pytest.approx(first, abs=1.5 / FS)
    assert len(ch.clipping.event_times_s) == Thresholds().max_event_times


def test_clipped_sine_quantised_to_16_bit_and_asymmetric():
    # Clip only the positive half at 0.8 of full scale, then quantise to 16-bit codes:
    # the count is half of the symmetric case, 0.20483 of the samples (same formula).
    x = np.minimum(sine(997.0, 0.95, 1.0), 0.8)
    x = np.round(x * 32768) / 32768
    ch = check_capture(x, FS).channels[0]
    expected = (0.5 - np.arcsin(0.8 / 0.95) / np.pi) * x.size
    assert ch.clipping.clipped_samples == pytest.approx(expected, rel=0.01)
    assert [lv.side for lv in ch.clipping.levels] == ["positive"]
    assert ch.clipping.levels[0].level_dbfs == pytest.approx(20 * np.log10(0.8), abs=1e-3)


@pytest.mark.parametrize("bits", [None, 16, 24])
def test_clean_sine_at_minus_0p1_dbfs_is_not_flagged(bits):
    a = 10 ** (-0.1 / 20)
    x = sine(997.0, a, 1.0)
    if bits:
        x = np.round(x * 2 ** (bits - 1)) / 2 ** (bits - 1)
    result = check_capture(x, FS)
    ch = result.channels[0]
    assert ch.clipping.clipped_samples == 0
    assert ch.check("clipping").severity is Severity.OK
    assert ch.verdict is Severity.OK, [c for c in ch.checks if c.severity is not Severity.OK]
    # Headroom of a -0.1 dBFS sine is 0.1 dB (definition); crest factor of a sine is
    # 20 lg sqrt(2) = 3.01 dB (IEC 61672-1:2013 reference values: L_peak - L_eq = 3.01 dB).
    assert ch.headroom.headroom_db == pytest.approx(0.1, abs=1e-3)
    assert ch.headroom.crest_factor_db == pytest.approx(3.01, abs=0.01)


@pytest.mark.parametrize("freq_hz", [20.0, 50.0, 200.0])
def test_clean_low_frequency_sines_near_full_scale_are_not_clipping(freq_hz):
    # Near a smooth maximum consecutive 16-bit samples repeat (flat runs), but the value
    # histogram has no spike: the density ratio is 4.2 (see piezo.diagnostics._stream), far
    # under the threshold 20. Common practice, no source, for the threshold.
    x = np.round(sine(freq_hz, 0.99, 2.0) * 32767) / 32768
    ch = check_capture(x, FS).channels[0]
    assert ch.clipping.clipped_samples == 0


def test_digital_clipping_at_full_scale():
    # A sine of amplitude 1.5 hard-limited at +-1 (as a converter does): the fraction at
    # |x| >= 0.9999 is 1 - (2/pi) asin(0.9999/1.5), closed form as above.
    x = np.clip(sine(997.0, 1.5, 1.0), -1.0, 1.0)
    ch = check_capture(x, FS).channels[0]
    expected = (1 - 2 / np.pi * np.arcsin(0.9999 / 1.5)) * x.size
    assert ch.clipping.clipped_samples == pytest.approx(expected, rel=0.01)
    assert {lv.kind for lv in ch.clipping.levels} == {"digital"}
    assert ch.check("clipping").severity is Severity.FAIL
    assert ch.dropouts.dropout_samples == 0  # clip runs are not dropouts
    assert ch.headroom.headroom_db == pytest.approx(0.0, abs=1e-12)


def test_a_single_short_clip_warns_and_unknown_full_scale_is_said():
    x = sine(997.0, 0.5, 2.0)
    x[30000:30004] = 1.0  # one run of 4 samples at full scale: 2e-5 of the samples
    ch = check_capture(x, FS).channels[0]
    assert ch.clipping.events == 1
    assert ch.clipping.clipped_samples == 4
    assert ch.clipping.event_times_s == (pytest.approx(30000 / FS),)
    assert ch.check("clipping").severity is Severity.WARN  # below clip_fail_fraction 1e-4
    ch = check_capture(sine(997.0, 0.5, 0.5), FS, full_scale=None).channels[0]
    assert ch.headroom.headroom_db is None
    assert "not determinable" in ch.check("clipping").evidence


def test_analog_clipping_found_without_full_scale():
    # CSV captures in volts often have no stated range: the clip is still found from
    # the flat runs at the observed extreme (tolerance relative to the extreme).
    x = 3.3 * np.clip(sine(997.0, 1.0, 0.5), -0.8, 0.8)
    ch = check_capture(x, FS, full_scale=None).channels[0]
    expected = (1 - 2 / np.pi * np.arcsin(0.8)) * x.size
    assert ch.clipping.clipped_samples == pytest.approx(expected, rel=0.01)
    assert ch.clipping.levels[0].level_dbfs is None


# --------------------------------------------------------------------------- roll-off


def _white(seconds: float, seed: int, fs: float = FS) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal(round(seconds * fs))


@pytest.mark.parametrize("order", [1, 2])
def test_rolloff_of_noise_through_a_known_high_pass(order):
    # scipy.signal.butter designs the digital high-pass with its -3 dB corner at exactly
    # 40 Hz (bilinear transform with pre-warping); order 1 is the RC high-pass shape.
    # The issue asks for the corner within 10 %. With 20 s of noise (6 averages) the
    # estimate scattered by 3 % (order 1) and 1 % (order 2) over eight other seeds, worst
    # 7 %: 10 % is about 3 standard deviations for the first order.
    sos = signal.butter(order, 40.0, "highpass", fs=FS, output="sos")
    x = 0.1 * signal.sosfilt(sos, _white(20.0, 7))
    r = check_capture(x, FS).channels[0].rolloff
    assert r.status == "estimated", r.reason
    assert r.order == order
    assert r.corner_hz == pytest.approx(40.0, rel=0.10)


def test_rolloff_of_pink_noise_through_a_second_order_high_pass():
    # Pink noise falls 10 dB/decade: the fit's passband tilt takes it, so the corner is
    # not pulled down (without the tilt it read 10 Hz here). Pink noise by 1/sqrt(f)
    # shaping of white noise (common practice); corner 20 Hz from scipy.signal.butter.
    x = _white(20.0, 13)
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1 / FS)
    spec[1:] /= np.sqrt(f[1:])
    spec[0] = 0.0
    x = np.fft.irfft(spec, x.size)
    x = signal.sosfilt(signal.butter(2, 20.0, "highpass", fs=FS, output="sos"), x)
    r = check_capture(x / np.std(x), FS).channels[0].rolloff
    assert r.status == "estimated", r.reason
    assert r.order == 2
    assert r.corner_hz == pytest.approx(20.0, rel=0.10)


def test_rolloff_not_determinable_without_energy_below_100_hz():
    # White noise with every Fourier component below 100 Hz removed: no shape to fit.
    x = _white(20.0, 8)
    spec = np.fft.rfft(x)
    spec[np.fft.rfftfreq(x.size, 1 / FS) < 100.0] = 0.0
    x = 0.1 * np.fft.irfft(spec, x.size)
    r = check_capture(x, FS).channels[0].rolloff
    assert r.status == "not determinable"
    assert r.corner_hz is None
    assert "no usable content below" in r.reason
    assert 95.0 <= r.lowest_content_hz <= 110.0


def test_rolloff_of_flat_noise_is_below_the_analysed_range():
    th = Thresholds(rolloff_expected_hz=100.0)
    ch = check_capture(0.1 * _white(10.0, 9), FS, thresholds=th).channels[0]
    r = ch.rolloff
    assert r.status == "below range"
    df = 0.25  # the diagnostic PSD's bin spacing (spectrum_resolution_hz)
    assert r.upper_bound_hz == pytest.approx(4 * df)
    # Expected a 100 Hz corner, found flat to < 1 Hz: the chain is not as designed.
    assert ch.check("rolloff").severity is Severity.WARN


def test_rolloff_against_expected_corner():
    sos = signal.butter(1, 40.0, "highpass", fs=FS, output="sos")
    x = 0.1 * signal.sosfilt(sos, _white(20.0, 7))
    good = check_capture(x, FS, thresholds=Thresholds(rolloff_expected_hz=42.0))
    bad = check_capture(x, FS, thresholds=Thresholds(rolloff_expected_hz=100.0))
    assert good.channels[0].check("rolloff").severity is Severity.OK
    assert bad.channels[0].check("rolloff").severity is Severity.WARN


def test_estimate_rolloff_on_a_scipy_welch_psd():
    # The function works on any one-sided density PSD, here scipy's own Welch estimate.
    fs = 8000.0
    sos = signal.butter(2, 25.0, "highpass", fs=fs, output="sos")
    x = signal.sosfilt(sos, _white(60.0, 3, fs))
    f, p = signal.welch(x, fs, nperseg=32768)
    # K Hann segments overlapping by half: 2K/(1 + 2 x 0.167^2) degrees of freedom
    # (Welch 1967, eq. 11 with the Hann overlap correlation 0.167).
    k = 2 * x.size // 32768 - 1
    r = estimate_rolloff(f, p, degrees_of_freedom=2 * k / (1 + 2 * 0.167**2))
    assert r.status == "estimated"
    assert r.corner_hz == pytest.approx(25.0, rel=0.10)


# --------------------------------------------------------------------------- hum


def test_hum_50_hz_40_db_under_broadband_noise_at_the_right_level():
    # Unit-variance white noise scaled to 0.1 RMS plus a 50 Hz tone of 1e-3 RMS: the
    # tone is 40 dB under the broadband signal and reads -60 dB re 1 V.
    # Tolerance: the issue's +-1 dB. The Cramer-Rao bound for a sinusoid's amplitude in
    # white noise (Kay, Fundamentals of Statistical Signal Processing I, 1993, sec. 3.11)
    # is var(A)/A^2 = 2 sigma^2/(N A^2) = 1e4/N here; N = 6.24e6 samples (130 s) gives
    # 0.04 in amplitude, 0.35 dB in power at best, so +-1 dB is about 3 standard
    # deviations (measured over 24 other seeds: 0.26 dB, no bias).
    fs = FS
    block = round(5 * fs)
    rng = np.random.default_rng(2024)
    checker = CaptureChecker(fs, 1)
    for b in range(26):
        t = (np.arange(block) + b * block) / fs
        x = 0.1 * rng.standard_normal(block) + 1e-3 * np.sqrt(2) * np.sin(2 * np.pi * 50 * t)
        checker.update(x[:, None])
    hum = checker.result().channels[0].hum
    assert hum.status == "detected"
    assert hum.mains_hz == 50.0
    line = next(ln for ln in hum.lines if ln.nominal_hz == 50.0)
    assert line.detected
    assert line.level_db == pytest.approx(-60.0, abs=1.0)
    assert line.re_total_db == pytest.approx(-40.0, abs=1.0)
    assert line.frequency_hz == pytest.approx(50.0, abs=fs / 2**18)


def test_hum_60_hz_family_warns_and_noise_alone_has_none():
    fs = 16000.0
    noise = 0.1 * _white(12.0, 11, fs)
    x = noise + sine(60.0, 0.02, 12.0, fs) + sine(180.0, 0.01, 12.0, fs)
    ch = check_capture(x, fs).channels[0]
    assert ch.hum.mains_hz == 60.0
    found = sorted(ln.nominal_hz for ln in ch.hum.lines if ln.detected)
    assert found == [60.0, 180.0]
    # Hum power (0.02² + 0.01²)/2 against 0.01 of noise: -19 dB re the AC power: warn
    # (threshold -30 dB, common practice, no source).
    expected = 10 * np.log10((0.02**2 + 0.01**2) / 2 / (0.01 + (0.02**2 + 0.01**2) / 2))
    assert ch.hum.re_total_db == pytest.approx(expected, abs=1.0)
    assert ch.check("hum").severity is Severity.WARN
    clean = check_capture(noise, fs).channels[0]
    assert clean.hum.status == "none"
    assert clean.check("hum").severity is Severity.OK


# --------------------------------------------------------------------------- DC, drift


def test_dc_offset_and_drift():
    fs = 8000.0
    base = sine(440.0, 0.1, 10.0, fs)
    ch = check_capture(base + 0.05, fs).channels[0]
    assert ch.dc.dc_offset == pytest.approx(0.05, abs=1e-6)  # a whole number of periods
    assert ch.check("dc").severity is Severity.WARN  # 5 % of full scale >= 1 %
    assert check_capture(base + 0.2, fs).channels[0].check("dc").severity is Severity.FAIL
    # A slow linear drift of 0.01 V/s: the 1 s interval means follow it exactly.
    t = np.arange(base.size) / fs
    ch = check_capture(base + 0.01 * t, fs).channels[0]
    assert ch.dc.drift_slope_per_s == pytest.approx(0.01, rel=1e-3)
    assert ch.dc.drift_pp == pytest.approx(0.09, rel=1e-3)  # 10 means, 1 s apart
    assert ch.dc.intervals == 10
    # The trend changes by 0.09 V over the means, 1.3 x the AC RMS (0.0707 V): a drift.
    assert ch.dc.drift_change == pytest.approx(0.09, rel=1e-3)
    assert ch.check("dc").severity is Severity.WARN
    # Low-frequency signal is not drift: a 0.3 Hz component moves the 1 s means by more
    # than the AC RMS, but along no straight line (t of the slope far below 3).
    slow = base + 0.2 * np.sin(2 * np.pi * 0.3 * t)
    ch = check_capture(slow, fs).channels[0]
    assert ch.dc.drift_pp > ch.dc.ac_rms
    assert ch.dc.drift_t < 3.0
    assert ch.check("dc").severity is Severity.OK


# --------------------------------------------------------------------------- dropouts


def test_runs_of_zeros_and_held_values_are_dropouts():
    fs = 8000.0
    x = 0.1 * _white(4.0, 12, fs)
    x[8000:8160] = 0.0  # 20 ms of zeros
    x[16000:16040] = x[15999]  # 5 ms hold of the last value (41 equal samples)
    ch = check_capture(x, fs).channels[0]
    d = ch.dropouts
    assert (d.zero_runs, d.zero_samples) == (1, 160)
    assert (d.repeat_runs, d.repeat_samples) == (1, 41)
    assert d.event_times_s == (pytest.approx(1.0), pytest.approx(15999 / fs))
    assert ch.check("dropouts").severity is Severity.WARN
    x[20000:24000] = 0.0  # 1/8 of the recording: above the 1 % fail fraction
    assert check_capture(x, fs).channels[0].check("dropouts").severity is Severity.FAIL


def test_silence_before_and_after_the_signal_is_not_a_dropout():
    # A playback-and-record capture starts and ends in silence: reported, not a dropout,
    # until it is most of the recording (edge_silence_warn_fraction 0.5, common practice).
    fs = 8000.0
    x = 0.1 * _white(4.0, 14, fs)
    x[:2000] = 0.0  # 0.25 s before
    x[-6000:] = 0.0  # 0.75 s after
    ch = check_capture(x, fs).channels[0]
    d = ch.dropouts
    assert (d.zero_runs, d.leading_s, d.trailing_s) == (0, 0.25, 0.75)
    assert ch.check("dropouts").severity is Severity.OK
    assert "starts with 0.25 s" in ch.check("dropouts").evidence
    x[:16000] = 0.0  # 2 s of 4 s silent before the signal
    assert check_capture(x, fs).channels[0].check("dropouts").severity is Severity.WARN
    ch = check_capture(np.full(8000, 0.3), fs).channels[0]  # a constant: no signal
    assert ch.dropouts.silent
    assert ch.check("dropouts").severity is Severity.FAIL


def test_silent_channel_fails_and_time_gaps_are_reported():
    ch = check_capture(np.zeros(8000), 8000.0).channels[0]
    assert ch.dropouts.silent
    assert ch.verdict is Severity.FAIL
    meta = CaptureMetadata(time_gaps=3, largest_time_gap_s=0.02)
    ch = check_capture(0.1 * _white(2.0, 1, 8000.0), 8000.0, metadata=meta).channels[0]
    assert ch.dropouts.time_gaps == 3
    assert "3 gaps in the time column" in ch.check("dropouts").evidence
    assert ch.check("dropouts").severity is Severity.WARN


# --------------------------------------------------------------------------- noise floor


def test_noise_floor_snr_and_psd_floor():
    # Noise of 1 mV RMS everywhere, a 100 mV RMS tone in the first half only.
    fs = 8000.0
    x = 1e-3 * _white(20.0, 5, fs)
    x[: x.size // 2] += sine(500.0, 0.1 * np.sqrt(2), 10.0, fs)
    ch = check_capture(x, fs).channels[0]
    n = ch.noise
    # Each 0.1 s interval estimates the noise power from 800 samples: the level scatters
    # by 4.34 sqrt(2/800) = 0.22 dB, so its 10th percentile lies about 0.28 dB under
    # the mean (-60 dB re 1 V); +-0.5 dB covers it.
    assert n.noise_floor_db == pytest.approx(-60.0, abs=0.5)
    assert n.signal_level_db == pytest.approx(-20.0, abs=0.1)
    assert n.snr_db == pytest.approx(40.0, abs=0.5)
    # White noise of variance s^2 has a one-sided density 2 s^2/fs (reference values:
    # Heinzel et al. 2002): 10 lg(2e-6/8000) = -96.0 dB re 1 V^2/Hz. The floor is the
    # 10th percentile of 32-bin medians: with 8 averages (nu ~ 15) one bin scatters by
    # 4.34 sqrt(2/15) = 1.6 dB, a median of ~21 independent bins by ~0.43 dB, so the
    # 10th percentile sits 1.28 x 0.43 = 0.55 dB under the density. The +-0.5 dB allows
    # for the rough count of independent bins.
    assert n.psd_floor_db == pytest.approx(-96.55, abs=0.5)
    assert ch.check("noise").severity is Severity.OK


@pytest.mark.parametrize(("freq_hz", "a_db"), [(1000.0, 0.0), (100.0, -19.14)])
def test_a_weighted_noise_floor(freq_hz, a_db):
    # A steady tone: every 0.1 s interval has the tone's level. A weighting at 1 kHz is
    # 0 dB and at 100 Hz -19.14 dB (IEC 61672-1:2013 Annex E formula; Table 3 lists
    # -19.1 for the nominal 100 Hz band). The digital A filter deviates from the formula
    # by 0.008 dB at most at 48 kHz (piezo.levels.weighting.conformance); the first interval
    # holds the filter's start-up and the 10th percentile of 30 intervals skips it, so
    # +-0.05 dB is ample.
    x = sine(freq_hz, np.sqrt(2) * 0.01, 3.0)  # 10 mV RMS: -40 dB re 1 V
    n = check_capture(x, FS).channels[0].noise
    assert n.noise_floor_db == pytest.approx(-40.0, abs=0.03)  # 0.05 dB histogram bins
    assert n.noise_floor_a_db == pytest.approx(-40.0 + a_db, abs=0.05)
    # Below the weighting filters' lowest rate the A-weighted floor is not given.
    low = check_capture(sine(freq_hz, 0.01, 3.0, fs=4000.0), 4000.0).channels[0].noise
    assert low.noise_floor_db is not None and low.noise_floor_a_db is None


def test_diagnostic_psd_equals_scipy_welch():
    fs = 8000.0
    x = _white(10.0, 4, fs)
    th = Thresholds(spectrum_resolution_hz=2.0)  # 4000-point segments
    ch = check_capture(x, fs, thresholds=th).channels[0]
    f, p = signal.welch(x, fs, window="hann", nperseg=4000)
    assert_allclose(ch.psd_frequencies_hz, f)
    assert_allclose(ch.psd, p, rtol=1e-10)


# --------------------------------------------------------------------------- metadata


def test_metadata_rate_mismatch_fails_and_missing_sensitivity_warns():
    x = sine(997.0, 0.5, 0.5)
    meta = CaptureMetadata(file_rate_hz=48000, sidecar_rate_hz=44100, sensitivity_known=False)
    result = check_capture(x, FS, metadata=meta)
    names = {c.name: c.severity for c in result.metadata_checks}
    assert names == {"sample_rate": Severity.FAIL, "sensitivity": Severity.WARN}
    # File-level checks make the file's verdict, not the channel's (issue 12 §3.4).
    assert result.verdict is Severity.FAIL
    ch = result.channels[0]
    assert ch.verdict is worst_severity([c.severity for c in ch.checks])
    ok = check_capture(x, FS, metadata=CaptureMetadata(48000, 48000, True))
    assert ok.verdict is Severity.OK


# --------------------------------------------------------------------------- thresholds


def test_thresholds_from_toml_and_overrides(tmp_path):
    path = tmp_path / "limits.toml"
    path.write_text("[thresholds]\nclip_min_run = 5\nhum_mains_hz = [60]\n")
    th = load_thresholds(path)
    assert th.clip_min_run == 5
    assert th.hum_mains_hz == (60.0,)
    assert th.dc_warn_fraction == Thresholds().dc_warn_fraction
    flat = tmp_path / "flat.toml"
    flat.write_text("rolloff_expected_hz = 0.16\n")
    assert load_thresholds(flat).rolloff_expected_hz == 0.16
    assert parse_threshold_assignment("rolloff_expected_hz=none") == ("rolloff_expected_hz", None)
    assert parse_threshold_assignment("hum_mains_hz=50,60") == ("hum_mains_hz", (50.0, 60.0))
    assert th.updated({"snr_warn_db": "12"}).snr_warn_db == 12.0


def test_threshold_errors_name_the_key_and_value(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("clip_min_rum = 5\n")
    with pytest.raises(SpecError, match="unknown threshold 'clip_min_rum'"):
        load_thresholds(bad)
    bad.write_text("clip_min_run = 'many'\n")
    with pytest.raises(SpecError, match="clip_min_run: cannot use 'many'"):
        load_thresholds(bad)
    bad.write_text("clip_min_run = \n")
    with pytest.raises(SpecError, match="TOML syntax error"):
        load_thresholds(bad)
    with pytest.raises(SpecError, match="cannot read thresholds file"):
        load_thresholds(tmp_path / "missing.toml")
    with pytest.raises(SpecError, match="dc_warn_fraction: must be a positive number"):
        Thresholds(dc_warn_fraction=-1.0)
    with pytest.raises(SpecError, match="expected NAME=VALUE"):
        parse_threshold_assignment("clip_min_run")


def test_worst_severity_orders_ok_warn_fail():
    assert worst_severity([]) is Severity.OK
    assert worst_severity([Severity.WARN, Severity.OK]) is Severity.WARN
    assert worst_severity([Severity.WARN, Severity.FAIL, Severity.OK]) is Severity.FAIL


# --------------------------------------------------------------------------- input errors


def test_bad_input_is_refused_with_a_message():
    # The one wording of piezo.validate for every analysis.
    with pytest.raises(InputError, match="sample_rate_hz must be between"):
        CaptureChecker(0.0, 1)
    checker = CaptureChecker(8000.0, 2)
    with pytest.raises(InputError, match=r"must have shape \(frames, 2\)"):
        checker.update(np.zeros((10, 3)))
    checker.update(np.zeros((3, 2)))
    bad = np.zeros((10, 2))
    bad[4, 1] = np.nan
    with pytest.raises(InputError, match=r"non-finite value .* channel 1 at sample 7$"):
        checker.update(bad)
    with pytest.raises(RecordingError, match="holds no samples"):
        CaptureChecker(8000.0, 1).result()


def test_result_is_plain_json():
    x = np.clip(sine(997.0, 1.0, 0.5), -0.8, 0.8)
    x[100:200] = 0.0
    result = check_capture(np.column_stack([x, 0.5 * x]), FS, channel_indices=[2, 5])
    doc = json.loads(json.dumps(result.as_dict(), allow_nan=False))
    assert [c["channel"] for c in doc["channels"]] == [2, 5]
    first = doc["channels"][0]
    for key in (
        "verdict",
        "clipping",
        "headroom_db",
        "dc_offset_v",
        "rolloff",
        "dropouts",
        "noise_floor_db",
        "hum",
    ):
        assert key in first
    assert first["rolloff"]["status"] in ("estimated", "below range", "not determinable")


# --------------------------------------------------------------------------- streaming


def _feature_signal() -> np.ndarray:
    """Two channels exercising every check: clips, zeros, a hold, DC, hum, drift."""
    fs = 2000.0
    rng = np.random.default_rng(99)
    n = 9000
    t = np.arange(n) / fs
    a = np.clip(0.9 * np.sin(2 * np.pi * 97 * t) + 0.02 * rng.standard_normal(n), -0.7, 0.75)
    a[1000:1100] = 0.0
    a[5000:5060] = a[4999]
    a[7000:7005] = 1.0
    b = 0.05 * rng.standard_normal(n) + 0.01 * np.sin(2 * np.pi * 50 * t) + 0.02 + 0.02 * t
    b = np.round(b * 2**12) / 2**12
    return np.column_stack([a, b])


_FEATURES = _feature_signal()
_STREAM_TH = Thresholds(spectrum_resolution_hz=1.0)


def _assert_same(a, b, path="result"):
    if isinstance(a, dict):
        assert a.keys() == b.keys(), path
        for k in a:
            _assert_same(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            _assert_same(x, y, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float):
        # Only the summation order differs between splits: float64 rounding.
        assert math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-12), (path, a, b)
    else:
        assert a == b, (path, a, b)


_WHOLE = check_capture(_FEATURES, 2000.0, thresholds=_STREAM_TH).as_dict()


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(min_value=0, max_value=_FEATURES.shape[0]), max_size=12))
def test_blockwise_equals_whole_file(cuts):
    checker = CaptureChecker(2000.0, 2, thresholds=_STREAM_TH)
    edges = [0, *sorted(cuts), _FEATURES.shape[0]]
    for lo, hi in itertools.pairwise(edges):
        checker.update(_FEATURES[lo:hi])  # includes empty and one-frame blocks
    _assert_same(_WHOLE, checker.result().as_dict())


def test_feature_signal_is_diagnosed_as_built():
    a, b = check_capture(_FEATURES, 2000.0, thresholds=_STREAM_TH).channels
    assert {(lv.side, lv.kind) for lv in a.clipping.levels} == {
        ("positive", "digital"),
        ("negative", "analog"),
    }
    assert a.dropouts.zero_runs == 1 and a.dropouts.repeat_runs == 1
    assert b.hum.mains_hz == 50.0
    # Four 1 s means of noise with 0.05 RMS: each scatters by 0.05/sqrt(2000) = 1.1 mV,
    # the fitted slope by 1.1 mV / sqrt(5 s^2) = 0.5 mV/s: 20 mV/s +-15 % is 6 sigma.
    assert b.dc.drift_slope_per_s == pytest.approx(0.02, rel=0.15)


def test_memory_does_not_grow_with_length():
    # The bookkeeping near an extreme covers (10 + 1) tolerances (1e-3 of full scale)
    # below it, in buckets of 2**-14 relative width: at an extreme of 0.75 (in the octave
    # [0.5, 1), bucket width 2**-14) that is at most 0.011 * 2**14 + 2 = 182 buckets,
    # for the value histogram and for the flat runs, however long the recording.
    checker = CaptureChecker(8000.0, 1)
    rng = np.random.default_rng(5)
    bound = math.ceil(11e-3 * 2**14) + 2
    for _ in range(60):
        checker.update(np.clip(rng.standard_normal((4000, 1)), -2.5, 2.5) * 0.3)
        for side in (checker._pos[0], checker._neg[0]):
            assert len(side.hist) <= bound
            assert len(side.runs) <= bound
    assert checker._spectrum.segment_frames == 32000  # 8 kHz / 0.25 Hz


def test_every_threshold_is_documented_with_its_default():
    doc = (Path(__file__).resolve().parents[2] / "docs" / "diagnostics.md").read_text(
        encoding="utf-8"
    )
    rows = {}
    for line in doc.splitlines():
        if line.startswith("| `"):
            cells = [c.strip() for c in line.strip("|").split("|")]
            rows[cells[0].strip("`")] = cells[1].replace("−", "-")
    for name, default, _ in Thresholds.describe():
        assert name in rows, name
        if default is None:
            assert rows[name] == "none"
        elif isinstance(default, tuple):
            assert [float(v) for v in rows[name].split(",")] == list(default), name
        else:
            assert float(rows[name]) == default, name


def test_file_level_metadata_warning_does_not_make_an_ok_channel_warn():
    # Issue 12 §3.4: no sensitivity given is a warning about the file; a channel whose
    # own checks are all ok stays ok, and the file's verdict carries the warning.
    x = sine(997.0, 0.5, 1.0)
    result = check_capture(x, FS, metadata=CaptureMetadata(sensitivity_known=False))
    ch = result.channels[0]
    assert all(c.severity is Severity.OK for c in ch.checks), ch.checks
    assert ch.verdict is Severity.OK
    assert result.verdict is Severity.WARN
    assert result.as_dict()["channels"][0]["verdict"] == "ok"


# --------------------------------------------------------------------------- per channel


def test_clipping_is_judged_at_each_channels_own_full_scale():
    # The same calibrated samples on two channels: a 997 Hz sine of amplitude 150 limited
    # at ±100 (units of the samples). Behind a full scale of 100 that is the converter's
    # extreme (digital clipping, 0 dBFS); behind a full scale of 1000 an analog stage
    # saturating at 20 lg(100/1000) = -20 dBFS. The clipped share is the same:
    # 1 - (2/π) asin(100/150) of the samples (inverse of the sine).
    x = np.clip(sine(997.0, 150.0, 1.0), -100.0, 100.0)
    diag = check_capture(np.column_stack([x, x]), FS, full_scale=[100.0, 1000.0])
    digital, analog = diag.channels
    assert {lv.kind for lv in digital.clipping.levels} == {"digital"}
    assert {lv.kind for lv in analog.clipping.levels} == {"analog"}
    assert [lv.level_dbfs for lv in digital.clipping.levels] == pytest.approx([0.0, 0.0])
    assert [lv.level_dbfs for lv in analog.clipping.levels] == pytest.approx([-20.0, -20.0])
    expected = (1 - 2 / np.pi * np.arcsin(100 / 150)) * x.size
    for ch in diag.channels:
        # ±1 % as in test_sine_clipped_at_0p8_is_analog_clipping_with_the_right_count.
        assert ch.clipping.clipped_samples == pytest.approx(expected, rel=0.01)
    # Headroom re each channel's own full scale: 0 dB and 20 dB.
    assert digital.headroom.headroom_db == pytest.approx(0.0, abs=1e-9)
    assert analog.headroom.headroom_db == pytest.approx(20.0, abs=1e-9)
    assert (digital.full_scale, analog.full_scale) == (100.0, 1000.0)
    assert diag.full_scale is None  # not shared


def test_levels_of_each_channel_are_re_its_own_reference():
    # One 1 kHz sine of amplitude 1 (RMS 1/√2) read as pascals and as m/s²: its levels
    # are 20 lg(0.7071 / 20 µPa) = 90.97 dB and 20 lg(0.7071 / 1 µm/s²) = 116.99 dB
    # (ISO 1683 references; the level by definition). 1 kHz at 48 kHz: every 0.1 s
    # interval holds whole periods, RMS exactly 1/√2; the histogram reads at the centre
    # of a 0.05 dB bin (±0.025 dB).
    x = sine(1000.0, 1.0, 1.0)
    diag = check_capture(
        np.column_stack([x, x]),
        FS,
        full_scale=None,
        unit=["Pa", "m/s²"],
        reference=[20e-6, 1e-6],
    )
    mic, accel = diag.channels
    rms = 1 / math.sqrt(2)
    assert mic.noise.noise_floor_db == pytest.approx(20 * math.log10(rms / 20e-6), abs=0.026)
    assert accel.noise.noise_floor_db == pytest.approx(20 * math.log10(rms / 1e-6), abs=0.026)
    assert (mic.level_unit, accel.level_unit) == ("dB re 20 µPa", "dB re 1 µm/s²")
    # The PSD floors differ by exactly the references' ratio squared (same samples).
    assert mic.noise.psd_floor_db is not None and accel.noise.psd_floor_db is not None
    ratio_db = 20 * math.log10(20e-6 / 1e-6)
    assert accel.noise.psd_floor_db - mic.noise.psd_floor_db == pytest.approx(ratio_db)
    # A weighting only where it applies (IEC 61672-1: sound pressure), by default from
    # the unit; and on request off for a pressure channel too.
    assert mic.noise.noise_floor_a_db is not None and accel.noise.noise_floor_a_db is None
    off = check_capture(x, FS, unit="Pa", reference=20e-6, weightable=False)
    assert off.channels[0].noise.noise_floor_a_db is None
    doc = diag.as_dict()
    assert doc["unit"] is None and doc["reference"] is None
    assert doc["channels"][0]["reference_pa"] == 20e-6
    assert doc["channels"][1]["reference_m_per_s2"] == 1e-6
    assert "dB re 1 µm/s²" in accel.check("noise").evidence


def test_dc_offset_in_volts_through_each_channels_own_factor():
    # A DC of 2 units on both channels: 2 × 10 mV/unit = 20 mV and 2 × 1 mV/unit = 2 mV at
    # the sensor; no factor (an integrated channel) gives None.
    x = sine(1000.0, 1.0, 1.0) + 2.0
    diag = check_capture(
        np.column_stack([x, x, x]), FS, full_scale=None, volts_per_unit=[0.01, 0.001, None]
    )
    volts = [ch.dc.dc_offset_v for ch in diag.channels]
    assert volts[:2] == pytest.approx([0.02, 0.002], rel=1e-12)
    assert volts[2] is None
    assert diag.as_dict()["channels"][2]["dc_offset_v"] is None


def test_per_channel_options_are_validated():
    x = np.zeros((100, 2))
    with pytest.raises(InputError, match=r"full_scale: needs one value or one per channel \(2\)"):
        check_capture(x, FS, full_scale=[1.0])
    with pytest.raises(InputError, match="reference must be positive and finite, got -1"):
        check_capture(x, FS, reference=[1.0, -1.0])
    with pytest.raises(InputError, match=r"volts_per_unit \(or None\) must be positive"):
        check_capture(x, FS, volts_per_unit=[0.0, None])
    with pytest.raises(InputError, match="unit: needs one value or one per channel"):
        check_capture(x, FS, unit=["Pa", "V", "N"])


def test_missing_sensitivity_names_the_channels_without_one():
    x = np.column_stack([sine(997.0, 0.5, 1.0)] * 2)
    meta = CaptureMetadata(sensitivity_known=False, uncalibrated_channels=(1,))
    (check,) = check_capture(x, FS, metadata=meta).metadata_checks
    assert check.severity is Severity.WARN
    assert check.evidence.startswith("no sensor sensitivity given for channel 1: its levels")
    everyone = CaptureMetadata(sensitivity_known=False, uncalibrated_channels=(0, 1))
    (check,) = check_capture(x, FS, metadata=everyone).metadata_checks
    assert check.evidence.startswith("no sensor sensitivity given: the levels are in volts")


def test_a_channel_scaled_with_its_full_scale_and_reference_reads_the_same():
    # Invariance: multiplying a channel's samples, its full scale and its level reference
    # by one factor changes no dB figure, no count and no severity (every dB value is a
    # ratio to the full scale or to the reference). Each channel gets its own factor
    # (channel 0 holds the clips, channel 1 the hum); powers of two, so the scaled
    # samples are exact in binary and the figures agree to rounding.
    k = np.array([0.125, 256.0])
    x = _FEATURES * k
    options = dict(full_scale=list(k), reference=list(k), unit=["Pa", "m/s²"])
    scaled = check_capture(x, 2000.0, thresholds=_STREAM_TH, **options).as_dict()
    for a, b in zip(_WHOLE["channels"], scaled["channels"], strict=True):
        assert [c["severity"] for c in a["checks"]] == [c["severity"] for c in b["checks"]]
        for key in ("headroom_db", "peak_dbfs", "crest_factor_db", "noise_floor_db"):
            assert b[key] == pytest.approx(a[key], rel=1e-12, abs=1e-12), key
        assert b["clipping"]["clipped_samples"] == a["clipping"]["clipped_samples"]
        dbfs = [lv["level_dbfs"] for lv in b["clipping"]["levels"]]
        assert dbfs == pytest.approx([lv["level_dbfs"] for lv in a["clipping"]["levels"]])
        assert b["hum"]["status"] == a["hum"]["status"]
        assert b["noise"]["psd_floor_db"] == pytest.approx(a["noise"]["psd_floor_db"])
        assert b["hum"]["re_total_db"] == pytest.approx(a["hum"]["re_total_db"])
    assert scaled["channels"][1]["hum"]["level_db"] == pytest.approx(
        _WHOLE["channels"][1]["hum"]["level_db"]
    )
    # Streamed in uneven blocks with per-channel options: the same as the whole array.
    checker = CaptureChecker(2000.0, 2, thresholds=_STREAM_TH, **options)
    for block in np.array_split(x, 7):
        checker.update(block)
    _assert_same(scaled, checker.result().as_dict())


def test_time_domain_checks_do_not_depend_on_the_spectral_ones():
    # spectral=False (the batch runner's clipping metric) makes no diagnostic PSD: the
    # time-domain findings are the same numbers, hum and roll-off say they were not asked.
    fs = 48000.0
    t = np.arange(int(fs)) / fs
    x = np.clip(1.2 * np.sin(2 * np.pi * 440 * t), -1.0, 1.0) + 0.01 * np.sin(2 * np.pi * 50 * t)
    full = check_capture(x, fs).channels[0]
    quick = check_capture(x, fs, spectral=False).channels[0]
    assert quick.clipping == full.clipping and quick.headroom == full.headroom
    assert quick.dc == full.dc and quick.dropouts == full.dropouts
    assert full.clipping.clipped_samples > 0
    for name in ("hum", "rolloff"):
        assert "spectral checks not asked for" in quick.check(name).evidence
