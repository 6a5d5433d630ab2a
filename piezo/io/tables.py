"""Writing CSV: the one writer of delimited tables (pure: it returns text).

Every CSV file piezo writes (results.csv of a batch, spectrum, band and response
tables) is built here. Text cells that a spreadsheet would evaluate as a formula, those
starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return, are neutralised by
a leading apostrophe, as the common CSV-injection guidance (OWASP) advises; a cell that
is a plain number (``-3.5``, ``+1e-3``) stays a number.

May import: the standard library.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from typing import Any

__all__ = ["csv_text", "safe_cell"]

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER_RE = re.compile(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$|^[-+]?(?:nan|inf)$", re.I)


def safe_cell(value: Any) -> str:
    """A cell's text, with a leading apostrophe if a spreadsheet would evaluate it.

    Examples
    --------
    >>> safe_cell('=HYPERLINK("http://x") PD27.flac')
    '\\'=HYPERLINK("http://x") PD27.flac'
    >>> safe_cell("-3.25"), safe_cell(-3.25), safe_cell("@SUM(A1)"), safe_cell(None)
    ('-3.25', '-3.25', "'@SUM(A1)", '')
    """
    if value is None:
        return ""
    text = value if isinstance(value, str) else str(value)
    if text.startswith(_FORMULA_START) and not _NUMBER_RE.match(text):
        return "'" + text
    return text


def csv_text(
    header: Sequence[Any] | None,
    rows: Iterable[Sequence[Any]],
    *,
    comments: Sequence[str] = (),
    delimiter: str = ",",
) -> str:
    """CSV text: ``# comment`` lines, a header row, then the rows, every cell made safe.

    Cells are quoted (RFC 4180) only when they hold the delimiter, a quote, a line feed
    or a carriage return; lines end with ``\\n``.

    Examples
    --------
    >>> print(csv_text(["file", "level_db"], [["-x.wav", "-3.5"], ["a,b", 1.0]]), end="")
    file,level_db
    '-x.wav,-3.5
    "a,b",1.0
    """
    special = (delimiter, '"', "\n", "\r")

    def quoted(cell: Any) -> str:
        text = safe_cell(cell)
        if any(c in text for c in special):
            return '"' + text.replace('"', '""') + '"'
        return text

    def line(cells: Sequence[Any]) -> str:
        text = delimiter.join(quoted(c) for c in cells)
        return (text or '""') + "\n"  # one empty cell is a row, not a blank line

    out = ["# " + c.replace("\n", " ").replace("\r", " ") + "\n" for c in comments]
    if header is not None:
        out.append(line(header))
    out.extend(line(row) for row in rows)
    return "".join(out)
