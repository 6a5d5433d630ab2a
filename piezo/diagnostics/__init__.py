"""Capture checks: clipping, headroom, DC, dropouts, hum, roll-off, noise floor.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain`,
:mod:`piezo.levels`, :mod:`piezo.spectral`, :mod:`piezo.tone`, :mod:`piezo.response`,
:mod:`piezo.results`, numpy, scipy. ``summary`` holds what ``piezo check`` reports.
"""
