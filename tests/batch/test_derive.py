"""Limits from golden units (piezo.batch.derive)."""

from __future__ import annotations

import functools

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats as sstats

from piezo.batch.derive import derive_limits, derived_spec_text, sigma_interval
from piezo.batch.runner import expand_inputs, run_batch
from piezo.batch.spec import parse_spec
from piezo.errors import InputError
from tests import batch_fakes as fakes

BASE_TEXT = (
    fakes.SPEC_TEXT
    + """
[metrics.mask]
kind = "band_mask"
frequency_hz = [500, 1000, 2000]

[metrics.fixed]
kind = "tone_frequency"
derive = false
lower = 990.0
upper = 1010.0
"""
)


def _golden(tmp_path, n=12):
    rng = np.random.default_rng(11)
    d = tmp_path / "golden"
    d.mkdir()
    for i, amp in enumerate(0.45 * 10 ** (rng.normal(0.0, 0.3, n) / 20)):
        fakes.write_capture(d / f"SN{i:04d}.wav", float(amp))
    return d


def _rows(folder, spec):
    job = functools.partial(_curves_job, spec=spec)
    return run_batch(expand_inputs([str(folder)]), spec, workers=1, job=job)


def _zero_crossing_frequency(a, m):
    """Tone frequency from the count of upward zero crossings after the lead-in."""
    x = a.capture.samples[int(0.05 * a.capture.sample_rate_hz) :]
    ups = np.count_nonzero((x[:-1] < 0) & (x[1:] >= 0))
    return fakes.MetricValue(ups * a.capture.sample_rate_hz / x.size)


def _curves_job(path, *, display, spec):
    from piezo.batch.runner import evaluate_capture

    return evaluate_capture(
        path,
        spec,
        display=display,
        loader=fakes.load,
        extractors={**fakes.EXTRACTORS, "tone_frequency": _zero_crossing_frequency},
        with_curves=True,
    )


def test_k_sigma_limits_equal_numpy_mean_and_std(tmp_path):
    spec = parse_spec(BASE_TEXT, for_derive=True)
    rows = _rows(_golden(tmp_path), spec)
    derived, notes = derive_limits(rows, spec, k=3.0, warn_k=2.0)
    by = {d.name: d for d in derived}
    sens = np.array([r["metrics"]["sensitivity"] for r in rows])
    mean, std = np.mean(sens), np.std(sens, ddof=1)
    # Same arithmetic as numpy: only float rounding separates them.
    assert_allclose(
        [by["sensitivity"].lower, by["sensitivity"].upper],
        [mean - 3 * std, mean + 3 * std],
        rtol=1e-12,
    )
    assert_allclose(
        [by["sensitivity"].warn_lower, by["sensitivity"].warn_upper],
        [mean - 2 * std, mean + 2 * std],
        rtol=1e-12,
    )
    # The base limits only an upper side for clipping and noise floor: only upper derived.
    assert by["noise_floor"].lower is None and by["noise_floor"].upper is not None
    curves = np.array([r["curves"]["mask"] for r in rows])
    assert_allclose(by["mask"].lower, curves.mean(0) - 3 * curves.std(0, ddof=1), rtol=1e-12)
    assert_allclose(by["mask"].upper, curves.mean(0) + 3 * curves.std(0, ddof=1), rtol=1e-12)
    assert by["fixed"].copied
    assert any("only 12 golden captures" in n for n in notes)
    # Clipping is zero on every golden unit: zero spread is called out.
    assert any("'clipping': zero spread" in n for n in notes)

    out = tmp_path / "derived" / "spec.toml"
    text = derived_spec_text(
        spec,
        derived,
        notes,
        k=3.0,
        warn_k=2.0,
        golden_source="golden/",
        base_source="base.toml",
        out_path=out,
    )
    assert f"# n = 12, mean = {mean:.6g}, σ = {std:.6g} (dB re 1 V/Pa)" in text
    new = parse_spec(text)
    s = next(m for m in new.metrics if m.name == "sensitivity")
    # Written rounded to two significant digits of σ (issue 12 §3.5: the resolution the
    # data support), so they read back within half that step.
    step = 10.0 ** (np.floor(np.log10(std)) - 1)
    got = [(lim.lower, lim.upper, lim.severity) for lim in s.limits]
    want = [
        (by["sensitivity"].lower, by["sensitivity"].upper, "fail"),
        (by["sensitivity"].warn_lower, by["sensitivity"].warn_upper, "warn"),
    ]
    assert [g[2] for g in got] == [w[2] for w in want]
    assert_allclose([g[:2] for g in got], [w[:2] for w in want], rtol=0, atol=step / 2)
    fixed = next(m for m in new.metrics if m.name == "fixed")
    assert [(lim.lower, lim.upper) for lim in fixed.limits] == [(990.0, 1010.0)]
    mask_step = 10.0 ** (np.floor(np.log10(by["mask"].std)) - 1)
    assert np.all(
        np.abs(np.subtract(new.metrics[3].params["lower_db"], by["mask"].lower))
        <= mask_step / 2 + 1e-12
    )
    # The golden units pass their own derived limits (they define them).
    again = run_batch(
        expand_inputs([str(tmp_path / "golden")]),
        new,
        workers=1,
        job=functools.partial(_curves_job, spec=new),
    )
    assert {r["verdict"] for r in again} <= {"pass", "warn"}


def test_sigma_interval_matches_chi_square_table():
    # 95 % interval for sigma with n = 10 (9 degrees of freedom): chi-square quantiles
    # 2.700 and 19.023 (NIST/SEMATECH 1.3.6.7.4 table; values from memory, checked
    # against scipy below) give sqrt(9/19.023) = 0.688 and sqrt(9/2.700) = 1.826.
    low, high = sigma_interval(10)
    assert_allclose([low, high], [0.688, 1.826], atol=1e-3)  # 3-digit table values
    assert_allclose(high, np.sqrt(9 / sstats.chi2.ppf(0.025, 9)), rtol=1e-12)
    assert sigma_interval(1) is None


def test_bad_k_and_too_few_units(tmp_path):
    spec = parse_spec(BASE_TEXT, for_derive=True)
    rows = _rows(_golden(tmp_path, n=2), spec)
    with pytest.raises(InputError, match=r"--k: must be a positive number, got -1"):
        derive_limits(rows, spec, k=-1.0)
    with pytest.raises(InputError, match=r"--warn-k: must be between 0 and --k \(3\)"):
        derive_limits(rows, spec, k=3.0, warn_k=4.0)
    with pytest.raises(InputError, match=r"metric 'sensitivity': 1 golden capture"):
        derive_limits(rows[:1], spec, k=3.0)


DERIVE_TEXT = """\
# Lot PD27 limits (base)
[spec]
name = "rounding lot"

[capture]
# preamp at 20 dB into a 2 V converter
full_scale_v = 2.0
gain = "20 dB"

[stimulus]
kind = "tone"
frequency_hz = 1000
level_pa = 1.0
silence_before_s = 0.05

[metrics.sensitivity]
# the design's nominal sensitivity
nominal = -10.0
lower_rel = -3.0
upper_rel = 3.0

[metrics.noise_floor]
upper = -60.0
severity = "warn"
"""


def _fake_rows(n=12):
    rng = np.random.default_rng(5)
    return [
        {
            "file": f"SN{i:04d}.wav",
            "metrics": {"sensitivity": -10.0 + 0.0123 * z, "noise_floor": -75.0 + 1.7 * w},
        }
        for i, (z, w) in enumerate(rng.standard_normal((n, 2)))
    ]


def test_derive_keeps_severities_unit_forms_comments_and_rounds_to_the_data(tmp_path):
    # Issue 12 §3.5. A warn-only base limit stays warn; "20 dB" is written as in the base
    # spec, with its comments; limits are rounded to two significant digits
    # of σ (the resolution the golden data support: with n = 12, σ itself is known only
    # to about ±40 %, NIST/SEMATECH 7.2.3.1, so further digits are noise), never at full
    # float precision.
    spec = parse_spec(DERIVE_TEXT, for_derive=True)
    rows = _fake_rows()
    derived, notes = derive_limits(rows, spec, k=3.0)
    text = derived_spec_text(
        spec, derived, notes, k=3.0, warn_k=None, golden_source="golden/",
        base_source="base.toml", out_path=tmp_path / "spec.toml",
    )  # fmt: skip
    assert 'gain = "20 dB"' in text or "gain = '20 dB'" in text
    for comment in (
        "# Lot PD27 limits (base)",
        "# preamp at 20 dB into a 2 V converter",
        "# the design's nominal sensitivity",
    ):
        assert comment in text
    new = parse_spec(text)
    assert new.gain == pytest.approx(10.0) and new.full_scale_v == pytest.approx(2.0)
    by = {m.name: m for m in new.metrics}
    assert [lim.severity for lim in by["noise_floor"].limits] == ["warn"]
    assert [lim.severity for lim in by["sensitivity"].limits] == ["fail"]
    sens = np.array([r["metrics"]["sensitivity"] for r in rows])
    mean, std = np.mean(sens), np.std(sens, ddof=1)
    step = 10.0 ** (np.floor(np.log10(std)) - 1)  # two significant digits of σ
    lim = by["sensitivity"].limits[0]
    for value, exact in ((lim.lower, mean - 3 * std), (lim.upper, mean + 3 * std)):
        assert abs(value - exact) <= step / 2 + 1e-12
        assert value == pytest.approx(round(value / step) * step, abs=1e-12)
    lines = [ln for ln in text.splitlines() if ln.startswith(("lower =", "upper ="))]
    assert all(len(ln.split("=")[1].strip()) <= 8 for ln in lines), lines
