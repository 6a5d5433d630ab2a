"""The measurement chain: from raw samples to volts and pascals.

A recording's samples pass, in the real world, through the sensor (sensitivity, V/Pa),
an amplifier (gain, V/V) and an ADC (full scale, volts at digital full scale). Undoing the
chain gives, per sample::

    volts_at_sensor = raw * full_scale_v / gain          (PCM files: raw is a fraction of FS)
    volts_at_sensor = raw / gain                         (CSV: raw is volts at the ADC)
    pressure_pa     = volts_at_sensor / sensitivity_v_per_pa

Without a sensitivity the chain stops at volts, and levels are in dB re 1 V.

Settings come, lowest priority first, from the defaults, a sidecar profile ``NAME.toml``
next to ``NAME.wav``, a profile file given explicitly, and explicit values. Each value
remembers where it came from (:class:`Provenance`), for reports.

Reference pressures are those of ISO 1683:2015: 20 µPa in gases, 1 µPa in liquids.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field, replace
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
from piezo.io.text import parse_toml, read_toml
from piezo.io.toml import toml_value
from piezo.validate import physical_value

__all__ = [
    "REFERENCE_AIR_PA",
    "REFERENCE_WATER_PA",
    "CalibratedSource",
    "Chain",
    "ChainSettings",
    "SensorProfile",
    "load_profile",
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


def profile_with_sensitivity(
    text: str | None,
    sensitivity_v_per_pa: float,
    *,
    calibration_date: str,
    source: str | None = None,
) -> str:
    r"""A profile's text with ``[sensor] sensitivity`` and ``calibration_date`` set.

    Everything else (other keys, sections, comments, blank lines) is kept as it is; a
    ``charge_sensitivity`` is dropped (the measured voltage sensitivity replaces it).
    ``text`` None or empty starts a new profile. The caller writes the result.

    Raises
    ------
    InputError
        ``text`` is not valid TOML (the message names ``source``).

    Examples
    --------
    >>> old = '# bench mic\n[sensor]\nname = "film"\n\n[chain]\ngain = "20 dB"\n'
    >>> print(profile_with_sensitivity(old, 8.5e-3, calibration_date="2026-12-01"))
    # bench mic
    [sensor]
    name = "film"
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
    """
    lines = text.splitlines() if text else []
    if lines:
        parse_toml("\n".join(lines), source=source)
    values = {
        "sensitivity": toml_value(f"{1e3 * sensitivity_v_per_pa:.5g} mV/Pa"),
        "calibration_date": calibration_date,
    }
    out: list[str] = []
    section = None
    seen_sensor = False
    written: set[str] = set()
    for line in lines:
        stripped = line.strip()
        if stripped.startswith("["):
            if section == "sensor":
                blanks = 0
                while out and not out[-1].strip():
                    out.pop()
                    blanks += 1
                out.extend(f"{k} = {v}" for k, v in values.items() if k not in written)
                out.extend([""] * blanks)
                written.update(values)
            section = stripped.strip("[]").strip()
            seen_sensor = seen_sensor or section == "sensor"
        key = stripped.split("=", 1)[0].strip() if "=" in stripped else None
        if section == "sensor" and key in values and key not in written:
            out.append(f"{key} = {values[key]}")
            written.add(key)
            continue
        if section == "sensor" and key == "charge_sensitivity":
            continue  # replaced by the measured voltage sensitivity
        out.append(line)
    if section == "sensor":
        out.extend(f"{k} = {v}" for k, v in values.items() if k not in written)
    elif not seen_sensor:
        out = ["[sensor]", *(f"{k} = {v}" for k, v in values.items()), "", *out]
    return "\n".join(out).rstrip("\n") + "\n"


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


#: A chain value as given: a number in SI units, or text with its unit ("12 mV/Pa").
ChainValue = str | float | None


@dataclass(frozen=True)
class ChainSettings:
    """Chain values as given, before parsing: numbers in SI units or unit text.

    None means "not given": the profile or default applies. Error messages name the
    field (``sensitivity``, ``full_scale`` ...).

    Examples
    --------
    >>> chain, _ = resolve_chain(None, ChainSettings(sensitivity="20 mV/Pa", gain="20 dB"))
    >>> round(chain.sensitivity_v_per_pa, 6), round(chain.gain, 6)
    (0.02, 10.0)
    """

    sensitivity: ChainValue = None
    gain: ChainValue = None
    full_scale: ChainValue = None
    reference: ChainValue = None
    charge_gain: ChainValue = None
    profile: str | Path | None = None


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
    """Combine defaults, sidecar profile, profile file and given values into a :class:`Chain`.

    Later sources override earlier ones: defaults, the sidecar ``NAME.toml`` (when
    ``use_sidecar``), ``settings.profile``, then the values of ``settings``. Text is
    parsed here, once, by :mod:`piezo.chain.units`.
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

    charge_gain = (
        parse_charge_gain(settings.charge_gain, what="charge_gain")
        if settings.charge_gain is not None
        else None
    )
    if settings.sensitivity is not None:
        values["sensitivity_v_per_pa"] = parse_sensitivity(
            settings.sensitivity,
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

    def volts_at_sensor(self) -> CalibratedSource:
        """The same recording and channels in volts at the sensor's output.

        Full scale and gain are undone, a sensitivity is not applied: what a calibration,
        a response measurement or a production check measures is the sensor's voltage.
        An uncalibrated source is returned as it is.

        Examples
        --------
        >>> import numpy as np
        >>> from pathlib import Path
        >>> from piezo.io.reader import Recording
        >>> rec = Recording(Path("x.wav"), 48000.0, 4, 1, "WAV", "PCM_24", ("ch0",), True)
        >>> src = CalibratedSource.of(rec, Chain(full_scale_v=2.0, gain=10.0,
        ...                                      sensitivity_v_per_pa=0.02))
        >>> src.unit, round(src.scale, 12)
        ('Pa', 10.0)
        >>> volts = src.volts_at_sensor()
        >>> volts.unit, round(volts.scale, 12)
        ('V', 0.2)
        """
        if not self.chain.calibrated:
            return self
        chain = replace(self.chain, sensitivity_v_per_pa=None)
        return replace(self, chain=chain)

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
        block_frames: int = 65536,
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

    def blocks(
        self, block_frames: int = 65536, *, overlap_frames: int = 0
    ) -> Iterator[np.ndarray]:
        """Yield calibrated float64 blocks ``(frames, channels)`` in Pa or V."""
        factor = self.scale
        for block in self.recording.blocks(
            block_frames, overlap_frames=overlap_frames, channels=self.channel_indices
        ):
            yield block * factor
