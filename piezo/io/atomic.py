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

Links: inside an output folder piezo never follows a symbolic link it did not create.
Files are created by rename (a link in the target's place is replaced, its target left
alone); a folder below the output folder that is a link is refused
(:func:`output_folder`, ``within=``); files that are appended to in place (a batch
journal, a lock) are opened with :func:`open_nofollow`.
"""

from __future__ import annotations

import contextlib
import errno
import os
import stat
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO

from piezo.errors import OutputError, PiezoError, os_reason

__all__ = [
    "atomic_output",
    "open_no_follow",
    "open_nofollow",
    "output_error",
    "output_folder",
    "refuse_link",
    "write_bytes_atomic",
    "write_text_atomic",
]


def output_error(path: str | Path, exc: OSError) -> OutputError:
    """An :class:`OutputError` for ``path`` from the operating system's ``exc``.

    Examples
    --------
    >>> str(output_error("out/a.csv", IsADirectoryError(21, "Is a directory")))
    'out/a.csv: cannot write: is a directory'
    """
    reason = os_reason(exc)
    return OutputError(f"cannot write: {reason}", source=str(path))


def _refuse_links(folder: Path, within: Path | None) -> None:
    """Refuse ``folder`` if it, or a folder between ``within`` and it, is a link."""
    if within is None:
        return
    try:
        rel = folder.relative_to(within)
    except ValueError:
        return
    current = within
    for part in rel.parts:
        current = current / part
        if current.is_symlink():
            raise output_error(current, OSError(errno.ELOOP, "symbolic link"))


def output_folder(folder: str | Path, *, within: str | Path | None = None) -> Path:
    """Create ``folder`` (and its parents) for outputs; return it.

    Parameters
    ----------
    folder
        The folder.
    within
        The output folder the user named: no folder from there down to ``folder`` may
        be a symbolic link (a planted link would send the outputs elsewhere).

    Raises
    ------
    OutputError
        A plain file in the way, a link below ``within``, a read-only file system.

    Examples
    --------
    >>> import tempfile, pathlib, os
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> output_folder(root / "a" / "reports", within=root).is_dir()
    True
    >>> os.symlink(tempfile.mkdtemp(), root / "b")
    >>> output_folder(root / "b", within=root)
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: ...b: cannot write: is a symbolic link (...)
    """
    target = Path(folder)
    base = None if within is None else Path(within)
    _refuse_links(target, base)
    try:
        target.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        if isinstance(exc, FileExistsError) and target.exists() and not target.is_dir():
            raise OutputError(
                "cannot write: exists and is not a directory", source=str(target)
            ) from None
        raise output_error(target, exc) from None
    _refuse_links(target, base)
    return target


def open_nofollow(
    path: str | Path, mode: str = "a", *, within: str | Path | None = None
) -> IO[str]:
    """Open a text file for writing (``"w"``) or appending (``"a"``), never through a link.

    For files written in place (a journal, a lock): the open fails if ``path`` is a
    symbolic link (``O_NOFOLLOW``) instead of truncating or appending to its target.

    Raises
    ------
    OutputError
        ``path`` is a link, a folder, or cannot be written.

    Examples
    --------
    >>> import tempfile, pathlib, os
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> with open_nofollow(root / "journal.jsonl", "w") as fh:
    ...     _ = fh.write("{}\\n")
    >>> os.symlink(root / "journal.jsonl", root / "link.jsonl")
    >>> open_nofollow(root / "link.jsonl", "w")
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: ...link.jsonl: is a symbolic link; refusing to follow it
    """
    if mode not in ("a", "w"):
        raise ValueError(f"mode must be 'a' or 'w', got {mode!r}")
    target = Path(path)
    _refuse_links(target.parent, None if within is None else Path(within))
    flags = os.O_WRONLY | os.O_CREAT | getattr(os, "O_CLOEXEC", 0)
    flags |= os.O_APPEND if mode == "a" else os.O_TRUNC
    return open(open_no_follow(target, flags), mode, encoding="utf-8")


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
def atomic_output(path: str | Path, *, within: str | Path | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; it replaces ``path`` when the block ends.

    The temporary name keeps the file's suffix, so libraries that choose a format by the
    extension (soundfile, matplotlib) still work. If the block raises, the temporary file
    is removed and ``path`` is left as it was. Missing parent folders are created with
    :func:`output_folder` (``within`` as there).

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
        raise OutputError("cannot write: is a directory", source=str(target))
    parent = target.parent
    if parent.exists() and not parent.is_dir():
        raise OutputError(
            "cannot write: a parent of the path is not a directory", source=str(target)
        )
    output_folder(parent, within=within)
    try:
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
        if isinstance(exc, OSError) and not isinstance(exc, PiezoError):
            raise output_error(target, exc) from None
        raise


def write_bytes_atomic(path: str | Path, data: bytes, *, within: str | Path | None = None) -> None:
    """Write ``data`` to ``path`` atomically.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "b.bin"
    >>> write_bytes_atomic(target, b"\\x00\\x01")
    >>> target.read_bytes()
    b'\\x00\\x01'
    """
    with atomic_output(path, within=within) as tmp:
        tmp.write_bytes(data)


def write_text_atomic(path: str | Path, text: str, *, within: str | Path | None = None) -> None:
    """Write ``text`` to ``path`` atomically, UTF-8 encoded.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "c.txt"
    >>> write_text_atomic(target, "µPa")
    >>> target.read_text(encoding="utf-8")
    'µPa'
    """
    with atomic_output(path, within=within) as tmp:
        tmp.write_text(text, encoding="utf-8")


# --- files opened in place, never through a link ---------------------------------

_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_BINARY = getattr(os, "O_BINARY", 0)


def refuse_link(path: str | Path) -> None:
    """Raise :class:`OutputError` if ``path`` is a symbolic link (dangling or not).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> refuse_link(folder / "missing")  # nothing there: fine
    >>> (folder / "link").symlink_to(folder / "elsewhere")
    >>> refuse_link(folder / "link")
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: .../link: is a symbolic link; refusing to follow it
    """
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        return
    except OSError as exc:
        raise OutputError(f"cannot use: {exc.strerror or exc}", source=str(path)) from None
    if stat.S_ISLNK(mode):
        raise OutputError("is a symbolic link; refusing to follow it", source=str(path))


def open_no_follow(path: str | Path, flags: int, mode: int = 0o666) -> int:
    """``os.open(path, flags | O_NOFOLLOW)``; a symbolic link is refused, never followed.

    Returns the file descriptor. Operating-system failures become
    :class:`OutputError` naming the path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> fd = open_no_follow(folder / "j.txt", os.O_WRONLY | os.O_CREAT | os.O_EXCL)
    >>> os.write(fd, b"ok"), os.close(fd)
    (2, None)
    >>> (folder / "l.txt").symlink_to(folder / "j.txt")
    >>> open_no_follow(folder / "l.txt", os.O_WRONLY | os.O_TRUNC)
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: .../l.txt: is a symbolic link; refusing to follow it
    >>> (folder / "j.txt").read_text()
    'ok'
    """
    if not _NOFOLLOW:
        refuse_link(path)
    try:
        return os.open(path, flags | _NOFOLLOW | _BINARY, mode)
    except OSError as exc:
        if _NOFOLLOW and os.path.islink(path):  # ELOOP (Linux) or EMLINK (BSD)
            raise OutputError(
                "is a symbolic link; refusing to follow it", source=str(path)
            ) from None
        if isinstance(exc, FileExistsError):
            raise
        raise OutputError(f"cannot open: {exc.strerror or exc}", source=str(path)) from None
