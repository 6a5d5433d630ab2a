"""A synthetic production lot for the batch checks (scenario of our own; pure).

Scenario
--------
End-of-line test of "PD27" piezo disc microphones: a 27 mm brass-backed piezo disc with a
JFET buffer, acoustically sealed in a small test coupler with a reference loudspeaker.
Every unit hears the same exponential sine sweep, 20 Hz to 7 kHz in 0.6 s, at 94 dB SPL
(RMS sound pressure 1.00237 Pa), with 0.2 s of quiet before and after; the buffer output
goes through a 20 dB preamplifier into a 1 V full-scale ADC at 16 kHz, 16-bit FLAC. The
serial number is in the file name (``PD27-<5 digits>.flac``).

A unit's response is modelled as sensitivity × first-order high-pass (the buffer's bias
resistor against the disc's capacitance) × single-degree-of-freedom resonance (the
disc's first bending mode), plus a small acoustic delay, a weak second-order
nonlinearity, the buffer's self-noise and 16-bit quantisation. Nominal design values
and the spread of a good lot are invented for the demo:

=====================  ==============  ==============
parameter              nominal         spread (1σ)
=====================  ==============  ==============
sensitivity at 1 kHz   −42 dB re 1 V/Pa  0.5 dB
low corner             55 Hz           3 Hz
resonance              4300 Hz         60 Hz (Q 3.0 ± 0.15)
2nd harmonic           0.2–0.4 %       uniform
self-noise             4 µV RMS        —
=====================  ==============  ==============

The lot (``pd27-lot/``, 40 captures) holds five seeded faults:

- ``PD27-24107``: front-end gain switch left at +40 dB instead of +20 dB: the capture clips
  at full scale;
- ``PD27-24115``: poorly bonded element: sensitivity 7 dB low;
- ``PD27-24122``: wrong bias resistor: low corner at 190 Hz;
- ``PD27-24131``: cracked ceramic: resonance down to 3 kHz with a low Q;
- ``PD27-24136``: file transfer interrupted: a FLAC file cut off half way;

and one good unit inside the fail limits but outside the warning band
(``PD27-24118``, sensitivity 2.4 dB low). ``pd27-golden/`` holds ten known-good units of
the same design for ``piezo limits derive``.

Nothing here writes files: :func:`lot_files` returns samples and texts;
:func:`flac_bytes` encodes in memory; the command line writes.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field

import numpy as np
import soundfile as sf

from piezo.response.stimulus import sweep_signal, sweep_spec

__all__ = [
    "DESIGN",
    "FAULTS",
    "LotFile",
    "UnitModel",
    "draw_unit",
    "flac_bytes",
    "golden_response_csv",
    "lot_files",
    "resonance_spec_text",
    "simulate_capture",
    "spec_text",
    "unit_response",
]

SAMPLE_RATE_HZ = 16000.0
SWEEP = {
    "start_hz": 20.0,
    "stop_hz": 7000.0,
    "duration_s": 0.6,
    "silence_before_s": 0.2,
    "silence_after_s": 0.2,
}
LEVEL_DB_SPL = 94.0
FULL_SCALE_V = 1.0
GAIN_DB = 20.0
NOISE_V = 4e-6


@dataclass(frozen=True)
class UnitModel:
    """One unit's true parameters (what the analysis should find).

    Examples
    --------
    >>> DESIGN.sensitivity_db, DESIGN.corner_hz, DESIGN.resonance_hz, DESIGN.q
    (-42.0, 55.0, 4300.0, 3.0)
    >>> FAULTS["24122"]
    ('high corner', {'corner_hz': 190.0})
    """

    serial: str
    sensitivity_db: float  # dB re 1 V/Pa at mid band (model passband gain)
    corner_hz: float
    resonance_hz: float
    q: float
    delay_s: float
    h2: float  # second-harmonic ratio at the nominal sweep amplitude
    gain_db: float = GAIN_DB
    fault: str | None = None


#: Nominal design (the golden response is this model without noise).
DESIGN = UnitModel("design", -42.0, 55.0, 4300.0, 3.0, 0.6e-3, 0.003)

#: Serial -> (fault name, changes to the drawn unit).
FAULTS: dict[str, tuple[str, dict[str, float]]] = {
    "24107": ("clipped", {"gain_db": 40.0}),
    "24115": ("low sensitivity", {"sensitivity_db": -49.0}),
    "24122": ("high corner", {"corner_hz": 190.0}),
    "24131": ("cracked element", {"resonance_hz": 3000.0, "q": 1.8}),
    "24136": ("corrupt file", {}),
    "24118": ("warn: sensitivity 2.4 dB low", {"sensitivity_db": -44.4}),
}


@dataclass(frozen=True)
class LotFile:
    """One file of the demo lot.

    ``samples`` (fractions of full scale, 16-bit FLAC) for captures; ``text`` for the
    spec and the golden response; ``data`` for the deliberately corrupt capture.

    Examples
    --------
    >>> files = lot_files()
    >>> files[0].name, files[0].payload()[:14]
    ('pd27-spec.toml', b'# Limit spec o')
    >>> files[2].name, files[2].payload()[:4], files[2].unit.serial
    ('pd27-lot/PD27-24101.flac', b'fLaC', '24101')
    """

    name: str
    description: str
    samples: np.ndarray | None = None
    sample_rate_hz: float | None = None
    text: str | None = None
    data: bytes | None = None
    unit: UnitModel | None = field(default=None, repr=False)

    def payload(self) -> bytes:
        """The file's bytes (FLAC encoded in memory for captures)."""
        if self.text is not None:
            return self.text.encode("utf-8")
        if self.data is not None:
            return self.data
        assert self.samples is not None and self.sample_rate_hz is not None
        return flac_bytes(self.samples, self.sample_rate_hz)


def flac_bytes(samples: np.ndarray, sample_rate_hz: float) -> bytes:
    """16-bit FLAC of ``samples`` (fractions of full scale), encoded in memory.

    Examples
    --------
    Samples already on the 16-bit grid come back unchanged (FLAC is lossless):

    >>> x = np.round(0.5 * np.sin(np.arange(1600) / 5.0) * 32768) / 32768
    >>> data = flac_bytes(x, 16000.0)
    >>> y, rate = sf.read(io.BytesIO(data))
    >>> data[:4], rate, bool(np.array_equal(x, y))
    (b'fLaC', 16000, True)
    """
    buf = io.BytesIO()
    sf.write(buf, samples, int(sample_rate_hz), format="FLAC", subtype="PCM_16")
    return buf.getvalue()


def _sweep_spec(sweep: dict[str, float] | None = None, sample_rate_hz: float = SAMPLE_RATE_HZ):
    p = SWEEP if sweep is None else sweep
    return sweep_spec(
        p["start_hz"],
        p["stop_hz"],
        p["duration_s"],
        sample_rate_hz,
        silence_before_s=p["silence_before_s"],
        silence_after_s=p["silence_after_s"],
    )


def _level_pa() -> float:
    return 20e-6 * 10.0 ** (LEVEL_DB_SPL / 20.0)


def unit_response(unit: UnitModel, frequency_hz: np.ndarray) -> np.ndarray:
    """Complex response of the model, V/Pa (delay excluded).

    Examples
    --------
    The design's -42 dB passband reads -41.56 dB re 1 V/Pa at 1 kHz (the resonance's
    rise); at the resonance the gain is Q = 3 higher, less the high-pass's small loss:

    >>> level_db = 20 * np.log10(np.abs(unit_response(DESIGN, np.array([1000.0, 4300.0]))))
    >>> level_db.round(2).tolist(), round(-42.0 + 20 * math.log10(3.0), 2)
    ([-41.56, -32.46], -32.46)
    """
    f = np.asarray(frequency_hz, dtype=float)
    jf = 1j * f
    highpass = jf / (jf + unit.corner_hz)
    r = f / unit.resonance_hz
    resonance = 1.0 / (1.0 - r**2 + 1j * r / unit.q)
    return 10.0 ** (unit.sensitivity_db / 20.0) * highpass * resonance


def simulate_capture(
    unit: UnitModel,
    rng: np.random.Generator,
    *,
    sweep: dict[str, float] | None = None,
    sample_rate_hz: float = SAMPLE_RATE_HZ,
) -> np.ndarray:
    """The unit's capture of the sweep, fractions of full scale in 16-bit steps, (frames,).

    ``sweep`` (keys as :data:`SWEEP`) and ``sample_rate_hz`` default to the demo lot's.

    Examples
    --------
    0.2 s + 0.6 s + 0.2 s at 16 kHz, on the 16-bit grid:

    >>> x = simulate_capture(DESIGN, np.random.default_rng(0))
    >>> x.shape, bool(np.all(x * 32768 == np.round(x * 32768)))
    ((16000,), True)
    """
    spec = _sweep_spec(sweep, sample_rate_hz)
    stimulus = sweep_signal(spec)
    pressure = stimulus / spec.amplitude * _level_pa() * math.sqrt(2.0)  # Pa
    n = pressure.size
    nfft = 2 * n  # zero padding: the responses decay in well under n samples
    f = np.fft.rfftfreq(nfft, 1.0 / sample_rate_hz)
    h = unit_response(unit, f) * np.exp(-2j * np.pi * f * unit.delay_s)
    volts = np.fft.irfft(np.fft.rfft(pressure, nfft) * h, nfft)[:n]
    peak = 10.0 ** (unit.sensitivity_db / 20.0) * _level_pa() * math.sqrt(2.0)
    volts = volts + (2.0 * unit.h2 / peak) * volts**2  # y = x + c x²: H2 = c·A/2
    volts = volts + NOISE_V * rng.standard_normal(n)
    fs_units = volts * 10.0 ** (unit.gain_db / 20.0) / FULL_SCALE_V
    return np.round(np.clip(fs_units, -1.0, 32767 / 32768) * 32768) / 32768


def draw_unit(serial: str, rng: np.random.Generator) -> UnitModel:
    """A good unit drawn from the design's spread (table in the module docstring).

    Examples
    --------
    >>> unit = draw_unit("24101", np.random.default_rng(2427))
    >>> unit.serial, round(unit.sensitivity_db, 2), round(unit.corner_hz, 1), unit.fault
    ('24101', -41.59, 61.1, None)
    """
    return UnitModel(
        serial=serial,
        sensitivity_db=float(rng.normal(DESIGN.sensitivity_db, 0.5)),
        corner_hz=float(rng.normal(DESIGN.corner_hz, 3.0)),
        resonance_hz=float(rng.normal(DESIGN.resonance_hz, 60.0)),
        q=float(rng.normal(DESIGN.q, 0.15)),
        delay_s=float(rng.uniform(0.55e-3, 0.65e-3)),
        h2=float(rng.uniform(0.002, 0.004)),
    )


def golden_response_csv() -> str:
    """The design's nominal response (the model, no noise) on a 1/12-octave grid, as a
    response CSV (frequency_hz, magnitude_db).

    Examples
    --------
    >>> from piezo.response.fit import parse_response_csv, sensitivity_at
    >>> golden = parse_response_csv(golden_response_csv())
    >>> golden.frequency_hz[:2].round(3).tolist(), golden.magnitude_unit
    ([20.0, 21.189], 'dB re 1 V/Pa')
    >>> round(sensitivity_at(golden.frequency_hz, golden.magnitude_db), 2)
    -41.56
    """
    f = 20.0 * 2.0 ** (np.arange(0, int(12 * math.log2(7000 / 20)) + 1) / 12.0)
    mag = 20.0 * np.log10(np.abs(unit_response(DESIGN, f)))
    lines = [
        "# PD27 design response (model, no noise): golden reference for the demo lot",
        "# magnitude_db: dB re 1 V/Pa",
        "frequency_hz,magnitude_db",
    ]
    lines += [f"{fq:.6g},{m:.4f}" for fq, m in zip(f, mag, strict=True)]
    return "\n".join(lines) + "\n"


def spec_text() -> str:
    """The lot's limit spec (engineering limits around the design; invented for the demo).

    Examples
    --------
    The spec names its golden response, so it is read from a folder that holds both;
    94 dB SPL is 1.00237 Pa:

    >>> import pathlib, tempfile
    >>> from piezo.batch.spec import load_spec
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     _ = (pathlib.Path(tmp) / "pd27-spec.toml").write_text(spec_text())
    ...     _ = (pathlib.Path(tmp) / "pd27-golden.csv").write_text(golden_response_csv())
    ...     spec = load_spec(pathlib.Path(tmp) / "pd27-spec.toml")
    >>> [m.name for m in spec.metrics][:4], round(spec.stimulus.level_pa, 5)
    (['sensitivity', 'corner', 'resonance', 'thd_1k'], 1.00237)
    >>> spec.metrics[0].fail_limits(), spec.serial_from_name("PD27-24107.flac")
    ((-44.5, -38.5), '24107')
    """
    return f"""\
# Limit spec of the PD27 end-of-line test (demo; limits invented for the scenario).
[spec]
name = "PD27 disc microphone, end of line"
serial_pattern = 'PD27-(?P<serial>[0-9]{{5}})'
serial_required = true

[capture]
full_scale_v = {FULL_SCALE_V}
gain = "{GAIN_DB:g} dB"

[stimulus]
kind = "sweep"
start_hz = {SWEEP["start_hz"]}
stop_hz = {SWEEP["stop_hz"]}
duration_s = {SWEEP["duration_s"]}
silence_before_s = {SWEEP["silence_before_s"]}
silence_after_s = {SWEEP["silence_after_s"]}
level_db = {LEVEL_DB_SPL}                 # dB SPL at the unit, from the coupler's calibration

[metrics.sensitivity]
reference_hz = 1000
nominal = -41.5                 # the design's -42 dB passband plus its +0.5 dB at 1 kHz

[[metrics.sensitivity.limits]]
lower_rel = -3.0
upper_rel = 3.0

[[metrics.sensitivity.limits]]
lower_rel = -2.0
upper_rel = 2.0
severity = "warn"

[metrics.corner]
upper = 80.0

[metrics.resonance]
lower = 3900.0
upper = 4700.0

[metrics.thd_1k]
kind = "thd"
frequency_hz = 1000
upper = 1.0

[metrics.clipping]
upper = 0.0

[metrics.noise_floor]
weighting = "Z"
upper = -95.0
severity = "warn"

[metrics.golden]
kind = "golden_deviation"
golden = "pd27-golden.csv"
band_hz = [100, 3000]
relative_to_hz = 1000
upper = 1.5
"""


def resonance_spec_text() -> str:
    """A one-metric spec for the bundled lot: the resonance alone, within the limits of
    :func:`spec_text`. It judges a capture in a few milliseconds (no level meter, no
    distortion analysis), which suits examples and a first look at a lot.

    Examples
    --------
    >>> from piezo.batch.spec import parse_spec
    >>> spec = parse_spec(resonance_spec_text())
    >>> spec.name, [m.name for m in spec.metrics], spec.metrics[0].fail_limits()
    ('PD27 resonance', ['resonance'], (3900.0, 4700.0))
    """
    return f"""\
[spec]
name = "PD27 resonance"
serial_pattern = 'PD27-(?P<serial>[0-9]{{5}})'
[stimulus]
kind = "sweep"
start_hz = {SWEEP["start_hz"]}
stop_hz = {SWEEP["stop_hz"]}
duration_s = {SWEEP["duration_s"]}
silence_before_s = {SWEEP["silence_before_s"]}
silence_after_s = {SWEEP["silence_after_s"]}
[metrics.resonance]
lower = 3900.0
upper = 4700.0
"""


def lot_files() -> list[LotFile]:
    """Every file of the demo lot, in writing order (deterministic).

    Examples
    --------
    Spec, golden response, 40 lot captures and 10 golden units; the seeded faults:

    >>> files = lot_files()
    >>> len(files), sum(f.name.startswith("pd27-lot/") for f in files)
    (52, 40)
    >>> [f.unit.serial for f in files if f.unit is not None and f.unit.fault]
    ['24107', '24115', '24118', '24122', '24131', '24136']
    """
    files = [
        LotFile("pd27-spec.toml", "limit spec of the PD27 end-of-line test", text=spec_text()),
        LotFile(
            "pd27-golden.csv",
            "PD27 design response: golden reference",
            text=golden_response_csv(),
        ),
    ]
    rng = np.random.default_rng(2427)
    for i in range(40):
        serial = f"{24101 + i}"
        unit = draw_unit(serial, rng)
        noise_rng = np.random.default_rng(int(serial))
        fault = FAULTS.get(serial)
        if fault is not None:
            unit = UnitModel(**{**unit.__dict__, **fault[1], "fault": fault[0]})
        name = f"pd27-lot/PD27-{serial}.flac"
        samples = simulate_capture(unit, noise_rng)
        if unit.fault == "corrupt file":
            data = flac_bytes(samples, SAMPLE_RATE_HZ)
            files.append(
                LotFile(name, "capture cut off half way", data=data[: len(data) // 2], unit=unit)
            )
            continue
        what = f"unit {serial}" + (f" ({unit.fault})" if unit.fault else "")
        files.append(LotFile(name, what, samples, SAMPLE_RATE_HZ, unit=unit))
    golden_rng = np.random.default_rng(2327)
    for i in range(10):
        serial = f"{23001 + i}"
        unit = draw_unit(serial, golden_rng)
        samples = simulate_capture(unit, np.random.default_rng(int(serial)))
        files.append(
            LotFile(
                f"pd27-golden/PD27-{serial}.flac",
                f"golden unit {serial}",
                samples,
                SAMPLE_RATE_HZ,
                unit=unit,
            )
        )
    return files
