"""The level set of a recording as ``piezo levels`` reports it, for Python and JSON.

:func:`levels_of` streams a :class:`~piezo.chain.measurement.CalibratedSource` through
a :class:`~piezo.levels.meter.LevelMeter`; :class:`Levels` holds the result with what it
was measured on, and :meth:`Levels.to_dict` is the command's ``--json`` document.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from piezo.chain.measurement import CalibratedSource
from piezo.io.reader import BLOCK_FRAMES
from piezo.levels.meter import PERCENTILES, LevelMeter, LevelResult
from piezo.levels.stats import VELOCITY_BAND_HZ, BandRms
from piezo.results import reference_key, to_jsonable

__all__ = [
    "CAUTION",
    "LEVEL_KEYS",
    "VIBRATION_CAUTION",
    "Levels",
    "caution_for",
    "levels_of",
    "reference_key",
]

#: Shown with every result that holds sound pressure (terminal and JSON).
CAUTION = (
    "Signal analysis of a recording, not a certified sound level meter measurement. "
    "Occupational noise exposure must be assessed as local regulations require, with "
    "calibrated class 1 instruments."
)

#: Shown instead when no channel measures sound pressure (vibration, force, voltage).
VIBRATION_CAUTION = (
    "Signal analysis of a recording, not a certified measurement. Human exposure to "
    "vibration is assessed with the weightings and methods of ISO 5349-1 (hand-arm) and "
    "ISO 2631-1 (whole-body), as local regulations require."
)


def caution_for(quantities: Sequence[str]) -> str:
    """The caution a level result carries for channels measuring ``quantities``.

    Examples
    --------
    >>> caution_for(["pressure", "acceleration"]) == CAUTION
    True
    >>> caution_for(["acceleration"]) == VIBRATION_CAUTION
    True
    """
    return CAUTION if "pressure" in quantities else VIBRATION_CAUTION


#: Key order of each channel in the JSON document (the names are a public contract).
LEVEL_KEYS = (
    "LZeq", "LAeq", "LCeq", "LAFmax", "LASmax", "LAFmin", "LASmin",
    "LCFmax", "LCSmax", "LCFmin", "LCSmin", "LZFmax", "LZSmax", "LZFmin", "LZSmin",
    "LCpeak", "LZpeak", "LAE", *(f"LAF{p}" for p in PERCENTILES),
    *(f"LAS{p}" for p in PERCENTILES),
)  # fmt: skip


@dataclass(frozen=True)
class Levels:
    """Levels of every analysed channel of one recording.

    Attributes
    ----------
    file
        The recording, as it was opened.
    unit, level_unit
        Unit of the samples (``"Pa"``, ``"m/s²"`` ... or ``"V"``) and of the levels
        (``"dB re 20 µPa"``), shared by the channels; None when channels
        measure different quantities (each channel's entry states its own).
    channel_indices
        The recording's channels, 0-based, in the order of ``result.channels``.
    result
        The level meter's result.
    quantities, units, level_units, references
        Each channel's quantity, unit, level unit and level reference (ISO 1683).
    weighted
        Per channel: True when the A- and C-weighted levels are given (sound pressure,
        volts, or asked for with ``weight_any_quantity``).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "dc.wav"
    >>> sf.write(path, np.full(48000, 0.1), 48000, subtype="FLOAT")
    >>> lv = levels_of(piezo.open(path))  # no sensitivity: volts, dB re 1 V
    >>> lv.unit, lv.channel_indices, round(lv.channel(0)["LZeq"], 2)  # 20 lg 0.1
    ('V', (0,), -20.0)
    """

    file: str
    unit: str | None
    level_unit: str | None
    channel_indices: tuple[int, ...]
    result: LevelResult
    quantities: tuple[str, ...] = ()
    units: tuple[str, ...] = ()
    level_units: tuple[str, ...] = ()
    references: tuple[float, ...] = ()
    weighted: tuple[bool, ...] = ()
    #: Where a channel's response curve leaves the 10 Hz to 20 kHz range of IEC 61672-1
    #: (Table 3) uncovered (end values held).
    response_curve_notes: tuple[str, ...] = ()
    #: Velocity channels: the band of ``velocity_rms`` and each channel's RMS in it (None
    #: for channels of other quantities); ``None``/empty when no channel is a velocity.
    velocity_band_hz: tuple[float, float] | None = None
    velocity_rms: tuple[float | None, ...] = ()

    def channel(self, index: int) -> dict[str, Any]:
        """The levels of the recording's channel ``index`` (0-based), by name.

        Examples
        --------
        See :func:`levels_of`.
        """
        for entry in self.to_dict()["channels"]:
            if entry["channel"] == index:
                return entry
        raise KeyError(f"channel {index} was not analysed (analysed: {self.channel_indices})")

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo levels --json`` document (plain JSON values)."""
        result = self.result
        channels = []
        n = len(self.channel_indices)
        weighted = self.weighted or (True,) * n
        for i, (index, ch) in enumerate(zip(self.channel_indices, result.channels, strict=True)):
            entry: dict[str, Any] = {"channel": index}
            if self.quantities:
                entry.update(
                    quantity=self.quantities[i],
                    unit=self.units[i],
                    level_unit=self.level_units[i],
                )
                entry[reference_key(self.units[i])] = self.references[i]
            entry.update({key: getattr(ch, key) for key in LEVEL_KEYS})
            entry.update(ch.percentile_levels)
            notes = list(ch.notes)
            if not weighted[i]:
                for key in entry:
                    if _weighted_key(key):
                        entry[key] = None
                notes.append(weighting_refusal(self.quantities[i]))
            entry.update(
                duration_s=result.duration_s,
                crest_factor=ch.crest_factor,
                crest_factor_db=ch.crest_factor_db,
                notes=notes,
            )
            if self.velocity_rms and self.velocity_rms[i] is not None:
                entry["velocity_rms_m_per_s"] = self.velocity_rms[i]
            channels.append(entry)
        refs = set(self.references)
        doc: dict[str, Any] = {
            "file": self.file,
            "unit": self.unit,
            "level_unit": self.level_unit,
            **(
                {reference_key(self.unit): refs.pop() if len(refs) == 1 else result.reference}
                if self.unit is not None and len(refs) <= 1
                else {}
            ),
            "sample_rate_hz": result.sample_rate_hz,
            "duration_s": result.duration_s,
            "percentile_interval_s": result.percentile_interval_s,
            "start_up_excluded_s": result.excluded_s,
            "standard": "IEC 61672-1:2013 frequency and time weightings",
            "response_curve_notes": list(self.response_curve_notes),
            "caution": caution_for(self.quantities),
            **(
                {}
                if self.velocity_band_hz is None
                else {"velocity_band_hz": list(self.velocity_band_hz)}
            ),
            "channels": channels,
        }
        if result.history is not None:
            h = result.history
            doc["history"] = {
                "interval_s": h.interval_s,
                "interval_start_s": h.interval_start_s,
                "interval_duration_s": h.interval_duration_s,
                "trace_interval_s": h.trace_interval_s,
                "trace_time_s": h.trace_time_s,
                "channels": [
                    {
                        "channel": index,
                        "LZeq": h.LZeq[:, i],
                        "LAeq": h.LAeq[:, i] if weighted[i] else None,
                        "LCeq": h.LCeq[:, i] if weighted[i] else None,
                        "LAFmax": h.LAFmax[:, i] if weighted[i] else None,
                        "LCpeak": h.LCpeak[:, i] if weighted[i] else None,
                        "LAF": h.LAF[:, i] if weighted[i] else None,
                        "LAS": h.LAS[:, i] if weighted[i] else None,
                    }
                    for i, index in enumerate(self.channel_indices)
                ],
            }
        return to_jsonable(doc)


def _weighted_key(key: str) -> bool:
    """True for the A- and C-weighted level names (LAeq, LCpeak, LAF90 ...)."""
    return key.startswith(("LA", "LC"))


def weighting_refusal(quantity: str) -> str:
    """The one line that says why A and C weightings are not applied to ``quantity``.

    Examples
    --------
    >>> weighting_refusal("acceleration")[:52]
    'A and C weightings apply to sound pressure only (IEC'
    """
    return (
        "A and C weightings apply to sound pressure only (IEC 61672-1); this channel "
        f"measures {quantity}, so A- and C-weighted levels are not given "
        "(--weight-any-quantity, weight_any_quantity=True, gives them anyway)"
    )


class _Relative:
    """Feeds an analysis each channel divided by its level reference (levels re 1)."""

    def __init__(self, analysis: Any, references: Any) -> None:
        self.analysis = analysis
        self.references = references

    def update(self, block: Any) -> None:
        self.analysis.update(block / self.references)


def levels_of(
    source: CalibratedSource,
    *,
    interval_s: float | None = None,
    filter_settle_s: float | None = None,
    percentiles: Sequence[float] | None = None,
    weight_any_quantity: bool = False,
    velocity_band_hz: tuple[float, float] = VELOCITY_BAND_HZ,
    also: Sequence[Any] = (),
    block_frames: int = BLOCK_FRAMES,
    advance: Callable[[int], object] | None = None,
) -> Levels:
    """Equivalent, maximum, minimum, peak, exposure and percentile levels of ``source``.

    IEC 61672-1:2013 frequency (A, C, Z) and time (F, S) weightings, through
    :class:`~piezo.levels.meter.LevelMeter`, in one streaming pass.

    Parameters
    ----------
    source
        The calibrated recording (:func:`piezo.open`).
    interval_s
        Also give a level history: Leq, LAFmax and LCpeak per interval, LAF/LAS every
        0.1 s.
    filter_settle_s
        Filter settling time excluded from the maxima, minima and percentiles; None
        keeps the meter's default.
    percentiles
        Further percentiles (each strictly between 0 and 100), e.g. ``[1, 99]`` for
        LAF1, LAF99, LAS1 and LAS99.
    weight_any_quantity
        Give A- and C-weighted levels for every channel, also for quantities other than
        sound pressure (IEC 61672-1 defines them for sound pressure only; by default such
        channels get Z-weighted levels and a note).
    velocity_band_hz
        For velocity channels (a velocity sensor, or acceleration integrated once): the
        band of their RMS velocity, 10 Hz to 1 kHz by default, the broadband range of
        machine-vibration severity (ISO 20816-1), through
        :class:`~piezo.levels.stats.BandRms`.
    also
        Further streaming analyses fed the same blocks (the report's), so the file is
        read once.
    block_frames
        Frames per block read.
    advance
        Called with the frames of each block read (a progress bar).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "tone.wav"
    >>> t = np.arange(48000 * 2) / 48000
    >>> sf.write(path, 0.5 * np.sin(2 * np.pi * 1000 * t), 48000, subtype="FLOAT")
    >>> lv = levels_of(piezo.open(path, sensitivity="10 mV/Pa"))
    >>> lv.level_unit
    'dB re 20 µPa'
    >>> round(lv.channel(0)["LZeq"], 2)  # 0.5/√2 V RMS over 10 mV/Pa: 35.36 Pa RMS
    124.95
    >>> acc = levels_of(piezo.open(path, sensitivity="10 mV/g"))  # 35.36 g = 346.7 m/s²
    >>> acc.level_unit, acc.channel(0)["LAeq"], round(acc.channel(0)["LZeq"], 2)
    ('dB re 1 µm/s²', None, 170.8)
    """
    chains = source.chains
    references = source.references
    units = source.units
    level_units = tuple(c.level_unit for c in chains)
    same = len(set(units)) == 1 and len(set(level_units)) == 1
    options: dict[str, Any] = {"reference": float(references[0]) if same else 1.0}
    if interval_s is not None:
        options["interval_s"] = interval_s
    if filter_settle_s is not None:
        options["filter_settle_s"] = filter_settle_s
    if percentiles is not None:
        options["percentiles"] = list(percentiles)
    meter = LevelMeter(source.sample_rate_hz, len(source.channel_indices), **options)
    velocity = [c.measured.name == "velocity" for c in chains]
    band = (
        BandRms(source.sample_rate_hz, len(source.channel_indices), velocity_band_hz)
        if any(velocity)
        else None
    )
    # Channels in different units: each divided by its own reference, levels re 1.
    extra = [] if band is None else [band]
    source.feed(
        meter if same else _Relative(meter, references),
        *extra,
        *also,
        advance=advance,
        block_frames=block_frames,
    )
    return Levels(
        file=str(source.recording.path),
        unit=units[0] if same else None,
        level_unit=level_units[0] if same else None,
        channel_indices=source.channel_indices,
        result=meter.result(),
        quantities=tuple(c.measured.name for c in chains),
        units=units,
        level_units=level_units,
        references=tuple(float(r) for r in references),
        weighted=tuple(weight_any_quantity or c.weightable for c in chains),
        response_curve_notes=tuple(
            source.curve_notes(10.0, min(20000.0, source.sample_rate_hz / 2))
        ),
        velocity_band_hz=None if band is None else band.band_hz,
        velocity_rms=()
        if band is None
        else tuple(float(r) if v else None for r, v in zip(band.rms, velocity, strict=True)),
    )
