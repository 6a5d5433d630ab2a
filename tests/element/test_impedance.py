"""Impedance tables from CSV exports."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from piezo.element.bvd import BvdCircuit
from piezo.element.impedance import ImpedanceSweep, read_impedance_csv
from piezo.errors import InputError, RecordingError

EXAMPLE = BvdCircuit(c0_f=2.2e-9, r1_ohm=35.0, l1_h=0.12, c1_f=0.25e-9)
F = np.linspace(27e3, 33e3, 61)
Z = EXAMPLE.impedance(F)


def _write(tmp_path, text, name="z.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _table(header, cols, delimiter=","):
    lines = [delimiter.join(header)]
    lines += [delimiter.join(f"{v:.12g}" for v in row) for row in zip(*cols, strict=True)]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize(
    ("header", "cols"),
    [
        (("Frequency (Hz)", "|Z| (Ohm)", "Phase (deg)"), (F, abs(Z), np.degrees(np.angle(Z)))),
        (("freq_khz", "z_kohm", "phase_rad"), (F / 1e3, abs(Z) / 1e3, np.angle(Z))),
        (("Frequency [kHz]", "R [kΩ]", "X [kΩ]"), (F / 1e3, Z.real / 1e3, Z.imag / 1e3)),
        (("f", "Z'", "-Z''"), (F, Z.real, -Z.imag)),
        (("Frequency (Hz)", "G (mS)", "B (mS)"), (F, (1 / Z).real * 1e3, (1 / Z).imag * 1e3)),
        (("frequency_hz", "conductance_uS", "susceptance_uS"),
         (F, (1 / Z).real * 1e6, (1 / Z).imag * 1e6)),
    ],
)  # fmt: skip
def test_every_table_form_reads_the_same_impedance(tmp_path, header, cols):
    sweep = read_impedance_csv(_write(tmp_path, _table(header, cols)))
    np.testing.assert_allclose(sweep.frequency_hz, F, rtol=1e-11)
    # 12 significant digits written: the impedance comes back to about 1e-11.
    np.testing.assert_allclose(sweep.impedance_ohm, Z, rtol=1e-9)


def test_semicolon_tab_comments_and_preamble(tmp_path):
    text = "# analyser export\nInstrument: bench\n" + _table(
        ("Freq(Hz)", "Z(Ohm)", "Theta(deg)"), (F, abs(Z), np.degrees(np.angle(Z))), "\t"
    )
    sweep = read_impedance_csv(_write(tmp_path, text, "z.tsv"))
    assert sweep.form == "|Z|, phase"
    assert sweep.frequency_hz.size == F.size


def test_descending_frequencies_are_sorted(tmp_path):
    text = _table(("f (Hz)", "R (Ohm)", "X (Ohm)"), (F[::-1], Z.real[::-1], Z.imag[::-1]))
    sweep = read_impedance_csv(_write(tmp_path, text))
    np.testing.assert_allclose(sweep.frequency_hz, F, rtol=1e-12)


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("1,2,3\n4,5,6\n", "needs a header"),
        ("a,b,c\n1,2,3\n2,3,4\n", "no frequency column"),
        ("f (Hz),R (Ohm),B (S)\n1,2,3\n2,3,4\n", "no |Z| and phase"),
        ("f (Hz),|Z| (furlong),phase\n1,2,3\n2,3,4\n", "unknown unit"),
        ("f (Hz),|Z| (Ohm),phase (grad)\n1,2,3\n2,3,4\n", None),
        ("f (Hz),|Z| (Ohm),phase (turns)\n1,2,3\n2,3,4\n", "unknown phase unit"),
        ("f (Hz),|Z| (Ohm),phase\n1,2,3\n1,3,4\n", "repeats a frequency"),
        ("f (Hz),|Z| (Ohm),phase\n1,0,3\n2,3,4\n", "non-zero"),
        ("f (Hz),|Z| (Ohm),phase\n-1,2,3\n2,3,4\n", "positive"),
    ],
)
def test_bad_tables_give_one_clear_error(tmp_path, text, match):
    path = _write(tmp_path, text)
    if match is None:
        read_impedance_csv(path)
        return
    with pytest.raises(InputError, match=match) as info:
        read_impedance_csv(path)
    assert info.value.source == str(path)


def test_missing_and_binary_files(tmp_path):
    with pytest.raises(RecordingError, match="no such file"):
        read_impedance_csv(tmp_path / "none.csv")
    p = tmp_path / "bin.csv"
    p.write_bytes(b"\xff\xfe\x00\x81" * 10)
    with pytest.raises(RecordingError, match="not a text file"):
        read_impedance_csv(p)


@given(
    st.lists(st.integers(1, 10**6), min_size=2, max_size=30, unique=True),
    st.floats(-89.0, 89.0),
    st.sampled_from([("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6)]),
    st.sampled_from([("Ohm", 1.0), ("kOhm", 1e3), ("mOhm", 1e-3)]),
)
def test_property_magnitude_phase_round_trip(tmp_path_factory, freqs, phase, funit, zunit):
    f = np.sort(np.asarray(freqs, dtype=float))
    mag = 1e3 / np.sqrt(f)
    text = _table(
        (f"Frequency ({funit[0]})", f"|Z| ({zunit[0]})", "Phase (deg)"),
        (f / funit[1], mag / zunit[1], np.full(f.size, phase)),
    )
    path = tmp_path_factory.mktemp("z") / "z.csv"
    path.write_text(text, encoding="utf-8")
    sweep = read_impedance_csv(path)
    np.testing.assert_allclose(sweep.frequency_hz, f, rtol=1e-10)
    np.testing.assert_allclose(sweep.magnitude_ohm, mag, rtol=1e-10)
    np.testing.assert_allclose(sweep.phase_deg, phase, atol=1e-8)


def test_sweep_validation():
    with pytest.raises(InputError, match="strictly increasing"):
        ImpedanceSweep(np.array([2.0, 1.0]), np.array([1.0, 1.0]))
    with pytest.raises(InputError, match="same length"):
        ImpedanceSweep(np.array([1.0, 2.0]), np.array([1.0]))
