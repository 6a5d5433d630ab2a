"""The public names of the package are a contract: adding is fine, removing is not."""

from __future__ import annotations

import piezo

EXPECTED = {
    "InputError", "PiezoError", "RecordingError", "SpecError", "UnitError", "__version__",
    "open_recording", "Recording", "Chain", "ChainSettings", "CalibratedSource",
    "resolve_chain", "load_profile", "calibrate_tone", "ToneCalibrator", "weighting_db",
    "weighting_sos", "LevelMeter", "sound_levels", "WelchPSD", "welch_psd", "Spectrogram",
    "BandAnalyzer", "measure_tone", "ToneAnalyzer", "sweep_spec", "sweep_signal",
    "inverse_filter", "analyze_sweep", "response_h1", "H1Estimator", "fit_response",
    "Frontend", "load_frontend", "CaptureChecker", "check_capture",
}  # fmt: skip


def test_public_names_are_pinned():
    assert EXPECTED <= set(piezo.__all__)


def test_every_public_name_resolves():
    for name in piezo.__all__:
        assert getattr(piezo, name) is not None, name


def test_errors_inherit_builtin_meaning():
    assert issubclass(piezo.InputError, ValueError)
    assert issubclass(piezo.UnitError, ValueError)
    assert issubclass(piezo.SpecError, ValueError)
    assert issubclass(piezo.RecordingError, OSError)
    assert all(issubclass(e, piezo.PiezoError) for e in (piezo.InputError, piezo.RecordingError))
