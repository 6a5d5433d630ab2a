"""piezo: calibrated analysis of piezoelectric sensor recordings."""

from piezo.errors import InputError, PiezoError, RecordingError, SpecError, UnitError

__version__ = "0.1.0"

__all__ = [
    "InputError",
    "PiezoError",
    "RecordingError",
    "SpecError",
    "UnitError",
    "__version__",
]
