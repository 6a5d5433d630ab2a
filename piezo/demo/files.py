"""What a demo generator returns: one recording, ready for the command line to write."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DemoFile"]


@dataclass(frozen=True)
class DemoFile:
    """One demo recording, ready to write.

    Attributes
    ----------
    name
        File name (its suffix selects the format).
    samples
        ``(frames, channels)`` samples: fractions of full scale for audio files, volts
        (with the time in column 0) for CSV.
    sample_rate_hz
        Sample rate.
    subtype
        soundfile subtype for audio files (``"PCM_16"``, ``"PCM_24"`` ...); None for CSV.
    sidecar
        TOML text of the profile written beside the file, or None.
    header
        CSV column names, or None.
    description
        One line on what the recording is.
    """

    name: str
    samples: np.ndarray
    sample_rate_hz: float
    subtype: str | None
    sidecar: str | None
    header: tuple[str, ...] | None
    description: str
