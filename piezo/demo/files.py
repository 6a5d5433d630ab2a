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

    Examples
    --------
    Written the way ``piezo demo`` writes it (the file, and its profile beside it), the
    sidecar's full scale is what :func:`piezo.open` applies:

    >>> import pathlib, tempfile
    >>> import soundfile as sf
    >>> import piezo
    >>> tone = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)
    >>> item = DemoFile("tone.wav", tone[:, None], 48000.0, "PCM_24",
    ...                 '[chain]\\nfull_scale = "2 V"\\n', None, "0.1 s of 1 kHz at -6 dBFS")
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     path = pathlib.Path(tmp) / item.name
    ...     sf.write(path, item.samples, int(item.sample_rate_hz), subtype=item.subtype)
    ...     _ = path.with_suffix(".toml").write_text(item.sidecar)
    ...     source = piezo.open(path)
    ...     source.frames, source.chain.full_scale_v
    (4800, 2.0)
    """

    name: str
    samples: np.ndarray
    sample_rate_hz: float
    subtype: str | None
    sidecar: str | None
    header: tuple[str, ...] | None
    description: str
