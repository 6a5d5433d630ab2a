"""``piezo impedance``: tables, V/I captures, JSON, plot and errors."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from piezo.element.bvd import BvdCircuit
from tests.element.test_vi import _vi_capture

EXAMPLE = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)


@pytest.fixture
def table(tmp_path, rng):
    f = np.concatenate([np.geomspace(200, 20e3, 60), np.linspace(27e3, 33e3, 1201)])
    z = EXAMPLE.impedance(f) * (1 + 0.002 * rng.standard_normal(f.size))
    p = tmp_path / "element.csv"
    rows = "\n".join(
        f"{a:.9g},{abs(b):.9g},{np.degrees(np.angle(b)):.9g}" for a, b in zip(f, z, strict=True)
    )
    p.write_text("Frequency (Hz),|Z| (Ohm),Phase (deg)\n" + rows + "\n", encoding="utf-8")
    return p


def test_table_json(cli, table, tmp_path):
    png = tmp_path / "z.png"
    r = cli("impedance", table, "--shape", "radial", "--plot", png, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    (mode,) = doc["modes"]
    assert mode["fs_hz"] == pytest.approx(EXAMPLE.fs_hz, rel=5e-4)
    assert mode["Qm"] == pytest.approx(EXAMPLE.qm, rel=0.05)
    assert mode["uncertainty"]["Qm"] > 0
    assert doc["free_capacitance_f"] == pytest.approx(2.45e-9, rel=0.01)
    assert doc["capacitance_source"] == "measured"
    assert doc["material_coupling"]["symbol"] == "k_p"
    assert "discharge" in doc["caution"]
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_table_terminal(cli, table):
    r = cli("impedance", table, "--band", "27k:33k")
    assert r.code == 0, r.err
    assert "Qm" in r.out and "k_eff" in r.out and "discharge" in r.out


def test_vi_capture(cli, tmp_path, rng):
    data = _vi_capture(rng, EXAMPLE)
    p = tmp_path / "vi.wav"
    sf.write(p, data / (1.2 * np.max(np.abs(data))), 192000, subtype="FLOAT")
    r = cli("impedance", p, "--shunt", "100ohm", "--band", "27k:33k", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    mode = doc["modes"][0]
    assert mode["fs_hz"] == pytest.approx(EXAMPLE.fs_hz, rel=5e-4)
    assert mode["Qm"] == pytest.approx(EXAMPLE.qm, rel=0.05)
    assert mode["min_coherence"] > 0.9
    assert doc["measurement"]["bins_per_bandwidth"] >= 10
    # Swapped channels give the inverse ratio: the fit then finds no such element.
    r = cli("impedance", p, "--shunt", "100ohm", "--voltage-channel", "3", "--json")
    assert r.code == 2 and "--voltage-channel 3" in r.err


@pytest.mark.parametrize(
    ("args", "match"),
    [
        (("--shunt", "0ohm"), "--shunt must be a positive"),
        (("--dielectric-loss", "maybe"), "--dielectric-loss"),
        (("--shape", "sphere"), "--shape"),
        (("--band", "33k:27k"), "--band: the low end must lie below the high end"),
        (("--band", "0:27k"), "--band: the low end must lie above 0 Hz"),
        (("--band", "27k"), "--band must look like 'LOW .. HIGH' (or 'LOW:HIGH')"),
        (("--at", "-1Hz"), "--at"),
    ],
)
def test_bad_options_exit_2(cli, table, args, match):
    r = cli("impedance", table, *args)
    assert r.code == 2
    assert match in r.err and r.err.count("\n") == 1


def test_audio_without_shunt(cli, tmp_path):
    p = tmp_path / "x.wav"
    sf.write(p, np.zeros((100, 2)), 48000)
    r = cli("impedance", p)
    assert r.code == 2 and "--shunt" in r.err and str(p) in r.err
