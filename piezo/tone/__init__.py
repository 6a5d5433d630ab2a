"""Tones: tone-line frequency and level, THD, THD+N, SINAD, SNR; calibrator sensitivity.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain`,
:mod:`piezo.spectral`, numpy, scipy.
"""
