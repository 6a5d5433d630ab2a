"""Impedance of an element against frequency: read from CSV exports, or measured by V/I.

Two sources give an :class:`ImpedanceSweep` (frequency, complex impedance in ohms):

- :func:`read_impedance_csv` reads the table an impedance analyser exports: a frequency
  column and |Z| with phase, or R and X (Z = R + jX), or G and B (Y = G + jB). Column
  names and their units are recognised from the header text (``"Frequency (kHz)"``,
  ``"|Z| [kΩ]"``, ``"phase_deg"``, ``"G (mS)"`` …); the delimiter and the header line are
  sniffed by the same helpers as every other CSV reader (:mod:`piezo.io.reader`), and
  units are parsed by :mod:`piezo.chain.units`.
- :mod:`piezo.element.vi` measures one from a two-channel V/I capture.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from piezo.chain.units import parse_quantity
from piezo.errors import InputError, RecordingError, UnitError
from piezo.io.reader import CsvLayout, _csv_chunks, _sniff_layout

__all__ = [
    "MAX_TABLE_ROWS",
    "ImpedanceSweep",
    "read_impedance_csv",
]

#: Rows read at most from an impedance table (analysers export a few thousand points).
MAX_TABLE_ROWS = 2_000_000


@dataclass(frozen=True)
class ImpedanceSweep:
    """Complex impedance of an element against frequency.

    Attributes
    ----------
    frequency_hz
        Frequencies, Hz, increasing, shape (points,).
    impedance_ohm
        Complex impedance Z = R + jX, ohms, shape (points,).
    coherence
        γ² of a V/I measurement per frequency (0 … 1), or None for a table.
    form
        What the source gave: ``"|Z|, phase"``, ``"R, X"``, ``"G, B"`` or ``"V/I"``.
    source
        The file, if any.

    Examples
    --------
    >>> import numpy as np
    >>> f = np.array([1e3, 2e3])
    >>> sweep = ImpedanceSweep(f, 1 / (2j * np.pi * f * 1e-8))   # 10 nF
    >>> sweep.phase_deg.round(6).tolist(), int(sweep.magnitude_ohm[0])
    ([-90.0, -90.0], 15915)
    """

    frequency_hz: np.ndarray
    impedance_ohm: np.ndarray
    coherence: np.ndarray | None = None
    form: str = "|Z|, phase"
    source: str | None = None

    def __post_init__(self) -> None:
        f = np.asarray(self.frequency_hz, dtype=np.float64)
        z = np.asarray(self.impedance_ohm, dtype=np.complex128)
        if f.ndim != 1 or z.shape != f.shape or f.size < 2:
            raise InputError(
                "frequency_hz and impedance_ohm must be 1-D arrays of the same length (at "
                f"least 2 points), got shapes {np.shape(self.frequency_hz)} and "
                f"{np.shape(self.impedance_ohm)}",
                source=self.source,
            )
        if not (np.all(np.isfinite(f)) and np.all(f > 0) and np.all(np.diff(f) > 0)):
            raise InputError(
                "frequencies must be positive, finite and strictly increasing",
                source=self.source,
            )
        if not (np.all(np.isfinite(z)) and np.all(np.abs(z) > 0)):
            raise InputError("impedances must be finite and non-zero", source=self.source)
        object.__setattr__(self, "frequency_hz", f)
        object.__setattr__(self, "impedance_ohm", z)

    @property
    def magnitude_ohm(self) -> np.ndarray:
        """|Z|, ohms."""
        return np.abs(self.impedance_ohm)

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of Z, degrees (−90° for a capacitance)."""
        return np.degrees(np.angle(self.impedance_ohm))

    @property
    def admittance_s(self) -> np.ndarray:
        """Y = 1/Z = G + jB, siemens."""
        return 1.0 / self.impedance_ohm

    def capacitance_at(self, frequency_hz: float) -> tuple[float, float] | None:
        """Parallel capacitance C = B/ω (farads) and loss tangent tan δ = G/B at a
        frequency inside the sweep (linear interpolation of G and B over log
        frequency), or None outside it.

        Examples
        --------
        >>> import numpy as np
        >>> f = np.array([500.0, 1000.0, 2000.0])
        >>> c, tan_d = 10e-9, 0.02
        >>> y = 2j * np.pi * f * c * (1 - 1j * tan_d)
        >>> cap, tan = ImpedanceSweep(f, 1 / y).capacitance_at(1000.0)
        >>> round(cap * 1e9, 9), round(tan, 9)
        (10.0, 0.02)
        """
        f = self.frequency_hz
        if not f[0] <= frequency_hz <= f[-1]:
            return None
        y = self.admittance_s
        lf = np.log(f)
        g = float(np.interp(math.log(frequency_hz), lf, y.real / f)) * frequency_hz
        b = float(np.interp(math.log(frequency_hz), lf, y.imag / f)) * frequency_hz
        if not b > 0:
            return None
        return b / (2 * math.pi * frequency_hz), g / b


# --- CSV tables ------------------------------------------------------------------------

#: Column role -> header names (lower case, spaces, underscores and dashes removed).
_ROLE_NAMES: dict[str, tuple[str, ...]] = {
    "frequency": ("f", "freq", "frequency", "frequenz", "fhz"),
    "magnitude": (
        "|z|", "z", "zmag", "magz", "mag", "magnitude", "impedance", "absz", "abs(z)",
        "impedancemagnitude", "|z|magnitude", "modz", "mod(z)",
    ),
    "phase": (
        "phase", "theta", "θ", "phi", "φ", "arg", "argz", "arg(z)", "phasez", "zphase",
        "impedancephase", "∠z", "phaseangle",
    ),
    "resistance": ("r", "rs", "re(z)", "rez", "real", "realz", "resistance", "z'", "zreal"),
    "reactance": ("x", "xs", "im(z)", "imz", "imag", "imagz", "reactance", "z''", "zimag"),
    "negreactance": ("-z''", "-im(z)", "-x", "-imz"),
    "conductance": ("g", "gp", "conductance", "re(y)", "rey", "yreal"),
    "susceptance": ("b", "bp", "susceptance", "im(y)", "imy", "yimag"),
}  # fmt: skip

_BRACKET_UNIT = re.compile(r"^(.*?)\s*[\(\[]\s*([^\)\]]*?)\s*[\)\]]\s*$")
_SUFFIX_UNIT = re.compile(r"^(.*?)[\s_/]+([A-Za-zµμΩ°]+)$")


def _role_of(base: str) -> str | None:
    key = (
        re.sub(r"[\s_\-]", "", base.strip().lower())
        if not base.strip().startswith("-")
        else ("-" + re.sub(r"[\s_\-]", "", base.strip()[1:].lower()))
    )
    for role, names in _ROLE_NAMES.items():
        if key in names:
            return role
    return None


def _split_header(name: str) -> tuple[str | None, str]:
    """(role, unit text) of a header field such as ``"Frequency (kHz)"`` or ``"z_ohm"``."""
    text = name.strip()
    m = _BRACKET_UNIT.match(text)
    if m:
        return _role_of(m.group(1)), m.group(2)
    role = _role_of(text)
    if role is not None:
        return role, ""
    m = _SUFFIX_UNIT.match(text)
    if m:
        return _role_of(m.group(1)), m.group(2)
    return None, ""


_UNIT_OF_ROLE = {
    "frequency": "Hz",
    "magnitude": "Ohm",
    "resistance": "Ohm",
    "reactance": "Ohm",
    "negreactance": "Ohm",
    "conductance": "S",
    "susceptance": "S",
}


def _scale(role: str, unit_text: str, header: str, source: str) -> float:
    if role == "phase":
        u = unit_text.strip().lower()
        if u in ("", "deg", "°", "degree", "degrees", "grad"):
            return math.pi / 180.0
        if u in ("rad", "radian", "radians"):
            return 1.0
        raise InputError(
            f"column {header!r}: unknown phase unit {unit_text!r}; expected deg or rad",
            source=source,
        )
    if unit_text.strip() == "":
        return 1.0
    unit = _UNIT_OF_ROLE[role]
    try:
        return parse_quantity(f"1 {unit_text.strip()}", unit, what=f"column {header!r}")
    except UnitError as exc:
        raise InputError(exc.message, source=source) from None


def read_impedance_csv(path: str | Path) -> ImpedanceSweep:
    """Read an impedance table exported as CSV/TSV text.

    The header names the columns: a frequency and one pair of |Z| and phase, R and X (or
    −Z''), or G and B. Units come from the header (in brackets or after an underscore;
    SI prefixes as :func:`piezo.chain.units.parse_quantity` reads them): frequency in Hz,
    impedances in Ω, admittances in S, phase in degrees unless marked ``rad``. Lines
    starting with ``#`` and lines before the header are skipped.

    Raises
    ------
    RecordingError
        The file is missing, not text, or holds no numeric table.
    InputError
        The header does not name a frequency and a known pair, or the values are not
        usable (non-increasing frequencies, zero impedance).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> (folder / "z.csv").write_text("Frequency (kHz),|Z| (kOhm),Phase (deg)\\n"
    ...     "1,15.9,-89.5\\n2,7.96,-89.4\\n", encoding="utf-8")
    65
    >>> sweep = read_impedance_csv(folder / "z.csv")
    >>> sweep.frequency_hz, round(float(sweep.magnitude_ohm[0]))
    (array([1000., 2000.]), 15900)
    """
    p = Path(path)
    source = str(p)
    if not p.is_file():
        raise RecordingError("no such file" if not p.exists() else "not a file", source=source)
    try:
        with open(p, encoding="utf-8-sig", errors="strict") as fh:
            head = [fh.readline() for _ in range(200)]
    except UnicodeDecodeError:
        raise RecordingError("not a text file (cannot decode as UTF-8)", source=source) from None
    head = [ln for ln in head if ln != ""]
    if not head:
        raise RecordingError("file is empty", source=source)
    delimiter, start, header = _sniff_layout(p, head)
    first = head[start].strip()
    n_columns = len(first.split() if delimiter is None else first.split(delimiter))
    if header is None or len(header) != n_columns:
        raise InputError(
            "an impedance table needs a header naming its columns (frequency and |Z|, "
            "phase or R, X or G, B, with units), e.g. 'Frequency (Hz),|Z| (Ohm),Phase (deg)'",
            source=source,
        )
    roles: dict[str, tuple[int, float]] = {}
    for i, name in enumerate(header):
        role, unit_text = _split_header(name)
        if role is not None and role not in roles:
            roles[role] = (i, _scale(role, unit_text, name, source))
    if "frequency" not in roles:
        raise InputError(
            f"no frequency column among {', '.join(repr(h) for h in header)}", source=source
        )
    if "negreactance" in roles and "reactance" not in roles:
        i, s = roles.pop("negreactance")
        roles["reactance"] = (i, -s)
    pairs = (
        ("magnitude", "phase", "|Z|, phase"),
        ("resistance", "reactance", "R, X"),
        ("conductance", "susceptance", "G, B"),
    )
    chosen = next(((a, b, form) for a, b, form in pairs if a in roles and b in roles), None)
    if chosen is None:
        raise InputError(
            f"columns {', '.join(repr(h) for h in header)} hold no |Z| and phase, R and X, "
            "or G and B pair",
            source=source,
        )
    a, b, form = chosen
    layout = CsvLayout(
        delimiter=delimiter,
        skip_lines=start,
        column_names=tuple(header),
        value_columns=(),
        time_column=None,
        n_columns=n_columns,
        # Read exactly what is there now (a file that grows is read as it was opened).
        size_bytes=p.stat().st_size,
    )
    cols = [roles["frequency"][0], roles[a][0], roles[b][0]]
    parts: list[np.ndarray] = []
    rows = 0
    for table, _line in _csv_chunks(p, layout, 65536):
        rows += table.shape[0]
        if rows > MAX_TABLE_ROWS:
            raise InputError(
                f"more than {MAX_TABLE_ROWS} rows: not an impedance sweep", source=source
            )
        parts.append(table[:, cols])
    data = np.concatenate(parts) if parts else np.zeros((0, 3))
    if not np.all(np.isfinite(data)):
        row = int(np.argwhere(~np.isfinite(data))[0][0])
        raise InputError(f"non-finite value in data row {row + 1}", source=source)
    f = data[:, 0] * roles["frequency"][1]
    u = data[:, 1] * roles[a][1]
    v = data[:, 2] * roles[b][1]
    if form == "|Z|, phase":
        z = u * np.exp(1j * v)
    elif form == "R, X":
        z = u + 1j * v
    else:
        y = u + 1j * v
        if np.any(y == 0):
            raise InputError("an admittance of zero has no impedance", source=source)
        z = 1.0 / y
    order = np.argsort(f, kind="stable")
    if np.any(np.diff(f[order]) == 0):
        raise InputError("the table repeats a frequency", source=source)
    return ImpedanceSweep(f[order], z[order], None, form, source)
