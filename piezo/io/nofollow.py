"""Opening files in output folders without following symbolic links.

An output folder may be shared, or prepared by someone else: a symbolic link planted
where piezo appends to a file (a journal) or writes pages (a sub-folder) would redirect
the writes to the link's target. These helpers refuse such links with an
:class:`~piezo.errors.OutputError` naming the path, and never touch the target.

Where the operating system offers ``O_NOFOLLOW`` (POSIX) the check is done by the
kernel in the same call that opens the file, so there is no window between a check and
the open; elsewhere the path is checked with ``lstat`` just before.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from piezo.errors import OutputError

__all__ = ["ensure_real_folder", "open_no_follow", "refuse_link"]

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


def ensure_real_folder(path: str | Path) -> Path:
    """Create the folder ``path`` if needed; refuse it if it is a link or not a folder.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> ensure_real_folder(folder / "reports").is_dir()
    True
    """
    folder = Path(path)
    refuse_link(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create: {exc.strerror or exc}", source=str(folder)) from None
    refuse_link(folder)  # created by someone else between the two calls
    if not folder.is_dir():
        raise OutputError("exists and is not a folder", source=str(folder))
    return folder


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
