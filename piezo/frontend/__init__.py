"""The front-end: sensor, cable and amplifier models, noise budget, simulate/equalize.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain` (units),
:mod:`piezo.levels` (weightings), numpy, scipy.
"""
