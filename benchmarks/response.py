"""Benchmark: swept-sine analysis and streaming H1, as ratios measured in one run.

    python benchmarks/response.py [--seconds 60]

Prints
- sweep analysis time / soundfile decode time of the same capture (FLOAT WAV);
- H1Estimator time (streamed in 65536-frame blocks) / decode time of the same file;
- H1Estimator time / scipy.signal.csd + welch + coherence on the same arrays (the
  reference does the Welch sums three times, so a ratio near 1/2 or below is expected).

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

from piezo.response.measure import H1Estimator, analyze_sweep
from piezo.response.stimulus import sweep_signal, sweep_spec

FS = 48000


def _best(fn, repeat: int = 3) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=60.0, help="capture length")
    args = parser.parse_args()
    total = args.seconds
    spec = sweep_spec(20.0, 20000.0, total - 1.5, FS, silence_before_s=0.5, silence_after_s=1.0)
    stimulus = sweep_signal(spec)
    sos = scipy.signal.butter(2, 50.0, "highpass", fs=FS, output="sos")
    capture = scipy.signal.sosfilt(sos, stimulus)
    rng = np.random.default_rng(1)
    x = 0.1 * rng.standard_normal(stimulus.size)
    pair = np.column_stack([x, scipy.signal.sosfilt(sos, x)])

    with tempfile.TemporaryDirectory() as tmp:
        cap_path = Path(tmp) / "capture.wav"
        pair_path = Path(tmp) / "pair.wav"
        sf.write(str(cap_path), capture, FS, subtype="FLOAT")
        sf.write(str(pair_path), pair, FS, subtype="FLOAT")

        decode_cap = _best(lambda: sf.read(str(cap_path)))
        decode_pair = _best(lambda: sf.read(str(pair_path)))

        def sweep_run() -> None:
            data, _ = sf.read(str(cap_path))
            analyze_sweep(data, spec, FS)

        def h1_run() -> None:
            est = H1Estimator(FS, 2, segment_frames=8192)
            for block in sf.blocks(str(pair_path), blocksize=65536):
                est.update(block)
            est.result()

        t_sweep = _best(sweep_run)
        t_h1 = _best(h1_run)

        def h1_arrays() -> None:
            est = H1Estimator(FS, 2, segment_frames=8192)
            est.update(pair)
            est.result()

        def scipy_ref() -> None:
            scipy.signal.csd(pair[:, 0], pair[:, 1], fs=FS, nperseg=8192)
            scipy.signal.welch(pair[:, 0], fs=FS, nperseg=8192)
            scipy.signal.coherence(pair[:, 0], pair[:, 1], fs=FS, nperseg=8192)

        t_ours = _best(h1_arrays)
        t_ref = _best(scipy_ref)

    print(f"capture: {total:g} s at {FS} Hz (sweep {spec.duration_s:g} s)")
    print(f"decode of the capture:          {1e3 * decode_cap:8.1f} ms")
    print(f"sweep analysis / decode:        {t_sweep / decode_cap:8.1f}")
    print(f"H1 streamed / decode (2 ch):    {t_h1 / decode_pair:8.1f}")
    print(f"H1 / scipy csd+welch+coherence: {t_ours / t_ref:8.2f}")


if __name__ == "__main__":
    main()
