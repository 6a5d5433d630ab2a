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

    Examples
    --------
    >>> err = PiezoError("sample rate must be positive")
    >>> str(err.with_source("run-07.wav"))
    'run-07.wav: sample rate must be positive'
    >>> str(err.with_source("other.wav"))  # keeps the first source
    'run-07.wav: sample rate must be positive'
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
    """A value, option or file content that cannot be used as given.

    Examples
    --------
    >>> issubclass(InputError, PiezoError), issubclass(InputError, ValueError)
    (True, True)
    >>> try:
    ...     raise InputError("channel 3 does not exist (the file has 2)")
    ... except ValueError as exc:
    ...     print(exc)
    channel 3 does not exist (the file has 2)
    """


class UnitError(InputError):
    """A quantity whose text cannot be parsed or has the wrong unit.

    Examples
    --------
    >>> from piezo.chain.units import parse_quantity
    >>> try:
    ...     parse_quantity("47 nH", "F", what="capacitance")
    ... except UnitError as exc:
    ...     print(exc)
    capacitance: unknown unit in '47 nH'; expected a number ... and unit F
    """


class RecordingError(PiezoError, OSError):
    """A recording that is missing, unreadable, empty or corrupt.

    Examples
    --------
    Also an :class:`OSError`, so code that handles file failures catches it:

    >>> isinstance(RecordingError("no audio frames", source="empty.wav"), OSError)
    True
    >>> str(RecordingError("no audio frames", source="empty.wav"))
    'empty.wav: no audio frames'
    """


class SpecError(InputError):
    """A limit specification, profile or design file that is invalid.

    Examples
    --------
    >>> issubclass(SpecError, InputError), issubclass(SpecError, ValueError)
    (True, True)
    """


class OutputError(PiezoError, OSError):
    """An output path that cannot be written: a folder, read-only, full disk, a link.

    Examples
    --------
    >>> err = OutputError(os_reason(IsADirectoryError(21, "Is a directory")), source="out")
    >>> isinstance(err, OSError), str(err)
    (True, 'out: is a directory')
    """


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
