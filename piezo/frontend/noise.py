"""Noise budget of a piezo front-end: per-source output PSD, equivalent input pressure,
A-weighted self-noise and dynamic range.

Sources (each an independent, Gaussian, one-sided density; powers add):

- thermal noise of the feedback resistor Rf (charge amplifier) or input resistor Rin
  (voltage mode), and of the sensor leakage Rs, as the Johnson–Nyquist current density
  i² = 4kT/R (Johnson 1928, Nyquist 1928) injected at the sensor node;
- op-amp current noise in, injected at the same node: all three reach the output
  through the front-end's transimpedance (the feedback impedance Rf ∥ Cf, or the input
  node impedance 1/(1/Rin + 1/Rs + jω(Cs + Cc + Cin)) times the gain);
- op-amp voltage noise en at the non-inverting input, times the noise gain
  1 + (1/Rs + jω(Cs + Cc + Cin))/(1/Rf + jωCf) for the charge amplifier (the textbook
  1 + (Cs + Cc)/Cf above the corner), or times G for the voltage buffer.

An optional 1/f corner fc scales a density squared by 1 + fc/f. Not modelled: the
sensor's dielectric loss noise, post-gain stage noise and ADC noise.

The equivalent input pressure is the output PSD divided by |H(f)|² (Pa²/Hz). The
A-weighted self-noise integrates it over 20 Hz–20 kHz with the analytic A-weighting of
IEC 61672-1:2013 Annex E (:func:`piezo.levels.weighting.weighting_db`) and is given in dB re
20 µPa.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import integrate

from piezo.errors import InputError
from piezo.frontend.model import (
    BOLTZMANN_J_PER_K,
    ChargeAmplifier,
    Frontend,
    frequency_response,
    midband_sensitivity_v_per_pa,
    transimpedance,
)
from piezo.levels.weighting import weighting_db

__all__ = [
    "REFERENCE_PRESSURE_PA",
    "NoiseBudget",
    "SelfNoise",
    "SourceNoise",
    "noise_budget",
    "noise_gain",
    "noise_gain_midband",
    "self_noise",
    "thermal_noise_density_v",
]

#: Reference sound pressure in gases, 20 µPa (ISO 1683:2015).
REFERENCE_PRESSURE_PA = 20e-6


def thermal_noise_density_v(resistance_ohm: float, temperature_k: float) -> float:
    """Open-circuit thermal noise density √(4kTR) of a resistor, V/√Hz (Johnson–Nyquist).

    Examples
    --------
    A 1 kΩ resistor at 300 K: √(4kTR) = 4.07 nV/√Hz (Johnson 1928, Nyquist 1928).

    >>> round(thermal_noise_density_v(1e3, 300.0) * 1e9, 2)
    4.07
    """
    if not (resistance_ohm > 0 and temperature_k > 0):
        raise InputError(
            f"thermal noise needs positive resistance and temperature, got "
            f"{resistance_ohm!r} ohm, {temperature_k!r} K"
        )
    return math.sqrt(4.0 * BOLTZMANN_J_PER_K * temperature_k * resistance_ohm)


def noise_gain(frontend: Frontend, frequency_hz: np.ndarray | float) -> np.ndarray:
    """Gain from the op-amp voltage noise to the output, complex (V/V).

    Charge amplifier: G·(Ysh + Yf)/Yf / (1 + (Ysh + Yf)/(A·Yf)); voltage buffer:
    G/(1 + G/A). G is the post gain.

    Examples
    --------
    Charge amplifier above its corner: 1 + Cs/Cf, here 1 + 1 nF / 100 pF = 11 (textbook
    charge-amplifier noise gain):

    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> round(float(abs(noise_gain(fe, 1000.0))), 3)
    11.0
    """
    f = np.asarray(frequency_hz, dtype=float)
    s = 2j * math.pi * f
    amp = frontend.amplifier
    a = math.inf if amp.gain_bandwidth_hz is None else 2.0 * math.pi * amp.gain_bandwidth_hz / s
    if isinstance(amp, ChargeAmplifier):
        g_leak = 0.0
        if frontend.sensor.leakage_resistance_ohm is not None:
            g_leak = 1.0 / frontend.sensor.leakage_resistance_ohm
        ysh = g_leak + s * frontend.shunt_capacitance_f
        yf = 1.0 / amp.feedback_resistance_ohm + s * amp.feedback_capacitance_f
        ratio = (ysh + yf) / yf
        return amp.gain * ratio / (1.0 + ratio / a)
    return amp.gain / (1.0 + amp.gain / a) * np.ones_like(s)


def noise_gain_midband(frontend: Frontend) -> float:
    """Noise gain of the amplifier stage between its corners (post gain excluded).

    1 + (Cs + Cc + Cin)/Cf for the charge amplifier, G for the voltage buffer.

    Examples
    --------
    >>> from piezo.frontend.model import Cable, ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9)
    >>> noise_gain_midband(Frontend(Sensor(10e-12, 1e-9), amp, Cable(1e-9)))  # 1 + 2 nF / 100 pF
    21.0
    """
    amp = frontend.amplifier
    if isinstance(amp, ChargeAmplifier):
        return 1.0 + frontend.shunt_capacitance_f / amp.feedback_capacitance_f
    return amp.gain


@dataclass(frozen=True)
class NoiseBudget:
    """Noise of each source at the output and referred to the input, per frequency.

    Attributes
    ----------
    frequency_hz
        Frequencies, Hz, shape (n,).
    keys, labels
        Source identifiers (design keys: ``feedback_resistance``, ``input_resistance``,
        ``leakage_resistance``, ``voltage_noise``, ``current_noise``) and readable labels.
    output_psd_v2_per_hz
        Output PSD per source, V²/Hz, shape (sources, n).
    input_psd_pa2_per_hz
        The same referred to the sensor, Pa²/Hz (divided by |H(f)|²).

    Examples
    --------
    The feedback resistor's current noise 4kT/Rf reaches the output through 1/(ωCf)
    above the corner:

    >>> import math
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> budget = noise_budget(fe, [1000.0])
    >>> expected = 4 * 1.380649e-23 * 300.0 / 1e9 / (2 * math.pi * 1000.0 * 100e-12) ** 2
    >>> budget.keys, round(float(budget.total_output_psd_v2_per_hz[0]) / expected, 4)
    (('feedback_resistance',), 1.0)
    """

    frequency_hz: np.ndarray
    keys: tuple[str, ...]
    labels: tuple[str, ...]
    output_psd_v2_per_hz: np.ndarray
    input_psd_pa2_per_hz: np.ndarray

    @property
    def total_output_psd_v2_per_hz(self) -> np.ndarray:
        """Sum over sources, V²/Hz."""
        return self.output_psd_v2_per_hz.sum(axis=0)

    @property
    def total_input_psd_pa2_per_hz(self) -> np.ndarray:
        """Sum over sources referred to the input, Pa²/Hz."""
        return self.input_psd_pa2_per_hz.sum(axis=0)


def _one_over_f(frequency_hz: np.ndarray, corner_hz: float) -> np.ndarray:
    return 1.0 + corner_hz / frequency_hz


def noise_budget(frontend: Frontend, frequency_hz: np.ndarray | float) -> NoiseBudget:
    """Noise budget of ``frontend`` at ``frequency_hz`` (Hz, > 0), see :class:`NoiseBudget`.

    Sources with zero density (op-amp noise not given, no leakage resistance) are left out.

    Examples
    --------
    The op-amp's voltage noise appears at the output times the noise gain 1 + Cs/Cf = 11:

    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9,
    ...                       voltage_noise_v_per_sqrt_hz=4e-9)
    >>> budget = noise_budget(Frontend(Sensor(10e-12, 1e-9), amp), [1000.0])
    >>> budget.keys
    ('feedback_resistance', 'voltage_noise')
    >>> round(float(budget.output_psd_v2_per_hz[1, 0]) ** 0.5 / 4e-9, 3)
    11.0
    """
    f = np.atleast_1d(np.asarray(frequency_hz, dtype=float))
    if f.ndim != 1 or not np.all(f > 0):
        raise InputError("noise budget frequencies must be a 1-D list of positive values")
    amp = frontend.amplifier
    kt4 = 4.0 * BOLTZMANN_J_PER_K * frontend.temperature_k
    tz2 = np.abs(transimpedance(frontend, f)) ** 2
    keys: list[str] = []
    labels: list[str] = []
    rows: list[np.ndarray] = []
    if isinstance(amp, ChargeAmplifier):
        keys.append("feedback_resistance")
        labels.append("Rf thermal")
        rows.append(kt4 / amp.feedback_resistance_ohm * tz2)
    else:
        keys.append("input_resistance")
        labels.append("Rin thermal")
        rows.append(kt4 / amp.input_resistance_ohm * tz2)
    if frontend.sensor.leakage_resistance_ohm is not None:
        keys.append("leakage_resistance")
        labels.append("Rs (leakage) thermal")
        rows.append(kt4 / frontend.sensor.leakage_resistance_ohm * tz2)
    if amp.voltage_noise_v_per_sqrt_hz > 0:
        en2 = amp.voltage_noise_v_per_sqrt_hz**2 * _one_over_f(f, amp.voltage_noise_corner_hz)
        keys.append("voltage_noise")
        labels.append("op-amp en × noise gain")
        rows.append(en2 * np.abs(noise_gain(frontend, f)) ** 2)
    if amp.current_noise_a_per_sqrt_hz > 0:
        in2 = amp.current_noise_a_per_sqrt_hz**2 * _one_over_f(f, amp.current_noise_corner_hz)
        keys.append("current_noise")
        labels.append("op-amp in × impedance")
        rows.append(in2 * tz2)
    out = np.vstack(rows)
    h2 = np.abs(frequency_response(frontend, f)) ** 2
    return NoiseBudget(
        frequency_hz=f,
        keys=tuple(keys),
        labels=tuple(labels),
        output_psd_v2_per_hz=out,
        input_psd_pa2_per_hz=out / h2,
    )


@dataclass(frozen=True)
class SourceNoise:
    """One line of the noise budget table.

    Examples
    --------
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9)
    >>> (line,) = self_noise(Frontend(Sensor(10e-12, 1e-9), amp)).sources
    >>> line.label, line.share
    ('Rf thermal', 1.0)
    """

    key: str
    label: str
    output_density_v_per_sqrt_hz: float
    input_density_pa_per_sqrt_hz: float
    a_weighted_db_spl: float
    share: float


@dataclass(frozen=True)
class SelfNoise:
    """Integrated self-noise of a front-end (see :func:`self_noise`).

    Attributes
    ----------
    a_weighted_db_spl, unweighted_db_spl
        Equivalent input noise over the band, dB re 20 µPa, A-weighted and unweighted.
    output_noise_v_rms
        Unweighted output noise over the band, volts RMS.
    sources
        Per-source lines; densities at ``reference_hz``; ``share`` is the fraction of the
        A-weighted noise power.
    max_spl_db
        Level of a midband sine whose peak just reaches the clip level, dB re 20 µPa
        (None without a clip level).
    dynamic_range_db
        max_spl_db − a_weighted_db_spl (None without a clip level).

    Examples
    --------
    A 10 V peak clip level at 0.1 V/Pa allows a sine of 10/√2/0.1 = 70.7 Pa RMS,
    20·lg(70.7 Pa / 20 µPa) = 130.97 dB:

    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9,
    ...                       clip_level_v=10.0)
    >>> noise = self_noise(Frontend(Sensor(10e-12, 1e-9), amp))
    >>> round(noise.max_spl_db, 2), round(noise.max_spl_db - noise.a_weighted_db_spl, 2)
    (130.97, 146.55)
    """

    band_hz: tuple[float, float]
    reference_hz: float
    a_weighted_db_spl: float
    unweighted_db_spl: float
    output_noise_v_rms: float
    sources: tuple[SourceNoise, ...]
    max_spl_db: float | None
    dynamic_range_db: float | None


def _db_spl(pressure_rms_pa: float) -> float:
    if pressure_rms_pa <= 0:
        return -math.inf
    return 20.0 * math.log10(pressure_rms_pa / REFERENCE_PRESSURE_PA)


def self_noise(
    frontend: Frontend,
    *,
    band_hz: tuple[float, float] = (20.0, 20000.0),
    reference_hz: float = 1000.0,
    points: int = 4001,
) -> SelfNoise:
    """Equivalent input self-noise, A-weighted and unweighted, and dynamic range.

    The input-referred PSD is integrated (Simpson's rule on a log-spaced grid of
    ``points`` frequencies, in the variable ln f) over ``band_hz``.

    Parameters
    ----------
    frontend
        The design.
    band_hz
        Integration band (low, high), Hz.
    reference_hz
        Frequency at which the per-source densities of the table are given.
    points
        Grid size; 4001 points over three decades resolve resonances with Q up to a few
        hundred.

    Examples
    --------
    Referred to the input, the feedback resistor's noise is 4kT/(Rf·(2πf·Sq)²) Pa²/Hz
    (the transimpedance cancels), whose integral over 20 Hz–20 kHz is
    4kT/(Rf·(2π·Sq)²)·(1/20 − 1/20000) (first principles):

    >>> import math
    >>> from piezo.frontend.model import ChargeAmplifier, Frontend, Sensor
    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9)
    >>> noise = self_noise(Frontend(Sensor(10e-12, 1e-9), amp))
    >>> p2 = 4 * 1.380649e-23 * 300.0 / (1e9 * (2 * math.pi * 10e-12) ** 2) * (1 / 20 - 1 / 20e3)
    >>> round(noise.unweighted_db_spl, 2), round(10 * math.log10(p2 / 20e-6**2), 2)
    (-2.81, -2.81)
    >>> noise.a_weighted_db_spl < noise.unweighted_db_spl  # the noise is mostly low-frequency
    True
    """
    lo, hi = band_hz
    if not (0 < lo < hi):
        raise InputError(f"noise band must be 0 < low < high, got {band_hz!r}")
    f = np.geomspace(lo, hi, points)
    budget = noise_budget(frontend, f)
    weight = 10.0 ** (weighting_db(f, weighting="A") / 10.0)
    ln_f = np.log(f)

    def integral(psd: np.ndarray) -> np.ndarray:
        # ∫ S(f) df = ∫ S(f)·f d(ln f)
        return integrate.simpson(psd * f, x=ln_f, axis=-1)

    per_source_a = integral(budget.input_psd_pa2_per_hz * weight)
    total_a = float(per_source_a.sum())
    total_flat = float(integral(budget.total_input_psd_pa2_per_hz))
    out_flat = float(integral(budget.total_output_psd_v2_per_hz))
    ref = noise_budget(frontend, np.array([reference_hz]))
    sources = tuple(
        SourceNoise(
            key=key,
            label=label,
            output_density_v_per_sqrt_hz=float(np.sqrt(ref.output_psd_v2_per_hz[i, 0])),
            input_density_pa_per_sqrt_hz=float(np.sqrt(ref.input_psd_pa2_per_hz[i, 0])),
            a_weighted_db_spl=_db_spl(math.sqrt(float(per_source_a[i]))),
            share=float(per_source_a[i]) / total_a if total_a > 0 else 0.0,
        )
        for i, (key, label) in enumerate(zip(budget.keys, budget.labels, strict=True))
    )
    a_db = _db_spl(math.sqrt(total_a))
    max_spl = None
    dynamic_range = None
    clip = frontend.amplifier.clip_level_v
    if clip is not None:
        max_spl = _db_spl(clip / math.sqrt(2.0) / midband_sensitivity_v_per_pa(frontend))
        dynamic_range = max_spl - a_db
    return SelfNoise(
        band_hz=(float(lo), float(hi)),
        reference_hz=float(reference_hz),
        a_weighted_db_spl=a_db,
        unweighted_db_spl=_db_spl(math.sqrt(total_flat)),
        output_noise_v_rms=math.sqrt(out_flat),
        sources=sources,
        max_spl_db=max_spl,
        dynamic_range_db=dynamic_range,
    )
