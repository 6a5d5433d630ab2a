"""Element metrics in batch specs: validation, extraction, limits derived from golden units."""

from __future__ import annotations

import numpy as np
import pytest

from piezo.batch.derive import derive_limits
from piezo.batch.runner import evaluate_capture
from piezo.batch.spec import parse_spec
from piezo.element.bvd import BvdCircuit
from piezo.errors import SpecError

SPEC = """
[spec]
name = "element"
[stimulus]
kind = "impedance"
[metrics.fs]
lower = 28000.0
upper = 30000.0
[metrics.qm]
lower = 400.0
[metrics.c0]
[metrics.k_eff]
"""


def _sweep(tmp_path, name, circuit, rng):
    f = np.concatenate([np.geomspace(300, 20e3, 30), np.linspace(27e3, 33e3, 601)])
    z = circuit.impedance(f) * (1 + 1e-3 * rng.standard_normal(f.size))
    p = tmp_path / name
    rows = "\n".join(f"{a:.9g},{b.real:.9g},{b.imag:.9g}" for a, b in zip(f, z, strict=True))
    p.write_text("f (Hz),R (Ohm),X (Ohm)\n" + rows + "\n", encoding="utf-8")
    return str(p)


def test_element_metrics_and_golden_derivation(tmp_path, rng):
    spec = parse_spec(SPEC)
    rows = []
    for i in range(6):
        c = BvdCircuit(2.2e-9 * (1 + 0.01 * i), 35.0 + i, 0.12, 0.25e-9)
        rows.append(evaluate_capture(_sweep(tmp_path, f"u{i}.csv", c, rng), spec))
    assert all(r["verdict"] == "pass" for r in rows), [r["failed_limits"] for r in rows]
    c0 = [r["metrics"]["c0"] for r in rows]
    np.testing.assert_allclose(c0, 2.2 * (1 + 0.01 * np.arange(6)), rtol=1e-3)
    derived, _ = derive_limits(rows, spec, k=3.0)
    by = {d.name: d for d in derived}
    # mean ± 3σ of the six C0 values (sample σ, n − 1): NIST/SEMATECH 7.2.3.1 via derive.
    assert by["c0"].lower == pytest.approx(np.mean(c0) - 3 * np.std(c0, ddof=1), rel=1e-9)
    low_q = BvdCircuit(2.2e-9, 140.0, 0.12, 0.25e-9)
    row = evaluate_capture(_sweep(tmp_path, "bad.csv", low_q, rng), spec)
    assert row["verdict"] == "fail" and "qm" in row["failed_limits"][0]


def test_element_metric_needs_its_stimulus():
    with pytest.raises(SpecError, match="cannot be measured with a sweep stimulus"):
        parse_spec(
            '[stimulus]\nkind = "sweep"\nstart_hz = 20\nstop_hz = 2000\nduration_s = 1\n'
            "[metrics.qm]\nlower = 1\n"
        )
    with pytest.raises(SpecError, match="band_hz"):
        parse_spec('[stimulus]\nkind = "tap"\n[metrics.mode_q]\nband_hz = [5, 1]\n')


def test_guarded_limit_uses_the_fit_uncertainty(tmp_path, rng):
    # The BVD fit gives u(fs) from its covariance; a limit placed one u above the measured
    # fs is met under the simple rule and missed under the guarded rule, whose acceptance
    # zone ends 2u below the limit (JCGM 106:2012, 8.3.2).
    path = _sweep(tmp_path, "u.csv", BvdCircuit(2.2e-9, 35.0, 0.12, 0.25e-9), rng)
    first = evaluate_capture(path, parse_spec(SPEC))
    fs, u = first["metrics"]["fs"], first["uncertainties"]["fs"]
    assert u is not None and 0 < u < 1.0  # Hz: a clean sweep resolves fs far better than 1 Hz
    head = '[stimulus]\nkind = "impedance"\n[metrics.fs]\n'
    upper = f"upper = {fs + u!r}\n"
    simple = evaluate_capture(path, parse_spec(head + upper))
    guarded = evaluate_capture(path, parse_spec(head + upper + 'decision = "guarded"\n'))
    assert simple["verdict"] == "pass"
    assert guarded["verdict"] == "fail"
    assert "guarded acceptance zone" in guarded["failed_limits"][0]
