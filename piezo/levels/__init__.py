"""Sound levels: IEC 61672-1 frequency and time weightings, the level meter, signal stats.

May import: :mod:`piezo.errors`, :mod:`piezo.validate`, :mod:`piezo._kernels`, numpy,
scipy.
"""
