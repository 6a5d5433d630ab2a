"""Tests for piezo.spectral.peaks: distinct peaks of a PSD (issue 12 §3.6)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from piezo.spectral.averaging import main_lobe_half_width_bins, window_coefficients
from piezo.spectral.peaks import MARGIN_DB, distinct_peaks, local_floor, scatter_dof
from piezo.spectral.welch import WINDOWS, WelchPSD

FS = 48000.0
N = 4096


def _psd(x: np.ndarray, *, window: str = "hann", segment_frames: int = N):
    est = WelchPSD(FS, 1, segment_frames=segment_frames, window=window)
    est.update(x)
    return est.result()


def _peaks(r):
    return distinct_peaks(
        r.frequency_hz,
        r.psd[:, 0],
        main_lobe_half_width_bins=main_lobe_half_width_bins(r.window),
        degrees_of_freedom=scatter_dof(r.average, r.effective_averages),
    )


@pytest.mark.parametrize("name", WINDOWS)
def test_main_lobe_half_width_is_the_first_null(name):
    """The table's half width is where the window's transform first falls to zero,
    found here from a 64-times zero-padded FFT (independent of the cosine-sum rule the
    table quotes)."""
    w = window_coefficients(name, 256)
    pad = 64
    mag = np.abs(np.fft.rfft(w, 256 * pad))
    mag /= mag[0]
    # First local minimum of |W| away from the centre, in bins of the unpadded FFT.
    k = int(np.flatnonzero((mag[1:-1] < mag[:-2]) & (mag[1:-1] <= mag[2:]))[0]) + 1
    first_null_bins = k / pad
    # The padded grid resolves 1/64 bin; the periodic 256-sample window's zeros sit on
    # whole bins exactly (cosine sums of whole periods).
    assert first_null_bins == pytest.approx(main_lobe_half_width_bins(name), abs=1 / pad)
    assert mag[k] < 1e-3  # a zero, not a mere dip


def test_floor_of_white_noise_is_its_density(rng):
    """White noise of variance σ² has the one-sided density 2σ²/fs (Heinzel et al. 2002,
    eq. 24, the scaling the PSD uses); the running-median floor reads it."""
    sigma = 0.3
    x = sigma * rng.standard_normal(200 * N)
    r = _psd(x)
    nu = scatter_dof(r.average, r.effective_averages)
    floor = local_floor(r.psd[:, 0], main_lobe_half_width_bins=2, degrees_of_freedom=nu)
    expected = 2 * sigma**2 / FS
    # Each group median of >= 4 bins at ν ≈ 380 scatters by about ±0.3 dB, and the
    # octave median of medians by a fraction of that: 0.25 dB holds with margin.
    inner = floor[10 : int(0.9 * floor.size)]
    assert np.max(np.abs(10 * np.log10(inner / expected))) < 0.25


@pytest.mark.parametrize("seed", range(5))
@pytest.mark.parametrize("segments", [1, 8, 100])
def test_noise_alone_has_no_peaks(seed, segments):
    """Without a line nothing is reported: the margins grow with the estimate's scatter
    (one periodogram, ν = 2: 16.9 dB above the floor) so that noise alone passes with
    probability ~1 % per spectrum."""
    x = np.random.default_rng(seed).standard_normal(segments * N)
    peaks, rule = _peaks(_psd(x, segment_frames=N))
    assert peaks == [], [(p.frequency_hz, p.above_floor_db) for p in peaks]
    assert rule.floor_margin_db >= MARGIN_DB


@pytest.mark.parametrize(("ratio_db", "listed"), [(4.0, False), (10.0, True)])
def test_a_line_is_listed_only_above_the_margin(rng, ratio_db, listed):
    """An on-bin tone of mean square A²/2 reads A²/2 / ENBW in a density spectrum
    (Heinzel et al. 2002, sections 9-10); set its peak ``ratio_db`` above a white floor
    N0, the bin reads N0 + A²/2/ENBW. The rule asks 6 dB plus 0.9 dB of scatter (ν ≈ 770):
    4 dB is under it, 10 dB over it."""
    sigma = 1.0
    n0 = 2 * sigma**2 / FS
    enbw_hz = 1.5 * FS / N
    f0 = 300 * FS / N  # on a bin
    excess = (10 ** (ratio_db / 10) - 1) * n0  # tone density at its bin
    amplitude = math.sqrt(2 * excess * enbw_hz)
    t = np.arange(400 * N) / FS
    x = sigma * rng.standard_normal(t.size) + amplitude * np.sin(2 * np.pi * f0 * t)
    peaks, _ = _peaks(_psd(x))
    hits = [p for p in peaks if abs(p.frequency_hz - f0) < 1]
    assert len(peaks) == int(listed) and len(hits) == int(listed)
    if listed:
        # ν ≈ 770 per bin: ±0.3 dB (95 %) for the bin, less for the floor.
        assert hits[0].above_floor_db == pytest.approx(ratio_db, abs=0.4)


def test_a_wide_resonance_is_one_peak(rng):
    """Noise through a 2nd-order band-pass of Q 50 at 6 kHz (20 dB above the floor at
    its peak), 1.46 Hz bins: the hump is 82 bins wide at -3 dB and its estimate ripples
    (15 averages, ν ≈ 28, ±1.2 dB), so it has many local maxima more than a main lobe
    apart. It is one peak, at the resonance within the band-pass's -3 dB half width
    f0/(2Q) = 60 Hz: a bin 3 dB down wins only if its estimate's scatter lifts it 3 dB
    over all ~80 bins nearer the top (the difference of two bins scatters by 1.7 dB)."""
    f0, q = 6000.0, 50.0
    b, a = signal.iirpeak(f0, q, FS)
    seg = 32768
    n = 8 * seg
    x = 0.1 * rng.standard_normal(n) + signal.lfilter(b, a, rng.standard_normal(n))
    r = _psd(x, segment_frames=seg)
    lobe = slice(round(5900 / r.resolution_hz), round(6100 / r.resolution_hz))
    maxima = signal.find_peaks(r.psd[lobe, 0], distance=4)[0]
    assert maxima.size > 10  # the ripple the rule has to see through
    peaks, _ = _peaks(r)
    assert len(peaks) == 1, [(p.frequency_hz, p.above_floor_db) for p in peaks]
    assert peaks[0].frequency_hz == pytest.approx(f0, abs=60.0)


def test_two_lines_a_few_main_lobes_apart_are_two_peaks(rng):
    """Tones 6 bins apart (1.5 Hann main-lobe widths) are separated by a valley at the
    noise, 40 dB down: both are peaks, strongest first."""
    f1, f2 = 500 * FS / N, 506 * FS / N
    t = np.arange(50 * N) / FS
    x = 1e-3 * rng.standard_normal(t.size)
    x += 1.0 * np.sin(2 * np.pi * f1 * t) + 0.3 * np.sin(2 * np.pi * f2 * t)
    peaks, rule = _peaks(_psd(x))
    assert rule.separation_bins == 4
    assert [p.frequency_hz for p in peaks] == [pytest.approx(f1), pytest.approx(f2)]


@pytest.mark.parametrize("average", ["median", "max"])
def test_scatter_dof_matches_simulated_variance(average):
    """ν of the median and max-hold of K = 64 single periodograms (exponential values):
    a χ²_ν/ν variable has relative variance 2/ν. 40000 simulated estimates give the
    relative variance within 1.5 % (sampling), and the median's asymptotic formula is
    within about 1/K of the exact variance: 6 % holds both."""
    k = 64
    draws = np.random.default_rng(3).exponential(size=(40000, k))
    est = np.median(draws, axis=1) if average == "median" else draws.max(axis=1)
    rel_var = est.var() / est.mean() ** 2
    assert 2.0 / scatter_dof(average, k) == pytest.approx(rel_var, rel=0.06)
