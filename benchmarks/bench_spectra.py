"""Benchmark: one-third-octave bands and Welch PSD against the decode floor and PyOctaveBand.

Generates a pink-noise recording (48 kHz, 16-bit, mono; one hour by default), then times
in one run:

* the decode floor: reading the whole file into float64 blocks with soundfile;
* piezo's 1/3-octave bands 20 Hz - 20 kHz (:class:`piezo.bands.BandAnalyzer`), reading
  the same blocks (decode included);
* piezo's Welch PSD (:class:`piezo.spectrum.WelchPSD`, 4096-sample Hann, 50 %);
* PyOctaveBand 2.0.0 (``pyoctaveband.octavefilter``, order 6, test/bench-only
  reference) on a shorter excerpt, since it holds the whole signal in memory and is
  slow; compared per minute of audio with piezo on the same excerpt, and for agreement
  (bands 25 Hz - 16 kHz within 0.2 dB).

Ratios are printed; nothing is asserted. The machine has two cores shared with other
work, so figures vary between runs by some ten per cent.

Usage::

    python benchmarks/bench_spectra.py [--minutes 60] [--reference-minutes 2]
        [--format wav|flac] [--dir DIR]
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

from piezo._iir import HAVE_NUMBA
from piezo.bands import BandAnalyzer
from piezo.spectrum import WelchPSD

FS = 48000
BLOCK = 65536


def write_pink(path: Path, minutes: float, seed: int = 1) -> None:
    """Pink noise (1/f power, FFT-shaped per 10 s chunk), -20 dBFS RMS, 16-bit."""
    rng = np.random.default_rng(seed)
    chunk = 10 * FS
    total = int(minutes * 60 * FS)
    f = np.fft.rfftfreq(chunk, 1 / FS)
    shape = np.zeros_like(f)
    shape[1:] = 1 / np.sqrt(f[1:])
    fmt = "FLAC" if path.suffix == ".flac" else "WAV"
    with sf.SoundFile(str(path), "w", FS, 1, subtype="PCM_16", format=fmt) as out:
        done = 0
        while done < total:
            n = min(chunk, total - done)
            x = np.fft.irfft(np.fft.rfft(rng.standard_normal(chunk)) * shape, chunk)[:n]
            out.write(0.1 * x / np.std(x))
            done += n


def blocks(path: Path, frames: int | None = None):
    with sf.SoundFile(str(path)) as f:
        left = f.frames if frames is None else frames
        while left > 0:
            b = f.read(min(BLOCK, left), dtype="float64", always_2d=True)
            if b.shape[0] == 0:
                break
            left -= b.shape[0]
            yield b


_CPU: dict[str, float] = {}


def timed(fn, name: str = "") -> tuple[float, object]:
    """Wall time of ``fn()`` (CPU time of the process kept in ``_CPU[name]``)."""
    c0, t0 = time.process_time(), time.perf_counter()
    out = fn()
    _CPU[name] = time.process_time() - c0
    return time.perf_counter() - t0, out


def run_decode(path: Path) -> None:
    for _ in blocks(path):
        pass


def run_bands(path: Path, frames: int | None = None):
    an = BandAnalyzer(FS, 1, fraction=3, low_hz=20, high_hz=20000)
    for b in blocks(path, frames):
        an.update(b)
    return an.result()


def run_welch(path: Path):
    est = WelchPSD(FS, 1, segment_frames=4096)
    for b in blocks(path):
        est.update(b)
    return est.result()


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=60.0, help="length of the test file")
    ap.add_argument(
        "--reference-minutes", type=float, default=2.0, help="excerpt for PyOctaveBand"
    )
    ap.add_argument("--format", choices=["wav", "flac"], default="wav")
    ap.add_argument("--dir", type=Path, default=None, help="where to write the test file")
    ap.add_argument("--json", action="store_true", help="print the figures as JSON")
    args = ap.parse_args(argv)

    tmp = tempfile.TemporaryDirectory(dir=args.dir)
    path = Path(tmp.name) / f"pink.{args.format}"
    t_gen, _ = timed(lambda: write_pink(path, args.minutes))
    print(f"generated {args.minutes:g} min of pink noise ({args.format}) in {t_gen:.1f} s",
          file=sys.stderr)  # fmt: skip

    run_bands(path, 4096)  # compile (numba engine) or load the compiled code first
    t_dec, _ = timed(lambda: run_decode(path), "decode")
    t_bands, _ = timed(lambda: run_bands(path), "bands")
    t_welch, _ = timed(lambda: run_welch(path), "welch")
    figures = {
        "minutes": args.minutes,
        "format": args.format,
        "decode_s": t_dec,
        "bands_s": t_bands,
        "welch_s": t_welch,
        "bands_over_decode": t_bands / t_dec,
        "welch_over_decode": t_welch / t_dec,
        "cpu_decode_s": _CPU["decode"],
        "cpu_bands_s": _CPU["bands"],
        "cpu_welch_s": _CPU["welch"],
        "cpu_bands_over_decode": _CPU["bands"] / _CPU["decode"],
        "cpu_welch_over_decode": _CPU["welch"] / _CPU["decode"],
        "engine": "numba" if HAVE_NUMBA else "scipy",
    }

    try:
        import pyoctaveband
    except ImportError:
        pyoctaveband = None
    if pyoctaveband is not None:
        ref_frames = int(min(args.reference_minutes, args.minutes) * 60 * FS)
        x = np.concatenate(list(blocks(path, ref_frames)))[:, 0]
        t_ours_ex, ours = timed(lambda: run_bands(path, ref_frames), "ours_excerpt")
        t_dec_ex, _ = timed(lambda: [None for _ in blocks(path, ref_frames)], "decode_excerpt")
        t_ref, (ref_db, ref_f) = timed(
            lambda: pyoctaveband.octavefilter(
                x, FS, fraction=3, order=6, limits=[20, 20000], dbfs=True
            ),
            "reference",
        )
        ours_db = ours.level_db(1.0)[:, 0]
        diffs = []
        for band, level in zip(ours.bands, ours_db, strict=True):
            if 25 <= band.nominal_hz <= 16000:
                k = int(np.argmin(np.abs(np.asarray(ref_f) - band.exact_hz)))
                diffs.append(float(level - ref_db[k]))
        ex_min = ref_frames / FS / 60
        figures.update(
            reference_minutes=ex_min,
            reference_s=t_ref,
            reference_s_per_min=t_ref / ex_min,
            ours_excerpt_s_per_min=t_ours_ex / ex_min,
            ours_full_s_per_min=t_bands / args.minutes,
            reference_over_decode=t_ref / t_dec_ex,
            speedup_same_excerpt=t_ref / t_ours_ex,
            speedup_per_minute_full_run=(t_ref / ex_min) / (t_bands / args.minutes),
            cpu_speedup_same_excerpt=_CPU["reference"] / _CPU["ours_excerpt"],
            cpu_speedup_per_minute_full_run=(_CPU["reference"] / ex_min)
            / (_CPU["bands"] / args.minutes),
            max_abs_difference_db=max(abs(d) for d in diffs),
            mean_difference_db=float(np.mean(diffs)),
        )
    tmp.cleanup()

    if args.json:
        print(json.dumps(figures, indent=2))
        return 0
    print(
        f"file: {args.minutes:g} min, 48 kHz, 16-bit {args.format.upper()}; "
        f"band engine: {figures['engine']}"
    )
    print(f"decode floor            {t_dec:8.2f} s")
    print(
        f"1/3-octave 20 Hz-20 kHz {t_bands:8.2f} s   {figures['bands_over_decode']:5.1f} x decode"
    )
    print(
        f"Welch PSD (4096 Hann)   {t_welch:8.2f} s   {figures['welch_over_decode']:5.1f} x decode"
    )
    if pyoctaveband is not None:
        print(
            f"PyOctaveBand 2.0.0 on {figures['reference_minutes']:g} min: "
            f"{figures['reference_s_per_min']:.2f} s/min "
            f"({figures['reference_over_decode']:.0f} x decode); piezo on the same excerpt "
            f"{figures['ours_excerpt_s_per_min']:.3f} s/min, full run "
            f"{figures['ours_full_s_per_min']:.3f} s/min"
        )
        print(
            f"speed-up: {figures['speedup_same_excerpt']:.1f} x (same excerpt), "
            f"{figures['speedup_per_minute_full_run']:.1f} x (per minute, full run); "
            f"CPU time: {figures['cpu_speedup_same_excerpt']:.1f} x, "
            f"{figures['cpu_speedup_per_minute_full_run']:.1f} x"
        )
        print(
            f"agreement 25 Hz-16 kHz: max |difference| {figures['max_abs_difference_db']:.3f} dB "
            f"(mean {figures['mean_difference_db']:+.3f} dB)"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
