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
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy import stats as sstats

from piezo.batch.spec import METRIC_KINDS, MetricSpec, Spec
from piezo.errors import InputError
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
    """What was derived for one metric (scalar or mask)."""

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
    """The new spec file: the base spec with derived limits, n/mean/σ in comments."""
    out_dir = Path(out_path).resolve().parent
    lines = [
        f"# Limit spec derived by `piezo limits derive` from golden captures in {golden_source}",
        f"# base spec: {base_source}; fail limits at mean ± {k:g}·σ"
        + (f", warning band at mean ± {warn_k:g}·σ" if warn_k is not None else "")
        + ".",
        "# σ is the sample standard deviation (n − 1) of the golden units.",
    ]
    lines += [f"# NOTE: {note}" for note in notes]
    lines += ["", "[spec]"]
    if spec.name:
        lines.append(f"name = {toml_value(spec.name)}")
    if spec.serial_pattern is not None:
        lines.append(f"serial_pattern = {toml_value(spec.serial_pattern)}")
        lines.append(f"serial_required = {toml_value(spec.serial_required)}")
    lines += ["", "[capture]", f"channel = {spec.channel}"]
    lines.append(f"full_scale_v = {toml_value(spec.full_scale_v)}")
    lines.append(f"gain = {toml_value(spec.gain)}")
    if spec.rate_hz is not None:
        lines.append(f"rate_hz = {toml_value(spec.rate_hz)}")
    lines += ["", "[stimulus]", f"kind = {toml_value(spec.stimulus.kind)}"]
    stim = dict(spec.stimulus.params)
    if "file" in stim:  # parameters that came from the stimulus file stay there
        stim = {k: v for k, v in stim.items() if k in ("level_pa", "level_db")}
        stim["file"] = os.path.relpath(Path(spec.stimulus.params["file"]).resolve(), out_dir)
    for key, value in stim.items():
        lines.append(f"{key} = {toml_value(value)}")
    by_name = {d.name: d for d in derived}
    for metric in spec.metrics:
        lines += ["", f"[metrics.{metric.name}]", f"kind = {toml_value(metric.kind)}"]
        d = by_name[metric.name]
        params = dict(metric.params)
        params.pop("golden_data", None)
        if "golden" in params:
            params["golden"] = os.path.relpath(Path(params["golden"]).resolve(), out_dir)
        mask = METRIC_KINDS[metric.kind].mask
        if mask and not d.copied:
            params.pop("lower_db", None)
            params.pop("upper_db", None)
        for key, value in params.items():
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
                lines.append(f"lower_db = {toml_value(d.lower)}")
            if d.upper is not None:
                lines.append(f"upper_db = {toml_value(d.upper)}")
            if severity != "fail":
                lines.append(f"severity = {toml_value(severity)}")
            continue
        limits = [(d.lower, d.upper, "fail")]
        if warn_k is not None:
            limits.append((d.warn_lower, d.warn_upper, "warn"))
        for lower, upper, severity in limits:
            lines.append(f"[[metrics.{metric.name}.limits]]")
            if lower is not None:
                lines.append(f"lower = {toml_value(lower)}")
            if upper is not None:
                lines.append(f"upper = {toml_value(upper)}")
            lines.append(f"severity = {toml_value(severity)}")
    return "\n".join(lines) + "\n"


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
    return out
