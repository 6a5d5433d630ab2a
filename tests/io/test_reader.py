"""Reading recordings (piezo.io.reader): every format and subtype, CSV variants, blocks."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_array_equal

from piezo.errors import InputError, RecordingError
from piezo.io.reader import open_recording

# (container format, subtype, bits of an integer code or None for float, file suffix)
FORMATS = [
    ("WAV", "PCM_U8", 8, ".wav"),
    ("WAV", "PCM_16", 16, ".wav"),
    ("WAV", "PCM_24", 24, ".wav"),
    ("WAV", "PCM_32", 32, ".wav"),
    ("WAV", "FLOAT", None, ".wav"),
    ("WAV", "DOUBLE", None, ".wav"),
    ("WAVEX", "PCM_24", 24, ".wav"),  # WAVE_FORMAT_EXTENSIBLE
    ("RF64", "PCM_24", 24, ".wav"),
    ("W64", "PCM_16", 16, ".w64"),
    ("FLAC", "PCM_16", 16, ".flac"),
    ("FLAC", "PCM_24", 24, ".flac"),
]


def exact_samples(rng, frames, channels, bits):
    """Samples that every subtype stores exactly: integer codes / 2^(bits-1).

    soundfile maps an integer code k of an n-bit file to k / 2^(n-1) on reading, so such
    values round-trip bit for bit and the check can be exact.
    """
    if bits is None:
        return rng.uniform(-1, 1, (frames, channels)).astype(np.float32).astype(np.float64)
    top = 2 ** (bits - 1)
    codes = rng.integers(-top, top, (frames, channels))
    return codes / top


@pytest.mark.parametrize(("fmt", "subtype", "bits", "suffix"), FORMATS)
@pytest.mark.parametrize("channels", [1, 3])
def test_round_trip_every_format(tmp_path, rng, fmt, subtype, bits, suffix, channels):
    x = exact_samples(rng, 1001, channels, bits)
    path = tmp_path / f"x{suffix}"
    sf.write(str(path), x, 44100, format=fmt, subtype=subtype)
    rec = open_recording(path)
    assert rec.sample_rate_hz == 44100
    assert rec.frames == 1001
    assert rec.channels == channels
    assert rec.subtype == subtype
    assert rec.is_pcm
    got = np.concatenate(list(rec.blocks(256)))
    assert_array_equal(got, x)


def test_blocks_with_overlap_match_soundfile(tmp_path, rng):
    x = rng.uniform(-1, 1, (5000, 2))
    path = tmp_path / "x.wav"
    sf.write(str(path), x, 48000, subtype="DOUBLE")
    rec = open_recording(path)
    ours = list(rec.blocks(1024, overlap_frames=256))
    ref = list(sf.blocks(str(path), blocksize=1024, overlap=256, dtype="float64", always_2d=True))
    assert len(ours) == len(ref)
    for a, b in zip(ours, ref, strict=True):
        assert_array_equal(a, b)


def test_channel_selection_and_range(tmp_path, rng):
    x = rng.uniform(-1, 1, (100, 3))
    path = tmp_path / "x.wav"
    sf.write(str(path), x, 8000, subtype="DOUBLE")
    rec = open_recording(path)
    got = np.concatenate(list(rec.blocks(64, channels=[2, 0])))
    assert_array_equal(got, x[:, [2, 0]])
    with pytest.raises(InputError, match=r"channel 3 is out of range.*numbered 0 to 2"):
        list(rec.blocks(64, channels=[3]))


@given(
    frames=st.integers(1, 3000),
    block=st.integers(1, 700),
    overlap_frac=st.floats(0, 0.9),
)
@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
def test_blocks_cover_the_file_property(tmp_path, frames, block, overlap_frac):
    """Property: non-overlapping blocks concatenate to the file, for any block size."""
    x = (np.arange(frames * 2).reshape(frames, 2) % 255 - 127) / 128.0
    path = tmp_path / "p.wav"
    sf.write(str(path), x, 8000, subtype="PCM_16")
    rec = open_recording(path)
    assert_array_equal(np.concatenate(list(rec.blocks(block))), x)
    overlap = min(block - 1, int(overlap_frac * block))
    blocks = list(rec.blocks(block, overlap_frames=overlap))
    # Each block starts (block - overlap) frames after the previous one.
    for i, b in enumerate(blocks):
        start = i * (block - overlap)
        assert_array_equal(b, x[start : start + block])


# --- CSV ---------------------------------------------------------------------------------


def write_text(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_csv_with_header_and_time_column(tmp_path):
    t = np.arange(1000) / 2000.0
    lines = ["Time (s),Disc (V),Ref (V)"] + [
        f"{ti:.7f},{np.sin(ti * 100):.6f},{np.cos(ti * 100):.6f}" for ti in t
    ]
    rec = open_recording(write_text(tmp_path / "a.csv", "\n".join(lines) + "\n"))
    assert rec.sample_rate_hz == pytest.approx(2000.0, rel=1e-9)
    assert rec.channel_names == ("Disc (V)", "Ref (V)")
    assert not rec.is_pcm
    got = np.concatenate(list(rec.blocks(333)))
    np.testing.assert_allclose(got[:, 0], np.round(np.sin(t * 100), 6), atol=0)


def test_csv_time_offset_is_kept(tmp_path):
    """Issue 12 §3.16: a scope's pre-trigger starts the time column at -100 µs; the
    recording keeps that time of its first sample (audio files and CSV without a time
    column start at 0)."""
    lines = ["Time (s),Disc (V)"] + [f"{-1e-4 + i * 2e-5:.7f},{i % 3}" for i in range(200)]
    rec = open_recording(write_text(tmp_path / "scope.csv", "\n".join(lines) + "\n"))
    assert rec.start_time_s == pytest.approx(-1e-4, abs=1e-12)  # "-0.0001000" exactly
    assert rec.sample_rate_hz == pytest.approx(50000.0, rel=1e-9)
    plain = open_recording(write_text(tmp_path / "v.csv", "v\n1\n2\n3\n"), rate_hz=10.0)
    assert plain.start_time_s == 0.0
    wav = tmp_path / "a.wav"
    sf.write(wav, np.zeros(100), 8000)
    assert open_recording(wav).start_time_s == 0.0


@pytest.mark.parametrize("delimiter", [",", ";", "\t", " "])
def test_csv_delimiters_are_sniffed(tmp_path, delimiter):
    rows = [delimiter.join(["t", "a"])] + [
        delimiter.join([f"{i / 100:.2f}", f"{(-1) ** i * i}"]) for i in range(50)
    ]
    rec = open_recording(write_text(tmp_path / "d.txt", "\n".join(rows)))
    assert rec.sample_rate_hz == pytest.approx(100.0)
    got = np.concatenate(list(rec.blocks(7)))[:, 0]
    assert_array_equal(got, [(-1) ** i * i for i in range(50)])


def test_csv_scope_preamble_and_columns_by_name_and_index(tmp_path):
    text = (
        "# exported by a bench scope\nModel,XYZ\nSample interval,1e-4\n"
        "TIME,CH1,CH2,CH3\n" + "\n".join(f"{i * 1e-4:.4f},{i},{2 * i},{3 * i}" for i in range(20))
    )
    path = write_text(tmp_path / "scope.csv", text)
    rec = open_recording(path, columns=["CH3", "1"])
    assert rec.sample_rate_hz == pytest.approx(1e4)
    assert rec.channel_names == ("CH3", "CH1")
    got = np.concatenate(list(rec.blocks(6)))
    assert_array_equal(got, np.column_stack([3 * np.arange(20), np.arange(20)]))
    with pytest.raises(InputError, match="no column named 'CH9'; columns are: TIME, CH1"):
        open_recording(path, columns=["CH9"])


def test_csv_single_column_needs_rate(tmp_path):
    path = write_text(tmp_path / "v.csv", "\n".join(str(v) for v in range(10)))
    with pytest.raises(InputError, match="rate_hz"):
        open_recording(path)
    rec = open_recording(path, rate_hz=50.0)
    assert rec.sample_rate_hz == 50.0
    assert rec.frames == 10


def test_csv_non_uniform_time_is_rejected(tmp_path):
    t = np.arange(100) * 1e-3
    t[60:] += 5e-6  # one step 0.5 % long: over the 0.1 % limit
    text = "time,v\n" + "\n".join(f"{a:.7f},0.1" for a in t)
    with pytest.raises(InputError, match="not uniformly spaced"):
        open_recording(write_text(tmp_path / "n.csv", text))


def test_csv_time_jitter_within_tolerance_is_accepted(tmp_path):
    t = np.arange(100) * 1e-3
    t[1::2] += 2e-7  # 0.02 % jitter, under the 0.1 % limit
    text = "time,v\n" + "\n".join(f"{a:.8f},0.1" for a in t)
    rec = open_recording(write_text(tmp_path / "j.csv", text))
    assert rec.sample_rate_hz == pytest.approx(1000.0, rel=1e-3)


@pytest.mark.parametrize("bad", ["nan", "inf", "-inf"])
def test_csv_non_finite_values_are_rejected(tmp_path, bad):
    text = "time,v\n0,1\n0.001,2\n0.002," + bad + "\n0.003,4\n"
    # One policy for every format (piezo.validate.finite_samples): channel and sample
    # index, both 0-based.
    with pytest.raises(InputError, match=r"non-finite value .* channel 0 \('v'\) at sample 2"):
        open_recording(write_text(tmp_path / "x.csv", text))


def test_csv_rate_must_agree_with_time_column(tmp_path):
    text = "time,v\n" + "\n".join(f"{i / 1000},{i}" for i in range(10))
    with pytest.raises(InputError, match="contradicts the time column"):
        open_recording(write_text(tmp_path / "r.csv", text), rate_hz=48000)


@given(
    data=st.lists(
        st.lists(st.floats(-1e6, 1e6, allow_nan=False, width=32), min_size=2, max_size=2),
        min_size=1,
        max_size=60,
    ),
    delimiter=st.sampled_from([",", ";", "\t"]),
    block=st.integers(1, 50),
)
@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
def test_csv_reader_round_trip_property(tmp_path, data, delimiter, block):
    """Property: values written with repr() read back exactly, for any block size."""
    values = np.array(data, dtype=np.float64)
    lines = [delimiter.join(["a", "b"])] + [
        delimiter.join(repr(float(v)) for v in row) for row in values
    ]
    path = write_text(tmp_path / "h.csv", "\n".join(lines) + "\n")
    rec = open_recording(path, rate_hz=10.0)
    assert rec.frames == len(values)
    assert_array_equal(np.concatenate(list(rec.blocks(block))), values)


# --- bad files ---------------------------------------------------------------------------


def test_missing_file(tmp_path):
    with pytest.raises(RecordingError, match="no such file"):
        open_recording(tmp_path / "nope.wav")


def test_directory(tmp_path):
    with pytest.raises(RecordingError, match="is a directory"):
        open_recording(tmp_path)


def test_empty_file(tmp_path):
    (tmp_path / "e.wav").write_bytes(b"")
    with pytest.raises(RecordingError, match=r"empty \(0 bytes\)"):
        open_recording(tmp_path / "e.wav")


def test_text_renamed_wav(tmp_path):
    (tmp_path / "t.wav").write_text("this is not audio\n" * 20)
    with pytest.raises(RecordingError, match="not a readable audio file"):
        open_recording(tmp_path / "t.wav")


def test_zero_frames(tmp_path):
    sf.write(str(tmp_path / "z.wav"), np.zeros((0, 1)), 8000)
    with pytest.raises(RecordingError, match="no samples"):
        open_recording(tmp_path / "z.wav")


def test_truncated_flac_fails_while_reading(tmp_path, rng):
    path = tmp_path / "t.flac"
    sf.write(str(path), rng.uniform(-1, 1, (48000, 1)), 48000, subtype="PCM_16")
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(RecordingError, match=str(path)):
        rec = open_recording(path)
        for _ in rec.blocks(4096):
            pass


def test_csv_gaps_are_refused_or_reported(tmp_path):
    # 1 kHz sampling with rows 700..709 and 1500 missing: two gaps, the longest missing
    # 10 ms (11 steps where 1 was expected).
    t = np.arange(2000) / 1000.0
    keep = np.ones(t.size, bool)
    keep[700:710] = False
    keep[1500] = False
    text = "time,v\n" + "\n".join(f"{a:.6f},{i % 7}" for i, a in enumerate(t[keep]))
    path = write_text(tmp_path / "g.csv", text)
    with pytest.raises(InputError, match="reports gaps instead of refusing"):
        open_recording(path)
    rec = open_recording(path, allow_time_gaps=True)
    assert rec.time_gaps == 2
    assert rec.largest_time_gap_s == pytest.approx(0.010, abs=1e-9)
    assert rec.sample_rate_hz == pytest.approx(1000.0, rel=1e-9)
    assert rec.frames == keep.sum()


def test_prefetched_reader_stays_bounded_and_stops_with_its_caller():
    import threading
    import time

    from piezo.io.reader import prefetched

    made = []
    closed = threading.Event()

    def source():
        try:
            for i in range(1000):
                made.append(i)
                yield np.full(4, float(i))
        finally:
            closed.set()

    blocks = prefetched(source(), depth=2)
    first = [next(blocks)[0] for _ in range(3)]
    time.sleep(0.2)  # give the reader every chance to run ahead
    assert first == [0.0, 1.0, 2.0]
    # At most depth blocks wait, plus the one being offered and the three taken.
    assert len(made) <= 3 + 2 + 1
    blocks.close()
    assert closed.wait(2.0)  # the reader stopped and closed its source


def test_prefetched_blocks_are_the_files_samples_in_order(tmp_path):
    # Ten blocks: read ahead in the reader thread, the blocks come out as soundfile reads
    # them, whole and in order.
    path = tmp_path / "long.flac"
    x = np.random.default_rng(3).uniform(-0.5, 0.5, (10 * 512, 2))
    sf.write(path, x, 8000, subtype="PCM_24")
    expected, _ = sf.read(path, always_2d=True)
    got = np.concatenate(list(open_recording(path).blocks(block_frames=512)))
    assert_array_equal(got, expected)
