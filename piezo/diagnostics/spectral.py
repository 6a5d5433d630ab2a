"""Spectral parts of the capture diagnostics: mains hum lines and the low-frequency corner.

Pure functions over a one-sided power spectral density (private to
:mod:`piezo.diagnostics.checker`, which re-exports the public names).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import optimize, stats

from piezo.diagnostics.thresholds import Thresholds
from piezo.response.model import highpass_power
from piezo.tone.line import spectral_line

__all__ = [
    "HumLine",
    "HumResult",
    "RolloffResult",
    "estimate_rolloff",
    "measure_hum",
    "psd_floor",
]


@dataclass(frozen=True)
class HumLine:
    """One examined mains line (a harmonic of 50 or 60 Hz) and whether it is hum.

    Examples
    --------
    A 50 Hz tone in weak noise: the fundamental stands out, its second harmonic not.

    >>> import numpy as np
    >>> from piezo.spectral.welch import welch_psd
    >>> t = np.arange(32000) / 8000
    >>> x = 0.1 * np.sin(2 * np.pi * 50 * t)
    >>> x += 1e-3 * np.random.default_rng(0).standard_normal(t.size)
    >>> r = welch_psd(x, 8000.0, segment_frames=8000)
    >>> hum = measure_hum(r.frequency_hz, r.psd[:, 0], total_power=float(np.var(x)),
    ...                   degrees_of_freedom=r.degrees_of_freedom)
    >>> [(ln.harmonic, ln.nominal_hz, ln.detected) for ln in hum.lines[:2]]
    [(1, 50.0, True), (2, 100.0, False)]
    >>> round(hum.lines[0].frequency_hz, 2)
    50.0
    >>> hum.lines[0].re_total_db > -0.01  # the tone is nearly all the channel's power
    True
    """

    mains_hz: float
    harmonic: int
    nominal_hz: float
    frequency_hz: float
    level_db: float | None  # dB re the reference; None when nothing stands above the floor
    re_total_db: float | None  # relative to the channel's AC power
    above_floor_db: float
    detected: bool


@dataclass(frozen=True)
class HumResult:
    """Mains hum of one channel: status, the stronger mains family and its lines.

    Examples
    --------
    White noise holds no hum; a spectrum with bins wider than 1 Hz cannot tell:

    >>> import numpy as np
    >>> from piezo.spectral.welch import welch_psd
    >>> x = np.random.default_rng(0).standard_normal(32000)
    >>> fine = welch_psd(x, 8000.0, segment_frames=8000)
    >>> measure_hum(fine.frequency_hz, fine.psd[:, 0], total_power=1.0,
    ...             degrees_of_freedom=fine.degrees_of_freedom).status
    'none'
    >>> coarse = welch_psd(x, 8000.0, segment_frames=1024)
    >>> measure_hum(coarse.frequency_hz, coarse.psd[:, 0], total_power=1.0).status
    'not determinable'
    """

    status: str  # "detected", "none", "not determinable"
    mains_hz: float | None
    level_db: float | None  # all detected lines of the chosen mains family together
    re_total_db: float | None
    lines: tuple[HumLine, ...]
    reason: str


@dataclass(frozen=True)
class RolloffResult:
    """Low-frequency corner of a capture, or why it cannot be given (see
    :func:`estimate_rolloff`).

    Examples
    --------
    White noise is flat down to the lowest analysed frequency: the corner lies below
    it, and the result says so instead of guessing.

    >>> import numpy as np
    >>> from piezo.spectral.welch import welch_psd
    >>> x = np.random.default_rng(0).standard_normal(160000)
    >>> r = welch_psd(x, 16000.0, segment_frames=4096)
    >>> ro = estimate_rolloff(r.frequency_hz, r.psd[:, 0],
    ...                       degrees_of_freedom=r.degrees_of_freedom)
    >>> ro.status, ro.corner_hz, round(ro.upper_bound_hz, 1)  # 4 bins of 16000/4096 Hz
    ('below range', None, 15.6)
    """

    status: str  # "estimated", "below range", "not determinable"
    corner_hz: float | None
    order: int | None
    upper_bound_hz: float | None  # for "below range": the corner lies below this
    residual_db: float | None
    lowest_content_hz: float | None
    expected_corner_hz: float | None
    reason: str
    # Evidence: the band levels the fit saw (dB re reference²/Hz at the band centres) and
    # the fitted passband (level at 1 kHz and tilt) when a fit was made.
    band_hz: tuple[float, ...] = ()
    band_level_db: tuple[float, ...] = ()
    fit_level_db: float | None = None
    tilt_db_per_decade: float | None = None
    fit_order: int | None = None
    fit_corner_hz: float | None = None


# A line must stand out of the PSD's own scatter with this false-alarm probability per
# examined line (the search window's bins counted), whatever hum_detect_db says.
_HUM_FALSE_ALARM = 1e-3


def _chi2_median(dof: float) -> float:
    """Median of a χ² variable with ``dof`` degrees of freedom, divided by its mean."""
    return float(stats.gamma.median(dof / 2.0, scale=2.0 / dof))


def measure_hum(
    frequencies_hz: np.ndarray,
    psd: np.ndarray,
    *,
    total_power: float,
    degrees_of_freedom: float = 2.0,
    reference: float = 1.0,
    thresholds: Thresholds | None = None,
) -> HumResult:
    """Find mains hum lines in a one-sided power spectral density.

    For each mains frequency and harmonic k, the peak bin within ``hum_search_hz`` × k of
    k × mains is taken. The line's mean square is the PSD summed over the peak bin and its
    two neighbours, times the bin width, less the local floor over the same three bins;
    its frequency the power-weighted centroid of those bins (the one tone-line
    estimator, :func:`piezo.tone.line.spectral_line`).
    With density scaling, PSD × bin width summed over a tone's Hann main lobe is the
    tone's mean square (Parseval); the three central bins hold at least 97.9 % of it
    (Harris 1978, Hann window: worst case half a bin off, -0.09 dB).

    The local floor is the median PSD 3 to 13 Hz (at least 4 to 20 bins) either side,
    divided by the median of the χ² distribution of the estimate so it reads the mean
    noise density. A line is detected when its peak stands ``hum_detect_db`` above the
    floor, or more where the estimate's scatter demands it (few averages), and is not
    weaker than ``hum_ignore_db`` relative to ``total_power``.

    Parameters
    ----------
    frequencies_hz, psd
        Bin frequencies (Hz, uniform spacing from 0) and PSD (unit²/Hz), 1-D.
    total_power
        Mean square of the channel's AC part (unit²), for the relative levels.
    degrees_of_freedom
        χ² degrees of freedom of each PSD value (2 for one periodogram; Welch averages:
        ``PSDResult.degrees_of_freedom``), for the scatter of the estimate.
    reference
        Reference value of the unit for the dB levels (1.0 = dB re 1 unit).
    thresholds
        Limits (:class:`Thresholds`).

    Examples
    --------
    A 50 Hz tone of amplitude 0.1 has the mean square 0.1²/2, -23.01 dB re 1; the three
    central Hann bins hold all of it for a tone on a bin centre:

    >>> import numpy as np
    >>> from piezo.spectral.welch import welch_psd
    >>> t = np.arange(32000) / 8000
    >>> x = 0.1 * np.sin(2 * np.pi * 50 * t)
    >>> x += 1e-3 * np.random.default_rng(0).standard_normal(t.size)
    >>> r = welch_psd(x, 8000.0, segment_frames=8000)  # 1 Hz bins
    >>> hum = measure_hum(r.frequency_hz, r.psd[:, 0], total_power=float(np.var(x)),
    ...                   degrees_of_freedom=r.degrees_of_freedom)
    >>> hum.status, hum.mains_hz, round(hum.level_db, 2)
    ('detected', 50.0, -23.01)
    """
    th = thresholds or Thresholds()
    df = float(frequencies_hz[1] - frequencies_hz[0])
    nyquist = float(frequencies_hz[-1])
    if df > 1.0:
        return HumResult(
            "not determinable",
            None,
            None,
            None,
            (),
            f"spectrum too coarse for hum ({df:.3g} Hz bins; needs at most 1 Hz, i.e. a "
            "longer recording)",
        )
    nu = float(degrees_of_freedom)
    median_factor = _chi2_median(nu)
    inner_hz = max(3.0, 4 * df)
    outer_hz = inner_hz + max(10.0, 16 * df)
    lines: list[HumLine] = []
    family_power: dict[float, float] = {}
    for mains in th.hum_mains_hz:
        family_power[mains] = 0.0
        for k in range(1, th.hum_harmonics + 1):
            f0 = k * mains
            search = max(th.hum_search_hz * k, df)
            if f0 + search + outer_hz > 0.95 * nyquist:
                break
            dist = np.abs(frequencies_hz - f0)
            win = np.flatnonzero(dist <= search)
            p = int(win[np.argmax(psd[win])])
            ring = (dist >= inner_hz + search) & (dist <= outer_hz + search)
            floor = float(np.median(psd[ring])) / median_factor
            line = spectral_line(frequencies_hz, psd, p, half_width_bins=1, floor_density=floor)
            excess = line.mean_square
            above_db = 10 * math.log10(psd[p] / floor) if floor > 0 else math.inf
            # Peak of the window's bins under noise alone: exceeded with probability
            # _HUM_FALSE_ALARM (χ² with nu degrees of freedom, normalised to mean 1).
            stat = float(stats.gamma.isf(_HUM_FALSE_ALARM / win.size, nu / 2.0, scale=2.0 / nu))
            need_db = max(th.hum_detect_db, 10 * math.log10(stat))
            if excess > 0:
                level_db = 10 * math.log10(excess / reference**2)
                re_total = 10 * math.log10(excess / total_power) if total_power > 0 else None
            else:
                level_db = None
                re_total = None
            detected = (
                above_db >= need_db
                and excess > 0
                and (re_total is None or re_total >= th.hum_ignore_db)
            )
            lines.append(
                HumLine(
                    mains_hz=mains,
                    harmonic=k,
                    nominal_hz=f0,
                    frequency_hz=line.frequency_hz,
                    level_db=level_db,
                    re_total_db=re_total,
                    above_floor_db=above_db,
                    detected=detected,
                )
            )
            if detected:
                family_power[mains] += excess
    if not lines:
        return HumResult(
            "not determinable",
            None,
            None,
            None,
            (),
            "sample rate too low to look at the mains frequencies",
        )
    best = max(family_power, key=lambda m: family_power[m])
    if family_power[best] <= 0:
        return HumResult("none", None, None, None, tuple(lines), "no line above the floor")
    power = family_power[best]
    return HumResult(
        "detected",
        best,
        10 * math.log10(power / reference**2),
        10 * math.log10(power / total_power) if total_power > 0 else None,
        tuple(lines),
        f"lines at {best:g} Hz and harmonics stand above the local floor",
    )


_TOO_NARROW = 1e30  # objective value of a fit range with too few bands
# The passband may tilt (pink noise: -10 dB/decade; white: 0); a steeper slope is taken as
# part of the roll-off, otherwise a first-order slope (+20 dB/decade) could pass for tilt.
_MAX_TILT_DB_PER_DECADE = 10.0
# A corner is accepted only when the high-pass shape improves on the passband line alone
# by an F statistic (one extra parameter) of at least this: p below about 1e-4 for ten
# or more bands. Noise alone rarely gets there; a real roll-off gives hundreds.
_CORNER_F_MIN = 25.0


def psd_floor(
    frequencies_hz: np.ndarray,
    psd: np.ndarray,
    *,
    degrees_of_freedom: float = 2.0,
    percentile: float = 10.0,
    low_hz: float = 20.0,
) -> float | None:
    """The floor of a PSD: a low percentile of its locally averaged density (unit²/Hz).

    The bins from ``low_hz`` (at least four bins) to 80 % of the Nyquist frequency are
    taken in groups of 32; each group's median, divided by the median of the estimate's
    χ² distribution, estimates the mean density there. The ``percentile`` of these
    group values is the floor. For white noise of variance s² it reads the one-sided
    density 2 s²/fs (Heinzel, Rüdiger, Schilling 2002) within the small scatter of the
    group estimates. Returns None when fewer than 32 bins are available.

    Examples
    --------
    Unit-variance white noise at 8 kHz: the floor reads 2/8000 = 2.5e-4 per hertz to
    within a few per cent:

    >>> import numpy as np
    >>> from piezo.spectral.welch import welch_psd
    >>> x = np.random.default_rng(0).standard_normal(80000)
    >>> r = welch_psd(x, 8000.0, segment_frames=1024)
    >>> floor = psd_floor(r.frequency_hz, r.psd[:, 0], degrees_of_freedom=r.degrees_of_freedom)
    >>> round(floor / (2 / 8000), 1)
    1.0
    """
    df = float(frequencies_hz[1] - frequencies_hz[0])
    band = (frequencies_hz >= max(low_hz, 4 * df)) & (frequencies_hz <= 0.8 * frequencies_hz[-1])
    values = np.asarray(psd)[band]
    groups = values.size // _FLOOR_GROUP
    if groups == 0:
        return None
    median_factor = _chi2_median(float(degrees_of_freedom))
    local = np.median(values[: groups * _FLOOR_GROUP].reshape(groups, _FLOOR_GROUP), axis=1)
    return float(np.percentile(local, percentile)) / median_factor


_FLOOR_GROUP = 32
# Work array of the coarse roll-off search (grid corners x spectral lines evaluated at
# once): large enough to pay for the loop, small enough to stay in the processor cache.
_GRID_CHUNK_ELEMENTS = 2**17


def estimate_rolloff(
    frequencies_hz: np.ndarray,
    psd: np.ndarray,
    *,
    degrees_of_freedom: float = 2.0,
    exclude_hz: Sequence[float] = (),
    reference: float = 1.0,
    thresholds: Thresholds | None = None,
) -> RolloffResult:
    """Estimate the low-frequency corner of a capture from its PSD.

    The PSD is reduced to sixth-octave bands (median of the bins in each band, at least
    three bins per band, so narrowband lines barely move it; bins within 1 Hz of
    ``exclude_hz`` are left out). Bands more than ``rolloff_content_db`` under the passband
    (90th percentile of the band levels) hold no usable content. Over the contiguous
    bands with content, the shape of a first-order high-pass, |H|² = r²/(1 + r²), and of a
    second-order Butterworth high-pass, |H|² = r⁴/(1 + r⁴), r = f/f_c, is fitted in dB by
    weighted least squares over ``[lowest content, rolloff_fit_span × f_c]``. Free are f_c,
    the passband level and a passband tilt of at most ±10 dB/decade (white noise is flat,
    pink noise falls 10 dB/decade); weights come from the statistical scatter of each
    band. The misfit is the RMS deviation beyond that scatter.

    The answer is never a guess:

    - ``"estimated"``: misfit within ``rolloff_max_residual_db`` and at least one octave of
      content below the corner;
    - ``"below range"``: the spectrum is flat (within 3 dB) down to the lowest analysed
      frequency, so the corner lies below it (``upper_bound_hz``);
    - ``"not determinable"``: with the reason (no content below some frequency, a shape
      that is no first- or second-order high-pass, too little bandwidth, or a corner at
      the top of the search: corners are sought up to 0.8 × Nyquist / ``rolloff_fit_span``,
      and a best fit on that edge only says the corner lies near or above it).

    The estimate describes the spectrum as captured. It is the chain's corner only when
    the signal was broadband and above the converter's own noise at low frequencies.

    Parameters
    ----------
    frequencies_hz, psd
        Bin frequencies (Hz, uniform spacing from 0) and PSD (unit²/Hz), 1-D.
    degrees_of_freedom
        χ² degrees of freedom of each PSD value (for the scatter of the band levels).
    exclude_hz
        Frequencies of narrowband lines to leave out (e.g. detected hum).
    reference
        Reference of the band levels in the evidence (dB re reference²/Hz).
    thresholds
        Limits (:class:`Thresholds`).

    Examples
    --------
    White noise through a first-order Butterworth high-pass at 100 Hz; with 10 s of
    noise the estimate scatters by about ±5 % from seed to seed:

    >>> import numpy as np
    >>> from scipy import signal
    >>> from piezo.spectral.welch import welch_psd
    >>> sos = signal.butter(1, 100.0, "highpass", fs=16000.0, output="sos")
    >>> x = signal.sosfilt(sos, np.random.default_rng(0).standard_normal(160000))
    >>> r = welch_psd(x, 16000.0, segment_frames=4096)
    >>> ro = estimate_rolloff(r.frequency_hz, r.psd[:, 0],
    ...                       degrees_of_freedom=r.degrees_of_freedom)
    >>> ro.status, ro.order, round(ro.corner_hz, -1)
    ('estimated', 1, 100.0)
    """
    th = thresholds or Thresholds()
    expected = th.rolloff_expected_hz

    evidence: dict = {}

    def fail(reason: str, content: float | None = None) -> RolloffResult:
        return RolloffResult(
            "not determinable", None, None, None, None, content, expected, reason, **evidence
        )

    freqs = np.asarray(frequencies_hz, dtype=np.float64)
    p = np.asarray(psd, dtype=np.float64)
    df = float(freqs[1] - freqs[0])
    f_lo = 4.0 * df  # below this the window's main lobe around DC interferes
    f_top = 0.8 * float(freqs[-1])  # clear of anti-alias filters
    keep = (freqs >= f_lo) & (freqs <= f_top)
    for f in exclude_hz:
        keep &= np.abs(freqs - f) > max(1.0, 2 * df)
    idx = np.flatnonzero(keep)
    if idx.size < 30:
        return fail("too few spectral lines (recording too short or sample rate too low)")
    # Sixth-octave bands from f_lo, merged upward until each holds at least 3 bins.
    edges = f_lo * 2.0 ** (np.arange(0, 6 * math.log2(f_top / f_lo) + 1) / 6.0)
    band_of = np.searchsorted(edges, freqs[idx], side="right") - 1
    groups: list[np.ndarray] = []
    current: list[int] = []
    for b in np.unique(band_of):
        current.extend(idx[band_of == b].tolist())
        if len(current) >= 3:
            groups.append(np.array(current))
            current = []
    if current and groups:
        groups[-1] = np.concatenate([groups[-1], np.array(current)])
    if len(groups) < 8:
        return fail("too few frequency bands to fit a corner")
    # Band level: the mean of the band's bins after dropping bins that stand out as
    # narrowband lines (above the 1e-3 upper tail of the estimate's χ² scatter, taken
    # from the band median).
    nu = float(degrees_of_freedom)
    tail = float(stats.gamma.isf(1e-3, nu / 2.0, scale=2.0 / nu)) / _chi2_median(nu)
    groups = [g[p[g] <= tail * np.median(p[g])] for g in groups]
    level = np.array([10 * math.log10(max(float(np.mean(p[g])), 1e-300)) for g in groups])
    count = np.array([g.size for g in groups], dtype=np.float64)
    # Scatter of each band level (dB): one bin of a ν-dof estimate scatters by
    # 10 lg(e)·sqrt(2/ν); the mean of n bins over about n/1.5 independent ones (Hann
    # bins overlap; NENBW 1.5, Harris 1978).
    sigma = 10 * math.log10(math.e) * math.sqrt(2.0 / nu)
    sigma_b = sigma / np.sqrt(np.maximum(count / 1.5, 1.0))
    weight = 1.0 / sigma_b**2
    f_lo_band = np.array([freqs[g[0]] for g in groups])
    # The model's band value is its mean over the band's bins (bins concatenated in band
    # order; ``starts`` indexes each band's first bin).
    bin_f = freqs[np.concatenate(groups)]
    starts = np.concatenate([[0], np.cumsum(count[:-1])]).astype(np.int64)
    centre = np.array([math.sqrt(freqs[g[0]] * freqs[g[-1]]) for g in groups])
    passband = float(np.percentile(level, 90))
    content = level >= passband - th.rolloff_content_db
    first = int(np.argmax(level))
    while first > 0 and content[first - 1]:
        first -= 1
    f_content = float(f_lo_band[first])
    at_floor = first == 0
    sel = np.arange(first, len(groups))
    no_content = (
        f"no usable content below {f_content:.3g} Hz (more than "
        f"{th.rolloff_content_db:g} dB under the passband)"
    )
    if sel.size < 8:
        return fail(no_content, f_content)

    log_centre = np.log10(centre)
    evidence["band_hz"] = tuple(float(f) for f in centre)
    ref_db = 20 * math.log10(reference)
    evidence["band_level_db"] = tuple(float(v) - ref_db for v in level)

    def fit(
        log_fc: float, order: int, use: np.ndarray | None = None
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, float, float] | None:
        """Residuals, weights, bands, level at 1 kHz and tilt of the best passband line.

        The bands used are those up to ``rolloff_fit_span`` × the corner, unless given.
        """
        fc = math.exp(log_fc)
        if use is None:
            use = sel[centre[sel] <= th.rolloff_fit_span * fc]
        if use.size < 6:
            return None
        # ``use`` is a contiguous run of bands: their bins are contiguous too.
        lo_bin = starts[use[0]]
        hi_bin = starts[use[-1]] + int(count[use[-1]])
        power = highpass_power(bin_f[lo_bin:hi_bin], corner_hz=fc, order=order)
        model = 10 * np.log10(np.add.reduceat(power, starts[use] - lo_bin) / count[use])
        y = level[use] - model
        w = weight[use]
        x = log_centre[use]
        xm = float(np.sum(w * x) / np.sum(w))
        ym = float(np.sum(w * y) / np.sum(w))
        sxx = float(np.sum(w * (x - xm) ** 2))
        tilt = float(np.sum(w * (x - xm) * (y - ym)) / sxx) if sxx > 0 else 0.0
        tilt = min(max(tilt, -_MAX_TILT_DB_PER_DECADE), _MAX_TILT_DB_PER_DECADE)
        return y - ym - tilt * (x - xm), w, use, ym + tilt * (3.0 - xm), tilt

    def objective(log_fc: float, order: int, use: np.ndarray | None = None) -> float:
        got = fit(log_fc, order, use)
        if got is None:
            return _TOO_NARROW
        resid, w, used, _, _ = got
        # Mean weighted square deviation in units of the statistical scatter: comparable
        # between fit ranges of different size.
        return float(np.sum(w * resid**2) / np.sum(w) / np.mean(sigma_b[used] ** 2))

    log_lo = math.log(f_content / 8.0)
    log_hi = math.log(f_top / th.rolloff_fit_span)
    if log_hi <= log_lo:
        return fail("too little bandwidth above the lowest content to fit a corner", f_content)
    grid = np.linspace(log_lo, log_hi, 240)
    step = float(grid[1] - grid[0])
    # Bands each grid corner uses (the first ``used`` of ``sel``; band centres rise).
    grid_fc = np.array([math.exp(g) for g in grid])
    used = np.searchsorted(centre[sel], th.rolloff_fit_span * grid_fc, side="right")

    def coarse(order: int) -> np.ndarray:
        """:func:`objective` at every grid corner at once (the same sums, vectorised)."""
        errs = np.full(grid.size, _TOO_NARROW)
        b0 = int(starts[sel[0]])
        scatter = np.cumsum(sigma_b[sel] ** 2)
        chunk = max(1, _GRID_CHUNK_ELEMENTS // max(bin_f.size, 1))
        for lo in range(0, grid.size, chunk):
            rows = np.arange(lo, min(lo + chunk, grid.size))
            rows = rows[used[rows] >= 6]
            if rows.size == 0:
                continue
            k = used[rows]
            bands = sel[: int(k[-1])]
            hi_bin = int(starts[bands[-1]] + count[bands[-1]])
            power = highpass_power(
                bin_f[b0:hi_bin],
                corner_hz=grid_fc[rows][:, None],  # type: ignore[arg-type]  # broadcasts
                order=order,
            )
            band_power = np.add.reduceat(power, starts[bands] - b0, axis=1) / count[bands]
            model = 10 * np.log10(band_power)
            y = level[bands] - model
            w = weight[bands] * (np.arange(bands.size) < k[:, None])
            x = log_centre[bands]
            sw = np.sum(w, axis=1)
            xm = np.sum(w * x, axis=1) / sw
            ym = np.sum(w * y, axis=1) / sw
            dx = x - xm[:, None]
            sxx = np.sum(w * dx**2, axis=1)
            sxy = np.sum(w * dx * (y - ym[:, None]), axis=1)
            tilt = np.divide(sxy, sxx, out=np.zeros_like(sxx), where=sxx > 0)
            tilt = np.clip(tilt, -_MAX_TILT_DB_PER_DECADE, _MAX_TILT_DB_PER_DECADE)
            resid = y - ym[:, None] - tilt[:, None] * dx
            errs[rows] = np.sum(w * resid**2, axis=1) / sw / (scatter[k - 1] / k)
        return errs

    best: tuple[float, float, int, np.ndarray, bool] = (_TOO_NARROW, 0.0, 1, sel, False)
    for order in (1, 2):
        errs = coarse(order)
        i = int(np.argmin(errs))
        if errs[i] >= _TOO_NARROW:
            continue
        # The vectorised sums may differ from the scalar ones in the last bits: the value
        # carried on is the scalar objective's.
        errs[i] = objective(float(grid[i]), order)
        # The coarse search changes its band set with the corner, which makes the
        # objective jump; refine with the band set held fixed, twice (the second time
        # with the bands belonging to the refined corner).
        log_fc = float(grid[i])
        use = sel[centre[sel] <= th.rolloff_fit_span * math.exp(log_fc)]
        value = float(errs[i])
        for _ in range(2):
            bands = sel[centre[sel] <= th.rolloff_fit_span * math.exp(log_fc)]
            if bands.size >= 6:
                use = bands
            res = optimize.minimize_scalar(
                lambda g, o=order, u=use: objective(g, o, u),
                bounds=(log_fc - 4 * step, log_fc + 4 * step),
                method="bounded",
                options={"xatol": 1e-5},
            )
            if float(res.fun) <= value:
                log_fc, value = float(res.x), float(res.fun)
        if value < best[0]:
            # A minimum on the grid's last corner, or refined beyond it, is the search
            # limit, not the corner: the objective still falls there.
            pinned = i == grid.size - 1 or log_fc > log_hi
            best = (value, log_fc, order, use, pinned)
    if best[0] >= _TOO_NARROW:
        return fail("too little bandwidth to fit a corner", f_content)
    _, log_fc, order, use, pinned = best
    fc = math.exp(log_fc)
    resid, w, use, level_1k, tilt = fit(log_fc, order, use)  # type: ignore[misc]
    evidence.update(
        fit_level_db=level_1k - ref_db,
        tilt_db_per_decade=tilt,
        fit_order=order,
        fit_corner_hz=fc,
    )
    excess = float(np.mean(resid**2) - np.mean(sigma_b[use] ** 2))
    resid_db = math.sqrt(max(excess, 0.0))
    shape_ok = resid_db <= th.rolloff_max_residual_db
    # Is the corner needed at all? Compare with the passband line alone (no high-pass)
    # over the same bands: an F test for the one extra parameter, the scatter taken from
    # the high-pass fit itself so a misjudged band scatter does not decide.
    chi2_hp = float(np.sum(w * resid**2))
    chi2_flat = float(np.sum(w * _line_residuals(log_centre[use], level[use], w) ** 2))
    dof_hp = max(use.size - 3, 1)
    f_stat = (chi2_flat - chi2_hp) / max(chi2_hp / dof_hp, 1e-300)
    significant = f_stat >= _CORNER_F_MIN
    if significant and pinned:
        return fail(
            f"the corner lies near or above {math.exp(log_hi):.3g} Hz, the highest the fit "
            f"can place (it needs passband up to {th.rolloff_fit_span:g} × the corner, below "
            f"{f_top:.3g} Hz = 0.8 × Nyquist)",
            f_content,
        )
    if not at_floor and (fc < 2.0 * f_content or not shape_ok or not significant):
        return fail(
            no_content + ": the spectrum falls faster than a first- or second-order "
            "high-pass, or the signal has no low-frequency content",
            f_content,
        )
    if not significant:
        return RolloffResult(
            "below range",
            None,
            None,
            f_content,
            None,
            f_content,
            expected,
            f"no high-pass shape stands out of the scatter down to {f_content:.3g} Hz, the "
            "lowest analysed frequency: the corner lies below it",
            **evidence,
        )
    if not shape_ok:
        return fail(
            f"the spectrum below {th.rolloff_fit_span * fc:.3g} Hz does not follow a first- "
            f"or second-order high-pass (misfit {resid_db:.2g} dB RMS > "
            f"{th.rolloff_max_residual_db:g} dB)",
            f_content,
        )
    if fc < 2.0 * f_content:
        return fail(
            f"less than one octave of content below the fitted corner ({fc:.3g} Hz)",
            f_content,
        )
    return RolloffResult(
        "estimated",
        fc,
        order,
        None,
        resid_db,
        f_content,
        expected,
        f"{'first' if order == 1 else 'second'}-order high-pass shape, misfit "
        f"{resid_db:.2g} dB RMS over {f_content:.3g}..{th.rolloff_fit_span * fc:.3g} Hz",
        **evidence,
    )


def _line_residuals(x: np.ndarray, y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Residuals of the weighted straight line (tilt within ±10 dB/decade) through y(x)."""
    xm = float(np.sum(w * x) / np.sum(w))
    ym = float(np.sum(w * y) / np.sum(w))
    sxx = float(np.sum(w * (x - xm) ** 2))
    tilt = float(np.sum(w * (x - xm) * (y - ym)) / sxx) if sxx > 0 else 0.0
    tilt = min(max(tilt, -_MAX_TILT_DB_PER_DECADE), _MAX_TILT_DB_PER_DECADE)
    return y - ym - tilt * (x - xm)
