"""Distinct peaks of a power spectral density: lines and resonances, not bins.

A line seen through a window spreads over the window's main lobe, and a resonance excited
by noise is a hump many bins wide whose estimate ripples; listing the strongest bins
lists one resonance several times, and noise bins after it. A peak is reported here only
when it is

1. *above the local floor* by the margin: the floor is a running median over an octave
   around the peak (at least ±8 groups of a main-lobe width), taken in groups of a
   twelfth of an octave, divided by the median of the estimate's χ² distribution so that
   it reads the mean noise density;
2. a local maximum at least one main-lobe width (null to null) from any stronger one;
3. *separate*: the valley between it and stronger terrain on either side (topographic
   prominence, as :func:`scipy.signal.find_peaks` measures it, with dips under the floor
   clipped to the floor) reaches the floor, or the peak stands above that valley by more
   than the estimate's scatter spans over the bins between them
   (:func:`ripple_range_db`), so the ripple on a resonance hump is not a peak;
4. outside the main lobe around DC (bins ``0 … half width``), where the removed segment
   mean leaves its trace.

The margin above the floor is ``margin_db`` (6 dB, a factor of four in power: common
practice, no standard) *beyond the estimate's scatter*: with ``ν`` degrees of freedom
per bin, a bin's estimate exceeds its true density by ``q``, the ``1 - FALSE_ALARM/bins``
quantile of ``χ²_ν/ν``, with probability ``FALSE_ALARM`` anywhere in the spectrum, so a
peak must read ``margin_db + 10·lg q`` above the floor: its true density then stands at
least ``margin_db`` above it (noise alone passes with probability ``FALSE_ALARM``).
Bendat & Piersol, *Random Data* (4th ed., 2010), 8.5.4: an averaged
periodogram bin is distributed as ``χ²_ν/ν`` times the true density, ``ν = 2·K``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal, stats

from piezo.errors import InputError

__all__ = [
    "FALSE_ALARM",
    "MARGIN_DB",
    "MAX_PEAKS",
    "RIPPLE_FALSE_ALARM",
    "PeakRule",
    "SpectralPeak",
    "distinct_peaks",
    "local_floor",
    "peak_rule",
    "ripple_range_db",
    "scatter_dof",
]

#: Least height of a peak above the local floor and above a separating valley, dB.
MARGIN_DB = 6.0
#: Probability that noise alone makes one bin of the spectrum stand above the margin.
FALSE_ALARM = 0.01
#: Probability that the scatter alone spans a separating valley (see ripple_range_db).
RIPPLE_FALSE_ALARM = 1e-3
#: Most peaks reported per channel (the strongest).
MAX_PEAKS = 20
#: Groups per octave of the running median.
_GROUPS_PER_OCTAVE = 12
#: Least groups either side in the running median.
_MIN_GROUPS = 8


@dataclass(frozen=True)
class SpectralPeak:
    """One distinct peak of a one-sided PSD.

    Attributes
    ----------
    bin
        Index of the peak's bin.
    frequency_hz
        Frequency of that bin (the resolution is the bin spacing).
    density
        PSD at the bin (unit²/Hz, or unit² with spectrum scaling).
    floor_density
        The local floor under it, same unit.

    Examples
    --------
    Four times the floor's density is 6.02 dB above it:

    >>> round(SpectralPeak(10, 117.1875, 4e-6, 1e-6).above_floor_db, 2)
    6.02
    """

    bin: int
    frequency_hz: float
    density: float
    floor_density: float

    @property
    def above_floor_db(self) -> float:
        """``10·lg(density / floor_density)``, dB."""
        return 10.0 * math.log10(self.density / self.floor_density)


@dataclass(frozen=True)
class PeakRule:
    """What makes a peak distinct in one spectrum: separation and the margins applied.

    Attributes
    ----------
    separation_bins
        Least distance between two peaks: the window's main-lobe width, bins.
    floor_margin_db
        Height above the local floor required: ``margin_db`` plus the scatter's share.
    margin_db
        The stated margin: least height above a separating valley
        (:func:`ripple_range_db` may ask more).
    degrees_of_freedom
        ``ν`` of each bin's estimate used for the scatter.

    Examples
    --------
    For one periodogram (ν = 2) a noise bin over its mean is exponential, so the
    quantile it exceeds with probability ``FALSE_ALARM/bins`` is ``ln(bins/FALSE_ALARM)``
    and the floor margin is ``6 + 10·lg ln(1025/0.01)`` = 16.62 dB:

    >>> rule = peak_rule(1025, main_lobe_half_width_bins=2, degrees_of_freedom=2.0)
    >>> rule.separation_bins, rule.margin_db, round(rule.floor_margin_db, 2)
    (4, 6.0, 16.62)
    >>> round(MARGIN_DB + 10 * math.log10(math.log(1025 / FALSE_ALARM)), 2)
    16.62
    """

    separation_bins: int
    floor_margin_db: float
    margin_db: float
    degrees_of_freedom: float


def scatter_dof(average: str, effective_averages: float) -> float:
    """Degrees of freedom of one bin of an averaged periodogram, for its scatter.

    ``mean``: ``2·K`` (Bendat & Piersol 2010, 8.5.4). ``median``: ``2·K·(ln 2)²``, the
    asymptotic variance of a sample median, ``1/(4·K·f(m)²)``, for exponential values
    (median ``m = ln 2``, density ``f(m) = 1/2``; H. Cramér, *Mathematical Methods of
    Statistics*, 1946, 28.5), matched to a χ² of the same relative variance. ``max``:
    the maximum of ``K`` exponential values has mean ``H_K`` and variance
    ``Σ_{i≤K} 1/i²`` (Rényi's representation), matched the same way:
    ``ν = 2·H_K² / Σ 1/i²``.

    Examples
    --------
    >>> scatter_dof("mean", 10.0), round(scatter_dof("median", 10.0), 3)
    (20.0, 9.609)
    >>> scatter_dof("max", 1.0)
    2.0
    """
    k = max(float(effective_averages), 1.0)
    if average == "mean":
        return 2.0 * k
    if average == "median":
        return max(2.0 * k * math.log(2.0) ** 2, 2.0)
    if average == "max":
        i = np.arange(1.0, max(round(k), 1) + 1.0)
        return float(2.0 * np.sum(1.0 / i) ** 2 / np.sum(1.0 / i**2))
    raise InputError(f"average must be mean, median or max; got {average!r}")


def peak_rule(
    bins: int,
    *,
    main_lobe_half_width_bins: int,
    degrees_of_freedom: float,
    margin_db: float = MARGIN_DB,
) -> PeakRule:
    """The separation and margins for a spectrum of ``bins`` bins (see the module text).

    Examples
    --------
    Many averages: the scatter adds 0.9 dB to the 6 dB margin; one periodogram (ν = 2):
    10.9 dB more.

    >>> r = peak_rule(2049, main_lobe_half_width_bins=2, degrees_of_freedom=900.0)
    >>> r.separation_bins, round(r.floor_margin_db, 1)
    (4, 6.9)
    >>> round(peak_rule(2049, main_lobe_half_width_bins=2, degrees_of_freedom=2.0)
    ...       .floor_margin_db, 1)
    16.9
    """
    nu = float(degrees_of_freedom)
    if not nu > 0:
        raise InputError(f"degrees_of_freedom must be positive, got {degrees_of_freedom!r}")
    # A noise bin's estimate over its mean is χ²_ν/ν: a gamma(ν/2, 2/ν) variable.
    noise = float(stats.gamma.isf(FALSE_ALARM / max(bins, 1), nu / 2.0, scale=2.0 / nu))
    return PeakRule(
        separation_bins=2 * int(main_lobe_half_width_bins),
        floor_margin_db=float(margin_db) + 10.0 * math.log10(noise),
        margin_db=float(margin_db),
        degrees_of_freedom=nu,
    )


def ripple_range_db(
    bins: int, degrees_of_freedom: float, *, margin_db: float = MARGIN_DB
) -> float:
    """Least prominence of a maximum over a valley ``bins`` away that does not reach the
    floor, dB: the range that the scatter alone spans over that many bins.

    Along ``L`` bins of a smooth spectrum, the highest estimate exceeds the
    ``1 - α/L`` quantile of ``χ²_ν/ν`` and the lowest falls under its ``α/L`` quantile
    each with probability about ``α = RIPPLE_FALSE_ALARM``; the range between them (or
    ``margin_db``, if larger) is asked of a peak before it counts as separate.

    Examples
    --------
    >>> round(ripple_range_db(100, 28.0), 1), ripple_range_db(10, 900.0)
    (10.4, 6.0)
    """
    nu = float(degrees_of_freedom)
    a = RIPPLE_FALSE_ALARM / max(int(bins), 1)
    hi = float(stats.gamma.isf(a, nu / 2.0, scale=2.0 / nu))
    lo = float(stats.gamma.ppf(a, nu / 2.0, scale=2.0 / nu))
    return max(float(margin_db), 10.0 * math.log10(hi / lo))


def local_floor(
    density: np.ndarray, *, main_lobe_half_width_bins: int, degrees_of_freedom: float
) -> np.ndarray:
    """Running-median floor of a one-sided PSD, reading the mean noise density.

    The bins from 1 (DC is left out) are taken in groups of a twelfth of an octave, at
    least one main-lobe width each; each group's median, then the median of the group
    medians over an octave around each group (at least eight groups either side), divided
    by the median of ``χ²_ν/ν``. Between group centres the floor is interpolated
    linearly. Cost: one pass over the bins and a few hundred small medians.

    Parameters
    ----------
    density
        PSD, shape ``(bins,)``.
    main_lobe_half_width_bins
        Half the window's main-lobe width (null to null), bins.
    degrees_of_freedom
        ``ν`` of each bin's estimate.

    Returns
    -------
    numpy.ndarray
        The floor at every bin, shape ``(bins,)`` (bin 0 takes bin 1's).

    Examples
    --------
    The floor of a flat spectrum is the spectrum:

    >>> f = local_floor(np.full(1025, 2.0), main_lobe_half_width_bins=2,
    ...                 degrees_of_freedom=1e9)
    >>> bool(np.allclose(f, 2.0, rtol=1e-3))
    True
    """
    p = np.asarray(density, dtype=np.float64)
    n = p.size
    if p.ndim != 1 or n < 3:
        raise InputError(f"density must be a 1-D array of 3 or more bins, got shape {p.shape}")
    width = max(2 * int(main_lobe_half_width_bins), 1)
    ratio = 2.0 ** (1.0 / _GROUPS_PER_OCTAVE) - 1.0
    edges = [1]
    while edges[-1] < n:
        e = edges[-1]
        edges.append(min(e + max(width, math.ceil(e * ratio)), n))
    if len(edges) > 2 and edges[-1] - edges[-2] < width:
        del edges[-2]  # no stub group at the top
    starts, stops = np.array(edges[:-1]), np.array(edges[1:])
    medians = np.array([np.median(p[a:b]) for a, b in zip(starts, stops, strict=True)])
    centres = 0.5 * (starts + stops - 1)
    g = medians.size
    idx = np.arange(g)
    lo = np.searchsorted(centres, centres / math.sqrt(2.0), side="left")
    hi = np.searchsorted(centres, centres * math.sqrt(2.0), side="right")
    lo = np.minimum(lo, np.maximum(idx - _MIN_GROUPS, 0))
    hi = np.maximum(hi, np.minimum(idx + _MIN_GROUPS + 1, g))
    smooth = np.array([np.median(medians[a:b]) for a, b in zip(lo, hi, strict=True)])
    nu = float(degrees_of_freedom)
    median_factor = float(stats.gamma.median(nu / 2.0, scale=2.0 / nu))
    return np.interp(np.arange(n), centres, smooth / median_factor)


def distinct_peaks(
    frequency_hz: np.ndarray,
    density: np.ndarray,
    *,
    main_lobe_half_width_bins: int,
    degrees_of_freedom: float,
    margin_db: float = MARGIN_DB,
    max_peaks: int = MAX_PEAKS,
) -> tuple[list[SpectralPeak], PeakRule]:
    """The distinct peaks of a one-sided PSD, strongest first (see the module text).

    Parameters
    ----------
    frequency_hz, density
        Bin frequencies (hertz, uniform from 0) and PSD, shape ``(bins,)``.
    main_lobe_half_width_bins
        Half the window's main-lobe width, bins
        (:func:`piezo.spectral.averaging.main_lobe_half_width_bins`).
    degrees_of_freedom
        ``ν`` of each bin's estimate (:func:`scatter_dof`).
    margin_db
        Least height above the floor and above the separating valleys, dB.
    max_peaks
        Most peaks returned.

    Returns
    -------
    peaks, rule
        The peaks, and the separation and margins that were applied.

    Examples
    --------
    Two tones in white noise, Hann window, 11.7 Hz bins, 100 averages (the 1 kHz tone
    lies between the bins at 996 Hz and 1008 Hz):

    >>> from piezo.spectral.welch import WelchPSD
    >>> fs = 48000.0
    >>> t = np.arange(100 * 2048) / fs
    >>> x = np.random.default_rng(1).standard_normal(t.size) * 1e-3
    >>> x += 0.1 * np.sin(2 * np.pi * 1000 * t) + 0.01 * np.sin(2 * np.pi * 5000 * t)
    >>> est = WelchPSD(fs, 1, segment_frames=4096)
    >>> est.update(x)
    >>> r = est.result()
    >>> peaks, rule = distinct_peaks(r.frequency_hz, r.psd[:, 0],
    ...                              main_lobe_half_width_bins=2, degrees_of_freedom=200.0)
    >>> [round(p.frequency_hz) for p in peaks]
    [996, 5004]
    """
    f = np.asarray(frequency_hz, dtype=np.float64)
    p = np.asarray(density, dtype=np.float64)
    if f.ndim != 1 or f.shape != p.shape or f.size < 3:
        raise InputError(
            "frequency_hz and density must be 1-D arrays of equal length (3 or more), got "
            f"shapes {f.shape} and {p.shape}"
        )
    rule = peak_rule(
        p.size,
        main_lobe_half_width_bins=main_lobe_half_width_bins,
        degrees_of_freedom=degrees_of_freedom,
        margin_db=margin_db,
    )
    floor = local_floor(
        p,
        main_lobe_half_width_bins=main_lobe_half_width_bins,
        degrees_of_freedom=degrees_of_freedom,
    )
    positive = p[p > 0]
    if positive.size == 0:
        return [], rule
    # Levels in dB, zeros a little below the weakest bin (a DC bin emptied by detrending).
    level = 10.0 * np.log10(np.maximum(p, positive.min() * 1e-3))
    # DC's main lobe (the segment mean, removed before windowing, leaves its trace
    # there) holds no peak and fences none in.
    h = max(int(main_lobe_half_width_bins), 1)
    level[: h + 1] = level[h + 1 :].min()
    floor_db = 10.0 * np.log10(np.maximum(floor, positive.min() * 1e-3))
    # Dips under the floor are noise: clipped there, a valley reaching the floor
    # separates two peaks whatever its depth.
    clipped = np.maximum(level, floor_db)
    found, props = signal.find_peaks(
        clipped, distance=max(rule.separation_bins, 1), prominence=(None, None)
    )
    keep = []
    for k, prom, lb, rb in zip(
        found, props["prominences"], props["left_bases"], props["right_bases"], strict=True
    ):
        k = int(k)
        if level[k] - floor_db[k] < rule.floor_margin_db:
            continue
        base = int(lb) if clipped[lb] >= clipped[rb] else int(rb)
        if clipped[base] > floor_db[base] and prom < ripple_range_db(
            abs(k - base), rule.degrees_of_freedom, margin_db=rule.margin_db
        ):
            continue  # a ripple maximum on the same elevated stretch as a stronger one
        keep.append(k)
    keep.sort(key=lambda k: -p[k])
    peaks = [SpectralPeak(k, float(f[k]), float(p[k]), float(floor[k])) for k in keep]
    return peaks[: max(int(max_peaks), 0)], rule
