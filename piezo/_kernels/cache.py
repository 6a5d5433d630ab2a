"""Where numba keeps the compiled kernels: a per-user folder, never inside the package.

numba's own default writes its cache files into ``__pycache__`` beside the source. For an
installed package that is ``site-packages/piezo/...``: the files survive an uninstall and
the left-over folder then shadows a later (editable) install as a namespace package. So
piezo chooses the folder itself, in this order:

1. ``NUMBA_CACHE_DIR`` when set (numba's own override, honoured as numba documents it);
2. ``PIEZO_CACHE_DIR`` when set (``<dir>/numba``);
3. the per-user cache folder of the platform (``<dir>/piezo/numba``): ``$XDG_CACHE_HOME``
   or ``~/.cache`` on Linux and other Unix systems, ``~/Library/Caches`` on macOS,
   ``%LOCALAPPDATA%`` on Windows (the conventions of the XDG Base Directory
   Specification, Apple's File System Programming Guide and Microsoft's Known Folders).

When the chosen folder cannot be created or written, kernels are compiled in every
process (about 1-3 s) and nothing is written anywhere.
"""

from __future__ import annotations

import contextlib
import os
import sys
import tempfile
from collections.abc import Callable, Iterator
from functools import cache
from pathlib import Path
from typing import Any

__all__ = ["cache_folder", "compile_cached"]


def _platform_cache_home() -> Path:
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA")
        return Path(base) if base else Path.home() / "AppData" / "Local"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Caches"
    xdg = os.environ.get("XDG_CACHE_HOME")
    return Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".cache"


def cache_folder() -> Path:
    """The folder for numba's cache files (it may not exist yet).

    Examples
    --------
    >>> import piezo
    >>> from pathlib import Path
    >>> Path(piezo.__file__).parent in cache_folder().parents
    False
    """
    numba_dir = os.environ.get("NUMBA_CACHE_DIR")
    if numba_dir:
        return Path(numba_dir)
    piezo_dir = os.environ.get("PIEZO_CACHE_DIR")
    if piezo_dir:
        return Path(piezo_dir) / "numba"
    return _platform_cache_home() / "piezo" / "numba"


@cache
def _writable_folder() -> str | None:
    folder = cache_folder()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=folder):
            pass
    except OSError:
        return None
    return str(folder)


@contextlib.contextmanager
def _numba_cache_dir(folder: str) -> Iterator[None]:
    # numba picks the cache location when a function is decorated, from its config;
    # the setting is changed for piezo's decorations only and put back afterwards.
    import numba

    config: Any = numba.core.config  # settings are plain module attributes
    previous = config.CACHE_DIR
    config.CACHE_DIR = folder
    try:
        yield
    finally:
        config.CACHE_DIR = previous


def compile_cached(func: Callable[..., Any], **options: Any) -> Any:
    """``numba.njit(**options)(func)``, cached in :func:`cache_folder` when writable."""
    import numba

    folder = _writable_folder()
    if folder is None:
        return numba.njit(cache=False, **options)(func)
    with _numba_cache_dir(folder):
        return numba.njit(cache=True, **options)(func)
