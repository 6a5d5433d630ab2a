"""Batch runner: input expansion, per-capture job, pools, Dask, resume (piezo.batch.runner).

The metric extractors here are the test doubles of ``batch_fakes`` (plain arithmetic on
tiny WAV files), so these tests exercise the framework, not the analyses.
"""

from __future__ import annotations

import functools
import math
import re
import time
from pathlib import Path

import pytest

from piezo.batch.outputs import results_csv_text, results_json_text
from piezo.batch.runner import evaluate_capture, expand_inputs, previous_index, run_batch
from piezo.batch.spec import parse_spec
from piezo.batch.verdict import FAIL, NOT_EVALUABLE, PASS, WARN
from piezo.errors import InputError
from tests import batch_fakes as fakes
from tests.processes import interruptible

SPEC = parse_spec(fakes.SPEC_TEXT)


@pytest.fixture
def lot(tmp_path):
    """Six captures: 4 good, 1 low, 1 clipped, 1 corrupt, 1 silent lead-in missing."""
    d = tmp_path / "lot"
    (d / "b").mkdir(parents=True)
    # volts = fraction * 2.0 V / 2 -> amplitude a gives RMS a/sqrt(2) V per 1 Pa.
    for i, amp in enumerate([0.45, 0.44, 0.46, 0.45]):
        fakes.write_capture(d / f"SN000{i}.wav", amp)
    fakes.write_capture(d / "b" / "SN0100.wav", 0.15)  # -19.5 dB: below -13 dB
    fakes.write_capture(d / "b" / "SN0101.wav", 0.45, clip=True)
    (d / "b" / "SN0102.wav").write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
    fakes.write_capture(d / "SN0103.wav", 0.45, noise=3e-3)  # noisy: warn only
    (d / "notes.txt").write_text("not a capture")
    (d / ".hidden.wav").write_bytes(b"")
    return d


def _job(spec=SPEC):
    return functools.partial(fakes.job, spec=spec)


def test_expand_inputs_sorted_recursive_globs_and_dedupe(lot, monkeypatch):
    monkeypatch.chdir(lot.parent)
    files = expand_inputs(["lot", "lot/SN0000.wav", "lot/**/SN01*.wav"])
    assert files == sorted(files)
    names = [Path(f).name for f in files]
    assert names == [
        "SN0000.wav",
        "SN0001.wav",
        "SN0002.wav",
        "SN0003.wav",
        "SN0103.wav",
        "SN0100.wav",
        "SN0101.wav",
        "SN0102.wav",
    ]
    assert files[5] == str(Path("lot/b/SN0100.wav"))
    # Explicit files are taken whatever their ending.
    assert expand_inputs(["lot/notes.txt"]) == [str(Path("lot/notes.txt"))]
    with pytest.raises(InputError, match=r"INPUT: 'nope\.wav' is neither a file"):
        expand_inputs(["nope.wav"])
    with pytest.raises(InputError, match=r"pattern 'lot/\*\.flac' matches no file"):
        expand_inputs(["lot/*.flac"])


def test_rows_verdicts_and_reasons(lot):
    rows = {
        Path(r["file"]).name: r
        for r in (
            fakes.job(str(p), display=str(p), spec=SPEC) for p in sorted(lot.rglob("SN*.wav"))
        )
    }
    good = rows["SN0000.wav"]
    assert good["verdict"] == PASS and good["serial"] == "0000"
    # Tone amplitude 0.45 FS * 2 V / gain 2 = 0.45 V peak, 0.3182 V RMS at 1 Pa:
    # 20 lg(0.3182) = -9.95 dB re 1 V/Pa (arithmetic; 0.02 dB covers 16-bit noise).
    assert math.isclose(
        good["metrics"]["sensitivity"], 20 * math.log10(0.45 / 2**0.5), abs_tol=0.02
    )
    low = rows["SN0100.wav"]
    assert low["verdict"] == FAIL
    assert low["failed_limits"][0].startswith("sensitivity = -19.")
    assert "below lower limit -13 [fail]" in low["failed_limits"][0]
    clipped = rows["SN0101.wav"]
    assert clipped["verdict"] == FAIL
    clip_msgs = [m for m in clipped["failed_limits"] if m.startswith("clipping = ")]
    assert len(clip_msgs) == 1 and clip_msgs[0].endswith("above upper limit 0 [fail]")
    corrupt = rows["SN0102.wav"]
    assert corrupt["verdict"] == NOT_EVALUABLE
    assert corrupt["error"].startswith("unreadable capture: cannot decode")
    assert corrupt["metrics"] == {"sensitivity": None, "clipping": None, "noise_floor": None}
    assert len(corrupt["content_sha256"]) == 64
    noisy = rows["SN0103.wav"]
    assert noisy["verdict"] == WARN
    assert noisy["warnings"][0].startswith("noise_floor = ")


def test_failing_extractor_and_missing_serial_are_not_evaluable(lot, tmp_path):
    text = fakes.SPEC_TEXT + "\n[metrics.resonance]\nlower = 1.0\n"
    text = text.replace('kind = "tone"', 'kind = "sweep"\nstart_hz = 20\nstop_hz = 3000')
    text = text.replace("frequency_hz = 1000\n", "duration_s = 0.2\n")
    spec = parse_spec(text)
    row = fakes.job(str(lot / "SN0000.wav"), display="SN0000.wav", spec=spec)
    assert row["verdict"] == NOT_EVALUABLE
    (message,) = row["not_evaluable"]
    assert re.fullmatch(
        r"resonance: not evaluable \(analysis failed: ZeroDivisionError: analysis bug "
        r"\(batch_fakes\.py:\d+\)\)",
        message,
    )
    required = parse_spec(
        fakes.SPEC_TEXT.replace("[capture]", "serial_required = true\n[capture]")
    )
    fakes.write_capture(tmp_path / "unit.wav", 0.45)
    row = fakes.job(str(tmp_path / "unit.wav"), display="unit.wav", spec=required)
    assert row["verdict"] == NOT_EVALUABLE
    assert row["error"].startswith("no serial number in the file name")
    missing = evaluate_capture(
        str(tmp_path / "gone.wav"), SPEC, loader=fakes.load, extractors=fakes.EXTRACTORS
    )
    assert missing["error"].startswith("cannot read file")


def test_same_bytes_whatever_worker_count(lot):
    files = expand_inputs([str(lot)])
    one = run_batch(files, SPEC, workers=1, job=_job())
    seen = []
    two = run_batch(files, SPEC, workers=2, job=_job(), on_row=lambda r, reused: seen.append(r))
    assert [r["file"] for r in one] == files
    assert len(seen) == len(files)
    assert results_csv_text(one, SPEC) == results_csv_text(two, SPEC)
    assert results_json_text(one, SPEC) == results_json_text(two, SPEC)
    # Completion order does not matter either: the rows are sorted on the way out.
    reverse = run_batch(list(reversed(files)), SPEC, workers=1, job=_job())
    assert results_json_text(reverse, SPEC) == results_json_text(one, SPEC)


def test_dead_worker_becomes_an_error_row(lot):
    fakes.write_capture(lot / "SN0200-crash.wav", 0.45)
    files = expand_inputs([str(lot)])
    rows = run_batch(files, SPEC, workers=2, job=functools.partial(fakes.crashing_job, spec=SPEC))
    assert [r["file"] for r in rows] == files
    crashed = [r for r in rows if "crash" in r["file"]]
    assert [r["error"] for r in crashed] == ["the worker process died reading this capture"]
    others = run_batch(files, SPEC, workers=1, job=_job())
    same = [(r["file"], r["verdict"], r["metrics"]) for r in rows if "crash" not in r["file"]]
    assert same == [
        (r["file"], r["verdict"], r["metrics"]) for r in others if "crash" not in r["file"]
    ]


def test_dask_local_cluster_gives_identical_results(lot):
    distributed = pytest.importorskip("distributed")
    files = expand_inputs([str(lot)])
    local = run_batch(files, SPEC, workers=1, job=_job())
    with (
        distributed.LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        remote = run_batch(files, SPEC, cluster=client, job=_job())
    assert results_csv_text(remote, SPEC) == results_csv_text(local, SPEC)
    assert results_json_text(remote, SPEC) == results_json_text(local, SPEC)


def test_resume_reuses_rows_with_same_content_and_spec(lot):
    files = expand_inputs([str(lot)])
    first = run_batch(files, SPEC, workers=1, job=_job())
    calls: list[str] = []

    def counting(path, *, display):
        calls.append(display)
        return fakes.job(path, display=display, spec=SPEC)

    fakes.write_capture(lot / "SN0001.wav", 0.30)  # changed content -> analysed again
    again = run_batch(files, SPEC, workers=1, job=counting, previous=previous_index(first))
    # Error rows are retried; rows with the same content and spec hash are reused.
    assert sorted(Path(c).name for c in calls) == ["SN0001.wav", "SN0102.wav"]
    assert [r["file"] for r in again] == files
    changed = next(r for r in again if r["file"].endswith("SN0001.wav"))
    assert changed["verdict"] == FAIL
    # A different spec hash reuses nothing.
    other = parse_spec(fakes.SPEC_TEXT.replace("upper = -60.0", "upper = -61.0"))
    calls.clear()
    run_batch(files, other, workers=1, job=counting, previous=previous_index(first))
    assert len(calls) == len(files)


def test_workers_must_be_positive(lot):
    with pytest.raises(InputError, match="--workers: must be at least 1, got 0"):
        run_batch([str(lot / "SN0000.wav")], SPEC, workers=0, job=_job())


# ---------------------------------------------------------------------------------------
# Worker processes that do not outlive the batch; clusters without workers.

REPO = Path(__file__).resolve().parents[2]


def sleeping_job(path: str, *, display: str, marks: str) -> dict:
    """Leaves a file named by its process id in ``marks``, then sleeps a minute."""
    import os
    import time

    Path(marks, str(os.getpid())).touch()
    time.sleep(60)
    return {"file": display}


def watch_without_prctl(parent_pid: int) -> None:
    """Worker initializer: the runner's parent watch, without the Linux-only guard."""
    from piezo.batch import runner

    runner._kill_with_parent_on_linux = lambda: None
    runner._watch_parent(parent_pid)


def hold_workers(lot: str, marks: str, mode: str) -> None:
    """Child process of the tests below: two busy workers, until killed."""
    import concurrent.futures as cf
    import multiprocessing
    import os

    files = expand_inputs([lot])
    job = functools.partial(sleeping_job, marks=marks)
    if mode == "run_batch":
        run_batch(files, SPEC, workers=2, job=job)
    else:
        pool = cf.ProcessPoolExecutor(
            2,
            mp_context=multiprocessing.get_context("spawn"),
            initializer=watch_without_prctl,
            initargs=(os.getpid(),),
        )
        list(pool.map(functools.partial(job, display="x"), files))


def _start_holder(lot: Path, marks: Path, mode: str):
    import os
    import subprocess
    import sys

    marks.mkdir()
    code = (
        "import sys; from tests.batch.test_runner import hold_workers; "
        "hold_workers(sys.argv[1], sys.argv[2], sys.argv[3])"
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", code, str(lot), str(marks), mode],
        cwd=REPO,
        env={**os.environ, "PYTHONPATH": str(REPO)},
        preexec_fn=interruptible,
    )
    deadline = time.monotonic() + 120
    while len(list(marks.iterdir())) < 2:
        assert proc.poll() is None and time.monotonic() < deadline
        time.sleep(0.05)
    return proc


@pytest.mark.parametrize("mode", ["run_batch", "watch_thread_only"])
def test_workers_end_when_the_main_process_is_killed(lot, tmp_path, mode):
    psutil = pytest.importorskip("psutil")
    import signal

    proc = _start_holder(lot, tmp_path / "marks", mode)
    children = psutil.Process(proc.pid).children(recursive=True)
    workers = {int(p.name) for p in (tmp_path / "marks").iterdir()}
    assert workers <= {c.pid for c in children}
    assert len(children) >= 3  # two workers and multiprocessing's resource tracker
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    # Bound: the parent watch looks every PARENT_CHECK_S = 0.5 s, the tracker ends when
    # the last worker has closed its pipe; 15 s leaves room for a loaded machine and is
    # far below the minutes an orphan would sleep here (the job sleeps 60 s).
    _gone, alive = psutil.wait_procs(children, timeout=15)
    assert alive == []


def test_interrupt_stops_the_workers_at_once(lot, tmp_path):
    psutil = pytest.importorskip("psutil")
    import signal

    proc = _start_holder(lot, tmp_path / "marks", "run_batch")
    children = psutil.Process(proc.pid).children(recursive=True)
    t0 = time.monotonic()
    proc.send_signal(signal.SIGINT)
    proc.wait(timeout=30)  # not the 60 s the jobs in flight would take
    assert time.monotonic() - t0 < 30
    assert proc.returncode != 0  # KeyboardInterrupt raised again
    _gone, alive = psutil.wait_procs(children, timeout=15)
    assert alive == []


def test_dask_chunks_give_the_local_results(lot):
    distributed = pytest.importorskip("distributed")
    for i in range(40):  # enough captures for tasks of several captures each
        fakes.write_capture(lot / f"SN2{i:03d}.wav", 0.40 + 0.002 * i)
    files = expand_inputs([str(lot)])
    local = run_batch(files, SPEC, workers=1, job=_job())
    with (
        distributed.LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        submitted: list[int] = []
        submit = client.submit

        def counting_submit(fn, *args, **kwargs):
            submitted.append(len(args[-1]))  # the captures of this task
            return submit(fn, *args, **kwargs)

        client.submit = counting_submit
        remote = run_batch(files, SPEC, cluster=client, job=_job())
    assert sum(submitted) == len(files)
    # Guided sizes: 48 captures // (4 x 2 threads) = 6 in the first task, 1 in the last.
    assert submitted[0] == 6 and submitted[-1] == 1 and len(submitted) < len(files)
    assert results_csv_text(remote, SPEC) == results_csv_text(local, SPEC)
    assert results_json_text(remote, SPEC) == results_json_text(local, SPEC)


def test_cluster_without_workers_gives_up_after_the_wait(lot):
    distributed = pytest.importorskip("distributed")
    files = expand_inputs([str(lot)])
    with (
        distributed.LocalCluster(n_workers=0, processes=False, dashboard_address=None) as cluster,
        distributed.Client(cluster) as client,
    ):
        t0 = time.monotonic()
        with pytest.raises(
            InputError, match=r"no workers joined the scheduler at .* within 0.5 s"
        ):
            run_batch(files, SPEC, cluster=client, job=_job(), worker_wait_s=0.5)
        assert time.monotonic() - t0 >= 0.5
