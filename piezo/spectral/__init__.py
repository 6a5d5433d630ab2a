"""Spectra: the one averaging core (auto and cross spectra), Welch PSD and spectrogram,
the IEC 61260-1 fractional-octave band bank.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.levels` (weighting
filters), :mod:`piezo._kernels`, numpy, scipy.
"""
