"""Lot statistics: verdict counts, yield, process capability, histograms (pure).

Process capability follows the NIST/SEMATECH e-Handbook of Statistical Methods,
section 6.1.6 "What is process capability?":

- Cp  = (USL - LSL) / (6 σ)
- Cpk = min(USL - μ, μ - LSL) / (3 σ), i.e. min(Cpu, Cpl) with
  Cpu = (USL - μ) / (3 σ) and Cpl = (μ - LSL) / (3 σ)

with μ and σ estimated from the lot by the sample mean and the sample standard
deviation (n - 1 in the denominator), as the handbook does.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from piezo.batch.verdict import PASS, VERDICTS, WARN

__all__ = [
    "Capability",
    "Histogram",
    "capability",
    "far_outliers",
    "histogram",
    "verdict_counts",
    "yield_fraction",
]


def verdict_counts(verdicts: Iterable[str]) -> dict[str, int]:
    """Number of captures per verdict, every verdict present (zero when unseen).

    Examples
    --------
    >>> verdict_counts(["pass", "pass", "fail"])
    {'pass': 2, 'warn': 0, 'fail': 1, 'not evaluable': 0}
    """
    counts = dict.fromkeys(VERDICTS, 0)
    for v in verdicts:
        if v not in counts:
            raise ValueError(f"unknown verdict {v!r}")
        counts[v] += 1
    return counts


def yield_fraction(counts: Mapping[str, int]) -> float | None:
    """First-pass yield: (pass + warn) / all captures, not evaluable counted as not good.

    None for an empty lot.

    Examples
    --------
    Three good units (two pass, one warn) of five:

    >>> counts = verdict_counts(["pass", "pass", "warn", "fail", "not evaluable"])
    >>> yield_fraction(counts)
    0.6
    >>> yield_fraction(verdict_counts([])) is None
    True
    """
    total = sum(counts.values())
    if total == 0:
        return None
    return (counts.get(PASS, 0) + counts.get(WARN, 0)) / total


@dataclass(frozen=True)
class Capability:
    """Process capability of one metric against its specification limits.

    Indices are None when they are undefined: fewer than two values, zero spread, or the
    limit they need is absent (Cp needs both limits).

    Examples
    --------
    Mean 10, σ = 1 (ddof = 1); with a lower limit only, Cpl = (10 - 7) / 3 and Cp is
    undefined:

    >>> c = capability([9.0, 10.0, 11.0], lsl=7.0)
    >>> c.n, c.mean, c.std, c.cpl, c.cp
    (3, 10.0, 1.0, 1.0, None)
    >>> c.cpk == c.cpl
    True
    """

    n: int
    mean: float | None
    std: float | None
    lsl: float | None
    usl: float | None
    cp: float | None
    cpk: float | None
    cpl: float | None
    cpu: float | None


def capability(
    values: Sequence[float] | np.ndarray, *, lsl: float | None = None, usl: float | None = None
) -> Capability:
    """Cp, Cpk, Cpl and Cpu of ``values`` against ``lsl`` and ``usl`` (NIST/SEMATECH 6.1.6).

    Non-finite values are ignored. σ is the sample standard deviation (ddof = 1).

    Examples
    --------
    >>> c = capability([9.0, 10.0, 11.0], lsl=7.0, usl=16.0)
    >>> round(c.cp, 4), round(c.cpk, 4)
    (1.5, 1.0)
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    n = int(x.size)
    if n == 0:
        return Capability(0, None, None, lsl, usl, None, None, None, None)
    mean = float(np.mean(x))
    if n < 2:
        return Capability(n, mean, None, lsl, usl, None, None, None, None)
    std = float(np.std(x, ddof=1))
    if not std > 0:
        return Capability(n, mean, std, lsl, usl, None, None, None, None)
    cpu = (usl - mean) / (3 * std) if usl is not None else None
    cpl = (mean - lsl) / (3 * std) if lsl is not None else None
    cp = (usl - lsl) / (6 * std) if usl is not None and lsl is not None else None
    sides = [c for c in (cpu, cpl) if c is not None]
    cpk = min(sides) if sides else None
    return Capability(n, mean, std, lsl, usl, cp, cpk, cpl, cpu)


def far_outliers(values: Sequence[float] | np.ndarray) -> np.ndarray:
    """Mask of the far outliers of ``values``: beyond the quartiles ∓ 3 IQR (Tukey's
    "far out" fences; common practice). With zero IQR every value other than the
    quartile value is far out.

    Examples
    --------
    Quartiles 11 and 13, IQR 2: the fences are 5 and 19, so only 50 is far out:

    >>> far_outliers([10.0, 11.0, 12.0, 13.0, 50.0]).tolist()
    [False, False, False, False, True]
    """
    x = np.asarray(values, dtype=float)
    if x.size == 0:
        return np.zeros(0, dtype=bool)
    q1, q3 = np.percentile(x, [25.0, 75.0])
    iqr = q3 - q1
    if iqr == 0:
        return x != q1
    return (x < q1 - 3 * iqr) | (x > q3 + 3 * iqr)


@dataclass(frozen=True)
class Histogram:
    """Counts of a metric's values in bins; ``edges`` has one more entry than ``counts``.

    ``below`` and ``above`` count the values outside the binned range (far outliers,
    typically failed units), which are not in ``counts``.

    Examples
    --------
    >>> h = Histogram(edges=[0.0, 1.0, 2.0], counts=[3, 1], lower=0.0, upper=2.0, above=1)
    >>> len(h.edges) == len(h.counts) + 1
    True
    >>> sum(h.counts) + h.below + h.above
    5
    """

    edges: list[float]
    counts: list[int]
    lower: float | None
    upper: float | None
    below: int = 0
    above: int = 0


def histogram(
    values: Sequence[float] | np.ndarray,
    *,
    lower: float | None = None,
    upper: float | None = None,
    max_bins: int = 60,
) -> Histogram:
    """Histogram of the finite ``values`` over a range that shows the limits and the bulk.

    Range: the limits and the data inside Tukey's far fences (quartiles ∓ 3 IQR; common
    practice for "far out" values), so one wild unit does not squeeze the rest into a
    single bar; values beyond are counted in ``below``/``above``. Bin width: the
    Freedman-Diaconis rule, 2 IQR / n^(1/3), with 10 to ``max_bins`` bins.

    Examples
    --------
    The wild unit at 25.0 lies beyond the far fence; it is counted in ``above`` and the
    bins span the limits 9 .. 11 only:

    >>> h = histogram([9.9, 10.05, 10.15, 10.3, 25.0], lower=9.0, upper=11.0)
    >>> h.edges[0], h.edges[-1], len(h.counts)
    (9.0, 11.0, 10)
    >>> sum(h.counts), h.below, h.above
    (4, 0, 1)
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size == 0:
        return Histogram([], [], lower, upper)
    q1, q3 = (float(v) for v in np.percentile(x, [25.0, 75.0]))
    iqr = q3 - q1
    inside = x[~far_outliers(x)] if iqr > 0 else x
    points = [float(v) for v in (lower, upper) if v is not None]
    lo = min([float(inside.min()), *points])
    hi = max([float(inside.max()), *points])
    if hi == lo:
        pad = abs(lo) * 0.01 if lo != 0 else 1.0
        lo, hi = lo - pad, hi + pad
    width = 2 * iqr / x.size ** (1 / 3) if iqr > 0 else (hi - lo) / 10
    bins = int(min(max_bins, max(10, math.ceil((hi - lo) / width))))
    below = int(np.count_nonzero(x < lo))
    above = int(np.count_nonzero(x > hi))
    counts, edges = np.histogram(x[(x >= lo) & (x <= hi)], bins=bins, range=(lo, hi))
    return Histogram(
        [float(e) for e in edges], [int(c) for c in counts], lower, upper, below, above
    )
