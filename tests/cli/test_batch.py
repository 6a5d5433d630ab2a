"""``piezo batch`` and ``piezo limits derive`` from the command line.

The analyses are replaced by the arithmetic doubles of ``tests/batch_fakes.py`` (and
``--workers 1``, so the replacement holds in this process); the real extractors are
exercised on the demo lot in ``test_batch_lot.py``.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from piezo.batch.outputs import JOURNAL_NAME, LOCK_NAME, RESULT_FILES, report_link
from tests import batch_fakes as fakes
from tests.processes import interruptible

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture
def fake_lot(tmp_path):
    (tmp_path / "spec.toml").write_text(fakes.SPEC_TEXT, encoding="utf-8")
    fakes.write_lot(tmp_path / "lot")
    return tmp_path


@pytest.fixture
def with_fakes(monkeypatch):
    import piezo.batch.runner as runner

    monkeypatch.setattr(runner, "load_capture", fakes.load)
    monkeypatch.setattr(runner, "_default_extractors", lambda: fakes.EXTRACTORS)


def test_bad_spec_exits_2_before_reading_anything(cli, tmp_path):
    (tmp_path / "spec.toml").write_text(
        fakes.SPEC_TEXT.replace('severity = "warn"', 'severity = "maybe"'), encoding="utf-8"
    )
    line = fakes.SPEC_TEXT.splitlines().index('severity = "warn"') + 1
    r = cli(
        "batch",
        tmp_path / "missing-lot",
        "--spec",
        tmp_path / "spec.toml",
        "--out",
        tmp_path / "out",
    )
    assert r.code == 2
    assert r.err == (
        f"piezo: error: {tmp_path / 'spec.toml'}: line {line}: metrics.noise_floor.severity: "
        'expected "fail" or "warn", got str \'maybe\'\n'
    )
    assert not (tmp_path / "out").exists()


def test_unusable_arguments_exit_2(cli, fake_lot):
    spec = fake_lot / "spec.toml"
    r = cli("batch", fake_lot / "nothing-here", "--spec", spec, "--out", fake_lot / "out")
    assert r.code == 2 and "is neither a file, a directory nor a pattern" in r.err
    r = cli("batch", fake_lot / "lot", "--spec", spec, "--out", fake_lot / "o", "--workers", "0")
    assert r.code == 2 and "--workers: must be at least 1, got 0" in r.err
    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        spec,
        "--out",
        fake_lot / "o",
        "--workers",
        "2",
        "--cluster",
        "tcp://127.0.0.1:1",
    )
    assert r.code == 2 and "--workers applies to the local pool" in r.err


def test_run_writes_results_and_exits_1_on_failures(cli, fake_lot, with_fakes):
    out = fake_lot / "out"
    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        fake_lot / "spec.toml",
        "--out",
        out,
        "--workers",
        "1",
        "--reports",
    )
    assert r.code == 1, r.err
    assert "yield 75.0 % of 8 captures" in r.out
    assert "0100  " in r.out and "0102  " in r.out  # serials of the failing units
    # Verdicts in capitals on the terminal, as check's severities and the HTML badges.
    assert "FAIL" in r.out and "PASS" in r.out and " fail " not in r.out
    assert sorted(p.name for p in out.iterdir()) == sorted([*RESULT_FILES, "reports"])
    assert len(list((out / "reports").iterdir())) == 8
    html = (out / "summary.html").read_text(encoding="utf-8")
    assert 'href="reports/' in html
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert doc["summary"]["counts"] == {"pass": 5, "warn": 1, "fail": 1, "not evaluable": 1}

    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        fake_lot / "spec.toml",
        "--out",
        out,
        "--workers",
        "1",
        "--resume",
        "--json",
    )
    assert r.code == 1
    j = r.json()
    assert j["reused"] == 7  # the corrupt file is tried again
    assert [f["serial"] for f in j["failing"]] == ["0100", "0102"]


def test_all_good_exits_0(cli, tmp_path, with_fakes):
    fakes.write_lot(tmp_path / "lot", bad=False)
    (tmp_path / "spec.toml").write_text(fakes.SPEC_TEXT, encoding="utf-8")
    r = cli(
        "batch",
        str(tmp_path / "lot" / "*.wav"),
        "--spec",
        tmp_path / "spec.toml",
        "--out",
        tmp_path / "out",
        "--workers",
        "1",
        "--json",
    )
    assert r.code == 0, r.err
    assert r.json()["counts"]["pass"] == 5


def _start_slow_run(folder: Path, out: Path, *extra: str) -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.Popen(
        [
            sys.executable,
            "-c",
            "from tests.batch_fakes import slow_cli; slow_cli()",
            "batch",
            str(folder / "lot"),
            "--spec",
            str(folder / "spec.toml"),
            "--out",
            str(out),
            "--workers",
            "1",
            *extra,
        ],
        cwd=REPO,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        preexec_fn=interruptible,
    )


def _kill_midway(proc: subprocess.Popen, journal: Path) -> None:
    """SIGKILL once at least 3 rows are journaled (the run is then surely midway)."""
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and proc.poll() is None:
        if journal.exists() and journal.read_text(encoding="utf-8").count("\n") >= 3:
            break
        time.sleep(0.02)
    assert proc.poll() is None, proc.stderr.read().decode()
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    proc.stderr.close()


def test_killed_run_leaves_previous_results_or_none(cli, fake_lot, with_fakes):
    for i in range(12):
        fakes.write_capture(fake_lot / "lot" / f"SN02{i:02d}.wav", 0.45)
    out = fake_lot / "out"
    # 1. Killed first run: no result file at all, only the journal and the run's lock
    # (which the next run recognises as stale: its process is gone).
    proc = _start_slow_run(fake_lot, out)
    _kill_midway(proc, out / JOURNAL_NAME)
    assert sorted(p.name for p in out.iterdir()) == sorted([JOURNAL_NAME, LOCK_NAME])
    assert json.loads((out / LOCK_NAME).read_text(encoding="utf-8"))["pid"] == proc.pid
    journaled = (out / JOURNAL_NAME).read_text(encoding="utf-8").count("\n")
    # 2. --resume (here in-process) finishes the job, reusing the journaled rows.
    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        fake_lot / "spec.toml",
        "--out",
        out,
        "--workers",
        "1",
        "--resume",
        "--json",
    )
    assert r.code == 1  # the lot has a failing unit
    assert r.json()["reused"] >= journaled - 1  # the last line may have been cut off
    before = {name: (out / name).read_bytes() for name in RESULT_FILES}
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)
    assert json.loads(before["results.json"])["summary"]["captures"] == 20
    # 3. Killed rerun: the previous complete results are untouched, no temporary files.
    proc = _start_slow_run(fake_lot, out)
    _kill_midway(proc, out / JOURNAL_NAME)
    assert sorted(p.name for p in out.iterdir()) == sorted(
        [*RESULT_FILES, JOURNAL_NAME, LOCK_NAME]
    )
    assert {name: (out / name).read_bytes() for name in RESULT_FILES} == before


def test_limits_derive_cli(cli, tmp_path, with_fakes):
    golden = tmp_path / "golden"
    fakes.write_lot(golden, bad=False)
    (tmp_path / "base.toml").write_text(fakes.SPEC_TEXT, encoding="utf-8")
    out = tmp_path / "derived.toml"
    r = cli(
        "limits",
        "derive",
        golden,
        "--spec",
        tmp_path / "base.toml",
        "--out",
        out,
        "--k",
        "4",
        "--workers",
        "1",
    )
    assert r.code == 0, r.err
    assert "only 5 golden captures" in r.err
    text = out.read_text(encoding="utf-8")
    assert "fail limits at mean ± 4·σ" in text
    r = cli("batch", golden, "--spec", out, "--out", tmp_path / "o", "--workers", "1")
    assert r.code == 0, r.out  # golden units pass limits derived from them
    r = cli("limits", "derive", golden, "--spec", tmp_path / "base.toml", "--out", out)
    assert r.code == 2 and "exists; use --force" in r.err
    r = cli(
        "limits",
        "derive",
        golden,
        "--spec",
        tmp_path / "base.toml",
        "--out",
        out,
        "--force",
        "--k",
        "2",
        "--warn-k",
        "3",
    )
    assert r.code == 2 and "--warn-k: must be between 0 and --k (2), got 3" in r.err


def test_cluster_address_gives_the_local_results(cli, fake_lot, with_fakes):
    distributed = pytest.importorskip("distributed")
    local = fake_lot / "local"
    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        fake_lot / "spec.toml",
        "--out",
        local,
        "--workers",
        "1",
    )
    assert r.code == 1
    # An in-process scheduler (threads, no worker processes) reached by its address,
    # as a remote one would be; the workers read the captures by absolute path.
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
    ) as cluster:
        remote = fake_lot / "remote"
        r = cli(
            "batch",
            fake_lot / "lot",
            "--spec",
            fake_lot / "spec.toml",
            "--out",
            remote,
            "--cluster",
            cluster.scheduler_address,
        )
    assert r.code == 1, r.err
    for name in ("results.csv", "results.json", "junit.xml"):
        assert (remote / name).read_bytes() == (local / name).read_bytes()


def test_unreachable_cluster_exits_2(cli, fake_lot, monkeypatch):
    pytest.importorskip("distributed")
    import piezo.batch.runner as runner

    monkeypatch.setattr(runner, "CLUSTER_CONNECT_TIMEOUT_S", 1)
    r = cli(
        "batch",
        fake_lot / "lot",
        "--spec",
        fake_lot / "spec.toml",
        "--out",
        fake_lot / "o",
        "--cluster",
        "tcp://127.0.0.1:9",
    )
    assert r.code == 2
    assert "--cluster: cannot connect to 'tcp://127.0.0.1:9'" in r.err


# ---------------------------------------------------------------------------------------
# Operators: interruptions, shared output folders, links, colliding names, idle clusters.


def _batch_args(folder: Path, out: Path, *extra: str | Path) -> list[str | Path]:
    return [
        "batch",
        folder / "lot",
        "--spec",
        folder / "spec.toml",
        "--out",
        out,
        "--workers",
        "1",
        *extra,
    ]


def test_sigint_prints_one_line_keeps_the_journal_and_exits_130(fake_lot):
    for i in range(40):
        fakes.write_capture(fake_lot / "lot" / f"SN03{i:02d}.wav", 0.45)
    out = fake_lot / "out"
    proc = _start_slow_run(fake_lot, out)
    deadline = time.monotonic() + 60
    journal = out / JOURNAL_NAME
    while time.monotonic() < deadline and proc.poll() is None:
        if journal.exists() and journal.read_text(encoding="utf-8").count("\n") >= 3:
            break
        time.sleep(0.02)
    proc.send_signal(signal.SIGINT)
    err = proc.communicate(timeout=30)[1].decode()
    assert proc.returncode == 130
    assert err == "piezo: interrupted\n"
    # The journal stays for --resume; the lock goes with the run; no result file.
    assert sorted(p.name for p in out.iterdir()) == [JOURNAL_NAME]
    assert journal.read_text(encoding="utf-8").count("\n") >= 3


def _lock_text(pid: int, host: str) -> str:
    return json.dumps({"pid": pid, "host": host, "started": "2026-01-01T00:00:00Z"})


def test_an_out_in_use_is_refused_and_a_stale_lock_taken_over(cli, fake_lot, with_fakes):
    import socket

    out = fake_lot / "out"
    out.mkdir()
    lock = out / LOCK_NAME
    # A live process on this host holds the folder: refused, nothing written.
    holder = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        lock.write_text(_lock_text(holder.pid, socket.gethostname()), encoding="utf-8")
        r = cli(*_batch_args(fake_lot, out))
        assert r.code == 2
        assert r.err.count("\n") == 1
        assert r.err.startswith(f"piezo: error: {out}: in use by another batch run (process ")
        assert f"{holder.pid} on {socket.gethostname()}" in r.err
        assert sorted(p.name for p in out.iterdir()) == [LOCK_NAME]
    finally:
        holder.kill()
        holder.wait()
    # The same process is gone now: the lock is stale, taken over and released.
    r = cli(*_batch_args(fake_lot, out))
    assert r.code == 1, r.err
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)
    # A lock from another host is never taken over (this host cannot see that process).
    lock.write_text(_lock_text(1, "elsewhere.invalid"), encoding="utf-8")
    r = cli(*_batch_args(fake_lot, out))
    assert r.code == 2 and "process 1 on elsewhere.invalid" in r.err


def test_links_planted_in_out_are_refused_and_their_targets_untouched(cli, fake_lot, with_fakes):
    out = fake_lot / "out"
    out.mkdir()
    target = fake_lot / "precious.txt"
    target.write_text("keep me\n", encoding="utf-8")
    (out / JOURNAL_NAME).symlink_to(target)
    for extra in ((), ("--resume",)):
        r = cli(*_batch_args(fake_lot, out, *extra))
        assert r.code == 2
        assert r.err == (
            f"piezo: error: {out / JOURNAL_NAME}: is a symbolic link; refusing to follow it\n"
        )
        assert target.read_text(encoding="utf-8") == "keep me\n"
    (out / JOURNAL_NAME).unlink()
    # A journal with a second hard link: appending (--resume) would write into that
    # other file too, so it is refused; a fresh run replaces the name instead.
    os.link(target, out / JOURNAL_NAME)
    r = cli(*_batch_args(fake_lot, out, "--resume"))
    assert r.code == 2 and "has other hard links; refusing to write to it" in r.err
    r = cli(*_batch_args(fake_lot, out))
    assert r.code == 1, r.err
    assert target.read_text(encoding="utf-8") == "keep me\n"
    for name in RESULT_FILES:
        (out / name).unlink()
    # A reports folder that links elsewhere receives no page.
    elsewhere = fake_lot / "elsewhere"
    elsewhere.mkdir()
    (out / "reports").symlink_to(elsewhere, target_is_directory=True)
    r = cli(*_batch_args(fake_lot, out, "--reports"))
    assert r.code == 2
    assert r.err == f"piezo: error: {out / 'reports'}: is a symbolic link; refusing to follow it\n"
    assert list(elsewhere.iterdir()) == []
    assert not (out / LOCK_NAME).exists()


def test_colliding_capture_names_get_one_page_each(cli, tmp_path, with_fakes):
    lot = tmp_path / "lot"
    lot.mkdir()
    names = ["SN3200 x.wav", "SN3200_x.wav", "Ölpumpe SN3300.wav", "Kanal ä.wav", "Kanal ö.wav"]
    for name in names:
        fakes.write_capture(lot / name, 0.15)  # failing units: the summary links them all
    (tmp_path / "spec.toml").write_text(fakes.SPEC_TEXT, encoding="utf-8")
    out = tmp_path / "out"
    r = cli(*_batch_args(tmp_path, out, "--reports"))
    assert r.code == 1, r.err
    pages = sorted(p.name for p in (out / "reports").iterdir())
    assert len(pages) == len(names)
    assert "Ölpumpe SN3300.wav.html" in [p.split("lot__")[-1] for p in pages]
    # Each page is its own capture's: the file name appears on the page it links to.
    html = (out / "summary.html").read_text(encoding="utf-8")
    for name in names:
        page = next(p for p in pages if p.endswith(name + ".html"))
        assert name in (out / "reports" / page).read_text(encoding="utf-8")
        assert f'href="{report_link(page)}"' in html


def test_idle_cluster_ends_with_exit_2_after_the_worker_wait(cli, fake_lot):
    distributed = pytest.importorskip("distributed")
    # A reachable scheduler (loopback, in this process) that no worker ever joins.
    with distributed.LocalCluster(
        n_workers=0, processes=False, dashboard_address=None, protocol="tcp", host="127.0.0.1"
    ) as cluster:
        t0 = time.monotonic()
        r = cli(
            "batch",
            fake_lot / "lot",
            "--spec",
            fake_lot / "spec.toml",
            "--out",
            fake_lot / "o",
            "--cluster",
            cluster.scheduler_address,
            "--worker-wait",
            "1 s",
        )
        waited = time.monotonic() - t0
    assert r.code == 2
    assert r.err == (
        f"piezo: error: --cluster: no workers joined the scheduler at "
        f"{cluster.scheduler_address!r} within 1 s\n"
    )
    # At least the wait; the upper bound is generous for a loaded machine (connecting
    # and closing a client take well under a second each on loopback).
    assert 1.0 <= waited < 20
    assert sorted(p.name for p in (fake_lot / "o").iterdir()) == []


def test_worker_wait_is_parsed_at_the_edge(cli, fake_lot):
    r = cli(*_batch_args(fake_lot, fake_lot / "o", "--worker-wait", "soon"))
    assert r.code == 2 and "--worker-wait" in r.err and r.err.count("\n") == 1
