"""The one calibrated open: a file and its chain, ready for every analysis.

:func:`open_source` (``piezo.open``) reads a recording's header, resolves its
measurement chain (defaults < sidecar ``NAME.toml`` < profile < given values), and the
chain of each channel that a profile's ``[channel.N]`` section describes, and returns
the :class:`~piezo.chain.measurement.CalibratedSource` that every command, the report and
the batch runner analyse. Values may be numbers in SI units or unit text such as
``"12 mV/Pa"``; text is parsed here, once, by :mod:`piezo.chain.units`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from piezo.chain.measurement import (
    CHANNEL_SETTINGS,
    CalibratedSource,
    ChainSettings,
    ChainValue,
    load_profile,
    profile_paths,
    resolve_chain,
)
from piezo.chain.units import parse_quantity
from piezo.errors import InputError
from piezo.io.reader import open_recording

__all__ = ["open_source"]


def open_source(
    path: str | Path,
    *,
    sensitivity: ChainValue = None,
    gain: ChainValue = None,
    full_scale: ChainValue = None,
    reference: ChainValue = None,
    charge_gain: ChainValue = None,
    profile: str | Path | None = None,
    quantity: str | None = None,
    response_curve: str | Path | None = None,
    integrate: int = 0,
    channels: Sequence[int] | None = None,
    rate: ChainValue = None,
    columns: Sequence[str | int] | str | None = None,
    use_sidecar: bool = True,
    allow_time_gaps: bool = False,
    channel_values: Mapping[int, Mapping[str, ChainValue]] | None = None,
) -> CalibratedSource:
    """Open a recording through its measurement chain.

    Parameters
    ----------
    path
        A WAV/FLAC/RF64/W64/... file or a CSV/TSV export (values taken as volts).
    sensitivity
        Sensor sensitivity: a number in V per SI unit of the quantity (V/Pa by default),
        or text in a trade form (``"20 mV/Pa"``, ``"-34 dBV/Pa"``, ``"-196 dB re 1 V/µPa"``,
        ``"10 mV/g"``, ``"2 mV/N"``; ``"12 pC/Pa"``, ``"4.9 pC/g"`` with ``charge_gain``).
        Applies to every channel, over the profiles' values.
    gain
        Amplifier gain between sensor and ADC: V/V as a number, or ``"20 dB"``.
    full_scale
        Volts at digital full scale of an audio file (number or ``"2 V"``).
    reference
        Reference pressure for levels in dB (number in Pa, or ``"1 uPa"`` in water).
    charge_gain
        Charge amplifier gain for a charge sensitivity (V/C, or ``"1 mV/pC"``).
    profile
        A sensor profile (TOML, ``docs/profiles.md``), applied after the sidecar.
    quantity
        What the sensors measure: ``"pressure"``, ``"acceleration"``, ``"velocity"``,
        ``"displacement"``, ``"force"``, ``"voltage"`` or ``"charge"``; by default the
        profile's ``quantity``, else the one the sensitivity's unit names, else pressure.
    response_curve
        A response curve (CSV, :mod:`piezo.chain.curve`) for every channel, over the
        profiles' ``response_curve``; undone in the calibrated blocks.
    integrate
        Integrate the analysed channels once (acceleration to velocity, velocity to
        displacement) or twice (acceleration to displacement), streamed, with the
        DC-blocking high-pass of :mod:`piezo.chain.integrate` (1 Hz).
    channels
        0-based channels to analyse, in order; all when None.
    rate
        Sample rate of a CSV file without a time column (Hz, or ``"48k"``).
    columns
        CSV value columns by header name or 0-based index (a sequence, or text with
        commas); all non-time columns when None.
    use_sidecar
        Read ``NAME.toml`` beside ``NAME.wav`` when it exists.
    allow_time_gaps
        CSV only: accept a time column with gaps and report them on the recording.
    channel_values
        Values of single channels, by 0-based channel number: ``{1: {"sensitivity":
        "50 mV/Pa", "quantity": "pressure"}}``. Keys are the names of the chain
        parameters above (``sensitivity``, ``gain``, ``full_scale``, ``reference``,
        ``charge_gain``, ``quantity``, ``response_curve``); a channel's own value
        overrides the one given for every channel, which overrides the profiles.

    Returns
    -------
    CalibratedSource
        Blocks in the quantity's unit (Pa, m/s², N ...) with a sensitivity, else in V at
        the sensor; each channel through its own chain.

    Raises
    ------
    RecordingError
        The file is missing, unreadable or empty.
    InputError
        A value that cannot be used; the message names the parameter and the file.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> sf.write(folder / "tone.wav", 0.5 * np.ones(4800), 48000, subtype="FLOAT")
    >>> src = open_source(folder / "tone.wav", sensitivity="50 mV/Pa", full_scale="2 V")
    >>> src.unit, src.sample_rate_hz, src.frames
    ('Pa', 48000.0, 4800)
    >>> float(next(src.blocks())[0, 0])  # 0.5 FS * 2 V / 0.05 V/Pa
    20.0
    >>> acc = open_source(folder / "tone.wav", sensitivity="10 mV/g")
    >>> acc.unit, acc.level_unit, round(float(next(acc.blocks())[0, 0]), 3)  # 50 g in m/s²
    ('m/s²', 'dB re 1 µm/s²', 490.332)
    >>> sf.write(folder / "two.wav", np.full((4800, 2), 0.5), 48000, subtype="FLOAT")
    >>> two = open_source(folder / "two.wav", sensitivity="50 mV/Pa",
    ...                   channel_values={1: {"sensitivity": "10 mV/g"}})
    >>> two.units, two.provenance_of(1).sensitivity
    (('Pa', 'm/s²'), 'option')
    >>> open_source(folder / "two.wav", channel_values={2: {"gain": "20 dB"}})
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: ...: gain for channel 2: the recording has 2 channel(s) (0-based)
    """
    rate_hz = None
    if rate is not None:
        rate_hz = parse_quantity(rate, "Hz", what="rate")
        if not rate_hz > 0:
            raise InputError(f"rate must be positive, got {rate!r}")
    if isinstance(columns, str):
        columns = [c.strip() for c in columns.split(",") if c.strip()] or None
    settings = ChainSettings(
        sensitivity=sensitivity,
        gain=gain,
        full_scale=full_scale,
        reference=reference,
        charge_gain=charge_gain,
        profile=profile,
        quantity=quantity,
        response_curve=response_curve,
        channels=_channel_settings(channel_values or {}),
    )
    try:
        recording = open_recording(
            path, rate_hz=rate_hz, columns=columns, allow_time_gaps=allow_time_gaps
        )
        profiles = [
            load_profile(p) for p in profile_paths(path, settings, use_sidecar=use_sidecar)
        ]
        chain, provenance = resolve_chain(path, settings, profiles=profiles)
        numbers = set(settings.channels)
        for number, values in (channel_values or {}).items():
            if number >= recording.channels:
                name = next(iter(values), "channel_values")
                raise InputError(
                    f"{name} for channel {number}: the recording has "
                    f"{recording.channels} channel(s) (0-based)"
                )
        for prof in profiles:
            for number in prof.channels:
                if number >= recording.channels:
                    raise InputError(
                        f"{prof.path}: [channel.{number}] describes channel {number}, but "
                        f"the recording has {recording.channels} channel(s) (0-based)"
                    )
            numbers.update(prof.channels)
        own = {
            number: resolve_chain(path, settings, profiles=profiles, channel=number)
            for number in sorted(numbers)
        }
        return CalibratedSource.of(
            recording, chain, channels or None, provenance, channel_chains=own
        ).integrated(integrate)
    except InputError as exc:
        raise exc.with_source(str(path)) from None


def _channel_settings(
    values: Mapping[int, Mapping[str, ChainValue]],
) -> dict[int, ChainSettings]:
    """``channel_values`` as :class:`ChainSettings` by channel, keys checked."""
    out = {}
    for number, given in values.items():
        if isinstance(number, bool) or not isinstance(number, int) or number < 0:
            raise InputError(
                f"channel_values: channel numbers are 0, 1, ... (0-based), got {number!r}"
            )
        unknown = sorted(set(given) - set(CHANNEL_SETTINGS))
        if unknown:
            raise InputError(
                f"channel_values: channel {number}: unknown value {unknown[0]!r}; one of "
                f"{', '.join(CHANNEL_SETTINGS)}"
            )
        own: dict[str, Any] = {k: v for k, v in given.items() if v is not None}
        out[number] = ChainSettings(**own)
    return out
