"""Parsing and formatting of quantities typed by users.

Text such as ``"47 nF"``, ``"1G"``, ``"-38 dBV/Pa"``, ``"12 pC/Pa"`` or ``"20 dB"`` is
parsed here, once, at the edge of the program; the analysis core only sees floats in SI
units whose names carry the unit (``capacitance_f``, ``sensitivity_v_per_pa``).

SI prefixes follow the SI Brochure (BIPM, 9th edition, 2019, table 7); decibel forms
follow IEC 60027-3 (field quantities: 20 lg of the amplitude ratio).
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Sequence

from piezo.errors import UnitError

__all__ = [
    "ACCEPTED_UNITS",
    "db_to_ratio",
    "format_quantity",
    "format_uncertain",
    "parse_charge_gain",
    "parse_duration",
    "parse_frequency_list",
    "parse_frequency_range",
    "parse_gain",
    "parse_quantity",
    "parse_sensitivity",
    "ratio_to_db",
    "resolution_decimals",
]

#: SI prefix symbol -> power of ten. ``u`` stands for micro where µ is hard to type.
PREFIXES: dict[str, int] = {
    "f": -15,
    "p": -12,
    "n": -9,
    "u": -6,
    "µ": -6,
    "μ": -6,
    "m": -3,
    "": 0,
    "k": 3,
    "K": 3,
    "M": 6,
    "G": 9,
    "T": 12,
}

#: Canonical unit -> spellings accepted for it (case-sensitive after the prefix).
ACCEPTED_UNITS: dict[str, tuple[str, ...]] = {
    "F": ("F",),
    "Ohm": ("Ohm", "ohm", "Ω", "R", "ohms", "Ohms"),
    "V": ("V",),
    "A": ("A",),
    "S": ("S",),
    "C": ("C",),
    "Hz": ("Hz", "hz"),
    "s": ("s",),
    "m": ("m",),
    "Pa": ("Pa",),
    "F/m": ("F/m",),
    "V/Pa": ("V/Pa",),
    "C/Pa": ("C/Pa",),
    "V/C": ("V/C",),
    "V/V": ("V/V",),
    "V/sqrtHz": ("V/sqrtHz", "V/√Hz", "V/rtHz", "V/sqrt(Hz)"),
    "A/sqrtHz": ("A/sqrtHz", "A/√Hz", "A/rtHz", "A/sqrt(Hz)"),
    "K": ("K",),
}

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_NUMBER_RE = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$")
# Engineering notation with the prefix as decimal mark: 4k7, 2M2, 4n7.
_INFIX_RE = re.compile(r"^\s*([-+]?\d+)([fpnuµμmkKMGT])(\d+)\s*(.*?)\s*$")


def _split_number(text: str, what: str) -> tuple[float, str]:
    """Split ``text`` into its leading number and the unit text after it."""
    if not isinstance(text, str):
        raise UnitError(f"{what}: expected text, got {text!r}")
    m = _INFIX_RE.match(text)
    if m:
        value = float(f"{m.group(1)}.{m.group(3)}") * 10.0 ** PREFIXES[m.group(2)]
        return value, m.group(4)
    m = _NUMBER_RE.match(text)
    if not m:
        raise UnitError(f"{what}: {text!r} does not start with a number")
    value = float(m.group(1))
    if not math.isfinite(value):
        raise UnitError(f"{what}: {text!r} is not a finite number")
    return value, m.group(2)


def _unit_scale(unit_text: str, unit: str) -> float | None:
    """Return the factor that turns ``unit_text`` (prefix + spelling) into ``unit``."""
    spellings = ACCEPTED_UNITS[unit]
    compact = unit_text.replace(" ", "")
    if compact == "" or compact in spellings:
        return 1.0
    for spelling in spellings:
        if compact.endswith(spelling):
            prefix = compact[: -len(spelling)]
            if prefix in PREFIXES:
                return 10.0 ** PREFIXES[prefix]
    # Bare prefix: engineering notation such as "47n" or "1G". Checked last, so that a
    # unit spelled like a prefix ("5 m" of cable, "300 K") keeps its meaning.
    if compact in PREFIXES:
        return 10.0 ** PREFIXES[compact]
    return None


def _accepted_text(unit: str) -> str:
    spellings = ", ".join(ACCEPTED_UNITS[unit])
    return f"a number with an optional SI prefix (f p n u m k M G T) and unit {spellings}"


def parse_quantity(text: str | float | int, unit: str, *, what: str = "value") -> float:
    """Parse a quantity and return it in the SI unit ``unit``.

    Parameters
    ----------
    text
        User text such as ``"47 nF"``, ``"47n"``, ``"4k7"``, ``"1 GOhm"``, ``"2.5 V"``.
        A plain number (int or float) is taken as already in ``unit``.
    unit
        The expected unit, a key of :data:`ACCEPTED_UNITS`.
    what
        Name of the option or key, used in error messages.

    Returns
    -------
    float
        The value in ``unit`` without prefix (farads, ohms, volts ...).

    Raises
    ------
    UnitError
        If the text is not a number followed by a prefix and an accepted spelling of
        ``unit``. The message lists what is accepted.

    Examples
    --------
    >>> parse_quantity("47 nF", "F")
    4.7e-08
    >>> parse_quantity("4k7", "Ohm")
    4700.0
    """
    if unit not in ACCEPTED_UNITS:
        raise ValueError(f"unknown canonical unit {unit!r}")
    if isinstance(text, bool):
        raise UnitError(f"{what}: expected a quantity, got {text!r}")
    if isinstance(text, int | float):
        if not math.isfinite(float(text)):
            raise UnitError(f"{what}: {text!r} is not a finite number")
        return float(text)
    value, rest = _split_number(text, what)
    scale = _unit_scale(rest, unit)
    if scale is None:
        raise UnitError(f"{what}: unknown unit in {text!r}; expected {_accepted_text(unit)}")
    return value * scale


def ratio_to_db(ratio: float) -> float:
    """Amplitude ratio to decibels, 20 lg(ratio) (IEC 60027-3 field quantity).

    Examples
    --------
    A tenfold amplitude is 20 dB; doubling is about 6.02 dB.

    >>> ratio_to_db(10.0)
    20.0
    >>> round(ratio_to_db(2.0), 2)
    6.02
    """
    return 20.0 * math.log10(ratio)


def db_to_ratio(level_db: float) -> float:
    """Decibels to amplitude ratio, 10^(dB/20).

    Examples
    --------
    >>> db_to_ratio(20.0)
    10.0
    >>> round(db_to_ratio(-6.0), 4)
    0.5012
    """
    return 10.0 ** (level_db / 20.0)


_DB_RE = re.compile(r"^\s*(" + _NUMBER + r")\s*dB\s*(.*?)\s*$")


def parse_gain(text: str | float | int, *, what: str = "gain") -> float:
    """Parse a voltage gain and return it as a linear ratio (V/V).

    Accepts ``"20 dB"``, ``"-6dB"``, ``"10"``, ``"10 V/V"``, ``"x10"``. A plain number is a
    linear ratio. The gain must be positive and finite.

    Examples
    --------
    >>> parse_gain("20 dB"), parse_gain("x10"), parse_gain(10)
    (10.0, 10.0, 10.0)
    >>> round(parse_gain("-6dB"), 4)
    0.5012
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        ratio = float(text)
    else:
        if not isinstance(text, str):
            raise UnitError(f"{what}: expected a gain, got {text!r}")
        t = text.strip()
        m = _DB_RE.match(t)
        if m and m.group(2) == "":
            ratio = db_to_ratio(float(m.group(1)))
        else:
            if t.lower().startswith("x"):
                t = t[1:]
            try:
                ratio = parse_quantity(t, "V/V", what=what)
            except UnitError:
                raise UnitError(
                    f"{what}: cannot read gain {text!r}; expected e.g. '20 dB', '10', "
                    "'10 V/V' or 'x10'"
                ) from None
    if not math.isfinite(ratio) or ratio <= 0:
        raise UnitError(f"{what}: gain must be positive, got {text!r}")
    return ratio


def parse_decibels(
    text: str | float | int, *, what: str = "level difference", positive: bool = False
) -> float:
    """Parse a level difference in decibels (``"0.25 dB"``, ``"20dB"`` or a plain number).

    Not negative; with ``positive`` it must exceed zero.

    Examples
    --------
    >>> parse_decibels("0.25 dB"), parse_decibels("20dB"), parse_decibels(3)
    (0.25, 20.0, 3.0)
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
    elif isinstance(text, str):
        m = _DB_RE.match(text)
        number = m.group(1) if m and m.group(2) == "" else text.strip()
        try:
            value = float(number)
        except ValueError:
            raise UnitError(
                f"{what}: expected a level difference in dB such as '0.25 dB', got {text!r}"
            ) from None
    else:
        raise UnitError(f"{what}: expected a level difference in dB, got {text!r}")
    if not math.isfinite(value) or value < 0 or (positive and value == 0):
        raise UnitError(
            f"{what}: must be {'positive' if positive else 'not negative'}, got {text!r}"
        )
    return value


def parse_charge_gain(text: str | float, *, what: str = "charge_gain") -> float:
    """Parse a charge-amplifier gain (``"1 mV/pC"``) and return volts per coulomb.

    Examples
    --------
    1 mV/pC is 1e-3 V per 1e-12 C:

    >>> parse_charge_gain("1 mV/pC")
    1000000000.0
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
    else:
        value = _parse_ratio(str(text), "V", "C", what)
    if not math.isfinite(value) or value <= 0:
        raise UnitError(f"{what}: charge gain must be positive, got {text!r}")
    return value


def _parse_ratio(text: str, num: str, den: str, what: str) -> float:
    """Parse ``<number> <prefix><num>/<prefix><den>`` such as ``12 mV/pC``."""
    value, rest = _split_number(text, what)
    compact = rest.replace(" ", "")
    if "/" not in compact:
        raise UnitError(f"{what}: {text!r} needs a unit of the form {num}/{den}")
    top, bottom = compact.split("/", 1)
    top_scale = _prefixed(top, num)
    bottom_scale = _prefixed(bottom, den)
    if top_scale is None or bottom_scale is None:
        raise UnitError(
            f"{what}: unknown unit in {text!r}; expected {num}/{den} with SI prefixes, "
            f"e.g. '1 m{num}/p{den}'"
        )
    return value * top_scale / bottom_scale


def _prefixed(text: str, base: str) -> float | None:
    if not text.endswith(base):
        return None
    prefix = text[: -len(base)]
    if prefix not in PREFIXES:
        return None
    return 10.0 ** PREFIXES[prefix]


#: Reference of a sensitivity level -> V/Pa of 0 dB. Hydrophone data sheets give
#: dB re 1 V/µPa (ISO 1683 reference for liquids): 0 dB re 1 V/µPa is 1e6 V/Pa.
_LEVEL_SENSITIVITY_REFS = {"V/Pa": 1.0, "V": 1.0, "V/uPa": 1e6}


def parse_sensitivity(
    text: str | float,
    *,
    charge_gain_v_per_c: float | None = None,
    what: str = "sensitivity",
    charge_gain_name: str = "charge_gain_v_per_c",
) -> float:
    """Parse a sensor sensitivity and return it in volts per pascal.

    Accepted forms:

    - voltage sensitivity ``"20 mV/Pa"``, ``"0.02 V/Pa"``;
    - level form ``"-34 dBV/Pa"`` (dB re 1 V/Pa), or ``"-196 dBV/uPa"`` (dB re 1 V/µPa, as
      hydrophone data sheets state it);
    - charge sensitivity ``"12 pC/Pa"``, which needs ``charge_gain_v_per_c`` (the charge
      amplifier's gain, e.g. 1 mV/pC = 1e9 V/C) to become a voltage.

    A plain number is taken as V/Pa. The result must be positive.

    Examples
    --------
    >>> parse_sensitivity("20 mV/Pa")
    0.02
    >>> round(parse_sensitivity("-34 dBV/Pa") * 1e3, 2)  # mV/Pa
    19.95
    >>> parse_sensitivity("12 pC/Pa", charge_gain_v_per_c=1e9)  # with 1 mV/pC
    0.012
    >>> parse_sensitivity("12 pC/Pa")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: sensitivity: '12 pC/Pa' is a charge sensitivity; ...
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
    else:
        t = str(text).strip()
        m = _DB_RE.match(t)
        if m:
            ref = m.group(2).replace(" ", "").replace("re1", "").replace("µ", "u")
            if ref not in _LEVEL_SENSITIVITY_REFS:
                raise UnitError(
                    f"{what}: {text!r}: a level sensitivity must be in dBV/Pa (dB re 1 V/Pa) "
                    "or dBV/uPa (dB re 1 V/µPa, hydrophones)"
                )
            value = db_to_ratio(float(m.group(1))) * _LEVEL_SENSITIVITY_REFS[ref]
        elif re.search(r"C\s*/\s*[a-zA-Zµμ]*Pa\s*$", t):
            charge = _parse_ratio(t, "C", "Pa", what)
            if charge_gain_v_per_c is None:
                raise UnitError(
                    f"{what}: {text!r} is a charge sensitivity; give the charge amplifier's "
                    f"gain too ({charge_gain_name}, e.g. '1 mV/pC')"
                )
            value = charge * charge_gain_v_per_c
        else:
            try:
                value = _parse_ratio(t, "V", "Pa", what)
            except UnitError:
                raise UnitError(
                    f"{what}: cannot read sensitivity {text!r}; accepted forms: "
                    f"'20 mV/Pa', '-34 dBV/Pa', '12 pC/Pa' (with {charge_gain_name})"
                ) from None
    if not math.isfinite(value) or value <= 0:
        raise UnitError(f"{what}: sensitivity must be positive, got {text!r}")
    return value


_MINUTES_HOURS_RE = re.compile(r"^\s*(" + _NUMBER + r")\s*(min|h)\s*$")


def parse_frequency(text: str | float, what: str = "frequency") -> float:
    """A finite, positive frequency from user text such as ``"1Hz"`` or ``"2.5 kHz"``.

    Examples
    --------
    >>> parse_frequency("2.5 kHz", "--resolution"), parse_frequency("1Hz", "--resolution")
    (2500.0, 1.0)
    >>> parse_frequency("0 Hz", "--fit-from")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: --fit-from must be a positive frequency, got '0 Hz'
    """
    value = parse_quantity(text, "Hz", what=what)
    if not (math.isfinite(value) and value > 0):
        raise UnitError(f"{what} must be a positive frequency, got {text!r}")
    return value


def parse_duration(text: str | float, *, what: str = "duration") -> float:
    """Parse a duration (``"1s"``, ``"125 ms"``, ``"2 min"``, ``"1 h"``) in seconds.

    Examples
    --------
    >>> parse_duration("125 ms"), parse_duration("2 min"), parse_duration("1 h")
    (0.125, 120.0, 3600.0)
    """
    m = _MINUTES_HOURS_RE.match(text) if isinstance(text, str) else None
    if m:
        value = float(m.group(1)) * (60.0 if m.group(2) == "min" else 3600.0)
    else:
        value = parse_quantity(text, "s", what=what)
    if value <= 0:
        raise UnitError(f"{what}: must be positive, got {text!r}")
    return value


def parse_frequency_list(text: str, *, what: str = "frequencies") -> list[float]:
    """Parse a comma-separated list of frequencies (``"10Hz,100 Hz,1k"``) in hertz.

    Examples
    --------
    >>> parse_frequency_list("10Hz,100 Hz,1k")
    [10.0, 100.0, 1000.0]
    """
    parts = [p for p in (s.strip() for s in str(text).split(",")) if p]
    if not parts:
        raise UnitError(f"{what}: expected a comma-separated list of frequencies")
    return [parse_quantity(p, "Hz", what=what) for p in parts]


#: Separators of a frequency range's two ends: "..", "–" (en dash), ":" or "to".
_RANGE_SPLIT_RE = re.compile(r"\s*(?:\.\.|–|:)\s*|\s+to\s+")


def parse_frequency_range(
    text: str | Sequence[str | float],
    *,
    what: str = "frequency range",
    positive: bool = False,
) -> tuple[float, float]:
    """A frequency range (low, high) in hertz, as data sheets state one.

    Text ``"LOW .. HIGH"`` (or ``LOW to HIGH``, ``LOW – HIGH``, ``LOW:HIGH``), each end a
    frequency as :func:`parse_frequency` reads it, or a pair ``[LOW, HIGH]`` of such
    texts or numbers in hertz. The low end may be 0 (or ``"DC"``), unless ``positive``
    (a band-pass or a fit band, whose low end must lie above 0 Hz); the high end must lie
    above the low end. Every frequency range or band a user gives is read here.

    Examples
    --------
    >>> parse_frequency_range("0.5 Hz .. 10 kHz"), parse_frequency_range("20Hz:20kHz")
    ((0.5, 10000.0), (20.0, 20000.0))
    >>> parse_frequency_range(["DC", "4 kHz"]), parse_frequency_range([1, 8000])
    ((0.0, 4000.0), (1.0, 8000.0))
    >>> parse_frequency_range("10 kHz .. 1 Hz", what="range")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: range: the low end must lie below the high end, got '10 kHz .. 1 Hz'
    >>> parse_frequency_range("0 Hz:1 kHz", what="--band", positive=True)
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: --band: the low end must lie above 0 Hz, got '0 Hz:1 kHz'
    """
    if isinstance(text, str):
        parts: list[str | float] = [p for p in _RANGE_SPLIT_RE.split(text.strip()) if p]
    elif isinstance(text, list | tuple):
        parts = list(text)
    else:
        parts = []
    if len(parts) != 2:
        raise UnitError(
            f"{what} must look like 'LOW .. HIGH' (or 'LOW:HIGH'), e.g. '0.5 Hz .. 10 kHz'; "
            f"got {text!r}"
        )
    low_text, high_text = parts
    if isinstance(low_text, str) and low_text.strip().upper() == "DC":
        low = 0.0
    else:
        low = parse_quantity(low_text, "Hz", what=f"{what} (low end)")
        if not low >= 0:
            raise UnitError(f"{what}: the low end must be 0 Hz or above, got {low_text!r}")
    if positive and not low > 0:
        raise UnitError(f"{what}: the low end must lie above 0 Hz, got {text!r}")
    high = parse_frequency(high_text, f"{what} (high end)")
    if not low < high:
        raise UnitError(f"{what}: the low end must lie below the high end, got {text!r}")
    return low, high


#: SI prefixes of multiples (kilo and above).
_MULTIPLES = frozenset("kMGT")


def _engineering(value: float) -> tuple[float, str]:
    if value == 0 or not math.isfinite(value):
        return value, ""
    exponent = int(math.floor(math.log10(abs(value)) / 3.0) * 3)
    exponent = max(-15, min(12, exponent))
    symbol = {
        -15: "f",
        -12: "p",
        -9: "n",
        -6: "µ",
        -3: "m",
        0: "",
        3: "k",
        6: "M",
        9: "G",
        12: "T",
    }[exponent]
    return value / 10.0**exponent, symbol


def squared_unit(unit: str, *, caret: bool = True) -> str:
    """The square of ``unit`` as outputs write it: ``Pa^2``, ``(m/s²)^2`` (JSON, CSV) or
    with a superscript, ``(m/s²)²`` (terminal); a compound unit is put in parentheses so
    the square applies to all of it.

    Examples
    --------
    >>> squared_unit("Pa"), squared_unit("m/s²"), squared_unit("m/s²", caret=False)
    ('Pa^2', '(m/s²)^2', '(m/s²)²')
    """
    base = f"({unit})" if ("/" in unit or "²" in unit or " " in unit) else unit
    return base + ("^2" if caret else "²")


def format_quantity(value: float, unit: str, *, digits: int = 4) -> str:
    """Format ``value`` (in SI ``unit``) with an SI prefix and ``digits`` significant digits.

    ``format_quantity(4.7e-8, "F")`` gives ``"47 nF"``; the result parses back with
    :func:`parse_quantity` to the value rounded to ``digits`` significant digits.

    Examples
    --------
    >>> format_quantity(4.7e-8, "F")
    '47 nF'
    >>> format_quantity(0.0123456, "V", digits=3)
    '12.3 mV'
    >>> parse_quantity(format_quantity(1e9, "Ohm"), "Ohm")
    1000000000.0
    >>> format_quantity(1961.33, "m/s²"), format_quantity(0.0123, "m/s")
    ('1961 m/s²', '12.3 mm/s')
    """
    if value != 0 and math.isfinite(value):
        value = float(f"{value:.{digits}g}")
    mantissa, symbol = _engineering(value)
    if symbol in _MULTIPLES and ("/" in unit or unit == "m"):
        # Lengths and compound units take no multiple prefix in the trade: 1961 m/s²
        # (not 1.961 km/s²), 25 m/s; sub-multiples stay (12 mm/s, 3.2 µm).
        mantissa, symbol = value, ""
        text = f"{mantissa:.{digits}g}" if abs(mantissa) < 10**digits else f"{mantissa:.0f}"
    else:
        text = f"{mantissa:.{digits}g}"
    return f"{text} {symbol}{unit}"


def format_uncertain(
    value: float,
    standard_uncertainty: float | None,
    unit: str = "",
    *,
    coverage_factor: float = 2.0,
    si_prefix: bool = False,
) -> str:
    """A value with its uncertainty, rounded together, with the coverage stated.

    Follows the GUM (JCGM 100:2008): the uncertainty is given to two significant digits
    and the value rounded to the same decimal place (7.2.6); an expanded uncertainty
    U = k·u is written ``value ± U`` with k stated (7.2.4), a standard uncertainty
    (``coverage_factor=1``) as ``value (u = …)``, never with ``±``, which readers take
    for an interval of high coverage (7.2.2). Every printed uncertainty goes through
    this function.

    Parameters
    ----------
    value
        The estimate.
    standard_uncertainty
        Its standard uncertainty u (1σ), in the unit of ``value``; None or NaN when not
        determined (the value is then printed to 5 significant digits and says so).
    unit
        Unit symbol appended to value and uncertainty ("" for a pure number).
    coverage_factor
        k of the printed expanded uncertainty; 1 prints the standard uncertainty.
    si_prefix
        Scale value and uncertainty by the SI prefix that suits the value
        (``2.15e-9 F`` is printed in nF).

    Examples
    --------
    >>> format_uncertain(234.1, 0.0033, "Hz")
    '234.1000 Hz ± 0.0066 Hz (k = 2)'
    >>> format_uncertain(7904.0, 155.5, "Hz")
    '7900 Hz ± 310 Hz (k = 2)'
    >>> format_uncertain(7.99799, 0.0029, coverage_factor=1)
    '7.9980 (u = 0.0029)'
    >>> format_uncertain(6200.0, None, "Hz")
    '6200 Hz (uncertainty not determined)'
    >>> format_uncertain(6200.0, 1e-13, "Hz")
    '6200.00000 Hz (uncertainty below 1 ppb)'
    >>> format_uncertain(2.1516e-9, 4.05e-14, "F", si_prefix=True)
    '2.15160 nF ± 0.00008 nF (k = 2)'
    """
    if not (isinstance(coverage_factor, (int, float)) and coverage_factor >= 1):
        raise UnitError(f"coverage_factor must be at least 1, got {coverage_factor!r}")
    if si_prefix and unit and math.isfinite(value) and value != 0:
        scaled, symbol = _engineering(value)
        factor = value / scaled
        if standard_uncertainty is not None:
            standard_uncertainty = float(standard_uncertainty) / factor
        value, unit = scaled, symbol + unit
    space = f" {unit}" if unit else ""
    if not math.isfinite(value):
        return f"{value}{space}"
    u = None if standard_uncertainty is None else float(standard_uncertainty)
    if u is None or not math.isfinite(u) or u < 0:
        return f"{value:.5g}{space} (uncertainty not determined)"
    shown = coverage_factor * u
    if shown <= 1e-9 * abs(value) or shown == 0:
        return f"{_fixed(value, 8 - _exponent(value))}{space} (uncertainty below 1 ppb)"
    decimals = resolution_decimals(shown)
    shown_text = _fixed(shown, decimals)
    if float(shown_text) >= 10.0 ** (2 - decimals):
        decimals -= 1  # rounding carried into a third digit (e.g. 99.7 → 100)
        shown_text = _fixed(shown, decimals)
    value_text = _fixed(value, decimals)
    if coverage_factor == 1:
        return f"{value_text}{space} (u = {shown_text}{space})"
    return f"{value_text}{space} ± {shown_text}{space} (k = {coverage_factor:g})"


def resolution_decimals(uncertainty: float, digits: int = 2) -> int:
    """Decimal places that keep ``digits`` significant digits of ``uncertainty``.

    The place to which a value known to ± ``uncertainty`` is rounded (GUM, JCGM
    100:2008, 7.2.6); negative means tens, hundreds ….

    Examples
    --------
    >>> resolution_decimals(0.0123), resolution_decimals(1.7), resolution_decimals(311.0)
    (3, 1, -1)
    """
    if not (math.isfinite(uncertainty) and uncertainty > 0):
        raise UnitError(f"uncertainty must be a positive number, got {uncertainty!r}")
    return digits - 1 - _exponent(uncertainty)


def _exponent(x: float) -> int:
    """Decimal exponent of |x| (0 for 0)."""
    return int(math.floor(math.log10(abs(x)))) if x else 0


def _fixed(x: float, decimals: int) -> str:
    """``x`` rounded to ``decimals`` places (negative: to tens, hundreds …)."""
    if decimals >= 0:
        return f"{x:.{decimals}f}"
    step = 10.0**-decimals
    return f"{round(x / step) * step:.0f}"


def parse_many(items: Iterable[str], unit: str, *, what: str = "value") -> list[float]:
    """Parse each text of ``items`` with :func:`parse_quantity`.

    Examples
    --------
    >>> [f"{c:.3g}" for c in parse_many(["47n", "1 uF"], "F")]
    ['4.7e-08', '1e-06']
    """
    return [parse_quantity(t, unit, what=what) for t in items]
