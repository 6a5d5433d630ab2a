"""Streaming peak, mean and RMS per channel."""

from __future__ import annotations

import numpy as np

__all__ = ["SignalStats"]


class SignalStats:
    """Running peak (absolute), mean and RMS of each channel.

    Sums are accumulated in float64 per block; for a 4-hour 48 kHz file the relative
    rounding error of the mean square stays near 1e-12, far below any level resolution.

    Parameters
    ----------
    channels
        Number of channels in each block.

    Examples
    --------
    >>> stats = SignalStats(2)
    >>> stats.update(np.array([[1.0, -2.0], [3.0, 2.0]]))
    >>> stats.peak.tolist(), stats.mean.tolist(), stats.frames
    ([3.0, 2.0], [2.0, 0.0], 2)
    >>> [round(float(r), 4) for r in stats.rms]  # sqrt(5) and 2
    [2.2361, 2.0]
    """

    def __init__(self, channels: int) -> None:
        self.channels = channels
        self.frames = 0
        self._peak = np.zeros(channels)
        self._sum = np.zeros(channels)
        self._sum2 = np.zeros(channels)

    def update(self, block: np.ndarray) -> None:
        """Add a ``(frames, channels)`` block."""
        if block.shape[0] == 0:
            return
        np.maximum(self._peak, np.abs(block).max(axis=0), out=self._peak)
        self._sum += block.sum(axis=0)
        self._sum2 += np.einsum("ij,ij->j", block, block)
        self.frames += block.shape[0]

    @property
    def peak(self) -> np.ndarray:
        """Largest absolute sample per channel."""
        return self._peak.copy()

    @property
    def mean(self) -> np.ndarray:
        """Mean per channel (DC offset)."""
        return self._sum / max(self.frames, 1)

    @property
    def rms(self) -> np.ndarray:
        """Root mean square per channel (DC included)."""
        return np.sqrt(self._sum2 / max(self.frames, 1))
