"""Stimuli: exponential sine sweep (Farina 2000), its inverse filter, pink and white noise."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from piezo.errors import InputError, SpecError
from piezo.response.stimulus import (
    NoiseSpec,
    SweepSpec,
    harmonic_offsets_s,
    inverse_filter,
    noise_signal,
    stimulus_from_toml,
    sweep_signal,
    sweep_spec,
)

FS = 48000.0


def test_harmonic_offsets_farina_2000():
    # Farina 2000 (AES 108th Conv., preprint 5093): the N-th harmonic IR arrives
    # Δt_N = T ln N / ln(f2/f1) before the linear one. Check values for T = 10 s,
    # 20 Hz–20 kHz recomputed from that formula, given to
    # 5 decimals, hence the 5e-6 s tolerance (half a unit in the last place).
    spec = sweep_spec(20.0, 20000.0, 10.0, FS)
    offsets = harmonic_offsets_s(spec)
    expected = {2: 1.00343, 3: 1.59040, 4: 2.00687, 5: 2.32990}
    assert set(offsets) == set(expected)
    for n, value in expected.items():
        assert offsets[n] == pytest.approx(value, abs=5e-6)


def test_sweep_follows_farina_instantaneous_frequency():
    # Farina 2000: x(t) = sin[(2π f1 T/R)(e^(Rt/T) − 1)], instantaneous frequency
    # f1 e^(Rt/T). Measure it from the upward zero crossings: one cycle lies between
    # consecutive crossings, so 1/Δt is the cycle's mean frequency, which differs from
    # the frequency at the cycle's midpoint by (R/T)² Δt² / 24 relative: < 4e-4 at 50 Hz
    # here. Linear interpolation of the crossing times adds more at the top (5 kHz is
    # 0.65 rad per sample): 1.2e-3 measured, hence 2e-3. A 1 % error in R would show as
    # 4.6 % at the end of the sweep.
    spec = sweep_spec(50.0, 5000.0, 1.0, FS, fade_in_s=0.0, fade_out_s=0.0)
    x = sweep_signal(spec)
    i = np.flatnonzero((x[:-1] < 0) & (x[1:] >= 0))
    crossing = (i - x[i] / (x[i + 1] - x[i])) / FS
    mid = 0.5 * (crossing[1:] + crossing[:-1])
    measured = 1.0 / np.diff(crossing)
    expected = 50.0 * np.exp(math.log(100.0) * mid / 1.0)
    np.testing.assert_allclose(measured, expected, rtol=2e-3)
    t = np.arange(x.size) / FS
    # The samples themselves equal the closed form.
    r = math.log(100.0)
    closed = 10 ** (-6 / 20) * np.sin(2 * np.pi * 50.0 * 1.0 / r * (np.exp(r * t) - 1.0))
    np.testing.assert_allclose(x, closed, atol=1e-12)


def test_level_fades_and_silences():
    spec = sweep_spec(
        20.0, 20000.0, 1.0, FS, level_dbfs=-12.0, silence_before_s=0.25, silence_after_s=0.5
    )
    x = sweep_signal(spec)
    assert x.size == round(0.25 * FS) + round(1.0 * FS) + round(0.5 * FS)
    assert np.all(x[: round(0.25 * FS)] == 0.0)
    assert np.all(x[-round(0.5 * FS) :] == 0.0)
    sweep = x[round(0.25 * FS) : round(1.25 * FS)]
    # The half-Hann fades start and end at zero gain.
    assert sweep[0] == 0.0
    assert abs(sweep[-1]) < 1e-6
    # Peak 10^(-12/20) of full scale: at 48 kHz a sine below 20 kHz has samples within
    # 1 - cos(π 20/48) = 0.26 of its peak per half cycle; over the thousands of cycles of a
    # sweep some land within 1e-4 of it.
    assert np.max(np.abs(sweep)) == pytest.approx(10 ** (-12 / 20), rel=1e-4)
    # Between the fades the RMS of a sine is peak/√2 (the sweep passes so many cycles
    # that the partial cycles at the ends change the mean square by < 0.1 %).
    core = sweep[round(spec.fade_in_s * FS) : -round(spec.fade_out_s * FS)]
    assert np.sqrt(np.mean(core**2)) == pytest.approx(10 ** (-12 / 20) / math.sqrt(2), rel=1e-3)


def test_default_fades_are_octave_fractions():
    spec = sweep_spec(20.0, 20000.0, 5.0, FS)
    seconds_per_octave = 5.0 * math.log(2) / math.log(1000)
    assert spec.fade_in_s == pytest.approx(0.5 * seconds_per_octave)
    assert spec.fade_out_s == pytest.approx(seconds_per_octave / 24)


def test_inverse_filter_envelope_farina_2000():
    # Farina 2000: the inverse filter is the time-reversed sweep with amplitude envelope
    # e^(−R τ/T), i.e. falling 6.02 dB per octave as the frequency falls (reference
    # values). Divide it by the reversed sweep sample by sample.
    spec = sweep_spec(20.0, 20000.0, 2.0, FS)
    sweep = sweep_signal(spec)
    inv = inverse_filter(spec)
    rev = sweep[::-1]
    n = np.arange(inv.size)
    ok = np.abs(rev) > 0.1 * spec.amplitude
    ratio = inv[ok] / rev[ok]
    envelope = np.exp(-spec.rate_constant * n[ok] / (FS * spec.duration_s))
    # Ratio / envelope is the one normalising constant (floating-point rounding only).
    np.testing.assert_allclose(ratio / envelope, (ratio / envelope)[0], rtol=1e-9)
    # One octave of sweep time (T ln2 / R) later in τ the amplitude is halved: −6.02 dB.
    octave = round(spec.duration_s * math.log(2) / spec.rate_constant * FS)
    env = np.exp(-spec.rate_constant * n / (FS * spec.duration_s))
    assert 20 * math.log10(env[octave] / env[0]) == pytest.approx(-6.0206, abs=1e-3)


def test_inverse_filter_gives_unit_gain():
    # Normalisation: sweep * inverse has unit gain across the band. The envelope makes it
    # flat only in the stationary-phase approximation (Farina 2000), with ripple near the
    # band edges; one octave above the fade-in (56 Hz) to f2/2 it measures 0.03 dB for a
    # 2 s sweep, so 0.1 dB is a bound that still fails for a wrong envelope (a missing
    # envelope tilts the product by 6 dB per octave). Near the edges the analysis divides
    # this ripple out (see test_response).
    spec = sweep_spec(20.0, 20000.0, 2.0, FS)
    sweep = sweep_signal(spec)
    inv = inverse_filter(spec)
    n = 4 * sweep.size
    d = np.abs(np.fft.rfft(sweep, n) * np.fft.rfft(inv, n))
    f = np.fft.rfftfreq(n, 1 / FS)
    band = (f > 56) & (f < 10000)
    assert np.max(np.abs(20 * np.log10(d[band]))) < 0.1
    # Its peak in time sits at zero lag (index sweep_frames − 1 of the full convolution).
    full = np.fft.irfft(np.fft.rfft(sweep, n) * np.fft.rfft(inv, n), n)
    assert int(np.argmax(np.abs(full))) == sweep.size - 1


def test_sidecar_round_trip_is_exact():
    spec = sweep_spec(
        1.0 / 3.0 * 60,
        20000.0,
        5.0,
        44100.0,
        level_dbfs=-6.5,
        silence_before_s=0.1,
        silence_after_s=1.0 / 7.0,
        acoustic_level_pa=1.0023722,
    )
    text = spec.to_toml()
    assert "[stimulus]" in text
    back = SweepSpec.from_toml(text)
    assert back == spec
    assert np.array_equal(inverse_filter(back), inverse_filter(spec))


def test_sidecar_without_acoustic_level():
    spec = sweep_spec(20.0, 20000.0, 1.0, FS)
    text = spec.to_toml()
    assert "acoustic_level_pa" not in text
    assert SweepSpec.from_toml(text).acoustic_level_pa is None


def test_sidecar_keeps_a_shaker_level_in_its_quantitys_unit():
    # 1 g RMS on a shaker (g = 9.80665 m/s², ISO 80000-3): its own key, in m/s².
    spec = sweep_spec(20.0, 2000.0, 1.0, FS, sensor_level=9.80665, sensor_quantity="acceleration")
    text = spec.to_toml()
    assert "acceleration_level_m_per_s2 = 9.80665\n" in text
    assert "acoustic_level_pa" not in text
    back = SweepSpec.from_toml(text)
    assert back == spec and back.sensor_level == (9.80665, "acceleration")


def test_sidecar_sound_pressure_level_is_written_as_before():
    # Sound pressure keeps the old key, so files written before read the same and a
    # pressure sidecar is byte for byte what it was (the demo's recordings/).
    old = sweep_spec(20.0, 2000.0, 1.0, FS, acoustic_level_pa=1.0023722)
    new = sweep_spec(20.0, 2000.0, 1.0, FS, sensor_level=1.0023722, sensor_quantity="pressure")
    assert new.to_toml() == old.to_toml()
    assert [line for line in old.to_toml().splitlines() if "level" in line] == [
        "level_dbfs = -6.0",
        "acoustic_level_pa = 1.0023722",
    ]
    assert SweepSpec.from_toml(old.to_toml()).sensor_level == (1.0023722, "pressure")


def test_sidecar_level_refusals():
    text = sweep_spec(20.0, 2000.0, 1.0, FS, acoustic_level_pa=1.0).to_toml()
    with pytest.raises(SpecError, match=r"given twice .*acoustic_level_pa and force_level_n"):
        SweepSpec.from_toml(text + "force_level_n = 5.0\n")
    with pytest.raises(SpecError, match="'force_level_n' must be a number"):
        SweepSpec.from_toml(text.replace("acoustic_level_pa = 1.0", 'force_level_n = "5 N"'))
    with pytest.raises(SpecError, match="force_level_n must be a positive finite number"):
        SweepSpec.from_toml(text.replace("acoustic_level_pa = 1.0", "force_level_n = -5.0"))
    with pytest.raises(InputError, match="one of pressure, acceleration, velocity"):
        sweep_spec(20.0, 2000.0, 1.0, FS, sensor_level=1.0, sensor_quantity="voltage")
    with pytest.raises(InputError, match="not both"):
        sweep_spec(20.0, 2000.0, 1.0, FS, acoustic_level_pa=1.0, sensor_level=1.0)


def test_noise_sidecar_round_trip():
    spec = NoiseSpec("pink", 2.0, FS, -20.0, seed=7, fade_s=0.01)
    back = stimulus_from_toml(spec.to_toml())
    assert back == spec
    assert np.array_equal(noise_signal(back), noise_signal(spec))


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("not toml [", "TOML syntax error"),
        ("[other]\nkind = 1\n", r"no \[stimulus\] table"),
        ('[stimulus]\nkind = "square"\n', "unknown stimulus kind 'square'"),
        ('[stimulus]\nkind = "exponential-sine-sweep"\nstart_hz = 20\n', "incomplete"),
        (
            '[stimulus]\nkind = "white-noise"\nduration_s = 1\nsample_rate_hz = 48000\n'
            "level_dbfs = -20\nseed = 1\ncolour = 3\n",
            "unknown key",
        ),
        ('[stimulus]\nkind = "pink-noise"\nduration_s = "1 s"\n', "must be a number"),
    ],
)
def test_bad_sidecar(text, match):
    with pytest.raises(SpecError, match=match):
        stimulus_from_toml(text, source="x.toml")


def test_sweep_from_toml_rejects_noise():
    with pytest.raises(SpecError, match="not an exponential sine sweep"):
        SweepSpec.from_toml(NoiseSpec("white", 1.0, FS, -20.0, seed=1).to_toml())


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"start_hz": 20.0, "stop_hz": 30000.0}, "above half the sample rate"),
        ({"start_hz": 200.0, "stop_hz": 100.0}, "must be above start_hz"),
        ({"start_hz": 0.0, "stop_hz": 100.0}, "start_hz must be a positive"),
        ({"start_hz": 20.0, "stop_hz": 2000.0, "level_dbfs": 3.0}, "at most 0 dBFS"),
        (
            {"start_hz": 20.0, "stop_hz": 2000.0, "fade_in_s": 0.8, "fade_out_s": 0.5},
            "longer than the sweep",
        ),
        ({"start_hz": 20.0, "stop_hz": 2000.0, "silence_before_s": -1.0}, "silence_before_s"),
    ],
)
def test_bad_sweep_parameters(kwargs, match):
    start, stop = kwargs.pop("start_hz"), kwargs.pop("stop_hz")
    with pytest.raises(InputError, match=match):
        sweep_spec(start, stop, 1.0, FS, **kwargs)


def _psd_slope_db_per_octave(x: np.ndarray, lo: float, hi: float) -> float:
    f, p = scipy.signal.welch(x, FS, nperseg=4096)
    sel = (f >= lo) & (f <= hi)
    slope, _ = np.polyfit(np.log2(f[sel]), 10 * np.log10(p[sel]), 1)
    return float(slope)


def test_white_noise_level_and_flat_spectrum():
    x = noise_signal(NoiseSpec("white", 4.0, FS, -20.0, seed=3))
    assert x.size == 4 * 48000
    # −20 dBFS (AES17): the RMS of a sine of peak 0.1, i.e. 0.1/√2; scaled exactly.
    assert math.sqrt(np.mean(x**2)) == pytest.approx(0.1 / math.sqrt(2), rel=1e-12)
    # White: flat density. A least-squares slope over ~1000 Welch bins of 93 averages
    # has a standard error far below 0.1 dB/octave.
    assert abs(_psd_slope_db_per_octave(x, 50, 20000)) < 0.1


def test_pink_noise_falls_3db_per_octave():
    # Pink noise: density ∝ 1/f, i.e. −10 lg 2 = −3.01 dB per octave (definition).
    x = noise_signal(NoiseSpec("pink", 4.0, FS, -20.0, seed=3))
    assert math.sqrt(np.mean(x**2)) == pytest.approx(0.1 / math.sqrt(2), rel=1e-12)
    assert _psd_slope_db_per_octave(x, 50, 20000) == pytest.approx(-3.0103, abs=0.1)


def test_noise_is_seeded():
    a = noise_signal(NoiseSpec("pink", 0.5, FS, -20.0, seed=11))
    b = noise_signal(NoiseSpec("pink", 0.5, FS, -20.0, seed=11))
    c = noise_signal(NoiseSpec("pink", 0.5, FS, -20.0, seed=12))
    assert np.array_equal(a, b)
    assert not np.allclose(a, c)


def test_noise_refuses_to_clip():
    # Gaussian noise at −3 dBFS RMS (0.5 of full scale) has samples beyond ±1 in a second.
    with pytest.raises(InputError, match="lower the level"):
        noise_signal(NoiseSpec("white", 1.0, FS, -3.0, seed=1))


def test_noise_bad_color():
    with pytest.raises(InputError, match="'white' or 'pink'"):
        NoiseSpec("brown", 1.0, FS, -20.0, seed=1)
