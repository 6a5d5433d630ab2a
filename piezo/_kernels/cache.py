"""Where piezo keeps what it computes once: a per-user folder, never inside the package.

Compiled kernels (:mod:`piezo._kernels.native`) and filter designs are kept between
processes. numba's own default would write its cache files into ``__pycache__`` beside
the source; for an installed package that is ``site-packages/piezo/...``, where the files
survive an uninstall and the left-over folder then shadows a later (editable) install as
a namespace package. So piezo chooses the folder itself:

1. ``PIEZO_CACHE_DIR`` when set (kernels in ``<dir>/kernels``, designs in
   ``<dir>/designs``);
2. else the per-user cache folder of the platform (``<dir>/piezo/kernels``,
   ``<dir>/piezo/designs``): ``$XDG_CACHE_HOME`` or ``~/.cache`` on Linux and other Unix
   systems, ``~/Library/Caches`` on macOS, ``%LOCALAPPDATA%`` on Windows (the conventions
   of the XDG Base Directory Specification, Apple's File System Programming Guide and
   Microsoft's Known Folders).

numba itself caches nothing. When the chosen folder cannot be created or written,
kernels are compiled in every process that uses them (about 1-3 s) and nothing is
written anywhere.

Compiling a kernel needs numba, and numba's first compilation in a process imports all
its implementation registries, some of which import libraries for features no piezo
kernel uses: ``numba.np.arraymath`` probes for BLAS by importing
``scipy.linalg.cython_blas``, i.e. all of ``scipy.linalg`` (about 0.2 s of CPU), and
numba's cffi support builds a C parser (``cffi``, ``pycparser``: about 0.02 s); importing
numba reads PyYAML (about 0.01 s) for a ``.numba_config.yaml`` file that is rarely there.
In piezo's own processes (the command line and the batch runner's workers, which run no
code of the user's) numba is loaded lean (:func:`lean_loading`): the process's first
compilation runs with ``scipy.linalg`` and ``cffi`` hidden from the calling thread (see
:func:`hidden_module`), and :func:`import_numba` imports numba with ``yaml`` hidden unless
the current folder has that file; numba records the features as unavailable and moves
on, and the modules import normally afterwards and in every other thread. The lasting
effects, in that process only: numba-compiled ``np.convolve`` and ``np.correlate`` use
numba's own loop instead of BLAS (same result to rounding), and numba cannot compile
calls of cffi functions. Used as a library, piezo leaves numba's loading alone. Nothing
of numba is patched: when a numba release stops tolerating a missing module, the call
is simply repeated without the guard (tested).

Filter designs that need an optimiser or scipy's filter design (the IEC 61672-1 weighting
fit, for instance) are kept the same way, per sample rate, by :func:`cached_arrays` in
``<dir>/designs``: a later process at the same rate reads a few hundred bytes instead of
importing and running the design code.
"""

from __future__ import annotations

import contextlib
import gc
import io
import os
import sys
import threading
from collections.abc import Callable, Iterator
from functools import cache
from pathlib import Path
from types import ModuleType
from typing import Any

from piezo.errors import OutputError
from piezo.io.atomic import write_bytes_atomic

__all__ = [
    "cache_folder",
    "cached_arrays",
    "code_digest",
    "design_folder",
    "first_call",
    "hidden_module",
    "import_numba",
    "lean_loading",
]


def _platform_cache_home() -> Path:
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA")
        return Path(base) if base else Path.home() / "AppData" / "Local"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Caches"
    xdg = os.environ.get("XDG_CACHE_HOME")
    return Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".cache"


def cache_folder() -> Path:
    """The folder for compiled kernels (it may not exist yet).

    Examples
    --------
    >>> import piezo
    >>> from pathlib import Path
    >>> Path(piezo.__file__).parent in cache_folder().parents
    False
    """
    return _piezo_cache("kernels")


def _piezo_cache(name: str) -> Path:
    """``$PIEZO_CACHE_DIR/<name>`` when set, else ``<platform cache>/piezo/<name>``."""
    piezo_dir = os.environ.get("PIEZO_CACHE_DIR")
    if piezo_dir:
        return Path(piezo_dir) / name
    return _platform_cache_home() / "piezo" / name


class _HideFromThread:
    """A ``sys.meta_path`` finder refusing some module names to one thread."""

    def __init__(self, names: tuple[str, ...]) -> None:
        self.names = names
        self.thread = threading.get_ident()

    def find_spec(self, fullname: str, path: Any = None, target: Any = None) -> None:
        if fullname in self.names and threading.get_ident() == self.thread:
            raise ModuleNotFoundError(f"{fullname} hidden while piezo loads its kernels")


@contextlib.contextmanager
def hidden_module(*names: str) -> Iterator[None]:
    """Within the block, ``import name`` (and of its submodules) fails in this thread
    for each of ``names`` not loaded yet; other threads import them as usual.

    A finder in front of ``sys.meta_path`` (the import system's documented hook,
    PEP 451) refuses the names; a module already in ``sys.modules`` is not affected.

    Examples
    --------
    >>> import sys
    >>> with hidden_module("piezo_no_such_module_loaded", "piezo_nor_this_one"):
    ...     try:
    ...         import piezo_nor_this_one
    ...     except ImportError as e:
    ...         print("refused")
    refused
    >>> with hidden_module("json"):  # loaded already: not affected
    ...     import json
    """
    finder = _HideFromThread(names)
    sys.meta_path.insert(0, finder)
    try:
        yield
    finally:
        sys.meta_path.remove(finder)


#: numba's configuration file, read from the current folder when numba is imported.
NUMBA_CONFIG_FILE = ".numba_config.yaml"

#: Set by :func:`lean_loading` in piezo's own processes.
_lean = False


def lean_loading() -> None:
    """Load numba without the optional libraries no piezo kernel uses (see the module's
    text), for the rest of this process. For piezo's own processes only: the command
    line and the batch runner's workers, where no code of the user's runs.

    Examples
    --------
    >>> from piezo._kernels import cache
    >>> before = cache._lean
    >>> lean_loading()
    >>> cache._lean
    True
    >>> cache._lean = before  # this process is a library user: put it back
    """
    global _lean
    _lean = True


def import_numba() -> ModuleType:
    """The ``numba`` module, imported once per process; after :func:`lean_loading`,
    with PyYAML hidden unless the current folder has a :data:`NUMBA_CONFIG_FILE` for
    numba to read.

    Examples
    --------
    >>> import_numba().njit is not None
    True
    """
    loaded = sys.modules.get("numba")
    if loaded is not None:
        return loaded
    if not _lean or os.path.isfile(NUMBA_CONFIG_FILE):
        import numba
    else:
        with hidden_module("yaml"):
            import numba
    return numba


#: Set once the process's first compilation has returned (numba's registries loaded).
_registries_loaded = False


def first_call(func: Callable[..., Any], *args: Any) -> Any:
    """``func(*args)``; as the process's first compilation when none has run yet.

    :class:`piezo._kernels.native.Kernel` compiles through it. After :func:`lean_loading`,
    the first call runs with ``scipy.linalg`` and ``cffi`` hidden from this thread; if that raises
    ImportError (a numba that needs a module after all), it is repeated without the
    guard.

    Examples
    --------
    >>> first_call(max, 2.0, 3.0)
    3.0
    """
    global _registries_loaded
    if _registries_loaded:
        return func(*args)
    # numba creates some hundred thousand long-lived objects while it loads; the garbage
    # collector would walk them several times over (about 0.04 s), so it waits.
    collecting = gc.isenabled()
    gc.disable()
    try:
        with hidden_module(*(("scipy.linalg", "cffi") if _lean else ())):
            result = func(*args)
    except ImportError:
        result = func(*args)
    finally:
        if collecting:
            gc.enable()
    _registries_loaded = True
    return result


def design_folder() -> Path:
    """The folder for cached filter designs (it may not exist yet).

    Examples
    --------
    >>> import piezo
    >>> from pathlib import Path
    >>> Path(piezo.__file__).parent in design_folder().parents
    False
    """
    return _piezo_cache("designs")


@cache
def code_digest(*sources: str) -> str:
    """SHA-256 of the given source files' bytes: the part of a design-cache key that
    changes whenever the code computing the design does.

    Examples
    --------
    >>> import piezo.sos
    >>> len(code_digest(piezo.sos.__file__)), code_digest(piezo.sos.__file__) == code_digest(
    ...     piezo.sos.__file__)
    (64, True)
    """
    import hashlib  # here, not at the top: the command line's --help imports this module

    digest = hashlib.sha256()
    for source in sources:
        digest.update(Path(source).read_bytes())
    return digest.hexdigest()


def cached_arrays(name: str, key: str, compute: Callable[[], dict[str, Any]]) -> dict[str, Any]:
    """``compute()`` (a dict of float arrays), kept in :func:`design_folder` under ``key``.

    ``key`` must change whenever the result would (the caller includes its inputs and a
    digest of the code that computes it). A missing, unreadable or foreign file is
    recomputed; when the folder cannot be written the result is simply not kept. Files are
    read without pickle and replaced atomically, so concurrent processes see a whole file
    or none.

    Examples
    --------
    >>> import numpy as np, os, tempfile
    >>> calls = []
    >>> def design():
    ...     calls.append(1)
    ...     return {"sos": np.array([[1.0, 0.0, 0.0, 1.0, -0.5, 0.0]])}
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     os.environ["PIEZO_CACHE_DIR"] = tmp
    ...     first = cached_arrays("example", "fs=48000", design)
    ...     again = cached_arrays("example", "fs=48000", design)
    ...     del os.environ["PIEZO_CACHE_DIR"]
    >>> len(calls), bool(np.array_equal(first["sos"], again["sos"]))
    (1, True)
    """
    import hashlib

    import numpy as np

    digest = hashlib.sha256(key.encode()).hexdigest()[:24]
    path = design_folder() / f"{name}-{digest}.npz"
    with contextlib.suppress(OSError, ValueError, KeyError):
        with np.load(path, allow_pickle=False) as stored:
            if str(stored["_key"]) == key:
                return {k: stored[k] for k in stored.files if k != "_key"}
    arrays = compute()
    buffer = io.BytesIO()
    np.savez(buffer, _key=np.array(key), **arrays)
    with contextlib.suppress(OutputError):  # a cache that cannot be written is not kept
        write_bytes_atomic(path, buffer.getvalue())
    return arrays
