"""Compiled inner loops (numba) for the streaming analyses.

Three kernels live here:

:func:`sosfilt_inplace`
    A cascade of second-order sections run in place over a ``(frames, channels)`` block
    with carried state, in the layout of :func:`scipy.signal.sosfilt` with ``axis=0``.
    It is general (any number of sections, any number of channels) and meant for every
    IIR filter bank of piezo (frequency weightings, fractional-octave bands).

:func:`level_meter_block`
    One pass over a block that does everything :class:`piezo.levels.meter.LevelMeter` needs
    per sample: the C and A weighting cascades, sums of squares, Z and C peaks, the F
    and S exponential averagers of the A-, C- and Z-weighted squares with their maxima
    and minima, the A-F and A-S level samples for the percentile histograms, and the
    level history (interval sums, A-F maxima and C peaks, F/S traces). The per-sample
    work runs in :func:`_level_segment`, compiled apart with LLVM's SLP vectoriser on.

The band-bank kernels (:class:`SOSBank`)
    Many filters driven by one input (a stage of the fractional-octave filter bank of
    :mod:`piezo.spectral.bands`): four filters advanced together in SIMD lanes, all
    their sections sample by sample, with the sums of squared outputs per segment and
    the full output of one filter (the anti-alias low-pass) as the only results.

All are compiled by numba the first time they are used (1-3 s, once per machine);
numba itself is imported then, not when this module is. The machine code is kept in a
per-user folder outside the package, and later processes load it without importing
numba (:mod:`piezo._kernels.native`, about 0.03 s of CPU). When that folder is not
writable the kernels are compiled in every process.
``fastmath`` is limited to ``contract`` (fused multiply-add allowed): no
reassociation, no assumptions about NaN or infinity, so results differ from scipy's
``sosfilt`` by rounding only. Calls release the interpreter lock: threads can run
kernels in parallel.

Filter recursion: transposed direct form II per section, as scipy's ``sosfilt``, with
the additions of ``z0`` ordered so that the new ``y`` enters last (shorter dependency
chain from one sample to the next)::

    y  = b0 v + z0
    z0 = (b1 v + z1) - a1 y
    z1 = b2 v - a2 y

Sections are run four at a time sample by sample, with their state in registers (the
four recursions overlap in the processor); a cascade of more than four sections makes
several passes over the block, and a last group of fewer than four is padded with
pass-through sections (exact: ``y = v``).
"""

from __future__ import annotations

import functools
import importlib
import math
import os
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from typing import Any

import numpy as np

from piezo._kernels.cache import import_numba
from piezo._kernels.native import Array, Kernel, Scalar

__all__ = [
    "BANK_SECTIONS",
    "INTERVAL_ROWS",
    "N_STATE",
    "ST_CF",
    "ST_CF_MAX",
    "ST_CF_MIN",
    "ST_CS",
    "ST_CS_MAX",
    "ST_CS_MIN",
    "ST_F",
    "ST_F_MAX",
    "ST_F_MIN",
    "ST_INT_A",
    "ST_INT_C",
    "ST_INT_F_MAX",
    "ST_INT_PEAK_C",
    "ST_INT_Z",
    "ST_PEAK_C",
    "ST_PEAK_Z_AFTER",
    "ST_PEAK_Z_HEAD",
    "ST_S",
    "ST_SUM_A",
    "ST_SUM_C",
    "ST_SUM_Z",
    "ST_S_MAX",
    "ST_S_MIN",
    "ST_ZF",
    "ST_ZF_MAX",
    "ST_ZF_MIN",
    "ST_ZS",
    "ST_ZS_MAX",
    "ST_ZS_MIN",
    "SOSBank",
    "bank_kernel_source",
    "level_meter_block",
    "new_level_state",
    "sosfilt_inplace",
]

_OPTIONS: dict[str, Any] = {"nogil": True, "fastmath": {"contract"}, "error_model": "numpy"}


# The kernels and their helpers stay plain Python functions until a kernel is compiled
# (:class:`piezo._kernels.native.Kernel`, when no compiled copy is cached): then
# :func:`_compile_helpers` replaces the helpers in this module's namespace by numba
# functions (a kernel being compiled looks them up there). Neither importing this
# module nor loading a cached kernel imports numba.
#: Helpers inlined into the kernels that call them.
_INLINE = ("_biquad", "_coefficients", "_state", "_count_level")
#: Helpers compiled as functions of their own (called from a kernel).
_CALLED = ("_sos_group4", "_level_segment")


_HELPERS_LOCK = threading.Lock()
_helpers_compiled = False


def _compile_helpers() -> None:
    """Replace the helpers by their numba functions (once per process)."""
    global _helpers_compiled
    with _HELPERS_LOCK:
        if _helpers_compiled:
            return
        numba = import_numba()
        names = globals()
        for name in _INLINE:
            names[name] = numba.njit(inline="always", **_OPTIONS)(names[name])
        for name in _CALLED:
            names[name] = numba.njit(**_OPTIONS)(names[name])
        _helpers_compiled = True


def _kernel(
    *args: Array | Scalar,
    returns: int = 0,
    check: Callable[..., None] | None = None,
    slp: bool = False,
) -> Callable[[Callable], Kernel]:
    """Make ``func`` a :class:`Kernel` with these arguments and the options above."""

    def make(func: Callable) -> Kernel:
        return Kernel(
            func,
            args,
            returns=returns,
            check=check,
            prepare=_compile_helpers,
            slp=slp,
            **_OPTIONS,
        )

    return make


def _f8(ndim: int, written: bool = False) -> Array:
    return Array("f8", ndim, written)


def _i8(ndim: int, written: bool = False) -> Array:
    return Array("i8", ndim, written)


def _biquad(v, b0, b1, b2, a1, a2, z0, z1):
    """One transposed-direct-form-II step: (output, new z0, new z1)."""
    y = b0 * v + z0
    return y, (b1 * v + z1) - a1 * y, b2 * v - a2 * y


def _coefficients(sos, s):
    """(b0, b1, b2, a1, a2) of section ``s``; a pass-through section beyond the end."""
    if s < sos.shape[0]:
        return sos[s, 0], sos[s, 1], sos[s, 2], sos[s, 4], sos[s, 5]
    return 1.0, 0.0, 0.0, 0.0, 0.0


def _state(zi, s, k, c):
    return zi[s, k, c] if s < zi.shape[0] else 0.0


def _sos_group4(sos, x, zi, g):
    """Sections g..g+3 of the cascade over the whole block (pass-through beyond the end).

    A function of its own: compiled apart from the loop over groups, the 20 coefficients
    and 8 states stay in registers (measured 15 % faster than inline).
    """
    n_sections = sos.shape[0]
    frames, channels = x.shape
    b00, b01, b02, a01, a02 = _coefficients(sos, g)
    b10, b11, b12, a11, a12 = _coefficients(sos, g + 1)
    b20, b21, b22, a21, a22 = _coefficients(sos, g + 2)
    b30, b31, b32, a31, a32 = _coefficients(sos, g + 3)
    for c in range(channels):
        z00, z01 = _state(zi, g, 0, c), _state(zi, g, 1, c)
        z10, z11 = _state(zi, g + 1, 0, c), _state(zi, g + 1, 1, c)
        z20, z21 = _state(zi, g + 2, 0, c), _state(zi, g + 2, 1, c)
        z30, z31 = _state(zi, g + 3, 0, c), _state(zi, g + 3, 1, c)
        for i in range(frames):
            v = x[i, c]
            v, z00, z01 = _biquad(v, b00, b01, b02, a01, a02, z00, z01)
            v, z10, z11 = _biquad(v, b10, b11, b12, a11, a12, z10, z11)
            v, z20, z21 = _biquad(v, b20, b21, b22, a21, a22, z20, z21)
            v, z30, z31 = _biquad(v, b30, b31, b32, a31, a32, z30, z31)
            x[i, c] = v
        zi[g, 0, c], zi[g, 1, c] = z00, z01
        if g + 1 < n_sections:
            zi[g + 1, 0, c], zi[g + 1, 1, c] = z10, z11
        if g + 2 < n_sections:
            zi[g + 2, 0, c], zi[g + 2, 1, c] = z20, z21
        if g + 3 < n_sections:
            zi[g + 3, 0, c], zi[g + 3, 1, c] = z30, z31


def _check_sosfilt(sos, x, zi) -> None:
    n_sections = sos.shape[0]
    if sos.shape[1] != 6:
        raise ValueError("sos must have shape (sections, 6)")
    if zi.shape[0] != n_sections or zi.shape[1] != 2 or zi.shape[2] != x.shape[1]:
        raise ValueError("zi must have shape (sections, 2, channels)")
    if n_sections and not (sos[:, 3] == 1.0).all():
        raise ValueError("sos[:, 3] (a0) must be 1")


@_kernel(_f8(2), _f8(2, True), _f8(3, True), check=_check_sosfilt)
def sosfilt_inplace(sos, x, zi):
    """Filter a block in place through a cascade of second-order sections.

    Same result (to rounding) as ``y, zf = scipy.signal.sosfilt(sos, x, axis=0, zi=zi)``
    with ``x[...] = y; zi[...] = zf``, without allocating anything.

    Parameters
    ----------
    sos
        float64 array (sections, 6) of second-order sections ``[b0, b1, b2, 1, a1, a2]``
        as designed by :mod:`scipy.signal` (``a0`` must be 1). Zero sections leave
        ``x`` unchanged.
    x
        C-contiguous float64 array (frames, channels), time on the first axis; any
        number of frames including 0. Overwritten with the filter output.
    zi
        float64 array (sections, 2, channels): the filter state, updated in place so the
        next block continues where this one ended. This is scipy's ``zi`` for
        ``axis=0``; start from zeros (rest) or from ``sosfilt_zi(sos)[:, :, None] * x0``
        (steady state for a constant input ``x0`` per channel).

    Raises
    ------
    ValueError
        When the shapes do not fit together or ``a0`` is not 1.
    """
    n_sections = sos.shape[0]
    for g in range(0, n_sections, 4):
        _sos_group4(sos, x, zi, g)


# --- level meter -------------------------------------------------------------------
# Rows of the level meter's per-channel state array (N_STATE, channels).
ST_SUM_Z = 0  # sum of x^2 over the recording
ST_SUM_C = 1  # sum of yC^2
ST_SUM_A = 2  # sum of yA^2
ST_PEAK_Z_HEAD = 3  # max |x| inside the filter settling time
ST_PEAK_Z_AFTER = 4  # max |x| after it
ST_PEAK_C = 5  # max |yC| after the settling time
ST_F = 6  # F averager value after the last sample (mean square)
ST_S = 7  # S averager value
ST_F_MAX = 8
ST_F_MIN = 9
ST_S_MAX = 10
ST_S_MIN = 11
ST_INT_Z = 12  # sums of the history interval in progress
ST_INT_C = 13
ST_INT_A = 14
# F and S averagers of the C- and Z-weighted squares, and their extremes.
ST_CF = 15
ST_CS = 16
ST_ZF = 17
ST_ZS = 18
ST_CF_MAX = 19
ST_CF_MIN = 20
ST_CS_MAX = 21
ST_CS_MIN = 22
ST_ZF_MAX = 23
ST_ZF_MIN = 24
ST_ZS_MAX = 25
ST_ZS_MIN = 26
ST_INT_F_MAX = 27  # largest A-F value of the history interval in progress (after settling)
ST_INT_PEAK_C = 28  # largest |yC| of the interval in progress (after settling)
N_STATE = 29
#: Rows of the extremes that start open: maxima at -inf, minima at +inf.
_MAX_ROWS = (ST_F_MAX, ST_S_MAX, ST_CF_MAX, ST_CS_MAX, ST_ZF_MAX, ST_ZS_MAX)
_MIN_ROWS = (ST_F_MIN, ST_S_MIN, ST_CF_MIN, ST_CS_MIN, ST_ZF_MIN, ST_ZS_MIN)
#: Rows of each history interval in ``interval_out``: Z, C, A sums, A-F max, C peak.
INTERVAL_ROWS = 5


def new_level_state(channels: int) -> np.ndarray:
    """Fresh state (N_STATE, channels) for :func:`level_meter_block`: all zero, extremes open."""
    state = np.zeros((N_STATE, channels))
    state[list(_MAX_ROWS)] = -np.inf
    state[list(_MIN_ROWS)] = np.inf
    state[[ST_INT_F_MAX, ST_INT_PEAK_C]] = -np.inf
    return state


def _count_level(hist, c, value, ref_sq, low_db, step_db):
    """Count ``value`` (a mean square) in the level histogram ``hist[c]``.

    Returns (zero, clipped): 1 where the value is exactly zero (not counted in a bin)
    or its level lies outside the histogram (counted in the end bin), else 0.
    """
    if value <= 0.0:
        return 1, 0
    n_bins = hist.shape[1]
    fbin = math.floor((10.0 * math.log10(value / ref_sq) - low_db) / step_db)
    if fbin >= 0.0 and fbin < n_bins:
        hist[c, int(fbin)] += 1
        return 0, 0
    hist[c, n_bins - 1 if fbin >= 0.0 else 0] += 1  # out of range, or not a number
    return 0, 1


def _level_segment(
    x, c, i, end, c_sos, a_sos, a_f, b_f, a_s, b_s,
    zc00, zc01, zc10, zc11, za00, za01, za10, za11, yf, ys, cf, cs, zf, zs,
):  # fmt: skip
    """The level meter's per-sample work over frames ``i..end-1`` of channel ``c``.

    A function of its own, compiled apart from :func:`level_meter_block` with LLVM's SLP
    vectoriser on: alone, its loop is packed into SIMD operations (the averagers and
    their extremes side by side), which LLVM did not do inside the whole kernel (the whole
    pass, one call over 60 s of noise in memory: 8.8 against 10.2-10.5 ns per frame).
    Returns the 14 states after the segment, then the
    sums of the Z, C and A squares, the Z and C peaks, the six maxima and the six minima
    of the A-F, A-S, C-F, C-S, Z-F and Z-S values.
    """
    cb00, cb01, cb02, ca01, ca02 = _coefficients(c_sos, 0)
    cb10, cb11, cb12, ca11, ca12 = _coefficients(c_sos, 1)
    ab00, ab01, ab02, aa01, aa02 = _coefficients(a_sos, 0)
    ab10, ab11, ab12, aa11, aa12 = _coefficients(a_sos, 1)
    seg_pz = 0.0
    seg_pc = 0.0
    seg_z = 0.0
    seg_c = 0.0
    seg_a = 0.0
    seg_f_max = seg_s_max = seg_cf_max = seg_cs_max = seg_zf_max = seg_zs_max = -math.inf
    seg_f_min = seg_s_min = seg_cf_min = seg_cs_min = seg_zf_min = seg_zs_min = math.inf
    for j in range(i, end):
        v = x[j, c]
        yc, zc00, zc01 = _biquad(v, cb00, cb01, cb02, ca01, ca02, zc00, zc01)
        yc, zc10, zc11 = _biquad(yc, cb10, cb11, cb12, ca11, ca12, zc10, zc11)
        ya, za00, za01 = _biquad(yc, ab00, ab01, ab02, aa01, aa02, za00, za01)
        ya, za10, za11 = _biquad(ya, ab10, ab11, ab12, aa11, aa12, za10, za11)
        qa = ya * ya
        qc = yc * yc
        qz = v * v
        seg_z += qz
        seg_c += qc
        seg_a += qa
        seg_pz = max(seg_pz, abs(v))
        seg_pc = max(seg_pc, abs(yc))
        yf = a_f * yf + b_f * qa
        ys = a_s * ys + b_s * qa
        cf = a_f * cf + b_f * qc
        cs = a_s * cs + b_s * qc
        zf = a_f * zf + b_f * qz
        zs = a_s * zs + b_s * qz
        seg_f_max = max(seg_f_max, yf)
        seg_f_min = min(seg_f_min, yf)
        seg_s_max = max(seg_s_max, ys)
        seg_s_min = min(seg_s_min, ys)
        seg_cf_max = max(seg_cf_max, cf)
        seg_cf_min = min(seg_cf_min, cf)
        seg_cs_max = max(seg_cs_max, cs)
        seg_cs_min = min(seg_cs_min, cs)
        seg_zf_max = max(seg_zf_max, zf)
        seg_zf_min = min(seg_zf_min, zf)
        seg_zs_max = max(seg_zs_max, zs)
        seg_zs_min = min(seg_zs_min, zs)
    return (
        zc00, zc01, zc10, zc11, za00, za01, za10, za11, yf, ys, cf, cs, zf, zs,
        seg_z, seg_c, seg_a, seg_pz, seg_pc,
        seg_f_max, seg_s_max, seg_cf_max, seg_cs_max, seg_zf_max, seg_zs_max,
        seg_f_min, seg_s_min, seg_cf_min, seg_cs_min, seg_zf_min, seg_zs_min,
    )  # fmt: skip


def _check_level_meter(x, c_sos, a_sos, zi_c, zi_a, state, *rest) -> None:
    channels = x.shape[1]
    if c_sos.shape != (2, 6) or a_sos.shape != (2, 6):
        raise ValueError("level_meter_block needs two C and two A-only sections")
    if zi_c.shape != (2, 2, channels) or zi_a.shape != (2, 2, channels):
        raise ValueError("zi_c and zi_a must have shape (2, 2, channels)")
    if state.shape != (N_STATE, channels) or rest[-1].shape != (channels,):
        raise ValueError("state must have shape (N_STATE, channels), scratch (channels,)")
    hist, hist_other, hist_s, hist_s_other = rest[:4]
    if hist.shape[0] != channels or hist_s.shape[0] != channels or hist.shape[1] < 1:
        raise ValueError("hist and hist_s must have shape (channels, bins)")
    if hist_other.shape != (2, channels) or hist_s_other.shape != (2, channels):
        raise ValueError("hist_other and hist_s_other must have shape (2, channels)")
    starts, periods = rest[5], rest[6]
    if starts.shape != (4,) or periods.shape != (3,) or periods[0] < 1:
        raise ValueError("starts needs 4 frames, periods 3 (the first >= 1)")
    trace_out, interval_out = rest[-3], rest[-2]
    frames = x.shape[0]
    if periods[2] > 0 and (
        periods[1] < 1
        or trace_out.shape[:2] != (2, channels)
        or trace_out.shape[2] < frames // periods[1] + 1
        or interval_out.shape[1:] != (INTERVAL_ROWS, channels)
        or interval_out.shape[0] < frames // periods[2] + 1
    ):
        raise ValueError("trace_out or interval_out too small for the block")


@_kernel(
    _f8(2),
    _f8(2),
    _f8(2),
    _f8(3, True),
    _f8(3, True),
    _f8(2, True),
    _i8(2, True),
    _i8(2, True),
    _i8(2, True),
    _i8(2, True),
    Scalar("i8"),
    _i8(1),
    _i8(1),
    Scalar("f8"),
    Scalar("f8"),
    Scalar("f8"),
    Scalar("f8"),
    Scalar("f8"),
    _f8(3, True),
    _f8(3, True),
    _f8(1, True),
    returns=2,
    check=_check_level_meter,
    slp=True,
)
def level_meter_block(
    x,
    c_sos,
    a_sos,
    zi_c,
    zi_a,
    state,
    hist,
    hist_other,
    hist_s,
    hist_s_other,
    frame0,
    starts,
    periods,
    a_f,
    a_s,
    ref_sq,
    hist_low_db,
    hist_step_db,
    trace_out,
    interval_out,
    scratch,
):
    """One pass of the level meter over a block (see :class:`piezo.levels.meter.LevelMeter`).

    Parameters
    ----------
    x
        C-contiguous float64 (frames, channels), calibrated samples. Not modified.
    c_sos, a_sos
        Two sections each: the C weighting, and the sections that turn the C-weighted
        signal into the A-weighted one (:func:`piezo.levels.weighting.weighting_chain_sos`).
    zi_c, zi_a
        Their states (2, 2, channels), scipy's layout, updated.
    state
        (N_STATE, channels) float64 accumulators (rows ``ST_*``), updated.
    hist, hist_other
        int64 (channels, bins) histogram of the A-F level in bins of ``hist_step_db``
        from ``hist_low_db``, and (2, channels) counts of F values exactly zero (row 0)
        and of levels outside the histogram (row 1, counted in the end bins too). Updated.
    hist_s, hist_s_other
        The same for the A-S level.
    frame0
        Index of the block's first frame in the recording.
    starts
        int64 [settle, f_min, percentiles, s_min]: first frame counted for the peaks and
        the F and S maxima (every weighting) and the per-interval maxima; the F minima;
        the F percentile samples; the S minima and the S percentile samples.
    periods
        int64 [percentile, trace, interval] in frames. The F and S levels are sampled at
        every frame n with (n + 1) % period == 0. ``interval`` 0: no history (``trace``
        and ``interval`` unused, output buffers untouched).
    a_f, a_s
        Poles of the F and S averagers, ``y = a y + (1 - a) q`` for the squares ``q``
        of the A-, C- and Z-weighted signal.
    ref_sq
        Square of the reference value (levels in dB re it).
    trace_out
        float64 (2, channels, >= frames // trace + 1): A-F and A-S values at trace
        instants.
    interval_out
        float64 (>= frames // interval + 1, INTERVAL_ROWS, channels): Z, C, A sums, the
        largest A-F value and the largest |yC| of the history intervals completed in
        this block (the maxima count from the settling frame on; -inf before it).
    scratch
        float64 (channels,) working space (the kernel allocates nothing).

    Returns
    -------
    (int, int)
        Trace values and completed intervals written; ``(-1, -1)`` if the block holds a
        NaN or infinite sample (or squares overflowing), in which case nothing was
        updated.
    """
    frames, channels = x.shape
    if frames == 0:
        return 0, 0
    # Validate first (the state must stay untouched on error); the sums are kept.
    sum_z = scratch
    for c in range(channels):
        s0 = s1 = s2 = s3 = 0.0
        i = 0
        while i + 4 <= frames:
            v0, v1, v2, v3 = x[i, c], x[i + 1, c], x[i + 2, c], x[i + 3, c]
            s0 += v0 * v0
            s1 += v1 * v1
            s2 += v2 * v2
            s3 += v3 * v3
            i += 4
        while i < frames:
            s0 += x[i, c] * x[i, c]
            i += 1
        total = (s0 + s1) + (s2 + s3)
        if not math.isfinite(total):
            return -1, -1
        sum_z[c] = total
    b_f = 1.0 - a_f
    b_s = 1.0 - a_s
    pct_every, trace_every, interval_every = periods[0], periods[1], periods[2]
    history = interval_every > 0
    # Local indices from which each statistic counts in this block.
    i_settle = min(max(starts[0] - frame0, 0), frames)
    i_fmin = min(max(starts[1] - frame0, 0), frames)
    i_pct = min(max(starts[2] - frame0, 0), frames)
    i_smin = min(max(starts[3] - frame0, 0), frames)
    n_trace = 0
    n_interval = 0
    for c in range(channels):
        zc00, zc01, zc10, zc11 = zi_c[0, 0, c], zi_c[0, 1, c], zi_c[1, 0, c], zi_c[1, 1, c]
        za00, za01, za10, za11 = zi_a[0, 0, c], zi_a[0, 1, c], zi_a[1, 0, c], zi_a[1, 1, c]
        yf, ys = state[ST_F, c], state[ST_S, c]
        cf, cs = state[ST_CF, c], state[ST_CS, c]
        zf, zs = state[ST_ZF, c], state[ST_ZS, c]
        f_max, f_min = state[ST_F_MAX, c], state[ST_F_MIN, c]
        s_max, s_min = state[ST_S_MAX, c], state[ST_S_MIN, c]
        cf_max, cf_min = state[ST_CF_MAX, c], state[ST_CF_MIN, c]
        cs_max, cs_min = state[ST_CS_MAX, c], state[ST_CS_MIN, c]
        zf_max, zf_min = state[ST_ZF_MAX, c], state[ST_ZF_MIN, c]
        zs_max, zs_min = state[ST_ZS_MAX, c], state[ST_ZS_MIN, c]
        pz_head, pz_after = state[ST_PEAK_Z_HEAD, c], state[ST_PEAK_Z_AFTER, c]
        pc = state[ST_PEAK_C, c]
        int_z, int_c, int_a = state[ST_INT_Z, c], state[ST_INT_C, c], state[ST_INT_A, c]
        int_f_max, int_pc = state[ST_INT_F_MAX, c], state[ST_INT_PEAK_C, c]
        sum_c = 0.0
        sum_a = 0.0
        # Frames until the next sampling instant / interval end, counting the current
        # frame: the instant is the last frame of the segment that ends there.
        to_pct = pct_every - frame0 % pct_every
        to_trace = trace_every - frame0 % trace_every if history else frames
        to_interval = interval_every - frame0 % interval_every if history else frames
        m_trace = 0
        m_interval = 0
        zero = clipped = zero_s = clipped_s = 0
        i = 0
        while i < frames:
            # A segment ends at the next event (sampling instant, interval end) or where
            # a statistic starts counting, so the per-sample loop (_level_segment) has no
            # branches.
            end = min(frames, i + to_pct, i + to_trace, i + to_interval)
            if i < i_settle:
                end = min(end, i_settle)
            if i < i_fmin:
                end = min(end, i_fmin)
            if i < i_smin:
                end = min(end, i_smin)
            (
                zc00, zc01, zc10, zc11, za00, za01, za10, za11,
                yf, ys, cf, cs, zf, zs,
                seg_z, seg_c, seg_a, seg_pz, seg_pc,
                seg_f_max, seg_s_max, seg_cf_max, seg_cs_max, seg_zf_max, seg_zs_max,
                seg_f_min, seg_s_min, seg_cf_min, seg_cs_min, seg_zf_min, seg_zs_min,
            ) = _level_segment(
                x, c, i, end, c_sos, a_sos, a_f, b_f, a_s, b_s,
                zc00, zc01, zc10, zc11, za00, za01, za10, za11, yf, ys, cf, cs, zf, zs,
            )  # fmt: skip
            sum_c += seg_c
            sum_a += seg_a
            if i >= i_settle:
                pz_after = max(pz_after, seg_pz)
                pc = max(pc, seg_pc)
                f_max = max(f_max, seg_f_max)
                s_max = max(s_max, seg_s_max)
                cf_max = max(cf_max, seg_cf_max)
                cs_max = max(cs_max, seg_cs_max)
                zf_max = max(zf_max, seg_zf_max)
                zs_max = max(zs_max, seg_zs_max)
                int_f_max = max(int_f_max, seg_f_max)
                int_pc = max(int_pc, seg_pc)
            else:
                pz_head = max(pz_head, seg_pz)
            if i >= i_fmin:
                f_min = min(f_min, seg_f_min)
                cf_min = min(cf_min, seg_cf_min)
                zf_min = min(zf_min, seg_zf_min)
            if i >= i_smin:
                s_min = min(s_min, seg_s_min)
                cs_min = min(cs_min, seg_cs_min)
                zs_min = min(zs_min, seg_zs_min)
            count = end - i
            i = end
            to_pct -= count
            if to_pct == 0:  # frame end - 1 is a percentile sampling instant
                to_pct = pct_every
                if end - 1 >= i_pct:
                    dz, dc = _count_level(hist, c, yf, ref_sq, hist_low_db, hist_step_db)
                    zero += dz
                    clipped += dc
                if end - 1 >= i_smin:
                    dz, dc = _count_level(hist_s, c, ys, ref_sq, hist_low_db, hist_step_db)
                    zero_s += dz
                    clipped_s += dc
            if history:
                int_z += seg_z
                int_c += seg_c
                int_a += seg_a
                to_trace -= count
                if to_trace == 0:
                    to_trace = trace_every
                    trace_out[0, c, m_trace] = yf
                    trace_out[1, c, m_trace] = ys
                    m_trace += 1
                to_interval -= count
                if to_interval == 0:
                    to_interval = interval_every
                    interval_out[m_interval, 0, c] = int_z
                    interval_out[m_interval, 1, c] = int_c
                    interval_out[m_interval, 2, c] = int_a
                    interval_out[m_interval, 3, c] = int_f_max
                    interval_out[m_interval, 4, c] = int_pc
                    int_z = int_c = int_a = 0.0
                    int_f_max = int_pc = -math.inf
                    m_interval += 1
        zi_c[0, 0, c], zi_c[0, 1, c], zi_c[1, 0, c], zi_c[1, 1, c] = zc00, zc01, zc10, zc11
        zi_a[0, 0, c], zi_a[0, 1, c], zi_a[1, 0, c], zi_a[1, 1, c] = za00, za01, za10, za11
        state[ST_SUM_Z, c] += sum_z[c]
        state[ST_SUM_C, c] += sum_c
        state[ST_SUM_A, c] += sum_a
        state[ST_F, c], state[ST_S, c] = yf, ys
        state[ST_CF, c], state[ST_CS, c] = cf, cs
        state[ST_ZF, c], state[ST_ZS, c] = zf, zs
        state[ST_F_MAX, c], state[ST_F_MIN, c] = f_max, f_min
        state[ST_S_MAX, c], state[ST_S_MIN, c] = s_max, s_min
        state[ST_CF_MAX, c], state[ST_CF_MIN, c] = cf_max, cf_min
        state[ST_CS_MAX, c], state[ST_CS_MIN, c] = cs_max, cs_min
        state[ST_ZF_MAX, c], state[ST_ZF_MIN, c] = zf_max, zf_min
        state[ST_ZS_MAX, c], state[ST_ZS_MIN, c] = zs_max, zs_min
        state[ST_PEAK_Z_HEAD, c], state[ST_PEAK_Z_AFTER, c] = pz_head, pz_after
        state[ST_PEAK_C, c] = pc
        state[ST_INT_Z, c], state[ST_INT_C, c], state[ST_INT_A, c] = int_z, int_c, int_a
        state[ST_INT_F_MAX, c], state[ST_INT_PEAK_C, c] = int_f_max, int_pc
        hist_other[0, c] += zero
        hist_other[1, c] += clipped
        hist_s_other[0, c] += zero_s
        hist_s_other[1, c] += clipped_s
        n_trace = m_trace
        n_interval = m_interval
    return n_trace, n_interval


# --- filter bank (one input, many filters) -------------------------------------------
#: Second-order sections per filter in :class:`SOSBank` (Butterworth band-pass of order
#: 4 and the order-8 elliptic anti-alias low-pass of :mod:`piezo.spectral.bands`).
BANK_SECTIONS = 4
#: Lanes (filters advanced together) of the compiled bank kernel: four float64 lanes
#: fill a 256-bit SIMD register. (Eight lanes, for 512-bit registers, were measured no
#: faster on the development machine, whose processor splits 512-bit operations in two,
#: and LLVM vectorised them less cleanly.)
_BANK_LANES = (4,)


def bank_kernel_source(lanes: int, sections: int) -> str:
    """Python source of the bank kernel ``bank{lanes}`` (written to ``bank.py``).

    ``lanes`` filters of ``sections`` second-order sections each are advanced together,
    sample by sample through all sections, so that the recursions of different sections
    overlap in the processor. Each section is in direct form II with its numerator
    normalised to ``[1, c, 1]`` (``b0`` of every section moved into one gain per filter,
    applied outside; symmetric numerators, i.e. zeros on the unit circle or at z = ±1,
    as Butterworth band-passes and elliptic low-passes have)::

        w  = (u - a2 w[t-2]) - a1 w[t-1]
        y  = w + (c w[t-1] + w[t-2])

    Four operations per section and sample, and a loop-carried dependency of one fused
    multiply-add. The body is written out once per lane (scalar locals for every
    coefficient and state) so that LLVM's SLP vectoriser packs the lanes into SIMD
    registers; a loop over lanes keeps the states in memory and runs about three times
    slower.

    Arguments of the kernel: ``x`` (n,) the input; ``co`` (groups, sections, 3, lanes)
    ``c, a1, a2``; ``z`` (groups, sections, 2, lanes) ``w[t-1], w[t-2]``, updated;
    ``bounds`` (segments + 1,) segment limits in ``x``; ``sums`` (segments, groups,
    lanes) += squared (unscaled) outputs; ``out`` (n,) receives the output of lane 0 of
    group 0 times ``gain0``. Every group writes its lane 0 to ``out`` and group 0 comes
    last: the loop without that store was measured three times slower (LLVM vectorised
    it differently).
    """
    r = range(lanes)
    lines = [
        f"def bank{lanes}(x, co, z, bounds, sums, out, gain0):",
        "    groups = co.shape[0]",
        "    nseg = bounds.shape[0] - 1",
        "    for g in range(groups - 1, -1, -1):",
    ]
    for s in range(sections):
        for k in r:
            lines.append(
                f"        c{s}_{k} = co[g, {s}, 0, {k}]; a{s}_{k} = co[g, {s}, 1, {k}]; "
                f"aa{s}_{k} = co[g, {s}, 2, {k}]"
            )
            lines.append(f"        p{s}_{k} = z[g, {s}, 0, {k}]; q{s}_{k} = z[g, {s}, 1, {k}]")
    lines.append("        for seg in range(nseg):")
    lines += [f"            e{k} = 0.0" for k in r]

    def body(indent: str, with_output: bool) -> None:
        for s in range(sections):
            for k in r:
                u = "v" if s == 0 else f"y{k}"
                lines.append(f"{indent}w{k} = ({u} - aa{s}_{k} * q{s}_{k}) - a{s}_{k} * p{s}_{k}")
            for k in r:
                lines.append(f"{indent}y{k} = w{k} + (c{s}_{k} * p{s}_{k} + q{s}_{k})")
            for k in r:
                lines.append(f"{indent}q{s}_{k} = p{s}_{k}; p{s}_{k} = w{k}")
        lines.extend(f"{indent}e{k} += y{k} * y{k}" for k in r)
        if with_output:
            lines.append(f"{indent}out[t] = gain0 * y0")

    lines.append("            for t in range(bounds[seg], bounds[seg + 1]):")
    lines.append("                v = x[t]")
    body("                ", True)
    lines += [f"            sums[seg, g, {k}] += e{k}" for k in r]
    for s in range(sections):
        lines += [f"        z[g, {s}, 0, {k}] = p{s}_{k}; z[g, {s}, 1, {k}] = q{s}_{k}" for k in r]
    return "\n".join(lines) + "\n"


def bank_module_source() -> str:
    """Full text of ``piezo/_kernels/bank.py`` (the generated kernels)."""
    head = (
        '"""Generated inner loops of :class:`piezo._kernels.filters.SOSBank` (plain Python).\n\n'
        "GENERATED by ``piezo._kernels.filters.bank_module_source()``; do not edit by hand\n"
        "(a test checks that this file equals the generator's output). Compiled by numba in\n"
        ":mod:`piezo._kernels.filters`; see :func:`piezo._kernels.filters.bank_kernel_source`.\n"
        '"""\n\n# fmt: off\n# ruff: noqa: E702\n'
    )
    return head + "".join(
        "\n\n" + bank_kernel_source(lanes, BANK_SECTIONS) for lanes in _BANK_LANES
    )


_BANK_KERNELS: dict[int, Kernel] = {}


def _check_bank(lanes: int, x, co, z, bounds, sums, out, gain0) -> None:
    groups = co.shape[0]
    if co.shape[1:] != (BANK_SECTIONS, 3, lanes) or z.shape != (groups, BANK_SECTIONS, 2, lanes):
        raise ValueError("co must be (groups, sections, 3, lanes), z (groups, sections, 2, lanes)")
    if bounds.shape[0] < 1 or sums.shape != (bounds.shape[0] - 1, groups, lanes):
        raise ValueError("sums must have shape (segments, groups, lanes)")
    if out.shape[0] < x.shape[0] or bounds[0] < 0 or bounds[-1] > x.shape[0]:
        raise ValueError("out shorter than x, or segment bounds outside x")
    if (bounds[1:] < bounds[:-1]).any():
        raise ValueError("segment bounds must not decrease")


def _bank_kernel(lanes: int) -> Kernel:
    """The bank kernel for ``lanes`` lanes (compiled, or loaded from the cache, on first
    use).

    numba leaves LLVM's SLP vectoriser off by default; it is switched on for these
    compilations only. ``fastmath`` allows contraction into fused multiply-adds and
    reassociation (which lets the vectoriser form the SIMD code); no assumptions about
    NaN or infinity. The tests check the kernels against :func:`scipy.signal.sosfilt`.
    """
    kernel = _BANK_KERNELS.get(lanes)
    if kernel is not None:
        return kernel
    # The generated module sits beside this one (imported relative to this module's
    # package, so a copy of the two files outside the package works as well).
    module = importlib.import_module(f"{__package__}.bank" if __package__ else "bank")
    kernel = Kernel(
        getattr(module, f"bank{lanes}"),
        (_f8(1), _f8(4), _f8(4, True), _i8(1), _f8(3, True), _f8(1, True), Scalar("f8")),
        check=functools.partial(_check_bank, lanes),
        sources=(__file__,),
        slp=True,
        nogil=True,
        fastmath={"contract", "reassoc"},
        error_model="numpy",
    )
    _BANK_KERNELS[lanes] = kernel
    return kernel


#: Chunks shorter than this are filtered on the calling thread only.
_THREAD_MIN_FRAMES = 8192
_POOL: ThreadPoolExecutor | None = None


def _pool() -> ThreadPoolExecutor:
    """Threads for the channels of a bank (the compiled loop releases the GIL)."""
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(max_workers=min(2, os.cpu_count() or 1))
    return _POOL


class SOSBank:
    """Filters sharing one input (``(frames, channels)`` blocks), state carried.

    Every filter is a cascade of :data:`BANK_SECTIONS` second-order sections with
    symmetric numerators (``b2 == b0``: zeros on the unit circle or at z = ±1, as
    Butterworth band-passes and elliptic low-passes have). The result equals
    :func:`scipy.signal.sosfilt` of each filter to rounding (tested).

    Parameters
    ----------
    sos_list
        One ``(BANK_SECTIONS, 6)`` array per filter (scipy's SOS layout, ``a0 = 1``).
    channels
        Channels per block.
    output_index
        Filter whose full output :meth:`process` returns, or ``None``.

    Raises
    ------
    ValueError
        When a filter does not have the form above.
    """

    def __init__(
        self, sos_list: list[np.ndarray], channels: int, *, output_index: int | None = None
    ) -> None:
        self.filters = len(sos_list)
        self.channels = int(channels)
        self.output_index = output_index
        order = list(range(self.filters))
        if output_index is not None:  # the output filter goes to lane 0 of group 0
            order.remove(output_index)
            order.insert(0, output_index)
        self._order = np.array(order)
        lanes = _BANK_LANES[0]
        groups = -(-self.filters // lanes)
        co = np.zeros((groups * lanes, BANK_SECTIONS, 3))
        gain = np.zeros(groups * lanes)
        for slot, i in enumerate(order):
            sos = np.asarray(sos_list[i], dtype=np.float64)
            if sos.shape != (BANK_SECTIONS, 6):
                raise ValueError(f"filter {i}: sos must have shape ({BANK_SECTIONS}, 6)")
            b0 = sos[:, 0]
            if np.any(sos[:, 3] != 1.0) or np.any(b0 == 0.0) or np.any(sos[:, 2] != b0):
                raise ValueError(f"filter {i}: sections need a0 = 1 and b2 = b0 != 0")
            co[slot, :, 0] = sos[:, 1] / b0
            co[slot, :, 1] = sos[:, 4]
            co[slot, :, 2] = sos[:, 5]
            gain[slot] = np.prod(b0)
        self._lanes = lanes
        self._gain = gain  # lanes run unscaled; outputs are multiplied by this
        self._co = np.ascontiguousarray(
            co.reshape(groups, lanes, BANK_SECTIONS, 3).transpose(0, 2, 3, 1)
        )
        self._z = np.zeros((self.channels, groups, BANK_SECTIONS, 2, lanes))
        self._gain0 = float(gain[0])
        self._slot_of_filter = np.argsort(self._order)  # filter i sits in this slot
        self._gain_sq = gain[self._slot_of_filter] ** 2

    def process(
        self, x: np.ndarray, starts: np.ndarray, *, out: np.ndarray | None = None
    ) -> tuple[np.ndarray, np.ndarray | None]:
        """Filter ``x`` (``(n, channels)``, n >= 1).

        ``starts`` are the first sample of each segment (``starts[0] == 0``,
        non-decreasing). Returns ``sums`` of shape ``(segments, filters, channels)``
        (sum of squared outputs per segment) and the chosen filter's output
        ``(n, channels)``, or None. ``out``: a C-contiguous float64 buffer
        ``(channels, >= n)`` to hold that output (reused by the caller between calls to
        save allocating); the output returned is then a view of it.
        """
        n = x.shape[0]
        nseg = len(starts)
        bounds = np.empty(nseg + 1, dtype=np.int64)
        bounds[:nseg] = starts
        bounds[nseg] = n
        sums = np.zeros((self.channels, nseg, self._co.shape[0], self._lanes))
        if out is None or out.shape[0] != self.channels or out.shape[1] < n:
            out = np.empty((self.channels, n))
        elif out.shape[1] != n:
            out = out[:, :n]
        kernel = _bank_kernel(self._lanes)  # not kept: the bank stays picklable
        if self.channels == 1:
            xc = x[:, 0] if x.flags.c_contiguous else np.ascontiguousarray(x[:, 0])
            kernel(xc, self._co, self._z[0], bounds, sums[0], out[0], self._gain0)
        else:

            def run(c: int) -> None:
                xc = np.ascontiguousarray(x[:, c])
                kernel(xc, self._co, self._z[c], bounds, sums[c], out[c], self._gain0)

            if n >= _THREAD_MIN_FRAMES:
                list(_pool().map(run, range(self.channels)))
            else:
                for c in range(self.channels):
                    run(c)
        # (channels, segments, slots) -> (segments, filters, channels), scaled.
        flat = sums.reshape(self.channels, nseg, -1)[:, :, self._slot_of_filter]
        result = (flat * self._gain_sq).transpose(1, 2, 0)
        return result, (out.T if self.output_index is not None else None)
