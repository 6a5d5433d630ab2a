"""Verdict logic (piezo.batch.verdict)."""

from __future__ import annotations

import math

import pytest

from piezo.batch.spec import parse_spec
from piezo.batch.verdict import FAIL, NOT_EVALUABLE, PASS, WARN, MetricValue, judge

SPEC = parse_spec(
    """
[stimulus]
kind = "tone"
frequency_hz = 1000
level_pa = 1.0
[metrics.sensitivity]
nominal = -40.0
[[metrics.sensitivity.limits]]
lower_rel = -3.0
upper_rel = 3.0
[[metrics.sensitivity.limits]]
lower_rel = -1.0
upper_rel = 1.0
severity = "warn"
[metrics.thd]
frequency_hz = 1000
upper = 1.0
[metrics.mask]
kind = "band_mask"
frequency_hz = [1000]
lower_db = [-50]
"""
)


def _values(sens=-40.0, thd=0.5, mask=2.0):
    return {
        "sensitivity": MetricValue(sens),
        "thd": MetricValue(thd),
        "mask": MetricValue(mask, detail="worst at 1000 Hz"),
    }


def test_all_inside_passes_and_limits_are_inclusive():
    assert judge(SPEC.metrics, _values()).verdict == PASS
    # Exactly on the fail limit (-43) is inside; it is outside the warn band (-41).
    v = judge(SPEC.metrics, _values(sens=-43.0, thd=1.0, mask=0.0))
    assert v.verdict == WARN
    assert v.warnings == ("sensitivity = -43 dB re 1 V/Pa below lower limit -41 [warn]",)
    assert v.failed == ()


def test_fail_names_metric_value_and_limit():
    v = judge(SPEC.metrics, _values(sens=-44.5, thd=2.5))
    assert v.verdict == FAIL
    assert v.failed == (
        "sensitivity = -44.5 dB re 1 V/Pa below lower limit -43 [fail]",
        "thd = 2.5 % above upper limit 1 [fail]",
    )
    assert v.warnings == ("sensitivity = -44.5 dB re 1 V/Pa below lower limit -41 [warn]",)


def test_mask_violation_message():
    v = judge(SPEC.metrics, _values(mask=-1.25))
    assert v.verdict == FAIL
    assert v.failed == ("mask: outside the mask by 1.25 dB, worst at 1000 Hz [fail]",)


@pytest.mark.parametrize("bad", [None, math.nan, math.inf])
def test_missing_or_non_finite_value_is_not_evaluable_never_pass(bad):
    values = _values()
    values["thd"] = MetricValue(bad, reason="no tone found")
    v = judge(SPEC.metrics, values)
    assert v.verdict == NOT_EVALUABLE
    assert v.not_evaluable[0].startswith("thd: not evaluable")
    assert "no tone found" in v.not_evaluable[0]


def test_metric_absent_from_values_is_not_evaluable():
    values = _values()
    del values["mask"]
    assert judge(SPEC.metrics, values).not_evaluable == ("mask: not evaluable (no value)",)


def test_fail_takes_precedence_over_not_evaluable():
    values = _values(sens=-50.0)
    values["thd"] = MetricValue(None, reason="x")
    v = judge(SPEC.metrics, values)
    assert v.verdict == FAIL
    assert v.not_evaluable == ("thd: not evaluable (x)",)


def test_unusable_capture_is_not_evaluable():
    v = judge(SPEC.metrics, _values(), error="unreadable capture: not a WAV file")
    assert v.verdict == NOT_EVALUABLE
    assert v.not_evaluable == ("unreadable capture: not a WAV file",)
