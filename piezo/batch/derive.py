"""Limits from golden units: mean ± k·σ per metric and per mask frequency (pure).

Given the rows of a batch run over known-good captures (with mask curves), build the
text of a new limit spec: the base spec with each metric's limits replaced by
mean ± k·σ on the sides the base limits (both sides when it has none), and each mask by
the per-frequency mean ± k·σ. σ is the sample standard deviation (n − 1).

With few golden units σ itself is uncertain. For normally distributed values,
(n − 1)s²/σ² follows a chi-square distribution with n − 1 degrees of freedom, which
gives a confidence interval for σ (NIST/SEMATECH e-Handbook of Statistical Methods,
7.2.3.1 "Confidence interval for the variance"); it is stated in the output.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy import stats as sstats

from piezo.batch.spec import METRIC_KINDS, MetricSpec, Spec
from piezo.chain.units import resolution_decimals
from piezo.errors import InputError
from piezo.io.text import parse_toml
from piezo.io.toml import toml_value

__all__ = [
    "SMALL_N",
    "DerivedMetric",
    "derive_limits",
    "derived_spec_text",
    "sigma_interval",
]

#: Below this many golden units the output warns that the limits are uncertain
#: (common practice, no source; the chi-square interval printed beside it is sourced).
SMALL_N = 30


def sigma_interval(n: int, confidence: float = 0.95) -> tuple[float, float] | None:
    """Interval for σ / s from n values (chi-square, NIST/SEMATECH 7.2.3.1).

    Returns the factors (low, high) such that low·s <= σ <= high·s with the given
    confidence, or None for n < 2.

    Examples
    --------
    For n = 10 (9 degrees of freedom) the chi-square table gives 2.700 and 19.023 at the
    2.5 % and 97.5 % points (NIST/SEMATECH e-Handbook, 1.3.6.7.4), so σ/s lies between
    √(9/19.023) and √(9/2.700):

    >>> low, high = sigma_interval(10)
    >>> round(low, 3), round(high, 3)
    (0.688, 1.826)
    >>> sigma_interval(1) is None
    True
    """
    if n < 2:
        return None
    dof = n - 1
    alpha = 1.0 - confidence
    low = math.sqrt(dof / float(sstats.chi2.ppf(1 - alpha / 2, dof)))
    high = math.sqrt(dof / float(sstats.chi2.ppf(alpha / 2, dof)))
    return low, high


@dataclass(frozen=True)
class DerivedMetric:
    """What was derived for one metric (scalar or mask).

    Examples
    --------
    >>> d = DerivedMetric("thd", 5, mean=0.12, std=0.02, lower=None, upper=0.18)
    >>> d.copied, d.warn_upper
    (False, None)
    """

    name: str
    n: int
    mean: float | list[float] | None
    std: float | list[float] | None
    lower: float | list[float] | None
    upper: float | list[float] | None
    warn_lower: float | list[float] | None = None
    warn_upper: float | list[float] | None = None
    copied: bool = False


def _sides(metric: MetricSpec) -> tuple[bool, bool]:
    """Which sides the base spec limits (both when it has no limits)."""
    if METRIC_KINDS[metric.kind].mask:
        has_lower = metric.params.get("lower_db") is not None
        has_upper = metric.params.get("upper_db") is not None
        if not (has_lower or has_upper):
            return True, True
        return has_lower, has_upper
    if not metric.limits:
        return True, True
    return (
        any(lim.lower is not None for lim in metric.limits),
        any(lim.upper is not None for lim in metric.limits),
    )


def derive_limits(
    rows: Sequence[Mapping[str, Any]],
    spec: Spec,
    *,
    k: float,
    warn_k: float | None = None,
) -> tuple[list[DerivedMetric], list[str]]:
    """Compute mean ± k·σ limits from golden rows.

    Parameters
    ----------
    rows
        Rows of the golden captures (from :func:`~piezo.batch.runner.evaluate_capture`
        with ``with_curves=True``).
    spec
        The base spec the rows were measured with.
    k
        Width of the fail limits in standard deviations (> 0).
    warn_k
        Optional width of a warning band (0 < warn_k < k).

    Returns
    -------
    (derived, notes)
        One :class:`DerivedMetric` per metric of ``spec`` and messages for the user
        (golden captures left out, small n).

    Examples
    --------
    Five golden units at -42 ± 0.2/0.4 dB: the sample σ is √(0.4 / 4) = 0.316 dB. The
    sensitivity has no base limits, so both sides are derived; THD has an upper limit only
    (and, every unit at 0.1 %, zero spread, which a note points out):

    >>> from piezo.batch.spec import parse_spec
    >>> spec = parse_spec('''
    ... [stimulus]
    ... kind = "tone"
    ... frequency_hz = 1000
    ... level_db = 94
    ... [metrics.sensitivity]
    ... [metrics.thd]
    ... frequency_hz = 1000
    ... upper = 1.0
    ... ''')
    >>> levels = [-42.2, -41.8, -42.0, -41.6, -42.4]
    >>> rows = [
    ...     {"file": f"u{i}.wav", "metrics": {"sensitivity": s, "thd": 0.1}}
    ...     for i, s in enumerate(levels)
    ... ]
    >>> rows.append({"file": "u5.wav", "error": "cannot read"})
    >>> (sens, thd), notes = derive_limits(rows, spec, k=3.0)
    >>> sens.n, sens.mean, round(sens.std, 3), round(sens.lower, 2), round(sens.upper, 2)
    (5, -42.0, 0.316, -42.95, -41.05)
    >>> thd.lower, round(thd.upper, 6)
    (None, 0.1)
    >>> notes[0]
    'u5.wav: left out (cannot read)'
    >>> notes[1].startswith("metric 'thd': zero spread")
    True
    """
    if not (math.isfinite(k) and k > 0):
        raise InputError(f"--k: must be a positive number, got {k!r}")
    if warn_k is not None and not (0 < warn_k < k):
        raise InputError(f"--warn-k: must be between 0 and --k ({k:g}), got {warn_k!r}")
    notes: list[str] = []
    for row in rows:
        if row.get("error"):
            notes.append(f"{row['file']}: left out ({row['error']})")
    derived: list[DerivedMetric] = []
    for metric in spec.metrics:
        if not metric.derive:
            derived.append(DerivedMetric(metric.name, 0, None, None, None, None, copied=True))
            continue
        low_side, high_side = _sides(metric)
        if METRIC_KINDS[metric.kind].mask:
            curves = [
                row["curves"][metric.name]
                for row in rows
                if not row.get("error") and row.get("curves", {}).get(metric.name) is not None
            ]
            data = np.array(curves, dtype=float).reshape(len(curves), -1)
            data = data[np.all(np.isfinite(data), axis=1)]
        else:
            values = [row["metrics"].get(metric.name) for row in rows if not row.get("error")]
            data = np.array([v for v in values if v is not None and math.isfinite(v)], float)
        n = int(data.shape[0])
        if n < 2:
            raise InputError(
                f"metric {metric.name!r}: {n} golden capture(s) with a value; at least 2 are "
                "needed for a standard deviation"
            )
        mean = np.mean(data, axis=0)
        std = np.std(data, axis=0, ddof=1)

        def band(
            width: float | None, mean=mean, std=std, low_side=low_side, high_side=high_side
        ) -> tuple[Any, Any]:
            if width is None:
                return None, None
            lo = _plain(mean - width * std) if low_side else None
            hi = _plain(mean + width * std) if high_side else None
            return lo, hi

        lower, upper = band(k)
        warn_lower, warn_upper = band(warn_k)
        derived.append(
            DerivedMetric(
                metric.name, n, _plain(mean), _plain(std), lower, upper, warn_lower, warn_upper
            )
        )
        if np.any(std == 0):
            notes.append(
                f"metric {metric.name!r}: zero spread in the golden units, so the derived "
                "limits sit exactly on their value; consider derive = false and a set limit"
            )
    n_min = min((d.n for d in derived if not d.copied), default=0)
    if 0 < n_min < SMALL_N:
        low, high = sigma_interval(n_min)  # type: ignore[misc]
        notes.append(
            f"only {n_min} golden captures: the limits are uncertain (with n = {n_min} the "
            f"true σ may be {low:.2f} to {high:.2f} times the estimate, 95 % chi-square "
            f"interval); {SMALL_N} or more are advisable"
        )
    return derived, notes


def _plain(value: Any) -> Any:
    arr = np.asarray(value, dtype=float)
    if arr.ndim == 0:
        return float(arr)
    return [float(v) for v in arr]


# ---------------------------------------------------------------------------------------
# Writing TOML.


def _rounded(value: Any, std: Any) -> Any:
    """Limits rounded to two significant digits of σ: the resolution the golden data
    support (σ from n units is itself uncertain by tens of per cent, see
    :func:`sigma_interval`). With zero spread the value is kept as it is."""
    if isinstance(value, list):
        return [_rounded(v, s) for v, s in zip(value, std, strict=True)]
    if value is None or not (isinstance(std, float) and math.isfinite(std) and std > 0):
        return value
    return round(float(value), resolution_decimals(std)) + 0.0  # no "-0.0"


_HEADER = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")


def _base_comments(text: str) -> tuple[dict[str, list[str]], dict[str, list[str]]]:
    """Comment lines of the base spec, so the derived spec keeps them: (before, inside),
    by table name; ``before[""]`` is the file's opening block. A comment block directly
    above a table header goes with that table; one inside a table stays inside it."""
    before: dict[str, list[str]] = {"": []}
    inside: dict[str, list[str]] = {}
    current = ""
    pending: list[str] = []
    for line in text.splitlines():
        stripped = line.strip()
        header = _HEADER.match(line)
        if header:
            current = header.group(1).replace(" ", "")
            before.setdefault(current, []).extend(pending)
            inside.setdefault(current, [])
            pending = []
        elif stripped.startswith("#"):
            pending.append(stripped)
        elif not stripped and pending:
            # A blank line ends a block: it belongs where it stands, not to the next table.
            (before[""] if current == "" else inside[current]).extend(pending)
            pending = []
        elif pending and current:
            inside[current].extend(pending)
            pending = []
    if pending:
        (before[""] if current == "" else inside[current]).extend(pending)
    return before, inside


def _raw_tables(spec: Spec) -> dict[str, Any]:
    """The base spec's TOML as written (unit forms such as "20 dB" intact)."""
    try:
        return parse_toml(spec.text) if spec.text else {}
    except InputError:
        return {}


def _fmt(value: Any) -> str:
    if isinstance(value, list):
        return "[" + ", ".join(f"{v:.4g}" for v in value) + "]"
    return f"{value:.6g}"


def derived_spec_text(
    spec: Spec,
    derived: Sequence[DerivedMetric],
    notes: Sequence[str],
    *,
    k: float,
    warn_k: float | None,
    golden_source: str,
    base_source: str,
    out_path: str | Path,
) -> str:
    """The new spec file: the base spec with derived limits, n/mean/σ in comments.

    Examples
    --------
    The derived text is a spec again:

    >>> from piezo.batch.spec import parse_spec
    >>> spec = parse_spec('''
    ... [stimulus]
    ... kind = "tone"
    ... frequency_hz = 1000
    ... [metrics.thd]
    ... frequency_hz = 1000
    ... upper = 1.0
    ... ''')
    >>> rows = [{"file": "a.wav", "metrics": {"thd": 0.10}},
    ...         {"file": "b.wav", "metrics": {"thd": 0.14}}]
    >>> derived, notes = derive_limits(rows, spec, k=3.0)
    >>> text = derived_spec_text(
    ...     spec, derived, notes, k=3.0, warn_k=None,
    ...     golden_source="golden/", base_source="base.toml", out_path="derived.toml",
    ... )
    >>> print(text.splitlines()[1])
    # base spec: base.toml; fail limits at mean ± 3·σ.
    >>> parse_spec(text).metrics[0].limits[0].upper
    0.205
    """
    out_dir = Path(out_path).resolve().parent
    comments, inner = _base_comments(spec.text)
    raw = _raw_tables(spec)
    raw_capture = raw.get("capture", {})
    raw_stimulus = raw.get("stimulus", {})
    raw_metrics = raw.get("metrics", {})

    def table(name: str) -> list[str]:
        return ["", *comments.get(name, []), f"[{name}]", *inner.get(name, [])]

    lines = [
        f"# Limit spec derived by `piezo limits derive` from golden captures in {golden_source}",
        f"# base spec: {base_source}; fail limits at mean ± {k:g}·σ"
        + (f", warning band at mean ± {warn_k:g}·σ" if warn_k is not None else "")
        + ".",
        "# σ is the sample standard deviation (n − 1) of the golden units.",
    ]
    lines += [f"# NOTE: {note}" for note in notes]
    if comments[""]:
        lines += ["#", "# From the base spec:", *comments[""]]
    lines += table("spec")
    if spec.name:
        lines.append(f"name = {toml_value(spec.name)}")
    if spec.serial_pattern is not None:
        lines.append(f"serial_pattern = {toml_value(spec.serial_pattern)}")
        lines.append(f"serial_required = {toml_value(spec.serial_required)}")
    lines += table("capture")
    lines.append(f"channel = {spec.channel}")
    # Values as the base spec wrote them ("20 dB" stays "20 dB"), else the parsed ones.
    full_scale = raw_capture.get("full_scale_v", spec.full_scale_v)
    lines.append(f"full_scale_v = {toml_value(full_scale)}")
    lines.append(f"gain = {toml_value(raw_capture.get('gain', spec.gain))}")
    if spec.rate_hz is not None:
        lines.append(f"rate_hz = {toml_value(raw_capture.get('rate_hz', spec.rate_hz))}")
    for key in ("quantity", "reference", "charge_gain"):
        if key in raw_capture:
            lines.append(f"{key} = {toml_value(raw_capture[key])}")
    if spec.response_curve_file is not None:
        chart = os.path.relpath(Path(spec.response_curve_file).resolve(), out_dir)
        lines.append(f"response_curve = {toml_value(chart)}")
    lines += table("stimulus")
    lines.append(f"kind = {toml_value(spec.stimulus.kind)}")
    stim = dict(spec.stimulus.params)
    if "file" in stim:  # parameters that came from the stimulus file stay there
        stim = {k: v for k, v in stim.items() if k in ("level", "level_pa", "level_db")}
        stim["file"] = os.path.relpath(Path(spec.stimulus.params["file"]).resolve(), out_dir)
    for key, value in stim.items():
        if key != "file" and key in raw_stimulus:
            value = raw_stimulus[key]
        lines.append(f"{key} = {toml_value(value)}")
    by_name = {d.name: d for d in derived}
    for metric in spec.metrics:
        lines += table(f"metrics.{metric.name}")
        lines.append(f"kind = {toml_value(metric.kind)}")
        d = by_name[metric.name]
        raw_params = raw_metrics.get(metric.name, {})
        params = dict(metric.params)
        params.pop("golden_data", None)
        if "golden" in params:
            params["golden"] = os.path.relpath(Path(params["golden"]).resolve(), out_dir)
        mask = METRIC_KINDS[metric.kind].mask
        if mask and not d.copied:
            params.pop("lower_db", None)
            params.pop("upper_db", None)
        for key, value in params.items():
            if key != "golden" and key in raw_params and not isinstance(raw_params[key], dict):
                value = raw_params[key]
            lines.append(f"{key} = {toml_value(value)}")
        if d.copied:
            lines.append("derive = false")
            lines += _limit_lines(metric)
            continue
        lines.append(f"# n = {d.n}, mean = {_fmt(d.mean)}, σ = {_fmt(d.std)} ({metric.unit})")
        if mask:
            severity = metric.limits[0].severity if metric.limits else "fail"
            lines.append(f"# mean_db = {_fmt(d.mean)}")
            lines.append(f"# std_db = {_fmt(d.std)}")
            if d.lower is not None:
                lines.append(f"lower_db = {toml_value(_rounded(d.lower, d.std))}")
            if d.upper is not None:
                lines.append(f"upper_db = {toml_value(_rounded(d.upper, d.std))}")
            if severity != "fail":
                lines.append(f"severity = {toml_value(severity)}")
            continue
        for lower, upper, severity, decision in _derived_limits(metric, d, warn_k):
            lines.append(f"[[metrics.{metric.name}.limits]]")
            if lower is not None:
                lines.append(f"lower = {toml_value(_rounded(lower, d.std))}")
            if upper is not None:
                lines.append(f"upper = {toml_value(_rounded(upper, d.std))}")
            lines.append(f"severity = {toml_value(severity)}")
            if decision != "simple":
                lines.append(f"decision = {toml_value(decision)}")
    return "\n".join(lines) + "\n"


def _derived_limits(
    metric: MetricSpec, d: DerivedMetric, warn_k: float | None
) -> list[tuple[Any, Any, str, str]]:
    """(lower, upper, severity, decision) of the derived limits, keeping the base's
    severities and decision rules.

    Each base limit keeps its severity and its sides; a "fail" limit moves to mean ± k·σ,
    a "warn" limit to mean ± warn_k·σ (± k·σ without ``warn_k``). A base with no
    limits gets a fail limit on both sides; ``warn_k`` adds a warning band where the
    base has no warn limit.
    """
    fail = (d.lower, d.upper)
    warn = (d.warn_lower, d.warn_upper) if warn_k is not None else fail
    out: list[tuple[Any, Any, str, str]] = []
    for lim in metric.limits or ():
        lo, hi = warn if lim.severity == "warn" else fail
        out.append(
            (
                lo if lim.lower is not None else None,
                hi if lim.upper is not None else None,
                lim.severity,
                lim.decision,
            )
        )
    if not out:
        out.append((*fail, "fail", "simple"))
    if warn_k is not None and not any(sev == "warn" for _, _, sev, _ in out):
        out.append((d.warn_lower, d.warn_upper, "warn", "simple"))
    return out


def _limit_lines(metric: MetricSpec) -> list[str]:
    if METRIC_KINDS[metric.kind].mask:
        severity = metric.limits[0].severity if metric.limits else "fail"
        return [f"severity = {toml_value(severity)}"]
    out: list[str] = []
    for lim in metric.limits:
        out.append(f"[[metrics.{metric.name}.limits]]")
        if lim.lower is not None:
            out.append(f"lower = {toml_value(lim.lower)}")
        if lim.upper is not None:
            out.append(f"upper = {toml_value(lim.upper)}")
        out.append(f"severity = {toml_value(lim.severity)}")
        if lim.decision != "simple":
            out.append(f"decision = {toml_value(lim.decision)}")
    return out
