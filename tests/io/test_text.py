"""Bounded text and TOML reading (piezo.io.text), and the TOML writer (piezo.io.toml)."""

from __future__ import annotations

import math
import tomllib

import pytest
from hypothesis import given
from hypothesis import strategies as st

from piezo.errors import InputError, PiezoError, SpecError
from piezo.io.text import excerpt, parse_toml, printable, read_text, read_toml
from piezo.io.toml import toml_table, toml_value


@given(st.text(max_size=300))
def test_parse_toml_raises_only_piezo_errors(text):
    # Any text: a mapping, or an InputError (never RecursionError or TOMLDecodeError).
    try:
        data = parse_toml(text)
    except InputError:
        return
    assert isinstance(data, dict)


@given(st.integers(min_value=1, max_value=3000), st.sampled_from(["[", "{a = "]))
def test_nesting_is_bounded(depth, opener):
    closer = "]" if opener == "[" else "}"
    text = "x = " + opener * depth + "1" + closer * depth
    if depth <= 32:
        parse_toml(text)
    else:
        with pytest.raises(InputError, match="line 1: arrays or tables nested deeper than 32"):
            parse_toml(text)


def test_dotted_keys_are_bounded_too():
    with pytest.raises(InputError, match="keys nested deeper"):
        parse_toml(".".join(["a"] * 100) + " = 1")


def test_strings_and_comments_do_not_count_as_nesting():
    text = 'a = "[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[["  # [[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[\n'
    assert parse_toml(text) == {"a": "[" * 38}


@given(st.binary(max_size=400))
def test_read_text_decodes_or_names_the_line(tmp_path_factory, data):
    p = tmp_path_factory.mktemp("t") / "f.txt"
    p.write_bytes(data)
    try:
        text = read_text(p)
    except InputError as exc:
        assert str(p) in str(exc)
        assert "line " in exc.message and "not UTF-8" in exc.message
        line = int(exc.message.split()[1].rstrip(":"))
        assert 1 <= line <= data.count(b"\n") + 1
        return
    assert text == data.decode("utf-8").removeprefix("\ufeff")


def test_decode_error_line_number(tmp_path):
    p = tmp_path / "x.csv"
    p.write_bytes(b"".join(b"%d,1\n" % i for i in range(1500)) + b"1,\xe9\n")
    with pytest.raises(InputError, match=r"x.csv: line 1501: not UTF-8 text \(byte 0xe9"):
        read_text(p)


def test_size_bound_and_devices(tmp_path):
    p = tmp_path / "big.toml"
    p.write_bytes(b"#" * 101)
    with pytest.raises(SpecError, match="larger than 100 bytes"):
        read_toml(p, max_bytes=100, error=SpecError)
    with pytest.raises(InputError, match="/dev/zero: cannot read golden response: not a regular"):
        read_text("/dev/zero", what="golden response")
    with pytest.raises(InputError, match="cannot read profile: no such file"):
        read_toml(tmp_path / "missing.toml", what="profile")
    with pytest.raises(InputError, match="cannot read profile: is a directory"):
        read_toml(tmp_path, what="profile")


@given(st.text(max_size=500), st.integers(min_value=5, max_value=80))
def test_excerpt_is_short_and_printable(text, limit):
    out = excerpt(text, limit)
    assert out.isprintable()
    # Quotes, escapes of at most 10 characters per character kept, and the marker.
    assert len(out) <= 2 + limit + 3 + 2 * out.count("\\")


@given(st.text(max_size=300))
def test_printable_shows_every_unprintable_character_as_text(text):
    out = printable(text)
    assert out.isprintable()
    assert printable(out) == out  # nothing left to escape
    # What was printable is kept, in order (letters of any script included).
    rest = iter(out)
    assert all(c in rest for c in text if c.isprintable())
    kept = printable(text, keep_newlines=True)
    assert kept.replace("\n", "").isprintable()
    assert kept.count("\n") == text.count("\n")


scalars = st.one_of(
    st.booleans(),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(allow_nan=False, allow_infinity=False),
    st.text(max_size=40),
)


@given(
    st.dictionaries(
        st.text(min_size=1, max_size=10), st.one_of(scalars, st.lists(scalars, max_size=4))
    )
)
def test_toml_writer_round_trips(values):
    # The written text reads back, with tomllib (not our reader), to the same values.
    text = "\n".join(toml_table("t", values)) + "\n"
    back = tomllib.loads(text)["t"]
    assert back == values


def test_toml_writer_refuses_non_finite():
    with pytest.raises(ValueError, match="cannot write"):
        toml_value(math.nan)
    with pytest.raises(TypeError):
        toml_value(object())


def test_errors_are_piezo_errors():
    assert issubclass(SpecError, PiezoError)
