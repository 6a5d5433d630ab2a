"""The measurement chain: quantities and units, sensor profiles, calibrated sources.

``units`` parses and formats quantities typed by users; ``measurement`` holds
:class:`~piezo.chain.measurement.Chain`, the TOML profiles and
:class:`~piezo.chain.measurement.CalibratedSource`, the one calibrated path from raw
samples to physical units; ``open`` holds :func:`~piezo.chain.open.open_source`
(``piezo.open``), which opens a file through its chain.

``quantity`` holds the measured quantities and trade-form sensitivities, ``curve`` the
response curves and their correction, ``integrate`` the streamed integration of
acceleration.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo.io`,
:mod:`piezo._kernels`, numpy, scipy.
"""
