"""``piezo ringdown`` on the bundled tap test and on bad options."""

from __future__ import annotations

import math

import pytest

from tests.paths import RECORDINGS


def test_bundled_tap_test_json(cli):
    r = cli("ringdown", RECORDINGS / "tap-test.csv", "--channel", "0", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    (ch,) = doc["channels"]
    assert len(ch["events"]) == 1
    f = sorted(m["frequency_hz"] for m in ch["modes"])
    assert f[0] == pytest.approx(3200, rel=1e-3) and f[1] == pytest.approx(8100, rel=1e-3)
    first = min(ch["modes"], key=lambda m: m["frequency_hz"])
    # Generator (piezo.demo.scenes): τ = 18 ms -> Q = π f τ = 181.
    assert first["q"] == pytest.approx(math.pi * 3200 * 0.018, rel=0.05)


def test_terminal_table(cli):
    r = cli("ringdown", RECORDINGS / "tap-test.csv")
    assert r.code == 0, r.err
    assert "3200" in r.out and "event at 0.0200 s" in r.out


@pytest.mark.parametrize(
    ("args", "match"),
    [(("--threshold", "loud"), "--threshold"), (("--skip", "-1ms"), "--skip"),
     (("--band", "5k"), "LOW:HIGH")],
)  # fmt: skip
def test_bad_options(cli, args, match):
    r = cli("ringdown", RECORDINGS / "tap-test.csv", *args)
    assert r.code == 2 and match in r.err
