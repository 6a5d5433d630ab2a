"""Synthetic demo recordings, in scenarios of our own.

Everything here is generated from fixed seeds: the same call gives the same samples on
every machine. Nothing is written here; ``piezo demo`` (the command line) writes the files.

Scenarios
---------
- ``calibrator-94dB.wav``: a piezo film microphone in a 94 dB, 1 kHz sound calibrator,
  recorded through a 20 dB preamplifier into a 2 V full-scale ADC. The profile has no
  sensitivity yet: ``piezo calibrate`` measures it (the film element was made with
  8.5 mV/Pa).
- ``pump-bench.flac``: two piezo disc microphones beside a centrifugal pump on a test
  bench (shaft 24.75 Hz, seven vanes: blade-pass tone 173.25 Hz and harmonics, broadband
  flow noise). Channel 1's preamplifier saturates at 80 % of full scale during bursts of
  cavitation knocks and carries a DC offset.
- ``tank-hydrophone.flac``: a hydrophone (−196 dB re 1 V/µPa) in a water test tank with a
  small circulation pump; levels in dB re 1 µPa (ISO 1683).
- ``tap-test.csv``: a scope export of a piezo disc struck by a small hammer, with a time
  column and two voltage columns (disc output, and a reference accelerometer channel).
- ``valve-pickup-*``: contact pickups on a valve test rig measured with a swept sine
  (see :mod:`piezo.demo.response`).
- ``accel-bench.flac``: a back-to-back accelerometer comparison on a shaker, with the
  reference's calibration chart (see :mod:`piezo.demo.bench`).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy import signal

from piezo.demo.bench import bench_demo_files, bench_demo_texts
from piezo.demo.files import DemoFile
from piezo.demo.frontend import frontend_demo_texts
from piezo.demo.response import response_demo_files, response_demo_texts

__all__ = ["DemoFile", "demo_files", "demo_texts"]


def _pink(n: int, rng: np.random.Generator) -> np.ndarray:
    """Unit-RMS pink noise (−3 dB per octave) by spectral shaping of white noise."""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.arange(spec.size, dtype=float)
    f[0] = 1.0
    spec /= np.sqrt(f)
    spec[0] = 0.0
    x = np.fft.irfft(spec, n)
    return x / np.sqrt(np.mean(x**2))


def _calibrator() -> DemoFile:
    fs, seconds = 48000, 4.0
    rng = np.random.default_rng(94)
    t = np.arange(int(fs * seconds)) / fs
    p_rms = 20e-6 * 10 ** (94 / 20)
    f0 = 1001.3  # within the ±0.7 % frequency tolerance of a class 1 calibrator
    pressure = (
        p_rms
        * np.sqrt(2)
        * (np.sin(2 * np.pi * f0 * t) + 0.003 * np.sin(2 * np.pi * 2 * f0 * t + 0.4))
    )
    pressure += 20e-6 * 10 ** (42 / 20) * rng.standard_normal(t.size)  # room noise
    volts = pressure * 8.5e-3 * 10.0  # 8.5 mV/Pa element, 20 dB preamplifier
    raw = volts / 2.0  # 2 V at full scale
    sidecar = """\
# Piezo film microphone FM-3 (demo), serial FM3-0042, on a 94 dB / 1 kHz calibrator.
# No sensitivity yet: run  piezo calibrate recordings/calibrator-94dB.wav
[sensor]
name = "film microphone FM-3 (demo)"
serial = "FM3-0042"
capacitance = "1.1 nF"

[chain]
gain = "20 dB"
full_scale = "2 V"
"""
    return DemoFile(
        "calibrator-94dB.wav",
        raw[:, None],
        fs,
        "PCM_24",
        sidecar,
        None,
        "film microphone on a 94 dB, 1 kHz calibrator (sensitivity to be measured)",
    )


def _pump_bench() -> DemoFile:
    fs, seconds = 48000, 5.0
    rng = np.random.default_rng(1485)
    n = int(fs * seconds)
    t = np.arange(n) / fs
    shaft_hz = 24.75
    bpf_hz = 7 * shaft_hz
    sens, gain, full_scale = 12e-3, 10 ** (6 / 20), 2.0
    chans = []
    for ch in range(2):
        tones = np.zeros(n)
        for k, amp_pa in ((1, 0.12), (2, 0.05), (3, 0.02)):
            tones += amp_pa * np.sqrt(2) * np.sin(2 * np.pi * k * bpf_hz * t + 0.7 * k + ch)
        tones += 0.03 * np.sqrt(2) * np.sin(2 * np.pi * shaft_hz * t)
        flow = _pink(n, rng)
        sos = signal.butter(2, [30, 12000], btype="bandpass", fs=fs, output="sos")
        flow = signal.sosfilt(sos, flow)
        flow *= 0.35 / np.sqrt(np.mean(flow**2))  # about 85 dB re 20 µPa broadband
        pressure = tones + flow
        if ch == 1:
            # Cavitation knocks: short decaying bursts at 2.6 kHz, three per second.
            knocks = np.zeros(n)
            for start in np.arange(0.31, seconds - 0.1, 0.333):
                i0 = int(start * fs)
                m = min(n - i0, int(0.02 * fs))
                tk = np.arange(m) / fs
                knocks[i0 : i0 + m] += 90.0 * np.exp(-tk / 0.004) * np.sin(2 * np.pi * 2600 * tk)
            pressure = pressure + knocks
        raw = pressure * sens * gain / full_scale
        if ch == 1:
            raw = np.clip(raw, -0.8, 0.8) + 0.012  # preamp saturates; DC offset after it
        chans.append(raw)
    sidecar = """\
# Two piezo disc microphones PD-27 (demo) at the pump test bench, bay 3.
[sensor]
name = "piezo disc microphone PD-27 (demo)"
serial = "PD27-bench-pair"
sensitivity = "12 mV/Pa"
capacitance = "18 nF"
calibration_date = 2026-11-24

[chain]
gain = "6 dB"
full_scale = "2 V"
sample_rate = "48 kHz"
"""
    return DemoFile(
        "pump-bench.flac",
        np.column_stack(chans),
        fs,
        "PCM_16",
        sidecar,
        None,
        "two disc microphones at a pump test bench; channel 1 clips during cavitation knocks",
    )


def _hydrophone() -> DemoFile:
    fs, seconds = 48000, 4.0
    rng = np.random.default_rng(1683)
    n = int(fs * seconds)
    t = np.arange(n) / fs
    sens = 10 ** (-196 / 20) * 1e6  # −196 dB re 1 V/µPa in V/Pa
    gain, full_scale = 10 ** (40 / 20), 5.0
    # Circulation pump: 47.5 Hz shaft and its harmonics, 120 dB re 1 µPa broadband.
    p = np.zeros(n)
    for k, level_db in ((1, 118.0), (2, 112.0), (4, 106.0)):
        p += 1e-6 * 10 ** (level_db / 20) * np.sqrt(2) * np.sin(2 * np.pi * 47.5 * k * t + k)
    noise = _pink(n, rng)
    noise = signal.sosfilt(signal.butter(2, 20, btype="highpass", fs=fs, output="sos"), noise)
    p += 1e-6 * 10 ** (120 / 20) * noise / np.sqrt(np.mean(noise**2))
    raw = p * sens * gain / full_scale
    sidecar = """\
# Hydrophone HX-9 (demo) in the 2 m test tank; levels in dB re 1 µPa (ISO 1683).
[sensor]
name = "hydrophone HX-9 (demo)"
serial = "HX9-0007"
sensitivity = "-76 dBV/Pa"   # -196 dB re 1 V/µPa
capacitance = "4.7 nF"
calibration_date = 2026-10-02

[chain]
gain = "40 dB"
full_scale = "5 V"
reference = "1 uPa"
"""
    return DemoFile(
        "tank-hydrophone.flac",
        raw[:, None],
        fs,
        "PCM_24",
        sidecar,
        None,
        "hydrophone in a water test tank with a circulation pump (dB re 1 µPa)",
    )


def _tap_test() -> DemoFile:
    fs, seconds = 20000, 0.25
    rng = np.random.default_rng(3200)
    n = int(fs * seconds)
    t = np.arange(n) / fs
    t0 = 0.02
    tau = np.clip(t - t0, 0, None)
    hit = t >= t0
    disc = hit * 0.8 * np.exp(-tau / 0.018) * np.sin(2 * np.pi * 3200 * tau)
    disc += hit * 0.25 * np.exp(-tau / 0.006) * np.sin(2 * np.pi * 8100 * tau)
    ref = hit * 0.5 * np.exp(-tau / 0.015) * np.sin(2 * np.pi * 3200 * tau + 0.3)
    disc += 2e-3 * rng.standard_normal(n)
    ref += 1e-3 * rng.standard_normal(n)
    table = np.column_stack([t, np.round(disc, 6), np.round(ref, 6)])
    return DemoFile(
        "tap-test.csv",
        table,
        fs,
        None,
        None,
        ("Time (s)", "Disc (V)", "Reference (V)"),
        "scope export of a piezo disc tap test (time column, two voltage columns)",
    )


#: The scenario generators, in the order ``piezo demo`` writes them.
SCENARIOS: tuple[Callable[[], DemoFile], ...] = (_calibrator, _pump_bench, _hydrophone, _tap_test)


def demo_files() -> list[DemoFile]:
    """Generate every demo recording (deterministic), all scenarios.

    Examples
    --------
    The calibrator capture is 94 dB SPL (1.0024 Pa RMS) on an 8.5 mV/Pa element with
    20 dB gain into 2 V full scale: ``1.0024 × 0.0085 × 10 / 2`` = 0.0426 of full scale
    RMS (plus a little room noise):

    >>> files = demo_files()
    >>> [f.name for f in files][:4]
    ['calibrator-94dB.wav', 'pump-bench.flac', 'tank-hydrophone.flac', 'tap-test.csv']
    >>> x = files[0].samples[:, 0]
    >>> files[0].sample_rate_hz, round(float(np.sqrt(np.mean(x**2))), 4)
    (48000, 0.0426)
    >>> files[3].header
    ('Time (s)', 'Disc (V)', 'Reference (V)')
    """
    return [make() for make in SCENARIOS] + response_demo_files() + bench_demo_files()


def demo_texts() -> dict[str, str]:
    """Text files that go with the demo recordings (stimulus descriptions, golden data).

    Examples
    --------
    >>> sorted(demo_texts())
    ['accel-bench-reference-chart.csv', 'designs/film-buffer-voltage.toml',
     'designs/pump-disc-charge.toml', 'valve-pickup-golden.csv',
     'valve-pickup-sweep.stimulus.toml']
    """
    return {**response_demo_texts(), **frontend_demo_texts(), **bench_demo_texts()}
