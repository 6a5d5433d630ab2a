"""Sound levels: IEC 61672-1 frequency and time weightings, the level meter, signal stats;
``summary`` holds what ``piezo levels`` reports (:func:`~piezo.levels.summary.levels_of`).

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo._kernels`,
:mod:`piezo.chain` (the calibrated source), :mod:`piezo.results`, numpy, scipy.
"""
