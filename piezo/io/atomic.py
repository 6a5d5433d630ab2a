"""Writing output files atomically: a temporary file beside the target, then a rename.

The one file writer of piezo, used by the edge layers (command line, reports, batch);
the analysis core writes no files. A reader never sees half a file: the data goes to a
temporary name in the target's folder, is flushed to the disk (``fsync``), and replaces
the target with :func:`os.replace`, which is atomic on POSIX and Windows for paths on
one file system. If anything fails the temporary file is removed and the target is left
as it was. A target that is a symbolic link is replaced by the new file; the link is not
followed.

Every operating-system failure (a folder where a file should be, a path below a plain
file, a read-only file system, a full disk) becomes an :class:`~piezo.errors.OutputError`
naming the path and the reason, which the command line reports as one line (exit 2).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from piezo.errors import OutputError

__all__ = ["atomic_output", "output_error", "write_bytes_atomic", "write_text_atomic"]


def output_error(path: str | Path, exc: OSError) -> OutputError:
    """An :class:`OutputError` for ``path`` from the operating system's ``exc``.

    Examples
    --------
    >>> str(output_error("out/a.csv", IsADirectoryError(21, "Is a directory")))
    'out/a.csv: cannot write: Is a directory'
    """
    reason = exc.strerror or str(exc) or type(exc).__name__
    return OutputError(f"cannot write: {reason}", source=str(path))


def _fsync_folder(folder: Path) -> None:
    # Makes the rename itself durable; not possible on every platform (Windows).
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_output(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; it replaces ``path`` when the block ends.

    The temporary name keeps the file's suffix, so libraries that choose a format by the
    extension (soundfile, matplotlib) still work. If the block raises, the temporary file
    is removed and ``path`` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_output(folder / "a.txt") as tmp:
    ...     _ = tmp.write_text("done")
    >>> (folder / "a.txt").read_text()
    'done'
    >>> sorted(p.name for p in folder.iterdir())
    ['a.txt']
    """
    target = Path(path)
    if target.is_dir() and not target.is_symlink():
        raise OutputError("cannot write: is a folder", source=str(target))
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp_name = tempfile.mkstemp(
            prefix=f".{target.stem}.", suffix=f".partial{target.suffix}", dir=target.parent
        )
    except OSError as exc:
        raise output_error(target, exc) from None
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        # mkstemp creates the file private (0600); give it the mode a plain open() would.
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        yield tmp
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, target)
        _fsync_folder(target.parent)
    except BaseException as exc:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        if isinstance(exc, OSError) and not isinstance(exc, OutputError):
            raise output_error(target, exc) from None
        raise


def write_bytes_atomic(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "b.bin"
    >>> write_bytes_atomic(target, b"\\x00\\x01")
    >>> target.read_bytes()
    b'\\x00\\x01'
    """
    with atomic_output(path) as tmp:
        tmp.write_bytes(data)


def write_text_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` atomically, UTF-8 encoded.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "c.txt"
    >>> write_text_atomic(target, "µPa")
    >>> target.read_text(encoding="utf-8")
    'µPa'
    """
    with atomic_output(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
