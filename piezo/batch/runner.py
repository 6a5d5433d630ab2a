"""Batch runner: expands inputs, judges every capture, in parallel, deterministically.

The unit of work is :func:`evaluate_capture`, a pure function of a capture file and a
spec returning one result row (a plain dict); it never raises for a bad capture, it
returns an error row instead. :func:`run_batch` maps it over many captures with a local
process pool or on a Dask distributed cluster and returns the rows sorted by file name,
so the results do not depend on the worker count or the order of completion.
"""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import functools
import glob
import hashlib
import multiprocessing
import os
import re
import sys
import threading
import time
import traceback
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from concurrent.futures.process import BrokenProcessPool
from pathlib import Path
from typing import Any

from piezo._kernels.cache import lean_loading
from piezo.batch.capture import Capture, CaptureAnalysis, load_capture
from piezo.batch.metrics import EXTRACTORS, report_data
from piezo.batch.spec import METRIC_KINDS, MetricSpec, Spec
from piezo.batch.verdict import MetricValue, judge
from piezo.errors import InputError, PiezoError
from piezo.threads import NUMERIC_THREAD_VARIABLES as _THREAD_VARIABLES

__all__ = [
    "CAPTURE_SUFFIXES",
    "WORKER_WAIT_S",
    "Capture",
    "CaptureAnalysis",
    "cluster_client",
    "content_sha256",
    "error_row",
    "evaluate_capture",
    "expand_inputs",
    "load_capture",
    "run_batch",
]

#: File name endings taken as captures when a directory is expanded (case-insensitive).
CAPTURE_SUFFIXES = (".wav", ".flac", ".ogg", ".aif", ".aiff", ".w64", ".rf64", ".caf", ".csv")

_GLOB_CHARS = re.compile(r"[*?\[]")

#: Seconds to wait for a Dask scheduler before giving up on ``--cluster``.
CLUSTER_CONNECT_TIMEOUT_S = 20

#: Seconds to wait, by default, for a first worker to join a reachable Dask scheduler.
WORKER_WAIT_S = 60.0

#: How often a local worker process checks that the process that started it still runs.
PARENT_CHECK_S = 0.5

#: Largest number of captures sent to a Dask worker as one task (see :func:`_run_dask`).
CLUSTER_CHUNK_MAX = 16


def expand_inputs(inputs: Iterable[str]) -> list[str]:
    """Expand files, directories (recursively) and glob patterns into a sorted file list.

    Files named explicitly are taken whatever their ending; inside directories only files
    ending in one of :data:`CAPTURE_SUFFIXES` are taken (hidden files and folders are
    skipped). Glob patterns are expanded with ``**`` matching any depth. Duplicates are
    removed; the result is sorted by path text, so it does not depend on the file
    system's listing order.

    Raises
    ------
    InputError
        If an input neither exists nor matches any file, or nothing is found at all.

    Examples
    --------
    A folder is searched recursively, a pattern expanded; the list is sorted and free of
    duplicates:

    >>> files = expand_inputs(["recordings/pd27-lot", "recordings/pd27-lot/*2410[12].flac"])
    >>> len(files), files[0]
    (40, 'recordings/pd27-lot/PD27-24101.flac')
    >>> expand_inputs(["recordings/pd27-lot/*.wav"])
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: INPUT: pattern 'recordings/pd27-lot/*.wav' matches no file
    """
    found: set[str] = set()
    for item in inputs:
        p = Path(item)
        if p.is_dir():
            found.update(_walk(p))
        elif p.is_file():
            found.add(str(p))
        elif _GLOB_CHARS.search(item):
            matches = sorted(glob.glob(item, recursive=True))
            files = [m for m in matches if Path(m).is_file()]
            for m in matches:
                if Path(m).is_dir():
                    files.extend(_walk(Path(m)))
            if not files:
                raise InputError(f"INPUT: pattern {item!r} matches no file")
            found.update(files)
        else:
            raise InputError(f"INPUT: {item!r} is neither a file, a directory nor a pattern")
    if not found:
        raise InputError(
            "INPUT: no capture files found (directories are searched for "
            + ", ".join(CAPTURE_SUFFIXES)
            + ")"
        )
    return sorted(found)


def _walk(folder: Path) -> Iterator[str]:
    for root, dirs, files in os.walk(folder):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        for name in files:
            if not name.startswith(".") and name.lower().endswith(CAPTURE_SUFFIXES):
                yield str(Path(root) / name)


def content_sha256(path: str | Path) -> str:
    """SHA-256 of the file's bytes (hex).

    Examples
    --------
    The FIPS 180-2 test vector (Appendix B.1): SHA-256 of "abc":

    >>> import tempfile
    >>> from pathlib import Path
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "abc.bin"
    ...     _ = path.write_bytes(b"abc")
    ...     content_sha256(path)
    'ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad'
    """
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(functools.partial(fh.read, 1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


#: An extractor computes one metric kind: (analysis, metric) -> MetricValue.
Extractor = Callable[[CaptureAnalysis, MetricSpec], MetricValue]
Loader = Callable[[str, Spec], Capture]


def _default_extractors() -> Mapping[str, Extractor]:
    return EXTRACTORS


def error_row(display: str, spec: Spec, message: str, content: str = "") -> dict[str, Any]:
    """A result row for a capture that could not be used at all.

    Examples
    --------
    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> row = error_row("PD27-24136.flac", spec, "unreadable capture: file is truncated")
    >>> row["serial"], row["verdict"], row["metrics"]
    ('24136', 'not evaluable', {'resonance': None})
    >>> row["not_evaluable"]
    ['unreadable capture: file is truncated']
    """
    verdict = judge(spec.metrics, {}, error=message)
    return {
        "file": display,
        "serial": _serial(spec, display) or "",
        "verdict": verdict.verdict,
        "metrics": {m.name: None for m in spec.metrics},
        "uncertainties": {m.name: None for m in spec.metrics},
        "failed_limits": [],
        "warnings": [],
        "not_evaluable": list(verdict.not_evaluable),
        "error": message,
        "content_sha256": content,
        "spec_sha256": spec.sha256,
    }


def _serial(spec: Spec, display: str) -> str | None:
    return spec.serial_from_name(display)


def evaluate_capture(
    path: str,
    spec: Spec,
    *,
    display: str | None = None,
    loader: Loader | None = None,
    extractors: Mapping[str, Extractor] | None = None,
    with_curves: bool = False,
    with_report: bool = False,
) -> dict[str, Any]:
    """Judge one capture against ``spec`` and return its result row.

    Pure apart from reading ``path``: no printing, no writing. Never raises for a bad
    capture: an unreadable file gives a row with verdict "not evaluable" and ``error``
    set; a metric whose analysis fails is "not evaluable" with the analysis's message.

    Parameters
    ----------
    path
        Capture file to read (absolute for cluster workers).
    spec
        Validated limit spec.
    display
        File name written into the row (default ``path``).
    loader, extractors
        Capture reader and metric extractors (kind -> function); the defaults are
        :func:`load_capture` and :data:`piezo.batch.metrics.EXTRACTORS`. Tests inject
        their own.
    with_curves
        Add ``curves`` (mask name -> measured values at the mask frequencies, or None)
        to the row; used to derive masks from golden units.
    with_report
        Add ``_report`` (curves for the capture's report, see
        :func:`piezo.batch.metrics.report_data`); the caller removes it before storing
        the row.

    Returns
    -------
    dict
        Keys ``file, serial, verdict, metrics (name -> float or None), failed_limits,
        warnings, not_evaluable, error, content_sha256, spec_sha256``.

    Examples
    --------
    A unit of the bundled demo lot whose resonance lies above the limit:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> row = evaluate_capture("recordings/pd27-lot/PD27-24107.flac", spec)
    >>> row["serial"], row["verdict"], round(row["metrics"]["resonance"])
    ('24107', 'fail', 5216)
    >>> row["failed_limits"]
    ['resonance = 5215.59 Hz above upper limit 4700 (Q 1.1, peak +3.21 dB) [fail]']

    A bad capture gives a row, never an exception:

    >>> evaluate_capture("no-such-file.flac", spec)["error"]
    'cannot read file: No such file or directory'
    """
    display = path if display is None else display
    loader = load_capture if loader is None else loader
    extractors = _default_extractors() if extractors is None else extractors
    try:
        content = content_sha256(path)
    except OSError as exc:
        return error_row(display, spec, f"cannot read file: {exc.strerror or exc}")
    serial = _serial(spec, display)
    if spec.serial_required and not serial:
        return error_row(
            display,
            spec,
            f"no serial number in the file name (spec.serial_pattern {spec.serial_pattern!r})",
            content,
        )
    try:
        capture = loader(path, spec)
    except PiezoError as exc:
        return error_row(display, spec, f"unreadable capture: {exc.message}", content)
    except Exception as exc:  # one bad capture must not stop a lot
        return error_row(display, spec, f"unreadable capture: {_describe(exc)}", content)
    analysis = CaptureAnalysis(capture, spec)
    values: dict[str, MetricValue] = {}
    for metric in spec.metrics:
        values[metric.name] = _extract(extractors, analysis, metric)
    verdict = judge(spec.metrics, values)
    row: dict[str, Any] = {
        "file": display,
        "serial": serial or "",
        "verdict": verdict.verdict,
        "metrics": {
            name: (float(v.value) if v.evaluable else None)  # type: ignore[arg-type]
            for name, v in values.items()
        },
        # Standard uncertainty of each value, where the analysis gives one.
        "uncertainties": {
            name: (v.uncertainty if v.evaluable else None) for name, v in values.items()
        },
        "failed_limits": list(verdict.failed),
        "warnings": list(verdict.warnings),
        "not_evaluable": list(verdict.not_evaluable),
        "error": None,
        "content_sha256": content,
        "spec_sha256": spec.sha256,
    }
    if with_curves:
        row["curves"] = {
            name: (list(v.curve) if v.curve is not None else None)
            for name, v in values.items()
            if METRIC_KINDS[_kind(spec, name)].mask
        }
    if with_report:
        try:
            row["_report"] = report_data(analysis)
        except Exception as exc:  # a report is an extra: never lose the verdict for it
            row["_report"] = {"error": _describe(exc)}
    return row


def _kind(spec: Spec, name: str) -> str:
    return next(m.kind for m in spec.metrics if m.name == name)


def _describe(exc: BaseException) -> str:
    text = str(exc) or type(exc).__name__
    return f"{type(exc).__name__}: {text}" if not isinstance(exc, PiezoError) else text


def _extract(
    extractors: Mapping[str, Extractor], analysis: CaptureAnalysis, metric: MetricSpec
) -> MetricValue:
    fn = extractors.get(metric.kind)
    if fn is None:
        return MetricValue(None, reason=f"no extractor for metric kind {metric.kind!r}")
    try:
        result = fn(analysis, metric)
    except PiezoError as exc:
        return MetricValue(None, reason=exc.message)
    except Exception as exc:  # reported as not evaluable, never as pass
        where = traceback.extract_tb(exc.__traceback__)[-1]
        return MetricValue(
            None,
            reason=f"analysis failed: {_describe(exc)} ({Path(where.filename).name}:"
            f"{where.lineno})",
        )
    if not isinstance(result, MetricValue):
        return MetricValue(None, reason=f"extractor returned {type(result).__name__}")
    return result


# ---------------------------------------------------------------------------------------
# Running many captures.

Job = Callable[..., dict[str, Any]]
RowCallback = Callable[[dict[str, Any], bool], None]


def previous_index(rows: Iterable[Mapping[str, Any]]) -> dict[tuple[str, str], dict[str, Any]]:
    """Index earlier rows by (content hash, spec hash) for ``--resume``.

    Error rows are not indexed: a capture that could not be read is tried again.

    Examples
    --------
    >>> rows = [
    ...     {"file": "a.wav", "content_sha256": "c1", "spec_sha256": "s1", "error": None},
    ...     {"file": "b.wav", "content_sha256": "c2", "spec_sha256": "s1", "error": "bad"},
    ... ]
    >>> list(previous_index(rows))
    [('c1', 's1')]
    """
    index: dict[tuple[str, str], dict[str, Any]] = {}
    for row in rows:
        content, spec_hash = row.get("content_sha256"), row.get("spec_sha256")
        if content and spec_hash and not row.get("error"):
            index[(str(content), str(spec_hash))] = dict(row)
    return index


def run_batch(
    paths: Sequence[str],
    spec: Spec,
    *,
    workers: int | None = None,
    cluster: Any = None,
    previous: Mapping[tuple[str, str], Mapping[str, Any]] | None = None,
    on_row: RowCallback | None = None,
    job: Job | None = None,
    worker_wait_s: float = WORKER_WAIT_S,
) -> list[dict[str, Any]]:
    """Judge every capture of ``paths`` and return the rows sorted by file.

    Parameters
    ----------
    paths
        Capture files (see :func:`expand_inputs`). Written into the rows as given.
    spec
        Validated limit spec.
    workers
        Local worker processes (default: all cores). 1 runs in this process.
    cluster
        A Dask distributed scheduler address (``"tcp://host:8786"``) or a
        ``distributed.Client``. Workers read the captures themselves, by absolute path,
        so the files must be on storage every worker sees at the same path.
    previous
        Earlier rows indexed by :func:`previous_index`; a capture whose content hash and
        spec hash match is not analysed again (its row is reused, with the file and
        serial of the current name).
    on_row
        Called in this process as ``on_row(row, reused)`` for each finished capture, in
        completion order (progress bars, journals).
    job
        ``job(path, display=...) -> row``; default :func:`evaluate_capture` bound to
        ``spec``. Must be picklable for process pools and clusters.
    worker_wait_s
        With ``cluster``: seconds to wait for a first worker to join the scheduler
        before giving up with :class:`InputError` (see :func:`cluster_client`).

    Local worker processes end when this process ends, even when it is killed (each
    watches its parent); an interruption (``KeyboardInterrupt``) stops them at once
    and is raised again, with the rows finished so far already passed to ``on_row``.

    Examples
    --------
    Two units of the bundled demo lot in this process, then again with the first run's rows
    as ``previous``: nothing is analysed a second time:

    >>> from piezo.batch.spec import parse_spec
    >>> from piezo.demo.lot import resonance_spec_text
    >>> spec = parse_spec(resonance_spec_text())
    >>> paths = expand_inputs(["recordings/pd27-lot/PD27-2410[12].flac"])
    >>> rows = run_batch(paths, spec, workers=1)
    >>> [(row["serial"], row["verdict"]) for row in rows]
    [('24101', 'pass'), ('24102', 'pass')]
    >>> reused = []
    >>> again = run_batch(
    ...     paths, spec, workers=1, previous=previous_index(rows),
    ...     on_row=lambda row, was_reused: reused.append(was_reused),
    ... )
    >>> reused, again == rows
    ([True, True], True)
    """
    job = functools.partial(evaluate_capture, spec=spec) if job is None else job
    callback = on_row if on_row is not None else (lambda row, reused: None)
    rows: list[dict[str, Any]] = []
    todo: list[str] = []
    spec_hash = spec.sha256
    for path in paths:
        if previous:
            try:
                content = content_sha256(path)
            except OSError:
                content = ""
            old = previous.get((content, spec_hash))
            if old is not None:
                row = dict(old)
                row["file"] = path
                row["serial"] = _serial(spec, path) or ""
                rows.append(row)
                callback(row, True)
                continue
        todo.append(path)

    def finished(row: dict[str, Any]) -> None:
        rows.append(row)
        callback(row, False)

    if cluster is not None:
        if hasattr(cluster, "submit"):
            _run_dask(todo, job, cluster, finished, spec, worker_wait_s)
        else:
            with cluster_client(cluster, worker_wait_s=worker_wait_s) as client:
                _run_dask(todo, job, client, finished, spec, worker_wait_s)
    else:
        n = (os.cpu_count() or 1) if workers is None else workers
        if n < 1:
            raise InputError(f"--workers: must be at least 1, got {workers}")
        if n == 1 or len(todo) <= 1:
            for path in todo:
                finished(job(path, display=path))
        else:
            _run_pool(todo, job, min(n, len(todo)), finished, spec)
    rows.sort(key=lambda r: r["file"])
    return rows


def _run_pool(
    paths: Sequence[str],
    job: Job,
    workers: int,
    finished: Callable[[dict[str, Any]], None],
    spec: Spec,
) -> None:
    """Run on a local process pool, at most 4 jobs per worker in flight.

    A worker process that dies (a crash in a decoder library, the out-of-memory killer)
    breaks the pool; the captures that were in flight are then run again one at a time
    in a fresh pool, and the one that kills its worker again becomes an error row.
    """
    context = multiprocessing.get_context("spawn")
    with _one_thread_per_worker():
        _pool_loop(paths, job, workers, finished, spec, context)


@contextlib.contextmanager
def _one_thread_per_worker() -> Iterator[None]:
    """Let spawned workers use one BLAS/OpenMP thread each (unless the user set a count).

    N worker processes each running N library threads would oversubscribe the cores;
    the variables are read when a worker imports numpy, so they are set while the pool
    lives and restored afterwards.
    """
    saved = {name: os.environ.get(name) for name in _THREAD_VARIABLES}
    for name, value in saved.items():
        if value is None:
            os.environ[name] = "1"
    try:
        yield
    finally:
        for name, value in saved.items():
            if value is None:
                os.environ.pop(name, None)


def _pool_loop(
    paths: Sequence[str],
    job: Job,
    workers: int,
    finished: Callable[[dict[str, Any]], None],
    spec: Spec,
    context: Any,
) -> None:
    queue = list(reversed(paths))
    suspects: list[str] = []
    window = workers * 4
    while queue or suspects:
        isolate = bool(suspects)
        pending = suspects if isolate else queue
        with _worker_pool(workers, context) as pool:
            inflight: dict[cf.Future[dict[str, Any]], str] = {}
            broken = False
            while pending or inflight:
                limit = 1 if isolate else window
                while pending and len(inflight) < limit and not broken:
                    path = pending.pop()
                    inflight[pool.submit(job, path, display=path)] = path
                if not inflight:
                    break
                done, _ = cf.wait(inflight, return_when=cf.FIRST_COMPLETED)
                for fut in done:
                    path = inflight.pop(fut)
                    try:
                        finished(fut.result())
                    except BrokenProcessPool:
                        broken = True
                        if isolate:
                            finished(
                                error_row(
                                    path, spec, "the worker process died reading this capture"
                                )
                            )
                        else:
                            suspects.append(path)
                    except Exception as exc:  # pickling or similar
                        finished(error_row(path, spec, f"worker error: {_describe(exc)}"))
                if broken:
                    for path in inflight.values():
                        if isolate:
                            pending.append(path)
                        else:
                            suspects.append(path)
                    inflight.clear()
                    break
            if not broken and isolate:
                suspects.clear()


@contextlib.contextmanager
def _worker_pool(workers: int, context: Any) -> Iterator[cf.ProcessPoolExecutor]:
    """A process pool whose workers die with this process; stopped at once on an error.

    Leaving the block normally waits for the workers to finish; leaving it by an
    exception (an interruption) cancels what is queued and terminates the workers
    instead of waiting for the captures in flight.
    """
    pool = cf.ProcessPoolExecutor(
        max_workers=workers,
        mp_context=context,
        initializer=_start_worker,
        initargs=(os.getpid(),),
    )
    try:
        yield pool
    except BaseException:
        _stop_pool(pool)
        raise
    pool.shutdown(wait=True)


def _stop_pool(pool: cf.ProcessPoolExecutor) -> None:
    # The executor has no public way to end running workers; its process table does.
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        with contextlib.suppress(Exception):
            process.terminate()
    for process in processes:
        with contextlib.suppress(Exception):
            process.join(timeout=5)


def _start_worker(parent_pid: int) -> None:
    """Initializer of a local worker process: piezo's own process, so numba loads lean
    (:func:`piezo._kernels.cache.lean_loading`); it ends with its parent
    (:func:`_watch_parent`)."""
    lean_loading()
    _watch_parent(parent_pid)


def _watch_parent(parent_pid: int) -> None:
    """Initializer of a local worker process: end it when its parent process ends.

    A worker left behind by a killed batch (``kill -9``) would hold its memory and the
    multiprocessing resource tracker for minutes. Three guards, each sufficient:

    - on Linux, the kernel sends the worker SIGKILL when its parent dies
      (``prctl(PR_SET_PDEATHSIG)``);
    - a daemon thread waits on the pipe the parent holds open for its child
      (``multiprocessing.parent_process().sentinel``), which ends at the parent's death
      on every platform;
    - the same thread checks every :data:`PARENT_CHECK_S` seconds that the parent's
      process id is still this process's parent (a POSIX orphan is re-parented).

    Ctrl-C on a terminal signals the whole process group; the workers ignore it, and
    the main process stops them (see :func:`_worker_pool`).
    """
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _kill_with_parent_on_linux()
    if _parent_gone(parent_pid):
        os._exit(1)
    parent = multiprocessing.parent_process()
    sentinel = parent.sentinel if parent is not None else None
    threading.Thread(
        target=_parent_watch_loop, args=(parent_pid, sentinel), name="piezo-parent", daemon=True
    ).start()


def _parent_gone(parent_pid: int) -> bool:
    return sys.platform != "win32" and os.getppid() != parent_pid


def _parent_watch_loop(parent_pid: int, sentinel: Any) -> None:
    from multiprocessing.connection import wait

    while True:
        if sentinel is not None:
            if wait([sentinel], timeout=PARENT_CHECK_S):
                os._exit(1)
        else:
            time.sleep(PARENT_CHECK_S)
        if _parent_gone(parent_pid):
            os._exit(1)


def _kill_with_parent_on_linux() -> None:
    if not sys.platform.startswith("linux"):
        return
    import ctypes
    import signal

    pr_set_pdeathsig = 1  # from <linux/prctl.h>
    with contextlib.suppress(OSError, AttributeError):
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(pr_set_pdeathsig, int(signal.SIGKILL), 0, 0, 0)


# ---------------------------------------------------------------------------------------
# Dask distributed.


def _distributed() -> Any:
    try:
        import distributed
    except ImportError:
        raise InputError(
            "--cluster needs the optional package 'distributed' (pip install 'piezo[cluster]')"
        ) from None
    return distributed


@contextlib.contextmanager
def cluster_client(
    address: str,
    *,
    worker_wait_s: float = WORKER_WAIT_S,
    on_wait: Callable[[float], None] | None = None,
) -> Iterator[Any]:
    """A ``distributed.Client`` of the scheduler at ``address`` with at least one worker.

    Connecting gives up after :data:`CLUSTER_CONNECT_TIMEOUT_S` seconds; a reachable
    scheduler without workers is waited for at most ``worker_wait_s`` seconds, calling
    ``on_wait(waited_s)`` about four times a second meanwhile (for a progress display).

    Raises
    ------
    InputError
        If the scheduler cannot be reached, or no worker joined in time.

    Examples
    --------
    An address that names no scheduler is refused before anything is judged (a
    scheduler without workers is tested in ``tests/batch/test_runner.py``):

    >>> with cluster_client("nothing://host:8786") as client:  # doctest: +ELLIPSIS
    ...     pass
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: --cluster: cannot connect to 'nothing://host:8786': unknown ...
    """
    client_class = _distributed().Client
    try:
        client = client_class(address, timeout=f"{CLUSTER_CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"--cluster: cannot connect to {address!r}: {exc}") from None
    try:
        _wait_for_workers(client, address, worker_wait_s, on_wait)
        yield client
    finally:
        client.close()


def _wait_for_workers(
    client: Any, address: Any, wait_s: float, on_wait: Callable[[float], None] | None
) -> int:
    """Threads of the cluster's workers, once there is at least one; bounded wait."""
    start = time.monotonic()
    while True:
        threads = sum(client.nthreads().values())
        if threads:
            return int(threads)
        waited = time.monotonic() - start
        if waited >= wait_s:
            where = address if isinstance(address, str) else getattr(client, "scheduler", "")
            where = getattr(where, "address", where)
            raise InputError(
                f"--cluster: no workers joined the scheduler at {where!r} within {wait_s:g} s"
            )
        if on_wait is not None:
            on_wait(waited)
        time.sleep(min(0.25, wait_s - waited))


def _run_chunk(job: Job, items: Sequence[tuple[str, str]]) -> list[tuple[bool, Any]]:
    """Cluster task: run ``job`` on several captures; ``(True, row)`` or
    ``(False, message)`` for each, in order."""
    out: list[tuple[bool, Any]] = []
    for path, display in items:
        try:
            out.append((True, job(path, display=display)))
        except Exception as exc:  # reported as that capture's error row
            out.append((False, f"cluster task failed: {_describe(exc)}"))
    return out


def _run_dask(
    paths: Sequence[str],
    job: Job,
    client: Any,
    finished: Callable[[dict[str, Any]], None],
    spec: Spec,
    worker_wait_s: float,
) -> None:
    """Run on a Dask distributed cluster, several captures per task.

    The job (with its spec, golden tables and masks) is sent to the workers once and
    stays there; each task then carries only file names, and returns its rows in one
    message. Task sizes shrink as the queue empties (guided self-scheduling), so the
    workers still finish together: ``remaining / (4 x threads)`` captures, at most
    :data:`CLUSTER_CHUNK_MAX`, at least 1. Twice as many tasks as worker threads are in
    flight. A task that fails as a whole (a lost worker) is tried again one capture per
    task; a capture that fails alone becomes an error row.
    """
    as_completed = _distributed().as_completed
    threads = _wait_for_workers(client, client, worker_wait_s, None)
    queue = [(str(Path(p).resolve()), p) for p in reversed(paths)]
    retry: list[tuple[str, str]] = []
    resident = client.scatter(job, broadcast=True, hash=False) if queue else None
    names: dict[Any, list[tuple[str, str]]] = {}
    seq = as_completed()

    def submit() -> None:
        if retry:
            chunk = [retry.pop()]
        else:
            size = max(1, min(CLUSTER_CHUNK_MAX, len(queue) // (4 * threads)))
            chunk = [queue.pop() for _ in range(min(size, len(queue)))]
        fut = client.submit(_run_chunk, resident, chunk, pure=False)
        names[fut] = chunk
        seq.add(fut)

    try:
        while (queue or retry) and len(names) < 2 * threads:
            submit()
        for fut in seq:
            chunk = names.pop(fut)
            try:
                results = fut.result()
            except Exception as exc:  # a lost worker, a pickling problem
                if len(chunk) > 1:
                    retry.extend(reversed(chunk))
                else:
                    path = chunk[0][1]
                    finished(error_row(path, spec, f"cluster task failed: {_describe(exc)}"))
                results = []
            for (_, display), (ok, value) in zip(chunk, results, strict=False):
                finished(value if ok else error_row(display, spec, value))
            fut.release()
            while (queue or retry) and len(names) < 2 * threads:
                submit()
    except BaseException:
        client.cancel(list(names))
        raise
    finally:
        if resident is not None:
            resident.release()
