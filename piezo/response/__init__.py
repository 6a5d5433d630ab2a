"""Frequency response: stimuli (swept sine, noise), deconvolution, H1, the high-pass/resonance
model, response fits.

``summary`` holds what ``piezo sweep analyze``, ``piezo response`` and ``fit-frontend``
report.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain` (units, the
calibrated source), :mod:`piezo.spectral`, :mod:`piezo.results`, numpy, scipy.
"""
