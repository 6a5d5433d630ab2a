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


# Guarded acceptance (JCGM 106:2012, 8.3.2; ISO 14253-1:2017): the acceptance zone is the
# tolerance interval narrowed on each side by U = 2u.
GUARDED = parse_spec(
    """
[stimulus]
kind = "impedance"
[metrics.fs]
lower = 28000.0
upper = 30000.0
decision = "guarded"
[metrics.qm]
lower = 500.0
"""
)


@pytest.mark.parametrize(
    ("value", "u", "verdict"),
    [
        (29000.0, 10.0, PASS),  # far inside: accepted under either rule
        (29990.0, 10.0, FAIL),  # inside the limit, but 29990 + 2*10 > 30000
        (29979.0, 10.0, PASS),  # 29979 + 20 = 29999 <= 30000: inside the guarded zone
        (27990.0, 1.0, FAIL),  # outside the limit itself
    ],
)
def test_guarded_limit_narrows_acceptance_by_the_expanded_uncertainty(value, u, verdict):
    got = judge(GUARDED.metrics, {"fs": MetricValue(value, uncertainty=u), "qm": MetricValue(600)})
    assert got.verdict == verdict
    if verdict == FAIL:
        assert "guarded acceptance zone" in got.failed[0]
        assert "k = 2" in got.failed[0]


def test_simple_rule_accepts_what_the_guarded_rule_rejects():
    # The same value and limits with the default rule: shared risk, accepted.
    simple = parse_spec(
        '[stimulus]\nkind = "impedance"\n[metrics.fs]\nlower = 28000.0\nupper = 30000.0\n'
    )
    got = judge(simple.metrics, {"fs": MetricValue(29990.0, uncertainty=10.0)})
    assert got.verdict == PASS


def test_guarded_limit_without_uncertainty_is_not_evaluable():
    got = judge(GUARDED.metrics, {"fs": MetricValue(29000.0), "qm": MetricValue(600)})
    assert got.verdict == NOT_EVALUABLE
    assert "needs the value's uncertainty" in got.not_evaluable[0]


def test_guarded_zone_can_be_empty():
    # U larger than half the tolerance (2000 Hz wide): nothing can be accepted.
    got = judge(
        GUARDED.metrics, {"fs": MetricValue(29000.0, uncertainty=600.0), "qm": MetricValue(600)}
    )
    assert got.verdict == FAIL
    assert "empty" in got.failed[0]


def test_decision_rule_is_validated_and_kept_in_the_spec_json():
    assert GUARDED.metrics[0].limits[0].to_json()["decision"] == "guarded"
    assert "decision" not in GUARDED.metrics[1].limits[0].to_json()
    with pytest.raises(ValueError, match='expected "simple" or "guarded"'):
        parse_spec(
            '[stimulus]\nkind = "impedance"\n[metrics.fs]\nlower = 1.0\ndecision = "lenient"\n'
        )
