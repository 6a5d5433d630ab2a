"""Front-end models: exact responses, corners, bands, phase, design files.

Check values come from the charge-amplifier and voltage-mode relations of circuit theory
(any analog electronics textbook) and the single-degree-of-freedom resonance formula of
vibration textbooks, and from worked numbers of our own recomputed from them.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal

from piezo.errors import InputError, SpecError
from piezo.frontend.model import (
    HALF_POWER_DB,
    Cable,
    ChargeAmplifier,
    Frontend,
    Sensor,
    VoltageAmplifier,
    analog_zpk,
    band_edges_hz,
    corner_frequency_hz,
    frequency_response,
    frontend_from_mapping,
    load_frontend,
    midband_sensitivity_v_per_pa,
    phase_deg,
    set_design_value,
    summarise_response,
    time_constant_s,
)
from tests.paths import REPO


def charge_amp(**sensor_kw) -> Frontend:
    """12 pC/Pa, 1 nF sensor on a charge amplifier with Cf = 1 nF, Rf = 1 GΩ."""
    sensor = Sensor(12e-12, sensor_kw.pop("capacitance_f", 1e-9), **sensor_kw)
    amp = ChargeAmplifier(feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9)
    return Frontend(sensor, amp)


# --------------------------------------------------------------------------- charge mode


def test_charge_amplifier_corner_gain_and_sensitivity():
    fe = charge_amp()
    summary = summarise_response(fe)
    # Charge amplifier textbook relations (circuit theory): f_c = 1/(2π Rf Cf)
    # = 0.159 Hz, gain 1/Cf = 1 mV/pC, 12 pC/Pa × 1 mV/pC = 12 mV/Pa, τ = RfCf = 1 s.
    # The corner is solved numerically (Brent, xtol 1e-12 in lg f): 1e-9 relative is
    # far above that solver tolerance and far below any rounding that matters.
    assert_allclose(summary.corner_hz, 1 / (2 * math.pi * 1e9 * 1e-9), rtol=1e-9)
    assert round(summary.corner_hz, 3) == 0.159
    assert_allclose(summary.charge_gain_v_per_c * 1e-12, 1e-3, rtol=1e-12)
    assert_allclose(summary.sensitivity_v_per_pa, 12e-3, rtol=1e-12)
    assert_allclose(summary.time_constant_s, 1.0, rtol=1e-12)
    assert summary.inverting


def test_charge_amplifier_ignores_sensor_and_cable_capacitance():
    # Ideal op-amp: the inverting input is a virtual ground, so Cs and Cc carry no signal
    # current away (textbook property of the charge amplifier).
    f = np.geomspace(0.01, 1e5, 50)
    short = frequency_response(charge_amp(capacitance_f=1e-9), f)
    long = Frontend(
        Sensor(12e-12, 1e-9),
        ChargeAmplifier(feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9),
        Cable.from_length(30.0, 100e-12),
    )
    assert_allclose(frequency_response(long, f), short, rtol=1e-12)


def test_first_order_phase_and_band_edge():
    fe = charge_amp()
    fc = 1 / (2 * math.pi)
    # First-order high-pass: phase lead atan(fc/f), 45° at the corner (textbook).
    f = np.array([fc / 2, fc, 2 * fc, 10 * fc, 100 * fc])
    assert_allclose(phase_deg(fe, f), np.degrees(np.arctan(fc / f)), atol=1e-9)
    # |H|/H_mid = 1/√(1 + (fc/f)²) reaches -1 dB at f = fc/√(10^0.1 − 1) (solved by hand
    # from that expression); the numeric edge agrees to the solver's tolerance.
    low, high = band_edges_hz(fe, -1.0, 1.0)
    assert_allclose(low, fc / math.sqrt(10**0.1 - 1), rtol=1e-9)
    assert high is None  # no resonance, ideal op-amp: no upper limit


# --------------------------------------------------------------------------- voltage mode


def test_voltage_mode_issue_example():
    # Issue 5: Cs 1.2 nF, Cc 300 pF, Cin 10 pF, Rin 10 MΩ, 12 pC/Pa → 7.95 mV/Pa and
    # 10.5 Hz (voltage-mode relations V = Q/(Cs+Cc+Cin), f_c = 1/(2π Rin ΣC)). The issue
    # rounds to 3 significant figures, so the check is to half a unit in that place.
    fe = Frontend(
        Sensor(12e-12, 1.2e-9),
        VoltageAmplifier(input_resistance_ohm=10e6, input_capacitance_f=10e-12),
        Cable(300e-12),
    )
    summary = summarise_response(fe)
    assert summary.sensitivity_v_per_pa * 1e3 == pytest.approx(7.95, abs=0.005)
    assert summary.corner_hz == pytest.approx(10.5, abs=0.05)
    assert not summary.inverting


def test_voltage_mode_reference_example():
    # Voltage mode, circuit theory: Cs 100 pF, cable 300 pF, 1 MΩ ∥ 50 pF → f_c 353.7 Hz, divider
    # 0.222 (−13.06 dB). Tolerances: half a unit in the last quoted digit.
    fe = Frontend(
        Sensor.from_voltage_sensitivity(1.0, 100e-12),
        VoltageAmplifier(input_resistance_ohm=1e6, input_capacitance_f=50e-12),
        Cable(300e-12),
    )
    summary = summarise_response(fe)
    assert summary.corner_hz == pytest.approx(353.7, abs=0.05)
    assert summary.divider_ratio == pytest.approx(0.222, abs=0.0005)
    # Open-circuit sensitivity 1 V/Pa through the divider: the midband sensitivity is
    # the divider itself.
    assert summary.sensitivity_db_re_1v_per_pa == pytest.approx(-13.06, abs=0.005)


def test_voltage_mode_corner_includes_leakage():
    # Rin ∥ Rs sets the corner: 10 MΩ ∥ 10 MΩ = 5 MΩ with 1 nF → 1/(2π·5e6·1e-9).
    fe = Frontend(
        Sensor(10e-12, 1e-9, leakage_resistance_ohm=10e6),
        VoltageAmplifier(input_resistance_ohm=10e6),
    )
    assert_allclose(corner_frequency_hz(fe), 1 / (2 * math.pi * 5e6 * 1e-9), rtol=1e-9)
    assert_allclose(time_constant_s(fe), 5e-3, rtol=1e-12)


# --------------------------------------------------------------------------- nodal solution


def _poly(*coefficients_low_first: float) -> np.ndarray:
    """Polynomial in s, highest power first (numpy/scipy order), from c0, c1, ..."""
    return np.array(coefficients_low_first[::-1], dtype=float)


def _nodal_charge_amp(sq, cs, cc, cin, rs, cf, rf, gbw, g_post, fr, q):
    """H(s) of the charge amplifier from its two nodal equations, by Cramer's rule.

    Node 1 (inverting input): (Ysh + Yf)·v1 − Yf·v2 = I, I = s·Sq·M(s)
    Node 2 (output):          s·v2 + ωt·v1 = 0      (v2 = −A·v1 with A = ωt/s)
    ⇒ v2 = −ωt·I / ((Ysh + Yf)·s + ωt·Yf).
    """
    wt = 2 * math.pi * gbw
    ysh = _poly(1 / rs, cs + cc + cin)
    yf = _poly(1 / rf, cf)
    den = np.polyadd(np.polymul(np.polyadd(ysh, yf), _poly(0, 1)), wt * yf)
    wr = 2 * math.pi * fr
    num = _poly(0, -g_post * wt * sq * wr**2)
    den = np.polymul(den, _poly(wr**2, wr / q, 1))
    return num, den


def _nodal_voltage_amp(sq, cs, cc, cin, rs, rin, gbw, g, fr, q):
    """Node 1: (1/Rs + 1/Rin + s(Cs+Cc+Cin))·v1 = I; op-amp with feedback fraction 1/G:
    vout·(s + ωt/G) = ωt·v1."""
    wt = 2 * math.pi * gbw
    y1 = _poly(1 / rs + 1 / rin, cs + cc + cin)
    wr = 2 * math.pi * fr
    num = _poly(0, wt * sq * wr**2)
    den = np.polymul(np.polymul(y1, _poly(wt / g, 1)), _poly(wr**2, wr / q, 1))
    return num, den


def _compare_with_lti(fe: Frontend, num: np.ndarray, den: np.ndarray) -> None:
    f = np.geomspace(1e-3, 2e5, 400)
    _, h_ref = signal.freqs(num, den, worN=2 * np.pi * f)
    h = frequency_response(fe, f)
    # The issue's acceptance: 0.01 dB and 0.1°. Both are exact solutions of the same
    # circuit, so any real disagreement (a wrong admittance, a lost term) is far larger.
    assert_allclose(20 * np.log10(np.abs(h / h_ref)), 0.0, atol=0.01)
    assert_allclose(np.degrees(np.angle(h / h_ref)), 0.0, atol=0.1)
    # And the factored form used for digital realisation is the same response.
    z, p, k = analog_zpk(fe)
    _, h_zpk = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)
    assert_allclose(h_zpk, h, rtol=1e-9)
    # scipy's lti object gives the same as freqs (a second path through scipy).
    _, h_lti = signal.lti(num, den).freqresp(w=2 * np.pi * f[::40])
    assert_allclose(h_lti, h[::40], rtol=1e-9)


def test_charge_amp_matches_independent_nodal_solution():
    sq, cs, cc, cin, rs = 12e-12, 1.5e-9, 0.8e-9, 20e-12, 50e9
    cf, rf, gbw, g, fr, q = 220e-12, 2.2e9, 3e6, 4.0, 28e3, 25.0
    fe = Frontend(
        Sensor(sq, cs, leakage_resistance_ohm=rs, resonance_hz=fr, q=q),
        ChargeAmplifier(
            feedback_capacitance_f=cf,
            feedback_resistance_ohm=rf,
            input_capacitance_f=cin,
            gain_bandwidth_hz=gbw,
            gain=g,
        ),
        Cable(cc),
    )
    _compare_with_lti(fe, *_nodal_charge_amp(sq, cs, cc, cin, rs, cf, rf, gbw, g, fr, q))


def test_voltage_amp_matches_independent_nodal_solution():
    sq, cs, cc, cin, rs = 3e-12, 400e-12, 250e-12, 8e-12, 2e9
    rin, gbw, g, fr, q = 47e6, 1e6, 10.0, 9e3, 6.0
    fe = Frontend(
        Sensor(sq, cs, leakage_resistance_ohm=rs, resonance_hz=fr, q=q),
        VoltageAmplifier(
            input_resistance_ohm=rin, input_capacitance_f=cin, gain_bandwidth_hz=gbw, gain=g
        ),
        Cable(cc),
    )
    _compare_with_lti(fe, *_nodal_voltage_amp(sq, cs, cc, cin, rs, rin, gbw, g, fr, q))


# --------------------------------------------------------------------------- resonance


@pytest.mark.parametrize(
    ("ratio", "lift_db"),
    [
        # Single degree of freedom below resonance, |H| = 1/√((1−r²)² + (2ζr)²), ζ small:
        # r = 1/3 → +1.02 dB, 1/4 → +0.56 dB, 1/5 → +0.35 dB, 0.1 → +0.09 dB.
        (1 / 3, 1.02),
        (1 / 4, 0.56),
        (1 / 5, 0.35),
        (1 / 10, 0.09),
    ],
)
def test_resonance_lift_below_resonance(ratio, lift_db):
    fr = 30e3
    fe = charge_amp(resonance_hz=fr, q=100.0)  # lightly damped (ζ = 0.005)
    level = 20 * math.log10(abs(frequency_response(fe, ratio * fr)) / 12e-3)
    # The table is rounded to 0.01 dB: half of that, plus the high-pass (corner 0.16 Hz,
    # 1e-9 dB at these frequencies) and the damping term ((r/Q)², 1e-5 dB).
    assert level == pytest.approx(lift_db, abs=0.006)


def test_usable_band_falls_out_at_a_third_of_the_resonance():
    fr = 25e3
    fe = charge_amp(resonance_hz=fr, q=30.0)
    _, high = summarise_response(fe).band_1db_hz
    # The ±1 dB edge is where 1/(1 − r²) = 10^(1/20) (SDOF formula, damping negligible),
    # r = √(1 − 10^(−1/20)) = 0.32995; common practice calls this "usable to about a
    # third of the resonance" (common practice, no single source). Q = 30 shifts it by
    # (r/Q)² ≈ 1e-4 relative, hence rtol 1e-3.
    assert_allclose(high / fr, math.sqrt(1 - 10 ** (-1 / 20)), rtol=1e-3)
    assert 0.30 < high / fr < 0.36
    # The ±3 dB band ends where the lift is 3.01 dB: 1 − r² = 1/√2 → r = 0.5412.
    _, high3 = summarise_response(fe).band_3db_hz
    assert_allclose(high3 / fr, math.sqrt(1 - 10 ** (-HALF_POWER_DB / 20)), rtol=1e-3)


def test_gain_bandwidth_limits_the_top_of_the_band():
    # Closed-loop bandwidth of the charge amplifier ≈ GBW / noise gain: 1 MHz / 2 = 500
    # kHz, a first-order roll-off (dominant-pole op-amp, textbook): -3 dB there, so the
    # ±3 dB band ends within 1 % of it (the high-pass and the second pole's interaction
    # shift it by ~(0.16/5e5)² and GBW/A0-size terms).
    fe = Frontend(
        Sensor(12e-12, 1e-9),
        ChargeAmplifier(
            feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9, gain_bandwidth_hz=1e6
        ),
    )
    _, high = band_edges_hz(fe, -HALF_POWER_DB, HALF_POWER_DB)
    assert high == pytest.approx(5e5, rel=0.01)


# --------------------------------------------------------------------------- input kinds


def test_charge_input_is_pressure_response_over_sensitivity():
    fe = charge_amp(resonance_hz=20e3, q=10.0)
    f = np.geomspace(1, 1e4, 20)
    per_c = frequency_response(fe, f, input="charge")
    per_pa = frequency_response(fe, f, input="pressure")
    r = f / 20e3
    m = 1 / (1 - r**2 + 1j * r / 10.0)  # the mounted resonance (SDOF)
    assert_allclose(per_pa, per_c * 12e-12 * m, rtol=1e-12)
    with pytest.raises(InputError, match="'pressure' or 'charge'"):
        frequency_response(fe, f, input="volts")


def test_midband_sensitivity_of_voltage_sensitivity_sensor():
    # A -40 dBV/Pa open-circuit sensor (10 mV/Pa) into an equal cable capacitance: the
    # capacitive divider halves it, −6.02 dB (V = Q/(Cs + Cc)).
    fe = Frontend(
        Sensor.from_voltage_sensitivity(10e-3, 1e-9),
        VoltageAmplifier(input_resistance_ohm=1e9),
        Cable(1e-9),
    )
    assert_allclose(midband_sensitivity_v_per_pa(fe), 5e-3, rtol=1e-12)


# --------------------------------------------------------------------------- validation


def test_models_reject_nonsense_with_named_values():
    with pytest.raises(InputError, match=r"sensor capacitance \(F\).*-1e-09"):
        Sensor(12e-12, -1e-9)
    with pytest.raises(InputError, match="needs both a frequency and a Q"):
        Sensor(12e-12, 1e-9, resonance_hz=1e4)
    with pytest.raises(InputError, match="feedback resistance"):
        ChargeAmplifier(feedback_capacitance_f=1e-9, feedback_resistance_ohm=0.0)
    with pytest.raises(InputError, match="input resistance"):
        VoltageAmplifier(input_resistance_ohm=float("nan"))
    with pytest.raises(InputError, match="frequency"):
        summarise_response(charge_amp(), at_hz=(0.0,))


# --------------------------------------------------------------------------- design files

DISC = """
name = "disc pickup, charge amplifier"
temperature = "25 °C"

[sensor]
charge_sensitivity = "12 pC/Pa"
capacitance = "1.2 nF"
leakage_resistance = "100 GOhm"
resonance = "28 kHz"
q = 25

[cable]
length = "3 m"
capacitance_per_metre = "100 pF/m"

[amplifier]
type = "charge"
feedback_capacitance = "1 nF"
feedback_resistance = "1 GOhm"
voltage_noise = "5 nV/rtHz"
current_noise = "1 fA/rtHz"
gain_bandwidth = "10 MHz"
gain = "20 dB"
clip_level = "10 V"
"""


def write(tmp_path, text: str, name: str = "design.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_load_design_parses_every_key(tmp_path):
    fe = load_frontend(write(tmp_path, DISC))
    assert fe.name == "disc pickup, charge amplifier"
    assert fe.temperature_k == pytest.approx(298.15)
    assert fe.sensor.charge_sensitivity_c_per_pa == pytest.approx(12e-12)
    assert fe.sensor.capacitance_f == pytest.approx(1.2e-9)
    assert fe.sensor.leakage_resistance_ohm == pytest.approx(100e9)
    assert (fe.sensor.resonance_hz, fe.sensor.q) == (pytest.approx(28e3), 25.0)
    # "3 m" is three metres (not 3 mm): 3 × 100 pF = 300 pF.
    assert fe.cable.length_m == 3.0
    assert fe.cable.capacitance_f == pytest.approx(300e-12)
    amp = fe.amplifier
    assert isinstance(amp, ChargeAmplifier)
    assert amp.feedback_capacitance_f == pytest.approx(1e-9)
    assert amp.feedback_resistance_ohm == pytest.approx(1e9)
    assert amp.voltage_noise_v_per_sqrt_hz == pytest.approx(5e-9)
    assert amp.current_noise_a_per_sqrt_hz == pytest.approx(1e-15)
    assert amp.gain_bandwidth_hz == pytest.approx(10e6)
    assert amp.gain == pytest.approx(10.0)
    assert amp.clip_level_v == pytest.approx(10.0)


def test_example_designs_in_recordings_load():
    paths = sorted((REPO / "recordings" / "designs").glob("*.toml"))
    assert len(paths) >= 2
    kinds = {type(load_frontend(p).amplifier) for p in paths}
    assert kinds == {ChargeAmplifier, VoltageAmplifier}


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (
            ('capacitance = "1.2 nF"', 'capacitance = "1.2 nX"'),
            r"\[sensor\] capacitance = '1.2 nX'",
        ),
        (('capacitance = "1.2 nF"', ""), r"\[sensor\] capacitance is required"),
        (("q = 25", "qq = 25"), r"\[sensor\] unknown key 'qq'"),
        (("q = 25", ""), "resonance and q go together"),
        (("q = 25", "q = -3"), r"\[sensor\] q = -3: must be positive"),
        (
            ('charge_sensitivity = "12 pC/Pa"', 'charge_sensitivity = "12 mV/Pa"'),
            r"charge_sensitivity = '12 mV/Pa': a charge sensitivity needs a C/Pa unit",
        ),
        (
            ('charge_sensitivity = "12 pC/Pa"', 'voltage_sensitivity = "12 pC/Pa"'),
            "use charge_sensitivity",
        ),
        (
            (
                'charge_sensitivity = "12 pC/Pa"',
                'charge_sensitivity = "12 pC/Pa"\nvoltage_sensitivity = "1 mV/Pa"',
            ),
            "exactly one of charge_sensitivity",
        ),
        (
            ('length = "3 m"', 'capacitance = "1 nF"\nlength = "3 m"'),
            "either capacitance or length",
        ),
        (
            ('type = "charge"', 'type = "current"'),
            r"type = 'current': must be \"charge\" or \"voltage\"",
        ),
        (
            ('feedback_resistance = "1 GOhm"', 'input_resistance = "1 GOhm"'),
            r"\[amplifier\] input_resistance = '1 GOhm': not a key of a charge amplifier",
        ),
        (('feedback_resistance = "1 GOhm"', ""), r"\[amplifier\] feedback_resistance is required"),
        (('gain = "20 dB"', 'gain = "loud"'), r"\[amplifier\] gain = 'loud'"),
        (('temperature = "25 °C"', 'temperature = "warm"'), "temperature = 'warm'"),
        (("[cable]", "[cables]"), "unknown top-level key 'cables'"),
    ],
)
def test_bad_designs_name_file_key_and_value(tmp_path, change, message):
    old, new = change
    assert old in DISC
    path = write(tmp_path, DISC.replace(old, new, 1))
    with pytest.raises(SpecError, match=message) as info:
        load_frontend(path)
    assert str(info.value).startswith(str(path))


def test_unreadable_design_files(tmp_path):
    with pytest.raises(SpecError, match="TOML syntax error"):
        load_frontend(write(tmp_path, "[sensor\ncapacitance = 1"))
    with pytest.raises(SpecError, match="cannot read design file: no such file"):
        load_frontend(tmp_path / "missing.toml")
    with pytest.raises(SpecError, match=r"no \[amplifier\] table"):
        load_frontend(
            write(tmp_path, '[sensor]\ncharge_sensitivity = "1 pC/Pa"\ncapacitance = "1 nF"')
        )


def test_plain_numbers_are_si_units():
    fe = frontend_from_mapping(
        {
            "sensor": {"charge_sensitivity": 12e-12, "capacitance": 1e-9},
            "amplifier": {"type": "voltage", "input_resistance": 1e7, "gain": 2},
        }
    )
    assert isinstance(fe.amplifier, VoltageAmplifier)
    assert fe.amplifier.input_resistance_ohm == 1e7
    assert fe.amplifier.gain == 2.0
    assert fe.cable.capacitance_f == 0.0
    assert fe.temperature_k == 300.0


def test_set_design_value(tmp_path):
    from piezo.frontend.model import read_design

    data = read_design(write(tmp_path, DISC))
    changed = set_design_value(data, "feedback_resistance", 10e9)
    assert frontend_from_mapping(changed).amplifier.feedback_resistance_ohm == 10e9
    # The original mapping is untouched.
    assert data["amplifier"]["feedback_resistance"] == "1 GOhm"
    longer = frontend_from_mapping(set_design_value(data, "cable.length", 10.0))
    assert longer.cable.capacitance_f == pytest.approx(1e-9)
    with pytest.raises(InputError, match=r"ambiguous; write sensor\.capacitance or cable\."):
        set_design_value(data, "capacitance", 1e-9)
    with pytest.raises(InputError, match="unknown design key 'feedback'"):
        set_design_value(data, "feedback", 1.0)
