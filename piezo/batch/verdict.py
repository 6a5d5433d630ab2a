"""Verdict of one capture against a limit spec (pure logic, no I/O).

Rules
-----
- A limit is met when ``lower <= value <= upper`` (limits are inclusive). A limit with
  ``decision = "guarded"`` is met only when ``lower + U <= value <= upper - U``, with
  ``U = 2u`` the expanded uncertainty (k = 2) of the value: the guarded acceptance of
  JCGM 106:2012, 8.3.2 (ISO 14253-1:2017). A guarded limit on a value that carries no
  uncertainty cannot be judged: the metric is not evaluable.
- A metric whose value is missing or not finite is *not evaluable*, with the reason the
  extractor gave (missing stimulus, undeterminable corner ...). It is never a pass.
- Verdict of the capture, in order of precedence:

  1. ``fail``: some limit of severity "fail" is violated (a unit that is known to be bad
     is reported bad even when another metric could not be evaluated);
  2. ``not evaluable``: the capture could not be read, its serial number is missing where
     the spec requires one, or some metric could not be evaluated;
  3. ``warn``: only limits of severity "warn" are violated;
  4. ``pass``: every limit of every metric is met.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from piezo.batch.spec import MetricSpec
from piezo.chain.units import format_uncertain
from piezo.response.uncertainty import decide

__all__ = [
    "FAIL",
    "NOT_EVALUABLE",
    "PASS",
    "VERDICTS",
    "WARN",
    "MetricValue",
    "Verdict",
    "judge",
]

PASS = "pass"
WARN = "warn"
FAIL = "fail"
NOT_EVALUABLE = "not evaluable"
#: All verdicts, best first.
VERDICTS = (PASS, WARN, FAIL, NOT_EVALUABLE)


@dataclass(frozen=True)
class MetricValue:
    """What an extractor found for one metric on one capture.

    Parameters
    ----------
    value
        The metric in the unit of its kind, or None when it cannot be evaluated.
    reason
        Why the value is None (shown to the user), e.g. "no corner inside the sweep range".
    detail
        Optional context for a limit message, e.g. "worst at 8000 Hz".
    curve
        For masks: the measured values at the mask's frequencies (dB), used when limits
        are derived from golden units.
    uncertainty
        Standard uncertainty of ``value`` in the same unit, where the analysis gives one
        (a fit's covariance, the spread of repeated events); None otherwise.

    Examples
    --------
    >>> MetricValue(72.5).evaluable
    True
    >>> mv = MetricValue(None, reason="no corner inside the sweep range")
    >>> mv.evaluable, mv.reason
    (False, 'no corner inside the sweep range')
    >>> MetricValue(float("nan")).evaluable
    False
    """

    value: float | None
    reason: str | None = None
    detail: str | None = None
    curve: tuple[float, ...] | None = None
    uncertainty: float | None = None

    @property
    def evaluable(self) -> bool:
        return self.value is not None and math.isfinite(self.value)


@dataclass(frozen=True)
class Verdict:
    """Outcome for one capture.

    ``failed``, ``warnings`` and ``not_evaluable`` are messages naming the metric, the
    value and the limit, in spec order.

    Examples
    --------
    >>> from piezo.batch.spec import Limit, MetricSpec
    >>> corner = MetricSpec("corner", "corner", {}, (Limit(None, 80.0),))
    >>> v = judge([corner], {"corner": MetricValue(91.0)})
    >>> v.verdict
    'fail'
    >>> v.failed
    ('corner = 91 Hz above upper limit 80 [fail]',)
    >>> v.warnings, v.not_evaluable
    ((), ())
    """

    verdict: str
    failed: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    not_evaluable: tuple[str, ...] = ()


def _fmt(value: float) -> str:
    return f"{value:.6g}"


def judge(
    metrics: Sequence[MetricSpec],
    values: Mapping[str, MetricValue],
    *,
    error: str | None = None,
) -> Verdict:
    """Judge one capture.

    Parameters
    ----------
    metrics
        The spec's metrics (each with its limits).
    values
        Metric name -> :class:`MetricValue`. A metric missing from the mapping is not
        evaluable.
    error
        When set, the capture itself could not be used (unreadable file, missing serial
        number); the verdict is ``not evaluable`` with this message.

    Examples
    --------
    >>> from piezo.batch.spec import Limit, MetricSpec
    >>> corner = MetricSpec("corner", "corner", {}, (Limit(None, 80.0),))
    >>> judge([corner], {"corner": MetricValue(72.5)}).verdict
    'pass'
    >>> judge([corner], {}).not_evaluable
    ('corner: not evaluable (no value)',)
    >>> judge([corner], {}, error="cannot read unit.wav").verdict
    'not evaluable'

    A guarded limit narrows the acceptance zone by U = 2u on each side: -44.5 lies
    inside -45 .. -39, and inside -44.6 .. -39.4 (u = 0.2), but not inside -44.2 .. -39.8
    (u = 0.4):

    >>> sens = MetricSpec(
    ...     "sens", "sensitivity", {}, (Limit(-45.0, -39.0, decision="guarded"),)
    ... )
    >>> judge([sens], {"sens": MetricValue(-44.5, uncertainty=0.2)}).verdict
    'pass'
    >>> judge([sens], {"sens": MetricValue(-44.5, uncertainty=0.4)}).verdict
    'fail'
    """
    if error is not None:
        return Verdict(NOT_EVALUABLE, not_evaluable=(error,))
    failed: list[str] = []
    warnings: list[str] = []
    missing: list[str] = []
    for metric in metrics:
        mv = values.get(metric.name)
        if mv is None or not mv.evaluable:
            reason = mv.reason if mv is not None and mv.reason else "no value"
            missing.append(f"{metric.name}: not evaluable ({reason})")
            continue
        value = float(mv.value)  # type: ignore[arg-type]
        for lim in metric.limits:
            if lim.decision == "guarded":
                u = mv.uncertainty
                if u is None or not math.isfinite(u):
                    missing.append(
                        f"{metric.name}: not evaluable (a guarded limit needs the value's "
                        "uncertainty, and this measurement gives none)"
                    )
                    continue
                message = _guarded_violation(metric, lim.lower, lim.upper, value, u)
            else:
                message = _violation(metric, lim.lower, lim.upper, value, mv.detail)
            if message is None:
                continue
            (failed if lim.severity == "fail" else warnings).append(f"{message} [{lim.severity}]")
    if failed:
        return Verdict(FAIL, tuple(failed), tuple(warnings), tuple(missing))
    if missing:
        return Verdict(NOT_EVALUABLE, (), tuple(warnings), tuple(missing))
    if warnings:
        return Verdict(WARN, (), tuple(warnings), ())
    return Verdict(PASS)


def _guarded_violation(
    metric: MetricSpec, lower: float | None, upper: float | None, value: float, u: float
) -> str | None:
    d = decide(value, low=lower, high=upper, expanded_uncertainty=2.0 * u, rule="guarded")
    if d.accepted:
        return None
    unit = "" if metric.unit == "1" else metric.unit
    space = f" {unit}" if unit else ""
    if d.acceptance_low > d.acceptance_high:
        zone = "empty: U exceeds half the tolerance"
    elif lower is None:
        zone = f"at most {_fmt(d.acceptance_high)}{space}"
    elif upper is None:
        zone = f"at least {_fmt(d.acceptance_low)}{space}"
    else:
        zone = f"{_fmt(d.acceptance_low)} to {_fmt(d.acceptance_high)}{space}"
    return (
        f"{metric.name} = {format_uncertain(value, u, unit)} outside the guarded "
        f"acceptance zone ({zone})"
    )


def _violation(
    metric: MetricSpec, lower: float | None, upper: float | None, value: float, detail: str | None
) -> str | None:
    unit = metric.unit
    if metric.kind in ("response_mask", "band_mask"):
        if lower is not None and value < lower:
            where = f", {detail}" if detail else ""
            return f"{metric.name}: outside the mask by {_fmt(-value)} dB{where}"
        return None
    suffix = f" ({detail})" if detail else ""

    def traded(v: float) -> str:
        # A sensitivity of a line in another quantity: its trade form beside (mV/g ...).
        return _fmt(v) + _trade_suffix(metric, v)

    if lower is not None and value < lower:
        return (
            f"{metric.name} = {_fmt(value)} {unit}{_trade_suffix(metric, value)} below lower "
            f"limit {traded(lower)}{suffix}"
        )
    if upper is not None and value > upper:
        return (
            f"{metric.name} = {_fmt(value)} {unit}{_trade_suffix(metric, value)} above upper "
            f"limit {traded(upper)}{suffix}"
        )
    return None


def _trade_suffix(metric: MetricSpec, value: float) -> str:
    form = metric.trade_form(value)
    return f" ({form})" if form else ""
