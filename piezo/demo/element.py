"""A synthetic lot of piezo elements: impedance sweeps and tap captures (scenario of our own).

Scenario
--------
Incoming inspection of "PT29" ultrasonic piezo discs (a 29 kHz radial mode) before they
are bonded into transducers. Each element is swept on an impedance analyser (exported
as CSV: frequency, |Z| in Ω, phase in degrees; 40 points from 200 Hz to 20 kHz and
10 Hz steps from 26 to 34 kHz), and tapped once with a small nylon hammer while its
electrodes drive a 10 MΩ scope probe (open circuit: it rings at its antiresonance); the
tap is recorded at 192 kHz, 16-bit FLAC, 1 V full scale, 40 ms.

Design (the example of docs/element.md): C0 = 2.2 nF, L1 = 0.12 H, C1 = 0.25 nF,
R1 = 35 Ω (fs 29.06 kHz, fp 30.66 kHz, k_eff 0.319, Qm 626), dielectric loss tan δ
0.4 % at every frequency; lot spread 1 % in C0 and C1, 0.5 % in L1, 8 %
in R1 (values invented for the demo). Seeded faults:

- ``EL-29104``: cracked element: the radial mode splits into two (28.7 and 29.6 kHz,
  each with half the motional capacitance, Q about 300);
- ``EL-29106``: low Q (a poorly fired ceramic): R1 = 140 Ω, Qm about 157;
- ``EL-29107``: wrong capacitance (a disc of the thinner grade): C0 = 3.3 nF.

Nothing is written here: :func:`element_lot_files` returns names and bytes.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass

import numpy as np
import soundfile as sf

from piezo.element.bvd import BvdCircuit

__all__ = ["ELEMENT_FAULTS", "ElementFile", "element_lot_files", "impedance_spec_text",
           "tap_spec_text"]  # fmt: skip

#: Serial -> fault.
ELEMENT_FAULTS = {"29104": "cracked element", "29106": "low Q", "29107": "wrong capacitance"}
TAP_RATE_HZ = 192000
TAP_SECONDS = 0.04
TAN_DELTA = 0.004


@dataclass(frozen=True)
class ElementFile:
    """One file of the element lot: its name (relative to the output folder) and bytes.

    Examples
    --------
    Each element has an impedance CSV and a 40 ms tap at 192 kHz (7680 samples):

    >>> import pathlib, tempfile
    >>> import soundfile as sf
    >>> files = element_lot_files()
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     for item in files[2:4]:
    ...         path = pathlib.Path(tmp) / item.name
    ...         path.parent.mkdir(parents=True, exist_ok=True)
    ...         _ = path.write_bytes(item.data)
    ...     info = sf.info(str(pathlib.Path(tmp) / "element-lot/tap/EL-29101.flac"))
    ...     header = (pathlib.Path(tmp) / files[2].name).read_text().splitlines()[1]
    >>> info.samplerate, info.frames, header
    (192000, 7680, 'Frequency (Hz),|Z| (Ohm),Phase (deg)')
    """

    name: str
    description: str
    data: bytes


@dataclass(frozen=True)
class _Element:
    serial: str
    branches: tuple[tuple[float, float, float], ...]  # (R1, L1, C1) per motional branch
    c0_f: float
    fault: str | None


def _draw(serial: str, rng: np.random.Generator) -> _Element:
    c0 = 2.2e-9 * (1 + 0.01 * rng.standard_normal())
    c1 = 0.25e-9 * (1 + 0.01 * rng.standard_normal())
    l1 = 0.12 * (1 + 0.005 * rng.standard_normal())
    r1 = 35.0 * (1 + 0.08 * rng.standard_normal())
    fault = ELEMENT_FAULTS.get(serial)
    branches: tuple[tuple[float, float, float], ...] = ((r1, l1, c1),)
    if fault == "cracked element":
        # Two halves: each half the C1; L1 set for 28.7 and 29.6 kHz; Q about 300.
        out = []
        for f in (28.7e3, 29.6e3):
            c = c1 / 2
            ll = 1 / ((2 * math.pi * f) ** 2 * c)
            out.append((math.sqrt(ll / c) / 300.0, ll, c))
        branches = tuple(out)
    elif fault == "low Q":
        branches = ((140.0, l1, c1),)
    elif fault == "wrong capacitance":
        c0 = 3.3e-9
    return _Element(serial, branches, c0, fault)


def _impedance(el: _Element, f: np.ndarray) -> np.ndarray:
    w = 2 * np.pi * f
    # A dielectric with a constant loss tangent: Y0 = jωC0(1 − j tan δ).
    y = 1j * w * el.c0_f * (1 - 1j * TAN_DELTA)
    for r1, l1, c1 in el.branches:
        y = y + 1 / BvdCircuit(1.0, r1, l1, c1).impedance(f) - 1j * w * 1.0
    return 1 / y


def _sweep_csv(el: _Element, rng: np.random.Generator) -> bytes:
    f = np.concatenate([np.geomspace(200, 20e3, 40), np.arange(26000.0, 34000.0 + 1, 10.0)])
    z = _impedance(el, f)
    # Analyser noise: 0.1 % in |Z|, 0.05° in phase (a bench analyser's repeatability).
    mag = np.abs(z) * (1 + 1e-3 * rng.standard_normal(f.size))
    phase = np.degrees(np.angle(z)) + 0.05 * rng.standard_normal(f.size)
    lines = [
        f"# PT29 incoming inspection, element EL-{el.serial} (synthetic demo data)",
        "Frequency (Hz),|Z| (Ohm),Phase (deg)",
    ]
    lines += [f"{a:.6g},{b:.6g},{c:.4f}" for a, b, c in zip(f, mag, phase, strict=True)]
    return ("\n".join(lines) + "\n").encode("utf-8")


def _tap_flac(el: _Element, rng: np.random.Generator) -> bytes:
    n = int(TAP_RATE_HZ * TAP_SECONDS)
    t = np.arange(n) / TAP_RATE_HZ
    t0 = 0.004
    tau = np.clip(t - t0, 0, None)
    x = np.zeros(n)
    c0 = el.c0_f
    for r1, l1, c1 in el.branches:
        # Open circuit: the branch rings with C0 in series, at its antiresonance, with
        # decay rate R1/(2 L1) (the series R-L-C of the loop).
        ce = c0 * c1 / (c0 + c1)
        wa = 1 / math.sqrt(l1 * ce)
        sigma = r1 / (2 * l1)
        x += 0.3 * math.sqrt(c1 / 0.25e-9) * np.exp(-sigma * tau) * np.sin(wa * tau)
    # The second radial overtone, weak and better damped.
    x += 0.05 * np.exp(-tau * 900.0) * np.sin(2 * np.pi * 78.3e3 * tau)
    x *= t >= t0
    x += 2e-3 * rng.standard_normal(n)
    samples = np.round(np.clip(x, -1, 32767 / 32768) * 32768) / 32768
    buf = io.BytesIO()
    sf.write(buf, samples, TAP_RATE_HZ, format="FLAC", subtype="PCM_16")
    return buf.getvalue()


def impedance_spec_text() -> str:
    """Limit spec of the impedance inspection (limits invented for the demo).

    Examples
    --------
    A valid spec whose series-resonance window holds the design's
    ``fs = 1/(2π·√(L1·C1))`` = 29.06 kHz (L1 = 0.12 H, C1 = 0.25 nF):

    >>> from piezo.batch.spec import parse_spec
    >>> spec = parse_spec(impedance_spec_text())
    >>> limits = {m.name: m.fail_limits() for m in spec.metrics}
    >>> limits["fs"], spec.serial_from_name("EL-29104.csv")
    ((28500.0, 29600.0), '29104')
    >>> lo, hi = limits["fs"]
    >>> lo < 1 / (2 * math.pi * math.sqrt(0.12 * 0.25e-9)) < hi
    True
    """
    return """\
# PT29 incoming inspection: impedance sweep limits (demo; limits invented for the scenario).
[spec]
name = "PT29 ultrasonic disc, impedance"
serial_pattern = 'EL-(?P<serial>[0-9]{5})'
serial_required = true

[stimulus]
kind = "impedance"
low_frequency_hz = 1000

[metrics.fs]
lower = 28500.0
upper = 29600.0

[metrics.fp]
lower = 30100.0
upper = 31200.0

[metrics.qm]
lower = 450.0

[metrics.k_eff]
lower = 0.29
upper = 0.35

[metrics.c0]
lower = 2.05
upper = 2.35

[metrics.free_capacitance]
lower = 2.3
upper = 2.6

[metrics.tan_delta]
upper = 0.02
severity = "warn"

[metrics.modes]
kind = "mode_count"
band_hz = [26000, 34000]
upper = 1
"""


def tap_spec_text() -> str:
    """Limit spec of the tap test (limits invented for the demo).

    Examples
    --------
    Open circuit, the element rings at its antiresonance ``fp = fs·√(1 + C1/C0)``
    = 30.66 kHz for the design, inside the ring-frequency limits:

    >>> from piezo.batch.spec import parse_spec
    >>> spec = parse_spec(tap_spec_text())
    >>> spec.stimulus.kind, [m.name for m in spec.metrics]
    ('tap', ['ring_frequency', 'ring_q', 'ring_modes'])
    >>> lo, hi = spec.metrics[0].fail_limits()
    >>> fp = 1 / (2 * math.pi * math.sqrt(0.12 * 0.25e-9)) * math.sqrt(1 + 0.25 / 2.2)
    >>> lo < fp < hi, round(fp)
    (True, 30664)
    """
    return """\
# PT29 incoming inspection: tap test limits (demo; limits invented for the scenario).
[spec]
name = "PT29 ultrasonic disc, tap test"
serial_pattern = 'EL-(?P<serial>[0-9]{5})'
serial_required = true

[capture]
full_scale_v = 1.0

[stimulus]
kind = "tap"

[metrics.ring_frequency]
kind = "mode_frequency"
band_hz = [26000, 34000]
lower = 30100.0
upper = 31200.0

[metrics.ring_q]
kind = "mode_q"
band_hz = [26000, 34000]
lower = 450.0

[metrics.ring_modes]
kind = "mode_count"
band_hz = [26000, 34000]
upper = 1
"""


def element_lot_files() -> list[ElementFile]:
    """Every file of the element lot, in writing order (deterministic).

    Examples
    --------
    >>> files = element_lot_files()
    >>> len(files), files[2].name
    (18, 'element-lot/impedance/EL-29101.csv')
    """
    files = [
        ElementFile("element-impedance-spec.toml", "impedance limit spec of the PT29 lot",
                    impedance_spec_text().encode("utf-8")),
        ElementFile("element-tap-spec.toml", "tap-test limit spec of the PT29 lot",
                    tap_spec_text().encode("utf-8")),
    ]  # fmt: skip
    rng = np.random.default_rng(29100)
    for i in range(8):
        serial = f"{29101 + i}"
        el = _draw(serial, rng)
        noise = np.random.default_rng(int(serial))
        what = f"element {serial}" + (f" ({el.fault})" if el.fault else "")
        files.append(
            ElementFile(f"element-lot/impedance/EL-{serial}.csv", what, _sweep_csv(el, noise))
        )
        files.append(ElementFile(f"element-lot/tap/EL-{serial}.flac", what, _tap_flac(el, noise)))
    return files
