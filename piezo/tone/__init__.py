"""Tones: tone-line frequency and level, THD, THD+N, SINAD, SNR; calibrator sensitivity.

``summary`` holds what ``piezo tone`` reports. May import: :mod:`piezo.errors`,
:mod:`piezo.validate`, :mod:`piezo.chain`, :mod:`piezo.spectral`, :mod:`piezo.results`,
numpy, scipy.
"""
