"""piezo: calibrated analysis of piezoelectric sensor recordings.

The public library API is listed in :data:`__all__`. Names are loaded on first use
(PEP 562), so ``import piezo`` stays light; ``from piezo import LevelMeter`` works as
usual. Implementation modules may change; these names are the contract.
"""

from __future__ import annotations

import importlib
from typing import Any

from piezo.errors import InputError, PiezoError, RecordingError, SpecError, UnitError

__version__ = "0.1.0"

#: Public name -> module that defines it.
_API = {
    # reading and the measurement chain
    "open_recording": "piezo.io",
    "Recording": "piezo.io",
    "Chain": "piezo.chain",
    "ChainSettings": "piezo.chain",
    "CalibratedSource": "piezo.chain",
    "resolve_chain": "piezo.chain",
    "load_profile": "piezo.chain",
    "calibrate_tone": "piezo.calibration",
    "ToneCalibrator": "piezo.calibration",
    # analyses
    "weighting_db": "piezo.weighting",
    "weighting_sos": "piezo.weighting",
    "LevelMeter": "piezo.levels",
    "sound_levels": "piezo.levels",
    "WelchPSD": "piezo.spectrum",
    "welch_psd": "piezo.spectrum",
    "Spectrogram": "piezo.spectrum",
    "BandAnalyzer": "piezo.bands",
    "measure_tone": "piezo.tone",
    "ToneAnalyzer": "piezo.tone",
    "sweep_spec": "piezo.sweep",
    "sweep_signal": "piezo.sweep",
    "inverse_filter": "piezo.sweep",
    "analyze_sweep": "piezo.response",
    "response_h1": "piezo.response",
    "H1Estimator": "piezo.response",
    "fit_response": "piezo.fit",
    "Frontend": "piezo.frontend",
    "load_frontend": "piezo.frontend",
    "CaptureChecker": "piezo.diagnostics",
    "check_capture": "piezo.diagnostics",
}

__all__ = [
    "InputError",
    "PiezoError",
    "RecordingError",
    "SpecError",
    "UnitError",
    "__version__",
    *sorted(_API),
]


def __getattr__(name: str) -> Any:
    module = _API.get(name)
    if module is None:
        raise AttributeError(f"module 'piezo' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
