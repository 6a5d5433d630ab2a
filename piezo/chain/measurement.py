"""The measurement chain: from raw samples to volts and physical units.

A recording's samples pass, in the real world, through the sensor (sensitivity, V per unit
of the measured quantity), an amplifier (gain, V/V) and an ADC (full scale, volts at
digital full scale). Undoing the chain gives, per sample::

    volts_at_sensor = raw * full_scale_v / gain          (PCM files: raw is a fraction of FS)
    volts_at_sensor = raw / gain                         (CSV: raw is volts at the ADC)
    value           = volts_at_sensor / sensitivity_v_per_unit

The measured quantity (:mod:`piezo.chain.quantity`: pressure in Pa, acceleration in m/s²,
velocity, displacement, force, charge) follows from the profile's ``quantity`` key or the
sensitivity's unit (``"10 mV/g"`` is an acceleration sensitivity); the two must agree.
Without a sensitivity the chain stops at volts, and levels are in dB re 1 V.

Settings come, lowest priority first, from the defaults, a sidecar profile ``NAME.toml``
next to ``NAME.wav``, a profile file given explicitly, and explicit values. Each value
remembers where it came from (:class:`Provenance`), for reports.

Level references are those of ISO 1683:2015: 20 µPa in gases, 1 µPa in liquids,
1 µm/s², 1 nm/s, 1 pm, 1 µN.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from piezo.chain.curve import CurveCorrection, ResponseCurve, parse_response_curve
from piezo.chain.integrate import Integrator, integrated_quantity
from piezo.chain.quantity import (
    QUANTITIES,
    Quantity,
    Sensitivity,
    compact_sensitivity,
    format_sensitivity,
    parse_sensitivity_of,
    quantity_named,
    with_article,
)
from piezo.chain.units import (
    parse_charge_gain,
    parse_frequency_range,
    parse_gain,
    parse_quantity,
    parse_sensitivity,
    ratio_to_db,
)
from piezo.errors import InputError, SpecError, UnitError
from piezo.io.reader import BLOCK_FRAMES, Recording
from piezo.io.text import parse_toml, read_text, read_toml
from piezo.io.toml import toml_value
from piezo.validate import physical_value

__all__ = [
    "CHANNEL_SETTINGS",
    "REFERENCE_AIR_PA",
    "REFERENCE_WATER_PA",
    "CalibratedSource",
    "Chain",
    "ChainSettings",
    "SensorProfile",
    "load_profile",
    "load_response_curve",
    "parse_chain_sensitivity",
    "profile_for_sensor",
    "profile_paths",
    "profile_with_sensitivity",
    "resolve_chain",
    "sidecar_path",
]

#: Reference sound pressure in gases, ISO 1683:2015.
REFERENCE_AIR_PA = 20e-6
#: Reference sound pressure in liquids, ISO 1683:2015.
REFERENCE_WATER_PA = 1e-6


@dataclass(frozen=True)
class Chain:
    """A resolved measurement chain, all values in SI units.

    Attributes
    ----------
    full_scale_v
        Volts at digital full scale of the ADC (PCM files only).
    gain
        Voltage gain between sensor and ADC, V/V.
    sensitivity_v_per_unit
        Sensor sensitivity in V per SI unit of ``quantity`` (V/Pa, V/(m/s²), V/N ...; for
        ``"charge"`` the charge amplifier's gain in V/C), or None for an uncalibrated
        (volts) chain.
    reference_pa
        Reference pressure for levels of sound pressure (20 µPa in air, 1 µPa in water).
        Other quantities use their ISO 1683 reference.
    quantity
        What the sensor measures: ``"pressure"``, ``"acceleration"``, ``"velocity"``,
        ``"displacement"``, ``"force"``, ``"voltage"`` or ``"charge"``.
    response_curve
        The sensor's frequency-dependent sensitivity relative to
        ``sensitivity_v_per_unit`` (:mod:`piezo.chain.curve`), undone in
        :meth:`CalibratedSource.blocks`; it describes the sensor only (gain and full
        scale stay here). Compared by ``response_curve_file``.
    response_curve_file
        Where the curve was read from.
    integrations
        0, 1 or 2: the values are integrated that many times after calibration
        (acceleration to velocity to displacement, :mod:`piezo.chain.integrate`).
    frequency_range_hz
        The sensor's usable frequency range (low, high) as its data sheet states it
        (profile key ``frequency_range``), or None.
    charge_gain_v_per_c
        Gain of the charge amplifier in front of the ADC (``[chain] charge_gain`` or
        ``--charge-gain``), V/C, or None when none is stated; a charge sensitivity is
        already folded into ``sensitivity_v_per_unit`` with it.

    Examples
    --------
    >>> c = Chain(gain=10.0, sensitivity_v_per_unit=10e-3 / 9.80665, quantity="acceleration")
    >>> c.unit, c.level_unit, c.sensitivity_text
    ('m/s²', 'dB re 1 µm/s²', '1.020 mV/(m/s²) (10.00 mV/g)')
    >>> Chain().unit, Chain().level_unit    # no sensitivity: volts
    ('V', 'dB re 1 V')
    """

    full_scale_v: float = 1.0
    gain: float = 1.0
    sensitivity_v_per_unit: float | None = None
    reference_pa: float = REFERENCE_AIR_PA
    quantity: str = "pressure"
    response_curve: ResponseCurve | None = field(default=None, compare=False, repr=False)
    response_curve_file: str | None = None
    integrations: int = 0
    frequency_range_hz: tuple[float, float] | None = None
    charge_gain_v_per_c: float | None = None

    def __post_init__(self) -> None:
        for name in ("full_scale_v", "gain", "reference_pa", "sensitivity_v_per_unit"):
            value = getattr(self, name)
            if value is not None:
                physical_value(value, what=name)
        try:
            quantity_named(self.quantity)
        except UnitError as exc:
            raise InputError(exc.message) from None
        if self.frequency_range_hz is not None:
            parse_frequency_range(list(self.frequency_range_hz), what="frequency_range_hz")
        if self.quantity == "voltage" and self.sensitivity_v_per_unit is not None:
            raise InputError(
                "a channel that measures voltage takes no sensitivity (its values are volts)"
            )
        if self.integrations:
            if not self.calibrated:
                raise InputError(
                    "integrate: a channel without a sensitivity is in volts; give the "
                    "acceleration or velocity sensitivity"
                )
            integrated_quantity(self.quantity, self.integrations)

    @property
    def calibrated(self) -> bool:
        """True when samples are converted to the quantity's unit (not volts)."""
        return self.sensitivity_v_per_unit is not None

    @property
    def measured(self) -> Quantity:
        """The quantity of the values: ``quantity`` (integrated ``integrations`` times) when
        calibrated, else voltage."""
        if not self.calibrated:
            return QUANTITIES["voltage"]
        return QUANTITIES[integrated_quantity(self.quantity, self.integrations)]

    @property
    def in_water(self) -> bool:
        """True for a sound-pressure chain whose levels are re 1 µPa (ISO 1683: liquids).

        Examples
        --------
        >>> Chain(reference_pa=REFERENCE_WATER_PA).in_water, Chain().in_water
        (True, False)
        """
        return self.quantity == "pressure" and self.reference_pa == REFERENCE_WATER_PA

    @property
    def sensitivity_v_per_pa(self) -> float | None:
        """The sensitivity in V/Pa for a sound-pressure chain, else None."""
        return self.sensitivity_v_per_unit if self.quantity == "pressure" else None

    @property
    def unit(self) -> str:
        """Unit of the values: ``"Pa"``, ``"m/s²"``, ``"N"`` ... or ``"V"`` uncalibrated."""
        return self.measured.unit

    @property
    def reference(self) -> float:
        """Reference value for levels in dB, in :attr:`unit` (ISO 1683; 1 V uncalibrated)."""
        measured = self.measured
        return self.reference_pa if measured.name == "pressure" else measured.reference

    @property
    def level_unit(self) -> str:
        """How levels are labelled, e.g. ``"dB re 20 µPa"``, ``"dB re 1 µm/s²"``."""
        measured = self.measured
        if measured.name != "pressure":
            return measured.level_label()
        micro = self.reference_pa / 1e-6
        return f"dB re {micro:g} µPa"

    @property
    def weightable(self) -> bool:
        """True when the A and C frequency weightings apply: sound pressure, or plain volts.

        IEC 61672-1 defines the weightings for sound pressure; an uncalibrated (volts)
        chain is taken as a microphone's voltage, as before quantities were known.
        """
        return self.quantity == "pressure" or not self.calibrated or self.quantity == "voltage"

    def scale(self, *, is_pcm: bool) -> float:
        """Factor from raw samples to calibrated units (the quantity's, or V at the sensor).

        Examples
        --------
        >>> Chain(full_scale_v=2.0, gain=10.0, sensitivity_v_per_unit=0.02).scale(is_pcm=True)
        10.0
        """
        factor = (self.full_scale_v if is_pcm else 1.0) / self.gain
        if self.sensitivity_v_per_unit is not None:
            factor /= self.sensitivity_v_per_unit
        return factor

    @property
    def sensitivity_dbv_per_pa(self) -> float | None:
        """Sensitivity as a level, dB re 1 V/Pa (sound-pressure chains only)."""
        s = self.sensitivity_v_per_pa
        return None if s is None else ratio_to_db(s)

    @property
    def sensitivity_text(self) -> str | None:
        """The sensitivity in its trade form (``"10.00 mV/Pa"``, ``"1.020 mV/(m/s²) ..."``).

        Examples
        --------
        >>> Chain(sensitivity_v_per_unit=1e9, quantity="charge").sensitivity_text
        '1 mV/pC'
        >>> Chain(sensitivity_v_per_unit=10 ** (-76 / 20), reference_pa=1e-6).sensitivity_text
        '-196.00 dB re 1 V/µPa'
        """
        s = self.sensitivity_v_per_unit
        if s is None:
            return None
        if self.quantity == "charge":
            return f"{s * 1e-9:.4g} mV/pC"
        return format_sensitivity(
            Sensitivity(s, "V", QUANTITIES[self.quantity]),
            in_water=self.in_water,
        )


@dataclass(frozen=True)
class SensorProfile:
    """What a profile file says about a sensor and its chain (all optional).

    Attributes
    ----------
    sensitivity_v_per_unit
        The sensitivity in V per SI unit of its quantity (a charge sensitivity already
        multiplied by ``[chain] charge_gain``).
    sensitivity_quantity
        The quantity the sensitivity's unit names (``"10 mV/g"``: acceleration).
    quantity
        The ``quantity`` key, when given.
    channels
        ``[channel.N]`` sections: sensor keys of channel N (0-based) that override the
        file-wide ``[sensor]`` for that channel, each as a profile of its own (chain
        fields None).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "bench.toml"
    >>> _ = path.write_text('[sensor]\\nquantity = "acceleration"\\n'
    ...                     '[channel.1]\\nsensitivity = "10 mV/g"\\n', encoding="utf-8")
    >>> prof = load_profile(path)
    >>> prof.quantity, prof.sensitivity_v_per_unit, sorted(prof.channels)
    ('acceleration', None, [1])
    >>> round(prof.channels[1].sensitivity_v_per_unit * 1e3, 4)   # mV/(m/s²)
    1.0197
    """

    path: Path
    name: str | None = None
    serial: str | None = None
    sensitivity_v_per_unit: float | None = None
    sensitivity_quantity: str | None = None
    quantity: str | None = None
    capacitance_f: float | None = None
    calibration_date: str | None = None
    gain: float | None = None
    full_scale_v: float | None = None
    reference_pa: float | None = None
    sample_rate_hz: float | None = None
    charge_gain_v_per_c: float | None = None
    response_curve: Path | None = None
    frequency_range_hz: tuple[float, float] | None = None
    channels: Mapping[int, SensorProfile] = field(default_factory=dict, repr=False)
    raw: Mapping[str, Any] = field(default_factory=dict, repr=False)

    @property
    def sensitivity_v_per_pa(self) -> float | None:
        """The sensitivity in V/Pa when it is a sound-pressure sensitivity, else None."""
        if self.sensitivity_quantity in (None, "pressure"):
            return self.sensitivity_v_per_unit
        return None


#: Keys of a sensor: in [sensor] and in each [channel.N].
_SENSOR_KEYS = {
    "name",
    "serial",
    "sensitivity",
    "capacitance",
    "calibration_date",
    "model",
    "notes",
    "charge_sensitivity",
    "quantity",
    "response_curve",
    "frequency_range",
}

_PROFILE_KEYS = {
    "sensor": _SENSOR_KEYS,
    "chain": {"gain", "full_scale", "reference", "charge_gain", "sample_rate", "notes"},
    "channel": set(),  # [channel.N] sections, checked by _channel_sections
}


def parse_chain_sensitivity(
    text: str | float,
    *,
    quantity: str | None = None,
    charge_gain_v_per_c: float | None = None,
    what: str = "sensitivity",
    charge_gain_name: str = "charge_gain",
) -> tuple[float, str | None]:
    """A sensitivity in V per SI unit, and the quantity its unit names.

    Text in any trade form of :func:`~piezo.chain.quantity.parse_sensitivity_of`
    (``"12 mV/Pa"``, ``"-196 dB re 1 V/µPa"``, ``"10 mV/g"``, ``"4 pC/N"`` ...); a charge
    sensitivity is multiplied by the charge amplifier's gain. A plain number is in V per
    SI unit of ``quantity`` (V/Pa when none is given) and names no quantity (None).

    Raises
    ------
    UnitError
        Text that does not read, a unit that does not fit ``quantity``, or a charge
        sensitivity without a charge gain.

    Examples
    --------
    >>> value, q = parse_chain_sensitivity("10 mV/g")
    >>> round(value, 9), q
    (0.001019716, 'acceleration')
    >>> parse_chain_sensitivity("4 pC/N", charge_gain_v_per_c=1e9)   # 1 mV/pC
    (0.004, 'force')
    >>> parse_chain_sensitivity(0.02)
    (0.02, None)
    >>> parse_chain_sensitivity("12 mV/Pa", quantity="acceleration")
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: sensitivity: '12 mV/Pa' is a pressure sensitivity, but the \
channel measures acceleration
    """
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
        if not (math.isfinite(value) and value > 0):
            raise UnitError(f"{what}: sensitivity must be positive, got {text!r}")
        return value, None
    try:
        s = parse_sensitivity_of(str(text), what=what)
    except UnitError as first:
        if "positive" in first.message:
            raise
        # The pressure forms of piezo.chain.units (its own wording for pressure text).
        try:
            return parse_sensitivity(
                text,
                charge_gain_v_per_c=charge_gain_v_per_c,
                what=what,
                charge_gain_name=charge_gain_name,
            ), "pressure"
        except UnitError:
            raise UnitError(
                f"{what}: cannot read sensitivity {text!r}; accepted forms: '12 mV/Pa', "
                "'-38 dB re 1 V/Pa', '-196 dB re 1 V/µPa', '10 mV/g', '1 mV/(m/s²)', "
                f"'4.9 pC/g', '4 pC/N', '2 mV/N'; charge forms need a charge gain "
                f"({charge_gain_name})"
            ) from None
    if quantity is not None and s.quantity.name != quantity:
        raise UnitError(
            f"{what}: {text!r} is {with_article(s.quantity.name)} sensitivity, but the channel "
            f"measures {quantity}"
        )
    if s.electrical == "C" and charge_gain_v_per_c is None:
        raise UnitError(
            f"{what}: {text!r} is a charge sensitivity; give the charge amplifier's gain too "
            f"({charge_gain_name}, e.g. '1 mV/pC')"
        )
    return s.volts_per_unit(charge_gain_v_per_c), s.quantity.name


def load_profile(path: str | Path) -> SensorProfile:
    """Read a sensor profile (TOML).

    The format is documented in ``docs/profiles.md``. Values with units are text, parsed
    here with :mod:`piezo.chain.units` and :mod:`piezo.chain.quantity`; a charge
    sensitivity (``"12 pC/Pa"``, ``"4 pC/N"``) needs ``[chain] charge_gain``. A
    ``quantity`` key and the sensitivity's unit must agree. ``[channel.N]`` sections
    (N = 0, 1, ...) hold sensor keys of one channel.

    Raises
    ------
    SpecError
        Unreadable TOML, unknown sections or keys, or values that do not parse. The message
        names the file and the key.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "mic.toml"
    >>> _ = path.write_text('[sensor]\\nsensitivity = "-38 dB re 1 V/Pa"\\n', encoding="utf-8")
    >>> prof = load_profile(path)
    >>> round(prof.sensitivity_v_per_unit * 1e3, 3), prof.sensitivity_quantity
    (12.589, 'pressure')
    """
    p = Path(path)
    data = read_toml(p, what="profile", error=SpecError)
    for section, value in data.items():
        if section not in _PROFILE_KEYS:
            raise SpecError(
                f"unknown section [{section}]; expected {', '.join(sorted(_PROFILE_KEYS))}",
                source=str(p),
            )
        if not isinstance(value, dict):
            raise SpecError(f"{section!r} must be a [section]", source=str(p))
        if section == "channel":
            continue
        for key in value:
            if key not in _PROFILE_KEYS[section]:
                raise SpecError(
                    f"unknown key {section}.{key}; expected one of "
                    f"{', '.join(sorted(_PROFILE_KEYS[section]))}",
                    source=str(p),
                )
    chain = data.get("chain", {})

    def parse(table: Mapping[str, Any], section: str, key: str, fn):
        if key not in table:
            return None
        try:
            return fn(table[key], f"{section}.{key}")
        except UnitError as exc:
            raise SpecError(exc.message, source=str(p)) from None

    charge_gain = parse(chain, "chain", "charge_gain", lambda v, w: parse_charge_gain(v, what=w))
    sensor = _sensor_part(p, data.get("sensor", {}), "sensor", charge_gain)
    channels = {
        number: _sensor_part(p, table, f"channel.{number}", charge_gain)
        for number, table in _channel_sections(p, data.get("channel", {})).items()
    }
    return replace(
        sensor,
        gain=parse(chain, "chain", "gain", lambda v, w: parse_gain(v, what=w)),
        full_scale_v=parse(chain, "chain", "full_scale", lambda v, w: _positive(v, "V", w)),
        reference_pa=parse(chain, "chain", "reference", lambda v, w: _positive(v, "Pa", w)),
        sample_rate_hz=parse(chain, "chain", "sample_rate", lambda v, w: _positive(v, "Hz", w)),
        charge_gain_v_per_c=charge_gain,
        channels=channels,
        raw=data,
    )


def _channel_sections(path: Path, tables: Mapping[str, Any]) -> dict[int, Mapping[str, Any]]:
    """``[channel.N]`` tables by channel number; keys checked."""
    out: dict[int, Mapping[str, Any]] = {}
    for name, table in tables.items():
        if not (name.isdigit() and isinstance(table, dict)):
            raise SpecError(
                f"[channel.{name}]: channel sections are [channel.N] with N = 0, 1, ... "
                "(0-based channel numbers)",
                source=str(path),
            )
        for key in table:
            if key not in _SENSOR_KEYS:
                raise SpecError(
                    f"unknown key channel.{name}.{key}; expected one of "
                    f"{', '.join(sorted(_SENSOR_KEYS))}",
                    source=str(path),
                )
        out[int(name)] = table
    return out


def _sensor_part(
    path: Path, sensor: Mapping[str, Any], section: str, charge_gain: float | None
) -> SensorProfile:
    """The sensor keys of one section (``[sensor]`` or ``[channel.N]``), parsed."""

    def fail(exc: UnitError) -> SpecError:
        return SpecError(exc.message, source=str(path))

    quantity = None
    if "quantity" in sensor:
        try:
            quantity = quantity_named(sensor["quantity"], what=f"{section}.quantity").name
        except UnitError as exc:
            raise fail(exc) from None
    sensitivity = sens_quantity = None
    if "sensitivity" in sensor and "charge_sensitivity" in sensor:
        raise SpecError(
            f"{section}: give sensitivity or charge_sensitivity, not both", source=str(path)
        )
    key = "sensitivity" if "sensitivity" in sensor else "charge_sensitivity"
    if key in sensor:
        try:
            sensitivity, sens_quantity = parse_chain_sensitivity(
                sensor[key],
                quantity=quantity,
                charge_gain_v_per_c=charge_gain,
                what=f"{section}.{key}",
                charge_gain_name="chain.charge_gain",
            )
        except UnitError as exc:
            raise fail(exc) from None
    capacitance = None
    if "capacitance" in sensor:
        try:
            capacitance = parse_quantity(sensor["capacitance"], "F", what=f"{section}.capacitance")
        except UnitError as exc:
            raise fail(exc) from None
    curve = None
    if "response_curve" in sensor:
        text = sensor["response_curve"]
        if not isinstance(text, str) or not text.strip():
            raise SpecError(
                f"{section}.response_curve must be a file name (CSV), got {text!r}",
                source=str(path),
            )
        curve = path.parent / text  # relative to the profile; absolute paths stay
    frequency_range = None
    if "frequency_range" in sensor:
        try:
            frequency_range = parse_frequency_range(
                sensor["frequency_range"], what=f"{section}.frequency_range"
            )
        except UnitError as exc:
            raise fail(exc) from None
    date = sensor.get("calibration_date")
    if isinstance(date, _dt.date | _dt.datetime):
        date = date.isoformat()
    return SensorProfile(
        path=path,
        name=_text(sensor.get("name")),
        serial=_text(sensor.get("serial")),
        sensitivity_v_per_unit=sensitivity,
        sensitivity_quantity=sens_quantity,
        quantity=quantity,
        capacitance_f=capacitance,
        calibration_date=_text(date),
        response_curve=curve,
        frequency_range_hz=frequency_range,
    )


def profile_with_sensitivity(
    text: str | None,
    sensitivity_v_per_unit: float,
    *,
    calibration_date: str,
    source: str | None = None,
    quantity: str = "pressure",
    section: str = "sensor",
    charge_gain_v_per_c: float | None = None,
) -> str:
    r"""A profile's text with ``quantity``, ``sensitivity`` and ``calibration_date`` set.

    The values go into ``[section]`` (``"sensor"``, or ``"channel.N"`` for one channel
    of a multi-channel recording), which is added when missing; the sensitivity, in V
    per SI unit of ``quantity``, is written in its trade unit
    (:func:`~piezo.chain.quantity.compact_sensitivity`). With ``charge_gain_v_per_c``
    (a charge amplifier's gain) it is written as a ``charge_sensitivity`` (``"4 pC/N"``)
    and the gain as ``[chain] charge_gain``, so the profile reads back to the same
    volts. Everything else (other keys, sections, comments, blank lines) is kept as it
    is; the section's other form of sensitivity is dropped. ``text`` None or empty
    starts a new profile. The caller writes the result.

    Raises
    ------
    InputError
        ``text`` is not valid TOML, or the edit would not be (the message names
        ``source``).

    Examples
    --------
    >>> old = '# bench mic\n[sensor]\nname = "film"\n\n[chain]\ngain = "20 dB"\n'
    >>> print(profile_with_sensitivity(old, 8.5e-3, calibration_date="2026-12-01"))
    # bench mic
    [sensor]
    name = "film"
    quantity = "pressure"
    sensitivity = "8.5 mV/Pa"
    calibration_date = 2026-12-01
    <BLANKLINE>
    [chain]
    gain = "20 dB"
    <BLANKLINE>
    >>> import tomllib
    >>> load = tomllib.loads(profile_with_sensitivity(None, 0.012, calibration_date="2026-12-01"))
    >>> load["sensor"]["sensitivity"]
    '12 mV/Pa'
    >>> print(profile_with_sensitivity(old, 10e-3 / 9.80665, calibration_date="2026-12-02",
    ...                                quantity="acceleration", section="channel.1"))
    # bench mic
    [sensor]
    name = "film"
    <BLANKLINE>
    [chain]
    gain = "20 dB"
    <BLANKLINE>
    [channel.1]
    quantity = "acceleration"
    sensitivity = "1.0197 mV/(m/s²)"
    calibration_date = 2026-12-02
    <BLANKLINE>
    >>> print(profile_with_sensitivity(None, 4e-3, calibration_date="2026-12-02",
    ...                                quantity="force", charge_gain_v_per_c=1e9))
    [sensor]
    quantity = "force"
    charge_sensitivity = "4 pC/N"
    calibration_date = 2026-12-02
    <BLANKLINE>
    [chain]
    charge_gain = "1 mV/pC"
    <BLANKLINE>
    """
    lines = text.splitlines() if text else []
    if lines:
        parse_toml("\n".join(lines), source=source)
    q = quantity_named(quantity)
    if charge_gain_v_per_c is None:
        key, drop = "sensitivity", "charge_sensitivity"
        measured = Sensitivity(sensitivity_v_per_unit, "V", q)
    else:
        key, drop = "charge_sensitivity", "sensitivity"
        measured = Sensitivity(sensitivity_v_per_unit / charge_gain_v_per_c, "C", q)
    values = {
        "quantity": toml_value(q.name),
        key: toml_value(compact_sensitivity(measured)),
        "calibration_date": calibration_date,
    }
    lines = _with_keys(lines, section, values, drop=drop)
    if charge_gain_v_per_c is not None:
        gain = toml_value(f"{charge_gain_v_per_c * 1e-9:.5g} mV/pC")
        lines = _with_keys(lines, "chain", {"charge_gain": gain})
    result = "\n".join(lines).rstrip("\n") + "\n"
    parse_toml(result, source=source)
    return result


def _with_keys(
    lines: list[str], section: str, values: Mapping[str, str], *, drop: str | None = None
) -> list[str]:
    """Profile lines with ``values`` (TOML text) set in ``[section]`` and ``drop`` removed
    from it; a missing ``[section]`` is added (``[sensor]`` first, others last)."""
    out: list[str] = []
    current = None
    seen = False
    written: set[str] = set()
    for line in lines:
        stripped = line.strip()
        if stripped.startswith("["):
            if current == section:
                blanks = 0
                while out and not out[-1].strip():
                    out.pop()
                    blanks += 1
                out.extend(f"{k} = {v}" for k, v in values.items() if k not in written)
                out.extend([""] * blanks)
                written.update(values)
            current = stripped.strip("[]").strip()
            seen = seen or current == section
        key = stripped.split("=", 1)[0].strip() if "=" in stripped else ""
        if current == section and key in values and key not in written:
            out.append(f"{key} = {values[key]}")
            written.add(key)
            continue
        if current == section and key and key == drop:
            continue  # replaced by the measured sensitivity
        out.append(line)
    block = [f"{k} = {v}" for k, v in values.items() if k not in written]
    if current == section:
        out.extend(block)
    elif not seen:
        head = [f"[{section}]", *block]
        if section == "sensor":
            out = [*head, "", *out]
        else:
            while out and not out[-1].strip():
                out.pop()
            out = [*out, "", *head] if out else head
    return out


def profile_for_sensor(
    sensitivity: Sensitivity,
    *,
    calibration_date: str,
    reference_frequency_hz: float,
    response_curve: str | None = None,
    name: str | None = None,
    serial: str | None = None,
) -> str:
    """A new profile's text for a sensor measured by comparison: quantity, sensitivity at
    ``reference_frequency_hz`` in its trade form, the chart it is relative to.

    ``response_curve`` is written as given (a path relative to the profile, so the pair
    can move together). The caller writes the result.

    Examples
    --------
    >>> from piezo.chain.quantity import parse_sensitivity_of
    >>> s = parse_sensitivity_of("9.62 mV/g")
    >>> text = profile_for_sensor(s, calibration_date="2026-12-02", reference_frequency_hz=160,
    ...                           response_curve="unit-chart.csv", serial="PA12-2291")
    >>> print(text)
    # measured by back-to-back comparison; sensitivity at 160 Hz, chart relative to it
    [sensor]
    serial = "PA12-2291"
    quantity = "acceleration"
    sensitivity = "0.980967 mV/(m/s²)"
    calibration_date = 2026-12-02
    response_curve = "unit-chart.csv"
    <BLANKLINE>
    >>> import tomllib
    >>> parse_sensitivity_of(tomllib.loads(text)["sensor"]["sensitivity"]).value * 9.80665
    0.00962000...
    """
    lines = [
        f"# measured by back-to-back comparison; sensitivity at {reference_frequency_hz:g} Hz,"
        " chart relative to it",
        "[sensor]",
    ]
    if name is not None:
        lines.append(f"name = {toml_value(name)}")
    if serial is not None:
        lines.append(f"serial = {toml_value(serial)}")
    sens_text = format_sensitivity(sensitivity, digits=6).split(" (")[0]
    lines += [
        f"quantity = {toml_value(sensitivity.quantity.name)}",
        f"sensitivity = {toml_value(sens_text)}",
        f"calibration_date = {calibration_date}",
    ]
    if response_curve is not None:
        lines.append(f"response_curve = {toml_value(response_curve)}")
    return "\n".join(lines) + "\n"


def _text(value: Any) -> str | None:
    return None if value is None else str(value)


def _positive(text: Any, unit: str, what: str) -> float:
    value = parse_quantity(text, unit, what=what)
    try:
        return physical_value(value, what=what, unit=unit)
    except InputError:
        raise UnitError(f"{what} must be positive, got {text!r}") from None


def sidecar_path(recording_path: str | Path) -> Path:
    """The sidecar profile that belongs to a recording: ``NAME.toml`` beside ``NAME.wav``.

    Examples
    --------
    >>> sidecar_path("bench/accel-bench.flac").as_posix()
    'bench/accel-bench.toml'
    """
    return Path(recording_path).with_suffix(".toml")


#: A chain value as given: a number in SI units, or text with its unit ("12 mV/Pa").
ChainValue = str | float | None


@dataclass(frozen=True)
class ChainSettings:
    """Chain values as given, before parsing: numbers in SI units or unit text.

    None means "not given": the profile or default applies. Error messages name the
    field (``sensitivity``, ``full_scale`` ...). A numeric ``sensitivity`` is in V per SI
    unit of ``quantity`` (V/Pa for sound pressure).

    The fields are for every channel; ``channels`` holds values of single channels (by
    0-based channel number, each a ``ChainSettings`` of its own without ``profile``),
    which override them for that channel (:meth:`for_channel`).

    Examples
    --------
    >>> chain, _ = resolve_chain(None, ChainSettings(sensitivity="20 mV/Pa", gain="20 dB"))
    >>> round(chain.sensitivity_v_per_pa, 6), round(chain.gain, 6)
    (0.02, 10.0)
    >>> chain, _ = resolve_chain(None, ChainSettings(sensitivity="10 mV/g"))
    >>> chain.quantity, chain.unit
    ('acceleration', 'm/s²')
    >>> both = ChainSettings(gain="20 dB", channels={1: ChainSettings(gain="0 dB")})
    >>> [round(resolve_chain(None, both, channel=n)[0].gain, 6) for n in (0, 1)]
    [10.0, 1.0]
    """

    sensitivity: ChainValue = None
    gain: ChainValue = None
    full_scale: ChainValue = None
    reference: ChainValue = None
    charge_gain: ChainValue = None
    profile: str | Path | None = None
    quantity: str | None = None
    response_curve: str | Path | None = None
    channels: Mapping[int, ChainSettings] = field(default_factory=dict)

    def for_channel(self, channel: int | None) -> ChainSettings:
        """The values that apply to ``channel``: its own over those for every channel.

        Examples
        --------
        >>> s = ChainSettings(sensitivity="10 mV/g", gain="20 dB",
        ...                   channels={1: ChainSettings(sensitivity="50 mV/Pa")})
        >>> s.for_channel(1).sensitivity, s.for_channel(1).gain, s.for_channel(0).sensitivity
        ('50 mV/Pa', '20 dB', '10 mV/g')
        """
        own = None if channel is None else self.channels.get(channel)
        if own is None:
            return self
        given = {
            name: getattr(own, name) for name in CHANNEL_SETTINGS if getattr(own, name) is not None
        }
        return replace(self, **given)


#: The :class:`ChainSettings` fields a single channel may have values of its own for.
CHANNEL_SETTINGS = (
    "sensitivity",
    "gain",
    "full_scale",
    "reference",
    "charge_gain",
    "quantity",
    "response_curve",
)


def load_response_curve(path: str | Path) -> ResponseCurve:
    """Read a response curve file (CSV, :mod:`piezo.chain.curve`), bounded.

    Raises
    ------
    InputError
        Unreadable, or not a valid curve; the message names the file and the line.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> chart = pathlib.Path(tempfile.mkdtemp()) / "chart.csv"
    >>> _ = chart.write_text("frequency_hz,relative_db\\n10,0\\n10000,1.5\\n", encoding="utf-8")
    >>> load_response_curve(chart).relative_db.tolist()
    [0.0, 1.5]
    """
    p = Path(path)
    return parse_response_curve(read_text(p, what="response curve"), source=str(p))


@dataclass(frozen=True)
class Provenance:
    """Where each chain value came from: ``"default"``, ``"option"`` or a profile path.

    A value from a ``[channel.N]`` section is marked ``"PATH [channel.N]"``; a quantity
    that follows from the sensitivity's unit is marked ``"sensitivity unit"``.

    Examples
    --------
    >>> _, prov = resolve_chain(None, ChainSettings(gain="6 dB"))
    >>> prov.as_dict()["gain"], prov.as_dict()["quantity"]
    ('option', 'default')
    """

    full_scale_v: str
    gain: str
    sensitivity_v_per_pa: str
    reference_pa: str
    profiles: tuple[SensorProfile, ...] = ()
    quantity: str = "default"
    channel: int | None = None
    response_curve: str = "default"

    @property
    def sensitivity(self) -> str:
        """Where the sensitivity came from (whatever its quantity)."""
        return self.sensitivity_v_per_pa

    def as_dict(self) -> dict[str, str]:
        """Plain mapping for JSON reports."""
        return {
            "full_scale_v": self.full_scale_v,
            "gain": self.gain,
            "sensitivity_v_per_pa": self.sensitivity_v_per_pa,
            "reference_pa": self.reference_pa,
            "quantity": self.quantity,
            "response_curve": self.response_curve,
        }


def profile_paths(
    recording_path: str | Path | None, settings: ChainSettings, *, use_sidecar: bool = True
) -> list[Path]:
    """The profiles that apply to a recording, lowest priority first: sidecar, then given.

    Examples
    --------
    >>> profile_paths("no/such/take.wav", ChainSettings(profile="bench.toml"))
    [PosixPath('bench.toml')]
    """
    candidates: list[Path] = []
    if use_sidecar and recording_path is not None:
        side = sidecar_path(recording_path)
        if side.is_file() and side != Path(recording_path):
            candidates.append(side)
    if settings.profile is not None:
        candidates.append(Path(settings.profile))
    return candidates


def resolve_chain(
    recording_path: str | Path | None,
    settings: ChainSettings,
    *,
    use_sidecar: bool = True,
    channel: int | None = None,
    profiles: Sequence[SensorProfile] | None = None,
) -> tuple[Chain, Provenance]:
    """Combine defaults, sidecar profile, profile file and given values into a :class:`Chain`.

    Later sources override earlier ones, value by value: defaults, the sidecar
    ``NAME.toml`` (when ``use_sidecar``), ``settings.profile``, then the values of
    ``settings``. Within each source the more specific value wins: in a profile, a
    ``[channel.N]`` section overrides ``[sensor]`` for ``channel`` N; in ``settings``,
    ``settings.channels[N]`` overrides the values for every channel. Text is parsed
    here, once, by :mod:`piezo.chain.units` and :mod:`piezo.chain.quantity`. The
    quantity is the ``quantity`` given (profile key or option), else the one the
    sensitivity's unit names, else sound pressure; a sensitivity given in ``settings``
    names its quantity over a profile's ``quantity`` key (given values over profiles),
    and a sensitivity whose unit names another quantity than one given at its own level
    or above is refused.

    ``profiles`` are the profiles already read (:func:`profile_paths`,
    :func:`load_profile`), so that a file is read once for all channels.

    Raises
    ------
    InputError
        A value that does not parse or does not fit the quantity (the message names the
        channel when ``channel`` is given).

    Examples
    --------
    >>> chain, prov = resolve_chain(None, ChainSettings(sensitivity=0.01, quantity="force"))
    >>> chain.unit, chain.level_unit, prov.quantity
    ('N', 'dB re 1 µN', 'option')
    >>> resolve_chain(None, ChainSettings(sensitivity="12 mV/Pa", quantity="force"))
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: sensitivity: '12 mV/Pa' is a pressure sensitivity, but the \
channel measures force
    """
    if profiles is None:
        profiles = [
            load_profile(p)
            for p in profile_paths(recording_path, settings, use_sidecar=use_sidecar)
        ]
    settings = settings.for_channel(channel)
    prefix = "" if channel is None else f"channel {channel}: "
    values: dict[str, Any] = {
        "full_scale_v": 1.0,
        "gain": 1.0,
        "sensitivity_v_per_pa": None,
        "reference_pa": REFERENCE_AIR_PA,
        "quantity": None,
        "response_curve": None,
    }
    origin = dict.fromkeys(values, "default")
    sens_quantity: str | None = None
    charge_gain: float | None = None
    frequency_range: tuple[float, float] | None = None
    for prof in profiles:
        for key, attr in (
            ("full_scale_v", "full_scale_v"),
            ("gain", "gain"),
            ("reference_pa", "reference_pa"),
        ):
            v = getattr(prof, attr)
            if v is not None:
                values[key] = v
                origin[key] = str(prof.path)
        if prof.charge_gain_v_per_c is not None:
            charge_gain = prof.charge_gain_v_per_c
        layers = [(prof, str(prof.path))]
        if channel is not None and channel in prof.channels:
            layers.append((prof.channels[channel], f"{prof.path} [channel.{channel}]"))
        for layer, where in layers:
            if layer.sensitivity_v_per_unit is not None:
                values["sensitivity_v_per_pa"] = layer.sensitivity_v_per_unit
                origin["sensitivity_v_per_pa"] = where
                sens_quantity = layer.sensitivity_quantity
            if layer.quantity is not None:
                values["quantity"] = layer.quantity
                origin["quantity"] = where
            if layer.response_curve is not None:
                values["response_curve"] = layer.response_curve
                origin["response_curve"] = where
            frequency_range = layer.frequency_range_hz or frequency_range

    try:
        if settings.quantity is not None:
            values["quantity"] = quantity_named(settings.quantity, what="quantity").name
            origin["quantity"] = "option"
        if settings.charge_gain is not None:
            charge_gain = parse_charge_gain(settings.charge_gain, what="charge_gain")
        if settings.sensitivity is not None:
            values["sensitivity_v_per_pa"], sens_quantity = parse_chain_sensitivity(
                settings.sensitivity,
                quantity=values["quantity"] if origin["quantity"] == "option" else None,
                charge_gain_v_per_c=charge_gain,
                what="sensitivity",
                charge_gain_name="charge_gain",
            )
            origin["sensitivity_v_per_pa"] = "option"
        if settings.gain is not None:
            values["gain"] = parse_gain(settings.gain, what="gain")
            origin["gain"] = "option"
        if settings.full_scale is not None:
            values["full_scale_v"] = _positive(settings.full_scale, "V", "full_scale")
            origin["full_scale_v"] = "option"
        if settings.reference is not None:
            values["reference_pa"] = _positive(settings.reference, "Pa", "reference")
            origin["reference_pa"] = "option"
        if settings.response_curve is not None:
            values["response_curve"] = Path(settings.response_curve)
            origin["response_curve"] = "option"
    except UnitError as exc:
        raise UnitError(prefix + exc.message) from None

    quantity = values["quantity"]
    if sens_quantity is not None and origin["sensitivity_v_per_pa"] == "option":
        if origin["quantity"] != "option":
            quantity = None  # the given sensitivity's unit names it, over a profile's key
    if quantity is None:
        quantity = sens_quantity or "pressure"
        if sens_quantity is not None:
            origin["quantity"] = "sensitivity unit"
    elif sens_quantity is not None and sens_quantity != quantity:
        raise InputError(
            f"{prefix}the sensitivity ({_where(origin['sensitivity_v_per_pa'])}) is "
            f"{with_article(sens_quantity)} sensitivity, but the quantity is {quantity} "
            f"({_where(origin['quantity'])})"
        )
    if quantity == "charge":
        if values["sensitivity_v_per_pa"] is not None:
            raise InputError(
                f"{prefix}a channel that measures charge takes the charge amplifier's gain "
                "(charge_gain), not a sensitivity"
            )
        if charge_gain is not None:
            values["sensitivity_v_per_pa"] = charge_gain
            origin["sensitivity_v_per_pa"] = "charge gain"
    if quantity != "pressure" and origin["reference_pa"] == "option":
        q = QUANTITIES[quantity]
        raise InputError(
            f"{prefix}reference: a reference pressure applies to sound pressure only; "
            f"levels of {quantity} are in {q.level_label()} (ISO 1683)"
        )
    curve_path = values["response_curve"]
    curve = None if curve_path is None else load_response_curve(curve_path)
    chain = Chain(
        full_scale_v=float(values["full_scale_v"]),
        gain=float(values["gain"]),
        sensitivity_v_per_unit=values["sensitivity_v_per_pa"],
        reference_pa=float(values["reference_pa"]),
        quantity=quantity,
        response_curve=curve,
        response_curve_file=None if curve_path is None else str(curve_path),
        frequency_range_hz=frequency_range,
        charge_gain_v_per_c=charge_gain,
    )
    return chain, Provenance(**origin, profiles=tuple(profiles), channel=channel)


def _describe(chain: Chain) -> str:
    """A chain in a few words, for messages."""
    if not chain.calibrated:
        return f"{chain.quantity}, uncalibrated (V)"
    return f"{chain.quantity}, {chain.sensitivity_text}"


def _where(origin: str) -> str:
    return {"option": "option", "default": "default"}.get(origin, f"from {origin}")


@dataclass(frozen=True)
class CalibratedSource:
    """A recording seen through its chains: calibrated blocks of the chosen channels.

    Every channel has its own chain (a profile's ``[channel.N]`` sections); most files
    have one chain for all. The values of each channel are in its own unit.

    Attributes
    ----------
    recording
        The opened recording.
    file_chain
        The chain of every channel without one of its own.
    channel_indices
        The recording's channels analysed, 0-based, in order.
    provenance
        Where the values of ``file_chain`` came from.
    channel_chains
        Chains (and their provenance) of channels that have their own, by the
        recording's channel number.

    Examples
    --------
    >>> from pathlib import Path
    >>> from piezo.io.reader import Recording
    >>> rec = Recording(Path("x.wav"), 48000.0, 4, 2, "WAV", "PCM_24", ("ch0", "ch1"), True)
    >>> accel = Chain(sensitivity_v_per_unit=1e-3, quantity="acceleration")
    >>> src = CalibratedSource.of(rec, accel, channel_chains={1: (Chain(), None)})
    >>> src.units, src.with_channels([0]).unit
    (('m/s²', 'V'), 'm/s²')
    """

    recording: Recording
    file_chain: Chain
    channel_indices: tuple[int, ...]
    provenance: Provenance | None = None
    channel_chains: Mapping[int, tuple[Chain, Provenance | None]] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.recording._check_channels(self.channel_indices)

    @classmethod
    def of(
        cls,
        recording: Recording,
        chain: Chain,
        channels: Sequence[int] | None = None,
        provenance: Provenance | None = None,
        *,
        channel_chains: Mapping[int, tuple[Chain, Provenance | None]] | None = None,
    ) -> CalibratedSource:
        """All channels of ``recording`` when ``channels`` is None.

        ``channel_chains`` gives chains of their own to some channels (by the
        recording's channel number); the others use ``chain``.

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 2, "WAV", "PCM_24", ("a", "b"), True)
        >>> src = CalibratedSource.of(rec, Chain(), [1])
        >>> src.channel_indices, src.unit
        ((1,), 'V')
        """
        idx = tuple(range(recording.channels)) if channels is None else tuple(channels)
        own = {k: v for k, v in (channel_chains or {}).items() if k < recording.channels}
        return cls(recording, chain, idx, provenance, own)

    # --- per channel -------------------------------------------------------------------

    def chain_of(self, index: int) -> Chain:
        """The chain of the recording's channel ``index`` (0-based).

        Examples
        --------
        See :class:`CalibratedSource`.
        """
        own = self.channel_chains.get(index)
        return self.file_chain if own is None else own[0]

    def provenance_of(self, index: int) -> Provenance | None:
        """Where the chain values of the recording's channel ``index`` came from.

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 2, "WAV", "PCM_24", ("a", "b"), True)
        >>> chain, prov = resolve_chain(None, ChainSettings(sensitivity="10 mV/g"))
        >>> src = CalibratedSource.of(rec, Chain(), channel_chains={1: (chain, prov)})
        >>> src.provenance_of(0), src.provenance_of(1).sensitivity
        (None, 'option')
        """
        own = self.channel_chains.get(index)
        return self.provenance if own is None else own[1]

    @property
    def chains(self) -> tuple[Chain, ...]:
        """The chain of each analysed channel, in the order of ``channel_indices``."""
        return tuple(self.chain_of(i) for i in self.channel_indices)

    @property
    def units(self) -> tuple[str, ...]:
        """Unit of each analysed channel's values."""
        return tuple(c.unit for c in self.chains)

    @property
    def references(self) -> np.ndarray:
        """Reference for levels of each analysed channel, in its unit."""
        return np.array([c.reference for c in self.chains], dtype=float)

    @property
    def scales(self) -> np.ndarray:
        """Factor from raw samples to calibrated values, per analysed channel."""
        pcm = self.recording.is_pcm
        return np.array([c.scale(is_pcm=pcm) for c in self.chains], dtype=float)

    # --- one chain for all ------------------------------------------------------------

    def _common(self, what: str, key: Callable[[Chain], Any]) -> Any:
        chains = self.chains
        values = [key(c) for c in chains]
        for i, v in enumerate(values[1:], start=1):
            if v != values[0]:
                a, b = self.channel_indices[0], self.channel_indices[i]
                raise InputError(
                    f"channels {a} and {b} differ in {what} ({_describe(chains[0])}; "
                    f"{_describe(chains[i])}); this needs one {what} for all channels: "
                    "analyse them one at a time (--channel N)",
                    source=str(self.recording.path),
                )
        return values[0] if values else key(self.file_chain)

    @property
    def chain(self) -> Chain:
        """The one chain of all analysed channels (refused when they differ)."""
        return self._common("chain", lambda c: c)

    @property
    def unit(self) -> str:
        """Unit of the values (``"Pa"``, ``"m/s²"`` ... or ``"V"``), shared by the channels."""
        return self._common("unit", lambda c: c.unit)

    @property
    def reference(self) -> float:
        """Reference for dB, shared by the channels: 20 µPa, 1 µm/s² ... or 1 V."""
        return self._common("level reference", lambda c: c.reference)

    @property
    def level_unit(self) -> str:
        """How levels are labelled (``"dB re 20 µPa"``), shared by the channels."""
        return self._common("level reference", lambda c: c.level_unit)

    @property
    def quantity(self) -> Quantity:
        """The quantity of the values, shared by the channels."""
        return self._common("quantity", lambda c: c.measured)

    @property
    def scale(self) -> float:
        """Factor from raw samples to calibrated units, shared by the channels."""
        scales = self.scales
        if scales.size and not np.all(scales == scales[0]):
            self._common("chain", lambda c: c)
        return (
            float(scales[0])
            if scales.size
            else self.file_chain.scale(is_pcm=self.recording.is_pcm)
        )

    @property
    def sample_rate_hz(self) -> float:
        """Sample rate in hertz."""
        return self.recording.sample_rate_hz

    @property
    def frames(self) -> int:
        """Samples per channel."""
        return self.recording.frames

    def volts_at_sensor(self) -> CalibratedSource:
        """The same recording and channels in volts at the sensor's output.

        Full scale and gain are undone, a sensitivity, a response curve and an
        integration are not applied: what a calibration, a response measurement or a
        production check measures is the sensor's voltage. An uncalibrated source is
        returned as it is.

        Examples
        --------
        >>> import numpy as np
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 1, "WAV", "PCM_24", ("ch0",), True)
        >>> src = CalibratedSource.of(rec, Chain(full_scale_v=2.0, gain=10.0,
        ...                                      sensitivity_v_per_unit=0.02))
        >>> src.unit, round(src.scale, 12)
        ('Pa', 10.0)
        >>> volts = src.volts_at_sensor()
        >>> volts.unit, round(volts.scale, 12)
        ('V', 0.2)
        """
        chains = (self.file_chain, *(c for c, _ in self.channel_chains.values()))
        if not any(c.calibrated or c.response_curve is not None for c in chains):
            return self

        def bare(chain: Chain) -> Chain:
            return replace(
                chain,
                sensitivity_v_per_unit=None,
                quantity="voltage",
                integrations=0,
                response_curve=None,
                response_curve_file=None,
            )

        own = {k: (bare(c), p) for k, (c, p) in self.channel_chains.items()}
        return replace(self, file_chain=bare(self.file_chain), channel_chains=own)

    def integrated(self, times: int) -> CalibratedSource:
        """The same source with its analysed channels integrated ``times`` times.

        Acceleration becomes velocity (1) or displacement (2), velocity displacement
        (1), each step through :class:`~piezo.chain.integrate.Integrator` in
        :meth:`blocks`; other quantities are refused.

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 1, "WAV", "PCM_24", ("ch0",), True)
        >>> acc = Chain(sensitivity_v_per_unit=1e-3, quantity="acceleration")
        >>> src = CalibratedSource.of(rec, acc).integrated(2)
        >>> src.unit, src.level_unit
        ('m', 'dB re 1 pm')
        """
        if not times:
            return self
        own = dict(self.channel_chains)
        for index in self.channel_indices:
            try:
                chain = replace(self.chain_of(index), integrations=times)
            except InputError as exc:
                raise InputError(
                    f"channel {index}: {exc.message}", source=str(self.recording.path)
                ) from None
            own[index] = (chain, self.provenance_of(index))
        return replace(self, channel_chains=own)

    def with_channels(self, channels: Sequence[int] | None) -> CalibratedSource:
        """The same source restricted to ``channels`` (0-based; all when None).

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 2, "WAV", "PCM_24", ("ch0", "ch1"), True)
        >>> CalibratedSource.of(rec, Chain()).with_channels([1]).channel_indices
        (1,)
        """
        idx = tuple(range(self.recording.channels)) if channels is None else tuple(channels)
        return replace(self, channel_indices=idx)

    def feed(
        self,
        *analyses: Any,
        advance: Callable[[int], object] | None = None,
        block_frames: int = BLOCK_FRAMES,
    ) -> None:
        """Read the source once, handing every calibrated block to each analysis.

        Each analysis is anything with ``update(block)`` (the streaming classes);
        ``advance(frames)`` is called after each block (a progress bar).

        Examples
        --------
        >>> import numpy as np, soundfile as sf, tempfile, pathlib
        >>> from piezo.io.reader import open_recording
        >>> path = pathlib.Path(tempfile.mkdtemp()) / "ramp.wav"
        >>> sf.write(path, np.linspace(-0.5, 0.5, 1000), 8000, subtype="FLOAT")
        >>> class Peak:
        ...     value = 0.0
        ...     def update(self, block):
        ...         self.value = max(self.value, float(np.abs(block).max()))
        >>> peak, done = Peak(), []
        >>> src = CalibratedSource.of(open_recording(path), Chain(full_scale_v=2.0))
        >>> src.feed(peak, advance=done.append, block_frames=300)
        >>> peak.value, done  # volts: 0.5 of full scale at 2 V
        (1.0, [300, 300, 300, 100])
        """
        for block in self.blocks(block_frames):
            for analysis in analyses:
                analysis.update(block)
            if advance is not None:
                advance(block.shape[0])

    def curve_notes(self, low_hz: float, high_hz: float) -> list[str]:
        """One line per analysed channel whose response curve leaves part of a band out.

        The correction holds a chart's end values beyond its range
        (:meth:`~piezo.chain.curve.ResponseCurve.coverage_note`); results in
        ``[low_hz, high_hz]`` say where they rely on that.

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> from piezo.chain.curve import parse_response_curve
        >>> curve = parse_response_curve("frequency_hz,relative_db\\n100,0\\n5000,1")
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 1, "WAV", "PCM_24", ("a",), True)
        >>> chain = Chain(response_curve=curve, response_curve_file="chart.csv")
        >>> print(*CalibratedSource.of(rec, chain).curve_notes(20.0, 20000.0))
        ch 0: response curve chart.csv: chart covers 100 Hz to 5 kHz; end values held below
        and above
        >>> CalibratedSource.of(rec, chain).curve_notes(200.0, 4000.0)
        []
        """
        notes = []
        for index, chain in zip(self.channel_indices, self.chains, strict=True):
            if chain.response_curve is not None:
                note = chain.response_curve.coverage_note(low_hz, high_hz)
                if note is not None:
                    notes.append(f"ch {index}: response curve {chain.response_curve_file}: {note}")
        return notes

    def correction(self) -> list[CurveCorrection] | None:
        """The response-curve corrections of the analysed channels, or None without curves.

        One :class:`~piezo.chain.curve.CurveCorrection` per analysed channel, all of one
        length (the longest a chart asks for), so their delay compensation holds the
        same frames back; a channel without a curve gets a flat one (a pure delay,
        compensated: its samples pass unchanged).

        Examples
        --------
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> from piezo.chain.curve import parse_response_curve
        >>> curve = parse_response_curve("frequency_hz,relative_db\\n100,0\\n5000,1")
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 2, "WAV", "PCM_24", ("a", "b"), True)
        >>> own = {0: (Chain(response_curve=curve), None)}
        >>> src = CalibratedSource.of(rec, Chain(), channel_chains=own)
        >>> [c.taps for c in src.correction()]      # one length: 10 Hz resolution at 48 kHz
        [8193, 8193]
        >>> CalibratedSource.of(rec, Chain()).correction() is None
        True
        """
        curves = [c.response_curve for c in self.chains]
        if all(c is None for c in curves):
            return None
        fs = self.sample_rate_hz
        taps = max(CurveCorrection.default_taps(c, fs) for c in curves if c is not None)
        flat = ResponseCurve(np.array([1.0, fs / 2]), np.zeros(2))
        return [CurveCorrection(c or flat, fs, 1, taps=taps) for c in curves]

    def blocks(
        self, block_frames: int = BLOCK_FRAMES, *, overlap_frames: int = 0
    ) -> Iterator[np.ndarray]:
        """Yield calibrated float64 blocks ``(frames, channels)``, each channel in its unit.

        A channel with a response curve is divided by it here, once, for every analysis
        (:meth:`correction`: a linear-phase FIR whose delay is compensated, so the
        values stay aligned with the file sample for sample; blocks may then differ in
        length from ``block_frames``, the total does not).

        Examples
        --------
        >>> import numpy as np, soundfile as sf, tempfile, pathlib
        >>> from piezo.io.reader import open_recording
        >>> path = pathlib.Path(tempfile.mkdtemp()) / "two.wav"
        >>> sf.write(path, np.full((10, 2), 0.5), 8000, subtype="FLOAT")
        >>> src = CalibratedSource.of(open_recording(path), Chain(sensitivity_v_per_unit=0.1),
        ...                           channel_chains={1: (Chain(), None)})
        >>> next(src.blocks())[0].tolist()      # 5 Pa, 0.5 V
        [5.0, 0.5]
        """
        factor = self.scales
        corrections = self.correction()
        if corrections is not None and overlap_frames:
            raise InputError(
                "overlapping blocks of a source with a response curve are not available; "
                "read it without overlap",
                source=str(self.recording.path),
            )
        raw = (
            block * factor
            for block in self.recording.blocks(
                block_frames, overlap_frames=overlap_frames, channels=self.channel_indices
            )
        )
        integrators = [
            Integrator(self.sample_rate_hz, 1, c.integrations) if c.integrations else None
            for c in self.chains
        ]
        if corrections is None:
            stream: Iterator[np.ndarray] = raw
        else:
            stream = self._corrected(raw, corrections)
        if all(i is None for i in integrators):
            yield from stream
            return
        for block in stream:
            out = block.copy()
            for j, integ in enumerate(integrators):
                if integ is not None:
                    out[:, [j]] = integ.process(block[:, [j]])
            yield out

    @staticmethod
    def _corrected(
        raw: Iterator[np.ndarray], corrections: list[CurveCorrection]
    ) -> Iterator[np.ndarray]:
        for block in raw:
            out = np.hstack([c.process(block[:, [j]]) for j, c in enumerate(corrections)])
            if out.shape[0]:
                yield out
        tail = np.hstack([c.finish() for c in corrections])
        if tail.shape[0]:
            yield tail
