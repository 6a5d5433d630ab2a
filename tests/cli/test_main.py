"""The command line: info, calibrate, demo, global options and bad input handling."""

from __future__ import annotations

import importlib.util
import itertools
import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
import soundfile as sf
import typer.main

from piezo import __version__
from piezo.cli import COMMANDS, _load, app
from piezo.tone.calibrator import calibrator_pressure_pa
from tests.paths import REPO
from tests.processes import interruptible

#: The analysis stack: none of it may load for ``--help`` or ``--version``.
ANALYSIS_STACK = ("numpy", "scipy", "numba", "matplotlib", "soundfile", "jinja2")


def present(command):
    return importlib.util.find_spec(f"piezo.cli.{command.module}") is not None


def run_piezo(*args, env=None, **kwargs):
    """``python -m piezo ARGS`` in a fresh process (start-up included), from no folder of ours."""
    return subprocess.run(
        [sys.executable, "-m", "piezo", *map(str, args)],
        capture_output=True,
        text=True,
        check=False,
        cwd=REPO.parent,
        env={**os.environ, "PYTHONPATH": str(REPO), **(env or {})},
        **kwargs,
    )


def imported_top_levels(*args, env=None):
    """Modules ``piezo ARGS`` has imported when it exits."""
    probe = textwrap.dedent(
        f"""
        import runpy, sys
        sys.argv = ["piezo", *{list(map(str, args))!r}]
        try:
            runpy.run_module("piezo", run_name="__main__")
        except SystemExit:
            pass
        sys.stderr.write("MODULES " + " ".join(sorted(sys.modules)) + "\\n")
        """
    )
    r = subprocess.run(
        [sys.executable, "-c", probe],
        capture_output=True,
        text=True,
        check=False,
        cwd=REPO.parent,
        env={**os.environ, "PYTHONPATH": str(REPO), "COLUMNS": "80", **(env or {})},
    )
    (line,) = [ln for ln in r.stderr.splitlines() if ln.startswith("MODULES ")]
    return set(line.split()[1:])


def test_version(cli):
    r = cli("--version")
    assert r.code == 0
    assert r.out.strip() == f"piezo {__version__}"


def test_help_lists_every_command(cli):
    r = cli("--help")
    assert r.code == 0
    listed = [c for c in COMMANDS if present(c)]
    assert len(listed) >= 17
    for command in listed:
        assert f" {command.name} " in r.out


@pytest.mark.parametrize("command", [c for c in COMMANDS if present(c)], ids=lambda c: c.name)
def test_command_table_matches_what_the_module_registers(command):
    # The listing comes from the table without importing anything: the table must name
    # the module that really registers the command, with the help the command shows.
    registered = _load(command.module)
    assert command.name in registered, f"{command.module}.register() adds no {command.name!r}"
    first_paragraph = (registered[command.name].help or "").split("\n\n")[0]
    assert " ".join(first_paragraph.split()) == command.help, (
        "update the one-line help in piezo.cli.COMMANDS"
    )


@pytest.mark.parametrize("args", [["--help"], ["--version"], []], ids=["help", "version", "bare"])
def test_help_and_version_load_no_analysis_stack(args):
    loaded = imported_top_levels(*args)
    assert "piezo" in loaded  # the probe did run piezo
    heavy = sorted(m for m in loaded if m.split(".")[0] in ANALYSIS_STACK)
    assert heavy == []
    # ... and no command module: they load when their command runs (the exit-code
    # constants, a module of four integers, are no command).
    commands = [m for m in loaded if m.startswith("piezo.cli.") and m != "piezo.cli.exits"]
    assert commands == []


def test_a_command_loads_only_its_own_module():
    loaded = imported_top_levels("levels", "--help")
    cli_modules = {m for m in loaded if m.startswith("piezo.cli.")}
    assert "piezo.cli.levels" in cli_modules
    assert not cli_modules & {"piezo.cli.batch", "piezo.cli.report", "piezo.cli.sweep"}


def test_levels_loads_no_plotting_templates_or_filter_design(tmp_path):
    path = tmp_path / "short.wav"
    fs = 8000
    sf.write(str(path), 0.1 * np.sin(2 * np.pi * 1000 * np.arange(fs) / fs), fs)
    # A cache folder of this test's own: the first run designs and compiles.
    env = {"PIEZO_CACHE_DIR": str(tmp_path / "cache")}
    first = imported_top_levels("levels", path, "--json", env=env)
    assert "scipy.optimize" in first  # the weighting was designed for 8 kHz ...
    assert list((tmp_path / "cache" / "designs").glob("weighting-*.npz"))
    loaded = imported_top_levels("levels", path, "--json", env=env)
    assert "piezo.levels.meter" in loaded  # it did measure
    assert not {m.split(".")[0] for m in loaded} & {"matplotlib", "jinja2"}
    # ... and is read back from the cache: no filter design code is loaded.
    assert not {"scipy.optimize", "scipy.signal"} & loaded
    # The compiled kernels are loaded from the cache without numba
    # (piezo._kernels.native), and none of the libraries numba's unused features
    # would import come in.
    assert "numba" in first and "numba" not in loaded, "kernels not loaded from the cache"
    assert not {"scipy.linalg", "cffi", "yaml"} & loaded


def test_python_dash_m_works(tmp_path):
    r = subprocess.run(
        [sys.executable, "-m", "piezo", "--version"], capture_output=True, text=True, check=False
    )
    assert r.returncode == 0
    assert r.stdout.strip() == f"piezo {__version__}"


def test_a_process_ends_with_its_whole_output_and_exit_code(cli, tmp_path):
    # The console entry freezes the garbage collector's objects before exiting (start-up
    # time): the output of a whole process must still equal the in-process run's, and a
    # refused input still exit 2 with its one line.
    path = tmp_path / "tone.wav"
    fs = 8000
    sf.write(str(path), 0.1 * np.sin(2 * np.pi * 1000 * np.arange(fs) / fs), fs)
    whole = run_piezo("levels", path, "--json", "--interval", "0.25s")
    assert whole.returncode == 0, whole.stderr
    assert whole.stdout == cli("levels", path, "--json", "--interval", "0.25s").out
    bad = run_piezo("levels", tmp_path / "missing.wav")
    assert bad.returncode == 2
    assert len(bad.stderr.splitlines()) == 1 and "missing.wav" in bad.stderr


@pytest.fixture
def full_scale_sine(tmp_path):
    fs = 48000
    t = np.arange(fs) / fs
    x = np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "fs.wav"
    sf.write(str(path), np.column_stack([x, 0.5 * x]), fs, subtype="DOUBLE")
    return path


def test_file_names_print_as_they_are(cli, full_scale_sine):
    # A name is the user's text: no emoji codes replaced (":fire:" would print a flame),
    # no markup applied, on stdout and in the one-line error on stderr.
    named = full_scale_sine.with_name("probe:fire: [bold]x.wav")
    full_scale_sine.rename(named)
    r = cli("levels", named)
    assert r.code == 0, r.err
    assert named.name in r.out
    missing = cli("levels", named.with_name(":fire:missing.wav"))
    assert missing.code == 2 and ":fire:missing.wav" in missing.err


def test_control_characters_in_names_are_shown_as_escapes(cli, full_scale_sine):
    # A file name holding an escape sequence and a line break must not reach the terminal
    # raw (it could recolour or clear it), and the error stays one line.
    named = full_scale_sine.with_name("a\x1b[31mred\nline.wav")
    full_scale_sine.rename(named)
    r = cli("levels", named)
    assert r.code == 0, r.err
    assert "\x1b" not in r.out and "a\\x1b[31mred\\nline.wav" in r.out.splitlines()[0]
    missing = cli("levels", named.with_name("gone\x1b[2J\n.wav"))
    assert missing.code == 2 and "\x1b" not in missing.err
    assert len(missing.err.splitlines()) == 1 and "gone\\x1b[2J\\n.wav" in missing.err
    bad = cli("levels", named, "--settle", "\x1b[2J")
    assert bad.code == 2 and "\x1b" not in bad.err and len(bad.err.splitlines()) == 1


def test_info_json_contract(cli, full_scale_sine):
    r = cli("info", full_scale_sine, "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert doc["sample_rate_hz"] == 48000
    assert doc["frames"] == 48000
    assert doc["duration_s"] == pytest.approx(1.0)
    ch0, ch1 = doc["channels"]
    assert ch0["channel"] == 0
    # AES17: a full-scale sine has peak 0 dBFS and RMS 0 dBFS.
    assert ch0["peak_dbfs"] == pytest.approx(0.0, abs=1e-6)
    assert ch0["rms_dbfs"] == pytest.approx(0.0, abs=1e-6)
    # Half amplitude: -6.02 dB (20 lg 0.5).
    assert ch1["rms_dbfs"] == pytest.approx(-6.0206, abs=1e-3)
    assert doc["unit"] == "V"


def test_info_calibrated(cli, full_scale_sine):
    r = cli(
        "info",
        full_scale_sine,
        "--json",
        "--sensitivity",
        "10 mV/Pa",
        "--full-scale",
        "2 V",
        "--gain",
        "20 dB",
        "--channel",
        "1",
    )
    doc = r.json()
    (ch,) = doc["channels"]
    assert ch["channel"] == 1
    # 0.5 FS sine: RMS 0.5/√2 FS x 2 V / 10 / 0.01 V/Pa = 7.071 Pa.
    assert ch["rms_pa"] == pytest.approx(7.0711, rel=1e-4)
    assert ch["rms_db"] == pytest.approx(20 * np.log10(7.0711 / 20e-6), abs=1e-3)


def calibrator_file(tmp_path, *, sens=0.0085, gain_db=20.0, full_scale=2.0, level=94.0):
    fs = 48000
    t = np.arange(3 * fs) / fs
    p = calibrator_pressure_pa(level) * np.sqrt(2) * np.sin(2 * np.pi * 1000 * t)
    raw = p * sens * 10 ** (gain_db / 20) / full_scale
    path = tmp_path / "cal.wav"
    sf.write(str(path), raw, fs, subtype="PCM_24")
    return path


def test_calibrate_json_contract(cli, tmp_path):
    path = calibrator_file(tmp_path)
    r = cli("calibrate", path, "--gain", "20 dB", "--full-scale", "2 V", "--json")
    assert r.code == 0, r.err
    doc = r.json()
    assert set(doc) >= {
        "sensitivity_mv_per_pa",
        "sensitivity_dbv_per_pa",
        "tone_hz",
        "residual_db",
    }
    # 24-bit quantisation of a -27 dBFS tone leaves ~ -120 dB re tone: 1e-4 is ample.
    assert doc["sensitivity_mv_per_pa"] == pytest.approx(8.5, rel=1e-4)
    assert doc["sensitivity_dbv_per_pa"] == pytest.approx(20 * np.log10(0.0085), abs=1e-3)
    assert doc["tone_hz"] == pytest.approx(1000.0, rel=1e-5)
    # The chain is under "chain", named as in info and check (docs/glossary.md).
    assert doc["chain"] == {"full_scale_v": 2.0, "gain": pytest.approx(10.0), "reference_pa": 2e-5}
    assert not {"gain", "full_scale_v", "reference_pa"} & set(doc)


def test_calibrate_states_its_uncertainty_budget(cli, tmp_path):
    path = calibrator_file(tmp_path)
    doc = cli("calibrate", path, "--gain", "20 dB", "--full-scale", "2 V", "--json").json()
    u = doc["uncertainty"]
    # A clean 24-bit tone leaves the class 1 calibrator tolerance (IEC 60942:2017,
    # ±0.25 dB, rectangular: u = 0.25/√3, GUM 4.3.7) alone: U = 2·0.1443 dB.
    assert u["expanded_uncertainty_db"] == pytest.approx(2 * 0.25 / np.sqrt(3), rel=1e-3)
    names = [c["name"] for c in u["budget"]["components"]]
    assert names[0].startswith("calibrator level") and len(names) == 3
    cert = cli(
        "calibrate",
        path,
        "--full-scale",
        "2 V",
        "--gain",
        "20 dB",
        "--json",
        "--calibrator-uncertainty",
        "0.1 dB",
    ).json()
    assert cert["uncertainty"]["expanded_uncertainty_db"] == pytest.approx(0.1, rel=1e-3)
    text = cli("calibrate", path, "--gain", "20 dB", "--full-scale", "2 V")
    assert "± 0.29 dB (k = 2.00" in text.out
    bad = cli("calibrate", path, "--calibrator-tolerance", "-1 dB")
    assert bad.code == 2 and "--calibrator-tolerance" in bad.err


def test_calibrate_114_db(cli, tmp_path):
    path = calibrator_file(tmp_path, level=114.0, gain_db=0.0)
    r = cli("calibrate", path, "--level", "114", "--full-scale", "2 V", "--json")
    assert r.json()["sensitivity_mv_per_pa"] == pytest.approx(8.5, rel=1e-4)


def test_calibrate_writes_profile(cli, tmp_path):
    path = calibrator_file(tmp_path)
    prof = tmp_path / "cal.toml"
    prof.write_text('[sensor]\nname = "x"\n\n[chain]\ngain = "20 dB"\nfull_scale = "2 V"\n')
    r = cli("calibrate", path, "--write-profile", prof)
    assert r.code == 0, r.err
    text = prof.read_text()
    assert 'sensitivity = "8.5 mV/Pa"' in text
    # The sidecar is now read automatically: 94 dB comes back from info.
    doc = cli("info", path, "--json").json()
    assert doc["channels"][0]["rms_db"] == pytest.approx(94.0, abs=0.01)


def test_demo_writes_recordings_that_analyse(cli, tmp_path):
    r = cli("demo", "--out", tmp_path)
    assert r.code == 0, r.err
    cal = cli("calibrate", tmp_path / "calibrator-94dB.wav", "--json").json()
    # The demo's film element was made with 8.5 mV/Pa; the 42 dB room noise in the
    # one-third-octave band sits ~60 dB under the tone, so 0.05 % is ample.
    assert cal["sensitivity_mv_per_pa"] == pytest.approx(8.5, rel=5e-4)
    hyd = cli("info", tmp_path / "tank-hydrophone.flac", "--json").json()
    assert hyd["level_unit"] == "dB re 1 µPa"


# --- bad input: one line on stderr naming the file, exit 2, no traceback -----------------


def make_bad(tmp_path, kind):
    p = tmp_path / "bad.wav"
    if kind == "missing":
        return tmp_path / "missing.wav", "no such file"
    if kind == "directory":
        return tmp_path, "is a directory"
    if kind == "empty":
        p.write_bytes(b"")
        return p, "empty"
    if kind == "text":
        p.write_text("hello, I am a text file\n" * 10)
        return p, "not a readable audio file"
    if kind == "garbage":
        p.write_bytes(b"RIFF\x10\x00\x00\x00WAVEfmt " + bytes(range(256)) * 4)
        return p, "not a readable audio file"
    if kind == "zero_frames":
        sf.write(str(p), np.zeros((0, 1)), 8000)
        return p, "no samples"
    if kind == "truncated":
        q = tmp_path / "bad.flac"
        sf.write(str(q), np.random.default_rng(1).uniform(-1, 1, 96000), 48000)
        q.write_bytes(q.read_bytes()[:20000])
        return q, "bad.flac"
    if kind == "truncated_wav":
        sf.write(str(p), np.random.default_rng(1).uniform(-1, 1, 96000), 48000)
        p.write_bytes(p.read_bytes()[:20000])
        return p, "truncated: the header announces 96000 frames"
    if kind == "nan_csv":
        q = tmp_path / "bad.csv"
        q.write_text("time,v\n0,1\n0.001,nan\n0.002,3\n")
        return q, "non-finite value"
    if kind == "uneven_csv":
        q = tmp_path / "bad.csv"
        q.write_text("time,v\n0,1\n0.001,2\n0.0025,3\n0.0035,4\n")
        return q, "not uniformly spaced"
    raise AssertionError(kind)


@pytest.mark.parametrize(
    "kind",
    [
        "missing",
        "directory",
        "empty",
        "text",
        "garbage",
        "zero_frames",
        "truncated",
        "nan_csv",
        "uneven_csv",
    ],
)
def test_bad_files(cli, tmp_path, kind):
    path, message = make_bad(tmp_path, kind)
    r = cli("info", path)
    assert r.code == 2
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    assert lines[0].startswith("piezo: error: ")
    assert str(path) in lines[0]
    assert message in lines[0]
    assert "Traceback" not in r.err


@pytest.mark.parametrize(
    ("options", "message"),
    [
        (["--sensitivity", "12 mV"], "--sensitivity: cannot read sensitivity '12 mV'"),
        (["--sensitivity", "0 mV/Pa"], "sensitivity must be positive"),
        (["--sensitivity", "-5 mV/Pa"], "sensitivity must be positive"),
        (["--gain", "3 furlongs"], "--gain"),
        (["--full-scale", "2 A"], "--full-scale: unknown unit in '2 A'"),
        (["--channel", "5"], "channel 5 is out of range"),
        (["--sensitivity", "12 pC/Pa"], "--charge-gain"),
    ],
)
def test_bad_options(cli, full_scale_sine, options, message):
    r = cli("info", full_scale_sine, *options)
    assert r.code == 2
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    assert message in lines[0]
    assert str(full_scale_sine) in lines[0]
    assert "Traceback" not in r.err


def test_debug_shows_the_traceback(tmp_path):
    r = subprocess.run(
        [sys.executable, "-m", "piezo", "info", str(tmp_path / "missing.wav"), "--debug"],
        capture_output=True,
        text=True,
        check=False,
    )
    assert r.returncode != 0
    assert "Traceback" in r.stderr
    assert "RecordingError" in r.stderr


def test_json_output_is_one_document_and_nothing_else(cli, full_scale_sine):
    r = cli("info", full_scale_sine, "--json")
    import json

    json.loads(r.out)  # raises if anything else is on stdout
    assert r.err == ""


# --- usage mistakes: one line on stderr, exit 2 --------------------------------------------


@pytest.mark.parametrize(
    ("args", "expected"),
    [
        (
            ["levels", "{file}", "--intervall", "1s"],
            "piezo: error: no such option --intervall (did you mean --integrate or --interval?)",
        ),
        (["levls", "{file}"], "piezo: error: no such command 'levls' (did you mean levels?)"),
        (["sweep", "mak"], "piezo: error: no such command 'mak' (did you mean make?)"),
        (["levels"], "piezo: error: missing argument FILE (see piezo levels --help)"),
        (
            ["sweep", "analyze", "{file}"],
            "piezo: error: missing option --stimulus (see piezo sweep analyze --help)",
        ),
        (["info", "{file}", "{file}"], "piezo: error: got unexpected extra argument"),
        (["levels", "{file}", "--interval"], "piezo: error: option '--interval' requires"),
    ],
)
def test_usage_mistakes_are_one_line(cli, full_scale_sine, args, expected):
    r = cli(*[a.replace("{file}", str(full_scale_sine)) for a in args])
    assert r.code == 2
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    assert lines[0].startswith(expected)
    assert r.out == ""


def test_usage_mistake_is_one_line_from_a_terminal_width_process(full_scale_sine):
    r = run_piezo("levels", full_scale_sine, "--intervall", "1s", env={"COLUMNS": "80"})
    assert r.returncode == 2
    assert r.stderr.splitlines() == [
        "piezo: error: no such option --intervall (did you mean --integrate or --interval?)"
    ]


# --- help text: plain text, reflowed --------------------------------------------------------


def test_help_keeps_square_brackets(full_scale_sine):
    r = run_piezo("check", "--help", env={"COLUMNS": "80"})
    assert r.returncode == 0
    assert "[thresholds]" in r.stdout


def test_flags_show_no_value_in_help(cli):
    # A flag takes no value: its row must not show one (typer's default is the flag's
    # Python type, "<bool>", where an option's value goes). Every command and
    # subcommand, and the top level.
    group = typer.main.get_command(app)
    screens = [[]]
    for command in COMMANDS:
        screens.append([command.name])
        sub = group.get_command(None, command.name)
        screens += [[command.name, name] for name in getattr(sub, "commands", {})]
    for args in screens:
        r = cli(*args, "--help")
        assert r.code == 0, (args, r.err)
        assert "--help" in r.out and "<bool>" not in r.out, args
    assert cli("levels", "--json=yes", "x.wav").code == 2  # and still takes none


def help_prose(text):
    """The words of a help screen outside the option boxes, one paragraph per item."""
    prose, paragraph = [], []
    for line in text.splitlines():
        body = line.strip()
        if body.startswith(("╭", "│", "╰", "Usage:")) or not body:
            if paragraph:
                prose.append(paragraph)
            paragraph = []
        else:
            paragraph.append(body)
    return prose + ([paragraph] if paragraph else [])


@pytest.mark.parametrize(
    "args", [["sweep", "analyze"], ["check"], []], ids=["sweep", "check", "top"]
)
def test_help_paragraphs_reflow_at_80_columns(args):
    r = run_piezo(*args, "--help", env={"COLUMNS": "80"})
    assert r.returncode == 0
    assert all(len(line) <= 80 for line in r.stdout.splitlines())
    for paragraph in help_prose(r.stdout):
        # A reflowed paragraph fills each line but its last: a line that ends short of
        # the width while the next word would have fitted is a hard break in the source.
        for line, following in itertools.pairwise(paragraph):
            next_word = following.split()[0]
            assert len(line) + 1 + len(next_word) > 78, (line, following)


# --- Ctrl-C ---------------------------------------------------------------------------------


def test_interrupt_prints_one_line_and_exits_130(tmp_path):
    # A real `piezo levels` whose meter waits on each block, so the interrupt lands while
    # the command is working; the marker file says the work has begun.
    path = tmp_path / "long.wav"
    fs = 8000
    sf.write(str(path), 0.1 * np.ones(20 * fs), fs)
    marker = tmp_path / "started"
    probe = textwrap.dedent(
        f"""
        import pathlib, sys, time
        import piezo.levels.meter as meter
        from piezo.cli import main

        update = meter.LevelMeter.update

        def slow_update(self, block):
            pathlib.Path({str(marker)!r}).touch()
            time.sleep(0.2)
            return update(self, block)

        meter.LevelMeter.update = slow_update
        main(["levels", {str(path)!r}])
        """
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", probe],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        cwd=REPO.parent,
        env={**os.environ, "PYTHONPATH": str(REPO)},
        preexec_fn=interruptible,
    )
    try:
        deadline = time.monotonic() + 120  # start-up on a loaded machine, with compiling
        while not marker.exists():
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the command never started working"
            time.sleep(0.05)
        proc.send_signal(signal.SIGINT)
        _out, err = proc.communicate(timeout=60)
    finally:
        proc.kill()
    assert proc.returncode == 130
    assert err.splitlines() == ["piezo: interrupted"]
    assert "Traceback" not in err


def test_a_piezo_process_runs_one_blas_thread_unless_the_user_chose(tmp_path):
    probe = textwrap.dedent(
        """
        import os, runpy, sys
        sys.argv = ["piezo", "--version"]
        try:
            runpy.run_module("piezo", run_name="__main__")
        except SystemExit:
            pass
        print(os.environ.get("OPENBLAS_NUM_THREADS"), os.environ.get("OMP_NUM_THREADS"))
        """
    )
    base = {k: v for k, v in os.environ.items() if not k.endswith("_NUM_THREADS")}

    def run(**extra):
        r = subprocess.run(
            [sys.executable, "-c", probe],
            capture_output=True,
            text=True,
            check=True,
            env={**base, "PYTHONPATH": str(REPO), **extra},
        )
        return r.stdout.splitlines()[-1]

    assert run() == "1 1"
    assert run(OMP_NUM_THREADS="3") == "None 3"  # the user's choice: nothing touched


def test_collection_resumes_once_the_command_module_is_loaded(monkeypatch):
    # A console run starts with the garbage collector off (start-up time); loading the
    # command's module must turn it back on, or a long batch or report would never
    # collect.
    import gc

    from piezo import cli

    monkeypatch.setitem(cli._state, "collection_paused", True)
    gc.disable()
    try:
        cli._load("levels")
        assert gc.isenabled()
        assert cli._state["collection_paused"] is False
    finally:
        gc.enable()
        gc.unfreeze()
