"""The piezo element itself: impedance sweeps, the equivalent circuit, ring-down and tap tests.

Holds :mod:`~piezo.element.impedance` (impedance tables read from CSV exports),
:mod:`~piezo.element.bvd` (the Butterworth–Van Dyke circuit and its fit per resonance
mode), :mod:`~piezo.element.vi` (impedance measured from a two-channel V/I capture through
the spectral-averaging core, resolution chosen from the fitted resonances) and
:mod:`~piezo.element.ringdown` (events of a tap or ring-down capture and their decaying
modes).

Pure analysis: no printing, no files written.

May import: :mod:`piezo.errors`, :mod:`piezo.chain` (units), :mod:`piezo.io` (the CSV
sniffing helpers), :mod:`piezo.response` (the H1 estimator), :mod:`piezo.spectral`,
numpy, scipy.
"""
