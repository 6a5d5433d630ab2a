"""GUM budgets, the random error of H1 and decision rules (piezo.response.uncertainty)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal, stats

from piezo.errors import InputError
from piezo.response.uncertainty import (
    Budget,
    Component,
    decide,
    h1_random_error,
    independent_averages,
)


def test_type_b_forms():
    # JCGM 100:2008 4.3.7: rectangular half-width a -> u = a/sqrt(3); 4.3.6: a quoted
    # expanded uncertainty U with factor k -> u = U/k.
    assert Component.rectangular("r", 0.3).standard_uncertainty == pytest.approx(0.3 / 3**0.5)
    assert Component.from_expanded("e", 0.3, k=3).standard_uncertainty == pytest.approx(0.1)


def test_budget_worked_by_hand_in_the_docs():
    # docs/uncertainty.md works this budget by hand: u_c = sqrt(0.05² + 0.03² +
    # (0.005/√3)²) = 0.058381 dB; ν_eff = u_c⁴ / (0.03⁴/40) = 573.7 (JCGM 100:2008 G.4.1);
    # k = t_0.97725(573.7) = 2.0044 (by the expansion t ≈ z(1 + (z² + 1)/(4ν)), z = 2);
    # U = 0.1170 dB.
    b = Budget(
        (
            Component.from_expanded("reference chart", 0.10),
            Component("random error of H1", 0.03, degrees_of_freedom=40, distribution="t"),
            Component.rectangular("resolution", 0.005),
        )
    )
    assert b.combined_standard_uncertainty == pytest.approx(0.058381, abs=5e-7)
    assert b.effective_degrees_of_freedom == pytest.approx(573.7, abs=0.1)
    assert b.coverage_factor == pytest.approx(2.0044, abs=1e-4)
    assert b.expanded_uncertainty == pytest.approx(0.1170, abs=1e-4)
    doc = b.to_dict()
    assert doc["components"][2]["distribution"] == "rectangular"
    assert doc["components"][0]["degrees_of_freedom"] is None


@pytest.mark.parametrize(("nu", "k"), [(10, 2.28), (20, 2.13), (50, 2.05)])
def test_coverage_factor_matches_gum_table_g2(nu, k):
    # JCGM 100:2008 Table G.2, p = 95.45 %: t = 2.28 (ν 10), 2.13 (ν 20), 2.05 (ν 50),
    # given to two decimals.
    b = Budget((Component("type A", 1.0, degrees_of_freedom=nu),))
    assert b.coverage_factor == pytest.approx(k, abs=0.005)


def test_infinite_degrees_of_freedom_give_k_2():
    # JCGM 100:2008 6.3.3: k = 2 for about 95 % when the distribution is normal.
    assert Budget((Component("b", 1.0),)).coverage_factor == 2.0


def test_h1_random_error_formula():
    # Bendat & Piersol 2010, Table 9.6: ε = sqrt(1-γ²)/(|γ| sqrt(2 n_d)); γ² = 0.9,
    # n_d = 50: sqrt(0.1)/(sqrt(0.9)·10) = 0.033333.
    assert h1_random_error(np.array([0.9]), 50)[0] == pytest.approx(1 / 30, rel=1e-12)
    assert math.isinf(h1_random_error(np.array([0.0]), 50)[0])


def test_h1_random_error_against_a_monte_carlo():
    # The formula is an approximation for small ε; a Monte Carlo of H1 with output noise
    # (coherence 0.95, 64 independent segments, no overlap) gives the spread of |H1| it
    # predicts within 10 % (the Monte Carlo's own standard error here is ~3 %).
    rng = np.random.default_rng(3)
    n_seg, seg = 64, 256
    ratios = []
    for _ in range(300):
        x = rng.standard_normal(n_seg * seg)
        y = x + rng.standard_normal(x.size) * math.sqrt(1 / 0.95 - 1)
        _, gxy = signal.csd(x, y, nperseg=seg, noverlap=0, window="boxcar")
        _, gxx = signal.welch(x, nperseg=seg, noverlap=0, window="boxcar")
        ratios.append(np.abs(gxy / gxx)[10:100])
    spread = np.std(np.array(ratios), axis=0).mean()
    assert spread == pytest.approx(h1_random_error(np.array([0.95]), n_seg)[0], rel=0.10)


def test_independent_averages_of_overlapped_hann():
    # Welch 1967: for a Hann window at 50 % overlap the correlation of adjacent segments
    # is ρ = 1/6 (periodic window), so K segments count as K/(1 + 2(1-1/K)/36).
    w = signal.get_window("hann", 4096)
    k = 200
    assert independent_averages(k, w, 2048) == pytest.approx(k / (1 + 2 * (1 - 1 / k) / 36))
    assert independent_averages(k, w, 4096) == k


def test_decision_rules():
    # JCGM 106:2012 8.3.2: guarded acceptance narrows the tolerance by w = U each side.
    assert decide(10.0, low=9.0, high=11.0).accepted
    assert not decide(11.2, low=9.0, high=11.0).accepted
    g = decide(9.1, low=9.0, high=11.0, expanded_uncertainty=0.2, rule="guarded")
    assert not g.accepted and g.acceptance_low == pytest.approx(9.2)
    assert decide(5.0, low=None, high=11.0, expanded_uncertainty=0.2, rule="guarded").accepted
    with pytest.raises(InputError, match="decision rule"):
        decide(1.0, low=0.0, high=2.0, rule="optimistic")


def test_components_refuse_bad_values():
    with pytest.raises(InputError, match="standard uncertainty"):
        Component("x", float("nan"))
    with pytest.raises(InputError, match="degrees of freedom"):
        Component("x", 1.0, degrees_of_freedom=0)


def test_student_t_is_scipy():
    # The coverage factor is scipy's Student t quantile (the reference implementation).
    b = Budget((Component("a", 1.0, degrees_of_freedom=7.5),))
    assert b.coverage_factor == pytest.approx(stats.t.ppf(0.977250, 7.5), rel=1e-5)
