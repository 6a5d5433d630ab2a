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

__all__ = ["HAVE_NUMBA", "ParallelSOS"]

HAVE_NUMBA = numba is not None
#: Samples per pass of the compiled loop (keeps its working buffer in cache).
_CHUNK = 256
_LANES = 4
#: Chunks shorter than this are filtered on the calling thread only.
_THREAD_MIN_FRAMES = 8192
_IDENTITY = np.array([1.0, 0.0, 0.0, 1.0, 0.0, 0.0])


def _kernel_py(x, co, z, starts, sums, out_g, out_k, out, buf, g_lo, g_hi):  # pragma: no cover
    """Compiled by numba; see :class:`ParallelSOS` for the arguments' meaning. Runs the
    filter groups ``g_lo <= g < g_hi`` (lanes of four filters) on one channel."""
    n = x.shape[0]
    n_sections = co.shape[1]
    chunk = buf.shape[0]
    nseg = starts.shape[0]
    seg = 0
    for first in range(0, n, chunk):
        m = min(chunk, n - first)
        for t in range(m):
            v = x[first + t]
            for g in range(g_lo, g_hi):
                for k in range(4):
                    buf[t, g, k] = v
        for s in range(n_sections):
            for g in range(g_lo, g_hi):
                c0 = co[0, s, g]
                c1 = co[1, s, g]
                c2 = co[2, s, g]
                d1 = co[3, s, g]
                d2 = co[4, s, g]
                p0 = z[0, s, g, 0]
                p1 = z[0, s, g, 1]
                p2 = z[0, s, g, 2]
                p3 = z[0, s, g, 3]
                q0 = z[1, s, g, 0]
                q1 = z[1, s, g, 1]
                q2 = z[1, s, g, 2]
                q3 = z[1, s, g, 3]
                for t in range(m):
                    u0 = buf[t, g, 0]
                    u1 = buf[t, g, 1]
                    u2 = buf[t, g, 2]
                    u3 = buf[t, g, 3]
                    y0 = c0[0] * u0 + p0
                    y1 = c0[1] * u1 + p1
                    y2 = c0[2] * u2 + p2
                    y3 = c0[3] * u3 + p3
                    p0 = c1[0] * u0 - d1[0] * y0 + q0
                    p1 = c1[1] * u1 - d1[1] * y1 + q1
                    p2 = c1[2] * u2 - d1[2] * y2 + q2
                    p3 = c1[3] * u3 - d1[3] * y3 + q3
                    q0 = c2[0] * u0 - d2[0] * y0
                    q1 = c2[1] * u1 - d2[1] * y1
                    q2 = c2[2] * u2 - d2[2] * y2
                    q3 = c2[3] * u3 - d2[3] * y3
                    buf[t, g, 0] = y0
                    buf[t, g, 1] = y1
                    buf[t, g, 2] = y2
                    buf[t, g, 3] = y3
                z[0, s, g, 0] = p0
                z[0, s, g, 1] = p1
                z[0, s, g, 2] = p2
                z[0, s, g, 3] = p3
                z[1, s, g, 0] = q0
                z[1, s, g, 1] = q1
                z[1, s, g, 2] = q2
                z[1, s, g, 3] = q3
        if out_g >= 0:
            for t in range(m):
                out[first + t] = buf[t, out_g, out_k]
        for t in range(m):
            i = first + t
            while seg + 1 < nseg and i >= starts[seg + 1]:
                seg += 1
            for g in range(g_lo, g_hi):
                for k in range(4):
                    sums[seg, g, k] += buf[t, g, k] * buf[t, g, k]


_kernel = (
    numba.njit(
        cache=True, nogil=True, fastmath={"contract", "reassoc", "nsz"}, error_model="numpy"
    )(_kernel_py)
    if HAVE_NUMBA
    else None
)


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
    ) -> None:
        if engine is None:
            engine = "numba" if HAVE_NUMBA else "scipy"
        if engine == "numba" and not HAVE_NUMBA:
            raise InputError(
                "engine 'numba' needs the optional numba package (pip install numba), "
                "or PIEZO_NO_NUMBA is set; use engine='scipy'"
            )
        if engine not in ("numba", "scipy"):
            raise InputError(f"engine must be 'numba', 'scipy' or None; got {engine!r}")
        self.engine = engine
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
            _kernel(xs[c], self._co, self._z[c], starts, sums[c], og, out_k, columns[c], buf,
                    g_lo, g_hi)  # fmt: skip

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
