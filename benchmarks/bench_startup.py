"""Benchmark: whole-process start-up, short and long runs of ``piezo`` against floors.

Every figure is a separate process, timed from ``exec`` to exit (interpreter start-up,
imports, reading and analysis included), with its peak resident memory taken from the
kernel's accounting of that child (``os.wait4``). Each ratio compares two processes
measured in this one run, so a loaded machine slows both sides alike; the CPU-time
ratio (user + system) is the steadier one on a shared machine, the wall-clock ratio is
the one a user feels. Targets:

1. ``piezo --help`` at most 1.5x a minimal typer app with the same seventeen commands
   (written by this script to a temporary folder), and at most 60 MB peak RSS;
2. ``piezo levels`` on a 2-s capture at most 5x the process that only imports numpy and
   soundfile and reads the file;
3. ``piezo levels`` on a 20-min 48 kHz 24-bit file at most 3x the decode floor (a process
   that decodes the file to float64 blocks with soundfile, nothing else);
4. ``piezo bands --fraction 3`` on a 10-min file at most 3x the same decode floor;
5. peak RSS of ``piezo levels`` at most 250 MB on 1-h and 4-h files (skipped by
   ``--quick``: they cost minutes of CPU).

Test files are generated with a fixed seed into ``<temp>/piezo-bench-data`` (or
``--data DIR``), never into the repository, and kept for the next run. A first, untimed
run of each command fills the kernel cache, so the timed runs load compiled kernels as a
user's second run would; so does the byte code of every process, cached in
``<data>/pycache`` (``PYTHONPYCACHEPREFIX``) as an installed package has its ``.pyc``
files (``--no-bytecode-cache``: every process compiles its sources, as under
``PYTHONDONTWRITEBYTECODE``). Every process runs one BLAS/OpenMP thread, as piezo's
command line does by default (``--default-blas-threads``: the reference processes keep
the libraries' default, i.e. pay for OpenBLAS's thread pool). Run it from the
repository root::

    PYTHONPATH=. python benchmarks/bench_startup.py --quick   # start-up, 20/10-min files
    PYTHONPATH=. python benchmarks/bench_startup.py           # and the 1-h/4-h memory
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

# This process imports no numpy, soundfile or piezo: a child's peak RSS as the kernel
# reports it includes the pages of the parent it was forked from, so the parent stays
# small. Test files are written by child processes.
HERE = Path(__file__).resolve().parent
REPO = HERE.parent

#: The seventeen commands of ``piezo --help`` (names only: the minimal app's help lists
#: them with a one-line help of similar length).
COMMANDS = (
    "info calibrate levels spectrum bands tone sweep response fit-frontend frontend "
    "simulate equalize check report batch limits demo"
).split()

MINIMAL_APP = '''\
import typer

app = typer.Typer(no_args_is_help=True, add_completion=False)


def _make(name):
    def command(file: str, json: bool = False) -> None:
        """{name}: one line of help text, about as long as a piezo command's help."""

    command.__doc__ = command.__doc__.format(name=name)
    return command


for _name in {names!r}:
    app.command(_name)(_make(_name))

app()
'''

READ_ONLY = """\
import sys
import numpy as np
import soundfile as sf

x, fs = sf.read(sys.argv[1], dtype="float64", always_2d=True)
print(x.shape, float(np.sqrt(np.mean(x * x))))
"""

DECODE_FLOOR = """\
import sys
import numpy as np
import soundfile as sf

total = 0.0
with sf.SoundFile(sys.argv[1]) as f:
    for block in f.blocks(blocksize=65536, dtype="float64", always_2d=True):
        total += float(np.sum(block * block))
print(total)
"""


@dataclass(frozen=True)
class Run:
    """Median wall and CPU seconds of a few runs of one process, and its peak RSS."""

    wall_s: float
    cpu_s: float
    rss_mb: float


#: Byte-code cache of every measured process (set by ``main``): an installed piezo has its
#: ``.pyc`` files, so a user's second run does not compile piezo's sources again; kept
#: outside the repository, beside the test files.
PYCACHE: Path | None = None
#: Whether every measured process gets one BLAS/OpenMP thread (set by ``main``).
ONE_BLAS_THREAD = True


def measure(argv: list[str], *, repeat: int) -> Run:
    """Run ``argv`` ``repeat`` times (stdout discarded); medians and the largest peak RSS."""
    env = {**os.environ, "PYTHONPATH": str(REPO), "COLUMNS": "80"}
    # One BLAS/OpenMP thread for every process, reference processes included: piezo's
    # command line asks for that itself (piezo.threads), and a reference process that
    # starts OpenBLAS's pool pays up to 0.07 s of CPU for it (its idle threads spin on
    # a free core), which is no part of decoding a file. --default-blas-threads leaves
    # the libraries' defaults to the reference processes.
    if ONE_BLAS_THREAD:
        for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
            env[name] = "1"
    if PYCACHE is not None:  # byte code cached, whatever the calling shell says
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = str(PYCACHE)
    walls, cpus, rss = [], [], []
    for _ in range(repeat):
        start = time.perf_counter()
        proc = subprocess.Popen(
            argv,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.PIPE,
            env=env,
            cwd=tempfile.gettempdir(),
        )
        _, status, usage = os.wait4(proc.pid, 0)
        walls.append(time.perf_counter() - start)
        err = proc.stderr.read().decode() if proc.stderr else ""
        proc.returncode = os.waitstatus_to_exitcode(status)
        if proc.returncode not in (0, 1):
            raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}): {err}")
        cpus.append(usage.ru_utime + usage.ru_stime)
        rss.append(usage.ru_maxrss / 1024)  # KiB on Linux
    return Run(statistics.median(walls), statistics.median(cpus), max(rss))


#: Writes ``argv[1]`` (``argv[2]`` seconds) with bench_levels' generator unless a file of
#: that length is there already (one generator for the benchmark files).
WRITER = """\
import sys
from pathlib import Path

import soundfile as sf

sys.path.insert(0, sys.argv[3])
from bench_levels import write_test_file

path, seconds = Path(sys.argv[1]), float(sys.argv[2])
if not path.exists() or sf.info(str(path)).frames != round(seconds * 48000):
    print(f"  writing {path} ({seconds / 60:.1f} min) ...", flush=True)
    write_test_file(path, seconds)
"""


def data_file(folder: Path, name: str, seconds: float) -> Path:
    """A 48 kHz 24-bit mono test file, generated once (fixed seed) and kept."""
    path = folder / name
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    subprocess.run(
        [sys.executable, "-c", WRITER, str(path), str(seconds), str(HERE)], check=True, env=env
    )
    return path


def report(label: str, run: Run, floor: Run, target: float) -> None:
    wall, cpu = run.wall_s / floor.wall_s, run.cpu_s / floor.cpu_s

    def verdict(ratio: float) -> str:
        return "ok" if ratio <= target else "OVER"

    # Both readings are judged: the wall-clock ratio is what a user waits for, the CPU
    # ratio is steadier on a shared machine and does not credit piezo's second thread.
    print(
        f"{label:<44} {run.wall_s:7.2f} s {run.cpu_s:7.2f} s cpu {run.rss_mb:6.0f} MB | "
        f"floor {floor.wall_s:6.2f} s {floor.cpu_s:6.2f} s cpu | ratio wall {wall:4.2f}x "
        f"{verdict(wall)}, cpu {cpu:4.2f}x {verdict(cpu)} (target <= {target}x)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="skip the 1-h and 4-h files")
    parser.add_argument("--repeat", type=int, default=5, help="runs of each short process")
    parser.add_argument("--data", type=Path, help="folder for the generated test files")
    parser.add_argument(
        "--no-bytecode-cache",
        action="store_true",
        help="let every process compile its Python sources (as with PYTHONDONTWRITEBYTECODE)",
    )
    parser.add_argument(
        "--default-blas-threads",
        action="store_true",
        help="reference processes keep the numerical libraries' default thread count",
    )
    args = parser.parse_args()
    data = args.data or Path(tempfile.gettempdir()) / "piezo-bench-data"
    data.mkdir(parents=True, exist_ok=True)
    global PYCACHE, ONE_BLAS_THREAD
    ONE_BLAS_THREAD = not args.default_blas_threads
    if args.no_bytecode_cache:
        os.environ["PYTHONDONTWRITEBYTECODE"] = "1"
    else:
        PYCACHE = data / "pycache"
    py = sys.executable
    piezo = [py, "-m", "piezo"]
    print(f"piezo from {REPO}, python {sys.version.split()[0]}, load {os.getloadavg()[0]:.1f}")
    cached = "compiled in every process" if PYCACHE is None else f"cached in {PYCACHE}"
    print(f"byte code: {cached}")
    threads = "one for every process" if ONE_BLAS_THREAD else "the libraries' default"
    print(f"BLAS/OpenMP threads: {threads} (piezo's command line asks for one)")

    with tempfile.TemporaryDirectory() as tmp:
        minimal = Path(tmp) / "minimal_app.py"
        minimal.write_text(MINIMAL_APP.replace("{names!r}", repr(COMMANDS)))
        reader = Path(tmp) / "read_only.py"
        reader.write_text(READ_ONLY)
        floor_script = Path(tmp) / "decode_floor.py"
        floor_script.write_text(DECODE_FLOOR)

        print("\n1. help")
        measure([py, str(minimal), "--help"], repeat=1)  # warm the file cache
        base = measure([py, str(minimal), "--help"], repeat=args.repeat)
        measure([*piezo, "--help"], repeat=1)  # byte code cached
        run = measure([*piezo, "--help"], repeat=args.repeat)
        report("piezo --help vs minimal typer app", run, base, 1.5)
        print(f"{'':<44} peak RSS {run.rss_mb:.0f} MB (target <= 60 MB)")
        version = measure([*piezo, "--version"], repeat=args.repeat)
        report("piezo --version vs minimal typer app", version, base, 1.5)

        print("\n2. a 2-s capture")
        capture = data_file(data, "capture-2s.wav", 2.0)
        measure([*piezo, "levels", str(capture)], repeat=1)  # compiled kernels cached
        measure([py, str(reader), str(capture)], repeat=1)  # byte code cached
        floor = measure([py, str(reader), str(capture)], repeat=args.repeat)
        run = measure([*piezo, "levels", str(capture)], repeat=args.repeat)
        report("piezo levels (2 s) vs numpy+soundfile read", run, floor, 5.0)

        print("\n3. long files, whole process")
        twenty = data_file(data, "noise-20min.wav", 20 * 60)
        ten = data_file(data, "noise-10min.wav", 10 * 60)
        measure([*piezo, "bands", str(capture), "--fraction", "3"], repeat=1)
        measure([py, str(floor_script), str(capture)], repeat=1)  # byte code cached
        # One untimed read of each file first: a floor that reads from disk (a file just
        # written or evicted) spends CPU in the kernel filling the page cache, which
        # piezo's runs after it would not pay.
        measure([py, str(floor_script), str(twenty)], repeat=1)
        measure([py, str(floor_script), str(ten)], repeat=1)
        floor20 = measure([py, str(floor_script), str(twenty)], repeat=2)
        run = measure([*piezo, "levels", str(twenty)], repeat=2)
        report("piezo levels (20 min) vs decode floor", run, floor20, 3.0)
        floor10 = measure([py, str(floor_script), str(ten)], repeat=2)
        run = measure([*piezo, "bands", str(ten), "--fraction", "3"], repeat=2)
        report("piezo bands --fraction 3 (10 min) vs floor", run, floor10, 3.0)

        if args.quick:
            print("\n4. 1-h and 4-h files: skipped (--quick)")
            return
        print("\n4. peak memory on long files (target <= 250 MB)")
        for hours in (1, 4):
            path = data_file(data, f"noise-{hours}h.wav", hours * 3600)
            measure([py, str(floor_script), str(path)], repeat=1)  # into the page cache
            floor = measure([py, str(floor_script), str(path)], repeat=1)
            run = measure([*piezo, "levels", str(path)], repeat=1)
            report(f"piezo levels ({hours} h) vs decode floor", run, floor, 3.0)
            verdict = "ok" if run.rss_mb <= 250 else "OVER"
            print(f"{'':<44} peak RSS {run.rss_mb:.0f} MB (target <= 250 MB) {verdict}")


if __name__ == "__main__":
    main()
