"""Values of single channels in the library: ``piezo.open(..., channel_values=...)``."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

import piezo
from piezo.chain.measurement import ChainSettings, resolve_chain
from piezo.errors import InputError


@pytest.fixture
def pair(tmp_path):
    path = tmp_path / "pair.wav"
    sf.write(path, np.tile([0.1, 0.2], (480, 1)), 48000, subtype="DOUBLE")
    return path


def test_a_channel_value_overrides_the_value_for_every_channel(pair):
    src = piezo.open(
        pair, gain="20 dB", sensitivity="10 mV/Pa", channel_values={1: {"gain": "0 dB"}}
    )
    block = next(src.blocks())
    # raw / gain / sensitivity: 0.1 / 10 / 0.01 = 1 Pa; 0.2 / 1 / 0.01 = 20 Pa.
    np.testing.assert_allclose(block[0], [1.0, 20.0], rtol=1e-12)
    assert src.provenance_of(0).gain == "option" and src.provenance_of(1).gain == "option"
    assert src.chain_of(1).sensitivity_v_per_unit == pytest.approx(0.01)


def test_the_library_refuses_what_the_cli_refuses(pair):
    with pytest.raises(InputError, match=r"quantity for channel 5: the recording has 2"):
        piezo.open(pair, channel_values={5: {"quantity": "force"}})
    with pytest.raises(InputError, match=r"unknown value 'profile'"):
        piezo.open(pair, channel_values={0: {"profile": "x.toml"}})
    with pytest.raises(InputError, match=r"channel numbers are 0, 1"):
        piezo.open(pair, channel_values={True: {"gain": "6 dB"}})


def test_for_channel_keeps_what_the_channel_does_not_set():
    s = ChainSettings(quantity="force", sensitivity="2 mV/N", channels={0: ChainSettings()})
    chain, prov = resolve_chain(None, s, channel=0)
    assert (chain.quantity, chain.sensitivity_v_per_unit, prov.quantity) == (
        "force",
        pytest.approx(2e-3),
        "option",
    )
