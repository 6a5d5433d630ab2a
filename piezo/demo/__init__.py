"""Seeded generators of the synthetic demo recordings, designs and production lot.

Pure: the generators return arrays and texts; :mod:`piezo.cli.demo` writes them.

May import: the analysis packages, numpy, scipy.
"""
