"""The project's exception tree.

Every error the analysis core raises on purpose is a :class:`PiezoError`. Its leaves also
inherit the built-in exception with the same meaning, so callers may catch either way
(``except ValueError`` keeps working for code that does not know about piezo).

The command line turns a :class:`PiezoError` into one line on stderr and exit code 2.
"""

from __future__ import annotations

import errno


class PiezoError(Exception):
    """Root of every error raised on purpose by piezo.

    Parameters
    ----------
    message
        What is wrong, in words a user can act on.
    source
        The file (or other input) the problem belongs to, if any. The command line
        prints it in front of the message.
    """

    def __init__(self, message: str, *, source: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.source = source

    def __str__(self) -> str:
        if self.source:
            return f"{self.source}: {self.message}"
        return self.message

    def with_source(self, source: str) -> PiezoError:
        """Return the same error naming ``source`` if it does not name one yet."""
        if self.source is None:
            self.source = source
        return self


class InputError(PiezoError, ValueError):
    """A value, option or file content that cannot be used as given."""


class UnitError(InputError):
    """A quantity whose text cannot be parsed or has the wrong unit."""


class RecordingError(PiezoError, OSError):
    """A recording that is missing, unreadable, empty or corrupt."""


class SpecError(InputError):
    """A limit specification, profile or design file that is invalid."""


class OutputError(PiezoError, OSError):
    """An output path that cannot be written: a folder, read-only, full disk, a link."""


def os_reason(exc: OSError) -> str:
    """The words for an operating-system failure, the same for inputs and outputs.

    Examples
    --------
    >>> os_reason(IsADirectoryError(21, "Is a directory"))
    'is a directory'
    >>> os_reason(OSError(errno.ENOSPC, "No space left on device"))
    'no space left on the device'
    """
    if isinstance(exc, FileNotFoundError):
        return "no such file"
    if isinstance(exc, IsADirectoryError):
        return "is a directory"
    if isinstance(exc, NotADirectoryError | FileExistsError):
        return "a parent of the path is not a directory"
    if exc.errno == errno.ELOOP:
        return "is a symbolic link (piezo does not write through links it did not create)"
    if exc.errno == errno.EROFS:
        return "read-only file system"
    if exc.errno == errno.ENOSPC:
        return "no space left on the device"
    if isinstance(exc, PermissionError):
        return "permission denied"
    return (exc.strerror or str(exc) or type(exc).__name__).lower()
