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
from piezo.chain.units import parse_gain
from piezo.errors import SpecError, UnitError
from piezo.io.text import parse_toml, read_text

__all__ = [
    "DECISION_RULES",
    "METRIC_KINDS",
    "SEVERITIES",
    "STIMULUS_KINDS",
    "Limit",
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
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
        "silence_after_s": ("nonneg", False, 0.0),
    },
    "tone": {
        "frequency_hz": ("pos", True, None),
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
    },
    "noise": {
        "level_pa": ("pos", False, None),
        "level_db": ("float", False, None),
        "silence_before_s": ("nonneg", False, 0.0),
    },
    # Element tests (docs/element.md): captures are impedance tables (CSV exports) or tap
    # and ring-down recordings.
    "impedance": {"low_frequency_hz": ("pos", False, 1000.0)},
    "tap": {"threshold_db": ("pos", False, 20.0)},
}


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

    @property
    def unit(self) -> str:
        return METRIC_KINDS[self.kind].unit

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

    @property
    def level_pa(self) -> float | None:
        """RMS sound pressure of the stimulus at the unit in pascals, if given."""
        if self.params.get("level_pa") is not None:
            return float(self.params["level_pa"])
        if self.params.get("level_db") is not None:
            return 20e-6 * 10.0 ** (float(self.params["level_db"]) / 20.0)
        return None


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

    def canonical(self) -> dict[str, Any]:
        """Everything that decides a capture's row, as plain JSON-able data."""
        return {
            "piezo": __version__,
            "stimulus": {
                "kind": self.stimulus.kind,
                "params": _jsonable(_without_paths(self.stimulus.params)),
            },
            "capture": {
                "channel": self.channel,
                "full_scale_v": self.full_scale_v,
                "gain": self.gain,
                "rate_hz": self.rate_hz,
            },
            "serial": {"pattern": self.serial_pattern, "required": self.serial_required},
            "metrics": [m.to_json() for m in self.metrics],
        }

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
_CAPTURE_KEYS = ("channel", "full_scale_v", "gain", "rate_hz")
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
    unit.toml: line 7: metrics.sensitivity.nominal: expected a number, got str 'loud'
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
        sparams.update(_sweep_file(check, stim, base))
    for key, (rule, needed, default) in rules.items():
        if key in sparams:
            continue
        if key in stim:
            sparams[key] = check.param(rule, stim[key], ("stimulus", key), base)
        elif needed:
            raise check.error(("stimulus",), f"missing key {key!r} for a {kind} stimulus")
        elif default is not None:
            sparams[key] = default
    if "level_pa" in stim and "level_db" in stim:
        raise check.error(("stimulus", "level_db"), "give level_pa or level_db, not both")
    if kind == "sweep" and not sparams["stop_hz"] > sparams["start_hz"]:
        raise check.error(("stimulus", "stop_hz"), "must be above start_hz")
    stimulus = Stimulus(kind, sparams)

    metrics_table = check.table(data.get("metrics", {}), ("metrics",))
    if not metrics_table:
        raise check.error(("metrics",), "no metrics: add at least one [metrics.<name>] table")
    metrics = tuple(
        _parse_metric(check, mname, mtable, stimulus, base, for_derive)
        for mname, mtable in metrics_table.items()
    )
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
        elif default is not None:
            params[key] = default
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
    )


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
    if kind.needs_level and stimulus.level_pa is None:
        raise check.error(
            path,
            f"metric kind {kind.name!r} needs the stimulus level at the unit: "
            "set stimulus.level_pa (RMS pascals) or stimulus.level_db (dB re 20 µPa)",
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


def _sweep_file(check: _Checker, stim: Mapping[str, Any], base: Path | None) -> dict[str, Any]:
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
    if sweep.acoustic_level_pa is not None and "level_pa" not in stim and "level_db" not in stim:
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
