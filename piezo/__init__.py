"""piezo: calibrated analysis of piezoelectric sensor recordings.

The public library API is listed in :data:`__all__`. Names are loaded on first use
(PEP 562), so ``import piezo`` stays light; ``from piezo import LevelMeter`` works as
usual. Implementation modules may change; these names are the contract.

:func:`open` is the calibrated open every command uses; ``levels_of``, ``spectrum_of``,
``bands_of``, ``tone_of``, ``calibration_of``, ``sweep_response_of``, ``h1_response_of``,
``study_frontend``, ``check_of`` and ``judge_lot`` return what the commands report, as
objects whose ``to_dict()`` equals the command's ``--json`` document (``docs/library.md``).

Examples
--------
>>> import piezo
>>> piezo.LevelMeter.__name__
'LevelMeter'
>>> piezo.open.__module__
'piezo.chain.open'
"""

from __future__ import annotations

import importlib
from typing import Any

from piezo.errors import InputError, PiezoError, RecordingError, SpecError, UnitError

__version__ = "0.1.0"

#: Public name -> module that defines it (``"module:name"`` where the names differ).
_API = {
    # reading and the measurement chain
    "open": "piezo.chain.open:open_source",
    "open_recording": "piezo.io.reader",
    "Recording": "piezo.io.reader",
    "Chain": "piezo.chain.measurement",
    "ChainSettings": "piezo.chain.measurement",
    "CalibratedSource": "piezo.chain.measurement",
    "resolve_chain": "piezo.chain.measurement",
    "load_profile": "piezo.chain.measurement",
    "calibrate_tone": "piezo.tone.calibrator",
    "ToneCalibrator": "piezo.tone.calibrator",
    # analyses
    "weighting_db": "piezo.levels.weighting",
    "weighting_sos": "piezo.levels.weighting",
    "LevelMeter": "piezo.levels.meter",
    "sound_levels": "piezo.levels.meter",
    "WelchPSD": "piezo.spectral.welch",
    "welch_psd": "piezo.spectral.welch",
    "Spectrogram": "piezo.spectral.welch",
    "BandAnalyzer": "piezo.spectral.bands",
    "measure_tone": "piezo.tone.analysis",
    "ToneAnalyzer": "piezo.tone.analysis",
    "sweep_spec": "piezo.response.stimulus",
    "sweep_signal": "piezo.response.stimulus",
    "inverse_filter": "piezo.response.stimulus",
    "analyze_sweep": "piezo.response.measure",
    "response_h1": "piezo.response.measure",
    "H1Estimator": "piezo.response.measure",
    "fit_response": "piezo.response.fit",
    "Frontend": "piezo.frontend.model",
    "load_frontend": "piezo.frontend.model",
    "CaptureChecker": "piezo.diagnostics.checker",
    "check_capture": "piezo.diagnostics.checker",
    # what each command reports, as result objects (``to_dict()`` is its --json)
    "levels_of": "piezo.levels.summary",
    "Levels": "piezo.levels.summary",
    "spectrum_of": "piezo.spectral.summary",
    "Spectrum": "piezo.spectral.summary",
    "bands_of": "piezo.spectral.summary",
    "Bands": "piezo.spectral.summary",
    "tone_of": "piezo.tone.summary",
    "Tone": "piezo.tone.summary",
    "calibration_of": "piezo.tone.summary",
    "Calibration": "piezo.tone.summary",
    "sweep_response_of": "piezo.response.summary",
    "SweepAnalysis": "piezo.response.summary",
    "h1_response_of": "piezo.response.summary",
    "H1Analysis": "piezo.response.summary",
    "study_frontend": "piezo.frontend.study",
    "FrontendStudy": "piezo.frontend.study",
    "check_of": "piezo.diagnostics.summary",
    "Check": "piezo.diagnostics.summary",
    "judge_lot": "piezo.batch.lot",
    "LotVerdicts": "piezo.batch.lot",
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
    target = _API.get(name)
    if target is None:
        raise AttributeError(f"module 'piezo' has no attribute {name!r}")
    module, _, attr = target.partition(":")
    value = getattr(importlib.import_module(module), attr or name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
