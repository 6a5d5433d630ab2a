"""Severities and thresholds of the capture diagnostics (see :mod:`piezo.diagnostics.checker`)."""

from __future__ import annotations

import math
import types
import typing
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field, fields, replace
from enum import StrEnum
from pathlib import Path
from typing import Any

from piezo.errors import SpecError
from piezo.io.text import read_toml

__all__ = [
    "Severity",
    "Thresholds",
    "load_thresholds",
    "parse_threshold_assignment",
    "worst_severity",
]


class Severity(StrEnum):
    """How bad a finding is: ``ok`` < ``warn`` < ``fail``.

    Examples
    --------
    >>> Severity("warn").rank, Severity.FAIL.rank
    (1, 2)
    >>> Severity.FAIL == "fail"  # a str enum: compares and serialises as its text
    True
    """

    OK = "ok"
    WARN = "warn"
    FAIL = "fail"

    @property
    def rank(self) -> int:
        """0 for ok, 1 for warn, 2 for fail."""
        return _RANK[self.value]


_RANK = {"ok": 0, "warn": 1, "fail": 2}


def worst_severity(severities: Iterable[Severity]) -> Severity:
    """Return the worst of ``severities`` (``ok`` when there are none).

    Examples
    --------
    >>> worst_severity([Severity.OK, Severity.FAIL, Severity.WARN]).value
    'fail'
    >>> worst_severity([]).value
    'ok'
    """
    worst = Severity.OK
    for s in severities:
        if s.rank > worst.rank:
            worst = s
    return worst


def _th(default: Any, help_text: str) -> Any:
    return field(default=default, metadata={"help": help_text})


@dataclass(frozen=True)
class Thresholds:
    """Every limit the checks use, with defaults.

    All defaults are common practice of the trade unless a source is named; none comes
    from a standard. Fractions are of full scale unless stated. Load from TOML with
    :func:`load_thresholds`; change single values with :meth:`updated`.

    Examples
    --------
    >>> th = Thresholds()
    >>> th.clip_min_run, th.hum_mains_hz
    (3, (50.0, 60.0))
    >>> th.updated({"hum_mains_hz": "50", "clip_min_run": 5}).as_dict()["hum_mains_hz"]
    [50.0]
    >>> Thresholds(dc_warn_fraction=0.2)  # fails below warns: refused
    Traceback (most recent call last):
    ...
    piezo.errors.SpecError: threshold dc_fail_fraction: must not be below dc_warn_fraction
    """

    # Clipping
    clip_min_run: int = _th(
        3, "samples in a run before it counts as clipping (common practice: 3)"
    )
    clip_level_tolerance: float = _th(
        1e-3,
        "width of the band at the observed extreme that counts as 'at the clip level', as "
        "a fraction of full scale (of the extreme itself when full scale is unknown)",
    )
    clip_flat_tolerance: float = _th(
        1e-4,
        "largest step between consecutive samples of a flat run, fraction of full scale",
    )
    clip_spike_ratio: float = _th(
        20.0,
        "sample density in the band at the extreme over the density just below it; a "
        "smooth peak gives 4.2, a flat clip gives hundreds",
    )
    digital_clip_level: float = _th(
        0.9999, "fraction of full scale at or above which a sample is at the digital extreme"
    )
    clip_fail_fraction: float = _th(
        1e-4, "fraction of clipped samples from which clipping fails (any clip warns)"
    )
    max_event_times: int = _th(5, "number of event times reported per finding")
    # Headroom
    headroom_warn_db: float = _th(
        0.01, "warn when the peak comes closer than this to full scale (dB)"
    )
    underrange_warn_dbfs: float = _th(
        -50.0, "warn when the peak stays below this level re full scale (dBFS)"
    )
    # DC and drift
    dc_warn_fraction: float = _th(0.01, "DC offset that warns, fraction of full scale")
    dc_fail_fraction: float = _th(0.1, "DC offset that fails, fraction of full scale")
    dc_warn_ratio: float = _th(0.25, "DC offset that warns, relative to the AC RMS of the channel")
    drift_interval_s: float = _th(1.0, "interval over which the mean is taken for drift (s)")
    drift_warn_ratio: float = _th(
        0.25,
        "change of the interval means' straight-line trend over the recording that warns, "
        "relative to the AC RMS",
    )
    drift_min_t: float = _th(
        3.0,
        "t statistic the trend's slope needs (against the means' scatter about the line) "
        "to count as drift rather than low-frequency signal",
    )
    # Dropouts
    dropout_min_duration_s: float = _th(
        0.002, "shortest run of zeros or of one repeated value counted as a dropout (s)"
    )
    dropout_min_samples: int = _th(8, "shortest dropout run in samples, whatever the rate")
    dropout_fail_fraction: float = _th(
        0.01, "fraction of samples in dropouts from which the check fails (any dropout warns)"
    )
    edge_silence_warn_fraction: float = _th(
        0.5,
        "constant runs at the start and end (silence before and after the signal) warn "
        "from this fraction of the recording",
    )
    # Mains hum
    hum_mains_hz: tuple[float, ...] = _th((50.0, 60.0), "mains frequencies to look for (Hz)")
    hum_harmonics: int = _th(5, "number of harmonics examined, the fundamental included")
    hum_search_hz: float = _th(
        0.5, "how far from the nominal frequency a line is searched, per harmonic (Hz)"
    )
    hum_detect_db: float = _th(
        6.0,
        "a line counts as hum when its peak stands this far above the local floor (dB); "
        "raised automatically where the PSD's own scatter needs more (few averages)",
    )
    hum_ignore_db: float = _th(
        -90.0, "lines weaker than this relative to the channel's AC power are not hum (dB)"
    )
    hum_warn_db: float = _th(-30.0, "hum level relative to the channel's AC power that warns")
    hum_fail_db: float = _th(-10.0, "hum level relative to the channel's AC power that fails")
    # Spectrum used by hum, roll-off and the PSD floor
    spectrum_resolution_hz: float = _th(
        0.25, "frequency spacing of the diagnostic PSD (Hz); sets the segment length"
    )
    # Low-frequency roll-off
    rolloff_expected_hz: float | None = _th(
        None, "expected low corner of the chain (Hz); none = no comparison"
    )
    rolloff_tolerance: float = _th(0.25, "relative deviation from the expected corner that warns")
    rolloff_content_db: float = _th(
        60.0, "bands more than this below the passband hold no usable content (dB)"
    )
    rolloff_max_residual_db: float = _th(
        1.5, "largest RMS misfit of the high-pass shape that still gives a corner (dB)"
    )
    rolloff_fit_span: float = _th(
        40.0,
        "the fit uses frequencies up to this multiple of the corner (enough passband to "
        "pin its level and tilt)",
    )
    # Noise floor
    noise_interval_s: float = _th(0.1, "interval whose RMS level is one noise-floor sample (s)")
    noise_floor_percentile: float = _th(
        10.0, "percentile of interval levels taken as the noise floor (quietest intervals)"
    )
    signal_percentile: float = _th(90.0, "percentile of interval levels taken as the signal")
    signal_presence_db: float = _th(
        10.0, "the signal counts as present when it stands this far above the floor (dB)"
    )
    snr_warn_db: float = _th(20.0, "a signal-to-noise ratio below this warns (dB)")
    # Metadata
    rate_mismatch_tolerance: float = _th(
        1e-6, "relative difference of file and sidecar sample rate that fails"
    )

    def __post_init__(self) -> None:
        positive = (
            "clip_level_tolerance",
            "clip_spike_ratio",
            "digital_clip_level",
            "clip_fail_fraction",
            "dc_warn_fraction",
            "dc_fail_fraction",
            "dc_warn_ratio",
            "drift_interval_s",
            "drift_warn_ratio",
            "drift_min_t",
            "dropout_min_duration_s",
            "dropout_fail_fraction",
            "edge_silence_warn_fraction",
            "hum_search_hz",
            "spectrum_resolution_hz",
            "rolloff_tolerance",
            "rolloff_content_db",
            "rolloff_max_residual_db",
            "noise_interval_s",
            "rate_mismatch_tolerance",
        )
        for name in positive:
            value = getattr(self, name)
            if not (isinstance(value, int | float) and math.isfinite(value) and value > 0):
                raise SpecError(f"threshold {name}: must be a positive number, got {value!r}")
        for name in ("clip_min_run", "max_event_times", "dropout_min_samples", "hum_harmonics"):
            value = getattr(self, name)
            if not isinstance(value, int) or isinstance(value, bool) or value < 1:
                raise SpecError(f"threshold {name}: must be a whole number >= 1, got {value!r}")
        if self.clip_flat_tolerance < 0:
            raise SpecError(
                f"threshold clip_flat_tolerance: must be >= 0, got {self.clip_flat_tolerance!r}"
            )
        if not self.digital_clip_level <= 1.0:
            raise SpecError(
                f"threshold digital_clip_level: must be at most 1 (full scale), got "
                f"{self.digital_clip_level!r}"
            )
        if self.rolloff_fit_span < 2:
            raise SpecError(
                f"threshold rolloff_fit_span: must be at least 2, got {self.rolloff_fit_span!r}"
            )
        if self.rolloff_expected_hz is not None and not self.rolloff_expected_hz > 0:
            raise SpecError(
                f"threshold rolloff_expected_hz: must be positive, got "
                f"{self.rolloff_expected_hz!r}"
            )
        if not all(f > 0 for f in self.hum_mains_hz) or not self.hum_mains_hz:
            raise SpecError(
                f"threshold hum_mains_hz: needs positive frequencies, got {self.hum_mains_hz!r}"
            )
        for name in ("noise_floor_percentile", "signal_percentile"):
            value = getattr(self, name)
            if not 0 <= value <= 100:
                raise SpecError(f"threshold {name}: must be within 0..100, got {value!r}")
        if self.dc_fail_fraction < self.dc_warn_fraction:
            raise SpecError("threshold dc_fail_fraction: must not be below dc_warn_fraction")
        if self.hum_fail_db < self.hum_warn_db:
            raise SpecError("threshold hum_fail_db: must not be below hum_warn_db")

    @classmethod
    def names(cls) -> list[str]:
        """Names of all thresholds, in declaration order."""
        return [f.name for f in fields(cls)]

    @classmethod
    def describe(cls) -> list[tuple[str, Any, str]]:
        """``(name, default, help)`` for every threshold (for help texts and docs)."""
        return [(f.name, f.default, f.metadata["help"]) for f in fields(cls)]

    def updated(self, values: Mapping[str, Any], *, source: str = "thresholds") -> Thresholds:
        """Return a copy with ``values`` replaced, each checked and converted.

        Raises
        ------
        SpecError
            For an unknown name or a value of the wrong kind; the message names both.
        """
        converted = {}
        for name, value in values.items():
            converted[name] = _convert_threshold(name, value, source)
        return replace(self, **converted)

    def as_dict(self) -> dict[str, Any]:
        """All thresholds as a JSON-friendly mapping."""
        out: dict[str, Any] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            out[f.name] = list(value) if isinstance(value, tuple) else value
        return out


_THRESHOLD_TYPES = typing.get_type_hints(Thresholds)


def _convert_threshold(name: str, value: Any, source: str) -> Any:
    if name not in _THRESHOLD_TYPES:
        raise SpecError(
            f"{source}: unknown threshold {name!r}; known: {', '.join(Thresholds.names())}"
        )
    kind = _THRESHOLD_TYPES[name]
    optional = isinstance(kind, types.UnionType) and type(None) in typing.get_args(kind)
    if optional:
        if value is None or (isinstance(value, str) and value.strip().lower() == "none"):
            return None
        kind = next(k for k in typing.get_args(kind) if k is not type(None))
    try:
        if kind is int:
            if isinstance(value, bool) or (isinstance(value, float) and not value.is_integer()):
                raise ValueError
            return int(value)
        if kind is float:
            if isinstance(value, bool):
                raise ValueError
            return float(value)
        # tuple[float, ...]
        if isinstance(value, str):
            items = [v for v in (s.strip() for s in value.split(",")) if v]
        elif isinstance(value, list | tuple):
            items = list(value)
        else:
            items = [value]
        return tuple(float(v) for v in items)
    except (TypeError, ValueError):
        raise SpecError(
            f"{source}: threshold {name}: cannot use {value!r}; expected {_kind_text(kind)}"
        ) from None


def _kind_text(kind: Any) -> str:
    if kind is int:
        return "a whole number"
    if kind is float:
        return "a number"
    return "a list of numbers"


def load_thresholds(path: str | Path, *, base: Thresholds | None = None) -> Thresholds:
    """Read thresholds from a TOML file.

    The keys are the names of :class:`Thresholds` fields, at the top level of the file or
    inside a ``[thresholds]`` table; keys not given keep the value of ``base`` (the
    defaults when ``base`` is None).

    Raises
    ------
    SpecError
        When the file cannot be read or parsed, or holds an unknown key or a bad value.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp) / "limits.toml"
    ...     _ = path.write_text("[thresholds]\\nhum_mains_hz = [60]\\nsnr_warn_db = 30\\n")
    ...     th = load_thresholds(path)
    >>> th.hum_mains_hz, th.snr_warn_db, th.clip_min_run  # the rest keeps its default
    ((60.0,), 30.0, 3)
    """
    p = Path(path)
    data = read_toml(p, what="thresholds file", error=SpecError)
    table = data.get("thresholds", data)
    if not isinstance(table, dict):
        raise SpecError("[thresholds] must be a table", source=str(p))
    extra = [k for k in data if k != "thresholds"] if "thresholds" in data else []
    if extra:
        raise SpecError(
            f"unexpected top-level keys {extra}; put every threshold in [thresholds]",
            source=str(p),
        )
    return (base or Thresholds()).updated(table, source=str(p))


def parse_threshold_assignment(text: str) -> tuple[str, Any]:
    """Split a command-line override ``NAME=VALUE`` into name and converted value.

    Raises
    ------
    SpecError
        When ``text`` has no ``=``, names an unknown threshold or has a bad value.

    Examples
    --------
    >>> parse_threshold_assignment("clip_min_run=5")
    ('clip_min_run', 5)
    >>> parse_threshold_assignment("hum_mains_hz = 50, 60")
    ('hum_mains_hz', (50.0, 60.0))
    >>> parse_threshold_assignment("clip_min_run=2.5")
    Traceback (most recent call last):
    ...
    piezo.errors.SpecError: --threshold: ...: cannot use '2.5'; expected a whole number
    """
    if "=" not in text:
        raise SpecError(f"--threshold: expected NAME=VALUE, got {text!r}")
    name, value = (s.strip() for s in text.split("=", 1))
    return name, _convert_threshold(name, value, "--threshold")
