"""Reading recordings: libsndfile formats through soundfile, and CSV/TSV exports.

Every analysis reads through :func:`open_recording` and :meth:`Recording.blocks`, so there
is one read path. Blocks are float64 arrays of shape ``(frames, channels)``: time runs
along the first axis everywhere in piezo. PCM samples come as fractions of digital full
scale (soundfile's float conversion); CSV values come as they are in the file (volts).

Reading never loads a whole recording: soundfile decodes block by block, and CSV files are
parsed in chunks of rows after one validating pass.
"""

from __future__ import annotations

import contextlib
import csv
import io as _stdio
import itertools
import math
import os
import queue
import re
import sys
import threading
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import soundfile as sf

from piezo import validate
from piezo.errors import InputError, RecordingError
from piezo.io.text import cannot_read, decode_error, excerpt, regular_file

__all__ = ["CSV_SUFFIXES", "Recording", "open_recording"]

#: File name endings read by the CSV reader; everything else goes to libsndfile.
CSV_SUFFIXES = (".csv", ".tsv", ".txt")

#: Header names taken as a time column (compared in lower case, units in brackets dropped).
TIME_COLUMN_NAMES = ("time", "t", "time_s", "seconds", "second", "sec", "s", "x-axis")

#: Relative tolerance on the spacing of a CSV time column (issue contract: 0.1 %).
TIME_SPACING_TOLERANCE = 1e-3
#: A time step this many times the nominal step or more is a gap (a missing row makes 2).
GAP_STEP_RATIO = 1.5

#: Frames per block of every streaming read unless a caller chooses (128 Ki frames: 1 MiB
#: of float64 per channel; larger blocks than 64 Ki halve the per-block cost of the
#: Python layers, about 3 % of a long `levels` run, measured in docs/performance.md).
BLOCK_FRAMES = 131072
_CSV_CHUNK_ROWS = 65536


@dataclass(frozen=True)
class CsvLayout:
    """Where the numbers are in a CSV file, found once when it is opened.

    Examples
    --------
    The layout of the bundled tap-test export: a header line, a time column and two
    value columns.

    >>> layout = open_recording("recordings/tap-test.csv").csv_layout
    >>> layout.delimiter, layout.skip_lines, layout.time_column, layout.value_columns
    (',', 1, 0, (1, 2))
    >>> layout.column_names
    ('Time (s)', 'Disc (V)', 'Reference (V)')
    """

    delimiter: str | None
    skip_lines: int
    column_names: tuple[str, ...]
    value_columns: tuple[int, ...]
    time_column: int | None
    n_columns: int
    #: Bytes of the file when it was opened: a file that grows while it is read is
    #: analysed exactly as far as it was validated.
    size_bytes: int = 0


@dataclass(frozen=True)
class Recording:
    """An opened recording: what it is, and a way to read it in blocks.

    Attributes
    ----------
    path
        The file.
    sample_rate_hz
        Sample rate in hertz (from the file header, the CSV time column, or given).
    frames
        Number of samples per channel.
    channels
        Number of channels (for CSV: the value columns chosen).
    format
        ``"WAV"``, ``"FLAC"``, ``"RF64"``, ``"W64"``, ... as libsndfile names it, or ``"CSV"``.
    subtype
        Sample encoding, e.g. ``"PCM_24"``, ``"FLOAT"``; ``"TEXT"`` for CSV.
    channel_names
        A name per channel (CSV header names, or ``"ch0"``, ``"ch1"`` ...).
    is_pcm
        True when samples are fractions of digital full scale (audio files), False when
        they are physical values (CSV, taken as volts).
    time_gaps, largest_time_gap_s
        CSV opened with ``allow_time_gaps``: how many steps of the time column are gaps
        (at least :data:`GAP_STEP_RATIO` nominal steps) and the longest gap's missing
        time in seconds. None otherwise.
    start_time_s
        Time of the first sample, s: the first value of a CSV's time column (a scope's
        pre-trigger makes it negative, e.g. -100 µs), else 0. Sample ``n`` lies at
        ``start_time_s + n / sample_rate_hz``.

    Examples
    --------
    The bundled calibrator recording: 4 s of 24-bit PCM at 48 kHz, read in blocks.

    >>> rec = open_recording("recordings/calibrator-94dB.wav")
    >>> rec.format, rec.subtype, rec.sample_rate_hz, rec.channels, rec.duration_s
    ('WAV', 'PCM_24', 48000.0, 1, 4.0)
    >>> [block.shape for block in rec.blocks(block_frames=80000)]
    [(80000, 1), (80000, 1), (32000, 1)]
    """

    path: Path
    sample_rate_hz: float
    frames: int
    channels: int
    format: str
    subtype: str
    channel_names: tuple[str, ...]
    is_pcm: bool
    csv_layout: CsvLayout | None = field(default=None, repr=False)
    time_gaps: int | None = None
    largest_time_gap_s: float | None = None
    start_time_s: float = 0.0

    @property
    def duration_s(self) -> float:
        """Length of the recording in seconds."""
        return self.frames / self.sample_rate_hz

    def blocks(
        self,
        block_frames: int = BLOCK_FRAMES,
        *,
        overlap_frames: int = 0,
        channels: Sequence[int] | None = None,
    ) -> Iterator[np.ndarray]:
        """Yield the recording as float64 blocks of shape ``(frames, channels)``.

        Parameters
        ----------
        block_frames
            Frames per block (the last block may be shorter).
        overlap_frames
            Frames shared by consecutive blocks (``0 <= overlap < block_frames``).
        channels
            0-based channel indices to read; all channels when None.

        Raises
        ------
        RecordingError
            When the file cannot be decoded part way (truncated or corrupt data).
        """
        if block_frames < 1:
            raise InputError(f"block_frames must be at least 1, got {block_frames}")
        if not 0 <= overlap_frames < block_frames:
            raise InputError(
                f"overlap_frames must be in [0, {block_frames}), got {overlap_frames}"
            )
        selected = self._check_channels(channels)
        step = block_frames - overlap_frames
        if overlap_frames == 0:
            for block in self._finite_blocks(block_frames, selected):
                yield block if selected is None else block[:, selected]
            return
        # Re-chunk: every block holds block_frames frames (the last may be shorter) and
        # starts step frames after the previous one, as soundfile.blocks does.
        buf = np.empty((0, self.channels))
        fresh = 0  # frames in buf not yet yielded
        for raw in self._finite_blocks(step, selected):
            buf = np.concatenate([buf, raw])
            fresh += raw.shape[0]
            while buf.shape[0] >= block_frames:
                out = buf[:block_frames]
                yield out if selected is None else out[:, selected]
                buf = buf[step:]
                fresh = max(0, buf.shape[0] - overlap_frames)
        if fresh > 0:
            yield buf if selected is None else buf[:, selected]

    def _check_channels(self, channels: Sequence[int] | None) -> list[int] | None:
        if channels is None:
            return None
        out = []
        for c in channels:
            if not 0 <= int(c) < self.channels:
                raise InputError(
                    f"channel {c} is out of range: the recording has {self.channels} "
                    f"channel(s), numbered 0 to {self.channels - 1}",
                    source=str(self.path),
                )
            out.append(int(c))
        return out

    def _finite_blocks(self, step: int, selected: list[int] | None) -> Iterator[np.ndarray]:
        """Raw blocks, refusing non-finite samples in the selected channels (the one
        policy of :func:`piezo.validate.finite_samples`, for every format)."""
        numbers = list(range(self.channels)) if selected is None else selected
        start = 0
        for raw in self._raw_blocks(step):
            view = raw if selected is None else raw[:, selected]
            try:
                validate.finite_samples(view, start_frame=start, channel_numbers=numbers)
            except InputError as exc:
                raise exc.with_source(str(self.path)) from None
            start += raw.shape[0]
            yield raw

    def _raw_blocks(self, step: int) -> Iterator[np.ndarray]:
        if self.csv_layout is not None:
            yield from _csv_blocks(self.path, self.csv_layout, step, self.frames)
            return
        if self.frames > 2 * step:
            yield from prefetched(self._decoded_blocks(step))
        else:
            yield from self._decoded_blocks(step)

    def _decoded_blocks(self, step: int) -> Iterator[np.ndarray]:
        try:
            with _quiet_stderr():
                handle = sf.SoundFile(str(self.path))
            with handle as f:
                done = 0
                while done < self.frames:
                    block = f.read(min(step, self.frames - done), dtype="float64", always_2d=True)
                    if block.shape[0] == 0:
                        raise RecordingError(
                            f"data ends after {done} of {self.frames} frames (truncated file?)",
                            source=str(self.path),
                        )
                    done += block.shape[0]
                    yield block
        except sf.LibsndfileError as exc:
            detail = exc.error_string.removeprefix("Error : ").strip()
            raise RecordingError(
                f"cannot decode audio data ({detail}); the file is truncated or corrupt",
                source=str(self.path),
            ) from exc
        except OSError as exc:
            raise cannot_read(self.path, exc, what="recording", error=RecordingError) from None


_END = object()


def prefetched(blocks: Iterator[np.ndarray], depth: int = 2) -> Iterator[np.ndarray]:
    """``blocks``, decoded one step ahead in a second thread while the caller analyses.

    libsndfile decodes without holding the interpreter lock and the compiled kernels run
    without it too (``nogil``), so decoding the next block overlaps the analysis of this
    one: on a long file the wall time approaches the larger of the two instead of their
    sum (the CPU time stays the same). At most ``depth`` blocks wait, so memory does not
    grow with the recording. An exception in the reader is raised here, in the caller's
    thread, unchanged; when the caller stops early the reader stops too and its file is
    closed.

    Examples
    --------
    >>> import numpy as np
    >>> out = list(prefetched(iter([np.zeros(2), np.ones(2)])))
    >>> [b.tolist() for b in out]
    [[0.0, 0.0], [1.0, 1.0]]
    >>> def failing():
    ...     yield np.zeros(1)
    ...     raise RecordingError("data ends early", source="x.wav")
    >>> list(prefetched(failing()))
    Traceback (most recent call last):
    ...
    piezo.errors.RecordingError: x.wav: data ends early
    """
    handoff: queue.Queue[object] = queue.Queue(maxsize=depth)
    stop = threading.Event()

    def offer(item: object) -> bool:
        while not stop.is_set():
            try:
                handoff.put(item, timeout=0.05)
                return True
            except queue.Full:
                continue
        return False

    def read() -> None:
        last: object = _END
        try:
            for block in blocks:
                if not offer(block):
                    return
        except BaseException as exc:  # handed to the caller, who raises it
            last = exc
        finally:
            close = getattr(blocks, "close", None)
            if close is not None:
                close()
        offer(last)

    reader = threading.Thread(target=read, name="piezo-reader", daemon=True)
    reader.start()
    try:
        while True:
            item = handoff.get()
            if item is _END:
                return
            if isinstance(item, BaseException):
                raise item
            yield item  # type: ignore[misc]
    finally:
        stop.set()
        reader.join(timeout=5.0)


@contextlib.contextmanager
def _quiet_stderr() -> Iterator[None]:
    """Silence what the C libraries behind soundfile print on file descriptor 2.

    libsndfile's MPEG decoder (libmpg123) writes warnings straight to the process's
    stderr while it probes a file, before piezo can say anything; piezo reports the
    problem itself, in one line. Python's own ``sys.stderr`` is flushed first and
    restored after.
    """
    try:
        sys.stderr.flush()
        saved = os.dup(2)
    except (OSError, ValueError):  # no usable fd 2 (embedded interpreters)
        yield
        return
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        try:
            os.dup2(devnull, 2)
        finally:
            os.close(devnull)
        yield
    finally:
        os.dup2(saved, 2)
        os.close(saved)


def open_recording(
    path: str | Path,
    *,
    rate_hz: float | None = None,
    columns: Sequence[str | int] | None = None,
    allow_time_gaps: bool = False,
) -> Recording:
    """Open a recording and check that it can be analysed.

    Parameters
    ----------
    path
        A WAV/RF64/W64/FLAC/AIFF/... file (anything libsndfile reads) or a CSV/TSV text
        export (``.csv``, ``.tsv``, ``.txt``).
    rate_hz
        Sample rate for CSV files without a time column. For audio files it must be None
        (the header's rate is used).
    columns
        CSV only: value columns by header name or 0-based index. All non-time columns
        when None.
    allow_time_gaps
        CSV only: accept a time column with gaps (missing rows) and report them on the
        recording instead of refusing the file. The steps that are not gaps must still be
        uniform to :data:`TIME_SPACING_TOLERANCE`. Samples on either side of a gap are
        read as if they were contiguous.

    Returns
    -------
    Recording

    Raises
    ------
    RecordingError
        Missing, empty, unreadable or zero-length recordings.
    InputError
        Inconsistent options (rate for an audio file, unknown column, non-uniform time).

    Examples
    --------
    A CSV export with a time column: the sample rate comes from its spacing (1 ms here).

    >>> import tempfile
    >>> from pathlib import Path
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "scope.csv"
    ...     _ = path.write_text("time,ch_a,ch_b\\n0,0.1,1\\n0.001,0.2,2\\n0.002,0.3,3\\n")
    ...     rec = open_recording(path, columns=["ch_b"])
    ...     samples = next(rec.blocks())
    >>> rec.sample_rate_hz, rec.frames, rec.channel_names, rec.is_pcm
    (1000.0, 3, ('ch_b',), False)
    >>> samples[:, 0].tolist()
    [1.0, 2.0, 3.0]
    """
    p = Path(path)
    st = regular_file(p, what="recording", error=RecordingError)
    size = st.st_size
    if size == 0:
        raise RecordingError("file is empty (0 bytes)", source=str(p))
    if p.suffix.lower() in CSV_SUFFIXES:
        return _open_csv(
            p, rate_hz=rate_hz, columns=columns, allow_gaps=allow_time_gaps, size_bytes=size
        )
    if columns is not None:
        raise InputError("columns apply to CSV files only", source=str(p))
    return _open_audio(p, rate_hz=rate_hz)


def _open_audio(p: Path, *, rate_hz: float | None) -> Recording:
    try:
        with _quiet_stderr():
            info = sf.info(str(p))
    except sf.LibsndfileError as exc:
        raise RecordingError(
            f"not a readable audio file ({exc.error_string.rstrip('.')})", source=str(p)
        ) from exc
    except RuntimeError as exc:  # soundfile < 0.11 raised RuntimeError
        raise RecordingError(f"not a readable audio file ({exc})", source=str(p)) from exc
    if rate_hz is not None and not math.isclose(rate_hz, info.samplerate):
        raise InputError(
            f"rate_hz {rate_hz:g} Hz contradicts the file header ({info.samplerate} Hz); "
            "a sample rate is given for CSV files only",
            source=str(p),
        )
    if info.frames <= 0:
        raise RecordingError("recording has no samples (0 frames)", source=str(p))
    if str(info.format) in ("WAV", "WAVEX"):
        declared = _riff_declared_data_bytes(p)
        frame_bytes = _bytes_per_frame(str(info.subtype), int(info.channels))
        if declared is not None and frame_bytes and declared // frame_bytes > info.frames:
            raise RecordingError(
                f"truncated: the header announces {declared // frame_bytes} frames but the "
                f"file holds {info.frames}",
                source=str(p),
            )
    try:
        validate.sample_rate(info.samplerate, what="the header's sample rate")
    except InputError as exc:
        raise exc.with_source(str(p)) from None
    return Recording(
        path=p,
        sample_rate_hz=float(info.samplerate),
        frames=int(info.frames),
        channels=int(info.channels),
        format=str(info.format),
        subtype=str(info.subtype),
        channel_names=tuple(f"ch{i}" for i in range(info.channels)),
        is_pcm=True,
    )


_SUBTYPE_BYTES = {
    "PCM_U8": 1,
    "PCM_S8": 1,
    "PCM_16": 2,
    "PCM_24": 3,
    "PCM_32": 4,
    "FLOAT": 4,
    "DOUBLE": 8,
    "ULAW": 1,
    "ALAW": 1,
}


def _bytes_per_frame(subtype: str, channels: int) -> int | None:
    size = _SUBTYPE_BYTES.get(subtype)
    return None if size is None else size * channels


def _riff_declared_data_bytes(p: Path) -> int | None:
    """Size the ``data`` chunk of a RIFF/WAVE file claims, or None if unknown.

    libsndfile reads a truncated WAV without complaint (it counts the frames present), so
    the header's claim is compared here. Sizes 0 and 0xFFFFFFFF mark headers a recorder
    never finalised; they are not taken as claims.
    """
    with open(p, "rb") as f:
        head = f.read(12)
        if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
            return None
        while True:
            chunk = f.read(8)
            if len(chunk) < 8:
                return None
            size = int.from_bytes(chunk[4:8], "little")
            if chunk[:4] == b"data":
                return None if size in (0, 0xFFFFFFFF) else size
            f.seek(size + (size & 1), 1)


# --- CSV -------------------------------------------------------------------------------

_NUMBER_RE = re.compile(r"^\s*[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*$|^\s*[-+]?(?:nan|inf)")


def _is_number(text: str) -> bool:
    return bool(_NUMBER_RE.match(text.strip().lower())) if text.strip() else False


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return line.split()
    return next(csv.reader([line], delimiter=delimiter))


def _sniff_layout(p: Path, head: list[str]) -> tuple[str | None, int, list[str] | None]:
    """Find the delimiter, the number of lines before the data, and the header fields."""
    data_lines = [ln for ln in head if ln.strip() and not ln.lstrip().startswith("#")]
    if not data_lines:
        raise RecordingError("no data rows found in the text file", source=str(p))
    # The delimiter is the one that splits the most trailing lines of the head (data, in
    # any export we know) into the same number of numeric fields; more fields wins a tie.
    best: tuple[int, int, str | None] | None = None
    for candidate in (",", ";", "\t", "|", None):
        run, width = 0, None
        for line in reversed(data_lines):
            fields = _split(line, candidate)
            if not fields or not all(_is_number(f) for f in fields):
                break
            if width is not None and len(fields) != width:
                break
            width = len(fields)
            run += 1
        if run and width is not None and (best is None or (run, width) > best[:2]):
            best = (run, width, candidate)
    if best is None:
        raise RecordingError(
            "no numeric data rows found (expected columns of numbers separated by , ; tab "
            "| or spaces)",
            source=str(p),
        )
    delimiter = best[2]
    # Data starts at the first line from which every following line (in the head) is
    # all-numeric with the same field count.
    start = None
    for i, line in enumerate(head):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        fields = _split(line, delimiter)
        if fields and all(_is_number(f) for f in fields):
            start = i
            break
    if start is None:
        raise RecordingError(
            "no numeric data rows found (expected columns of numbers)", source=str(p)
        )
    header = None
    for line in reversed(head[:start]):
        if line.strip() and not line.lstrip().startswith("#"):
            header = [h.strip() for h in _split(line, delimiter)]
            break
    return delimiter, start, header


def _normalise_name(name: str) -> str:
    return re.sub(r"\s*[\(\[].*?[\)\]]\s*", "", name).strip().lower()


def _text_lines(p: Path, size_bytes: int, skip: int = 0) -> Iterator[tuple[int, str]]:
    """``(line_number, text)`` of the first ``size_bytes`` bytes of ``p``, after ``skip``
    lines; a line that is not UTF-8 is refused with its number."""
    try:
        f = open(p, "rb")
    except OSError as exc:
        raise cannot_read(p, exc, what="recording", error=RecordingError) from None
    with f:
        left = size_bytes
        line_no = 0
        while left > 0:
            raw = f.readline(left)
            if not raw:
                return
            left -= len(raw)
            line_no += 1
            if line_no <= skip:
                continue
            try:
                text = raw.decode("utf-8")
            except UnicodeDecodeError as exc:
                raise decode_error(p, raw, exc, first_line=line_no, error=RecordingError) from None
            yield line_no, text.removeprefix("\ufeff") if line_no == 1 else text


def _open_csv(
    p: Path,
    *,
    rate_hz: float | None,
    columns: Sequence[str | int] | None,
    allow_gaps: bool = False,
    size_bytes: int,
) -> Recording:
    head = [text for _, text in itertools.islice(_text_lines(p, size_bytes), 200)]
    delimiter, start, header = _sniff_layout(p, head)
    first = _split(head[start], delimiter)
    n_columns = len(first)
    names = (
        [h or f"col{i}" for i, h in enumerate(header)]
        if header is not None and len(header) == n_columns
        else [f"col{i}" for i in range(n_columns)]
    )
    has_header = header is not None and len(header) == n_columns

    time_col: int | None = None
    if has_header:
        for i, name in enumerate(names):
            if _normalise_name(name) in TIME_COLUMN_NAMES:
                time_col = i
                break
    if time_col is None and rate_hz is None and n_columns >= 2:
        time_col = 0  # no rate given: the first column must be time; checked below

    if columns is None:
        value_cols = [i for i in range(n_columns) if i != time_col]
    else:
        value_cols = []
        for c in columns:
            idx = _column_index(p, c, names)
            if idx == time_col:
                raise InputError(f"column {c!r} is the time column", source=str(p))
            value_cols.append(idx)
    if not value_cols:
        raise RecordingError("no value columns besides the time column", source=str(p))

    layout = CsvLayout(
        delimiter=delimiter,
        skip_lines=start,  # head[i] is line i + 1 of the file
        column_names=tuple(names),
        value_columns=tuple(value_cols),
        time_column=time_col,
        n_columns=n_columns,
        size_bytes=size_bytes,
    )
    frames, rate_from_time, gaps, largest_gap, start_s = _validate_csv(
        p, layout, allow_gaps=allow_gaps
    )
    if frames == 0:
        raise RecordingError("recording has no samples (0 rows)", source=str(p))
    if time_col is None and rate_hz is None:
        raise InputError(
            "a single-column CSV has no time column: give the sample rate (rate_hz)",
            source=str(p),
        )
    if rate_from_time is not None:
        if rate_hz is not None and not math.isclose(rate_hz, rate_from_time, rel_tol=1e-3):
            raise InputError(
                f"rate_hz {rate_hz:g} Hz contradicts the time column ({rate_from_time:.6g} Hz)",
                source=str(p),
            )
        rate = rate_from_time
    else:
        assert rate_hz is not None
        rate = float(rate_hz)
    try:
        validate.sample_rate(
            rate, what="rate_hz" if rate_from_time is None else "the time column's rate"
        )
    except InputError as exc:
        raise exc.with_source(str(p)) from None
    return Recording(
        path=p,
        sample_rate_hz=rate,
        frames=frames,
        channels=len(value_cols),
        format="CSV",
        subtype="TEXT",
        channel_names=tuple(names[i] for i in value_cols),
        is_pcm=False,
        csv_layout=layout,
        time_gaps=gaps,
        largest_time_gap_s=largest_gap,
        start_time_s=start_s,
    )


def _column_index(p: Path, c: str | int, names: list[str]) -> int:
    if isinstance(c, int) or (isinstance(c, str) and c.strip().lstrip("-").isdigit()):
        idx = int(c)
        if not 0 <= idx < len(names):
            raise InputError(
                f"column {idx} is out of range: the file has {len(names)} columns "
                f"(0 to {len(names) - 1})",
                source=str(p),
            )
        return idx
    wanted = str(c).strip()
    for i, name in enumerate(names):
        if name == wanted or _normalise_name(name) == _normalise_name(wanted):
            return i
    raise InputError(f"no column named {wanted!r}; columns are: {', '.join(names)}", source=str(p))


def _csv_chunks(p: Path, layout: CsvLayout, rows: int) -> Iterator[tuple[np.ndarray, int]]:
    """Yield ``(table, first_line_number)`` chunks of all numeric columns, reading no
    further than the file's length when it was opened."""
    lines_in = _text_lines(p, layout.size_bytes, skip=layout.skip_lines)
    line_no = layout.skip_lines + 1
    while True:
        lines: list[str] = []
        numbers: list[int] = []
        for number, ln in lines_in:
            if ln.strip() and not ln.lstrip().startswith("#"):
                lines.append(ln)
                numbers.append(number)
                if len(lines) == rows:
                    break
        if not lines:
            return
        line_no = numbers[0]
        try:
            table = np.loadtxt(
                _stdio.StringIO("".join(lines)),
                delimiter=layout.delimiter,
                ndmin=2,
                dtype=np.float64,
            )
        except ValueError:
            i = _first_bad_line(lines, layout)
            raise RecordingError(
                f"line {numbers[i]}: {excerpt(lines[i].strip())} is not a row of "
                f"{layout.n_columns} numbers",
                source=str(p),
            ) from None
        if table.shape[1] != layout.n_columns:
            raise RecordingError(
                f"rows near line {line_no} have {table.shape[1]} columns, "
                f"expected {layout.n_columns}",
                source=str(p),
            )
        yield table, line_no


def _first_bad_line(lines: list[str], layout: CsvLayout) -> int:
    for i, ln in enumerate(lines):
        fields = _split(ln.strip(), layout.delimiter)
        if len(fields) != layout.n_columns:
            return i
        try:
            [float(f) for f in fields]
        except ValueError:
            return i
    return 0


def _validate_csv(
    p: Path, layout: CsvLayout, *, allow_gaps: bool = False
) -> tuple[int, float | None, int | None, float | None, float]:
    """One streaming pass: count rows, reject NaN/inf, derive the rate from time.

    Returns ``(frames, rate_hz, gaps, largest_gap_s, start_time_s)``; gaps and the
    largest gap are None unless ``allow_gaps``; the start time is the time column's first
    value (0 without one). The nominal step is the median step of the first chunk of rows.
    """
    frames = 0
    t_first = t_prev = None
    nominal = None
    steps_min = math.inf
    steps_max = -math.inf
    steps_sum = 0.0
    steps_n = 0
    gaps = 0
    largest_gap = 0.0
    names = [layout.column_names[i] for i in layout.value_columns]
    for table, _line_no in _csv_chunks(p, layout, _CSV_CHUNK_ROWS):
        try:
            validate.finite_samples(
                table[:, list(layout.value_columns)], start_frame=frames, channel_names=names
            )
        except InputError as exc:
            raise exc.with_source(str(p)) from None
        if layout.time_column is not None:
            t = table[:, layout.time_column]
            if not np.all(np.isfinite(t)):
                row = int(np.flatnonzero(~np.isfinite(t))[0])
                raise InputError(
                    f"non-finite value (NaN or infinite) in the time column at sample "
                    f"{frames + row}",
                    source=str(p),
                )
            if t_first is None:
                t_first = float(t[0])
            if t_prev is not None:
                t = np.concatenate([[t_prev], t])
            if t.size >= 2:
                d = np.diff(t)
                if nominal is None:
                    nominal = float(np.median(d))
                is_gap = d >= GAP_STEP_RATIO * nominal if nominal > 0 else np.zeros(d.size, bool)
                if allow_gaps and is_gap.any():
                    gaps += int(is_gap.sum())
                    largest_gap = max(largest_gap, float(d[is_gap].max()) - nominal)
                    d = d[~is_gap]
                if d.size:
                    steps_min = min(steps_min, float(d.min()))
                    steps_max = max(steps_max, float(d.max()))
                    steps_sum += float(d.sum())
                    steps_n += d.size
            t_prev = float(t[-1])
        frames += table.shape[0]
    if layout.time_column is None:
        return frames, None, None, None, 0.0
    if frames < 2:
        raise InputError(
            "a time column with a single row cannot give a sample rate; give one (rate_hz)",
            source=str(p),
        )
    spacing = steps_sum / steps_n if steps_n else 0.0
    if not spacing > 0 or not (t_prev is not None and t_first is not None and t_prev > t_first):
        raise InputError(
            "time column does not increase; give the sample rate (rate_hz) if the first "
            "column is data",
            source=str(p),
        )
    worst = max(abs(steps_min - spacing), abs(steps_max - spacing)) / spacing
    if worst > TIME_SPACING_TOLERANCE:
        raise InputError(
            f"time column is not uniformly spaced (steps from {steps_min:.6g} to "
            f"{steps_max:.6g} s, {100 * worst:.2g} % off the mean step; the limit is "
            f"{100 * TIME_SPACING_TOLERANCE:g} %); resample it, or give the sample rate "
            "(rate_hz) and the value columns"
            + ("" if allow_gaps else "; allow_time_gaps reports gaps instead of refusing"),
            source=str(p),
        )
    if allow_gaps:
        return frames, 1.0 / spacing, gaps, (largest_gap if gaps else 0.0), t_first
    return frames, 1.0 / spacing, None, None, t_first


def _csv_blocks(p: Path, layout: CsvLayout, step: int, frames: int) -> Iterator[np.ndarray]:
    """Value columns in blocks of ``step`` rows: exactly the ``frames`` rows validated."""
    cols = list(layout.value_columns)
    pending: list[np.ndarray] = []
    have = 0
    left = frames
    for table, _ in _csv_chunks(p, layout, max(step, 4096)):
        if left <= 0:
            break
        table = table[:left]
        left -= table.shape[0]
        pending.append(table[:, cols])
        have += table.shape[0]
        while have >= step:
            joined = np.concatenate(pending) if len(pending) > 1 else pending[0]
            yield np.ascontiguousarray(joined[:step])
            rest = joined[step:]
            pending = [rest] if rest.shape[0] else []
            have = rest.shape[0]
    if have:
        yield np.ascontiguousarray(np.concatenate(pending))
    if left > 0:
        raise RecordingError(
            f"data ends after {frames - left} of {frames} rows (was the file shortened "
            "while it was read?)",
            source=str(p),
        )
