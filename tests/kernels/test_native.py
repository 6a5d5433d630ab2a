"""Native kernels: compiled once, kept in the cache folder, loaded without numba; the
arguments checked in Python before any pointer reaches machine code."""

from __future__ import annotations

import copy
import os
import pickle
import subprocess
import sys
import threading

import numpy as np
import pytest

from piezo._kernels import filters as kern
from piezo._kernels import native
from piezo._kernels.native import Array, Kernel, Scalar
from tests.paths import REPO


def _count_above(x, limit):
    n = 0
    for i in range(x.shape[0]):
        if x[i] > limit:
            n += 1
    return n


def _split(x, out):
    """Positive values to the front of ``out``; (how many, how many not)."""
    n = 0
    for i in range(x.shape[0]):
        if x[i] > 0.0:
            out[n] = x[i]
            n += 1
    return n, x.shape[0] - n


def _scale(x, k):
    for i in range(x.shape[0]):
        for j in range(x.shape[1]):
            x[i, j] *= k


@pytest.fixture
def cache_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("PIEZO_CACHE_DIR", str(tmp_path))
    return tmp_path / "kernels"


def test_results_match_python_and_returns_are_typed(cache_dir, rng):
    x = rng.standard_normal(1001)
    count = Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1)
    assert count.origin is None
    assert count(x, 0.5) == int(np.sum(x > 0.5)) and isinstance(count(x, 0.5), int)
    splitter = Kernel(_split, (Array("f8", 1), Array("f8", 1, written=True)), returns=2)
    out = np.zeros(x.size)
    n, rest = splitter(x, out)
    assert (n, rest) == (int(np.sum(x > 0)), int(np.sum(x <= 0)))
    assert np.array_equal(out[:n], x[x > 0])
    scale = Kernel(_scale, (Array("f8", 2, written=True), Scalar("f8")))
    y = np.arange(6.0).reshape(2, 3)
    assert scale(y, 2) is None  # an int scalar is passed as a double
    assert y.tolist() == [[0.0, 2.0, 4.0], [6.0, 8.0, 10.0]]
    assert splitter.origin == scale.origin == "compiled"


def test_a_kernel_compiled_once_is_loaded_from_its_file(cache_dir):
    def make():
        return Kernel(_scale, (Array("f8", 2, written=True), Scalar("f8")))

    first = make()
    first(np.ones((1, 1)), 1.0)
    assert first.origin == "compiled"
    path = first.cache_path()
    assert path.parent == cache_dir and path.is_file()
    again = make()
    y = np.ones((2, 2))
    again(y, 3.0)
    assert again.origin == "cache" and y.tolist() == [[3.0, 3.0], [3.0, 3.0]]


@pytest.mark.parametrize("damage", ["flip", "truncate", "foreign", "empty"])
def test_a_damaged_or_foreign_kernel_file_is_compiled_again(cache_dir, damage):
    def make():
        return Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1)

    make()(np.ones(2), 1.0)
    path = make().cache_path()
    data = bytearray(path.read_bytes())
    if damage == "flip":  # one bit of the machine code: the checksum no longer fits
        data[-100] ^= 0x01
    elif damage == "truncate":
        data = data[: len(data) // 2]
    elif damage == "foreign":  # a file of another key under this name
        data = data.replace(make().cache_key().encode(), b"0" * 64)
    else:
        data = bytearray()
    path.write_bytes(bytes(data))
    kernel = make()
    assert kernel(np.array([1.0, 2.0, 0.2]), 0.5) == 2
    assert kernel.origin == "compiled"
    assert native._unpack(path.read_bytes(), kernel.cache_key()) is not None  # rewritten


def test_the_key_changes_with_the_code_and_the_options(cache_dir):
    a = Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1)
    b = Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1, fastmath=True)
    c = Kernel(_count_above, (Array("f8", 1), Scalar("i8")), returns=1)
    d = Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1, slp=True)
    assert len({k.cache_key() for k in (a, b, c, d)}) == 4


@pytest.mark.parametrize(
    "x, error",
    [
        (np.ones((4, 2))[:, :1], TypeError),  # a strided view: not C-contiguous
        (np.ones((4, 1), dtype=np.float32), TypeError),
        (np.ones(4), TypeError),  # one axis where two are needed
        ([[1.0], [2.0]], TypeError),  # not an array
    ],
)
def test_arrays_of_the_wrong_kind_never_reach_the_machine_code(x, error):
    with pytest.raises(error, match="C-contiguous float64 array of 2 axes"):
        kern.sosfilt_inplace(np.array([[1.0, 0, 0, 1, -0.5, 0]]), x, np.zeros((1, 2, 1)))


def test_read_only_outputs_and_misfitting_shapes_are_refused():
    sos = np.array([[1.0, 0, 0, 1, -0.5, 0]])
    x = np.ones((4, 1))
    x.flags.writeable = False
    with pytest.raises(ValueError, match="must be writeable"):
        kern.sosfilt_inplace(sos, x, np.zeros((1, 2, 1)))
    with pytest.raises(ValueError, match="zi must have shape"):
        kern.sosfilt_inplace(sos, np.ones((4, 2)), np.zeros((1, 2, 1)))
    with pytest.raises(ValueError, match="a0"):
        kern.sosfilt_inplace(
            np.array([[1.0, 0, 0, 2, -0.5, 0]]), np.ones((4, 1)), np.zeros((1, 2, 1))
        )
    with pytest.raises(TypeError, match="takes 3 arguments"):
        kern.sosfilt_inplace(sos, np.ones((4, 1)))


def test_a_kernel_is_one_object_per_process_when_copied_or_pickled():
    k = kern.sosfilt_inplace
    assert copy.copy(k) is k and copy.deepcopy({"k": k})["k"] is k
    assert pickle.loads(pickle.dumps(k)) is k


def test_calls_run_in_parallel_threads_with_the_same_results(rng):
    # ctypes releases the interpreter lock for the call: two threads filtering their own
    # arrays must each get the single-threaded result.
    sos = np.array([[0.2, 0.4, 0.2, 1.0, -0.5, 0.1]] * 3)
    xs = [rng.standard_normal((50000, 2)) for _ in range(4)]
    expected = []
    for x in xs:
        y = x.copy()
        kern.sosfilt_inplace(sos, y, np.zeros((3, 2, 2)))
        expected.append(y)
    got = [x.copy() for x in xs]

    def run(i):
        kern.sosfilt_inplace(sos, got[i], np.zeros((3, 2, 2)))

    threads = [threading.Thread(target=run, args=(i,)) for i in range(len(xs))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for a, b in zip(got, expected, strict=True):
        assert np.array_equal(a, b)


def test_the_object_code_references_nothing_of_numba(cache_dir):
    # numba's runtime (numba_*, NRT_*) lives in numba's helper library, which a process
    # loading a cached kernel does not load: the object must define or not use them.
    kernel = Kernel(_split, (Array("f8", 1), Array("f8", 1, written=True)), returns=2)
    _, ir = kernel.native_ir()
    llvm = native._llvm()
    module = llvm.parse_assembly(ir)
    declared = {f.name for f in module.functions if f.is_declaration}
    assert declared and not {n for n in declared if n.startswith(("numba_", "NRT_"))}, declared
    ir = native.stub_runtime(
        "declare void @numba_gil_ensure(ptr) local_unnamed_addr\n"
        "declare ptr @numba_unpickle(ptr, i32, ptr) local_unnamed_addr\n"
        "declare void @PyErr_Clear() local_unnamed_addr\n"
    )
    assert "declare void @numba_gil_ensure" not in ir and "declare void @PyErr_Clear" in ir
    llvm.parse_assembly(ir).verify()  # stubs are well-formed IR


def test_the_key_is_the_same_in_every_process():
    # The bank's fastmath flags are a set, whose order follows string hashing, which
    # differs between processes: the key must not (else every process would compile).
    code = "from piezo._kernels.filters import _bank_kernel; print(_bank_kernel(4).cache_key())"
    keys = {
        subprocess.run(
            [sys.executable, "-c", code],
            env={**os.environ, "PYTHONHASHSEED": str(seed), "PYTHONPATH": str(REPO)},
            capture_output=True,
            text=True,
            check=True,
        ).stdout
        for seed in range(1, 9)  # two orders: all eight alike by chance 1 in 128
    }
    assert len(keys) == 1, keys


def test_numba_runs_the_kernel_when_llvmlite_cannot_load_it(cache_dir, monkeypatch):
    def refuse(symbol, obj):
        raise RuntimeError("no MCJIT here")

    monkeypatch.setattr(native, "_load_object", refuse)
    kernel = Kernel(_count_above, (Array("f8", 1), Scalar("f8")), returns=1)
    assert kernel(np.array([1.0, 2.0, 0.2]), 0.5) == 2
    assert kernel.origin == "numba"


def test_a_kernel_that_raises_after_all_reports_and_aborts(tmp_path):
    # The documented dead path, taken on purpose: a kernel that raises reaches numba's
    # exception machinery, whose runtime calls are stubs. The process must stop with the
    # report on stderr rather than run on with a half-done result.
    code = (
        "import numpy as np\n"
        "from piezo._kernels.native import Array, Kernel\n"
        "def broken(x):\n"
        "    if x.shape[0] > 1:\n"
        "        raise ValueError('no')\n"
        "    return 0\n"
        "k = Kernel(broken, (Array('f8', 1),), returns=1)\n"
        "print(k(np.ones(1)), flush=True)\n"
        "k(np.ones(2))\n"
        "print('ran on')\n"
    )
    run = subprocess.run(
        [sys.executable, "-c", code],
        env={**os.environ, "PIEZO_CACHE_DIR": str(tmp_path), "PYTHONPATH": str(REPO)},
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert run.stdout.split() == ["0"], (run.stdout, run.stderr)
    assert run.returncode != 0
    assert "compiled kernel reached numba's error path" in run.stderr
