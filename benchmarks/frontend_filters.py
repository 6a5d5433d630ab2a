"""Speed of `simulate` and `equalize` relative to decoding the same file.

Writes a 60 s, 2-channel, 48 kHz float WAV of noise into a temporary folder, then times
(1) decoding it block by block with soundfile, (2) decoding plus FrontendFilter with the
demo disc design (a resonance inside the band: the longest realisation), (3) decoding
plus Equalizer. Prints ratios to the decode time measured in the same run. The machine
may be shared: figures are noisy, run it twice.

    python benchmarks/frontend_filters.py
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

from piezo.frontend.filters import Equalizer, FrontendFilter, realise_frontend
from piezo.frontend.model import load_frontend

REPO = Path(__file__).resolve().parent.parent
FS = 48000
SECONDS = 60
BLOCK = 65536


def decode(path: Path, process=None) -> float:
    start = time.perf_counter()
    with sf.SoundFile(str(path)) as f:
        for block in f.blocks(BLOCK, dtype="float64", always_2d=True):
            if process is not None:
                process(block)
    return time.perf_counter() - start


def main() -> None:
    design = load_frontend(REPO / "recordings" / "designs" / "pump-disc-charge.toml")
    rng = np.random.default_rng(1)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "noise.wav"
        sf.write(str(path), 0.1 * rng.standard_normal((FS * SECONDS, 2)), FS, subtype="FLOAT")
        decode(path)  # warm the page cache
        base = decode(path)
        start = time.perf_counter()
        realise_frontend(design, float(FS))
        design_s = time.perf_counter() - start
        sim = FrontendFilter(FS, 2, frontend=design)
        sim_s = decode(path, sim.update)
        eq = Equalizer(FS, 2, frontend=design, target_corner_hz=0.005)
        eq_s = decode(path, eq.update)
    sections = realise_frontend(design, float(FS)).sos.shape[0]
    print(f"{SECONDS} s of 2-channel 48 kHz float WAV; decode alone {base:.3f} s")
    print(f"simulate (decode + {sections} sections): {sim_s / base:.2f} × decode time")
    print(f"equalize (decode + 1 section):          {eq_s / base:.2f} × decode time")
    print(f"designing the realisation once: {design_s:.3f} s")


if __name__ == "__main__":
    main()
