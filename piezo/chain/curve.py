"""A sensor's frequency-dependent sensitivity (its calibration chart), and its correction.

Convention
----------
A response curve gives, at each frequency, the sensor's sensitivity relative to the
channel's stated sensitivity ``S``: ``relative_db`` is positive where the sensor gives
more output. The sensitivity at ``f`` is therefore::

    S(f) = S · 10^(relative_db(f) / 20) · e^(j·phase_deg(f)·π/180)

The curve describes the sensor alone; the amplifier gain and the ADC's full scale stay in
the chain. Correcting a recording divides its spectrum by ``S(f)/S``, so a chart that
reads +6 dB at 10 kHz lowers 10 kHz content by 6 dB.

File format (CSV, UTF-8): lines starting with ``#`` are comments; a header row names the
columns ``frequency_hz``, ``relative_db`` and optionally ``phase_deg`` and
``expanded_uncertainty_db`` (k = 2), in any order; frequencies strictly increasing.
Between chart points the curve is interpolated linearly in dB (and degrees) over
log-frequency; outside the chart the end values are held, never extrapolated, and
:meth:`ResponseCurve.coverage_note` says which part of a band the chart does not cover.
A correction larger than :data:`MAX_CORRECTION_DB` is refused: it would amplify noise
far more than any real chart justifies.

:class:`CurveCorrection` applies the correction to a stream of blocks with a linear-phase
FIR filter (frequency sampling, Kaiser window) whose delay is compensated, so the output
is aligned with the input sample for sample and has the same length.
"""

from __future__ import annotations

import io
import math
from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from piezo.errors import InputError

__all__ = ["MAX_CORRECTION_DB", "CurveCorrection", "ResponseCurve", "parse_response_curve"]

#: Largest correction accepted, in dB (either sign).
MAX_CORRECTION_DB = 40.0

_COLUMNS = ("frequency_hz", "relative_db", "phase_deg", "expanded_uncertainty_db")


@dataclass(frozen=True)
class ResponseCurve:
    """A calibration chart: relative sensitivity (and phase) against frequency.

    Examples
    --------
    >>> curve = parse_response_curve("frequency_hz,relative_db\\n100,0\\n1000,0\\n10000,6")
    >>> round(float(curve.relative_db_at(np.array([3162.28]))[0]), 3)
    3.0
    >>> curve.coverage_note(20.0, 20000.0)
    'chart covers 100 Hz to 10 kHz; end values held below and above'
    """

    frequency_hz: np.ndarray
    relative_db: np.ndarray
    phase_deg: np.ndarray | None = None
    expanded_uncertainty_db: np.ndarray | None = None

    def _interp(self, values: np.ndarray, frequency_hz: np.ndarray) -> np.ndarray:
        f = np.clip(np.asarray(frequency_hz, dtype=float), self.frequency_hz[0], None)
        return np.interp(np.log10(np.maximum(f, 1e-30)), np.log10(self.frequency_hz), values)

    def relative_db_at(self, frequency_hz: np.ndarray) -> np.ndarray:
        """The relative sensitivity in dB at ``frequency_hz`` (end values held)."""
        return self._interp(self.relative_db, frequency_hz)

    def phase_deg_at(self, frequency_hz: np.ndarray) -> np.ndarray:
        """The phase in degrees at ``frequency_hz``; zero when the chart has none."""
        if self.phase_deg is None:
            return np.zeros_like(np.asarray(frequency_hz, dtype=float))
        return self._interp(self.phase_deg, frequency_hz)

    def relative_response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """``S(f)/S`` as complex numbers."""
        gain = 10.0 ** (self.relative_db_at(frequency_hz) / 20.0)
        return gain * np.exp(1j * np.deg2rad(self.phase_deg_at(frequency_hz)))

    def coverage_note(self, low_hz: float, high_hz: float) -> str | None:
        """A note when ``[low_hz, high_hz]`` reaches outside the chart, else None."""
        lo, hi = float(self.frequency_hz[0]), float(self.frequency_hz[-1])
        if low_hz >= lo and high_hz <= hi:
            return None
        sides = [s for s, out in (("below", low_hz < lo), ("above", high_hz > hi)) if out]
        return f"chart covers {_hz(lo)} to {_hz(hi)}; end values held {' and '.join(sides)}"


def _hz(value: float) -> str:
    return f"{value / 1000:g} kHz" if value >= 1000 else f"{value:g} Hz"


def parse_response_curve(text: str, *, source: str | None = None) -> ResponseCurve:
    """Read a response curve from CSV text (see the module docstring for the format).

    Errors name the line and what is wrong, as :class:`~piezo.errors.InputError` with
    ``source`` (the file) attached.

    Examples
    --------
    >>> c = parse_response_curve("# chart of unit 7\\nfrequency_hz,relative_db,phase_deg\\n"
    ...                          "10,-0.5,3\\n20000,1.5,-12")
    >>> c.phase_deg.tolist()
    [3.0, -12.0]
    >>> parse_response_curve("frequency_hz,relative_db\\n100,0\\n50,1")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: line 3: frequencies must increase (50 after 100)
    """

    def fail(message: str) -> InputError:
        return InputError(message, source=source)

    header: list[str] | None = None
    rows: list[list[float]] = []
    for number, raw in enumerate(io.StringIO(text), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cells = [c.strip() for c in line.replace(";", ",").replace("\t", ",").split(",")]
        if header is None:
            header = [c.lower() for c in cells]
            unknown = [c for c in header if c not in _COLUMNS]
            if unknown or "frequency_hz" not in header or "relative_db" not in header:
                raise fail(
                    f"line {number}: the header must name frequency_hz and relative_db "
                    f"(optional phase_deg, expanded_uncertainty_db); got {line[:80]!r}"
                )
            continue
        if len(cells) != len(header):
            raise fail(f"line {number}: {len(cells)} values for {len(header)} columns")
        try:
            values = [float(c) for c in cells]
        except ValueError:
            raise fail(f"line {number}: not a number in {line[:80]!r}") from None
        if not all(math.isfinite(v) for v in values):
            raise fail(f"line {number}: values must be finite, got {line[:80]!r}")
        f = values[header.index("frequency_hz")]
        if f <= 0:
            raise fail(f"line {number}: frequency must be positive, got {f:g}")
        if rows and f <= rows[-1][header.index("frequency_hz")]:
            previous = rows[-1][header.index("frequency_hz")]
            raise fail(f"line {number}: frequencies must increase ({f:g} after {previous:g})")
        rel = values[header.index("relative_db")]
        if abs(rel) > MAX_CORRECTION_DB:
            raise fail(
                f"line {number}: relative_db {rel:g} dB exceeds the ±{MAX_CORRECTION_DB:g} dB "
                "a correction may apply"
            )
        rows.append(values)
    if header is None or len(rows) < 2:
        raise fail("a response curve needs a header row and at least two points")
    table = np.array(rows)

    def column(name: str) -> np.ndarray | None:
        return table[:, header.index(name)].copy() if name in header else None

    frequency, relative = column("frequency_hz"), column("relative_db")
    assert frequency is not None and relative is not None  # checked with the header
    return ResponseCurve(
        frequency, relative, column("phase_deg"), column("expanded_uncertainty_db")
    )


class CurveCorrection:
    """Divide a stream by a sensor's response curve (streamed, delay compensated).

    A linear-phase FIR filter is designed by frequency sampling of ``S / S(f)`` on
    ``taps`` points and a Kaiser window (β = 8, sidelobes near −80 dB; Oppenheim &
    Schafer, *Discrete-Time Signal Processing*, 3rd ed., 7.6). Its delay of
    ``(taps − 1)/2`` samples is removed: the first output samples are held back and the
    last ones released by :meth:`finish`, so concatenated outputs equal the input's
    length and alignment. The default length resolves a tenth of the chart's lowest
    frequency.

    Parameters
    ----------
    curve
        The chart.
    sample_rate_hz
        Sample rate of the stream.
    channels
        Number of channels of each block.
    taps
        FIR length (odd); default from the chart's lowest frequency.

    Examples
    --------
    >>> curve = parse_response_curve("frequency_hz,relative_db\\n10,6.0206\\n20000,6.0206")
    >>> corr = CurveCorrection(curve, 48000.0, 1, taps=255)
    >>> x = np.ones((1000, 1))
    >>> y = np.concatenate([corr.process(x[:600]), corr.process(x[600:]), corr.finish()])
    >>> y.shape, round(float(y[500, 0]), 4)     # +6 dB everywhere: halved
    ((1000, 1), 0.5)
    """

    def __init__(
        self,
        curve: ResponseCurve,
        sample_rate_hz: float,
        channels: int,
        *,
        taps: int | None = None,
    ) -> None:
        if taps is None:
            taps = self.default_taps(curve, sample_rate_hz)
        if taps < 3 or taps % 2 == 0:
            raise InputError(f"taps must be an odd number of at least 3, got {taps}")
        self.sample_rate_hz = float(sample_rate_hz)
        self.taps = taps
        self.delay_frames = (taps - 1) // 2
        self.kernel = self._design(curve)
        self._tail = np.zeros((taps - 1, channels))
        self._skip = self.delay_frames
        self._frames_in = 0
        self._frames_out = 0

    @staticmethod
    def default_taps(curve: ResponseCurve, sample_rate_hz: float) -> int:
        """The default FIR length: resolves a tenth of the chart's lowest frequency.

        Examples
        --------
        >>> curve = parse_response_curve("frequency_hz,relative_db\\n100,0\\n10000,1")
        >>> CurveCorrection.default_taps(curve, 48000.0)   # 10 Hz: 2^13 + 1
        8193
        """
        resolution_hz = max(float(curve.frequency_hz[0]) / 10.0, 0.5)
        return int(2 ** math.ceil(math.log2(sample_rate_hz / resolution_hz))) + 1

    def _design(self, curve: ResponseCurve) -> np.ndarray:
        n = self.taps
        grid = 1 << max(int(math.ceil(math.log2(4 * n))), 4)
        f = np.fft.rfftfreq(grid, 1.0 / self.sample_rate_hz)
        f[0] = f[1]  # hold the lowest chart value down to DC
        wanted = 1.0 / curve.relative_response(f)
        # Linear phase: the response centred on the middle tap.
        centred = wanted * np.exp(-2j * np.pi * f / self.sample_rate_hz * self.delay_frames)
        centred[0] = abs(wanted[0])
        impulse = np.fft.irfft(centred, grid)[:n]
        return np.asarray(impulse * np.kaiser(n, 8.0))

    def _convolve(self, block: np.ndarray) -> np.ndarray:
        frames = block.shape[0]
        size = 1 << int(math.ceil(math.log2(frames + self.taps - 1)))
        spectrum = np.fft.rfft(block, size, axis=0) * np.fft.rfft(self.kernel, size)[:, None]
        full = np.fft.irfft(spectrum, size, axis=0)[: frames + self.taps - 1]
        full[: self.taps - 1] += self._tail
        self._tail = full[frames:].copy()
        return full[:frames]

    def process(self, block: np.ndarray) -> np.ndarray:
        """Correct one ``(frames, channels)`` block; returns what is ready (may be less)."""
        self._frames_in += block.shape[0]
        out = self._convolve(np.asarray(block, dtype=float)) if block.shape[0] else block
        if self._skip:
            drop = min(self._skip, out.shape[0])
            self._skip -= drop
            out = out[drop:]
        self._frames_out += out.shape[0]
        return out

    def finish(self) -> np.ndarray:
        """The last samples held back by the delay compensation."""
        missing = self._frames_in - self._frames_out
        out = self._tail[self._skip : self._skip + missing].copy()
        self._frames_out += out.shape[0]
        return out

    def blocks(self, source: Iterator[np.ndarray]) -> Iterator[np.ndarray]:
        """Correct every block of ``source``, then yield the held-back end."""
        for block in source:
            out = self.process(block)
            if out.shape[0]:
                yield out
        tail = self.finish()
        if tail.shape[0]:
            yield tail
