"""Synthetic frequency-response demo: contact pickups for a valve test rig, on the bench.

Scenario (ours, invented numbers): a valve test rig listens for seat leakage with piezo
contact pickups. Before a pickup goes onto the rig it is checked on a bench: it sits in a
small sealed coupler driven by a compression driver that plays an exponential sweep,
20 Hz–20 kHz in 4 s at −6 dBFS, which a reference microphone measured as 94 dB SPL
(1.0024 Pa RMS) at the pickup. The pickup drives a voltage buffer (input resistor R_in)
with 20 dB gain into a 2 V full-scale ADC at 48 kHz. Three pickups were captured:

- ``nominal``: disc capacitance 1.8 nF, cable 250 pF, buffer 1 MΩ ∥ 10 pF, so the corner
  is 1/(2π R_in (C_s + C_c + C_in)) = 77 Hz; open-circuit sensitivity 6 mV/Pa, divided to
  5.24 mV/Pa at the buffer; mounted resonance 14 kHz, Q 8.
- ``high-corner``: the same pickup with a 330 kΩ input resistor fitted by mistake: the
  corner moves up to 234 Hz.
- ``low-resonance``: a loose clamp: the resonance falls to 9.2 kHz with Q 4.

The pickups' responses are applied exactly (the analog response on every FFT bin of the
whole signal), so the analysis should find these values.

The driver adds 0.3 % second and 0.1 % third harmonic; the ADC adds white noise at
−100 dBFS; the playback and acoustic path delays the capture by 277 samples (5.8 ms).
A two-channel capture with pink noise (channel 0: the drive signal, looped back;
channel 1: the nominal pickup) serves the H1 estimate.

Everything is computed from fixed seeds; nothing is written here. ``piezo demo`` writes
the files (see :func:`response_demo_files`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from piezo.demo.files import DemoFile
from piezo.response.fit import ResponseTable, format_response_csv
from piezo.response.measure import log_frequency_grid
from piezo.response.stimulus import NoiseSpec, SweepSpec, noise_signal, sweep_signal, sweep_spec

__all__ = [
    "PickupModel",
    "ResponseDemo",
    "response_demo",
    "response_demo_files",
    "response_demo_texts",
]

SAMPLE_RATE_HZ = 48000.0
ACOUSTIC_LEVEL_PA = 20e-6 * 10 ** (94 / 20)  # 94 dB SPL re 20 µPa
GAIN_DB = 20.0
FULL_SCALE_V = 2.0
LATENCY_FRAMES = 277
PREFIX = "valve-pickup"


@dataclass(frozen=True)
class PickupModel:
    """One simulated pickup and its front-end (the truth the demo analysis should find).

    Attributes
    ----------
    name
        Short name (file stem suffix).
    description
        One line on what is special about it.
    serial
        Serial number printed in its profile.
    open_circuit_v_per_pa
        Open-circuit sensitivity of the element, V/Pa.
    capacitance_f, cable_f, input_capacitance_f, input_resistance_ohm
        Element, cable and buffer input capacitances (F) and the buffer's input
        resistor (Ω).
    resonance_hz, resonance_q
        Mounted resonance.

    Examples
    --------
    The nominal pickup: 6 mV/Pa × 1.8 nF / 2.06 nF = 5.24 mV/Pa at the buffer, corner
    1/(2π · 1 MΩ · 2.06 nF) = 77.3 Hz; the 330 kΩ resistor moves it to 234 Hz:

    >>> nominal, high_corner = PICKUPS[0], PICKUPS[1]
    >>> round(nominal.sensitivity_v_per_pa * 1e3, 3), round(nominal.corner_hz, 1)
    (5.243, 77.3)
    >>> round(high_corner.corner_hz, 1)
    234.1
    >>> round(float(nominal.magnitude_db(np.array([nominal.corner_hz]))[0])
    ...       - 20 * math.log10(nominal.sensitivity_v_per_pa), 2)
    -3.01
    """

    name: str
    description: str
    serial: str
    open_circuit_v_per_pa: float
    capacitance_f: float
    cable_f: float
    input_capacitance_f: float
    input_resistance_ohm: float
    resonance_hz: float
    resonance_q: float

    @property
    def total_capacitance_f(self) -> float:
        """C_s + C_c + C_in."""
        return self.capacitance_f + self.cable_f + self.input_capacitance_f

    @property
    def sensitivity_v_per_pa(self) -> float:
        """Midband sensitivity at the buffer input: capacitive divider C_s / C_total."""
        return self.open_circuit_v_per_pa * self.capacitance_f / self.total_capacitance_f

    @property
    def corner_hz(self) -> float:
        """First-order high-pass corner 1 / (2π R_in C_total)."""
        return 1.0 / (2.0 * math.pi * self.input_resistance_ohm * self.total_capacitance_f)

    def magnitude_db(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Analog magnitude response, dB re 1 V/Pa."""
        f = np.asarray(frequency_hz, dtype=np.float64)
        r_hp = f / self.corner_hz
        r_res = f / self.resonance_hz
        hp = 20 * np.log10(r_hp) - 10 * np.log10(1 + r_hp**2)
        res = -10 * np.log10((1 - r_res**2) ** 2 + (r_res / self.resonance_q) ** 2)
        return 20 * math.log10(self.sensitivity_v_per_pa) + hp + res

    def response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Analog complex response, V/Pa: S · jωτ/(1 + jωτ) · 1/(1 − r² + j r/Q)."""
        f = np.asarray(frequency_hz, dtype=np.float64)
        s_hp = 1j * f / self.corner_hz
        r = f / self.resonance_hz
        res = 1.0 / (1.0 - r**2 + 1j * r / self.resonance_q)
        return self.sensitivity_v_per_pa * s_hp / (1.0 + s_hp) * res

    def apply(self, pressure_pa: np.ndarray, sample_rate_hz: float) -> np.ndarray:
        """Output volts for a pressure signal: the exact analog response on every FFT bin.

        A circular convolution over the whole signal; the demo signals end in silence
        longer than the pickup's impulse response, so nothing wraps around audibly.
        """
        n = pressure_pa.size
        spectrum = np.fft.rfft(pressure_pa)
        freq = np.fft.rfftfreq(n, 1.0 / sample_rate_hz)
        return np.fft.irfft(spectrum * self.response(freq), n)


_NOMINAL = dict(
    open_circuit_v_per_pa=6e-3,
    capacitance_f=1.8e-9,
    cable_f=250e-12,
    input_capacitance_f=10e-12,
    input_resistance_ohm=1e6,
    resonance_hz=14000.0,
    resonance_q=8.0,
)

PICKUPS: tuple[PickupModel, ...] = (
    PickupModel("nominal", "as designed", "VP-2417", **_NOMINAL),
    PickupModel(
        "high-corner",
        "330 kΩ input resistor fitted instead of 1 MΩ: corner ×3",
        "VP-2418",
        **{**_NOMINAL, "input_resistance_ohm": 330e3},
    ),
    PickupModel(
        "low-resonance",
        "loose clamp: resonance down to 9.2 kHz, Q 4",
        "VP-2419",
        **{**_NOMINAL, "resonance_hz": 9200.0, "resonance_q": 4.0},
    ),
)


@dataclass(frozen=True)
class DemoCapture:
    """One simulated capture.

    Attributes
    ----------
    pickup
        The simulated unit (its true values).
    samples
        Raw samples, fractions of the ADC's full scale, shape (frames,).

    Examples
    --------
    >>> demo = response_demo()
    >>> [(c.pickup.name, c.samples.shape) for c in demo.captures]
    [('nominal', (240000,)), ('high-corner', (240000,)), ('low-resonance', (240000,))]
    """

    pickup: PickupModel
    samples: np.ndarray


@dataclass(frozen=True)
class ResponseDemo:
    """Everything the response demo consists of (arrays and metadata, nothing written).

    Attributes
    ----------
    sample_rate_hz
        48 kHz.
    sweep
        The stimulus's parameters (with its acoustic level at the pickup).
    stimulus
        Stimulus samples, fractions of full scale.
    captures
        One capture per pickup.
    golden
        The nominal design's analog response on a 1/24-octave grid, dB re 1 V/Pa.
    noise
        Parameters of the pink-noise stimulus of the two-channel capture.
    two_channel
        (frames, 2) raw samples: channel 0 the drive signal, channel 1 the nominal pickup.
    gain_db, full_scale_v
        The chain: buffer gain and ADC full scale.

    Examples
    --------
    The analysis finds the nominal pickup's true corner, resonance and Q in its capture
    (converted to volts at the pickup through the chain):

    >>> from piezo.response.fit import fit_response
    >>> from piezo.response.measure import analyze_sweep
    >>> demo = response_demo()
    >>> volts = demo.captures[0].samples * demo.full_scale_v / 10 ** (demo.gain_db / 20)
    >>> r = analyze_sweep(volts, demo.sweep, demo.sample_rate_hz, unit="V")
    >>> fit = fit_response(r.frequency_hz, r.magnitude_db, magnitude_unit=r.magnitude_unit)
    >>> res = fit.resonance
    >>> round(fit.highpass.corner_hz, 1), round(res.frequency_hz), round(res.q, 2)
    (77.3, 14000, 8.0)
    """

    sample_rate_hz: float
    sweep: SweepSpec
    stimulus: np.ndarray
    captures: tuple[DemoCapture, ...]
    golden: ResponseTable
    noise: NoiseSpec
    two_channel: np.ndarray
    gain_db: float
    full_scale_v: float


def _through_pickup(
    drive: np.ndarray, pickup: PickupModel, pa_per_unit: float, rng: np.random.Generator
) -> np.ndarray:
    """Driver distortion, pickup + buffer, gain, ADC noise; returns fractions of FS."""
    fs = SAMPLE_RATE_HZ
    # The driver's distortion: 0.3 % second and 0.1 % third harmonic at the sweep's peak
    # (x² and x³ of a sine of peak A give A²/2 and A³/4 at 2f and 3f).
    a = float(np.max(np.abs(drive))) or 1.0
    shaped = drive + (2 * 0.003 / a) * drive**2 + (4 * 0.001 / a**2) * drive**3
    pressure = pa_per_unit * shaped
    volts = pickup.apply(pressure, fs)
    raw = volts * 10 ** (GAIN_DB / 20) / FULL_SCALE_V
    raw = np.concatenate([np.zeros(LATENCY_FRAMES), raw[:-LATENCY_FRAMES]])
    noise_rms = 10 ** (-100 / 20) / math.sqrt(2)  # −100 dBFS (AES17)
    return raw + noise_rms * rng.standard_normal(raw.size)


def response_demo() -> ResponseDemo:
    """Build the demo (deterministic: fixed seeds).

    Examples
    --------
    A 4 s sweep with 0.25 s of silence before and 0.75 s after, at 48 kHz; 3 s of
    two-channel pink noise:

    >>> demo = response_demo()
    >>> demo.stimulus.shape, demo.two_channel.shape, round(demo.sweep.acoustic_level_pa, 4)
    ((240000,), (144000, 2), 1.0024)
    >>> bool(np.array_equal(demo.captures[1].samples, response_demo().captures[1].samples))
    True
    """
    fs = SAMPLE_RATE_HZ
    spec = sweep_spec(
        20.0,
        20000.0,
        4.0,
        fs,
        level_dbfs=-6.0,
        silence_before_s=0.25,
        silence_after_s=0.75,
        acoustic_level_pa=ACOUSTIC_LEVEL_PA,
    )
    stimulus = sweep_signal(spec)
    # Pascals per stimulus unit: the sweep's peak A gives √2 · p_rms.
    pa_per_unit = math.sqrt(2) * ACOUSTIC_LEVEL_PA / spec.amplitude
    rng = np.random.default_rng(2417)
    captures = tuple(
        DemoCapture(p, _through_pickup(stimulus, p, pa_per_unit, rng)) for p in PICKUPS
    )
    grid = log_frequency_grid(20.0, 20000.0, 24)
    golden = ResponseTable(grid, PICKUPS[0].magnitude_db(grid), None, "dB re 1 V/Pa")
    noise = NoiseSpec("pink", 3.0, fs, -12.0, seed=2417, fade_s=0.01)
    drive = noise_signal(noise)
    pickup_raw = _through_pickup(drive, PICKUPS[0], pa_per_unit, rng)
    loopback = np.concatenate([np.zeros(LATENCY_FRAMES), drive[:-LATENCY_FRAMES]])
    two = np.column_stack([loopback, pickup_raw])
    return ResponseDemo(
        sample_rate_hz=fs,
        sweep=spec,
        stimulus=stimulus,
        captures=captures,
        golden=golden,
        noise=noise,
        two_channel=two,
        gain_db=GAIN_DB,
        full_scale_v=FULL_SCALE_V,
    )


def _profile(serial: str, usage: str) -> str:
    return f"""\
# Contact pickup {serial} (demo) on the response bench: sealed coupler, 94 dB SPL.
# No sensitivity: the measurement finds it. Run
#   {usage}
[sensor]
name = "valve-rig contact pickup VP (demo)"
serial = "{serial}"
capacitance = "1.8 nF"

[chain]
gain = "{GAIN_DB:g} dB"
full_scale = "{FULL_SCALE_V:g} V"
"""


def response_demo_files(demo: ResponseDemo | None = None) -> list[DemoFile]:
    """The demo as :class:`piezo.demo.scenes.DemoFile` items for the ``piezo demo`` writer.

    Sweep stimulus (FLAC, no profile), one capture per pickup (24-bit FLAC, with a chain
    profile ``NAME.toml``) and the two-channel pink-noise capture (16-bit FLAC, with a
    profile); about 1.5 MB in all. The
    stimulus's sidecar and the golden response are text files: see
    :func:`response_demo_texts`.

    Examples
    --------
    >>> files = response_demo_files()
    >>> [(f.name, f.subtype, f.sidecar is not None) for f in files[:2]]
    [('valve-pickup-sweep.flac', 'PCM_24', False), ('valve-pickup-nominal.flac', 'PCM_24', True)]
    >>> files[-1].name, files[-1].samples.shape
    ('valve-pickup-noise-2ch.flac', (144000, 2))
    """
    d = response_demo() if demo is None else demo
    fs = d.sample_rate_hz
    files = [
        DemoFile(
            f"{PREFIX}-sweep.flac",
            d.stimulus[:, None],
            fs,
            "PCM_24",
            None,
            None,
            "exponential sweep 20 Hz–20 kHz, 4 s, −6 dBFS (stimulus for the pickup bench)",
        )
    ]
    for cap in d.captures:
        files.append(
            DemoFile(
                f"{PREFIX}-{cap.pickup.name}.flac",
                cap.samples[:, None],
                fs,
                "PCM_24",
                _profile(
                    cap.pickup.serial,
                    f"piezo sweep analyze {PREFIX}-{cap.pickup.name}.flac "
                    f"--stimulus {PREFIX}-sweep.stimulus.toml --golden {PREFIX}-golden.csv",
                ),
                None,
                f"contact pickup {cap.pickup.serial} on the sweep bench: {cap.pickup.description}",
            )
        )
    files.append(
        DemoFile(
            f"{PREFIX}-noise-2ch.flac",
            d.two_channel,
            fs,
            "PCM_16",
            _profile(
                PICKUPS[0].serial,
                f"piezo response {PREFIX}-noise-2ch.flac --reference-channel 0",
            ),
            None,
            "pink noise: drive signal on channel 0, nominal pickup on channel 1 (for H1)",
        )
    )
    return files


def response_demo_texts(demo: ResponseDemo | None = None) -> dict[str, str]:
    """Text files of the demo by file name.

    ``valve-pickup-sweep.stimulus.toml`` records the sweep's parameters (and its
    acoustic level at the pickup), from which ``piezo sweep analyze`` rebuilds the
    inverse filter; ``valve-pickup-golden.csv`` is the design's response (frequency_hz,
    magnitude_db, dB re 1 V/Pa) for ``--golden``.

    Examples
    --------
    The sidecar rebuilds the very sweep that was played:

    >>> from piezo.response.stimulus import SweepSpec
    >>> demo = response_demo()
    >>> texts = response_demo_texts(demo)
    >>> sorted(texts)
    ['valve-pickup-golden.csv', 'valve-pickup-sweep.stimulus.toml']
    >>> SweepSpec.from_toml(texts["valve-pickup-sweep.stimulus.toml"]) == demo.sweep
    True
    """
    d = response_demo() if demo is None else demo
    return {
        f"{PREFIX}-sweep.stimulus.toml": d.sweep.to_toml(),
        f"{PREFIX}-golden.csv": format_response_csv(d.golden),
    }
