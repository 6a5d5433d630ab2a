"""Benchmark: 1/3-octave bands and Welch PSD against the decode floor, and PyOctaveBand.

Uses the same recording as ``bench_levels.py`` (48 kHz, 24-bit mono WAV of noise plus
tones, generated with a fixed seed into a benchmark folder, not committed; one hour by
default) and times, best of ``--repeat`` runs:

* the decode floor: reading the whole file into float64 blocks of 65536 frames with
  soundfile;
* piezo's 1/3-octave bands 20 Hz - 20 kHz (:class:`piezo.spectral.bands.BandAnalyzer`), reading
  the same blocks (decode included);
* piezo's Welch PSD (:class:`piezo.spectral.welch.WelchPSD`, 4096-sample Hann, 50 %), same.

Then, on pink noise held in memory (``--reference-minutes``, no decoding on either side),
PyOctaveBand 2.0.0 (``pyoctaveband.octavefilter``, order 6, test/bench-only reference)
against piezo's bands on the same samples: time ratio and agreement for the bands
25 Hz - 16 kHz (contract: within 0.2 dB).

Ratios are printed, wall-clock and CPU time of the process, with the load average;
nothing is asserted. The machine has two cores shared with other work: the CPU-time
ratio is the steadier figure.

Run it from the repository root with this checkout's ``piezo`` first on the path::

    PYTHONPATH=. python benchmarks/bench_spectra.py                # one hour
    PYTHONPATH=. python benchmarks/bench_spectra.py --minutes 10 --repeat 1
    PYTHONPATH=. python benchmarks/bench_spectra.py --no-bands --no-reference --fft-workers 1 2
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

import piezo
from piezo.spectral import averaging as spectrum
from piezo.spectral.bands import BandAnalyzer, band_levels
from piezo.spectral.welch import WelchPSD

FS = 48000
BLOCK = 65536


def _levels_bench():
    """The levels benchmark module (for its test-file writer)."""
    spec = importlib.util.spec_from_file_location(
        "bench_levels", Path(__file__).with_name("bench_levels.py")
    )
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def pink(n: int, seed: int = 21) -> np.ndarray:
    """Pink noise (1/f power, FFT-shaped), unit RMS."""
    rng = np.random.default_rng(seed)
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / FS)
    spec[1:] /= np.sqrt(f[1:])
    spec[0] = 0
    x = np.fft.irfft(spec, n)
    return x / np.std(x)


def blocks(path: Path):
    with sf.SoundFile(str(path)) as f:
        yield from f.blocks(BLOCK, dtype="float64", always_2d=True)


def timed(fn) -> tuple[float, float, object]:
    """(wall s, CPU s of the process, result) of ``fn()``."""
    c0, t0 = time.process_time(), time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, time.process_time() - c0, out


def run_decode(path: Path) -> None:
    for _ in blocks(path):
        pass


def run_bands(path: Path):
    an = BandAnalyzer(FS, 1, fraction=3, low_hz=20, high_hz=20000)
    for b in blocks(path):
        an.update(b)
    return an.result()


def run_welch(path: Path):
    est = WelchPSD(FS, 1, segment_frames=4096)
    for b in blocks(path):
        est.update(b)
    return est.result()


def best(fn, repeat: int) -> tuple[float, float]:
    runs = [timed(fn) for _ in range(repeat)]
    return min(r[0] for r in runs), min(r[1] for r in runs)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=60.0, help="length of the test file")
    ap.add_argument(
        "--reference-minutes", type=float, default=2.0, help="pink noise for PyOctaveBand"
    )
    ap.add_argument("--repeat", type=int, default=3, help="runs; the best is reported")
    ap.add_argument(
        "--dir",
        type=Path,
        default=Path(tempfile.gettempdir()) / "piezo-bench",
        help="where the generated WAV is written (default: a temp folder)",
    )
    ap.add_argument("--no-bands", action="store_true", help="skip the 1/3-octave bands")
    ap.add_argument("--no-reference", action="store_true", help="skip the PyOctaveBand comparison")
    ap.add_argument(
        "--fft-workers",
        type=int,
        nargs="+",
        default=None,
        help="also time the Welch PSD with these FFT thread counts (default: piezo's own)",
    )
    ap.add_argument("--json", action="store_true", help="print the figures as JSON")
    args = ap.parse_args(argv)

    duration_s = 60.0 * args.minutes
    args.dir.mkdir(parents=True, exist_ok=True)
    path = args.dir / f"levels-{duration_s:.0f}s-48k-24bit.wav"
    if not path.exists() or sf.info(path).frames != round(duration_s * FS):
        print(f"writing {path} ...", file=sys.stderr)
        _levels_bench().write_test_file(path, duration_s)
    frames = sf.info(path).frames

    t0 = time.perf_counter()
    band_levels(np.zeros(4096), FS)  # load (or compile) the kernels, untimed
    t_first = time.perf_counter() - t0
    load0 = os.getloadavg()[0]
    t_dec, c_dec = best(lambda: run_decode(path), args.repeat)
    t_bands, c_bands = (
        (float("nan"), float("nan"))
        if args.no_bands
        else best(lambda: run_bands(path), args.repeat)
    )
    t_welch, c_welch = best(lambda: run_welch(path), args.repeat)
    welch_workers = {}
    for workers in args.fft_workers or []:
        default, spectrum._WORKERS = spectrum._WORKERS, workers
        try:
            welch_workers[workers] = best(lambda: run_welch(path), args.repeat)
        finally:
            spectrum._WORKERS = default
    load1 = os.getloadavg()[0]
    figures = {
        "piezo": str(Path(piezo.__file__).parent),
        "minutes": args.minutes,
        "frames": frames,
        "load_average": [load0, load1],
        "first_use_s": t_first,
        "decode_s": [t_dec, c_dec],
        "bands_s": [t_bands, c_bands],
        "welch_s": [t_welch, c_welch],
        "bands_over_decode": [t_bands / t_dec, c_bands / c_dec],
        "welch_over_decode": [t_welch / t_dec, c_welch / c_dec],
        "welch_fft_workers": spectrum._WORKERS,
        "welch_by_fft_workers": {
            str(w): {"s": [t, c], "over_decode": [t / t_dec, c / c_dec]}
            for w, (t, c) in welch_workers.items()
        },
    }

    try:
        import pyoctaveband
    except ImportError:
        pyoctaveband = None
    if pyoctaveband is not None and not args.no_reference:
        x = pink(int(args.reference_minutes * 60 * FS))
        t_ours, c_ours, ours = timed(lambda: band_levels(x, FS, fraction=3))
        t_ref, c_ref, (ref_db, ref_f) = timed(
            lambda: pyoctaveband.octavefilter(
                x, FS, fraction=3, order=6, limits=[20, 20000], dbfs=True
            )
        )
        ours_db = ours.level_db(1.0)[:, 0]
        diffs = []
        for band, level in zip(ours.bands, ours_db, strict=True):
            if 25 <= band.nominal_hz <= 16000:
                k = int(np.argmin(np.abs(np.asarray(ref_f) - band.exact_hz)))
                diffs.append(float(level - ref_db[k]))
        figures.update(
            reference_minutes=args.reference_minutes,
            reference_s=[t_ref, c_ref],
            ours_in_memory_s=[t_ours, c_ours],
            speedup=[t_ref / t_ours, c_ref / c_ours],
            max_abs_difference_db=max(abs(d) for d in diffs),
            mean_difference_db=float(np.mean(diffs)),
        )

    if args.json:
        print(json.dumps(figures, indent=2))
        return 0
    ns = 1e9 / frames
    print(f"piezo             {figures['piezo']}")
    print(f"file              {path} ({frames} frames, 24-bit WAV)")
    print(f"best of {args.repeat} runs; load average {load0:.2f} before, {load1:.2f} after")
    print("                         wall s  ns/frame   CPU s  ns/frame  ratio wall / CPU")
    rows = [("decode floor", t_dec, c_dec)]
    if not args.no_bands:
        rows.append(("1/3-octave 20 Hz-20 kHz", t_bands, c_bands))
    rows.append((f"Welch PSD, {spectrum._WORKERS} FFT thr.", t_welch, c_welch))
    rows += [(f"Welch PSD, {w} FFT thr.", t, c) for w, (t, c) in welch_workers.items()]
    for name, wall, cpu in rows:
        print(
            f"{name:24s} {wall:6.2f}  {wall * ns:8.2f}  {cpu:6.2f}  {cpu * ns:8.2f}"
            f"  {wall / t_dec:5.2f}x / {cpu / c_dec:.2f}x"
        )
    print(f"first use         {t_first:.2f} s (kernel cache load, or compile if none)")
    if "speedup" in figures:
        print(
            f"PyOctaveBand 2.0.0 on {args.reference_minutes:g} min of pink noise in memory: "
            f"{t_ref:.2f} s (CPU {c_ref:.2f}); piezo {t_ours:.3f} s (CPU {c_ours:.3f}): "
            f"{figures['speedup'][0]:.1f}x wall, {figures['speedup'][1]:.1f}x CPU faster"
        )
        print(
            f"agreement 25 Hz-16 kHz: max |difference| {figures['max_abs_difference_db']:.3f} "
            f"dB (mean {figures['mean_difference_db']:+.3f} dB)"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
