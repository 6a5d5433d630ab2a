"""Figures: the one plot style and every figure piezo draws (matplotlib, Agg backend).

``style`` is the style (palette, colour map, fonts, the "quantity / unit" label form,
rendering with fixed metadata); ``figures`` draws the capture report's figures,
``spectrum``, ``response`` and ``frontend`` those of the commands' ``--plot``, ``batch``
the batch pages'. matplotlib is imported inside the drawing functions only, so importing
these modules does not load it.

An edge layer: it renders analysis results; it never computes them.

May import: the analysis packages, matplotlib, numpy. Never :mod:`piezo.cli`.
"""
