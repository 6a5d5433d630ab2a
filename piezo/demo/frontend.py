"""Demo front-end designs (TOML) for ``piezo frontend``, ``simulate`` and ``equalize``.

Demo values for the project's own scenario (the PD-27 disc microphones at the pump test
bench and the FM-3 film microphone of the calibrator capture), not any product's data.
``piezo demo`` writes them under ``designs/``; the copies in ``recordings/designs/`` are
checked against these texts.
"""

from __future__ import annotations

__all__ = ["frontend_demo_texts"]

PUMP_DISC_CHARGE = """\
# Piezo disc microphone PD-27 (demo) on the pump test bench, bay 3, into a bench
# charge amplifier. Demo values for the project's own scenario, not a product's data.
# Model it with:  piezo frontend recordings/designs/pump-disc-charge.toml
name = "PD-27 disc on the bench charge amplifier"
temperature = "25 °C"

[sensor]
voltage_sensitivity = "12 mV/Pa"   # open circuit, from the PD-27 profile
capacitance = "18 nF"
leakage_resistance = "50 GOhm"
resonance = "6.5 kHz"               # disc bending mode as mounted
q = 8

[cable]
length = "3 m"
capacitance_per_metre = "100 pF/m"

[amplifier]
type = "charge"
feedback_capacitance = "10 nF"
feedback_resistance = "1 GOhm"
voltage_noise = "4 nV/rtHz"
voltage_noise_corner = "10 Hz"
current_noise = "2 fA/rtHz"
gain_bandwidth = "8 MHz"
gain = "20 dB"                      # post gain after the charge stage
clip_level = "10 V"
"""

FILM_BUFFER_VOLTAGE = """\
# Piezo film microphone FM-3 (demo) into a JFET-input voltage buffer with a 100 MΩ bias
# resistor. Demo values for the project's own scenario, not a product's data.
# Model it with:  piezo frontend recordings/designs/film-buffer-voltage.toml
name = "FM-3 film element on a 100 MOhm buffer"
temperature = "300 K"

[sensor]
voltage_sensitivity = "-50 dBV/Pa"  # open circuit
capacitance = "1.1 nF"
resonance = "40 kHz"
q = 5

[cable]
length = "1.5 m"
capacitance_per_metre = "90 pF/m"

[amplifier]
type = "voltage"
input_resistance = "100 MOhm"
input_capacitance = "5 pF"
voltage_noise = "6 nV/rtHz"
current_noise = "10 fA/rtHz"
gain_bandwidth = "5 MHz"
gain = "20 dB"
clip_level = "2 V"
"""


def frontend_demo_texts() -> dict[str, str]:
    """The demo design files by path relative to the demo folder.

    Examples
    --------
    The charge-amplifier design reads ``12 mV/Pa × 18 nF / 10 nF × 10`` (charge
    sensitivity over the feedback capacitance, then 20 dB) = 0.216 V/Pa in mid band:

    >>> import tomllib
    >>> from piezo.frontend.model import frontend_from_mapping, midband_sensitivity_v_per_pa
    >>> texts = frontend_demo_texts()
    >>> sorted(texts)
    ['designs/film-buffer-voltage.toml', 'designs/pump-disc-charge.toml']
    >>> design = frontend_from_mapping(tomllib.loads(texts["designs/pump-disc-charge.toml"]))
    >>> round(midband_sensitivity_v_per_pa(design), 6)
    0.216
    """
    return {
        "designs/pump-disc-charge.toml": PUMP_DISC_CHARGE,
        "designs/film-buffer-voltage.toml": FILM_BUFFER_VOLTAGE,
    }
