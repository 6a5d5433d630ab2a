"""Benchmark: full sound-level set of a long recording against the soundfile decode floor.

Writes a 48 kHz, 24-bit mono WAV of noise plus tones (generated with a fixed seed, not
committed) to a benchmark directory, then times

1. the floor: ``soundfile`` decoding the whole file to float64 blocks, nothing else;
2. the full level set: the same file through ``piezo.io.reader`` and the measurement chain into
   :class:`piezo.levels.meter.LevelMeter` (A/C/Z weighting, F/S time weighting, peaks,
   percentiles), block by block.

It prints both times, their ratio (target: at most 3x the floor), the peak resident
memory of the process (``resource.getrusage``; target: under 250 MB whatever the file
length) and the time of the first, untimed update (loading the compiled kernels from the
cache folder, or compiling them). The machine may be shared: figures vary from run to
run; the CPU-time ratio is the steadier one; run it twice.

Run it from the repository root with that checkout's ``piezo`` first on the path (an
installed ``piezo`` elsewhere would be measured otherwise; the first output line says
which one was)::

    PYTHONPATH=. python benchmarks/bench_levels.py                 # one hour
    PYTHONPATH=. python benchmarks/bench_levels.py --minutes 10    # shorter
    PYTHONPATH=. python benchmarks/bench_levels.py --hours 4 --repeat 1   # long-file memory
"""

from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

import piezo
from piezo.chain.measurement import CalibratedSource, Chain
from piezo.io.reader import open_recording
from piezo.levels.meter import LevelMeter

FS = 48000
CHUNK_S = 5  # small chunks: generating the file must not raise the peak RSS


def write_test_file(path: Path, duration_s: float) -> None:
    """Pink-ish noise plus three steady tones and a slow level swell, 24-bit PCM."""
    rng = np.random.default_rng(2026)
    total = round(duration_s * FS)
    with sf.SoundFile(path, "w", samplerate=FS, channels=1, subtype="PCM_24") as f:
        start = 0
        while start < total:
            n = min(CHUNK_S * FS, total - start)
            t = (start + np.arange(n)) / FS
            noise = 0.02 * rng.standard_normal(n)
            tones = (
                0.10 * np.sin(2 * np.pi * 125.0 * t)
                + 0.05 * np.sin(2 * np.pi * 1000.0 * t)
                + 0.02 * np.sin(2 * np.pi * 6300.0 * t)
            )
            swell = 1.0 + 0.5 * np.sin(2 * np.pi * t / 37.0)
            f.write((noise + tones) * swell)
            start += n


def decode_floor(path: Path, block_frames: int) -> tuple[float, float]:
    """(wall s, CPU s) to decode the file to float64 blocks."""
    t0, c0 = time.perf_counter(), time.process_time()
    with sf.SoundFile(path) as f:
        for _ in f.blocks(block_frames, dtype="float64", always_2d=True):
            pass
    return time.perf_counter() - t0, time.process_time() - c0


def full_levels(path: Path, block_frames: int) -> tuple[float, float, object]:
    """(wall s, CPU s, result) for the full level set, decode included."""
    t0, c0 = time.perf_counter(), time.process_time()
    rec = open_recording(path)
    # 20 mV/Pa sensor, 1 V full scale: samples become pascals as in `piezo levels`.
    source = CalibratedSource.of(rec, Chain(sensitivity_v_per_pa=0.02))
    meter = LevelMeter(FS, 1, reference=source.reference, interval_s=1.0)
    for block in source.blocks(block_frames):
        meter.update(block)
    result = meter.result()
    return time.perf_counter() - t0, time.process_time() - c0, result


def peak_rss_mb() -> float:
    # Linux reports ru_maxrss in kilobytes.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    length = parser.add_mutually_exclusive_group()
    length.add_argument("--minutes", type=float, help="recording length in minutes")
    length.add_argument("--hours", type=float, help="recording length in hours (default 1)")
    parser.add_argument(
        "--dir",
        type=Path,
        default=Path(tempfile.gettempdir()) / "piezo-bench",
        help="where the generated WAV is written (default: a temp folder)",
    )
    parser.add_argument(
        "--block-frames", type=int, default=65536, help="frames per block (as the CLI)"
    )
    parser.add_argument("--repeat", type=int, default=3, help="runs; the best is reported")
    args = parser.parse_args(argv)
    duration_s = 3600.0 * (args.hours or 1.0) if args.minutes is None else 60.0 * args.minutes
    args.dir.mkdir(parents=True, exist_ok=True)
    path = args.dir / f"levels-{duration_s:.0f}s-48k-24bit.wav"
    if not path.exists() or sf.info(path).frames != round(duration_s * FS):
        print(f"writing {path} ({duration_s / 60:.1f} min) ...", file=sys.stderr)
        write_test_file(path, duration_s)
    rss_before = peak_rss_mb()
    # First use of the compiled kernels: loads them from the cache folder, or compiles
    # them when there is no cache yet (not part of the timed runs).
    t0 = time.perf_counter()
    LevelMeter(FS, 1).update(np.zeros((64, 1)))
    t_first = time.perf_counter() - t0
    rss_kernels = peak_rss_mb()
    decode = [decode_floor(path, args.block_frames) for _ in range(args.repeat)]
    runs = [full_levels(path, args.block_frames) for _ in range(args.repeat)]
    t_decode, c_decode = min(d[0] for d in decode), min(d[1] for d in decode)
    t_full, c_full = min(r[0] for r in runs), min(r[1] for r in runs)
    result = runs[-1][2]
    ch = result.channels[0]
    frames = result.frames
    print(f"piezo             {Path(piezo.__file__).parent}")
    print(f"file              {path} ({frames} frames, {duration_s / 60:.1f} min)")
    print(f"best of {args.repeat} runs, block {args.block_frames} frames")
    print("                  wall s  ns/sample   CPU s  ns/sample")
    for name, wall, cpu in (
        ("decode floor", t_decode, c_decode),
        ("full level set", t_full, c_full),
    ):
        print(
            f"{name:16s}  {wall:6.2f}  {1e9 * wall / frames:9.2f}  {cpu:6.2f}  "
            f"{1e9 * cpu / frames:9.2f}"
        )
    print(
        f"ratio             {t_full / t_decode:6.2f}x wall, "
        f"{c_full / c_decode:.2f}x CPU (target <= 3)"
    )
    print(
        f"peak RSS          {peak_rss_mb():6.1f} MB "
        f"(after imports {rss_before:.1f} MB, after kernel load {rss_kernels:.1f} MB; "
        "target < 250)"
    )
    print(f"first update      {t_first:6.2f} s (kernel cache load, or compile if none)")
    print(
        f"levels            LAeq {ch.LAeq:.2f}  LCeq {ch.LCeq:.2f}  LZeq {ch.LZeq:.2f}  "
        f"LAFmax {ch.LAFmax:.2f}  LAF90 {ch.LAF90:.2f} dB re 20 uPa"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
