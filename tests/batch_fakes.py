"""Test doubles for the batch framework: a capture loader and metric extractors.

They let the runner, verdicts and outputs be tested with plain arithmetic on tiny WAV
files, independently of the analysis modules. Module level (not inside a test) so that
spawned worker processes can import them by name.
"""

from __future__ import annotations

import math
import os
import zlib

import numpy as np
import soundfile as sf

from piezo.batch.runner import Capture, CaptureAnalysis, evaluate_capture
from piezo.batch.spec import MetricSpec, Spec
from piezo.batch.verdict import MetricValue
from piezo.errors import RecordingError

SPEC_TEXT = """
[spec]
name = "fake lot"
serial_pattern = 'SN(?P<serial>[0-9]{4})'

[capture]
full_scale_v = 2.0
gain = 2

[stimulus]
kind = "tone"
frequency_hz = 1000
level_pa = 1.0
silence_before_s = 0.05

[metrics.sensitivity]
nominal = -10.0
lower_rel = -3.0
upper_rel = 3.0

[metrics.clipping]
upper = 0.0

[metrics.noise_floor]
upper = -60.0
severity = "warn"
"""

RATE_HZ = 8000


def write_capture(path, amplitude: float, *, clip: bool = False, noise: float = 1e-4) -> None:
    """A 1 kHz tone after 50 ms of low noise, 0.25 s at 8 kHz, 16-bit WAV."""
    rng = np.random.default_rng(zlib.crc32(os.path.basename(str(path)).encode()))
    t = np.arange(int(0.25 * RATE_HZ)) / RATE_HZ
    x = amplitude * np.sin(2 * np.pi * 1000.0 * t)
    x[: int(0.05 * RATE_HZ)] = 0.0
    x += noise * rng.standard_normal(t.size)
    if clip:
        x = np.clip(x * 4, -1.0, 1.0)
    sf.write(str(path), np.clip(x, -1.0, 1.0), RATE_HZ, subtype="PCM_16")


def load(path: str, spec: Spec) -> Capture:
    """Read with soundfile; volts = fraction of full scale * full_scale_v / gain."""
    try:
        raw, rate = sf.read(path, always_2d=True)
    except sf.LibsndfileError as exc:
        raise RecordingError(f"cannot decode: {exc}", source=path) from None
    volts = raw[:, spec.channel] * spec.full_scale_v / spec.gain
    return Capture(path, float(rate), volts, spec.full_scale_v / spec.gain)


def _sensitivity(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    x = a.capture.samples[int(0.05 * a.capture.sample_rate_hz) :]
    rms = math.sqrt(float(np.mean(x**2)))
    return MetricValue(20 * math.log10(rms / a.spec.stimulus.level_pa))


def _clipping(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    x = a.capture.samples
    return MetricValue(float(np.mean(np.abs(x) >= 0.999 * a.capture.clip_level_v)))


def _noise_floor(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    n = int(0.05 * a.capture.sample_rate_hz)
    rms = math.sqrt(float(np.mean(a.capture.samples[:n] ** 2)))
    if rms == 0:
        return MetricValue(None, reason="digital silence: no noise floor")
    return MetricValue(20 * math.log10(rms))


def _mask(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    """Fake 'response': the tone level in dB plus 0.1 dB per mask point."""
    base = _sensitivity(a, m).value
    curve = [base + 0.1 * i for i, _ in enumerate(m.params["frequency_hz"])]
    margins = []
    for key, sign in (("lower_db", 1.0), ("upper_db", -1.0)):
        if m.params.get(key) is not None:
            margins += [sign * (c - b) for c, b in zip(curve, m.params[key], strict=True)]
    return MetricValue(min(margins) if margins else None, curve=tuple(curve))


def _broken(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
    raise ZeroDivisionError("analysis bug")


EXTRACTORS = {
    "sensitivity": _sensitivity,
    "clipping": _clipping,
    "noise_floor": _noise_floor,
    "response_mask": _mask,
    "band_mask": _mask,
    "resonance": _broken,
}


def job(path: str, *, display: str, spec: Spec) -> dict:
    return evaluate_capture(path, spec, display=display, loader=load, extractors=EXTRACTORS)


def write_lot(folder, *, bad: bool = True) -> list:
    """Five good captures, and with ``bad`` a low one, a noisy one and a corrupt file."""
    folder.mkdir(parents=True, exist_ok=True)
    for i, amp in enumerate([0.45, 0.44, 0.46, 0.45, 0.455]):
        write_capture(folder / f"SN000{i}.wav", amp)
    if bad:
        write_capture(folder / "SN0100.wav", 0.15)
        write_capture(folder / "SN0101.wav", 0.45, noise=3e-3)
        (folder / "SN0102.wav").write_bytes(b"not audio")
    return sorted(folder.iterdir())


def crashing_job(path: str, *, display: str, spec: Spec) -> dict:
    """Kills its worker process on files named *crash*, like a decoder segfault would."""
    if "crash" in os.path.basename(path):
        os._exit(13)
    return job(path, display=display, spec=spec)


def use_fakes() -> None:
    """Make the runner's defaults (loader, extractors) these doubles, in this process."""
    import piezo.batch.runner as runner

    runner.load_capture = load
    runner._default_extractors = lambda: EXTRACTORS


def slow_cli() -> None:
    """``piezo`` with the doubles and a 50 ms delay per capture (for the kill test)."""
    import sys
    import time

    from piezo.cli import main

    def slow(a: CaptureAnalysis, m: MetricSpec) -> MetricValue:
        time.sleep(0.05)
        return _sensitivity(a, m)

    use_fakes()
    EXTRACTORS["sensitivity"] = slow
    main(sys.argv[1:])
