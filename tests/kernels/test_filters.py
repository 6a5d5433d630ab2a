"""Tests of the compiled kernels in piezo._kernels.filters against scipy.signal (the reference).

``sosfilt_inplace`` must equal :func:`scipy.signal.sosfilt` (``axis=0``, carried ``zi``)
to rounding for any design, block split and channel count; ``level_meter_block`` must
equal the same quantities computed with scipy's filters sample by sample.
"""

from __future__ import annotations

import itertools
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal
from scipy import signal

from piezo._kernels import filters as kern
from piezo.levels.weighting import time_weighting_coefficient, weighting_chain_sos
from tests.paths import REPO

# Both compute the same transposed-direct-form-II recursion; they differ only by fused
# multiply-adds and the order of one addition, i.e. by rounding (~1e-16 per operation)
# amplified by the filter's noise gain. Worst seen over 300 random designs of the kind
# drawn below while writing the kernel: 2.4e-13 of the output's peak (9th-order elliptic
# band-stop, poles at radius 0.99998). A real fault (a wrong coefficient, a lost or
# misplaced state) gives errors of order 1.
OUTPUT_RTOL = 1e-12


def _design(kind: str, order: int, btype: str, low: float, width: float) -> np.ndarray:
    """A scipy.signal IIR design as second-order sections (frequencies re Nyquist)."""
    wn = [low, min(0.95, low * width)] if btype in ("bandpass", "bandstop") else low
    if kind == "butter":
        return signal.butter(order, wn, btype, output="sos")
    if kind == "cheby1":
        return signal.cheby1(order, 1.0, wn, btype, output="sos")
    if kind == "cheby2":
        return signal.cheby2(order, 40.0, wn, btype, output="sos")
    return signal.ellip(order, 1.0, 40.0, wn, btype, output="sos")


designs = st.builds(
    _design,
    st.sampled_from(["butter", "cheby1", "cheby2", "ellip"]),
    st.integers(min_value=1, max_value=10),  # 1 to 10 sections: groups of 4 and remainders
    st.sampled_from(["lowpass", "highpass", "bandpass", "bandstop"]),
    st.floats(min_value=0.02, max_value=0.45),
    st.floats(min_value=1.2, max_value=4.0),
)


def _scale(ref: np.ndarray) -> float:
    return float(np.max(np.abs(ref)))


@settings(max_examples=40, deadline=None)
@given(
    sos=designs,
    channels=st.integers(min_value=1, max_value=3),
    cuts=st.lists(st.integers(min_value=0, max_value=1500), max_size=8),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_sosfilt_matches_scipy_for_random_designs_and_splits(sos, channels, cuts, seed):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((1500, channels))
    zi0 = rng.standard_normal((len(sos), 2, channels))  # an arbitrary carried-in state
    ref = signal.sosfilt(sos, x, axis=0, zi=zi0)[0]
    # Rounding differences (the kernel contracts multiply-adds, scipy rounds twice) are
    # relative to the largest signal inside the cascade, which for a high-order band-stop
    # started from an arbitrary state can be 1e4 times the input: scale by that.
    inner = x
    internal = float(np.max(np.abs(x)))
    for k in range(len(sos)):
        inner = signal.sosfilt(sos[k : k + 1], inner, axis=0, zi=zi0[k : k + 1])[0]
        internal = max(internal, float(np.max(np.abs(inner))))

    whole = x.copy()
    zi_whole = zi0.copy()
    kern.sosfilt_inplace(sos, whole, zi_whole)
    assert_allclose(whole, ref, rtol=0, atol=OUTPUT_RTOL * internal)

    # Block by block (random uneven splits, empty blocks, single samples) with the
    # state carried: the kernel does the same operations per sample in the same order,
    # so the result is identical bit for bit to the whole-block run.
    points = sorted({*cuts, 700, 701, 702})
    pieces = []
    zi = zi0.copy()
    prev = 0
    for p in [*points, len(x)]:
        block = np.ascontiguousarray(x[prev:p])
        kern.sosfilt_inplace(sos, block, zi)
        pieces.append(block)
        prev = max(prev, p)
    assert_array_equal(np.vstack(pieces), whole)
    assert_array_equal(zi, zi_whole)


def test_carried_state_continues_like_scipy(rng):
    # The state left by one block, used for the next, must continue the filter as scipy
    # does: filter two halves (kernel state carried) against scipy over the whole.
    sos = signal.ellip(8, 0.5, 60.0, [0.05, 0.2], "bandpass", output="sos")
    x = rng.standard_normal((4000, 2))
    ref = signal.sosfilt(sos, x, axis=0)
    zi = np.zeros((len(sos), 2, 2))
    first, second = x[:1234].copy(), x[1234:].copy()
    kern.sosfilt_inplace(sos, first, zi)
    kern.sosfilt_inplace(sos, second, zi)
    assert_allclose(np.vstack([first, second]), ref, rtol=0, atol=OUTPUT_RTOL * _scale(ref))
    # And the state itself is scipy's zi: scipy continuing from the kernel's state
    # matches the kernel continuing from it.
    more = rng.standard_normal((500, 2))
    ref_more, _ = signal.sosfilt(sos, more, axis=0, zi=zi.copy())
    kern.sosfilt_inplace(sos, more, zi)
    assert_allclose(more, ref_more, rtol=0, atol=OUTPUT_RTOL * _scale(ref_more))


def test_channels_are_independent(rng):
    sos = signal.butter(5, 0.1, output="sos")
    x = rng.standard_normal((1000, 3))
    zi = rng.standard_normal((len(sos), 2, 3))
    together = x.copy()
    z_together = zi.copy()
    kern.sosfilt_inplace(sos, together, z_together)
    for c in range(3):
        alone = np.ascontiguousarray(x[:, c : c + 1])
        z_alone = np.ascontiguousarray(zi[:, :, c : c + 1])
        kern.sosfilt_inplace(sos, alone, z_alone)
        assert_array_equal(alone[:, 0], together[:, c])
        assert_array_equal(z_alone[:, :, 0], z_together[:, :, c])


def test_empty_block_and_no_sections_change_nothing(rng):
    sos = signal.butter(4, 0.2, output="sos")
    zi = rng.standard_normal((len(sos), 2, 2))
    before = zi.copy()
    kern.sosfilt_inplace(sos, np.zeros((0, 2)), zi)
    assert_array_equal(zi, before)
    x = rng.standard_normal((50, 2))
    y = x.copy()
    kern.sosfilt_inplace(np.zeros((0, 6)), y, np.zeros((0, 2, 2)))
    assert_array_equal(y, x)


def test_one_sample_blocks_equal_scipy(rng):
    sos = signal.cheby1(3, 1.0, 0.3, output="sos")
    x = rng.standard_normal((64, 1))
    ref = signal.sosfilt(sos, x, axis=0)
    zi = np.zeros((len(sos), 2, 1))
    out = []
    for n in range(len(x)):
        block = x[n : n + 1].copy()
        kern.sosfilt_inplace(sos, block, zi)
        out.append(block)
    assert_allclose(np.vstack(out), ref, rtol=0, atol=OUTPUT_RTOL * _scale(ref))


def test_steady_state_start_gives_no_transient():
    # zi = sosfilt_zi(sos) * x0 is the steady state for a constant input x0 (scipy's
    # documented meaning), so a constant input passes at the filter's DC gain at once.
    sos = signal.butter(4, 0.05, output="sos")  # low-pass, DC gain 1
    x = np.full((200, 2), [3.0, -0.5])
    zi = signal.sosfilt_zi(sos)[:, :, None] * x[0][None, None, :]
    kern.sosfilt_inplace(sos, x, zi)
    # Residue of the steady-state solve: ~eps / (1 - pole radius)^2 = 1e-13 here.
    assert_allclose(x, np.full((200, 2), [3.0, -0.5]), rtol=1e-11)


def test_bad_shapes_are_refused():
    sos = signal.butter(4, 0.1, output="sos")  # two sections
    with pytest.raises(ValueError, match="zi must have shape"):
        kern.sosfilt_inplace(sos, np.zeros((10, 2)), np.zeros((1, 2, 2)))
    with pytest.raises(ValueError, match="zi must have shape"):
        kern.sosfilt_inplace(sos, np.zeros((10, 2)), np.zeros((2, 2, 1)))
    bad = sos.copy()
    bad[1, 3] = 2.0
    with pytest.raises(ValueError, match="a0"):
        kern.sosfilt_inplace(bad, np.zeros((10, 1)), np.zeros((2, 2, 1)))


# --- level meter kernel --------------------------------------------------------------
def _run_level_kernel(x, fs, blocks, *, starts, periods, reference=20e-6):
    c_sos, a_sos = weighting_chain_sos(fs)
    channels = x.shape[1]
    zi_c = np.zeros((2, 2, channels))
    zi_a = np.zeros((2, 2, channels))
    state = kern.new_level_state(channels)
    hist = np.zeros((channels, 60000), dtype=np.int64)
    other = np.zeros((2, channels), dtype=np.int64)
    hist_s = np.zeros((channels, 60000), dtype=np.int64)
    other_s = np.zeros((2, channels), dtype=np.int64)
    traces, intervals = [], []
    frame0 = 0
    for a, b in blocks:
        block = np.ascontiguousarray(x[a:b])
        n = b - a
        trace_out = np.zeros((2, channels, n // periods[1] + 1))
        interval_out = np.zeros((n // max(periods[2], 1) + 1, kern.INTERVAL_ROWS, channels))
        m_trace, m_int = kern.level_meter_block(
            block, c_sos, a_sos, zi_c, zi_a, state, hist, other, hist_s, other_s, frame0,
            np.array(starts), np.array(periods),
            time_weighting_coefficient(0.125, fs), time_weighting_coefficient(1.0, fs),
            reference**2, -300.0, 0.01, trace_out, interval_out, np.empty(channels),
        )  # fmt: skip
        traces.append(trace_out[:, :, :m_trace])
        intervals.append(interval_out[:m_int])
        frame0 += n
    return (
        state, (hist, hist_s), (other, other_s), np.concatenate(traces, axis=2),
        np.concatenate(intervals),
    )  # fmt: skip


def test_level_kernel_matches_scipy_sample_by_sample(rng):
    fs = 16000.0
    n = 24000
    x = rng.standard_normal((n, 2)) * np.repeat(rng.uniform(0.1, 3.0, 30), n // 30)[:, None]
    starts, periods = [1600, 4000, 4000, 9000], [160, 1600, 8000]
    state, (hist, hist_s), (other, other_s), traces, intervals = _run_level_kernel(
        x, fs, [(0, 5000), (5000, 5001), (5001, n)], starts=starts, periods=periods
    )
    # Reference: scipy's filters and a per-sample lfilter averager, from rest.
    c_sos, a_sos = weighting_chain_sos(fs)
    yc = signal.sosfilt(c_sos, x, axis=0)
    ya = signal.sosfilt(a_sos, yc, axis=0)
    qa = ya * ya

    def average(tau, q=qa):
        a = time_weighting_coefficient(tau, fs)
        return signal.lfilter([1 - a], [1, -a], q, axis=0)

    f, s = average(0.125), average(1.0)
    cf, cs = average(0.125, yc * yc), average(1.0, yc * yc)
    zf, zs = average(0.125, x * x), average(1.0, x * x)
    # Sums and averages: rounding only (filters as above; sums of 24000 positive terms
    # in a different order: < 24000 eps relative).
    for row, expected in (
        (kern.ST_SUM_Z, np.sum(x * x, axis=0)),
        (kern.ST_SUM_C, np.sum(yc * yc, axis=0)),
        (kern.ST_SUM_A, np.sum(qa, axis=0)),
        (kern.ST_PEAK_Z_HEAD, np.max(np.abs(x[:1600]), axis=0)),
        (kern.ST_PEAK_Z_AFTER, np.max(np.abs(x[1600:]), axis=0)),
        (kern.ST_PEAK_C, np.max(np.abs(yc[1600:]), axis=0)),
        (kern.ST_F, f[-1]),
        (kern.ST_S, s[-1]),
        (kern.ST_F_MAX, f[1600:].max(axis=0)),
        (kern.ST_F_MIN, f[4000:].min(axis=0)),
        (kern.ST_S_MAX, s[1600:].max(axis=0)),
        (kern.ST_S_MIN, s[9000:].min(axis=0)),
        # The C- and Z-weighted squares through the same F and S averagers.
        (kern.ST_CF, cf[-1]),
        (kern.ST_CS, cs[-1]),
        (kern.ST_ZF, zf[-1]),
        (kern.ST_ZS, zs[-1]),
        (kern.ST_CF_MAX, cf[1600:].max(axis=0)),
        (kern.ST_CF_MIN, cf[4000:].min(axis=0)),
        (kern.ST_CS_MAX, cs[1600:].max(axis=0)),
        (kern.ST_CS_MIN, cs[9000:].min(axis=0)),
        (kern.ST_ZF_MAX, zf[1600:].max(axis=0)),
        (kern.ST_ZF_MIN, zf[4000:].min(axis=0)),
        (kern.ST_ZS_MAX, zs[1600:].max(axis=0)),
        (kern.ST_ZS_MIN, zs[9000:].min(axis=0)),
    ):
        assert_allclose(state[row], expected, rtol=1e-11, err_msg=str(row))
    # Traces: F and S at every 1600th frame; intervals: sums over 8000 frames.
    idx = np.arange(1599, n, 1600)
    assert_allclose(traces[0].T, f[idx], rtol=1e-11)
    assert_allclose(traces[1].T, s[idx], rtol=1e-11)
    for k in range(3):
        sl = slice(8000 * k, 8000 * (k + 1))
        assert_allclose(intervals[k, 0], np.sum(x[sl] ** 2, axis=0), rtol=1e-11)
        assert_allclose(intervals[k, 2], np.sum(qa[sl], axis=0), rtol=1e-11)
        # Per-interval A-F maximum and C peak, counted from the settling frame (1600).
        sl = slice(max(8000 * k, 1600), 8000 * (k + 1))
        assert_allclose(intervals[k, 3], f[sl].max(axis=0), rtol=1e-11)
        assert_allclose(intervals[k, 4], np.abs(yc[sl]).max(axis=0), rtol=1e-11)
    # Percentile samples: F level every 160 frames from frame 4000, in 0.01 dB bins.
    pick = np.arange(159, n, 160)
    pick = pick[pick >= 4000]
    levels = 10 * np.log10(f[pick] / (20e-6) ** 2)
    for c in range(2):
        expected = np.bincount(
            np.floor((levels[:, c] + 300.0) / 0.01).astype(int), minlength=60000
        )
        assert_array_equal(hist[c], expected)
    assert_array_equal(other, 0)
    # S level samples at the same instants from the S-minimum start (frame 9000).
    pick = np.arange(159, n, 160)
    pick = pick[pick >= 9000]
    levels = 10 * np.log10(s[pick] / (20e-6) ** 2)
    for c in range(2):
        expected = np.bincount(
            np.floor((levels[:, c] + 300.0) / 0.01).astype(int), minlength=60000
        )
        assert_array_equal(hist_s[c], expected)
    assert_array_equal(other_s, 0)


def test_level_kernel_rejects_non_finite_blocks_without_touching_state(rng):
    fs = 48000.0
    c_sos, a_sos = weighting_chain_sos(fs)
    zi_c = rng.standard_normal((2, 2, 1))
    zi_a = rng.standard_normal((2, 2, 1))
    state = kern.new_level_state(1)
    hist = np.zeros((1, 10), dtype=np.int64)
    other = np.zeros((2, 1), dtype=np.int64)
    hist_s = np.zeros((1, 10), dtype=np.int64)
    other_s = np.zeros((2, 1), dtype=np.int64)
    before = [a.copy() for a in (zi_c, zi_a, state, hist, other, hist_s, other_s)]
    x = rng.standard_normal((100, 1))
    x[57, 0] = np.inf
    got = kern.level_meter_block(
        x, c_sos, a_sos, zi_c, zi_a, state, hist, other, hist_s, other_s, 0,
        np.zeros(4, dtype=np.int64), np.array([1, 1, 1]), 0.5, 0.5, 1.0, 0.0, 1.0,
        np.zeros((2, 1, 101)), np.zeros((101, kern.INTERVAL_ROWS, 1)), np.empty(1),
    )  # fmt: skip
    assert got == (-1, -1)
    for a, b in zip((zi_c, zi_a, state, hist, other, hist_s, other_s), before, strict=True):
        assert_array_equal(a, b)


# --- compilation cache -----------------------------------------------------------------
_CHILD = textwrap.dedent(
    """
    import sys
    import numpy as np
    from _kernels import filters as k
    x = np.ones((8, 1))
    k.sosfilt_inplace(np.array([[0.5, 0.0, 0.0, 1.0, -0.5, 0.0]]), x, np.zeros((1, 2, 1)))
    assert np.allclose(x[:, 0], 1 - 0.5 ** np.arange(1, 9)), x
    bank = k.SOSBank([np.array([[0.5, 0.0, 0.5, 1.0, 0.0, 0.0]] * 4)], 1, output_index=0)
    sums, y = bank.process(np.ones((3, 1)), np.array([0]))
    assert np.allclose(y[:, 0], [0.0625, 0.0625, 0.3125]), y  # step into (1 + z^-2)^4 / 16
    print(k.sosfilt_inplace.origin, k._bank_kernel(4).origin, "numba" in sys.modules)
    """
)


def _run_child(tmp_path, env, child=_CHILD):
    run = subprocess.run(
        [sys.executable, "-W", "error", "-c", child],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
        timeout=180,
    )
    assert run.returncode == 0, run.stderr
    return run.stdout.split()


def test_kernels_compile_when_no_cache_folder_is_writable(tmp_path):
    # With no writable cache folder the kernels must be compiled in the process, and
    # nothing written beside them. The package is copied to a folder whose __pycache__
    # is a plain file, and every cache folder points below a file.
    src = Path(kern.__file__).parent
    shutil.copytree(src, tmp_path / "_kernels", ignore=shutil.ignore_patterns("__pycache__"))
    (tmp_path / "_kernels" / "__pycache__").write_text("not a folder")
    blocked = tmp_path / "_kernels" / "__pycache__" / "cache"
    env = {
        **os.environ,
        "NUMBA_CACHE_DIR": str(blocked),
        "PIEZO_CACHE_DIR": str(blocked),
        "XDG_CACHE_HOME": str(blocked),
        "HOME": str(blocked),
        "PYTHONPATH": os.pathsep.join([str(tmp_path), str(REPO)]),
        "PYTHONDONTWRITEBYTECODE": "1",
    }
    for _ in range(2):  # nothing kept: the second process compiles again
        assert _run_child(tmp_path, env) == ["compiled", "compiled", "True"]
    assert (tmp_path / "_kernels" / "__pycache__").is_file()


def test_kernel_cache_is_written_outside_the_package_and_loaded_without_numba(tmp_path):
    # numba's default puts its cache in __pycache__ beside the source, i.e. inside an
    # installed package, where it outlives an uninstall. The compiled kernels must go to
    # the folder piezo chooses (here PIEZO_CACHE_DIR) and nothing new may appear in the
    # package; a second process loads them without importing numba.
    package = Path(kern.__file__).parent
    before = set(package.rglob("*"))
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_CACHE_DIR"}
    env["PIEZO_CACHE_DIR"] = str(tmp_path / "cache")
    env["PYTHONPATH"] = str(REPO)
    child = _CHILD.replace(
        "from _kernels import filters as k", "from piezo._kernels import filters as k"
    )
    assert _run_child(tmp_path, env, child) == ["compiled", "compiled", "True"]
    written = sorted(p.name for p in (tmp_path / "cache" / "kernels").iterdir())
    assert [name.split("-")[0] for name in written] == ["bank4", "sosfilt_inplace"], written
    assert _run_child(tmp_path, env, child) == ["cache", "cache", "False"]
    assert set(package.rglob("*")) == before


# --- SOSBank: many filters on one input ----------------------------------------------

# The bank runs each section in direct form II with its numerator normalised to
# [1, c, 1] and the b0 gains applied afterwards, scipy in transposed direct form II:
# the same transfer function, different rounding. The filters below are 8th-order
# band-passes and the elliptic low-pass of piezo.spectral.bands; worst seen while writing the
# bank: 2e-13 of the output's peak and of each sum of squares. 1e-10 leaves room for
# other designs of that kind and still catches any real fault (errors of order 1).
BANK_RTOL = 1e-10


def _bank_filters(rng: np.random.Generator, count: int) -> list[np.ndarray]:
    """``count`` band-passes (Butterworth order 4, four sections) and, first, the
    anti-alias low-pass of piezo.spectral.bands (elliptic order 8, b2 made equal to b0)."""
    from piezo.spectral.bands import _anti_alias_sos

    out = [_anti_alias_sos()]
    for _ in range(count - 1):
        lo = rng.uniform(0.01, 0.4)
        out.append(signal.butter(4, [lo, lo * rng.uniform(1.1, 2.0)], "bandpass",
                                 output="sos"))  # fmt: skip
    return out


def _bank_reference(filters, x, bounds):
    """(sums (segments, filters, channels), output of filter 0) with scipy.signal.sosfilt."""
    sums = np.zeros((bounds.size - 1, len(filters), x.shape[1]))
    y0 = None
    for j, sos in enumerate(filters):
        y = signal.sosfilt(sos, x, axis=0)
        if j == 0:
            y0 = y
        for s in range(bounds.size - 1):
            sums[s, j] = np.sum(y[bounds[s] : bounds[s + 1]] ** 2, axis=0)
    return sums, y0


@settings(max_examples=25, deadline=None)
@given(
    count=st.integers(min_value=1, max_value=11),  # one group, several, a partial one
    channels=st.integers(min_value=1, max_value=3),
    cuts=st.lists(st.integers(min_value=0, max_value=3000), max_size=5),
    marks=st.lists(st.integers(min_value=0, max_value=3000), max_size=4),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_bank_matches_scipy_for_random_splits(count, channels, cuts, marks, seed):
    """Blocks cut anywhere (state carried, empty and one-sample blocks included) and
    segments anywhere inside them (empty ones included) give scipy's sums of squares
    per segment and the output of the chosen filter."""
    rng = np.random.default_rng(seed)
    filters = _bank_filters(rng, count)
    x = rng.standard_normal((3000, channels))
    bank = kern.SOSBank(filters, channels, output_index=0)
    edges = sorted({0, 3000, *cuts})
    marks = sorted(marks)
    got_sums = np.zeros((len(marks) + 1, count, channels))
    got_y = []
    for a, b in itertools.pairwise(edges):
        # segment of each global sample: number of marks <= it
        seg_of_a = int(np.searchsorted(marks, a, side="right"))
        inside = [m - a for m in marks if a < m < b]
        starts = np.array([0, *inside], dtype=np.int64)
        sums, y = bank.process(x[a:b], starts)
        got_sums[seg_of_a : seg_of_a + starts.size] += sums
        got_y.append(y)
    bounds = np.array([0, *marks, 3000])
    want_sums, want_y = _bank_reference(filters, x, bounds)
    assert_allclose(np.concatenate(got_y), want_y, rtol=0, atol=BANK_RTOL * _scale(want_y))
    assert_allclose(got_sums, want_sums, rtol=BANK_RTOL, atol=BANK_RTOL * want_sums.max())


def test_bank_output_filter_in_any_position_and_no_output(rng):
    filters = _bank_filters(rng, 6)[::-1]  # the low-pass last
    x = rng.standard_normal((2000, 1))
    want_sums, _ = _bank_reference(filters, x, np.array([0, 2000]))
    with_out = kern.SOSBank(filters, 1, output_index=5)
    sums, y = with_out.process(x, np.array([0]))
    assert_allclose(sums, want_sums, rtol=BANK_RTOL)
    assert_allclose(y, signal.sosfilt(filters[5], x, axis=0), rtol=0,
                    atol=BANK_RTOL * np.abs(y).max())  # fmt: skip
    sums, y = kern.SOSBank(filters, 1).process(x, np.array([0]))
    assert y is None
    assert_allclose(sums, want_sums, rtol=BANK_RTOL)


def test_bank_refuses_filters_it_cannot_run():
    lowpass = signal.butter(8, 0.2, output="sos")  # numerators [1, 2, 1]: fine
    kern.SOSBank([lowpass], 1)
    with pytest.raises(ValueError, match="shape"):
        kern.SOSBank([signal.butter(6, 0.2, output="sos")], 1)  # three sections
    bad = lowpass.copy()
    bad[1, 2] = 0.5  # b2 != b0: not symmetric
    with pytest.raises(ValueError, match="b2 = b0"):
        kern.SOSBank([bad], 1)
