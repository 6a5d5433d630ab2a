"""Names of output files made from capture names: safe everywhere, unique per run.

The one naming rule of the report pages (``piezo report``) and the batch's capture pages.
Letters of any script are kept ("Ölpumpe" stays "Ölpumpe"); only what a common file
system forbids or treats specially is replaced by ``_``: the separators ``/`` and ``\\``,
NUL and other control characters, the characters Windows forbids (``< > : " | ? *``),
a leading dot (a hidden file) and trailing dots and spaces (dropped by Windows), and the
names Windows reserves for devices (``CON``, ``NUL``, ``COM1`` ...). Names are
normalised to Unicode NFC (macOS stores the decomposed form) and cut to a length every
file system takes.

Two captures can still give the same name (``a b.wav`` and ``a_b.wav``, or ``A.wav`` and
``a.wav`` on a case-insensitive disk): :class:`UniqueNames` hands out each name once per
run, adding ``-2``, ``-3`` ... to later ones, comparing names without regard to case.
"""

from __future__ import annotations

import re
import unicodedata

__all__ = ["MAX_NAME_BYTES", "UniqueNames", "safe_file_name"]

#: Longest name handed out, in UTF-8 bytes: most file systems allow 255 per component,
#: the rest is left for a suffix (``-12.report.json``) and a temporary-file prefix.
MAX_NAME_BYTES = 200

_FORBIDDEN = re.compile(r'[\x00-\x1f\x7f<>:"/\\|?*]')
_RESERVED = {"CON", "PRN", "AUX", "NUL"} | {f"{p}{i}" for p in ("COM", "LPT") for i in range(10)}


def safe_file_name(text: str) -> str:
    """``text`` as a file name that every common file system accepts.

    Examples
    --------
    >>> safe_file_name("Ölpumpe")
    'Ölpumpe'
    >>> safe_file_name('PD27 <b>:"x"?.flac')
    'PD27 _b___x__.flac'
    >>> safe_file_name("lot/b\\\\c.wav"), safe_file_name(".hidden"), safe_file_name("con.wav")
    ('lot_b_c.wav', '_hidden', '_con.wav')
    >>> safe_file_name("trailing. "), safe_file_name("")
    ('trailing', '_')
    """
    name = _FORBIDDEN.sub("_", unicodedata.normalize("NFC", text))
    name = name.rstrip(". ")
    if name.startswith("."):
        name = "_" + name[1:]
    if name.split(".", 1)[0].rstrip(" ").upper() in _RESERVED:
        name = "_" + name
    encoded = name.encode("utf-8")
    if len(encoded) > MAX_NAME_BYTES:
        name = encoded[:MAX_NAME_BYTES].decode("utf-8", errors="ignore").rstrip(". ")
    return name or "_"


class UniqueNames:
    """Hands out safe file names, each at most once (compared without regard to case).

    Examples
    --------
    >>> names = UniqueNames()
    >>> names.claim("Kanal ä"), names.claim("Kanal ö"), names.claim("Kanal ä")
    ('Kanal ä', 'Kanal ö', 'Kanal ä-2')
    >>> names.claim("PD27 x"), names.claim("PD27_x"), names.claim("pd27_X")
    ('PD27 x', 'PD27_x', 'pd27_X-2')
    >>> UniqueNames().claim("unit", ending=".report")
    'unit.report'
    """

    def __init__(self) -> None:
        self._used: set[str] = set()

    def claim(self, text: str, *, ending: str = "") -> str:
        """A safe name for ``text`` plus ``ending``, not handed out before in this run.

        A repeated name gets ``-2``, ``-3`` ... between the name and ``ending``.
        """
        base = safe_file_name(text)
        name, n = base + ending, 2
        while name.casefold() in self._used:
            name = f"{base}-{n}{ending}"
            n += 1
        self._used.add(name.casefold())
        return name
