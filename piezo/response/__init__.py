"""Frequency response: stimuli (swept sine, noise), deconvolution, H1, the high-pass/resonance
model, response fits.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain` (units),
:mod:`piezo.spectral`, numpy, scipy.
"""
