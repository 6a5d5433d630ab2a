"""The front-end: sensor, cable and amplifier models, noise budget, simulate/equalize.

``study`` holds what ``piezo frontend`` reports, and the ``--vary`` parameter study.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.chain` (units),
:mod:`piezo.levels` (weightings), :mod:`piezo.results`, numpy, scipy.
"""
