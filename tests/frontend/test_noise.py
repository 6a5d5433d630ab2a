"""Noise budget: thermal noise, noise gain, input referral, A-weighted self-noise.

Check values: Johnson–Nyquist noise (Nyquist, Phys. Rev. 32, 1928) and the noise gain of
an inverting charge amplifier (circuit theory, textbook relation),
IEC 61672-1:2013 Annex E (A-weighting formula and Table 3), and closed-form circuit
results derived in the comments.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate

from piezo.errors import InputError
from piezo.frontend.model import (
    BOLTZMANN_J_PER_K,
    Cable,
    ChargeAmplifier,
    Frontend,
    Sensor,
    VoltageAmplifier,
    frequency_response,
)
from piezo.frontend.noise import (
    noise_budget,
    noise_gain,
    noise_gain_midband,
    self_noise,
    thermal_noise_density_v,
)


def test_johnson_nyquist_reference_values():
    # Nyquist 1928: √(4kTR), k = 1.380649e-23 J/K (SI 2019, exact); 1 kΩ at 300 K 4.070 nV/√Hz,
    # 1 GΩ at 300 K 4.07 µV/√Hz. Checked to half a unit of the last quoted digit.
    assert thermal_noise_density_v(1e3, 300.0) == pytest.approx(4.070e-9, abs=0.0005e-9)
    assert thermal_noise_density_v(1e9, 300.0) == pytest.approx(4.07e-6, abs=0.005e-6)
    with pytest.raises(InputError, match="positive resistance"):
        thermal_noise_density_v(-1.0, 300.0)


def test_noise_gain_reference_example():
    # Circuit theory: noise gain ≈ 1 + (Cs + Cc)/Cf above f_c; Cs = Cc = 1 nF,
    # Cf = 100 pF → 21.
    fe = Frontend(
        Sensor(1e-12, 1e-9),
        ChargeAmplifier(feedback_capacitance_f=100e-12, feedback_resistance_ohm=1e9),
        Cable(1e-9),
    )
    assert noise_gain_midband(fe) == pytest.approx(21.0, rel=1e-12)
    # The exact (frequency-dependent) noise gain tends to it above the corner (1.6 Hz):
    # |1 + (jω·2 nF)/(1/Rf + jω·100 pF)| at 1 kHz differs by ~(fc/f)² = 3e-6 relative.
    assert abs(noise_gain(fe, 1000.0)) == pytest.approx(21.0, rel=1e-5)
    # Below the corner the feedback resistor dominates Yf and there is no sensor
    # leakage: the noise gain falls to 1 at DC (a unity-gain follower for en).
    assert abs(noise_gain(fe, 1e-6)) == pytest.approx(1.0, rel=1e-4)


def charge_frontend(**amp) -> Frontend:
    return Frontend(
        Sensor(12e-12, 1e-9),
        ChargeAmplifier(feedback_capacitance_f=1e-9, feedback_resistance_ohm=1e9, **amp),
    )


def test_feedback_resistor_noise_limits():
    # i_n = √(4kT/Rf) into Zf = Rf ∥ Cf: well above f_c the output density is
    # i_n/(ωCf); well below it is i_n·Rf = √(4kTRf) (Johnson–Nyquist, current form).
    fe = charge_frontend()
    kt4 = 4 * BOLTZMANN_J_PER_K * 300.0
    budget = noise_budget(fe, np.array([1e-4, 1e3]))
    assert budget.keys == ("feedback_resistance",)
    out = np.sqrt(budget.output_psd_v2_per_hz[0])
    # (fc/f)² = (0.159/1e-4)^-2 ≈ 4e-7 and (1e-4/0.159)² ≈ 4e-7: the approximations
    # hold to 1e-6 relative.
    assert out[0] == pytest.approx(math.sqrt(kt4 * 1e9), rel=1e-6)
    assert out[1] == pytest.approx(math.sqrt(kt4 / 1e9) / (2 * math.pi * 1e3 * 1e-9), rel=1e-6)


def test_voltage_mode_input_resistor_noise_is_filtered_by_the_capacitance():
    # In voltage mode Rin's noise current sees Rin ∥ C_total: √(4kTRin) at low
    # frequencies and √(4kT/Rin)/(ωC) well above the corner (textbook).
    fe = Frontend(
        Sensor(10e-12, 1e-9), VoltageAmplifier(input_resistance_ohm=1e8, gain=3.0), Cable(1e-9)
    )
    kt4 = 4 * BOLTZMANN_J_PER_K * 300.0
    out = np.sqrt(noise_budget(fe, np.array([1e-4, 1e4])).output_psd_v2_per_hz[0])
    assert out[0] == pytest.approx(3.0 * math.sqrt(kt4 * 1e8), rel=1e-6)
    assert out[1] == pytest.approx(
        3.0 * math.sqrt(kt4 / 1e8) / (2 * math.pi * 1e4 * 2e-9), rel=1e-6
    )


def test_budget_sources_add_and_refer_to_the_input():
    fe = Frontend(
        Sensor(12e-12, 1e-9, leakage_resistance_ohm=20e9),
        ChargeAmplifier(
            feedback_capacitance_f=1e-9,
            feedback_resistance_ohm=1e9,
            voltage_noise_v_per_sqrt_hz=5e-9,
            current_noise_a_per_sqrt_hz=1e-15,
        ),
    )
    f = np.geomspace(1, 1e4, 9)
    b = noise_budget(fe, f)
    assert b.keys == (
        "feedback_resistance",
        "leakage_resistance",
        "voltage_noise",
        "current_noise",
    )
    h2 = np.abs(frequency_response(fe, f)) ** 2
    assert_allclose(b.total_input_psd_pa2_per_hz, b.total_output_psd_v2_per_hz / h2, rtol=1e-12)
    # Leakage and feedback resistor noise currents reach the output through the same
    # impedance, so their ratio is Rf/Rs = 1/20 at every frequency.
    assert_allclose(b.output_psd_v2_per_hz[1] / b.output_psd_v2_per_hz[0], 1 / 20, rtol=1e-12)
    # en·noise gain above the corner: 5 nV × (1 + 1 nF/1 nF) = 10 nV/√Hz at 10 kHz.
    assert math.sqrt(b.output_psd_v2_per_hz[2, -1]) == pytest.approx(10e-9, rel=1e-6)


def test_one_over_f_corner_doubles_power_at_the_corner():
    # en²(f) = en²·(1 + fc/f): at f = fc the density power is twice the white value.
    white = charge_frontend(voltage_noise_v_per_sqrt_hz=5e-9)
    pink = charge_frontend(voltage_noise_v_per_sqrt_hz=5e-9, voltage_noise_corner_hz=100.0)
    f = np.array([100.0])
    b_pink, b_white = noise_budget(pink, f), noise_budget(white, f)
    row = b_pink.keys.index("voltage_noise")
    ratio = b_pink.output_psd_v2_per_hz[row, 0] / b_white.output_psd_v2_per_hz[row, 0]
    assert ratio == pytest.approx(2.0, rel=1e-12)


def _a_weighting_power_iec(f: np.ndarray) -> np.ndarray:
    """|A(f)|² from IEC 61672-1:2013 Annex E (E.1-E.6), written out here
    independently of piezo's own implementation."""
    f1, f2, f3, f4 = 20.598997057618, 107.652648643, 737.862230736, 12194.217147998
    a1000 = -1.9996555  # exact normalisation, IEC 61672-1:2013 Annex E
    g = (
        20
        * np.log10(
            f4**2
            * f**4
            / ((f**2 + f1**2) * np.sqrt(f**2 + f2**2) * np.sqrt(f**2 + f3**2) * (f**2 + f4**2))
        )
        - a1000
    )
    return 10 ** (g / 10)


def test_white_input_noise_integrates_to_closed_form():
    # en dominant, no resonance: the input-referred density is en·(Cf + Cs)/Sq, white
    # above the corner. Over 20 Hz–20 kHz the unweighted pressure is that density times
    # √19980 Hz; A-weighted, times √∫|A|² df (integrated here with scipy's adaptive quad
    # on the IEC formula). Rf = 1 PΩ makes its own noise current, referred to the input
    # (i_n/(ω·Sq)), 1e-5 of the en power at 20 Hz and less above; Simpson on 4001 log
    # points integrates the smooth remainder far finer than the 0.001 dB checked.
    fe = Frontend(
        Sensor(12e-12, 1e-9),
        ChargeAmplifier(
            feedback_capacitance_f=1e-9,
            feedback_resistance_ohm=1e15,
            voltage_noise_v_per_sqrt_hz=5e-9,
        ),
    )
    density = 5e-9 * 2e-9 / 12e-12
    sn = self_noise(fe)
    flat = 20 * math.log10(density * math.sqrt(20000 - 20) / 20e-6)
    assert sn.unweighted_db_spl == pytest.approx(flat, abs=0.001)
    a_bw, _ = integrate.quad(lambda x: _a_weighting_power_iec(np.array(x)), 20, 20000, limit=200)
    weighted = 20 * math.log10(density * math.sqrt(a_bw) / 20e-6)
    assert sn.a_weighted_db_spl == pytest.approx(weighted, abs=0.001)
    assert [s.key for s in sn.sources] == ["feedback_resistance", "voltage_noise"]
    assert sum(s.share for s in sn.sources) == pytest.approx(1.0, rel=1e-12)
    assert sn.max_spl_db is None and sn.dynamic_range_db is None


def test_dynamic_range_to_the_clip_level():
    fe = charge_frontend(voltage_noise_v_per_sqrt_hz=5e-9, clip_level_v=10.0)
    sn = self_noise(fe)
    # A 10 V peak sine at 12 mV/Pa: 10/√2/0.012 = 589.26 Pa RMS → 149.385 dB re 20 µPa.
    assert sn.max_spl_db == pytest.approx(20 * math.log10(10 / math.sqrt(2) / 0.012 / 20e-6))
    assert sn.dynamic_range_db == pytest.approx(sn.max_spl_db - sn.a_weighted_db_spl)


def test_self_noise_rejects_bad_band():
    with pytest.raises(InputError, match="noise band"):
        self_noise(charge_frontend(), band_hz=(100.0, 10.0))
