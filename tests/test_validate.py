"""The one validator per kind of input (piezo.validate)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from piezo import validate
from piezo.errors import InputError
from piezo.spectral.bands import BandAnalyzer
from piezo.spectral.welch import WelchPSD


@given(st.floats(allow_nan=True, allow_infinity=True))
def test_sample_rate_range(value):
    ok = (
        math.isfinite(value)
        and validate.MIN_SAMPLE_RATE_HZ <= value <= validate.MAX_SAMPLE_RATE_HZ
    )
    if ok:
        assert validate.sample_rate(value) == value
    else:
        with pytest.raises(InputError, match=r"^sample_rate_hz must be between 10 Hz"):
            validate.sample_rate(value)


@pytest.mark.parametrize("rate", [math.inf, math.nan, 1.0, 0.0, -48000.0, "48k", True])
def test_every_analysis_refuses_a_bad_rate_alike(rate):
    for build in (lambda: BandAnalyzer(rate, 1), lambda: WelchPSD(rate, 1)):
        with pytest.raises(InputError, match=r"^sample_rate_hz must be"):
            build()


@given(st.integers(min_value=0, max_value=50), st.integers(min_value=0, max_value=2))
def test_non_finite_sample_is_located(row, col):
    x = np.zeros((51, 3))
    x[row, col] = np.nan
    with pytest.raises(InputError, match=rf"in channel {col} at sample {row + 100}$"):
        validate.finite_samples(x, start_frame=100)


def test_the_same_nan_answer_from_every_analysis():
    block = np.zeros((4096, 1))
    block[17, 0] = np.inf
    for analysis in (WelchPSD(48000.0, 1), BandAnalyzer(48000.0, 1)):
        with pytest.raises(InputError, match=r"non-finite value \(NaN or infinite\) in channel 0"):
            analysis.update(block)


@pytest.mark.parametrize("value", [0.0, -1.0, math.inf, math.nan, 1e300, 1e-300])
def test_physical_values(value):
    with pytest.raises(InputError, match="feedback_capacitance"):
        validate.physical_value(value, what="feedback_capacitance", unit="F")
    assert validate.physical_value(4.7e-8, what="c") == 4.7e-8
    assert validate.physical_value(0.0, what="length", allow_zero=True) == 0.0
