"""The measurement chain: quantities and units, sensor profiles, calibrated sources.

``units`` parses and formats quantities typed by users; ``measurement`` holds
:class:`~piezo.chain.measurement.Chain`, the TOML profiles and
:class:`~piezo.chain.measurement.CalibratedSource`, the one calibrated path from raw
samples to physical units; ``open`` holds :func:`~piezo.chain.open.open_source`
(``piezo.open``), which opens a file through its chain.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.io`, numpy.
"""
