"""Benchmark: capture diagnostics as a ratio to decoding, measured in one run.

    python benchmarks/diagnostics.py [--seconds 600]

Writes a two-channel 24-bit WAV (48 kHz) of band-limited noise with clipping, a dropout
and hum in a temporary directory, then prints
- the time to decode it in 65536-frame blocks with soundfile;
- the time of ``CaptureChecker`` over the same blocks (decode included), as a ratio;
- the peak size of the checker's bookkeeping (it must not grow with the length).

The machine is shared (two cores, other work running): figures are noisy; run twice.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.signal
import soundfile as sf

from piezo.diagnostics.checker import CaptureChecker

FS = 48000
BLOCK = 65536


def _write(path: Path, seconds: float) -> None:
    rng = np.random.default_rng(7)
    sos = scipy.signal.butter(2, [30.0, 15000.0], "bandpass", fs=FS, output="sos")
    zi = np.zeros((sos.shape[0], 2, 2))
    chunk = 10 * FS
    with sf.SoundFile(str(path), "w", FS, 2, subtype="PCM_24") as fh:
        done = 0
        total = int(seconds * FS)
        while done < total:
            n = min(chunk, total - done)
            t = (np.arange(n) + done) / FS
            x, zi = scipy.signal.sosfilt(sos, rng.standard_normal((n, 2)), axis=0, zi=zi)
            x *= 0.2
            x[:, 0] = np.clip(x[:, 0] * 3.0, -0.8, 0.8)  # a saturating preamplifier
            x[:, 1] += 0.01 * np.sin(2 * np.pi * 50.0 * t)  # hum
            if done == 0:
                x[FS : FS + 480, 1] = 0.0  # a 10 ms dropout
            fh.write(x)
            done += n


def _decode(path: Path) -> float:
    t0 = time.perf_counter()
    for _ in sf.blocks(str(path), blocksize=BLOCK, dtype="float64", always_2d=True):
        pass
    return time.perf_counter() - t0


def _check(path: Path) -> tuple[float, int]:
    t0 = time.perf_counter()
    checker = CaptureChecker(FS, 2)
    largest = 0
    for block in sf.blocks(str(path), blocksize=BLOCK, dtype="float64", always_2d=True):
        checker.update(block)
        state = sum(len(s.hist) + len(s.runs) for s in (*checker._pos, *checker._neg))
        largest = max(largest, state)
    result = checker.result()
    elapsed = time.perf_counter() - t0
    assert result.channels[0].clipping.clipped_samples > 0
    return elapsed, largest


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=600.0, help="recording length")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "capture.wav"
        _write(path, args.seconds)
        decode = min(_decode(path) for _ in range(2))
        check, largest = min(_check(path) for _ in range(2))
    print(f"recording: {args.seconds:g} s, 2 channels, 48 kHz, PCM_24")
    print(f"decode:    {decode:.2f} s")
    print(f"check:     {check:.2f} s  = {check / decode:.1f} x decode (decode included)")
    print(f"bookkeeping near the extremes: at most {largest} buckets (bounded)")


if __name__ == "__main__":
    main()
