"""piezo response as a back-to-back comparison calibration on the demo bench, and the
round trip: comparison -> curve and profile -> corrected analysis."""

from __future__ import annotations

import math

import numpy as np
import pytest

from piezo.demo.bench import BENCH_UNITS, REFERENCE_FREQUENCY_HZ
from tests.paths import RECORDINGS

BENCH = RECORDINGS / "accel-bench.flac"
G = 9.80665  # exact (3rd CGPM 1901; ISO 80000-3:2019)


def test_the_bench_comparison_finds_the_unit(cli):
    r = cli("response", BENCH, "--reference-frequency", "160Hz", "--json")
    assert r.code == 0, r.err
    cmp = r.json()["comparison"]
    assert cmp["reference_sensitivity"].endswith("(10.15 mV/g)")
    unit = cmp["channels"][0]
    assert unit["channel"] == 1 and unit["quantity"] == "acceleration"
    # The simulated bench's truth (piezo.demo.bench): 9.62 mV/g at 160 Hz. It must lie
    # inside the expanded uncertainty, which is about the reference's 0.2 dB (k = 2).
    truth = BENCH_UNITS[1].sensitivity_v_per_g / G
    error_db = 20 * math.log10(unit["sensitivity_v_per_unit"] / truth)
    assert abs(error_db) < unit["expanded_uncertainty_db"]
    assert unit["expanded_uncertainty_db"] == pytest.approx(0.2, abs=0.01)
    # The chart against the truth, where coherence > 0.99 (the 0.1 dB bound):
    # the reference's own chart is exact to its 0.001 dB rounding and the H1 random
    # error at this coherence is below 0.01 dB.
    chart = unit["chart"]
    f = np.array(chart["frequency_hz"])
    keep = (f >= 20) & (f <= 8000)
    true_rel = BENCH_UNITS[1].relative_db(f[keep])
    np.testing.assert_allclose(np.array(chart["relative_db"])[keep], true_rel, atol=0.1)
    # The GUM budget: u_c is the root sum of squares of the contributions (GUM 5.1.2),
    # U = k·u_c (GUM 6.2.1).
    budget = unit["budget"]
    rss = math.sqrt(sum(c["contribution"] ** 2 for c in budget["components"]))
    assert budget["combined_standard_uncertainty"] == pytest.approx(rss, rel=1e-12)
    assert unit["expanded_uncertainty_db"] == pytest.approx(
        budget["coverage_factor"] * rss, rel=1e-9
    )
    assert {c["name"] for c in budget["components"]} >= {
        "reference sensitivity",
        "random error of H1",
    }
    text = cli("response", BENCH, "--reference-frequency", "160Hz")
    out = " ".join(text.out.split())  # the terminal may wrap lines
    assert "U = 0.20 dB (k = 2.00, about 95 %)" in out
    assert "reference sensitivity normal 0.10" in out


def test_round_trip_curve_and_profile_correct_the_unit(cli, tmp_path):
    curve, profile = tmp_path / "charts" / "pa12.csv", tmp_path / "pa12.toml"
    curve.parent.mkdir()
    r = cli(
        "response", BENCH, "--reference-frequency", "160Hz",
        "--write-curve", curve, "--write-profile", profile,
    )  # fmt: skip
    assert r.code == 0, r.err
    text = profile.read_text(encoding="utf-8")
    assert 'response_curve = "charts/pa12.csv"' in text and 'serial = "PA12-2291"' in text
    assert 'quantity = "acceleration"' in text
    # The unit through its measured profile and the reference through its certificate see
    # the same acceleration: their corrected band levels agree. 0.05 dB: the unit's chart
    # carries the reference's (exact) chart plus the H1 estimate, whose random error at
    # coherence > 0.99 is below 0.01 dB; both are read from the same samples.
    opts = ["--fraction", "3", "--low", "25Hz", "--high", "8kHz", "--json"]
    unit = cli(
        "bands", BENCH, "--channel", "1", "--no-sidecar", "--profile", profile,
        "--gain", "20 dB", "--full-scale", "2 V", *opts,
    )  # fmt: skip
    ref = cli("bands", BENCH, "--channel", "0", *opts)
    raw = cli("bands", BENCH, "--channel", "1", *opts)  # the data sheet's 10 mV/g, no curve
    assert unit.code == 0, unit.err

    def levels(r):
        return np.array([b["level_db"] for b in r.json()["channels"][0]["bands"]])

    assert np.max(np.abs(levels(raw) - levels(ref))) > 2.0  # +3.4 dB at 8 kHz uncorrected
    np.testing.assert_allclose(levels(unit), levels(ref), atol=0.05)
    assert unit.json()["quantity"] == "acceleration"


def test_writing_needs_a_calibrated_reference(cli, tmp_path):
    r = cli("response", BENCH, "--no-sidecar", "--write-curve", tmp_path / "x.csv")
    assert r.code == 2
    assert len(r.err.strip().splitlines()) == 1 and "need a comparison" in r.err
    assert not (tmp_path / "x.csv").exists()


def test_reference_frequency_of_the_bench():
    assert REFERENCE_FREQUENCY_HZ == 160.0  # the frequency the charts are relative to
