"""Piezo front-end models: sensor, cable, and a charge or voltage amplifier.

The models are continuous-time and exact for the circuit they describe: the complex
response H(f) is the solution of the nodal equations at each frequency, not a
straight-line approximation. Corners, usable bands and phase are read off that exact
response numerically, so interactions (a resonance near the high-pass, a slow op-amp)
show up instead of being assumed away.

Circuit (all elements in parallel at the sensor node, SI units)::

    charge source  i = jω·q(f),  q(f) = Sq·M(f)·p(f)      Sq charge sensitivity, C/Pa
    sensor         Cs ∥ Rs       (Rs leakage, optional)
    cable          Cc
    amplifier      charge:  inverting input of an op-amp with Rf ∥ Cf to the output
                   voltage: input resistor Rin ∥ input capacitance Cin, then gain G

M(f) = 1 / (1 − r² + j·r/Q), r = f/fr, is the single-degree-of-freedom mounted
resonance of the sensor (second-order mechanical system; Den Hartog, Mechanical
Vibrations, ch. 2). The op-amp, when a gain-bandwidth product is given, has the
dominant-pole open-loop gain A(s) = 2π·GBW / s.

Relations the model reduces to (charge-amplifier and voltage-mode textbook relations):

- charge amplifier, ideal op-amp: H = −G·Sq·jωRf / (1 + jωRfCf); midband −G·Sq/Cf;
  corner 1/(2πRfCf); noise gain for the op-amp voltage noise 1 + (Cs + Cc + Cin)/Cf;
- voltage mode: H = G·Sq·jω / (1/Rin + 1/Rs + jω(Cs + Cc + Cin)); midband
  G·Sq/(Cs + Cc + Cin), i.e. the open-circuit voltage Sq/Cs divided by the capacitive
  divider Cs/(Cs + Cc + Cin); corner 1/(2π(Rin ∥ Rs)(Cs + Cc + Cin)).

A front-end design is read from TOML by :func:`load_frontend`; see ``docs/frontend.md``.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar, Literal

import numpy as np
from scipy import optimize

from piezo import validate
from piezo.chain.units import parse_gain, parse_quantity, parse_sensitivity, ratio_to_db
from piezo.errors import InputError, SpecError, UnitError
from piezo.io.text import read_toml

__all__ = [
    "BOLTZMANN_J_PER_K",
    "DESIGN_KEYS",
    "HALF_POWER_DB",
    "Cable",
    "ChargeAmplifier",
    "Frontend",
    "ResponseSummary",
    "Sensor",
    "VoltageAmplifier",
    "analog_zpk",
    "band_edges_hz",
    "corner_frequency_hz",
    "design_key_unit",
    "frequency_response",
    "frontend_from_mapping",
    "load_frontend",
    "midband_charge_gain_v_per_c",
    "midband_sensitivity_v_per_pa",
    "parse_design_value",
    "phase_deg",
    "read_design",
    "resolve_design_key",
    "set_design_value",
    "summarise_response",
    "time_constant_s",
    "transimpedance",
]

#: Boltzmann constant, exact since the 2019 SI redefinition (SI Brochure, 9th ed.).
BOLTZMANN_J_PER_K = 1.380649e-23

#: Half-power ratio in decibels, 10·lg 2: what "-3 dB" means for a corner.
HALF_POWER_DB = 10.0 * math.log10(2.0)

InputKind = Literal["pressure", "charge"]


def _check_positive(value: float | None, what: str, *, optional: bool = False) -> None:
    if value is None:
        if optional:
            return
        raise InputError(f"{what} is required")
    validate.physical_value(value, what=what)


def _check_non_negative(value: float, what: str) -> None:
    validate.physical_value(value, what=what, allow_zero=True)


@dataclass(frozen=True)
class Sensor:
    """A piezoelectric sensor seen as a charge source in parallel with its capacitance.

    Parameters
    ----------
    charge_sensitivity_c_per_pa
        Charge generated per pascal, C/Pa (12 pC/Pa is 12e-12).
    capacitance_f
        Sensor capacitance Cs, farads.
    leakage_resistance_ohm
        Insulation (leakage) resistance Rs across the element, ohms; None for ideal.
    resonance_hz, q
        Mounted resonance frequency and quality factor of a second-order
        (single degree of freedom) resonance; both or neither.

    Examples
    --------
    Open-circuit voltage sensitivity Sv = Sq/Cs: 10 pC/Pa on 1 nF give 10 mV/Pa.

    >>> s = Sensor(10e-12, 1e-9)
    >>> round(s.voltage_sensitivity_v_per_pa, 12)
    0.01
    >>> round(Sensor.from_voltage_sensitivity(0.01, 1e-9).charge_sensitivity_c_per_pa * 1e12, 9)
    10.0
    """

    charge_sensitivity_c_per_pa: float
    capacitance_f: float
    leakage_resistance_ohm: float | None = None
    resonance_hz: float | None = None
    q: float | None = None

    def __post_init__(self) -> None:
        _check_positive(self.charge_sensitivity_c_per_pa, "sensor charge sensitivity (C/Pa)")
        _check_positive(self.capacitance_f, "sensor capacitance (F)")
        _check_positive(self.leakage_resistance_ohm, "sensor leakage resistance", optional=True)
        _check_positive(self.resonance_hz, "sensor resonance (Hz)", optional=True)
        _check_positive(self.q, "sensor resonance Q", optional=True)
        if (self.resonance_hz is None) != (self.q is None):
            raise InputError(
                "sensor resonance needs both a frequency and a Q, got "
                f"resonance={self.resonance_hz!r}, q={self.q!r}"
            )

    @classmethod
    def from_voltage_sensitivity(
        cls,
        voltage_sensitivity_v_per_pa: float,
        capacitance_f: float,
        **kwargs: Any,
    ) -> Sensor:
        """Build a sensor from its open-circuit voltage sensitivity (V/Pa): Sq = Sv·Cs."""
        _check_positive(voltage_sensitivity_v_per_pa, "sensor voltage sensitivity (V/Pa)")
        _check_positive(capacitance_f, "sensor capacitance (F)")
        return cls(voltage_sensitivity_v_per_pa * capacitance_f, capacitance_f, **kwargs)

    @property
    def voltage_sensitivity_v_per_pa(self) -> float:
        """Open-circuit voltage sensitivity Sq/Cs, V/Pa."""
        return self.charge_sensitivity_c_per_pa / self.capacitance_f


@dataclass(frozen=True)
class Cable:
    """The cable between sensor and amplifier, as a shunt capacitance.

    Parameters
    ----------
    capacitance_f
        Total cable capacitance Cc, farads.
    length_m, capacitance_per_m_f
        Kept for reporting when the capacitance came from length × capacitance per metre.

    Examples
    --------
    >>> cable = Cable.from_length(3.0, 100e-12)  # 3 m at 100 pF/m
    >>> round(cable.capacitance_f * 1e12, 9), cable.length_m
    (300.0, 3.0)
    """

    capacitance_f: float = 0.0
    length_m: float | None = None
    capacitance_per_m_f: float | None = None

    def __post_init__(self) -> None:
        _check_non_negative(self.capacitance_f, "cable capacitance (F)")

    @classmethod
    def from_length(cls, length_m: float, capacitance_per_m_f: float) -> Cable:
        """Cable of ``length_m`` metres at ``capacitance_per_m_f`` farads per metre."""
        _check_non_negative(length_m, "cable length (m)")
        _check_positive(capacitance_per_m_f, "cable capacitance per metre (F/m)")
        return cls(length_m * capacitance_per_m_f, length_m, capacitance_per_m_f)


@dataclass(frozen=True, kw_only=True)
class _OpAmpNoise:
    """Op-amp fields shared by both amplifier kinds (noise, speed, clipping, gain)."""

    voltage_noise_v_per_sqrt_hz: float = 0.0
    current_noise_a_per_sqrt_hz: float = 0.0
    voltage_noise_corner_hz: float = 0.0
    current_noise_corner_hz: float = 0.0
    input_capacitance_f: float = 0.0
    gain_bandwidth_hz: float | None = None
    gain: float = 1.0
    clip_level_v: float | None = None

    def _check_common(self) -> None:
        _check_non_negative(self.voltage_noise_v_per_sqrt_hz, "op-amp voltage noise (V/√Hz)")
        _check_non_negative(self.current_noise_a_per_sqrt_hz, "op-amp current noise (A/√Hz)")
        _check_non_negative(self.voltage_noise_corner_hz, "voltage noise 1/f corner (Hz)")
        _check_non_negative(self.current_noise_corner_hz, "current noise 1/f corner (Hz)")
        _check_non_negative(self.input_capacitance_f, "amplifier input capacitance (F)")
        _check_positive(self.gain_bandwidth_hz, "gain-bandwidth product (Hz)", optional=True)
        _check_positive(self.gain, "amplifier gain (V/V)")
        _check_positive(self.clip_level_v, "clip level (V peak)", optional=True)


@dataclass(frozen=True, kw_only=True)
class ChargeAmplifier(_OpAmpNoise):
    """Op-amp charge amplifier: Rf ∥ Cf from output to the inverting input.

    Parameters
    ----------
    feedback_capacitance_f, feedback_resistance_ohm
        Cf (farads) and Rf (ohms). Rf is required: without a DC path the op-amp
        integrates its own bias current into a rail.
    voltage_noise_v_per_sqrt_hz, current_noise_a_per_sqrt_hz
        Op-amp input noise densities (white part).
    voltage_noise_corner_hz, current_noise_corner_hz
        1/f corners of those densities (0: white only); the density squared is
        scaled by 1 + corner/f.
    input_capacitance_f
        Op-amp input capacitance at the inverting node (adds to Cs + Cc).
    gain_bandwidth_hz
        Gain-bandwidth product; None for an ideal op-amp.
    gain
        Noiseless post gain after the charge stage, V/V.
    clip_level_v
        Output clip level, volts peak (after the post gain).

    Examples
    --------
    Midband, the charge amplifier's output is -q/Cf (textbook charge-amplifier relation):

    >>> amp = ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9)
    >>> fe = Frontend(Sensor(10e-12, 1e-9), amp)
    >>> h = frequency_response(fe, 1000.0, input="charge")  # V/C
    >>> amp.kind, round(float(h.real) * 100e-12, 3)  # H·Cf = -1
    ('charge', -1.0)
    """

    feedback_capacitance_f: float
    feedback_resistance_ohm: float

    kind: ClassVar[str] = "charge"

    def __post_init__(self) -> None:
        _check_positive(self.feedback_capacitance_f, "feedback capacitance (F)")
        _check_positive(self.feedback_resistance_ohm, "feedback resistance (ohm)")
        self._check_common()


@dataclass(frozen=True, kw_only=True)
class VoltageAmplifier(_OpAmpNoise):
    """High-impedance voltage buffer: input resistor Rin ∥ Cin, then a gain G.

    Parameters
    ----------
    input_resistance_ohm
        Bias (input) resistor Rin, ohms; required (the DC path of the input).
    input_capacitance_f
        Amplifier input capacitance Cin, farads.
    gain
        Non-inverting gain G, V/V; it is also the noise gain for the voltage noise.
    (other fields as :class:`ChargeAmplifier`)

    Examples
    --------
    Voltage mode: the sensor charge divides over Cs + Cc, and Rin with Cs + Cc sets the
    corner 1/(2π·Rin·(Cs + Cc)) (textbook voltage-mode relations):

    >>> import math
    >>> amp = VoltageAmplifier(input_resistance_ohm=100e6)
    >>> fe = Frontend(Sensor(10e-12, 1e-9), amp, Cable(1e-9))
    >>> round(midband_sensitivity_v_per_pa(fe), 12)  # 10 pC/Pa / 2 nF
    0.005
    >>> round(corner_frequency_hz(fe) * 2 * math.pi * 100e6 * 2e-9, 9)
    1.0
    """

    input_resistance_ohm: float

    kind: ClassVar[str] = "voltage"

    def __post_init__(self) -> None:
        _check_positive(self.input_resistance_ohm, "input resistance (ohm)")
        self._check_common()


Amplifier = ChargeAmplifier | VoltageAmplifier


@dataclass(frozen=True)
class Frontend:
    """Sensor + cable + amplifier, at a temperature (for resistor thermal noise).

    Examples
    --------
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9,
    ...                     input_capacitance_f=20e-12),
    ...     Cable.from_length(2.0, 100e-12),
    ... )
    >>> round(fe.shunt_capacitance_f * 1e12, 6), fe.inverting  # 1000 + 200 + 20 pF
    (1220.0, True)
    """

    sensor: Sensor
    amplifier: ChargeAmplifier | VoltageAmplifier
    cable: Cable = field(default_factory=Cable)
    temperature_k: float = 300.0
    name: str = ""

    def __post_init__(self) -> None:
        _check_positive(self.temperature_k, "temperature (K)")
        if not isinstance(self.amplifier, ChargeAmplifier | VoltageAmplifier):
            raise InputError(
                f"amplifier must be a charge or voltage amplifier, got {self.amplifier!r}"
            )

    @property
    def shunt_capacitance_f(self) -> float:
        """Cs + Cc + Cin: everything from the sensor node to ground, farads."""
        return (
            self.sensor.capacitance_f
            + self.cable.capacitance_f
            + self.amplifier.input_capacitance_f
        )

    @property
    def inverting(self) -> bool:
        """True when the output is inverted (the charge amplifier)."""
        return isinstance(self.amplifier, ChargeAmplifier)


# --------------------------------------------------------------------------- responses


def _check_input(input: str) -> None:
    if input not in ("pressure", "charge"):
        raise InputError(f"input must be 'pressure' or 'charge', got {input!r}")


def _resonance_factor(sensor: Sensor, s: np.ndarray) -> np.ndarray | float:
    """M(s) = ωr² / (s² + s·ωr/Q + ωr²), the mounted resonance (1 at DC)."""
    if sensor.resonance_hz is None or sensor.q is None:
        return 1.0
    wr = 2.0 * math.pi * sensor.resonance_hz
    return wr * wr / (s * s + s * wr / sensor.q + wr * wr)


def _open_loop(amplifier: Amplifier, s: np.ndarray) -> np.ndarray | float:
    """Op-amp open-loop gain A(s) = ωt/s, or inf for an ideal op-amp."""
    if amplifier.gain_bandwidth_hz is None:
        return math.inf
    return 2.0 * math.pi * amplifier.gain_bandwidth_hz / s


def _shunt_admittance(frontend: Frontend, s: np.ndarray) -> np.ndarray:
    """Ysh = 1/Rs + s(Cs + Cc + Cin), siemens."""
    g = 0.0
    if frontend.sensor.leakage_resistance_ohm is not None:
        g = 1.0 / frontend.sensor.leakage_resistance_ohm
    return g + s * frontend.shunt_capacitance_f


def transimpedance(frontend: Frontend, frequency_hz: np.ndarray) -> np.ndarray:
    """Output voltage per ampere injected at the sensor node (V/A), complex.

    Every current entering the sensor node (the signal current jωq, the thermal noise
    of Rf, Rin or Rs, the op-amp's current noise) reaches the output through this.

    Examples
    --------
    Well above its corner a charge amplifier's transimpedance is 1/(ωCf) in magnitude:

    >>> import math
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> z = transimpedance(fe, 1000.0)
    >>> round(float(abs(z)) * 2 * math.pi * 1000.0 * 100e-12, 4)
    1.0
    """
    s = 2j * math.pi * np.asarray(frequency_hz, dtype=float)
    amp = frontend.amplifier
    ysh = _shunt_admittance(frontend, s)
    a = _open_loop(amp, s)
    if isinstance(amp, ChargeAmplifier):
        yf = 1.0 / amp.feedback_resistance_ohm + s * amp.feedback_capacitance_f
        # Node: i = v·(Ysh + Yf) − vout·Yf with vout = −A·v.
        return -amp.gain / (yf + (ysh + yf) / a)
    ynode = ysh + 1.0 / amp.input_resistance_ohm
    return amp.gain / (1.0 + amp.gain / a) / ynode


def frequency_response(
    frontend: Frontend, frequency_hz: np.ndarray | float, *, input: InputKind = "pressure"
) -> np.ndarray:
    """Exact complex response of the front-end at ``frequency_hz`` (Hz).

    Parameters
    ----------
    frontend
        The design.
    frequency_hz
        Frequencies in hertz (any shape, > 0).
    input
        ``"pressure"``: output volts per pascal at the sensor, including the mounted
        resonance. ``"charge"``: output volts per coulomb of sensor charge (the
        resonance is then part of the charge already).

    Returns
    -------
    numpy.ndarray
        Complex response, V/Pa or V/C, same shape as ``frequency_hz``.

    Examples
    --------
    Charge amplifier, ideal op-amp: -Sq/Cf midband, and at the corner 1/(2π·Rf·Cf) the
    level is 1/√2 of it (textbook charge-amplifier relations):

    >>> import math
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> round(float(frequency_response(fe, 1000.0).real), 4)  # 10 pC/Pa / 100 pF
    -0.1
    >>> fc = 1 / (2 * math.pi * 1e9 * 100e-12)
    >>> round(float(abs(frequency_response(fe, fc))) * math.sqrt(2) / 0.1, 6)
    1.0
    """
    _check_input(input)
    f = np.asarray(frequency_hz, dtype=float)
    s = 2j * math.pi * f
    current_per_unit = s
    if input == "pressure":
        current_per_unit = (
            s * frontend.sensor.charge_sensitivity_c_per_pa * _resonance_factor(frontend.sensor, s)
        )
    return current_per_unit * transimpedance(frontend, f)


def midband_sensitivity_v_per_pa(frontend: Frontend) -> float:
    """Nominal midband sensitivity |H| in V/Pa (positive; see ``Frontend.inverting``).

    The flat value the exact response approaches between the high-pass corner and the
    resonance: G·Sq/Cf for the charge amplifier, G·Sq/(Cs + Cc + Cin) in voltage mode.

    Examples
    --------
    G·Sq/Cf for the charge amplifier: 20 dB (10×) of post gain, 10 pC/Pa, Cf = 100 pF.

    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9,
    ...                     gain=10.0),
    ... )
    >>> round(midband_sensitivity_v_per_pa(fe), 9)
    1.0
    """
    return frontend.sensor.charge_sensitivity_c_per_pa * midband_charge_gain_v_per_c(frontend)


def midband_charge_gain_v_per_c(frontend: Frontend) -> float:
    """Nominal midband charge gain, V/C: G/Cf or G/(Cs + Cc + Cin).

    Examples
    --------
    >>> amp = VoltageAmplifier(input_resistance_ohm=1e8)
    >>> fe = Frontend(Sensor(10e-12, 1e-9), amp, Cable(1e-9))
    >>> round(midband_charge_gain_v_per_c(fe) * 2e-9, 9)  # 1/(Cs + Cc)
    1.0
    """
    amp = frontend.amplifier
    if isinstance(amp, ChargeAmplifier):
        return amp.gain / amp.feedback_capacitance_f
    return amp.gain / frontend.shunt_capacitance_f


def _quadratic_roots(c2: float, c1: float, c0: float) -> list[complex]:
    """Roots of c2·s² + c1·s + c0 without cancellation (Numerical Recipes §5.6)."""
    disc = c1 * c1 - 4.0 * c2 * c0
    if disc >= 0:
        qq = -0.5 * (c1 + math.copysign(math.sqrt(disc), c1))
        return [complex(qq / c2), complex(c0 / qq)]
    re_part = -c1 / (2.0 * c2)
    im_part = math.sqrt(-disc) / (2.0 * c2)
    return [complex(re_part, im_part), complex(re_part, -im_part)]


def analog_zpk(
    frontend: Frontend, *, input: InputKind = "pressure"
) -> tuple[np.ndarray, np.ndarray, float]:
    """Zeros, poles (rad/s) and gain of the exact response H(s) = k·Π(s−z)/Π(s−p).

    The same circuit as :func:`frequency_response`, factored, for digital realisation.

    Examples
    --------
    Ideal charge amplifier: H(s) = -(Sq/Cf)·s/(s + 1/(Rf·Cf)), a zero at DC and one pole.

    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> zeros, poles, gain = analog_zpk(fe)
    >>> zeros.tolist(), poles.real.round(6).tolist(), round(gain, 9)
    ([0.0], [-10.0], -0.1)
    """
    _check_input(input)
    amp = frontend.amplifier
    sensor = frontend.sensor
    g_leak = 0.0 if sensor.leakage_resistance_ohm is None else 1.0 / sensor.leakage_resistance_ohm
    c_sh = frontend.shunt_capacitance_f
    poles: list[complex] = []
    if isinstance(amp, ChargeAmplifier):
        g_f = 1.0 / amp.feedback_resistance_ohm
        c_f = amp.feedback_capacitance_f
        if amp.gain_bandwidth_hz is None:
            poles.append(complex(-g_f / c_f))
            lead = c_f
        else:
            wt = 2.0 * math.pi * amp.gain_bandwidth_hz
            c2 = (c_f + c_sh) / wt
            c1 = c_f + (g_f + g_leak) / wt
            poles.extend(_quadratic_roots(c2, c1, g_f))
            lead = c2
        gain = -amp.gain / lead
    else:
        g_in = 1.0 / amp.input_resistance_ohm
        poles.append(complex(-(g_in + g_leak) / c_sh))
        gain = amp.gain / c_sh
        if amp.gain_bandwidth_hz is not None:
            wt = 2.0 * math.pi * amp.gain_bandwidth_hz
            poles.append(complex(-wt / amp.gain))
            gain *= wt / amp.gain
    if input == "pressure":
        gain *= sensor.charge_sensitivity_c_per_pa
        if sensor.resonance_hz is not None and sensor.q is not None:
            wr = 2.0 * math.pi * sensor.resonance_hz
            poles.extend(_quadratic_roots(1.0, wr / sensor.q, wr * wr))
            gain *= wr * wr
    return np.zeros(1), np.array(poles, dtype=complex), float(gain)


def time_constant_s(frontend: Frontend) -> float:
    """Time constant of the high-pass, 1/|p| of the model's lowest pole, seconds.

    RfCf for the charge amplifier and (Rin ∥ Rs)(Cs + Cc + Cin) in voltage mode when
    the op-amp is ideal.

    Examples
    --------
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> round(time_constant_s(fe), 9)  # Rf·Cf = 1 GOhm × 100 pF
    0.1
    """
    _, poles, _ = analog_zpk(frontend, input="charge")
    return float(1.0 / np.min(np.abs(poles)))


def _deviation_db(frontend: Frontend, frequency_hz: np.ndarray) -> np.ndarray:
    h = np.abs(frequency_response(frontend, frequency_hz))
    return 20.0 * np.log10(h / midband_sensitivity_v_per_pa(frontend))


def _search_grid(frontend: Frontend) -> np.ndarray:
    _, poles, _ = analog_zpk(frontend)
    pole_hz = np.abs(poles) / (2.0 * math.pi)
    lo = float(np.min(pole_hz)) * 1e-3
    hi = max(float(np.max(pole_hz)), 20e3) * 1e3
    decades = math.log10(hi / lo)
    return np.geomspace(lo, hi, math.ceil(decades * 200) + 1)


def band_edges_hz(
    frontend: Frontend, lower_db: float, upper_db: float
) -> tuple[float | None, float | None] | None:
    """Edges of the band where the response stays within [lower_db, upper_db] of midband.

    The exact response is scanned on a log grid (200 points per decade, from 1/1000 of
    the lowest pole to 1000× the highest) outwards from the point with the largest
    margin, and each edge is refined with Brent's method on the exact response.

    Returns
    -------
    tuple or None
        ``(low_hz, high_hz)``; an edge is None when the response never leaves the
        tolerance on that side (e.g. no resonance and an ideal op-amp: no upper edge).
        None when no frequency is within the tolerance at all.

    Examples
    --------
    A first-order high-pass, |H|² = r²/(1 + r²) with r = f/fc, is 1 dB down at
    r = 1/√(10^0.1 − 1) = 1.965 (first principles):

    >>> import math
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> low, high = band_edges_hz(fe, -1.0, 1.0)
    >>> round(low / corner_frequency_hz(fe), 3), high  # no resonance, ideal op-amp
    (1.965, None)
    """
    f = _search_grid(frontend)
    dev = _deviation_db(frontend, f)
    margin = np.minimum(dev - lower_db, upper_db - dev)
    start = int(np.argmax(margin))
    if margin[start] < 0:
        return None

    def margin_at(log_f: float) -> float:
        d = float(_deviation_db(frontend, np.array([10.0**log_f]))[0])
        return min(d - lower_db, upper_db - d)

    def refine(inside: int, outside: int) -> float:
        a, b = math.log10(f[inside]), math.log10(f[outside])
        return float(10.0 ** optimize.brentq(margin_at, a, b, xtol=1e-12, rtol=1e-12))

    low: float | None = None
    i = start
    while i > 0 and margin[i - 1] >= 0:
        i -= 1
    if i > 0:
        low = refine(i, i - 1)
    high: float | None = None
    j = start
    while j < len(f) - 1 and margin[j + 1] >= 0:
        j += 1
    if j < len(f) - 1:
        high = refine(j, j + 1)
    return low, high


def corner_frequency_hz(frontend: Frontend) -> float:
    """Low-frequency -3 dB (half-power) corner, solved numerically on the exact response.

    Equals 1/(2πRfCf) or 1/(2π(Rin ∥ Rs)(Cs + Cc + Cin)) for an ideal op-amp and no
    nearby resonance.

    Examples
    --------
    1/(2π·Rf·Cf) for a charge amplifier with an ideal op-amp (textbook relation):

    >>> import math
    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> round(corner_frequency_hz(fe) * 2 * math.pi * 1e9 * 100e-12, 9)
    1.0
    """
    edges = band_edges_hz(frontend, -HALF_POWER_DB, math.inf)
    if edges is None or edges[0] is None:
        raise InputError(
            "the response never comes within 3 dB of the midband sensitivity, so there is "
            "no corner: the high-pass and the resonance overlap"
        )
    return edges[0]


def phase_deg(frontend: Frontend, frequency_hz: np.ndarray | float) -> np.ndarray:
    """Phase of the response re the midband polarity, degrees in (−180, 180].

    The inversion of a charge amplifier is removed (reported by ``Frontend.inverting``),
    so a first-order high-pass reads +45° at its corner.

    Examples
    --------
    A first-order high-pass leads by 45° at its corner and by arctan(fc/f) above it:

    >>> fe = Frontend(
    ...     Sensor(10e-12, 1e-9),
    ...     ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
    ... )
    >>> fc = corner_frequency_hz(fe)
    >>> phase_deg(fe, [fc, 10 * fc]).round(2).tolist()
    [45.0, 5.71]
    """
    h = frequency_response(frontend, frequency_hz)
    if frontend.inverting:
        h = -h
    return np.degrees(np.angle(h))


@dataclass(frozen=True)
class ResponseSummary:
    """What a front-end does to the signal (see :func:`summarise_response`).

    Examples
    --------
    >>> amp = VoltageAmplifier(input_resistance_ohm=1e8)
    >>> fe = Frontend(Sensor(10e-12, 1e-9), amp, Cable(1e-9))
    >>> summary = summarise_response(fe)
    >>> summary.divider_ratio, summary.inverting, round(summary.time_constant_s, 9)
    (0.5, False, 0.2)
    """

    sensitivity_v_per_pa: float
    sensitivity_db_re_1v_per_pa: float
    charge_gain_v_per_c: float
    inverting: bool
    corner_hz: float
    time_constant_s: float
    band_1db_hz: tuple[float | None, float | None] | None
    band_3db_hz: tuple[float | None, float | None] | None
    at_hz: tuple[float, ...]
    relative_level_db: tuple[float, ...]
    phase_deg: tuple[float, ...]
    divider_ratio: float | None


def summarise_response(frontend: Frontend, *, at_hz: tuple[float, ...] = ()) -> ResponseSummary:
    """Midband sensitivity, corner, time constant, ±1/±3 dB bands and phase at ``at_hz``.

    ``divider_ratio`` is Cs/(Cs + Cc + Cin) in voltage mode (the capacitive divider of
    the open-circuit voltage) and None for a charge amplifier.

    Examples
    --------
    Voltage mode: the sensor's 10 mV/Pa open-circuit sensitivity halved by a cable as
    large as the sensor (capacitive divider Cs/(Cs + Cc) = 0.5), -46.02 dB re 1 V/Pa:

    >>> amp = VoltageAmplifier(input_resistance_ohm=1e8)
    >>> fe = Frontend(Sensor(10e-12, 1e-9), amp, Cable(1e-9))
    >>> summary = summarise_response(fe, at_hz=(corner_frequency_hz(fe),))
    >>> round(summary.sensitivity_db_re_1v_per_pa, 2), summary.divider_ratio
    (-46.02, 0.5)
    >>> round(summary.relative_level_db[0], 2), round(summary.phase_deg[0], 2)  # at the corner
    (-3.01, 45.0)
    """
    for f in at_hz:
        _check_positive(f, "frequency (Hz)")
    sens = midband_sensitivity_v_per_pa(frontend)
    freqs = np.array(at_hz, dtype=float)
    rel = _deviation_db(frontend, freqs) if len(at_hz) else np.array([])
    ph = phase_deg(frontend, freqs) if len(at_hz) else np.array([])
    divider = None
    if isinstance(frontend.amplifier, VoltageAmplifier):
        divider = frontend.sensor.capacitance_f / frontend.shunt_capacitance_f
    return ResponseSummary(
        sensitivity_v_per_pa=sens,
        sensitivity_db_re_1v_per_pa=ratio_to_db(sens),
        charge_gain_v_per_c=midband_charge_gain_v_per_c(frontend),
        inverting=frontend.inverting,
        corner_hz=corner_frequency_hz(frontend),
        time_constant_s=time_constant_s(frontend),
        band_1db_hz=band_edges_hz(frontend, -1.0, 1.0),
        band_3db_hz=band_edges_hz(frontend, -HALF_POWER_DB, HALF_POWER_DB),
        at_hz=tuple(float(x) for x in freqs),
        relative_level_db=tuple(float(x) for x in rel),
        phase_deg=tuple(float(x) for x in ph),
        divider_ratio=divider,
    )


# --------------------------------------------------------------------------- TOML designs

#: Keys of a design file per section (the public contract, see docs/frontend.md).
DESIGN_KEYS: dict[str, tuple[str, ...]] = {
    "": ("name", "temperature", "sensor", "cable", "amplifier"),
    "sensor": (
        "charge_sensitivity",
        "voltage_sensitivity",
        "capacitance",
        "leakage_resistance",
        "resonance",
        "q",
    ),
    "cable": ("capacitance", "length", "capacitance_per_metre"),
    "amplifier": (
        "type",
        "feedback_capacitance",
        "feedback_resistance",
        "input_resistance",
        "input_capacitance",
        "voltage_noise",
        "current_noise",
        "voltage_noise_corner",
        "current_noise_corner",
        "gain",
        "gain_bandwidth",
        "clip_level",
    ),
}

#: Unit of each numeric design key, as understood by piezo.chain.units (plus three special
#: kinds: "gain" for parse_gain, "sensitivity" for V/Pa or dBV/Pa, "temperature").
_KEY_UNITS: dict[tuple[str, str], str] = {
    ("", "temperature"): "temperature",
    ("sensor", "charge_sensitivity"): "C/Pa",
    ("sensor", "voltage_sensitivity"): "sensitivity",
    ("sensor", "capacitance"): "F",
    ("sensor", "leakage_resistance"): "Ohm",
    ("sensor", "resonance"): "Hz",
    ("sensor", "q"): "V/V",
    ("cable", "capacitance"): "F",
    ("cable", "length"): "m",
    ("cable", "capacitance_per_metre"): "F/m",
    ("amplifier", "feedback_capacitance"): "F",
    ("amplifier", "feedback_resistance"): "Ohm",
    ("amplifier", "input_resistance"): "Ohm",
    ("amplifier", "input_capacitance"): "F",
    ("amplifier", "voltage_noise"): "V/sqrtHz",
    ("amplifier", "current_noise"): "A/sqrtHz",
    ("amplifier", "voltage_noise_corner"): "Hz",
    ("amplifier", "current_noise_corner"): "Hz",
    ("amplifier", "gain"): "gain",
    ("amplifier", "gain_bandwidth"): "Hz",
    ("amplifier", "clip_level"): "V",
}

_NUMBER_TEXT = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_CELSIUS_RE = re.compile(rf"^\s*({_NUMBER_TEXT})\s*(?:°C|degC|C)\s*$")


def read_design(path: str | Path) -> dict[str, Any]:
    """Read a design TOML file into a plain mapping (values still as text).

    Examples
    --------
    >>> design = read_design("recordings/designs/pump-disc-charge.toml")
    >>> design["amplifier"]["type"], design["amplifier"]["feedback_capacitance"]
    ('charge', '10 nF')
    """
    return read_toml(path, what="design file", error=SpecError)


def load_frontend(path: str | Path) -> Frontend:
    """Load a front-end design from a TOML file (format in ``docs/frontend.md``).

    Raises
    ------
    SpecError
        Naming the file, the key and its value when anything is missing or invalid.

    Examples
    --------
    The bundled bench design: 12 mV/Pa on 18 nF is Sq = 216 pC/Pa; over Cf = 10 nF with a
    20 dB post gain that is 10 × 216 pC/Pa / 10 nF = 0.216 V/Pa:

    >>> fe = load_frontend("recordings/designs/pump-disc-charge.toml")
    >>> fe.amplifier.kind, round(midband_sensitivity_v_per_pa(fe), 6)
    ('charge', 0.216)
    """
    return frontend_from_mapping(read_design(path), source=str(path))


def _section(data: Mapping[str, Any], name: str, source: str | None) -> Mapping[str, Any]:
    value = data.get(name, {})
    if not isinstance(value, Mapping):
        raise SpecError(f"[{name}] must be a table, got {value!r}", source=source)
    return value


class _Reader:
    """Parses one section's values, turning unit errors into SpecErrors that name the key."""

    def __init__(self, section: str, values: Mapping[str, Any], source: str | None) -> None:
        self.section = section
        self.values = values
        self.source = source
        unknown = sorted(set(values) - set(DESIGN_KEYS[section]))
        if unknown:
            known = ", ".join(DESIGN_KEYS[section])
            raise SpecError(
                f"[{section}] unknown key {unknown[0]!r}; known keys: {known}", source=source
            )

    def label(self, key: str) -> str:
        return f"[{self.section}] {key}"

    def fail(self, key: str, problem: str) -> SpecError:
        """A SpecError naming the section, the key and its value."""
        value = self.values.get(key)
        return SpecError(f"{self.label(key)} = {value!r}: {problem}", source=self.source)

    def has(self, key: str) -> bool:
        return key in self.values

    def quantity(self, key: str, *, positive: bool = False) -> float | None:
        """The value of ``key`` in its SI unit, or None when the key is absent."""
        if key not in self.values:
            return None
        unit = _KEY_UNITS[(self.section, key)]
        raw = self.values[key]
        try:
            value = parse_quantity(raw, unit, what=key)
        except UnitError as exc:
            raise self.fail(key, exc.message.split(": ", 1)[-1]) from None
        if positive and not value > 0:
            raise self.fail(key, "must be positive")
        if not value >= 0:
            raise self.fail(key, "must not be negative")
        return value

    def required(self, key: str) -> float:
        """A positive value that must be present."""
        value = self.quantity(key, positive=True)
        if value is None:
            raise SpecError(f"{self.label(key)} is required", source=self.source)
        return value

    def sensitivity(self, key: str) -> float | None:
        if key not in self.values:
            return None
        raw = self.values[key]
        try:
            if key == "charge_sensitivity":
                if isinstance(raw, str) and "C" not in raw:
                    raise self.fail(key, "a charge sensitivity needs a C/Pa unit, e.g. '12 pC/Pa'")
                value = parse_quantity(raw, "C/Pa", what=key)
                if not value > 0:
                    raise self.fail(key, "must be positive")
                return value
            if isinstance(raw, str) and "C/" in raw.replace(" ", ""):
                raise self.fail(key, "this is a charge sensitivity; use charge_sensitivity")
            return parse_sensitivity(raw, what=key)
        except UnitError as exc:
            raise self.fail(key, exc.message.split(": ", 1)[-1]) from None

    def gain(self, key: str) -> float | None:
        if key not in self.values:
            return None
        try:
            return parse_gain(self.values[key], what=key)
        except UnitError as exc:
            raise self.fail(key, exc.message.split(": ", 1)[-1]) from None


def _temperature_k(raw: Any, source: str | None) -> float:
    """Kelvin from a number, ``"300 K"`` or ``"25 °C"``."""
    celsius = _CELSIUS_RE.match(raw) if isinstance(raw, str) else None
    try:
        if celsius:
            value = float(celsius.group(1)) + 273.15
        else:
            value = parse_quantity(raw, "K", what="temperature")
    except UnitError:
        raise SpecError(
            f"temperature = {raw!r}: expected kelvin or degrees Celsius, e.g. '300 K' or '25 °C'",
            source=source,
        ) from None
    if not (math.isfinite(value) and value > 0):
        raise SpecError(f"temperature = {raw!r}: must be above absolute zero", source=source)
    return value


def frontend_from_mapping(data: Mapping[str, Any], *, source: str | None = None) -> Frontend:
    """Build a :class:`Frontend` from a design mapping (as read from TOML).

    Values are text with units (``"1 nF"``, ``"1 GOhm"``, ``"12 pC/Pa"``) parsed by
    :mod:`piezo.chain.units`, or plain numbers in SI units. A value outside the range
    of :func:`piezo.validate.physical_value` is refused naming ``source``.

    Examples
    --------
    >>> design = {
    ...     "sensor": {"charge_sensitivity": "10 pC/Pa", "capacitance": "1 nF"},
    ...     "amplifier": {"type": "charge", "feedback_capacitance": "100 pF",
    ...                   "feedback_resistance": "1 GOhm"},
    ... }
    >>> fe = frontend_from_mapping(design)
    >>> round(fe.amplifier.feedback_capacitance_f * 1e12, 9), fe.temperature_k
    (100.0, 300.0)
    >>> del design["amplifier"]["feedback_resistance"]
    >>> frontend_from_mapping(design, source="bench.toml")
    Traceback (most recent call last):
    ...
    piezo.errors.SpecError: bench.toml: [amplifier] feedback_resistance is required
    """
    try:
        return _frontend_from_mapping(data, source=source)
    except InputError as exc:  # a value out of range in a model's constructor
        raise exc if source is None else exc.with_source(source) from None


def _frontend_from_mapping(data: Mapping[str, Any], *, source: str | None) -> Frontend:
    top_unknown = sorted(set(data) - set(DESIGN_KEYS[""]))
    if top_unknown:
        raise SpecError(
            f"unknown top-level key {top_unknown[0]!r}; expected tables [sensor], [cable], "
            "[amplifier] and optional name, temperature",
            source=source,
        )
    for needed in ("sensor", "amplifier"):
        if needed not in data:
            raise SpecError(f"the design has no [{needed}] table", source=source)
    name = data.get("name", "")
    if not isinstance(name, str):
        raise SpecError(f"name = {name!r}: must be text", source=source)
    temperature = _temperature_k(data.get("temperature", 300.0), source)

    s = _Reader("sensor", _section(data, "sensor", source), source)
    capacitance = s.required("capacitance")
    charge = s.sensitivity("charge_sensitivity")
    voltage = s.sensitivity("voltage_sensitivity")
    if (charge is None) == (voltage is None):
        raise SpecError(
            "[sensor] needs exactly one of charge_sensitivity (e.g. '12 pC/Pa') or "
            "voltage_sensitivity (e.g. '10 mV/Pa', '-40 dBV/Pa')",
            source=source,
        )
    leakage = s.quantity("leakage_resistance", positive=True)
    resonance = s.quantity("resonance", positive=True)
    q = s.quantity("q", positive=True)
    if (resonance is None) != (q is None):
        raise SpecError(
            "[sensor] resonance and q go together: give both (e.g. resonance = '28 kHz', "
            "q = 25) or neither",
            source=source,
        )
    if voltage is not None:
        charge = voltage * capacitance
    assert charge is not None  # exactly one of the two was given
    sensor = Sensor(
        charge,
        capacitance,
        leakage_resistance_ohm=leakage,
        resonance_hz=resonance,
        q=q,
    )

    c = _Reader("cable", _section(data, "cable", source), source)
    if c.has("capacitance") and (c.has("length") or c.has("capacitance_per_metre")):
        raise SpecError(
            "[cable] give either capacitance or length + capacitance_per_metre, not both",
            source=source,
        )
    if c.has("length") != c.has("capacitance_per_metre"):
        raise SpecError(
            "[cable] length and capacitance_per_metre go together (e.g. length = '3 m', "
            "capacitance_per_metre = '100 pF/m')",
            source=source,
        )
    if c.has("length"):
        cable = Cable.from_length(c.quantity("length") or 0.0, c.required("capacitance_per_metre"))
    else:
        cable = Cable(c.quantity("capacitance") or 0.0)

    a = _Reader("amplifier", _section(data, "amplifier", source), source)
    kind = a.values.get("type")
    if kind not in ("charge", "voltage"):
        raise SpecError(
            f'[amplifier] type = {kind!r}: must be "charge" or "voltage"', source=source
        )
    wrong = (
        ("input_resistance",)
        if kind == "charge"
        else ("feedback_capacitance", "feedback_resistance")
    )
    for key in wrong:
        if a.has(key):
            raise a.fail(key, f"not a key of a {kind} amplifier")
    voltage_noise = a.quantity("voltage_noise")
    current_noise = a.quantity("current_noise")
    voltage_corner = a.quantity("voltage_noise_corner")
    current_corner = a.quantity("current_noise_corner")
    input_capacitance = a.quantity("input_capacitance")
    gain = a.gain("gain")
    common: dict[str, Any] = {
        "voltage_noise_v_per_sqrt_hz": voltage_noise or 0.0,
        "current_noise_a_per_sqrt_hz": current_noise or 0.0,
        "voltage_noise_corner_hz": voltage_corner or 0.0,
        "current_noise_corner_hz": current_corner or 0.0,
        "input_capacitance_f": input_capacitance or 0.0,
        "gain_bandwidth_hz": a.quantity("gain_bandwidth", positive=True),
        "gain": 1.0 if gain is None else gain,
        "clip_level_v": a.quantity("clip_level", positive=True),
    }
    amplifier: ChargeAmplifier | VoltageAmplifier
    if kind == "charge":
        amplifier = ChargeAmplifier(
            feedback_capacitance_f=a.required("feedback_capacitance"),
            feedback_resistance_ohm=a.required("feedback_resistance"),
            **common,
        )
    else:
        amplifier = VoltageAmplifier(input_resistance_ohm=a.required("input_resistance"), **common)
    return Frontend(sensor, amplifier, cable, temperature_k=temperature, name=name)


def resolve_design_key(name: str) -> tuple[str, str]:
    """``(section, key)`` of a numeric design key written as ``section.key`` or bare.

    A bare key must occur in one section only (``feedback_resistance``); ``temperature``
    is the top-level key (section ``""``).

    Examples
    --------
    >>> resolve_design_key("feedback_resistance"), resolve_design_key("cable.capacitance")
    (('amplifier', 'feedback_resistance'), ('cable', 'capacitance'))
    >>> resolve_design_key("capacitance")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: 'capacitance' is ambiguous; write ... or cable.capacitance
    """
    if "." in name:
        section, key = name.split(".", 1)
        if (section, key) not in _KEY_UNITS or not section:
            raise InputError(f"unknown design key {name!r}")
        return section, key
    matches = [(sec, key) for sec, key in _KEY_UNITS if key == name]
    if not matches:
        numeric = ", ".join(sorted({key for _, key in _KEY_UNITS}))
        raise InputError(f"unknown design key {name!r}; numeric keys: {numeric}")
    if len(matches) > 1:
        options = " or ".join(f"{sec}.{key}" for sec, key in matches)
        raise InputError(f"{name!r} is ambiguous; write {options}")
    return matches[0]


def design_key_unit(name: str) -> str:
    """Unit of a numeric design key: a piezo.chain.units unit, or "gain", "sensitivity",
    "temperature" for the three keys parsed differently.

    Examples
    --------
    >>> design_key_unit("feedback_capacitance"), design_key_unit("voltage_noise")
    ('F', 'V/sqrtHz')
    >>> design_key_unit("gain"), design_key_unit("temperature")
    ('gain', 'temperature')
    """
    return _KEY_UNITS[resolve_design_key(name)]


def parse_design_value(name: str, text: str | float) -> float:
    """Parse ``text`` as a value of design key ``name``, in SI units (kelvin, farads...).

    Examples
    --------
    >>> parse_design_value("feedback_capacitance", "100 pF")
    1e-10
    >>> parse_design_value("temperature", "25 °C"), parse_design_value("gain", "20 dB")
    (298.15, 10.0)
    """
    section, key = resolve_design_key(name)
    unit = _KEY_UNITS[(section, key)]
    if unit == "temperature":
        return _temperature_k(text, None)
    reader = _Reader(section, {key: text}, None)
    if unit == "gain":
        value = reader.gain(key)
    elif key.endswith("sensitivity"):
        value = reader.sensitivity(key)
    else:
        value = reader.quantity(key)
    assert value is not None  # the key is present in the one-key mapping
    return value


def set_design_value(data: Mapping[str, Any], name: str, value: float) -> dict[str, Any]:
    """Return a copy of a design mapping with one key set to ``value`` (SI units).

    ``name`` as for :func:`resolve_design_key`. Used for trade-off tables. Setting the
    cable's capacitance drops its length and capacitance per metre, and the other way
    round, so the two descriptions never conflict.

    Examples
    --------
    >>> design = {"cable": {"length": "3 m", "capacitance_per_metre": "100 pF/m"}}
    >>> set_design_value(design, "cable.capacitance", 5e-10)
    {'cable': {'capacitance': 5e-10}}
    >>> design  # unchanged
    {'cable': {'length': '3 m', 'capacitance_per_metre': '100 pF/m'}}
    """
    section, key = resolve_design_key(name)
    out = {k: (dict(v) if isinstance(v, Mapping) else v) for k, v in data.items()}
    if not section:
        out[key] = float(value)
        return out
    table = out.setdefault(section, {})
    table[key] = float(value)
    if section == "sensor" and key.endswith("sensitivity"):
        other = "voltage_sensitivity" if key == "charge_sensitivity" else "charge_sensitivity"
        table.pop(other, None)
    if section == "cable" and key == "capacitance":
        table.pop("length", None)
        table.pop("capacitance_per_metre", None)
    if section == "cable" and key in ("length", "capacitance_per_metre"):
        table.pop("capacitance", None)
    return out
