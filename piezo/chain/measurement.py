"""The measurement chain: from raw samples to volts and pascals.

A recording's samples pass, in the real world, through the sensor (sensitivity, V/Pa),
an amplifier (gain, V/V) and an ADC (full scale, volts at digital full scale). Undoing the
chain gives, per sample::

    volts_at_sensor = raw * full_scale_v / gain          (PCM files: raw is a fraction of FS)
    volts_at_sensor = raw / gain                         (CSV: raw is volts at the ADC)
    pressure_pa     = volts_at_sensor / sensitivity_v_per_pa

Without a sensitivity the chain stops at volts, and levels are in dB re 1 V.

Settings come, lowest priority first, from the defaults, a sidecar profile ``NAME.toml``
next to ``NAME.wav``, a profile given with ``--profile``, and explicit options. Each value
remembers where it came from (:class:`Provenance`), for reports.

Reference pressures are those of ISO 1683:2015: 20 µPa in gases, 1 µPa in liquids.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from piezo.chain.units import (
    parse_charge_gain,
    parse_gain,
    parse_quantity,
    parse_sensitivity,
    ratio_to_db,
)
from piezo.errors import InputError, SpecError, UnitError
from piezo.io.reader import Recording
from piezo.io.text import read_toml
from piezo.validate import physical_value

__all__ = [
    "REFERENCE_AIR_PA",
    "REFERENCE_WATER_PA",
    "CalibratedSource",
    "Chain",
    "ChainSettings",
    "SensorProfile",
    "load_profile",
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
    sensitivity_v_per_pa
        Sensor sensitivity in V/Pa, or None for an uncalibrated (volts) chain.
    reference_pa
        Reference pressure for levels in dB when calibrated.
    """

    full_scale_v: float = 1.0
    gain: float = 1.0
    sensitivity_v_per_pa: float | None = None
    reference_pa: float = REFERENCE_AIR_PA

    def __post_init__(self) -> None:
        for name in ("full_scale_v", "gain", "reference_pa", "sensitivity_v_per_pa"):
            value = getattr(self, name)
            if value is not None:
                physical_value(value, what=name)

    @property
    def calibrated(self) -> bool:
        """True when samples are converted to pascals."""
        return self.sensitivity_v_per_pa is not None

    @property
    def unit(self) -> str:
        """``"Pa"`` when calibrated, else ``"V"``."""
        return "Pa" if self.calibrated else "V"

    @property
    def reference(self) -> float:
        """Reference value for levels in dB: the reference pressure, or 1 V."""
        return self.reference_pa if self.calibrated else 1.0

    @property
    def level_unit(self) -> str:
        """How levels are labelled, e.g. ``"dB re 20 µPa"`` or ``"dB re 1 V"``."""
        if not self.calibrated:
            return "dB re 1 V"
        micro = self.reference_pa / 1e-6
        return f"dB re {micro:g} µPa"

    def scale(self, *, is_pcm: bool) -> float:
        """Factor from raw samples to calibrated units (Pa, or V at the sensor)."""
        factor = (self.full_scale_v if is_pcm else 1.0) / self.gain
        if self.sensitivity_v_per_pa is not None:
            factor /= self.sensitivity_v_per_pa
        return factor

    @property
    def sensitivity_dbv_per_pa(self) -> float | None:
        """Sensitivity as a level, dB re 1 V/Pa."""
        s = self.sensitivity_v_per_pa
        return None if s is None else ratio_to_db(s)


@dataclass(frozen=True)
class SensorProfile:
    """What a profile file says about a sensor and its chain (all optional)."""

    path: Path
    name: str | None = None
    serial: str | None = None
    sensitivity_v_per_pa: float | None = None
    capacitance_f: float | None = None
    calibration_date: str | None = None
    gain: float | None = None
    full_scale_v: float | None = None
    reference_pa: float | None = None
    sample_rate_hz: float | None = None
    raw: Mapping[str, Any] = field(default_factory=dict, repr=False)


_PROFILE_KEYS = {
    "sensor": {
        "name",
        "serial",
        "sensitivity",
        "capacitance",
        "calibration_date",
        "model",
        "notes",
        "charge_sensitivity",
    },
    "chain": {"gain", "full_scale", "reference", "charge_gain", "sample_rate", "notes"},
}


def load_profile(path: str | Path) -> SensorProfile:
    """Read a sensor profile (TOML).

    The format is documented in ``docs/profiles.md``. Values with units are text, parsed
    here with :mod:`piezo.chain.units`; a charge sensitivity (``"12 pC/Pa"``) needs
    ``[chain] charge_gain``.

    Raises
    ------
    SpecError
        Unreadable TOML, unknown sections or keys, or values that do not parse. The message
        names the file and the key.
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
        for key in value:
            if key not in _PROFILE_KEYS[section]:
                raise SpecError(
                    f"unknown key {section}.{key}; expected one of "
                    f"{', '.join(sorted(_PROFILE_KEYS[section]))}",
                    source=str(p),
                )
    sensor = data.get("sensor", {})
    chain = data.get("chain", {})

    def parse(section: str, key: str, fn):
        table = sensor if section == "sensor" else chain
        if key not in table:
            return None
        try:
            return fn(table[key], f"{section}.{key}")
        except UnitError as exc:
            raise SpecError(exc.message, source=str(p)) from None

    charge_gain = parse("chain", "charge_gain", lambda v, w: parse_charge_gain(v, what=w))
    sens_text = sensor.get("sensitivity", sensor.get("charge_sensitivity"))
    sensitivity = None
    if sens_text is not None:
        key = "sensitivity" if "sensitivity" in sensor else "charge_sensitivity"
        try:
            sensitivity = parse_sensitivity(
                sens_text, charge_gain_v_per_c=charge_gain, what=f"sensor.{key}"
            )
        except UnitError as exc:
            raise SpecError(exc.message, source=str(p)) from None
    date = sensor.get("calibration_date")
    if isinstance(date, _dt.date | _dt.datetime):
        date = date.isoformat()
    return SensorProfile(
        path=p,
        name=_text(sensor.get("name")),
        serial=_text(sensor.get("serial")),
        sensitivity_v_per_pa=sensitivity,
        capacitance_f=parse("sensor", "capacitance", lambda v, w: parse_quantity(v, "F", what=w)),
        calibration_date=_text(date),
        gain=parse("chain", "gain", lambda v, w: parse_gain(v, what=w)),
        full_scale_v=parse("chain", "full_scale", lambda v, w: _positive(v, "V", w)),
        reference_pa=parse("chain", "reference", lambda v, w: _positive(v, "Pa", w)),
        sample_rate_hz=parse("chain", "sample_rate", lambda v, w: _positive(v, "Hz", w)),
        raw=data,
    )


def _text(value: Any) -> str | None:
    return None if value is None else str(value)


def _positive(text: Any, unit: str, what: str) -> float:
    value = parse_quantity(text, unit, what=what)
    try:
        return physical_value(value, what=what, unit=unit)
    except InputError:
        raise UnitError(f"{what} must be positive, got {text!r}") from None


def sidecar_path(recording_path: str | Path) -> Path:
    """The sidecar profile that belongs to a recording: ``NAME.toml`` beside ``NAME.wav``."""
    return Path(recording_path).with_suffix(".toml")


@dataclass(frozen=True)
class ChainSettings:
    """Chain options as the user typed them (text), before parsing.

    None means "not given": the profile or default applies.
    """

    sensitivity: str | None = None
    gain: str | None = None
    full_scale: str | None = None
    reference: str | None = None
    charge_gain: str | None = None
    profile: Path | None = None
    #: How messages name each setting (``{"gain": "--gain"}`` on the command line); the
    #: field's own name when absent.
    labels: Mapping[str, str] = field(default_factory=dict)

    def label(self, name: str) -> str:
        """The name messages use for setting ``name``."""
        return self.labels.get(name, name)


@dataclass(frozen=True)
class Provenance:
    """Where each chain value came from: ``"default"``, ``"option"`` or a profile path."""

    full_scale_v: str
    gain: str
    sensitivity_v_per_pa: str
    reference_pa: str
    profiles: tuple[SensorProfile, ...] = ()

    def as_dict(self) -> dict[str, str]:
        """Plain mapping for JSON reports."""
        return {
            "full_scale_v": self.full_scale_v,
            "gain": self.gain,
            "sensitivity_v_per_pa": self.sensitivity_v_per_pa,
            "reference_pa": self.reference_pa,
        }


def resolve_chain(
    recording_path: str | Path | None, settings: ChainSettings, *, use_sidecar: bool = True
) -> tuple[Chain, Provenance]:
    """Combine defaults, sidecar profile, ``--profile`` and options into a :class:`Chain`.

    Later sources override earlier ones: defaults, sidecar, profile file, options.
    """
    values: dict[str, float | None] = {
        "full_scale_v": 1.0,
        "gain": 1.0,
        "sensitivity_v_per_pa": None,
        "reference_pa": REFERENCE_AIR_PA,
    }
    origin = dict.fromkeys(values, "default")
    profiles: list[SensorProfile] = []
    candidates: list[Path] = []
    if use_sidecar and recording_path is not None:
        side = sidecar_path(recording_path)
        if side.is_file() and side != Path(recording_path):
            candidates.append(side)
    if settings.profile is not None:
        candidates.append(Path(settings.profile))
    for path in candidates:
        prof = load_profile(path)
        profiles.append(prof)
        for key in values:
            v = getattr(prof, key)
            if v is not None:
                values[key] = v
                origin[key] = str(path)

    name = settings.label
    charge_gain = (
        parse_charge_gain(settings.charge_gain, what=name("charge_gain"))
        if settings.charge_gain is not None
        else None
    )
    if settings.sensitivity is not None:
        values["sensitivity_v_per_pa"] = parse_sensitivity(
            settings.sensitivity,
            charge_gain_v_per_c=charge_gain,
            what=name("sensitivity"),
            charge_gain_name=name("charge_gain"),
        )
        origin["sensitivity_v_per_pa"] = "option"
    if settings.gain is not None:
        values["gain"] = parse_gain(settings.gain, what=name("gain"))
        origin["gain"] = "option"
    if settings.full_scale is not None:
        values["full_scale_v"] = _positive(settings.full_scale, "V", name("full_scale"))
        origin["full_scale_v"] = "option"
    if settings.reference is not None:
        values["reference_pa"] = _positive(settings.reference, "Pa", name("reference"))
        origin["reference_pa"] = "option"
    chain = Chain(
        full_scale_v=float(values["full_scale_v"]),  # type: ignore[arg-type]
        gain=float(values["gain"]),  # type: ignore[arg-type]
        sensitivity_v_per_pa=values["sensitivity_v_per_pa"],
        reference_pa=float(values["reference_pa"]),  # type: ignore[arg-type]
    )
    return chain, Provenance(**origin, profiles=tuple(profiles))


@dataclass(frozen=True)
class CalibratedSource:
    """A recording seen through a chain: calibrated blocks of the chosen channels.

    Attributes
    ----------
    recording
        The opened recording.
    chain
        The measurement chain applied to every sample.
    channel_indices
        The recording's channels analysed, 0-based, in order.
    """

    recording: Recording
    chain: Chain
    channel_indices: tuple[int, ...]
    provenance: Provenance | None = None

    def __post_init__(self) -> None:
        self.recording._check_channels(self.channel_indices)

    @classmethod
    def of(
        cls,
        recording: Recording,
        chain: Chain,
        channels: Sequence[int] | None = None,
        provenance: Provenance | None = None,
    ) -> CalibratedSource:
        """All channels of ``recording`` when ``channels`` is None."""
        idx = tuple(range(recording.channels)) if channels is None else tuple(channels)
        return cls(recording, chain, idx, provenance)

    @property
    def sample_rate_hz(self) -> float:
        """Sample rate in hertz."""
        return self.recording.sample_rate_hz

    @property
    def frames(self) -> int:
        """Samples per channel."""
        return self.recording.frames

    @property
    def unit(self) -> str:
        """``"Pa"`` or ``"V"``."""
        return self.chain.unit

    @property
    def reference(self) -> float:
        """Reference for dB: pascals when calibrated, 1 V otherwise."""
        return self.chain.reference

    @property
    def scale(self) -> float:
        """Factor from raw samples to calibrated units."""
        return self.chain.scale(is_pcm=self.recording.is_pcm)

    def blocks(
        self, block_frames: int = 65536, *, overlap_frames: int = 0
    ) -> Iterator[np.ndarray]:
        """Yield calibrated float64 blocks ``(frames, channels)`` in Pa or V."""
        factor = self.scale
        for block in self.recording.blocks(
            block_frames, overlap_frames=overlap_frames, channels=self.channel_indices
        ):
            yield block * factor
