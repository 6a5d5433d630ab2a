"""The public names of the package are a contract: adding is fine, removing is not."""

from __future__ import annotations

import piezo
from tests.paths import REPO

EXPECTED = {
    "InputError", "PiezoError", "RecordingError", "SpecError", "UnitError", "__version__",
    "open_recording", "Recording", "Chain", "ChainSettings", "CalibratedSource",
    "resolve_chain", "load_profile", "calibrate_tone", "ToneCalibrator", "weighting_db",
    "weighting_sos", "LevelMeter", "sound_levels", "WelchPSD", "welch_psd", "Spectrogram",
    "BandAnalyzer", "measure_tone", "ToneAnalyzer", "sweep_spec", "sweep_signal",
    "inverse_filter", "analyze_sweep", "response_h1", "H1Estimator", "fit_response",
    "Frontend", "load_frontend", "CaptureChecker", "check_capture",
    "open", "levels_of", "Levels", "spectrum_of", "Spectrum", "bands_of", "Bands", "tone_of",
    "Tone", "sweep_response_of", "SweepAnalysis", "h1_response_of", "H1Analysis",
    "study_frontend", "FrontendStudy", "check_of", "Check", "judge_lot", "LotVerdicts",
    "calibration_of", "Calibration",
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


def test_import_piezo_stays_light():
    # The package loads its names on first use (PEP 562): importing it must not load
    # numpy, the readers or an analysis. Run in a fresh interpreter (this one has
    # loaded everything already).
    import subprocess
    import sys

    code = (
        "import sys, piezo; "
        "print(sorted(m for m in sys.modules if m.startswith(('numpy', 'piezo.'))))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=REPO
    ).stdout
    assert out.strip() == "['piezo.errors']"


def test_open_is_the_calibrated_open_of_the_cli():
    from piezo.chain.open import open_source

    assert piezo.open is open_source
