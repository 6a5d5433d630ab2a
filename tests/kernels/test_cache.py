"""The per-user design cache (outside the package, same figures as a fresh design) and
the first compilation (numba's registries loaded without scipy.linalg)."""

from __future__ import annotations

import importlib
import os
import subprocess
import sys
import textwrap
import threading
from pathlib import Path

import numpy as np
import pytest

import piezo
from piezo._kernels import cache
from piezo._kernels import filters as kern
from piezo._kernels.cache import cached_arrays, design_folder, hidden_module
from piezo._kernels.native import Kernel
from piezo.levels import weighting
from tests.paths import REPO


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


# --- the first kernel call: numba's registries without scipy.linalg ---------------------


def test_hidden_module_is_refused_to_this_thread_only():
    name = "piezo_test_never_installed"
    seen = {}

    def other_thread():
        try:
            importlib.import_module(name)
        except ImportError as e:
            seen["other"] = str(e)

    with hidden_module(name):
        with pytest.raises(ModuleNotFoundError, match="hidden"):
            importlib.import_module(name)
        thread = threading.Thread(target=other_thread)
        thread.start()
        thread.join()
    # The other thread went on to the ordinary finders, which do not know the name.
    assert seen["other"] == f"No module named '{name}'"
    # ... and the finder is gone.
    assert not [f for f in sys.meta_path if type(f).__name__ == "_HideFromThread"]
    with pytest.raises(ModuleNotFoundError, match="No module named"):
        importlib.import_module(name)


def test_hidden_module_leaves_a_loaded_module_alone():
    with hidden_module("json"):
        import json  # noqa: F401  (in sys.modules already: no finder is asked)

        assert importlib.import_module("json") is sys.modules["json"]


def test_first_call_is_repeated_without_the_guard_on_import_error(monkeypatch):
    # A numba release that no longer tolerates the hidden module raises ImportError from
    # the first call: the call is made again, unguarded, and its result returned.
    monkeypatch.setattr(cache, "_registries_loaded", False)
    calls = []

    def needs_the_module(x):
        calls.append(x)
        if len(calls) == 1:
            raise ImportError("scipy 0.16+ is required for linear algebra")
        return 2 * x

    assert cache.first_call(needs_the_module, 21) == 42
    assert calls == [21, 21]
    assert cache._registries_loaded  # later calls go straight through
    assert cache.first_call(needs_the_module, 1) == 2 and calls == [21, 21, 1]


def test_a_genuine_import_error_still_raises(monkeypatch):
    monkeypatch.setattr(cache, "_registries_loaded", False)

    def broken():
        raise ImportError("really missing")

    with pytest.raises(ImportError, match="really missing"):
        cache.first_call(broken)


_FIRST_CALL_CHILD = textwrap.dedent(
    """
    import sys
    import numpy as np
    from piezo._kernels import cache, filters as k
    from piezo.levels.weighting import weighting_chain_sos

    if sys.argv[1] == "lean":  # as piezo's command line does
        cache.lean_loading()

    rng = np.random.default_rng(1)
    x = rng.standard_normal((4000, 2))
    c_sos, a_sos = weighting_chain_sos(48000)
    sos = np.vstack([c_sos, a_sos])
    y = x.copy()
    k.sosfilt_inplace(sos, y, np.zeros((len(sos), 2, 2)))
    bank = k.SOSBank([np.array([[0.5, 0.0, 0.5, 1.0, 0.0, 0.0]] * 4)], 1, output_index=0)
    bank.process(np.ones((3, 1)), np.array([0]))
    from piezo.levels.meter import LevelMeter
    meter = LevelMeter(48000.0, 2)
    meter.update(x)
    meter.result()
    print(*("scipy.linalg" in sys.modules, "cffi" in sys.modules, "yaml" in sys.modules))
    from scipy import signal  # imports scipy.linalg: it must work as usual now
    import scipy.linalg.cython_blas  # noqa: F401
    ref = signal.sosfilt(sos, x, axis=0)
    print(float(np.max(np.abs(y - ref)) / np.max(np.abs(ref))))
    """
)


def _child(code, cwd, *args, env=None):
    """stdout of a fresh ``python -W error -c code args`` in ``cwd`` (it must succeed)."""
    run = subprocess.run(
        [sys.executable, "-W", "error", "-c", code, *args],
        cwd=cwd,
        env={**os.environ, "PYTHONPATH": str(REPO), **(env or {})},
        capture_output=True,
        text=True,
        timeout=180,
    )
    assert run.returncode == 0, run.stderr
    return run.stdout


def _first_call_child(tmp_path, mode):
    # A cache folder of its own, holding the weighting design (made by a first child:
    # designing imports scipy.signal) but no kernel: every kernel is compiled in the child.
    env = {"PIEZO_CACHE_DIR": str(tmp_path / "cache")}
    design = (
        "from piezo.levels.weighting import weighting_chain_sos, weighting_chain_zi\n"
        "weighting_chain_sos(48000), weighting_chain_zi(48000)\n"
    )
    _child(design, tmp_path, env=env)
    assert not (tmp_path / "cache" / "kernels").exists()
    linalg, cffi, yaml, error = _child(_FIRST_CALL_CHILD, tmp_path, mode, env=env).split()
    # The same cascade in transposed direct form II as scipy: rounding only (the C and A
    # weighting sections at 48 kHz, a few ulp per section; 1e-12 of the peak is far
    # below any fault, which would be of order 1).
    assert float(error) < 1e-12
    return linalg, cffi, yaml


def test_kernels_load_lean_and_scipy_works_afterwards(tmp_path):
    # A fresh process, as a command runs: every kernel compiles (an empty cache folder)
    # and runs without importing scipy.linalg (a kernel needing BLAS would fail here),
    # cffi or PyYAML, and gives scipy.signal.sosfilt's result afterwards.
    linalg, cffi, yaml = _first_call_child(tmp_path, "lean")
    assert linalg == "False", "loading the kernels imported scipy.linalg"
    assert cffi == "False", "loading the kernels imported cffi"
    assert yaml == "False", "importing numba imported PyYAML with no config file to read"


def test_as_a_library_piezo_leaves_numba_loading_alone(tmp_path):
    # Without lean_loading (a user's program), numba's BLAS probe runs as numba has it:
    # scipy.linalg is imported by the registries (numba's own behaviour).
    pytest.importorskip("scipy.linalg")
    linalg, _, _ = _first_call_child(tmp_path, "library")
    assert linalg == "True"


def test_a_numba_config_file_in_the_current_folder_is_still_read(tmp_path):
    # numba reads .numba_config.yaml from the current folder with PyYAML when imported;
    # piezo hides PyYAML only when there is no such file (the file's setting must hold).
    pytest.importorskip("yaml")
    (tmp_path / cache.NUMBA_CONFIG_FILE).write_text("boundscheck: 1\n")
    child = (
        "import sys\n"
        "from piezo._kernels.cache import import_numba, lean_loading\n"
        "lean_loading()\n"
        "numba = import_numba()\n"
        "print('yaml' in sys.modules, numba.core.config.BOUNDSCHECK)\n"
    )
    assert _child(child, tmp_path).split() == ["True", "1"]


def test_kernel_keeps_the_python_function():
    assert kern.sosfilt_inplace.py_func.__name__ == "sosfilt_inplace"
    assert kern.sosfilt_inplace.__doc__ == kern.sosfilt_inplace.py_func.__doc__
    assert isinstance(kern.level_meter_block, Kernel)


def test_importing_the_analyses_does_not_import_numba(tmp_path):
    # numba (about 0.15 s of CPU) is imported to compile a kernel that is not cached yet,
    # not by importing a module that may never run one (``piezo info``, ``spectrum`` and
    # ``tone`` do not), nor to load a kernel compiled before.
    child = (
        "import sys\n"
        "import piezo.chain.measurement, piezo.levels.meter, piezo.levels.stats\n"
        "import piezo.spectral.bands, piezo._kernels.filters as k\n"
        "assert 'numba' not in sys.modules, 'imported numba'\n"
        "import numpy as np\n"
        "x = np.ones((2, 1))\n"
        "k.sosfilt_inplace(np.array([[1.0, 0, 0, 1, -0.5, 0]]), x, np.zeros((1, 2, 1)))\n"
        "print('numba' in sys.modules, x[:, 0].tolist())\n"
    )
    # y[n] = x[n] + 0.5 y[n-1] on ones: 1, 1.5.
    env = {"PIEZO_CACHE_DIR": str(tmp_path / "cache")}
    assert _child(child, tmp_path, env=env).split(maxsplit=1) == ["True", "[1.0, 1.5]\n"]
    assert _child(child, tmp_path, env=env).split(maxsplit=1) == ["False", "[1.0, 1.5]\n"]
