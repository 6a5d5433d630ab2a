"""Figures: the one plot style and every figure piezo draws (matplotlib, Agg backend).

An edge layer: it renders analysis results; it never computes them.

May import: the analysis packages, matplotlib, numpy. Never :mod:`piezo.cli`.
"""
