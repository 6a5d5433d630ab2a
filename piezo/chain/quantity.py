"""What a channel measures: the physical quantity, its unit, its level reference.

A piezoelectric sensor turns one mechanical quantity into charge or voltage: sound
pressure (microphones, hydrophones), acceleration (accelerometers), velocity,
displacement, or force (force and impact sensors). A channel may also carry a plain
electrical signal (voltage or charge). Each quantity has one SI unit and one reference
value for levels in decibels, those of ISO 1683:2015 (Table 1) for the mechanical ones:

============  =======  ==========================================
quantity      unit     level reference
============  =======  ==========================================
pressure      Pa       20 µPa in gases, 1 µPa in liquids
acceleration  m/s²     1 µm/s²
velocity      m/s      1 nm/s
displacement  m        1 pm
force         N        1 µN
voltage       V        1 V
charge        C        1 pC (our convention; no standard sets one)
============  =======  ==========================================

The standard acceleration of gravity g = 9.80665 m/s² is exact (3rd CGPM, 1901;
ISO 80000-3:2019), so "mV/g" is an exact form of "mV/(m/s²)".

Sensitivities are read in the trade's forms: ``"12 mV/Pa"``, ``"-38 dB re 1 V/Pa"``,
``"-196 dB re 1 V/µPa"`` (hydrophones), ``"10.2 mV/g"``, ``"1.04 mV/(m/s²)"``,
``"0.5 pC/(m/s²)"``, ``"4.9 pC/g"``, ``"4 pC/N"``, ``"2.2 mV/N"``, ``"100 mV/(mm/s)"``,
``"8 mV/µm"``. :func:`parse_sensitivity_of` returns a :class:`Sensitivity` that knows
its quantity and whether it is a voltage or a charge sensitivity.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from piezo.errors import UnitError

__all__ = [
    "QUANTITIES",
    "STANDARD_GRAVITY_M_PER_S2",
    "Quantity",
    "Sensitivity",
    "compact_sensitivity",
    "format_sensitivity",
    "parse_level_of",
    "parse_sensitivity_of",
    "parse_value_of",
    "quantity_named",
    "with_article",
]

#: Standard acceleration of gravity, exact (3rd CGPM 1901; ISO 80000-3:2019).
STANDARD_GRAVITY_M_PER_S2 = 9.80665


@dataclass(frozen=True)
class Quantity:
    """A measured quantity: its name, SI unit and reference value for levels.

    Attributes
    ----------
    name
        One of ``pressure``, ``acceleration``, ``velocity``, ``displacement``, ``force``,
        ``voltage``, ``charge``.
    unit
        The SI unit symbol (``"Pa"``, ``"m/s²"``, ...).
    reference
        Reference value for levels in dB, in ``unit`` (ISO 1683:2015 for the mechanical
        quantities; in-air pressure here, see :meth:`level_reference`).
    reference_text
        The reference as written in a level's label, e.g. ``"1 µm/s²"``.

    Examples
    --------
    >>> q = quantity_named("acceleration")
    >>> q.unit, q.reference, q.level_label()
    ('m/s²', 1e-06, 'dB re 1 µm/s²')
    """

    name: str
    unit: str
    reference: float
    reference_text: str

    @property
    def mechanical(self) -> bool:
        """True for the quantities a sensor senses (not voltage or charge)."""
        return self.name not in ("voltage", "charge")

    @property
    def weightable(self) -> bool:
        """True when the A and C frequency weightings apply (sound pressure only)."""
        return self.name == "pressure"

    def level_reference(self, *, in_water: bool = False) -> float:
        """Reference value for levels: 1 µPa instead of 20 µPa for pressure in water.

        Examples
        --------
        >>> quantity_named("pressure").level_reference(in_water=True)
        1e-06
        """
        if self.name == "pressure" and in_water:
            return 1e-6
        return self.reference

    @property
    def sensitivity_label(self) -> str:
        """Unit of a voltage sensitivity as a level: ``"dB re 1 V/Pa"``, ``"dB re 1 V/(m/s²)"``.

        Examples
        --------
        >>> quantity_named("acceleration").sensitivity_label
        'dB re 1 V/(m/s²)'
        >>> quantity_named("force").sensitivity_label
        'dB re 1 V/N'
        """
        return f"dB re 1 V/({self.unit})" if "/" in self.unit else f"dB re 1 V/{self.unit}"

    def level_label(self, *, in_water: bool = False) -> str:
        """How levels of this quantity are labelled, e.g. ``"dB re 20 µPa"``."""
        if self.name == "pressure" and in_water:
            return "dB re 1 µPa"
        return f"dB re {self.reference_text}"


#: The quantities, by name (references: ISO 1683:2015, Table 1).
QUANTITIES: dict[str, Quantity] = {
    q.name: q
    for q in (
        Quantity("pressure", "Pa", 20e-6, "20 µPa"),
        Quantity("acceleration", "m/s²", 1e-6, "1 µm/s²"),
        Quantity("velocity", "m/s", 1e-9, "1 nm/s"),
        Quantity("displacement", "m", 1e-12, "1 pm"),
        Quantity("force", "N", 1e-6, "1 µN"),
        Quantity("voltage", "V", 1.0, "1 V"),
        Quantity("charge", "C", 1e-12, "1 pC"),
    )
}


def quantity_named(name: str, *, what: str = "quantity") -> Quantity:
    """The :class:`Quantity` called ``name``; a clear error for any other name.

    Examples
    --------
    >>> quantity_named("force").unit
    'N'
    >>> quantity_named("speed")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: quantity: unknown quantity 'speed'; one of pressure, \
acceleration, velocity, displacement, force, voltage, charge
    """
    q = QUANTITIES.get(str(name).strip().lower())
    if q is None:
        raise UnitError(f"{what}: unknown quantity {name!r}; one of {', '.join(QUANTITIES)}")
    return q


# --- sensitivities -------------------------------------------------------------------

#: Electrical side of a sensitivity: symbol -> (kind, factor to V or C).
_ELECTRICAL = {
    "V": ("V", 1.0),
    "mV": ("V", 1e-3),
    "µV": ("V", 1e-6),
    "uV": ("V", 1e-6),
    "C": ("C", 1.0),
    "nC": ("C", 1e-9),
    "pC": ("C", 1e-12),
    "fC": ("C", 1e-15),
}

#: Mechanical side: unit text (spaces removed) -> (quantity, factor to the SI unit).
_MECHANICAL = {
    "Pa": ("pressure", 1.0),
    "kPa": ("pressure", 1e3),
    "µPa": ("pressure", 1e-6),
    "uPa": ("pressure", 1e-6),
    "g": ("acceleration", STANDARD_GRAVITY_M_PER_S2),
    "m/s²": ("acceleration", 1.0),
    "m/s^2": ("acceleration", 1.0),
    "m/s2": ("acceleration", 1.0),
    "m/s": ("velocity", 1.0),
    "mm/s": ("velocity", 1e-3),
    "m": ("displacement", 1.0),
    "mm": ("displacement", 1e-3),
    "µm": ("displacement", 1e-6),
    "um": ("displacement", 1e-6),
    "nm": ("displacement", 1e-9),
    "N": ("force", 1.0),
    "kN": ("force", 1e3),
    "V": ("voltage", 1.0),
}

#: SI prefixes a mechanical unit may take beyond :data:`_MECHANICAL` (``µm/s²``, ``nm/s``,
#: ``pm``, ``µN``, ``mPa``: the ISO 1683 references among them).
_PREFIX_FACTORS = {"p": 1e-12, "n": 1e-9, "µ": 1e-6, "u": 1e-6, "m": 1e-3, "k": 1e3}
_PREFIXABLE = ("Pa", "m/s²", "m/s^2", "m/s2", "m/s", "m", "N")


def _mechanical_unit(text: str) -> tuple[str, float] | None:
    """(quantity, factor to its SI unit) of a mechanical unit such as ``g`` or ``µm/s²``."""
    unit = text.replace(" ", "").replace("μ", "µ")
    if unit.startswith("(") and unit.endswith(")"):
        unit = unit[1:-1]
    found = _MECHANICAL.get(unit)
    if found is None and len(unit) > 1 and unit[0] in _PREFIX_FACTORS and unit[1:] in _PREFIXABLE:
        name, factor = _MECHANICAL[unit[1:]]
        found = (name, _PREFIX_FACTORS[unit[0]] * factor)
    return found


_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_ELEC = "|".join(sorted((re.escape(k) for k in _ELECTRICAL), key=len, reverse=True))
_LINEAR_RE = re.compile(rf"^({_NUMBER})\s*({_ELEC})\s*/\s*(.+)$")
_LEVEL_RE = re.compile(rf"^({_NUMBER})\s*dB\s*(?:re\s*1\s*)?({_ELEC})\s*/\s*(.+)$")

_ACCEPTED = (
    "'12 mV/Pa', '-38 dB re 1 V/Pa', '-196 dB re 1 V/µPa', '10 mV/g', '1 mV/(m/s²)', "
    "'0.5 pC/(m/s²)', '4 pC/N', '2 mV/N', '100 mV/(mm/s)'"
)


@dataclass(frozen=True)
class Sensitivity:
    """A sensor sensitivity in SI units, with its quantity.

    Attributes
    ----------
    value
        Output per unit of the quantity, in V/unit (``electrical == "V"``) or C/unit
        (``"C"``), the unit being the quantity's SI unit (Pa, m/s², m/s, m, N).
    electrical
        ``"V"`` for a voltage sensitivity, ``"C"`` for a charge sensitivity.
    quantity
        The measured quantity.

    Examples
    --------
    >>> s = parse_sensitivity_of("10 mV/g")
    >>> s.quantity.name, s.electrical, round(s.value, 9)
    ('acceleration', 'V', 0.001019716)
    """

    value: float
    electrical: str
    quantity: Quantity

    def volts_per_unit(self, charge_gain_v_per_c: float | None = None) -> float:
        """The sensitivity in V per SI unit; a charge sensitivity needs the amplifier gain.

        Examples
        --------
        >>> parse_sensitivity_of("4 pC/N").volts_per_unit(1e9)  # 1 mV/pC
        0.004
        """
        if self.electrical == "V":
            return self.value
        if charge_gain_v_per_c is None:
            raise UnitError(
                "a charge sensitivity needs the charge amplifier's gain (V/C) to become a "
                "voltage sensitivity"
            )
        return self.value * charge_gain_v_per_c


def parse_sensitivity_of(
    text: str, *, quantity: str | None = None, what: str = "sensitivity"
) -> Sensitivity:
    """Read a sensitivity in any trade form; its unit tells the quantity.

    Parameters
    ----------
    text
        The sensitivity as written on a data sheet or calibration chart.
    quantity
        When given, the quantity the sensitivity must belong to (a mismatch is refused).
    what
        Name of the input in error messages.

    Examples
    --------
    >>> s = parse_sensitivity_of("-196 dB re 1 V/µPa")
    >>> s.quantity.name, round(s.value * 1e3, 4)   # mV/Pa
    ('pressure', 0.1585)
    >>> parse_sensitivity_of("0.5 pC/(m/s²)").value
    5e-13
    >>> parse_sensitivity_of("12 mV/Pa", quantity="force")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: sensitivity: '12 mV/Pa' is a pressure sensitivity, not force
    """
    t = str(text).strip()
    level = _LEVEL_RE.match(t)
    match = level or _LINEAR_RE.match(t)
    if match is None:
        raise UnitError(f"{what}: cannot read {text!r}; accepted forms: {_ACCEPTED}")
    number = float(match.group(1))
    kind, electrical_factor = _ELECTRICAL[match.group(2)]
    found = _mechanical_unit(match.group(3))
    if found is None or found[0] == "voltage":
        raise UnitError(f"{what}: cannot read the unit of {text!r}; accepted forms: {_ACCEPTED}")
    name, mechanical_factor = found
    ratio = 10.0 ** (number / 20.0) if level else number
    value = ratio * electrical_factor / mechanical_factor
    if not (math.isfinite(value) and value > 0):
        raise UnitError(f"{what}: sensitivity must be positive and finite, got {text!r}")
    q = QUANTITIES[name]
    if quantity is not None and quantity_named(quantity, what=what) != q:
        raise UnitError(f"{what}: {text!r} is {with_article(name)} sensitivity, not {quantity}")
    return Sensitivity(value, kind, q)


_VALUE_RE = re.compile(rf"^({_NUMBER})\s*(.+)$")


def parse_value_of(
    text: str, *, quantity: str | None = None, what: str = "value"
) -> tuple[float, Quantity]:
    """Read a value of a measured quantity (``"10 m/s²"``, ``"1 g"``, ``"2 N"``, ``"1 Pa"``).

    The unit is one of those the sensitivities are written with (``Pa``, ``kPa``,
    ``µPa``, ``g``, ``m/s²``, ``m/s``, ``mm/s``, ``m``, ``mm``, ``µm``, ``nm``, ``N``,
    ``kN``, and the SI units with a prefix p, n, µ, m or k: ``µm/s²``, ``nm/s``, ``pm``,
    ``µN``); ``g`` is the standard acceleration of gravity (ISO 80000-3).

    Parameters
    ----------
    text
        The value with its unit.
    quantity
        When given, the quantity the value must be of (another one is refused).
    what
        Name of the input in error messages.

    Returns
    -------
    tuple
        The value in the quantity's SI unit, and the :class:`Quantity`.

    Examples
    --------
    >>> value, q = parse_value_of("1 g")
    >>> value, q.name, q.unit
    (9.80665, 'acceleration', 'm/s²')
    >>> parse_value_of("10 mm/s", quantity="velocity")[0]
    0.01
    >>> parse_value_of("10 m/s²", quantity="force", what="stimulus.level")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: stimulus.level: '10 m/s²' is an acceleration (m/s²), not a force (N)
    """
    match = _VALUE_RE.match(str(text).strip())
    found = _mechanical_unit(match.group(2)) if match else None
    if match is None or found is None:
        units = ", ".join(k for k in _MECHANICAL if k not in ("uPa", "um", "m/s^2", "m/s2"))
        raise UnitError(f"{what}: cannot read {text!r}; expected a number and one of {units}")
    name, factor = found
    value = float(match.group(1)) * factor
    if not math.isfinite(value):
        raise UnitError(f"{what}: {text!r} is not a finite value")
    q = QUANTITIES[name]
    if quantity is not None:
        wanted = quantity_named(quantity, what=what)
        if wanted != q:
            raise UnitError(
                f"{what}: {text!r} is {_article(name)} {name} ({q.unit}), not "
                f"{_article(wanted.name)} {wanted.name} ({wanted.unit})"
            )
    return value, q


def _article(word: str) -> str:
    return "an" if word[:1] in "aeiou" else "a"


#: Trade form of each quantity's sensitivity: (electrical kind, quantity) -> (text, factor).
_TRADE_FORMS = {
    ("V", "pressure"): ("mV/Pa", 1e3),
    ("C", "pressure"): ("pC/Pa", 1e12),
    ("V", "acceleration"): ("mV/(m/s²)", 1e3),
    ("C", "acceleration"): ("pC/(m/s²)", 1e12),
    ("V", "velocity"): ("mV/(mm/s)", 1.0),
    ("C", "velocity"): ("pC/(mm/s)", 1e9),
    ("V", "displacement"): ("mV/µm", 1e-3),
    ("C", "displacement"): ("pC/µm", 1e6),
    ("V", "force"): ("mV/N", 1e3),
    ("C", "force"): ("pC/N", 1e12),
}


def with_article(word: str) -> str:
    """``word`` after its indefinite article, for messages: "an acceleration", "a force".

    Examples
    --------
    >>> with_article("acceleration"), with_article("pressure")
    ('an acceleration', 'a pressure')
    """
    return f"{'an' if word[:1] in ('a', 'e', 'i', 'o', 'u') else 'a'} {word}"


def format_sensitivity(s: Sensitivity, *, digits: int = 4, in_water: bool = False) -> str:
    """The trade form of a sensitivity, e.g. ``"1.02 mV/(m/s²) (10.00 mV/g)"``.

    A hydrophone's (a voltage sensitivity to pressure, ``in_water``) is a level, as
    hydrophone data sheets and IEC 60565 give it: ``"-196.00 dB re 1 V/µPa"``.

    Examples
    --------
    >>> format_sensitivity(parse_sensitivity_of("10 mV/g"))
    '1.020 mV/(m/s²) (10.00 mV/g)'
    >>> format_sensitivity(parse_sensitivity_of("4 pC/N"))
    '4.000 pC/N'
    >>> format_sensitivity(parse_sensitivity_of("9.99999 mV/N"))  # rounds across a decade
    '10.00 mV/N'
    >>> format_sensitivity(parse_sensitivity_of("-196 dB re 1 V/µPa"), in_water=True)
    '-196.00 dB re 1 V/µPa'
    """
    if in_water and s.quantity.name == "pressure" and s.electrical == "V" and s.value > 0:
        return f"{20.0 * math.log10(s.value) - 120.0:.2f} dB re 1 V/µPa"
    unit, factor = _TRADE_FORMS[(s.electrical, s.quantity.name)]
    text = _keep_zeros(s.value * factor, digits) + f" {unit}"
    if s.quantity.name == "acceleration":
        per_g = s.value * STANDARD_GRAVITY_M_PER_S2 * factor
        text += f" ({_keep_zeros(per_g, digits)} {unit.split('/')[0]}/g)"
    return text


def _keep_zeros(value: float, digits: int) -> str:
    """``value`` to ``digits`` significant digits, trailing zeros kept (``10.00``)."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    # Round first: 9.99999 to 4 digits is 10.00, whose decade sets the decimals.
    rounded = float(f"{value:.{digits}g}")
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(rounded)))))
    return f"{rounded:.{decimals}f}"


def compact_sensitivity(s: Sensitivity, *, digits: int = 5) -> str:
    """A sensitivity in its trade unit with ``digits`` significant digits, as a profile
    stores it (``"8.5 mV/Pa"``, ``"1.0197 mV/(m/s²)"``, ``"4 pC/N"``).

    Examples
    --------
    >>> compact_sensitivity(parse_sensitivity_of("10 mV/g"))
    '1.0197 mV/(m/s²)'
    >>> parse_sensitivity_of(compact_sensitivity(parse_sensitivity_of("8.5 mV/Pa"))).value
    0.0085
    """
    unit, factor = _TRADE_FORMS[(s.electrical, s.quantity.name)]
    return f"{s.value * factor:.{digits}g} {unit}"


_DB_LEVEL_RE = re.compile(rf"^({_NUMBER})\s*(?:dB)?$")
_DB_SPL_RE = re.compile(rf"^({_NUMBER})\s*dB\s*SPL$", re.IGNORECASE)
_DB_RE_RE = re.compile(rf"^({_NUMBER})\s*dB\s*re\s*({_NUMBER})\s*(.+)$")
_RMS_RE = re.compile(r"\s+RMS$", re.IGNORECASE)


def parse_level_of(
    text: str | float, *, reference: float | None = None, what: str = "level"
) -> tuple[float, Quantity | None]:
    """An RMS amount of a mechanical quantity from a level or a value with its unit.

    Forms: ``"94 dB"`` or a bare number (dB re ``reference``, the caller's: its quantity
    is not named), ``"114 dB re 20 µPa"``, ``"140 dB re 1 µm/s²"``, and values in a
    unit, RMS: ``"10 m/s²"``, ``"1 g"``, ``"1 Pa"``, ``"10 N"``,
    ``"10 mm/s"``, ``"10 µm"`` (an optional ``RMS`` after the unit).

    Returns
    -------
    tuple
        The RMS value in the quantity's SI unit, and the quantity the text names (None
        for a level without a reference: it is re ``reference``).

    Raises
    ------
    UnitError
        Text that does not read, a value that is not positive, a bare level without a
        ``reference``.

    Examples
    --------
    >>> value, q = parse_level_of("1 g")
    >>> value, q.name
    (9.80665, 'acceleration')
    >>> value, q = parse_level_of("140 dB re 1 µm/s²")
    >>> round(value, 9), q.name
    (10.0, 'acceleration')
    >>> value, q = parse_level_of("94 dB SPL")  # re 20 µPa, in air
    >>> round(value, 5), q.name
    (1.00237, 'pressure')
    >>> value, q = parse_level_of("94", reference=20e-6)
    >>> round(value, 5), q
    (1.00237, None)
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        text = f"{float(text)!r}"
    t = str(text).strip()
    named: Quantity | None = None
    bare = _DB_LEVEL_RE.match(t)
    relative = _DB_RE_RE.match(t)
    spl = _DB_SPL_RE.match(t)
    if spl is not None:
        # Sound pressure level: re 20 µPa, the reference in air (ISO 1683; in water the
        # reference must be stated, "dB re 1 µPa").
        named = QUANTITIES["pressure"]
        value = named.reference * 10.0 ** (float(spl.group(1)) / 20.0)
    elif bare is not None:
        if reference is None:
            raise UnitError(f"{what}: {text!r} names no reference; give e.g. '94 dB re 20 µPa'")
        value = reference * 10.0 ** (float(bare.group(1)) / 20.0)
    elif relative is not None:
        ref, named = _amount(f"{relative.group(2)} {relative.group(3)}", text, what)
        value = ref * 10.0 ** (float(relative.group(1)) / 20.0)
    else:
        value, named = _amount(_RMS_RE.sub("", t), text, what)
    if not (math.isfinite(value) and value > 0):
        raise UnitError(f"{what}: must be positive and finite, got {text!r}")
    return value, named


_LEVEL_FORMS = (
    "accepted forms: '94 dB' (re the channel's reference), '94 dB SPL', '114 dB re 20 µPa', "
    "'140 dB re 1 µm/s²', '10 m/s²', '1 g', '1 Pa', '10 N', '10 mm/s' (RMS)"
)


def _amount(part: str, text: object, what: str) -> tuple[float, Quantity]:
    """A value of a mechanical quantity (:func:`parse_value_of`) inside a level's text."""
    try:
        value, q = parse_value_of(part, what=what)
    except UnitError:
        raise UnitError(f"{what}: cannot read {text!r}; {_LEVEL_FORMS}") from None
    if not q.mechanical:
        raise UnitError(
            f"{what}: {text!r} is {with_article(q.name)}, not a sound, vibration or force "
            f"level; {_LEVEL_FORMS}"
        )
    if not value > 0:
        raise UnitError(f"{what}: must be positive and finite, got {text!r}")
    return value, q
