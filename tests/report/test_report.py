"""``piezo report``: HTML that parses strictly and renders, JSON that validates, safe text."""

from __future__ import annotations

import base64
import json
import re
import struct

import html5lib
import jinja2
import jsonschema
import numpy as np
import pytest
import referencing
import soundfile as sf

from piezo.report import render_html
from tests.chromium import CHROMIUM, image_layout
from tests.paths import RECORDINGS, REPO

FS = 48000


def _schema_validator() -> jsonschema.Draft202012Validator:
    report = json.loads((REPO / "docs" / "report.schema.json").read_text(encoding="utf-8"))
    check = json.loads((REPO / "docs" / "check.schema.json").read_text(encoding="utf-8"))
    registry = referencing.Registry().with_resources(
        [(s["$id"], referencing.Resource.from_contents(s)) for s in (report, check)]
    )
    jsonschema.Draft202012Validator.check_schema(report)
    return jsonschema.Draft202012Validator(report, registry=registry)


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    """Reports of two demo recordings and of a small clipped capture, written once."""
    from piezo.cli import main

    root = tmp_path_factory.mktemp("reports")
    t = np.arange(2 * FS) / FS
    clipped = root / "clipped <b>.wav"  # markup in the name must come out escaped
    x = np.clip(np.sin(2 * np.pi * 997 * t), -0.8, 0.8)
    sf.write(
        str(clipped), np.column_stack([x, 0.3 * np.sin(2 * np.pi * 200 * t)]), FS, subtype="PCM_24"
    )
    out = root / "out"
    files = [clipped, RECORDINGS / "pump-bench.flac", RECORDINGS / "tap-test.csv"]
    try:
        main(["report", *map(str, files), "--out", str(out), "--expected-corner", "20 Hz"])
    except SystemExit as exc:
        assert exc.code in (0, None)
    return out


def _pages(out):
    return sorted(out.glob("*.html"))


def test_one_html_and_one_json_per_file(reports):
    names = sorted(p.name for p in reports.iterdir())
    assert names == [
        "clipped _b_.report.html",
        "clipped _b_.report.json",
        "pump-bench.report.html",
        "pump-bench.report.json",
        "tap-test.report.html",
        "tap-test.report.json",
    ]


def test_html_passes_a_strict_html5_parser(reports):
    for page in _pages(reports):
        parser = html5lib.HTMLParser(strict=True)
        parser.parse(page.read_text(encoding="utf-8"))  # raises on the first parse error
        assert not parser.errors, (page.name, parser.errors[:3])


def test_strict_parser_does_catch_broken_html():
    # The check above is not a rubber stamp: html5lib's strict mode refuses bad markup.
    with pytest.raises(html5lib.html5parser.ParseError):
        html5lib.HTMLParser(strict=True).parse("<!DOCTYPE html><p><table></p>")


def test_page_is_self_contained_and_escaped(reports):
    page = (reports / "clipped _b_.report.html").read_text(encoding="utf-8")
    assert "clipped &lt;b&gt;.wav" in page
    assert "clipped <b>" not in page
    # No network: nothing is loaded from elsewhere, no scripts at all.
    assert not re.search(r"""(src|href)=["']?(https?:)?//""", page)
    assert "<script" not in page
    assert "<link" not in page
    # Every image is an embedded PNG.
    srcs = re.findall(r'<img src="([^"]+)"', page)
    assert srcs and all(s.startswith("data:image/png;base64,") for s in srcs)


def _png_size(uri: str) -> tuple[int, int]:
    data = base64.b64decode(uri.split(",", 1)[1])
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", data[16:24])


def test_embedded_figures_are_real_pngs(reports):
    page = (reports / "pump-bench.report.html").read_text(encoding="utf-8")
    sizes = [_png_size(s) for s in re.findall(r'<img src="([^"]+)"', page)]
    assert sizes
    assert all(w >= 600 and h >= 200 for w, h in sizes)


def test_level_rows_in_the_order_of_the_levels_command(reports):
    from piezo.cli.levels import LEVEL_KEYS

    page = (reports / "pump-bench.report.html").read_text(encoding="utf-8")
    table = page[page.index(">Levels</h2>") :]
    table = table[: table.index("</table>")]
    rows = re.findall(r"<tr><td>(L[A-Za-z0-9]+)</td>", table)
    assert rows and rows == [k for k in LEVEL_KEYS if k in rows]


def test_badges_read_the_same_on_every_page(reports):
    from piezo.report.html import render_page

    page = (reports / "clipped _b_.report.html").read_text(encoding="utf-8")
    badges = set(re.findall(r'<span class="sev sev-([a-z-]+)">([^<]*)</span>', page))
    assert {"ok", "fail"} <= {cls for cls, _ in badges}
    # One form: symbol, space, the JSON word in lower case; the style sheet sets every
    # badge in capitals ("✓ OK", "! WARN", "✗ FAIL").
    symbols = {"ok": "✓", "pass": "✓", "warn": "!", "fail": "✗", "not-evaluable": "?"}
    for cls, text in badges:
        assert text == f"{symbols[cls]} {cls.replace('-', ' ')}"
    css = re.search(r"<style>(.*?)</style>", page, re.S).group(1)
    assert re.search(r"\.sev \{[^}]*text-transform: uppercase", css)
    # The batch pages embed the same style sheet.
    row = {
        "file": "u.wav", "serial": "", "verdict": "warn", "error": None,
        "content_sha256": "0" * 64, "failed_limits": [], "warnings": ["w"],
        "not_evaluable": [],
    }  # fmt: skip
    batch = render_page(
        "batch_capture.html.j2", row=row, spec={"name": "", "sha256": "1" * 64}, lines=[], png=None
    )
    html5lib.HTMLParser(strict=True).parse(batch)
    assert re.search(r"<style>(.*?)</style>", batch, re.S).group(1) == css
    assert '<span class="sev sev-warn">! warn</span>' in batch


def test_cautions_are_stated(reports):
    doc = json.loads((reports / "pump-bench.report.json").read_text(encoding="utf-8"))
    page = (reports / "pump-bench.report.html").read_text(encoding="utf-8")
    text = " ".join(doc["cautions"])
    assert "not a certified sound level meter measurement" in text
    assert "local regulations" in text and "class 1" in text
    for caution in doc["cautions"]:
        assert caution in page


def test_json_validates_against_the_shipped_schema(reports):
    validator = _schema_validator()
    docs = [json.loads(p.read_text(encoding="utf-8")) for p in sorted(reports.glob("*.json"))]
    for doc in docs:
        validator.validate(doc)
    broken = docs[0]
    broken["diagnostics"]["channels"][0]["verdict"] = "fine"
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(broken)


def test_json_and_page_carry_the_same_numbers(reports):
    doc = json.loads((reports / "clipped _b_.report.json").read_text(encoding="utf-8"))
    page = (reports / "clipped _b_.report.html").read_text(encoding="utf-8")
    ch0 = doc["diagnostics"]["channels"][0]
    assert ch0["verdict"] == "fail"
    clip = next(c for c in ch0["checks"] if c["name"] == "clipping")
    assert clip["evidence"] in page
    expected = (1 - 2 / np.pi * np.arcsin(0.8)) * 2 * FS  # tests/test_diagnostics.py
    assert ch0["clipping"]["clipped_samples"] == pytest.approx(expected, rel=0.01)


def test_template_refuses_a_missing_value():
    # StrictUndefined: a document without a section is an error, not a blank page.
    with pytest.raises(jinja2.UndefinedError, match="no attribute 'software'"):
        render_html({"report": {}, "recording": {"name": "x"}}, {})


def test_report_cli_errors(cli, tmp_path):
    t = np.arange(FS) / FS
    good = tmp_path / "good.wav"
    sf.write(str(good), 0.1 * np.sin(2 * np.pi * 440 * t), FS)
    missing = tmp_path / "missing.wav"
    out = tmp_path / "out"
    r = cli("report", missing, good, "--out", out, "--json")
    assert r.code == 2  # one file could not be analysed ...
    doc = r.json()
    assert [d["file"] for d in doc["reports"]] == [str(good)]  # ... the other still was
    assert doc["failed"][0]["file"] == str(missing)
    assert (out / "good.report.html").is_file()
    not_dir = tmp_path / "file.txt"
    not_dir.write_text("x")
    r = cli("report", good, "--out", not_dir)
    assert r.code == 2
    assert "not a directory" in r.err


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed: page not rendered")
def test_page_renders_in_headless_chromium(reports, tmp_path):
    page = (reports / "pump-bench.report.html").read_text(encoding="utf-8")
    sizes, console = image_layout(page, tmp_path)
    assert console == []
    assert len(sizes) == page.count("<img ")
    for w, h, shown in sizes:
        assert w > 0 and h > 0 and shown > 0, (w, h, shown)


def test_frontend_design_adds_its_response(cli, tmp_path):
    t = np.arange(2 * FS) / FS
    path = tmp_path / "tone.wav"
    w = 2 * np.pi * 1000 * t
    x = 0.1 * (np.sin(w) + 0.01 * np.sin(2 * w) + 0.005 * np.sin(3 * w))
    sf.write(str(path), x, FS, subtype="FLOAT")
    design = RECORDINGS / "designs" / "pump-disc-charge.toml"
    out = tmp_path / "out"
    r = cli("report", path, "--out", out, "--frontend", design)
    assert r.code == 0, r.err
    doc = json.loads((out / "tone.report.json").read_text(encoding="utf-8"))
    fe = doc["frontend"]
    # Charge amplifier corner f_c = 1/(2 pi R_f C_f) (circuit
    # theory): R_f 1 GOhm, C_f 10 nF in this design -> 0.015915 Hz.
    assert fe["corner_hz"] == pytest.approx(1 / (2 * np.pi * 1e9 * 10e-9), rel=1e-3)
    assert len(fe["frequency_hz"]) == len(fe["level_db"]) == len(fe["phase_deg"])
    page = (out / "tone.report.html").read_text(encoding="utf-8")
    assert "Front-end response" in page
    assert 'alt="Front-end response"' in page
    _schema_validator().validate(doc)
    # The tone section: 1 % second and 0.5 % third harmonic give THD = sqrt(0.01^2 + 0.005^2) =
    # 1.1180 % (THD re the fundamental: the common definition, common practice). The tone analysis
    # removes the noise floor under each line; with a float file there is none to speak of, so
    # 0.001 % (a thousandth of the value) is ample.
    (tone,) = doc["tone"]["channels"]
    assert tone["present"]
    assert tone["frequency_hz"] == pytest.approx(1000.0, abs=0.01)
    assert tone["thd_percent"] == pytest.approx(1.1180, abs=1e-3)
    assert "THD+N" in page
    r = cli("report", path, "--out", out, "--frontend", tmp_path / "none.toml")
    assert r.code == 2
    assert "design file" in r.err


def test_spectrum_sections_agree_with_the_levels(reports):
    doc = json.loads((reports / "clipped _b_.report.json").read_text(encoding="utf-8"))
    spec = doc["spectrum"]
    df = spec["resolution_hz"]
    for c, levels in enumerate(doc["levels"]["channels"]):
        # Parseval for a density PSD: sum of PSD x bin width = mean square (Heinzel,
        # Rudiger, Schilling 2002). LZeq is that mean square in dB; the PSD misses only
        # the DC bin (a zero-mean signal) and is rounded to 0.01 dB: +-0.05 dB.
        psd = np.array([v if v is not None else -np.inf for v in spec["level_db"][c]])
        total_db = 10 * np.log10(np.sum(10 ** (psd / 10)) * df)
        assert total_db == pytest.approx(levels["LZeq"], abs=0.05)
    # The band filters' self-test at 48 kHz: IEC 61260-1:2014 class 1 met with about
    # 0.4 dB to spare (piezo.spectral.bands measures the same in its own tests).
    bands = doc["conformance"]["bands"]
    assert bands["passed"] and bands["fraction"] == 3
    assert bands["worst_margin_db"] > 0.3
    # No dominant tone in these captures... except channel 0 of the clipped sine.
    assert doc["tone"]["channels"][0]["present"]
    pump = json.loads((reports / "pump-bench.report.json").read_text(encoding="utf-8"))
    assert pump["tone"] is None


def test_a_csv_time_offset_starts_the_time_axes(tmp_path):
    """Issue 12 §3.16: a scope export whose time column starts at -100 µs (pre-trigger)
    keeps that offset: the report states it and its level-history and spectrogram axes
    start there (the document's own times still count from the first sample)."""
    from piezo.chain.measurement import CalibratedSource, ChainSettings, resolve_chain
    from piezo.io.reader import open_recording
    from piezo.plots import style
    from piezo.report.build import report_document, report_figures
    from piezo.report.run import ReportSettings, analyse

    fs, start = 50000.0, -1e-4
    n = 50000  # 1 s
    rng = np.random.default_rng(5)
    x = 0.05 * rng.standard_normal(n) + 0.2 * np.sin(2 * np.pi * 1000 * np.arange(n) / fs)
    path = tmp_path / "scope.csv"
    rows = [f"{start + i / fs:.7f},{v:.6f}" for i, v in enumerate(x)]
    path.write_text("Time (s),Disc (V)\n" + "\n".join(rows) + "\n", encoding="utf-8")
    rec = open_recording(path)
    chain, provenance = resolve_chain(path, ChainSettings(), use_sidecar=False)
    run = analyse(CalibratedSource.of(rec, chain, None, provenance), ReportSettings())
    doc = report_document(run)
    assert doc["recording"]["start_time_s"] == pytest.approx(start, abs=1e-12)
    _schema_validator().validate(json.loads(json.dumps(doc)))
    with style.capture_figures() as figs:
        names = list(report_figures(run))
    assert len(names) == len(figs)  # one figure per name, drawn in the same order
    drawn = dict(zip(names, figs, strict=True))
    history = drawn["level_history"].axes[0]
    assert history.get_xlim()[0] == pytest.approx(start, abs=1e-12)
    # The spectrogram's first cell starts half a column before its first column's time
    # (the column times count from the first sample).
    spectro = drawn["spectrogram_0"].axes[0]
    sg = run.spectrogram
    assert sg is not None
    first_edge = start + sg.time_s[0] - (sg.time_s[1] - sg.time_s[0]) / 2
    assert spectro.get_xlim()[0] == pytest.approx(first_edge, abs=1e-9)


@pytest.fixture(scope="module")
def high_rate_reports(tmp_path_factory):
    """Reports of two 0.1 s captures at 1 MS/s: a 100 kHz tone without a profile, and a
    1 kHz tone whose profile states a sensor range of 1 Hz to 10 kHz."""
    from piezo.cli import main

    root = tmp_path_factory.mktemp("high-rate")
    fs = 1_000_000
    t = np.arange(100_000) / fs
    sf.write(str(root / "ultra.wav"), 0.5 * np.sin(2 * np.pi * 100e3 * t), fs, subtype="PCM_24")
    sf.write(str(root / "disc.wav"), 0.5 * np.sin(2 * np.pi * 1e3 * t), fs, subtype="PCM_24")
    profile = root / "disc.toml"
    profile.write_text('[sensor]\nfrequency_range = "1 Hz .. 10 kHz"\n', encoding="utf-8")
    out = root / "out"
    for args in ([str(root / "ultra.wav")], [str(root / "disc.wav"), "--profile", str(profile)]):
        try:
            main(["report", *args, "--out", str(out)])
        except SystemExit as exc:
            assert exc.code in (0, None)
    return root


def _report(root, stem):
    doc = json.loads((root / "out" / f"{stem}.report.json").read_text(encoding="utf-8"))
    page = (root / "out" / f"{stem}.report.html").read_text(encoding="utf-8")
    return doc, page


def test_high_rate_report_reaches_above_the_audio_band(high_rate_reports):
    """At 1 MS/s the report's bands and tone bandwidth are those of ``piezo bands`` and
    ``piezo tone`` (not 20 kHz): a 100 kHz tone is in both."""
    import piezo
    from piezo.spectral.summary import bands_of
    from piezo.tone.summary import tone_of

    doc, page = _report(high_rate_reports, "ultra")
    _schema_validator().validate(doc)
    bands = doc["bands"]
    # IEC 61260-1:2014 base-ten one-third-octave bands: the band of exact mid-band
    # frequency 1000 · 10^(20/10) Hz = 100 kHz holds the tone; its neighbours, a third
    # of an octave away, attenuate it (class 1 limits), so it is the largest.
    peak = int(np.argmax(bands["level_db"][0]))
    assert bands["labels"][peak] == "100k"
    assert bands["exact_hz"][peak] == pytest.approx(100000.0, rel=1e-12)
    # default_high_hz: 0.475 fs above audio rates (piezo.spectral.bands), 475 kHz here.
    assert (bands["high_hz"], bands["high_source"]) == (475000.0, "sample rate")
    tone = doc["tone"]["channels"][0]
    assert tone["present"] and tone["frequency_hz"] == pytest.approx(100e3, rel=1e-6)
    assert (tone["bandwidth_hz"], doc["tone"]["bandwidth_source"]) == (
        [20.0, 450000.0],
        "sample rate",
    )
    # The same limits as the commands' library calls on the same file.
    source = piezo.open(high_rate_reports / "ultra.wav")
    command = bands_of(source, fraction=3).to_dict()
    assert [b["nominal_hz"] for b in command["channels"][0]["bands"]] == bands["nominal_hz"]
    assert (command["high_hz"], command["high_source"]) == (bands["high_hz"], bands["high_source"])
    assert list(tone_of(source).bandwidth_hz) == tone["bandwidth_hz"]
    assert "Bands up to 475000 Hz nominal: the default for the sample rate" in page
    assert "The bandwidth's upper end is the default for the sample rate" in page


def test_sensor_frequency_range_caps_the_report_limits(high_rate_reports):
    """A profile's ``frequency_range = "1 Hz .. 10 kHz"`` ends bands and tone bandwidth at
    10 kHz, and the report says it came from the sensor."""
    import piezo
    from piezo.spectral.summary import bands_of

    doc, page = _report(high_rate_reports, "disc")
    _schema_validator().validate(doc)
    bands = doc["bands"]
    assert bands["labels"][-1] == "10k"
    assert (bands["high_hz"], bands["high_source"]) == (10000.0, "sensor")
    tone = doc["tone"]["channels"][0]
    assert (tone["bandwidth_hz"], doc["tone"]["bandwidth_source"]) == ([20.0, 10000.0], "sensor")
    assert tone["frequency_hz"] == pytest.approx(1e3, rel=1e-6)
    source = piezo.open(high_rate_reports / "disc.wav", profile=high_rate_reports / "disc.toml")
    command = bands_of(source, fraction=3).to_dict()
    assert [b["nominal_hz"] for b in command["channels"][0]["bands"]] == bands["nominal_hz"]
    # The bands' and the tone's sentence both name the sensor's range.
    assert page.count("where the sensor's frequency range ends") == 2
