"""``piezo report`` of a file whose channels have chains of their own (issue #13, item 2).

Channel 0 is a measurement microphone (pressure, levels dB re 20 µPa), channel 1 an
accelerometer (acceleration, levels dB re 1 µm/s²), set by a profile's ``[channel.N]``
sections. Before the report honoured each channel's chain such a file was refused
("channels 0 and 1 differ in chain ... analyse them one at a time (--channel N)").
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import soundfile as sf

from piezo.levels.summary import LEVEL_KEYS, levels_of
from tests.chromium import CHROMIUM, image_layout
from tests.report.test_report import _schema_validator

FS = 48000
G_M_PER_S2 = 9.80665  # standard acceleration of gravity (3rd CGPM, 1901; ISO 80000-3)

# ISO 1683:2015, Table 1 (preferred reference values for levels): sound pressure in gases
# 20 µPa, acceleration 1 µm/s².
REF_AIR_PA = 20e-6
REF_ACCELERATION_M_PER_S2 = 1e-6

MIC_V_PER_PA = 0.05  # 50 mV/Pa
ACC_V_PER_G = 0.01  # 10 mV/g
TONE_HZ = (1000.0, 160.0)  # microphone, accelerometer
RMS = (1.0, 1.0)  # 1 Pa, 1 g


@pytest.fixture(scope="module")
def mixed(tmp_path_factory):
    """A two-channel FLOAT file, its profile, and the report written by the command."""
    from piezo.cli import main

    root = tmp_path_factory.mktemp("mixed")
    t = np.arange(2 * FS) / FS
    noise = np.random.default_rng(13).standard_normal((t.size, 2)) * 1e-4  # -80 dB re tone
    mic_v = MIC_V_PER_PA * RMS[0] * math.sqrt(2) * np.sin(2 * np.pi * TONE_HZ[0] * t)
    acc_v = ACC_V_PER_G * RMS[1] * math.sqrt(2) * np.sin(2 * np.pi * TONE_HZ[1] * t)
    path = root / "bench.wav"
    samples = np.column_stack([mic_v, acc_v]) + noise * [MIC_V_PER_PA, ACC_V_PER_G]
    sf.write(str(path), samples, FS, subtype="FLOAT")
    profile = root / "bench-profile.toml"
    profile.write_text(
        '[channel.0]\nname = "measurement microphone (test)"\nserial = "M-1"\n'
        'sensitivity = "50 mV/Pa"\n\n'
        '[channel.1]\nname = "accelerometer (test)"\nserial = "A-2"\n'
        'sensitivity = "10 mV/g"\n',
        encoding="utf-8",
    )
    out = root / "out"
    try:
        main(["report", str(path), "--out", str(out), "--profile", str(profile)])
    except SystemExit as exc:
        assert exc.code in (0, None)
    doc = json.loads((out / "bench.report.json").read_text(encoding="utf-8"))
    page = (out / "bench.report.html").read_text(encoding="utf-8")
    return path, profile, doc, page


def _source(path, profile, channels=None):
    import piezo

    return piezo.open(path, profile=profile, channels=channels)


def test_each_channel_states_its_own_chain(mixed):
    _, _, doc, _ = mixed
    chain = doc["chain"]
    assert chain["unit"] is None and chain["level_unit"] is None
    assert chain["shared"] is False
    mic, acc = chain["channels"]
    assert (mic["quantity"], mic["unit"], mic["level_unit"]) == ("pressure", "Pa", "dB re 20 µPa")
    assert mic["reference_pa"] == pytest.approx(REF_AIR_PA, rel=1e-12)
    assert (acc["quantity"], acc["unit"], acc["level_unit"]) == (
        "acceleration",
        "m/s²",
        "dB re 1 µm/s²",
    )
    assert acc["reference_m_per_s2"] == pytest.approx(REF_ACCELERATION_M_PER_S2, rel=1e-12)
    assert "reference_pa" not in acc and "reference_m_per_s2" not in mic
    # Sensitivities as given, each from its own [channel.N] section.
    assert mic["sensitivity_v_per_unit"] == pytest.approx(MIC_V_PER_PA, rel=1e-12)
    assert acc["sensitivity_v_per_unit"] == pytest.approx(ACC_V_PER_G / G_M_PER_S2, rel=1e-12)
    assert mic["provenance"]["sensitivity_v_per_pa"].endswith("[channel.0]")
    assert acc["provenance"]["sensitivity_v_per_pa"].endswith("[channel.1]")
    assert (mic["sensor"]["serial"], acc["sensor"]["serial"]) == ("M-1", "A-2")
    rows = {ch["channel"]: {r["quantity"]: r["value"] for r in ch["rows"]} for ch in (mic, acc)}
    assert rows[0]["level reference"] == "dB re 20 µPa"
    assert rows[1]["level reference"] == "dB re 1 µm/s²"
    # A float file's samples are volts: 1 / 50 mV/Pa = 20 Pa and 1 / (10 mV/g) = 100 g per
    # unit sample.
    assert rows[0]["raw sample to calibrated value"] == "× 20 Pa"
    assert rows[1]["raw sample to calibrated value"] == f"× {100 * G_M_PER_S2:.6g} m/s²"


def test_levels_are_those_of_each_channel_alone(mixed):
    path, profile, doc, _ = mixed
    section = doc["levels"]
    assert section["level_unit"] is None
    for entry in section["channels"]:
        c = entry["channel"]
        alone = levels_of(_source(path, profile, [c]), interval_s=section["history"]["interval_s"])
        expected = alone.channel(c)
        assert (entry["unit"], entry["level_unit"]) == (expected["unit"], expected["level_unit"])
        for key in LEVEL_KEYS:
            if expected[key] is None:
                assert entry[key] is None, key
            else:
                # The report divides each channel by its own reference (levels re 1), the
                # channel alone is metered re its reference: the same dB but for the
                # rounding of one division in float64 (1e-15 relative), far below 1e-9 dB.
                assert entry[key] == pytest.approx(expected[key], abs=1e-9), key
        assert entry["notes"] == expected["notes"]
    mic, acc = section["channels"]
    # 1 Pa RMS is 20 lg(1 Pa / 20 µPa) = 93.98 dB; 1 g RMS is 20 lg(9.80665 m/s² / 1 µm/s²)
    # = 139.83 dB (ISO 1683 references). The noise added is 80 dB below the tone, and a
    # 1 kHz tone reads the same A-weighted (A is 0 dB at 1 kHz, IEC 61672-1:2013 Table 3):
    # ±0.01 dB covers the 1e-8 share of the noise and the meter's start-up.
    assert mic["LZeq"] == pytest.approx(20 * math.log10(1.0 / REF_AIR_PA), abs=0.01)
    assert mic["LAeq"] == pytest.approx(20 * math.log10(1.0 / REF_AIR_PA), abs=0.01)
    assert acc["LZeq"] == pytest.approx(
        20 * math.log10(G_M_PER_S2 / REF_ACCELERATION_M_PER_S2), abs=0.01
    )
    # A and C weightings are for sound pressure only (IEC 61672-1): none for the accelerometer.
    assert acc["LAeq"] is None and acc["LCpeak"] is None
    assert any("A and C weightings apply to sound pressure only" in n for n in acc["notes"])
    history = section["history"]
    assert history["LAeq"][0] is not None and history["LAeq"][1] is None
    assert history["LZeq"][1] is not None


def test_spectra_bands_and_tone_use_each_channels_reference(mixed):
    _, _, doc, _ = mixed
    spectrum = doc["spectrum"]
    assert [c["level_unit"] for c in spectrum["channels"]] == [
        "dB re (20 µPa)²/Hz",
        "dB re (1 µm/s²)²/Hz",
    ]
    df = spectrum["resolution_hz"]
    for c, levels in enumerate(doc["levels"]["channels"]):
        # Parseval for a density PSD (Heinzel, Rüdiger, Schilling 2002): the sum of PSD
        # times bin width is the mean square, LZeq in dB re the same reference; the
        # levels are rounded to 0.01 dB and the DC bin holds nothing: ±0.05 dB.
        psd = np.array([v if v is not None else -np.inf for v in spectrum["level_db"][c]])
        assert 10 * np.log10(np.sum(10 ** (psd / 10)) * df) == pytest.approx(
            levels["LZeq"], abs=0.05
        )
    bands = doc["bands"]
    assert [c["level_unit"] for c in bands["channels"]] == ["dB re 20 µPa", "dB re 1 µm/s²"]
    expected = (20 * math.log10(1.0 / REF_AIR_PA), 20 * math.log10(G_M_PER_S2 / 1e-6))
    for c, tone_hz in enumerate(TONE_HZ):
        j = bands["nominal_hz"].index(tone_hz)
        # The tone's band holds the tone at the band filter's response there: 1 kHz is
        # the exact mid-band frequency, 160 Hz lies 1 % above the exact 158.5 Hz, inside
        # the pass band, where IEC 61260-1:2014 class 1 allows ±0.4 dB around the mid-band
        # response (limit value from memory; the bank's own tests check the limits): ±0.4 dB.
        assert bands["level_db"][c][j] == pytest.approx(expected[c], abs=0.4)
    assert [c["level_unit"] for c in doc["spectrogram"]["channels"]] == [
        "dB re (20 µPa)²/Hz",
        "dB re (1 µm/s²)²/Hz",
    ]
    mic, acc = doc["tone"]["channels"]
    assert mic["present"] and acc["present"]
    assert (mic["level_unit"], acc["level_unit"]) == ("dB re 20 µPa", "dB re 1 µm/s²")
    # The tone line's level (the floor removed): the same references, ±0.01 dB.
    assert mic["level_db"] == pytest.approx(expected[0], abs=0.01)
    assert acc["level_db"] == pytest.approx(expected[1], abs=0.01)
    assert acc["tone_rms"] == pytest.approx(G_M_PER_S2, rel=1e-3)


def test_json_validates(mixed):
    _schema_validator().validate(mixed[2])


def test_page_labels_each_channel_with_its_unit(mixed):
    _, _, doc, page = mixed
    levels = page[page.index(">Levels</h2>") :]
    levels = levels[: levels.index("</table>")]
    heads = levels[: levels.index("</thead>")]
    assert heads.index("dB re 20 µPa") < heads.index("dB re 1 µm/s²")
    # The summary card of the accelerometer gives Z levels in its own unit.
    cards = page[page.index('<div class="summary">') : page.index("Measurement chain")]
    assert f"L<sub>Zeq</sub> {doc['levels']['channels'][1]['LZeq']:.1f}" in cards
    assert "dB re 1 µm/s²" in cards
    tone = page[page.index(">Tone</h2>") :]
    tone = tone[: tone.index("</table>")]
    assert f"{doc['tone']['channels'][1]['level_db']:.2f} dB re 1 µm/s²" in tone
    assert "Channel 0: pressure in Pa" in page and "Channel 1: acceleration in m/s²" in page
    # The check tables name each channel's unit, from the check result's channel entries.
    assert "Channel 1 (m/s², levels in dB re 1 µm/s²):" in page
    assert [ch["level_unit"] for ch in doc["diagnostics"]["channels"]] == [
        "dB re 20 µPa",
        "dB re 1 µm/s²",
    ]


def test_no_axis_is_shared_by_two_units(mixed):
    from piezo.plots import style
    from piezo.report.build import report_figures
    from piezo.report.run import ReportSettings, analyse

    path, profile, _, _ = mixed
    run = analyse(_source(path, profile), ReportSettings())
    with style.capture_figures() as figs:
        names = list(report_figures(run))
    drawn = dict(zip(names, figs, strict=True))
    labels = {name: [ax.get_ylabel() for ax in fig.axes] for name, fig in drawn.items()}
    assert labels["psd"] == ["PSD / dB re (20 µPa)²/Hz", "PSD / dB re (1 µm/s²)²/Hz"]
    assert labels["bands"] == ["band level / dB re 20 µPa", "band level / dB re 1 µm/s²"]
    assert labels["level_history"] == ["level / dB re 20 µPa", "level / dB re 1 µm/s²"]
    assert labels["spectrogram_1"][1] == "PSD / dB re (1 µm/s²)²/Hz"  # the colour bar
    # Each panel holds only the channels of its unit.
    for name in ("psd", "level_history"):
        mic_ax, acc_ax = drawn[name].axes
        assert all("channel 0" in str(ln.get_label()) for ln in mic_ax.get_lines())
        assert all("channel 1" in str(ln.get_label()) for ln in acc_ax.get_lines())
    # The accelerometer's history is its LZeq per interval (no A weighting).
    (steps,) = [p for p in drawn["level_history"].axes[1].patches]
    assert "LZeq" in str(steps.get_label())


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed: page not rendered")
def test_mixed_page_renders_in_headless_chromium(mixed, tmp_path):
    page = mixed[3]
    sizes, console = image_layout(page, tmp_path)
    assert console == []
    assert len(sizes) == page.count("<img ")
    for w, h, shown in sizes:
        assert w > 0 and h > 0 and shown > 0, (w, h, shown)


def test_bundled_accelerometer_bench_keeps_each_sensor_and_chart(tmp_path):
    """recordings/accel-bench.flac: two accelerometers of one unit with sensitivities (and,
    for channel 0, a calibration chart) of their own, from [channel.N] sections."""
    import piezo
    from piezo.report.build import report_document
    from piezo.report.run import ReportSettings, analyse
    from tests.paths import RECORDINGS

    path = RECORDINGS / "accel-bench.flac"
    run = analyse(piezo.open(path), ReportSettings())
    doc = report_document(run)
    chain = doc["chain"]
    assert (chain["unit"], chain["level_unit"], chain["shared"]) == (
        "m/s²",
        "dB re 1 µm/s²",
        False,
    )
    ref, dut = chain["channels"]
    assert ref["response_curve"].endswith("accel-bench-reference-chart.csv")
    assert ref["provenance"]["response_curve"].endswith("[channel.0]")
    assert dut["response_curve"] is None
    # The profile's sensitivities, 10.15 mV/g and 10 mV/g (recordings/accel-bench.toml).
    assert ref["sensitivity_v_per_unit"] == pytest.approx(10.15e-3 / G_M_PER_S2, rel=1e-12)
    assert dut["sensitivity_v_per_unit"] == pytest.approx(10e-3 / G_M_PER_S2, rel=1e-12)
    assert (ref["sensor"]["serial"], dut["sensor"]["serial"]) == ("RA3-0112", "PA12-2291")
    # One reference for both: the levels section gives it once.
    assert doc["levels"]["reference_m_per_s2"] == pytest.approx(REF_ACCELERATION_M_PER_S2)
    interval = doc["levels"]["history"]["interval_s"]
    for entry in doc["levels"]["channels"]:
        c = entry["channel"]
        # Each channel alone, through its own chart (channel 0) or none (channel 1): the
        # same meter on the same calibrated samples, so equal to float64 rounding.
        alone = levels_of(piezo.open(path, channels=[c]), interval_s=interval).channel(c)
        assert entry["LZeq"] == pytest.approx(alone["LZeq"], abs=1e-9)
        assert entry["LZpeak"] == pytest.approx(alone["LZpeak"], abs=1e-9)
        assert entry["LAeq"] is None  # acceleration: no A weighting (IEC 61672-1)
    _schema_validator().validate(json.loads(json.dumps(doc)))


def test_page_leaves_out_level_rows_no_channel_has(tmp_path):
    # Two accelerometers: no A- or C-weighted level exists (IEC 61672-1 weights sound
    # pressure), so the page's table holds only the Z rows and names what it left out,
    # as the terminal does; the JSON keeps every name with null values.
    from piezo.cli import main
    from tests.paths import RECORDINGS

    with pytest.raises(SystemExit) as done:
        main(["report", str(RECORDINGS / "accel-bench.flac"), "--out", str(tmp_path)])
    assert done.value.code in (0, None)
    page = next(tmp_path.glob("*.report.html")).read_text(encoding="utf-8")
    assert "<tr><td>LZeq</td>" in page and "<tr><td>LAeq</td>" not in page
    assert "Not given for any channel, left out (23;" in page
    doc = json.loads(next(tmp_path.glob("*.report.json")).read_text(encoding="utf-8"))
    assert all(ch["LAeq"] is None for ch in doc["levels"]["channels"])
