"""Limit specifications for production batch checks (TOML).

A spec says how a capture was made (the stimulus and the measurement chain), which
metrics are measured on every capture, and the limits each metric must meet. It is
validated completely when it is loaded, before any capture is read; every problem is a
:class:`~piezo.errors.SpecError` naming the line and the key at fault.

The format is documented, with a commented example, in ``docs/batch.md``.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from piezo import __version__
from piezo.chain.curve import ResponseCurve
from piezo.chain.measurement import REFERENCE_AIR_PA, REFERENCE_WATER_PA
from piezo.chain.quantity import (
    QUANTITIES,
    Quantity,
    Sensitivity,
    format_sensitivity,
    parse_sensitivity_of,
    parse_value_of,
)
from piezo.chain.units import parse_charge_gain, parse_gain, parse_quantity, ratio_to_db
from piezo.errors import SpecError, UnitError
from piezo.io.text import parse_toml, read_text

__all__ = [
    "CAPTURE_QUANTITIES",
    "DECISION_RULES",
    "METRIC_KINDS",
    "SEVERITIES",
    "STIMULUS_KINDS",
    "Limit",
    "Measurand",
    "MetricKind",
    "MetricSpec",
    "Spec",
    "Stimulus",
    "load_spec",
    "parse_spec",
]

SEVERITIES = ("fail", "warn")
#: Decision rules a limit may ask for (JCGM 106:2012, clause 8): "simple" accepts inside
#: the limits; "guarded" accepts only inside the limits narrowed by the expanded
#: uncertainty U (k = 2) of the measured value.
DECISION_RULES = ("simple", "guarded")

#: Stimulus kind -> {parameter: (type, required, default)}. Types: "pos" positive float,
#: "nonneg" non-negative float, "float" any finite float.
STIMULUS_KINDS: dict[str, dict[str, tuple[str, bool, Any]]] = {
    "sweep": {
        "file": ("path", False, None),
        "start_hz": ("pos", True, None),
        "stop_hz": ("pos", True, None),
        "duration_s": ("pos", True, None),
        "fade_in_s": ("nonneg", False, None),
        "fade_out_s": ("nonneg", False, None),
        "level": ("text", False, None),
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
        "silence_after_s": ("nonneg", False, 0.0),
    },
    "tone": {
        "frequency_hz": ("pos", True, None),
        "level": ("text", False, None),
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
    },
    "noise": {
        "level": ("text", False, None),
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
    },
    # Element tests (docs/element.md): captures are impedance tables (CSV exports) or tap
    # and ring-down recordings.
    "impedance": {"low_frequency_hz": ("pos", False, 1000.0)},
    "tap": {"threshold_db": ("pos", False, 20.0)},
}


#: Quantities a line's stimulus may be given in ([capture] quantity): the mechanical
#: quantities of :mod:`piezo.chain.quantity` (a voltage or charge is no sensor stimulus).
CAPTURE_QUANTITIES = ("pressure", "acceleration", "velocity", "displacement", "force")


@dataclass(frozen=True)
class Measurand:
    """What a line's stimulus is: the quantity at the unit and its level reference.

    The spec's ``[capture] quantity`` (pressure by default), for sound pressure
    ``reference`` (20 µPa in air, 1 µPa in water; ISO 1683:2015), and ``charge_gain``
    (V/C) when the units feed a charge amplifier. It sets the unit of the stimulus level,
    of the sensitivity metric (dB re 1 V per SI unit of the quantity: the voltage
    sensitivity of the unit, with its charge amplifier if it has one) and its trade form
    (a charge sensitivity, pC per unit, with a charge amplifier).

    Examples
    --------
    An accelerometer line: 10 mV/g is 1.0197 mV/(m/s²), −59.83 dB re 1 V/(m/s²):

    >>> m = Measurand("acceleration")
    >>> m.sensitivity_unit, m.level_unit
    ('dB re 1 V/(m/s²)', 'dB re 1 µm/s²')
    >>> db = m.sensitivity_db("10 mV/g", what="nominal")
    >>> round(db, 2), m.trade_form(db)
    (-59.83, '1.020 mV/(m/s²) (10.00 mV/g)')
    >>> Measurand().trade_form(-42.0) is None      # dB re 1 V/Pa is a microphone's own form
    True
    >>> Measurand("pressure", 1e-6).trade_form(-76.0)   # hydrophones: dB re 1 V/µPa
    '-196.00 dB re 1 V/µPa'

    A force sensor on a 1 mV/pC charge amplifier: 4 pC/N reads 4 mV/N, −47.96 dB re 1 V/N:

    >>> f = Measurand("force", 1e-6, charge_gain_v_per_c=1e9)
    >>> db = f.sensitivity_db("4 pC/N", what="nominal")
    >>> round(db, 2), f.trade_form(db)
    (-47.96, '4.000 pC/N')
    """

    quantity: str = "pressure"
    reference: float = REFERENCE_AIR_PA
    #: Gain of the charge amplifier the units feed (V/C), or None for voltage output.
    charge_gain_v_per_c: float | None = None

    @property
    def measured(self) -> Quantity:
        """The :class:`~piezo.chain.quantity.Quantity` of the stimulus."""
        return QUANTITIES[self.quantity]

    @property
    def in_water(self) -> bool:
        """True for sound pressure referred to 1 µPa (ISO 1683: liquids)."""
        return self.quantity == "pressure" and math.isclose(self.reference, REFERENCE_WATER_PA)

    @property
    def default(self) -> bool:
        """True for sound pressure in air without a charge amplifier, the spec's default."""
        return (
            self.quantity == "pressure" and not self.in_water and self.charge_gain_v_per_c is None
        )

    @property
    def sensitivity_unit(self) -> str:
        """Unit of the sensitivity metric: ``"dB re 1 V/Pa"``, ``"dB re 1 V/(m/s²)"`` ..."""
        return self.measured.sensitivity_label

    @property
    def level_unit(self) -> str:
        """Unit of stimulus and noise levels: ``"dB re 20 µPa"``, ``"dB re 1 µm/s²"`` ..."""
        return self.measured.level_label(in_water=self.in_water)

    def level_of(self, params: Mapping[str, Any]) -> float | None:
        """The stimulus level (RMS, in the quantity's SI unit) of stimulus ``params``.

        ``level`` (text with a unit, already checked), ``level_pa`` or ``level_db``
        (re :attr:`reference`, or the quantity's ISO 1683 reference); None when none is
        given.
        """
        if params.get("level") is not None:
            return parse_value_of(str(params["level"]), quantity=self.quantity)[0]
        if params.get("level_pa") is not None:
            return float(params["level_pa"])
        if params.get("level_db") is not None:
            return self.reference * 10.0 ** (float(params["level_db"]) / 20.0)
        return None

    def sensitivity_db(self, text: str, *, what: str) -> float:
        """A sensitivity in any trade form of the quantity, as a metric value
        (dB re 1 V per SI unit); another quantity is refused, and a charge sensitivity
        without a charge amplifier."""
        s = parse_sensitivity_of(text, quantity=self.quantity, what=what)
        if s.electrical != "V" and self.charge_gain_v_per_c is None:
            raise UnitError(
                f"{what}: {text!r} is a charge sensitivity; set capture.charge_gain (the "
                'charge amplifier\'s gain, e.g. "1 mV/pC") or give volts per unit'
            )
        return ratio_to_db(s.volts_per_unit(self.charge_gain_v_per_c))

    def trade_form(self, value_db: float) -> str | None:
        """The sensitivity metric ``value_db`` in its trade form, or None for a microphone
        (dB re 1 V/Pa is its own)."""
        if self.default or not math.isfinite(value_db):
            return None
        volts = 10.0 ** (value_db / 20.0)
        if self.charge_gain_v_per_c is not None:
            charge = volts / self.charge_gain_v_per_c
            return format_sensitivity(Sensitivity(charge, "C", self.measured))
        return format_sensitivity(Sensitivity(volts, "V", self.measured), in_water=self.in_water)


@dataclass(frozen=True)
class MetricKind:
    """What a metric measures, its unit, its parameters and the stimuli it needs.

    Examples
    --------
    >>> kind = METRIC_KINDS["corner"]
    >>> kind.unit, kind.stimuli, kind.description
    ('Hz', ('sweep',), '-3 dB low corner')
    >>> sorted(METRIC_KINDS["thd"].params)
    ['frequency_hz']
    """

    name: str
    unit: str
    params: dict[str, tuple[str, bool, Any]]
    stimuli: tuple[str, ...]
    mask: bool = False
    needs_level: bool = False
    needs_silence: bool = False
    description: str = ""


#: Every metric kind a spec may use. Parameter types as in :data:`STIMULUS_KINDS`, plus
#: "list" (list of finite floats), "pair" (two increasing positive floats), "path",
#: "weighting" ("A", "C" or "Z") and "fraction" (bandwidth designator 1, 3, 6, 12, 24).
METRIC_KINDS: dict[str, MetricKind] = {
    k.name: k
    for k in (
        MetricKind(
            "sensitivity",
            "dB re 1 V/Pa",
            {"reference_hz": ("pos", False, 1000.0), "nominal": ("float", False, None)},
            ("sweep", "tone"),
            needs_level=True,
            description="sensitivity at reference_hz",
        ),
        MetricKind("corner", "Hz", {}, ("sweep",), description="-3 dB low corner"),
        MetricKind("resonance", "Hz", {}, ("sweep",), description="resonance frequency"),
        MetricKind(
            "thd",
            "%",
            {"frequency_hz": ("pos", True, None)},
            ("sweep", "tone"),
            description="total harmonic distortion at frequency_hz",
        ),
        MetricKind("thd_n", "%", {}, ("tone",), description="THD+N of the test tone"),
        MetricKind("tone_frequency", "Hz", {}, ("tone",), description="test tone frequency"),
        MetricKind(
            "noise_floor",
            "dB re 1 V",
            {"weighting": ("weighting", False, "Z"), "segment_s": ("pair0", False, None)},
            ("sweep", "tone", "noise"),
            needs_silence=True,
            description="RMS level in the silent part of the capture",
        ),
        MetricKind(
            "self_noise",
            "dB re 20 µPa",
            {
                "weighting": ("weighting", False, "A"),
                "segment_s": ("pair0", False, None),
                "reference_hz": ("pos", False, 1000.0),
            },
            ("sweep", "tone"),
            needs_level=True,
            needs_silence=True,
            description="equivalent input noise: silent-part level over the sensitivity",
        ),
        MetricKind(
            "clipping",
            "fraction",
            {},
            ("sweep", "tone", "noise"),
            description="fraction of samples at or beyond full scale",
        ),
        MetricKind(
            "response_mask",
            "dB margin",
            {
                "frequency_hz": ("list", True, None),
                "lower_db": ("list", False, None),
                "upper_db": ("list", False, None),
                "relative_to_hz": ("pos", False, None),
            },
            ("sweep",),
            mask=True,
            description="response inside a frequency/lower/upper mask",
        ),
        MetricKind(
            "band_mask",
            "dB margin",
            {
                "fraction": ("fraction", False, 3),
                "frequency_hz": ("list", True, None),
                "lower_db": ("list", False, None),
                "upper_db": ("list", False, None),
            },
            ("sweep", "tone", "noise"),
            mask=True,
            description="fractional-octave band levels (dB re 1 V) inside a mask",
        ),
        MetricKind(
            "golden_deviation",
            "dB",
            {
                "golden": ("path", True, None),
                "band_hz": ("pair", False, None),
                "relative_to_hz": ("pos", False, None),
            },
            ("sweep",),
            description="largest |deviation| from a golden response in band_hz",
        ),
        # Element metrics (piezo.element): the main mode is the one with the largest
        # motional capacitance C1 (impedance) or amplitude (tap) inside band_hz.
        MetricKind(
            "fs",
            "Hz",
            {"band_hz": ("pair", False, None)},
            ("impedance",),
            description="series resonance of the main mode",
        ),
        MetricKind(
            "fp",
            "Hz",
            {"band_hz": ("pair", False, None)},
            ("impedance",),
            description="parallel resonance of the main mode",
        ),
        MetricKind(
            "qm",
            "1",
            {"band_hz": ("pair", False, None)},
            ("impedance",),
            description="mechanical quality factor of the main mode",
        ),
        MetricKind(
            "k_eff",
            "1",
            {"band_hz": ("pair", False, None)},
            ("impedance",),
            description="effective coupling of the main mode",
        ),
        MetricKind(
            "c0",
            "nF",
            {"band_hz": ("pair", False, None)},
            ("impedance",),
            description="clamped capacitance C0 of the main mode's circuit",
        ),
        MetricKind(
            "free_capacitance",
            "nF",
            {},
            ("impedance",),
            description="capacitance at the stimulus's low_frequency_hz",
        ),
        MetricKind(
            "tan_delta",
            "1",
            {},
            ("impedance",),
            description="loss tangent at the stimulus's low_frequency_hz",
        ),
        MetricKind(
            "mode_count",
            "modes",
            {"band_hz": ("pair", False, None)},
            ("impedance", "tap"),
            description="resonances found in band_hz",
        ),
        MetricKind(
            "mode_frequency",
            "Hz",
            {"band_hz": ("pair", False, None)},
            ("tap",),
            description="ringing frequency of the strongest mode (mean over events)",
        ),
        MetricKind(
            "mode_q",
            "1",
            {"band_hz": ("pair", False, None)},
            ("tap",),
            description="Q of the strongest mode (mean over events)",
        ),
    )
}


@dataclass(frozen=True)
class Limit:
    """One limit on one metric: ``lower <= value <= upper`` or the severity applies.

    ``lower`` or ``upper`` may be None (one-sided limit), never both. ``decision`` is the
    rule of :data:`DECISION_RULES`: with ``"guarded"`` a value is accepted only when its
    expanded uncertainty interval lies inside the limits.

    Examples
    --------
    >>> Limit(lower=None, upper=1.0).to_json()
    {'lower': None, 'upper': 1.0, 'severity': 'fail'}
    >>> Limit(3900.0, 4700.0, severity="warn", decision="guarded").to_json()
    {'lower': 3900.0, 'upper': 4700.0, 'severity': 'warn', 'decision': 'guarded'}
    """

    lower: float | None
    upper: float | None
    severity: str = "fail"
    decision: str = "simple"

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"lower": self.lower, "upper": self.upper}
        out["severity"] = self.severity
        if self.decision != "simple":
            out["decision"] = self.decision
        return out


@dataclass(frozen=True)
class MetricSpec:
    """A metric measured on every capture (one results column) and its limits.

    For masks (``response_mask``, ``band_mask``) the value is the worst margin in dB
    (negative = outside the mask) and the limit is ``lower = 0``.

    Examples
    --------
    A sensitivity metric with a fail band and a narrower warning band:

    >>> m = MetricSpec(
    ...     "sensitivity",
    ...     "sensitivity",
    ...     {"reference_hz": 1000.0},
    ...     (Limit(-45.0, -39.0), Limit(-44.0, -40.0, severity="warn")),
    ... )
    >>> m.unit
    'dB re 1 V/Pa'
    >>> m.fail_limits(), m.spec_limits()
    ((-45.0, -39.0), (-45.0, -39.0))
    """

    name: str
    kind: str
    params: dict[str, Any]
    limits: tuple[Limit, ...]
    derive: bool = True
    line: int = 0
    #: The line's stimulus quantity (units of sensitivity and self-noise); None: the
    #: kind's own units (sound pressure in air).
    measurand: Measurand | None = field(default=None, repr=False)

    @property
    def unit(self) -> str:
        """The unit of the values: the kind's, or for ``sensitivity`` and ``self_noise``
        the line's quantity's (dB re 1 V/(m/s²), dB re 1 µm/s² ...)."""
        if self.measurand is not None:
            if self.kind == "sensitivity":
                return self.measurand.sensitivity_unit
            if self.kind == "self_noise":
                return self.measurand.level_unit
        return METRIC_KINDS[self.kind].unit

    @property
    def has_trade_form(self) -> bool:
        """True for a sensitivity of a line whose quantity has a trade form of its own
        (not sound pressure in air)."""
        return (
            self.kind == "sensitivity"
            and self.measurand is not None
            and (not self.measurand.default)
        )

    def trade_form(self, value: float | None) -> str | None:
        """A sensitivity value in the trade form of the line's quantity (``"10.02 mV/g"``),
        None for other kinds, microphones in air and missing values.

        Examples
        --------
        >>> m = MetricSpec("s", "sensitivity", {}, (), measurand=Measurand("force"))
        >>> m.unit, m.trade_form(-40.0)
        ('dB re 1 V/N', '10.00 mV/N')
        """
        if not self.has_trade_form or value is None:
            return None
        return self.measurand.trade_form(value)  # type: ignore[union-attr]

    def fail_limits(self) -> tuple[float | None, float | None]:
        """The innermost lower and upper limits of severity "fail" (None if absent)."""
        lows = [
            lim.lower for lim in self.limits if lim.severity == "fail" and lim.lower is not None
        ]
        highs = [
            lim.upper for lim in self.limits if lim.severity == "fail" and lim.upper is not None
        ]
        return (max(lows) if lows else None, min(highs) if highs else None)

    def spec_limits(self) -> tuple[float | None, float | None]:
        """Limits for capability and histograms: the innermost "fail" limits, or, for a
        metric with warning limits only, the innermost "warn" limits."""
        if any(lim.severity == "fail" for lim in self.limits):
            return self.fail_limits()
        lows = [lim.lower for lim in self.limits if lim.lower is not None]
        highs = [lim.upper for lim in self.limits if lim.upper is not None]
        return (max(lows) if lows else None, min(highs) if highs else None)

    def to_json(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "kind": self.kind,
            "unit": self.unit,
            "params": _jsonable(_without_paths(self.params)),
            "limits": [lim.to_json() for lim in self.limits],
        }


@dataclass(frozen=True)
class Stimulus:
    """The stimulus each capture was recorded with.

    Examples
    --------
    94 dB re 20 µPa is the usual sound calibrator level, about 1 Pa RMS:

    >>> s = Stimulus("tone", {"frequency_hz": 1000.0, "level_db": 94.0})
    >>> round(s.level_pa, 4)
    1.0024
    >>> Stimulus("noise", {}).level_pa is None
    True
    """

    kind: str
    params: dict[str, Any]
    measurand: Measurand = field(default_factory=Measurand)

    @property
    def level_pa(self) -> float | None:
        """RMS sound pressure of the stimulus at the unit in pascals, if given (None for
        a stimulus of another quantity)."""
        return self.level_value if self.measurand.quantity == "pressure" else None

    @property
    def level_value(self) -> float | None:
        """RMS level of the stimulus at the unit in its quantity's SI unit, if given.

        Examples
        --------
        >>> shaker = Stimulus("tone", {"frequency_hz": 159.2, "level": "1 g"},
        ...                   Measurand("acceleration"))
        >>> shaker.level_value, shaker.level_pa
        (9.80665, None)
        """
        return self.measurand.level_of(self.params)


@dataclass(frozen=True)
class Spec:
    """A validated limit specification.

    Examples
    --------
    >>> spec = parse_spec('''
    ... [spec]
    ... name = "demo"
    ... serial_pattern = 'SN(?P<serial>[0-9]+)'
    ... [stimulus]
    ... kind = "tone"
    ... frequency_hz = 1000
    ... [metrics.thd]
    ... frequency_hz = 1000
    ... upper = 1.0
    ... ''')
    >>> spec.serial_from_name("lot-7/SN00123_rerun.wav")
    '00123'
    >>> spec.serial_from_name("unlabelled.wav") is None
    True
    >>> len(spec.sha256)
    64
    """

    name: str
    stimulus: Stimulus
    metrics: tuple[MetricSpec, ...]
    channel: int = 0
    full_scale_v: float = 1.0
    gain: float = 1.0
    rate_hz: float | None = None
    serial_pattern: str | None = None
    serial_required: bool = False
    path: str | None = None
    text: str = field(default="", repr=False, compare=False)
    measurand: Measurand = field(default_factory=Measurand)
    #: Chart of the line's reference sensor ([capture] response_curve), and its file.
    response_curve: ResponseCurve | None = field(default=None, repr=False, compare=False)
    response_curve_file: str | None = None

    def canonical(self) -> dict[str, Any]:
        """Everything that decides a capture's row, as plain JSON-able data."""
        return {
            "piezo": __version__,
            "stimulus": {
                "kind": self.stimulus.kind,
                "params": _jsonable(_without_paths(self.stimulus.params)),
            },
            "capture": self._canonical_capture(),
            "serial": {"pattern": self.serial_pattern, "required": self.serial_required},
            "metrics": [m.to_json() for m in self.metrics],
        }

    def _canonical_capture(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "channel": self.channel,
            "full_scale_v": self.full_scale_v,
            "gain": self.gain,
            "rate_hz": self.rate_hz,
        }
        # Only what a spec sets: a microphone line's hash stays what it was.
        if not self.measurand.default:
            out["quantity"] = self.measurand.quantity
            out["reference"] = self.measurand.reference
            out["charge_gain_v_per_c"] = self.measurand.charge_gain_v_per_c
        if self.response_curve is not None:
            out["response_curve"] = {
                "frequency_hz": [float(v) for v in self.response_curve.frequency_hz],
                "relative_db": [float(v) for v in self.response_curve.relative_db],
            }
        return out

    @property
    def sha256(self) -> str:
        """Hash of :meth:`canonical` (comments and formatting of the file do not count;
        the piezo version and the golden response data do)."""
        text = json.dumps(self.canonical(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def serial_from_name(self, file_name: str) -> str | None:
        """The unit's serial number read from ``file_name`` (its last path component)."""
        if self.serial_pattern is None:
            return None
        m = re.search(self.serial_pattern, Path(file_name).name)
        if m is None:
            return None
        if "serial" in m.groupdict():
            return m.group("serial")
        if m.groups():
            return m.group(1)
        return m.group(0)


#: Parameters holding file locations: their content is hashed, not where they are.
_PATH_PARAMS = ("file", "golden")


def _without_paths(params: Mapping[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in params.items() if k not in _PATH_PARAMS}


def _jsonable(value: Any) -> Any:
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v) for k, v in sorted(value.items())}
    if isinstance(value, list | tuple):
        return [_jsonable(v) for v in value]
    return value


# ---------------------------------------------------------------------------------------
# Locating keys in the TOML text, for error messages.

_HEADER_RE = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(?:#.*)?$")
_KEY_RE = re.compile(
    r"""^\s*((?:[A-Za-z0-9_\-]+|"[^"]*"|'[^']*')(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|"[^"]*"|'[^']*'))*)\s*="""
)


def _split_dotted(text: str) -> list[str]:
    parts = re.findall(r"""[A-Za-z0-9_\-]+|"[^"]*"|'[^']*'""", text)
    return [p[1:-1] if p[:1] in "\"'" else p for p in parts]


class _Locator:
    """Maps key paths (tuples of names and array indices) to 1-based line numbers."""

    def __init__(self, text: str) -> None:
        self.lines: dict[tuple[Any, ...], int] = {}
        counts: dict[tuple[str, ...], int] = {}
        self._counts = counts
        table: tuple[Any, ...] = ()
        in_multiline: str | None = None
        for number, line in enumerate(text.splitlines(), start=1):
            if in_multiline is not None:
                if line.count(in_multiline) % 2 == 1:
                    in_multiline = None
                continue
            header = _HEADER_RE.match(line)
            if header and not _KEY_RE.match(line):
                names = tuple(_split_dotted(header.group(2)))
                if header.group(1) == "[[":
                    table = self._resolve(names)
                    index = counts.get(names, 0)
                    counts[names] = index + 1
                    table = (*table, index)
                else:
                    table = self._resolve(names)
                self.lines.setdefault(table, number)
                continue
            key = _KEY_RE.match(line)
            if key:
                path = (*table, *_split_dotted(key.group(1)))
                self.lines.setdefault(path, number)
                for quote in ('"""', "'''"):
                    if line.count(quote) % 2 == 1:
                        in_multiline = quote

    def _resolve(self, names: tuple[str, ...]) -> tuple[Any, ...]:
        """Insert the current array index after every array-of-tables prefix."""
        out: list[Any] = []
        for i, name in enumerate(names):
            out.append(name)
            prefix = names[: i + 1]
            if i < len(names) - 1 and prefix in self._counts:
                out.append(self._counts[prefix] - 1)
        return tuple(out)

    def line(self, path: Sequence[Any]) -> int | None:
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None


class _Checker:
    """Validation helpers that raise SpecError naming the line and key."""

    def __init__(self, text: str, source: str | None) -> None:
        self.locator = _Locator(text)
        self.source = source

    def error(self, path: Sequence[Any], problem: str) -> SpecError:
        key = ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in path)
        key = key.replace(".[", "[")
        line = self.locator.line(path)
        where = f"line {line}: " if line is not None else ""
        return SpecError(f"{where}{key or 'spec'}: {problem}", source=self.source)

    def table(self, value: Any, path: Sequence[Any]) -> dict[str, Any]:
        if not isinstance(value, dict):
            raise self.error(path, f"expected a table, got {_show(value)}")
        return value

    def no_unknown(self, table: Mapping[str, Any], allowed: Sequence[str], path: Sequence[Any]):
        for key in table:
            if key not in allowed:
                raise self.error(
                    (*path, key),
                    f"unknown key; allowed here: {', '.join(sorted(allowed))}",
                )

    def number(self, value: Any, path: Sequence[Any], rule: str = "float") -> float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.error(path, f"expected a number, got {_show(value)}")
        value = float(value)
        if not math.isfinite(value):
            raise self.error(path, f"expected a finite number, got {value!r}")
        if rule == "pos" and value <= 0:
            raise self.error(path, f"must be positive, got {value!r}")
        if rule == "nonneg" and value < 0:
            raise self.error(path, f"must not be negative, got {value!r}")
        return value

    def string(self, value: Any, path: Sequence[Any]) -> str:
        if not isinstance(value, str):
            raise self.error(path, f"expected a string, got {_show(value)}")
        return value

    def param(self, rule: str, value: Any, path: Sequence[Any], base: Path | None) -> Any:
        if rule in ("pos", "nonneg", "float"):
            return self.number(value, path, rule)
        if rule == "list":
            if not isinstance(value, list) or not value:
                raise self.error(path, f"expected a non-empty list of numbers, got {_show(value)}")
            return [self.number(v, path) for v in value]
        if rule in ("pair", "pair0"):
            if not isinstance(value, list) or len(value) != 2:
                raise self.error(path, f"expected [low, high], got {_show(value)}")
            low = self.number(value[0], path, "nonneg" if rule == "pair0" else "pos")
            high = self.number(value[1], path, "pos")
            if not high > low:
                raise self.error(path, f"high must exceed low, got {value!r}")
            return [low, high]
        if rule == "text":
            return self.string(value, path)
        if rule == "weighting":
            text = self.string(value, path)
            if text not in ("A", "C", "Z"):
                raise self.error(path, f'expected "A", "C" or "Z", got {text!r}')
            return text
        if rule == "fraction":
            if isinstance(value, bool) or value not in (1, 2, 3, 6, 12, 24):
                raise self.error(path, f"expected 1, 2, 3, 6, 12 or 24, got {_show(value)}")
            return int(value)
        if rule == "path":
            text = self.string(value, path)
            return str(
                (base / text) if base is not None and not Path(text).is_absolute() else Path(text)
            )
        raise AssertionError(f"unknown rule {rule}")


def _show(value: Any) -> str:
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return f"a list {value!r}" if len(repr(value)) < 60 else "a list"
    return f"{type(value).__name__} {value!r}"


_TOP_KEYS = ("spec", "capture", "stimulus", "metrics")
_SPEC_KEYS = ("name", "serial_pattern", "serial_required")
_CAPTURE_KEYS = (
    "channel",
    "full_scale_v",
    "gain",
    "rate_hz",
    "quantity",
    "reference",
    "response_curve",
    "charge_gain",
)
_LIMIT_KEYS = ("lower", "upper", "lower_rel", "upper_rel", "severity", "decision")
_METRIC_COMMON = ("kind", "derive", "limits", "severity", *_LIMIT_KEYS)
_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")


def load_spec(path: str | Path, *, for_derive: bool = False) -> Spec:
    """Read and validate a limit spec file.

    Relative paths inside the spec (golden response files) are relative to the spec
    file's folder.

    Raises
    ------
    SpecError
        Unreadable file, TOML syntax error or invalid content; the message names the
        line and the key at fault.

    Examples
    --------
    The bundled demo spec (doctests run from the repository root):

    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> spec.stimulus.kind, round(spec.gain, 3)
    ('sweep', 10.0)
    >>> [m.name for m in spec.metrics][:4]
    ['sensitivity', 'corner', 'resonance', 'thd_1k']
    """
    p = Path(path)
    text = read_text(p, what="limit spec", error=SpecError)
    return parse_spec(text, source=str(path), base_dir=p.parent, for_derive=for_derive)


def parse_spec(
    text: str,
    *,
    source: str | None = None,
    base_dir: str | Path | None = None,
    for_derive: bool = False,
) -> Spec:
    """Validate the TOML ``text`` of a limit spec and return a :class:`Spec`.

    Parameters
    ----------
    text
        The spec file's content.
    source
        File name used in error messages.
    base_dir
        Folder against which relative paths in the spec are resolved.
    for_derive
        Accept masks without lower_db/upper_db (a base spec for ``piezo limits derive``
        needs only the mask frequencies).

    Examples
    --------
    >>> text = '''
    ... [stimulus]
    ... kind = "tone"
    ... frequency_hz = 1000
    ... level_db = 94
    ... [metrics.sensitivity]
    ... nominal = -42.0
    ... lower_rel = -3.0
    ... upper_rel = 3.0
    ... '''
    >>> spec = parse_spec(text)
    >>> spec.metrics[0].limits
    (Limit(lower=-45.0, upper=-39.0, severity='fail', decision='simple'),)

    Errors name the file, the line and the key:

    >>> try:
    ...     parse_spec(text.replace("-42.0", '"loud"'), source="unit.toml")
    ... except SpecError as exc:
    ...     print(exc)
    unit.toml: line 7: metrics.sensitivity.nominal: expected a number (dB re 1 V/Pa) or a \
sensitivity such as "12 mV/Pa", got str 'loud'
    """
    data = parse_toml(text, source=source, error=SpecError)
    check = _Checker(text, source)
    base = Path(base_dir) if base_dir is not None else None
    check.no_unknown(data, _TOP_KEYS, ())

    head = check.table(data.get("spec", {}), ("spec",))
    check.no_unknown(head, _SPEC_KEYS, ("spec",))
    name = check.string(head.get("name", ""), ("spec", "name"))
    pattern = head.get("serial_pattern")
    if pattern is not None:
        check.string(pattern, ("spec", "serial_pattern"))
        try:
            re.compile(pattern)
        except re.error as exc:
            raise check.error(
                ("spec", "serial_pattern"), f"invalid regular expression: {exc}"
            ) from None
    required = head.get("serial_required", False)
    if not isinstance(required, bool):
        raise check.error(
            ("spec", "serial_required"), f"expected true or false, got {_show(required)}"
        )
    if required and pattern is None:
        raise check.error(("spec", "serial_required"), "needs spec.serial_pattern")

    cap = check.table(data.get("capture", {}), ("capture",))
    check.no_unknown(cap, _CAPTURE_KEYS, ("capture",))
    channel = cap.get("channel", 0)
    if isinstance(channel, bool) or not isinstance(channel, int) or channel < 0:
        raise check.error(
            ("capture", "channel"), f"expected a channel index >= 0, got {_show(channel)}"
        )
    full_scale_v = check.number(cap.get("full_scale_v", 1.0), ("capture", "full_scale_v"), "pos")
    rate_hz = None
    if "rate_hz" in cap:
        rate_hz = check.number(cap["rate_hz"], ("capture", "rate_hz"), "pos")
    try:
        gain = parse_gain(cap.get("gain", 1.0), what="capture.gain")
    except UnitError as exc:
        raise check.error(
            ("capture", "gain"), exc.message.removeprefix("capture.gain: ")
        ) from None
    measurand = _measurand(check, cap)
    curve, curve_file = _reference_chart(check, cap, base)

    if "stimulus" not in data:
        raise check.error(
            ("stimulus",), 'missing table [stimulus] (kind = "sweep", "tone" or "noise")'
        )
    stim = check.table(data["stimulus"], ("stimulus",))
    kind = stim.get("kind")
    if kind not in STIMULUS_KINDS:
        raise check.error(
            ("stimulus", "kind"), f"expected one of {', '.join(STIMULUS_KINDS)}, got {_show(kind)}"
        )
    rules = STIMULUS_KINDS[kind]
    check.no_unknown(stim, ("kind", *rules), ("stimulus",))
    sparams: dict[str, Any] = {}
    if kind == "sweep" and "file" in stim:
        sparams.update(_sweep_file(check, stim, base, measurand))
    for key, (rule, needed, default) in rules.items():
        if key in sparams:
            continue
        if key in stim:
            sparams[key] = check.param(rule, stim[key], ("stimulus", key), base)
        elif needed:
            raise check.error(("stimulus",), f"missing key {key!r} for a {kind} stimulus")
        elif default is not None:
            sparams[key] = default
    _check_level(check, stim, measurand)
    if kind == "sweep" and not sparams["stop_hz"] > sparams["start_hz"]:
        raise check.error(("stimulus", "stop_hz"), "must be above start_hz")
    stimulus = Stimulus(kind, sparams, measurand)

    metrics_table = check.table(data.get("metrics", {}), ("metrics",))
    if not metrics_table:
        raise check.error(("metrics",), "no metrics: add at least one [metrics.<name>] table")
    metrics = tuple(
        _parse_metric(check, mname, mtable, stimulus, base, for_derive)
        for mname, mtable in metrics_table.items()
    )
    if curve is not None:
        _check_chart_use(check, stimulus)
    return Spec(
        name=name,
        stimulus=stimulus,
        metrics=metrics,
        channel=channel,
        full_scale_v=full_scale_v,
        gain=gain,
        rate_hz=rate_hz,
        serial_pattern=pattern,
        serial_required=required,
        path=source,
        text=text,
        measurand=measurand,
        response_curve=curve,
        response_curve_file=curve_file,
    )


def _measurand(check: _Checker, cap: Mapping[str, Any]) -> Measurand:
    """``[capture] quantity`` and ``reference`` (sound pressure: 20 µPa or 1 µPa)."""
    name = cap.get("quantity", "pressure")
    if not isinstance(name, str) or name not in CAPTURE_QUANTITIES:
        raise check.error(
            ("capture", "quantity"),
            f"expected one of {', '.join(CAPTURE_QUANTITIES)}, got {_show(name)}",
        )
    charge_gain = None
    if "charge_gain" in cap:
        try:
            charge_gain = parse_charge_gain(cap["charge_gain"], what="capture.charge_gain")
        except UnitError as exc:
            problem = exc.message.removeprefix("capture.charge_gain: ")
            raise check.error(("capture", "charge_gain"), problem) from None
    if "reference" not in cap:
        own = REFERENCE_AIR_PA if name == "pressure" else QUANTITIES[name].reference
        return Measurand(name, own, charge_gain)
    path = ("capture", "reference")
    if name != "pressure":
        raise check.error(
            path,
            f"only sound pressure has a choice of reference; {name} levels are re "
            f"{QUANTITIES[name].reference_text} (ISO 1683)",
        )
    try:
        reference = parse_quantity(cap["reference"], "Pa", what="capture.reference")
    except UnitError as exc:
        raise check.error(path, exc.message.removeprefix("capture.reference: ")) from None
    for known in (REFERENCE_AIR_PA, REFERENCE_WATER_PA):
        if math.isclose(reference, known, rel_tol=1e-9):
            return Measurand(name, known, charge_gain)
    raise check.error(
        path,
        f'expected "20 uPa" (air) or "1 uPa" (water), the references of ISO 1683, got '
        f"{_show(cap['reference'])}",
    )


def _reference_chart(
    check: _Checker, cap: Mapping[str, Any], base: Path | None
) -> tuple[ResponseCurve | None, str | None]:
    """``[capture] response_curve``: the chart of the line's reference sensor."""
    if "response_curve" not in cap:
        return None, None
    from piezo.chain.measurement import load_response_curve
    from piezo.errors import InputError

    path = ("capture", "response_curve")
    file = check.param("path", cap["response_curve"], path, base)
    try:
        return load_response_curve(file), file
    except InputError as exc:
        raise check.error(path, f"{exc.message} ({file})") from None


def _check_level(check: _Checker, stim: Mapping[str, Any], measurand: Measurand) -> None:
    """One stimulus level at most, in the line's quantity."""
    given = [k for k in ("level", "level_pa", "level_db") if k in stim]
    if len(given) > 1:
        raise check.error(
            ("stimulus", given[1]), f"give one of level, level_pa, level_db, not {given[0]} too"
        )
    if "level_pa" in stim and measurand.quantity != "pressure":
        raise check.error(
            ("stimulus", "level_pa"),
            f"is a sound pressure, but capture.quantity is {measurand.quantity}: "
            f'give level (e.g. "{_EXAMPLE_LEVELS[measurand.quantity]}") or level_db '
            f"({measurand.level_unit})",
        )
    if "level" in stim:
        path = ("stimulus", "level")
        try:
            value, _ = parse_value_of(
                check.string(stim["level"], path),
                quantity=measurand.quantity,
                what="stimulus.level",
            )
        except UnitError as exc:
            raise check.error(path, exc.message.removeprefix("stimulus.level: ")) from None
        if not value > 0:
            raise check.error(path, f"must be positive, got {_show(stim['level'])}")


#: A sensitivity of each quantity, for messages.
_EXAMPLE_SENSITIVITIES = {
    "pressure": "12 mV/Pa",
    "acceleration": "10 mV/g",
    "velocity": "100 mV/(mm/s)",
    "displacement": "8 mV/µm",
    "force": "2 mV/N",
}

#: A level of each quantity, for messages.
_EXAMPLE_LEVELS = {
    "pressure": "1 Pa",
    "acceleration": "1 g",
    "velocity": "10 mm/s",
    "displacement": "10 µm",
    "force": "10 N",
}


def _check_chart_use(check: _Checker, stimulus: Stimulus) -> None:
    """A reference chart corrects a stimulus level: it needs a level to correct."""
    if stimulus.level_value is None:
        raise check.error(
            ("capture", "response_curve"),
            "the chart of the reference sensor corrects the stimulus level, but the "
            "stimulus has none: set stimulus.level or level_db",
        )


def _parse_metric(
    check: _Checker,
    name: str,
    table: Any,
    stimulus: Stimulus,
    base: Path | None,
    for_derive: bool,
) -> MetricSpec:
    path = ("metrics", name)
    if not _NAME_RE.match(name):
        raise check.error(path, "metric names are letters, digits and _ starting with a letter")
    table = check.table(table, path)
    kind_name = table.get("kind", name)
    if kind_name not in METRIC_KINDS:
        raise check.error(
            (*path, "kind") if "kind" in table else path,
            f"unknown metric kind {kind_name!r}; known: {', '.join(METRIC_KINDS)}",
        )
    kind = METRIC_KINDS[kind_name]
    check.no_unknown(table, (*_METRIC_COMMON, *kind.params), path)
    if kind.name == "sensitivity":
        table = _sensitivity_texts(check, table, path, stimulus.measurand)
    if stimulus.kind not in kind.stimuli:
        raise check.error(
            path,
            f"metric kind {kind.name!r} cannot be measured with a {stimulus.kind} stimulus "
            f"(needs {' or '.join(kind.stimuli)})",
        )
    params: dict[str, Any] = {}
    for key, (rule, needed, default) in kind.params.items():
        if key in table:
            params[key] = check.param(rule, table[key], (*path, key), base)
        elif needed:
            raise check.error(path, f"missing key {key!r} for metric kind {kind.name!r}")
        elif key == "reference_hz" and stimulus.kind == "tone":
            params[key] = stimulus.params["frequency_hz"]
        elif key == "weighting" and stimulus.measurand.quantity != "pressure":
            params[key] = "Z"
        elif default is not None:
            params[key] = default
    quantity = stimulus.measurand.quantity
    if params.get("weighting", "Z") != "Z" and quantity != "pressure":
        raise check.error(
            (*path, "weighting"),
            f"the A and C weightings (IEC 61672-1) are for sound pressure, but "
            f'capture.quantity is {quantity}: use "Z"',
        )
    _check_stimulus_fit(check, path, kind, params, stimulus)
    derive = table.get("derive", True)
    if not isinstance(derive, bool):
        raise check.error((*path, "derive"), f"expected true or false, got {_show(derive)}")

    nominal = params.get("nominal")
    if kind.mask:
        if any(k in table for k in ("limits", *_LIMIT_KEYS[:4])):
            raise check.error(path, "a mask has no lower/upper limits: its margin must be >= 0 dB")
        if "decision" in table:
            raise check.error(
                (*path, "decision"), "a mask's margin carries no uncertainty: no decision rule"
            )
        _check_mask(check, path, params, for_derive)
        severity = _severity(check, table.get("severity", "fail"), (*path, "severity"))
        limits: tuple[Limit, ...] = (Limit(0.0, None, severity),)
    else:
        entries: list[tuple[dict[str, Any], tuple[Any, ...]]] = []
        shorthand = {k: table[k] for k in _LIMIT_KEYS if k in table}
        if "limits" in table:
            if any(k in table for k in _LIMIT_KEYS[:4]):
                raise check.error(
                    (*path, "limits"),
                    "give the limits either as lower/upper keys or as [[...limits]] tables, "
                    "not both",
                )
            items = table["limits"]
            if not isinstance(items, list) or not items:
                raise check.error((*path, "limits"), "expected a non-empty array of tables")
            for i, item in enumerate(items):
                entries.append((check.table(item, (*path, "limits", i)), (*path, "limits", i)))
        elif shorthand:
            entries.append((shorthand, path))
        limits = tuple(_parse_limit(check, entry, epath, nominal) for entry, epath in entries)
    return MetricSpec(
        name=name,
        kind=kind.name,
        params=params,
        limits=limits,
        derive=derive,
        line=check.locator.line(path) or 0,
        measurand=stimulus.measurand,
    )


def _sensitivity_texts(
    check: _Checker, table: dict[str, Any], path: tuple[Any, ...], measurand: Measurand
) -> dict[str, Any]:
    """A sensitivity table with its ``nominal``, ``lower`` and ``upper`` written as
    sensitivities (``"10 mV/g"``, ``"-196 dB re 1 V/µPa"``) turned into metric values."""

    def convert(entry: Mapping[str, Any], where: tuple[Any, ...], keys: Sequence[str]):
        out = dict(entry)
        for key in keys:
            if isinstance(out.get(key), str):
                what = ".".join(str(p) for p in (*where, key))
                try:
                    out[key] = measurand.sensitivity_db(out[key], what=what)
                except UnitError as exc:
                    problem = exc.message.removeprefix(what + ": ")
                    if problem.startswith("cannot read"):
                        problem = (
                            f"expected a number ({measurand.sensitivity_unit}) or a "
                            f'sensitivity such as "{_EXAMPLE_SENSITIVITIES[measurand.quantity]}"'
                            f", got {_show(out[key])}"
                        )
                    raise check.error((*where, key), problem) from None
        return out

    out = convert(table, path, ("nominal", "lower", "upper"))
    if isinstance(out.get("limits"), list):
        out["limits"] = [
            convert(item, (*path, "limits", i), ("lower", "upper"))
            if isinstance(item, dict)
            else item
            for i, item in enumerate(out["limits"])
        ]
    return out


def _severity(check: _Checker, value: Any, path: Sequence[Any]) -> str:
    if value not in SEVERITIES:
        raise check.error(path, f'expected "fail" or "warn", got {_show(value)}')
    return str(value)


def _parse_limit(
    check: _Checker, entry: dict[str, Any], path: tuple[Any, ...], nominal: float | None
) -> Limit:
    check.no_unknown(entry, _LIMIT_KEYS, path)
    bounds: dict[str, float] = {}
    for side in ("lower", "upper"):
        if side in entry and f"{side}_rel" in entry:
            raise check.error((*path, f"{side}_rel"), f"give {side} or {side}_rel, not both")
        if side in entry:
            bounds[side] = check.number(entry[side], (*path, side))
        elif f"{side}_rel" in entry:
            rel = check.number(entry[f"{side}_rel"], (*path, f"{side}_rel"))
            if nominal is None:
                raise check.error(
                    (*path, f"{side}_rel"), "relative limits need the metric's nominal"
                )
            bounds[side] = nominal + rel
    if not bounds:
        raise check.error(path, "a limit needs lower and/or upper (or lower_rel/upper_rel)")
    if "lower" in bounds and "upper" in bounds and not bounds["upper"] > bounds["lower"]:
        raise check.error(
            path, f"upper limit {bounds['upper']} must exceed lower {bounds['lower']}"
        )
    severity = _severity(check, entry.get("severity", "fail"), (*path, "severity"))
    decision = entry.get("decision", "simple")
    if decision not in DECISION_RULES:
        raise check.error(
            (*path, "decision"), f'expected "simple" or "guarded", got {_show(decision)}'
        )
    return Limit(bounds.get("lower"), bounds.get("upper"), severity, str(decision))


def _check_stimulus_fit(
    check: _Checker,
    path: tuple[Any, ...],
    kind: MetricKind,
    params: dict[str, Any],
    stimulus: Stimulus,
) -> None:
    sp = stimulus.params
    if kind.needs_level and stimulus.level_value is None:
        m = stimulus.measurand
        pascals = "stimulus.level_pa (RMS pascals), " if m.quantity == "pressure" else ""
        raise check.error(
            path,
            f"metric kind {kind.name!r} needs the stimulus level at the unit: "
            f'set stimulus.level (RMS, e.g. "{_EXAMPLE_LEVELS[m.quantity]}"), {pascals}'
            f"or stimulus.level_db ({m.level_unit})",
        )
    if stimulus.kind == "tone":
        tone_hz = sp["frequency_hz"]
        for key in ("reference_hz", "frequency_hz"):
            if kind.mask:
                break
            if key in params and not math.isclose(params[key], tone_hz, rel_tol=1e-9):
                raise check.error(
                    (*path, key),
                    f"{params[key]:g} Hz differs from the tone stimulus at {tone_hz:g} Hz; "
                    "a tone capture can only be judged at its own frequency",
                )
    if stimulus.kind == "sweep":
        lo, hi = sp["start_hz"], sp["stop_hz"]
        freqs: list[float] = []
        for key in ("reference_hz", "frequency_hz", "relative_to_hz"):
            v = params.get(key)
            if isinstance(v, list):
                freqs.extend(v)
            elif v is not None:
                freqs.append(v)
        freqs.extend(params.get("band_hz") or [])
        for f in freqs:
            if not lo <= f <= hi:
                raise check.error(
                    path,
                    f"{f:g} Hz is outside the sweep range {lo:g}-{hi:g} Hz",
                )
    if kind.needs_silence and "segment_s" not in params:
        if not sp.get("silence_before_s", 0.0) > 0:
            raise check.error(
                path,
                f"metric kind {kind.name!r} needs a silent part: set segment_s = [start, stop] "
                "or stimulus.silence_before_s",
            )
    if kind.name == "golden_deviation":
        params["golden_data"] = _load_golden(check, (*path, "golden"), params["golden"])


_SWEEP_FILE_KEYS = (
    "start_hz",
    "stop_hz",
    "duration_s",
    "fade_in_s",
    "fade_out_s",
    "silence_before_s",
    "silence_after_s",
)


def _sweep_file(
    check: _Checker, stim: Mapping[str, Any], base: Path | None, measurand: Measurand
) -> dict[str, Any]:
    """Sweep parameters from a stimulus file written by ``piezo sweep make``."""
    from piezo.response.stimulus import SweepSpec, read_stimulus

    path = ("stimulus", "file")
    for key in _SWEEP_FILE_KEYS:
        if key in stim:
            raise check.error(("stimulus", key), "comes from stimulus.file; do not repeat it")
    file = check.param("path", stim["file"], path, base)
    try:
        sweep, text = read_stimulus(file)
    except SpecError as exc:
        raise check.error(path, f"{file}: {exc.message}") from None
    if not isinstance(sweep, SweepSpec):
        raise check.error(path, f"{file} describes {sweep.kind!r}, not a sweep")
    values: dict[str, float | str] = {key: float(getattr(sweep, key)) for key in _SWEEP_FILE_KEYS}
    values["file"] = file
    values["file_data"] = text
    given = any(k in stim for k in ("level", "level_pa", "level_db"))
    if sweep.acoustic_level_pa is not None and measurand.quantity == "pressure" and not given:
        values["level_pa"] = float(sweep.acoustic_level_pa)
    return values


def _check_mask(
    check: _Checker, path: tuple[Any, ...], params: dict[str, Any], for_derive: bool
) -> None:
    freqs = params["frequency_hz"]
    if any(f <= 0 for f in freqs):
        raise check.error((*path, "frequency_hz"), "frequencies must be positive")
    if any(b <= a for a, b in itertools.pairwise(freqs)):
        raise check.error((*path, "frequency_hz"), "frequencies must increase")
    lower, upper = params.get("lower_db"), params.get("upper_db")
    if lower is None and upper is None and not for_derive:
        raise check.error(path, "a mask needs lower_db and/or upper_db")
    for key, values in (("lower_db", lower), ("upper_db", upper)):
        if values is not None and len(values) != len(freqs):
            raise check.error(
                (*path, key),
                f"has {len(values)} values but frequency_hz has {len(freqs)}",
            )
    if lower is not None and upper is not None:
        for f, lo, hi in zip(freqs, lower, upper, strict=True):
            if not hi > lo:
                raise check.error(
                    (*path, "upper_db"), f"upper {hi} not above lower {lo} at {f:g} Hz"
                )
    if "fraction" in params:
        _check_band_frequencies(check, path, freqs, params["fraction"])


def _check_band_frequencies(
    check: _Checker, path: tuple[Any, ...], freqs: list[float], fraction: int
) -> None:
    """Each frequency of a band mask must name a 1/fraction-octave band (IEC 61260-1)."""
    from piezo.errors import InputError
    from piezo.spectral.bands import fractional_octave_bands

    for f in freqs:
        try:
            fractional_octave_bands(fraction, low_hz=f, high_hz=f)
        except InputError:
            raise check.error(
                (*path, "frequency_hz"),
                f"{f:g} Hz is not the mid-band frequency of a 1/{fraction}-octave band "
                "(IEC 61260-1; e.g. 1000, 1250, 1600 for 1/3 octave)",
            ) from None


def _load_golden(check: _Checker, path: tuple[Any, ...], file: str) -> dict[str, list[float]]:
    """Read a golden response with :func:`piezo.response.fit.parse_response_csv` (frequency_hz,
    magnitude_db; the response CSV that ``piezo sweep analyze --csv`` writes)."""
    from piezo.errors import InputError
    from piezo.response.fit import read_response_table

    try:
        table = read_response_table(file, what="golden response", finite=True)
    except InputError as exc:
        raise check.error(path, f"{exc.message} ({file})") from None
    return {
        "frequency_hz": [float(v) for v in table.frequency_hz],
        "magnitude_db": [float(v) for v in table.magnitude_db],
    }
