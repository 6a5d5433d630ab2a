"""Reading recordings: libsndfile formats (through soundfile) and CSV/TSV exports.

Holds :func:`~piezo.io.reader.open_recording` and :class:`~piezo.io.reader.Recording`
(raw samples streamed in ``(frames, channels)`` blocks).

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, numpy, soundfile.
"""
