"""``piezo batch`` on an accelerometer line: units and trade forms in every output.

A lot of three flat accelerometers (9, 10 and 11 mV/g, made in the test from the
physics of a linear sensor, see ``tests/batch/test_quantity.py``) judged against limits
written in mV/g; g = 9.80665 m/s² (ISO 80000-3:2019).
"""

from __future__ import annotations

import csv
import io
import json
import math
import re

import pytest

from tests.batch.test_quantity import ACCEL_SPEC, G, accel_sweep_capture
from tests.paths import DOCS
from tests.test_glossary import Glossary, csv_header, missing_keys

UNITS_MV_PER_G = {"A-001.wav": 9.0, "A-002.wav": 10.0, "A-003.wav": 11.0}


@pytest.fixture
def accel_lot(tmp_path):
    (tmp_path / "spec.toml").write_text(ACCEL_SPEC, encoding="utf-8")
    lot = tmp_path / "lot"
    lot.mkdir()
    for name, mv in UNITS_MV_PER_G.items():
        accel_sweep_capture(lot / name, mv, noise_v=2e-6, seed=int(mv))
    return tmp_path


def _db(x):
    return 20.0 * math.log10(x)


def _mv_per_g(text):
    """The mV/g number of a trade form such as '1.020 mV/(m/s²) (10.00 mV/g)'."""
    found = re.search(r"\(([0-9.]+) mV/g\)", text)
    assert found, text
    return float(found.group(1))


def test_an_accelerometer_lot_in_mv_per_g_everywhere(cli, accel_lot):
    out = accel_lot / "out"
    r = cli(
        "batch",
        accel_lot / "lot",
        "--spec",
        accel_lot / "spec.toml",
        "--out",
        out,
        "--workers",
        "1",
        "--reports",
    )
    assert r.code == 1, r.err  # 9 and 11 mV/g fail the 9.5 .. 10.5 mV/g limits
    # Terminal: the lot's mean in both forms. The mean of 9, 10, 11 mV/g in dB is
    # 20 lg(0.01 / g) + (20/3) lg(0.99), -59.858 dB re 1 V/(m/s²) = 9.967 mV/g; each value
    # is within 0.05 dB (0.6 %, tests/batch/test_quantity.py), so is their mean.
    line = next(ln for ln in r.out.splitlines() if ln.startswith("sensitivity mean: "))
    assert line.endswith(" dB re 1 V/(m/s²)")
    assert _mv_per_g(line) == pytest.approx(9.967, rel=0.006)

    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    sens = doc["metrics"][0]
    assert sens["unit"] == "dB re 1 V/(m/s²)"
    # Limits were written in mV/g: stored as dB re 1 V/(m/s²).
    assert sens["limits"][0]["lower"] == pytest.approx(_db(9.5e-3 / G), abs=1e-9)
    by_file = {row["file"].rsplit("/", 1)[-1]: row for row in doc["results"]}
    for name, mv in UNITS_MV_PER_G.items():
        row = by_file[name]
        assert row["metrics"]["sensitivity"] == pytest.approx(_db(mv * 1e-3 / G), abs=0.05)
        # The trade form reads the same value in mV/g, to its 4 digits.
        assert _mv_per_g(row["trade_forms"]["sensitivity"]) == pytest.approx(
            10 ** (row["metrics"]["sensitivity"] / 20) * G * 1e3, rel=1e-3
        )
    assert [by_file[n]["verdict"] for n in UNITS_MV_PER_G] == ["fail", "pass", "fail"]
    summary = doc["summary"]["metrics"][0]
    assert _mv_per_g(summary["mean_trade_form"]) == pytest.approx(9.967, rel=0.006)

    text = (out / "results.csv").read_text(encoding="utf-8")
    assert "# sensitivity: dB re 1 V/(m/s²)" in text.splitlines()
    table = list(
        csv.DictReader(
            io.StringIO("\n".join(ln for ln in text.splitlines() if not ln.startswith("#")))
        )
    )
    forms = [_mv_per_g(row["sensitivity_trade_form"]) for row in table]
    assert forms == pytest.approx(list(UNITS_MV_PER_G.values()), rel=0.006)

    # Every new key and column is in the glossary.
    glossary = Glossary((DOCS / "glossary.md").read_text(encoding="utf-8"))
    assert missing_keys(doc, glossary) == []
    header = csv_header(text)
    assert [
        c for c in header if c not in glossary and c != "sensitivity" and c != "self_noise"
    ] == []

    # HTML: the capture page gives the trade form beside the value, the summary the mean.
    page = next((out / "reports").glob("*A-003.wav.html")).read_text(encoding="utf-8")
    assert "dB re 1 V/(m/s²)" in page and " mV/g)</span>" in page
    summary_page = (out / "summary.html").read_text(encoding="utf-8")
    assert "(mean " in summary_page and " mV/g))</span>" in summary_page


def test_a_level_in_another_quantity_exits_2_naming_the_spec_and_key(cli, accel_lot):
    spec = accel_lot / "spec.toml"
    text = ACCEL_SPEC.replace('level = "1 g"', 'level = "94 Pa"')
    spec.write_text(text, encoding="utf-8")
    line = text.splitlines().index('level = "94 Pa"') + 1
    r = cli("batch", accel_lot / "lot", "--spec", spec, "--out", accel_lot / "out")
    assert r.code == 2
    assert r.err == (
        f"piezo: error: {spec}: line {line}: stimulus.level: '94 Pa' is a pressure (Pa), "
        "not an acceleration (m/s²)\n"
    )
    assert not (accel_lot / "out").exists()
