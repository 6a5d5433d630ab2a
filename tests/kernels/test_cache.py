"""The per-user design cache: outside the package, same figures as a fresh design."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import piezo
from piezo._kernels.cache import cached_arrays, design_folder
from piezo.levels import weighting


@pytest.fixture
def cache_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("PIEZO_CACHE_DIR", str(tmp_path))
    weighting._design.cache_clear()
    weighting._c_zi.cache_clear()
    yield tmp_path
    weighting._design.cache_clear()
    weighting._c_zi.cache_clear()


def test_design_folder_is_outside_the_package(cache_dir):
    assert design_folder() == cache_dir / "designs"
    package = Path(piezo.__file__).resolve().parent
    assert package not in design_folder().resolve().parents


def test_cached_weighting_equals_a_fresh_design(cache_dir):
    c_sos, a_sos = weighting.weighting_chain_sos(44100)
    assert len(list((cache_dir / "designs").glob("weighting-*.npz"))) == 1
    weighting._design.cache_clear()  # the next call reads the file
    c_again, a_again = weighting.weighting_chain_sos(44100)
    fresh_c, fresh_a = weighting._fit_design(44100.0)
    # Stored as float64 without conversion: bit for bit the design's own coefficients.
    assert np.array_equal(c_again, fresh_c) and np.array_equal(a_again, fresh_a)
    assert np.array_equal(c_sos, c_again) and np.array_equal(a_sos, a_again)


def test_a_damaged_or_foreign_cache_file_is_recomputed(cache_dir):
    calls = []

    def compute():
        calls.append(1)
        return {"x": np.arange(3.0)}

    cached_arrays("probe", "k1", compute)
    (path,) = (cache_dir / "designs").glob("probe-*.npz")
    path.write_bytes(b"not an npz file")
    assert np.array_equal(cached_arrays("probe", "k1", compute)["x"], np.arange(3.0))
    assert len(calls) == 2
    assert np.array_equal(cached_arrays("probe", "k1", compute)["x"], np.arange(3.0))
    assert len(calls) == 2  # the rewritten file is used


def test_an_unwritable_cache_folder_only_costs_time(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("a plain file where the cache folder would go")
    monkeypatch.setenv("PIEZO_CACHE_DIR", str(blocker))
    assert np.array_equal(cached_arrays("probe", "k", lambda: {"x": np.ones(2)})["x"], np.ones(2))
