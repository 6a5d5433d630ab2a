"""The bundled demo recordings are what the seeded generator makes."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from piezo.demo.scenes import demo_files
from piezo.io.reader import open_recording
from tests.paths import RECORDINGS

FILES = {item.name: item for item in demo_files()}


@pytest.mark.parametrize("name", sorted(FILES))
def test_committed_recording_matches_generator(name):
    item = FILES[name]
    path = RECORDINGS / name
    assert path.exists(), f"run: piezo demo --out recordings ({name} missing)"
    rec = open_recording(path)
    got = np.concatenate(list(rec.blocks()))
    if item.subtype is None:  # CSV: time column dropped by the reader, %.6g formatting
        np.testing.assert_allclose(got, item.samples[:, 1:], rtol=1e-5, atol=1e-6)
    else:
        bits = {"PCM_16": 16, "PCM_24": 24}[item.subtype]
        # Quantisation: within one step of 2^-(bits-1) full scale.
        np.testing.assert_allclose(got, item.samples, atol=2.0 ** -(bits - 1))
        assert sf.info(str(path)).subtype == item.subtype
    if item.sidecar is not None:
        assert path.with_suffix(".toml").read_text(encoding="utf-8") == item.sidecar


def test_generator_is_deterministic():
    again = {item.name: item for item in demo_files()}
    for name, item in FILES.items():
        np.testing.assert_array_equal(item.samples, again[name].samples)


def test_recordings_stay_small():
    total = sum(p.stat().st_size for p in RECORDINGS.rglob("*") if p.is_file())
    assert total < 5e6, f"recordings/ holds {total / 1e6:.1f} MB; the budget is 5 MB"


def test_committed_texts_match_generator():
    from piezo.demo.scenes import demo_texts

    for name, text in demo_texts().items():
        assert (RECORDINGS / name).read_text(encoding="utf-8") == text, name
