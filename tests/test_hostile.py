"""Hostile and careless input across every command: one line naming the file, exit 2.

Each case builds a bad input of its own in ``tmp_path`` and asserts the promise of the
command line (``piezo: error: <file>: <problem>``, exactly one line on stderr, exit 2, no
traceback) and that nothing half-written is left behind: the output folder holds no
temporary ``.partial`` file and any earlier output is byte for byte as it was.
"""

from __future__ import annotations

import errno
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from tests.paths import RECORDINGS, REPO

FS = 48000


def assert_one_line(r, *names: str | Path, message: str | None = None) -> str:
    """Exit 2, one ``piezo: error:`` line naming every one of ``names``."""
    assert r.code == 2, (r.code, r.err)
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    line = lines[0]
    assert line.startswith("piezo: error: "), line
    assert "Traceback" not in r.err
    for name in names:
        assert str(name) in line, (name, line)
    if message is not None:
        assert message in line, (message, line)
    return line


def assert_nothing_partial(folder: Path) -> None:
    left = [p.name for p in folder.rglob("*") if ".partial" in p.name]
    assert left == [], left


def tone_wav(path: Path, *, subtype: str = "PCM_24", seconds: float = 1.0) -> Path:
    t = np.arange(int(seconds * FS)) / FS
    sf.write(str(path), 0.5 * np.sin(2 * np.pi * 1000.0 * t), FS, subtype=subtype)
    return path


def nan_wav(path: Path) -> Path:
    t = np.arange(FS) / FS
    x = 0.5 * np.sin(2 * np.pi * 1000.0 * t)
    x[30000] = np.nan
    sf.write(str(path), x, FS, subtype="FLOAT")
    return path


# --- recordings ---------------------------------------------------------------------

#: Every command that reads one recording, with the arguments it needs besides it.
READERS = [
    ("info",),
    ("levels",),
    ("spectrum",),
    ("bands",),
    ("tone",),
    ("check",),
    ("calibrate",),
]


def _bad_recording(tmp_path: Path, kind: str) -> tuple[Path, str]:
    p = tmp_path / "bad.wav"
    if kind == "missing":
        return tmp_path / "missing.wav", "no such file"
    if kind == "folder":
        d = tmp_path / "folder.wav"
        d.mkdir()
        return d, "is a directory"
    if kind == "empty":
        p.write_bytes(b"")
        return p, "empty"
    if kind == "random":
        p.write_bytes(np.random.default_rng(7).bytes(4096))
        return p, "not a readable audio file"
    if kind == "nan_float_wav":
        return nan_wav(p), "non-finite value (NaN or infinite) in channel 0 at sample 30000"
    if kind == "device":
        return Path("/dev/zero"), "not a regular file"
    if kind == "nan_csv":
        q = tmp_path / "bad.csv"
        rows = [f"{i / 1000:.3f},{np.sin(i / 7):.6f}\n" for i in range(2000)]
        rows[1500] = "1.500,nan\n"
        q.write_text("time,v\n" + "".join(rows))
        return q, "non-finite value (NaN or infinite) in channel 0 ('v') at sample 1500"
    if kind == "latin1_csv":
        q = tmp_path / "bad.csv"
        lines = [f"{i / 1000:.3f},{np.sin(i / 7):.6f}\n".encode() for i in range(1500)]
        lines[1200] = b"1.200,0.5\xe9\n"  # a Latin-1 byte on line 1202 (after the header)
        q.write_bytes(b"time,v\n" + b"".join(lines))
        return q, "line 1202: not UTF-8 text"
    if kind == "one_hz_csv":
        q = tmp_path / "slow.csv"
        q.write_text("time,v\n" + "".join(f"{i},{i % 3}\n" for i in range(100)))
        return q, "must be between 10 Hz"
    if kind == "control_chars_csv":
        q = tmp_path / "bad.csv"
        rows = "".join(f"{i / 1000:.3f},{i}\n" for i in range(300))
        q.write_text("time,v\n" + rows + "0.300,\x1b[2J" + "A" * 5000 + "\n")
        return q, "line 302"
    raise AssertionError(kind)


BAD_RECORDINGS = [
    "missing",
    "folder",
    "empty",
    "random",
    "nan_float_wav",
    "device",
    "nan_csv",
    "latin1_csv",
    "one_hz_csv",
    "control_chars_csv",
]


@pytest.mark.parametrize("kind", BAD_RECORDINGS)
@pytest.mark.parametrize("command", READERS, ids=lambda c: c[0])
def test_bad_recordings(cli, tmp_path, command, kind):
    path, message = _bad_recording(tmp_path, kind)
    r = cli(*command, path)
    line = assert_one_line(r, path, message=message)
    # A message quotes a short, printable excerpt of a bad line, never the line itself.
    assert len(line) < 300, line
    assert "\x1b" not in line


@pytest.mark.parametrize("kind", ["nan_float_wav", "random", "latin1_csv"])
def test_bad_recordings_in_a_report(cli, tmp_path, kind):
    path, message = _bad_recording(tmp_path, kind)
    out = tmp_path / "reports"
    r = cli("report", path, "--out", out)
    assert_one_line(r, path, message=message)
    assert not out.exists() or not any(out.iterdir())


def test_library_chatter_is_silenced(tmp_path):
    # libsndfile's MPEG decoder prints its own warning on fd 2 for some random bytes;
    # the user sees piezo's line only. A subprocess, so that fd 2 itself is captured.
    bad = tmp_path / "noise.wav"
    for seed in range(8):
        bad.write_bytes(np.random.default_rng(seed).bytes(4096))
        proc = subprocess.run(
            [sys.executable, "-m", "piezo", "info", str(bad)],
            capture_output=True,
            text=True,
            cwd=tmp_path,
            env={**os.environ, "PYTHONPATH": str(REPO)},
            timeout=120,
            check=False,
        )
        assert proc.returncode == 2, proc.stderr
        assert proc.stderr.count("\n") == 1, proc.stderr
        assert proc.stderr.startswith(f"piezo: error: {bad}: ")


def test_growing_csv_is_analysed_as_validated(tmp_path):
    from piezo.io.reader import open_recording

    p = tmp_path / "growing.csv"
    p.write_text("time,v\n" + "".join(f"{i / 1000:.3f},1\n" for i in range(3000)))
    rec = open_recording(p)
    with open(p, "a") as fh:  # a logger appends while piezo reads
        fh.write("".join(f"{i / 1000:.3f},nan\n" for i in range(3000, 6000)))
    blocks = list(rec.blocks(1024))
    assert sum(b.shape[0] for b in blocks) == rec.frames == 3000
    assert all(np.isfinite(b).all() for b in blocks)


def test_shortened_csv_is_refused(tmp_path):
    from piezo.errors import RecordingError
    from piezo.io.reader import open_recording

    p = tmp_path / "short.csv"
    text = "time,v\n" + "".join(f"{i / 1000:.3f},1\n" for i in range(3000))
    p.write_text(text)
    rec = open_recording(p)
    p.write_text(text[: text.index("1.500,")])
    with pytest.raises(RecordingError, match="data ends after"):
        list(rec.blocks(1024))


# --- TOML and text files named by options or by other files ---------------------------


def _deep_toml(depth: int = 5000) -> str:
    return "x = " + "[" * depth + "]" * depth + "\n"


def test_deep_profile(cli, tmp_path):
    wav = tone_wav(tmp_path / "a.wav")
    prof = tmp_path / "p.toml"
    prof.write_text("[sensor]\n" + _deep_toml())
    assert_one_line(cli("info", wav, "--profile", prof), prof, message="nested deeper")


def test_deep_sidecar_profile(cli, tmp_path):
    wav = tone_wav(tmp_path / "a.wav")
    (tmp_path / "a.toml").write_text(_deep_toml())
    assert_one_line(cli("levels", wav), tmp_path / "a.toml", message="nested deeper")


def test_deep_thresholds(cli, tmp_path):
    wav = tone_wav(tmp_path / "a.wav")
    th = tmp_path / "t.toml"
    th.write_text("[thresholds]\n" + _deep_toml())
    assert_one_line(cli("check", wav, "--thresholds", th), th, message="nested deeper")


def test_deep_design(cli, tmp_path):
    design = tmp_path / "d.toml"
    design.write_text("a = " + "{b = " * 3000 + "1" + "}" * 3000 + "\n")
    assert_one_line(cli("frontend", design), design, message="nested deeper")


def test_deep_spec(cli, tmp_path):
    spec = tmp_path / "s.toml"
    spec.write_text(_deep_toml())
    r = cli("batch", RECORDINGS / "pd27-lot", "--spec", spec, "--out", tmp_path / "out")
    assert_one_line(r, spec, message="nested deeper")


def test_huge_profile_is_not_read(cli, tmp_path):
    wav = tone_wav(tmp_path / "a.wav")
    prof = tmp_path / "p.toml"
    with open(prof, "wb") as fh:
        fh.write(b"# " + b"x" * (17 * 1024 * 1024) + b"\n")
    assert_one_line(cli("info", wav, "--profile", prof), prof, message="larger than")


def _spec_with_golden(tmp_path: Path, golden: str) -> Path:
    text = (RECORDINGS / "pd27-spec.toml").read_text(encoding="utf-8")
    stim = RECORDINGS / "valve-pickup-sweep.stimulus.toml"
    text = text.replace('golden = "pd27-golden.csv"', f"golden = {golden!r}")
    spec = tmp_path / "spec.toml"
    spec.write_text(text.replace("pd27-", str(RECORDINGS / "pd27-")), encoding="utf-8")
    assert stim.is_file()
    return spec


def test_spec_naming_a_device_as_golden_table(cli, tmp_path):
    spec = _spec_with_golden(tmp_path, "/dev/zero")
    r = cli("batch", RECORDINGS / "pd27-lot", "--spec", spec, "--out", tmp_path / "out")
    assert_one_line(r, spec, message="/dev/zero")
    assert "not a regular file" in r.err


def test_spec_with_latin1_golden_table(cli, tmp_path):
    golden = tmp_path / "golden.csv"
    golden.write_bytes(b"frequency_hz,magnitude_db\n100,-40\n1000,-38\n5000,-39\xe9\n")
    spec = _spec_with_golden(tmp_path, str(golden))
    r = cli("limits", "derive", RECORDINGS / "pd27-golden", "--spec", spec, "--out",
            tmp_path / "new.toml")  # fmt: skip
    assert_one_line(r, spec, message="not UTF-8")
    assert not (tmp_path / "new.toml").exists()


def test_design_with_an_impossible_capacitance(cli, tmp_path):
    text = (RECORDINGS / "designs" / "pump-disc-charge.toml").read_text(encoding="utf-8")
    design = tmp_path / "d.toml"
    design.write_text(
        text.replace('feedback_capacitance = "10 nF"', 'feedback_capacitance = "1e300 F"')
    )
    assert_one_line(cli("frontend", design), design, message="feedback")


def test_stimulus_sidecar_that_is_a_folder(cli, tmp_path):
    wav = tone_wav(tmp_path / "cap.wav")
    side = tmp_path / "s.stimulus.toml"
    side.mkdir()
    r = cli("sweep", "analyze", wav, "--stimulus", side)
    assert_one_line(r, side, message="is a directory")


def test_golden_table_with_a_hostile_line(cli, tmp_path):
    stim = RECORDINGS / "valve-pickup-sweep.stimulus.toml"
    golden = tmp_path / "g.csv"
    golden.write_text("frequency_hz,magnitude_db\n100,-40\n1000,\x07" + "9" * 4000 + "x\n5000,1\n")
    r = cli("sweep", "analyze", RECORDINGS / "valve-pickup-sweep.flac", "--stimulus", stim,
            "--golden", golden)  # fmt: skip
    line = assert_one_line(r, golden, message="line 3")
    assert len(line) < 300 and "\x07" not in line


# --- output paths ------------------------------------------------------------------


def _outputs(tmp_path: Path, target: Path) -> list[list[str | Path]]:
    """Every command that writes a file, writing to ``target``."""
    wav = tone_wav(tmp_path / "in.wav")
    cal = RECORDINGS / "calibrator-94dB.wav"
    design = RECORDINGS / "designs" / "pump-disc-charge.toml"
    return [
        ["spectrum", wav, "--csv", target],
        ["spectrum", wav, "--plot", target],
        ["bands", wav, "--csv", target],
        ["frontend", design, "--plot", target],
        ["calibrate", cal, "--write-profile", target],
        [
            "sweep",
            "make",
            "--from",
            "20",
            "--to",
            "20k",
            "--duration",
            "0.5 s",
            "--rate",
            "48k",
            "--out",
            target,
        ],
    ]


#: The file each of :func:`_outputs` writes, and whether it takes --force (calibrate
#: --write-profile edits a profile in place, the documented exception).
NAMES = ["out.csv", "out.png", "out.csv", "out.png", "out.toml", "out.wav"]
FORCE = [["--force"]] * 4 + [[]] + [["--force"]]


def _folder_outputs(tmp_path: Path, target: Path) -> list[list[str | Path]]:
    return [
        ["report", tone_wav(tmp_path / "in.wav"), "--out", target],
        ["batch", RECORDINGS / "pd27-lot" / "PD27-24101.flac", "--spec",
         RECORDINGS / "pd27-spec.toml", "--out", target],
    ]  # fmt: skip


@pytest.mark.parametrize("index", range(6))
def test_output_is_a_folder(cli, tmp_path, index):
    target = tmp_path / NAMES[index]
    target.mkdir()
    args = _outputs(tmp_path, target)[index]
    assert_one_line(cli(*args, *FORCE[index]), target, message="is a directory")
    assert_nothing_partial(tmp_path)


@pytest.mark.parametrize("index", range(6))
def test_output_below_a_plain_file(cli, tmp_path, index):
    (tmp_path / "plain").write_text("keep me")
    target = tmp_path / "plain" / NAMES[index]
    args = _outputs(tmp_path, target)[index]
    assert_one_line(cli(*args), target, message="not a directory")
    assert (tmp_path / "plain").read_text() == "keep me"


@pytest.mark.parametrize("index", range(2))
def test_output_folder_is_a_plain_file(cli, tmp_path, index):
    target = tmp_path / "plain"
    target.write_text("keep me")
    args = _folder_outputs(tmp_path, target)[index]
    assert_one_line(cli(*args), target)
    assert target.read_text() == "keep me"


@pytest.mark.parametrize("index", [0, 2, 5])
def test_existing_output_needs_force(cli, tmp_path, index):
    target = tmp_path / NAMES[index]
    target.write_text("earlier result")
    args = _outputs(tmp_path, target)[index]
    assert_one_line(cli(*args), target, message="use --force")
    assert target.read_text() == "earlier result"


@pytest.mark.parametrize("errno_code", [errno.EROFS, errno.ENOSPC])
@pytest.mark.parametrize("index", [0, 1, 2, 3])
def test_read_only_or_full_disk(cli, tmp_path, monkeypatch, index, errno_code):
    # The machine's state, simulated where every output is written: the rename that
    # would publish the file fails (as on a read-only remount) or the data does not fit.
    target = tmp_path / NAMES[index]
    target.write_text("earlier result")
    args = _outputs(tmp_path, target)[index]

    def fail(*_a, **_k):
        raise OSError(errno_code, os.strerror(errno_code))

    monkeypatch.setattr("piezo.io.atomic.os.replace", fail)
    r = cli(*args, "--force")
    reason = "read-only file system" if errno_code == errno.EROFS else "no space left"
    assert_one_line(r, target, message=reason)
    assert target.read_text() == "earlier result"
    assert_nothing_partial(tmp_path)


def test_read_only_folder_for_a_report(cli, tmp_path, monkeypatch):
    def fail(*_a, **_k):
        raise OSError(errno.EROFS, "Read-only file system")

    monkeypatch.setattr(tempfile, "mkstemp", fail)
    out = tmp_path / "reports"
    r = cli("report", tone_wav(tmp_path / "in.wav"), "--out", out)
    assert_one_line(r, out, message="read-only file system")


# --- outputs that cannot be turned against their readers --------------------------------


def test_results_csv_neutralises_formulas(cli, tmp_path, monkeypatch):
    lot = tmp_path / "lot"
    lot.mkdir()
    hostile = '=HYPERLINK("x") PD27-24101.flac'
    other = "@SUM(1) PD27-24102.flac"
    shutil.copy(RECORDINGS / "pd27-lot" / "PD27-24101.flac", lot / hostile)
    shutil.copy(RECORDINGS / "pd27-lot" / "PD27-24102.flac", lot / other)
    out = tmp_path / "out"
    # Named relative to the lot folder, the file cells start with the hostile text.
    monkeypatch.chdir(lot)
    r = cli("batch", hostile, other, "--spec", RECORDINGS / "pd27-spec.toml", "--out", out)
    assert r.code in (0, 1), r.err
    import csv

    with open(out / "results.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))
    files = sorted(row["file"] for row in rows)
    assert all(f.startswith("'") for f in files), files
    assert files == sorted(["'" + hostile, "'" + other])
    # Numbers stay numbers: every metric cell parses as a float (or is empty).
    for row in rows:
        for key, value in row.items():
            if key not in ("file", "serial", "verdict", "failed_limits", "warnings",
                           "not_evaluable", "error", "content_sha256", "spec_sha256"):  # fmt: skip
                assert value == "" or float(value) == float(value)


def test_symlinked_reports_folder_is_refused(cli, tmp_path):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    out = tmp_path / "out"
    out.mkdir()
    (out / "reports").symlink_to(elsewhere, target_is_directory=True)
    r = cli("batch", RECORDINGS / "pd27-lot" / "PD27-24101.flac", "--spec",
            RECORDINGS / "pd27-spec.toml", "--out", out, "--reports")  # fmt: skip
    assert_one_line(r, out / "reports", message="symbolic link")
    assert list(elsewhere.iterdir()) == []


def test_symlinked_result_file_is_replaced_not_followed(tmp_path):
    from piezo.io.atomic import write_text_atomic

    victim = tmp_path / "victim.txt"
    victim.write_text("precious")
    out = tmp_path / "out"
    out.mkdir()
    (out / "results.csv").symlink_to(victim)
    write_text_atomic(out / "results.csv", "new", within=out)
    assert victim.read_text() == "precious"
    assert not (out / "results.csv").is_symlink()
    assert (out / "results.csv").read_text() == "new"
