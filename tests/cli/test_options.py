"""Chain options with values per channel: the ``N=VALUE`` form, precedence, refusals."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given
from hypothesis import strategies as st

from piezo.cli.options import parse_channel_values
from piezo.errors import InputError

# --- the N=VALUE parser -------------------------------------------------------------------

#: Value text as a user types it: no surrounding blanks (the parser strips them).
_CHARS = st.characters(blacklist_categories=("Cc", "Cs", "Zs", "Zl", "Zp"))
values = st.text(_CHARS, min_size=1, max_size=12)
bare_values = st.text(
    st.characters(blacklist_categories=("Cc", "Cs", "Zs", "Zl", "Zp"), blacklist_characters="="),
    min_size=1,
    max_size=12,
)
channels = st.integers(min_value=0, max_value=10_000)


@given(
    own=st.dictionaries(channels, values, max_size=6),
    every=st.none() | bare_values,
    blanks=st.sampled_from(["", " ", "  "]),
    data=st.data(),
)
def test_any_order_of_channel_values_reads_back(own, every, blanks, data):
    texts = [f"{blanks}{n}{blanks}={blanks}{v}" for n, v in own.items()]
    if every is not None:
        texts.append(every)
    texts = data.draw(st.permutations(texts))
    assert parse_channel_values(texts, option="--gain") == (every, own)


@given(n=channels, value=values, other=values)
def test_a_channel_given_twice_is_refused_naming_the_option(n, value, other):
    with pytest.raises(InputError, match=rf"^--sensitivity: channel {n} is given twice"):
        parse_channel_values([f"{n}={value}", f"{n}={other}"], option="--sensitivity")


@given(first=bare_values, second=bare_values)
def test_two_bare_values_are_refused(first, second):
    with pytest.raises(InputError, match=r"^--gain: two values for every channel"):
        parse_channel_values([first, second], option="--gain")


@given(
    key=st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="="), max_size=6)
    .map(str.strip)
    .filter(lambda k: not (k.isascii() and k.isdigit())),
    value=values,
)
def test_a_key_that_is_no_channel_number_is_refused(key, value):
    with pytest.raises(InputError, match=r"^--quantity: cannot read .*N=VALUE"):
        parse_channel_values([f"{key}={value}"], option="--quantity")


@pytest.mark.parametrize("text", ["-1=10 mV/g", "1.0=10 mV/g", "one=10 mV/g", "=10 mV/g"])
def test_malformed_channel_numbers(text):
    with pytest.raises(InputError, match=r"^--sensitivity: cannot read"):
        parse_channel_values([text], option="--sensitivity")


@pytest.mark.parametrize("text", ["1=", "1 =  ", "  "])
def test_an_empty_value_is_refused(text):
    with pytest.raises(InputError, match=r"^--gain: no value"):
        parse_channel_values([text], option="--gain")


def test_file_names_may_hold_an_equals_sign():
    # Only a channel number before "=" makes a per-channel value of a file option.
    assert parse_channel_values(["./run=3.csv"], option="--response-curve", path=True) == (
        "./run=3.csv",
        {},
    )
    assert parse_channel_values(["1=run=3.csv"], option="--response-curve", path=True) == (
        None,
        {1: "run=3.csv"},
    )


# --- precedence, per channel, through the command line --------------------------------------


@pytest.fixture
def bench(tmp_path):
    """Two channels of constant raw values 0.1 and 0.2 (float WAV: exact), and a sidecar
    with a file-wide sensitivity and one of channel 1."""
    path = tmp_path / "bench.wav"
    sf.write(path, np.tile([0.1, 0.2], (4800, 1)), 48000, subtype="DOUBLE")
    path.with_suffix(".toml").write_text(
        '[sensor]\nsensitivity = "10 mV/Pa"\n\n[channel.1]\nsensitivity = "20 mV/Pa"\n',
        encoding="utf-8",
    )
    return path


def pascals(cli, *args):
    r = cli("info", *args, "--json")
    assert r.code == 0, r.err
    chans = r.json()["channels"]
    return [c["rms_pa"] for c in chans], [
        c["chain"]["provenance"]["sensitivity_v_per_pa"] for c in chans
    ]


# Each value is raw / gain / sensitivity (the chain of docs/profiles.md; full scale 1 V):
# 0.1 V at 10 mV/Pa is 10 Pa, 0.2 V at 20 mV/Pa 10 Pa, at 40 mV/Pa 2.5 and 5 Pa, 0.2 V at
# 50 mV/Pa 4 Pa. The channel's own option beats the bare option, which beats the
# profiles; within a profile [channel.N] beats [sensor].
@pytest.mark.parametrize(
    ("options", "expected", "where"),
    [
        ((), [10.0, 10.0], ["SIDE", "SIDE [channel.1]"]),
        (("--sensitivity", "40 mV/Pa"), [2.5, 5.0], ["option", "option"]),
        (("--sensitivity", "1=50 mV/Pa"), [10.0, 4.0], ["SIDE", "option"]),
        (
            ("--sensitivity", "1=50 mV/Pa", "--sensitivity", "40 mV/Pa"),
            [2.5, 4.0],
            ["option", "option"],
        ),
    ],
)
def test_most_specific_wins_and_options_beat_profiles(cli, bench, options, expected, where):
    values, provenance = pascals(cli, bench, *options)
    assert values == pytest.approx(expected, rel=1e-12)
    side = str(bench.with_suffix(".toml"))
    assert provenance == [w.replace("SIDE", side) for w in where]


def test_a_profile_channel_section_beats_the_sidecar(cli, bench, tmp_path):
    prof = tmp_path / "other.toml"
    prof.write_text('[channel.0]\nsensitivity = "25 mV/Pa"\n', encoding="utf-8")
    values, provenance = pascals(cli, bench, "--profile", prof)
    # 0.1 V at 25 mV/Pa is 4 Pa; channel 1 keeps the sidecar's [channel.1].
    assert values == pytest.approx([4.0, 10.0], rel=1e-12)
    assert provenance == [f"{prof} [channel.0]", f"{bench.with_suffix('.toml')} [channel.1]"]


def test_every_chain_option_takes_channel_values(cli, bench, tmp_path):
    chart = tmp_path / "chart.csv"
    chart.write_text("frequency_hz,relative_db\n10,0\n10000,0\n", encoding="utf-8")
    r = cli(
        "info", bench, "--json", "--no-sidecar",
        "--gain", "1=20 dB", "--full-scale", "0=2 V",
        "--quantity", "1=force", "--sensitivity", "1=2 mV/N", "--sensitivity", "0=10 mV/Pa",
        "--reference", "0=1 uPa", "--response-curve", f"0={chart}",
    )  # fmt: skip
    assert r.code == 0, r.err
    ch0, ch1 = (c["chain"] for c in r.json()["channels"])
    assert (ch0["full_scale_v"], ch0["gain"], ch0["reference_pa"]) == (2.0, 1.0, 1e-6)
    assert (ch1["full_scale_v"], ch1["gain"]) == (1.0, pytest.approx(10.0))
    assert (ch0["quantity"], ch1["quantity"], ch1["unit"]) == ("pressure", "force", "N")
    assert ch0["response_curve"] == str(chart) and ch1["response_curve"] is None
    assert ch0["provenance"]["response_curve"] == "option"
    assert ch1["provenance"]["response_curve"] == "default"
    assert ch1["provenance"]["gain"] == "option" and ch0["provenance"]["gain"] == "default"
    assert ch1["provenance"]["quantity"] == "option"
    # 0.2 raw / 10 (20 dB) / 2 mV/N = 10 N.
    assert r.json()["channels"][1]["rms"] == pytest.approx(10.0, rel=1e-12)


def test_a_channel_option_names_its_channel_over_a_profile_quantity(cli, tmp_path):
    # The profile says every channel is an accelerometer; a pressure sensitivity given
    # for channel 1 (options over profiles) makes channel 1 a pressure channel.
    path = tmp_path / "pair.wav"
    sf.write(path, np.tile([0.1, 0.2], (4800, 1)), 48000, subtype="DOUBLE")
    path.with_suffix(".toml").write_text(
        '[sensor]\nquantity = "acceleration"\nsensitivity = "10 mV/g"\n', encoding="utf-8"
    )
    r = cli("info", path, "--json", "--sensitivity", "1=50 mV/Pa")
    assert r.code == 0, r.err
    ch0, ch1 = r.json()["channels"]
    assert (ch0["unit"], ch1["unit"]) == ("m/s²", "Pa")
    assert ch1["chain"]["provenance"]["quantity"] == "sensitivity unit"
    # A bare option is for every channel, over the profile's quantity too.
    both = cli("info", path, "--json", "--sensitivity", "50 mV/Pa").json()["channels"]
    assert [c["unit"] for c in both] == ["Pa", "Pa"]
    # Both given as options and at odds: refused.
    bad = cli("info", path, "--quantity", "1=force", "--sensitivity", "1=50 mV/Pa")
    assert bad.code == 2
    assert "channel 1: --sensitivity: '50 mV/Pa' is a pressure sensitivity" in bad.err


@pytest.mark.parametrize(
    ("options", "message"),
    [
        (("--sensitivity", "2=10 mV/g"), "--sensitivity for channel 2: the recording has 2"),
        (("--gain", "one=20 dB"), "--gain: cannot read 'one=20 dB'"),
        (("--gain", "1=20 dB", "--gain", "1=6 dB"), "--gain: channel 1 is given twice"),
        (("--sensitivity", "1=12 mX/Pa"), "channel 1: --sensitivity: cannot read"),
    ],
)
def test_bad_channel_values_are_one_line_naming_the_option(cli, bench, options, message):
    r = cli("info", bench, *options)
    assert r.code == 2
    assert r.out == ""
    assert r.err.count("\n") == 1 and "Traceback" not in r.err
    assert message in r.err


def test_every_command_reads_channel_values(cli, bench):
    # levels goes through the same options: channel 1 at 50 mV/Pa reads 4 Pa RMS.
    r = cli("levels", bench, "--json", "--channel", "1", "--sensitivity", "1=50 mV/Pa")
    assert r.code == 0, r.err
    (ch,) = r.json()["channels"]
    # 0.2 V / 50 mV/Pa = 4 Pa of DC, which the Z weighting keeps (IEC 61672-1: Z is flat
    # to 0 Hz): LZeq = 20 lg(4 Pa / 20 µPa) = 106.02 dB.
    assert ch["channel"] == 1
    assert ch["LZeq"] == pytest.approx(20 * np.log10(4.0 / 20e-6), abs=1e-6)
