"""Impedance measured from a two-channel V/I capture, through the spectral-averaging core.

The element and a shunt resistor are in series; one channel carries the voltage across
the element, the other the voltage across the shunt. The admittance is Y = H1 / R_shunt
with H1 = G_ve,vs / G_ve,ve, the Welch-averaged cross over auto spectrum of
:class:`piezo.response.measure.H1Estimator` (the element voltage as reference), with the
coherence. The segment length follows from the resonances' widths
(:func:`segment_frames_for_modes`): an analysis window wider than a resonance smears it
and biases its Q low.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

import numpy as np

from piezo.element.bvd import fit_modes
from piezo.element.impedance import ImpedanceSweep
from piezo.errors import InputError
from piezo.response.measure import H1Estimator

__all__ = [
    "BINS_PER_BANDWIDTH",
    "MIN_SEGMENTS",
    "ViImpedanceEstimator",
    "ViMeasurement",
    "measure_impedance",
    "segment_frames_for_modes",
]

#: Spectral bins wanted inside the half-power bandwidth f/Qm of the narrowest resonance.
#: Measured with :func:`measure_impedance` on the simulated element of the tests
#: (Qm 626 at 29 kHz, 192 kHz sampling, Hann window): about 2 bins per bandwidth (8192
#: samples) read Qm 10 % low, 8 bins (32768) about 1 % low; 10 keeps the bias under 1 %.
BINS_PER_BANDWIDTH = 10.0
#: Fewest Welch segments (50 % overlap) a V/I estimate is allowed to average.
MIN_SEGMENTS = 8


class ViImpedanceEstimator:
    """Streaming impedance from the voltage across an element and across a shunt.

    The element and the shunt resistor ``shunt_ohm`` are in series; channel
    ``voltage_channel`` carries the voltage across the element, ``shunt_channel`` the
    voltage across the shunt (the current times ``shunt_ohm``). The cross and auto
    spectra are averaged by :class:`piezo.response.measure.H1Estimator` with the element
    voltage as reference, so Y = H1 / R_shunt and Z = 1/Y.

    Parameters
    ----------
    sample_rate_hz
        Sample rate, Hz.
    channels
        Channels in each block.
    shunt_ohm
        Shunt resistance, Ω.
    voltage_channel, shunt_channel
        Channel indices in the blocks.
    segment_frames
        Welch segment length, samples.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> i = rng.standard_normal(40000)            # current through a 50 Ω resistor
    >>> est = ViImpedanceEstimator(48000.0, 2, shunt_ohm=10.0, segment_frames=256)
    >>> est.update(np.column_stack([50.0 * i, 10.0 * i]))
    >>> z = est.result().impedance_ohm
    >>> bool(np.allclose(z[1:], 50.0))
    True
    """

    def __init__(
        self,
        sample_rate_hz: float,
        channels: int,
        *,
        shunt_ohm: float,
        voltage_channel: int = 0,
        shunt_channel: int = 1,
        segment_frames: int,
    ) -> None:
        if not (isinstance(shunt_ohm, int | float) and math.isfinite(shunt_ohm) and shunt_ohm > 0):
            raise InputError(f"shunt_ohm must be a positive resistance, got {shunt_ohm!r}")
        if voltage_channel == shunt_channel:
            raise InputError(
                f"voltage_channel and shunt_channel must differ, both are {voltage_channel!r}"
            )
        self.shunt_ohm = float(shunt_ohm)
        self._h1 = H1Estimator(
            sample_rate_hz,
            channels,
            reference_channel=voltage_channel,
            measured_channels=(shunt_channel,),
            segment_frames=segment_frames,
        )

    @property
    def segment_frames(self) -> int:
        """Welch segment length, samples."""
        return self._h1.segment_frames

    def update(self, block: np.ndarray) -> None:
        """Add a block of shape (frames, channels)."""
        self._h1.update(block)

    def result(self) -> ImpedanceSweep:
        """Impedance and coherence at every bin above DC where the admittance is not 0."""
        est = self._h1.result()
        f = est.frequency_hz
        y = est.response[:, 0] / self.shunt_ohm
        keep = (f > 0) & np.isfinite(y) & (np.abs(y) > 0)
        return ImpedanceSweep(f[keep], 1.0 / y[keep], est.coherence[keep, 0], "V/I")


@dataclass(frozen=True)
class ViMeasurement:
    """A V/I impedance measurement and how its resolution was chosen.

    Attributes
    ----------
    sweep
        The impedance with its coherence.
    segment_frames
        Welch segment length of the final pass.
    passes
        Passes over the recording (each refines the resolution from the resonances).
    narrowest_bandwidth_hz
        Half-power bandwidth f/Qm of the narrowest resonance found, Hz (None: none).
    bins_per_bandwidth
        Bins inside that bandwidth with the final segment length.
    notes
        Cautions (resolution limited by the recording's length).

    Examples
    --------
    A plain 100 Ω resistor has no resonance, so one pass at the first resolution
    (1024 samples, 46.9 Hz bins at 48 kHz) is the measurement:

    >>> import numpy as np
    >>> i = np.random.default_rng(3).standard_normal(48000)
    >>> data = np.column_stack([100.0 * i, 10.0 * i])  # element, 10 Ω shunt
    >>> m = measure_impedance(lambda: [data], 48000.0, 2, data.shape[0], shunt_ohm=10.0)
    >>> m.segment_frames, m.passes, m.narrowest_bandwidth_hz, m.bins_per_bandwidth, m.notes
    (1024, 1, None, None, ())
    >>> bool(np.allclose(m.sweep.impedance_ohm, 100.0)), round(float(m.sweep.coherence.min()), 6)
    (True, 1.0)
    """

    sweep: ImpedanceSweep
    segment_frames: int
    passes: int
    narrowest_bandwidth_hz: float | None
    bins_per_bandwidth: float | None
    notes: tuple[str, ...] = field(default_factory=tuple)


def segment_frames_for_modes(
    sample_rate_hz: float, bandwidth_hz: float, *, bins: float = BINS_PER_BANDWIDTH
) -> int:
    """Power-of-two segment length putting ``bins`` bins in a resonance's bandwidth.

    Examples
    --------
    >>> segment_frames_for_modes(192000.0, 29057.6 / 626)   # Qm 626 at 29.06 kHz
    65536
    """
    if not (math.isfinite(bandwidth_hz) and bandwidth_hz > 0):
        raise InputError(f"bandwidth_hz must be positive, got {bandwidth_hz!r}")
    return int(2 ** math.ceil(math.log2(bins * sample_rate_hz / bandwidth_hz)))


def measure_impedance(
    blocks: Callable[[], Iterable[np.ndarray]],
    sample_rate_hz: float,
    channels: int,
    frames: int,
    *,
    shunt_ohm: float,
    voltage_channel: int = 0,
    shunt_channel: int = 1,
    segment_frames: int | None = None,
    max_passes: int = 4,
) -> ViMeasurement:
    """Impedance from a V/I capture, with the resolution chosen from the resonances.

    Without ``segment_frames``, a first pass uses segments of about 50 Hz resolution; the
    resonances found in it are fitted (:func:`piezo.element.bvd.fit_modes`) and the
    segment is lengthened until the narrowest half-power bandwidth f/Qm holds
    :data:`BINS_PER_BANDWIDTH` bins, as long as the recording gives at least
    :data:`MIN_SEGMENTS` segments (each pass reads the recording again).

    Parameters
    ----------
    blocks
        Called once per pass; returns the recording's blocks (frames, channels), volts.
    sample_rate_hz, channels, frames
        The recording's rate, channel count and length.
    shunt_ohm, voltage_channel, shunt_channel
        As :class:`ViImpedanceEstimator`.
    segment_frames
        A fixed segment length (one pass).
    max_passes
        Most passes over the recording.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(2)
    >>> i = rng.standard_normal(96000)             # current through a 220 Ω resistor
    >>> data = np.column_stack([220.0 * i, 47.0 * i])
    >>> m = measure_impedance(lambda: [data], 48000.0, 2, data.shape[0], shunt_ohm=47.0)
    >>> m.passes, bool(np.allclose(m.sweep.impedance_ohm, 220.0))
    (1, True)
    """
    longest = int(2 ** math.floor(math.log2(max(8, 2 * frames / (MIN_SEGMENTS + 1)))))
    fixed = segment_frames is not None
    n = (
        segment_frames
        if segment_frames is not None
        else min(longest, int(2 ** math.ceil(math.log2(sample_rate_hz / 50.0))))
    )
    notes: list[str] = []
    passes = 0
    bandwidth: float | None = None
    sweep: ImpedanceSweep | None = None
    while True:
        est = ViImpedanceEstimator(
            sample_rate_hz,
            channels,
            shunt_ohm=shunt_ohm,
            voltage_channel=voltage_channel,
            shunt_channel=shunt_channel,
            segment_frames=int(n),
        )
        for block in blocks():
            est.update(block)
        passes += 1
        sweep = est.result()
        try:
            fits = fit_modes(sweep)
        except InputError:
            fits = []
        widths = [m.fs_hz / m.qm for m in fits if m.qm > 0 and math.isfinite(m.qm)]
        bandwidth = min(widths) if widths else None
        if fixed or bandwidth is None or passes >= max_passes:
            break
        wanted = segment_frames_for_modes(sample_rate_hz, bandwidth)
        if wanted <= n:
            break
        if n >= longest:
            break
        n = min(wanted, longest)
    bins = None if bandwidth is None else bandwidth * n / sample_rate_hz
    if bins is not None and bins < BINS_PER_BANDWIDTH:
        notes.append(
            f"the narrowest resonance ({bandwidth:.3g} Hz wide) spans {bins:.1f} bins of "
            f"{sample_rate_hz / n:.3g} Hz; fewer than {BINS_PER_BANDWIDTH:g} bias its Qm low "
            "(record longer, or give a longer segment)"
        )
    assert sweep is not None
    return ViMeasurement(sweep, int(n), passes, bandwidth, bins, tuple(notes))
