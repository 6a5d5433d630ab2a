"""Batch lines in their own quantity: accelerometers, hydrophones, force sensors.

The captures are made here from a known sensitivity and a known stimulus (the
physics of a linear sensor: volts = sensitivity × quantity), so each metric is checked
against the truth it was built from. Constants: g = 9.80665 m/s² exactly (3rd CGPM 1901,
ISO 80000-3:2019); level references of ISO 1683:2015 (1 µm/s², 1 µPa in water).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import soundfile as sf

from piezo.batch.derive import derive_limits, derived_spec_text
from piezo.batch.runner import evaluate_capture
from piezo.batch.spec import parse_spec
from piezo.errors import SpecError
from piezo.response.stimulus import sweep_signal, sweep_spec

G = 9.80665  # m/s², standard acceleration of gravity (ISO 80000-3:2019)
FS = 16000.0
GAIN = 10.0  # 20 dB
FULL_SCALE_V = 2.0
SWEEP = {"start_hz": 20.0, "stop_hz": 5000.0, "duration_s": 0.5}
QUIET_S = 0.1

ACCEL_SPEC = f"""
[spec]
name = "accelerometer line (test)"
[capture]
quantity = "acceleration"
full_scale_v = {FULL_SCALE_V}
gain = "20 dB"
[stimulus]
kind = "sweep"
start_hz = {SWEEP["start_hz"]}
stop_hz = {SWEEP["stop_hz"]}
duration_s = {SWEEP["duration_s"]}
silence_before_s = {QUIET_S}
silence_after_s = {QUIET_S}
level = "1 g"
[metrics.sensitivity]
reference_hz = 1000
nominal = "10 mV/g"
[[metrics.sensitivity.limits]]
lower = "9.5 mV/g"
upper = "10.5 mV/g"
[[metrics.sensitivity.limits]]
lower_rel = -0.3
upper_rel = 0.3
severity = "warn"
[metrics.self_noise]
weighting = "Z"
"""


def _sweep():
    return sweep_spec(
        SWEEP["start_hz"],
        SWEEP["stop_hz"],
        SWEEP["duration_s"],
        FS,
        silence_before_s=QUIET_S,
        silence_after_s=QUIET_S,
    )


def sweep_capture(path, v_per_unit, level, *, envelope_db=None, noise_v=0.0, seed=1):
    """A flat sensor of ``v_per_unit`` (V per SI unit) swept at ``level`` RMS (SI unit).

    ``envelope_db(f)`` (dB) scales the stimulus at the sweep's instantaneous frequency
    f1·e^(R t / T) (Farina 2000): a fixture whose level varies along the sweep.
    """
    spec = _sweep()
    x = sweep_signal(spec)
    stimulus = x * (math.sqrt(2.0) * level / spec.amplitude)  # RMS level over the sweep
    if envelope_db is not None:
        t = (np.arange(x.size) - spec.silence_before_frames) / FS
        rate = math.log(spec.stop_hz / spec.start_hz) / spec.duration_s
        f = spec.start_hz * np.exp(rate * np.clip(t, 0.0, spec.duration_s))
        stimulus = stimulus * 10.0 ** (envelope_db(f) / 20.0)
    volts = v_per_unit * stimulus
    volts = volts + noise_v * np.random.default_rng(seed).standard_normal(volts.size)
    sf.write(path, volts * GAIN / FULL_SCALE_V, int(FS), subtype="FLOAT")
    return str(path)


def accel_sweep_capture(path, mv_per_g, **kwargs):
    """A flat accelerometer of ``mv_per_g`` on a shaker swept at 1 g RMS."""
    return sweep_capture(path, mv_per_g * 1e-3 / G, G, **kwargs)


def _db(x):
    return 20.0 * math.log10(x)


def test_an_accelerometer_lot_reads_its_sensitivity_per_g(tmp_path):
    spec = parse_spec(ACCEL_SPEC, source="accel.toml")
    sens = spec.metrics[0]
    assert sens.unit == "dB re 1 V/(m/s²)"
    # Limits written in mV/g are dB re 1 V/(m/s²): 10 mV/g = 1.0197 mV/(m/s²).
    assert sens.limits[0].lower == pytest.approx(_db(9.5e-3 / G), abs=1e-12)
    assert sens.params["nominal"] == pytest.approx(_db(10e-3 / G), abs=1e-12)
    assert spec.stimulus.level_value == G and spec.stimulus.level_pa is None
    rows = {
        mv: evaluate_capture(
            accel_sweep_capture(tmp_path / f"u{mv}.wav", mv, noise_v=2e-6, seed=int(mv)),
            spec,
        )
        for mv in (9.0, 9.9, 10.2, 11.0)
    }
    for mv, row in rows.items():
        # A flat gain through the swept-sine analysis is exact to rounding (its loopback
        # reads 0.000 dB); what remains is the added noise, 74 dB below the 10 mV signal,
        # and float32 storage (-150 dB). 0.05 dB (0.6 %) is far above both and 30 times
        # below the spread of this lot, so a level read in m/s² instead of g (19.8 dB) or
        # in dB re 1 V/Pa cannot pass.
        assert row["metrics"]["sensitivity"] == pytest.approx(_db(mv * 1e-3 / G), abs=0.05)
    assert [rows[mv]["verdict"] for mv in rows] == ["fail", "pass", "pass", "fail"]
    # The limit message gives value and limit in dB and in the trade form; the limit
    # reads as the spec wrote it (10.5 mV/g).
    message = rows[11.0]["failed_limits"][0]
    upper = f"{_db(10.5e-3 / G):.6g}"  # 10.5 mV/g: -59.4066 dB re 1 V/(m/s²)
    assert re.fullmatch(
        r"sensitivity = -59\.0\d* dB re 1 V/\(m/s²\) \(1\.12\d mV/\(m/s²\) \(1[01]\.\d\d mV/g\)\) "
        rf"above upper limit {upper} \(1\.071 mV/\(m/s²\) \(10\.50 mV/g\)\) \[fail\]",
        message,
    ), message
    assert sens.trade_form(rows[9.9]["metrics"]["sensitivity"]).endswith(" mV/g)")
    # Self-noise is referred to the input in the quantity: 2 µV over 1.0095 mV/(m/s²) is
    # 1.98 mm/s², 65.9 dB re 1 µm/s². The RMS of 1440 quiet samples spreads by
    # 1/√(2·1440) = 1.9 % (0.16 dB): 0.5 dB is about 3 σ.
    assert spec.metrics[1].unit == "dB re 1 µm/s²"
    s = 9.9e-3 / G
    assert rows[9.9]["metrics"]["self_noise"] == pytest.approx(_db(2e-6 / s / 1e-6), abs=0.5)


def test_a_tone_line_at_the_calibration_frequency(tmp_path):
    # 159.155 Hz = 1000/(2π): acceleration, velocity and displacement read the same
    # numbers there (common practice of calibration exciters). 140 dB re 1 µm/s² is
    # 10 m/s² RMS (ISO 1683 reference).
    text = ACCEL_SPEC.split("[stimulus]")[0] + (
        '[stimulus]\nkind = "tone"\nfrequency_hz = 159.155\nlevel_db = 140.0\n'
        "silence_before_s = 0.1\n[metrics.sensitivity]\n"
    )
    spec = parse_spec(text)
    assert spec.stimulus.level_value == pytest.approx(10.0, rel=1e-12)
    t = np.arange(int(FS)) / FS
    accel = 10.0 * math.sqrt(2.0) * np.sin(2 * math.pi * 159.155 * t) * (t >= 0.1)
    path = tmp_path / "tone.wav"
    sf.write(path, (5e-3 / G) * accel * GAIN / FULL_SCALE_V, int(FS), subtype="FLOAT")
    row = evaluate_capture(str(path), spec)
    # The tone line estimator reads a steady, noise-free sine's RMS to far better than
    # 0.01 dB (mean square over the window's main lobe); 0.02 dB leaves room for the
    # window's leakage of the onset.
    assert row["metrics"]["sensitivity"] == pytest.approx(_db(5e-3 / G), abs=0.02)


def test_the_reference_sensors_chart_is_undone(tmp_path):
    # The line holds its reference accelerometer's reading at 1 g. The reference's chart
    # reads 0 dB at 10 Hz rising to +2 dB at 10 kHz (linear over log f): where it reads
    # high, the table really moves less, by the same dB. The unit's true sensitivity is
    # then S_ref(f)/S_ref · V/level (ISO 16063-21:2003, comparison with a reference).
    (tmp_path / "ref-chart.csv").write_text(
        "# reference accelerometer chart (test)\nfrequency_hz,relative_db\n10,0\n10000,2\n",
        encoding="utf-8",
    )

    def chart_db(f):
        return np.interp(np.log10(f), [1.0, 4.0], [0.0, 2.0])

    text = (
        ACCEL_SPEC.replace("[stimulus]", 'response_curve = "ref-chart.csv"\n[stimulus]')
        + "[metrics.corner]\n"
    )
    with_chart = parse_spec(text, base_dir=tmp_path)
    without = parse_spec(ACCEL_SPEC)
    path = accel_sweep_capture(tmp_path / "u.wav", 10.0, envelope_db=lambda f: -chart_db(f))
    row = evaluate_capture(path, with_chart, with_report=True)
    # The chart's 1.33 dB at 1 kHz is undone: the unit reads its true 10 mV/g. The
    # envelope changes by 0.67 dB per decade, so slowly that the sweep analysis reads it
    # as the response at the instantaneous frequency; 0.05 dB is 25 times below the
    # chart's effect, so a chart ignored or applied with the wrong sign fails.
    assert row["metrics"]["sensitivity"] == pytest.approx(_db(10e-3 / G), abs=0.05)
    # The report's response curve is in the same unit, corrected the same way.
    curve = row["_report"]["response"]
    assert curve["unit"] == "dB re 1 V/(m/s²)"
    at_1k = curve["magnitude_db"][curve["frequency_hz"].index(1000.0)]
    assert at_1k == pytest.approx(_db(10e-3 / G), abs=0.05)
    plain = evaluate_capture(path, without)["metrics"]["sensitivity"]
    assert plain == pytest.approx(_db(10e-3 / G) - 4.0 / 3.0, abs=0.05)
    # The chart's data is part of the spec's hash: another chart, other results.
    assert with_chart.sha256 != without.sha256
    # A chart that stops below the reference frequency is held at its end value (+1 dB
    # instead of +1.33 dB: the unit reads 9.62 mV/g, above 9.4), and the messages say so.
    (tmp_path / "short.csv").write_text(
        "frequency_hz,relative_db\n10,0\n500,1\n", encoding="utf-8"
    )
    short = parse_spec(
        text.replace("ref-chart.csv", "short.csv")
        .replace('"10.5 mV/g"', '"9.4 mV/g"')
        .replace('"9.5 mV/g"', '"9.0 mV/g"'),
        base_dir=tmp_path,
    )
    message = evaluate_capture(path, short)["failed_limits"][0]
    assert message.endswith(
        f"reference chart {tmp_path / 'short.csv'}: chart covers 10 Hz to 500 Hz; end values "
        "held above) [fail]"
    )


def test_a_hydrophone_line_in_water(tmp_path):
    # -196 dB re 1 V/µPa is -76 dB re 1 V/Pa (0.1585 mV/Pa); a 150 dB re 1 µPa tone is
    # 31.62 Pa RMS (ISO 1683:2015: 1 µPa in liquids).
    text = """
[capture]
reference = "1 uPa"
[stimulus]
kind = "tone"
frequency_hz = 1000
level_db = 150.0
[metrics.sensitivity]
nominal = "-196 dB re 1 V/µPa"
lower_rel = -1.0
upper_rel = 1.0
[metrics.self_noise]
segment_s = [0.0, 0.05]
weighting = "Z"
"""
    spec = parse_spec(text)
    sens = spec.metrics[0]
    assert sens.unit == "dB re 1 V/Pa" and sens.params["nominal"] == pytest.approx(-76.0)
    assert spec.metrics[1].unit == "dB re 1 µPa"
    assert spec.stimulus.level_pa == pytest.approx(10 ** (150 / 20) * 1e-6, rel=1e-12)
    t = np.arange(int(FS)) / FS
    rng = np.random.default_rng(4)
    volts = 10 ** (-76 / 20) * 31.6228 * math.sqrt(2) * np.sin(2 * math.pi * 1000 * t)
    volts = volts * (t >= 0.1) + 1e-6 * rng.standard_normal(t.size)
    path = tmp_path / "hydrophone.wav"
    sf.write(path, volts, int(FS), subtype="FLOAT")
    row = evaluate_capture(str(path), spec)
    # 31.6228 Pa is 150 dB re 1 µPa to 2e-6 dB; the tone estimator as above (0.02 dB).
    assert row["metrics"]["sensitivity"] == pytest.approx(-76.0, abs=0.02)
    assert sens.trade_form(row["metrics"]["sensitivity"]).endswith(" dB re 1 V/µPa")
    assert sens.trade_form(-76.0) == "-196.00 dB re 1 V/µPa"
    # Self-noise in water: 1 µV over 0.1585 mV/Pa = 6.3 mPa = 76.0 dB re 1 µPa; 800
    # samples spread by 2.5 % (0.2 dB): 0.7 dB is about 3.5 σ.
    assert row["metrics"]["self_noise"] == pytest.approx(
        _db(1e-6 / 10 ** (-76 / 20) / 1e-6), abs=0.7
    )


def test_a_force_line_on_a_charge_amplifier_reads_pc_per_n(tmp_path):
    # Force sensors of 3.7, 4.0 and 4.3 pC/N on a 1 mV/pC charge amplifier: the metric is
    # the voltage sensitivity with the amplifier (4 pC/N x 1 mV/pC = 4 mV/N,
    # -47.96 dB re 1 V/N), its trade form the charge sensitivity.
    text = (
        ACCEL_SPEC.replace(
            'quantity = "acceleration"', 'quantity = "force"\ncharge_gain = "1 mV/pC"'
        )
        .replace('level = "1 g"', 'level = "10 N"')
        .replace('"10 mV/g"', '"4 pC/N"')
        .replace('"9.5 mV/g"', '"3.8 pC/N"')
        .replace('"10.5 mV/g"', '"4.2 mV/N"')  # a limit in volts per unit is taken too
    )
    spec = parse_spec(text)
    sens = spec.metrics[0]
    assert sens.unit == "dB re 1 V/N"
    assert sens.params["nominal"] == pytest.approx(_db(4e-3), abs=1e-12)
    assert (sens.limits[0].lower, sens.limits[0].upper) == pytest.approx(
        (_db(3.8e-3), _db(4.2e-3))
    )
    verdicts = []
    for pc in (3.7, 4.0, 4.3):
        path = sweep_capture(tmp_path / f"f{pc}.wav", pc * 1e-12 * 1e9, 10.0, noise_v=2e-6)
        row = evaluate_capture(path, spec)
        # As for the accelerometers: a flat gain, noise 86 dB below the 40 mV signal.
        assert row["metrics"]["sensitivity"] == pytest.approx(_db(pc * 1e-3), abs=0.05)
        form = sens.trade_form(row["metrics"]["sensitivity"])
        assert form.endswith(" pC/N") and float(form.split()[0]) == pytest.approx(pc, rel=0.006)
        verdicts.append(row["verdict"])
    assert verdicts == ["fail", "pass", "fail"]


BAD_SPECS = [
    # (replace, by, key, problem)
    (
        'weighting = "Z"',
        'weighting = "A"',
        "metrics.self_noise.weighting",
        "the A and C weightings (IEC 61672-1) are for sound pressure",
    ),
    (
        'level = "1 g"',
        'level = "1 Pa"',
        "stimulus.level",
        "'1 Pa' is a pressure (Pa), not an acceleration (m/s²)",
    ),
    ('level = "1 g"', 'level = "1 gee"', "stimulus.level", "cannot read '1 gee'"),
    ('level = "1 g"', 'level = "-1 g"', "stimulus.level", "must be positive"),
    (
        'level = "1 g"',
        "level_pa = 1.0",
        "stimulus.level_pa",
        "is a sound pressure, but capture.quantity is acceleration",
    ),
    ('level = "1 g"', 'level = "1 g"\nlevel_db = 120', "stimulus.level_db", "give one of"),
    (
        'lower = "9.5 mV/g"',
        'lower = "9.5 mV/Pa"',
        "metrics.sensitivity.limits[0].lower",
        "'9.5 mV/Pa' is a pressure sensitivity, not acceleration",
    ),
    (
        'nominal = "10 mV/g"',
        'nominal = "4 pC/g"',
        "metrics.sensitivity.nominal",
        "is a charge sensitivity",
    ),
    (
        'quantity = "acceleration"',
        'quantity = "speed"',
        "capture.quantity",
        "expected one of pressure, acceleration, velocity, displacement, force",
    ),
    (
        'quantity = "acceleration"',
        'quantity = "acceleration"\nreference = "1 uPa"',
        "capture.reference",
        "only sound pressure has a choice of reference",
    ),
]


@pytest.mark.parametrize(("old", "new", "key", "problem"), BAD_SPECS)
def test_a_unit_that_does_not_fit_the_quantity_is_refused(old, new, key, problem):
    text = ACCEL_SPEC.replace(old, new)
    assert text != ACCEL_SPEC
    line = next(
        i
        for i, ln in enumerate(text.splitlines(), 1)
        if ln.startswith(key.split(".")[-1].split("[")[0])
    )
    with pytest.raises(SpecError) as info:
        parse_spec(text, source="accel.toml")
    message = str(info.value)
    assert message.startswith(f"accel.toml: line {line}: {key}: ")
    assert problem in message


def test_noise_of_a_vibration_line_is_unweighted_by_default():
    # IEC 61672-1 weights sound: a self-noise left without a weighting is Z, not A.
    spec = parse_spec(ACCEL_SPEC.replace('weighting = "Z"\n', ""))
    assert spec.metrics[1].params["weighting"] == "Z"


def test_water_and_air_are_the_only_pressure_references():
    text = '[capture]\nreference = "2 uPa"\n[stimulus]\nkind = "noise"\n[metrics.clipping]\n'
    with pytest.raises(SpecError, match=r"line 2: capture.reference: expected \"20 uPa\""):
        parse_spec(text)


def test_a_chart_needs_a_stimulus_level(tmp_path):
    (tmp_path / "c.csv").write_text("frequency_hz,relative_db\n10,0\n1000,1\n", encoding="utf-8")
    text = '[capture]\nresponse_curve = "c.csv"\n[stimulus]\nkind = "noise"\n[metrics.clipping]\n'
    with pytest.raises(SpecError, match=r"line 2: capture.response_curve: .* has none"):
        parse_spec(text, base_dir=tmp_path)
    (tmp_path / "c.csv").write_text("frequency_hz,relative_db\n10,0\n5,1\n", encoding="utf-8")
    with pytest.raises(SpecError, match=r"capture.response_curve: line 3: frequencies must"):
        parse_spec(text, base_dir=tmp_path)


def test_derived_limits_keep_the_quantity_and_the_chart(tmp_path):
    (tmp_path / "ref.csv").write_text(
        "frequency_hz,relative_db\n10,0\n10000,1\n", encoding="utf-8"
    )
    base = parse_spec(
        ACCEL_SPEC.replace("[stimulus]", 'response_curve = "ref.csv"\n[stimulus]'),
        base_dir=tmp_path,
    )
    rows = [
        {"file": f"{i}.wav", "metrics": {"sensitivity": -59.8 + 0.1 * i, "self_noise": 60.0 + i}}
        for i in range(5)
    ]
    derived, notes = derive_limits(rows, base, k=3.0)
    out = tmp_path / "sub" / "derived.toml"
    text = derived_spec_text(
        base,
        derived,
        notes,
        k=3.0,
        warn_k=None,
        golden_source="golden/",
        base_source="base.toml",
        out_path=out,
    )
    out.parent.mkdir()
    again = parse_spec(text, base_dir=out.parent)
    assert again.measurand == base.measurand
    assert again.stimulus.level_value == G
    assert again.metrics[0].unit == "dB re 1 V/(m/s²)"
    assert np.array_equal(again.response_curve.relative_db, base.response_curve.relative_db)
