"""Synthetic demo: a back-to-back accelerometer comparison on a shaker bench.

Scenario (ours, invented numbers): a piezo accelerometer PA-12 is qualified against a
reference accelerometer RA-3 mounted back to back with it on a small electrodynamic
shaker, the comparison method of ISO 16063-21. The shaker plays band-limited random
noise (20 Hz-10 kHz, 1 g RMS at the mounting surface); both accelerometers feed IEPE
conditioners with 20 dB gain into a 2 V full-scale ADC at 25.6 kHz, 24 bit, 3 s.

- Reference RA-3 (channel 0): 10.15 mV/g at 160 Hz, from its calibration certificate,
  with a chart (``accel-bench-reference-chart.csv``) of its mounted resonance at 32 kHz,
  Q 40, as relative sensitivity and phase with a 0.2-0.4 dB expanded uncertainty.
- Unit under test PA-12 (channel 1): 9.62 mV/g at 160 Hz (its data sheet says 10 mV/g
  nominal), mounted resonance 14 kHz with Q 25, and an 8 Hz first-order roll-off of its
  built-in amplifier: +3.4 dB at 8 kHz and -0.63 dB at 20 Hz relative to 160 Hz.

Both responses are applied exactly (on every FFT bin of the whole record), and the
ADC adds white noise at -110 dBFS, so a comparison should find the PA-12 values above
within its own uncertainty. Nothing is written here; ``piezo demo`` writes the files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.demo.files import DemoFile

__all__ = ["BENCH_UNITS", "BenchAccelerometer", "bench_demo_files", "bench_demo_texts"]

SAMPLE_RATE_HZ = 25600.0
DURATION_S = 3.0
STANDARD_GRAVITY_M_PER_S2 = 9.80665  # CGPM 1901; ISO 80000-3
REFERENCE_FREQUENCY_HZ = 160.0
GAIN_DB = 20.0
FULL_SCALE_V = 2.0
BAND_HZ = (20.0, 10000.0)
PREFIX = "accel-bench"
CHART = f"{PREFIX}-reference-chart.csv"


@dataclass(frozen=True)
class BenchAccelerometer:
    """One accelerometer on the bench: the truth a comparison should find.

    Attributes
    ----------
    name, serial
        As the profile states them.
    sensitivity_v_per_g
        True sensitivity at :data:`REFERENCE_FREQUENCY_HZ`.
    resonance_hz, q
        Mounted resonance (a single-degree-of-freedom seismic sensor).
    highpass_hz
        First-order roll-off of its conditioning, or 0 for none.

    Examples
    --------
    >>> unit = BENCH_UNITS[1]
    >>> [round(float(x), 2) for x in unit.relative_db(np.array([20.0, 160.0, 8000.0]))]
    [-0.63, 0.0, 3.44]
    """

    name: str
    serial: str
    sensitivity_v_per_g: float
    resonance_hz: float
    q: float
    highpass_hz: float = 0.0

    def _shape(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Response shape: ``1 / (1 - r² + j r / Q)`` with ``r = f / f_r``.

        The single-degree-of-freedom model of a seismic accelerometer below and through
        its mounted resonance (Harris' Shock and Vibration Handbook, the chapter on
        piezoelectric transducers); the conditioning multiplies by ``j f / (f_c + j f)``.
        """
        f = np.asarray(frequency_hz, dtype=float)
        r = f / self.resonance_hz
        h: np.ndarray = 1.0 / (1.0 - r**2 + 1j * r / self.q)
        if self.highpass_hz > 0:
            h = h * (1j * f / (self.highpass_hz + 1j * f))
        return h

    def response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Complex sensitivity in V per (m/s²); its magnitude at 160 Hz is the stated one."""
        at_ref = abs(complex(self._shape(np.array([REFERENCE_FREQUENCY_HZ]))[0]))
        scale = self.sensitivity_v_per_g / STANDARD_GRAVITY_M_PER_S2 / at_ref
        return scale * self._shape(frequency_hz)

    def relative_db(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Sensitivity relative to the one at the reference frequency, dB."""
        s = np.abs(self.response(frequency_hz))
        return 20 * np.log10(s * STANDARD_GRAVITY_M_PER_S2 / self.sensitivity_v_per_g)


#: The reference (channel 0) and the unit under test (channel 1).
BENCH_UNITS = (
    BenchAccelerometer("reference accelerometer RA-3 (demo)", "RA3-0112", 10.15e-3, 32000.0, 40.0),
    BenchAccelerometer(
        "piezo accelerometer PA-12 (demo)", "PA12-2291", 9.62e-3, 14000.0, 25.0, highpass_hz=8.0
    ),
)


def _chart_text() -> str:
    ref = BENCH_UNITS[0]
    f = np.array([10, 20, 40, 80, 160, 315, 630, 1250, 2500, 4000, 5000, 6300, 8000, 10000])
    f = f.astype(float)
    rel = ref.relative_db(f)
    phase = np.degrees(np.angle(ref.response(f)))
    unc = np.where(f <= 5000, 0.2, 0.4)  # a typical certificate's steps (invented here)
    lines = [
        f"# {ref.name} {ref.serial}: calibration chart (demo), relative to 10.15 mV/g at 160 Hz",
        "# back-to-back against a laboratory standard; expanded uncertainty k = 2",
        "frequency_hz,relative_db,phase_deg,expanded_uncertainty_db",
    ]
    for fi, ri, pi, ui in zip(f, rel, phase, unc, strict=True):
        lines.append(f"{fi:g},{_tidy(ri, 3)},{_tidy(pi, 2)},{ui:.1f}")
    return "\n".join(lines) + "\n"


def _tidy(value: float, digits: int) -> str:
    """Fixed-point text without a negative zero."""
    return f"{round(float(value), digits) + 0.0:.{digits}f}"


def _profile_text() -> str:
    ref, unit = BENCH_UNITS
    return f"""\
# Back-to-back accelerometer bench (demo): reference RA-3 on channel 0, unit under test
# PA-12 on channel 1, both through IEPE conditioners into one ADC.
[sensor]
quantity = "acceleration"

[chain]
gain = "{GAIN_DB:g} dB"
full_scale = "{FULL_SCALE_V:g} V"

[channel.0]
name = "{ref.name}"
serial = "{ref.serial}"
sensitivity = "{ref.sensitivity_v_per_g * 1e3:.2f} mV/g"
response_curve = "{CHART}"

[channel.1]
name = "{unit.name}"
serial = "{unit.serial}"
sensitivity = "10 mV/g"   # data sheet nominal; the comparison measures it
"""


def _bench() -> DemoFile:
    fs = SAMPLE_RATE_HZ
    n = int(fs * DURATION_S)
    rng = np.random.default_rng(160630)
    f = np.fft.rfftfreq(n, 1 / fs)
    spectrum = rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)
    spectrum[(f < BAND_HZ[0]) | (f > BAND_HZ[1])] = 0.0
    accel = np.fft.irfft(spectrum, n)
    accel *= STANDARD_GRAVITY_M_PER_S2 / math.sqrt(np.mean(accel**2))  # 1 g RMS
    a_spec = np.fft.rfft(accel)
    gain = 10 ** (GAIN_DB / 20)
    columns = []
    for unit in BENCH_UNITS:
        volts = np.fft.irfft(a_spec * unit.response(f), n) * gain
        volts += FULL_SCALE_V * 10 ** (-110 / 20) * rng.standard_normal(n)
        columns.append(volts / FULL_SCALE_V)
    return DemoFile(
        f"{PREFIX}.flac",
        np.column_stack(columns),
        fs,
        "PCM_24",
        _profile_text(),
        None,
        "back-to-back accelerometer comparison on a shaker (reference and unit under test)",
    )


def bench_demo_files() -> list[DemoFile]:
    """The bench recordings (deterministic).

    Examples
    --------
    >>> [item.name for item in bench_demo_files()]
    ['accel-bench.flac']
    """
    return [_bench()]


def bench_demo_texts() -> dict[str, str]:
    """Text files that go with the bench recording: the reference's chart.

    Examples
    --------
    >>> text = bench_demo_texts()["accel-bench-reference-chart.csv"]
    >>> text.splitlines()[2]
    'frequency_hz,relative_db,phase_deg,expanded_uncertainty_db'
    """
    return {CHART: _chart_text()}
