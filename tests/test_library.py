"""The library does what the command line does: ``piezo.open`` and the result objects
reproduce each command's ``--json`` document exactly (same keys, same values)."""

from __future__ import annotations

import doctest

import pytest

import piezo
from piezo.batch.lot import judge_lot
from piezo.diagnostics.summary import check_of
from piezo.frontend.study import study_frontend, vary_values
from piezo.levels.summary import levels_of
from piezo.response.fit import parse_response_csv
from piezo.response.stimulus import stimulus_from_toml
from piezo.response.summary import h1_response_of, sweep_response_of
from piezo.spectral.summary import bands_of, spectrum_of
from piezo.tone.summary import calibration_of, tone_of
from tests.paths import DOCS, RECORDINGS, REPO

PUMP = RECORDINGS / "pump-bench.flac"
CALIBRATOR = RECORDINGS / "calibrator-94dB.wav"


@pytest.fixture(scope="module")
def pump():
    return piezo.open(PUMP)


def test_open_reads_the_sidecar_like_the_cli(pump):
    # pump-bench.toml beside the recording gives the sensitivity: levels in pascals.
    assert pump.unit == "Pa"
    assert pump.provenance is not None
    assert pump.provenance.sensitivity_v_per_pa == str(PUMP.with_suffix(".toml"))
    assert pump.channel_indices == (0, 1)


def test_open_takes_numbers_or_unit_text_alike():
    as_text = piezo.open(PUMP, sensitivity="12 mV/Pa", gain="20 dB", use_sidecar=False)
    as_numbers = piezo.open(PUMP, sensitivity=0.012, gain=10.0, use_sidecar=False)
    assert as_text.chain == as_numbers.chain
    assert as_text.scale == pytest.approx(1 / (10.0 * 0.012), rel=1e-12)


def test_open_messages_name_the_parameter_not_an_option():
    with pytest.raises(piezo.UnitError, match=r"^.*full_scale: unknown unit in '2 A'") as err:
        piezo.open(PUMP, full_scale="2 A")
    assert "--" not in str(err.value)
    assert str(PUMP) in str(err.value)


def test_levels(cli, pump):
    r = cli("levels", PUMP, "--json")
    assert r.code == 0, r.err
    assert levels_of(pump).to_dict() == r.json()


def test_levels_with_history(cli, pump):
    r = cli("levels", PUMP, "--interval", "1 s", "--settle", "0", "--json")
    assert r.code == 0, r.err
    assert levels_of(pump, interval_s=1.0, filter_settle_s=0.0).to_dict() == r.json()


def test_spectrum(cli, pump):
    r = cli("spectrum", PUMP, "--resolution", "2 Hz", "--json")
    assert r.code == 0, r.err
    assert spectrum_of(pump, resolution_hz=2.0).to_dict() == r.json()


def test_bands(cli, pump):
    r = cli("bands", PUMP, "--json")
    assert r.code == 0, r.err
    assert bands_of(pump).to_dict() == r.json()


def test_bands_weighted_with_history(cli, pump):
    r = cli("bands", PUMP, "--fraction", "1", "--weighting", "A", "--interval", "2s", "--json")
    assert r.code == 0, r.err
    assert bands_of(pump, fraction=1, weighting="A", interval_s=2.0).to_dict() == r.json()


def test_tone(cli):
    r = cli("tone", CALIBRATOR, "--expected", "1 kHz", "--json")
    assert r.code == 0, r.err
    assert tone_of(piezo.open(CALIBRATOR), expected_hz=1000.0).to_dict() == r.json()


def test_calibrate(cli):
    r = cli("calibrate", CALIBRATOR, "--json")
    assert r.code == 0, r.err
    calibration = calibration_of(piezo.open(CALIBRATOR), level_db=94.0, expected_hz=1000.0)
    assert calibration.to_dict() == r.json()
    # The demo film element was made with 8.5 mV/Pa (piezo.demo.scenes). Its residual
    # (noise and distortion) is about 48 dB below the tone: even all inside the tone's
    # band it would move the RMS by 10^(-48/10)/2 ≈ 1e-5, so 0.1 % is generous, while a
    # chain error (gain or full scale not undone) would be off by a factor of 2 or 10.
    assert calibration.result.sensitivity_mv_per_pa == pytest.approx(8.5, rel=1e-3)


def test_tone_of_the_pump_blade_pass(cli, pump):
    r = cli("tone", PUMP, "--channel", "0", "--expected", "173.25 Hz", "--json")
    assert r.code == 0, r.err
    src = piezo.open(PUMP, channels=[0])
    assert tone_of(src, expected_hz=173.25).to_dict() == r.json()


def test_check(cli):
    r = cli("check", PUMP, "--json")
    # Channel 1 of the pump bench saturates in bursts (see piezo.demo.scenes): exit 1.
    assert r.code == 1, r.err
    checked = check_of(piezo.open(PUMP, allow_time_gaps=True))
    assert checked.failed
    assert checked.to_dict() == r.json()


# --------------------------------------------------------------------------------------
# Response, front-end, batch

VALVE = RECORDINGS / "valve-pickup-nominal.flac"
SWEEP = RECORDINGS / "valve-pickup-sweep.stimulus.toml"
GOLDEN = RECORDINGS / "valve-pickup-golden.csv"


def test_sweep_analyze(cli):
    r = cli("sweep", "analyze", VALVE, "--stimulus", SWEEP, "--golden", GOLDEN, "--json")
    assert r.code == 0, r.err
    sweep = stimulus_from_toml(SWEEP.read_text(encoding="utf-8"), source=str(SWEEP))
    golden = parse_response_csv(GOLDEN.read_text(encoding="utf-8"), source=str(GOLDEN))
    analysis = sweep_response_of(
        piezo.open(VALVE),
        sweep,
        stimulus=str(SWEEP),
        golden=golden,
        golden_file=str(GOLDEN),
    )
    assert analysis.to_dict() == r.json()


def test_response_h1(cli):
    path = RECORDINGS / "valve-pickup-noise-2ch.flac"
    r = cli("response", path, "--reference-channel", "0", "--json")
    assert r.code == 0, r.err
    assert h1_response_of(piezo.open(path), reference_channel=0).to_dict() == r.json()


@pytest.mark.parametrize("design", sorted((RECORDINGS / "designs").glob("*.toml")), ids=str)
def test_frontend(cli, design):
    r = cli("frontend", design, "--json")
    assert r.code == 0, r.err
    assert study_frontend(design).to_dict() == r.json()


def test_frontend_vary(cli):
    design = RECORDINGS / "designs" / "pump-disc-charge.toml"
    r = cli("frontend", design, "--vary", "feedback_resistance=100M:10G:3", "--json")
    assert r.code == 0, r.err
    values = vary_values("feedback_resistance", "100M", "10G", 3)
    study = study_frontend(design, vary=("feedback_resistance", values))
    assert study.to_dict() == r.json()


def test_batch_verdicts(cli, tmp_path):
    # Part of the PD27 lot: good units, the clipped 24107, the warned 24118 and the
    # corrupt file 24136 (faults of piezo.demo.lot), so pass, warn, fail and not
    # evaluable are all compared.
    names = ("24101", "24102", "24107", "24118", "24136")
    lot = [RECORDINGS / "pd27-lot" / f"PD27-{n}.flac" for n in names]
    spec = RECORDINGS / "pd27-spec.toml"
    r = cli("batch", *lot, "--spec", spec, "--out", tmp_path / "cli", "--workers", "1", "--json")
    assert r.code == 1, r.err
    verdicts = judge_lot(lot, spec, out=tmp_path / "cli", workers=1)
    doc = verdicts.to_dict()
    assert doc == r.json()
    assert doc["captures"] == 5
    assert {v for v, n in doc["counts"].items() if n} == {"pass", "warn", "fail", "not evaluable"}


# --------------------------------------------------------------------------------------
# docs/library.md: every example on the page runs and shows what it prints.


def test_the_library_page_runs(monkeypatch):
    # The page's examples use paths from the repository root, as a reader types them.
    monkeypatch.chdir(REPO)
    text = (DOCS / "library.md").read_text(encoding="utf-8")
    test = doctest.DocTestParser().get_doctest(text, {}, "docs/library.md", str(DOCS), 0)
    assert len(test.examples) > 30  # the parser found the examples
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    out: list[str] = []
    runner.run(test, out=out.append)
    assert runner.failures == 0, "".join(out)


def test_the_library_page_is_linked_from_the_readme():
    assert "(docs/library.md)" in (REPO / "README.md").read_text(encoding="utf-8")
