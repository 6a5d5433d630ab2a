"""The sensor's usable frequency range in a profile (``frequency_range``), in the Chain."""

from __future__ import annotations

import pytest

from piezo.chain.measurement import Chain, ChainSettings, load_profile, resolve_chain
from piezo.errors import InputError, SpecError


def test_range_from_sensor_and_channel_sections(tmp_path):
    # [channel.N] overrides [sensor] for channel N, as every sensor key does; a later
    # profile overrides an earlier one; a profile without the key leaves it unknown.
    path = tmp_path / "bench.toml"
    path.write_text(
        '[sensor]\nfrequency_range = "0.5 Hz .. 10 kHz"\n'
        '[channel.1]\nfrequency_range = ["2 Hz", "4 kHz"]\n',
        encoding="utf-8",
    )
    assert load_profile(path).frequency_range_hz == (0.5, 10000.0)
    chain0, _ = resolve_chain(None, ChainSettings(profile=path), channel=0)
    chain1, _ = resolve_chain(None, ChainSettings(profile=path), channel=1)
    assert chain0.frequency_range_hz == (0.5, 10000.0)
    assert chain1.frequency_range_hz == (2.0, 4000.0)
    rec = tmp_path / "take.wav"
    (tmp_path / "take.toml").write_text('[sensor]\nfrequency_range = "1 .. 2k"\n', "utf-8")
    chain, _ = resolve_chain(rec, ChainSettings(profile=path))
    assert chain.frequency_range_hz == (0.5, 10000.0)  # the given profile wins
    other = tmp_path / "plain.toml"
    other.write_text('[sensor]\nname = "disc"\n', encoding="utf-8")
    assert resolve_chain(None, ChainSettings(profile=other))[0].frequency_range_hz is None


@pytest.mark.parametrize(
    ("value", "message"),
    [
        ('"10 kHz"', r"sensor\.frequency_range must look like 'LOW \.\. HIGH'"),
        ('"10 kHz .. 1 Hz"', "the low end must lie below the high end"),
        ('"1 Hz .. 10 kV"', r"sensor\.frequency_range \(high end\): unknown unit"),
        ("[1, 2, 3]", "must look like"),
    ],
)
def test_malformed_range_is_refused_naming_file_and_key(tmp_path, value, message):
    path = tmp_path / "bad.toml"
    path.write_text(f"[sensor]\nfrequency_range = {value}\n", encoding="utf-8")
    with pytest.raises(SpecError, match=message) as info:
        load_profile(path)
    assert str(path) in str(info.value)


def test_chain_checks_a_range_given_directly():
    assert Chain(frequency_range_hz=(1.0, 8000.0)).frequency_range_hz == (1.0, 8000.0)
    with pytest.raises(InputError, match="frequency_range_hz"):
        Chain(frequency_range_hz=(8000.0, 1.0))
