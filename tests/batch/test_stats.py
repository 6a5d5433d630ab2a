"""Lot statistics (piezo.batch.stats)."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from piezo.batch.stats import (
    capability,
    far_outliers,
    histogram,
    verdict_counts,
    yield_fraction,
)


def test_capability_worked_example_by_hand():
    # NIST/SEMATECH e-Handbook of Statistical Methods 6.1.6: Cp = (USL - LSL)/(6 s),
    # Cpk = min(USL - mean, mean - LSL)/(3 s).
    # Worked by hand: values 9.5, 10, 10.5 -> mean 10, deviations -0.5, 0, 0.5,
    # s^2 = (0.25 + 0 + 0.25)/(3 - 1) = 0.25, s = 0.5. LSL 8, USL 13:
    # Cp = 5/3 = 1.6667; Cpu = 3/1.5 = 2; Cpl = 2/1.5 = 1.3333; Cpk = 1.3333.
    c = capability([9.5, 10.0, 10.5], lsl=8.0, usl=13.0)
    assert c.n == 3
    # Exact arithmetic on binary-exact inputs: only float rounding (1e-12 is ample).
    assert_allclose([c.mean, c.std], [10.0, 0.5], rtol=1e-12)
    assert_allclose([c.cp, c.cpu, c.cpl, c.cpk], [5 / 3, 2.0, 4 / 3, 4 / 3], rtol=1e-12)


def test_capability_handbook_style_off_centre_process():
    # Off-centre example in the style of the handbook's (from memory: USL 20, LSL 8,
    # mean 16, sigma 2 gives Cp = 1.0 and Cpk = 0.667). Values 14, 16, 18 have
    # mean 16 and s = 2 (deviations -2, 0, 2: s^2 = 8/2 = 4), derived by hand.
    c = capability([14.0, 16.0, 18.0], lsl=8.0, usl=20.0)
    assert_allclose([c.cp, c.cpk], [1.0, 2 / 3], rtol=1e-12)


def test_capability_one_sided_and_degenerate():
    c = capability([14.0, 16.0, 18.0], usl=20.0)
    assert c.cp is None and c.cpl is None
    assert_allclose(c.cpk, 4 / 6, rtol=1e-12)
    assert capability([1.0, 1.0], lsl=0.0, usl=2.0).cp is None  # zero spread
    assert capability([1.0], lsl=0.0, usl=2.0).std is None  # one value
    assert capability([], lsl=0.0).n == 0
    # Non-finite values (not evaluable units) are ignored.
    assert capability([14.0, np.nan, 16.0, 18.0], lsl=8.0, usl=20.0).n == 3


def test_capability_matches_numpy_on_random_lot():
    x = np.random.default_rng(7).normal(-42.0, 0.7, 200)
    c = capability(x, lsl=-45.0, usl=-39.0)
    s = np.std(x, ddof=1)
    assert_allclose(c.cp, 6.0 / (6 * s), rtol=1e-12)
    assert_allclose(c.cpk, min(-39.0 - x.mean(), x.mean() + 45.0) / (3 * s), rtol=1e-12)


def test_counts_and_yield():
    counts = verdict_counts(["pass", "warn", "fail", "pass", "not evaluable"])
    assert counts == {"pass": 2, "warn": 1, "fail": 1, "not evaluable": 1}
    assert yield_fraction(counts) == pytest.approx(3 / 5)
    assert yield_fraction(verdict_counts([])) is None
    with pytest.raises(ValueError, match="unknown verdict 'ok'"):
        verdict_counts(["ok"])


def test_histogram_spans_values_and_limits():
    x = np.random.default_rng(3).normal(0.0, 1.0, 500)
    h = histogram(x, lower=-5.0, upper=6.0)
    assert sum(h.counts) == 500
    assert h.edges[0] == -5.0 and h.edges[-1] == 6.0
    assert len(h.edges) == len(h.counts) + 1
    assert 10 <= len(h.counts) <= 60
    # Freedman-Diaconis width 2 IQR / n^(1/3) (IQR of N(0, 1) = 1.349): 0.34 for n = 500,
    # so 11 / 0.34 -> 33 bins over the limits' span.
    q1, q3 = np.percentile(x, [25, 75])
    assert len(h.counts) == int(np.ceil(11.0 / (2 * (q3 - q1) / 500 ** (1 / 3))))
    # A far outlier (beyond quartiles + 3 IQR, Tukey's far fence) is counted apart.
    wild = histogram(np.concatenate([x, [60.0]]), lower=-5.0, upper=6.0)
    assert (wild.above, wild.below, sum(wild.counts)) == (1, 0, 500)
    assert wild.edges[-1] == 6.0
    same = histogram(np.full(10, 3.0))
    assert sum(same.counts) == 10 and same.edges[0] < 3.0 < same.edges[-1]
    assert histogram([]).counts == []


def test_far_outliers_tukey_fences():
    # x = -30, 1, 2, ..., 20, 50 (22 values). numpy's linear quartiles: position
    # 21 * 0.25 = 5.25 -> 5.25, position 15.75 -> 15.75; IQR 10.5; Tukey's far fences
    # 5.25 - 31.5 = -26.25 and 15.75 + 31.5 = 47.25 (worked by hand): -30 and 50 only.
    x = np.array([-30.0, *range(1, 21), 50.0])
    assert list(x[far_outliers(x)]) == [-30.0, 50.0]
    # Zero IQR: everything away from the common value is far out.
    assert list(far_outliers([0.0, 0.0, 0.0, 0.0, 0.25])) == [False] * 4 + [True]
    assert far_outliers([]).size == 0
