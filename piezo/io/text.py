"""Reading text and TOML from any path a file or an option names, with bounds.

Every text file piezo reads (profiles, thresholds, designs, limit specs, stimulus
sidecars, golden and response tables) goes through :func:`read_text` or
:func:`read_toml`, so they all answer alike:

- at most :data:`MAX_TEXT_BYTES` are read (a path such as ``/dev/zero`` or a huge file
  is refused, not loaded), and a TOML document may nest at most :data:`MAX_TOML_DEPTH`
  arrays or tables (a deeply nested one would exhaust the parser's recursion);
- a file that is missing, a folder, unreadable or not UTF-8 is refused with one
  message naming the file (:func:`cannot_read`), the line of a decoding error included;
- a message that quotes a line of a file quotes at most a short, printable
  :func:`excerpt` of it.

May import: :mod:`piezo.errors`, the standard library.
"""

from __future__ import annotations

import os
import re
import stat
import tomllib
from pathlib import Path
from typing import Any

from piezo.errors import InputError, PiezoError, os_reason

__all__ = [
    "MAX_TEXT_BYTES",
    "MAX_TOML_DEPTH",
    "cannot_read",
    "decode_error",
    "excerpt",
    "parse_toml",
    "read_text",
    "read_toml",
    "regular_file",
]

#: Largest text or TOML file read whole, in bytes (16 MiB: a response table of a million
#: rows; profiles, specs and designs are a few kilobytes).
MAX_TEXT_BYTES = 16 * 1024 * 1024
#: Deepest nesting of arrays and tables accepted in a TOML document.
MAX_TOML_DEPTH = 32

#: Longest excerpt of a file's line quoted in a message, in characters.
EXCERPT_CHARS = 40


def printable(text: str, *, keep_newlines: bool = False) -> str:
    """``text`` with every character Python does not count as printable shown as its
    escape (control characters, line breaks, tabs, format characters; with
    ``keep_newlines``, line feeds stay), so user text shown on a terminal, such as a file
    name, cannot move the cursor, change colours or break a one-line message.

    Examples
    --------
    >>> print(printable("a\\x1b[31mred\\nline Ölpumpe.wav"))
    a\\x1b[31mred\\nline Ölpumpe.wav
    >>> print(printable("two\\nlines", keep_newlines=True))
    two
    lines
    """
    if text.isprintable():
        return text
    return "".join(
        c
        if c.isprintable() or (keep_newlines and c == "\n")
        else c.encode("unicode_escape").decode()
        for c in text
    )


def excerpt(text: str, limit: int = EXCERPT_CHARS) -> str:
    """A short, printable, quoted excerpt of ``text`` for an error message.

    Control characters and other unprintable ones are shown as escapes, and the excerpt
    is cut to ``limit`` characters (marked with ``...``), so a hostile line cannot fill
    the terminal or move its cursor.

    Examples
    --------
    >>> excerpt("1.0,abc")
    "'1.0,abc'"
    >>> excerpt("\\x1b[2J" + "x" * 100)
    "'\\\\x1b[2Jxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...'"
    """
    shown = printable(text)
    if len(shown) > limit:
        shown = shown[:limit] + "..."
    return "'" + shown.replace("'", "\\'") + "'"


def cannot_read(
    path: str | Path, exc: OSError, *, what: str = "file", error: type[PiezoError] = InputError
) -> PiezoError:
    """The one error for an input file the operating system will not give us.

    Parameters
    ----------
    path
        The file.
    exc
        The operating system's error.
    what
        What the file is (``"profile"``, ``"limit spec"``), for the message.
    error
        The :class:`~piezo.errors.PiezoError` subclass to return.

    Examples
    --------
    >>> str(cannot_read("a.toml", FileNotFoundError(2, "No such file or directory"),
    ...     what="profile"))
    'a.toml: cannot read profile: no such file'
    >>> str(cannot_read("d", IsADirectoryError(21, "Is a directory")))
    'd: cannot read file: is a directory'
    """
    reason = os_reason(exc)
    return error(f"cannot read {what}: {reason}", source=str(path))


def decode_error(
    path: str | Path,
    data: bytes,
    exc: UnicodeDecodeError,
    *,
    first_line: int = 1,
    error: type[PiezoError] = InputError,
) -> PiezoError:
    """The error for bytes that are not UTF-8, naming the line (``first_line`` is the
    number of the line ``data`` starts on).

    Examples
    --------
    >>> raw = b"a\\nb\\n\\xe9\\n"
    >>> try:
    ...     raw.decode("utf-8")
    ... except UnicodeDecodeError as exc:
    ...     print(decode_error("x.csv", raw, exc))
    x.csv: line 3: not UTF-8 text (byte 0xe9 cannot be decoded)
    """
    line = first_line + data.count(b"\n", 0, exc.start)
    byte = data[exc.start : exc.start + 1].hex()
    return error(
        f"line {line}: not UTF-8 text (byte 0x{byte} cannot be decoded)", source=str(path)
    )


def regular_file(
    path: str | Path, *, what: str = "file", error: type[PiezoError] = InputError
) -> os.stat_result:
    """Check that ``path`` is a regular file this process may read; return its status.

    A folder, a device (``/dev/zero``), a pipe or a socket is refused without being
    opened (opening a pipe would wait for a writer).

    Examples
    --------
    >>> regular_file("/dev/zero", what="golden response")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: /dev/zero: cannot read golden response: not a regular file
    """
    p = Path(path)
    try:
        st = os.stat(p)
        if stat.S_ISDIR(st.st_mode):
            raise IsADirectoryError(21, "Is a directory")
        if not stat.S_ISREG(st.st_mode):
            raise error(f"cannot read {what}: not a regular file", source=str(p))
        with open(p, "rb"):
            pass
    except OSError as exc:
        if isinstance(exc, PiezoError):
            raise
        raise cannot_read(p, exc, what=what, error=error) from None
    return st


def read_text(
    path: str | Path,
    *,
    what: str = "file",
    max_bytes: int = MAX_TEXT_BYTES,
    error: type[PiezoError] = InputError,
) -> str:
    """Read a UTF-8 text file of at most ``max_bytes`` bytes.

    Only regular files are read (:func:`regular_file`), and at most ``max_bytes`` of
    them, so nothing is read without limit. A leading byte-order mark is dropped.

    Parameters
    ----------
    path
        The file.
    what
        What the file is, for messages (``"profile"``, ``"golden response"``).
    max_bytes
        The bound.
    error
        The :class:`~piezo.errors.PiezoError` subclass raised.

    Raises
    ------
    PiezoError
        (of class ``error``) when the file is missing, a folder, unreadable, larger than
        the bound or not UTF-8 (naming the line).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> _ = p.write_bytes("µ\\n".encode())
    >>> read_text(p)
    'µ\\n'
    >>> _ = p.write_bytes(b"x" * 20)
    >>> read_text(p, max_bytes=10)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: ...: file is larger than 10 bytes; not read
    """
    p = Path(path)
    regular_file(p, what=what, error=error)
    try:
        with open(p, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise cannot_read(p, exc, what=what, error=error) from None
    if len(data) > max_bytes:
        raise error(f"{what} is larger than {max_bytes} bytes; not read", source=str(p))
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise decode_error(p, data, exc, error=error) from None
    return text.removeprefix("\ufeff")


# Strings and comments are skipped; brackets and braces outside them count as nesting.
_TOML_TOKEN_RE = re.compile(
    r'"""(?:\\.|[^\\])*?"""|\'\'\'.*?\'\'\'|"(?:\\.|[^"\\\n])*"|\'[^\'\n]*\'|#[^\n]*|[\[\]{}\n]',
    re.DOTALL,
)
_TOML_LINE_RE = re.compile(r"\s*\(at line (\d+), column (\d+)\)")


def _nesting_check(text: str, max_depth: int, source: str | None, error: type[PiezoError]) -> None:
    depth = 0
    line = 1
    for m in _TOML_TOKEN_RE.finditer(text):
        token = m.group()
        if token == "\n":
            line += 1
        elif token in "[{":
            depth += 1
            if depth > max_depth:
                raise error(
                    f"line {line}: arrays or tables nested deeper than {max_depth} levels",
                    source=source,
                )
        elif token in "]}":
            depth = max(0, depth - 1)
        else:
            line += token.count("\n")


def _depth(value: Any) -> int:
    """Nesting depth of parsed TOML (dotted keys nest without brackets), iteratively."""
    deepest = 0
    stack: list[tuple[Any, int]] = [(value, 0)]
    while stack:
        item, level = stack.pop()
        deepest = max(deepest, level)
        if isinstance(item, dict):
            stack.extend((v, level + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, level + 1) for v in item)
    return deepest


def parse_toml(
    text: str,
    *,
    source: str | None = None,
    max_depth: int = MAX_TOML_DEPTH,
    error: type[PiezoError] = InputError,
) -> dict[str, Any]:
    """Parse TOML ``text`` whose nesting is at most ``max_depth`` levels.

    Syntax errors name the line: ``line 3: TOML syntax error: ...``.

    Examples
    --------
    >>> parse_toml("[a]\\nb = [1, [2]]")
    {'a': {'b': [1, [2]]}}
    >>> parse_toml("x = " + "[" * 40 + "]" * 40)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: line 1: arrays or tables nested deeper than 32 levels
    >>> parse_toml("a = = 1", source="p.toml")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: p.toml: line 1: TOML syntax error: Invalid value
    """
    _nesting_check(text, max_depth, source, error)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _TOML_LINE_RE.search(msg)
        where = f"line {m.group(1)}: " if m else ""
        problem = _TOML_LINE_RE.sub("", msg).strip()
        raise error(f"{where}TOML syntax error: {problem}", source=source) from None
    except RecursionError:  # pragma: no cover - the scan above bounds the nesting first
        raise error(f"nested deeper than {max_depth} levels", source=source) from None
    if _depth(data) > max_depth + 1:
        raise error(f"keys nested deeper than {max_depth} levels", source=source)
    return data


def read_toml(
    path: str | Path,
    *,
    what: str = "file",
    max_bytes: int = MAX_TEXT_BYTES,
    max_depth: int = MAX_TOML_DEPTH,
    error: type[PiezoError] = InputError,
) -> dict[str, Any]:
    """Read a TOML file with :func:`read_text` and :func:`parse_toml` (both bounds).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.toml"
    >>> _ = p.write_text('[sensor]\\nname = "disc"\\n')
    >>> read_toml(p, what="profile")
    {'sensor': {'name': 'disc'}}
    """
    text = read_text(path, what=what, max_bytes=max_bytes, error=error)
    return parse_toml(text, source=str(path), max_depth=max_depth, error=error)
