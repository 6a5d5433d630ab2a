"""One production capture, whole, in volts at the sensor, and the analyses run on it.

:func:`load_capture` opens a capture through :func:`piezo.open` (the one calibrated
open) with the spec's chain (full scale, gain, CSV rate; no sidecar: the spec is the
chain of a production line) and takes the spec's channel in volts at the sensor.
:class:`CaptureAnalysis` carries a capture to the metric extractors
(:mod:`piezo.batch.metrics`) and caches the analyses they share.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from piezo.batch.spec import Spec
from piezo.chain.open import open_source
from piezo.element.impedance import read_impedance_csv
from piezo.errors import InputError, PiezoError
from piezo.io.reader import CSV_SUFFIXES

__all__ = ["Capture", "CaptureAnalysis", "load_capture", "path_is_csv"]


@dataclass
class Capture:
    """One capture, whole, in volts at the sensor's output.

    ``samples`` has shape (frames,): the spec's channel, calibrated by the spec's full
    scale and divided by the front-end gain. ``clip_level_v`` is the ADC full scale
    expressed in the same volts, for clipping checks.

    Examples
    --------
    >>> import numpy as np
    >>> cap = Capture("PD27-00001.flac", 48000.0, np.zeros(480), clip_level_v=0.1)
    >>> cap.samples.size / cap.sample_rate_hz  # seconds
    0.01
    """

    path: str
    sample_rate_hz: float
    samples: np.ndarray
    clip_level_v: float
    #: An impedance table (``stimulus.kind = "impedance"``): the sweep, no samples.
    sweep: Any = None


def path_is_csv(path: str) -> bool:
    """True for text exports (read as volts at the ADC input, rate from capture.rate_hz).

    Examples
    --------
    >>> path_is_csv("lot/PD27-0001.csv"), path_is_csv("lot/PD27-0001.flac")
    (True, False)
    """
    return Path(path).suffix.lower() in CSV_SUFFIXES


def load_capture(path: str, spec: Spec) -> Capture:
    """Read ``path`` whole through :func:`piezo.open` with the spec's chain.

    Raises
    ------
    PiezoError
        An unreadable or empty capture, or a spec channel the capture does not have.

    Examples
    --------
    A unit of the bundled demo lot, read with its spec's chain (20 dB gain, 1 V full
    scale), so the clip level is 1 V / 10 at the sensor:

    >>> from piezo.batch.spec import load_spec
    >>> spec = load_spec("recordings/pd27-spec.toml")
    >>> cap = load_capture("recordings/pd27-lot/PD27-24101.flac", spec)
    >>> cap.sample_rate_hz, cap.samples.shape, round(cap.clip_level_v, 6)
    (16000.0, (16000,), 0.1)
    """
    if spec.stimulus.kind == "impedance":
        return Capture(path, math.nan, np.zeros(0), math.nan, sweep=read_impedance_csv(path))
    source = open_source(
        path,
        full_scale=spec.full_scale_v,
        gain=spec.gain,
        rate=spec.rate_hz if path_is_csv(path) else None,
        use_sidecar=False,
    )
    if spec.channel >= source.recording.channels:
        raise InputError(
            f"capture.channel = {spec.channel} but the capture has "
            f"{source.recording.channels} channel(s)",
            source=path,
        )
    volts = source.with_channels([spec.channel]).volts_at_sensor()
    blocks = [b[:, 0] for b in volts.blocks()]
    samples = np.concatenate(blocks) if blocks else np.zeros(0)
    if samples.size == 0:
        raise PiezoError("capture is empty", source=path)
    return Capture(path, float(volts.sample_rate_hz), samples, spec.full_scale_v / spec.gain)


@dataclass
class CaptureAnalysis:
    """A capture and the analyses already run on it, shared by the metric extractors.

    Extractors call :meth:`cached` so an analysis that feeds several metrics (the swept
    response feeds sensitivity, corner, resonance and masks) runs once per capture.

    Examples
    --------
    >>> calls = []
    >>> a = CaptureAnalysis(capture=None, spec=None)  # type: ignore[arg-type]
    >>> a.cached("rms", lambda: calls.append(1) or 0.5), a.cached("rms", lambda: 9.9)
    (0.5, 0.5)
    >>> len(calls), a.peek("rms"), a.peek("thd")
    (1, (True, 0.5), (False, None))
    """

    capture: Capture
    spec: Spec
    _cache: dict[Any, Any] = field(default_factory=dict)

    def cached(self, key: Any, compute: Callable[[], Any]) -> Any:
        """Return the value stored under ``key``, computing it on first use.

        An exception raised by ``compute`` is stored too and raised again on every call,
        so a failing analysis is tried once per capture.
        """
        if key not in self._cache:
            try:
                self._cache[key] = (True, compute())
            except Exception as exc:  # re-raised below, for each caller
                self._cache[key] = (False, exc)
        ok, value = self._cache[key]
        if not ok:
            raise value
        return value

    def peek(self, key: Any) -> tuple[bool, Any]:
        """``(True, value)`` if the analysis under ``key`` ran and succeeded, else
        ``(False, None)``; never computes anything."""
        ok, value = self._cache.get(key, (False, None))
        return (True, value) if ok else (False, None)
