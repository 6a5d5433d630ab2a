"""Many second-order-section filters driven by one input, with carried state.

:class:`ParallelSOS` runs a set of IIR filters (second-order sections, direct form II
transposed, exactly the recursion of :func:`scipy.signal.sosfilt`) on the same input and
returns, per segment of the input, the sum of each filter's squared output, plus the
full output of one chosen filter (the anti-alias low-pass of a multirate bank).

Two interchangeable engines: one :func:`scipy.signal.sosfilt` call per filter (always
available), or, when the optional ``numba`` package is installed, a compiled loop that
advances four filters at once (about four times faster per filter section). Both give
the same numbers to rounding (tested); ``PIEZO_NO_NUMBA=1`` forces the scipy engine.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from scipy import signal

from piezo.errors import InputError

try:  # optional accelerator
    if os.environ.get("PIEZO_NO_NUMBA"):
        raise ImportError("disabled by PIEZO_NO_NUMBA")
    import numba
except ImportError:  # pragma: no cover - depends on the environment
    numba = None

__all__ = ["HAVE_NUMBA", "ParallelSOS", "numba_engine_available"]

HAVE_NUMBA = numba is not None
#: Samples per pass of the compiled loop (keeps its working buffer in cache).
_CHUNK = 256
_LANES = 8
#: Chunks shorter than this are filtered on the calling thread only.
_THREAD_MIN_FRAMES = 8192
_IDENTITY = np.array([1.0, 0.0, 0.0, 1.0, 0.0, 0.0])


def _kernel_source(lanes: int) -> str:
    """Source of the compiled loop for ``lanes`` filters advanced together.

    The loop body is written out once per lane (scalar locals for every coefficient and
    state) so that LLVM's SLP vectoriser can pack the lanes into SIMD registers; a plain
    loop over lanes keeps the states in memory and runs three times slower. Arguments:
    ``x`` (n,) one channel; ``co`` (5, sections, groups, lanes) b0 b1 b2 a1 a2; ``z``
    (2, sections, groups, lanes) states, updated; ``starts`` segment starts; ``sums``
    (segments, groups, lanes) += squared outputs; ``out_g, out_k`` the lane whose output
    goes to ``out`` (``out_g = -1``: none); ``buf`` (chunk, groups, lanes) scratch;
    groups ``g_lo <= g < g_hi`` are run.
    """
    r = range(lanes)
    lines = [
        "def kernel(x, co, z, starts, sums, out_g, out_k, out, buf, g_lo, g_hi):",
        "    n = x.shape[0]",
        "    n_sections = co.shape[1]",
        "    chunk = buf.shape[0]",
        "    nseg = starts.shape[0]",
        "    seg = 0",
        "    for first in range(0, n, chunk):",
        "        m = min(chunk, n - first)",
        "        for t in range(m):",
        "            v = x[first + t]",
        "            for g in range(g_lo, g_hi):",
        f"                for k in range({lanes}):",
        "                    buf[t, g, k] = v",
        "        for s in range(n_sections):",
        "            for g in range(g_lo, g_hi):",
    ]
    for k in r:
        lines.append(
            f"                b0{k} = co[0, s, g, {k}]; b1{k} = co[1, s, g, {k}]; "
            f"b2{k} = co[2, s, g, {k}]; a1{k} = co[3, s, g, {k}]; a2{k} = co[4, s, g, {k}]"
        )
        lines.append(f"                p{k} = z[0, s, g, {k}]; q{k} = z[1, s, g, {k}]")
    lines.append("                for t in range(m):")
    lines += [f"                    u{k} = buf[t, g, {k}]" for k in r]
    # Direct form II transposed, as scipy.signal.sosfilt.
    lines += [f"                    y{k} = b0{k} * u{k} + p{k}" for k in r]
    lines += [f"                    p{k} = b1{k} * u{k} - a1{k} * y{k} + q{k}" for k in r]
    lines += [f"                    q{k} = b2{k} * u{k} - a2{k} * y{k}" for k in r]
    lines += [f"                    buf[t, g, {k}] = y{k}" for k in r]
    lines += [f"                z[0, s, g, {k}] = p{k}; z[1, s, g, {k}] = q{k}" for k in r]
    lines += [
        "        if out_g >= 0:",
        "            for t in range(m):",
        "                out[first + t] = buf[t, out_g, out_k]",
        "        for t in range(m):",
        "            i = first + t",
        "            while seg + 1 < nseg and i >= starts[seg + 1]:",
        "                seg += 1",
        "            for g in range(g_lo, g_hi):",
        f"                for k in range({lanes}):",
        "                    sums[seg, g, k] += buf[t, g, k] * buf[t, g, k]",
    ]
    return "\n".join(lines) + "\n"


def _compile_kernel():
    """Compile :func:`piezo._iir_kernel.kernel` with numba, SLP vectorisation on.

    numba leaves LLVM's SLP vectoriser off by default (it once miscompiled code); it is
    switched on for this one compilation and the result is checked against
    :func:`scipy.signal.sosfilt` before use (:func:`_self_check`). The machine code is
    cached beside the module when that folder is writable, so later runs load it.
    """
    from piezo._iir_kernel import kernel as kernel_py

    config = numba.core.config
    previous = config.SLP_VECTORIZE
    config.SLP_VECTORIZE = 1
    try:
        for cache in (True, False):
            try:
                kernel = numba.njit(
                    cache=cache,
                    nogil=True,
                    fastmath={"contract", "reassoc", "nsz"},
                    error_model="numpy",
                )(kernel_py)
                kernel.compile(_SIGNATURE)
                return kernel
            except Exception:  # e.g. no writable cache location
                if not cache:
                    raise
    finally:
        config.SLP_VECTORIZE = previous
    return None


_SIGNATURE = (
    "(f8[::1], f8[:, :, :, ::1], f8[:, :, :, ::1], i8[::1], f8[:, :, ::1], i8, i8, "
    "f8[::1], f8[:, :, ::1], i8, i8)"
)
_KERNEL = None
_KERNEL_CHECKED = False


def numba_engine_available() -> bool:
    """True when numba is installed and its compiled loop passed the self-check."""
    return HAVE_NUMBA and _get_kernel() is not None


def _get_kernel():
    """The compiled loop, checked once against scipy.signal.sosfilt (None if unusable)."""
    global _KERNEL, _KERNEL_CHECKED
    if not _KERNEL_CHECKED:
        _KERNEL_CHECKED = True
        try:
            _KERNEL = _compile_kernel()
            if not _self_check(_KERNEL):
                _KERNEL = None
        except Exception:  # a compiler problem: fall back to scipy
            _KERNEL = None
    return _KERNEL


def _self_check(kernel) -> bool:
    """Run ten random stable filters through ``kernel`` and scipy; True if they agree."""
    rng = np.random.default_rng(0)
    sos_list = [
        signal.butter(4, sorted(rng.uniform(0.05, 0.45, 2)), btype="bandpass", output="sos")
        for _ in range(10)
    ]
    x = rng.standard_normal((3000, 1))
    starts = np.array([0, 1000, 2500], dtype=np.int64)
    fast = ParallelSOS(sos_list, 1, output_index=3, engine="numba", _kernel=kernel)
    slow = ParallelSOS(sos_list, 1, output_index=3, engine="scipy")
    (a, ya), (b, yb) = fast.process(x, starts), slow.process(x, starts)
    return bool(np.allclose(a, b, rtol=1e-10, atol=0) and np.allclose(ya, yb, rtol=1e-9,
                                                                      atol=1e-12))  # fmt: skip


class ParallelSOS:
    """Filters sharing one input (``(frames, channels)`` blocks), state carried.

    Parameters
    ----------
    sos_list
        One ``(sections, 6)`` array per filter (scipy's SOS layout).
    channels
        Channels per block.
    output_index
        Filter whose full output :meth:`process` returns, or ``None``.
    engine
        ``"numba"``, ``"scipy"`` or ``None`` (numba when installed).
    """

    def __init__(
        self,
        sos_list: list[np.ndarray],
        channels: int,
        *,
        output_index: int | None = None,
        engine: str | None = None,
        _kernel=None,
    ) -> None:
        if engine is None:
            engine = "numba" if numba_engine_available() else "scipy"
        if engine == "numba" and _kernel is None:
            _kernel = _get_kernel() if HAVE_NUMBA else None
        if engine == "numba" and _kernel is None:
            raise InputError(
                "engine 'numba' needs the optional numba package (pip install numba) and a "
                "compiled loop that passed its self-check; PIEZO_NO_NUMBA must not be set. "
                "Use engine='scipy'"
            )
        if engine not in ("numba", "scipy"):
            raise InputError(f"engine must be 'numba', 'scipy' or None; got {engine!r}")
        self.engine = engine
        self._kern = _kernel
        self.filters = len(sos_list)
        self.channels = channels
        self.output_index = output_index
        if engine == "scipy":
            self._sos = [np.asarray(s, dtype=np.float64) for s in sos_list]
            self._zi = [np.zeros((s.shape[0], 2, channels)) for s in self._sos]
            return
        n_sections = max(s.shape[0] for s in sos_list)
        groups = -(-self.filters // _LANES)
        coef = np.zeros((groups * _LANES, n_sections, 6))
        coef[:, :, :] = _IDENTITY  # padding sections pass the signal unchanged
        coef[self.filters :] = 0.0  # padding filters output zero
        for i, s in enumerate(sos_list):
            coef[i, : s.shape[0]] = s
        # (5, sections, groups, lanes): b0, b1, b2, a1, a2 (a0 is 1).
        picked = coef[:, :, [0, 1, 2, 4, 5]].transpose(2, 1, 0)
        self._co = np.ascontiguousarray(picked.reshape(5, n_sections, groups, _LANES))
        self._z = np.zeros((channels, 2, n_sections, groups, _LANES))
        self._buf = np.empty((_CHUNK, groups, _LANES))

    def process(self, x: np.ndarray, starts: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
        """Filter ``x`` (``(n, channels)``, n >= 1).

        ``starts`` are the first sample of each segment (``starts[0] == 0``, increasing).
        Returns ``sums`` of shape ``(segments, filters, channels)`` (sum of squared
        outputs per segment) and the chosen filter's output ``(n, channels)`` or None.
        """
        n = x.shape[0]
        starts = np.asarray(starts, dtype=np.int64)
        out = None if self.output_index is None else np.empty((n, self.channels))
        if self.engine == "scipy":
            sums = np.empty((starts.size, self.filters, self.channels))
            empty = np.diff(np.append(starts, n)) == 0  # reduceat would repeat a sample
            for j, sos in enumerate(self._sos):
                y, self._zi[j] = signal.sosfilt(sos, x, axis=0, zi=self._zi[j])
                sums[:, j, :] = np.add.reduceat(y * y, np.minimum(starts, n - 1), axis=0)
                sums[empty, j, :] = 0.0
                if j == self.output_index:
                    out = y
            return sums, out
        groups = self._co.shape[2]
        sums = np.zeros((self.channels, starts.size, groups, _LANES))
        out_g, out_k = (-1, 0) if self.output_index is None else divmod(self.output_index, _LANES)
        columns = np.empty((self.channels, n if out is not None else 0))
        xs = np.ascontiguousarray(x.T)
        # Independent pieces of work: each channel, and each half of the filter groups.
        tasks = [(c, 0, groups) for c in range(self.channels)]
        if groups >= 2 and self.channels == 1:
            tasks = [(0, 0, groups // 2), (0, groups // 2, groups)]

        def run(task: tuple[int, int, int]) -> None:
            c, g_lo, g_hi = task
            buf = np.empty((_CHUNK, groups, _LANES))
            og = out_g if g_lo <= out_g < g_hi else -1
            self._kern(xs[c], self._co, self._z[c], starts, sums[c], og, out_k, columns[c],
                       buf, g_lo, g_hi)  # fmt: skip

        if len(tasks) > 1 and n >= _THREAD_MIN_FRAMES:
            list(_pool().map(run, tasks))
        else:
            for task in tasks:
                run(task)
        if out is not None:
            out[:] = columns.T
        flat = sums.reshape(self.channels, starts.size, groups * _LANES)[:, :, : self.filters]
        return np.ascontiguousarray(flat.transpose(1, 2, 0)), out


_POOL: ThreadPoolExecutor | None = None


def _pool() -> ThreadPoolExecutor:
    """Threads for independent filter groups (the compiled loop releases the GIL)."""
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(max_workers=min(2, os.cpu_count() or 1))
    return _POOL
