"""Benchmark of ``piezo batch``: throughput at 1 and 2 workers, overhead, peak memory.

Generates a lot of 2 s, 48 kHz, 16-bit FLAC captures of the PD27 scenario (see
``piezo.demo.lot``; a swept sine 20 Hz - 20 kHz) and judges it with a realistic spec of
six metrics (sensitivity, corner, resonance, THD at 1 kHz, clipping, noise floor).

Prints, all measured in this one run:

- throughput (captures/s) at 1 and 2 local workers, and their ratio (target >= 1.7);
- per-capture time over the time soundfile needs just to decode the same file;
- per-capture overhead beyond the analysis: the whole job (hash, read, calibrate,
  analyses, verdict) against the analyses alone on an already loaded capture, and the
  runner's own cost per capture (the same lot with a job that analyses nothing);
- peak resident memory of the main process and of the largest worker for lots of
  increasing size: it must stay flat with the number of captures.

Run: ``python benchmarks/bench_batch.py [--captures 2000] [--unique 200] [--rounds 2]``.

With ``--side-by-side`` it measures instead, in one run, the whole ``piezo batch``
command (process start, pool or cluster work, result files) on the lot plus
``--corrupt`` (default 5 %) corrupt files (FLAC cut off half way): 1 and 2 local
workers and a Dask cluster of 2 single-thread worker processes on this machine, with
throughput ratios, peak resident memory of all processes involved, and a check that the
three give byte-identical result files. The cluster is started before the timed runs
(as a real one would be) and restarted before each of them, so its workers start cold
like the pool's: ``python benchmarks/bench_batch.py --side-by-side --captures 300
--unique 60 --rounds 2``.
The machine may be shared: runs at 1 and 2 workers alternate and the best of each counts;
CPU time per capture is printed beside wall time, as it does not depend on other jobs.
Unique captures are hard-linked to make up the lot, so the disk holds ``--unique``
files' worth of data; the files are then read from the page cache, which is what a
line PC re-reading a lot sees too.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

# One library thread per process (set before numpy loads), as the pool gives its
# workers: otherwise OpenBLAS threads spin on the second core during the in-process runs.
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
for _name in THREAD_VARIABLES:
    os.environ.setdefault(_name, "1")

import numpy as np  # noqa: E402
import soundfile as sf  # noqa: E402

# Measure the checkout this script lives in, not another installed copy.
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

RATE_HZ = 48000.0
SWEEP = {
    "start_hz": 20.0,
    "stop_hz": 20000.0,
    "duration_s": 1.5,
    "silence_before_s": 0.25,
    "silence_after_s": 0.25,
}

SPEC = """
[spec]
name = "PD27 at 48 kHz (benchmark)"
serial_pattern = 'PD27-(?P<serial>[0-9]{5})'

[capture]
full_scale_v = 1.0
gain = "20 dB"

[stimulus]
kind = "sweep"
start_hz = 20
stop_hz = 20000
duration_s = 1.5
silence_before_s = 0.25
silence_after_s = 0.25
level_db = 94.0

[metrics.sensitivity]
reference_hz = 1000
lower = -44.5
upper = -38.5

[metrics.corner]
upper = 80.0

[metrics.resonance]
lower = 3900.0
upper = 4700.0

[metrics.thd_1k]
kind = "thd"
frequency_hz = 1000
upper = 1.0

[metrics.clipping]
upper = 0.0

[metrics.noise_floor]
upper = -95.0
severity = "warn"
"""


def make_lot(folder: Path, captures: int, unique: int) -> list[Path]:
    from piezo.demo.lot import draw_unit, flac_bytes, simulate_capture

    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(48000)
    sources = []
    for i in range(unique):
        serial = f"{50000 + i}"
        unit = draw_unit(serial, rng)
        x = simulate_capture(unit, np.random.default_rng(i), sweep=SWEEP, sample_rate_hz=RATE_HZ)
        path = folder / f"src-{serial}.flac"
        path.write_bytes(flac_bytes(x, RATE_HZ))
        sources.append(path)
    lot = folder / "lot"
    lot.mkdir(exist_ok=True)
    files = []
    for i in range(captures):
        target = lot / f"PD27-{60000 + i}.flac"
        if not target.exists():
            os.link(sources[i % unique], target)
        files.append(target)
    return files


def add_corrupt(lot: Path, sources: list[Path], fraction: float) -> list[Path]:
    """Add ``fraction`` x lot size corrupt captures: FLAC files cut off half way."""
    count = round(fraction * len(list(lot.iterdir())))
    files = []
    for i in range(count):
        data = sources[i % len(sources)].read_bytes()
        target = lot / f"PD27-{90000 + i}.flac"
        target.write_bytes(data[: len(data) // 2])
        files.append(target)
    return files


class TreeMemory:
    """Peak of the summed resident memory of some processes and all their children."""

    def __init__(self, pids: list[int]) -> None:
        import threading

        import psutil

        self._roots = [psutil.Process(p) for p in pids]
        self.peak_mb = 0.0
        self.largest_mb = 0.0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._sample, daemon=True)
        self._thread.start()

    def _sample(self) -> None:
        import psutil

        while not self._stop.is_set():
            total, largest = 0.0, 0.0
            for root in self._roots:
                try:
                    procs = [root, *root.children(recursive=True)]
                except psutil.Error:
                    continue
                for proc in procs:
                    try:
                        rss = proc.memory_info().rss / 2**20
                    except psutil.Error:
                        continue
                    total += rss
                    largest = max(largest, rss)
            self.peak_mb = max(self.peak_mb, total)
            self.largest_mb = max(self.largest_mb, largest)
            self._stop.wait(0.2)

    def stop(self) -> None:
        self._stop.set()
        self._thread.join()


def _children_cpu_s() -> float:
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return kids.ru_utime + kids.ru_stime


def tree_cpu_s(pids: list[int]) -> float:
    """CPU seconds used so far by processes ``pids`` and their children."""
    import psutil

    total = 0.0
    for pid in pids:
        try:
            root = psutil.Process(pid)
            procs = [root, *root.children(recursive=True)]
        except psutil.Error:
            continue
        for proc in procs:
            try:
                t = proc.cpu_times()
            except psutil.Error:
                continue
            total += t.user + t.system
    return total


def cli_run(lot: Path, spec: Path, out: Path, option: list[str], watch: list[int]) -> dict:
    """``piezo batch`` as a fresh process; wall time and peak memory (with ``watch``)."""
    import shutil

    shutil.rmtree(out, ignore_errors=True)
    cmd = [sys.executable, "-m", "piezo", "batch", str(lot), "--spec", str(spec)]
    cmd += ["--out", str(out), "--json", *option]
    env = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parent.parent)}
    watched_cpu0 = tree_cpu_s(watch)
    cpu0 = _children_cpu_s()
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    memory = TreeMemory([proc.pid, *watch])
    stdout, stderr = proc.communicate()
    wall = time.perf_counter() - t0
    memory.stop()
    # The command and its pool workers (reaped by it), plus the watched processes.
    cpu = _children_cpu_s() - cpu0 + tree_cpu_s(watch) - watched_cpu0
    if proc.returncode not in (0, 1):
        raise RuntimeError(f"piezo batch failed ({proc.returncode}): {stderr.decode()}")
    doc = json.loads(stdout)
    return {
        "captures": doc["captures"],
        "counts": doc["counts"],
        "wall_s": wall,
        "cpu_s": cpu,
        "peak_mb": memory.peak_mb,
        "largest_mb": memory.largest_mb,
    }


def side_by_side(root: Path, files: list[Path], spec: Path, rounds: int, corrupt: float) -> None:
    """1 and 2 local workers and Dask with 2 workers, whole command, in one run."""
    import distributed
    import psutil

    bad = add_corrupt(root / "lot", sorted(root.glob("src-*.flac")), corrupt)
    n = len(files) + len(bad)
    print(f"side by side: {len(files)} captures + {len(bad)} corrupt = {n} files")
    with (
        distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            host="127.0.0.1",
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        configs = {
            "1 local worker": ["--workers", "1"],
            "2 local workers": ["--workers", "2"],
            "Dask, 2 workers": ["--cluster", cluster.scheduler_address],
        }
        runs: dict[str, list[dict]] = {name: [] for name in configs}
        for k in range(rounds):
            for name, option in configs.items():
                watch: list[int] = []
                if option[0] == "--cluster":
                    client.restart()  # cold workers, like a fresh pool
                    # The nannies (with their workers) are this process's children; the
                    # scheduler runs in this process and is not counted.
                    watch = [c.pid for c in psutil.Process().children()]
                out = root / f"side-{name.split(',')[0].replace(' ', '-')}"
                r = cli_run(root / "lot", spec, out, option, watch)
                runs[name].append(r)
                print(
                    f"round {k + 1}, {name}: {r['captures']} files in {r['wall_s']:.1f} s = "
                    f"{r['captures'] / r['wall_s']:.3g} captures/s, CPU "
                    f"{1e3 * r['cpu_s'] / r['captures']:.0f} ms per capture; peak memory "
                    f"{r['peak_mb']:.0f} MB in all, largest process {r['largest_mb']:.0f} MB; "
                    f"{r['counts']}"
                )
    best = {name: min(rs, key=lambda r: r["wall_s"]) for name, rs in runs.items()}
    rate = {name: r["captures"] / r["wall_s"] for name, r in best.items()}
    one, two, dask = (rate[name] for name in configs)
    print("best rounds (other jobs on a shared machine only slow a run down):")
    for name in configs:
        print(
            f"  {name:16s} {rate[name]:6.3g} captures/s, peak {best[name]['peak_mb']:.0f} MB "
            f"in all (largest process {best[name]['largest_mb']:.0f} MB)"
        )
    cpu = {name: r["cpu_s"] / r["captures"] for name, r in best.items()}
    print(f"  2 local workers / 1 worker = {two / one:.2f}x")
    print(
        f"  CPU per capture, Dask / 2 local workers = "
        f"{cpu['Dask, 2 workers'] / cpu['2 local workers']:.2f} (load-independent view of "
        "the cost; the in-process scheduler's CPU is not counted)"
    )
    print(
        f"  Dask cost over the local pool of the same size = "
        f"{100 * (two / dask - 1):+.1f} % of its time (target <= 15 %)"
    )
    names = ("results.csv", "results.json", "junit.xml")
    outs = [root / f"side-{name.split(',')[0].replace(' ', '-')}" for name in configs]
    same = all(
        (outs[0] / f).read_bytes() == (other / f).read_bytes() for other in outs[1:] for f in names
    )
    print(f"results.csv, results.json, junit.xml byte-identical across the three: {same}")


def null_job(path: str, *, display: str) -> dict:
    """A job that does no analysis: what the runner and the pool cost per capture."""
    return {"file": display, "verdict": "pass"}


def _cpu_s() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def child_run(lot: str, spec: str, out: str, workers: int, count: int, null: bool = False) -> None:
    """One batch run in a fresh process; prints a JSON line with time and peak memory."""
    from piezo.batch.outputs import write_outputs
    from piezo.batch.runner import expand_inputs, run_batch
    from piezo.batch.spec import load_spec

    s = load_spec(spec)
    files = expand_inputs([lot])[:count]
    c0 = _cpu_s()
    t0 = time.perf_counter()
    rows = run_batch(files, s, workers=workers, job=null_job if null else None)
    t1 = time.perf_counter()
    cpu = _cpu_s() - c0  # workers are counted once they have exited (end of the pool)
    if null:
        print(json.dumps({"captures": len(rows), "run_s": t1 - t0, "cpu_s": cpu}))
        return
    write_outputs(out, rows, s)
    t2 = time.perf_counter()
    verdicts = {v: sum(r["verdict"] == v for r in rows) for v in {r["verdict"] for r in rows}}
    print(
        json.dumps(
            {
                "captures": len(rows),
                "run_s": t1 - t0,
                "cpu_s": cpu,
                "write_s": t2 - t1,
                "verdicts": verdicts,
                "main_peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                "child_peak_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024,
            }
        )
    )


def run_child(
    lot: Path, spec: Path, out: Path, workers: int, count: int, null: bool = False
) -> dict:
    out.mkdir(parents=True, exist_ok=True)
    code = (
        "import sys; sys.path.insert(0, sys.argv[1]); import bench_batch as b; "
        "b.child_run(sys.argv[2], sys.argv[3], sys.argv[4], int(sys.argv[5]), int(sys.argv[6]), "
        "sys.argv[7] == '1')"
    )
    here = str(Path(__file__).resolve().parent)
    res = subprocess.run(
        [
            sys.executable,
            "-c",
            code,
            here,
            str(lot),
            str(spec),
            str(out),
            str(workers),
            str(count),
            "1" if null else "0",
        ],
        check=True,
        capture_output=True,
        text=True,
        env={**os.environ, **dict.fromkeys(THREAD_VARIABLES, "1")},
    )
    return json.loads(res.stdout.strip().splitlines()[-1])


def analysis_split(files: list[Path], spec_path: Path, sample: int) -> dict:
    """Median per-capture times in this process: decode, whole job, analyses alone."""
    from piezo.batch.metrics import EXTRACTORS
    from piezo.batch.runner import CaptureAnalysis, evaluate_capture, load_capture
    from piezo.batch.spec import load_spec

    spec = load_spec(spec_path)
    evaluate_capture(str(files[0]), spec)  # warm caches (imports, FFT plans)
    decode, job, analysis = [], [], []
    # CPU per metric in spec order: a metric pays for the shared analyses it is the first
    # to need (the sweep's for sensitivity, its fit for corner, diagnostics for clipping).
    by_metric: dict[str, list[float]] = {m.name: [] for m in spec.metrics}
    for path in files[:sample]:
        t0 = time.perf_counter()
        sf.read(str(path), dtype="float64")
        t1 = time.perf_counter()
        evaluate_capture(str(path), spec)
        t2 = time.perf_counter()
        cap = load_capture(str(path), spec)
        a = CaptureAnalysis(cap, spec)
        t3 = time.perf_counter()
        for m in spec.metrics:
            c0 = time.process_time()
            EXTRACTORS[m.kind](a, m)
            by_metric[m.name].append(time.process_time() - c0)
        t4 = time.perf_counter()
        decode.append(t1 - t0)
        job.append(t2 - t1)
        analysis.append(t4 - t3)
    return {
        "decode_s": float(np.median(decode)),
        "job_s": float(np.median(job)),
        "analysis_s": float(np.median(analysis)),
        "metric_cpu_s": {name: float(np.median(v)) for name, v in by_metric.items()},
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--captures", type=int, default=2000)
    parser.add_argument("--unique", type=int, default=200)
    parser.add_argument("--rounds", type=int, default=2, help="runs at 1 and at 2 workers")
    parser.add_argument("--dir", type=Path, default=None, help="work folder (default: temp)")
    parser.add_argument(
        "--side-by-side",
        action="store_true",
        help="only the whole-command comparison of 1, 2 local workers and Dask with 2",
    )
    parser.add_argument("--corrupt", type=float, default=0.05, help="corrupt share (side by side)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="piezo-bench-batch-") as tmp:
        root = args.dir or Path(tmp)
        t0 = time.perf_counter()
        files = make_lot(root, args.captures, min(args.unique, args.captures))
        spec = root / "spec.toml"
        spec.write_text(SPEC, encoding="utf-8")
        print(
            f"lot: {len(files)} captures of 2 s at 48 kHz ({args.unique} unique), "
            f"generated in {time.perf_counter() - t0:.0f} s; {os.cpu_count()} cores"
        )
        if args.side_by_side:
            side_by_side(root, files, spec, args.rounds, args.corrupt)
            return

        split = analysis_split(files, spec, sample=40)
        overhead = split["job_s"] - split["analysis_s"]
        print(
            f"per capture (median of 40, one process): decode {1e3 * split['decode_s']:.1f} ms, "
            f"analyses {1e3 * split['analysis_s']:.1f} ms, whole job {1e3 * split['job_s']:.1f} ms"
        )
        print(
            "  CPU per metric (median; the first metric to need a shared analysis pays for "
            "it): "
            + ", ".join(f"{k} {1e3 * v:.1f} ms" for k, v in split["metric_cpu_s"].items())
            + f"; load average {os.getloadavg()[0]:.2f}"
        )
        print(
            f"  job / decode = {split['job_s'] / split['decode_s']:.1f}x; overhead beyond the "
            f"analyses {1e3 * overhead:.1f} ms = {100 * overhead / split['job_s']:.1f} % "
            "of the job (hash, read, calibrate, verdict)"
        )

        # Rounds alternate 1 and 2 workers; the best round of each counts (as timeit
        # takes the minimum): other jobs on a shared machine only ever slow a run down.
        rounds: dict[int, list[dict]] = {1: [], 2: []}
        for k in range(args.rounds):
            for workers in (1, 2):
                r = run_child(root / "lot", spec, root / f"out-{workers}", workers, args.captures)
                rounds[workers].append(r)
                print(
                    f"round {k + 1}, {workers} worker(s): {r['captures']} captures in "
                    f"{r['run_s']:.1f} s = {r['captures'] / r['run_s']:.1f} captures/s (CPU "
                    f"{1e3 * r['cpu_s'] / r['captures']:.1f} ms per capture, "
                    f"{r['cpu_s'] / r['run_s']:.2f} cores); outputs written in "
                    f"{r['write_s']:.2f} s; verdicts {r['verdicts']}; load average "
                    f"{os.getloadavg()[0]:.2f}"
                )
        results = {w: min(rs, key=lambda r: r["run_s"]) for w, rs in rounds.items()}
        ratio = results[1]["run_s"] / results[2]["run_s"]
        print(f"throughput 2 workers / 1 worker, best rounds = {ratio:.2f}x (target >= 1.7)")
        cores = results[2]["cpu_s"] / results[2]["run_s"]  # of the best 2-worker round
        efficiency = results[1]["cpu_s"] / results[2]["cpu_s"]
        print(
            f"  the 2-worker run got {cores:.2f} cores on average (CPU time / wall time; "
            f"other jobs share the machine); CPU per capture 2 workers / 1 worker = "
            f"{1 / efficiency:.3f} (parallel efficiency {100 * efficiency:.0f} %)"
        )
        per_capture_1 = results[1]["run_s"] / results[1]["captures"]
        print(
            f"1 worker, per capture {1e3 * per_capture_1:.1f} ms = "
            f"{per_capture_1 / split['decode_s']:.1f}x the decode time"
        )
        for workers in (1, 2):
            r = run_child(root / "lot", spec, root / "null", workers, args.captures, null=True)
            print(
                f"runner alone (a job that analyses nothing), {workers} worker(s): "
                f"{1e6 * r['run_s'] / r['captures']:.1f} µs per capture wall, "
                f"{1e6 * r['cpu_s'] / r['captures']:.1f} µs CPU (pool start-up included)"
            )
        same = (root / "out-1" / "results.csv").read_bytes() == (
            root / "out-2" / "results.csv"
        ).read_bytes()
        print(f"results.csv byte-identical at 1 and 2 workers: {same}")

        print("peak resident memory (2 workers) by lot size:")
        sizes = sorted({max(1, args.captures // 8), args.captures // 4, args.captures // 2})
        for n in [*sizes, args.captures]:
            r = (
                results[2]
                if n == args.captures
                else run_child(root / "lot", spec, root / f"mem-{n}", 2, n)
            )
            print(
                f"  {n:6d} captures: main {r['main_peak_mb']:.0f} MB, largest worker "
                f"{r['child_peak_mb']:.0f} MB"
            )


if __name__ == "__main__":
    main()
