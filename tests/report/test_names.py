"""Output names made from capture names (piezo.report.names), and their use by ``report``."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st

from piezo.report.names import MAX_NAME_BYTES, UniqueNames, safe_file_name

# What the file systems forbid in a name component: POSIX forbids "/" and NUL; Windows
# (Microsoft, "Naming Files, Paths, and Namespaces") also < > : " \ | ? *, the control
# characters 1-31, trailing dots and spaces, and the device names below.
WINDOWS_FORBIDDEN = set('<>:"/\\|?*') | {chr(c) for c in range(32)}
DEVICE_NAMES = {"CON", "PRN", "AUX", "NUL"} | {
    f"{p}{i}" for p in ("COM", "LPT") for i in range(1, 10)
}


@given(st.text(max_size=300))
@settings(max_examples=300, deadline=None)
def test_every_name_is_safe_on_every_common_file_system(text):
    name = safe_file_name(text)
    assert name and not (set(name) & WINDOWS_FORBIDDEN) and "\x7f" not in name
    assert not name.startswith(".") and not name.endswith((".", " "))
    assert name.split(".")[0].rstrip(" ").upper() not in DEVICE_NAMES
    assert len(name.encode("utf-8")) <= MAX_NAME_BYTES


@given(st.lists(st.text(max_size=40), max_size=30))
@settings(max_examples=200, deadline=None)
def test_names_of_one_run_never_collide_even_ignoring_case(texts):
    names = UniqueNames()
    given_out = [names.claim(t, ending=".report") for t in texts]
    assert len({n.casefold() for n in given_out}) == len(texts)


def test_letters_of_every_script_are_kept():
    # Issue 12, defect 7: "Ölpumpe" lost its first letter, "Kanal ä" and "Kanal ö" became
    # one name.
    assert safe_file_name("Ölpumpe") == "Ölpumpe"
    assert safe_file_name("Kanal ä") != safe_file_name("Kanal ö")
    assert safe_file_name("水中マイク 3") == "水中マイク 3"
    # NFD (as macOS stores names) and NFC give one name.
    assert safe_file_name("Kanal a\u0308") == safe_file_name("Kanal \u00e4")


def test_report_keeps_unicode_names_apart(tmp_path):
    from piezo.cli import main

    rate = 8000
    t = np.arange(rate) / rate
    files = []
    for name in ("Kanal ä.wav", "Kanal ö.wav", "Ölpumpe.wav"):
        sf.write(str(tmp_path / name), 0.1 * np.sin(2 * np.pi * 440 * t), rate)
        files.append(str(tmp_path / name))
    out = tmp_path / "out"
    with pytest.raises(SystemExit) as exc:
        main(["report", *files, "--out", str(out)])
    assert exc.value.code in (0, None)
    assert sorted(p.name for p in out.iterdir()) == [
        "Kanal ä.report.html",
        "Kanal ä.report.json",
        "Kanal ö.report.html",
        "Kanal ö.report.json",
        "Ölpumpe.report.html",
        "Ölpumpe.report.json",
    ]
