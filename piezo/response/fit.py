"""Numbers a sensor is judged by, fitted to a measured magnitude response.

Shared by ``piezo sweep analyze``, ``piezo response``, ``piezo fit-frontend`` and the
production batch checks. Input is a magnitude response in dB on any frequency grid
(``frequency_hz``, ``magnitude_db``); results are small frozen dataclasses.

- :func:`sensitivity_at` — the response at a reference frequency (default 1 kHz).
- :func:`band_within` — the range around the reference frequency within ±tolerance.
- :func:`fit_response` — sensitivity, −3 dB low corner and its order (first- and
  second-order high-pass models, chosen by residual), resonance frequency, Q and peak
  height when a peak lies inside the band, each fitted value with a standard uncertainty
  from the fit's covariance, plus the ±1 dB and ±3 dB bands.
- :func:`deviation_from_golden` — measured minus golden response per golden frequency,
  with the worst point.
- :class:`ResponseTable`, :func:`parse_response_csv`, :func:`format_response_csv` — the
  response CSV (frequency_hz, magnitude_db, optional phase_deg and more columns).

Models (analog prototypes, r = f / f0, textbook second-order system relations):

- first-order high-pass   |H| = (f/fc) / √(1 + (f/fc)²), −3 dB at fc;
- second-order high-pass  |H| = r² / √((1 − r²)² + (r/Q)²);
- resonance (single degree of freedom, as a mounted sensor)
  |H| = 1 / √((1 − r²)² + (r/Q)²).

The fit minimises the dB error with every point weighted by the log-frequency span it
covers (so a linearly spaced FFT grid does not over-weight the top octave). Uncertainties
are 1σ from the covariance s²(JᵀJ)⁻¹ of the weighted least-squares fit; neighbouring
points of a dense or smoothed grid are correlated, so they understate the true
uncertainty and are best read as a measure of how well the data pin each parameter.
"""

from __future__ import annotations

import functools
import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import scipy.optimize

from piezo.errors import InputError
from piezo.io.tables import csv_text
from piezo.io.text import excerpt, read_text
from piezo.response.model import highpass_db, resonance_db

__all__ = [
    "Band",
    "GoldenDeviation",
    "HighPassFit",
    "ResonanceFit",
    "ResponseFit",
    "ResponseTable",
    "band_within",
    "deviation_from_golden",
    "fit_response",
    "format_response_csv",
    "highpass_magnitude_db",
    "parse_response_csv",
    "read_response_table",
    "resonance_magnitude_db",
    "sensitivity_at",
]

#: A peak counts as a resonance inside the band when it rises at least this much above
#: the reference sensitivity and falls by as much again before the band ends (our rule).
RESONANCE_MIN_PEAK_DB = 1.0
#: With a resonance inside the band the model is fitted up to this factor above the
#: peak: above it a real sensor shows further modes and the measurement chain's own
#: low-pass, which the single-resonance model does not describe (our rule).
RESONANCE_FIT_SPAN = math.sqrt(2.0)
#: The low end counts as rolled off (a corner is fitted) when the response at the lowest
#: frequency is at least this far below the reference sensitivity (our rule).
CORNER_MIN_DROP_DB = 1.0
#: The second-order high-pass is chosen only if it at least halves the first-order
#: model's RMS residual (our rule: a true first-order roll-off is fitted almost as well by
#: a degenerate second-order model, so a plain "smaller residual" would always pick 2).
ORDER_RESIDUAL_RATIO = 0.5
#: The single-mode resonance model counts as not describing the peak when its RMS
#: residual over the points it was fitted to (reference frequency up to
#: ``RESONANCE_FIT_SPAN`` × the peak) exceeds this (our rule: a measured single mode fits
#: to a few hundredths of a dB; a peak of another shape leaves tenths of a dB or more).
RESONANCE_POOR_FIT_DB = 0.25
#: The fitted natural frequencies (high-pass, resonance) are kept within this factor
#: below the lowest and above the highest frequency fitted: a first-order corner a
#: factor 1000 beyond the data changes the model there by less than
#: 10·lg(1 + 10⁻⁶) = 4·10⁻⁶ dB from its asymptote, so the data cannot place it further
#: out (our rule). Without limits, least squares on noise-dominated data runs along
#: such flat directions until the exponentials overflow.
FREQUENCY_LIMIT_FACTOR = 1000.0
#: Limits of the fitted quality factors (the second-order high-pass and the resonance):
#: wider than any sensor or front-end shows (our rule; a single-mode mounted resonance
#: has Q of order 10 to 1000, a high-pass of order 0.5 to 1).
Q_LIMITS = (1e-3, 1e5)


# --------------------------------------------------------------------------------------
# Response table and its CSV form
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ResponseTable:
    """A magnitude (and optionally phase) response on a frequency grid.

    Attributes
    ----------
    frequency_hz
        Frequencies, Hz, strictly increasing.
    magnitude_db
        Magnitude in dB (``magnitude_unit`` when known).
    phase_deg
        Phase in degrees, or ``None``.
    magnitude_unit
        Reference of the dB values, e.g. ``"dB re 1 V/Pa"``; ``None`` if unknown.
    extra
        Further columns by name (coherence, distortion percent, ...).

    Examples
    --------
    A table survives its CSV form:

    >>> t = ResponseTable(np.array([100.0, 1000.0, 10000.0]), np.array([-41.0, -40.0, -39.5]),
    ...                   magnitude_unit="dB re 1 V/Pa")
    >>> back = parse_response_csv(format_response_csv(t))
    >>> back.magnitude_db.tolist(), back.magnitude_unit, back.phase_deg is None
    ([-41.0, -40.0, -39.5], 'dB re 1 V/Pa', True)
    """

    frequency_hz: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray | None = None
    magnitude_unit: str | None = None
    extra: dict[str, np.ndarray] = field(default_factory=dict)


def _fmt(value: float, spec: str) -> str:
    return "nan" if not math.isfinite(value) else format(value, spec)


def format_response_csv(table: ResponseTable) -> str:
    """Render a :class:`ResponseTable` as CSV text (comma-separated, one header row).

    A leading ``# magnitude_db: <unit>`` comment carries the magnitude's reference.

    Examples
    --------
    >>> t = ResponseTable(np.array([100.0, 1000.0]), np.array([-41.0, -40.0]),
    ...                   phase_deg=np.array([12.5, 0.0]), magnitude_unit="dB re 1 V/Pa")
    >>> print(format_response_csv(t), end="")
    # piezo response table
    # magnitude_db: dB re 1 V/Pa
    frequency_hz,magnitude_db,phase_deg
    100,-41.0000,12.500
    1000,-40.0000,0.000
    """
    names = ["frequency_hz", "magnitude_db"]
    cols: list[tuple[np.ndarray, str]] = [
        (table.frequency_hz, ".8g"),
        (table.magnitude_db, ".4f"),
    ]
    if table.phase_deg is not None:
        names.append("phase_deg")
        cols.append((table.phase_deg, ".3f"))
    for name, values in table.extra.items():
        names.append(name)
        cols.append((values, ".6g"))
    comments = ["piezo response table"]
    if table.magnitude_unit:
        comments.append(f"magnitude_db: {table.magnitude_unit}")
    rows = ([_fmt(float(c[i]), spec) for c, spec in cols] for i in range(len(table.frequency_hz)))
    return csv_text(names, rows, comments=comments)


_DELIMITED_RE = re.compile(r"[,;\t]")


def _cells(line: str) -> list[str]:
    """Cells split at commas, semicolons or tabs; at runs of spaces if there are none."""
    text = line.strip()
    if _DELIMITED_RE.search(text):
        return [p.strip() for p in _DELIMITED_RE.split(text)]
    return text.split()


def parse_response_csv(text: str, *, source: str | None = None) -> ResponseTable:
    """Parse a response table: frequency (Hz), magnitude (dB), optional phase (degrees).

    Lines starting with ``#`` are comments (``# magnitude_db: dB re 1 V/Pa`` sets the
    unit). An optional header row names the columns: the frequency column's name starts
    with ``freq``, the magnitude's contains ``mag``, ``level`` or ``db``, the phase's
    contains ``phase``; other named columns go to ``extra``. Without a header the columns
    are frequency, magnitude, phase. Cells are separated by commas, semicolons or tabs,
    or else by spaces.

    Raises
    ------
    InputError
        With the line number, if a cell is not a number, a row is short, frequencies are
        not positive and strictly increasing, or fewer than 3 rows remain.

    Examples
    --------
    Semicolons, a header in any order, a unit comment and an extra column:

    >>> text = ("# magnitude: dB re 1 V/Pa\\nlevel_db;freq;coh\\n"
    ...         "-41;100;0.9\\n-40;1000;1\\n-39;2000;1\\n")
    >>> t = parse_response_csv(text)
    >>> t.frequency_hz.tolist(), t.magnitude_db.tolist(), t.magnitude_unit, list(t.extra)
    ([100.0, 1000.0, 2000.0], [-41.0, -40.0, -39.0], 'dB re 1 V/Pa', ['coh'])
    >>> parse_response_csv("100,-41\\n90,-40\\n2000,-39\\n")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: line 2: frequencies must be strictly increasing
    """
    unit: str | None = None
    header: list[str] | None = None
    rows: list[list[float]] = []
    row_lines: list[int] = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            m = re.match(r"#\s*magnitude(?:_db)?\s*:\s*(.+)$", line)
            if m:
                unit = m.group(1).strip()
            continue
        cells = _cells(line)
        if header is None and not rows and any(re.search(r"[a-df-zA-DF-Z_]", c) for c in cells):
            if not any(c.lower() in ("nan", "inf", "-inf") for c in cells):
                header = [c.lower() for c in cells]
                continue
        try:
            rows.append([float(c) for c in cells])
        except ValueError:
            raise InputError(
                f"line {lineno}: {excerpt(line)} is not a row of numbers", source=source
            ) from None
        row_lines.append(lineno)
    if len(rows) < 3:
        raise InputError(
            f"a response table needs at least 3 rows of frequency and magnitude, found "
            f"{len(rows)}",
            source=source,
        )
    if header is not None:
        i_f = next((i for i, h in enumerate(header) if h.startswith("freq")), 0)
        i_m = next(
            (
                i
                for i, h in enumerate(header)
                if i != i_f and ("mag" in h or "level" in h or "db" in h)
            ),
            1 if i_f != 1 else 0,
        )
        i_p = next((i for i, h in enumerate(header) if "phase" in h), None)
    else:
        i_f, i_m = 0, 1
        i_p = 2 if min(len(r) for r in rows) >= 3 else None
    width = max(i_f, i_m, i_p if i_p is not None else 0) + 1
    for r, lineno in zip(rows, row_lines, strict=True):
        if len(r) < width:
            raise InputError(
                f"line {lineno}: expected at least {width} columns, found {len(r)}",
                source=source,
            )
    freq = np.array([r[i_f] for r in rows])
    mag = np.array([r[i_m] for r in rows])
    phase = None if i_p is None else np.array([r[i_p] for r in rows])
    if not np.all(np.isfinite(freq)) or np.any(freq <= 0):
        bad = row_lines[int(np.flatnonzero(~(np.isfinite(freq) & (freq > 0)))[0])]
        raise InputError(f"line {bad}: frequencies must be positive numbers", source=source)
    if np.any(np.diff(freq) <= 0):
        bad = row_lines[int(np.flatnonzero(np.diff(freq) <= 0)[0]) + 1]
        raise InputError(f"line {bad}: frequencies must be strictly increasing", source=source)
    extra: dict[str, np.ndarray] = {}
    if header is not None:
        for i, name in enumerate(header):
            if i in (i_f, i_m, i_p):
                continue
            extra[name] = np.array([r[i] if i < len(r) else math.nan for r in rows])
    return ResponseTable(freq, mag, phase, unit, extra)


def read_response_table(
    path: str | Path, *, what: str = "response table", finite: bool = False
) -> ResponseTable:
    """Read a response or golden table file: the one reader of such files.

    The file is read with :func:`piezo.io.text.read_text` (bounded size, UTF-8, errors
    naming the file) and parsed with :func:`parse_response_csv`.

    Parameters
    ----------
    path
        The table (as ``piezo sweep analyze --csv`` writes it).
    what
        What the table is, for messages (``"golden response"``).
    finite
        Also require every magnitude to be finite (a golden table to compare against).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "g.csv"
    >>> _ = p.write_text("frequency_hz,magnitude_db\\n100,-40\\n1000,-38\\n10000,nan\\n")
    >>> read_response_table(p).magnitude_db[:2]
    array([-40., -38.])
    >>> read_response_table(p, what="golden response", finite=True)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: ...g.csv: line 4: golden response magnitudes must be finite
    """
    text = read_text(path, what=what)
    table = parse_response_csv(text, source=str(path))
    if finite and not np.all(np.isfinite(table.magnitude_db)):
        first = int(np.flatnonzero(~np.isfinite(table.magnitude_db))[0])
        line = _data_line_numbers(text)[first]
        raise InputError(f"line {line}: {what} magnitudes must be finite", source=str(path))
    return table


def _data_line_numbers(text: str) -> list[int]:
    """Line numbers of the numeric rows of a table parsed by :func:`parse_response_csv`."""
    out = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if line and not line.startswith("#"):
            out.append(lineno)
    if out:
        cells = _cells(text.splitlines()[out[0] - 1])
        named = any(re.search(r"[a-df-zA-DF-Z_]", c) for c in cells)
        if named and not any(c.lower() in ("nan", "inf", "-inf") for c in cells):
            out = out[1:]
    return out


# --------------------------------------------------------------------------------------
# Models
# --------------------------------------------------------------------------------------


def highpass_magnitude_db(
    frequency_hz: np.ndarray, *, order: int, natural_hz: float, q: float | None = None
) -> np.ndarray:
    """Magnitude (dB) of a first-order (corner ``natural_hz``) or second-order high-pass.

    The shape is :func:`piezo.response.model.highpass_db`, the one high-pass model.

    Examples
    --------
    Both the first-order and the Butterworth (Q = 1/√2) second-order high-pass are
    -3.01 dB at ``natural_hz``; a decade below they are down about 20 and 40 dB:

    >>> f = np.array([10.0, 100.0])
    >>> highpass_magnitude_db(f, order=1, natural_hz=100.0).round(2).tolist()
    [-20.04, -3.01]
    >>> highpass_magnitude_db(f, order=2, natural_hz=100.0, q=2**-0.5).round(2).tolist()
    [-40.0, -3.01]
    """
    if order == 2 and q is None:
        raise InputError("a second-order high-pass needs its q")
    if order not in (1, 2):
        raise InputError(f"order must be 1 or 2, got {order!r}")
    return highpass_db(frequency_hz, corner_hz=natural_hz, order=order, q=q)


def resonance_magnitude_db(
    frequency_hz: np.ndarray, *, resonance_hz: float, q: float
) -> np.ndarray:
    """Magnitude (dB) of a single-degree-of-freedom resonance, unity at low frequency.

    The shape is :func:`piezo.response.model.resonance_db`.

    Examples
    --------
    At the natural frequency the gain is Q (20·lg 10 = 20 dB); far below it, unity:

    >>> f = np.array([100.0, 10000.0])
    >>> resonance_magnitude_db(f, resonance_hz=10000.0, q=10.0).round(3).tolist()
    [0.001, 20.0]
    """
    return resonance_db(frequency_hz, resonance_hz=resonance_hz, q=q)


def _second_order_corner_ratio(q: float) -> float:
    """f(−3 dB) / f0 of a second-order high-pass with quality factor q.

    Solves r⁴ / ((1 − r²)² + r²/q²) = 1/2: with u = r², u² + (2 − 1/q²) u − 1 = 0.
    """
    b = 2.0 - 1.0 / q**2
    u = (-b + math.sqrt(b * b + 4.0)) / 2.0
    return math.sqrt(u)


# --------------------------------------------------------------------------------------
# Direct reads from the data
# --------------------------------------------------------------------------------------


def _clean(frequency_hz: np.ndarray, magnitude_db: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    f = np.asarray(frequency_hz, dtype=np.float64)
    m = np.asarray(magnitude_db, dtype=np.float64)
    if f.ndim != 1 or f.shape != m.shape:
        raise InputError(
            f"frequency_hz and magnitude_db must be 1-D arrays of equal length, got shapes "
            f"{f.shape} and {m.shape}"
        )
    ok = np.isfinite(f) & np.isfinite(m) & (f > 0)
    f, m = f[ok], m[ok]
    order = np.argsort(f)
    f, m = f[order], m[order]
    if f.size < 3:
        raise InputError(f"need at least 3 finite response points, got {f.size}")
    return f, m


def sensitivity_at(
    frequency_hz: np.ndarray, magnitude_db: np.ndarray, *, reference_hz: float = 1000.0
) -> float:
    """The magnitude (dB) at ``reference_hz``, interpolated linearly in log frequency.

    Raises
    ------
    InputError
        If ``reference_hz`` lies outside the measured frequencies.

    Examples
    --------
    1 kHz lies halfway between 500 Hz and 2 kHz in log frequency:

    >>> sensitivity_at([500.0, 2000.0, 4000.0], [-40.0, -38.0, -37.0])
    -39.0
    """
    f, m = _clean(frequency_hz, magnitude_db)
    if not (f[0] <= reference_hz <= f[-1]):
        raise InputError(
            f"reference_hz {reference_hz:g} Hz is outside the measured range "
            f"{f[0]:g}–{f[-1]:g} Hz; choose a reference frequency inside it"
        )
    return float(np.interp(math.log(reference_hz), np.log(f), m))


@dataclass(frozen=True)
class Band:
    """Frequency range around the reference frequency within ±``tolerance_db``.

    ``low_limited`` / ``high_limited`` are true when the response stayed within the
    tolerance up to the end of the measured data, i.e. the true band edge lies beyond
    the reported one.

    Examples
    --------
    >>> f = np.geomspace(2.0, 5000.0, 400)
    >>> band = band_within(f, -40.0 + highpass_magnitude_db(f, order=1, natural_hz=10.0),
    ...                    tolerance_db=1.0)
    >>> round(band.low_hz, 1), band.low_limited, band.high_hz, band.high_limited
    (19.6, False, 5000.0, True)
    """

    tolerance_db: float
    low_hz: float
    high_hz: float
    low_limited: bool
    high_limited: bool


def _crossing(f: np.ndarray, dev: np.ndarray, inside: int, outside: int, tol: float) -> float:
    """Log-frequency interpolation of where |dev| reaches ``tol`` between two points."""
    a, b = abs(dev[inside]), abs(dev[outside])
    frac = 0.0 if b == a else (tol - a) / (b - a)
    lf = math.log(f[inside]) + frac * (math.log(f[outside]) - math.log(f[inside]))
    return math.exp(lf)


def band_within(
    frequency_hz: np.ndarray,
    magnitude_db: np.ndarray,
    *,
    tolerance_db: float,
    reference_hz: float = 1000.0,
) -> Band:
    """The contiguous range around ``reference_hz`` where |magnitude − sensitivity| ≤ tol.

    Walks down and up from the reference frequency to the first point outside the
    tolerance and interpolates the crossing in log frequency.

    Examples
    --------
    A first-order high-pass at 10 Hz is 1 dB down where ``(f/fc)² = 1/(10^0.1 − 1)``,
    at 19.65 Hz; above, the data end inside the tolerance:

    >>> f = np.geomspace(2.0, 5000.0, 400)
    >>> m = -40.0 + highpass_magnitude_db(f, order=1, natural_hz=10.0)
    >>> band = band_within(f, m, tolerance_db=1.0)
    >>> round(band.low_hz, 2), band.high_hz, band.high_limited
    (19.65, 5000.0, True)
    """
    if not (math.isfinite(tolerance_db) and tolerance_db > 0):
        raise InputError(f"tolerance_db must be positive, got {tolerance_db!r}")
    f, m = _clean(frequency_hz, magnitude_db)
    ref = sensitivity_at(f, m, reference_hz=reference_hz)
    dev = m - ref
    start_hi = int(np.searchsorted(f, reference_hz, side="left"))
    start_lo = start_hi - 1 if f[min(start_hi, f.size - 1)] > reference_hz else start_hi
    # Downwards.
    low, low_limited = float(f[0]), True
    i = start_lo
    prev = None
    while i >= 0:
        if abs(dev[i]) > tolerance_db:
            low = float(reference_hz) if prev is None else _crossing(f, dev, prev, i, tolerance_db)
            low_limited = False
            break
        prev, i = i, i - 1
    high, high_limited = float(f[-1]), True
    i = max(start_hi, 0)
    prev = None
    while i < f.size:
        if abs(dev[i]) > tolerance_db:
            high = (
                float(reference_hz) if prev is None else _crossing(f, dev, prev, i, tolerance_db)
            )
            high_limited = False
            break
        prev, i = i, i + 1
    return Band(float(tolerance_db), low, high, low_limited, high_limited)


# --------------------------------------------------------------------------------------
# Model fit
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class HighPassFit:
    """The low-frequency roll-off fitted as a first- or second-order high-pass.

    Attributes
    ----------
    order
        1 or 2, chosen by residual (see ``ORDER_RESIDUAL_RATIO``).
    corner_hz, corner_std_hz
        −3 dB frequency of the fitted model relative to its passband gain, and its 1σ
        uncertainty.
    natural_hz
        Natural frequency f0 of the model (equals ``corner_hz`` for order 1).
    q, q_std
        Quality factor of the second-order model and its uncertainty (None for order 1).
    in_band
        True when the corner lies inside the measured frequencies (otherwise it is an
        extrapolation).
    residual_rms_db
        RMS of the fit residual with this order.
    other_order_residual_rms_db
        RMS residual of the order that was not chosen.

    Examples
    --------
    A Butterworth second-order roll-off at 50 Hz is recognised as order 2 (its corner
    equals f0 at Q = 1/√2):

    >>> f = np.geomspace(5.0, 5000.0, 24 * 10)
    >>> m = -40.0 + highpass_magnitude_db(f, order=2, natural_hz=50.0, q=2**-0.5)
    >>> hp = fit_response(f, m).highpass
    >>> hp.order, round(hp.corner_hz, 3), round(hp.q, 4), hp.in_band
    (2, 50.0, 0.7071, True)
    """

    order: int
    corner_hz: float
    corner_std_hz: float
    natural_hz: float
    q: float | None
    q_std: float | None
    in_band: bool
    residual_rms_db: float
    other_order_residual_rms_db: float


@dataclass(frozen=True)
class ResonanceFit:
    """A resonance peak inside the band, fitted as a single-degree-of-freedom resonance.

    Attributes
    ----------
    frequency_hz, frequency_std_hz
        Fitted natural frequency and its 1σ uncertainty.
    q, q_std
        Fitted quality factor and its uncertainty.
        Both uncertainties are standard uncertainties (1σ, from the fit's covariance);
        NaN when the fit is poor, as a covariance then understates the error.
    peak_hz
        Measured frequency of the peak: the largest point, refined by a parabola through
        it and its two neighbours in (ln f, dB). A single mode peaks at
        f_r·√(1 − 1/(2Q²)), just below its natural frequency.
    peak_db
        Height of the measured peak above the reference sensitivity, dB.
    residual_rms_db
        RMS residual of the resonance model over the points it was fitted to, dB.
    poor_fit
        True when ``residual_rms_db`` exceeds ``RESONANCE_POOR_FIT_DB``: the peak is not
        single-mode shaped and ``frequency_hz``, ``q`` are only the nearest model's.

    Examples
    --------
    >>> f = np.geomspace(100.0, 30000.0, 200)
    >>> m = -40.0 + resonance_magnitude_db(f, resonance_hz=20000.0, q=20.0)
    >>> res = fit_response(f, m).resonance
    >>> round(res.frequency_hz, 1), round(res.q, 3), res.poor_fit
    (20000.0, 20.0, False)
    """

    frequency_hz: float
    frequency_std_hz: float
    q: float
    q_std: float
    peak_hz: float
    peak_db: float
    residual_rms_db: float = math.nan
    poor_fit: bool = False


@dataclass(frozen=True)
class ResponseFit:
    """Everything :func:`fit_response` reads from a magnitude response.

    Attributes
    ----------
    reference_hz, sensitivity_db
        Reference frequency and the measured magnitude there (interpolated, not fitted).
    passband_db, passband_std_db
        Fitted passband gain of the model (the level the high-pass tends to above its
        corner, the resonance below its peak) and its uncertainty.
    highpass
        The fitted roll-off, or None when the response at the lowest frequency is within
        ``CORNER_MIN_DROP_DB`` of the sensitivity (corner below the measured band).
    resonance
        The fitted resonance, or None when no peak lies inside the band.
    band_1db, band_3db
        Ranges within ±1 dB and ±3 dB of the sensitivity (from the data).
    frequency_hz, model_db
        The points used and the fitted model on them.
    residual_rms_db
        RMS of (data − model), dB.
    magnitude_unit
        Reference of the dB values if known.

    Examples
    --------
    -40 dB re 1 V/Pa is 10 mV/Pa:

    >>> f = np.geomspace(5.0, 5000.0, 100)
    >>> r = fit_response(f, np.full(f.size, -40.0), magnitude_unit="dB re 1 V/Pa")
    >>> r.sensitivity_db, round(r.sensitivity_v_per_pa, 6), r.highpass, r.resonance
    (-40.0, 0.01, None, None)
    """

    reference_hz: float
    sensitivity_db: float
    passband_db: float
    passband_std_db: float
    highpass: HighPassFit | None
    resonance: ResonanceFit | None
    band_1db: Band
    band_3db: Band
    frequency_hz: np.ndarray
    model_db: np.ndarray
    residual_rms_db: float
    magnitude_unit: str | None = None

    @property
    def sensitivity_v_per_pa(self) -> float | None:
        """Sensitivity as a ratio when the magnitude is in dB re 1 V/Pa, else None."""
        if self.magnitude_unit and self.magnitude_unit.replace(" ", "") == "dBre1V/Pa":
            return 10.0 ** (self.sensitivity_db / 20.0)
        return None


@dataclass(frozen=True)
class _Lsq:
    params: np.ndarray
    cov: np.ndarray
    rms_db: float
    #: Per parameter: True where the fit ended on a limit (not estimated by the data,
    #: so without an uncertainty).
    at_limit: np.ndarray


def _std(fit: _Lsq, index: int) -> float:
    """Standard uncertainty of parameter ``index`` (NaN when it ended on a limit)."""
    if fit.at_limit[index]:
        return math.nan
    return math.sqrt(max(float(fit.cov[index, index]), 0.0))


def _limits(f: np.ndarray, *, with_q: bool) -> list[tuple[float, float]]:
    """Limits of (ln natural frequency[, ln Q]) for a fit over the frequencies ``f``."""
    spread = math.log(FREQUENCY_LIMIT_FACTOR)
    out = [(math.log(float(f[0])) - spread, math.log(float(f[-1])) + spread)]
    if with_q:
        out.append((math.log(Q_LIMITS[0]), math.log(Q_LIMITS[1])))
    return out


def _highpass_part(f: np.ndarray, order: int, p: np.ndarray) -> np.ndarray:
    if order == 1:
        return highpass_magnitude_db(f, order=1, natural_hz=math.exp(p[0]))
    return highpass_magnitude_db(f, order=2, natural_hz=math.exp(p[0]), q=math.exp(p[1]))


def _highpass_part_of_order(order: int, f: np.ndarray, p: np.ndarray) -> np.ndarray:
    return _highpass_part(f, order, p)


def _resonance_part(f: np.ndarray, p: np.ndarray) -> np.ndarray:
    return resonance_magnitude_db(f, resonance_hz=math.exp(p[0]), q=math.exp(p[1]))


def _lsq(
    f: np.ndarray,
    target: np.ndarray,
    w: np.ndarray,
    shape: Callable[[np.ndarray, np.ndarray], np.ndarray] | None,
    x0: np.ndarray,
    limits: Sequence[tuple[float, float]] = (),
) -> _Lsq:
    """Weighted least squares of ``target ≈ p[0] + shape(f, p[1:])`` in dB.

    ``limits`` bound ``p[1:]`` (the logarithms of frequencies and Q, see
    :func:`_limits`); ``p[0]`` is free. Trust-region reflective least squares
    (``scipy.optimize.least_squares``, ``method="trf"``) keeps every step inside the
    limits, so the model's exponentials stay finite on any data. Covariance
    s² (JᵀJ)⁻¹ with s² the weighted residual variance.
    """

    def model(p: np.ndarray) -> np.ndarray:
        return p[0] + (0.0 if shape is None else shape(f, p[1:]))

    def residual(p: np.ndarray) -> np.ndarray:
        return w * (model(p) - target)

    lower = np.array([-np.inf, *(lo for lo, _ in limits)])
    upper = np.array([np.inf, *(hi for _, hi in limits)])
    start = np.clip(np.asarray(x0, dtype=np.float64), lower, upper)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        sol = scipy.optimize.least_squares(
            residual, start, method="trf", bounds=(lower, upper), x_scale="jac"
        )
    r = model(sol.x) - target
    dof = max(f.size - sol.x.size, 1)
    s2 = float(np.sum((w * r) ** 2)) / dof
    cov = np.linalg.pinv(sol.jac.T @ sol.jac) * s2
    rms = float(np.sqrt(np.sum(w**2 * r**2) / np.sum(w**2)))
    return _Lsq(sol.x, cov, rms, np.asarray(sol.active_mask) != 0)


def _log_weights(f: np.ndarray) -> np.ndarray:
    """√(log-frequency span of each point): equal weight per octave on any grid."""
    return np.sqrt(np.gradient(np.log(f)))


def _find_peak(f: np.ndarray, m: np.ndarray, sens: float, reference_hz: float) -> int | None:
    above = np.flatnonzero(f > reference_hz)
    if above.size < 3:
        return None
    p = int(above[np.argmax(m[above])])
    if m[p] - sens < RESONANCE_MIN_PEAK_DB or p >= f.size - 1:
        return None
    if np.min(m[p:]) > m[p] - RESONANCE_MIN_PEAK_DB:
        return None
    return p


def _peak_frequency(f: np.ndarray, m: np.ndarray, p: int) -> float:
    """Vertex of the parabola through points p − 1, p, p + 1 in (ln f, dB)."""
    if p <= 0 or p >= f.size - 1:
        return float(f[p])
    x = np.log(f[p - 1 : p + 2])
    y = m[p - 1 : p + 2]
    a, b, _ = np.polyfit(x, y, 2)
    if not a < 0:
        return float(f[p])
    return float(math.exp(min(max(-b / (2.0 * a), x[0]), x[2])))


def _initial_corner(f: np.ndarray, m: np.ndarray, sens: float, reference_hz: float) -> float:
    below = np.flatnonzero(f < reference_hz)
    drop = sens - m[below]
    hit = np.flatnonzero(drop >= 3.0)
    if hit.size:
        return float(f[below[hit[-1]]])
    d = max(float(drop[0]), 0.1)
    return float(f[0] * math.sqrt(10.0 ** (d / 10.0) - 1.0))


def fit_response(
    frequency_hz: np.ndarray,
    magnitude_db: np.ndarray,
    *,
    reference_hz: float = 1000.0,
    orders: tuple[int, ...] = (1, 2),
    fit_range_hz: tuple[float, float] | None = None,
    magnitude_unit: str | None = None,
) -> ResponseFit:
    """Fit sensitivity, low corner (first or second order) and resonance to a response.

    Parameters
    ----------
    frequency_hz, magnitude_db
        The measured magnitude response (any grid; NaN points are ignored).
    reference_hz
        Reference frequency for the sensitivity and the ±1/±3 dB bands, Hz.
    orders
        High-pass orders to try: (1, 2) chooses by residual; (1,) or (2,) forces one.
    fit_range_hz
        (low, high) limits of the points the model is fitted to; default all points, or
        up to ``RESONANCE_FIT_SPAN`` times the peak frequency when a resonance is found.
        The sensitivity and the bands always use all points.
    magnitude_unit
        Reference of the dB values, carried into the result.

    Returns
    -------
    ResponseFit
        Fitted model S + HP_order(fc[, Q]) + RES(fr, Qr) in dB; the high-pass part only
        when the low end rolls off by at least ``CORNER_MIN_DROP_DB``, the resonance only
        when a peak of at least ``RESONANCE_MIN_PEAK_DB`` lies inside the band.

    Examples
    --------
    A sensor of -40 dB re 1 V/Pa with a first-order corner at 20 Hz and a mounted
    resonance at 20 kHz (Q = 20); the model recovers what it was built from:

    >>> f = np.geomspace(5.0, 30000.0, 24 * 13)
    >>> m = (-40.0 + highpass_magnitude_db(f, order=1, natural_hz=20.0)
    ...      + resonance_magnitude_db(f, resonance_hz=20000.0, q=20.0))
    >>> r = fit_response(f, m, magnitude_unit="dB re 1 V/Pa")
    >>> round(r.passband_db, 3), r.highpass.order, round(r.highpass.corner_hz, 3)
    (-40.0, 1, 20.0)
    >>> round(r.resonance.frequency_hz, 1), round(r.resonance.q, 3)
    (20000.0, 20.0)
    >>> round(r.band_3db.low_hz, 1), round(r.residual_rms_db, 6)
    (20.1, 0.0)
    """
    if not orders or any(o not in (1, 2) for o in orders):
        raise InputError(f"orders must be a non-empty choice from (1, 2), got {orders!r}")
    f_all, m_all = _clean(frequency_hz, magnitude_db)
    sens = sensitivity_at(f_all, m_all, reference_hz=reference_hz)
    peak_all = _find_peak(f_all, m_all, sens, reference_hz)
    if fit_range_hz is not None:
        lo, hi = (float(v) for v in fit_range_hz)
        keep = (f_all >= lo) & (f_all <= hi)
    elif peak_all is not None:
        keep = f_all <= f_all[peak_all] * RESONANCE_FIT_SPAN
    else:
        keep = np.ones(f_all.size, dtype=bool)
    f, m = f_all[keep], m_all[keep]
    if f.size < 6:
        raise InputError(
            f"fit_range_hz {fit_range_hz!r} leaves {f.size} points; the model needs at least 6"
        )
    w = _log_weights(f)

    peak = _find_peak(f, m, sens, reference_hz)
    with_res = peak is not None
    res_x0: list[float] = []
    if with_res:
        assert peak is not None
        # ln Q from the peak's height: ln(10^(dB/20)) = dB · ln 10 / 20, at least ln 0.6
        # (no power of ten taken, so any dB values give a finite start).
        res_x0 = [math.log(f[peak]), max((m[peak] - sens) * math.log(10.0) / 20.0, math.log(0.6))]
    rolled_off = bool(sens - m[0] >= CORNER_MIN_DROP_DB)

    # Two regions fitted in turn, each with the other region's model held fixed, so a
    # mismatch of the resonance model near the peak cannot bend the corner (and back):
    # below the reference frequency S + high-pass, above it S' + resonance.
    lower = f <= reference_hz
    upper = f >= reference_hz
    if rolled_off and np.count_nonzero(lower) < 4:
        rolled_off = False
    if with_res and np.count_nonzero(upper) < 4:
        with_res = False
    hp_fits: dict[int, _Lsq] = {}
    res_fit: _Lsq | None = None
    res_x = np.array([sens, *res_x0])
    hp_x = {}
    if rolled_off:
        fc0 = _initial_corner(f, m, sens, reference_hz)
        hp_x = {
            1: np.array([sens, math.log(fc0)]),
            2: np.array([sens, math.log(fc0), math.log(1.0 / math.sqrt(2.0))]),
        }
    order = 0
    for _ in range(3):
        if rolled_off:
            offset = _resonance_part(f[lower], res_x[1:]) if with_res else 0.0
            for o in orders:
                hp_fits[o] = _lsq(
                    f[lower],
                    m[lower] - offset,
                    w[lower],
                    functools.partial(_highpass_part_of_order, o),
                    hp_x[o],
                    _limits(f[lower], with_q=o == 2),
                )
                hp_x[o] = hp_fits[o].params
            if len(hp_fits) == 2 and hp_fits[2].rms_db < ORDER_RESIDUAL_RATIO * hp_fits[1].rms_db:
                order = 2
            else:
                order = orders[0] if len(hp_fits) == 1 else 1
        if with_res:
            offset = _highpass_part(f[upper], order, hp_x[order][1:]) if order else 0.0
            res_fit = _lsq(
                f[upper],
                m[upper] - offset,
                w[upper],
                _resonance_part,
                res_x,
                _limits(f[upper], with_q=True),
            )
            res_x = res_fit.params
        if not (rolled_off and with_res):
            break

    hp_part = _highpass_part(f, order, hp_x[order][1:]) if order else np.zeros(f.size)
    res_part = _resonance_part(f, res_x[1:]) if with_res else np.zeros(f.size)
    if order:
        passband = hp_fits[order]
    else:
        passband = _lsq(
            f[lower | ~upper],
            (m - res_part)[lower | ~upper],
            w[lower | ~upper],
            None,
            np.array([sens]),
        )
    model_db = passband.params[0] + hp_part + res_part
    residual_rms = float(np.sqrt(np.sum(w**2 * (m - model_db) ** 2) / np.sum(w**2)))

    highpass: HighPassFit | None = None
    if order == 1:
        fit1 = hp_fits[1]
        fc = math.exp(fit1.params[1])
        highpass = HighPassFit(
            order=1,
            corner_hz=fc,
            corner_std_hz=fc * _std(fit1, 1),
            natural_hz=fc,
            q=None,
            q_std=None,
            in_band=bool(f[0] <= fc <= f[-1]),
            residual_rms_db=fit1.rms_db,
            other_order_residual_rms_db=hp_fits[2].rms_db if 2 in hp_fits else math.nan,
        )
    elif order == 2:
        fit2 = hp_fits[2]
        f0, q = math.exp(fit2.params[1]), math.exp(fit2.params[2])
        step = 1e-6
        dlnratio_dlnq = (
            math.log(_second_order_corner_ratio(q * math.exp(step)))
            - math.log(_second_order_corner_ratio(q * math.exp(-step)))
        ) / (2 * step)
        g = np.array([1.0, dlnratio_dlnq])
        var_ln_corner = math.nan if fit2.at_limit[1:3].any() else float(g @ fit2.cov[1:3, 1:3] @ g)
        corner = f0 * _second_order_corner_ratio(q)
        highpass = HighPassFit(
            order=2,
            corner_hz=corner,
            corner_std_hz=corner * math.sqrt(max(var_ln_corner, 0.0))
            if math.isfinite(var_ln_corner)
            else math.nan,
            natural_hz=f0,
            q=q,
            q_std=q * _std(fit2, 2),
            in_band=bool(f[0] <= corner <= f[-1]),
            residual_rms_db=fit2.rms_db,
            other_order_residual_rms_db=hp_fits[1].rms_db if 1 in hp_fits else math.nan,
        )
    resonance: ResonanceFit | None = None
    if with_res and res_fit is not None:
        assert peak is not None
        fr, qr = math.exp(res_fit.params[1]), math.exp(res_fit.params[2])
        poor = bool(res_fit.rms_db > RESONANCE_POOR_FIT_DB)
        resonance = ResonanceFit(
            frequency_hz=fr,
            frequency_std_hz=math.nan if poor else fr * _std(res_fit, 1),
            q=qr,
            q_std=math.nan if poor else qr * _std(res_fit, 2),
            peak_hz=_peak_frequency(f, m, peak),
            peak_db=float(m[peak] - sens),
            residual_rms_db=res_fit.rms_db,
            poor_fit=poor,
        )
    return ResponseFit(
        reference_hz=float(reference_hz),
        sensitivity_db=sens,
        passband_db=float(passband.params[0]),
        passband_std_db=_std(passband, 0),
        highpass=highpass,
        resonance=resonance,
        band_1db=band_within(f_all, m_all, tolerance_db=1.0, reference_hz=reference_hz),
        band_3db=band_within(f_all, m_all, tolerance_db=3.0, reference_hz=reference_hz),
        frequency_hz=f,
        model_db=model_db,
        residual_rms_db=residual_rms,
        magnitude_unit=magnitude_unit,
    )


# --------------------------------------------------------------------------------------
# Golden response
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class GoldenDeviation:
    """Measured minus golden response at the golden frequencies inside the measured range.

    Attributes
    ----------
    frequency_hz, deviation_db
        Golden frequencies compared and the deviation there (measured − golden), dB.
    worst_hz, worst_db
        Frequency and signed deviation of the largest |deviation|.
    rms_db
        RMS deviation, dB.
    aligned_at_hz
        Frequency at which both curves were aligned first, or None (absolute).

    Examples
    --------
    >>> f = np.geomspace(10.0, 10000.0, 61)
    >>> d = deviation_from_golden(f, np.where(f > 5000.0, -39.0, -40.0), f[::10],
    ...                           np.full(7, -40.0))
    >>> d.frequency_hz.size, round(d.worst_hz, 1), d.worst_db, round(d.rms_db, 3)
    (7, 10000.0, 1.0, 0.378)
    """

    frequency_hz: np.ndarray
    deviation_db: np.ndarray
    worst_hz: float
    worst_db: float
    rms_db: float
    aligned_at_hz: float | None


def deviation_from_golden(
    frequency_hz: np.ndarray,
    magnitude_db: np.ndarray,
    golden_frequency_hz: np.ndarray,
    golden_magnitude_db: np.ndarray,
    *,
    align_at_hz: float | None = None,
) -> GoldenDeviation:
    """Deviation of a measured response from a golden one, in dB per golden frequency.

    The measured magnitude is interpolated (linearly in log frequency) at each golden
    frequency inside the measured range. With ``align_at_hz`` both curves are first
    shifted to agree at that frequency (a relative comparison of shape, for uncalibrated
    measurements); without it the comparison is absolute.

    Examples
    --------
    A unit 0.5 dB more sensitive than the golden one everywhere: 0.5 dB absolute, nothing
    once aligned at 1 kHz:

    >>> f = np.geomspace(10.0, 10000.0, 31)
    >>> golden = -40.0 + highpass_magnitude_db(f, order=1, natural_hz=20.0)
    >>> deviation_from_golden(f, golden + 0.5, f, golden).worst_db
    0.5
    >>> abs(deviation_from_golden(f, golden + 0.5, f, golden, align_at_hz=1000.0).worst_db)
    0.0
    """
    f, m = _clean(frequency_hz, magnitude_db)
    gf, gm = _clean(golden_frequency_hz, golden_magnitude_db)
    inside = (gf >= f[0]) & (gf <= f[-1])
    if np.count_nonzero(inside) < 1:
        raise InputError(
            f"the golden response ({gf[0]:g}–{gf[-1]:g} Hz) does not overlap the measured "
            f"range ({f[0]:g}–{f[-1]:g} Hz)"
        )
    gf, gm = gf[inside], gm[inside]
    measured = np.interp(np.log(gf), np.log(f), m)
    dev = measured - gm
    if align_at_hz is not None:
        offset = (
            sensitivity_at(f, m, reference_hz=align_at_hz)
            - sensitivity_at(gf, gm, reference_hz=align_at_hz)
            if gf.size >= 3
            else math.nan
        )
        if not math.isfinite(offset):
            raise InputError("need at least 3 golden points to align the curves")
        dev = dev - offset
    worst = int(np.argmax(np.abs(dev)))
    return GoldenDeviation(
        frequency_hz=gf,
        deviation_db=dev,
        worst_hz=float(gf[worst]),
        worst_db=float(dev[worst]),
        rms_db=float(np.sqrt(np.mean(dev**2))),
        aligned_at_hz=None if align_at_hz is None else float(align_at_hz),
    )
