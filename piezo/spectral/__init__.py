"""Spectra: the one averaging core (auto and cross spectra), Welch PSD and spectrogram,
the IEC 61260-1 fractional-octave band bank; ``summary`` holds what ``piezo spectrum``
and ``piezo bands`` report.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.levels` (weighting
filters), :mod:`piezo._kernels`, :mod:`piezo.chain` (the calibrated source),
:mod:`piezo.results`, numpy, scipy.
"""
