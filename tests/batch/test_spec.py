"""Limit spec parsing and validation (piezo.batch.spec)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from piezo.batch.spec import METRIC_KINDS, load_spec, parse_spec
from piezo.errors import SpecError

DOCS = Path(__file__).resolve().parents[2] / "docs" / "batch.md"

SWEEP = """\
[spec]
name = "disc mic"
serial_pattern = 'PD-(?P<serial>[0-9]{5})'
serial_required = true

[capture]
channel = 0
full_scale_v = 2.5
gain = "20 dB"

[stimulus]
kind = "sweep"
start_hz = 20
stop_hz = 10000
duration_s = 1.0
level_db = 94.0
silence_before_s = 0.2

[metrics.sensitivity]
reference_hz = 1000
nominal = -42.0

[[metrics.sensitivity.limits]]
lower_rel = -3.0
upper_rel = 3.0

[[metrics.sensitivity.limits]]
lower_rel = -2.0
upper_rel = 2.0
severity = "warn"

[metrics.corner]
upper = 120.0

[metrics.thd_1k]
kind = "thd"
frequency_hz = 1000
upper = 3.0

[metrics.mask]
kind = "response_mask"
frequency_hz = [100, 1000, 5000]
lower_db = [-8, -1, -2]
upper_db = [2, 1, 6]
relative_to_hz = 1000
severity = "warn"

[metrics.noise_floor]
weighting = "A"
upper = -90.0
"""


def test_full_spec_parses_with_resolved_limits():
    spec = parse_spec(SWEEP, source="s.toml")
    assert spec.name == "disc mic"
    assert spec.full_scale_v == 2.5
    # 20 dB voltage gain is a ratio of 10 (20 lg 10 = 20, IEC 60027-3 field quantity).
    assert spec.gain == pytest.approx(10.0, rel=1e-12)
    assert spec.stimulus.kind == "sweep"
    # 94 dB re 20 µPa = 1.00237 Pa (20e-6 · 10^(94/20), ISO 1683:2015 reference).
    assert spec.stimulus.level_pa == pytest.approx(1.00237, rel=1e-5)
    names = [m.name for m in spec.metrics]
    assert names == ["sensitivity", "corner", "thd_1k", "mask", "noise_floor"]
    sens = spec.metrics[0]
    assert [(lim.lower, lim.upper, lim.severity) for lim in sens.limits] == [
        (-45.0, -39.0, "fail"),
        (-44.0, -40.0, "warn"),
    ]
    assert sens.fail_limits() == (-45.0, -39.0)
    assert spec.metrics[1].limits[0].lower is None
    mask = spec.metrics[3]
    assert mask.kind == "response_mask" and mask.unit == "dB margin"
    assert [(lim.lower, lim.upper, lim.severity) for lim in mask.limits] == [(0.0, None, "warn")]
    assert spec.metrics[2].params["frequency_hz"] == 1000.0


def test_serial_from_name():
    spec = parse_spec(SWEEP)
    assert spec.serial_from_name("lot/3/PD-00417_sweep.flac") == "00417"
    assert spec.serial_from_name("lot/unit.flac") is None
    unnamed = parse_spec(SWEEP.replace("(?P<serial>[0-9]{5})", "([0-9]{5})"))
    assert unnamed.serial_from_name("x/PD-12345.wav") == "12345"


def test_spec_hash_ignores_comments_but_not_limits():
    spec = parse_spec(SWEEP)
    commented = parse_spec("# comment\n" + SWEEP.replace("upper = 120.0", "upper = 120.0 # Hz"))
    assert commented.sha256 == spec.sha256
    changed = parse_spec(SWEEP.replace("upper = 120.0", "upper = 121.0"))
    assert changed.sha256 != spec.sha256


def _line_of(text: str, needle: str) -> int:
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


@pytest.mark.parametrize(
    ("old", "new", "needle", "key", "problem"),
    [
        ("upper = 120.0", "uper = 120.0", "uper = 120.0", "metrics.corner.uper", "unknown key"),
        (
            'severity = "warn"\n\n[metrics.corner]',
            'severity = "warning"\n\n[metrics.corner]',
            'severity = "warning"',
            r"metrics.sensitivity.limits\[1\].severity",
            'expected "fail" or "warn"',
        ),
        (
            "full_scale_v = 2.5",
            "full_scale_v = -2.5",
            "full_scale_v",
            "capture.full_scale_v",
            "must be positive",
        ),
        ('gain = "20 dB"', 'gain = "20 dBx"', "gain =", "capture.gain", "cannot read gain"),
        (
            "upper_db = [2, 1, 6]",
            "upper_db = [2, 1]",
            "upper_db",
            "metrics.mask.upper_db",
            "has 2 values but frequency_hz has 3",
        ),
        (
            "frequency_hz = [100, 1000, 5000]",
            "frequency_hz = [100, 100000, 5000]",
            "[metrics.mask]",
            "metrics.mask",
            "outside the sweep range",
        ),
        (
            "upper = 120.0",
            'upper = "120 Hz"',
            'upper = "120 Hz"',
            "metrics.corner.upper",
            "expected a number",
        ),
        (
            "serial_pattern = 'PD-(?P<serial>[0-9]{5})'",
            "serial_pattern = 'PD-([0-9]'",
            "serial_pattern",
            "spec.serial_pattern",
            "invalid regular expression",
        ),
        (
            'kind = "thd"',
            'kind = "thdd"',
            'kind = "thdd"',
            "metrics.thd_1k.kind",
            "unknown metric kind",
        ),
        (
            "lower_rel = -3.0\nupper_rel = 3.0",
            "lower_rel = 3.0\nupper_rel = -3.0",
            "[[metrics.sensitivity.limits]]",
            r"metrics.sensitivity.limits\[0\]",
            "must exceed lower",
        ),
    ],
)
def test_semantic_errors_name_line_and_key(old, new, needle, key, problem):
    text = SWEEP.replace(old, new, 1)
    assert text != SWEEP
    line = _line_of(text, needle)
    with pytest.raises(SpecError, match=rf"^s\.toml: line {line}: {key}: .*{re.escape(problem)}"):
        parse_spec(text, source="s.toml")


def test_toml_syntax_error_names_line():
    text = SWEEP.replace("upper = 120.0", "upper = = 120.0")
    line = _line_of(text, "upper = = 120.0")
    with pytest.raises(SpecError, match=rf"^s\.toml: line {line}: TOML syntax error"):
        parse_spec(text, source="s.toml")


def test_metric_needing_other_stimulus_is_rejected():
    extra = '[metrics.thdn]\nkind = "thd_n"\n\n[metrics.corner]'
    text = SWEEP.replace("[metrics.corner]", extra)
    with pytest.raises(SpecError, match=r"line \d+: metrics.thdn: .*needs tone"):
        parse_spec(text)


def test_tone_metric_at_other_frequency_is_rejected():
    text = """
[stimulus]
kind = "tone"
frequency_hz = 1000
level_pa = 1.0
[metrics.thd]
frequency_hz = 250
upper = 1
"""
    with pytest.raises(SpecError, match=r"line 7: metrics.thd.frequency_hz: 250 Hz differs"):
        parse_spec(text)


def test_level_needed_for_sensitivity():
    text = SWEEP.replace("level_db = 94.0\n", "")
    with pytest.raises(SpecError, match=r"metrics.sensitivity: .*needs the stimulus level"):
        parse_spec(text)


def test_missing_stimulus_and_no_metrics():
    with pytest.raises(SpecError, match=r"stimulus: missing table"):
        parse_spec("[spec]\nname = 'x'\n")
    with pytest.raises(SpecError, match=r"line 1: metrics: no metrics"):
        parse_spec("[metrics]\n[stimulus]\nkind = 'noise'\n")


def test_shorthand_and_limits_table_together_is_rejected():
    text = SWEEP.replace("nominal = -42.0\n", "nominal = -42.0\nlower = -50\n")
    with pytest.raises(SpecError, match=r"metrics.sensitivity.limits: give the limits either"):
        parse_spec(text)


def test_mask_without_bounds_only_for_derive():
    text = SWEEP.replace("lower_db = [-8, -1, -2]\nupper_db = [2, 1, 6]\n", "")
    with pytest.raises(SpecError, match=r"metrics.mask: a mask needs lower_db"):
        parse_spec(text)
    assert parse_spec(text, for_derive=True).metrics[3].params["frequency_hz"] == [
        100.0,
        1000.0,
        5000.0,
    ]


def test_golden_file_loaded_relative_to_spec(tmp_path):
    (tmp_path / "golden.csv").write_text(
        "# golden\nfrequency_hz,magnitude_db\n100,-44\n1000,-42\n5000,-41\n", encoding="utf-8"
    )
    text = SWEEP + '\n[metrics.dev]\nkind = "golden_deviation"\ngolden = "golden.csv"\n'
    text += "band_hz = [100, 5000]\nupper = 1.5\n"
    (tmp_path / "s.toml").write_text(text, encoding="utf-8")
    spec = load_spec(tmp_path / "s.toml")
    dev = spec.metrics[-1]
    assert dev.params["golden_data"]["magnitude_db"] == [-44.0, -42.0, -41.0]
    # The golden data is part of the hash: a changed golden file changes the spec.
    (tmp_path / "golden.csv").write_text(
        "frequency_hz,magnitude_db\n100,-44\n1000,-42\n5000,-40\n", encoding="utf-8"
    )
    assert load_spec(tmp_path / "s.toml").sha256 != spec.sha256
    (tmp_path / "golden.csv").unlink()
    line = _line_of(text, 'golden = "golden.csv"')
    with pytest.raises(SpecError, match=rf"line {line}: metrics.dev.golden: cannot read golden"):
        load_spec(tmp_path / "s.toml")


def test_unreadable_spec_file(tmp_path):
    with pytest.raises(SpecError, match=r"cannot read limit spec"):
        load_spec(tmp_path / "missing.toml")


def _doc_examples() -> list[str]:
    text = DOCS.read_text(encoding="utf-8")
    return re.findall(r"```toml\n(.*?)```", text, flags=re.S)


def test_documented_examples_parse(tmp_path):
    examples = _doc_examples()
    assert examples, "docs/batch.md has no ```toml example"
    for example in examples:
        (tmp_path / "golden.csv").write_text(
            "frequency_hz,magnitude_db\n20,-50\n1000,-42\n10000,-40\n", encoding="utf-8"
        )
        spec = parse_spec(example, source="docs", base_dir=tmp_path)
        assert spec.metrics


def test_every_metric_kind_is_documented():
    text = DOCS.read_text(encoding="utf-8")
    for kind in METRIC_KINDS:
        assert f"`{kind}`" in text, kind
